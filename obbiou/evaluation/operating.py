"""Operating points: precision, recall and F1 per label when only detections scoring at least
a cut are kept, and the cut with the highest F1.

Why no re-matching is needed: matching is greedy in descending score (per frame and label),
so the decision for a detection never depends on detections scoring lower. Keeping only the
detections with score >= ``cut`` therefore leaves every kept detection's outcome as it was
(the ``max_detections`` cap is by score too, so it keeps the same detections above the cut).
The numbers come straight from the outcomes of the evaluation.

For a label at one IoU threshold, with the kept (evaluated, not capped) detections:

* ``tp``, ``fp``, ``ignored`` — their outcomes; ``detections = tp + fp + ignored``;
* ``missed = truths - tp`` (``truths``: the non-ignored truths, all of them: a cut drops
  detections, never truths);
* ``precision = tp / (tp + fp)``, undefined (``<NA>``) when nothing is kept;
* ``recall = tp / truths``, undefined when the label has no non-ignored truths;
* ``f1 = 2 tp / (2 tp + fp + missed)`` — the harmonic mean of precision and recall, written
  so that it is defined (0) when precision is undefined but truths exist; undefined only
  when nothing is kept and there are no truths.

The best cut (:func:`best_cut`) is searched among the scores of the label's TP and FP
detections (any other cut keeps the same TPs and FPs as the next such score above it, or
none); of several cuts with the same highest F1 the highest score is reported (the fewest
detections kept). A label without TP or FP detections has no cut to report: ``score`` is
``<NA>`` and the counts are those of keeping nothing.
"""

from __future__ import annotations

import math
from typing import Any, NamedTuple

import numpy as np

from obbiou.evaluation.matching import FP, IGNORED, TP

__all__ = ["OperatingPoint", "at_cut", "best_cut", "operating_table", "operating_text"]

COLUMNS = (
    "threshold",
    "score",
    "detections",
    "tp",
    "fp",
    "ignored",
    "missed",
    "truths",
    "precision",
    "recall",
    "f1",
)


class OperatingPoint(NamedTuple):
    """The numbers of one label at one score cut (see the module docstring)."""

    threshold: float
    score: float | None
    detections: int
    tp: int
    fp: int
    ignored: int
    missed: int
    truths: int
    precision: float | None
    recall: float | None
    f1: float | None


def _point(threshold: float, cut: float | None, tp: int, fp: int, ign: int, npos: int):
    missed = npos - tp
    return OperatingPoint(
        float(threshold),
        None if cut is None else float(cut),
        tp + fp + ign,
        tp,
        fp,
        ign,
        missed,
        npos,
        tp / (tp + fp) if tp + fp else None,
        tp / npos if npos else None,
        2 * tp / (2 * tp + fp + missed) if 2 * tp + fp + missed else None,
    )


def at_cut(
    scores: np.ndarray, outcome: np.ndarray, npos: int, cut: float, threshold: float
) -> OperatingPoint:
    """The operating point of one label when detections with score >= ``cut`` are kept.

    ``scores`` and ``outcome`` (codes TP, FP, IGNORED, CAPPED) of the label's detections,
    ``npos`` its non-ignored truths.

    Examples
    --------
    Scores 0.9 (TP), 0.8 (FP), 0.7 (TP), 3 truths, cut 0.75: 1 TP, 1 FP, 2 missed.

    >>> p = at_cut(np.array([0.9, 0.8, 0.7]), np.array([TP, FP, TP]), 3, 0.75, 0.5)
    >>> p.tp, p.fp, p.missed, p.precision, round(p.recall, 4), p.f1
    (1, 1, 2, 0.5, 0.3333, 0.4)

    A cut above every score keeps nothing: precision undefined, F1 0.

    >>> p = at_cut(np.array([0.9]), np.array([TP]), 1, 0.95, 0.5)
    >>> p.detections, p.precision, p.recall, p.f1
    (0, None, 0.0, 0.0)
    """
    kept = np.asarray(scores) >= cut
    out = np.asarray(outcome)[kept]
    return _point(
        threshold,
        cut,
        int((out == TP).sum()),
        int((out == FP).sum()),
        int((out == IGNORED).sum()),
        npos,
    )


def best_cut(
    scores: np.ndarray, outcome: np.ndarray, npos: int, threshold: float
) -> OperatingPoint:
    """The cut (a score of a TP or FP detection) with the highest F1; ties: highest score.

    Examples
    --------
    Scores 0.9 (TP), 0.8 (FP), 0.7 (TP), 0.6 (FP), 2 truths: F1 is 2/3 at the cut 0.9
    (1 TP, 0 FP, 1 missed: 2 / 3) and 0.8 at the cut 0.7 (2 TP, 1 FP: 4 / 5).

    >>> p = best_cut(np.array([0.9, 0.8, 0.7, 0.6]), np.array([TP, FP, TP, FP]), 2, 0.5)
    >>> p.score, p.tp, p.fp, p.f1
    (0.7, 2, 1, 0.8)

    No detections: no cut to report.

    >>> best_cut(np.zeros(0), np.zeros(0, np.int8), 4, 0.5)[:2]
    (0.5, None)
    """
    scores = np.asarray(scores, dtype=np.float64)
    outcome = np.asarray(outcome)
    ranked = (outcome == TP) | (outcome == FP)
    s = scores[ranked]
    if not len(s):
        return at_cut(scores, outcome, npos, math.inf, threshold)._replace(score=None)
    order = np.argsort(-s, kind="stable")
    s = s[order]
    tp = np.cumsum(outcome[ranked][order] == TP)
    fp = np.arange(1, len(s) + 1) - tp
    last = np.r_[np.flatnonzero(np.diff(s) != 0), len(s) - 1]  # last row of each tied score
    f1 = 2 * tp[last] / (tp[last] + fp[last] + npos)  # equal fractions give equal floats
    cut = s[last][int(np.argmax(f1))]  # argmax: the first, that is the highest score
    return at_cut(scores, outcome, npos, cut, threshold)


def operating_table(points: dict[str, OperatingPoint]) -> Any:
    """A DataFrame (index ``label``) of operating points; ``<NA>`` where undefined."""
    import pandas as pd

    data = {c: [getattr(p, c) for p in points.values()] for c in COLUMNS}
    table = pd.DataFrame(index=pd.Index(list(points), name="label", dtype=object))
    for c in COLUMNS:
        if c in ("threshold",):
            table[c] = np.asarray(data[c], dtype=np.float64)
        elif c in ("score", "precision", "recall", "f1"):
            table[c] = pd.array(data[c], dtype="Float64")
        else:
            table[c] = np.asarray(data[c], dtype=np.int64)
    return table


def as_dict(table: Any) -> dict[str, dict[str, Any]]:
    """JSON-safe form of an operating-point table: label -> column -> value (None if
    undefined).

    Examples
    --------
    >>> as_dict(operating_table({"crane": _point(0.5, 0.8, 1, 1, 0, 2)}))["crane"]["f1"]
    0.5
    """
    import pandas as pd

    out: dict[str, dict[str, Any]] = {}
    for label, row in table.iterrows():
        values = {}
        for c in COLUMNS:
            v = row[c]
            if pd.isna(v):
                values[c] = None
            elif c in ("threshold", "score", "precision", "recall", "f1"):
                values[c] = float(v)
            else:
                values[c] = int(v)
        out[str(label)] = values
    return out


def operating_text(table: Any, title: str) -> str:
    """The table as aligned text, undefined values as ``n/a``.

    Examples
    --------
    >>> print(operating_text(operating_table({"crane": _point(0.5, 0.8, 1, 1, 0, 2)}),
    ...                      "at score >= 0.8"))
    Operating points at score >= 0.8
    label  IoU  score  kept  TP  FP  ign  missed  precision  recall     F1
    crane  0.5 0.8000     2   1   1    0       1     0.5000  0.5000 0.5000
    """
    head = ("label", "IoU", "score", "kept", "TP", "FP", "ign", "missed", "precision", "recall")
    rows = [[*head, "F1"]]
    for label, v in as_dict(table).items():

        def num(x):
            return "n/a" if x is None else f"{x:.4f}"

        rows.append(
            [
                label,
                f"{v['threshold']:g}",
                num(v["score"]),
                str(v["detections"]),
                str(v["tp"]),
                str(v["fp"]),
                str(v["ignored"]),
                str(v["missed"]),
                num(v["precision"]),
                num(v["recall"]),
                num(v["f1"]),
            ]
        )
    width = [max(len(r[i]) for r in rows) for i in range(len(rows[0]))]
    lines = [f"Operating points {title}"]
    for r in rows:
        cells = [r[0].ljust(width[0])] + [c.rjust(w) for c, w in zip(r[1:], width[1:], strict=True)]
        lines.append(" ".join(cells).rstrip())
    return "\n".join(lines)
