"""Per-detection and per-truth tables: hand-worked outcomes, input order, extra columns, and
counts that agree with ``Evaluation.counts`` exactly."""

from fractions import Fraction

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from obbiou.evaluation import MatchRecords, evaluate, match_frames, reduce_records
from tests.evaluation.test_matching import axis_table, frames_strategy, rotated_scene


def hand_case():
    """Two frames, labels car / van, axis boxes with IoUs worked out by hand."""
    truth = axis_table(
        [
            (0, "car", 0, 0, 10, 10, False),  # T0: taken by D1
            (0, "van", 20, 0, 30, 10, False),  # T1: only a car detection on it
            (0, "car", 40, 0, 50, 10, True),  # T2: ignore truth, absorbs D3
            (0, "car", 60, 0, 70, 10, False),  # T3: D4 covers a quarter of it
            (1, "van", 0, 0, 10, 10, False),  # T4: nothing near
        ]
    )
    truth["annotator"] = ["ana", "ben", "ana", "cy", "ben"]
    dets = axis_table(
        [
            (0, "car", 0, 0, 10, 5, 0.6),  # D0: IoU 1/2 with T0, which D1 took: duplicate
            (0, "car", 0, 0, 10, 10, 0.9),  # D1: TP on T0, IoU 1
            (0, "car", 20, 0, 30, 10, 0.8),  # D2: on the van T1: wrong label
            (0, "car", 40, 0, 50, 10, 0.7),  # D3: ignored (T2)
            (0, "car", 60, 0, 65, 5, 0.5),  # D4: IoU 1/4 with T3: poor localisation
            (0, "car", 100, 100, 101, 101, 0.4),  # D5: background
            (1, "van", 50, 50, 60, 60, 0.3),  # D6: background
        ],
        score=True,
    )
    dets["note"] = [f"d{i}" for i in range(7)]
    return truth, dets


def test_hand_worked_detections_and_truths():
    truth, dets = hand_case()
    ev = evaluate(truth, dets, iou=0.5)
    d = ev.detections()
    # Hand-worked (comments of hand_case): outcome, truth row, IoU and cause of every row.
    assert d.index.tolist() == list(range(7)) and d.index.name == "row"
    assert d["outcome"].tolist() == ["fp", "tp", "fp", "ignored", "fp", "fp", "fp"]
    assert d["truth"].tolist() == [pd.NA, 0, pd.NA, 2, pd.NA, pd.NA, pd.NA]
    assert d["iou"].tolist() == [pd.NA, 1.0, pd.NA, 1.0, pd.NA, pd.NA, pd.NA]
    assert d["cause"].tolist() == [
        "duplicate",
        pd.NA,
        "wrong_label",
        pd.NA,
        "poor_localisation",
        "background",
        "background",
    ]
    # best IoU with any non-ignore truth of the frame, exact fractions by hand:
    # D0 1/2 (T0), D2 1 (T1, another label), D3 0 (only the ignore truth), D4 1/4 (T3)
    expected = [Fraction(1, 2), 1, 1, 0, Fraction(1, 4), 0, 0]
    assert d["best_iou"].tolist() == [float(v) for v in expected]
    assert d["note"].tolist() == dets["note"]  # extra column passed through in input order
    assert d["score"].tolist() == dets["score"]
    t = ev.truths()
    assert t["outcome"].tolist() == ["matched", "missed", "ignore", "missed", "missed"]
    assert t["detection"].tolist() == [1, pd.NA, pd.NA, pd.NA, pd.NA]
    assert t["iou"].tolist() == [1.0, pd.NA, pd.NA, pd.NA, pd.NA]
    assert t["cause"].tolist() == [pd.NA, "wrong_label", pd.NA, "poor_localisation", "not_detected"]
    assert t["annotator"].tolist() == truth["annotator"]
    assert t["ignore"].tolist() == [False, False, True, False, False]


def test_hand_worked_cap():
    truth, dets = hand_case()
    ev = evaluate(truth, dets, iou=0.5, max_detections=5)
    d = ev.detections()
    # frame 0 by score: D1 .9, D2 .8, D3 .7, D0 .6, D4 .5 | D5 .4 beyond the cap of 5
    assert d["outcome"].tolist() == ["fp", "tp", "fp", "ignored", "fp", "capped", "fp"]
    assert d["cause"].isna().tolist() == [False, True, False, True, False, True, False]
    assert pd.isna(d["best_iou"].iloc[5])  # capped: never compared
    assert (d["outcome"] == "capped").sum() == ev.counts("car").capped == 1


def check_counts(ev, iou):
    d, t = ev.detections(iou), ev.truths(iou)
    assert len(d) == ev.records.n_detections and len(t) == ev.records.n_truths
    for lab in ev.labels:
        ts = ev.thresholds_of(lab)
        if iou is not None and ev.threshold(iou) not in ts:
            continue
        c = ev.counts(lab, min(ts) if iou is None else iou)
        dl, tl = d[d["label"] == lab], t[t["label"] == lab]
        got = dl["outcome"].value_counts().to_dict()
        for name, field in (("tp", "tp"), ("fp", "fp"), ("ignored", "ignored")):
            assert got.get(name, 0) == getattr(c, field), (lab, name)
        assert got.get("capped", 0) == c.capped
        tgot = tl["outcome"].value_counts().to_dict()
        assert tgot.get("missed", 0) == c.missed
        assert tgot.get("matched", 0) + tgot.get("missed", 0) == c.truths
        assert tgot.get("matched", 0) == c.tp
        assert (dl["threshold"] == (min(ts) if iou is None else ev.threshold(iou))).all()
    # each TP names its truth and that truth names the TP back
    tp = d[d["outcome"] == "tp"]
    back = t.loc[tp["truth"].astype(int).to_numpy(), "detection"].astype(int).to_numpy()
    assert np.array_equal(back, tp.index.to_numpy())


@pytest.mark.parametrize(
    "options",
    [
        dict(iou="0.3:0.7:0.2"),
        dict(iou="0.3:0.7:0.2", max_detections=6),
        dict(iou={"ship": 0.7, "crane": [0.5, 0.6]}),
        dict(iou=[0.5, 0.75], size_buckets=[0, 10, 20, 1e9], max_detections=9),
    ],
)
def test_counts_agree_with_counts(options):
    truth, dets = rotated_scene(40, seed=8)
    ev = evaluate(truth, dets, **options)
    assert sum(ev.truths()["outcome"] == "ignore") > 0  # ignore truths take part
    evs = [ev] + [b for group in ev.buckets.values() for b in group.values()]
    for e in evs:
        for iou in (None, *e.thresholds):
            check_counts(e, iou)


# Random frames may share no frame id with the truth: the warning is right there, and the
# counts must agree all the same.
@pytest.mark.filterwarnings("ignore::obbiou.errors.LikelyMistake")
@settings(max_examples=40, deadline=None)
@given(
    frames_strategy(),
    st.lists(st.sampled_from([0.1, 0.5, 0.7, 1.0]), min_size=1, max_size=3, unique=True),
    st.sampled_from([None, 1, 3]),
)
def test_counts_agree_on_adversarial_frames(data, thresholds, cap):
    # the shared matching strategy: touching, nested, identical, zero-size boxes, score ties
    truth_rows, det_rows = data
    truth = axis_table(truth_rows)
    truth.setdefault("ignore", [])
    ev = evaluate(truth, axis_table(det_rows, score=True), iou=thresholds, max_detections=cap)
    for iou in (None, *ev.thresholds):
        check_counts(ev, iou)


def test_causes_agree_with_the_breakdowns():
    truth, dets = rotated_scene(30, seed=2)
    ev = evaluate(truth, dets, iou=[0.5, 0.7])
    for iou in (None, 0.7):
        d, t = ev.detections(iou), ev.truths(iou)
        for lab, fp in ev.false_positives(iou).items():
            got = d[d["label"] == lab]["cause"].value_counts().to_dict()
            expected = {k: v for k, v in fp._asdict().items() if k != "total"}
            assert {k: got.get(k, 0) for k in expected} == expected
            assert sum(got.values()) == fp.total
        for lab, miss in ev.misses(iou).items():
            got = t[t["label"] == lab]["cause"].value_counts().to_dict()
            assert sum(got.get(k, 0) for k in miss._fields[:-1]) == miss.total
            assert all(got.get(k, 0) == getattr(miss, k) for k in miss._fields[:-1])


def test_input_order_after_shuffling():
    truth, dets = rotated_scene(20, seed=4)
    tdf, ddf = pd.DataFrame(truth), pd.DataFrame(dets)
    ddf["det_id"] = np.arange(len(ddf))
    tdf["truth_id"] = np.arange(len(tdf))
    rng = np.random.default_rng(1)
    ddf = ddf.iloc[rng.permutation(len(ddf))].reset_index(drop=True)
    tdf = tdf.iloc[rng.permutation(len(tdf))].reset_index(drop=True)
    ev = evaluate(tdf, ddf, iou=0.5)
    d, t = ev.detections(), ev.truths()
    assert d["det_id"].tolist() == ddf["det_id"].tolist()
    assert d["score"].tolist() == ddf["score"].tolist()
    assert t["truth_id"].tolist() == tdf["truth_id"].tolist()
    # the matched pair is the same pair whatever the row order: compare by the ids
    base = evaluate(pd.DataFrame(truth), pd.DataFrame(dets), iou=0.5).detections()
    pairs = {
        (row.det_id, t["truth_id"].iloc[row.truth]) for row in d[d.outcome == "tp"].itertuples()
    }
    tp = base[base.outcome == "tp"]
    assert pairs == {(row.Index, row.truth) for row in tp.itertuples()} and len(pairs) > 20


def test_records_matched_in_parts():
    truth, dets = rotated_scene(20, seed=6)
    tdf, ddf = pd.DataFrame(truth), pd.DataFrame(dets)
    whole = evaluate(tdf, ddf, iou=0.5)
    frames = sorted(set(tdf.frame) | set(ddf.frame))
    parts, naive = [], []
    for half in (frames[::2], frames[1::2]):
        ti, di = np.flatnonzero(tdf.frame.isin(half)), np.flatnonzero(ddf.frame.isin(half))
        t, d = tdf.iloc[ti], ddf.iloc[di]
        parts.append(match_frames(t, d, thresholds=0.5, truth_rows=ti, detection_rows=di))
        naive.append(match_frames(t, d, thresholds=0.5))
    joined = reduce_records(MatchRecords.concat(parts))
    assert joined.inputs is None  # records only: no extra columns to show
    got, want = joined.detections(), whole.detections()
    pd.testing.assert_frame_equal(got, want)
    pd.testing.assert_frame_equal(joined.truths(), whole.truths())
    with pytest.raises(ValueError, match="rows twice"):
        reduce_records(MatchRecords.concat(naive)).detections()
    with pytest.raises(ValueError, match="distinct"):
        match_frames(tdf, ddf, thresholds=0.5, detection_rows=np.zeros(len(ddf), int))


def test_extra_column_with_a_result_name_is_renamed_with_a_warning():
    truth, dets = hand_case()
    dets["outcome"] = ["mine"] * 7
    with pytest.warns(UserWarning, match="outcome_input"):
        d = evaluate(truth, dets).detections()
    assert (d["outcome_input"] == "mine").all() and d["outcome"].iloc[1] == "tp"


def test_empty_tables():
    truth, dets = hand_case()
    empty_d = {k: v[:0] for k, v in dets.items()}
    empty_t = {k: v[:0] for k, v in truth.items()}
    ev = evaluate(truth, empty_d)
    assert ev.detections().empty and (ev.truths()["outcome"] != "matched").all()
    ev = evaluate(empty_t, empty_d)
    assert ev.detections().empty and ev.truths().empty
