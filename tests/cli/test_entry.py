"""How ``main`` reports what a command raises: bad input, a failed cluster task, a bug."""

from __future__ import annotations

import pytest

import obbiou.cli.demo
from obbiou.cli import main
from obbiou.errors import InvalidInput, InvalidTable, TaskFailed


def raising(exc):
    def run(args):
        raise exc

    return run


@pytest.mark.parametrize(
    ("exc", "status", "line"),
    [
        (InvalidInput("a", "negative width -3.0", row=17), 2, "a[17]: negative width -3.0"),
        (InvalidTable("t.csv", "empty value", line=3, column="cy"), 2, "t.csv, line 3"),
        (TaskFailed("frame bucket 2 of 4: task failed: OSError: gone"), 1, "bucket 2 of 4"),
        (FileNotFoundError(2, "No such file", "x.csv"), 2, "x.csv: file not found"),
    ],
)
def test_reported_as_one_line(monkeypatch, capsys, exc, status, line):
    monkeypatch.setattr(obbiou.cli.demo, "run", raising(exc))
    assert main(["demo"]) == status
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("obbiou demo: error: ") and line in err[0]


@pytest.mark.parametrize("exc", [RuntimeError("accounting identity broken"), ValueError("x")])
def test_anything_else_is_a_bug_and_propagates(monkeypatch, exc):
    """Not bad input: the traceback must reach the user (and the bug report)."""
    monkeypatch.setattr(obbiou.cli.demo, "run", raising(exc))
    with pytest.raises(type(exc)):
        main(["demo"])
