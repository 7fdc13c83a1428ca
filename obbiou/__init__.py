"""obbiou: exact, fast overlap of rotated 2D boxes, convex quadrilaterals and upright 3D boxes.

Public names only; the numba kernels live in ``obbiou._kernels`` and compile on first use
(``obbiou warmup`` compiles them all once and caches them on disk). Large images in tiles:
``obbiou.tiles`` (a layer above this one: ``import obbiou.tiles``).
"""

from obbiou import boxes
from obbiou.fusion import Fused, fuse
from obbiou.measures import coverage, diou, giou, intersection, iou
from obbiou.scene import Kept, Pairs, overlapping_pairs, suppress
from obbiou.shapes import SHAPES

__version__ = "0.1.0"

__all__ = [
    "SHAPES",
    "__version__",
    "boxes",
    "iou",
    "giou",
    "diou",
    "intersection",
    "coverage",
    "overlapping_pairs",
    "suppress",
    "Pairs",
    "Kept",
    "fuse",
    "Fused",
]
