"""A picture of one scene: truths and detections in the project palette (invented data).

The boxes are drawn by :func:`obbiou.evaluation.pictures.draw_matches` (the project
palette); this module adds the scenario's backdrop (quay and water, racks, the robot) and
labels. Upright 3D boxes are drawn from above (bird's-eye view) with a heading tick.
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np

from obbiou.evaluation.palette import PALETTE
from obbiou.evaluation.pictures import draw_matches, legend_below
from obbiou.evaluation.pictures import outlines as _outlines

__all__ = ["draw_scene", "draw_tiles"]

#: The harbour's water behind the boxes (scene backdrop only, not part of the palette).
_WATER = "#eef3f8"
#: Detector tiles: their outlines and the overlaps of neighbours (backdrop, not the palette).
_TILE_EDGE = "#4d4d4d"
_OVERLAP = "#e4e4e4"


def draw_scene(
    path: Any,
    scenario: Any,
    frame: str,
    truth: Any,
    truth_status: Any,
    detections: Any,
    detection_status: Any,
    *,
    iou: float = 0.5,
    iou_text: str | None = None,
    title: str | None = None,
    window: tuple[float, float, float, float] | None = None,
) -> Path:
    """Draw one frame's truths and detections to a PNG.

    Parameters
    ----------
    path : path-like
        The PNG to write.
    scenario : obbiou.demo.scenarios.Scenario
        Gives the layout, units, frame extent and drawing extras (quay line, robot pose).
    frame : str
        The frame drawn (for the title and the scenario extras).
    truth, detections : pandas.DataFrame
        That frame's rows (box columns of ``scenario.shape``).
    truth_status : sequence of str
        Per truth: ``"matched"``, ``"missed"`` or ``"ignore"``.
    detection_status : sequence of str
        Per detection: ``"matched"``, ``"false positive"`` or ``"ignored"``.
    iou : float
        The IoU threshold the statuses come from (for the legend).
    iou_text : str, optional
        The legend's title instead of ``"matching at IoU ≥ <iou>"``.
    title : str, optional
        Title; a default names the scenario and frame.
    window : tuple of float, optional
        ``(x_min, y_min, x_max, y_max)`` to show instead of the whole frame.

    Returns
    -------
    pathlib.Path
        The file written.
    """
    from matplotlib.figure import Figure
    from matplotlib.patches import Circle, Polygon

    path = Path(path)
    shape = scenario.shape
    cols = list(scenario.box_columns)
    t_status = np.asarray(truth_status, dtype=object)
    d_status = np.asarray(detection_status, dtype=object)
    t_boxes = truth[cols].to_numpy(np.float64)
    d_boxes = detections[cols].to_numpy(np.float64)

    x0, y0, x1, y1 = window or scenario.extent
    aspect = (y1 - y0) / (x1 - x0)
    fig = Figure(figsize=(9.6, 9.6 * aspect * 0.86 + 2.4), dpi=110)  # no pyplot, no backend switch
    ax = fig.subplots()
    ax.set_xlim(x0, x1)
    ax.set_ylim(y1, y0) if scenario.y_down else ax.set_ylim(y0, y1)
    ax.set_aspect("equal")
    ax.set_facecolor("white")

    if scenario.name == "harbour" and frame in scenario.layout.get("quay", {}):
        _draw_quay(ax, scenario, frame, Polygon)
    if scenario.name == "warehouse":
        for r, text in ((24.0, "24 m: beyond, truths are ignore"), (30.0, "30 m sweep range")):
            ring = Circle((0, 0), r, fill=False, color="#c8c8c8", lw=0.8, ls="-")
            ax.add_patch(ring)
            # Label the ring where it crosses the view: try a few bearings.
            for deg in (17.0, 163.0, -17.0, -163.0):
                at = np.deg2rad(deg)
                px, py = r * np.cos(at), r * np.sin(at)
                if x0 <= px <= x1 and y0 <= py <= y1:
                    ax.annotate(
                        text,
                        (px, py),
                        xytext=(-4 if px > 0 else 4, 0),
                        textcoords="offset points",
                        fontsize=7.5,
                        color="#8a8a8a",
                        ha="right" if px > 0 else "left",
                    )
                    break
        _draw_racks(ax, scenario, frame, Polygon)
        ax.plot([0], [0], marker=(3, 0, -90), ms=11, color="#555555", ls="none")
        ax.annotate(
            "robot (sensor origin), heading +x",
            (0, 0),
            xytext=(-8, -14),
            ha="right",
            textcoords="offset points",
            fontsize=8,
            color="#555555",
        )

    handles = draw_matches(ax, shape, t_boxes, t_status, d_boxes, d_status)
    navy = PALETTE["truth"]
    t_out = _outlines(t_boxes, shape)[0]

    # Name the less common objects (vessels, cranes; forklifts, people) beside their truth.
    if len(truth):
        labels = truth["label"].astype(str).to_numpy()
        values, freq = np.unique(labels, return_counts=True)
        common = values[np.argmax(freq)]
        x0, y0, x1, y1 = window or scenario.extent
        for poly, lab, st in zip(t_out, labels, t_status, strict=True):
            cx, cy = poly[:4].mean(axis=0)
            if lab == common or st == "ignore" or not (x0 <= cx <= x1 and y0 <= cy <= y1):
                continue
            ax.annotate(
                lab,
                (cx, cy),
                fontsize=7,
                color=navy,
                ha="center",
                va="center",
                bbox={"boxstyle": "round,pad=0.15", "fc": "white", "ec": "none", "alpha": 0.7},
            )
    title_text = iou_text or f"matching at IoU ≥ {iou:g}"
    legend_below(ax, handles, title_text, columns=3, size=8.5, gap=34)
    if shape == "upright":
        ax.set_xlabel("x, ahead of the robot (m)")
        ax.set_ylabel("y, to the robot's left (m)")
    else:
        ax.set_xlabel("x (pixels, 0.15 m per pixel)")
        ax.set_ylabel("y (pixels, pointing down)")
    view = "bird's-eye view, " if shape == "upright" else ""
    note = ""
    if shape == "upright":
        note = "; boxes on different rack levels overlap when seen from above"
    ax.set_title(
        f"{view}{scenario.units}{note}\nINVENTED DATA from a seeded simulation, "
        "not a real scene or detector",
        fontsize=8.5,
        color="#555555",
        loc="left",
        pad=5,
    )
    return _titled_save(fig, ax, title or f"{scenario.title}: {frame}", path)


def draw_tiles(
    path: Any,
    scenario: Any,
    frame: str,
    tiles: np.ndarray,
    detections: np.ndarray,
    status: Any,
    truth: Any,
    *,
    max_iou: float = 0.5,
) -> Path:
    """Draw one frame with the tiles its detector saw and what merging did to their boxes.

    Tile outlines dark grey, the overlaps of neighbouring tiles shaded; truths thin navy;
    tile detections (moved into the frame) amber when merging kept them, magenta dashed
    when the seam rule dropped them (cut by their tile's edge, seen whole by another
    tile), light grey when suppressed as a copy of a better-scored box.

    Parameters
    ----------
    path : path-like
        The PNG to write.
    scenario : obbiou.demo.scenarios.Scenario
        A 2D scenario (the harbour survey).
    frame : str
        The frame drawn.
    tiles : numpy.ndarray
        ``(T, 4)`` axis tiles in frame coordinates.
    detections : numpy.ndarray
        The frame's tile detections in frame coordinates, in ``scenario.shape``.
    status : sequence of str
        Per detection: ``"kept"``, ``"at seam"`` or ``"suppressed"``.
    truth : pandas.DataFrame
        The frame's truths.
    max_iou : float
        The merge's suppression threshold (for the legend).

    Returns
    -------
    pathlib.Path
        The file written.
    """
    from matplotlib.collections import LineCollection
    from matplotlib.figure import Figure
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch, Polygon, Rectangle
    from matplotlib.transforms import offset_copy

    path = Path(path)
    status = np.asarray(status, dtype=object)
    d_out, _ = _outlines(np.asarray(detections, dtype=np.float64), scenario.shape)
    t_out, _ = _outlines(truth[list(scenario.box_columns)].to_numpy(np.float64), scenario.shape)
    x0, y0, x1, y1 = scenario.extent
    fig = Figure(figsize=(9.6, 9.6 * 0.86 + 2.4), dpi=110)
    ax = fig.subplots()
    ax.set_xlim(x0, x1)
    ax.set_ylim(y1, y0) if scenario.y_down else ax.set_ylim(y0, y1)
    ax.set_aspect("equal")
    if scenario.name == "harbour" and frame in scenario.layout.get("quay", {}):
        _draw_quay(ax, scenario, frame, Polygon)
    # overlaps: the cells between the tiles' edges that two tiles or more cover, shaded once
    xs, ys = np.unique(tiles[:, [0, 2]]), np.unique(tiles[:, [1, 3]])
    for a0, a1 in zip(xs[:-1], xs[1:], strict=True):
        for b0, b1 in zip(ys[:-1], ys[1:], strict=True):
            mx, my = (a0 + a1) / 2, (b0 + b1) / 2
            over_x = (tiles[:, 0] <= mx) & (mx <= tiles[:, 2])
            if (over_x & (tiles[:, 1] <= my) & (my <= tiles[:, 3])).sum() >= 2:
                ax.add_patch(
                    Rectangle((a0, b0), a1 - a0, b1 - b0, facecolor=_OVERLAP, alpha=0.6, lw=0)
                )
    for k, (tx0, ty0, tx1, ty1) in enumerate(tiles):
        ax.add_patch(
            Rectangle(
                (tx0, ty0), tx1 - tx0, ty1 - ty0, fill=False, ec=_TILE_EDGE, lw=1.3, ls=(0, (6, 3))
            )
        )
        ax.annotate(
            f"tile {k}",
            (tx0, ty0),
            xytext=(4, -11 if scenario.y_down else 4),
            textcoords="offset points",
            fontsize=8,
            color=_TILE_EDGE,
            bbox={"boxstyle": "round,pad=0.15", "fc": "white", "ec": "none", "alpha": 0.8},
        )
    navy, amber, magenta, grey = (
        PALETTE[k] for k in ("truth", "matched", "false_positive", "ignored")
    )
    if len(t_out):
        ax.add_collection(LineCollection(list(t_out), colors=navy, linewidths=0.5, alpha=0.5))
    styles = {
        "suppressed": {"colors": grey, "linewidths": 0.6, "alpha": 0.8},
        "kept": {"colors": amber, "linewidths": 0.9},
        "at seam": {"colors": magenta, "linewidths": 1.3, "linestyles": (0, (3, 1.5))},
    }
    for key, kw in styles.items():
        mask = status == key
        if mask.any():
            ax.add_collection(LineCollection(list(d_out[mask]), **kw))
    n = {k: int((status == k).sum()) for k in styles}
    handles = [
        Line2D([], [], color=_TILE_EDGE, lw=1.3, ls=(0, (6, 3)), label=f"tile ({len(tiles)})"),
        Patch(facecolor=_OVERLAP, label="overlap of tiles"),
        Line2D([], [], color=navy, lw=0.8, alpha=0.6, label=f"truth ({len(t_out)})"),
        Line2D([], [], color=amber, lw=1.4, label=f"tile detection, kept ({n['kept']})"),
        Line2D(
            [],
            [],
            color=magenta,
            lw=1.4,
            ls=(0, (3, 1.5)),
            label=f"cut at a tile edge, dropped ({n['at seam']})",
        ),
        Line2D(
            [],
            [],
            color=grey,
            lw=1.2,
            label=f"copy, suppressed at IoU > {max_iou:g} ({n['suppressed']})",
        ),
    ]
    ax.legend(
        handles=handles,
        loc="upper center",
        bbox_to_anchor=(0.5, 0.0),
        bbox_transform=offset_copy(ax.transAxes, fig=fig, y=-34, units="points"),
        ncol=3,
        fontsize=8.5,
        frameon=False,
        title="merging the detector's tiles into one set (obbiou.tiles.merge)",
        title_fontsize=8.5,
    )
    ax.set_xlabel("x (pixels, 0.15 m per pixel)")
    ax.set_ylabel("y (pixels, pointing down)")
    ax.set_title(
        f"{scenario.units}\nINVENTED DATA from a seeded simulation, not a real scene or detector",
        fontsize=8.5,
        color="#555555",
        loc="left",
        pad=5,
    )
    return _titled_save(fig, ax, f"{scenario.title}: {frame}, the detector's tiles", path)


def _draw_quay(ax: Any, scenario: Any, frame: str, polygon: Any) -> None:
    """Shade the water side of the harbour mosaic's quay edge (pixel frame)."""
    from obbiou.demo.scenarios import HARBOUR_METRES_PER_PIXEL, HARBOUR_TILE

    offset, theta = scenario.layout["quay"][frame]
    along = np.array([np.cos(theta), np.sin(theta)])
    across = np.array([-np.sin(theta), np.cos(theta)])
    centre = np.full(2, HARBOUR_TILE / 2) + across * offset / HARBOUR_METRES_PER_PIXEL
    far = 4 * HARBOUR_TILE
    water = [
        centre - along * far,
        centre + along * far,
        centre + along * far + across * far,
        centre - along * far + across * far,
    ]
    ax.add_patch(polygon(water, closed=True, facecolor=_WATER, edgecolor="none", zorder=0))
    edge = np.array([centre - along * far, centre + along * far])
    ax.plot(edge[:, 0], edge[:, 1], color="#b8c4d0", lw=1.0, zorder=0.5)
    label_at = centre + across * 40 / HARBOUR_METRES_PER_PIXEL
    if 0 <= label_at[0] <= HARBOUR_TILE and 0 <= label_at[1] <= HARBOUR_TILE:
        ax.annotate("water", label_at, fontsize=8, color="#8fa3b8", ha="center")


def _draw_racks(ax: Any, scenario: Any, frame: str, polygon: Any) -> None:
    """Shade the two rack rows beside the robot's aisle (sensor frame)."""
    from obbiou.demo import scenarios as sc

    pose = scenario.layout.get("poses", {}).get(frame)
    if pose is None:
        return
    rx, ry, ryaw = pose
    c, s = np.cos(ryaw), np.sin(ryaw)
    for side in (-1, 1):
        y0 = ry + side * sc._AISLE / 2
        y1 = ry + side * (sc._AISLE / 2 + sc._RACK_DEPTH)
        world = np.array([[0, y0], [sc._RACK_LENGTH, y0], [sc._RACK_LENGTH, y1], [0, y1]])
        d = world - [rx, ry]
        local = np.stack([c * d[:, 0] + s * d[:, 1], -s * d[:, 0] + c * d[:, 1]], axis=1)
        ax.add_patch(
            polygon(local, closed=True, facecolor="#f1f1f1", edgecolor="#d5d5d5", lw=0.6, zorder=0)
        )
        mid = local[:, 1].mean()
        ax.annotate(
            "rack",
            (local[:, 0].min(), mid),
            xytext=(-3, 0),
            textcoords="offset points",
            fontsize=7.5,
            color="#9a9a9a",
            ha="right",
            va="center",
        )


def _titled_save(fig: Any, ax: Any, title: str, path: Path) -> Path:
    """Title above the axes, small tick labels, and the figure saved to ``path``: the
    common end of the demo's pictures."""
    ax.annotate(
        title,
        (0, 1),
        xycoords="axes fraction",
        xytext=(0, 32),
        textcoords="offset points",
        fontsize=12.5,
        va="bottom",
    )
    ax.tick_params(labelsize=8)
    fig.tight_layout()
    path.parent.mkdir(parents=True, exist_ok=True)
    fig.savefig(path, bbox_inches="tight", pad_inches=0.25)
    return path
