"""Overlap measures of box pairs: all-pairs matrices, pair lists, row-by-row values (numba).

Boxes arrive *prepared* (see ``obbiou.measures.prepare``), one row per box, in one of three
kinds (:class:`obbiou._kernels.codes.Kind`):

* ``axis``  rows ``x0, y0, x1, y1, z0, z1, size`` (2D boxes ignore the z columns);
* ``rect``  rows ``cx, cy, hw, hh, cos, sin, area, xmin, ymin, xmax, ymax, z0, z1, size,
  1/hw, 1/hh`` (rotated rectangles; upright 3D boxes add a z interval, 2D rows have z 0..1);
* ``poly``  counter-clockwise vertices ``(N, K, 2)`` plus rows
  ``area, xmin, ymin, xmax, ymax, gx, gy`` (``g`` the centroid relative to vertex 0).

Exactness (docs/design.md, section 4): each pair is computed in a canonical order decided
by the boxes' data, never by argument position, so ``f(a, b) == f(b, a)`` bit for bit;
geometry is done relative to one box of the pair; identical and nested boxes short-cut to
exact sizes; results are clamped to their ranges; zero-size boxes overlap nothing and no
NaN escapes (branch-free code may divide by zero in a value it then discards).

Rectangles (the common case) take a branch-free path that vectorises across pairs: the
boundary-integral area of :func:`rect_intersection`, with separating-axis tests for disjoint and
nested pairs. Near-parallel pairs are flagged and clipped polygon-wise instead
(:func:`rect_slow`). Every path ends in the same arithmetic per pair, so all-pairs
matrices, pair lists and elementwise values agree bit for bit.

Each job is one serial body over a span of rows, ``body(..., lo, hi)``, compiled with
``nogil``: :mod:`obbiou._kernels.threads` runs it on all cores, a small input calls it
once. A call compiles only the bodies of its job and kind.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from obbiou._kernels.clip import clip_axis, clip_line, hull_area, shoelace
from obbiou._kernels.codes import Measure
from obbiou._kernels.geometry import rect_tuple
from obbiou._kernels.minmax import larger, smaller
from obbiou._kernels.options import ENTRY, HELPER

INTERSECTION = int(Measure.INTERSECTION)
IOU = int(Measure.IOU)
GIOU = int(Measure.GIOU)
DIOU = int(Measure.DIOU)
COVERAGE = int(Measure.COVERAGE)

# Column indices of prepared rows.
AX_X0, AX_Y0, AX_X1, AX_Y1, AX_Z0, AX_Z1, AX_SIZE = 0, 1, 2, 3, 4, 5, 6
AXIS_COLUMNS = 7
R_CX, R_CY, R_HW, R_HH, R_C, R_S, R_AREA = 0, 1, 2, 3, 4, 5, 6
R_XMIN, R_YMIN, R_XMAX, R_YMAX, R_Z0, R_Z1, R_SIZE = 7, 8, 9, 10, 11, 12, 13
R_IHW, R_IHH = 14, 15  # reciprocals of the half sizes (inf for zero sizes)
RECT_COLUMNS = 16
P_AREA, P_XMIN, P_YMIN, P_XMAX, P_YMAX, P_GX, P_GY = 0, 1, 2, 3, 4, 5, 6
POLY_COLUMNS = 7

RECT_SCRATCH = 24


@njit(**HELPER)
def finish(measure, inter, sa, sb, hull, d2, c2):
    """Turn an intersection (and, for GIoU/DIoU, hull size or distances) into a measure."""
    if measure == INTERSECTION:
        return inter
    if measure == COVERAGE:
        share = smaller(larger(inter / sa, 0.0), 1.0)
        return share if sa > 0.0 else 0.0
    union = sa + sb - inter
    iou = smaller(larger(inter / union, 0.0), 1.0)  # a select below, not a branch: loops vectorise
    iou = iou if (union > 0.0) & (inter > 0.0) else 0.0
    if measure == IOU:
        return iou
    if measure == GIOU:
        penalty = 0.0
        if hull > union:
            penalty = (hull - union) / hull
        return smaller(larger(iou - penalty, -1.0), 1.0)
    # DIOU
    penalty = 0.0
    if c2 > 0.0:
        penalty = smaller(d2 / c2, 1.0)
    return smaller(larger(iou - penalty, -1.0), 1.0)


# --------------------------------------------------------------------------------------
# axis-aligned boxes (axis, axis3)


@njit(**HELPER)
def axis_less(A, i, B, j):
    """True when row B[j] sorts before row A[i] (lexicographic on the data)."""
    for k in range(6):
        if B[j, k] != A[i, k]:
            return B[j, k] < A[i, k]
    return False


@njit(**HELPER)
def axis_pair(A, i, B, j, measure, is3d, buf):
    sa = A[i, AX_SIZE]
    sb = B[j, AX_SIZE]
    ix = smaller(A[i, AX_X1], B[j, AX_X1]) - larger(A[i, AX_X0], B[j, AX_X0])
    iy = smaller(A[i, AX_Y1], B[j, AX_Y1]) - larger(A[i, AX_Y0], B[j, AX_Y0])
    iz = 1.0
    if is3d:
        iz = smaller(A[i, AX_Z1], B[j, AX_Z1]) - larger(A[i, AX_Z0], B[j, AX_Z0])
    inter = 0.0
    if ix > 0.0 and iy > 0.0 and iz > 0.0 and sa > 0.0 and sb > 0.0:
        inter = smaller(smaller(ix * iy * iz, sa), sb)
    if measure == INTERSECTION or measure == IOU or measure == COVERAGE:
        return finish(measure, inter, sa, sb, 0.0, 0.0, 0.0)
    if measure == DIOU:
        # Centre offsets from differences of like coordinates: antisymmetric exactly.
        dx = 0.5 * ((B[j, AX_X0] - A[i, AX_X0]) + (B[j, AX_X1] - A[i, AX_X1]))
        dy = 0.5 * ((B[j, AX_Y0] - A[i, AX_Y0]) + (B[j, AX_Y1] - A[i, AX_Y1]))
        cw = larger(A[i, AX_X1], B[j, AX_X1]) - smaller(A[i, AX_X0], B[j, AX_X0])
        ch = larger(A[i, AX_Y1], B[j, AX_Y1]) - smaller(A[i, AX_Y0], B[j, AX_Y0])
        d2 = dx * dx + dy * dy
        c2 = cw * cw + ch * ch
        if is3d:
            dz = 0.5 * ((B[j, AX_Z0] - A[i, AX_Z0]) + (B[j, AX_Z1] - A[i, AX_Z1]))
            cd = larger(A[i, AX_Z1], B[j, AX_Z1]) - smaller(A[i, AX_Z0], B[j, AX_Z0])
            d2 += dz * dz
            c2 += cd * cd
        return finish(measure, inter, sa, sb, 0.0, d2, c2)
    # GIOU: convex hull of both footprints (x span of the joint z interval in 3D).
    if inter > 0.0 and inter >= smaller(sa, sb):
        return finish(measure, inter, sa, sb, larger(sa, sb), 0.0, 0.0)
    if axis_less(A, i, B, j):
        hull = axis_hull(B, j, A, i, is3d, buf)
    else:
        hull = axis_hull(A, i, B, j, is3d, buf)
    return finish(measure, inter, sa, sb, hull, 0.0, 0.0)


@njit(**HELPER)
def axis_corners(R, r, ox, oy, xs, ys, at):
    x0 = R[r, AX_X0] - ox
    x1 = R[r, AX_X1] - ox
    y0 = R[r, AX_Y0] - oy
    y1 = R[r, AX_Y1] - oy
    xs[at] = x0
    ys[at] = y0
    xs[at + 1] = x1
    ys[at + 1] = y0
    xs[at + 2] = x1
    ys[at + 2] = y1
    xs[at + 3] = x0
    ys[at + 3] = y1


@njit(**HELPER)
def axis_hull(P, p, Q, q, is3d, buf):
    """Convex hull area of two axis-aligned boxes (times the joint z span in 3D)."""
    ox = P[p, AX_X0]
    oy = P[p, AX_Y0]
    xs = buf[0]
    ys = buf[1]
    axis_corners(P, p, ox, oy, xs, ys, np.int64(0))
    axis_corners(Q, q, ox, oy, xs, ys, np.int64(4))
    hull = hull_area(xs, ys, np.int64(8), buf[2], buf[3])
    if is3d:
        hull *= larger(P[p, AX_Z1], Q[q, AX_Z1]) - smaller(P[p, AX_Z0], Q[q, AX_Z0])
    return hull


# --------------------------------------------------------------------------------------
# rotated rectangles (rotated, upright footprints)
#
# Small helpers of the per-pair arithmetic are ``forceinline``: compiled once each, then
# inlined by LLVM into the loop that calls them, which therefore vectorises. Measured
# (``python bench/coldstart.py --profile``, first ``iou`` of 3 x 3 then 300 x 300 rotated
# boxes): numba-level ``inline="always"`` re-typed them inside every caller, 31 s; no
# inlining at all, 8.8 s to compile but the all-pairs loop no longer vectorised (1000 x
# 1000 IoU 8.7 -> 42 ms on one thread); ``forceinline``, 7.5 s and 8.8 ms.


@njit(forceinline=True, **HELPER)
def rect_load(R, i):
    """Row i of prepared rectangles (N, 16) as a tuple."""
    return (
        R[i, 0], R[i, 1], R[i, 2], R[i, 3], R[i, 4], R[i, 5], R[i, 6], R[i, 7],
        R[i, 8], R[i, 9], R[i, 10], R[i, 11], R[i, 12], R[i, 13], R[i, 14], R[i, 15],
    )  # fmt: skip


@njit(forceinline=True, **HELPER)
def rect_load_t(RT, j):
    """Column j of transposed prepared rectangles (16, M) as a tuple."""
    return (
        RT[0, j], RT[1, j], RT[2, j], RT[3, j], RT[4, j], RT[5, j], RT[6, j], RT[7, j],
        RT[8, j], RT[9, j], RT[10, j], RT[11, j], RT[12, j], RT[13, j], RT[14, j], RT[15, j],
    )  # fmt: skip


@njit(forceinline=True, **HELPER)
def rect_store_t(RT, j, t):
    """Write row tuple t into column j of transposed rows RT (16, M)."""
    RT[0, j], RT[1, j], RT[2, j], RT[3, j] = t[0], t[1], t[2], t[3]
    RT[4, j], RT[5, j], RT[6, j], RT[7, j] = t[4], t[5], t[6], t[7]
    RT[8, j], RT[9, j], RT[10, j], RT[11, j] = t[8], t[9], t[10], t[11]
    RT[12, j], RT[13, j], RT[14, j], RT[15, j] = t[12], t[13], t[14], t[15]


@njit(forceinline=True, **HELPER)
def pick(swap, a, b):
    """b if swap else a, element by element (selects, not a branch: loops vectorise)."""
    return (
        b[0] if swap else a[0], b[1] if swap else a[1], b[2] if swap else a[2],
        b[3] if swap else a[3], b[4] if swap else a[4], b[5] if swap else a[5],
        b[6] if swap else a[6], b[7] if swap else a[7], b[8] if swap else a[8],
        b[9] if swap else a[9], b[10] if swap else a[10], b[11] if swap else a[11],
        b[12] if swap else a[12], b[13] if swap else a[13], b[14] if swap else a[14],
        b[15] if swap else a[15],
    )  # fmt: skip


@njit(forceinline=True, **HELPER)
def rect_before(a, b):
    """True when box b sorts before box a: lexicographic on cx, cy, hw, hh, cos, sin, z0,
    z1 (2D rows all have z 0..1). Branch-free, so that loops over pairs vectorise."""
    lt = b[0] < a[0]
    eq = b[0] == a[0]
    lt = lt | (eq & (b[1] < a[1]))
    eq = eq & (b[1] == a[1])
    lt = lt | (eq & (b[2] < a[2]))
    eq = eq & (b[2] == a[2])
    lt = lt | (eq & (b[3] < a[3]))
    eq = eq & (b[3] == a[3])
    lt = lt | (eq & (b[4] < a[4]))
    eq = eq & (b[4] == a[4])
    lt = lt | (eq & (b[5] < a[5]))
    eq = eq & (b[5] == a[5])
    lt = lt | (eq & (b[11] < a[11]))
    eq = eq & (b[11] == a[11])
    return lt | (eq & (b[12] < a[12]))


@njit(forceinline=True, **HELPER)
def span_inside(x0, y0, rx, ry, hx, hy):
    """Length share of segment (x0, y0) + t d, t in [0, 1], inside |x| <= hx, |y| <= hy.

    ``rx, ry`` are 1/dx, 1/dy. Liang & Barsky's parametric clipping (1984), branch-free.
    """
    ta = (-hx - x0) * rx
    tb = (hx - x0) * rx
    tc = (-hy - y0) * ry
    td = (hy - y0) * ry
    lo = larger(0.0, larger(smaller(ta, tb), smaller(tc, td)))
    hi = smaller(1.0, smaller(larger(ta, tb), larger(tc, td)))
    return larger(hi - lo, 0.0)


# Below this |cos| or |sin| of the angle between two rectangles, edges are near parallel:
# where an edge of one crosses the other is then ill-conditioned, and the boundary sum below
# could count a stretch of a shared edge twice, so such pairs are clipped polygon-wise.
NEAR_PARALLEL = 1.0 / 64.0


@njit(forceinline=True, **HELPER)
def rect_intersection(a, b):
    """Intersection size of boxes a and b (row tuples), in canonical order: (size, redo).

    The boxes are taken in canonical order (:func:`rect_before`), p first, and the area is
    computed in p's own frame, where p is the axis-aligned rectangle [-hw, hw] x [-hh, hh].
    Per-box cos/sin and the angle-difference identities: no trigonometry per pair.
    Separating-axis tests on both boxes' axes give exact 0 for disjoint pairs, exact sizes
    for nested ones. Otherwise the area is the boundary integral (1/2) * closed integral of
    (x dy - y dx) over the intersection's boundary: the parts of q's edges inside p and of
    p's edges inside q, each found by parametric clipping against the other box in that
    box's own frame. 2D rows have z 0..1, so the z overlap is exactly 1 and 2D and 3D boxes
    share this code (and the vectorised loop) without a flag.

    Branch-free, one function (each compiled function costs compile time of its own);
    ``redo`` flags near-parallel pairs, which the caller recomputes with :func:`rect_slow`.
    """
    swap = rect_before(a, b)
    p = pick(swap, a, b)
    q = pick(swap, b, a)
    sa = p[R_SIZE]
    sb = q[R_SIZE]
    dz = smaller(p[R_Z1], q[R_Z1]) - larger(p[R_Z0], q[R_Z0])
    # Extents that meet exactly mean an exact 0 (boxes sharing an edge in absolute
    # coordinates), unless an extent has collapsed to a point: a side below the rounding of
    # the centre's coordinates (1e-20 at x = 1) does that, and the box would be disjoint
    # from itself. Those pairs are left to the exact tests below.
    wide = (p[R_XMAX] > p[R_XMIN]) & (q[R_XMAX] > q[R_XMIN])
    high = (p[R_YMAX] > p[R_YMIN]) & (q[R_YMAX] > q[R_YMIN])
    separate = wide & ((p[R_XMAX] <= q[R_XMIN]) | (q[R_XMAX] <= p[R_XMIN]))
    separate = separate | (high & ((p[R_YMAX] <= q[R_YMIN]) | (q[R_YMAX] <= p[R_YMIN])))
    separate = separate | (sa <= 0.0) | (sb <= 0.0) | (dz <= 0.0)
    phw = p[R_HW]
    phh = p[R_HH]
    qhw = q[R_HW]
    qhh = q[R_HH]
    pc = p[R_C]
    ps = p[R_S]
    qc = q[R_C]
    qs = q[R_S]
    dx = q[R_CX] - p[R_CX]
    dy = q[R_CY] - p[R_CY]
    px = pc * dx + ps * dy  # q's centre in p's frame
    py = pc * dy - ps * dx
    same = (pc == qc) & (ps == qs)
    c = 1.0 if same else qc * pc + qs * ps  # cos, sin of the angle from p to q
    s = 0.0 if same else qs * pc - qc * ps
    ux = c * qhw  # q's half axes in p's frame
    uy = s * qhw
    vx = -s * qhh
    vy = c * qhh
    ex = abs(ux) + abs(vx)  # q's half extents along p's axes
    ey = abs(uy) + abs(vy)
    apx = abs(px)
    apy = abs(py)
    mx = -(c * px + s * py)  # p's centre in q's frame
    my = s * px - c * py
    fx = abs(c) * phw + abs(s) * phh  # p's half extents along q's axes
    fy = abs(s) * phw + abs(c) * phh
    amx = abs(mx)
    amy = abs(my)
    disjoint = (apx - ex >= phw) | (apy - ey >= phh) | (amx - fx >= qhw) | (amy - fy >= qhh)
    q_in_p = (apx + ex <= phw) & (apy + ey <= phh)
    p_in_q = (amx + fx <= qhw) & (amy + fy <= qhh)
    ic = 0.5 / c
    is_ = 0.5 / s
    # q's corners in p's frame; its edges run along 2u, 2v, -2u, -2v. Each edge k -> k + d
    # adds t_inside * cross(k, d) / 2 to the area.
    x0 = px - ux - vx
    y0 = py - uy - vy
    x1 = px + ux - vx
    y1 = py + uy - vy
    x2 = px + ux + vx
    y2 = py + uy + vy
    x3 = px - ux + vx
    y3 = py - uy + vy
    rux = ic * q[R_IHW]
    ruy = is_ * q[R_IHW]
    rvx = -is_ * q[R_IHH]
    rvy = ic * q[R_IHH]
    sq = span_inside(x0, y0, rux, ruy, phw, phh) * (x0 * uy - y0 * ux)
    sq += span_inside(x1, y1, rvx, rvy, phw, phh) * (x1 * vy - y1 * vx)
    sq -= span_inside(x2, y2, -rux, -ruy, phw, phh) * (x2 * uy - y2 * ux)
    sq -= span_inside(x3, y3, -rvx, -rvy, phw, phh) * (x3 * vy - y3 * vx)
    # p's corners in q's frame; measured in p's frame each edge of p adds t_inside * 2 hw hh.
    ax = c * phw
    ay = -s * phw
    bx = s * phh
    by = c * phh
    rax = ic * p[R_IHW]
    ray = -is_ * p[R_IHW]
    rbx = is_ * p[R_IHH]
    rby = ic * p[R_IHH]
    x0 = mx - ax - bx
    y0 = my - ay - by
    x1 = mx + ax - bx
    y1 = my + ay - by
    x2 = mx + ax + bx
    y2 = my + ay + by
    x3 = mx - ax + bx
    y3 = my - ay + by
    sp = span_inside(x0, y0, rax, ray, qhw, qhh)
    sp += span_inside(x1, y1, rbx, rby, qhw, qhh)
    sp += span_inside(x2, y2, -rax, -ray, qhw, qhh)
    sp += span_inside(x3, y3, -rbx, -rby, qhw, qhh)
    area = smaller(smaller(larger(sq + phw * phh * sp, 0.0), p[R_AREA]), q[R_AREA])
    area = q[R_AREA] if q_in_p else area
    area = p[R_AREA] if p_in_q else area
    area = 0.0 if disjoint else area
    near = (abs(c) < NEAR_PARALLEL) | (abs(s) < NEAR_PARALLEL)
    redo = near & ~(disjoint | q_in_p | p_in_q)
    inter = 0.0 if separate else smaller(smaller(area * dz, sa), sb)
    return inter, redo & ~separate


@njit(**HELPER)
def rect_slow(a, b, buf):
    """Intersection size of rectangles a and b (row tuples) by polygon clipping: the
    near-parallel path (one function with the clipping: each costs compile time)."""
    if rect_before(a, b):
        a, b = b, a
    phw = a[R_HW]
    phh = a[R_HH]
    pc = a[R_C]
    ps = a[R_S]
    qc = b[R_C]
    qs = b[R_S]
    dx = b[R_CX] - a[R_CX]
    dy = b[R_CY] - a[R_CY]
    px = pc * dx + ps * dy
    py = pc * dy - ps * dx
    same = (pc == qc) & (ps == qs)
    c = 1.0 if same else qc * pc + qs * ps
    s = 0.0 if same else qs * pc - qc * ps
    ux = c * b[R_HW]
    uy = s * b[R_HW]
    vx = -s * b[R_HH]
    vy = c * b[R_HH]
    # Clip q (its corners counter-clockwise) to p = [-phw, phw] x [-phh, phh], one side at
    # a time (Sutherland & Hodgman, 1974).
    x1 = buf[0]
    y1 = buf[1]
    x2 = buf[2]
    y2 = buf[3]
    x1[0] = px - ux - vx
    y1[0] = py - uy - vy
    x1[1] = px + ux - vx
    y1[1] = py + uy - vy
    x1[2] = px + ux + vx
    y1[2] = py + uy + vy
    x1[3] = px - ux + vx
    y1[3] = py - uy + vy
    n = clip_axis(x1, y1, np.int64(4), x2, y2, 1.0, phw)
    n = clip_axis(x2, y2, n, x1, y1, -1.0, phw)
    n = clip_axis(y1, x1, n, y2, x2, 1.0, phh)
    n = clip_axis(y2, x2, n, y1, x1, -1.0, phh)
    area = smaller(smaller(larger(shoelace(x1, y1, n), 0.0), a[R_AREA]), b[R_AREA])
    dz = smaller(a[R_Z1], b[R_Z1]) - larger(a[R_Z0], b[R_Z0])
    return smaller(smaller(area * dz, a[R_SIZE]), b[R_SIZE])


@njit(**HELPER)
def rect_hull(a, b, buf):
    """Area of the convex hull of rectangles a and b (row tuples), in a's frame."""
    phw = a[R_HW]
    phh = a[R_HH]
    pc = a[R_C]
    ps = a[R_S]
    qc = b[R_C]
    qs = b[R_S]
    dx = b[R_CX] - a[R_CX]
    dy = b[R_CY] - a[R_CY]
    px = pc * dx + ps * dy
    py = pc * dy - ps * dx
    same = (pc == qc) & (ps == qs)
    c = 1.0 if same else qc * pc + qs * ps
    s = 0.0 if same else qs * pc - qc * ps
    ux = c * b[R_HW]
    uy = s * b[R_HW]
    vx = -s * b[R_HH]
    vy = c * b[R_HH]
    xs = buf[0]
    ys = buf[1]
    xs[0] = -phw
    ys[0] = -phh
    xs[1] = phw
    ys[1] = -phh
    xs[2] = phw
    ys[2] = phh
    xs[3] = -phw
    ys[3] = phh
    xs[4] = px - ux - vx
    ys[4] = py - uy - vy
    xs[5] = px + ux - vx
    ys[5] = py + uy - vy
    xs[6] = px + ux + vx
    ys[6] = py + uy + vy
    xs[7] = px - ux + vx
    ys[7] = py - uy + vy
    return hull_area(xs, ys, np.int64(8), buf[2], buf[3])


@njit(**HELPER)
def rect_inter_value(a, b, buf):
    """Intersection size of rectangles a and b (row tuples): the vectorisable arithmetic,
    or polygon clipping for the pairs it flags. The IoU-only paths (hard suppression) call
    this rather than :func:`rect_measure`, so they compile no hull code."""
    inter, redo = rect_intersection(a, b)
    if redo:
        inter = rect_slow(a, b, buf)
    return inter


@njit(**HELPER)
def rect_measure(a, b, measure, is3d, buf):
    """The measure of rectangles a and b (row tuples): every path ends here or, for IoU,
    intersection and coverage, in the same arithmetic in :func:`rect_block`.

    Each pair is computed in canonical order (:func:`rect_before`), so the value does not
    depend on which box came first; DIoU's centre distance and enclosing box are taken
    relative to the first box's centre, so map coordinates near 1e7 lose nothing.
    """
    inter = rect_inter_value(a, b, buf)
    sa = a[R_SIZE]
    sb = b[R_SIZE]
    if measure == INTERSECTION or measure == IOU or measure == COVERAGE:
        return finish(measure, inter, sa, sb, 0.0, 0.0, 0.0)
    swap = rect_before(a, b)
    p = pick(swap, a, b)
    q = pick(swap, b, a)
    if measure == DIOU:
        dx = q[R_CX] - p[R_CX]
        dy = q[R_CY] - p[R_CY]
        pex = abs(p[R_C]) * p[R_HW] + abs(p[R_S]) * p[R_HH]  # half extents, no offsets
        pey = abs(p[R_S]) * p[R_HW] + abs(p[R_C]) * p[R_HH]
        qex = abs(q[R_C]) * q[R_HW] + abs(q[R_S]) * q[R_HH]
        qey = abs(q[R_S]) * q[R_HW] + abs(q[R_C]) * q[R_HH]
        cw = larger(pex, dx + qex) - smaller(-pex, dx - qex)
        ch = larger(pey, dy + qey) - smaller(-pey, dy - qey)
        d2 = dx * dx + dy * dy
        c2 = cw * cw + ch * ch
        if is3d:
            ddz = 0.5 * ((q[R_Z0] - p[R_Z0]) + (q[R_Z1] - p[R_Z1]))
            cd = larger(p[R_Z1], q[R_Z1]) - smaller(p[R_Z0], q[R_Z0])
            d2 += ddz * ddz
            c2 += cd * cd
        return finish(measure, inter, sa, sb, 0.0, d2, c2)
    # GIOU: hull of the footprints times the joint z span (exactly 1 for 2D rows).
    if inter > 0.0 and inter >= smaller(sa, sb):
        return finish(measure, inter, sa, sb, larger(sa, sb), 0.0, 0.0)
    hull = rect_hull(p, q, buf) * (larger(p[R_Z1], q[R_Z1]) - smaller(p[R_Z0], q[R_Z0]))
    return finish(measure, inter, sa, sb, hull, 0.0, 0.0)


@njit(forceinline=True, **HELPER)
def _overlap(lo0, hi0, lo1, hi1):
    return larger(smaller(hi0, hi1) - larger(lo0, lo1), 0.0)


@njit(**ENTRY)
def rect_iou_verdict(A, i, B, j, thr):
    """Whether IoU(A[i], B[j]) > thr for prepared rectangles, from cheap bounds: 1 (above),
    0 (not above) or -1 (undecided: compute it). For hard suppression, which needs only
    the verdict.

    In A[i]'s frame (p = [-hw, hw] x [-hh, hh]; q the other box) the intersection lies
    within p and q's bounding box there (upper bound), and contains the intersection of p
    with the largest rectangle aligned with p, centred on q's centre, that the two
    constraints |c| u + |s| v <= q.hw, |s| u + |c| v <= q.hh put inside q (c, s: cosine
    and sine of the angle between them; lower bound). With union = sa + sb - inter, a
    bound on inter bounds the IoU. Margins of 1e-9 (relative) keep every verdict the
    one the exact value gives: rounding of either is ~1e-15.
    """
    pcx, pcy, phw, phh, pc, ps = (
        A[i, R_CX],
        A[i, R_CY],
        A[i, R_HW],
        A[i, R_HH],
        A[i, R_C],
        A[i, R_S],
    )
    qcx, qcy, qhw, qhh, qc, qs = (
        B[j, R_CX],
        B[j, R_CY],
        B[j, R_HW],
        B[j, R_HH],
        B[j, R_C],
        B[j, R_S],
    )
    sa = A[i, R_SIZE]
    sb = B[j, R_SIZE]
    if not (sa > 0.0 and sb > 0.0):
        return -1
    dz = smaller(A[i, R_Z1], B[j, R_Z1]) - larger(A[i, R_Z0], B[j, R_Z0])  # 1 for 2D rows
    if not dz > 0.0:
        return -1
    dx = qcx - pcx
    dy = qcy - pcy
    px = pc * dx + ps * dy
    py = pc * dy - ps * dx
    c = abs(qc * pc + qs * ps)
    s = abs(qs * pc - qc * ps)
    ex = c * qhw + s * qhh
    ey = s * qhw + c * qhh
    up = _overlap(-phw, phw, px - ex, px + ex) * _overlap(-phh, phh, py - ey, py + ey) * dz
    up = up * (1.0 + 1e-9)
    if up <= thr * (sa + sb - up):
        return 0
    det = c * c - s * s
    if abs(det) < 0.25:  # near 45 degrees: no useful inscribed rectangle
        return -1
    u = (c * qhw - s * qhh) / det
    v = (c * qhh - s * qhw) / det
    if not (u > 0.0 and v > 0.0):
        return -1
    lo = _overlap(-phw, phw, px - u, px + u) * _overlap(-phh, phh, py - v, py + v) * dz
    lo = lo * (1.0 - 1e-9)
    if lo > thr * (sa + sb - lo):
        return 1
    return -1


# The vectorised loops index from 0 into whole arrays (the callers pass slices, which
# numba keeps C-contiguous): with an offset (``q0 + k``) the index could be negative as far
# as LLVM knows, and the loop lost its vector loads (1000 x 1000 rotated IoU, one thread:
# 16 ms against 8.7 ms).


@njit(**HELPER)
def rect_inter_columns(PT, QT, out):
    """out[k] = intersection of column k of PT with column k of QT (prepared rows,
    transposed), or -1 for a pair to recompute with :func:`rect_measure`. A vectorised
    loop (the flag rides in the value: no branch)."""
    for k in range(out.shape[0]):
        inter, again = rect_intersection(rect_load_t(PT, k), rect_load_t(QT, k))
        out[k] = -1.0 if again else inter


# Pairs per block of the vectorised loop: two (16, 264) scratch arrays (68 KB), small
# enough to come from the allocator's free lists rather than fresh pages.
RECT_BLOCK = 256


# IoU, intersection and coverage (the "fast" measures) and GIoU, DIoU (the "full" ones) run
# in separate compiled bodies, so that a first IoU compiles no hull code: measured, the
# hull (GIoU) and distance (DIoU) code was over a second of the first call's compiling.


@njit(**HELPER)
def rect_block(PT, QT, measure, is3d, out, buf):
    """out[k] = a fast measure of column k of PT with column k of QT: the vectorised loop,
    its flagged (near-parallel) pairs redone by clipping. Bit for bit :func:`rect_measure`."""
    rect_inter_columns(PT, QT, out)
    for k in range(out.shape[0]):
        v = out[k]
        if v < 0.0:
            v = rect_inter_value(rect_load_t(PT, k), rect_load_t(QT, k), buf)
        out[k] = finish(measure, v, PT[R_SIZE, k], QT[R_SIZE, k], 0.0, 0.0, 0.0)


@njit(**HELPER)
def rect_block_full(PT, QT, measure, is3d, out, buf):
    """out[k] = any measure (GIoU, DIoU) of column k of PT with column k of QT."""
    for k in range(out.shape[0]):
        out[k] = rect_measure(rect_load_t(PT, k), rect_load_t(QT, k), measure, is3d, buf)


# --------------------------------------------------------------------------------------
# convex polygons


@njit(**HELPER)
def poly_less(VA, i, VB, j):
    """True when polygon VB[j] sorts before VA[i] (vertex count, then vertices)."""
    ka = VA.shape[1]
    kb = VB.shape[1]
    if ka != kb:
        return kb < ka
    for k in range(ka):
        for d in range(2):
            if VB[j, k, d] != VA[i, k, d]:
                return VB[j, k, d] < VA[i, k, d]
    return False


@njit(**HELPER)
def poly_same(VA, i, VB, j):
    if VA.shape[1] != VB.shape[1]:
        return False
    for k in range(VA.shape[1]):
        if VA[i, k, 0] != VB[j, k, 0] or VA[i, k, 1] != VB[j, k, 1]:
            return False
    return True


@njit(**HELPER)
def poly_inter(VP, p, VQ, q, buf):
    """Intersection area of convex polygons VP[p] and VQ[q], relative to VP[p]'s vertex 0."""
    kp = VP.shape[1]
    kq = VQ.shape[1]
    ox = VP[p, 0, 0]
    oy = VP[p, 0, 1]
    cx = buf[0]
    cy = buf[1]
    for k in range(kp):
        cx[k] = VP[p, k, 0] - ox
        cy[k] = VP[p, k, 1] - oy
    x1 = buf[2]
    y1 = buf[3]
    x2 = buf[4]
    y2 = buf[5]
    for k in range(kq):
        x1[k] = VQ[q, k, 0] - ox
        y1[k] = VQ[q, k, 1] - oy
    n = kq
    for k in range(kp):
        kn = k + 1 if k + 1 < kp else 0
        n = clip_line(x1, y1, n, x2, y2, cx[k], cy[k], cx[kn], cy[kn])
        x1, x2 = x2, x1
        y1, y2 = y2, y1
        if n == 0:
            return 0.0
    return larger(shoelace(x1, y1, n), 0.0)


@njit(**HELPER)
def poly_hull(VP, p, VQ, q, buf):
    kp = VP.shape[1]
    kq = VQ.shape[1]
    ox = VP[p, 0, 0]
    oy = VP[p, 0, 1]
    xs = buf[0]
    ys = buf[1]
    for k in range(kp):
        xs[k] = VP[p, k, 0] - ox
        ys[k] = VP[p, k, 1] - oy
    for k in range(kq):
        xs[kp + k] = VQ[q, k, 0] - ox
        ys[kp + k] = VQ[q, k, 1] - oy
    return hull_area(xs, ys, kp + kq, buf[2], buf[3])


@njit(**HELPER)
def poly_pair(VA, A, i, VB, B, j, measure, buf):
    """IoU, intersection or coverage of polygons VA[i] and VB[j] (GIoU and DIoU:
    :func:`poly_pair_full`, so that a first IoU compiles no hull code)."""
    sa = A[i, P_AREA]
    sb = B[j, P_AREA]
    separate = (
        A[i, P_XMAX] <= B[j, P_XMIN]
        or B[j, P_XMAX] <= A[i, P_XMIN]
        or A[i, P_YMAX] <= B[j, P_YMIN]
        or B[j, P_YMAX] <= A[i, P_YMIN]
    )
    inter = 0.0
    if not separate and sa > 0.0 and sb > 0.0:
        if poly_same(VA, i, VB, j):
            inter = sa
        elif poly_less(VA, i, VB, j):
            inter = smaller(smaller(poly_inter(VB, j, VA, i, buf), sa), sb)
        else:
            inter = smaller(smaller(poly_inter(VA, i, VB, j, buf), sa), sb)
    return finish(measure, inter, sa, sb, 0.0, 0.0, 0.0)


@njit(**HELPER)
def poly_pair_full(VA, A, i, VB, B, j, measure, buf):
    """GIoU or DIoU of polygons VA[i] and VB[j]."""
    sa = A[i, P_AREA]
    sb = B[j, P_AREA]
    inter = poly_pair(VA, A, i, VB, B, j, np.int64(INTERSECTION), buf)
    if measure == DIOU:
        # centroids relative to each polygon's vertex 0: no loss at map offsets near 1e7
        dx = (VB[j, 0, 0] - VA[i, 0, 0]) + (B[j, P_GX] - A[i, P_GX])
        dy = (VB[j, 0, 1] - VA[i, 0, 1]) + (B[j, P_GY] - A[i, P_GY])
        cw = larger(A[i, P_XMAX], B[j, P_XMAX]) - smaller(A[i, P_XMIN], B[j, P_XMIN])
        ch = larger(A[i, P_YMAX], B[j, P_YMAX]) - smaller(A[i, P_YMIN], B[j, P_YMIN])
        return finish(measure, inter, sa, sb, 0.0, dx * dx + dy * dy, cw * cw + ch * ch)
    # identical polygons have inter == sa == sb > 0: no hull needed
    if inter > 0.0 and inter >= smaller(sa, sb):
        return finish(measure, inter, sa, sb, larger(sa, sb), 0.0, 0.0)
    if poly_less(VA, i, VB, j):
        hull = poly_hull(VB, j, VA, i, buf)
    else:
        hull = poly_hull(VA, i, VB, j, buf)
    return finish(measure, inter, sa, sb, hull, 0.0, 0.0)


# --------------------------------------------------------------------------------------
# bodies: one per job and kind, over rows lo..hi-1 (see obbiou._kernels.threads). Matrices
# are written flat, row i at out[i * m : (i + 1) * m].


@njit(**ENTRY)
def axis_matrix_rows(A, B, measure, is3d, out, lo, hi):
    """Rows lo..hi-1 of the all-pairs matrix of prepared axis boxes A with B."""
    m = B.shape[0]
    buf = np.empty((4, RECT_SCRATCH))
    for i in range(lo, hi):
        row = out[i * m : (i + 1) * m]
        for j in range(m):
            row[j] = axis_pair(A, i, B, j, measure, is3d, buf)


@njit(**ENTRY)
def axis_list(A, B, first, second, measure, is3d, out, lo, hi):
    """out[k] = the measure of (A[first[k]], B[second[k]]) for k in lo..hi-1."""
    buf = np.empty((4, RECT_SCRATCH))
    for k in range(lo, hi):
        out[k] = axis_pair(A, first[k], B, second[k], measure, is3d, buf)


@njit(inline="always")
def rect_list_body(A, B, first, second, measure, is3d, out, lo, hi, block):
    # Rows of the scratch blocks are padded off a multiple of 4096 bytes apart: sixteen
    # streams exactly 4 KiB apart would fight over the same L1 cache sets.
    PT = np.empty((RECT_COLUMNS, RECT_BLOCK + 8))
    QT = np.empty((RECT_COLUMNS, RECT_BLOCK + 8))
    buf = np.empty((4, RECT_SCRATCH))
    for s in range(lo, hi, RECT_BLOCK):
        n = min(RECT_BLOCK, hi - s)
        for k in range(n):
            rect_store_t(PT, k, rect_load(A, first[s + k]))
            rect_store_t(QT, k, rect_load(B, second[s + k]))
        block(PT, QT, measure, is3d, out[s : s + n], buf)


@njit(inline="always")
def _rect_elementwise(Da, la, Db, lb, measure, is3d, out, lo, hi, block):
    PT = np.empty((RECT_COLUMNS, RECT_BLOCK + 8))
    QT = np.empty((RECT_COLUMNS, RECT_BLOCK + 8))
    buf = np.empty((4, RECT_SCRATCH))
    for s in range(lo, hi, RECT_BLOCK):
        n = min(RECT_BLOCK, hi - s)
        for k in range(n):
            rect_store_t(PT, k, rect_tuple(Da, s + k, la))
            rect_store_t(QT, k, rect_tuple(Db, s + k, lb))
        block(PT, QT, measure, is3d, out[s : s + n], buf)


# The bodies of the three jobs, each for the fast and the full measures (the generic list
# and elementwise bodies above are written once; numba inlines them, so each of these is a
# plain cached kernel). Matrices: rows lo..hi-1 of A with B given as its transposed rows
# BT (16, >= m); the fast matrix body flags near-parallel pairs for a second body.
# Lists: out[k] for the pairs (A[first[k]], B[second[k]]), k in lo..hi-1, gathered block by
# block into columns. Elementwise: box k of a with box k of b straight from the box data
# (layouts la, lb), no (N, 16) arrays.


@njit(**ENTRY)
def rect_matrix_rows(A, BT, m, measure, out, redo, lo, hi):
    """Rows lo..hi-1 of a fast measure's matrix; near-parallel pairs are left at -1 and
    counted in ``redo[i]``, for :func:`rect_matrix_redo` (only called when there are
    any, so that a first call on ordinary boxes compiles no clipping code)."""
    for i in range(lo, hi):
        a = rect_load(A, i)
        row = out[i * m : (i + 1) * m]
        for j in range(m):  # the vectorised loop: the flag rides in the value
            inter, again = rect_intersection(a, rect_load_t(BT, j))
            row[j] = -1.0 if again else inter
        flagged = 0
        for j in range(m):
            v = row[j]
            flagged += v < 0.0
            row[j] = v if v < 0.0 else finish(measure, v, a[R_SIZE], BT[R_SIZE, j], 0.0, 0.0, 0.0)
        redo[i] = flagged


@njit(**ENTRY)
def rect_matrix_redo(A, BT, m, measure, out, redo, lo, hi):
    """The pairs of rows lo..hi-1 that :func:`rect_matrix_rows` left at -1, by clipping:
    what :func:`rect_inter_value` does with a flagged pair, so bit for bit
    :func:`rect_measure`."""
    buf = np.empty((4, RECT_SCRATCH))
    for i in range(lo, hi):
        if redo[i] == 0:
            continue
        a = rect_load(A, i)
        row = out[i * m : (i + 1) * m]
        for j in range(m):
            if row[j] < 0.0:
                inter = rect_slow(a, rect_load_t(BT, j), buf)
                row[j] = finish(measure, inter, a[R_SIZE], BT[R_SIZE, j], 0.0, 0.0, 0.0)


@njit(**ENTRY)
def rect_matrix_rows_full(A, BT, m, measure, is3d, out, lo, hi):
    """Rows lo..hi-1 of the matrix of GIoU or DIoU."""
    buf = np.empty((4, RECT_SCRATCH))
    for i in range(lo, hi):
        a = rect_load(A, i)
        row = out[i * m : (i + 1) * m]
        for j in range(m):
            row[j] = rect_measure(a, rect_load_t(BT, j), measure, is3d, buf)


@njit(**ENTRY)
def rect_list(A, B, first, second, measure, is3d, out, lo, hi):
    rect_list_body(A, B, first, second, measure, is3d, out, lo, hi, rect_block)


@njit(**ENTRY)
def rect_list_full(A, B, first, second, measure, is3d, out, lo, hi):
    rect_list_body(A, B, first, second, measure, is3d, out, lo, hi, rect_block_full)


@njit(**ENTRY)
def rect_elementwise(Da, la, Db, lb, measure, is3d, out, lo, hi):
    _rect_elementwise(Da, la, Db, lb, measure, is3d, out, lo, hi, rect_block)


@njit(**ENTRY)
def rect_elementwise_full(Da, la, Db, lb, measure, is3d, out, lo, hi):
    _rect_elementwise(Da, la, Db, lb, measure, is3d, out, lo, hi, rect_block_full)


def rect_body(job: str, measure: int):
    """The rectangle body of ``job`` ("list", "elementwise") for a measure code (matrices:
    :func:`rect_matrix_rows` and :func:`rect_matrix_redo`, or :func:`rect_matrix_rows_full`)."""
    full = measure in (GIOU, DIOU)
    return {
        "list": (rect_list, rect_list_full),
        "elementwise": (rect_elementwise, rect_elementwise_full),
    }[job][full]


@njit(inline="always")
def _poly_matrix_rows(VA, A, VB, B, measure, out, lo, hi, pair_fn):
    m = B.shape[0]
    buf = np.empty((6, 2 * (VA.shape[1] + VB.shape[1]) + 4))
    for i in range(lo, hi):
        row = out[i * m : (i + 1) * m]
        for j in range(m):
            row[j] = pair_fn(VA, A, i, VB, B, j, measure, buf)


@njit(inline="always")
def poly_list_body(VA, A, VB, B, first, second, measure, out, lo, hi, pair_fn):
    buf = np.empty((6, 2 * (VA.shape[1] + VB.shape[1]) + 4))
    for k in range(lo, hi):
        out[k] = pair_fn(VA, A, first[k], VB, B, second[k], measure, buf)


# Polygon bodies, fast (IoU, intersection, coverage) and full (GIoU, DIoU) as for
# rectangles. Matrices: rows lo..hi-1 of polygons VA (rows A) with VB (rows B). Lists:
# out[k] for the pairs (VA[first[k]], VB[second[k]]), k in lo..hi-1.


@njit(**ENTRY)
def poly_matrix_rows(VA, A, VB, B, measure, out, lo, hi):
    _poly_matrix_rows(VA, A, VB, B, measure, out, lo, hi, poly_pair)


@njit(**ENTRY)
def poly_matrix_rows_full(VA, A, VB, B, measure, out, lo, hi):
    _poly_matrix_rows(VA, A, VB, B, measure, out, lo, hi, poly_pair_full)


@njit(**ENTRY)
def poly_list(VA, A, VB, B, first, second, measure, out, lo, hi):
    poly_list_body(VA, A, VB, B, first, second, measure, out, lo, hi, poly_pair)


@njit(**ENTRY)
def poly_list_full(VA, A, VB, B, first, second, measure, out, lo, hi):
    poly_list_body(VA, A, VB, B, first, second, measure, out, lo, hi, poly_pair_full)


def poly_body(job: str, measure: int):
    """The polygon body of ``job`` ("matrix", "list") for a measure code."""
    full = measure in (GIOU, DIOU)
    return {
        "matrix": (poly_matrix_rows, poly_matrix_rows_full),
        "list": (poly_list, poly_list_full),
    }[job][full]
