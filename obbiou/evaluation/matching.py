"""The map step of evaluation: per-frame greedy matching into compact match records.

:func:`match_frames` turns a truth table and a detection table into :class:`MatchRecords`:
plain numpy arrays, one row per detection and one per truth, with the outcome at every IoU
threshold. Records of disjoint sets of frames concatenate (:meth:`MatchRecords.concat`) and
the reduce step (:func:`obbiou.evaluation.reduce_records`) gives the same numbers however the
frames were split, as long as each frame lies wholly in one part.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, fields, replace
from typing import Any

import numpy as np

from obbiou._kernels.codes import Outcome
from obbiou.errors import InvalidInput
from obbiou.tables import Table, comparable_frame_ids, read_table

__all__ = [
    "CRITERIA",
    "MatchRecords",
    "match_frames",
    "Thresholds",
    "parse_thresholds",
    "ground_centres",
    "aligned_boxes",
]

#: What decides a match: the IoU of the boxes, the IoU of their ground-plane footprints
#: (bird's-eye view, 3D boxes), or the ground-plane distance of their centres.
CRITERIA = ("iou", "bev", "distance")

#: Outcome codes in :attr:`MatchRecords.det_outcome`, as plain ints (the int8 outcome arrays
#: and the kernels hold these; the names are those of obbiou._kernels.codes.Outcome).
FP, TP, IGNORED, CAPPED = (
    int(o) for o in (Outcome.FP, Outcome.TP, Outcome.IGNORED, Outcome.CAPPED)
)


@dataclass(frozen=True)
class Thresholds:
    """IoU thresholds: the sorted union ``values`` and, optionally, a subset per label.

    ``per_label`` maps a label to its own thresholds; ``default`` applies to labels not in
    ``per_label`` (``None``: every label must be listed).
    """

    values: tuple[float, ...]
    per_label: dict[str, tuple[float, ...]] | None = None
    default: tuple[float, ...] | None = None
    #: ``"iou"`` (thresholds in (0, 1]) or ``"distance"`` (metres > 0): the argument read.
    argument: str = "iou"

    def of(self, label: str) -> tuple[float, ...]:
        """The thresholds that apply to ``label``."""
        if self.per_label is None:
            return self.values
        if label in self.per_label:
            return self.per_label[label]
        if self.default is not None:
            return self.default
        raise InvalidInput(
            self.argument,
            f"no threshold for label {label!r}; list it in the mapping or add a default "
            "under the key None",
        )


#: Most IoU thresholds one evaluation takes: a step of 0.00001 across [0, 1]. The cost of an
#: evaluation grows linearly with the count, and so does its memory: the match records hold
#: every detection's outcome, matched truth and IoU at every threshold (17 bytes per
#: detection and threshold: 100 001 thresholds of 100 000 detections are 170 GB). Finer
#: steps change no AP that matters (rule of thumb, no source).
MAX_THRESHOLDS = 100_001


def _too_many(count: int, what: str, argument: str = "iou") -> InvalidInput:
    return InvalidInput(
        argument,
        f"{what} gives {count:,} thresholds; at most {MAX_THRESHOLDS:,} are evaluated (a step "
        "of 0.00001 across [0, 1]): each threshold costs time and 17 bytes of match records "
        "per detection",
    )


def _check_threshold(v: Any, argument: str = "iou") -> float:
    if argument == "distance":
        try:
            f = float(v)
        except (TypeError, ValueError):
            raise InvalidInput(argument, f"expected a distance > 0 (metres), got {v!r}") from None
        if not (0.0 < f < np.inf):
            raise InvalidInput(argument, f"a distance threshold must be > 0 and finite, got {f!r}")
        return f
    try:
        f = float(v)
    except (TypeError, ValueError):
        raise InvalidInput(argument, f"expected a number in (0, 1], got {v!r}") from None
    if not (0.0 < f <= 1.0):
        raise InvalidInput(argument, f"a threshold must lie in (0, 1], got {f!r}")
    return f


def _parse_one(iou: Any, argument: str = "iou") -> tuple[float, ...]:
    def check(v: Any) -> float:
        return _check_threshold(v, argument)

    if isinstance(iou, str):
        text = iou.strip()
        if ":" in text:
            parts = text.split(":")
            if len(parts) != 3:
                raise InvalidInput(argument, f"expected 'start:stop:step', got {iou!r}")
            try:
                start, stop, step = (float(p) for p in parts)
            except ValueError:
                raise InvalidInput(
                    argument, f"expected numbers in 'start:stop:step', got {iou!r}"
                ) from None
            if step <= 0 or stop < start:
                raise InvalidInput(
                    argument, f"'start:stop:step' needs step > 0 and stop >= start: {iou!r}"
                )
            if not all(np.isfinite((start, stop, step))):
                raise InvalidInput(argument, f"'start:stop:step' needs finite numbers: {iou!r}")
            # inclusive of stop within rounding: 0.5:0.95:0.05 gives 10 thresholds
            count = int(np.floor((stop - start) / step + 1e-9)) + 1
            if count > MAX_THRESHOLDS:  # before building them: 5 million would take long
                raise _too_many(count, repr(iou), argument)
            values = [round(start + i * step, 10) for i in range(count)]
            return tuple(sorted({check(v) for v in values}))
        if "," in text:
            return tuple(sorted({check(p) for p in text.split(",")}))
        return (check(text),)
    if isinstance(iou, (Sequence, np.ndarray)):
        if len(iou) > MAX_THRESHOLDS:
            raise _too_many(len(iou), "the sequence", argument)
        values = tuple(sorted({check(v) for v in iou}))
        if not values:
            raise InvalidInput(argument, "no thresholds given")
        return values
    return (check(iou),)


def parse_thresholds(iou: Any, *, argument: str = "iou") -> Thresholds:
    """Read the ``iou`` (or ``distance``) argument of :func:`~obbiou.evaluation.evaluate`.

    A number, a sequence, a ``"start:stop:step"`` string (stop included within rounding), a
    comma list ``"0.5,0.7"``, or a mapping label -> any of these (key ``None``: the default
    for other labels). With ``argument="distance"`` the values are centre distances in
    metres (any finite number > 0) instead of IoUs in (0, 1]. At most
    :data:`MAX_THRESHOLDS` (100 001) distinct thresholds: the cost of an evaluation grows
    linearly with their count, its match records by 17 bytes per detection and threshold.

    Examples
    --------
    >>> parse_thresholds("0.5:0.95:0.05").values
    (0.5, 0.55, 0.6, 0.65, 0.7, 0.75, 0.8, 0.85, 0.9, 0.95)
    >>> t = parse_thresholds({"car": 0.7, "person": 0.5})
    >>> t.values, t.of("car")
    ((0.5, 0.7), (0.7,))
    >>> parse_thresholds(1.5)
    Traceback (most recent call last):
    ...
    obbiou.errors.InvalidInput: iou: a threshold must lie in (0, 1], got 1.5
    >>> parse_thresholds("0.5:0.95:0.0000001")
    Traceback (most recent call last):
    ...
    obbiou.errors.InvalidInput: iou: '0.5:0.95:0.0000001' gives 4,500,001 thresholds; at most
    100,001 are evaluated (a step of 0.00001 across [0, 1]): each threshold costs time and 17
    bytes of match records per detection
    >>> parse_thresholds("0.5,1,2,4", argument="distance").values
    (0.5, 1.0, 2.0, 4.0)
    """
    if argument not in ("iou", "distance"):
        raise InvalidInput("argument", f"expected 'iou' or 'distance', got {argument!r}")
    if isinstance(iou, Thresholds):
        if iou.argument != argument:
            raise InvalidInput(argument, f"these thresholds are {iou.argument} thresholds")
        return iou
    if isinstance(iou, Mapping):
        if not iou:
            raise InvalidInput(argument, "empty mapping")
        per_label = {str(k): _parse_one(v, argument) for k, v in iou.items() if k is not None}
        default = _parse_one(iou[None], argument) if None in iou else None
        union = set().union(*per_label.values(), default or ())
        if len(union) > MAX_THRESHOLDS:
            raise _too_many(len(union), "the mapping", argument)
        return Thresholds(tuple(sorted(union)), per_label, default, argument)
    return Thresholds(_parse_one(iou, argument), argument=argument)


@dataclass(frozen=True)
class MatchRecords:
    """Compact per-detection and per-truth outcomes of matching (the map step's output).

    Detections (one row each): ``det_frame`` (frame id), ``det_rank`` (position among the
    frame's detections in input order), ``det_row`` (row of the detection in the whole input
    table, from 0: see ``detection_rows`` of :func:`match_frames`), ``det_label``,
    ``det_score``, ``det_size`` (area / volume), ``det_range`` (ground distance of the
    centre from the origin, 3D; NaN in 2D), ``det_angle`` (orientation, NaN for axis-aligned
    layouts), ``det_aspect`` (long side over short side of a rectangle or polygon, NaN
    otherwise), and per threshold (columns of ``thresholds``): ``det_outcome`` (0 FP, 1 TP,
    2 ignored, 3 capped), ``det_truth`` (rank within the frame of the matched truth, or of
    the ignore truth that absorbed it; -1 if none) and ``det_iou`` (its IoU);
    ``det_best_same`` / ``det_best_other`` (highest IoU with any non-ignore truth of the
    same / another label in the frame).

    Truths (one row each): ``truth_frame``, ``truth_rank``, ``truth_row``, ``truth_label``,
    ``truth_ignore``, ``truth_size``, ``truth_range``, ``truth_angle``, ``truth_aspect`` and
    ``truth_matched`` (per threshold), ``truth_best_same`` / ``truth_best_other`` (highest IoU
    with any evaluated detection of the same / another label in the frame).

    Geometry kept for the errors of true positives (both sides): ``det_centre`` /
    ``truth_centre`` ``(n, 2)`` ground-plane centres (:func:`ground_centres`) and
    ``det_aligned`` / ``truth_aligned`` the boxes moved to the origin and turned to heading 0
    (:func:`aligned_boxes`). Lidar points: ``truth_points`` (points inside each truth, -1
    when no point table was given) and ``truth_set_aside`` (True when the truth became an
    ignore truth for holding fewer than ``min_points`` points; such truths also have
    ``truth_ignore`` True).

    ``criterion`` says what decided the matches (:data:`CRITERIA`): ``"iou"``, ``"bev"``
    (IoU of the ground-plane footprints) or ``"distance"`` (ground-plane centre distance,
    metres). The per-pair values ``det_iou``, ``det_best_same``, ``det_best_other``,
    ``truth_best_same``, ``truth_best_other`` are in the criterion's measure: IoU (higher is
    closer; 0 when there is no pair) or, for ``"distance"``, the centre distance (lower is
    closer; ``det_iou`` NaN for a detection with no pair, the best values ``inf`` when no
    truth or detection of that kind lies within the largest threshold).
    """

    thresholds: np.ndarray
    shape: str
    det_frame: np.ndarray
    det_rank: np.ndarray
    det_row: np.ndarray
    det_label: np.ndarray
    det_score: np.ndarray
    det_size: np.ndarray
    det_range: np.ndarray
    det_angle: np.ndarray
    det_aspect: np.ndarray
    det_outcome: np.ndarray
    det_truth: np.ndarray
    det_iou: np.ndarray
    det_best_same: np.ndarray
    det_best_other: np.ndarray
    truth_frame: np.ndarray
    truth_rank: np.ndarray
    truth_row: np.ndarray
    truth_label: np.ndarray
    truth_ignore: np.ndarray
    truth_size: np.ndarray
    truth_range: np.ndarray
    truth_angle: np.ndarray
    truth_aspect: np.ndarray
    truth_matched: np.ndarray
    truth_best_same: np.ndarray
    truth_best_other: np.ndarray
    det_centre: np.ndarray
    det_aligned: np.ndarray
    truth_centre: np.ndarray
    truth_aligned: np.ndarray
    truth_points: np.ndarray
    truth_set_aside: np.ndarray
    criterion: str = "iou"

    @property
    def n_detections(self) -> int:
        return int(self.det_score.shape[0])

    @property
    def n_truths(self) -> int:
        return int(self.truth_ignore.shape[0])

    @classmethod
    def concat(cls, parts: Sequence[MatchRecords]) -> MatchRecords:
        """Join the records of disjoint sets of frames (same thresholds and shape).

        Examples
        --------
        >>> t = {"frame": [0, 1], "label": ["a", "a"], "x_min": [0, 0], "y_min": [0, 0],
        ...      "x_max": [1, 1], "y_max": [1, 1]}
        >>> d = dict(t, score=[0.9, 0.8])
        >>> r = match_frames(t, d, thresholds=[0.5])
        >>> MatchRecords.concat([r, r]).n_detections
        4
        """
        parts = list(parts)
        if not parts:
            raise InvalidInput("concat", "no records given")
        first = parts[0]
        for p in parts[1:]:
            if not np.array_equal(p.thresholds, first.thresholds):
                raise InvalidInput("concat", "records were matched at different thresholds")
            if p.shape != first.shape:
                raise InvalidInput("concat", f"records of shapes {first.shape!r} and {p.shape!r}")
            if p.criterion != first.criterion:
                reason = f"records matched by {first.criterion!r} and by {p.criterion!r}"
                raise InvalidInput("concat", reason)
        values = {}
        for f in fields(cls):
            if f.name in ("thresholds", "shape", "criterion"):
                continue
            arrays = [getattr(p, f.name) for p in parts]
            if f.name in ("det_frame", "truth_frame"):
                arrays = comparable_frame_ids(arrays)
            values[f.name] = np.concatenate(arrays)
        return cls(first.thresholds, first.shape, **values, criterion=first.criterion)

    def canonical(self) -> MatchRecords:
        """The same records sorted by (frame, rank): one order however they were split."""
        frames = comparable_frame_ids([self.det_frame, self.truth_frame])
        both = np.concatenate(frames)
        _, codes = sorted_codes(both)
        dcode, tcode = codes[: self.n_detections], codes[self.n_detections :]
        d = np.lexsort((self.det_rank, dcode))
        t = np.lexsort((self.truth_rank, tcode))
        values = {}
        for f in fields(self):
            v = getattr(self, f.name)
            if f.name.startswith("det_"):
                v = (frames[0] if f.name == "det_frame" else v)[d]
            elif f.name.startswith("truth_"):
                v = (frames[1] if f.name == "truth_frame" else v)[t]
            values[f.name] = v
        return MatchRecords(**values)


def sorted_codes(values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Sorted distinct values and the code (index into them) of each value.

    Same result as ``np.unique(values, return_inverse=True)``, by hashing (fast for text).

    Examples
    --------
    >>> u, c = sorted_codes(np.array(["b", "a", "b"], dtype=object))
    >>> u.tolist(), c.tolist()
    (['a', 'b'], [1, 0, 1])
    """
    import pandas as pd

    codes, uniques = pd.factorize(values, sort=False)
    uniques = np.asarray(uniques, dtype=values.dtype if values.dtype.kind != "U" else object)
    order = np.argsort(uniques, kind="stable")
    rank = np.empty(len(order), dtype=np.int64)
    rank[order] = np.arange(len(order))
    return uniques[order], rank[codes] if len(codes) else np.zeros(0, dtype=np.int64)


def _orientation(boxes: np.ndarray, shape: str) -> np.ndarray:
    """Orientation per box: long-axis angle (rotated, polygon), yaw (upright), NaN (axis)."""
    n = boxes.shape[0]
    if shape == "rotated":
        a = boxes[:, 4].copy()
        # a rectangle taller than wide points along its own y axis
        return np.where(boxes[:, 2] < boxes[:, 3], a + np.pi / 2, a)
    if shape == "upright":
        return boxes[:, 6].copy()
    if shape == "polygon":
        # direction of the longest edge: the long axis of a rectangle given by its corners
        edges = np.roll(boxes, -1, axis=1) - boxes
        lengths = np.hypot(edges[..., 0], edges[..., 1])
        k = np.argmax(lengths, axis=1) if n else np.zeros(0, dtype=np.int64)
        e = edges[np.arange(n), k]
        return np.arctan2(e[:, 1], e[:, 0])
    return np.full(n, np.nan)


def _aspect(boxes: np.ndarray, shape: str) -> np.ndarray:
    """Long side over short side (rotated), longest over shortest edge (polygon); else NaN."""
    if shape == "rotated":
        sides = np.abs(boxes[:, 2:4])
    elif shape == "polygon":
        edges = np.roll(boxes, -1, axis=1) - boxes
        sides = np.hypot(edges[..., 0], edges[..., 1])
    else:
        return np.full(boxes.shape[0], np.nan)
    if not len(sides):
        return np.zeros(0)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = sides.max(axis=1) / sides.min(axis=1)
    return np.where(np.isnan(ratio), 1.0, ratio)  # a point (0/0) is as round as a square


def _ranges(boxes: np.ndarray, shape: str) -> np.ndarray:
    if shape == "upright":
        return np.hypot(boxes[:, 0], boxes[:, 1])
    if shape == "axis3":
        return np.hypot((boxes[:, 0] + boxes[:, 3]) / 2, (boxes[:, 1] + boxes[:, 4]) / 2)
    return np.full(boxes.shape[0], np.nan)


def ground_centres(boxes: np.ndarray, shape: str) -> np.ndarray:
    """Centre of each box in the ground plane (2D layouts: the image plane), ``(n, 2)``.

    ``axis`` / ``axis3``: the middle of the x and y extents; ``rotated`` / ``upright``:
    ``cx, cy``; ``polygon``: the centroid of the area (shoelace formula, taken relative to
    the first vertex so that map coordinates lose nothing; the mean of the vertices for a
    polygon of zero area). For a rectangle or any parallelogram given by its corners the
    centroid is the mean of the corners.

    Examples
    --------
    >>> ground_centres(np.array([[0.0, 0.0, 4.0, 2.0]]), "axis").tolist()
    [[2.0, 1.0]]
    >>> square_with_extra_vertex = np.array([[[0, 0], [2, 0], [2, 1], [2, 2], [0, 2]]], float)
    >>> ground_centres(square_with_extra_vertex, "polygon").tolist()  # area centroid
    [[1.0, 1.0]]
    >>> ground_centres(np.zeros((0, 7)), "upright").shape
    (0, 2)
    """
    b = np.asarray(boxes, dtype=np.float64)
    if shape in ("rotated", "upright"):
        return np.ascontiguousarray(b[:, :2])
    if shape == "axis":
        return np.column_stack([(b[:, 0] + b[:, 2]) / 2, (b[:, 1] + b[:, 3]) / 2])
    if shape == "axis3":
        return np.column_stack([(b[:, 0] + b[:, 3]) / 2, (b[:, 1] + b[:, 4]) / 2])
    if shape != "polygon":
        raise InvalidInput("shape", f"unknown shape {shape!r}")
    if not len(b):
        return np.zeros((0, 2))
    origin = b[:, :1, :]
    v = b - origin
    w = np.roll(v, -1, axis=1)
    cross = v[..., 0] * w[..., 1] - w[..., 0] * v[..., 1]
    area2 = cross.sum(axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        cx = ((v[..., 0] + w[..., 0]) * cross).sum(axis=1) / (3 * area2)
        cy = ((v[..., 1] + w[..., 1]) * cross).sum(axis=1) / (3 * area2)
    flat = area2 == 0
    mean = v.mean(axis=1)
    c = np.where(flat[:, None], mean, np.column_stack([cx, cy]))
    return c + origin[:, 0, :]


def aligned_boxes(boxes: np.ndarray, shape: str) -> np.ndarray:
    """Each box moved to the origin and turned to heading 0, in its own layout.

    Two aligned boxes differ only in size and shape: ``1 - iou`` of them is the size error
    of a matched pair. ``rotated``: ``0, 0, long side, short side, 0`` (a rectangle's
    heading is its long axis, modulo π); ``upright``: ``0, 0, 0, length, width, height, 0``;
    ``axis`` / ``axis3``: centred, sides kept along the axes (no heading); ``polygon``:
    vertices relative to the area centroid, turned so that the longest edge lies along +x.

    Examples
    --------
    >>> aligned_boxes(np.array([[5.0, 5.0, 2.0, 4.0, 0.3]]), "rotated").tolist()
    [[0.0, 0.0, 4.0, 2.0, 0.0]]
    >>> aligned_boxes(np.array([[1.0, 1.0, 3.0, 2.0]]), "axis").tolist()
    [[-1.0, -0.5, 1.0, 0.5]]
    """
    b = np.asarray(boxes, dtype=np.float64)
    n = b.shape[0]
    if shape == "rotated":
        out = np.zeros((n, 5))
        out[:, 2] = np.maximum(b[:, 2], b[:, 3])
        out[:, 3] = np.minimum(b[:, 2], b[:, 3])
        return out
    if shape == "upright":
        out = np.zeros((n, 7))
        out[:, 3:6] = b[:, 3:6]
        return out
    if shape in ("axis", "axis3"):
        d = b.shape[1] // 2
        half = (b[:, d:] - b[:, :d]) / 2
        return np.concatenate([-half, half], axis=1)
    if shape != "polygon":
        raise InvalidInput("shape", f"unknown shape {shape!r}")
    v = b - ground_centres(b, shape)[:, None, :]
    theta = _orientation(b, shape)
    c, s = np.cos(theta)[:, None], np.sin(theta)[:, None]
    return np.stack([v[..., 0] * c + v[..., 1] * s, v[..., 1] * c - v[..., 0] * s], axis=-1)


def _rank_in_group(codes: np.ndarray) -> np.ndarray:
    """Position of each row among the rows with the same code, in input order."""
    order = np.argsort(codes, kind="stable")
    sorted_codes = codes[order]
    starts = np.r_[0, np.flatnonzero(np.diff(sorted_codes)) + 1]
    first = np.repeat(starts, np.diff(np.r_[starts, len(codes)]))
    rank = np.empty(len(codes), dtype=np.int64)
    rank[order] = np.arange(len(codes)) - first
    return rank


def _pair_iou(det: np.ndarray, truth: np.ndarray, shape: str, first, second) -> np.ndarray:
    from obbiou.measures import pair_values
    from obbiou.shapes import Boxes

    return pair_values(Boxes(det, shape, False), Boxes(truth, shape, False), first, second)


def match_frames(
    truth: Any,
    detections: Any,
    *,
    thresholds: Any = 0.5,
    criterion: str = "iou",
    shape: str | None = None,
    max_detections: int | None = None,
    degrees: bool = False,
    progress: bool = False,
    chunk: int = 200_000,
    truth_rows: Any = None,
    detection_rows: Any = None,
    points: Any = None,
    min_points: int | None = None,
) -> MatchRecords:
    """Match detections to truths in every frame at every threshold (the map step).

    Follows the protocol of :func:`~obbiou.evaluation.evaluate`: per frame and label,
    detections in descending score (ties: input order) each take the unmatched non-ignore
    truth of highest IoU >= threshold (ties: the earlier truth) and are TPs; failing that, a
    detection with IoU >= threshold to an ignore truth of its label is ignored; otherwise it
    is an FP. With ``max_detections``, only the highest-scoring that many detections of each
    frame (all labels together; ties: input order) are evaluated, the rest are "capped".
    With ``criterion="distance"`` the same rule reads: the *nearest* unmatched non-ignore
    truth whose ground-plane centre lies within distance d (``hypot(dx, dy) <= d`` in
    float64; ties: the earlier truth); failing that, ignored when an ignore truth lies
    within d.

    The IoU of all (detection, truth) pairs of a frame whose axis-aligned envelopes touch is
    computed in one batched call per chunk of frames; pairs whose envelopes are apart have
    IoU 0 and cannot match at any threshold > 0. By distance, the candidates are the pairs
    whose centres are at most the largest threshold apart along x and along y.

    Parameters
    ----------
    truth, detections : Table or anything :func:`~obbiou.evaluation.read_table` reads
    thresholds : float, sequence, str or Thresholds
        IoU thresholds, or centre distances in metres with ``criterion="distance"`` (all of
        them are matched in one pass).
    criterion : {"iou", "bev", "distance"}
        What decides a match (:data:`CRITERIA`); ``"bev"`` needs 3D boxes.
    shape : str, optional
        Box layout; inferred from the columns when ``None``.
    max_detections : int, optional
        Cap per frame.
    degrees : bool
        Angle columns in degrees.
    progress : bool
        Show a progress bar (tqdm).
    chunk : int
        About this many detections per batched IoU call (bounds memory).
    truth_rows, detection_rows : array_like of int, optional
        The row of each table row in the whole input, recorded as ``truth_row`` /
        ``det_row`` (default: 0, 1, ... in the order given). Give them when the tables
        passed are pieces of larger inputs whose records are concatenated later, so that
        per-row results (:meth:`Evaluation.detections`) find each row's place in the input.
    points : path, DataFrame, mapping or Points, optional
        Lidar points with columns ``frame, x, y`` and optionally ``z``
        (:func:`obbiou.tables.read_points`): each truth's count of the points of its frame
        inside it goes into ``truth_points`` (:func:`count_truth_points`).
    min_points : int, optional
        With ``points``: truths holding fewer points become ignore truths (and are marked
        in ``truth_set_aside``).

    Returns
    -------
    MatchRecords

    Examples
    --------
    Two detections of one truth: the higher score is the TP, the other a duplicate (FP).

    >>> t = {"frame": [7], "label": ["crate"], "x_min": [0], "y_min": [0], "x_max": [2],
    ...      "y_max": [2]}
    >>> d = {"frame": [7, 7], "label": ["crate"] * 2, "score": [0.6, 0.9],
    ...      "x_min": [0, 0], "y_min": [0, 0], "x_max": [2, 2], "y_max": [2, 1.9]}
    >>> r = match_frames(t, d, thresholds=[0.5, 0.97])
    >>> r.det_outcome.tolist()  # rows in input order; columns: 0.5, 0.97
    [[0, 1], [1, 0]]
    """
    truth = read_table(truth, role="truth", shape=shape, degrees=degrees)
    detections = read_table(detections, role="detections", shape=shape, degrees=degrees)
    if truth.shape != detections.shape:
        reason = f"detections have shape {detections.shape!r} but truth has {truth.shape!r}"
        raise InvalidInput("detections", reason, message=reason)
    layout = truth.shape
    if criterion not in CRITERIA:
        raise InvalidInput(
            "criterion", f"expected one of {', '.join(map(repr, CRITERIA))}, got {criterion!r}"
        )
    if criterion == "bev" and layout not in ("upright", "axis3"):
        raise InvalidInput(
            "bev",
            f"bev=True compares the ground-plane footprints of 3D boxes (upright, axis3); "
            f"these are {layout!r} boxes",
        )
    argument = "distance" if criterion == "distance" else "iou"
    thr = np.asarray(parse_thresholds(thresholds, argument=argument).values, dtype=np.float64)
    if max_detections is not None and (int(max_detections) != max_detections or max_detections < 1):
        raise InvalidInput("max_detections", f"expected a positive integer, got {max_detections!r}")
    counts = np.full(len(truth), -1, dtype=np.int64)
    aside = np.zeros(len(truth), dtype=bool)
    if min_points is not None and points is None:
        raise InvalidInput("min_points", "min_points needs a table of points (points=...)")
    if points is not None:
        from obbiou.evaluation.point_counts import count_truth_points, set_aside

        counts = count_truth_points(truth, points)
        if min_points is not None:
            truth, aside = set_aside(truth, counts, min_points)
    truth_row = _rows(truth_rows, len(truth), "truth_rows")
    det_row = _rows(detection_rows, len(detections), "detection_rows")
    records = _match_tables(
        truth, detections, thr, layout, max_detections, progress, chunk, criterion, counts, aside
    )
    return replace(records, truth_row=truth_row, det_row=det_row)


def _rows(rows: Any, n: int, what: str) -> np.ndarray:
    """Input row numbers: 0..n-1 by default, else ``rows`` checked (n distinct integers >= 0)."""
    if rows is None:
        return np.arange(n, dtype=np.int64)
    values = np.asarray(rows)
    if values.shape != (n,) or (n and values.dtype.kind not in "iu"):
        raise InvalidInput(what, f"expected {n} integer row numbers, got shape {values.shape}")
    values = values.astype(np.int64)
    if n and (values.min() < 0 or len(np.unique(values)) != n):
        raise InvalidInput(what, "row numbers must be distinct and >= 0")
    return values


def _match_tables(
    truth: Table,
    dets: Table,
    thr: np.ndarray,
    layout: str,
    max_detections,
    progress,
    chunk,
    criterion: str = "iou",
    truth_points: np.ndarray | None = None,
    truth_set_aside: np.ndarray | None = None,
) -> MatchRecords:
    from obbiou._kernels import match as kern
    from obbiou.boxes import envelope, footprint, size

    n, m, nk = len(dets), len(truth), len(thr)
    tframe, dframe = comparable_frame_ids([truth.frame, dets.frame])
    uniq, codes = sorted_codes(np.concatenate([dframe, tframe]))
    dcode, tcode = codes[:n].astype(np.int64), codes[n:].astype(np.int64)
    nframes = len(uniq)
    _, lcodes = sorted_codes(np.concatenate([dets.label, truth.label]).astype(object))
    dlab, tlab = lcodes[:n].astype(np.int64), lcodes[n:].astype(np.int64)
    drank, trank = _rank_in_group(dcode), _rank_in_group(tcode)

    # Processing order: frame, then descending score, ties by input order.
    dorder = np.lexsort((drank, -dets.score, dcode))
    torder = np.lexsort((trank, tcode))
    det_ptr = np.r_[0, np.cumsum(np.bincount(dcode, minlength=nframes))].astype(np.int64)
    truth_ptr = np.r_[0, np.cumsum(np.bincount(tcode, minlength=nframes))].astype(np.int64)
    dbox = np.ascontiguousarray(dets.boxes.data[dorder])
    tbox = np.ascontiguousarray(truth.boxes.data[torder])
    live = np.ones(n, dtype=bool)
    if max_detections is not None:
        pos = np.arange(n) - np.repeat(det_ptr[:-1], np.diff(det_ptr))
        live = pos < max_detections
    dcentre, tcentre = ground_centres(dbox, layout), ground_centres(tbox, layout)
    # What the kernel compares: a similarity per pair, higher is closer, >= threshold.
    kthr, empty = thr, 0.0
    mbox_d, mbox_t, mlayout = dbox, tbox, layout
    if criterion == "bev":
        mlayout = "rotated" if layout == "upright" else "axis"
        mbox_d = np.ascontiguousarray(footprint(dbox, shape=layout)) if n else dbox[:, :0]
        mbox_t = np.ascontiguousarray(footprint(tbox, shape=layout)) if m else tbox[:, :0]
    if criterion == "distance":
        # negated distances with thresholds -d: ">= -d" is "<= d" exactly, "highest" is
        # "nearest"; candidates by centres padded by the largest d (and a margin for the
        # rounding of the padded bounds: the exact test is the distance itself)
        kthr, empty = -thr, -np.inf
        scale = max(
            1.0, float(np.abs(dcentre).max(initial=0.0)), float(np.abs(tcentre).max(initial=0.0))
        )
        pad = float(thr.max()) * (1 + 1e-9) + 1e-9 * scale
        denv = np.ascontiguousarray(np.concatenate([dcentre - pad, dcentre + pad], axis=1))
        tenv = np.ascontiguousarray(np.concatenate([tcentre, tcentre], axis=1))
    else:
        denv = np.ascontiguousarray(envelope(mbox_d, shape=mlayout)) if n else np.zeros((0, 4))
        tenv = np.ascontiguousarray(envelope(mbox_t, shape=mlayout)) if m else np.zeros((0, 4))
    if denv.shape[1] != tenv.shape[1]:  # empty side: match the other's dimension
        width = max(denv.shape[1], tenv.shape[1])
        denv = denv if denv.shape[1] == width else np.zeros((n, width))
        tenv = tenv if tenv.shape[1] == width else np.zeros((m, width))

    outcome = np.full((n, nk), CAPPED, dtype=np.int8)
    mtruth = np.full((n, nk), -1, dtype=np.int64)
    miou = np.zeros((n, nk))
    best_same = np.zeros(n)
    best_other = np.zeros(n)
    taken = np.zeros((m, nk), dtype=bool)
    tsame = np.zeros(m)
    tother = np.zeros(m)
    tign = truth.ignore[torder]
    tlab_s, dlab_s = tlab[torder], dlab[dorder]
    trank_sorted = trank[torder]

    # Chunks of whole frames of about `chunk` detections each.
    bounds = [0]
    target = chunk
    for f in range(1, nframes + 1):
        if det_ptr[f] >= target or f == nframes:
            bounds.append(f)
            target = det_ptr[f] + chunk
    bounds = sorted(set(bounds))
    steps = list(zip(bounds[:-1], bounds[1:], strict=False))
    bar = None
    if progress:
        from obbiou.progress import Bar

        bar = Bar(total=n, desc="matching", unit="det", leave=True, disable=False)
    for f0, f1 in steps:
        d0, d1 = det_ptr[f0], det_ptr[f1]
        t0, t1 = truth_ptr[f0], truth_ptr[f1]
        dp = det_ptr[f0 : f1 + 1] - d0
        tp = truth_ptr[f0 : f1 + 1] - t0
        ptr, first, second = kern.candidate_pairs(
            dp, tp, denv[d0:d1], tenv[t0:t1], np.ascontiguousarray(live[d0:d1])
        )
        if not len(first):
            ious = np.zeros(0)
        elif criterion == "distance":
            dc, tc = dcentre[d0:d1][first], tcentre[t0:t1][second]
            ious = -np.hypot(dc[:, 0] - tc[:, 0], dc[:, 1] - tc[:, 1])
        else:
            ious = _pair_iou(mbox_d[d0:d1], mbox_t[t0:t1], mlayout, first, second)
        o, mt, mi, bs, bo, tk, ts, to = kern.greedy_match(
            dp,
            dlab_s[d0:d1],
            np.ascontiguousarray(live[d0:d1]),
            tp,
            tlab_s[t0:t1],
            np.ascontiguousarray(tign[t0:t1]),
            ptr,
            second,
            np.asarray(ious, dtype=np.float64),
            kthr,
            empty,
        )
        outcome[d0:d1] = o
        # global sorted truth index -> rank within its frame
        if t1 > t0:
            mtruth[d0:d1] = np.where(mt >= 0, trank_sorted[np.maximum(mt, 0) + t0], -1)
        miou[d0:d1] = mi
        best_same[d0:d1] = bs
        best_other[d0:d1] = bo
        taken[t0:t1] = tk
        tsame[t0:t1] = ts
        tother[t0:t1] = to
        if bar is not None:
            bar.update(int(d1 - d0))
    if bar is not None:
        bar.close()

    # Back to input order.
    dinv = np.empty(n, dtype=np.int64)
    dinv[dorder] = np.arange(n)
    tinv = np.empty(m, dtype=np.int64)
    tinv[torder] = np.arange(m)
    dsize = size(dets.boxes.data, shape=layout) if n else np.zeros(0)
    tsize = size(truth.boxes.data, shape=layout) if m else np.zeros(0)
    if criterion == "distance":  # back from negated distances
        miou = np.where(mtruth >= 0, -miou, np.nan)
        best_same, best_other, tsame, tother = -best_same, -best_other, -tsame, -tother
    if truth_points is None:
        truth_points = np.full(m, -1, dtype=np.int64)
    if truth_set_aside is None:
        truth_set_aside = np.zeros(m, dtype=bool)
    return MatchRecords(
        thresholds=thr,
        shape=layout,
        det_frame=dframe,
        det_rank=drank,
        det_row=np.arange(n, dtype=np.int64),
        det_label=dets.label.astype(object),
        det_score=dets.score.astype(np.float64),
        det_size=np.asarray(dsize, dtype=np.float64),
        det_range=_ranges(dets.boxes.data, layout),
        det_angle=_orientation(dets.boxes.data, layout),
        det_aspect=_aspect(dets.boxes.data, layout),
        det_outcome=outcome[dinv],
        det_truth=mtruth[dinv],
        det_iou=miou[dinv],
        det_best_same=best_same[dinv],
        det_best_other=best_other[dinv],
        truth_frame=tframe,
        truth_rank=trank,
        truth_row=np.arange(m, dtype=np.int64),
        truth_label=truth.label.astype(object),
        truth_ignore=truth.ignore.astype(bool),
        truth_size=np.asarray(tsize, dtype=np.float64),
        truth_range=_ranges(truth.boxes.data, layout),
        truth_angle=_orientation(truth.boxes.data, layout),
        truth_aspect=_aspect(truth.boxes.data, layout),
        truth_matched=taken[tinv],
        truth_best_same=tsame[tinv],
        truth_best_other=tother[tinv],
        det_centre=dcentre[dinv],
        det_aligned=aligned_boxes(dets.boxes.data, layout),
        truth_centre=tcentre[tinv],
        truth_aligned=aligned_boxes(truth.boxes.data, layout),
        truth_points=np.asarray(truth_points, dtype=np.int64),
        truth_set_aside=np.asarray(truth_set_aside, dtype=bool),
        criterion=criterion,
    )
