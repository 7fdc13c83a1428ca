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
    "harbour/tiles.png",
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
        assert words in " ".join(report.split()), words  # lines wrapped at 88
    # the safety caution once per report (at its head), not under every table
    assert report.count("do not establish") == 1


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


def test_demo_harbour_detector_runs_on_tiles_and_merges(demo):
    from obbiou.demo.run import SETTINGS

    out, proc = demo
    doc = json.loads((out / "report.json").read_text())["scenarios"]["harbour"]
    tiling = doc["tiling"]
    size, overlap = SETTINGS["harbour"]["tiles"]["size"], SETTINGS["harbour"]["tiles"]["overlap"]
    assert (tiling["tile_size"], tiling["overlap"]) == (size, overlap)
    # hand-worked: 2048 px in tiles of 1152 every 896 px: 2 x 2 tiles per mosaic, 2 mosaics
    assert tiling["tiles_per_frame"] == 4 and tiling["tiles"] == 8
    raw = pd.read_csv(out / "harbour" / "raw_improved.csv")
    kept = pd.read_csv(out / "harbour" / "improved.csv")
    assert "tile" in raw.columns and "tile" not in kept.columns
    assert set(raw.tile) == {0, 1, 2, 3}
    for version, counts in tiling["versions"].items():
        assert counts["detections"] == len(pd.read_csv(out / "harbour" / f"raw_{version}.csv"))
        assert counts["kept"] == doc["kept_detections"][version]
        assert counts["dropped_at_seams"] > 0
        assert counts["detections"] - counts["dropped_at_seams"] > counts["kept"]  # suppressed
    report = " ".join((out / "report.txt").read_text().split())  # lines wrapped at 88
    assert "4 tiles of 1152 x 1152 px overlapping by 256 px" in report
    assert "tile detections ->" in report and "harbour/tiles.png" in report
    assert "per frame" in proc.stdout and "at seams" in proc.stdout
    assert "Warning" not in proc.stderr  # no tile detection lies wholly off its tile


def test_demo_merged_harbour_has_no_cross_seam_duplicates(demo):
    # Every pair of kept same-label boxes of a mosaic overlaps with IoU <= max_iou (shapely
    # areas, outside reference), while the tile detections had pairs above it.
    import shapely

    from obbiou.boxes import corners
    from obbiou.demo.run import SETTINGS
    from obbiou.demo.scenarios import detector_tiles, harbour_survey

    out, _ = demo
    max_iou = SETTINGS["harbour"]["max_iou"]
    cols = ["cx", "cy", "width", "height", "angle"]

    def worst(table):
        top = 0.0
        for _, group in table.groupby(["frame", "label"]):
            g = shapely.polygons(corners(group[cols].to_numpy(), shape="rotated"))
            i, j = shapely.STRtree(g).query(g, predicate="intersects")
            i, j = i[i < j], j[i < j]
            inter = shapely.area(shapely.intersection(g[i], g[j]))
            iou = inter / (shapely.area(g[i]) + shapely.area(g[j]) - inter)
            top = max(top, float(iou.max(initial=0.0)))
        return top

    assert worst(pd.read_csv(out / "harbour" / "improved.csv")) <= max_iou
    raw = pd.read_csv(out / "harbour" / "raw_improved.csv")
    tiles = detector_tiles(harbour_survey(frames=0), **SETTINGS["harbour"]["tiles"])
    raw[["cx", "cy"]] += tiles[raw.tile.to_numpy(), :2]  # into the mosaic
    assert worst(raw) > max_iou  # the copies of objects in the overlaps were there


def test_demo_merge_agrees_with_the_stitch_command(demo, tmp_path):
    # The report's suggested command line gives the same kept detections.
    out, _ = demo
    target = tmp_path / "merged.csv"
    proc = run(
        "stitch",
        str(out / "harbour" / "raw_improved.csv"),
        "--image",
        "2048",
        "2048",
        "--size",
        "1152",
        "--overlap",
        "256",
        "--out",
        str(target),
        "-q",
    )
    assert proc.returncode == 0, proc.stderr
    assert "obbiou stitch" in (out / "report.txt").read_text()
    merged = pd.read_csv(target).sort_values("source_row").reset_index(drop=True)
    kept = pd.read_csv(out / "harbour" / "improved.csv")
    assert len(merged) == len(kept)
    cols = ["cx", "cy", "width", "height", "angle", "score"]
    np.testing.assert_allclose(merged[cols].to_numpy(), kept[cols].to_numpy(), rtol=1e-12)
    assert (merged.label == kept.label).all() and (merged.frame == kept.frame).all()
