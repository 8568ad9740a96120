"""Dense samples along a contour for the checks.

Every check works on one set of samples: a few per cubic piece, evenly
spaced in the piece's parameter, plus each local maximum of |κ| found by a
golden-section search (so the tightest point of every bend is a sample and
no tight spot hides between samples), plus both sides of every sharp
corner (two samples at the same arc length, one per piece).  A corner is
a break where the tangent direction jumps by more than 1e-6 rad (listed
in ``Contour.corners`` or not; a listed break without a jump is smooth).

Arc length at the samples: the trapezoid rule on the speed |P'(t)| inside
each piece, rescaled so that each piece's total equals its length from
10-point Gauss-Legendre; the error is second order in the
sample step and never accumulates from piece to piece.
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


def _piece_lengths(c: np.ndarray, h: np.ndarray, halves: int = 1) -> np.ndarray:
    """Length of every piece: 10-point Gauss-Legendre on ``halves`` sub-steps.

    ``c`` per coordinate, (2, 4, m).  One step is exact to rounding for the
    nearly constant speed of chord-parametrized pieces (the ellipse
    perimeter test holds it to 1e-8).
    """
    nodes, weights = np.polynomial.legendre.leggauss(10)
    total = np.zeros(len(h))
    for k in range(halves):
        u = (k + (nodes + 1.0) / 2.0) / halves  # (10,) in [0, 1]
        part = np.zeros(len(h))
        for node, weight in zip(u, weights):
            x = h * node
            dx = (3.0 * c[0, 0] * x + 2.0 * c[0, 1]) * x + c[0, 2]
            dy = (3.0 * c[1, 0] * x + 2.0 * c[1, 1]) * x + c[1, 2]
            part += np.hypot(dx, dy) * (weight / 2.0)
        total += part * h / halves
    return total


def sample_contour(contour, *, per_piece: int | None = None, refine: bool = True) -> Samples:
    """Sample ``contour`` densely enough for the checks.

    Parameters
    ----------
    contour : Contour
    per_piece : int or None
        Samples per cubic piece; None chooses 4 to 1024 so that there are at
        least about 4096 in all.
    refine : bool
        Add the local maxima of |κ| found by golden-section search.

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
    if per_piece is None:
        per_piece = int(np.clip(np.ceil(4096 / m), 4, 1024))

    # -- corners: listed ones plus any break where the tangent jumps ----------
    inner = np.arange(1, m)
    _, d_end, _ = _derivs(c, np.arange(m), h)  # end of every piece
    _, d_start, _ = _derivs(c, np.arange(m), np.zeros(m))  # start of every piece
    tin = d_end[inner - 1]
    tout = d_start[inner]
    turn_in = turn_angle(tin, tout)
    is_corner = np.zeros(m + 1, bool)
    # a listed corner whose tangent does not jump is a smooth join
    is_corner[inner] = np.abs(turn_in) > CORNER_MIN_ANGLE
    seam_turn = 0.0
    if closed:
        a, b = d_end[-1], d_start[0]
        seam_turn = float(turn_angle(a, b))
        seam_corner = abs(seam_turn) > CORNER_MIN_ANGLE
    else:
        seam_corner = False
    is_corner[0] = is_corner[m] = False

    # -- base samples: per_piece per piece, plus piece ends at corners --------
    j = np.arange(per_piece) / per_piece
    idx = np.repeat(np.arange(m), per_piece)
    x = (h[:, None] * j[None, :]).ravel()
    end_pieces = np.flatnonzero(is_corner[1:m]) if m > 1 else np.zeros(0, int)  # piece p ends at corner p+1
    end_pieces = np.r_[end_pieces, m - 1]
    # the base samples are in (piece, offset) order: insert a piece's end
    # after its last sample (no sort of the whole array)
    at = (end_pieces + 1) * per_piece
    idx = np.insert(idx, at, end_pieces)
    x = np.insert(x, at, h[end_pieces])
    endflag = np.insert(np.zeros(m * per_piece, bool), at, True)

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
    piece_len = _piece_lengths(c, h)
    cum = np.r_[0.0, np.cumsum(piece_len)]
    dt = np.diff(x)
    seg = 0.5 * (speed[1:] + speed[:-1]) * dt
    seg[idx[1:] != idx[:-1]] = 0.0
    partial = np.r_[0.0, np.cumsum(seg)]
    first = np.r_[0, np.flatnonzero(idx[1:] != idx[:-1]) + 1]
    partial -= np.repeat(partial[first], np.diff(np.r_[first, len(idx)]))
    # the trapezoid over the whole piece, closed up with the piece's end speed
    last = np.r_[first[1:] - 1, len(idx) - 1]
    sp_end = np.hypot(d_end[:, 0], d_end[:, 1])
    total = partial[last] + 0.5 * (speed[last] + sp_end[idx[last]]) * (h[idx[last]] - x[last])
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
    return Samples(t, p, s, kappa, tangent, turn, corner, closed, float(cum[m]))
