"""suppress against plain greedy loops on shapely polygons, and the Soft-NMS formulas.

Outside references: shapely 2.x polygon areas (IoU of each pair; 3D: footprint area x
z-interval overlap); Bodla et al., "Soft-NMS -- Improving Object Detection With One Line of
Code", ICCV 2017 (Algorithm 1 and the linear and gaussian re-scoring functions, eqs. for
s_i); exact rational arithmetic with fractions for the hand-worked IoUs.
"""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from obbiou.scene import suppress
from tests.strategies import FAR, FAR_SIZES, HUGE, TINY, rotated_pair, upright_pair
from tests.test_scene import make_scene, shapely_iou_matrix

LAYOUTS = ("rotated", "axis", "polygon", "upright")
FAMILIES = ("sparse", "clusters", "identical", "far", "mixed sizes")
BAND = 1e-9


def greedy_reference(iou: np.ndarray, scores: np.ndarray, max_iou: float) -> list[int]:
    """Plain hard NMS: by descending score (ties: lower index), keep a box unless a kept
    box overlaps it with IoU > max_iou."""
    order = sorted(range(len(scores)), key=lambda i: (-scores[i], i))
    kept: list[int] = []
    for i in order:
        if all(iou[i, k] <= max_iou for k in kept):
            kept.append(i)
    return kept


def soft_reference(iou, scores, decay, max_iou, sigma, min_score):
    """Soft-NMS as in Bodla et al. (2017), Algorithm 1, with a pruning step: a box whose
    score drops below min_score leaves the set B."""
    s = {i: float(v) for i, v in enumerate(scores) if v >= min_score}
    out = []
    while s:
        m = min(s, key=lambda i: (-s[i], i))
        out.append((m, s.pop(m)))
        for i in list(s):
            o = iou[m, i]
            if decay == "linear":
                f = 1 - o if o > max_iou else 1.0
            else:
                f = math.exp(-(o * o) / sigma) if o > 0 else 1.0
            s[i] *= f
            if s[i] < min_score:
                del s[i]
    return out


def near_threshold(iou: np.ndarray, max_iou: float) -> bool:
    off = ~np.eye(len(iou), dtype=bool)
    return bool(np.any(off & (np.abs(iou - max_iou) <= BAND)))


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    seed=st.integers(0, 2**32 - 1),
    family=st.sampled_from(FAMILIES),
    layout=st.sampled_from(LAYOUTS),
    n=st.sampled_from([0, 1, 2, 10, 50]),
    max_iou=st.sampled_from([0.1, 0.3, 0.5, 0.7]),
    tied=st.booleans(),
)
def test_hard_equals_plain_greedy_on_shapely(seed, family, layout, n, max_iou, tied):
    rng = np.random.default_rng(seed)
    boxes = make_scene(rng, family, layout, n)
    scores = rng.integers(0, 4, n) / 4 if tied else rng.random(n)  # tied: many equal scores
    iou = shapely_iou_matrix(boxes, boxes, layout)  # reference IoU: shapely
    if near_threshold(iou, max_iou):
        return  # rounding could decide either way
    kept = suppress(boxes, scores, shape=layout, max_iou=max_iou)
    assert kept.indices.tolist() == greedy_reference(iou, scores, max_iou)
    np.testing.assert_array_equal(kept.scores, scores[kept.indices])
    assert kept.indices.dtype == np.int64 and kept.scores.dtype == np.float64


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    seed=st.integers(0, 2**32 - 1),
    family=st.sampled_from(FAMILIES),
    layout=st.sampled_from(LAYOUTS),
    n=st.sampled_from([0, 1, 2, 10, 40]),
    decay=st.sampled_from(["linear", "gaussian"]),
    max_iou=st.sampled_from([0.0, 0.3, 0.5]),
    sigma=st.sampled_from([0.1, 0.5, 2.0]),
    min_score=st.sampled_from([0.0, 0.05, 0.3]),
)
def test_soft_equals_algorithm_1_of_bodla(
    seed, family, layout, n, decay, max_iou, sigma, min_score
):
    rng = np.random.default_rng(seed)
    boxes = make_scene(rng, family, layout, n)
    scores = rng.random(n)
    iou = shapely_iou_matrix(boxes, boxes, layout)
    if near_threshold(iou, max_iou if decay == "linear" else 0.0):
        return
    kept = suppress(
        boxes,
        scores,
        shape=layout,
        decay=decay,
        max_iou=max_iou,
        sigma=sigma,
        min_score=min_score,
    )
    ref = soft_reference(iou, scores, decay, max_iou, sigma, min_score)
    # ranks can swap only between scores equal to rounding; compare as sets then in order
    assert sorted(kept.indices.tolist()) == sorted(i for i, _ in ref)
    ref_scores = dict(ref)
    np.testing.assert_allclose(
        kept.scores, [ref_scores[i] for i in kept.indices.tolist()], rtol=1e-7, atol=1e-12
    )
    assert np.all(np.diff(kept.scores) <= 0)


@pytest.mark.parametrize("decay", ["linear", "gaussian"])
@pytest.mark.parametrize("min_score", [0.0, 0.2])
def test_soft_on_a_crowded_scene_equals_algorithm_1(decay, min_score):
    # 400 boxes in tight clusters: many decays per selection and, with min_score, many
    # boxes dropped from the middle of the selection order. Reference: Algorithm 1 of
    # Bodla et al. (2017) on shapely's IoU matrix.
    rng = np.random.default_rng(17)
    boxes = make_scene(rng, "clusters", "rotated", 400)
    scores = rng.random(400)
    iou = shapely_iou_matrix(boxes, boxes, "rotated")
    kept = suppress(boxes, scores, decay=decay, max_iou=0.3, min_score=min_score)
    ref = soft_reference(iou, scores, decay, 0.3, 0.5, min_score)
    assert kept.indices.tolist() == [i for i, _ in ref]
    np.testing.assert_allclose(kept.scores, [v for _, v in ref], rtol=1e-9, atol=1e-12)


# Hand-worked example (axis boxes, invented): exact IoUs by rational arithmetic.
A, B, C, D = [0, 0, 10, 10], [0, 0, 10, 8], [5, 0, 15, 10], [20, 0, 30, 10]
HAND = np.array([A, B, C, D], float)
HAND_SCORES = np.array([0.9, 0.85, 0.6, 0.5])


def test_hand_example_ious_by_fractions():
    # IoU(A,B) = 80 / (100 + 80 - 80) = 4/5; IoU(A,C) = 50 / (100 + 100 - 50) = 1/3;
    # IoU(B,C) = 40 / (80 + 100 - 40) = 2/7; D touches nothing.
    assert Fraction(80, 100 + 80 - 80) == Fraction(4, 5)
    assert Fraction(50, 100 + 100 - 50) == Fraction(1, 3)
    assert Fraction(40, 80 + 100 - 40) == Fraction(2, 7)
    iou = shapely_iou_matrix(HAND, HAND, "axis")
    np.testing.assert_allclose(iou[0, 1:], [4 / 5, 1 / 3, 0], atol=1e-15)
    np.testing.assert_allclose(iou[1, 2], 2 / 7, atol=1e-15)


def test_soft_linear_hand_worked():
    # Bodla et al. (2017), linear: s_i <- s_i (1 - iou(M, b_i)) if iou >= N_t, with N_t = 0.3.
    # 1. M = A (0.90): B 0.85 * (1 - 4/5) = 0.17; C 0.60 * (1 - 1/3) = 0.40.
    # 2. M = D (0.50, untouched).  3. M = C (0.40): iou(C, B) = 2/7 = 0.2857 < 0.3: B stays.
    # 4. M = B (0.17).
    kept = suppress(HAND, HAND_SCORES, decay="linear", max_iou=0.3)
    assert kept.indices.tolist() == [0, 3, 2, 1]
    np.testing.assert_allclose(kept.scores, [0.9, 0.5, 0.4, 0.17], rtol=1e-12)
    # with N_t = 0.25, step 3 also decays B: 0.17 * (1 - 2/7) = 0.12142857...
    kept = suppress(HAND, HAND_SCORES, decay="linear", max_iou=0.25)
    np.testing.assert_allclose(kept.scores, [0.9, 0.5, 0.4, 0.17 * 5 / 7], rtol=1e-12)
    np.testing.assert_allclose(kept.scores[-1], 0.12142857142857143, rtol=1e-12)


def test_soft_gaussian_hand_worked():
    # Bodla et al. (2017), gaussian: s_i <- s_i exp(-iou(M, b_i)^2 / sigma), sigma = 0.5.
    # 1. M = A (0.90): B 0.85 exp(-0.64 / 0.5) = 0.85 * 0.27803730 = 0.23633171;
    #    C 0.60 exp(-(1/9) / 0.5) = 0.60 * 0.80073740 = 0.48044244.
    # 2. M = D (0.50 > 0.4804).  3. M = C: B 0.23633171 * exp(-(4/49) / 0.5)
    #    = 0.23633171 * 0.84936582 = 0.20073208.  4. M = B.
    kept = suppress(HAND, HAND_SCORES, decay="gaussian", sigma=0.5)
    assert kept.indices.tolist() == [0, 3, 2, 1]
    expected = [
        0.9,
        0.5,
        0.6 * math.exp(-(1 / 9) / 0.5),
        0.85 * math.exp(-(16 / 25) / 0.5) * math.exp(-(4 / 49) / 0.5),
    ]
    np.testing.assert_allclose(kept.scores, expected, rtol=1e-12)
    np.testing.assert_allclose(kept.scores[2:], [0.48044244, 0.20073208], atol=5e-9)


def test_soft_min_score_drops_at_once():
    # linear N_t = 0.3, min_score 0.2: B decays to 0.17 < 0.2 in step 1 and is dropped.
    kept = suppress(HAND, HAND_SCORES, decay="linear", max_iou=0.3, min_score=0.2)
    assert kept.indices.tolist() == [0, 3, 2]
    # gaussian, min_score 0.25: B at 0.2363 after step 1 is dropped.
    kept = suppress(HAND, HAND_SCORES, decay="gaussian", min_score=0.25)
    assert kept.indices.tolist() == [0, 3, 2]
    # a box already below min_score takes no part at all
    kept = suppress(HAND, [0.9, 0.85, 0.6, 0.01], decay="gaussian", min_score=0.05)
    assert 3 not in kept.indices.tolist()


def test_hard_hand_worked():
    # max_iou 0.5: A keeps, B (4/5 > 0.5) goes, C (1/3) stays, D stays.
    assert suppress(HAND, HAND_SCORES).indices.tolist() == [0, 2, 3]
    # max_iou 0.3: C (1/3 > 0.3) goes too.
    assert suppress(HAND, HAND_SCORES, max_iou=0.3).indices.tolist() == [0, 3]
    # max_iou 0: anything overlapping a kept box goes; max_iou 1: nothing goes.
    assert suppress(HAND, HAND_SCORES, max_iou=0.0).indices.tolist() == [0, 3]
    assert suppress(HAND, HAND_SCORES, max_iou=1.0).indices.tolist() == [0, 1, 2, 3]


@settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    seed=st.integers(0, 2**32 - 1),
    layout=st.sampled_from(LAYOUTS),
    decay=st.sampled_from([None, "linear", "gaussian"]),
    n=st.sampled_from([1, 10, 60]),
)
def test_per_label_equals_running_per_label(seed, layout, decay, n):
    rng = np.random.default_rng(seed)
    boxes = make_scene(rng, "clusters", layout, n)
    scores = rng.random(n)
    labels = rng.choice(["vessel", "crane", "container"], n)
    got = suppress(boxes, scores, shape=layout, labels=labels, decay=decay, max_iou=0.3)
    parts_i, parts_s = [], []
    for lab in np.unique(labels):
        rows = np.flatnonzero(labels == lab)
        k = suppress(boxes[rows], scores[rows], shape=layout, decay=decay, max_iou=0.3)
        parts_i.append(rows[k.indices])
        parts_s.append(k.scores)
    idx, sc = np.concatenate(parts_i), np.concatenate(parts_s)
    order = np.lexsort((idx, -sc))  # by descending score, ties by input order
    np.testing.assert_array_equal(got.indices, idx[order])
    np.testing.assert_array_equal(got.scores, sc[order])


@settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    seed=st.integers(0, 2**32 - 1),
    decay=st.sampled_from([None, "linear", "gaussian"]),
    limit=st.integers(0, 12),
)
def test_limit_keeps_the_first_selected(seed, decay, limit):
    rng = np.random.default_rng(seed)
    boxes = make_scene(rng, "clusters", "rotated", 40)
    scores = rng.random(40)
    full = suppress(boxes, scores, decay=decay)
    part = suppress(boxes, scores, decay=decay, limit=limit)
    np.testing.assert_array_equal(part.indices, full.indices[:limit])
    np.testing.assert_array_equal(part.scores, full.scores[:limit])


def test_hard_min_score_equals_filtering_first():
    rng = np.random.default_rng(4)
    boxes = make_scene(rng, "clusters", "rotated", 50)
    scores = rng.random(50) - 0.2  # some negative
    rows = np.flatnonzero(scores >= 0.3)
    ref = suppress(boxes[rows], scores[rows])
    got = suppress(boxes, scores, min_score=0.3)
    np.testing.assert_array_equal(got.indices, rows[ref.indices])
    # default 0.0 drops negative scores; -inf keeps them
    assert np.all(scores[suppress(boxes, scores).indices] >= 0)
    everything = suppress(boxes, scores, min_score=-np.inf, max_iou=1.0)
    assert len(everything) == 50


@settings(max_examples=80, deadline=None)
@given(
    st.lists(
        st.one_of(
            st.sampled_from([0.0, -0.0, 0.25, 0.5, 1.0, -3.0]),
            st.floats(-1e300, 1e300, allow_nan=False),
        ),
        max_size=400,
    )
)
def test_score_order_equals_a_stable_sort(values):
    # suppression's score order: descending score, runs of equal scores in index order;
    # reference: numpy's stable (merge) argsort of the negated scores
    from obbiou.scene import score_order

    keys = np.array(values, dtype=np.float64)
    order = score_order(keys)
    np.testing.assert_array_equal(order, np.argsort(-keys, kind="stable"))


def exact_iou(a: np.ndarray, b: np.ndarray) -> Fraction:
    """Exact rational IoU of two rotated (or upright: footprint x z) boxes, from their
    float corners, by exact Sutherland-Hodgman clipping (tests/test_exact.py)."""
    from obbiou.boxes import corners
    from tests.test_exact import exact_measures

    if a.shape[-1] == 5:
        return exact_measures(corners(a), corners(b))[1]
    fa, fb = corners(a[[0, 1, 3, 4, 6]]), corners(b[[0, 1, 3, 4, 6]])
    inter, _ = exact_measures(fa, fb)
    za = (Fraction(a[2]) - Fraction(a[5]) / 2, Fraction(a[2]) + Fraction(a[5]) / 2)
    zb = (Fraction(b[2]) - Fraction(b[5]) / 2, Fraction(b[2]) + Fraction(b[5]) / 2)
    dz = max(min(za[1], zb[1]) - max(za[0], zb[0]), Fraction(0))
    va = exact_measures(fa, fa)[0] * (za[1] - za[0])
    vb = exact_measures(fb, fb)[0] * (zb[1] - zb[0])
    union = va + vb - inter * dz
    return inter * dz / union if union else Fraction(0)


@settings(max_examples=300, deadline=None)
@given(
    pair=st.one_of(
        rotated_pair(),
        rotated_pair(sizes=TINY),
        rotated_pair(sizes=HUGE),
        rotated_pair(centre=FAR, sizes=FAR_SIZES),
        upright_pair(),
    ),
    thr=st.sampled_from([0.0, 0.1, 0.3, 0.5, 0.7, 0.9, 0.99]),
)
def test_cheap_iou_bounds_never_contradict_the_exact_iou(pair, thr):
    # Hard suppression decides "IoU > thr" from cheap bounds where they suffice; the
    # verdict must be the one the exact IoU gives, away from rounding of the threshold.
    # Reference: exact rational arithmetic (fractions) on the boxes' float corners. (Not
    # shapely here: hypothesis found a pair of squares sharing an edge, turned by -pi, for
    # which shapely 2.2 reports the full square as their intersection.)
    from obbiou._kernels.pairs import rect_iou_verdict
    from obbiou.measures import prepare
    from obbiou.shapes import read_boxes

    a, b, _ = pair
    layout = "upright" if a.shape[-1] == 7 else "rotated"
    rows = prepare(read_boxes(np.stack([a, b]), layout)).rows
    ref = exact_iou(a, b)
    for i, j in ((0, 1), (1, 0)):
        verdict = rect_iou_verdict(rows, i, rows, j, thr)
        if verdict == 1:
            assert ref > thr - BAND
        elif verdict == 0:
            assert ref <= thr + BAND


def test_cheap_iou_bounds_decide_clear_cases():
    # clear cases on either side of the threshold are decided without the exact value: a
    # box and a slightly moved and turned copy, and a box moved out by three quarters of
    # its length
    from obbiou._kernels.pairs import rect_iou_verdict
    from obbiou.measures import prepare
    from obbiou.shapes import read_boxes

    boxes = [[0, 0, 20, 10, 0.3], [0.5, 0.2, 20, 10, 0.31], [15, 0, 20, 10, 0.3]]
    rows = prepare(read_boxes(boxes)).rows
    assert rect_iou_verdict(rows, 0, rows, 1, 0.5) == 1  # near duplicates
    assert rect_iou_verdict(rows, 0, rows, 2, 0.5) == 0  # overlap a small part


def test_ties_are_broken_by_input_order_deterministically():
    # five identical vessels with equal scores: the first row wins, whatever the run
    box = [50.0, 20.0, 30.0, 8.0, 0.4]
    boxes = np.array([box] * 5)
    for _ in range(3):
        assert suppress(boxes, [0.7] * 5).indices.tolist() == [0]
    # equal scores of disjoint boxes come out in input order
    boxes = np.array([[i * 100.0, 0, 10, 10, 0] for i in range(6)])
    assert suppress(boxes, [0.5] * 6).indices.tolist() == list(range(6))
    kept = suppress(boxes, [0.5] * 6, decay="gaussian")
    assert kept.indices.tolist() == list(range(6))


def test_upright_uses_3d_iou_and_bev_uses_footprint():
    from obbiou.boxes import footprint

    # two pallets (invented) with the same footprint, stacked: 3D IoU 0, BEV IoU 1
    frame = np.array([[2.0, 1.0, 0.6, 1.2, 0.8, 1.2, 0.1], [2.0, 1.0, 1.8, 1.2, 0.8, 1.2, 0.1]])
    assert suppress(frame, [0.9, 0.8]).indices.tolist() == [0, 1]
    assert suppress(footprint(frame), [0.9, 0.8]).indices.tolist() == [0]


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"scores": [0.5, float("nan")]}, r"scores\[1\]: score is nan"),
        ({"scores": [0.5, float("inf")]}, r"scores\[1\]"),
        ({"scores": [0.5]}, "scores: 1 scores for 2 boxes"),
        ({"scores": [[0.5, 0.4]]}, "scores: expected one score per box"),
        ({"max_iou": 1.2}, r"max_iou: expected a number in \[0, 1\]"),
        ({"max_iou": -0.5}, "max_iou"),
        ({"decay": "cubic"}, "decay: expected None, 'linear' or 'gaussian', got 'cubic'"),
        ({"decay": "gaussian", "sigma": -1.0}, "sigma: expected a positive number"),
        ({"decay": "gaussian", "sigma": 0.0}, "sigma"),
        ({"min_score": float("nan")}, "min_score"),
        ({"labels": [1]}, "labels: 1 labels for 2 boxes"),
        ({"labels": [1.0, float("nan")]}, r"labels\[1\]"),
        ({"labels": [[1, 2]]}, "labels: expected one label per box"),
        ({"labels": ["a", None]}, r"labels\[1\]"),
        ({"limit": -1}, "limit"),
        ({"limit": 2.5}, "limit"),
        ({"decay": "linear", "scores": [0.5, -0.1]}, r"scores\[1\]: negative score"),
    ],
)
def test_bad_input_is_a_clear_value_error(kwargs, message):
    args = {"boxes": [[0, 0, 4, 2, 0.0], [1, 0, 4, 2, 0.1]], "scores": [0.9, 0.8]}
    args.update(kwargs)
    boxes, scores = args.pop("boxes"), args.pop("scores")
    with pytest.raises(ValueError, match=message):
        suppress(boxes, scores, **args)


def test_bad_boxes_name_row():
    with pytest.raises(ValueError, match=r"boxes\[1\]: negative width"):
        suppress([[0, 0, 4, 2, 0.0], [1, 0, -4, 2, 0.1]], [0.9, 0.8])


def test_empty_and_single():
    assert len(suppress(np.zeros((0, 7)), np.zeros(0))) == 0
    k = suppress([1.0, 2.0, 3.0, 1.0, 0.2], 0.4)  # one box, scalar score
    assert k.indices.tolist() == [0] and k.scores.tolist() == [0.4]


def test_parallel_and_serial_kernels_agree(monkeypatch):
    import obbiou.scene

    rng = np.random.default_rng(9)
    boxes = make_scene(rng, "clusters", "rotated", 500)
    scores = rng.random(500)
    labels = rng.integers(0, 3, 500)
    results = []
    for serial_below in (0, 10**9):
        monkeypatch.setattr(obbiou.scene, "_SERIAL_BELOW", serial_below)
        results.append(
            [suppress(boxes, scores, labels=labels, decay=d) for d in (None, "linear", "gaussian")]
        )
    for x, y in zip(results[0], results[1], strict=True):
        np.testing.assert_array_equal(x.indices, y.indices)
        np.testing.assert_array_equal(x.scores, y.scores)


def test_bev_suppression_is_suppression_of_the_footprints():
    # bev=True is suppress(footprint(...)) (the documented composition); hand-worked: two
    # stacked pallets overlap only in the ground plane
    import obbiou

    rng = np.random.default_rng(13)
    up = make_scene(rng, "clusters", "upright", 300)
    scores = rng.random(300)
    got = suppress(up, scores, bev=True, max_iou=0.3)
    want = suppress(obbiou.boxes.footprint(up), scores, max_iou=0.3)
    np.testing.assert_array_equal(got.indices, want.indices)
    stacked = [[5.0, 2.0, 0.5, 1.2, 0.8, 1.0, 0.3], [5.0, 2.0, 2.5, 1.2, 0.8, 1.0, 0.3]]
    assert suppress(stacked, [0.9, 0.8]).indices.tolist() == [0, 1]
    assert suppress(stacked, [0.9, 0.8], bev=True).indices.tolist() == [0]
