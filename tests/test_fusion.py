"""obbiou.fuse: score-weighted fusion of clusters of rotated, upright and axis boxes.

Outside references: hand-worked weighted means (written out beside each check), shapely
2.x polygon areas for the rectangles a fused box stands for, and an independent plain
Python re-implementation of the clustering rule with shapely IoU on jittered scenes.
Hypothesis draws scenes from the shared strategies of ``tests/strategies.py``.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import shapely
from hypothesis import HealthCheck, given, settings

import obbiou
from obbiou.boxes import corners
from obbiou.errors import InvalidInput
from tests.strategies import rotated_boxes, upright_boxes


def same_rectangle(a, b, tol=1e-9) -> float:
    """Area of the symmetric difference of two rotated boxes, relative to a's area (shapely)."""
    pa = shapely.Polygon(corners(np.asarray(a, float), shape="rotated"))
    pb = shapely.Polygon(corners(np.asarray(b, float), shape="rotated"))
    return pa.symmetric_difference(pb).area / pa.area


def angle_gap(a: float, b: float, period: float) -> float:
    """Distance of two angles on the circle of ``period``."""
    d = (a - b) % period
    return min(d, period - d)


# ------------------------------------------------------------------ hand-worked means


def test_rotated_mean_across_the_wrap_hand_worked():
    # Two copies of a 30 x 10 vessel on either side of the wrap at +-pi/2, scores 0.9 and
    # 0.3 (weights 3:1). Hand-worked circular mean (period pi): the doubled angles are
    # pi - 0.08 and -pi + 0.08; the weighted vector sum is (-1.2 cos 0.08, 0.6 sin 0.08), so
    # the mean doubled angle is pi - atan(0.5 tan 0.08) and the angle pi/2 - atan(0.5 tan
    # 0.08) / 2. Centre y (along the long sides): (3 * 50 + 1 * 54) / 4 = 51; width
    # (3 * 30 + 1 * 34) / 4 = 31.
    a = [100.0, 50.0, 30.0, 10.0, math.pi / 2 - 0.04]
    b = [100.0, 54.0, 34.0, 10.0, -math.pi / 2 + 0.04]
    f = obbiou.fuse([a, b], [0.9, 0.3])
    assert len(f) == 1
    want = math.pi / 2 - math.atan(0.5 * math.tan(0.08)) / 2
    box = f.boxes[0]
    np.testing.assert_allclose(box[:4], [100.0, 51.0, 31.0, 10.0], rtol=0, atol=1e-12)
    assert angle_gap(box[4], want, math.pi) < 1e-12
    assert -math.pi / 2 <= box[4] < math.pi / 2
    # the plain column mean would be far off: (3 (pi/2 - 0.04) + (-pi/2 + 0.04)) / 4 ~ 0.76
    assert angle_gap(box[4], (3 * a[4] + b[4]) / 4, math.pi) > 0.7
    assert f.scores[0] == pytest.approx(0.6)  # (0.9 + 0.3) / 2, expected=1


def test_swapped_sides_agree_hand_worked():
    # 30 x 10 at 89 deg, 10 x 30 at -1 deg and 10 x 30 at 179 deg are one rectangle at one
    # centre: each later box takes its sides swapped (turned by pi/2) to align with the
    # first. Equal scores: the mean is the rectangle itself (hand-worked), whatever the
    # description; checked by shapely area of the symmetric difference.
    rect = [200.0, 80.0, 30.0, 10.0, math.radians(89)]
    same = [
        rect,
        [200.0, 80.0, 10.0, 30.0, math.radians(-1)],
        [200.0, 80.0, 10.0, 30.0, math.radians(179)],
    ]
    f = obbiou.fuse(same, [0.5, 0.5, 0.5])
    assert len(f) == 1 and f.counts.tolist() == [3]
    np.testing.assert_allclose(f.boxes[0, 2:4], [30.0, 10.0], rtol=0, atol=1e-12)
    assert same_rectangle(f.boxes[0], rect) < 1e-9


def test_jittered_swapped_copies_hand_worked():
    # Copies jittered in centre, size and angle; the second and third describe their
    # rectangles with the sides swapped. Aligned (width, height, angle):
    #   (40, 12, 0.10) w 0.8;  (42, 12, 0.14) w 0.6 [given 12 x 42 at 0.14 - pi/2];
    #   (38, 14, 0.06) w 0.2 [given 14 x 38 at 0.06 + pi/2].
    # Hand-worked: sum of weights 1.6; cx = (0.8*10 + 0.6*12 + 0.2*8) / 1.6 = 10.5;
    # cy = (0.8*5 + 0.6*6 + 0.2*7) / 1.6 = 5.625; width = (32 + 25.2 + 7.6) / 1.6 = 40.5;
    # height = (9.6 + 7.2 + 2.8) / 1.6 = 12.25; angle = atan2(sum w sin 2t, sum w cos 2t) / 2.
    boxes = [
        [10.0, 5.0, 40.0, 12.0, 0.10],
        [12.0, 6.0, 12.0, 42.0, 0.14 - math.pi / 2],
        [8.0, 7.0, 14.0, 38.0, 0.06 + math.pi / 2],
    ]
    w = np.array([0.8, 0.6, 0.2])
    t = np.array([0.10, 0.14, 0.06])
    angle = math.atan2((w * np.sin(2 * t)).sum(), (w * np.cos(2 * t)).sum()) / 2
    f = obbiou.fuse(boxes, w, expected=4)
    assert len(f) == 1
    np.testing.assert_allclose(f.boxes[0], [10.5, 5.625, 40.5, 12.25, angle], rtol=0, atol=1e-12)
    # score: mean 1.6 / 3 times min(3, 4) / 4
    assert f.scores[0] == pytest.approx(1.6 / 3 * 3 / 4)
    assert f.members_of(0).tolist() == [0, 1, 2]


def test_upright_headings_across_pi_hand_worked():
    # Headings 179 deg and -179 deg, scores 0.9 and 0.3: the weighted vector sum is
    # (-1.2 cos 1deg, 0.6 sin 1deg), heading pi - atan(0.5 tan 1deg) (hand-worked). Length
    # and width are averaged as given (a heading: never swapped): (3*4.0 + 4.4) / 4 = 4.1.
    a = [10.0, 2.0, 0.8, 4.0, 1.8, 1.6, math.radians(179)]
    b = [10.4, 2.0, 0.8, 4.4, 1.8, 1.6, math.radians(-179)]
    f = obbiou.fuse([a, b], [0.9, 0.3])
    want = math.pi - math.atan(0.5 * math.tan(math.radians(1)))
    box = f.boxes[0]
    np.testing.assert_allclose(box[:6], [10.1, 2.0, 0.8, 4.1, 1.8, 1.6], rtol=0, atol=1e-12)
    assert angle_gap(box[6], want, 2 * math.pi) < 1e-12
    assert -math.pi <= box[6] < math.pi


def test_upright_heading_is_not_folded():
    # Cubes with headings 0 deg and 170 deg, equal weights (they overlap: a square turned by
    # 170 deg is one turned by 10 deg). Hand-worked: on the circle of period 2 pi the mean
    # heading is 85 deg; folding with period pi (as for rectangles) would give 175 deg.
    a = [0.0, 0.0, 0.0, 2.0, 2.0, 2.0, 0.0]
    b = [0.0, 0.0, 0.0, 2.0, 2.0, 2.0, math.radians(170)]
    f = obbiou.fuse([a, b], [0.5, 0.5], min_iou=0.3)
    assert len(f) == 1
    assert angle_gap(f.boxes[0, 6], math.radians(85), 2 * math.pi) < 1e-12


def test_axis_first_cluster_not_best_hand_worked():
    # a = [0,0,10,10] (0.9) and b = [4,0,14,10] (0.8): IoU 60/140 = 0.43 < 0.5, two
    # clusters. c = [3,0,13,10] (0.7): IoU with a 70/130 = 0.54, with b 90/110 = 0.82; it
    # joins the first cluster made (a's), not the best. Fused a+c (hand-worked):
    # x_min = (0.9*0 + 0.7*3) / 1.6 = 1.3125, x_max = (0.9*10 + 0.7*13) / 1.6 = 11.3125.
    boxes = [[0, 0, 10, 10], [4, 0, 14, 10], [3, 0, 13, 10]]
    f = obbiou.fuse(boxes, [0.9, 0.8, 0.7], min_iou=0.5, expected=2)
    assert len(f) == 2
    np.testing.assert_allclose(f.boxes[0], [1.3125, 0, 11.3125, 10], rtol=0, atol=1e-12)
    np.testing.assert_array_equal(f.boxes[1], [4, 0, 14, 10])
    assert f.members_of(0).tolist() == [0, 2] and f.members_of(1).tolist() == [1]
    # scores: mean 0.8 * min(2, 2)/2 = 0.8; 0.8 * 1/2 = 0.4
    np.testing.assert_allclose(f.scores, [0.8, 0.4])


def test_axis3_coordinates_hand_worked():
    a = [0, 0, 0, 2, 2, 2]
    b = [0.2, 0, 0, 2.2, 2, 2]
    f = obbiou.fuse([a, b], [0.25, 0.75])
    # x: (0.25*0 + 0.75*0.2) / 1 = 0.15, x_max 2.15 (hand-worked)
    np.testing.assert_allclose(f.boxes[0], [0.15, 0, 0, 2.15, 2, 2], rtol=0, atol=1e-12)


def test_labels_keep_clusters_apart():
    box = [50.0, 50.0, 20.0, 8.0, 0.3]
    f = obbiou.fuse([box, box, box], [0.9, 0.8, 0.7], labels=["ship", "crane", "ship"])
    assert len(f) == 2
    assert f.labels.tolist() == ["ship", "crane"]
    assert [f.members_of(k).tolist() for k in range(2)] == [[0, 2], [1]]


def test_single_member_is_the_box_bit_for_bit():
    boxes = np.array([[1e6 + 0.1, 2e6 + 0.3, 3.3, 1.1, 2.9], [0.0, 0.0, 1.0, 1.0, 0.0]])
    f = obbiou.fuse(boxes, [0.4, 0.9])
    assert f.boxes.tolist() == boxes[[1, 0]].tolist()  # angle 2.9 kept as given
    assert f.scores.tolist() == [0.9, 0.4]


def test_empty_and_identical():
    f = obbiou.fuse(np.zeros((0, 7)), [])
    assert len(f) == 0 and f.boxes.shape == (0, 7) and f.offsets.tolist() == [0]
    f = obbiou.fuse(np.zeros((0, 5)), np.zeros(0), labels=np.zeros(0, int))
    assert f.labels.shape == (0,)
    box = [3.0, 4.0, 5.0, 2.0, -1.0]
    f = obbiou.fuse([box] * 4, [0.25] * 4, expected=2)
    assert len(f) == 1 and f.scores[0] == pytest.approx(0.25)
    assert same_rectangle(f.boxes[0], box) < 1e-12


@pytest.mark.parametrize(
    "call, argument",
    [
        (lambda: obbiou.fuse([[[0, 0], [1, 0], [0, 1]]], [1.0]), "boxes"),
        (lambda: obbiou.fuse([[0, 0, 1, 1]], [0.0]), "scores"),
        (lambda: obbiou.fuse([[0, 0, 1, 1]], [-0.5]), "scores"),
        (lambda: obbiou.fuse([[0, 0, 1, 1]], [float("nan")]), "scores"),
        (lambda: obbiou.fuse([[0, 0, 1, 1]], [0.5, 0.5]), "scores"),
        (lambda: obbiou.fuse([[0, 0, 1, 1]], [0.5], min_iou=1.5), "min_iou"),
        (lambda: obbiou.fuse([[0, 0, 1, 1]], [0.5], expected=0), "expected"),
        (lambda: obbiou.fuse([[0, 0, 1, 1]], [0.5], expected=1.5), "expected"),
        (lambda: obbiou.fuse([[0, 0, 1, 1]], [0.5], labels=[1, 2]), "labels"),
        (lambda: obbiou.fuse([[0, 0, 1, 1]], [0.5], labels=[None]), "labels"),
    ],
)
def test_bad_input(call, argument):
    with pytest.raises(InvalidInput) as err:
        call()
    assert err.value.argument == argument


def test_bad_boxes_name_the_row():
    with pytest.raises(ValueError, match=r"boxes\[1\]: negative width"):
        obbiou.fuse([[0, 0, 1, 1, 0], [0, 0, -1, 1, 0]], [0.5, 0.5])


def test_scores_row_in_error():
    with pytest.raises(InvalidInput) as err:
        obbiou.fuse([[0, 0, 1, 1], [0, 0, 1, 1]], [0.5, 0.0])
    assert err.value.row == 1 and "needs scores > 0" in str(err.value)


# ------------------------------------------------------------------ independent reference


def _reference(boxes, scores, min_iou):
    """The clustering rule written out plainly: shapely IoU against every cluster's current
    fused box, weighted sums with the side alignment of the docstring."""
    polys = lambda b: shapely.Polygon(corners(np.asarray(b, float), shape="rotated"))  # noqa: E731
    order = sorted(range(len(boxes)), key=lambda i: -scores[i])  # stable: ties by index
    clusters = []  # [members, sums, fused]
    for i in order:
        cx, cy, w, h, t = boxes[i]
        target = None
        for cl in clusters:
            pa, pb = polys(boxes[i]), polys(cl[2])
            inter = pa.intersection(pb).area
            union = pa.area + pb.area - inter
            if union > 0 and inter / union >= min_iou:
                target = cl
                break
        if target is None:
            target = [[], np.zeros(7), list(boxes[i])]
            clusters.append(target)
        d = (t - target[2][4] + math.pi / 2) % math.pi - math.pi / 2
        if abs(d) > math.pi / 4:
            w, h, t = h, w, t + math.pi / 2
        s = scores[i]
        target[0].append(i)
        target[1] += s * np.array([cx, cy, w, h, math.cos(2 * t), math.sin(2 * t), 1.0])
        if len(target[0]) > 1:
            sm = target[1]
            ang = math.atan2(sm[5], sm[4]) / 2
            target[2] = [sm[0] / sm[6], sm[1] / sm[6], sm[2] / sm[6], sm[3] / sm[6], ang]
    return clusters


def test_jittered_scene_against_plain_reference():
    rng = np.random.default_rng(7)
    k = 60
    objects = np.column_stack(
        [
            rng.uniform(0, 2000, (k, 2)),
            rng.uniform(20, 60, k),
            rng.uniform(6, 18, k),
            rng.uniform(-math.pi, math.pi, k),
        ]
    )
    boxes = np.repeat(objects, 4, axis=0)
    m = len(boxes)
    boxes[:, :2] += rng.normal(0, 1.5, (m, 2))
    boxes[:, 2:4] *= 1 + rng.normal(0, 0.04, (m, 2))
    boxes[:, 4] += rng.normal(0, 0.05, m)
    swap = rng.random(m) < 0.5  # describe half of them with the sides swapped
    boxes[swap] = boxes[swap][:, [0, 1, 3, 2, 4]] + [0, 0, 0, 0, math.pi / 2]
    scores = rng.uniform(0.05, 1.0, m)
    f = obbiou.fuse(boxes, scores)
    ref = _reference(boxes.tolist(), scores.tolist(), 0.55)
    assert len(f) == len(ref)
    got = {tuple(f.members_of(q).tolist()): f.boxes[q] for q in range(len(f))}
    for members, _, fused in ref:
        assert tuple(members) in got
        assert same_rectangle(got[tuple(members)], fused) < 1e-9


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(rotated_boxes(min_n=0, max_n=12))
def test_members_partition_the_rows(boxes):
    scores = np.linspace(1.0, 0.1, len(boxes)) if len(boxes) else np.zeros(0)
    f = obbiou.fuse(boxes, scores, shape="rotated")
    assert sorted(f.members.tolist()) == list(range(len(boxes)))
    assert f.offsets[-1] == len(boxes) and (np.diff(f.offsets) >= 1).all()
    assert np.all(np.diff(f.scores) <= 0)  # by descending fused score
    for q in range(len(f)):
        rows = f.members_of(q)
        assert np.all(np.diff(scores[rows]) <= 0)  # members by descending score
        if len(rows) == 1:
            assert f.boxes[q].tolist() == boxes[rows[0]].tolist()


@settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(upright_boxes(min_n=1, max_n=10))
def test_upright_fused_yaw_in_range(boxes):
    f = obbiou.fuse(boxes, np.full(len(boxes), 0.5), shape="upright", min_iou=0.1)
    multi = f.counts > 1
    assert np.all((f.boxes[multi, 6] >= -math.pi) & (f.boxes[multi, 6] < math.pi))
    assert np.all(np.isfinite(f.boxes))
