"""Scene-scale benchmark: overlapping pairs and suppression, obbiou vs the shapely way.

Run: ``python bench/scene.py`` (full), ``python bench/scene.py --quick`` (short),
``python bench/scene.py --index`` (grid vs 1-D sort-and-sweep candidate search, the
measurement behind the index choice in ``obbiou/_kernels/grid.py``).

The shapely way, in the same process on the same arrays: polygons from the corners, an
``STRtree`` query for candidate pairs, then ``shapely.intersection`` / ``shapely.area`` on
the candidates; for suppression a greedy loop in score order over an ``STRtree``.
Scenes are invented (seeded): rotated boxes 8-40 px long on an image mosaic, duplicate
clusters of detections, a lidar-like frame of upright proposals.
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import time

import numpy as np

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), ".."))

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

from _util import peak_rss_mb, report  # noqa: E402

import obbiou  # noqa: E402
from obbiou.boxes import corners  # noqa: E402

CPU: dict[str, float] = {}  # CPU seconds and page faults per call of the last timed() call


def timed(fn, repeat: int, warmup: int = 1) -> tuple[float, object]:
    """Median wall time of ``repeat`` calls of ``fn()`` after ``warmup`` calls, and the
    last result; the median CPU time of the process (all threads) goes to ``CPU["last"]``.
    CPU time is far less disturbed than wall time when other jobs share the machine. Minor
    page faults per call (fresh memory pages touched) go to ``CPU["faults"]``."""
    import resource

    for _ in range(warmup):
        fn()
    walls, cpus, out = [], [], None
    faults = resource.getrusage(resource.RUSAGE_SELF).ru_minflt
    for _ in range(repeat):
        c, t = time.process_time(), time.perf_counter()
        out = fn()
        walls.append(time.perf_counter() - t)
        cpus.append(time.process_time() - c)
    CPU["last"] = statistics.median(cpus)
    CPU["faults"] = (resource.getrusage(resource.RUSAGE_SELF).ru_minflt - faults) / repeat
    return statistics.median(walls), out


def cpu_line(ours_cpu: float, theirs_cpu: float, ours_faults: float) -> None:
    print(
        f"    CPU time: obbiou {ours_cpu * 1e3:.1f} ms (all threads), shapely "
        f"{theirs_cpu * 1e3:.1f} ms, ratio {theirs_cpu / ours_cpu:.0f}x; obbiou page faults "
        f"per call: {ours_faults:.0f}"
    )


# ---------------------------------------------------------------- scenes (invented)


def mosaic(n: int, side: float, seed: int = 0) -> np.ndarray:
    """n rotated boxes 8-40 px long, 25-100 % as wide, anywhere on a side x side mosaic."""
    rng = np.random.default_rng(seed)
    length = rng.uniform(8, 40, n)
    width = length * rng.uniform(0.25, 1.0, n)
    return np.column_stack(
        [rng.uniform(0, side, (n, 2)), length, width, rng.uniform(-np.pi, np.pi, n)]
    )


def jitter(boxes: np.ndarray, seed: int = 1) -> np.ndarray:
    rng = np.random.default_rng(seed)
    n = len(boxes)
    out = boxes.copy()
    out[:, :2] += rng.normal(0, 2.0, (n, 2))
    out[:, 2:4] *= 1 + rng.normal(0, 0.05, (n, 2)).clip(-0.3, 0.3)
    out[:, 4] += rng.normal(0, 0.05, n)
    return out


def detections(n: int, per_object: int = 5, seed: int = 2) -> tuple[np.ndarray, np.ndarray]:
    """n rotated detections in clusters of ~per_object duplicates on a 5000 px tile."""
    rng = np.random.default_rng(seed)
    objects = mosaic(n // per_object, 5000.0, seed)
    dets = jitter(np.repeat(objects, per_object, axis=0), seed + 1)
    return dets, rng.random(len(dets))


def lidar_proposals(n: int, seed: int = 3) -> tuple[np.ndarray, np.ndarray]:
    """n upright proposals (cx, cy, cz, length, width, height, yaw) around ~n/100 objects
    within 60 m of the sensor, plus 20 % scattered clutter."""
    rng = np.random.default_rng(seed)
    k = max(1, n // 100)
    r, phi = rng.uniform(3, 60, k), rng.uniform(-np.pi, np.pi, k)
    size = rng.choice(np.array([[4.5, 1.9, 1.6], [1.2, 0.8, 1.2], [0.6, 0.6, 1.8]]), k)
    obj = np.column_stack(
        [r * np.cos(phi), r * np.sin(phi), size[:, 2] / 2, size, rng.uniform(-np.pi, np.pi, k)]
    )
    near = int(0.8 * n)
    prop = obj[rng.integers(0, k, near)].copy()
    prop[:, :2] += rng.normal(0, 0.3, (near, 2))
    prop[:, 2] += rng.normal(0, 0.1, near)
    prop[:, 3:6] *= 1 + rng.normal(0, 0.1, (near, 3)).clip(-0.5, 0.5)
    prop[:, 6] += rng.normal(0, 0.2, near)
    far = n - near
    clutter = obj[rng.integers(0, k, far)].copy()
    clutter[:, :2] = rng.uniform(-60, 60, (far, 2))
    boxes = np.concatenate([prop, clutter])
    return boxes, rng.random(n)


# ---------------------------------------------------------------- the shapely way


def shapely_polygons(boxes: np.ndarray):
    import shapely

    return shapely.polygons(corners(boxes, shape="rotated"))


def shapely_pairs(a: np.ndarray, b: np.ndarray | None) -> int:
    import shapely

    ga = shapely_polygons(a)
    gb = ga if b is None else shapely_polygons(b)
    tree = shapely.STRtree(gb)
    i, j = tree.query(ga, predicate="intersects")
    if b is None:
        keep = i < j
        i, j = i[keep], j[keep]
    inter = shapely.area(shapely.intersection(ga[i], gb[j]))
    iou = inter / (shapely.area(ga[i]) + shapely.area(gb[j]) - inter)
    return int(np.count_nonzero(iou > 0))


def shapely_greedy(boxes: np.ndarray, scores: np.ndarray, max_iou: float, bev3d=False):
    import shapely

    if bev3d:
        g = shapely.polygons(corners(boxes[:, [0, 1, 3, 4, 6]], shape="rotated"))
        z0, z1 = boxes[:, 2] - boxes[:, 5] / 2, boxes[:, 2] + boxes[:, 5] / 2
        vol = shapely.area(g) * (z1 - z0)
    else:
        g = shapely_polygons(boxes)
        area = shapely.area(g)
    tree = shapely.STRtree(g)
    order = np.argsort(-scores, kind="stable")
    removed = np.zeros(len(boxes), bool)
    kept = []
    for i in order:
        if removed[i]:
            continue
        kept.append(i)
        cand = tree.query(g[i])
        cand = cand[~removed[cand] & (cand != i)]
        if cand.size == 0:
            continue
        inter = shapely.area(shapely.intersection(g[i], g[cand]))
        if bev3d:
            dz = np.clip(np.minimum(z1[i], z1[cand]) - np.maximum(z0[i], z0[cand]), 0, None)
            inter = inter * dz
            iou = inter / (vol[i] + vol[cand] - inter)
        else:
            iou = inter / (area[i] + area[cand] - inter)
        removed[cand[iou > max_iou]] = True
    return np.array(kept)


def bound_share(boxes: np.ndarray, max_iou: float) -> tuple[float, int]:
    """Share of the overlapping pairs whose "IoU > max_iou" the cheap bounds of hard
    suppression settle without the exact IoU, and the number of pairs."""
    from obbiou._kernels.pairs import rect_iou_verdict
    from obbiou.measures import prepare
    from obbiou.shapes import read_boxes

    rows = prepare(read_boxes(boxes)).rows
    p = obbiou.overlapping_pairs(boxes)
    pairs = zip(p.first.tolist(), p.second.tolist(), strict=True)
    decided = sum(rect_iou_verdict(rows, i, rows, j, max_iou) >= 0 for i, j in pairs)
    return decided / max(len(p), 1), len(p)


# ---------------------------------------------------------------- runs


def main_runs(quick: bool) -> None:
    n = 10_000 if quick else 50_000
    side = 10_000.0 * np.sqrt(n / 50_000)
    obbiou.scene.warmup()
    a = mosaic(n, side)
    b = jitter(a)
    print(
        f"obbiou scene benchmark ({'quick' if quick else 'full'}), numba threads: "
        f"{__import__('numba').get_num_threads()}; medians of 5 runs (shapely: 1 run); "
        f"load average {os.getloadavg()[0]:.1f} on {os.cpu_count()} CPUs\n"
    )

    t_ours, p = timed(lambda: obbiou.overlapping_pairs(a, b), 5)
    c_ours, f_ours = CPU["last"], CPU["faults"]
    t_shp, cnt = timed(lambda: shapely_pairs(a, b), 1, warmup=0)
    c_shp = CPU["last"]
    note = f"{len(p)} pairs, shapely finds {cnt}"
    report(
        f"pairs: {n} rotated boxes vs a jittered copy, {side:.0f} px mosaic",
        t_ours,
        t_shp,
        50,
        note,
    )
    cpu_line(c_ours, c_shp, f_ours)

    t_ours, p = timed(lambda: obbiou.overlapping_pairs(a), 5)
    c_ours, f_ours = CPU["last"], CPU["faults"]
    t_shp, cnt = timed(lambda: shapely_pairs(a, None), 1, warmup=0)
    c_shp = CPU["last"]
    report(
        f"self-pairs: the same {n} boxes", t_ours, t_shp, 50, f"{len(p)} pairs, shapely finds {cnt}"
    )
    cpu_line(c_ours, c_shp, f_ours)

    nd = 2_000 if quick else 10_000
    dets, scores = detections(nd)
    t_ours, k = timed(lambda: obbiou.suppress(dets, scores, max_iou=0.5), 9)
    c_ours, f_ours = CPU["last"], CPU["faults"]
    t_shp, kk = timed(lambda: shapely_greedy(dets, scores, 0.5), 1, warmup=0)
    c_shp = CPU["last"]
    same = "same kept boxes" if np.array_equal(k.indices, kk) else "kept boxes DIFFER"
    report(
        f"hard suppression: {nd} rotated detections, clusters of ~5",
        t_ours,
        t_shp,
        60,
        f"kept {len(k)}, {same} as the shapely loop",
    )
    cpu_line(c_ours, c_shp, f_ours)
    share, npairs = bound_share(dets, 0.5)
    print(f"    cheap IoU bounds settle {100 * share:.0f} % of the {npairs} overlapping pairs")
    t_soft, ks = timed(lambda: obbiou.suppress(dets, scores, decay="gaussian"), 5)
    print(
        f"soft (gaussian) suppression of the same: obbiou {t_soft * 1e3:.2f} ms "
        f"({len(ks)} re-scored)"
    )

    nl = 4_000 if quick else 20_000
    lid, ls = lidar_proposals(nl)
    t_ours, k = timed(lambda: obbiou.suppress(lid, ls, max_iou=0.5), 5)
    c_ours, f_ours = CPU["last"], CPU["faults"]
    t_shp, kk = timed(lambda: shapely_greedy(lid, ls, 0.5, bev3d=True), 1, warmup=0)
    c_shp = CPU["last"]
    same = "same kept boxes" if np.array_equal(k.indices, kk) else "kept boxes DIFFER"
    report(
        f"hard suppression: {nl} upright 3D proposals in a lidar-like frame (3D IoU)",
        t_ours,
        t_shp,
        None,
        f"kept {len(k)}, {same} as the shapely loop",
    )
    cpu_line(c_ours, c_shp, f_ours)


def scaling_one(n: int) -> dict:
    side = 10_000.0 * np.sqrt(n / 50_000)  # constant density: that of the 50 000 mosaic
    a = mosaic(n, side, seed=7)
    obbiou.overlapping_pairs(a[:10])  # compiled and cached already; load it
    obbiou.overlapping_pairs(a[:30_000])  # and the parallel variants
    before = peak_rss_mb()
    t, p = timed(lambda: obbiou.overlapping_pairs(a), 1 if n >= 1_000_000 else 3, warmup=0)
    return {"n": n, "seconds": t, "pairs": len(p), "peak_rss_mb": peak_rss_mb(), "rss0": before}


def scaling(quick: bool) -> None:
    sizes = [1_000, 10_000, 100_000] + ([] if quick else [1_000_000])
    print("\nscaling: self-pairs of N rotated boxes at constant density (one process each)")
    print(f"{'N':>9} {'time s':>9} {'pairs':>10} {'us/box':>8} {'peak RSS MB':>12}")
    print("(peak RSS of the whole process, numba and numpy included)")
    for n in sizes:
        out = subprocess.run(
            [sys.executable, os.path.abspath(__file__), "--scaling-one", str(n)],
            capture_output=True,
            text=True,
            check=True,
        )
        r = json.loads(out.stdout.strip().splitlines()[-1])
        print(
            f"{r['n']:>9} {r['seconds']:>9.3f} {r['pairs']:>10} "
            f"{1e6 * r['seconds'] / r['n']:>8.2f} {r['peak_rss_mb']:>12.0f}"
        )


def index_comparison() -> None:
    """Candidate search only (extents overlap): grid (ours) vs 1-D sort-and-sweep on x."""
    from numba import njit, prange

    from obbiou._kernels import grid
    from obbiou.measures import prepare
    from obbiou.shapes import read_boxes

    @njit(parallel=True)
    def sweep_count(ext, order, xs, wmax):
        n = ext.shape[0]
        counts = np.zeros(n, np.int64)
        for i in prange(n):
            lo = np.searchsorted(xs, ext[i, 0] - wmax)
            hi = np.searchsorted(xs, ext[i, 2])
            c = 0
            for k in range(lo, hi):
                j = order[k]
                if j <= i:
                    continue
                if ext[j, 2] <= ext[i, 0] or ext[j, 0] >= ext[i, 2]:
                    continue
                if ext[j, 3] <= ext[i, 1] or ext[j, 1] >= ext[i, 3]:
                    continue
                c += 1
            counts[i] = c
        return counts

    def run_sweep(ext):
        order = np.argsort(ext[:, 0], kind="stable")
        xs = ext[order, 0].copy()
        wmax = float((ext[:, 2] - ext[:, 0]).max())
        return int(sweep_count(ext, order, xs, wmax).sum())

    def run_grid(rows):
        return int(grid.candidate_count(1, rows.copy(), none, rows.copy(), none, True, 0.0, False))

    print("\nindex: candidate search for self-pairs (extents only), constant density")
    none = np.zeros((0, 0, 2))
    for n in (50_000, 1_000_000):
        a = mosaic(n, 10_000.0 * np.sqrt(n / 50_000), seed=7)
        rows = prepare(read_boxes(a)).rows
        ext = grid.side_extents(1, rows, False)
        run_sweep(ext[:100])
        run_grid(rows[:100])
        t_s, c_s = timed(lambda e=ext: run_sweep(e), 2, warmup=0)
        t_g, c_g = timed(lambda r=rows: run_grid(r), 2, warmup=0)
        print(f"N={n:>8}: sweep {t_s:7.3f} s ({c_s} cand.)   grid {t_g:7.3f} s ({c_g} cand.)")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="smaller scenes, scaling up to 1e5")
    ap.add_argument("--index", action="store_true", help="grid vs sort-and-sweep only")
    ap.add_argument("--scaling-one", type=int, help=argparse.SUPPRESS)
    args = ap.parse_args()
    if args.scaling_one:
        print(json.dumps(scaling_one(args.scaling_one)))
        return
    if args.index:
        index_comparison()
        return
    main_runs(args.quick)
    scaling(args.quick)


if __name__ == "__main__":
    main()
