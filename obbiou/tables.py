"""Tables of boxes: reading, writing, frame grouping (CSV, Parquet, JSON Lines, DataFrame, mapping).

One row per box. Detections have ``frame, label, score`` and the box columns of their layout;
ground truth has ``frame, label``, the box columns and an optional boolean ``ignore``.

==========  ==============================================
shape       box columns
==========  ==============================================
axis        ``x_min y_min x_max y_max``
rotated     ``cx cy width height angle``
axis3       ``x_min y_min z_min x_max y_max z_max``
upright     ``cx cy cz length width height yaw``
polygon     ``px0 py0 px1 py1 … px{K-1} py{K-1}`` (K >= 3 vertices; 4 for quadrilaterals)
==========  ==============================================

Angles are radians (counter-clockwise from +x towards +y) unless ``degrees=True``. Extra
columns are kept in :attr:`Table.extra` and passed through. Nothing is dropped: a missing
column, an empty cell, a non-numeric value, a NaN, a negative size, an invalid polygon, a
column named twice, a cell holding a list, a number beyond float64 or a file that is not UTF-8
is an :class:`~obbiou.errors.InvalidTable` (a ``ValueError``) that names the file, the line
(CSV, JSON Lines: as an editor counts them) or row (Parquet, DataFrame, mapping) and the
column, as fields and in its text. A folder stands for its table files, read as one table.

This module is also the one place for the facts every table user shares:
:data:`TABLE_SUFFIXES` (the file formats, read and written), :func:`table_files` (a folder's
files in natural order of their names), :func:`frame_ids` (the frame-id
rule: integers and integer-valued text name one frame, other text is a name, inexact floats
are errors), :func:`comparable_frame_ids` (ids of several tables made comparable by it) and
:func:`frame_groups` (the rows of each frame).
"""

from __future__ import annotations

import json
import os
import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Literal

import numpy as np

from obbiou.errors import InvalidInput, InvalidTable
from obbiou.shapes import (
    SHAPES,
    Boxes,
    box_columns,
    layout_of_columns,
    polygon_vertices,
    read_boxes,
)

__all__ = [
    "Table",
    "read_table",
    "write_table",
    "box_columns",
    "infer_layout",
    "polygon_vertices",
    "TABLE_SUFFIXES",
    "table_format",
    "table_files",
    "natural_key",
    "read_columns",
    "comparable_frame_ids",
    "frame_ids",
    "frame_groups",
    "Points",
    "read_points",
]

#: File suffixes of tables and the format each names; every reader and writer uses this list.
TABLE_SUFFIXES: dict[str, str] = {
    ".csv": "csv",
    ".parquet": "parquet",
    ".pq": "parquet",
    ".jsonl": "jsonl",
    ".ndjson": "jsonl",
}

_ROLES = ("truth", "detections")
_ANGLE_COLUMNS = {"rotated": "angle", "upright": "yaw"}


def table_format(path: Any) -> str:
    """The format of a table file, from its suffix: ``"csv"``, ``"parquet"`` or ``"jsonl"``.

    Examples
    --------
    >>> table_format("scans/run1.PQ"), table_format("dets.ndjson")
    ('parquet', 'jsonl')
    >>> table_format("t.xlsx")
    Traceback (most recent call last):
    ...
    obbiou.errors.InvalidTable: t.xlsx: unknown table format '.xlsx'; expected .csv, .parquet
    (.pq) or .jsonl (.ndjson)
    """
    path = os.fspath(path)
    ext = os.path.splitext(path)[1].lower()
    if ext not in TABLE_SUFFIXES:
        raise InvalidTable(
            path,
            f"unknown table format {ext or '(no suffix)'!r}; expected .csv, .parquet (.pq) or "
            ".jsonl (.ndjson)",
        )
    return TABLE_SUFFIXES[ext]


_RUNS = re.compile(r"([0-9]+)")


def natural_key(name: str) -> tuple:
    """Sort key of a file name in natural order: runs of digits compare by their value.

    ``"f2"`` comes before ``"f10"``; equal values compare by their text (``"f02"`` before
    ``"f2"``), and digits before letters, as in plain text order.

    Examples
    --------
    >>> sorted(["f10.csv", "f2.csv", "f1.csv", "F3.csv", "f02.csv"], key=natural_key)
    ['F3.csv', 'f1.csv', 'f02.csv', 'f2.csv', 'f10.csv']
    """
    return tuple(
        (0, int(run), run) if k % 2 else (1, run, "")
        for k, run in enumerate(_RUNS.split(name))
        if run
    )


def table_files(folder: Any) -> list[Path]:
    """The table files of a folder and its subfolders, in natural order of their paths.

    Files with a suffix of :data:`TABLE_SUFFIXES`; names starting with ``.`` or ``_`` (hidden
    files, the ``_SUCCESS`` and ``_metadata`` files of dataset writers), in the folder or
    above the file, are left out. The order — natural order of the path below the folder,
    folder by folder (``f2`` before ``f10``; see :func:`natural_key`) — is the order rows are
    read in, so it decides the input order that breaks ties between equal scores. Every
    reader of folders (in process and on a cluster) uses it.

    Examples
    --------
    >>> import tempfile
    >>> d = Path(tempfile.mkdtemp())
    >>> for name in ("f10.csv", "f2.csv", "_SUCCESS", "notes.txt", "b/f1.parquet"):
    ...     (d / name).parent.mkdir(exist_ok=True)
    ...     (d / name).touch()
    >>> [p.relative_to(d).as_posix() for p in table_files(d)]
    ['b/f1.parquet', 'f2.csv', 'f10.csv']
    >>> table_files("no/such/folder")
    Traceback (most recent call last):
    ...
    obbiou.errors.InvalidTable: no/such/folder: not a folder
    """
    root = Path(folder)
    if not root.is_dir():
        raise InvalidTable(str(root), "not a folder")
    files = []
    for path in root.rglob("*"):
        rel = path.relative_to(root)
        if any(part.startswith((".", "_")) for part in rel.parts):
            continue
        if path.is_file() and path.suffix.lower() in TABLE_SUFFIXES:
            files.append(path)
    return sorted(files, key=lambda p: tuple(natural_key(q) for q in p.relative_to(root).parts))


def write_table(table: Any, path: Any) -> Path:
    """Write a pandas DataFrame as CSV, Parquet or JSON Lines, chosen by the file suffix.

    Floats are written so that they read back equal: CSV with the shortest text that does,
    JSON Lines with 15 significant digits.

    Examples
    --------
    >>> import pandas as pd, tempfile, os
    >>> p = os.path.join(tempfile.mkdtemp(), "t.csv")
    >>> _ = write_table(pd.DataFrame({"frame": [0], "iou": [0.25]}), p)
    >>> open(p).read().splitlines()
    ['frame,iou', '0,0.25']
    """
    path = Path(path)
    kind = table_format(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    if kind == "csv":
        table.to_csv(path, index=False)  # shortest text that reads back to the same float
    elif kind == "parquet":
        table.to_parquet(path, index=False)
    else:
        table.to_json(path, orient="records", lines=True, double_precision=15)
    return path


def comparable_frame_ids(arrays: list[np.ndarray]) -> list[np.ndarray]:
    """Frame ids of several tables (as :func:`frame_ids` gives them), made comparable.

    Ids stay int64 when every table's ids are int64; else every table's ids become text
    (integers as their decimal digits), so that frame ``7`` of one table meets frame
    ``"007"`` (read as ``7``) of another and a 30-digit id meets itself. Evaluation, the
    scene commands and the cluster's frame buckets all follow this rule.

    Examples
    --------
    >>> a, b = comparable_frame_ids([np.array([7, 8]), frame_ids(["007", "cam1"])[0]])
    >>> a.tolist(), b.tolist()
    (['7', '8'], ['7', 'cam1'])
    >>> comparable_frame_ids([np.array([1]), np.array([2], dtype=np.int32)])[1].dtype
    dtype('int64')
    """
    arrays = [a if a.dtype.kind in "iO" else frame_ids(a)[0] for a in map(np.asarray, arrays)]
    if all(a.dtype.kind in "iu" for a in arrays):
        return [a.astype(np.int64) for a in arrays]
    # str of an int64 or a Python int is its decimal digits: the form text ids hold
    return [a.astype(str).astype(object) if len(a) else a.astype(object) for a in arrays]


def frame_ids(values: Any, *, name: str = "frame") -> tuple[np.ndarray, np.ndarray | None]:
    """Frame ids by the frame-id rule: the ids, and the ids as written where that differs.

    **The frame-id rule.** A frame id is an integer or a text.

    * Integers name a frame by their value, whatever their type (``7``, ``np.int32(7)``).
    * Text that spells an integer in decimal digits, possibly with a sign, leading zeros or
      surrounding spaces (``"7"``, ``"007"``, ``" +7"``), is that integer: it names the same
      frame as ``7``. Any other text (``"cam1/0007"``, ``"7.5"``, ``"1e3"``) is a name,
      compared exactly as written (letter case and spaces count).
    * A float names a frame only when it is a whole number below 2**53 in magnitude, where
      every integer is a float exactly: ``7.0`` is ``7``. Any other float (``7.5``, ``1e19``,
      NaN) is an error: above 2**53 two ids written differently can round to one float
      (``1e19`` and ``1e19 + 1``), so the float may not be the id that was written.
      Write such ids as integers or as text.
    * Integers of any length are exact (a 30-digit id is held as its decimal text).
    * Timestamps (``datetime64``) are names: their ISO text in nanoseconds, so that the same
      instant meets itself in tables of different time units. Booleans and other values
      (lists, None) are errors.

    The ids come back as int64 when every id is an integer within int64, else as text (an
    object array of str; integers as their decimal digits without leading zeros), so that
    equal ids are equal values. The second array holds the ids as written (text) when any
    text id was not already in that form (``"007"``), else None: tables write ids back as
    they were read.

    Raises
    ------
    obbiou.errors.InvalidInput
        Naming the first id (``row``) that is no frame id, and why.

    Examples
    --------
    >>> ids, written = frame_ids(np.array(["007", "8", " 9"], dtype=object))
    >>> ids, written.tolist()
    (array([7, 8, 9]), ['007', '8', ' 9'])
    >>> frame_ids(np.array([7.0, 8.0]))[0]
    array([7, 8])
    >>> frame_ids(np.array(["cam1", 7, 10**29], dtype=object))[0].tolist()
    ['cam1', '7', '100000000000000000000000000000']
    >>> frame_ids(np.array([1e19, 2e19]))
    Traceback (most recent call last):
    ...
    obbiou.errors.InvalidInput: frame[0]: frame id 1e+19 is a float at or beyond 2**53 in
    magnitude, where floats may not be the ids that were written (1e19 and 1e19 + 1 are one
    float); write frame ids as integers or as text
    """
    values = np.asarray(values)
    kind = values.dtype.kind
    if values.ndim != 1:
        raise InvalidInput(name, f"expected one frame id per row (1-D), got shape {values.shape}")
    if kind == "i":
        return values.astype(np.int64, copy=False), None
    if kind == "u" and (not len(values) or int(values.max()) < 2**63):
        return values.astype(np.int64), None
    if kind == "f":
        bad = ~(np.isfinite(values) & (np.floor(values) == values) & (np.abs(values) < 2.0**53))
        if bad.any():
            row = int(np.argmax(bad))
            raise InvalidInput(name, _float_reason(float(values[row])), row=row)
        return values.astype(np.int64), None
    if kind == "b":
        raise InvalidInput(name, _other_reason(bool(values[0])), row=0)
    if kind == "M":  # timestamps are names: their ISO text, in one unit for every table
        bad = np.isnat(values)
        if bad.any():
            raise InvalidInput(name, "empty value (NaT)", row=int(np.argmax(bad)))
        text = np.datetime_as_string(values.astype("datetime64[ns]"), unit="ns")
        return text.astype(object), None
    return _frame_ids_of_objects(values, name)


def _float_reason(v: float) -> str:
    if not np.isfinite(v):
        return f"frame id {v!r} is not a frame id (frame ids are integers or text)"
    if v != np.floor(v):
        return (
            f"frame id {v!r} is a float with a fraction, which names no frame exactly; write "
            "frame ids as integers or as text"
        )
    return (
        f"frame id {v!r} is a float at or beyond 2**53 in magnitude, where floats may not be "
        "the ids that were written (1e19 and 1e19 + 1 are one float); write frame ids as "
        "integers or as text"
    )


def _other_reason(v: Any) -> str:
    what = type(v).__name__
    return f"expected an integer or a text as frame id, got {what} {v!r:.40}"


_INTEGER_TEXT = re.compile(r"\s*[+-]?[0-9]+\s*")


def _frame_ids_of_text(values: np.ndarray) -> tuple[np.ndarray, np.ndarray | None] | None:
    """The frame-id rule on text ids, vectorised, for the common cases: every id spells an
    integer within int64 (CSV cells), or none does (names). None for anything else."""
    import pandas as pd

    if values.dtype.kind != "U" and pd.api.types.infer_dtype(values, skipna=False) != "string":
        return None
    text = values.astype(str)
    if text.size and int(text.view(np.uint32).max()) >= 128:
        return None  # non-ASCII characters: the exact rule below decides
    stripped = np.strings.strip(text)
    signed = np.strings.startswith(stripped, "+") | np.strings.startswith(stripped, "-")
    digits = np.strings.isdigit(np.where(signed, np.strings.slice(stripped, 1, None), stripped))
    if not digits.any():
        return values.astype(object), None
    if not digits.all() or int(np.strings.str_len(stripped).max()) > 18:
        return None  # names among integers, or integers that may not fit int64
    # At most 18 ASCII digits each: their value, column by column of the UCS-4 codes
    # (a string shorter than the widest ends in code 0), fits int64 exactly.
    body = np.where(signed, np.strings.slice(stripped, 1, None), stripped)
    codes = body.astype(f"U{max(int(np.strings.str_len(body).max()), 1)}")
    codes = codes.view(np.uint32).reshape(len(body), -1).astype(np.int64)
    ids = np.zeros(len(body), dtype=np.int64)
    for k in range(codes.shape[1]):
        digit = codes[:, k] - 48
        ids = np.where(codes[:, k] > 0, ids * 10 + digit, ids)
    ids = np.where(np.strings.startswith(stripped, "-"), -ids, ids)
    # written as the integer's own digits: no spaces, no "+", no leading zero
    canonical = (
        (stripped == text)
        & ~np.strings.startswith(stripped, "+")
        & ~(np.strings.startswith(body, "0") & (np.strings.str_len(body) > 1))
        & (stripped != "-0")
    )
    return ids, None if canonical.all() else values.astype(object)


def _frame_ids_of_objects(values: np.ndarray, name: str) -> tuple[np.ndarray, np.ndarray | None]:
    fast = _frame_ids_of_text(values)
    if fast is not None:
        return fast
    n = len(values)
    keys: list[Any] = [None] * n
    written: list[Any] | None = None
    wide = False  # an integer beyond int64, or a name: the ids are text
    for i, v in enumerate(values.tolist()):
        if isinstance(v, str):
            if _INTEGER_TEXT.fullmatch(v):
                try:
                    k = int(v)
                except ValueError:  # more digits than Python reads (4300)
                    reason = f"frame id of {len(v.strip())} digits is too long to read"
                    raise InvalidInput(name, reason, row=i) from None
                if v != str(k):
                    if written is None:
                        written = [str(x) for x in keys[:i]]
                    # (ids before i were written as their own text)
            else:
                k = v
                wide = True
        elif isinstance(v, (bool, np.bool_)) or v is None:
            raise InvalidInput(name, _other_reason(v), row=i)
        elif isinstance(v, (int, np.integer)):
            k = int(v)
        elif isinstance(v, (float, np.floating)):
            v = float(v)
            if not (np.isfinite(v) and v == np.floor(v) and abs(v) < 2.0**53):
                raise InvalidInput(name, _float_reason(v), row=i)
            k = int(v)
        else:
            raise InvalidInput(name, _other_reason(v), row=i)
        if isinstance(k, int) and not -(2**63) <= k < 2**63:
            wide = True
        keys[i] = k
        if written is not None:
            written.append(v if isinstance(v, str) else str(k))
    written_arr = None if written is None else np.array(written, dtype=object)
    if not wide:
        return np.array(keys, dtype=np.int64).reshape(n), written_arr
    out = np.empty(n, dtype=object)
    out[:] = [k if isinstance(k, str) else str(k) for k in keys]
    return out, written_arr


def frame_groups(frames: np.ndarray) -> list[np.ndarray]:
    """Row indices of each frame, frames in order of first appearance, rows in input order.

    Examples
    --------
    >>> [g.tolist() for g in frame_groups(np.array([5, 3, 5, 9, 3]))]
    [[0, 2], [1, 4], [3]]
    >>> frame_groups(np.array([], dtype=np.int64))
    []
    """
    if len(frames) == 0:
        return []
    _, first, inverse = np.unique(frames, return_index=True, return_inverse=True)
    inverse = inverse.reshape(-1)
    order = np.argsort(first, kind="stable")
    rows = np.argsort(inverse, kind="stable")
    bounds = np.cumsum(np.bincount(inverse, minlength=len(first)))
    parts = np.split(rows, bounds[:-1])
    return [parts[i] for i in order]


@dataclass(frozen=True)
class Table:
    """A validated table of boxes: one row per box.

    Attributes
    ----------
    role : str
        ``"truth"`` or ``"detections"``.
    frame : numpy.ndarray
        Frame id per row by the frame-id rule (:func:`frame_ids`): int64 when all ids are
        integers within int64, else text (object array of str).
    label : numpy.ndarray
        Label per row as str (object array); integer labels become their decimal text.
    score : numpy.ndarray or None
        float64 confidence per row (detections); ``None`` for truth.
    ignore : numpy.ndarray
        bool per row (truth; all False for detections).
    boxes : obbiou.shapes.Boxes
        The validated boxes (angles in radians).
    extra : dict
        Other columns, passed through unchanged.
    source : str
        The file name, or ``"<DataFrame>"`` / ``"<mapping>"``.
    frame_written : numpy.ndarray or None
        The frame ids as written (text), when some were written otherwise than ``frame``
        holds them (``"007"`` for frame 7); None when they were not. :meth:`to_frame`
        writes them back.
    """

    role: str
    frame: np.ndarray
    label: np.ndarray
    score: np.ndarray | None
    ignore: np.ndarray
    boxes: Boxes
    extra: dict[str, np.ndarray] = field(default_factory=dict)
    source: str = "<mapping>"
    frame_written: np.ndarray | None = None

    def __len__(self) -> int:
        return len(self.boxes)

    @property
    def shape(self) -> str:
        """The box layout name."""
        return self.boxes.shape

    def to_frame(self) -> Any:
        """The table as a pandas DataFrame with the input columns (angles as read).

        Columns: ``frame, label``, ``score`` (detections), the box columns, ``ignore`` (truth,
        when any row is ignored), then the extra columns.
        """
        import pandas as pd

        data = self.boxes.data
        cols = box_columns(self.shape, data.shape[1] if self.shape == "polygon" else 4)
        flat = data.reshape(data.shape[0], int(np.prod(data.shape[1:])))
        frame = self.frame if self.frame_written is None else self.frame_written
        out: dict[str, Any] = {"frame": frame, "label": self.label}
        if self.score is not None:
            out["score"] = self.score
        for j, c in enumerate(cols):
            out[c] = flat[:, j]
        if self.role == "truth" and self.ignore.any():
            out["ignore"] = self.ignore
        for c, v in self.extra.items():
            out[c] = np.asarray(v)
        return pd.DataFrame(out)

    def take(self, rows: np.ndarray) -> Table:
        """The rows ``rows`` (indices or boolean mask) as a new table."""
        rows = np.asarray(rows)
        return Table(
            self.role,
            self.frame[rows],
            self.label[rows],
            None if self.score is None else self.score[rows],
            self.ignore[rows],
            Boxes(np.ascontiguousarray(self.boxes.data[rows]), self.boxes.shape, False),
            {k: v[rows] for k, v in self.extra.items()},
            self.source,
            None if self.frame_written is None else self.frame_written[rows],
        )


class _Where:
    """Where a row of the source is, for errors: ``file.csv, line 7`` or ``row 5``."""

    def __init__(self, source: str, kind: str, first_line: int = 0, lines=None, index=None):
        self.source = source
        self.kind = kind  # "line" or "row"
        self.first_line = first_line
        self.lines = lines  # explicit line numbers per row (JSON Lines)
        self.index = index  # DataFrame index labels

    def error(self, row: int | None, column: str | None, reason: str) -> InvalidTable:
        """The error for ``reason`` at data row ``row`` (0-based) and ``column``."""
        if row is None:
            return InvalidTable(self.source, reason, column=column)
        line = None
        if self.kind == "line":
            if callable(self.lines):  # found only when an error needs it
                self.lines = self.lines()
            line = self.lines[row] if self.lines is not None else row + self.first_line
        index = self.index[row] if self.index is not None else None
        return InvalidTable(self.source, reason, line=line, row=row, column=column, index=index)


class _DuplicateKey(Exception):
    """A JSON object names a key twice (raised by the pairs hook, reported with its line)."""


def _object_without_duplicates(pairs: list[tuple[str, Any]]) -> dict[str, Any]:
    obj = dict(pairs)
    if len(obj) != len(pairs):
        seen: set[str] = set()
        for key, _ in pairs:
            if key in seen:
                raise _DuplicateKey(key)
            seen.add(key)
    return obj


def _read_jsonl(path: str) -> tuple[dict[str, list], list[int]]:
    rows: list[dict] = []
    lines: list[int] = []
    with open(path, "rb") as fh:
        for number, raw in enumerate(fh, start=1):
            try:
                text = raw.decode("utf-8")
            except UnicodeDecodeError as exc:
                raise InvalidTable(path, _not_utf8(raw, exc), line=number) from None
            if not text.strip():
                continue  # blank lines carry no row; line numbers stay those of the file
            try:
                obj = json.loads(text, object_pairs_hook=_object_without_duplicates)
            except json.JSONDecodeError as exc:
                raise InvalidTable(path, f"not valid JSON ({exc.msg})", line=number) from None
            except _DuplicateKey as exc:
                key = str(exc.args[0])
                reason = "key given twice in one row (which one is meant is unknown)"
                raise InvalidTable(path, reason, line=number, column=key) from None
            except ValueError as exc:  # an integer of more than 4300 digits
                raise InvalidTable(path, f"cannot read a number ({exc})", line=number) from None
            if not isinstance(obj, dict):
                reason = f"expected a JSON object, got {obj!r:.40}"
                raise InvalidTable(path, reason, line=number)
            rows.append(obj)
            lines.append(number)
    names: list[str] = []
    for obj in rows:
        for key in obj:
            if key not in names:
                names.append(key)
    missing = object()
    columns: dict[str, list] = {}
    for name in names:
        columns[name] = [obj.get(name, missing) for obj in rows]
        # A key absent from a row is reported as an empty value of that row.
        columns[name] = [None if v is missing else v for v in columns[name]]
    return columns, lines


def _not_utf8(raw: bytes, exc: UnicodeDecodeError) -> str:
    return (
        f"not UTF-8 text (byte 0x{raw[exc.start]:02x} at byte {exc.start + 1} of the "
        "line); save the file as UTF-8"
    )


def _first_line_not_utf8(path: str) -> tuple[int, str] | None:
    """The first line of a file that is not UTF-8 (its number and the reason), or None."""
    with open(path, "rb") as fh:
        for number, raw in enumerate(fh, start=1):
            try:
                raw.decode("utf-8")
            except UnicodeDecodeError as exc:
                return number, _not_utf8(raw, exc)
    return None


def _csv_lines(path: str) -> list[int]:
    """The physical line (1-based) on which each data record of a CSV file starts.

    A quoted cell may span several lines, so record i is not always line i + 2; the
    standard library's reader counts the lines it consumed (``line_num``). Blank lines (empty
    or spaces only) carry no record, as in the reading itself.
    """
    import csv

    starts = []
    with open(path, encoding="utf-8", newline="") as fh:
        reader = csv.reader(fh)
        next(reader, None)  # the header
        end = reader.line_num
        for record in reader:
            if record and not (len(record) == 1 and not record[0].strip()):
                starts.append(end + 1)
            end = reader.line_num
    return starts


def _duplicated(names: list[str], source: str, line: int | None = None) -> None:
    """Raise for the first column name given twice: never "the first one wins"."""
    seen: dict[str, int] = {}
    for position, name in enumerate(names, start=1):
        if name in seen:
            reason = (
                f"column name given twice (columns {seen[name]} and {position}); which one "
                "is meant is unknown"
            )
            raise InvalidTable(source, reason, line=line, column=name)
        seen[name] = position


def _load(source: Any) -> tuple[dict[str, np.ndarray], _Where, int]:
    """Columns of ``source`` as arrays, a namer for rows, and the number of rows."""
    import pandas as pd

    if isinstance(source, (str, os.PathLike)):
        path = os.fspath(source)
        kind = table_format(path)
        if not os.path.exists(path):
            raise InvalidTable(path, "no such file")
        if kind == "csv":
            try:
                header = pd.read_csv(path, header=None, nrows=1, dtype=object)
                _duplicated([str(c) for c in header.iloc[0].tolist()], path, line=1)
                # blank lines (a trailing one, a gap) carry no row, as in JSON Lines
                df = pd.read_csv(path, skip_blank_lines=True, dtype={"frame": object})
            except UnicodeDecodeError:
                line, reason = _first_line_not_utf8(path) or (None, "not UTF-8 text")
                raise InvalidTable(path, reason, line=line) from None
            except pd.errors.EmptyDataError:
                raise InvalidTable(path, "empty file (no header line)") from None
            except InvalidTable:
                raise
            except Exception as exc:  # pandas parser errors name the line themselves
                raise InvalidTable(path, f"cannot read as CSV ({exc})") from None
            # Line 1 is the header; row i is line i + 2 unless a blank line or a quoted cell
            # spanning lines came before it: the lines are counted, only for an error.
            where = _Where(path, "line", first_line=2, lines=lambda: _csv_lines(path))
            return {str(c): df[c].to_numpy() for c in df.columns}, where, len(df)
        if kind == "parquet":
            try:
                df = pd.read_parquet(path)
            except Exception as exc:
                raise InvalidTable(path, f"cannot read as Parquet ({exc})") from None
            _duplicated([str(c) for c in df.columns], path)
            return {str(c): df[c].to_numpy() for c in df.columns}, _Where(path, "row"), len(df)
        cols, lines = _read_jsonl(path)
        # one value per cell: lists stay objects (reported by column), never a 2-D array
        arrays = {k: np.fromiter(v, dtype=object, count=len(v)) for k, v in cols.items()}
        return arrays, _Where(path, "line", lines=lines), len(lines)
    if isinstance(source, pd.DataFrame):
        _duplicated([str(c) for c in source.columns], "<DataFrame>")
        cols = {str(c): source[c].to_numpy() for c in source.columns}
        return cols, _Where("<DataFrame>", "row", index=list(source.index)), len(source)
    if hasattr(source, "keys") and hasattr(source, "__getitem__"):
        cols = {}
        length = None
        _duplicated([str(k) for k in source.keys()], "<mapping>")  # 7 and "7" are one name
        for key in source.keys():
            arr = np.asarray(source[key])
            if arr.ndim != 1:
                reason = f"expected a 1-D column, got shape {arr.shape}"
                raise InvalidTable("<mapping>", reason, column=str(key))
            if length is not None and len(arr) != length:
                reason = f"has {len(arr)} rows, other columns {length}"
                raise InvalidTable("<mapping>", reason, column=str(key))
            length = len(arr)
            cols[str(key)] = arr
        return cols, _Where("<mapping>", "row"), length or 0
    raise InvalidInput(
        "source",
        "expected a file path (.csv, .parquet, .jsonl), a pandas DataFrame or a "
        f"mapping of column -> array, got {type(source).__name__}",
    )


def read_columns(path: Any) -> Any:
    """A table file's columns as a pandas DataFrame, parsed exactly as :func:`read_table`
    parses files (frame ids as written, no column named twice, UTF-8, one value per cell),
    not yet validated as boxes. Cluster workers load files with it.

    Examples
    --------
    >>> import tempfile, os
    >>> p = os.path.join(tempfile.mkdtemp(), "t.csv")
    >>> _ = open(p, "w").write("frame,label" + chr(10) + "007,vessel" + chr(10))
    >>> read_columns(p)["frame"].tolist()
    ['007']
    """
    import pandas as pd

    cols, _, n = _load(os.fspath(path))
    return pd.DataFrame(cols, index=pd.RangeIndex(n))


def _is_empty(value: Any) -> bool:
    if value is None:
        return True
    if isinstance(value, float) and np.isnan(value):
        return True
    return isinstance(value, str) and value.strip() == ""


def _numeric(values: np.ndarray, column: str, where: _Where) -> np.ndarray:
    """The column as float64; names the first empty, non-numeric or non-finite cell."""
    if values.dtype.kind in "fiub":
        out = values.astype(np.float64)
    else:
        out = np.empty(len(values))
        for i, v in enumerate(values):
            if _is_empty(v):
                raise where.error(i, column, "empty value")
            if isinstance(v, bool):
                out[i] = float(v)
                continue
            try:
                out[i] = float(v)
            except OverflowError:  # a JSON integer of hundreds of digits
                reason = f"number of {len(str(abs(v)))} digits is beyond float64 (about 1.8e308)"
                raise where.error(i, column, reason) from None
            except (TypeError, ValueError):
                raise where.error(i, column, f"not a number: {v!r:.40}") from None
    bad = ~np.isfinite(out)
    if bad.any():
        i = int(np.argmax(bad))
        what = (
            "empty value (NaN)"
            if np.isnan(out[i])
            else f"infinite value {out[i]!r} (or a number beyond float64, about 1.8e308)"
        )
        raise where.error(i, column, what)
    return out


_CONTAINERS = (list, tuple, dict, set, np.ndarray)
#: What pandas infers for object columns that certainly hold one plain value per cell.
_SCALARS = {"string", "integer", "floating", "mixed-integer-float", "boolean", "empty", "decimal"}


def _one_value_per_cell(values: np.ndarray, column: str, where: _Where) -> None:
    """Raise for the first cell that holds several values (a JSON list, an array)."""
    import pandas as pd

    if values.dtype != object or pd.api.types.infer_dtype(values, skipna=True) in _SCALARS:
        return
    for i, v in enumerate(values.tolist()):
        if isinstance(v, _CONTAINERS):
            what = "an object" if isinstance(v, dict) else f"a {type(v).__name__}"
            raise where.error(i, column, f"expected one value, got {what} {v!r:.40}")


def _first_empty(values: np.ndarray) -> int | None:
    """Index of the first empty cell (None, NaN, blank text), or None."""
    import pandas as pd

    if values.dtype.kind in "iub":
        return None
    if values.dtype.kind == "f":
        bad = np.isnan(values)
    else:
        bad = np.asarray(pd.isna(values), dtype=bool).copy()
        if not bad.any():
            text = values.astype(str)  # vectorised; blank text is an empty cell too
            bad = np.char.str_len(np.char.strip(text)) == 0
    return int(np.argmax(bad)) if bad.any() else None


def _labels(values: np.ndarray, where: _Where) -> np.ndarray:
    """Labels as text (object array of str); integer labels (also whole floats) as digits."""
    import pandas as pd

    i = _first_empty(values)
    if i is not None:
        raise where.error(i, "label", "empty value")
    if values.dtype.kind in "iub":
        return values.astype(np.int64).astype(str).astype(object)
    if pd.api.types.infer_dtype(values, skipna=False) == "string":
        return values.astype(object)
    out = np.empty(len(values), dtype=object)
    for i, v in enumerate(values.tolist()):
        if isinstance(v, (float, np.floating)) and v == np.floor(v):
            out[i] = str(int(v))  # exact for any whole float (1e19 too)
        elif isinstance(v, (str, int, float, np.integer, np.floating)):
            out[i] = str(v)
        else:
            reason = f"expected a text or a number as label, got {type(v).__name__} {v!r:.40}"
            raise where.error(i, "label", reason)
    return out


def _bools(values: np.ndarray, column: str, where: _Where) -> np.ndarray:
    if values.dtype.kind == "b":
        return values.astype(bool)
    truthy = {"1", "true", "yes", "t", "y"}
    falsy = {"0", "false", "no", "f", "n"}
    out = np.empty(len(values), dtype=bool)
    for i, v in enumerate(values):
        if isinstance(v, (bool, np.bool_)):
            out[i] = bool(v)
        elif isinstance(v, (int, np.integer, float, np.floating)) and v in (0, 1):
            out[i] = bool(v)
        elif isinstance(v, str) and v.strip().lower() in truthy | falsy:
            out[i] = v.strip().lower() in truthy
        else:
            raise where.error(i, column, f"expected true/false (or 1/0), got {v!r}")
    return out


def infer_layout(names: set[str], source: str) -> str:
    """The box layout whose columns are present among ``names`` (``source`` names the table
    in errors); the rule of :func:`obbiou.shapes.layout_of_columns`.

    Examples
    --------
    >>> infer_layout({"frame", "cx", "cy", "cz", "length", "width", "height", "yaw"}, "t")
    'upright'
    """
    every = {c for s in SHAPES for c in box_columns(s)}
    try:
        layout = layout_of_columns(names)
    except InvalidInput as exc:
        raise InvalidTable(source, exc.reason + _spelled_otherwise(every, names)) from None
    if layout is None:
        raise InvalidTable(
            source,
            "no box columns found; expected one of: "
            + "; ".join(f"{s}: {' '.join(box_columns(s))}" for s in SHAPES)
            + _spelled_otherwise(every, names),
        )
    return layout


def _frame_column(values: np.ndarray, where: _Where) -> tuple[np.ndarray, np.ndarray | None]:
    """The ``frame`` column by the frame-id rule (:func:`frame_ids`); errors name the row."""
    i = _first_empty(values)
    if i is not None:
        raise where.error(i, "frame", "empty value")
    try:
        return frame_ids(values)
    except InvalidInput as exc:
        raise where.error(exc.row, "frame", exc.reason) from None


def _spelled_otherwise(wanted: Any, names: Any) -> str:
    """A hint when the table has ``wanted`` column(s) only in other letter case or with
    spaces (``FRAME``, ``" cx"``): names are matched exactly, so say which was meant."""
    wanted = [wanted] if isinstance(wanted, str) else list(wanted)
    found = {}
    for name in sorted(names):
        key = name.strip().lower()
        if key in wanted and key != name:
            found.setdefault(key, name)
    if not found:
        return ""
    shown = ", ".join(repr(v) for v in list(found.values())[:4])
    return f"; the table has {shown}: column names are matched exactly (lower case, no spaces)"


def _read_folder(folder: str, role: str, shape: str | None, degrees: bool) -> Table:
    """The tables of a folder's files (:func:`table_files` order) as one table."""
    files = table_files(folder)
    if not files:
        reason = "folder holds no table files (.csv, .parquet, .pq, .jsonl, .ndjson)"
        raise InvalidTable(folder, reason)
    parts: list[Table] = []
    for path in files:
        part = read_table(path, role=role, shape=shape, degrees=degrees)
        if parts:
            first = parts[0]
            if part.shape != first.shape or part.boxes.data.shape[1:] != first.boxes.data.shape[1:]:
                reason = (
                    f"boxes of shape {part.shape!r} ({part.boxes.data.shape[1:]}) while "
                    f"{first.source} has {first.shape!r} ({first.boxes.data.shape[1:]})"
                )
                raise InvalidTable(str(path), reason)
            if list(part.extra) != list(first.extra):
                reason = (
                    f"other columns ({', '.join(part.extra) or 'none'}) than {first.source} "
                    f"({', '.join(first.extra) or 'none'}); every file of a folder needs the same"
                )
                raise InvalidTable(str(path), reason)
        shape = part.shape
        parts.append(part)
    frames = comparable_frame_ids([p.frame for p in parts])
    written = None
    if any(p.frame_written is not None for p in parts):
        written = np.concatenate(
            [
                p.frame.astype(str).astype(object) if p.frame_written is None else p.frame_written
                for p in parts
            ]
        )
    return Table(
        role,
        np.concatenate(frames),
        np.concatenate([p.label for p in parts]),
        None if role == "truth" else np.concatenate([p.score for p in parts]),
        np.concatenate([p.ignore for p in parts]),
        Boxes(np.ascontiguousarray(np.concatenate([p.boxes.data for p in parts])), shape, False),
        {c: np.concatenate([p.extra[c] for p in parts]) for c in parts[0].extra},
        folder,
        written,
    )


def read_table(
    source: Any,
    *,
    role: Literal["truth", "detections"],
    shape: str | None = None,
    degrees: bool = False,
) -> Table:
    """Read and validate a table of ground truth or detections.

    Parameters
    ----------
    source : str, os.PathLike, pandas.DataFrame or mapping
        A ``.csv``, ``.parquet`` (``.pq``) or ``.jsonl`` (``.ndjson``) file, a folder of such
        files (read in the natural order of their names, :func:`table_files`, as one table;
        every file with the same columns), a DataFrame, or a mapping of column name -> 1-D
        array. A :class:`Table` is returned as it is.
    role : {"truth", "detections"}
        Detections need a ``score`` column; truth may have a boolean ``ignore`` column.
    shape : str, optional
        The box layout (see the module docstring); inferred from which box columns are
        present when ``None``.
    degrees : bool
        ``angle`` / ``yaw`` columns are in degrees (converted to radians).

    Returns
    -------
    Table

    Raises
    ------
    obbiou.errors.InvalidTable
        Naming the file, the line (CSV, JSON Lines: line numbers of the file, header = line
        1) or the row (0-based, Parquet / mapping; index label, DataFrame) and the column.

    Examples
    --------
    >>> t = read_table({"frame": [0, 0], "label": ["ship", "ship"], "cx": [5.0, 9.0],
    ...                 "cy": [5.0, 1.0], "width": [4.0, 2.0], "height": [2.0, 1.0],
    ...                 "angle": [0.0, 0.3], "note": ["a", "b"]}, role="truth")
    >>> t.shape, len(t), t.ignore.tolist(), list(t.extra)
    ('rotated', 2, [False, False], ['note'])
    >>> read_table({"frame": [0], "label": ["ship"], "score": [0.9], "cx": [1.0],
    ...             "cy": [1.0], "width": [-2.0], "height": [1.0], "angle": [0.0]},
    ...            role="detections")
    Traceback (most recent call last):
    ...
    obbiou.errors.InvalidTable: <mapping>, row 0, column 'width': negative width -2.0
    >>> read_table({"frame": [], "label": [], "score": [], "x_min": [], "y_min": [],
    ...             "x_max": [], "y_max": []}, role="detections").shape  # empty is fine
    'axis'
    """
    if isinstance(source, Table):
        if source.role != role:
            raise InvalidTable(source.source, f"a {source.role} table was given as {role}")
        if shape is not None and source.shape != shape:
            raise InvalidTable(source.source, f"table has shape {source.shape!r}, not {shape!r}")
        return source
    if role not in _ROLES:
        raise InvalidInput("role", f"expected 'truth' or 'detections', got {role!r}")
    if isinstance(source, (str, os.PathLike)) and os.path.isdir(source):
        return _read_folder(os.fspath(source), role, shape, degrees)
    cols, where, n = _load(source)
    name = where.source
    names = set(cols)
    required = ["frame", "label"] + (["score"] if role == "detections" else [])
    for col in required:
        if col not in names:
            extra = " (detections need a score per row)" if col == "score" else ""
            extra += _spelled_otherwise(col, names)
            raise InvalidTable(name, f"missing column {col!r}{extra}")
    layout = shape if shape is not None else infer_layout(names, name)
    if layout not in SHAPES:
        raise InvalidTable(
            name, f"unknown shape {layout!r}; expected one of {', '.join(map(repr, SHAPES))}"
        )
    vertices = polygon_vertices(names) if layout == "polygon" else 0
    if layout == "polygon" and vertices < 3:
        raise InvalidTable(
            name,
            f"missing column {'px0' if 'px0' not in names else 'py0'!r} "
            "(polygon boxes need px0 py0 px1 py1 px2 py2 …)",
        )
    bcols = box_columns(layout, vertices)
    for col in bcols:
        if col not in names:
            reason = f"missing column {col!r} (shape {layout!r} needs {' '.join(bcols)})"
            raise InvalidTable(name, reason + _spelled_otherwise(col, names))

    for col in (*required, *bcols, *(["ignore"] if role == "truth" and "ignore" in names else [])):
        _one_value_per_cell(cols[col], col, where)
    frame, written = _frame_column(cols["frame"], where)
    label = _labels(cols["label"], where)
    score = _numeric(cols["score"], "score", where) if role == "detections" else None
    if role == "truth" and "ignore" in names:
        ignore = _bools(cols["ignore"], "ignore", where)
    else:
        ignore = np.zeros(n, dtype=bool)
    values = np.empty((n, len(bcols)))
    for j, col in enumerate(bcols):
        values[:, j] = _numeric(cols[col], col, where)
    if degrees and layout in _ANGLE_COLUMNS:
        j = bcols.index(_ANGLE_COLUMNS[layout])
        values[:, j] = np.deg2rad(values[:, j])
    data = values.reshape(n, vertices, 2) if layout == "polygon" else values
    try:
        boxes = read_boxes(data, layout, name="boxes")
    except InvalidInput as exc:
        # The gate names the row and the position of the value in the row; a table names
        # the line (or row) and the column. A fault of the whole box names all its columns.
        column = " ".join(bcols) if exc.column is None else bcols[exc.column]
        raise where.error(exc.row, column, exc.reason) from None
    used = set(required) | set(bcols) | ({"ignore"} if role == "truth" else set())
    extra = {c: v for c, v in cols.items() if c not in used}
    return Table(role, frame, label, score, ignore, boxes, extra, name, written)


@dataclass(frozen=True)
class Points:
    """A validated table of lidar points: one row per point.

    Attributes
    ----------
    frame : numpy.ndarray
        Frame id per row (int64 when all ids are integers, else str), compared with the
        frames of box tables by :func:`comparable_frame_ids`.
    xyz : numpy.ndarray
        float64 ``(N, 2)`` (columns ``x, y``) or ``(N, 3)`` (``x, y, z``).
    source : str
        The file name, or ``"<DataFrame>"`` / ``"<mapping>"``.
    """

    frame: np.ndarray
    xyz: np.ndarray
    source: str = "<mapping>"

    def __len__(self) -> int:
        return int(self.xyz.shape[0])


def read_points(source: Any) -> Points:
    """Read and validate a table of points with columns ``frame, x, y`` and optionally ``z``.

    Parameters
    ----------
    source : str, os.PathLike, pandas.DataFrame, mapping or Points
        As for :func:`read_table` (CSV, Parquet, JSON Lines, or a folder of such files read
        in the order of :func:`table_files`, all with ``z`` or all without); a
        :class:`Points` is returned as it is. Other columns are allowed and left out.

    Returns
    -------
    Points

    Raises
    ------
    obbiou.errors.InvalidTable
        A missing column, or an empty, non-numeric or non-finite cell (naming the file, line
        or row, and column).

    Examples
    --------
    >>> p = read_points({"frame": [3, 3], "x": [0.5, 1.0], "y": [0.0, 2.0], "z": [0.1, 0.2]})
    >>> p.xyz.shape, p.frame.tolist()
    ((2, 3), [3, 3])
    >>> read_points({"frame": [], "x": [], "y": []}).xyz.shape  # empty, 2D
    (0, 2)
    >>> read_points({"frame": [0], "x": [1.0], "y": [float("nan")]})
    Traceback (most recent call last):
    ...
    obbiou.errors.InvalidTable: <mapping>, row 0, column 'y': empty value (NaN)
    """
    if isinstance(source, Points):
        return source
    if isinstance(source, (str, os.PathLike)) and os.path.isdir(source):
        return _read_points_folder(os.fspath(source))
    cols, where, n = _load(source)
    for col in ("frame", "x", "y"):
        if col not in cols:
            raise InvalidTable(where.source, f"missing column {col!r} (points need frame, x, y)")
    names = ("x", "y", "z") if "z" in cols else ("x", "y")
    xyz = np.empty((n, len(names)))
    for j, col in enumerate(names):
        xyz[:, j] = _numeric(cols[col], col, where)
    frame, _ = _frame_column(cols["frame"], where)
    return Points(frame, xyz, where.source)


def _read_points_folder(folder: str) -> Points:
    """The points of a folder's files (:func:`table_files` order) as one table."""
    files = table_files(folder)
    if not files:
        reason = "folder holds no table files (.csv, .parquet, .pq, .jsonl, .ndjson)"
        raise InvalidTable(folder, reason)
    parts = [read_points(path) for path in files]
    first = parts[0]
    for path, part in zip(files, parts, strict=True):
        if part.xyz.shape[1] != first.xyz.shape[1]:
            names = {2: "frame, x, y", 3: "frame, x, y, z"}
            reason = (
                f"columns {names[part.xyz.shape[1]]} while {first.source} has "
                f"{names[first.xyz.shape[1]]}; every file of a folder needs the same"
            )
            raise InvalidTable(str(path), reason)
    frames = comparable_frame_ids([p.frame for p in parts])
    return Points(np.concatenate(frames), np.concatenate([p.xyz for p in parts]), folder)
