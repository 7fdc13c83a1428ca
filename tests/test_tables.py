"""Table readers: CSV, Parquet, JSON Lines, DataFrame, mapping; every error names its place."""

import json

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from obbiou.errors import InvalidInput, InvalidTable
from obbiou.evaluation import evaluate, read_table

ROWS = [
    {
        "frame": 3,
        "label": "vessel",
        "score": 0.9,
        "cx": 10.0,
        "cy": 5.0,
        "width": 8.0,
        "height": 3.0,
        "angle": 0.25,
        "camera": "north",
    },
    {
        "frame": 3,
        "label": "crane",
        "score": 0.4,
        "cx": 30.0,
        "cy": 7.5,
        "width": 2.0,
        "height": 9.0,
        "angle": -1.0,
        "camera": "north",
    },
    {
        "frame": 8,
        "label": "vessel",
        "score": 0.7,
        "cx": 1.0,
        "cy": 2.0,
        "width": 4.0,
        "height": 1.0,
        "angle": 3.0,
        "camera": "south",
    },
]


def write(tmp_path, name, rows):
    path = tmp_path / name
    df = pd.DataFrame(rows)
    if name.endswith(".csv"):
        df.to_csv(path, index=False)
    elif name.endswith(".parquet"):
        df.to_parquet(path)
    else:
        path.write_text("".join(json.dumps(r) + "\n" for r in rows))
    return str(path)


def same(a, b):
    assert a.shape == b.shape
    assert list(a.frame) == list(b.frame) and list(a.label) == list(b.label)
    assert np.array_equal(a.boxes.data, b.boxes.data)
    assert np.array_equal(a.score, b.score)
    assert list(a.extra) == list(b.extra) == ["camera"]
    assert list(a.extra["camera"]) == list(b.extra["camera"])


@pytest.mark.parametrize("name", ["d.csv", "d.parquet", "d.jsonl"])
def test_files_dataframe_and_mapping_agree(tmp_path, name):
    from_file = read_table(write(tmp_path, name, ROWS), role="detections")
    from_df = read_table(pd.DataFrame(ROWS), role="detections")
    mapping = {k: [r[k] for r in ROWS] for k in ROWS[0]}
    from_map = read_table(mapping, role="detections")
    same(from_file, from_df)
    same(from_df, from_map)
    assert from_file.shape == "rotated"
    assert from_file.frame.dtype == np.int64


def test_layouts_are_inferred():
    base = {"frame": [0], "label": ["pallet"]}
    up = dict(
        base, cx=[1.0], cy=[2.0], cz=[0.5], length=[1.2], width=[0.8], height=[1.0], yaw=[0.1]
    )
    assert read_table(up, role="truth").shape == "upright"
    ax3 = dict(base, x_min=[0], y_min=[0], z_min=[0], x_max=[1], y_max=[1], z_max=[1])
    assert read_table(ax3, role="truth").shape == "axis3"
    quad = dict(base, px0=[0], py0=[0], px1=[2], py1=[0], px2=[2], py2=[1], px3=[0], py3=[1])
    t = read_table(quad, role="truth")
    assert t.shape == "polygon" and t.boxes.data.shape == (1, 4, 2)
    both = dict(
        base,
        x_min=[0],
        y_min=[0],
        x_max=[1],
        y_max=[1],
        cx=[1.0],
        cy=[1.0],
        width=[1.0],
        height=[1.0],
        angle=[0.0],
    )
    with pytest.raises(ValueError, match="several layouts.*shape="):
        read_table(both, role="truth")
    assert read_table(both, role="truth", shape="axis").shape == "axis"


def test_degrees_and_ids():
    t = read_table(
        {
            "frame": ["a", "b"],
            "label": [1, 2],
            "cx": [0, 0],
            "cy": [0, 0],
            "width": [1, 1],
            "height": [1, 1],
            "angle": [90, 180],
        },
        role="truth",
        degrees=True,
    )
    assert np.allclose(t.boxes.data[:, 4], [np.pi / 2, np.pi])
    assert list(t.frame) == ["a", "b"] and list(t.label) == ["1", "2"]


def test_ignore_column(tmp_path):
    rows = [dict(r, ignore=v) for r, v in zip(ROWS, ["true", "0", "False"], strict=True)]
    t = read_table(write(tmp_path, "t.csv", rows), role="truth")
    assert t.ignore.tolist() == [True, False, False]
    assert "score" in t.extra  # a score column on truth is passed through
    rows[1]["ignore"] = "maybe"
    with pytest.raises(ValueError, match=r"t\.csv, line 3, column 'ignore'"):
        read_table(write(tmp_path, "t.csv", rows), role="truth")


# -- malformed input: each message names the file, the line (or row) and the column -------


def test_missing_column(tmp_path):
    rows = [{k: v for k, v in r.items() if k != "score"} for r in ROWS]
    path = write(tmp_path, "det.csv", rows)
    with pytest.raises(ValueError, match=r"det\.csv: missing column 'score'"):
        read_table(path, role="detections")
    rows = [{k: v for k, v in r.items() if k != "angle"} for r in ROWS]
    with pytest.raises(ValueError, match=r"det\.csv: missing column 'angle'"):
        read_table(write(tmp_path, "det.csv", rows), role="detections")


def test_non_numeric_value_names_line_and_column(tmp_path):
    rows = [dict(r) for r in ROWS]
    rows[2]["width"] = "wide"
    path = write(tmp_path, "det.csv", rows)
    # header is line 1, so the third data row is line 4
    with pytest.raises(ValueError, match=r"det\.csv, line 4, column 'width': not a number: 'wide'"):
        read_table(path, role="detections")
    with pytest.raises(ValueError, match=r"det\.jsonl, line 3, column 'width'"):
        read_table(write(tmp_path, "det.jsonl", rows), role="detections")


def test_nan_and_empty_cells(tmp_path):
    path = tmp_path / "det.csv"
    path.write_text(
        "frame,label,score,cx,cy,width,height,angle\n0,ship,0.5,1,1,2,1,0\n0,ship,,1,1,2,1,0\n"
    )
    with pytest.raises(ValueError, match=r"det\.csv, line 3, column 'score': empty value"):
        read_table(str(path), role="detections")
    rows = [dict(r) for r in ROWS]
    rows[1]["cy"] = float("nan")
    with pytest.raises(ValueError, match=r"d\.parquet, row 1, column 'cy'"):
        read_table(write(tmp_path, "d.parquet", rows), role="detections")
    with pytest.raises(ValueError, match=r"<DataFrame>, row 1, column 'cy'"):
        read_table(pd.DataFrame(rows), role="detections")


def test_negative_size_names_line_and_column(tmp_path):
    rows = [dict(r) for r in ROWS]
    rows[1]["height"] = -2.0
    with pytest.raises(
        ValueError, match=r"det\.csv, line 3, column 'height': negative height -2\.0"
    ):
        read_table(write(tmp_path, "det.csv", rows), role="detections")


def test_bad_polygon_and_unknown_shape(tmp_path):
    rows = [
        {
            "frame": 0,
            "label": "a",
            "px0": 0,
            "py0": 0,
            "px1": 4,
            "py1": 0,
            "px2": 1,
            "py2": 1,
            "px3": 0,
            "py3": 4,
        }
    ]  # a dart: not convex
    with pytest.raises(ValueError, match=r"q\.csv, line 2, column .*not convex"):
        read_table(write(tmp_path, "q.csv", rows), role="truth")
    with pytest.raises(ValueError, match=r"unknown shape 'hexagon'"):
        read_table(write(tmp_path, "d.csv", ROWS), role="detections", shape="hexagon")
    with pytest.raises(ValueError, match=r"no box columns"):
        read_table({"frame": [0], "label": ["a"], "score": [1.0]}, role="detections")
    with pytest.raises(ValueError, match=r"unknown table format '\.txt'"):
        p = tmp_path / "d.txt"
        p.write_text("x")
        read_table(str(p), role="detections")


def test_bad_json_line(tmp_path):
    path = tmp_path / "d.jsonl"
    path.write_text(json.dumps(ROWS[0]) + "\n\n{not json\n")
    with pytest.raises(ValueError, match=r"d\.jsonl, line 3: not valid JSON"):
        read_table(str(path), role="detections")


def test_evaluate_reads_files(tmp_path):
    truth = [{k: v for k, v in r.items() if k != "score"} for r in ROWS]
    ev = evaluate(write(tmp_path, "t.parquet", truth), write(tmp_path, "d.jsonl", ROWS))
    assert ev.mean_ap() == 1.0
    assert ev.labels == ("crane", "vessel")


# -- the frame-id rule (obbiou.tables.frame_ids; README "Frame ids") ------------------------

BOX = {"label": "vessel", "cx": 10.0, "cy": 5.0, "width": 8.0, "height": 3.0, "angle": 0.25}


def frames_of(tmp_path, name, frames, role="detections"):
    rows = [dict(BOX, frame=f, **({"score": 0.9} if role == "detections" else {})) for f in frames]
    return read_table(write(tmp_path, name, rows), role=role)


def test_integers_and_integer_text_name_one_frame(tmp_path):
    # the rule: text that spells an integer (leading zeros, sign, spaces) is that integer
    t = read_table({"frame": [7, 8], **{k: [v, v] for k, v in BOX.items()}}, role="truth")
    d = frames_of(tmp_path, "d.jsonl", ["007", " +8 "])
    assert d.frame.tolist() == [7, 8] and d.frame.dtype == np.int64
    # hand-worked: identical boxes in the same frames match, AP 1
    with pytest.warns(UserWarning, match="share no frame id as written"):
        ev = evaluate(t, d)
    assert ev.counts("vessel")[:4] == (2, 0, 0, 0)
    # ids are written back as they were read
    assert d.to_frame()["frame"].tolist() == ["007", " +8 "]
    # a CSV cell has no type: "007" in a CSV is read as written, then by the rule
    c = frames_of(tmp_path, "d.csv", ["007", "cam1"])
    assert c.frame.tolist() == ["7", "cam1"]  # one name among them: all ids are text
    assert c.to_frame()["frame"].tolist() == ["007", "cam1"]


def test_names_compare_exactly_and_text_numbers_that_are_not_integers_are_names(tmp_path):
    d = frames_of(tmp_path, "d.csv", ["1e19", "2e19", "7.5", "Cam1", "cam1"])
    # hand-worked: five distinct names, none of them an integer
    assert d.frame.tolist() == ["1e19", "2e19", "7.5", "Cam1", "cam1"]


def test_float_ids_at_or_beyond_2_53_are_an_error(tmp_path):
    # 1e19 and 2e19 used to wrap to one int64 and cross-match; above 2**53 a float may not
    # be the id written (2**53 + 1 reads back as 2**53: exact integer arithmetic)
    assert float(2**53 + 1) == float(2**53)
    for frames in ([1e19, 2e19], [5.0, 2.0**53]):
        df = pd.DataFrame([dict(BOX, frame=f, score=0.9) for f in frames])
        with pytest.raises(InvalidTable, match=r"at or beyond 2\*\*53") as err:
            read_table(df, role="detections")
        assert err.value.column == "frame" and err.value.row == (0 if frames[0] > 1e18 else 1)
        path = tmp_path / "f.parquet"
        df.to_parquet(path)
        with pytest.raises(InvalidTable, match=r"f\.parquet, row \d, column 'frame'"):
            read_table(str(path), role="detections")
    # JSON Lines numbers 1e19 / 2e19 are floats too
    path = tmp_path / "f.jsonl"
    path.write_text("".join(json.dumps(dict(BOX, frame=f, score=0.9)) + "\n" for f in (1e19, 2e19)))
    with pytest.raises(InvalidTable, match=r"f\.jsonl, line 1, column 'frame'"):
        read_table(str(path), role="detections")


def test_whole_floats_are_integers_and_other_values_are_errors():
    base = {k: [v] for k, v in BOX.items()}
    assert read_table({"frame": [7.0], **base}, role="truth").frame.tolist() == [7]
    for bad, why in (
        (7.5, "a fraction"),
        (float("inf"), "not a frame id"),
        (True, "got bool"),
        ([1, 2], "expected one value, got a list"),
    ):
        frame = np.empty(1, dtype=object)
        frame[0] = bad
        with pytest.raises(InvalidTable, match=why) as err:
            read_table({"frame": frame, **base}, role="truth")
        assert err.value.column == "frame" and err.value.row == 0


def test_long_integer_ids_are_exact(tmp_path):
    # 30-digit ids (Python integers, exact): JSON Lines numbers and CSV text agree, and
    # ids that differ in the last digit stay two frames
    big = 10**29
    d = frames_of(tmp_path, "d.jsonl", [big, big + 1])
    t = frames_of(tmp_path, "t.csv", [big + 1, 7], role="truth")
    assert d.frame.tolist() == [str(big), str(big + 1)]
    assert t.frame.tolist() == [str(big + 1), "7"]
    ev = evaluate(t, d)
    # hand-worked: only frame big + 1 has both a truth and a detection
    assert ev.counts("vessel")[:4] == (1, 1, 0, 1)
    # unsigned 64-bit ids beyond int64 (Parquet uint64) are exact too
    df = pd.DataFrame([dict(BOX, frame=np.uint64(2**64 - 1), score=0.9)])
    df["frame"] = df["frame"].astype(np.uint64)
    assert read_table(df, role="detections").frame.tolist() == [str(2**64 - 1)]


def test_comparable_frame_ids_follow_the_rule():
    from obbiou.tables import comparable_frame_ids, frame_ids

    a, b = comparable_frame_ids([np.array([7, 10]), frame_ids(["0010", "x"])[0]])
    assert a.tolist() == ["7", "10"] and b.tolist() == ["10", "x"]
    a, b = comparable_frame_ids([np.array([7]), np.array([7.0])])
    assert a.tolist() == b.tolist() == [7]


# -- malformed files: every error names the file, the line and the column ----------------

HEADER = "frame,label,score,cx,cy,width,height,angle"


def test_duplicated_column_names_are_an_error(tmp_path):
    # a CSV header naming cx twice: pandas would rename the second "cx.1" and the first
    # would silently win
    path = tmp_path / "d.csv"
    path.write_text(HEADER + ",cx\n1,a,0.9,0,0,2,1,0.3,5\n")
    with pytest.raises(InvalidTable, match=r"columns 4 and 9") as err:
        read_table(str(path), role="detections")
    assert (err.value.source, err.value.line, err.value.column) == (str(path), 1, "cx")
    # a JSON Lines row giving a key twice: json.loads would keep the last
    path = tmp_path / "d.jsonl"
    path.write_text(json.dumps(ROWS[0]) + "\n" + json.dumps(ROWS[1])[:-1] + ', "cx": 5}\n')
    with pytest.raises(InvalidTable, match="key given twice") as err:
        read_table(str(path), role="detections")
    assert (err.value.line, err.value.column) == (2, "cx")
    # a DataFrame with two columns of one name
    df = pd.DataFrame(ROWS)
    df.columns = [c if c != "camera" else "cx" for c in df.columns]
    with pytest.raises(InvalidTable, match=r"<DataFrame>, column 'cx': column name given twice"):
        read_table(df, role="detections")


def test_suppress_refuses_duplicated_columns(tmp_path):
    from tests.cli.test_commands import one_line_error, run

    path = tmp_path / "d.csv"
    path.write_text(HEADER + ",cx\n1,a,0.9,0,0,2,1,0.3,5\n")
    out = tmp_path / "kept.csv"
    line = one_line_error(run("suppress", str(path), "--out", str(out), "-q"))
    assert "line 1, column 'cx': column name given twice" in line
    assert not out.exists()  # no file with a "cx.1" column


def test_long_numbers_are_errors_not_tracebacks(tmp_path):
    path = tmp_path / "d.jsonl"
    row = json.dumps(ROWS[0])
    path.write_text(row + "\n" + row.replace('"cx": 10.0', '"cx": 1' + "0" * 400) + "\n")
    with pytest.raises(InvalidTable, match="401 digits is beyond float64") as err:
        read_table(str(path), role="detections")
    assert (err.value.line, err.value.column) == (2, "cx")
    # a float of 400 digits reads as inf: said as such
    path.write_text(row.replace('"cx": 10.0', '"cx": 1' + "0" * 400 + ".5") + "\n")
    with pytest.raises(InvalidTable, match="beyond float64") as err:
        read_table(str(path), role="detections")
    # more digits than Python reads as an integer (4300)
    path.write_text(row.replace('"cx": 10.0', '"cx": 1' + "0" * 5000) + "\n")
    with pytest.raises(InvalidTable, match=r"d\.jsonl, line 1: cannot read a number"):
        read_table(str(path), role="detections")


def test_non_utf8_files_name_the_file_and_line(tmp_path):
    for name, text in (
        (
            "d.jsonl",
            json.dumps(ROWS[0])
            + "\n"
            + json.dumps(dict(ROWS[1], label="caf\xe9"), ensure_ascii=False),
        ),
        ("d.csv", HEADER + "\n3,vessel,0.9,1,1,2,1,0\n3,caf\xe9,0.9,1,1,2,1,0\n"),
    ):
        path = tmp_path / name
        path.write_bytes((text + "\n").encode("latin-1"))  # \xe9 is not UTF-8 on its own
        with pytest.raises(InvalidTable, match="not UTF-8 text") as err:
            read_table(str(path), role="detections")
        # hand-counted: the bad row is line 2 of the JSON Lines file, line 3 of the CSV
        assert (err.value.source, err.value.line) == (str(path), 2 if name == "d.jsonl" else 3)


def test_list_valued_cells_name_line_and_column(tmp_path):
    path = tmp_path / "d.jsonl"
    path.write_text(json.dumps(ROWS[0]) + "\n" + json.dumps(dict(ROWS[1], cx=[1, 2])) + "\n")
    with pytest.raises(InvalidTable, match="expected one value, got a list") as err:
        read_table(str(path), role="detections")
    assert (err.value.line, err.value.column) == (2, "cx")
    # every row a list of the same length: never read as a 2-D column
    path.write_text("".join(json.dumps(dict(r, cy=[1, 2])) + "\n" for r in ROWS))
    with pytest.raises(InvalidTable, match="expected one value") as err:
        read_table(str(path), role="detections")
    assert (err.value.line, err.value.column) == (1, "cy")


def test_csv_errors_after_a_quoted_newline_name_the_physical_line(tmp_path):
    path = tmp_path / "d.csv"
    path.write_text(HEADER + ',note\n1,a,0.9,0,0,2,1,0.3,"two\nlines"\n2,a,0.9,0,0,-2,1,0.3,x\n')
    with pytest.raises(InvalidTable, match="negative width") as err:
        read_table(str(path), role="detections")
    # hand-counted: header line 1, the record with the quoted newline lines 2-3, then line 4
    assert (err.value.line, err.value.column) == (4, "width")


# -- folders: the files in natural order of their names, as one table -------------------


def tie_folders(tmp_path, suffix):
    """One truth; two detections of equal score in one frame, in files f2 and f10: the one
    in f2 is the truth itself (IoU 1), the one in f10 lies elsewhere (IoU 0)."""
    truth, dets = tmp_path / "truth", tmp_path / "dets"
    truth.mkdir()
    dets.mkdir()
    box = dict(BOX, frame=5)
    write(truth, f"t1{suffix}", [box])
    write(dets, f"f2{suffix}", [dict(box, score=0.5)])
    write(dets, f"f10{suffix}", [dict(box, score=0.5, cx=500.0)])
    (dets / "_SUCCESS").write_text("")  # dataset writers leave such files: not a table
    return str(truth), str(dets)


@pytest.mark.parametrize("suffix", [".parquet", ".csv", ".jsonl"])
def test_folders_are_read_in_natural_order(tmp_path, suffix):
    truth, dets = tie_folders(tmp_path, suffix)
    d = read_table(dets, role="detections")
    assert d.boxes.data[:, 0].tolist() == [10.0, 500.0]  # f2 before f10
    # hand-worked: ranked by score, ties in input order: TP then FP, precision 1 at recall 1
    # (AP 1.0); in plain text order (f10 first) it would be FP, TP: AP 0.5
    ev = evaluate(truth, dets)
    assert ev.ap("vessel") == 1.0 and ev.counts("vessel")[:4] == (1, 1, 0, 0)


def test_folder_of_files_equals_the_rows_in_one_table(tmp_path):
    folder = tmp_path / "scan"
    (folder / "b").mkdir(parents=True)
    write(folder, "f10.csv", ROWS[2:])
    write(folder, "f9.jsonl", ROWS[1:2])
    write(folder / "b", "a.parquet", ROWS[:1])  # the folder b sorts before f9
    t = read_table(str(folder), role="detections")
    same(t, read_table(pd.DataFrame(ROWS), role="detections"))
    assert t.source == str(folder)


def test_folder_errors_name_the_file(tmp_path):
    folder = tmp_path / "d"
    folder.mkdir()
    with pytest.raises(InvalidTable, match="holds no table files"):
        read_table(str(folder), role="detections")
    write(folder, "a.csv", ROWS[:1])
    write(folder, "b.csv", [{k: v for k, v in ROWS[1].items() if k != "camera"}])
    with pytest.raises(InvalidTable, match="other columns") as err:
        read_table(str(folder), role="detections")
    assert err.value.source.endswith("b.csv")
    (folder / "b.csv").write_text(HEADER + ",camera\n3,a,0.9,1,1,-2,1,0,x\n")
    with pytest.raises(InvalidTable, match="negative width") as err:
        read_table(str(folder), role="detections")
    assert err.value.source.endswith("b.csv") and err.value.line == 2


def test_natural_key_orders_numbers_by_value():
    from obbiou.tables import natural_key

    names = ["f10", "f2", "f1", "f02", "g", "f", "10", "9"]
    # hand-sorted: digit runs by value (ties by text), digits before letters
    assert sorted(names, key=natural_key) == ["9", "10", "f", "f1", "f02", "f2", "f10", "g"]


@settings(max_examples=200, deadline=None)
@given(st.integers(-(10**40), 10**40), st.integers(0, 3), st.sampled_from(["", " ", "+"]))
def test_integer_text_is_its_integer_exactly(k, zeros, decoration):
    from obbiou.tables import comparable_frame_ids, frame_ids

    # the reference is Python's own integer arithmetic (exact at any length)
    sign = "-" if k < 0 else ("+" if decoration == "+" else "")
    text = f"{' ' if decoration == ' ' else ''}{sign}{'0' * zeros}{abs(k)}"
    ids, _ = frame_ids(np.array([text, "name"], dtype=object))
    assert ids.tolist() == [str(k), "name"]  # with a name among them, ids are text
    alone, _ = frame_ids(np.array([text], dtype=object))
    if -(2**63) <= k < 2**63:
        assert alone.dtype == np.int64 and int(alone[0]) == k
        (a,) = comparable_frame_ids([np.array([k], dtype=np.int64)])
        assert a.tolist() == alone.tolist()
    else:
        assert alone.tolist() == [str(k)]


def test_timestamps_are_names_in_one_unit():
    from obbiou.tables import comparable_frame_ids, frame_ids

    # the same instant in microseconds and in nanoseconds is one frame (ISO 8601 text)
    us = np.array(["2026-03-01T10:00:00.250"], dtype="datetime64[us]")
    ns = us.astype("datetime64[ns]")
    (a, _), (b, _) = frame_ids(us), frame_ids(ns)
    assert a.tolist() == b.tolist() == ["2026-03-01T10:00:00.250000000"]
    assert comparable_frame_ids([a, np.array([7])])[0].tolist() == a.tolist()
    with pytest.raises(InvalidInput, match="NaT"):
        frame_ids(np.array(["NaT"], dtype="datetime64[ns]"))


@settings(max_examples=200, deadline=None)
@given(st.lists(st.tuples(st.integers(-(10**18), 10**18), st.integers(0, 2)), min_size=1))
def test_columns_of_integer_text_read_exactly(items):
    from obbiou.tables import frame_ids

    # a CSV column of integer text of mixed lengths (read column-wise, vectorised);
    # reference: Python's int of each text
    texts = [("-" if k < 0 else "") + "0" * z + str(abs(k)) for k, z in items]
    ids, written = frame_ids(np.array(texts, dtype=object))
    assert ids.tolist() == [int(t) for t in texts]
    assert (written is None) == all(t == str(int(t)) for t in texts)


def test_blank_lines_carry_no_row_and_later_lines_keep_their_numbers(tmp_path):
    # Hand-worked file: header (line 1), a row (2), a blank line (3), spaces only (4), a row
    # with an empty frame (5), a trailing blank line (6). Blank lines are skipped like in
    # JSON Lines; the error names the physical line 5.
    path = tmp_path / "t.csv"
    path.write_text("frame,label,x_min,y_min,x_max,y_max\n7,buoy,0,0,1,1\n\n   \n,buoy,0,0,1,1\n\n")
    with pytest.raises(InvalidTable) as err:
        read_table(path, role="truth")
    assert err.value.line == 5 and err.value.column == "frame"
    path.write_text("frame,label,x_min,y_min,x_max,y_max\n7,buoy,0,0,1,1\n\n8,buoy,0,0,1,1\n\n")
    t = read_table(path, role="truth")
    assert t.frame.tolist() == [7, 8] and len(t) == 2


def test_columns_spelled_in_other_case_are_named_in_the_error():
    # names are matched exactly; the error says which column was probably meant
    table = {"FRAME": [1], "label": ["buoy"], "x_min": [0], "y_min": [0], "x_max": [1],
             "y_max": [1]}  # fmt: skip
    with pytest.raises(InvalidTable, match="the table has 'FRAME'"):
        read_table(table, role="truth")
    boxes = {"frame": [1], "label": ["buoy"], "CX": [0.0], "CY": [0.0], "Width": [1.0],
             "height": [1.0], "angle": [0.0]}  # fmt: skip
    with pytest.raises(InvalidTable, match="missing column 'cx'.*the table has 'CX'"):
        read_table(boxes, role="truth", shape="rotated")
    with pytest.raises(InvalidTable, match="missing column 'cx'.*'CX', 'CY', 'Width'"):
        read_table(boxes, role="truth")  # the layout guessed from the lower-case names
