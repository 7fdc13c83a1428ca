"""``obbiou stitch``: per-tile detections of large images in, one set per image out."""

from __future__ import annotations

import argparse

from obbiou.cli.options import (
    add_common,
    add_table_output,
    bad_option,
    emit,
    positive_float,
    positive_int,
)

SUMMARY = (
    "Merge the detections of overlapping tiles into one set per large image: move them to "
    "image coordinates, drop boxes cut by a tile edge that another tile saw whole, then "
    "suppress (or fuse) the duplicates across seams."
)
EXAMPLE = (
    "  obbiou stitch tile_dets.csv --image 20000 20000 --size 1024 --overlap 200 "
    "--out mosaic_dets.csv\n"
    "  obbiou stitch tile_dets.parquet --image 8000 6000 --size 1024 --overlap 128 --fuse"
)


def configure(p: argparse.ArgumentParser) -> None:
    p.add_argument(
        "detections",
        metavar="DETECTIONS",
        help="detections in tile coordinates (frame = the image; a column with the tile index)",
    )
    p.add_argument(
        "--image",
        nargs=2,
        type=positive_int,
        metavar=("WIDTH", "HEIGHT"),
        required=True,
        help="image size in pixels: the tiles are obbiou.tiles.grid(WIDTH, HEIGHT, ...)",
    )
    p.add_argument("--size", type=positive_int, required=True, metavar="PX", help="tile side")
    p.add_argument(
        "--overlap", type=int, default=0, metavar="PX", help="overlap of neighbouring tiles"
    )
    p.add_argument(
        "--tile-column",
        default="tile",
        metavar="NAME",
        help="column holding each row's tile index (row-major from the top left)",
    )
    p.add_argument(
        "--max-iou",
        type=float,
        default=0.5,
        metavar="IOU",
        help="duplicates across seams: suppressed above this IoU (fused at or above it)",
    )
    p.add_argument(
        "--border",
        type=positive_float,
        default=None,
        metavar="PX",
        help="a box within this of an inner tile edge counts as cut (default: size / 64)",
    )
    p.add_argument("--fuse", action="store_true", help="fuse duplicates instead of suppressing")
    p.add_argument(
        "--across-labels",
        action="store_true",
        help="let boxes of different labels suppress each other",
    )
    add_table_output(p)
    add_common(p)


def run(args: argparse.Namespace) -> int:
    import numpy as np

    from obbiou.frames import merge_frames
    from obbiou.tables import box_columns, frame_groups, read_table, table_format
    from obbiou.tiles import grid

    if args.out not in (None, "-"):
        table_format(args.out)  # an unknown output format fails before any work
    if not 0.0 <= args.max_iou <= 1.0:
        raise bad_option("--max-iou", f"--max-iou: expected a number in [0, 1], got {args.max_iou}")
    tiles = grid(*args.image, size=args.size, overlap=args.overlap)
    table = read_table(args.detections, role="detections", shape=args.shape)
    rows, boxes, scores = merge_frames(
        table,
        tiles,
        tile_column=args.tile_column,
        max_iou=args.max_iou,
        border=args.border,
        fuse=args.fuse,
        across_labels=args.across_labels,
        degrees=args.degrees,
        progress=not args.quiet,
    )
    out = table.take(rows).to_frame()
    for j, column in enumerate(box_columns(table.shape)):
        out[column] = boxes[:, j]
    if args.degrees and table.shape == "rotated":
        out["angle"] = np.rad2deg(out["angle"])  # written back in the unit it was read in
    out["score"] = scores
    out["source_row"] = rows  # data rows of the input, from 0
    out = out.drop(columns=[args.tile_column])
    n = len(frame_groups(table.frame))
    images = f"{n} image" + ("" if n == 1 else "s")
    emit(out, args.out, f"kept {len(out)} of {len(table)} tile detections in {images}")
    return 0
