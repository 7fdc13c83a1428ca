"""``obbiou evaluate`` with the lidar options, run as users run it: ``--distance``,
``--bev``, ``--points``/``--min-points``; the JSON equals the library's ``to_dict()``."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd

from obbiou.evaluation import evaluate
from tests.cli.test_commands import one_line_error, run

UPRIGHT = ["cx", "cy", "cz", "length", "width", "height", "yaw"]


def write_scene(tmp_path):
    """Invented warehouse sweep: two pallets and a person; one pallet with few returns."""
    truth = pd.DataFrame(
        [
            [0, "pallet", 0.0, 0.0, 0.5, 1.2, 0.8, 1.0, 0.0],
            [0, "pallet", 4.0, 0.0, 0.5, 1.2, 0.8, 1.0, 0.3],
            [1, "person", 2.0, 3.0, 0.9, 0.5, 0.5, 1.8, 0.0],
        ],
        columns=["frame", "label", *UPRIGHT],
    )
    dets = truth.copy()
    dets["score"] = [0.9, 0.8, 0.7]
    dets["cx"] = dets["cx"] + [0.3, 1.5, 0.1]
    pts = pd.DataFrame(
        {
            "frame": [0] * 5 + [1] * 4,
            "x": [0.0] * 5 + [2.0] * 4,
            "y": [0.0] * 9,
            "z": [0.2, 0.4, 0.6, 0.8, 1.0, 0.5, 1.0, 1.5, 0.1],
        }  # fmt: skip
    )
    pts.loc[pts.frame == 1, "y"] = 3.0
    paths = {k: tmp_path / f"{k}.csv" for k in ("truth", "dets", "points")}
    truth.to_csv(paths["truth"], index=False)
    dets.to_csv(paths["dets"], index=False)
    pts.to_csv(paths["points"], index=False)
    return paths, truth, dets, pts


def test_distance_points_and_json(tmp_path):
    paths, truth, dets, pts = write_scene(tmp_path)
    out = tmp_path / "r.json"
    proc = run(
        "evaluate", str(paths["truth"]), str(paths["dets"]), "--distance", "0.5,1,2,4",
        "--points", str(paths["points"]), "--min-points", "3", "--json", str(out), "-q",
    )  # fmt: skip
    assert proc.returncode == 0, proc.stderr
    assert "matched by ground-plane centre distance" in proc.stdout
    got = json.loads(out.read_text())
    want = evaluate(truth, dets, distance=[0.5, 1, 2, 4], points=pts, min_points=3).to_dict()
    assert got == json.loads(json.dumps(want))
    # hand-worked: pallet 2 holds no point -> set aside; pallet 1 (5 points) and the person
    # (4 points) are matched within 0.5 m (0.3 m and 0.1 m off); the detection of pallet 2,
    # 1.5 m off, is an FP within 0.5 and 1 m and absorbed by the ignore truth within 2 m
    assert got["points"]["labels"]["pallet"]["set_aside"] == 1
    pallet = got["labels"]["pallet"]["counts"]
    assert [pallet[k]["tp"] for k in ("0.5", "1", "2", "4")] == [1, 1, 1, 1]
    assert [pallet[k]["fp"] for k in ("0.5", "1", "2", "4")] == [1, 1, 0, 0]
    assert [pallet[k]["ignored"] for k in ("0.5", "1", "2", "4")] == [0, 0, 1, 1]


def test_bev_and_errors(tmp_path):
    paths, truth, dets, _ = write_scene(tmp_path)
    proc = run("evaluate", str(paths["truth"]), str(paths["dets"]), "--bev", "-q")
    assert proc.returncode == 0, proc.stderr
    assert "BEV IoU" in proc.stdout
    both = run(
        "evaluate", str(paths["truth"]), str(paths["dets"]), "--iou", "0.5", "--distance", "1"
    )
    assert "--iou or --distance" in one_line_error(both)
    alone = run("evaluate", str(paths["truth"]), str(paths["dets"]), "--min-points", "3")
    assert "--points" in one_line_error(alone)
    assert np.isfinite(truth["cx"]).all()  # the scene itself is valid


def test_compare_says_how_it_matched(tmp_path):
    paths, *_ = write_scene(tmp_path)
    proc = run(
        "compare", str(paths["truth"]), str(paths["dets"]), str(paths["dets"]),
        "--distance", "1,2", "--points", str(paths["points"]), "--min-points", "3",
        "--resamples", "50", "-q",
    )  # fmt: skip
    assert proc.returncode == 0, proc.stderr
    assert "matched at distance ≤ 1, 2 m" in proc.stdout
    assert "B - A: +0.0000" in proc.stdout  # the same detections twice: no difference
