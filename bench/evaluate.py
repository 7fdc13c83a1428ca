"""Benchmark of detector evaluation (obbiou.evaluation) against a plain Python + shapely matcher.

Run: ``python bench/evaluate.py`` (full: 5 000 frames x 100 detections x 40 truths, rotated
boxes, 10 IoU thresholds 0.5:0.95:0.05, 1000 bootstrap resamples) or ``--quick``.

The data is synthetic, generated here with a fixed seed: random rotated boxes per frame and a
simulated detector (most detections are noisy copies of a truth, some are false alarms, some
carry the wrong label). Prints the times, the ratio to the straightforward matcher on a
subset of frames (both give the same TP counts there, checked), and the peak resident memory.

Goals: evaluation < 10 s, 1000 resamples < 10 s on 2 cores, peak RSS < 1 GB.

``--thresholds`` instead times very fine ``iou`` steps on a small table (20 frames, 200
detections): 1 001, 4 501 and 45 001 thresholds, CPU time per threshold. The cost grows
linearly with the count (it grew with its square before the thresholds were looked up by
bisection: 45 001 took 74 s of CPU); beyond 100 001 thresholds ``evaluate`` refuses.
"""

from __future__ import annotations

import argparse
import os
import sys
import time

import numpy as np

sys.path.insert(0, os.path.join(os.path.dirname(__file__), ".."))

LABELS = np.array(["vessel", "container", "crane", "vehicle"], dtype=object)


def synthetic(nframes: int, ndet: int, ntruth: int, seed: int = 0) -> tuple[dict, dict]:
    """Synthetic labelled frames (invented data): truths and simulated detections."""
    rng = np.random.default_rng(seed)
    m, n = nframes * ntruth, nframes * ndet
    tframe = np.repeat(np.arange(nframes), ntruth)
    truth = {
        "frame": tframe,
        "label": LABELS[rng.integers(0, len(LABELS), m)],
        "cx": rng.uniform(0, 1000, m),
        "cy": rng.uniform(0, 1000, m),
        "width": rng.uniform(10, 60, m),
        "height": rng.uniform(5, 25, m),
        "angle": rng.uniform(-np.pi, np.pi, m),
        "ignore": rng.random(m) < 0.03,
    }
    dframe = np.repeat(np.arange(nframes), ndet)
    src = dframe * ntruth + rng.integers(0, ntruth, n)  # the truth each detection aims at
    near = rng.random(n) < 0.75
    wrong = rng.random(n) < 0.05

    def around(col, sd, lo, hi):
        return np.where(near, truth[col][src] + rng.normal(0, sd, n), rng.uniform(lo, hi, n))

    dets = {
        "frame": dframe,
        "label": np.where(wrong, LABELS[rng.integers(0, len(LABELS), n)], truth["label"][src]),
        "score": rng.random(n),
        "cx": around("cx", 2.0, 0, 1000),
        "cy": around("cy", 2.0, 0, 1000),
        "width": np.abs(around("width", 3.0, 10, 60)),
        "height": np.abs(around("height", 1.5, 5, 25)),
        "angle": around("angle", 0.08, -np.pi, np.pi),
    }
    return truth, dets


def subset(table: dict, frames: int) -> dict:
    keep = table["frame"] < frames
    return {k: v[keep] for k, v in table.items()}


def shapely_match(truth: dict, dets: dict, thresholds: np.ndarray) -> np.ndarray:
    """The straightforward way: per frame and label, a shapely IoU matrix and a Python loop.

    Returns TP counts per threshold.
    """
    import shapely

    from obbiou.boxes import corners

    tpoly = shapely.polygons(
        corners(np.c_[[truth[c] for c in ("cx", "cy", "width", "height", "angle")]].T)
    )
    dpoly = shapely.polygons(
        corners(np.c_[[dets[c] for c in ("cx", "cy", "width", "height", "angle")]].T)
    )
    tp = np.zeros(len(thresholds), dtype=np.int64)
    groups: dict = {}
    for i, key in enumerate(zip(truth["frame"], truth["label"], strict=True)):
        groups.setdefault(key, ([], []))[0].append(i)
    for i, key in enumerate(zip(dets["frame"], dets["label"], strict=True)):
        groups.setdefault(key, ([], []))[1].append(i)
    for t_idx, d_idx in groups.values():
        if not t_idx or not d_idx:
            continue
        d_idx = sorted(d_idx, key=lambda i: -dets["score"][i])
        a = dpoly[d_idx][:, None]
        b = tpoly[t_idx][None, :]
        inter = shapely.area(shapely.intersection(a, b))
        union = shapely.area(a) + shapely.area(b) - inter
        iou = np.where(union > 0, inter / np.where(union > 0, union, 1), 0.0)
        ignore = truth["ignore"][t_idx]
        for k, thr in enumerate(thresholds):
            taken = np.zeros(len(t_idx), dtype=bool)
            for r in range(len(d_idx)):
                cand = (iou[r] >= thr) & ~taken & ~ignore
                if cand.any():
                    j = int(np.argmax(np.where(cand, iou[r], -1.0)))
                    taken[j] = True
                    tp[k] += 1
    return tp


def peak_rss_mb() -> float:
    import resource

    kb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    return kb / 1024.0


def many_thresholds() -> None:
    """CPU time of evaluate + summary for ever finer iou steps on a small table."""
    from obbiou.evaluation import evaluate

    truth, dets = synthetic(20, 10, 8, seed=2)
    evaluate(truth, dets, iou=0.5)  # compile or load the kernels first
    print("many thresholds, 20 frames x 10 detections x 8 truths: CPU time of evaluate + summary")
    for spec in ("0.5:0.95:0.00045", "0.5:0.95:0.0001", "0.5:0.95:0.00001"):
        c0 = time.process_time()
        ev = evaluate(truth, dets, iou=spec)
        ev.summary()
        cpu = time.process_time() - c0
        k = len(ev.thresholds)
        print(f"  {spec:<18} {k:>6} thresholds  {cpu:7.2f} s  {cpu / k * 1e3:6.3f} ms each")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="500 frames, 200 resamples")
    parser.add_argument(
        "--thresholds", action="store_true", help="only time very fine iou steps (see above)"
    )
    args = parser.parse_args()
    if args.thresholds:
        many_thresholds()
        return
    nframes = 500 if args.quick else 5000
    resamples = 200 if args.quick else 1000
    ndet, ntruth = 100, 40
    subset_frames = 20 if args.quick else 50

    from obbiou.evaluation import evaluate

    print(f"obbiou evaluation benchmark (synthetic data; {os.cpu_count()} CPUs visible)")
    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    print(
        f"  load average before the run: {load:.1f} (times are wall clock; a busy machine "
        "inflates them)"
    )
    t0 = time.perf_counter()
    warm_t, warm_d = synthetic(3, 10, 5, seed=1)
    evaluate(warm_t, warm_d, iou="0.5:0.95:0.05").interval(resamples=5)
    print(f"  first call (numba compile or cache load): {time.perf_counter() - t0:.2f} s")

    truth, dets = synthetic(nframes, ndet, ntruth)
    print(
        f"  data: {nframes} frames x {ndet} detections x {ntruth} truths (rotated), "
        "10 thresholds 0.5:0.95:0.05"
    )
    t0, c0 = time.perf_counter(), time.process_time()
    ev = evaluate(truth, dets, iou="0.5:0.95:0.05")
    t_eval, c_eval = time.perf_counter() - t0, time.process_time() - c0
    t0, c0 = time.perf_counter(), time.process_time()
    lo, hi = ev.interval(resamples=resamples, seed=0)
    t_boot, c_boot = time.perf_counter() - t0, time.process_time() - c0
    print(
        f"  mean AP 0.5:0.95 = {ev.mean_ap():.4f}, {resamples}-resample 95 % interval "
        f"[{lo:.4f}, {hi:.4f}]"
    )

    sub_t, sub_d = subset(truth, subset_frames), subset(dets, subset_frames)
    t0 = time.perf_counter()
    sub_ev = evaluate(sub_t, sub_d, iou="0.5:0.95:0.05")
    t_ours_sub = time.perf_counter() - t0
    t0 = time.perf_counter()
    ref_tp = shapely_match(sub_t, sub_d, np.asarray(ev.thresholds))
    t_ref_sub = time.perf_counter() - t0
    our_tp = np.array(
        [sum(sub_ev.counts(lab, t).tp for lab in sub_ev.labels) for t in sub_ev.thresholds]
    )
    agree = np.array_equal(ref_tp, our_tp)
    per_frame_ours = t_eval / nframes
    per_frame_ref = t_ref_sub / subset_frames
    rss = peak_rss_mb()

    rows = [
        ("evaluate (match + AP, 10 thresholds)", f"{t_eval:.2f} s", "< 10 s"),
        ("  its CPU time (all threads)", f"{c_eval:.2f} s", ""),
        (f"bootstrap, {resamples} resamples (mAP)", f"{t_boot:.2f} s", "< 10 s"),
        ("  its CPU time (all threads)", f"{c_boot:.2f} s", ""),
        (f"Python + shapely matcher, {subset_frames} frames", f"{t_ref_sub:.2f} s", ""),
        (f"obbiou on the same {subset_frames} frames", f"{t_ours_sub:.3f} s", ""),
        (
            "per frame: shapely / obbiou (full run)",
            f"{per_frame_ref * 1e3:.1f} ms / {per_frame_ours * 1e3:.3f} ms",
            "",
        ),
        (
            "ratio (shapely time / obbiou time per frame)",
            f"{per_frame_ref / per_frame_ours:.0f}x",
            "",
        ),
        ("same TP counts as the shapely matcher", "yes" if agree else "NO", ""),
        ("peak resident memory", f"{rss:.0f} MB", "< 1024 MB"),
    ]
    width = max(len(r[0]) for r in rows)
    print()
    for name, value, goal in rows:
        print(f"  {name:<{width}}  {value:>18}  {goal}")
    if not agree:
        print("  TP counts differ:", ref_tp.tolist(), our_tp.tolist())


if __name__ == "__main__":
    main()
