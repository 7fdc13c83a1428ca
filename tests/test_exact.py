"""Measures against exact rational arithmetic (fractions) and scipy.spatial volumes.

The rational reference clips convex polygons with Sutherland-Hodgman (CACM 1974) in
``fractions.Fraction`` on the exact values of the float inputs: no rounding at all, so it
is the true area of the boxes the kernels were given.
"""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest

from obbiou.boxes import corners
from obbiou.measures import coverage, giou, intersection, iou

# ---------------------------------------------------------------------------------------
# exact rational reference


def exact_polygon(vertices) -> list[tuple[Fraction, Fraction]]:
    """Exact vertices, counter-clockwise."""
    pts = [(Fraction(float(x)), Fraction(float(y))) for x, y in vertices]
    if exact_signed_area(pts) < 0:
        pts.reverse()
    return pts


def exact_signed_area(pts) -> Fraction:
    s = Fraction(0)
    for k in range(len(pts)):
        x0, y0 = pts[k]
        x1, y1 = pts[(k + 1) % len(pts)]
        s += x0 * y1 - x1 * y0
    return s / 2


def exact_clip(subject, clip) -> list[tuple[Fraction, Fraction]]:
    """Sutherland-Hodgman in exact arithmetic: subject clipped by each edge of clip (CCW)."""
    out = list(subject)
    for k in range(len(clip)):
        ax, ay = clip[k]
        bx, by = clip[(k + 1) % len(clip)]
        if (ax, ay) == (bx, by):
            continue
        src, out = out, []
        if not src:
            break

        def side(p, ax=ax, ay=ay, bx=bx, by=by):
            return (bx - ax) * (p[1] - ay) - (by - ay) * (p[0] - ax)

        prev = src[-1]
        for cur in src:
            sp, sc = side(prev), side(cur)
            if (sc >= 0) != (sp >= 0):
                t = sp / (sp - sc)
                out.append((prev[0] + t * (cur[0] - prev[0]), prev[1] + t * (cur[1] - prev[1])))
            if sc >= 0:
                out.append(cur)
            prev = cur
    return out


def exact_measures(pa, pb) -> tuple[Fraction, Fraction]:
    """Exact (intersection area, IoU) of two convex polygons (float vertices)."""
    a, b = exact_polygon(pa), exact_polygon(pb)
    area_a, area_b = abs(exact_signed_area(a)), abs(exact_signed_area(b))
    inter = max(exact_signed_area(exact_clip(b, a)), Fraction(0))
    union = area_a + area_b - inter
    return inter, (inter / union if union else Fraction(0))


def square(cx, cy, half):
    return [
        (cx - half, cy - half),
        (cx + half, cy - half),
        (cx + half, cy + half),
        (cx - half, cy + half),
    ]


def turned(vertices, angle, about=(0.0, 0.0)):
    c, s = math.cos(angle), math.sin(angle)
    ox, oy = about
    return [
        (ox + c * (x - ox) - s * (y - oy), oy + s * (x - ox) + c * (y - oy)) for x, y in vertices
    ]


# Adversarial families (each a pair of convex polygons with float vertices).
FAMILIES = {
    "identical square": (square(0, 0, 1), square(0, 0, 1)),
    "identical turned far away": (
        turned(square(5e5, -3e5, 7.5), 0.3, (5e5, -3e5)),
        turned(square(5e5, -3e5, 7.5), 0.3, (5e5, -3e5)),
    ),
    "shared edge": (square(0, 0, 1), square(2, 0, 1)),
    "shared edge, half length": (square(0, 0, 1), square(2, 1, 1)),
    "shared edge of diamonds": (
        turned(square(0, 0, 1), math.pi / 4),
        turned(square(0, 0, 1), math.pi / 4, (0, 0)),
    ),
    "nested": (square(0, 0, 4), square(1, -1, 0.5)),
    "nested, touching inside": (square(0, 0, 4), square(3, 0, 1)),
    "touching corners": (square(0, 0, 1), square(2, 2, 1)),
    "diamond touching a square's corner": (
        square(0, 0, 1),
        turned(square(1 + math.sqrt(2), 1, 1), math.pi / 4, (1 + math.sqrt(2), 1)),
    ),
    "parallel within 1e-12 rad": (
        square(0, 0, 1),
        turned(square(0.5, 0.25, 1), 1e-12, (0.5, 0.25)),
    ),
    "parallel within 1e-12 rad, shared edge line": (
        square(0, 0, 1),
        turned(square(0, 2, 1), 1e-12, (0, 2)),
    ),
    "very thin": (square(0, 0, 1), [(-2.0, -1e-9), (2.0, -1e-9), (2.0, 1e-9), (-2.0, 1e-9)]),
    "very thin, turned": (
        square(0, 0, 1),
        turned([(-2.0, -1e-9), (2.0, -1e-9), (2.0, 1e-9), (-2.0, 1e-9)], 0.4),
    ),
    "triangle and pentagon": (
        [(0.0, 0.0), (3.0, 0.0), (0.0, 3.0)],
        [(1.0, 1.0), (2.5, 0.5), (3.0, 2.0), (2.0, 3.0), (0.5, 2.5)],
    ),
    "octagon of squares": (square(0, 0, 1), turned(square(0, 0, 1), math.pi / 4)),
}
# The diamond-edge family shares an edge by construction: shift the second diamond by
# exactly one diagonal step.
_d = turned(square(0, 0, 1), math.pi / 4)
FAMILIES["shared edge of diamonds"] = (_d, [(x + 1.0, y + 1.0) for x, y in _d])


@pytest.mark.parametrize("family", list(FAMILIES))
def test_polygons_against_exact_rationals(family):
    pa, pb = FAMILIES[family]
    exact_inter, exact_iou = exact_measures(pa, pb)  # fractions: the exact reference
    got_inter = intersection(pa, pb, shape="polygon")
    got_iou = iou(pa, pb, shape="polygon")
    scale = max(abs(float(exact_polygon(pa)[0][0])), abs(float(exact_polygon(pa)[0][1])), 1.0)
    # Rounding of float64 only: relative to the boxes' own size, not to the coordinates.
    assert abs(got_inter - float(exact_inter)) <= 1e-13 * max(float(exact_inter), 1.0)
    assert abs(got_iou - float(exact_iou)) <= 1e-12, scale
    assert got_iou == iou(pb, pa, shape="polygon")  # symmetric bit for bit
    if exact_iou == 1:
        assert got_iou == 1.0
    if exact_inter == 0:
        assert got_inter <= 1e-15 * float(abs(exact_signed_area(exact_polygon(pa))))


@pytest.mark.parametrize(
    "family",
    [
        "identical square",
        "shared edge",
        "shared edge, half length",
        "nested",
        "nested, touching inside",
        "touching corners",
        "very thin",
    ],
)
def test_axis_boxes_against_exact_rationals(family):
    pa, pb = FAMILIES[family]

    def box(p):
        return [
            min(x for x, _ in p),
            min(y for _, y in p),
            max(x for x, _ in p),
            max(y for _, y in p),
        ]

    a, b = box(pa), box(pb)
    exact_inter, exact_iou = exact_measures(corners(a), corners(b))  # fractions reference
    # Axis boxes need only min, max and one product per axis: exact up to one rounding.
    assert intersection(a, b) == pytest.approx(float(exact_inter), rel=1e-15, abs=0)
    assert iou(a, b) == pytest.approx(float(exact_iou), rel=2e-16, abs=0)
    as_rotated = [(a[0] + a[2]) / 2, (a[1] + a[3]) / 2, a[2] - a[0], a[3] - a[1], 0.0]
    assert abs(iou(as_rotated, b) - float(exact_iou)) <= 1e-12


@pytest.mark.parametrize("offset", [0.0, 1e6])
@pytest.mark.parametrize("delta", [0.0, 1e-12, -1e-12, 3e-9, math.pi / 2 + 1e-12])
def test_rotated_near_parallel_against_exact_rationals(offset, delta):
    # Rotated boxes whose angles differ by delta: the reference clips the float corners
    # exactly (fractions); the corners carry the rounding of cos/sin (~1e-16 relative).
    a = [offset + 0.25, offset - 0.5, 4.0, 2.0, 0.7]
    b = [offset + 1.0, offset + 0.3, 3.0, 2.5, 0.7 + delta]

    def local(r):
        return [r[0] - offset, r[1] - offset, *r[2:]]

    _, exact_iou = exact_measures(corners(local(a)), corners(local(b)))
    assert abs(iou(a, b) - float(exact_iou)) <= 1e-12
    # Sharing the long edge's line: b shifted along a's own y axis by the sum of half heights.
    c, s = math.cos(0.7), math.sin(0.7)
    b2 = [a[0] - s * 2.0, a[1] + c * 2.0, 4.0, 2.0, 0.7 + delta]
    _, exact_iou = exact_measures(corners(local(a)), corners(local(b2)))
    assert abs(iou(a, b2) - float(exact_iou)) <= 1e-12


def test_nested_axis_boxes_exact_ratio():
    # Nested axis boxes: IoU is the ratio of areas, computed with one division (fractions
    # reference: the exact ratio rounded once).
    outer, inner = [0.0, 0.0, 10.0, 3.0], [2.5, 1.0, 3.0, 2.75]
    exact = Fraction(0.5) * Fraction(1.75) / (Fraction(10) * Fraction(3))
    assert iou(outer, inner) == float(exact)
    assert coverage(inner, outer) == 1.0


def test_giou_hull_against_exact_rationals():
    # GIoU of two disjoint squares: hull is an exact hexagon; by hand (fractions):
    # squares [0,1]^2 and [2,3]x[1,2]: hull area 4 - 2 * (1/2) ... computed exactly below.
    pa, pb = square(0.5, 0.5, 0.5), square(2.5, 1.5, 0.5)
    hull = exact_polygon([(0, 0), (1, 0), (3, 1), (3, 2), (2, 2), (0, 1)])
    hull_area = exact_signed_area(hull)
    union = Fraction(2)
    expected = -(hull_area - union) / hull_area
    assert giou(pa, pb, shape="polygon") == pytest.approx(float(expected), abs=1e-15)


# ---------------------------------------------------------------------------------------
# scipy.spatial: upright 3D volumes by half-space intersection and convex hull

spatial = pytest.importorskip("scipy.spatial")
optimize = pytest.importorskip("scipy.optimize")


def halfspaces(box) -> np.ndarray:
    """Rows (normal, offset) with normal . x + offset <= 0 for an upright box."""
    cx, cy, cz, length, width, height, yaw = box
    c, s = math.cos(yaw), math.sin(yaw)
    rows = []
    for nx, ny, half in ((c, s, length / 2), (-s, c, width / 2)):
        d = nx * cx + ny * cy
        rows.append([nx, ny, 0.0, -(d + half)])
        rows.append([-nx, -ny, 0.0, d - half])
    rows.append([0.0, 0.0, 1.0, -(cz + height / 2)])
    rows.append([0.0, 0.0, -1.0, cz - height / 2])
    return np.array(rows)


def scipy_volume(a, b) -> float:
    """Intersection volume by scipy.spatial.HalfspaceIntersection + ConvexHull."""
    hs = np.vstack([halfspaces(a), halfspaces(b)])
    norms = np.linalg.norm(hs[:, :3], axis=1)
    # Chebyshev centre (largest inscribed ball) as the interior point.
    res = optimize.linprog(
        np.r_[0, 0, 0, -1.0],
        A_ub=np.column_stack([hs[:, :3], norms]),
        b_ub=-hs[:, 3],
        bounds=[(None, None)] * 4,
    )
    if res.x[3] <= 1e-9:  # no interior: the boxes at most touch
        return 0.0
    inter = spatial.HalfspaceIntersection(hs, res.x[:3])
    return float(spatial.ConvexHull(inter.intersections).volume)


def test_upright_against_scipy_volumes():
    rng = np.random.default_rng(11)
    n = 40
    a = np.column_stack(
        [rng.uniform(0, 3, (n, 3)), rng.uniform(0.5, 3, (n, 3)), rng.uniform(-3, 3, n)]
    )
    b = np.column_stack(
        [rng.uniform(0, 3, (n, 3)), rng.uniform(0.5, 3, (n, 3)), rng.uniform(-3, 3, n)]
    )
    got = intersection(a, b, elementwise=True)
    got_iou = iou(a, b, elementwise=True)
    for k in range(n):
        ref = scipy_volume(a[k], b[k])  # scipy.spatial half-space intersection volume
        assert got[k] == pytest.approx(ref, abs=1e-7)
        vol = np.prod(a[k, 3:6]) + np.prod(b[k, 3:6]) - ref
        assert got_iou[k] == pytest.approx(ref / vol, abs=1e-8)
    assert (got > 0).sum() > n // 4  # the sample really exercises overlaps


def test_axis3_against_scipy_volume():
    a = [0.0, 0.0, 0.0, 2.0, 1.0, 3.0]
    b = [1.0, -1.0, 1.0, 4.0, 0.5, 2.0]
    ua = [1.0, 0.5, 1.5, 2.0, 1.0, 3.0, 0.0]
    ub = [2.5, -0.25, 1.5, 3.0, 1.5, 1.0, 0.0]
    ref = scipy_volume(ua, ub)  # scipy.spatial reference (the same boxes as upright)
    assert intersection(a, b) == pytest.approx(ref, abs=1e-9)
    assert intersection(a, b) == 1.0 * 0.5 * 1.0  # by hand
    # An axis3 box mixed with an upright one (scipy.spatial reference).
    assert intersection(a, ub) == pytest.approx(scipy_volume(ua, ub), abs=1e-9)
