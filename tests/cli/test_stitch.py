"""``obbiou stitch``: per-tile detections of large images merged into one set per image.

References: a hand-worked two-tile image (the seam rule and the duplicate worked out by
hand), and the library's own :func:`obbiou.tiles.merge` called image by image, whose
geometry tests/test_tiles.py checks against shapely.
"""

from __future__ import annotations

import io

import numpy as np
import pandas as pd
import pytest

from obbiou.frames import merge_frames
from obbiou.tables import read_table
from obbiou.tiles import grid, merge
from tests.cli.test_commands import run

# Invented: one harbour image 1800 x 1000 px in two 1000-px tiles overlapping by 200 px
# (tile 0: x 0..1000, tile 1: x 800..1800). A vessel at image x = 900 lies inside both
# tiles' cores (border 1000 / 64 = 15.6 px from the inner edges at 800 and 1000), so both
# tiles report it whole; the copies have IoU 1 and the better one (0.9) stays. A crane only
# tile 1 saw moves by +800 px. A second image has one vessel.
ROWS = [
    ("img-1", "vessel", 0.9, 0, 900.0, 500.0, 60.0, 20.0, 0.0),
    ("img-1", "vessel", 0.8, 1, 100.0, 500.0, 60.0, 20.0, 0.0),
    ("img-1", "crane", 0.7, 1, 500.0, 300.0, 40.0, 10.0, 0.3),
    ("img-2", "vessel", 0.6, 0, 100.0, 100.0, 30.0, 10.0, 0.0),
]
COLUMNS = ["frame", "label", "score", "tile", "cx", "cy", "width", "height", "angle"]


@pytest.fixture
def tiles_csv(tmp_path):
    path = tmp_path / "tiles.csv"
    pd.DataFrame(ROWS, columns=COLUMNS).to_csv(path, index=False)
    return path


def test_two_tile_image_hand_worked(tiles_csv, tmp_path):
    out = tmp_path / "image.csv"
    done = run("stitch", str(tiles_csv), "--image", "1800", "1000", "--size", "1000",
               "--overlap", "200", "--out", str(out), "-q")  # fmt: skip
    assert done.returncode == 0, done.stderr
    got = pd.read_csv(out)
    assert got["source_row"].tolist() == [0, 2, 3]  # the 0.8 copy of the vessel is gone
    assert got[["cx", "cy"]].to_numpy().tolist() == [[900, 500], [1300, 300], [100, 100]]
    assert got["score"].tolist() == [0.9, 0.7, 0.6]
    assert "tile" not in got.columns
    assert "kept 3 of 4 tile detections in 2 images" in done.stderr


def test_degrees_are_written_back_in_degrees(tiles_csv, tmp_path):
    table = pd.read_csv(tiles_csv)
    table["angle"] = np.rad2deg(table["angle"])
    path = tmp_path / "deg.csv"
    table.to_csv(path, index=False)
    done = run("stitch", str(path), "--image", "1800", "1000", "--size", "1000",
               "--overlap", "200", "--degrees", "-q")  # fmt: skip
    assert done.returncode == 0, done.stderr
    got = pd.read_csv(io.StringIO(done.stdout))
    np.testing.assert_allclose(got["angle"], [0.0, np.rad2deg(0.3), 0.0])


@pytest.mark.parametrize(
    ("extra", "message"),
    [
        (["--tile-column", "nope"], "no column 'nope'"),
        (["--size", "2000"], "size"),  # a tile larger than the image
    ],
)
def test_bad_options_are_one_line_and_exit_2(tiles_csv, extra, message):
    args = ["stitch", str(tiles_csv), "--image", "1800", "1000", "--size", "1000"]
    done = run(*args, "--overlap", "200", *extra)
    assert done.returncode == 2
    assert message in done.stderr and "Traceback" not in done.stderr


def test_a_tile_index_out_of_range_names_the_row(tmp_path):
    rows = [list(r) for r in ROWS]
    rows[2][3] = 7  # there are 2 tiles
    path = tmp_path / "bad.csv"
    pd.DataFrame(rows, columns=COLUMNS).to_csv(path, index=False)
    done = run("stitch", str(path), "--image", "1800", "1000", "--size", "1000",
               "--overlap", "200")  # fmt: skip
    assert done.returncode == 2
    assert "tile[2]: tile index 7 is not a whole number in [0, 2)" in done.stderr


@pytest.mark.parametrize("fuse", [False, True])
def test_merge_frames_is_merge_image_by_image(fuse):
    # reference: obbiou.tiles.merge on each image's rows (tests/test_tiles.py checks it
    # against shapely); invented detections scattered over three 2000 x 1500 images
    rng = np.random.default_rng(4)
    tiles = grid(2000, 1500, size=512, overlap=96)
    n = 600
    data = {
        "frame": rng.integers(0, 3, n),
        "label": rng.choice(["vessel", "container"], n),
        "score": rng.uniform(0.05, 1.0, n),
        "tile": rng.integers(0, len(tiles), n),
        "cx": rng.uniform(0, 512, n),
        "cy": rng.uniform(0, 512, n),
        "width": rng.uniform(10, 80, n),
        "height": rng.uniform(5, 30, n),
        "angle": rng.uniform(-1.5, 1.5, n),
    }
    table = read_table(data, role="detections")
    rows, boxes, scores = merge_frames(table, tiles, fuse=fuse)
    want_rows, want_scores = [], []
    order = list(dict.fromkeys(data["frame"].tolist()))  # frames in order of first appearance
    for f in order:
        sel = np.flatnonzero(data["frame"] == f)
        m = merge(table.boxes.data[sel], table.score[sel], data["tile"][sel], tiles,
                  labels=table.label[sel], fuse=fuse)  # fmt: skip
        want_rows.append(sel[m.rows])
        want_scores.append(m.scores)
    np.testing.assert_array_equal(rows, np.concatenate(want_rows))
    np.testing.assert_array_equal(scores, np.concatenate(want_scores))
    assert boxes.shape == (len(rows), 5)
