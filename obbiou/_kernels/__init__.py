"""Numba kernels: no validation, no Python objects beyond the thin thread drivers.

Imported lazily by the public layer so that ``import obbiou`` stays fast and nothing
compiles at import time. Importing any kernel module installs the compile notice of
:mod:`obbiou._kernels.compiling` (one line on stderr when a first use compiles for long).
"""

from obbiou._kernels import compiling

compiling.install()
