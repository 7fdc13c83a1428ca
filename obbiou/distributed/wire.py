"""Match records to and from the wire: a lossless, compact form for the network.

:func:`pack_records` turns :class:`~obbiou.evaluation.MatchRecords` into plain arrays (text
as codes into a table of distinct values, integers in the narrowest type, per-threshold IoUs
only where they change); :func:`unpack_records` gives back records equal field by field.
Plain numpy: no Dask needed, so the round trip is tested on its own.

Examples
--------
>>> from obbiou.evaluation import evaluate
>>> box = {"cx": [0.0, 9.0], "cy": [0.0, 0.0], "width": [2.0] * 2, "height": [1.0] * 2,
...        "angle": [0.0] * 2}
>>> ev = evaluate({"frame": ["a", "b"], "label": ["van"] * 2, **box},
...               {"frame": ["a", "b"], "label": ["van"] * 2, "score": [0.9, 0.8], **box})
>>> packed = pack_records(ev.records)
>>> packed["det_label"][0], packed["det_label"][2].dtype  # text as codes, narrow integers
('text', dtype('int8'))
>>> back = unpack_records(packed)
>>> def same(x, y):
...     if isinstance(x, np.ndarray) and x.dtype.kind == "f":
...         return x.dtype == y.dtype and np.array_equal(x, y, equal_nan=True)
...     if isinstance(x, np.ndarray):
...         return x.dtype == y.dtype and x.tolist() == y.tolist()
...     return x == y
>>> all(same(getattr(back, f.name), getattr(ev.records, f.name)) for f in fields(back))
True
"""

from __future__ import annotations

from dataclasses import fields
from typing import Any

import numpy as np

from obbiou.evaluation.matching import MatchRecords

__all__ = ["pack_records", "unpack_records"]


def _narrow(values: np.ndarray) -> np.ndarray:
    """The same integers in the smallest integer type that holds them (lossless)."""
    if values.size == 0:
        return values
    lo, hi = int(values.min()), int(values.max())
    for kind in (np.int8, np.int16, np.int32):
        if np.iinfo(kind).min <= lo and hi <= np.iinfo(kind).max:
            return values.astype(kind)
    return values


def pack_records(records: Any) -> dict[str, Any]:
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


def unpack_records(packed: dict[str, Any]) -> Any:
    """The :class:`MatchRecords` that :func:`pack_records` packed, equal field by field."""

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
