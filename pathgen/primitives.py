"""Drawn lines and circular arcs recognised in outline points.

Points sampled from a drawn part (a plate with straight edges, fillets and
round holes) lie on lines and circles to within their own rounding.  An
interpolating C2 spline through them overshoots where the curvature jumps
from 0 to 1/R (an R8 fillet between straight edges reads about R6.9), so
such runs are better written as what they are: exact lines and arcs.

:func:`find_pieces` splits an outline into runs of points that lie on one
line or one circle within ``bound`` (mm) and the free-form stretches
between them; :func:`pieces_contour` builds the contour: lines and arcs
exactly (the same cubic pieces :mod:`pathgen.drawing` makes for a drawn
ARC, radius of curvature within ``ARC_RADIUS_ERROR`` of the fitted
radius), joined tangent where they meet tangent (within the bound) and
sharp where they meet at an angle; free-form stretches are interpolating
cubic splines that start and end tangent to the pieces they meet (unless
the points turn sharply there: a corner).

The rule (what is accepted):

* the bound is the points' rounding: a coordinate rounded to a step q
  moves a point by at most q/√2; ``BOUND_SHARE`` × q (0.75 q) leaves a
  little room for the fit's own error.  Points at full precision get
  ``FLOAT_RTOL`` × the outline's size.  Measurement noise larger than the
  rounding never fits within it, so noisy points are fitted as before;
* a run holds at least ``MIN_POINTS`` points (8: five more than a circle's
  three parameters, so the fit is tested, not just solved) and every point
  lies within the bound of the fitted line or circle (largest distance,
  not an average);
* a line is at least ``STRAIGHT_MIN_RATIO`` of the outline's size long; an
  arc bends away from its chord by at least ``ARC_MIN_SAGITTA`` bounds (so
  it is told from a line), turns by at most 2π, and has a radius below
  ``MAX_RADIUS_RATIO`` × the size.

Fits: total least squares line (the principal axis of the points'
scatter); circle by Kåsa's algebraic fit refined by Gauss-Newton steps on
the geometric distances (Kåsa 1976, "A circle fitting procedure and its
error analysis", IEEE Trans. Instrum. Meas. IM-25(1); Chernov 2010,
"Circular and Linear Regression: Fitting Circles and Lines by Least
Squares", CRC Press, ch. 4-5).

Conventions: lengths in mm, angles in radians, counter-clockwise positive.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["Piece", "fit_line", "fit_circle", "find_pieces", "pieces_contour", "recognition_bound",
           "describe", "describe_counts", "MIN_POINTS", "MIN_SWEEP", "BOUND_SHARE", "FLOAT_RTOL", "ARC_MIN_SAGITTA"]

#: Fewest points in a recognised line or arc.
MIN_POINTS = 8
#: The bound is this many rounding steps (a rounded point moves at most q/√2 ≈ 0.707 q).
BOUND_SHARE = 0.75
#: Points at full precision: the bound is this times the outline's size.
FLOAT_RTOL = 1e-9
#: An arc bends away from its chord by at least this many bounds.
ARC_MIN_SAGITTA = 10.0
#: Smallest turn of a recognised arc (radians, 45°).  A free-form curve is
#: a circle within the rounding over a short stretch: measured on 10⁵
#: points rounded to 0.001 mm, ellipses 50 × 30 and 50 × 45 mm and a cam
#: gave such runs of up to 18.5°.
MIN_SWEEP = math.radians(45.0)
#: The share of MIN_SWEEP the polyline of an arc's points surely turns by.
_SWEEP_SHARE = 0.8
#: Largest arc radius, relative to the outline's size.
MAX_RADIUS_RATIO = 1e3
#: Shortest recognised line, relative to the outline's size (as the
#: straight runs of :mod:`pathgen.outline`).
STRAIGHT_MIN_RATIO = 0.01
#: The screen keeps windows within this many bounds of their algebraic
#: circle (the geometric fit that decides is never farther off).
_SCREEN_SLACK = 2.0
#: Longer point sequences are searched on every m-th point first (at most
#: this many), and the runs found fitted again on all points.
_COARSE = 5000
#: Circle-fit refinement: Gauss-Newton steps at most.
_GN_STEPS = 4


@dataclass(frozen=True)
class Piece:
    """A run of points ``first``..``last`` (indices into the closed or open
    sequence) on a line or a circle, or a free-form stretch.

    kind : "line", "arc" or "free".
    line : (point, unit direction) for lines.
    center, radius : for arcs.
    error : largest distance of the run's points from the line or circle, mm.
    """

    kind: str
    first: int
    last: int
    line: tuple = ()
    center: tuple = ()
    radius: float = 0.0
    error: float = 0.0


# -- fits -----------------------------------------------------------------------------


def _dot(a, b) -> float:
    """Σ a·b without BLAS (its threads, on a shared machine, made one dot
    product of 2·10⁴ values 25 times slower than this, measured)."""
    return float(np.einsum("i,i->", a, b))


def fit_line(p: np.ndarray):
    """Total least squares line through ``p`` (k, 2): (point, unit direction,
    largest distance of the points from it).

    >>> _, d, e = fit_line(np.array([[0, 0], [1, 1], [2, 2.0]]))
    >>> [round(abs(float(v)), 12) for v in d], bool(e < 1e-12)
    ([0.707106781187, 0.707106781187], True)
    """
    c = p.mean(axis=0)
    q = p - c
    sxx, syy, sxy = _dot(q[:, 0], q[:, 0]), _dot(q[:, 1], q[:, 1]), _dot(q[:, 0], q[:, 1])
    ang = 0.5 * math.atan2(2.0 * sxy, sxx - syy)  # the principal axis
    d = np.array([math.cos(ang), math.sin(ang)])
    err = float(np.abs(q[:, 0] * d[1] - q[:, 1] * d[0]).max())
    return c, d, err


def _kasa(q):
    """Kåsa's algebraic circle of centred, scaled points q: (center, radius)."""
    x, y = q[:, 0], q[:, 1]
    z = x * x + y * y
    sxx, syy, sxy = _dot(x, x), _dot(y, y), _dot(x, y)
    sx, sy, k = float(x.sum()), float(y.sum()), float(len(q))
    N = np.array([[sxx, sxy, sx], [sxy, syy, sy], [sx, sy, k]])
    rhs = -np.array([_dot(x, z), _dot(y, z), float(z.sum())])
    try:
        sol = np.linalg.solve(N, rhs)
    except np.linalg.LinAlgError:
        return None, math.inf
    c = np.array([-0.5 * sol[0], -0.5 * sol[1]])
    r2 = float(c @ c) - sol[2]
    if not np.isfinite(r2) or r2 <= 0:
        return None, math.inf
    return c, math.sqrt(r2)


def fit_circle(p: np.ndarray, bound=None):
    """Least squares circle through ``p`` (k, 2), geometric distances:
    (center, radius, largest distance of the points from the circle).

    Kåsa's algebraic fit (x² + y² + Dx + Ey + F = 0 in least squares) on
    centred, scaled coordinates starts Gauss-Newton steps on the residuals
    |P_i − c| − R.  With ``bound`` (mm) the steps are skipped when Kåsa's
    circle is already within it (the answer "within the bound" is then
    settled) or more than ``_SCREEN_SLACK`` bounds off (settled too).

    >>> a = np.linspace(0, 1, 9)
    >>> c, r, e = fit_circle(np.c_[3 + 2 * np.cos(a), -1 + 2 * np.sin(a)])
    >>> [round(float(v), 9) + 0.0 for v in c], round(float(r), 9), bool(e < 1e-12)
    ([3.0, -1.0], 2.0, True)
    """
    m = p.mean(axis=0)
    q = p - m
    s = float(np.abs(q).max()) or 1.0
    q = q / s
    c, r = _kasa(q)
    if c is None:
        return m, math.inf, math.inf
    err = float(np.abs(np.hypot(q[:, 0] - c[0], q[:, 1] - c[1]) - r).max()) * s
    if bound is not None and (err <= bound or err > _SCREEN_SLACK * bound):
        return m + c * s, r * s, err
    x, y = q[:, 0], q[:, 1]
    for _ in range(_GN_STEPS):
        u, v = x - c[0], y - c[1]
        d = np.hypot(u, v)
        if (d == 0).any():
            break
        u, v = u / d, v / d
        res = d - r
        # normal equations of the Jacobian [-u, -v, -1]
        uv = _dot(u, v)
        J = np.array([[_dot(u, u), uv, u.sum()], [uv, _dot(v, v), v.sum()], [u.sum(), v.sum(), float(len(q))]])
        g = np.array([_dot(u, res), _dot(v, res), res.sum()])
        try:
            step = np.linalg.solve(J, g)
        except np.linalg.LinAlgError:
            break
        c = c + step[:2]
        r = r + step[2]
        if abs(step).max() < 1e-15 * max(r, 1.0):
            break
    if not (np.isfinite(c).all() and math.isfinite(r)):
        return m, math.inf, math.inf
    err = float(np.abs(np.hypot(x - c[0], y - c[1]) - r).max()) * s
    return m + c * s, r * s, err


# -- finding runs ---------------------------------------------------------------------


def recognition_bound(points, quantization=None) -> float:
    """The largest distance (mm) points may lie from a recognised line or
    arc: ``BOUND_SHARE`` × the rounding step, at least ``FLOAT_RTOL`` × size."""
    p = np.asarray(points, float)
    size = float(np.hypot(*(p.max(axis=0) - p.min(axis=0))))
    q = float(quantization) if quantization else 0.0
    return max(BOUND_SHARE * q, FLOAT_RTOL * size)


def _test(p, kind, bound, size):
    """The fitted piece of ``p`` as (kind, params, error) when it is within
    the bound (and meaningful when ``size`` is given), else None."""
    if kind == "line":
        c, d, e = fit_line(p)
        if e > bound:
            return None
        return ("line", (c, d), e)
    c, r, e = fit_circle(p, bound)
    if e > bound or not r < MAX_RADIUS_RATIO * size:
        return None
    return ("arc", (c, r), e)


def _longest(p, i, end, kind, bound, size, first=None):
    """Largest j ≤ end with p[i..j] within the bound of one ``kind``, and
    its fit; (None, None) when not even the first ``first`` (default
    ``MIN_POINTS``) points fit."""
    j = i + (first or MIN_POINTS) - 1
    if j > end:
        return None, None
    best = _test(p[i:j + 1], kind, bound, size)
    if best is None:
        return None, None
    good, step = j, max(MIN_POINTS, j - i)
    bad = None
    while True:  # grow by doubling, then halve the gap
        j = min(good + step, end)
        if j == good:
            break
        f = _test(p[i:j + 1], kind, bound, size)
        if f is None:
            bad = j
            break
        good, best = j, f
        step *= 2
    while bad is not None and bad - good > 1:
        j = (good + bad) // 2
        f = _test(p[i:j + 1], kind, bound, size)
        if f is None:
            bad = j
        else:
            good, best = j, f
    return good, best


def _meaningful(p, i, j, fit, bound, size) -> bool:
    kind, params, _ = fit
    if kind == "line":
        return math.dist(p[i], p[j]) >= STRAIGHT_MIN_RATIO * size
    c, r = params
    a = np.unwrap(np.arctan2(p[i:j + 1, 1] - c[1], p[i:j + 1, 0] - c[0]))
    sweep = abs(a[-1] - a[0])
    sag = r * (1.0 - math.cos(min(sweep, math.pi) / 2.0))
    return (sag >= ARC_MIN_SAGITTA * bound and sweep >= MIN_SWEEP
            and sweep <= 2.0 * math.pi + 1e-9)


def _screen(p, bound) -> np.ndarray:
    """Whether the ``MIN_POINTS`` points from each index could start a run:
    within the bound of their least squares line, or within
    ``_SCREEN_SLACK`` bounds of their algebraic (Kåsa) circle; one
    vectorized pass, so free-form points cost no fits one by one."""
    from numpy.lib.stride_tricks import sliding_window_view

    n = len(p)
    ok = np.zeros(max(n - MIN_POINTS + 1, 0), bool)
    for a in range(0, len(ok), 65536):
        b = min(a + 65536, len(ok))
        w = sliding_window_view(p[a:b + MIN_POINTS - 1], MIN_POINTS, axis=0).transpose(0, 2, 1)
        q = w - w.mean(axis=1, keepdims=True)
        s = np.abs(q).max(axis=(1, 2))
        s[s == 0] = 1.0
        q = q / s[:, None, None]
        sxx = (q[..., 0] ** 2).sum(axis=1)
        syy = (q[..., 1] ** 2).sum(axis=1)
        sxy = (q[..., 0] * q[..., 1]).sum(axis=1)
        ang = 0.5 * np.arctan2(2 * sxy, sxx - syy)
        line = np.abs(q[..., 0] * np.sin(ang)[:, None] - q[..., 1] * np.cos(ang)[:, None]).max(axis=1) * s
        A = np.concatenate([q, np.ones(q.shape[:2] + (1,))], axis=2)
        rhs = -(q * q).sum(axis=2)
        N = np.einsum("kia,kib->kab", A, A) + 1e-14 * np.eye(3)
        sol = np.linalg.solve(N, np.einsum("kia,ki->ka", A, rhs)[..., None])[..., 0]
        c = -0.5 * sol[:, :2]
        r = np.sqrt(np.maximum((c * c).sum(axis=1) - sol[:, 2], 0.0))
        circ = np.abs(np.hypot(q[..., 0] - c[:, None, 0], q[..., 1] - c[:, None, 1]) - r[:, None]).max(axis=1) * s
        ok[a:b] = (line <= bound) | (circ <= _SCREEN_SLACK * bound)
    return ok


def _runs(p, bound, size, limit=None):
    """Greedy runs along the open sequence ``p``: list of Piece (lines and
    arcs only), in order, consecutive runs sharing their end point; at most
    ``limit`` of them."""
    n = len(p)
    if n > _COARSE:
        return _refined_runs(p, bound, size, limit)
    out = []
    ok = _screen(p, bound)
    starts = np.flatnonzero(ok)
    # total absolute turning of the polyline up to each point: an arc of at
    # least MIN_SWEEP from i holds every point up to where this has grown by
    # a share of it (the polyline turns by the arc's sweep, less half a step
    # at each end), so one fit of those points tells whether one can start at i
    d = np.diff(p, axis=0)
    turn = np.abs(np.arctan2(d[:-1, 0] * d[1:, 1] - d[:-1, 1] * d[1:, 0], np.einsum("ij,ij->i", d[:-1], d[1:])))
    total = np.concatenate([[0.0, 0.0], np.cumsum(turn)])
    i = 0
    while i <= n - MIN_POINTS:
        if not ok[i]:
            k = np.searchsorted(starts, i)
            if k == len(starts):
                break
            i = int(starts[k])
            continue
        best = None
        j, f = _longest(p, i, n - 1, "line", bound, size)
        tried = j or 0
        if j is not None and _meaningful(p, i, j, f, bound, size):
            best = (j, f)
        # an arc wins only when it reaches clearly farther than the line
        # (a circle fits a straight run too, with a huge radius)
        reach = i + MIN_POINTS - 1 if best is None else min(best[0] + MIN_POINTS // 2, n - 1)
        if best is None:
            reach = max(reach, int(np.searchsorted(total, total[i] + _SWEEP_SHARE * MIN_SWEEP)))
            if reach > n - 1:
                i = n  # no arc can turn far enough from here on
                continue
            if _test(p[i:reach + 1], "arc", bound, size) is None:
                # no arc worth keeping starts here; step a sixteenth of the way
                i = max(i + 1, tried - MIN_POINTS, i + (reach - i) // 16)
                continue
        if best is None or (reach > best[0] and _test(p[i:reach + 1], "arc", bound, size) is not None):
            j, f = _longest(p, i, n - 1, "arc", bound, size)
            tried = max(tried, j or 0)
            if j is not None and _meaningful(p, i, j, f, bound, size) and (best is None or j > best[0]):
                best = (j, f)
        if best is None:
            # nothing worth keeping from i: a run that fits but is too short
            # (a free-form curve is a circle over a short stretch) is skipped
            # but for its last points, so free-form points cost O(n / run)
            # fits; a drawn piece starting inside it is found from there and
            # its start moved back below
            i = max(i + 1, tried - MIN_POINTS) if tried else i + 1
            continue
        j, (kind, params, err) = best
        # the earliest start that still fits
        i, g = _earliest_start(p, out[-1].last if out else 0, i, j, kind, bound, size)
        if g is not None:
            params, err = g[1], g[2]
        if kind == "line":
            out.append(Piece("line", i, j, line=(tuple(params[0]), tuple(params[1])), error=err))
        else:
            out.append(Piece("arc", i, j, center=tuple(params[0]), radius=float(params[1]), error=err))
        if limit is not None and len(out) >= limit:
            break
        i = j
    return out


def _earliest_start(p, lo, hi, j, kind, bound, size):
    """Bisection for the earliest start in [lo, hi] from which the points up
    to ``j`` still fit one ``kind``; ``hi`` fits.  Returns (start, the fit
    there, or None when ``hi`` itself is kept)."""
    fit = None
    while hi > lo:
        mid = (lo + hi) // 2
        g = _test(p[mid:j + 1], kind, bound, size)
        if g is None:
            lo = mid + 1
        else:
            hi, fit = mid, g
    return hi, fit


def _refined_runs(p, bound, size, limit):
    """Runs of a long sequence: found on every m-th point (at most
    ``_COARSE`` of them), then fitted again on all points from where the
    coarse run starts, its start moved back as far as the points allow."""
    n = len(p)
    m = math.ceil(n / _COARSE)
    idx = np.unique(np.r_[np.arange(0, n, m), n - 1])
    out = []
    prev = 0
    for cr in _runs(p[idx], bound, size, limit):
        i0, hint = max(int(idx[cr.first]), prev), int(idx[cr.last])
        kind = cr.kind
        j, f = _longest(p, i0, n - 1, kind, bound, size, first=max(MIN_POINTS, (hint - i0) // 2 + 1))
        if j is None:
            j, f = _longest(p, i0, n - 1, kind, bound, size)
        if j is None or not _meaningful(p, i0, j, f, bound, size):
            continue
        # the earliest start that still fits
        i0, g = _earliest_start(p, max(prev, i0 - m), i0, j, kind, bound, size)
        if g is not None:
            f = g
        kind, params, err = f
        if kind == "line":
            out.append(Piece("line", i0, j, line=(tuple(params[0]), tuple(params[1])), error=err))
        else:
            out.append(Piece("arc", i0, j, center=tuple(params[0]), radius=float(params[1]), error=err))
        prev = j
    return out


def find_pieces(points, closed: bool, bound: float):
    """Split an outline into recognised lines and arcs and free-form stretches.

    Parameters
    ----------
    points : (n, 2) cleaned points, mm (closed: the first point not repeated).
    closed : whether the outline closes.
    bound : largest distance (mm) of a run's points from its line or circle.

    Returns
    -------
    (start, pieces)
        ``start``: closed outlines are read from point ``start`` round to it
        again (a seam at a junction); pieces index that rotated sequence
        of n + 1 points (open: the points as given, start 0).  Pieces
        cover the sequence end to end; consecutive pieces share a point.
        A closed outline on one circle is one "arc" piece of the whole loop.

    >>> a = np.linspace(0, 2 * np.pi, 40, endpoint=False)
    >>> start, ps = find_pieces(np.c_[np.cos(a), np.sin(a)], True, 1e-9)
    >>> [(q.kind, round(q.radius, 9)) for q in ps]
    [('arc', 1.0)]
    """
    p = np.asarray(points, float)
    n = len(p)
    size = float(np.hypot(*(p.max(axis=0) - p.min(axis=0))))
    if n < MIN_POINTS or size == 0.0:
        return 0, [Piece("free", 0, n if closed else n - 1)]
    if closed:
        c, r, e = fit_circle(p)
        if e <= bound and r < MAX_RADIUS_RATIO * size:
            return 0, [Piece("arc", 0, n, center=tuple(c), radius=float(r), error=e)]
        first = _runs(np.vstack([p, p[:1]]), bound, size, limit=2)
        if not first:
            return 0, [Piece("free", 0, n)]
        # a seam where a run ends (a junction or a corner), so no run is cut by it
        start = first[0].last % n if len(first) == 1 or first[0].first > 0 else first[1].first % n
        q = np.vstack([p[start:], p[:start], p[start:start + 1]])
        runs = _runs(q, bound, size)
        total = n
    else:
        start, q, total = 0, p, n - 1
        runs = _runs(p, bound, size)
    pieces, at = [], 0
    for k, r_ in enumerate(runs):
        if r_.first > at and not (k > 0 and _gap_fits(q, runs[k - 1], r_, bound)):
            pieces.append(Piece("free", at, r_.first))
        pieces.append(r_)
        at = r_.last
    if at < total and not (closed and runs and _gap_fits(q, runs[-1], runs[0], bound, total)):
        pieces.append(Piece("free", at, total))
    return start, pieces


def _gap_fits(q, a, b, bound, wrap=0):
    """Whether the points between runs a and b (b after a; ``wrap``: b's
    indices continue after index ``wrap`` of the closed sequence) each lie
    within the bound of a or of b: then a and b meet directly."""
    inner = q[a.last + 1:(b.first + wrap)] if wrap else q[a.last + 1:b.first]
    if wrap:
        inner = np.vstack([q[a.last + 1:wrap], q[:b.first]]) if b.first > 0 else q[a.last + 1:wrap]
    if len(inner) and not (np.minimum(_distances(a, inner), _distances(b, inner)) <= bound).all():
        return False
    # and the two meet there (touch or cross): two arcs with a straight side of one
    # interval between them (a slot sampled only on its ends) do not
    x0, x1 = q[a.last], q[b.first]
    h = max(math.dist(q[a.last], q[a.last - 1]), math.dist(q[b.first], q[b.first + 1]))
    r = min([pc.radius for pc in (a, b) if pc.kind == "arc"] or [0.0])
    reach = math.dist(x0, x1) + 3.0 * h + 4.0 * math.sqrt(r * bound) + 20.0 * bound
    x = 0.5 * (x0 + x1)
    t = _touch(a, b, 2.0 * bound)
    if t is not None and math.dist(t, x) <= reach:
        return True
    return any(math.dist(c, x) <= reach for c in _meet(a, b))


def _distances(piece, x):
    """Distances of points x (k, 2) from a line or circle piece."""
    if piece.kind == "line":
        c, d = (np.asarray(v, float) for v in piece.line)
        r = x - c
        return np.abs(r[:, 0] * d[1] - r[:, 1] * d[0])
    v = x - np.asarray(piece.center, float)
    return np.abs(np.hypot(v[:, 0], v[:, 1]) - piece.radius)


def describe(pieces, *, scale: float = 1.0, decimals: int = 3) -> str:
    """'4 lines, 4 arcs R8.000': radii divided by ``scale`` (mm per unit of
    the report: 25.4 for inch, with ``decimals`` 4), each value once."""
    lines = sum(1 for q in pieces if q.kind == "line")
    return describe_counts(lines, [q.radius for q in pieces if q.kind == "arc"], scale=scale, decimals=decimals)


def describe_counts(lines: int, radii, *, scale: float = 1.0, decimals: int = 3) -> str:
    """:func:`describe` from the counts: ``lines`` and the arcs' ``radii`` (mm)."""
    parts = []
    if lines:
        parts.append(f"{lines} line{'s' if lines != 1 else ''}")
    if len(radii):
        shown = sorted({f"{r / scale:.{decimals}f}" for r in radii}, key=float)
        parts.append(f"{len(radii)} arc{'s' if len(radii) != 1 else ''} " + ", ".join(f"R{r}" for r in shown))
    return ", ".join(parts) if parts else "no lines or arcs"


# -- the contour ----------------------------------------------------------------------


def _project(piece, x):
    x = np.asarray(x, float)
    if piece.kind == "line":
        c, d = (np.asarray(v, float) for v in piece.line)
        return c + float((x - c) @ d) * d
    c = np.asarray(piece.center, float)
    v = x - c
    return c + piece.radius * v / math.hypot(v[0], v[1])


def _meet(a, b):
    """Points where pieces a and b (lines or circles) cross."""
    if a.kind == "arc" and b.kind == "line":
        a, b = b, a
    if a.kind == "line" and b.kind == "line":
        (c1, d1), (c2, d2) = ([np.asarray(v, float) for v in x.line] for x in (a, b))
        den = d1[0] * d2[1] - d1[1] * d2[0]
        if abs(den) < 1e-15:
            return []
        w = c2 - c1
        t = (w[0] * d2[1] - w[1] * d2[0]) / den
        return [c1 + t * d1]
    if a.kind == "line":
        c, d = (np.asarray(v, float) for v in a.line)
        o, r = np.asarray(b.center, float), b.radius
        f = c + float((o - c) @ d) * d  # foot of the center
        h2 = r * r - float((f - o) @ (f - o))
        if h2 < 0:
            return []
        h = math.sqrt(h2)
        return [f - h * d, f + h * d]
    o1, r1, o2, r2 = np.asarray(a.center, float), a.radius, np.asarray(b.center, float), b.radius
    v = o2 - o1
    dd = math.hypot(v[0], v[1])
    if dd == 0 or dd > r1 + r2 or dd < abs(r1 - r2):
        return []
    x = (dd * dd + r1 * r1 - r2 * r2) / (2 * dd)
    h = math.sqrt(max(r1 * r1 - x * x, 0.0))
    u = v / dd
    m = o1 + x * u
    nrm = np.array([-u[1], u[0]])
    return [m - h * nrm, m + h * nrm]


def _touch(a, b, tol):
    """The point where a and b touch (are tangent) within ``tol``, or None."""
    if a.kind == "line" and b.kind == "line":
        return None
    if a.kind == "arc" and b.kind == "arc":
        o1, r1, o2, r2 = np.asarray(a.center, float), a.radius, np.asarray(b.center, float), b.radius
        v = o2 - o1
        dd = math.hypot(v[0], v[1])
        if dd == 0:
            return None
        u = v / dd
        if abs(dd - (r1 + r2)) <= tol:
            return o1 + r1 * u
        if abs(dd - abs(r1 - r2)) <= tol:
            return o1 + r1 * u if r1 >= r2 else o1 - r1 * u
        return None
    ln, ci = (a, b) if a.kind == "line" else (b, a)
    c, d = (np.asarray(v, float) for v in ln.line)
    o = np.asarray(ci.center, float)
    f = c + float((o - c) @ d) * d
    if abs(math.dist(f, o) - ci.radius) <= tol:
        return f
    return None


def _join(a, b, x, reach, tol):
    """Where pieces a and b (lines or arcs sharing data point ``x``) meet:
    their tangent point when they touch within ``tol``, else their crossing
    nearest ``x``; the data point itself when neither lies within ``reach``."""
    t = _touch(a, b, tol)
    if t is not None and math.dist(t, x) <= reach:
        return t
    cands = [c for c in _meet(a, b) if math.dist(c, x) <= reach]
    if cands:
        return min(cands, key=lambda c: math.dist(c, x))
    return np.asarray(x, float)


def _arc_sweep(piece, q, s, e):
    """Signed sweep from s to e around the piece's circle, the way the data go."""
    c = np.asarray(piece.center, float)
    a = np.unwrap(np.arctan2(q[piece.first:piece.last + 1, 1] - c[1], q[piece.first:piece.last + 1, 0] - c[0]))
    data = a[-1] - a[0]
    base = math.atan2(e[1] - c[1], e[0] - c[0]) - math.atan2(s[1] - c[1], s[0] - c[0])
    k = round((data - base) / (2 * math.pi))
    return base + 2 * math.pi * k


def _arc_pieces(seg, radius_error):
    """Cubic pieces of an arc whose ends may lie a little (ε, within the
    bound) off its circle, where a tangent neighbour touches it: the radius
    blends from R + ε₀ at the start to R + ε₁ at the end with the smooth step
    w(τ) = 1 − 3τ² + 2τ³ (w′ = 0 at both ends, so the tangents there stay
    those of the circle, exactly the neighbours').  The radius of curvature
    moves by about 6ε/Θ² (Θ the sweep) instead of a kink in one piece.
    Same piece count and handles as :func:`pathgen.drawing.shape_contour`'s arcs."""
    from .drawing import _arc_pieces as drawn, _hermite

    cf, h = drawn(seg, radius_error)
    k = cf.shape[1]
    c, R, sweep = np.asarray(seg.center, float), seg.radius, seg.sweep
    e0 = math.dist(seg.start, c) - R
    e1 = math.dist(seg.end, c) - R
    if e0 == 0.0 and e1 == 0.0:
        return cf, h
    a0 = math.atan2(seg.start[1] - c[1], seg.start[0] - c[0])
    phi = sweep / k
    tau = np.arange(k + 1) / k
    w = 1.0 - 3.0 * tau**2 + 2.0 * tau**3
    dw = (-6.0 * tau + 6.0 * tau**2) / sweep  # dw/dθ
    rho = R + e0 * w + e1 * (1.0 - w)
    drho = (e0 - e1) * dw
    ang = a0 + phi * np.arange(k + 1)
    u = np.c_[np.cos(ang), np.sin(ang)]
    up = np.c_[-np.sin(ang), np.cos(ang)]
    pts = c + rho[:, None] * u
    pts[0], pts[-1] = seg.start, seg.end
    dP = drho[:, None] * u + rho[:, None] * up  # dP/dθ
    sign = 1.0 if phi > 0 else -1.0
    mag = 4.0 * math.tan(abs(phi) / 4.0) / abs(phi)
    tan = mag * sign * dP / R
    hh = h[0]
    coef = np.stack([_hermite(pts[i], pts[i + 1], tan[i], tan[i + 1], hh) for i in range(k)], axis=1)
    return coef, h


def _tangent_at(piece, x, forward_sign):
    if piece.kind == "line":
        d = np.asarray(piece.line[1], float)
        return d * forward_sign
    v = np.asarray(x, float) - np.asarray(piece.center, float)
    t = np.array([-v[1], v[0]]) / math.hypot(v[0], v[1])
    return t * forward_sign


def pieces_contour(points, closed: bool, start: int, pieces, bound: float, *, corners=(),
                   end: str = "not-a-knot"):
    """The contour of an outline split by :func:`find_pieces`, mm.

    Lines are exact straight cubic pieces, arcs the cubic arc pieces of
    :func:`pathgen.drawing.shape_contour` (radius of curvature within
    ``ARC_RADIUS_ERROR`` of the fitted radius), free-form stretches
    interpolating cubic splines through their points (chord-length
    parameter) tangent to the lines and arcs they meet, except at the
    point indices ``corners`` (into ``points``), where they take ``end``.

    ``contour.points`` are the given points; ``info`` holds "recognised"
    (counts, radii, the bound, a sentence), "corners", "straight_runs"
    (break indices of the lines), "max_residual" and "rms_residual" (the
    points' distances from their pieces, mm).
    """
    from .drawing import ARC_RADIUS_ERROR, Segment
    from .outline import _kinks, _piece_moments
    from .spline import power_form
    from .spline import Contour

    p = np.asarray(points, float)
    n = len(p)
    q = np.vstack([p[start:], p[:start], p[start:start + 1]]) if closed else p
    total = n if closed else n - 1
    spacing = float(np.median(np.hypot(*np.diff(q, axis=0).T)))
    reach = max(3.0 * spacing, 20.0 * bound)
    tol = 2.0 * bound
    corner_set = {(int(i) - start) % n for i in corners} if closed else {int(i) for i in corners}
    if closed:
        corner_set |= {n for i in corner_set if i == 0}
    m = len(pieces)
    # the ends of every piece: junction points
    ends = [[None, None] for _ in range(m)]
    pairs = range(m) if closed else range(m - 1)
    for k in pairs:
        a, b = pieces[k], pieces[(k + 1) % m]
        x = q[a.last]
        if a.kind != "free" and b.kind != "free":
            y = q[b.first]
            x = 0.5 * (x + y)
            # tangent pieces share a stretch of points within the bound of
            # both, about √(8·R·bound) long: where they touch lies within it
            r = min([pc.radius for pc in (a, b) if pc.kind == "arc"] or [0.0])
            j = _join(a, b, x, max(reach, math.dist(q[a.last], y)) + 4.0 * math.sqrt(r * bound), tol)
        elif a.kind != "free":
            j = _project(a, x)
        elif b.kind != "free":
            j = _project(b, x)
        else:
            j = x
        ends[k][1] = j
        ends[(k + 1) % m][0] = j
    for k, pc in enumerate(pieces):
        if ends[k][0] is None:
            ends[k][0] = q[pc.first] if pc.kind == "free" else _project(pc, q[pc.first])
        if ends[k][1] is None:
            ends[k][1] = q[pc.last] if pc.kind == "free" else _project(pc, q[pc.last])
    # direction of travel along each primitive, and the arcs' sweeps
    segs = []
    for k, pc in enumerate(pieces):
        s, e = (np.asarray(v, float) for v in ends[k])
        if pc.kind == "line":
            segs.append(Segment("line", tuple(s), tuple(e)))
        elif pc.kind == "arc":
            if len(pieces) == 1 and closed:
                sweep = _arc_sweep(pc, q, s, s)
                sweep = math.copysign(2 * math.pi, sweep)
                e = s
            else:
                sweep = _arc_sweep(pc, q, s, e)
            segs.append(Segment("arc", tuple(s), tuple(e), tuple(pc.center), pc.radius, sweep))
        else:
            segs.append(None)

    def tangent(k, at_end):
        sg = segs[k]
        t0, t1 = sg.tangents()
        return t1 if at_end else t0

    coefs, hs, residual = [], [], np.zeros(total + 1)
    line_breaks = []
    at_break = 0
    for k, pc in enumerate(pieces):
        sg = segs[k]
        if pc.kind == "line":
            L = sg.length
            d = np.subtract(sg.end, sg.start) / L
            coefs.append(np.stack([np.zeros(2), np.zeros(2), d, np.asarray(sg.start, float)])[:, None, :])
            hs.append(np.array([L]))
            line_breaks.append([at_break, at_break + 1])
            c, dd = (np.asarray(v, float) for v in pc.line)
            r = q[pc.first:pc.last + 1] - c
            residual[pc.first:pc.last + 1] = np.abs(r[:, 0] * dd[1] - r[:, 1] * dd[0])
        elif pc.kind == "arc":
            cf, h = _arc_pieces(sg, ARC_RADIUS_ERROR)
            coefs.append(cf)
            hs.append(h)
            v = q[pc.first:pc.last + 1] - np.asarray(pc.center)
            residual[pc.first:pc.last + 1] = np.abs(np.hypot(v[:, 0], v[:, 1]) - pc.radius)
        else:
            y = q[pc.first:pc.last + 1].copy()
            y[0], y[-1] = ends[k]
            t = np.concatenate([[0.0], np.cumsum(np.hypot(*np.diff(y, axis=0).T))])
            prev = k - 1 if (k > 0 or closed) else None
            nxt = (k + 1) % m if (k < m - 1 or closed) else None
            v0 = (t[1] - t[0]) and math.hypot(*(y[1] - y[0])) / (t[1] - t[0])
            v1 = math.hypot(*(y[-1] - y[-2])) / (t[-1] - t[-2])
            c0 = end if prev is None or segs[prev] is None or pc.first in corner_set \
                else tangent(prev, True) * v0
            c1 = end if nxt is None or segs[nxt] is None or pc.last in corner_set \
                else tangent(nxt, False) * v1
            if len(y) == 2 and isinstance(c0, str) and isinstance(c1, str):
                c0 = c1 = "natural"
            M = _piece_moments(t, y, c0, c1)
            coefs.append(power_form(t, y, M))
            hs.append(np.diff(t))
        at_break += len(hs[-1])
    coef = np.concatenate(coefs, axis=1)
    h = np.concatenate(hs)
    breaks = np.concatenate([[0.0], np.cumsum(h)])
    kinks = sorted(_kinks(breaks, coef, closed))
    if closed and len(pieces) == 1 and pieces[0].kind == "arc":
        kinks = []
    c = Contour(breaks, coef, closed, p, corners=tuple(kinks), end="periodic" if closed else end,
                param="arc")
    resid = residual[:n] if closed else residual
    lines = sum(1 for x in pieces if x.kind == "line")
    arcs = [float(x.radius) for x in pieces if x.kind == "arc"]
    c.info.update({
        "recognised": {"lines": lines, "arcs": len(arcs), "radii": arcs,
                       "free": sum(1 for x in pieces if x.kind == "free"), "bound": bound,
                       "text": describe(pieces)},
        "corners": list(kinks), "straight_runs": line_breaks,
        "max_residual": float(resid.max()), "rms_residual": float(np.sqrt(np.mean(resid ** 2))),
    })
    return c
