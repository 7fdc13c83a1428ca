"""Spatial index for scene-scale overlap: per-box extents and a multi-level uniform grid.

Numba kernels only: no validation, no Python objects.

Why a grid and not sort-and-sweep on x: a 1-D sweep visits every box of the x-strip that a
query spans, whatever its y, so on a 2-D scene of uniform density its cost grows like
N^1.5 (every row scans about sqrt(N) boxes of its strip). A grid touches only the few
cells a box covers: cost ~ N + candidates. Measured on this machine with
``python bench/scene.py --index`` (candidate search only, self-pairs of rotated boxes
8-40 px long at the density of 50 000 on a 10 000 px mosaic, 2 threads, busy machine):
sweep 0.23 s vs grid 0.047 s at N = 5e4, 52.8 s vs 1.19 s at N = 1e6.

One grid level per size class (cell size s0 * 2**L) keeps it robust when box sizes vary
widely: every box is stored at the level whose cell is at least its own extent, so it
occupies at most 2 x 2 cells there, and a query visits each non-empty level. Each pair is
reported exactly once, in the first cell (lowest column and row) that both boxes cover, an
integer test, so no de-duplication pass is needed.

Extents are padded by a few ulps of the coordinates so that the exact clip in the measure
kernels (which works in its own local frame and rounds differently) can never see an
overlap that the index missed; padding only adds candidates, which the exact measure then
rejects.
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange

from obbiou._kernels.pairs import (
    AX_SIZE,
    AX_X0,
    AX_X1,
    AX_Y0,
    AX_Y1,
    AX_Z0,
    AX_Z1,
    IOU,
    P_AREA,
    P_XMAX,
    P_XMIN,
    P_YMAX,
    P_YMIN,
    R_SIZE,
    R_XMAX,
    R_XMIN,
    R_YMAX,
    R_YMIN,
    R_Z0,
    R_Z1,
    RECT_SCRATCH,
    axis_pair,
    poly_pair,
    rect_value,
)

# Relative padding of extents (see module docstring): far above rounding of corner
# coordinates (a few 1e-16 relative), far below any meaningful overlap.
_PAD = 1e-12

# Ext rows: x0, y0, x1, y1, z0, z1 (2-D layouts: z0 = -1, z1 = 1 so z never rejects).
X0, Y0, X1, Y1, Z0, Z1 = 0, 1, 2, 3, 4, 5


@njit(cache=True)
def _pad(lo, hi):
    p = _PAD * (abs(lo) + abs(hi)) + 1e-300
    return lo - p, hi + p


@njit(cache=True)
def _cell(x, g, s, n):
    c = int(np.floor((x - g) / s))
    return min(max(c, 0), n - 1)


@njit(cache=True)
def build_grid(ext, base):
    """Multi-level grid over the boxes with extents ``ext`` (M, 6).

    ``base`` is the level-0 cell size (> 0). Returns ``levels`` (L, 6): origin x, origin y,
    cell size, cells along x, cells along y (0 for an empty level), index of the level's
    first cell; ``bounds`` (L, 4): extent of the level's boxes; ``cell_ptr``, ``items``: the
    boxes of each cell in CSR form (ascending within a cell); ``box_lo`` (M, 2): the first
    cell (x, y) of each box on its level. The queries read the extents from ``ext`` itself
    (in spatial order, so a cell's boxes sit close together): measured, dropping a per-item
    copy of the extents saved 10-20 % on 10 000 clustered detections (fewer fresh pages).
    """
    m = ext.shape[0]
    level = np.zeros(m, np.int64)
    top = 0
    for j in range(m):
        d = max(ext[j, X1] - ext[j, X0], ext[j, Y1] - ext[j, Y0])
        lv = 0
        s = base
        while s < d and lv < 200:
            s *= 2.0
            lv += 1
        level[j] = lv
        top = max(top, lv)
    nlev = top + 1
    count = np.zeros(nlev, np.int64)
    bounds = np.empty((nlev, 4))
    for lv in range(nlev):
        bounds[lv, 0] = np.inf
        bounds[lv, 1] = np.inf
        bounds[lv, 2] = -np.inf
        bounds[lv, 3] = -np.inf
    for j in range(m):
        lv = level[j]
        count[lv] += 1
        bounds[lv, 0] = min(bounds[lv, 0], ext[j, X0])
        bounds[lv, 1] = min(bounds[lv, 1], ext[j, Y0])
        bounds[lv, 2] = max(bounds[lv, 2], ext[j, X1])
        bounds[lv, 3] = max(bounds[lv, 3], ext[j, Y1])
    # levels: gx, gy, s, nx, ny, first cell (floats for one array)
    levels = np.zeros((nlev, 6))
    ncells = 0
    for lv in range(nlev):
        if count[lv] == 0:
            levels[lv, 3] = 0.0
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
        levels[lv, 0] = bounds[lv, 0]
        levels[lv, 1] = bounds[lv, 1]
        levels[lv, 2] = s
        levels[lv, 3] = nx
        levels[lv, 4] = ny
        levels[lv, 5] = ncells
        ncells += int(nx * ny)
    cell_ptr = np.zeros(ncells + 1, np.int64)
    for j in range(m):
        lv = level[j]
        gx, gy, s = levels[lv, 0], levels[lv, 1], levels[lv, 2]
        nx, ny, c0 = int(levels[lv, 3]), int(levels[lv, 4]), int(levels[lv, 5])
        cx0, cx1 = _cell(ext[j, X0], gx, s, nx), _cell(ext[j, X1], gx, s, nx)
        cy0, cy1 = _cell(ext[j, Y0], gy, s, ny), _cell(ext[j, Y1], gy, s, ny)
        for cy in range(cy0, cy1 + 1):
            for cx in range(cx0, cx1 + 1):
                cell_ptr[c0 + cy * nx + cx + 1] += 1
    for c in range(ncells):
        cell_ptr[c + 1] += cell_ptr[c]
    fill = cell_ptr[:-1].copy()
    items = np.empty(cell_ptr[ncells], np.int64)
    box_lo = np.empty((m, 2), np.int64)  # each box's first cell along x, y on its level
    for j in range(m):
        lv = level[j]
        gx, gy, s = levels[lv, 0], levels[lv, 1], levels[lv, 2]
        nx, ny, c0 = int(levels[lv, 3]), int(levels[lv, 4]), int(levels[lv, 5])
        cx0, cx1 = _cell(ext[j, X0], gx, s, nx), _cell(ext[j, X1], gx, s, nx)
        cy0, cy1 = _cell(ext[j, Y0], gy, s, ny), _cell(ext[j, Y1], gy, s, ny)
        for cy in range(cy0, cy1 + 1):
            for cx in range(cx0, cx1 + 1):
                c = c0 + cy * nx + cx
                items[fill[c]] = j
                fill[c] += 1
        box_lo[j, 0] = cx0
        box_lo[j, 1] = cy0
    return levels, bounds, cell_ptr, items, box_lo


# Prepared-row kinds (see obbiou._kernels.pairs): the measure of a pair is the very kernel
# function the all-pairs matrices use, so values are bit for bit the matrix entries.
AXIS, RECT, POLY = 0, 1, 2


@njit(cache=True)
def _extents(kind, R, is3d):
    """Padded extents (N, 6) and sizes (N,) from prepared rows (2D: z0 = -1, z1 = 1)."""
    n = R.shape[0]
    ext = np.empty((n, 6))
    size = np.empty(n)
    for i in range(n):
        _extent_row(kind, R, i, is3d, ext, size)
    return ext, size


@njit(cache=True, inline="always")
def _extent_row(kind, R, i, is3d, ext, size):
    """Padded extent and size of prepared row ``R[i]`` into ``ext[i]``, ``size[i]``."""
    if kind == AXIS:
        x0, y0, x1, y1 = R[i, AX_X0], R[i, AX_Y0], R[i, AX_X1], R[i, AX_Y1]
        z0, z1, s = R[i, AX_Z0], R[i, AX_Z1], R[i, AX_SIZE]
    elif kind == RECT:
        x0, y0, x1, y1 = R[i, R_XMIN], R[i, R_YMIN], R[i, R_XMAX], R[i, R_YMAX]
        z0, z1, s = R[i, R_Z0], R[i, R_Z1], R[i, R_SIZE]
    else:
        x0, y0, x1, y1 = R[i, P_XMIN], R[i, P_YMIN], R[i, P_XMAX], R[i, P_YMAX]
        z0, z1, s = -1.0, 1.0, R[i, P_AREA]
    if not is3d:
        z0, z1 = -1.0, 1.0
    ext[i, X0], ext[i, X1] = _pad(x0, x1)
    ext[i, Y0], ext[i, Y1] = _pad(y0, y1)
    ext[i, Z0], ext[i, Z1] = _pad(z0, z1)
    size[i] = s


@njit(cache=True, parallel=True)
def _side_parallel(kind, R, V, is3d, order, labels):
    """:func:`_side` on all threads (rows copied and extents computed in one pass): the
    scene's largest fresh arrays are then filled (and their pages touched) in parallel."""
    n = order.shape[0]
    Rs = np.empty((n,) + R.shape[1:])
    ext = np.empty((n, 6))
    size = np.empty(n)
    w = R.shape[1]
    for i in prange(n):
        src = order[i]
        for c in range(w):
            Rs[i, c] = R[src, c]
        _extent_row(kind, Rs, i, is3d, ext, size)
    Vs = _take(V, order) if kind == POLY else V
    ls = labels[order] if labels.shape[0] > 0 else labels
    return Rs, Vs, ext, size, ls


@njit(cache=True, inline="always")
def _box_xy(kind, R, i):
    """Unpadded x-y extent (x0, y0, x1, y1) of prepared row ``R[i]``."""
    if kind == AXIS:
        return R[i, AX_X0], R[i, AX_Y0], R[i, AX_X1], R[i, AX_Y1]
    if kind == RECT:
        return R[i, R_XMIN], R[i, R_YMIN], R[i, R_XMAX], R[i, R_YMAX]
    return R[i, P_XMIN], R[i, P_YMIN], R[i, P_XMAX], R[i, P_YMAX]


@njit(cache=True)
def base_cell(kind, R):
    """Level-0 cell size: twice the median extent of the indexed boxes ``R`` (prepared rows;
    of an evenly spaced sample of at most 4097 of them: the size only tunes speed), bounded
    below so that the size levels stay few whatever the spread of sizes. Measured on
    self-pairs of 1e5 rotated boxes 8-40 px long (one thread, CPU time): 0.7x the median
    60 ms, 1x 68 ms, 1.5x 49 ms, 2x 43 ms, 3x 51 ms, the largest extent 45 ms. Read from
    the unpadded rows (the grid itself is built on the padded extents): the cell size
    changes no result, only speed."""
    n = R.shape[0]
    step = max(1, n // 4096)
    d = np.empty((n + step - 1) // step)
    top = 0.0
    for i in range(n):
        x0, y0, x1, y1 = _box_xy(kind, R, i)
        top = max(top, x1 - x0, y1 - y0)
    for k in range(d.shape[0]):
        x0, y0, x1, y1 = _box_xy(kind, R, k * step)
        d[k] = max(x1 - x0, y1 - y0)
    return max(2.0 * np.median(d), top * 2.0**-40, 1e-300)


@njit(cache=True)
def _spatial_order(kind, R, x0, y0, s, nx, ny):
    """Rows of ``R`` by the cell of their lower-left corner (counting sort, row-major)."""
    n = R.shape[0]
    key = np.empty(n, np.int64)
    ptr = np.zeros(nx * ny + 1, np.int64)
    for i in range(n):
        bx0, by0, _, _ = _box_xy(kind, R, i)
        key[i] = _cell(by0, y0, s, ny) * nx + _cell(bx0, x0, s, nx)
        ptr[key[i] + 1] += 1
    for c in range(nx * ny):
        ptr[c + 1] += ptr[c]
    rows = np.empty(n, np.int64)
    for i in range(n):
        rows[ptr[key[i]]] = i
        ptr[key[i]] += 1
    return rows


@njit(cache=True)
def _orders(kind, A, B, base, same):
    """Both sides' rows along a row-major walk of one uniform grid over b.

    Neighbouring boxes then sit next to each other in memory, so the queries read cells,
    extents and prepared rows that are already in cache. Measured (one thread, CPU time,
    1e5 rotated boxes in random order, self-pairs): 137 ms for the candidate search without
    it, 65 ms with it, re-ordering included. Read from the prepared rows directly (no
    extents array in input order: fewer fresh pages to touch).
    """
    bx0, by0, bx1, by1 = np.inf, np.inf, -np.inf, -np.inf
    for j in range(B.shape[0]):
        x0, y0, x1, y1 = _box_xy(kind, B, j)
        bx0, by0 = min(bx0, x0), min(by0, y0)
        bx1, by1 = max(bx1, x1), max(by1, y1)
    s = base
    cap = 4.0 * (A.shape[0] + B.shape[0]) + 16.0
    nx, ny = np.floor((bx1 - bx0) / s) + 1.0, np.floor((by1 - by0) / s) + 1.0
    steps = 0
    while not nx * ny <= cap and steps < 4000:
        s *= 1.5
        nx, ny = np.floor((bx1 - bx0) / s) + 1.0, np.floor((by1 - by0) / s) + 1.0
        steps += 1
    if not nx * ny <= cap:
        s, nx, ny = 1.0, 1.0, 1.0
    oa = _spatial_order(kind, A, bx0, by0, s, int(nx), int(ny))
    ob = oa if same else _spatial_order(kind, B, bx0, by0, s, int(nx), int(ny))
    return oa, ob


@njit(cache=True)
def _take(R, order):
    """R[order] for 2-D or 3-D R, by plain loops: measured 4x faster than numba's fancy
    indexing (50 000 prepared rows: 1.5 ms against 6 ms)."""
    out = np.empty((order.shape[0],) + R.shape[1:])
    flat = R.reshape(R.shape[0], -1)
    dst = out.reshape(order.shape[0], -1)
    w = flat.shape[1]
    for i in range(order.shape[0]):
        src = order[i]
        for c in range(w):
            dst[i, c] = flat[src, c]
    return out


@njit(cache=True)
def _side(kind, R, V, is3d, order, labels):
    """One side of the scene in spatial order: rows, vertices, extents, sizes, labels."""
    Rs = _take(R, order)
    Vs = _take(V, order) if kind == POLY else V
    ext, size = _extents(kind, Rs, is3d)
    ls = labels[order] if labels.shape[0] > 0 else labels
    return Rs, Vs, ext, size, ls


@njit(cache=True)
def _value(kind, A, VA, i, B, VB, j, is3d, buf):
    """IoU of A[i] and B[j]: the measure kernels' own per-pair code."""
    if kind == AXIS:
        return axis_pair(A, i, B, j, IOU, is3d, buf)
    if kind == RECT:
        return rect_value(A, i, B, j, IOU, is3d, buf)
    return poly_pair(VA, A, i, VB, B, j, IOU, buf)


@njit(cache=True)
def _scratch(VA, VB):
    return np.empty((6, max(RECT_SCRATCH, 2 * (VA.shape[1] + VB.shape[1]) + 4)))


@njit(cache=True, inline="always")
def _walk(i, scene, grid, kept, out):
    """Candidates of a's row i, by a walk over the grid cells that its extent covers.

    Counts them and writes the first ``len(out)`` (b's rows, spatial order) to ``out``; with
    a non-empty ``kept``, only boxes j with ``kept[j]`` != 0, other than i itself.

    A candidate: strictly overlapping padded extents (x, y, z), the same label when labels
    are given (non-empty arrays), for self-pairs a later row in spatial order (each pair is
    met from one side only, its input order restored when gathered), and, when the
    threshold is > 0, an IoU upper bound above it: IoU <= m / (sa + sb - m) with
    m = min(extent overlap, sa, sb). Each pair is met once (see the module docstring). The
    walk is one function with the measure kept out of it: measured, a measure call inside
    this loop (or a helper for the tests) made the walk two to three times slower. Inlined
    into its callers: measured 175 against 210 ns per walk (10 000 clustered detections).
    """
    levels, bounds, cell_ptr, items, box_lo = grid
    ea, sa = scene[3], scene[4]
    eb, sb, _, same, labels_a, labels_b, thr, is3d = scene[8:]
    x0, y0, x1, y1, z0, z1 = ea[i, 0], ea[i, 1], ea[i, 2], ea[i, 3], ea[i, 4], ea[i, 5]
    use_labels = labels_a.shape[0] > 0
    use_kept = kept.shape[0] > 0
    forward = same and not use_kept
    cap = out.shape[0]
    n = 0
    for lv in range(levels.shape[0]):
        nx = int(levels[lv, 3])
        if nx == 0:
            continue
        if x1 <= bounds[lv, 0] or x0 >= bounds[lv, 2] or y1 <= bounds[lv, 1] or y0 >= bounds[lv, 3]:
            continue
        gx, gy, s = levels[lv, 0], levels[lv, 1], levels[lv, 2]
        ny, c0 = int(levels[lv, 4]), int(levels[lv, 5])
        cx0, cx1 = _cell(x0, gx, s, nx), _cell(x1, gx, s, nx)
        cy0, cy1 = _cell(y0, gy, s, ny), _cell(y1, gy, s, ny)
        for cy in range(cy0, cy1 + 1):
            for cx in range(cx0, cx1 + 1):
                c = c0 + cy * nx + cx
                for k in range(cell_ptr[c], cell_ptr[c + 1]):
                    j = items[k]
                    if forward and j <= i:  # a cell's items ascend: a predictable skip
                        continue
                    if use_kept and kept[j] == 0:
                        continue
                    if eb[j, 0] >= x1 or eb[j, 2] <= x0 or eb[j, 1] >= y1 or eb[j, 3] <= y0:
                        continue
                    if use_kept and j == i:
                        continue
                    # report the pair only in the first cell that both boxes cover (integer
                    # test, the same cells as the grid's own: no rounding can differ)
                    if max(cx0, box_lo[j, 0]) != cx or max(cy0, box_lo[j, 1]) != cy:
                        continue
                    if is3d and (eb[j, 4] >= z1 or eb[j, 5] <= z0):
                        continue
                    if use_labels and labels_a[i] != labels_b[j]:
                        continue
                    if thr > 0.0:
                        m = (min(x1, eb[j, 2]) - max(x0, eb[j, 0])) * (
                            min(y1, eb[j, 3]) - max(y0, eb[j, 1])
                        )
                        if is3d:
                            m *= min(z1, eb[j, 5]) - max(z0, eb[j, 4])
                        m = min(m, sa[i], sb[j])
                        u = sa[i] + sb[j] - m
                        if u > 0.0 and m * (1.0 + 1e-9) <= thr * u:
                            continue
                    if n < cap:
                        out[n] = j
                    n += 1
    return n


@njit(cache=True)
def _values(kind, A, VA, i, B, VB, js, out, is3d, buf):
    """IoU of A[i] with each B[js[k]] into out[k]: the measure kernels' own per-pair code,
    so values are bit for bit the all-pairs matrix entries."""
    if kind == AXIS:
        for k in range(js.shape[0]):
            out[k] = axis_pair(A, i, B, js[k], IOU, is3d, buf)
    elif kind == RECT:
        for k in range(js.shape[0]):
            out[k] = rect_value(A, i, B, js[k], IOU, is3d, buf)
    else:
        for k in range(js.shape[0]):
            out[k] = poly_pair(VA, A, i, VB, B, js[k], IOU, buf)


@njit(cache=True)
def _fill(i, scene, grid, out_j, out_v, buf):
    """The candidates of a's row i (``out_j`` holds exactly their number) with IoU above
    the threshold: (b's input row, IoU) compacted to the front of ``out_j``, ``out_v``;
    returns how many."""
    kind, A, VA, B, VB, ob, thr, is3d = (
        scene[0],
        scene[1],
        scene[2],
        scene[6],
        scene[7],
        scene[10],
        scene[14],
        scene[15],
    )
    _walk(i, scene, grid, out_j[:0], out_j)
    if scene[11]:  # self-pairs: each pair in input order (first, second), as the matrix does
        oa = scene[5]
        for k in range(out_j.shape[0]):
            j = out_j[k]
            if oa[i] < oa[j]:
                out_v[k] = _value(kind, A, VA, i, A, VA, j, is3d, buf)
            else:
                out_v[k] = _value(kind, A, VA, j, A, VA, i, is3d, buf)
    else:
        _values(kind, A, VA, i, B, VB, out_j, out_v, is3d, buf)
    n = 0
    for k in range(out_j.shape[0]):
        if out_v[k] > thr:
            out_j[n] = ob[out_j[k]]
            out_v[n] = out_v[k]
            n += 1
    return n


@njit(cache=True)
def _prepare_scene(kind, A, VA, B, VB, same, labels_a, labels_b, thr, is3d, parallel=False):
    """Spatially ordered scene and grid over b. Returns (scene, grid)."""
    base = base_cell(kind, B)
    oa, ob = _orders(kind, A, B, base, same)
    if parallel:
        A, VA, ea, sa, la = _side_parallel(kind, A, VA, is3d, oa, labels_a)
    else:
        A, VA, ea, sa, la = _side(kind, A, VA, is3d, oa, labels_a)
    if same:
        B, VB, eb, sb, lb = A, VA, ea, sa, la
    elif parallel:
        B, VB, eb, sb, lb = _side_parallel(kind, B, VB, is3d, ob, labels_b)
    else:
        B, VB, eb, sb, lb = _side(kind, B, VB, is3d, ob, labels_b)
    scene = (kind, A, VA, ea, sa, oa, B, VB, eb, sb, ob, same, la, lb, thr, is3d)
    return scene, build_grid(eb, base)


@njit(cache=True)
def _chunk_count(c, step, scene, grid, count):
    """Candidates of a's rows c * step ... (spatial order) into count[row + 1]."""
    n = count.shape[0] - 1
    for i in range(c * step, min(n, (c + 1) * step)):
        count[i + 1] = _walk(i, scene, grid, count[:0], count[:0])


@njit(cache=True)
def _chunk_fill(c, step, scene, grid, slot, slot_j, slot_v, kept, buf):
    """Pairs above the threshold of the same rows, compacted at the front of their slots;
    their number into kept[input row + 1] (self-pairs: kept[spatial row + 1])."""
    oa, same = scene[5], scene[11]
    n = slot.shape[0] - 1
    for i in range(c * step, min(n, (c + 1) * step)):
        lo, hi = slot[i], slot[i + 1]
        if hi > lo:
            r = i if same else oa[i]
            kept[r + 1] = _fill(i, scene, grid, slot_j[lo:hi], slot_v[lo:hi], buf)


@njit(cache=True)
def _gather(scene, slot, slot_j, slot_v, kept):
    """Exact-size outputs from the per-row slots (spatial order), in input order; second
    sorted within a row."""
    oa = scene[5]
    n = oa.shape[0]
    where = np.empty(n, np.int64)
    for i in range(n):
        where[oa[i]] = i
    for r in range(n):
        kept[r + 1] += kept[r]
    total = kept[n]
    first = np.empty(total, np.int64)
    second = np.empty(total, np.int64)
    iou = np.empty(total)
    for r in range(n):
        p, q = kept[r], kept[r + 1]
        if q == p:
            continue
        lo = slot[where[r]]
        for k in range(q - p):
            first[p + k] = r
            second[p + k] = slot_j[lo + k]
            iou[p + k] = slot_v[lo + k]
        if q - p > 1:
            _sort_small(second[p:q], iou[p:q])
    return first, second, iou


@njit(cache=True)
def _gather_same(scene, slot, slot_j, slot_v, kept):
    """Self-pairs: the slots of spatial row i hold (partner's input row, IoU) of pairs met
    from i; each pair goes to the row of its smaller input index, second sorted within a
    row (a counting scatter: exact-size outputs, no pair list sort)."""
    oa = scene[5]
    n = oa.shape[0]
    ptr = np.zeros(n + 1, np.int64)
    for i in range(n):
        me = oa[i]
        lo = slot[i]
        for k in range(kept[i + 1]):
            ptr[min(me, slot_j[lo + k]) + 1] += 1
    for r in range(n):
        ptr[r + 1] += ptr[r]
    total = ptr[n]
    first = np.empty(total, np.int64)
    second = np.empty(total, np.int64)
    iou = np.empty(total)
    fill = ptr[:-1].copy()
    for i in range(n):
        me = oa[i]
        lo = slot[i]
        for k in range(kept[i + 1]):
            q = slot_j[lo + k]
            r = min(me, q)
            p = fill[r]
            first[p] = r
            second[p] = max(me, q)
            iou[p] = slot_v[lo + k]
            fill[r] = p + 1
    for r in range(n):
        if ptr[r + 1] - ptr[r] > 1:
            _sort_small(second[ptr[r] : ptr[r + 1]], iou[ptr[r] : ptr[r + 1]])
    return first, second, iou


@njit(cache=True)
def _sort_small(keys, values):
    """Insertion sort of short rows (a box overlaps few others), values carried along."""
    if keys.shape[0] > 32:
        o = np.argsort(keys)
        keys[:] = keys[o].copy()
        values[:] = values[o].copy()
        return
    for p in range(1, keys.shape[0]):
        k, v = keys[p], values[p]
        q = p - 1
        while q >= 0 and keys[q] > k:
            keys[q + 1], values[q + 1] = keys[q], values[q]
            q -= 1
        keys[q + 1], values[q + 1] = k, v


@njit(cache=True)
def _slots(count):
    for i in range(count.shape[0] - 1):
        count[i + 1] += count[i]
    total = count[-1]
    return np.empty(total, np.int64), np.empty(total)


@njit(cache=True, parallel=True)
def scene_pairs(kind, A, VA, B, VB, same, labels_a, labels_b, thr, is3d, chunks):
    """Pairs (first, second, iou) with IoU > thr, sorted by (first, second), of prepared
    boxes A (rows; VA vertices for POLY, else unused) and B; ``same``: B is A and only
    first < second. ``labels_*``: int64 codes, or empty arrays for no labels.

    Two passes over the grid: count the candidates of each row, then compute their IoU
    into per-row slots keeping those above thr; one copy gives exactly sized outputs.
    Memory grows with the number of candidates (extents overlapping, IoU bound above thr).
    """
    scene, grid = _prepare_scene(kind, A, VA, B, VB, same, labels_a, labels_b, thr, is3d, True)
    n = A.shape[0]
    step = (n + chunks - 1) // chunks
    count = np.zeros(n + 1, np.int64)
    for c in prange(chunks):
        _chunk_count(c, step, scene, grid, count)
    slot_j, slot_v = _slots(count)
    kept = np.zeros(n + 1, np.int64)
    for c in prange(chunks):
        _chunk_fill(c, step, scene, grid, count, slot_j, slot_v, kept, _scratch(VA, VB))
    if same:
        return _gather_same(scene, count, slot_j, slot_v, kept)
    return _gather(scene, count, slot_j, slot_v, kept)


@njit(cache=True)
def scene_pairs_serial(kind, A, VA, B, VB, same, labels_a, labels_b, thr, is3d, chunks):
    scene, grid = _prepare_scene(kind, A, VA, B, VB, same, labels_a, labels_b, thr, is3d)
    n = A.shape[0]
    count = np.zeros(n + 1, np.int64)
    buf = _scratch(VA, VB)
    _chunk_count(0, n, scene, grid, count)
    slot_j, slot_v = _slots(count)
    kept = np.zeros(n + 1, np.int64)
    _chunk_fill(0, n, scene, grid, count, slot_j, slot_v, kept, buf)
    if same:
        return _gather_same(scene, count, slot_j, slot_v, kept)
    return _gather(scene, count, slot_j, slot_v, kept)


@njit(cache=True)
def suppress_hard(kind, A, VA, labels, order, thr, is3d, limit):
    """Greedy hard suppression, lazily: walk ``order`` (input rows, best first); a box is
    kept unless an already kept box overlaps it with IoU > thr, found through the grid.
    IoU is computed only between a box and the kept boxes near it, and a box stops at the
    first kept box that suppresses it. Stops after ``limit`` kept boxes (< 0: no limit)."""
    scene, grid = _prepare_scene(kind, A, VA, A, VA, True, labels, labels, thr, is3d)
    A, VA, oa = scene[1], scene[2], scene[5]
    n = oa.shape[0]
    where = np.empty(n, np.int64)
    for i in range(n):
        where[oa[i]] = i
    flag = np.zeros(n, np.int64)  # kept, in spatial order
    buf = _scratch(VA, VA)
    near = np.empty(64, np.int64)
    kept = np.empty(order.shape[0], np.int64)
    nk = 0
    for p in range(order.shape[0]):
        if nk == limit:
            break
        i = where[order[p]]
        m = 0
        if nk > 0:
            m = _walk(i, scene, grid, flag, near)
        suppressed = False
        if m > 0:
            if m > near.shape[0]:  # rare: more kept neighbours than the buffer holds
                near = np.empty(2 * m, np.int64)
                _walk(i, scene, grid, flag, near)
            for k in range(m):
                if _value(kind, A, VA, i, A, VA, near[k], is3d, buf) > thr:
                    suppressed = True
                    break
        if not suppressed:
            flag[i] = 1
            kept[nk] = order[p]
            nk += 1
    return kept[:nk]


@njit(cache=True)
def candidate_count(kind, A, VA, B, VB, same, thr, is3d):
    """Number of candidate pairs (the index alone, no measure): for benchmarks."""
    none = np.zeros(0, np.int64)
    scene, grid = _prepare_scene(kind, A, VA, B, VB, same, none, none, thr, is3d)
    n = A.shape[0]
    count = np.zeros(n + 1, np.int64)
    _chunk_count(0, n, scene, grid, count)
    return count.sum()
