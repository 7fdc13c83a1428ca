"""The demo end to end, on invented data: ``obbiou demo`` and :func:`run_demo`.

For each of the two invented scenarios (harbour survey, warehouse lidar) it generates the
ground truth and the raw output of two versions of a simulated detector, suppresses
duplicates (:func:`obbiou.suppress`, per frame and label; the harbour's detector sees each
mosaic in overlapping tiles, whose detections :func:`obbiou.tiles.merge` turns into one
set per mosaic), evaluates the improved version
with bootstrap intervals (:func:`obbiou.evaluation.evaluate`), compares it with the baseline
(:func:`obbiou.evaluation.compare`), and writes:

* ``report.txt`` and ``report.json`` — the summary tables, intervals, comparison and
  breakdowns;
* ``<scenario>/truth.csv``, ``raw_<version>.csv``, ``<version>.csv`` — the tables, so the
  command line can be tried on them;
* ``<scenario>/pr_curves.png`` — precision–recall curves;
* ``<scenario>/rows.detections.csv``, ``rows.truths.csv`` — one row per detection and per
  truth (:mod:`obbiou.demo.results`, which also puts a few of them and the operating points
  into the report);
* ``<scenario>/scene.png`` — one frame with truths and detections drawn in the palette
  (the warehouse from above: bird's-eye view);
* ``warehouse/returns.csv`` — invented lidar returns of the sweeps, with which the
  warehouse is also evaluated the way lidar teams do: matched by ground-plane centre
  distance (0.5, 1, 2, 4 m), truths with fewer than 5 returns set aside, and the errors of
  the true positives.
* ``harbour/tiles.png`` — that mosaic with the detector's tiles and what merging did to
  each tile detection (kept, dropped at a seam, suppressed as a copy).

All data is invented. Detection metrics do not establish that a vehicle or robot is safe.
"""

from __future__ import annotations

import json
import textwrap
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np

from obbiou.demo.scenarios import (
    HARBOUR_DETECTOR_TILE,
    HARBOUR_OVERLAP,
    HARBOUR_TILE,
    INVENTED,
    Scenario,
    detect_in_tiles,
    detector_tiles,
    harbour_survey,
    simulate_detector,
    warehouse_returns,
)
from obbiou.demo.scenarios import warehouse_lidar as _warehouse
from obbiou.evaluation.pictures import frame_statuses
from obbiou.tables import write_table

__all__ = ["run_demo", "CAUTION", "SETTINGS"]

CAUTION = (
    "Detection metrics do not establish that a vehicle, robot or any other system is safe. "
    "Defer to the applicable safety standards, local regulation and qualified engineers."
)

#: How each scenario is run: default size, suppression threshold, IoU thresholds of the
#: evaluation, the threshold the headline numbers and the pictures use, and buckets.
SETTINGS: dict[str, dict[str, Any]] = {
    "harbour": {
        "make": harbour_survey,
        "frames": 12,
        "max_iou": 0.5,
        "iou": "0.5:0.95:0.05",
        "headline": 0.5,
        # areas in square pixels (0.15 m each): 20 ft containers ~650, 40 ft ~1300, vessels
        # and cranes more; buckets are named by their edges
        "size_buckets": [0, 2000, 40000, float("inf")],
        "range_buckets": None,
        # the detector sees each 2048-px frame in overlapping tiles; obbiou.tiles.merge
        # makes one set per frame (the seam rule, then suppression at max_iou per label)
        "tiles": {"size": HARBOUR_DETECTOR_TILE, "overlap": HARBOUR_OVERLAP},
    },
    "warehouse": {
        "make": _warehouse,
        "frames": 40,
        "max_iou": 0.3,
        "iou": "0.25,0.5,0.7",
        "headline": 0.5,
        "size_buckets": None,
        "range_buckets": {"0-8 m": (0, 8), "8-16 m": (8, 16), "16-24 m": (16, 24)},
    },
}

VERSIONS = ("baseline", "improved")
#: The warehouse's second evaluation, as lidar teams do it: matching by ground-plane centre
#: distance (metres; Caesar et al., CVPR 2020) and truths with too few returns set aside.
LIDAR = {"distance": [0.5, 1, 2, 4], "min_points": 5}
_RERUN = 7919  # seed offset of the control rerun


def _suppress(scenario: Scenario, raw: Any, max_iou: float, progress: bool) -> Any:
    """Hard suppression per frame and label; returns the kept rows (a DataFrame)."""
    import obbiou

    cols = list(scenario.box_columns)
    boxes = raw[cols].to_numpy(np.float64)
    scores = raw["score"].to_numpy(np.float64)
    labels = raw["label"].to_numpy(object)
    frames = raw["frame"].to_numpy(object)
    keep = []
    groups = [np.flatnonzero(frames == f) for f in scenario.frames]
    if progress:
        from obbiou.progress import bar

        groups = bar(groups, desc=f"{scenario.name}: suppress", unit="frame")
    for rows in groups:
        if len(rows) == 0:
            continue
        kept = obbiou.suppress(
            boxes[rows], scores[rows], shape=scenario.shape, max_iou=max_iou, labels=labels[rows]
        )
        keep.append(rows[np.sort(np.asarray(kept.indices, dtype=np.int64))])
    idx = np.concatenate(keep) if keep else np.zeros(0, dtype=np.int64)
    return raw.iloc[idx].reset_index(drop=True)


def _detect(scenario: Scenario, cfg: dict[str, Any], version: str, seed: int, progress: bool):
    """One detector version's raw output and the detections kept of it, with the tiling's
    counts (None without tiles): the detector on whole frames then suppression per frame
    and label; or, with ``cfg["tiles"]``, on overlapping tiles of each frame
    (:func:`detect_in_tiles`) merged into one set per frame (:func:`_merge_tiles`)."""
    if not cfg.get("tiles"):
        raw = simulate_detector(scenario, version, seed=seed)
        return raw, _suppress(scenario, raw, cfg["max_iou"], progress), None
    raw = detect_in_tiles(scenario, version, seed=seed, **cfg["tiles"])
    kept, counts = _merge_tiles(scenario, raw, cfg, progress)
    return raw, kept, counts


def _merge_frame(scenario: Scenario, raw: Any, rows: np.ndarray, tiles: np.ndarray, max_iou: float):
    """:func:`obbiou.tiles.merge` of one frame's per-tile detections (``raw`` rows)."""
    from obbiou.tiles import merge

    cols = list(scenario.box_columns)
    return merge(
        raw[cols].to_numpy(np.float64)[rows],
        raw["score"].to_numpy(np.float64)[rows],
        raw["tile"].to_numpy(np.int64)[rows],
        tiles,
        labels=raw["label"].to_numpy(object)[rows],
        max_iou=max_iou,
    )


def _merge_tiles(scenario: Scenario, raw: Any, cfg: dict[str, Any], progress: bool):
    """Per-tile detections (tile coordinates) -> one set per frame in frame coordinates,
    by :func:`obbiou.tiles.merge` frame by frame. Returns the kept rows (a DataFrame without
    the ``tile`` column, in input order) and the counts: tiles, detections, dropped at
    seams, kept."""
    tiles = detector_tiles(scenario, **cfg["tiles"])
    cols = list(scenario.box_columns)
    frames = raw["frame"].to_numpy(object)
    source, boxes, dropped = [], [], 0
    groups = [np.flatnonzero(frames == f) for f in scenario.frames]
    if progress:
        from obbiou.progress import bar

        groups = bar(groups, desc=f"{scenario.name}: merge tiles", unit="frame")
    for rows in groups:
        if len(rows) == 0:
            continue
        m = _merge_frame(scenario, raw, rows, tiles, cfg["max_iou"])
        order = np.argsort(m.rows, kind="stable")  # back to input order
        source.append(rows[m.rows[order]])
        boxes.append(m.boxes[order])
        dropped += len(m.at_seam)
    idx = np.concatenate(source) if source else np.zeros(0, np.int64)
    kept = raw.iloc[idx].drop(columns=["tile"]).reset_index(drop=True)
    if len(idx):
        kept[cols] = np.concatenate(boxes)
    counts = {
        "tiles_per_frame": len(tiles),
        "tiles": len(tiles) * len(scenario.frames),
        "detections": len(raw),
        "dropped_at_seams": dropped,
        "kept": len(kept),
    }
    return kept, counts


def _tiling_text(cfg: dict[str, Any], tiling: dict[str, dict[str, int]]) -> str:
    """One line: the tiles and, per version, per-tile detections -> merged."""
    first = tiling[VERSIONS[0]]
    size, overlap = cfg["tiles"]["size"], cfg["tiles"]["overlap"]
    return (
        f"detector on {first['tiles']} tiles ({first['tiles_per_frame']} per frame, {size} px, "
        f"overlap {overlap} px); merged (tile detections -> kept, cut boxes dropped at seams): "
        + ", ".join(
            f"{v} {c['detections']} -> {c['kept']} ({c['dropped_at_seams']} at seams)"
            for v, c in tiling.items()
        )
    )


def _tiling_lines(cfg: dict[str, Any], tiling: dict[str, dict[str, int]]) -> list[str]:
    """The report's lines on the tiled detector and the merge."""
    first = tiling[VERSIONS[0]]
    size, overlap = cfg["tiles"]["size"], cfg["tiles"]["overlap"]
    lines = textwrap.wrap(
        f"simulated detector on tiles: each frame cut into {first['tiles_per_frame']} tiles of "
        f"{size} x {size} px overlapping by {overlap} px (obbiou.tiles.grid), "
        f"{first['tiles']} tiles in all; objects cut by a tile edge come back as partial "
        "boxes, objects in an overlap once from each tile. Merged into one set per frame by "
        "obbiou.tiles.merge: boxes into the frame, cut boxes that another tile saw whole "
        f"dropped at the seams, then suppression at IoU > {cfg['max_iou']:g} per label:",
        88,
    )
    for v, c in tiling.items():
        suppressed = c["detections"] - c["dropped_at_seams"] - c["kept"]
        lines.append(
            f"  {v}: {c['detections']} tile detections -> {c['kept']} kept "
            f"({c['dropped_at_seams']} dropped at seams, {suppressed} suppressed)"
        )
    return lines


def _tiling_doc(cfg: dict[str, Any], tiling: dict[str, dict[str, int]]) -> dict[str, Any]:
    """The JSON report's entry on the tiled detector and the merge."""
    return {
        "tile_size": cfg["tiles"]["size"],
        "overlap": cfg["tiles"]["overlap"],
        "tiles_per_frame": tiling[VERSIONS[0]]["tiles_per_frame"],
        "tiles": tiling[VERSIONS[0]]["tiles"],
        "merge": {"max_iou": cfg["max_iou"], "per": "frame and label", "border": "default"},
        "versions": {
            v: {k: c[k] for k in ("detections", "dropped_at_seams", "kept")}
            for v, c in tiling.items()
        },
    }


def _tiles_picture(
    path: Path, scenario: Scenario, cfg: dict[str, Any], frame: str, raw: Any, truth: Any
) -> Path:
    """The frame with its detector tiles and what merging did to each tile detection."""
    from obbiou.demo.draw import draw_tiles
    from obbiou.tiles import shift

    tiles = detector_tiles(scenario, **cfg["tiles"])
    rows = np.flatnonzero(raw["frame"].to_numpy(object) == frame)
    m = _merge_frame(scenario, raw, rows, tiles, cfg["max_iou"])
    status = np.full(len(rows), "suppressed", dtype=object)
    status[m.at_seam] = "at seam"
    status[m.rows] = "kept"
    cols = list(scenario.box_columns)
    local = raw[cols].to_numpy(np.float64)[rows]
    tile = raw["tile"].to_numpy(np.int64)[rows]
    image = shift(local, tiles[tile, 0], tiles[tile, 1])
    return draw_tiles(path, scenario, frame, tiles, image, status, truth, max_iou=cfg["max_iou"])


def _pick_frame(scenario: Scenario) -> str:
    """The frame drawn: the one with the most labels present, then the most non-ignore truths."""
    t = scenario.truth[~scenario.truth["ignore"]]
    if len(t) == 0:
        return scenario.frames[0]
    kinds = t.groupby("frame")["label"].nunique()
    sizes = t.groupby("frame").size()
    best = max(kinds.index, key=lambda f: (kinds[f], -abs(sizes[f] - sizes.median()), str(f)))
    return str(best)


def _window(scenario: Scenario, frame: str) -> tuple[float, float, float, float] | None:
    """What the scene picture shows: a harbour mosaic whole; around the robot what it saw."""
    if scenario.name != "warehouse":
        return None
    t = scenario.truth[scenario.truth["frame"] == frame]
    if len(t) == 0:
        return (-14.0, -12.0, 30.0, 12.0)
    reach = np.hypot(t["length"], t["width"]).to_numpy() / 2
    x0 = min(float((t["cx"] - reach).min()), -2.0) - 2
    x1 = max(float((t["cx"] + reach).max()), 2.0) + 2
    y0 = min(float((t["cy"] - reach).min()), -8.0) - 2
    y1 = max(float((t["cy"] + reach).max()), 8.0) + 2
    return (x0, y0, x1, y1)


def run_demo(
    out_dir: Any = "obbiou-demo",
    *,
    seed: int = 0,
    frames: int | None = None,
    progress: bool = True,
    resamples: int = 1000,
    echo: Callable[[str], None] | None = print,
) -> dict[str, Any]:
    """Run the whole job on the two invented scenarios and write the report and pictures.

    Parameters
    ----------
    out_dir : path-like
        Folder for the outputs (created if missing).
    seed : int
        Seed of the invented data and the simulated detectors; the bootstrap uses it too.
        The same seed gives the same numbers.
    frames : int, optional
        Frames per scenario (default: 12 harbour mosaics, 40 warehouse sweeps). Small values
        make a quick run.
    progress : bool
        Show progress bars (on stderr).
    resamples : int
        Bootstrap resamples for the intervals and the comparison.
    echo : callable, optional
        Where the printed summary goes (default :func:`print`; ``None`` for silence).

    Returns
    -------
    dict
        ``{"report": Path, "json": Path, "files": {...}, "mean_ap": {scenario: float},
        "seconds": float}``.
    """
    from obbiou.evaluation import compare, evaluate

    say = echo or (lambda _text: None)
    start = time.perf_counter()
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    say(f"obbiou demo: {INVENTED}.")
    say(CAUTION)
    lines = _header(seed)
    doc: dict[str, Any] = {"note": INVENTED, "caution": CAUTION, "seed": seed, "scenarios": {}}
    files: dict[str, Path] = {}
    mean_ap: dict[str, float | None] = {}
    for number, (name, cfg) in enumerate(SETTINGS.items(), start=1):
        scenario: Scenario = cfg["make"](frames if frames is not None else cfg["frames"], seed=seed)
        folder = out / name
        say(
            f"\n[{number}/2] {scenario.title}: {len(scenario.frames)} frames, "
            f"{len(scenario.truth)} truths ({int(scenario.truth['ignore'].sum())} ignore)"
        )
        made = {v: _detect(scenario, cfg, v, seed, progress) for v in VERSIONS}
        raw = {v: made[v][0] for v in VERSIONS}
        kept = {v: made[v][1] for v in VERSIONS}
        tiling = {v: made[v][2] for v in VERSIONS} if cfg.get("tiles") else None
        paths = scenario.write(folder, {**{f"raw_{v}": raw[v] for v in VERSIONS}, **kept})
        files.update({f"{name}/{k}": p for k, p in paths.items()})

        opts = {"shape": scenario.shape, "iou": cfg["iou"]}
        ev = evaluate(
            scenario.truth,
            kept["improved"],
            progress=progress,
            size_buckets=cfg["size_buckets"],
            range_buckets=cfg["range_buckets"],
            **opts,
        )
        ev_base = evaluate(scenario.truth, kept["baseline"], **opts)
        head = cfg["headline"]
        ci_all = ev.interval(resamples=resamples, seed=seed)
        ci_head = ev.interval(iou=head, resamples=resamples, seed=seed)
        ci_labels = {
            lab: ev.interval(lab, head, resamples=resamples, seed=seed)
            for lab in ev.labels
            if ev.ap(lab, head) is not None
        }
        cmp = compare(
            scenario.truth,
            kept["baseline"],
            kept["improved"],
            resamples=resamples,
            seed=seed,
            **opts,
        )
        # Control: the improved detector against a rerun of itself (same error model, fresh
        # noise). Its interval should straddle zero: no real difference to find.
        rerun = _detect(scenario, cfg, "improved", seed + _RERUN, False)[1]
        control = compare(
            scenario.truth, kept["improved"], rerun, resamples=resamples, seed=seed, **opts
        )
        mean_ap[name] = ev.mean_ap()
        lidar = None
        if name == "warehouse":
            returns = warehouse_returns(scenario, seed=seed)
            files[f"{name}/returns.csv"] = write_table(returns, folder / "returns.csv")
            lidar = evaluate(
                scenario.truth,
                kept["improved"],
                shape=scenario.shape,
                distance=LIDAR["distance"],
                points=returns,
                min_points=LIDAR["min_points"],
            )

        files[f"{name}/pr_curves.png"] = _plot_curves(
            ev, folder / "pr_curves.png", head, scenario.title
        )
        frame = _pick_frame(scenario)
        t = scenario.truth[scenario.truth["frame"] == frame].reset_index(drop=True)
        d = kept["improved"][kept["improved"]["frame"] == frame].reset_index(drop=True)
        t_status, d_status = frame_statuses(ev, frame, head)
        from obbiou.demo.draw import draw_scene

        what = "3D IoU" if scenario.shape == "upright" else "IoU"
        files[f"{name}/scene.png"] = draw_scene(
            folder / "scene.png",
            scenario,
            frame,
            t,
            t_status,
            d,
            d_status,
            iou=head,
            iou_text=f"matching at {what} ≥ {head:g} (improved detector, after suppression)",
            window=_window(scenario, frame),
        )
        if tiling is not None:
            files[f"{name}/tiles.png"] = _tiles_picture(
                folder / "tiles.png", scenario, cfg, frame, raw["improved"], t
            )

        raw_n = {v: len(raw[v]) for v in VERSIONS}
        kept_n = {v: len(kept[v]) for v in VERSIONS}
        section = _section(
            number,
            scenario,
            cfg,
            raw_n=raw_n,
            kept_n=kept_n,
            ev=ev,
            ev_base=ev_base,
            ci_all=ci_all,
            ci_head=ci_head,
            ci_labels=ci_labels,
            cmp=cmp,
            control=control,
            resamples=resamples,
            frame=frame,
            tiling=tiling,
        )
        lines += section
        from obbiou.demo.results import results_section

        rows_lines, rows_files, rows_doc = results_section(ev, head, folder)
        lines += rows_lines
        files.update({f"{name}/{k}": p for k, p in rows_files.items()})
        if lidar is not None:
            lines += _lidar_section(lidar, len(returns))
        aps = ", ".join(f"{lab} {_fmt(ev.ap(lab, head))}" for lab in ev.labels)
        lo, hi = cmp.interval
        if tiling is None:
            say(
                "      suppression (raw -> kept): "
                + ", ".join(f"{v} {raw_n[v]} -> {kept_n[v]}" for v in VERSIONS)
            )
        else:
            say("      " + _tiling_text(cfg, tiling))
        say(
            f"      improved detector: mean AP {_fmt(ev.mean_ap())} [{ci_all[0]:.3f}, "
            f"{ci_all[1]:.3f}] over IoU {cfg['iou']}; at {head:g}: {_fmt(ev.mean_ap(head))} "
            f"[{ci_head[0]:.3f}, {ci_head[1]:.3f}]"
        )
        say(f"      AP at IoU {head:g}: {aps}")
        say(
            f"      improved - baseline: {cmp.difference:+.4f} [{lo:+.3f}, {hi:+.3f}], "
            f"p = {cmp.p_value:.3f} (paired bootstrap over frames)"
        )
        clo, chi = control.interval
        say(
            f"      control, improved - rerun of itself: {control.difference:+.4f} "
            f"[{clo:+.3f}, {chi:+.3f}], p = {control.p_value:.3f}"
        )
        if lidar is not None:
            aside = sum(v["set_aside"] for v in lidar.point_counts()["labels"].values())
            say(
                f"      by centre distance {LIDAR['distance']} m, {aside} truths with < "
                f"{LIDAR['min_points']} lidar returns set aside: mean AP {_fmt(lidar.mean_ap())}"
            )
        doc["scenarios"][name] = {
            "title": scenario.title,
            "units": scenario.units,
            "frames": len(scenario.frames),
            "truths": int(len(scenario.truth)),
            "ignore_truths": int(scenario.truth["ignore"].sum()),
            "raw_detections": raw_n,
            "kept_detections": kept_n,
            "suppression": {"max_iou": cfg["max_iou"], "per": "frame and label", "decay": None},
            **({} if tiling is None else {"tiling": _tiling_doc(cfg, tiling)}),
            "mean_ap": mean_ap[name],
            "interval": {
                "level": 0.95,
                "resamples": resamples,
                "mean_ap": list(ci_all),
                f"mean_ap_at_{head:g}": list(ci_head),
                "ap_at_headline": {k: list(v) for k, v in ci_labels.items()},
            },
            "evaluation": ev.to_dict(),
            "baseline_evaluation": ev_base.to_dict(breakdowns=False),
            "comparison": {k: v for k, v in cmp.to_dict().items() if k not in ("a", "b")},
            "control_comparison": {
                k: v for k, v in control.to_dict().items() if k not in ("a", "b")
            },
            "scene_frame": frame,
            "scene_iou": head,
            **rows_doc,
        }
        if lidar is not None:
            doc["scenarios"][name]["lidar_evaluation"] = lidar.to_dict()
    doc["mean_ap"] = mean_ap
    seconds = time.perf_counter() - start
    lines += _footer(out, files)
    report = out / "report.txt"
    report.write_text("\n".join(lines) + "\n", encoding="utf-8")
    jpath = out / "report.json"
    jpath.write_text(
        json.dumps(doc, indent=2, allow_nan=False, default=_json_default) + "\n", encoding="utf-8"
    )
    say(f"\nwrote {report}, {jpath} and {len(files)} more files in {out} ({seconds:.1f} s)")
    say(
        f"try:  obbiou evaluate {out / 'harbour' / 'truth.csv'} "
        f"{out / 'harbour' / 'improved.csv'} --iou 0.5:0.95:0.05 --interval"
    )
    return {"report": report, "json": jpath, "files": files, "mean_ap": mean_ap, "seconds": seconds}


def _plot_curves(evaluation: Any, path: Path, iou: float, title: str) -> Path:
    """Precision-recall curves by :meth:`Evaluation.plot`, titled as invented data."""
    evaluation.plot(str(path), iou=iou, title=f"{title}: improved detector — INVENTED DATA")
    return path


def _json_default(value: Any) -> Any:
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, Path):
        return str(value)
    raise TypeError(f"not JSON-serialisable: {type(value).__name__}")


def _header(seed: int) -> list[str]:
    rule = "=" * 88
    return [
        "obbiou demo report: INVENTED DATA",
        rule,
        "Everything below comes from two invented scenarios and a simulated detector, generated",
        f"from seed {seed} by obbiou.demo.scenarios. No real port, warehouse or detector was",
        "measured; the numbers show what the tools report, not how good any real system is.",
        "",
        textwrap.fill("CAUTION: " + CAUTION, 88),
        rule,
    ]


def _fmt(v: float | None) -> str:
    return "n/a" if v is None else f"{v:.4f}"


def _section(
    number: int,
    scenario: Scenario,
    cfg: dict[str, Any],
    *,
    raw_n: dict[str, int],
    kept_n: dict[str, int],
    ev: Any,
    ev_base: Any,
    ci_all: tuple[float, float],
    ci_head: tuple[float, float],
    ci_labels: dict[str, tuple[float, float]],
    cmp: Any,
    control: Any,
    resamples: int,
    frame: str,
    tiling: dict[str, dict[str, int]] | None = None,
) -> list[str]:
    """The report's text for one scenario."""
    from obbiou.evaluation import causes_text

    head = cfg["headline"]
    t = scenario.truth
    counts = ", ".join(f"{lab} {int((t.label == lab).sum())}" for lab in scenario.labels)
    lines = [
        "",
        f"{number}. {scenario.title}",
        "-" * 88,
        f"frames: {len(scenario.frames)}; coordinates: {scenario.units}",
        f"truths: {counts} ({int(t.ignore.sum())} marked ignore)",
        *(
            [
                "simulated detector, raw -> after suppression "
                f"(IoU > {cfg['max_iou']:g}, per frame and label):",
                "  " + "; ".join(f"{v} {raw_n[v]} -> {kept_n[v]}" for v in VERSIONS),
            ]
            if tiling is None
            else _tiling_lines(cfg, tiling)
        ),
        "",
        "Evaluation of the improved detector:",
        ev.summary(note=False),  # the report says it once, at its head
        "",
        f"  mean AP over thresholds {_fmt(ev.mean_ap())}, 95% interval "
        f"[{ci_all[0]:.4f}, {ci_all[1]:.4f}]; at IoU {head:g}: {_fmt(ev.mean_ap(head))} "
        f"[{ci_head[0]:.4f}, {ci_head[1]:.4f}] (bootstrap over frames, {resamples} resamples)",
    ]
    for lab, (lo, hi) in ci_labels.items():
        lines.append(f"    AP {lab} at {head:g}: {_fmt(ev.ap(lab, head))} [{lo:.4f}, {hi:.4f}]")
    lines += ["", causes_text(ev, head)]
    for by, group in ev.buckets.items():
        lines.append(f"AP at IoU {head:g} by {by}:")
        for bucket, sub in group.items():
            aps = ", ".join(f"{lab} {_fmt(sub.ap(lab, head))}" for lab in sub.labels)
            lines.append(f"  {bucket:>10}: mean {_fmt(sub.mean_ap(head))} ({aps})")
    lo, hi = cmp.interval
    lines += [
        "",
        "Comparison, improved (B) against baseline (A), same truth, paired bootstrap:",
        f"  baseline mean AP {_fmt(ev_base.mean_ap())}, improved {_fmt(ev.mean_ap())}",
        f"  B - A: {cmp.difference:+.4f}, 95% interval [{lo:+.4f}, {hi:+.4f}], "
        f"p = {cmp.p_value:.4f}",
        "Control, the improved detector (A) against a rerun of itself with fresh noise (B):",
        f"  B - A: {control.difference:+.4f}, 95% interval [{control.interval[0]:+.4f}, "
        f"{control.interval[1]:+.4f}], p = {control.p_value:.4f}",
        "  (same error model: expect an interval across zero and a large p; with few frames or",
        "  rare labels the bootstrap over frames is rough and may say otherwise)",
        "",
        f"Scene picture: {scenario.name}/scene.png shows frame {frame}."
        + ("" if tiling is None else f" {scenario.name}/tiles.png shows its detector tiles."),
    ]
    return lines


def _lidar_section(lidar: Any, n_returns: int) -> list[str]:
    """The report's text for the warehouse evaluated by centre distance with returns."""
    return [
        "",
        f"The same detections matched by ground-plane centre distance instead of IoU, with "
        f"{n_returns} invented lidar returns:",
        f"truths holding fewer than {LIDAR['min_points']} returns are set aside as ignore truths.",
        lidar.summary(note=False),
    ]


def _footer(out: Path, files: dict[str, Path]) -> list[str]:
    lines = ["", "Files", "-" * 88]
    for key in sorted(files):
        lines.append(f"  {files[key].relative_to(out)}")
    lines += [
        "",
        "Try the command line on the tables written here, for example:",
        f"  obbiou evaluate {out}/harbour/truth.csv {out}/harbour/improved.csv "
        "--iou 0.5:0.95:0.05 --interval",
        f"  obbiou compare {out}/warehouse/truth.csv {out}/warehouse/baseline.csv "
        f"{out}/warehouse/improved.csv --iou 0.5",
        f"  obbiou suppress {out}/warehouse/raw_improved.csv --max-iou 0.3 --out kept.csv",
        f"  obbiou stitch {out}/harbour/raw_improved.csv --image {HARBOUR_TILE} {HARBOUR_TILE} "
        f"--size {HARBOUR_DETECTOR_TILE} --overlap {HARBOUR_OVERLAP} --out merged.csv",
        f"  obbiou evaluate {out}/warehouse/truth.csv {out}/warehouse/improved.csv "
        f"--distance 0.5,1,2,4 --points {out}/warehouse/returns.csv --min-points 5",
        "",
        "Reminder: the data is invented.",
    ]
    return lines
