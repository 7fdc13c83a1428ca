"""Scale-out on Dask: evaluation and scene overlap for datasets that outgrow one machine.

Two jobs run their map step on a Dask cluster and their reduce step in this process:

* :func:`evaluate_distributed` — detector evaluation. The map step matches detections to
  truths frame by frame on the workers and sends back compact *match records* (a few numbers
  per detection and per truth, no box coordinates); the reduce step (AP, intervals,
  breakdowns) is the same code as in :func:`obbiou.evaluation.evaluate`, so the numbers are
  the same — equal, not approximately equal.
* :func:`overlapping_pairs_distributed` — the overlapping pairs of a scene too large for one
  process, by spatial tiles: each tile receives the boxes whose extents reach into it (the
  halo of boxes that overhang its border), finds the pairs among them, and keeps a pair only
  if the tile holds the pair's reference point, so every pair is found exactly once. The
  result equals :func:`obbiou.overlapping_pairs` on the whole table.

Where the work runs (``client``, ``scheduler``, ``workers``):

* a ``dask.distributed.Client`` you pass in is used as it is and left open;
* ``scheduler="tcp://host:8786"`` connects to an existing cluster for the run;
* ``workers=N`` starts a ``LocalCluster`` of N worker processes on 127.0.0.1 for the run and
  closes it afterwards;
* none of these: the current default client if there is one, else an in-process cluster
  (threads) for the run.

Inputs may be a Dask DataFrame, a folder of Parquet files (a dataset; workers must see the
same path), a single file, a pandas DataFrame, or (for scene overlap) an array of boxes.

Dask is an optional extra: ``pip install 'obbiou[dask]'``. Nothing here imports it until a
function runs.
"""

from __future__ import annotations

import os
import warnings
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass, fields, replace
from pathlib import Path
from typing import Any

import numpy as np

from obbiou.errors import InvalidInput, TaskFailed
from obbiou.tables import TABLE_SUFFIXES, table_format

__all__ = ["evaluate_distributed", "overlapping_pairs_distributed", "connect", "TaskFailed"]

_INSTALL_HINT = "pip install 'obbiou[dask]'"

#: How long to try reaching a scheduler address before giving up.
_CONNECT_SECONDS = 20

#: Environment of local worker processes: one worker thread each, so the numba kernels run
#: on one thread too instead of every process starting a thread per core.
_ONE_THREAD = {"NUMBA_NUM_THREADS": "1", "OMP_NUM_THREADS": "1"}


def _require_dask() -> Any:
    """Import ``distributed`` (and dask) or say how to install them."""
    try:
        import dask  # noqa: F401
        import dask.dataframe  # noqa: F401
        import distributed
    except ImportError as exc:  # pragma: no cover - depends on the environment
        raise ImportError(
            f"obbiou.distributed needs dask and dask.distributed ({exc}); "
            f"install them with: {_INSTALL_HINT}"
        ) from exc
    return distributed


# --------------------------------------------------------------------------------------------
# Where the work runs


@contextmanager
def connect(
    *, client: Any = None, scheduler: str | None = None, workers: int | None = None
) -> Iterator[Any]:
    """Give a ``dask.distributed.Client`` for one run, and clean up what was started for it.

    Parameters
    ----------
    client : dask.distributed.Client, optional
        Used as it is; never closed here.
    scheduler : str, optional
        Address of an existing scheduler (``"tcp://10.0.0.5:8786"``); the client made for it
        is closed after the run, the cluster is left running.
    workers : int, optional
        With no ``client`` and no ``scheduler``: start a ``LocalCluster`` of this many worker
        processes (one thread each) on 127.0.0.1, without a dashboard, and close it after.

    With none of these, the current default client is used if there is one; otherwise an
    in-process cluster (one worker, a thread per core) is started and closed after.

    Yields
    ------
    dask.distributed.Client

    Raises
    ------
    obbiou.errors.InvalidInput
        If more than one of ``client``, ``scheduler``, ``workers`` is given, or ``workers``
        is not a positive integer.
    ConnectionError
        If the scheduler cannot be reached within 20 seconds.

    Examples
    --------
    >>> with connect(workers=1, scheduler="tcp://127.0.0.1:8786"):
    ...     pass
    Traceback (most recent call last):
    ...
    obbiou.errors.InvalidInput: give at most one of client=, scheduler=, workers= (got scheduler
    and workers)
    >>> with connect(workers=0):
    ...     pass
    Traceback (most recent call last):
    ...
    obbiou.errors.InvalidInput: workers: expected a positive integer, got 0
    """
    given = [
        n for n, v in (("client", client), ("scheduler", scheduler), ("workers", workers)) if v
    ]
    if workers is not None and (
        isinstance(workers, bool) or not isinstance(workers, (int, np.integer)) or workers < 1
    ):
        raise InvalidInput("workers", f"expected a positive integer, got {workers!r}")
    if len(given) > 1:
        reason = (
            "give at most one of client=, scheduler=, workers= (got " + " and ".join(given) + ")"
        )
        raise InvalidInput(given[-1], reason, message=reason)
    distributed = _require_dask()
    if client is not None:
        yield client
        return
    if scheduler:
        try:
            made = distributed.Client(scheduler, timeout=f"{_CONNECT_SECONDS}s")
        except (OSError, TimeoutError) as exc:
            raise ConnectionError(
                f"scheduler: cannot reach {scheduler!r} within {_CONNECT_SECONDS} s ({exc})"
            ) from None
        with made:
            yield made
        return
    if workers:
        with warnings.catch_warnings():  # another local cluster's HTTP port is not news
            warnings.filterwarnings("ignore", message="Port .* is already in use")
            cluster = distributed.LocalCluster(
                n_workers=int(workers),
                threads_per_worker=1,
                processes=True,
                host="127.0.0.1",
                dashboard_address=None,
                env=_ONE_THREAD,
            )
        with cluster, distributed.Client(cluster) as made:
            yield made
        return
    try:
        yield distributed.get_client()
        return
    except ValueError:  # no default client
        pass
    with warnings.catch_warnings():
        warnings.filterwarnings("ignore", message="Port .* is already in use")
        cluster = distributed.LocalCluster(
            n_workers=1,
            threads_per_worker=os.cpu_count() or 1,
            processes=False,
            dashboard_address=None,
        )
    with cluster, distributed.Client(cluster) as made:
        yield made


def _threads(client: Any) -> int:
    """Total worker threads of the cluster (at least 1)."""
    info = client.scheduler_info(n_workers=-1) if _accepts_n_workers(client) else None
    if info is None:
        info = client.scheduler_info()
    return max(1, sum(int(w.get("nthreads", 1)) for w in info.get("workers", {}).values()))


def _accepts_n_workers(client: Any) -> bool:
    import inspect

    try:
        return "n_workers" in inspect.signature(client.scheduler_info).parameters
    except (TypeError, ValueError):  # pragma: no cover
        return False


# --------------------------------------------------------------------------------------------
# Inputs: a list of partitions, each with a name for error messages


@dataclass(frozen=True)
class _Source:
    """Partitions of one input table: Dask delayed objects or in-memory pandas frames."""

    parts: list[Any]
    names: list[str]


def _sources(table: Any, *, what: str, chunks: int = 1, boxes: bool = False) -> _Source:
    """Cut an input table into partitions the workers can load.

    A Dask DataFrame keeps its partitions; a folder is read as a Parquet dataset; a file, a
    pandas DataFrame or a mapping of columns is one partition (cut into ``chunks`` row
    ranges when it is in memory).
    """
    _require_dask()
    import dask.dataframe as dd
    import pandas as pd

    if isinstance(table, (str, os.PathLike)):
        path = Path(table)
        if path.is_dir():
            files = sorted(
                p
                for p in path.rglob("*")
                if p.is_file() and TABLE_SUFFIXES.get(p.suffix.lower()) == "parquet"
            )
            if not files:
                raise InvalidInput(what, f"folder {str(path)!r} holds no .parquet files")
            table = dd.read_parquet([str(p) for p in files])
            origin = f"Parquet dataset {str(path)!r}"
        elif path.is_file():
            frame = _read_file(path, what)
            return _in_memory(frame, what, chunks, origin=f"file {str(path)!r}")
        else:
            raise InvalidInput(what, f"no such file or folder: {str(path)!r}")
    else:
        origin = "Dask DataFrame"
    if isinstance(table, dd.DataFrame):
        parts = list(table.to_delayed())
        return _Source(
            parts, [f"{what} partition {i} of {len(parts)} ({origin})" for i in range(len(parts))]
        )
    if isinstance(table, pd.DataFrame):
        return _in_memory(table, what, chunks, origin="DataFrame")
    if hasattr(table, "take") and hasattr(table, "boxes"):  # an evaluation Table, read here
        return _in_memory(table, what, chunks, origin=str(table.source))
    if isinstance(table, dict):
        return _in_memory(pd.DataFrame(table), what, chunks, origin="mapping")
    if boxes and not isinstance(table, (bytes, set)):
        try:
            arr = np.asarray(table)
        except Exception:  # noqa: BLE001 - reported below as a TypeError
            arr = None
        if arr is not None and arr.dtype.kind in "fiub" and arr.ndim in (2, 3):
            return _in_memory(arr, what, chunks, origin="array")
    return _in_memory(None, what, chunks, origin="", raw=table)


def _read_file(path: Path, what: str) -> Any:
    import pandas as pd

    if path.suffix.lower() not in TABLE_SUFFIXES:
        raise InvalidInput(
            what,
            f"cannot read {str(path)!r}: expected .parquet, .csv or .jsonl, "
            "or a folder of .parquet files",
        )
    kind = table_format(path)
    if kind == "parquet":
        return pd.read_parquet(path)
    if kind == "csv":
        return pd.read_csv(path)
    return pd.read_json(path, lines=True)


def _in_memory(frame: Any, what: str, chunks: int, *, origin: str, raw: Any = None) -> _Source:
    if frame is None:
        raise TypeError(
            f"{what}: expected a Dask DataFrame, a pandas DataFrame, a mapping of columns, "
            f"a file, a folder of Parquet files or an array of boxes, got {type(raw).__name__}"
        )
    n = len(frame)
    chunks = max(1, min(int(chunks), n)) if n else 1
    bounds = np.linspace(0, n, chunks + 1).astype(np.int64)
    spans = list(zip(bounds[:-1].tolist(), bounds[1:].tolist(), strict=True))
    if hasattr(frame, "iloc"):
        parts = [frame.iloc[lo:hi] for lo, hi in spans]
    elif hasattr(frame, "boxes"):  # an evaluation Table
        parts = [frame.take(np.arange(lo, hi)) for lo, hi in spans]
    else:
        parts = [frame[lo:hi] for lo, hi in spans]
    names = [
        f"{what} rows {lo}..{hi - 1} ({origin})" if hi > lo else f"{what} (empty {origin})"
        for lo, hi in spans
    ]
    return _Source(parts, names)


# --------------------------------------------------------------------------------------------
# Running tasks: progress, timeouts, errors that name the partition


def _submit_parts(client: Any, source: _Source) -> list[Any]:
    """Futures of the partitions themselves (Dask delayed are computed on the cluster)."""
    from dask.delayed import Delayed

    futures = []
    delayed = [p for p in source.parts if isinstance(p, Delayed)]
    computed = iter(client.compute(delayed)) if delayed else iter(())
    for part in source.parts:
        futures.append(
            next(computed) if isinstance(part, Delayed) else client.scatter(part, hash=False)
        )
    return futures


def _wait(
    client: Any,
    futures: Sequence[Any],
    names: Sequence[str],
    *,
    stage: str,
    progress: bool,
    timeout: float | None,
    collect: bool = True,
) -> list[Any] | None:
    """Wait for ``futures`` with a progress bar; raise at the first failure, naming it.

    A task that raises surfaces at once (the others are cancelled) as an ``InvalidInput`` for
    bad input or a :class:`TaskFailed` otherwise, with the partition's name in front. A run
    that takes longer than ``timeout`` seconds raises ``TimeoutError``.
    """
    distributed = _require_dask()
    from tqdm.auto import tqdm

    by_key = {f.key: name for f, name in zip(futures, names, strict=True)}
    bar = tqdm(total=len(futures), desc=stage, unit="task", disable=not progress, leave=False)
    try:
        done = distributed.as_completed(list(futures), timeout=timeout, raise_errors=False)
        for fut in done:
            if fut.status == "error":
                exc = fut.exception()
                name = by_key.get(fut.key, stage)
                client.cancel(list(futures))
                if isinstance(exc, ValueError):  # bad input (the gate's InvalidInput among them)
                    raise InvalidInput(name, str(exc)) from exc
                raise TaskFailed(f"{name}: task failed: {type(exc).__name__}: {exc}") from exc
            if fut.status == "cancelled":
                client.cancel(list(futures))
                raise TaskFailed(f"{by_key.get(fut.key, stage)}: task was cancelled")
            bar.update(1)
    except TimeoutError:
        client.cancel(list(futures))
        raise TimeoutError(
            f"{stage}: not finished within {timeout} s ({bar.n} of {len(futures)} tasks done)"
        ) from None
    finally:
        bar.close()
    return client.gather(list(futures)) if collect else None


# --------------------------------------------------------------------------------------------
# Distributed evaluation: frames to buckets, match on the workers, reduce here


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


def _mix(values: np.ndarray) -> np.ndarray:
    """splitmix64 of int64 values (Steele, Lea & Flood, OOPSLA 2014): well-spread buckets."""
    z = values.astype(np.int64).view(np.uint64) + np.uint64(0x9E3779B97F4A7C15)
    z = (z ^ (z >> np.uint64(30))) * np.uint64(0xBF58476D1CE4E5B9)
    z = (z ^ (z >> np.uint64(27))) * np.uint64(0x94D049BB133111EB)
    return z ^ (z >> np.uint64(31))


def _frame_buckets(frame: np.ndarray, n_buckets: int) -> np.ndarray:
    """Bucket of each frame id, the same in every process and for either table.

    Integer ids are mixed by splitmix64. Text ids that spell an integer (``"7"``) go where
    that integer goes, because in-process evaluation matches ``7`` and ``"7"`` (it compares
    ids as text once one table has text ids); other text is hashed with pandas' fixed-key
    hash, not Python's per-process ``hash``.
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
    """On a worker: read and validate one partition, cut it into per-bucket tables.

    Extra columns are dropped here: matching does not use them, so they do not travel.
    """
    from obbiou.tables import read_table

    table = read_table(part, role=role, shape=shape, degrees=degrees)
    table = replace(table, extra={})
    buckets = _frame_buckets(table.frame, n_buckets)
    order = np.argsort(buckets, kind="stable")  # stable: input order kept within a bucket
    cuts = np.searchsorted(buckets[order], np.arange(n_buckets + 1))
    return tuple(table.take(order[cuts[k] : cuts[k + 1]]) for k in range(n_buckets))


def _join_tables(pieces: Sequence[Any]) -> Any:
    """One table from per-partition pieces, in partition order (that is, input order)."""
    from obbiou.shapes import Boxes
    from obbiou.tables import Table

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
    frames = [p.frame for p in pieces]
    if any(f.dtype.kind not in "iu" for f in frames):
        frames = [f.astype(object) for f in frames]
    return Table(
        first.role,
        np.concatenate(frames),
        np.concatenate([p.label for p in pieces]),
        None if first.score is None else np.concatenate([p.score for p in pieces]),
        np.concatenate([p.ignore for p in pieces]),
        Boxes(np.ascontiguousarray(np.concatenate(data)), layout, False),
        {},
        first.source,
    )


def _match_bucket(
    truth_pieces: Sequence[Any],
    detection_pieces: Sequence[Any],
    thresholds: Any,
    shape: str | None,
    match_options: dict[str, Any],
) -> Any:
    """On a worker: match all frames of one bucket; return their compact match records."""
    from obbiou.evaluation.matching import match_frames

    truth = _join_tables(truth_pieces)
    detections = _join_tables(detection_pieces)
    records = match_frames(truth, detections, thresholds=thresholds, shape=shape, **match_options)
    return _pack_records(records)


def _narrow(values: np.ndarray) -> np.ndarray:
    """The same integers in the smallest integer type that holds them (lossless)."""
    if values.size == 0:
        return values
    lo, hi = int(values.min()), int(values.max())
    for kind in (np.int8, np.int16, np.int32):
        if np.iinfo(kind).min <= lo and hi <= np.iinfo(kind).max:
            return values.astype(kind)
    return values


def _pack_records(records: Any) -> dict[str, Any]:
    """Match records in a lossless wire form: text as codes into a table of the distinct
    values, integers in the narrowest type. Labels and text frame ids are Python objects
    (one pickled string per row otherwise), so this makes the records several times
    smaller on the network."""
    packed: dict[str, Any] = {}
    for f in fields(records):
        value = getattr(records, f.name)
        if isinstance(value, np.ndarray) and value.dtype == object:
            distinct, codes = np.unique(value.astype(str), return_inverse=True)
            packed[f.name] = ("text", distinct, _narrow(codes.reshape(value.shape)))
        elif isinstance(value, np.ndarray) and value.dtype.kind == "i":
            packed[f.name] = ("int", value.dtype.str, _narrow(value))
        elif _is_constant(value):  # e.g. the range column of 2D boxes: all NaN
            packed[f.name] = ("constant", value.dtype.str, value.shape, value.reshape(-1)[:1])
        elif isinstance(value, np.ndarray) and value.dtype.kind == "f" and value.ndim == 2:
            # Per-threshold values (the IoU of the matched truth) mostly repeat the previous
            # threshold's value or are 0: send only the entries that change, and where.
            before = np.zeros_like(value)
            before[:, 1:] = value[:, :-1]
            changed = value.view(np.uint64) != before.view(np.uint64)
            packed[f.name] = ("changes", value.shape, np.packbits(changed), value[changed])
        else:
            packed[f.name] = ("as is", value)
    return packed


def _is_constant(value: Any) -> bool:
    """A float array whose entries are all the same bits (NaN included), with 2+ entries."""
    if not isinstance(value, np.ndarray) or value.dtype.kind != "f" or value.size < 2:
        return False
    bits = value.reshape(-1).view(np.uint64 if value.itemsize == 8 else np.uint32)
    return bool(np.all(bits == bits[0]))


def _unpack_records(packed: dict[str, Any]) -> Any:
    """The :class:`MatchRecords` that :func:`_pack_records` packed, equal field by field."""
    from obbiou.evaluation.matching import MatchRecords

    values = {}
    for name, item in packed.items():
        if item[0] == "text":
            values[name] = item[1].astype(object)[item[2].astype(np.int64)]
        elif item[0] == "int":
            values[name] = item[2].astype(np.dtype(item[1]))
        elif item[0] == "constant":
            values[name] = np.full(item[2], item[3][0], dtype=np.dtype(item[1]))
        elif item[0] == "changes":
            shape, bits, changes = item[1], item[2], item[3]
            changed = np.unpackbits(bits, count=shape[0] * shape[1]).astype(bool).reshape(shape)
            # Each entry is the last changed entry at or before it in its row (0.0 if none).
            col = np.where(changed, np.arange(shape[1]), -1)
            np.maximum.accumulate(col, axis=1, out=col)
            full = np.zeros(shape, dtype=changes.dtype)
            full[changed] = changes
            rows = np.arange(shape[0])[:, None]
            values[name] = np.where(col >= 0, full[rows, np.maximum(col, 0)], 0.0)
        else:
            values[name] = item[1]
    return MatchRecords(**values)


def evaluate_distributed(
    truth: Any,
    detections: Any,
    *,
    shape: str | None = None,
    iou: Any = 0.5,
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
    per truth the like — no coordinates, in a lossless wire form (text as codes, narrow
    integers, per-threshold IoUs only where they change) of about the size of the box rows
    themselves. So each box crosses the network at most once (to its bucket's worker), and
    only records come back to the client.

    Parameters
    ----------
    truth, detections : Dask DataFrame, str or path, or pandas DataFrame
        Tables with the columns of :func:`obbiou.evaluation.read_table` (``frame``,
        ``label``, ``score`` for detections, optional ``ignore`` for truth, and the box
        columns of one layout). A folder is read as a Parquet dataset (every worker must see
        the same path); a single file or an in-memory table is cut into pieces here.
    shape, iou, ap, recall_points, max_detections, size_buckets, range_buckets : optional
        As for :func:`obbiou.evaluation.evaluate` (the protocol is written out there).
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
    """
    from obbiou.evaluation import reduce_records
    from obbiou.evaluation.matching import parse_thresholds

    if iou is None:
        raise InvalidInput("iou", "give a threshold, e.g. 0.5")
    thresholds = parse_thresholds(iou)  # bad options fail here, before any work is sent
    match_options = {"max_detections": max_detections}
    with connect(client=client, scheduler=scheduler, workers=workers) as cl:
        threads = _threads(cl)
        n_buckets = int(buckets) if buckets is not None else 2 * threads
        if n_buckets < 1:
            raise InvalidInput("buckets", f"expected a positive integer, got {buckets!r}")
        roles = {
            "truth": _read_here(truth, "truth", shape, degrees),
            "detections": _read_here(detections, "detections", shape, degrees),
        }
        sources = {k: _sources(t, what=k, chunks=threads) for k, t in roles.items()}
        parts = {k: _submit_parts(cl, s) for k, s in sources.items()}
        splits = {
            k: [
                cl.submit(_split_frames, p, k, shape, degrees, n_buckets, pure=False)
                for p in parts[k]
            ]
            for k in sources
        }
        held = [f for fs in parts.values() for f in fs] + [f for fs in splits.values() for f in fs]
        try:
            _wait(
                cl,
                [f for fs in splits.values() for f in fs],
                [n for s in sources.values() for n in s.names],
                stage="reading",
                progress=progress,
                timeout=timeout,
                collect=False,
            )
            pieces = {
                k: [[cl.submit(_item, s, b, pure=False) for b in range(n_buckets)] for s in fs]
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
                    pure=False,
                )
                for b in range(n_buckets)
            ]
            records = _wait(
                cl,
                matched,
                [f"frame bucket {b} of {n_buckets}" for b in range(n_buckets)],
                stage="matching",
                progress=progress,
                timeout=timeout,
            )
        finally:
            _release(held)
    # The same reduce call as obbiou.evaluation.evaluate makes, on the same records.
    return reduce_records(
        [_unpack_records(r) for r in records],
        iou=thresholds,
        ap=ap,
        recall_points=recall_points,
        size_buckets=size_buckets,
        range_buckets=range_buckets,
        localisation_floor=localisation_floor,
        options={"max_detections": max_detections, "degrees": degrees},
    )


# --------------------------------------------------------------------------------------------
# Tiled scene overlap


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

    The widening (a few ulps of the coordinates' magnitude) makes sure that two boxes the
    overlap kernel sees as overlapping, however thinly, have intersecting extents here.
    """
    from obbiou.boxes import envelope

    if len(data) == 0:
        return np.zeros((0, 4))
    env = envelope(data, shape=shape)
    if env.shape[1] == 6:
        env = env[:, [0, 1, 3, 4]]
    pad = 1e-12 * (np.abs(env).max(axis=1, keepdims=True) + 1.0)
    return np.concatenate([env[:, :2] - pad, env[:, 2:] + pad], axis=1)


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
        Bad input, naming the partition and the row (``a partition 3 of 8 (Parquet dataset
        'scene/'): row[17]: negative width -3.0``).
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
        threads = _threads(cl)
        sources = {k: _sources(t, what=k, chunks=threads, boxes=True) for k, t in roles.items()}
        names = [n for s in sources.values() for n in s.names]
        parts = [f for s in sources.values() for f in _submit_parts(cl, s)]
        roles_of = [k for k, s in sources.items() for _ in s.parts]
        prepared = [
            cl.submit(_prepare, p, shape, k, pure=False)
            for p, k in zip(parts, roles_of, strict=True)
        ]
        stats = [cl.submit(_stats, p, pure=False) for p in prepared]
        held = parts + prepared
        try:
            stats = _wait(cl, stats, names, stage="scan", progress=progress, timeout=timeout)
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
                pieces[k].append([cl.submit(_item, split, t, pure=False) for t in range(n_grid)])
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
            found = _wait(
                cl, futures, tile_names, stage="overlap", progress=progress, timeout=timeout
            )
        finally:
            _release(held)
    first = np.concatenate([f[0] for f in found]).astype(np.int64)
    second = np.concatenate([f[1] for f in found]).astype(np.int64)
    iou = np.concatenate([f[2] for f in found]).astype(np.float64)
    order = np.lexsort((second, first))
    n_first = offsets["a"]
    n_second = offsets.get("b", n_first)
    return Pairs(
        first=first[order], second=second[order], iou=iou[order], n_first=n_first, n_second=n_second
    )


def _release(futures: Sequence[Any]) -> None:
    """Drop our references so the cluster frees the data (without cancelling anything a
    caller's persisted collection may share)."""
    for f in futures:
        f.release()


def _item(pieces: Sequence[Any], index: int) -> Any:
    return pieces[index]
