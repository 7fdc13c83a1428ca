"""``obbiou demo``: the whole job on two invented, seeded scenarios."""

from __future__ import annotations

import argparse

from obbiou.cli.options import add_common, bad_option

SUMMARY = (
    "Run the whole job on two invented, seeded scenarios (harbour survey and warehouse "
    "lidar): suppress, evaluate with intervals, compare two simulated detectors, and write "
    "a report, JSON and pictures."
)
EXAMPLE = (
    "  obbiou demo --out demo-output --seed 7\n"
    "  (the data is invented; detection metrics do not establish that a system is safe)"
)


def configure(p: argparse.ArgumentParser) -> None:
    p.add_argument("--out", default="obbiou-demo", metavar="DIR", help="folder for the outputs")
    p.add_argument("--seed", type=int, default=0, help="seed of the invented data")
    p.add_argument(
        "--frames",
        type=int,
        default=None,
        metavar="N",
        help="frames per scenario (default: 12 harbour tiles, 40 warehouse sweeps)",
    )
    add_common(p, shape=False)


def run(args: argparse.Namespace) -> int:
    if args.frames is not None and args.frames < 1:
        raise bad_option("--frames", f"--frames: expected a whole number >= 1, got {args.frames}")
    from obbiou.demo.run import run_demo

    run_demo(args.out, seed=args.seed, frames=args.frames, progress=not args.quiet)
    return 0
