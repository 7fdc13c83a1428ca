"""Property tests (hypothesis, on the shared adversarial strategies) of the lidar parts of
evaluation: BEV matching against shapely footprints, polygon centres against shapely
centroids, and the size error of a box against itself moved and turned (0 by definition)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from obbiou.errors import LikelyMistake
from obbiou.evaluation import evaluate
from obbiou.evaluation.matching import aligned_boxes, ground_centres
from obbiou.evaluation.tp_errors import size_error
from tests.strategies import FAR, FAR_SIZES, convex_polygon, rotated_box, upright_pair

shapely = pytest.importorskip("shapely")

UPRIGHT = ("cx", "cy", "cz", "length", "width", "height", "yaw")
SETTINGS = settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])


def footprint_polygon(b: np.ndarray):
    """The ground-plane rectangle of an upright box, corners written out here."""
    c, s = math.cos(b[6]), math.sin(b[6])
    pts = []
    for u, v in ((-1, -1), (1, -1), (1, 1), (-1, 1)):
        x, y = u * b[3] / 2, v * b[4] / 2
        pts.append((b[0] + x * c - y * s, b[1] + x * s + y * c))
    return shapely.Polygon(pts)


@SETTINGS
@given(upright_pair())
def test_bev_matching_uses_the_footprint_iou(pair):
    # reference: shapely's area IoU of the two footprints (rounding of the corners: 1e-9)
    a, b, kind = pair
    pa, pb = footprint_polygon(a), footprint_polygon(b)
    inter = pa.intersection(pb).area
    want = inter / (pa.area + pb.area - inter)
    truth = {"frame": [0], "label": ["car"], **{c: [a[j]] for j, c in enumerate(UPRIGHT)}}
    dets = {"frame": [0], "label": ["car"], "score": [1.0],
            **{c: [b[j]] for j, c in enumerate(UPRIGHT)}}  # fmt: skip
    if abs(b[6]) > 2 * math.pi or abs(a[6]) > 2 * math.pi:
        # the strategies turn boxes past 2*pi: a single such yaw rightly looks like degrees
        with pytest.warns(LikelyMistake, match="look like degrees"):
            r = evaluate(truth, dets, bev=True, iou=0.5).records
    else:
        r = evaluate(truth, dets, bev=True, iou=0.5).records
    assert r.det_best_same[0] == pytest.approx(want, abs=1e-9)
    if kind in ("identical", "stacked", "z_disjoint"):  # same footprint: exactly 1
        assert r.det_best_same[0] == 1.0 and r.det_outcome[0, 0] == 1


@SETTINGS
@given(st.one_of(convex_polygon(), convex_polygon(centre=FAR, sizes=FAR_SIZES)))
def test_polygon_centre_is_the_area_centroid(poly):
    # reference: shapely's centroid, taken in a local frame (the first vertex at 0)
    c = shapely.Polygon(poly - poly[0]).centroid
    got = ground_centres(poly[None], "polygon")[0]
    scale = max(1.0, float(np.abs(poly - poly[0]).max()))
    np.testing.assert_allclose(got, [c.x + poly[0, 0], c.y + poly[0, 1]], atol=1e-9 * scale)


@SETTINGS
@given(rotated_box(), st.floats(-10, 10), st.floats(-50, 50), st.floats(-50, 50))
def test_size_error_of_a_box_moved_and_turned_is_zero(box, turn, dx, dy):
    # by definition: after moving both to one centre and one heading the boxes coincide,
    # so the size error is exactly 0 (iou(x, x) == 1.0 exactly)
    moved = box + np.array([dx, dy, 0.0, 0.0, turn])
    swapped = np.array([box[0], box[1], box[3], box[2], box[4] + math.pi / 2])
    a = aligned_boxes(np.stack([box, box]), "rotated")
    b = aligned_boxes(np.stack([moved, swapped]), "rotated")
    if box[2] > 0 and box[3] > 0:
        assert size_error(a, b, "rotated").tolist() == [0.0, 0.0]
