"""Is detector B better than detector A? :func:`compare`, a paired bootstrap over frames."""

from __future__ import annotations

from typing import Any

import numpy as np

from obbiou.errors import InvalidInput
from obbiou.evaluation.bootstrap import frame_weights, percentile_interval
from obbiou.evaluation.protocol import evaluate
from obbiou.evaluation.result import Evaluation
from obbiou.evaluation.text import SAFETY_NOTE, comparison_text
from obbiou.tables import Table, comparable_frame_ids, read_points, read_table

__all__ = ["Comparison", "compare"]


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
        diffs = db - da
        self.resampled = diffs[np.isfinite(diffs)]
        self.interval = percentile_interval(self.resampled, level)
        # two-sided bootstrap test of "no difference": centre the resampled differences on
        # zero and count how often they are at least as far from it as the observed one
        centred = np.abs(self.resampled - self.difference)
        extreme = int((centred >= abs(self.difference) - 1e-15).sum())
        self.p_value = (extreme + 1) / (len(self.resampled) + 1)

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
      differences are centred on zero, d* - d, and p = (1 + #{|d* - d| >= |d|}) / (1 + B).

    Examples
    --------
    >>> truth = {"frame": [0, 1], "label": ["cone"] * 2, "x_min": [0, 0], "y_min": [0, 0],
    ...          "x_max": [1, 1], "y_max": [1, 1]}
    >>> a = dict(truth, score=[0.9, 0.8], x_max=[1, 3])
    >>> b = dict(truth, score=[0.9, 0.8])
    >>> c = compare(truth, a, b, resamples=200)
    >>> c.difference
    0.5
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
