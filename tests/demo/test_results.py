"""The demo's per-row results and operating points (obbiou.demo.results) on invented data."""

from __future__ import annotations

import pandas as pd

from obbiou.demo.results import SHOWN_COLUMNS, results_section
from obbiou.demo.scenarios import harbour_survey, simulate_detector
from obbiou.evaluation import evaluate
from obbiou.evaluation.operating import as_dict


def test_results_section_files_lines_and_json(tmp_path):
    scenario = harbour_survey(2, seed=5)
    dets = simulate_detector(scenario, "improved", seed=5)
    ev = evaluate(scenario.truth, dets, shape=scenario.shape, iou=[0.5, 0.7])
    lines, files, doc = results_section(ev, 0.5, tmp_path, cut=0.6)
    # the written files are the library's tables at the headline threshold
    written = pd.read_csv(files["rows.detections.csv"])
    want = ev.detections(0.5).reset_index()
    assert written["outcome"].tolist() == want["outcome"].tolist()
    assert written["row"].tolist() == list(range(len(dets)))
    assert len(pd.read_csv(files["rows.truths.csv"])) == len(scenario.truth)
    # one shown row per (outcome, cause) found, with the shown columns
    text = "\n".join(lines)
    kinds = want["outcome"] + "/" + want["cause"].fillna("-")
    assert all(c in text for c in SHOWN_COLUMNS)
    for outcome in set(want["outcome"]):
        assert f" {outcome} " in text
    assert kinds.nunique() >= 3  # tp, fp of some causes, ignored: the sample bites
    assert "Operating points at the best score cut" in text and "at score >= 0.6" in text
    assert doc["operating_points"]["best"] == as_dict(ev.best_score(0.5))
    assert doc["operating_points"]["at_score"]["labels"] == as_dict(ev.at_score(0.6, 0.5))
