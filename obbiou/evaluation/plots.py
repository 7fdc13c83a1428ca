"""Precision-recall curves as a PNG (matplotlib), in the project palette."""

from __future__ import annotations

from typing import TYPE_CHECKING

if TYPE_CHECKING:  # pragma: no cover
    from obbiou.evaluation.report import Evaluation

__all__ = ["PALETTE", "plot_curves"]

#: Project palette (DESIGN §7): truth navy, matched amber, false positives magenta.
PALETTE = {"truth": "#1f3b73", "matched": "#e0a100", "false_positive": "#b0207a"}
# Further labels cycle through shades derived from the palette.
_LINE_COLOURS = ("#1f3b73", "#e0a100", "#b0207a", "#5a7bb5", "#8a6d00", "#d873b4")
_LINE_STYLES = ("-", "--", "-.", ":")


def plot_curves(
    evaluation: Evaluation, path: str, *, iou: float | None = None, title: str | None = None
) -> None:
    """Write precision-recall curves of every label with truths at ``iou`` to ``path``.

    ``iou`` defaults to the lowest threshold; ``title``, when given, heads the figure above
    the per-threshold caption. The step curve is drawn as evaluated
    (precision after each ranked detection) with its monotone envelope as a thin line.
    """
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    import numpy as np

    t = min(evaluation.thresholds) if iou is None else evaluation._threshold(iou)
    fig, ax = plt.subplots(figsize=(6.4, 5.2), dpi=110)
    drawn = 0
    for i, lab in enumerate(evaluation.labels):
        if t not in evaluation._spec.of(lab):
            continue
        value = evaluation.ap(lab, t)
        if value is None:
            continue
        c = evaluation.curve(lab, t)
        colour = _LINE_COLOURS[i % len(_LINE_COLOURS)]
        style = _LINE_STYLES[(i // len(_LINE_COLOURS)) % len(_LINE_STYLES)]
        r = np.r_[0.0, c.recall]
        p = np.r_[c.precision[:1] if len(c.precision) else 0.0, c.precision]
        envelope = np.maximum.accumulate(p[::-1])[::-1]
        ax.plot(r, p, color=colour, linestyle=style, linewidth=1.0, alpha=0.45)
        ax.step(
            r,
            envelope,
            where="pre",
            color=colour,
            linestyle=style,
            linewidth=1.8,
            label=f"{lab}  AP {value:.3f}",
        )
        drawn += 1
    ax.set_xlim(0, 1.0)
    ax.set_ylim(0, 1.02)
    ax.set_xlabel("recall")
    ax.set_ylabel("precision")
    m = evaluation.mean_ap(t)
    heading, title = title, f"precision vs recall at IoU >= {t:g}"
    if m is not None:
        title += f"   (mean AP {m:.3f})"
    ax.set_title(title, fontsize=10, loc="left")
    if heading:
        fig.suptitle(heading, fontsize=11, x=0.02, ha="left")
    ax.grid(True, color="#d9d9d9", linewidth=0.6)
    if drawn:
        ax.legend(loc="lower left", fontsize=8, frameon=False)
    else:
        ax.text(0.5, 0.5, "no label with ground truth", ha="center", transform=ax.transAxes)
    fig.text(
        0.01,
        0.01,
        "Detection metric only: not evidence that a system is safe.",
        fontsize=7,
        color="#555555",
    )
    fig.tight_layout(rect=(0, 0.03, 1, 1))
    fig.savefig(path, format="png")
    plt.close(fig)
