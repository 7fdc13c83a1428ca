"""Shared helpers of the benchmarks: timing medians, peak memory, ratio lines."""

from __future__ import annotations

import os
import statistics
import subprocess
import sys
import time
from collections.abc import Callable

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


def median_time(fn: Callable[[], object], repeat: int = 5, warmup: int = 1) -> float:
    """Median wall time of ``fn()`` in seconds over ``repeat`` runs after ``warmup`` runs."""
    for _ in range(warmup):
        fn()
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def peak_rss_mb() -> float:
    """Peak resident memory of this process so far, in MB (1e6 bytes)."""
    try:
        import resource

        peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
        # Linux reports KiB, macOS bytes.
        return peak / 1e6 if sys.platform == "darwin" else peak * 1024 / 1e6
    except ImportError:  # Windows
        import psutil

        return psutil.Process().memory_info().peak_wset / 1e6


def rss_mb() -> float:
    """Current resident memory of this process, in MB."""
    import psutil

    return psutil.Process().memory_info().rss / 1e6


def run_python(code: str) -> str:
    """Run ``code`` in a fresh interpreter with the project on the path; return its stdout."""
    env = dict(os.environ)
    env["PYTHONPATH"] = ROOT + os.pathsep + env.get("PYTHONPATH", "")
    done = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, env=env, check=True
    )
    return done.stdout


def rate(count: float, seconds: float) -> str:
    """A count per second in human units (k, M)."""
    r = count / seconds
    return f"{r / 1e6:.1f} M/s" if r >= 1e6 else f"{r / 1e3:.1f} k/s"


def report(
    title: str, ours: float, theirs: float, goal: float | None = None, note: str = ""
) -> None:
    """Print one comparison line: both times, the ratio and whether the goal is met."""
    ratio = theirs / ours
    verdict = ""
    if goal is not None:
        verdict = f"  goal >= {goal:g}x: {'met' if ratio >= goal else 'NOT met'}"
    print(f"{title}")
    print(
        f"    obbiou {ours * 1e3:10.2f} ms   shapely {theirs * 1e3:10.1f} ms   "
        f"ratio {ratio:7.0f}x{verdict}"
    )
    if note:
        print(f"    ({note})")
