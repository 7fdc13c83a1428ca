"""The errors obbiou raises for bad input and for failed cluster tasks.

Bad input is an :class:`InvalidInput` (a ``ValueError``) that carries where the problem is
as fields, so that callers never parse the message: the argument, the row and the column,
and the reason. Its ``str()`` is the one line users read, e.g. ``a[17]: negative width
-3.0``. A bad table adds the file (or other source) and the line: :class:`InvalidTable`,
``det.csv, line 4, column 'width': not a number: 'wide'``.

Anything else that goes wrong inside obbiou is a bug and surfaces as its own exception
type, never as one of these; a task that failed on a cluster worker is :class:`TaskFailed`.

Examples
--------
>>> err = InvalidInput("a", "negative width -3.0", row=17)
>>> str(err), err.argument, err.row, err.column
('a[17]: negative width -3.0', 'a', 17, None)
>>> isinstance(err, ValueError)
True
>>> str(InvalidTable("det.csv", "not a number: 'wide'", line=4, column="width"))
"det.csv, line 4, column 'width': not a number: 'wide'"
>>> str(InvalidInput("min_iou", "expected a number in [0, 1], got 2.0"))
'min_iou: expected a number in [0, 1], got 2.0'
"""

from __future__ import annotations

from typing import Any

__all__ = ["InvalidInput", "InvalidTable", "TaskFailed", "LikelyMistake"]


class InvalidInput(ValueError):
    """Bad input: an argument (and, where it applies, a row and a column) and the reason.

    Parameters
    ----------
    argument : str
        The argument's name as the caller wrote it (``"a"``, ``"scores"``, ``"labels"``).
    reason : str
        What is wrong, in words, without the location.
    row : int, optional
        The first offending row (0-based, as numpy indexes it).
    column : str or int, optional
        The offending column: a name for tables, a position along the last axis for arrays
        (for polygons, ``2 * vertex + axis``: the position in the flattened row). ``str()``
        does not repeat it for arrays (the reason names the value in words);
        :class:`InvalidTable` shows it.
    message : str, optional
        The line to show when two arguments are at fault together and the usual
        ``argument[row]: reason`` form does not read well (``argument`` then names the one
        that does not fit the other).
    """

    def __init__(
        self,
        argument: str,
        reason: str,
        *,
        row: int | None = None,
        column: str | int | None = None,
        message: str | None = None,
    ) -> None:
        self.argument = argument
        self.reason = reason
        self.row = None if row is None else int(row)
        self.column = column
        self.message = message
        super().__init__(str(self))

    def _where(self) -> str:
        return self.argument if self.row is None else f"{self.argument}[{self.row}]"

    def __str__(self) -> str:
        if getattr(self, "message", None) is not None:
            return self.message
        return self._where() + ": " + self.reason

    def __reduce__(self):  # keep the fields across pickling (cluster tasks)
        return (_rebuild, (type(self), self.__dict__.copy()))


class InvalidTable(InvalidInput):
    """Bad input in a table: the source (file name or ``"truth"``/``"detections"`` for
    in-memory tables), the line of a file or the row of a table, the column, the reason.

    ``line`` counts as editors do (1-based, the header is line 1); ``row`` is the 0-based
    data row; ``index`` the row's label in a pandas DataFrame's index, shown instead of the
    row when given. Any may be None when the problem is not in one row (a missing column).

    Examples
    --------
    >>> err = InvalidTable("<DataFrame>", "empty value", row=1, index="b", column="cy")
    >>> str(err), err.row, err.column
    ("<DataFrame>, row 'b', column 'cy': empty value", 1, 'cy')
    """

    def __init__(
        self,
        source: str,
        reason: str,
        *,
        line: int | None = None,
        row: int | None = None,
        column: str | int | None = None,
        index: Any = None,
    ) -> None:
        self.source = str(source)
        self.line = None if line is None else int(line)
        self.index = index
        super().__init__(self.source, reason, row=row, column=column)

    def _where(self) -> str:
        where = self.source
        if self.line is not None:
            where += f", line {self.line}"
        elif self.index is not None:
            where += f", row {self.index!r}"
        elif self.row is not None:
            where += f", row {self.row}"
        if self.column is not None:
            where += f", column {self.column!r}"
        return where


class TaskFailed(RuntimeError):
    """A task of a distributed run failed for a reason other than bad input.

    The message names the task (partition, file) and the original error, whose traceback
    is chained as ``__cause__`` when it could be carried back from the worker.
    """


def _rebuild(cls: type, state: dict) -> InvalidInput:
    err = cls.__new__(cls)
    err.__dict__.update(state)
    ValueError.__init__(err, str(err))
    return err


class LikelyMistake(UserWarning):
    """Valid input that is probably not what was meant (no common frame id, labels that
    match only up to case, angles that look like degrees): a warning, never silence.

    Filter it like any warning, e.g. ``warnings.simplefilter("error", LikelyMistake)`` to
    make it an error in a pipeline.
    """
