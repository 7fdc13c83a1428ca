"""Compile obbiou's kernels on every Dask worker up front, with progress.

A fresh worker compiles each kernel on its first task (seconds per kernel group), which
then looks like a slow task. :func:`warm_workers` compiles the kernel groups of
:mod:`obbiou.warmup` on every worker before the work, phase by phase, with a progress bar.
With a cache directory that all workers share (``NUMBA_CACHE_DIR`` set to one path on a
shared file system before the workers start), the first worker to compile a group writes
it and the others load it: set that up once and warming costs seconds.
"""

from __future__ import annotations

from typing import Any

from obbiou.distributed.cluster import connect, wait_for
from obbiou.warmup import AFTER, GROUPS, compile_group

__all__ = ["warm_workers"]


def warm_workers(
    client: Any = None,
    *,
    scheduler: str | None = None,
    workers: int | None = None,
    progress: bool = False,
    timeout: float | None = None,
) -> dict[str, dict[str, float]]:
    """Compile every kernel group on every worker of the cluster.

    Parameters
    ----------
    client, scheduler, workers
        Where to run; see :func:`obbiou.distributed.connect`.
    progress : bool
        Show a progress bar per phase (tqdm, on stderr).
    timeout : float, optional
        Give up (``TimeoutError``) when a phase takes longer than this many seconds.

    Returns
    -------
    dict
        Per worker address, the seconds each group took there (near 0 when it was cached).

    Examples
    --------
    >>> times = warm_workers()  # an in-process cluster for the call
    >>> sorted(next(iter(times.values())))
    ['box tools', 'evaluation', 'fusion', 'overlap', 'points', 'scene', 'tiles']
    """
    out: dict[str, dict[str, float]] = {}
    with connect(client=client, scheduler=scheduler, workers=workers) as cl:
        addresses = sorted(cl.scheduler_info()["workers"])
        names = [name for name, _ in GROUPS]
        first = [n for n in names if n not in AFTER]  # then the groups that wait for them
        phases = [first, [n for n in names if n in AFTER]]
        for number, phase in enumerate(phases, 1):
            tasks = [(a, g) for a in addresses for g in phase]
            futures = [
                cl.submit(compile_group, g, workers=[a], allow_other_workers=False, pure=False)
                for a, g in tasks
            ]
            seconds = wait_for(
                cl,
                futures,
                [f"compiling {g} on {a}" for a, g in tasks],
                stage=f"compiling kernels, phase {number} of {len(phases)}",
                progress=progress,
                timeout=timeout,
            )
            for (a, g), s in zip(tasks, seconds, strict=True):
                out.setdefault(a, {})[g] = s
    return out
