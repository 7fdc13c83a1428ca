"""Points inside boxes: a uniform grid over the points, scanned box by box.

Numba kernels only: no validation, no Python objects. The public layer
(:mod:`obbiou.points`) prepares one parameter row per box (see the ``K_*`` kinds below) and
each box's padded extent in the ground plane, and chooses the grid.

Index: the points that fall inside the union of the box extents are binned into a uniform
grid of square cells (a stable counting sort by cell, rows of cells in order), so that the
cells ``ix0 .. ix1`` of one grid row hold one contiguous run of sorted points. Each box
then scans, row by row, the runs of the cells its extent covers and tests only those
points: the cost is the binning (linear in the points) plus the candidates, never
points x boxes. Boxes are independent, so the scan runs on spans of boxes, on all cores
(:func:`obbiou._kernels.threads.run`).

Cells are found with ``floor((x - x0) * inv)``, clamped to the grid, for points and for box
extents alike. Each step is monotone in ``x``, so a point whose x lies in a box's extent
(compared in float64) is always in one of the cells the box scans: the index can never lose
a point that the inside test accepts.

Many frames in one call (lidar sweeps: each box counts the points of its own frame only):
:func:`scan_frames_range` runs the same sort and scan frame by frame, each frame with a
grid of its own over its own rows, inside one kernel call; nothing is shifted, so the counts
are those of one call per frame, exactly.

The inside tests are closed (a point on a face counts) and compare in each box's own frame,
relative to its centre (see :func:`_within`, exact for axis-aligned faces).

Measured on 10**6 invented lidar points and 10**4 upright boxes (``bench/points.py``, one
thread, a shared machine): the sort takes 9-12 ms and the counting scan 8-11 ms (1.3 M
candidates). Tried and not kept, each measured against the box-by-box scan of its time
(15.7 ms, before the frame loop lost its call): a grid over the boxes visited point by
point without sorting the points (30 ms inlined, 42 ms as written: points in arbitrary
order make each box row a cache miss); a cell-by-cell scan of the sorted points against
the boxes listed per cell (12 ms); a grid-row-by-row scan (15.2 ms); a two-pass sort by
row, then column (15.6 against 12 ms for the sort).
"""

from __future__ import annotations

import numpy as np
from numba import njit

# Box kinds (the public layer writes one parameter row of 8 floats per box):
K_BOUNDS = 0  # axis, axis3: x_min, y_min, x_max, y_max, z_min, z_max
K_FRAME = 1  # rotated, upright: cx, cy, hw, hh, cz, hz, cos, sin (half sizes; for quarter
# turns cos and sin are exactly 0 or +-1)
K_POLYGON = 2  # convex polygon: x_min, y_min, x_max, y_max, z_min, z_max of its vertices
N_PARAMS = 8

# grid_f: the union of the box extents (x0, y0, x1, y1, z_lo, z_hi) and the inverse cell
# width and height; grid_i: nx, ny (columns, rows)
G_X0, G_Y0, G_X1, G_Y1, G_ZLO, G_ZHI, G_INVX, G_INVY = 0, 1, 2, 3, 4, 5, 6, 7


@njit(cache=True)
def _cell(x, x0, inv, n):
    """The grid column (or row) of coordinate x >= x0: monotone in x, clamped to n - 1."""
    t = (x - x0) * inv
    if t >= n:
        return n - 1
    if not t > 0.0:  # also NaN (inf * 0 on a one-cell grid over an overflowing span)
        return 0
    return int(t)


@njit(cache=True)
def _within(p, c, a):
    """Exactly whether the real number ``p - c`` lies in ``[-a, a]`` (a >= 0).

    The rounded difference decides unless it lands on a bound: rounding is monotone, so
    ``fl(p - c) < a`` implies ``p - c < a``. On a bound, the rounding error of the
    difference (exact by Knuth's TwoSum, TAOCP vol. 2, 4.2.2) says on which side the
    real value lies.
    """
    d = p - c
    if d < -a or d > a:
        return False
    if d != a and d != -a:
        return True
    # TwoSum of p and -c: p - c == d + err exactly.
    m = -c
    bv = d - p
    err = (p - (d - bv)) + (m - bv)
    if d == a and a != 0.0:
        return err <= 0.0
    if d == -a and a != 0.0:
        return err >= 0.0
    return err == 0.0  # a == 0 and d == 0: only p == c itself (then err is 0)


@njit(cache=True)
def _point_cell(pts, k, three, grid_f, nx, ny):
    """The grid cell of point k, or -1 outside the union of the box extents (plane and
    z range: no box can hold it)."""
    x, y = pts[k, 0], pts[k, 1]
    z = pts[k, 2] if three else 0.0
    if x < grid_f[G_X0] or x > grid_f[G_X1] or y < grid_f[G_Y0] or y > grid_f[G_Y1]:
        return -1
    if z < grid_f[G_ZLO] or z > grid_f[G_ZHI]:
        return -1
    iy = _cell(y, grid_f[G_Y0], grid_f[G_INVY], ny)
    return iy * nx + _cell(x, grid_f[G_X0], grid_f[G_INVX], nx)


@njit(cache=True)
def sort_points(pts, grid_f, grid_i, keep_order):
    """Bin the (N, 2) or (N, 3) points into the grid and sort them by cell (a stable
    counting sort); 2D points get z = 0. Points outside every box extent are left out.

    Returns ``first`` (nx * ny + 1: the points of cell q are sorted rows first[q] ..
    first[q + 1] - 1, cells row by row), ``order`` (sorted row -> input row, ascending
    within a cell; one dummy entry unless ``keep_order``: counting needs no rows) and the
    sorted points (x, y, z rows: one cache line serves all three coordinates in the scan).

    Serial: linear in the points, about 10 ms for 10**6. Tried and slower on the shared
    2-core machine: the same sort over chunks of points with a histogram per chunk, in
    parallel (22 against 14 ms), and a two-pass sort by row, then column (15.6 against
    12 ms).
    """
    nx, ny = grid_i[0], grid_i[1]
    ncells = nx * ny
    n = pts.shape[0]
    three = pts.shape[1] == 3
    cell = np.empty(n, np.int64)
    first = np.zeros(ncells + 1, np.int64)
    for k in range(n):
        q = _point_cell(pts, k, three, grid_f, nx, ny)
        cell[k] = q
        if q >= 0:
            first[q + 1] += 1
    for q in range(ncells):
        first[q + 1] += first[q]
    m = first[ncells]
    order = np.zeros(m if keep_order else 1, np.int64)
    sp = np.empty((m, 3))
    at = first[:-1].copy()
    for k in range(n):
        q = cell[k]
        if q >= 0:
            j = at[q]
            at[q] = j + 1
            if keep_order:
                order[j] = k
            sp[j, 0], sp[j, 1] = pts[k, 0], pts[k, 1]
            sp[j, 2] = pts[k, 2] if three else 0.0
    return first, order, sp


# The runs below test the sorted points a..e-1 against one box and return how many are
# inside. With f = 1 they also write the points' input rows to out[at:], a scratch buffer
# with room for one more than the box holds: every candidate is written, and the next one
# overwrites it unless it was inside. With f = 0 (counting) every write goes to out[at]
# and reads order[0]: the same code without a branch, compiled once. No branch on the
# outcome either: an inside test that is true a third of the time defeats the branch
# predictor (measured: 30 -> 9 ms for 1.3 M candidates, one thread).


@njit(cache=True)
def _run_bounds(a, e, p, sp, order, out, at, f):
    """Closed bounds x0, y0, x1, y1, z0, z1 = p[0:6]: plain comparisons, exact."""
    x0, y0, x1, y1, z0, z1 = p[0], p[1], p[2], p[3], p[4], p[5]
    n = 0
    for k in range(a, e):
        x, y, z = sp[k, 0], sp[k, 1], sp[k, 2]
        inside = (x0 <= x) & (x <= x1) & (y0 <= y) & (y <= y1) & (z0 <= z) & (z <= z1)
        out[at + n * f] = order[k * f]
        n += inside
    return n


@njit(cache=True)
def _on_face(p, x, y, z):
    """The exact verdict for a point whose rounded frame coordinate lies exactly on a face
    of the frame box p (rare). Quarter turns (cos or sin exactly 0) have axis-parallel
    faces: compare the exact differences (:func:`_within`). Other angles: the rounded test
    in the plane stands, z is exact."""
    cx, cy, hw, hh, cz, hz, c, s = p[0], p[1], p[2], p[3], p[4], p[5], p[6], p[7]
    if not _within(z, cz, hz):
        return False
    if s == 0.0:  # 0 or pi: the box's own x axis along +-x
        return _within(x, cx, hw) and _within(y, cy, hh)
    if c == 0.0:  # +-pi/2: the box's own x axis along +-y
        return _within(x, cx, hh) and _within(y, cy, hw)
    return True


@njit(cache=True)
def _run_frame(a, e, p, sp, order, out, at, f, ties):
    """Frame box: |u| <= hw and |v| <= hh in its frame (u along the box's own x axis,
    cos and sin in p[6], p[7]), relative to the centre, and |z - cz| <= hz.

    The loop stays free of calls: points whose rounded frame coordinate lands exactly on a
    face are noted in ``ties`` (room for e - a + 1) and settled after the loop, where those
    found outside are taken back. A call to :func:`_on_face` inside the loop, even if
    rarely taken, made it about twice as slow (measured: 15.8 against 8-10 ms for 1.3 M
    candidates).
    """
    cx, cy, hw, hh, cz, hz, c, s = p[0], p[1], p[2], p[3], p[4], p[5], p[6], p[7]
    n = 0
    t = 0
    for k in range(a, e):
        dx = sp[k, 0] - cx
        dy = sp[k, 1] - cy
        u = abs(dx * c + dy * s)
        v = abs(dy * c - dx * s)
        w = abs(sp[k, 2] - cz)
        inside = (u <= hw) & (v <= hh) & (w <= hz)
        out[at + n * f] = order[k * f]
        ties[t] = k
        t += inside & ((u == hw) | (v == hh) | (w == hz))
        n += inside
    if t == 0:
        return n
    # On a face to rounding (rare): the exact verdict. Those found outside are taken back;
    # when filling (one cell per run: rows ascend) their input rows, ascending, go to the
    # front of ``ties`` and one merge-like pass drops them from out[at:at + n].
    gone = 0
    for i in range(t):
        k = ties[i]
        if not _on_face(p, sp[k, 0], sp[k, 1], sp[k, 2]):
            if f:
                ties[gone] = order[k]
            gone += 1
    if f and gone:
        j = at
        r = 0
        for i in range(at, at + n):
            if r < gone and out[i] == ties[r]:
                r += 1
            else:
                out[j] = out[i]
                j += 1
    return n - gone


@njit(cache=True)
def _run_polygon(a, e, p, verts, sp, order, out, at, f):
    """Points a..e-1 inside the closed convex polygon ``verts`` (either winding): no edge
    has the point strictly on its left while another has it strictly on its right; the
    vertices' bounds p[0:4] settle flat (collinear) polygons."""
    x0, y0, x1, y1 = p[0], p[1], p[2], p[3]
    nv = verts.shape[0]
    n = 0
    for k in range(a, e):
        x, y = sp[k, 0], sp[k, 1]
        if not (x0 <= x <= x1 and y0 <= y <= y1):
            continue
        left = False
        right = False
        for i in range(nv):
            j = i + 1 if i + 1 < nv else 0
            ax, ay = verts[i, 0], verts[i, 1]
            cross = (verts[j, 0] - ax) * (y - ay) - (verts[j, 1] - ay) * (x - ax)
            left |= cross > 0.0
            right |= cross < 0.0
        out[at + n * f] = order[k * f]
        n += not (left and right)
    return n


@njit(cache=True)
def _hits(kind, a, e, p, verts, sp, order, out, at, f, ties):
    """The points a..e-1 inside one box of kind ``kind`` (see the runs above)."""
    if kind == K_BOUNDS:
        return _run_bounds(a, e, p, sp, order, out, at, f)
    if kind == K_FRAME:
        return _run_frame(a, e, p, sp, order, out, at, f, ties)
    return _run_polygon(a, e, p, verts, sp, order, out, at, f)


@njit(cache=True)
def _merge_runs(src, dst, bounds, nr):
    """Merge the nr ascending runs src[bounds[r]:bounds[r + 1]] pairwise, round by round
    (bottom-up merge sort from given runs): n log2(nr) moves. Returns the buffer that
    holds the result; ``bounds`` is reused."""
    while nr > 1:
        w = 0
        for r in range(0, nr, 2):
            lo = bounds[r]
            mid = bounds[r + 1]
            hi = bounds[r + 2] if r + 2 <= nr else mid
            i, j, k = lo, mid, lo
            while i < mid or j < hi:  # plain loops: slice assignment compiles slowly
                if j >= hi or (i < mid and src[i] <= src[j]):
                    dst[k] = src[i]
                    i += 1
                else:
                    dst[k] = src[j]
                    j += 1
                k += 1
            bounds[w] = lo
            w += 1
        bounds[w] = bounds[nr]
        nr = w
        src, dst = dst, src
    return src


@njit(cache=True, nogil=True)
def scan_range(
    boxes,
    kinds,
    params,
    verts,
    ext,
    grid_f,
    grid_i,
    first,
    order,
    sp,
    offsets,
    out,
    counts,
    lo,
    hi,
):
    """Kernel body over boxes[lo:hi] (run on spans by :func:`obbiou._kernels.threads.run`;
    spans write disjoint outputs): count the points inside each box b into counts[b];
    when ``out`` is not empty, also write their input rows to ``out[offsets[b]:]`` in
    ascending order (the second pass of :func:`points_in_boxes`).

    ``boxes`` lists the boxes in grid order (by the cell of their lower-left corner), so
    that consecutive boxes read neighbouring runs of points.

    Counting reads the cells of a grid row as one run. Filling goes cell by cell: the hits
    of a cell ascend (the sort is stable), and :func:`_merge_runs` merges those runs
    (measured against a heapsort of each box's hits: 22 -> 15 ms for 444 000 hits in
    10 000 boxes).
    """
    x0, y0 = grid_f[G_X0], grid_f[G_Y0]
    invx, invy = grid_f[G_INVX], grid_f[G_INVY]
    nx, ny = grid_i[0], grid_i[1]
    fill = out.shape[0] > 0
    f = 1 if fill else 0
    most = 0  # the most hits of a box of this range
    if fill:
        for i in range(lo, hi):
            most = max(most, offsets[boxes[i] + 1] - offsets[boxes[i]])
    longest = 0  # the longest run of candidates (a grid row under a box)
    for i in range(lo, hi):
        b = boxes[i]
        ix0 = _cell(ext[b, 0], x0, invx, nx)
        ix1 = _cell(ext[b, 2], x0, invx, nx)
        for iy in range(_cell(ext[b, 1], y0, invy, ny), _cell(ext[b, 3], y0, invy, ny) + 1):
            longest = max(longest, first[iy * nx + ix1 + 1] - first[iy * nx + ix0])
    # A run may hold, for a moment, points on a face that are then taken back: room for
    # the box's hits plus one run.
    scratch = np.empty(most + longest + 1, np.int64)
    spare = np.empty(most + longest + 1, np.int64)
    bounds = np.empty(most + 2, np.int64)  # starts of the runs: at most one per hit
    ties = np.empty(longest + 1, np.int64)
    for i in range(lo, hi):
        b = boxes[i]
        kind = kinds[b]
        p = params[b]
        vb = verts[b if kind == K_POLYGON else 0]  # verts has >= 1 row for every layout
        ix0 = _cell(ext[b, 0], x0, invx, nx)
        ix1 = _cell(ext[b, 2], x0, invx, nx)
        iy0 = _cell(ext[b, 1], y0, invy, ny)
        iy1 = _cell(ext[b, 3], y0, invy, ny)
        n = 0
        nr = np.int64(0)
        for iy in range(iy0, iy1 + 1):
            qa = iy * nx + ix0
            qb = iy * nx + ix1 + 1
            step = 1 if fill else qb - qa
            for q in range(qa, qb, step):
                got = _hits(
                    kind, first[q], first[q + step], p, vb, sp, order, scratch, n * f, f, ties
                )
                if fill and got > 0:
                    bounds[nr] = n
                    nr += 1
                n += got
        counts[b] = n
        if fill:
            bounds[nr] = n
            merged = _merge_runs(scratch, spare, bounds, nr)
            at = offsets[b]
            for k in range(n):
                out[at + k] = merged[k]


@njit(cache=True, nogil=True)
def scan_frames_range(
    pts, spans, boxes, kinds, params, verts, ext, grid_f, grid_i, offsets, out, counts, lo, hi
):
    """Kernel body over frames lo..hi-1 (run on spans by :func:`obbiou._kernels.threads.run`;
    spans write disjoint outputs): the points of frame f, rows ``spans[f, 0]:spans[f, 1]``
    of ``pts``, against the boxes ``boxes[spans[f, 2]:spans[f, 3]]`` (rows of the box
    arrays, in the frame's grid order), with the frame's grid ``grid_f[f]``, ``grid_i[f]``:
    counts into ``counts`` and, when ``out`` is not empty, each box's points (rows within
    its frame's span, ascending) into ``out[offsets[b]:]``, as :func:`scan_range` does.

    Each frame gets the point sort and the scan of a call of its own (the same compiled
    :func:`sort_points` and :func:`scan_range`), so the results are exactly those of one
    call per frame, without a Python call per frame and with no coordinate shifted.
    """
    fill = out.shape[0] > 0
    for f in range(lo, hi):
        gf = grid_f[f]
        gi = grid_i[f]
        first, order, sp = sort_points(pts[spans[f, 0] : spans[f, 1]], gf, gi, fill)
        scan_range(
            boxes,
            kinds,
            params,
            verts,
            ext,
            gf,
            gi,
            first,
            order,
            sp,
            offsets,
            out,
            counts,
            spans[f, 2],
            spans[f, 3],
        )
