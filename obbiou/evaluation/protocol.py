"""The evaluation protocol, written out, and :func:`evaluate`: read, match, reduce."""

from __future__ import annotations

from typing import Any

from obbiou.errors import InvalidInput
from obbiou.evaluation.checks import warn_likely_mistakes
from obbiou.evaluation.matching import Thresholds, match_frames, parse_thresholds
from obbiou.evaluation.result import Evaluation, reduce_records
from obbiou.tables import read_table

__all__ = ["evaluate", "matching_criterion"]


def evaluate(
    truth: Any,
    detections: Any,
    *,
    shape: str | None = None,
    iou: Any = None,
    distance: Any = None,
    bev: bool = False,
    points: Any = None,
    min_points: int | None = None,
    ap: str = "all-points",
    recall_points: int | None = None,
    max_detections: int | None = None,
    size_buckets: Any = None,
    range_buckets: Any = None,
    degrees: bool = False,
    progress: bool = False,
    localisation_floor: float = 0.1,
) -> Evaluation:
    """Evaluate detections against ground truth: match, count, AP per label and threshold.

    The protocol (every choice is an option; defaults shown):

    1. **Frames and labels.** Detections are matched only to truths of the same frame and
       the same label.
    2. **Cap** (``max_detections=None``: no cap). With a cap N, only the N highest-scoring
       detections of each frame (all labels together, ties by input order) are evaluated;
       the rest are counted as ``capped``.
    3. **Greedy matching**, per frame and label, at every threshold t of ``iou``:
       detections in descending score (ties: input order) each take the *unmatched
       non-ignore* truth with the highest IoU >= t (ties: the truth earlier in the input)
       and are true positives (TP). Failing that, a detection with IoU >= t to an ``ignore``
       truth of its label is *ignored* (neither TP nor FP; an ignore truth absorbs any number
       of detections). Otherwise it is a false positive (FP). Ignore truths never count as
       misses. IoU is the exact area (2D) or volume (3D) IoU of the layout; with
       ``bev=True`` (3D boxes) the exact area IoU of their ground-plane footprints
       (bird's-eye view).
       **By centre distance** (``distance=[0.5, 1, 2, 4]``, metres; Caesar et al., CVPR
       2020) the same rule reads: the *nearest* unmatched non-ignore truth whose
       ground-plane centre lies within d (``hypot(dx, dy) <= d`` in float64; ties: the
       earlier truth), else ignored when an ignore truth lies within d, else FP. Centres:
       the middle of the x and y extents (``axis``, ``axis3``), ``cx, cy`` (``rotated``,
       ``upright``), the area centroid (``polygon``); 3D boxes on the ground plane
       (x, y). Exactly one of ``iou`` and ``distance`` is given (``iou`` defaults to 0.5).
    3b. **Lidar points** (``points=``, ``min_points=K``): truths that hold fewer than K points
       of their frame become ignore truths before matching (the count is kept per truth in
       the records, ``truth_points``; see :mod:`obbiou.evaluation.point_counts`).
    4. **Accounting**, per label and threshold: TP + FP + ignored = evaluated detections,
       TP + missed = non-ignored truths (checked; see :meth:`Evaluation.counts`).
    5. **Ranking** per label over all frames: descending score, ties by frame id then input
       order (no grouping of tied scores). Ignored and capped detections are left out.
    6. **AP** (``ap="all-points"``): area under the monotone precision envelope; or
       ``"11-point"`` (Everingham et al., IJCV 2010), ``"101-point"`` (recall 0, 0.01, …, 1;
       common practice), ``recall_points=N`` (N evenly spaced levels from 0 to 1), ``"step"``
       (plain step sum). A label with truths and no detections has AP 0; a label without
       non-ignored truths has undefined AP (``None``) and is left out of mAP.
    7. **mAP**: mean over labels at one threshold; ``mean_ap()`` averages each label's mean
       over its thresholds.
    8. **Buckets** (``size_buckets``, ``range_buckets``: edges such as ``[0, 20, 200, inf]``
       (ground area in m², from boats and cars to ships) or a
       mapping name -> (low, high), low <= value < high; range = ground distance of the box
       centre from the origin, 3D only): from the same matches, a truth outside the bucket
       counts as ignore; a TP whose truth is outside, or an FP whose own size / range is
       outside, is ignored. Results in ``Evaluation.buckets["size" | "range"][name]``.

    Parameters
    ----------
    truth, detections : path, DataFrame, mapping or Table
        Tables as read by :func:`~obbiou.evaluation.read_table` (columns of the layout;
        detections with ``score``; truth with optional ``ignore``).
    shape : str, optional
        Box layout; inferred from the columns when ``None``.
    iou : float, sequence, str or mapping, optional
        IoU threshold(s): ``0.5``, ``[0.5, 0.75]``, ``"0.5:0.95:0.05"`` (stop included within
        rounding: 10 thresholds), or a mapping label -> threshold(s) (key ``None``: default
        for unlisted labels). Default 0.5 unless ``distance`` is given.
    distance : float, sequence, str or mapping, optional
        Match by ground-plane centre distance instead, at these thresholds in metres (any
        of the forms of ``iou``), e.g. ``[0.5, 1, 2, 4]``. The result's methods take these
        distances where they take a threshold (``ap(label, 2.0)``).
    bev : bool
        3D boxes (``upright``, ``axis3``) by the IoU of their ground-plane footprints.
    points : path, DataFrame, mapping or obbiou.tables.Points, optional
        Lidar points, columns ``frame, x, y`` and optionally ``z``: each truth's count of
        the points of its frame inside it is kept (``records.truth_points``) and summed up
        per label in :meth:`Evaluation.to_dict` (``"points"``).
    min_points : int, optional
        With ``points``: truths holding fewer points become ignore truths.
    ap : str
        ``"all-points"``, ``"11-point"``, ``"101-point"`` or ``"step"``.
    recall_points : int, optional
        Sample the envelope at N recall levels (overrides ``ap``).
    max_detections : int, optional
        Cap of evaluated detections per frame.
    size_buckets, range_buckets : optional
        See 8. above.
    degrees : bool
        Angle columns in degrees.
    progress : bool
        Show a progress bar while matching.
    localisation_floor : float
        Lowest IoU that counts as "poor localisation" in the breakdowns (default 0.1).

    Returns
    -------
    Evaluation

    Examples
    --------
    One frame, one truth, a good detection and a duplicate:

    >>> truth = {"frame": [1], "label": ["van"], "cx": [0.0], "cy": [0.0], "width": [4.0],
    ...          "height": [2.0], "angle": [0.0]}
    >>> dets = {"frame": [1, 1], "label": ["van", "van"], "score": [0.9, 0.4],
    ...         "cx": [0.1, 0.0], "cy": [0.0, 0.1], "width": [4.0, 4.0],
    ...         "height": [2.0, 2.0], "angle": [0.0, 0.05]}
    >>> ev = evaluate(truth, dets, iou=0.5)
    >>> ev.ap("van", 0.5), ev.counts("van", 0.5)[:4]
    (1.0, (1, 1, 0, 0))
    >>> ev.false_positives()["van"].duplicate
    1

    No detections at all: AP 0. A label only in the detections: AP undefined (None).

    >>> empty = {k: [] for k in ("frame", "label", "score", "cx", "cy", "width", "height",
    ...                          "angle")}
    >>> evaluate(truth, empty).ap("van")
    0.0
    >>> evaluate({k: v[:0] for k, v in truth.items()}, dets).ap("van") is None
    True
    """
    criterion, spec = matching_criterion(iou, distance, bev)
    truth_t = read_table(truth, role="truth", shape=shape, degrees=degrees)
    det_t = read_table(detections, role="detections", shape=shape, degrees=degrees)
    warn_likely_mistakes(truth_t, det_t, degrees=degrees)
    records = match_frames(
        truth_t,
        det_t,
        thresholds=spec,
        criterion=criterion,
        max_detections=max_detections,
        progress=progress,
        points=points,
        min_points=min_points,
    )
    return reduce_records(
        records,
        iou=spec,
        ap=ap,
        recall_points=recall_points,
        size_buckets=size_buckets,
        range_buckets=range_buckets,
        localisation_floor=localisation_floor,
        options={"max_detections": max_detections, "degrees": degrees, "min_points": min_points},
        inputs=(truth_t, det_t),
    )


def matching_criterion(iou: Any, distance: Any, bev: bool) -> tuple[str, Thresholds]:
    """What decides a match and at which thresholds: ``("iou" | "bev" | "distance", spec)``.

    Exactly one of ``iou`` and ``distance`` (``iou`` defaults to 0.5 when neither is given);
    ``bev`` applies to IoU matching only (centre distances are on the ground plane already).

    Examples
    --------
    >>> matching_criterion(None, None, False)[0], matching_criterion(None, "1,2", False)[1].values
    ('iou', (1.0, 2.0))
    >>> matching_criterion(0.5, 2.0, False)
    Traceback (most recent call last):
    ...
    obbiou.errors.InvalidInput: distance: give either iou= or distance=, not both
    """
    if iou is not None and distance is not None:
        raise InvalidInput(
            "distance",
            "give either iou= or distance=, not both",
        )
    if distance is not None:
        if bev:
            raise InvalidInput(
                "bev",
                "bev=True applies to IoU matching; centre distances are on the ground "
                "plane already",
            )
        return "distance", parse_thresholds(distance, argument="distance")
    return ("bev" if bev else "iou"), parse_thresholds(0.5 if iou is None else iou)


def warmup() -> None:
    """Compile the evaluation's kernels once (cached on disk): matching, AP and bootstrap,
    for every layout, on one tiny invented table each (a match and an ignored detection).

    Examples
    --------
    >>> warmup()
    """
    import numpy as np

    from obbiou.tables import box_columns

    tiny = {
        "axis": [[0.0, 0.0, 4.0, 2.0], [3.0, 0.0, 7.0, 2.0]],
        "rotated": [[5.0, 5.0, 4.0, 2.0, 0.1], [8.0, 5.0, 4.0, 2.0, 0.1]],
        "polygon": [
            [0.0, 0.0, 4.0, 0.0, 4.0, 2.0, 0.0, 2.0],
            [3.0, 0.0, 7.0, 0.0, 7.0, 2.0, 3.0, 2.0],
        ],
        "axis3": [[0.0, 0.0, 0.0, 4.0, 2.0, 1.0], [3.0, 0.0, 0.0, 7.0, 2.0, 1.0]],
        "upright": [[5.0, 5.0, 0.5, 4.0, 2.0, 1.0, 0.1], [8.0, 5.0, 0.5, 4.0, 2.0, 1.0, 0.1]],
    }
    for shape, rows in tiny.items():
        values = np.array(rows)
        truth = {"frame": [0, 0], "label": ["a", "a"], "ignore": [False, True]}
        dets = {"frame": [0, 0], "label": ["a", "a"], "score": [0.9, 0.4]}
        for j, c in enumerate(box_columns(shape)):
            truth[c] = values[:, j]
            dets[c] = values[:, j] + (0.1 if j == 0 else 0.0)
        result = evaluate(truth, dets, shape=shape, iou="0.5:0.95:0.05")
        result.interval(resamples=20, seed=0)
