"""Matching by ground-plane centre distance (Caesar et al., CVPR 2020) and by bird's-eye
view: hand-worked cases, a plain Python greedy loop on random scenes, shapely footprints."""

from __future__ import annotations

import json

import numpy as np
import pytest

from obbiou.errors import InvalidInput
from obbiou.evaluation import evaluate, match_frames
from obbiou.evaluation.matching import ground_centres

UPRIGHT = ("cx", "cy", "cz", "length", "width", "height", "yaw")


def upright_table(rows, frames, labels, *, scores=None, ignore=None):
    rows = np.asarray(rows, dtype=float).reshape(-1, 7)
    t = {"frame": list(frames), "label": list(labels)}
    for j, c in enumerate(UPRIGHT):
        t[c] = rows[:, j]
    if scores is not None:
        t["score"] = list(scores)
    if ignore is not None:
        t["ignore"] = list(ignore)
    return t


def three_cars():
    """Truths T0, T1, T2 at x = 0, 3, 10; detections D0, D1, D2 at x = 1.5, 1.4, 20."""
    car = [0.0, 0.0, 1.0, 4.0, 2.0, 1.5, 0.0]
    truth = upright_table([[0, *car[1:]], [3, *car[1:]], [10, *car[1:]]], [0] * 3, ["car"] * 3)
    dets = upright_table(
        [[1.5, *car[1:]], [1.4, *car[1:]], [20, *car[1:]]],
        [0] * 3,
        ["car"] * 3,
        scores=[0.9, 0.8, 0.7],
    )
    return truth, dets


def test_hand_worked_nearest_and_tie():
    # Hand-worked: truths T0 at x=0, T1 at x=3, T2 at x=10 (one frame, label car).
    # D0 (score .9) at x=1.5: 1.5 m from T0 and from T1, a tie -> the earlier truth T0,
    # within 2 and 4 m only. D1 (.8) at x=1.4: T0 taken, T1 at 1.6 m -> TP at 2 and 4 m.
    # D2 (.7) at x=20: 10 m from T2 -> FP everywhere. T2 is missed at every distance.
    truth, dets = three_cars()
    ev = evaluate(truth, dets, distance=[0.5, 1, 2, 4])
    r = ev.records
    assert r.criterion == "distance"
    assert r.det_outcome.tolist() == [[0, 0, 1, 1], [0, 0, 1, 1], [0, 0, 0, 0]]
    assert r.det_truth.tolist() == [[-1, -1, 0, 0], [-1, -1, 1, 1], [-1, -1, -1, -1]]
    assert r.det_iou[0, 2] == 1.5 and r.det_iou[1, 2] == pytest.approx(1.6)
    # AP at 2 m by hand: ranking TP, TP, FP over 3 truths -> envelope 1 at recall 2/3
    assert ev.ap("car", 2.0) == pytest.approx(2 / 3)
    assert ev.ap("car", 0.5) == 0.0
    assert ev.mean_ap() == pytest.approx((0 + 0 + 2 / 3 + 2 / 3) / 4)
    assert ev.counts("car", 4.0)[:4] == (2, 1, 0, 1)


def test_distance_is_inclusive_and_exact_at_the_threshold():
    # hand-worked: centres exactly 1 m apart match at d = 1 (<=), not at 0.999999
    box = [0.0, 0.0, 0.5, 1.0, 1.0, 1.0, 0.0]
    truth = upright_table([box], [0], ["person"])
    dets = upright_table([[1.0, *box[1:]]], [0], ["person"], scores=[0.5])
    r = match_frames(truth, dets, thresholds=[0.999999, 1.0], criterion="distance")
    assert r.det_outcome.tolist() == [[0, 1]]


def test_ignore_truth_absorbs_within_distance():
    # hand-worked: the only truth within 2 m is an ignore truth: the detection is ignored
    # at 2 m (neither TP nor FP) and an FP at 0.5 m; the ignore truth is never a miss.
    box = [0.0, 0.0, 0.5, 1.0, 1.0, 1.0, 0.0]
    truth = upright_table([box], [0], ["person"], ignore=[True])
    dets = upright_table([[1.5, *box[1:]]], [0], ["person"], scores=[0.5])
    ev = evaluate(truth, dets, distance=[0.5, 2])
    assert ev.counts("person", 2.0)[:4] == (0, 0, 1, 0)
    assert ev.counts("person", 0.5)[:4] == (0, 1, 0, 0)


def brute_force(truth, dets, thresholds):
    """The protocol as a plain Python loop: per frame and label, detections by descending
    score (ties: input order) take the nearest unmatched non-ignore truth within d (ties:
    earlier truth); else ignored within d of an ignore truth (the nearest); else FP."""
    n, m = len(dets["score"]), len(truth["label"])
    tc = np.column_stack([truth["cx"], truth["cy"]])
    dc = np.column_stack([dets["cx"], dets["cy"]])
    outcome = np.zeros((n, len(thresholds)), dtype=int)
    matched = np.full((n, len(thresholds)), -1)
    for k, d in enumerate(thresholds):
        taken = [False] * m
        order = sorted(range(n), key=lambda i: (-dets["score"][i], i))
        for i in order:
            cands, ign = [], []
            for j in range(m):
                if truth["frame"][j] != dets["frame"][i] or truth["label"][j] != dets["label"][i]:
                    continue
                dist = float(np.hypot(dc[i, 0] - tc[j, 0], dc[i, 1] - tc[j, 1]))
                if dist > d:
                    continue
                if truth["ignore"][j]:
                    ign.append((dist, j))
                elif not taken[j]:
                    cands.append((dist, j))
            if cands:
                _, j = min(cands)
                taken[j] = True
                outcome[i, k], matched[i, k] = 1, j
            elif ign:
                outcome[i, k], matched[i, k] = 2, min(ign)[1]
    return outcome, matched


@pytest.mark.parametrize("seed", range(6))
def test_random_scenes_against_a_python_loop(seed):
    rng = np.random.default_rng(seed)
    m, n = 40, 60

    # centres on a 0.5 m grid and scores from a few values: many exact distance ties
    # and many score ties, which the rule breaks by truth index and input order
    def rows(count):
        r = np.zeros((count, 7))
        r[:, :2] = rng.integers(0, 12, size=(count, 2)) * 0.5
        r[:, 2] = 0.8
        r[:, 3:6] = rng.uniform(0.5, 3.0, size=(count, 3))
        r[:, 6] = rng.uniform(-np.pi, np.pi, count)
        return r

    tf = rng.integers(0, 3, m).tolist()
    df = rng.integers(0, 3, n).tolist()
    labels = ["pallet", "person"]
    truth = upright_table(
        rows(m),
        tf,
        [labels[i] for i in rng.integers(0, 2, m)],
        ignore=(rng.random(m) < 0.15).tolist(),
    )
    dets = upright_table(
        rows(n),
        df,
        [labels[i] for i in rng.integers(0, 2, n)],
        scores=(rng.integers(0, 4, n) / 4).tolist(),
    )
    thresholds = [0.5, 1.0, 2.0, 4.0]
    want_out, want_truth = brute_force(truth, dets, thresholds)
    r = match_frames(truth, dets, thresholds=thresholds, criterion="distance")
    assert r.det_outcome.tolist() == want_out.tolist()
    # matched truth as a rank within its frame: map the brute-force global index
    rank = np.array([sum(1 for k in range(j) if tf[k] == tf[j]) for j in range(m)])
    want_rank = np.where(want_truth >= 0, rank[np.maximum(want_truth, 0)], -1)
    assert r.det_truth.tolist() == want_rank.tolist()


def test_every_layout_uses_its_ground_centre():
    # hand-worked centres: axis (0,0,4,2) -> (2,1); rotated -> (cx, cy); polygon: shapely's
    # area centroid; axis3 -> middle of x and y.
    shapely = pytest.importorskip("shapely")
    assert ground_centres(np.array([[0.0, 0.0, 4.0, 2.0]]), "axis").tolist() == [[2.0, 1.0]]
    assert ground_centres(np.array([[0, 0, 0, 4, 2, 9.0]]), "axis3").tolist() == [[2.0, 1.0]]
    rng = np.random.default_rng(3)
    for _ in range(20):
        # a convex quadrilateral: four points on a circle, sorted by angle, far from 0
        a = np.sort(rng.uniform(0, 2 * np.pi, 4))
        poly = np.column_stack([np.cos(a), np.sin(a)]) * rng.uniform(1, 5) + [5e5, 4e6]
        got = ground_centres(poly[None], "polygon")[0]
        want = shapely.Polygon(poly - [5e5, 4e6]).centroid  # reference: shapely, local frame
        assert got == pytest.approx(np.array([want.x, want.y]) + [5e5, 4e6], abs=1e-9)


def test_axis_and_polygon_layouts_match_by_distance():
    # hand-worked: axis truth centred (2, 1); detection shifted by (0.6, 0.8): 1 m away
    truth = {"frame": [0], "label": ["crate"], "x_min": [0.0], "y_min": [0.0],
             "x_max": [4.0], "y_max": [2.0]}  # fmt: skip
    dets = {"frame": [0], "label": ["crate"], "score": [0.7], "x_min": [0.6],
            "y_min": [0.8], "x_max": [4.6], "y_max": [2.8]}  # fmt: skip
    assert evaluate(truth, dets, distance=[0.9, 1.0]).records.det_outcome.tolist() == [[0, 1]]

    # the same boxes as polygons (4 corners)
    def poly(t):
        x0, y0, x1, y1 = (t[k][0] for k in ("x_min", "y_min", "x_max", "y_max"))
        out = {k: t[k] for k in ("frame", "label", "score") if k in t}
        for i, (x, y) in enumerate([(x0, y0), (x1, y0), (x1, y1), (x0, y1)]):
            out[f"px{i}"], out[f"py{i}"] = [x], [y]
        return out

    r = evaluate(poly(truth), poly(dets), distance=[0.9, 1.0]).records
    assert r.det_outcome.tolist() == [[0, 1]]


def test_iou_and_distance_together_is_an_error():
    box = {"frame": [0], "label": ["a"], "cx": [0.0], "cy": [0.0], "width": [1.0],
           "height": [1.0], "angle": [0.0]}  # fmt: skip
    with pytest.raises(InvalidInput) as err:
        evaluate(box, dict(box, score=[1.0]), iou=0.5, distance=1.0)
    assert err.value.argument == "distance"
    with pytest.raises(InvalidInput):
        evaluate(box, dict(box, score=[1.0]), distance=-1.0)
    with pytest.raises(InvalidInput) as err:
        evaluate(box, dict(box, score=[1.0]), bev=True)  # 2D boxes have no footprint
    assert err.value.argument == "bev"


def test_results_say_how_they_were_matched(tmp_path):
    box = [0.0, 0.0, 0.5, 1.0, 1.0, 1.0, 0.0]
    truth = upright_table([box], [0], ["person"])
    dets = upright_table([[0.3, *box[1:]]], [0], ["person"], scores=[0.5])
    ev = evaluate(truth, dets, distance="0.5,1")
    d = ev.to_dict()
    assert d["criterion"] == "distance" and d["rule"]["1"] == "distance ≤ 1 m"
    assert d["mean_ap_by_distance"] == {"0.5": 1.0, "1": 1.0}
    assert "distance" in d["protocol"]["matching"]
    text = ev.summary()
    assert "matched by ground-plane centre distance" in text
    assert "mean AP at distance ≤ 0.5 m: 1.0000" in text
    ev.to_json(tmp_path / "r.json")
    assert json.loads((tmp_path / "r.json").read_text())["criterion"] == "distance"
    iou = evaluate(truth, dets).to_dict()
    assert iou["criterion"] == "iou" and iou["rule"] == {"0.5": "IoU ≥ 0.5"}
    from matplotlib.figure import Figure

    from obbiou.evaluation.plots import draw_curves

    ax = draw_curves(ev, Figure())
    assert "distance ≤ 1 m" in ax.get_title(loc="left")


def test_bev_against_shapely_footprints():
    # reference: shapely areas of the ground-plane rectangles (bird's-eye view)
    shapely = pytest.importorskip("shapely")
    from shapely import affinity

    def footprint_polygon(b):
        r = shapely.box(-b[3] / 2, -b[4] / 2, b[3] / 2, b[4] / 2)  # length along x
        r = affinity.rotate(r, b[6], origin=(0, 0), use_radians=True)
        return affinity.translate(r, b[0], b[1])

    rng = np.random.default_rng(11)
    m = 30
    t = np.column_stack([rng.uniform(0, 10, (m, 2)), rng.uniform(0, 3, m),
                         rng.uniform(1, 5, (m, 3)), rng.uniform(-3, 3, m)])  # fmt: skip
    d = t + np.column_stack([rng.normal(0, 0.6, (m, 2)), rng.normal(0, 2, m),
                             np.zeros((m, 3)), rng.normal(0, 0.3, m)])  # fmt: skip
    frames = list(range(m))  # one pair per frame: the matched value is that pair's IoU
    truth = upright_table(t, frames, ["car"] * m)
    dets = upright_table(d, frames, ["car"] * m, scores=rng.random(m).tolist())
    ev = evaluate(truth, dets, iou=0.05, bev=True)
    want = np.array([
        footprint_polygon(a).intersection(footprint_polygon(b)).area
        / footprint_polygon(a).union(footprint_polygon(b)).area
        for a, b in zip(d, t, strict=True)
    ])  # fmt: skip
    r = ev.records
    assert r.criterion == "bev"
    np.testing.assert_allclose(r.det_best_same, want, atol=1e-12)
    tp = r.det_outcome[:, 0] == 1
    assert tp.tolist() == (want >= 0.05).tolist()
    # 3D IoU differs (the cz noise): bev ignores height, as it should
    assert not np.allclose(evaluate(truth, dets, iou=0.05).records.det_best_same, want)


def test_bev_equals_evaluating_the_footprint_tables():
    # bev=True is the evaluation of the footprints as rotated boxes (footprint puts length
    # into width and width into height): the same outcomes and IoUs, bit for bit
    from obbiou.boxes import footprint

    rng = np.random.default_rng(2)
    m = 40
    t = np.column_stack([rng.uniform(0, 8, (m, 2)), rng.uniform(0, 2, m),
                         rng.uniform(0.5, 3, (m, 3)), rng.uniform(-3, 3, m)])  # fmt: skip
    d = t + rng.normal(0, 0.3, t.shape)
    d[:, 3:6] = np.abs(d[:, 3:6])
    frames = rng.integers(0, 4, m).tolist()
    truth = upright_table(t, frames, ["pallet"] * m)
    dets = upright_table(d, frames, ["pallet"] * m, scores=rng.random(m).tolist())

    def flat(table, boxes):
        f = footprint(boxes)
        out = {k: v for k, v in table.items() if k not in UPRIGHT}
        return {**out, **dict(zip(("cx", "cy", "width", "height", "angle"), f.T, strict=True))}

    a = evaluate(truth, dets, bev=True, iou=[0.3, 0.5, 0.7]).records
    b = evaluate(flat(truth, t), flat(dets, d), iou=[0.3, 0.5, 0.7]).records
    assert np.array_equal(a.det_outcome, b.det_outcome)
    assert np.array_equal(a.det_iou, b.det_iou)
    assert np.array_equal(a.det_best_same, b.det_best_same)


def test_per_row_tables_and_confusion_by_distance():
    # the hand-worked scene of test_hand_worked_nearest_and_tie: judged at the most lenient
    # distance (4 m) by default, the per-row tables give distances, not IoUs: D0 took T0 at
    # 1.5 m, D1 took T1 at 1.6 m; D2 is a background FP at 4 m, with no truth within the
    # largest threshold (nearest <NA>: pairs are only looked for within it); T2 is missed
    truth, dets = three_cars()
    ev = evaluate(truth, dets, distance=[0.5, 1, 2, 4])
    d = ev.detections()
    assert "iou" not in d.columns and d["threshold"].tolist() == [4.0] * 3
    assert d["outcome"].tolist() == ["tp", "tp", "fp"]
    assert d["distance"].tolist()[:2] == pytest.approx([1.5, 1.6])
    assert d["nearest"].tolist()[:2] == pytest.approx([1.5, 1.4])
    assert d["nearest"].isna().tolist() == [False, False, True]
    assert d["cause"].tolist()[2] == "background"
    t = ev.truths()
    assert t["outcome"].tolist() == ["matched", "matched", "missed"]
    assert t["nearest"].isna().tolist() == [False, False, True]
    # at 1 m nothing matches: D0 and D1 are poor localisations (within 4 m, not 1 m)
    assert ev.detections(1.0)["cause"].tolist() == [
        "poor_localisation", "poor_localisation", "background"
    ]  # fmt: skip
    # confusion by distance: labels ignored, the same greedy rule at 4 m
    table = ev.confusion()
    assert table.loc["car", "car"] == 2 and table.loc["car", "(missed)"] == 1
    assert table.loc["(background)", "car"] == 1
    assert ev.confusion(1.0).loc["car", "(missed)"] == 3
