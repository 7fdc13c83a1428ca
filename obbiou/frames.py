"""Scene operations on tables, frame by frame: suppression and overlapping pairs.

A table of boxes (:class:`obbiou.tables.Table`) holds many frames; boxes of different frames
never interact. These functions cut a table into its frames (:func:`obbiou.tables.frame_groups`)
and run :func:`obbiou.suppress` or :func:`obbiou.overlapping_pairs` on each, keeping row
numbers of the whole table. The ``obbiou suppress`` and ``obbiou overlap`` commands are these
functions plus reading and writing files.

Examples
--------
Two frames of invented harbour detections; in frame 7 the second box repeats the first:

>>> from obbiou.tables import read_table
>>> det = read_table({"frame": [7, 7, 8], "label": ["ship"] * 3, "score": [0.9, 0.6, 0.8],
...                   "cx": [10.0, 10.5, 40.0], "cy": [5.0, 5.0, 9.0],
...                   "width": [12.0, 12.0, 6.0], "height": [4.0, 4.0, 2.0],
...                   "angle": [0.3, 0.3, -1.0]}, role="detections")
>>> kept, scores = suppress_frames(det, max_iou=0.5)
>>> kept.frame.tolist(), scores.tolist()
([7, 8], [0.9, 0.8])
>>> overlap_frames(det)[["frame", "first", "second"]].values.tolist()
[[7, 0, 1]]
"""

from __future__ import annotations

from typing import Any

import numpy as np

from obbiou.errors import InvalidInput
from obbiou.scene import overlapping_pairs, suppress
from obbiou.tables import Table, comparable_frame_ids, frame_groups

__all__ = ["suppress_frames", "overlap_frames", "merge_frames", "radians"]

#: Below this many frames no progress bar is shown (it would only flicker).
_BAR_FROM = 50


def _bar(groups: list[np.ndarray], progress: bool, what: str) -> Any:
    if not progress or len(groups) < _BAR_FROM:
        return groups
    from obbiou.progress import bar

    return bar(groups, desc=what, unit="frame")


def radians(table: Table, degrees: bool) -> np.ndarray:
    """The table's boxes with the angle / yaw column in radians (a copy when converted).

    Examples
    --------
    >>> from obbiou.tables import read_table
    >>> t = read_table({"frame": [0], "label": ["a"], "cx": [0.0], "cy": [0.0],
    ...                 "width": [2.0], "height": [1.0], "angle": [90.0]}, role="truth")
    >>> radians(t, True)[:, 4].round(4).tolist(), radians(t, False)[:, 4].tolist()
    ([1.5708], [90.0])
    """
    col = {"rotated": 4, "upright": 6}.get(table.shape)
    data = table.boxes.data
    if not degrees or col is None:
        return data
    data = data.copy()
    data[:, col] = np.deg2rad(data[:, col])
    return data


def suppress_frames(
    table: Table,
    *,
    max_iou: float = 0.5,
    across_labels: bool = False,
    decay: str | None = None,
    sigma: float = 0.5,
    min_score: float = 0.0,
    limit: int | None = None,
    degrees: bool = False,
    progress: bool = False,
    bev: bool = False,
) -> tuple[Table, np.ndarray]:
    """Non-maximum suppression frame by frame (and, by default, within each label).

    Parameters
    ----------
    table : Table
        Detections (with scores), as read by :func:`obbiou.tables.read_table`.
    max_iou, decay, sigma, min_score, limit
        As for :func:`obbiou.suppress`, applied to each frame; ``limit`` counts per frame.
    across_labels : bool
        Let boxes of different labels suppress each other.
    degrees : bool
        The table's angle / yaw column holds degrees (converted for the computation only;
        the rows kept are returned as they were read).
    progress : bool
        Show a progress bar on stderr (for 50 frames or more).
    bev : bool
        3D boxes by the IoU of their ground-plane footprints (as :func:`obbiou.suppress`).

    Returns
    -------
    (Table, numpy.ndarray)
        The kept rows, frames in order of first appearance and by descending final score
        within a frame, and their final (for soft suppression: decayed) scores.
    """
    boxes = radians(table, degrees)
    keep: list[np.ndarray] = []
    scores: list[np.ndarray] = []
    for rows in _bar(frame_groups(table.frame), progress, "suppress"):
        kept = suppress(
            boxes[rows],
            table.score[rows],
            shape=table.shape,
            max_iou=max_iou,
            labels=None if across_labels else table.label[rows],
            decay=decay,
            sigma=sigma,
            min_score=min_score,
            limit=limit,
            bev=bev,
        )
        keep.append(rows[np.asarray(kept.indices, dtype=np.int64)])
        scores.append(np.asarray(kept.scores, dtype=np.float64))
    idx = np.concatenate(keep) if keep else np.zeros(0, dtype=np.int64)
    return table.take(idx), (np.concatenate(scores) if scores else np.zeros(0))


def overlap_frames(
    a: Table,
    b: Table | None = None,
    *,
    min_iou: float = 0.0,
    progress: bool = False,
    bev: bool = False,
) -> Any:
    """The overlapping pairs of each frame, as a pandas DataFrame.

    With one table, its pairs with itself (``first < second``); with two, the pairs between
    boxes of the same frame (frame ids matched by :func:`obbiou.tables.comparable_frame_ids`,
    so ``7`` in one table meets ``"7"`` in the other). ``bev``: 3D boxes by the IoU of their
    ground-plane footprints (as :func:`obbiou.overlapping_pairs`).

    Returns
    -------
    pandas.DataFrame
        Columns ``frame, first, second, first_label, second_label, iou``; ``first`` and
        ``second`` are row numbers of ``a`` and ``b`` (data rows from 0).

    Raises
    ------
    obbiou.errors.InvalidInput
        When one table holds 2D boxes and the other 3D boxes.
    """
    import pandas as pd

    same = b is None
    b = a if b is None else b
    if a.boxes.is_3d != b.boxes.is_3d:  # checked once here, before any frame is worked on
        raise InvalidInput(
            "b",
            f"{b.shape!r} boxes cannot be paired with a of layout {a.shape!r} (one is 3D, the "
            "other 2D); for bird's-eye view take obbiou.boxes.footprint of the 3D boxes",
        )
    shape = a.shape if a.shape == b.shape else None  # mixed layouts: each inferred
    a_ids, b_ids = comparable_frame_ids([a.frame, b.frame])
    b_rows = {} if same else {b_ids[rows[0]]: rows for rows in frame_groups(b_ids)}
    parts = []
    for rows in _bar(frame_groups(a.frame), progress, "overlap"):
        if same:
            pairs = overlapping_pairs(a.boxes.data[rows], shape=a.shape, min_iou=min_iou, bev=bev)
            other = rows
        else:
            other = b_rows.get(a_ids[rows[0]])
            if other is None:
                continue
            pairs = overlapping_pairs(
                a.boxes.data[rows], b.boxes.data[other], shape=shape, min_iou=min_iou, bev=bev
            )
        first = rows[np.asarray(pairs.first, dtype=np.int64)]
        second = other[np.asarray(pairs.second, dtype=np.int64)]
        parts.append(
            pd.DataFrame(
                {
                    "frame": a.frame[first],
                    "first": first,
                    "second": second,
                    "first_label": a.label[first],
                    "second_label": b.label[second],
                    "iou": np.asarray(pairs.iou, dtype=np.float64),
                }
            )
        )
    columns = ["frame", "first", "second", "first_label", "second_label", "iou"]
    return pd.concat(parts, ignore_index=True) if parts else pd.DataFrame(columns=columns)


def merge_frames(
    table: Table,
    tiles: np.ndarray,
    *,
    tile_column: str = "tile",
    max_iou: float = 0.5,
    border: float | None = None,
    fuse: bool = False,
    across_labels: bool = False,
    degrees: bool = False,
    progress: bool = False,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """:func:`obbiou.tiles.merge` image by image: per-tile detections in, one set per image.

    Each frame of ``table`` is one large image; its rows are detections in the coordinates
    of the tile named by the integer column ``tile_column`` (an index into ``tiles``, the
    same tiles for every image, e.g. :func:`obbiou.tiles.grid`).

    Returns
    -------
    (numpy.ndarray, numpy.ndarray, numpy.ndarray)
        The source row of each output box (int64, into ``table``; with ``fuse=True`` the
        best member of its cluster), the boxes in image coordinates (angles in radians;
        polygons flattened to ``px0 py0 px1 py1 ...``) and their scores; images in order of
        first appearance, boxes by descending score within an image.

    Raises
    ------
    obbiou.errors.InvalidInput
        When the table has no ``tile_column`` or a tile index is not a whole number in
        ``[0, len(tiles))`` (naming the first bad row).

    Examples
    --------
    Two tiles of one invented harbour image; a vessel on the seam is seen by both:

    >>> from obbiou.tables import read_table
    >>> from obbiou.tiles import grid
    >>> tiles = grid(1800, 1000, size=1000, overlap=200)
    >>> t = read_table({"frame": ["img"] * 2, "label": ["vessel"] * 2, "score": [0.9, 0.8],
    ...                 "tile": [0, 1], "cx": [900.0, 100.0], "cy": [500.0, 500.0],
    ...                 "width": [60.0, 60.0], "height": [20.0, 20.0], "angle": [0.0, 0.0]},
    ...                role="detections")
    >>> rows, boxes, scores = merge_frames(t, tiles)
    >>> rows.tolist(), boxes.round(1).tolist(), scores.tolist()
    ([0], [[900.0, 500.0, 60.0, 20.0, 0.0]], [0.9])
    """
    from obbiou.errors import InvalidInput
    from obbiou.tiles import merge

    if tile_column not in table.extra:
        raise InvalidInput(
            "tile_column", f"the table has no column {tile_column!r} naming each row's tile"
        )
    raw = np.asarray(table.extra[tile_column])
    with np.errstate(invalid="ignore"):
        as_float = np.asarray(raw, dtype=np.float64) if raw.dtype.kind in "iuf" else None
    if as_float is None:
        raise InvalidInput(tile_column, f"tile indices must be numbers, got {raw.dtype}")
    bad = ~np.isfinite(as_float) | (as_float != np.round(as_float))
    bad |= (as_float < 0) | (as_float >= len(tiles))
    if bad.any():
        row = int(np.argmax(bad))
        reason = f"tile index {raw[row].item()!r} is not a whole number in [0, {len(tiles)})"
        raise InvalidInput(tile_column, reason, row=row)
    tile = as_float.astype(np.int64)
    boxes = radians(table, degrees)
    keep: list[np.ndarray] = []
    out_boxes: list[np.ndarray] = []
    out_scores: list[np.ndarray] = []
    for rows in _bar(frame_groups(table.frame), progress, "merge"):
        merged = merge(
            boxes[rows],
            table.score[rows],
            tile[rows],
            tiles,
            labels=None if across_labels else table.label[rows],
            shape=table.shape,
            max_iou=max_iou,
            border=border,
            fuse=fuse,
        )
        keep.append(rows[merged.rows])
        out_boxes.append(np.asarray(merged.boxes, dtype=np.float64).reshape(len(merged), -1))
        out_scores.append(np.asarray(merged.scores, dtype=np.float64))
    idx = np.concatenate(keep) if keep else np.zeros(0, dtype=np.int64)
    width = boxes.reshape(len(boxes), -1).shape[1] if len(boxes) else 0
    flat = np.concatenate(out_boxes) if out_boxes else np.zeros((0, width))
    return idx, flat, (np.concatenate(out_scores) if out_scores else np.zeros(0))
