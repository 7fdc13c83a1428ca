"""Compile every kernel ahead of time, in parallel processes, so later runs start at speed.

numba compiles a kernel on its first use and caches it on disk (``NUMBA_CACHE_DIR``, by
default ``__pycache__`` beside obbiou's sources); every later process loads it in
milliseconds. :func:`run` compiles all of them now: the kernels fall into groups
(:data:`GROUPS`), each compiled in a process of its own, ``jobs`` at a time, longest first.
A group that mostly calls another group's kernels waits for it (:data:`AFTER`) and loads
them from the cache instead of compiling them twice. The scene group does not wait for the
overlap group, whose list kernels it shares: measured on 2 cores, it took 12.7 s after that
group and 13.0-13.4 s beside it, and the whole warmup 17.0-17.6 s.

For a Dask cluster, point every worker at one shared cache directory (``NUMBA_CACHE_DIR``
on a shared file system, or the same image for every worker) and warm it once, or let
:func:`obbiou.distributed.warm_workers` compile on each worker up front.

Examples
--------
>>> [name for name, _ in GROUPS]
['scene', 'overlap', 'points', 'box tools', 'evaluation', 'fusion', 'tiles']
"""

from __future__ import annotations

import importlib
import multiprocessing
import os
import time
from collections.abc import Callable
from concurrent.futures import FIRST_COMPLETED, ProcessPoolExecutor, wait

__all__ = ["GROUPS", "AFTER", "run", "compile_group"]

#: The kernel groups, longest first: a name and the function that compiles the group by
#: using it.
GROUPS: list[tuple[str, str]] = [
    ("scene", "obbiou.scene:warmup"),
    ("overlap", "obbiou.measures:warmup"),
    ("points", "obbiou.points:warmup"),
    ("box tools", "obbiou.boxes:warmup"),
    ("evaluation", "obbiou.evaluation.protocol:warmup"),
    ("fusion", "obbiou.fusion:warmup"),
    ("tiles", "obbiou.tiles:warmup"),
]

#: Groups that start only when these have finished (they call their kernels).
AFTER: dict[str, tuple[str, ...]] = {
    "evaluation": ("overlap",),
    "fusion": ("scene",),
    "tiles": ("scene",),
}

#: What each group compiles, for progress lines.
DESCRIPTIONS = {
    "overlap": "overlap measures: iou, giou, diou, intersection, coverage",
    "box tools": "box tools: fit_rotated",
    "points": "lidar points: count_in_boxes, points_in_boxes",
    "fusion": "box fusion: fuse",
    "tiles": "large images: merge",
    "scene": "scene: overlapping_pairs, suppress (hard, linear, gaussian)",
    "evaluation": "evaluation: matching, AP, bootstrap",
}


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

    order = [name for name, _ in GROUPS]
    if jobs == 1:
        for name in order:  # GROUPS lists every group after the groups it waits for
            finished(name, compile_group(name))
        return done
    # "spawn": a fresh interpreter per worker, never a fork of a process that runs threads
    context = multiprocessing.get_context("spawn")
    running: dict = {}
    with ProcessPoolExecutor(max_workers=int(jobs), mp_context=context) as pool:
        while order or running:
            for name in list(order):
                if len(running) < jobs and all(g in done for g in AFTER.get(name, ())):
                    running[pool.submit(compile_group, name)] = name
                    order.remove(name)
            first, _ = wait(running, return_when=FIRST_COMPLETED)
            for future in first:
                finished(running.pop(future), future.result())
    return done
