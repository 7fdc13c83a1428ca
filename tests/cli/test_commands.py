"""The command line, run as users run it: ``python -m obbiou ...`` in a subprocess.

Results are checked against outside references where one exists (shapely areas for IoU and
for the suppression rule, scikit-learn and exact fractions for AP) and against the library
called in-process on the same files (the JSON of ``evaluate`` is ``Evaluation.to_dict()``).
"""

from __future__ import annotations

import io
import json
import math
import os
import subprocess
import sys
from fractions import Fraction
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import shapely

ROOT = Path(__file__).resolve().parents[2]


COMMANDS = ("demo", "evaluate", "compare", "suppress", "overlap", "stitch", "warmup")
ROTATED = ["cx", "cy", "width", "height", "angle"]


def run(*args: str, cwd: Path | None = None) -> subprocess.CompletedProcess:
    env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    return subprocess.run(
        [sys.executable, "-m", "obbiou", *args],
        capture_output=True,
        text=True,
        env=env,
        cwd=cwd or ROOT,
        timeout=600,
    )


def one_line_error(proc: subprocess.CompletedProcess) -> str:
    """The run failed as bad input: exit status 2, one line on stderr, no traceback."""
    assert proc.returncode == 2, (proc.returncode, proc.stdout, proc.stderr)
    assert "Traceback" not in proc.stderr
    lines = [line for line in proc.stderr.splitlines() if line.strip()]
    assert len(lines) == 1, proc.stderr
    return lines[0]


def polygons(table: pd.DataFrame) -> np.ndarray:
    """shapely polygons of rotated boxes (corners written out here, not by obbiou)."""
    cx, cy, w, h, a = (table[c].to_numpy(float) for c in ROTATED)
    c, s = np.cos(a), np.sin(a)
    lx = np.array([-0.5, 0.5, 0.5, -0.5]) * w[:, None]
    ly = np.array([-0.5, -0.5, 0.5, 0.5]) * h[:, None]
    x = cx[:, None] + lx * c[:, None] - ly * s[:, None]
    y = cy[:, None] + lx * s[:, None] + ly * c[:, None]
    return shapely.polygons(np.stack([x, y], axis=-1))


def shapely_iou(p: np.ndarray, q: np.ndarray) -> np.ndarray:
    inter = shapely.area(shapely.intersection(p, q))
    return inter / (shapely.area(p) + shapely.area(q) - inter)


def random_detections(seed: int, frames: int = 3, n: int = 40) -> pd.DataFrame:
    """Random rotated detections, crowded enough that many overlap (two labels)."""
    rng = np.random.default_rng(seed)
    rows = []
    for f in range(frames):
        centres = rng.uniform(0, 60, (n // 4, 2))
        for i in range(n):
            c = centres[i % len(centres)] + rng.normal(0, 1.5, 2)
            rows.append(
                {
                    "frame": f"f{f}",
                    "label": ("car", "van")[int(rng.integers(0, 2))],
                    "score": float(rng.uniform(0.05, 1.0)),
                    "cx": c[0],
                    "cy": c[1],
                    "width": rng.uniform(3, 8),
                    "height": rng.uniform(1.5, 3),
                    "angle": rng.uniform(-np.pi, np.pi),
                    "note": f"row{len(rows)}",
                }
            )
    return pd.DataFrame(rows)


# The hand-worked evaluation case. Frame 0 holds truths T1, T2, frame 1 truth T3 (label ship).
# Detections, by score: D1 = T1 exactly (0.9), D2 far from everything (0.8), D3 = T3 exactly
# (0.7), D4 = T2 exactly (0.6). Ranking TP FP TP TP, 3 positives.
TRUTH = pd.DataFrame(
    {
        "frame": [0, 0, 1],
        "label": ["ship"] * 3,
        "cx": [10.0, 30.0, 5.0],
        "cy": [10.0, 30.0, 5.0],
        "width": [4.0, 6.0, 2.0],
        "height": [2.0, 3.0, 2.0],
        "angle": [0.0, 0.5, 0.3],
    }
)
DETECTIONS = pd.DataFrame(
    {
        "frame": [0, 0, 1, 0],
        "label": ["ship"] * 4,
        "score": [0.9, 0.8, 0.7, 0.6],
        "cx": [10.0, 100.0, 5.0, 30.0],
        "cy": [10.0, 100.0, 5.0, 30.0],
        "width": [4.0, 2.0, 2.0, 6.0],
        "height": [2.0, 2.0, 2.0, 3.0],
        "angle": [0.0, 0.0, 0.3, 0.5],
    }
)


@pytest.fixture()
def hand_files(tmp_path):
    truth, dets = tmp_path / "truth.csv", tmp_path / "detections.csv"
    TRUTH.to_csv(truth, index=False)
    DETECTIONS.to_csv(dets, index=False)
    return truth, dets


# -- help --------------------------------------------------------------------------------------


def test_top_level_help_and_version():
    proc = run("--help")
    assert proc.returncode == 0
    for name in COMMANDS:
        assert name in proc.stdout
    assert "obbiou demo" in proc.stdout
    proc = run("--version")
    assert proc.returncode == 0 and proc.stdout.startswith("obbiou ")


@pytest.mark.parametrize("command", COMMANDS)
def test_every_command_has_help_with_an_example(command):
    proc = run(command, "--help")
    assert proc.returncode == 0, proc.stderr
    assert f"usage: obbiou {command}" in proc.stdout
    assert "example:" in proc.stdout and f"obbiou {command}" in proc.stdout.split("example:")[1]
    assert proc.stderr == ""


def test_bad_option_is_one_line():
    line = one_line_error(run("suppress", "x.csv", "--max-iou", "lots"))
    assert "--max-iou" in line and "obbiou suppress --help" in line
    line = one_line_error(run("evaluate", "only-one.csv"))
    assert "DETECTIONS" in line
    one_line_error(run("no-such-command"))


# -- evaluate ----------------------------------------------------------------------------------


def test_evaluate_hand_case_and_json_equals_to_dict(hand_files, tmp_path):
    from obbiou.evaluation import evaluate

    truth, dets = hand_files
    out_json, out_png = tmp_path / "result.json", tmp_path / "curves.png"
    proc = run(
        "evaluate",
        str(truth),
        str(dets),
        "--json",
        str(out_json),
        "--plot",
        str(out_png),
        "--interval",
        "--resamples",
        "200",
        "--causes",
        "-q",
    )
    assert proc.returncode == 0, proc.stderr
    written = json.loads(out_json.read_text())
    # The JSON the command writes is Evaluation.to_dict() of the same files (docs/design.md §7),
    # with the interval it printed (--interval) under "interval".
    ev = evaluate(truth, dets)
    interval = {"resamples": 200, "level": 0.95, "seed": 0}
    assert written == json.loads(json.dumps(ev.to_dict(interval=interval)))
    low, high = ev.interval(**interval)
    assert (written["interval"]["low"], written["interval"]["high"]) == (low, high)
    assert f"[{low:.4f}, {high:.4f}]" in proc.stdout
    # All-points AP worked out by hand with exact fractions: precisions at the TPs are 1, 2/3,
    # 3/4; the monotone envelope makes them 1, 3/4, 3/4; AP = (1 + 3/4 + 3/4) / 3.
    expected = (Fraction(1) + Fraction(3, 4) + Fraction(3, 4)) / 3
    assert math.isclose(written["labels"]["ship"]["ap"]["0.5"], float(expected), rel_tol=1e-12)
    assert math.isclose(written["mean_ap"], float(expected), rel_tol=1e-12)
    assert "ship" in proc.stdout and "interval" in proc.stdout and "False positives" in proc.stdout
    assert out_png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_evaluate_step_ap_matches_scikit_learn(hand_files, tmp_path):
    from sklearn.metrics import average_precision_score

    truth, dets = hand_files
    out = tmp_path / "step.json"
    proc = run("evaluate", str(truth), str(dets), "--ap", "step", "--json", str(out), "-q")
    assert proc.returncode == 0, proc.stderr
    # scikit-learn's average_precision_score is the step sum; every truth is detected here.
    reference = average_precision_score([1, 0, 1, 1], [0.9, 0.8, 0.7, 0.6])
    assert math.isclose(json.loads(out.read_text())["mean_ap"], reference, rel_tol=1e-12)


def test_evaluate_many_thresholds_and_per_label(tmp_path):
    rng = np.random.default_rng(4)
    truth = random_detections(1, frames=2, n=12).drop(columns=["score", "note"])
    dets = truth.copy()
    dets["score"] = rng.uniform(0.1, 1, len(dets))
    dets["cx"] += rng.normal(0, 0.3, len(dets))
    t, d, out = tmp_path / "t.parquet", tmp_path / "d.jsonl", tmp_path / "r.json"
    truth.to_parquet(t)
    dets.to_json(d, orient="records", lines=True)
    proc = run(
        "evaluate",
        str(t),
        str(d),
        "--iou",
        "0.5:0.95:0.05",
        "--iou",
        "van=0.7",
        "--json",
        str(out),
        "-q",
    )
    assert proc.returncode == 0, proc.stderr
    result = json.loads(out.read_text())
    assert set(result["labels"]["van"]["ap"]) == {"0.7"}
    assert len(result["labels"]["car"]["ap"]) == 10


# -- compare -----------------------------------------------------------------------------------


def test_compare_json_equals_library(hand_files, tmp_path):
    from obbiou.evaluation import compare

    truth, dets = hand_files
    better = tmp_path / "better.csv"
    DETECTIONS.drop(index=1).to_csv(better, index=False)  # without the false positive
    out = tmp_path / "cmp.json"
    proc = run(
        "compare",
        str(truth),
        str(dets),
        str(better),
        "--resamples",
        "300",
        "--seed",
        "5",
        "--json",
        str(out),
        "-q",
    )
    assert proc.returncode == 0, proc.stderr
    written = json.loads(out.read_text())
    ref = compare(truth, dets, better, resamples=300, seed=5).to_dict()
    assert written == json.loads(json.dumps(ref))
    # Without the FP every precision is 1: AP 1 against 5/6 (the hand case above).
    assert math.isclose(written["difference"], 1 - 5 / 6, rel_tol=1e-12)
    assert "B - A" in proc.stdout


# -- suppress ----------------------------------------------------------------------------------


def test_suppress_equals_library_and_the_rule_holds_by_shapely(tmp_path):
    import obbiou

    raw = random_detections(7)
    src, out = tmp_path / "raw.csv", tmp_path / "kept.csv"
    raw.to_csv(src, index=False)
    proc = run("suppress", str(src), "--max-iou", "0.3", "--out", str(out), "-q")
    assert proc.returncode == 0, proc.stderr
    kept = pd.read_csv(out)
    assert list(kept.columns) == list(raw.columns)  # extra columns pass through
    # Same as obbiou.suppress called per frame with labels (rows picked by the note column).
    expected = []
    for _, part in raw.groupby("frame", sort=False):
        k = obbiou.suppress(
            part[ROTATED].to_numpy(),
            part.score.to_numpy(),
            max_iou=0.3,
            labels=part.label.to_numpy(),
        )
        expected += list(part.note.to_numpy()[np.asarray(k.indices)])
    assert list(kept.note) == expected
    # Greedy hard NMS, checked with shapely: no two kept boxes of one frame and label overlap
    # by more than 0.3, and every removed box overlaps a kept, higher-scored one by more.
    for (_, _), part in raw.groupby(["frame", "label"]):
        is_kept = part.note.isin(kept.note).to_numpy()
        p = polygons(part)
        iou = shapely_iou(p[:, None], p[None, :])
        np.fill_diagonal(iou, 0.0)
        assert (iou[np.ix_(is_kept, is_kept)] <= 0.3 + 1e-9).all()
        score = part.score.to_numpy()
        for i in np.flatnonzero(~is_kept):
            assert ((iou[i] > 0.3 - 1e-9) & is_kept & (score >= score[i])).any()
    assert 0 < len(kept) < len(raw)


def test_suppress_degrees_and_empty(tmp_path):
    # Angles in degrees: suppression sees radians, the kept rows are written as they came.
    raw = random_detections(11, frames=1, n=12)
    in_degrees = raw.assign(angle=np.rad2deg(raw.angle).round(3))
    src, out = tmp_path / "deg.csv", tmp_path / "kept.csv"
    in_degrees.to_csv(src, index=False)
    proc = run("suppress", str(src), "--degrees", "--out", str(out), "-q")
    assert proc.returncode == 0, proc.stderr
    kept = pd.read_csv(out)
    # The same boxes given in radians keep the same rows.
    rad, kept_rad = tmp_path / "rad.csv", tmp_path / "kept_rad.csv"
    in_degrees.assign(angle=np.deg2rad(in_degrees.angle)).to_csv(rad, index=False)
    proc = run("suppress", str(rad), "--out", str(kept_rad), "-q")
    assert proc.returncode == 0, proc.stderr
    assert list(pd.read_csv(kept_rad).note) == list(kept.note)
    # And the degrees are written back exactly as they were read.
    as_read = in_degrees.set_index("note").loc[kept.note, "angle"].to_numpy()
    np.testing.assert_array_equal(kept.angle, as_read)
    empty = tmp_path / "empty.csv"
    raw.iloc[:0].to_csv(empty, index=False)
    proc = run("suppress", str(empty), "-q")
    assert proc.returncode == 0 and proc.stdout.strip() == ",".join(raw.columns)


def test_suppress_soft_to_parquet(tmp_path):
    import obbiou

    raw = random_detections(8, frames=1)
    src, out = tmp_path / "raw.parquet", tmp_path / "kept.parquet"
    raw.to_parquet(src)
    proc = run(
        "suppress",
        str(src),
        "--decay",
        "gaussian",
        "--sigma",
        "0.4",
        "--min-score",
        "0.05",
        "--out",
        str(out),
        "-q",
    )
    assert proc.returncode == 0, proc.stderr
    kept = pd.read_parquet(out)
    k = obbiou.suppress(
        raw[ROTATED].to_numpy(),
        raw.score.to_numpy(),
        decay="gaussian",
        sigma=0.4,
        min_score=0.05,
        labels=raw.label.to_numpy(),
    )
    np.testing.assert_array_equal(kept.note, raw.note.to_numpy()[np.asarray(k.indices)])
    np.testing.assert_allclose(kept.score, k.scores, rtol=0, atol=0)


# -- overlap -----------------------------------------------------------------------------------


def test_overlap_pairs_match_shapely(tmp_path):
    boxes = random_detections(9).drop(columns=["score"])
    src, out = tmp_path / "boxes.csv", tmp_path / "pairs.csv"
    boxes.to_csv(src, index=False)
    proc = run("overlap", str(src), "--out", str(out), "-q")
    assert proc.returncode == 0, proc.stderr
    pairs = pd.read_csv(out)
    assert list(pairs.columns) == ["frame", "first", "second", "first_label", "second_label", "iou"]
    p = polygons(boxes)
    # IoU of each reported pair equals shapely's on those rows (rows count from 0).
    ref = shapely_iou(p[pairs["first"].to_numpy()], p[pairs["second"].to_numpy()])
    np.testing.assert_allclose(pairs.iou, ref, rtol=1e-9, atol=1e-12)
    # And every pair that shapely finds overlapping (positive area, same frame) is reported.
    found = set(zip(pairs["first"], pairs["second"], strict=True))
    frames = boxes.frame.to_numpy()
    i, j = np.triu_indices(len(boxes), 1)
    same = frames[i] == frames[j]
    area = shapely.area(shapely.intersection(p[i[same]], p[j[same]]))
    truth = {(int(a), int(b)) for a, b, v in zip(i[same], j[same], area, strict=True) if v > 0}
    assert found == truth and len(found) > 10


def test_overlap_two_tables_with_threshold(tmp_path):
    a = random_detections(10, frames=2, n=16).drop(columns=["score"])
    b = a.copy()
    b["cx"] += 0.7
    fa, fb, out = tmp_path / "a.csv", tmp_path / "b.csv", tmp_path / "pairs.jsonl"
    a.to_csv(fa, index=False)
    b.to_csv(fb, index=False)
    proc = run("overlap", str(fa), str(fb), "--min-iou", "0.4", "--out", str(out), "-q")
    assert proc.returncode == 0, proc.stderr
    pairs = pd.read_json(out, lines=True)
    ref = shapely_iou(polygons(a)[pairs["first"]], polygons(b)[pairs["second"]])
    np.testing.assert_allclose(pairs.iou, ref, rtol=1e-9)
    assert (pairs.iou > 0.4).all()
    assert (a.frame.to_numpy()[pairs["first"]] == b.frame.to_numpy()[pairs["second"]]).all()


def test_overlap_to_stdout(hand_files):
    truth, _ = hand_files
    proc = run("overlap", str(truth), str(truth), "-q")
    assert proc.returncode == 0, proc.stderr
    lines = proc.stdout.strip().splitlines()
    assert lines[0] == "frame,first,second,first_label,second_label,iou"
    assert len(lines) == 4  # each of the three truths with itself, IoU 1
    assert all(float(line.rsplit(",", 1)[1]) == 1.0 for line in lines[1:])


# -- bad input ---------------------------------------------------------------------------------


def test_malformed_value_names_file_line_and_column(hand_files, tmp_path):
    _, dets = hand_files
    text = dets.read_text().splitlines()
    cells = text[3].split(",")
    cells[5] = "wide"  # the width of the third data row: line 4 of the file
    text[3] = ",".join(cells)
    bad = tmp_path / "bad.csv"
    bad.write_text("\n".join(text) + "\n")
    for args in (("evaluate", str(hand_files[0]), str(bad)), ("suppress", str(bad))):
        line = one_line_error(run(*args))
        assert "bad.csv" in line and "line 4" in line and "'width'" in line, line


def test_missing_column_and_negative_size(hand_files, tmp_path):
    truth, dets = hand_files
    nocol = tmp_path / "nocol.csv"
    DETECTIONS.drop(columns=["score"]).to_csv(nocol, index=False)
    line = one_line_error(run("evaluate", str(truth), str(nocol)))
    assert "nocol.csv" in line and "'score'" in line
    neg = tmp_path / "neg.csv"
    TRUTH.assign(height=[2.0, -3.0, 2.0]).to_csv(neg, index=False)
    line = one_line_error(run("overlap", str(neg)))
    assert "neg.csv" in line and "line 3" in line and "'height'" in line and "negative" in line


def test_missing_file_and_bad_values(tmp_path, hand_files):
    line = one_line_error(run("suppress", str(tmp_path / "nowhere.csv")))
    assert "nowhere.csv" in line
    line = one_line_error(run("evaluate", str(hand_files[0]), str(hand_files[1]), "--iou", "2"))
    assert "iou" in line
    line = one_line_error(run("suppress", str(hand_files[1]), "--out", str(tmp_path / "x.xlsx")))
    assert "x.xlsx" in line
    line = one_line_error(run("demo", "--frames", "0", "--out", str(tmp_path / "d")))
    assert "--frames" in line


def test_warmup():
    proc = run("warmup")
    assert proc.returncode == 0, proc.stderr
    assert "overlap measures" in proc.stdout and "scene" in proc.stdout
    assert "evaluation" in proc.stdout and proc.stdout.strip().splitlines()[-1].startswith("done")


def test_bev_flag_of_suppress_and_overlap(tmp_path):
    # hand-worked: two pallets stacked on a rack (same footprint, 1 m apart in height)
    # have 3D IoU 0 and bird's-eye-view IoU 1 (invented warehouse rows)
    rows = pd.DataFrame(
        {
            "frame": [0, 0],
            "label": ["pallet", "pallet"],
            "score": [0.9, 0.8],
            "cx": [5.0, 5.0],
            "cy": [2.0, 2.0],
            "cz": [0.5, 2.5],
            "length": [1.2, 1.2],
            "width": [0.8, 0.8],
            "height": [1.0, 1.0],
            "yaw": [0.3, 0.3],
        }
    )
    path = tmp_path / "stacked.csv"
    rows.to_csv(path, index=False)
    plain = run("suppress", str(path), "-q")
    bev = run("suppress", str(path), "--bev", "-q")
    assert plain.returncode == 0 and bev.returncode == 0, plain.stderr + bev.stderr
    assert "kept 2 of 2" in plain.stderr and "kept 1 of 2" in bev.stderr
    pairs = run("overlap", str(path), "--bev", "-q")
    assert pairs.returncode == 0, pairs.stderr
    assert pd.read_csv(io.StringIO(pairs.stdout))["iou"].tolist() == [1.0]


def test_nan_bucket_edges_are_one_line(hand_files):
    for option in ("--size-buckets", "--range-buckets"):
        line = one_line_error(run("evaluate", *map(str, hand_files), option, "0,nan", "-q"))
        assert f"{option} '0,nan': an edge is NaN" in line


def test_too_many_thresholds_is_one_line(hand_files):
    line = one_line_error(run("evaluate", *map(str, hand_files), "--iou", "0.5:0.95:0.00000009"))
    assert "gives 5,000,001 thresholds; at most 100,001" in line


def test_evaluate_reads_folders_in_process(tmp_path):
    from tests.test_tables import tie_folders

    truth, dets = tie_folders(tmp_path, ".parquet")
    out = tmp_path / "r.json"
    done = run("evaluate", truth, dets, "--json", str(out), "-q")
    assert done.returncode == 0, done.stderr
    # hand-worked (tests/test_tables.py): f2's true positive ranks before f10's false one
    assert json.loads(out.read_text())["labels"]["vessel"]["ap"]["0.5"] == 1.0
