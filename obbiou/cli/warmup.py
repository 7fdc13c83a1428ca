"""``obbiou warmup``: compile every kernel now (cached on disk), so later runs start fast."""

from __future__ import annotations

import argparse
import time
from typing import Any

SUMMARY = (
    "Compile all of obbiou's kernels now (they are cached on disk), so that later runs "
    "start at full speed."
)
EXAMPLE = "  obbiou warmup"


def configure(p: argparse.ArgumentParser) -> None:
    p.set_defaults(quiet=True)


def run(args: argparse.Namespace) -> int:
    import numpy as np

    start = time.perf_counter()

    def step(name: str, fn: Any) -> None:
        t0 = time.perf_counter()
        fn()
        print(f"  {name:<60s} {time.perf_counter() - t0:6.1f} s", flush=True)

    print("compiling obbiou's kernels (cached on disk for later runs):")

    def measures() -> None:
        from obbiou.measures import warmup

        warmup()

    def scene() -> None:
        from obbiou.scene import warmup

        warmup()

    def evaluation() -> None:
        from obbiou.evaluation import evaluate
        from obbiou.tables import box_columns

        # One tiny table per layout: a match, an ignored detection, at ten thresholds.
        tiny = {
            "axis": [[0.0, 0.0, 4.0, 2.0], [3.0, 0.0, 7.0, 2.0]],
            "rotated": [[5.0, 5.0, 4.0, 2.0, 0.1], [8.0, 5.0, 4.0, 2.0, 0.1]],
            "polygon": [
                [0.0, 0.0, 4.0, 0.0, 4.0, 2.0, 0.0, 2.0],
                [3.0, 0.0, 7.0, 0.0, 7.0, 2.0, 3.0, 2.0],
            ],
            "axis3": [[0.0, 0.0, 0.0, 4.0, 2.0, 1.0], [3.0, 0.0, 0.0, 7.0, 2.0, 1.0]],
            "upright": [[5.0, 5.0, 0.5, 4.0, 2.0, 1.0, 0.1], [8.0, 5.0, 0.5, 4.0, 2.0, 1.0, 0.1]],
        }
        for shape, rows in tiny.items():
            cols = box_columns(shape)
            values = np.array(rows)
            truth = {"frame": [0, 0], "label": ["a", "a"], "ignore": [False, True]}
            dets = {"frame": [0, 0], "label": ["a", "a"], "score": [0.9, 0.4]}
            for j, c in enumerate(cols):
                truth[c] = values[:, j]
                dets[c] = values[:, j] + (0.1 if j == 0 else 0.0)
            result = evaluate(truth, dets, shape=shape, iou="0.5:0.95:0.05")
            result.interval(resamples=20, seed=0)

    def box_tools() -> None:
        from obbiou.boxes import fit_rotated

        fit_rotated(np.zeros((1, 3, 2)))

    step("overlap measures (iou, giou, diou, intersection, coverage)", measures)
    step("box tools (fit_rotated)", box_tools)
    step("scene (overlapping_pairs, suppress: hard, linear, gaussian)", scene)
    step("evaluation (matching, AP, bootstrap; every layout)", evaluation)
    print(f"done in {time.perf_counter() - start:.1f} s")
    return 0
