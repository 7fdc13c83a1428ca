"""``obbiou overlap``: the overlapping pairs of boxes in a table (or two), frame by frame."""

from __future__ import annotations

import argparse

from obbiou.cli.options import add_common, add_table_output, bad_option, emit

SUMMARY = (
    "List the pairs of boxes that overlap, frame by frame, with their IoU (a spatial index "
    "finds them; no all-pairs matrix). With one table: its pairs with itself (first < "
    "second). Row numbers count the data rows of each table from 0."
)
EXAMPLE = (
    "  obbiou overlap tile.csv --min-iou 0.1 --out pairs.csv\n"
    "  obbiou overlap truth.csv detections.csv --out pairs.parquet"
)


def configure(p: argparse.ArgumentParser) -> None:
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
    add_table_output(p, bev=True)
    add_common(p)


def run(args: argparse.Namespace) -> int:
    from obbiou.frames import overlap_frames
    from obbiou.tables import read_table, table_format

    if args.out not in (None, "-"):
        table_format(args.out)  # an unknown output format fails before any work
    role = "truth"  # frame, label and boxes; a score column, if any, passes through
    a = read_table(args.first, role=role, shape=args.shape, degrees=args.degrees)
    b = None
    if args.second is not None:
        b = read_table(args.second, role=role, shape=args.shape, degrees=args.degrees)
    if not 0.0 <= args.min_iou < 1.0:
        raise bad_option("--min-iou", f"--min-iou: expected a number in [0, 1), got {args.min_iou}")
    out = overlap_frames(a, b, min_iou=args.min_iou, progress=not args.quiet, bev=args.bev)
    emit(out, args.out, f"found {len(out)} overlapping pairs")
    return 0
