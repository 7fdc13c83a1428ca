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
