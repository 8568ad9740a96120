"""The plane-geometry formulas every stage shares, each written once.

Conventions (as everywhere in pathgen): lengths in mm, angles in radians,
counter-clockwise positive; the left normal of a direction v is
``left(v) = (-v_y, v_x)``.

- Signed curvature of a parametric curve from its first two derivatives,
  κ = (x′y″ − y′x″)/(x′² + y′²)^{3/2}, positive on a left turn (sources:
  curvature).  A point where the curve stops (zero speed) has curvature 0
  when it does not turn there, and a huge value of the turn's sign when it
  does: never NaN.
- Arc sweep from an arc's start, end and center and its direction, in
  (0, 2π]: an arc whose ends coincide sweeps a full turn.
- Turn from one direction to the next, atan2(a × b, a · b) in [−π, π],
  positive to the left.
- Angle along an arc: from the arc's start direction to another
  direction, measured the way the arc turns, wrapped into one turn.
- Orientation of a closed polygon from its shoelace area: +1
  counter-clockwise, −1 clockwise.
"""

from __future__ import annotations

import numpy as np

__all__ = ["left", "dot", "curvature", "turn_angle", "arc_sweep", "arc_geometry", "angle_along_arc",
           "shoelace_area", "orientation", "FULL_TURN_EPS"]

#: An arc whose start and end angles differ by at most this (rad) is a full
#: turn, not a move of no length.
FULL_TURN_EPS = 1e-12

_TWO_PI = 2.0 * np.pi


def left(v) -> np.ndarray:
    """Left normal (-v_y, v_x) of vectors ``v`` (..., 2).

    >>> left(np.array([1.0, 0.0]))
    array([-0.,  1.])
    """
    v = np.asarray(v)
    return np.stack([-v[..., 1], v[..., 0]], axis=-1)


def dot(a, b) -> np.ndarray:
    """Row-wise dot product of (..., 2) arrays."""
    return np.einsum("...i,...i->...", a, b)


def curvature(d1, d2) -> np.ndarray:
    """Signed curvature from first and second derivatives (..., 2), 1/mm.

    >>> t = 0.3   # a circle of radius 2: x = 2 cos t, y = 2 sin t
    >>> float(curvature(np.array([-2 * np.sin(t), 2 * np.cos(t)]), np.array([-2 * np.cos(t), -2 * np.sin(t)])))
    0.5
    """
    d1 = np.asarray(d1, dtype=np.float64)
    d2 = np.asarray(d2, dtype=np.float64)
    cross = d1[..., 0] * d2[..., 1] - d1[..., 1] * d2[..., 0]
    speed2 = d1[..., 0] ** 2 + d1[..., 1] ** 2
    # the floor on speed³ (not on speed², whose cube underflows to 0): a
    # curve that stops has cross = 0 there, and 0 / 1e-300 = 0, never NaN
    return cross / np.maximum(speed2 ** 1.5, 1e-300)


def turn_angle(a, b) -> np.ndarray:
    """Signed turn (rad, in [-π, π], + to the left) from directions ``a`` to
    ``b`` (..., 2): atan2(a × b, a · b), exact for small and large turns
    alike; the directions need not be unit vectors.

    >>> float(turn_angle([1.0, 0.0], [0.0, 2.0])) == np.pi / 2
    True
    """
    a = np.asarray(a, dtype=np.float64)
    b = np.asarray(b, dtype=np.float64)
    return np.arctan2(a[..., 0] * b[..., 1] - a[..., 1] * b[..., 0], a[..., 0] * b[..., 0] + a[..., 1] * b[..., 1])


def arc_sweep(start_xy, end_xy, center_xy, ccw) -> np.ndarray:
    """Swept angle in (0, 2π] of arcs, vectorized; a closed arc sweeps 2π.

    >>> float(arc_sweep([1.0, 0.0], [0.0, 1.0], [0.0, 0.0], True)) == np.pi / 2
    True
    >>> float(arc_sweep([1.0, 0.0], [0.0, 1.0], [0.0, 0.0], False)) == 1.5 * np.pi
    True
    """
    start_xy, end_xy, center_xy = (np.asarray(a, float) for a in (start_xy, end_xy, center_xy))
    a0 = np.arctan2(start_xy[..., 1] - center_xy[..., 1], start_xy[..., 0] - center_xy[..., 0])
    a1 = np.arctan2(end_xy[..., 1] - center_xy[..., 1], end_xy[..., 0] - center_xy[..., 0])
    d = np.mod(np.where(ccw, a1 - a0, a0 - a1), _TWO_PI)
    return np.where(d <= FULL_TURN_EPS, _TWO_PI, d)


def arc_geometry(start, end, center, ccw):
    """Radius, start angle and signed sweep (+ counter-clockwise) of arcs."""
    start, center = np.asarray(start, float), np.asarray(center, float)
    rs = start - center
    r = np.hypot(rs[..., 0], rs[..., 1])
    a0 = np.arctan2(rs[..., 1], rs[..., 0])
    sweep = arc_sweep(start, end, center, ccw)
    return r, a0, np.where(ccw, sweep, -sweep)


def angle_along_arc(ang, a0, direction, shift=0.0) -> np.ndarray:
    """Angle (rad) from an arc's start direction ``a0`` to the direction
    ``ang`` (both from the center), measured the way the arc turns
    (``direction`` +1 counter-clockwise, -1 clockwise: the sign of its
    sweep), in [-shift, 2π - shift): a point lies on the arc where the
    result is within [0, |sweep|].

    >>> float(angle_along_arc(0.5, 0.0, -1.0)) == 2 * np.pi - 0.5
    True
    """
    rel = (np.asarray(ang) - a0) * direction
    if shift:
        return np.mod(rel + shift, _TWO_PI) - shift
    return np.mod(rel, _TWO_PI)


def shoelace_area(points) -> float:
    """Signed area of the closed polygon through ``points`` (n, 2): + when
    counter-clockwise (the shoelace formula).

    >>> shoelace_area([[0, 0], [2, 0], [2, 1], [0, 1]])
    2.0
    """
    p = np.asarray(points, dtype=np.float64)
    x, y = p[:, 0], p[:, 1]
    return 0.5 * float(np.dot(x, np.roll(y, -1)) - np.dot(y, np.roll(x, -1)))


def orientation(points) -> int:
    """+1 for a counter-clockwise closed polygon, -1 for a clockwise one."""
    return 1 if shoelace_area(points) >= 0 else -1
