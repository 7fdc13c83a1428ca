r"""Box tools: corners, footprint, envelope, size, fit_rotated, canonical, flip_y, check.

Conventions (all functions): angles in radians, counter-clockwise from +x towards +y in a
y-up frame (in an image frame with y pointing down the same number turns the box clockwise
on screen; :func:`flip_y` converts between the two); ``width`` along the box's own x axis,
``height`` along its own y axis; for ``upright`` boxes ``length`` along the heading (yaw),
``width`` across it, ``height`` along +z, ``cz`` the centre. A single box gives a result
without the batch axis. Computation is float64.

::

    y-up frame (maps, metres)              image frame (pixels, y down)

     +y                                     (0,0) ------------> +x
      ^      width                            |   angle > 0: turns
      |     /                                 |   clockwise on screen
      |    / angle > 0: turns                 |      \
      |   /  counter-clockwise                |       \ width
      |  /                                    |
      +-----------> +x                        v +y

    flip_y: cy -> -cy (or height - cy), angle -> -angle: the same picture in the other frame.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from obbiou.errors import InvalidInput
from obbiou.shapes import TINY, Boxes, as_float_array, check, read_boxes

__all__ = [
    "corners",
    "footprint",
    "envelope",
    "size",
    "fit_rotated",
    "canonical",
    "flip_y",
    "check",
]


def _finish(result: np.ndarray, boxes: Boxes) -> np.ndarray:
    return result[0] if boxes.single else result


def _rotated_corners(data: np.ndarray) -> np.ndarray:
    """(N, 5) rotated boxes -> (N, 4, 2) corners, counter-clockwise from the own (-x, -y)."""
    cx, cy, w, h, a = (data[:, i] for i in range(5))
    c, s = np.cos(a), np.sin(a)
    # Local corners in counter-clockwise order for a y-up frame.
    lx = np.array([-0.5, 0.5, 0.5, -0.5])[None, :] * w[:, None]
    ly = np.array([-0.5, -0.5, 0.5, 0.5])[None, :] * h[:, None]
    x = cx[:, None] + lx * c[:, None] - ly * s[:, None]
    y = cy[:, None] + lx * s[:, None] + ly * c[:, None]
    return np.stack([x, y], axis=-1)


def _axis_corners(data: np.ndarray) -> np.ndarray:
    x0, y0, x1, y1 = (data[:, i] for i in range(4))
    x = np.stack([x0, x1, x1, x0], axis=1)
    y = np.stack([y0, y0, y1, y1], axis=1)
    return np.stack([x, y], axis=-1)


def _corner_points(b: Boxes) -> np.ndarray:
    """Corners of validated boxes, batch axis kept (see :func:`corners`)."""
    d = b.data
    if b.shape == "axis":
        out = _axis_corners(d)
    elif b.shape == "rotated":
        out = _rotated_corners(d)
    elif b.shape == "polygon":
        out = d.copy()
    else:
        if b.shape == "axis3":
            base = _axis_corners(d[:, [0, 1, 3, 4]])
            z0, z1 = d[:, 2], d[:, 5]
        else:
            base = _rotated_corners(d[:, [0, 1, 3, 4, 6]])
            z0, z1 = d[:, 2] - d[:, 5] / 2, d[:, 2] + d[:, 5] / 2
        n = d.shape[0]
        out = np.empty((n, 8, 3))
        out[:, :4, :2] = base
        out[:, 4:, :2] = base
        out[:, :4, 2] = z0[:, None]
        out[:, 4:, 2] = z1[:, None]
    return out


def corners(boxes: Any, *, shape: str | None = None) -> np.ndarray:
    """Corner points of each box.

    Parameters
    ----------
    boxes : array_like
        Boxes in any layout (see :mod:`obbiou.shapes`).
    shape : str, optional
        The layout; inferred from the trailing dimensions when ``None``.

    Returns
    -------
    numpy.ndarray
        ``(N, 4, 2)`` for ``axis`` and ``rotated`` boxes, counter-clockwise in a y-up frame
        starting at the box's own (-x, -y) corner; ``(N, K, 2)`` vertices as given for
        ``polygon``; ``(N, 8, 3)`` for ``axis3`` and ``upright`` boxes: the four bottom
        corners (counter-clockwise seen from above), then the four top corners.

    Examples
    --------
    >>> corners([0, 0, 4, 2, 0.0])
    array([[-2., -1.],
           [ 2., -1.],
           [ 2.,  1.],
           [-2.,  1.]])
    >>> corners([1, 1, 2, 2, np.pi / 2]).round(12) + 0.0  # a quarter turn; + 0.0 drops -0.
    array([[2., 0.],
           [2., 2.],
           [0., 2.],
           [0., 0.]])
    >>> corners(np.zeros((0, 7))).shape
    (0, 8, 3)
    """
    b = read_boxes(boxes, shape, name="boxes")
    return _finish(_corner_points(b), b)


def footprint(boxes: Any, *, shape: str | None = None) -> np.ndarray:
    """Ground-plane (bird's-eye-view) box of each 3D box.

    ``upright`` boxes give ``rotated`` boxes ``cx, cy, length, width, yaw``; ``axis3`` boxes
    give ``axis`` boxes. Bird's-eye-view measures are ``iou(footprint(a), footprint(b))``.

    Parameters
    ----------
    boxes : array_like
        ``upright`` or ``axis3`` boxes.
    shape : str, optional
        The layout; inferred when ``None``.

    Returns
    -------
    numpy.ndarray
        ``(N, 5)`` rotated or ``(N, 4)`` axis boxes.

    Raises
    ------
    ValueError
        If the boxes are not 3D.

    Examples
    --------
    >>> footprint([10.0, 2.0, 0.9, 4.5, 1.8, 1.6, 0.3])
    array([10. ,  2. ,  4.5,  1.8,  0.3])
    >>> footprint([[0, 0, 0, 2, 1, 3]])
    array([[0., 0., 2., 1.]])
    >>> footprint(np.zeros((0, 7))).shape
    (0, 5)
    """
    b = read_boxes(boxes, shape, name="boxes")
    if b.shape == "upright":
        out = b.data[:, [0, 1, 3, 4, 6]]
    elif b.shape == "axis3":
        out = b.data[:, [0, 1, 3, 4]]
    else:
        raise InvalidInput("boxes", f"footprint needs 3D boxes (upright or axis3), got {b.shape!r}")
    return _finish(np.ascontiguousarray(out), b)


def envelope(boxes: Any, *, shape: str | None = None) -> np.ndarray:
    """Smallest axis-aligned box enclosing each box.

    Parameters
    ----------
    boxes : array_like
        Boxes in any layout.
    shape : str, optional
        The layout; inferred when ``None``.

    Returns
    -------
    numpy.ndarray
        ``(N, 4)`` ``axis`` boxes for 2D layouts, ``(N, 6)`` ``axis3`` boxes for 3D ones.

    Examples
    --------
    >>> envelope([0, 0, 2, 2, np.pi / 4]).round(6)
    array([-1.414214, -1.414214,  1.414214,  1.414214])
    >>> envelope([[[0, 0], [3, 1], [1, 2]]])
    array([[0., 0., 3., 2.]])
    >>> envelope([1, 2, 0, 0, 0.7])  # a zero-size box: its centre
    array([1., 2., 1., 2.])
    >>> envelope(np.zeros((0, 7))).shape
    (0, 6)
    """
    b = read_boxes(boxes, shape, name="boxes")
    if b.shape in ("axis", "axis3"):
        return _finish(b.data.copy(), b)  # already its own envelope; no rounding via corners
    if len(b) == 0:
        return _finish(np.zeros((0, 6 if b.is_3d else 4)), b)
    pts = _corner_points(b)
    return _finish(np.concatenate([pts.min(axis=1), pts.max(axis=1)], axis=1), b)


def size(boxes: Any, *, shape: str | None = None) -> np.ndarray:
    """Area (2D layouts) or volume (3D layouts) of each box.

    Parameters
    ----------
    boxes : array_like
        Boxes in any layout.
    shape : str, optional
        The layout; inferred when ``None``.

    Returns
    -------
    numpy.ndarray
        ``(N,)`` float64, or a float64 scalar for a single box.

    Examples
    --------
    >>> size([[0, 0, 4, 2, 1.0], [5, 5, 0, 3, 0.0]])  # a zero-width box has area 0
    array([8., 0.])
    >>> float(size([0, 0, 0, 4.5, 1.8, 1.6, 0.2]))
    12.96
    >>> size([[[0, 0], [1, 0], [0, 1]]])
    array([0.5])
    >>> size(np.zeros((0, 4)))
    array([], dtype=float64)
    """
    b = read_boxes(boxes, shape, name="boxes")
    d = b.data
    if b.shape == "axis":
        out = (d[:, 2] - d[:, 0]) * (d[:, 3] - d[:, 1])
    elif b.shape == "rotated":
        out = d[:, 2] * d[:, 3]
    elif b.shape == "polygon":
        local = d - d[:, :1, :]  # shoelace relative to a vertex: no loss far from the origin
        x, y = local[..., 0], local[..., 1]
        out = 0.5 * np.abs((x * np.roll(y, -1, axis=1) - np.roll(x, -1, axis=1) * y).sum(axis=1))
    elif b.shape == "axis3":
        out = (d[:, 3] - d[:, 0]) * (d[:, 4] - d[:, 1]) * (d[:, 5] - d[:, 2])
    else:
        out = d[:, 3] * d[:, 4] * d[:, 5]
    return _finish(out, b)


# --------------------------------------------------------------------------- normal forms


def _wrap(angle: np.ndarray, period: float) -> np.ndarray:
    """``angle`` moved by whole periods into ``[-period / 2, period / 2)``; values already in
    range are returned bit for bit (so wrapping is idempotent)."""
    half = period / 2
    out = np.array(angle, dtype=np.float64, copy=True)
    bad = (out < -half) | (out >= half)
    if bad.any():
        r = out[bad] - period * np.floor((out[bad] + half) / period)
        r = np.where(r >= half, r - period, r)
        r = np.where(r < -half, r + period, r)
        out[bad] = r
    return out


def _canonical_rotated(d: np.ndarray) -> np.ndarray:
    out = d.copy()
    w, h, a = d[:, 2], d[:, 3], d[:, 4]
    swap = h > w
    out[:, 2] = np.where(swap, h, w)
    out[:, 3] = np.where(swap, w, h)
    a = np.where(swap, a + np.pi / 2, a)
    square = out[:, 2] == out[:, 3]
    a = np.where(square, _wrap(a, np.pi / 2), _wrap(a, np.pi))
    a = np.where(out[:, 2] == 0.0, 0.0, a)  # a point: every angle describes it
    out[:, 4] = a + 0.0  # + 0.0 turns -0.0 into 0.0
    return out


def _signed_area2(poly: np.ndarray) -> np.ndarray:
    """Twice the signed area of each polygon (positive counter-clockwise), computed relative
    to its first vertex so far-off coordinates lose nothing."""
    local = poly - poly[:, :1, :]
    x, y = local[..., 0], local[..., 1]
    return (x * np.roll(y, -1, axis=1) - np.roll(x, -1, axis=1) * y).sum(axis=1)


def _canonical_polygons(d: np.ndarray) -> np.ndarray:
    if d.shape[0] == 0:
        return d.copy()
    n, k = d.shape[0], d.shape[1]
    clockwise = _signed_area2(d) < 0
    # Reverse clockwise rows keeping vertex 0 in place; the start is chosen below anyway.
    rev = np.concatenate([[0], np.arange(k - 1, 0, -1)])
    poly = np.where(clockwise[:, None, None], d[:, rev], d)
    x, y = poly[..., 0], poly[..., 1]
    lowest = y == y.min(axis=1, keepdims=True)
    x_low = np.where(lowest, x, np.inf)
    start = lowest & (x == x_low.min(axis=1, keepdims=True))
    # A repeated start vertex (zero-length edge): begin at the first of the run.
    prev = np.roll(poly, 1, axis=1)
    repeat = (prev == poly).all(axis=-1)
    first = start & ~repeat
    first = np.where(first.any(axis=1, keepdims=True), first, start)
    s = np.argmax(first, axis=1)
    idx = (s[:, None] + np.arange(k)[None, :]) % k
    return np.take_along_axis(poly, idx[:, :, None], axis=1).reshape(n, k, 2)


def canonical(boxes: Any, *, shape: str | None = None) -> np.ndarray:
    """One normal form per box, so that equal boxes give equal rows.

    =========== ==========================================================================
    layout      normal form
    =========== ==========================================================================
    rotated     ``width >= height`` (swapped and turned by π/2 if needed), ``angle`` in
                [-π/2, π/2). A square (``width == height``) has ``angle`` in [-π/4, π/4);
                a point (both 0) has ``angle`` 0. The same rectangle gives the same row
                whichever of its descriptions came in (to rounding of the angle).
    upright     ``yaw`` wrapped into [-π, π) only: the heading of a 3D box means something
                (front vs back), so ``length`` and ``width`` are never swapped and a box
                turned by π stays a different box.
    polygon     counter-clockwise (y-up) vertex order starting at the lowest vertex, the
                leftmost of the lowest if several; of a run of repeated start vertices the
                first. Zero-area polygons keep their order and are only rolled.
    axis/axis3  unchanged (already unique).
    =========== ==========================================================================

    Parameters
    ----------
    boxes : array_like
        Boxes in any layout (see :mod:`obbiou.shapes`).
    shape : str, optional
        The layout; inferred from the trailing dimensions when ``None``.

    Returns
    -------
    numpy.ndarray
        float64 boxes in the same layout and dimensions. ``canonical`` is idempotent.

    Examples
    --------
    >>> canonical([0, 0, 1, 3, 0.0])  # tall box -> wide box turned a quarter turn back
    array([ 0.        ,  0.        ,  3.        ,  1.        , -1.57079633])
    >>> canonical([0, 0, 3, 1, np.pi])  # half a turn is the same rectangle
    array([0., 0., 3., 1., 0.])
    >>> canonical([5, 5, 0, 0, 2.0])  # a point has no direction
    array([5., 5., 0., 0., 0.])
    >>> canonical([0, 0, 0, 4, 2, 1, 3.5]).round(6)  # upright: only the yaw wraps
    array([ 0.      ,  0.      ,  0.      ,  4.      ,  2.      ,  1.      , -2.783185])
    >>> canonical([[0, 1], [1, 1], [1, 0], [0, 0]], shape="polygon")  # clockwise square
    array([[0., 0.],
           [1., 0.],
           [1., 1.],
           [0., 1.]])
    >>> canonical(np.zeros((0, 5))).shape
    (0, 5)
    """
    b = read_boxes(boxes, shape, name="boxes")
    d = b.data
    if b.shape == "rotated":
        out = _canonical_rotated(d)
    elif b.shape == "upright":
        out = d.copy()
        out[:, 6] = _wrap(d[:, 6], 2 * np.pi) + 0.0
    elif b.shape == "polygon":
        out = _canonical_polygons(d)
    else:
        out = d.copy()
    return _finish(out, b)


def flip_y(boxes: Any, *, shape: str | None = None, height: float | None = None) -> np.ndarray:
    """Convert boxes between a y-up frame and an image frame with y pointing down.

    The mirror ``y -> -y`` (or ``y -> height - y`` for an image ``height`` rows tall) maps a
    box to the box that looks the same on screen in the other frame:

    * ``rotated``: ``cy -> -cy`` (or ``height - cy``), ``angle -> -angle``;
    * ``upright``: the same for ``cy`` and ``yaw`` (``cz`` unchanged);
    * ``axis`` / ``axis3``: ``y_min`` and ``y_max`` swap roles
      (``y_min' = -y_max``, ``y_max' = -y_min``);
    * ``polygon``: every vertex mirrored and the order reversed after vertex 0
      (``v0, v[K-1], ..., v1``), so a counter-clockwise polygon stays counter-clockwise in
      its new frame and vertex 0 stays vertex 0.

    ``flip_y(flip_y(x)) == x`` exactly without ``height``; with ``height`` to the rounding
    of ``height - y``. (-0.0 comes out as 0.0.)

    Parameters
    ----------
    boxes : array_like
        Boxes in any layout (see :mod:`obbiou.shapes`).
    shape : str, optional
        The layout; inferred from the trailing dimensions when ``None``.
    height : float, optional
        Image height (in the same units as the coordinates): mirror about ``y = height / 2``
        instead of ``y = 0``, so pixel rows ``0 .. height`` map onto ``height .. 0``.

    Returns
    -------
    numpy.ndarray
        float64 boxes in the same layout and dimensions.

    Raises
    ------
    ValueError
        If ``height`` is not a finite number.

    Examples
    --------
    >>> flip_y([10, 20, 4, 2, 0.5])
    array([ 10. , -20. ,   4. ,   2. ,  -0.5])
    >>> flip_y([10, 20, 4, 2, 0.5], height=100)
    array([10. , 80. ,  4. ,  2. , -0.5])
    >>> flip_y([[0, 1, 3, 2]])  # axis boxes: y_min and y_max swap roles
    array([[ 0., -2.,  3., -1.]])
    >>> flip_y([[0, 0], [2, 0], [0, 1]], shape="polygon")
    array([[ 0.,  0.],
           [ 0., -1.],
           [ 2.,  0.]])
    >>> flip_y(np.zeros((0, 7))).shape
    (0, 7)
    """
    b = read_boxes(boxes, shape, name="boxes")
    if height is None:
        base = 0.0
    else:
        try:
            base = float(height)
        except (TypeError, ValueError):
            raise InvalidInput("height", f"expected a number, got {height!r}") from None
        if not np.isfinite(base):
            raise InvalidInput("height", f"must be finite, got {base!r}")

    def mirror(y: np.ndarray) -> np.ndarray:
        return (base - y) + 0.0

    out = b.data.copy()
    if b.shape == "rotated":
        out[:, 1] = mirror(b.data[:, 1])
        out[:, 4] = -b.data[:, 4] + 0.0
    elif b.shape == "upright":
        out[:, 1] = mirror(b.data[:, 1])
        out[:, 6] = -b.data[:, 6] + 0.0
    elif b.shape == "axis":
        out[:, 1] = mirror(b.data[:, 3])
        out[:, 3] = mirror(b.data[:, 1])
    elif b.shape == "axis3":
        out[:, 1] = mirror(b.data[:, 4])
        out[:, 4] = mirror(b.data[:, 1])
    else:
        k = b.data.shape[1]
        rev = np.concatenate([[0], np.arange(k - 1, 0, -1)])
        out = b.data[:, rev].copy()
        out[..., 1] = mirror(out[..., 1])
    return _finish(out, b)


# ------------------------------------------------------------------------------- fitting


def _read_points(points: Any, shape: str | None) -> tuple[np.ndarray, bool, Boxes | None]:
    """Read the input of :func:`fit_rotated`: point sets ``(N, K, 2)`` (finite only: they
    need not be convex) or validated boxes of a 2D layout."""
    arr = as_float_array(points, "points")
    if shape is None and arr.ndim in (2, 3) and arr.shape[-1] == 2:
        single = arr.ndim == 2
        sets = arr[np.newaxis] if single else arr
        if sets.shape[0] and sets.shape[1] == 0:
            raise InvalidInput("points", "a point set needs at least one point, got K=0")
        finite = np.isfinite(sets)
        if not finite.all():
            row, vertex, col = (int(v) for v in np.argwhere(~finite)[0])
            value = sets[row, vertex, col]
            what = "NaN" if np.isnan(value) else ("+inf" if value > 0 else "-inf")
            raise InvalidInput("points", f"point {vertex} {'xy'[col]} is {what}", row=row)
        return sets, single, None
    b = read_boxes(arr, shape, name="points")
    if b.is_3d:
        raise InvalidInput(
            "points",
            f"fit_rotated needs 2D point sets or 2D boxes, got {b.shape!r} boxes "
            "(fit their ground-plane boxes: fit_rotated(footprint(boxes)))",
        )
    return b.data, b.single, b


def fit_rotated(points: Any, *, shape: str | None = None) -> np.ndarray:
    """Minimum-area enclosing rectangle of each point set, polygon or box.

    Convex hull (Andrew's monotone chain), then rotating calipers over the hull edges: the
    best rectangle has a side on a hull edge (Freeman & Shapira, CACM 1975). Each set is
    worked relative to the centre of its own extent, so map-metre offsets (~1e6) lose no
    accuracy. Runs in a compiled kernel, parallel over sets (first call compiles it).

    Parameters
    ----------
    points : array_like
        One point set ``(K, 2)`` or a batch ``(N, K, 2)`` (any points, K >= 1; for sets of
        different sizes pad each by repeating one of its points, which changes nothing), or
        boxes of a 2D layout: ``polygon`` (with ``shape="polygon"``; validated as convex),
        ``axis`` or ``rotated``. 3D boxes: fit ``footprint(boxes)``.
    shape : str, optional
        ``None`` reads ``(..., 2)`` arrays as point sets and infers other layouts; a layout
        name reads boxes of that layout.

    Returns
    -------
    numpy.ndarray
        ``(N, 5)`` ``rotated`` boxes ``cx, cy, width, height, angle`` in :func:`canonical`
        form (``width >= height``, ``angle`` in [-π/2, π/2)), or ``(5,)`` for one set. A
        side below 1e-100 (points on a line, up to rounding) is 0: below the smallest size
        obbiou computes with (:data:`obbiou.shapes.TINY`).

    Notes
    -----
    * Ties: hull edges are visited counter-clockwise from the leftmost-then-lowest hull
      vertex, and a later edge wins only if its rectangle is smaller by more than a
      relative 1e-12, so rectangles equal to rounding go to the first edge.
    * Degenerate sets: all points equal give a zero-size box at the point (angle 0);
      collinear points give a zero-height box along the segment between the two extreme
      points (``width`` its length, ``angle`` its direction).
    * ``rotated`` input is returned in canonical form (a rectangle is its own minimal
      rectangle); ``axis`` input becomes the same rectangle with angle 0 or -π/2.
    * The rectangle contains every point to rounding: a point may lie outside by about
      1e-15 times the set's extent.

    Examples
    --------
    >>> fit_rotated([[0, 0], [2, 0], [2, 1], [0, 1], [1, 0.5]])
    array([1. , 0.5, 2. , 1. , 0. ])
    >>> box = fit_rotated([[0, 0], [1, 1], [0, 2], [-1, 1]])  # a square turned 45 degrees
    >>> box.round(12) + 0.0  # a square's angle lies in [-π/4, π/4)
    array([ 0.        ,  1.        ,  1.41421356,  1.41421356, -0.78539816])
    >>> fit_rotated([[3, 4], [3, 4]])  # all points equal: a zero-size box
    array([3., 4., 0., 0., 0.])
    >>> fit_rotated([[0, 0], [1, 1], [3, 3]]).round(6)  # collinear: zero height
    array([1.5     , 1.5     , 4.242641, 0.      , 0.785398])
    >>> fit_rotated([0, 0, 1, 3, 0.0])  # a rotated box: its canonical form
    array([ 0.        ,  0.        ,  3.        ,  1.        , -1.57079633])
    >>> fit_rotated(np.zeros((0, 4, 2))).shape
    (0, 5)
    """
    data, single, b = _read_points(points, shape)
    if b is not None and b.shape == "rotated":
        out = _canonical_rotated(data)
    elif b is not None and b.shape == "axis":
        x0, y0, x1, y1 = (data[:, i] for i in range(4))
        rect = np.stack([(x0 + x1) / 2, (y0 + y1) / 2, x1 - x0, y1 - y0, np.zeros_like(x0)], axis=1)
        out = _canonical_rotated(rect)
    elif data.shape[0] == 0:
        out = np.zeros((0, 5))
    else:
        from obbiou._kernels.calipers import fit_rectangles

        out = np.empty((data.shape[0], 5))
        fit_rectangles(np.ascontiguousarray(data), out)
        # a side below the smallest size obbiou computes with (a set of points on a line,
        # up to rounding) is a degenerate rectangle: side 0
        out[:, 2:4][out[:, 2:4] < TINY] = 0.0
        out = _canonical_rotated(out)
    return out[0] if single else out


def warmup() -> None:
    """Compile the box tools' kernels once (cached on disk for later processes).

    Examples
    --------
    >>> warmup()
    """
    fit_rotated(np.zeros((1, 3, 2)))
