"""Bootstrap over frames: resampling weights and AP of every resample from match records.

A resample draws F frames with replacement from the F frames of the evaluation; a frame
drawn w times counts w times (its detections, truths and matches are copied, not re-matched:
matching never crosses frames). The match records are computed once; each resample only
re-weights them, so 1000 resamples cost about as much as 1000 passes over the ranked
detections (one numba pass per resample and label, all thresholds at once).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from obbiou.errors import InvalidInput

__all__ = ["frame_weights", "LabelRanking", "resampled_ap", "percentile_interval"]


def frame_weights(nframes: int, resamples: int, seed: int | None = 0) -> np.ndarray:
    """(resamples, nframes) int32 counts of how often each frame is drawn.

    Examples
    --------
    >>> w = frame_weights(5, 3, seed=1)
    >>> w.shape, w.sum(axis=1).tolist()
    ((3, 5), [5, 5, 5])
    """
    if resamples < 1:
        raise InvalidInput("resamples", f"expected a positive integer, got {resamples!r}")
    rng = np.random.default_rng(seed)
    draws = rng.integers(0, nframes, size=(resamples, nframes)) if nframes else None
    if draws is None:
        return np.zeros((resamples, 0), dtype=np.int32)
    flat = (draws + (np.arange(resamples) * nframes)[:, None]).ravel()
    counts = np.bincount(flat, minlength=resamples * nframes)
    return counts.reshape(resamples, nframes).astype(np.int32)


@dataclass(frozen=True)
class LabelRanking:
    """One label's ranked detections and positives per frame, ready for resampling.

    ``det_frame`` (n,) frame codes in ranking order; ``tp`` / ``fp`` (n, K) bool per
    threshold column; ``positives`` (F,) non-ignored truths of the label per frame.
    """

    det_frame: np.ndarray
    tp: np.ndarray
    fp: np.ndarray
    positives: np.ndarray

    def trimmed(self) -> LabelRanking:
        """Without the detections after the last TP: they change no AP of any resample."""
        hits = np.flatnonzero(self.tp.any(axis=1))
        end = int(hits[-1]) + 1 if len(hits) else 0
        return LabelRanking(
            np.ascontiguousarray(self.det_frame[:end]),
            np.ascontiguousarray(self.tp[:end]),
            np.ascontiguousarray(self.fp[:end]),
            self.positives,
        )


def resampled_ap(ranking: LabelRanking, weights: np.ndarray, kind: int, npoints: int) -> np.ndarray:
    """(B, K) AP of one label for each row of ``weights``; NaN where it has no positives.

    ``kind`` / ``npoints`` as from :func:`obbiou.evaluation.ap.ap_kind`. With all weights 1
    this is the AP of the evaluation itself (up to the order of floating-point sums).
    """
    from obbiou._kernels.match import bootstrap_ap

    r = ranking.trimmed()
    nk = r.tp.shape[1]
    wf = weights.astype(np.float64)
    nframes = weights.shape[1]
    frame = r.det_frame.astype(np.int64)
    per_frame_tp = np.zeros((nframes, nk))
    per_frame_fp = np.zeros((nframes, nk))
    for k in range(nk):
        per_frame_tp[:, k] = np.bincount(frame, weights=r.tp[:, k], minlength=nframes)
        per_frame_fp[:, k] = np.bincount(frame, weights=r.fp[:, k], minlength=nframes)
    tp_total = np.ascontiguousarray(wf @ per_frame_tp)
    fp_total = np.ascontiguousarray(wf @ per_frame_fp)
    npos = wf @ ranking.positives.astype(np.float64)
    # rows FP at every threshold only add to one running count: group them into the runs
    # ranked below each other ("mixed") row; those ranked above every mixed row change no AP
    # beyond the totals
    pure = r.fp.all(axis=1)
    mixed = np.flatnonzero(~pure)
    pure_rows = np.flatnonzero(pure)
    pure_rows = pure_rows[pure_rows > (mixed[0] if len(mixed) else len(pure))]
    run_of = np.searchsorted(mixed, pure_rows, side="left") - 1
    run_ptr = np.r_[0, np.cumsum(np.bincount(run_of, minlength=len(mixed)))].astype(np.int64)
    code = np.where(r.tp[mixed], 1, np.where(r.fp[mixed], 2, 0)).astype(np.int8)
    return bootstrap_ap(
        np.ascontiguousarray(weights),
        frame[mixed].astype(np.int32),
        np.ascontiguousarray(code.T),
        run_ptr,
        frame[pure_rows].astype(np.int32),
        tp_total,
        fp_total,
        npos,
        kind,
        npoints,
    )


def percentile_interval(values: np.ndarray, level: float) -> tuple[float, float]:
    """Percentile interval of the finite ``values`` at confidence ``level``.

    Examples
    --------
    >>> percentile_interval(np.arange(101.0), 0.9)
    (5.0, 95.0)
    """
    if not 0.0 < level < 1.0:
        raise InvalidInput("level", f"expected a number in (0, 1), got {level!r}")
    v = np.asarray(values, dtype=np.float64)
    v = v[np.isfinite(v)]
    if not len(v):
        reason = "no resample had any positives: the interval is undefined"
        raise InvalidInput("values", reason, message=reason)
    lo, hi = np.quantile(v, [(1 - level) / 2, (1 + level) / 2])
    return float(lo), float(hi)
