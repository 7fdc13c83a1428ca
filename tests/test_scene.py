"""overlapping_pairs against thresholding a dense all-pairs IoU matrix.

Outside reference: shapely 2.x (polygon intersection areas) for 2D, shapely footprint area
times the z-interval overlap for 3D; scene families are drawn by hypothesis.
"""

from __future__ import annotations

import numpy as np
import pytest
import shapely
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import obbiou
from obbiou.boxes import corners
from obbiou.scene import Pairs, overlapping_pairs

# Values nearer than this to the threshold may fall either way between two exact-in-float64
# computations (shapely and obbiou round differently); everything else must agree.
BAND = 1e-9

LAYOUTS = ("rotated", "axis", "polygon", "upright", "axis3")
FAMILIES = ("sparse", "clusters", "touching", "identical", "far", "mixed sizes")


def make_scene(rng: np.random.Generator, family: str, layout: str, n: int) -> np.ndarray:
    """Rotated (cx, cy, w, h, angle) boxes of a family, converted to ``layout``."""
    if family == "sparse":
        c = rng.uniform(0, 400, (n, 2))
        wh = rng.uniform(2, 30, (n, 2))
    elif family == "clusters":
        centres = rng.uniform(0, 100, (max(1, n // 5), 2))
        c = centres[rng.integers(0, len(centres), n)] + rng.normal(0, 2, (n, 2))
        wh = rng.uniform(5, 20, (n, 2))
    elif family == "touching":
        # unit squares on a lattice: neighbours share edges or touch at corners only
        k = int(np.ceil(np.sqrt(max(n, 1))))
        c = np.stack([np.arange(n) % k, np.arange(n) // k], axis=1) + 0.5
        wh = np.ones((n, 2))
    elif family == "identical":
        c = np.tile(rng.uniform(0, 10, (1, 2)), (n, 1))
        wh = np.tile(rng.uniform(1, 5, (1, 2)), (n, 1))
    elif family == "far":
        c = 5e5 + rng.uniform(0, 50, (n, 2))  # map-metre offsets
        wh = rng.uniform(1, 10, (n, 2))
    else:  # sizes over four orders of magnitude
        c = rng.uniform(0, 200, (n, 2))
        wh = 10.0 ** rng.uniform(-2, 2, (n, 2))
    zero_angle = layout in ("axis", "axis3") or family == "touching"
    ang = np.zeros(n) if zero_angle else rng.uniform(-np.pi, np.pi, n)
    rot = np.column_stack([c, wh, ang])
    if layout == "rotated":
        return rot
    if layout == "axis":
        return np.column_stack([c - wh / 2, c + wh / 2])
    if layout == "polygon":
        poly = corners(rot, shape="rotated").reshape(n, 4, 2)
        shift = int(rng.integers(0, 4))
        poly = np.roll(poly, shift, axis=1)
        return poly[:, ::-1] if rng.random() < 0.5 else poly  # either winding
    z = rng.uniform(0, 3, n) if family != "identical" else np.ones(n)
    hz = rng.uniform(0.5, 2, n) if family != "identical" else np.ones(n)
    if family == "touching":
        z = (np.arange(n) % 2).astype(float)  # stacked boxes touching at a face
        hz = np.ones(n)
    if layout == "upright":
        return np.column_stack([c, z, wh, hz, ang])
    return np.column_stack([c - wh / 2, z - hz / 2, c + wh / 2, z + hz / 2])


def shapely_iou_matrix(a: np.ndarray, b: np.ndarray, layout: str) -> np.ndarray:
    """Dense IoU matrix by shapely (2D areas; 3D: footprint area x z overlap)."""
    if len(a) == 0 or len(b) == 0:
        return np.zeros((len(a), len(b)))
    ca = corners(a, shape=layout).reshape(len(a), -1, 3 if layout in ("upright", "axis3") else 2)
    cb = corners(b, shape=layout).reshape(len(b), -1, ca.shape[-1])
    if ca.shape[-1] == 2:
        pa, pb = shapely.polygons(ca), shapely.polygons(cb)
        za = zb = None
    else:
        pa, pb = shapely.polygons(ca[:, :4, :2]), shapely.polygons(cb[:, :4, :2])
        za, zb = ca[:, [0, 4], 2], cb[:, [0, 4], 2]
    inter = shapely.area(shapely.intersection(pa[:, None], pb[None, :]))
    sa, sb = shapely.area(pa)[:, None], shapely.area(pb)[None, :]
    if za is not None:
        dz = np.minimum(za[:, None, 1], zb[None, :, 1]) - np.maximum(za[:, None, 0], zb[None, :, 0])
        inter = inter * np.clip(dz, 0, None)
        sa = sa * (za[:, 1] - za[:, 0])[:, None]
        sb = sb * (zb[:, 1] - zb[:, 0])[None, :]
    union = sa + sb - inter
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(union > 0, inter / union, 0.0)


def check_against_own_matrix(pairs: Pairs, a, b, layout: str, min_iou: float, self_pairs: bool):
    """The index loses nothing: exactly the entries of obbiou.iou's dense matrix above the
    threshold, bit for bit (same per-pair kernel)."""
    dense = obbiou.iou(a, b, shape=layout) if len(a) and len(b) else np.zeros((len(a), len(b)))
    want = dense > min_iou
    if self_pairs:
        want &= np.triu(np.ones(dense.shape, bool), 1)
    found = np.zeros(dense.shape, bool)
    found[pairs.first, pairs.second] = True
    assert np.array_equal(found, want)
    np.testing.assert_array_equal(pairs.iou, dense[pairs.first, pairs.second])


def check_against_dense(pairs: Pairs, dense: np.ndarray, min_iou: float, self_pairs: bool):
    n, m = dense.shape
    assert pairs.first.dtype == np.int64 and pairs.second.dtype == np.int64
    assert pairs.iou.dtype == np.float64
    assert (pairs.n_first, pairs.n_second) == (n, m)
    key = pairs.first * max(m, 1) + pairs.second
    assert np.all(np.diff(key) > 0), "not sorted by (first, second) or has duplicates"
    if self_pairs:
        assert np.all(pairs.first < pairs.second)
    found = np.zeros((n, m), bool)
    found[pairs.first, pairs.second] = True
    want = dense > min_iou
    if self_pairs:
        want &= np.triu(np.ones((n, m), bool), 1)
    sure = np.abs(dense - min_iou) > BAND  # away from the threshold: must agree
    # reference: shapely dense matrix, thresholded
    assert np.array_equal(found & sure, want & sure)
    np.testing.assert_allclose(pairs.iou, dense[pairs.first, pairs.second], rtol=0, atol=1e-9)
    assert np.all(pairs.iou > min_iou)


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    seed=st.integers(0, 2**32 - 1),
    family=st.sampled_from(FAMILIES),
    layout=st.sampled_from(LAYOUTS),
    n=st.sampled_from([0, 1, 2, 7, 30, 60]),
    min_iou=st.sampled_from([0.0, 0.0, 0.1, 0.5, 0.9]),
)
def test_self_pairs_equal_thresholded_dense_matrix(seed, family, layout, n, min_iou):
    a = make_scene(np.random.default_rng(seed), family, layout, n)
    pairs = overlapping_pairs(a, shape=layout, min_iou=min_iou)
    check_against_dense(pairs, shapely_iou_matrix(a, a, layout), min_iou, self_pairs=True)
    check_against_own_matrix(pairs, a, a, layout, min_iou, self_pairs=True)


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    seed=st.integers(0, 2**32 - 1),
    family=st.sampled_from(FAMILIES),
    layout=st.sampled_from(LAYOUTS),
    n=st.sampled_from([0, 1, 5, 40]),
    m=st.sampled_from([0, 1, 6, 40]),
    min_iou=st.sampled_from([0.0, 0.3, 0.7]),
)
def test_pairs_between_sets_equal_thresholded_dense_matrix(seed, family, layout, n, m, min_iou):
    rng = np.random.default_rng(seed)
    both = make_scene(rng, family, layout, n + m)
    a, b = both[:n], both[n:]
    pairs = overlapping_pairs(a, b, shape=layout, min_iou=min_iou)
    check_against_dense(pairs, shapely_iou_matrix(a, b, layout), min_iou, self_pairs=False)
    check_against_own_matrix(pairs, a, b, layout, min_iou, self_pairs=False)


def test_touching_squares_have_no_pairs():
    # unit squares sharing edges and corners: intersection areas are 0 (shapely agrees)
    a = make_scene(np.random.default_rng(0), "touching", "axis", 16)
    assert shapely_iou_matrix(a, a, "axis").max(initial=0, where=~np.eye(16, dtype=bool)) == 0
    assert len(overlapping_pairs(a)) == 0
    assert len(overlapping_pairs(a, shape="axis", min_iou=0.0)) == 0


def test_identical_boxes_give_every_pair_with_iou_one():
    a = np.tile([3.0, 4.0, 10.0, 2.0, 0.7], (6, 1))
    p = overlapping_pairs(a)
    assert len(p) == 15  # 6 choose 2
    np.testing.assert_allclose(p.iou, 1.0, rtol=0, atol=1e-12)


def test_sparse_matrix_matches_pairs():
    pytest.importorskip("scipy")
    rng = np.random.default_rng(5)
    a = make_scene(rng, "clusters", "rotated", 30)
    b = make_scene(rng, "clusters", "rotated", 20)
    p = overlapping_pairs(a, b)
    sp = p.to_sparse()
    assert sp.shape == (30, 20)
    dense = np.zeros((30, 20))
    dense[p.first, p.second] = p.iou
    np.testing.assert_array_equal(sp.toarray(), dense)


def test_sparse_matrix_without_scipy_says_what_to_install(monkeypatch):
    import sys

    p = overlapping_pairs([[0, 0, 2, 2], [1, 0, 3, 2]])
    monkeypatch.setitem(sys.modules, "scipy", None)  # as if scipy were not installed
    with pytest.raises(ImportError, match=r"needs scipy.*pip install 'obbiou\[eval\]'"):
        p.to_sparse()


def test_mixed_layouts_in_2d_and_bev_footprint():
    from obbiou.boxes import footprint

    up = make_scene(np.random.default_rng(2), "clusters", "upright", 25)
    bev = overlapping_pairs(footprint(up))
    rot = overlapping_pairs(up[:, [0, 1, 3, 4, 6]], shape="rotated")
    np.testing.assert_array_equal(bev.first, rot.first)
    np.testing.assert_array_equal(bev.iou, rot.iou)
    with pytest.raises(ValueError, match="3D"):
        overlapping_pairs(up, footprint(up))


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"min_iou": 1.5}, r"min_iou: expected a number in \[0, 1\], got 1.5"),
        ({"min_iou": -0.1}, "min_iou"),
        ({"min_iou": float("nan")}, "min_iou"),
        ({"min_iou": "high"}, "min_iou"),
    ],
)
def test_bad_thresholds(kwargs, message):
    with pytest.raises(ValueError, match=message):
        overlapping_pairs([[0, 0, 1, 1]], **kwargs)


def test_bad_boxes_name_argument_and_row():
    with pytest.raises(ValueError, match=r"a\[1\]: negative width"):
        overlapping_pairs([[0, 0, 1, 1, 0], [0, 0, -1, 1, 0]])
    with pytest.raises(ValueError, match=r"b\[0\]: x_max"):
        overlapping_pairs([[0, 0, 1, 1]], [[2, 0, 1, 1]])


@pytest.mark.parametrize("serial_below", [0, 10**9])  # parallel and serial kernels
def test_large_scene_against_shapely_strtree(serial_below, monkeypatch):
    # a scene big enough to use several grid cells and size levels; reference: shapely
    # STRtree candidates + shapely intersection areas
    monkeypatch.setattr(obbiou.scene, "_SERIAL_BELOW", serial_below)
    rng = np.random.default_rng(11)
    n = 3000
    c = rng.uniform(0, 2000, (n, 2))
    wh = 10.0 ** rng.uniform(0.3, 2.3, (n, 2))
    a = np.column_stack([c, wh, rng.uniform(-np.pi, np.pi, n)])
    p = overlapping_pairs(a)
    g = shapely.polygons(corners(a))
    tree = shapely.STRtree(g)
    i, j = tree.query(g, predicate="intersects")
    keep = i < j
    i, j = i[keep], j[keep]
    inter = shapely.area(shapely.intersection(g[i], g[j]))
    iou = inter / (shapely.area(g[i]) + shapely.area(g[j]) - inter)
    ref = {(x, y): v for x, y, v in zip(i.tolist(), j.tolist(), iou.tolist(), strict=True)}
    got = {
        (x, y): v
        for x, y, v in zip(p.first.tolist(), p.second.tolist(), p.iou.tolist(), strict=True)
    }
    sure = {k for k, v in ref.items() if v > BAND}
    assert sure <= got.keys()
    # anything else found has an IoU within rounding of 0
    assert all(v <= BAND for k, v in got.items() if k not in sure)
    np.testing.assert_allclose([got[k] for k in sure], [ref[k] for k in sure], rtol=0, atol=1e-9)


def test_extreme_coordinates_and_sizes_do_not_hang():
    # extents at the limits validation admits (+-1e100, sizes down to 1e-100: see
    # obbiou.shapes.LIMIT and TINY) and sizes over 200 orders of magnitude
    a = np.array(
        [
            [0, 0, 1e100, 1e100, 0.0],
            [1e99, 0, 1e100, 1e100, 0.0],
            [0, 0, 1e-100, 1e-100, 0.0],
            [-1e100, 1e100, 1.0, 1.0, 0.3],
        ]
    )
    p = overlapping_pairs(a)
    dense = obbiou.iou(a, a)
    want = {(i, j) for i in range(4) for j in range(i + 1, 4) if dense[i, j] > 0}
    assert set(zip(p.first.tolist(), p.second.tolist(), strict=True)) == want


def test_parallel_and_serial_kernels_agree(monkeypatch):
    rng = np.random.default_rng(8)
    a = make_scene(rng, "clusters", "upright", 400)
    b = make_scene(rng, "mixed sizes", "upright", 300)
    results = []
    for serial_below in (0, 10**9):
        monkeypatch.setattr(obbiou.scene, "_SERIAL_BELOW", serial_below)
        results.append((overlapping_pairs(a, b, min_iou=0.1), overlapping_pairs(a)))
    for x, y in zip(results[0], results[1], strict=True):
        np.testing.assert_array_equal(x.first, y.first)
        np.testing.assert_array_equal(x.second, y.second)
        np.testing.assert_array_equal(x.iou, y.iou)


@pytest.mark.parametrize("serial", [False, True])
def test_chunks_that_outgrow_their_sampled_room_lose_nothing(serial):
    # Each chunk of rows sizes its candidate buffer from a sample of its rows; with no
    # margin over the estimate, the dense chunks overflow and must be walked again with
    # exact room.
    from obbiou._kernels import grid
    from obbiou.scene import _prepared, _vertices
    from obbiou.shapes import read_boxes

    rng = np.random.default_rng(5)
    a = make_scene(rng, "clusters", "rotated", 600)
    kind, pa, _ = _prepared(read_boxes(a), None)
    none = np.zeros(0, np.int64)
    v = _vertices(pa)
    rows = pa.rows.copy()  # the kernel permutes its rows in place
    first, second, iou = grid.scene_pairs(
        kind, rows, v, rows, v, True, none, none, 0.0, False, serial, 0.0
    )
    got = Pairs(first, second, iou, len(a), len(a))
    assert len(got) > 4 * 64  # more candidates than the rooms hold without margin
    # reference: shapely's dense IoU matrix, thresholded
    check_against_dense(got, shapely_iou_matrix(a, a, "rotated"), 0.0, self_pairs=True)
    want = overlapping_pairs(a)  # and the same as with room to spare
    np.testing.assert_array_equal(first, want.first)
    np.testing.assert_array_equal(second, want.second)
    np.testing.assert_array_equal(iou, want.iou)


@pytest.mark.parametrize("layout", LAYOUTS)
def test_inputs_are_left_unchanged(layout):
    # the scene kernels reorder their working copies in place; the caller's arrays (boxes,
    # scores, labels) must come back bit for bit as they went in
    rng = np.random.default_rng(21)
    a = np.ascontiguousarray(make_scene(rng, "clusters", layout, 300), dtype=np.float64)
    b = np.ascontiguousarray(make_scene(rng, "sparse", layout, 200), dtype=np.float64)
    scores, labels = rng.random(300), rng.integers(0, 3, 300)
    copies = [x.copy() for x in (a, b, scores, labels)]
    first = overlapping_pairs(a, shape=layout)
    overlapping_pairs(a, b, shape=layout, min_iou=0.2)
    obbiou.suppress(a, scores, shape=layout, labels=labels)
    obbiou.suppress(a, scores, shape=layout, decay="gaussian")
    for x, y in zip((a, b, scores, labels), copies, strict=True):
        np.testing.assert_array_equal(x, y)
    again = overlapping_pairs(a, shape=layout)  # and a second call sees the same scene
    np.testing.assert_array_equal(again.first, first.first)
    np.testing.assert_array_equal(again.iou, first.iou)


def test_bev_pairs_are_the_pairs_of_the_footprints():
    # bev=True is overlapping_pairs(footprint(...)) (the documented composition); and a
    # hand-worked case: a pallet on a rack above another has 3D IoU 0, BEV IoU 1
    rng = np.random.default_rng(12)
    up = make_scene(rng, "clusters", "upright", 300)
    got = overlapping_pairs(up, bev=True)
    want = overlapping_pairs(obbiou.boxes.footprint(up))
    np.testing.assert_array_equal(got.first, want.first)
    np.testing.assert_array_equal(got.iou, want.iou)
    stacked = [[5.0, 2.0, 0.5, 1.2, 0.8, 1.0, 0.3], [5.0, 2.0, 2.5, 1.2, 0.8, 1.0, 0.3]]
    assert len(overlapping_pairs(stacked)) == 0
    assert overlapping_pairs(stacked, bev=True).iou.tolist() == [1.0]
    with pytest.raises(obbiou.errors.InvalidInput, match="bev=True takes the footprints"):
        overlapping_pairs([[0, 0, 2, 1, 0.0]], bev=True)
