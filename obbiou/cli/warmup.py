"""``obbiou warmup``: compile every kernel now (cached on disk), so later runs start fast."""

from __future__ import annotations

import argparse
import os
import time

SUMMARY = (
    "Compile all of obbiou's kernels now, in parallel processes (they are cached on disk), "
    "so that later runs start at full speed."
)
EXAMPLE = "  obbiou warmup\n  obbiou warmup --jobs 1    # in this process, one group after another"


def configure(p: argparse.ArgumentParser) -> None:
    p.add_argument(
        "--jobs",
        type=int,
        default=None,
        metavar="N",
        help="processes compiling at once (default: one per core)",
    )
    p.set_defaults(quiet=True)


def run(args: argparse.Namespace) -> int:
    from obbiou.warmup import DESCRIPTIONS, GROUPS, run

    jobs = args.jobs or os.cpu_count() or 1
    where = os.environ.get("NUMBA_CACHE_DIR") or "__pycache__ beside obbiou's sources"
    print(f"compiling {len(GROUPS)} kernel groups, {jobs} at a time (cache: {where}):", flush=True)
    start = time.perf_counter()

    def report(name: str, seconds: float) -> None:
        print(f"  {DESCRIPTIONS[name]:<62s} {seconds:6.1f} s", flush=True)

    run(jobs=jobs, report=report)
    print(f"done in {time.perf_counter() - start:.1f} s", flush=True)
    return 0
