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
    HARBOUR_METRES_PER_PIXEL,
    WAREHOUSE_IGNORE_RANGE,
    WAREHOUSE_MAX_RANGE,
    harbour_survey,
    simulate_detector,
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
