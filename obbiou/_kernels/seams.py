"""The first pass of a tiled image's merge: boxes into the image, their extents, the seam test.

Numba kernels only: no validation. :func:`place` does in one pass over the rows what took
five numpy passes with their temporaries (shift, extent through cosines and sines, the
test against the own tile's core, the test against the own tile): measured on the 200 183
detections of ``python bench/tiles.py`` (one thread, CPU, fastest of 11), 6.0-6.4 ms against
13-14 ms. :func:`held` does the seam rule's lookup of the other tiles for the boxes at a
seam: 1.9-2.7 ms against about 9 ms in numpy.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from obbiou._kernels.codes import Layout

AXIS, ROTATED, POLYGON = int(Layout.AXIS), int(Layout.ROTATED), int(Layout.POLYGON)

#: Bits of ``state``: the box is not inside its own tile's core (at the seam); it lies
#: wholly outside its own tile.
AT_SEAM, OUTSIDE = 1, 2


@njit(cache=True, nogil=True)
def place(layout, boxes, tile, tiles, core, image, env, state, lo, hi):
    """Rows lo..hi-1: ``image[i]`` = ``boxes[i]`` moved by its tile's ``(x_min, y_min)``;
    ``env[i]`` its enclosing axis box; ``state[i]`` the bits :data:`AT_SEAM` and
    :data:`OUTSIDE`. ``boxes`` (N, C) float64: axis (C = 4), rotated (C = 5) or polygons
    flattened to ``x0, y0, x1, y1, ...`` (C = 2K). Rotated extents from the half-extents
    ``(|cos| w + |sin| h) / 2``, ``(|sin| w + |cos| h) / 2`` about the centre."""
    ncol = boxes.shape[1]
    for i in range(lo, hi):
        t = tile[i]
        dx = tiles[t, 0]
        dy = tiles[t, 1]
        for c in range(ncol):
            image[i, c] = boxes[i, c]
        if layout == AXIS:
            image[i, 0] += dx
            image[i, 2] += dx
            image[i, 1] += dy
            image[i, 3] += dy
            x0, y0, x1, y1 = image[i, 0], image[i, 1], image[i, 2], image[i, 3]
        elif layout == ROTATED:
            cx = image[i, 0] + dx
            cy = image[i, 1] + dy
            image[i, 0] = cx
            image[i, 1] = cy
            co = abs(np.cos(image[i, 4]))
            si = abs(np.sin(image[i, 4]))
            ex = 0.5 * (co * image[i, 2] + si * image[i, 3])
            ey = 0.5 * (si * image[i, 2] + co * image[i, 3])
            x0, y0, x1, y1 = cx - ex, cy - ey, cx + ex, cy + ey
        else:
            x0, y0, x1, y1 = np.inf, np.inf, -np.inf, -np.inf
            for c in range(0, ncol, 2):
                x = image[i, c] + dx
                y = image[i, c + 1] + dy
                image[i, c] = x
                image[i, c + 1] = y
                x0, x1 = min(x0, x), max(x1, x)
                y0, y1 = min(y0, y), max(y1, y)
        env[i, 0], env[i, 1], env[i, 2], env[i, 3] = x0, y0, x1, y1
        s = 0
        if not (x0 >= core[t, 0] and y0 >= core[t, 1] and x1 <= core[t, 2] and y1 <= core[t, 3]):
            s |= AT_SEAM
        if x1 < tiles[t, 0] or x0 > tiles[t, 2] or y1 < tiles[t, 1] or y0 > tiles[t, 3]:
            s |= OUTSIDE
        state[i] = s


@njit(cache=True, nogil=True)
def held(env, rows, tile, core, origin, cell, shape, ptr, items, out, lo, hi):
    """For k in lo..hi-1: ``out[k]`` whether the extent ``env[rows[k]]`` lies inside the
    core of a tile other than its own (``tile[rows[k]]``). Candidate tiles: those
    registered in the lookup cell of the extent's lower corner (a core that holds the
    extent holds that corner): cells of side ``cell`` from ``origin``, ``shape`` (x, y)
    of them, clamped at the border; the tiles of cell c are ``items[ptr[c]:ptr[c + 1]]``."""
    for k in range(lo, hi):
        i = rows[k]
        x0, y0, x1, y1 = env[i, 0], env[i, 1], env[i, 2], env[i, 3]
        ix = min(max(np.floor((x0 - origin[0]) / cell), 0.0), shape[0] - 1.0)
        iy = min(max(np.floor((y0 - origin[1]) / cell), 0.0), shape[1] - 1.0)
        c = int(iy) * shape[0] + int(ix)
        found = False
        for q in range(ptr[c], ptr[c + 1]):
            u = items[q]
            if u == tile[i]:
                continue
            if x0 >= core[u, 0] and y0 >= core[u, 1] and x1 <= core[u, 2] and y1 <= core[u, 3]:
                found = True
                break
        out[k] = found
