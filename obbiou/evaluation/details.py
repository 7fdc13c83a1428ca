"""Per-row results: one row per detection and one per truth, as pandas DataFrames.

:meth:`Evaluation.detections` and :meth:`Evaluation.truths` call these functions with the
evaluation's match records, outcomes and thresholds; they take plain arrays and know nothing
of the :class:`~obbiou.evaluation.Evaluation` itself.

Columns of the detection table (index ``row``: the row of the detection in the input table,
from 0, rows in input order):

* ``frame``, ``label``, ``score`` — as read;
* ``threshold`` — the IoU threshold the row was judged at;
* ``outcome`` — ``"tp"``, ``"fp"``, ``"ignored"`` (absorbed by an ignore truth, or outside a
  size / range bucket) or ``"capped"`` (beyond ``max_detections`` in its frame, not
  evaluated);
* ``truth`` — input row of the truth it matched (for ``"ignored"``: of the ignore truth that
  absorbed it, if any); ``<NA>`` when none;
* ``iou`` — IoU with that truth (``<NA>`` when none);
* ``best_iou`` — highest IoU with any non-ignore truth of the frame, of any label (``<NA>``
  for capped detections, which are not compared);
* ``cause`` — for a false positive its class in the breakdown
  (:mod:`obbiou.evaluation.breakdown`: ``duplicate``, ``wrong_label``,
  ``poor_localisation``, ``background``); ``<NA>`` otherwise;
* then the extra columns of the input table, when the evaluation holds the input tables.

Columns of the truth table (index ``row``: the row of the truth in the input table):
``frame``, ``label``, ``ignore`` (as read), ``threshold``, ``outcome`` (``"matched"``,
``"missed"``, or ``"ignore"`` for ignore truths and truths outside a bucket), ``detection``
(input row of the detection that took it; ``<NA>`` when none), ``iou`` (with that detection),
``best_iou`` (highest IoU with any evaluated detection of the frame, any label), ``cause``
(for a missed truth its class: ``crowded``, ``wrong_label``, ``poor_localisation``,
``not_detected``; ``<NA>`` otherwise), with lidar points ``points`` (points inside the
truth) and ``set_aside`` (made an ignore truth by ``min_points``), then the extra columns.

Matched by centre distance (``distance=`` of :func:`~obbiou.evaluation.evaluate`), ``iou``
is ``distance`` (metres, to the matched row) and ``best_iou`` is ``nearest`` (the nearest
row of the frame; ``<NA>`` when none lies within the largest distance threshold).

An extra column whose name is one of these gets the suffix ``_input`` (with a warning).
"""

from __future__ import annotations

import warnings
from pathlib import Path
from typing import Any

import numpy as np

from obbiou.errors import InvalidInput
from obbiou.evaluation import breakdown as _bd
from obbiou.evaluation.matching import CAPPED, FP, IGNORED, TP

__all__ = [
    "detection_table",
    "truth_table",
    "details_paths",
    "write_details",
    "DETECTION_OUTCOMES",
    "TRUTH_OUTCOMES",
]

#: Outcome names of the detection table, indexed by the outcome codes (FP, TP, IGNORED, CAPPED).
DETECTION_OUTCOMES = {FP: "fp", TP: "tp", IGNORED: "ignored", CAPPED: "capped"}
_OUTCOME_NAMES = np.empty(max(DETECTION_OUTCOMES) + 1, dtype=object)  # name by code
for _code, _name in DETECTION_OUTCOMES.items():
    _OUTCOME_NAMES[_code] = _name

#: Outcome names of the truth table.
TRUTH_OUTCOMES = ("matched", "missed", "ignore")


def _input_order(rows: np.ndarray, what: str) -> np.ndarray:
    """The permutation that puts the records' rows in input order; an error if rows repeat."""
    order = np.argsort(rows, kind="stable")
    if len(rows) > 1 and np.any(np.diff(rows[order]) == 0):
        raise InvalidInput(
            "records",
            f"the match records number some {what} rows twice: records matched in parts "
            "need the rows of the whole input (truth_rows=, detection_rows= of match_frames)",
        )
    return order


def _nullable(values: np.ndarray, present: np.ndarray, dtype: str) -> Any:
    """``values`` as a pandas nullable array, ``<NA>`` where not ``present``."""
    import pandas as pd

    array = pd.array(np.where(present, values, 0), dtype=dtype)
    array[~present] = pd.NA
    return array


def _with_extras(table: Any, extra: dict[str, np.ndarray] | None, rows: np.ndarray) -> Any:
    if not extra:
        return table
    for name, values in extra.items():
        column = name
        if column in table.columns:
            column = f"{name}_input"
            warnings.warn(
                f"input column {name!r} has the name of a result column: shown as {column!r}",
                stacklevel=4,
            )
        table[column] = np.asarray(values)[rows]
    return table


def _value_names(records: Any) -> tuple[str, str]:
    """Column names of the per-pair value: IoU, or centre distance when matched by it."""
    return ("distance", "nearest") if records.criterion == "distance" else ("iou", "best_iou")


def _closeness(records, same, other, threshold, floor) -> tuple:
    """Best values, thresholds and floor as "higher is closer" for the breakdowns' tests:
    distances negated, the poor-localisation band within the largest distance threshold
    (as :meth:`Evaluation.false_positives` does)."""
    if records.criterion != "distance":
        return same, other, threshold, floor
    widest = float(np.max(records.thresholds)) if len(records.thresholds) else 0.0
    return -same, -other, -np.asarray(threshold), -widest


def _best(records: Any, live: np.ndarray, truths: bool = False) -> tuple[np.ndarray, np.ndarray]:
    """Highest IoU (or nearest distance) to any pair of the frame, and where it is defined."""
    r = records
    same = r.truth_best_same if truths else r.det_best_same
    other = r.truth_best_other if truths else r.det_best_other
    if r.criterion != "distance":
        return np.maximum(same, other), live
    with np.errstate(invalid="ignore"):
        best = np.fmin(same, other)  # NaN: no pair; inf: nothing within range
    return np.where(np.isfinite(best), best, 0.0), live & np.isfinite(best)


def detection_table(
    records: Any,
    outcome: np.ndarray,
    column: np.ndarray,
    threshold: np.ndarray,
    truth_index: np.ndarray,
    floor: float,
    extra: dict[str, np.ndarray] | None = None,
) -> Any:
    """One row per detection (see the module docstring for the columns).

    Parameters
    ----------
    records : MatchRecords
        The records (any order; rows are put in input order by ``det_row``).
    outcome : (n, K) int8
        Outcome per detection and threshold column (bucket rules applied).
    column, threshold : (n,)
        Per detection, the threshold column to report and its threshold.
    truth_index : (n, K) int64
        Index into the records' truths of the matched (or absorbing) truth, -1 if none.
    floor : float
        The breakdown's localisation floor.
    extra : dict, optional
        Extra input columns, indexed by input row.

    Examples
    --------
    Through :meth:`Evaluation.detections`: a hit and a duplicate of one truth.

    >>> from obbiou.evaluation import evaluate
    >>> box = {"cx": [0.0], "cy": [0.0], "width": [4.0], "height": [2.0], "angle": [0.0]}
    >>> dets = {"frame": [1, 1], "label": ["van"] * 2, "score": [0.4, 0.9],
    ...         **{k: v * 2 for k, v in box.items()}}
    >>> evaluate({"frame": [1], "label": ["van"], **box}, dets).detections()[
    ...     ["score", "outcome", "truth", "cause"]]
         score outcome  truth      cause
    row
    0      0.4      fp   <NA>  duplicate
    1      0.9      tp      0       <NA>
    """
    import pandas as pd

    r = records
    n = r.n_detections
    rows = np.arange(n)
    out = outcome[rows, column] if n else np.zeros(0, dtype=np.int8)
    ti = truth_index[rows, column] if n else np.zeros(0, dtype=np.int64)
    has_truth = ti >= 0
    tsafe = np.maximum(ti, 0)
    truth_row = r.truth_row[tsafe] if r.n_truths else np.zeros(n, dtype=np.int64)
    iou = r.det_iou[rows, column] if n else np.zeros(0)
    same, other, t, floor = _closeness(r, r.det_best_same, r.det_best_other, threshold, floor)
    cls = _bd.classify_false_positives(out == FP, same, other, t, floor)
    names = np.array(_bd.FP_CLASSES + (None,), dtype=object)
    live = out != CAPPED
    best, has_best = _best(r, live)
    value, nearest = _value_names(r)
    order = _input_order(r.det_row, "detection")
    table = pd.DataFrame(
        {
            "frame": r.det_frame,
            "label": r.det_label.astype(object),
            "score": r.det_score,
            "threshold": np.asarray(threshold, dtype=np.float64),
            "outcome": _OUTCOME_NAMES[out.astype(np.int64)],
            "truth": _nullable(truth_row, has_truth, "Int64"),
            value: _nullable(iou, has_truth, "Float64"),
            nearest: _nullable(best, has_best, "Float64"),
            "cause": pd.array(names[cls], dtype="string"),
        },
        index=pd.Index(r.det_row, name="row"),
    ).iloc[order]
    return _with_extras(table, extra, r.det_row[order])


def truth_table(
    records: Any,
    positive: np.ndarray,
    column: np.ndarray,
    threshold: np.ndarray,
    det_outcome: np.ndarray,
    det_column: np.ndarray,
    truth_index: np.ndarray,
    floor: float,
    extra: dict[str, np.ndarray] | None = None,
) -> Any:
    """One row per truth (see the module docstring for the columns).

    ``positive`` marks the truths that count (not ignore, inside the bucket); ``column`` /
    ``threshold`` give each truth's threshold column; ``det_outcome`` (the records' own
    outcomes), ``det_column`` and ``truth_index`` tell which detection took which truth.

    Examples
    --------
    >>> from obbiou.evaluation import evaluate
    >>> box = {"cx": [0.0, 9.0], "cy": [0.0, 0.0], "width": [4.0] * 2, "height": [2.0] * 2,
    ...        "angle": [0.0] * 2}
    >>> truth = {"frame": [1, 1], "label": ["van", "van"], **box}
    >>> dets = {"frame": [1], "label": ["van"], "score": [0.9],
    ...         **{k: v[:1] for k, v in box.items()}}
    >>> evaluate(truth, dets).truths()[["outcome", "detection", "iou", "cause"]]
        outcome  detection  iou         cause
    row
    0   matched          0  1.0          <NA>
    1    missed       <NA> <NA>  not_detected
    """
    import pandas as pd

    r = records
    m, n = r.n_truths, r.n_detections
    taken_by = np.full(m, -1, dtype=np.int64)
    taken_iou = np.zeros(m)
    if n and m:
        d = np.arange(n)
        k = det_column
        hit = det_outcome[d, k] == TP
        taken_by[truth_index[d[hit], k[hit]]] = r.det_row[hit]
        taken_iou[truth_index[d[hit], k[hit]]] = r.det_iou[d[hit], k[hit]]
    matched = r.truth_matched[np.arange(m), column] if m else np.zeros(0, dtype=bool)
    state = np.where(~positive, 2, np.where(matched, 0, 1))
    is_miss = state == 1
    same, other, t, floor = _closeness(r, r.truth_best_same, r.truth_best_other, threshold, floor)
    cls = _bd.classify_misses(is_miss, same, other, t, floor)
    best, has_best = _best(r, np.ones(m, dtype=bool), truths=True)
    value, nearest = _value_names(r)
    names = np.array(_bd.MISS_CLASSES + (None,), dtype=object)
    outcomes = np.array(TRUTH_OUTCOMES, dtype=object)
    has_det = taken_by >= 0
    order = _input_order(r.truth_row, "truth")
    table = pd.DataFrame(
        {
            "frame": r.truth_frame,
            "label": r.truth_label.astype(object),
            "ignore": r.truth_ignore.astype(bool),
            "threshold": np.asarray(threshold, dtype=np.float64),
            "outcome": outcomes[state],
            "detection": _nullable(taken_by, has_det, "Int64"),
            value: _nullable(taken_iou, has_det, "Float64"),
            nearest: _nullable(best, has_best, "Float64"),
            "cause": pd.array(names[cls], dtype="string"),
        },
        index=pd.Index(r.truth_row, name="row"),
    )
    if m and (r.truth_points >= 0).any():  # lidar points were counted
        table["points"] = r.truth_points
        table["set_aside"] = r.truth_set_aside.astype(bool)
    table = table.iloc[order]
    return _with_extras(table, extra, r.truth_row[order])


def details_paths(path: Any) -> tuple[Path, Path]:
    """The two files :func:`write_details` writes for ``path``: ``.detections`` and
    ``.truths`` before the suffix, which names the format (CSV, Parquet or JSON Lines).

    Examples
    --------
    >>> [p.name for p in details_paths("runs/harbour.csv")]
    ['harbour.detections.csv', 'harbour.truths.csv']
    >>> details_paths("rows.xlsx")
    Traceback (most recent call last):
    ...
    obbiou.errors.InvalidTable: rows.xlsx: unknown table format '.xlsx'; expected .csv, .parquet
    (.pq) or .jsonl (.ndjson)
    """
    from obbiou.tables import table_format

    table_format(path)  # an unknown suffix fails here, before any work
    p = Path(path)
    return p.with_name(f"{p.stem}.detections{p.suffix}"), p.with_name(f"{p.stem}.truths{p.suffix}")


def write_details(evaluation: Any, path: Any, iou: float | None = None) -> tuple[Path, Path]:
    """Write :meth:`Evaluation.detections` and :meth:`Evaluation.truths` to the two files of
    :func:`details_paths`; the index becomes the first column, ``row``. Undefined values
    (``<NA>``) are empty cells in CSV and nulls in Parquet and JSON Lines.

    Examples
    --------
    >>> import os, tempfile
    >>> from obbiou.evaluation import evaluate
    >>> box = {"cx": [0.0], "cy": [0.0], "width": [4.0], "height": [2.0], "angle": [0.0]}
    >>> ev = evaluate({"frame": [1], "label": ["van"], **box},
    ...               {"frame": [1], "label": ["van"], "score": [0.9], **box})
    >>> d, t = write_details(ev, os.path.join(tempfile.mkdtemp(), "rows.csv"))
    >>> print(open(d).read())
    row,frame,label,score,threshold,outcome,truth,iou,best_iou,cause
    0,1,van,0.9,0.5,tp,0,1.0,1.0,
    <BLANKLINE>
    """
    from obbiou.tables import write_table

    dpath, tpath = details_paths(path)
    write_table(evaluation.detections(iou).reset_index(), dpath)
    write_table(evaluation.truths(iou).reset_index(), tpath)
    return dpath, tpath
