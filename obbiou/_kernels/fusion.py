"""Box fusion (numba only): clusters in score order, score-weighted running means.

The clustering of :func:`obbiou.fuse` is sequential by nature (whether a box joins a cluster
depends on the fused box of the boxes before it), so there is one serial kernel and no
parallel driver. Candidate clusters come from the overlapping pairs the public layer found
with the scene index; the kernel only walks them.

Layout codes are those of :class:`obbiou._kernels.codes.Layout` (read as plain ints).
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit

from obbiou._kernels.clip import clip_axis, shoelace

AXIS = 0
ROTATED = 1
AXIS3 = 2
UPRIGHT = 3

_HALF_PI = 0.5 * math.pi
_QUARTER_PI = 0.25 * math.pi


@njit(error_model="numpy", cache=True)
def _rect_overlap(ax, ay, aw, ah, at, bx, by, bw, bh, bt, xs, ys, us, vs):
    """Intersection area of two rotated rectangles (centre, width, height, angle).

    ``b``'s corners move into ``a``'s own frame (origin at ``a``'s centre, so far-off
    coordinates lose nothing), where ``a`` is ``|x| <= aw/2, |y| <= ah/2``: four
    Sutherland-Hodgman steps against constants. ``xs, ys, us, vs``: scratch, size >= 16.
    """
    ca = math.cos(at)
    sa = math.sin(at)
    cb = math.cos(bt)
    sb = math.sin(bt)
    dx = bx - ax
    dy = by - ay
    # b's centre and axes in a's frame
    px = ca * dx + sa * dy
    py = -sa * dx + ca * dy
    ux = ca * cb + sa * sb  # cos(bt - at)
    uy = ca * sb - sa * cb  # sin(bt - at)
    hw = 0.5 * bw
    hh = 0.5 * bh
    for k in range(4):
        sx = hw if k == 1 or k == 2 else -hw
        sy = hh if k >= 2 else -hh
        xs[k] = px + sx * ux - sy * uy
        ys[k] = py + sx * uy + sy * ux
    ahw = 0.5 * aw
    ahh = 0.5 * ah
    n = clip_axis(xs, ys, np.int64(4), us, vs, 1.0, ahw)
    n = clip_axis(us, vs, n, xs, ys, -1.0, ahw)
    n = clip_axis(ys, xs, n, vs, us, 1.0, ahh)
    n = clip_axis(vs, us, n, ys, xs, -1.0, ahh)
    return abs(shoelace(xs, ys, n))


@njit(error_model="numpy", cache=True)
def box_iou(layout, a, b, xs, ys, us, vs):
    """IoU of two boxes (rows of one layout); 0 when the union is empty."""
    if layout == AXIS or layout == AXIS3:
        dims = 2 if layout == AXIS else 3
        inter = 1.0
        va = 1.0
        vb = 1.0
        for d in range(dims):
            lo = max(a[d], b[d])
            hi = min(a[d + dims], b[d + dims])
            inter *= max(hi - lo, 0.0)
            va *= a[d + dims] - a[d]
            vb *= b[d + dims] - b[d]
    elif layout == ROTATED:
        inter = _rect_overlap(
            a[0], a[1], a[2], a[3], a[4], b[0], b[1], b[2], b[3], b[4], xs, ys, us, vs
        )
        va = a[2] * a[3]
        vb = b[2] * b[3]
    else:  # UPRIGHT: footprint overlap times the overlap of the z intervals
        dz = min(a[2] + 0.5 * a[5], b[2] + 0.5 * b[5]) - max(a[2] - 0.5 * a[5], b[2] - 0.5 * b[5])
        inter = 0.0
        if dz > 0.0:
            area = _rect_overlap(
                a[0], a[1], a[3], a[4], a[6], b[0], b[1], b[3], b[4], b[6], xs, ys, us, vs
            )
            inter = area * dz
        va = a[3] * a[4] * a[5]
        vb = b[3] * b[4] * b[5]
    union = va + vb - inter
    if union <= 0.0 or inter <= 0.0:
        return 0.0
    return min(max(inter / union, 0.0), 1.0)


@njit(error_model="numpy", cache=True)
def _wrap(angle, period):
    """``angle`` moved by whole periods into ``[-period / 2, period / 2)``."""
    half = 0.5 * period
    r = angle - period * math.floor((angle + half) / period)
    if r >= half:
        r -= period
    if r < -half:
        r += period
    return r


@njit(error_model="numpy", cache=True)
def _add(layout, acc, c, box, w, fused):
    """Add ``box`` with weight ``w`` to the sums ``acc[c]`` of its cluster; for a rotated
    box take its sides in the order whose direction lies closest (modulo pi) to the
    cluster's fused box ``fused[c]`` (its own angle for a new cluster)."""
    if layout == AXIS or layout == AXIS3:
        for d in range(box.shape[0]):
            acc[c, d] += w * box[d]
    elif layout == ROTATED:
        bw = box[2]
        bh = box[3]
        t = box[4]
        if abs(_wrap(t - fused[c, 4], math.pi)) > _QUARTER_PI:
            bw, bh = bh, bw
            t += _HALF_PI
        acc[c, 0] += w * box[0]
        acc[c, 1] += w * box[1]
        acc[c, 2] += w * bw
        acc[c, 3] += w * bh
        acc[c, 4] += w * math.cos(2.0 * t)
        acc[c, 5] += w * math.sin(2.0 * t)
    else:  # UPRIGHT: a heading, no side swapping, period 2 pi
        for d in range(6):
            acc[c, d] += w * box[d]
        acc[c, 6] += w * math.cos(box[6])
        acc[c, 7] += w * math.sin(box[6])


@njit(error_model="numpy", cache=True)
def _mean(layout, acc, c, wsum, fused):
    """The fused box of cluster ``c`` from its sums."""
    if layout == AXIS or layout == AXIS3:
        for d in range(fused.shape[1]):
            fused[c, d] = acc[c, d] / wsum
    elif layout == ROTATED:
        for d in range(4):
            fused[c, d] = acc[c, d] / wsum
        # mean on the circle of period pi: half the angle of the mean of the doubled angles
        fused[c, 4] = _wrap(0.5 * math.atan2(acc[c, 5], acc[c, 4]), math.pi)
    else:
        for d in range(6):
            fused[c, d] = acc[c, d] / wsum
        fused[c, 6] = _wrap(math.atan2(acc[c, 7], acc[c, 6]), 2.0 * math.pi)


@njit(error_model="numpy", cache=True)
def cluster(layout, data, scores, order, ptr, nbr, min_iou):
    """Cluster boxes in ``order``; return (cluster of each row, fused boxes, member counts,
    score sums), the clusters numbered in order of creation.

    Box ``j`` is compared with the clusters of the rows ``nbr[ptr[j]:ptr[j + 1]]`` (the rows
    it overlaps) that are already clustered, in order of creation; it joins the first whose
    current fused box it overlaps with IoU >= ``min_iou``, else it starts a cluster. A
    cluster of one box is that box, bit for bit.
    """
    n = data.shape[0]
    ncol = data.shape[1]
    which = np.full(n, -1, np.int64)
    fused = np.zeros((n, ncol))
    acc = np.zeros((n, 8))
    count = np.zeros(n, np.int64)
    wsum = np.zeros(n)
    degree = 0
    for j in range(n):
        degree = max(degree, ptr[j + 1] - ptr[j])
    cand = np.empty(max(degree, 1), np.int64)
    xs = np.empty(16)
    ys = np.empty(16)
    us = np.empty(16)
    vs = np.empty(16)
    k_new = 0
    for step in range(n):
        j = order[step]
        m = 0
        for p in range(ptr[j], ptr[j + 1]):
            c = which[nbr[p]]
            if c >= 0:
                # insertion into the sorted candidates, skipping repeats
                q = m
                while q > 0 and cand[q - 1] > c:
                    q -= 1
                if q > 0 and cand[q - 1] == c:
                    continue
                for r in range(m, q, -1):
                    cand[r] = cand[r - 1]
                cand[q] = c
                m += 1
        target = -1
        for q in range(m):
            c = cand[q]
            if box_iou(layout, data[j], fused[c], xs, ys, us, vs) >= min_iou:
                target = c
                break
        w = scores[j]
        if target < 0:
            target = k_new
            k_new += 1
            for d in range(ncol):
                fused[target, d] = data[j, d]
        which[j] = target
        count[target] += 1
        wsum[target] += w
        _add(layout, acc, target, data[j], w, fused)
        if count[target] > 1:
            _mean(layout, acc, target, wsum[target], fused)
    return which, fused[:k_new].copy(), count[:k_new].copy(), wsum[:k_new].copy()
