"""Precision-recall curves on a matplotlib Figure, in the project palette.

The curves are drawn on a :class:`matplotlib.figure.Figure` of their own (no pyplot, no
global backend switch), so that plotting inside a notebook or a GUI program leaves its
matplotlib state alone. A result is read through its public methods only (``labels``,
``thresholds``, ``threshold``, ``thresholds_of``, ``ap``, ``curve``, ``mean_ap``, ``rule``).
"""

from __future__ import annotations

from typing import Any

from obbiou.evaluation.palette import LINE_COLOURS, LINE_STYLES

__all__ = ["curve_thresholds", "draw_curves", "plot_curves"]


def curve_thresholds(evaluation: Any, iou: float | None = None) -> dict[str, float]:
    """The threshold each label's curve is drawn at: ``iou`` for the labels evaluated there;
    by default each label's own most lenient threshold (its lowest IoU or largest distance;
    labels may have thresholds of their own).

    Examples
    --------
    >>> from obbiou.evaluation import evaluate
    >>> box = {"frame": [0, 0], "label": ["car", "van"], "x_min": [0, 5], "y_min": [0, 0],
    ...        "x_max": [2, 7], "y_max": [1, 1]}
    >>> ev = evaluate(box, dict(box, score=[0.9, 0.8]), iou={"car": 0.7, None: [0.5, 0.6]})
    >>> curve_thresholds(ev), curve_thresholds(ev, 0.6)
    ({'car': 0.7, 'van': 0.5}, {'van': 0.6})
    """
    if iou is None:
        lenient = max if evaluation.criterion == "distance" else min
        return {lab: lenient(evaluation.thresholds_of(lab)) for lab in evaluation.labels}
    t = evaluation.threshold(iou)
    return {lab: t for lab in evaluation.labels if t in evaluation.thresholds_of(lab)}


def draw_curves(
    evaluation: Any, figure: Any, *, iou: float | None = None, title: str | None = None
) -> Any:
    """Draw the precision-recall curves of every label with truths on ``figure``.

    Each label is drawn at ``iou`` or, by default, at its own most lenient threshold (lowest
    IoU, largest distance; see
    :func:`curve_thresholds`; a label with a threshold of its own, cars at 0.7, is drawn at
    it); the legend names the threshold when labels differ. ``title``, when given, heads the
    figure above the caption. The step curve is drawn as evaluated (precision after each
    ranked detection) with its monotone envelope as a thicker line; the precision axis
    starts just below the lowest precision drawn. Returns the axes.

    Examples
    --------
    >>> from matplotlib.figure import Figure
    >>> from obbiou.evaluation import evaluate
    >>> box = {"cx": [0.0, 9.0], "cy": [0.0, 0.0], "width": [2.0] * 2, "height": [1.0] * 2,
    ...        "angle": [0.0] * 2}
    >>> ev = evaluate({"frame": [0, 0], "label": ["ship", "crane"], **box},
    ...               {"frame": [0], "label": ["ship"], "score": [0.9],
    ...                **{k: v[:1] for k, v in box.items()}})
    >>> ax = draw_curves(ev, Figure())
    >>> [t.get_text() for t in ax.get_legend().get_texts()]  # crane: truths, no detections
    ['crane  AP 0.000', 'ship  AP 1.000']
    """
    import numpy as np

    at = curve_thresholds(evaluation, iou)
    one = len(set(at.values())) <= 1
    ax = figure.subplots()
    drawn, lowest = 0, 1.0
    for i, lab in enumerate(evaluation.labels):
        if lab not in at:
            continue
        t = at[lab]
        value = evaluation.ap(lab, t)
        if value is None:
            continue
        c = evaluation.curve(lab, t)
        colour = LINE_COLOURS[i % len(LINE_COLOURS)]
        style = LINE_STYLES[(i // len(LINE_COLOURS)) % len(LINE_STYLES)]
        r = np.r_[0.0, c.recall]
        p = np.r_[c.precision[:1] if len(c.precision) else 0.0, c.precision]
        envelope = np.maximum.accumulate(p[::-1])[::-1]
        lowest = min(lowest, float(p.min()))
        ax.plot(r, p, color=colour, linestyle=style, linewidth=1.0, alpha=0.45)
        name = f"{lab}  AP {value:.3f}" + ("" if one else f"  ({evaluation.rule(t)})")
        ax.step(r, envelope, where="pre", color=colour, linestyle=style, linewidth=1.8, label=name)
        drawn += 1
    ax.set_xlim(0, 1.0)
    # the precision axis fits the data: from a tenth below the lowest precision drawn
    ax.set_ylim(max(0.0, np.floor(lowest * 10 - 0.5) / 10) if drawn else 0.0, 1.02)
    ax.set_xlabel("recall")
    ax.set_ylabel("precision")
    if one and at:
        t = next(iter(at.values()))
        caption = f"precision vs recall at {evaluation.rule(t)}"
        m = evaluation.mean_ap(t)
        if m is not None:
            caption += f"   (mean AP {m:.3f})"
    else:
        caption = "precision vs recall, each label at its own threshold"
    left_out = [lab for lab in evaluation.labels if lab not in at]
    if left_out:
        caption += f"\nnot evaluated at {evaluation.rule(iou)}: {', '.join(left_out)}"
    ax.set_title(caption, fontsize=10, loc="left")
    if title:
        figure.suptitle(title, fontsize=11, x=0.02, ha="left")
    ax.grid(True, color="#d9d9d9", linewidth=0.6)
    if drawn:
        ax.legend(loc="lower left", fontsize=8, frameon=False)
    else:
        ax.text(0.5, 0.5, "no label with ground truth", ha="center", transform=ax.transAxes)
    figure.text(
        0.01,
        0.01,
        "Detection metric only: not evidence that a system is safe.",
        fontsize=7,
        color="#555555",
    )
    figure.tight_layout(rect=(0, 0.03, 1, 1))
    return ax


def plot_curves(
    evaluation: Any, path: Any, *, iou: float | None = None, title: str | None = None
) -> None:
    """Write the precision-recall curves of :func:`draw_curves` to ``path`` as PNG."""
    from matplotlib.figure import Figure

    figure = Figure(figsize=(6.4, 5.2), dpi=110)
    draw_curves(evaluation, figure, iou=iou, title=title)
    figure.savefig(path, format="png")
