"""Suppress duplicate detections in one aerial tile: hard, per label, and soft (gaussian).

The tile is INVENTED (obbiou.demo.scenarios: a drone survey of a port, pixel frame, y down).
With your own detector, pass its rotated boxes (cx, cy, width, height, angle in radians),
scores and labels instead.

    python examples/suppress_tile.py [OUTPUT_DIR]
"""

import sys
import tempfile
from pathlib import Path

import numpy as np

import obbiou
from obbiou.demo.scenarios import harbour_survey, simulate_detector

out = Path(sys.argv[1]) if len(sys.argv) > 1 else Path(tempfile.mkdtemp(prefix="obbiou-"))
out.mkdir(parents=True, exist_ok=True)

scene = harbour_survey(frames=1, seed=2)
raw = simulate_detector(scene, "baseline", seed=2)  # raw output: duplicates included
boxes = raw[["cx", "cy", "width", "height", "angle"]].to_numpy()
scores = raw["score"].to_numpy()
labels = raw["label"].to_numpy()
print(f"invented tile {scene.frames[0]}: {len(raw)} raw detections")

# Hard suppression within each label: a box overlapping a better one by IoU > 0.5 goes.
hard = obbiou.suppress(boxes, scores, max_iou=0.5, labels=labels)
print(f"hard, per label:   kept {len(hard.indices)}")

# Across labels (a container and a vessel box on the same spot compete too).
across = obbiou.suppress(boxes, scores, max_iou=0.5)
print(f"hard, all labels:  kept {len(across.indices)}")

# Soft suppression: overlapping boxes keep a decayed score; drop those below 0.05.
soft = obbiou.suppress(
    boxes, scores, max_iou=0.5, labels=labels, decay="gaussian", sigma=0.5, min_score=0.05
)
print(f"soft (gaussian):   kept {len(soft.indices)}, lowest score {soft.scores.min():.3f}")

# Which pairs did overlap? The scene index finds them without an N x N matrix.
pairs = obbiou.overlapping_pairs(boxes, min_iou=0.5)
same = labels[pairs.first] == labels[pairs.second]
print(f"pairs with IoU > 0.5: {len(pairs.iou)} ({int(same.sum())} within one label)")

kept = raw.iloc[hard.indices]
kept.to_csv(out / "kept.csv", index=False)
assert np.all(np.diff(kept["score"].to_numpy()) <= 0)  # kept in descending score
print(f"wrote {out / 'kept.csv'} (invented data)")
