"""Tiled scene overlap on a Dask cluster equals the in-process ``overlapping_pairs``.

The cluster is a ``LocalCluster`` of 2 worker processes on loopback, started and stopped by
the session fixture ``client`` of ``tests/conftest.py`` (shared with the evaluation tests).
All data is generated here (synthetic scenes, labelled as such), seeded.
"""

from __future__ import annotations

import time

import numpy as np
import pytest

pytest.importorskip("distributed")
pd = pytest.importorskip("pandas")
dd = pytest.importorskip("dask.dataframe")

import obbiou.boxes  # noqa: E402
from obbiou.distributed import overlapping_pairs_distributed  # noqa: E402
from obbiou.scene import overlapping_pairs  # noqa: E402

COLUMNS = ["cx", "cy", "width", "height", "angle"]


# Another local cluster on this machine may hold the default HTTP port: not a problem.
pytestmark = pytest.mark.filterwarnings("ignore:Port .* is already in use")


def synthetic_scene(n: int, seed: int, *, offset: float = 0.0) -> np.ndarray:
    """Synthetic (invented) rotated boxes: clusters of small boxes plus a few long ones.

    The long ones cross many tiles, so the halo (copies into neighbouring tiles) is used.
    """
    rng = np.random.default_rng(seed)
    centres = rng.uniform(0, 400, (12, 2))
    around = centres[rng.integers(0, len(centres), n)] + rng.normal(0, 15, (n, 2))
    sizes = rng.uniform(0.5, 12, (n, 2))
    long = rng.random(n) < 0.03
    sizes[long, 0] = rng.uniform(80, 250, long.sum())
    angles = rng.uniform(-np.pi, np.pi, n)
    boxes = np.c_[around + offset, sizes, angles]
    boxes[rng.random(n) < 0.02, 2] = 0.0  # zero-size boxes: valid, overlap nothing
    dup = rng.choice(n, n // 20, replace=False)
    boxes[dup[1:]] = boxes[dup[:-1]]  # identical boxes
    return boxes


def assert_same_pairs(got, want) -> None:
    assert got.first.dtype == np.int64 and got.second.dtype == np.int64
    np.testing.assert_array_equal(got.first, want.first)
    np.testing.assert_array_equal(got.second, want.second)
    np.testing.assert_array_equal(got.iou, want.iou)  # equal, not approximately equal


def test_tiles_equal_in_process_on_dask_dataframe(client):
    boxes = synthetic_scene(1500, seed=1)
    want = overlapping_pairs(boxes)
    assert len(want.first) > 500  # the scene has plenty of pairs to get wrong
    table = dd.from_pandas(pd.DataFrame(boxes, columns=COLUMNS), npartitions=5)
    for tiles in [None, 1, (6, 4), (10, 9)]:
        got = overlapping_pairs_distributed(table, client=client, tiles=tiles, min_iou=0.0)
        assert_same_pairs(got, want)


def test_min_iou_and_two_sets_far_from_origin(client):
    # Map-metre coordinates (x ~ 500 000): tiling must not lose or duplicate any pair.
    a = synthetic_scene(700, seed=2, offset=5e5)
    b = synthetic_scene(500, seed=3, offset=5e5)
    for min_iou in (0.0, 0.3):
        want = overlapping_pairs(a, b, min_iou=min_iou)
        got = overlapping_pairs_distributed(a, b, client=client, tiles=(5, 7), min_iou=min_iou)
        assert_same_pairs(got, want)


def test_parquet_dataset_with_empty_partition(client, tmp_path):
    boxes = synthetic_scene(900, seed=4)
    folder = tmp_path / "scene"
    folder.mkdir()
    cuts = [0, 300, 300, 650, 900]  # the second file is empty
    for k, (lo, hi) in enumerate(zip(cuts[:-1], cuts[1:], strict=True)):
        frame = pd.DataFrame(boxes[lo:hi], columns=COLUMNS)
        frame["tag"] = "synthetic"  # extra columns are carried along and ignored
        frame.to_parquet(folder / f"part-{k:02d}.parquet")
    want = overlapping_pairs(boxes)
    got = overlapping_pairs_distributed(str(folder), client=client, tiles=(4, 4))
    assert_same_pairs(got, want)


def test_upright_boxes_tiled_by_footprint(client):
    rng = np.random.default_rng(5)
    n = 600
    ground = synthetic_scene(n, seed=5)
    # Synthetic (invented) upright boxes: the 2D scene lifted to random z-intervals, so
    # some footprints overlap while the boxes do not (disjoint in z).
    boxes = np.c_[
        ground[:, :2], rng.uniform(0, 3, n), ground[:, 2:4], rng.uniform(0.5, 2, n), ground[:, 4]
    ]
    want = overlapping_pairs(boxes, shape="upright")
    got = overlapping_pairs_distributed(boxes, client=client, tiles=(5, 5))
    assert_same_pairs(got, want)


def test_small_scene_against_shapely(client):
    # Outside reference: shapely 2.x polygon intersection areas, all pairs by brute force.
    shapely = pytest.importorskip("shapely")
    boxes = synthetic_scene(120, seed=6)
    got = overlapping_pairs_distributed(boxes, client=client, tiles=(3, 3))
    polys = shapely.polygons(obbiou.boxes.corners(boxes))
    expected = {}
    for i in range(len(boxes)):
        for j in range(i + 1, len(boxes)):
            inter = polys[i].intersection(polys[j]).area
            union = polys[i].area + polys[j].area - inter
            if inter > 1e-9 * union:
                expected[(i, j)] = inter / union
    found = dict(
        zip(
            zip(got.first.tolist(), got.second.tolist(), strict=True), got.iou.tolist(), strict=True
        )
    )
    assert set(expected) <= set(found)
    for key, value in found.items():
        assert value == pytest.approx(expected.get(key, 0.0), abs=1e-9)


def test_empty_and_single_box(client):
    none = overlapping_pairs_distributed(np.zeros((0, 5)), client=client)
    assert len(none.first) == len(none.second) == len(none.iou) == 0
    one = overlapping_pairs_distributed(np.array([[1.0, 2.0, 3.0, 4.0, 0.5]]), client=client)
    assert len(one.first) == 0


def test_bad_partition_is_named_quickly(client):
    frame = pd.DataFrame(synthetic_scene(400, seed=7), columns=COLUMNS)
    frame.loc[317, "height"] = -2.0
    table = dd.from_pandas(frame, npartitions=4)  # rows 300..399 are partition 3
    start = time.monotonic()
    with pytest.raises(ValueError, match=r"a partition 3 of 4 .*row\[17\]: negative height"):
        overlapping_pairs_distributed(table, client=client, timeout=60)
    assert time.monotonic() - start < 60


def test_polygon_table_by_the_evaluation_column_names(client):
    # Quadrilaterals as 4-vertex polygons in the columns px0 py0 ... py3 (docs/design.md §6).
    quads = obbiou.boxes.corners(synthetic_scene(500, seed=8))
    want = overlapping_pairs(quads, shape="polygon")
    frame = pd.DataFrame(
        quads.reshape(len(quads), 8), columns=[f"p{a}{k}" for k in range(4) for a in "xy"]
    )
    got = overlapping_pairs_distributed(
        dd.from_pandas(frame, npartitions=3), client=client, tiles=(4, 3)
    )
    assert_same_pairs(got, want)
