"""Progress bars (tqdm, on stderr) whose time estimate leaves out compiling.

The first frame of a run may compile kernels for seconds; a plain bar then promises hours
(it once showed 107 s/frame for a job of 2 s/frame). :func:`bar` moves the bar's clock
forward by the time spent compiling during each step (measured by
:mod:`obbiou._kernels.compiling`), so its rate and remaining time count only the work;
while the first step compiles, the stderr notice of that module says so.

Examples
--------
>>> [x for x in bar(range(3), desc="frames", unit="frame", disable=True)]
[0, 1, 2]
"""

from __future__ import annotations

import sys
from collections.abc import Iterable, Iterator
from typing import Any

__all__ = ["bar", "Bar"]


def _compile_seconds() -> float:
    if "obbiou._kernels" not in sys.modules:  # no kernel used yet: nothing compiled
        return 0.0
    from obbiou._kernels import compiling

    return compiling.seconds()


class Bar:
    """A tqdm bar whose clock skips the time spent compiling kernels; ``update(n)``,
    ``close()`` and use as a context manager, as tqdm's."""

    def __init__(self, *, total: int | None, desc: str, unit: str, leave: bool, disable: bool):
        from tqdm.auto import tqdm

        self._bar = tqdm(
            total=total, desc=desc, unit=unit, leave=leave, disable=disable, file=sys.stderr
        )
        self._compiled = _compile_seconds()

    def update(self, n: int = 1) -> None:
        spent = _compile_seconds()
        if spent > self._compiled and not self._bar.disable:
            shift = spent - self._compiled
            self._bar.start_t += shift
            self._bar.last_print_t += shift
        self._compiled = spent
        self._bar.update(n)

    def close(self) -> None:
        self._bar.close()

    def __enter__(self) -> Bar:
        return self

    def __exit__(self, *exc: Any) -> None:
        self.close()


def bar(
    iterable: Iterable[Any],
    *,
    desc: str,
    unit: str,
    total: int | None = None,
    leave: bool = False,
    disable: bool = False,
) -> Iterator[Any]:
    """Iterate over ``iterable`` with a :class:`Bar`."""
    if total is None and hasattr(iterable, "__len__"):
        total = len(iterable)  # type: ignore[arg-type]
    with Bar(total=total, desc=desc, unit=unit, leave=leave, disable=disable) as b:
        for item in iterable:
            yield item
            b.update(1)
