"""Numba kernels only: no validation, no Python objects. Imported lazily by the public layer
so that ``import obbiou`` stays fast and nothing compiles at import time."""
