"""Lidar points in evaluation: counts per truth (hand-worked, scipy and shapely containment),
truths with too few points set aside as ignore truths, JSON and text."""

from __future__ import annotations

import warnings

import numpy as np
import pytest

from obbiou.errors import InvalidInput, InvalidTable, LikelyMistake
from obbiou.evaluation import evaluate
from obbiou.evaluation.point_counts import count_truth_points
from obbiou.tables import read_table

UPRIGHT = ("cx", "cy", "cz", "length", "width", "height", "yaw")


def upright(rows, frames, labels, **extra):
    rows = np.asarray(rows, dtype=float).reshape(-1, 7)
    t = {"frame": list(frames), "label": list(labels), **extra}
    for j, c in enumerate(UPRIGHT):
        t[c] = rows[:, j]
    return t


def test_hand_worked_counts_on_faces_and_frames():
    # Hand-worked: pallet 2 x 1 x 1 m centred (0, 0, 0.5), yaw 0, in frames "a" and "b".
    # Frame "a": a point on the front face (1, 0, 0.5), a corner (-1, -0.5, 0), the
    # centre, and one beyond the top (0, 0, 1.0001) -> 3. Frame "b": none of those, one
    # point at the centre -> 1. Points of frame "c" belong to no truth.
    box = [0.0, 0.0, 0.5, 2.0, 1.0, 1.0, 0.0]
    truth = read_table(upright([box, box], ["a", "b"], ["pallet"] * 2), role="truth")
    pts = {
        "frame": ["a", "a", "a", "a", "b", "c"],
        "x": [1.0, -1.0, 0.0, 0.0, 0.0, 0.0],
        "y": [0.0, -0.5, 0.0, 0.0, 0.0, 0.0],
        "z": [0.5, 0.0, 0.5, 1.0001, 0.5, 0.5],
    }
    assert count_truth_points(truth, pts).tolist() == [3, 1]
    # without z: counted in the ground-plane footprint (the point above the top counts)
    flat = {k: v for k, v in pts.items() if k != "z"}
    assert count_truth_points(truth, flat).tolist() == [4, 1]


def test_counts_against_scipy_and_shapely_on_random_frames():
    # references: scipy.spatial.Delaunay of the box corners (3D) and shapely's contains_xy
    # on the rotated footprint (2D); points drawn at random, so none lies on a face
    scipy_spatial = pytest.importorskip("scipy.spatial")
    shapely = pytest.importorskip("shapely")
    from obbiou.boxes import corners

    rng = np.random.default_rng(5)
    m, n = 25, 4000
    boxes = np.column_stack([rng.uniform(0, 10, (m, 2)), rng.uniform(0.5, 1.5, m),
                             rng.uniform(0.5, 4, (m, 3)), rng.uniform(-3, 3, m)])  # fmt: skip
    tframe = rng.integers(0, 4, m)
    pts = np.column_stack([rng.uniform(-2, 12, (n, 2)), rng.uniform(0, 3, n)])
    pframe = rng.integers(0, 5, n)  # frame 4 has no truth
    truth = read_table(upright(boxes, tframe.tolist(), ["x"] * m), role="truth")
    table = {"frame": pframe, "x": pts[:, 0], "y": pts[:, 1], "z": pts[:, 2]}
    got3 = count_truth_points(truth, table)
    got2 = count_truth_points(truth, {k: v for k, v in table.items() if k != "z"})
    c = corners(boxes, shape="upright")
    for i in range(m):
        mine = pts[pframe == tframe[i]]
        want3 = int((scipy_spatial.Delaunay(c[i]).find_simplex(mine) >= 0).sum())
        foot = shapely.Polygon(c[i][:4, :2])
        want2 = int(shapely.contains_xy(foot, mine[:, 0], mine[:, 1]).sum())
        assert got3[i] == want3
        assert got2[i] == want2


def two_people():
    """Hand-worked: people P0 at x = 0 with 6 returns and P1 at x = 5 with 2, both detected."""
    p = [0.0, 0.0, 0.9, 0.5, 0.5, 1.8, 0.0]
    q = [5.0, 0.0, 0.9, 0.5, 0.5, 1.8, 0.0]
    truth = upright([p, q], [0, 0], ["person"] * 2)
    dets = upright([p, q], [0, 0], ["person"] * 2, score=[0.9, 0.8])
    pts = {"frame": [0] * 8, "x": [0.0] * 6 + [5.0] * 2, "y": [0.0] * 8,
           "z": [0.1, 0.4, 0.7, 1.0, 1.3, 1.6, 0.5, 1.0]}  # fmt: skip
    return truth, dets, pts


def test_few_points_make_ignore_truths():
    # Hand-worked: two people, P0 with 6 returns, P1 with 2; min_points=5 sets P1 aside.
    # A detection on P1 is then ignored (not an FP), P1 is not a miss: AP 1 for "person".
    truth, dets, pts = two_people()
    ev = evaluate(truth, dets, points=pts, min_points=5)
    assert ev.records.truth_points.tolist() == [6, 2]
    assert ev.records.truth_set_aside.tolist() == [False, True]
    assert ev.counts("person", 0.5)[:4] == (1, 0, 1, 0)
    assert ev.ap("person") == 1.0
    d = ev.to_dict()
    assert d["points"]["min_points"] == 5
    assert d["points"]["labels"]["person"] == {
        "truths": 2,
        "set_aside": 1,
        "no_points": 0,
        "median": 4.0,
    }
    assert "truths with fewer than 5 lidar points set aside (ignore): 1 of 2" in ev.summary()
    # without min_points: counted, nothing set aside; P1's detection is a TP again
    plain = evaluate(truth, dets, points=pts)
    assert plain.records.truth_points.tolist() == [6, 2]
    assert plain.counts("person", 0.5)[:4] == (2, 0, 0, 0)
    assert evaluate(truth, dets).to_dict().get("points") is None


def test_compare_sets_the_same_truths_aside_for_both_detectors():
    # The hand-worked case above: P1 (2 returns < 5) is an ignore truth for both detectors.
    # Detector A finds only P1: its detection is ignored, P0 is a miss -> AP 0. Detector B
    # finds both: TP on P0, P1's detection ignored -> AP 1. Difference 1, not the 0.5 of
    # counting P1 as a truth for both (A: AP 0.5, B: AP 1).
    from obbiou.evaluation import compare

    p = [0.0, 0.0, 0.9, 0.5, 0.5, 1.8, 0.0]
    q = [5.0, 0.0, 0.9, 0.5, 0.5, 1.8, 0.0]
    truth = upright([p, q], [0, 0], ["person"] * 2)
    a = upright([q], [0], ["person"], score=[0.8])
    b = upright([p, q], [0, 0], ["person"] * 2, score=[0.9, 0.8])
    pts = {"frame": [0] * 8, "x": [0.0] * 6 + [5.0] * 2, "y": [0.0] * 8,
           "z": [0.1, 0.4, 0.7, 1.0, 1.3, 1.6, 0.5, 1.0]}  # fmt: skip
    c = compare(truth, a, b, points=pts, min_points=5, resamples=50)
    for ev in (c.a, c.b):
        assert ev.records.truth_set_aside.tolist() == [False, True]
    assert (c.a.ap("person"), c.b.ap("person"), c.difference) == (0.0, 1.0, 1.0)
    assert compare(truth, a, b, resamples=50).difference == 0.5


def test_points_folder_reads_as_one_table(tmp_path):
    # a folder of point files (natural order of names) counts as the files together; files
    # with and without z cannot be mixed
    box = [0.0, 0.0, 0.5, 1.0, 1.0, 1.0, 0.0]
    truth = read_table(upright([box, box], [0, 1], ["a", "a"]), role="truth")
    import pandas as pd

    folder = tmp_path / "pts"
    folder.mkdir()
    pd.DataFrame({"frame": [0, 1], "x": [0.0, 0.5], "y": [0.0, 0.5], "z": [0.5, 1.0]}).to_csv(
        folder / "f2.csv", index=False
    )
    pd.DataFrame({"frame": [1], "x": [0.6], "y": [0.0], "z": [0.5]}).to_parquet(
        folder / "f10.parquet", index=False
    )
    assert count_truth_points(truth, str(folder)).tolist() == [1, 1]  # (0.6, 0) is outside
    pd.DataFrame({"frame": [1], "x": [0.2], "y": [0.0]}).to_csv(folder / "f3.csv", index=False)
    with pytest.raises(InvalidTable) as err:
        count_truth_points(truth, str(folder))
    assert err.value.source.endswith("f3.csv")
    assert "frame, x, y while" in str(err.value)


def test_bad_point_input():
    box = [0.0, 0.0, 0.5, 1.0, 1.0, 1.0, 0.0]
    truth = upright([box], [0], ["a"])
    dets = upright([box], [0], ["a"], score=[1.0])
    with pytest.raises(InvalidInput) as err:
        evaluate(truth, dets, min_points=3)
    assert err.value.argument == "min_points"
    with pytest.raises(InvalidInput) as err:
        evaluate(truth, dets, points={"frame": [0], "x": [0.0], "y": [0.0]}, min_points=0)
    assert err.value.argument == "min_points"
    with pytest.raises(InvalidTable) as err:
        evaluate(truth, dets, points={"frame": [0], "x": [0.0]})
    assert "'y'" in str(err.value)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        evaluate(truth, dets, points={"frame": [9], "x": [0.0], "y": [0.0]}, min_points=1)
    assert any(issubclass(w.category, LikelyMistake) for w in caught)


def test_per_truth_table_and_confusion_know_the_set_aside_truths():
    # the same hand-worked case: truths() shows each truth's points and whether it was set
    # aside (P1: 2 points < 5 -> ignore); confusion() treats P1 as an ignore truth too, so
    # the detection on it is absorbed (attrs["ignored"]), not counted on background
    truth, dets, pts = two_people()
    ev = evaluate(truth, dets, points=pts, min_points=5)
    rows = ev.truths()
    assert rows["points"].tolist() == [6, 2]
    assert rows["set_aside"].tolist() == [False, True]
    assert rows["outcome"].tolist() == ["matched", "ignore"]
    table = ev.confusion()
    assert table.loc["person", "person"] == 1 and table.loc["(background)", "person"] == 0
    assert table.attrs["ignored"] == 1
    # without points no such columns
    assert "points" not in evaluate(truth, dets).truths().columns
