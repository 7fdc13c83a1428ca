"""Inputs of a distributed run as partitions the workers can load, each with a name.

A Dask DataFrame keeps its partitions; a folder gives one partition per table file
(:func:`obbiou.tables.table_files`: Parquet, CSV or JSON Lines, in the natural order of their
names, the order in-process reading uses too), each read on a worker; a file, a pandas
DataFrame, a mapping of columns or an array of boxes is cut into row ranges here.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from obbiou.distributed.cluster import require_dask
from obbiou.errors import InvalidInput
from obbiou.tables import TABLE_SUFFIXES, table_files

__all__ = ["Source", "partitions_of", "submit_parts"]


@dataclass(frozen=True)
class Source:
    """Partitions of one input table: Dask delayed objects or in-memory pandas frames."""

    parts: list[Any]
    names: list[str]


def partitions_of(table: Any, *, what: str, chunks: int = 1, boxes: bool = False) -> Source:
    """Cut an input table into partitions the workers can load.

    A Dask DataFrame keeps its partitions; a folder gives one partition per table file, in
    natural order of their names; a file, a pandas DataFrame or a mapping of columns is one
    partition (cut into ``chunks`` row ranges when it is in memory).
    """
    require_dask()
    import dask.dataframe as dd
    import pandas as pd

    if isinstance(table, (str, os.PathLike)):
        path = Path(table)
        if path.is_dir():
            import dask

            files = table_files(path)
            if not files:
                raise InvalidInput(
                    what, f"folder {str(path)!r} holds no table files (.parquet, .csv, .jsonl)"
                )
            read = dask.delayed(_read_file, pure=True)
            return Source(
                [read(f, what) for f in files],
                [f"{what} file {str(f)!r} ({i + 1} of {len(files)})" for i, f in enumerate(files)],
            )
        elif path.is_file():
            frame = _read_file(path, what)
            return _in_memory(frame, what, chunks, origin=f"file {str(path)!r}")
        else:
            raise InvalidInput(what, f"no such file or folder: {str(path)!r}")
    if isinstance(table, dd.DataFrame):
        parts = list(table.to_delayed())
        return Source(
            parts,
            [f"{what} partition {i} of {len(parts)} (Dask DataFrame)" for i in range(len(parts))],
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
    from obbiou.tables import read_columns

    if path.suffix.lower() not in TABLE_SUFFIXES:
        raise InvalidInput(
            what,
            f"cannot read {str(path)!r}: expected .parquet, .csv or .jsonl, "
            "or a folder of such files",
        )
    return read_columns(path)  # parsed as in-process reading parses it


def _in_memory(frame: Any, what: str, chunks: int, *, origin: str, raw: Any = None) -> Source:
    if frame is None:
        raise TypeError(
            f"{what}: expected a Dask DataFrame, a pandas DataFrame, a mapping of columns, "
            f"a file, a folder of table files or an array of boxes, got {type(raw).__name__}"
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
    return Source(parts, names)


def submit_parts(client: Any, source: Source) -> list[Any]:
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
