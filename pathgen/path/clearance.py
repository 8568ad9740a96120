"""Clearance of a tool swept along moves: does the tool stay off the part?

:func:`clearance` is the one check every program passes before it is
written: the disc of the tool (radius r) swept along every move below the
stock top must stay on the waste side of the contour, i.e. the tool center
must keep a distance >= r - tolerance from the contour, on the waste side.

Signature (stable; other code calls it on moves read back from a program)::

    clearance(kind, start, end, center, contour, *, tool_radius, side,
              tolerance, stock_top=0.0) -> Clearance

* ``kind`` (n,) int: RAPID 0, LINE 1, ARC_CW 2, ARC_CCW 3 (the codes of
  :mod:`pathgen.path.model`, the same numbers as G0..G3).
* ``start``, ``end`` (n, 3): (x, y, z) of each move, mm.  Arcs may change z
  (a helix): z then varies linearly with the swept angle.
* ``center`` (n, 2): arc centers (ignored for rapids and lines), mm.
* ``contour``: the part's :class:`~pathgen.spline.Contour` (mm).
* ``tool_radius`` mm; ``side``: "outside" or "inside", the side the tool
  cuts on (as given to :func:`~pathgen.path.build.make_toolpath`).  The
  waste side is the side of the offset d = side_sign(side) * r *
  orientation along the contour's left normal, orientation = +1 for a
  counter-clockwise closed contour (or any open one), -1 for clockwise.
* ``tolerance`` mm: a move fails ("gouges") where its clearance is below
  r - tolerance.
* ``stock_top`` z, mm: moves at or above it are ignored; a move crossing it
  counts for its part below.

Returns a frozen :class:`Clearance`: ``min_clearance`` (signed: distance
from the tool-center path to the contour, negative where the tool center is
on the part's side; there it is the depth of the tool center into the part
found per sub-move, within one sub-move's length), ``margin`` = min_clearance - r (>= -tolerance passes),
``move`` (index of the move where the minimum occurs, -1 when no move is
below the stock top), ``where`` (x, y, z of that point), ``gouge_index`` and
``gouge_depth`` (the moves whose clearance is below r - tolerance and how far
the tool reaches into the part there, r - clearance, mm), and ``ok``.

Method
------
The contour is replaced by a polyline whose chords deviate from it by at
most tolerance/20 (the broken-line bound δ²·max|P''|/8 on each piece's
exact second derivative, :mod:`pathgen.path.spacing`: sized by the
curvature and the tolerance, not by the number of pieces), with every
corner a vertex.  Each move is split into short sub-moves
(lines, or arcs about the same center); for each sub-move the polyline
edges near it are found with a KD-tree (scipy.spatial) and the exact
distance between the sub-move and each edge is computed (segment-segment
and arc-segment distance: end points, the arc's point on the perpendicular
through its center, and crossings).  A KD-tree answer is accepted only when
it provably holds every edge that could be nearer (the k-th nearest vertex
is far enough); otherwise the sub-move is redone with a ball query.  The
closest point found is then projected onto the exact curve (Newton on the
parameter), which removes the polyline's chord error from the distance, and
its side is the sign of the curve's normal there.  Distances beyond
r + max(4·tolerance, r/20) are not needed exactly: they are measured to the
polyline (within tolerance/20) and, for a sub-move whose every point lies
farther than that, may be an upper bound; they never decide a verdict.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .._options import check_positive, side_sign
from ..errors import InputError
from ..geometry import angle_along_arc, arc_geometry, orientation
from ..moves import ARC_CCW, ARC_CW, LINE, RAPID
from .spacing import vertex_params

__all__ = ["Clearance", "clearance", "Probe"]

_CHUNK = 60_000  # sub-moves per vectorized batch (bounds memory)


@dataclass(frozen=True, eq=False)
class Clearance:
    """Result of :func:`clearance` (lengths in mm)."""

    min_clearance: float
    margin: float
    move: int
    where: tuple
    tool_radius: float
    tolerance: float
    gouge_index: np.ndarray
    gouge_depth: np.ndarray
    checked: int

    @property
    def ok(self) -> bool:
        """True when no move comes closer than tool_radius - tolerance."""
        return len(self.gouge_index) == 0

    @property
    def gouges(self) -> list:
        """[(move index, depth mm), ...] of the gouging moves."""
        return [(int(i), float(d)) for i, d in zip(self.gouge_index, self.gouge_depth)]


# -- the contour as a polyline --------------------------------------------------
def _inside(V, px, py) -> np.ndarray:
    """True where points (px, py) lie inside the closed polygon V (k, 2),
    by shapely's vectorized containment test (GEOS)."""
    import shapely

    ring = V if np.array_equal(V[0], V[-1]) else np.vstack([V, V[:1]])
    poly = shapely.Polygon(ring)
    shapely.prepare(poly)
    return shapely.contains_xy(poly, np.asarray(px, float), np.asarray(py, float))


def _polyline(contour, chord_error: float, h_cap: float):
    """Parameters of polyline vertices: sagitta <= chord_error, spacing <= h_cap,
    every corner and both ends included (sized by the curvature, see
    :func:`pathgen.path.spacing.vertex_params`; no cap).  Returns sorted t."""
    return vertex_params(contour, chord_error, h_cap)


# -- elementary distances (vectorized) --------------------------------------------
def _pt_seg(px, py, ax, ay, bx, by):
    """Distance from points to segments and the foot's fraction u in [0, 1]."""
    vx, vy = bx - ax, by - ay
    L2 = vx * vx + vy * vy
    with np.errstate(invalid="ignore", divide="ignore"):
        u = np.where(L2 > 0, ((px - ax) * vx + (py - ay) * vy) / np.where(L2 > 0, L2, 1.0), 0.0)
    u = np.clip(u, 0.0, 1.0)
    return np.hypot(px - ax - u * vx, py - ay - u * vy), u


def _in_sweep(ang, a0, sw):
    """Fraction along an arc (start angle a0, signed sweep sw) of the direction
    ``ang``, or -1 where it lies outside the sweep."""
    rel = angle_along_arc(ang, a0, np.sign(sw))
    f = rel / np.maximum(np.abs(sw), 1e-300)
    return np.where(rel <= np.abs(sw) * (1 + 1e-12), np.minimum(f, 1.0), -1.0)


def _pt_arc(px, py, cx, cy, rho, a0, sw):
    """Distance from points to arcs and the nearest point's fraction along the arc."""
    ang = np.arctan2(py - cy, px - cx)
    f = _in_sweep(ang, a0, sw)
    inside = f >= 0
    d_in = np.abs(np.hypot(px - cx, py - cy) - rho)
    a1 = a0 + sw
    d0 = np.hypot(px - cx - rho * np.cos(a0), py - cy - rho * np.sin(a0))
    d1 = np.hypot(px - cx - rho * np.cos(a1), py - cy - rho * np.sin(a1))
    d_end = np.minimum(d0, d1)
    f_end = np.where(d0 <= d1, 0.0, 1.0)
    use_in = inside & (d_in <= d_end)
    return np.where(use_in, d_in, d_end), np.where(use_in, f, f_end)


def _cross2(ax, ay, bx, by):
    return ax * by - ay * bx


def _best(cands):
    """Element-wise minimum over (distance, fraction) candidates."""
    d, f = cands[0]
    for dd, ff in cands[1:]:
        better = dd < d
        d = np.where(better, dd, d)
        f = np.where(better, ff, f)
    return d, f


def _line_edge(m, ex0, ey0, ex1, ey1):
    """Distance between sub-move lines and edges; fraction along the move."""
    ax, ay, bx, by = m
    dP, uP = _pt_seg(ex0, ey0, ax, ay, bx, by)
    dQ, uQ = _pt_seg(ex1, ey1, ax, ay, bx, by)
    dA, _ = _pt_seg(ax, ay, ex0, ey0, ex1, ey1)
    dB, _ = _pt_seg(bx, by, ex0, ey0, ex1, ey1)
    d, f = _best([(dP, uP), (dQ, uQ), (dA, np.zeros_like(dA)), (dB, np.ones_like(dB))])
    # proper crossing: distance 0 at the intersection
    vx, vy = bx - ax, by - ay
    wx, wy = ex1 - ex0, ey1 - ey0
    den = _cross2(vx, vy, wx, wy)
    with np.errstate(invalid="ignore", divide="ignore"):
        s = _cross2(ex0 - ax, ey0 - ay, wx, wy) / den
        t = _cross2(ex0 - ax, ey0 - ay, vx, vy) / den
    hit = (den != 0) & (s >= 0) & (s <= 1) & (t >= 0) & (t <= 1)
    return np.where(hit, 0.0, d), np.where(hit, np.nan_to_num(s), f)


def _arc_edge(m, ex0, ey0, ex1, ey1):
    """Distance between sub-move arcs and edges; fraction along the move."""
    cx, cy, rho, a0, sw = m
    a1 = a0 + sw
    sx, sy = cx + rho * np.cos(a0), cy + rho * np.sin(a0)
    tx, ty = cx + rho * np.cos(a1), cy + rho * np.sin(a1)
    dP, fP = _pt_arc(ex0, ey0, cx, cy, rho, a0, sw)
    dQ, fQ = _pt_arc(ex1, ey1, cx, cy, rho, a0, sw)
    dS, _ = _pt_seg(sx, sy, ex0, ey0, ex1, ey1)
    dT, _ = _pt_seg(tx, ty, ex0, ey0, ex1, ey1)
    cands = [(dP, fP), (dQ, fQ), (dS, np.zeros_like(dS)), (dT, np.ones_like(dT))]
    # the arc's point on the perpendicular from its center to the edge's line
    wx, wy = ex1 - ex0, ey1 - ey0
    L2 = wx * wx + wy * wy
    L2s = np.where(L2 > 0, L2, 1.0)
    u = ((cx - ex0) * wx + (cy - ey0) * wy) / L2s
    fx, fy = ex0 + u * wx, ey0 + u * wy
    h = np.hypot(fx - cx, fy - cy)
    on_edge = (L2 > 0) & (u >= 0) & (u <= 1)
    fa = _in_sweep(np.arctan2(fy - cy, fx - cx), a0, sw)
    ok = on_edge & (fa >= 0) & (h > 0)
    cands.append((np.where(ok, np.abs(h - rho), np.inf), np.where(ok, fa, 0.0)))
    # crossings of the edge's line with the circle, inside the edge and the sweep
    half = np.sqrt(np.maximum(rho * rho - h * h, 0.0) / L2s)
    for sgn in (-1.0, 1.0):
        uu = u + sgn * half
        xx, yy = ex0 + uu * wx, ey0 + uu * wy
        fx_ = _in_sweep(np.arctan2(yy - cy, xx - cx), a0, sw)
        hit = (L2 > 0) & (h <= rho) & (uu >= 0) & (uu <= 1) & (fx_ >= 0)
        cands.append((np.where(hit, 0.0, np.inf), np.where(hit, fx_, 0.0)))
    return _best(cands)


# -- moves → sub-moves ------------------------------------------------------------
def _prepare(kind, start, end, center, stock_top, step):
    """Clip moves to z < stock_top and split them into sub-moves of length <= step.

    Returns a dict of flat arrays per sub-move: owner, is_arc, line ends,
    arc center/radius/start angle/sweep, z at both ends."""
    z0, z1 = start[:, 2], end[:, 2]
    below = (z0 < stock_top) | (z1 < stock_top)
    idx = np.flatnonzero(below)
    kd = kind[idx]
    s, e, c = start[idx], end[idx], center[idx]
    za, zb = s[:, 2].copy(), e[:, 2].copy()
    # the part of each move below the stock top, as fractions [f0, f1]
    dz = zb - za
    with np.errstate(invalid="ignore", divide="ignore"):
        fz = np.where(dz != 0, (stock_top - za) / np.where(dz != 0, dz, 1.0), 0.0)
    f0 = np.where(za >= stock_top, fz, 0.0)
    f1 = np.where(zb >= stock_top, fz, 1.0)
    f0, f1 = np.clip(f0, 0, 1), np.clip(f1, 0, 1)
    arc = kd >= ARC_CW
    rho, a0, sw = arc_geometry(s[:, :2], e[:, :2], c, kd == ARC_CCW)
    sw = np.where(arc, sw, 0.0)
    length = np.where(arc, rho * np.abs(sw), np.hypot(e[:, 0] - s[:, 0], e[:, 1] - s[:, 1])) * (f1 - f0)
    n = np.maximum(np.ceil(length / step), 1).astype(np.int64)
    owner = np.repeat(np.arange(len(idx)), n)
    j = np.arange(owner.size) - np.repeat(np.cumsum(n) - n, n)
    fa = f0[owner] + (f1 - f0)[owner] * j / n[owner]
    fb = f0[owner] + (f1 - f0)[owner] * (j + 1) / n[owner]
    sub = {
        "owner": idx[owner],
        "arc": arc[owner],
        "fa": fa,
        "fb": fb,
        "za": za[owner] + dz[owner] * fa,
        "zb": za[owner] + dz[owner] * fb,
    }
    ax = s[owner, 0] + (e[owner, 0] - s[owner, 0]) * fa
    ay = s[owner, 1] + (e[owner, 1] - s[owner, 1]) * fa
    bx = s[owner, 0] + (e[owner, 0] - s[owner, 0]) * fb
    by = s[owner, 1] + (e[owner, 1] - s[owner, 1]) * fb
    sub_arc = sub["arc"]
    if np.any(sub_arc):
        o = owner[sub_arc]
        ang_a = a0[o] + sw[o] * fa[sub_arc]
        ang_b = a0[o] + sw[o] * fb[sub_arc]
        ax[sub_arc] = c[o, 0] + rho[o] * np.cos(ang_a)
        ay[sub_arc] = c[o, 1] + rho[o] * np.sin(ang_a)
        bx[sub_arc] = c[o, 0] + rho[o] * np.cos(ang_b)
        by[sub_arc] = c[o, 1] + rho[o] * np.sin(ang_b)
    sub.update(ax=ax, ay=ay, bx=bx, by=by)
    sub["cx"] = np.where(sub_arc, c[owner, 0], 0.0)
    sub["cy"] = np.where(sub_arc, c[owner, 1], 0.0)
    sub["rho"] = np.where(sub_arc, rho[owner], 0.0)
    sub["a0"] = np.where(sub_arc, a0[owner] + sw[owner] * fa, 0.0)
    sub["sw"] = np.where(sub_arc, sw[owner] * (fb - fa), 0.0)
    sub["len"] = np.where(sub_arc, rho[owner] * np.abs(sub["sw"]), np.hypot(bx - ax, by - ay))
    return sub, len(idx)


def _pairs(sub, sel, cand, V):
    """Distance from sub-moves ``sel`` (repeated per candidate edge) to edges
    ``cand`` (edge j joins vertex j and j + 1).  Returns (distance, fraction)."""
    ex0, ey0 = V[cand, 0], V[cand, 1]
    ex1, ey1 = V[cand + 1, 0], V[cand + 1, 1]
    d = np.empty(len(sel))
    f = np.empty(len(sel))
    arc = sub["arc"][sel]
    li = ~arc
    if np.any(li):
        s = sel[li]
        m = (sub["ax"][s], sub["ay"][s], sub["bx"][s], sub["by"][s])
        d[li], f[li] = _line_edge(m, ex0[li], ey0[li], ex1[li], ey1[li])
    if np.any(arc):
        s = sel[arc]
        m = (sub["cx"][s], sub["cy"][s], sub["rho"][s], sub["a0"][s], sub["sw"][s])
        d[arc], f[arc] = _arc_edge(m, ex0[arc], ey0[arc], ex1[arc], ey1[arc])
    return d, f


def _reduce_rows(d, f, cand):
    """Per row (sub-move), the smallest distance, its fraction and edge."""
    j = np.argmin(d, axis=1)
    rows = np.arange(len(d))
    return d[rows, j], f[rows, j], cand[rows, j]


def _reduce(groups, d, f, edges, n):
    """Per group (sub-move), the smallest distance, its fraction and edge."""
    order = np.lexsort((d, groups))
    g = groups[order]
    first = np.r_[True, g[1:] != g[:-1]]
    pick = order[first]
    out_d = np.full(n, np.inf)
    out_f = np.zeros(n)
    out_e = np.zeros(n, np.int64)
    out_d[groups[pick]] = d[pick]
    out_f[groups[pick]] = f[pick]
    out_e[groups[pick]] = edges[pick]
    return out_d, out_f, out_e


def _point_on(sub, i, f):
    """(x, y, z) of sub-moves ``i`` at fraction ``f``."""
    arc = sub["arc"][i]
    x = sub["ax"][i] + (sub["bx"][i] - sub["ax"][i]) * f
    y = sub["ay"][i] + (sub["by"][i] - sub["ay"][i]) * f
    ang = sub["a0"][i] + sub["sw"][i] * f
    x = np.where(arc, sub["cx"][i] + sub["rho"][i] * np.cos(ang), x)
    y = np.where(arc, sub["cy"][i] + sub["rho"][i] * np.sin(ang), y)
    z = sub["za"][i] + (sub["zb"][i] - sub["za"][i]) * f
    return x, y, z


def _project(sub, i, qx, qy):
    """Fraction of the point of sub-moves ``i`` nearest to points q."""
    arc = sub["arc"][i]
    _, u = _pt_seg(qx, qy, sub["ax"][i], sub["ay"][i], sub["bx"][i], sub["by"][i])
    if np.any(arc):
        j = i[arc]
        _, fa = _pt_arc(qx[arc], qy[arc], sub["cx"][j], sub["cy"][j], sub["rho"][j], sub["a0"][j], sub["sw"][j])
        u = u.copy()
        u[arc] = fa
    return u


def _newton_foot(contour, t, lo, hi, px, py, iterations=6):
    """Parameter of the curve point nearest to p, Newton kept in [lo, hi];
    returns (t, distance), the best iterate."""
    p0 = contour(t)
    best_t, best_d = t.copy(), np.hypot(p0[:, 0] - px, p0[:, 1] - py)
    for _ in range(iterations):
        p = contour(t)
        d1 = contour(t, 1)
        d2 = contour(t, 2)
        rx, ry = p[:, 0] - px, p[:, 1] - py
        g = rx * d1[:, 0] + ry * d1[:, 1]
        hh = d1[:, 0] ** 2 + d1[:, 1] ** 2 + rx * d2[:, 0] + ry * d2[:, 1]
        hh = np.where(hh > 0, hh, d1[:, 0] ** 2 + d1[:, 1] ** 2)
        t = np.clip(t - g / np.maximum(hh, 1e-300), lo, hi)
        q = contour(t)
        dd = np.hypot(q[:, 0] - px, q[:, 1] - py)
        better = dd < best_d
        best_d = np.where(better, dd, best_d)
        best_t = np.where(better, t, best_t)
    return best_t, best_d


def _closer(contour, sub, i, tc, lo, hi, best, iterations):
    """From curve parameters ``tc``: the sub-moves' points nearest to P(tc),
    then their feet on the curve; (distance, fraction, t) where that pair is
    nearer than ``best`` = (distance, fraction, t), else best's."""
    q = contour(tc)
    f2 = _project(sub, i, q[:, 0], q[:, 1])
    px, py, _ = _point_on(sub, i, f2)
    t2, d2 = _newton_foot(contour, tc, lo, hi, px, py, iterations=iterations)
    dist, f, t = best
    better = d2 < dist
    return np.where(better, d2, dist), np.where(better, f2, f), np.where(better, t2, t)


def _refine(contour, tv, edge, u, sub, i, f):
    """Exact distance between sub-moves ``i`` and the curve near polyline edge
    ``edge``: alternate projections (curve foot of the move's point, then the
    move's point nearest to that foot), keeping the smallest distance.
    Returns (distance, fraction on the move, side: + on the contour's left)."""
    # the foot may lie on a neighbouring edge's stretch of the curve
    lo, hi = tv[np.maximum(edge - 1, 0)], tv[np.minimum(edge + 2, len(tv) - 1)]
    t = tv[edge] + (tv[edge + 1] - tv[edge]) * u
    px, py, _ = _point_on(sub, i, f)
    t, dist = _newton_foot(contour, t, lo, hi, px, py)
    for _ in range(3):
        dist, f, t = _closer(contour, sub, i, t, lo, hi, (dist, f, t), 3)
    # the stationary point of the distance itself: where the curve runs
    # parallel to a line sub-move (n·P' = 0, n the line's normal) or square
    # to an arc sub-move ((P - C)·P' = 0); Newton on t, then the sub-move's
    # point nearest to that curve point.  Alternating projections creep
    # toward it (by R/(R + D) a round on a curve of radius R at distance D);
    # this lands on it.  Either candidate is a true pair of points, so the
    # smaller distance is kept.
    arc = sub["arc"][i]
    nx = -(sub["by"][i] - sub["ay"][i])
    ny = sub["bx"][i] - sub["ax"][i]
    tn = t.copy()
    for _ in range(4):
        p, d1, d2 = contour(tn), contour(tn, 1), contour(tn, 2)
        rx, ry = p[:, 0] - sub["cx"][i], p[:, 1] - sub["cy"][i]
        g = np.where(arc, rx * d1[:, 0] + ry * d1[:, 1], nx * d1[:, 0] + ny * d1[:, 1])
        gg = np.where(arc, d1[:, 0] ** 2 + d1[:, 1] ** 2 + rx * d2[:, 0] + ry * d2[:, 1],
                      nx * d2[:, 0] + ny * d2[:, 1])
        with np.errstate(divide="ignore", invalid="ignore"):
            tn = np.clip(np.where(gg != 0, tn - g / np.where(gg != 0, gg, 1.0), tn), lo, hi)
    dist, f, t = _closer(contour, sub, i, tn, lo, hi, (dist, f, t), 2)
    px, py, _ = _point_on(sub, i, f)
    q = contour(t)
    tg = contour(t, 1)
    side = np.sign(tg[:, 0] * (py - q[:, 1]) - tg[:, 1] * (px - q[:, 0]))
    return dist, f, side


def clearance(kind, start, end, center, contour, *, tool_radius, side, tolerance,
              stock_top: float = 0.0) -> Clearance:
    """Smallest clearance of the tool center from the contour over all moves
    below ``stock_top``, and the moves that gouge (see the module docstring).

    Parameters
    ----------
    kind : (n,) int array of RAPID 0, LINE 1, ARC_CW 2, ARC_CCW 3.
    start, end : (n, 3) float arrays, mm.  center : (n, 2) float array, mm.
    contour : Contour (mm).
    tool_radius : mm, > 0.  side : "outside" or "inside".
    tolerance : mm, > 0.  stock_top : z of the stock's top face, mm.

    Returns
    -------
    Clearance (frozen).

    Examples
    --------
    >>> import numpy as np
    >>> from pathgen.spline import fit
    >>> th = np.linspace(0, 2 * np.pi, 100, endpoint=False)
    >>> part = fit(np.c_[10 * np.cos(th), 10 * np.sin(th)], closed=True)
    >>> # a full circle of radius 13 around it at z = -1 (tool radius 3, outside)
    >>> c = clearance(np.array([3]), np.array([[13.0, 0, -1]]), np.array([[13.0, 0, -1]]),
    ...               np.zeros((1, 2)), part, tool_radius=3.0, side="outside", tolerance=0.01)
    >>> round(c.min_clearance, 6), c.ok
    (3.0, True)
    >>> # a line through the part gouges
    >>> c = clearance(np.array([1]), np.array([[-15.0, 0, -1]]), np.array([[15.0, 0, -1]]),
    ...               np.zeros((1, 2)), part, tool_radius=3.0, side="outside", tolerance=0.01)
    >>> c.ok, c.gouges[0][0], c.min_clearance < -9.0
    (False, 0, True)
    """
    return Probe(contour, tool_radius=tool_radius, side=side, tolerance=tolerance).measure(
        kind, start, end, center, stock_top=stock_top)


class Probe:
    """The contour prepared once for many clearance questions (the polyline
    and its KD-tree): :meth:`measure` answers :func:`clearance` for moves,
    :meth:`distance` gives the signed distance of points (+ on the waste
    side).  Used by the toolpath builder to try leads and entries."""

    def __init__(self, contour, *, tool_radius, side, tolerance):
        from scipy.spatial import cKDTree

        self.r = r = check_positive("tool_radius", tool_radius)
        self.tol = tol = check_positive("tolerance", tolerance)
        sgn = side_sign(side)
        if sgn == 0:
            raise InputError("clearance applies to cuts beside the contour (side 'outside' or 'inside'), not 'on'")
        self.contour = contour
        # +1 counter-clockwise (or open), -1 clockwise: the fitted points'
        # orientation, as the toolpath builder takes it
        self.orient = float(orientation(contour.points)) if contour.closed else 1.0
        self.waste = sgn * self.orient  # + : waste on the contour's left
        self.chord_error = tol / 20.0
        self.tv = tv = _polyline(contour, self.chord_error, h_cap=max(0.5 * r, 2.0 * tol))
        self.V = V = contour(tv)
        edge_len = np.hypot(*np.diff(V, axis=0).T)
        self.h_max = float(edge_len.max()) if len(edge_len) else 0.0
        self.h_med = h_med = float(np.median(edge_len)) if len(edge_len) else 1.0
        self.step = float(np.clip(h_med, tol, max(0.5 * r, tol)))
        self.tree = cKDTree(V)

    def distance(self, xy) -> np.ndarray:
        """Signed distance (mm) of points (k, 2) to the contour: + on the waste side."""
        xy = np.asarray(xy, dtype=np.float64).reshape(-1, 2)
        k = len(xy)
        z = np.full((k, 1), -1.0)
        pts = np.hstack([xy, z])
        res = self._measure(np.full(k, LINE, np.int8), pts, pts, np.zeros((k, 2)), 0.0, per_move=True)
        return res

    def measure(self, kind, start, end, center, *, stock_top: float = 0.0) -> "Clearance":
        """:func:`clearance` of these moves against the prepared contour."""
        kind = np.asarray(kind).astype(np.int8).reshape(-1)
        n = len(kind)
        start = np.asarray(start, dtype=np.float64).reshape(n, 3)
        end = np.asarray(end, dtype=np.float64).reshape(n, 3)
        center = np.asarray(center, dtype=np.float64).reshape(n, 2)
        if not (np.all(np.isfinite(start)) and np.all(np.isfinite(end)) and np.all(np.isfinite(center))):
            raise InputError("clearance: a move holds a coordinate that is not finite")
        return self._measure(kind, start, end, center, float(stock_top))

    def per_move(self, kind, start, end, center, *, stock_top: float = 0.0) -> np.ndarray:
        """Smallest signed clearance of each move (inf for moves above the stock top)."""
        kind = np.asarray(kind).astype(np.int8).reshape(-1)
        n = len(kind)
        return self._measure(kind, np.asarray(start, float).reshape(n, 3), np.asarray(end, float).reshape(n, 3),
                             np.asarray(center, float).reshape(n, 2), float(stock_top), per_move=True)

    def _measure(self, kind, start, end, center, stock_top, per_move=False):
        r, tol, V, tv, tree = self.r, self.tol, self.V, self.tv, self.tree
        contour, chord_error, h_max, h_med, step = self.contour, self.chord_error, self.h_max, self.h_med, self.step
        n = len(kind)
        sub, checked = _prepare(kind, start, end, center, stock_top, step)
        m = len(sub["owner"])
        empty = np.zeros(0, np.int64)
        if m == 0:
            if per_move:
                return np.full(n, np.inf)
            return Clearance(math.inf, math.inf, -1, (math.nan, math.nan, math.nan), r, tol,
                             empty, np.zeros(0), 0)
        D = r + max(4.0 * tol, 0.05 * r)  # beyond this, exact values are not needed
        nv = len(V)
        ne = nv - 1
        # a few nearest vertices settle most sub-moves; the rest are asked
        # again with more, and then with a ball query
        k_big = int(np.clip(math.ceil(3.0 * math.sqrt(r * (h_med + step)) / max(h_med, 1e-12)) + 4, 8, 48))
        levels = sorted({min(8, nv), min(k_big, nv)})
        best_d = np.empty(m)
        best_f = np.empty(m)
        best_e = np.empty(m, np.int64)

        def examine(rows, ids, mid_x, mid_y, k):
            dist_k, vert = tree.query(np.c_[mid_x[rows], mid_y[rows]], k=k)
            dist_k = dist_k.reshape(len(rows), k)
            vert = vert.reshape(len(rows), k)
            # edges touching each near vertex: j - 1 and j
            cand = np.concatenate([vert - 1, vert], axis=1)
            valid = (cand >= 0) & (cand < ne)
            cand = np.where(valid, cand, np.clip(cand, 0, ne - 1))
            grp = np.repeat(ids[rows], 2 * k)
            d, f = _pairs(sub, grp, cand.ravel(), V)
            d = np.where(valid.ravel(), d, np.inf).reshape(len(rows), 2 * k)
            bd, bf, be = _reduce_rows(d, f.reshape(len(rows), 2 * k), cand)
            # certificate: every edge not examined has both ends beyond the k-th
            # vertex, so it is at least dist_k[-1] - h_max/2 - len/2 from the sub-move
            reach = dist_k[:, -1] - 0.5 * h_max - 0.5 * sub["len"][ids[rows]]
            proven = (k >= nv) | (reach >= np.minimum(bd, D))
            return bd, bf, be, proven

        for c0 in range(0, m, _CHUNK):
            ids = np.arange(c0, min(m, c0 + _CHUNK))
            mid_x, mid_y, _ = _point_on(sub, ids, np.full(len(ids), 0.5))
            bd = np.full(len(ids), np.inf)
            bf = np.zeros(len(ids))
            be = np.zeros(len(ids), np.int64)
            rows = np.arange(len(ids))
            for k in levels:
                d_, f_, e_, proven = examine(rows, ids, mid_x, mid_y, k)
                bd[rows], bf[rows], be[rows] = d_, f_, e_
                rows = rows[~proven]
                if not len(rows):
                    break
            need = np.minimum(bd, D)
            redo = rows
            if len(redo):
                radius = need[redo] + 0.5 * h_max + 0.5 * sub["len"][ids[redo]] + 1e-9
                lists = tree.query_ball_point(np.c_[mid_x[redo], mid_y[redo]], radius)
                counts = np.fromiter((len(x) for x in lists), np.int64, len(lists))
                if counts.sum():
                    verts = np.concatenate([np.asarray(x, np.int64) for x in lists if len(x)])
                    g2 = np.repeat(redo, counts)
                    cand2 = np.concatenate([verts - 1, verts])
                    g2 = np.concatenate([g2, g2])
                    ok2 = (cand2 >= 0) & (cand2 < ne)
                    g2, cand2 = g2[ok2], cand2[ok2]
                    d2, f2 = _pairs(sub, ids[g2], cand2, V)
                    bd2, bf2, be2 = _reduce(g2, d2, f2, cand2, len(ids))
                    better = bd2 < bd
                    bd = np.where(better, bd2, bd)
                    bf = np.where(better, bf2, bf)
                    be = np.where(better, be2, be)
            best_d[ids], best_f[ids], best_e[ids] = bd, bf, be
        # exact distance to the curve at each sub-move's closest point, and its side
        every = np.arange(m)
        px, py, _ = _point_on(sub, every, best_f)
        _, u = _pt_seg(px, py, V[best_e, 0], V[best_e, 1], V[best_e + 1, 0], V[best_e + 1, 1])
        # near sub-moves: exact distance to the curve; far ones keep the polyline's.
        # Only the sub-moves that can hold their move's smallest distance
        # are refined: the polyline is within chord_error of the curve both
        # ways, so a sub-move whose polyline distance exceeds its move's
        # smallest by more than 2·chord_error is farther from the curve than
        # that move's nearest sub-move, and a sub-move farther than
        # chord_error from the polyline lies wholly on one side of the curve.
        # Those on the part's side (a gouge) are all refined.
        dist = best_d.copy()
        te = tv[best_e] + (tv[best_e + 1] - tv[best_e]) * u
        q, tg = contour(te), contour(te, 1)
        left = np.sign(tg[:, 0] * (py - q[:, 1]) - tg[:, 1] * (px - q[:, 0]))
        if contour.closed:
            left = np.where(_inside(V, px, py), 1.0, -1.0) * self.orient
        owner = sub["owner"]
        least = np.full(n, np.inf)
        np.minimum.at(least, owner, best_d)
        near = np.flatnonzero((best_d <= D + chord_error)
                              & ((best_d <= least[owner] + 2.0 * chord_error + 1e-12) | (left * self.waste <= 0)
                                 | (best_d <= chord_error)))
        if len(near):
            dist[near], best_f[near], left[near] = _refine(contour, tv, best_e[near], u[near], sub, near,
                                                           best_f[near])
        px, py, pz = _point_on(sub, every, best_f)
        if contour.closed:
            # the side of a closed contour is inside or outside it: the normal
            # at the nearest point cannot tell it where that point is a corner
            # (a tool center beyond a convex corner has no normal pointing at
            # it), a point-in-polygon test on the polyline can
            inside = _inside(V, px, py)
            left = np.where(inside, 1.0, -1.0) * self.orient
        signed = np.where(left * self.waste < 0, -dist, dist)
        # per move: the smallest signed clearance of its sub-moves
        per = np.full(n, np.inf)
        np.minimum.at(per, owner, signed)
        if per_move:
            return per
        i = int(np.argmin(signed))
        mc = float(signed[i])
        bad = np.flatnonzero(per < r - tol)
        return Clearance(
            min_clearance=mc,
            margin=mc - r,
            move=int(owner[i]),
            where=(float(px[i]), float(py[i]), float(pz[i])),
            tool_radius=r,
            tolerance=tol,
            gouge_index=bad.astype(np.int64),
            gouge_depth=r - per[bad],
            checked=int(checked),
        )
