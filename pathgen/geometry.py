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
           "shoelace_area", "orientation", "FULL_TURN_EPS", "nearest_distance"]

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


#: Nearest-point questions with at most this many point pairs are answered
#: by brute force in numpy; with a finite bound, by numpy on a grid of cells
#: as wide as the bound while the pairs it compares stay under
#: :data:`GRID_PAIRS`; otherwise by a KD-tree (scipy.spatial, which takes
#: about 0.3 s to import: worth it only for large questions).
BRUTE_PAIRS = 2_000_000
GRID_PAIRS = 20_000_000
GRID_MAX_POINTS = 200_000


def nearest_distance(ref, query, bound: float = np.inf) -> np.ndarray:
    """Distance (mm) from each ``query`` point (k, 2) to the nearest ``ref``
    point (m, 2); ``inf`` where none lies closer than ``bound``.

    The answer of ``scipy.spatial.cKDTree(ref).query(query, k=1,
    distance_upper_bound=bound)[0]``, the same numbers: by brute force in
    numpy when m·k ≤ :data:`BRUTE_PAIRS`; with a finite bound and up to
    :data:`GRID_MAX_POINTS` points, on a grid of square cells of side
    ``bound`` (every point closer than the bound lies in the query's cell or
    one of its 8 neighbours); else by that KD-tree.

    >>> nearest_distance(np.array([[0.0, 0.0], [3.0, 0.0]]), np.array([[0.0, 4.0], [9.0, 0.0]]), 5.5)
    array([ 4., inf])
    """
    ref = np.asarray(ref, dtype=np.float64).reshape(-1, 2)
    query = np.asarray(query, dtype=np.float64).reshape(-1, 2)
    m, k = len(ref), len(query)
    out = None
    if m and k and m * k <= BRUTE_PAIRS:
        out = np.empty(k)
        chunk = max(1, BRUTE_PAIRS // (8 * m))  # rows of query per pass: a few MB
        rx, ry = ref[:, 0], ref[:, 1]
        for i in range(0, k, chunk):
            q = query[i:i + chunk]
            dx = q[:, 0:1] - rx
            dy = q[:, 1:2] - ry
            out[i:i + chunk] = np.sqrt((dx * dx + dy * dy).min(axis=1))
    elif m and k and np.isfinite(bound) and bound > 0 and m + k <= GRID_MAX_POINTS \
            and float(np.ptp(ref, axis=0).max()) < 1e9 * bound:  # cell numbers fit the integers
        out = _grid_nearest(ref, query, float(bound))
    if out is None:
        from scipy.spatial import cKDTree

        return cKDTree(ref).query(query, k=1, distance_upper_bound=bound)[0]
    out[out >= bound] = np.inf  # as the tree: only points strictly closer count
    return out


def _grid_nearest(ref, query, bound):
    """:func:`nearest_distance` on a grid of cells of side ``bound``; None
    when the cells are so crowded that the pairs exceed :data:`GRID_PAIRS`."""
    lo = ref.min(axis=0) - bound
    cr = np.floor((ref - lo) / bound).astype(np.int64)  # >= 1
    width = int(cr[:, 1].max()) + 3
    key = cr[:, 0] * width + cr[:, 1]
    order = np.argsort(key, kind="stable")
    skey = key[order]
    rs = ref[order]
    cq = np.floor((query - lo) / bound)
    inside = (cq[:, 0] >= 0) & (cq[:, 0] <= cr[:, 0].max() + 1) & (cq[:, 1] >= 0) & (cq[:, 1] < width - 1)
    qi = np.flatnonzero(inside)
    cq = cq[qi].astype(np.int64)
    runs = []
    total = 0
    for dx in (-1, 0, 1):
        for dy in (-1, 0, 1):
            qk = (cq[:, 0] + dx) * width + (cq[:, 1] + dy)
            a = np.searchsorted(skey, qk, "left")
            b = np.searchsorted(skey, qk, "right")
            total += int((b - a).sum())
            if total > GRID_PAIRS:
                return None
            runs.append((a, b - a))
    best = np.full(len(qi), np.inf)
    for a, cnt in runs:
        has = cnt > 0
        if not has.any():
            continue
        a, cnt = a[has], cnt[has]
        first = np.cumsum(cnt) - cnt
        j = np.arange(int(cnt.sum())) - np.repeat(first - a, cnt)  # index into rs
        q = np.repeat(query[qi[has]], cnt, axis=0)
        dx = q[:, 0] - rs[j, 0]
        dy = q[:, 1] - rs[j, 1]
        d2 = np.minimum.reduceat(dx * dx + dy * dy, first)
        best[has] = np.minimum(best[has], d2)
    out = np.full(len(query), np.inf)
    out[qi] = np.sqrt(best)
    return out
