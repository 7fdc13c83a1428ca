"""The ``obbiou`` command line: demo, evaluate, compare, suppress, overlap, warmup.

Run ``obbiou --help`` (or ``python -m obbiou --help``) for the list, and
``obbiou COMMAND --help`` for each command with an example. Tables are CSV, Parquet or JSON
Lines files with the columns of :mod:`obbiou.evaluation.tables` (``frame, label[, score]``
and the box columns of a layout). Bad input gives one line on stderr and exit status 2.

Examples
--------
>>> main(["--version"])
obbiou 0.1.0
0
"""

from __future__ import annotations

import argparse
import sys
import textwrap
import time
from collections.abc import Sequence
from pathlib import Path
from typing import Any

from obbiou.errors import InvalidInput, TaskFailed
from obbiou.tables import TABLE_SUFFIXES, frame_groups, write_table

__all__ = ["main", "build_parser", "parse_iou"]

#: Exit status for bad input (files, options), as argparse uses for bad options.
BAD_INPUT = 2

_SHAPES = ("axis", "rotated", "polygon", "axis3", "upright")
_AP_KINDS = ("all-points", "11-point", "101-point", "step")
_EXTRAS = {
    "pandas": "eval",
    "pyarrow": "eval",
    "matplotlib": "eval",
    "tqdm": "eval",
    "dask": "dask",
    "distributed": "dask",
}


class _Failure(InvalidInput):
    """Bad input found by the command line itself; the message is the one line shown."""

    def __init__(self, message: str) -> None:
        option = message.split(" ", 1)[0].rstrip(":")
        super().__init__(option, message, message=message)


class _Parser(argparse.ArgumentParser):
    """argparse with one-line errors that point to ``--help``."""

    def error(self, message: str) -> None:  # type: ignore[override]
        self.exit(BAD_INPUT, f"{self.prog}: error: {message} (see {self.prog} --help)\n")


class _Help(argparse.RawDescriptionHelpFormatter):
    """Keep the examples' line breaks; show a default when there is one worth showing."""

    def _get_help_string(self, action: argparse.Action) -> str:
        text = action.help or ""
        default = action.default
        shown = not (default is None or default is False or default == argparse.SUPPRESS)
        if shown and "default" not in text:
            if action.option_strings:
                text += " (default: %(default)s)"
        return text


# --------------------------------------------------------------------------------------------
# Small helpers shared by the commands
# --------------------------------------------------------------------------------------------


def parse_iou(values: Sequence[str] | None) -> Any:
    """Turn the ``--iou`` options into the ``iou`` argument of the evaluation.

    Each value is a threshold ``0.5``, a list ``0.5,0.75``, a range ``0.5:0.95:0.05`` or one
    of those for one label, ``LABEL=VALUE``. A value without a label is the default for the
    labels not named.

    Examples
    --------
    >>> parse_iou(["0.5:0.95:0.05"])
    '0.5:0.95:0.05'
    >>> parse_iou(["0.5", "crane=0.7"])
    {None: '0.5', 'crane': '0.7'}
    >>> parse_iou(None)
    0.5
    """
    if not values:
        return 0.5
    per_label: dict[str | None, str] = {}
    for text in values:
        label, sep, value = text.rpartition("=")
        key = label.strip() if sep else None
        if sep and not key:
            raise _Failure(f"--iou {text!r}: expected LABEL=VALUE with a label before '='")
        if key in per_label:
            what = f"label {key!r}" if key else "the default"
            raise _Failure(f"--iou: {what} is given twice")
        per_label[key] = value.strip()
    if list(per_label) == [None]:
        return per_label[None]
    return per_label


def _float(text: str) -> float:
    try:
        return float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a number, got {text!r}") from None


def _positive_float(text: str) -> float:
    """argparse type: a finite number > 0."""
    value = _float(text)
    if not (value > 0 and value < float("inf")):
        raise argparse.ArgumentTypeError(f"expected a positive number, got {text!r}")
    return value


def _finite_float(text: str) -> float:
    """argparse type: a finite number."""
    value = _float(text)
    if not abs(value) < float("inf"):
        raise argparse.ArgumentTypeError(f"expected a finite number, got {text!r}")
    return value


def _positive_int(text: str) -> int:
    """argparse type: a whole number >= 1."""
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a whole number >= 1, got {text!r}") from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"expected a whole number >= 1, got {text!r}")
    return value


def _numbers(text: str | None, option: str) -> list[float] | None:
    """``"0,32,96"`` -> ``[0.0, 32.0, 96.0]`` (bucket edges)."""
    if text is None:
        return None
    try:
        edges = [float(v) for v in text.split(",") if v.strip()]
    except ValueError:
        raise _Failure(f"{option} {text!r}: expected numbers separated by commas") from None
    if len(edges) < 2 or any(b <= a for a, b in zip(edges, edges[1:], strict=False)):
        raise _Failure(f"{option} {text!r}: expected at least two increasing edges")
    return edges


def details_text(evaluation: Any, iou: float | None = None) -> str:
    """Causes of false positives and misses per label, and the orientation error, as text.

    Each label is reported at ``iou`` or, by default, at its own lowest threshold (labels
    may have thresholds of their own).
    """
    import math

    per_label = evaluation.to_dict(breakdowns=False)["labels"]
    at: dict[str, float] = {}
    for lab, entry in per_label.items():
        own = sorted(float(k) for k in entry["ap"])
        if iou is None:
            at[lab] = own[0]
        elif any(abs(float(iou) - v) < 1e-9 for v in own):
            at[lab] = float(iou)
    fps: dict[str, Any] = {}
    misses: dict[str, Any] = {}
    for t in sorted(set(at.values())):
        for lab, c in evaluation.false_positives(t).items():
            if at.get(lab) == t:
                fps[lab] = c
        for lab, c in evaluation.misses(t).items():
            if at.get(lab) == t:
                misses[lab] = c
    width = max([len(str(lab)) for lab in at] + [5])
    row = f"  {{:<{width}}}  {{:>5}}  {{:>9}}  {{:>11}}  {{:>11}}  {{:>10}}  {{:>6}}"
    lines = ["False positives by cause:"]
    lines.append(
        row.format(
            "label", "IoU>=", "duplicate", "wrong label", "poor boxes", "background", "total"
        )
    )
    for lab, c in fps.items():
        lines.append(
            row.format(
                lab,
                f"{at[lab]:.2f}",
                c.duplicate,
                c.wrong_label,
                c.poor_localisation,
                c.background,
                c.total,
            )
        )
    lines.append("Missed truths by cause:")
    lines.append(
        row.format("label", "IoU>=", "crowded", "wrong label", "poor boxes", "not found", "total")
    )
    for lab, c in misses.items():
        lines.append(
            row.format(
                lab,
                f"{at[lab]:.2f}",
                c.crowded,
                c.wrong_label,
                c.poor_localisation,
                c.not_detected,
                c.total,
            )
        )
    if evaluation.records.shape not in ("axis", "axis3"):
        upright = evaluation.records.shape == "upright"
        period = "heading modulo 360°" if upright else "angle modulo 180°"
        lines.append(f"Orientation error of matched pairs ({period}, degrees):")
        lines.append(row.format("label", "IoU>=", "pairs", "mean", "median", "90th pct", "flipped"))

        def deg(v: float | None) -> str:
            return "n/a" if v is None or math.isnan(v) else f"{math.degrees(v):.2f}"

        rows = [(lab, t) for lab, t in at.items()]
        if len(set(at.values())) == 1 and len(at) > 1:
            rows.append((None, next(iter(at.values()))))  # all labels at the one threshold
        for lab, t in rows:
            e = evaluation.orientation_error(t, label=lab)
            flipped = "n/a" if e.flipped is None else f"{e.flipped:.1%}"
            lines.append(
                row.format(
                    "all" if lab is None else lab,
                    f"{t:.2f}",
                    e.pairs,
                    deg(e.mean),
                    deg(e.median),
                    deg(e.p90),
                    flipped,
                )
            )
    return "\n".join(lines)


def _check_out(out: str | None) -> None:
    """Reject an output name of unknown format before any work is done."""
    if out is not None and out != "-" and Path(out).suffix.lower() not in TABLE_SUFFIXES:
        raise _Failure(
            f"--out {out}: unknown table format {Path(out).suffix or '(no suffix)'!r}; "
            "use .csv, .parquet or .jsonl"
        )


def _emit(table: Any, out: str | None, note: str) -> None:
    """Write to ``out`` or, without it, CSV on stdout; then say what was done on stderr."""
    if out is None or out == "-":
        table.to_csv(sys.stdout, index=False)
        print(note, file=sys.stderr)
    else:
        write_table(table, out)
        print(f"{note}; wrote {out}", file=sys.stderr)


def _progress(items: Any, args: argparse.Namespace, what: str) -> Any:
    if args.quiet or len(items) < 50:
        return items
    from tqdm import tqdm

    return tqdm(items, desc=what, unit="frame", leave=False, file=sys.stderr)


# --------------------------------------------------------------------------------------------
# Commands
# --------------------------------------------------------------------------------------------


def _cmd_demo(args: argparse.Namespace) -> int:
    if args.frames is not None and args.frames < 1:
        raise _Failure(f"--frames: expected a whole number >= 1, got {args.frames}")
    from obbiou.demo.run import run_demo

    run_demo(args.out, seed=args.seed, frames=args.frames, progress=not args.quiet)
    return 0


def _evaluate_options(args: argparse.Namespace) -> dict:
    return {
        "shape": args.shape,
        "iou": parse_iou(args.iou),
        "ap": args.ap,
        "degrees": args.degrees,
    }


def _cmd_evaluate(args: argparse.Namespace) -> int:
    from obbiou.evaluation import evaluate

    opts = _evaluate_options(args)
    if args.recall_points is not None:
        opts["recall_points"] = args.recall_points
    if args.top is not None:
        opts["max_detections"] = args.top
    sizes = _numbers(args.size_buckets, "--size-buckets")
    ranges = _numbers(args.range_buckets, "--range-buckets")
    if sizes is not None:
        opts["size_buckets"] = sizes
    if ranges is not None:
        opts["range_buckets"] = ranges
    if args.workers is not None or args.scheduler is not None:
        from obbiou.distributed import evaluate_distributed

        result = evaluate_distributed(
            args.truth,
            args.detections,
            workers=args.workers,
            scheduler=args.scheduler,
            progress=not args.quiet,
            **opts,
        )
    else:
        result = evaluate(args.truth, args.detections, progress=not args.quiet, **opts)
    print(result.summary())
    if args.interval:
        lo, hi = result.interval(resamples=args.resamples, level=args.level, seed=args.seed)
        print(
            f"\nmean AP {result.mean_ap():.4f}, {args.level:.0%} interval [{lo:.4f}, {hi:.4f}]"
            f" (bootstrap over frames, {args.resamples} resamples, seed {args.seed})"
        )
    if args.details:
        print()
        print(details_text(result))
    for by, group in result.buckets.items():
        print(f"\nmean AP by {by}:")
        for name, sub in group.items():
            m = sub.mean_ap()
            print(f"  {name:>14}: " + ("n/a" if m is None else f"{m:.4f}"))
    if args.json:
        result.to_json(args.json)
        print(f"wrote {args.json}", file=sys.stderr)
    if args.plot:
        result.plot(args.plot)
        print(f"wrote {args.plot}", file=sys.stderr)
    return 0


def _cmd_compare(args: argparse.Namespace) -> int:
    from obbiou.evaluation import compare

    opts = _evaluate_options(args)
    if args.recall_points is not None:
        opts["recall_points"] = args.recall_points
    if args.top is not None:
        opts["max_detections"] = args.top
    result = compare(
        args.truth,
        args.first,
        args.second,
        resamples=args.resamples,
        level=args.level,
        seed=args.seed,
        progress=not args.quiet,
        **opts,
    )
    print(result.summary())
    if args.json:
        import json

        Path(args.json).write_text(json.dumps(result.to_dict(), indent=2) + "\n")
        print(f"wrote {args.json}", file=sys.stderr)
    return 0


def _cmd_suppress(args: argparse.Namespace) -> int:
    import numpy as np

    import obbiou
    from obbiou.tables import read_table

    _check_out(args.out)
    # Read the numbers as written (the kept rows are written back unchanged) and turn degrees
    # into radians only for the computation.
    table = read_table(args.boxes, role="detections", shape=args.shape)
    boxes = _radians(table, args.degrees)
    if not 0.0 <= args.max_iou <= 1.0:
        raise _Failure(f"--max-iou: expected a number in [0, 1], got {args.max_iou}")
    keep: list[np.ndarray] = []
    scores: list[np.ndarray] = []
    for rows in _progress(frame_groups(table.frame), args, "suppress"):
        labels = None if args.across_labels else table.label[rows]
        kept = obbiou.suppress(
            boxes[rows],
            table.score[rows],
            shape=table.shape,
            max_iou=args.max_iou,
            labels=labels,
            decay=args.decay,
            sigma=args.sigma,
            min_score=args.min_score,
            limit=args.limit,
        )
        keep.append(rows[np.asarray(kept.indices, dtype=np.int64)])
        scores.append(np.asarray(kept.scores, dtype=np.float64))
    idx = np.concatenate(keep) if keep else np.zeros(0, dtype=np.int64)
    out = table.take(idx).to_frame()
    out["score"] = np.concatenate(scores) if scores else np.zeros(0)
    frames = f"{len(keep)} frame" + ("" if len(keep) == 1 else "s")
    _emit(out, args.out, f"kept {len(out)} of {len(table)} boxes in {frames}")
    return 0


def _radians(table: Any, degrees: bool) -> Any:
    """The table's boxes with the angle / yaw column in radians."""
    import numpy as np

    col = {"rotated": 4, "upright": 6}.get(table.shape)
    data = table.boxes.data
    if not degrees or col is None:
        return data
    data = data.copy()
    data[:, col] = np.deg2rad(data[:, col])
    return data


def _cmd_overlap(args: argparse.Namespace) -> int:
    import numpy as np
    import pandas as pd

    import obbiou
    from obbiou.tables import read_table

    _check_out(args.out)
    role = "truth"  # frame, label and boxes; a score column, if any, passes through
    a = read_table(args.first, role=role, shape=args.shape, degrees=args.degrees)
    b = (
        a
        if args.second is None
        else read_table(args.second, role=role, shape=args.shape, degrees=args.degrees)
    )
    if not 0.0 <= args.min_iou < 1.0:
        raise _Failure(f"--min-iou: expected a number in [0, 1), got {args.min_iou}")
    shape = a.shape if a.shape == b.shape else None  # mixed layouts: each inferred
    b_rows = {}  # frames matched by their text, so 7 in one table meets "7" in the other
    if b is not a:
        for rows in frame_groups(b.frame):
            b_rows[str(b.frame[rows[0]])] = rows
    parts = []
    for rows in _progress(frame_groups(a.frame), args, "overlap"):
        frame = a.frame[rows[0]]
        if b is a:
            pairs = obbiou.overlapping_pairs(
                a.boxes.data[rows], shape=a.shape, min_iou=args.min_iou
            )
            other = rows
        else:
            other = b_rows.get(str(frame))
            if other is None:
                continue
            pairs = obbiou.overlapping_pairs(
                a.boxes.data[rows], b.boxes.data[other], shape=shape, min_iou=args.min_iou
            )
        first = rows[np.asarray(pairs.first, dtype=np.int64)]
        second = other[np.asarray(pairs.second, dtype=np.int64)]
        parts.append(
            pd.DataFrame(
                {
                    "frame": a.frame[first],
                    "first": first,
                    "second": second,
                    "first_label": a.label[first],
                    "second_label": b.label[second],
                    "iou": np.asarray(pairs.iou, dtype=np.float64),
                }
            )
        )
    columns = ["frame", "first", "second", "first_label", "second_label", "iou"]
    out = pd.concat(parts, ignore_index=True) if parts else pd.DataFrame(columns=columns)
    _emit(out, args.out, f"found {len(out)} overlapping pairs")
    return 0


def _cmd_warmup(args: argparse.Namespace) -> int:
    import numpy as np

    start = time.perf_counter()
    steps = []

    def step(name: str, fn: Any) -> None:
        t0 = time.perf_counter()
        fn()
        steps.append((name, time.perf_counter() - t0))
        print(f"  {name:<60s} {steps[-1][1]:6.1f} s", flush=True)

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


# --------------------------------------------------------------------------------------------
# The parser
# --------------------------------------------------------------------------------------------

_DESCRIPTION = """\
Exact, fast overlap of rotated 2D boxes, convex quadrilaterals and upright 3D boxes, with
non-maximum suppression and detector evaluation, on a CPU.

Tables are CSV, Parquet or JSON Lines with one row per box: frame, label, score (detections)
and the box columns of one layout (angles in radians, counter-clockwise from +x):
  axis      x_min y_min x_max y_max
  rotated   cx cy width height angle
  polygon   px0 py0 px1 py1 px2 py2 px3 py3
  upright   cx cy cz length width height yaw
Ground truth may have a boolean ignore column.
"""

_EPILOG = """\
start here:
  obbiou demo --out demo-output     # an end-to-end run on invented data
  obbiou COMMAND --help             # every command, with an example
"""


def _add_common(p: argparse.ArgumentParser, *, shape: bool = True) -> None:
    if shape:
        p.add_argument(
            "--shape",
            choices=_SHAPES,
            default=None,
            help="box layout of the tables (default: inferred from the columns)",
        )
        p.add_argument(
            "--degrees",
            action="store_true",
            help="angle / yaw columns are in degrees (default: radians)",
        )
    p.add_argument("-q", "--quiet", action="store_true", help="no progress bars")


def _add_matching(p: argparse.ArgumentParser) -> None:
    p.add_argument(
        "--iou",
        action="append",
        metavar="[LABEL=]T",
        help="IoU threshold(s) for a match: 0.5, a list 0.5,0.75, a range "
        "0.5:0.95:0.05; repeat as LABEL=T for a label's own (default: 0.5)",
    )
    p.add_argument(
        "--ap",
        choices=_AP_KINDS,
        default="all-points",
        help="how AP is computed: area under the precision envelope (all-points), "
        "the envelope sampled at 11 or 101 recall levels, or the plain step sum",
    )
    p.add_argument(
        "--recall-points",
        type=int,
        default=None,
        metavar="N",
        help="sample the precision envelope at N recall levels (overrides --ap)",
    )
    p.add_argument(
        "--top",
        type=int,
        default=None,
        metavar="N",
        help="score only the N highest-scored detections of each frame",
    )


def build_parser() -> argparse.ArgumentParser:
    """The argument parser of the ``obbiou`` command (all subcommands)."""
    from obbiou import __version__

    parser = _Parser(
        prog="obbiou",
        description=_DESCRIPTION,
        epilog=_EPILOG,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("--version", action="version", version=f"obbiou {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)

    def command(name: str, summary: str, example: str) -> argparse.ArgumentParser:
        return sub.add_parser(
            name,
            help=summary,
            description=textwrap.fill(summary, 88),
            epilog="example:\n" + example,
            formatter_class=_Help,
        )

    p = command(
        "demo",
        "Run the whole job on two invented, seeded scenarios (harbour survey and warehouse "
        "lidar): suppress, evaluate with intervals, compare two simulated detectors, and write "
        "a report, JSON and pictures.",
        "  obbiou demo --out demo-output --seed 7\n"
        "  (the data is invented; detection metrics do not establish that a system is safe)",
    )
    p.add_argument("--out", default="obbiou-demo", metavar="DIR", help="folder for the outputs")
    p.add_argument("--seed", type=int, default=0, help="seed of the invented data")
    p.add_argument(
        "--frames",
        type=int,
        default=None,
        metavar="N",
        help="frames per scenario (default: 12 harbour tiles, 40 warehouse sweeps)",
    )
    _add_common(p, shape=False)
    p.set_defaults(run=_cmd_demo)

    p = command(
        "evaluate",
        "Evaluate detections against ground truth: matching, precision/recall, AP per label "
        "and threshold, mAP.",
        "  obbiou evaluate truth.csv detections.csv --iou 0.5:0.95:0.05 \\\n"
        "      --json result.json --plot curves.png\n"
        "  obbiou evaluate truth.parquet dets.parquet --iou 0.5 --iou crane=0.7 --interval\n"
        "  obbiou evaluate truth/ dets/ --workers 2      # folders of Parquet files, on Dask",
    )
    p.add_argument(
        "truth",
        metavar="TRUTH",
        help="ground-truth table (with --workers/--scheduler: or a folder)",
    )
    p.add_argument(
        "detections",
        metavar="DETECTIONS",
        help="detections table (with --workers/--scheduler: or a folder of Parquet files)",
    )
    _add_matching(p)
    p.add_argument(
        "--size-buckets",
        metavar="EDGES",
        default=None,
        help="also report AP by box size (area or volume), e.g. 0,1000,10000,1e9",
    )
    p.add_argument(
        "--range-buckets",
        metavar="EDGES",
        default=None,
        help="upright boxes: also report AP by range from the sensor, e.g. 0,10,20,40",
    )
    p.add_argument(
        "--interval",
        action="store_true",
        help="add a bootstrap confidence interval of mAP (resampling frames)",
    )
    p.add_argument(
        "--resamples",
        type=int,
        default=1000,
        metavar="N",
        help="bootstrap resamples for --interval",
    )
    p.add_argument("--level", type=float, default=0.95, help="confidence level for --interval")
    p.add_argument(
        "--details",
        action="store_true",
        help="also print the causes of false positives and misses and the orientation error",
    )
    p.add_argument("--seed", type=int, default=0, help="seed of the bootstrap")
    p.add_argument("--json", metavar="PATH", default=None, help="write the full result as JSON")
    p.add_argument(
        "--plot", metavar="PATH", default=None, help="write precision-recall curves as PNG"
    )
    cluster = p.add_mutually_exclusive_group()
    cluster.add_argument(
        "--workers",
        type=int,
        metavar="N",
        default=None,
        help="match frames on N local Dask worker processes (needs obbiou[dask])",
    )
    cluster.add_argument(
        "--scheduler",
        metavar="ADDRESS",
        default=None,
        help="match frames on an existing Dask cluster, e.g. tcp://10.0.0.5:8786",
    )
    _add_common(p)
    p.set_defaults(run=_cmd_evaluate)

    p = command(
        "compare",
        "Compare two detectors on the same ground truth: the difference in mAP with a paired "
        "bootstrap interval over frames and a p-value.",
        "  obbiou compare truth.csv old.csv new.csv --iou 0.5:0.95:0.05 --json diff.json",
    )
    p.add_argument("truth", metavar="TRUTH", help="ground-truth table")
    p.add_argument("first", metavar="DET_A", help="detections of the first detector (reference)")
    p.add_argument("second", metavar="DET_B", help="detections of the second detector")
    _add_matching(p)
    p.add_argument("--resamples", type=int, default=1000, metavar="N", help="bootstrap resamples")
    p.add_argument("--level", type=float, default=0.95, help="confidence level of the interval")
    p.add_argument("--seed", type=int, default=0, help="seed of the bootstrap")
    p.add_argument("--json", metavar="PATH", default=None, help="write the comparison as JSON")
    _add_common(p)
    p.set_defaults(run=_cmd_compare)

    p = command(
        "suppress",
        "Remove duplicate detections (non-maximum suppression) frame by frame, within each "
        "label, and write the rows that are kept.",
        "  obbiou suppress raw.csv --max-iou 0.4 --out kept.csv\n"
        "  obbiou suppress raw.parquet --decay gaussian --sigma 0.5 --min-score 0.05 "
        "--out kept.parquet",
    )
    p.add_argument("boxes", metavar="BOXES", help="detections table (frame, label, score, boxes)")
    p.add_argument(
        "--max-iou",
        type=float,
        metavar="IOU",
        default=0.5,
        help="a box overlapping a better one by more than this is removed (hard) or decayed (soft)",
    )
    p.add_argument(
        "--decay",
        choices=("linear", "gaussian"),
        default=None,
        help="soft suppression: lower the scores instead of removing (default: hard)",
    )
    p.add_argument(
        "--sigma",
        type=_positive_float,
        metavar="S",
        default=0.5,
        help="width of the gaussian decay",
    )
    p.add_argument(
        "--min-score",
        type=_finite_float,
        metavar="SCORE",
        default=0.0,
        help="drop boxes whose (decayed) score falls to this or below",
    )
    p.add_argument(
        "--limit",
        type=_positive_int,
        default=None,
        metavar="N",
        help="keep at most N boxes per frame",
    )
    p.add_argument(
        "--across-labels",
        action="store_true",
        help="let boxes of different labels suppress each other",
    )
    p.add_argument(
        "--out",
        metavar="PATH",
        default=None,
        help="output table (.csv, .parquet, .jsonl; default: CSV on stdout)",
    )
    _add_common(p)
    p.set_defaults(run=_cmd_suppress)

    p = command(
        "overlap",
        "List the pairs of boxes that overlap, frame by frame, with their IoU (a spatial index "
        "finds them; no all-pairs matrix). With one table: its pairs with itself (first < "
        "second). Row numbers count the data rows of each table from 0.",
        "  obbiou overlap tile.csv --min-iou 0.1 --out pairs.csv\n"
        "  obbiou overlap truth.csv detections.csv --out pairs.parquet",
    )
    p.add_argument("first", metavar="A", help="table of boxes (frame, label, boxes)")
    p.add_argument(
        "second", metavar="B", nargs="?", default=None, help="second table (default: A with itself)"
    )
    p.add_argument(
        "--min-iou",
        type=float,
        default=0.0,
        metavar="IOU",
        help="report only pairs with IoU above this",
    )
    p.add_argument(
        "--out",
        metavar="PATH",
        default=None,
        help="output table (.csv, .parquet, .jsonl; default: CSV on stdout)",
    )
    _add_common(p)
    p.set_defaults(run=_cmd_overlap)

    p = command(
        "warmup",
        "Compile all of obbiou's kernels now (they are cached on disk), so that later runs "
        "start at full speed.",
        "  obbiou warmup",
    )
    p.set_defaults(run=_cmd_warmup, quiet=True)
    return parser


def _one_line(exc: BaseException) -> str:
    text = str(exc) or type(exc).__name__
    return " ".join(text.split())


def main(argv: Sequence[str] | None = None) -> int:
    """Run the ``obbiou`` command line; returns the exit status.

    Parameters
    ----------
    argv : sequence of str, optional
        The arguments (default: ``sys.argv[1:]``).

    Returns
    -------
    int
        0 on success, 2 for bad input (a one-line message on stderr, no traceback).

    Examples
    --------
    >>> main(["demo", "--frames", "0"])  # one line on stderr, exit status 2
    2
    """
    parser = build_parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # --help, --version, or a bad option (already reported)
        return int(exc.code or 0) if not isinstance(exc.code, str) else BAD_INPUT
    if args.command is None:
        parser.print_help()
        return BAD_INPUT
    prog = f"obbiou {args.command}"
    try:
        return int(args.run(args) or 0)
    except InvalidInput as exc:
        print(f"{prog}: error: {_one_line(exc)}", file=sys.stderr)
    except FileNotFoundError as exc:
        print(f"{prog}: error: {exc.filename or exc}: file not found", file=sys.stderr)
    except OSError as exc:
        where = f"{exc.filename}: " if getattr(exc, "filename", None) else ""
        print(f"{prog}: error: {where}{exc.strerror or _one_line(exc)}", file=sys.stderr)
    except ImportError as exc:
        name = (exc.name or "").split(".")[0]
        if name in _EXTRAS:
            hint = f"pip install 'obbiou[{_EXTRAS[name]}]'"
            print(
                f"{prog}: error: this needs {name}, which is not installed; {hint}", file=sys.stderr
            )
        else:
            print(f"{prog}: error: {_one_line(exc)}", file=sys.stderr)
    except KeyboardInterrupt:
        print(f"{prog}: interrupted", file=sys.stderr)
        return 130
    except TaskFailed as exc:  # a failed cluster task
        print(f"{prog}: error: {_one_line(exc)}", file=sys.stderr)
        return 1
    return BAD_INPUT


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
