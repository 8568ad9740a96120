"""Measured deviation between a chain of lines and arcs and a curve.

The promise of every toolpath is "the largest distance between the moves
and the exact (offset) curve is at most the tolerance".  This module
measures that distance instead of estimating it: each primitive covers a
known parameter span [t0, t1] of the contour, so both directions of the
distance are local and vectorized:

* curve → primitive: points q(t) = P(t) + d·N(t) sampled densely in the
  span, each measured exactly against its own line or arc;
* primitive → curve: points sampled densely on the primitive, each measured
  against the polyline through the curve samples of the same span (a
  window of segments around the same arc-length fraction).

Taking the larger of the two gives a symmetric (Hausdorff-like) distance
per primitive.  No shapely, no quadratic all-pairs distances.

Sample counts follow the geometry, not the number of spline pieces: an
arc's samples keep their polyline's sagitta under 0.5 % of the tolerance
(24 on a line), and each primitive's even step h meets h²·M/8 <= 1 % of
the tolerance, M the largest |q''| bound of the pieces under it (bounds
computed once per contour and offset, reduced per primitive).  Where that
step would take more samples than sampling the pieces one by one (a spike
on one short piece of a long move), the step stays and the pieces it
misses are sampled on their own (:func:`_dense_extras`).  A smooth move
over 10^5 pieces takes a few hundred samples.

Guarantee (curve → primitive): the measured value is within 1 % of the
tolerance of the true maximum distance of the span's curve from its
primitive.  Between samples h apart on a curve with |q''| <= M the curve
leaves their chord by at most h²·M/8 (linear interpolation error; de Boor,
A Practical Guide to Splines, rev. ed. 2001, ch. III, broken line
interpolation) and distance to a line or arc is 1-Lipschitz; M is bounded per spline piece
(:func:`piece_second_derivative_bound`), and every piece is sampled at a
step meeting h²·M/8 <= 1 % of the tolerance, by the even samples or its
own.  The bound needs q without kinks
between samples: it holds for spans that do not cross a corner of the
contour (the path stage ends spans at corners).

Primitives are held in a :class:`Chain` (2-D, z-free): column arrays with
``kind`` LINE / ARC_CW / ARC_CCW as in :mod:`pathgen.path.model`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..geometry import angle_along_arc, arc_geometry  # noqa: F401  (arc_geometry re-exported for the path stage)
from .model import ARC_CCW, ARC_CW, LINE

__all__ = [
    "Chain",
    "offset_points",
    "eval_side",
    "arc_geometry",
    "sample_chain",
    "distance_to_own",
    "chain_deviation",
    "piece_second_derivative_bound",
]


@dataclass(frozen=True, eq=False)
class Chain:
    """Lines and arcs in the plane, each covering contour span [t0, t1].

    kind : (k,) LINE, ARC_CW or ARC_CCW.
    start, end, center : (k, 2) mm (center is 0 for lines).
    t0, t1 : (k,) contour parameters the primitive stands for (NaN for
        pieces that stand for no stretch of the curve, e.g. corner joins).
    """

    kind: np.ndarray
    start: np.ndarray
    end: np.ndarray
    center: np.ndarray
    t0: np.ndarray
    t1: np.ndarray

    def __len__(self) -> int:
        return len(self.kind)

    def take(self, index) -> "Chain":
        return Chain(*(np.asarray(a)[index] for a in self._cols()))

    def _cols(self):
        return (self.kind, self.start, self.end, self.center, self.t0, self.t1)

    @staticmethod
    def concat(chains) -> "Chain":
        chains = [c for c in chains if len(c)]
        if not chains:
            return empty_chain()
        cols = zip(*(c._cols() for c in chains))
        return Chain(*(np.concatenate(list(c)) for c in cols))

    def reversed(self) -> "Chain":
        """The same geometry traversed backwards (arcs change direction)."""
        kind = self.kind[::-1].copy()
        arcs = kind != LINE
        kind[arcs] = ARC_CW + ARC_CCW - kind[arcs]
        return Chain(kind, self.end[::-1].copy(), self.start[::-1].copy(),
                     self.center[::-1].copy(), self.t1[::-1].copy(), self.t0[::-1].copy())


def empty_chain() -> Chain:
    z = np.zeros(0)
    return Chain(np.zeros(0, np.int8), np.zeros((0, 2)), np.zeros((0, 2)), np.zeros((0, 2)), z, z.copy())


def eval_side(contour, t, nu: int, *, left: bool) -> np.ndarray:
    """P(t) derivative ``nu`` taking the piece left (or right) of a break.

    At a corner the curve has two tangents; a span that ends there needs
    the one of the piece before it.
    """
    t = np.asarray(t, dtype=np.float64)
    b = contour.breaks
    if contour.closed:
        period = b[-1] - b[0]
        wrapped = b[0] + np.mod(t - b[0], period)
        # a break a period or more away (a corner past the seam) comes back
        # onto the break only to rounding: snap it, or the side chosen
        # below would be the wrong one by a hair
        j = np.clip(np.searchsorted(b, wrapped), 1, len(b) - 1)
        j = np.where(wrapped - b[j - 1] < b[j] - wrapped, j - 1, j)
        slack = 64.0 * np.finfo(np.float64).eps * (np.abs(t) + abs(b[0]) + period)
        t = np.where(np.abs(wrapped - b[j]) <= slack, b[j], wrapped)
        if left:
            t = np.where(t <= b[0], b[-1], t)
    idx = np.searchsorted(b, t, side="left" if left else "right") - 1
    idx = np.clip(idx, 0, len(b) - 2)
    x = (t - b[idx])[..., None]
    c = contour.coefficients
    if nu == 0:
        return ((c[0][idx] * x + c[1][idx]) * x + c[2][idx]) * x + c[3][idx]
    if nu == 1:
        return (3.0 * c[0][idx] * x + 2.0 * c[1][idx]) * x + c[2][idx]
    raise ValueError("nu must be 0 or 1")


def unit_tangent_side(contour, t, *, left: bool) -> np.ndarray:
    d1 = eval_side(contour, t, 1, left=left)
    return d1 / np.linalg.norm(d1, axis=-1, keepdims=True)


def offset_points(contour, t, d: float) -> np.ndarray:
    """q(t) = P(t) + d·N(t), N the unit left normal; t.shape + (2,), mm."""
    p = contour(t)
    if d == 0.0:
        return p
    d1 = contour(t, 1)
    speed = np.hypot(d1[..., 0], d1[..., 1])[..., None]
    n = np.stack([-d1[..., 1], d1[..., 0]], axis=-1) / speed
    return p + d * n


def _geometry(chain: Chain):
    """Per primitive: radius, start angle and signed sweep (0 for lines)."""
    k = len(chain)
    r, a0, sw = np.zeros(k), np.zeros(k), np.zeros(k)
    ia = np.flatnonzero(chain.kind != LINE)
    if len(ia):
        r[ia], a0[ia], sw[ia] = arc_geometry(chain.start[ia], chain.end[ia], chain.center[ia],
                                             chain.kind[ia] == ARC_CCW)
    return r, a0, sw


def _columns(a):
    """The two coordinate columns of a (k, 2) array as contiguous 1-D arrays."""
    return np.ascontiguousarray(a[:, 0]), np.ascontiguousarray(a[:, 1])


def sample_chain(chain: Chain, counts: np.ndarray):
    """``counts[i]`` points (ends included) evenly along each primitive.

    Returns (points (n, 2), owner (n,), fraction (n,)).
    """
    counts = np.asarray(counts, dtype=np.int64)
    k = len(chain)
    owner = np.repeat(np.arange(k), counts)
    first = np.cumsum(counts) - counts
    # owner runs are contiguous: expand per-primitive values with np.repeat
    # (a gather per point costs several times more at 10^6 points)
    j = np.arange(owner.size) - np.repeat(first, counts)
    frac = j / np.repeat(counts - 1.0, counts)
    pts = np.empty((owner.size, 2))
    arcs = np.repeat(chain.kind != LINE, counts)
    for col in (0, 1):
        s = np.repeat(chain.start[:, col], counts)
        e = np.repeat(chain.end[:, col], counts)
        pts[:, col] = s + (e - s) * frac
    if np.any(arcs):
        rr, aa, ss = _geometry(chain)
        ang = np.repeat(aa, counts)[arcs] + np.repeat(ss, counts)[arcs] * frac[arcs]
        r = np.repeat(rr, counts)[arcs]
        pts[arcs, 0] = np.repeat(chain.center[:, 0], counts)[arcs] + r * np.cos(ang)
        pts[arcs, 1] = np.repeat(chain.center[:, 1], counts)[arcs] + r * np.sin(ang)
    # exact end points (s + (e - s)·1 and cos/sin need not give e bit for bit)
    pts[first] = chain.start
    pts[first + counts - 1] = chain.end
    return pts, owner, frac


def distance_to_own(points, owner, chain: Chain) -> np.ndarray:
    """Exact distance from each point to primitive ``owner`` (line segment or arc)."""
    points = np.asarray(points, dtype=np.float64)
    owner = np.asarray(owner)
    px, py = _columns(points)
    sx, sy = _columns(chain.start)
    ex, ey = _columns(chain.end)
    line_prim = chain.kind == LINE
    lines = line_prim.take(owner)
    all_lines, no_lines = bool(lines.all()), not lines.any()
    dist = np.empty(len(points))

    def sel(v, mask, every):
        return v if every else v[mask]

    if not no_lines:
        o = sel(owner, lines, all_lines)
        x, y = sel(px, lines, all_lines), sel(py, lines, all_lines)
        ax, ay = sx.take(o), sy.take(o)
        abx, aby = ex.take(o) - ax, ey.take(o) - ay
        L2 = abx * abx + aby * aby
        u = ((x - ax) * abx + (y - ay) * aby) / np.where(L2 > 0, L2, 1.0)
        np.clip(u, 0.0, 1.0, out=u)
        d = np.hypot(x - (ax + u * abx), y - (ay + u * aby))
        if all_lines:
            dist = d
        else:
            dist[lines] = d
    if not all_lines:
        arcs = ~lines
        o = sel(owner, arcs, no_lines)
        x, y = sel(px, arcs, no_lines), sel(py, arcs, no_lines)
        r, a0, sw = _geometry(chain)
        cx, cy = _columns(chain.center)
        relx, rely = x - cx.take(o), y - cy.take(o)
        rp = np.hypot(relx, rely)
        ang = np.arctan2(rely, relx)
        a0o = a0.take(o)
        ccw = (chain.kind == ARC_CCW).take(o)
        phi = angle_along_arc(ang, a0o, np.where(ccw, 1.0, -1.0))
        inside = phi <= np.abs(sw).take(o)
        ends = np.minimum(np.hypot(x - sx.take(o), y - sy.take(o)), np.hypot(x - ex.take(o), y - ey.take(o)))
        d = np.where(inside, np.abs(rp - r.take(o)), ends)
        if no_lines:
            dist = d
        else:
            dist[arcs] = d
    return dist


#: the curve → move measurement is within this fraction of the tolerance of
#: the true maximum on every piece (spans are accepted at 0.99·tolerance, so
#: an accepted span keeps the curve within the tolerance)
_GUARANTEE = 0.01
#: samples on one piece at most; reached only where the bound below is
#: infinite (an offset piece whose speed bound vanishes)
_MAX_PER_PIECE = 4096
#: the former rule, at least one even sample on every piece under a move
#: (its cost grows with the points, not the shape); off.  Kept so
#: benchmarks/measure_guarantee.py can replay recorded calls both ways.
_EVERY_PIECE = False


@dataclass(frozen=True, eq=False)
class _Plan:
    """Where each primitive lies among the spline pieces, and what they need.

    lo, hi : (k,) the span, lo <= hi; shift : (k,) whole periods taken off
    (closed contours) so that lo - shift lies in the first period.
    p_lo, p_hi : (k,) first and last piece under the span, counted on from
    the first period (index p is piece p mod m of period p // m).
    mmax : (k,) the largest |q''| bound over those pieces.
    alone : (k,) about how many samples sampling those pieces one by one
    would take (the cost :func:`_dense_extras` has at most).
    bound : (m,) the |q''| bound of every piece.
    """

    lo: np.ndarray
    hi: np.ndarray
    shift: np.ndarray
    p_lo: np.ndarray
    p_hi: np.ndarray
    mmax: np.ndarray
    alone: np.ndarray
    bound: np.ndarray


def _bounds(contour, d: float):
    """Per piece: the |q''| bound, and prefix sums of h·√bound and of the
    infinite bounds; computed once per (contour, d) and kept on the contour."""
    cache = getattr(contour, "__dict__", {}).setdefault("_q2_bounds", {})
    key = float(d)
    got = cache.get(key)
    if got is None:
        b = contour.breaks
        m = len(b) - 1
        bound = piece_second_derivative_bound(contour, np.arange(m), d)
        finite = np.isfinite(bound)
        c = np.where(finite, np.diff(b) * np.sqrt(np.where(finite, bound, 0.0)), 0.0)
        root = np.concatenate([[0.0], np.cumsum(c)])
        inf = None if finite.all() else np.concatenate([[0], np.cumsum(~finite)])
        got = (bound, root, inf)
        for a in got:
            if a is not None:
                a.setflags(write=False)
        if len(cache) >= 4:
            cache.pop(next(iter(cache)))
        cache[key] = got
    return got


def _range_max(vals, s, e):
    """max(vals[s_i .. e_i]) for inclusive ranges s_i <= e_i (one reduceat)."""
    idx = np.empty(2 * len(s), dtype=np.int64)
    idx[0::2], idx[1::2] = s, e
    return np.maximum(np.maximum.reduceat(vals, idx)[0::2], vals[e])


def _plan(contour, chain: Chain, d: float, tol: float) -> _Plan:
    b = contour.breaks
    m = len(b) - 1
    lo, hi = np.minimum(chain.t0, chain.t1), np.maximum(chain.t0, chain.t1)
    if contour.closed:
        period = b[-1] - b[0]
        shift = np.floor((lo - b[0]) / period) * period
        wraps = np.floor((hi - shift - b[0]) / period)
        p_lo = np.clip(np.searchsorted(b, lo - shift, side="right") - 1, 0, m - 1)
        p_hi = wraps.astype(np.int64) * m + np.searchsorted(b, hi - shift - wraps * period, side="left") - 1
    else:
        shift = np.zeros_like(lo)
        p_lo = np.clip(np.searchsorted(b, lo, side="right") - 1, 0, m - 1)
        p_hi = np.clip(np.searchsorted(b, hi, side="left") - 1, 0, m - 1)
    p_hi = np.maximum(p_hi, p_lo)
    bound, root, inf = _bounds(contour, d)
    full = p_hi - p_lo + 1 >= m
    e1 = np.minimum(p_hi, m - 1)
    wrapped = p_hi >= m
    s2 = np.where(wrapped, 0, p_lo)
    e2 = np.where(wrapped, np.minimum(p_hi - m, m - 1), e1)
    mmax = np.maximum(_range_max(bound, p_lo, e1), _range_max(bound, s2, e2))
    if full.any():
        mmax[full] = bound.max()

    def upto(x, pre):  # sum over pieces 0 .. x-1 counted on from the first period
        return (x // m) * pre[m] + pre[x % m]

    roots = upto(p_hi + 1, root) - upto(p_lo, root)
    n_inf = 0.0 if inf is None else upto(p_hi + 1, inf) - upto(p_lo, inf)
    alone = roots / np.sqrt(8.0 * _GUARANTEE * tol) + 2.0 * (p_hi - p_lo + 1) + n_inf * _MAX_PER_PIECE
    return _Plan(lo, hi, shift, p_lo, p_hi, mmax, alone, bound)


def _sample_counts(contour, chain: Chain, tol: float, density: int = 1, d: float = 0.0,
                   plan: _Plan | None = None) -> np.ndarray:
    """Even samples per primitive, sized by the geometry, not by the pieces.

    The larger of (a) the primitive's own rule, times ``density``: on an
    arc, the polyline of its samples keeps its sagitta below 0.5 % of tol;
    24 on a line; and (b) the count whose step h meets h²·M/8 <= 0.01·tol,
    M the largest |q''| bound of the pieces under the primitive (the
    curve's own sagitta between samples), unless (b) would take more
    samples than sampling those pieces one by one: a spike on one short
    piece of a long move.  There the pieces the step misses get samples of
    their own (:func:`_dense_extras`).
    """
    k = len(chain)
    counts = np.full(k, 24, dtype=np.int64)
    arcs = chain.kind != LINE
    if np.any(arcs):
        r, _, sw = arc_geometry(chain.start[arcs], chain.end[arcs], chain.center[arcs],
                                chain.kind[arcs] == ARC_CCW)
        need = np.abs(sw) * np.sqrt(r / (0.04 * tol)) + 2.0
        counts[arcs] = np.maximum(24, np.ceil(np.minimum(need, 4000.0))).astype(np.int64)
    if _EVERY_PIECE:
        b = contour.breaks
        t0, t1 = np.minimum(chain.t0, chain.t1), np.maximum(chain.t0, chain.t1)
        if contour.closed:
            pieces = np.ceil((t1 - t0) / (b[-1] - b[0]) * (len(b) - 1))
        else:
            pieces = np.searchsorted(b, t1) - np.searchsorted(b, t0)
        counts = np.maximum(counts, (pieces + 2).astype(np.int64))
        return counts if density == 1 else (counts - 1) * int(density) + 1
    counts = counts if density == 1 else (counts - 1) * int(density) + 1
    if plan is None:
        plan = _plan(contour, chain, d, tol)
    with np.errstate(invalid="ignore", over="ignore"):
        need = np.ceil((plan.hi - plan.lo) * np.sqrt(plan.mmax / (8.0 * _GUARANTEE * tol))) + 1.0
    cheap = np.isfinite(need) & (need <= plan.alone)
    return np.where(cheap, np.maximum(counts, np.where(cheap, need, 0.0)), counts).astype(np.int64)


def piece_second_derivative_bound(contour, pieces, d: float) -> np.ndarray:
    """An upper bound of |q''(t)| on each spline piece, q = P + d·N; mm per unit t².

    Notes
    -----
    On a cubic piece P'' is linear in t, so for d = 0 the bound is exact:
    the larger of |P''| at the two ends (the norm of a linear function is
    convex).  For an offset, q'' = P'' + d·N''.  With v = |P'|, a = P'',
    j = P''' (constant on the piece), T = P'/v and N = T turned a quarter
    turn: T' = (a - T(T·a))/v, and differentiating once more,
    |N''| = |T''| <= 2|j|/v + 3|a|²/v².  The speed is bounded below on the
    piece by Taylor's theorem about its middle m,
    v >= |P'(m)| - |P''(m)|·h/2 - |j|·h²/8; where that is not positive the
    bound is inf.
    """
    pieces = np.asarray(pieces, dtype=np.int64)
    h = np.diff(contour.breaks).take(pieces)
    # per coordinate, contiguous: (x, y) columns of c[0..2] on the pieces
    per_coord = getattr(contour, "__dict__", {}).get("_c")
    if per_coord is not None and len(pieces) == per_coord.shape[2] and (
            len(pieces) == 0 or (pieces[0] == 0 and np.all(np.diff(pieces) == 1))):
        (c0x, c1x, c2x), (c0y, c1y, c2y) = per_coord[0, :3], per_coord[1, :3]
    else:
        c = contour.coefficients
        (c0x, c1x, c2x), (c0y, c1y, c2y) = [[c[i][:, k].take(pieces) for i in range(3)] for k in range(2)]
    a0 = np.hypot(2.0 * c1x, 2.0 * c1y)
    a1 = np.hypot(6.0 * c0x * h + 2.0 * c1x, 6.0 * c0y * h + 2.0 * c1y)
    amax = np.maximum(a0, a1)
    if d == 0.0:
        return amax
    hm = 0.5 * h
    jn = np.hypot(6.0 * c0x, 6.0 * c0y)
    um = np.hypot((3.0 * c0x * hm + 2.0 * c1x) * hm + c2x, (3.0 * c0y * hm + 2.0 * c1y) * hm + c2y)
    am = np.hypot(6.0 * c0x * hm + 2.0 * c1x, 6.0 * c0y * hm + 2.0 * c1y)
    vmin = um - am * 0.5 * h - jn * h * h / 8.0
    with np.errstate(divide="ignore", invalid="ignore"):
        nn = 2.0 * jn / vmin + 3.0 * amax * amax / (vmin * vmin)
    return np.where(vmin > 0, amax + abs(d) * nn, np.inf)


def _dense_extras(contour, chain: Chain, counts: np.ndarray, d: float, tol: float,
                  plan: _Plan | None = None):
    """Extra curve samples on pieces whose features are narrower than the even step.

    The even samples of primitive i are D_i = |t1 - t0|/(counts_i - 1)
    apart.  Between two samples h apart on a curve with |q''| <= M the
    curve leaves the chord by at most h²·M/8 (the linear interpolation
    error bound; de Boor, A Practical Guide to Splines, rev. ed. 2001,
    ch. III, broken line interpolation), and the distance to a move is
    1-Lipschitz, so the largest distance between two samples exceeds the larger of theirs by at most
    that.  Pieces where D_i²·M/8 > _GUARANTEE·tol get samples of their own:
    both ends and evenly between at a step that meets the bound.  Only the
    primitives whose largest piece bound the step misses are looked at
    piece by piece.

    Returns (owner, t) of the extra samples strictly inside each span, or
    None when every piece is already sampled finely enough.
    """
    if plan is None:
        plan = _plan(contour, chain, d, tol)
    b = contour.breaks
    m = len(b) - 1
    period = b[-1] - b[0] if contour.closed else 0.0
    lo, hi = plan.lo, plan.hi
    step = (hi - lo) / (counts - 1.0)
    eps = _GUARANTEE * tol
    with np.errstate(invalid="ignore", over="ignore"):
        miss = np.flatnonzero(~(step * step * plan.mmax / 8.0 <= eps))
    if not len(miss):
        return None
    npair = (plan.p_hi - plan.p_lo + 1)[miss]
    owner = np.repeat(miss, npair)
    first = np.cumsum(npair) - npair
    pe = np.repeat(plan.p_lo[miss], npair) + (np.arange(owner.size) - np.repeat(first, npair))
    piece = pe % m
    bound = plan.bound[piece]
    need = step.take(owner) ** 2 * bound / 8.0 > eps
    if not need.any():
        return None
    owner, pe, piece, bound = owner[need], pe[need], piece[need], bound[need]
    base = plan.shift.take(owner) + (pe // m) * period
    a = np.maximum(b[piece] + base, lo.take(owner))
    e = np.minimum(b[piece + 1] + base, hi.take(owner))
    with np.errstate(divide="ignore"):
        k = np.ceil((e - a) / np.sqrt(8.0 * eps / bound)) + 1.0
    k = np.clip(np.where(np.isfinite(k), k, _MAX_PER_PIECE), 2, _MAX_PER_PIECE).astype(np.int64)
    o = np.repeat(owner, k)
    f0 = np.cumsum(k) - k
    frac = (np.arange(o.size) - np.repeat(f0, k)) / np.repeat(k - 1.0, k)
    t = np.repeat(a, k) + np.repeat(e - a, k) * frac
    keep = (t > lo.take(o)) & (t < hi.take(o))
    return o[keep], t[keep]


def chain_deviation(contour, d: float, chain: Chain, tol: float, *, density: int = 1) -> np.ndarray:
    """Measured maximum distance of each primitive from q(t) = P(t) + d·N(t).

    Parameters
    ----------
    contour : Contour
    d : signed offset along the left normal, mm (0 for the contour itself).
    chain : primitives with finite spans ``t0``, ``t1`` (either order).
    tol : the tolerance the sample density is chosen for, mm.
    density : samples per primitive, as a multiple of the default count.

    Returns
    -------
    (k,) array, mm: max over both directions (curve → primitive exactly,
    primitive → curve against the curve's dense polyline).

    Notes
    -----
    The curve → primitive part is within 0.01·tol of the true maximum on
    every primitive (h²·M/8 bound, see the module notes): the even step is
    sized by the largest |q''| bound under each primitive, and pieces it
    still misses are sampled on their own.
    """
    k = len(chain)
    if k == 0:
        return np.zeros(0)
    plan = None if _EVERY_PIECE else _plan(contour, chain, d, tol)
    counts = _sample_counts(contour, chain, tol, density, d, plan)
    owner = np.repeat(np.arange(k), counts)
    first = np.cumsum(counts) - counts
    j = np.arange(owner.size) - np.repeat(first, counts)
    frac = j / np.repeat(counts - 1.0, counts)
    t = np.repeat(chain.t0, counts) + np.repeat(chain.t1 - chain.t0, counts) * frac
    prim_counts, prim_first = counts, first
    extras = _dense_extras(contour, chain, counts, d, tol, plan)
    if extras is not None:
        # pieces with features narrower than the even step: merge their
        # samples in, in order along each primitive
        eo, et = extras
        owner = np.concatenate([owner, eo])
        t = np.concatenate([t, et])
        sgn = np.where(chain.t1 >= chain.t0, 1.0, -1.0)
        order = np.lexsort((t * sgn.take(owner), owner))
        owner, t = owner[order], t[order]
        counts = np.bincount(owner, minlength=k)
        first = np.cumsum(counts) - counts
    q = offset_points(contour, t, d)
    # exact ends: primitives start and end on the curve by construction, but
    # a span ending at a corner must use the left-hand piece there
    q[first] = offset_side(contour, chain.t0, d, left=chain.t0 > chain.t1)
    last = first + counts - 1
    q[last] = offset_side(contour, chain.t1, d, left=chain.t1 > chain.t0)
    dev_a = np.maximum.reduceat(distance_to_own(q, owner, chain), first)

    # primitive -> curve polyline, matching arc-length fractions.  The
    # primitive samples use the same counts, so sample i of both belongs to
    # the same primitive (owner).
    qx, qy = _columns(q)
    abx, aby = np.diff(qx), np.diff(qy)
    seg = np.hypot(abx, aby)
    seg[last[:-1]] = 0.0  # no segment between spans
    cum = np.concatenate([[0.0], np.cumsum(seg)])
    span_len = cum[last] - cum[first]
    cfrac = (cum - np.repeat(cum[first], counts)) / np.repeat(np.where(span_len > 0, span_len, 1.0), counts)
    key_curve = owner + np.clip(cfrac, 0.0, 1.0) * 0.999999
    pts, powner, pfrac = sample_chain(chain, prim_counts)
    px, py = _columns(pts)
    key_prim = powner + pfrac * 0.999999
    pos = np.searchsorted(key_curve, key_prim)
    n = len(q)
    L2 = abx * abx + aby * aby
    L2 = np.where(L2 > 0, L2, 1.0)
    # segment i (q[i] -> q[i+1]) belongs to primitive owner[i] when both ends do
    seg_owner = np.where(owner[:-1] == owner[1:], owner[:-1], -1)
    best = np.full(len(pts), np.inf)
    for off in range(-3, 3):
        i = np.clip(pos + off, 0, n - 2)
        ax, ay = qx.take(i), qy.take(i)
        sx, sy = abx.take(i), aby.take(i)
        u = ((px - ax) * sx + (py - ay) * sy) / L2.take(i)
        np.clip(u, 0.0, 1.0, out=u)
        dd = np.hypot(px - (ax + u * sx), py - (ay + u * sy))
        mine = seg_owner.take(i) == powner
        np.minimum(best, dd, out=best, where=mine)
    best = np.where(np.isfinite(best), best, 0.0)
    dev_b = np.maximum.reduceat(best, prim_first)
    return np.maximum(dev_a, dev_b)


def offset_side(contour, t, d, *, left):
    left = np.broadcast_to(np.asarray(left), np.shape(t))
    out = np.empty(np.shape(t) + (2,))
    for side in (False, True):
        m = left == side
        if np.any(m):
            p = eval_side(contour, t[m], 0, left=side)
            if d != 0.0:
                tg = unit_tangent_side(contour, t[m], left=side)
                p = p + d * np.stack([-tg[:, 1], tg[:, 0]], axis=-1)
            out[m] = p
    return out
