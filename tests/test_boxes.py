"""Box tools (obbiou.boxes) against outside references: shapely (areas, bounds, rotation,
minimum rotated rectangle), scipy.spatial (3D hull volumes) and exact rational arithmetic
(``fractions.Fraction``)."""

from __future__ import annotations

import itertools
import math
from fractions import Fraction

import numpy as np
import pytest
import shapely
import shapely.affinity
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.spatial import ConvexHull

from obbiou.boxes import canonical, corners, envelope, fit_rotated, flip_y, footprint, size
from obbiou.shapes import check
from tests.strategies import (
    FAR,
    FAR_SIZES,
    HUGE,
    TINY,
    axis3_boxes,
    axis_box,
    axis_boxes,
    convex_polygon,
    convex_polygons,
    coordinate,
    hull_polygon,
    length,
    rotated_box,
    rotated_boxes,
    upright_box,
    upright_boxes,
)

MODERATE = settings(max_examples=50, deadline=None)

any_rotated = st.one_of(
    rotated_box(),
    rotated_box(centre=FAR, sizes=FAR_SIZES),
    rotated_box(sizes=TINY),
    rotated_box(sizes=HUGE),
    rotated_box(zero_size=True),
)
any_polygon = st.one_of(
    convex_polygon(),
    convex_polygon(centre=FAR, sizes=FAR_SIZES),
    hull_polygon(),
    hull_polygon(centre=FAR, sizes=FAR_SIZES),
)


def shapely_rotated(box) -> shapely.Polygon:
    """The rotated box built the shapely way: an axis box about the origin, turned, moved."""
    cx, cy, w, h, a = (float(v) for v in box)
    poly = shapely.box(-w / 2, -h / 2, w / 2, h / 2)
    poly = shapely.affinity.rotate(poly, a, origin=(0, 0), use_radians=True)
    return shapely.affinity.translate(poly, cx, cy)


def same_points(p: np.ndarray, q: np.ndarray, tol: float) -> bool:
    """Every point of p is within tol of some point of q and vice versa."""
    d = np.linalg.norm(p[:, None, :] - q[None, :, :], axis=-1)
    return bool(d.min(axis=1).max() <= tol and d.min(axis=0).max() <= tol)


def region_tol(pts: np.ndarray) -> float:
    """Rounding allowance for coordinates of this magnitude and extent."""
    return 1e-9 * (float(np.abs(pts).max()) + float(np.ptp(pts, axis=0).max()) + 1e-300)


# ----------------------------------------------------------------- corners, size, envelope


@MODERATE
@given(any_rotated)
def test_rotated_corners_match_shapely(box):
    pts = corners(box)
    ref = shapely_rotated(box)  # shapely.affinity.rotate of shapely.box
    ref_pts = np.asarray(ref.exterior.coords)[:-1]
    tol = region_tol(pts)
    assert same_points(pts, ref_pts, tol)
    # Corner 0 is the box's own (-x, -y) corner (shapely.affinity on a single point).
    own = shapely.affinity.rotate(
        shapely.Point(-box[2] / 2, -box[3] / 2), box[4], origin=(0, 0), use_radians=True
    )
    assert np.hypot(own.x + box[0] - pts[0, 0], own.y + box[1] - pts[0, 1]) <= tol
    if box[2] > 0 and box[3] > 0:
        assert shapely.Polygon(pts).exterior.is_ccw  # shapely: counter-clockwise, y up


@MODERATE
@given(any_rotated)
def test_rotated_size_and_envelope_match_shapely(box):
    ref = shapely_rotated(box)
    # shapely .area of the box at the origin: once moved to its centre, a 1e-6 box at x = 33
    # carries corner rounding of 1e-8 of its area (hypothesis found it)
    at_origin = shapely_rotated([0.0, 0.0, *box[2:]])
    assert math.isclose(size(box), at_origin.area, rel_tol=1e-8, abs_tol=1e-300)
    np.testing.assert_allclose(envelope(box), ref.bounds, rtol=0, atol=region_tol(corners(box)))


@MODERATE
@given(st.one_of(any_polygon, any_polygon.map(lambda p: p[::-1])))
def test_polygon_size_and_envelope_match_shapely(poly):
    ref = shapely.Polygon(poly)
    assert math.isclose(size(poly, shape="polygon"), ref.area, rel_tol=1e-9)  # shapely .area
    np.testing.assert_array_equal(envelope(poly, shape="polygon"), ref.bounds)  # .bounds


@MODERATE
@given(st.one_of(axis_boxes(zero_size=True), axis_boxes(centre=FAR, sizes=FAR_SIZES)))
def test_axis_corners_size_envelope_match_shapely(b):
    for row, pts, area, env in zip(b, corners(b), size(b), envelope(b), strict=True):
        ref = shapely.box(*row)  # shapely.box takes (minx, miny, maxx, maxy)
        assert same_points(pts, np.asarray(ref.exterior.coords)[:-1], 0.0)
        assert math.isclose(area, ref.area, rel_tol=1e-12, abs_tol=1e-300)
        np.testing.assert_array_equal(env, ref.bounds)


@MODERATE
@given(st.one_of(upright_box(), upright_box(centre=FAR, sizes=FAR_SIZES)))
def test_upright_volume_and_corners_match_scipy_and_shapely(box):
    pts = corners(box)
    # scipy.spatial.ConvexHull volume of the 8 corners, relative to one corner (Qhull).
    hull = ConvexHull(pts - pts[0])
    assert math.isclose(size(box), hull.volume, rel_tol=1e-8)
    # Bottom and top faces are the shapely footprint at z = cz -/+ height / 2.
    foot = footprint(box)
    np.testing.assert_array_equal(foot, box[[0, 1, 3, 4, 6]])
    ref = shapely_rotated(foot)
    tol = region_tol(pts[:, :2])
    assert same_points(pts[:4, :2], np.asarray(ref.exterior.coords)[:-1], tol)
    np.testing.assert_array_equal(pts[:4, :2], pts[4:, :2])
    np.testing.assert_allclose(pts[:4, 2], box[2] - box[5] / 2)
    np.testing.assert_allclose(pts[4:, 2], box[2] + box[5] / 2)
    assert math.isclose(size(foot) * box[5], size(box), rel_tol=1e-12)


@MODERATE
@given(axis3_boxes(min_n=1))
def test_axis3_volume_matches_scipy(b):
    for row, pts, vol in zip(b, corners(b), size(b), strict=True):
        assert math.isclose(vol, ConvexHull(pts - pts[0]).volume, rel_tol=1e-8)  # scipy Qhull
        np.testing.assert_array_equal(envelope(row), row)
        np.testing.assert_array_equal(footprint(row), row[[0, 1, 3, 4]])


def test_footprint_of_upright_boxes_worked_example():
    # A car-sized box: 4.5 m long, 1.8 m wide, 1.6 m tall, heading 30 degrees (invented).
    box = np.array([12.0, -3.0, 0.8, 4.5, 1.8, 1.6, np.pi / 6])
    foot = footprint(box)
    np.testing.assert_array_equal(foot, [12.0, -3.0, 4.5, 1.8, np.pi / 6])
    # Its area is length * width (shapely area of the footprint polygon).
    assert math.isclose(shapely_rotated(foot).area, 4.5 * 1.8, rel_tol=1e-12)
    assert footprint(np.zeros((0, 7))).shape == (0, 5)
    with pytest.raises(ValueError, match="footprint needs 3D boxes"):
        footprint([0, 0, 1, 1, 0.0])


# ------------------------------------------------------------------------------ fit_rotated


def assert_contains(box: np.ndarray, pts: np.ndarray) -> None:
    """Every point lies in the rotated box, to rounding of the box's magnitude."""
    cx, cy, w, h, a = box
    dx, dy = pts[:, 0] - cx, pts[:, 1] - cy
    u = dx * math.cos(a) + dy * math.sin(a)
    v = -dx * math.sin(a) + dy * math.cos(a)
    tol = 1e-12 * (float(np.abs(pts).max()) + 1.0) + 1e-12 * max(w, h)
    assert np.all(np.abs(u) <= w / 2 + tol) and np.all(np.abs(v) <= h / 2 + tol)


def assert_canonical_rotated(box: np.ndarray) -> None:
    w, h, a = box[2], box[3], box[4]
    assert w >= h >= 0
    half = np.pi / 4 if w == h else np.pi / 2
    assert -half <= a < half


def point_sets(centre=(0.0, 100.0), sizes=(0.1, 100.0), max_points=12):
    @st.composite
    def draw_set(draw):
        cx, cy = draw(coordinate(centre)), draw(coordinate(centre))
        half = draw(length(sizes)) / 2
        xy = st.floats(-half, half, allow_nan=False)
        offsets = draw(st.lists(st.tuples(xy, xy), min_size=1, max_size=max_points))
        return np.array([(cx + dx, cy + dy) for dx, dy in offsets])

    return draw_set()


@settings(max_examples=80, deadline=None)
@given(st.one_of(point_sets(), point_sets(centre=FAR, sizes=FAR_SIZES), point_sets(sizes=TINY)))
def test_fit_matches_shapely_minimum_rotated_rectangle(pts):
    box = fit_rotated(pts)
    assert_canonical_rotated(box)
    assert_contains(box, pts)
    # shapely.minimum_rotated_rectangle (GEOS >= 3.12: minimum area), on points moved to a
    # local origin so that shapely's own rounding at 1e6 does not blur the comparison.
    origin = pts[0]
    ref = shapely.minimum_rotated_rectangle(shapely.MultiPoint(pts - origin))
    extent = float(np.ptp(pts, axis=0).max())
    assert math.isclose(size(box), ref.area, rel_tol=1e-9, abs_tol=1e-12 * extent**2)


@MODERATE
@given(st.one_of(convex_polygons(min_n=1), convex_polygons(min_n=1, centre=FAR, sizes=FAR_SIZES)))
def test_fit_batch_of_polygons_matches_shapely_row_by_row(polys):
    out = fit_rotated(polys, shape="polygon")
    assert out.shape == (len(polys), 5)
    for box, poly in zip(out, polys, strict=True):
        assert_contains(box, poly)
        ref = shapely.minimum_rotated_rectangle(shapely.Polygon(poly - poly[0]))  # shapely
        assert math.isclose(size(box), ref.area, rel_tol=1e-9)
        np.testing.assert_array_equal(box, fit_rotated(poly))  # batch == one by one


@settings(max_examples=40, deadline=None)
@given(
    st.one_of(
        convex_polygon(min_k=20, max_k=80),
        convex_polygon(min_k=20, max_k=80, centre=FAR, sizes=FAR_SIZES),
    ),
    st.integers(0, 2**32 - 1),
)
def test_fit_many_hull_vertices_matches_shapely(ring, seed):
    # Many hull vertices exercise the calipers' pointer walk; interior points and shuffling
    # exercise the hull (more than 32 points take the merge-sort path).
    rng = np.random.default_rng(seed)
    centre = ring.mean(axis=0)
    inner = centre + 0.5 * (ring[rng.integers(0, len(ring), 30)] - centre)
    pts = rng.permutation(np.concatenate([ring, inner]))
    box = fit_rotated(pts)
    assert_contains(box, pts)
    ref = shapely.minimum_rotated_rectangle(shapely.MultiPoint(pts - pts[0]))  # shapely
    assert math.isclose(size(box), ref.area, rel_tol=1e-9)


def exact_min_area(points: list[tuple[int, int]]) -> Fraction:
    """Minimum enclosing-rectangle area by exact rational arithmetic: the best rectangle has a
    side along a hull edge (Freeman & Shapira 1975), and every point-pair direction gives an
    enclosing rectangle, so the minimum over all pairs is the minimum. With e unnormalised,
    area = (extent of p.e) * (extent of p x e) / |e|^2: rational for integer points."""
    best = None
    for (x0, y0), (x1, y1) in itertools.combinations(points, 2):
        ex, ey = x1 - x0, y1 - y0
        if ex == 0 and ey == 0:
            continue
        u = [x * ex + y * ey for x, y in points]
        v = [y * ex - x * ey for x, y in points]
        area = Fraction((max(u) - min(u)) * (max(v) - min(v)), ex * ex + ey * ey)
        best = area if best is None or area < best else best
    return Fraction(0) if best is None else best


@settings(max_examples=80, deadline=None)
@given(
    st.lists(st.tuples(st.integers(-50, 50), st.integers(-50, 50)), min_size=1, max_size=9),
    st.sampled_from([0, 10**6, -(10**5)]),
)
def test_fit_area_is_exact_against_fractions(points, offset):
    pts = [(x + offset, y - offset) for x, y in points]
    box = fit_rotated(np.array(pts, dtype=float))
    exact = exact_min_area(pts)  # fractions.Fraction: exact rational reference
    assert abs(Fraction(float(box[2])) * Fraction(float(box[3])) - exact) <= Fraction(1, 10**9) * (
        exact + 1
    )
    assert_contains(box, np.array(pts, dtype=float))


def test_fit_known_cases():
    # An axis rectangle's corners in shuffled order, with inner points: the rectangle itself.
    pts = [[4, 1], [0, 3], [4, 3], [2, 2], [0, 1], [1, 2.5]]
    np.testing.assert_array_equal(fit_rotated(pts), [2, 2, 4, 2, 0])
    # A right triangle with legs 4 and 3: all three sides give area 12 = 2 * triangle
    # (for a right triangle each side's rectangle is side x altitude, geometry from memory).
    # Tie rule: the first hull edge counter-clockwise from the leftmost-lowest vertex wins.
    np.testing.assert_allclose(fit_rotated([[0, 0], [4, 0], [0, 3]]), [2, 1.5, 4, 3, 0])
    # A regular hexagon of side 1: the best rectangle is 2 x sqrt(3) (across the corners x
    # across the flats; geometry, from memory), confirmed by shapely below.
    t = np.arange(6) * np.pi / 3
    hexagon = np.stack([np.cos(t), np.sin(t)], axis=1)
    box = fit_rotated(hexagon)
    assert math.isclose(box[2] * box[3], 2 * math.sqrt(3), rel_tol=1e-12)
    assert math.isclose(
        shapely.minimum_rotated_rectangle(shapely.Polygon(hexagon)).area,
        2 * math.sqrt(3),
        rel_tol=1e-12,
    )
    # A rotated box's own corners give the box back (canonical form).
    rot = np.array([500123.25, 4_000_321.5, 7.0, 3.0, 0.4])
    np.testing.assert_allclose(fit_rotated(corners(rot)), rot, rtol=0, atol=1e-8)
    # Degenerate sets.
    np.testing.assert_array_equal(fit_rotated([[3, 4]]), [3, 4, 0, 0, 0])
    np.testing.assert_array_equal(fit_rotated([[3, 4]] * 5), [3, 4, 0, 0, 0])
    seg = fit_rotated([[0, 0], [2, 0], [1, 0], [2, 0]])
    np.testing.assert_array_equal(seg, [1, 0, 2, 0, 0])
    vertical = fit_rotated([[5, 1], [5, -3]])
    np.testing.assert_allclose(vertical, [5, -1, 4, 0, -np.pi / 2])


def test_fit_other_layouts_and_empty_input():
    # A rectangle is its own minimum-area rectangle; the rows are in the documented normal form.
    np.testing.assert_array_equal(fit_rotated([0, 0, 4, 2]), [2, 1, 4, 2, 0])  # axis
    tall = fit_rotated([[0, 0, 2, 4]])  # axis, taller than wide
    np.testing.assert_allclose(tall, [[1, 2, 4, 2, -np.pi / 2]])
    np.testing.assert_array_equal(fit_rotated([1, 2, 3, 1, np.pi]), [1, 2, 3, 1, 0])  # rotated
    assert fit_rotated(np.zeros((0, 4, 2))).shape == (0, 5)
    assert fit_rotated(np.zeros((0, 5))).shape == (0, 5)
    assert fit_rotated(np.zeros((0, 4))).shape == (0, 5)


def test_fit_bad_input():
    with pytest.raises(ValueError, match=r"^points\[1\]: point 2 y is NaN$"):
        fit_rotated([[[0, 0], [1, 0], [0, 1]], [[0, 0], [1, 0], [0, np.nan]]])
    with pytest.raises(ValueError, match=r"^points: a point set needs at least one point"):
        fit_rotated(np.zeros((3, 0, 2)))
    with pytest.raises(ValueError, match=r"^points: fit_rotated needs 2D point sets"):
        fit_rotated([0, 0, 0, 1, 1, 1, 0])
    with pytest.raises(ValueError, match=r"^points\[0\]: polygon is not convex"):
        fit_rotated([[0, 0], [2, 0], [1, 1], [2, 2], [0, 2]], shape="polygon")
    with pytest.raises(ValueError, match=r"^points\[0\]: negative width"):
        fit_rotated([0, 0, -1, 1, 0])


@MODERATE
@given(point_sets(), coordinate(FAR), coordinate(FAR), st.integers(1, 4))
def test_fit_translation_and_padding(pts, tx, ty, repeat):
    base = fit_rotated(pts)
    moved = fit_rotated(pts + [tx, ty])
    # Translation keeps the area (the rectangle itself may differ where rectangles tie, e.g.
    # the three sides of a right triangle, and rounding at the offset picks another one).
    assert_contains(moved, pts + [tx, ty])
    extent = float(np.ptp(pts, axis=0).max())
    tol = 1e-14 * extent * (abs(tx) + abs(ty) + extent)  # rounding of the moved points
    assert math.isclose(moved[2] * moved[3], base[2] * base[3], rel_tol=1e-6, abs_tol=tol)
    padded = np.concatenate([pts, np.repeat(pts[:1], repeat, axis=0)])
    np.testing.assert_array_equal(fit_rotated(padded), base)  # repeating a point: no change


# -------------------------------------------------------------------------------- canonical


def polygons_match(p: np.ndarray, q: np.ndarray) -> bool:
    """shapely: p and q cover the same region (symmetric difference of negligible area)."""
    a, b = shapely.Polygon(p - p[0]), shapely.Polygon(q - p[0])
    scale = max(a.area, float(np.ptp(p, axis=0).max()) ** 2, 1e-300)
    return a.symmetric_difference(b).area <= 1e-9 * scale


@MODERATE
@given(any_rotated)
def test_canonical_rotated_same_rectangle_and_idempotent(box):
    c = canonical(box)
    assert_canonical_rotated(c)
    np.testing.assert_array_equal(canonical(c), c)  # idempotent, bit for bit
    np.testing.assert_array_equal(c[:2], box[:2])
    assert {c[2], c[3]} == {box[2], box[3]}
    assert polygons_match(corners(box), corners(c))  # shapely: same region
    assert math.isclose(shapely_rotated(c).area, shapely_rotated(box).area, rel_tol=1e-9)


@MODERATE
@given(
    rotated_box(),
    st.sampled_from(["swap+", "swap-", "half", "full", "back"]),
)
def test_canonical_same_row_from_any_description(box, how):
    cx, cy, w, h, a = box
    other = {
        "swap+": [cx, cy, h, w, a + np.pi / 2],
        "swap-": [cx, cy, h, w, a - np.pi / 2],
        "half": [cx, cy, w, h, a + np.pi],
        "full": [cx, cy, w, h, a + 2 * np.pi],
        "back": [cx, cy, w, h, a - 3 * np.pi],
    }[how]
    c1, c2 = canonical(box), canonical(other)
    np.testing.assert_array_equal(c1[:4], c2[:4])
    # Equal angles to rounding; next to the ends of the range rounding may land on the other
    # end (the same rectangle), so fall back to comparing the corner sets there.
    if abs(c1[4] - c2[4]) > 1e-9:
        half = np.pi / 4 if c1[2] == c1[3] else np.pi / 2
        assert min(abs(abs(c1[4]) - half), abs(abs(c2[4]) - half)) < 1e-9
        assert same_points(corners(c1), corners(c2), region_tol(corners(c1)))


def test_canonical_squares_points_and_segments():
    # The documented normal form itself (obbiou's own rule; no outside reference).
    sq = canonical([[0, 0, 2, 2, 1.0], [0, 0, 2, 2, 1.0 - np.pi / 2], [0, 0, 2, 2, 1.0 + np.pi]])
    np.testing.assert_allclose(sq[:, 4], np.full(3, 1.0 - np.pi / 2), atol=1e-15)  # [-π/4, π/4)
    pts = canonical([[1, 2, 0, 0, 0.3], [1, 2, 0, 0, -2.0]])
    np.testing.assert_array_equal(pts, [[1, 2, 0, 0, 0], [1, 2, 0, 0, 0]])
    seg = canonical([[0, 0, 0, 3, 0.0], [0, 0, 3, 0, np.pi / 2]])
    np.testing.assert_allclose(seg, [[0, 0, 3, 0, -np.pi / 2], [0, 0, 3, 0, -np.pi / 2]])


@MODERATE
@given(any_polygon, st.integers(0, 20), st.booleans())
def test_canonical_polygon_same_row_from_any_start_and_winding(poly, roll, reverse):
    other = np.roll(poly, roll % len(poly), axis=0)
    if reverse:
        other = other[::-1]
    c = canonical(poly, shape="polygon")
    np.testing.assert_array_equal(canonical(other, shape="polygon"), c)
    np.testing.assert_array_equal(canonical(c, shape="polygon"), c)
    assert shapely.Polygon(c).exterior.is_ccw  # shapely: counter-clockwise
    lowest = c[:, 1].min()
    assert c[0, 1] == lowest and c[0, 0] == c[c[:, 1] == lowest, 0].min()
    assert same_points(c, poly, 0.0)


def test_canonical_polygon_with_repeated_start_vertex():
    # The documented tie rule for a repeated start vertex (own rule; no outside reference).
    p = np.array([[1, 0], [1, 1], [0, 1], [0, 0], [0, 0]], dtype=float)
    c = canonical(p, shape="polygon")
    np.testing.assert_array_equal(c, [[0, 0], [0, 0], [1, 0], [1, 1], [0, 1]])
    np.testing.assert_array_equal(canonical(np.roll(p, 1, axis=0), shape="polygon"), c)


@MODERATE
@given(upright_boxes(), axis_boxes(), axis3_boxes())
def test_canonical_other_layouts(up, ax, ax3):
    # Same heading by cos/sin (trigonometry); idempotence and no-op layouts: own rules.
    c = canonical(up)
    np.testing.assert_array_equal(c[:, :6], up[:, :6])  # heading kept: no swap
    assert np.all((-np.pi <= c[:, 6]) & (c[:, 6] < np.pi))
    np.testing.assert_allclose(np.cos(c[:, 6]), np.cos(up[:, 6]), atol=1e-12)
    np.testing.assert_allclose(np.sin(c[:, 6]), np.sin(up[:, 6]), atol=1e-12)
    np.testing.assert_array_equal(canonical(c), c)
    np.testing.assert_array_equal(canonical(ax), ax)
    np.testing.assert_array_equal(canonical(ax3), ax3)


# ----------------------------------------------------------------------------------- flip_y


def mirror(poly: shapely.Polygon, height: float | None) -> shapely.Polygon:
    """shapely.affinity.scale(yfact=-1) about y = 0, then moved down by the image height."""
    out = shapely.affinity.scale(poly, xfact=1.0, yfact=-1.0, origin=(0, 0))
    return out if height is None else shapely.affinity.translate(out, 0, height)


@MODERATE
@given(
    st.one_of(rotated_boxes(), rotated_boxes(centre=FAR, sizes=FAR_SIZES)),
    st.one_of(st.none(), st.floats(1, 1e4)),
)
def test_flip_y_rotated_is_the_mirror_image(b, height):
    f = flip_y(b, height=height)
    for row, frow in zip(b, f, strict=True):
        ref = mirror(shapely_rotated(row), height)  # shapely mirror of the box
        pts = corners(frow)
        assert same_points(pts, np.asarray(ref.exterior.coords)[:-1], region_tol(pts))
    back = flip_y(f, height=height)
    if height is None:
        np.testing.assert_array_equal(back, b)  # exact involution
    else:
        np.testing.assert_allclose(back, b, rtol=1e-12, atol=1e-12 * (height + 1e6))


@MODERATE
@given(any_polygon, st.one_of(st.none(), st.floats(1, 1e4)))
def test_flip_y_polygon_mirrors_and_keeps_winding(poly, height):
    f = flip_y(poly, shape="polygon", height=height)
    ref = mirror(shapely.Polygon(poly), height)
    assert same_points(f, np.asarray(ref.exterior.coords)[:-1], region_tol(f))
    if shapely.Polygon(f).area > 0:  # height - y can round a sliver to zero area: no winding
        assert shapely.Polygon(f).exterior.is_ccw == shapely.Polygon(poly).exterior.is_ccw
    assert f[0, 0] == poly[0, 0]  # vertex 0 stays vertex 0
    check(f, "polygon")
    if height is None:
        np.testing.assert_array_equal(flip_y(f, shape="polygon"), poly)


@MODERATE
@given(
    st.one_of(axis_box(), axis_box(centre=FAR, sizes=FAR_SIZES)),
    st.one_of(st.none(), st.floats(1, 1e4)),
)
def test_flip_y_axis_swaps_roles(box, height):
    f = flip_y(box, height=height)
    check(f)  # still y_min <= y_max
    ref = mirror(shapely.box(*box), height)  # shapely mirror
    np.testing.assert_allclose(f, ref.bounds, rtol=0, atol=region_tol(corners(box)))
    if height is None:
        np.testing.assert_array_equal(flip_y(f), box)


@MODERATE
@given(upright_boxes(), axis3_boxes())
def test_flip_y_3d(up, ax3):
    # 3D flips are the 2D flips of the footprints (checked against shapely above), z kept.
    f = flip_y(up)
    np.testing.assert_array_equal(footprint(f), flip_y(footprint(up)))
    np.testing.assert_array_equal(f[:, [0, 2, 3, 4, 5]], up[:, [0, 2, 3, 4, 5]])
    np.testing.assert_array_equal(flip_y(f), up)
    g = flip_y(ax3, height=10.0)
    np.testing.assert_array_equal(g[:, [0, 2, 3, 5]], ax3[:, [0, 2, 3, 5]])
    np.testing.assert_array_equal(footprint(g), flip_y(footprint(ax3), height=10.0))


def test_flip_y_bad_height_and_empty():
    with pytest.raises(ValueError, match=r"^height: must be finite, got nan$"):
        flip_y([0, 0, 1, 1, 0], height=float("nan"))
    with pytest.raises(ValueError, match=r"^height: expected a number, got 'tall'$"):
        flip_y([0, 0, 1, 1, 0], height="tall")
    for dims in ((0, 4), (0, 5), (0, 3, 2), (0, 6), (0, 7)):
        assert flip_y(np.zeros(dims)).shape == dims
