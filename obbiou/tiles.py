"""Large images in tiles: the tile grid, moving boxes between frames, cropping truths into a
tile, and merging the detections of overlapping tiles into one set for the whole image.

A detector for aerial imagery runs on tiles of a large orthomosaic (say 1024-pixel tiles
overlapping by 200 pixels over a 20 000 x 20 000 image). Its boxes come back in each tile's
own coordinates; an object cut by a tile edge comes back as a partial box, and an object in
the overlap comes back from two or four tiles. :func:`merge` turns that into one clean set:
boxes move to image coordinates, partial boxes at inner tile edges go when another tile saw
the box away from its edges, and the remaining duplicates across seams are suppressed or
fused (:func:`obbiou.fuse`).

Conventions: tiles are ``axis`` boxes ``x_min, y_min, x_max, y_max`` in image coordinates;
a box "in tile coordinates" has the tile's ``(x_min, y_min)`` corner as its origin. Angles
(``angle``) in radians, counter-clockwise from +x towards +y; in an image frame with y
pointing down the same number turns the box clockwise on screen. ``width`` lies along the
box's own x axis, ``height`` along its own y axis.

Merging changes which detections a system reports; scores and overlap measures do not
establish that a perception system is safe. For uses that can hurt someone, follow the
applicable safety standards and local regulation, and rely on qualified engineers.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass
from typing import Any

import numpy as np

from obbiou.boxes import envelope
from obbiou.errors import InvalidInput
from obbiou.fusion import Fused
from obbiou.fusion import fuse as _fuse
from obbiou.measures import pair_values, prepare
from obbiou.scene import score_order, suppress
from obbiou.shapes import Boxes, read_boxes, read_labels, read_scores

__all__ = ["grid", "shift", "crop", "merge", "Crop", "Merged", "seam_rows", "warmup"]


# ---------------------------------------------------------------------------- grid


def _positive(value: Any, name: str, *, zero: bool = False) -> float:
    """A finite real number > 0 (``zero``: >= 0), or an InvalidInput."""
    if isinstance(value, bool) or not isinstance(value, (int, float, np.integer, np.floating)):
        raise InvalidInput(name, f"expected a number, got {value!r}")
    v = float(value)
    if not math.isfinite(v) or v < 0 or (v == 0 and not zero):
        raise InvalidInput(
            name,
            f"expected a {'' if zero else 'positive '}finite number"
            + (" >= 0" if zero else "")
            + f", got {v!r}",
        )
    return v


def _starts(length: float, size: float, stride: float) -> np.ndarray:
    """Tile starts along one axis: every ``stride`` from 0, the last at ``length - size``."""
    count = int(math.ceil((length - size) / stride - 1e-12)) + 1 if length > size else 1
    starts = np.arange(count, dtype=np.float64) * stride
    starts[-1] = length - size
    return starts


def grid(width: float, height: float, *, size: float, overlap: float) -> np.ndarray:
    """Tiles of exactly ``size`` x ``size`` covering a ``width`` x ``height`` image.

    Along each axis the tiles start at 0, ``size - overlap``, ``2 (size - overlap)``, ...;
    the last tile is moved back inside the image so that it ends on the image edge (it then
    overlaps its neighbour by ``overlap`` or more). Neighbouring tiles overlap by at least
    ``overlap``, and every point of the image lies in a tile.

    Parameters
    ----------
    width, height : float
        Image size (pixels, or any unit), > 0. The image spans ``[0, width] x [0, height]``.
    size : float
        Side of every tile, > 0 and at most the image's width and height.
    overlap : float
        Least overlap of neighbouring tiles, >= 0 and < ``size``.

    Returns
    -------
    numpy.ndarray
        ``(T, 4)`` float64 ``axis`` tiles ``x_min, y_min, x_max, y_max``, row-major from the
        top-left: ordered by ``y_min`` (rows), then by ``x_min`` within a row. "Top-left" is
        the corner at the origin, the top of an image whose y points down.

    Raises
    ------
    obbiou.errors.InvalidInput
        For a size, overlap, width or height that is not a finite number, a size <= 0 or
        larger than the image, or an overlap < 0 or >= size (tiles would never advance).

    Examples
    --------
    A 2500 x 1800 drone tile in 1024-pixel tiles overlapping by 200 (invented numbers):
    three columns (0, 824, 1476) and two rows (0, 776).

    >>> grid(2500, 1800, size=1024, overlap=200)
    array([[   0.,    0., 1024., 1024.],
           [ 824.,    0., 1848., 1024.],
           [1476.,    0., 2500., 1024.],
           [   0.,  776., 1024., 1800.],
           [ 824.,  776., 1848., 1800.],
           [1476.,  776., 2500., 1800.]])

    An image exactly one tile large is one tile:

    >>> grid(512, 512, size=512, overlap=64)
    array([[  0.,   0., 512., 512.]])

    >>> grid(500, 800, size=512, overlap=64)
    Traceback (most recent call last):
    ...
    obbiou.errors.InvalidInput: size: tile size 512.0 exceeds the image width 500.0
    >>> grid(2000, 2000, size=512, overlap=512)
    Traceback (most recent call last):
    ...
    obbiou.errors.InvalidInput: overlap: 512.0 is not smaller than the tile size 512.0
    """
    w = _positive(width, "width")
    h = _positive(height, "height")
    s = _positive(size, "size")
    o = _positive(overlap, "overlap", zero=True)
    if o >= s:
        raise InvalidInput(
            "overlap",
            f"{o!r} is not smaller than the tile size {s!r}",  # tiles would not advance
        )
    for extent, what in ((w, "width"), (h, "height")):
        if s > extent:
            raise InvalidInput(
                "size",
                f"tile size {s!r} exceeds the image {what} {extent!r}",
            )
    xs = _starts(w, s, s - o)
    ys = _starts(h, s, s - o)
    y0, x0 = np.meshgrid(ys, xs, indexing="ij")
    x0 = x0.reshape(-1)
    y0 = y0.reshape(-1)
    return np.column_stack([x0, y0, x0 + s, y0 + s])


# ---------------------------------------------------------------------------- shift


def _offsets(value: Any, n: int, name: str) -> np.ndarray:
    try:
        arr = np.asarray(value, dtype=np.float64)
    except (TypeError, ValueError):
        raise InvalidInput(
            name, f"expected a number or one number per box, got {value!r}"
        ) from None
    if arr.ndim == 0:
        arr = np.full(n, float(arr))
    elif arr.ndim != 1 or arr.shape[0] != n:
        raise InvalidInput(
            name, f"expected a number or {n} numbers (one per box), got shape {arr.shape}"
        )
    bad = ~np.isfinite(arr)
    if bad.any():
        row = int(np.argmax(bad))
        raise InvalidInput(
            name, f"offset is {float(arr[row])!r}, expected a finite number", row=row
        )
    return arr


def _shifted(b: Boxes, dx: np.ndarray, dy: np.ndarray) -> np.ndarray:
    out = b.data.copy()
    if b.shape == "axis":
        out[:, 0] += dx
        out[:, 2] += dx
        out[:, 1] += dy
        out[:, 3] += dy
    elif b.shape == "rotated":
        out[:, 0] += dx
        out[:, 1] += dy
    else:  # polygon
        out[:, :, 0] += dx[:, None]
        out[:, :, 1] += dy[:, None]
    return out


def _read_2d(boxes: Any, shape: str | None, name: str, what: str) -> Boxes:
    b = read_boxes(boxes, shape, name=name)
    if b.is_3d:
        raise InvalidInput(
            name, f"{what} works on 2D boxes (axis, rotated, polygon), got {b.shape!r} boxes"
        )
    return b


def shift(boxes: Any, dx: Any, dy: Any, *, shape: str | None = None) -> np.ndarray:
    """Move 2D boxes by ``(dx, dy)``: from tile to image coordinates and back.

    Parameters
    ----------
    boxes : array_like
        ``(N, 4)`` axis ``x_min, y_min, x_max, y_max``, ``(N, 5)`` rotated ``cx, cy, width,
        height, angle`` (angle in radians, counter-clockwise from +x towards +y; unchanged
        by a shift) or ``(N, K, 2)`` convex polygons. A single box gives a single box.
    dx, dy : float or array_like
        One offset for all boxes, or one per box (``(N,)``), e.g. ``tiles[tile, 0]`` and
        ``tiles[tile, 1]`` to move each box from its tile into the image.
    shape : str, optional
        The layout; inferred from the trailing dimensions when ``None``.

    Returns
    -------
    numpy.ndarray
        float64 boxes of the same layout and dimensions.

    Raises
    ------
    obbiou.errors.InvalidInput
        For invalid boxes, 3D boxes, offsets that are not finite or not one per box.

    Examples
    --------
    Two vessels found in the tile starting at (824, 776) of a harbour survey mosaic
    (invented), moved into mosaic coordinates:

    >>> shift([[10, 20, 30, 8, 0.3], [500, 40, 12, 5, -1.0]], 824, 776).tolist()
    [[834.0, 796.0, 30.0, 8.0, 0.3], [1324.0, 816.0, 12.0, 5.0, -1.0]]

    Per-box offsets, and polygons:

    >>> shift([[0, 0, 2, 1], [0, 0, 2, 1]], [0, 100], [5, 5])
    array([[  0.,   5.,   2.,   6.],
           [100.,   5., 102.,   6.]])
    >>> shift([[0, 0], [1, 0], [0, 1]], 1, 1, shape="polygon")
    array([[1., 1.],
           [2., 1.],
           [1., 2.]])
    >>> shift(np.zeros((0, 5)), 3, 4).shape
    (0, 5)
    """
    b = _read_2d(boxes, shape, "boxes", "shift")
    out = _shifted(b, _offsets(dx, len(b), "dx"), _offsets(dy, len(b), "dy"))
    return out[0] if b.single else out


# ---------------------------------------------------------------------------- crop


@dataclass(frozen=True)
class Crop:
    """The truths of :func:`crop` that reach into a tile.

    Attributes
    ----------
    boxes : numpy.ndarray
        The truths in tile coordinates, whole (not cut at the tile edges), in the layout of
        the input.
    rows : numpy.ndarray
        int64 row of each in the input, ascending.
    coverage : numpy.ndarray
        float64 share of each truth's area inside the tile, in (0, 1].
    ignore : numpy.ndarray
        bool: ``coverage < min_coverage`` (mostly outside the tile: neither to be learnt
        nor to be missed).
    """

    boxes: np.ndarray
    rows: np.ndarray
    coverage: np.ndarray
    ignore: np.ndarray

    def __len__(self) -> int:
        return int(self.rows.shape[0])


def _read_tiles(tiles: Any, name: str) -> np.ndarray:
    t = read_boxes(tiles, "axis", name=name).data
    thin = (t[:, 2] <= t[:, 0]) | (t[:, 3] <= t[:, 1])
    if thin.any():
        row = int(np.argmax(thin))
        raise InvalidInput(name, "a tile needs a positive width and height", row=row)
    return t


def crop(truth: Any, tile: Any, *, min_coverage: float = 0.6, shape: str | None = None) -> Crop:
    """The truths that reach into one tile, in tile coordinates, with an ignore flag.

    A truth reaches into the tile when the area of its intersection with the tile is
    positive (a truth that only touches the tile's edge, or has zero area, does not). Its
    coverage is that exact intersection area divided by its own area (:func:`obbiou.coverage`
    of the truth by the tile); truths with coverage below ``min_coverage`` are flagged
    ``ignore``: in a training set or a per-tile evaluation they are neither objects to find
    nor background.

    Parameters
    ----------
    truth : array_like
        2D boxes in image coordinates: ``(N, 4)`` axis, ``(N, 5)`` rotated ``cx, cy, width,
        height, angle`` (radians, counter-clockwise from +x towards +y) or ``(N, K, 2)``
        convex polygons.
    tile : array_like
        One ``axis`` box ``x_min, y_min, x_max, y_max`` (a row of :func:`grid`), with
        positive width and height.
    min_coverage : float
        Least share inside the tile of a truth that is not ignored, in [0, 1]. The default
        0.6 is a rule of thumb (common practice, no source).
    shape : str, optional
        The layout of ``truth``; inferred when ``None``.

    Returns
    -------
    Crop
        ``boxes`` (tile coordinates, whole), ``rows``, ``coverage``, ``ignore``.

    Raises
    ------
    obbiou.errors.InvalidInput
        For invalid or 3D truths, a tile that is not one axis box of positive size, or
        ``min_coverage`` outside [0, 1].

    Examples
    --------
    Three containers near the tile ``[1000, 0, 2024, 1024]`` of a harbour mosaic
    (invented): the first lies inside, the second a quarter inside, the third outside.

    >>> truth = [[1500, 300, 40, 12, 0.0], [990, 600, 40, 12, 0.0], [900, 50, 40, 12, 0.0]]
    >>> c = crop(truth, [1000, 0, 2024, 1024])
    >>> c.rows, c.coverage, c.ignore
    (array([0, 1]), array([1.  , 0.25]), array([False,  True]))
    >>> c.boxes.tolist()
    [[500.0, 300.0, 40.0, 12.0, 0.0], [-10.0, 600.0, 40.0, 12.0, 0.0]]

    No truth reaches into a tile far away; empty input gives an empty crop:

    >>> len(crop(truth, [5000, 5000, 6024, 6024])), len(crop(np.zeros((0, 4)), [0, 0, 1, 1]))
    (0, 0)
    """
    b = _read_2d(truth, shape, "truth", "crop")
    t = _read_tiles(tile, "tile")
    if t.shape[0] != 1 or np.ndim(tile) != 1:
        raise InvalidInput(
            "tile", f"expected one tile (4 numbers), got an array of shape {np.shape(tile)}"
        )
    limit = _threshold(min_coverage, "min_coverage")
    x0, y0, x1, y1 = t[0]
    env = envelope(b.data, shape=b.shape) if len(b) else np.zeros((0, 4))
    near = np.flatnonzero((env[:, 0] < x1) & (env[:, 2] > x0) & (env[:, 1] < y1) & (env[:, 3] > y0))
    tile_boxes = Boxes(t, "axis", False)
    cov = pair_values(b, tile_boxes, near, np.zeros(near.shape[0], np.int64), measure="coverage")
    inside = cov > 0.0
    rows = near[inside].astype(np.int64)
    cov = cov[inside]
    moved = _shifted(
        Boxes(b.data[rows], b.shape, False),
        np.full(rows.shape[0], -x0),
        np.full(rows.shape[0], -y0),
    )
    return Crop(moved, rows, cov, cov < limit)


def _threshold(value: Any, name: str) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InvalidInput(name, f"expected a number in [0, 1], got {value!r}") from None
    if not 0.0 <= v <= 1.0:  # also rejects NaN
        raise InvalidInput(name, f"expected a number in [0, 1], got {v!r}")
    return v


# ---------------------------------------------------------------------------- merge


@dataclass(frozen=True)
class Merged:
    """The image-level detections of :func:`merge`, by descending score.

    Attributes
    ----------
    boxes : numpy.ndarray
        Boxes in image coordinates, in the layout of the input.
    scores : numpy.ndarray
        float64 scores (fused scores with ``fuse=True``).
    labels : numpy.ndarray or None
        The label of each box, or None without labels.
    rows : numpy.ndarray
        int64 source row of each box in the input (with ``fuse=True``: the best member of
        its cluster).
    at_seam : numpy.ndarray
        int64 rows dropped by the seam rule (see :func:`seam_rows`), ascending.
    fused : obbiou.fusion.Fused or None
        With ``fuse=True``, the clusters with their member rows (indices into the input).
    """

    boxes: np.ndarray
    scores: np.ndarray
    labels: np.ndarray | None
    rows: np.ndarray
    at_seam: np.ndarray
    fused: Fused | None = None

    def __len__(self) -> int:
        return int(self.rows.shape[0])


def _tile_index(tile: Any, n: int, count: int) -> np.ndarray:
    arr = np.asarray(tile)
    if arr.ndim == 0 and n == 1:
        arr = arr.reshape(1)
    if arr.ndim != 1 or arr.shape[0] != n:
        raise InvalidInput("tile", f"expected one tile index per box ({n}), got shape {arr.shape}")
    if arr.size and arr.dtype.kind not in "iu":
        if arr.dtype.kind != "f" or not np.all(np.isfinite(arr)) or np.any(arr != np.round(arr)):
            bad = 0
            if arr.dtype.kind == "f":
                bad = int(np.argmax(~np.isfinite(arr) | (arr != np.round(arr))))
            raise InvalidInput("tile", f"expected an integer tile index, got {arr[bad]!r}", row=bad)
    idx = arr.astype(np.int64)
    out = (idx < 0) | (idx >= count)
    if out.any():
        row = int(np.argmax(out))
        raise InvalidInput(
            "tile", f"tile index {int(idx[row])} out of range for {count} tiles", row=row
        )
    return idx


def _cores(tiles: np.ndarray, border: float) -> np.ndarray:
    """Each tile shrunk by ``border`` on its inner edges; outer edges move out to infinity."""
    lo = tiles[:, :2].min(axis=0)
    hi = tiles[:, 2:].max(axis=0)
    core = tiles.copy()
    core[:, :2] = np.where(tiles[:, :2] > lo, tiles[:, :2] + border, -np.inf)
    core[:, 2:] = np.where(tiles[:, 2:] < hi, tiles[:, 2:] - border, np.inf)
    return core


def _inside(env: np.ndarray, core: np.ndarray) -> np.ndarray:
    return (
        (env[:, 0] >= core[:, 0])
        & (env[:, 1] >= core[:, 1])
        & (env[:, 2] <= core[:, 2])
        & (env[:, 3] <= core[:, 3])
    )


def _warn_outside(outside: np.ndarray, tile: np.ndarray) -> None:
    """Warn about boxes that lie wholly outside their own tile (``outside``: a mask): a
    detector never reports those, so they most likely came in image coordinates already,
    or with a wrong tile."""
    if outside.any():
        row = int(np.argmax(outside))
        warnings.warn(
            f"merge: {int(outside.sum())} of {len(outside)} boxes lie wholly outside their "
            f"own tile (first: boxes[{row}], tile {int(tile[row])}); merge expects boxes in "
            "the coordinates of their tile: were they moved into the image already, or is "
            "the tile index wrong?",
            stacklevel=3,
        )


def _default_border(tiles: np.ndarray) -> float:
    side = np.minimum(tiles[:, 2] - tiles[:, 0], tiles[:, 3] - tiles[:, 1])
    return float(side.min()) / 64.0 if side.size else 0.0


def seam_rows(env: np.ndarray, tile: np.ndarray, tiles: np.ndarray, border: float) -> np.ndarray:
    """Rows dropped by the seam rule of :func:`merge` (ascending int64).

    A low-level helper: its inputs are trusted (no validation). See :func:`merge` for the
    rule.

    Parameters
    ----------
    env : numpy.ndarray
        ``(N, 4)`` float64 enclosing axis boxes of the detections, in image coordinates.
    tile : numpy.ndarray
        ``(N,)`` int64 tile index of each detection.
    tiles : numpy.ndarray
        ``(T, 4)`` float64 axis tiles with positive width and height.
    border : float
        Width of the band along inner tile edges, >= 0.

    Returns
    -------
    numpy.ndarray
        int64 rows of ``env`` at the seam of their own tile and held by another tile's core.

    Examples
    --------
    Two tiles side by side overlapping over x in [80, 100]; a box cut at the right edge of
    tile 0 lies inside tile 1, away from its edges, and goes; tile 1's own box stays:

    >>> tiles = np.array([[0.0, 0, 100, 100], [80, 0, 180, 100]])
    >>> env = np.array([[90.0, 40, 100, 50], [90, 40, 105, 50]])
    >>> seam_rows(env, np.array([0, 1]), tiles, 2.0)
    array([0])
    """
    core = _cores(tiles, border)
    return _held_elsewhere(env, np.flatnonzero(~_inside(env, core[tile])), tile, tiles, core)


def _held_elsewhere(
    env: np.ndarray, at_seam: np.ndarray, tile: np.ndarray, tiles: np.ndarray, core: np.ndarray
) -> np.ndarray:
    """The rows of ``at_seam`` whose extent lies inside the core of a tile not their own."""
    if at_seam.size == 0 or tiles.shape[0] < 2:
        return np.zeros(0, np.int64)
    from obbiou._kernels import seams, threads

    look = _TileLookup(tiles)
    out = np.empty(at_seam.shape[0], np.bool_)
    args = (  # C-ordered float64 and int64: one kernel signature
        np.ascontiguousarray(env, dtype=np.float64),
        at_seam.astype(np.int64),
        np.ascontiguousarray(tile, dtype=np.int64),
        np.ascontiguousarray(core),
        look.lo,
        look.cell,
        look.shape,
        look.ptr,
        look.items,
        out,
    )
    threads.run(seams.held, args, at_seam.shape[0], serial=at_seam.shape[0] < _SERIAL_BELOW)
    return at_seam[out].astype(np.int64)


class _TileLookup:
    """Which tiles may hold a point: a uniform grid of cells over the tiles' extent, each
    tile registered in every cell its closed extent touches. Points outside the extent
    fall into the nearest border cell (cores reach to infinity there)."""

    def __init__(self, tiles: np.ndarray) -> None:
        lo = tiles[:, :2].min(axis=0)
        span = np.maximum(tiles[:, 2:].max(axis=0) - lo, 1e-300)
        side = float(np.minimum(tiles[:, 2] - tiles[:, 0], tiles[:, 3] - tiles[:, 1]).min())
        # cells of a quarter of the smallest tile side (few tiles per cell), but no more
        # than about 64 cells per tile
        cell = max(side / 4, float(np.sqrt(span[0] * span[1] / (64.0 * tiles.shape[0]))))
        self.lo, self.cell = lo, cell
        self.shape = np.maximum(np.ceil(span / cell).astype(np.int64), 1)
        c0 = self._cells(tiles[:, 0], tiles[:, 1])
        c1 = self._cells(tiles[:, 2], tiles[:, 3])
        nx = c1[0] - c0[0] + 1
        count = nx * (c1[1] - c0[1] + 1)
        owner = np.repeat(np.arange(tiles.shape[0]), count)
        k = np.arange(owner.shape[0]) - np.repeat(np.cumsum(count) - count, count)
        ix = c0[0][owner] + k % nx[owner]
        iy = c0[1][owner] + k // nx[owner]
        key = iy * self.shape[0] + ix
        order = np.argsort(key, kind="stable")
        self.items = owner[order]
        self.ptr = np.zeros(int(self.shape[0] * self.shape[1]) + 1, np.int64)
        np.cumsum(np.bincount(key, minlength=self.ptr.shape[0] - 1), out=self.ptr[1:])

    def _cells(self, x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        ix = np.clip(np.floor((x - self.lo[0]) / self.cell), 0, self.shape[0] - 1)
        iy = np.clip(np.floor((y - self.lo[1]) / self.cell), 0, self.shape[1] - 1)
        return ix.astype(np.int64), iy.astype(np.int64)


def merge(
    boxes: Any,
    scores: Any,
    tile: Any,
    tiles: Any,
    *,
    labels: Any = None,
    shape: str | None = None,
    max_iou: float = 0.5,
    border: float | None = None,
    fuse: bool = False,
) -> Merged:
    """Merge the detections of overlapping tiles into one set for the whole image.

    Three steps:

    1. **Move**: each box moves from its tile's coordinates into the image's
       (:func:`shift` by the tile's ``x_min, y_min``).
    2. **Seam rule**: the *image extent* is the enclosing box of all tiles. An edge of a
       tile is *inner* when it does not lie on the image extent's boundary. A tile's
       *core* is the tile with each inner edge moved inwards by ``border`` (outer edges
       stay where they are, or rather extend to infinity: boxes may stick out of the
       image). A box is *at the seam* when its enclosing axis-aligned box is not inside its
       own tile's core, i.e. it reaches within ``border`` of an inner edge of its tile or
       beyond it. A box at the seam is dropped when its enclosing box lies inside the core
       of another tile: that tile saw the whole box away from its own edges, so its own
       detection of the object is the one to trust, and the box at hand is likely cut
       by its tile's edge. A box held by no other core stays (an object larger than the
       overlap has no tile that sees it whole; suppression or fusion handles its copies).
       The rule looks at geometry only, not at labels or scores.
    3. **Duplicates** across seams: hard suppression (:func:`obbiou.suppress`, IoU >
       ``max_iou``, within a label), or with ``fuse=True`` fusion (:func:`obbiou.fuse`,
       clusters at IoU >= ``max_iou``, ``expected=1``: the fused score is the members'
       mean score).

    Parameters
    ----------
    boxes : array_like
        Detections in their tile's coordinates: ``(N, 4)`` axis, ``(N, 5)`` rotated ``cx,
        cy, width, height, angle`` (radians, counter-clockwise from +x towards +y; in an
        image frame with y down the same number turns clockwise on screen) or ``(N, K, 2)``
        convex polygons (not with ``fuse=True``).
    scores : array_like
        One finite score per box (> 0 with ``fuse=True``). Every score takes part: no floor.
    tile : array_like of int
        Each box's tile: an index into ``tiles``.
    tiles : array_like
        ``(T, 4)`` axis tiles in image coordinates, e.g. from :func:`grid`.
    labels : array_like, optional
        One label per box; duplicates are removed or fused within a label only.
    shape : str, optional
        The layout of ``boxes``; inferred when ``None``.
    max_iou : float
        Duplicate threshold, in [0, 1].
    border : float, optional
        Width of the band along inner tile edges, >= 0, in image units. Default: 1/64 of
        the smallest tile side (16 pixels for 1024-pixel tiles; a rule of thumb, no
        source). Keep it below half the overlap, so that the cores of neighbouring tiles
        still overlap.
    fuse : bool
        Fuse duplicates into their score-weighted mean instead of keeping the best.

    Warns
    -----
    UserWarning
        When boxes lie wholly outside their own tile (likely already in image
        coordinates, or a wrong tile index).

    Returns
    -------
    Merged
        ``boxes`` (image coordinates), ``scores``, ``labels``, ``rows`` (source rows),
        ``at_seam`` (rows dropped by the seam rule) and, with ``fuse=True``, ``fused``.

    Raises
    ------
    obbiou.errors.InvalidInput
        For invalid boxes (or 3D boxes), scores, tile indices that are not integers in
        range, tiles that are not axis boxes of positive size, labels that are not one per
        box, ``max_iou`` outside [0, 1] or a negative ``border``.

    Examples
    --------
    Two 1024-pixel tiles of a harbour mosaic side by side, overlapping by 200 pixels
    (invented). A container at x = 900 lies inside both: tile 0 sees it whole, tile 1 too
    (at x = 900 - 824). A long vessel crosses the seam: tile 0 sees only its left part,
    cut at its right edge, which tile 1 sees whole.

    >>> tiles = grid(1848, 1024, size=1024, overlap=200)
    >>> boxes = [[900, 500, 40, 12, 0.1], [76, 500, 40, 12, 0.1],   # container, twice
    ...          [994, 300, 60, 20, 0.0], [176, 300, 200, 20, 0.0]]  # vessel: cut, whole
    >>> m = merge(boxes, [0.9, 0.8, 0.95, 0.7], [0, 1, 0, 1], tiles)
    >>> m.rows, m.at_seam
    (array([0, 3]), array([2]))
    >>> m.boxes.tolist()
    [[900.0, 500.0, 40.0, 12.0, 0.1], [1000.0, 300.0, 200.0, 20.0, 0.0]]

    Empty input gives an empty result:

    >>> len(merge(np.zeros((0, 5)), [], [], tiles))
    0
    """
    b = _read_2d(boxes, shape, "boxes", "merge")
    t = _read_tiles(tiles, "tiles")
    n = len(b)
    s = read_scores(scores, n, b.single, positive=bool(fuse))
    idx = _tile_index(tile, n, t.shape[0])
    thr = _threshold(max_iou, "max_iou")
    if border is None:
        band = _default_border(t)
    else:
        band = _positive(border, "border", zero=True)
    label_arr, codes = (None, None) if labels is None else read_labels(labels, n)
    if fuse and b.shape == "polygon":
        raise InvalidInput(
            "boxes", "fuse=True averages axis and rotated boxes; polygons cannot be fused"
        )
    if n == 0:
        empty = b.data[:0].copy()
        return Merged(
            empty,
            np.zeros(0),
            None if label_arr is None else label_arr[:0],
            np.zeros(0, np.int64),
            np.zeros(0, np.int64),
            _fuse(empty, np.zeros(0), shape=b.shape) if fuse else None,
        )
    from obbiou._kernels.seams import AT_SEAM, OUTSIDE

    core = _cores(t, band)
    image, env, state = _place(b, idx, t, core)
    _warn_outside((state & OUTSIDE) != 0, idx)
    dropped = _held_elsewhere(env, np.flatnonzero(state & AT_SEAM), idx, t, core)
    keep = np.ones(n, bool)
    keep[dropped] = False
    rows = np.flatnonzero(keep)
    if fuse:
        kept_labels = None if label_arr is None else label_arr[rows]
        kept_boxes = _take(image, rows)
        f = _fuse(kept_boxes, s[rows], labels=kept_labels, shape=b.shape, min_iou=thr, expected=1)
        members = rows[f.members]
        fused = type(f)(f.boxes, f.scores, f.labels, f.offsets, members)
        return Merged(f.boxes, f.scores, f.labels, members[f.offsets[:-1]], dropped, fused)
    kept_env = _take(env, rows)
    del env, state  # (the arrays made next reuse their memory: fewer fresh pages)
    src = _suppress_copies(image, kept_env, rows, s, b.shape, thr, codes)
    return Merged(
        _take(image, src),
        s[src],
        None if label_arr is None else label_arr[src],
        src,
        dropped,
    )


def _take(a: np.ndarray, rows: np.ndarray) -> np.ndarray:
    """``a[rows]`` along the first axis by ``numpy.take``: measured on the 168 483 boxes left
    by the seam rule in ``python bench/tiles.py`` (rotated, rows in spatial order, fastest
    of 15), 2.1 ms against 8.3 ms for the fancy index, whose general path walks each
    row's five numbers one by one."""
    return np.take(a, rows, axis=0)


# Below this many boxes the first pass runs on one thread (waking threads costs more).
_SERIAL_BELOW = 20_000


def _place(
    b: Boxes, tile: np.ndarray, tiles: np.ndarray, core: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Boxes moved into the image, their enclosing axis boxes and the kernel's state bits
    (at the seam of their own tile; wholly outside it), in one pass on all cores."""
    from obbiou._kernels import seams, threads
    from obbiou._kernels.codes import Layout

    n = len(b)
    flat = np.ascontiguousarray(b.data.reshape(n, -1))  # C order: one kernel signature
    image = np.empty_like(flat)
    env = np.empty((n, 4))
    state = np.empty(n, np.int8)
    tiles, core = np.ascontiguousarray(tiles), np.ascontiguousarray(core)
    args = (int(Layout[b.shape.upper()]), flat, tile, tiles, core, image, env, state)
    threads.run(seams.place, args, n, serial=n < _SERIAL_BELOW)
    return image.reshape(b.data.shape), env, state


# From this many boxes merge finds the copies by the pairs above max_iou; below it by
# obbiou.suppress's lazy walk. Measured (one thread, CPU, fastest of 15, squares of the
# bench's scene after the seam rule, suppress against the pairs): 1 478 boxes 0.24 against
# 0.17 ms, 5 965 boxes 1.25 against 0.84 ms, 16 038 boxes 3.56 against 2.44 ms, 35 264
# boxes 9.92 against 5.68 ms. Below it the pairs save a millisecond at most, and a
# process that suppresses anyway (the demo) then compiles no pair kernels for its merges
# (about 2 s with an empty cache; the demo's first run took 5 s more CPU when the former
# pairs road served every size).
_PAIRS_FROM = 20_000


def _suppress_copies(
    image: np.ndarray,
    env: np.ndarray,
    rows: np.ndarray,
    scores: np.ndarray,
    layout: str,
    thr: float,
    codes: np.ndarray | None,
    pairs: bool | None = None,
) -> np.ndarray:
    """The input rows that ``obbiou.suppress(image[rows], scores[rows], max_iou=thr,
    labels=codes[rows], min_score=-inf)`` keeps, best first (``env``: the extents of
    ``image[rows]``). From :data:`_PAIRS_FROM` boxes (or with ``pairs=True``) by another road,
    on all cores: the pairs with IoU > ``thr`` first, then the greedy walk over them.
    After the seam rule most boxes have no copy and the rest one to three, so the pairs
    are few; suppress's lazy walk would visit the boxes in score order, jumping across the
    whole image (see ``python bench/tiles.py --diagnose``).

    The pairs road reuses what the first pass made: the spatial order comes from the
    extents ``env`` (:func:`obbiou._kernels.grid.index_extents`), and the boxes are
    prepared in that order, so that nothing is permuted afterwards; the pairs are decided
    by cheap bounds where they can be (as in hard suppression), with no IoU values."""
    from obbiou._kernels import grid
    from obbiou._kernels import suppress as kernels
    from obbiou._kernels.codes import Kind

    s = scores[rows]
    if pairs is None:
        pairs = rows.shape[0] >= _PAIRS_FROM
    if not pairs or rows.shape[0] < 2:  # (no pairs among fewer than two boxes)
        return rows[
            suppress(
                _take(image, rows),
                s,
                shape=layout,
                max_iou=thr,
                labels=None if codes is None else codes[rows],
                min_score=-np.inf,
            ).indices
        ]
    order, index = grid.index_extents(env)
    src = rows[order]  # the input row at each position of the spatial order
    p = prepare(Boxes(_take(image, src), layout, False))
    kind, prepared = int(Kind[p.kind.upper()]), p.rows
    vertices = p.vertices if p.kind == "poly" else np.zeros((0, 0, 2))
    del p  # (and its copy of the boxes: later arrays reuse the memory, no fresh pages)
    labels = np.zeros(0, np.int64) if codes is None else codes[src]
    scene = grid.self_scene(kind, prepared, vertices, order, labels, thr, False, False)
    ptr, nbr = kernels.exceeding(scene, index, False)
    del scene, index, prepared, vertices  # (as above)
    return rows[kernels.hard_over_pairs(score_order(s), ptr, nbr)]


def warmup() -> None:
    """Compile merge's own kernels once (cached on disk): the first pass, the seam rule's
    lookup and the greedy walk over the pairs; one compile serves every layout. (The pairs
    are the scene group's, fusion the fusion group's.)

    Examples
    --------
    >>> warmup()
    """
    tiles = grid(200, 100, size=100, overlap=20)
    # a box of tile 0 at its seam, held whole by tile 1; a copy of a box in tile 1
    boxes = [[95.0, 50, 10, 4, 0.1], [15, 50, 10, 4, 0.1], [40, 20, 10, 4, 0], [40, 20, 10, 4, 0]]
    merge(boxes, [0.9, 0.8, 0.7, 0.6], [0, 1, 1, 1], tiles)
    copies = np.array(boxes[2:], dtype=np.float64)  # and the road of large inputs
    env = envelope(copies, shape="rotated")
    scores = np.array([0.7, 0.6])
    _suppress_copies(copies, env, np.arange(2), scores, "rotated", 0.5, None, pairs=True)
