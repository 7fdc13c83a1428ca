"""The invented demo scenarios and the simulated detector (obbiou.demo.scenarios).

Geometry is checked against shapely (polygon areas and intersections), never against the
project's own kernels. The data is invented; these tests check that it is laid out as
documented and that the simulated detector follows its stated error model.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest
import shapely

from obbiou.boxes import corners, footprint
from obbiou.demo.scenarios import (
    DETECTORS,
    HARBOUR_DETECTOR_TILE,
    HARBOUR_METRES_PER_PIXEL,
    HARBOUR_OVERLAP,
    WAREHOUSE_IGNORE_RANGE,
    WAREHOUSE_MAX_RANGE,
    detect_in_tiles,
    detector_tiles,
    harbour_survey,
    simulate_detector,
    visible_box,
    warehouse_lidar,
)
from obbiou.shapes import check


@pytest.fixture(scope="module")
def harbour():
    return harbour_survey(frames=3, seed=11)


@pytest.fixture(scope="module")
def warehouse():
    return warehouse_lidar(frames=6, seed=11)


def _polygons(table, shape):
    """shapely polygons of the boxes (footprints for upright boxes)."""
    cols = ["cx", "cy", "width", "height", "angle"]
    if shape == "upright":
        boxes = footprint(table[["cx", "cy", "cz", "length", "width", "height", "yaw"]].to_numpy())
    else:
        boxes = table[cols].to_numpy()
    return shapely.polygons(corners(boxes, shape="rotated"))


def _shapely_iou(a, b):
    """IoU of row i of a with row i of b, by shapely (outside reference)."""
    inter = shapely.area(shapely.intersection(a, b))
    return inter / (shapely.area(a) + shapely.area(b) - inter)


def test_seeded_and_varied(harbour, warehouse):
    assert harbour_survey(frames=3, seed=11).truth.equals(harbour.truth)
    assert warehouse_lidar(frames=6, seed=11).truth.equals(warehouse.truth)
    assert not harbour_survey(frames=3, seed=12).truth.equals(harbour.truth)
    a = simulate_detector(warehouse, "baseline", seed=5)
    assert a.equals(simulate_detector(warehouse, "baseline", seed=5))
    assert not a.equals(simulate_detector(warehouse, "baseline", seed=6))


def test_tables_are_valid_boxes_with_documented_columns(harbour, warehouse):
    for s in (harbour, warehouse):
        cols = list(s.box_columns)
        assert list(s.truth.columns) == ["frame", "label", *cols, "ignore"]
        check(s.truth[cols].to_numpy(), s.shape)  # raises on NaN, negative sizes
        assert set(s.truth.label) == set(s.labels)
        assert s.truth.ignore.dtype == bool and 0 < s.truth.ignore.sum() < len(s.truth) / 4
        for version in DETECTORS:
            d = simulate_detector(s, version, seed=1)
            assert list(d.columns) == ["frame", "label", "score", *cols]
            check(d[cols].to_numpy(), s.shape)
            assert d.score.between(0, 1).all()
            assert set(d.frame) <= set(s.frames)


def test_harbour_sizes_and_alignment(harbour):
    t = harbour.truth
    m = HARBOUR_METRES_PER_PIXEL
    c = t[t.label == "container"]
    # ISO containers: 6.06 m or 12.19 m long, 2.44 m wide (common knowledge, from memory).
    lengths = c.width * m
    assert (np.minimum(abs(lengths - 6.06), abs(lengths - 12.19)) < 0.15).all()
    assert (abs(c.height * m - 2.44) < 0.1).all()
    for frame, (_, theta) in harbour.layout["quay"].items():
        rows = t[t.frame == frame]

        def off_quay(angle, rows=rows, theta=theta):
            d = (rows.loc[angle.index, "angle"] - theta + np.pi / 2) % np.pi - np.pi / 2
            return np.abs(d)

        cont = rows[rows.label == "container"].angle
        assert (off_quay(cont) < 0.03).all()  # containers in rows along the quay
        crane = rows[rows.label == "crane"].angle
        assert (np.abs(off_quay(crane) - np.pi / 2) < 0.05).all()  # cranes across it
    v = t[t.label == "vessel"]
    assert (v.width * m).between(20, 160).all() and (v.width >= v.height).all()


def test_harbour_containers_do_not_overlap(harbour):
    # Stacked rows seen from above: neighbours touch at most (shapely intersection area).
    t = harbour.truth
    for frame in harbour.frames:
        c = t[(t.frame == frame) & (t.label == "container")]
        polys = _polygons(c, "rotated")
        tree = shapely.STRtree(polys)
        i, j = tree.query(polys, predicate="intersects")
        keep = i < j
        inter = shapely.area(shapely.intersection(polys[i[keep]], polys[j[keep]]))
        assert inter.max(initial=0.0) < 0.02 * shapely.area(polys).min()


def test_harbour_ignore_marks_cut_objects(harbour):
    # An object is ignore when under 60 % of it lies in the 2048 px tile (shapely areas).
    t = harbour.truth
    tile = shapely.box(0, 0, 2048, 2048)
    polys = _polygons(t, "rotated")
    inside = shapely.area(shapely.intersection(polys, tile)) / shapely.area(polys)
    assert (inside[~t.ignore.to_numpy()] > 0.5).all()  # grid estimate: allow some slack
    assert (inside[t.ignore.to_numpy()] < 0.7).all()
    assert (inside > 0.15).all()


def test_warehouse_layout(warehouse):
    t = warehouse.truth
    r = np.hypot(t.cx, t.cy)
    assert (r <= WAREHOUSE_MAX_RANGE).all()
    np.testing.assert_array_equal(t.ignore.to_numpy(), (r > WAREHOUSE_IGNORE_RANGE).to_numpy())
    p = t[t.label == "pallet"]
    bottom = p.cz - p.height / 2
    # Pallets stand on the floor or on a beam level (0, 1.9, 3.8 m), 2 cm above it.
    assert (np.min(np.abs(bottom.to_numpy()[:, None] - [0.0, 1.9, 3.8]), axis=1) < 0.03).all()
    assert np.allclose(p.length, 1.2) and np.allclose(p.width, 0.8)  # EUR pallet, from memory
    people = t[t.label == "person"]
    assert people.height.between(1.55, 1.95).all() and np.allclose(people.cz, people.height / 2)
    assert (t.label == "forklift").any() and len(people) > 0


def test_perfect_detector_reproduces_truth(harbour, warehouse):
    perfect = dataclasses.replace(
        DETECTORS["baseline"],
        name="perfect",
        miss=0,
        position=0,
        size=0,
        angle=0,
        flip=0,
        duplicate=0,
        false_alarms=0,
        confusion=0,
    )
    for s in (harbour, warehouse):
        d = simulate_detector(s, perfect, seed=0)
        assert len(d) == len(s.truth)
        iou = _shapely_iou(_polygons(d, s.shape), _polygons(s.truth, s.shape))
        np.testing.assert_allclose(iou, 1.0, atol=1e-9)  # shapely areas, outside reference
        assert (d.label.to_numpy() == s.truth.label.to_numpy()).all()


def test_error_model_counts(warehouse):
    # Duplicates and false alarms come in the stated numbers (binomial / Poisson bounds).
    s = warehouse
    base = dataclasses.replace(
        DETECTORS["baseline"],
        name="counting",
        miss=0,
        duplicate=1.0,
        false_alarms=0,
    )
    assert len(simulate_detector(s, base, seed=0)) == 2 * len(s.truth)
    lam = 30.0
    fa = dataclasses.replace(base, duplicate=0.0, false_alarms=lam)
    extra = len(simulate_detector(s, fa, seed=0)) - len(s.truth)
    n = len(s.frames)
    assert abs(extra - lam * n) < 5 * np.sqrt(lam * n)
    missing = dataclasses.replace(base, duplicate=0.0, miss=0.2)
    found = len(simulate_detector(s, missing, seed=0))
    r = np.hypot(s.truth.cx, s.truth.cy).to_numpy()
    d = np.clip(r / WAREHOUSE_MAX_RANGE + 0.2 * (s.truth.label == "person").to_numpy(), 0, 1)
    expected = float(np.sum(1 - 0.2 * (1 + 2 * d)))
    assert abs(found - expected) < 5 * np.sqrt(len(s.truth) * 0.25)


def test_improved_detector_is_better_and_scores_track_quality(harbour):
    # Quality by shapely IoU of each detection with its source truth (same order when
    # nothing is missed, duplicated or added).
    ious = {}
    for version in ("baseline", "improved"):
        model = dataclasses.replace(
            DETECTORS[version],
            miss=0,
            duplicate=0,
            false_alarms=0,
            confusion=0,
            flip=0,
        )
        d = simulate_detector(harbour, model, seed=3)
        iou = _shapely_iou(_polygons(d, "rotated"), _polygons(harbour.truth, "rotated"))
        ious[version] = iou
        rho = np.corrcoef(np.argsort(np.argsort(iou)), np.argsort(np.argsort(d.score)))[0, 1]
        assert rho > 0.3, (version, rho)  # Spearman rank correlation of score and quality
    assert ious["improved"].mean() > ious["baseline"].mean() + 0.03


def test_warehouse_returns_fall_on_the_objects():
    # invented returns: seeded; near objects hold many, far ones few (density ~ 1/range^2);
    # counted with obbiou.points against the truth boxes themselves
    from obbiou.demo.scenarios import warehouse_lidar, warehouse_returns
    from obbiou.points import count_in_boxes

    s = warehouse_lidar(frames=3, seed=2)
    pts = warehouse_returns(s, seed=2)
    assert pts.equals(warehouse_returns(s, seed=2))
    t = s.truth
    near, far = [], []
    for frame in s.frames:
        rows = t[t.frame == frame]
        p = pts[pts.frame == frame][["x", "y", "z"]].to_numpy()
        c = count_in_boxes(p, rows[list(s.box_columns)].to_numpy(), shape="upright")
        r = np.hypot(rows.cx, rows.cy).to_numpy()
        near += c[r < 8].tolist()
        far += c[r > 20].tolist()
    assert np.median(near) >= 20 and np.median(far) <= 10


# ------------------------------------------------------------------ the detector on tiles


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_visible_box_against_shapely(seed):
    # shapely: the part of each box inside the tile (intersection), turned into the box's
    # own frame, has the extent of the visible box; a box inside comes back as it was.
    import shapely.affinity

    rng = np.random.default_rng(seed)
    n = 200
    boxes = np.column_stack(
        [
            rng.uniform(-50, 350, (n, 2)),
            rng.uniform(5, 120, n),
            rng.uniform(5, 60, n),
            rng.uniform(-np.pi, np.pi, n),
        ]
    )
    tile = (0.0, 0.0, 300.0, 300.0)
    part = visible_box(boxes, tile)
    polys = shapely.polygons(corners(boxes, shape="rotated"))
    clipped = shapely.intersection(polys, shapely.box(*tile))
    for b, p, clip in zip(boxes, part, clipped, strict=True):
        if clip.area == 0:
            continue
        np.testing.assert_allclose(p[4], b[4])  # the object's angle
        turned = shapely.affinity.rotate(clip, -b[4], origin=(b[0], b[1]), use_radians=True)
        x0, y0, x1, y1 = turned.bounds
        c, s = np.cos(b[4]), np.sin(b[4])
        u = c * (p[0] - b[0]) + s * (p[1] - b[1])
        v = -s * (p[0] - b[0]) + c * (p[1] - b[1])
        np.testing.assert_allclose(
            [u - p[2] / 2, v - p[3] / 2, u + p[2] / 2, v + p[3] / 2],
            [x0 - b[0], y0 - b[1], x1 - b[0], y1 - b[1]],
            atol=1e-7,
        )
    inside = shapely.within(polys, shapely.box(*tile))
    assert inside.sum() > 50 and (~inside).sum() > 50
    np.testing.assert_allclose(part[inside], boxes[inside], atol=1e-9)


def test_detect_in_tiles_partial_boxes_and_copies():
    # A perfect detector on 2 x 2 tiles of each mosaic: every truth comes back once from
    # each tile that sees some of it, whole (shapely IoU 1 with the truth moved into the
    # tile) where the tile holds it whole, as its visible part where the tile cuts it.
    s = harbour_survey(frames=2, seed=4)
    perfect = dataclasses.replace(
        DETECTORS["improved"],
        name="perfect",
        miss=0,
        position=0,
        size=0,
        angle=0,
        flip=0,
        duplicate=0,
        false_alarms=0,
        confusion=0,
    )
    tiles = detector_tiles(s, HARBOUR_DETECTOR_TILE, HARBOUR_OVERLAP)
    assert tiles.tolist() == [
        [0, 0, 1152, 1152],
        [896, 0, 2048, 1152],
        [0, 896, 1152, 2048],
        [896, 896, 2048, 2048],
    ]  # hand-worked: 1152 - 256 = 896, and 896 + 1152 = 2048
    d = detect_in_tiles(s, perfect, seed=0)
    assert list(d.columns) == ["frame", "tile", "label", "score", *s.box_columns]
    check(d[list(s.box_columns)].to_numpy(), "rotated")
    # back in the mosaic, each detection's shapely IoU with its nearest truth of the frame
    image = d[list(s.box_columns)].to_numpy().copy()
    image[:, :2] += tiles[d.tile.to_numpy(), :2]
    whole = cut = 0
    owner, tiles_of = [], []
    for frame in s.frames:
        mine = (d.frame == frame).to_numpy()
        t = s.truth[s.truth.frame == frame]
        tp = _polygons(t, "rotated")
        dp = shapely.polygons(corners(image[mine], shape="rotated"))
        for k, poly in zip(np.flatnonzero(mine), dp, strict=True):
            inter = shapely.area(shapely.intersection(poly, tp))
            j = int(np.argmax(inter))
            owner.append(t.index[j])
            tiles_of.append((t.index[j], int(d.tile.iloc[k])))
            rect = shapely.box(*tiles[d.tile.iloc[k]])
            seen = shapely.intersection(tp[j], rect).area / tp[j].area
            iou = inter[j] / (poly.area + tp[j].area - inter[j])
            if seen > 1 - 1e-9:
                assert iou > 1 - 1e-9
                whole += 1
            else:  # boxes the visible part, lies within the truth, and is smaller
                part = shapely.intersection(tp[j], rect)
                assert part.difference(poly).area < 1e-6 * part.area
                assert poly.difference(tp[j]).area < 1e-6 * poly.area
                assert poly.area <= tp[j].area * (1 + 1e-9)  # a cut corner may leave it whole
                cut += 1
    assert whole > 100 and cut > 10
    # objects in the overlaps come back from two or four tiles, once from each
    copies = np.bincount(owner)
    assert copies.max() == 4 and (copies >= 2).sum() > 20 and (copies == 0).sum() == 0
    assert sorted(tiles_of) == sorted(set(tiles_of))


def test_detect_in_tiles_is_seeded_and_in_tile_coordinates():
    s = harbour_survey(frames=2, seed=5)
    a = detect_in_tiles(s, "baseline", seed=1)
    assert a.equals(detect_in_tiles(s, "baseline", seed=1))
    assert not a.equals(detect_in_tiles(s, "baseline", seed=2))
    assert set(a.frame) <= set(s.frames) and set(a.tile) <= {0, 1, 2, 3}
    # centres lie near their tile (noise may push a box a little past its edge)
    assert a.cx.between(-100, HARBOUR_DETECTOR_TILE + 100).all()
    assert a.cy.between(-100, HARBOUR_DETECTOR_TILE + 100).all()
    with pytest.raises(ValueError, match="rotated"):
        detect_in_tiles(warehouse_lidar(frames=1), "baseline")
