"""Precision-recall figures and pictures of one frame (draw_curves, draw_frame)."""

import numpy as np
import pytest
from matplotlib.figure import Figure

from obbiou.evaluation import evaluate
from obbiou.evaluation.palette import LINE_COLOURS, PALETTE
from obbiou.evaluation.pictures import draw_frame, frame_statuses
from obbiou.evaluation.plots import draw_curves

# Invented: two labels on one frame, a car matched at IoU 0.81 and a van matched exactly,
# plus a false positive; hand-worked IoU of the car pair: boxes 4 x 2 shifted by 0.2 along
# x overlap 3.8 x 2 = 7.6 of a union 8.4: 0.905; shifted by 0.4: 7.2 / 8.8 = 0.818.
TRUTH = {
    "frame": [0, 0],
    "label": ["car", "van"],
    "cx": [0.0, 20.0],
    "cy": [0.0, 0.0],
    "width": [4.0, 5.0],
    "height": [2.0, 2.0],
    "angle": [0.0, 0.0],
}
DETS = {
    "frame": [0, 0, 0],
    "label": ["car", "van", "van"],
    "score": [0.9, 0.8, 0.7],
    "cx": [0.4, 20.0, 40.0],
    "cy": [0.0, 0.0, 0.0],
    "width": [4.0, 5.0, 5.0],
    "height": [2.0, 2.0, 2.0],
    "angle": [0.0, 0.0, 0.0],
}


def _legend(ax):
    return [t.get_text() for t in ax.get_legend().get_texts()]


def test_each_label_is_drawn_at_its_own_threshold():
    # cars evaluated at 0.7 only, vans at 0.5 and 0.9: before, the figure drew the lowest
    # threshold (0.5) for every label and cars disappeared from it
    ev = evaluate(TRUTH, DETS, iou={"car": 0.7, None: [0.5, 0.9]})
    ax = draw_curves(ev, Figure())
    # car: one TP of one truth at IoU 0.818 >= 0.7 -> AP 1 (hand-worked above); van at 0.5:
    # TP then FP (exact 1.0, then 40 m away) -> AP 1
    assert _legend(ax) == ["car  AP 1.000  (IoU ≥ 0.7)", "van  AP 1.000  (IoU ≥ 0.5)"]
    assert "each label at its own" in ax.get_title(loc="left")
    # a chosen threshold draws the labels evaluated there and names the others
    ax = draw_curves(ev, Figure(), iou=0.9)
    assert _legend(ax) == ["van  AP 1.000"]
    assert "not evaluated at IoU ≥ 0.9: car" in ax.get_title(loc="left")
    with pytest.raises(ValueError, match="0.6"):
        draw_curves(ev, Figure(), iou=0.6)


def test_precision_axis_fits_the_data():
    # the van curve goes 1 (TP) then 1/2 (FP): the lowest precision drawn is 0.5, so the
    # axis starts at 0.4 (a tenth below, rounded down), not at 0
    ev = evaluate(TRUTH, DETS, iou=0.5)
    low, high = draw_curves(ev, Figure()).get_ylim()
    assert low == pytest.approx(0.4) and high == pytest.approx(1.02)


def _rgb(colour):
    return np.array([int(colour[i : i + 2], 16) for i in (1, 3, 5)], dtype=float)


def test_label_curves_have_colours_of_their_own():
    # no curve colour is near a status colour of the frame pictures (euclidean RGB distance
    # over 60 of 441: a rule of thumb for telling lines apart, common practice, no source)
    for c in LINE_COLOURS:
        for s in PALETTE.values():
            assert np.linalg.norm(_rgb(c) - _rgb(s)) > 60, (c, s)


def test_frame_statuses_agree_with_the_counts():
    ev = evaluate(TRUTH, DETS, iou=0.5)
    t_status, d_status = frame_statuses(ev, 0)
    assert t_status.tolist() == ["matched", "matched"]
    assert d_status.tolist() == ["matched", "matched", "false positive"]
    fp = sum(ev.counts(lab, 0.5).fp for lab in ev.labels)
    assert fp == int((d_status == "false positive").sum())


def test_draw_frame_writes_png_and_rejects_unknown_frame(tmp_path):
    path = draw_frame(TRUTH, DETS, 0, tmp_path / "sub" / "frame0.png", iou=0.5)
    data = path.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n" and len(data) > 5000
    # the picture holds the status colours: amber of the matched detections and magenta of
    # the false positive appear among its pixels
    from matplotlib.image import imread

    pixels = (imread(path)[..., :3] * 255).reshape(-1, 3)
    for key in ("matched", "false_positive"):
        near = np.linalg.norm(pixels - _rgb(PALETTE[key]), axis=1) < 30
        assert near.sum() > 20, key
    with pytest.raises(ValueError, match="frame"):
        draw_frame(TRUTH, DETS, 5, tmp_path / "none.png")
