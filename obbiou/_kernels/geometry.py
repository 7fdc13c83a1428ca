"""Per-box precomputation for the pair kernels (numba only): frames, sizes, extents.

One place computes every box's cos/sin, size and extent, so that all-pairs matrices, pair
lists and elementwise values see bit-identical per-box data.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

from obbiou._kernels.codes import Layout
from obbiou._kernels.options import ENTRY, HELPER

# Source layout codes (plain ints: numba folds them).
AXIS = int(Layout.AXIS)
ROTATED = int(Layout.ROTATED)
AXIS3 = int(Layout.AXIS3)
UPRIGHT = int(Layout.UPRIGHT)


@njit(**ENTRY)
def axis_rows(data, layout):
    """Rows ``x0, y0, x1, y1, z0, z1, size`` of axis / axis3 boxes."""
    n = data.shape[0]
    rows = np.zeros((n, 7))
    for i in range(n):
        if layout == AXIS:
            x0, y0, x1, y1 = data[i, 0], data[i, 1], data[i, 2], data[i, 3]
            z0, z1 = 0.0, 0.0
            size = (x1 - x0) * (y1 - y0)
        else:
            x0, y0, z0 = data[i, 0], data[i, 1], data[i, 2]
            x1, y1, z1 = data[i, 3], data[i, 4], data[i, 5]
            size = (x1 - x0) * (y1 - y0) * (z1 - z0)
        rows[i, 0] = x0
        rows[i, 1] = y0
        rows[i, 2] = x1
        rows[i, 3] = y1
        rows[i, 4] = z0
        rows[i, 5] = z1
        rows[i, 6] = size
    return rows


@njit(forceinline=True, **HELPER)
def rect_tuple(data, i, layout):
    """``cx, cy, hw, hh, cos, sin, area, xmin, ymin, xmax, ymax, z0, z1, size, 1/hw, 1/hh``
    of box ``data[i]`` (rotated, axis, or the footprint of an upright / axis3 box) as a
    tuple. cos and sin are computed here, the one place for every path (scalar libm calls:
    all-pairs, pair lists and elementwise values see the same bits). 2D boxes get the z
    interval 0..1, so that the pair code multiplies by a z overlap of exactly 1 and needs
    no 2D / 3D flag."""
    z0 = 0.0
    z1 = 1.0
    if layout == ROTATED or layout == UPRIGHT:
        cx = data[i, 0]
        cy = data[i, 1]
        if layout == ROTATED:
            w = data[i, 2]
            h = data[i, 3]
            angle = data[i, 4]
        else:
            w = data[i, 3]
            h = data[i, 4]
            angle = data[i, 6]
            z0 = data[i, 2] - 0.5 * data[i, 5]
            z1 = data[i, 2] + 0.5 * data[i, 5]
        c = math.cos(angle)
        s = math.sin(angle)
        hw = 0.5 * w
        hh = 0.5 * h
        ex = abs(c) * hw + abs(s) * hh
        ey = abs(s) * hw + abs(c) * hh
        xmin = cx - ex
        ymin = cy - ey
        xmax = cx + ex
        ymax = cy + ey
    else:
        xmin = data[i, 0]
        ymin = data[i, 1]
        if layout == AXIS:
            xmax = data[i, 2]
            ymax = data[i, 3]
        else:
            xmax = data[i, 3]
            ymax = data[i, 4]
            z0 = data[i, 2]
            z1 = data[i, 5]
        cx = 0.5 * (xmin + xmax)
        cy = 0.5 * (ymin + ymax)
        w = xmax - xmin
        h = ymax - ymin
        hw = 0.5 * w
        hh = 0.5 * h
        c = 1.0
        s = 0.0
    area = w * h
    size = area * (z1 - z0) if layout == UPRIGHT or layout == AXIS3 else area
    ihw = 1.0 / hw if hw > 0.0 else np.inf
    ihh = 1.0 / hh if hh > 0.0 else np.inf
    return (cx, cy, hw, hh, c, s, area, xmin, ymin, xmax, ymax, z0, z1, size, ihw, ihh)


@njit(**ENTRY)
def rect_rows(data, layout, rows, lo, hi):
    """Rows of :func:`rect_tuple` for boxes lo..hi-1 into ``rows`` (N, 16)."""
    for i in range(lo, hi):
        t = rect_tuple(data, i, layout)
        for c in range(16):
            rows[i, c] = t[c]
