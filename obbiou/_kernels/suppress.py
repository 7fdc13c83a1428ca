"""Non-maximum suppression: hard on the grid, soft over a neighbour list; the score order.

Numba kernels only: no validation. Hard suppression (:func:`suppress_hard`) walks the grid
of :mod:`obbiou._kernels.grid` and computes IoU only between a box and the kept boxes near
it. Soft suppression gets the overlapping pairs from the grid as a symmetric CSR neighbour
list, so the cost follows the number of overlapping pairs, never N^2.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from obbiou._kernels import threads
from obbiou._kernels.grid import chunk_room, insert, regrow, scratch, walk
from obbiou._kernels.options import ENTRY, HELPER
from obbiou._kernels.pairs import (
    IOU,
    R_SIZE,
    axis_pair,
    finish,
    poly_pair,
    rect_inter_value,
    rect_iou_verdict,
    rect_load,
)


@njit(**ENTRY)
def neighbours(n, first, second, values):
    """Symmetric CSR neighbour list of n boxes from pairs (first[k], second[k], values[k])."""
    ptr = np.zeros(n + 1, np.int64)
    for k in range(first.shape[0]):
        ptr[first[k] + 1] += 1
        ptr[second[k] + 1] += 1
    for i in range(n):
        ptr[i + 1] += ptr[i]
    fill = ptr[:-1].copy()
    nbr = np.empty(ptr[n], np.int64)
    val = np.empty(ptr[n])
    for k in range(first.shape[0]):
        i, j = first[k], second[k]
        nbr[fill[i]] = j
        val[fill[i]] = values[k]
        fill[i] += 1
        nbr[fill[j]] = i
        val[fill[j]] = values[k]
        fill[j] += 1
    return ptr, nbr, val


@njit(forceinline=True, **HELPER)
def _before(s1, i1, s2, i2):
    """Heap order: higher score first, ties by lower input index."""
    return s1 > s2 or (s1 == s2 and i1 < i2)


@njit(**HELPER)
def _place(hs, hx, pos, p, s, i):
    hs[p] = s
    hx[p] = i
    pos[i] = p


@njit(**HELPER)
def _sift_down(hs, hx, pos, size, p):
    """Move the entry at heap position p down to its place (its score fell)."""
    s, i = hs[p], hx[p]
    while True:
        c = 2 * p + 1
        if c >= size:
            break
        if c + 1 < size and _before(hs[c + 1], hx[c + 1], hs[c], hx[c]):
            c += 1
        if not _before(hs[c], hx[c], s, i):
            break
        _place(hs, hx, pos, p, hs[c], hx[c])
        p = c
    _place(hs, hx, pos, p, s, i)


@njit(**HELPER)
def _sift_up(hs, hx, pos, p):
    """Move the entry at heap position p up to its place."""
    s, i = hs[p], hx[p]
    while p > 0:
        q = (p - 1) // 2
        if not _before(s, i, hs[q], hx[q]):
            break
        _place(hs, hx, pos, p, hs[q], hx[q])
        p = q
    _place(hs, hx, pos, p, s, i)


@njit(**HELPER)
def _remove(hs, hx, pos, size, p):
    """Remove the entry at heap position p; returns the new size."""
    size -= 1
    if p < size:
        _place(hs, hx, pos, p, hs[size], hx[size])
        q = (p - 1) // 2
        if p > 0 and _before(hs[p], hx[p], hs[q], hx[q]):
            _sift_up(hs, hx, pos, p)
        else:
            _sift_down(hs, hx, pos, size, p)
    return size


@njit(**ENTRY)
def soft(scores, order, ptr, nbr, val, gaussian, max_iou, sigma, min_score, limit):
    """Soft suppression (Bodla et al., ICCV 2017), exact for any order of decays.

    Repeatedly select the remaining box with the highest current score (ties: lower
    index) and decay the current score of each remaining neighbour j by
    ``1 - iou`` when iou > max_iou (linear) or ``exp(-iou**2 / sigma)`` (gaussian). A box
    whose decayed score falls below ``min_score`` is discarded at once and decays no other
    box. ``order``: the boxes by descending score, ties by index (a sorted array is
    already a heap). An indexed max-heap keeps the order as scores change: a decay moves
    the box down in place, so the heap never holds more than N entries. Measured (10 000
    clustered detections, 23 481 pairs, gaussian): 4.3 ms with a heap of (score, box)
    entries pushed anew on every decay, 1.9 ms with this one. Returns (kept indices, their
    final scores), in selection order, which is by descending final score (ties: lower
    index).
    """
    n = scores.shape[0]
    cur = scores.copy()
    done = np.zeros(n, np.bool_)
    hs = scores[order]  # heap entries (score, box); pos: each box's place
    hx = order.copy()
    pos = np.empty(n, np.int64)
    for p in range(n):
        pos[hx[p]] = p
    size = n
    kept = np.empty(n, np.int64)
    kept_s = np.empty(n)
    nk = 0
    while size > 0 and nk != limit:
        i = hx[0]
        size = _remove(hs, hx, pos, size, np.int64(0))
        done[i] = True
        kept[nk] = i
        kept_s[nk] = cur[i]
        nk += 1
        for k in range(ptr[i], ptr[i + 1]):
            j = nbr[k]
            if done[j]:
                continue
            iou = val[k]
            if gaussian:
                f = np.exp(-(iou * iou) / sigma)
            elif iou > max_iou:
                f = 1.0 - iou
            else:
                f = 1.0
            new = cur[j] * f
            if new == cur[j]:
                continue
            cur[j] = new
            if new < min_score:
                done[j] = True
                size = _remove(hs, hx, pos, size, pos[j])
                continue
            hs[pos[j]] = new
            _sift_down(hs, hx, pos, size, pos[j])
    return kept[:nk], kept_s[:nk]


@njit(**ENTRY)
def hard_over_pairs(order, ptr, nbr):
    """Greedy hard suppression over a neighbour list of the pairs with IoU above the
    threshold (:func:`neighbours` or :func:`exceeding` of them): walk ``order`` (best
    first); a box not yet removed is kept and removes its neighbours. The kept set of
    :func:`suppress_hard_rect` and its siblings on the same pairs: a box's higher-ranked
    neighbours are all decided when it comes up, and it is removed exactly when one of
    them was kept. For boxes with
    few copies each (the seams of a tiled image), where the pairs are few and found on all
    cores. Measured on the 168 483 boxes left after the seam rule in ``python
    bench/tiles.py`` (57 615 pairs above 0.5; one thread, CPU, fastest of 11): this walk
    1.2-1.6 ms, the pairs 47-55 ms (by ``overlapping_pairs``; 16-20 ms by
    :func:`exceeding`), against 129-158 ms for :func:`obbiou.suppress`, whose lazy walk
    visits the boxes in score order, jumping across the whole scene. Returns the kept
    indices, best first."""
    n = order.shape[0]
    removed = np.zeros(n, np.bool_)
    kept = np.empty(n, np.int64)
    nk = 0
    for p in range(n):
        i = order[p]
        if removed[i]:
            continue
        kept[nk] = i
        nk += 1
        for k in range(ptr[i], ptr[i + 1]):
            removed[nbr[k]] = True
    return kept[:nk]


# "IoU(A[i], A[j]) > thr" of each kind (A: the scene's rows, self-pairs); hard suppression
# and the pairs search of :func:`exceeding` compile only their own kind's.


@njit(forceinline=True, **HELPER)
def exceeds_axis(scene, i, j, buf):
    return axis_pair(scene.A, i, scene.A, j, np.int64(IOU), scene.is3d, buf) > scene.thr


@njit(forceinline=True, **HELPER)
def exceeds_rect(scene, i, j, buf):
    """For rectangles by cheap bounds when they decide (measured, 10 000 clustered
    detections: they decide 84 % of the overlapping pairs at 0.5), else the exact value."""
    A, thr = scene.A, scene.thr
    verdict = rect_iou_verdict(A, i, A, j, thr)
    if verdict >= 0:
        return verdict == 1
    a, b = rect_load(A, i), rect_load(A, j)
    inter = rect_inter_value(a, b, buf)
    return (
        finish(np.int64(IOU), inter, a[R_SIZE], b[R_SIZE], 0.0, 0.0, 0.0) > thr
    )  # as rect_measure


@njit(forceinline=True, **HELPER)
def exceeds_poly(scene, i, j, buf):
    V, A = scene.VA, scene.A
    return poly_pair(V, A, i, V, A, j, np.int64(IOU), buf) > scene.thr


@njit(**ENTRY)
def suppress_hard_axis(scene, grid, order, limit):
    """:func:`_suppress_hard` of axis boxes."""
    return _suppress_hard(scene, grid, order, limit, exceeds_axis)


@njit(**ENTRY)
def suppress_hard_rect(scene, grid, order, limit):
    """:func:`_suppress_hard` of rectangles (rotated, upright)."""
    return _suppress_hard(scene, grid, order, limit, exceeds_rect)


@njit(**ENTRY)
def suppress_hard_poly(scene, grid, order, limit):
    """:func:`_suppress_hard` of polygons."""
    return _suppress_hard(scene, grid, order, limit, exceeds_poly)


#: The hard-suppression kernel of each kind, by its code.
SUPPRESS_HARD = (suppress_hard_axis, suppress_hard_rect, suppress_hard_poly)


@njit(inline="always")
def _suppress_hard(scene, grid, order, limit, exceeds):
    """Greedy hard suppression, lazily: walk ``order`` (input rows, best first); a box is
    kept unless an already kept box overlaps it with IoU > thr, found through the grid.
    IoU is computed only between a box and the kept boxes near it, and a box stops at the
    first kept box that suppresses it. Stops after ``limit`` kept boxes (< 0: no limit).
    ``scene``, ``grid``: :func:`obbiou._kernels.grid.prepare_scene` of the boxes with
    themselves (``same``), the threshold and the labels. ``exceeds(scene, i, j, buf)``:
    IoU(A[i], A[j]) > thr for the scene's kind. Written once; numba inlines it into each
    kind's ``suppress_hard_*`` kernel, so each is cached as a plain kernel.

    The walks read a grid that holds the kept boxes only: each kept box is added to its
    cell (the static grid's layout, filled as boxes are kept). Measured on 10 000
    clustered detections: walks over the full grid with a per-item "is it kept" test
    took 2.3 ms before any IoU (the test mispredicts), this one a fraction of it."""
    VA, oa = scene.VA, scene.oa
    n = oa.shape[0]
    where = np.empty(n, np.int64)
    for i in range(n):
        where[oa[i]] = i
    cell_ptr = grid.cell_ptr
    items = np.empty(n, np.int64)  # kept boxes, cell by cell
    ends = np.empty(cell_ptr.shape[0] - 1, np.int64)  # end of each cell's kept boxes
    for c in range(ends.shape[0]):
        ends[c] = cell_ptr[c]
    buf = scratch(VA, VA)
    near = np.empty(64, np.int64)
    kept = np.empty(order.shape[0], np.int64)
    nk = 0
    for p in range(order.shape[0]):
        if nk == limit:
            break
        i = where[order[p]]
        # one call of the walk (each call is a copy of it for LLVM to optimise): walked
        # again, rarely, when more kept neighbours were found than the buffer holds
        while True:
            m = walk(i, scene, grid, items, ends, np.bool_(True), near)
            if m <= near.shape[0]:
                break
            near = np.empty(2 * m, np.int64)
        suppressed = False
        if m > 0:
            for k in range(m):
                if exceeds(scene, i, near[k], buf):
                    suppressed = True
                    break
        if not suppressed:
            insert(i, grid, items, ends)
            kept[nk] = order[p]
            nk += 1
    return kept[:nk]


# ---------------------------------------------------------------------------------------
# the pairs above the threshold, by verdict: for a greedy walk that needs no IoU values


@njit(inline="always")
def _exceeding(step, scene, grid, ci, cj, lo, hi, need, got, todo, c0, c1, exceeds):
    """For the chunks c0..c1-1 marked in ``todo``: the self-pairs of a's rows c * step ...
    (spatial order) with IoU > thr, by ``exceeds`` (cheap bounds for rectangles, the exact
    value only when they do not decide). Each row's candidates (one forward walk over the
    static grid) go into cj[lo[c]:hi[c]] after the pairs kept so far, and those above the
    threshold are compacted to the front, with their first row in ci. ``need[c]``: the
    number of candidates when they overflowed the room (redo the chunk with that much,
    see :func:`obbiou._kernels.grid.regrow`), else the number of pairs; ``got[c]``: the
    pairs. Written once; numba inlines it into each kind's ``exceeding_*`` kernel."""
    n = scene.A.shape[0]
    cell_ptr = grid.cell_ptr
    buf = scratch(scene.VA, scene.VA)
    for c in range(c0, c1):
        if not todo[c]:
            continue
        a = ci[lo[c] : hi[c]]
        b = cj[lo[c] : hi[c]]
        cap = b.shape[0]
        seen = 0
        kept = 0
        over = False
        for i in range(c * step, min(n, (c + 1) * step)):
            out = b[:0] if over else b[kept:]
            m = walk(i, scene, grid, cell_ptr[:0], cell_ptr[1:], np.bool_(False), out)
            seen += m
            if over:
                continue
            if kept + m > cap:  # this row's candidates did not all fit: count the rest
                over = True
                continue
            s0 = kept
            for k in range(s0, s0 + m):
                j = b[k]
                if exceeds(scene, i, j, buf):
                    a[kept] = i
                    b[kept] = j
                    kept += 1
        need[c] = seen if over else kept
        got[c] = 0 if over else kept


@njit(**ENTRY)
def exceeding_axis(step, scene, grid, ci, cj, lo, hi, need, got, todo, c0, c1):
    """:func:`_exceeding` of axis boxes."""
    _exceeding(step, scene, grid, ci, cj, lo, hi, need, got, todo, c0, c1, exceeds_axis)


@njit(**ENTRY)
def exceeding_rect(step, scene, grid, ci, cj, lo, hi, need, got, todo, c0, c1):
    """:func:`_exceeding` of rectangles (rotated, upright)."""
    _exceeding(step, scene, grid, ci, cj, lo, hi, need, got, todo, c0, c1, exceeds_rect)


@njit(**ENTRY)
def exceeding_poly(step, scene, grid, ci, cj, lo, hi, need, got, todo, c0, c1):
    """:func:`_exceeding` of polygons."""
    _exceeding(step, scene, grid, ci, cj, lo, hi, need, got, todo, c0, c1, exceeds_poly)


#: The verdict pairs kernel of each kind, by its code.
EXCEEDING = (exceeding_axis, exceeding_rect, exceeding_poly)


@njit(**ENTRY)
def chunk_neighbours(oa, ci, cj, lo, got):
    """Symmetric CSR neighbour list (ptr, nbr) of the chunks' pairs (chunk c's at
    ci[lo[c]:lo[c] + got[c]], cj likewise: spatial positions), over the rows ``oa`` of
    the positions (``oa[p]``: the row at position p)."""
    n = oa.shape[0]
    ptr = np.zeros(n + 1, np.int64)
    for c in range(got.shape[0]):
        for k in range(lo[c], lo[c] + got[c]):
            ptr[oa[ci[k]] + 1] += 1
            ptr[oa[cj[k]] + 1] += 1
    for r in range(n):
        ptr[r + 1] += ptr[r]
    fill = ptr[:-1].copy()
    nbr = np.empty(ptr[n], np.int64)
    for c in range(got.shape[0]):
        for k in range(lo[c], lo[c] + got[c]):
            p, q = oa[ci[k]], oa[cj[k]]
            nbr[fill[p]] = q
            fill[p] += 1
            nbr[fill[q]] = p
            fill[q] += 1
    return ptr, nbr


#: Room in a chunk's buffer of :func:`exceeding`: pairs per row, and spare (tests set
#: (0, 0) to force the redo path).
PAIRS_ROOM = (4, 64)


def exceeding(scene, grid, serial):
    """The self-pairs of a scene (:func:`obbiou._kernels.grid.prepare_scene` with
    ``same``, or :func:`obbiou._kernels.grid.self_scene`) with IoU > the scene's threshold
    (and the same label, when labels are given), as a symmetric CSR neighbour list (ptr,
    nbr) over the scene's rows ``oa`` (the input rows, not the spatial positions): what
    :func:`hard_over_pairs` walks. No IoU values: rectangles are decided by cheap bounds
    where they can be, as in hard suppression. ``serial``: one thread.

    Chunks of rows in spatial order, each with its own buffer. A chunk's buffer holds its
    pairs so far plus one row's candidates, so it is sized by the pairs expected, not by
    the candidates: :data:`PAIRS_ROOM`, four pairs per row plus 64 (copies are few per box after a
    merge's seam rule: 0.34 pairs per box in ``python bench/tiles.py``; pages of room left
    unused are never touched). This saves the sampling walk of
    :func:`obbiou._kernels.grid.scene_pairs`. A chunk that overflows is redone with room
    for all its candidates."""
    n = scene.A.shape[0]
    chunks = 1 if serial else 8 * threads.count()
    step = -(-n // chunks)
    rows = np.minimum(step, np.maximum(n - step * np.arange(chunks), 0))
    per_row, spare = PAIRS_ROOM
    lo, hi, ci, cj, cv = chunk_room(per_row * rows + spare)
    need = np.zeros(chunks, np.int64)
    got = np.zeros(chunks, np.int64)
    todo = np.ones(chunks, np.bool_)
    body = EXCEEDING[scene.kind]
    threads.run(body, (step, scene, grid, ci, cj, lo, hi, need, got, todo), chunks, serial=serial)
    ci, cj, cv, redo = regrow(lo, hi, need, ci, cj, cv)
    if redo.any():
        args = (step, scene, grid, ci, cj, lo, hi, need, got, redo)
        threads.run(body, args, chunks, serial=serial)
    return chunk_neighbours(scene.oa, ci, cj, lo, got)
