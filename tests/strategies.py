"""Hypothesis strategies for boxes, shared by the test files.

Import them from any test module::

    from tests.strategies import FAR, rotated_box, rotated_pair, convex_polygon

Every strategy draws float64 numpy arrays in the layouts of docs/design.md §2 (single boxes are 1-D,
polygons ``(K, 2)``, batches have a leading axis). Common options:

``centre``
    ``(lo, hi)``: the magnitude of each centre coordinate lies in ``[lo, hi]`` (sign drawn
    separately). :data:`NEAR` (default) is ``(0, 100)``; :data:`FAR` is ``(1e5, 1e6)``, map-metre
    offsets.
``sizes``
    ``(lo, hi)`` for widths, heights, lengths (log-uniform when the range spans more than three
    decades). :data:`SIZES` (default) ``(0.1, 100)``; :data:`TINY` ``(1e-6, 1e-3)``;
    :data:`HUGE` ``(1e3, 1e6)``; :data:`FAR_SIZES` ``(1, 100)`` goes with ``FAR``.
``zero_size``
    allow sizes of exactly 0 (valid boxes of zero area that overlap nothing).

Pair strategies (:func:`rotated_pair`, :func:`polygon_pair`, :func:`upright_pair`) draw a
:class:`Pair` ``(a, b, kind)`` of one of the adversarial families in :data:`PAIR_KINDS`
(``kind=None`` draws any). What each family guarantees *in exact arithmetic on the drawn
parameters* (rotated corners carry rounding of cos/sin; polygon pairs share vertices bit for
bit where stated):

``identical``        ``b`` equals ``a``.
``nested``           ``b`` lies strictly inside ``a``.
``shared_edge``      ``b`` lies on the far side of one edge of ``a`` and shares (part of) it:
                     interiors disjoint, intersection area 0. Polygon pairs share the two
                     edge vertices exactly.
``touching_corner``  ``a`` and ``b`` meet in one corner point only (polygon pairs: that vertex
                     is bit-identical in both).
``near_parallel``    ``b`` is ``a`` turned by at most :data:`NEAR_PARALLEL` (1e-12 rad) and
                     slid along its own x axis: overlapping, edges parallel within 1e-12 rad.
``disjoint``         a gap wider than rounding separates ``a`` and ``b``: IoU exactly 0.
``random``           ``b`` drawn near ``a``; usually overlapping.
"""

from __future__ import annotations

import math
from fractions import Fraction
from typing import NamedTuple

import numpy as np
from hypothesis import strategies as st

__all__ = [
    "NEAR",
    "FAR",
    "SIZES",
    "FAR_SIZES",
    "TINY",
    "HUGE",
    "NEAR_PARALLEL",
    "PAIR_KINDS",
    "Pair",
    "coordinate",
    "length",
    "angle",
    "rotated_box",
    "rotated_boxes",
    "upright_box",
    "upright_boxes",
    "axis_box",
    "axis_boxes",
    "axis3_box",
    "axis3_boxes",
    "convex_polygon",
    "convex_polygons",
    "hull_polygon",
    "rotated_pair",
    "polygon_pair",
    "upright_pair",
    "pair_batch",
]

NEAR = (0.0, 100.0)
FAR = (1e5, 1e6)
SIZES = (0.1, 100.0)
FAR_SIZES = (1.0, 100.0)
TINY = (1e-6, 1e-3)
HUGE = (1e3, 1e6)
NEAR_PARALLEL = 1e-12

PAIR_KINDS = (
    "identical",
    "nested",
    "shared_edge",
    "touching_corner",
    "near_parallel",
    "disjoint",
    "random",
)

_TAU = 2.0 * math.pi
# Angles that make edges axis-parallel or diagonal: exact adversarial values.
_SPECIAL_ANGLES = (0.0, math.pi / 2, -math.pi / 2, math.pi, -math.pi, math.pi / 4, -math.pi / 4)


class Pair(NamedTuple):
    """Two boxes of one adversarial family: unpack as ``a, b, kind = pair``."""

    a: np.ndarray
    b: np.ndarray
    kind: str


def _finite(lo: float, hi: float) -> st.SearchStrategy[float]:
    return st.floats(lo, hi, allow_nan=False, allow_infinity=False, allow_subnormal=False)


def coordinate(centre: tuple[float, float] = NEAR) -> st.SearchStrategy[float]:
    """A coordinate whose magnitude lies in ``centre = (lo, hi)``, either sign."""
    lo, hi = centre
    return st.tuples(_finite(lo, hi), st.booleans()).map(lambda t: -t[0] if t[1] else t[0])


def length(
    sizes: tuple[float, float] = SIZES, *, zero_size: bool = False
) -> st.SearchStrategy[float]:
    """A size in ``[lo, hi]``, log-uniform over wide ranges; optionally exactly 0."""
    lo, hi = sizes
    if lo > 0 and hi / lo > 1e3:
        base = _finite(math.log10(lo), math.log10(hi)).map(lambda e: min(max(10.0**e, lo), hi))
        base = st.one_of(base, st.sampled_from((lo, hi)))
    else:
        base = _finite(lo, hi)
    return st.one_of(st.just(0.0), base) if zero_size else base


def angle() -> st.SearchStrategy[float]:
    """An angle in radians: any value in ``[-2π, 2π]`` or an axis-parallel / diagonal one."""
    return st.one_of(_finite(-_TAU, _TAU), st.sampled_from(_SPECIAL_ANGLES))


def _stack(rows: list[np.ndarray], trailing: tuple[int, ...]) -> np.ndarray:
    if not rows:
        return np.zeros((0, *trailing))
    return np.stack(rows).astype(np.float64)


# ----------------------------------------------------------------------------- single boxes


@st.composite
def rotated_box(draw, centre=NEAR, sizes=SIZES, *, zero_size=False) -> np.ndarray:
    """One ``rotated`` box ``(5,)``: ``cx, cy, width, height, angle``."""
    cx, cy = draw(coordinate(centre)), draw(coordinate(centre))
    w = draw(length(sizes, zero_size=zero_size))
    h = draw(length(sizes, zero_size=zero_size))
    return np.array([cx, cy, w, h, draw(angle())])


@st.composite
def upright_box(draw, centre=NEAR, sizes=SIZES, *, zero_size=False) -> np.ndarray:
    """One ``upright`` box ``(7,)``: ``cx, cy, cz, length, width, height, yaw``.

    ``cz`` stays within ``±min(centre_hi, 100)``: heights above ground are small even when the
    map offsets are large.
    """
    cx, cy = draw(coordinate(centre)), draw(coordinate(centre))
    cz = draw(_finite(-min(centre[1], 100.0), min(centre[1], 100.0)))
    lwh = [draw(length(sizes, zero_size=zero_size)) for _ in range(3)]
    return np.array([cx, cy, cz, *lwh, draw(angle())])


@st.composite
def axis_box(draw, centre=NEAR, sizes=SIZES, *, zero_size=False) -> np.ndarray:
    """One ``axis`` box ``(4,)``: ``x_min, y_min, x_max, y_max``."""
    x0, y0 = draw(coordinate(centre)), draw(coordinate(centre))
    w = draw(length(sizes, zero_size=zero_size))
    h = draw(length(sizes, zero_size=zero_size))
    return np.array([x0, y0, x0 + w, y0 + h])


@st.composite
def axis3_box(draw, centre=NEAR, sizes=SIZES, *, zero_size=False) -> np.ndarray:
    """One ``axis3`` box ``(6,)``: ``x_min, y_min, z_min, x_max, y_max, z_max``."""
    lo = [draw(coordinate(centre)), draw(coordinate(centre))]
    lo.append(draw(_finite(-min(centre[1], 100.0), min(centre[1], 100.0))))
    ext = [draw(length(sizes, zero_size=zero_size)) for _ in range(3)]
    return np.array([*lo, *(v + e for v, e in zip(lo, ext, strict=True))])


def _ellipse_polygon(centre_xy, radius, aspect, turn, gaps, start_angle, clockwise, roll):
    """Vertices on an ellipse in angular order: an affine image of a circle's inscribed
    polygon, hence strictly convex for distinct angles."""
    gaps = np.asarray(gaps, dtype=np.float64)
    theta = start_angle + _TAU * np.cumsum(gaps) / gaps.sum()
    local = np.stack([radius * np.cos(theta), radius * aspect * np.sin(theta)], axis=1)
    c, s = math.cos(turn), math.sin(turn)
    pts = np.empty_like(local)
    pts[:, 0] = centre_xy[0] + (c * local[:, 0] - s * local[:, 1])
    pts[:, 1] = centre_xy[1] + (s * local[:, 0] + c * local[:, 1])
    if clockwise:
        pts = pts[::-1]
    return np.roll(pts, roll, axis=0)


@st.composite
def convex_polygon(
    draw, k=None, centre=NEAR, sizes=SIZES, *, min_k=3, max_k=8, winding=None
) -> np.ndarray:
    """One strictly convex polygon ``(K, 2)``: vertices on a turned ellipse.

    ``k`` fixes the vertex count (else drawn in ``[min_k, max_k]``); ``winding`` is ``"ccw"``,
    ``"cw"`` or ``None`` (either). The first vertex is drawn too, so no order is special.
    """
    k = draw(st.integers(min_k, max_k)) if k is None else k
    cxy = (draw(coordinate(centre)), draw(coordinate(centre)))
    radius = draw(length(sizes)) / 2
    aspect = draw(_finite(0.05, 1.0))
    gaps = draw(st.lists(_finite(0.3, 1.0), min_size=k, max_size=k))
    start = draw(_finite(0.0, _TAU))
    turn = draw(angle())
    clockwise = draw(st.booleans()) if winding is None else winding == "cw"
    roll = draw(st.integers(0, k - 1))
    return _ellipse_polygon(cxy, radius, aspect, turn, gaps, start, clockwise, roll)


def _exact_hull(points: list[tuple[float, float]]) -> list[tuple[float, float]]:
    """Andrew's monotone chain with exact orientation tests (``Fraction``): strictly convex,
    counter-clockwise, collinear points dropped."""
    pts = sorted(set(points))
    if len(pts) < 3:
        return pts

    def turn(o, a, b):
        ox, oy = Fraction(o[0]), Fraction(o[1])
        return (Fraction(a[0]) - ox) * (Fraction(b[1]) - oy) - (Fraction(a[1]) - oy) * (
            Fraction(b[0]) - ox
        )

    lower: list = []
    for p in pts:
        while len(lower) >= 2 and turn(lower[-2], lower[-1], p) <= 0:
            lower.pop()
        lower.append(p)
    upper: list = []
    for p in reversed(pts):
        while len(upper) >= 2 and turn(upper[-2], upper[-1], p) <= 0:
            upper.pop()
        upper.append(p)
    return lower[:-1] + upper[:-1]


def _unless_tiny(offset: float, half: float) -> float:
    """``offset``, or 0.0 when it is below 1e-9 of ``half`` in magnitude."""
    return offset if abs(offset) >= 1e-9 * half else 0.0


@st.composite
def hull_polygon(draw, centre=NEAR, sizes=SIZES, *, max_points=10) -> np.ndarray:
    """Convex hull (exact, counter-clockwise) of random points in a square: ``(K, 2)``,
    ``3 <= K <= max_points``. Irregular shapes with short and long edges."""
    cx, cy = draw(coordinate(centre)), draw(coordinate(centre))
    half = draw(length(sizes)) / 2
    offsets = st.tuples(_finite(-half, half), _finite(-half, half))
    raw = draw(st.lists(offsets, min_size=3, max_size=max_points))
    # Offsets far below the polygon's size snap to 0: a hull 1e-200 wide is below the
    # smallest size obbiou computes with (1e-100, rejected by design) and shapely's own
    # products underflow on it (hypothesis drew both: widths 2.7e-265 and 1.5e-201).
    raw = [(_unless_tiny(dx, half), _unless_tiny(dy, half)) for dx, dy in raw]
    hull = _exact_hull([(cx + dx, cy + dy) for dx, dy in raw])
    if len(hull) < 3:
        # All points collinear: fall back to a triangle on the square (still random size).
        hull = [(cx - half, cy - half), (cx + half, cy - half), (cx, cy + half)]
    return np.array(hull, dtype=np.float64)


# ---------------------------------------------------------------------------------- batches


def rotated_boxes(min_n=0, max_n=8, **kwargs) -> st.SearchStrategy[np.ndarray]:
    """A batch ``(N, 5)`` of :func:`rotated_box`."""
    return st.lists(rotated_box(**kwargs), min_size=min_n, max_size=max_n).map(
        lambda r: _stack(r, (5,))
    )


def upright_boxes(min_n=0, max_n=8, **kwargs) -> st.SearchStrategy[np.ndarray]:
    """A batch ``(N, 7)`` of :func:`upright_box`."""
    return st.lists(upright_box(**kwargs), min_size=min_n, max_size=max_n).map(
        lambda r: _stack(r, (7,))
    )


def axis_boxes(min_n=0, max_n=8, **kwargs) -> st.SearchStrategy[np.ndarray]:
    """A batch ``(N, 4)`` of :func:`axis_box`."""
    return st.lists(axis_box(**kwargs), min_size=min_n, max_size=max_n).map(
        lambda r: _stack(r, (4,))
    )


def axis3_boxes(min_n=0, max_n=8, **kwargs) -> st.SearchStrategy[np.ndarray]:
    """A batch ``(N, 6)`` of :func:`axis3_box`."""
    return st.lists(axis3_box(**kwargs), min_size=min_n, max_size=max_n).map(
        lambda r: _stack(r, (6,))
    )


@st.composite
def convex_polygons(draw, min_n=0, max_n=8, k=None, **kwargs) -> np.ndarray:
    """A batch ``(N, K, 2)`` of :func:`convex_polygon` sharing one vertex count ``K``."""
    k = draw(st.integers(3, 8)) if k is None else k
    rows = draw(st.lists(convex_polygon(k=k, **kwargs), min_size=min_n, max_size=max_n))
    return _stack(rows, (k, 2))


# ------------------------------------------------------------------------- adversarial pairs


def _unit(a: float) -> tuple[float, float]:
    return math.cos(a), math.sin(a)


@st.composite
def rotated_pair(draw, kind=None, centre=NEAR, sizes=SIZES) -> Pair:
    """Two ``rotated`` boxes ``(5,)`` of one family of :data:`PAIR_KINDS` (any when None)."""
    kind = draw(st.sampled_from(PAIR_KINDS)) if kind is None else kind
    a = draw(rotated_box(centre, sizes))
    cx, cy, w, h, t = (float(v) for v in a)
    ux, uy = _unit(t)  # a's own x axis
    vx, vy = -uy, ux  # a's own y axis
    if kind == "identical":
        b = a.copy()
    elif kind == "nested":
        inner = min(w, h) / 2
        f = draw(_finite(0.0, 0.5))
        d = draw(_finite(0.0, _TAU))
        ox, oy = f * inner * math.cos(d), f * inner * math.sin(d)
        radius = (1 - f) * inner * draw(_finite(0.1, 0.9))
        psi = draw(_finite(0.1, math.pi / 2 - 0.1))
        b = np.array(
            [
                cx + ox * ux + oy * vx,
                cy + ox * uy + oy * vy,
                2 * radius * math.cos(psi),
                2 * radius * math.sin(psi),
                draw(angle()),
            ]
        )
    elif kind == "shared_edge":
        along_y = draw(st.booleans())
        side = draw(st.sampled_from((-1.0, 1.0)))
        if along_y:  # swap roles: slide across a's top/bottom edge
            w, h, ux, uy, vx, vy = h, w, vx, vy, -ux, -uy
        wb = draw(length(sizes))
        hb = h if draw(st.booleans()) else draw(length(sizes))
        slide = draw(_finite(-0.9, 0.9)) * (h + hb) / 2 if hb != h else 0.0
        off = side * (w + wb) / 2
        bx, by = cx + off * ux + slide * vx, cy + off * uy + slide * vy
        bw, bh = (hb, wb) if along_y else (wb, hb)
        b = np.array([bx, by, bw, bh, t])
    elif kind == "touching_corner":
        # b's own (-x, -y) corner sits on a corner of a; b's cone [phi, phi + pi/2] avoids
        # the cone a occupies at that corner, so only the corner is shared.
        sx, sy = draw(st.sampled_from(((1, 1), (-1, 1), (-1, -1), (1, -1))))
        px = cx + sx * w / 2 * ux + sy * h / 2 * vx
        py = cy + sx * w / 2 * uy + sy * h / 2 * vy
        quadrant = math.atan2(sy, sx) - math.pi / 4  # a's outward corner direction, local
        phi = t + quadrant + draw(_finite(-math.pi / 2, math.pi / 2))
        wb, hb = draw(length(sizes)), draw(length(sizes))
        bux, buy = _unit(phi)
        b = np.array(
            [
                px + wb / 2 * bux - hb / 2 * buy,
                py + wb / 2 * buy + hb / 2 * bux,
                wb,
                hb,
                phi,
            ]
        )
    elif kind == "near_parallel":
        delta = draw(_finite(-NEAR_PARALLEL, NEAR_PARALLEL))
        wb = draw(length(sizes))
        slide = draw(_finite(-0.9, 0.9)) * (w + wb) / 2  # keeps an overlap along x
        b = np.array([cx + slide * ux, cy + slide * uy, wb, h, t + delta])
    elif kind == "disjoint":
        wb, hb = draw(length(sizes)), draw(length(sizes))
        gap = 1e-3 * max(w, h, wb, hb) + 1e-9 * max(abs(cx), abs(cy), 1.0)
        reach = math.hypot(w, h) / 2 + math.hypot(wb, hb) / 2 + gap
        d = draw(_finite(0.0, _TAU))
        b = np.array([cx + reach * math.cos(d), cy + reach * math.sin(d), wb, hb, draw(angle())])
    elif kind == "random":
        wb, hb = draw(length(sizes)), draw(length(sizes))
        reach = (math.hypot(w, h) + math.hypot(wb, hb)) / 2
        dx, dy = draw(_finite(-reach, reach)), draw(_finite(-reach, reach))
        b = np.array([cx + dx, cy + dy, wb, hb, draw(angle())])
    else:
        raise ValueError(f"unknown pair kind {kind!r}; expected one of {PAIR_KINDS}")
    return Pair(a, np.asarray(b, dtype=np.float64), kind)


@st.composite
def polygon_pair(draw, kind=None, centre=NEAR, sizes=SIZES, *, k=None) -> Pair:
    """Two convex polygons ``(K, 2)`` / ``(L, 2)`` of one family of :data:`PAIR_KINDS`.

    ``shared_edge`` and ``touching_corner`` reuse vertices of ``a`` bit for bit, so exact
    arithmetic sees a zero-area contact. Vertex counts may differ between ``a`` and ``b``
    (``shared_edge`` gives a quadrilateral ``b``); pass ``k`` to fix ``a``'s.
    """
    kind = draw(st.sampled_from(PAIR_KINDS)) if kind is None else kind
    a = draw(convex_polygon(k=k, centre=centre, sizes=sizes))
    n = a.shape[0]
    centroid = a.mean(axis=0)
    extent = float(np.ptp(a, axis=0).max())
    if kind == "identical":
        b = a.copy()
    elif kind == "nested":
        scale = draw(_finite(0.05, 0.9))
        b = centroid + scale * (a - centroid)
    elif kind == "shared_edge":
        i = draw(st.integers(0, n - 1))
        p, q = a[i], a[(i + 1) % n]
        ex, ey = q - p
        # Outward normal: away from the centroid.
        nx, ny = ey, -ex
        if (centroid - p) @ np.array([nx, ny]) > 0:
            nx, ny = -nx, -ny
        norm = math.hypot(nx, ny)
        depth = draw(_finite(0.05, 1.0)) * extent
        off = np.array([nx, ny]) / norm * depth
        b = np.array([q, p, p + off, q + off])
        if draw(st.booleans()):
            b = b[::-1].copy()
    elif kind == "touching_corner":
        # Point reflection through a vertex: a lies in a cone of opening < pi at that
        # vertex, its image in the opposite cone. 2 * v - v == v exactly.
        v = a[draw(st.integers(0, n - 1))]
        b = 2.0 * v - a
    elif kind == "near_parallel":
        delta = draw(_finite(-NEAR_PARALLEL, NEAR_PARALLEL))
        c, s = math.cos(delta), math.sin(delta)
        local = a - centroid
        turned = np.stack([c * local[:, 0] - s * local[:, 1], s * local[:, 0] + c * local[:, 1]])
        e = a[1] - a[0]
        slide = draw(_finite(-0.5, 0.5))
        b = centroid + turned.T + slide * e
    elif kind == "disjoint":
        gap = 1e-3 * extent + 1e-9 * float(np.abs(a).max())
        d = draw(_finite(0.0, _TAU))
        b = a + (extent * 1.5 + gap) * np.array([math.cos(d), math.sin(d)])
    elif kind == "random":
        other = draw(convex_polygon(centre=(0.0, 0.0), sizes=sizes))
        shift = draw(st.tuples(_finite(-extent, extent), _finite(-extent, extent)))
        b = other + centroid + np.array(shift)
    else:
        raise ValueError(f"unknown pair kind {kind!r}; expected one of {PAIR_KINDS}")
    return Pair(a, np.asarray(b, dtype=np.float64), kind)


@st.composite
def upright_pair(draw, kind=None, centre=NEAR, sizes=SIZES) -> Pair:
    """Two ``upright`` boxes ``(7,)``: the footprints are a :func:`rotated_pair` of ``kind``;
    the z intervals are equal for ``identical``, nested for ``nested``, overlapping otherwise.
    Two more kinds: ``"stacked"`` (same footprint, ``b`` sits on top of ``a``) and
    ``"z_disjoint"`` (same footprint, a gap in z)."""
    kinds = (*PAIR_KINDS, "stacked", "z_disjoint")
    kind = draw(st.sampled_from(kinds)) if kind is None else kind
    foot = "identical" if kind in ("stacked", "z_disjoint") else kind
    fa, fb, _ = draw(rotated_pair(foot, centre, sizes))
    cz = draw(_finite(-min(centre[1], 100.0), min(centre[1], 100.0)))
    ha = draw(length(sizes))
    if kind == "identical":
        czb, hb = cz, ha
    elif kind == "nested":
        hb = ha * draw(_finite(0.1, 0.9))
        czb = cz + draw(_finite(-0.45, 0.45)) * (ha - hb)
    elif kind == "stacked":
        hb = draw(length(sizes))
        czb = cz + (ha + hb) / 2
    elif kind == "z_disjoint":
        hb = draw(length(sizes))
        czb = cz + (ha + hb) / 2 * 1.01 + 1e-9
    else:
        hb = draw(length(sizes))
        czb = cz + draw(_finite(-0.9, 0.9)) * (ha + hb) / 2
    a = np.array([fa[0], fa[1], cz, fa[2], fa[3], ha, fa[4]])
    b = np.array([fb[0], fb[1], czb, fb[2], fb[3], hb, fb[4]])
    return Pair(a, b, kind)


@st.composite
def pair_batch(draw, pair_strategy, *, min_n=0, max_n=8):
    """``(A, B, kinds)``: pairs from ``pair_strategy`` stacked row by row, for
    ``elementwise=True`` tests. ``pair_strategy`` must give equal shapes for every pair
    (rotated or upright pairs; polygon pairs only with a fixed kind keeping K, e.g.
    ``polygon_pair("nested", k=4)``).

    Example: ``pair_batch(rotated_pair(centre=FAR, sizes=FAR_SIZES), min_n=1)``.
    """
    n = draw(st.integers(min_n, max_n))
    pairs = [draw(pair_strategy) for _ in range(n)]
    if not pairs:  # empty batches still need the row shape: take it from one drawn pair
        probe = draw(pair_strategy)
        return np.zeros((0, *probe.a.shape)), np.zeros((0, *probe.b.shape)), []
    a = np.stack([p.a for p in pairs])
    b = np.stack([p.b for p in pairs])
    return a, b, [p.kind for p in pairs]
