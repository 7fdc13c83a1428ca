"""Minimum-area enclosing rectangles: convex hull (Andrew's monotone chain) and rotating
calipers (Freeman & Shapira, CACM 1975: the best rectangle has a side on a hull edge).

No validation here; ``obbiou.boxes.fit_rotated`` checks the input and canonicalises the output.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from obbiou._kernels import threads

# A later hull edge replaces the best rectangle only if smaller by more than this relative
# amount, so rectangles equal to rounding go to the edge met first (a stable tie rule).
TIE = 1e-12


@njit(cache=True)
def _turn(ox, oy, ax, ay, bx, by):
    return (ax - ox) * (by - oy) - (ay - oy) * (bx - ox)


@njit(cache=True)
def _hull(x, y, order, hx, hy):
    """Counter-clockwise strictly convex hull of the points ``order`` sorts by (x, y).

    Writes the vertices to ``hx, hy`` (room for ``2 * len(x)``), starting at the leftmost-
    then-lowest point; collinear and repeated points are dropped. Returns the count: 1 for a
    single distinct point, 2 for collinear points (the two ends).
    """
    n = order.shape[0]
    k = 0
    for t in range(n):
        i = order[t]
        while k >= 2 and _turn(hx[k - 2], hy[k - 2], hx[k - 1], hy[k - 1], x[i], y[i]) <= 0.0:
            k -= 1
        hx[k] = x[i]
        hy[k] = y[i]
        k += 1
    lower = k + 1
    for t in range(n - 2, -1, -1):
        i = order[t]
        while k >= lower and _turn(hx[k - 2], hy[k - 2], hx[k - 1], hy[k - 1], x[i], y[i]) <= 0.0:
            k -= 1
        hx[k] = x[i]
        hy[k] = y[i]
        k += 1
    if k > 1:
        k -= 1  # the last point repeats the first
    if k == 2 and hx[0] == hx[1] and hy[0] == hy[1]:
        k = 1  # all points equal
    return k


@njit(cache=True)
def _calipers(hx, hy, h, out):
    """Minimum-area rectangle of the convex polygon ``hx[:h], hy[:h]`` (counter-clockwise).

    Writes ``cx, cy, width, height, angle`` to ``out``: ``width`` along the chosen hull edge,
    whose direction is ``angle``; ``height`` across it.
    """
    if h == 1:
        out[0] = hx[0]
        out[1] = hy[0]
        out[2] = 0.0
        out[3] = 0.0
        out[4] = 0.0
        return
    best = np.inf
    j = 0  # vertex farthest along the edge (max u)
    m = 0  # vertex farthest back (min u)
    k = 0  # vertex farthest from the edge line (max v)
    for i in range(h):
        i1 = (i + 1) % h
        ex = hx[i1] - hx[i]
        ey = hy[i1] - hy[i]
        length = np.hypot(ex, ey)
        ux = ex / length
        uy = ey / length
        if i == 0:
            # Full scan once; afterwards each caliper only moves forward.
            bu, bv, mu = -np.inf, -np.inf, np.inf
            for p in range(h):
                dx = hx[p] - hx[0]
                dy = hy[p] - hy[0]
                pu = dx * ux + dy * uy
                pv = dy * ux - dx * uy
                if pu > bu:
                    bu, j = pu, p
                if pv > bv:
                    bv, k = pv, p
                if pu < mu:
                    mu, m = pu, p
        ox = hx[i]
        oy = hy[i]
        for _ in range(h):
            nj = (j + 1) % h
            if (hx[nj] - ox) * ux + (hy[nj] - oy) * uy > (hx[j] - ox) * ux + (hy[j] - oy) * uy:
                j = nj
            else:
                break
        for _ in range(h):
            nk = (k + 1) % h
            if (hy[nk] - oy) * ux - (hx[nk] - ox) * uy > (hy[k] - oy) * ux - (hx[k] - ox) * uy:
                k = nk
            else:
                break
        for _ in range(h):
            nm = (m + 1) % h
            if (hx[nm] - ox) * ux + (hy[nm] - oy) * uy < (hx[m] - ox) * ux + (hy[m] - oy) * uy:
                m = nm
            else:
                break
        hi_u = (hx[j] - ox) * ux + (hy[j] - oy) * uy
        lo_u = (hx[m] - ox) * ux + (hy[m] - oy) * uy
        hi_v = (hy[k] - oy) * ux - (hx[k] - ox) * uy
        if hi_v < 0.0:
            hi_v = 0.0
        area = (hi_u - lo_u) * hi_v
        if area < best * (1.0 - TIE):
            best = area
            mid_u = 0.5 * (hi_u + lo_u)
            mid_v = 0.5 * hi_v
            out[0] = ox + mid_u * ux - mid_v * uy
            out[1] = oy + mid_u * uy + mid_v * ux
            out[2] = hi_u - lo_u
            out[3] = hi_v
            out[4] = np.arctan2(uy, ux)


@njit(cache=True)
def _sort_by_x_then_y(x, y, order):
    """Fill ``order`` with the indices of the points sorted by (x, y), ties by index (what
    a stable sort gives): a shell sort on that total order, whose last pass is the
    insertion sort that suffices for the small sets that dominate (quadrilaterals). numpy's
    merge-sort argsort cost over two seconds of compiling on first use."""
    k = x.shape[0]
    for p in range(k):
        order[p] = p
    gap = 1
    while gap < k // 3:
        gap = 3 * gap + 1
    while gap > 0:
        for p in range(gap, k):
            q = order[p]
            t = p - gap
            while t >= 0 and _after(x, y, order[t], q):
                order[t + gap] = order[t]
                t -= gap
            order[t + gap] = q
        gap //= 3


@njit(cache=True, forceinline=True)
def _after(x, y, a, b):
    """Point a sorts after point b: by x, then y, then index."""
    if x[a] != x[b]:
        return x[a] > x[b]
    if y[a] != y[b]:
        return y[a] > y[b]
    return a > b


@njit(cache=True)
def _fit_one(points, s, x, y, order, hx, hy, box, out):
    kk = points.shape[1]
    x0, x1, y0, y1 = np.inf, -np.inf, np.inf, -np.inf
    for p in range(kk):
        px, py = points[s, p, 0], points[s, p, 1]
        x0 = min(x0, px)
        x1 = max(x1, px)
        y0 = min(y0, py)
        y1 = max(y1, py)
    cx = 0.5 * (x0 + x1)
    cy = 0.5 * (y0 + y1)
    for p in range(kk):
        x[p] = points[s, p, 0] - cx
        y[p] = points[s, p, 1] - cy
    _sort_by_x_then_y(x, y, order)
    h = _hull(x, y, order, hx, hy)
    _calipers(hx, hy, h, box)
    out[s, 0] = box[0] + cx
    out[s, 1] = box[1] + cy
    out[s, 2] = box[2]
    out[s, 3] = box[3]
    out[s, 4] = box[4]


@njit(cache=True, nogil=True)
def fit_spans(points, out, lo, hi):
    """Sets lo..hi-1 of :func:`fit_rectangles`, with scratch buffers for the span (no
    allocation per set)."""
    kk = points.shape[1]
    x = np.empty(kk)
    y = np.empty(kk)
    order = np.empty(kk, dtype=np.int64)
    hx = np.empty(2 * kk + 1)
    hy = np.empty(2 * kk + 1)
    box = np.empty(5)
    for s in range(lo, hi):
        _fit_one(points, s, x, y, order, hx, hy, box, out)


def fit_rectangles(points, out):
    """``points (N, K, 2)`` -> ``out (N, 5)`` rotated boxes (not yet canonical), K >= 1.

    Each set works relative to the centre of its own extent, so map-metre offsets lose
    nothing in the hull and projection arithmetic.
    """
    n = points.shape[0]
    threads.run(fit_spans, (points, out), n, serial=n < 2048)
