"""Far from the origin and at the edges of float64: DIoU at map offsets, magnitudes that
would overflow or underflow, and the convexity tolerance of tiny polygons far away.

References: exact rational arithmetic (``fractions``) on the exact values the kernels were
given, with the clipping of tests/test_exact.py; shapely for a cross-check of the rational
reference where it applies.
"""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest

import obbiou
from obbiou import boxes, diou, giou, iou
from obbiou.errors import InvalidInput
from obbiou.shapes import check
from tests.test_exact import exact_clip, exact_signed_area


def rect_exact(cx, cy, w, h, angle):
    """The corners of rotated box (cx, cy, w, h, angle) as the kernels define it: centre
    plus the half axes turned by the float64 values of cos and sin, exactly."""
    c, s = Fraction(math.cos(angle)), Fraction(math.sin(angle))
    cx, cy, hw, hh = Fraction(cx), Fraction(cy), Fraction(w) / 2, Fraction(h) / 2
    ux, uy, vx, vy = c * hw, s * hw, -s * hh, c * hh
    pts = [
        (cx - ux - vx, cy - uy - vy),
        (cx + ux - vx, cy + uy - vy),
        (cx + ux + vx, cy + uy + vy),
        (cx - ux + vx, cy - uy + vy),
    ]
    return pts if exact_signed_area(pts) > 0 else pts[::-1]


def exact_diou(pa, pb, ca, cb) -> Fraction:
    """DIoU (Zheng et al., AAAI 2020) of convex polygons pa, pb (exact CCW vertices) with
    centres ca, cb: IoU - d^2 / c^2, c the diagonal of the enclosing axis-aligned box."""
    area_a, area_b = exact_signed_area(pa), exact_signed_area(pb)
    inter = max(exact_signed_area(exact_clip(pb, pa)), Fraction(0))
    iou_ = inter / (area_a + area_b - inter)
    xs = [p[0] for p in pa + pb]
    ys = [p[1] for p in pa + pb]
    c2 = (max(xs) - min(xs)) ** 2 + (max(ys) - min(ys)) ** 2
    d2 = (cb[0] - ca[0]) ** 2 + (cb[1] - ca[1]) ** 2
    return iou_ - d2 / c2


def centroid(pts):
    """Exact area centroid of a simple polygon (the shoelace moments)."""
    a = exact_signed_area(pts)
    gx = gy = Fraction(0)
    for k in range(len(pts)):
        (x0, y0), (x1, y1) = pts[k], pts[(k + 1) % len(pts)]
        cross = x0 * y1 - x1 * y0
        gx += (x0 + x1) * cross
        gy += (y0 + y1) * cross
    return gx / (6 * a), gy / (6 * a)


@pytest.mark.parametrize(
    ("origin", "size"),
    [((4.65e6, 5.2e5), 0.05), ((1e7, -1e7), 0.001), ((-3.3e6, 4.1e6), 2.0)],
)
def test_rotated_diou_far_from_the_origin_against_exact_rationals(origin, size):
    # Once 3e-9 off for 5 cm boxes near 4.65e6 and 2.5e-7 for 1 mm boxes near 1e7: the
    # enclosing box came from extents rounded at the coordinates' magnitude.
    ox, oy = origin
    a = [ox, oy, size, 0.6 * size, 0.3]
    b = [ox + 0.2 * size, oy - 0.1 * size, 0.8 * size, 0.7 * size, 1.1]
    ref = exact_diou(rect_exact(*a), rect_exact(*b), a[:2], b[:2])  # exact rationals
    got = diou(a, b)
    assert abs(float(ref) - got) < 1e-12
    assert diou(b, a) == got  # each pair in one canonical order: symmetric bit for bit


@pytest.mark.parametrize(("origin", "size"), [((4.65e6, 5.2e5), 0.05), ((1e7, 1e7), 0.001)])
def test_polygon_diou_far_from_the_origin_against_exact_rationals(origin, size):
    # Once 5e-9 off near 4.65e6: centroids were absolute, rounded at 1e6 before the
    # difference. The polygons' float vertices are the exact input.
    ox, oy = origin
    pa = np.array([[0, 0], [1, 0], [1.2, 0.8], [0.1, 1.0]]) * size + [ox, oy]
    pb = np.array([[0.3, 0.2], [1.4, 0.1], [1.0, 1.3]]) * size + [ox, oy]
    ea = [(Fraction(x), Fraction(y)) for x, y in pa]
    eb = [(Fraction(x), Fraction(y)) for x, y in pb]
    ref = exact_diou(ea, eb, centroid(ea), centroid(eb))  # exact rationals
    assert abs(float(ref) - diou([pa], [pb])[0, 0]) < 1e-12


def test_extreme_but_valid_magnitudes_compute_right():
    # The largest and smallest magnitudes validation lets through: identical boxes have IoU
    # exactly 1, far-apart boxes a GIoU near -1 (hull almost all empty: hand-worked) and a
    # finite DIoU in [-1, 0].
    for scale in (1e98, 1e-99):
        a = [0.0, 0.0, scale, scale, 0.3]
        far = [40 * scale, 0.0, scale, scale, 0.3]
        assert iou(a, a) == 1.0 and giou(a, a) == 1.0 and diou(a, a) == 1.0
        assert -1.0 <= giou(a, far) < -0.9
        assert -1.0 <= diou(a, far) < 0.0
        up = [0.0, 0.0, 0.0, scale, scale, scale, 0.2]
        assert iou(up, up) == 1.0
        poly = np.array([[[0, 0], [1, 0], [0, 1]]]) * scale
        assert iou(poly, poly)[0, 0] == 1.0
        assert -1.0 <= giou(poly, poly + [40 * scale, 0])[0, 0] < -0.9


@pytest.mark.parametrize(
    ("rows", "message"),
    [
        # sides near 1e154: the area fits, the union of two such boxes would not
        ([[0, 0, 1.3e154, 1.3e154, 0.0]], "boxes[0]: width 1.3e+154 is beyond +-1e100"),
        # boxes 1.4e154 apart: the squared distance of DIoU would overflow
        ([[1.4e154, 0, 1, 1, 0.0]], "boxes[0]: cx 1.4e+154 is beyond +-1e100"),
        # sides below 1e-162: products underflow to 0 and iou(x, x) was 0
        (
            [[0, 0, 1, 1, 0.0], [0, 0, 1e-163, 1e-163, 0.0]],
            "boxes[1]: width 1e-163 is below 1e-100",
        ),
        ([[0, 0, 5.0, 1, 1, 1e-180, 0.0]], "boxes[0]: height 1e-180 is below 1e-100"),
        # a height below the rounding of cz: the z interval cz -+ h / 2 is empty
        ([[0, 0, 5.0, 1, 1, 1e-18, 0.0]], "boxes[0]: height 1e-18 is lost in rounding at cz 5.0"),
        ([[0, 0, 1e-120, 1]], "boxes[0]: extent 1e-120 is below 1e-100"),
        ([[[0, 0], [1e101, 0], [0, 1]]], "boxes[0]: vertex 1 x 1e+101 is beyond +-1e100"),
    ],
)
def test_magnitudes_float64_cannot_carry_are_rejected_with_a_clear_error(rows, message):
    with pytest.raises(InvalidInput) as err:
        check(rows)
    assert str(err.value).startswith(message)
    assert err.value.row == int(message.split("[")[1].split("]")[0])


@pytest.mark.parametrize(
    "box",
    [
        [1.0, 1.0, 1e-20, 1e-20, 0.3],  # whole box below the rounding of its centre
        [1.0, 1.0, 10.0, 1e-20, 0.0],  # a sliver whose y extent rounds to a point
        [1e7, -1e7, 1e-9, 3e-10, 1.0],
        [0.0, 0.0, 5.0, 2.0, 1.0, 1e-11, 0.2],  # upright, height 2e-12 of cz
    ],
)
def test_boxes_below_the_rounding_of_their_centre_still_equal_themselves(box):
    # iou(x, x) == 1 exactly for every valid box of positive size (docs/design.md, section
    # 4); such boxes once collapsed to a point extent and were disjoint from themselves
    assert iou(box, box) == 1.0
    assert giou(box, box) == 1.0
    assert len(obbiou.overlapping_pairs([box, box])) == 1


def test_zero_sizes_stay_valid():
    # a zero-size box is valid and overlaps nothing (docs/design.md, section 4)
    check([[0, 0, 0.0, 1.0, 0.0], [5, 5, 0, 0, 1.0]])
    assert iou([0, 0, 0.0, 1.0, 0.0], [0, 0, 1.0, 1.0, 0.0]) == 0.0


def test_convexity_tolerance_scales_with_the_polygon_not_its_coordinates():
    # A 1 mm square near 1e7 with one vertex pushed inward by 1e-5 of its size: a dent
    # (was accepted, its IoU then off by 4e-6). Hand-worked: the turn at the dented vertex
    # has cross product -(1e-3 * 1e-8) per unit, far beyond 1e-9 of the square's size.
    o = 1e7
    side = 1e-3
    dent = 1e-5 * side
    poly = [
        [o, o],
        [o + side, o],
        [o + side - dent, o + side / 2],
        [o + side, o + side],
        [o, o + side],
    ]
    with pytest.raises(InvalidInput, match="not convex"):
        check([poly])
    # Corners of rotated rectangles computed in float64 at map offsets still pass, from a
    # 1 m box near 1e7 down to a 1 mm one near 1e6 (rounding far below 1e-9 of their size).
    for centre, size in ((1e7, 1.0), (4.65e6, 0.05), (1e6, 1e-3)):
        rect = [centre, -centre, size, 0.4 * size, 0.7]
        quad = boxes.corners(rect)
        check([quad])
        assert iou([quad], [quad])[0, 0] == 1.0
