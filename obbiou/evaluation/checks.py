"""Sanity checks of evaluation input: likely mistakes in valid tables become warnings.

A detector evaluated against truth whose frame ids or labels are written differently gets
an AP of 0 without any error; angles in degrees read as radians give a wrong but plausible
AP. :func:`warn_likely_mistakes` looks for these before matching and warns
(:class:`obbiou.errors.LikelyMistake`; the command line prints each as one line on stderr):

* the tables share no frame id; or they share frames only by the frame-id rule
  (:func:`obbiou.tables.frame_ids`), which reads integer-valued text as the integer, while
  no id is written alike in both (``7`` against ``"007"``);
* a detection label equals a truth label only up to letter case or surrounding spaces;
* no detection label is a truth label at all;
* more than a tenth of the angles lie beyond 2π in magnitude (rule of thumb, no source:
  radians of real boxes stay within ±2π, degrees mostly do not) without ``degrees=True``.
"""

from __future__ import annotations

import warnings
from typing import Any

import numpy as np

from obbiou.errors import LikelyMistake
from obbiou.tables import Table, comparable_frame_ids

__all__ = ["warn_likely_mistakes"]

#: Share of angles beyond 2*pi above which they look like degrees (rule of thumb).
DEGREES_SHARE = 0.1


def _example(values: set) -> str:
    return repr(sorted(values, key=str)[0])


def warn_likely_mistakes(truth: Table, detections: Table, *, degrees: bool) -> list[str]:
    """Warn about likely mistakes in a truth and a detections table; the messages.

    Examples
    --------
    >>> from obbiou.tables import read_table
    >>> box = {"cx": [0.0], "cy": [0.0], "width": [2.0], "height": [1.0], "angle": [0.3]}
    >>> t = read_table({"frame": [7], "label": ["Panel"], **box}, role="truth")
    >>> d = read_table({"frame": ["007"], "label": ["panel "], "score": [0.9], **box},
    ...                role="detections")
    >>> with warnings.catch_warnings():
    ...     warnings.simplefilter("ignore")
    ...     for line in warn_likely_mistakes(t, d, degrees=False):
    ...         print(line[:64] + " ...")
    truth and detections share no frame id as written; 1 frame match ...
    detection label 'panel ' equals truth label 'Panel' only up to l ...
    no detection label is a truth label (detections: 'panel ', truth ...
    """
    messages: list[str] = []
    if len(truth) and len(detections):
        messages += _frame_messages(truth, detections)
        messages += _label_messages(truth, detections)
    if not degrees:
        messages += _angle_messages(truth, "truth") + _angle_messages(detections, "detections")
    for message in messages:
        warnings.warn(message, LikelyMistake, stacklevel=3)
    return messages


def _written(table: Table, ids: np.ndarray) -> dict[Any, Any]:
    """Each frame (by its comparable id) and the id as first written (int or text)."""
    written = table.frame if table.frame_written is None else table.frame_written
    _, first = np.unique(ids, return_index=True)
    return {ids[i]: written[i].item() if hasattr(written[i], "item") else written[i]
            for i in first.tolist()}  # fmt: skip


def _frame_messages(truth: Table, detections: Table) -> list[str]:
    tid, did = comparable_frame_ids([truth.frame, detections.frame])
    t_written, d_written = _written(truth, tid), _written(detections, did)
    common = set(t_written) & set(d_written)
    if not common:
        return [
            f"truth and detections share no frame id (truth e.g. "
            f"{_example(set(t_written.values()))}, detections e.g. "
            f"{_example(set(d_written.values()))}): every detection is a false positive, "
            "every truth a miss"
        ]
    if {str(v) for v in t_written.values()} & {str(v) for v in d_written.values()}:
        return []
    k = sorted(common, key=str)[0]
    n = len(common)
    return [
        f"truth and detections share no frame id as written; {n} frame"
        f"{'' if n == 1 else 's'} match{'es' if n == 1 else ''} only because integer-valued "
        f"text names the integer (e.g. truth {t_written[k]!r}, detections {d_written[k]!r}: "
        "one frame by the frame-id rule); if they are different frames, write the ids as "
        "names that are not numbers"
    ]


def _label_messages(truth: Table, detections: Table) -> list[str]:
    t_labels = {str(v) for v in truth.label.tolist()}
    d_labels = {str(v) for v in detections.label.tolist()}
    folded = {t.strip().casefold(): t for t in t_labels}
    messages = []
    for d in sorted(d_labels - t_labels):
        t = folded.get(d.strip().casefold())
        if t is not None:
            messages.append(
                f"detection label {d!r} equals truth label {t!r} only up to letter case or "
                "spaces (labels compare exactly)"
            )
    if not d_labels & t_labels:
        shown_d = ", ".join(map(repr, sorted(d_labels)[:3]))
        shown_t = ", ".join(map(repr, sorted(t_labels)[:3]))
        messages.append(
            f"no detection label is a truth label (detections: {shown_d}, truth: {shown_t}): "
            "every detection is a false positive"
        )
    return messages


def _angle_messages(table: Table, role: str) -> list[str]:
    column = {"rotated": 4, "upright": 6}.get(table.shape)
    if column is None or len(table) == 0:
        return []
    angle = np.abs(table.boxes.data[:, column])
    beyond = int((angle > 2 * np.pi).sum())
    if beyond <= DEGREES_SHARE * len(angle):
        return []
    name = "angle" if table.shape == "rotated" else "yaw"
    return [
        f"{role}: {beyond} of {len(angle)} {name} values lie beyond 2*pi (up to "
        f"{float(angle.max()):.4g}): they look like degrees; pass degrees=True (--degrees) "
        "if they are"
    ]
