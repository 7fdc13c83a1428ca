"""The integer codes the kernels and the public layer share: one place for each.

The public layer maps names to these enums; kernels read them as plain ints (numba folds
module-level ints into constants; pass ``int(code)`` to a kernel, never the enum member:
an enum argument is a different type and would compile the kernel a second time).

Examples
--------
>>> Measure["IOU"], int(Measure.IOU)
(<Measure.IOU: 1>, 1)
>>> Layout.of("upright"), Kind.of("polygon")
(<Layout.UPRIGHT: 3>, <Kind.POLY: 2>)
>>> Outcome(1).label
'tp'
"""

from __future__ import annotations

from enum import IntEnum

__all__ = ["Measure", "Layout", "Kind", "Outcome"]


class Measure(IntEnum):
    """Overlap measures (see :mod:`obbiou.measures`)."""

    INTERSECTION = 0
    IOU = 1
    GIOU = 2
    DIOU = 3
    COVERAGE = 4

    @classmethod
    def of(cls, name: str) -> Measure:
        """The code of a public measure name (``"iou"``, ``"giou"`` ...)."""
        return cls[name.upper()]


class Layout(IntEnum):
    """Box layouts whose boxes the kernels read straight from the input data."""

    AXIS = 0
    ROTATED = 1
    AXIS3 = 2
    UPRIGHT = 3
    POLYGON = 4

    @classmethod
    def of(cls, name: str) -> Layout:
        """The code of a layout name of :mod:`obbiou.shapes`."""
        return cls[name.upper()]


class Kind(IntEnum):
    """Prepared-row kinds: what the pair kernels compute on (``obbiou.measures.prepare``).

    ``AXIS``: axis-aligned boxes (axis, axis3); ``RECT``: rectangles with a frame (rotated,
    and the footprints of upright boxes with a z interval); ``POLY``: convex polygons.
    """

    AXIS = 0
    RECT = 1
    POLY = 2

    @classmethod
    def of(cls, layout: str) -> Kind:
        """The natural kind of a layout name."""
        return {"axis": cls.AXIS, "axis3": cls.AXIS, "rotated": cls.RECT, "upright": cls.RECT}.get(
            layout, cls.POLY
        )


class Outcome(IntEnum):
    """Outcome of a detection at one threshold in evaluation."""

    FP = 0
    TP = 1
    IGNORED = 2  # overlaps an ignore truth: neither TP nor FP
    CAPPED = 3  # beyond max_detections in its frame: not evaluated

    @property
    def label(self) -> str:
        """The outcome as the result tables write it."""
        return self.name.lower()
