"""Samples along a contour for the checks, sized by its geometry.

Every check works on one set of samples.  A piece sampled on its own gets
a few samples evenly spaced in its parameter, plus each local maximum of
|κ| inside it found by a golden-section search (so the tightest point of
every bend is a sample and no tight spot hides between samples).  Runs of
short pieces (dense points) are sampled by geometry: one sample, on a
knot, every geometric step (length/4096, ``max_step``, 0.01 rad of turn),
and a short piece keeps samples of its own where its curvature bounds
(computed once for all pieces from their cubic coefficients) show a
feature the step would miss, a bend at which a limit may bind (``bind``)
or a turn tighter than the tightest sampled: see :func:`_geometric` and
docs/report.md, "The guarantee".  Both sides of every sharp corner are
samples (two at the same arc length, one per piece).  A corner is a
break where the tangent direction jumps by more than 1e-6 rad (listed in
``Contour.corners`` or not; a listed break without a jump is smooth).

Arc length at the samples: the trapezoid rule on the speed |P'(t)| inside
each piece, rescaled so that each piece's total equals its length from
10-point Gauss-Legendre (3-point on short pieces, exact to rounding on
so short a bend); the error is second order in the sample step and never
accumulates from piece to piece.  At a geometric sample (a knot) the arc
length is the sum of the piece lengths before it.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..errors import InputError
from ..geometry import curvature, turn_angle

__all__ = ["Samples", "sample_contour", "CORNER_MIN_ANGLE"]

#: Tangent jump (radians) at a break above which the break is a corner even
#: when the contour does not list it (a C1 spline jumps by ~1e-12 at most).
CORNER_MIN_ANGLE = 1e-6

_GOLDEN = (np.sqrt(5.0) - 1.0) / 2.0


@dataclass(frozen=True, eq=False)
class Samples:
    """Samples of a contour, sorted along it.

    Attributes
    ----------
    t : (n,) parameter values.
    xy : (n, 2) points, mm.
    s : (n,) arc length from the start, mm (non-decreasing; a corner's two
        samples share one value).
    kappa : (n,) signed curvature, 1/mm (one-sided at corners).
    tangent : (n, 2) unit tangents (one-sided at corners).
    turn : (n,) signed turning angle (radians, + left) at the first sample
        of each corner pair; 0 elsewhere.
    corner : (n,) bool, True on both samples of each corner pair.
    closed : whether the last sample meets the first (the seam).
    length : total length, mm.
    geometric : number of pieces sampled by geometry (a sample every few
        pieces, not per_piece each): 0 when every piece has its own samples,
        which are then evenly spread in each piece's parameter.
    """

    t: np.ndarray
    xy: np.ndarray
    s: np.ndarray
    kappa: np.ndarray
    tangent: np.ndarray
    turn: np.ndarray
    corner: np.ndarray
    closed: bool
    length: float
    geometric: int = 0

    def __len__(self) -> int:
        return len(self.t)


#: samples evaluated at a time (temporaries stay in cache)
_CHUNK = 16384


def _derivs(c: np.ndarray, idx: np.ndarray, x: np.ndarray):
    """Position, first and second derivative on piece ``idx`` at offset ``x``.

    ``c`` holds the coefficients per coordinate, shape (2, 4, m) (see
    :func:`_per_coordinate`): a 1-D ``take`` per coefficient and coordinate
    is several times faster than gathering (m, 2) rows, and chunks of
    samples keep the temporaries in the processor's cache.
    """
    x = np.asarray(x, dtype=np.float64)
    out = np.empty((3, 2, len(x)))
    for s0 in range(0, len(x), _CHUNK):
        s1 = min(s0 + _CHUNK, len(x))
        xc, ic = x[s0:s1], idx[s0:s1]
        x3 = 3.0 * xc
        x6 = 2.0 * x3
        for k in range(2):
            c0, c1, c2, c3 = (c[k, i].take(ic) for i in range(4))
            r = c0 * xc
            r += c1
            r *= xc
            r += c2
            r *= xc
            r += c3
            out[0, k, s0:s1] = r
            c1 *= 2.0
            r = c0 * x3
            r += c1
            r *= xc
            r += c2
            out[1, k, s0:s1] = r
            np.multiply(c0, x6, out=out[2, k, s0:s1])
            out[2, k, s0:s1] += c1
    return out[0].T, out[1].T, out[2].T


def _per_coordinate(c: np.ndarray) -> np.ndarray:
    """(4, m, 2) coefficients as a contiguous (2, 4, m) array."""
    return np.ascontiguousarray(np.moveaxis(c, 2, 0))


_curv = curvature  # the one formula (pathgen.geometry)


def _abs_curv_at(c, idx, x):
    _, d1, d2 = _derivs(c, idx, x)
    return np.abs(_curv(d1, d2))


def _refine_maxima(c, h, idx, x, kabs, iterations: int = 30):
    """Golden-section search for the local maxima of |κ| inside pieces.

    A maximum is bracketed by the samples on either side of a discrete
    local maximum in the same piece (or by the piece end).  Returns the
    piece and offset of each refined maximum that lies strictly inside, and
    the index of the sample it was found from.
    """
    n = len(idx)
    if n < 3:
        return idx[:0], x[:0], idx[:0]
    same_prev = np.r_[False, idx[1:] == idx[:-1]]
    same_next = np.r_[idx[:-1] == idx[1:], False]
    prev = np.r_[-np.inf, kabs[:-1]]
    nxt = np.r_[kabs[1:], -np.inf]
    peak = (kabs >= prev) & (kabs >= nxt) & (kabs > 0)
    peak &= same_prev | same_next
    k = np.flatnonzero(peak)
    if k.size == 0:
        return idx[:0], x[:0], idx[:0]
    pi = idx[k]
    lo = np.where(same_prev[k], x[np.maximum(k - 1, 0)], 0.0)
    hi = np.where(same_next[k], x[np.minimum(k + 1, n - 1)], h[pi])
    a, b = lo.copy(), hi.copy()
    x1 = b - _GOLDEN * (b - a)
    x2 = a + _GOLDEN * (b - a)
    f1 = _abs_curv_at(c, pi, x1)
    f2 = _abs_curv_at(c, pi, x2)
    for _ in range(iterations):
        left = f1 >= f2  # the maximum lies in [a, x2], else in [x1, b]
        b = np.where(left, x2, b)
        a = np.where(left, a, x1)
        x1n = np.where(left, b - _GOLDEN * (b - a), x2)
        x2n = np.where(left, x1, a + _GOLDEN * (b - a))
        f_new = _abs_curv_at(c, pi, np.where(left, x1n, x2n))
        f1, f2 = np.where(left, f_new, f2), np.where(left, f1, f_new)
        x1, x2 = x1n, x2n
    xm = 0.5 * (a + b)
    inside = (xm > lo) & (xm < hi)
    return pi[inside], xm[inside], k[inside]


# -- per-piece facts, all pieces at once -----------------------------------------


def _end_derivative(c: np.ndarray, h: np.ndarray, pieces: np.ndarray) -> np.ndarray:
    """First derivative at the end of ``pieces``, (k, 2) (the same arithmetic
    as :func:`_derivs`, so the same bits)."""
    hp = h[pieces]
    out = np.empty((len(pieces), 2))
    for k in range(2):
        r = c[k, 0].take(pieces) * (3.0 * hp)
        r += 2.0 * c[k, 1].take(pieces)
        r *= hp
        r += c[k, 2].take(pieces)
        out[:, k] = r
    return out


def _break_turns(c: np.ndarray, h: np.ndarray):
    """Breaks 1..m-1 where the tangent turns by more than CORNER_MIN_ANGLE,
    and the turn there (radians, + left).

    In chunks: the tangent at a piece's end against the next one's start
    (P'(0) = c2); only where |cross| > dot·5e-7 or dot <= 0 (a turn of at
    least that) is the angle itself taken, with :func:`turn_angle`.
    """
    m = len(h)
    found, turns = [], []
    for s0 in range(0, m - 1, _CHUNK):
        s1 = min(s0 + _CHUNK, m - 1)
        hh = h[s0:s1]
        ex = (c[0, 0, s0:s1] * (3.0 * hh) + 2.0 * c[0, 1, s0:s1]) * hh + c[0, 2, s0:s1]
        ey = (c[1, 0, s0:s1] * (3.0 * hh) + 2.0 * c[1, 1, s0:s1]) * hh + c[1, 2, s0:s1]
        nx, ny = c[0, 2, s0 + 1:s1 + 1], c[1, 2, s0 + 1:s1 + 1]
        cross = ex * ny - ey * nx
        dot = ex * nx + ey * ny
        cand = np.flatnonzero((dot <= 0) | (np.abs(cross) > 5e-7 * dot))
        if cand.size:
            p = s0 + cand
            turn = turn_angle(_end_derivative(c, h, p), c[:, 2, p + 1].T)
            keep = np.abs(turn) > CORNER_MIN_ANGLE
            found.append(p[keep] + 1)
            turns.append(turn[keep])
    if not found:
        return np.zeros(0, np.int64), np.zeros(0)
    return np.concatenate(found), np.concatenate(turns)


def _curvature_bounds(c: np.ndarray, h: np.ndarray):
    """Lower and upper bounds of the signed curvature over every piece.

    On a piece P(x) = a x³ + b x² + c x + d (x in [0, h]) the numerator of
    κ = P' × P'' / |P'|³ is the quadratic −6(a×b)x² + 6(c×a)x + 2(c×b), whose
    extremes on [0, h] are exact (ends and vertex); |P'| lies within
    |P'(h/2)| ± (h/2)·max|P''| (P'' is linear, so its largest norm is at an
    end).  Where that lower speed bound is 0 the bounds are infinite.
    """
    m = len(h)
    lo = np.empty(m)
    hi = np.empty(m)
    long = np.empty(m)
    knot = np.empty(m)
    for s0 in range(0, m, _CHUNK):
        s1 = min(s0 + _CHUNK, m)
        hh = h[s0:s1]
        ax, ay = c[0, 0, s0:s1], c[1, 0, s0:s1]
        bx, by = c[0, 1, s0:s1], c[1, 1, s0:s1]
        cx, cy = c[0, 2, s0:s1], c[1, 2, s0:s1]
        q2 = -6.0 * (ax * by - ay * bx)
        q1 = 6.0 * (cx * ay - cy * ax)
        q0 = 2.0 * (cx * by - cy * bx)
        n_end = (q2 * hh + q1) * hh + q0
        with np.errstate(divide="ignore", invalid="ignore"):
            xv = q1 / (-2.0 * q2)
        np.maximum(xv, 0.0, out=xv)  # NaN (0/0) stays NaN
        np.minimum(xv, hh, out=xv)
        xv[np.isnan(xv)] = 0.0
        n_mid = (q2 * xv + q1) * xv + q0
        n_max = np.maximum(np.maximum(q0, n_end), n_mid)
        n_min = np.minimum(np.minimum(q0, n_end), n_mid)
        half = 0.5 * hh
        a3x, a3y = 3.0 * ax, 3.0 * ay
        vx = (a3x * half + 2.0 * bx) * half + cx
        vy = (a3y * half + 2.0 * by) * half + cy
        v_mid = np.sqrt(vx * vx + vy * vy)
        ex, ey = a3x * hh + bx, a3y * hh + by
        slack = np.maximum(bx * bx + by * by, ex * ex + ey * ey)
        np.sqrt(slack, out=slack)
        slack *= hh  # (h/2)·max|P''|, |P''| = 2·|b + 3a·x|
        v_top = v_mid + slack
        long[s0:s1] = v_top * hh
        v_lo = np.maximum(v_mid - slack, 0.0)
        v_lo = v_lo * v_lo * v_lo
        v_hi = v_top * v_top * v_top
        with np.errstate(divide="ignore", invalid="ignore"):
            hi[s0:s1] = n_max / np.where(n_max > 0, v_lo, v_hi)
            lo[s0:s1] = n_min / np.where(n_min < 0, v_lo, v_hi)
            sp = np.sqrt(cx * cx + cy * cy)
            knot[s0:s1] = q0 / np.maximum(sp * sp * sp, 1e-300)
    # 0/0 (a piece that stops and does not bend) stays unknown: infinite
    hi[np.isnan(hi)] = np.inf
    lo[np.isnan(lo)] = -np.inf
    return lo, hi, long, knot


def _piece_lengths(c: np.ndarray, h: np.ndarray, halves: int = 1, points: int = 10) -> np.ndarray:
    """Length of every piece: ``points``-point Gauss-Legendre on ``halves`` sub-steps.

    ``c`` per coordinate, (2, 4, m).  One step is exact to rounding for the
    nearly constant speed of chord-parametrized pieces (the ellipse
    perimeter test holds it to 1e-8).
    """
    nodes, weights = np.polynomial.legendre.leggauss(points)
    total = np.zeros(len(h))
    for s0 in range(0, len(h), _CHUNK):  # chunks keep the temporaries in cache
        s1 = min(s0 + _CHUNK, len(h))
        hh, cc = h[s0:s1], c[:, :, s0:s1]
        a3x, a3y, b2x, b2y = 3.0 * cc[0, 0], 3.0 * cc[1, 0], 2.0 * cc[0, 1], 2.0 * cc[1, 1]
        for k in range(halves):
            u = (k + (nodes + 1.0) / 2.0) / halves  # (points,) in [0, 1]
            part = np.zeros(s1 - s0)
            for node, weight in zip(u, weights):
                x = hh * node
                dx = (a3x * x + b2x) * x + cc[0, 2]
                dy = (a3y * x + b2y) * x + cc[1, 2]
                part += np.hypot(dx, dy) * (weight / 2.0)
            total[s0:s1] += part * hh / halves
    return total


#: Samples on a contour made of short pieces: at least one every
#: length / GEOMETRIC_SAMPLES (as many as ``per_piece`` gives a contour of
#: few pieces).
GEOMETRIC_SAMPLES = 4096
#: Largest turn of the tangent (rad) from one geometric sample to the next.
MAX_TURN = 0.01
#: A piece between two geometric samples is sampled on its own when its
#: curvature bounds leave the samples' range by more than ENVELOPE_RTOL × the
#: larger |κ| of the two plus NOISE_FACTOR × the curvature noise (the robust
#: spread of κ's second differences from knot to knot, over √6).
ENVELOPE_RTOL = 0.02
NOISE_FACTOR = 6.0
#: Rounds of checking the pieces against their samples before every piece
#: is sampled on its own.
_ROUNDS = 12


def _base_samples(h, per_piece, own, pick, end_pieces):
    """(piece, offset, is-a-piece-end) of the base samples, in order along the
    contour: per_piece evenly in the parameter of each piece sampled on its
    own, the start of each picked piece, each piece end in ``end_pieces``."""
    counts = np.where(own, per_piece, pick.astype(np.int64))
    idx = np.repeat(np.arange(len(h)), counts)
    first = np.cumsum(counts) - counts
    j = np.arange(len(idx)) - first[idx]
    x = h[idx] * (j / per_piece)
    # insert a piece's end after its last sample (no sort of the whole array)
    at = (first + counts)[end_pieces]
    idx = np.insert(idx, at, end_pieces)
    x = np.insert(x, at, h[end_pieces])
    endflag = np.insert(np.zeros(len(j), bool), at, True)
    return idx, x, endflag


def _geometric(c, h, per_piece, is_corner, end_pieces, bind, max_step):
    """How many pieces are sampled by geometry, the base samples (piece,
    offset, is-a-piece-end) and every piece's length.

    A piece no longer than half the geometric step there (at most
    length / GEOMETRIC_SAMPLES and ``max_step``, and at most MAX_TURN / its
    largest |κ|) is short.  A run of short pieces is sampled by geometry:
    one sample at the start of the run, then one at the start of each piece
    where the run's length counted in steps passes a whole number.  The
    short pieces between two such samples (a group) get their own samples
    after all when their curvature bounds (exact numerator, bounded speed:
    :func:`_curvature_bounds`) show

    * a bend of at least half ``bind`` (a limit of the cut may bind there);
    * a left turn tighter than the tightest left turn sampled, or a right
      turn tighter than the tightest right turn (unless below 1e-4 of the
      largest |κ| sampled: straight for any cutting purpose);
    * curvature outside the range of the two samples either side of the
      group, beyond ENVELOPE_RTOL × the larger |κ| of the two plus
      NOISE_FACTOR × the curvature noise.

    A group sampled on its own keeps the samples at its two ends, so the
    other groups' checks stand: one pass decides.
    """
    m = len(h)
    lo, hi, long, knot = _curvature_bounds(c, h)
    total = float(long.sum())
    step = total / GEOMETRIC_SAMPLES
    if max_step is not None and max_step > 0:
        step = min(step, float(max_step))
    half_bind = 0.5 * bind if bind is not None and bind > 0 else np.inf
    # in chunks (a run of short pieces starts afresh at each chunk, one
    # sample more per chunk): short pieces, picks, groups, piece lengths
    piece_len = np.empty(m)
    own_parts, groups = [], []
    for s0 in range(0, m, _CHUNK):
        s1 = min(s0 + _CHUNK, m)
        lo_c, hi_c, long_c = lo[s0:s1], hi[s0:s1], long[s0:s1]
        kmag = np.maximum(-lo_c, hi_c)  # max |κ| (hi >= lo)
        with np.errstate(divide="ignore", invalid="ignore"):
            step_here = np.minimum(step, MAX_TURN / kmag)
            short = (long_c <= 0.5 * step_here) & (kmag < half_bind)
        # short pieces: 3 Gauss points are exact to rounding on so short a
        # bend; the others get 10
        piece_len[s0:s1] = _piece_lengths(c[:, :, s0:s1], h[s0:s1], points=3)
        own_c = np.flatnonzero(~short)
        if own_c.size:
            p = own_c + s0
            piece_len[p] = _piece_lengths(np.ascontiguousarray(c[:, :, p]), h[p])
            own_parts.append(p)
        if own_c.size == len(short):
            continue
        # the picks: where the run's length in steps passes a whole number
        with np.errstate(divide="ignore", invalid="ignore"):
            w = np.where(short, long_c / step_here, 0.0)
        mu = np.cumsum(w)
        mu -= w
        whole = np.floor(mu)
        pick = np.empty(len(short), bool)
        pick[0] = True
        np.not_equal(whole[1:], whole[:-1], out=pick[1:])
        pick[1:] |= ~short[:-1]
        pick |= is_corner[s0:s1]
        pick &= short
        # the groups: short pieces from one pick to the next pick or own
        # piece (a gap in cp is always followed by a pick: every run of
        # short pieces starts with one, so no group spans a gap)
        cp = np.flatnonzero(short)
        first = np.flatnonzero(pick[cp])
        last = np.r_[first[1:], len(cp)] - 1
        groups.append((cp[first] + s0, cp[last] + s0, np.minimum.reduceat(lo_c[cp], first),
                       np.maximum.reduceat(hi_c[cp], first)))
    own = np.concatenate(own_parts) if own_parts else np.zeros(0, np.int64)
    j = np.arange(per_piece) / per_piece
    if not groups:
        return 0, *_samples_of(h, own, j, own[:0], end_pieces), piece_len
    p0, p1, g_lo, g_hi = (np.concatenate(g) for g in zip(*groups))
    # the curvature noise from knot to knot (robust: features are few)
    noise = 0.0
    if m > 2:
        d2 = knot[2:] - 2.0 * knot[1:-1]
        d2 += knot[:-2]
        np.abs(d2, out=d2)
        noise = 1.4826 * float(np.median(d2, overwrite_input=True)) / np.sqrt(6.0)
    floor = NOISE_FACTOR * noise + 1e-9 / max(total, 1e-300)
    # the samples either side of each group: its pick, and the end of its
    # last piece where that is a sample, else the next piece's start
    at_end = np.isin(p1, end_pieces)
    q_piece = np.where(at_end, p1, p1 + 1)
    q_x = np.where(at_end, h[p1], 0.0)
    _, e1, e2 = _derivs(c, np.r_[p0, q_piece], np.r_[np.zeros(len(p0)), q_x])
    ke = _curv(e1, e2)
    ka, kb = ke[:len(p0)], ke[len(p0):]
    # the tightest turns sampled: the picks, piece ends and own pieces
    idx_o, x_o, _ = _samples_of(h, own, j, own[:0], end_pieces)
    _, o1, o2 = _derivs(c, idx_o, x_o)
    k = np.r_[ke, _curv(o1, o2)]
    zero = max(1e-9 / max(total, 1e-300), 1e-4 * float(np.abs(k).max()))
    left = max(float(k.max()), zero)
    right = max(float(-k.min()), zero)
    tol = ENVELOPE_RTOL * np.maximum(np.abs(ka), np.abs(kb)) + floor
    bad = (g_hi > np.maximum(ka, kb) + tol) | (g_lo < np.minimum(ka, kb) - tol)
    bad |= (g_hi > left) | (-g_lo > right)
    if bad.any():  # every piece of a bad group gets its own samples
        n_in = p1[bad] - p0[bad] + 1
        start = np.repeat(p0[bad], n_in)
        start += np.arange(int(n_in.sum())) - np.repeat(np.cumsum(n_in) - n_in, n_in)
        own = np.sort(np.r_[own, start])
    geometric = m - len(own)
    return geometric, *_samples_of(h, own, j, p0[~bad], end_pieces), piece_len


def _samples_of(h, own, j, picks, end_pieces):
    """(piece, offset, is-a-piece-end) in order along the contour: offsets
    ``j`` × h on the pieces ``own`` (sorted), the start of each pick, the
    end of each piece in ``end_pieces``."""
    per = len(j)
    idx = np.r_[np.repeat(own, per), picks, end_pieces]
    x = np.r_[(h[own][:, None] * j[None, :]).ravel(), np.zeros(len(picks)), h[end_pieces]]
    endflag = np.r_[np.zeros(len(own) * per + len(picks), bool), np.ones(len(end_pieces), bool)]
    order = np.lexsort((x, idx))
    return idx[order], x[order], endflag[order]


def sample_contour(contour, *, per_piece: int | None = None, refine: bool = True,
                   bind: float | None = None, max_step: float | None = None) -> Samples:
    """Sample ``contour`` densely enough for the checks.

    Parameters
    ----------
    contour : Contour
    per_piece : int or None
        Samples per cubic piece; None chooses 4 to 1024 so that there are at
        least about 4096 in all, and samples runs of short pieces by their
        geometry (see the module notes).  Given, every piece gets them.
    refine : bool
        Add the local maxima of |κ| found by golden-section search.
    bind : float or None
        Curvature (1/mm) from which some limit of the cut may bind (tool
        reach, acceleration, block rate): a piece that may bend half as
        tight is sampled on its own.
    max_step : float or None
        Longest step (mm) between samples placed by geometry.

    Returns
    -------
    Samples
    """
    breaks = np.asarray(getattr(contour, "breaks", None), dtype=float)
    c = np.asarray(getattr(contour, "coefficients", None), dtype=float)
    if breaks.ndim != 1 or c.ndim != 3 or c.shape[0] != 4 or c.shape[2] != 2:
        raise InputError("contour must be a pathgen Contour (piecewise cubic), got "
                         f"{type(contour).__name__}")
    c = _per_coordinate(c)
    m = len(breaks) - 1
    h = np.diff(breaks)
    closed = bool(contour.closed)
    by_geometry = per_piece is None
    if per_piece is None:
        per_piece = int(np.clip(np.ceil(4096 / m), 4, 1024))

    # -- corners: listed ones plus any break where the tangent jumps ----------
    # (a listed corner whose tangent does not jump is a smooth join)
    at_break, turn_at = _break_turns(c, h)
    is_corner = np.zeros(m + 1, bool)
    is_corner[at_break] = True
    turn_in = np.zeros(max(m - 1, 0))  # the turn at break p + 1, at corners
    turn_in[at_break - 1] = turn_at
    seam_turn = 0.0
    if closed:
        a, b = _end_derivative(c, h, np.array([m - 1]))[0], c[:, 2, 0]
        seam_turn = float(turn_angle(a, b))
        seam_corner = abs(seam_turn) > CORNER_MIN_ANGLE
    else:
        seam_corner = False
    is_corner[0] = is_corner[m] = False

    # -- base samples: per_piece on each piece sampled on its own, one every
    # geometric step on runs of short pieces, plus piece ends at corners ----
    end_pieces = np.flatnonzero(is_corner[1:m]) if m > 1 else np.zeros(0, int)  # piece p ends at corner p+1
    end_pieces = np.r_[end_pieces, m - 1]
    geometric = 0
    if by_geometry and m > 1:
        geometric, idx, x, endflag, piece_len = _geometric(c, h, per_piece, is_corner, end_pieces, bind,
                                                           max_step)
    else:
        own = np.ones(m, bool)
        idx, x, endflag = _base_samples(h, per_piece, own, own, end_pieces)
        piece_len = _piece_lengths(c, h)
    cum = np.r_[0.0, np.cumsum(piece_len)]

    if refine:
        _, d1, d2 = _derivs(c, idx, x)
        pi, px, k = _refine_maxima(c, h, idx, x, np.abs(_curv(d1, d2)))
        # each maximum lies between the samples either side of sample k
        at = k + (px >= x[k])
        idx = np.insert(idx, at, pi)
        x = np.insert(x, at, px)
        endflag = np.insert(endflag, at, False)
        ordered = (idx[1:] > idx[:-1]) | ((idx[1:] == idx[:-1]) & (x[1:] >= x[:-1]))
        if not ordered.all():  # two maxima between the same samples (a plateau)
            order = np.lexsort((x, idx))
            idx, x, endflag = idx[order], x[order], endflag[order]

    p, d1, d2 = _derivs(c, idx, x)
    speed = np.hypot(d1[:, 0], d1[:, 1])
    kappa = _curv(d1, d2)
    tangent = d1 / np.maximum(speed, 1e-300)[:, None]

    # -- arc length: trapezoid inside pieces, rescaled to exact piece lengths --
    dt = np.diff(x)
    seg = 0.5 * (speed[1:] + speed[:-1]) * dt
    seg[idx[1:] != idx[:-1]] = 0.0
    partial = np.r_[0.0, np.cumsum(seg)]
    first = np.r_[0, np.flatnonzero(idx[1:] != idx[:-1]) + 1]
    partial -= np.repeat(partial[first], np.diff(np.r_[first, len(idx)]))
    # the trapezoid over the whole piece, closed up with the piece's end speed
    last = np.r_[first[1:] - 1, len(idx) - 1]
    d_last = _end_derivative(c, h, idx[last])
    sp_end = np.hypot(d_last[:, 0], d_last[:, 1])
    total = partial[last] + 0.5 * (speed[last] + sp_end) * (h[idx[last]] - x[last])
    scale = np.ones(m)
    ok = total > 0
    pieces_here = idx[first]
    scale_here = np.where(ok, piece_len[pieces_here] / np.where(ok, total, 1.0), 1.0)
    scale[pieces_here] = scale_here
    s = cum[idx] + partial * scale[idx]
    s[endflag] = cum[idx[endflag] + 1]
    np.maximum.accumulate(s, out=s)

    corner = np.zeros(len(idx), bool)
    turn = np.zeros(len(idx))
    ends = np.flatnonzero(endflag)
    for e in ends:  # few: one per corner
        p_end = idx[e]
        if p_end == m - 1:
            continue
        corner[e] = True
        corner[e + 1] = True
        turn[e] = turn_in[p_end]  # corner at break p_end + 1 = inner[p_end]
    if seam_corner:
        corner[0] = corner[-1] = True
        turn[-1] = seam_turn
    t = breaks[idx] + x
    return Samples(t, p, s, kappa, tangent, turn, corner, closed, float(cum[m]), geometric)
