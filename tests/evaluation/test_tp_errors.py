"""Errors of true positives: centre distance, size error (1 - IoU after aligning centre and
heading), orientation error, heading-weighted AP (Sun et al., CVPR 2020) — hand-worked
cases, shapely / scipy for the aligned IoU, scikit-learn-checked AP for 0/1 weights."""

from __future__ import annotations

import math

import numpy as np
import pytest

from obbiou.evaluation import evaluate
from obbiou.evaluation.ap import average_precision, weighted_average_precision
from obbiou.evaluation.matching import aligned_boxes
from obbiou.evaluation.tp_errors import size_error

UPRIGHT = ("cx", "cy", "cz", "length", "width", "height", "yaw")
ROTATED = ("cx", "cy", "width", "height", "angle")


def table(cols, rows, frames, labels, **extra):
    rows = np.asarray(rows, dtype=float).reshape(len(frames), len(cols))
    t = {"frame": list(frames), "label": list(labels), **extra}
    for j, c in enumerate(cols):
        t[c] = rows[:, j]
    return t


def test_same_box_turned_a_quarter_has_no_size_error():
    # hand-worked (by definition): two 4 x 2 boxes on one centre, headings 0 and pi/2 ->
    # aligned to a common heading they coincide: size error 0. Their IoU as given is
    # 4 / 12 (a 2 x 2 overlap), so they are matched at IoU 0.3, not at 0.5.
    truth = table(ROTATED, [[0, 0, 4, 2, 0]], [0], ["van"])
    dets = table(ROTATED, [[0, 0, 4, 2, math.pi / 2]], [0], ["van"], score=[0.9])
    e = evaluate(truth, dets, iou=0.3).tp_error("van")
    assert (e.tp, e.centre_distance, e.size_error) == (1, 0.0, 0.0)
    # rectangles compare angles modulo pi: a quarter turn is the largest error, pi/2
    assert e.orientation_error == pytest.approx(math.pi / 2)
    assert e.heading_ap is None  # heading-weighted AP is for upright boxes only
    assert evaluate(truth, dets, iou=0.5).tp_error("van").tp == 0


def test_heading_weighted_ap_hand_worked():
    # Hand-worked: 2 truths; ranked detections TP (heading error pi/2: weight 1/2), FP.
    # Precision after each: 1/2, 1/4; recall 1/4, 1/4 -> all-points APH = 1/4 * 1/2 = 1/8.
    # Plain AP of the same ranking: 1/2 * 1 = 1/2.
    car = [0, 0, 0.75, 4, 2, 1.5, 0]
    other = [20, 0, 0.75, 4, 2, 1.5, 0]
    truth = table(UPRIGHT, [car, other], [0, 0], ["car"] * 2)
    found = [0.2, 0, 0.75, 4, 2, 1.5, math.pi / 2]
    ghost = [50, 0, 0.75, 4, 2, 1.5, 0]
    dets = table(UPRIGHT, [found, ghost], [0, 0], ["car"] * 2, score=[0.9, 0.3])
    e = evaluate(truth, dets, distance=[1.0]).tp_error("car", 1.0)
    assert e.ap == 0.5
    assert e.heading_ap == pytest.approx(1 / 8)
    assert e.centre_distance == pytest.approx(0.2)
    assert e.size_error == 0.0
    # a reversed heading (pi off) counts nothing: APH 0; the same heading counts fully
    rev = table(UPRIGHT, [[0.2, 0, 0.75, 4, 2, 1.5, math.pi]], [0], ["car"], score=[0.9])
    same = table(UPRIGHT, [[0.2, 0, 0.75, 4, 2, 1.5, 0.0]], [0], ["car"], score=[0.9])
    assert evaluate(truth, rev, distance=[1.0]).tp_error("car").heading_ap == 0.0
    assert evaluate(truth, same, distance=[1.0]).tp_error("car").heading_ap == 0.5


@pytest.mark.parametrize("kind", ["all-points", "11-point", "101-point", "step"])
def test_weighted_ap_with_0_1_weights_is_plain_ap(kind):
    # cross-check: with 0/1 weights the heading-weighted AP is the plain AP (itself tested
    # against scikit-learn in test_ap.py)
    rng = np.random.default_rng(4)
    for _ in range(30):
        tp = rng.random(int(rng.integers(1, 30))) < 0.6
        npos = int(tp.sum() + rng.integers(0, 5)) or 1
        want = average_precision(tp, npos, kind=kind)
        assert weighted_average_precision(tp.astype(float), npos, kind=kind) == pytest.approx(
            want, abs=1e-15
        )


def test_size_error_against_shapely_and_scipy():
    # references: shapely areas of the aligned rectangles (2D); box volumes with
    # scipy.spatial.HalfspaceIntersection / ConvexHull for the aligned upright boxes
    shapely = pytest.importorskip("shapely")
    spatial = pytest.importorskip("scipy.spatial")
    rng = np.random.default_rng(8)
    n = 30
    a = np.column_stack([rng.uniform(-9, 9, (n, 2)), rng.uniform(0.5, 5, (n, 2)),
                         rng.uniform(-3, 3, n)])  # fmt: skip
    b = np.column_stack([rng.uniform(-9, 9, (n, 2)), rng.uniform(0.5, 5, (n, 2)),
                         rng.uniform(-3, 3, n)])  # fmt: skip
    got = size_error(aligned_boxes(a, "rotated"), aligned_boxes(b, "rotated"), "rotated")
    for i in range(n):
        # the long side along x for both, centred: shapely boxes
        pa = shapely.box(-max(a[i, 2:4]) / 2, -min(a[i, 2:4]) / 2, max(a[i, 2:4]) / 2,
                         min(a[i, 2:4]) / 2)  # fmt: skip
        pb = shapely.box(-max(b[i, 2:4]) / 2, -min(b[i, 2:4]) / 2, max(b[i, 2:4]) / 2,
                         min(b[i, 2:4]) / 2)  # fmt: skip
        want = 1 - pa.intersection(pb).area / pa.union(pb).area
        assert got[i] == pytest.approx(want, abs=1e-12)

    u = np.column_stack([rng.uniform(-9, 9, (n, 3)), rng.uniform(0.5, 5, (n, 3)),
                         rng.uniform(-3, 3, n)])  # fmt: skip
    v = np.column_stack([rng.uniform(-9, 9, (n, 3)), rng.uniform(0.5, 5, (n, 3)),
                         rng.uniform(-3, 3, n)])  # fmt: skip
    got3 = size_error(aligned_boxes(u, "upright"), aligned_boxes(v, "upright"), "upright")

    def halfspaces(dims):
        h = np.asarray(dims) / 2
        eye = np.eye(3)
        return np.vstack([np.c_[eye, -h], np.c_[-eye, -h]])  # x_k <= h_k, -x_k <= h_k

    for i in range(n):
        inter = spatial.HalfspaceIntersection(
            np.vstack([halfspaces(u[i, 3:6]), halfspaces(v[i, 3:6])]), np.zeros(3)
        )
        vi = spatial.ConvexHull(inter.intersections).volume
        va, vb = np.prod(u[i, 3:6]), np.prod(v[i, 3:6])
        assert got3[i] == pytest.approx(1 - vi / (va + vb - vi), abs=1e-9)


def test_polygon_size_error_of_a_turned_rectangle():
    # hand-worked: the same 4 x 2 rectangle as corners, turned by 0.7 rad and moved far
    # away: aligned by centroid and longest edge, size error 0 (to rounding)
    c, s = math.cos(0.7), math.sin(0.7)
    rect = np.array([[-2, -1], [2, -1], [2, 1], [-2, 1]], float)
    turned = rect @ np.array([[c, s], [-s, c]]) + [5e5, 4e6]
    a = aligned_boxes(rect[None], "polygon")
    b = aligned_boxes(turned[None], "polygon")
    assert size_error(a, b, "polygon")[0] == pytest.approx(0.0, abs=1e-9)


def test_table_json_and_summary_columns():
    car = [0, 0, 0.75, 4, 2, 1.5, 0]
    truth = table(UPRIGHT, [car], [0], ["car"])
    dets = table(UPRIGHT, [[0.3, 0, 0.75, 4, 2, 1.5, 0]], [0], ["car"], score=[0.9])
    ev = evaluate(truth, dets, distance=[0.5, 1.0])
    df = ev.tp_errors()
    assert list(df.columns) == [
        "label", "threshold", "tp", "centre_distance", "size_error", "orientation_error",
        "ap", "heading_ap",
    ]  # fmt: skip
    assert df["threshold"].tolist() == [0.5, 1.0]
    assert df["centre_distance"].tolist() == pytest.approx([0.3, 0.3])
    assert len(ev.tp_errors(1.0)) == 1
    d = ev.to_dict()["tp_errors"]["car"]["0.5"]
    assert d["tp"] == 1 and d["heading_ap"] == 1.0 and d["size_error"] == 0.0
    # the JSON names the unit of the orientation error: degrees, as the text shows
    assert "orientation_error" not in d
    assert d["orientation_error_deg"] == pytest.approx(np.degrees(df["orientation_error"][0]))
    assert "Errors of true positives" in ev.summary()
    # axis boxes: no orientation, no heading: n/a (None / NaN), not a number
    axis = {"frame": [0], "label": ["crate"], "x_min": [0.0], "y_min": [0.0],
            "x_max": [2.0], "y_max": [1.0]}  # fmt: skip
    e = evaluate(axis, dict(axis, score=[1.0])).tp_error("crate")
    assert (e.orientation_error, e.heading_ap, e.size_error) == (None, None, 0.0)
    assert np.isnan(evaluate(axis, dict(axis, score=[1.0])).tp_errors()["heading_ap"][0])


def test_labels_without_truths_and_empty_tables():
    # a label seen only in the detections: no TP, AP undefined, no error values (None)
    car = [0, 0, 0.75, 4, 2, 1.5, 0]
    truth = table(UPRIGHT, [car], [0], ["car"])
    dets = table(UPRIGHT, [car, car], [0, 0], ["car", "van"], score=[0.9, 0.8])
    ev = evaluate(truth, dets, distance=[1.0])
    e = ev.tp_error("van")
    assert (e.tp, e.centre_distance, e.ap, e.heading_ap) == (0, None, None, None)
    assert ev.to_dict()["tp_errors"]["van"]["1"]["heading_ap"] is None
    empty = {k: v[:0] for k, v in dets.items()}
    assert evaluate(truth, empty, distance=[1.0]).tp_error("car").heading_ap == 0.0
    assert len(evaluate({k: v[:0] for k, v in truth.items()}, empty).tp_errors()) == 0
