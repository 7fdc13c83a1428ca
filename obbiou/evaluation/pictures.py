"""Pictures of one frame: truths and detections drawn by what the matching made of them.

:func:`draw_frame` draws a frame of two tables to a PNG; :func:`draw_matches` draws given
boxes and statuses on matplotlib axes (the demo adds its scene backdrops around it);
:func:`frame_statuses` reads the statuses of one frame from an :class:`Evaluation`.

Colours come from :data:`obbiou.evaluation.palette.PALETTE`: truths navy (found: solid;
missed: dotted; ignore: light fill), matched detections amber, false positives magenta
dashed, detections absorbed by an ignore truth grey. Upright 3D boxes are drawn from above
(their footprints) with a tick towards the heading. Figures are matplotlib
:class:`~matplotlib.figure.Figure` objects of their own (no pyplot, no backend switch).
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np

from obbiou.evaluation.matching import CAPPED, IGNORED, TP
from obbiou.evaluation.palette import PALETTE

__all__ = ["draw_frame", "draw_matches", "frame_statuses", "legend_below", "outlines"]

#: Status names per truth and per detection.
TRUTH_STATUSES = ("matched", "missed", "ignore")
DETECTION_STATUSES = ("matched", "false positive", "ignored", "capped")


def frame_statuses(
    evaluation: Any, frame: Any, iou: float | None = None
) -> tuple[np.ndarray, np.ndarray]:
    """Per truth and per detection of ``frame`` (in input order within the frame): its status.

    Truths: ``"matched"``, ``"missed"`` or ``"ignore"``; detections: ``"matched"``,
    ``"false positive"``, ``"ignored"`` (absorbed by an ignore truth) or ``"capped"``
    (beyond ``max_detections``). ``iou`` defaults to the most lenient threshold evaluated.

    Examples
    --------
    >>> from obbiou.evaluation import evaluate
    >>> t = {"frame": [3], "label": ["buoy"], "x_min": [0], "y_min": [0], "x_max": [1],
    ...      "y_max": [1]}
    >>> d = {"frame": [3, 3], "label": ["buoy"] * 2, "score": [0.5, 0.9],
    ...      "x_min": [5, 0], "y_min": [5, 0], "x_max": [6, 1], "y_max": [6, 1]}
    >>> [s.tolist() for s in frame_statuses(evaluate(t, d), 3)]
    [['matched'], ['false positive', 'matched']]
    """
    from obbiou.tables import comparable_frame_ids

    r = evaluation.records
    t = evaluation.threshold(iou)  # None: the most lenient
    k = int(np.flatnonzero(np.abs(np.asarray(r.thresholds) - t) < 1e-9)[0])
    want = np.array([frame], dtype=object if isinstance(frame, str) else None)
    dframe, tframe, want = comparable_frame_ids([r.det_frame, r.truth_frame, want])
    sel = np.flatnonzero(dframe == want[0])
    names = {TP: "matched", IGNORED: "ignored", CAPPED: "capped"}
    d_status = np.full(len(sel), "false positive", dtype=object)
    for rank, code in zip(r.det_rank[sel], r.det_outcome[sel, k], strict=True):
        d_status[int(rank)] = names.get(int(code), "false positive")
    sel = np.flatnonzero(tframe == want[0])
    t_status = np.full(len(sel), "missed", dtype=object)
    for rank, ignore, hit in zip(
        r.truth_rank[sel], r.truth_ignore[sel], r.truth_matched[sel, k], strict=True
    ):
        t_status[int(rank)] = "ignore" if ignore else ("matched" if hit else "missed")
    return t_status, d_status


def outlines(boxes: np.ndarray, shape: str) -> tuple[np.ndarray, np.ndarray | None]:
    """Closed 2D outlines (N, V + 1, 2) and, for upright boxes, heading ticks (N, 2, 2).

    3D boxes are seen from above (upright: their footprints).
    """
    from obbiou.boxes import corners, footprint

    if len(boxes) == 0:
        return np.zeros((0, 5, 2)), None
    flat = footprint(boxes, shape=shape) if shape == "upright" else boxes
    flat_shape = {"upright": "rotated", "axis3": "axis"}.get(shape, shape)
    if shape == "axis3":
        flat = boxes[:, [0, 1, 3, 4]]
    pts = corners(flat, shape=flat_shape)
    closed = np.concatenate([pts, pts[:, :1]], axis=1)
    ticks = None
    if shape == "upright":
        cx, cy, length, yaw = flat[:, 0], flat[:, 1], flat[:, 2], flat[:, 4]
        tip = np.stack([cx + 0.5 * length * np.cos(yaw), cy + 0.5 * length * np.sin(yaw)], 1)
        ticks = np.stack([np.stack([cx, cy], 1), tip], axis=1)
    return closed, ticks


def draw_matches(
    ax: Any,
    shape: str,
    truth_boxes: np.ndarray,
    truth_status: Any,
    detection_boxes: np.ndarray,
    detection_status: Any,
) -> list[Any]:
    """Draw truths and detections on ``ax`` by status; returns the legend handles (counts).

    Boxes are rows of layout ``shape`` (angles in radians); statuses as in
    :func:`frame_statuses`. Capped detections are not drawn (they were not evaluated).
    """
    from matplotlib.collections import LineCollection
    from matplotlib.lines import Line2D
    from matplotlib.patches import Patch, Polygon

    t_status = np.asarray(truth_status, dtype=object)
    d_status = np.asarray(detection_status, dtype=object)
    t_out, t_tick = outlines(np.asarray(truth_boxes, dtype=np.float64), shape)
    d_out, d_tick = outlines(np.asarray(detection_boxes, dtype=np.float64), shape)
    navy, amber, magenta, grey = (
        PALETTE[k] for k in ("truth", "matched", "false_positive", "ignored")
    )
    thin = 0.7 if len(t_out) > 200 else 1.1

    def lines(outlines, mask, **kw):
        if mask.any():
            ax.add_collection(LineCollection(list(outlines[mask]), **kw))

    # Ignore truths: light fill so the region reads as "not judged".
    for poly in t_out[t_status == "ignore"]:
        ax.add_patch(Polygon(poly, closed=True, facecolor=navy, alpha=0.12, edgecolor="none"))
    lines(t_out, t_status == "ignore", colors=navy, linewidths=thin * 0.8, alpha=0.6)
    lines(t_out, t_status == "matched", colors=navy, linewidths=thin * 1.6)
    lines(t_out, t_status == "missed", colors=navy, linewidths=thin * 2.0, linestyles=":")
    lines(d_out, d_status == "ignored", colors=grey, linewidths=thin * 0.8)
    lines(d_out, d_status == "matched", colors=amber, linewidths=thin * 1.1)
    dashed = (0, (4, 2))
    lines(
        d_out,
        d_status == "false positive",
        colors=magenta,
        linewidths=thin * 1.4,
        linestyles=dashed,
    )
    if t_tick is not None and d_tick is not None:
        lines(t_tick, t_status != "ignore", colors=navy, linewidths=thin)
        lines(d_tick, d_status == "matched", colors=amber, linewidths=thin)
        lines(d_tick, d_status == "false positive", colors=magenta, linewidths=thin)
    n = {k: int((t_status == k).sum()) for k in TRUTH_STATUSES}
    m = {k: int((d_status == k).sum()) for k in DETECTION_STATUSES}
    return [
        Line2D([], [], color=navy, lw=1.8, label=f"truth, found ({n['matched']})"),
        Line2D([], [], color=navy, lw=2.0, ls=":", label=f"truth, missed ({n['missed']})"),
        Patch(facecolor=navy, alpha=0.25, edgecolor=navy, label=f"ignore truth ({n['ignore']})"),
        Line2D([], [], color=amber, lw=1.6, label=f"detection, matched ({m['matched']})"),
        Line2D(
            [],
            [],
            color=magenta,
            lw=1.6,
            ls=dashed,
            label=f"false positive ({m['false positive']})",
        ),
        Line2D([], [], color=grey, lw=1.2, label=f"detection on an ignore truth ({m['ignored']})"),
    ]


def legend_below(
    ax: Any, handles: list[Any], title: str, *, columns: int, size: float, gap: float
) -> Any:
    """The status legend under the axes, ``gap`` points below them (clear of the x label)."""
    from matplotlib.transforms import offset_copy

    return ax.legend(
        handles=handles,
        loc="upper center",
        bbox_to_anchor=(0.5, 0.0),
        bbox_transform=offset_copy(ax.transAxes, fig=ax.figure, y=-gap, units="points"),
        ncol=columns,
        fontsize=size,
        frameon=False,
        title=title,
        title_fontsize=size,
    )


def draw_frame(
    truth: Any,
    detections: Any,
    frame: Any,
    path: Any,
    *,
    iou: float = 0.5,
    shape: str | None = None,
    degrees: bool = False,
    max_detections: int | None = None,
    y_down: bool = False,
    title: str | None = None,
) -> Path:
    """Draw one frame: its truths and detections coloured by the matching at ``iou``.

    The frame's rows are evaluated with the protocol of :func:`obbiou.evaluation.evaluate`
    (matching is per frame, so the statuses are those of a whole evaluation). Truths are
    labelled with their label when there are at most 40 of them.

    Parameters
    ----------
    truth, detections : path, DataFrame, mapping or Table
        Tables as :func:`~obbiou.evaluation.read_table` reads them.
    frame : int or str
        The frame to draw (compared by the rule for frame ids of :mod:`obbiou.tables`).
    path : path-like
        The PNG to write (folders are created).
    iou : float
        The IoU threshold of the matching.
    shape, degrees, max_detections
        As for :func:`~obbiou.evaluation.evaluate`.
    y_down : bool
        Image coordinates: y grows downwards.
    title : str, optional
        Title; by default the frame id and the threshold.

    Returns
    -------
    pathlib.Path
        The file written.

    Examples
    --------
    >>> import tempfile, os
    >>> t = {"frame": [3], "label": ["buoy"], "cx": [0.0], "cy": [0.0], "width": [2.0],
    ...      "height": [1.0], "angle": [0.3]}
    >>> d = dict(t, score=[0.8])
    >>> with tempfile.TemporaryDirectory() as tmp:
    ...     p = draw_frame(t, d, 3, os.path.join(tmp, "f3.png"))
    ...     p.read_bytes()[:4]
    b'\\x89PNG'
    """
    from matplotlib.figure import Figure

    from obbiou.errors import InvalidInput
    from obbiou.evaluation.protocol import evaluate
    from obbiou.tables import comparable_frame_ids, read_table

    t = read_table(truth, role="truth", shape=shape, degrees=degrees)
    d = read_table(detections, role="detections", shape=shape or t.shape, degrees=degrees)
    want = np.array([frame], dtype=object if isinstance(frame, str) else None)
    tf, df, want = comparable_frame_ids([t.frame, d.frame, want])
    t_rows, d_rows = np.flatnonzero(tf == want[0]), np.flatnonzero(df == want[0])
    if not len(t_rows) and not len(d_rows):
        raise InvalidInput("frame", f"{frame!r} is in neither the truth nor the detections")
    t, d = t.take(t_rows), d.take(d_rows)
    ev = evaluate(t, d, iou=iou, max_detections=max_detections)
    t_status, d_status = frame_statuses(ev, want[0], iou)
    layout = t.shape
    fig = Figure(figsize=(8.0, 8.0), dpi=110)
    ax = fig.subplots()
    ax.set_aspect("equal")
    handles = draw_matches(ax, layout, t.boxes.data, t_status, d.boxes.data, d_status)
    drawn = np.concatenate(
        [outlines(t.boxes.data, layout)[0], outlines(d.boxes.data, layout)[0]]
    ).reshape(-1, 2)
    if len(drawn):
        lo, hi = drawn.min(axis=0), drawn.max(axis=0)
        pad = 0.05 * max(float((hi - lo).max()), 1e-9)
        ax.set_xlim(lo[0] - pad, hi[0] + pad)
        ax.set_ylim(*((hi[1] + pad, lo[1] - pad) if y_down else (lo[1] - pad, hi[1] + pad)))
    if len(t) <= 40:
        for poly, lab in zip(outlines(t.boxes.data, layout)[0], t.label, strict=True):
            cx, cy = poly[:-1].mean(axis=0)
            ax.annotate(
                str(lab), (cx, cy), fontsize=7, color=PALETTE["truth"], ha="center", va="center"
            )
    view = " (from above)" if layout in ("upright", "axis3") else ""
    ax.set_title(title or f"frame {want[0]}{view}", fontsize=11, loc="left")
    legend_below(ax, handles, f"matching at {ev.rule(iou)}", columns=2, size=8, gap=28)
    ax.tick_params(labelsize=8)
    fig.tight_layout()
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    fig.savefig(path, format="png", bbox_inches="tight", pad_inches=0.2)
    return path
