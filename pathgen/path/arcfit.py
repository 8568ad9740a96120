"""Tangent-continuous arcs fitted inside the tolerance band of a curve.

Biarcs that take the curve's own tangents at every span end follow every
wiggle of a curve interpolating noisy points.  This module instead builds
a G1 arc spline (Meek & Walton 1992; an arc spline is a chain of lines
and arcs, each tangent to the next) inside the band of half-width e
around the target q(t) = P(t) + d·N(t):

* each arc starts where the previous one ends, along its end tangent;
* it runs as far along q as some arc of that start and tangent keeps
  every sample of q within e (a curvature interval per sample, so the
  test is a running max/min over the samples ahead, vectorized);
* its end is the radial projection of the last sample onto the arc, so
  the end may sit off the curve inside the band;
* candidate ends (how far, which curvature of the feasible interval)
  are scored by how far the *next* arc from each reaches, and a beam
  search keeps the best few distinct ends at every step (all candidates
  as arrays; a Python loop per step, never per sample).

Windows start at q(a) along the curve's tangent and end at q(b): along
the curve's tangent there with a biarc (Bolton 1975), or, where the path
has a corner anyway (d = 0 at a corner, the end of an open contour, the
edge of a stretch the tool cannot reach), with one arc through q(b).  Where no arc can continue, the chain returns to
the curve with a biarc onto the curve's point and tangent and starts again
from there.  Every move is measured afterwards
(:func:`pathgen.path.measure.chain_deviation`); a window that does not
measure within the tolerance is fitted again with a narrower band, and
last with the curve-tangent biarcs of :mod:`pathgen.path.flatten`.

Distance of a point X to the circle through S with unit tangent T and
signed curvature k (N the left normal of T, w = X - S, a = w·N, b = w·w)::

    g(k) = (k b - 2a) / (1 + sqrt(1 - 2ak + k²b))        (k = 0: the line, -a)

|g(k)| <= e holds exactly for k in [2(a - e), 2(a + e)] / (b - e²) when
b > e² (points nearer than e to S need no test) [derived: |X - C| = 1/|k| ± e
with C = S + N/k].
"""

from __future__ import annotations

import numpy as np

from ..geometry import dot as _dot, left as _left, turn_angle
from .biarc import biarc_chain, merge_chain
from .flatten import curve_joints, approximate
from .measure import Chain, chain_deviation, eval_side, offset_points, unit_tangent_side
from .model import ARC_CCW, ARC_CW, LINE

__all__ = ["band_arcs"]

#: the band used for the fit, as a fraction of the tolerance; retries narrow it
_BANDS = (0.97, 0.9, 0.75)
#: largest turn of the curve under one arc (rad)
_CAP = 0.75 * np.pi
#: sagitta of the sample polyline, as a fraction of the tolerance
_SAMPLE_SAG = 0.01
#: the first rule sizes a window's samples while it asks for at most this
#: many (ordinary parts keep their samples and outputs); beyond, the step
#: sized by geometry replaces it wherever it is _WIDER times longer
_FIRST_RULE_MAX = 8192
_WIDER = 2.0
#: moves are accepted at this fraction of the tolerance (as in flatten)
_TARGET = 0.99
#: mm: an arc of larger radius is tried as a line (a 208 mm straight side
#: between fillets was written as an arc of radius 1.49e6 mm, beyond what
#: the program writer accepts)
R_LINE = 1e5
#: rad: a biarc with a bigger kink (a near-line written as a line) is not taken
_KINK = 1e-10
#: candidate ends, as fractions of the reach, and curvatures, as fractions
#: of the feasible interval there (besides the minimax one and a line)
_J_FRACTIONS = np.array([1.0, 0.98, 0.95, 0.9, 0.85, 0.75, 0.6, 0.45, 0.3])
_K_FRACTIONS = np.array([0.05, 0.25, 0.5, 0.75, 0.95])
#: the final measurement samples this many times more densely than the default
_DENSITY = 4
#: states kept per step of the search (1: plain greedy with lookahead)
_BEAM = 6


def _samples(contour, a, b, d, tol):
    """Parameters t, points X = q(t), unit tangents, their unwrapped angle,
    and per sample the curvature band (κ_q, D) arcs tested there must keep.

    Steps h = min(√(8·0.01·tol/κ_q), 20·tol): the polyline's sagitta stays
    below 1 % of the tolerance, with κ_q the largest curvature at the breaks
    and quarter points of pieces a step spans; no step is longer than 20·tol (the
    resolution of an arc's end).  Where the pieces are shorter than tol/16
    on average (10^6 points on a 400 mm outline) the breaks alone are
    taken: a step at least √0.08·tol long (curvature up to 1/tol) still
    spans four of them, as it spans the quarter points of a piece, and the
    grid stays sized by the points, not four times that.

    On a large, gently curved part that rule makes the samples grow with
    size ÷ tolerance although the arcs written grow far slower.  Where the
    step sized by geometry is longer, it is taken instead:
    h_g = √(8·0.01·tol/D) with D = 17·tol^(1/3)·|κ_q'|^(2/3), the spread of
    curvature an arc in the band needs against the curve (an arc of length
    ℓ ≈ (tol/|κ_q'|)^(1/3) meets curvature changing by |κ_q'|·ℓ, and its
    band lets it differ by about 16·tol/ℓ² more), never beyond 2 % of the
    radius or 1/64 of the window, where it is more than twice the first
    rule's step and the first rule would ask for more than 8192 samples
    (ordinary parts keep their samples, and their outputs).  The distance from a point of q to an arc
    of curvature k bends between samples by about |κ_q − k|·h²/8, so such
    samples are only a test of arcs with |k − κ_q| ≤ D = 8·0.01·tol/h²
    there; :meth:`_Band.intervals` adds that to each sample's interval (D
    is infinite on samples the first rule sizes, which keeps what it fits).
    For a shape scaled by s, |κ_q'| goes as s⁻², h_g as s^(2/3), and the
    samples as s^(1/3), as the arcs do.
    """
    g, d1, d2 = _grid(contour, a, b, 4 if _mean_piece(contour) > tol / 16.0 else 1)
    speed = np.hypot(d1[:, 0], d1[:, 1])
    kappa = (d1[:, 0] * d2[:, 1] - d1[:, 1] * d2[:, 0]) / speed**3
    stretch = np.maximum(1.0 - d * kappa, 1e-3)
    kq = np.abs(kappa) / stretch
    ds = speed * stretch
    # the largest curvature near each step (an offset's curvature κ/(1 - dκ)
    # peaks sharply where 1 - dκ is small: take the neighbours' too)
    kq = np.maximum(kq, np.maximum(np.r_[kq[1:], kq[-1]], np.r_[kq[0], kq[:-1]]))
    kmax = np.maximum(kq[1:], kq[:-1])
    with np.errstate(divide="ignore"):
        h = np.minimum(np.sqrt(8.0 * _SAMPLE_SAG * tol / kmax), 20.0 * tol)
    length = 0.5 * (ds[1:] + ds[:-1]) * np.diff(g)
    if np.sum(length / h) <= _FIRST_RULE_MAX:
        wide = np.zeros(len(h), bool)  # parts of ordinary size: the first rule
    else:
        h_g = _geometric_steps(kappa / stretch, kmax, length, tol)
        wide = h_g > _WIDER * h
        h = np.where(wide, h_g, h)
    # samples evenly in U = ∫ ds / h: one per step h (pieces shorter than h
    # share a sample; h comes from the largest curvature at any break or
    # midpoint it spans, so wiggles between samples are accounted for)
    U = np.concatenate([[0.0], np.cumsum(length / h)])
    m = max(int(np.ceil(U[-1])), 1)
    t = np.interp(np.linspace(0.0, U[-1], m + 1), U, g)
    t[0], t[-1] = a, b
    X = offset_points(contour, t, d)
    tan = contour(t, 1)
    # window ends: the pieces on the window's side of a break (corners)
    X[0] = eval_side(contour, np.array([a]), 0, left=False)[0]
    X[-1] = eval_side(contour, np.array([b]), 0, left=True)[0]
    tan[0] = unit_tangent_side(contour, np.array([a]), left=False)[0]
    tan[-1] = unit_tangent_side(contour, np.array([b]), left=True)[0]
    tan /= np.linalg.norm(tan, axis=1, keepdims=True)
    if d != 0.0:
        X[0] += d * _left(tan[0])
        X[-1] += d * _left(tan[-1])
    theta = np.unwrap(np.arctan2(tan[:, 1], tan[:, 0]))
    # the curvature band of arcs these samples can test (see above)
    kq_t = np.zeros(len(t))
    spread = np.full(len(t), np.inf)
    if np.any(wide):
        step = np.clip(np.searchsorted(g, t, side="right") - 1, 0, len(h) - 1)
        D = np.where(wide, 8.0 * _SAMPLE_SAG * tol / h**2, np.inf)
        spread = np.minimum(D[step], np.minimum(D[np.maximum(step - 1, 0)], D[np.minimum(step + 1, len(D) - 1)]))
        d1t, d2t = contour(t, 1), contour(t, 2)
        sp = np.hypot(d1t[:, 0], d1t[:, 1])
        kt = (d1t[:, 0] * d2t[:, 1] - d1t[:, 1] * d2t[:, 0]) / sp**3
        kq_t = kt / np.maximum(1.0 - d * kt, 1e-3)
        kq_t = np.where(np.isfinite(spread), kq_t, 0.0)
    return t, X, tan, theta, kq_t, spread


def _mean_piece(contour) -> float:
    """The mean chord of the contour's pieces, mm (kept on the contour)."""
    cache = getattr(contour, "__dict__", {})
    got = cache.get("_mean_piece")
    if got is None:
        p = contour.coefficients[3]  # P at the start of every piece
        ends = np.concatenate([p, contour(contour.breaks[-1:])])
        got = float(np.hypot(*np.diff(ends, axis=0).T).sum()) / max(len(p), 1)
        cache["_mean_piece"] = got
    return got


def _grid(contour, a, b, sub=4):
    """Parameters ``sub`` to a piece (and b) over [a, b], with P' and P''.

    The breaks strictly inside (a, b) cut it into whole pieces (a closed
    contour's window may run past the seam) and two partial ones at the
    ends; each is cut into ``sub`` equal steps.  The whole pieces are
    evaluated by broadcasting their coefficients (:meth:`Contour.on_pieces`):
    no search and no gather per point.
    """
    brk = contour.breaks
    m = len(brk) - 1
    u = np.arange(sub) / float(sub)
    if contour.closed:
        period = brk[-1] - brk[0]
        ka = int(np.floor((a - brk[0]) / period))
        kb = int(np.floor((b - brk[0]) / period))
        e0 = ka * m + int(np.searchsorted(brk[:-1], a - ka * period, side="right"))
        e1 = kb * m + int(np.searchsorted(brk[:-1], b - kb * period, side="left")) - 1
    else:
        period = 0.0
        e0 = int(np.searchsorted(brk, a, side="right"))
        e1 = int(np.searchsorted(brk, b, side="left")) - 1

    def value(e):  # the break of index e, counted on past the seam
        e = np.asarray(e)
        return brk[e % m] + (e // m) * period if contour.closed else brk[e]

    # rounding at the window's ends: only breaks strictly inside
    while e0 <= e1 and not value(e0) > a:
        e0 += 1
    while e1 >= e0 and not value(e1) < b:
        e1 -= 1
    if e1 < e0:
        g = np.append(a + (b - a) * u, b)
        return g, contour(g, 1), contour(g, 2)
    bb = value(np.arange(e0, e1 + 1))
    whole = bb[:-1, None] + np.diff(bb)[:, None] * u  # pieces e0 .. e1-1
    head = a + (bb[0] - a) * u
    tail = np.append(bb[-1] + (b - bb[-1]) * u, b)
    g = np.concatenate([head, whole.ravel(), tail])
    out = []
    for nu in (1, 2):
        v = np.empty((len(g), 2))
        v[:sub] = contour(head, nu)
        v[sub:sub + whole.size] = contour.on_pieces(whole, e0, nu).reshape(-1, 2)
        v[sub + whole.size:] = contour(tail, nu)
        out.append(v)
    return g, out[0], out[1]


def _geometric_steps(kq, kmax, length, tol):
    """Steps sized by the curvature's change (see :func:`_samples`), mm.

    ``kq``: signed curvature of q at the grid points; ``kmax``: the largest
    |κ_q| near each step; ``length``: each step's length along q.
    """
    with np.errstate(divide="ignore", invalid="ignore"):
        slope = np.abs(np.diff(kq)) / length
    slope = np.where(np.isfinite(slope), slope, np.inf)
    # the largest change near each step (its neighbours' too)
    slope = np.maximum(slope, np.maximum(np.r_[slope[1:], slope[-1]], np.r_[slope[0], slope[:-1]]))
    D = 17.0 * np.cbrt(tol) * slope ** (2.0 / 3.0)
    with np.errstate(divide="ignore"):
        h_g = np.sqrt(8.0 * _SAMPLE_SAG * tol / D)
        h_g = np.minimum(h_g, 0.02 / kmax)
    return np.minimum(h_g, max(float(length.sum()) / 64.0, 20.0 * tol))


class _Band:
    """The samples of one window and the reach of arcs inside the band."""

    def __init__(self, t, X, tan, theta, e, kq=None, spread=None):
        self.t, self.X, self.tan, self.theta, self.e = t, X, tan, theta, e
        # per sample: arcs tested there keep |k - kq| <= spread (see _samples)
        self.kq = np.zeros(len(t)) if kq is None else kq
        self.spread = np.full(len(t), np.inf) if spread is None else spread
        self.banded = bool(np.isfinite(self.spread).any())
        self.n = len(t)
        self.chunk = 64

    def intervals(self, S, T, i0, L):
        """Feasible curvature intervals for samples i0+1 .. i0+L (rows: states)."""
        n, e = self.n, self.e
        idx = i0[:, None] + 1 + np.arange(L)
        past = idx >= n
        idx = np.minimum(idx, n - 1)
        w = self.X[idx] - S[:, None, :]
        a = _dot(w, _left(T)[:, None, :])
        b = _dot(w, w)
        B = b - e * e
        test = B > 0
        Bs = np.where(test, B, 1.0)
        lo = np.where(test, 2.0 * (a - e) / Bs, -np.inf)
        hi = np.where(test, 2.0 * (a + e) / Bs, np.inf)
        if self.banded:
            lo = np.maximum(lo, self.kq[idx] - self.spread[idx])
            hi = np.minimum(hi, self.kq[idx] + self.spread[idx])
        turn = np.abs(self.theta[idx] - self.theta[i0][:, None])
        stop = past | (turn > _CAP) | (_dot(w, T[:, None, :]) < -e)
        lo = np.where(stop, np.inf, lo)
        hi = np.where(stop, -np.inf, hi)
        rl = np.maximum.accumulate(lo, axis=1)
        rh = np.minimum.accumulate(hi, axis=1)
        return idx, a, b, rl, rh, past

    def reach(self, S, T, i0):
        """Last sample index each state's arc can reach, and its intervals."""
        L = self.chunk
        while True:
            idx, a, b, rl, rh, past = self.intervals(S, T, i0, L)
            ok = rl <= rh
            bad = ~ok
            has_fail = bad.any(axis=1)
            if np.all(has_fail | past[:, -1]) or L >= self.n:
                break
            L = min(4 * L, self.n)
        first = np.where(has_fail, np.argmax(bad, axis=1), L)
        j = i0 + first  # samples i0+1 .. i0+first are feasible
        j = np.minimum(j, self.n - 1)
        self.chunk = max(64, int(1.5 * np.max(first, initial=1)))
        return j, idx, a, b, rl, rh

    def minimax(self, a, b, rl, rh, last):
        """Curvature minimizing the largest distance of samples 0..last (per row)."""
        L = int(np.max(last)) + 1
        a, b = a[:, :L], b[:, :L]
        mask = np.arange(L)[None, :] <= last[:, None]
        lo, hi = rl.copy(), rh.copy()
        for _ in range(26):  # the bracket is the feasible interval: 2^-26 of it
            k = 0.5 * (lo + hi)
            g = _dist(k[:, None], a, b)
            gmax = np.where(mask, g, -np.inf).max(axis=1)
            gmin = np.where(mask, g, np.inf).min(axis=1)
            up = gmax + gmin < 0  # the circle lies too far right: bend more left
            lo = np.where(up, k, lo)
            hi = np.where(up, hi, k)
        return 0.5 * (lo + hi)


def _dist(k, a, b):
    """Signed distance g(k) of points (a = w·N, b = w·w) to the circle of curvature k."""
    return (k * b - 2.0 * a) / (1.0 + np.sqrt(np.maximum(1.0 - 2.0 * a * k + k * k * b, 0.0)))


def _arc_end(S, T, k, X):
    """End point and end tangent of the arc from S along T with curvature k,
    stopped on the ray from its center through X (k = 0: the foot of X)."""
    N = _left(T)
    line = k == 0
    ks = np.where(line, 1.0, k)
    C = S + N / ks[:, None]
    r = 1.0 / np.abs(ks)
    v = X - C
    u = v / np.linalg.norm(v, axis=1, keepdims=True)
    E_arc = C + u * r[:, None]
    T_arc = np.sign(ks)[:, None] * _left(u)
    E_line = S + _dot(X - S, T)[:, None] * T
    E = np.where(line[:, None], E_line, E_arc)
    TE = np.where(line[:, None], T, T_arc)
    return E, TE, np.where(line[:, None], 0.0, C)


def _sweep(S, E, C, k):
    """Turn of each arc (0 for lines), rad."""
    ang = np.mod(np.sign(k) * turn_angle(S - C, E - C), 2 * np.pi)
    return np.where(k == 0, 0.0, ang)


def _ends(band, i0, j, rl, rh):
    """Candidate end offsets of one state and the feasible curvature
    interval at each: (offs, cols, lo, hi, top) or None.  ``top`` indexes
    the (up to) three farthest ends, which also get the minimax curvature."""
    first = j - i0  # number of feasible samples
    if first < 1:
        return None
    offs = np.unique(np.clip(np.round(first * _J_FRACTIONS), 1, first)).astype(np.int64)
    cols = offs - 1
    # samples within e of S bound nothing: keep the curvature finite (radius >= e)
    kmax = 1.0 / band.e
    lo, hi = np.maximum(rl[0, cols], -kmax), np.minimum(rh[0, cols], kmax)
    good = lo <= hi
    offs, cols, lo, hi = offs[good], cols[good], lo[good], hi[good]
    if len(offs) == 0:
        return None
    return offs, cols, lo, hi, np.argsort(-offs)[:3]


def _pairs(band, S, i0, ends, km_top, rl, rh):
    """Candidate (end index, curvature) pairs of one state, given the
    minimax curvatures of its farthest ends."""
    offs, cols, lo, hi, top = ends
    # the minimax curvature (the centred arc: exact on a circle) for the
    # three farthest ends; the interval fractions cover the others
    km = np.full(len(offs), np.nan)
    km[top] = km_top
    fr = _K_FRACTIONS
    ks = [km[:, None], lo[:, None] + (hi - lo)[:, None] * fr]
    ks.append(np.where((lo <= 0) & (hi >= 0), 0.0, np.nan)[:, None])
    K = np.concatenate(ks, axis=1)
    J = np.repeat((i0 + offs)[:, None], K.shape[1], axis=1)
    K, J = K.ravel(), J.ravel()
    keep = np.isfinite(K)
    K, J = K[keep], J[keep]
    # an arc whose radius is huge against its chord is a line (R >= 1e4 chord),
    # and so is one of radius beyond R_LINE (its center would lie beyond the
    # coordinates a program can hold); kept only where the line is feasible
    chord = np.linalg.norm(band.X[J] - S, axis=1)
    near_line = (K != 0) & ((np.abs(K) * chord <= 1.02e-4) | (np.abs(K) * R_LINE < 1.0))
    K = np.where(near_line, 0.0, K)
    col = J - i0 - 1
    lo_c, hi_c = rl[0, col], rh[0, col]
    ok = (K >= lo_c) & (K <= hi_c)
    return J[ok], K[ok]


_NONE = (np.zeros(0, np.int64), np.zeros(0))


def _candidates(band, S, T, i0, j, a, b, rl, rh):
    """Candidate (end index, curvature) pairs for one state."""
    ends = _ends(band, i0, j, rl, rh)
    if ends is None:
        return _NONE
    _, cols, lo, hi, top = ends
    km = band.minimax(np.broadcast_to(a, (len(top), a.shape[1])), np.broadcast_to(b, (len(top), b.shape[1])),
                      lo[top], hi[top], cols[top])
    return _pairs(band, S, i0, ends, km, rl, rh)


def _candidates_all(band, S, I0, j, a, b, rl, rh):
    """:func:`_candidates` for every state of the beam, with one minimax
    over all their farthest ends (the same numbers, far fewer numpy calls)."""
    ends = [_ends(band, int(I0[r]), int(j[r]), rl[r:r + 1], rh[r:r + 1]) for r in range(len(S))]
    live = [r for r, e in enumerate(ends) if e is not None]
    out = [_NONE] * len(S)
    if not live:
        return out
    rows = np.concatenate([np.full(len(ends[r][4]), r) for r in live])
    lo = np.concatenate([ends[r][2][ends[r][4]] for r in live])
    hi = np.concatenate([ends[r][3][ends[r][4]] for r in live])
    last = np.concatenate([ends[r][1][ends[r][4]] for r in live])
    km = band.minimax(a[rows], b[rows], lo, hi, last)
    at = 0
    for r in live:
        n_top = len(ends[r][4])
        out[r] = _pairs(band, S[r], int(I0[r]), ends[r], km[at:at + n_top], rl[r:r + 1], rh[r:r + 1])
        at += n_top
    return out


def _prim(kind_k, S, E, C, t0, t1):
    kind = np.where(kind_k == 0, LINE, np.where(kind_k > 0, ARC_CCW, ARC_CW)).astype(np.int8)
    return Chain(kind, S, E, np.where((kind_k == 0)[:, None], 0.0, C), t0, t1)


def _kinks_ok(chain, T_start, T_end):
    """Tangent jumps inside a chain and at its ends all below _KINK."""
    s_t, e_t = _tangents(chain)
    jumps = [_angle(e_t[:-1], s_t[1:]), _angle(s_t[:1], T_start[None]), _angle(e_t[-1:], T_end[None])]
    return float(np.concatenate(jumps).max()) < _KINK


def _tangents(chain):
    out = []
    for at_end in (False, True):
        p = chain.end if at_end else chain.start
        rel = p - chain.center
        arc_t = np.where((chain.kind == ARC_CCW)[:, None], _left(rel), -_left(rel))
        v = np.where((chain.kind == LINE)[:, None], chain.end - chain.start, arc_t)
        out.append(v / np.linalg.norm(v, axis=1, keepdims=True))
    return out


def _angle(u, v):
    return np.abs(turn_angle(u, v))


def _biarcs_to(contour, d, tol, S, T, t_s, P2, T2, t2):
    """Biarcs from states (S, T) to on-curve ends (P2, T2), all (m, 2):
    a list of (two-move Chain, within tolerance and tangent-continuous)."""
    m = len(P2)
    ta = np.asarray(t_s, dtype=np.float64)
    tb = np.asarray(t2, dtype=np.float64)
    # the joint where the joint circle crosses the curve (a third point of
    # it), else the equal-tangent-length joint
    joint, _ = curve_joints(contour, d, S, T, P2, T2, ta, tb)
    ch, ok = biarc_chain(S, T, P2, T2, ta, tb, joint=joint)
    # joint parameters: the curve point nearest to each joint
    tm = _nearest_param(contour, d, ch.end[0::2], ta, tb)
    ch.t1[0::2] = tm
    ch.t0[1::2] = tm
    length = np.linalg.norm(ch.end - ch.start, axis=1)
    ok &= (length[0::2] > 1e-6) & (length[1::2] > 1e-6)
    dev = chain_deviation(contour, d, ch, tol, density=_DENSITY)
    dev = np.maximum(dev[0::2], dev[1::2])
    out = []
    for i in range(m):
        piece = ch.take(slice(2 * i, 2 * i + 2))
        good = bool(ok[i]) and dev[i] <= _TARGET * tol and _kinks_ok(piece, T[i], T2[i])
        out.append((piece, good))
    return out


def _nearest_param(contour, d, pts, ta, tb, n=33):
    """Parameter in [ta, tb] of the point of q nearest to each point (sampled, refined)."""
    f = np.linspace(0.0, 1.0, n)
    t = ta[:, None] + (tb - ta)[:, None] * f
    q = offset_points(contour, t, d)
    i = np.argmin(np.linalg.norm(q - pts[:, None, :], axis=2), axis=1)
    lo = np.maximum(i - 1, 0)
    hi = np.minimum(i + 1, n - 1)
    a = t[np.arange(len(pts)), lo]
    b = t[np.arange(len(pts)), hi]
    for _ in range(30):  # ternary search on a bracket around the nearest sample
        m1, m2 = a + (b - a) / 3, b - (b - a) / 3
        d1 = np.linalg.norm(offset_points(contour, m1, d) - pts, axis=1)
        d2 = np.linalg.norm(offset_points(contour, m2, d) - pts, axis=1)
        a = np.where(d1 > d2, m1, a)
        b = np.where(d1 > d2, b, m2)
    tm = 0.5 * (a + b)
    h = tb - ta
    return np.clip(tm, ta + 1e-3 * h, tb - 1e-3 * h)


def _fit_window(contour, a, b, d, tol, frac, free_end, beam_width=None):
    """G1 arcs in the band of half-width frac·tol on one window, or None.

    A beam search over the number of moves: at every step each kept state
    (end point, end tangent, sample index) proposes candidate arcs, each
    scored by how far the next arc from its end reaches; the best
    ``beam_width`` distinct ends are kept (default ``_BEAM``, read at call
    time).  Returns (Chain, restarts).
    """
    beam_width = _BEAM if beam_width is None else beam_width
    t, X, tan, theta, kq, spread = _samples(contour, a, b, d, tol)
    band = _Band(t, X, tan, theta, frac * tol, kq, spread)
    n = band.n
    # a node: (S, T, i0, move Chain or None, parent node)
    beam = [(X[0], tan[0], 0, None, None)]
    restarts = 0
    for _ in range(4 * n):
        S = np.array([nd[0] for nd in beam])
        T = np.array([nd[1] for nd in beam])
        I0 = np.array([nd[2] for nd in beam], dtype=np.int64)
        j, idx, aa, bb, rl, rh = band.reach(S, T, I0)
        for r in np.flatnonzero(j == n - 1):
            rows = slice(r, r + 1)
            end = _close(contour, d, tol, band, S[r], T[r], int(I0[r]), aa[rows], bb[rows], rl[rows], rh[rows],
                         free_end)
            if end is not None:
                return _collect(beam[r], end, X), restarts
        R, J, K = [], [], []
        for r, (Jr, Kr) in enumerate(_candidates_all(band, S, I0, j, aa, bb, rl, rh)):
            if j[r] == n - 1:  # could not close from here: keep some way before the end
                keep = Jr < n - 1
                Jr, Kr = Jr[keep], Kr[keep]
            R.append(np.full(len(Jr), r))
            J.append(Jr)
            K.append(Kr)
        R, J, K = np.concatenate(R), np.concatenate(J), np.concatenate(K)
        if len(J):
            E, TE, C = _arc_end(S[R], T[R], K, X[J])
            sw = _sweep(S[R], E, C, K)
            good = (sw <= 0.95 * np.pi) & np.all(np.isfinite(E), axis=1)
            R, J, K, E, TE, C = R[good], J[good], K[good], E[good], TE[good], C[good]
        if len(J) == 0:
            # cannot continue: return to the curve with a biarc, or step back
            node = beam[0]
            restarts += 1
            got = None
            while node is not None and restarts <= 50:
                got = _restart(contour, d, tol, band, node[0], node[1], node[2])
                if got is not None:
                    break
                node = node[4]
            if got is None:
                return None
            piece, i_new = got
            beam = [(piece.end[-1], tan[i_new], i_new, piece, node)]
            continue
        j2, *_ = band.reach(E, TE, J)
        score = j2.astype(np.float64) * (n + 1) + J
        order = np.argsort(-score, kind="stable")
        # distinct ends only: same sample, same tangent and offset to ~1e-9
        ang = np.round(np.arctan2(TE[:, 1], TE[:, 0]) * 1e8)
        off = np.round(_dot(E - X[J], _left(tan[J])) / band.e * 1e8)
        _, first = np.unique(np.c_[J, ang, off][order], axis=0, return_index=True)
        order = order[np.sort(first)][:beam_width]
        new = []
        for i in order:
            r = R[i]
            prim = _prim(K[i:i + 1], S[r][None], E[i:i + 1], C[i:i + 1], np.array([t[I0[r]]]), np.array([t[J[i]]]))
            new.append((E[i], TE[i], int(J[i]), prim, beam[r]))
        beam = new
    return None


def _collect(node, end, X):
    """The moves from the window's start to ``node``, then ``end``."""
    parts = list(end)
    while node is not None and node[3] is not None:
        parts.append(node[3])
        node = node[4]
    parts = parts[len(end):][::-1] + parts[:len(end)]
    chain = Chain.concat(parts)
    chain.start[0] = X[0]
    chain.end[-1] = X[-1]
    chain.start[1:] = chain.end[:-1]
    return chain


def _close(contour, d, tol, band, S, T, i0, aa, bb, rl, rh, free_end):
    """Moves from the state to the window's end, or None."""
    n, X, t = band.n, band.X, band.t
    if i0 >= n - 1 and i0 > 0:
        return []  # a restart already ended on the window's end, along its tangent
    if free_end:
        # one arc through q(b), any end tangent
        w = X[-1] - S
        kk = 2.0 * _dot(w, _left(T)) / max(_dot(w, w), 1e-300)
        col = n - 1 - i0 - 1
        if col < 0 or rl[0, col] <= kk <= rh[0, col]:
            chord = np.hypot(*w)
            if abs(kk) * chord <= 1.02e-4 or abs(kk) * R_LINE < 1.0:
                kk = 0.0
            E, TE, C = _arc_end(S[None], T[None], np.array([kk]), X[-1:])
            piece = _prim(np.array([kk]), S[None], X[-1:], C, np.array([t[i0]]), np.array([t[-1]]))
            return [piece]
        return None
    Tb = band.tan[-1]
    # a single move when it already ends along the curve's tangent
    w = X[-1] - S
    kk = 2.0 * _dot(w, _left(T)) / max(_dot(w, w), 1e-300)
    if abs(kk) * np.hypot(*w) <= 1.02e-4 or abs(kk) * R_LINE < 1.0:
        kk = 0.0  # radius huge against the chord (a straight window): a line
    E, TE, C = _arc_end(S[None], T[None], np.array([kk]), X[-1:])
    col = n - 1 - i0 - 1
    if (col < 0 or rl[0, col] <= kk <= rh[0, col]) and _angle(TE, Tb[None])[0] < _KINK:
        return [_prim(np.array([kk]), S[None], X[-1:], C, np.array([t[i0]]), np.array([t[-1]]))]
    # a biarc to the end, or an arc and then a biarc
    got = _biarcs_to(contour, d, tol, S[None], T[None], t[i0:i0 + 1], X[-1:], Tb[None], t[-1:])
    if got[0][1]:
        return [got[0][0]]
    J, K = _candidates(band, S, T, i0, n - 1, aa, bb, rl, rh)
    keep = (J < n - 2) & (J > i0)
    J, K = J[keep], K[keep]
    if len(J) == 0:
        return None
    m = len(J)
    E, TE, C = _arc_end(np.repeat(S[None], m, 0), np.repeat(T[None], m, 0), K, X[J])
    ends = np.repeat(X[-1:], m, 0)
    got = _biarcs_to(contour, d, tol, E, TE, t[J], ends, np.repeat(Tb[None], m, 0), np.repeat(t[-1:], m))
    for i in np.argsort(-J, kind="stable"):  # the longest first move that closes
        if got[i][1]:
            first = _prim(K[i:i + 1], S[None], E[i:i + 1], C[i:i + 1], np.array([t[i0]]), np.array([t[J[i]]]))
            return [first, got[i][0]]
    return None


def _restart(contour, d, tol, band, S, T, i0):
    """A biarc from the state back onto the curve (its point and tangent)
    as far along as measures within the tolerance: (piece, index) or None."""
    n = band.n
    steps = np.unique(np.minimum(i0 + np.array([1, 2, 4, 8, 16, 32, 64, 128, 256, 512]), n - 1))
    steps = steps[steps > i0]
    if len(steps) == 0:
        return None
    m = len(steps)
    got = _biarcs_to(contour, d, tol, np.repeat(S[None], m, 0), np.repeat(T[None], m, 0),
                     np.full(m, band.t[i0]), band.X[steps], band.tan[steps], band.t[steps])
    for i in range(len(steps) - 1, -1, -1):
        if got[i][1]:
            return got[i][0], int(steps[i])
    return None


def _is_corner(contour, t):
    if not contour.corners:
        return False
    b = contour.breaks
    ct = b[list(contour.corners)]
    if contour.closed:
        period = b[-1] - b[0]
        x = np.mod(t - ct + 0.5 * period, period) - 0.5 * period
        return bool(np.any(np.abs(x) <= 1e-12 * max(1.0, period)))
    return bool(np.any(np.abs(t - ct) <= 1e-12 * max(1.0, abs(t))))


def band_arcs(contour, windows, d: float, tol: float):
    """G1 arcs (and lines) within ``tol`` of q = P + d·N on each window.

    Same contract as :func:`pathgen.path.flatten.approximate` with
    ``moves="arcs"``: returns (chain, measured deviation, stats).  A window
    whose band fit does not measure within the tolerance falls back to the
    curve-tangent biarcs.
    """
    windows = np.atleast_2d(np.asarray(windows, dtype=np.float64))
    lo_dom, hi_dom = contour.domain
    parts, dev = [], 0.0
    stats = {"spans": 0, "boost_rounds": 0, "split_rounds": 0, "merged_spans": 0}
    for a, b in windows:
        # the end tangent is free where the path has a corner anyway: the
        # contour's own corner (d = 0), the end of an open contour, and the
        # edge of a stretch the tool cannot reach (1 - dκ near 0: the path
        # is trimmed before it, and a tangent end there takes tiny loops)
        free_end = ((not contour.closed and b >= hi_dom) or (d == 0.0 and _is_corner(contour, b))
                    or (d != 0.0 and 1.0 - d * float(contour.curvature(b)) <= 0.01))
        best = None
        for r, frac in enumerate(_BANDS):
            got = _fit_window(contour, a, b, d, tol, frac, free_end)
            if got is None:
                continue
            chain, restarts = got
            merged = merge_chain(chain, atol=min(0.05 * tol, 1e-4))
            mdev = chain_deviation(contour, d, merged, tol, density=_DENSITY)
            if mdev.max(initial=0.0) > _TARGET * tol:
                merged = chain
                mdev = chain_deviation(contour, d, chain, tol, density=_DENSITY)
            if mdev.max(initial=0.0) <= _TARGET * tol:
                best = (merged, float(mdev.max(initial=0.0)))
                stats["boost_rounds"] = max(stats["boost_rounds"], r)
                stats["split_rounds"] += restarts
                stats["spans"] += len(chain)
                stats["merged_spans"] += len(chain) - len(merged)
                break
        if best is None:
            chain, dv, st = approximate(contour, np.array([[a, b]]), d, tol, moves="arcs")
            best = (chain, dv)
            for key in stats:
                stats[key] += st[key]
        parts.append(best[0])
        dev = max(dev, best[1])
    return Chain.concat(parts), dev, stats
