"""Distributed evaluation: frames to buckets, matching on the workers, the reduce here."""

from __future__ import annotations

import os
import warnings
from collections.abc import Sequence
from dataclasses import replace
from pathlib import Path
from typing import Any

import numpy as np

from obbiou.distributed.cluster import (
    connect,
    item,
    release,
    require_dask,
    thread_count,
    wait_for,
)
from obbiou.distributed.sources import Source, partitions_of, submit_parts
from obbiou.distributed.warm import warm_workers
from obbiou.distributed.wire import pack_records, unpack_records
from obbiou.errors import InvalidInput
from obbiou.evaluation.point_counts import check_min_points, no_common_frame

__all__ = ["evaluate_distributed"]


def _read_here(table: Any, role: str, shape: str | None, degrees: bool) -> Any:
    """Read a single file or an in-memory table here, as in-process evaluation reads it.

    Errors then name the file, line and column exactly as ``evaluate`` does; the validated
    table is cut into pieces for the workers. Dask DataFrames and Parquet folders are left
    to the workers.
    """
    import pandas as pd

    from obbiou.tables import Table, read_table

    is_file = isinstance(table, (str, os.PathLike)) and Path(table).is_file()
    if is_file or isinstance(table, (pd.DataFrame, dict, Table)):
        return read_table(table, role=role, shape=shape, degrees=degrees)
    return table


def _points_here(points: Any) -> Any:
    """Read a points file or an in-memory table of points here, as in-process evaluation
    reads it (errors name the file, line and column alike); a folder or a Dask DataFrame is
    left to the workers, one partition per file or per Dask partition."""
    import dask.dataframe as dd

    from obbiou.tables import read_points

    if isinstance(points, (str, os.PathLike)) and Path(points).is_dir():
        return points
    if isinstance(points, dd.DataFrame):
        return points
    return read_points(points)


def _point_sources(points: Any, chunks: int) -> tuple[Source, str]:
    """The partitions of a table of points, and its name for messages. Points read here are
    cut into ``chunks`` row ranges."""
    from obbiou.tables import Points

    if not isinstance(points, Points):
        name = str(points) if isinstance(points, (str, os.PathLike)) else "<Dask DataFrame>"
        return partitions_of(points, what="points"), name
    n = len(points)
    bounds = np.linspace(0, n, max(1, min(int(chunks), n)) + 1).astype(np.int64)
    spans = list(zip(bounds[:-1].tolist(), bounds[1:].tolist(), strict=True))
    parts = [Points(points.frame[lo:hi], points.xyz[lo:hi], points.source) for lo, hi in spans]
    names = [
        f"points rows {lo}..{hi - 1} ({points.source})" if hi > lo else f"points ({points.source})"
        for lo, hi in spans
    ]
    return Source(parts, names), points.source


def _split_points(part: Any, n_buckets: int) -> tuple[Any, ...]:
    """On a worker: read and validate one partition of points, cut it into per-bucket
    pieces by the frame buckets the truths and detections go to (:func:`_frame_buckets`)."""
    from obbiou.tables import Points, read_points

    pts = read_points(part)
    buckets = _frame_buckets(pts.frame, n_buckets)
    order = np.argsort(buckets, kind="stable")
    cuts = np.searchsorted(buckets[order], np.arange(n_buckets + 1))
    rows = [order[cuts[k] : cuts[k + 1]] for k in range(n_buckets)]
    return tuple(Points(pts.frame[r], pts.xyz[r], pts.source) for r in rows)


def _point_shape(split: Sequence[Any]) -> tuple[int, int]:
    """On a worker: the number of points of one partition and their dimension (2 or 3)."""
    return sum(len(p) for p in split), int(split[0].xyz.shape[1])


def _check_point_dims(shapes: Sequence[tuple[int, int]], names: Sequence[str]) -> None:
    """All partitions of the points with ``z`` or all without (as for a folder in process)."""
    first = shapes[0][1]
    for (_, dim), name in zip(shapes, names, strict=True):
        if dim != first:
            have = {2: "frame, x, y", 3: "frame, x, y, z"}
            raise InvalidInput(
                "points",
                f"{name}: columns {have[dim]} while {names[0]} has {have[first]}; every "
                "partition needs the same",
            )


def _join_points(pieces: Sequence[Any], truth: Any) -> Any:
    """One table of the points of a bucket, keeping only those of frames that hold truths
    (the others are in no truth): the counts are those of the whole table."""
    from obbiou.tables import Points, comparable_frame_ids

    *frames, tframe = comparable_frame_ids([p.frame for p in pieces] + [truth.frame])
    frame = np.concatenate(frames)
    xyz = np.concatenate([p.xyz for p in pieces])
    keep = np.isin(frame, tframe)
    return Points(frame[keep], xyz[keep], pieces[0].source)


def _mix(values: np.ndarray) -> np.ndarray:
    """splitmix64 of int64 values (Steele, Lea & Flood, OOPSLA 2014): well-spread buckets."""
    z = values.astype(np.int64).view(np.uint64) + np.uint64(0x9E3779B97F4A7C15)
    z = (z ^ (z >> np.uint64(30))) * np.uint64(0xBF58476D1CE4E5B9)
    z = (z ^ (z >> np.uint64(27))) * np.uint64(0x94D049BB133111EB)
    return z ^ (z >> np.uint64(31))


def _frame_buckets(frame: np.ndarray, n_buckets: int) -> np.ndarray:
    """Bucket of each frame id, the same in every process and for either table.

    Integer ids are mixed by splitmix64. Text ids that spell an integer (``"7"``: the text
    form of integer ids in a table that also holds names, :func:`obbiou.tables.frame_ids`)
    go where that integer goes: ``7`` and ``"7"`` are one frame, and a partition cannot know
    what the other table holds; other text is hashed with pandas' fixed-key hash, not
    Python's per-process ``hash``.
    """
    import pandas as pd

    if len(frame) == 0:
        return np.zeros(0, dtype=np.int64)
    if frame.dtype.kind in "iu":
        keys = _mix(frame)
    else:
        text = pd.Series(frame, dtype=object).astype(str)
        keys = pd.util.hash_array(text.to_numpy(dtype=object))
        spelled = text.str.fullmatch(r"-?(0|[1-9][0-9]*)").to_numpy(dtype=bool)
        if spelled.any():
            values = [int(v) for v in text[spelled]]
            fits = np.array([-(2**63) <= v < 2**63 for v in values], dtype=bool)
            rows = np.flatnonzero(spelled)[fits]
            ints = np.array([v for v, ok in zip(values, fits, strict=True) if ok], np.int64)
            keys[rows] = _mix(ints)
    return (keys % np.uint64(n_buckets)).astype(np.int64)


def _split_frames(
    part: Any, role: str, shape: str | None, degrees: bool, n_buckets: int
) -> tuple[Any, ...]:
    """On a worker: read and validate one partition, cut it into per-bucket pieces.

    Each piece is a table and the rows it holds within the partition (so that the records
    can name each row's place in the whole input). Extra columns are dropped here: matching
    does not use them, so they do not travel.
    """
    from obbiou.tables import read_table

    table = read_table(part, role=role, shape=shape, degrees=degrees)
    table = replace(table, extra={}, frame_written=None)
    buckets = _frame_buckets(table.frame, n_buckets)
    order = np.argsort(buckets, kind="stable")  # stable: input order kept within a bucket
    cuts = np.searchsorted(buckets[order], np.arange(n_buckets + 1))
    rows = [order[cuts[k] : cuts[k + 1]] for k in range(n_buckets)]
    return tuple((table.take(r), r) for r in rows)


def _row_count(split: Sequence[Any]) -> int:
    """On a worker: the number of rows of one partition, from its pieces."""
    return sum(len(rows) for _, rows in split)


def _join_tables(pieces: Sequence[Any], offsets: Sequence[int]) -> Any:
    """One table from per-partition pieces, in partition order (that is, input order), and
    the row of each in the whole input (``offsets``: the first row of each partition)."""
    from obbiou.shapes import Boxes
    from obbiou.tables import Table, comparable_frame_ids

    rows = np.concatenate(
        [np.zeros(0, np.int64)] + [o + r for (_, r), o in zip(pieces, offsets, strict=True)]
    ).astype(np.int64)
    pieces = [p for p, _ in pieces]
    first = pieces[0]
    layouts = {p.shape for p in pieces if len(p)}
    if len(layouts) > 1:
        raise InvalidInput(
            first.role,
            f"partitions hold boxes of different layouts ({', '.join(sorted(layouts))}); "
            "pass shape=",
        )
    layout = layouts.pop() if layouts else first.shape
    data = [p.boxes.data for p in pieces if len(p)] or [first.boxes.data]
    frames = comparable_frame_ids([p.frame for p in pieces])  # all int64, or all text
    table = Table(
        first.role,
        np.concatenate(frames),
        np.concatenate([p.label for p in pieces]),
        None if first.score is None else np.concatenate([p.score for p in pieces]),
        np.concatenate([p.ignore for p in pieces]),
        Boxes(np.ascontiguousarray(np.concatenate(data)), layout, False),
        {},
        first.source,
    )
    return table, rows


def _match_bucket(
    truth_pieces: Sequence[Any],
    detection_pieces: Sequence[Any],
    thresholds: Any,
    shape: str | None,
    match_options: dict[str, Any],
    offsets: dict[str, Sequence[int]],
    point_pieces: Sequence[Any] | None = None,
) -> tuple[Any, bool]:
    """On a worker: match all frames of one bucket; return their compact match records and
    whether any point shares a frame with a truth of the bucket.

    With points, each truth's count is taken here, next to the truths of its frame."""
    from obbiou.evaluation.matching import match_frames

    truth, truth_rows = _join_tables(truth_pieces, offsets["truth"])
    detections, det_rows = _join_tables(detection_pieces, offsets["detections"])
    points = None if point_pieces is None else _join_points(point_pieces, truth)
    records = match_frames(
        truth,
        detections,
        thresholds=thresholds,
        shape=shape,
        truth_rows=truth_rows,
        detection_rows=det_rows,
        points=points,
        **match_options,
    )
    return pack_records(records), points is not None and len(points) > 0


def evaluate_distributed(
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
    client: Any = None,
    scheduler: str | None = None,
    workers: int | None = None,
    buckets: int | None = None,
    timeout: float | None = None,
    warm: bool = False,
) -> Any:
    """Evaluate detections against ground truth with the matching on a Dask cluster.

    The same protocol, options and result as :func:`obbiou.evaluation.evaluate` — and the
    same numbers, equal to the last digit: only the map step (per-frame matching) moves to
    the workers; the reduce step (AP, intervals, breakdowns) runs here on the concatenated
    match records, and is written to give identical results however frames are split.

    How the work is cut: every partition of each table is read and validated on a worker
    and its rows are sent to one of ``buckets`` buckets by a hash of the frame id, so all
    rows of a frame meet in one bucket even when the frame is split across partitions (or
    across files). Each bucket's truths and detections are matched on a worker, which sends
    back the compact match records: per detection its frame, rank, label, score, size,
    range, orientation, best IoUs and, per threshold, its outcome, matched truth and IoU;
    per truth the like; for the errors of true positives, each box's ground-plane centre and
    its size aligned to the origin (no full boxes) — in a lossless wire form (text as codes,
    narrow integers, per-threshold IoUs only where they change) of about 1.3 times the size
    of the box rows themselves (upright boxes, two thresholds). So each box crosses the
    network at most once (to its bucket's worker), and only records come back to the client.

    Lidar points (``points=``) go the same way: each partition of the points table (a file
    of a folder, a Dask partition, or a row range of a table read here) is read on a worker
    and cut by the same hash of the frame id, so the points of a frame reach the worker that
    matches that frame's truths, where they are counted; only the counts come back, in the
    records.

    Parameters
    ----------
    truth, detections : Dask DataFrame, str or path, or pandas DataFrame
        Tables with the columns of :func:`obbiou.evaluation.read_table` (``frame``,
        ``label``, ``score`` for detections, optional ``ignore`` for truth, and the box
        columns of one layout). A folder gives one partition per table file (Parquet, CSV,
        JSON Lines; natural order of the names, :func:`obbiou.tables.table_files`), read on
        the workers (every worker must see the same path); a single file or an in-memory
        table is cut into pieces here.
    shape, iou, distance, bev, ap, recall_points, max_detections : optional
        As for :func:`obbiou.evaluation.evaluate` (the protocol is written out there).
    points : str or path, folder, Dask DataFrame, pandas DataFrame, mapping or Points, optional
        Lidar points, columns ``frame, x, y`` and optionally ``z``, as for
        :func:`obbiou.evaluation.evaluate`. A folder gives one partition per file (all with
        ``z`` or all without), read on the workers (every worker must see the path); a
        single file or an in-memory table is read and validated here, then cut into pieces.
    min_points : int, optional
        With ``points``: truths holding fewer points become ignore truths.
    size_buckets, range_buckets : optional
        As for :func:`obbiou.evaluation.evaluate`.
    degrees, localisation_floor : optional
        As for :func:`obbiou.evaluation.evaluate` (the protocol is written out there).
    progress : bool
        Show a progress bar (tqdm, on stderr) per stage: reading, matching.
    client, scheduler, workers
        Where the work runs; see :func:`connect`.
    buckets : int, optional
        Number of frame buckets (matching tasks); default two per worker thread.
    timeout : float, optional
        Give up (``TimeoutError``) when a stage takes longer than this many seconds.
    warm : bool
        Compile the kernels on every worker first (:func:`obbiou.distributed.warm_workers`,
        with its own progress bar), so that no task waits for a compile.

    Returns
    -------
    Evaluation
        As :func:`obbiou.evaluation.evaluate` returns.

    Raises
    ------
    obbiou.errors.InvalidInput
        Bad input, naming the partition, then the row and the column.
    TaskFailed
        Any other failing task (a worker that died, a partition that could not be loaded),
        naming the partition or bucket.
    TimeoutError
        A stage that did not finish within ``timeout`` seconds.

    Examples
    --------
    Two frames of an invented harbour survey: one vessel matched, one missed. With no
    cluster given, an in-process one is started for the call; the numbers equal the
    in-process evaluation's.

    >>> from obbiou.evaluation import evaluate
    >>> truth = {"frame": [1, 2], "label": ["vessel"] * 2, "cx": [10.0, 40.0],
    ...          "cy": [5.0, 8.0], "width": [12.0, 9.0], "height": [4.0, 3.0],
    ...          "angle": [0.3, -1.2]}
    >>> dets = {"frame": [1, 2], "label": ["vessel"] * 2, "score": [0.9, 0.6],
    ...         "cx": [10.4, 70.0], "cy": [5.2, 8.0], "width": [11.0, 9.0],
    ...         "height": [4.0, 3.0], "angle": [0.32, -1.2]}
    >>> ev = evaluate_distributed(truth, dets, iou=0.5)
    >>> ev.counts("vessel", 0.5)[:4], ev.ap("vessel", 0.5)
    ((1, 1, 0, 1), 0.5)
    >>> ev.to_dict() == evaluate(truth, dets, iou=0.5).to_dict()
    True

    With lidar returns (invented, 2D: ``x, y``): the vessel of frame 2 holds one return,
    fewer than 2, so it is set aside as an ignore truth and no longer a miss.

    >>> returns = {"frame": [1, 1, 1, 2], "x": [10.0, 12.0, 9.0, 40.0],
    ...            "y": [5.0, 5.5, 4.0, 8.0]}
    >>> ev = evaluate_distributed(truth, dets, iou=0.5, points=returns, min_points=2)
    >>> ev.records.truth_points.tolist(), ev.counts("vessel", 0.5)[:4], ev.ap("vessel", 0.5)
    ([3, 1], (1, 1, 0, 0), 1.0)
    """
    from obbiou.evaluation import reduce_records
    from obbiou.evaluation.protocol import matching_criterion
    from obbiou.tables import Table

    # bad options fail here, before any work is sent
    criterion, thresholds = matching_criterion(iou, distance, bev)
    if min_points is not None:
        if points is None:
            raise InvalidInput("min_points", "min_points needs a table of points (points=...)")
        min_points = check_min_points(min_points)
    match_options = {
        "max_detections": max_detections,
        "criterion": criterion,
        "min_points": min_points,
    }
    if points is not None:
        require_dask()
        points = _points_here(points)
    with connect(client=client, scheduler=scheduler, workers=workers) as cl:
        if warm:
            warm_workers(cl, progress=progress, timeout=timeout)
        threads = thread_count(cl)
        n_buckets = int(buckets) if buckets is not None else 2 * threads
        if n_buckets < 1:
            raise InvalidInput("buckets", f"expected a positive integer, got {buckets!r}")
        roles = {
            "truth": _read_here(truth, "truth", shape, degrees),
            "detections": _read_here(detections, "detections", shape, degrees),
        }
        sources = {k: partitions_of(t, what=k, chunks=threads) for k, t in roles.items()}
        parts = {k: submit_parts(cl, s) for k, s in sources.items()}
        splits = {
            k: [
                cl.submit(_split_frames, p, k, shape, degrees, n_buckets, pure=False)
                for p in parts[k]
            ]
            for k in sources
        }
        if points is not None:
            point_source, points_name = _point_sources(points, threads)
            sources["points"] = point_source
            parts["points"] = submit_parts(cl, point_source)
            splits["points"] = [
                cl.submit(_split_points, p, n_buckets, pure=False) for p in parts["points"]
            ]
        held = [f for fs in parts.values() for f in fs] + [f for fs in splits.values() for f in fs]
        try:
            wait_for(
                cl,
                [f for fs in splits.values() for f in fs],
                [n for s in sources.values() for n in s.names],
                stage="reading",
                progress=progress,
                timeout=timeout,
                collect=False,
            )
            counted = {
                k: cl.gather([cl.submit(_row_count, s) for s in splits[k]])
                for k in ("truth", "detections")
            }
            # first input row of each partition: records name rows of the whole input
            offsets = {
                k: np.r_[0, np.cumsum(c)].astype(np.int64)[:-1].tolist() for k, c in counted.items()
            }
            n_points = 0
            if points is not None:
                shapes = cl.gather([cl.submit(_point_shape, s) for s in splits["points"]])
                _check_point_dims(shapes, sources["points"].names)
                n_points = sum(n for n, _ in shapes)
            pieces = {
                k: [[cl.submit(item, s, b, pure=False) for b in range(n_buckets)] for s in fs]
                for k, fs in splits.items()
            }
            matched = [
                cl.submit(
                    _match_bucket,
                    [pp[b] for pp in pieces["truth"]],
                    [pp[b] for pp in pieces["detections"]],
                    thresholds,
                    shape,
                    match_options,
                    offsets,
                    None if points is None else [pp[b] for pp in pieces["points"]],
                    pure=False,
                )
                for b in range(n_buckets)
            ]
            results = wait_for(
                cl,
                matched,
                [f"frame bucket {b} of {n_buckets}" for b in range(n_buckets)],
                stage="matching",
                progress=progress,
                timeout=timeout,
            )
        finally:
            release(held)
    records = [r for r, _ in results]
    if n_points and sum(counted["truth"]) and not any(met for _, met in results):
        warnings.warn(no_common_frame(points_name), stacklevel=2)
    # The same reduce call as obbiou.evaluation.evaluate makes, on the same records; the
    # tables read here (a file, an in-memory table) are kept as evaluate keeps them.
    read = tuple(roles[k] for k in ("truth", "detections"))
    return reduce_records(
        [unpack_records(r) for r in records],
        iou=thresholds,  # a Thresholds spec: IoUs or distances, as matched
        ap=ap,
        recall_points=recall_points,
        size_buckets=size_buckets,
        range_buckets=range_buckets,
        localisation_floor=localisation_floor,
        options={"max_detections": max_detections, "degrees": degrees, "min_points": min_points},
        inputs=read if all(isinstance(t, Table) for t in read) else None,
    )
