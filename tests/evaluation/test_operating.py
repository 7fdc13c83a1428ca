"""Operating points: at_score and best_score against scikit-learn and hand-worked cases."""

import math
from fractions import Fraction

import numpy as np
import pandas as pd
import pytest
from sklearn.metrics import f1_score, precision_recall_curve

from obbiou.evaluation import evaluate
from obbiou.evaluation.matching import FP, TP
from obbiou.evaluation.operating import as_dict, best_cut
from tests.evaluation.test_details import hand_case
from tests.evaluation.test_matching import rotated_scene


def test_hand_worked_at_score_and_best_score():
    truth, dets = hand_case()
    ev = evaluate(truth, dets, iou=0.5)
    # car at 0.5 (hand_case comments): D1 .9 TP, D2 .8 FP, D3 .7 ignored, D0 .6 FP,
    # D4 .5 FP, D5 .4 FP; non-ignored car truths T0, T3: 2.
    row = as_dict(ev.at_score(0.7))["car"]
    assert (row["tp"], row["fp"], row["ignored"], row["missed"], row["detections"]) == (
        1,
        1,
        1,
        1,
        3,
    )
    # precision 1/2, recall 1/2, F1 = 2*1 / (2*1 + 1 + 1) = 1/2 (hand-worked)
    assert (row["precision"], row["recall"], row["f1"]) == (0.5, 0.5, 0.5)
    # van: only D6 (.3, FP) in frame 1; truths T1, T4. Nothing kept at 0.7.
    van = as_dict(ev.at_score(0.7))["van"]
    assert (van["precision"], van["recall"], van["f1"], van["missed"]) == (None, 0.0, 0.0, 2)
    best = as_dict(ev.best_score())
    # car cuts: .9 -> F1 2/3, .8 -> 2/4, .6 -> 2/5, .5 -> 2/6, .4 -> 2/7 (hand-worked)
    assert best["car"]["score"] == 0.9 and best["car"]["f1"] == float(Fraction(2, 3))
    # van: one cut (.3), F1 0 there (the only candidate)
    assert best["van"]["score"] == 0.3 and best["van"]["f1"] == 0.0


def test_ties_report_the_highest_score():
    # Hand-worked: TP .9, FP .8, FP .7, FP .6, TP .5 with 3 truths. F1 = 2 TP / (TP + FP + 3):
    # cut .9 -> 2/4 = 1/2, .8 -> 2/5, .7 -> 2/6, .6 -> 2/7, .5 -> 4/8 = 1/2: a tie of .9 and .5.
    p = best_cut(np.array([0.9, 0.8, 0.7, 0.6, 0.5]), np.array([TP, FP, FP, FP, TP]), 3, 0.5)
    assert (p.score, p.tp, p.fp, p.f1) == (0.9, 1, 0, 0.5)
    # tied scores are one cut: .8 TP and .8 FP cannot be separated
    p = best_cut(np.array([0.8, 0.8]), np.array([FP, TP]), 1, 0.5)
    assert (p.score, p.tp, p.fp) == (0.8, 1, 1)


@pytest.mark.parametrize("seed", [1, 2, 3])
def test_against_scikit_learn(seed):
    truth, dets = rotated_scene(30, seed=seed)
    ev = evaluate(truth, dets, iou=[0.5, 0.7])
    checked = 0
    for iou in (0.5, 0.7):
        d = ev.detections(iou)
        for lab in ev.labels:
            c = ev.counts(lab, iou)
            rows = d[(d.label == lab) & d.outcome.isin(["tp", "fp"])]
            if not len(rows) or not c.truths:
                continue
            # scikit-learn's precision_recall_curve on the ranked detections, with every
            # missed truth added as a positive scored below all detections (never kept).
            y = np.r_[(rows.outcome == "tp").to_numpy(), np.ones(c.missed, bool)]
            s = np.r_[rows.score.to_numpy(), np.full(c.missed, -1.0)]
            precision, recall, cuts = precision_recall_curve(y, s)
            f1_ref = []
            for p, r, cut in zip(precision, recall, cuts, strict=False):
                if cut < 0:
                    continue
                got = as_dict(ev.at_score(cut, iou))[lab]
                assert got["precision"] == pytest.approx(p, abs=1e-12)
                assert got["recall"] == pytest.approx(r, abs=1e-12)
                # scikit-learn's f1_score of the same cut (missed truths predicted negative)
                ref = f1_score(y, s >= cut)
                assert got["f1"] == pytest.approx(ref, abs=1e-12)
                f1_ref.append((ref, cut))
                checked += 1
            best = as_dict(ev.best_score(iou))[lab]
            top = max(v for v, _ in f1_ref)
            assert best["f1"] == pytest.approx(top, abs=1e-12)
            # ties: the highest cut among those with the top F1
            assert best["score"] == max(cut for v, cut in f1_ref if abs(v - top) < 1e-12)
    assert checked > 50  # enough cuts for the comparison to bite


@pytest.mark.parametrize(
    "options",
    [
        dict(iou=[0.5, 0.75], max_detections=7),
        dict(iou={"ship": 0.7, "crane": 0.5}, size_buckets=[0, 10, 20, 1e9]),
    ],
)
def test_keeping_everything_gives_the_counts(options):
    truth, dets = rotated_scene(30, seed=9)
    ev = evaluate(truth, dets, **options)
    evs = [ev] + [b for g in ev.buckets.values() for b in g.values()]
    for e in evs:
        table = as_dict(e.at_score(-math.inf))
        for lab in e.labels:
            c = e.counts(lab, min(e.thresholds_of(lab)))
            got = table[lab]
            assert (got["tp"], got["fp"], got["ignored"], got["missed"], got["truths"]) == (
                c.tp,
                c.fp,
                c.ignored,
                c.missed,
                c.truths,
            )
            assert got["detections"] == c.detections


def test_bad_score_and_empty():
    truth, dets = hand_case()
    ev = evaluate(truth, dets)
    with pytest.raises(ValueError, match="score"):
        ev.at_score(float("nan"))
    with pytest.raises(ValueError, match="score"):
        ev.at_score("high")
    empty = evaluate(truth, {k: v[:0] for k, v in dets.items()})
    best = empty.best_score()
    assert best["score"].isna().all() and (best["f1"] == 0).all()
    assert isinstance(best, pd.DataFrame) and best.index.name == "label"
