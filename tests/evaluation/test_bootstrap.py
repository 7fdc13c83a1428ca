"""Bootstrap intervals over frames and the paired comparison of two detectors."""

import numpy as np
import pytest

from obbiou.evaluation import compare, evaluate
from obbiou.evaluation.bootstrap import frame_weights


def scene(nframes, seed, *, noise=0.6, hit=0.75):
    """Synthetic rotated-box frames (invented test data) with a noisy simulated detector."""
    rng = np.random.default_rng(seed)
    t = {k: [] for k in ("frame", "label", "cx", "cy", "width", "height", "angle")}
    d = {k: [] for k in ("frame", "label", "score", "cx", "cy", "width", "height", "angle")}
    for f in range(nframes):
        nt = int(rng.integers(1, 8))
        cx, cy = rng.uniform(0, 200, nt), rng.uniform(0, 200, nt)
        w, h, a = rng.uniform(4, 10, nt), rng.uniform(2, 5, nt), rng.uniform(-3, 3, nt)
        lab = rng.choice(["ship", "crane"], nt)
        for k, v in zip(("cx", "cy", "width", "height", "angle"), (cx, cy, w, h, a), strict=True):
            t[k] += list(v)
        t["frame"] += [f] * nt
        t["label"] += list(lab)
        found = rng.random(nt) < hit
        nfa = int(rng.integers(0, 3))
        n = int(found.sum()) + nfa
        d["frame"] += [f] * n
        d["label"] += list(lab[found]) + list(rng.choice(["ship", "crane"], nfa))
        d["score"] += list(rng.uniform(0.3, 1.0, found.sum())) + list(rng.uniform(0, 0.8, nfa))
        d["cx"] += list(cx[found] + rng.normal(0, noise, found.sum())) + list(
            rng.uniform(0, 200, nfa)
        )
        d["cy"] += list(cy[found] + rng.normal(0, noise, found.sum())) + list(
            rng.uniform(0, 200, nfa)
        )
        d["width"] += list(w[found]) + [5.0] * nfa
        d["height"] += list(h[found]) + [3.0] * nfa
        d["angle"] += list(a[found] + rng.normal(0, 0.05, found.sum())) + [0.0] * nfa
    return t, d


def copied_frames(truth, dets, counts):
    """The tables with frame f copied counts[f] times, each copy a frame of its own."""
    t2 = {k: [] for k in truth}
    d2 = {k: [] for k in dets}
    for f, count in enumerate(counts):
        for c in range(count):
            for src, dst in ((truth, t2), (dets, d2)):
                rows = [i for i, fr in enumerate(src["frame"]) if fr == f]
                for k in src:
                    dst[k] += [f"{f}-{c}" if k == "frame" else src[k][i] for i in rows]
    return t2, d2


def test_interval_contains_estimate_and_is_reproducible():
    ev = evaluate(*scene(120, 0), iou=[0.5, 0.7])
    lo, hi = ev.interval(resamples=300, seed=4)
    assert lo <= ev.mean_ap() <= hi
    assert (lo, hi) == ev.interval(resamples=300, seed=4)  # same seed, same interval
    assert (lo, hi) != ev.interval(resamples=300, seed=5)
    lo_l, hi_l = ev.interval("ship", 0.5, resamples=300, seed=4)
    assert lo_l <= ev.ap("ship", 0.5) <= hi_l
    assert ev.interval(level=0.5, resamples=300)[1] - ev.interval(level=0.5, resamples=300)[0] < (
        hi - lo
    )


def test_interval_shrinks_as_frames_grow():
    small = evaluate(*scene(40, 1))
    large = evaluate(*scene(640, 1))
    w_small = np.subtract(*small.interval(resamples=300)[::-1])
    w_large = np.subtract(*large.interval(resamples=300)[::-1])
    # the standard error falls like 1/sqrt(frames): 16x the frames, about 1/4 the width
    assert w_large < 0.6 * w_small


@pytest.mark.parametrize("kind", ["all-points", "101-point", "step"])
def test_resample_equals_evaluation_of_copied_frames(kind):
    # A resample that draws frame f w_f times must give the AP of a data set in which frame f
    # is literally copied w_f times (copies as new frames), evaluated from scratch.
    truth, dets = scene(25, 2)
    ev = evaluate(truth, dets, iou=[0.5, 0.75], ap=kind)
    w = frame_weights(len(ev.frames), 3, seed=9)
    got = ev._resampled(w, None, None)
    for b in range(3):
        t2, d2 = copied_frames(truth, dets, w[b])
        direct = evaluate(t2, d2, iou=[0.5, 0.75], ap=kind)
        assert got[b] == pytest.approx(direct.mean_ap(), abs=1e-12)


def test_compare_same_detector_and_a_better_one():
    truth, dets = scene(150, 3)
    same = compare(truth, dets, dets, resamples=200)
    assert same.difference == 0.0 and same.interval == (0.0, 0.0) and same.p_value == 1.0
    _, worse = scene(150, 3, noise=1.6, hit=0.5)
    c = compare(truth, worse, dets, resamples=400, seed=2)
    assert c.difference > 0
    lo, hi = c.interval
    assert 0 < lo <= c.difference <= hi
    assert c.p_value < 0.01
    d = c.to_dict()
    assert d["difference"] == c.difference and "p_value" in d
    assert "B - A" in c.summary()
    # paired: the same frames drive both sides, so the reversed comparison mirrors it
    r = compare(truth, dets, worse, resamples=400, seed=2)
    assert r.difference == -c.difference
    assert r.interval == pytest.approx((-hi, -lo))


def test_compare_per_label():
    # B differs from A only on ships: cranes must come out identical (difference 0,
    # interval (0, 0), p = 1: every resampled difference is 0, as far from 0 as the
    # observed one; hand-worked from the definition of p in compare's docstring)
    truth, dets = scene(150, 4)
    _, worse = scene(150, 4, noise=1.6, hit=0.5)
    ships = {
        k: [v for v, lab in zip(worse[k], worse["label"], strict=True) if lab == "ship"]
        for k in worse
    }
    cranes = {
        k: [v for v, lab in zip(dets[k], dets["label"], strict=True) if lab == "crane"]
        for k in dets
    }
    mixed = {k: ships[k] + cranes[k] for k in dets}
    c = compare(truth, mixed, dets, resamples=300, seed=1)
    crane = c.labels["crane"]
    assert crane.difference == 0.0 and crane.interval == (0.0, 0.0) and crane.p_value == 1.0
    ship = c.labels["ship"]
    assert ship.difference == c.b.ap("ship") - c.a.ap("ship") > 0
    assert ship.interval[0] <= ship.difference <= ship.interval[1]
    # the mean of the per-label differences is the mAP difference (mAP = mean over labels)
    assert np.mean([v.difference for v in c.labels.values()]) == pytest.approx(c.difference)
    assert "By label" in c.summary() and set(c.to_dict()["labels"]) == {"crane", "ship"}


def test_per_label_resample_equals_evaluation_of_copied_frames():
    # as above, per label: a resample of one label's AP is that label's AP on a data set
    # with frame f copied w_f times
    truth, dets = scene(20, 5)
    ev = evaluate(truth, dets, iou=[0.5, 0.75])
    w = frame_weights(len(ev.frames), 2, seed=3)
    got = ev.resampled_ap(w, "ship")
    for b in range(2):
        t2, d2 = copied_frames(truth, dets, w[b])
        assert got[b] == pytest.approx(evaluate(t2, d2, iou=[0.5, 0.75]).ap("ship"), abs=1e-12)
