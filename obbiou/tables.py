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
column, an empty cell, a non-numeric value, a NaN, a negative size or an invalid polygon is an
:class:`~obbiou.errors.InvalidTable` (a ``ValueError``) that names the file, the line (CSV,
JSON Lines) or row (Parquet, DataFrame, mapping) and the column, as fields and in its text.

This module is also the one place for the facts every table user shares:
:data:`TABLE_SUFFIXES` (the file formats, read and written), :func:`comparable_frame_ids`
(how frame ids of two tables compare: as integers when both are integers, else as text) and
:func:`frame_groups` (the rows of each frame).
"""

from __future__ import annotations

import json
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Literal

import numpy as np

from obbiou.errors import InvalidInput, InvalidTable
from obbiou.shapes import COLUMNS, SHAPES, Boxes, read_boxes

__all__ = [
    "Table",
    "read_table",
    "write_table",
    "box_columns",
    "infer_layout",
    "polygon_vertices",
    "TABLE_SUFFIXES",
    "table_format",
    "comparable_frame_ids",
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
    """Frame id arrays of several tables, made comparable by the one rule for frame ids.

    The rule: ids compare as integers when every table's ids are integers (int64), else as
    text (``str`` of each id), so that frame ``7`` of one table meets frame ``"7"`` of
    another. Evaluation, the scene commands and the cluster's frame buckets follow it.

    Examples
    --------
    >>> a, b = comparable_frame_ids([np.array([7, 8]), np.array(["7"], dtype=object)])
    >>> a.tolist(), b.tolist()
    (['7', '8'], ['7'])
    >>> comparable_frame_ids([np.array([1]), np.array([2], dtype=np.int32)])[1].dtype
    dtype('int64')
    """
    if all(a.dtype.kind in "iu" for a in arrays):
        return [a.astype(np.int64) for a in arrays]
    return [np.array([str(v) for v in a], dtype=object) for a in arrays]


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


def box_columns(shape: str, vertices: int = 4) -> tuple[str, ...]:
    """Column names of the boxes of layout ``shape`` in a table.

    Examples
    --------
    >>> box_columns("rotated")
    ('cx', 'cy', 'width', 'height', 'angle')
    >>> box_columns("polygon", 3)
    ('px0', 'py0', 'px1', 'py1', 'px2', 'py2')
    """
    if shape == "polygon":
        return tuple(c for k in range(vertices) for c in (f"px{k}", f"py{k}"))
    if shape not in COLUMNS:
        raise InvalidInput(
            "shape",
            f"unknown shape {shape!r}; expected one of {', '.join(map(repr, SHAPES))}",
            message=f"unknown shape {shape!r}; expected one of {', '.join(map(repr, SHAPES))}",
        )
    return COLUMNS[shape]


@dataclass(frozen=True)
class Table:
    """A validated table of boxes: one row per box.

    Attributes
    ----------
    role : str
        ``"truth"`` or ``"detections"``.
    frame : numpy.ndarray
        Frame id per row: int64 when all ids are integers, else str (object array).
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
    """

    role: str
    frame: np.ndarray
    label: np.ndarray
    score: np.ndarray | None
    ignore: np.ndarray
    boxes: Boxes
    extra: dict[str, np.ndarray] = field(default_factory=dict)
    source: str = "<mapping>"

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
        out: dict[str, Any] = {"frame": self.frame, "label": self.label}
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
            line = self.lines[row] if self.lines is not None else row + self.first_line
        index = self.index[row] if self.index is not None else None
        return InvalidTable(self.source, reason, line=line, row=row, column=column, index=index)


def _read_jsonl(path: str) -> tuple[dict[str, list], list[int]]:
    rows: list[dict] = []
    lines: list[int] = []
    with open(path, encoding="utf-8") as fh:
        for number, text in enumerate(fh, start=1):
            if not text.strip():
                continue  # blank lines carry no row; line numbers stay those of the file
            try:
                obj = json.loads(text)
            except json.JSONDecodeError as exc:
                raise InvalidTable(path, f"not valid JSON ({exc.msg})", line=number) from None
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
                df = pd.read_csv(path, skip_blank_lines=False)
            except Exception as exc:  # pandas parser errors name the line themselves
                raise InvalidTable(path, f"cannot read as CSV ({exc})") from None
            # Line 1 is the header; with blank lines kept, row i is line i + 2.
            where = _Where(path, "line", first_line=2)
            return {str(c): df[c].to_numpy() for c in df.columns}, where, len(df)
        if kind == "parquet":
            try:
                df = pd.read_parquet(path)
            except Exception as exc:
                raise InvalidTable(path, f"cannot read as Parquet ({exc})") from None
            return {str(c): df[c].to_numpy() for c in df.columns}, _Where(path, "row"), len(df)
        cols, lines = _read_jsonl(path)
        arrays = {k: np.array(v, dtype=object) for k, v in cols.items()}
        return arrays, _Where(path, "line", lines=lines), len(lines)
    if isinstance(source, pd.DataFrame):
        cols = {str(c): source[c].to_numpy() for c in source.columns}
        return cols, _Where("<DataFrame>", "row", index=list(source.index)), len(source)
    if hasattr(source, "keys") and hasattr(source, "__getitem__"):
        cols = {}
        length = None
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
            except (TypeError, ValueError):
                raise where.error(i, column, f"not a number: {v!r}") from None
    bad = ~np.isfinite(out)
    if bad.any():
        i = int(np.argmax(bad))
        what = "empty value (NaN)" if np.isnan(out[i]) else f"infinite value {out[i]!r}"
        raise where.error(i, column, what)
    return out


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


def _ids(values: np.ndarray, column: str, where: _Where, *, text: bool) -> np.ndarray:
    """Frame ids (int64 when all integral, else str) or labels (``text=True``: always str)."""
    import pandas as pd

    i = _first_empty(values)
    if i is not None:
        raise where.error(i, column, "empty value")
    if values.dtype.kind in "iub" or (
        values.dtype.kind == "f" and np.all(np.floor(values) == values)
    ):
        ints = values.astype(np.int64)
        return ints.astype(str).astype(object) if text else ints
    inferred = pd.api.types.infer_dtype(values, skipna=False)
    if inferred == "integer":
        ints = values.astype(np.int64)
        return ints.astype(str).astype(object) if text else ints
    if inferred == "string":
        return values.astype(object)
    out = np.empty(len(values), dtype=object)
    for i, v in enumerate(values):
        out[i] = str(int(v)) if isinstance(v, float) and v == int(v) else str(v)
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


def polygon_vertices(names: set[str]) -> int:
    """How many polygon vertices the columns ``px0 py0 px1 py1 …`` present give."""
    k = 0
    while f"px{k}" in names and f"py{k}" in names:
        k += 1
    return k


def infer_layout(names: set[str], source: str) -> str:
    """The box layout whose columns are present among ``names`` (``source`` names the table
    in errors).

    Examples
    --------
    >>> infer_layout({"frame", "cx", "cy", "cz", "length", "width", "height", "yaw"}, "t")
    'upright'
    """
    complete = [s for s in ("upright", "axis3", "rotated", "axis") if set(COLUMNS[s]) <= names]
    # A 3D layout's columns include those of a 2D one; the 3D one is meant.
    if "upright" in complete and "rotated" in complete:
        complete.remove("rotated")
    if "axis3" in complete:
        complete = [s for s in complete if s != "axis"]
    if polygon_vertices(names) >= 3:
        complete.append("polygon")
    if len(complete) == 1:
        return complete[0]
    if len(complete) > 1:
        raise InvalidTable(
            source,
            f"box columns of several layouts are present ({', '.join(complete)}); "
            "pass shape= to choose one",
        )
    # Name what is missing for the layout that is closest to complete.
    best = max(COLUMNS, key=lambda s: len(set(COLUMNS[s]) & names) / len(COLUMNS[s]))
    missing = [c for c in COLUMNS[best] if c not in names]
    if not set(COLUMNS[best]) & names:
        raise InvalidTable(
            source,
            "no box columns found; expected one of: "
            + "; ".join(f"{s}: {' '.join(box_columns(s))}" for s in SHAPES),
        )
    raise InvalidTable(
        source,
        f"missing column {missing[0]!r} (the columns present look like the {best!r} "
        f"layout: {' '.join(COLUMNS[best])})",
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
        A ``.csv``, ``.parquet`` (``.pq``) or ``.jsonl`` (``.ndjson``) file, a DataFrame, or a
        mapping of column name -> 1-D array. A :class:`Table` is returned as it is.
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
    cols, where, n = _load(source)
    name = where.source
    names = set(cols)
    required = ["frame", "label"] + (["score"] if role == "detections" else [])
    for col in required:
        if col not in names:
            extra = " (detections need a score per row)" if col == "score" else ""
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
            raise InvalidTable(
                name, f"missing column {col!r} (shape {layout!r} needs {' '.join(bcols)})"
            )

    frame = _ids(cols["frame"], "frame", where, text=False)
    label = _ids(cols["label"], "label", where, text=True)
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
    return Table(role, frame, label, score, ignore, boxes, extra, name)


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
        As for :func:`read_table` (CSV, Parquet, JSON Lines); a :class:`Points` is returned
        as it is. Other columns are allowed and left out.

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
    cols, where, n = _load(source)
    for col in ("frame", "x", "y"):
        if col not in cols:
            raise InvalidTable(where.source, f"missing column {col!r} (points need frame, x, y)")
    names = ("x", "y", "z") if "z" in cols else ("x", "y")
    xyz = np.empty((n, len(names)))
    for j, col in enumerate(names):
        xyz[:, j] = _numeric(cols[col], col, where)
    frame = _ids(cols["frame"], "frame", where, text=False)
    return Points(frame, xyz, where.source)
