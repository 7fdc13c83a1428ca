"""Compile options of obbiou's numba functions: one definition for every kernel module.

numba builds two wrappers around every function it compiles: one that Python calls
(unboxing the arguments, boxing the result) and one that C calls. obbiou calls its kernel
bodies from Python and nothing from C, and most of its numba functions only from other
numba code. Building the unused wrappers was about a quarter of the compiling of a first
rotated ``iou`` (``bench/coldstart.py``; CPU seconds of the kernels of the all-pairs
matrix, fresh processes, empty cache, three runs each: 1.32-1.41 s with the wrappers,
0.97-1.09 s without).

* :data:`HELPER`: a function that only numba code calls (no wrapper at all);
* :data:`ENTRY`: a function that Python calls, such as a kernel body (Python's wrapper
  only). Every one releases the GIL (bodies run on Python threads, see
  :mod:`obbiou._kernels.threads`), and all share one set of options: numba compiles the
  functions behind ``np.empty``, ``min`` and the like once per set of options of their
  callers (measured: ``np.empty`` of a shape compiled twice in a first
  ``overlapping_pairs``, once for kernels with ``nogil`` and once for those without).
"""

from __future__ import annotations

HELPER = {
    "error_model": "numpy",
    "cache": True,
    "no_cpython_wrapper": True,
    "no_cfunc_wrapper": True,
}

ENTRY = {"error_model": "numpy", "cache": True, "no_cfunc_wrapper": True, "nogil": True}
