"""The project palette (docs/design.md, "Command line"): the one definition of its colours.

Ground truth navy (solid; misses dotted), matched detections amber, false positives magenta
(dashed), for pictures of frames; precision-recall curves of labels take colours of their own
(:data:`LINE_COLOURS`), distinct from those.

Examples
--------
>>> PALETTE["truth"], PALETTE["matched"], PALETTE["false_positive"]
('#1f3b73', '#e0a100', '#b0207a')
"""

from __future__ import annotations

__all__ = ["PALETTE", "LINE_COLOURS", "LINE_STYLES"]

PALETTE = {
    "truth": "#1f3b73",  # navy: truths solid, missed truths dotted
    "matched": "#e0a100",  # amber
    "false_positive": "#b0207a",  # magenta, dashed
    "ignored": "#9a9a9a",  # grey: ignore truths' fill, detections they absorb
}

#: Colours of the curves of several labels: a palette of their own, none of them near the
#: truth / match / false-positive colours above, so that a curve is never read as a status
#: (teal, brick, olive, violet, sky blue, ochre-brown).
LINE_COLOURS = ("#137a7f", "#b5482a", "#6b8e23", "#6a4c93", "#2c8fcc", "#8c6d31")
#: Line styles, for labels beyond the colours.
LINE_STYLES = ("-", "--", "-.", ":")
