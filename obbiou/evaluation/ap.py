"""Precision/recall curves and average precision (AP) from a ranked list of outcomes.

A ranking is a sequence of detections in descending score, each a true positive (TP) or a
false positive (FP), plus the number of positives (non-ignored truths) ``npos``. After the
i-th detection, precision ``p_i = TP_i / i`` and recall ``r_i = TP_i / npos``.

Variants (``kind``):

* ``"all-points"`` — area under the monotone precision envelope
  ``p̂(r) = max {p_i : r_i >= r}``: ``AP = sum_i (r_i - r_{i-1}) p̂(r_i)``, ``r_0 = 0``
  (Everingham et al., IJCV 2010, and the later challenge years).
* ``"11-point"`` — ``AP = (1/11) sum_{r in {0, 0.1, ..., 1}} p̂(r)``, ``p̂(r) = 0`` above the
  highest recall reached (Everingham et al., IJCV 2010).
* ``"101-point"`` — the envelope sampled at recall 0, 0.01, ..., 1 (common practice in current
  detection benchmarks, no source).
* ``recall_points(N)`` — the envelope sampled at N evenly spaced recall levels
  ``q / (N - 1)``, q = 0 .. N-1 (N >= 2).
* ``"step"`` — the plain step sum ``sum_i (r_i - r_{i-1}) p_i`` without the envelope (equals
  scikit-learn's ``average_precision_score`` when every positive is retrieved and scores
  are distinct); for cross-checks.

Edge cases: no positives (``npos == 0``) make AP undefined: these functions return ``None``
(never a silent NaN), and the evaluation leaves such a label out of mAP. No detections but
positives give AP 0.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from obbiou.errors import InvalidInput

__all__ = [
    "Curve",
    "curve",
    "average_precision",
    "weighted_average_precision",
    "ap_kind",
    "KINDS",
]

KINDS = ("all-points", "11-point", "101-point", "step")


class Curve(NamedTuple):
    """Precision and recall after each ranked detection, and its score."""

    precision: np.ndarray
    recall: np.ndarray
    scores: np.ndarray


def curve(tp: np.ndarray, npos: int, scores: np.ndarray | None = None) -> Curve:
    """Precision/recall after each detection of a ranking.

    Parameters
    ----------
    tp : array_like of bool
        Outcome of each detection in ranking order (True: TP, False: FP).
    npos : int
        Number of positives (non-ignored truths); > 0.
    scores : array_like, optional
        Scores in ranking order, passed through.

    Examples
    --------
    >>> c = curve([True, False, True], npos=4)
    >>> c.precision.round(3).tolist(), c.recall.tolist()
    ([1.0, 0.5, 0.667], [0.25, 0.25, 0.5])
    """
    tp = np.asarray(tp, dtype=bool)
    ctp = np.cumsum(tp)
    rank = np.arange(1, len(tp) + 1)
    precision = ctp / rank if len(tp) else np.zeros(0)
    recall = ctp / npos if npos > 0 else np.full(len(tp), np.nan)
    s = np.zeros(len(tp)) if scores is None else np.asarray(scores, dtype=np.float64)
    return Curve(precision.astype(np.float64), recall.astype(np.float64), s)


def ap_kind(kind: str | None = "all-points", recall_points: int | None = None) -> tuple[int, int]:
    """Kernel code ``(kind, npoints)`` of an AP variant (0 all-points, 1 step, 2 sampled).

    Examples
    --------
    >>> ap_kind("11-point"), ap_kind("all-points"), ap_kind(None, recall_points=41)
    ((2, 11), (0, 0), (2, 41))
    """
    if recall_points is not None:
        n = int(recall_points)
        if n != recall_points or n < 2:
            raise InvalidInput("recall_points", f"expected an integer >= 2, got {recall_points!r}")
        return 2, n
    if kind == "all-points":
        return 0, 0
    if kind == "step":
        return 1, 0
    if kind == "11-point":
        return 2, 11
    if kind == "101-point":
        return 2, 101
    raise InvalidInput(
        "ap",
        f"unknown AP kind {kind!r}; expected one of {', '.join(map(repr, KINDS))} "
        "(or recall_points=N)",
    )


def average_precision(
    tp: np.ndarray, npos: int, *, kind: str = "all-points", recall_points: int | None = None
) -> float | None:
    """AP of a ranking (see the module docstring for the variants).

    Parameters
    ----------
    tp : array_like of bool
        Outcome of each detection in descending score (True: TP). Ignored detections are
        left out by the caller.
    npos : int
        Number of positives; the TPs must not exceed it.
    kind : str
        ``"all-points"``, ``"11-point"``, ``"101-point"`` or ``"step"``.
    recall_points : int, optional
        Sample the envelope at this many recall levels instead (overrides ``kind``).

    Returns
    -------
    float or None
        ``None`` when ``npos == 0`` (undefined); 0.0 with positives and no detections.

    Examples
    --------
    >>> average_precision([True, False, True], npos=4)  # 0.25 * 1 + 0.25 * 2/3
    0.41666666666666663
    >>> average_precision([True, False, True], npos=4, kind="step")  # no envelope here
    0.41666666666666663
    >>> average_precision([False, True], npos=1, kind="11-point")  # p̂ = 1/2 at all 11 levels
    0.5
    >>> average_precision([], npos=3), average_precision([True], npos=0)
    (0.0, None)
    """
    code, npoints = ap_kind(kind, recall_points)
    tp = np.asarray(tp, dtype=bool)
    if npos <= 0:
        return None
    if int(tp.sum()) > npos:
        raise InvalidInput("tp", f"{int(tp.sum())} true positives exceed npos={npos}")
    if not tp.any():
        return 0.0
    c = curve(tp, npos)
    p = c.precision[tp]  # precision peaks only at TPs
    if code == 1:
        return float(np.sum(p) / npos)
    envelope = np.maximum.accumulate(p[::-1])[::-1]
    if code == 0:
        return float(np.sum(envelope) / npos)
    # Recall levels q/(npoints-1) compared as q*npos <= TP*(npoints-1): exact in integers.
    q = np.arange(npoints)
    ctp = np.cumsum(tp)[tp]  # TP count at each TP: 1, 2, ...
    first = np.searchsorted(ctp * (npoints - 1), q * npos, side="left")
    sampled = np.where(first < len(envelope), envelope[np.minimum(first, len(envelope) - 1)], 0.0)
    return float(sampled.mean())


def weighted_average_precision(
    weights: np.ndarray,
    npos: int,
    *,
    kind: str = "all-points",
    recall_points: int | None = None,
) -> float | None:
    """AP of a ranking whose true positives count by a weight in [0, 1] (FPs weigh 0).

    After the i-th detection, precision ``sum(w[:i]) / i`` and recall ``sum(w[:i]) / npos``;
    then the variants of :func:`average_precision` on these. With weights ``1 - Δθ/π`` (Δθ
    the heading error in [0, π]) this is the heading-weighted AP of Sun et al., CVPR 2020
    (the weighting of both precision and recall by the TP weights is written here from
    memory of that paper). With 0/1 weights it equals :func:`average_precision`. Recall
    levels of the sampled variants are compared in floating point.

    Parameters
    ----------
    weights : array_like of float
        Per ranked detection (descending score; ignored detections left out): the TP's
        weight, 0 for an FP.
    npos : int
        Number of positives.
    kind, recall_points
        As for :func:`average_precision`.

    Returns
    -------
    float or None
        ``None`` when ``npos == 0``.

    Examples
    --------
    One truth, found once with its heading a quarter turn off (weight 1/2): precision and
    recall both 1/2, so AP 1/4 (hand-worked).

    >>> weighted_average_precision([0.5], npos=1)
    0.25
    >>> weighted_average_precision([1.0, 0.0, 1.0], npos=4)  # == average_precision, 0/1
    0.41666666666666663
    >>> weighted_average_precision([], npos=2), weighted_average_precision([1.0], npos=0)
    (0.0, None)
    """
    code, npoints = ap_kind(kind, recall_points)
    w = np.asarray(weights, dtype=np.float64)
    if npos <= 0:
        return None
    if w.size and (np.any(w < 0) or np.any(w > 1) or not np.all(np.isfinite(w))):
        raise InvalidInput("weights", "TP weights must lie in [0, 1]")
    if not np.any(w > 0):
        return 0.0
    c = np.cumsum(w)
    precision = c / np.arange(1, len(w) + 1)
    recall = c / npos
    step = np.diff(np.r_[0.0, recall])
    if code == 1:
        return float(np.sum(step * precision))
    envelope = np.maximum.accumulate(precision[::-1])[::-1]
    if code == 0:
        return float(np.sum(step * envelope))
    levels = np.arange(npoints) / (npoints - 1)
    first = np.searchsorted(recall, levels, side="left")  # first rank reaching each level
    sampled = np.where(first < len(w), envelope[np.minimum(first, len(w) - 1)], 0.0)
    return float(sampled.mean())
