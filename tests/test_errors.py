"""obbiou.errors: the fields callers read instead of parsing messages, and the text users read."""

from __future__ import annotations

import pickle

import numpy as np
import pytest

from obbiou.errors import InvalidInput, InvalidTable, TaskFailed
from obbiou.shapes import check
from obbiou.tables import read_table


def test_gate_error_carries_row_column_and_reason():
    boxes = np.zeros((20, 5)) + [0, 0, 1, 1, 0]
    boxes[17, 2] = -3.0
    with pytest.raises(InvalidInput) as info:
        check(boxes, name="a")
    err = info.value
    assert str(err) == "a[17]: negative width -3.0"  # docs/design.md §4's example, hand-worked
    assert (err.argument, err.row, err.column, err.reason) == ("a", 17, 2, "negative width -3.0")
    assert isinstance(err, ValueError)


def test_polygon_column_is_the_position_in_the_flattened_row():
    poly = np.array([[[0, 0], [2, 0], [2, 2], [0, 2]]], dtype=float)
    poly[0, 2, 1] = np.nan  # vertex 2, y
    with pytest.raises(InvalidInput) as info:
        check(poly)
    assert info.value.column == 2 * 2 + 1 and info.value.row == 0


def test_table_error_names_source_line_and_column(tmp_path):
    path = tmp_path / "det.csv"
    path.write_text(
        "frame,label,score,cx,cy,width,height,angle\n0,a,0.9,1,1,2,1,0\n0,a,0.8,1,1,wide,1,0\n"
    )
    with pytest.raises(InvalidTable) as info:
        read_table(path, role="detections")
    err = info.value
    assert (err.line, err.row, err.column) == (3, 1, "width")  # header is line 1
    assert str(err) == f"{path}, line 3, column 'width': not a number: 'wide'"


def test_fields_survive_pickling():
    """Errors raised on a cluster worker come back pickled: fields and text must survive."""
    for err in (
        InvalidInput("b", "negative height -1.0", row=3, column=3),
        InvalidTable("t.parquet", "empty value", row=5, column="cy"),
        InvalidTable("<DataFrame>", "empty value", row=1, index="x", column="cy"),
        InvalidInput(
            "b", "a has 1, b has 2", message="elementwise=True needs ...: a has 1, b has 2"
        ),
    ):
        back = pickle.loads(pickle.dumps(err))
        assert type(back) is type(err) and str(back) == str(err)
        assert back.__dict__ == err.__dict__


def test_task_failed_is_not_bad_input():
    assert not issubclass(TaskFailed, ValueError)  # the CLI reports it with exit status 1
