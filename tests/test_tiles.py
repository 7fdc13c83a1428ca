"""obbiou.tiles: grid, shift, crop and merge of the detections of overlapping tiles.

Outside references: shapely 2.x (union of the tiles, intersection areas for coverage, IoU
of merged boxes with their truths, the clipped part of a truth a tile sees), and
hand-worked cases written out beside each check.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
import shapely
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import obbiou
import obbiou.tiles
from obbiou.boxes import corners, envelope, fit_rotated
from obbiou.errors import InvalidInput
from obbiou.tiles import crop, grid, merge, seam_rows, shift
from tests.strategies import convex_polygons, rotated_boxes


def polygons(boxes, shape):
    if shape == "axis":
        b = np.asarray(boxes)
        return shapely.box(b[:, 0], b[:, 1], b[:, 2], b[:, 3])
    return shapely.polygons(corners(boxes, shape=shape))


def shapely_iou(a, b, shape="rotated"):
    pa, pb = polygons(a, shape), polygons(b, shape)
    inter = shapely.area(shapely.intersection(pa, pb))
    return inter / (shapely.area(pa) + shapely.area(pb) - inter)


# ------------------------------------------------------------------ grid


@pytest.mark.parametrize(
    "width, height, size, overlap",
    [
        (2500, 1800, 1024, 200),
        (1024, 1024, 1024, 0),
        (1848, 1024, 1024, 200),  # exactly two columns: no tile moved
        (3000, 1100, 512, 0),
        (1000, 700, 300, 299),
        (777.5, 640.25, 128.5, 16.25),  # non-integer sizes
    ],
)
def test_grid_covers_every_pixel(width, height, size, overlap):
    tiles = grid(width, height, size=size, overlap=overlap)
    # every tile exactly size x size, inside the image
    np.testing.assert_array_equal(tiles[:, 2] - tiles[:, 0], size)
    np.testing.assert_array_equal(tiles[:, 3] - tiles[:, 1], size)
    assert tiles[:, :2].min() == 0 and tiles[:, 2].max() == width and tiles[:, 3].max() == height
    # shapely: the union of the tiles is the whole image, nothing outside
    union = shapely.union_all(shapely.box(*tiles.T))
    image = shapely.box(0, 0, width, height)
    assert union.symmetric_difference(image).area == pytest.approx(0.0, abs=1e-9)
    # row-major from the top-left: by y_min, then x_min; starts advance by size - overlap
    # except the last of each axis, which ends on the image edge
    key = np.lexsort((tiles[:, 0], tiles[:, 1]))
    np.testing.assert_array_equal(key, np.arange(len(tiles)))
    xs, ys = np.unique(tiles[:, 0]), np.unique(tiles[:, 1])
    assert len(tiles) == len(xs) * len(ys)
    for starts in (xs, ys):
        steps = np.diff(starts)
        assert np.all(steps[:-1] == size - overlap) if len(steps) > 1 else True
        assert np.all(steps <= size - overlap) and np.all(steps > 0)  # overlap at least


@settings(max_examples=60, deadline=None)
@given(
    st.integers(1, 400),
    st.integers(0, 399),
    st.integers(0, 2000),
    st.integers(0, 2000),
)
def test_grid_covers_any_image(size, overlap, extra_w, extra_h):
    overlap = min(overlap, size - 1)
    # at most ~30 tile starts per axis: the shapely union of millions of 1-px tiles is slow
    extra_w, extra_h = (min(e, 30 * (size - overlap)) for e in (extra_w, extra_h))
    width, height = size + extra_w, size + extra_h
    tiles = grid(width, height, size=size, overlap=overlap)
    # shapely: the union of the tiles is the image
    union = shapely.union_all(shapely.box(*tiles.T))
    assert union.symmetric_difference(shapely.box(0, 0, width, height)).area == 0.0
    # no more tiles than needed: one fewer start per axis would leave a gap
    # (hand-worked: ceil((W - size) / (size - overlap)) + 1 starts per axis)
    stride = size - overlap
    nx = -(-(width - size) // stride) + 1
    ny = -(-(height - size) // stride) + 1
    assert tiles.shape == (nx * ny, 4)
    assert np.all(tiles[:, 2] - tiles[:, 0] == size) and np.all(tiles[:, 3] - tiles[:, 1] == size)


def test_grid_tile_count_of_the_benchmark_scene():
    # 20 000 px in 1024-px tiles advancing by 824: ceil((20000 - 1024) / 824) + 1 = 25 per
    # axis (hand-worked), 625 tiles.
    assert grid(20_000, 20_000, size=1024, overlap=200).shape == (625, 4)


@pytest.mark.parametrize(
    "kwargs, argument",
    [
        (dict(width=500, height=800, size=512, overlap=0), "size"),
        (dict(width=800, height=500, size=512, overlap=0), "size"),
        (dict(width=800, height=800, size=512, overlap=512), "overlap"),
        (dict(width=800, height=800, size=512, overlap=600), "overlap"),
        (dict(width=800, height=800, size=512, overlap=-1), "overlap"),
        (dict(width=800, height=800, size=0, overlap=0), "size"),
        (dict(width=800, height=800, size=float("nan"), overlap=0), "size"),
        (dict(width=float("inf"), height=800, size=100, overlap=0), "width"),
        (dict(width=800, height=-800, size=100, overlap=0), "height"),
        (dict(width=800, height=800, size=True, overlap=0), "size"),
        (dict(width=800, height=800, size="512", overlap=0), "size"),
    ],
)
def test_grid_errors(kwargs, argument):
    w, h = kwargs.pop("width"), kwargs.pop("height")
    with pytest.raises(InvalidInput) as err:
        grid(w, h, **kwargs)
    assert err.value.argument == argument


# ------------------------------------------------------------------ shift


def test_shift_every_layout_and_back():
    rng = np.random.default_rng(0)
    rot = np.column_stack(
        [rng.uniform(0, 100, (6, 2)), rng.uniform(1, 9, (6, 2)), rng.normal(size=6)]
    )
    dx, dy = rng.uniform(-50, 50, 6), rng.uniform(-50, 50, 6)
    for shape, boxes in (
        ("rotated", rot),
        ("axis", envelope(rot, shape="rotated")),
        ("polygon", corners(rot, shape="rotated")),
    ):
        moved = shift(boxes, dx, dy, shape=shape)
        # shapely: the moved polygon is the translated polygon
        want = polygons(boxes, shape)
        want = np.array(
            [shapely.affinity.translate(p, x, y) for p, x, y in zip(want, dx, dy, strict=True)]
        )
        got = polygons(moved, shape)
        assert np.all(shapely.area(shapely.symmetric_difference(got, want)) < 1e-9)
        back = shift(moved, -dx, -dy, shape=shape)
        np.testing.assert_allclose(back, boxes, rtol=0, atol=1e-12)
    # the angle is not moved; a scalar offset moves every box; one box stays one box
    assert shift(rot, 5, 5)[:, 4].tolist() == rot[:, 4].tolist()
    assert shift([1.0, 2.0, 3.0, 4.0], 10, 20).tolist() == [11.0, 22.0, 13.0, 24.0]
    assert shift(np.zeros((0, 4)), [], []).shape == (0, 4)


@pytest.mark.parametrize(
    "call, argument",
    [
        (lambda: shift([[0, 0, 0, 1, 1, 1, 0]], 1, 1), "boxes"),  # upright: 3D
        (lambda: shift([[0, 0, 1, 1]], [1, 2], 1), "dx"),
        (lambda: shift([[0, 0, 1, 1]], 1, float("nan")), "dy"),
        (lambda: shift([[0, 0, 1, 1]], "left", 1), "dx"),
    ],
)
def test_shift_errors(call, argument):
    with pytest.raises(InvalidInput) as err:
        call()
    assert err.value.argument == argument


# ------------------------------------------------------------------ crop


def _check_crop(truth, shape, tile, min_coverage):
    c = crop(truth, tile, min_coverage=min_coverage, shape=shape)
    poly = polygons(truth, shape)
    # shapely reference: exact intersection area with the tile over the truth's own area
    inter = shapely.area(shapely.intersection(poly, shapely.box(*tile)))
    area = shapely.area(poly)
    reach = np.flatnonzero(inter > 1e-9 * np.maximum(area, 1.0))
    unsure = np.flatnonzero((inter > 0) & (inter <= 1e-9 * np.maximum(area, 1.0)))
    assert set(reach) <= set(c.rows.tolist()) <= set(reach) | set(unsure)
    np.testing.assert_allclose(c.coverage, inter[c.rows] / area[c.rows], rtol=1e-9, atol=1e-12)
    np.testing.assert_array_equal(c.ignore, c.coverage < min_coverage)
    np.testing.assert_allclose(
        c.boxes, shift(np.asarray(truth)[c.rows], -tile[0], -tile[1], shape=shape), rtol=0, atol=0
    )
    return c


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(rotated_boxes(min_n=0, max_n=12), st.floats(-40, 40), st.floats(-40, 40), st.floats(0, 1))
def test_crop_coverage_against_shapely(truth, x0, y0, min_coverage):
    _check_crop(truth, "rotated", np.array([x0, y0, x0 + 60, y0 + 45]), min_coverage)


@settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(convex_polygons(min_n=1, max_n=6), st.floats(-40, 40), st.floats(-40, 40))
def test_crop_polygons_against_shapely(truth, x0, y0):
    _check_crop(truth, "polygon", np.array([x0, y0, x0 + 50, y0 + 50]), 0.6)


def test_crop_axis_hand_worked():
    # tile [10, 10, 20, 20]; truths: inside; half inside (x 5..15); touching the edge only
    # (x 20..25: intersection area 0, not reached); zero area inside (not reached).
    truth = [[12, 12, 14, 14], [5, 12, 15, 14], [20, 12, 25, 14], [15, 15, 15, 18]]
    c = crop(truth, [10, 10, 20, 20])
    assert c.rows.tolist() == [0, 1]
    assert c.coverage.tolist() == [1.0, 0.5]
    assert c.ignore.tolist() == [False, True]
    assert c.boxes.tolist() == [[2, 2, 4, 4], [-5, 2, 5, 4]]


@pytest.mark.parametrize(
    "call, argument",
    [
        (lambda: crop([[0, 0, 1, 1]], [[0, 0, 5, 5], [5, 5, 9, 9]]), "tile"),
        (lambda: crop([[0, 0, 1, 1]], [0, 0, 0, 5]), "tile"),
        (lambda: crop([[0, 0, 1, 1]], [0, 0, 5, 5], min_coverage=1.2), "min_coverage"),
        (lambda: crop([[0, 0, 0, 1, 1, 1, 0]], [0, 0, 5, 5]), "truth"),
    ],
)
def test_crop_errors(call, argument):
    with pytest.raises(InvalidInput) as err:
        call()
    assert err.value.argument == argument


# ------------------------------------------------------------------ the synthetic scene


SIZE, OVERLAP = 1024, 200


def scene(seed: int, large: bool):
    """Invented harbour mosaic 3000 x 2200 px: containers and small boats on a jittered
    lattice (no two truths overlap), plus (``large``) vessels longer than the overlap lying
    across seams and objects centred on the corners where four tiles meet."""
    rng = np.random.default_rng(seed)
    width, height = 3000.0, 2200.0
    tiles = grid(width, height, size=SIZE, overlap=OVERLAP)
    gx, gy = np.meshgrid(np.arange(60, width - 60, 130.0), np.arange(60, height - 60, 130.0))
    n = gx.size
    cx = gx.reshape(-1) + rng.uniform(-20, 20, n)
    cy = gy.reshape(-1) + rng.uniform(-20, 20, n)
    length = rng.uniform(15, 80, n)
    truth = np.column_stack(
        [cx, cy, length, length * rng.uniform(0.2, 0.6, n), rng.uniform(-np.pi, np.pi, n)]
    )
    if large:
        xs, ys = np.unique(tiles[:, 0]), np.unique(tiles[:, 1])
        extra = []
        for x, y in zip(xs[1:], (200.0, 500.0, 1600.0), strict=True):
            # a vessel 300-420 px long across each vertical seam
            extra.append([x + OVERLAP / 2, y, rng.uniform(300, 420), 40.0, 0.05])
        for y, x in zip(ys[1:], (400.0, 1200.0), strict=True):  # and each horizontal one
            extra.append([x, y + OVERLAP / 2, 36.0, rng.uniform(300, 420), -0.03])
        for x in xs[1:]:  # on the corners where four tiles meet
            for y in ys[1:]:
                extra.append([x + OVERLAP / 2, y + OVERLAP / 2, 60.0, 25.0, 0.7])
        extra = np.array(extra)
        assert len(obbiou.overlapping_pairs(extra)) == 0
        clear = np.ones(len(truth), bool)  # drop lattice objects that the extras touch
        pairs = obbiou.overlapping_pairs(truth, extra)
        clear[pairs.first] = False
        truth = np.concatenate([truth[clear], extra])
    assert len(obbiou.overlapping_pairs(truth)) == 0  # truths are apart
    return tiles, truth


def perfect_detections(tiles, truth, seed: int):
    """Each tile detects every truth that reaches into it, whole, in tile coordinates,
    with a score that differs from tile to tile."""
    rng = np.random.default_rng(seed)
    boxes, tile, owner = [], [], []
    for t, rect in enumerate(tiles):
        c = crop(truth, rect)
        boxes.append(c.boxes)
        tile.append(np.full(len(c), t))
        owner.append(c.rows)
    boxes, tile, owner = map(np.concatenate, (boxes, tile, owner))
    return boxes, rng.uniform(0.3, 1.0, len(boxes)), tile, owner


@pytest.mark.parametrize("fuse", [False, True])
def test_scene_perfect_detections_one_box_per_object(fuse):
    tiles, truth = scene(1, large=True)
    boxes, scores, tile, owner = perfect_detections(tiles, truth, 2)
    assert np.bincount(owner).max() == 4  # some objects are seen by four tiles
    seen_whole = np.zeros(len(truth), bool)
    for rect in tiles:
        c = crop(truth, rect)
        seen_whole[c.rows[c.coverage == 1.0]] = True
    assert not seen_whole.all()  # some objects (longer than the overlap) no tile sees whole
    m = merge(boxes, scores, tile, tiles, fuse=fuse)
    # exactly one box per object
    assert len(m) == len(truth)
    assert sorted(owner[m.rows].tolist()) == list(range(len(truth)))
    # shapely: each merged box matches its truth
    iou = shapely_iou(m.boxes, truth[owner[m.rows]])
    assert iou.min() >= 0.999
    # every dropped row was a copy of an object that another tile held away from its edges
    assert set(owner[m.at_seam]) <= set(range(len(truth)))


def visible_part(truth_box, rect):
    """The part of a truth inside a tile as a detector that sees only the tile would box
    it: the minimum-area rectangle of the clipped polygon (shapely clip, obbiou fit)."""
    part = shapely.Polygon(corners(truth_box, shape="rotated")).intersection(shapely.box(*rect))
    return fit_rotated(np.asarray(part.exterior.coords)[:-1])


def test_scene_cut_boxes_go_at_the_seams():
    # Objects small enough that some tile holds each away from its edges; tiles that cut
    # an object report only its visible part (a partial box), with a high score.
    tiles, truth = scene(3, large=False)
    rng = np.random.default_rng(4)
    boxes, scores, tile, owner, partial = [], [], [], [], []
    for t, rect in enumerate(tiles):
        c = crop(truth, rect)
        for row, cov in zip(c.rows, c.coverage, strict=True):
            whole = cov == 1.0
            box = truth[row] if whole else visible_part(truth[row], rect)
            boxes.append(shift(box, -rect[0], -rect[1]))
            scores.append(rng.uniform(0.3, 0.6) if whole else rng.uniform(0.7, 1.0))
            tile.append(t)
            owner.append(row)
            partial.append(not whole)
    boxes, scores, tile, owner, partial = map(np.array, (boxes, scores, tile, owner, partial))
    assert partial.sum() > 20
    image = shift(boxes, tiles[tile, 0], tiles[tile, 1])
    # suppression alone keeps partial boxes whose IoU with the whole is below max_iou
    alone = obbiou.suppress(image, scores, max_iou=0.5)
    assert len(alone) > len(truth)
    for fuse in (False, True):
        m = merge(boxes, scores, tile, tiles, fuse=fuse)
        assert len(m) == len(truth)
        assert sorted(owner[m.rows].tolist()) == list(range(len(truth)))
        assert not partial[m.rows].any()
        assert shapely_iou(m.boxes, truth[owner[m.rows]]).min() >= 0.999
        assert set(np.flatnonzero(partial)) <= set(m.at_seam.tolist())


# ------------------------------------------------------------------ the seam rule


def test_seam_rule_hand_worked():
    # Tiles [0, 100] and [80, 180] in x, one row; border 5: cores [-inf, 95] and [85, inf]
    # in x (outer edges unbounded), y unbounded (a single row: top and bottom are outer).
    tiles = np.array([[0.0, 0, 100, 100], [80, 0, 180, 100]])
    env = np.array(
        [
            [86.0, 10, 94, 20],  # tile 0, inside core 0 (x <= 95): kept
            [86.0, 10, 96, 20],  # tile 0, reaches x 96 > 95: at the seam; in core 1: dropped
            [84.0, 10, 96, 20],  # tile 0, at the seam, starts before core 1 (85): kept
            [85.0, 10, 96, 20],  # tile 0: exactly on core 1's edge counts as inside: dropped
            [86.0, -30, 94, 5],  # tile 1, inside core 1 (y is unbounded): kept
            [-20.0, 40, 10, 50],  # tile 0, beyond the outer edge: inside core 0: kept
        ]
    )
    tile = np.array([0, 0, 0, 0, 1, 0])
    assert seam_rows(env, tile, tiles, 5.0).tolist() == [1, 3]
    # border 0: only boxes beyond the inner edge are at the seam
    assert seam_rows(env, tile, tiles, 0.0).tolist() == []
    env2 = np.array([[90.0, 10, 101, 20]])  # tile 0, beyond its inner edge, inside tile 1
    assert seam_rows(env2, np.array([0]), tiles, 0.0).tolist() == [0]
    # a single tile has no inner edges
    assert seam_rows(env2, np.array([0]), tiles[:1], 5.0).tolist() == []


def test_merge_keeps_labels_apart_and_every_score():
    tiles = grid(1848, 1024, size=1024, overlap=200)
    box = [500.0, 500.0, 40.0, 12.0, 0.3]
    m = merge([box, box, box], [-1.0, 0.5, 0.2], [0, 0, 0], tiles, labels=["boat", "crane", "boat"])
    assert m.rows.tolist() == [1, 2]  # the negative score suppressed nothing above it
    assert m.labels.tolist() == ["crane", "boat"]
    assert m.scores.tolist() == [0.5, 0.2]


def test_merge_fused_members_are_input_rows():
    tiles = grid(1848, 1024, size=1024, overlap=200)
    # the same container seen from both tiles (x 900 in the image), slightly apart
    boxes = [[900.0, 500.0, 40.0, 12.0, 0.1], [77.0, 500.0, 40.0, 12.0, 0.1], [300, 300, 9, 9, 0]]
    m = merge(boxes, [0.6, 0.2, 0.5], [0, 1, 0], tiles, fuse=True)
    # by descending fused score: the lone box (0.5), then the pair (mean 0.4)
    assert [m.fused.members_of(k).tolist() for k in range(2)] == [[2], [0, 1]]
    assert m.rows.tolist() == [2, 0]  # the best member of each
    # hand-worked: cx = (0.6 * 900 + 0.2 * 901) / 0.8 = 900.25, score (0.6 + 0.2) / 2
    np.testing.assert_allclose(m.boxes[1], [900.25, 500, 40, 12, 0.1], rtol=0, atol=1e-12)
    assert m.scores.tolist() == pytest.approx([0.5, 0.4])


def test_merge_empty():
    tiles = grid(2048, 2048, size=1024, overlap=0)
    for fuse in (False, True):
        m = merge(np.zeros((0, 5)), [], [], tiles, fuse=fuse)
        assert len(m) == 0 and m.boxes.shape == (0, 5) and m.at_seam.shape == (0,)
    m = merge(np.zeros((0, 4)), [], [], tiles, labels=[])
    assert m.labels.shape == (0,)


@pytest.mark.parametrize(
    "call, argument",
    [
        (lambda t: merge([[0, 0, 1, 1]], [0.5], [4], t), "tile"),
        (lambda t: merge([[0, 0, 1, 1]], [0.5], [-1], t), "tile"),
        (lambda t: merge([[0, 0, 1, 1]], [0.5], [0.5], t), "tile"),
        (lambda t: merge([[0, 0, 1, 1]], [0.5], [0, 1], t), "tile"),
        (lambda t: merge([[0, 0, 1, 1]], [0.5], [0], [[0, 0, 0, 10]]), "tiles"),
        (lambda t: merge([[0, 0, 1, 1]], [0.5], [0], t, border=-1), "border"),
        (lambda t: merge([[0, 0, 1, 1]], [0.5], [0], t, max_iou=2), "max_iou"),
        (lambda t: merge([[0, 0, 1, 1]], [0.5], [0], t, labels=[1, 2]), "labels"),
        (lambda t: merge([[0, 0, 1, 1]], [0.0], [0], t, fuse=True), "scores"),
        (lambda t: merge([[0, 0, 0, 1, 1, 1, 0]], [0.5], [0], t), "boxes"),
        (lambda t: merge([[[0, 0], [1, 0], [0, 1]]], [0.5], [0], t, fuse=True), "boxes"),
    ],
)
def test_merge_errors(call, argument):
    tiles = grid(2048, 2048, size=1024, overlap=0)
    with pytest.raises(InvalidInput) as err:
        call(tiles)
    assert err.value.argument == argument


def test_merge_polygons_suppress():
    tiles = grid(1848, 1024, size=1024, overlap=200)
    sq = np.array([[0.0, 0], [10, 0], [10, 10], [0, 10]])
    boxes = np.stack([sq + [895, 500], sq + [71, 500]])  # one square from both tiles
    m = merge(boxes, [0.9, 0.8], [0, 1], tiles)
    assert len(m) == 1
    assert math.isclose(shapely.Polygon(m.boxes[0]).area, 100.0)


# ------------------------------------------------------------------ plain reference


def plain_merge(boxes, scores, tile, tiles, border, max_iou):
    """The documented rule written out plainly with shapely: cores, the seam rule by
    ``within`` on the enclosing boxes, then greedy suppression by shapely IoU."""
    image = boxes.copy()
    image[:, :2] += tiles[tile, :2]
    g = shapely.polygons(corners(image, shape="rotated"))
    lo, hi = tiles[:, :2].min(axis=0), tiles[:, 2:].max(axis=0)
    big = 1e12
    cores = []
    for x0, y0, x1, y1 in tiles:
        cores.append(
            shapely.box(
                x0 + border if x0 > lo[0] else -big,
                y0 + border if y0 > lo[1] else -big,
                x1 - border if x1 < hi[0] else big,
                y1 - border if y1 < hi[1] else big,
            )
        )
    dropped = []
    for i, poly in enumerate(g):
        env = shapely.box(*shapely.bounds(poly))
        if env.within(cores[tile[i]]):
            continue
        if any(env.within(c) for u, c in enumerate(cores) if u != tile[i]):
            dropped.append(i)
    alive = [i for i in np.argsort(-scores, kind="stable") if i not in set(dropped)]
    kept = []
    for i in alive:
        ok = True
        for k in kept:
            inter = g[i].intersection(g[k]).area
            if inter / (g[i].area + g[k].area - inter) > max_iou:
                ok = False
                break
        if ok:
            kept.append(i)
    return kept, dropped


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_merge_against_plain_reference(seed):
    # An invented 1500 x 1100 mosaic in 512-px tiles overlapping by 96: detections in
    # clusters (duplicates within and across tiles), some sticking out of their tile.
    rng = np.random.default_rng(seed)
    tiles = grid(1500, 1100, size=512, overlap=96)
    k = 120
    centre = rng.uniform(0, [1500, 1100], (k, 2))
    rows = []
    for c in centre:
        home = np.flatnonzero(
            (tiles[:, 0] <= c[0])
            & (c[0] <= tiles[:, 2])
            & (tiles[:, 1] <= c[1])
            & (c[1] <= tiles[:, 3])
        )
        for t in rng.choice(home, size=min(len(home), 1 + rng.integers(0, 3)), replace=False):
            for _ in range(1 + rng.integers(0, 2)):
                length = rng.uniform(10, 70)
                box = [*(c + rng.normal(0, 3, 2)), length, length * rng.uniform(0.2, 0.8)]
                rows.append([*box, rng.uniform(-np.pi, np.pi), t])
    rows = np.array(rows)
    boxes = shift(rows[:, :5], -tiles[rows[:, 5].astype(int), 0], -tiles[rows[:, 5].astype(int), 1])
    tile = rows[:, 5].astype(int)
    scores = rng.uniform(0.1, 1.0, len(rows))
    for border in (0.0, 8.0, 30.0):
        m = merge(boxes, scores, tile, tiles, border=border, max_iou=0.4)
        kept, dropped = plain_merge(boxes, scores, tile, tiles, border, 0.4)
        assert m.at_seam.tolist() == sorted(dropped)
        assert m.rows.tolist() == kept  # same boxes, same order (descending score)
        assert len(dropped) > 5 and len(kept) < len(boxes) - len(dropped)  # both steps act


def test_merge_warns_when_boxes_are_in_image_coordinates():
    tiles = grid(1848, 1024, size=1024, overlap=200)
    # a box of tile 1 given in image coordinates (x = 1500) instead of tile ones (x = 676)
    with pytest.warns(UserWarning, match=r"1 of 2 boxes lie wholly outside .*boxes\[1\]"):
        merge([[500.0, 500, 20, 8, 0], [1500.0, 500, 20, 8, 0]], [0.9, 0.8], [0, 1], tiles)


# ------------------------------------------------------------------ merge = seam rule + suppress


def seam_then_suppress(boxes, scores, tile, tiles, shape, labels=None, max_iou=0.5, border=None):
    """The composition merge documents: the seam rule (:func:`seam_rows`, checked against
    shapely above), then ``obbiou.suppress`` of the rest (checked against shapely in
    tests/test_scene.py). merge finds the copies by another road (the pairs above max_iou,
    then a greedy walk over them); the kept rows must be the same, in the same order."""
    dx, dy = tiles[tile, 0], tiles[tile, 1]
    image = shift(boxes, dx, dy, shape=shape)
    env = envelope(image, shape=shape)
    if border is None:
        border = float(np.minimum(tiles[:, 2] - tiles[:, 0], tiles[:, 3] - tiles[:, 1]).min()) / 64
    dropped = seam_rows(env, tile, tiles, border)
    rest = np.setdiff1d(np.arange(len(scores)), dropped)
    lab = None if labels is None else np.asarray(labels)[rest]
    k = obbiou.suppress(
        image[rest], scores[rest], shape=shape, max_iou=max_iou, labels=lab, min_score=-np.inf
    )
    return rest[k.indices], dropped


def clustered_detections(rng, tiles, k, shape):
    """Detections in clusters around k invented object centres: copies from the tiles that
    hold the centre and duplicates within a tile, in tile coordinates; scores with ties."""
    centre = rng.uniform(tiles[:, :2].min(axis=0), tiles[:, 2:].max(axis=0), (k, 2))
    rows, tile = [], []
    for c in centre:
        home = np.flatnonzero(
            (tiles[:, 0] <= c[0])
            & (c[0] <= tiles[:, 2])
            & (tiles[:, 1] <= c[1])
            & (c[1] <= tiles[:, 3])
        )
        length = rng.uniform(6, 60)
        for t in rng.choice(home, size=min(len(home), 1 + rng.integers(0, 4)), replace=False):
            for _ in range(1 + rng.integers(0, 3)):
                w = length * rng.uniform(0.9, 1.1)
                rows.append(
                    [*(c + rng.normal(0, 2, 2)), w, w * rng.uniform(0.2, 0.9), rng.normal(0.3, 0.2)]
                )
                tile.append(t)
    rows, tile = np.array(rows), np.array(tile)
    if shape == "axis":
        rows = envelope(rows, shape="rotated")
    elif shape == "polygon":
        rows = corners(rows, shape="rotated")
    boxes = shift(rows, -tiles[tile, 0], -tiles[tile, 1], shape=shape)
    scores = np.round(rng.uniform(0.1, 1.0, len(tile)), 2)  # two decimals: many ties
    return boxes, scores, tile


# merge finds the copies by the pairs above max_iou from this many boxes, else through
# obbiou.suppress: 0 forces the pairs road on the small scenes of these tests
ROADS = {"pairs": 0, "suppress": 10**12}


@pytest.mark.parametrize("road", sorted(ROADS))
@pytest.mark.parametrize("shape", ["rotated", "axis", "polygon"])
@pytest.mark.parametrize("seed", [0, 1])
def test_merge_equals_seam_rule_then_suppress(shape, seed, road, monkeypatch):
    monkeypatch.setattr(obbiou.tiles, "_PAIRS_FROM", ROADS[road])
    rng = np.random.default_rng(seed)
    tiles = grid(2600, 1900, size=640, overlap=120)
    boxes, scores, tile = clustered_detections(rng, tiles, 400, shape)
    labels = rng.choice(["vessel", "container", "crane"], len(tile))
    for lab, max_iou, border in ((None, 0.5, None), (labels, 0.3, 0.0), (labels, 0.0, 25.0)):
        m = merge(
            boxes, scores, tile, tiles, shape=shape, labels=lab, max_iou=max_iou, border=border
        )
        kept, dropped = seam_then_suppress(boxes, scores, tile, tiles, shape, lab, max_iou, border)
        assert m.at_seam.tolist() == dropped.tolist()
        assert m.rows.tolist() == kept.tolist()
        assert len(kept) < len(boxes) - len(dropped)  # suppression acted
        np.testing.assert_array_equal(m.scores, scores[kept])
        if lab is not None:
            np.testing.assert_array_equal(m.labels, labels[kept])


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(rotated_boxes(min_n=0, max_n=30), st.integers(0, 2**32 - 1), st.floats(0, 1))
def test_merge_equals_seam_rule_then_suppress_adversarial(boxes, seed, max_iou):
    # boxes from the shared strategy (nested, identical, tiny, zero-size ...), each handed
    # to a random tile of a 4 x 3 grid over the strategy's square, in that tile's frame
    rng = np.random.default_rng(seed)
    tiles = grid(100, 75, size=40, overlap=10)
    tile = rng.integers(0, len(tiles), len(boxes))
    local = shift(boxes, -tiles[tile, 0], -tiles[tile, 1], shape="rotated")
    scores = rng.choice([0.2, 0.5, 0.9], len(boxes))  # ties
    kept, dropped = seam_then_suppress(local, scores, tile, tiles, "rotated", None, max_iou)
    for road in ROADS.values():
        with warnings.catch_warnings(), pytest.MonkeyPatch.context() as mp:
            warnings.simplefilter("ignore", UserWarning)  # boxes far outside their tile
            mp.setattr(obbiou.tiles, "_PAIRS_FROM", road)
            m = merge(local, scores, tile, tiles, shape="rotated", max_iou=max_iou)
        assert m.at_seam.tolist() == dropped.tolist()
        assert m.rows.tolist() == kept.tolist()


# ------------------------------------------------------------------ the pairs merge walks


def pairs_by_verdict(boxes, shape, thr, labels=None, serial=True):
    """The pairs (i < j) with IoU > thr that merge's pairs road finds (the spatial order from
    the extents, the boxes prepared in it, pairs decided by cheap bounds where they can
    be), from the CSR neighbour list it walks."""
    from obbiou._kernels import grid as kgrid
    from obbiou._kernels import suppress as ksup
    from obbiou._kernels.codes import Kind
    from obbiou.measures import prepare
    from obbiou.shapes import Boxes

    data = np.asarray(boxes, dtype=np.float64)
    order, index = kgrid.index_extents(np.ascontiguousarray(envelope(data, shape=shape)))
    p = prepare(Boxes(np.ascontiguousarray(data[order]), shape, False))
    vertices = p.vertices if p.kind == "poly" else np.zeros((0, 0, 2))
    codes = np.zeros(0, np.int64) if labels is None else np.asarray(labels, np.int64)[order]
    kind = int(Kind[p.kind.upper()])
    scene = kgrid.self_scene(kind, p.rows, vertices, order, codes, thr, False, serial)
    ptr, nbr = ksup.exceeding(scene, index, serial)
    return {(i, int(j)) for i in range(len(data)) for j in nbr[ptr[i] : ptr[i + 1]] if i < j}


def exact_pairs(boxes, shape, thr, labels=None):
    """The pairs (i < j) with exact IoU > thr (obbiou.overlapping_pairs, checked against
    shapely in tests/test_scene.py), of the same label when labels are given."""
    p = obbiou.overlapping_pairs(boxes, shape=shape, min_iou=thr)
    same = np.ones(len(p), bool) if labels is None else labels[p.first] == labels[p.second]
    return set(zip(p.first[same].tolist(), p.second[same].tolist(), strict=True))


def test_pairs_by_verdict_at_exact_thresholds():
    # Hand-made rotated boxes (angle 0, so their areas are exact in floating point) whose
    # IoU is a simple fraction, computed with fractions.Fraction from the intervals:
    # 3 x 1 boxes 1 apart: 2 / 4 = 1/2; 5 x 1 boxes 3 apart: 2 / 8 = 1/4; 7 x 1 boxes 1
    # apart: 6 / 8 = 3/4; a 2 x 2 box inside a 4 x 4 box: 4 / 16 = 1/4; identical boxes: 1;
    # boxes sharing an edge only: 0. Each group sits far from the others.
    from fractions import Fraction

    groups = [  # (x_min, width) pairs along x, height 1 (last: heights of their own)
        [(0, 3), (1, 3)],
        [(100, 5), (103, 5)],
        [(200, 7), (201, 7)],
        [(300, 2), (302, 2)],
    ]
    boxes, spans = [], []
    for k, group in enumerate(groups):
        for x0, w in group:
            boxes.append([x0 + w / 2, 0.5 + 10 * k, w, 1.0, 0.0])
            spans.append((Fraction(x0), Fraction(x0 + w), Fraction(10 * k), Fraction(10 * k + 1)))
    for box in (
        [500.0, 500.0, 4.0, 4.0, 0.0],
        [500.0, 500.0, 2.0, 2.0, 0.0],
        [500.0, 500.0, 2.0, 2.0, 0.0],
    ):
        boxes.append(box)
        cx, cy, w, h = (Fraction(v) for v in box[:4])
        spans.append((cx - w / 2, cx + w / 2, cy - h / 2, cy + h / 2))

    def rational_iou(a, b):
        ix = max(min(a[1], b[1]) - max(a[0], b[0]), 0)
        iy = max(min(a[3], b[3]) - max(a[2], b[2]), 0)
        inter = ix * iy
        union = (a[1] - a[0]) * (a[3] - a[2]) + (b[1] - b[0]) * (b[3] - b[2]) - inter
        return inter / union

    n = len(boxes)
    ious = {(i, j): rational_iou(spans[i], spans[j]) for i in range(n) for j in range(i + 1, n)}
    assert ious[(0, 1)] == Fraction(1, 2) and ious[(2, 3)] == Fraction(1, 4)
    assert ious[(4, 5)] == Fraction(3, 4) and ious[(6, 7)] == 0  # shared edge
    assert ious[(8, 9)] == Fraction(1, 4) and ious[(9, 10)] == 1
    for thr in (0.0, 0.25, 0.5, 0.75, 1.0):
        for t in (thr, math.nextafter(thr, -1.0), math.nextafter(thr, 2.0)):
            if not 0.0 <= t <= 1.0:
                continue
            want = {pair for pair, v in ious.items() if v > Fraction(t)}  # exact rationals
            assert pairs_by_verdict(boxes, "rotated", t) == want, t
            assert exact_pairs(boxes, "rotated", t) == want, t


@pytest.mark.parametrize("serial", [True, False])
@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(rotated_boxes(min_n=0, max_n=40), st.floats(0, 1), st.integers(0, 2**32 - 1))
def test_pairs_by_verdict_equal_exact_pairs(serial, boxes, thr, seed):
    # the shared adversarial boxes (identical, nested, near-parallel, tiny, huge, far from
    # the origin); with labels or without; with buffers too small, so that every chunk
    # that has a candidate is walked again with room for all of them
    from obbiou._kernels import suppress as ksup

    rng = np.random.default_rng(seed)
    labels = rng.integers(0, 2, len(boxes)) if seed % 2 else None
    with pytest.MonkeyPatch.context() as mp:
        for room in ((4, 64), (0, 0)):
            mp.setattr(ksup, "PAIRS_ROOM", room)
            got = pairs_by_verdict(boxes, "rotated", thr, labels, serial)
            assert got == exact_pairs(boxes, "rotated", thr, labels)


@settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(convex_polygons(min_n=0, max_n=20), st.floats(0, 1))
def test_pairs_by_verdict_equal_exact_pairs_polygons(polys, thr):
    assert pairs_by_verdict(polys, "polygon", thr) == exact_pairs(polys, "polygon", thr)
