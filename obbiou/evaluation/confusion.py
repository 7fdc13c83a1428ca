"""Which label was taken for which: a confusion table from matching with the labels ignored.

The detections are matched again at one IoU threshold ``t`` by the protocol's greedy rule
with every label replaced by one (the same kernel, :func:`~obbiou.evaluation.match_frames`):
per frame, detections in descending score (ties: input order) each take the unmatched
non-ignore truth of highest IoU >= t (ties: the earlier truth), whatever the two labels.
Then:

* a detection that took a truth counts in the cell (truth's label, detection's label);
* a detection that took none counts in the row ``(background)``: false alarms and
  duplicates (a second detection of a truth already taken) alike;
* a non-ignore truth that no detection took counts in the column ``(missed)``;
* ignore truths have no row. As in the protocol, a detection that takes no truth but has
  IoU >= t with an ignore truth (of any label) is neither matched nor background: it is
  left out and counted in ``table.attrs["ignored"]``;
* detections beyond ``max_detections`` in their frame are left out too
  (``table.attrs["capped"]``), the same ones as in the evaluation.

The corner cell (``(background)``, ``(missed)``) is always 0. Each row of a truth label
sums to its non-ignore truths, and each column of a detected label, plus its ignored and
capped detections, to its detections.
"""

from __future__ import annotations

from dataclasses import replace
from typing import Any

import numpy as np

from obbiou.errors import InvalidInput
from obbiou.evaluation.matching import CAPPED, IGNORED, TP, match_frames, sorted_codes
from obbiou.tables import Table, comparable_frame_ids

__all__ = ["BACKGROUND", "MISSED", "confusion_table"]

#: Name of the row of detections that took no truth.
BACKGROUND = "(background)"
#: Name of the column of truths that no detection took.
MISSED = "(missed)"


def _truth_index(records: Any) -> np.ndarray:
    """Input index of the truth each detection took (-1: none), from (frame, rank)."""
    n = records.n_detections
    dframe, tframe = comparable_frame_ids([records.det_frame, records.truth_frame])
    _, codes = sorted_codes(np.concatenate([dframe, tframe]))
    dcode, tcode = codes[:n], codes[n:]
    nframes = int(codes.max()) + 1 if len(codes) else 0
    order = np.lexsort((records.truth_rank, tcode))
    ptr = np.r_[0, np.cumsum(np.bincount(tcode, minlength=nframes))].astype(np.int64)
    rank = records.det_truth[:, 0]
    taken = records.det_outcome[:, 0] == TP
    out = np.full(n, -1, dtype=np.int64)
    out[taken] = order[ptr[dcode[taken]] + rank[taken]]
    return out


def confusion_table(
    truth: Table,
    detections: Table,
    labels: tuple[str, ...],
    threshold: float,
    *,
    max_detections: int | None = None,
    criterion: str = "iou",
) -> Any:
    """Truth label x detected label counts at ``threshold`` (see the module docstring).

    ``criterion`` decides a match as in :func:`~obbiou.evaluation.match_frames` (IoU, BEV
    IoU or centre distance).

    Parameters
    ----------
    truth, detections : Table
        The validated input tables.
    labels : tuple of str
        Row and column labels (all labels of the evaluation, in its order).
    threshold : float
        IoU threshold in (0, 1].
    max_detections : int, optional
        The evaluation's cap per frame.

    Returns
    -------
    pandas.DataFrame
        Index ``truth`` (labels, then ``(background)``), columns ``detected`` (labels, then
        ``(missed)``), int64 counts; ``attrs`` holds ``threshold``, ``ignored``, ``capped``.

    Examples
    --------
    A crane detected as a vessel, a vessel found, a false alarm and a missed container
    (invented harbour data, through :meth:`Evaluation.confusion`):

    >>> from obbiou.evaluation import evaluate
    >>> box = {"cx": [0.0, 10.0, 20.0], "cy": [0.0] * 3, "width": [4.0] * 3,
    ...        "height": [2.0] * 3, "angle": [0.0] * 3}
    >>> truth = {"frame": [0] * 3, "label": ["crane", "vessel", "container"], **box}
    >>> dets = {"frame": [0] * 3, "label": ["vessel", "vessel", "vessel"],
    ...         "score": [0.9, 0.8, 0.7], **box, "cy": [0.0, 0.0, 40.0]}
    >>> evaluate(truth, dets).confusion()
    detected      container  crane  vessel  (missed)
    truth
    container             0      0       0         1
    crane                 0      0       1         0
    vessel                0      0       1         0
    (background)          0      0       1         0
    """
    import pandas as pd

    for name in (BACKGROUND, MISSED):
        if name in labels:
            raise InvalidInput("label", f"the label {name!r} is reserved in the confusion table")
    one = np.full(len(truth), "*", dtype=object)
    records = match_frames(
        replace(truth, label=one),
        replace(detections, label=np.full(len(detections), "*", dtype=object)),
        thresholds=[threshold],
        max_detections=max_detections,
        criterion=criterion,
    )
    index = {lab: i for i, lab in enumerate(labels)}
    nl = len(labels)
    dlab = np.array([index[str(v)] for v in detections.label], dtype=np.int64)
    tlab = np.array([index[str(v)] for v in truth.label], dtype=np.int64)
    counts = np.zeros((nl + 1, nl + 1), dtype=np.int64)
    taken = _truth_index(records)
    outcome = records.det_outcome[:, 0]
    hit = taken >= 0
    np.add.at(counts, (tlab[taken[hit]], dlab[hit]), 1)
    unmatched = (outcome != TP) & (outcome != IGNORED) & (outcome != CAPPED)
    np.add.at(counts, (nl, dlab[unmatched]), 1)
    missed = ~truth.ignore & ~records.truth_matched[:, 0]
    np.add.at(counts, (tlab[missed], nl), 1)
    table = pd.DataFrame(
        counts,
        index=pd.Index([*labels, BACKGROUND], name="truth", dtype=object),
        columns=pd.Index([*labels, MISSED], name="detected", dtype=object),
    )
    table.attrs.update(
        threshold=float(threshold),
        ignored=int((outcome == IGNORED).sum()),
        capped=int((outcome == CAPPED).sum()),
    )
    return table
