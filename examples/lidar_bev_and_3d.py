"""Evaluate upright 3D lidar boxes three ways: 3D IoU, bird's-eye view, centre distance.

The sweeps are INVENTED (obbiou.demo.scenarios: an inventory robot in a warehouse, metres,
z up; boxes cx, cy, cz, length, width, height, yaw). The bird's-eye-view evaluation
(bev=True) uses the ground-plane footprint of each box (obbiou.boxes.footprint); matching by
centre distance (distance=[...], metres) takes the nearest truth within each distance, and
the invented lidar returns (warehouse_returns) set aside truths with fewer than 5 returns.

Detection metrics do not establish that a vehicle or robot is safe: defer to the applicable
safety standards, local regulation and qualified engineers.

    python examples/lidar_bev_and_3d.py [OUTPUT_DIR]
"""

import sys
import tempfile
from pathlib import Path

import pandas as pd

import obbiou
from obbiou.demo.scenarios import simulate_detector, warehouse_lidar, warehouse_returns
from obbiou.evaluation import evaluate

out = Path(sys.argv[1]) if len(sys.argv) > 1 else Path(tempfile.mkdtemp(prefix="obbiou-"))
out.mkdir(parents=True, exist_ok=True)

UPRIGHT = ["cx", "cy", "cz", "length", "width", "height", "yaw"]

scene = warehouse_lidar(frames=10, seed=2)
raw = simulate_detector(scene, "improved", seed=2)
kept = []
for _, sweep in raw.groupby("frame", sort=False):
    k = obbiou.suppress(sweep[UPRIGHT], sweep["score"], max_iou=0.3, labels=sweep["label"])
    kept.append(sweep.iloc[k.indices])
detections = pd.concat(kept, ignore_index=True)


thresholds = "0.25,0.5,0.7"
ranges = [0, 8, 16, 24]  # metres from the sensor
in_3d = evaluate(scene.truth, detections, iou=thresholds, range_buckets=ranges)
in_bev = evaluate(scene.truth, detections, iou=thresholds, bev=True)
returns = warehouse_returns(scene, seed=2)
by_distance = evaluate(
    scene.truth, detections, distance=[0.5, 1, 2, 4], points=returns, min_points=5
)

print("invented warehouse sweeps:", len(scene.frames), "frames,", len(scene.truth), "truths")
print(f"{'label':<10}{'AP 3D @0.5':>12}{'AP BEV @0.5':>13}{'AP 3D @0.7':>12}{'AP BEV @0.7':>13}")
for label in in_3d.labels:
    row = [in_3d.ap(label, 0.5), in_bev.ap(label, 0.5), in_3d.ap(label, 0.7), in_bev.ap(label, 0.7)]
    print(
        f"{label:<10}" + "".join(f"{v:>12.4f} " if v is not None else f"{'n/a':>12} " for v in row)
    )
print(f"mean AP over thresholds: 3D {in_3d.mean_ap():.4f}, BEV {in_bev.mean_ap():.4f}")
print("3D IoU also counts the overlap in height, so it is never above the BEV IoU of the same")
print("pair; 3D AP at a strict threshold is lower for boxes whose height or cz is off.")
for name, sub in in_3d.buckets.get("range", {}).items():
    print(f"  range {name:>6} m: mean AP at 0.5 = {sub.mean_ap(0.5) or float('nan'):.4f}")
err = in_3d.orientation_error(0.5)
print(f"heading error of matched pairs: median {err.median:.3f} rad, flipped {err.flipped:.1%}")
print()
print(by_distance.summary())  # AP per distance, truths set aside, errors of true positives
print(by_distance.tp_errors().round(3).to_string(index=False))
in_3d.to_json(out / "lidar_3d.json")
print(f"wrote {out / 'lidar_3d.json'} (invented data)")
print(
    "Detection metrics do not establish that a robot is safe; defer to the applicable "
    "safety standards, local regulation and qualified engineers."
)
