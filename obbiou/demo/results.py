"""The demo's per-row results and operating points for one scenario.

:func:`results_section` writes ``<scenario>/rows.detections.csv`` and ``rows.truths.csv``
(:meth:`Evaluation.detections` / :meth:`Evaluation.truths` at the headline threshold) and
gives the report's lines: a few rows of the detection table, one of each outcome and cause
found, and the operating points (the best score cut per label, and a fixed cut).
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

__all__ = ["results_section", "SHOWN_COLUMNS"]

#: Columns of the per-detection table shown in the report.
SHOWN_COLUMNS = ("frame", "label", "score", "outcome", "truth", "iou", "best_iou", "cause")


def _sample(table: Any, limit: int = 8) -> Any:
    """The first row of each (outcome, cause) found, in input order, at most ``limit``."""
    kinds = table["outcome"].astype(str) + "/" + table["cause"].fillna("-").astype(str)
    first = ~kinds.duplicated()
    return table[first].head(limit)


def results_section(
    ev: Any, iou: float, folder: Path, cut: float = 0.5
) -> tuple[list[str], dict[str, Path], dict[str, Any]]:
    """Report lines, written files and JSON for the per-row results of one scenario.

    Examples
    --------
    >>> import tempfile
    >>> from pathlib import Path
    >>> from obbiou.evaluation import evaluate
    >>> box = {"cx": [0.0, 30.0], "cy": [0.0, 0.0], "width": [20.0] * 2,
    ...        "height": [6.0] * 2, "angle": [0.2] * 2}
    >>> truth = {"frame": ["tile-0"] * 2, "label": ["vessel"] * 2, **box}
    >>> dets = {"frame": ["tile-0"] * 2, "label": ["vessel"] * 2, "score": [0.9, 0.4],
    ...         **box, "cy": [0.0, 40.0]}
    >>> lines, files, doc = results_section(evaluate(truth, dets), 0.5,
    ...                                     Path(tempfile.mkdtemp()))
    >>> sorted(files), doc["operating_points"]["best"]["vessel"]["score"]
    (['rows.detections.csv', 'rows.truths.csv'], 0.9)
    """
    from obbiou.evaluation.details import write_details
    from obbiou.evaluation.operating import as_dict, operating_text

    dpath, tpath = write_details(ev, folder / "rows.csv", iou)
    table = ev.detections(iou)
    shown = _sample(table)[list(SHOWN_COLUMNS)]
    best = ev.best_score(iou)
    fixed = ev.at_score(cut, iou)
    counts = table["outcome"].value_counts().to_dict()
    summary = ", ".join(f"{counts.get(k, 0)} {k}" for k in ("tp", "fp", "ignored", "capped"))
    lines = [
        "",
        f"Per-detection results at IoU >= {iou:g} ({len(table)} rows: {summary}); one row of "
        f"each outcome and cause found, from {folder.name}/{dpath.name}",
        "(truth: input row of the matched truth; cause: why a false positive is one):",
        "",
        *(
            ("  " + line).rstrip()
            for line in shown.to_string(float_format=lambda v: f"{v:.3f}").split("\n")
        ),
        "",
        *(
            "  " + line
            for line in operating_text(best, "at the best score cut (highest F1)").split("\n")
        ),
        "",
        *("  " + line for line in operating_text(fixed, f"at score >= {cut:g}").split("\n")),
    ]
    doc = {
        "details_files": [f"{folder.name}/{dpath.name}", f"{folder.name}/{tpath.name}"],
        "details_threshold": float(iou),
        "operating_points": {
            "threshold": float(iou),
            "best": as_dict(best),
            "at_score": {"score": float(cut), "labels": as_dict(fixed)},
        },
    }
    return lines, {dpath.name: dpath, tpath.name: tpath}, doc
