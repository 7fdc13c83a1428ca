"""The one parallel driver: a kernel body over spans of rows, on all cores, from threads.

Every kernel is written once, as a serial body ``body(*args, lo, hi)`` over rows
``lo <= i < hi`` compiled with ``nogil=True``; :func:`run` calls it on a few spans at a
time from a pool of Python threads, and a small input calls it once, directly. There is
no ``parallel=True`` / ``prange`` kernel in obbiou. Measured here (2 cores, numba 0.68,
``python bench/coldstart.py --profile``):

* every ``prange`` driver cost compile time of its own (parfor passes, the gufunc and its
  wrapper; the first one also starts numba's thread pool): 1.35-1.75 s each for the
  all-pairs drivers, measured while the machine was shared; obbiou had some twenty of
  them, each with a hand-written serial twin;
* inside a ``prange`` loop the index is typed ``int64`` while the function is typed and
  ``uint64`` in the gufunc, so every function called with it compiled twice.

Threads cost nothing to compile, and a body called from Python and from a thread is the
same compiled code, loaded from one cache entry. The pool has ``NUMBA_NUM_THREADS``
threads (numba's setting, by default the number of cores) and is made on first use.
"""

from __future__ import annotations

import itertools
import os
import threading
from collections.abc import Callable, Sequence
from concurrent.futures import ThreadPoolExecutor
from typing import Any

_lock = threading.Lock()
_pool: ThreadPoolExecutor | None = None
_pool_pid = -1


def count() -> int:
    """Threads that :func:`run` uses: numba's ``NUMBA_NUM_THREADS`` (default: all cores)."""
    from numba import config

    return max(1, int(config.NUMBA_NUM_THREADS))


def _executor() -> ThreadPoolExecutor:
    global _pool, _pool_pid
    with _lock:
        if _pool is None or _pool_pid != os.getpid():  # a forked child gets a pool of its own
            _pool = ThreadPoolExecutor(max(1, count() - 1), thread_name_prefix="obbiou")
            _pool_pid = os.getpid()
        return _pool


def spans(n: int, pieces: int) -> list[tuple[int, int]]:
    """``pieces`` contiguous spans of nearly equal length covering ``range(n)``."""
    pieces = max(1, min(int(pieces), n))
    step = -(-n // pieces)
    return [(lo, min(n, lo + step)) for lo in range(0, n, step)]


def run(body: Callable[..., Any], args: Sequence[Any], n: int, *, serial: bool, pieces: int = 0):
    """Call ``body(*args, lo, hi)`` for spans covering ``range(n)``.

    ``serial``: one call for the whole range in this thread (small inputs, where waking
    threads costs more than the work). Otherwise about ``pieces`` spans (default: four per
    thread, so a thread that finishes early takes another), claimed by the pool's threads
    and this one as they come free. Spans must write disjoint outputs.
    """
    if n <= 0:
        return
    threads = count()
    if serial or threads == 1 or n == 1:
        body(*args, 0, n)
        return
    todo = spans(n, pieces or 4 * threads)
    claim = itertools.count()  # next() on a count is atomic under the GIL

    def work() -> None:
        while True:
            k = next(claim)
            if k >= len(todo):
                return
            body(*args, *todo[k])

    helpers = [_executor().submit(work) for _ in range(min(threads, len(todo)) - 1)]
    work()
    for h in helpers:
        h.result()  # re-raises a helper's exception here
