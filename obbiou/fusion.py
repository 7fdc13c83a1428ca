"""Box fusion: replace each cluster of overlapping detections by its score-weighted mean.

Weighted box fusion (Solovyev, Wang & Gabruseva, "Weighted boxes fusion: ensembling boxes
from different object detection models", Image and Vision Computing 107, 2021) averages
clusters of axis-aligned boxes weighted by score. :func:`fuse` is its extension to rotated
rectangles and upright 3D boxes, where a plain average of the columns would be wrong:

* a rotated rectangle's angle lives on a circle of period π (the angles 89° and −91°
  describe one rectangle), and its sides may swap (30 × 10 at 89° is nearly 10 × 30 at
  −1°). Each box joins its cluster with its sides in the order whose direction lies
  closest, modulo π, to the cluster's fused box, and the angles are averaged on the circle
  (the direction of the weighted mean of the unit vectors at twice the angle, halved);
* an upright box's yaw is a heading (front and back differ): period 2π, no side swapping.

Conventions (all layouts of :mod:`obbiou.shapes`): angles (``angle``, ``yaw``) in radians,
counter-clockwise from +x towards +y (in an image frame with y pointing down the same
number turns the box clockwise on screen); ``width`` along the box's own x axis, ``height``
along its own y axis; for ``upright`` boxes ``length`` along the heading, ``width`` across
it, ``height`` along +z and ``cz`` the centre.

Fusing changes which detections a system reports; scores and overlap measures do not
establish that a perception system is safe. For vehicles or robots near people, follow the
applicable safety standards and local regulation, and rely on qualified engineers.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from obbiou.errors import InvalidInput
from obbiou.scene import overlapping_pairs
from obbiou.shapes import read_boxes, read_labels, read_scores

__all__ = ["Fused", "fuse", "warmup"]

_LAYOUTS = {"axis": 0, "rotated": 1, "axis3": 2, "upright": 3}  # codes.Layout


@dataclass(frozen=True)
class Fused:
    """The fused boxes of :func:`fuse`, by descending fused score (ties: order of creation).

    Attributes
    ----------
    boxes : numpy.ndarray
        ``(K, C)`` float64 fused boxes in the layout of the input.
    scores : numpy.ndarray
        ``(K,)`` float64: the cluster's mean score times ``min(count, expected) / expected``.
    labels : numpy.ndarray or None
        ``(K,)`` label of each cluster (its members share it), or None without labels.
    offsets, members : numpy.ndarray
        The member rows of each cluster in compressed form: cluster ``k`` holds the input
        rows ``members[offsets[k]:offsets[k + 1]]``, by descending score (its first member
        is its best box). ``offsets`` has ``K + 1`` entries.
    """

    boxes: np.ndarray
    scores: np.ndarray
    labels: np.ndarray | None
    offsets: np.ndarray
    members: np.ndarray

    def __len__(self) -> int:
        return int(self.scores.shape[0])

    def members_of(self, k: int) -> np.ndarray:
        """The input rows fused into box ``k``, by descending score."""
        return self.members[self.offsets[k] : self.offsets[k + 1]]

    @property
    def counts(self) -> np.ndarray:
        """Number of members of each cluster (int64)."""
        return np.diff(self.offsets)


def _threshold(value: Any, name: str) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InvalidInput(name, f"expected a number in [0, 1], got {value!r}") from None
    if not 0.0 <= v <= 1.0:  # also rejects NaN
        raise InvalidInput(name, f"expected a number in [0, 1], got {v!r}")
    return v


def _neighbours(n: int, first: np.ndarray, second: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Both directions of the pairs (i < j) as compressed rows: ``nbr[ptr[i]:ptr[i + 1]]``."""
    src = np.concatenate([first, second])
    dst = np.concatenate([second, first])
    order = np.argsort(src, kind="stable")
    ptr = np.zeros(n + 1, np.int64)
    np.cumsum(np.bincount(src, minlength=n), out=ptr[1:])
    return ptr, np.ascontiguousarray(dst[order], dtype=np.int64)


def fuse(
    boxes: Any,
    scores: Any,
    *,
    labels: Any = None,
    shape: str | None = None,
    min_iou: float = 0.55,
    expected: int = 1,
) -> Fused:
    """Fuse clusters of overlapping boxes into their score-weighted means.

    Boxes are taken by descending score (ties: input order). Each is compared with the
    clusters made so far, in order of creation, and joins the first whose *current* fused
    box it overlaps with IoU >= ``min_iou`` (only boxes of its label, when ``labels`` are
    given); otherwise it starts a cluster. A cluster is compared only when one of its
    members overlaps the box (IoU > 0), which the scene index finds without an N x N
    matrix. The fused box of a cluster is the score-weighted mean of its members:

    * ``axis`` / ``axis3``: each coordinate;
    * ``rotated``: centre, width and height, and the angle on the circle of period π. Each
      member's sides are taken in the order whose direction lies closest (modulo π) to the
      cluster's fused box when the member joins (swapping width and height and turning by
      π/2 when that is closer), so that 30 × 10 at 89° and 10 × 30 at −1° agree. The fused
      angle is half the direction of ``sum(score * (cos 2θ, sin 2θ))``, in [-π/2, π/2);
    * ``upright``: centre, length, width, height, and the yaw on the circle of period 2π
      (a heading: never swapped), in [-π, π).

    A cluster of one box is that box, unchanged. The fused score is the cluster's mean score
    times ``min(count, expected) / expected``: with ``expected`` models (or augmentations)
    in an ensemble, an object that only some of them found is down-weighted. This is the
    rule of weighted box fusion (Solovyev et al., Image and Vision Computing 2021), there
    for axis-aligned boxes only; the clustering against the current fused box follows the
    paper, taking the first matching cluster.

    Parameters
    ----------
    boxes : array_like
        ``(N, 4)`` axis ``x_min, y_min, x_max, y_max``, ``(N, 5)`` rotated ``cx, cy,
        width, height, angle``, ``(N, 6)`` axis3 or ``(N, 7)`` upright ``cx, cy, cz,
        length, width, height, yaw`` boxes; angles in radians, counter-clockwise from +x
        towards +y. Polygons have no common vertex order to average: fit rectangles to them
        first with :func:`obbiou.boxes.fit_rotated`.
    scores : array_like
        One finite score > 0 per box: the weights.
    labels : array_like, optional
        One label per box (numbers or strings); clusters never mix labels.
    shape : str, optional
        The layout; inferred from the trailing dimensions when ``None``.
    min_iou : float
        IoU with a cluster's fused box from which a box joins it, in [0, 1]. The default
        0.55 is the value the paper reports using (from memory of the paper).
    expected : int
        Number of boxes expected per object (models in an ensemble), >= 1. The default 1
        leaves the mean score unchanged.

    Returns
    -------
    Fused
        ``boxes``, ``scores``, ``labels`` and the member rows of each cluster
        (``offsets``, ``members``; ``members_of(k)``), by descending fused score.

    Raises
    ------
    obbiou.errors.InvalidInput
        For invalid boxes, polygons, scores that are not finite and > 0 or not one per box,
        labels that are not one per box, ``min_iou`` outside [0, 1], or ``expected`` that is
        not an integer >= 1.

    Examples
    --------
    Three detections of one vessel by an ensemble (invented harbour survey tile, pixels):
    the third describes the same rectangle with its sides swapped and its angle across the
    wrap at ±π/2. Aligned, it is 30 × 10 at -0.01 + π/2 = 1.5608; the centre is
    (0.9·200 + 0.6·202 + 0.3·201) / 1.8 = 200.833 and the angle, averaged on the circle,
    1.555; the score (0.9 + 0.6 + 0.3) / 3 · 3/3 = 0.6.

    >>> vessel = [[200, 100, 30, 10, 1.55], [202, 100, 30, 10, 1.56], [201, 100, 10, 30, -0.01]]
    >>> f = fuse(vessel, [0.9, 0.6, 0.3], expected=3)
    >>> f.boxes.round(3)
    array([[200.833, 100.   ,  30.   ,  10.   ,   1.555]])
    >>> f.scores.round(3), f.members_of(0)
    (array([0.6]), array([0, 1, 2]))

    Upright headings average across ±π: a forklift seen at 179° and at −179°.

    >>> lift = [[5, 2, 1, 3, 1.2, 2, np.radians(179)], [5, 2, 1, 3, 1.2, 2, np.radians(-179)]]
    >>> round(float(np.degrees(fuse(lift, [0.5, 0.5]).boxes[0, 6])), 6)
    -180.0

    Disjoint boxes stay apart (each unchanged); identical boxes fuse into themselves; empty
    input gives no clusters.

    >>> fuse([[0, 0, 1, 1], [5, 5, 6, 6], [5, 5, 6, 6]], [0.8, 0.7, 0.6]).boxes
    array([[0., 0., 1., 1.],
           [5., 5., 6., 6.]])
    >>> len(fuse(np.zeros((0, 5)), []))
    0
    """
    from obbiou._kernels import fusion

    b = read_boxes(boxes, shape, name="boxes")
    if b.shape == "polygon":
        raise InvalidInput(
            "boxes",
            "fuse averages axis, rotated, axis3 and upright boxes; polygons have no common "
            "vertex order: fit rectangles first with obbiou.boxes.fit_rotated",
        )
    n = len(b)
    s = read_scores(scores, n, b.single, positive=True)
    thr = _threshold(min_iou, "min_iou")
    if isinstance(expected, bool) or not isinstance(expected, (int, np.integer)) or expected < 1:
        raise InvalidInput("expected", f"expected an integer >= 1, got {expected!r}")
    label_arr, codes = (None, None) if labels is None else read_labels(labels, n)
    ncol = b.data.shape[1]
    if n == 0:
        return Fused(
            np.zeros((0, ncol)),
            np.zeros(0),
            None if label_arr is None else label_arr[:0],
            np.zeros(1, np.int64),
            np.zeros(0, np.int64),
        )

    p = overlapping_pairs(b.data, shape=b.shape)
    first, second = p.first, p.second
    if codes is not None:
        same = codes[first] == codes[second]
        first, second = first[same], second[same]
    ptr, nbr = _neighbours(n, first, second)
    order = np.argsort(-s, kind="stable")  # descending score, ties: input order
    which, fused, count, ssum = fusion.cluster(
        _LAYOUTS[b.shape], b.data, s, order.astype(np.int64), ptr, nbr, thr
    )
    score = ssum / count * (np.minimum(count, expected) / expected)
    # Clusters by descending fused score, ties: order of creation.
    rank = np.argsort(-score, kind="stable")
    new_id = np.empty_like(rank)
    new_id[rank] = np.arange(rank.shape[0])
    # Members grouped by cluster, each group in score order (the order they joined in).
    member_cluster = new_id[which[order]]
    grouped = np.argsort(member_cluster, kind="stable")
    members = order[grouped].astype(np.int64)
    offsets = np.zeros(rank.shape[0] + 1, np.int64)
    np.cumsum(count[rank], out=offsets[1:])
    out_labels = None if label_arr is None else label_arr[members[offsets[:-1]]]
    return Fused(fused[rank], score[rank], out_labels, offsets, members)


def warmup() -> None:
    """Compile the fusion kernel once (cached on disk); one compile serves every layout.

    Examples
    --------
    >>> warmup()
    """
    for boxes in ([[0, 0, 2, 2], [0.1, 0, 2, 2]], [[0, 0, 2, 1, 0.1], [0.1, 0, 2, 1, 0.2]]):
        fuse(boxes, [0.9, 0.8])
