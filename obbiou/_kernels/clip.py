"""Clipping and area primitives for convex polygons held in caller-owned scratch buffers.

Every function works on coordinates that the caller has already moved to a local origin
(so that map-metre offsets lose nothing) and writes only into the buffers it is given: no
heap allocation happens here.
"""

from __future__ import annotations

from numba import njit

from obbiou._kernels.minmax import larger
from obbiou._kernels.options import HELPER


@njit(**HELPER)
def clip_axis(us, vs, n, out_u, out_v, sign, bound):
    """Keep the part of polygon (us, vs)[:n] where ``sign * u <= bound``; return its size.

    One Sutherland-Hodgman step (Sutherland & Hodgman, CACM 1974) against an axis-parallel
    line: ``u`` is the coordinate compared with the constant, ``v`` the other one. Points on
    the line get ``u = sign * bound`` exactly. ``sign`` is +1.0 or -1.0.
    """
    m = 0
    if n == 0:
        return 0
    pu = us[n - 1]
    pv = vs[n - 1]
    p_in = sign * pu <= bound
    edge = sign * bound
    for k in range(n):
        qu = us[k]
        qv = vs[k]
        q_in = sign * qu <= bound
        if q_in != p_in:
            t = (edge - pu) / (qu - pu)
            out_u[m] = edge
            out_v[m] = pv + t * (qv - pv)
            m += 1
        if q_in:
            out_u[m] = qu
            out_v[m] = qv
            m += 1
        pu = qu
        pv = qv
        p_in = q_in
    return m


@njit(**HELPER)
def clip_line(xs, ys, n, out_x, out_y, ax, ay, bx, by):
    """Keep the part of polygon (xs, ys)[:n] left of the directed line a -> b; return size.

    One Sutherland-Hodgman step against a general line. A zero-length edge (a == b) keeps
    everything, so clip polygons with repeated vertices are handled.
    """
    if n == 0:
        return 0
    ex = bx - ax
    ey = by - ay
    m = 0
    px = xs[n - 1]
    py = ys[n - 1]
    ps = ex * (py - ay) - ey * (px - ax)
    for k in range(n):
        qx = xs[k]
        qy = ys[k]
        qs = ex * (qy - ay) - ey * (qx - ax)
        if (qs >= 0.0) != (ps >= 0.0):
            t = ps / (ps - qs)
            out_x[m] = px + t * (qx - px)
            out_y[m] = py + t * (qy - py)
            m += 1
        if qs >= 0.0:
            out_x[m] = qx
            out_y[m] = qy
            m += 1
        px = qx
        py = qy
        ps = qs
    return m


@njit(**HELPER)
def shoelace(xs, ys, n):
    """Signed area of polygon (xs, ys)[:n] (positive when counter-clockwise)."""
    if n < 3:
        return 0.0
    s = 0.0
    px = xs[n - 1]
    py = ys[n - 1]
    for k in range(n):
        qx = xs[k]
        qy = ys[k]
        s += px * qy - qx * py
        px = qx
        py = qy
    return 0.5 * s


@njit(**HELPER)
def hull_area(xs, ys, n, hx, hy):
    """Area of the convex hull of the points (xs, ys)[:n] (Andrew's monotone chain, 1979).

    Sorts the points in place (insertion sort: n is small) and uses ``hx, hy`` (size >= n + 1)
    for the hull.
    """
    for i in range(1, n):
        x = xs[i]
        y = ys[i]
        j = i - 1
        while j >= 0 and (xs[j] > x or (xs[j] == x and ys[j] > y)):
            xs[j + 1] = xs[j]
            ys[j + 1] = ys[j]
            j -= 1
        xs[j + 1] = x
        ys[j + 1] = y
    m = 0
    for i in range(n):  # lower hull
        while m >= 2 and (
            (hx[m - 1] - hx[m - 2]) * (ys[i] - hy[m - 2])
            - (hy[m - 1] - hy[m - 2]) * (xs[i] - hx[m - 2])
            <= 0.0
        ):
            m -= 1
        hx[m] = xs[i]
        hy[m] = ys[i]
        m += 1
    low = m + 1
    for i in range(n - 2, -1, -1):  # upper hull
        while m >= low and (
            (hx[m - 1] - hx[m - 2]) * (ys[i] - hy[m - 2])
            - (hy[m - 1] - hy[m - 2]) * (xs[i] - hx[m - 2])
            <= 0.0
        ):
            m -= 1
        hx[m] = xs[i]
        hy[m] = ys[i]
        m += 1
    # The last point repeats the first one.
    return larger(shoelace(hx, hy, m - 1), 0.0)
