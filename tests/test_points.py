"""Points inside boxes (obbiou.points): counts and pairs against independent references.

References, named beside each check:
* brute force in numpy: every point moved into every box's frame (3D and 2D rectangles);
* shapely 2.x predicates for 2D: ``contains_xy`` (open: interior only) and ``covers``
  (closed: boundary included) on the polygons of the boxes;
* hand-worked points on faces, edges and corners of axis-aligned and quarter-turned boxes,
  with dyadic coordinates (exact in binary), and ``np.nextafter`` one ulp beyond them;
* exact rational arithmetic (``fractions``) for the large-offset faces.
"""

from __future__ import annotations

import itertools
import math
from fractions import Fraction

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from obbiou import points as P
from obbiou.boxes import corners
from obbiou.errors import InvalidInput
from obbiou.points import count_in_boxes, points_in_boxes
from tests.strategies import (
    FAR,
    FAR_SIZES,
    axis3_boxes,
    convex_polygons,
    rotated_boxes,
    upright_boxes,
)

shapely = pytest.importorskip("shapely")

SETTINGS = settings(max_examples=120, deadline=None, suppress_health_check=[HealthCheck.too_slow])


# ----------------------------------------------------------------------- references


def frame_margin(pts: np.ndarray, boxes: np.ndarray) -> np.ndarray:
    """Brute force (numpy): for every point and every upright/rotated box, the smallest
    slack half_size - |coordinate| over the box's own axes, (N, M). >= 0 means inside."""
    if boxes.shape[1] == 5:  # rotated: no z
        cx, cy, hw, hh, yaw = (
            boxes[:, 0],
            boxes[:, 1],
            boxes[:, 2] / 2,
            boxes[:, 3] / 2,
            boxes[:, 4],
        )
        cz, hz = None, None
    else:
        cx, cy, cz = boxes[:, 0], boxes[:, 1], boxes[:, 2]
        hw, hh, hz, yaw = boxes[:, 3] / 2, boxes[:, 4] / 2, boxes[:, 5] / 2, boxes[:, 6]
    dx = pts[:, :1] - cx
    dy = pts[:, 1:2] - cy
    c, s = np.cos(yaw), np.sin(yaw)
    u = dx * c + dy * s
    v = -dx * s + dy * c
    slack = np.minimum(hw - np.abs(u), hh - np.abs(v))
    if cz is not None:
        slack = np.minimum(slack, hz - np.abs(pts[:, 2:3] - cz))
    return slack


def clear_membership(pts, boxes, tol):
    """(inside, decided) from the brute-force frame transform; pairs within ``tol`` of a
    face are undecided (rounding of cos/sin may put them either side)."""
    m = frame_margin(pts, boxes)
    return m >= 0, np.abs(m) > tol


def check_against(pts, boxes, inside, decided):
    """Counts and pairs agree with the reference wherever it is decided."""
    hits = points_in_boxes(pts, boxes)
    got = np.zeros(inside.shape, bool)
    got[hits.point, hits.box] = True
    assert len(hits) == got.sum()  # no pair reported twice
    bad = (got != inside) & decided
    assert not bad.any(), np.argwhere(bad)[:5]
    np.testing.assert_array_equal(count_in_boxes(pts, boxes), got.sum(axis=0))
    np.testing.assert_array_equal(hits.counts(), got.sum(axis=0))
    order = np.lexsort((hits.point, hits.box))
    np.testing.assert_array_equal(order, np.arange(len(hits)))  # sorted by (box, point)


# ------------------------------------------------------------- hand-worked faces, edges


def lattice_points(lo, hi):
    """The 27 points of {lo, mid, hi}^3 (8 corners, 12 edge midpoints, 6 face centres,
    the centre): all on or in the closed box [lo, hi] (hand-worked)."""
    mid = [(a + b) / 2 for a, b in zip(lo, hi, strict=True)]
    return np.array(list(itertools.product(*zip(lo, mid, hi, strict=True))), dtype=np.float64)


def nudged_out(pts, lo, hi):
    """Each boundary point moved one ulp outward along every coordinate on a bound."""
    out = pts.copy()
    for d in range(pts.shape[1]):
        out[:, d] = np.where(pts[:, d] == lo[d], np.nextafter(pts[:, d], -np.inf), out[:, d])
        out[:, d] = np.where(pts[:, d] == hi[d], np.nextafter(pts[:, d], np.inf), out[:, d])
    return out


# Quarter turns written the ways users write them: each must be taken as exact. (All the
# usual spellings give exact multiples of fl(pi / 2), checked by hand in float64.)
QUARTER_TURNS = [
    (0.0, 0),
    (np.pi / 2, 1),
    (-np.pi / 2, 3),
    (np.pi, 2),
    (-np.pi, 2),
    (3 * np.pi / 2, 3),
    (2 * np.pi, 0),
    (math.radians(90), 1),
    (np.deg2rad(270.0), 3),
    (np.pi / 2 * 7, 3),
    # One ulp off a multiple (angles that went through arithmetic): the snap rule's reach.
    (np.nextafter(np.pi / 2, 0.0), 1),
    (np.nextafter(-np.pi, 0.0), 2),
    (np.nextafter(3 * np.pi / 2, 9.0), 3),
]


@pytest.mark.parametrize("yaw, quarter", QUARTER_TURNS)
@pytest.mark.parametrize("centre", [(10.0, -4.0, 1.0), (500_000.25, 4_200_000.5, 12.75)])
def test_upright_quarter_turns_faces_edges_corners(yaw, quarter, centre):
    # Hand-worked: an upright box 4 long, 2 wide, 2 high; turned by an even number of
    # quarter turns it spans x in cx +- 2, y in cy +- 1; by an odd number, x in cx +- 1,
    # y in cy +- 2; z in cz +- 1 either way. The 27 lattice points are on faces, edges,
    # corners or inside; one ulp outward from any face each is outside.
    cx, cy, cz = centre
    hx, hy = (2.0, 1.0) if quarter % 2 == 0 else (1.0, 2.0)
    lo, hi = (cx - hx, cy - hy, cz - 1.0), (cx + hx, cy + hy, cz + 1.0)
    box = np.array([[cx, cy, cz, 4.0, 2.0, 2.0, yaw]])
    pts = lattice_points(lo, hi)
    assert count_in_boxes(pts, box).tolist() == [27]
    out = nudged_out(pts, lo, hi)
    on_boundary = (out != pts).any(axis=1)
    assert on_boundary.sum() == 26
    assert count_in_boxes(out, box).tolist() == [1]  # only the centre stays
    hits = points_in_boxes(np.concatenate([pts, out]), box)
    assert hits.point.tolist() == list(range(27)) + [27 + 13]  # the centre is lattice row 13


@pytest.mark.parametrize("angle, quarter", QUARTER_TURNS)
def test_rotated_quarter_turns_faces_edges_corners(angle, quarter):
    # Hand-worked 2D: width 6 (along the box's own x), height 2.5, centre (-3.5, 7.25).
    cx, cy = -3.5, 7.25
    hx, hy = (3.0, 1.25) if quarter % 2 == 0 else (1.25, 3.0)
    lo, hi = (cx - hx, cy - hy), (cx + hx, cy + hy)
    pts = lattice_points(lo, hi)  # 9 points: 4 corners, 4 edge midpoints, the centre
    box = [cx, cy, 6.0, 2.5, angle]
    assert int(count_in_boxes(pts, box)) == 9
    assert int(count_in_boxes(nudged_out(pts, lo, hi), box)) == 1


def test_quarter_turn_exact_where_plain_cos_sin_fails():
    # Why the snap rule is needed (hand-worked): cos(np.pi / 2) = 6.1e-17, not 0. For a
    # corner of a box turned by np.pi / 2 at map-metre offsets, the plain frame test with
    # rounded cos/sin puts the corner outside; obbiou counts it.
    cx, cy = 500_000.0, 4_200_000.0
    box = np.array([[cx, cy, 0.0, 4.0, 2.0, 2.0, np.pi / 2]])
    corners3 = lattice_points((cx - 1, cy - 2, -1.0), (cx + 1, cy + 2, 1.0))
    plain = frame_margin(corners3, box)[:, 0]
    assert (plain < 0).any()  # rounding of cos(pi/2) moves a face past some of them
    assert count_in_boxes(corners3, box).tolist() == [27]


@pytest.mark.parametrize("shape", ["axis", "axis3"])
def test_axis_boxes_faces_edges_corners(shape):
    # Hand-worked: the bounds themselves are the faces; compared as given, exactly.
    lo, hi = (-1.5, 2.0, 0.25), (3.0, 2.75, 4.0)
    d = 3 if shape == "axis3" else 2
    box = np.array([*lo[:d], *hi[:d]])
    pts = lattice_points(lo[:d], hi[:d])
    assert int(count_in_boxes(pts, box)) == len(pts)
    assert int(count_in_boxes(nudged_out(pts, lo[:d], hi[:d]), box)) == 1


def test_faces_exact_at_large_offsets_fractions():
    # Exact rational reference: a point inside iff |Fraction(p) - Fraction(c)| <= half.
    # Points within a few ulps of the faces of a box at x ~ 5e5 (where ulp = 5.8e-11).
    cx, cy, w, h = 500_000.1, -250_000.3, 3.7, 1.9
    box = [cx, cy, w, h, np.pi]
    xs = [np.nextafter(cx + w / 2, t) for t in (-np.inf, np.inf)] + [cx + w / 2, cx - w / 2]
    xs += [np.nextafter(np.nextafter(cx - w / 2, -np.inf), -np.inf)]
    pts = np.array([[x, cy] for x in xs] + [[cx, y] for y in (cy + h / 2, cy - h / 2)])
    got = points_in_boxes(pts, box).point.tolist()
    want = [
        k
        for k, (x, y) in enumerate(pts)
        if abs(Fraction(x) - Fraction(cx)) <= Fraction(w) / 2
        and abs(Fraction(y) - Fraction(cy)) <= Fraction(h) / 2
    ]
    assert got == want
    assert 0 < len(want) < len(pts)  # the check tells inside from outside


def ulps_around(v, k=6):
    """The 2k floats nearest v (k below it, v itself and k - 1 above it)."""
    x = v
    for _ in range(k):
        x = np.nextafter(x, -np.inf)
    out = []
    for _ in range(2 * k):
        out.append(x)
        x = np.nextafter(x, np.inf)
    return out


@pytest.mark.parametrize("angle", [0.0, np.pi / 2, np.pi])
@pytest.mark.parametrize("three", [False, True])
def test_faces_exact_where_the_difference_rounds(angle, three):
    # When point and centre are not within a factor 2 of each other, fl(p - c) is rounded
    # and can land exactly on the half size for points just inside or just outside. The
    # exact rational reference (fractions) decides; both counting and the pairs must agree.
    cx, cy, cz = 1.1, 0.3, 0.7
    w, h, height = 2.0, 0.5, 5.0
    hx, hy = (w / 2, h / 2) if angle != np.pi / 2 else (h / 2, w / 2)
    xs = ulps_around(cx + hx) + ulps_around(cx - hx)
    ys = ulps_around(cy + hy) + ulps_around(cy - hy)
    zs = ulps_around(cz + height / 2) + ulps_around(cz - height / 2)
    pts = [[x, cy, cz] for x in xs] + [[cx, y, cz] for y in ys] + [[cx, cy, z] for z in zs]
    pts = np.array(pts if three else [p[:2] for p in pts[: len(xs) + len(ys)]])
    box = [cx, cy, cz, w, h, height, angle] if three else [cx, cy, w, h, angle]
    half = (hx, hy, height / 2)
    centre = (cx, cy, cz)
    want = [
        k
        for k, p in enumerate(pts)
        if all(
            abs(Fraction(v) - Fraction(c)) <= Fraction(a)
            for v, c, a in zip(p, centre[: len(p)], half[: len(p)], strict=True)
        )
    ]
    rounded_on_face = [
        k
        for k, p in enumerate(pts)
        if any(abs(v - c) == a for v, c, a in zip(p, centre[: len(p)], half[: len(p)], strict=True))
        and k not in want
    ]
    assert rounded_on_face  # the case this test is about: rounds onto a face, is outside
    assert points_in_boxes(pts, box).point.tolist() == want
    assert int(count_in_boxes(pts, box)) == len(want)
    many = np.tile(pts, (3000, 1))  # the same through the parallel driver
    assert int(count_in_boxes(many, box)) == 3000 * len(want)


def test_zero_size_boxes_hold_only_points_on_them():
    # Closed sets (hand-worked): a zero-width rectangle is a segment, a zero-size upright
    # box a point.
    seg = [1.0, 1.0, 0.0, 2.0, 0.0]  # x = 1, y in [0, 2]
    pts = [[1.0, 0.0], [1.0, 2.0], [1.0, 1.5], [np.nextafter(1.0, 2.0), 1.0], [1.0, 2.5]]
    assert points_in_boxes(pts, seg).point.tolist() == [0, 1, 2]
    dot = [3.0, 4.0, 5.0, 0.0, 0.0, 0.0, 0.7]
    assert int(count_in_boxes([[3.0, 4.0, 5.0], [3.0, 4.0, 5.000001]], dot)) == 1
    flat = [[[0.0, 0.0], [2.0, 2.0], [1.0, 1.0]]]  # a collinear (flat) polygon: the segment
    on = [[0.5, 0.5], [2.0, 2.0], [3.0, 3.0], [-1.0, -1.0], [0.5, 0.6]]
    assert points_in_boxes(on, flat, shape="polygon").point.tolist() == [0, 1]


def test_shared_face_counts_for_both_boxes():
    # Hand-worked: two axis3 boxes sharing the face x = 1; a point on it is in both.
    boxes = [[0, 0, 0, 1, 1, 1], [1, 0, 0, 2, 1, 1]]
    hits = points_in_boxes([[1.0, 0.5, 0.5], [0.5, 0.5, 0.5], [1.5, 1.0, 1.0]], boxes)
    assert hits.box.tolist() == [0, 0, 1, 1]
    assert hits.point.tolist() == [0, 1, 0, 2]


# ------------------------------------------------------------------ brute-force scenes


def scene(n, m, seed, spread=30.0):
    rng = np.random.default_rng(seed)
    boxes = np.column_stack(
        [
            rng.uniform(0, spread, (m, 2)),
            rng.uniform(-1, 1, m),
            rng.uniform(0.2, 6, (m, 3)),
            rng.uniform(-4, 4, m),
        ]
    )
    boxes[::5, 6] = rng.integers(-4, 5, len(boxes[::5])) * (np.pi / 2)
    pts = np.column_stack([rng.uniform(-2, spread + 2, (n, 2)), rng.uniform(-4, 4, n)])
    return pts, boxes


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_upright_against_brute_force(seed):
    # Reference: numpy, every point moved into every box frame (module docstring).
    pts, boxes = scene(3000, 120, seed)
    inside, decided = clear_membership(pts, boxes, 1e-9)
    assert inside.sum() > 100
    check_against(pts, boxes, inside, decided)


def test_parallel_and_serial_paths_agree(monkeypatch):
    # The same scene through the one-thread body and the parallel driver (and a brute-
    # force reference), with enough points for the parallel path.
    pts, boxes = scene(30_000, 400, 7, spread=60.0)
    inside, decided = clear_membership(pts, boxes, 1e-9)
    monkeypatch.setattr(P, "_SERIAL_BELOW", 10_000)
    parallel = points_in_boxes(pts, boxes)
    np.testing.assert_array_equal(count_in_boxes(pts, boxes), parallel.counts())
    monkeypatch.setattr(P, "_SERIAL_BELOW", 10**9)
    serial = points_in_boxes(pts, boxes)
    np.testing.assert_array_equal(parallel.point, serial.point)
    np.testing.assert_array_equal(parallel.box, serial.box)
    check_against(pts, boxes, inside, decided)


def test_rotated_against_shapely():
    # Reference: shapely polygons of the corners. Points shapely's contains_xy puts in the
    # interior must count; points its covers (closed) rejects must not. Points within
    # 1e-9 of a boundary (where corners and frame round differently) are left out.
    rng = np.random.default_rng(3)
    m = 80
    boxes = np.column_stack(
        [rng.uniform(0, 20, (m, 2)), rng.uniform(0.1, 5, (m, 2)), rng.uniform(-4, 4, m)]
    )
    pts = rng.uniform(-1, 21, (4000, 2))
    polys = shapely.polygons(corners(boxes, shape="rotated"))
    got = np.zeros((len(pts), m), bool)
    hits = points_in_boxes(pts, boxes)
    got[hits.point, hits.box] = True
    geoms = shapely.points(pts)
    for j, poly in enumerate(polys):
        interior = shapely.contains_xy(poly, pts[:, 0], pts[:, 1])
        closed = shapely.covers(poly, geoms)
        far = shapely.distance(poly.boundary, geoms) > 1e-9
        assert got[interior & far, j].all()
        np.testing.assert_array_equal(got[far, j], closed[far])
    assert got.sum() > 200


def test_polygons_either_winding_against_shapely():
    # Reference: shapely covers (closed) on the same vertices; both windings; vertices and
    # edge midpoints of axis-parallel edges are on the boundary and count.
    square = np.array([[0.0, 0.0], [4.0, 0.0], [4.0, 2.0], [0.0, 2.0]])
    hexagon = np.array([[5, 0], [7, 0], [8, 1.5], [7, 3], [5, 3], [4, 1.5]], dtype=float)
    for poly in (square, hexagon):
        for verts in (poly, poly[::-1]):
            pts = np.concatenate(
                [
                    verts,
                    (verts + np.roll(verts, -1, axis=0)) / 2,
                    np.random.default_rng(0).uniform(-1, 9, (500, 2)),
                ]
            )
            got = np.zeros(len(pts), bool)
            got[points_in_boxes(pts, verts, shape="polygon").point] = True
            ref = shapely.covers(shapely.Polygon(verts), shapely.points(pts))
            np.testing.assert_array_equal(got, ref)
            assert got[: 2 * len(verts)].all()


# ------------------------------------------------------------------------- properties


@SETTINGS
@given(upright_boxes(min_n=1, max_n=6, zero_size=True), st.integers(0, 2**32 - 1))
def test_property_upright_frame_points(boxes, seed):
    # Points placed in each box's own frame clearly inside (|coordinate| <= 0.9 half size)
    # or clearly outside (>= 1.1 half size on some axis) are classified so; the brute
    # force frame transform (numpy) agrees wherever it is decided; counts = pairs.
    rng = np.random.default_rng(seed)
    local = rng.uniform(-1.2, 1.2, (40 * len(boxes), 3))
    owner = np.repeat(np.arange(len(boxes)), 40)
    half = boxes[owner, 3:6] / 2
    c, s = np.cos(boxes[owner, 6]), np.sin(boxes[owner, 6])
    uvw = local * half
    pts = np.column_stack(
        [
            boxes[owner, 0] + c * uvw[:, 0] - s * uvw[:, 1],
            boxes[owner, 1] + s * uvw[:, 0] + c * uvw[:, 1],
            boxes[owner, 2] + uvw[:, 2],
        ]
    )
    hits = points_in_boxes(pts, boxes)
    got = np.zeros((len(pts), len(boxes)), bool)
    got[hits.point, hits.box] = True
    own = got[np.arange(len(pts)), owner]
    positive = (half > 0).all(axis=1)
    clearly_in = (np.abs(local) <= 0.9).all(axis=1) & positive
    clearly_out = ((np.abs(local) >= 1.1) & (half > 0)).any(axis=1)
    assert own[clearly_in].all()
    assert not own[clearly_out].any()
    scale = np.abs(boxes[:, :3]).max() + boxes[:, 3:6].max()
    inside, decided = clear_membership(pts, boxes, 1e-9 * scale)
    check_against(pts, boxes, inside, decided)


@SETTINGS
@given(upright_boxes(min_n=1, max_n=4, centre=FAR, sizes=FAR_SIZES), st.integers(0, 2**32 - 1))
def test_property_far_offsets_and_permutation(boxes, seed):
    # Map-metre offsets: the frame transform relative to each centre keeps the points near
    # the boxes decided; permuting points and boxes permutes the counts (hand-worked
    # invariance).
    rng = np.random.default_rng(seed)
    owner = rng.integers(0, len(boxes), 200)
    pts = boxes[owner, :3] + rng.uniform(-1, 1, (200, 3)) * boxes[owner, 3:6]
    counts = count_in_boxes(pts, boxes)
    pp, pb = rng.permutation(len(pts)), rng.permutation(len(boxes))
    np.testing.assert_array_equal(count_in_boxes(pts[pp], boxes[pb]), counts[pb])
    inside, decided = clear_membership(pts, boxes, 1e-6)
    check_against(pts, boxes, inside, decided)


@SETTINGS
@given(convex_polygons(min_n=1, max_n=5), st.integers(0, 2**32 - 1))
def test_property_polygons_against_shapely(polys, seed):
    # Reference: shapely covers (closed) for points away from the boundary; every vertex
    # is inside its own polygon (cross products of the two edges at a vertex are exactly 0).
    rng = np.random.default_rng(seed)
    lo, hi = polys.min(axis=(0, 1)), polys.max(axis=(0, 1))
    pts = np.concatenate([rng.uniform(lo - 1, hi + 1, (300, 2)), polys.reshape(-1, 2)])
    got = np.zeros((len(pts), len(polys)), bool)
    hits = points_in_boxes(pts, polys, shape="polygon")
    got[hits.point, hits.box] = True
    geoms = shapely.points(pts)
    for j, poly in enumerate(shapely.polygons(polys)):
        ref = shapely.covers(poly, geoms)
        far = shapely.distance(poly.boundary, geoms) > 1e-9 * (1 + np.abs(hi - lo).max())
        np.testing.assert_array_equal(got[far, j], ref[far])
        k = polys.shape[1]
        assert got[300 + j * k : 300 + (j + 1) * k, j].all()


@SETTINGS
@given(axis3_boxes(min_n=1, max_n=6, zero_size=True), st.integers(0, 2**32 - 1))
def test_property_axis3_exact(boxes, seed):
    # Reference: plain bound comparisons in numpy (exact for axis-aligned boxes), on points
    # drawn on the bounds themselves as well as around them.
    rng = np.random.default_rng(seed)
    owner = rng.integers(0, len(boxes), 300)
    lo, hi = boxes[owner, :3], boxes[owner, 3:]
    t = rng.choice([-0.1, 0.0, 0.5, 1.0, 1.1], (300, 3))
    pts = np.where(t == 0.0, lo, np.where(t == 1.0, hi, lo + t * (hi - lo)))
    ref = ((pts[:, None, :] >= boxes[None, :, :3]) & (pts[:, None, :] <= boxes[None, :, 3:])).all(
        axis=2
    )
    check_against(pts, boxes, ref, np.ones_like(ref))


@SETTINGS
@given(rotated_boxes(min_n=0, max_n=5))
def test_property_rotated_centres_and_empty(boxes):
    # Every box of positive or zero size holds its own centre (closed boxes); no points
    # give zero counts of the right length.
    counts = count_in_boxes(boxes[:, :2], boxes)
    assert counts.dtype == np.int64 and counts.shape == (len(boxes),)
    assert (counts >= 1).all()
    assert count_in_boxes(np.zeros((0, 2)), boxes).tolist() == [0] * len(boxes)


# ------------------------------------------------------------------------ empty, errors


def test_empty_inputs():
    up = np.zeros((0, 7))
    assert count_in_boxes(np.zeros((0, 3)), up).shape == (0,)
    assert count_in_boxes(np.ones((5, 3)), up).dtype == np.int64
    assert count_in_boxes([], [[0, 0, 0, 1, 1, 1, 0.0]]).tolist() == [0]
    hits = points_in_boxes(np.zeros((0, 2)), [[0, 0, 1, 1]])
    assert len(hits) == 0 and hits.point.dtype == np.int64 and hits.box.dtype == np.int64
    assert (hits.n_points, hits.n_boxes) == (0, 1)
    assert hits.counts().tolist() == [0]
    far = points_in_boxes([[100.0, 100.0]], [[0, 0, 1, 1], [2, 2, 3, 3]])
    assert len(far) == 0 and far.counts().tolist() == [0, 0]


def test_single_box_drops_the_box_axis():
    c = count_in_boxes([[0.5, 0.5], [2.0, 2.0]], [0, 0, 1, 1])
    assert np.ndim(c) == 0 and int(c) == 1


def test_grid_corner_cases():
    # Identical zero-size boxes (a grid of one cell), one huge box among small ones (a box
    # that scans many cells), points far outside every box: brute force (numpy) agrees.
    pts = np.array([[2.0, 3.0], [2.0, 3.0], [2.5, 3.0]])
    assert count_in_boxes(pts, [[2, 3, 2, 3]] * 3).tolist() == [2, 2, 2]
    rng = np.random.default_rng(5)
    small = np.column_stack([rng.uniform(0, 100, (50, 2)), np.full((50, 2), 0.5), np.zeros(50)])
    boxes = np.concatenate([small, [[50.0, 50.0, 1e4, 1e4, 0.3]]])
    pts = rng.uniform(-1e4, 1e4, (5000, 2))
    inside, decided = clear_membership(pts, boxes, 1e-6)
    check_against(pts, boxes, inside, decided)


@pytest.mark.parametrize(
    "points, boxes, row, column, text",
    [
        ([[0, 0, 0], [1, np.nan, 0]], [[0, 0, 0, 1, 1, 1, 0]], 1, 1, "points[1]: y is NaN"),
        ([[0, 0], [0, 0], [np.inf, 0]], [[0, 0, 1, 1]], 2, 0, "points[2]: x is +inf"),
        ([[0, 0, 1e101]], [[0, 0, 0, 1, 1, 1, 0]], 0, 2, "points[0]: z is 1e+101, beyond"),
        ([[0, 0, 0, 1]], [[0, 0, 1, 1]], None, None, "expected (N, 2) or (N, 3) points"),
        ([[0, 0, 0]], [[0, 0, 1, 1, 0.0]], None, None, "(N, 3) points go with 3D boxes"),
        ([[0, 0]], [[0, 0, 0, 1, 1, 1, 0.0]], None, None, "obbiou.boxes.footprint(boxes)"),
        ([[0, 0]], [[0, 0, 0, 1, 1, 1]], None, None, "(N, 2) points go with 2D boxes"),
        ([["a", "b"]], [[0, 0, 1, 1]], None, None, "expected numbers"),
        ([[0, 0], [1]], [[0, 0, 1, 1]], None, None, "cannot read as an array of numbers"),
        ([[1 + 2j, 0]], [[0, 0, 1, 1]], None, None, "complex numbers"),
    ],
)
def test_bad_points(points, boxes, row, column, text):
    with pytest.raises(InvalidInput) as err:
        count_in_boxes(points, boxes)
    assert err.value.argument == "points"
    assert (err.value.row, err.value.column) == (row, column)
    assert text in str(err.value)


def test_bad_boxes_go_through_the_input_gate():
    # Boxes are validated by obbiou.shapes.read_boxes: same messages as everywhere else.
    with pytest.raises(InvalidInput, match=r"boxes\[1\]: negative width -2.0"):
        count_in_boxes([[0.0, 0.0]], [[0, 0, 1, 1, 0.0], [0, 0, -2.0, 1, 0.0]])
    with pytest.raises(ValueError, match="matches no box layout"):
        points_in_boxes([[0.0, 0.0]], [[0, 0, 1]])
    with pytest.raises(ValueError, match="not convex"):
        points_in_boxes([[0.0, 0.0]], [[[0, 0], [2, 0], [1, 1], [2, 2], [0, 2]]])


# ------------------------------------------------------------------- counting by frame


def per_frame(pts, boxes, pf, bf, shape=None):
    """The reference for counting by frame: one plain call per frame (each box against the
    points of its own frame only)."""
    out = np.zeros(len(boxes), np.int64)
    for f in np.unique(bf):
        sel = bf == f
        out[sel] = count_in_boxes(pts[pf == f], boxes[sel], shape=shape)
    return out


def pairs_per_frame(pts, boxes, pf, bf, shape=None):
    """The same for the (point, box) pairs: one plain call per frame, rows mapped back to the
    whole input, sorted by (box, point)."""
    point, box = [], []
    for f in np.unique(bf):
        prow, brow = np.flatnonzero(pf == f), np.flatnonzero(bf == f)
        hits = points_in_boxes(pts[prow], boxes[brow], shape=shape)
        point.append(prow[hits.point])
        box.append(brow[hits.box])
    point, box = np.concatenate(point), np.concatenate(box)
    order = np.lexsort((point, box))
    return point[order], box[order]


def check_frames(pts, boxes, pf, bf, shape=None):
    """Counts and pairs by frame equal one call per frame, exactly; returns the counts."""
    want = per_frame(pts, boxes, pf, bf, shape=shape)
    got = count_in_boxes(pts, boxes, shape=shape, point_frames=pf, box_frames=bf)
    np.testing.assert_array_equal(got, want)
    hits = points_in_boxes(pts, boxes, shape=shape, point_frames=pf, box_frames=bf)
    point, box = pairs_per_frame(pts, boxes, pf, bf, shape=shape)
    np.testing.assert_array_equal(hits.point, point)
    np.testing.assert_array_equal(hits.box, box)
    np.testing.assert_array_equal(hits.counts(), want)
    assert (hits.n_points, hits.n_boxes) == (len(pts), len(boxes))
    return want


def face_scene(shape, seed, frames=6):
    """Boxes of one layout in a few frames, and points on their faces, edges and corners
    (hand-worked lattices for bounds and quarter turns, the corners of turned boxes, one
    ulp outside each bound), plus random points; every point in a random frame, so each box
    also meets the face points of boxes of other frames at the same place."""
    rng = np.random.default_rng(seed)
    m = 30
    centre = rng.uniform(0, 20, (m, 3))
    size = rng.uniform(0.5, 4, (m, 3))
    size[::7, 0] = 0.0  # zero-size boxes hold only the points on them
    pts = []
    if shape in ("axis", "axis3"):
        d = 3 if shape == "axis3" else 2
        lo, hi = centre[:, :d] - size[:, :d] / 2, centre[:, :d] + size[:, :d] / 2
        boxes = np.column_stack([lo, hi])
        for a, b in zip(lo, hi, strict=True):
            lat = lattice_points(a, b)
            pts += [lat, nudged_out(lat, a, b)]
    elif shape in ("upright", "rotated"):
        quarter = rng.integers(-4, 5, m)
        angle = np.where(np.arange(m) % 2 == 0, quarter * (np.pi / 2), rng.uniform(-4, 4, m))
        if shape == "upright":
            boxes = np.column_stack([centre, size, angle])
        else:
            boxes = np.column_stack([centre[:, :2], size[:, :2], angle])
        d = 3 if shape == "upright" else 2
        for k in range(0, m, 2):  # quarter turns: the faces are axis-parallel
            ext = size[k, :d] / 2
            if quarter[k] % 2:
                ext[[0, 1]] = ext[[1, 0]]
            a, b = centre[k, :d] - ext, centre[k, :d] + ext
            lat = lattice_points(a, b)
            pts += [lat, nudged_out(lat, a, b)]
        pts.append(corners(boxes, shape=shape).reshape(-1, d))  # on faces to rounding
    else:  # convex quadrilaterals: the corners of rotated boxes, either winding
        boxes = corners(
            np.column_stack([centre[:, :2], size[:, :2] + 0.5, rng.uniform(-4, 4, m)]),
            shape="rotated",
        )
        boxes[::2] = boxes[::2, ::-1]
        pts.append(boxes.reshape(-1, 2))
        pts.append((boxes + boxes[:, [1, 2, 3, 0]]).reshape(-1, 2) / 2)  # edge midpoints
        d = 2
    pts.append(rng.uniform(-3, 23, (3000, d)))
    pts = np.concatenate(pts)
    pf = rng.integers(0, frames, len(pts))
    bf = rng.integers(0, frames, m)
    return pts, boxes, pf, bf


@pytest.mark.parametrize("shape", ["upright", "axis3", "rotated", "axis", "polygon"])
@pytest.mark.parametrize("seed", [0, 1])
def test_frames_equal_one_call_per_frame_on_faces_edges_corners(shape, seed):
    pts, boxes, pf, bf = face_scene(shape, seed)
    want = check_frames(pts, boxes, pf, bf, shape=shape)  # exactly, points on faces included
    assert want.sum() > 50  # points of the boxes' own frames on and in them
    # the frames as text, in another order: the same counts
    names = np.array([f"sweep-{f:02d}" for f in range(6)], dtype=object)
    again = count_in_boxes(
        pts[::-1], boxes, shape=shape, point_frames=names[pf[::-1]], box_frames=names[bf]
    )
    np.testing.assert_array_equal(again, want)


@pytest.mark.parametrize("seed", [3, 4])
def test_frames_against_brute_force(seed):
    # Reference: numpy, every point moved into every box frame; a pair counts only when the
    # point and the box share a frame.
    pts, boxes = scene(4000, 150, seed)
    rng = np.random.default_rng(seed)
    pf, bf = rng.integers(0, 5, len(pts)), rng.integers(0, 5, len(boxes))
    inside, decided = clear_membership(pts, boxes, 1e-9)
    same = pf[:, None] == bf[None, :]
    got = count_in_boxes(pts, boxes, point_frames=pf, box_frames=bf)
    hits = points_in_boxes(pts, boxes)  # checked against the reference above
    member = np.zeros(inside.shape, bool)
    member[hits.point, hits.box] = True
    assert not ((member != inside) & decided).any()
    np.testing.assert_array_equal(got, (member & same).sum(axis=0))
    framed = points_in_boxes(pts, boxes, point_frames=pf, box_frames=bf)
    pairs = np.zeros(inside.shape, bool)
    pairs[framed.point, framed.box] = True
    np.testing.assert_array_equal(pairs, member & same)
    assert ((inside & same).sum(axis=0)[decided.all(axis=0)] == got[decided.all(axis=0)]).all()


def test_frames_parallel_and_serial_paths_agree(monkeypatch):
    pts, boxes = scene(60_000, 600, 8, spread=60.0)
    rng = np.random.default_rng(8)
    pf, bf = rng.integers(0, 40, len(pts)), rng.integers(0, 40, len(boxes))
    monkeypatch.setattr(P, "_SERIAL_BELOW", 10_000)
    check_frames(pts, boxes, pf, bf)
    monkeypatch.setattr(P, "_SERIAL_BELOW", 10**9)
    check_frames(pts, boxes, pf, bf)


@SETTINGS
@given(
    upright_boxes(min_n=1, max_n=8, zero_size=True),
    st.integers(0, 2**32 - 1),
    st.integers(1, 4),
)
def test_property_frames_equal_one_call_per_frame(boxes, seed, frames):
    # adversarial boxes of tests/strategies.py, their corners (on faces to rounding) and
    # points around them, in random frames: grouped counts = one call per frame, exactly
    rng = np.random.default_rng(seed)
    scale = np.abs(boxes[:, :3]).max() + boxes[:, 3:6].max() + 1.0
    pts = np.concatenate(
        [
            corners(boxes, shape="upright").reshape(-1, 3),
            boxes[:, :3],
            boxes[rng.integers(0, len(boxes), 60), :3] + rng.normal(0, 0.3, (60, 3)) * scale,
        ]
    )
    pf, bf = rng.integers(0, frames, len(pts)), rng.integers(0, frames, len(boxes))
    check_frames(pts, boxes, pf, bf)


def test_frames_edge_cases_and_bad_input():
    box = [0.0, 0.0, 1.0, 1.0]
    pts = [[0.5, 0.5], [1.0, 1.0], [2.0, 2.0]]
    # a single box with one frame id: a 0-d count; no point of its frame: 0
    assert int(count_in_boxes(pts, box, point_frames=[1, 1, 2], box_frames=1)) == 2
    assert int(count_in_boxes(pts, box, point_frames=[1, 1, 2], box_frames=3)) == 0
    # empty points or boxes
    assert count_in_boxes(np.zeros((0, 2)), [box], point_frames=[], box_frames=[4]).tolist() == [0]
    none = count_in_boxes(pts, np.zeros((0, 4)), point_frames=[1, 1, 2], box_frames=[])
    assert none.shape == (0,)
    hits = points_in_boxes(pts, [box, box], point_frames=[1, 1, 2], box_frames=[3, 1])
    assert (hits.point.tolist(), hits.box.tolist()) == ([0, 1], [1, 1])
    assert hits.counts().tolist() == [0, 2] and hits.point.dtype == np.int64
    hits = points_in_boxes(pts, [box], point_frames=[1, 1, 2], box_frames=[5])  # no frame met
    assert len(hits) == 0 and (hits.n_points, hits.n_boxes) == (3, 1)
    with pytest.raises(InvalidInput, match="go together"):
        points_in_boxes(pts, [box], box_frames=[1])
    # ids far apart (not dense), and unsigned ids beyond int64
    far = count_in_boxes(pts, [box, box], point_frames=[10**15, 0, 0], box_frames=[10**15, 0])
    assert far.tolist() == [1, 1]
    big = np.array([2**64 - 1, 5, 5], np.uint64)
    got = count_in_boxes(pts, [box, box], point_frames=big, box_frames=big[:2])
    assert got.tolist() == [1, 1]
    cases = [
        (dict(point_frames=[1, 1, 2]), "box_frames", "go together"),
        (dict(box_frames=[1]), "point_frames", "go together"),
        (dict(point_frames=[1, 1], box_frames=[1]), "point_frames", "one frame id per point (3)"),
        (dict(point_frames=[1, 1, 1], box_frames=[1, 2]), "box_frames", "per box (1)"),
        (dict(point_frames=[1, 1, 1], box_frames=["1"]), "box_frames", "do not compare"),
        (dict(point_frames=[1.0, np.nan, 1.0], box_frames=[1]), "point_frames", "nan"),
        (dict(point_frames=[True] * 3, box_frames=[True]), "point_frames", "integer or text"),
    ]
    for kw, argument, text in cases:
        with pytest.raises(InvalidInput) as err:
            count_in_boxes(pts, [box], **kw)
        assert err.value.argument == argument, kw
        assert text in str(err.value), (kw, str(err.value))
    mixed = np.array([1, "1", 2], dtype=object)
    with pytest.raises(InvalidInput, match="do not compare"):
        count_in_boxes(pts, [box], point_frames=mixed, box_frames=np.array([1], dtype=object))


def test_each_frame_gets_the_grid_of_a_call_of_its_own():
    # the grid rule vectorised over frames: frame f's grid and box order are those of a
    # one-frame call on its boxes alone (frames of 1-40 boxes, a frame of zero-size boxes,
    # a frame spread over +-1e100, a frame without points); at most 2 cells per point
    from obbiou.shapes import read_boxes

    rng = np.random.default_rng(9)
    nb = np.array([1, 2, 40, 7, 3, 1])
    boxes = np.column_stack([rng.uniform(0, 50, (nb.sum(), 2)), rng.uniform(0, 4, (nb.sum(), 2)),
                             rng.uniform(-3, 3, nb.sum())])  # fmt: skip
    boxes[nb[:3].sum() : nb[:4].sum(), 2:4] = 0.0  # frame 3: boxes of zero size
    boxes[nb[:4].sum(), :2] = -1e100  # frame 4 spans about 2e100
    boxes[nb[:4].sum() + 1, :2] = 1e100
    kinds, params, verts, ext, z0, z1 = P._prepare(read_boxes(boxes, None, name="boxes"))
    bfirst = np.r_[0, np.cumsum(nb)]
    npts = np.array([10, 0, 5000, 3, 100, 10**7])
    grid_f, grid_i, order = P._grids(ext, z0, z1, bfirst, npts)
    assert (grid_i.prod(axis=1) <= np.maximum(1, 2 * npts)).all() and grid_i[2].prod() > 100
    for f in range(len(nb)):
        sel = slice(bfirst[f], bfirst[f + 1])
        gf, gi, o = P._grids(ext[sel], z0[sel], z1[sel], np.array([0, nb[f]]), npts[f : f + 1])
        np.testing.assert_array_equal(grid_f[f], gf[0])
        np.testing.assert_array_equal(grid_i[f], gi[0])
        np.testing.assert_array_equal(order[sel], o + bfirst[f])
