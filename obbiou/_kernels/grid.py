"""Spatial index for scene-scale overlap: per-box extents and a multi-level uniform grid.

Numba kernels only: no validation, no Python objects.

Why a grid and not sort-and-sweep on x: a 1-D sweep visits every box of the x-strip that a
query spans, whatever its y, so on a 2-D scene of uniform density its cost grows like
N^1.5 (every row scans about sqrt(N) boxes of its strip). A grid touches only the few
cells a box covers: cost ~ N + candidates. Measured on this machine with
``python bench/scene.py --index`` (candidate search only, self-pairs of rotated boxes
8-40 px long at the density of 50 000 on a 10 000 px mosaic; the sweep on 2 threads, the
grid on one): sweep 0.124 s vs grid 0.011 s at N = 5e4, 21.3 s vs 0.34 s at N = 1e6.

One grid level per size class (cell size s0 * 2**L) keeps it robust when box sizes vary
widely: every box belongs to the level whose cell is at least its own extent and is stored
once, in the cell of its lower-left corner; b's boxes are ordered by (level, cell row, cell
column), so a cell, and a run of cells along a row, is one contiguous range of boxes, and
no items array is needed. A query visits, on each non-empty level, the cells where an
overlapping box can have its corner (x0 - reach .. x1, y0 - reach .. y1; reach: the
level's largest extent). Each pair is met once; self-pairs walk forward in that order only
(see :func:`walk`). Measured against the former layout (each box stored in the up to
2 x 2 cells it covers, a pair reported in the first cell both cover): self-pairs of 50 000
rotated boxes 15 % faster, the order and grid built in half the time (1.5-1.9 ms against
3.4-3.8 ms).

Extents are padded by a few ulps of the coordinates so that the exact clip in the measure
kernels (which works in its own local frame and rounds differently) can never see an
overlap that the index missed; padding only adds candidates, which the exact measure then
rejects.
"""

from __future__ import annotations

from collections import namedtuple

import numpy as np
from numba import njit

from obbiou._kernels import threads
from obbiou._kernels.codes import Kind
from obbiou._kernels.options import ENTRY, HELPER
from obbiou._kernels.pairs import (
    AX_X0,
    AX_X1,
    AX_Y0,
    AX_Y1,
    AX_Z0,
    AX_Z1,
    IOU,
    P_XMAX,
    P_XMIN,
    P_YMAX,
    P_YMIN,
    R_XMAX,
    R_XMIN,
    R_YMAX,
    R_YMIN,
    R_Z0,
    R_Z1,
    RECT_SCRATCH,
    axis_list,
    poly_list_body,
    poly_pair,
    rect_block,
    rect_list_body,
)

# Relative padding of extents (see module docstring): far above rounding of corner
# coordinates (a few 1e-16 relative), far below any meaningful overlap.
_PAD = 1e-12

# Ext rows: x0, y0, x1, y1, z0, z1 (2-D layouts: z0 = -1, z1 = 1 so z never rejects).
X0, Y0, X1, Y1, Z0, Z1 = 0, 1, 2, 3, 4, 5


def _pad(lo, hi):
    """The one padding rule (numpy arrays lo <= hi): (lo - p, hi + p)."""
    p = _PAD * (np.abs(lo) + np.abs(hi)) + 1e-300
    return lo - p, hi + p


def pad_extents(env):
    """:func:`_pad` of every row of ``env`` (N, 4): x_min, y_min, x_max, y_max, for the
    grid and for the code outside the kernels that must agree with it (the Dask tiles)."""
    env = np.asarray(env, dtype=np.float64)
    lo, hi = _pad(env[:, :2], env[:, 2:])
    return np.concatenate([lo, hi], axis=1)


# Prepared-row kinds (see obbiou._kernels.pairs): the measure of a pair is the very kernel
# function the all-pairs matrices use, so values are bit for bit the matrix entries.
AXIS, RECT, POLY = int(Kind.AXIS), int(Kind.RECT), int(Kind.POLY)

# The extent columns of prepared rows, by kind: x0, y0, x1, y1, z0, z1 (-1: no z).
_EXTENT_COLUMNS = {
    AXIS: (AX_X0, AX_Y0, AX_X1, AX_Y1, AX_Z0, AX_Z1),
    RECT: (R_XMIN, R_YMIN, R_XMAX, R_YMAX, R_Z0, R_Z1),
    POLY: (P_XMIN, P_YMIN, P_XMAX, P_YMAX, -1, -1),
}


def side_extents(kind, R, is3d, serial=False):
    """Padded extents (N, 6: x0, y0, x1, y1, z0, z1; without ``is3d``, z0 and z1 are the
    padded -1 and 1, so z never rejects) of prepared rows ``R``, on threads for large
    inputs (``serial``: one thread)."""
    cols = np.array(_EXTENT_COLUMNS[kind], np.int64)
    if not is3d:
        cols[4:6] = -1
    ext = np.empty((R.shape[0], 6))
    threads.run(extent_rows, (R, cols, ext), R.shape[0], serial=serial)
    return ext


@njit(forceinline=True, **HELPER)
def _padded(lo, hi):
    p = _PAD * (abs(lo) + abs(hi)) + 1e-300
    return lo - p, hi + p


@njit(**ENTRY)
def extent_rows(R, cols, ext, lo, hi):
    """Padded extents of prepared rows lo..hi-1 (:func:`side_extents`; the arithmetic of
    :func:`_pad`): one kernel for every kind, which passes its columns ``cols`` (x0, y0, x1,
    y1, z0, z1; z0 < 0: z from -1 to 1). Measured, numpy's column operations on the
    (N, 16) rows took 2.5 ms for 50 000 rows, this 0.2-0.3 ms."""
    cx0, cy0, cx1, cy1, cz0, cz1 = cols[0], cols[1], cols[2], cols[3], cols[4], cols[5]
    for i in range(lo, hi):
        ext[i, X0], ext[i, X1] = _padded(R[i, cx0], R[i, cx1])
        ext[i, Y0], ext[i, Y1] = _padded(R[i, cy0], R[i, cy1])
        if cz0 >= 0:
            ext[i, Z0], ext[i, Z1] = _padded(R[i, cz0], R[i, cz1])
        else:
            ext[i, Z0], ext[i, Z1] = _padded(-1.0, 1.0)


@njit(**HELPER)
def _cell(x, g, inv, n):
    """Cell of coordinate x on an axis from g with cells of size 1 / inv, clamped to n."""
    # np.int64, not int(), here and in the kernels below: numba compiles int() of a float
    # as a function of its own, once per set of the callers' compile options (measured:
    # three copies, 0.05 s of the first suppression)
    c = np.int64(np.floor((x - g) * inv))
    c = c if c > 0 else 0
    return c if c < n - 1 else n - 1


# Columns of a grid level (floats, one array): origin x, y, cell size, cells along x, y (0:
# an empty level), index of the level's first cell, 1 / cell size (cells are found by a
# multiplication: every caller uses this one column, so all agree on every cell), reach:
# the largest extent (x or y) of the level's boxes, a little enlarged.
L_GX, L_GY, L_SIZE, L_NX, L_NY, L_FIRST, L_INV, L_REACH = 0, 1, 2, 3, 4, 5, 6, 7


def build_index(ext, median):
    """The multi-level grid over boxes with padded extents ``ext`` (rows x0, y0, x1, y1,
    ...: :func:`side_extents`, :func:`pad_extents`) and their spatial order.

    ``median``: the boxes' median extent (:func:`median_extent`), of which
    :func:`box_levels` makes the level-0 cell size. Each box belongs to the level whose cell size
    base * 2**L is at least its padded extent, and is stored once, in the cell of its
    lower-left corner; the boxes are ordered by (level, cell row, cell column), so the
    boxes of a cell, and of a run of cells along a row, are one contiguous range of the
    order. Returns ``order`` (the input rows in that order), ``levels`` (L, 8, see
    ``L_*``), ``bounds`` (L, 4, extent of the level's boxes), ``cell_ptr`` (the boxes of
    cell c are positions cell_ptr[c] to cell_ptr[c + 1] - 1 of the order), ``box_cell``
    and ``box_level`` (cell and level of each position).

    Two kernels over the boxes, and the table of the levels, a few rows, in Python
    between them: as numba code the table was a fifth of a second of compiling.
    """
    level, count, stats, top, base = box_levels(ext, median)
    nlev = top + 1
    bounds = np.ascontiguousarray(stats[:nlev, :4])
    levels = np.zeros((nlev, 8))
    ncells = 0
    for lv in range(nlev):
        if count[lv] == 0:
            continue
        s = base * 2.0**lv
        w = bounds[lv, 2] - bounds[lv, 0]
        h = bounds[lv, 3] - bounds[lv, 1]
        # keep at most ~4 cells per box on a level (memory ~ N): coarsen if needed
        cap = 4.0 * count[lv] + 16.0
        nx = np.floor(w / s) + 1.0
        ny = np.floor(h / s) + 1.0
        steps = 0
        while not nx * ny <= cap and steps < 4000:  # "not <=" also catches NaN
            s *= 1.5
            nx = np.floor(w / s) + 1.0
            ny = np.floor(h / s) + 1.0
            steps += 1
        if not nx * ny <= cap:  # extents near the float64 limit: one cell holds all
            s, nx, ny = 1.0, 1.0, 1.0
        levels[lv, L_GX] = bounds[lv, 0]
        levels[lv, L_GY] = bounds[lv, 1]
        levels[lv, L_SIZE] = s
        levels[lv, L_NX] = nx
        levels[lv, L_NY] = ny
        levels[lv, L_FIRST] = ncells
        levels[lv, L_INV] = 1.0 / s
        # enlarged so that x0 - reach, rounded, is never above a box's true reach
        levels[lv, L_REACH] = stats[lv, 4] * (1.0 + 2.0**-20) + 1e-300
        ncells += int(nx * ny)
    order, cell_ptr, box_cell, box_level = cell_order(ext, level, levels, ncells)
    return order, levels, bounds, cell_ptr, box_cell, box_level


# The index kernels make their arrays with np.empty alone, filled by loops, and write
# minima and maxima out: each numpy constructor (np.zeros, .copy) and each min or max
# signature is a function numba compiles for the kernel that uses it; measured, they
# were a third of a second of the first scene call.


@njit(**ENTRY)
def box_levels(ext, median):
    """Each box's level (:func:`build_index`), and each level's count and statistics
    (rows of 201, room for every level a box can get: the level loop stops at 200):
    bounds x0, y0, x1, y1 of the level's boxes and their largest extent; the top level;
    the level-0 cell size ``base``.

    ``base`` is twice the median extent, bounded below so that the size levels stay few
    whatever the spread of sizes. Measured on self-pairs of 5e4 rotated boxes 8-40 px
    long (2 threads, no fresh pages, fastest of 40 calls): 1.5x the median 8.7 ms, 2x
    6.0-6.3 ms, 3x 6.2-7.4 ms. The cell size changes no result, only speed. When the
    largest extent is at most a quarter above that, the cells take its size instead: one
    level, so no walk visits a second level for a few large boxes. Measured on merge's
    pairs in ``python bench/tiles.py`` (168 483 rotated boxes, the largest extent 2.2x the
    median; one thread, CPU, fastest of 15, three rounds): the walk 10.4-10.7 ms with one
    level of 80 px cells, 12.6-12.9 ms with 69.5 px cells and a second level for 553
    boxes."""
    m = ext.shape[0]
    top_extent = 0.0
    for j in range(m):
        d = ext[j, X1] - ext[j, X0]
        top_extent = d if d > top_extent else top_extent
        d = ext[j, Y1] - ext[j, Y0]
        top_extent = d if d > top_extent else top_extent
    base = 2.0 * median
    if base < top_extent <= 1.25 * base:
        base = top_extent * (1.0 + 2.0**-20)
    if base < top_extent * 2.0**-40:
        base = top_extent * 2.0**-40
    if not base >= 1e-300:
        base = 1e-300
    level = np.empty(m, np.int64)
    count = np.empty(201, np.int64)
    stats = np.empty((201, 5))
    for lv in range(201):
        count[lv] = 0
        stats[lv, 0] = np.inf
        stats[lv, 1] = np.inf
        stats[lv, 2] = -np.inf
        stats[lv, 3] = -np.inf
        stats[lv, 4] = 0.0
    top = 0
    for j in range(m):
        x0, y0, x1, y1 = ext[j, X0], ext[j, Y0], ext[j, X1], ext[j, Y1]
        d = x1 - x0 if x1 - x0 > y1 - y0 else y1 - y0
        lv = 0
        s = base
        while s < d and lv < 200:
            s *= 2.0
            lv += 1
        level[j] = lv
        top = lv if lv > top else top
        count[lv] += 1
        if x0 < stats[lv, 0]:
            stats[lv, 0] = x0
        if y0 < stats[lv, 1]:
            stats[lv, 1] = y0
        if x1 > stats[lv, 2]:
            stats[lv, 2] = x1
        if y1 > stats[lv, 3]:
            stats[lv, 3] = y1
        if d > stats[lv, 4]:
            stats[lv, 4] = d
    return level, count, stats, top, base


@njit(**ENTRY)
def cell_order(ext, level, levels, ncells):
    """The boxes by (level, cell row, cell column) (:func:`build_index`): a counting sort
    on the cell of each box's lower-left corner. Returns the order, ``cell_ptr``,
    ``box_cell`` and ``box_level``."""
    m = ext.shape[0]
    cell_ptr = np.empty(ncells + 1, np.int64)
    for c in range(ncells + 1):
        cell_ptr[c] = 0
    key = np.empty(m, np.int64)  # each box's cell
    for j in range(m):
        x0, y0 = ext[j, X0], ext[j, Y0]
        lv = level[j]
        gx, gy, inv = levels[lv, L_GX], levels[lv, L_GY], levels[lv, L_INV]
        nx, ny, c0 = (
            np.int64(levels[lv, L_NX]),
            np.int64(levels[lv, L_NY]),
            np.int64(levels[lv, L_FIRST]),
        )
        key[j] = c0 + _cell(y0, gy, inv, ny) * nx + _cell(x0, gx, inv, nx)
        cell_ptr[key[j] + 1] += 1
    fill = np.empty(ncells, np.int64)
    for c in range(ncells):
        cell_ptr[c + 1] += cell_ptr[c]
        fill[c] = cell_ptr[c]
    order = np.empty(m, np.int64)
    box_cell = np.empty(m, np.int64)
    box_level = np.empty(m, np.int64)
    for j in range(m):
        pos = fill[key[j]]
        fill[key[j]] = pos + 1
        order[pos] = j
        box_cell[pos] = key[j]
        box_level[pos] = level[j]
    return order, cell_ptr, box_cell, box_level


#: One side or both of a scene, in spatial order, as the kernels read it (numba types a
#: namedtuple by its fields: read by name, not by position). Rows, vertices (polygons),
#: padded extents, the spatial order (input row of each position) and labels of a and b;
#: ``same``: b is a (self-pairs); ``thr``: the IoU threshold; ``is3d``.
Scene = namedtuple("Scene", "kind A VA ea oa B VB eb ob same la lb thr is3d")
#: The grid over b (see :func:`build_index`).
Grid = namedtuple("Grid", "levels bounds cell_ptr box_cell box_level")


def median_extent(ext):
    """The median extent (larger side) of an evenly spaced sample of at most 4097 of the
    boxes ``ext`` (padded extents): numpy's median (numba's would add a second of
    compiling to the first scene call); :func:`box_levels` makes the level-0 cell size of
    it."""
    n = ext.shape[0]
    if n == 0:
        return 1.0
    e = ext[:: max(1, n // 4096)]
    return float(np.median(np.maximum(e[:, X1] - e[:, X0], e[:, Y1] - e[:, Y0])))


@njit(**ENTRY)
def order_on(ext, levels):
    """Boxes with padded extents ``ext`` (the other side of a scene), by the cell of their
    lower-left corner on the finest non-empty level of b's grid (counting sort,
    row-major): neighbouring boxes then sit next to each other in memory, so the queries
    read cells, extents and prepared rows that are already in cache. Measured (one
    thread, CPU time, 1e5 rotated boxes in random order, self-pairs): 137 ms for the
    candidate search without a spatial order, 65 ms with it, re-ordering included."""
    lv = 0
    while levels[lv, L_NX] == 0.0:
        lv += 1
    gx, gy, inv = levels[lv, L_GX], levels[lv, L_GY], levels[lv, L_INV]
    nx, ny = np.int64(levels[lv, L_NX]), np.int64(levels[lv, L_NY])
    n = ext.shape[0]
    key = np.empty(n, np.int64)
    ptr = np.empty(nx * ny + 1, np.int64)
    for c in range(nx * ny + 1):
        ptr[c] = 0
    for i in range(n):
        x0, y0 = ext[i, X0], ext[i, Y0]
        key[i] = _cell(y0, gy, inv, ny) * nx + _cell(x0, gx, inv, nx)
        ptr[key[i] + 1] += 1
    for c in range(nx * ny):
        ptr[c + 1] += ptr[c]
    rows = np.empty(n, np.int64)
    for i in range(n):
        rows[ptr[key[i]]] = i
        ptr[key[i]] += 1
    return rows


@njit(**ENTRY)
def _permute(R, order):
    """R[:] = R[order] in place, cycle by cycle with one spare row: the scene's largest
    array is not copied (measured, 50 000 rotated boxes: a copy of the prepared rows was
    6.4 MB of fresh pages per call, some 1 600 page faults)."""
    n = R.shape[0]
    w = R.shape[1]
    done = np.empty(n, np.int64)
    for p in range(n):
        done[p] = 0
    spare = np.empty(w)
    for start in range(n):
        if done[start]:
            continue
        for c in range(w):
            spare[c] = R[start, c]
        p = start
        while True:
            done[p] = 1
            q = order[p]
            if q == start:
                for c in range(w):
                    R[p, c] = spare[c]
                break
            for c in range(w):
                R[p, c] = R[q, c]
            p = q


def arrange(kind, R, V, order, labels):
    """One side of the scene in spatial order: rows (``R`` itself, permuted in place: the
    callers pass private arrays), vertices (a copy: they may be the user's), labels."""
    _permute(R, order)
    Vs = V[order] if kind == POLY else V
    ls = labels[order] if labels.shape[0] > 0 else labels
    return R, Vs, ls


@njit(inline="always")
def scratch(VA, VB):
    # inlined at numba's level: its np.empty compiles with the kernels' options, which
    # the index kernels' arrays already use, not once more for a helper's
    k = 2 * (VA.shape[1] + VB.shape[1]) + 4
    return np.empty((6, k if k > RECT_SCRATCH else RECT_SCRATCH))


@njit(forceinline=True, **HELPER)
def walk(i, scene, grid, items, ends, growing, out):
    """Candidates of a's row i, by a walk over the grid cells where a box overlapping it
    can have its lower-left corner: on each level, x from x0 - reach to x1, y likewise.

    The static grid (``growing`` False) holds every box of b: cell c is positions
    cell_ptr[c] .. ends[c] - 1 of b's spatial order (pass ``cell_ptr[1:]``; ``items`` is
    unused). Hard suppression passes a growing grid of the kept boxes only (``items``
    [cell_ptr[c]:ends[c]] are the kept boxes of cell c), so a walk never visits a box that
    cannot suppress. Counts the candidates and writes the first ``len(out)`` (b's rows,
    spatial order) to ``out``.

    A candidate: strictly overlapping padded extents (x, y, z), the same label when labels
    are given (non-empty arrays), and for self-pairs of the static grid a later position in
    spatial order. No IoU bound here: what the threshold rejects, the callers' measures
    reject as cheaply (rectangles' bounds in hard suppression, the vectorised exact IoU in
    the pairs). Measured, a bound from the extents in this loop cost 0.13 - 0.28 s of a
    first ``overlapping_pairs``'s compiling and 0.07 - 0.09 s of a first suppression's
    (with the box sizes it read), and saved no run
    time (hard suppression of 10 000 clustered detections 2.22 - 2.48 ms without it,
    2.38 - 2.47 ms with it; pairs above 0.5 of 50 000 boxes 14.0 - 14.6 ms, 14.1 - 14.4 ms
    with it; the same pairs). Every box is stored once, so
    each pair is met once; self-pairs walk forward only: no level below the box's own, on
    its own level no cell row below its own, in its own row no cell before its own, in its
    own cell only the positions after it. The walk is one function with the measure kept
    out of it: measured, a measure call inside this loop (or a helper for the tests) made
    the walk two to three times slower. Inlined into its callers: measured 175 against
    210 ns per walk (10 000 clustered detections).
    """
    levels, bounds, cell_ptr, box_cell, box_level = grid
    ea, eb, same, labels_a, labels_b, is3d = (
        scene.ea,
        scene.eb,
        scene.same,
        scene.la,
        scene.lb,
        scene.is3d,
    )
    x0, y0, x1, y1, z0, z1 = ea[i, 0], ea[i, 1], ea[i, 2], ea[i, 3], ea[i, 4], ea[i, 5]
    use_labels = labels_a.shape[0] > 0
    forward = same and not growing
    own_level = box_level[i] if forward else -1
    cap = out.shape[0]
    n = 0
    for lv in range(levels.shape[0]):
        nx = np.int64(levels[lv, L_NX])
        if nx == 0 or lv < own_level:
            continue
        if x1 <= bounds[lv, 0] or x0 >= bounds[lv, 2] or y1 <= bounds[lv, 1] or y0 >= bounds[lv, 3]:
            continue
        gx, gy, inv, reach = (
            levels[lv, L_GX],
            levels[lv, L_GY],
            levels[lv, L_INV],
            levels[lv, L_REACH],
        )
        ny, c0 = np.int64(levels[lv, L_NY]), np.int64(levels[lv, L_FIRST])
        qx0, qx1 = _cell(x0 - reach, gx, inv, nx), _cell(x1, gx, inv, nx)
        qy0, qy1 = _cell(y0 - reach, gy, inv, ny), _cell(y1, gy, inv, ny)
        own = lv == own_level
        own_cell = box_cell[i] if own else -1
        if own:
            qy0 = (own_cell - c0) // nx
        for cy in range(qy0, qy1 + 1):
            first = c0 + cy * nx + qx0
            last = c0 + cy * nx + qx1
            if own and cy == qy0:
                first = own_cell
            # in the static grid a run of cells along a row is one range of positions:
            # one pass from the first cell's start to the last cell's end
            for c in range(first, (last if growing else first) + 1):
                k0 = cell_ptr[c]
                if c == own_cell:
                    k0 = i + 1
                for k in range(k0, ends[c] if growing else ends[last]):
                    j = items[k] if growing else k
                    if eb[j, 0] >= x1 or eb[j, 2] <= x0 or eb[j, 1] >= y1 or eb[j, 3] <= y0:
                        continue
                    if is3d and (eb[j, 4] >= z1 or eb[j, 5] <= z0):
                        continue
                    if use_labels and labels_a[i] != labels_b[j]:
                        continue
                    if n < cap:
                        out[n] = j
                    n += 1
    return n


@njit(forceinline=True, **HELPER)
def insert(i, grid, items, ends):
    """Add b's row i (spatial order) to the growing grid (``items``, ``ends``), in its cell."""
    c = grid.box_cell[i]
    items[ends[c]] = i
    ends[c] += 1


def prepare_scene(kind, A, VA, B, VB, same, labels_a, labels_b, thr, is3d, serial):
    """Spatially ordered scene and grid over b. Returns (scene, grid) tuples that the walks
    read. The extents are indexed, the rows put in spatial order, and the extents computed
    again from them (measured: faster than gathering them, 0.2 against 0.8 ms for 50 000
    boxes). ``serial``: one thread."""
    ext = side_extents(kind, B, is3d, serial)
    ob, levels, bounds, cell_ptr, box_cell, box_level = build_index(ext, median_extent(ext))
    oa = ob if same else order_on(side_extents(kind, A, is3d, serial), levels)
    del ext  # (before the arrays below: a lower peak of memory)
    A, VA, la = arrange(kind, A, VA, oa, labels_a)
    ea = side_extents(kind, A, is3d, serial)
    if same:
        B, VB, eb, lb = A, VA, ea, la
    else:
        B, VB, lb = arrange(kind, B, VB, ob, labels_b)
        eb = side_extents(kind, B, is3d, serial)
    scene = Scene(kind, A, VA, ea, oa, B, VB, eb, ob, same, la, lb, float(thr), is3d)
    return scene, Grid(levels, bounds, cell_ptr, box_cell, box_level)


def index_extents(env):
    """The grid over boxes given by their extents ``env`` (N, 4: x_min, y_min, x_max, y_max,
    C-ordered float64) and their spatial order: (order, grid), ``order[p]`` the row at
    position p. The extents are padded as any are (:func:`pad_extents`); they must be
    those the prepared rows of the boxes hold (merge's first pass computes them with the
    same arithmetic), so that the walks, which read the prepared rows' extents, find
    every pair. A caller that has the extents already finds the order before it prepares
    the boxes, and prepares them in that order: nothing is permuted afterwards."""
    ext = pad_extents(env)
    order, levels, bounds, cell_ptr, box_cell, box_level = build_index(ext, median_extent(ext))
    return order, Grid(levels, bounds, cell_ptr, box_cell, box_level)


def self_scene(kind, R, V, order, labels, thr, is3d, serial):
    """The scene of the self-pairs of prepared rows ``R`` (vertices ``V`` for polygons)
    that are in the spatial order of :func:`index_extents` already (``order``: the input
    row at each position; ``labels``: int64 codes in that order, or an empty array)."""
    e = side_extents(kind, R, is3d, serial)
    return Scene(kind, R, V, e, order, R, V, e, order, True, labels, labels, float(thr), is3d)


# One row in this many (per chunk) is walked ahead to size the chunk's candidate buffer.
SAMPLE_STRIDE = 16

# What a pass of the chunk kernels does with chunk c (``todo[c]``): nothing; sample its
# rows' candidates (:data:`SAMPLE_STRIDE`) into need[c]; its pairs. One kernel does both
# walks: measured, a kernel of its own for the sampling cost half a second of compiling.
SKIP, SAMPLE, PAIRS = 0, 1, 2


# The measure of the candidates, one kernel per kind: a scene compiles only its own kind's
# pair code (shared with obbiou.measures), never the other two. Each is the measure kernels'
# own list body, so values are bit for bit the all-pairs matrix entries (IoU is symmetric
# bit for bit, so self-pairs need no reordering). The bodies, not the list kernels, are
# called (numba inlines them), so that a first scene call does not also compile the list
# kernel, its wrapper and its own optimised copy of the pair code: measured, 0.3 s.


@njit(inline="always")
def _values_axis(scene, ci, cj, n, out):
    axis_list(scene.A, scene.B, ci, cj, np.int64(IOU), scene.is3d, out, np.int64(0), n)


@njit(inline="always")
def _values_rect(scene, ci, cj, n, out):
    A, B, iou, is3d = scene.A, scene.B, np.int64(IOU), scene.is3d
    rect_list_body(A, B, ci, cj, iou, is3d, out, np.int64(0), n, rect_block)


@njit(inline="always")
def _values_poly(scene, ci, cj, n, out):
    VA, A, VB, B, iou = scene.VA, scene.A, scene.VB, scene.B, np.int64(IOU)
    poly_list_body(VA, A, VB, B, ci, cj, iou, out, np.int64(0), n, poly_pair)


@njit(inline="always")
def _chunks(step, scene, grid, ci, cj, cv, lo, hi, need, got, todo, c0, c1, values):
    """For the chunks c0..c1-1, what ``todo`` says. PAIRS: the pairs of a's rows
    c * step ... (spatial order) with IoU above the threshold: candidates from one walk
    each into ci, cj [lo[c], hi[c]), all of them counted into need[c]; when they fit,
    their IoU into cv, and the pairs above the threshold compacted to the front, their
    number into got[c]. SAMPLE: only every SAMPLE_STRIDE-th row's candidates, counted
    into need[c] (they size the chunk's buffer; a chunk that overflows it is walked again
    with exact room). One call of the walk: each call is a copy of it for LLVM to
    optimise. Written once; the ``chunk_pairs_*`` kernels below bind ``values`` to their
    kind's measure (numba inlines this body into each, so each is cached as a plain
    kernel)."""
    n = scene.A.shape[0]
    cell_ptr = grid.cell_ptr
    static, ends = cell_ptr[:0], cell_ptr[1:]  # (the static grid: no items)
    thr = scene.thr
    for c in range(c0, c1):
        if todo[c] == SKIP:
            continue
        sample = todo[c] == SAMPLE
        a, b, v = ci[lo[c] : hi[c]], cj[lo[c] : hi[c]], cv[lo[c] : hi[c]]
        cap = b.shape[0]
        pos = np.int64(0)
        for i in range(c * step, min(n, (c + 1) * step), SAMPLE_STRIDE if sample else 1):
            m = walk(i, scene, grid, static, ends, np.bool_(False), b[min(pos, cap) :])
            for k in range(pos, min(pos + m, cap)):
                a[k] = i
            pos += m
        need[c] = pos
        if sample or pos > cap:
            continue
        values(scene, a, b, pos, v)
        kept = 0
        for k in range(pos):
            if v[k] > thr:
                a[kept], b[kept], v[kept] = a[k], b[k], v[k]
                kept += 1
        got[c] = kept


@njit(**ENTRY)
def chunk_pairs_axis(step, scene, grid, ci, cj, cv, lo, hi, need, got, todo, c0, c1):
    _chunks(step, scene, grid, ci, cj, cv, lo, hi, need, got, todo, c0, c1, _values_axis)


@njit(**ENTRY)
def chunk_pairs_rect(step, scene, grid, ci, cj, cv, lo, hi, need, got, todo, c0, c1):
    _chunks(step, scene, grid, ci, cj, cv, lo, hi, need, got, todo, c0, c1, _values_rect)


@njit(**ENTRY)
def chunk_pairs_poly(step, scene, grid, ci, cj, cv, lo, hi, need, got, todo, c0, c1):
    _chunks(step, scene, grid, ci, cj, cv, lo, hi, need, got, todo, c0, c1, _values_poly)


#: The chunk kernel of each kind, by its code.
CHUNK_PAIRS = (chunk_pairs_axis, chunk_pairs_rect, chunk_pairs_poly)


# chunk_room and regrow are plain numpy: they run once per scene, and as numba kernels their
# array slicing cost two seconds of compiling on first use.


def chunk_room(est):
    """Each chunk's buffer span [lo[c], hi[c]) for the room ``est[c]``, and buffers of the
    total size for ci, cj (int64) and cv (float64)."""
    hi = np.cumsum(est).astype(np.int64)
    lo = hi - est
    end = int(hi[-1]) if hi.shape[0] else 0
    return lo, hi, np.empty(end, np.int64), np.empty(end, np.int64), np.empty(end)


def regrow(lo, hi, need, ci, cj, cv):
    """After a pass in which some chunks overflowed (need[c] > hi[c] - lo[c]): buffers with
    exactly the room they need at the end, the other chunks' pairs copied over. Returns
    (ci, cj, cv, redo): redo[c] for the chunks to walk again."""
    redo = need > hi - lo
    if not redo.any():
        return ci, cj, cv, redo
    end = ci.shape[0]
    extra = need[redo]
    hi[redo] = end + np.cumsum(extra)
    lo[redo] = hi[redo] - extra
    grow = int(extra.sum())
    return (
        np.concatenate([ci, np.empty(grow, np.int64)]),
        np.concatenate([cj, np.empty(grow, np.int64)]),
        np.concatenate([cv, np.empty(grow)]),
        redo,
    )


@njit(**ENTRY)
def gather(oa, ob, same, ci, cj, cv, lo, got):
    """Exact-size outputs (first, second, iou) in input order from the chunks' pairs (a's
    and b's spatial rows, chunk c's at ci[lo[c]:lo[c] + got[c]]; ``oa``, ``ob``: the
    scene's spatial orders), sorted by (first, second): a counting scatter by first (for
    self-pairs the smaller input row of the two), then a short sort within each row.
    Takes the three arrays it reads rather than the scene: a kernel that Python calls
    with the scene unpacks all of it."""
    n = oa.shape[0]
    ptr = np.empty(n + 1, np.int64)
    for r in range(n + 1):
        ptr[r] = 0
    for c in range(got.shape[0]):
        for k in range(lo[c], lo[c] + got[c]):
            r = oa[ci[k]]
            if same and ob[cj[k]] < r:
                r = ob[cj[k]]
            ptr[r + 1] += 1
    for r in range(n):
        ptr[r + 1] += ptr[r]
    total = ptr[n]
    first = np.empty(total, np.int64)
    second = np.empty(total, np.int64)
    iou = np.empty(total)
    fill = np.empty(n, np.int64)
    for r in range(n):
        fill[r] = ptr[r]
    for c in range(got.shape[0]):
        for k in range(lo[c], lo[c] + got[c]):
            p, q = oa[ci[k]], ob[cj[k]]
            if same and q < p:
                p, q = q, p
            d = fill[p]
            first[d] = p
            second[d] = q
            iou[d] = cv[k]
            fill[p] = d + 1
    # Each row's pairs by second: a shell sort (a box overlaps few others: mostly the
    # last, insertion-sort pass), written here rather than as a function of its own (a
    # tenth of a second of compiling) or numba's argsort (a second and a half); a row of
    # thousands still sorts in well under a millisecond.
    for r in range(n):
        r0 = ptr[r]
        m = ptr[r + 1] - r0
        gap = 1
        while gap < m // 3:
            gap = 3 * gap + 1
        while gap > 0:
            for p in range(r0 + gap, r0 + m):
                k, v = second[p], iou[p]
                q = p - gap
                while q >= r0 and second[q] > k:
                    second[q + gap], iou[q + gap] = second[q], iou[q]
                    q -= gap
                second[q + gap], iou[q + gap] = k, v
            gap //= 3
    return first, second, iou


def scene_pairs(kind, A, VA, B, VB, same, labels_a, labels_b, thr, is3d, serial, margin=1.25):
    """Pairs (first, second, iou) with IoU > thr, sorted by (first, second), of prepared
    boxes A (rows; VA vertices for POLY, else unused) and B; ``same``: B is A and only
    first < second. ``labels_*``: int64 codes, or empty arrays for no labels. A's and B's
    rows are permuted in place into spatial order (pass private arrays). ``serial``: one
    thread. ``margin``: room for candidates over the sampled estimate (tests pass 0 to
    force the redo path).

    One walk per row over the grid: each chunk of rows (spatial order) writes its
    candidates into its own buffer, sized by walking a sample of its rows first, then
    measures them (rectangles: the vectorised loop) and keeps those above thr; a chunk
    that overflowed its buffer is redone with exact room. Measured on self-pairs of 50 000
    rotated boxes: the former count-then-fill passes walked the grid twice per row.
    Memory grows with the number of candidates (extents overlapping).
    """
    scene, grid = prepare_scene(kind, A, VA, B, VB, same, labels_a, labels_b, thr, is3d, serial)
    n = A.shape[0]
    chunks = 1 if serial else 8 * threads.count()
    step = -(-n // chunks)
    body = CHUNK_PAIRS[kind]
    need = np.zeros(chunks, np.int64)
    got = np.zeros(chunks, np.int64)
    todo = np.full(chunks, SAMPLE, np.int64)
    none, at = np.zeros(0, np.int64), np.zeros(chunks, np.int64)  # (no room)
    args = (step, scene, grid, none, none, np.zeros(0), at, at, need, got, todo)
    threads.run(body, args, chunks, serial=serial)
    rows = np.minimum(step, np.maximum(n - step * np.arange(chunks), 0))
    est = np.where(rows > 0, (margin * need * SAMPLE_STRIDE).astype(np.int64) + 64, 0)
    lo, hi, ci, cj, cv = chunk_room(est)
    todo[:] = PAIRS
    args = (step, scene, grid, ci, cj, cv, lo, hi, need, got, todo)
    threads.run(body, args, chunks, serial=serial)
    ci, cj, cv, redo = regrow(lo, hi, need, ci, cj, cv)
    if redo.any():
        todo = np.where(redo, PAIRS, SKIP)
        args = (step, scene, grid, ci, cj, cv, lo, hi, need, got, todo)
        threads.run(body, args, chunks, serial=serial)
    return gather(scene.oa, scene.ob, scene.same, ci, cj, cv, lo, got)


def candidate_count(kind, A, VA, B, VB, same, thr, is3d):
    """Number of candidate pairs (the index alone, no measure): for benchmarks."""
    none = np.zeros(0, np.int64)
    scene, grid = prepare_scene(kind, A, VA, B, VB, same, none, none, thr, is3d, True)
    return _count_candidates(scene, grid)


@njit(**ENTRY)
def _count_candidates(scene, grid):
    none = np.zeros(0, np.int64)
    cell_ptr = grid.cell_ptr
    total = 0
    for i in range(scene.A.shape[0]):
        total += walk(i, scene, grid, cell_ptr[:0], cell_ptr[1:], np.bool_(False), none)
    return total
