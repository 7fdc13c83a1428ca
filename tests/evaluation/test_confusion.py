"""Label confusion: a hand-worked case and a brute-force shapely matcher with labels ignored."""

import math

import numpy as np
import pandas as pd
import pytest
import shapely

from obbiou.evaluation import MatchRecords, evaluate, reduce_records
from obbiou.evaluation.confusion import BACKGROUND, MISSED
from tests.evaluation.test_details import hand_case
from tests.evaluation.test_matching import rotated_scene


def test_hand_worked():
    truth, dets = hand_case()
    table = evaluate(truth, dets, iou=0.5).confusion()
    # By hand (hand_case comments), labels ignored, frame 0 by score: D1 takes T0 (car, car);
    # D2 (car) takes T1 (van); D3 only overlaps the ignore truth T2: left out; D0 (IoU 1/2
    # with the taken T0), D4 (IoU 1/4 with T3) and D5 take nothing: background. Frame 1: D6
    # (van) takes nothing; T3 (car) and T4 (van) are missed.
    want = pd.DataFrame(
        [[1, 0, 1], [1, 0, 1], [3, 1, 0]],
        index=pd.Index(["car", "van", BACKGROUND], name="truth", dtype=object),
        columns=pd.Index(["car", "van", MISSED], name="detected", dtype=object),
    )
    pd.testing.assert_frame_equal(table, want)
    assert table.attrs == {"threshold": 0.5, "ignored": 1, "capped": 0}
    # a stricter threshold: D0's IoU 1/2 is below 0.6, nothing changes but the attrs' threshold
    assert evaluate(truth, dets, iou=0.5).confusion(0.6).attrs["threshold"] == 0.6
    capped = evaluate(truth, dets, iou=0.5, max_detections=5).confusion()
    assert capped.attrs["capped"] == 1 and capped.loc[BACKGROUND, "car"] == 2  # D5 capped


def corners(cx, cy, w, h, a):
    """Rectangle corners by hand (cos/sin), independent of obbiou.boxes."""
    c, s = math.cos(a), math.sin(a)
    pts = [(-w / 2, -h / 2), (w / 2, -h / 2), (w / 2, h / 2), (-w / 2, h / 2)]
    return [(cx + x * c - y * s, cy + x * s + y * c) for x, y in pts]


def brute_force(truth, dets, t, labels):
    """The protocol's greedy rule with labels ignored, on shapely polygons."""
    cols = ("cx", "cy", "width", "height", "angle")
    tp = [shapely.Polygon(corners(*(truth[c][j] for c in cols))) for j in range(len(truth["cx"]))]
    dp = [shapely.Polygon(corners(*(dets[c][i] for c in cols))) for i in range(len(dets["cx"]))]
    rows = [*labels, BACKGROUND]
    table = {(r, c): 0 for r in rows for c in [*labels, MISSED]}
    ignored = 0
    taken = set()
    order = sorted(range(len(dp)), key=lambda i: (dets["frame"][i], -dets["score"][i], i))
    for i in order:
        best, best_v, absorbed = None, -1.0, False
        for j in range(len(tp)):
            if truth["frame"][j] != dets["frame"][i]:
                continue
            union = dp[i].union(tp[j]).area
            v = dp[i].intersection(tp[j]).area / union if union > 0 else 0.0
            if v < t:
                continue
            if truth["ignore"][j]:
                absorbed = True
            elif j not in taken and v > best_v:
                best, best_v = j, v
        if best is not None:
            taken.add(best)
            table[(truth["label"][best], dets["label"][i])] += 1
        elif absorbed:
            ignored += 1
        else:
            table[(BACKGROUND, dets["label"][i])] += 1
    for j in range(len(tp)):
        if not truth["ignore"][j] and j not in taken:
            table[(truth["label"][j], MISSED)] += 1
    return table, ignored


@pytest.mark.parametrize("seed, t", [(1, 0.5), (2, 0.3), (3, 0.7)])
def test_against_brute_force_shapely(seed, t):
    truth, dets = rotated_scene(12, seed=seed)
    rng = np.random.default_rng(seed)
    # swap a third of the detection labels so that the off-diagonal cells fill up
    swap = rng.random(len(dets["label"])) < 0.3
    dets["label"] = [
        ("crane" if lab == "ship" else "ship") if s else lab
        for lab, s in zip(dets["label"], swap, strict=True)
    ]
    ev = evaluate(truth, dets, iou=t)
    table = ev.confusion()
    want, ignored = brute_force(truth, dets, t, ev.labels)
    got = {(r, c): int(table.loc[r, c]) for r in table.index for c in table.columns}
    assert got == want
    assert table.attrs["ignored"] == ignored
    off_diagonal = table.loc["ship", "crane"] + table.loc["crane", "ship"]
    assert off_diagonal > 0 and table.loc[BACKGROUND].sum() > 0  # the check bites
    # row sums: the non-ignore truths of each label; column sums: the label's detections
    for lab in ev.labels:
        n_truth = sum(
            1 for j, x in enumerate(truth["label"]) if x == lab and not truth["ignore"][j]
        )
        assert table.loc[lab].sum() == n_truth
    assert table.to_numpy().sum() - table[MISSED].sum() + ignored == len(dets["label"])


def test_needs_the_boxes():
    truth, dets = rotated_scene(5, seed=1)
    ev = evaluate(truth, dets, size_buckets=[0, 10, 1e9])
    from_records = reduce_records(MatchRecords.concat([ev.records]))
    with pytest.raises(ValueError, match="match records alone"):
        from_records.confusion()
    bucket = next(iter(ev.buckets["size"].values()))
    with pytest.raises(ValueError, match="bucket"):
        bucket.confusion()
    with pytest.raises(ValueError, match="one threshold"):
        ev.confusion("0.5:0.7:0.1")


def test_empty():
    truth, dets = hand_case()
    table = evaluate(truth, {k: v[:0] for k, v in dets.items()}).confusion()
    assert table[MISSED].tolist() == [2, 2, 0]  # car: T0, T3; van: T1, T4 (T2 is ignore)
    assert table.drop(columns=MISSED).to_numpy().sum() == 0
