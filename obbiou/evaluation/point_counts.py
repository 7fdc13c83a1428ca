"""Lidar points inside ground-truth boxes: the count per truth, and setting aside truths
with too few points (``evaluate(..., points=TABLE, min_points=K)``).

A truth that holds fewer than K lidar returns can hardly be detected from them; lidar teams
commonly leave such truths out of the score (common practice, no source). Here they become
*ignore* truths: they are not counted as misses, and a detection that matches one is
ignored rather than called a false positive, exactly like any other ignore truth.

Which points count: the points of the truth's frame (frame ids compare by the rule of
:func:`obbiou.tables.comparable_frame_ids`), inside the closed box (a point on a face
counts; :mod:`obbiou.points` has the exactness rule). 3D boxes (``upright``, ``axis3``)
with points that have ``z``: inside the box in 3D; without ``z``: inside the ground-plane
footprint. 2D layouts use ``x, y`` (a ``z`` column is not used).

Counting points does not establish that a perception system is safe; for machines near
people follow the applicable safety standards and local regulation, and rely on qualified
engineers.
"""

from __future__ import annotations

import dataclasses
import warnings
from typing import Any

import numpy as np

from obbiou.errors import InvalidInput, LikelyMistake
from obbiou.tables import Table, comparable_frame_ids, read_points

__all__ = ["check_min_points", "count_truth_points", "no_common_frame", "set_aside"]


def count_truth_points(truth: Table, points: Any) -> np.ndarray:
    """Number of points of its frame inside each truth box: int64, in table order.

    One call of :func:`obbiou.points.count_in_boxes` with the frames of the points and
    of the truths (``point_frames``, ``box_frames``), which counts frame by frame inside one
    kernel call. It replaced a Python call per frame, whose set-up cost about 0.13 ms each
    (``bench/lidar_evaluation.py``, 10^4 sweeps of 20 truths and 100 points: 1.3 s of CPU).
    Warns (:class:`~obbiou.errors.LikelyMistake`) when there are truths and points but no
    frame id in common: every truth would then hold 0 points.

    Examples
    --------
    Invented warehouse sweep: a pallet 1.2 m x 0.8 m x 1 m in frame 1, three returns on it
    (one on its top face) and one on the floor beside it; a pallet in frame 2 with none.

    >>> from obbiou.tables import read_table
    >>> truth = read_table({"frame": [1, 2], "label": ["pallet"] * 2, "cx": [0.0, 0.0],
    ...     "cy": [0.0, 0.0], "cz": [0.5, 0.5], "length": [1.2] * 2, "width": [0.8] * 2,
    ...     "height": [1.0] * 2, "yaw": [0.0] * 2}, role="truth")
    >>> pts = {"frame": [1, 1, 1, 1], "x": [0.1, -0.5, 0.0, 2.0], "y": [0.0, 0.3, 0.0, 0.0],
    ...        "z": [0.5, 0.9, 1.0, 0.0]}
    >>> count_truth_points(truth, pts).tolist()
    [3, 0]
    >>> count_truth_points(truth, {k: v[:0] for k, v in pts.items()}).tolist()  # no points
    [0, 0]
    """
    import pandas as pd

    from obbiou.boxes import footprint
    from obbiou.points import count_in_boxes

    pts = read_points(points)
    m = len(truth)
    out = np.zeros(m, dtype=np.int64)
    if m == 0 or len(pts) == 0:
        return out
    layout = truth.shape
    three_d = layout in ("upright", "axis3")
    xyz = pts.xyz
    boxes, shape = truth.boxes.data, layout
    if three_d and xyz.shape[1] == 2:
        boxes, shape = (
            footprint(boxes, shape=layout),
            ("rotated" if layout == "upright" else "axis"),
        )
    elif not three_d:
        xyz = xyz[:, :2]
    tframe, pframe = comparable_frame_ids([truth.frame, pts.frame])
    codes, _ = pd.factorize(np.concatenate([tframe, pframe]), sort=False)
    tcode, pcode = codes[:m], codes[m:]
    common = np.intersect1d(tcode, pcode)
    if not len(common):
        warnings.warn(no_common_frame(pts.source), stacklevel=3)
        return out
    return count_in_boxes(xyz, boxes, shape=shape, point_frames=pcode, box_frames=tcode)


def no_common_frame(source: str) -> LikelyMistake:
    """The warning for points that share no frame id with the truth (every truth then holds
    0 points): one wording in process and on a cluster.

    Examples
    --------
    >>> str(no_common_frame("sweeps.parquet"))
    'the points (sweeps.parquet) share no frame id with the truth: every truth holds 0 points'
    """
    return LikelyMistake(
        f"the points ({source}) share no frame id with the truth: every truth holds 0 points"
    )


def check_min_points(min_points: Any) -> int:
    """``min_points`` as an int, checked: a whole number >= 1.

    Examples
    --------
    >>> check_min_points(5), check_min_points(3.0)
    (5, 3)
    >>> check_min_points(0)
    Traceback (most recent call last):
    ...
    obbiou.errors.InvalidInput: min_points: expected a whole number >= 1, got 0
    """
    try:
        k = int(min_points)
    except (TypeError, ValueError):
        raise InvalidInput(
            "min_points", f"expected a whole number >= 1, got {min_points!r}"
        ) from None
    if k != min_points or k < 1:
        raise InvalidInput("min_points", f"expected a whole number >= 1, got {min_points!r}")
    return k


def set_aside(truth: Table, counts: np.ndarray, min_points: Any) -> tuple[Table, np.ndarray]:
    """The truth table with truths holding fewer than ``min_points`` points made ignore
    truths, and which truths were set aside that way (those not already ignore).

    Examples
    --------
    >>> from obbiou.tables import read_table
    >>> t = read_table({"frame": [0, 0, 0], "label": ["person"] * 3, "x_min": [0, 2, 4],
    ...     "y_min": [0, 0, 0], "x_max": [1, 3, 5], "y_max": [1, 1, 1],
    ...     "ignore": [False, False, True]}, role="truth")
    >>> t2, aside = set_aside(t, np.array([0, 7, 0]), 5)
    >>> t2.ignore.tolist(), aside.tolist()
    ([True, False, True], [True, False, False])
    """
    k = check_min_points(min_points)
    few = np.asarray(counts) < k
    aside = few & ~truth.ignore
    return dataclasses.replace(truth, ignore=truth.ignore | few), aside
