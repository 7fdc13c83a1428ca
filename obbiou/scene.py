"""Scene scale: the pairs of boxes that overlap, and non-maximum suppression.

Both functions find candidate pairs with a spatial index (a multi-level uniform grid over
the boxes' axis-aligned extents, see :mod:`obbiou._kernels.grid`), compute the exact IoU
only for pairs whose extents overlap (and, with a threshold, whose IoU can still exceed
it), and never build an N x M matrix: memory grows with the number of overlapping pairs.

Conventions (all layouts of :mod:`obbiou.shapes`): angles (``angle``, ``yaw``) in radians,
counter-clockwise from +x towards +y (in an image frame with y pointing down the same
number turns the box clockwise on screen); ``width`` along the box's own x axis, ``height``
along its own y axis; for ``upright`` boxes ``length`` along the heading, ``width`` across
it, ``height`` along +z and ``cz`` the centre. 3D layouts use 3D IoU (volumes); for
bird's-eye-view overlap pass ``obbiou.boxes.footprint(boxes)``.

Suppression changes which detections a system reports; scores and overlap measures do not
establish that a perception system is safe. For vehicles or robots near people, follow
the applicable safety standards and local regulation, and rely on qualified engineers.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np

from obbiou.errors import InvalidInput
from obbiou.shapes import Boxes, read_boxes, read_labels, read_scores

__all__ = ["Pairs", "Kept", "overlapping_pairs", "suppress", "warmup"]

_DECAYS = (None, "linear", "gaussian")
_KIND = {"axis": 0, "rotated": 1, "axis3": 2, "upright": 3}


@dataclass(frozen=True)
class Pairs:
    """The overlapping pairs of a scene, sorted by ``(first, second)``.

    Attributes
    ----------
    first, second : numpy.ndarray
        int64 row indices into ``a`` and ``b`` (into ``a`` twice for self-pairs, with
        ``first < second``).
    iou : numpy.ndarray
        float64 IoU of each pair (area in 2D, volume in 3D).
    n_first, n_second : int
        Number of rows of ``a`` and ``b``: the dimensions of :meth:`to_sparse`.
    """

    first: np.ndarray
    second: np.ndarray
    iou: np.ndarray
    n_first: int
    n_second: int

    def __len__(self) -> int:
        return int(self.first.shape[0])

    def to_sparse(self):
        """The pairs as a ``scipy.sparse.csr_array`` of shape ``(n_first, n_second)``.

        Entry ``[first[k], second[k]]`` holds ``iou[k]``; absent entries are pairs that do
        not overlap (IoU 0, or not above ``min_iou``). Self-pairs fill the upper triangle
        only. Needs scipy (part of the ``eval`` extra: ``pip install 'obbiou[eval]'``).

        Examples
        --------
        >>> p = overlapping_pairs([[0, 0, 2, 2], [1, 0, 3, 2]])
        >>> p.to_sparse().toarray().round(4)
        array([[0.    , 0.3333],
               [0.    , 0.    ]])
        """
        try:
            from scipy import sparse
        except ImportError:
            raise ImportError(
                "Pairs.to_sparse needs scipy, which is not installed; install the eval extra "
                "(pip install 'obbiou[eval]') or scipy itself (pip install scipy)"
            ) from None
        return sparse.csr_array(
            (self.iou, (self.first, self.second)), shape=(self.n_first, self.n_second)
        )


@dataclass(frozen=True)
class Kept:
    """The boxes kept by :func:`suppress`, by descending final score (ties: input order).

    Attributes
    ----------
    indices : numpy.ndarray
        int64 rows of the input boxes.
    scores : numpy.ndarray
        float64 final scores: the input scores for hard suppression, the decayed scores
        for soft suppression.
    """

    indices: np.ndarray
    scores: np.ndarray

    def __len__(self) -> int:
        return int(self.indices.shape[0])


# Below this many boxes the scene kernels run on one thread. On a busy 2-core machine
# waking the worker threads can cost far more than the work (measured: self-pairs of 1 000
# boxes took 1 ms on one thread and 120 ms on two); on a quiet one the threads paid from
# 1 000 boxes (self-pairs 0.17 against 0.20 ms; 10 000 boxes: 2.7 against 3.6 ms). The
# threshold is a rule of thumb between the two.
_SERIAL_BELOW = 20_000


def _prepared(a: Boxes, b: Boxes | None):
    """Both sides prepared once for the pair kernels, in their common kind (b=None: a)."""
    from obbiou._kernels.codes import Kind
    from obbiou.measures import prepare, prepare_pair

    if b is None:
        pa = prepare(a)
        return int(Kind[pa.kind.upper()]), pa, pa
    pa, pb = prepare_pair(a, b)
    return int(Kind[pa.kind.upper()]), pa, pb


def _vertices(p) -> np.ndarray:
    return p.vertices if p.kind == "poly" else np.zeros((0, 0, 2))


def _serial(n: int) -> bool:
    return n < _SERIAL_BELOW


def _pairs(
    a: Boxes,
    b: Boxes | None,
    threshold: float,
    codes: np.ndarray | None = None,
    serial: bool | None = None,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(first, second, iou) of the pairs with IoU > threshold, sorted; b=None: i < j.
    ``serial``: one-thread kernels; None chooses by the number of boxes."""
    from obbiou._kernels import grid

    other = a if b is None else b
    if len(a) == 0 or len(other) == 0:
        return np.zeros(0, np.int64), np.zeros(0, np.int64), np.zeros(0)
    if serial is None:
        serial = _serial(len(a) + (0 if b is None else len(b)))
    kind, pa, pb = _prepared(a, b)
    if codes is None:
        codes = np.zeros(0, np.int64)
    return grid.scene_pairs(
        kind,
        pa.rows,
        _vertices(pa),
        pb.rows,
        _vertices(pb),
        b is None,
        codes,
        codes,
        float(threshold),
        a.is_3d,
        serial,
    )


def _ground(b: Boxes, bev: bool, name: str) -> Boxes:
    """The boxes, or with ``bev`` their ground-plane footprints (3D boxes only)."""
    if not bev:
        return b
    if not b.is_3d:
        raise InvalidInput(
            "bev", f"bev=True takes the footprints of 3D boxes; {name} holds {b.shape!r} boxes"
        )
    from obbiou.boxes import footprint

    ground = np.ascontiguousarray(footprint(b.data, shape=b.shape), dtype=np.float64)
    return Boxes(ground, "rotated" if b.shape == "upright" else "axis", b.single)


def _unit_interval(value: Any, name: str) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InvalidInput(name, f"expected a number in [0, 1], got {value!r}") from None
    if not 0.0 <= v <= 1.0:  # also rejects NaN
        raise InvalidInput(name, f"expected a number in [0, 1], got {v!r}")
    return v


def overlapping_pairs(
    a: Any, b: Any = None, *, shape: str | None = None, min_iou: float = 0.0, bev: bool = False
):
    """The pairs of boxes that overlap, found with a spatial index (never an N x M matrix).

    Parameters
    ----------
    a : array_like
        Boxes in any layout: ``(N, 4)`` axis ``x_min, y_min, x_max, y_max``; ``(N, 5)``
        rotated ``cx, cy, width, height, angle``; ``(N, K, 2)`` convex polygons;
        ``(N, 6)`` axis3; ``(N, 7)`` upright ``cx, cy, cz, length, width, height, yaw``.
        Angles in radians, counter-clockwise from +x towards +y.
    b : array_like, optional
        Boxes of the same dimension (2D or 3D). ``None`` (default): the pairs of ``a`` with itself,
        ``first < second``.
    shape : str, optional
        The layout of ``a`` (and ``b``, when given); inferred from the trailing dimensions
        when ``None``.
    min_iou : float
        Report pairs with IoU > ``min_iou`` (with the default 0, every pair with a
        positive overlap). In [0, 1].
    bev : bool
        Bird's-eye view: 3D boxes by the IoU of their ground-plane footprints
        (:func:`obbiou.boxes.footprint`) instead of their volumes.

    Returns
    -------
    Pairs
        ``first``, ``second`` (int64), ``iou`` (float64), sorted by ``(first, second)``;
        ``len(pairs)`` is the number of pairs, ``pairs.to_sparse()`` a scipy sparse array.
        Memory grows with the number of overlapping pairs.

    Raises
    ------
    ValueError
        For invalid boxes (naming the argument and row), 2D boxes paired with 3D ones, or
        ``min_iou`` outside [0, 1].

    Examples
    --------
    An aerial tile (invented): three rotated vessel detections, two of them of one vessel.

    >>> tile = [[100, 50, 40, 12, 0.30], [102, 51, 40, 12, 0.28], [300, 80, 25, 8, 1.2]]
    >>> p = overlapping_pairs(tile)
    >>> p.first, p.second, p.iou.round(3)
    (array([0]), array([1]), array([0.843]))

    Between two sets (detections vs ground truth), with a threshold:

    >>> truth = [[101, 50, 40, 12, 0.30], [300, 80, 25, 8, 1.2]]
    >>> p = overlapping_pairs(tile, truth, min_iou=0.5)
    >>> list(zip(p.first.tolist(), p.second.tolist()))
    [(0, 0), (1, 0), (2, 1)]

    Identical boxes have IoU 1; disjoint or corner-touching boxes are not reported; empty
    input gives no pairs:

    >>> overlapping_pairs([[0, 0, 1, 1], [0, 0, 1, 1], [1, 1, 2, 2]]).iou
    array([1.])
    >>> len(overlapping_pairs(np.zeros((0, 7))))
    0

    Upright 3D boxes use 3D IoU: the second box overlaps half of the first's height.

    >>> p = overlapping_pairs([[0, 0, 1, 4, 2, 2, 0], [0, 0, 2, 4, 2, 2, 0]])
    >>> p.iou
    array([0.33333333])
    >>> overlapping_pairs([[0, 0, 1, 4, 2, 2, 0], [0, 0, 2, 4, 2, 2, 0]], bev=True).iou
    array([1.])
    """
    thr = _unit_interval(min_iou, "min_iou")
    ba = _ground(read_boxes(a, shape, name="a"), bev, "a")
    bb = None
    if b is not None:
        bb = _ground(read_boxes(b, shape, name="b"), bev, "b")
        if bb.is_3d != ba.is_3d:
            raise InvalidInput(
                "b",
                f"{bb.shape!r} boxes cannot be paired with a of layout {ba.shape!r} (one is "
                "3D, the other 2D); for bird's-eye view pass obbiou.boxes.footprint(...)",
            )
    first, second, iou = _pairs(ba, bb, thr)
    return Pairs(first, second, iou, len(ba), len(ba if bb is None else bb))


def score_order(scores: np.ndarray) -> np.ndarray:
    """Indices by descending score, ties in input order (a stable sort).

    numpy's quicksort argsort, and its stable (merge) sort only when scores tie: measured
    (10 000 scores), 0.1 ms against 0.6 ms. (A numba pass that fixed the ties in place was
    as fast but cost three seconds of compiling on first use.)

    Examples
    --------
    >>> score_order(np.array([0.2, 0.9, 0.2, 0.5])).tolist()
    [1, 3, 0, 2]
    """
    neg = -scores
    order = np.argsort(neg)
    ranked = neg[order]
    if ranked.shape[0] > 1 and (ranked[1:] == ranked[:-1]).any():
        order = np.argsort(neg, kind="stable")
    return order


def suppress(
    boxes: Any,
    scores: Any,
    *,
    shape: str | None = None,
    max_iou: float = 0.5,
    labels: Any = None,
    decay: str | None = None,
    sigma: float = 0.5,
    min_score: float = 0.0,
    limit: int | None = None,
    bev: bool = False,
) -> Kept:
    """Non-maximum suppression: remove (or, softly, down-weight) duplicate detections.

    Hard suppression (``decay=None``) walks the boxes by descending score (ties: input
    order) and keeps a box unless a box kept before it overlaps it with IoU > ``max_iou``;
    so no two kept boxes overlap by more than ``max_iou``. Soft suppression (Bodla et al.,
    "Soft-NMS", ICCV 2017) instead repeatedly selects the box with the highest *current*
    score and decays the current score of every remaining box ``b`` by
    ``1 - IoU(M, b)`` when ``IoU(M, b) > max_iou`` (``decay="linear"``; the paper writes
    ``>= N_t``, which differs only at exact equality) or by ``exp(-IoU(M, b)**2 / sigma)``
    (``decay="gaussian"``, every overlapping box, ``max_iou`` unused). Because decays change
    the order, the selection follows the decayed scores exactly.

    Parameters
    ----------
    boxes : array_like
        Boxes in any layout (see :func:`overlapping_pairs`); ``upright`` boxes use 3D IoU,
        bird's-eye view is ``suppress(obbiou.boxes.footprint(boxes), scores)``.
    scores : array_like
        One finite score per box. Soft suppression needs scores >= 0.
    shape : str, optional
        The layout; inferred from the trailing dimensions when ``None``.
    max_iou : float
        IoU above which a box is suppressed (hard) or decayed (linear). In [0, 1].
    labels : array_like, optional
        One label per box (numbers or strings); boxes suppress only boxes of their label.
    decay : {None, "linear", "gaussian"}
        ``None`` for hard suppression.
    sigma : float
        Gaussian decay parameter (> 0); the paper's experiments use 0.5.
    min_score : float
        Boxes scoring below ``min_score`` are dropped before suppression (they suppress
        nothing). In soft suppression a box whose *decayed* score falls below
        ``min_score`` is dropped at that moment and decays no other box. The default 0.0
        drops negative scores; pass ``-numpy.inf`` to keep them (hard suppression only).
        With gaussian decay and ``min_score=0`` every box is kept, re-scored.
    limit : int, optional
        Keep at most this many boxes: the first ``limit`` selected, i.e. the best.
    bev : bool
        Bird's-eye view: 3D boxes suppress each other by the IoU of their ground-plane
        footprints (:func:`obbiou.boxes.footprint`) instead of their volumes.

    Returns
    -------
    Kept
        ``indices`` (int64, into the input) and ``scores`` (float64, final), by descending
        final score, ties by input order.

    Raises
    ------
    ValueError
        For invalid boxes, scores that are not finite or not one per box, ``max_iou``
        outside [0, 1], an unknown ``decay``, ``sigma`` <= 0, a NaN ``min_score``, labels
        that are not one per box, or a negative or non-integer ``limit``.

    Examples
    --------
    An aerial tile (invented) with a cluster of duplicate detections of one vessel and a
    second vessel. Rows 0 and 2 overlap the best box (row 1) with IoU 0.843 and 0.376, and
    each other with IoU 0.333:

    >>> tile = [[100, 50, 40, 12, 0.30], [102, 51, 40, 12, 0.28], [100, 56, 40, 12, 0.3],
    ...         [300, 80, 25, 8, 1.2]]
    >>> kept = suppress(tile, [0.80, 0.95, 0.60, 0.70])
    >>> kept.indices, kept.scores
    (array([1, 3, 2]), array([0.95, 0.7 , 0.6 ]))

    Linear soft suppression keeps every box, re-scored: row 2 becomes 0.60 (1 - 0.376),
    then row 0 becomes 0.80 (1 - 0.843) (1 - 0.333):

    >>> kept = suppress(tile, [0.80, 0.95, 0.60, 0.70], decay="linear", max_iou=0.3)
    >>> kept.indices, kept.scores.round(3)
    (array([1, 3, 2, 0]), array([0.95 , 0.7  , 0.374, 0.084]))

    A lidar frame (invented): two upright proposals of one pallet and a person, per label:

    >>> frame = [[5.0, 2.0, 0.6, 1.2, 0.8, 1.2, 0.0], [5.1, 2.0, 0.6, 1.2, 0.8, 1.2, 0.05],
    ...          [5.0, 2.0, 0.9, 0.5, 0.5, 1.8, 0.0]]
    >>> suppress(frame, [0.9, 0.8, 0.7], labels=["pallet", "pallet", "person"]).indices
    array([0, 2])

    Identical boxes: the first in input order wins a tie. Empty input keeps nothing.

    >>> suppress([[0, 0, 1, 1], [0, 0, 1, 1]], [0.5, 0.5]).indices
    array([0])
    >>> len(suppress(np.zeros((0, 5)), []))
    0
    """
    from obbiou._kernels import grid
    from obbiou._kernels import suppress as kernels

    b = _ground(read_boxes(boxes, shape, name="boxes"), bev, "boxes")
    n = len(b)
    s = read_scores(scores, n, b.single)
    thr = _unit_interval(max_iou, "max_iou")
    if decay not in _DECAYS:
        raise InvalidInput("decay", f"expected None, 'linear' or 'gaussian', got {decay!r}")
    try:
        sig = float(sigma)
    except (TypeError, ValueError):
        raise InvalidInput("sigma", f"expected a positive number, got {sigma!r}") from None
    if not sig > 0.0 or not np.isfinite(sig):
        raise InvalidInput("sigma", f"expected a positive number, got {sig!r}")
    try:
        floor = float(min_score)
    except (TypeError, ValueError):
        raise InvalidInput("min_score", f"expected a number, got {min_score!r}") from None
    if np.isnan(floor):
        raise InvalidInput("min_score", "expected a number, got nan")
    if limit is None:
        cap = -1
    else:
        if isinstance(limit, bool) or not isinstance(limit, (int, np.integer)) or limit < 0:
            raise InvalidInput("limit", f"expected None or an integer >= 0, got {limit!r}")
        cap = int(limit)
    codes = None if labels is None else read_labels(labels, n)[1]
    if decay is not None and (s < 0).any():
        row = int(np.argmax(s < 0))
        raise InvalidInput(
            "scores",
            f"negative score {float(s[row])!r}; soft suppression decays scores towards 0 and "
            "needs scores >= 0",
            row=row,
        )

    # Boxes below min_score take no part.
    rows = np.flatnonzero(s >= floor)
    if rows.shape[0] < n:
        b = Boxes(b.data[rows], b.shape, False)
        s = s[rows]
        if codes is not None:
            codes = codes[rows]
    if len(b) == 0 or cap == 0:
        return Kept(np.zeros(0, np.int64), np.zeros(0))

    order = score_order(s)
    if decay is None:
        kind, pb, _ = _prepared(b, None)
        lab = np.zeros(0, np.int64) if codes is None else codes
        vert = _vertices(pb)
        scene, index = grid.prepare_scene(
            kind, pb.rows, vert, pb.rows, vert, True, lab, lab, thr, b.is_3d, True
        )
        kept = kernels.SUPPRESS_HARD[kind](scene, index, order, cap)
        kept_scores = s[kept]
    else:
        # Linear decay touches only pairs above max_iou; gaussian every overlapping pair.
        first, second, iou = _pairs(b, None, thr if decay == "linear" else 0.0, codes)
        ptr, nbr, val = kernels.neighbours(len(b), first, second, iou)
        kept, kept_scores = kernels.soft(
            s, order, ptr, nbr, val, decay == "gaussian", thr, sig, floor, cap
        )
    return Kept(rows[kept].astype(np.int64), kept_scores)


def warmup() -> None:
    """Compile the scene kernels once (they are cached on disk), for every layout.

    Examples
    --------
    >>> warmup()
    """
    tiny = {
        "axis": [[0, 0, 2, 2], [1, 1, 3, 3]],
        "rotated": [[0, 0, 2, 1, 0.1], [0.5, 0, 2, 1, 0.2]],
        "polygon": [[[0, 0], [2, 0], [2, 2], [0, 2]], [[1, 1], [3, 1], [3, 3], [1, 3]]],
        "axis3": [[0, 0, 0, 2, 2, 2], [1, 1, 1, 3, 3, 3]],
        "upright": [[0, 0, 0, 2, 1, 1, 0.1], [0.5, 0, 0, 2, 1, 1, 0.2]],
    }
    codes = np.zeros(2, np.int64)
    for name, boxes in tiny.items():
        bx = read_boxes(boxes, name)
        _pairs(bx, None, 0.0)  # small and large inputs run the same compiled bodies
        _pairs(bx, bx, 0.1, codes)
        for decay in _DECAYS:
            suppress(boxes, [0.9, 0.8], shape=name, decay=decay, labels=[1, 1], limit=5)
