"""``obbiou evaluate --details PATH`` and ``--at-score S``: files and JSON equal to the library's
per-row tables and operating points of the same input."""

import json

import numpy as np
import pandas as pd
import pytest

from obbiou.evaluation import evaluate
from obbiou.evaluation.operating import as_dict
from tests.cli.test_commands import one_line_error, run
from tests.evaluation.test_details import hand_case


@pytest.fixture
def files(tmp_path):
    truth, dets = hand_case()
    t, d = tmp_path / "truth.csv", tmp_path / "dets.csv"
    pd.DataFrame(truth).to_csv(t, index=False)
    pd.DataFrame(dets).to_csv(d, index=False)
    return t, d


@pytest.mark.parametrize("suffix", [".csv", ".parquet"])
def test_details_files_equal_the_tables(files, tmp_path, suffix):
    t, d = files
    out = tmp_path / f"rows{suffix}"
    proc = run("evaluate", str(t), str(d), "--details", str(out), "--causes", "-q")
    assert proc.returncode == 0, proc.stderr
    assert "False positives" in proc.stdout  # --causes prints the breakdowns
    ev = evaluate(t, d)
    read = pd.read_csv if suffix == ".csv" else pd.read_parquet
    for name, want in (("detections", ev.detections()), ("truths", ev.truths())):
        got = read(tmp_path / f"rows.{name}{suffix}")
        want = want.reset_index()
        assert got.columns.tolist() == want.columns.tolist()
        assert len(got) == len(want)
        for c in want.columns:
            a, b = got[c].to_numpy(dtype=object), want[c].to_numpy(dtype=object)
            same = [(pd.isna(x) and pd.isna(y)) or x == y for x, y in zip(a, b, strict=True)]
            assert all(same), (name, c, a, b)
    # hand-worked (tests/evaluation/test_details.py): D1 took T0, D3 was ignored
    rows = read(tmp_path / f"rows.detections{suffix}")
    assert rows["outcome"].tolist() == ["fp", "tp", "fp", "ignored", "fp", "fp", "fp"]
    assert rows["note"].tolist() == [f"d{i}" for i in range(7)]


def test_at_score_printed_and_in_json(files, tmp_path):
    t, d = files
    out = tmp_path / "r.json"
    proc = run("evaluate", str(t), str(d), "--at-score", "0.7", "--json", str(out), "-q")
    assert proc.returncode == 0, proc.stderr
    assert "Operating points at score >= 0.7" in proc.stdout
    written = json.loads(out.read_text())
    assert written["at_score"] == json.loads(
        json.dumps({"score": 0.7, "labels": as_dict(evaluate(t, d).at_score(0.7))})
    )
    # hand-worked in tests/evaluation/test_operating.py: car at 0.7 has P = R = F1 = 1/2
    car = written["at_score"]["labels"]["car"]
    assert (car["precision"], car["recall"], car["f1"]) == (0.5, 0.5, 0.5)
    assert written["labels"]["car"]["ap"]["0.5"] == evaluate(t, d).ap("car", 0.5)
    assert np.isfinite(written["mean_ap"])


def test_bad_values_are_one_line(files, tmp_path):
    t, d = files
    line = one_line_error(run("evaluate", str(t), str(d), "--details", str(tmp_path / "x.xlsx")))
    assert "x.xlsx" in line and ".parquet" in line
    line = one_line_error(run("evaluate", str(t), str(d), "--at-score", "nan"))
    assert "--at-score" in line
