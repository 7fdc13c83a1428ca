"""The example scripts run as a user runs them: ``python examples/NAME.py OUTPUT_DIR``."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pandas as pd
import pytest

ROOT = Path(__file__).resolve().parents[1]
EXAMPLES = sorted((ROOT / "examples").glob("*.py"))


def run_example(path: Path, out: Path) -> subprocess.CompletedProcess:
    env = dict(os.environ, PYTHONPATH=str(ROOT) + os.pathsep + os.environ.get("PYTHONPATH", ""))
    return subprocess.run(
        [sys.executable, str(path), str(out)],
        capture_output=True,
        text=True,
        env=env,
        cwd=out,
        timeout=600,
    )


def test_the_three_examples_exist():
    names = {p.name for p in EXAMPLES}
    assert {"evaluate_csv.py", "suppress_tile.py", "lidar_bev_and_3d.py"} <= names
    for p in EXAMPLES:
        assert "INVENTED" in p.read_text(), p  # each says its data is invented


@pytest.mark.parametrize("path", EXAMPLES, ids=[p.stem for p in EXAMPLES])
def test_example_runs(path, tmp_path):
    proc = run_example(path, tmp_path)
    assert proc.returncode == 0, proc.stderr
    assert "invented" in proc.stdout.lower()
    if path.stem == "evaluate_csv":
        result = json.loads((tmp_path / "result.json").read_text())
        assert 0 < result["mean_ap"] <= 1
        assert (tmp_path / "curves.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
        assert len(pd.read_csv(tmp_path / "detections.csv")) < len(
            pd.read_csv(tmp_path / "raw_detections.csv")
        )
    elif path.stem == "suppress_tile":
        assert len(pd.read_csv(tmp_path / "kept.csv")) > 0
    elif path.stem == "lidar_bev_and_3d":
        assert json.loads((tmp_path / "lidar_3d.json").read_text())["protocol"]["shape"] == (
            "upright"
        )
        assert "safe" in proc.stdout
