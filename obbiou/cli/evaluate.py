"""``obbiou evaluate``: detections against ground truth, in process or on a Dask cluster."""

from __future__ import annotations

import argparse
import sys

from obbiou.cli.options import (
    add_common,
    add_matching,
    bucket_edges,
    finite_float,
    matching_options,
)

SUMMARY = (
    "Evaluate detections against ground truth: matching, precision/recall, AP per label "
    "and threshold, mAP."
)
EXAMPLE = (
    "  obbiou evaluate truth.csv detections.csv --iou 0.5:0.95:0.05 \\\n"
    "      --json result.json --plot curves.png\n"
    "  obbiou evaluate truth.parquet dets.parquet --iou 0.5 --iou crane=0.7 --interval\n"
    "  obbiou evaluate truth.csv dets.csv --at-score 0.5 --details rows.parquet\n"
    "  obbiou evaluate truth/ dets/                  # folders of table files, natural order\n"
    "  obbiou evaluate truth/ dets/ --workers 2      # the same, matched on Dask workers\n"
    "  obbiou evaluate truth.csv dets.csv --distance 0.5,1,2,4 --points points.parquet \\\n"
    "      --min-points 5                             # lidar: centre distance, few returns"
)


def configure(p: argparse.ArgumentParser) -> None:
    p.add_argument(
        "truth",
        metavar="TRUTH",
        help="ground-truth table, or a folder of them (read in natural order of file names)",
    )
    p.add_argument(
        "detections",
        metavar="DETECTIONS",
        help="detections table, or a folder of them (read in natural order of file names)",
    )
    add_matching(p)
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
        "--causes",
        action="store_true",
        help="also print the causes of false positives and misses and the orientation error",
    )
    p.add_argument(
        "--details",
        default=None,
        metavar="PATH",
        help="write one row per detection and per truth to PATH with .detections / .truths "
        "before the suffix (.csv, .parquet or .jsonl), e.g. rows.csv -> rows.detections.csv, "
        "rows.truths.csv",
    )
    p.add_argument(
        "--at-score",
        type=finite_float,
        metavar="S",
        default=None,
        help="also print precision, recall and F1 per label keeping detections scoring >= S "
        "(and put them into --json under 'at_score')",
    )
    p.add_argument("--seed", type=int, default=0, help="seed of the bootstrap")
    p.add_argument("--json", metavar="PATH", default=None, help="write the full result as JSON")
    p.add_argument(
        "--plot", metavar="PATH", default=None, help="write precision-recall curves as PNG"
    )
    p.add_argument(
        "--plot-iou",
        type=float,
        metavar="T",
        default=None,
        help="draw the curves of --plot at IoU threshold T (default: each label's lowest)",
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
    add_common(p)


def run(args: argparse.Namespace) -> int:
    from obbiou.evaluation import evaluate
    from obbiou.evaluation.details import details_paths, write_details
    from obbiou.evaluation.text import causes_text, interval_text

    rows_path = args.details
    if rows_path is not None:
        details_paths(rows_path)  # a bad suffix fails before any work
    opts = matching_options(args)
    sizes = bucket_edges(args.size_buckets, "--size-buckets")
    ranges = bucket_edges(args.range_buckets, "--range-buckets")
    if sizes is not None:
        opts["size_buckets"] = sizes
    if ranges is not None:
        opts["range_buckets"] = ranges
    if args.workers is not None or args.scheduler is not None:
        from obbiou.distributed import evaluate_distributed

        # warm=True: the workers compile (or load from the cache) first, with its own bar
        cluster = {"workers": args.workers, "scheduler": args.scheduler, "warm": True}
        result = evaluate_distributed(
            args.truth, args.detections, progress=not args.quiet, **cluster, **opts
        )
    else:
        result = evaluate(args.truth, args.detections, progress=not args.quiet, **opts)
    print(result.summary())
    interval = None
    if args.interval:
        interval = {"resamples": args.resamples, "level": args.level, "seed": args.seed}
        print()
        print(interval_text(result, **interval))
    if args.causes:
        print()
        print(causes_text(result))
    operating = None
    if args.at_score is not None:
        from obbiou.evaluation.operating import as_dict, operating_text

        table = result.at_score(args.at_score)
        operating = {"score": args.at_score, "labels": as_dict(table)}
        print()
        print(operating_text(table, f"at score >= {args.at_score:g}"))
    if rows_path is not None:
        written = write_details(result, rows_path)
        print(f"wrote {written[0]} and {written[1]}", file=sys.stderr)
    if args.json:
        result.to_json(args.json, interval=interval, extra={"at_score": operating})
        print(f"wrote {args.json}", file=sys.stderr)
    if args.plot:
        result.plot(args.plot, iou=args.plot_iou)
        print(f"wrote {args.plot}", file=sys.stderr)
    return 0
