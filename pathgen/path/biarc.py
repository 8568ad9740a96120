"""Biarcs: two tangent-continuous circular arcs between two points and tangents.

Given P1 with unit tangent T1 and P2 with unit tangent T2, the
equal-tangent-length ("equal chord") biarc (Bolton 1975; the construction
is also in Meek & Walton 1992) solves

    2 (1 - T1·T2) δ² + 2 (v·(T1 + T2)) δ - v·v = 0,     v = P2 - P1,

for the tangent length δ > 0, puts the joint at
Pm = (P1 + P2 + δ (T1 - T2)) / 2, and takes arc i as the circle tangent to
T_i at P_i through Pm: with w = Pm - P_i and n_i the left normal of T_i,
its center is P_i + s n_i, s = (w·w) / (2 w·n_i).  Both arcs have the
tangent (Q2 - Q1)/|Q2 - Q1| at Pm (Q1 = P1 + δT1, Q2 = P2 - δT2), so the
pair is G1.  Points and tangents taken from one circle give back that
circle exactly.

An arc whose sagitta is below ``line_sagitta``, or whose radius is at least
10⁴ times its chord, is returned as a line; it meets its neighbours with a
kink of at most its half-sweep (5·10⁻⁵ rad).

The offset of an arc by d along the left normal of its direction is the
concentric arc of radius R - d (counter-clockwise) or R + d (clockwise);
the offset of a line is the parallel line.  :func:`offset_chain` applies
this exactly.
"""

from __future__ import annotations

import numpy as np

from ..geometry import dot as _dot, left as _left
from .measure import Chain, arc_geometry
from .model import ARC_CCW, ARC_CW, LINE

__all__ = ["biarc", "joint_circle", "biarc_chain", "offset_chain", "merge_chain"]


def joint_circle(p1, t1, p2, t2):
    """Circle of all possible biarc joints: through P1, P2 and the equal-chord joint.

    Returns (center (k, 2), radius (k,), ok (k,)); ok is False where the
    three points are (nearly) collinear and the locus is a line.
    """
    pm, _, _, ok = biarc(p1, t1, p2, t2)
    a, b = pm - p1, p2 - p1
    den = 2.0 * (a[:, 0] * b[:, 1] - a[:, 1] * b[:, 0])
    aa, bb = _dot(a, a), _dot(b, b)
    good = ok & (np.abs(den) > 1e-12 * np.sqrt(aa * bb))
    den = np.where(good, den, 1.0)
    cx = (b[:, 1] * aa - a[:, 1] * bb) / den
    cy = (a[:, 0] * bb - b[:, 0] * aa) / den
    center = p1 + np.stack([cx, cy], axis=-1)
    return center, np.hypot(cx, cy), good


def biarc(p1, t1, p2, t2, *, joint=None, line_sagitta: float = 0.0):
    """Biarcs (equal tangent lengths, or through a given joint), vectorized over rows.

    Parameters
    ----------
    p1, t1, p2, t2 : (k, 2) arrays; end points (mm) and unit tangents.
    joint : (k, 2) or None; a joint on the joint circle (see
        :func:`joint_circle`) instead of the equal-tangent-length one.  Any
        point of that circle gives a tangent-continuous pair.
    line_sagitta : an arc whose sagitta (mm) is at or below this is a line.

    Returns
    -------
    joint : (k, 2) the joint point Pm.
    kind : (k, 2) LINE / ARC_CW / ARC_CCW of the first and second arc.
    center : (k, 2, 2) centers (0 for lines).
    ok : (k,) False where no proper biarc exists (tangent length not
        positive or not finite, or an arc turning more than 180°); such
        spans must be split.

    Examples
    --------
    >>> import numpy as np
    >>> p1, t1 = np.array([[1.0, 0.0]]), np.array([[0.0, 1.0]])
    >>> p2, t2 = np.array([[0.0, 1.0]]), np.array([[-1.0, 0.0]])
    >>> pm, kind, c, ok = biarc(p1, t1, p2, t2)
    >>> np.allclose(c, 0.0), bool(ok[0]), np.allclose(np.hypot(*pm[0]), 1.0)
    (True, True, True)
    """
    p1, t1, p2, t2 = (np.asarray(a, dtype=np.float64) for a in (p1, t1, p2, t2))
    v = p2 - p1
    vv = _dot(v, v)
    vt = _dot(v, t1 + t2)
    a = 2.0 * (1.0 - _dot(t1, t2))
    with np.errstate(divide="ignore", invalid="ignore"):
        disc = vt * vt + a * vv
        # stable root of a δ² + 2 vt δ - vv = 0 (no cancellation when vt > 0)
        delta = np.where(
            vt >= 0,
            vv / (vt + np.sqrt(np.maximum(disc, 0.0))),
            (-vt + np.sqrt(np.maximum(disc, 0.0))) / np.where(a > 0, a, np.nan),
        )
    ok = np.isfinite(delta) & (delta > 0)
    delta = np.where(ok, delta, 0.0)
    pm = 0.5 * (p1 + p2 + delta[:, None] * (t1 - t2))
    if joint is not None:
        pm = np.asarray(joint, dtype=np.float64)
    kind = np.empty((len(p1), 2), dtype=np.int8)
    center = np.zeros((len(p1), 2, 2))
    for i, (p, t, w) in enumerate(((p1, t1, pm - p1), (p2, t2, pm - p2))):
        n = _left(t)
        wn = _dot(w, n)
        ww = _dot(w, w)
        # half-sweep between the tangent and the chord (second arc: chord into P2)
        along = _dot(w, t) if i == 0 else -_dot(w, t)
        half = np.arctan2(np.abs(wn), along)
        sag = 0.5 * np.sqrt(ww) * np.tan(0.5 * half)
        # a line when the sagitta is negligible or the radius is huge against
        # the chord (R >= 1e4 chord, i.e. half-sweep <= 5e-5 rad)
        is_line = (sag <= line_sagitta) | (ww == 0.0) | (np.sin(half) <= 0.5e-4)
        with np.errstate(divide="ignore", invalid="ignore"):
            s = np.where(is_line, 0.0, ww / (2.0 * np.where(is_line, 1.0, wn)))
        center[:, i] = np.where(is_line[:, None], 0.0, p + s[:, None] * n)
        kind[:, i] = np.where(is_line, LINE, np.where(s > 0, ARC_CCW, ARC_CW))
        ok &= is_line | (half < 0.5 * np.pi + 1e-9)
        ok &= np.isfinite(center[:, i]).all(axis=1)
    return pm, kind, center, ok


def biarc_chain(p1, t1, p2, t2, ta, tb, *, joint=None, line_sagitta: float = 0.0):
    """Biarcs as a :class:`Chain` of 2k primitives (span k -> rows 2k, 2k+1).

    The joint is given the parameter (ta + tb)/2 for bookkeeping only;
    deviation is measured per span (both primitives over [ta, tb]).
    """
    pm, kind, center, ok = biarc(p1, t1, p2, t2, joint=joint, line_sagitta=line_sagitta)
    k = len(p1)
    start = np.stack([p1, pm], axis=1).reshape(2 * k, 2)
    end = np.stack([pm, p2], axis=1).reshape(2 * k, 2)
    tm = 0.5 * (ta + tb)
    t0 = np.stack([ta, tm], axis=1).reshape(2 * k)
    t1_ = np.stack([tm, tb], axis=1).reshape(2 * k)
    return Chain(kind.reshape(2 * k), start, end, center.reshape(2 * k, 2), t0, t1_), ok


def offset_chain(chain: Chain, d: float):
    """Exact offset of lines and arcs by ``d`` (mm) along the left normal.

    Returns (Chain, ok): ok is False where an arc's radius would drop to
    zero or below (the offset reverses there: the tool cannot follow it).
    """
    if d == 0.0:
        return chain, np.ones(len(chain), bool)
    kind, s, e, c = chain.kind, chain.start, chain.end, chain.center
    ok = np.ones(len(kind), bool)
    s2, e2 = s.copy(), e.copy()
    lines = kind == LINE
    if np.any(lines):
        u = e[lines] - s[lines]
        L = np.hypot(u[:, 0], u[:, 1])[:, None]
        shift = d * _left(u) / np.where(L > 0, L, 1.0)
        s2[lines] += shift
        e2[lines] += shift
    arcs = ~lines
    if np.any(arcs):
        ccw = kind[arcs] == ARC_CCW
        rs, re = s[arcs] - c[arcs], e[arcs] - c[arcs]
        r = np.hypot(rs[:, 0], rs[:, 1])
        # left of a ccw arc is toward the center
        r2 = np.where(ccw, r - d, r + d)
        ok[arcs] = r2 > 0
        scale = np.where(r > 0, r2 / r, 0.0)[:, None]
        s2[arcs] = c[arcs] + rs * scale
        e2[arcs] = c[arcs] + re * scale
    return Chain(kind, s2, e2, c, chain.t0, chain.t1), ok


def merge_chain(chain: Chain, *, max_sweep: float = np.pi, atol: float = 1e-9) -> Chain:
    """Join consecutive collinear lines and co-circular arcs.

    Lines that continue in the same direction (the second one's end within
    ``atol`` mm of the first one's line) become one line; arcs with the
    same direction and centers within ``atol`` mm become one arc while the
    joined sweep stays within ``max_sweep`` (radians).  With ``atol`` 0
    nothing moves; otherwise re-measure the result.
    """
    k = len(chain)
    if k < 2:
        return chain
    kind, s, e, c = chain.kind, chain.start, chain.end, chain.center
    same = kind[1:] == kind[:-1]
    cont = np.hypot(*(s[1:] - e[:-1]).T) <= atol
    lines = same & cont & (kind[1:] == LINE)
    u0, u1 = e[:-1] - s[:-1], e[1:] - s[1:]
    L0 = np.hypot(*u0.T)
    L1 = np.hypot(*u1.T)
    cross = np.abs(u0[:, 0] * u1[:, 1] - u0[:, 1] * u1[:, 0])
    lines &= (cross <= atol * np.maximum(L0, L1)) & (_dot(u0, u1) > 0)
    arcs = same & cont & (kind[1:] != LINE)
    arcs &= np.hypot(*(c[1:] - c[:-1]).T) <= atol
    join = lines | arcs
    if not np.any(join):
        return chain
    # runs of joinable moves; arc runs are cut greedily at ``max_sweep``
    isarc = kind != LINE
    sweep = np.zeros(k)
    if np.any(isarc):
        sweep[isarc] = np.abs(arc_geometry(s[isarc], e[isarc], c[isarc], kind[isarc] == ARC_CCW)[2])
    new = np.concatenate([[True], ~join])
    join_after = np.concatenate([join, [False]])
    in_run = isarc & (~new | join_after)
    acc = 0.0
    for i in np.flatnonzero(in_run):  # only co-circular arcs need the loop
        if new[i]:
            acc = sweep[i]
        elif acc + sweep[i] > max_sweep + 1e-9:
            new[i] = True
            acc = sweep[i]
        else:
            acc += sweep[i]
    starts = np.flatnonzero(new)
    ends = np.concatenate([starts[1:], [k]]) - 1
    return Chain(kind[starts], s[starts], e[ends], c[starts], chain.t0[starts], chain.t1[ends])
