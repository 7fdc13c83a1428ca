"""Errors of true positives: how far off the boxes a detector found are.

For each matched pair (a TP and its truth), at one threshold:

* **centre distance** — the ground-plane distance of the centres (metres for 3D boxes, the
  image unit in 2D; centres as in :func:`obbiou.evaluation.matching.ground_centres`);
* **size error** — ``1 - IoU`` of the two boxes after moving both to a common centre and
  turning both to a common heading (:func:`obbiou.evaluation.matching.aligned_boxes`): only
  size and shape are left to differ. Two 4 x 2 rectangles, one turned by a quarter turn,
  have size error 0; a 4 x 2 against a 2 x 1 has 1 - 2/8 = 0.75. Axis-aligned boxes keep
  their sides along the axes (they carry no heading);
* **orientation error** — the angle difference modulo π (rectangles, polygons) or the
  heading difference modulo 2π (upright 3D boxes), as in
  :func:`obbiou.evaluation.breakdown.orientation_error`;
* **heading-weighted AP** (upright boxes) — AP in which each TP counts ``1 - Δθ/π``, Δθ its
  heading error in [0, π] (Sun et al., CVPR 2020): a heading off by a quarter turn counts
  half, a reversed heading nothing (:func:`obbiou.evaluation.ap.weighted_average_precision`).

The per-label, per-threshold table is :meth:`obbiou.evaluation.Evaluation.tp_errors`.
These are detection metrics: they do not establish that a vehicle or robot is safe; defer to
the applicable safety standards, local regulation and qualified engineers.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

__all__ = ["TpErrors", "TP_ERROR_COLUMNS", "centre_distance", "size_error", "heading_error"]


class TpErrors(NamedTuple):
    """Errors of the true positives of one label at one threshold (means over its TPs).

    ``None`` where undefined: no TP (every mean), no orientation (``axis``, ``axis3``), no
    heading (``heading_ap`` is for ``upright`` boxes only), no non-ignored truth (the APs).
    ``orientation_error`` is in radians.
    """

    label: str
    threshold: float
    tp: int
    centre_distance: float | None
    size_error: float | None
    orientation_error: float | None
    ap: float | None
    heading_ap: float | None


#: Columns of :meth:`obbiou.evaluation.Evaluation.tp_errors`.
TP_ERROR_COLUMNS = TpErrors._fields


def centre_distance(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Row-wise distance of ``(n, 2)`` centres.

    Examples
    --------
    >>> centre_distance(np.array([[0.0, 0.0]]), np.array([[3.0, 4.0]])).tolist()
    [5.0]
    """
    a, b = np.asarray(a, dtype=np.float64), np.asarray(b, dtype=np.float64)
    return np.hypot(a[:, 0] - b[:, 0], a[:, 1] - b[:, 1])


def size_error(a_aligned: np.ndarray, b_aligned: np.ndarray, shape: str) -> np.ndarray:
    """Row-wise ``1 - IoU`` of aligned boxes (:func:`~obbiou.evaluation.matching.aligned_boxes`).

    Examples
    --------
    Hand-worked: a 4 x 2 and a 2 x 1 rectangle on a common centre and heading overlap in
    2 of a union of 8: size error 0.75; a box against itself: 0.

    >>> size_error(np.array([[0, 0, 4, 2, 0.0], [0, 0, 4, 2, 0]]),
    ...            np.array([[0, 0, 2, 1, 0.0], [0, 0, 4, 2, 0]]), "rotated").tolist()
    [0.75, 0.0]
    >>> size_error(np.zeros((0, 7)), np.zeros((0, 7)), "upright").shape
    (0,)
    """
    from obbiou.measures import iou

    if len(a_aligned) == 0:
        return np.zeros(0)
    return 1.0 - np.asarray(iou(a_aligned, b_aligned, shape=shape, elementwise=True))


def heading_error(det_angle: np.ndarray, truth_angle: np.ndarray, period: float) -> np.ndarray:
    """Row-wise angle difference folded into [0, period / 2].

    Examples
    --------
    >>> heading_error(np.array([0.0, 3 * np.pi / 2]), np.array([np.pi / 2, 0.0]),
    ...               2 * np.pi).round(6).tolist()
    [1.570796, 1.570796]
    """
    d = np.mod(np.asarray(det_angle) - np.asarray(truth_angle), period)
    return np.minimum(d, period - d)
