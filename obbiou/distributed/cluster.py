"""Where the work runs (:func:`connect`) and how tasks are waited for.

A run gets a ``dask.distributed.Client`` from :func:`connect` (a client given, a scheduler
address, N local worker processes, or an in-process cluster) and waits for its tasks with
:func:`wait_for`, which names the partition or tile of a task that failed: bad input as
:class:`~obbiou.errors.InvalidInput`, anything else as :class:`~obbiou.errors.TaskFailed`.
"""

from __future__ import annotations

import os
import warnings
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from typing import Any

import numpy as np

from obbiou.errors import InvalidInput, TaskFailed

__all__ = ["connect", "require_dask", "thread_count", "wait_for", "release", "item"]


_INSTALL_HINT = "pip install 'obbiou[dask]'"

#: How long to try reaching a scheduler address before giving up.
_CONNECT_SECONDS = 20

#: Environment of local worker processes: one worker thread each, so the numba kernels run
#: on one thread too instead of every process starting a thread per core.
_ONE_THREAD = {"NUMBA_NUM_THREADS": "1", "OMP_NUM_THREADS": "1"}


def require_dask() -> Any:
    """Import ``distributed`` (and dask) or say how to install them."""
    try:
        import dask  # noqa: F401
        import dask.dataframe  # noqa: F401
        import distributed
    except ImportError as exc:  # pragma: no cover - depends on the environment
        raise ImportError(
            f"obbiou.distributed needs dask and dask.distributed ({exc}); "
            f"install them with: {_INSTALL_HINT}"
        ) from exc
    return distributed


@contextmanager
def connect(
    *, client: Any = None, scheduler: str | None = None, workers: int | None = None
) -> Iterator[Any]:
    """Give a ``dask.distributed.Client`` for one run, and clean up what was started for it.

    Parameters
    ----------
    client : dask.distributed.Client, optional
        Used as it is; never closed here.
    scheduler : str, optional
        Address of an existing scheduler (``"tcp://10.0.0.5:8786"``); the client made for it
        is closed after the run, the cluster is left running.
    workers : int, optional
        With no ``client`` and no ``scheduler``: start a ``LocalCluster`` of this many worker
        processes (one thread each) on 127.0.0.1, without a dashboard, and close it after.

    With none of these, the current default client is used if there is one; otherwise an
    in-process cluster (one worker, a thread per core) is started and closed after.

    Yields
    ------
    dask.distributed.Client

    Raises
    ------
    obbiou.errors.InvalidInput
        If more than one of ``client``, ``scheduler``, ``workers`` is given, or ``workers``
        is not a positive integer.
    ConnectionError
        If the scheduler cannot be reached within 20 seconds.

    Examples
    --------
    >>> with connect(workers=1, scheduler="tcp://127.0.0.1:8786"):
    ...     pass
    Traceback (most recent call last):
    ...
    obbiou.errors.InvalidInput: give at most one of client=, scheduler=, workers= (got scheduler
    and workers)
    >>> with connect(workers=0):
    ...     pass
    Traceback (most recent call last):
    ...
    obbiou.errors.InvalidInput: workers: expected a positive integer, got 0
    """
    given = [
        n for n, v in (("client", client), ("scheduler", scheduler), ("workers", workers)) if v
    ]
    if workers is not None and (
        isinstance(workers, bool) or not isinstance(workers, (int, np.integer)) or workers < 1
    ):
        raise InvalidInput("workers", f"expected a positive integer, got {workers!r}")
    if len(given) > 1:
        reason = (
            "give at most one of client=, scheduler=, workers= (got " + " and ".join(given) + ")"
        )
        raise InvalidInput(given[-1], reason, message=reason)
    distributed = require_dask()
    if client is not None:
        yield client
        return
    if scheduler:
        try:
            made = distributed.Client(scheduler, timeout=f"{_CONNECT_SECONDS}s")
        except (OSError, TimeoutError) as exc:
            raise ConnectionError(
                f"scheduler: cannot reach {scheduler!r} within {_CONNECT_SECONDS} s ({exc})"
            ) from None
        with made:
            yield made
        return
    if workers:
        with warnings.catch_warnings():  # another local cluster's HTTP port is not news
            warnings.filterwarnings("ignore", message="Port .* is already in use")
            cluster = distributed.LocalCluster(
                n_workers=int(workers),
                threads_per_worker=1,
                processes=True,
                host="127.0.0.1",
                dashboard_address=None,
                env=_ONE_THREAD,
            )
        with cluster, distributed.Client(cluster) as made:
            yield made
        return
    try:
        yield distributed.get_client()
        return
    except ValueError:  # no default client
        pass
    with warnings.catch_warnings():
        warnings.filterwarnings("ignore", message="Port .* is already in use")
        cluster = distributed.LocalCluster(
            n_workers=1,
            threads_per_worker=os.cpu_count() or 1,
            processes=False,
            dashboard_address=None,
        )
    with cluster, distributed.Client(cluster) as made:
        yield made


def thread_count(client: Any) -> int:
    """Total worker threads of the cluster (at least 1)."""
    info = client.scheduler_info(n_workers=-1) if _accepts_n_workers(client) else None
    if info is None:
        info = client.scheduler_info()
    return max(1, sum(int(w.get("nthreads", 1)) for w in info.get("workers", {}).values()))


def _accepts_n_workers(client: Any) -> bool:
    import inspect

    try:
        return "n_workers" in inspect.signature(client.scheduler_info).parameters
    except (TypeError, ValueError):  # pragma: no cover
        return False


def wait_for(
    client: Any,
    futures: Sequence[Any],
    names: Sequence[str],
    *,
    stage: str,
    progress: bool,
    timeout: float | None,
    collect: bool = True,
) -> list[Any] | None:
    """Wait for ``futures`` with a progress bar; raise at the first failure, naming it.

    A task that raises surfaces at once (the others are cancelled) as an ``InvalidInput`` for
    bad input or a :class:`TaskFailed` otherwise, with the partition's name in front. A run
    that takes longer than ``timeout`` seconds raises ``TimeoutError``.
    """
    distributed = require_dask()
    from tqdm.auto import tqdm

    by_key = {f.key: name for f, name in zip(futures, names, strict=True)}
    bar = tqdm(total=len(futures), desc=stage, unit="task", disable=not progress, leave=False)
    try:
        done = distributed.as_completed(list(futures), timeout=timeout, raise_errors=False)
        for fut in done:
            if fut.status == "error":
                exc = fut.exception()
                name = by_key.get(fut.key, stage)
                client.cancel(list(futures))
                if isinstance(exc, InvalidInput):  # bad input; anything else is TaskFailed
                    raise InvalidInput(name, str(exc)) from exc
                raise TaskFailed(f"{name}: task failed: {type(exc).__name__}: {exc}") from exc
            if fut.status == "cancelled":
                client.cancel(list(futures))
                raise TaskFailed(f"{by_key.get(fut.key, stage)}: task was cancelled")
            bar.update(1)
    except TimeoutError:
        client.cancel(list(futures))
        raise TimeoutError(
            f"{stage}: not finished within {timeout} s ({bar.n} of {len(futures)} tasks done)"
        ) from None
    finally:
        bar.close()
    return client.gather(list(futures)) if collect else None


def release(futures: Sequence[Any]) -> None:
    """Drop our references so the cluster frees the data (without cancelling anything a
    caller's persisted collection may share)."""
    for f in futures:
        f.release()


def item(pieces: Sequence[Any], index: int) -> Any:
    return pieces[index]
