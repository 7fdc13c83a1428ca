"""Numba kernels of evaluation: candidate pairs per frame, greedy matching, bootstrap AP.

No validation here; :mod:`obbiou.evaluation.matching` and :mod:`obbiou.evaluation.bootstrap`
prepare sorted, CSR-grouped arrays. Each job is a serial body over a span of frames (or
resamples) run by :mod:`obbiou._kernels.threads`; the functions without a body suffix are
the thin drivers that allocate the outputs.

Outcome codes per detection and threshold (:class:`obbiou._kernels.codes.Outcome`): 0 false
positive, 1 true positive, 2 ignored (overlaps an ignore truth), 3 capped (beyond
``max_detections`` in its frame, not evaluated).
"""

from __future__ import annotations

import numpy as np
from numba import njit

from obbiou._kernels import threads
from obbiou._kernels.codes import Outcome

FP = int(Outcome.FP)
TP = int(Outcome.TP)
IGNORED = int(Outcome.IGNORED)
CAPPED = int(Outcome.CAPPED)

#: Below this many detections (or resamples x ranked rows) the bodies run on one thread.
SERIAL_BELOW = 20_000


@njit(cache=True, forceinline=True)
def _envelopes_touch(det_env, d, truth_env, t, dim):
    for k in range(dim):
        if det_env[d, k] > truth_env[t, dim + k] or truth_env[t, k] > det_env[d, dim + k]:
            return False
    return True


@njit(cache=True, nogil=True)
def candidate_spans(det_ptr, truth_ptr, det_env, truth_env, det_live, ptr, first, second, f0, f1):
    """Frames f0..f1-1 of :func:`candidate_pairs`: with ``first`` empty, count each
    detection's pairs into ptr[d + 1]; else write them from ptr[d] on."""
    dim = det_env.shape[1] // 2
    fill = first.shape[0] > 0
    for f in range(f0, f1):
        for d in range(det_ptr[f], det_ptr[f + 1]):
            if not det_live[d]:
                continue
            p = ptr[d] if fill else 0
            for t in range(truth_ptr[f], truth_ptr[f + 1]):
                if _envelopes_touch(det_env, d, truth_env, t, dim):
                    if fill:
                        first[p] = d
                        second[p] = t
                    p += 1
            if not fill:
                ptr[d + 1] = p


def candidate_pairs(det_ptr, truth_ptr, det_env, truth_env, det_live):
    """All (detection, truth) pairs of the same frame whose envelopes overlap.

    ``det_env`` / ``truth_env`` are (n, 2*D) axis-aligned envelopes (mins then maxes).
    Returns ``ptr`` (n + 1) and global (sorted-table) indices ``first``, ``second``, grouped
    by detection in order. Touching envelopes count (IoU is 0 then and harmless); only pairs
    that cannot overlap are left out. Detections with ``det_live`` False get no pairs.
    Two passes (count, then fill) so that the outputs are exactly sized.
    """
    n = det_env.shape[0]
    frames = det_ptr.shape[0] - 1
    serial = n < SERIAL_BELOW
    ptr = np.zeros(n + 1, dtype=np.int64)
    none = np.zeros(0, dtype=np.int64)
    args = (det_ptr, truth_ptr, det_env, truth_env, det_live, ptr, none, none)
    threads.run(candidate_spans, args, frames, serial=serial)
    np.cumsum(ptr, out=ptr)
    first = np.empty(ptr[n], dtype=np.int64)
    second = np.empty(ptr[n], dtype=np.int64)
    if ptr[n]:
        args = (det_ptr, truth_ptr, det_env, truth_env, det_live, ptr, first, second)
        threads.run(candidate_spans, args, frames, serial=serial)
    return ptr, first, second


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
    empty,
):
    """Greedy matching of every frame at every threshold in one pass.

    Detections of a frame must come in processing order (descending score, ties by input
    order); truths of a frame in input order, so that a lower index is the earlier truth.
    ``pair_iou`` is a similarity per candidate pair, higher is better, and a pair matches
    at threshold t when its similarity is >= t: the IoU, or the negated centre distance
    with thresholds -d (then "highest" is "nearest" and ">= -d" is "distance <= d",
    exactly). ``empty`` is the best similarity of a detection or truth without candidate
    pairs (0.0 for IoU, -inf for negated distances).
    Returns (outcome, matched truth, matched similarity, best similarity with a truth of
    the same label, of another label; per truth: taken per threshold, best similarity
    same / other label).
    """
    n = det_label.shape[0]
    m = truth_label.shape[0]
    nk = thresholds.shape[0]
    out = (
        np.full((n, nk), CAPPED, dtype=np.int8),
        np.full((n, nk), -1, dtype=np.int64),
        np.zeros((n, nk)),
        np.full(n, empty),
        np.full(n, empty),
        np.zeros((m, nk), dtype=np.bool_),
        np.full(m, empty),
        np.full(m, empty),
    )
    inputs = (det_ptr, det_label, det_live, truth_ptr, truth_label, truth_ignore)
    args = inputs + (pair_ptr, pair_truth, pair_iou, thresholds, float(empty)) + out
    threads.run(greedy_spans, args, det_ptr.shape[0] - 1, serial=n < SERIAL_BELOW)
    return out


@njit(cache=True, nogil=True)
def greedy_spans(
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
    empty,
    outcome,
    matched_truth,
    matched_iou,
    best_same,
    best_other,
    truth_taken,
    truth_same,
    truth_other,
    f0,
    f1,
):
    """Frames f0..f1-1 of :func:`greedy_match`, into its outputs."""
    nk = thresholds.shape[0]
    for f in range(f0, f1):
        for d in range(det_ptr[f], det_ptr[f + 1]):
            if not det_live[d]:
                continue
            lab = det_label[d]
            bs = empty
            bo = empty
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
                best_v = -np.inf
                ign = -1
                ign_v = -np.inf
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


def bootstrap_ap(
    weights, mixed_frame, code, run_ptr, run_frame, tp_total, fp_total, npos, kind, npoints
):
    """AP of one label at every threshold for every row of frame ``weights``: see
    :func:`bootstrap_spans`. Returns (B, K)."""
    nb = weights.shape[0]
    out = np.zeros((nb, code.shape[0]))
    args = (weights, mixed_frame, code, run_ptr, run_frame, tp_total, fp_total, npos, kind)
    serial = nb * (code.shape[1] + run_frame.shape[0]) < SERIAL_BELOW
    threads.run(bootstrap_spans, args + (npoints, out), nb, serial=serial)
    return out


@njit(cache=True, nogil=True)
def bootstrap_spans(
    weights, mixed_frame, code, run_ptr, run_frame, tp_total, fp_total, npos, kind, npoints,
    out, b0, b1,
):  # fmt: skip
    """AP of one label at every threshold for every row of frame ``weights``.

    ``weights`` (B, F) int: how often each frame is drawn. The label's ranked detections come
    in two kinds: the "mixed" rows (TP or ignored at some threshold), with ``mixed_frame``
    (nm,) their frames and ``code`` (K, nm) int8 their outcome per threshold (1 TP, 2 FP,
    0 neither), in ranking order; and the rows that are FP at every threshold, which only
    add to a running count: ``run_frame`` holds their frames in ranking order, grouped by
    ``run_ptr`` (nm + 1) into the run ranked below each mixed row (rows ranked above the
    first mixed row are left out: they are in the totals and need no walk). ``tp_total`` /
    ``fp_total`` (B, K) are the weighted totals; ``npos`` (B,) the weighted number of
    non-ignored truths. A frame drawn w times contributes w adjacent copies of each of its
    detections. ``kind``: 0 all-points, 1 step sum, 2 the envelope sampled at ``npoints``
    recall levels q / (npoints - 1). Rows with ``npos`` 0 give NaN (the caller excludes them).

    Per resample and threshold, one backward walk: from the lowest score up, the running
    maximum of precision is the monotone envelope. For all-points AP, w copies of a TP with c
    TPs at or above it have precisions (c - j) / (c - j + fp), j = 0 .. w-1, none above the
    first: the envelope becomes max(envelope, c / (c + fp)) and each copy adds that value.
    The compact (K, nm) int8 layout keeps each walk in cache.
    """
    nk, nm = code.shape
    scale = npoints - 1.0
    for b in range(b0, b1):
        pos = npos[b]
        if pos <= 0:
            for k in range(nk):
                out[b, k] = np.nan
            continue
        wrow = weights[b]
        run_sum = np.empty(nm)
        wmix = np.empty(nm)
        for m in range(nm):
            s = 0.0
            for j in range(run_ptr[m], run_ptr[m + 1]):
                s += wrow[run_frame[j]]
            run_sum[m] = s
            wmix[m] = wrow[mixed_frame[m]]
        for k in range(nk):
            c = tp_total[b, k]
            fp = fp_total[b, k]
            env = 0.0
            total = 0.0
            q = npoints - 1
            while q >= 0 and q * pos > c * scale:  # recall levels never reached: precision 0
                q -= 1
            row = code[k]
            for m in range(nm - 1, -1, -1):
                fp -= run_sum[m]
                w = wmix[m]
                o = row[m]
                if kind == 0:
                    t = w if o == 1 else 0.0
                    prec = c / max(c + fp, 1.0)
                    e = max(env, prec)
                    env = e if t > 0.0 else env
                    total += t * e
                    c -= t
                elif o == 1:
                    for _ in range(int(w)):
                        prec = c / (c + fp)
                        if kind == 1:
                            total += prec
                        else:
                            if prec > env:
                                env = prec
                            while q >= 0 and (q * pos > (c - 1.0) * scale or c == 1.0):
                                total += env
                                q -= 1
                        c -= 1.0
                if o == 2:
                    fp -= w
            out[b, k] = total / npoints if kind == 2 else total / pos
