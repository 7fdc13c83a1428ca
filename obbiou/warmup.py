"""Compile every kernel ahead of time, in parallel processes, so later runs start at speed.

numba compiles a kernel on its first use and caches it on disk (``NUMBA_CACHE_DIR``, by
default ``__pycache__`` beside obbiou's sources); every later process loads it in
milliseconds. :func:`run` compiles all of them now: the kernels fall into independent
groups (:data:`GROUPS`), each compiled in a process of its own, ``jobs`` at a time. Groups
that call kernels of another group come in a later phase, so that they load those from the
cache instead of compiling them twice.

For a Dask cluster, point every worker at one shared cache directory (``NUMBA_CACHE_DIR``
on a shared file system, or the same image for every worker) and warm it once, or let
:func:`obbiou.distributed.warm_workers` compile on each worker up front.

Examples
--------
>>> [name for name, _ in GROUPS]
['overlap', 'box tools', 'points', 'scene', 'fusion', 'evaluation']
"""

from __future__ import annotations

import importlib
import multiprocessing
import os
import time
from collections.abc import Callable
from concurrent.futures import ProcessPoolExecutor

__all__ = ["GROUPS", "PHASES", "run", "compile_group"]

#: The kernel groups: a name and the function that compiles the group by using it.
GROUPS: list[tuple[str, str]] = [
    ("overlap", "obbiou.measures:warmup"),
    ("box tools", "obbiou.boxes:warmup"),
    ("points", "obbiou.points:warmup"),
    ("scene", "obbiou.scene:warmup"),
    ("fusion", "obbiou.fusion:warmup"),
    ("evaluation", "obbiou.evaluation.protocol:warmup"),
]

#: What each group compiles, for progress lines.
DESCRIPTIONS = {
    "overlap": "overlap measures: iou, giou, diou, intersection, coverage",
    "box tools": "box tools: fit_rotated",
    "points": "lidar points: count_in_boxes, points_in_boxes",
    "fusion": "box fusion: fuse",
    "scene": "scene: overlapping_pairs, suppress (hard, linear, gaussian)",
    "evaluation": "evaluation: matching, AP, bootstrap",
}

#: Groups in the order they may start: the second phase calls the first one's kernels.
PHASES: list[list[str]] = [["overlap", "box tools", "points"], ["scene", "evaluation", "fusion"]]


def compile_group(name: str) -> float:
    """Compile one group in this process; the seconds it took.

    Examples
    --------
    >>> compile_group("box tools") >= 0.0
    True
    """
    target = dict(GROUPS)[name]
    module, function = target.split(":")
    from obbiou._kernels import compiling

    compiling.quiet()  # progress is reported by the caller
    t0 = time.perf_counter()
    getattr(importlib.import_module(module), function)()
    return time.perf_counter() - t0


def run(
    jobs: int | None = None, report: Callable[[str, float], None] | None = None
) -> dict[str, float]:
    """Compile every kernel group; returns the seconds each took.

    Parameters
    ----------
    jobs : int, optional
        Processes that compile at once (default: one per core). ``1`` compiles in this
        process, one group after the other.
    report : callable, optional
        Called as ``report(group, seconds)`` as each group finishes (progress).

    Returns
    -------
    dict
        Group name to seconds, in the order the groups finished.
    """
    if jobs is None:
        jobs = os.cpu_count() or 1
    if isinstance(jobs, bool) or int(jobs) != jobs or jobs < 1:
        from obbiou.errors import InvalidInput

        raise InvalidInput("jobs", f"expected a positive integer, got {jobs!r}")
    done: dict[str, float] = {}

    def finished(name: str, seconds: float) -> None:
        done[name] = seconds
        if report is not None:
            report(name, seconds)

    if jobs == 1:
        for phase in PHASES:
            for name in phase:
                finished(name, compile_group(name))
        return done
    # "spawn": a fresh interpreter per worker, never a fork of a process that runs threads
    context = multiprocessing.get_context("spawn")
    with ProcessPoolExecutor(max_workers=int(jobs), mp_context=context) as pool:
        for phase in PHASES:
            futures = {name: pool.submit(compile_group, name) for name in phase}
            for name, future in futures.items():
                finished(name, future.result())
    return done
