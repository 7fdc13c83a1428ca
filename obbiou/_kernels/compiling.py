"""Say so, once, when a call stops to compile kernels: no silent pause on first use.

numba compiles a kernel on its first call in a process unless the on-disk cache holds it
(``NUMBA_CACHE_DIR``, by default ``__pycache__`` beside the sources). A listener on numba's
compile events starts a timer when a compile begins; if compiling is still going after
:data:`DELAY` seconds, one line goes to stderr. Loading from the cache sends no compile
event, so warm runs say nothing.
"""

from __future__ import annotations

import os
import sys
import threading
import time

#: Seconds of compiling before the notice is printed.
DELAY = 1.5

MESSAGE = (
    "obbiou: compiling kernels for their first use (once: later runs load them from the "
    "on-disk cache{where}; `obbiou warmup` compiles them all ahead)"
)

_state = {
    "installed": False,
    "said": False,
    "depth": 0,
    "timer": None,
    "quiet": False,
    "since": 0.0,
    "total": 0.0,
}
_lock = threading.Lock()


def _say() -> None:
    with _lock:
        if _state["said"] or _state["depth"] == 0 or _state["quiet"]:
            return
        _state["said"] = True
    where = os.environ.get("NUMBA_CACHE_DIR")
    print(MESSAGE.format(where=f" in {where}" if where else ""), file=sys.stderr, flush=True)


def quiet(on: bool = True) -> None:
    """Turn the notice off (``obbiou warmup`` reports its own progress)."""
    _state["quiet"] = on


def seconds() -> float:
    """Seconds this process has spent compiling kernels so far (progress bars leave them
    out of their estimates)."""
    with _lock:
        extra = time.perf_counter() - _state["since"] if _state["depth"] else 0.0
        return _state["total"] + extra


def install() -> None:
    """Register the listener (once per process)."""
    if _state["installed"]:
        return
    from numba.core import event

    class _Notice(event.Listener):
        def on_start(self, ev: event.Event) -> None:
            with _lock:
                _state["depth"] += 1
                if _state["depth"] == 1:
                    _state["since"] = time.perf_counter()
                if _state["depth"] == 1 and not _state["said"]:
                    timer = threading.Timer(DELAY, _say)
                    timer.daemon = True
                    _state["timer"] = timer
                    timer.start()

        def on_end(self, ev: event.Event) -> None:
            with _lock:
                _state["depth"] -= 1
                if _state["depth"] == 0:
                    _state["total"] += time.perf_counter() - _state["since"]
                if _state["depth"] == 0 and _state["timer"] is not None:
                    _state["timer"].cancel()
                    _state["timer"] = None

    event.register("numba:compile", _Notice())
    _state["installed"] = True
