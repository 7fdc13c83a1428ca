"""Measures against outside references: worked examples, shapely, invariances, bad input."""

from __future__ import annotations

import math

import numpy as np
import pytest

import obbiou
from obbiou.boxes import corners, footprint
from obbiou.measures import (
    coverage,
    diou,
    giou,
    intersection,
    iou,
    pair_values,
    prepare,
)
from obbiou.shapes import read_boxes

shapely = pytest.importorskip("shapely")

MEASURE_FUNCS = {
    "iou": iou,
    "giou": giou,
    "diou": diou,
    "intersection": intersection,
    "coverage": coverage,
}


def random_rotated(rng, n, spread=5.0, offset=0.0):
    return np.column_stack(
        [
            offset + rng.uniform(0, spread, n),
            offset + rng.uniform(0, spread, n),
            rng.uniform(0.1, 3, n),
            rng.uniform(0.1, 3, n),
            rng.uniform(-4, 4, n),
        ]
    )


def random_upright(rng, n):
    return np.column_stack(
        [
            rng.uniform(0, 5, n),
            rng.uniform(0, 5, n),
            rng.uniform(0, 2, n),
            rng.uniform(0.1, 3, (n, 3)),
            rng.uniform(-4, 4, n),
        ]
    )


def shapely_reference(pa, pb):
    """IoU, intersection and hull area of all pairs by shapely (the outside reference)."""
    inter = shapely.area(shapely.intersection(pa[:, None], pb[None, :]))
    union = shapely.area(pa)[:, None] + shapely.area(pb)[None, :] - inter
    hull = shapely.area(shapely.convex_hull(shapely.union(pa[:, None], pb[None, :])))
    return inter, union, hull


# ---------------------------------------------------------------------------------------
# worked examples


def test_octagon_of_two_squares():
    # Two equal squares, common centre, one turned 45 degrees: the overlap is a regular
    # octagon; IoU = 1/sqrt(2) (regular octagon area; value from memory).
    value = iou([0, 0, 2, 2, 0.0], [0, 0, 2, 2, math.pi / 4])
    assert value == pytest.approx(1 / math.sqrt(2), abs=1e-15)
    # Octagon of circumradius R = 1/cos(pi/8) ... side s = 2 tan(pi/8): area 2(1+sqrt2)s^2
    # (regular octagon area formula, from memory).
    s = 2 * math.tan(math.pi / 8)
    area = 2 * (1 + math.sqrt(2)) * s * s
    got = intersection([0, 0, 2, 2, 0.0], [0, 0, 2, 2, math.pi / 4])
    assert got == pytest.approx(area, abs=1e-14)


@pytest.mark.parametrize("d", [0.0, 0.1, 0.25, 0.5, 0.75, 0.999])
def test_unit_squares_shifted(d):
    # Unit squares shifted by d along x: IoU = (1 - d) / (1 + d) (direct area count).
    expected = (1 - d) / (1 + d)
    assert iou([0, 0, 1, 1, 0.0], [d, 0, 1, 1, 0.0]) == pytest.approx(expected, abs=1e-15)
    assert iou([0, 0, 1, 1], [d, 0, 1 + d, 1]) == pytest.approx(expected, abs=1e-15)
    # Same along the box's own axis after a common rotation of 0.7 rad.
    c, s = math.cos(0.7), math.sin(0.7)
    assert iou([0, 0, 1, 1, 0.7], [d * c, d * s, 1, 1, 0.7]) == pytest.approx(expected, abs=1e-14)


def test_nested_axis_boxes_ratio_of_areas():
    # One axis box inside another: IoU = inner area / outer area (direct area count).
    outer = [0, 0, 10, 4]
    inner = [1, 1, 3, 2]
    assert iou(outer, inner) == 2 / 40
    assert coverage(inner, outer) == 1.0
    assert coverage(outer, inner) == 2 / 40
    assert giou(outer, inner) == 2 / 40  # the hull is the outer box


def test_disjoint_measures_by_hand():
    # Unit squares 1 apart: union 2, hull 3 (GIoU = -1/3), centres 2 apart in a 3 x 1
    # enclosing box (DIoU = -4/10): direct counts.
    assert iou([0, 0, 1, 1], [2, 0, 3, 1]) == 0.0
    assert giou([0, 0, 1, 1], [2, 0, 3, 1]) == pytest.approx(-1 / 3, abs=1e-15)
    assert diou([0, 0, 1, 1], [2, 0, 3, 1]) == pytest.approx(-0.4, abs=1e-15)
    assert giou([0.5, 0.5, 1, 1, 0.0], [2.5, 0.5, 1, 1, 0.0]) == pytest.approx(-1 / 3, abs=1e-15)


def test_upright_worked_example():
    # Two 2x2x2 cubes offset by 1 in x and 1 in z: overlap 1*2*1 = 2, union 14 (by hand).
    a = [0, 0, 0, 2, 2, 2, 0.0]
    b = [1, 0, 1, 2, 2, 2, 0.0]
    assert intersection(a, b) == 2.0
    assert iou(a, b) == pytest.approx(2 / 14, abs=1e-15)
    assert iou([-1, -1, -1, 1, 1, 1], [0, -1, 0, 2, 1, 2]) == pytest.approx(2 / 14, abs=1e-15)


# ---------------------------------------------------------------------------------------
# shapely on random batches (fixed seeds), all layouts


@pytest.mark.parametrize("offset", [0.0, 1e6])
def test_rotated_against_shapely(offset):
    rng = np.random.default_rng(1)
    a = random_rotated(rng, 60, offset=offset)
    b = random_rotated(rng, 50, offset=offset)
    pa = shapely.polygons(corners(a - [offset, offset, 0, 0, 0]))  # shapely far from 1e6
    pb = shapely.polygons(corners(b - [offset, offset, 0, 0, 0]))  # loses digits: shift it
    inter, union, hull = shapely_reference(pa, pb)
    # shapely.intersection / area / convex_hull are the reference.
    np.testing.assert_allclose(intersection(a, b), inter, atol=1e-9)
    np.testing.assert_allclose(iou(a, b), inter / union, atol=1e-9)
    np.testing.assert_allclose(giou(a, b), inter / union - (hull - union) / hull, atol=1e-9)
    # Same boxes as polygons and as a polygon / rotated mix.
    np.testing.assert_allclose(iou(corners(a), corners(b)), inter / union, atol=1e-9)
    np.testing.assert_allclose(iou(corners(a), b), inter / union, atol=1e-9)
    np.testing.assert_allclose(
        giou(corners(a), corners(b)), inter / union - (hull - union) / hull, atol=1e-9
    )


def test_axis_against_shapely():
    rng = np.random.default_rng(2)
    lo = rng.uniform(0, 5, (40, 2))
    a = np.column_stack([lo, lo + rng.uniform(0, 3, (40, 2))])
    lo = rng.uniform(0, 5, (30, 2))
    b = np.column_stack([lo, lo + rng.uniform(0, 3, (30, 2))])
    inter, union, hull = shapely_reference(shapely.box(*a.T), shapely.box(*b.T))
    # shapely is the reference.
    np.testing.assert_allclose(iou(a, b), inter / union, atol=1e-12)
    np.testing.assert_allclose(giou(a, b), inter / union - (hull - union) / hull, atol=1e-12)
    as_rotated = np.column_stack(
        [(a[:, 0] + a[:, 2]) / 2, (a[:, 1] + a[:, 3]) / 2, a[:, 2] - a[:, 0], a[:, 3] - a[:, 1]]
    )
    as_rotated = np.column_stack([as_rotated, np.zeros(40)])
    np.testing.assert_allclose(iou(as_rotated, b), inter / union, atol=1e-12)


def test_upright_against_shapely_footprints():
    rng = np.random.default_rng(3)
    a = random_upright(rng, 40)
    b = random_upright(rng, 30)
    inter2, _, hull2 = shapely_reference(
        shapely.polygons(corners(footprint(a))), shapely.polygons(corners(footprint(b)))
    )
    za0, za1 = a[:, 2] - a[:, 5] / 2, a[:, 2] + a[:, 5] / 2
    zb0, zb1 = b[:, 2] - b[:, 5] / 2, b[:, 2] + b[:, 5] / 2
    dz = np.clip(np.minimum(za1[:, None], zb1) - np.maximum(za0[:, None], zb0), 0, None)
    inter = inter2 * dz
    union = np.prod(a[:, 3:6], 1)[:, None] + np.prod(b[:, 3:6], 1) - inter
    span = np.maximum(za1[:, None], zb1) - np.minimum(za0[:, None], zb0)
    hull = hull2 * span
    # shapely footprint areas times z intervals are the reference.
    np.testing.assert_allclose(intersection(a, b), inter, atol=1e-9)
    np.testing.assert_allclose(iou(a, b), inter / union, atol=1e-9)
    np.testing.assert_allclose(giou(a, b), inter / union - (hull - union) / hull, atol=1e-9)


# ---------------------------------------------------------------------------------------
# exactness rules and the pair primitive


@pytest.mark.parametrize("name", list(MEASURE_FUNCS))
def test_pair_values_equal_matrix_entries(name):
    rng = np.random.default_rng(4)
    for a, b in [
        (random_rotated(rng, 30), random_rotated(rng, 20)),
        (corners(random_rotated(rng, 30)), corners(random_rotated(rng, 20))),
        (random_upright(rng, 30), random_upright(rng, 20)),
    ]:
        full = MEASURE_FUNCS[name](a, b)
        first = rng.integers(0, 30, 200)
        second = rng.integers(0, 20, 200)
        got = pair_values(read_boxes(a), read_boxes(b), first, second, measure=name)
        assert np.array_equal(got, full[first, second])
        prepared = pair_values(
            prepare(read_boxes(a)), prepare(read_boxes(b)), first, second, measure=name
        )
        assert np.array_equal(prepared, got)


@pytest.mark.parametrize("name", ["iou", "giou", "diou", "intersection"])
def test_symmetry_and_identity(name):
    rng = np.random.default_rng(5)
    f = MEASURE_FUNCS[name]
    for a in [random_rotated(rng, 40), corners(random_rotated(rng, 40)), random_upright(rng, 40)]:
        m = f(a, a[::-1])
        assert np.array_equal(m, f(a[::-1], a).T)
        if name != "intersection":
            assert (np.diag(f(a, a)) == 1.0).all()


def test_public_names():
    assert obbiou.iou is iou
    assert {"iou", "giou", "diou", "intersection", "coverage"} <= set(obbiou.__all__)


# ---------------------------------------------------------------------------------------
# result shapes: single boxes, empty inputs, elementwise


def test_result_shapes():
    one = [0, 0, 2, 1, 0.3]
    many = np.array([one, [1, 0, 2, 1, 0.0], [9, 9, 1, 1, 0.0]])
    assert np.ndim(iou(one, one)) == 0
    assert iou(one, many).shape == (3,)
    assert iou(many, one).shape == (3,)
    assert iou(many, many).shape == (3, 3)
    assert iou(many, many[:2]).shape == (3, 2)
    assert iou(many, many, elementwise=True).shape == (3,)
    assert np.ndim(iou(one, one, elementwise=True)) == 0
    for f in MEASURE_FUNCS.values():
        assert f(np.zeros((0, 5)), many).shape == (0, 3)
        assert f(many, np.zeros((0, 5))).shape == (3, 0)
        assert f(np.zeros((0, 7)), np.zeros((0, 7)), elementwise=True).shape == (0,)
        assert f(np.zeros((0, 4, 2)), np.zeros((2, 4, 2)) + corners(one)).shape == (0, 2)
        assert f(np.zeros((0, 5)), one).shape == (0,)


def test_zero_size_boxes_overlap_nothing():
    boxes = [[0, 0, 0, 2, 0.0], [0, 0, 2, 0, 0.3], [0, 0, 2, 2, 0.0]]
    m = iou(boxes, boxes)
    assert m[0, 0] == 0.0 and m[1, 1] == 0.0 and m[0, 2] == 0.0 and m[2, 2] == 1.0
    assert coverage(boxes, boxes)[0, 2] == 0.0
    for f in (giou, diou):
        assert not np.isnan(f(boxes, boxes)).any()
    assert iou([1, 1, 1, 1], [1, 1, 1, 1]) == 0.0  # a point: 0/0 never happens
    assert giou([1, 1, 1, 1], [1, 1, 1, 1]) == 0.0
    assert diou([1, 1, 1, 1], [1, 1, 1, 1]) == 0.0
    assert iou([0, 0, 0, 0, 0, 0, 0], [0, 0, 0, 1, 1, 1, 0]) == 0.0


def test_large_inputs_use_parallel_kernels_with_same_values():
    # Above the parallel threshold the parallel kernels run; they must agree bit for bit
    # with the serial ones used for small inputs.
    rng = np.random.default_rng(6)
    a, b = random_rotated(rng, 100), random_rotated(rng, 80)
    full = iou(a, b)
    rows = np.vstack([iou(a[i], b) for i in range(100)])
    assert np.array_equal(full, rows)
    elem = iou(np.repeat(a, 80, axis=0), np.tile(b, (100, 1)), elementwise=True)
    assert np.array_equal(elem, full.ravel())
    first, second = np.divmod(np.arange(8000), 80)
    got = pair_values(read_boxes(a), read_boxes(b), first, second)
    assert np.array_equal(got, full.ravel())


# ---------------------------------------------------------------------------------------
# input forms


class Tensorish:
    """An object with ``__array__`` only, like a CPU tensor of a deep-learning framework."""

    def __init__(self, data):
        self._data = np.asarray(data)

    def __array__(self, dtype=None, copy=None):
        return self._data if dtype is None else self._data.astype(dtype)


def test_input_forms_give_the_same_values():
    rng = np.random.default_rng(7)
    a = np.round(random_rotated(rng, 12), 2)
    b = np.round(random_rotated(rng, 9), 2)
    expected = iou(a, b)
    assert np.array_equal(iou(a.tolist(), b.tolist()), expected)
    assert np.array_equal(iou(Tensorish(a), Tensorish(b)), expected)
    wide = np.zeros((12, 10))
    wide[:, ::2] = a
    assert np.array_equal(iou(wide[:, ::2], b), expected)  # non-contiguous
    assert np.array_equal(iou(np.asfortranarray(a), b), expected)
    f32 = a.astype(np.float32)
    assert np.array_equal(iou(f32, b), iou(f32.astype(np.float64), b))
    ints = np.array([[0, 0, 4, 4], [2, 2, 6, 6]], dtype=np.int32)
    assert np.array_equal(iou(ints, ints[::-1]), iou(ints.astype(float), ints[::-1]))
    assert iou(ints.astype(np.uint8), ints)[0, 1] == pytest.approx(4 / 28)


# ---------------------------------------------------------------------------------------
# bad input: ValueError naming the argument, the row and the reason (docs/design.md §4)


@pytest.mark.parametrize(
    "a, b, message",
    [
        ([[0, 0, 1, 1, 0.0], [0, 0, np.nan, 1, 0.0]], [0, 0, 1, 1, 0.0], r"^a\[1\]: width is NaN$"),
        ([0, 0, 1, 1, 0.0], [[0, 0, 1, 1, 0.0], [0, np.inf, 1, 1, 0]], r"^b\[1\]: cy is \+inf$"),
        ([[0, 0, 1, -2.0, 0.0]], [0, 0, 1, 1, 0.0], r"^a\[0\]: negative height -2\.0$"),
        ([[0, 0, 0, 1, 1, -1.0, 0]], [0, 0, 0, 1, 1, 1, 0.0], r"^a\[0\]: negative height"),
        ([0, 0, 1, 1], [[0, 0, 1, 1], [3, 0, 2, 1]], r"^b\[1\]: x_max 2\.0 < x_min 3\.0$"),
        ([[0, 0, 0, 1, 1, -1]], [0, 0, 0, 1, 1, 1], r"^a\[0\]: z_max -1\.0 < z_min 0\.0$"),
        (
            [[[0, 0], [2, 0], [1, 1], [2, 2], [0, 2]]],
            [[[0, 0], [1, 0], [0, 1]]],
            r"^a\[0\]: polygon is not convex",
        ),
        (
            [[[0, 0], [1, 0], [0, 1]]],
            [[[np.cos(t), np.sin(t)] for t in np.arange(5) * 4 * np.pi / 5]],  # a pentagram
            r"^b\[0\]: polygon crosses itself \(it winds around 2 times\)$",
        ),
        ([[0, 0, 1]], [0, 0, 1, 1], r"^a: array of shape \(1, 3\) matches no box layout"),
        ([0, 0, 1, 1, 0.0], [0, 0, 0, 1, 1, 1, 0.0], r"cannot compare 2D boxes \('rotated'\)"),
        ([[[0, 0], [1, 0], [0, 1]]], [0, 0, 1, 1, 1, 1], r"cannot compare 2D boxes \('polygon'\)"),
        ([["a", 0, 1, 1, 0]], [0, 0, 1, 1, 0.0], r"^a: "),
    ],
)
def test_invalid_input_messages(a, b, message):
    for f in MEASURE_FUNCS.values():
        with pytest.raises(ValueError, match=message):
            f(a, b)


def test_invalid_options():
    with pytest.raises(ValueError, match=r"^a: unknown shape 'box'"):
        iou([0, 0, 1, 1], [0, 0, 1, 1], shape="box")
    with pytest.raises(ValueError, match=r"^a: shape='rotated' needs \(N, 5\)"):
        iou([0, 0, 1, 1], [0, 0, 1, 1], shape="rotated")
    with pytest.raises(ValueError, match=r"elementwise=True needs as many rows in a as in b"):
        iou([[0, 0, 1, 1]] * 2, [[0, 0, 1, 1]] * 3, elementwise=True)
    a = read_boxes([[0, 0, 1, 1, 0.0]] * 3)
    with pytest.raises(ValueError, match=r"^measure: unknown 'area'"):
        pair_values(a, a, np.array([0]), np.array([0]), measure="area")
    with pytest.raises(ValueError, match=r"^second\[1\]: index 3 out of range for 3 boxes"):
        pair_values(a, a, np.array([0, 1]), np.array([0, 3]))
    with pytest.raises(ValueError, match=r"^first\[0\]: index -1 out of range"):
        pair_values(a, a, np.array([-1]), np.array([0]))
    with pytest.raises(ValueError, match=r"equal lengths: 2 and 1"):
        pair_values(a, a, np.array([0, 1]), np.array([0]))
    with pytest.raises(ValueError, match=r"^first: expected a 1-D array of integer indices"):
        pair_values(a, a, np.array([0.5]), np.array([0]))


def test_polygons_with_different_vertex_counts_against_shapely():
    rng = np.random.default_rng(8)
    tri = np.array([[[0, 0], [3, 0], [0, 3]], [[1, 1], [4, 1], [1, 4]]], dtype=float)
    hexa = np.array(
        [[[2 + np.cos(t), 1 + np.sin(t)] for t in np.arange(6) * np.pi / 3 + rng.uniform()]]
    )
    inter, union, hull = shapely_reference(shapely.polygons(tri), shapely.polygons(hexa))
    # shapely is the reference.
    np.testing.assert_allclose(iou(tri, hexa), inter / union, atol=1e-12)
    np.testing.assert_allclose(giou(tri, hexa), inter / union - (hull - union) / hull, atol=1e-12)
    assert np.array_equal(iou(hexa, tri), iou(tri, hexa).T)
