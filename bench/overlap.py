"""Benchmark of the overlap measures against the straightforward shapely 2.x way.

Run with ``python bench/overlap.py`` (``--quick`` for a short run). Every comparison runs
both sides in this process on the same boxes and prints the ratio. The shapely side is the
vectorised way a practitioner would write it: polygon arrays, ``shapely.intersection`` +
``shapely.area``, union = area(a) + area(b) - intersection. Where shapely would take long it
runs on a subset of rows and its time is scaled to the full size (said so in the output).
Boxes are random (seeded), invented for the benchmark.
"""

from __future__ import annotations

import argparse
import os
import sys

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.dirname(os.path.abspath(__file__))))

from bench._util import median_time, report, run_python  # noqa: E402


def crowded_rotated(rng: np.random.Generator, n: int) -> np.ndarray:
    """Rotated boxes packed into a small region so that most pairs overlap."""
    return np.column_stack(
        [
            rng.uniform(0, 4, n),
            rng.uniform(0, 4, n),
            rng.uniform(2, 6, n),
            rng.uniform(2, 6, n),
            rng.uniform(-np.pi, np.pi, n),
        ]
    )


def crowded_upright(rng: np.random.Generator, n: int) -> np.ndarray:
    return np.column_stack(
        [
            rng.uniform(0, 4, n),
            rng.uniform(0, 4, n),
            rng.uniform(0, 1, n),
            rng.uniform(2, 6, n),
            rng.uniform(2, 6, n),
            rng.uniform(1, 2, n),
            rng.uniform(-np.pi, np.pi, n),
        ]
    )


def shapely_polygons(rotated: np.ndarray):
    import shapely

    from obbiou.boxes import corners

    return shapely.polygons(corners(rotated))


def shapely_all_pairs_iou(pa, pb) -> np.ndarray:
    import shapely

    inter = shapely.area(shapely.intersection(pa[:, None], pb[None, :]))
    union = shapely.area(pa)[:, None] + shapely.area(pb)[None, :] - inter
    return inter / union


def bench_all_pairs_rotated(n: int, sub: int, repeat: int) -> None:
    import obbiou

    rng = np.random.default_rng(0)
    a, b = crowded_rotated(rng, n), crowded_rotated(rng, n)
    ours = median_time(lambda: obbiou.iou(a, b), repeat=repeat)
    pa, pb = shapely_polygons(a[:sub]), shapely_polygons(b)
    theirs = median_time(lambda: shapely_all_pairs_iou(pa, pb), repeat=max(1, repeat // 2))
    theirs *= n / sub
    value = obbiou.iou(a[:sub], b)
    err = np.abs(value - shapely_all_pairs_iou(pa, pb)).max()
    share = (obbiou.iou(a, b) > 0).mean()
    report(
        f"all-pairs IoU, {n} x {n} rotated boxes ({share:.0%} of pairs overlap)",
        ours,
        theirs,
        goal=400,
        note=f"shapely on {sub} x {n} rows, time scaled x{n / sub:g}; max |diff| {err:.1e}",
    )
    print(f"    obbiou {n * n / ours / 1e6:.1f} M pairs/s")


def bench_all_pairs_upright(n: int, sub: int, repeat: int) -> None:
    import shapely

    import obbiou
    from obbiou.boxes import footprint

    rng = np.random.default_rng(1)
    a, b = crowded_upright(rng, n), crowded_upright(rng, n)
    ours = median_time(lambda: obbiou.iou(a, b), repeat=repeat)
    asub = a[:sub]
    pa, pb = shapely_polygons(footprint(asub)), shapely_polygons(footprint(b))
    za0, za1 = asub[:, 2] - asub[:, 5] / 2, asub[:, 2] + asub[:, 5] / 2
    zb0, zb1 = b[:, 2] - b[:, 5] / 2, b[:, 2] + b[:, 5] / 2
    va, vb = np.prod(asub[:, 3:6], axis=1), np.prod(b[:, 3:6], axis=1)

    def theirs_fn():
        inter2 = shapely.area(shapely.intersection(pa[:, None], pb[None, :]))
        dz = np.minimum(za1[:, None], zb1) - np.maximum(za0[:, None], zb0)
        inter = inter2 * np.clip(dz, 0, None)
        return inter / (va[:, None] + vb - inter)

    theirs = median_time(theirs_fn, repeat=max(1, repeat // 2)) * n / sub
    err = np.abs(obbiou.iou(asub, b) - theirs_fn()).max()
    report(
        f"all-pairs IoU, {n} x {n} upright 3D boxes",
        ours,
        theirs,
        goal=400,
        note=f"shapely footprints x z-interval on {sub} x {n} rows, time scaled "
        f"x{n / sub:g}; max |diff| {err:.1e}",
    )


def bench_elementwise(n: int, sub: int, repeat: int) -> None:
    import shapely

    import obbiou

    rng = np.random.default_rng(2)
    a, b = crowded_rotated(rng, n), crowded_rotated(rng, n)
    ours = median_time(lambda: obbiou.iou(a, b, elementwise=True), repeat=repeat)
    pa, pb = shapely_polygons(a[:sub]), shapely_polygons(b[:sub])

    def theirs_fn():
        inter = shapely.area(shapely.intersection(pa, pb))
        return inter / (shapely.area(pa) + shapely.area(pb) - inter)

    theirs = median_time(theirs_fn, repeat=max(1, repeat // 2)) * n / sub
    err = np.abs(obbiou.iou(a[:sub], b[:sub], elementwise=True) - theirs_fn()).max()
    report(
        f"elementwise IoU, {n} rotated pairs",
        ours,
        theirs,
        goal=200,
        note=f"shapely on {sub} pairs, time scaled x{n / sub:g}; max |diff| {err:.1e}",
    )


def bench_cold_start(repeat: int) -> None:
    import_code = (
        "import time; t = time.perf_counter(); import obbiou; print(time.perf_counter() - t)"
    )
    first_call = (
        "import time; t = time.perf_counter(); import obbiou; "
        "obbiou.iou([[0, 0, 2, 1, 0.3]], [[0.5, 0, 2, 1, 0.0]]); "
        "print(time.perf_counter() - t)"
    )
    run_python("import obbiou.measures as m; m.warmup()")  # the on-disk cache is warm
    imports = sorted(float(run_python(import_code)) for _ in range(repeat))
    firsts = sorted(float(run_python(first_call)) for _ in range(repeat))
    t_import = imports[len(imports) // 2]
    t_first = firsts[len(firsts) // 2]
    print("cold start (fresh processes, on-disk kernel cache warm)")
    ok_import = "met" if t_import < 0.5 else "NOT met"
    ok_first = "met" if t_first < 1 else "NOT met"
    print(f"    import obbiou {t_import:.3f} s (goal < 0.5 s: {ok_import})")
    print(f"    import + first iou call {t_first:.3f} s (goal < 1 s: {ok_first})")


def bench_memory(n: int) -> None:
    code = f"""
import numpy as np
import obbiou
from bench._util import peak_rss_mb, rss_mb
rng = np.random.default_rng(3)
a = np.column_stack([rng.uniform(0, 1000, ({n}, 2)), rng.uniform(1, 20, ({n}, 2)),
                     rng.uniform(-3, 3, {n})])
obbiou.iou(a[:2], a[:2])
base = rss_mb()
out = obbiou.iou(a, a)
print(base, peak_rss_mb(), out.nbytes / 1e6)
"""
    base, peak, output = (float(x) for x in run_python(code).split())
    extra = peak - base - output
    print(f"memory: all-pairs IoU of {n} x {n} rotated boxes (fresh process)")
    print(
        f"    peak RSS {peak:.0f} MB = {base:.0f} MB before the call + {output:.0f} MB output "
        f"+ {extra:.0f} MB other"
    )


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="smaller subsets, fewer runs")
    args = parser.parse_args(argv)
    repeat = 3 if args.quick else 7
    sub = 50 if args.quick else 200
    import obbiou.measures

    obbiou.measures.warmup()
    print(f"obbiou benchmark (median of {repeat} runs; shapely median of {max(1, repeat // 2)})")
    print()
    bench_all_pairs_rotated(1000, sub, repeat)
    bench_all_pairs_upright(1000, sub, repeat)
    bench_elementwise(1_000_000, 20_000 if args.quick else 100_000, repeat)
    bench_cold_start(3 if args.quick else 5)
    bench_memory(10_000)


if __name__ == "__main__":
    main()
