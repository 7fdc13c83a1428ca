"""Why detections are wrong and truths are missed: breakdowns at one IoU threshold ``t``.

False positives (each FP falls in exactly one class, tested in this order):

* ``duplicate`` — a non-ignore truth of the same label overlaps it with IoU >= t, but every
  such truth was already taken by a higher-scoring detection;
* ``wrong_label`` — otherwise, a non-ignore truth of another label overlaps it with IoU >= t;
* ``poor_localisation`` — otherwise, a non-ignore truth of the same label overlaps it with
  ``floor <= IoU < t`` (``floor`` = 0.1 by default);
* ``background`` — none of the above: nothing it was meant to find is near.

Misses (each missed non-ignore truth falls in exactly one class, in this order):

* ``crowded`` — a detection of its label overlaps it with IoU >= t but was matched to another
  truth (or, being a duplicate elsewhere, no unmatched detection was left);
* ``wrong_label`` — otherwise, a detection of another label overlaps it with IoU >= t;
* ``poor_localisation`` — otherwise, a detection of its label overlaps it with
  ``floor <= IoU < t``;
* ``not_detected`` — no detection comes near.

Detections beyond ``max_detections`` ("capped") take no part in either breakdown.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from obbiou.errors import InvalidInput

__all__ = [
    "FalsePositives",
    "Misses",
    "OrientationError",
    "classify_false_positives",
    "classify_misses",
    "orientation_error",
]

FP_CLASSES = ("duplicate", "wrong_label", "poor_localisation", "background")
MISS_CLASSES = ("crowded", "wrong_label", "poor_localisation", "not_detected")


class FalsePositives(NamedTuple):
    """FP counts by class (see the module docstring); ``total`` = their sum."""

    duplicate: int
    wrong_label: int
    poor_localisation: int
    background: int
    total: int


class Misses(NamedTuple):
    """Missed truths by class (see the module docstring); ``total`` = their sum."""

    crowded: int
    wrong_label: int
    poor_localisation: int
    not_detected: int
    total: int


class OrientationError(NamedTuple):
    """Orientation error of matched pairs, radians (see :func:`orientation_error`).

    ``period`` is π (rectangles and polygons: a rectangle turned by π is the same rectangle;
    errors lie in [0, π/2]) or 2π (upright 3D boxes: the heading counts; errors in [0, π]).
    ``near_square`` is the number of rectangle pairs compared modulo π/2 (one of the two
    boxes near-square; ``None`` for upright boxes). ``flipped`` is the share of upright pairs
    more than π/2 off (headings pointing backwards; ``None`` for rectangles).
    """

    pairs: int
    period: float
    mean: float | None
    median: float | None
    p90: float | None
    max: float | None
    near_square: int | None
    flipped: float | None


#: Long over short side below which a rectangle counts as near-square for its orientation
#: error (5:4; our choice, no source): its sides could swap under a small change of shape.
NEAR_SQUARE = 1.25


def classify_false_positives(
    is_fp: np.ndarray, best_same: np.ndarray, best_other: np.ndarray, t: float, floor: float
) -> np.ndarray:
    """Class index (into ``FP_CLASSES``) per detection; -1 for those that are not FPs.

    Examples
    --------
    >>> classify_false_positives(np.array([True, True, True, True, False]),
    ...     np.array([0.9, 0.2, 0.3, 0.0, 0.9]), np.array([0.0, 0.8, 0.0, 0.05, 0.0]),
    ...     0.5, 0.1).tolist()
    [0, 1, 2, 3, -1]
    """
    cls = np.full(is_fp.shape, -1, dtype=np.int64)
    cls[is_fp] = 3
    cls[is_fp & (best_same >= floor)] = 2
    cls[is_fp & (best_same < t) & (best_other >= t)] = 1
    cls[is_fp & (best_same >= t)] = 0
    return cls


def classify_misses(
    is_miss: np.ndarray, best_same: np.ndarray, best_other: np.ndarray, t: float, floor: float
) -> np.ndarray:
    """Class index (into ``MISS_CLASSES``) per truth; -1 for those that are not misses."""
    return classify_false_positives(is_miss, best_same, best_other, t, floor)


def orientation_error(
    det_angle: np.ndarray,
    truth_angle: np.ndarray,
    shape: str,
    det_aspect: np.ndarray | None = None,
    truth_aspect: np.ndarray | None = None,
) -> OrientationError:
    """Summary of angle differences of matched pairs.

    The rule for rectangles (rotated, and polygons by their longest edge) does not depend on
    which side happens to be longer when the sides are nearly equal:

    * both boxes elongated (long / short side >= :data:`NEAR_SQUARE`, given by the aspect
      arrays): the angle between their long axes, modulo π, in [0, π/2];
    * either box near-square: the smallest turn that lays the sides of one along the sides
      of the other, modulo π/2, in [0, π/4] (a 60 × 60 truth at 10° and a 58 × 61 detection
      at 11° differ by 1°, not 89°).

    Without aspects every rectangle pair counts as elongated. Upright 3D boxes compare
    headings modulo 2π, in [0, π].

    Examples
    --------
    >>> e = orientation_error(np.array([0.1, np.pi]), np.array([0.0, 0.0]), "upright")
    >>> round(e.max, 6), e.flipped
    (3.141593, 0.5)
    >>> orientation_error(np.array([np.pi - 0.1]), np.array([0.0]), "rotated").mean  # mod π
    0.10000000000000009

    The near-square case above: long axes at 11° + 90° (61 is the height) and 10°.

    >>> e = orientation_error(np.radians([101.0]), np.radians([10.0]), "rotated",
    ...                       np.array([61 / 58]), np.array([1.0]))
    >>> round(float(np.degrees(e.mean)), 9), e.near_square
    (1.0, 1)
    """
    if shape in ("axis", "axis3"):
        reason = (
            f"orientation error needs rotated, polygon or upright boxes; {shape!r} boxes "
            "have no orientation"
        )
        raise InvalidInput("shape", reason, message=reason)
    upright = shape == "upright"
    delta = np.asarray(det_angle, dtype=np.float64) - np.asarray(truth_angle, dtype=np.float64)
    period = 2 * np.pi if upright else np.pi
    d = np.mod(delta, period)
    err = np.minimum(d, period - d)
    square = np.zeros(len(err), dtype=bool)
    if not upright and det_aspect is not None and truth_aspect is not None:
        square = (np.asarray(det_aspect) < NEAR_SQUARE) | (np.asarray(truth_aspect) < NEAR_SQUARE)
        q = np.mod(delta, np.pi / 2)
        err = np.where(square, np.minimum(q, np.pi / 2 - q), err)
    near_square = None if upright else int(square.sum())
    if not len(err):
        return OrientationError(0, period, None, None, None, None, near_square, None)
    flipped = float(np.mean(err > np.pi / 2)) if upright else None
    return OrientationError(
        int(len(err)),
        period,
        float(err.mean()),
        float(np.median(err)),
        float(np.quantile(err, 0.9)),
        float(err.max()),
        near_square,
        flipped,
    )
