"""Evaluation results as text: the summary table, the breakdowns, the comparison.

These functions read a result only through its public methods (``ap``, ``counts``,
``thresholds_of``, ``protocol``, ``false_positives``, ``misses``, ``orientation_error``), so
they import nothing from :mod:`obbiou.evaluation.result` and the result can call them.
"""

from __future__ import annotations

import math
from typing import Any

__all__ = [
    "SAFETY_NOTE",
    "rule_text",
    "summary_text",
    "tp_errors_text",
    "causes_text",
    "interval_text",
    "buckets_text",
    "comparison_text",
]

SAFETY_NOTE = (
    "Detection metrics only: they do not establish that a vehicle, robot or any other system "
    "is safe. Defer to the applicable safety standards, local regulation and qualified "
    "engineers."
)


def rule_text(criterion: str, threshold: Any) -> str:
    """The matching rule at a threshold (or several), as shown in summaries, JSON and plots.

    Examples
    --------
    >>> rule_text("iou", 0.5), rule_text("bev", 0.7), rule_text("distance", 1.0)
    ('IoU ≥ 0.5', 'BEV IoU ≥ 0.7', 'distance ≤ 1 m')
    >>> rule_text("distance", [0.5, 1, 2, 4])
    'distance ≤ 0.5, 1, 2, 4 m'
    """
    if isinstance(threshold, (int, float)):
        values = f"{threshold:g}"
    else:
        values = ", ".join(f"{t:g}" for t in threshold)
    if criterion == "distance":
        return f"distance ≤ {values} m"
    return f"{'BEV IoU' if criterion == 'bev' else 'IoU'} ≥ {values}"


#: Column heading of the threshold in the text tables, per criterion.
_COLUMN = {"iou": "IoU>=", "bev": "BEV>=", "distance": "dist<="}


def _shown(criterion: str, t: float) -> str:
    return f"{t:g}m" if criterion == "distance" else f"{t:.2f}"


def summary_text(evaluation: Any, *, note: bool = True) -> str:
    """One line per label and threshold (AP and counts), the means, the mean AP of each size
    or range bucket (when there are buckets), and the safety note (``note=False``: without
    it, for a report that says it once elsewhere)."""
    protocol = evaluation.protocol()
    points = protocol["recall_points"]
    kind = protocol["ap"] if points is None else f"{points}-point"
    records = evaluation.records
    criterion = getattr(evaluation, "criterion", "iou")
    matched = {
        "iou": "matched by IoU",
        "bev": "matched by BEV IoU (ground-plane footprints)",
        "distance": "matched by ground-plane centre distance",
    }[criterion]
    head = (
        f"obbiou evaluation | {records.shape} boxes | {matched} | AP {kind} | "
        f"{len(evaluation.frames)} frames | {records.n_detections} detections | "
        f"{records.n_truths} truths"
    )
    if evaluation.bucket is not None:
        head += f" | {evaluation.bucket[1]} bucket {evaluation.bucket[0]}"
    cols = ("label", _COLUMN[criterion], "AP", "TP", "FP", "ignored", "missed", "capped")
    width = max([len(c) for c in evaluation.labels] + [5])
    lines = [head, ""]
    fmt = f"{{:<{width}}}  {{:>6}}  {{:>7}}  {{:>7}}  {{:>7}}  {{:>7}}  {{:>7}}  {{:>6}}"
    lines.append(fmt.format(*cols))
    lines.append("-" * len(lines[-1]))
    for lab in evaluation.labels:
        for t in evaluation.thresholds_of(lab):
            v, c = evaluation.ap(lab, t), evaluation.counts(lab, t)
            shown = "   n/a" if v is None else f"{v:.4f}"
            lines.append(
                fmt.format(
                    lab, _shown(criterion, t), shown, c.tp, c.fp, c.ignored, c.missed, c.capped
                )
            )
    lines.append("")
    for t in evaluation.thresholds:
        m = evaluation.mean_ap(t)
        rule = rule_text(criterion, t)
        lines.append(f"mean AP at {rule}: " + ("n/a" if m is None else f"{m:.4f}"))
    if len(evaluation.thresholds) > 1:
        m = evaluation.mean_ap()
        lines.append("mean AP over all thresholds: " + ("n/a" if m is None else f"{m:.4f}"))
    undefined = [lab for lab in evaluation.labels if evaluation.ap(lab) is None]
    if undefined:
        lines.append(f"no truths (left out of mean AP): {', '.join(undefined)}")
    points = evaluation.point_counts() if hasattr(evaluation, "point_counts") else None
    if points is not None and points["min_points"] is not None:
        aside = sum(v["set_aside"] for v in points["labels"].values())
        total = sum(v["truths"] for v in points["labels"].values())
        lines.append(
            f"truths with fewer than {points['min_points']} lidar points set aside (ignore): "
            f"{aside} of {total}"
        )
    if hasattr(evaluation, "tp_error") and evaluation.labels:
        lines.append("")
        lines.append(tp_errors_text(evaluation))
    if evaluation.buckets:
        lines += ["", buckets_text(evaluation), ""]
    if note:
        lines.append(SAFETY_NOTE)
    return "\n".join(lines)


def tp_errors_text(evaluation: Any) -> str:
    """Errors of true positives, one line per label at its most lenient threshold.

    Centre distance (mean, in the boxes' unit), size error (mean of 1 - IoU after aligning
    centre and heading), orientation error (mean, degrees) and, for upright boxes, the
    heading-weighted AP (APH). ``n/a`` where undefined.
    """
    criterion = getattr(evaluation, "criterion", "iou")
    upright = evaluation.records.shape == "upright"
    width = max([len(c) for c in evaluation.labels] + [5])
    fmt = f"  {{:<{width}}}  {{:>6}}  {{:>6}}  {{:>11}}  {{:>10}}  {{:>11}}  {{:>7}}"
    cols = ("label", _COLUMN[criterion], "TP", "centre dist", "size err", "orient deg", "APH")
    lines = ["Errors of true positives (means over the TPs):", fmt.format(*cols)]

    def show(v: float | None, f: str) -> str:
        return "n/a" if v is None or math.isnan(v) else format(v, f)

    for lab in evaluation.labels:
        own = evaluation.thresholds_of(lab)
        t = max(own) if criterion == "distance" else min(own)
        e = evaluation.tp_error(lab, t)
        orient = None if e.orientation_error is None else math.degrees(e.orientation_error)
        lines.append(
            fmt.format(
                lab,
                _shown(criterion, t),
                e.tp,
                show(e.centre_distance, ".3f"),
                show(e.size_error, ".3f"),
                show(orient, ".2f"),
                show(e.heading_ap, ".4f") if upright else "n/a",
            )
        )
    return "\n".join(lines)


def causes_text(evaluation: Any, iou: float | None = None) -> str:
    """Causes of false positives and misses per label, and the orientation error, as text.

    Each label is reported at ``iou`` or, by default, at its own most lenient threshold
    (lowest IoU, largest distance; labels may have thresholds of their own).
    """
    per_label = evaluation.to_dict(breakdowns=False)["labels"]
    criterion = getattr(evaluation, "criterion", "iou")
    at: dict[str, float] = {}
    for lab, entry in per_label.items():
        own = sorted(float(k) for k in entry["ap"])
        if iou is None:  # the label's most lenient threshold
            at[lab] = own[-1] if criterion == "distance" else own[0]
        elif any(abs(float(iou) - v) < 1e-9 for v in own):
            at[lab] = float(iou)
    fps: dict[str, Any] = {}
    misses: dict[str, Any] = {}
    for t in sorted(set(at.values())):
        for lab, c in evaluation.false_positives(t).items():
            if at.get(lab) == t:
                fps[lab] = c
        for lab, c in evaluation.misses(t).items():
            if at.get(lab) == t:
                misses[lab] = c
    width = max([len(str(lab)) for lab in at] + [5])
    row = f"  {{:<{width}}}  {{:>6}}  {{:>9}}  {{:>11}}  {{:>11}}  {{:>10}}  {{:>6}}"
    col = _COLUMN[criterion]
    lines = ["False positives by cause:"]
    lines.append(
        row.format("label", col, "duplicate", "wrong label", "poor boxes", "background", "total")
    )
    for lab, c in fps.items():
        lines.append(
            row.format(
                lab,
                _shown(criterion, at[lab]),
                c.duplicate,
                c.wrong_label,
                c.poor_localisation,
                c.background,
                c.total,
            )
        )
    lines.append("Missed truths by cause:")
    lines.append(
        row.format("label", col, "crowded", "wrong label", "poor boxes", "not found", "total")
    )
    for lab, c in misses.items():
        lines.append(
            row.format(
                lab,
                _shown(criterion, at[lab]),
                c.crowded,
                c.wrong_label,
                c.poor_localisation,
                c.not_detected,
                c.total,
            )
        )
    if evaluation.records.shape not in ("axis", "axis3"):
        upright = evaluation.records.shape == "upright"
        period = (
            "heading modulo 360°"
            if upright
            else "long axes modulo 180°, sides modulo 90° when near-square"
        )
        lines.append(f"Orientation error of matched pairs ({period}, degrees):")
        last = "flipped" if upright else "near-sq."
        lines.append(row.format("label", col, "pairs", "mean", "median", "90th pct", last))

        def deg(v: float | None) -> str:
            return "n/a" if v is None or math.isnan(v) else f"{math.degrees(v):.2f}"

        rows = [(lab, t) for lab, t in at.items()]
        if len(set(at.values())) == 1 and len(at) > 1:
            rows.append((None, next(iter(at.values()))))  # all labels at the one threshold
        for lab, t in rows:
            e = evaluation.orientation_error(t, label=lab)
            flipped = f"{e.flipped:.1%}" if upright else e.near_square
            lines.append(
                row.format(
                    "all" if lab is None else lab,
                    _shown(criterion, t),
                    e.pairs,
                    deg(e.mean),
                    deg(e.median),
                    deg(e.p90),
                    flipped,
                )
            )
    return "\n".join(lines)


def interval_text(
    evaluation: Any, *, resamples: int = 1000, level: float = 0.95, seed: Any = 0
) -> str:
    """mean AP with its bootstrap interval over frames, as one line."""
    lo, hi = evaluation.interval(resamples=resamples, level=level, seed=seed)
    return (
        f"mean AP {evaluation.mean_ap():.4f}, {level:.0%} interval [{lo:.4f}, {hi:.4f}]"
        f" (bootstrap over frames, {resamples} resamples, seed {seed})"
    )


def buckets_text(evaluation: Any) -> str:
    """mean AP of each size or range bucket, one block per kind of bucket ("" if none).

    Examples
    --------
    >>> from obbiou.evaluation import evaluate
    >>> box = {"x_min": [0, 10], "y_min": [0, 0], "x_max": [1, 15], "y_max": [1, 5]}
    >>> ev = evaluate({"frame": [0, 0], "label": ["cone"] * 2, **box},
    ...               {"frame": [0], "label": ["cone"], "score": [0.9],
    ...                **{k: v[:1] for k, v in box.items()}}, size_buckets=[0, 2, 100])
    >>> print(buckets_text(ev))
    mean AP by size:
                 0-2: 1.0000
               2-100: 0.0000
    """
    blocks = []
    for by, group in evaluation.buckets.items():
        lines = [f"mean AP by {by}:"]
        for name, sub in group.items():
            m = sub.mean_ap()
            lines.append(f"  {name:>14}: " + ("n/a" if m is None else f"{m:.4f}"))
        blocks.append("\n".join(lines))
    return "\n\n".join(blocks)


def comparison_text(comparison: Any) -> str:
    """A short text report of a paired comparison (:class:`obbiou.evaluation.Comparison`)."""
    lo, hi = comparison.interval
    a = comparison.a
    criterion = getattr(a, "criterion", "iou")
    rule = rule_text(criterion, a.thresholds)
    return "\n".join(
        [
            f"obbiou comparison | {len(comparison.frames)} frames | "
            f"{comparison.resamples} paired resamples | matched at {rule}",
            f"mean AP  A: {comparison.mean_ap_a:.4f}   B: {comparison.mean_ap_b:.4f}",
            f"B - A: {comparison.difference:+.4f}   {comparison.level:.0%} interval "
            f"[{lo:+.4f}, {hi:+.4f}]   p = {comparison.p_value:.4f}",
            "p: two-sided paired bootstrap test of no difference (resampled differences "
            "centred on zero).",
            *_label_rows(comparison),
            SAFETY_NOTE,
        ]
    )


def _label_rows(comparison: Any) -> list[str]:
    """Per label: AP of A and B, B - A, its interval and p (not corrected for many labels)."""
    if not comparison.labels:
        return []
    width = max([len(lab) for lab in comparison.labels] + [5])
    row = f"  {{:<{width}}}  {{:>7}}  {{:>7}}  {{:>8}}  {{:>19}}  {{:>6}}"
    lines = ["", "By label (AP over each label's thresholds; p not corrected for many labels):"]
    lines.append(row.format("label", "AP A", "AP B", "B - A", "interval", "p"))
    for lab, c in comparison.labels.items():
        lo, hi = c.interval
        lines.append(
            row.format(
                lab,
                f"{c.ap_a:.4f}",
                f"{c.ap_b:.4f}",
                f"{c.difference:+.4f}",
                f"[{lo:+.4f}, {hi:+.4f}]",
                f"{c.p_value:.4f}",
            )
        )
    lines.append("")
    return lines
