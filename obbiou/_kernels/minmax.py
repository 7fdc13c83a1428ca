"""The smaller and the larger of two floats, compiled once for every kernel.

numba compiles its builtin ``min`` and ``max`` as functions of their own, once per
signature *and per set of compile options of the caller*: a first rotated ``iou``
compiled them six times (plain helpers, ``forceinline`` helpers and Python-callable
kernels each got their own copies; ``python bench/coldstart.py --profile``, 0.10 s).
These two are compiled once per process. Same arithmetic as the builtins (numba's
``min(a, b)`` is ``b if b < a else a``, and ``min(a, b, c)`` is ``min(min(a, b), c)``),
so every value is bit for bit what the builtins gave; LLVM inlines them into a select,
so loops that used the builtins still vectorise.
"""

from __future__ import annotations

from numba import njit

from obbiou._kernels.options import HELPER


@njit(forceinline=True, **HELPER)
def smaller(a, b):
    """``min(a, b)`` as numba computes it: b when b < a, else a."""
    return b if b < a else a


@njit(forceinline=True, **HELPER)
def larger(a, b):
    """``max(a, b)`` as numba computes it: b when b > a, else a."""
    return b if b > a else a
