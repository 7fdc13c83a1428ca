"""The result of an evaluation: :class:`Evaluation` (AP, counts, intervals, breakdowns) and
:class:`Counts`, and the reduce step that builds it from match records (:func:`reduce_records`).

An :class:`Evaluation` computes its numbers from match records alone (no boxes), so the same
numbers come out however the map step was split (in process, or on a cluster:
:mod:`obbiou.distributed`); :func:`evaluate` also keeps the input tables
(:attr:`Evaluation.inputs`) for the extra columns of the per-row tables and for
:meth:`Evaluation.confusion`, which matches again with the labels ignored.
Text and pictures of a result are in :mod:`obbiou.evaluation.text` and
:mod:`obbiou.evaluation.plots`, which use only its public methods.
"""

from __future__ import annotations

import json
import math
from collections.abc import Mapping, Sequence
from dataclasses import replace
from typing import Any, NamedTuple

import numpy as np

from obbiou.errors import InvalidInput
from obbiou.evaluation import ap as _ap
from obbiou.evaluation import breakdown as _bd
from obbiou.evaluation import tp_errors as _tpe
from obbiou.evaluation.bootstrap import (
    LabelRanking,
    frame_weights,
    percentile_interval,
    resampled_ap,
)
from obbiou.evaluation.matching import (
    CAPPED,
    FP,
    IGNORED,
    TP,
    MatchRecords,
    Thresholds,
    parse_thresholds,
    sorted_codes,
)
from obbiou.evaluation.text import SAFETY_NOTE
from obbiou.tables import Table, comparable_frame_ids

__all__ = ["Counts", "Evaluation", "reduce_records"]


class Counts(NamedTuple):
    """Accounting of one label at one threshold.

    ``tp + fp + ignored == detections`` (the evaluated detections) and
    ``tp + missed == truths`` (the non-ignored truths). ``capped`` detections (beyond
    ``max_detections`` in their frame) are outside ``detections``; in a size or range bucket,
    detections and truths outside the bucket count as ignored and are outside ``truths``.
    """

    tp: int
    fp: int
    ignored: int
    missed: int
    capped: int
    detections: int
    truths: int


def _key(t: float) -> str:
    return f"{t:g}"


def _degrees(error: _bd.OrientationError) -> dict:
    """An orientation error for JSON: angles in degrees, the unit in each key."""
    out: dict[str, Any] = {}
    for k, v in error._asdict().items():
        if k in ("period", "mean", "median", "p90", "max"):
            out[f"{k}_deg"] = None if v is None else math.degrees(v)
        else:
            out[k] = v
    return out


def _tp_json(error: Any) -> dict:
    """Errors of true positives for JSON: the orientation error in degrees, named so."""
    out = {k: v for k, v in error._asdict().items() if k not in ("label", "threshold")}
    angle = out.pop("orientation_error")
    out["orientation_error_deg"] = None if angle is None else math.degrees(angle)
    return out


def _json_edges(edges: Sequence[float]) -> list[float | None]:
    """Bucket edges for JSON, which has no infinity: an open end is ``None`` (null)."""
    return [float(e) if math.isfinite(e) else None for e in edges]


def _nearest(sorted_values: np.ndarray, values: np.ndarray) -> np.ndarray:
    """Index of the entry of ``sorted_values`` nearest to each of ``values`` (bisection)."""
    if not len(sorted_values):
        return np.zeros(len(values), dtype=np.int64)
    i = np.clip(np.searchsorted(sorted_values, values), 1, max(len(sorted_values) - 1, 1))
    lower = np.maximum(i - 1, 0)
    upper = np.minimum(i, len(sorted_values) - 1)
    closer = np.abs(sorted_values[lower] - values) <= np.abs(sorted_values[upper] - values)
    return np.where(closer, lower, upper)


def _parse_buckets(spec: Any, what: str) -> dict[str, tuple[float, float]]:
    """Buckets from edges ``[e0, e1, ...]`` or a mapping name -> (low, high); low <= v < high."""
    if spec is None:
        return {}
    if isinstance(spec, Mapping):
        out = {}
        for name, pair in spec.items():
            try:
                lo, hi = (float(v) for v in pair)
            except (TypeError, ValueError):
                raise InvalidInput(
                    what, f"bucket {name!r} needs (low, high), got {pair!r}"
                ) from None
            if math.isnan(lo) or math.isnan(hi):
                raise InvalidInput(what, f"bucket {name!r} has a NaN edge: {pair!r}")
            if not lo < hi:
                raise InvalidInput(what, f"bucket {name!r} needs low < high, got {pair!r}")
            out[str(name)] = (lo, hi)
        return out
    try:
        edges = [float(e) for e in spec]
    except (TypeError, ValueError):
        raise InvalidInput(what, f"expected numbers as edges, got {spec!r}") from None
    if any(math.isnan(e) for e in edges):
        raise InvalidInput(what, f"an edge is NaN in {spec!r} (edges are numbers; inf is allowed)")
    if len(edges) < 2 or any(b <= a for a, b in zip(edges, edges[1:], strict=False)):
        raise InvalidInput(what, f"expected increasing edges (at least two), got {spec!r}")
    return {f"{a:g}-{b:g}": (a, b) for a, b in zip(edges, edges[1:], strict=False)}


class Evaluation:
    """Result of :func:`evaluate` (built by :func:`reduce_records`).

    Attributes
    ----------
    criterion : str
        What decided the matches: ``"iou"``, ``"bev"`` (IoU of the ground-plane
        footprints) or ``"distance"`` (ground-plane centre distance; the thresholds are
        metres, and every method's ``iou`` argument takes such a distance).
    thresholds : tuple of float
        All thresholds evaluated (IoUs, or distances in metres).
    labels : tuple of str
        Every label seen in the truth or the detections, sorted.
    frames : numpy.ndarray
        The frame ids (sorted), the units the bootstrap resamples.
    records : MatchRecords
        The match records (canonical order).
    inputs : tuple of Table or None
        The validated input tables ``(truth, detections)`` whose rows the records number,
        when the evaluation was built by :func:`evaluate` (or by
        :func:`~obbiou.distributed.evaluate_distributed` from a file or an in-memory table);
        ``None`` when built from match records alone. They give the per-row tables their
        extra columns and are needed by :meth:`confusion`.
    """

    def __init__(
        self,
        records: MatchRecords,
        spec: Thresholds,
        *,
        ap: str = "all-points",
        recall_points: int | None = None,
        options: dict | None = None,
        bucket: tuple[str, str, float, float] | None = None,
        localisation_floor: float = 0.1,
        inputs: tuple[Table, Table] | None = None,
    ):
        self.records = records
        self.inputs = _check_inputs(records, inputs)
        self.criterion: str = records.criterion
        if (spec.argument == "distance") != (self.criterion == "distance"):
            raise InvalidInput(
                spec.argument,
                f"the records were matched by {self.criterion}; give the thresholds as "
                f"{'distance' if self.criterion == 'distance' else 'iou'}=",
            )
        self._spec = spec
        self._ap = ap
        self._recall_points = recall_points
        self._kind = _ap.ap_kind(ap, recall_points)
        self._floor = float(localisation_floor)
        self.options = dict(options or {})
        self.bucket = bucket
        self.buckets: dict[str, dict[str, Evaluation]] = {}
        r = records
        frames = comparable_frame_ids([r.det_frame, r.truth_frame])
        self.frames, codes = sorted_codes(np.concatenate(frames))
        self._dcode = codes[: r.n_detections].astype(np.int64)
        self._tcode = codes[r.n_detections :].astype(np.int64)
        names, lcodes = sorted_codes(np.concatenate([r.det_label, r.truth_label]).astype(object))
        self.labels: tuple[str, ...] = tuple(str(v) for v in names)
        self._dlabel = lcodes[: r.n_detections]
        self._tlabel = lcodes[r.n_detections :]
        self.thresholds: tuple[float, ...] = tuple(spec.values)
        # Threshold -> column of the records, looked up by bisection: a lookup per label and
        # threshold stays O(log K), so K thresholds cost O(K log K), not O(K^2).
        order = np.argsort(r.thresholds, kind="stable")
        have = np.asarray(r.thresholds, dtype=np.float64)[order]
        wanted = np.asarray(spec.values, dtype=np.float64)
        cols = _nearest(have, wanted)
        missing = np.abs(have[cols] - wanted) >= 1e-9 if len(have) else np.ones(len(wanted), bool)
        if missing.any():
            t = float(wanted[int(np.argmax(missing))])
            raise InvalidInput(
                "iou",
                f"threshold {t:g} was not matched; records hold "
                f"{', '.join(_key(v) for v in r.thresholds[:20])}"
                f"{' …' if len(r.thresholds) > 20 else ''}",
            )
        self._column = dict(zip(spec.values, order[cols].tolist(), strict=True))
        self._sorted = tuple(sorted(spec.values))
        self._evaluated = np.asarray(self._sorted, dtype=np.float64)
        self._of = {}
        for lab in self.labels:
            self._of[lab] = frozenset(spec.of(lab))  # every label needs thresholds
        # truth index of each match: truths are sorted by (frame, rank)
        self._truth_ptr = np.r_[0, np.cumsum(np.bincount(self._tcode, minlength=len(self.frames)))]
        self._prepare_slice()
        self._order = np.lexsort((r.det_rank, self._dcode, -r.det_score))
        ranked = self._dlabel[self._order]
        self._by_label = {lab: self._order[ranked == i] for i, lab in enumerate(self.labels)}
        self._truths_of = {
            lab: np.flatnonzero(self._tlabel == i) for i, lab in enumerate(self.labels)
        }
        self._cells: dict[tuple[str, float], tuple[float | None, Counts]] = {}
        for lab in self.labels:
            for t in spec.of(lab):
                self._cells[(lab, t)] = self._cell(lab, t)
        self._weights_cache: dict[tuple[int, Any], np.ndarray] = {}

    # -- slices (buckets) --------------------------------------------------------------------
    def _prepare_slice(self) -> None:
        r = self.records
        self._outcome = r.det_outcome.copy()
        self._positive = ~r.truth_ignore
        matched_index = self._truth_ptr[self._dcode][:, None] + np.maximum(r.det_truth, 0)
        self._matched_index = np.where(r.det_truth >= 0, matched_index, -1)
        if self.bucket is None:
            return
        _, attr, lo, hi = self.bucket
        tval = r.truth_size if attr == "size" else r.truth_range
        dval = r.det_size if attr == "size" else r.det_range
        t_in = (tval >= lo) & (tval < hi)
        d_in = (dval >= lo) & (dval < hi)
        self._positive = self._positive & t_in
        out = self._outcome
        tp = out == TP
        # a TP of a truth outside the bucket is ignored; so is an FP outside the bucket
        truth_in = t_in[np.maximum(self._matched_index, 0)] if len(t_in) else np.zeros_like(tp)
        out[tp & ~truth_in] = IGNORED
        out[(out == FP) & ~d_in[:, None]] = IGNORED

    # -- core numbers ------------------------------------------------------------------------
    def _col(self, t: float) -> int:
        return self._column[self._threshold(t)]

    def _threshold(self, t: float) -> float:
        """The evaluated threshold within 1e-9 of ``t`` (bisection), or InvalidInput."""
        i = int(_nearest(self._evaluated, np.array([float(t)]))[0]) if self._sorted else 0
        if self._sorted and abs(self._sorted[i] - float(t)) < 1e-9:
            return self._sorted[i]
        shown = ", ".join(_key(v) for v in self.thresholds[:20])
        raise InvalidInput(
            "iou",
            f"{t!r} is not among the thresholds evaluated "
            f"({shown}{' …' if len(self.thresholds) > 20 else ''})",
        )

    def _label(self, label: Any) -> str:
        lab = str(label)
        if lab not in self.labels:
            raise InvalidInput(
                "label", f"{label!r} is not in the evaluation ({', '.join(self.labels)})"
            )
        return lab

    def _cell(self, lab: str, t: float) -> tuple[float | None, Counts]:
        k = self._col(t)
        idx = self._by_label[lab]
        out = self._outcome[idx, k]
        tidx = self._truths_of[lab]
        pos = self._positive[tidx]
        npos = int(pos.sum())
        hit = int((self.records.truth_matched[tidx, k] & pos).sum())
        tp, fp = int((out == TP).sum()), int((out == FP).sum())
        ign, cap = int((out == IGNORED).sum()), int((out == CAPPED).sum())
        counts = Counts(tp, fp, ign, npos - hit, cap, tp + fp + ign, npos)
        # the accounting identity, from two independent sides of the records
        if tp != hit or tp + fp + ign + cap != len(idx):
            raise RuntimeError(
                f"accounting identity broken for label {lab!r} at IoU {t:g}: "
                f"{tp} TP among detections vs {hit} matched truths"
            )
        keep = (out == TP) | (out == FP)
        value = _ap.average_precision(
            out[keep] == TP,
            npos,
            kind=self._ap if self._recall_points is None else "all-points",
            recall_points=self._recall_points,
        )
        return value, counts

    def threshold(self, iou: float | None) -> float:
        """The evaluated threshold equal to ``iou`` (within 1e-9); InvalidInput if none is.

        ``None`` gives the most lenient threshold (the lowest IoU, or the largest distance),
        the default of the breakdowns and plots.

        Examples
        --------
        >>> from obbiou.evaluation import evaluate
        >>> box = {"cx": [0.0], "cy": [0.0], "width": [2.0], "height": [1.0], "angle": [0.0]}
        >>> ev = evaluate({"frame": [0], "label": ["a"], **box},
        ...               {"frame": [0], "label": ["a"], "score": [1.0], **box}, iou=[0.5, 0.7])
        >>> ev.threshold(0.7000000000001), ev.thresholds_of("a")
        (0.7, (0.5, 0.7))
        """
        return self._default_iou(iou)

    def thresholds_of(self, label: Any) -> tuple[float, ...]:
        """The thresholds ``label`` is evaluated at (labels may have thresholds of their own)."""
        return tuple(self._spec.of(self._label(label)))

    def resampled_mean_ap(
        self, weights: np.ndarray, columns: np.ndarray | None = None
    ) -> np.ndarray:
        """mAP (over all thresholds) under each row of frame weights: shape ``(B,)``.

        ``weights`` is ``(B, F)``: how often each of F frames is drawn in each of B
        resamples; ``columns[i]`` is the weight column of ``self.frames[i]`` (default: column
        i). A paired comparison weights two evaluations with the same rows.
        """
        return self._resampled(weights, None, None, frame_code=self._columns(columns))

    def resampled_ap(
        self, weights: np.ndarray, label: Any, columns: np.ndarray | None = None
    ) -> np.ndarray:
        """AP of ``label`` (mean over its thresholds) under each row of frame weights: ``(B,)``.

        Same ``weights`` and ``columns`` as :meth:`resampled_mean_ap`; NaN where the label has
        no positives in a resample.
        """
        return self._resampled(weights, label, None, frame_code=self._columns(columns))

    def _columns(self, columns: np.ndarray | None) -> tuple[np.ndarray, np.ndarray] | None:
        if columns is None:
            return None
        columns = np.asarray(columns, dtype=np.int64)
        return (columns[self._dcode], columns[self._tcode])

    def _thresholds_of(self, lab: str, iou: float | None) -> tuple[float, ...]:
        if iou is None:
            return self._spec.of(lab)
        t = self._threshold(iou)
        return (t,) if t in self._of[lab] else ()

    def ap(self, label: Any, iou: float | None = None) -> float | None:
        """AP of ``label`` at threshold ``iou`` (None: mean over the label's thresholds).

        Returns ``None`` when the label has no non-ignored truths (AP undefined), 0.0 when it
        has truths and no detections.
        """
        lab = self._label(label)
        ts = self._thresholds_of(lab, iou)
        if not ts:
            raise InvalidInput("iou", f"label {lab!r} is not evaluated at {iou!r}")
        values = [self._cells[(lab, t)][0] for t in ts]
        if any(v is None for v in values):
            return None
        return float(np.mean(values))

    def mean_ap(self, iou: float | None = None) -> float | None:
        """Mean AP over the labels with truths, at ``iou`` (None: over all thresholds).

        With ``iou=None`` each label contributes the mean of its AP over its thresholds.
        Labels without non-ignored truths are left out; ``None`` if no label has any.
        """
        values = []
        for lab in self.labels:
            if iou is not None and not self._thresholds_of(lab, iou):
                continue
            v = self.ap(lab, iou)
            if v is not None:
                values.append(v)
        return float(np.mean(values)) if values else None

    def counts(self, label: Any, iou: float | None = None) -> Counts:
        """TP, FP, ignored, missed (and capped, detections, truths) of ``label`` at ``iou``.

        ``iou`` may be left out when the label has one threshold.
        """
        lab = self._label(label)
        ts = self._spec.of(lab) if iou is None else (self._threshold(iou),)
        if len(ts) != 1:
            raise InvalidInput("iou", "several thresholds were evaluated; name one")
        if (lab, ts[0]) not in self._cells:
            raise InvalidInput("iou", f"label {lab!r} is not evaluated at {iou!r}")
        return self._cells[(lab, ts[0])][1]

    def curve(self, label: Any, iou: float | None = None) -> _ap.Curve:
        """Precision, recall and score after each ranked (non-ignored) detection of ``label``.

        Recall is NaN throughout when the label has no non-ignored truths.
        """
        lab = self._label(label)
        ts = self._spec.of(lab) if iou is None else (self._threshold(iou),)
        k = self._col(ts[0])
        idx = self._by_label[lab]
        out = self._outcome[idx, k]
        keep = (out == TP) | (out == FP)
        npos = self._cells[(lab, ts[0])][1].truths
        return _ap.curve(out[keep] == TP, npos, self.records.det_score[idx][keep])

    # -- bootstrap ---------------------------------------------------------------------------
    def _weights(self, resamples: int, seed: Any, frames: np.ndarray | None = None) -> np.ndarray:
        nframes = len(self.frames if frames is None else frames)
        key = (resamples, seed, nframes)
        if key not in self._weights_cache:
            self._weights_cache[key] = frame_weights(nframes, resamples, seed)
        return self._weights_cache[key]

    def _ranking(
        self, lab: str, ts: tuple[float, ...], frame_code: np.ndarray, nframes: int
    ) -> LabelRanking:
        idx = self._by_label[lab]
        cols = [self._col(t) for t in ts]
        out = self._outcome[idx][:, cols]
        tidx = self._truths_of[lab]
        tcode = frame_code[1][tidx][self._positive[tidx]]
        positives = np.bincount(tcode, minlength=nframes).astype(np.float64)
        return LabelRanking(
            frame_code[0][idx],
            np.ascontiguousarray(out == TP),
            np.ascontiguousarray(out == FP),
            positives,
        )

    def _resampled(
        self, weights: np.ndarray, label: str | None, iou: float | None, frame_code=None
    ) -> np.ndarray:
        """(B,) the statistic (AP of a label, or mAP) under each row of frame weights."""
        if not self.labels:
            raise InvalidInput("interval", "nothing to resample (no truths and no detections)")
        if frame_code is None:
            frame_code = (self._dcode, self._tcode)
        nframes = weights.shape[1]
        labels = [self._label(label)] if label is not None else list(self.labels)
        per_label = []
        for lab in labels:
            ts = self._thresholds_of(lab, iou)
            if not ts:
                continue
            r = self._ranking(lab, ts, frame_code, nframes)
            values = resampled_ap(r, weights, *self._kind)
            per_label.append(values.mean(axis=1))  # NaN rows: no positives in that resample
        if not per_label:
            raise InvalidInput("iou", f"no label is evaluated at {iou!r}")
        stacked = np.vstack(per_label)
        with np.errstate(invalid="ignore"):
            finite = np.isfinite(stacked)
            total = np.where(finite, stacked, 0).sum(axis=0)
            count = finite.sum(axis=0)
            return np.where(count > 0, total / np.maximum(count, 1), np.nan)

    def interval(
        self,
        label: Any = None,
        iou: float | None = None,
        *,
        resamples: int = 1000,
        level: float = 0.95,
        seed: Any = 0,
    ) -> tuple[float, float]:
        """Bootstrap percentile interval of AP (``label``) or mAP (``label=None``).

        Frames are drawn with replacement (as many as there are); each resample re-weights
        the match records (no re-matching). A label whose truths all miss a resample is left
        out of that resample's mAP; resamples where the statistic is undefined are dropped.
        The same ``seed`` gives the same interval.
        """
        w = self._weights(resamples, seed)
        return percentile_interval(self._resampled(w, label, iou), level)

    # -- breakdowns --------------------------------------------------------------------------
    def _default_iou(self, iou: float | None) -> float:
        if iou is not None:
            return self._threshold(iou)
        # the most lenient threshold: the lowest IoU, or the largest distance
        return max(self.thresholds) if self.criterion == "distance" else min(self.thresholds)

    def _closeness(self, values: np.ndarray, t: float) -> tuple[np.ndarray, float, float]:
        """Per-pair values, threshold and localisation floor as "higher is closer"
        (distances negated), for the breakdowns' ``>=`` tests. By distance, "poor
        localisation" means within the largest distance threshold (but not within t)."""
        if self.criterion == "distance":
            return -values, -t, -float(np.max(self.records.thresholds))
        return values, t, self._floor

    def rule(self, iou: float | None = None) -> str:
        """The matching rule at a threshold as text: ``"IoU ≥ 0.5"``, ``"BEV IoU ≥ 0.5"``
        or ``"distance ≤ 2 m"`` (default: the most lenient threshold).

        Examples
        --------
        >>> from obbiou.evaluation import evaluate
        >>> box = {"cx": [0.0], "cy": [0.0], "width": [2.0], "height": [1.0], "angle": [0.0]}
        >>> t, d = {"frame": [0], "label": ["a"], **box}, {"frame": [0], "label": ["a"],
        ...     "score": [1.0], **box}
        >>> evaluate(t, d).rule(), evaluate(t, d, distance=[1, 2]).rule()
        ('IoU ≥ 0.5', 'distance ≤ 2 m')
        """
        from obbiou.evaluation.text import rule_text

        return rule_text(self.criterion, self._default_iou(iou))

    def false_positives(self, iou: float | None = None) -> dict[str, _bd.FalsePositives]:
        """False positives by class per label at ``iou`` (default: the most lenient
        threshold, see :meth:`threshold`).

        Classes, tested in this order (each FP in exactly one):
        ``duplicate`` — a non-ignore truth of its label has IoU >= iou with it, but all such
        truths were already taken by higher-scoring detections; ``wrong_label`` — a
        non-ignore truth of another label has IoU >= iou with it; ``poor_localisation`` — a
        non-ignore truth of its label has IoU in [0.1, iou) with it (the floor is the
        ``localisation_floor`` option); ``background`` — none of these. Matched by centre
        distance, "IoU >= iou" reads "within distance iou" and the poor-localisation band is
        "within the largest distance threshold but not within iou".
        """
        t = self._default_iou(iou)
        k = self._col(t)
        r = self.records
        same, tt, floor = self._closeness(r.det_best_same, t)
        other = self._closeness(r.det_best_other, t)[0]
        cls = _bd.classify_false_positives(self._outcome[:, k] == FP, same, other, tt, floor)
        out = {}
        for lab in self.labels:
            if t not in self._of[lab]:
                continue
            c = cls[self._by_label[lab]]
            n = [int((c == i).sum()) for i in range(4)]
            out[lab] = _bd.FalsePositives(*n, sum(n))
        return out

    def misses(self, iou: float | None = None) -> dict[str, _bd.Misses]:
        """Missed truths by class per label at ``iou`` (default: the most lenient
        threshold, see :meth:`threshold`).

        Classes, tested in this order: ``crowded`` — a detection of its label has IoU >= iou
        with it but was matched to another truth; ``wrong_label`` — a detection of another
        label has IoU >= iou with it; ``poor_localisation`` — a detection of its label has IoU
        in [0.1, iou); ``not_detected`` — none of these. Capped detections do not count.
        """
        t = self._default_iou(iou)
        k = self._col(t)
        r = self.records
        is_miss = self._positive & ~r.truth_matched[:, k]
        same, tt, floor = self._closeness(r.truth_best_same, t)
        other = self._closeness(r.truth_best_other, t)[0]
        cls = _bd.classify_misses(is_miss, same, other, tt, floor)
        out = {}
        for lab in self.labels:
            if t not in self._of[lab]:
                continue
            c = cls[self._truths_of[lab]]
            n = [int((c == i).sum()) for i in range(4)]
            out[lab] = _bd.Misses(*n, sum(n))
        return out

    def orientation_error(
        self, iou: float | None = None, label: Any = None
    ) -> _bd.OrientationError:
        """Orientation error of the matched pairs at ``iou`` (default: the most lenient
        threshold, see :meth:`threshold`).

        Rectangles (rotated; polygons by their longest edge) compare long axes modulo π, or
        modulo π/2 when either box of the pair is near-square (long / short side below 1.25,
        so that which side is longer does not matter; see
        :func:`obbiou.evaluation.breakdown.orientation_error`); upright 3D boxes compare
        headings modulo 2π and report the share of flipped headings (more than π/2 off).
        ``label`` restricts to one label. Axis-aligned layouts raise ``ValueError`` (they
        carry no orientation).
        """
        t = self._default_iou(iou)
        k = self._col(t)
        r = self.records
        sel = self._outcome[:, k] == TP
        if label is not None:
            sel &= self._dlabel == self.labels.index(self._label(label))
        ti = self._matched_index[sel, k]
        return _bd.orientation_error(
            r.det_angle[sel], r.truth_angle[ti], r.shape, r.det_aspect[sel], r.truth_aspect[ti]
        )

    # -- per-row results, operating points, confusion ----------------------------------------
    def _label_thresholds(self, iou: float | None) -> np.ndarray:
        """Per label code: the threshold of :meth:`detections` and friends at ``iou``."""
        if iou is None:  # each label's most lenient: its lowest IoU or largest distance
            lenient = max if self.criterion == "distance" else min
            return np.array([lenient(self._spec.of(lab)) for lab in self.labels], dtype=float)
        return np.full(len(self.labels), self._threshold(iou))

    def _label_columns(self, iou: float | None) -> tuple[np.ndarray, np.ndarray]:
        ts = self._label_thresholds(iou)
        return ts, np.array([self._col(t) for t in ts], dtype=np.int64)

    def detections(self, iou: float | None = None) -> Any:
        """One row per detection, in input order: outcome, matched truth, IoU, cause.

        ``iou=None`` judges each label at the most lenient of its own thresholds (the lowest
        IoU, or the largest distance; with one set of thresholds for all labels: that one, as
        :meth:`false_positives` does; with
        per-label thresholds, e.g. cars at 0.7 and people at 0.5, each label at its own);
        a number judges every label at that threshold (one of :attr:`thresholds`: all labels
        are matched at all of them). The ``threshold`` column says which was used. Counts of
        the outcomes per label equal :meth:`counts` at that threshold, in a size or range
        bucket too (detections outside it are ``"ignored"``).

        Columns (details in :mod:`obbiou.evaluation.details`): ``frame``, ``label``,
        ``score``, ``threshold``, ``outcome`` (``tp``, ``fp``, ``ignored``, ``capped``),
        ``truth`` (input row of the matched truth, ``<NA>`` if none), ``iou``, ``best_iou``
        (with any non-ignore truth of the frame, any label), ``cause`` (class of a false
        positive, as in :meth:`false_positives`; ``<NA>`` otherwise), then the input's extra
        columns when :attr:`inputs` holds the input tables (not when the evaluation was
        built from match records alone). The index ``row`` is the input row. Matched by
        centre distance, ``iou`` and ``best_iou`` are ``distance`` (to the matched truth) and
        ``nearest`` (to any non-ignore truth of the frame; ``<NA>`` when none lies within
        the largest distance threshold).

        Examples
        --------
        >>> from obbiou.evaluation import evaluate
        >>> box = {"cx": [0.0, 20.0], "cy": [0.0, 0.0], "width": [4.0] * 2,
        ...        "height": [2.0] * 2, "angle": [0.0] * 2}
        >>> truth = {"frame": ["q1", "q1"], "label": ["vessel", "crane"], **box}
        >>> dets = {"frame": ["q1", "q1"], "label": ["vessel", "vessel"], "score": [0.8, 0.7],
        ...         "note": ["ok", "crane?"], **box}
        >>> evaluate(truth, dets).detections()[["label", "outcome", "truth", "cause", "note"]]
              label outcome  truth        cause    note
        row
        0    vessel      tp      0         <NA>      ok
        1    vessel      fp   <NA>  wrong_label  crane?

        No detections: an empty table with the same columns.

        >>> evaluate(truth, {k: v[:0] for k, v in dets.items()}).detections().shape
        (0, 10)
        """
        from obbiou.evaluation.details import detection_table

        ts, cols = self._label_columns(iou)
        extra = self.inputs[1].extra if self.inputs is not None else None
        return detection_table(
            self.records,
            self._outcome,
            cols[self._dlabel] if len(cols) else np.zeros(0, np.int64),
            ts[self._dlabel] if len(ts) else np.zeros(0),
            self._matched_index,
            self._floor,
            extra,
        )

    def truths(self, iou: float | None = None) -> Any:
        """One row per truth, in input order: outcome, matching detection, IoU, cause.

        ``iou`` as for :meth:`detections`. Columns: ``frame``, ``label``, ``ignore``,
        ``threshold``, ``outcome`` (``matched``; ``missed``; ``ignore`` for ignore truths and,
        in a bucket, truths outside it), ``detection`` (input row of the detection that took
        it, ``<NA>`` if none), ``iou``, ``best_iou`` (with any evaluated detection of the
        frame, any label), ``cause`` (class of a miss, as in :meth:`misses`; ``<NA>``
        otherwise), then the extra columns as for :meth:`detections`. Per label,
        ``matched`` + ``missed`` = ``counts().truths``, ``missed`` = ``counts().missed``.
        Matched by centre distance: ``distance`` and ``nearest`` as for :meth:`detections`.
        With lidar points (``points=`` of :func:`~obbiou.evaluation.evaluate`): ``points``
        (points inside the truth) and ``set_aside`` (made an ignore truth by ``min_points``).

        Examples
        --------
        >>> from obbiou.evaluation import evaluate
        >>> box = {"cx": [0.0, 9.0], "cy": [0.0, 0.0], "width": [4.0] * 2,
        ...        "height": [2.0] * 2, "angle": [0.0] * 2}
        >>> truth = {"frame": [3, 3], "label": ["container"] * 2, "ignore": [False, True],
        ...          **box}
        >>> evaluate(truth, {k: [] for k in ("frame", "label", "score", *box)}).truths()[
        ...     ["ignore", "outcome", "detection", "cause"]]
             ignore  outcome  detection         cause
        row
        0     False   missed       <NA>  not_detected
        1      True   ignore       <NA>          <NA>
        """
        from obbiou.evaluation.details import truth_table

        ts, cols = self._label_columns(iou)
        extra = self.inputs[0].extra if self.inputs is not None else None
        none_i, none_f = np.zeros(0, np.int64), np.zeros(0)
        return truth_table(
            self.records,
            self._positive,
            cols[self._tlabel] if len(cols) else none_i,
            ts[self._tlabel] if len(ts) else none_f,
            self.records.det_outcome,
            cols[self._dlabel] if len(cols) else none_i,
            self._matched_index,
            self._floor,
            extra,
        )

    def _operating(self, iou: float | None, pick) -> Any:
        from obbiou.evaluation.operating import operating_table

        ts = self._label_thresholds(iou)
        points = {}
        for i, lab in enumerate(self.labels):
            idx = self._by_label[lab]
            npos = int(self._positive[self._truths_of[lab]].sum())
            out = self._outcome[idx, self._col(ts[i])]
            points[lab] = pick(self.records.det_score[idx], out, npos, float(ts[i]))
        return operating_table(points)

    def at_score(self, score: float, iou: float | None = None) -> Any:
        """Per label: precision, recall, F1, TP, FP and missed keeping detections >= ``score``.

        A DataFrame indexed by label with columns ``threshold``, ``score`` (the cut),
        ``detections`` (kept and evaluated), ``tp``, ``fp``, ``ignored``, ``missed``,
        ``truths``, ``precision``, ``recall``, ``f1``; ``<NA>`` where a value is undefined
        (precision with nothing kept, recall without truths). ``iou`` as for
        :meth:`detections` (``None``: each label at the most lenient of its own thresholds).
        Exact without re-matching: see :mod:`obbiou.evaluation.operating`. Capped
        detections are never kept; in a bucket, the bucket's outcomes are used.

        Examples
        --------
        >>> from obbiou.evaluation import evaluate
        >>> box = {"cx": [0.0, 10.0, 20.0], "cy": [0.0] * 3, "width": [4.0] * 3,
        ...        "height": [2.0] * 3, "angle": [0.0] * 3}
        >>> truth = {"frame": [0] * 3, "label": ["vessel"] * 3, **box}
        >>> dets = {"frame": [0] * 3, "label": ["vessel"] * 3, "score": [0.9, 0.8, 0.7],
        ...         **box, "cy": [0.0, 50.0, 0.0]}  # the 0.8 is a false alarm
        >>> ev = evaluate(truth, dets)
        >>> ev.at_score(0.75)[["tp", "fp", "missed", "precision", "recall", "f1"]]
                tp  fp  missed  precision    recall   f1
        label
        vessel   1   1       2        0.5  0.333333  0.4

        A cut above every score keeps nothing: precision undefined.

        >>> row = ev.at_score(0.95).loc["vessel"]
        >>> int(row.detections), row.precision, float(row.f1)
        (0, <NA>, 0.0)
        """
        from obbiou.evaluation.operating import at_cut

        cut = _finite(score, "score")
        return self._operating(iou, lambda s, o, n, t: at_cut(s, o, n, cut, t))

    def best_score(self, iou: float | None = None) -> Any:
        """Per label: the score cut with the highest F1, and the values there.

        The same columns as :meth:`at_score`. Cuts are the scores of the label's TP and FP
        detections; of cuts with equal F1 the highest score is reported (the fewest
        detections kept). A label without TP or FP detections has ``score`` ``<NA>``.
        ``iou`` as for :meth:`detections`.

        Examples
        --------
        >>> from obbiou.evaluation import evaluate
        >>> box = {"cx": [0.0, 10.0, 20.0], "cy": [0.0] * 3, "width": [4.0] * 3,
        ...        "height": [2.0] * 3, "angle": [0.0] * 3}
        >>> truth = {"frame": [0] * 3, "label": ["vessel"] * 3, **box}
        >>> dets = {"frame": [0] * 3, "label": ["vessel"] * 3, "score": [0.9, 0.8, 0.7],
        ...         **box, "cy": [0.0, 50.0, 0.0]}
        >>> evaluate(truth, dets).best_score()[["score", "tp", "fp", "f1"]]
                score  tp  fp        f1
        label
        vessel    0.7   2   1  0.666667
        """
        from obbiou.evaluation.operating import best_cut

        return self._operating(iou, best_cut)

    def confusion(self, iou: float | None = None) -> Any:
        """Truth label x detected label, matched at ``iou`` by IoU alone, labels ignored
        (by the evaluation's criterion: IoU, BEV IoU or centre distance).

        The same greedy rule as the protocol with every label made one (see
        :mod:`obbiou.evaluation.confusion`): rows are truth labels plus ``(background)``
        (detections that took no truth: false alarms and duplicates), columns detected labels
        plus ``(missed)`` (non-ignore truths no detection took). Ignore truths have no row;
        detections absorbed by one (IoU >= ``iou`` with an ignore truth, no truth taken) and
        capped detections are left out and counted in ``attrs["ignored"]`` /
        ``attrs["capped"]``. ``iou=None``: the most lenient threshold evaluated (one
        threshold for all labels even with per-label thresholds, since labels are ignored);
        any threshold may be given, as the detections are matched again. Truths set aside
        for too few lidar points are ignore truths here too.

        Needs the boxes: available when the evaluation holds its input tables
        (:attr:`inputs`), not when it was built from match records alone, nor for a size or
        range bucket.

        Examples
        --------
        >>> from obbiou.evaluation import evaluate
        >>> box = {"cx": [0.0, 10.0], "cy": [0.0] * 2, "width": [4.0] * 2,
        ...        "height": [2.0] * 2, "angle": [0.0] * 2}
        >>> truth = {"frame": [0, 0], "label": ["crane", "vessel"], "ignore": [False, True],
        ...          **box}
        >>> dets = {"frame": [0, 0], "label": ["vessel", "vessel"], "score": [0.9, 0.8],
        ...         **box}
        >>> table = evaluate(truth, dets).confusion()
        >>> table
        detected      crane  vessel  (missed)
        truth
        crane             0       1         0
        vessel            0       0         0
        (background)      0       0         0
        >>> table.attrs["ignored"]  # the detection on the ignore truth
        1
        """
        from obbiou.evaluation.confusion import confusion_table

        if self.bucket is not None:
            reason = "not available for a size or range bucket; call it on the whole evaluation"
            raise InvalidInput("confusion", reason)
        if self.inputs is None:
            reason = (
                "needs the boxes, which an evaluation built from match records alone does not "
                "hold; call it on the result of evaluate()"
            )
            raise InvalidInput("confusion", reason)
        if iou is None:
            t = self._default_iou(None)
        else:
            argument = "distance" if self.criterion == "distance" else "iou"
            values = parse_thresholds(iou, argument=argument).values
            if len(values) != 1:
                raise InvalidInput(argument, f"expected one threshold, got {iou!r}")
            t = values[0]
        truth, dets = self.inputs
        r = self.records
        if r.truth_set_aside.any():  # truths with too few lidar points are ignore truths
            aside = np.zeros(len(truth), dtype=bool)
            aside[r.truth_row] = r.truth_set_aside
            truth = replace(truth, ignore=truth.ignore | aside)
        cap = self.options.get("max_detections")
        return confusion_table(
            truth, dets, self.labels, t, max_detections=cap, criterion=self.criterion
        )

    # -- errors of true positives -----------------------------------------------------------
    def tp_error(self, label: Any, iou: float | None = None) -> _tpe.TpErrors:
        """Errors of the true positives of ``label`` at one threshold (default: the most
        lenient): mean centre distance, mean size error, mean orientation error (radians),
        AP and, for upright boxes, the heading-weighted AP. See
        :mod:`obbiou.evaluation.tp_errors` for the definitions.

        Examples
        --------
        Hand-worked: a 4 x 2 x 1.5 car found 0.5 m off with its heading a quarter turn off.
        Centre distance 0.5; size error 0 (same size once aligned); orientation error π/2;
        AP 1; heading-weighted AP: the TP counts 1 - (π/2)/π = 1/2, so precision and recall
        are 1/2 and APH = 1/4.

        >>> from obbiou.evaluation import evaluate
        >>> cols = ("cx", "cy", "cz", "length", "width", "height", "yaw")
        >>> car = dict(zip(cols, ([0.0], [0.0], [0.75], [4.0], [2.0], [1.5], [0.0])))
        >>> seen = dict(car, cx=[0.5], yaw=[np.pi / 2], score=[0.9])
        >>> ev = evaluate({"frame": [0], "label": ["car"], **car},
        ...               {"frame": [0], "label": ["car"], **seen}, distance=[1.0])
        >>> e = ev.tp_error("car")
        >>> e.tp, e.centre_distance, e.size_error, round(e.orientation_error, 6)
        (1, 0.5, 0.0, 1.570796)
        >>> e.ap, e.heading_ap
        (1.0, 0.25)
        """
        lab = self._label(label)
        t = self._default_iou(iou)
        if t not in self._spec.of(lab):
            raise InvalidInput("iou", f"label {lab!r} is not evaluated at {t:g}")
        k = self._col(t)
        r = self.records
        idx = self._by_label[lab]
        out = self._outcome[idx, k]
        tp = idx[out == TP]
        ti = self._matched_index[tp, k]
        shape = r.shape

        def mean(v: np.ndarray) -> float | None:
            return float(v.mean()) if len(v) else None

        dist = _tpe.centre_distance(r.det_centre[tp], r.truth_centre[ti])
        size = _tpe.size_error(r.det_aligned[tp], r.truth_aligned[ti], shape)
        orient = heading_ap = None
        if shape not in ("axis", "axis3"):  # the rule of orientation_error (near-squares)
            orient = _bd.orientation_error(
                r.det_angle[tp], r.truth_angle[ti], shape, r.det_aspect[tp], r.truth_aspect[ti]
            ).mean
        value, counts = self._cells[(lab, t)]
        if shape == "upright":
            keep = (out == TP) | (out == FP)
            weights = np.zeros(len(idx))
            err = _tpe.heading_error(r.det_angle[tp], r.truth_angle[ti], 2 * np.pi)
            weights[out == TP] = 1.0 - err / np.pi
            heading_ap = _ap.weighted_average_precision(
                np.clip(weights[keep], 0.0, 1.0),
                counts.truths,
                kind=self._ap if self._recall_points is None else "all-points",
                recall_points=self._recall_points,
            )
        return _tpe.TpErrors(
            lab, t, int(len(tp)), mean(dist), mean(size), orient, value, heading_ap
        )

    def tp_errors(self, iou: float | None = None) -> Any:
        """Errors of true positives per label and threshold, as a pandas DataFrame.

        One row per label and threshold (``iou=None``: every threshold; else the one given),
        columns :data:`obbiou.evaluation.tp_errors.TP_ERROR_COLUMNS`: ``label``,
        ``threshold``, ``tp``, ``centre_distance``, ``size_error``, ``orientation_error``
        (radians), ``ap``, ``heading_ap``; undefined values (no TP, no orientation, no
        heading) are missing (NaN). See :meth:`tp_error` for one label and
        :mod:`obbiou.evaluation.tp_errors` for the definitions.
        """
        import pandas as pd

        rows = []
        for lab in self.labels:
            ts = self._spec.of(lab) if iou is None else self._thresholds_of(lab, iou)
            rows.extend(self.tp_error(lab, t) for t in ts)
        frame = pd.DataFrame(rows, columns=list(_tpe.TP_ERROR_COLUMNS))
        for c in _tpe.TP_ERROR_COLUMNS[3:]:
            frame[c] = frame[c].astype(np.float64)
        return frame

    # -- reports -----------------------------------------------------------------------------
    def summary(self, *, note: bool = True) -> str:
        """A readable text table: one line per label and threshold, then the means, and the
        safety note (``note=False`` leaves it out, for a report that says it once)."""
        from obbiou.evaluation.text import summary_text

        return summary_text(self, note=note)

    def to_dict(self, *, breakdowns: bool = True, interval: Mapping | None = None) -> dict:
        """JSON-safe result: mean AP, per-label AP and counts, thresholds, protocol options.

        Undefined values (a label without truths) are ``None``, never NaN. Angles (the
        orientation error) are in degrees, with ``_deg`` in their keys. ``interval``, the
        keyword arguments of :meth:`interval` (``resamples``, ``level``, ``seed``), adds the
        bootstrap interval of mean AP under ``"interval"``.

        Examples
        --------
        >>> from obbiou.evaluation import evaluate
        >>> box = {"frame": [0, 1], "label": ["skiff"] * 2, "x_min": [0, 0], "y_min": [0, 0],
        ...        "x_max": [2, 2], "y_max": [1, 1]}
        >>> d = evaluate(box, dict(box, score=[0.9, 0.8])).to_dict(interval={"resamples": 50})
        >>> d["mean_ap"], d["interval"]["low"], d["interval"]["high"], d["interval"]["level"]
        (1.0, 1.0, 1.0, 0.95)
        """

        def num(v):
            return None if v is None or (isinstance(v, float) and math.isnan(v)) else float(v)

        labels = {}
        for lab in self.labels:
            ts = self._spec.of(lab)
            labels[lab] = {
                "ap": {_key(t): num(self._cells[(lab, t)][0]) for t in ts},
                "counts": {_key(t): self._cells[(lab, t)][1]._asdict() for t in ts},
            }
        by = {_key(t): num(self.mean_ap(t)) for t in self.thresholds}
        d: dict[str, Any] = {
            "mean_ap": num(self.mean_ap()),
            "criterion": self.criterion,
            "rule": {_key(t): self.rule(t) for t in self.thresholds},
            ("mean_ap_by_distance" if self.criterion == "distance" else "mean_ap_by_iou"): by,
            "thresholds": [float(t) for t in self.thresholds],
            "frames": int(len(self.frames)),
            "detections": self.records.n_detections,
            "truths": self.records.n_truths,
            "labels": labels,
            "protocol": self.protocol(),
        }
        if self.bucket is not None:
            d["bucket"] = {
                "name": self.bucket[0],
                "by": self.bucket[1],
                **dict(zip(("low", "high"), _json_edges(self.bucket[2:]), strict=True)),
            }
        points = self.point_counts()
        if points is not None:
            d["points"] = points
        if breakdowns:
            d["false_positives"] = {k: v._asdict() for k, v in self.false_positives().items()}
            d["misses"] = {k: v._asdict() for k, v in self.misses().items()}
            if self.records.shape not in ("axis", "axis3"):
                d["orientation_error"] = _degrees(self.orientation_error())
            d["tp_errors"] = {
                lab: {_key(t): _tp_json(self.tp_error(lab, t)) for t in self._spec.of(lab)}
                for lab in self.labels
            }
            for by, group in self.buckets.items():
                d.setdefault("buckets", {})[by] = {
                    name: ev.to_dict(breakdowns=False) for name, ev in group.items()
                }
        if interval is not None:
            opts = {"resamples": 1000, "level": 0.95, "seed": 0, **dict(interval)}
            low, high = self.interval(**opts)
            seed = opts["seed"]
            d["interval"] = {
                "of": "mean AP over all thresholds",
                "low": low,
                "high": high,
                **opts,
                "seed": seed if isinstance(seed, (int, type(None))) else str(seed),
                "method": "percentile bootstrap over frames",
            }
        d["note"] = SAFETY_NOTE
        return d

    def point_counts(self) -> dict | None:
        """Lidar points inside the truths, per label (``None`` without a point table).

        Per label: ``truths`` (all of its truths), ``set_aside`` (made ignore truths for
        holding fewer than ``min_points`` points), ``no_points`` (truths holding none),
        ``median`` (median count); and ``min_points`` (None when no truth was set aside by
        count). The count of each truth is ``records.truth_points``.
        """
        r = self.records
        if not r.n_truths or not np.all(r.truth_points >= 0):
            return None
        out: dict[str, Any] = {"min_points": self.options.get("min_points"), "labels": {}}
        for lab in self.labels:
            idx = self._truths_of[lab]
            if not len(idx):
                continue
            c = r.truth_points[idx]
            out["labels"][lab] = {
                "truths": int(len(idx)),
                "set_aside": int(r.truth_set_aside[idx].sum()),
                "no_points": int((c == 0).sum()),
                "median": float(np.median(c)),
            }
        return out

    def protocol(self) -> dict:
        """The protocol options of this evaluation (JSON-safe)."""
        per_label = None
        if self._spec.per_label is not None:
            per_label = {k: list(v) for k, v in self._spec.per_label.items()}
        return {
            "shape": self.records.shape,
            "ap": self._ap if self._recall_points is None else None,
            "recall_points": self._recall_points,
            "thresholds": [float(t) for t in self.thresholds],
            "thresholds_per_label": per_label,
            "default_thresholds": list(self._spec.default) if self._spec.default else None,
            "localisation_floor": self._floor,
            **self.options,
            "criterion": self.criterion,
            "matching": _MATCHING[self.criterion],
        }

    def to_json(
        self, path: str, *, interval: Mapping | None = None, extra: Mapping | None = None
    ) -> None:
        """Write :meth:`to_dict` as JSON to ``path`` (``interval``: as there), with the
        JSON-safe entries of ``extra`` whose value is not ``None`` added at the top level."""
        d = self.to_dict(interval=interval)
        d.update({k: v for k, v in (extra or {}).items() if v is not None})
        with open(path, "w", encoding="utf-8") as fh:
            json.dump(d, fh, indent=2, allow_nan=False)
            fh.write("\n")

    def plot(self, path: str, *, iou: float | None = None, title: str | None = None) -> None:
        """Precision-recall curves per label, PNG at ``path``.

        Each label is drawn at ``iou`` or, by default, at its own most lenient threshold (a
        label with a threshold of its own is drawn at it); see
        :func:`obbiou.evaluation.plots.draw_curves`. ``title`` (optional) heads the figure,
        e.g. the data set and model name.
        """
        from obbiou.evaluation.plots import plot_curves

        plot_curves(self, path, iou=iou, title=title)

    def __repr__(self) -> str:
        m = self.mean_ap()
        shown = "n/a" if m is None else f"{m:.4f}"
        return (
            f"<Evaluation {self.records.shape}: {len(self.labels)} labels, "
            f"{len(self.thresholds)} thresholds, mean AP {shown}>"
        )


_MATCHING = {
    "iou": "greedy by descending score per frame and label; highest IoU >= threshold among "
    "unmatched non-ignore truths (ties: earlier truth); else ignored if IoU >= threshold with "
    "an ignore truth; else false positive",
    "bev": "greedy by descending score per frame and label; highest IoU of the ground-plane "
    "footprints (bird's-eye view) >= threshold among unmatched non-ignore truths (ties: "
    "earlier truth); else ignored if that IoU >= threshold with an ignore truth; else false "
    "positive",
    "distance": "greedy by descending score per frame and label; nearest unmatched non-ignore "
    "truth whose ground-plane centre lies within the threshold distance (metres; ties: "
    "earlier truth); else ignored if an ignore truth lies within it; else false positive "
    "(Caesar et al., CVPR 2020)",
}


def reduce_records(
    records: MatchRecords | Sequence[MatchRecords],
    *,
    iou: Any = None,
    distance: Any = None,
    ap: str = "all-points",
    recall_points: int | None = None,
    size_buckets: Any = None,
    range_buckets: Any = None,
    localisation_floor: float = 0.1,
    options: dict | None = None,
    inputs: tuple[Table, Table] | None = None,
) -> Evaluation:
    """The reduce step: AP, counts and breakdowns from match records.

    Parameters
    ----------
    records : MatchRecords or sequence of them
        One per partition of the frames (each frame wholly in one); concatenated and sorted
        into one canonical order first, so the numbers never depend on the partitioning.
    iou : optional
        Which thresholds (and per-label thresholds) to report, as for :func:`evaluate`;
        ``None``: all thresholds in the records.
    distance : optional
        The same for records matched by centre distance (either may be used there).
    ap, recall_points, size_buckets, range_buckets, localisation_floor
        As for :func:`evaluate`.
    options : dict, optional
        Options of the map step to record in the protocol (``max_detections``, ``degrees``).
    inputs : (Table, Table), optional
        The validated truth and detection tables the records were matched from (rows
        numbered as in the records); kept as :attr:`Evaluation.inputs`.

    Returns
    -------
    Evaluation
    """
    if not isinstance(records, MatchRecords):
        records = MatchRecords.concat(records)
    rec = records.canonical()
    _check_whole_frames(rec)
    argument = "distance" if rec.criterion == "distance" else "iou"
    if iou is not None and distance is not None:
        raise InvalidInput("distance", "give either iou= or distance=, not both")
    chosen = distance if distance is not None else iou
    if distance is not None and argument != "distance":
        raise InvalidInput("distance", f"the records were matched by {rec.criterion}, not distance")
    spec = parse_thresholds(list(rec.thresholds) if chosen is None else chosen, argument=argument)
    opts = {"max_detections": None, "degrees": False, "min_points": None, **(options or {})}
    sizes = _parse_buckets(size_buckets, "size_buckets")
    ranges = _parse_buckets(range_buckets, "range_buckets")
    if ranges and rec.shape not in ("upright", "axis3"):
        raise InvalidInput("range_buckets", f"need 3D boxes (upright, axis3), got {rec.shape!r}")
    # JSON has no infinity: an open end is null
    opts["size_buckets"] = {k: _json_edges(v) for k, v in sizes.items()} or None
    opts["range_buckets"] = {k: _json_edges(v) for k, v in ranges.items()} or None
    kw = dict(
        ap=ap,
        recall_points=recall_points,
        options=opts,
        localisation_floor=localisation_floor,
        inputs=inputs,
    )
    result = Evaluation(rec, spec, **kw)
    for by, group in (("size", sizes), ("range", ranges)):
        if group:
            result.buckets[by] = {
                name: Evaluation(rec, spec, bucket=(name, by, lo, hi), **kw)
                for name, (lo, hi) in group.items()
            }
    return result


def _finite(value: Any, what: str) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InvalidInput(what, f"expected a number, got {value!r}") from None
    if math.isnan(v):
        raise InvalidInput(what, "expected a number, got NaN")
    return v


def _check_inputs(
    rec: MatchRecords, inputs: tuple[Table, Table] | None
) -> tuple[Table, Table] | None:
    """The input tables, checked to hold every row the records number."""
    if inputs is None:
        return None
    truth, dets = inputs
    for rows, table, what in ((rec.truth_row, truth, "truth"), (rec.det_row, dets, "detections")):
        if len(rows) != len(table) or (len(rows) and rows.max() >= len(table)):
            raise InvalidInput(
                "inputs",
                f"the {what} table has {len(table)} rows but the records number "
                f"{len(rows)} rows up to {int(rows.max()) if len(rows) else 0}",
            )
    return truth, dets


def _check_whole_frames(rec: MatchRecords) -> None:
    """Ranks within each frame must be 0..n-1: a frame split across parts would repeat them."""
    for frame, rank, what in (
        (rec.det_frame, rec.det_rank, "detections"),
        (rec.truth_frame, rec.truth_rank, "truths"),
    ):
        if not len(rank):
            continue
        _, codes = sorted_codes(frame)
        counts = np.bincount(codes)
        expected = np.arange(len(rank)) - np.repeat(np.r_[0, np.cumsum(counts)[:-1]], counts)
        if not np.array_equal(rank, expected):
            bad = frame[int(np.argmax(rank != expected))]
            raise InvalidInput(
                "records",
                f"frame {bad!r} has its {what} in more than one part; match each frame "
                "in one piece",
            )
