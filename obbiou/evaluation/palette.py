"""The project palette (docs/design.md, "Command line"): the one definition of its colours.

Ground truth navy (solid; misses dotted), matched detections amber, false positives magenta
(dashed). Pictures of scenes and precision-recall curves both take their colours from here.

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

#: Colours of the curves of several labels: the palette, then lighter and darker shades of it.
LINE_COLOURS = (
    PALETTE["truth"],
    PALETTE["matched"],
    PALETTE["false_positive"],
    "#5a7bb5",
    "#8a6d00",
    "#d873b4",
)
#: Line styles, for labels beyond the colours.
LINE_STYLES = ("-", "--", "-.", ":")
