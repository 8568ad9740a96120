"""Straight edges, and arcs that are lines in all but name, are written as lines.

The straight edges of a contour (``contour.info["straight_runs"]``, exact
lines of the fit) and their offsets are lines: :func:`arcs_and_lines`
writes each as one line and fits arcs to the stretches between them.

An arc fitted along a nearly straight stretch can come out with a radius
of many metres over a chord of a few millimetres (a 162 m radius over
30 mm bulges 0.0007 mm).  Many controllers accept only a few integer
digits in I and J (common practice), and a drafter cannot use such an arc.
So an arc is replaced by its chord when

* its radius is more than :data:`MAX_RADIUS_RATIO` (1000) times its chord,
  or
* its bulge (sagitta, R(1 − cos(θ/2)) for a sweep θ) is below
  :data:`LINE_BULGE_SHARE` (5 %) of the tolerance,

and the sweep is below half a turn.  The chord's deviation from the curve
is measured afterwards (:func:`pathgen.path.measure.chain_deviation`); a
chord that would stray beyond the tolerance is split at points of the arc
(each half bulges a quarter as much) until it measures within it.
"""

from __future__ import annotations

import numpy as np

from .measure import Chain, offset_side, arc_geometry, chain_deviation, offset_points
from .model import LINE

__all__ = ["straighten", "straight_spans", "arcs_and_lines", "MAX_RADIUS_RATIO", "LINE_BULGE_SHARE"]

#: An arc whose radius is more than this many times its chord is a line.
MAX_RADIUS_RATIO = 1000.0
#: An arc whose bulge is below this share of the tolerance is a line.
LINE_BULGE_SHARE = 0.05
_MAX_SPLITS = 6  # up to 64 lines for one arc
_DENSITY = 4  # samples per span, times the default: noisy curves wiggle between samples


def _nearest_t(contour, d, point, t0, t1, samples=129):
    """The parameter in [t0, t1] whose offset point is nearest ``point``."""
    t = np.linspace(t0, t1, samples)
    q = offset_points(contour, t, d)
    i = int(np.argmin(np.hypot(*(q - point).T)))
    lo, hi = t[max(i - 1, 0)], t[min(i + 1, samples - 1)]
    t = np.linspace(lo, hi, samples)
    q = offset_points(contour, t, d)
    return float(t[int(np.argmin(np.hypot(*(q - point).T)))])


def straighten(contour, chain: Chain, d: float, tol: float):
    """Replace near-straight arcs of ``chain`` by lines, measured.

    Parameters
    ----------
    contour : Contour (mm).
    chain : Chain with finite spans for the arcs to consider.
    d : signed offset along the left normal, mm.
    tol : tolerance, mm: every new line measures within it.

    Returns
    -------
    (chain, deviation): the new chain and the largest measured deviation of
    its new lines (0 when nothing changed), mm.

    >>> import numpy as np
    >>> from pathgen.spline import fit
    >>> x = np.linspace(0.0, 30.0, 7)
    >>> c = fit(np.c_[x, 1e-6 * np.sin(x / 10)])
    >>> s, e = c(np.array([0.0])), c(np.array([c.breaks[-1]]))
    >>> ch = Chain(np.array([2], np.int8), s, e, np.array([[15.0, -1.6e5]]), np.array([0.0]),
    ...            np.array([c.breaks[-1]]))
    >>> new, dev = straighten(c, ch, 0.0, 0.001)
    >>> new.kind.tolist(), bool(dev <= 0.001)
    ([1], True)
    """
    k = len(chain)
    if k == 0:
        return chain, 0.0
    arcs = chain.kind != LINE
    finite = np.isfinite(chain.t0) & np.isfinite(chain.t1)
    cand = np.flatnonzero(arcs & finite)
    if not len(cand):
        return chain, 0.0
    s, e, c = chain.start[cand], chain.end[cand], chain.center[cand]
    r, _, sw = arc_geometry(s, e, c, chain.kind[cand] != 2)
    chord = np.hypot(*(e - s).T)
    sweep = np.abs(sw)
    bulge = r * (1.0 - np.cos(0.5 * sweep))
    straight = (sweep < np.pi) & ((r > MAX_RADIUS_RATIO * chord) | (bulge < LINE_BULGE_SHARE * tol))
    cand = cand[straight]
    if not len(cand):
        return chain, 0.0
    kind = chain.kind.copy()
    center = chain.center.copy()
    kind[cand] = LINE
    center[cand] = 0.0
    lines = Chain(kind[cand], chain.start[cand], chain.end[cand], center[cand], chain.t0[cand], chain.t1[cand])
    dev = chain_deviation(contour, d, lines, tol, density=_DENSITY)
    ok = dev <= tol
    worst = float(dev[ok].max(initial=0.0))
    pieces = {}  # index in chain -> replacement Chain of several lines
    for j in np.flatnonzero(~ok):
        i = int(cand[j])
        got = _split(contour, chain.take([i]), d, tol)
        if got is None:
            kind[i] = chain.kind[i]  # keep the arc: no split of its chord measures within tol
            center[i] = chain.center[i]
            continue
        pieces[i], dv = got
        worst = max(worst, dv)
    new = Chain(kind, chain.start.copy(), chain.end.copy(), center, chain.t0.copy(), chain.t1.copy())
    if pieces:
        parts, last = [], 0
        for i in sorted(pieces):
            parts.append(new.take(np.arange(last, i)))
            parts.append(pieces[i])
            last = i + 1
        parts.append(new.take(np.arange(last, k)))
        new = Chain.concat(parts)
    return new, worst


def _split(contour, arc: Chain, d, tol):
    """The arc as 2, 4, … lines through its points, measured; None if none fits."""
    s, e, c = arc.start[0], arc.end[0], arc.center[0]
    r, a0, sw = arc_geometry(s[None], e[None], c[None], np.array([arc.kind[0] != 2]))
    t0, t1 = float(arc.t0[0]), float(arc.t1[0])
    for level in range(1, _MAX_SPLITS + 1):
        n = 2**level
        f = np.arange(n + 1) / n
        ang = a0[0] + sw[0] * f
        pts = np.column_stack([c[0] + r[0] * np.cos(ang), c[1] + r[0] * np.sin(ang)])
        pts[0], pts[-1] = s, e
        ts = np.empty(n + 1)
        ts[0], ts[-1] = t0, t1
        for m in range(1, n):
            ts[m] = _nearest_t(contour, d, pts[m], min(t0, t1), max(t0, t1))
        lines = Chain(np.full(n, LINE, np.int8), pts[:-1].copy(), pts[1:].copy(), np.zeros((n, 2)),
                      ts[:-1].copy(), ts[1:].copy())
        dev = chain_deviation(contour, d, lines, tol, density=_DENSITY)
        if dev.max() <= tol:
            return lines, float(dev.max())
    return None


def straight_spans(contour) -> list:
    """Parameter intervals [t0, t1] of the contour's straight edges."""
    info = getattr(contour, "info", None) or {}
    b = contour.breaks
    return [(float(b[i]), float(b[j])) for i, j in info.get("straight_runs") or () if 0 <= i < j < len(b)]


def _pieces(contour, a: float, b: float, spans):
    """[a, b] cut into (t0, t1, straight) pieces at the straight edges."""
    period = contour.breaks[-1] - contour.breaks[0] if contour.closed else 0.0
    shifts = (-1, 0, 1, 2) if contour.closed else (0,)
    eps = 1e-7 * max(1.0, b - a)
    cuts = sorted((max(s0 + k * period, a), min(s1 + k * period, b)) for s0, s1 in spans for k in shifts)
    cuts = [(lo, hi) for lo, hi in cuts if hi - lo > eps]
    out, t = [], a
    for lo, hi in cuts:
        if lo - t > eps:
            out.append((t, lo, False))
        else:
            lo = t  # a sliver of curve before the edge: the line takes it
        out.append((lo, hi, True))
        t = hi
    if b - t > eps:
        out.append((t, b, False))
    elif out:
        out[-1] = (out[-1][0], b, out[-1][2])
    return out or [(a, b, False)]


def arcs_and_lines(contour, window, d: float, tol: float, spans, fit_arcs):
    """One window: its straight edges as lines, arcs between them.

    ``fit_arcs(contour, windows, d, tol)`` -> (chain, deviation, stats) fits
    the curved stretches; near-straight arcs become lines
    (:func:`straighten`).  Returns (chain, deviation, stats), measured.
    """
    a, b = float(window[0]), float(window[1])
    parts, dev, stats = [], 0.0, None
    for t0, t1, straight in _pieces(contour, a, b, spans):
        if straight:
            s = offset_side(contour, np.array([t0]), d, left=False)
            e = offset_side(contour, np.array([t1]), d, left=True)
            chain = Chain(np.array([LINE], np.int8), s, e, np.zeros((1, 2)), np.array([t0]), np.array([t1]))
            dv = float(chain_deviation(contour, d, chain, tol, density=_DENSITY).max())
            st = {"spans": 1, "merged_spans": 0, "boost_rounds": 0, "split_rounds": 0}
        else:
            chain, dv, st = fit_arcs(contour, np.array([[t0, t1]]), d, tol)
            chain, dv_lines = straighten(contour, chain, d, tol)
            dv = max(dv, dv_lines)
        parts.append(chain)
        dev = max(dev, dv)
        if stats is None:
            stats = dict(st)
        else:
            for key in stats:
                summed = key in ("spans", "merged_spans")
                stats[key] = stats[key] + st[key] if summed else max(stats[key], st[key])
    for prev, nxt in zip(parts[:-1], parts[1:]):
        # consecutive pieces meet at the same point of q, evaluated two ways: make it one point
        if len(prev) and len(nxt) and np.hypot(*(nxt.start[0] - prev.end[-1])) <= 1e-9 * (1.0 + abs(d)):
            nxt.start[0] = prev.end[-1]
    return Chain.concat(parts), dev, stats
