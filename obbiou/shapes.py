"""Box layouts ("shapes"): their names, inference from array dimensions, and validation.

Every public function of obbiou takes boxes as an array whose last axis holds one box and a
``shape`` argument naming the layout (or ``None`` to infer it):

============  =====================================================  ==================
shape         columns / array form                                   inferred from
============  =====================================================  ==================
``axis``      ``x_min, y_min, x_max, y_max``                         ``(N, 4)``
``rotated``   ``cx, cy, width, height, angle``                       ``(N, 5)``
``polygon``   ``(N, K, 2)`` vertices of a convex polygon, K >= 3      ``(N, K, 2)``
``axis3``     ``x_min, y_min, z_min, x_max, y_max, z_max``           ``(N, 6)``
``upright``   ``cx, cy, cz, length, width, height, yaw``             ``(N, 7)``
============  =====================================================  ==================

Angles (``angle``, ``yaw``) are in radians, counter-clockwise from +x towards +y. ``width``
lies along the box's own x axis (the direction ``angle`` points to), ``height`` along its own
y axis; for ``upright`` boxes ``length`` lies along the heading, ``width`` across it, and
``cz`` is the centre of the box. A single box (1-D array, or one ``(K, 2)`` polygon with
``shape="polygon"``) is accepted wherever a batch is.

This module is the one place where input is read and checked; the numba kernels in
``obbiou._kernels`` trust what it hands them.
"""

from __future__ import annotations

import re
import sys
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

from obbiou.errors import InvalidInput

__all__ = [
    "SHAPES",
    "COLUMNS",
    "box_columns",
    "polygon_vertices",
    "layout_of_columns",
    "Boxes",
    "read_boxes",
    "check",
    "infer_shape",
    "same_length",
    "as_float_array",
    "read_labels",
    "read_scores",
]

SHAPES: tuple[str, ...] = ("axis", "rotated", "polygon", "axis3", "upright")

#: Column names of the flat layouts (the polygon layout has vertices instead).
COLUMNS: dict[str, tuple[str, ...]] = {
    "axis": ("x_min", "y_min", "x_max", "y_max"),
    "rotated": ("cx", "cy", "width", "height", "angle"),
    "axis3": ("x_min", "y_min", "z_min", "x_max", "y_max", "z_max"),
    "upright": ("cx", "cy", "cz", "length", "width", "height", "yaw"),
}
_BY_WIDTH = {len(cols): name for name, cols in COLUMNS.items()}


def box_columns(shape: str, vertices: int = 4) -> tuple[str, ...]:
    """Column names of the boxes of layout ``shape`` in a table (polygons: ``px0 py0 …``).

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
        reason = f"unknown shape {shape!r}; expected one of {', '.join(map(repr, SHAPES))}"
        raise InvalidInput("shape", reason, message=reason)
    return COLUMNS[shape]


def polygon_vertices(names: Any) -> int:
    """How many polygon vertices the columns ``px0 py0 px1 py1 …`` present give."""
    k = 0
    while f"px{k}" in names and f"py{k}" in names:
        k += 1
    return k


#: Every column name of a box layout (polygon vertices aside).
_BOX_NAMES = frozenset(c for cols in COLUMNS.values() for c in cols)
_VERTEX_NAME = re.compile(r"p[xy][0-9]+")


def layout_of_columns(names: Any, *, name: str = "boxes") -> str | None:
    """The layout whose box columns are all among the column ``names``; None when no name
    is a box column name of any layout (the columns are then read by position).

    A 3D layout's columns include a 2D one's (``axis3`` those of ``axis``): the 3D one is
    meant. Columns of two complete layouts, or of none complete while some box column
    names are present, raise :class:`~obbiou.errors.InvalidInput` naming what is missing.

    Examples
    --------
    >>> layout_of_columns(["frame", "cy", "cx", "angle", "height", "width"])
    'rotated'
    >>> layout_of_columns(["x", "y", "w", "h", "a"]) is None
    True
    >>> layout_of_columns(["cx", "cy", "w", "h", "angle"])
    Traceback (most recent call last):
    ...
    obbiou.errors.InvalidInput: boxes: missing column 'width' (the columns present look like
    the 'rotated' layout: cx cy width height angle)
    """
    names = {str(c) for c in names}
    complete = [s for s in ("upright", "axis3", "rotated", "axis") if set(COLUMNS[s]) <= names]
    if "upright" in complete and "rotated" in complete:
        complete.remove("rotated")
    if "axis3" in complete:
        complete = [s for s in complete if s != "axis"]
    if polygon_vertices(names) >= 3:
        complete.append("polygon")
    if len(complete) == 1:
        return complete[0]
    if len(complete) > 1:
        reason = (
            f"box columns of several layouts are present ({', '.join(complete)}); "
            "pass shape= to choose one"
        )
        raise InvalidInput(name, reason)
    if not names & _BOX_NAMES and not any(_VERTEX_NAME.fullmatch(c) for c in names):
        return None
    if not names & _BOX_NAMES:
        reason = "polygon columns need at least px0 py0 px1 py1 px2 py2"
        raise InvalidInput(name, reason)
    # Name what is missing for the layout that is closest to complete.
    best = max(COLUMNS, key=lambda s: len(set(COLUMNS[s]) & names) / len(COLUMNS[s]))
    missing = [c for c in COLUMNS[best] if c not in names]
    reason = (
        f"missing column {missing[0]!r} (the columns present look like the {best!r} "
        f"layout: {' '.join(COLUMNS[best])})"
    )
    raise InvalidInput(name, reason)


#: Which columns are sizes (must be >= 0), per flat layout.
_SIZE_COLUMNS = {
    "rotated": (2, 3),
    "upright": (3, 4, 5),
}
#: (min column, max column) pairs that must satisfy max >= min.
_EXTENT_COLUMNS = {
    "axis": ((0, 2), (1, 3)),
    "axis3": ((0, 3), (1, 4), (2, 5)),
}

_LAYOUT_HELP = (
    "expected (N, 4) axis, (N, 5) rotated, (N, K, 2) polygon, (N, 6) axis3 or (N, 7) upright"
)


@dataclass(frozen=True)
class Boxes:
    """Validated boxes: a float64 C-contiguous array, its layout and whether one box came in.

    ``data`` always has the batch axis: ``(N, C)`` for flat layouts, ``(N, K, 2)`` for
    polygons, so kernels see one form; ``single`` tells the caller to drop that axis from
    the result.
    """

    data: np.ndarray
    shape: str
    single: bool

    def __len__(self) -> int:
        return int(self.data.shape[0])

    @property
    def is_3d(self) -> bool:
        return self.shape in ("axis3", "upright")


def as_float_array(boxes: Any, name: str) -> np.ndarray:
    """``boxes`` as a float64 C-contiguous array, or :class:`~obbiou.errors.InvalidInput`.

    Examples
    --------
    >>> as_float_array([[1, 2], [3, 4]], "points").dtype
    dtype('float64')
    >>> as_float_array(["a", "b"], "points")
    Traceback (most recent call last):
    ...
    obbiou.errors.InvalidInput: points: expected numbers, got dtype <U1
    """
    try:
        arr = np.asarray(boxes)
    except Exception as exc:  # e.g. ragged nested lists
        raise InvalidInput(name, f"cannot read as an array of numbers ({exc})") from None
    if arr.dtype == object:
        try:
            arr = arr.astype(np.float64)
        except (TypeError, ValueError):
            raise InvalidInput(
                name, "cannot read as an array of numbers (ragged rows or non-numeric values)"
            ) from None
    if arr.dtype.kind == "c":
        raise InvalidInput(name, "complex numbers are not box coordinates")
    if arr.dtype.kind not in "fiub":
        raise InvalidInput(name, f"expected numbers, got dtype {arr.dtype}")
    return np.ascontiguousarray(arr, dtype=np.float64)


def infer_shape(dims: tuple[int, ...], shape: str | None = None, *, name: str = "boxes") -> str:
    """Name the layout of an array of dimensions ``dims``, or check the one given.

    Parameters
    ----------
    dims : tuple of int
        The array's dimensions (``arr.shape``).
    shape : str, optional
        A layout name; when given it is checked against ``dims``.
    name : str
        The argument name used in error messages.

    Returns
    -------
    str
        One of :data:`SHAPES`.

    Raises
    ------
    obbiou.errors.InvalidInput
        If ``dims`` match no layout, or do not fit the layout given.

    Examples
    --------
    >>> infer_shape((10, 5))
    'rotated'
    >>> infer_shape((7,))
    'upright'
    >>> infer_shape((3, 4, 2))
    'polygon'
    >>> infer_shape((4, 2), "polygon")
    'polygon'
    >>> infer_shape((3, 4), "rotated")
    Traceback (most recent call last):
    ...
    obbiou.errors.InvalidInput: boxes: shape='rotated' needs (N, 5) or (5,) boxes, got an
    array of shape (3, 4)
    """
    if shape is not None:
        if shape not in SHAPES:
            raise InvalidInput(
                name, f"unknown shape {shape!r}; expected one of {', '.join(map(repr, SHAPES))}"
            )
        if shape == "polygon":
            if len(dims) not in (2, 3) or dims[-1] != 2:
                raise InvalidInput(
                    name,
                    "shape='polygon' needs (N, K, 2) or (K, 2) vertices, "
                    f"got an array of shape {tuple(dims)}",
                )
            if dims[-2] < 3 and not (len(dims) == 3 and dims[0] == 0):
                raise InvalidInput(name, f"a polygon needs at least 3 vertices, got K={dims[-2]}")
            return shape
        width = len(COLUMNS[shape])
        if len(dims) not in (1, 2) or dims[-1] != width:
            raise InvalidInput(
                name,
                f"shape={shape!r} needs (N, {width}) or ({width},) boxes, "
                f"got an array of shape {tuple(dims)}",
            )
        return shape
    if len(dims) == 3 and dims[-1] == 2:
        return infer_shape(dims, "polygon", name=name)
    if len(dims) in (1, 2) and dims[-1] in _BY_WIDTH:
        return _BY_WIDTH[dims[-1]]
    hint = ""
    if len(dims) == 2 and dims[-1] == 2:
        hint = "; for a single polygon pass shape='polygon'"
    raise InvalidInput(
        name, f"array of shape {tuple(dims)} matches no box layout ({_LAYOUT_HELP}{hint})"
    )


def read_boxes(boxes: Any, shape: str | None = None, *, name: str = "boxes") -> Boxes:
    """Read and validate boxes; the common entry of every public function.

    Parameters
    ----------
    boxes : array_like
        Boxes in one of the layouts of :data:`SHAPES` (lists, numpy arrays of any real
        dtype, or objects with ``__array__``).
    shape : str, optional
        The layout name; inferred from the trailing dimensions when ``None``.
    name : str
        The argument name used in error messages.

    Returns
    -------
    Boxes
        float64 C-contiguous data with the batch axis, the layout name and ``single``.

    Raises
    ------
    obbiou.errors.InvalidInput
        For any input that :func:`check` rejects.

    Examples
    --------
    >>> b = read_boxes([0, 0, 2, 1, 0.5])
    >>> b.shape, b.single, b.data.shape
    ('rotated', True, (1, 5))
    """
    named = None if isinstance(boxes, np.ndarray) else _by_name(boxes, shape, name)
    if named is not None:
        boxes, shape, columns = named
        try:
            return read_boxes(boxes, shape, name=name)
        except InvalidInput as exc:  # name the table's column, not its position in the layout
            if isinstance(exc.column, int):
                exc.column = columns[exc.column]
            raise
    arr = as_float_array(boxes, name)
    if arr.ndim == 1 and arr.size == 0 and shape is None:
        raise InvalidInput(name, "an empty 1-D array has no layout; pass shape= or an (0, C) array")
    layout = infer_shape(arr.shape, shape, name=name)
    single = arr.ndim == (2 if layout == "polygon" else 1)
    if single:
        arr = arr[np.newaxis]
    if arr.size:
        _validate(arr, layout, name)
    return Boxes(arr, layout, single)


def _columns_of(boxes: Any) -> tuple[list[Any], Any] | None:
    """The column labels of a table-like input and how to get a column, or None.

    A pandas DataFrame (columns), a pandas Series (one box: its index) or a mapping of
    column -> values. pandas is looked up only when it is already imported: an object of it
    cannot exist otherwise.
    """
    pd = sys.modules.get("pandas")
    if pd is not None and isinstance(boxes, (pd.DataFrame, pd.Series)):
        labels = list(boxes.columns if isinstance(boxes, pd.DataFrame) else boxes.index)
        return labels, boxes.__getitem__
    if isinstance(boxes, Mapping):
        return list(boxes.keys()), boxes.__getitem__
    return None


def _by_name(boxes: Any, shape: str | None, name: str) -> tuple[np.ndarray, str, tuple] | None:
    """A table's box columns in layout order, read by their names; None to read by position.

    Columns are read by name when their names name a layout's columns (``cx cy width height
    angle``, ``px0 py0 …``: :func:`box_columns`); by position only when no column name is a
    box column name. The layout's columns, the layout and the column names are returned.
    """
    found = _columns_of(boxes)
    if found is None:
        return None
    labels, get = found
    by_text = {}
    for label in labels:
        if str(label) in by_text:
            raise InvalidInput(name, "column name given twice", column=str(label))
        by_text[str(label)] = label
    if shape is None:
        shape = layout_of_columns(by_text, name=name)
        positional = shape is None
    else:  # by position only when no name is a box column name of any layout
        positional = not set(by_text) & _BOX_NAMES and not any(
            _VERTEX_NAME.fullmatch(c) for c in by_text
        )
    if positional:
        if isinstance(boxes, Mapping):  # the columns in their order
            return _stack([get(k) for k in labels], labels, name), shape, tuple(labels)
        return None  # a DataFrame or Series: numpy reads it by position
    vertices = max(polygon_vertices(by_text), 3) if shape == "polygon" else 4
    columns = box_columns(shape, vertices)
    missing = [c for c in columns if c not in by_text]
    if missing:
        reason = f"missing column {missing[0]!r} (shape {shape!r} needs {' '.join(columns)})"
        raise InvalidInput(name, reason, column=missing[0])
    data = _stack([get(by_text[c]) for c in columns], columns, name)
    if shape == "polygon":
        data = data.reshape(*data.shape[:-1], vertices, 2)
    return data, shape, columns


def _stack(values: list[Any], columns: Any, name: str) -> np.ndarray:
    """Columns (or, for one box, values) side by side as float64: (N, C), or (C,)."""
    out = []
    scalars = all(np.ndim(v) == 0 for v in values)
    for column, v in zip(columns, values, strict=True):
        try:
            arr = as_float_array(v, name)
        except InvalidInput as exc:
            reason = f"column {str(column)!r}: {exc.reason}"
            raise InvalidInput(name, reason, column=str(column)) from None
        out.append(arr.reshape(-1) if scalars else arr)
    if not out:
        return np.zeros((0, 0))
    if scalars:
        return np.concatenate(out)  # one box: a row of scalars
    if any(a.ndim != 1 for a in out) or len({len(a) for a in out}) > 1:
        raise InvalidInput(name, "columns must be 1-D and of one length")
    return np.stack(out, axis=-1)


def check(boxes: Any, shape: str | None = None, *, name: str = "boxes") -> np.ndarray:
    """Validate boxes and return them as a float64 array (batch axis kept as given).

    The same validation runs inside every public function. It is vectorised and cheap.

    Parameters
    ----------
    boxes : array_like
        Boxes in one of the layouts of :data:`SHAPES`.
    shape : str, optional
        The layout name; inferred from the trailing dimensions when ``None``.
    name : str
        The argument name used in error messages.

    Returns
    -------
    numpy.ndarray
        The boxes as float64, with the same dimensions as the input.

    Raises
    ------
    obbiou.errors.InvalidInput
        Naming the argument, the first offending row and the reason: a NaN or infinite
        value, a negative size, an inverted extent (``x_max < x_min``), a polygon with fewer
        than 3 vertices or one that is not convex or crosses itself, or dimensions that
        match no layout.

    Examples
    --------
    >>> check([[0, 0, 4, 2, 0.0], [1, 1, -3.0, 2, 0.0]], name="a")
    Traceback (most recent call last):
    ...
    obbiou.errors.InvalidInput: a[1]: negative width -3.0
    >>> check([[0, 0, 1, 1], [2, 0, 1, 1]], name="gt")
    Traceback (most recent call last):
    ...
    obbiou.errors.InvalidInput: gt[1]: x_max 1.0 < x_min 2.0
    >>> check([[0, 0, float("nan"), 1, 0]])
    Traceback (most recent call last):
    ...
    obbiou.errors.InvalidInput: boxes[0]: width is NaN
    >>> check([[[0, 0], [2, 0], [1, 1], [2, 2], [0, 2]]])  # a notch: not convex
    Traceback (most recent call last):
    ...
    obbiou.errors.InvalidInput: boxes[0]: polygon is not convex (it turns the other way at vertex 2)
    >>> check([[0, 0, 1, 1]]).dtype
    dtype('float64')
    """
    b = read_boxes(boxes, shape, name=name)
    return b.data[0] if b.single else b.data


def same_length(a: Boxes, b: Boxes, *, names: tuple[str, str] = ("a", "b")) -> None:
    """Raise unless ``a`` and ``b`` have as many rows (for ``elementwise=True``).

    Examples
    --------
    >>> same_length(read_boxes([[0, 0, 1, 1]]), read_boxes([[0, 0, 1, 1]] * 2))
    Traceback (most recent call last):
    ...
    obbiou.errors.InvalidInput: elementwise=True needs as many rows in a as in b: a has 1, b has 2
    """
    if len(a) != len(b):
        reason = f"{names[0]} has {len(a)}, {names[1]} has {len(b)}"
        raise InvalidInput(
            names[1],
            reason,
            message=f"elementwise=True needs as many rows in {names[0]} as in {names[1]}: {reason}",
        )


def _first_bad(mask: np.ndarray) -> int:
    """Index of the first row where ``mask`` (rows × anything) holds a True."""
    rows = mask.reshape(mask.shape[0], -1).any(axis=1)
    return int(np.argmax(rows))


def _column_name(layout: str, col: int) -> str:
    if layout == "polygon":
        return ("x", "y")[col]
    return COLUMNS[layout][col]


def _validate(arr: np.ndarray, layout: str, name: str) -> None:
    # Each check finds its own first failing row; the earliest row wins (for one row, the
    # checks' order decides), so the message always names the first offending row.
    # The common case takes a few whole-array passes and builds no mask: a finite minimum
    # and maximum prove every value finite (numpy's min and max propagate NaN) and bound
    # them for the LIMIT test; the smallest size, taken once, settles the negative and the
    # tiny sizes. Measured on 10^6 rotated boxes: about 14 ms before (a sum, then the size
    # columns' minimum twice as a strided block, 5.2 ms each), 5.5 ms now.
    least, most = (float(arr.min()), float(arr.max())) if arr.size else (0.0, 0.0)
    all_finite = bool(np.isfinite(least) and np.isfinite(most))
    finite = np.ones(1, dtype=bool) if all_finite else np.isfinite(arr)
    failures = [None if all_finite else _non_finite(arr, finite, layout)]
    smallest = None  # the smallest size (NaN when a size is NaN)
    if layout in _SIZE_COLUMNS:
        smallest = _smallest_size(arr, layout)
        failures.append(_negative_size(arr, layout, smallest))
    elif layout in _EXTENT_COLUMNS:
        failures.extend(_inverted_extent(arr, layout, lo, hi) for lo, hi in _EXTENT_COLUMNS[layout])
    elif layout == "polygon":
        if not all_finite:
            rows_ok = finite.reshape(arr.shape[0], -1).all(axis=1)
            arr = np.where(rows_ok[:, None, None], arr, 0.0)
        with np.errstate(over="ignore", invalid="ignore"):  # huge ones fail _too_large below
            failures.extend(_bad_polygons(arr))
    clean = arr if all_finite else np.where(finite, arr, 0.0)
    if not all_finite:
        least, most = (float(clean.min()), float(clean.max())) if clean.size else (0.0, 0.0)
        smallest = _smallest_size(clean, layout) if smallest is not None else None
    # Coordinates and sizes within LIMIT cannot overflow an area, a volume or a squared
    # distance: the minimum and maximum spare the exact tests for nearly all inputs.
    if max(most, -least) > LIMIT:
        failures.append(_too_large(clean, layout))
        failures.append(_out_of_range(clean, layout))
    if clean.size:
        failures.append(_too_small(clean, layout, smallest))
    found = [f for f in failures if f is not None]
    if found:
        row, reason, column = min(found, key=lambda f: f[0])
        raise InvalidInput(name, reason, row=row, column=column)


#: The first failing row, the reason, and the column at fault (its position in the flattened
#: row; None when the whole box is at fault), or None when no row fails.
Failure = tuple[int, str, int | None] | None


def _non_finite(arr: np.ndarray, finite: np.ndarray, layout: str) -> Failure:
    if finite.all():
        return None
    row = _first_bad(~finite)
    flat = arr[row].reshape(-1, arr.shape[-1])
    vertex, col = (int(v) for v in np.argwhere(~np.isfinite(flat))[0])
    value = flat[vertex, col]
    what = "NaN" if np.isnan(value) else ("+inf" if value > 0 else "-inf")
    where = _column_name(layout, col)
    if layout == "polygon":
        where = f"vertex {vertex} {where}"
    return row, f"{where} is {what}", vertex * arr.shape[-1] + col


def _smallest_size(arr: np.ndarray, layout: str) -> float | None:
    """The smallest value of the size columns, NaN when one is NaN, None for no rows. One
    column at a time: measured on 10^6 rotated boxes, 2.9 ms against 5.2 ms for the minimum
    of the two columns as one strided block."""
    if arr.shape[0] == 0:
        return None
    low = np.float64(np.inf)
    for c in _SIZE_COLUMNS[layout]:
        low = np.minimum(low, arr[:, c].min())  # (np.minimum keeps a NaN; min() may not)
    return float(low)


def _negative_size(arr: np.ndarray, layout: str, smallest: float | None) -> Failure:
    cols = list(_SIZE_COLUMNS[layout])
    sizes = arr[:, cols[0] : cols[-1] + 1]  # the size columns are adjacent: a view, no copy
    if smallest is not None and smallest >= 0:  # the common case: no mask
        return None
    neg = sizes < 0  # NaN compares False here: the non-finite check reports those
    if not neg.any():
        return None
    row = _first_bad(neg)
    col = cols[0] + int(np.argmax(neg[row]))
    return row, f"negative {_column_name(layout, col)} {float(arr[row, col])!r}", col


def _too_large(arr: np.ndarray, layout: str) -> Failure:
    """Boxes whose area or volume (or whose extent) overflows float64: their IoU is undefined."""
    with np.errstate(over="ignore", invalid="ignore"):
        if layout == "polygon":
            span = arr.max(axis=1) - arr.min(axis=1)
            size = span[:, 0] * span[:, 1]
        elif layout in _SIZE_COLUMNS:
            size = np.prod(np.abs(arr[:, list(_SIZE_COLUMNS[layout])]), axis=1)
        else:
            size = np.prod(
                np.abs([arr[:, hi] - arr[:, lo] for lo, hi in _EXTENT_COLUMNS[layout]]), axis=0
            )
    bad = ~np.isfinite(size)
    if not bad.any():
        return None
    row = _first_bad(bad)
    what = "volume" if layout in ("axis3", "upright") else "area"
    return row, f"box too large: its {what} overflows float64", None


#: Largest magnitude of a coordinate or size. The kernels multiply up to three sizes
#: (volumes) and square sums of coordinate differences (DIoU) in float64: (2e100)**3 is far
#: from overflow, while sides near 1e154 overflowed a union and boxes 1.4e154 apart a
#: squared distance.
LIMIT = 1e100
#: Smallest non-zero size: a product of three stays a normal float64 (1e-300 > 2.2e-308);
#: sides near 1e-162 underflowed to an area of 0 and iou(x, x) was 0.
TINY = 1e-100
#: An upright box's height must be 0 or at least this share of its cz: its z interval is
#: cz -+ height / 2 in float64, and a smaller height rounds away (a height of 1e-18 at
#: cz = 5 gave an empty interval and iou(x, x) = 0).
RESOLUTION = 2.0**-40


def _out_of_range(arr: np.ndarray, layout: str) -> Failure:
    """The first coordinate or size beyond +-LIMIT."""
    bad = np.abs(arr) > LIMIT
    if not bad.any():
        return None
    row = _first_bad(bad)
    flat = arr[row].reshape(-1, arr.shape[-1])
    vertex, col = (int(v) for v in np.argwhere(np.abs(flat) > LIMIT)[0])
    where = _column_name(layout, col)
    if layout == "polygon":
        where = f"vertex {vertex} {where}"
    reason = (
        f"{where} {float(flat[vertex, col])!r} is beyond +-1e100, the largest coordinate or "
        "size obbiou computes with (it multiplies sizes and squares distances in float64); "
        "rescale the units"
    )
    return row, reason, vertex * arr.shape[-1] + col


def _too_small(arr: np.ndarray, layout: str, smallest: float | None) -> Failure:
    """The first non-zero size (or extent) below TINY (``smallest``: the smallest size of
    ``arr``, for the layouts with size columns)."""
    if layout in _SIZE_COLUMNS:
        cols = list(_SIZE_COLUMNS[layout])
        sizes = arr[:, cols[0] : cols[-1] + 1]
        lost: Failure = None
        if layout == "upright" and not smallest >= RESOLUTION * float(np.abs(arr[:, 2]).max()):
            height, cz = arr[:, 5], np.abs(arr[:, 2])
            bad_h = (height > 0.0) & (height < RESOLUTION * cz)
            if bad_h.any():
                row = _first_bad(bad_h)
                h, z = float(height[row]), float(arr[row, 2])
                reason = (
                    f"height {h!r} is lost in rounding at cz {z!r}"
                    " (below 2**-40 of it: the z interval cz -+ height / 2 would be empty); "
                    "rescale the units or move the origin"
                )
                lost = (row, reason, 5)
        if smallest >= TINY:
            return lost  # the common case
        bad = (sizes > 0.0) & (sizes < TINY)
        if not bad.any():
            return lost
        row = _first_bad(bad)
        k = int(np.argmax(bad[row]))
        tiny = (row, _tiny_reason(_column_name(layout, cols[k]), float(sizes[row, k])), cols[k])
        return tiny if lost is None or tiny[0] <= lost[0] else lost
    if layout == "polygon":
        x, y = arr[:, :, 0], arr[:, :, 1]
        span = np.maximum(
            _by_row(np.maximum, x) - _by_row(np.minimum, x),
            _by_row(np.maximum, y) - _by_row(np.minimum, y),
        )
    else:
        with np.errstate(over="ignore", invalid="ignore"):
            # the common case, every extent at least TINY, one column pair at a time:
            # measured on 10^6 axis boxes, the whole gate took 55 ms without it, 8 ms with
            # it (axis3: 77 and 15 ms)
            if all(
                float((arr[:, hi] - arr[:, lo]).min()) >= TINY for lo, hi in _EXTENT_COLUMNS[layout]
            ):
                return None
            span = np.stack([arr[:, hi] - arr[:, lo] for lo, hi in _EXTENT_COLUMNS[layout]], 1)
        span = np.where(span > 0.0, span, np.inf).min(axis=1)
        span = np.where(np.isinf(span), 0.0, span)
    bad = (span > 0.0) & (span < TINY)
    if not bad.any():
        return None
    row = _first_bad(bad)
    return row, _tiny_reason("extent", float(span[row])), None


def _tiny_reason(what: str, value: float) -> str:
    return (
        f"{what} {value!r} is below 1e-100, the smallest non-zero size obbiou computes with "
        "(products of sizes would underflow); use 0 for a degenerate box or rescale the units"
    )


def _inverted_extent(arr: np.ndarray, layout: str, lo: int, hi: int) -> Failure:
    bad = arr[:, hi] < arr[:, lo]
    if not bad.any():
        return None
    row = _first_bad(bad)
    cols = COLUMNS[layout]
    reason = f"{cols[hi]} {float(arr[row, hi])!r} < {cols[lo]} {float(arr[row, lo])!r}"
    return row, reason, hi


def _by_row(op: np.ufunc, m: np.ndarray) -> np.ndarray:
    """``op`` (np.maximum or np.minimum) over each row of ``m`` (N, K), column by column:
    numpy's ``max(axis=1)`` over short rows took 45 ms for 10^6 rows of 4, this 12 ms."""
    out = m[:, 0].copy()
    for k in range(1, m.shape[1]):
        op(out, m[:, k], out=out)
    return out


def _bad_polygons(poly: np.ndarray) -> list[Failure]:
    """Reject polygons that are not convex or wind around more than once.

    Zero-length edges and collinear vertices are allowed (a degenerate polygon has zero area
    and overlaps nothing). A wrong-way turn is tolerated only within 1e-9 of the polygon's
    own size (plus rounding of the cross products, again at its own size), never at the
    size of its coordinates: a 1 mm polygon near x = 1e7 with a dent of 1e-5 of its size
    is rejected (it was accepted when the tolerance grew with the coordinates, and its IoU
    was then off by 4e-6). Corners of rectangles computed at map offsets still pass: their
    rounding is far below 1e-9 of any rectangle that float64 resolves there.
    """
    # Work relative to each polygon's first vertex: exact enough, and tolerances then scale
    # with the polygon's own size rather than with its distance from the origin. x and y
    # as (N, K) arrays of their own: numpy is slow on the interleaved axis of length 2 and on
    # reductions along a short axis (measured on 10^6 quadrilaterals, the whole gate: 0.81 s
    # before, 0.43 s now). Every value comes from the same operations as before, bit for bit
    # (checked against the former code on 400 000 random, reversed, shuffled, starred,
    # flat and collapsed polygons: the same rows fail with the same reasons).
    x = poly[:, :, 0] - poly[:, :1, 0]
    y = poly[:, :, 1] - poly[:, :1, 1]
    ex = np.roll(x, -1, axis=1) - x  # e_k = v_{k+1} - v_k
    ey = np.roll(y, -1, axis=1) - y
    nx = np.roll(ex, -1, axis=1)  # e_{k+1}
    ny = np.roll(ey, -1, axis=1)
    cross = ex * ny - ey * nx
    dot = 0.0 + ex * nx + ey * ny  # as numpy's sum: from +0, so a zero-length edge gives +0
    len_e = np.hypot(ex, ey)
    len_n = np.roll(len_e, -1, axis=1)
    scale = _by_row(np.maximum, np.maximum(np.abs(x), np.abs(y)))[:, None]  # its own size
    eps = np.finfo(np.float64).eps
    tol = 1e-9 * len_e * len_n + 16 * eps * scale * (len_e + len_n)
    # Orientation of each polygon from its signed area; degenerate ones (area 0) have no
    # turn that counts as wrong.
    area2 = (x * np.roll(y, -1, axis=1) - np.roll(x, -1, axis=1) * y).sum(axis=1)
    sign = np.sign(area2)
    # Lobes of a symmetric bow-tie cancel to area 0: orient such rows by their first turn
    # that is clearly not straight, so turns the other way still count as wrong.
    significant = np.abs(cross) > tol
    first_turn = np.take_along_axis(cross, np.argmax(significant, axis=1)[:, None], axis=1)[:, 0]
    sign = np.where(sign == 0, np.sign(first_turn) * significant.any(axis=1), sign)[:, None]
    wrong = (cross * sign < -tol) & (sign != 0)
    failures: list[Failure] = []
    if wrong.any():
        row = _first_bad(wrong)
        vertex = (int(np.argmax(wrong[row])) + 1) % poly.shape[1]
        reason = f"polygon is not convex (it turns the other way at vertex {vertex})"
        failures.append((row, reason, None))
    # A convex-turning polygon that is simple turns through exactly 2*pi in total; a star
    # (pentagram) turns through 4*pi and crosses itself.
    turning = np.abs(np.arctan2(cross, dot).sum(axis=1))
    crossing = turning > 3 * np.pi
    if crossing.any():
        row = _first_bad(crossing)
        winds = int(round(turning[row] / (2 * np.pi)))
        failures.append((row, f"polygon crosses itself (it winds around {winds} times)", None))
    return failures


def read_scores(scores: Any, n: int, single: bool, *, positive: bool = False) -> np.ndarray:
    """One finite float64 score per box (``positive``: each > 0), or an InvalidInput.

    Examples
    --------
    >>> read_scores([0.9, 0.5], 2, False)
    array([0.9, 0.5])
    >>> read_scores([0.9, float("nan")], 2, False)
    Traceback (most recent call last):
    ...
    obbiou.errors.InvalidInput: scores[1]: score is nan, expected a finite number
    """
    try:
        s = np.asarray(scores, dtype=np.float64)
    except (TypeError, ValueError):
        raise InvalidInput("scores", "cannot read as an array of numbers") from None
    if s.ndim == 0 and single:
        s = s.reshape(1)
    if s.ndim != 1:
        raise InvalidInput("scores", f"expected one score per box (1-D), got shape {s.shape}")
    if s.shape[0] != n:
        raise InvalidInput("scores", f"{s.shape[0]} scores for {n} boxes")
    bad = ~np.isfinite(s)
    if bad.any():
        row = int(np.argmax(bad))
        raise InvalidInput(
            "scores", f"score is {float(s[row])!r}, expected a finite number", row=row
        )
    if positive and s.size and not s.min() > 0:
        row = int(np.argmax(s <= 0))
        raise InvalidInput(
            "scores",
            f"score {float(s[row])!r}: fusion weighs boxes by score and needs scores > 0",
            row=row,
        )
    return np.ascontiguousarray(s)


def read_labels(labels: Any, n: int) -> tuple[np.ndarray, np.ndarray]:
    """(labels as an array, int64 code per box) with codes equal exactly for equal labels,
    or an InvalidInput naming the first bad label.

    Examples
    --------
    >>> read_labels(["vessel", "crane", "vessel"], 3)[1]
    array([1, 0, 1])
    >>> read_labels([1.0, float("nan")], 2)
    Traceback (most recent call last):
    ...
    obbiou.errors.InvalidInput: labels[1]: nan is not a valid label
    """
    arr = np.asarray(labels)
    if arr.ndim != 1:
        raise InvalidInput("labels", f"expected one label per box (1-D), got shape {arr.shape}")
    if arr.shape[0] != n:
        raise InvalidInput("labels", f"{arr.shape[0]} labels for {n} boxes")
    if arr.dtype.kind == "f" and arr.size:
        bad = ~np.isfinite(arr)
        if bad.any():
            row = int(np.argmax(bad))
            raise InvalidInput("labels", f"{float(arr[row])!r} is not a valid label", row=row)
    if arr.dtype == object:
        for row, v in enumerate(arr):
            if v is None or (isinstance(v, float) and not np.isfinite(v)):
                raise InvalidInput("labels", f"{v!r} is not a valid label", row=row)
    try:
        _, codes = np.unique(arr, return_inverse=True)
    except TypeError:
        raise InvalidInput("labels", "labels of mixed types cannot be compared") from None
    return arr, np.ascontiguousarray(codes.reshape(-1), dtype=np.int64)
