"""Overlap measures: IoU, GIoU, DIoU, intersection and coverage, exact in float64.

Every measure takes two sets of boxes ``a`` and ``b`` in any layout of
:mod:`obbiou.shapes` (``axis``, ``rotated``, ``polygon``, ``axis3``, ``upright``) and gives
either the all-pairs ``(N, M)`` matrix or, with ``elementwise=True``, the ``(N,)`` values of
row ``i`` of ``a`` with row ``i`` of ``b``.

Conventions: angles (``angle``, ``yaw``) in radians, counter-clockwise from +x towards +y
(in an image frame with y pointing down the same number turns the box clockwise on screen);
``width`` along the box's own x axis, ``height`` along its own y axis; for ``upright`` boxes
``length`` along the heading, ``width`` across it, ``height`` along +z and ``cz`` the centre.
A single box (1-D array, or one ``(K, 2)`` polygon with ``shape="polygon"``) drops its axis
from the result.

Mixing layouts: ``axis`` and ``rotated`` boxes mix (axis boxes are rotated boxes at angle
0); either mixes with ``polygon`` (rectangles are then taken by their corners); ``axis3``
mixes with ``upright``. 2D boxes never mix with 3D boxes (take
:func:`obbiou.boxes.footprint` of the 3D ones for bird's-eye-view measures).

Scene-scale code (overlapping pairs, suppression, evaluation) builds on
:func:`pair_values`: the measure for listed index pairs, bit for bit the all-pairs entries,
with :func:`prepare` to precompute per-box data once when the same boxes are used again.

Exactness: each pair is computed relative to one of its boxes (coordinates near 1e6 lose
nothing), in an order fixed by the boxes' data, so ``iou(a, b) == iou(b, a).T`` bit for bit;
``iou(x, x) == 1.0`` for every box of positive size; disjoint boxes give exactly 0.0; a box
of zero size overlaps nothing; results are clamped to their ranges; no NaN for valid input.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from obbiou.errors import InvalidInput
from obbiou.shapes import Boxes, read_boxes, same_length

__all__ = [
    "iou",
    "giou",
    "diou",
    "intersection",
    "coverage",
    "pair_values",
    "prepare",
    "Prepared",
    "MEASURES",
    "warmup",
]

#: Measure names accepted by :func:`pair_values`, with their kernel codes.
MEASURES: dict[str, int] = {"intersection": 0, "iou": 1, "giou": 2, "diou": 3, "coverage": 4}

_2D = ("axis", "rotated", "polygon")
_LAYOUT_CODES = {"axis": 0, "rotated": 1, "axis3": 2, "upright": 3}


@dataclass(frozen=True)
class Prepared:
    """Boxes precomputed for the pair kernels (per box: frame, size, extent).

    ``kind`` is ``"axis"``, ``"rect"`` or ``"poly"``; ``rows`` holds one row per box,
    ``vertices`` the counter-clockwise vertices for ``"poly"`` (else an empty array);
    ``boxes`` the validated input it came from.
    """

    kind: str
    is_3d: bool
    rows: np.ndarray
    vertices: np.ndarray
    boxes: Boxes

    def __len__(self) -> int:
        return int(self.rows.shape[0])


def _kind_for(a: str, b: str) -> str:
    """The common kernel kind of layouts ``a`` and ``b``, or a ValueError."""
    if (a in _2D) != (b in _2D):
        two, three = (a, b) if a in _2D else (b, a)
        reason = (
            f"cannot compare 2D boxes ({two!r}) with 3D boxes ({three!r}); for bird's-eye "
            "view take obbiou.boxes.footprint of the 3D boxes"
        )
        raise InvalidInput("b", reason, message=reason)
    if a in _2D:
        if "polygon" in (a, b):
            return "poly"
        return "axis" if a == b == "axis" else "rect"
    return "axis" if a == b == "axis3" else "rect"


def _natural_kind(shape: str) -> str:
    return {"axis": "axis", "axis3": "axis", "rotated": "rect", "upright": "rect"}.get(
        shape, "poly"
    )


def _polygon_rows(vertices: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Counter-clockwise vertices and rows (area, extent, centroid) of convex polygons."""
    origin = vertices[:, :1, :]
    local = vertices - origin  # shoelace relative to a vertex: no loss far from the origin
    x, y = local[..., 0], local[..., 1]
    xn, yn = np.roll(x, -1, axis=1), np.roll(y, -1, axis=1)
    cross = x * yn - xn * y
    area2 = cross.sum(axis=1)
    flip = area2 < 0
    if flip.any():
        vertices = vertices.copy()
        vertices[flip] = vertices[flip, ::-1]
    area = 0.5 * np.abs(area2)
    rows = np.zeros((vertices.shape[0], 7))
    rows[:, 0] = area
    rows[:, 1:3] = vertices.min(axis=1)
    rows[:, 3:5] = vertices.max(axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        gx = ((x + xn) * cross).sum(axis=1) / (3.0 * area2)
        gy = ((y + yn) * cross).sum(axis=1) / (3.0 * area2)
    flat = area2 == 0  # degenerate polygons: the mean of the vertices instead
    gx = np.where(flat, x.mean(axis=1), gx)
    gy = np.where(flat, y.mean(axis=1), gy)
    rows[:, 5] = gx  # relative to vertex 0, so that DIoU loses nothing at map offsets
    rows[:, 6] = gy
    return np.ascontiguousarray(vertices), rows


def prepare(boxes: Boxes, kind: str | None = None) -> Prepared:
    """Precompute per-box data (frame, cos/sin, size, extent) for :func:`pair_values`.

    Parameters
    ----------
    boxes : Boxes
        Validated boxes from :func:`obbiou.shapes.read_boxes`.
    kind : str, optional
        ``"axis"``, ``"rect"`` or ``"poly"``; the layout's own kind when ``None``. Pass it to
        prepare boxes for a mix of layouts (see :func:`pair_values`).

    Returns
    -------
    Prepared

    Examples
    --------
    >>> p = prepare(read_boxes([[0, 0, 4, 2, 0.0]]))
    >>> p.kind, len(p), float(p.rows[0, 6])  # kind, number of boxes, area
    ('rect', 1, 8.0)
    """
    kind = kind or _natural_kind(boxes.shape)
    d = boxes.data
    shp = boxes.shape
    empty = np.zeros((0, 0, 2))
    if kind in ("axis", "rect"):
        layout = _LAYOUT_CODES.get(shp)
        if layout is None or (kind == "axis" and shp not in ("axis", "axis3")):
            raise InvalidInput("kind", f"{shp!r} boxes cannot be prepared as {kind!r}")
        if len(d) == 0:
            return Prepared(
                kind, boxes.is_3d, np.zeros((0, 7 if kind == "axis" else 16)), empty, boxes
            )
        from obbiou._kernels import geometry, threads

        if kind == "axis":
            return Prepared(kind, boxes.is_3d, geometry.axis_rows(d, layout), empty, boxes)
        rows = np.empty((len(d), 16))
        # large inputs on all threads (same per-box code, same bits); below, threads cost more
        serial = len(d) < _PARALLEL_ROWS
        threads.run(geometry.rect_rows, (d, layout, rows), len(d), serial=serial)
        return Prepared(kind, boxes.is_3d, rows, empty, boxes)
    if kind == "poly":
        if shp == "polygon":
            verts = d
        elif shp in ("axis", "rotated"):
            from obbiou.boxes import corners

            verts = corners(d, shape=shp)
        else:
            raise InvalidInput("kind", f"{shp!r} boxes are 3D and cannot be prepared as polygons")
        verts, rows = _polygon_rows(np.ascontiguousarray(verts, dtype=np.float64))
        return Prepared("poly", False, rows, verts, boxes)
    raise InvalidInput("kind", f"unknown {kind!r}; expected 'axis', 'rect' or 'poly'")


#: From this many boxes :func:`prepare` computes rectangle rows on all threads (measured,
#: 50 000 rotated boxes: 1.6 ms on one thread, 0.8 ms wall on two).
_PARALLEL_ROWS = 20_000


def prepare_pair(a: Boxes | Prepared, b: Boxes | Prepared) -> tuple[Prepared, Prepared]:
    """Bring ``a`` and ``b`` to one common kind (see :func:`pair_values` for the mixes of
    layouts), reusing preparations that already fit.

    Examples
    --------
    >>> pa, pb = prepare_pair(read_boxes([[0, 0, 1, 1]]), read_boxes([[0, 0, 1, 1, 0.5]]))
    >>> pa.kind, pb.kind  # axis boxes are taken as rectangles at angle 0
    ('rect', 'rect')
    """
    ba = a.boxes if isinstance(a, Prepared) else a
    bb = b.boxes if isinstance(b, Prepared) else b
    kind = _kind_for(ba.shape, bb.shape)
    pa = a if isinstance(a, Prepared) and a.kind == kind else prepare(ba, kind)
    pb = b if isinstance(b, Prepared) and b.kind == kind else prepare(bb, kind)
    return pa, pb


#: Below this many pairs the bodies run on the calling thread: waking threads would cost
#: more (measured before: 4096 pairs of rectangles take about 0.1 ms on one thread).
PARALLEL_MIN = 4096


def _matrix(pa: Prepared, pb: Prepared, code: int) -> np.ndarray:
    from obbiou._kernels import pairs, threads

    n, m = len(pa), len(pb)
    if n == 0 or m == 0:
        return np.zeros((n, m))
    out = np.empty(n * m)
    serial = n * m < PARALLEL_MIN
    if pa.kind == "poly":
        args = (pa.vertices, pa.rows, pb.vertices, pb.rows, code, out)
        threads.run(pairs.poly_body("matrix", code), args, n, serial=serial)
    elif pa.kind == "axis":
        args = (pa.rows, pb.rows, code, pa.is_3d, out)
        threads.run(pairs.axis_matrix_rows, args, n, serial=serial)
    else:
        bt = np.empty((pairs.RECT_COLUMNS, m + 8))  # padded: rows not a multiple of 4 KiB apart
        bt[:, :m] = pb.rows.T
        if code in (pairs.GIOU, pairs.DIOU):
            args = (pa.rows, bt, m, code, pa.is_3d, out)
            threads.run(pairs.rect_matrix_rows_full, args, n, serial=serial)
        else:
            # near-parallel pairs come back flagged, to be clipped by a second body that
            # compiles only when some input has them
            redo = np.empty(n, np.int64)
            args = (pa.rows, bt, m, code, out, redo)
            threads.run(pairs.rect_matrix_rows, args, n, serial=serial)
            if redo.any():
                threads.run(pairs.rect_matrix_redo, args, n, serial=serial)
    return out.reshape(n, m)


def _pairs(pa: Prepared, pb: Prepared, first: np.ndarray, second: np.ndarray, code: int):
    from obbiou._kernels import pairs, threads

    n = first.shape[0]
    out = np.empty(n)
    serial = n < PARALLEL_MIN
    if pa.kind == "poly":
        args = (pa.vertices, pa.rows, pb.vertices, pb.rows, first, second, code, out)
        threads.run(pairs.poly_body("list", code), args, n, serial=serial)
    else:
        body = pairs.axis_list if pa.kind == "axis" else pairs.rect_body("list", code)
        args = (pa.rows, pb.rows, first, second, code, pa.is_3d, out)
        threads.run(body, args, n, serial=serial)
    return out


def _rect_elementwise(a: Boxes, b: Boxes, code: int) -> np.ndarray:
    from obbiou._kernels import pairs, threads

    out = np.empty(len(a))
    la, lb = _LAYOUT_CODES[a.shape], _LAYOUT_CODES[b.shape]
    args = (a.data, la, b.data, lb, code, a.is_3d, out)
    body = pairs.rect_body("elementwise", code)
    threads.run(body, args, len(a), serial=len(a) < PARALLEL_MIN)
    return out


def _index(idx: Any, name: str, limit: int) -> np.ndarray:
    arr = np.asarray(idx)
    if arr.ndim != 1 or (arr.size and arr.dtype.kind not in "iu"):
        raise InvalidInput(name, "expected a 1-D array of integer indices")
    arr = np.ascontiguousarray(arr, dtype=np.int64)
    if arr.size and (arr.min() < 0 or arr.max() >= limit):
        bad = int(np.argmax((arr < 0) | (arr >= limit)))
        raise InvalidInput(name, f"index {int(arr[bad])} out of range for {limit} boxes", row=bad)
    return arr


def pair_values(
    a: Boxes | Prepared,
    b: Boxes | Prepared,
    first: np.ndarray,
    second: np.ndarray,
    *,
    measure: str = "iou",
) -> np.ndarray:
    """A measure for listed pairs ``(a[first[k]], b[second[k]])``, in a parallel kernel.

    The building block of scene-scale overlap, suppression and evaluation: the values are
    bit-for-bit those of the all-pairs matrix entries (same kernel code per pair, same
    exactness rules).

    Parameters
    ----------
    a, b : Boxes or Prepared
        Boxes already validated by :func:`obbiou.shapes.read_boxes` (or prepared once by
        :func:`prepare` and reused). Layout mixes as for :func:`iou`.
    first, second : numpy.ndarray
        Integer index arrays of equal length into ``a`` and ``b``.
    measure : str
        One of ``"iou"``, ``"giou"``, ``"diou"``, ``"intersection"``, ``"coverage"``.

    Returns
    -------
    numpy.ndarray
        float64 values, one per listed pair.

    Raises
    ------
    ValueError
        For an unknown measure, index arrays of unequal length or with indices out of
        range, or layouts that do not mix (2D with 3D).

    Examples
    --------
    >>> a = read_boxes([[0, 0, 2, 2, 0.0], [10, 0, 2, 2, 0.0]])
    >>> b = read_boxes([[1, 0, 2, 2, 0.0]])
    >>> pair_values(a, b, np.array([0, 1]), np.array([0, 0]))
    array([0.33333333, 0.        ])
    >>> pair_values(a, a, np.array([1]), np.array([1]), measure="giou")  # identical
    array([1.])
    >>> pair_values(a, b, np.array([], dtype=np.int64), np.array([], dtype=np.int64))
    array([], dtype=float64)
    """
    if measure not in MEASURES:
        raise InvalidInput("measure", f"unknown {measure!r}; expected one of {', '.join(MEASURES)}")
    pa, pb = prepare_pair(a, b)
    first = _index(first, "first", len(pa))
    second = _index(second, "second", len(pb))
    if first.shape[0] != second.shape[0]:
        reason = f"first and second must have equal lengths: {first.shape[0]} and {second.shape[0]}"
        raise InvalidInput("second", reason, message=reason)
    return _pairs(pa, pb, first, second, MEASURES[measure])


def _measure(name: str, a: Any, b: Any, shape: str | None, elementwise: bool) -> Any:
    ba = read_boxes(a, shape, name="a")
    bb = read_boxes(b, shape, name="b")
    code = MEASURES[name]
    if elementwise:
        same_length(ba, bb)
        if _kind_for(ba.shape, bb.shape) == "rect" and len(ba):
            out = _rect_elementwise(ba, bb, code)
        else:
            pa, pb = prepare_pair(ba, bb)
            idx = np.arange(len(ba), dtype=np.int64)
            out = _pairs(pa, pb, idx, idx, code)
        return out[0] if ba.single and bb.single else out
    pa, pb = prepare_pair(ba, bb)
    out = _matrix(pa, pb, code)
    if bb.single:
        out = out[:, 0]
    if ba.single:
        out = out[0]
    return out


_PARAMS = """
    Parameters
    ----------
    a, b : array_like
        Boxes in any layout of :mod:`obbiou.shapes` (lists, numpy arrays of any real dtype,
        objects with ``__array__``). Angles in radians, counter-clockwise from +x towards +y;
        ``width`` along the box's own x axis. Layout mixes: see :mod:`obbiou.measures`.
    shape : str, optional
        The layout of both ``a`` and ``b``; inferred from the trailing dimensions if None.
    elementwise : bool
        False: all pairs, an ``(N, M)`` matrix. True: row ``i`` of ``a`` with row ``i`` of
        ``b``, ``(N,)`` (``a`` and ``b`` need equal lengths).

    Returns
    -------
    numpy.ndarray
        float64, ``(N, M)`` or ``(N,)``; a single box drops its axis.

    Raises
    ------
    ValueError
        For invalid boxes (argument, row and reason), 2D mixed with 3D boxes, or unequal
        lengths with ``elementwise=True``.
"""


def iou(a: Any, b: Any, *, shape: str | None = None, elementwise: bool = False) -> Any:
    """Intersection over union: overlap area (volume in 3D) / area of the union, in [0, 1].

    Zero-size boxes overlap nothing (IoU 0).
    {params}
    Examples
    --------
    >>> iou([0, 0, 2, 2, 0.0], [1, 0, 2, 2, 0.0])  # shifted by half a side: 2 / 6
    np.float64(0.3333333333333333)
    >>> iou([[0, 0, 2, 2], [0, 0, 1, 1]], [[0, 0, 2, 2], [5, 5, 6, 6]])
    array([[1.  , 0.  ],
           [0.25, 0.  ]])
    >>> iou([[0, 0, 2, 2], [5, 5, 6, 6]], [[0, 0, 1, 1], [5, 5, 6, 6]], elementwise=True)
    array([0.25, 1.  ])
    >>> iou([0, 0, 0, 4, 2, 1.5, 0.3], [0, 0, 0, 4, 2, 1.5, 0.3])  # identical upright boxes
    np.float64(1.0)
    >>> iou(np.zeros((0, 5)), [[0, 0, 1, 1, 0.0]]).shape  # empty input
    (0, 1)
    """
    return _measure("iou", a, b, shape, elementwise)


def giou(a: Any, b: Any, *, shape: str | None = None, elementwise: bool = False) -> Any:
    """Generalized IoU (Rezatofighi et al., CVPR 2019), in [-1, 1].

    ``IoU - (C - U) / C`` with ``U`` the union and ``C`` the enclosing region: the convex
    hull of both boxes in 2D (also for ``axis`` boxes), the hull of both footprints times
    the joint z span in 3D. When ``C`` has zero size (degenerate boxes) the penalty is 0.
    {params}
    Examples
    --------
    >>> giou([0, 0, 1, 1], [2, 0, 3, 1])  # disjoint: hull 3, union 2
    np.float64(-0.3333333333333333)
    >>> giou([0, 0, 2, 2, 0.3], [0, 0, 2, 2, 0.3])  # identical
    np.float64(1.0)
    """
    return _measure("giou", a, b, shape, elementwise)


def diou(a: Any, b: Any, *, shape: str | None = None, elementwise: bool = False) -> Any:
    """Distance IoU (Zheng et al., AAAI 2020): ``IoU - d^2 / c^2``, in [-1, 1].

    ``d`` is the distance of the centres (polygon centroids), ``c`` the diagonal of the
    smallest axis-aligned box enclosing both; in 3D both are taken in 3D.
    {params}
    Examples
    --------
    >>> diou([0, 0, 1, 1], [2, 0, 3, 1])  # d = 2, c^2 = 3^2 + 1^2
    np.float64(-0.4)
    >>> diou([0, 0, 1, 1], [0, 0, 1, 1])
    np.float64(1.0)
    """
    return _measure("diou", a, b, shape, elementwise)


def intersection(a: Any, b: Any, *, shape: str | None = None, elementwise: bool = False) -> Any:
    """Area (volume in 3D) of the overlap of each pair, >= 0.
    {params}
    Examples
    --------
    >>> intersection([0, 0, 2, 2, 0.0], [0, 0, 2, 2, np.pi / 4]).round(12)  # an octagon
    np.float64(3.313708498985)
    >>> intersection([0, 0, 0, 2, 2, 2], [[1, 1, 1, 3, 3, 3], [5, 5, 5, 6, 6, 6]])
    array([1., 0.])
    """
    return _measure("intersection", a, b, shape, elementwise)


def coverage(a: Any, b: Any, *, shape: str | None = None, elementwise: bool = False) -> Any:
    """Share of each box of ``a`` that lies inside the box of ``b``, in [0, 1].

    ``intersection / size(a)``; 0 when ``a`` has zero size. Not symmetric.
    {params}
    Examples
    --------
    >>> coverage([0, 0, 1, 1], [0, 0, 4, 4])  # a lies inside b
    np.float64(1.0)
    >>> coverage([0, 0, 4, 4], [0, 0, 1, 1])
    np.float64(0.0625)
    """
    return _measure("coverage", a, b, shape, elementwise)


for _f in (iou, giou, diou, intersection, coverage):
    _f.__doc__ = _f.__doc__.replace("{params}", _PARAMS)
del _f


def warmup() -> None:
    """Compile every overlap kernel once (cached on disk for later processes).

    One call per layout, job and family of measures compiles everything (IoU, intersection
    and coverage share bodies; GIoU and DIoU share others); small and large inputs run the
    same compiled bodies.

    Examples
    --------
    >>> warmup()
    """
    cases = [
        [[0.0, 0.0, 1.0, 1.0], [0.5, 0.5, 2.0, 2.0]],
        [[0.0, 0.0, 0.0, 1.0, 1.0, 1.0], [0.5, 0.5, 0.5, 2.0, 2.0, 2.0]],
        # the last rectangle is parallel to the first: the clipping path of near-parallel pairs
        [[0.0, 0.0, 2.0, 1.0, 0.3], [0.5, 0.2, 1.0, 1.0, 0.0], [0.5, 0.2, 1.0, 1.0, 0.3]],
        [
            [0.0, 0.0, 0.0, 2.0, 1.0, 1.0, 0.3],
            [0.5, 0.2, 0.1, 1.0, 1.0, 1.0, 0.0],
            [0.5, 0.2, 0.1, 1.0, 1.0, 1.0, 0.3],
        ],
        [[[0.0, 0.0], [2.0, 0.0], [0.0, 2.0]], [[0.5, 0.5], [3.0, 0.5], [0.5, 3.0]]],
    ]
    idx = np.array([0, 1], dtype=np.int64)
    for data in cases:
        boxes = read_boxes(data)
        for measure in (iou, giou):  # the fast and the full bodies
            measure(boxes.data, boxes.data)
            measure(boxes.data, boxes.data, elementwise=True)
            pair_values(boxes, boxes, idx, idx, measure=measure.__name__)
