"""``obbiou suppress``: non-maximum suppression of a detections table, frame by frame."""

from __future__ import annotations

import argparse

from obbiou.cli.options import (
    add_common,
    add_table_output,
    bad_option,
    emit,
    finite_float,
    positive_float,
    positive_int,
)

SUMMARY = (
    "Remove duplicate detections (non-maximum suppression) frame by frame, within each "
    "label, and write the rows that are kept."
)
EXAMPLE = (
    "  obbiou suppress raw.csv --max-iou 0.4 --out kept.csv\n"
    "  obbiou suppress raw.parquet --decay gaussian --sigma 0.5 --min-score 0.05 "
    "--out kept.parquet"
)


def configure(p: argparse.ArgumentParser) -> None:
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
        "--sigma", type=positive_float, metavar="S", default=0.5, help="width of the gaussian decay"
    )
    p.add_argument(
        "--min-score",
        type=finite_float,
        metavar="SCORE",
        default=0.0,
        help="drop boxes whose (decayed) score falls to this or below",
    )
    p.add_argument(
        "--limit",
        type=positive_int,
        default=None,
        metavar="N",
        help="keep at most N boxes per frame",
    )
    p.add_argument(
        "--across-labels",
        action="store_true",
        help="let boxes of different labels suppress each other",
    )
    add_table_output(p, bev=True)
    add_common(p)


def run(args: argparse.Namespace) -> int:
    from obbiou.frames import suppress_frames
    from obbiou.tables import frame_groups, read_table, table_format

    if args.out not in (None, "-"):
        table_format(args.out)  # an unknown output format fails before any work
    # Read the numbers as written: the kept rows are written back unchanged.
    table = read_table(args.boxes, role="detections", shape=args.shape)
    if not 0.0 <= args.max_iou <= 1.0:
        raise bad_option("--max-iou", f"--max-iou: expected a number in [0, 1], got {args.max_iou}")
    kept, scores = suppress_frames(
        table,
        max_iou=args.max_iou,
        across_labels=args.across_labels,
        decay=args.decay,
        sigma=args.sigma,
        min_score=args.min_score,
        limit=args.limit,
        degrees=args.degrees,
        progress=not args.quiet,
        bev=args.bev,
    )
    out = kept.to_frame()
    out["score"] = scores
    n = len(frame_groups(table.frame))
    frames = f"{n} frame" + ("" if n == 1 else "s")
    emit(out, args.out, f"kept {len(out)} of {len(table)} boxes in {frames}")
    return 0
