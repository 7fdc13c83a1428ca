"""``obbiou demo`` end to end (small sizes): outputs, their content, and determinism."""

from __future__ import annotations

import json
import struct
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from tests.cli.test_commands import run

PNGS = (
    "harbour/scene.png",
    "harbour/pr_curves.png",
    "warehouse/scene.png",
    "warehouse/pr_curves.png",
)


def png_size(path: Path) -> tuple[int, int]:
    """Width and height from the PNG signature and IHDR chunk (PNG specification, §5.2/11.2.2)."""
    data = path.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n", path
    assert data[12:16] == b"IHDR"
    return struct.unpack(">II", data[16:24])


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    out = tmp_path_factory.mktemp("demo") / "out"
    proc = run("demo", "--out", str(out), "--frames", "2", "--seed", "3", "-q")
    assert proc.returncode == 0, proc.stderr
    return out, proc


def test_demo_says_invented_and_not_safe(demo):
    out, proc = demo
    text = proc.stdout.lower()
    assert "invented" in text and "do not establish" in text and "safe" in text
    report = (out / "report.txt").read_text()
    assert report.startswith("obbiou demo report: INVENTED DATA")
    for words in (
        "Harbour survey (invented)",
        "Warehouse lidar (invented)",
        "qualified engineers",
        "B - A",
        "interval",
        "False positives",
    ):
        assert words in report, words


def test_demo_json(demo):
    from obbiou.demo.run import SETTINGS
    from obbiou.evaluation import evaluate

    out, _ = demo
    doc = json.loads((out / "report.json").read_text())
    assert "invented" in doc["note"] and doc["seed"] == 3
    for name in ("harbour", "warehouse"):
        s = doc["scenarios"][name]
        assert 0 <= doc["mean_ap"][name] <= 1
        assert s["mean_ap"] == doc["mean_ap"][name] == s["evaluation"]["mean_ap"]
        lo, hi = s["interval"]["mean_ap"]
        assert lo <= s["mean_ap"] <= hi
        # The tables written beside the report give the same numbers when read back.
        folder = out / name
        again = evaluate(folder / "truth.csv", folder / "improved.csv", iou=SETTINGS[name]["iou"])
        assert again.mean_ap() == pytest.approx(s["mean_ap"], rel=1e-12)
        assert len(pd.read_csv(folder / "improved.csv")) == s["kept_detections"]["improved"]
        assert s["kept_detections"]["improved"] <= s["raw_detections"]["improved"]
        cmp = s["comparison"]
        assert cmp["difference"] == pytest.approx(cmp["mean_ap_b"] - cmp["mean_ap_a"])
        assert 0 < cmp["p_value"] <= 1
        control = s["control_comparison"]
        lo, hi = control["interval"]
        assert lo <= control["difference"] <= hi and 0 < control["p_value"] <= 1


def test_demo_pictures(demo):
    import matplotlib.image as mpimg

    out, _ = demo
    for rel in PNGS:
        width, height = png_size(out / rel)
        assert 500 <= width <= 3000 and 400 <= height <= 3000, (rel, width, height)
    # The scene pictures use the project palette: navy truths and amber matched detections.
    for rel in ("harbour/scene.png", "warehouse/scene.png"):
        rgb = (mpimg.imread(out / rel)[..., :3] * 255).round()
        for colour in ("#1f3b73", "#e0a100"):
            target = np.array([int(colour[i : i + 2], 16) for i in (1, 3, 5)])
            close = (np.abs(rgb - target).max(axis=-1) <= 8).sum()
            assert close > 200, (rel, colour, close)


def test_demo_is_deterministic(demo, tmp_path):
    out, _ = demo
    other = tmp_path / "again"
    proc = run("demo", "--out", str(other), "--frames", "2", "--seed", "3", "-q")
    assert proc.returncode == 0, proc.stderr
    assert (other / "report.json").read_bytes() == (out / "report.json").read_bytes()
    for rel in ("harbour/truth.csv", "harbour/raw_baseline.csv", "warehouse/improved.csv"):
        assert (other / rel).read_bytes() == (out / rel).read_bytes(), rel
    text = (out / "report.txt").read_text().replace(str(out), "OUT")
    assert (other / "report.txt").read_text().replace(str(other), "OUT") == text


def test_demo_lidar_evaluation(demo):
    # the warehouse is also evaluated by centre distance with invented lidar returns
    from obbiou.evaluation import evaluate

    out, proc = demo
    assert "by centre distance" in proc.stdout
    report = (out / "report.txt").read_text()
    assert "matched by ground-plane centre distance" in report
    assert "Errors of true positives" in report
    doc = json.loads((out / "report.json").read_text())
    lidar = doc["scenarios"]["warehouse"]["lidar_evaluation"]
    assert lidar["criterion"] == "distance" and lidar["points"]["min_points"] == 5
    # the JSON is the library's result on the files the demo wrote
    folder = out / "warehouse"
    want = evaluate(
        folder / "truth.csv",
        folder / "improved.csv",
        distance=[0.5, 1, 2, 4],
        points=folder / "returns.csv",
        min_points=5,
    ).to_dict()
    assert lidar["mean_ap"] == pytest.approx(want["mean_ap"], abs=1e-12)
    assert lidar["points"] == want["points"]
