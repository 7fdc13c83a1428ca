"""Distributed evaluation on a Dask cluster gives the same numbers as in-process evaluation.

Equal, not approximately equal: the whole result (``to_dict``: AP, counts, breakdowns,
buckets), the match records, the curves and the bootstrap intervals are compared exactly.
The cluster is a ``LocalCluster`` of 2 worker processes on loopback, started and stopped by
the session fixture ``client`` of ``tests/conftest.py``. The data is synthetic (invented
frames and a simulated detector), seeded, with frames split across partitions, empty
partitions, ignore truths, duplicate detections and score ties across
frames (so the tie-break order is tested too).
"""

from __future__ import annotations

import json
import time
from dataclasses import fields

import numpy as np
import pytest

pytest.importorskip("distributed")
pd = pytest.importorskip("pandas")
dd = pytest.importorskip("dask.dataframe")
import obbiou.evaluation as evaluation  # noqa: E402  (fails, not skips, if it breaks)
from obbiou.distributed import TaskFailed, evaluate_distributed  # noqa: E402

BOX = ["cx", "cy", "width", "height", "angle"]


# Another local cluster on this machine may hold the default HTTP port: not a problem.
pytestmark = pytest.mark.filterwarnings("ignore:Port .* is already in use")


def synthetic_tables(frames: int, seed: int) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Synthetic (invented) truth and simulated detections, rows shuffled across frames."""
    rng = np.random.default_rng(seed)
    labels = np.array(["vessel", "container", "crane"])
    truth_rows, det_rows = [], []
    for f in range(frames):
        n = int(rng.integers(0, 8))
        centre = rng.uniform(0, 200, (n, 2))
        size = rng.uniform(4, 30, (n, 2))
        angle = rng.uniform(-np.pi, np.pi, n)
        lab = labels[rng.integers(0, len(labels), n)]
        ignore = rng.random(n) < 0.1
        for k in range(n):
            truth_rows.append((f, lab[k], *centre[k], *size[k], angle[k], ignore[k]))
            for _ in range(int(rng.choice([0, 1, 1, 1, 2]))):  # misses and duplicates
                jitter = rng.normal(0, [1.0, 1.0, 1.5, 1.0, 0.08])
                box = np.r_[centre[k], size[k], angle[k]] + jitter
                box[2:4] = np.abs(box[2:4])
                wrong = rng.random() < 0.05
                det_rows.append((f, labels[0] if wrong else lab[k], *box, rng.random()))
        for _ in range(int(rng.integers(0, 3))):  # false alarms
            box = np.r_[rng.uniform(0, 200, 2), rng.uniform(4, 30, 2), rng.uniform(-3, 3)]
            det_rows.append((f, labels[rng.integers(0, 3)], *box, rng.random()))
    truth = pd.DataFrame(truth_rows, columns=["frame", "label", *BOX, "ignore"])
    dets = pd.DataFrame(det_rows, columns=["frame", "label", *BOX, "score"])
    dets["score"] = dets["score"].round(2)  # many exact score ties, across frames too
    dets["note"] = "synthetic"  # an extra column: passed through, not needed for matching
    truth = truth.sample(frac=1.0, random_state=seed).reset_index(drop=True)
    dets = dets.sample(frac=1.0, random_state=seed + 1).reset_index(drop=True)
    return truth, dets


def assert_same(got, want) -> None:
    """Exactly the same evaluation: result, records, curves, intervals."""
    assert json.dumps(got.to_dict(), sort_keys=True) == json.dumps(want.to_dict(), sort_keys=True)
    for f in fields(want.records):
        a, b = getattr(got.records, f.name), getattr(want.records, f.name)
        if isinstance(b, np.ndarray):
            assert a.dtype == b.dtype, f.name
            np.testing.assert_array_equal(a, b, err_msg=f.name)
        else:
            assert a == b, f.name
    for label in want.labels:
        for t in want.thresholds:
            try:
                expected = want.curve(label, t)
            except (KeyError, ValueError):  # a threshold that does not apply to this label
                with pytest.raises((KeyError, ValueError)):
                    got.curve(label, t)
                continue
            for x, y in zip(got.curve(label, t), expected, strict=True):
                np.testing.assert_array_equal(np.asarray(x), np.asarray(y))
    try:
        expected = want.interval(resamples=200, seed=3)
    except ValueError as exc:  # undefined (no truths): the same error both ways
        with pytest.raises(ValueError, match=str(exc)):
            got.interval(resamples=200, seed=3)
    else:
        assert got.interval(resamples=200, seed=3) == expected


@pytest.fixture(scope="module")
def tables():
    return synthetic_tables(400, seed=11)


def test_dask_dataframes_with_frames_split_across_partitions(client, tables):
    truth, dets = tables
    options = dict(iou="0.5:0.95:0.05", size_buckets=[0, 100, 400, np.inf], max_detections=12)
    want = evaluation.evaluate(truth, dets, **options)
    assert want.counts("vessel", 0.5)[0] > 50  # enough matches for the check to bite
    got = evaluate_distributed(
        dd.from_pandas(truth, npartitions=3),
        dd.from_pandas(dets, npartitions=7),
        client=client,
        buckets=5,
        **options,
    )
    assert_same(got, want)


def test_parquet_datasets_with_empty_files(client, tables, tmp_path):
    truth, dets = tables
    for name, table, cuts in (
        ("truth", truth, [0, 0, len(truth) // 3, len(truth)]),
        ("dets", dets, [0, len(dets) // 2, len(dets) // 2, len(dets)]),
    ):
        folder = tmp_path / name
        folder.mkdir()
        for k, (lo, hi) in enumerate(zip(cuts[:-1], cuts[1:], strict=True)):
            table.iloc[lo:hi].to_parquet(folder / f"part-{k:02d}.parquet", index=False)
    want = evaluation.evaluate(truth, dets, iou=[0.5, 0.7], ap="11-point")
    got = evaluate_distributed(
        str(tmp_path / "truth"),
        str(tmp_path / "dets"),
        client=client,
        iou=[0.5, 0.7],
        ap="11-point",
        buckets=16,  # more buckets than the 2 workers: some are empty
    )
    assert_same(got, want)


def test_in_memory_tables_and_scheduler_address(client, tables):
    truth, dets = tables
    # Integer frame ids in one table, text ids in the other: they still meet (in-process
    # they match as text), so the buckets must hash them alike.
    dets = dets.assign(frame=dets["frame"].astype(str))
    want = evaluation.evaluate(truth, dets, iou={"vessel": 0.6, None: 0.5}, recall_points=40)
    got = evaluate_distributed(
        truth,
        dets,
        scheduler=client.scheduler.address,
        iou={"vessel": 0.6, None: 0.5},
        recall_points=40,
    )
    assert_same(got, want)


def test_one_bucket_and_all_detections_in_one_partition(client, tables):
    truth, dets = tables
    want = evaluation.evaluate(truth.iloc[:0], dets, iou=0.5)  # no truth at all
    got = evaluate_distributed(truth.iloc[:0], dets, client=client, buckets=1)
    assert_same(got, want)


def test_bad_row_names_the_partition_row_and_column(client, tables):
    truth, dets = tables
    dets = dets.copy()
    dets.loc[len(dets) - 3, "width"] = -4.0  # in the last of 4 partitions
    start = time.monotonic()
    with pytest.raises(ValueError, match=r"detections partition 3 of 4 .*column 'width'"):
        evaluate_distributed(truth, dd.from_pandas(dets, npartitions=4), client=client, timeout=60)
    assert time.monotonic() - start < 60


def _load_partition(k: int) -> pd.DataFrame:
    if k == 2:
        raise OSError("simulated storage failure while loading a partition")
    return synthetic_tables(20, seed=k)[1]


def test_failing_task_surfaces_as_clear_error_in_bounded_time(client, tables):
    truth, _ = tables
    meta = synthetic_tables(3, seed=0)[1].iloc[:0]
    dets = dd.from_map(_load_partition, range(4), meta=meta)
    start = time.monotonic()
    with pytest.raises(TaskFailed, match=r"detections partition 2 of 4 .*OSError: simulated"):
        evaluate_distributed(truth, dets, client=client, timeout=60)
    assert time.monotonic() - start < 60
    # The cluster is still usable afterwards.
    small_truth, small_dets = synthetic_tables(10, seed=5)
    ev = evaluate_distributed(small_truth, small_dets, client=client)
    assert ev.to_dict() == evaluation.evaluate(small_truth, small_dets).to_dict()


def test_local_cluster_started_for_the_run():
    truth, dets = synthetic_tables(30, seed=9)
    got = evaluate_distributed(truth, dets, workers=1, iou=0.5)
    assert_same(got, evaluation.evaluate(truth, dets, iou=0.5))


def test_option_errors_before_any_work():
    with pytest.raises(ValueError, match="give at most one of"):
        evaluate_distributed({}, {}, workers=2, scheduler="tcp://127.0.0.1:1")
    with pytest.raises(ValueError, match="iou"):
        evaluate_distributed({}, {}, iou=1.5)


def test_single_files_read_here_like_in_process(client, tables, tmp_path):
    truth, dets = tables
    truth.to_csv(tmp_path / "truth.csv", index=False)
    dets.to_json(tmp_path / "dets.jsonl", orient="records", lines=True)
    t, d = str(tmp_path / "truth.csv"), str(tmp_path / "dets.jsonl")
    assert_same(evaluate_distributed(t, d, client=client), evaluation.evaluate(t, d))
    # A bad value in a single file is reported as in-process: file, line and column.
    bad = truth.astype({"height": object})
    bad.loc[5, "height"] = "tall"
    bad.to_csv(tmp_path / "bad.csv", index=False)
    with pytest.raises(ValueError) as in_process:
        evaluation.evaluate(str(tmp_path / "bad.csv"), d)
    assert "line 7" in str(in_process.value)  # header is line 1, row 5 is line 7
    with pytest.raises(ValueError) as distributed_run:
        evaluate_distributed(str(tmp_path / "bad.csv"), d, client=client)
    assert str(distributed_run.value) == str(in_process.value)


@pytest.mark.parametrize("suffix", [".csv", ".jsonl"])
def test_folders_of_any_table_files_in_natural_order(client, tmp_path, suffix):
    from tests.test_tables import tie_folders

    truth, dets = tie_folders(tmp_path, suffix)
    want = evaluation.evaluate(truth, dets)
    assert want.ap("vessel") == 1.0  # hand-worked: f2 before f10 (tests/test_tables.py)
    got = evaluate_distributed(truth, dets, client=client, buckets=3)
    assert_same(got, want)


def test_distance_matching_gives_the_same_numbers(client, tables):
    # centre-distance matching: the same records, result and intervals on the cluster
    truth, dets = tables
    want = evaluation.evaluate(truth, dets, distance=[0.5, 1, 2, 4])
    assert want.counts("vessel", 1.0)[0] > 50  # enough matches for the check to bite
    got = evaluate_distributed(
        dd.from_pandas(truth, npartitions=3),
        dd.from_pandas(dets, npartitions=4),
        client=client,
        buckets=3,
        distance=[0.5, 1, 2, 4],
    )
    assert got.criterion == "distance"
    assert_same(got, want)


def synthetic_points(truth: pd.DataFrame, seed: int) -> pd.DataFrame:
    """Invented lidar returns for the rotated truths of ``synthetic_tables``: 0-7 points inside
    each box (drawn in its own frame), its centre and a corner (on the boundary up to
    rounding), clutter in every frame and in frames without truths; shuffled across frames."""
    rng = np.random.default_rng(seed)
    rows = []
    for f, cx, cy, w, h, a in truth[["frame", *BOX[:5]]].itertuples(index=False):
        c, s = np.cos(a), np.sin(a)
        k = int(rng.integers(0, 8))
        u = rng.uniform(-w / 2, w / 2, k)
        v = rng.uniform(-h / 2, h / 2, k)
        for x, y in zip(cx + u * c - v * s, cy + u * s + v * c, strict=True):
            rows.append((f, x, y))
        if rng.random() < 0.5:
            rows.append((f, cx, cy))
            rows.append((f, cx + w / 2 * c - h / 2 * s, cy + w / 2 * s + h / 2 * c))
    frames = int(truth["frame"].max()) + 1
    for f in range(frames + 30):  # clutter, also in frames that hold no truth
        for x, y in rng.uniform(0, 200, (int(rng.integers(0, 20)), 2)):
            rows.append((f, x, y))
    pts = pd.DataFrame(rows, columns=["frame", "x", "y"])
    pts["z"] = rng.uniform(0, 3, len(pts))  # not used with 2D boxes
    return pts.sample(frac=1.0, random_state=seed).reset_index(drop=True)


@pytest.fixture(scope="module")
def points(tables):
    return synthetic_points(tables[0], seed=12)


def test_points_and_min_points_give_the_same_numbers(client, tables, points):
    # Points in Dask partitions that split frames, counted on the workers: the same counts,
    # set-aside truths, records and result as counting in process (records compared field by
    # field, truth_points and truth_set_aside included).
    truth, dets = tables
    options = dict(iou=[0.5, 0.7], min_points=3)
    want = evaluation.evaluate(truth, dets, points=points, **options)
    aside = want.records.truth_set_aside
    assert 20 < aside.sum() < len(truth) - 100  # both kinds of truths are there
    assert (want.records.truth_points > 0).sum() > 100
    got = evaluate_distributed(
        dd.from_pandas(truth, npartitions=3),
        dd.from_pandas(dets, npartitions=2),
        client=client,
        buckets=5,
        points=dd.from_pandas(points, npartitions=4),
        **options,
    )
    assert_same(got, want)
    assert got.to_dict()["points"] == want.to_dict()["points"]
    # without min_points: the counts only, no truth set aside
    want = evaluation.evaluate(truth, dets, points=points, distance=[1, 2])
    got = evaluate_distributed(truth, dets, client=client, points=points, distance=[1, 2])
    assert not got.records.truth_set_aside.any()
    assert_same(got, want)


def test_points_from_files_folders_and_text_frame_ids(client, tables, points, tmp_path):
    truth, dets = tables
    folder = tmp_path / "points"
    folder.mkdir()
    cuts = [0, len(points) // 3, len(points) // 3, len(points)]  # one file is empty
    for k, (lo, hi) in enumerate(zip(cuts[:-1], cuts[1:], strict=True)):
        points.iloc[lo:hi].to_parquet(folder / f"p{k}.parquet", index=False)
    want = evaluation.evaluate(truth, dets, points=points, min_points=4)
    # a folder read file by file on the workers, and in process (the same counts)
    assert_same(evaluation.evaluate(truth, dets, points=str(folder), min_points=4), want)
    got = evaluate_distributed(
        truth, dets, client=client, buckets=7, points=str(folder), min_points=4
    )
    assert_same(got, want)
    # a single CSV file read here; frame ids written as text with leading zeros in the
    # points only ("007" is frame 7 by the frame-id rule): the same buckets, the same counts
    text = points.assign(frame=points["frame"].map(lambda f: f"{f:03d}"))
    text.to_csv(tmp_path / "points.csv", index=False)
    got = evaluate_distributed(
        truth,
        dets,
        scheduler=client.scheduler.address,
        points=str(tmp_path / "points.csv"),
        min_points=4,
    )
    assert_same(got, want)


def test_points_errors_and_warnings_as_in_process(client, tables, points, tmp_path):
    from obbiou.errors import InvalidInput, LikelyMistake

    truth, dets = tables
    with pytest.raises(InvalidInput, match="min_points needs a table of points"):
        evaluate_distributed(truth, dets, client=client, min_points=3)
    with pytest.raises(InvalidInput, match="min_points: expected a whole number >= 1"):
        evaluate_distributed(truth, dets, client=client, points=points, min_points=0)
    # a bad cell of a single file: the in-process message (file, line, column)
    bad = points.head(10).astype({"y": object})
    bad.loc[3, "y"] = "far"
    bad.to_csv(tmp_path / "bad.csv", index=False)
    with pytest.raises(ValueError) as in_process:
        evaluation.evaluate(truth, dets, points=str(tmp_path / "bad.csv"))
    with pytest.raises(ValueError) as distributed_run:
        evaluate_distributed(truth, dets, client=client, points=str(tmp_path / "bad.csv"))
    assert "line 5" in str(in_process.value)  # header is line 1, row 3 is line 5
    assert str(distributed_run.value) == str(in_process.value)
    # files with and without z in one folder: refused both ways
    folder = tmp_path / "mixed"
    folder.mkdir()
    points.head(5).to_csv(folder / "a.csv", index=False)
    points.head(5).drop(columns="z").to_csv(folder / "b.csv", index=False)
    with pytest.raises(InvalidInput, match="x, y while .* has frame, x, y, z"):
        evaluation.evaluate(truth, dets, points=str(folder))
    with pytest.raises(InvalidInput, match="x, y while .* has frame, x, y, z"):
        evaluate_distributed(truth, dets, client=client, points=str(folder))
    # points of other frames only: the in-process warning, here on the client, and the same
    # numbers (every truth holds 0 points)
    elsewhere = points.assign(frame=points["frame"] + 10_000)
    with pytest.warns(LikelyMistake, match="share no frame id with the truth"):
        want = evaluation.evaluate(truth, dets, points=elsewhere)
    with pytest.warns(LikelyMistake, match="share no frame id with the truth"):
        got = evaluate_distributed(truth, dets, client=client, points=elsewhere, buckets=4)
    assert (got.records.truth_points == 0).all()
    assert_same(got, want)
