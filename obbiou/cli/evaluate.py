"""``obbiou evaluate``: detections against ground truth, in process or on a Dask cluster."""

from __future__ import annotations

import argparse
import sys

from obbiou.cli.options import (
    add_common,
    add_matching,
    bad_option,
    bucket_edges,
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
    "  obbiou evaluate truth/ dets/ --workers 2      # folders of Parquet files, on Dask\n"
    "  obbiou evaluate truth.csv dets.csv --distance 0.5,1,2,4 --points points.parquet \\\n"
    "      --min-points 5                             # lidar: centre distance, few returns"
)


def configure(p: argparse.ArgumentParser) -> None:
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
    add_common(p)


def run(args: argparse.Namespace) -> int:
    from obbiou.evaluation import evaluate
    from obbiou.evaluation.text import buckets_text, details_text, interval_text

    opts = matching_options(args)
    sizes = bucket_edges(args.size_buckets, "--size-buckets")
    ranges = bucket_edges(args.range_buckets, "--range-buckets")
    if sizes is not None:
        opts["size_buckets"] = sizes
    if ranges is not None:
        opts["range_buckets"] = ranges
    if args.workers is not None or args.scheduler is not None:
        from obbiou.distributed import evaluate_distributed

        if args.points is not None:
            raise bad_option("--points", "--points is not taken with --workers/--scheduler yet")
        # warm=True: the workers compile (or load from the cache) first, with its own bar
        cluster = {"workers": args.workers, "scheduler": args.scheduler, "warm": True}
        result = evaluate_distributed(
            args.truth, args.detections, progress=not args.quiet, **cluster, **opts
        )
    else:
        result = evaluate(args.truth, args.detections, progress=not args.quiet, **opts)
    print(result.summary())
    if args.interval:
        print()
        print(interval_text(result, resamples=args.resamples, level=args.level, seed=args.seed))
    if args.details:
        print()
        print(details_text(result))
    if result.buckets:
        print()
        print(buckets_text(result))
    if args.json:
        result.to_json(args.json)
        print(f"wrote {args.json}", file=sys.stderr)
    if args.plot:
        result.plot(args.plot)
        print(f"wrote {args.plot}", file=sys.stderr)
    return 0
