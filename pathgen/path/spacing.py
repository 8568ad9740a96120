"""Polylines of a contour sized by its shape and the tolerance, not its piece count.

A contour fitted through 10⁶ points has 10⁶ cubic pieces, yet a polyline
within 0.001 mm of a smooth 400 mm outline needs a few thousand vertices.
The functions here read bounds straight from each piece's coefficients
(a few array operations per piece, no evaluation of the curve) and place
vertices where the shape needs them:

* on piece i (P(t) = a t³ + b t² + c t + e, t in [0, h]) the second
  derivative is linear in t, so its largest length is exact:
  M = max(|2b|, |6a h + 2b|);
* the first derivative changes by at most M·h/2 from its value at the
  middle of the piece, which bounds the speed |P'| from below and above;
* a chord over a parameter step δ on which |P''| <= M stays within
  δ²·M/8 of the curve (linear interpolation error, sources:
  broken-line-error; for a unit-speed curve this is the sagitta h²/(8R) of
  an arc of radius R = 1/M, sources: sagitta).

Each piece asks for the step δ_i = √(8·e/M_i) (and for at most ``h_cap``
mm of chord).  A step that ran over several pieces could meet one whose
M is far larger than where the step began (a spike on one short piece),
so the steps are graded first: no step exceeds another's by more than
``_GRADE`` times the parameter distance between them (a lower envelope
of cones, two running minima).  Then every chord's step is within
(1 - _GRADE) of the smallest step it crosses, and the chord error is at
most e; the chord error asked for is shrunk by (1 - _GRADE)² to pay for
it.  Vertices are spread evenly in ∫dt/δ; every corner and both ends are
vertices too (the derivative jumps at a corner).

The count of vertices follows the length over √(e/curvature) and the
number of features, a spike on one short piece among 10⁶ still gets its
own vertices, and nothing is capped.
"""

from __future__ import annotations

import numpy as np

__all__ = ["piece_bounds", "vertex_params", "curvature_bound", "chord_lengths"]

#: the largest growth of the step per unit of parameter (see the module docstring)
_GRADE = 0.25
#: above this many pieces, runs of pieces are treated as one (their smallest step)
_BLOCKS = 16384


def piece_bounds(contour):
    """Per-piece bounds from the coefficients.

    Returns (h, M, vmin, vmax): the pieces' parameter lengths, the largest
    |P''| on each piece (exact), and a lower and an upper bound of |P'|
    on it (vmin may be 0).
    """
    cached = contour.__dict__.get("_spacing_bounds")
    if cached is not None:
        return cached
    b = np.asarray(contour.breaks, dtype=np.float64)
    h = np.diff(b)
    c = contour.coefficients.transpose(2, 0, 1)  # (2, 4, m): per coordinate, highest power first
    A, B, C = c[:, 0], c[:, 1], c[:, 2]
    # P'' = 6A t + 2B: its length is largest at an end of the piece
    p0 = 2.0 * B
    p1 = 6.0 * A * h + p0
    M = np.sqrt(np.maximum(np.einsum("ij,ij->j", p0, p0), np.einsum("ij,ij->j", p1, p1)))
    x = 0.5 * h
    v = (3.0 * A * x + p0) * x + C  # P' at the middle
    vmid = np.sqrt(np.einsum("ij,ij->j", v, v))
    slack = M * x
    out = (h, M, np.maximum(vmid - slack, 0.0), vmid + slack)
    for a in out:
        a.flags.writeable = False
    contour.__dict__["_spacing_bounds"] = out
    return out


def curvature_bound(contour) -> np.ndarray:
    """Upper bound of |κ| on each piece, |P''|/|P'|² (inf where the speed may vanish)."""
    cached = contour.__dict__.get("_spacing_kappa")
    if cached is not None:
        return cached
    _, M, vmin, _ = piece_bounds(contour)
    with np.errstate(divide="ignore", invalid="ignore"):
        k = np.where(vmin > 0, M / np.where(vmin > 0, vmin, 1.0) ** 2, np.inf)
    k = np.where(M == 0, 0.0, k)
    k.flags.writeable = False
    contour.__dict__["_spacing_kappa"] = k
    return k


def _graded(step: np.ndarray, b: np.ndarray, grade: float) -> np.ndarray:
    """Largest steps <= ``step`` with step_i <= step_j + grade·(gap between pieces i and j)."""
    start, end = b[:-1], b[1:]
    # forward: s_i <= s_j + grade·(start_i - end_j) for j < i
    g = np.minimum.accumulate(step - grade * end)
    fwd = np.minimum(step, np.r_[np.inf, g[:-1]] + grade * start)
    # backward: s_i <= s_j + grade·(start_j - end_i) for j > i
    g = np.minimum.accumulate((step + grade * start)[::-1])[::-1]
    bwd = np.r_[g[1:], np.inf] - grade * end
    return np.minimum(fwd, bwd)


def chord_lengths(contour) -> np.ndarray:
    """|P(end) - P(start)| of every piece, from the coefficients (no evaluation)."""
    h = np.diff(np.asarray(contour.breaks, dtype=np.float64))
    c = contour.coefficients.transpose(2, 0, 1)
    d = ((c[:, 0] * h + c[:, 1]) * h + c[:, 2]) * h
    return np.sqrt(np.einsum("ij,ij->j", d, d))


def vertex_params(contour, chord_error: float, h_cap: float = np.inf, *, second=None, speed=None) -> np.ndarray:
    """Sorted parameters of polyline vertices: every chord within
    ``chord_error`` mm of the contour and at most ``h_cap`` mm long; every
    corner and both ends included.

    ``second`` and ``speed`` (per piece, optional) replace the bounds of
    |P''| and |P'| on each piece: a caller sampling another curve on the
    same parameter (the tool-center offset) passes its own.
    """
    key = None
    if second is None and speed is None:
        key = ("_spacing_vertices", float(chord_error), float(h_cap))
        cached = contour.__dict__.get(key)
        if cached is not None:
            return cached
    b = np.asarray(contour.breaks, dtype=np.float64)
    h, M, _, vmax = piece_bounds(contour)
    if second is not None:
        M = np.asarray(second, dtype=np.float64)
    if speed is not None:
        vmax = np.asarray(speed, dtype=np.float64)
    e = float(chord_error) * (1.0 - _GRADE) ** 2
    with np.errstate(divide="ignore", invalid="ignore"):
        step = np.where(M > 0, np.sqrt(8.0 * e / np.where(M > 0, M, 1.0)), np.inf)
        if np.isfinite(h_cap):
            step = np.minimum(step, np.where(vmax > 0, h_cap / np.where(vmax > 0, vmax, 1.0), np.inf))
    m = len(h)
    if m > _BLOCKS:
        # many pieces: runs of pieces share their smallest step (never a
        # longer one), so the rest works on about _BLOCKS runs
        first = np.arange(0, m, -(-m // _BLOCKS))
        step = np.minimum.reduceat(step, first)
        b = np.append(b[first], b[-1])
        h = np.diff(b)
    step = _graded(step, b, _GRADE)
    with np.errstate(divide="ignore"):
        rho = np.where(np.isfinite(step), 1.0 / step, 0.0)
    # a floor keeps ∫ strictly increasing over straight pieces (no vertex there is needed)
    rho = np.maximum(rho, 1e-9 / max(float(b[-1] - b[0]), 1e-300))
    U = np.concatenate([[0.0], np.cumsum(rho * h)])
    n = int(np.ceil(U[-1])) + 1
    t = np.interp(np.linspace(0.0, U[-1], max(n, 2)), U, b)
    extra = [b[[0, -1]]]
    if contour.corners:
        extra.append(b[np.asarray(contour.corners, dtype=np.int64)])
    t = np.unique(np.concatenate([t, *extra]))
    if key is not None:
        t.flags.writeable = False
        contour.__dict__[key] = t
    return t
