"""AP variants against outside references: scikit-learn and Everingham et al. (IJCV 2010)."""

from fractions import Fraction

import numpy as np
import pytest
from sklearn.metrics import average_precision_score

from obbiou.evaluation import evaluate
from obbiou.evaluation.ap import average_precision, curve
from obbiou.evaluation.bootstrap import LabelRanking, resampled_ap

# A hand-worked ranking: 10 detections, 5 positives (one is never found).
#   rank   1  2  3  4  5  6  7  8  9  10
#   TP?    T  F  T  T  F  F  T  F  F  F
# precision at the TPs: 1/1, 2/3, 3/4, 4/7; recall 0.2, 0.4, 0.6, 0.8.
RANKING = [True, False, True, True, False, False, True, False, False, False]
NPOS = 5


def test_all_points_hand_worked():
    # Everingham et al., IJCV 2010 (and the later challenge years): area under the monotone
    # envelope p̂(r) = max{p_i : r_i >= r}. Envelope at the TPs: 1, 3/4, 3/4, 4/7.
    # AP = 0.2 * (1 + 3/4 + 3/4 + 4/7) = 43/70
    expected = Fraction(1, 5) * (1 + Fraction(3, 4) + Fraction(3, 4) + Fraction(4, 7))
    assert expected == Fraction(43, 70)
    assert average_precision(RANKING, NPOS) == pytest.approx(float(expected), abs=1e-15)


def test_eleven_point_hand_worked():
    # Everingham et al., IJCV 2010, eq. 1: AP = 1/11 * sum over r in {0, 0.1, ..., 1} of
    # p_interp(r) = max{p_i : r_i >= r}.
    #   r = 0, 0.1, 0.2 -> 1;  0.3, 0.4 -> 3/4;  0.5, 0.6 -> 3/4;  0.7, 0.8 -> 4/7;
    #   0.9, 1.0 -> 0 (recall 0.8 is the highest reached)
    # AP = (3 * 1 + 4 * 3/4 + 2 * 4/7) / 11 = (6 + 8/7) / 11 = 50/77
    expected = (3 + 4 * Fraction(3, 4) + 2 * Fraction(4, 7)) / 11
    assert expected == Fraction(50, 77)
    assert average_precision(RANKING, NPOS, kind="11-point") == pytest.approx(
        float(expected), abs=1e-15
    )


def test_101_point_and_step_hand_worked():
    # 101 levels q/100 (common practice, no source): q = 0..20 -> 1 (21 levels),
    # 21..60 -> 3/4 (40), 61..80 -> 4/7 (20), 81..100 -> 0. AP = (21 + 30 + 80/7) / 101
    expected = (21 + 40 * Fraction(3, 4) + 20 * Fraction(4, 7)) / 101
    assert average_precision(RANKING, NPOS, kind="101-point") == pytest.approx(
        float(expected), abs=1e-15
    )
    # plain step sum: 0.2 * (1 + 2/3 + 3/4 + 4/7) = 251/420
    step = Fraction(1, 5) * (1 + Fraction(2, 3) + Fraction(3, 4) + Fraction(4, 7))
    assert average_precision(RANKING, NPOS, kind="step") == pytest.approx(float(step), abs=1e-15)
    # recall_points=11 is the 11-point definition
    assert average_precision(RANKING, NPOS, recall_points=11) == pytest.approx(50 / 77)


@pytest.mark.parametrize("seed", range(8))
def test_step_sum_equals_sklearn(seed):
    # scikit-learn average_precision_score (step sum sum_n (R_n - R_{n-1}) P_n) equals our
    # step sum when every positive is retrieved and scores are distinct.
    rng = np.random.default_rng(seed)
    n = int(rng.integers(1, 200))
    y = rng.random(n) < rng.uniform(0.05, 0.95)
    if not y.any():
        y[0] = True
    scores = rng.random(n)
    order = np.argsort(-scores, kind="stable")
    ours = average_precision(y[order], int(y.sum()), kind="step")
    assert ours == pytest.approx(average_precision_score(y, scores), abs=1e-12)


@pytest.mark.parametrize("seed", range(4))
def test_evaluate_step_equals_sklearn(seed):
    # End to end: each detection is either an exact copy of a distinct truth (TP) or far
    # away (FP), every truth is detected; then evaluate(ap="step") must equal scikit-learn's
    # average_precision_score on (is_tp, score).
    rng = np.random.default_rng(100 + seed)
    n_truth = int(rng.integers(5, 60))
    n_fp = int(rng.integers(0, 60))
    frames = rng.integers(0, 6, n_truth)
    cx, cy = rng.uniform(0, 100, n_truth) * 10, rng.uniform(0, 100, n_truth) * 10
    w, h, a = rng.uniform(1, 5, n_truth), rng.uniform(1, 5, n_truth), rng.uniform(-3, 3, n_truth)
    truth = dict(frame=frames, label=["boat"] * n_truth, cx=cx, cy=cy, width=w, height=h, angle=a)
    fp_frames = rng.integers(0, 6, n_fp)
    det = {
        "frame": np.r_[frames, fp_frames],
        "label": ["boat"] * (n_truth + n_fp),
        "score": rng.random(n_truth + n_fp),
        "cx": np.r_[cx, rng.uniform(2000, 3000, n_fp)],
        "cy": np.r_[cy, rng.uniform(2000, 3000, n_fp)],
        "width": np.r_[w, np.ones(n_fp)],
        "height": np.r_[h, np.ones(n_fp)],
        "angle": np.r_[a, np.zeros(n_fp)],
    }
    ev = evaluate(truth, det, ap="step")
    y = np.r_[np.ones(n_truth, bool), np.zeros(n_fp, bool)]
    assert ev.counts("boat").tp == n_truth
    assert ev.ap("boat") == pytest.approx(average_precision_score(y, det["score"]), abs=1e-12)


def test_edge_cases():
    assert average_precision([], 4) == 0.0  # positives, no detections
    assert average_precision([False, False], 4) == 0.0
    assert average_precision([True], 0) is None  # no positives: undefined, not NaN
    assert average_precision([True, True], 2) == 1.0
    with pytest.raises(ValueError, match="exceed"):
        average_precision([True, True], 1)
    with pytest.raises(ValueError, match="unknown AP kind"):
        average_precision([True], 1, kind="area")


def test_curve():
    c = curve(RANKING, NPOS, scores=np.linspace(1, 0, 10))
    assert c.precision[6] == pytest.approx(4 / 7)
    assert c.recall[-1] == pytest.approx(0.8)
    assert len(c.scores) == 10


@pytest.mark.parametrize("kind,points", [(0, 0), (1, 0), (2, 11), (2, 101), (2, 7)])
def test_resampling_kernel_with_unit_weights_equals_numpy(kind, points):
    # The numba bootstrap kernel with every frame drawn once must give the plain AP.
    rng = np.random.default_rng(kind * 100 + points)
    n, nk, nframes = 300, 3, 20
    tp = rng.random((n, nk)) < np.array([0.6, 0.4, 0.1])
    fp = ~tp
    frames = rng.integers(0, nframes, n)
    npos = int(tp.sum(axis=0).max()) + 7
    positives = np.zeros(nframes)
    positives[0] = npos
    r = LabelRanking(frames, tp, fp, positives)
    got = resampled_ap(r, np.ones((1, nframes), dtype=np.int32), kind, points)[0]
    name = {0: "all-points", 1: "step", 2: "all-points"}[kind]
    for k in range(nk):
        want = average_precision(tp[:, k], npos, kind=name, recall_points=points or None)
        assert got[k] == pytest.approx(want, abs=1e-12)
