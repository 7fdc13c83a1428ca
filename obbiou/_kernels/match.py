"""Numba kernels of evaluation: candidate pairs per frame, greedy matching, bootstrap AP.

No validation and no Python objects here; :mod:`obbiou.evaluation.matching` and
:mod:`obbiou.evaluation.bootstrap` prepare sorted, CSR-grouped arrays.

Outcome codes per detection and threshold: 0 false positive, 1 true positive, 2 ignored
(overlaps an ignore truth), 3 capped (beyond ``max_detections`` in its frame, not evaluated).
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange

FP = 0
TP = 1
IGNORED = 2
CAPPED = 3


@njit(cache=True, parallel=True)
def candidate_pairs(det_ptr, truth_ptr, det_env, truth_env, det_live):
    """All (detection, truth) pairs of the same frame whose envelopes overlap.

    ``det_env`` / ``truth_env`` are (n, 2*D) axis-aligned envelopes (mins then maxes).
    Returns global (sorted-table) indices, grouped by detection in order. Touching
    envelopes count (IoU is 0 then and harmless); only pairs that cannot overlap are left
    out. Detections with ``det_live`` False get no pairs.
    """
    nframes = det_ptr.shape[0] - 1
    dim = det_env.shape[1] // 2
    n = det_env.shape[0]
    counts = np.zeros(n, dtype=np.int64)
    for f in prange(nframes):
        for d in range(det_ptr[f], det_ptr[f + 1]):
            if not det_live[d]:
                continue
            c = 0
            for t in range(truth_ptr[f], truth_ptr[f + 1]):
                ok = True
                for k in range(dim):
                    if (
                        det_env[d, k] > truth_env[t, dim + k]
                        or truth_env[t, k] > det_env[d, dim + k]
                    ):
                        ok = False
                        break
                if ok:
                    c += 1
            counts[d] = c
    ptr = np.zeros(n + 1, dtype=np.int64)
    for d in range(n):
        ptr[d + 1] = ptr[d] + counts[d]
    first = np.empty(ptr[n], dtype=np.int64)
    second = np.empty(ptr[n], dtype=np.int64)
    for f in prange(nframes):
        for d in range(det_ptr[f], det_ptr[f + 1]):
            if not det_live[d]:
                continue
            p = ptr[d]
            for t in range(truth_ptr[f], truth_ptr[f + 1]):
                ok = True
                for k in range(dim):
                    if (
                        det_env[d, k] > truth_env[t, dim + k]
                        or truth_env[t, k] > det_env[d, dim + k]
                    ):
                        ok = False
                        break
                if ok:
                    first[p] = d
                    second[p] = t
                    p += 1
    return ptr, first, second


@njit(cache=True, parallel=True)
def greedy_match(
    det_ptr,
    det_label,
    det_live,
    truth_ptr,
    truth_label,
    truth_ignore,
    pair_ptr,
    pair_truth,
    pair_iou,
    thresholds,
):
    """Greedy matching of every frame at every threshold in one pass.

    Detections of a frame must come in processing order (descending score, ties by input
    order); truths of a frame in input order, so that a lower index is the earlier truth.
    """
    n = det_label.shape[0]
    m = truth_label.shape[0]
    nk = thresholds.shape[0]
    outcome = np.full((n, nk), CAPPED, dtype=np.int8)
    matched_truth = np.full((n, nk), -1, dtype=np.int64)
    matched_iou = np.zeros((n, nk))
    best_same = np.zeros(n)
    best_other = np.zeros(n)
    truth_taken = np.zeros((m, nk), dtype=np.bool_)
    truth_same = np.zeros(m)
    truth_other = np.zeros(m)
    nframes = det_ptr.shape[0] - 1
    for f in prange(nframes):
        for d in range(det_ptr[f], det_ptr[f + 1]):
            if not det_live[d]:
                continue
            lab = det_label[d]
            bs = 0.0
            bo = 0.0
            for p in range(pair_ptr[d], pair_ptr[d + 1]):
                t = pair_truth[p]
                if truth_ignore[t]:
                    continue
                v = pair_iou[p]
                if truth_label[t] == lab:
                    if v > bs:
                        bs = v
                    if v > truth_same[t]:
                        truth_same[t] = v
                else:
                    if v > bo:
                        bo = v
                    if v > truth_other[t]:
                        truth_other[t] = v
            best_same[d] = bs
            best_other[d] = bo
            for k in range(nk):
                thr = thresholds[k]
                best = -1
                best_v = -1.0
                ign = -1
                ign_v = -1.0
                for p in range(pair_ptr[d], pair_ptr[d + 1]):
                    t = pair_truth[p]
                    if truth_label[t] != lab:
                        continue
                    v = pair_iou[p]
                    if v < thr:
                        continue
                    if truth_ignore[t]:
                        if v > ign_v:  # pairs come in truth order: ties keep the lower index
                            ign = t
                            ign_v = v
                    elif not truth_taken[t, k] and v > best_v:
                        best = t
                        best_v = v
                if best >= 0:
                    outcome[d, k] = TP
                    matched_truth[d, k] = best
                    matched_iou[d, k] = best_v
                    truth_taken[best, k] = True
                elif ign >= 0:
                    outcome[d, k] = IGNORED
                    matched_truth[d, k] = ign
                    matched_iou[d, k] = ign_v
                else:
                    outcome[d, k] = FP
    return (
        outcome,
        matched_truth,
        matched_iou,
        best_same,
        best_other,
        truth_taken,
        truth_same,
        truth_other,
    )


@njit(cache=True, parallel=True)
def bootstrap_ap(
    weights, det_frame, det_tp, det_fp, tp_lo, tp_hi, tp_total, fp_total, npos, kind, npoints
):
    """AP of one label at every threshold for every row of frame ``weights``.

    ``weights`` (B, F) int: how often each frame is drawn; ``det_frame`` (n,) the frame of
    each detection in global ranking order; ``det_tp`` and ``det_fp`` (n, K) float64 0/1;
    ``tp_lo`` / ``tp_hi`` (n,) the first and one past the last threshold column where the
    row is a TP (equal: none); ``tp_total`` / ``fp_total`` (B, K) weighted totals over all n
    rows; ``npos`` (B,) the weighted number of non-ignored truths. A frame drawn w times
    contributes w copies of each of its detections, adjacent in the ranking. ``kind``: 0
    all-points, 1 step sum, 2 the envelope sampled at ``npoints`` recall levels
    q / (npoints - 1). Rows with ``npos`` 0 give NaN (undefined; the caller excludes them).

    One backward pass per row: walking from the lowest score up, the running maximum of
    precision is the monotone envelope at each recall level.
    """
    nb = weights.shape[0]
    n, nk = det_tp.shape
    out = np.zeros((nb, nk))
    for b in prange(nb):
        pos = npos[b]
        if pos <= 0:
            for k in range(nk):
                out[b, k] = np.nan
            continue
        wrow = weights[b]
        tp_c = tp_total[b].copy()
        fp_c = fp_total[b].copy()
        env = np.zeros(nk)
        acc = np.zeros(nk)
        q = np.empty(nk, dtype=np.int64)
        scale = npoints - 1.0
        for k in range(nk):
            q[k] = npoints - 1
            # recall levels above the highest recall reached get precision 0
            while q[k] >= 0 and q[k] * pos > tp_c[k] * scale:
                q[k] -= 1
        for i in range(n - 1, -1, -1):
            w = wrow[det_frame[i]]
            if w == 0:
                continue
            if kind != 2:
                # branch-free over thresholds (vectorises): one step per copy of the row
                lo, hi = tp_lo[i], tp_hi[i]
                if hi > lo:
                    for _ in range(w):
                        for k in range(lo, hi):
                            t = det_tp[i, k]
                            c = tp_c[k]
                            prec = c / max(c + fp_c[k], 1.0)
                            e = max(env[k], prec)
                            env[k] = t * e + (1.0 - t) * env[k]
                            acc[k] += t * (prec if kind == 1 else e)
                            tp_c[k] = c - t
            elif tp_hi[i] > tp_lo[i]:
                for k in range(tp_lo[i], tp_hi[i]):
                    if det_tp[i, k] > 0.0:
                        for _ in range(w):
                            c = tp_c[k]
                            prec = c / (c + fp_c[k])
                            if prec > env[k]:
                                env[k] = prec
                            while q[k] >= 0 and (q[k] * pos > (c - 1.0) * scale or c == 1.0):
                                acc[k] += env[k]
                                q[k] -= 1
                            tp_c[k] -= 1.0
            wf = float(w)
            for k in range(nk):  # branch-free: vectorises
                fp_c[k] -= wf * det_fp[i, k]
        for k in range(nk):
            out[b, k] = acc[k] / npoints if kind == 2 else acc[k] / pos
    return out
