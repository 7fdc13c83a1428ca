"""Evaluate a rotated-box detector from CSV files, with intervals, JSON and curves.

The tables here are INVENTED: a harbour survey from obbiou.demo.scenarios stands in for your
own ground truth and detections. Replace the two CSV paths with your files (columns:
frame, label[, score], cx, cy, width, height, angle; truth may have a boolean ignore column).

    python examples/evaluate_csv.py [OUTPUT_DIR]
"""

import sys
import tempfile
from pathlib import Path

import pandas as pd

import obbiou
from obbiou.demo.scenarios import harbour_survey, simulate_detector
from obbiou.evaluation import evaluate

out = Path(sys.argv[1]) if len(sys.argv) > 1 else Path(tempfile.mkdtemp(prefix="obbiou-"))
out.mkdir(parents=True, exist_ok=True)

# 1. Invented stand-in data, written as CSV files (your pipeline would have these already).
scene = harbour_survey(frames=4, seed=1)
raw = simulate_detector(scene, "improved", seed=1)
scene.truth.to_csv(out / "truth.csv", index=False)
raw.to_csv(out / "raw_detections.csv", index=False)

# 2. Remove duplicates frame by frame, within each label.
kept = []
for _, tile in raw.groupby("frame", sort=False):
    k = obbiou.suppress(
        tile[["cx", "cy", "width", "height", "angle"]],
        tile["score"],
        max_iou=0.5,
        labels=tile["label"],
    )
    kept.append(tile.iloc[k.indices])
detections = pd.concat(kept, ignore_index=True)
detections.to_csv(out / "detections.csv", index=False)

# 3. Evaluate from the files: AP per label at IoU 0.5, 0.55, ..., 0.95.
result = evaluate(out / "truth.csv", out / "detections.csv", iou="0.5:0.95:0.05")
print(result.summary())
low, high = result.interval(resamples=1000, seed=0)  # bootstrap over tiles
print(f"\nmean AP {result.mean_ap():.4f}, 95% interval [{low:.4f}, {high:.4f}]")
print("AP of containers at IoU 0.5:", round(result.ap("container", 0.5), 4))
print("counts of containers at IoU 0.5:", result.counts("container", 0.5))

result.to_json(out / "result.json")
result.plot(out / "curves.png", iou=0.5)
print(f"\nwrote {out / 'result.json'} and {out / 'curves.png'} (invented data)")
