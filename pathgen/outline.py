"""Outlines with sharp corners and straight edges, fitted piece by piece.

:func:`fit_outline` turns an :class:`~pathgen.points.Outline` (or an
(n, 2) array) into one :class:`~pathgen.spline.Contour`:

1. Corners.  The turning angle at point i is the signed angle between the
   steps P_i - P_{i-1} and P_{i+1} - P_i.  Where |angle| exceeds
   ``corner_angle`` (degrees, default :data:`DEFAULT_CORNER_ANGLE`) the
   point is a corner; ``corners=`` forces more, ``corner_angle=None`` turns
   detection off.  With ``smooth`` the steps are taken over a support of
   about 10·smooth mm on each side, measured along the curve (so noise
   does not look like corners), and candidates closer than the support
   count as one corner, at the sharpest.
2. Straight edges.  A piece between two corners (or an open end) whose
   points all lie within the straight tolerance of the chord becomes an
   exact straight line.  Without ``smooth``, runs of at least 3 collinear
   points (within the tolerance, at least ``STRAIGHT_MIN_RATIO`` of the
   outline's size long) inside a piece become straight lines too, and the
   curved stretches next to them start tangent to them (G1).
3. Curves.  Each remaining stretch is a cubic spline with the chosen end
   condition at corners and open ends ("not-a-knot" by default), the
   line's direction where it meets a straight edge; a closed outline with
   neither corners nor straight edges is one periodic spline
   (:func:`pathgen.spline.fit`).  With ``smooth=TOL`` the curved stretches
   are smoothing splines (:mod:`pathgen.smooth`) with the largest
   smoothing that keeps every point within TOL mm, pinned at corners.
   With ``smooth="auto"`` the points' noise is estimated
   (:func:`pathgen.noise.estimate_noise`); when it can fake curvature the
   curved stretches are smoothing splines whose residual matches it
   (Reinsch's criterion, Σ residual² = n·σ²), corners found over a support
   of 40σ and straight pieces within 4σ; clean points are interpolated.

The pieces share one increasing parameter (chord length by default), one
break per point, so the result evaluates, measures and reports curvature
like a single spline; ``Contour.corners`` lists the breaks at the corners.
"""

from __future__ import annotations

import math

import numpy as np

from ._options import check_option, check_positive
from .errors import InputError
from .geometry import turn_angle
from .noise import median

__all__ = [
    "fit_outline",
    "turning_angles",
    "find_corners",
    "straight_runs",
    "DEFAULT_CORNER_ANGLE",
    "STRAIGHT_RTOL",
    "STRAIGHT_MIN_RATIO",
]

#: Default corner threshold, degrees.  A smooth curve sampled with 10 or
#: more points per full turn turns at most 36° per point and is never cut;
#: corners of polygons with up to 8 sides (45° or more) are found.
DEFAULT_CORNER_ANGLE = 40.0
#: Points within this times the outline's size of a line count as on it
#: (0.14 µm on a 100 mm × 100 mm part).
STRAIGHT_RTOL = 1e-6
#: Shortest straight run found inside a curved piece, relative to the size.
STRAIGHT_MIN_RATIO = 0.01
_ENDS = ("not-a-knot", "natural", "clamped")
#: Smoothing choices besides a tolerance in mm.
SMOOTH_MODES = ("auto", "off")
#: Points closer than this many rounding steps: their rounding errors are
#: not independent (a coordinate that changes by less than a step over
#: several points is a staircase), and the residual sum stays near n·σ²
#: over a wide range of smoothing (measured on a 10⁵-point cam rounded to
#: 0.001 mm, 4 steps apart: λ from 0.025 to 7 within 21 %).  There the
#: smoothing aims at DENSE_ROUNDING_MARGIN × σ, the smooth end of that range.
DENSE_ROUNDING = 8.0
DENSE_ROUNDING_MARGIN = 1.1


# -- corners ----------------------------------------------------------------


def turning_angles(points, closed: bool, support: float = 0.0) -> np.ndarray:
    """Signed turning angle at every point, radians (+ = left turn).

    Parameters
    ----------
    points : (n, 2) mm
    closed : bool
        Closed outlines wrap around; open ones have angle 0 at both ends.
    support : float, mm
        0: the neighbouring points.  Otherwise the points about ``support``
        mm before and after along the polyline (a k-cosine style support).

    Examples
    --------
    >>> sq = np.array([[0, 0], [1, 0], [1, 1], [0, 1]], float)
    >>> np.degrees(turning_angles(sq, True)).round(6).tolist()
    [90.0, 90.0, 90.0, 90.0]
    """
    p = np.asarray(points, np.float64)
    n = len(p)
    if n < 3:
        return np.zeros(n)
    if 0 < support < 0.5 * _shortest_step(p, closed):
        support = 0.0  # the neighbours are farther than the support: the same angles
    if support <= 0:
        back = np.arange(n) - 1
        fwd = np.arange(n) + 1
    else:
        s = _robust_arc_length(p, closed, support / 3.0)
        if closed:
            per = s[-1]
            s3 = np.concatenate([s[:-1] - per, s[:-1], s[:-1] + per])
            base = s[:-1]
            back = np.searchsorted(s3, base - support, side="right") - 1 - n
            fwd = np.searchsorted(s3, base + support, side="left") - n
            back = np.minimum(back, np.arange(n) - 1)
            fwd = np.maximum(fwd, np.arange(n) + 1)
        else:
            back = np.searchsorted(s, s - support, side="right") - 1
            fwd = np.searchsorted(s, s + support, side="left")
            back = np.clip(np.minimum(back, np.arange(n) - 1), 0, n - 1)
            fwd = np.clip(np.maximum(fwd, np.arange(n) + 1), 0, n - 1)
    if closed:
        back, fwd = back % n, fwd % n
    else:
        back, fwd = np.clip(back, 0, n - 1), np.clip(fwd, 0, n - 1)
    a = p - p[back]
    b = p[fwd] - p
    ang = turn_angle(a, b)
    if not closed:
        ang[0] = ang[-1] = 0.0
    return ang


def _shortest_step(p, closed) -> float:
    """The shortest distance between neighbouring points (closed: wrapping)."""
    d = np.diff(np.vstack([p, p[:1]]) if closed else p, axis=0)
    return float(np.sqrt((d * d).sum(axis=1).min())) if len(d) else 0.0


def _robust_arc_length(p, closed, chord):
    """Arc length at each point (closed: n+1 values), insensitive to noise.

    Noise makes a dense polyline much longer than the curve.  The length is
    measured along every m-th point, m doubled until the median chord of
    that sub-polyline is at least ``chord`` mm, and interpolated between.
    """
    n = len(p)
    m = 1
    while m < n // 8:
        lag = (np.roll(p, -m, axis=0) - p) if closed else (p[m:] - p[:-m])
        if median(np.hypot(lag[:, 0], lag[:, 1])) >= chord:
            break
        m *= 2
    idx = np.arange(0, n, m)
    if closed:
        idx = np.append(idx, n)
    elif idx[-1] != n - 1:
        idx = np.append(idx, n - 1)
    q = p[idx % n]
    s_dec = np.concatenate([[0.0], np.cumsum(np.hypot(*np.diff(q, axis=0).T))])
    return np.interp(np.arange(n + 1 if closed else n), idx, s_dec)


def find_corners(points, closed: bool, angle_deg=DEFAULT_CORNER_ANGLE,
                 support: float = 0.0) -> np.ndarray:
    """Indices of the points whose |turning angle| exceeds ``angle_deg``.

    With a support > 0 (noisy points) candidates closer than ``support``
    mm along the curve count as one corner, at the sharpest of them.

    Examples
    --------
    >>> pts = np.array([[0, 0], [1, 0], [2, 0], [2, 1], [2, 2]], float)
    >>> find_corners(pts, False).tolist()
    [2]
    """
    if angle_deg is None:
        return np.zeros(0, dtype=np.int64)
    ang = np.abs(turning_angles(points, closed, support))
    hit = ang > math.radians(angle_deg)
    idx = np.flatnonzero(hit)
    if support <= 0 or len(idx) == 0 or support < 0.5 * _shortest_step(np.asarray(points, np.float64), closed):
        return idx  # (no two points closer than the support: every candidate its own corner)
    # clusters: candidates closer than ``support`` along the curve are one
    # corner (noise breaks a corner's run of hits); keep each one's sharpest
    p = np.asarray(points, np.float64)
    s = _robust_arc_length(p, closed, support / 3.0)
    pos = s[idx]
    new = np.concatenate([[True], np.diff(pos) > support])
    label = np.cumsum(new) - 1
    if closed and label[-1] > 0 and (s[-1] - pos[-1]) + pos[0] <= support:
        label[label == label[-1]] = 0  # the last cluster wraps onto the first
    order = np.lexsort((-ang[idx], label))  # by cluster, sharpest first
    first = np.concatenate([[True], np.diff(label[order]) != 0])
    return np.sort(idx[order][first])


# -- straight runs ------------------------------------------------------------


def _deviation(p: np.ndarray) -> np.ndarray:
    """Distance of every point of ``p`` from the line through p[0] and p[-1]."""
    d = p[-1] - p[0]
    L = math.hypot(d[0], d[1])
    r = p - p[0]
    if L == 0.0:
        return np.hypot(r[:, 0], r[:, 1])
    return np.abs(r[:, 0] * d[1] - r[:, 1] * d[0]) / L


def straight_runs(points, tol: float, min_length: float) -> list[tuple[int, int]]:
    """Runs (i, j) of at least 3 points within ``tol`` of the chord P_i P_j.

    Found by recursive splitting at the farthest point (Douglas-Peucker);
    stretches shorter than ``min_length`` along the polyline are not split
    further.  Runs are returned in order and do not overlap.

    Examples
    --------
    >>> th = np.linspace(0, np.pi / 2, 7)
    >>> arc = np.c_[np.cos(th), np.sin(th)]
    >>> side = np.c_[np.linspace(1, 1, 5), np.linspace(-2, 0, 5)]
    >>> straight_runs(np.vstack([side[:-1], arc]), 1e-9, 0.1)
    [(0, 4)]
    """
    p = np.asarray(points, np.float64)
    seg = np.concatenate([[0.0], np.cumsum(np.hypot(*np.diff(p, axis=0).T))])
    runs = []
    stack = [(0, len(p) - 1)]
    while stack:
        i, j = stack.pop()
        if j - i < 2 or seg[j] - seg[i] < min_length:
            continue
        dev = _deviation(p[i:j + 1])
        k = int(np.argmax(dev))
        if dev[k] <= tol:
            if math.hypot(*(p[j] - p[i])) >= min_length:
                runs.append((i, j))
            continue
        stack.append((k + i, j))
        stack.append((i, k + i))
    return sorted(runs)


#: The curve's turn onto a straight run of length L whose points lie up to
#: d from its chord: the chord leaves the curve's own tangent by about
#: 4d/L (a circular bow's sagitta d = L²κ/8 and end angle Lκ/2 = 4d/L;
#: handbook geometry), and a cubic spline clamped to a direction θ off
#: its own takes the turn within a few steps h, bending by about 2√3·θ/h
#: at the end (the moment equation 2M₀ + M₁ = 6θ/h with M_k decaying by
#: 2 − √3 per step; Stoer & Bulirsch §2.4).  Rounded up: 16·d/(L·h).
JOIN_FACTOR = 16.0


def _join_curvature(pts, i, j) -> float:
    """The curvature (1/mm) the spline beside the straight run pts[i..j]
    makes to meet it tangent (see :data:`JOIN_FACTOR`)."""
    run = pts[i:j + 1]
    dev = float(_deviation(run).max())
    d = np.diff(run, axis=0)
    step = np.hypot(d[:, 0], d[:, 1])
    h = median(step)
    length = float(step.sum())
    if dev == 0.0:
        return 0.0
    return JOIN_FACTOR * dev / (length * h) if length > 0 and h > 0 else math.inf


def _bearable_curvature(p, closed, o, noise) -> float:
    """The curvature (1/mm) a straight run's joins may fake: what the
    points' own noise fakes in an exact fit anyway (4σ/h², σ at least the
    rounding's q/√12), or the share of the outline's mean curvature that
    the noise estimate treats as harmless (``FAKE_RATIO``), the larger."""
    from .noise import FAKE_RATIO, _reference_curvature

    d = np.diff(np.vstack([p, p[:1]]) if closed else p, axis=0)
    step = np.hypot(d[:, 0], d[:, 1])
    length = float(step.sum())
    h = median(step) if len(step) else 0.0
    if length <= 0 or h <= 0:
        return math.inf
    q = getattr(o, "quantization", None) or 0.0
    sigma = q / math.sqrt(12.0)
    if noise is not None and noise.resolved:
        sigma = max(sigma, noise.sigma_used)
    ref = _reference_curvature(p, closed, length)
    return max(4.0 * sigma / (h * h), FAKE_RATIO * ref)


# -- points denser than their precision -----------------------------------------

#: A thinned fit stands for the smoothing spline only when the points it
#: leaves out lie this close to it (root mean square, in units of σ): the
#: curve through every k-th point then explains the others to their noise.
THIN_RMS = 1.5
#: The thinned points are spaced so that their noise fakes this many times
#: less curvature than ``FAKE_RATIO`` allows (the bound holds for the root
#: mean square; the worst of 10⁶ pieces is about 5 times that): 8 times
#: the spacing.  Measured on the 380 mm cam of 2·10⁶ points rounded to
#: 10 decimals: extreme curvatures within 0.01 % of the polar formula
#: with 64 (16: 0.05 %; at the bound itself, 1: 1 %).
THIN_MARGIN = 64.0


def _thinned_fit(t, y, sigma, noise, periodic):
    """The curve through every k-th point, for points so dense that their
    rounding fakes curvature (4σ/h²) while the shape hardly bends between
    them; None when that does not apply (then the smoothing spline does).

    k is the smallest step at which the noise fakes ``THIN_MARGIN`` times
    less than ``FAKE_RATIO`` of the outline's mean curvature (4σ/(k·h)²,
    the test :func:`pathgen.noise.estimate_noise` applies), and at least 2.
    The interpolating spline through the kept points (periodic, or through
    the stretch's end points with not-a-knot ends, which follow the shape to
    the end where natural ends would force it straight) is split at the
    left-out points' parameters, exactly (Taylor shift of each cubic), so
    the contour keeps one break per point.  Used only when the points it
    leaves out lie within ``THIN_RMS`` σ of it (root mean square, measured):
    then it fits the points as closely as their noise allows, at the cost
    of one spline fit through n/k points and one O(n) pass instead of the
    smoothing spline's repeated solves (the cam of 2·10⁶ points rounded to
    10 decimals, whole fit: 10 s and 1.1 GB against 31 s and 1.6 GB).

    Returns (coefficients (4, m, 2), facts) like :func:`pathgen.smooth.fit_noise`.
    """
    from .noise import FAKE_RATIO
    from .spline import _coefficients, _moments

    if noise is None or not noise.smooth or noise.reference_curvature <= 0 or sigma <= 0:
        return None
    t = np.asarray(t, np.float64)
    y = np.asarray(y, np.float64)
    m = len(t) - 1  # intervals
    h = median(np.diff(t))
    spacing = math.sqrt(4.0 * sigma * THIN_MARGIN / (FAKE_RATIO * noise.reference_curvature))
    k = int(math.ceil(spacing / h)) if h > 0 else 0
    if k < 2 or m // k < (4 if periodic else 3):
        return None
    if periodic:
        keep = np.arange(0, m, k)
        tk = np.append(t[keep], t[m])
        yk = np.vstack([y[keep], y[:1]])
    else:
        keep = _unique(np.append(np.arange(0, m, k), m))
        tk, yk = t[keep], y[keep]
    hk = np.diff(tk)
    dk = np.diff(yk, axis=0)
    slopes = (dk[:, 0] / hk, dk[:, 1] / hk)
    if periodic:
        M = _moments(hk, slopes, "not-a-knot", True, None)
    else:
        M = _moments(hk, slopes, "not-a-knot", False, None)
    ck = _coefficients(hk, (yk[:, 0], yk[:, 1]), slopes, M)  # (2, 4, K) per coordinate
    # each original interval inside kept piece j, at offset u from its start
    counts = np.diff(np.append(keep, m) if periodic else keep)
    j = np.repeat(np.arange(len(hk)), counts)
    u = t[:-1] - tk[j]
    c = np.empty((2, 4, m))
    for i in range(4):
        np.take(ck[:, i], j, axis=1, out=c[:, i])
    # Taylor shift to t_i by synthetic division (Horner's scheme, three
    # passes): rows become a3, P''(u)/2, P'(u), P(u) of the kept piece
    a3u = c[:, 0] * u
    c[:, 1] += a3u
    c[:, 2] += c[:, 1] * u
    c[:, 3] += c[:, 2] * u
    c[:, 1] += a3u
    c[:, 2] += c[:, 1] * u
    c[:, 1] += a3u
    del a3u, j, u
    # residual of every point at its own parameter (at least its distance to the curve)
    last = t[m] - t[m - 1]
    end = ((c[:, 0, -1] * last + c[:, 1, -1]) * last + c[:, 2, -1]) * last + c[:, 3, -1]
    g = np.vstack([c[:, 3].T, end[None, :]])  # (m + 1, 2): the curve at every point's parameter
    r = np.hypot(g[:, 0] - y[:, 0], g[:, 1] - y[:, 1])
    if periodic:
        r = r[:m]  # the last point is the first again
    rms = float(np.sqrt(np.mean(r * r)))
    if rms > THIN_RMS * sigma:
        return None
    return c.transpose(1, 2, 0), {"residuals": r, "lambda": 0.0, "every": k, "dof": float(len(hk) + (not periodic)),
                                  "max_residual": float(r.max()), "rms_residual": rms}


# -- one piece ------------------------------------------------------------------


def _piece_moments(t, y, start, stop):
    """Second derivatives of a cubic spline with separate end conditions.

    ``start``/``stop``: "not-a-knot", "natural", or a 2-vector dP/dt.
    Full (n+1)-row tridiagonal system; not-a-knot rows are made tridiagonal
    by eliminating M_2 (M_{n-2}) with the neighbouring interior row.
    """
    from .spline import tridiag_solve

    h = np.diff(t)
    n = len(h)
    slope = np.diff(y, axis=0) / h[:, None]
    if n == 1:
        start = "natural" if isinstance(start, str) else start
        stop = "natural" if isinstance(stop, str) else stop
    if n == 2 and isinstance(start, str) and isinstance(stop, str) \
            and start == stop == "not-a-knot":
        # both conditions say the same thing: the parabola through 3 points
        r = 6.0 * (slope[1] - slope[0]) / (h[0] + h[1])
        return np.tile(r / 3.0, (3, 1))
    d = np.full(n + 1, 2.0)
    du = np.zeros(n)
    dl = np.zeros(n)
    b = np.zeros((n + 1, 2), order="F")
    if n >= 2:
        hl, hr = h[:-1], h[1:]
        lam = hr / (hl + hr)
        du[1:] = lam
        dl[:-1] = 1.0 - lam
        b[1:n] = 6.0 * (slope[1:] - slope[:-1]) / (hl + hr)[:, None]
    for side, cond in ((0, start), (1, stop)):
        if side == 0:
            row, inner, h0, h1, s = 0, 1, h[0], h[1] if n >= 2 else 0.0, slope[0]
        else:
            row, inner, h0, h1, s = n, n - 1, h[-1], h[-2] if n >= 2 else 0.0, slope[-1]
        if isinstance(cond, str) and cond == "natural":
            d[row] = 1.0
            b[row] = 0.0
            if side == 0:
                du[0] = 0.0
            else:
                dl[-1] = 0.0
        elif isinstance(cond, str):  # not-a-knot, n >= 2
            d[row] = h1 - h0
            off = -(h1 + 2.0 * h0)
            b[row] = -h0 * b[inner]
            if side == 0:
                du[0] = off
            else:
                dl[-1] = off
        else:
            v = np.asarray(cond, np.float64)
            d[row] = 2.0
            if side == 0:
                du[0] = 1.0
                b[row] = 6.0 / h0 * (s - v)
            else:
                dl[-1] = 1.0
                b[row] = 6.0 / h0 * (v - s)
    # LAPACK's dgtsv, or for small pieces its own steps in Python (the same
    # numbers, without importing scipy.linalg)
    return tridiag_solve(dl, d, du, b, stepwise=True)


def _line_coefficients(t, y) -> np.ndarray:
    """Exact straight line from y[0] to y[-1], one linear piece per step."""
    h = np.diff(t)
    frac = (t - t[0]) / (t[-1] - t[0])
    pts = y[0] + frac[:, None] * (y[-1] - y[0])
    c = np.zeros((4, len(h), 2))
    c[2] = np.diff(pts, axis=0) / h[:, None]
    c[3] = pts[:-1]
    return c


# -- assembling the contour -----------------------------------------------------


def _as_outline(outline, closed):
    from .points import Outline, clean_points

    if isinstance(outline, Outline):
        if closed is not None and bool(closed) != outline.closed:
            raise InputError("closed= contradicts the Outline's own closed flag; "
                             "clean the points again with clean_points(closed=...)")
        return outline
    return clean_points(outline, closed=closed)


def fit_outline(outline, *, end: str = "not-a-knot", param: str = "chord",
                corner_angle=DEFAULT_CORNER_ANGLE, corners=None, smooth=None,
                tangents=None, straight_tol=None, closed=None, noise=None, find_arcs=True):
    """Fit a contour through an outline with corners and straight edges.

    Parameters
    ----------
    outline : Outline or array-like (n, 2)
        Cleaned points (an array is cleaned with
        :func:`pathgen.points.clean_points`), mm.
    end : {"not-a-knot", "natural", "clamped"}
        End condition of each curved piece at corners and open ends.
        "clamped" needs ``tangents`` (open outlines: dP/dt at the first and
        last point) and is "not-a-knot" at corners.
    param : {"chord", "centripetal", "uniform"}
        Parameter steps, as in :func:`pathgen.spline.fit`.
    corner_angle : float or None, degrees
        Turning angle above which a point is a corner (default 40°);
        None: no corner detection and no search for straight edges inside
        pieces (pieces between forced corners are still straight when
        their points are).
    corners : sequence of int or None
        Point indices (into ``outline.points``) forced to be corners.
    smooth : float, "auto", "off" or None
        A distance (mm): smoothing tolerance, every point stays within this
        distance of the contour (measured).  "auto": smooth to the
        estimated noise when it can fake curvature, else interpolate.
        "off" or None: interpolate exactly.  Smoothed pieces have
        natural ends pinned to their end points (corners and the ends of an
        open outline); ``end`` applies to interpolated pieces only.
    tangents : pair of 2-vectors, for ``end="clamped"``.
    straight_tol : float or None, mm
        How far points may lie from a straight edge; default
        ``STRAIGHT_RTOL`` × size, or ``smooth`` when smoothing.
    closed : bool or None
        For array input only, as in ``clean_points``.
    noise : pathgen.noise.NoiseEstimate or None
        The points' noise, for ``smooth="auto"`` (estimated when None).
    find_arcs : bool
        Look for drawn lines and circular arcs in the points
        (:mod:`pathgen.primitives`): runs of at least 8 points within the
        points' rounding of one line or circle become exact lines and arcs,
        the stretches between them splines tangent to them.  Used when at
        least one arc is found (and, when smoothing, only when no free-form
        stretch is left); else the fit below is unchanged.  False: never.

    Returns
    -------
    pathgen.spline.Contour
        ``corners`` lists the break indices where the tangent jumps: the
        detected and forced corners (one break per point; closed outlines
        have one more break at the end of the seam).
        ``info`` holds "corners", "straight_runs" (pairs of point indices),
        "corner_angle" (degrees), "smooth", "max_residual" and
        "rms_residual" (mm; distances of the points from the contour),
        "smoothing" ("off", "tolerance", "noise" or "none": auto found the
        points clean), "noise" (the NoiseEstimate, when estimated), and
        when smoothing to the noise "sigma" (mm, the σ aimed at), "dof"
        and "dof_error" (degrees of freedom kept, estimated), and
        "thinned" (k) when points denser than their rounding supports were
        fitted through every k-th (see :func:`_thinned_fit`).

    Examples
    --------
    >>> c = fit_outline([[0, 0], [10, 0], [10, 5], [0, 5]], closed=True)
    >>> c.corners, round(c.length, 9)
    ((0, 1, 2, 3), 30.0)
    """
    from .spline import Contour, fit, parameters, power_form

    o = _as_outline(outline, closed)
    check_option("end", end, _ENDS)
    p, closed = np.ascontiguousarray(o.points), o.closed
    n = len(p)
    size = float(np.hypot(*(p.max(axis=0) - p.min(axis=0))))
    if corner_angle is not None:
        corner_angle = check_positive("corner_angle", corner_angle)
        if corner_angle >= 180.0:
            raise InputError(f"corner_angle must be below 180 degrees, got {corner_angle}")
    sigma = None
    if isinstance(smooth, str):
        check_option("smooth", smooth, SMOOTH_MODES)
        mode = smooth
        if mode == "auto":
            if noise is None:
                from .noise import estimate_noise

                noise = estimate_noise(p, closed, quantization=getattr(o, "quantization", None))
            if noise.smooth:
                # aim one standard error (about 1/√n) above the estimate: when
                # the outline is much smoother than the noise, the residual
                # sum changes by a few % over decades of λ, and a σ estimated
                # 3 % low leaves the noise in (the safety factor τ > 1 of the
                # discrepancy principle).  Measured on 3000 noisy points of
                # four outlines, 8 seeds each: smallest radius within 2.7 %
                # (without the factor: up to 6.3 % off).
                sigma = noise.sigma_used * (1.0 + 1.0 / math.sqrt(max(noise.points, 1)))
                q = noise.quantization or 0.0
                if q > 0 and noise.spacing_median < DENSE_ROUNDING * q:
                    sigma *= DENSE_ROUNDING_MARGIN
                mode = "noise"
            else:
                mode = "none"
        smooth = None
    elif smooth is not None:
        smooth = check_positive("smooth", smooth)
        mode = "tolerance"
    else:
        mode = "off"
    smoothing = smooth is not None or sigma is not None
    like = smooth if smooth is not None else 4.0 * sigma if sigma is not None else None
    tol = (straight_tol if straight_tol is not None
           else like if like is not None else STRAIGHT_RTOL * size)
    tol = check_positive("straight_tol", tol, allow_zero=True)
    tan = None
    if end == "clamped":
        if closed:
            end = "not-a-knot"
        else:
            try:
                tan = np.array(tangents, dtype=np.float64).reshape(2, 2)
            except (TypeError, ValueError):
                raise InputError('end="clamped" needs tangents=(start_vector, '
                                 'end_vector), two 2-vectors') from None
            if not np.isfinite(tan).all() or (np.hypot(*tan.T) == 0).any():
                raise InputError("tangents must be two finite, non-zero 2-vectors")
    support = 10.0 * like if like is not None else 0.0
    cs = find_corners(p, closed, corner_angle, support) if corner_angle is not None \
        else np.zeros(0, np.int64)
    if corners is not None:
        try:
            forced = np.array(corners, dtype=np.int64).reshape(-1)
        except (TypeError, ValueError):
            raise InputError(f"corners must be point indices (integers), got {corners!r}") \
                from None
        bad = (forced < 0) | (forced >= n)
        if bad.any():
            raise InputError(f"corners: index {int(forced[bad][0])} is outside the "
                             f"outline's points 0..{n - 1}")
        cs = np.union1d(cs, forced)
    if not closed:
        cs = cs[(cs > 0) & (cs < n - 1)]
    cs = _unique(cs)
    if find_arcs and corners is None and tan is None and straight_tol is None:
        found = _lines_and_arcs(o, p, closed, cs, end, mode, smoothing,
                                {"corner_angle": corner_angle, "smooth": smooth, "noise": noise})
        if found is not None:
            return found
    hgl = np.diff(parameters(p, param, closed))  # one step per interval
    span = 1
    if sigma is not None and param == "chord":
        from .noise import chord_parameter, chord_span

        span = chord_span(noise.sigma, noise.spacing_median, n)
        if span > 1:
            # noise comparable with the spacing moves the chord lengths: the
            # parameter comes from chords many points long instead
            hgl = np.diff(chord_parameter(p, closed, span))
    facts = {"corner_angle": corner_angle, "smooth": smooth, "smoothing": mode}
    if noise is not None:
        facts["noise"] = noise
    if sigma is not None:
        facts.update(sigma=sigma, dof=0.0, dof_error=0.0)
        if span > 1:
            facts["chord_span"] = span

    if closed and len(cs) == 0:
        # rotate to the sharpest point so a straight run is not cut by the seam
        start = int(np.argmax(np.abs(turning_angles(p, True))))
    else:
        start = int(cs[0]) if closed else 0
    m = n if closed else n - 1  # intervals
    order = (start + np.arange(m + 1)) % n
    q = p[order]
    hq = hgl[(start + np.arange(m)) % n] if closed else hgl
    tq = np.concatenate([[0.0], np.cumsum(hq)])
    # piece boundaries (rotated indices): corners, ends
    bounds = np.sort((cs - start) % n) if len(cs) else np.zeros(0, np.int64)
    bounds = _unique(np.concatenate([[0], bounds, [m]]))
    search = not smoothing and corner_angle is not None  # straight runs inside pieces
    # a straight run inside a curved piece is kept only when the curve's
    # turn onto it stays below the curvature the points can bear (see
    # _join_curvature); a tolerance given by the caller is taken as it is
    bear = []  # computed when a run is found

    def runs_in(pts):
        found = straight_runs(pts, tol, STRAIGHT_MIN_RATIO * size)
        if found and straight_tol is None:
            if not bear:
                bear.append(_bearable_curvature(p, closed, o, noise))
            found = [r for r in found if _join_curvature(pts, *r) <= bear[0]]
        return found

    if closed and len(cs) == 0 and not smoothing:
        runs_all = runs_in(q) if search else []
        if not runs_all:
            c = fit(p, closed=True, param=param)
            return _finish(c, p, closed, (), [], facts, None)
        # start the loop at the beginning of a straight edge
        start = (start + runs_all[0][0]) % n
        order = (start + np.arange(m + 1)) % n
        q = p[order]
        hq = hgl[(start + np.arange(m)) % n]
        # the runs as the pieces will see them from the new seam: none left
        # (a run too short once the seam moved) means one periodic spline,
        # never an open fit of the loop with a kink at its seam
        if not _apart(runs_in(q)):
            c = fit(p, closed=True, param=param)
            return _finish(c, p, closed, (), [], facts, None)
        tq = np.concatenate([[0.0], np.cumsum(hq)])
    coeffs = np.empty((4, m, 2))
    residual = np.zeros(m + 1)
    runs_out = []
    seam_tangent = None
    for a, b in zip(bounds[:-1], bounds[1:]):
        seg = q[a:b + 1]
        ts = tq[a:b + 1]
        first_cond = end if (a > 0 or closed) else (tan[0] if tan is not None else end)
        last_cond = end if (b < m or closed) else (tan[1] if tan is not None else end)
        if isinstance(first_cond, str) and first_cond == "clamped":
            first_cond = "not-a-knot"  # at a corner
        if isinstance(last_cond, str) and last_cond == "clamped":
            last_cond = "not-a-knot"
        corner_free_loop = closed and len(cs) == 0
        if not corner_free_loop and (b - a == 1 or _deviation(seg).max() <= tol):
            coeffs[:, a:b] = _line_coefficients(ts, seg)
            residual[a:b + 1] = _deviation(seg)
            if b - a >= 2:
                runs_out.append((a, b))
            if sigma is not None:
                facts["dof"] += 2.0
            continue
        inner = _apart(runs_in(seg)) if search else []
        # alternate curved and straight stretches: (from, to, line run or None)
        parts, at = [], 0
        for i, j in inner:
            if i > at:
                parts.append((at, i, None))
            parts.append((i, j, (i, j)))
            at = j
        if at < b - a:
            parts.append((at, b - a, None))
        for k, (i, j, run) in enumerate(parts):
            sub, tsub = seg[i:j + 1], ts[i:j + 1]
            lo, hi = a + i, a + j
            if run is not None:
                coeffs[:, lo:hi] = _line_coefficients(tsub, sub)
                residual[lo:hi + 1] = _deviation(sub)
                runs_out.append((lo, hi))
                continue
            # a curved stretch starts and ends tangent to the straight runs it meets
            before = parts[k - 1][2] if k > 0 else None
            after = parts[k + 1][2] if k + 1 < len(parts) else None
            v0 = math.hypot(*(sub[1] - sub[0])) / (tsub[1] - tsub[0])
            v1 = math.hypot(*(sub[-1] - sub[-2])) / (tsub[-1] - tsub[-2])
            c_start = first_cond if before is None else _unit(seg[before[0]], seg[before[1]]) * v0
            if after is not None:
                c_stop = _unit(seg[after[0]], seg[after[1]]) * v1
            elif corner_free_loop and j == b - a and parts[0][2] is not None:
                r0 = parts[0][2]  # back at the seam: the first run
                c_stop = _unit(seg[r0[0]], seg[r0[1]]) * v1
            else:
                c_stop = last_cond
            if not smoothing and corner_free_loop and parts[0][2] is None and (k == 0 or j == b - a):
                # a curved stretch on both sides of the seam: give both the
                # tangent a periodic fit has there, so the seam is no kink
                if seam_tangent is None:
                    seam_tangent = fit(p, closed=True, param=param)(np.sum(hgl[:start]), 1)
                if k == 0:
                    c_start = seam_tangent
                if j == b - a:
                    c_stop = seam_tangent
            if smoothing and len(sub) >= 3:
                from .smooth import CURVATURE_NOISE_SHARE, fit_noise, fit_within

                fixed = np.zeros(len(sub), bool)
                fixed[0] = fixed[-1] = True
                thin = _thinned_fit(tsub, sub, sigma, noise, corner_free_loop) if sigma is not None else None
                if thin is not None:
                    c_sm, f = thin
                    facts["thinned"] = max(facts.get("thinned", 0), f["every"])
                    facts["dof"] += f["dof"]
                elif sigma is not None:
                    if corner_free_loop:
                        c_sm, f = fit_noise(tsub, sub[:-1], sigma, periodic=True,
                                            curvature_share=CURVATURE_NOISE_SHARE)
                    else:
                        c_sm, f = fit_noise(tsub, sub, sigma, fixed=fixed, curvature_share=CURVATURE_NOISE_SHARE)
                    facts["dof"] += f["dof"]
                    facts["dof_error"] = math.hypot(facts["dof_error"], f["dof_error"])
                    if f["lambda_steps"]:
                        # smoothed beyond the residual criterion (smooth.CURVATURE_NOISE_SHARE)
                        facts["curvature_noise_share"] = max(facts.get("curvature_noise_share", 0.0),
                                                             f["curvature_noise_share"])
                elif corner_free_loop:
                    c_sm, f = fit_within(tsub, sub[:-1], smooth, periodic=True)
                else:
                    c_sm, f = fit_within(tsub, sub, smooth, fixed=fixed)
                coeffs[:, lo:hi] = c_sm
                residual[lo:lo + len(f["residuals"])] = f["residuals"]
                facts.setdefault("lambda", []).append(f["lambda"])
                c_sm = thin = f = None  # (copied: 64 MB at 10^6 points not held to the end)
            else:
                M = _piece_moments(tsub, sub, c_start, c_stop)
                coeffs[:, lo:hi] = power_form(tsub, sub, M)
    # undo the rotation: interval k of q is interval (start + k) % n of p
    if closed:
        coeffs = np.roll(coeffs, start, axis=1)
        residual = np.roll(residual[:m], start)
        hq_orig = hgl
    else:
        hq_orig = hq
    breaks = np.concatenate([[0.0], np.cumsum(hq_orig)])
    kinks = _kinks(breaks, coeffs, closed)
    if smoothing:
        # a smoothing spline is C2 inside its piece by construction: a
        # "kink" there is rounding (1e-9 rad at 669 of 10^6 breaks of a
        # dense smoothed cam made 669 false corners); only piece ends count
        ends = {int(i + start) % n if closed else int(i) for i in bounds}
        kinks &= set() if closed and len(cs) == 0 else ends  # one periodic piece: no ends
    corner_breaks = tuple(sorted(set(int(i) for i in cs) | kinks))
    runs = [((int(i) + start) % n, (int(j) + start) % n) for i, j in runs_out]
    c = Contour(breaks, coeffs, closed, p, corners=corner_breaks,
                end="periodic" if closed and len(cs) == 0 else end, param=param)
    return _finish(c, p, closed, corner_breaks, runs, facts,
                   residual[:n] if smoothing else None)


def _lines_and_arcs(o, p, closed, cs, end, mode, smoothing, facts):
    """The contour of recognised lines and arcs (see ``find_arcs``), or None."""
    from .primitives import MIN_POINTS, find_pieces, pieces_contour, recognition_bound

    if len(p) < MIN_POINTS:
        return None
    bound = recognition_bound(p, getattr(o, "quantization", None))
    start, pieces = find_pieces(p, closed, bound)
    if not any(x.kind == "arc" for x in pieces):
        return None
    if smoothing and any(x.kind == "free" for x in pieces):
        return None  # free-form stretches of noisy points: smoothed as before
    c = pieces_contour(p, closed, start, pieces, bound, corners=cs, end=end)
    info = {k: v for k, v in facts.items() if v is not None or k == "smooth"}
    info["smoothing"] = "recognised"
    info["smoothing_asked"] = mode
    c.info.update(info)
    return c


def _unique(a) -> np.ndarray:
    """The sorted distinct values of an integer array, as ``numpy.unique``
    gives them (which imports numpy.ma on its first call: a small job's
    cost)."""
    a = np.sort(np.asarray(a).ravel())
    return a[np.concatenate([[True], a[1:] != a[:-1]])] if len(a) else a


def _apart(runs):
    """Shorten straight runs that touch, so a curve can blend them (G1).

    Two runs meeting at a point inside a piece turn by less than the corner
    angle there; each gives up its end point so a short curved stretch joins
    them tangent to both.  Runs left with fewer than 3 points are dropped.
    """
    out = [list(r) for r in runs]
    for k in range(1, len(out)):
        if out[k][0] == out[k - 1][1]:
            out[k - 1][1] -= 1
            out[k][0] += 1
    return [(i, j) for i, j in out if j - i >= 2]


def _kinks(breaks, c, closed) -> set:
    """Breaks where the tangent direction jumps (more than 1e-9 rad)."""
    h = np.diff(breaks)[:, None]
    left = (3.0 * c[0] * h + 2.0 * c[1]) * h + c[2]  # P' at the end of each piece
    right = c[2]  # P' at the start of each piece
    if closed:
        a, b, at = left, np.roll(right, -1, axis=0), np.arange(1, len(h) + 1) % len(h)
    else:
        a, b, at = left[:-1], right[1:], np.arange(1, len(h))
    ang = np.abs(turn_angle(a, b))
    return {int(i) for i in at[ang > 1e-9]}


def _unit(p0, p1) -> np.ndarray:
    """Unit direction from p0 to p1 (the tangent of a straight edge)."""
    d = np.asarray(p1, float) - np.asarray(p0, float)
    return d / math.hypot(d[0], d[1])


def _finish(c, p, closed, corners, runs, facts, residual):
    info = dict(facts)
    info["corners"] = list(corners)
    info["straight_runs"] = [list(r) for r in runs]
    if residual is None:  # interpolation: measure |C(t_i) - P_i| at the breaks
        residual = np.hypot(*(c(c.breaks[: len(p)]) - p).T)
    info["max_residual"] = float(residual.max())
    info["rms_residual"] = float(np.sqrt(np.mean(residual**2)))
    c.info.update(info)
    return c
