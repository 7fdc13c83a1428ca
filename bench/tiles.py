"""Tiles benchmark: merging the detections of a large tiled image, obbiou vs the shapely way.

Run: ``python bench/tiles.py`` (20 000 x 20 000 px image, 1024-px tiles overlapping by
200 px: 625 tiles, about 200 000 detections) or ``python bench/tiles.py --quick``
(8 000 x 8 000 px, about 38 000 detections). ``--diagnose`` shows where obbiou's time goes: the
seam rule, ``obbiou.suppress`` of the boxes it leaves (whole, in spatial blocks, with
scores in spatial order), and the pairs above ``max_iou`` that merge finds instead.

The scene is invented (seeded): a harbour orthomosaic with rotated objects 8-60 px long.
Each tile's simulated detector reports the objects that reach into the tile, each with a
little noise in position, size and angle (independent per tile, so the copies of an
object across a seam differ); an object cut by the tile edge comes back as the
minimum-area rectangle of its visible part; plus 10 % false alarms.

The shapely way, in the same process on the same arrays: boxes moved to image
coordinates with numpy, polygons from the corners, the seam rule with numpy on the
enclosing boxes and an ``STRtree`` query (``predicate="within"``) of those at the seam
against the tiles' cores, then a greedy suppression loop in score order over an
``STRtree`` of the remaining polygons (``shapely.intersection`` / ``shapely.area``).
Fusion (``merge(..., fuse=True)``) is timed on its own, with no shapely counterpart.
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

from _util import report  # noqa: E402

import obbiou  # noqa: E402
from obbiou.boxes import corners, envelope  # noqa: E402
from obbiou.tiles import grid, merge, shift  # noqa: E402

SIZE, OVERLAP, MAX_IOU = 1024, 200, 0.5


# ---------------------------------------------------------------- scene (invented)


def scene(side: float, objects: int, seed: int = 0):
    """Tiles, per-tile detections (tile coordinates), scores and tile indices."""
    import shapely

    rng = np.random.default_rng(seed)
    tiles = grid(side, side, size=SIZE, overlap=OVERLAP)
    length = rng.uniform(8, 60, objects)
    truth = np.column_stack(
        [
            rng.uniform(0, side, (objects, 2)),
            length,
            length * rng.uniform(0.25, 0.7, objects),
            rng.uniform(-np.pi, np.pi, objects),
        ]
    )
    env = envelope(truth, shape="rotated")
    pairs = obbiou.overlapping_pairs(env, tiles, shape="axis")  # which tiles each reaches
    obj, til = pairs.first, pairs.second
    det = truth[obj].copy()
    n = len(det)
    det[:, :2] += rng.normal(0, 1.0, (n, 2))
    det[:, 2:4] *= 1 + rng.normal(0, 0.03, (n, 2)).clip(-0.2, 0.2)
    det[:, 4] += rng.normal(0, 0.03, n)
    # objects cut by their tile's edge: the minimum-area rectangle of the visible part
    t = tiles[til]
    e = envelope(det, shape="rotated")
    cut = (e[:, 0] < t[:, 0]) | (e[:, 1] < t[:, 1]) | (e[:, 2] > t[:, 2]) | (e[:, 3] > t[:, 3])
    idx = np.flatnonzero(cut)
    part = shapely.intersection(
        shapely.polygons(corners(det[idx], shape="rotated")), shapely.box(*t[idx].T)
    )
    ok = shapely.area(part) > 1.0
    idx, part = idx[ok], part[ok]
    drop = np.flatnonzero(cut)[~ok]
    rect = shapely.get_coordinates(shapely.oriented_envelope(part)).reshape(-1, 5, 2)[:, :4]
    e1 = rect[:, 1] - rect[:, 0]
    e2 = rect[:, 2] - rect[:, 1]
    det[idx] = np.column_stack(
        [
            rect.mean(axis=1),
            np.hypot(e1[:, 0], e1[:, 1]),
            np.hypot(e2[:, 0], e2[:, 1]),
            np.arctan2(e1[:, 1], e1[:, 0]),
        ]
    )
    keep = np.ones(n, bool)
    keep[drop] = False
    det, til = det[keep], til[keep]
    scores = rng.uniform(0.3, 1.0, len(det))
    # false alarms: 10 % more boxes anywhere in random tiles
    k = len(det) // 10
    fa_tile = rng.integers(0, len(tiles), k)
    fl = rng.uniform(8, 40, k)
    fa = np.column_stack(
        [
            tiles[fa_tile, :2] + rng.uniform(0, SIZE, (k, 2)),
            fl,
            fl * rng.uniform(0.3, 1.0, k),
            rng.uniform(-np.pi, np.pi, k),
        ]
    )
    det = np.concatenate([det, fa])
    til = np.concatenate([til, fa_tile])
    scores = np.concatenate([scores, rng.uniform(0.05, 0.6, k)])
    # into tile coordinates, tile after tile, as a detector run over the tiles reports them
    order = np.argsort(til, kind="stable")
    det, til, scores = det[order], til[order], scores[order]
    boxes = shift(det, -tiles[til, 0], -tiles[til, 1])
    return tiles, boxes, scores, til.astype(np.int64), cut[keep].sum()


# ---------------------------------------------------------------- the shapely way


def shapely_merge(boxes, scores, tile, tiles, border):
    import shapely

    image = boxes.copy()
    image[:, 0] += tiles[tile, 0]
    image[:, 1] += tiles[tile, 1]
    g = shapely.polygons(corners(image, shape="rotated"))
    area = shapely.area(g)
    # seam rule: cores are the tiles shrunk by the border on inner edges
    lo, hi = tiles[:, :2].min(axis=0), tiles[:, 2:].max(axis=0)
    big = 1e12
    core = tiles.copy()
    core[:, :2] = np.where(tiles[:, :2] > lo, tiles[:, :2] + border, -big)
    core[:, 2:] = np.where(tiles[:, 2:] < hi, tiles[:, 2:] - border, big)
    env = shapely.bounds(g)
    own = core[tile]
    at_seam = np.flatnonzero(
        (env[:, 0] < own[:, 0])
        | (env[:, 1] < own[:, 1])
        | (env[:, 2] > own[:, 2])
        | (env[:, 3] > own[:, 3])
    )
    core_tree = shapely.STRtree(shapely.box(*core.T))
    qi, ti = core_tree.query(shapely.box(*env[at_seam].T), predicate="within")
    rows = at_seam[qi]
    dropped = np.unique(rows[ti != tile[rows]])
    alive = np.ones(len(image), bool)
    alive[dropped] = False
    # greedy suppression over the rest
    cand_rows = np.flatnonzero(alive)
    tree = shapely.STRtree(g[cand_rows])
    order = cand_rows[np.argsort(-scores[cand_rows], kind="stable")]
    pos = np.empty(len(image), np.int64)
    pos[cand_rows] = np.arange(len(cand_rows))
    removed = ~alive
    kept = []
    for i in order:
        if removed[i]:
            continue
        kept.append(i)
        cand = cand_rows[tree.query(g[i])]
        cand = cand[~removed[cand] & (cand != i)]
        if cand.size == 0:
            continue
        inter = shapely.area(shapely.intersection(g[i], g[cand]))
        iou = inter / (area[i] + area[cand] - inter)
        removed[cand[iou > MAX_IOU]] = True
    return np.array(kept, np.int64), dropped


# ---------------------------------------------------------------- runs


def timed(fn, repeat: int):
    walls, cpus, out = [], [], None
    for _ in range(repeat):
        c, t = time.process_time(), time.perf_counter()
        out = fn()
        walls.append(time.perf_counter() - t)
        cpus.append(time.process_time() - c)
    return statistics.median(walls), statistics.median(cpus), out


def diagnose(side, tiles, boxes, scores, tile, repeat) -> None:
    """Where the merge's time goes: the merge whole, the seam rule alone, and the two roads
    to the copies of the boxes it leaves: ``obbiou.suppress`` (whole, in k x k spatial
    blocks — summed, not the same result at block edges — and with scores that follow a
    spatial order), and the pairs above ``max_iou`` that merge finds first."""
    from obbiou.tiles import seam_rows

    _, cpu, m = timed(lambda: merge(boxes, scores, tile, tiles), repeat)
    print(f"merge whole: CPU {cpu * 1e3:.0f} ms")
    image = shift(boxes, tiles[tile, 0], tiles[tile, 1])
    env = envelope(image, shape="rotated")
    _, cpu, _ = timed(lambda: seam_rows(env, tile, tiles, SIZE / 64), repeat)
    print(f"seam rule alone (seam_rows, on extents given): CPU {cpu * 1e3:.0f} ms")
    keep = np.ones(len(image), bool)
    keep[m.at_seam] = False
    image, scores = image[keep], scores[keep]

    def run(b, s):
        return obbiou.suppress(b, s, max_iou=MAX_IOU, min_score=-np.inf)

    _, cpu, _ = timed(lambda: run(image, scores), repeat)
    print(f"suppress {len(image)} boxes whole: CPU {cpu * 1e3:.0f} ms")
    for k in (2, 4, 8):
        cell = np.clip(np.floor(image[:, :2] / (side / k)), 0, k - 1).astype(np.int64)
        key = cell[:, 0] * k + cell[:, 1]
        groups = [np.flatnonzero(key == g) for g in range(k * k)]
        _, cpu, _ = timed(lambda g=groups: [run(image[i], scores[i]) for i in g], repeat)
        print(f"suppress in {k} x {k} blocks (summed): CPU {cpu * 1e3:.0f} ms")
    order = np.lexsort((image[:, 0], np.floor(image[:, 1] / SIZE)))
    spatial = np.empty(len(order))
    spatial[order] = np.linspace(1.0, 0.01, len(order))
    _, cpu, _ = timed(lambda: run(image, spatial), repeat)
    print(f"suppress whole, scores decreasing in row-major spatial order: CPU {cpu * 1e3:.0f} ms")
    wall, cpu, p = timed(lambda: obbiou.overlapping_pairs(image, min_iou=MAX_IOU), repeat)
    print(
        f"the pairs above {MAX_IOU} by overlapping_pairs (exact IoU; merge finds the same "
        "pairs deciding most by bounds, then walks them greedily): "
        f"{len(p)} pairs, {wall * 1e3:.0f} ms (CPU {cpu * 1e3:.0f} ms)"
    )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--quick", action="store_true", help="an 8 000 px image instead")
    parser.add_argument("--repeat", type=int, default=5, help="timed runs of obbiou")
    parser.add_argument(
        "--diagnose",
        action="store_true",
        help="where the merge's time goes: the seam rule, obbiou.suppress of the boxes it "
        "leaves (whole, in spatial blocks, scores in spatial order), the pairs above max_iou",
    )
    args = parser.parse_args()
    side, objects = (8_000.0, 20_000) if args.quick else (20_000.0, 105_000)
    t0 = time.perf_counter()
    tiles, boxes, scores, tile, cut = scene(side, objects)
    if args.diagnose:
        diagnose(side, tiles, boxes, scores, tile, args.repeat)
        return
    print(
        f"scene (invented): {side:.0f} x {side:.0f} px, {len(tiles)} tiles of {SIZE} px "
        f"overlapping by {OVERLAP}, {len(boxes)} detections ({cut} cut by a tile edge); "
        f"built in {time.perf_counter() - t0:.1f} s"
    )
    border = SIZE / 64  # merge's default

    t0 = time.perf_counter()
    merge(boxes[:50], scores[:50], tile[:50], tiles)  # compile / load kernels
    merge(boxes[:50], scores[:50], tile[:50], tiles, fuse=True)
    print(f"first calls (compile or load from cache): {time.perf_counter() - t0:.2f} s")

    ours, ours_cpu, m = timed(lambda: merge(boxes, scores, tile, tiles), args.repeat)
    t0, c0 = time.perf_counter(), time.process_time()
    kept, dropped = shapely_merge(boxes, scores, tile, tiles, border)
    theirs, theirs_cpu = time.perf_counter() - t0, time.process_time() - c0
    same_seam = np.array_equal(m.at_seam, dropped)
    same_kept = np.array_equal(np.sort(m.rows), np.sort(kept))
    report(
        f"merge: seam rule + hard suppression of {len(boxes)} detections -> {len(m)} boxes "
        f"({len(m.at_seam)} dropped at seams)",
        ours,
        theirs,
        goal=50,
        note=f"same seam drops: {same_seam}, same kept boxes: {same_kept}; CPU time obbiou "
        f"{ours_cpu * 1e3:.0f} ms (all threads), shapely {theirs_cpu * 1e3:.0f} ms, "
        f"ratio {theirs_cpu / ours_cpu:.0f}x",
    )
    fused, fused_cpu, f = timed(lambda: merge(boxes, scores, tile, tiles, fuse=True), args.repeat)
    print(
        f"merge with fuse=True: {fused * 1e3:.0f} ms (CPU {fused_cpu * 1e3:.0f} ms) -> "
        f"{len(f)} fused boxes, {int((f.fused.counts > 1).sum())} of more than one detection"
    )
    image = shift(boxes, tiles[tile, 0], tiles[tile, 1])
    alone, alone_cpu, g = timed(lambda: obbiou.fuse(image, scores), args.repeat)
    print(
        f"obbiou.fuse alone on the {len(image)} image boxes: {alone * 1e3:.0f} ms "
        f"(CPU {alone_cpu * 1e3:.0f} ms) -> {len(g)} clusters"
    )


if __name__ == "__main__":
    main()
