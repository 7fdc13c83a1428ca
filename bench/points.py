"""Lidar points inside upright boxes: obbiou against the shapely way and a numpy loop.

Run: ``python bench/points.py`` (10**6 points, 10**4 boxes), ``python bench/points.py
--quick`` (10**5 points, 10**3 boxes), ``--cells F`` (grid cell side as F x the median box
extent: the measurement behind ``_CELL_FACTOR`` in ``obbiou/points.py``).

The scene is invented (seeded): an inventory yard of upright boxes (pallets, people,
forklifts, vans; 20 % turned by exact multiples of 90 degrees, as in racks) and lidar-like
points: 40 % on the ground plane, 50 % on the boxes' top and side faces, 10 % clutter
within 0.3 m of a box.

The shapely way, in the same process on the same arrays: footprint polygons in an
``STRtree``, the points as shapely points queried against it for candidate pairs,
``contains_xy`` on the candidates, then the z test and a bincount. The plain numpy way
loops over the boxes and moves every point into each box's frame (timed on a sample of
boxes and scaled to all: a full run would take minutes).
"""

from __future__ import annotations

import argparse
import os
import statistics
import sys
import time

import numpy as np

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), ".."))
sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))

from _util import peak_rss_mb, rss_mb  # noqa: E402

from obbiou import points as P  # noqa: E402
from obbiou.boxes import corners, footprint  # noqa: E402

# Sizes (length, width, height in metres) of the invented objects.
KINDS = np.array([[1.2, 0.8, 1.4], [0.6, 0.6, 1.8], [2.6, 1.2, 2.1], [5.0, 2.0, 2.2]])


def yard(n_points: int, n_boxes: int, seed: int = 0) -> tuple[np.ndarray, np.ndarray]:
    """(points (N, 3), boxes (M, 7)) of the invented yard, density 1 box per 25 m^2."""
    rng = np.random.default_rng(seed)
    side = np.sqrt(25.0 * n_boxes)
    size = KINDS[rng.integers(0, len(KINDS), n_boxes)] * rng.uniform(0.9, 1.1, (n_boxes, 1))
    yaw = rng.uniform(-np.pi, np.pi, n_boxes)
    racked = rng.random(n_boxes) < 0.2
    yaw[racked] = rng.integers(-2, 2, racked.sum()) * (np.pi / 2)
    centre = rng.uniform(0, side, (n_boxes, 2))
    boxes = np.column_stack([centre, size[:, 2] / 2, size, yaw])

    n_ground = int(0.4 * n_points)
    n_face = int(0.5 * n_points)
    n_near = n_points - n_ground - n_face
    ground = np.column_stack([rng.uniform(0, side, (n_ground, 2)), rng.normal(0.0, 0.02, n_ground)])
    # Points on faces: box-frame coordinates on the top or on one of the four sides.
    b = rng.integers(0, n_boxes, n_face)
    half = boxes[b, 3:6] / 2
    u = rng.uniform(-1, 1, (n_face, 3))
    face = rng.integers(0, 5, n_face)  # 0..3 sides, 4 top
    axis = np.where(face < 2, 0, np.where(face < 4, 1, 2))
    sign = np.where((face % 2 == 0) | (face == 4), 1.0, -1.0)
    u[np.arange(n_face), axis] = sign
    on = _to_world(u * half, boxes[b])
    # Clutter near boxes: up to 0.3 m outside a face.
    b = rng.integers(0, n_boxes, n_near)
    u = rng.uniform(-1, 1, (n_near, 3)) * (boxes[b, 3:6] / 2 + 0.3)
    near = _to_world(u, boxes[b])
    pts = np.concatenate([ground, on, near])
    return pts[rng.permutation(len(pts))], boxes


def _to_world(local: np.ndarray, boxes: np.ndarray) -> np.ndarray:
    c, s = np.cos(boxes[:, 6]), np.sin(boxes[:, 6])
    x = boxes[:, 0] + c * local[:, 0] - s * local[:, 1]
    y = boxes[:, 1] + s * local[:, 0] + c * local[:, 1]
    return np.column_stack([x, y, boxes[:, 2] + local[:, 2]])


# ------------------------------------------------------------------ the other ways


def shapely_counts(pts: np.ndarray, boxes: np.ndarray) -> np.ndarray:
    import shapely

    feet = shapely.polygons(corners(footprint(boxes)))
    tree = shapely.STRtree(feet)
    pi, bi = tree.query(shapely.points(pts[:, :2]))
    inside = shapely.contains_xy(feet[bi], pts[pi, 0], pts[pi, 1])
    dz = np.abs(pts[pi, 2] - boxes[bi, 2])
    inside &= dz <= boxes[bi, 5] / 2
    return np.bincount(bi[inside], minlength=len(boxes)).astype(np.int64)


def numpy_counts(pts: np.ndarray, boxes: np.ndarray) -> np.ndarray:
    out = np.zeros(len(boxes), np.int64)
    for k, (cx, cy, cz, length, width, height, yaw) in enumerate(boxes):
        dx, dy = pts[:, 0] - cx, pts[:, 1] - cy
        c, s = np.cos(yaw), np.sin(yaw)
        inside = (np.abs(dx * c + dy * s) <= length / 2) & (np.abs(dy * c - dx * s) <= width / 2)
        out[k] = np.count_nonzero(inside & (np.abs(pts[:, 2] - cz) <= height / 2))
    return out


CPU: dict[str, float] = {}  # median CPU seconds per call of the last timed() call


def timed(fn, repeat: int) -> tuple[list[float], object]:
    """Wall times of ``repeat`` calls of ``fn()`` and the last result; the median CPU time
    of the process (all threads) per call goes to ``CPU["last"]``: far less disturbed than
    wall time when other jobs share the machine."""
    times, cpus, out = [], [], None
    for _ in range(repeat):
        c, t = time.process_time(), time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t)
        cpus.append(time.process_time() - c)
    CPU["last"] = statistics.median(cpus)
    return times, out


def span(times: list[float]) -> str:
    return (
        f"median {statistics.median(times) * 1e3:8.1f} ms "
        f"(range {min(times) * 1e3:.1f}-{max(times) * 1e3:.1f} over {len(times)} runs)"
    )


def closed_check(pts: np.ndarray, boxes: np.ndarray, hits) -> str:
    """Compare the pairs with shapely's closed test (intersects_xy: the boundary counts,
    then z) and say how far from a face the points are where the two disagree."""
    import shapely

    n = len(pts)
    feet = shapely.polygons(corners(footprint(boxes)))
    pi, bi = shapely.STRtree(feet).query(shapely.points(pts[:, :2]))
    ref = shapely.intersects_xy(feet[bi], pts[pi, 0], pts[pi, 1])
    ref &= np.abs(pts[pi, 2] - boxes[bi, 2]) <= boxes[bi, 5] / 2
    ours = np.isin(bi * n + pi, hits.box * n + hits.point)
    missing = len(hits) - int(ours.sum())  # our pairs that shapely's index did not offer
    bad = ref != ours
    if not bad.any() and not missing:
        return f"all {len(ref):,} candidate pairs agree with shapely's closed test"
    edge = shapely.distance(shapely.boundary(feet[bi[bad]]), shapely.points(pts[pi[bad], :2]))
    dz = np.abs(np.abs(pts[pi[bad], 2] - boxes[bi[bad], 2]) - boxes[bi[bad], 5] / 2)
    near = float(np.max(np.minimum(edge, dz))) if bad.any() else 0.0
    return (
        f"{int(bad.sum())} of {len(ref):,} candidate pairs differ from shapely's closed test "
        f"(intersects_xy), all within {near:.1e} m of a face (rounding of the corners); "
        f"pairs outside shapely's candidates: {missing}"
    )


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="1e5 points, 1e3 boxes")
    ap.add_argument("--cells", type=float, nargs="*", help="cell side factors to compare")
    ap.add_argument("--aspect", type=float, nargs="*", default=[1.0], help="with --cells")
    ap.add_argument("--repeat", type=int, default=7)
    args = ap.parse_args()
    n, m = (10**5, 10**3) if args.quick else (10**6, 10**4)
    pts, boxes = yard(n, m)
    from obbiou._kernels import threads as T

    threads = T.count()
    print(
        f"invented yard: {n:,} points, {m:,} upright boxes; {threads} threads; "
        f"load average {os.getloadavg()[0]:.1f} (shared machine)"
    )
    rss0 = rss_mb()
    t = time.perf_counter()
    P.count_in_boxes(pts[:10], boxes[:2])
    print(f"first call (compile or load from the cache): {time.perf_counter() - t:.2f} s")

    if args.cells:
        for f in args.cells:
            for aspect in args.aspect:
                P._CELL_FACTOR, P._CELL_ASPECT = f, aspect
                times, _ = timed(lambda: P.count_in_boxes(pts, boxes), args.repeat + 1)
                print(
                    f"cell height {f:4.2f} x median extent, width / {aspect:g}: {span(times[1:])}"
                )
        return

    ours: dict[int, list[float]] = {}
    ours_cpu: dict[int, float] = {}
    settings = sorted({threads, 1}, reverse=True) if n >= P._SERIAL_BELOW else [1]
    if n < P._SERIAL_BELOW:
        print(f"(below {P._SERIAL_BELOW:,} points the scan runs on one thread)")
    below = P._SERIAL_BELOW
    for th in settings:
        P._SERIAL_BELOW = below if th > 1 else float("inf")  # one thread: the serial path
        times, counts = timed(lambda: P.count_in_boxes(pts, boxes), args.repeat + 1)
        ours[th] = times[1:]  # the first call sizes the arrays of the process
        ours_cpu[th] = CPU["last"]
        fill, hits = timed(lambda: P.points_in_boxes(pts, boxes), args.repeat)
        rate = n / statistics.median(ours[th]) / 1e6
        print(f"obbiou count_in_boxes  {th} thread(s)  {span(ours[th])}  {rate:5.1f} M points/s")
        print(f"obbiou points_in_boxes {th} thread(s)  {span(fill)}  {len(hits):,} pairs")
    P._SERIAL_BELOW = below
    peak = peak_rss_mb()
    theirs, ref = timed(lambda: shapely_counts(pts, boxes), max(3, args.repeat // 2))
    theirs_cpu = CPU["last"]
    sample = max(1, m // 200)
    loop, part = timed(lambda: numpy_counts(pts, boxes[:sample]), 3)
    loop = [x * m / sample for x in loop]
    print(f"shapely STRtree way              {span(theirs)}")
    print(f"numpy loop over boxes            {span(loop)}  (on {sample} boxes, scaled to {m:,})")
    for th, times in ours.items():
        ratio = statistics.median(theirs) / statistics.median(times)
        worst = min(theirs) / max(times)
        print(
            f"ratio shapely / obbiou ({th} thread(s)): median {ratio:5.0f}x, worst pairing "
            f"{worst:4.0f}x  (goal >= 50x: {'met' if ratio >= 50 else 'NOT met'}); numpy loop "
            f"/ obbiou {statistics.median(loop) / statistics.median(times):6.0f}x"
        )
        print(
            f"    CPU time per call: obbiou {ours_cpu[th] * 1e3:.1f} ms (all threads), shapely "
            f"{theirs_cpu * 1e3:.0f} ms: ratio {theirs_cpu / ours_cpu[th]:.0f}x"
        )
    print(f"peak memory: {peak:.0f} MB resident, {peak - rss0:+.0f} MB over the scene's arrays")
    print(f"points counted: {int(counts.sum()):,} (shapely's contains_xy: {int(ref.sum()):,})")
    print(closed_check(pts, boxes, hits))
    if not np.array_equal(counts[:sample], part):
        print("counts DIFFER from the numpy loop in boxes", np.flatnonzero(counts[:sample] != part))
    else:
        print(f"counts equal to the numpy loop's in the {sample} boxes it ran")
    if not np.array_equal(hits.counts(), counts):
        print("points_in_boxes and count_in_boxes DISAGREE")


if __name__ == "__main__":
    main()
