"""obbiou.frames: scene operations frame by frame, against the scene functions per frame."""

from __future__ import annotations

import numpy as np
import pytest

import obbiou
from obbiou.errors import InvalidInput
from obbiou.frames import overlap_frames, suppress_frames
from obbiou.tables import read_table

BOX = ["cx", "cy", "width", "height", "angle"]


def table(frames, role="detections", seed=0, n=30):
    rng = np.random.default_rng(seed)
    cols = {
        "frame": [frames[i % len(frames)] for i in range(n)],
        "label": rng.choice(["ship", "crane"], n),
        "cx": rng.uniform(0, 20, n),
        "cy": rng.uniform(0, 20, n),
        "width": rng.uniform(2, 6, n),
        "height": rng.uniform(1, 3, n),
        "angle": rng.uniform(-3, 3, n),
    }
    if role == "detections":
        cols["score"] = rng.uniform(size=n)
    return read_table(cols, role=role)


def test_suppress_frames_equals_suppress_on_each_frame():
    det = table([3, 1, 2])
    kept, scores = suppress_frames(det, max_iou=0.3)
    expect = []
    for f in (3, 1, 2):  # frames in order of first appearance
        rows = np.flatnonzero(det.frame == f)
        k = obbiou.suppress(
            det.boxes.data[rows], det.score[rows], max_iou=0.3, labels=det.label[rows]
        )
        expect.extend(rows[k.indices].tolist())
    assert kept.frame.tolist() == det.frame[expect].tolist()
    assert np.array_equal(kept.boxes.data, det.boxes.data[expect])
    assert np.array_equal(scores, det.score[expect])


def test_overlap_frames_matches_integer_and_text_frame_ids():
    """Frame 7 of one table meets frame "7" of the other (the one rule for frame ids)."""
    a = table([7, 8], role="truth", seed=1)
    b = table(["7", "9"], role="truth", seed=2)
    pairs = overlap_frames(a, b)
    assert set(pairs["frame"].tolist()) <= {7}
    assert sorted(set(b.frame.tolist())) == [7, 9]  # "7" spells an integer: it is frame 7
    rows_a, rows_b = np.flatnonzero(a.frame == 7), np.flatnonzero(b.frame == 7)
    ref = obbiou.overlapping_pairs(a.boxes.data[rows_a], b.boxes.data[rows_b])
    assert pairs["first"].tolist() == rows_a[ref.first].tolist()
    assert pairs["second"].tolist() == rows_b[ref.second].tolist()
    assert np.array_equal(pairs["iou"].to_numpy(), ref.iou)
    assert len(pairs) > 0  # the seeded scene has overlapping boxes in frame 7


def test_empty_table_gives_empty_results():
    det = table([0], n=0)
    kept, scores = suppress_frames(det)
    assert len(kept) == 0 and len(scores) == 0
    assert list(overlap_frames(det).columns) == [
        "frame",
        "first",
        "second",
        "first_label",
        "second_label",
        "iou",
    ]


def test_2d_and_3d_tables_do_not_pair():
    a = table([0], role="truth")
    b = read_table(
        {
            "frame": [0],
            "label": ["pallet"],
            "cx": [1.0],
            "cy": [1.0],
            "cz": [0.5],
            "length": [1.2],
            "width": [0.8],
            "height": [1.0],
            "yaw": [0.0],
        },
        role="truth",
    )
    with pytest.raises(InvalidInput, match=r"^b: 'upright' boxes cannot be paired"):
        overlap_frames(a, b)
