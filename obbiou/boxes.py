"""Box tools: corners, footprint, envelope, size (and, below, fitting and normal forms).

Conventions (all functions): angles in radians, counter-clockwise from +x towards +y;
``width`` along the box's own x axis, ``height`` along its own y axis; for ``upright`` boxes
``length`` along the heading (yaw), ``width`` across it, ``height`` along +z, ``cz`` the
centre. A single box gives a result without the batch axis.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from obbiou.shapes import Boxes, read_boxes

__all__ = ["corners", "footprint", "envelope", "size"]


def _finish(result: np.ndarray, boxes: Boxes) -> np.ndarray:
    return result[0] if boxes.single else result


def _rotated_corners(data: np.ndarray) -> np.ndarray:
    """(N, 5) rotated boxes -> (N, 4, 2) corners, counter-clockwise from the own (-x, -y)."""
    cx, cy, w, h, a = (data[:, i] for i in range(5))
    c, s = np.cos(a), np.sin(a)
    # Local corners in counter-clockwise order for a y-up frame.
    lx = np.array([-0.5, 0.5, 0.5, -0.5])[None, :] * w[:, None]
    ly = np.array([-0.5, -0.5, 0.5, 0.5])[None, :] * h[:, None]
    x = cx[:, None] + lx * c[:, None] - ly * s[:, None]
    y = cy[:, None] + lx * s[:, None] + ly * c[:, None]
    return np.stack([x, y], axis=-1)


def _axis_corners(data: np.ndarray) -> np.ndarray:
    x0, y0, x1, y1 = (data[:, i] for i in range(4))
    x = np.stack([x0, x1, x1, x0], axis=1)
    y = np.stack([y0, y0, y1, y1], axis=1)
    return np.stack([x, y], axis=-1)


def corners(boxes: Any, *, shape: str | None = None) -> np.ndarray:
    """Corner points of each box.

    Parameters
    ----------
    boxes : array_like
        Boxes in any layout (see :mod:`obbiou.shapes`).
    shape : str, optional
        The layout; inferred from the trailing dimensions when ``None``.

    Returns
    -------
    numpy.ndarray
        ``(N, 4, 2)`` for ``axis`` and ``rotated`` boxes, counter-clockwise in a y-up frame
        starting at the box's own (-x, -y) corner; ``(N, K, 2)`` vertices as given for
        ``polygon``; ``(N, 8, 3)`` for ``axis3`` and ``upright`` boxes: the four bottom
        corners (counter-clockwise seen from above), then the four top corners.

    Examples
    --------
    >>> corners([0, 0, 4, 2, 0.0])
    array([[-2., -1.],
           [ 2., -1.],
           [ 2.,  1.],
           [-2.,  1.]])
    >>> corners([1, 1, 2, 2, np.pi / 2]).round(12) + 0.0  # a quarter turn; + 0.0 drops -0.
    array([[2., 0.],
           [2., 2.],
           [0., 2.],
           [0., 0.]])
    >>> corners(np.zeros((0, 7))).shape
    (0, 8, 3)
    """
    b = read_boxes(boxes, shape, name="boxes")
    d = b.data
    if b.shape == "axis":
        out = _axis_corners(d)
    elif b.shape == "rotated":
        out = _rotated_corners(d)
    elif b.shape == "polygon":
        out = d.copy()
    else:
        if b.shape == "axis3":
            base = _axis_corners(d[:, [0, 1, 3, 4]])
            z0, z1 = d[:, 2], d[:, 5]
        else:
            base = _rotated_corners(d[:, [0, 1, 3, 4, 6]])
            z0, z1 = d[:, 2] - d[:, 5] / 2, d[:, 2] + d[:, 5] / 2
        n = d.shape[0]
        out = np.empty((n, 8, 3))
        out[:, :4, :2] = base
        out[:, 4:, :2] = base
        out[:, :4, 2] = z0[:, None]
        out[:, 4:, 2] = z1[:, None]
    return _finish(out, b)


def footprint(boxes: Any, *, shape: str | None = None) -> np.ndarray:
    """Ground-plane (bird's-eye-view) box of each 3D box.

    ``upright`` boxes give ``rotated`` boxes ``cx, cy, length, width, yaw``; ``axis3`` boxes
    give ``axis`` boxes. Bird's-eye-view measures are ``iou(footprint(a), footprint(b))``.

    Parameters
    ----------
    boxes : array_like
        ``upright`` or ``axis3`` boxes.
    shape : str, optional
        The layout; inferred when ``None``.

    Returns
    -------
    numpy.ndarray
        ``(N, 5)`` rotated or ``(N, 4)`` axis boxes.

    Raises
    ------
    ValueError
        If the boxes are not 3D.

    Examples
    --------
    >>> footprint([10.0, 2.0, 0.9, 4.5, 1.8, 1.6, 0.3])
    array([10. ,  2. ,  4.5,  1.8,  0.3])
    >>> footprint([[0, 0, 0, 2, 1, 3]])
    array([[0., 0., 2., 1.]])
    """
    b = read_boxes(boxes, shape, name="boxes")
    if b.shape == "upright":
        out = b.data[:, [0, 1, 3, 4, 6]]
    elif b.shape == "axis3":
        out = b.data[:, [0, 1, 3, 4]]
    else:
        raise ValueError(f"boxes: footprint needs 3D boxes (upright or axis3), got {b.shape!r}")
    return _finish(np.ascontiguousarray(out), b)


def envelope(boxes: Any, *, shape: str | None = None) -> np.ndarray:
    """Smallest axis-aligned box enclosing each box.

    Parameters
    ----------
    boxes : array_like
        Boxes in any layout.
    shape : str, optional
        The layout; inferred when ``None``.

    Returns
    -------
    numpy.ndarray
        ``(N, 4)`` ``axis`` boxes for 2D layouts, ``(N, 6)`` ``axis3`` boxes for 3D ones.

    Examples
    --------
    >>> envelope([0, 0, 2, 2, np.pi / 4]).round(6)
    array([-1.414214, -1.414214,  1.414214,  1.414214])
    >>> envelope([[[0, 0], [3, 1], [1, 2]]])
    array([[0., 0., 3., 2.]])
    """
    b = read_boxes(boxes, shape, name="boxes")
    pts = corners(b.data, shape=b.shape)
    if pts.shape[0] == 0:
        width = 6 if b.is_3d else 4
        return _finish(np.zeros((0, width)), b)
    if b.shape in ("axis", "axis3"):
        out = b.data.copy()  # already its own envelope; avoid rounding through corners
    else:
        out = np.concatenate([pts.min(axis=1), pts.max(axis=1)], axis=1)
    return _finish(out, b)


def size(boxes: Any, *, shape: str | None = None) -> np.ndarray:
    """Area (2D layouts) or volume (3D layouts) of each box.

    Parameters
    ----------
    boxes : array_like
        Boxes in any layout.
    shape : str, optional
        The layout; inferred when ``None``.

    Returns
    -------
    numpy.ndarray
        ``(N,)`` float64, or a float64 scalar for a single box.

    Examples
    --------
    >>> size([[0, 0, 4, 2, 1.0], [5, 5, 0, 3, 0.0]])  # a zero-width box has area 0
    array([8., 0.])
    >>> float(size([0, 0, 0, 4.5, 1.8, 1.6, 0.2]))
    12.96
    >>> size([[[0, 0], [1, 0], [0, 1]]])
    array([0.5])
    """
    b = read_boxes(boxes, shape, name="boxes")
    d = b.data
    if b.shape == "axis":
        out = (d[:, 2] - d[:, 0]) * (d[:, 3] - d[:, 1])
    elif b.shape == "rotated":
        out = d[:, 2] * d[:, 3]
    elif b.shape == "polygon":
        local = d - d[:, :1, :]  # shoelace relative to a vertex: no loss far from the origin
        x, y = local[..., 0], local[..., 1]
        out = 0.5 * np.abs((x * np.roll(y, -1, axis=1) - np.roll(x, -1, axis=1) * y).sum(axis=1))
    elif b.shape == "axis3":
        out = (d[:, 3] - d[:, 0]) * (d[:, 4] - d[:, 1]) * (d[:, 5] - d[:, 2])
    else:
        out = d[:, 3] * d[:, 4] * d[:, 5]
    return _finish(out, b)
