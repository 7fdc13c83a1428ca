"""``obbiou compare``: two detectors on the same truth, a paired bootstrap."""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

from obbiou.cli.options import add_common, add_matching, matching_options

SUMMARY = (
    "Compare two detectors on the same ground truth: the difference in mAP with a paired "
    "bootstrap interval over frames and a p-value."
)
EXAMPLE = "  obbiou compare truth.csv old.csv new.csv --iou 0.5:0.95:0.05 --json diff.json"


def configure(p: argparse.ArgumentParser) -> None:
    p.add_argument("truth", metavar="TRUTH", help="ground-truth table")
    p.add_argument("first", metavar="DET_A", help="detections of the first detector (reference)")
    p.add_argument("second", metavar="DET_B", help="detections of the second detector")
    add_matching(p)
    p.add_argument("--resamples", type=int, default=1000, metavar="N", help="bootstrap resamples")
    p.add_argument("--level", type=float, default=0.95, help="confidence level of the interval")
    p.add_argument("--seed", type=int, default=0, help="seed of the bootstrap")
    p.add_argument("--json", metavar="PATH", default=None, help="write the comparison as JSON")
    add_common(p)


def run(args: argparse.Namespace) -> int:
    from obbiou.evaluation import compare

    result = compare(
        args.truth,
        args.first,
        args.second,
        resamples=args.resamples,
        level=args.level,
        seed=args.seed,
        progress=not args.quiet,
        **matching_options(args),
    )
    print(result.summary())
    if args.json:
        Path(args.json).write_text(json.dumps(result.to_dict(), indent=2) + "\n")
        print(f"wrote {args.json}", file=sys.stderr)
    return 0
