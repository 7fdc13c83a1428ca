"""Sanity checks of evaluation input: likely mistakes in valid tables become warnings.

A detector evaluated against truth whose frame ids or labels are written differently gets
an AP of 0 without any error; angles in degrees read as radians give a wrong but plausible
AP. :func:`warn_likely_mistakes` looks for these before matching and warns
(:class:`obbiou.errors.LikelyMistake`; the command line prints each as one line on stderr):

* the tables share no frame id — and, when they would once integer-valued text is read as
  an integer (``7`` against ``"007"``), it says so;
* a detection label equals a truth label only up to letter case or surrounding spaces;
* no detection label is a truth label at all;
* more than a tenth of the angles lie beyond 2π in magnitude (rule of thumb, no source:
  radians of real boxes stay within ±2π, degrees mostly do not) without ``degrees=True``.
"""

from __future__ import annotations

import warnings

import numpy as np

from obbiou.errors import LikelyMistake
from obbiou.tables import Table, comparable_frame_ids

__all__ = ["warn_likely_mistakes"]

#: Share of angles beyond 2*pi above which they look like degrees (rule of thumb).
DEGREES_SHARE = 0.1


def _as_integer(value: object) -> int | None:
    """The integer a frame id names when it is integer-valued text or number, else None."""
    if isinstance(value, (int, np.integer)) and not isinstance(value, bool):
        return int(value)
    text = str(value).strip()
    if text.lstrip("+-").isdigit():
        return int(text)
    return None


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
    truth and detections share no frame id as written, but 1 frame m ...
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


def _frame_messages(truth: Table, detections: Table) -> list[str]:
    tid, did = comparable_frame_ids([truth.frame, detections.frame])
    t_set, d_set = set(tid.tolist()), set(did.tolist())
    if t_set & d_set:
        return []
    t_int = {_as_integer(v): v for v in np.unique(truth.frame).tolist()}
    d_int = {_as_integer(v): v for v in np.unique(detections.frame).tolist()}
    common = (set(t_int) & set(d_int)) - {None}
    if common:
        k = sorted(common)[0]
        return [
            f"truth and detections share no frame id as written, but {len(common)} frame"
            f"{'' if len(common) == 1 else 's'} match{'es' if len(common) == 1 else ''} once "
            f"ids are read as integers (e.g. truth {t_int[k]!r}, detections {d_int[k]!r}): "
            "frame ids compare as text here; write them the same way in both tables"
        ]
    return [
        f"truth and detections share no frame id (truth e.g. {_example(t_set)}, detections "
        f"e.g. {_example(d_set)}): every detection is a false positive, every truth a miss"
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
