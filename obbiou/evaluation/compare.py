"""Is detector B better than detector A? :func:`compare`, a paired bootstrap over frames."""

from __future__ import annotations

from typing import Any, NamedTuple

import numpy as np

from obbiou.errors import InvalidInput
from obbiou.evaluation.bootstrap import frame_weights, percentile_interval
from obbiou.evaluation.protocol import evaluate
from obbiou.evaluation.result import Evaluation
from obbiou.evaluation.text import SAFETY_NOTE, comparison_text
from obbiou.tables import Table, comparable_frame_ids, read_points, read_table

__all__ = ["Comparison", "LabelComparison", "compare"]


class LabelComparison(NamedTuple):
    """The paired comparison of one label's AP (mean over its thresholds), B against A."""

    ap_a: float
    ap_b: float
    difference: float
    interval: tuple[float, float]
    p_value: float


def _paired_test(
    resampled: np.ndarray, observed: float, level: float
) -> tuple[np.ndarray, tuple[float, float], float]:
    """Finite resampled differences, their percentile interval, and the two-sided p-value.

    The resampled differences are centred on zero (d* - d); p counts how often they lie at
    least as far from it as the observed difference d: p = (1 + #{|d* - d| >= |d|}) / (1 + B).

    Examples
    --------
    >>> _, (lo, hi), p = _paired_test(np.array([0.1, 0.2, 0.3, np.nan]), 0.2, 0.5)
    >>> round(lo, 3), round(hi, 3), p  # no resample is 0.2 or more from 0.2: p = 1/4
    (0.15, 0.25, 0.25)
    """
    finite = resampled[np.isfinite(resampled)]
    centred = np.abs(finite - observed)
    extreme = int((centred >= abs(observed) - 1e-15).sum())
    return finite, percentile_interval(finite, level), (extreme + 1) / (len(finite) + 1)


class Comparison:
    """Paired bootstrap comparison of two detectors on the same truth (see :func:`compare`)."""

    def __init__(self, a: Evaluation, b: Evaluation, *, resamples: int, level: float, seed: Any):
        self.a, self.b = a, b
        self.resamples, self.level, self.seed = resamples, level, seed
        frames = comparable_frame_ids([a.frames, b.frames])
        self.frames = np.unique(np.concatenate(frames))
        w = frame_weights(len(self.frames), resamples, seed)
        # both detectors' records weighted by the same draws of frames: paired
        da = a.resampled_mean_ap(w, np.searchsorted(self.frames, frames[0]))
        db = b.resampled_mean_ap(w, np.searchsorted(self.frames, frames[1]))
        ma, mb = a.mean_ap(), b.mean_ap()
        if ma is None or mb is None:
            raise InvalidInput("compare", "mean AP is undefined (no truths)")
        self.mean_ap_a, self.mean_ap_b = ma, mb
        self.difference = mb - ma
        self.resampled, self.interval, self.p_value = _paired_test(db - da, self.difference, level)
        #: Per label with truths on both sides: the same test on the label's AP.
        self.labels: dict[str, LabelComparison] = {}
        for lab in sorted(set(a.labels) & set(b.labels)):
            la, lb = a.ap(lab), b.ap(lab)
            if la is None or lb is None:
                continue
            ra = a.resampled_ap(w, lab, np.searchsorted(self.frames, frames[0]))
            rb = b.resampled_ap(w, lab, np.searchsorted(self.frames, frames[1]))
            _, interval, p = _paired_test(rb - ra, lb - la, level)
            self.labels[lab] = LabelComparison(la, lb, lb - la, interval, p)

    def summary(self) -> str:
        """A short text report of the comparison."""
        return comparison_text(self)

    def to_dict(self) -> dict:
        """JSON-safe comparison, with both evaluations' mean AP."""
        return {
            "mean_ap_a": self.mean_ap_a,
            "mean_ap_b": self.mean_ap_b,
            "difference": self.difference,
            "interval": list(self.interval),
            "level": self.level,
            "p_value": self.p_value,
            "resamples": self.resamples,
            "seed": self.seed if isinstance(self.seed, (int, type(None))) else str(self.seed),
            "frames": int(len(self.frames)),
            "labels": {
                lab: {**c._asdict(), "interval": list(c.interval)} for lab, c in self.labels.items()
            },
            "test": "paired bootstrap over frames; two-sided; p = (1 + #{|d* - d| >= |d|}) / "
            "(1 + B)",
            "a": self.a.to_dict(breakdowns=False),
            "b": self.b.to_dict(breakdowns=False),
            "note": SAFETY_NOTE,
        }


def compare(
    truth: Any,
    detections_a: Any,
    detections_b: Any,
    *,
    shape: str | None = None,
    iou: Any = None,
    distance: Any = None,
    bev: bool = False,
    points: Any = None,
    min_points: int | None = None,
    ap: str = "all-points",
    resamples: int = 1000,
    level: float = 0.95,
    seed: Any = 0,
    recall_points: int | None = None,
    max_detections: int | None = None,
    degrees: bool = False,
    progress: bool = False,
) -> Comparison:
    """Is detector B better than detector A on the same truth? A paired bootstrap.

    Both are evaluated with the protocol of :func:`evaluate` (``iou``, ``distance``,
    ``bev``, ``points`` and ``min_points`` as there). Then the frames (the union of
    all frames in the truth and both detection tables) are resampled with replacement
    ``resamples`` times; each resample weights *both* detectors' match records with the same
    frame counts, giving a paired difference d* = mAP_B* - mAP_A* (mAP over all thresholds).

    * ``difference``: mAP_B - mAP_A on all frames;
    * ``interval``: the percentile interval of d* at ``level``;
    * ``p_value``: two-sided bootstrap test of "no difference" (Efron & Tibshirani, *An
      Introduction to the Bootstrap*, 1993, ch. 16; from memory): the resampled
      differences are centred on zero, d* - d, and p = (1 + #{|d* - d| >= |d|}) / (1 + B);
    * ``labels``: the same per label (each label's AP, mean over its thresholds, on the same
      resamples), for the labels with truths: :class:`LabelComparison`. The per-label
      p-values are not corrected for testing several labels.

    Examples
    --------
    >>> truth = {"frame": [0, 1], "label": ["cone"] * 2, "x_min": [0, 0], "y_min": [0, 0],
    ...          "x_max": [1, 1], "y_max": [1, 1]}
    >>> a = dict(truth, score=[0.9, 0.8], x_max=[1, 3])
    >>> b = dict(truth, score=[0.9, 0.8])
    >>> c = compare(truth, a, b, resamples=200)
    >>> c.difference
    0.5
    >>> c.labels["cone"].difference, c.labels["cone"].ap_b
    (0.5, 1.0)
    """
    truth_t = read_table(truth, role="truth", shape=shape, degrees=degrees)
    if points is not None:
        points = read_points(points)  # read once for both detectors
    kw = dict(
        shape=truth_t.shape,
        iou=iou,
        distance=distance,
        bev=bev,
        points=points,
        min_points=min_points,
        ap=ap,
        recall_points=recall_points,
        max_detections=max_detections,
        degrees=degrees,
        progress=progress,
    )
    ev_a = evaluate(truth_t, _as_table(detections_a, truth_t.shape, degrees), **kw)
    ev_b = evaluate(truth_t, _as_table(detections_b, truth_t.shape, degrees), **kw)
    return Comparison(ev_a, ev_b, resamples=resamples, level=level, seed=seed)


def _as_table(source: Any, shape: str, degrees: bool) -> Table:
    return read_table(source, role="detections", shape=shape, degrees=degrees)
