"""The arc fit's work follows the arcs it writes, not part size ÷ tolerance.

One invented 100-point ellipse (80 x 50 mm) scaled ×1 and ×100 is fitted
with arcs at the same tolerance.  The samples the fit tests arcs against
are counted (never timed), and the arcs written are measured two-sided
against a dense sampling of the curve, independently of the fit's own
measurement.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.spatial import cKDTree

from conftest import ellipse_points
from pathgen.path import arcfit
from pathgen.path.measure import sample_chain
from pathgen.spline import fit

TOL = 0.01


def _fit_counted(scale, monkeypatch):
    contour = fit(ellipse_points(40.0 * scale, 25.0 * scale, 100), closed=True)
    lo, hi = contour.domain
    seen = []
    real = arcfit._samples

    def counted(*args):
        out = real(*args)
        seen.append(len(out[0]))
        return out

    monkeypatch.setattr(arcfit, "_samples", counted)
    chain, dev, _ = arcfit.band_arcs(contour, np.array([[lo, hi]]), 0.0, TOL)
    monkeypatch.undo()
    return contour, chain, dev, seen


def _to_polyline(x, verts):
    """Distance from points x to the closed polyline through verts (no
    repeated end): the nearest vertex (scipy.spatial.cKDTree) and the
    segments on both sides of it (point-to-segment distance, plain vector
    geometry)."""
    n = len(verts)
    _, i = cKDTree(verts).query(x)
    best = np.hypot(*(x - verts[i]).T)
    for j in ((i - 1) % n, i):
        a, ab = verts[j], verts[(j + 1) % n] - verts[j]
        u = np.clip(np.einsum("ij,ij->i", x - a, ab) / np.einsum("ij,ij->i", ab, ab), 0.0, 1.0)
        best = np.minimum(best, np.hypot(*(x - a - u[:, None] * ab).T))
    return best


def _two_sided(contour, chain):
    """Largest distance curve -> arcs and arcs -> curve between two dense
    polylines, with the chord bound of each added: a step of length h on
    radius R strays from its chord by the sagitta h²/(8R) (the sagitta of a
    circular arc; common practice)."""
    lo, hi = contour.domain
    t = np.linspace(lo, hi, 200_001)
    q = contour(t)[:-1]  # closed: the last point is the first
    step = float(np.max(np.hypot(*np.diff(q, axis=0).T)))
    r_min = float(1.0 / np.max(np.abs(contour.curvature(t))))
    p, _, _ = sample_chain(chain, np.full(len(chain), 2001))
    p = p[np.r_[True, np.any(np.diff(p, axis=0) != 0, axis=1)]]  # joints once
    p = p[:-1] if np.all(p[-1] == p[0]) else p
    pstep = float(np.max(np.hypot(*np.diff(p, axis=0).T)))
    measured = max(_to_polyline(q, p).max(), _to_polyline(p, q).max())
    # the arcs' radii stay within a factor 2 of the curve's here
    slack = step**2 / (8.0 * r_min) + pstep**2 / (4.0 * r_min)
    return float(measured), slack


def test_samples_of_the_arc_fit_follow_the_arcs_not_the_size(monkeypatch):
    # For a shape scaled by s, |κ'| goes as s^-2, so an arc of error e spans
    # about (e/|κ'|)^(1/3) ∝ s^(2/3) and the arcs needed grow as s^(1/3)
    # (arc error about |κ'|L³/48 with the curvature matched at the middle, from
    # memory; arc splines have approximation order 3: Šír, Feichtinger &
    # Jüttler, "Approximating curves and their offsets using biarcs and
    # Pythagorean hodograph quintics", Computer-Aided Design 38(6), 2006).
    # Samples sized by the sagitta alone would grow as s^(1/2) (10×), and a
    # step capped at 20·tol as s (the ×100 ellipse took 102 000 samples).
    _, chain1, _, n1 = _fit_counted(1.0, monkeypatch)
    _, chain100, _, n100 = _fit_counted(100.0, monkeypatch)
    growth_arcs = 100.0 ** (1.0 / 3.0)  # 4.64
    assert max(n100) <= 2.0 * growth_arcs * max(n1), (n1, n100)
    # and the arcs themselves grow no faster than that law allows
    assert len(chain100) <= 2.0 * growth_arcs * len(chain1), (len(chain1), len(chain100))
    # samples per arc written stay within a small factor
    assert max(n100) / len(chain100) <= 3.0 * max(n1) / len(chain1)


@pytest.mark.parametrize("scale", [1.0, 100.0])
def test_scaled_arcs_keep_the_tolerance_both_ways(scale, monkeypatch):
    contour, chain, dev, _ = _fit_counted(scale, monkeypatch)
    assert dev <= TOL
    measured, slack = _two_sided(contour, chain)
    assert measured <= TOL + slack, (measured, slack)
    assert slack < 0.05 * TOL


def test_replay_polyline_follows_the_sagitta_not_the_size():
    # The replay measures the written program against a polyline of the
    # curve whose chords stray by at most 0.5 % of the tolerance.  The
    # fewest chords for sagitta e number about ∫√(κ/(8e)) ds (Levien,
    # "Flattening quadratic Béziers", 2019; McClure & Vitale, "Polygonal
    # approximation of plane convex bodies", J. Math. Anal. Appl. 51, 1975),
    # which for a shape scaled by s grows as √s: 10× for ×100, where a
    # fixed 0.25 mm spacing grew 50× (82 000 vertices on the 8 m ellipse).
    from pathgen.verify.replay import tool_center_polyline

    counts = {}
    for scale in (1.0, 100.0):
        contour = fit(ellipse_points(40.0 * scale, 25.0 * scale, 100), closed=True)
        pts, joined = tool_center_polyline(contour, 0.0, TOL)
        counts[scale] = len(pts)
        # every chord within its sagitta budget: the midpoint of each chord
        # lies within 0.5 % of the tolerance (plus rounding) of the curve,
        # measured against a dense polyline of the curve (see _to_polyline)
        lo, hi = contour.domain
        dense = contour(np.linspace(lo, hi, 400_001))[:-1]
        mid = 0.5 * (pts[1:] + pts[:-1])[joined]
        step = float(np.max(np.hypot(*np.diff(dense, axis=0).T)))
        kmax = float(np.max(np.abs(contour.curvature(np.linspace(lo, hi, 100_001)))))
        assert _to_polyline(mid, dense).max() <= 0.005 * TOL + step**2 * kmax / 8.0 + 1e-9 * scale
    assert counts[100.0] <= 2.0 * 10.0 * counts[1.0], counts


def test_clearance_samples_of_a_large_gentle_path_follow_its_curvature(monkeypatch):
    # The tool path's clearance from the contour is tested at steps
    # h = √(2·tol·R) with R the tightest radius near the path: the sagitta
    # h²/(8R) (common practice) is then tol/4.  On the 8 m ellipse (radii
    # 1562 mm and more) that is about 5.6 mm, not the √(2·tol·r) = 0.245 mm
    # of a 3 mm tool radius, which is kept for parts of ordinary size.
    from pathgen.path.offset import _clear_step

    _, chain, _, _ = _fit_counted(100.0, monkeypatch)
    r = 3.0
    step = _clear_step(fit(ellipse_points(4000.0, 2500.0, 100), closed=True), chain, r, TOL)
    r_min = 2500.0**2 / 4000.0  # b²/a, the ellipse's smallest radius (handbook)
    assert step <= np.sqrt(2.0 * TOL * r_min) * (1.0 + 1e-6)
    assert step >= 0.5 * np.sqrt(2.0 * TOL * r_min)
    _, chain1, _, _ = _fit_counted(1.0, monkeypatch)
    step1 = _clear_step(fit(ellipse_points(40.0, 25.0, 100), closed=True), chain1, r, TOL)
    assert step1 == pytest.approx(np.sqrt(2.0 * r * TOL), rel=1e-12)
