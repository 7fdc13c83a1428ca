"""Validation of box input (obbiou.shapes, exposed as obbiou.boxes.check): docs/design.md §2 and §4.

Every invalid case must raise a ValueError naming the argument, the first offending row and
the reason; valid edge cases must pass unchanged as float64. The last part checks that the
shared strategies (tests/strategies.py) draw what they promise, against shapely.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest
import shapely
from hypothesis import given, settings
from hypothesis import strategies as st

from obbiou import boxes as obox
from obbiou.boxes import corners
from obbiou.shapes import check, read_boxes, same_length
from tests.strategies import (
    FAR,
    FAR_SIZES,
    HUGE,
    PAIR_KINDS,
    TINY,
    angle,
    axis3_boxes,
    axis_boxes,
    convex_polygons,
    coordinate,
    hull_polygon,
    length,
    pair_batch,
    polygon_pair,
    rotated_box,
    rotated_boxes,
    rotated_pair,
    upright_boxes,
    upright_pair,
)

MODERATE = settings(max_examples=60, deadline=None)


def raises(message: str):
    """pytest.raises for a ValueError whose text is exactly ``message``."""
    return pytest.raises(ValueError, match="^" + re.escape(message) + "$")


# ---------------------------------------------------------------- invalid input (docs/design.md §4)


@pytest.mark.parametrize(
    ("value", "what"), [(math.nan, "NaN"), (math.inf, "+inf"), (-math.inf, "-inf")]
)
def test_non_finite_rotated_names_row_and_column(value, what):
    a = np.zeros((5, 5))
    a[:, 2:4] = 1.0
    a[3, 1] = value
    a[4, 0] = value  # a later bad row must not be the one reported
    with raises(f"a[3]: cy is {what}"):
        check(a, name="a")


@pytest.mark.parametrize(
    ("shape", "width", "column"),
    [("axis", 4, "y_max"), ("axis3", 6, "y_max"), ("upright", 7, "length")],
)
def test_non_finite_names_the_column_of_each_layout(shape, width, column):
    b = np.zeros((3, width))
    b[:, width // 2 :] = 1.0  # valid extents / positive sizes
    col = 3 if shape in ("axis", "upright") else 4
    b[2, col] = math.nan
    with raises(f"gt[2]: {column} is NaN"):
        check(b, shape, name="gt")


def test_non_finite_polygon_names_vertex():
    p = np.array([[[0, 0], [1, 0], [0, 1]]] * 3, dtype=float)
    p[1, 2, 1] = -math.inf
    with raises("boxes[1]: vertex 2 y is -inf"):
        check(p)


@pytest.mark.parametrize("column", ["width", "height"])
def test_negative_size_rotated(column):
    b = np.array([[0, 0, 1, 1, 0.0]] * 4)
    b[2, 2 if column == "width" else 3] = -3.0
    with raises(f"det[2]: negative {column} -3.0"):
        check(b, name="det")


@pytest.mark.parametrize(("column", "index"), [("length", 3), ("width", 4), ("height", 5)])
def test_negative_size_upright(column, index):
    b = np.array([[0, 0, 0, 4, 2, 1, 0.0]] * 3)
    b[1, index] = -0.5
    with raises(f"boxes[1]: negative {column} -0.5"):
        check(b)


def test_negative_zero_size_is_valid():
    # -0.0 compares equal to 0 and is not negative.
    check([[0, 0, -0.0, 1, 0]])


@pytest.mark.parametrize(
    ("row", "message"),
    [
        ([2, 0, 1, 1], "b[1]: x_max 1.0 < x_min 2.0"),
        ([0, 3, 1, 1], "b[1]: y_max 1.0 < y_min 3.0"),
    ],
)
def test_inverted_axis(row, message):
    with raises(message):
        check([[0, 0, 1, 1], row, [5, 0, 6, 1]], name="b")


@pytest.mark.parametrize(
    ("rows", "message"),
    [
        ([[0, 0, 1, 1], [0, 3, 1, 1], [5, 0, 1, 1]], "b[1]: y_max 1.0 < y_min 3.0"),
        ([[0, 0, -1, 1, 0], [0, math.nan, 1, 1, 0]], "b[0]: negative width -1.0"),
        (
            [
                [[math.cos(t), math.sin(t)] for t in np.arange(5) * 4 * math.pi / 5],
                [[0, 0], [2, 0], [1, 1], [2, 2], [0, 2]],
            ],
            "b[0]: polygon crosses itself (it winds around 2 times)",
        ),
    ],
)
def test_the_first_offending_row_is_reported(rows, message):
    with raises(message):
        check(rows, name="b")


@pytest.mark.parametrize(
    ("row", "message"),
    [
        ([1, 0, 0, 0, 1, 1], "boxes[0]: x_max 0.0 < x_min 1.0"),
        ([0, 1, 0, 1, 0, 1], "boxes[0]: y_max 0.0 < y_min 1.0"),
        ([0, 0, 2, 1, 1, 1], "boxes[0]: z_max 1.0 < z_min 2.0"),
    ],
)
def test_inverted_axis3(row, message):
    with raises(message):
        check([row])


def test_non_convex_polygon():
    notch = [[0, 0], [2, 0], [1, 1], [2, 2], [0, 2]]
    square = [[0, 0], [2, 0], [2, 2], [0, 2], [0, 1]]  # collinear vertex: fine
    with raises("p[1]: polygon is not convex (it turns the other way at vertex 2)"):
        check([square, notch], name="p")


def test_self_intersecting_pentagram():
    star = [[math.cos(t), math.sin(t)] for t in np.arange(5) * 4 * math.pi / 5]
    with raises("boxes[0]: polygon crosses itself (it winds around 2 times)"):
        check([star])


def test_self_intersecting_asymmetric_bow_tie():
    with pytest.raises(ValueError, match=r"^boxes\[0\]: polygon (is not convex|crosses itself)"):
        check([[[0, 0], [2, 2], [2, 0], [0, 1]]])


def test_self_intersecting_symmetric_bow_tie():
    # A rectangle's corners in the order 0, 2, 1, 3: a common annotation mistake. The two
    # lobes cancel, so the signed area is exactly 0.
    bow_tie = [[0, 0], [1, 1], [1, 0], [0, 1]]
    assert shapely.Polygon(bow_tie).is_valid is False  # shapely: self-intersection
    with pytest.raises(ValueError, match=r"^boxes\[0\]: polygon (is not convex|crosses itself)"):
        check([bow_tie])


def test_polygon_needs_three_vertices():
    with raises("boxes: a polygon needs at least 3 vertices, got K=2"):
        check(np.zeros((4, 2, 2)))
    with raises("boxes: a polygon needs at least 3 vertices, got K=2"):
        check(np.zeros((2, 2)), "polygon")


@pytest.mark.parametrize("dims", [(3, 3), (2, 8), (3,), (2, 4, 3), (2, 4, 2, 2)])
def test_wrong_trailing_dimensions(dims):
    expected = (
        f"boxes: array of shape {dims} matches no box layout (expected (N, 4) axis, (N, 5) "
        "rotated, (N, K, 2) polygon, (N, 6) axis3 or (N, 7) upright)"
    )
    with raises(expected):
        check(np.zeros(dims))


def test_single_polygon_without_shape_gets_a_hint():
    with pytest.raises(ValueError, match="for a single polygon pass shape='polygon'"):
        check([[0, 0], [1, 0], [0, 1]])


def test_unknown_shape_name():
    with raises(
        "boxes: unknown shape 'obb'; expected one of 'axis', 'rotated', 'polygon', "
        "'axis3', 'upright'"
    ):
        check(np.zeros((1, 5)), "obb")


@pytest.mark.parametrize(
    ("dims", "shape", "message"),
    [
        (
            (3, 4),
            "rotated",
            "a: shape='rotated' needs (N, 5) or (5,) boxes, got an array of shape (3, 4)",
        ),
        (
            (3, 7),
            "axis3",
            "a: shape='axis3' needs (N, 6) or (6,) boxes, got an array of shape (3, 7)",
        ),
        (
            (3, 4),
            "polygon",
            "a: shape='polygon' needs (N, K, 2) or (K, 2) vertices, got an array of shape (3, 4)",
        ),
        (
            (2, 4, 2),
            "upright",
            "a: shape='upright' needs (N, 7) or (7,) boxes, got an array of shape (2, 4, 2)",
        ),
    ],
)
def test_shape_that_does_not_fit(dims, shape, message):
    with raises(message):
        check(np.zeros(dims), shape, name="a")


@pytest.mark.parametrize(
    ("value", "pattern"),
    [
        ([["a", "b", "c", "d"]], r"^boxes: expected numbers, got dtype <U1$"),
        ([[1, 2, 3, 4], [1, 2]], r"^boxes: cannot read as an array of numbers"),
        ([[1 + 2j, 0, 1, 1]], r"^boxes: complex numbers are not box coordinates$"),
        ([[object(), 0, 1, 1]], r"^boxes: cannot read as an array of numbers"),
        (np.zeros(4, dtype="datetime64[s]"), r"^boxes: expected numbers, got dtype"),
    ],
)
def test_non_numeric_input(value, pattern):
    with pytest.raises(ValueError, match=pattern):
        check(value)


def test_empty_one_dimensional_input_needs_a_shape():
    with raises("boxes: an empty 1-D array has no layout; pass shape= or an (0, C) array"):
        check([])


def test_mismatched_lengths_for_elementwise():
    with raises("elementwise=True needs as many rows in a as in b: a has 2, b has 3"):
        same_length(read_boxes(np.zeros((2, 4))), read_boxes(np.zeros((3, 4))))


def test_boxes_check_is_the_same_function():
    # One implementation: obbiou.boxes re-exports obbiou.shapes.check.
    assert obox.check is check


# ------------------------------------------------------------------------ valid edge cases


def test_zero_size_boxes_pass():
    check([[1, 1, 0, 0, 0.3], [1, 1, 0, 5, 0.0]])
    check([[2, 3, 2, 3]])
    check([[0, 0, 0, 0, 0, 0, 1.0]])
    check([[1, 1, 1, 1, 1, 1]])


@pytest.mark.parametrize(
    "poly",
    [
        [[0, 0], [1, 1], [2, 2]],  # collinear
        [[0, 0], [0, 0], [0, 0], [0, 0]],  # one point
        [[0, 0], [1, 0], [1, 0], [1, 1], [0, 1]],  # repeated vertex
        [[0, 0], [1, 0], [2, 0], [2, 1], [0, 1]],  # collinear vertex on an edge
        [[0, 0], [2, 0], [1, 0]],  # a segment walked back and forth
    ],
)
def test_degenerate_polygons_pass(poly):
    out = check(poly, "polygon")
    np.testing.assert_array_equal(out, np.asarray(poly, dtype=float))


def test_repeated_vertex_passes_in_every_position_and_direction():
    # A convex triangle with one vertex written twice is a convex quadrilateral with a
    # zero-length edge, which the docstring of _bad_polygons allows (hand-worked: its turns
    # are the triangle's, plus a zero turn at the repeated vertex). The turns beside a
    # zero-length edge meet dot products of exactly zero, whose sign must not count: a
    # -0.0 made arctan2 see a half turn (at both ends of the zero-length edge when the
    # edges around it both point into the third quadrant), and such quadrilaterals were
    # once rejected as winding twice. A flat triangle (an obtuse corner, so that both edges
    # around it can point into one quadrant), turned every 15 degrees, the repeat at each
    # vertex, both windings.
    base = np.array([[0.0, 0.0], [4.0, 0.0], [2.0, 0.5]])
    for deg in range(0, 360, 15):
        t = np.radians(deg)
        rot = np.array([[np.cos(t), -np.sin(t)], [np.sin(t), np.cos(t)]])
        tri = base @ rot.T
        for order in (tri, tri[::-1]):
            for k in range(3):
                quad = np.insert(order, k, order[k], axis=0)
                check(quad, "polygon")


@pytest.mark.parametrize("offset", [0.0, 5e5, -1e6, 1e6])
def test_polygons_far_from_origin_either_winding(offset):
    square = np.array([[0, 0], [3, 0], [3, 2], [0, 2]], dtype=float) + offset
    check(square, "polygon")
    check(square[::-1], "polygon")


@pytest.mark.parametrize("dtype", [np.int8, np.int32, np.int64, np.uint16, np.float16, np.float32])
def test_any_real_dtype_becomes_float64(dtype):
    b = np.array([[1, 2, 4, 3, 0]], dtype=dtype)
    out = check(b)
    assert out.dtype == np.float64
    np.testing.assert_array_equal(out, b.astype(np.float64))


def test_lists_and_single_boxes():
    out = check([0, 0, 4, 2, 0.5])
    assert out.shape == (5,) and out.dtype == np.float64
    assert check([[0, 0, 1, 1]]).shape == (1, 4)
    assert check([[0, 0], [1, 0], [0, 1]], "polygon").shape == (3, 2)


def test_non_contiguous_arrays():
    base = np.arange(60, dtype=float).reshape(6, 10)
    strided = base[::2, ::2]  # (3, 5), neither C- nor F-contiguous
    strided[:, 2:4] = np.abs(strided[:, 2:4])
    assert not strided.flags.c_contiguous and not strided.flags.f_contiguous
    np.testing.assert_array_equal(check(strided), strided)
    fortran = np.asfortranarray(np.array([[0, 0, 2, 2], [1, 1, 3, 4]], dtype=float))
    out = check(fortran)
    assert out.flags.c_contiguous
    np.testing.assert_array_equal(out, fortran)
    reversed_rows = np.array([[0, 0, 1, 1], [2, 2, 3, 3]], dtype=float)[::-1]
    np.testing.assert_array_equal(check(reversed_rows), [[2, 2, 3, 3], [0, 0, 1, 1]])


class _TensorLike:
    """Stands in for a CPU tensor of a deep-learning framework: only ``__array__``."""

    def __init__(self, data):
        self._data = np.asarray(data, dtype=np.float32)

    def __array__(self, dtype=None, copy=None):
        return self._data if dtype is None else self._data.astype(dtype)


def test_objects_with_array_protocol():
    t = _TensorLike([[0, 0, 2, 1, 0.25]])
    out = check(t)
    assert out.dtype == np.float64
    np.testing.assert_allclose(out, [[0, 0, 2, 1, 0.25]], rtol=1e-7)
    bad = _TensorLike([[0, 0, -2, 1, 0.25]])
    with raises("t[0]: negative width -2.0"):
        check(bad, name="t")


@pytest.mark.parametrize(
    ("dims", "shape"),
    [
        ((0, 4), "axis"),
        ((0, 5), "rotated"),
        ((0, 4, 2), "polygon"),
        ((0, 6), "axis3"),
        ((0, 7), "upright"),
        ((0, 2, 2), "polygon"),
    ],
)
def test_empty_batches_pass(dims, shape):
    b = read_boxes(np.zeros(dims))
    assert b.shape == shape and len(b) == 0


# -------------------------------------------------------------------------- property tests


@MODERATE
@given(rotated_box(centre=FAR, sizes=FAR_SIZES))
def test_corners_of_far_rotated_boxes_are_valid_convex_polygons(box):
    pts = corners(box)
    np.testing.assert_array_equal(check(pts, "polygon"), pts)
    # shapely agrees that the corners form a simple polygon of the box's area.
    poly = shapely.Polygon(pts)
    assert poly.is_valid
    assert math.isclose(poly.area, box[2] * box[3], rel_tol=1e-8)


@MODERATE
@given(
    st.one_of(
        rotated_box(centre=FAR, sizes=TINY), rotated_box(sizes=HUGE), rotated_box(zero_size=True)
    )
)
def test_corners_of_tiny_huge_and_zero_boxes_validate(box):
    check(corners(box), "polygon")


@MODERATE
@given(upright_boxes(centre=FAR, sizes=FAR_SIZES, min_n=1))
def test_footprint_corners_of_far_upright_boxes_validate(b):
    check(corners(b)[:, :4, :2], "polygon")


@MODERATE
@given(
    st.one_of(
        rotated_boxes(zero_size=True),
        upright_boxes(zero_size=True),
        axis_boxes(centre=FAR, zero_size=True),
        axis3_boxes(zero_size=True),
    )
)
def test_random_valid_batches_pass_unchanged(b):
    np.testing.assert_array_equal(check(b), b)


@MODERATE
@given(
    st.one_of(
        convex_polygons(centre=FAR, sizes=FAR_SIZES),
        convex_polygons(sizes=TINY),
        hull_polygon().map(lambda p: p[None]),
    )
)
def test_convex_polygons_pass_and_are_valid_for_shapely(polys):
    np.testing.assert_array_equal(check(polys, "polygon"), polys)
    for p in polys:
        assert shapely.Polygon(p).is_valid  # shapely: simple polygon


@MODERATE
@given(
    coordinate(FAR),
    coordinate(FAR),
    length(FAR_SIZES),
    angle(),
    st.integers(4, 8),  # a triangle with one vertex moved stays convex
    st.data(),
)
def test_pulling_one_vertex_inwards_breaks_convexity(cx, cy, radius, turn, k, data):
    # A regular k-gon far from the origin with vertex i pushed inwards past the chord of its
    # neighbours (by less than its distance to that chord): a reflex vertex, still simple.
    t = turn + 2 * np.pi * np.arange(k) / k
    poly = np.stack([cx + radius * np.cos(t), cy + radius * np.sin(t)], axis=1)
    i = data.draw(st.integers(0, k - 1))
    depth = data.draw(st.floats(0.1, 0.9))
    chord_mid = (poly[i - 1] + poly[(i + 1) % k]) / 2
    poly[i] = chord_mid + depth * (chord_mid - poly[i])
    local = shapely.Polygon(poly - [cx, cy])
    assert local.convex_hull.area > local.area * (1 + 1e-9)  # shapely: not its own hull
    with pytest.raises(
        ValueError,
        match=rf"^p\[0\]: polygon is not convex \(it turns the "
        rf"other way at vertex {i}\)$",
    ):
        check(poly[None], name="p")


# -------------------------------------------------- the shared strategies keep their word


@settings(max_examples=25, deadline=None)
@given(
    st.sampled_from(PAIR_KINDS).flatmap(
        lambda k: st.one_of(
            rotated_pair(k),
            rotated_pair(k, centre=FAR, sizes=FAR_SIZES),
            polygon_pair(k),
            polygon_pair(k, centre=FAR, sizes=FAR_SIZES),
        )
    )
)
def test_pair_families_hold_against_shapely(pair):
    a, b, kind = pair
    shape = "polygon" if a.ndim == 2 else "rotated"
    check(a, shape)
    check(b, shape)
    pa, pb = shapely.Polygon(corners(a, shape=shape)), shapely.Polygon(corners(b, shape=shape))
    inter = pa.intersection(pb).area  # shapely: the outside reference for each family
    if kind == "identical":
        assert math.isclose(inter, pa.area, rel_tol=1e-9)
    elif kind == "nested":
        assert math.isclose(inter, pb.area, rel_tol=1e-7)
    elif kind in ("shared_edge", "touching_corner"):
        assert inter <= 1e-6 * min(pa.area, pb.area)
        assert pa.distance(pb) <= 1e-9 * max(1.0, float(np.abs(a).max()))
    elif kind == "disjoint":
        assert inter == 0.0 and pa.distance(pb) > 0.0
    elif kind == "near_parallel":
        assert inter > 0.0


@settings(max_examples=25, deadline=None)
@given(upright_pair())
def test_upright_pairs_validate(pair):
    check(pair.a)
    check(pair.b)


@settings(max_examples=25, deadline=None)
@given(pair_batch(rotated_pair(centre=FAR, sizes=FAR_SIZES)), pair_batch(upright_pair()))
def test_pair_batches_validate_row_by_row(rot, up):
    for a, b, kinds in (rot, up):
        assert a.shape == b.shape and len(kinds) == len(a)
        np.testing.assert_array_equal(check(a, "rotated" if a.shape[-1] == 5 else "upright"), a)
        check(b, "rotated" if b.shape[-1] == 5 else "upright")


@pytest.mark.parametrize(
    ("rows", "shape", "message"),
    [
        ([[0, 0, 1, 1, 0], [0, 0, 1e200, 1e200, 0]], None, "b[1]: box too large: its area"),
        ([[-1e308, 0, 0, 1e308, 1, 1]], None, "b[0]: box too large: its volume"),
        ([[[0, 0], [1e300, 0], [0, 1e300]]], None, "b[0]: box too large: its area"),
    ],
)
def test_sizes_that_overflow_float64_are_rejected(rows, shape, message):
    # An area of inf would turn iou(x, x) into inf/inf: the project's rule is an error, not NaN.
    with pytest.raises(ValueError, match="^" + re.escape(message)):
        check(rows, shape, name="b")


# -- tables read by column name (the gate reads DataFrames and mappings by their names) ----


def _shapely_rotated(rows: np.ndarray) -> np.ndarray:
    """shapely polygons of (cx, cy, width, height, angle) rows, corners worked out here."""
    c, s = np.cos(rows[:, 4]), np.sin(rows[:, 4])
    hw, hh = rows[:, 2] / 2, rows[:, 3] / 2
    pts = []
    for sx, sy in ((-1, -1), (1, -1), (1, 1), (-1, 1)):
        pts.append(
            np.stack(
                [rows[:, 0] + sx * hw * c - sy * hh * s, rows[:, 1] + sx * hw * s + sy * hh * c], 1
            )
        )
    return shapely.polygons(np.stack(pts, axis=1))


@settings(max_examples=60, deadline=None)
@given(rotated_boxes(min_n=1, max_n=6), rotated_boxes(min_n=1, max_n=6), st.randoms())
def test_dataframe_columns_in_another_order_are_read_by_name(a, b, rnd):
    import pandas as pd

    import obbiou

    names = ["cx", "cy", "width", "height", "angle"]
    order = names[:]
    rnd.shuffle(order)
    da = pd.DataFrame(a, columns=names)[order].assign(score=0.5)  # an extra column too
    db = pd.DataFrame(b, columns=names)[order[::-1]]
    got = obbiou.iou(da, db)
    assert np.array_equal(got, obbiou.iou(a, b))  # the same numbers as the plain arrays
    # shapely on the boxes the names describe is the outside reference
    pa, pb = _shapely_rotated(a), _shapely_rotated(b)
    inter = shapely.area(shapely.intersection(pa[:, None], pb[None, :]))
    union = shapely.area(pa)[:, None] + shapely.area(pb)[None, :] - inter
    with np.errstate(invalid="ignore", divide="ignore"):
        want = np.where(union > 0, inter / union, 0.0)
    np.testing.assert_allclose(got, want, atol=1e-7)
    # a mapping of columns and one row (a Series) are read by name as well
    assert np.array_equal(obbiou.iou(dict(da), db), got)
    assert np.array_equal(obbiou.iou(da.iloc[0], db), got[0])


def test_columns_by_name_for_every_layout_and_by_position_without_names():
    import pandas as pd

    import obbiou

    # hand-worked: the square [0, 2]^2 against the axis box [0, 2] x [0, 1]: IoU 2 / 4
    square = {"py0": [0.0], "px0": [0.0], "px1": [2.0], "py1": [0.0], "px2": [2.0],
              "py2": [2.0], "px3": [0.0], "py3": [2.0]}  # fmt: skip
    half = pd.DataFrame({"y_max": [1.0], "x_max": [2.0], "y_min": [0.0], "x_min": [0.0]})
    assert obbiou.iou(square, half)[0, 0] == 0.5
    # upright: unit cube against the same cube shifted by 0.5 along x: 0.5 / 1.5 (hand-worked)
    cube = {"yaw": [0.0], "height": [1.0], "width": [1.0], "length": [1.0], "cz": [0.5],
            "cy": [0.0], "cx": [0.0]}  # fmt: skip
    moved = dict(cube, cx=[0.5])
    assert obbiou.iou(cube, moved)[0, 0] == pytest.approx(1 / 3, abs=1e-15)
    # no column name is a box column name: read by position (the README's rule)
    plain = pd.DataFrame([[0.0, 0.0, 2.0, 1.0]])
    assert obbiou.iou(plain, half)[0, 0] == 1.0


def test_tables_with_some_box_names_missing_or_doubled_are_errors():
    import pandas as pd

    import obbiou
    from obbiou.errors import InvalidInput

    df = pd.DataFrame({"cx": [0.0], "cy": [0.0], "w": [2.0], "h": [1.0], "angle": [0.0]})
    with pytest.raises(InvalidInput, match=r"^a: missing column 'width'"):
        obbiou.iou(df, df)
    full = pd.DataFrame({"cx": [0.0], "cy": [0.0], "width": [2.0], "height": [1.0], "angle": [0.0]})
    with pytest.raises(InvalidInput, match=r"missing column 'x_min' \(shape 'axis' needs"):
        obbiou.iou(full, full, shape="axis")
    doubled = pd.concat([full, full[["cx"]]], axis=1)
    with pytest.raises(InvalidInput, match="column name given twice") as err:
        obbiou.iou(doubled, full)
    assert err.value.column == "cx"
    # a bad value names its column by name, whatever its position in the table
    bad = full[["width", "cx", "cy", "height", "angle"]].assign(width=[-1.0])
    with pytest.raises(InvalidInput, match=r"^b\[0\]: negative width -1\.0$") as err:
        obbiou.iou(full, bad)
    assert err.value.column == "width"
