"""Tiled scene overlap: the overlapping pairs of a scene too large for one process."""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from obbiou.distributed.cluster import connect, item, release, thread_count, wait_for
from obbiou.distributed.sources import partitions_of, submit_parts
from obbiou.errors import InvalidInput

__all__ = ["overlapping_pairs_distributed"]


def _table_layout(columns: Sequence[Any], shape: str | None, what: str) -> tuple[str, list]:
    """The layout of a box table and its box columns, by the rules tables are read by in
    :func:`obbiou.tables.read_table` (the same column names, the same inference)."""
    from obbiou.tables import box_columns, infer_layout, polygon_vertices

    names = {str(c) for c in columns}
    layout = shape if shape is not None else infer_layout(names, what)
    vertices = polygon_vertices(names) if layout == "polygon" else 0
    cols = list(box_columns(layout, max(vertices, 3)))
    missing = [c for c in cols if c not in names]
    if missing:
        raise InvalidInput(
            what, f"missing column {missing[0]!r} (shape {layout!r} needs {' '.join(cols)})"
        )
    return layout, cols


def _boxes_of(part: Any, shape: str | None, what: str) -> tuple[np.ndarray, str]:
    """Validated float64 boxes of one partition (a DataFrame or an array of boxes)."""
    import pandas as pd

    from obbiou.shapes import read_boxes

    if isinstance(part, pd.DataFrame):
        layout, cols = _table_layout(list(part.columns), shape, "table")
        try:
            data = part[cols].to_numpy(dtype=np.float64)
        except (TypeError, ValueError) as exc:
            reason = f"non-numeric value in the box columns ({exc})"
            raise InvalidInput("row", reason, message=reason) from None
        if layout == "polygon":
            data = data.reshape(len(data), -1, 2)
        boxes = read_boxes(data, layout, name="row")
    else:
        boxes = read_boxes(part, shape, name="row")
    return boxes.data, boxes.shape


@dataclass(frozen=True)
class _Grid:
    """A uniform grid of ``nx × ny`` tiles over the ground plane, half-open cells."""

    x0: float
    y0: float
    dx: float
    dy: float
    nx: int
    ny: int

    def cell(self, x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        # floor((x - x0) / dx) is monotone in x in floating point, so a point inside an
        # extent always falls in a cell between the cells of the extent's two ends.
        ix = np.clip(np.floor((x - self.x0) / self.dx), 0, self.nx - 1).astype(np.int64)
        iy = np.clip(np.floor((y - self.y0) / self.dy), 0, self.ny - 1).astype(np.int64)
        return ix, iy


def _reach(data: np.ndarray, shape: str) -> np.ndarray:
    """Ground-plane extents ``(N, 4)`` = x_min, y_min, x_max, y_max, slightly widened.

    The widening is the spatial index's own (a few ulps of the coordinates' magnitude,
    :func:`obbiou._kernels.grid.pad_extents`): two boxes the overlap kernel sees as
    overlapping, however thinly, have intersecting extents here as in the index.
    """
    from obbiou._kernels.grid import pad_extents
    from obbiou.boxes import envelope

    if len(data) == 0:
        return np.zeros((0, 4))
    env = envelope(data, shape=shape)
    if env.shape[1] == 6:
        env = env[:, [0, 1, 3, 4]]
    return pad_extents(env)


def _prepare(part: Any, shape: str | None, what: str) -> tuple[np.ndarray, str, np.ndarray]:
    """On a worker: validated boxes of one partition, their layout and ground extents."""
    data, layout = _boxes_of(part, shape, what)
    return data, layout, _reach(data, layout)


def _stats(prepared: tuple[np.ndarray, str, np.ndarray]) -> dict[str, Any]:
    """On a worker: the few numbers the tile plan needs from one partition."""
    data, layout, reach = prepared
    if len(reach):
        lo, hi = reach[:, :2].min(axis=0), reach[:, 2:].max(axis=0)
        span = (reach[:, 2:] - reach[:, :2]).sum(axis=0)
    else:
        lo, hi, span = np.full(2, np.inf), np.full(2, -np.inf), np.zeros(2)
    return {"rows": len(data), "shape": layout, "lo": lo, "hi": hi, "span": span}


def _plan_grid(scans: Sequence[dict[str, Any]], tiles: int | tuple[int, int]) -> _Grid:
    lo = np.min([s["lo"] for s in scans], axis=0)
    hi = np.max([s["hi"] for s in scans], axis=0)
    if not np.all(np.isfinite(lo)):  # no boxes at all
        return _Grid(0.0, 0.0, 1.0, 1.0, 1, 1)
    rows = sum(s["rows"] for s in scans)
    mean_span = np.sum([s["span"] for s in scans], axis=0) / max(rows, 1)
    width = np.maximum(hi - lo, 1e-300)
    if isinstance(tiles, tuple):
        nx, ny = (max(1, int(t)) for t in tiles)
    else:
        # As square as the scene allows, and no finer than a few mean box sizes per side so
        # that the halo (boxes copied into neighbouring tiles) stays a small share.
        aspect = width[0] / width[1]
        nx = max(1, int(round(np.sqrt(tiles * aspect))))
        ny = max(1, int(round(tiles / nx)))
        cap = np.maximum(1, np.floor(width / np.maximum(4 * mean_span, 1e-300))).astype(int)
        nx, ny = int(min(nx, cap[0])), int(min(ny, cap[1]))
    return _Grid(float(lo[0]), float(lo[1]), width[0] / nx, width[1] / ny, nx, ny)


def _to_tiles(
    prepared: tuple[np.ndarray, str, np.ndarray], offset: int, grid: _Grid
) -> tuple[tuple[np.ndarray, np.ndarray, np.ndarray], ...]:
    """On a worker: copy each box into every tile its extent reaches.

    Returns one ``(global_rows, boxes, extents)`` piece per tile, as a tuple so that each
    tile's piece moves to that tile's task on its own.
    """
    data, _, reach = prepared
    ix0, iy0 = grid.cell(reach[:, 0], reach[:, 1])
    ix1, iy1 = grid.cell(reach[:, 2], reach[:, 3])
    n_tiles = grid.nx * grid.ny
    rows_in: list[list[np.ndarray]] = [[] for _ in range(n_tiles)]
    # Loop over the (few) tile offsets a box spans, not over boxes.
    span_x, span_y = ix1 - ix0, iy1 - iy0
    for sx in range(int(span_x.max(initial=0)) + 1):
        for sy in range(int(span_y.max(initial=0)) + 1):
            sel = np.flatnonzero((span_x >= sx) & (span_y >= sy))
            if len(sel) == 0:
                continue
            tile = (iy0[sel] + sy) * grid.nx + (ix0[sel] + sx)
            order = np.argsort(tile, kind="stable")
            sel, tile = sel[order], tile[order]
            cut = np.flatnonzero(np.diff(tile)) + 1
            for rows, t in zip(np.split(sel, cut), tile[np.r_[0, cut]], strict=True):
                rows_in[int(t)].append(rows)
    pieces = []
    for t in range(n_tiles):
        rows = np.sort(np.concatenate(rows_in[t])) if rows_in[t] else np.zeros(0, np.int64)
        pieces.append((rows + offset, data[rows], reach[rows]))
    return tuple(pieces)


def _tile_pairs(
    tile: int,
    grid: _Grid,
    shape: str,
    min_iou: float,
    pieces_a: Sequence[tuple[np.ndarray, np.ndarray, np.ndarray]],
    pieces_b: Sequence[tuple[np.ndarray, np.ndarray, np.ndarray]] | None,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """On a worker: the pairs among one tile's boxes whose reference point lies in it.

    The reference point of a pair is the lower-left corner of the intersection of the two
    (widened) extents; it lies in both extents, so in a tile both boxes were copied to, and
    in exactly one tile.
    """
    from obbiou.scene import overlapping_pairs

    def join(pieces: Sequence[tuple[np.ndarray, np.ndarray, np.ndarray]]) -> tuple:
        rows = np.concatenate([p[0] for p in pieces])
        data = np.concatenate([p[1] for p in pieces])
        reach = np.concatenate([p[2] for p in pieces])
        return rows, data, reach

    rows_a, data_a, reach_a = join(pieces_a)
    if pieces_b is None:
        rows_b, data_b, reach_b = rows_a, data_a, reach_a
        found = overlapping_pairs(data_a, shape=shape, min_iou=min_iou)
    else:
        rows_b, data_b, reach_b = join(pieces_b)
        found = overlapping_pairs(data_a, data_b, shape=shape, min_iou=min_iou)
    i, j = np.asarray(found.first), np.asarray(found.second)
    ref_x = np.maximum(reach_a[i, 0], reach_b[j, 0])
    ref_y = np.maximum(reach_a[i, 1], reach_b[j, 1])
    cx, cy = grid.cell(ref_x, ref_y)
    mine = cy * grid.nx + cx == tile
    return rows_a[i[mine]], rows_b[j[mine]], np.asarray(found.iou)[mine]


def overlapping_pairs_distributed(
    a: Any,
    b: Any = None,
    *,
    shape: str | None = None,
    min_iou: float = 0.0,
    tiles: int | tuple[int, int] | None = None,
    client: Any = None,
    scheduler: str | None = None,
    workers: int | None = None,
    progress: bool = False,
    timeout: float | None = None,
) -> Any:
    """Overlapping pairs of a large scene, by spatial tiles on a Dask cluster.

    The same result as :func:`obbiou.overlapping_pairs` on the whole table (same pairs, same
    order, same IoU values), computed tile by tile. Each tile receives the boxes whose
    ground-plane extents reach into it — the boxes lying in it plus a halo of boxes that
    overhang its border — finds the overlapping pairs among them and keeps a pair only when
    the lower-left corner of the intersection of the two extents lies in the tile. That
    point lies in both extents, hence in a tile that received both boxes, and in one tile
    only: every pair is found exactly once, with no duplicates to sort out.

    Row numbers are positions in the whole table: partitions in order, rows in order within
    a partition.

    Parameters
    ----------
    a : Dask DataFrame, str or path, pandas DataFrame or array_like
        Boxes: a table with the box columns of one layout (``cx cy width height angle`` for
        ``rotated``, ``cx cy cz length width height yaw`` for ``upright``, ``x_min y_min
        x_max y_max`` for ``axis``, the ``axis3`` columns, ``px0 py0 … py3`` for 4-vertex
        polygons), a folder of Parquet files holding such a table, or an array of boxes.
        Angles in radians, counter-clockwise from +x towards +y (in an image frame with y
        down, the same number turns the box clockwise on screen). 3D layouts are tiled by
        their ground-plane footprint.
    b : same kinds as ``a``, optional
        Pairs between ``a`` and ``b``; ``None`` means the pairs of ``a`` with itself,
        ``first < second``.
    shape : str, optional
        The layout; inferred from the columns (or array dimensions) when ``None``.
    min_iou : float
        Keep pairs with IoU above this (above 0 when 0), as in ``overlapping_pairs``.
    tiles : int or (int, int), optional
        Number of tiles (a grid as square as the scene), or an explicit ``(nx, ny)`` grid.
        Default: four per worker thread, no finer than four mean box sizes per tile side.
    client, scheduler, workers
        Where the work runs; see :func:`connect`.
    progress : bool
        Show a progress bar (tqdm, on stderr).
    timeout : float, optional
        Give up (``TimeoutError``) when a stage takes longer than this many seconds.

    Returns
    -------
    Pairs
        int64 ``first``, ``second`` and float64 ``iou``, sorted by ``(first, second)``.

    Raises
    ------
    obbiou.errors.InvalidInput
        Bad input, naming the partition and the row (``a file 'scene/f3.parquet' (3 of 8):
        row[17]: negative width -3.0``).
    TaskFailed
        Any other failing task, naming the partition or tile.

    Examples
    --------
    Two overlapping squares and one far away (the third pair is disjoint), on an in-process
    cluster:

    >>> import numpy as np
    >>> boxes = np.array([[0, 0, 2, 2, 0.0], [1, 0, 2, 2, 0.0], [50, 50, 1, 1, 0.3]])
    >>> pairs = overlapping_pairs_distributed(boxes, tiles=(2, 2))
    >>> pairs.first, pairs.second, pairs.iou.round(4)
    (array([0]), array([1]), array([0.3333]))

    Empty input gives empty pairs:

    >>> len(overlapping_pairs_distributed(np.zeros((0, 5))).first)
    0
    """
    from obbiou.scene import Pairs

    roles = {"a": a} if b is None else {"a": a, "b": b}
    with connect(client=client, scheduler=scheduler, workers=workers) as cl:
        threads = thread_count(cl)
        sources = {
            k: partitions_of(t, what=k, chunks=threads, boxes=True) for k, t in roles.items()
        }
        names = [n for s in sources.values() for n in s.names]
        parts = [f for s in sources.values() for f in submit_parts(cl, s)]
        roles_of = [k for k, s in sources.items() for _ in s.parts]
        prepared = [
            cl.submit(_prepare, p, shape, k, pure=False)
            for p, k in zip(parts, roles_of, strict=True)
        ]
        stats = [cl.submit(_stats, p, pure=False) for p in prepared]
        held = parts + prepared
        try:
            stats = wait_for(cl, stats, names, stage="scan", progress=progress, timeout=timeout)
            for f in parts:  # the validated arrays are all that is needed from here on
                f.release()
            held = list(prepared)
            layouts = {s["shape"] for s in stats if s["rows"]}
            if len(layouts) > 1:
                reason = f"boxes of different layouts ({', '.join(sorted(layouts))})"
                raise InvalidInput("b", reason, message=f"a and b: {reason}")
            layout = layouts.pop() if layouts else stats[0]["shape"]
            grid = _plan_grid(stats, tiles if tiles is not None else 4 * threads)
            n_grid = grid.nx * grid.ny
            pieces: dict[str, list[list[Any]]] = {k: [] for k in sources}
            offsets = dict.fromkeys(sources, 0)
            for prep, s, k in zip(prepared, stats, roles_of, strict=True):
                split = cl.submit(_to_tiles, prep, offsets[k], grid, pure=False)
                held.append(split)
                offsets[k] += s["rows"]
                pieces[k].append([cl.submit(item, split, t, pure=False) for t in range(n_grid)])
            futures = [
                cl.submit(
                    _tile_pairs,
                    t,
                    grid,
                    layout,
                    min_iou,
                    [pp[t] for pp in pieces["a"]],
                    [pp[t] for pp in pieces["b"]] if "b" in pieces else None,
                    pure=False,
                )
                for t in range(n_grid)
            ]
            tile_names = [
                f"tile {t} of {n_grid} (column {t % grid.nx}, row {t // grid.nx})"
                for t in range(n_grid)
            ]
            found = wait_for(
                cl, futures, tile_names, stage="overlap", progress=progress, timeout=timeout
            )
        finally:
            release(held)
    first = np.concatenate([f[0] for f in found]).astype(np.int64)
    second = np.concatenate([f[1] for f in found]).astype(np.int64)
    iou = np.concatenate([f[2] for f in found]).astype(np.float64)
    order = np.lexsort((second, first))
    n_first = offsets["a"]
    n_second = offsets.get("b", n_first)
    return Pairs(
        first=first[order], second=second[order], iou=iou[order], n_first=n_first, n_second=n_second
    )
