"""Match records to and from the wire (obbiou.distributed.wire): plain numpy, no cluster.

The reference is the records themselves: unpacking what was packed must give every field
back with the same dtype, the same shape and the same bits (NaN included), whatever the
frames, labels and thresholds. Built from real matching on invented, seeded frames.
"""

from __future__ import annotations

import pickle
from dataclasses import fields

import numpy as np
import pytest

from obbiou.distributed.wire import pack_records, unpack_records
from obbiou.evaluation import match_frames, read_table

BOX = ["cx", "cy", "width", "height", "angle"]


def tables(seed: int, frames: int, text_frames: bool):
    rng = np.random.default_rng(seed)
    n_truth, n_det = 6 * frames, 9 * frames
    ids = [f"tile-{i}" if text_frames else i for i in range(frames)]

    def boxes(n):
        centre = rng.uniform(0, 50, (n, 2))
        return {
            "cx": centre[:, 0],
            "cy": centre[:, 1],
            "width": rng.uniform(2, 8, n),
            "height": rng.uniform(1, 4, n),
            "angle": rng.uniform(-3, 3, n),
        }

    truth = {
        "frame": [ids[i % frames] for i in range(n_truth)],
        "label": rng.choice(["vessel", "crane", "container"], n_truth),
        "ignore": rng.uniform(size=n_truth) < 0.1,
        **boxes(n_truth),
    }
    t = read_table(truth, role="truth")
    # detections: noisy copies of the truths plus false alarms, so many IoUs repeat across
    # thresholds (the "changes" form) and some change
    pick = rng.integers(0, n_truth, n_det)
    det = {
        c: t.boxes.data[pick, j] + rng.normal(0, 0.3, n_det) * (j < 2) for j, c in enumerate(BOX)
    }
    det.update(
        frame=[truth["frame"][k] for k in pick],
        label=np.where(rng.uniform(size=n_det) < 0.9, truth["label"][pick], "vessel"),
        score=rng.uniform(size=n_det).round(2),  # ties on purpose
    )
    return t, read_table(det, role="detections")


def same(x, y) -> bool:
    if isinstance(x, np.ndarray):
        if x.dtype != y.dtype or x.shape != y.shape:
            return False
        if x.dtype == object:
            return x.tolist() == y.tolist()
        return x.tobytes() == y.tobytes()  # the same bits, NaN included
    return x == y


@pytest.mark.parametrize("text_frames", [False, True])
@pytest.mark.parametrize("frames", [0, 1, 7])
def test_round_trip_gives_every_field_back_bit_for_bit(frames, text_frames):
    truth, det = tables(3, frames, text_frames)
    records = match_frames(truth, det, thresholds="0.5:0.95:0.05")
    back = unpack_records(pickle.loads(pickle.dumps(pack_records(records))))
    for f in fields(records):
        assert same(getattr(back, f.name), getattr(records, f.name)), f.name


def test_packed_records_are_smaller_on_the_wire():
    truth, det = tables(5, 40, True)
    records = match_frames(truth, det, thresholds="0.5:0.95:0.05")
    packed = pack_records(records)
    # the forms the module docstring promises: text as codes, 2D ranges as one constant,
    # per-threshold IoUs as changes only
    assert packed["det_label"][0] == "text" and packed["det_frame"][0] == "text"
    assert packed["det_range"][0] == "constant"
    assert packed["det_iou"][0] == "changes"
    assert len(pickle.dumps(packed)) < len(pickle.dumps(records)) / 2
