"""Lidar points inside boxes: how many points each box holds, and which.

``count_in_boxes(points, boxes)`` gives the number of points inside each box;
``points_in_boxes(points, boxes)`` gives the (point, box) pairs themselves. Both find
candidates with a spatial index (a uniform grid over the boxes' extents into which the
points are sorted, see :mod:`obbiou._kernels.points`) and test only the points in the
cells a box covers: never a points x boxes pass. From 50 000 points on, the boxes are
scanned on all cores (``NUMBA_NUM_THREADS`` threads, see :mod:`obbiou._kernels.threads`).

Layouts: ``(N, 3)`` points go with 3D boxes (``upright``, ``axis3``), ``(N, 2)`` points
with 2D boxes (``axis``, ``rotated``, ``polygon``: convex, either winding). To count in
the ground plane, pass ``points[:, :2]`` and ``obbiou.boxes.footprint(boxes)``.

Conventions (all layouts of :mod:`obbiou.shapes`): angles (``angle``, ``yaw``) in radians,
counter-clockwise from +x towards +y; ``width`` along the box's own x axis, ``height``
along its own y axis; for ``upright`` boxes ``length`` along the heading (yaw), ``width``
across it, ``height`` along +z, and ``cz`` the centre of the box (not its bottom).

Which points count (the exactness rule):

* Boxes are **closed**: a point on a face, an edge or a corner is inside.
* ``axis`` and ``axis3`` boxes compare coordinates with their bounds: exact.
* ``rotated`` and ``upright`` boxes test ``|u| <= width / 2`` and ``|v| <= height / 2``
  (``length``/``width``/``height`` for upright) in the box's own frame, relative to its
  centre. An angle within a few units in the last place of a multiple of pi/2 (within
  ``2**-50 * max(1, |angle|)`` of ``k * pi / 2``) is taken as exactly k quarter turns: no
  float equals pi/2, and ``cos(np.pi / 2)`` is 6e-17, not 0, which would move faces by
  rounding. Such boxes, and the z test of every upright box, compare the exact difference
  of point and centre with the half size (no tolerance): a point exactly on a face is
  inside, a point one ulp beyond it is outside.
* At other angles the frame coordinates are computed in float64 from the rounded cosine
  and sine: a point within about 1e-16 x its distance from the centre of a face may fall
  on either side. Such a point is on the face to the precision of the box itself.
* Polygons: a point is inside when no edge has it strictly on its left while another has
  it strictly on its right (sign of a cross product; the vertices' bounding box settles
  flat polygons). Exact for axis-parallel edges; for slanted edges the cross product is
  rounded like the frame coordinates above.
* A box of zero size holds only the points exactly on it (a zero-width box is a segment).

Counting points in boxes of a vehicle or robot does not establish that a perception
system is safe; for machines near people follow the applicable safety standards and
local regulation, and rely on qualified engineers.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from obbiou.errors import InvalidInput
from obbiou.shapes import LIMIT, Boxes, as_float_array, read_boxes

__all__ = ["Inside", "count_in_boxes", "points_in_boxes", "warmup"]

# Below this many points the scan runs on one thread (common practice, no source: handing
# spans to threads costs more than small scans). Measured on the 2-core machine while other
# jobs kept both cores busy (bench/points.py scenes, medians of 15 calls, one thread
# against the thread pool): 3e4 points 0.67 / 0.64 ms, 1e5 1.92 / 1.95 ms, 1e6 25.9 / 26.1
# ms: with no idle core there is nothing to gain, and with the thread pool nothing to lose
# either (numba's prange driver, tried first, lost at every size: 1e6 29 against 37 ms).
_SERIAL_BELOW = 50_000
# An angle this close to k * pi / 2, relative to max(1, |angle|), is k quarter turns.
_SNAP = 2.0**-50
_HALF_PI = np.pi / 2
# Cell side of the grid, as a multiple of the median box extent (bench/points.py --cells).
_CELL_FACTOR = 1.0
# Cells this many times narrower in x than in y: a box scans one run of points per grid row,
# so narrow columns cut the candidates at no extra cost per run (bench/points.py --cells).
_CELL_ASPECT = 1.0
# At most this many grid cells (2**22 cells: 32 MB of cell offsets), and at most 2 per point.
_MAX_CELLS = 2**22


@dataclass(frozen=True)
class Inside:
    """Which points lie inside which boxes: one entry per (point, box) pair.

    Sorted by ``(box, point)``; a point inside two boxes appears twice.

    Attributes
    ----------
    point : numpy.ndarray
        int64 rows of the points.
    box : numpy.ndarray
        int64 rows of the boxes.
    n_points, n_boxes : int
        Number of points and of boxes of the call.
    """

    point: np.ndarray
    box: np.ndarray
    n_points: int
    n_boxes: int

    def __len__(self) -> int:
        return int(self.point.shape[0])

    def counts(self) -> np.ndarray:
        """The number of points inside each box: int64 ``(n_boxes,)``, as
        :func:`count_in_boxes` gives it."""
        return np.bincount(self.box, minlength=self.n_boxes).astype(np.int64)


def count_in_boxes(
    points: Any,
    boxes: Any,
    *,
    shape: str | None = None,
    point_frames: Any = None,
    box_frames: Any = None,
) -> np.ndarray:
    """Count the points inside each box (of each box's own frame, when frames are given).

    Parameters
    ----------
    points : array_like
        ``(N, 3)`` points ``x, y, z`` for ``upright`` and ``axis3`` boxes, ``(N, 2)`` points
        ``x, y`` for ``axis``, ``rotated`` and ``polygon`` boxes. Finite numbers.
    boxes : array_like
        ``(M, C)`` boxes (``(M, K, 2)`` polygons), or one box. Angles in radians,
        counter-clockwise; ``upright``: ``cx, cy, cz, length, width, height, yaw`` with
        ``length`` along the heading and ``cz`` the centre.
    shape : str, optional
        The box layout; inferred from the trailing dimensions when ``None``.
    point_frames, box_frames : array_like, optional
        Given together: the frame id of each point ``(N,)`` and of each box ``(M,)`` (or
        one id for a single box), integers or text. Each box then counts only the points of
        its own frame, as one call per frame would, in one call: many sweeps of a lidar
        run at once. Ids are equal when their values are (``7`` is not ``"7"``).

    Returns
    -------
    numpy.ndarray
        int64 ``(M,)``: how many points lie inside each box (closed boxes: a point on a
        face counts); a 0-d count for a single box.

    Raises
    ------
    InvalidInput
        For points that are not finite or not ``(N, 2)`` / ``(N, 3)`` (naming the first bad
        row), or whose dimension does not fit the box layout; for frame ids that are not
        one per point / per box, not given together, or of kinds that do not compare.
    ValueError
        For invalid boxes (see :func:`obbiou.boxes.check`).

    Notes
    -----
    The exactness rule (faces of axis-aligned and quarter-turned boxes are exact; other
    angles to rounding) is in the module docstring of :mod:`obbiou.points`. With frames,
    each frame is counted with an index of its own in one kernel call (no coordinate is
    shifted), so the counts equal those of a call per frame to the last point on a face.

    Examples
    --------
    Invented warehouse lidar: two pallets, 1.25 m long, 0.75 m wide, 1 m high, centre
    0.5 m above the floor; the second turned by 90 degrees.

    >>> pallets = [[0.0, 0.0, 0.5, 1.25, 0.75, 1.0, 0.0],
    ...            [5.0, 0.0, 0.5, 1.25, 0.75, 1.0, np.pi / 2]]
    >>> returns = [[0.625, 0.0, 0.5],    # on the front face of the first pallet
    ...            [0.0, 0.375, 1.0],    # on a top edge of the first pallet
    ...            [5.375, 0.0, 0.25],   # on a side face of the turned pallet
    ...            [5.0, 0.625, 0.0],    # on a bottom edge of the turned pallet
    ...            [5.0, 0.635, 0.5],    # 1 cm beyond its front face
    ...            [9.0, 9.0, 0.0]]      # floor
    >>> count_in_boxes(returns, pallets)
    array([2, 2])

    Exact means exact on the numbers as stored: ``0.4`` and ``5.4`` are not what they
    print, and ``5.4 - 5.0 > 0.8 / 2`` in float64, so that point lies just outside.

    >>> int(count_in_boxes([[5.4, 0.0]], [5.0, 0.0, 0.8, 1.0, 0.0]))
    0

    In the plane, with a polygon given clockwise:

    >>> count_in_boxes([[0.5, 0.5], [1.0, 0.0], [2.0, 2.0]], [[[0, 0], [0, 1], [1, 1], [1, 0]]])
    array([2])

    An empty point set, and a single box (the result drops the box axis):

    >>> count_in_boxes(np.zeros((0, 3)), pallets)
    array([0, 0])
    >>> int(count_in_boxes([[0.5, 0.5]], [0, 0, 1, 1]))
    1
    >>> count_in_boxes([[0.5, 0.5, 0.0]], [0, 0, 1, 1])  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    obbiou.errors.InvalidInput: points: (N, 3) points go with 3D boxes (upright, axis3), ...

    Frames: the same two pallets seen in sweeps 7 and 8, the same returns, all in sweep 7
    but the last two. Only the first pallet holds returns of its own sweep; a pallet of a
    sweep without returns (9) holds none, and no frame in common gives zeros.

    >>> count_in_boxes(returns, pallets + pallets[:1], point_frames=[7, 7, 7, 7, 8, 8],
    ...                box_frames=[7, 8, 9])
    array([2, 0, 0])
    >>> count_in_boxes(returns, pallets, point_frames=["a"] * 6, box_frames=["b", "c"])
    array([0, 0])
    >>> count_in_boxes(returns, pallets, point_frames=[7] * 6)  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    obbiou.errors.InvalidInput: box_frames: point_frames and box_frames go together: ...
    """
    pts, b = _read(points, boxes, shape)
    if point_frames is None and box_frames is None:
        counts = _scan(pts, b, fill=False)[0]
    else:
        pcode, bcode = _frame_codes(point_frames, box_frames, len(pts), len(b), b.single)
        counts = _scan_by_frame(pts, b, pcode, bcode, fill=False)[0]
    return counts[0] if b.single else counts


def points_in_boxes(
    points: Any,
    boxes: Any,
    *,
    shape: str | None = None,
    point_frames: Any = None,
    box_frames: Any = None,
) -> Inside:
    """Which points lie inside which boxes (of each box's own frame, when frames are given).

    Parameters
    ----------
    points : array_like
        ``(N, 3)`` points ``x, y, z`` for ``upright`` and ``axis3`` boxes, ``(N, 2)`` points
        ``x, y`` for ``axis``, ``rotated`` and ``polygon`` boxes. Finite numbers.
    boxes : array_like
        ``(M, C)`` boxes (``(M, K, 2)`` polygons), or one box. Angles in radians,
        counter-clockwise; ``upright``: ``cx, cy, cz, length, width, height, yaw`` with
        ``length`` along the heading and ``cz`` the centre.
    shape : str, optional
        The box layout; inferred from the trailing dimensions when ``None``.
    point_frames, box_frames : array_like, optional
        Given together: the frame id of each point and of each box, as for
        :func:`count_in_boxes`; a box then holds only points of its own frame.

    Returns
    -------
    Inside
        int64 ``point`` and ``box`` rows of every (point, box) pair with the point inside
        the closed box, sorted by ``(box, point)``; a point inside two boxes appears twice.

    Raises
    ------
    InvalidInput
        For points that are not finite or not ``(N, 2)`` / ``(N, 3)`` (naming the first bad
        row), or whose dimension does not fit the box layout.
    ValueError
        For invalid boxes (see :func:`obbiou.boxes.check`).

    Examples
    --------
    Invented: two shelves of a warehouse floor plan (rotated boxes, metres) that share the
    line x = 1; the point on it is inside both.

    >>> shelves = [[0.0, 0.0, 2.0, 1.0, 0.0], [2.0, 0.0, 2.0, 1.0, 0.0]]
    >>> hits = points_in_boxes([[1.0, 0.0], [2.5, 0.5], [7.0, 0.0]], shelves)
    >>> hits.point, hits.box, len(hits)
    (array([0, 0, 1]), array([0, 1, 1]), 3)
    >>> hits.counts()
    array([1, 2])

    3D: a person (0.6 x 0.6 x 1.8 m, centre 0.9 m above the floor) and a point on the top.

    >>> len(points_in_boxes([[10.0, 2.0, 1.8]], [10.0, 2.0, 0.9, 0.6, 0.6, 1.8, 0.3]))
    1
    >>> len(points_in_boxes(np.zeros((0, 2)), shelves))
    0

    The same shelves in two scans of the floor: the point on the shared line belongs to
    scan 1, where only the first shelf is.

    >>> hits = points_in_boxes([[1.0, 0.0], [2.5, 0.5], [7.0, 0.0]], shelves,
    ...                        point_frames=[1, 2, 2], box_frames=[1, 2])
    >>> hits.point, hits.box
    (array([0, 1]), array([0, 1]))
    """
    pts, b = _read(points, boxes, shape)
    if point_frames is None and box_frames is None:
        return _scan(pts, b, fill=True)[1]
    pcode, bcode = _frame_codes(point_frames, box_frames, len(pts), len(b), b.single)
    return _scan_by_frame(pts, b, pcode, bcode, fill=True)[1]


def warmup() -> None:
    """Compile the points kernels once (they are cached on disk): one set serves every
    layout, small and large inputs, counts and pairs, one call or one per frame.

    Examples
    --------
    >>> warmup()
    """
    points_in_boxes([[0.5, 0.5, 0.5]], [[0.0, 0.0, 0.0, 1.0, 1.0, 1.0, 0.3]])
    points_in_boxes([[0.5, 0.5]], [[0.0, 0.0, 1.0, 1.0]], point_frames=[0], box_frames=[0])


# ------------------------------------------------------------------------------ input


def _read(points: Any, boxes: Any, shape: str | None) -> tuple[np.ndarray, Boxes]:
    b = read_boxes(boxes, shape, name="boxes")
    pts = _read_points(points, 3 if b.is_3d else 2)
    dim = pts.shape[1]
    if dim == 3 and not b.is_3d:
        raise InvalidInput(
            "points",
            f"(N, 3) points go with 3D boxes (upright, axis3), the boxes are {b.shape!r}; "
            "for the ground plane pass points[:, :2]",
        )
    if dim == 2 and b.is_3d:
        hint = (
            "pass obbiou.boxes.footprint(boxes)"
            if b.shape == "upright"
            else "pass boxes[:, [0, 1, 3, 4]]"
        )
        raise InvalidInput(
            "points",
            f"(N, 2) points go with 2D boxes (axis, rotated, polygon), the boxes are "
            f"{b.shape!r}; to count in the ground plane {hint}",
        )
    return pts, b


def _read_points(points: Any, default_dim: int) -> np.ndarray:
    """(N, 2) or (N, 3) finite float64 points, C-contiguous; an empty 1-D array is no points.
    Coordinates beyond +-1e100 are rejected as for boxes (:data:`obbiou.shapes.LIMIT`)."""
    arr = as_float_array(points, "points")
    if arr.ndim == 1 and arr.size == 0:
        arr = arr.reshape(0, default_dim)
    if arr.ndim != 2 or arr.shape[1] not in (2, 3):
        raise InvalidInput(
            "points", f"expected (N, 2) or (N, 3) points, got an array of shape {arr.shape}"
        )
    with np.errstate(over="ignore", invalid="ignore"):
        total = float(arr.sum())  # one fast pass for the common case
    if not np.isfinite(total) or (arr.size and max(arr.max(), -arr.min()) > LIMIT):
        bad = ~np.isfinite(arr) | (np.abs(arr) > LIMIT)
        if bad.any():
            row = int(np.argmax(bad.any(axis=1)))
            col = int(np.argmax(bad[row]))
            v = float(arr[row, col])
            what = (
                "NaN"
                if np.isnan(v)
                else ("+inf" if v == np.inf else "-inf")
                if np.isinf(v)
                else f"{v!r}, beyond +-1e100 (the largest coordinate obbiou computes with)"
            )
            raise InvalidInput("points", f"{'xyz'[col]} is {what}", row=row, column=col)
    return arr


_INCOMPARABLE = (
    "frame ids of points and boxes do not compare: use one kind (all integers or all text)"
)


def _frame_codes(
    point_frames: Any, box_frames: Any, n: int, m: int, single: bool
) -> tuple[np.ndarray, np.ndarray]:
    """The frame of each point and each box as int64 codes (equal ids, equal codes)."""
    if point_frames is None or box_frames is None:
        missing = "point_frames" if point_frames is None else "box_frames"
        raise InvalidInput(missing, "point_frames and box_frames go together: give both or neither")
    ids = []
    for name, values, rows in (("point_frames", point_frames, n), ("box_frames", box_frames, m)):
        arr = np.asarray(values)
        if single and name == "box_frames" and arr.ndim == 0:
            arr = arr.reshape(1)
        if arr.shape != (rows,):
            what = "point" if name == "point_frames" else "box"
            raise InvalidInput(
                name, f"expected one frame id per {what} ({rows}), got shape {arr.shape}"
            )
        if arr.dtype.kind == "f":
            bad = ~np.isfinite(arr)
            if bad.any():
                row = int(np.argmax(bad))
                raise InvalidInput(name, f"frame id {arr[row]!r} is not a frame id", row=row)
        if arr.dtype.kind not in "iufUSO":
            raise InvalidInput(name, f"expected integer or text frame ids, got {arr.dtype}")
        ids.append(arr)
    kinds = {
        "number" if a.dtype.kind in "iuf" else "text" if a.dtype.kind in "US" else "object"
        for a in ids
        if a.size
    }
    if kinds == {"number", "text"}:
        raise InvalidInput("box_frames", _INCOMPARABLE)
    if all(a.dtype.kind in "iu" for a in ids):  # int64 and uint64 would meet as floats
        wide = any(a.dtype.kind == "u" and a.size and int(a.max()) >= 2**63 for a in ids)
        ids = [a.astype(object if wide else np.int64) for a in ids]
    both = np.concatenate(ids)
    if both.dtype.kind in "iu" and both.size:
        lo, hi = int(both.min()), int(both.max())
        if hi - lo <= 4 * both.size:  # dense ids (0, 1, 2, ...): codes without a sort
            codes = (both - lo).astype(np.int64)
            return codes[:n], codes[n:]
    try:
        _, codes = np.unique(both, return_inverse=True)
    except TypeError:
        raise InvalidInput("box_frames", _INCOMPARABLE) from None
    codes = codes.reshape(-1).astype(np.int64)
    return codes[:n], codes[n:]


def _scan_by_frame(
    pts: np.ndarray, b: Boxes, pcode: np.ndarray, bcode: np.ndarray, *, fill: bool
) -> tuple[np.ndarray, Inside | None]:
    """Counts of each box over the points of its own frame, and with ``fill`` the (point,
    box) pairs: one kernel call over the frames that hold both points and boxes (two with
    ``fill``: count, then fill), each frame with a grid of its own (:func:`_grids`)."""
    from obbiou._kernels import points as K
    from obbiou._kernels import threads as T

    n, m = pts.shape[0], len(b)
    out = np.zeros(m, np.int64)
    empty = np.zeros(0, np.int64)
    none = Inside(empty, empty, n, m)
    if n == 0 or m == 0:
        return out, none
    frames = int(max(pcode.max(), bcode.max())) + 1
    pcount = np.bincount(pcode, minlength=frames)
    bcount = np.bincount(bcode, minlength=frames)
    pfirst = np.r_[0, np.cumsum(pcount)]
    live = (pcount > 0) & (bcount > 0)
    if not live.any():
        return out, none
    # the boxes of frames with points, by frame (stable), and each frame's rows among them
    rows = np.flatnonzero(live[bcode])
    rows = rows[np.argsort(bcode[rows], kind="stable")]
    bfirst = np.r_[0, np.cumsum(bcount[live])]
    kinds, params, verts, ext, z0, z1 = _prepare(b)
    if b.shape == "polygon":
        verts = np.ascontiguousarray(verts[rows])
    ext = ext[rows]
    grid_f, grid_i, box_order = _grids(ext, z0[rows], z1[rows], bfirst, pcount[live])
    f = np.flatnonzero(live)
    spans = np.column_stack([pfirst[f], pfirst[f + 1], bfirst[:-1], bfirst[1:]])
    porder = np.argsort(pcode, kind="stable")
    index = (
        np.ascontiguousarray(pts[porder]),
        spans,
        box_order,
        kinds[rows],
        params[rows],
        verts,
        ext,
        grid_f,
        grid_i,
    )
    serial = _threads(n) == 1
    counts = np.zeros(len(rows), np.int64)
    T.run(K.scan_frames_range, (*index, empty, empty, counts), len(f), serial=serial)
    out[rows] = counts
    if not fill:
        return out, None
    offsets = np.r_[0, np.cumsum(counts)]
    local = np.empty(int(offsets[-1]), np.int64)
    if len(local):
        again = np.zeros(len(rows), np.int64)
        T.run(K.scan_frames_range, (*index, offsets, local, again), len(f), serial=serial)
    # rows within each frame's span -> input rows; then by (box, point): the points of a box
    # ascend within its frame's span, and so in the input (a stable sort by frame)
    start = np.repeat(np.repeat(spans[:, 0], np.diff(bfirst)), counts)
    box = np.repeat(rows, counts)
    by_box = np.argsort(box, kind="stable")
    return out, Inside(porder[local + start][by_box], box[by_box], n, m)


# ------------------------------------------------------------------------- preparation


def _quarter_turns(angle: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Which angles are multiples of pi/2 up to rounding (the snap rule), and k mod 4."""
    k = np.round(angle / _HALF_PI)
    snapped = np.abs(angle - k * _HALF_PI) <= _SNAP * np.maximum(1.0, np.abs(angle))
    return snapped, k.astype(np.int64) % 4


def _prepare(b: Boxes):
    """Kernel rows of the boxes: kind codes, 8 parameters, polygon vertices, padded extents
    in the plane (x0, y0, x1, y1) and the z range of each box."""
    from obbiou._kernels import points as K

    d = b.data
    m = len(b)
    params = np.zeros((m, K.N_PARAMS))
    verts = np.zeros((1, 3, 2))
    inf = np.full(m, np.inf)
    if b.shape in ("axis", "axis3"):
        kinds = np.full(m, K.K_BOUNDS, np.int64)
        lo = d[:, :3] if b.shape == "axis3" else d[:, :2]
        hi = d[:, 3:] if b.shape == "axis3" else d[:, 2:]
        z0, z1 = (lo[:, 2], hi[:, 2]) if b.shape == "axis3" else (-inf, inf)
        ext = np.column_stack([lo[:, 0], lo[:, 1], hi[:, 0], hi[:, 1]])
        params[:, :6] = np.column_stack([ext, z0, z1])
    elif b.shape == "polygon":
        kinds = np.full(m, K.K_POLYGON, np.int64)
        verts = d
        ext = np.column_stack(
            [d[:, :, 0].min(1), d[:, :, 1].min(1), d[:, :, 0].max(1), d[:, :, 1].max(1)]
        )
        z0, z1 = -inf, inf
        params[:, :6] = np.column_stack([ext, z0, z1])
    else:
        if b.shape == "rotated":
            cx, cy, w, h, angle = d.T
            cz, hz = np.zeros(m), inf
        else:
            cx, cy, cz, w, h, height, angle = d.T
            hz = height / 2
        hw, hh = w / 2, h / 2
        snapped, quarter = _quarter_turns(angle)
        odd = snapped & (quarter % 2 == 1)
        c, s = np.cos(angle), np.sin(angle)
        # Quarter turns get cos and sin of exactly 0 and +-1: the frame test is then exact
        # (u = +-dx or +-dy) and the kernel tells them by a zero cos or sin.
        c = np.where(snapped, np.array([1.0, 0.0, -1.0, 0.0])[quarter], c)
        s = np.where(snapped, np.array([0.0, 1.0, 0.0, -1.0])[quarter], s)
        ex = np.where(snapped, np.where(odd, hh, hw), np.abs(c) * hw + np.abs(s) * hh)
        ey = np.where(snapped, np.where(odd, hw, hh), np.abs(s) * hw + np.abs(c) * hh)
        kinds = np.full(m, K.K_FRAME, np.int64)
        params[:] = np.column_stack([cx, cy, hw, hh, cz, hz, c, s])
        # Pad by far more than the rounding of the frame test (a few ulps of the size and
        # of the centre): padding only adds candidates, a missed cell would lose a point.
        pad = 1e-12 * (hw + hh)
        padx = pad + 1e-14 * np.abs(cx)
        pady = pad + 1e-14 * np.abs(cy)
        ext = np.column_stack([cx - ex - padx, cy - ey - pady, cx + ex + padx, cy + ey + pady])
        with np.errstate(invalid="ignore"):  # cz - inf for rotated boxes is -inf, fine
            z0, z1 = cz - hz, cz + hz
    c = np.ascontiguousarray
    return kinds, c(params), c(verts), c(ext), c(z0, dtype=np.float64), c(z1, dtype=np.float64)


def _grids(
    ext: np.ndarray, z0: np.ndarray, z1: np.ndarray, bfirst: np.ndarray, n_points: np.ndarray
):
    """The grid of each frame over the union of its box extents, and the boxes in grid order.

    Frame f holds the boxes ``bfirst[f]:bfirst[f + 1]`` (at least one) and ``n_points[f]``
    points. Cells are squares of about the median box extent of the frame (a box then scans
    1-4 cells and the points of an area a few times its own), at most 2 per point and
    :data:`_MAX_CELLS`. Returns ``grid_f`` (F, 8: x0, y0, x1, y1, z_lo, z_hi, inverse cell
    width and height), ``grid_i`` (F, 2: nx, ny) and the box rows of each frame ordered by
    the grid cell of their lower-left corner, row by row (the scan then reads the sorted
    points in nearly increasing order). The grid narrows the candidates only: any grid
    gives the same counts (:mod:`obbiou._kernels.points`).
    """
    starts = bfirst[:-1]
    nb = np.diff(bfirst)
    nf = len(nb)
    grid_f = np.empty((nf, 8))
    for col, (values, reduce) in enumerate(
        [
            (ext[:, 0], np.minimum),
            (ext[:, 1], np.minimum),
            (ext[:, 2], np.maximum),
            (ext[:, 3], np.maximum),
            (z0, np.minimum),
            (z1, np.maximum),
        ]
    ):
        grid_f[:, col] = reduce.reduceat(values, starts)
    x0, y0, x1, y1 = grid_f[:, 0], grid_f[:, 1], grid_f[:, 2], grid_f[:, 3]
    frame = np.repeat(np.arange(nf), nb)
    sizes = np.maximum(ext[:, 2] - ext[:, 0], ext[:, 3] - ext[:, 1])
    by_size = np.argsort(sizes)  # then by frame, stably: the sizes of each frame in order
    ranked = sizes[by_size[np.argsort(frame[by_size], kind="stable")]]
    mid = starts + nb // 2
    even = nb % 2 == 0
    median = (ranked[mid - even] + ranked[mid]) / 2  # the middle one twice for odd counts
    span = np.maximum(x1 - x0, y1 - y0)
    cap = np.maximum(1, np.minimum(_MAX_CELLS, 2 * np.asarray(n_points, np.int64)))
    # No more cells than cap along the larger side, and a cell side whose inverse is finite
    # (boxes of zero or subnormal size).
    side = np.maximum(np.maximum(_CELL_FACTOR * median, span / np.sqrt(cap)), 1e-300)
    side[(span == 0.0) & (side == 1e-300)] = 1.0
    # Widen the cells of the frames with too many by 1.5 until they fit; boxes spread wider
    # than float64 spans (~1.8e308) keep one cell (inverse sizes 0).
    grid_i = np.ones((nf, 2), np.int64)
    grid_f[:, 6:] = 0.0
    k = np.arange(nf)
    with np.errstate(over="ignore"):
        while len(k):
            k = k[np.isfinite(side[k] * cap[k])]
            inv = np.empty((len(k), 2))
            inv[:, 1] = 1.0 / side[k]
            inv[:, 0] = _CELL_ASPECT / side[k]
            cells = np.minimum((grid_f[k, 2:4] - grid_f[k, 0:2]) * inv, 2.0**40).astype(np.int64)
            cells += 1
            fits = cells[:, 0].astype(np.float64) * cells[:, 1] <= cap[k]
            grid_i[k[fits]] = cells[fits]
            grid_f[k[fits], 6:] = inv[fits]
            k = k[~fits]
            side[k] *= 1.5
    # the boxes of each frame by the grid cell of their lower-left corner, as the kernels
    # find cells (floor, clamped to the grid; NaN from inf * 0 on a one-cell grid: cell 0)
    with np.errstate(all="ignore"):
        t = (ext[:, :2] - grid_f[frame, :2]) * grid_f[frame, 6:]
    t[~(t > 0.0)] = 0.0
    cell = np.minimum(t, grid_i[frame] - 1).astype(np.int64)
    per_frame = grid_i[:, 0] * grid_i[:, 1]
    base = np.cumsum(per_frame) - per_frame  # one key per box, increasing with the frame
    key = base[frame] + cell[:, 1] * grid_i[frame, 0] + cell[:, 0]
    return grid_f, grid_i, np.argsort(key, kind="stable")


def _threads(n: int) -> int:
    from obbiou._kernels import threads

    return threads.count() if n >= _SERIAL_BELOW else 1


def _scan(pts: np.ndarray, b: Boxes, *, fill: bool) -> tuple[np.ndarray, Inside | None]:
    """Counts per box, and with ``fill`` the (point, box) pairs."""
    from obbiou._kernels import points as K

    n, m = pts.shape[0], len(b)
    empty = np.zeros(0, np.int64)
    if n == 0 or m == 0:
        return np.zeros(m, np.int64), Inside(empty, empty, n, m)
    kinds, params, verts, ext, z0, z1 = _prepare(b)
    grid_f, grid_i, box_order = _grids(ext, z0, z1, np.array([0, m]), np.array([n]))
    grid_f, grid_i = grid_f[0], grid_i[0]
    first, order, sp = K.sort_points(pts, grid_f, grid_i, fill)
    index = (
        box_order,
        kinds,
        params,
        verts,
        ext,
        grid_f,
        grid_i,
        first,
        order,
        sp,
    )
    threads = _threads(n)
    counts = _run_scan(index, empty, empty, threads)
    if not fill:
        return counts, None
    offsets = np.zeros(m + 1, np.int64)
    np.cumsum(counts, out=offsets[1:])
    point = np.empty(int(offsets[-1]), np.int64)
    if len(point):
        _run_scan(index, offsets, point, threads)
    box = np.repeat(np.arange(m, dtype=np.int64), counts)
    return counts, Inside(point, box, n, m)


def _run_scan(index, offsets: np.ndarray, out: np.ndarray, threads: int) -> np.ndarray:
    from obbiou._kernels import points as K
    from obbiou._kernels import threads as T

    m = index[1].shape[0]
    counts = np.zeros(m, np.int64)
    T.run(K.scan_range, (*index, offsets, out, counts), m, serial=threads == 1 or m == 1)
    return counts
