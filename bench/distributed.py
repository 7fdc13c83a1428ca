"""Benchmark: evaluation and scene overlap in-process vs on local Dask workers.

    python bench/distributed.py            # 20 000 frames from Parquet
    python bench/distributed.py --quick    # 2 000 frames, shorter overhead table

What it measures (all on the same invented data, in one run):

1. Evaluation of 20 000 frames (synthetic harbour-survey-like rotated boxes, a simulated
   detector) read from a Parquet dataset folder: in-process (pandas reads the folder, then
   ``obbiou.evaluation.evaluate``) vs ``obbiou.distributed.evaluate_distributed`` on a
   ``LocalCluster`` of 1 and of 2 worker processes — once including the cluster start
   (what ``obbiou evaluate --workers N`` costs) and once on a running cluster. The results
   are checked to be identical.
2. The overhead of the Dask path at small sizes (10 … 2 000 frames) on a running cluster, so
   you can see where it starts to pay.
3. Tiled scene overlap (``overlapping_pairs_distributed``) vs in-process
   ``overlapping_pairs`` vs the straightforward shapely 2.x way (STRtree query, then exact
   intersection areas), on one large invented scene.

In-process evaluation already uses every core of the machine (the numba kernels run in
parallel threads), so local workers on the same machine cannot beat it: on one machine the
figures show the cost of the Dask path (process start, moving partitions between workers,
sending the match records back). The gain comes from more machines: the map step (reading,
validation, matching) scales with the workers, the reduce (AP, intervals) stays on the client.
"""

from __future__ import annotations

import argparse
import os
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

# This file is named like the ``distributed`` package: take its folder off the import path
# (Python puts it first) so that ``import distributed`` finds Dask's, and put the project
# root on it instead.
_HERE = Path(__file__).resolve().parent
sys.path[:] = [p for p in sys.path if Path(p or ".").resolve() != _HERE]
sys.path.insert(0, str(_HERE.parent))

from obbiou.distributed import evaluate_distributed, overlapping_pairs_distributed  # noqa: E402
from obbiou.evaluation import evaluate  # noqa: E402

LABELS = np.array(["vessel", "container", "crane"])


def invented_frames(frames: int, seed: int = 0) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Invented truth and simulated detections: ~12 truths and ~15 detections per frame."""
    rng = np.random.default_rng(seed)
    n_truth = rng.poisson(12, frames)
    frame = np.repeat(np.arange(frames), n_truth)
    n = len(frame)
    truth = pd.DataFrame(
        {
            "frame": frame,
            "label": LABELS[rng.integers(0, 3, n)],
            "cx": rng.uniform(0, 1000, n),
            "cy": rng.uniform(0, 1000, n),
            "width": rng.uniform(8, 60, n),
            "height": rng.uniform(4, 20, n),
            "angle": rng.uniform(-np.pi, np.pi, n),
            "ignore": rng.random(n) < 0.05,
        }
    )
    keep = rng.random(n) < 0.85  # 15 % misses
    det = truth.loc[keep, ["frame", "label", "cx", "cy", "width", "height", "angle"]].copy()
    m = len(det)
    det["cx"] += rng.normal(0, 2, m)
    det["cy"] += rng.normal(0, 2, m)
    det["width"] = np.abs(det["width"] * rng.normal(1, 0.08, m))
    det["height"] = np.abs(det["height"] * rng.normal(1, 0.08, m))
    det["angle"] += rng.normal(0, 0.06, m)
    n_fa = frames * 4  # false alarms
    alarms = pd.DataFrame(
        {
            "frame": rng.integers(0, frames, n_fa),
            "label": LABELS[rng.integers(0, 3, n_fa)],
            "cx": rng.uniform(0, 1000, n_fa),
            "cy": rng.uniform(0, 1000, n_fa),
            "width": rng.uniform(8, 60, n_fa),
            "height": rng.uniform(4, 20, n_fa),
            "angle": rng.uniform(-np.pi, np.pi, n_fa),
        }
    )
    det = pd.concat([det, alarms], ignore_index=True)
    det["score"] = np.round(rng.random(len(det)), 3)
    det = det.sample(frac=1.0, random_state=seed).reset_index(drop=True)  # frames scattered
    return truth, det


def write_dataset(table: pd.DataFrame, folder: Path, files: int) -> None:
    folder.mkdir(parents=True)
    for k, part in enumerate(np.array_split(np.arange(len(table)), files)):
        table.iloc[part].to_parquet(folder / f"part-{k:03d}.parquet", index=False)


def timed(fn, repeat: int = 1):
    best, out = np.inf, None
    for _ in range(repeat):
        t = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t)
    return best, out


def local_cluster(workers: int):
    from distributed import Client, LocalCluster

    cluster = LocalCluster(
        n_workers=workers,
        threads_per_worker=1,
        processes=True,
        host="127.0.0.1",
        dashboard_address=None,
        env={"NUMBA_NUM_THREADS": "1"},
    )
    return cluster, Client(cluster)


def bench_evaluation(frames: int, small: list[int], tmp: Path) -> None:
    truth, det = invented_frames(frames)
    write_dataset(truth, tmp / "truth", 8)
    write_dataset(det, tmp / "detections", 8)
    print(
        f"\n1. evaluation, {frames} frames from Parquet folders (8 files each): "
        f"{len(truth)} truths, {len(det)} detections, IoU 0.5:0.95:0.05 (10 thresholds)"
    )
    options = dict(iou="0.5:0.95:0.05")
    evaluate(*invented_frames(20, seed=1), **options)  # compile / load the kernels

    def in_process():
        t = pd.read_parquet(tmp / "truth")
        d = pd.read_parquet(tmp / "detections")
        return evaluate(t, d, **options)

    t_in, want = timed(in_process, repeat=2)
    print(f"   {'in-process (read + evaluate)':<44} {t_in:8.2f} s   1.00x")
    reference = want.to_dict()
    for workers in (1, 2):
        t_cold, got = timed(
            lambda w=workers: evaluate_distributed(
                str(tmp / "truth"), str(tmp / "detections"), workers=w, **options
            )
        )
        assert got.to_dict() == reference, "distributed result differs"
        cluster, client = local_cluster(workers)
        try:
            evaluate_distributed(*invented_frames(20, seed=1), client=client, **options)  # warm
            t_warm, got = timed(
                lambda c=client: evaluate_distributed(
                    str(tmp / "truth"), str(tmp / "detections"), client=c, **options
                ),
                repeat=2,
            )
            assert got.to_dict() == reference, "distributed result differs"
        finally:
            client.close()
            cluster.close()
        print(
            f"   {f'{workers} worker(s), cluster started for the run':<44} {t_cold:8.2f} s"
            f"   {t_in / t_cold:4.2f}x"
        )
        print(
            f"   {f'{workers} worker(s), running cluster':<44} {t_warm:8.2f} s"
            f"   {t_in / t_warm:4.2f}x"
        )
    print("   results identical to in-process: yes (to_dict() compared for equality)")

    print("\n2. overhead of the Dask path at small sizes (2 workers, running cluster)")
    print(f"   {'frames':>8} {'in-process':>12} {'distributed':>12} {'overhead':>10}")
    cluster, client = local_cluster(2)
    try:
        evaluate_distributed(*invented_frames(20, seed=1), client=client, **options)  # warm
        for n in small:
            t, d = invented_frames(n, seed=2)
            t_a, a = timed(lambda t=t, d=d: evaluate(t, d, **options), repeat=3)
            t_b, b = timed(
                lambda t=t, d=d: evaluate_distributed(t, d, client=client, **options), repeat=3
            )
            assert a.to_dict() == b.to_dict()
            print(f"   {n:>8} {t_a:>10.3f} s {t_b:>10.3f} s {t_b - t_a:>+8.3f} s")
    finally:
        client.close()
        cluster.close()


def shapely_pairs(boxes: np.ndarray) -> int:
    """The straightforward shapely 2.x way: STRtree query, then exact intersection areas."""
    import shapely

    from obbiou.boxes import corners

    polys = shapely.polygons(corners(boxes))
    tree = shapely.STRtree(polys)
    i, j = tree.query(polys, predicate="intersects")
    keep = i < j
    i, j = i[keep], j[keep]
    inter = shapely.area(shapely.intersection(polys[i], polys[j]))
    union = shapely.area(polys[i]) + shapely.area(polys[j]) - inter
    return int(np.count_nonzero(inter / union > 0))


def bench_overlap(n: int) -> None:
    from obbiou.scene import overlapping_pairs

    rng = np.random.default_rng(3)
    side = np.sqrt(n) * 12.0  # about 2-3 neighbours per box
    boxes = np.c_[
        rng.uniform(0, side, (n, 2)) + 5e5,  # map metres
        rng.uniform(2, 20, n),
        rng.uniform(2, 8, n),
        rng.uniform(-np.pi, np.pi, n),
    ]
    print(f"\n3. scene overlap, {n} invented rotated boxes (map metres, x ~ 500 000)")
    overlapping_pairs(boxes[:100])  # compile / load the kernels
    t_in, want = timed(lambda: overlapping_pairs(boxes), repeat=2)
    t_sh, count = timed(lambda: shapely_pairs(boxes))
    print(f"   {'shapely 2.x (STRtree + intersection)':<44} {t_sh:8.2f} s   ({count} pairs)")
    print(f"   {'in-process overlapping_pairs':<44} {t_in:8.2f} s   {t_sh / t_in:6.1f}x shapely")
    for workers in (1, 2):
        cluster, client = local_cluster(workers)
        try:
            overlapping_pairs_distributed(boxes[:100], client=client)  # warm
            t_d, got = timed(lambda c=client: overlapping_pairs_distributed(boxes, client=c))
        finally:
            client.close()
            cluster.close()
        same = (
            np.array_equal(got.first, want.first)
            and np.array_equal(got.second, want.second)
            and np.array_equal(got.iou, want.iou)
        )
        assert same, "tiled result differs"
        print(
            f"   {f'{workers} worker(s), tiled, running cluster':<44} {t_d:8.2f} s"
            f"   {t_sh / t_d:6.1f}x shapely, {t_in / t_d:4.2f}x in-process"
        )
    print(f"   pairs: {len(want.first)}; tiled result identical to in-process: yes")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="a short run")
    args = parser.parse_args()
    frames = 2_000 if args.quick else 20_000
    small = [10, 200] if args.quick else [10, 100, 1_000, 2_000]
    print(f"obbiou distributed benchmark ({os.cpu_count()} cores); all data is invented")
    with tempfile.TemporaryDirectory() as tmp:
        bench_evaluation(frames, small, Path(tmp))
    bench_overlap(50_000 if args.quick else 400_000)


if __name__ == "__main__":
    main()
