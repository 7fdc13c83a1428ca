"""Benchmark of lidar-style evaluation: centre-distance matching, BEV matching, point counts.

Run: ``python bench/lidar_evaluation.py`` (10 000 sweeps x 20 truths x 25 detections, upright
boxes, 100 lidar returns per sweep) or ``--quick`` (1 000 sweeps).

The data is synthetic, generated here with a fixed seed (invented warehouse sweeps and a
simulated detector). Prints wall and CPU time of ``evaluate`` by centre distance
(0.5, 1, 2, 4 m), by BEV IoU and by 3D IoU, of the point counts (``points=``), of
``tp_errors()``; and the ratio of distance matching to the straightforward way — a Python
loop per frame and label over a numpy distance matrix, the greedy rule written out — on a
subset of sweeps, where both must give the same TP counts (checked). For BEV matching the
straightforward way is shapely 2.x: footprint polygons, the IoU of every same-frame pair
by ``shapely.intersection``, the same greedy loop. For the point counts alone (10**6 points
in 10**4 sweeps): ``count_in_boxes`` with the frames (one call) against one
``count_in_boxes`` call per sweep (how evaluation counted before), both checked equal.

``--cluster N`` adds distance matching with point counts from Parquet folders (4 files per
table, frames split across files) in process and on a local Dask cluster of N worker
processes (started before the timing), with the results checked identical. On one machine
this shows the cost of the Dask path, not a gain (see ``bench/distributed.py``).
"""

from __future__ import annotations

import argparse
import os
import sys
import time

import numpy as np

sys.path.insert(0, os.path.join(os.path.dirname(__file__), ".."))

LABELS = np.array(["pallet", "forklift", "person"], dtype=object)
COLS = ("cx", "cy", "cz", "length", "width", "height", "yaw")


def synthetic(frames: int, ntruth: int, ndet: int, npts: int, seed: int = 0):
    """Invented sweeps: truths, simulated detections (noisy copies, false alarms), points."""
    rng = np.random.default_rng(seed)
    m, n = frames * ntruth, frames * ndet
    lab = rng.integers(0, 3, m)
    size = np.array([[1.2, 0.8, 1.2], [3.0, 1.2, 2.2], [0.5, 0.5, 1.8]])[lab]
    truth = {
        "frame": np.repeat(np.arange(frames), ntruth),
        "label": LABELS[lab],
        "cx": rng.uniform(-25, 25, m),
        "cy": rng.uniform(-25, 25, m),
        "cz": size[:, 2] / 2,
        "length": size[:, 0],
        "width": size[:, 1],
        "height": size[:, 2],
        "yaw": rng.uniform(-np.pi, np.pi, m),
    }
    src = np.repeat(np.arange(frames), ndet) * ntruth + rng.integers(0, ntruth, n)
    near = rng.random(n) < 0.8
    dets = {"frame": np.repeat(np.arange(frames), ndet), "label": truth["label"][src]}
    for c, sd in zip(COLS, (0.4, 0.4, 0.1, 0.1, 0.05, 0.1, 0.2), strict=True):
        v = truth[c][src] + rng.normal(0, sd, n)
        if c in ("cx", "cy"):
            v = np.where(near, v, rng.uniform(-25, 25, n))
        dets[c] = np.abs(v) if c in ("length", "width", "height") else v
    dets["score"] = rng.random(n)
    k = frames * npts
    points = {
        "frame": np.repeat(np.arange(frames), npts),
        "x": rng.uniform(-25, 25, k),
        "y": rng.uniform(-25, 25, k),
        "z": rng.uniform(0, 2.5, k),
    }
    return truth, dets, points


def subset(table: dict, frames: int) -> dict:
    keep = table["frame"] < frames
    return {k: np.asarray(v)[keep] for k, v in table.items()}


def greedy(truth: dict, dets: dict, closeness, thresholds) -> np.ndarray:
    """The greedy rule as a plain loop; ``closeness(di, tj)`` is a (len di, len tj) matrix of
    "higher is closer" values, matched at >= threshold. Returns TP counts per threshold."""
    tp = np.zeros(len(thresholds), dtype=int)
    for f in np.unique(np.r_[truth["frame"], dets["frame"]]):
        for lab in LABELS:
            ti = np.flatnonzero((truth["frame"] == f) & (truth["label"] == lab))
            di = np.flatnonzero((dets["frame"] == f) & (dets["label"] == lab))
            if not len(ti) or not len(di):
                continue
            di = di[np.lexsort((di, -dets["score"][di]))]
            sim = closeness(di, ti)
            for k, t in enumerate(thresholds):
                taken = np.zeros(len(ti), dtype=bool)
                for row in sim:
                    ok = (row >= t) & ~taken
                    if ok.any():
                        j = int(np.argmax(np.where(ok, row, -np.inf)))
                        taken[j] = True
                        tp[k] += 1
    return tp


def timed(fn):
    t0, c0 = time.perf_counter(), time.process_time()
    out = fn()
    return out, time.perf_counter() - t0, time.process_time() - c0


def main() -> None:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--quick", action="store_true")
    p.add_argument("--cluster", type=int, default=0, metavar="N", help="also on N Dask workers")
    args = p.parse_args()
    frames = 1_000 if args.quick else 10_000
    ref_frames = 100 if args.quick else 300
    import shapely

    from obbiou.boxes import corners
    from obbiou.evaluation import evaluate

    truth, dets, points = synthetic(frames, 20, 25, 100)
    print(f"lidar evaluation benchmark (synthetic, invented data; {os.cpu_count()} CPUs visible)")
    print(f"  {frames} sweeps, {len(truth['cx'])} truths, {len(dets['cx'])} detections, "
          f"{len(points['x'])} points")  # fmt: skip
    evaluate(subset(truth, 2), subset(dets, 2), distance=[1.0], points=subset(points, 2))
    evaluate(subset(truth, 2), subset(dets, 2), bev=True)  # compile or load the kernels
    distances = [0.5, 1.0, 2.0, 4.0]
    rows = []
    ev, w, c = timed(lambda: evaluate(truth, dets, distance=distances))
    rows.append(("evaluate, distance 0.5/1/2/4 m", w, c))
    _, w, c = timed(lambda: evaluate(truth, dets, bev=True, iou="0.5,0.7"))
    rows.append(("evaluate, BEV IoU 0.5/0.7", w, c))
    _, w, c = timed(lambda: evaluate(truth, dets, iou="0.5,0.7"))
    rows.append(("evaluate, 3D IoU 0.5/0.7", w, c))
    _, w, c = timed(lambda: evaluate(truth, dets, distance=distances, points=points, min_points=3))
    rows.append(("evaluate, distance + points (min 3)", w, c))
    _, w, c = timed(lambda: ev.tp_errors())
    rows.append(("tp_errors() of the distance result", w, c))
    for name, wall, cpu in rows:
        print(f"  {name:<38} wall {wall:7.3f} s   cpu {cpu:7.3f} s")
    count_points(truth, points)
    if args.cluster:
        on_cluster(truth, dets, points, args.cluster)

    # the straightforward ways on a subset of sweeps, checked against obbiou's TP counts
    st, sd = subset(truth, ref_frames), subset(dets, ref_frames)
    tc = np.column_stack([st["cx"], st["cy"]])
    dc = np.column_stack([sd["cx"], sd["cy"]])

    def neg_distance(di, ti):
        return -np.hypot(dc[di, None, 0] - tc[None, ti, 0], dc[di, None, 1] - tc[None, ti, 1])

    ref, rw, rc = timed(lambda: greedy(st, sd, neg_distance, [-d for d in distances]))
    ours, ow, oc = timed(lambda: evaluate(st, sd, distance=distances))
    got = [sum(ours.counts(lab, d).tp for lab in ours.labels) for d in distances]
    assert got == ref.tolist(), (got, ref.tolist())
    print(f"  distance matching, {ref_frames} sweeps: python loop {rw:.3f} s, obbiou {ow:.3f} s "
          f"(cpu {rc:.3f} / {oc:.3f} s): {rw / ow:.0f}x; TP counts equal")  # fmt: skip

    def footprints(t):
        b = np.column_stack([t[c] for c in COLS])
        return shapely.polygons(corners(b, shape="upright")[:, :4, :2])

    tp_, dp_ = footprints(st), footprints(sd)

    def bev_iou(di, ti):
        a, b = dp_[di][:, None], tp_[ti][None, :]
        inter = shapely.area(shapely.intersection(a, b))
        return inter / (shapely.area(a) + shapely.area(b) - inter)

    ref, rw, rc = timed(lambda: greedy(st, sd, bev_iou, [0.5, 0.7]))
    ours, ow, oc = timed(lambda: evaluate(st, sd, bev=True, iou="0.5,0.7"))
    got = [sum(ours.counts(lab, t).tp for lab in ours.labels) for t in (0.5, 0.7)]
    assert got == ref.tolist(), (got, ref.tolist())
    print(f"  BEV matching, {ref_frames} sweeps: shapely loop {rw:.3f} s, obbiou {ow:.3f} s "
          f"(cpu {rc:.3f} / {oc:.3f} s): {rw / ow:.0f}x; TP counts equal")  # fmt: skip


def on_cluster(truth: dict, dets: dict, points: dict, workers: int) -> None:
    """Distance matching + point counts from Parquet folders: in process and on Dask workers
    (each worker one thread), results checked identical."""
    import json
    import tempfile
    from pathlib import Path

    import pandas as pd

    # bench/distributed.py would shadow Dask's ``distributed``: take this folder off the path
    here_dir = Path(__file__).resolve().parent
    sys.path[:] = [p for p in sys.path if Path(p or ".").resolve() != here_dir]
    from distributed import Client, LocalCluster

    from obbiou.distributed import evaluate_distributed
    from obbiou.evaluation import evaluate

    tmp = Path(tempfile.mkdtemp())
    for name, table in (("truth", truth), ("dets", dets), ("points", points)):
        frame = pd.DataFrame(table).sample(frac=1.0, random_state=1)  # frames across files
        (tmp / name).mkdir()
        for k, part in enumerate(np.array_split(np.arange(len(frame)), 4)):
            frame.iloc[part].to_parquet(tmp / name / f"part{k}.parquet", index=False)
    opts = dict(distance=[0.5, 1.0, 2.0, 4.0], min_points=3)
    folders = {k: str(tmp / k) for k in ("truth", "dets", "points")}
    here, w, c = timed(
        lambda: evaluate(folders["truth"], folders["dets"], points=folders["points"], **opts)
    )
    print(f"  from Parquet folders, distance + points (min 3): in process wall {w:.3f} s, "
          f"cpu {c:.3f} s")  # fmt: skip
    with (
        LocalCluster(n_workers=workers, threads_per_worker=1, processes=True, host="127.0.0.1",
                     dashboard_address=None, env={"NUMBA_NUM_THREADS": "1"}) as cluster,
        Client(cluster) as client,
    ):  # fmt: skip
        run = lambda: evaluate_distributed(  # noqa: E731
            folders["truth"], folders["dets"], points=folders["points"], client=client,
            warm=True, **opts,
        )  # fmt: skip
        run()  # the workers load the kernels
        there, w, c = timed(run)
    same = json.dumps(there.to_dict(), sort_keys=True) == json.dumps(here.to_dict(), sort_keys=True)
    same = same and np.array_equal(there.records.truth_points, here.records.truth_points)
    assert same, "the cluster's result differs"
    print(f"  the same on {workers} Dask workers (running cluster): wall {w:.3f} s, client cpu "
          f"{c:.3f} s; result and point counts identical")  # fmt: skip


def count_points(truth: dict, points: dict) -> None:
    """Counting the points of each sweep inside its truths: one call with the frames, against
    a call per sweep; the fastest of 3 runs of each, CPU time, both counts equal."""
    from obbiou.points import count_in_boxes

    boxes = np.column_stack([truth[c] for c in COLS])
    xyz = np.column_stack([points["x"], points["y"], points["z"]])
    tf, pf = np.asarray(truth["frame"]), np.asarray(points["frame"])

    def grouped():
        return count_in_boxes(xyz, boxes, point_frames=pf, box_frames=tf)

    def per_sweep():
        out = np.zeros(len(boxes), np.int64)
        tcut = np.searchsorted(tf, np.arange(tf.max() + 2))  # both tables sorted by frame
        pcut = np.searchsorted(pf, np.arange(tf.max() + 2))
        for f in range(len(tcut) - 1):
            t0, t1, p0, p1 = tcut[f], tcut[f + 1], pcut[f], pcut[f + 1]
            if t1 > t0 and p1 > p0:
                out[t0:t1] = count_in_boxes(xyz[p0:p1], boxes[t0:t1], shape="upright")
        return out

    runs = {}
    for name, fn in (("one call with the frames", grouped), ("one call per sweep", per_sweep)):
        best = min((timed(fn) for _ in range(3)), key=lambda r: r[2])
        runs[name] = best
    a, b = (r[0] for r in runs.values())
    assert np.array_equal(a, b)
    print(f"  counting {len(xyz)} points in {len(boxes)} truths of {len(np.unique(tf))} sweeps "
          f"(fastest of 3; {int(a.sum())} inside, counts equal):")  # fmt: skip
    for name, (_, wall, cpu) in runs.items():
        print(f"    count_in_boxes, {name:<24} wall {wall:7.3f} s   cpu {cpu:7.3f} s")
    (_, _, c1), (_, _, c2) = runs.values()
    print(f"    ratio (CPU): {c2 / c1:.1f}x")


if __name__ == "__main__":
    main()
