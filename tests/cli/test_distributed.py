"""``obbiou evaluate --workers N``: the Dask path from the command line gives the same JSON as
the in-process command on the same rows (invented data from the demo scenarios)."""

from __future__ import annotations

import json

import pytest

from obbiou.demo.scenarios import simulate_detector, warehouse_lidar
from tests.cli.test_commands import one_line_error, run

pytest.importorskip("distributed")


def test_workers_gives_the_in_process_numbers(tmp_path):
    scene = warehouse_lidar(frames=6, seed=3)
    truth = scene.truth
    dets = simulate_detector(scene, "baseline", seed=4)
    (tmp_path / "truth").mkdir()
    (tmp_path / "dets").mkdir()
    # Frames split across files on purpose: the distributed path must regroup them.
    half = len(truth) // 2
    truth.iloc[:half].to_parquet(tmp_path / "truth" / "a.parquet")
    truth.iloc[half:].to_parquet(tmp_path / "truth" / "b.parquet")
    dets.iloc[: len(dets) // 3].to_parquet(tmp_path / "dets" / "a.parquet")
    dets.iloc[len(dets) // 3 :].to_parquet(tmp_path / "dets" / "b.parquet")
    truth.to_csv(tmp_path / "truth.csv", index=False)
    dets.to_csv(tmp_path / "dets.csv", index=False)

    common = ("--iou", "0.25:0.75:0.25", "-q")
    local = run(
        "evaluate",
        str(tmp_path / "truth.csv"),
        str(tmp_path / "dets.csv"),
        *common,
        "--json",
        str(tmp_path / "local.json"),
    )
    assert local.returncode == 0, local.stderr
    spread = run(
        "evaluate",
        str(tmp_path / "truth"),
        str(tmp_path / "dets"),
        *common,
        "--workers",
        "1",
        "--json",
        str(tmp_path / "dask.json"),
    )
    assert spread.returncode == 0, spread.stderr
    a = json.loads((tmp_path / "local.json").read_text())
    b = json.loads((tmp_path / "dask.json").read_text())
    assert a["mean_ap"] > 0
    assert a == b  # equal, not approximately equal (docs/design.md §8)


def test_workers_and_scheduler_exclude_each_other(tmp_path):
    proc = run("evaluate", "t.csv", "d.csv", "--workers", "2", "--scheduler", "tcp://127.0.0.1:1")
    assert proc.returncode == 2
    assert "not allowed with argument" in one_line_error(proc)


def test_points_on_the_cluster_give_the_in_process_json(client, tmp_path):
    # --points/--min-points with --scheduler: counted on the workers, the same JSON as the
    # in-process command (invented warehouse sweeps; points from tests/cli/test_lidar.py's
    # hand-worked scene, whose second pallet holds no point and is set aside)
    from tests.cli.test_lidar import write_scene

    paths, *_ = write_scene(tmp_path)
    common = ("--distance", "0.5,1,2,4", "--points", str(paths["points"]), "--min-points", "3")
    common += ("-q",)
    files = (str(paths["truth"]), str(paths["dets"]))
    local = run("evaluate", *files, *common, "--json", str(tmp_path / "local.json"))
    assert local.returncode == 0, local.stderr
    spread = run(
        "evaluate", *files, *common, "--scheduler", client.scheduler.address,
        "--json", str(tmp_path / "dask.json"),
    )  # fmt: skip
    assert spread.returncode == 0, spread.stderr
    a = json.loads((tmp_path / "local.json").read_text())
    b = json.loads((tmp_path / "dask.json").read_text())
    assert a["points"]["labels"]["pallet"]["set_aside"] == 1
    assert a == b
