"""Two invented, seeded demo scenarios and a simulated detector with a known error model.

Everything in this module is **invented data**, generated from a seed. The scenes are laid out
the way such scenes usually are (containers in rows along a quay, pallets in rack rows), with
plausible object sizes, but they are not measurements of any real place, and the simulated
detector is not any real model.

* :func:`harbour_survey` — drone orthomosaics of a port, in the mosaic's **pixel frame**
  (x to the right, **y down**, 0.15 m per pixel). Labels ``vessel``, ``container`` and
  ``crane`` as ``rotated`` boxes ``cx, cy, width, height, angle``: vessels moored along the
  quay, containers in stacked rows in the yard, ship-to-shore cranes on the quay edge.
* :func:`warehouse_lidar` — an inventory robot's lidar sweeps of a warehouse, each in the
  robot's **sensor frame** (metres, x ahead, y to the left, **z up**, floor at z = 0).
  Labels ``pallet``, ``forklift`` and ``person`` as ``upright`` boxes
  ``cx, cy, cz, length, width, height, yaw``: pallets in rack rows on several beam levels,
  forklifts in the aisles, people walking.
* :func:`simulate_detector` — a detector whose errors are drawn from a stated model:
  position, size and angle noise, misses, false alarms, duplicates, label confusion, and a
  score that tracks the quality of each box. Two versions, ``"baseline"`` and
  ``"improved"`` (see :data:`DETECTORS`), so that comparing them means something.

Angles are in radians, counter-clockwise from +x towards +y (in the harbour's y-down pixel
frame the same number turns a box clockwise on screen). Truth tables have the columns
``frame, label, <box columns>, ignore``; detection tables ``frame, label, score,
<box columns>`` (docs/design.md §6). A truth is marked ``ignore`` when it cannot be judged fairly:
cut by the mosaic's edge (harbour) or too far from the sensor for a reliable annotation
(warehouse).

Examples
--------
>>> harbour = harbour_survey(frames=2, seed=1)
>>> harbour.shape, list(harbour.truth.columns)
('rotated', ['frame', 'label', 'cx', 'cy', 'width', 'height', 'angle', 'ignore'])
>>> sorted(harbour.truth.label.unique())
['container', 'crane', 'vessel']
>>> dets = simulate_detector(harbour, "baseline", seed=1)
>>> list(dets.columns)
['frame', 'label', 'score', 'cx', 'cy', 'width', 'height', 'angle']
>>> bool(dets.score.between(0, 1).all())
True
>>> harbour_survey(frames=2, seed=1).truth.equals(harbour.truth)  # seeded: same data
True
>>> warehouse_lidar(frames=0).truth.shape
(0, 10)
"""

from __future__ import annotations

from dataclasses import dataclass, field
from dataclasses import replace as dataclass_replace
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd

from obbiou.errors import InvalidInput
from obbiou.shapes import COLUMNS

__all__ = [
    "Scenario",
    "DetectorModel",
    "DETECTORS",
    "INVENTED",
    "harbour_survey",
    "warehouse_lidar",
    "warehouse_returns",
    "simulate_detector",
    "detect_in_tiles",
    "visible_box",
    "scenarios",
]

#: The note every output of the demo carries.
INVENTED = "invented data: generated from a seed, not a measurement of any real scene or detector"

#: Ground sampling distance of the invented harbour mosaics (metres per pixel).
HARBOUR_METRES_PER_PIXEL = 0.15
#: Side of one harbour frame, an orthomosaic, in pixels (2048 px = 307 m).
HARBOUR_TILE = 2048
#: The simulated detector's input on a harbour mosaic (larger than it): square tiles
#: of this side in pixels, overlapping by :data:`HARBOUR_OVERLAP`, from
#: :func:`obbiou.tiles.grid`: 2 x 2 per 2048-pixel frame, larger than the longest vessel
#: (150 m = 1000 px). Invented settings.
HARBOUR_DETECTOR_TILE = 1152
HARBOUR_OVERLAP = 256
#: Beyond this range (metres) a warehouse object is marked ``ignore`` (too few lidar returns).
WAREHOUSE_IGNORE_RANGE = 24.0
#: Beyond this range (metres) a warehouse object is not in the sweep at all.
WAREHOUSE_MAX_RANGE = 30.0


@dataclass(frozen=True)
class Scenario:
    """One invented scenario: its ground truth and how to read its coordinates.

    Attributes
    ----------
    name : str
        ``"harbour"`` or ``"warehouse"``.
    title : str
        A human title, e.g. ``"Harbour survey (invented)"``.
    shape : str
        The box layout of the tables: ``"rotated"`` or ``"upright"``.
    units : str
        What the coordinates mean.
    truth : pandas.DataFrame
        ``frame, label, <box columns>, ignore``, one row per object.
    extent : tuple of float
        ``(x_min, y_min, x_max, y_max)`` of one frame, for drawing.
    y_down : bool
        True when the frame is an image frame (y pointing down).
    labels : tuple of str
        The object labels.
    """

    name: str
    title: str
    shape: str
    units: str
    truth: pd.DataFrame
    extent: tuple[float, float, float, float]
    y_down: bool
    labels: tuple[str, ...]
    #: Scenario-specific extras for drawing (e.g. the quay line of each harbour mosaic).
    layout: dict[str, Any] = field(default_factory=dict, compare=False, repr=False)

    @property
    def frames(self) -> list[str]:
        """Frame names in order (also frames that happen to hold no object)."""
        return list(self.layout.get("frames", pd.unique(self.truth["frame"])))

    @property
    def box_columns(self) -> tuple[str, ...]:
        return COLUMNS[self.shape]

    def write(self, out_dir: Any, tables: dict[str, pd.DataFrame], *, fmt: str = "csv") -> dict:
        """Write ``truth`` and the given detection tables as ``<key>.<fmt>`` files.

        Parameters
        ----------
        out_dir : path-like
            Folder to write into (created if missing).
        tables : dict of str to DataFrame
            Detection tables by name, e.g. ``{"baseline": df}`` (written as
            ``baseline.csv``).
        fmt : {"csv", "parquet", "jsonl"}
            File format.

        Returns
        -------
        dict of str to Path
            ``{"truth": path, "<name>": path, ...}``.
        """
        from obbiou.tables import write_table

        out = Path(out_dir)
        out.mkdir(parents=True, exist_ok=True)
        paths = {}
        for key, table in {"truth": self.truth, **tables}.items():
            paths[key] = write_table(table, out / f"{key}.{fmt}")
        return paths


# --------------------------------------------------------------------------------------------
# Harbour survey (rotated boxes, pixel frame, y down)
# --------------------------------------------------------------------------------------------

# (type, length range m, beam range m, weight): vessels seen from above, invented mix.
_VESSELS = (
    ("tug", (24.0, 34.0), (8.5, 11.5), 0.35),
    ("barge", (40.0, 70.0), (10.0, 15.0), 0.25),
    ("feeder", (90.0, 150.0), (15.0, 23.0), 0.40),
)
_CONTAINER_WIDTH = 2.44  # ISO container width, metres
_CONTAINER_LENGTHS = (6.06, 12.19)  # 20 ft and 40 ft


def _visible_fraction(boxes: np.ndarray, extent: tuple[float, float, float, float]) -> np.ndarray:
    """Share of each rotated box inside the frame, estimated on a 7 × 7 grid of points."""
    if len(boxes) == 0:
        return np.zeros(0)
    t = (np.arange(7) + 0.5) / 7 - 0.5
    u, v = np.meshgrid(t, t)
    u, v = u.ravel()[None, :], v.ravel()[None, :]
    cx, cy, w, h, a = (boxes[:, i : i + 1] for i in range(5))
    x = cx + u * w * np.cos(a) - v * h * np.sin(a)
    y = cy + u * w * np.sin(a) + v * h * np.cos(a)
    x0, y0, x1, y1 = extent
    inside = (x >= x0) & (x <= x1) & (y >= y0) & (y <= y1)
    return inside.mean(axis=1)


def _harbour_tile(rng: np.random.Generator) -> tuple[list[tuple[str, list[float]]], dict]:
    """One invented mosaic: objects in metres about its centre, and the quay line."""
    m = HARBOUR_METRES_PER_PIXEL
    half = HARBOUR_TILE * m / 2  # half the mosaic's side in metres
    theta = rng.uniform(-np.pi / 2, np.pi / 2)  # direction of the quay edge
    along = np.array([np.cos(theta), np.sin(theta)])
    across = np.array([-np.sin(theta), np.cos(theta)])  # points from the quay to the water
    offset = rng.uniform(-0.35, 0.35) * half  # the quay edge passes this far from the centre
    objects: list[tuple[str, list[float]]] = []

    def place(u: float, v: float) -> np.ndarray:
        return (offset * across) + u * along + v * across

    # Vessels moored along the quay (water side), end to end with gaps.
    u = rng.uniform(-1.6, -0.8) * half
    while u < 1.6 * half:
        kind = rng.choice(len(_VESSELS), p=[v[3] for v in _VESSELS])
        _, lr, br, _ = _VESSELS[kind]
        length, beam = rng.uniform(*lr), rng.uniform(*br)
        if rng.random() < 0.75:  # a berth may be empty
            c = place(u + length / 2, 1.5 + beam / 2 + rng.uniform(0, 1.0))
            objects.append(("vessel", [*c, length, beam, theta + rng.normal(0, 0.015)]))
            if kind == 2 and rng.random() < 0.4:  # a tug alongside a feeder
                tl, tb = rng.uniform(24, 34), rng.uniform(8.5, 11.5)
                c2 = place(u + length * rng.uniform(0.3, 0.7), 3.0 + beam + tb / 2)
                objects.append(("vessel", [*c2, tl, tb, theta + rng.normal(0, 0.05)]))
        u += length + rng.uniform(8, 30)
    # A vessel or two under way further out, any heading.
    for _ in range(rng.integers(0, 3)):
        _, lr, br, _ = _VESSELS[rng.integers(0, 2)]
        c = place(rng.uniform(-0.9, 0.9) * half, rng.uniform(60, 140))
        objects.append(
            ("vessel", [*c, rng.uniform(*lr), rng.uniform(*br), rng.uniform(-np.pi, np.pi)])
        )
    # Ship-to-shore cranes on the quay edge: long axis across the quay (boom over the water).
    u = rng.uniform(-1.2, -0.6) * half
    while u < 1.2 * half:
        if rng.random() < 0.6:
            reach, gauge = rng.uniform(55, 75), rng.uniform(24, 30)
            c = place(u, rng.uniform(-6, 6))
            objects.append(("crane", [*c, reach, gauge, theta + np.pi / 2 + rng.normal(0, 0.01)]))
        u += rng.uniform(40, 70)
    # Container yard behind the apron: blocks of rows along the quay, end to end.
    v0 = -rng.uniform(35, 45)  # apron width
    v = v0
    while v > -2.2 * half:
        rows = int(rng.integers(4, 9))
        clen = _CONTAINER_LENGTHS[int(rng.random() < 0.7)]
        per_row = int(rng.integers(6, 15))
        row_gap = rng.uniform(0.3, 1.2)
        u = rng.uniform(-1.6, -1.0) * half
        while u < 1.6 * half:
            for r in range(rows):
                vv = v - r * (_CONTAINER_WIDTH + row_gap) - _CONTAINER_WIDTH / 2
                for k in range(per_row):
                    if rng.random() < 0.15:  # an empty slot
                        continue
                    uu = u + k * (clen + 0.4) + clen / 2
                    c = place(uu + rng.normal(0, 0.08), vv + rng.normal(0, 0.08))
                    w = clen + rng.normal(0, 0.02)
                    h = _CONTAINER_WIDTH + rng.normal(0, 0.02)
                    objects.append(("container", [*c, w, h, theta + rng.normal(0, 0.006)]))
            u += per_row * (clen + 0.4) + rng.uniform(10, 16)  # a driving lane
        v -= rows * (_CONTAINER_WIDTH + row_gap) + rng.uniform(12, 18)
    quay = (offset, theta)
    return objects, {"quay": quay}


def harbour_survey(frames: int = 6, *, seed: int = 0) -> Scenario:
    """Invented drone survey of a port: vessels, containers and cranes as rotated boxes.

    Each frame is one orthomosaic of 2048 × 2048 pixels at 0.15 m per pixel, in its pixel
    frame (x right, y down, origin at the top-left corner). The quay edge crosses each
    mosaic at a random angle; vessels (tugs 24–34 m, barges 40–70 m, feeders 90–150 m)
    lie moored along it, a few under way further out; ship-to-shore cranes (55–75 m reach
    × 24–30 m gauge) stand on the quay edge across it; containers (6.06 or 12.19 m ×
    2.44 m) stand in stacked rows in the yard behind the apron. Objects cut by the mosaic's
    edge (under 60 % visible) are marked ``ignore``; those under 25 % visible are left out.
    The demo's detector sees each mosaic in overlapping tiles (:func:`detect_in_tiles`).
    All of it is **invented**.

    Parameters
    ----------
    frames : int
        Number of tiles.
    seed : int
        Seed of the random generator; the same seed gives the same tables.

    Returns
    -------
    Scenario
        With ``shape="rotated"`` and truth columns
        ``frame, label, cx, cy, width, height, angle, ignore`` (pixels, radians).

    Examples
    --------
    >>> s = harbour_survey(frames=1, seed=3)
    >>> s.frames
    ['mosaic-000']
    >>> bool((s.truth.width >= s.truth.height).all())  # own x axis along the long side
    True
    """
    if frames < 0:
        raise InvalidInput("frames", f"must be >= 0, got {frames}")
    rng = np.random.default_rng([seed, 1])
    m = HARBOUR_METRES_PER_PIXEL
    extent = (0.0, 0.0, float(HARBOUR_TILE), float(HARBOUR_TILE))
    rows: list[dict] = []
    quays = {}
    names = [f"mosaic-{i:03d}" for i in range(frames)]
    for name in names:
        objects, info = _harbour_tile(rng)
        quays[name] = info["quay"]
        if not objects:
            continue
        labels = [o[0] for o in objects]
        b = np.array([o[1] for o in objects], dtype=np.float64)
        # metres about the mosaic's centre -> pixels from the top-left corner, y down. The angle is
        # taken to be in the pixel frame as is (the scene is invented; no mirror to undo).
        b[:, 0] = b[:, 0] / m + HARBOUR_TILE / 2
        b[:, 1] = b[:, 1] / m + HARBOUR_TILE / 2
        b[:, 2:4] /= m
        b[:, 4] = (b[:, 4] + np.pi / 2) % np.pi - np.pi / 2  # rectangles: angle modulo pi
        seen = _visible_fraction(b, extent)
        for lab, box, frac in zip(labels, b, seen, strict=True):
            if frac < 0.25:
                continue
            rows.append(
                {
                    "frame": name,
                    "label": lab,
                    **dict(zip(COLUMNS["rotated"], box, strict=True)),
                    "ignore": bool(frac < 0.6),
                }
            )
    truth = _table(rows, "rotated", truth=True)
    return Scenario(
        name="harbour",
        title="Harbour survey (invented)",
        shape="rotated",
        units="pixels (mosaic frame, x right, y down; 0.15 m per pixel)",
        truth=truth,
        extent=extent,
        y_down=True,
        labels=("vessel", "container", "crane"),
        layout={"frames": names, "quay": quays},
    )


# --------------------------------------------------------------------------------------------
# Warehouse lidar (upright 3D boxes, sensor frame, metres, z up)
# --------------------------------------------------------------------------------------------

_AISLE = 3.6  # aisle width between rack faces, metres
_RACK_DEPTH = 1.2  # one pallet deep
_FLUE = 0.2  # gap between back-to-back racks
_PITCH = _AISLE + 2 * _RACK_DEPTH + _FLUE  # distance between aisle centres
_BAY = 2.8  # bay width along the aisle: two pallets (0.8 m faces) with clearances
_LEVELS = (0.0, 1.9, 3.8)  # beam heights, metres
_RACK_LENGTH = 56.0  # racks run from x = 0 to x = 56 m; a cross aisle at x < 0
_N_AISLES = 4


def _warehouse_world(rng: np.random.Generator) -> list[tuple[str, list[float], int]]:
    """Static pallets in the invented warehouse, in world metres, with their aisle index."""
    objects = []
    for aisle in range(_N_AISLES):
        yc = aisle * _PITCH
        for side in (-1, 1):
            y = yc + side * (_AISLE / 2 + _RACK_DEPTH / 2)
            for bay in range(int(_RACK_LENGTH / _BAY)):
                for level in _LEVELS:
                    for slot in (0.3, 0.7):
                        if rng.random() < 0.25:  # an empty place
                            continue
                        x = (bay + slot) * _BAY + rng.normal(0, 0.03)
                        h = rng.uniform(0.9, 1.65)  # pallet (0.144 m) and its load
                        box = [
                            x,
                            y + rng.normal(0, 0.04),
                            level + 0.02 + h / 2,
                            1.2,
                            0.8,
                            h,
                            np.pi / 2 + rng.normal(0, 0.03),
                        ]
                        objects.append(("pallet", box, aisle))
    # A few pallets staged on the floor of the cross aisle, any heading.
    for _ in range(rng.integers(4, 10)):
        h = rng.uniform(0.9, 1.6)
        box = [
            rng.uniform(-7, -2),
            rng.uniform(-2, (_N_AISLES - 1) * _PITCH + 2),
            h / 2 + 0.01,
            1.2,
            0.8,
            h,
            rng.uniform(-np.pi, np.pi),
        ]
        objects.append(("pallet", box, -1))
    return objects


def _movers(rng: np.random.Generator) -> list[dict]:
    """Forklifts and people with a start point and a velocity along an aisle (world frame)."""
    movers = []
    for _ in range(int(rng.integers(5, 9))):
        aisle = int(rng.integers(0, _N_AISLES))
        heading = 0.0 if rng.random() < 0.5 else np.pi
        movers.append(
            {
                "label": "forklift",
                "aisle": aisle,
                "start": np.array(
                    [rng.uniform(-4, _RACK_LENGTH), aisle * _PITCH + rng.normal(0, 0.3)]
                ),
                "speed": rng.uniform(0.0, 2.5),
                "heading": heading,
                "size": [rng.uniform(2.8, 3.4), rng.uniform(1.1, 1.3), rng.uniform(2.1, 2.3)],
            }
        )
    for _ in range(int(rng.integers(10, 16))):
        aisle = int(rng.integers(-1, _N_AISLES))
        heading = (
            rng.uniform(-np.pi, np.pi) if aisle < 0 else (0.0 if rng.random() < 0.5 else np.pi)
        )
        y = (
            rng.uniform(0, (_N_AISLES - 1) * _PITCH)
            if aisle < 0
            else aisle * _PITCH + rng.normal(0, 0.8)
        )
        x = rng.uniform(-6, -1) if aisle < 0 else rng.uniform(0, _RACK_LENGTH)
        movers.append(
            {
                "label": "person",
                "aisle": aisle,
                "start": np.array([x, y]),
                "speed": rng.uniform(0.0, 1.5),
                "heading": heading,
                "size": [rng.uniform(0.3, 0.45), rng.uniform(0.5, 0.65), rng.uniform(1.55, 1.95)],
            }
        )
    return movers


def warehouse_lidar(frames: int = 8, *, seed: int = 0) -> Scenario:
    """Invented lidar sweeps of an inventory robot: pallets, forklifts, people as upright boxes.

    The invented warehouse has four aisles (3.6 m wide) between single-deep pallet racks
    56 m long with beam levels at 0, 1.9 and 3.8 m, and a cross aisle in front. Pallets
    (1.2 × 0.8 m, loads 0.9–1.65 m high) stand in the racks facing the aisles, a few on the
    floor of the cross aisle; forklifts (2.8–3.4 × 1.1–1.3 × 2.1–2.3 m) drive along the
    aisles; people (about 0.4 × 0.6 × 1.55–1.95 m) walk there. The robot drives down the
    aisles and takes one sweep per frame; each sweep holds what the robot could see — the
    racks on both sides of its aisle, and whatever is in its aisle or the cross aisle —
    within 30 m, in the robot's sensor frame (x ahead, y left, z up, floor at z = 0).
    Objects beyond 24 m are marked ``ignore`` (too few returns to annotate). All of it is
    **invented**.

    Parameters
    ----------
    frames : int
        Number of sweeps.
    seed : int
        Seed of the random generator; the same seed gives the same tables.

    Returns
    -------
    Scenario
        With ``shape="upright"`` and truth columns
        ``frame, label, cx, cy, cz, length, width, height, yaw, ignore`` (metres, radians).

    Examples
    --------
    >>> s = warehouse_lidar(frames=2, seed=3)
    >>> s.frames
    ['sweep-000', 'sweep-001']
    >>> r = (s.truth.cx ** 2 + s.truth.cy ** 2) ** 0.5
    >>> bool((r <= 30).all()), bool(s.truth[r > 24].ignore.all())
    (True, True)
    """
    if frames < 0:
        raise InvalidInput("frames", f"must be >= 0, got {frames}")
    rng = np.random.default_rng([seed, 2])
    world = _warehouse_world(rng)
    movers = _movers(rng)
    names = [f"sweep-{i:03d}" for i in range(frames)]
    rows: list[dict] = []
    poses = {}
    # The robot's route: down one aisle and back up another, 1.5 m per sweep (one sweep/s).
    aisles = rng.permutation(_N_AISLES)
    for i, name in enumerate(names):
        leg, step = divmod(i, 30)
        aisle = int(aisles[leg % _N_AISLES])
        forward = leg % 2 == 0
        x = 2.0 + 1.5 * step if forward else _RACK_LENGTH - 2.0 - 1.5 * step
        pose = (x, aisle * _PITCH, 0.0 if forward else np.pi)
        poses[name] = pose
        t = float(i)
        objects = [(lab, box) for lab, box, a in world if a == aisle or a == -1]
        for mv in movers:
            if mv["aisle"] not in (aisle, -1):
                continue
            d = np.array([np.cos(mv["heading"]), np.sin(mv["heading"])])
            p = mv["start"] + d * mv["speed"] * t
            if mv["aisle"] >= 0:  # turn back at the ends of the aisle
                span = _RACK_LENGTH + 4
                s = (p[0] + 4) % (2 * span)
                p[0] = (s if s < span else 2 * span - s) - 4
            length, width, height = mv["size"]
            objects.append(
                (mv["label"], [p[0], p[1], height / 2, length, width, height, mv["heading"]])
            )
        rx, ry, ryaw = pose
        c, s = np.cos(ryaw), np.sin(ryaw)
        for lab, box in objects:
            dx, dy = box[0] - rx, box[1] - ry
            lx, ly = c * dx + s * dy, -s * dx + c * dy  # world -> sensor frame
            rng_xy = float(np.hypot(lx, ly))
            if rng_xy > WAREHOUSE_MAX_RANGE or rng_xy < 0.5:
                continue
            yaw = (box[6] - ryaw + np.pi) % (2 * np.pi) - np.pi
            cols = [lx, ly, box[2], box[3], box[4], box[5], yaw]
            rows.append(
                {
                    "frame": name,
                    "label": lab,
                    **dict(zip(COLUMNS["upright"], cols, strict=True)),
                    "ignore": bool(rng_xy > WAREHOUSE_IGNORE_RANGE),
                }
            )
    truth = _table(rows, "upright", truth=True)
    r = WAREHOUSE_MAX_RANGE
    return Scenario(
        name="warehouse",
        title="Warehouse lidar (invented)",
        shape="upright",
        units="metres (robot sensor frame, x ahead, y left, z up)",
        truth=truth,
        extent=(-r, -r, r, r),
        y_down=False,
        labels=("pallet", "forklift", "person"),
        layout={"frames": names, "poses": poses},
    )


#: Invented lidar density: returns per square metre of a face seen square-on at 1 m.
RETURNS_PER_M2_AT_1M = 1500.0


def warehouse_returns(scenario: Scenario, *, seed: int = 0) -> pd.DataFrame:
    """Invented lidar returns for the warehouse sweeps: columns ``frame, x, y, z`` (metres).

    Each object's faces that look towards the sensor (at the origin, 1 m above the floor)
    get returns in proportion to their area seen from there and falling off with the
    square of the range (:data:`RETURNS_PER_M2_AT_1M`, Poisson counts), 0–2 cm inside the
    face; nothing occludes anything (a simplification). Clutter is added: floor returns
    (z within 2 cm of 0) and a few stray returns in the air. So near objects hold many
    returns and far or small ones few — what ``min_points`` is for. All of it is
    **invented**.

    Examples
    --------
    >>> s = warehouse_lidar(frames=2, seed=3)
    >>> pts = warehouse_returns(s, seed=3)
    >>> list(pts.columns), sorted(pts.frame.unique()) == s.frames
    (['frame', 'x', 'y', 'z'], True)
    >>> warehouse_returns(s, seed=3).equals(pts)  # seeded
    True
    """
    rng = np.random.default_rng([seed, 5])
    sensor = np.array([0.0, 0.0, 1.0])
    chunks = []
    truth = scenario.truth
    # the six faces of a unit box: outward normal and the two axes spanning the face
    faces = [
        (np.array(n, float), np.array(u, float), np.array(v, float))
        for n, u, v in (
            ((1, 0, 0), (0, 1, 0), (0, 0, 1)),
            ((-1, 0, 0), (0, 1, 0), (0, 0, 1)),
            ((0, 1, 0), (1, 0, 0), (0, 0, 1)),
            ((0, -1, 0), (1, 0, 0), (0, 0, 1)),
            ((0, 0, 1), (1, 0, 0), (0, 1, 0)),
            ((0, 0, -1), (1, 0, 0), (0, 1, 0)),
        )
    ]
    for frame in scenario.frames:
        rows = truth[truth["frame"] == frame]
        pts = []
        for b in rows[list(COLUMNS["upright"])].to_numpy(float):
            centre, dims, yaw = b[:3], b[3:6], b[6]
            c, s_ = np.cos(yaw), np.sin(yaw)
            turn = np.array([[c, -s_, 0.0], [s_, c, 0.0], [0.0, 0.0, 1.0]])
            for n, u, v in faces:
                half = dims / 2
                normal = turn @ n
                face_centre = centre + turn @ (n * half)
                look = sensor - face_centre
                dist = float(np.linalg.norm(look))
                facing = float(normal @ look) / max(dist, 1e-9)
                if facing <= 0:
                    continue
                area = float(np.prod(dims[np.abs(u) + np.abs(v) > 0]))
                count = rng.poisson(RETURNS_PER_M2_AT_1M * area * facing / max(dist, 1.0) ** 2)
                a = rng.uniform(-1, 1, (count, 1)) * (u * half)
                bb = rng.uniform(-1, 1, (count, 1)) * (v * half)
                depth = rng.uniform(0.0, 0.02, (count, 1)) * n  # 0-2 cm inside the face
                local = n * half + a + bb - depth
                pts.append(centre + local @ turn.T)
        r = WAREHOUSE_MAX_RANGE
        floor = rng.uniform(-r, r, (400, 3))
        floor[:, 2] = rng.uniform(0.0, 0.02, 400)
        stray = rng.uniform([-r, -r, 0.0], [r, r, 4.0], (40, 3))
        xyz = np.vstack(pts + [floor, stray])
        chunks.append(pd.DataFrame({"frame": frame, "x": xyz[:, 0], "y": xyz[:, 1],
                                    "z": xyz[:, 2]}))  # fmt: skip
    if not chunks:
        return pd.DataFrame({"frame": [], "x": [], "y": [], "z": []})
    return pd.concat(chunks, ignore_index=True)


def _table(rows: list[dict], shape: str, *, truth: bool) -> pd.DataFrame:
    cols = ["frame", "label"] + ([] if truth else ["score"]) + list(COLUMNS[shape])
    if truth:
        cols.append("ignore")
    table = pd.DataFrame(rows, columns=cols)
    for c in COLUMNS[shape] + (() if truth else ("score",)):
        table[c] = table[c].astype(np.float64)
    if truth:
        table["ignore"] = table["ignore"].astype(bool)
    table["frame"] = table["frame"].astype(object)
    table["label"] = table["label"].astype(object)
    return table.reset_index(drop=True)


# --------------------------------------------------------------------------------------------
# Simulated detector
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class DetectorModel:
    """The known error model of the simulated detector (all values invented).

    Attributes
    ----------
    name : str
        Version name.
    miss : float
        Probability of missing an easy object; harder ones (small, far, cut by the edge) are
        missed up to three times as often.
    position : float
        Standard deviation of the centre error as a fraction of the box's mean side.
    size : float
        Standard deviation of the log of each size error (multiplicative noise).
    angle : float
        Standard deviation of the angle / yaw error in radians.
    flip : float
        Probability that the heading comes out turned by π (matters for upright boxes).
    duplicate : float
        Probability of a second, noisier, lower-scored detection of the same object.
    false_alarms : float
        Mean number of false alarms per frame (Poisson), placed anywhere in the frame.
    confusion : float
        Probability that a detection carries another label.
    score_noise : float
        Standard deviation of the noise on the score's log-odds; lower means the score
        ranks good boxes above poor ones more faithfully.
    """

    name: str
    miss: float
    position: float
    size: float
    angle: float
    flip: float
    duplicate: float
    false_alarms: float
    confusion: float
    score_noise: float


#: The two versions of the simulated detector (invented figures).
DETECTORS: dict[str, DetectorModel] = {
    "baseline": DetectorModel(
        "baseline",
        miss=0.10,
        position=0.06,
        size=0.08,
        angle=0.06,
        flip=0.06,
        duplicate=0.20,
        false_alarms=6.0,
        confusion=0.04,
        score_noise=1.2,
    ),
    "improved": DetectorModel(
        "improved",
        miss=0.06,
        position=0.04,
        size=0.05,
        angle=0.035,
        flip=0.03,
        duplicate=0.15,
        false_alarms=4.0,
        confusion=0.02,
        score_noise=0.8,
    ),
}


#: Which label a detection may wrongly carry, and how likely relative to ``confusion``.
_CONFUSIONS: dict[str, dict[str, tuple[str, float]]] = {
    "harbour": {"vessel": ("crane", 1.0), "crane": ("vessel", 1.0), "container": ("vessel", 0.05)},
    "warehouse": {
        "pallet": ("forklift", 0.05),
        "forklift": ("pallet", 1.0),
        "person": ("forklift", 0.5),
    },
}


def _difficulty(scenario: Scenario, truth: pd.DataFrame) -> np.ndarray:
    """0 (easy) .. 1 (hard) per truth: small or cut-off harbour objects, far warehouse ones."""
    if scenario.shape == "upright":
        r = np.hypot(truth["cx"].to_numpy(), truth["cy"].to_numpy())
        small = (truth["label"] == "person").to_numpy() * 0.2
        return np.clip(r / WAREHOUSE_MAX_RANGE + small, 0, 1)
    area = (truth["width"] * truth["height"]).to_numpy() * HARBOUR_METRES_PER_PIXEL**2
    hard = np.clip(1 - np.log10(np.maximum(area, 1.0)) / 3, 0, 1)  # 10 m² -> 0.67, 1000 m² -> 0
    return np.where(truth["ignore"].to_numpy(), np.maximum(hard, 0.7), hard)


def simulate_detector(
    scenario: Scenario, version: str | DetectorModel = "baseline", *, seed: int = 0
) -> pd.DataFrame:
    """Raw detections of a simulated detector on an invented scenario.

    For every truth (ignore ones too, as a real detector sees them) the detector misses it
    with probability ``miss × (1 + 2 × difficulty)``; otherwise it reports a box whose centre,
    sizes and angle carry Gaussian noise (sizes multiplicatively; harder objects twice as
    noisy), its heading flipped by π with probability ``flip``, another label with
    probability ``confusion``, and a score ``sigmoid(4 q − 1 − 1.5 d + noise)`` where ``q``
    in (0, 1] is the box's quality (1 = exact) and ``d`` its difficulty. With probability
    ``duplicate`` a second, noisier box of the same object follows with a lower score. Each
    frame also gets Poisson(``false_alarms``) boxes of truth-like size at random places with
    low scores. The raw output is not suppressed: that is the job of :func:`obbiou.suppress`.
    All of it is **invented**.

    Parameters
    ----------
    scenario : Scenario
        From :func:`harbour_survey` or :func:`warehouse_lidar`.
    version : str or DetectorModel
        ``"baseline"``, ``"improved"`` (see :data:`DETECTORS`) or a model of your own.
    seed : int
        Seed of the random generator (mixed with the version name).

    Returns
    -------
    pandas.DataFrame
        ``frame, label, score, <box columns>``, one row per detection, sorted by frame.

    Examples
    --------
    >>> s = warehouse_lidar(frames=3, seed=0)
    >>> a = simulate_detector(s, "baseline", seed=0)
    >>> b = simulate_detector(s, "improved", seed=0)
    >>> len(a) > 0 and len(b) > 0
    True
    >>> a.equals(simulate_detector(s, "baseline", seed=0))
    True
    >>> simulate_detector(s, "perfect")
    Traceback (most recent call last):
    ...
    obbiou.errors.InvalidInput: version: unknown detector 'perfect'; expected 'baseline' or
    'improved'
    """
    if isinstance(version, str):
        if version not in DETECTORS:
            raise InvalidInput(
                "version", f"unknown detector {version!r}; expected 'baseline' or 'improved'"
            )
        model = DETECTORS[version]
    else:
        model = version
    tag = sum(ord(ch) * 31**i for i, ch in enumerate(model.name)) % (2**31)
    rng = np.random.default_rng([seed, 3, tag, 0 if scenario.name == "harbour" else 1])
    truth = scenario.truth
    cols = list(scenario.box_columns)
    is3d = scenario.shape == "upright"
    size_cols = [3, 4, 5] if is3d else [2, 3]
    angle_col = 6 if is3d else 4
    boxes = truth[cols].to_numpy(dtype=np.float64) if len(truth) else np.zeros((0, len(cols)))
    labels = truth["label"].to_numpy(dtype=object)
    frames = truth["frame"].to_numpy(dtype=object)
    hard = _difficulty(scenario, truth) if len(truth) else np.zeros(0)
    # False alarms take a label with probability growing like the square root of its count.
    names, counts = np.unique(labels.astype(str), return_counts=True)
    fa_p = np.sqrt(counts) / np.sqrt(counts).sum() if len(counts) else counts

    def noisy(rows: np.ndarray, scale: float) -> tuple[np.ndarray, np.ndarray]:
        """Noisy copies of the truths ``rows`` and their quality in (0, 1]."""
        out = boxes[rows].copy()
        sizes = out[:, size_cols]
        k = (scale * (1 + hard[rows]))[:, None]
        # Centre error in the box's own frame, each part in proportion to that side.
        own = rng.normal(0, 1, (len(rows), 2)) * model.position * k * sizes[:, :2]
        ca, sa = np.cos(out[:, angle_col]), np.sin(out[:, angle_col])
        out[:, 0] += ca * own[:, 0] - sa * own[:, 1]
        out[:, 1] += sa * own[:, 0] + ca * own[:, 1]
        if is3d:
            out[:, 2] += rng.normal(0, 1, len(rows)) * model.position * k[:, 0] * sizes[:, 2] * 0.5
        log_err = rng.normal(0, 1, sizes.shape) * model.size * k
        out[:, size_cols] = sizes * np.exp(log_err)
        turn = rng.normal(0, 1, len(rows)) * model.angle * k[:, 0]
        out[:, angle_col] += turn
        # Quality: 1 for an exact box, falling with each kind of error (a plain proxy for IoU).
        err = ((own / np.maximum(sizes[:, :2], 1e-9)) ** 2).sum(axis=1) * 20
        err += (log_err**2).sum(axis=1) * 20 + (turn / 0.2) ** 2
        return out, np.exp(-err)

    def score_of(q: np.ndarray, d: np.ndarray, offset: float = 0.0) -> np.ndarray:
        z = 4 * q - 1 - 1.5 * d + offset + rng.normal(0, model.score_noise, len(q))
        return 1 / (1 + np.exp(-z))

    n = len(truth)
    found = np.flatnonzero(rng.random(n) >= np.minimum(model.miss * (1 + 2 * hard), 0.95))
    box, q = noisy(found, 1.0)
    box[rng.random(len(found)) < model.flip, angle_col] += np.pi
    label = labels[found].copy()
    confusions = _CONFUSIONS[scenario.name]
    other = np.array([confusions.get(v, (v, 0.0))[0] for v in label], dtype=object)
    weight = np.array([confusions.get(v, (v, 0.0))[1] for v in label])
    swap = rng.random(len(found)) < model.confusion * weight
    label[swap] = other[swap]
    score = score_of(q, hard[found])
    twice = np.flatnonzero(rng.random(len(found)) < model.duplicate)
    dup, q2 = noisy(found[twice], 2.5)
    parts = [
        # (sort key: truth order, each duplicate right after its detection)
        (2 * found, frames[found], label, score, box),
        (
            2 * found[twice] + 1,
            frames[found[twice]],
            label[twice],
            score_of(q2, hard[found[twice]], -1.0),
            dup,
        ),
    ]
    # False alarms: truth-like boxes (size, label, height) at random places and headings.
    x0, y0, x1, y1 = scenario.extent
    nf = len(scenario.frames)
    counts_per_frame = rng.poisson(model.false_alarms, nf) if n else np.zeros(nf, np.int64)
    fa_frames = np.repeat(np.array(scenario.frames, dtype=object), counts_per_frame)
    m = len(fa_frames)
    if m:
        by_label = {lab: np.flatnonzero(labels == lab) for lab in names}
        picked = names[rng.choice(len(names), size=m, p=fa_p)]
        j = np.array([by_label[lab][rng.integers(0, len(by_label[lab]))] for lab in picked])
        fa = boxes[j].copy()
        if is3d:
            r, phi = rng.uniform(2, WAREHOUSE_IGNORE_RANGE, m), rng.uniform(-np.pi, np.pi, m)
            fa[:, 0], fa[:, 1] = r * np.cos(phi), r * np.sin(phi)
        else:
            fa[:, 0], fa[:, 1] = rng.uniform(x0, x1, m), rng.uniform(y0, y1, m)
        fa[:, angle_col] = rng.uniform(-np.pi, np.pi, m)
        fa_score = score_of(np.zeros(m), np.full(m, 0.5), -0.5)
        parts.append((2 * n + np.arange(m), fa_frames, labels[j], fa_score, fa))
    key = np.concatenate([p[0] for p in parts])
    frame_of = np.concatenate([p[1] for p in parts])
    rank = {name: k for k, name in enumerate(scenario.frames)}
    frame_rank = np.array([rank.get(f, len(rank)) for f in frame_of], dtype=np.int64)
    order = np.lexsort((key, frame_rank))  # by frame, then truth order, then false alarms
    out_boxes = np.concatenate([p[4] for p in parts])[order] if len(order) else boxes[:0]
    # Wrap angles: rectangles modulo pi into [-pi/2, pi/2), headings modulo 2 pi.
    if is3d:
        out_boxes[:, 6] = (out_boxes[:, 6] + np.pi) % (2 * np.pi) - np.pi
    else:
        out_boxes[:, 4] = (out_boxes[:, 4] + np.pi / 2) % np.pi - np.pi / 2
    table = pd.DataFrame(
        {
            "frame": frame_of[order],
            "label": np.concatenate([p[2] for p in parts])[order],
            "score": np.concatenate([p[3] for p in parts])[order],
            **{c: out_boxes[:, i] for i, c in enumerate(cols)},
        }
    )
    return _table(table.to_dict("records"), scenario.shape, truth=False)


# --------------------------------------------------------------------------------------------
# The harbour detector on overlapping tiles of each frame
# --------------------------------------------------------------------------------------------


def visible_box(boxes: np.ndarray, tile: Any) -> np.ndarray:
    """The part of each rotated box inside an axis tile, boxed along the box's own axes.

    What a detector that sees only the tile reports for an object cut by the tile's edge:
    a rectangle at the object's angle around the visible part. The visible part's corners
    are the box corners inside the tile, the tile corners inside the box and the crossings
    of the box's edges with the tile's edges; the result is their extent in the box's own
    frame. A box wholly inside comes back unchanged (up to rounding); a box outside the tile
    gives a zero-size box at its centre.

    Parameters
    ----------
    boxes : numpy.ndarray
        ``(N, 5)`` rotated ``cx, cy, width, height, angle`` (radians).
    tile : array_like
        ``x_min, y_min, x_max, y_max``, in the boxes' coordinates.

    Returns
    -------
    numpy.ndarray
        ``(N, 5)`` rotated boxes.

    Examples
    --------
    A 40 x 10 box across the right edge of the tile [0, 0, 100, 100]: 20 px are inside.

    >>> visible_box(np.array([[100.0, 50, 40, 10, 0]]), [0, 0, 100, 100]).tolist()
    [[90.0, 50.0, 20.0, 10.0, 0.0]]
    >>> visible_box(np.zeros((0, 5)), [0, 0, 1, 1]).shape
    (0, 5)
    """
    from obbiou.boxes import corners

    b = np.asarray(boxes, dtype=np.float64).reshape(-1, 5)
    n = len(b)
    if n == 0:
        return b.copy()
    x0, y0, x1, y1 = (float(v) for v in tile)
    p = corners(b, shape="rotated")  # (N, 4, 2)
    q = np.roll(p, -1, axis=1)  # each edge runs p -> q
    points = [p]
    valid = [(p[..., 0] >= x0) & (p[..., 0] <= x1) & (p[..., 1] >= y0) & (p[..., 1] <= y1)]
    c, s = np.cos(b[:, 4])[:, None], np.sin(b[:, 4])[:, None]
    hw, hh = b[:, 2:3] / 2, b[:, 3:4] / 2
    tc = np.array([[x0, y0], [x1, y0], [x1, y1], [x0, y1]])
    du = tc[None, :, 0] - b[:, 0:1]
    dv = tc[None, :, 1] - b[:, 1:2]
    u, v = c * du + s * dv, -s * du + c * dv
    points.append(np.broadcast_to(tc, (n, 4, 2)))
    valid.append((np.abs(u) <= hw) & (np.abs(v) <= hh))
    with np.errstate(divide="ignore", invalid="ignore"):
        for axis, lo, hi in ((0, y0, y1), (1, x0, x1)):  # edges x = const, then y = const
            for line in (x0, x1) if axis == 0 else (y0, y1):
                t = (line - p[..., axis]) / (q[..., axis] - p[..., axis])
                other = p[..., 1 - axis] + t * (q[..., 1 - axis] - p[..., 1 - axis])
                cross = np.empty_like(p)
                cross[..., axis] = line
                cross[..., 1 - axis] = other
                points.append(cross)
                valid.append((t >= 0) & (t <= 1) & (other >= lo) & (other <= hi))
    ok = np.concatenate(valid, axis=1)
    # points that are not corners of the visible part (crossings of parallel lines are
    # NaN) count as the centre: masked out below, but kept finite
    pts = np.where(ok[..., None], np.concatenate(points, axis=1), b[:, None, :2])
    du = pts[..., 0] - b[:, 0:1]
    dv = pts[..., 1] - b[:, 1:2]
    u = np.clip(c * du + s * dv, -hw, hw)
    v = np.clip(-s * du + c * dv, -hh, hh)
    u0 = np.where(ok, u, np.inf).min(axis=1)
    u1 = np.where(ok, u, -np.inf).max(axis=1)
    v0 = np.where(ok, v, np.inf).min(axis=1)
    v1 = np.where(ok, v, -np.inf).max(axis=1)
    seen = ok.any(axis=1)
    u0, u1 = np.where(seen, u0, 0.0), np.where(seen, u1, 0.0)
    v0, v1 = np.where(seen, v0, 0.0), np.where(seen, v1, 0.0)
    um, vm = (u0 + u1) / 2, (v0 + v1) / 2
    c, s = c[:, 0], s[:, 0]
    return np.column_stack(
        [b[:, 0] + c * um - s * vm, b[:, 1] + s * um + c * vm, u1 - u0, v1 - v0, b[:, 4]]
    )


def detector_tiles(scenario: Scenario, size: float, overlap: float) -> np.ndarray:
    """The tiles the detector sees of each frame: :func:`obbiou.tiles.grid` over the
    frame's extent, in frame coordinates ``(T, 4)``."""
    from obbiou.tiles import grid

    x0, y0, x1, y1 = scenario.extent
    tiles = grid(x1 - x0, y1 - y0, size=size, overlap=overlap)
    return tiles + np.array([x0, y0, x0, y0])


def detect_in_tiles(
    scenario: Scenario,
    version: str | DetectorModel = "baseline",
    *,
    size: float = HARBOUR_DETECTOR_TILE,
    overlap: float = HARBOUR_OVERLAP,
    seed: int = 0,
) -> pd.DataFrame:
    """Raw detections of the simulated detector run on overlapping tiles of each frame.

    Each frame is cut into the tiles of :func:`detector_tiles`; the detector sees each tile
    on its own. An object in the overlap of two or four tiles is detected (or missed) in
    each of them independently; an object cut by a tile's edge is seen as its visible part
    (:func:`visible_box`), marked hard (as an ``ignore`` truth of the tile) when less than
    60 % of it is inside (the share of a 7 x 7 grid of points on the box, as
    :func:`harbour_survey` judges the mosaic's edge), so it is missed and misplaced more
    often; an object none of whose 49 points is inside goes unseen by that tile. Then
    :func:`simulate_detector`'s error model applies tile by tile, with false alarms scaled
    to the tile's share of the frame's area; a box that noise pushed wholly off its tile is
    not reported. The boxes are in the coordinates of their tile
    (origin at its top-left corner); :func:`obbiou.tiles.merge` turns them into one set per
    frame. All of it is **invented**.

    Parameters
    ----------
    scenario : Scenario
        A scenario of 2D ``rotated`` boxes (the harbour survey).
    version : str or DetectorModel
        As in :func:`simulate_detector`.
    size, overlap : float
        Tile side and least overlap of neighbouring tiles (:func:`obbiou.tiles.grid`).
    seed : int
        Seed of the random generator.

    Returns
    -------
    pandas.DataFrame
        ``frame, tile, label, score, cx, cy, width, height, angle``: ``frame`` the frame
        (the large image), ``tile`` the index into :func:`detector_tiles`, boxes in tile
        coordinates; sorted by frame and tile.

    Examples
    --------
    >>> s = harbour_survey(frames=1, seed=2)
    >>> d = detect_in_tiles(s, "improved", seed=2)
    >>> list(d.columns)
    ['frame', 'tile', 'label', 'score', 'cx', 'cy', 'width', 'height', 'angle']
    >>> sorted(d.tile.unique().tolist())  # 2 x 2 tiles of 1152 px on a 2048 px frame
    [0, 1, 2, 3]
    """
    from obbiou.boxes import envelope

    if scenario.shape != "rotated":
        raise InvalidInput(
            "scenario", f"the tiled detector takes rotated boxes, got {scenario.shape!r}"
        )
    model = DETECTORS[version] if isinstance(version, str) and version in DETECTORS else version
    if isinstance(model, str):
        raise InvalidInput(
            "version", f"unknown detector {model!r}; expected 'baseline' or 'improved'"
        )
    tiles = detector_tiles(scenario, size, overlap)
    x0, y0, x1, y1 = scenario.extent
    share = float(size * size) / float((x1 - x0) * (y1 - y0))
    view = _tile_view(scenario, tiles)
    cols = list(scenario.box_columns)
    scaled = dataclass_replace(model, false_alarms=model.false_alarms * share)
    det = simulate_detector(view, scaled, seed=seed)
    # a detector reports nothing wholly outside its input: noise can push a small partial
    # box off its tile
    env = envelope(det[cols].to_numpy(np.float64), shape="rotated") if len(det) else None
    if env is not None:
        det = det[(env[:, 2] > 0) & (env[:, 0] < size) & (env[:, 3] > 0) & (env[:, 1] < size)]
        det = det.reset_index(drop=True)
    where = view.layout["where"]
    frame_of = [where[f] for f in det["frame"]]
    det.insert(1, "tile", np.array([k for _, k in frame_of], dtype=np.int64))
    det["frame"] = np.array([f for f, _ in frame_of], dtype=object)
    return det


def _tile_view(scenario: Scenario, tiles: np.ndarray) -> Scenario:
    """The scenario as the detector sees it: one frame per tile (``"<frame>/<tile>"``), the
    visible part of each truth reaching into the tile in tile coordinates, ``ignore`` for
    truths ignored already or less than 60 % inside the tile (:func:`_visible_fraction`)."""
    from obbiou.boxes import envelope

    cols = list(scenario.box_columns)
    truth = scenario.truth
    boxes = truth[cols].to_numpy(np.float64) if len(truth) else np.zeros((0, 5))
    frames = truth["frame"].to_numpy(object)
    ignore = truth["ignore"].to_numpy(bool)
    env = envelope(boxes, shape="rotated") if len(boxes) else np.zeros((0, 4))
    names, where = [], {}
    rows, parts, hard, tile_frame = [], [], [], []
    for frame in scenario.frames:
        mine = np.flatnonzero(frames == frame)
        for k, rect in enumerate(tiles):
            name = f"{frame}/{k}"
            names.append(name)
            where[name] = (frame, k)
            x0, y0, x1, y1 = rect
            e = env[mine]
            near = mine[(e[:, 0] < x1) & (e[:, 2] > x0) & (e[:, 1] < y1) & (e[:, 3] > y0)]
            seen = _visible_fraction(boxes[near], (x0, y0, x1, y1))
            near, seen = near[seen > 0], seen[seen > 0]
            part = visible_box(boxes[near], rect)
            part[:, :2] -= rect[:2]
            rows.append(near)
            parts.append(part)
            hard.append(ignore[near] | (seen < 0.6))
            tile_frame.append(np.full(len(near), name, dtype=object))
    rows = np.concatenate(rows) if rows else np.zeros(0, np.int64)
    part = np.concatenate(parts) if parts else np.zeros((0, 5))
    table = pd.DataFrame(
        {
            "frame": np.concatenate(tile_frame) if tile_frame else np.zeros(0, object),
            "label": truth["label"].to_numpy(object)[rows],
            **{c: part[:, j] for j, c in enumerate(cols)},
            "ignore": np.concatenate(hard) if hard else np.zeros(0, bool),
        }
    )
    size = float(tiles[0, 2] - tiles[0, 0]) if len(tiles) else 0.0
    return Scenario(
        name=scenario.name,
        title=scenario.title,
        shape=scenario.shape,
        units="pixels (detector tile frame)",
        truth=_table(table, scenario.shape, truth=True),
        extent=(0.0, 0.0, size, size),
        y_down=scenario.y_down,
        labels=scenario.labels,
        layout={"frames": names, "where": where},
    )


def scenarios(*, frames: int | None = None, seed: int = 0) -> list[Scenario]:
    """Both invented scenarios, with their default sizes unless ``frames`` is given.

    Examples
    --------
    >>> [s.name for s in scenarios(frames=1)]
    ['harbour', 'warehouse']
    """
    if frames is None:
        return [harbour_survey(seed=seed), warehouse_lidar(seed=seed)]
    return [harbour_survey(frames, seed=seed), warehouse_lidar(frames, seed=seed)]
