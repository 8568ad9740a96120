"""Arcs fitted inside the tolerance band (pathgen.path.arcfit).

Every check compares against something computed independently of the
fitting and measuring code: a k-d tree (``scipy.spatial.cKDTree``) over a
dense sampling of the spline, the chord bound of that sampling, plain
circle geometry, or the old curve-tangent biarcs.
"""

from __future__ import annotations

import pathlib

import numpy as np
import pytest
from scipy.spatial import cKDTree

from conftest import ellipse_points
from pathgen.checks.machine import Cut, Tool
from pathgen.outline import fit_outline
from pathgen.path.arcfit import _dist, band_arcs
from pathgen.path.build import contour_moves, make_toolpath
from pathgen.path.flatten import approximate
from pathgen.path.measure import Chain, arc_geometry
from pathgen.path.model import ARC_CCW, LINE, RAPID
from pathgen.path.offset import regular_windows
from pathgen.points import read_points
from pathgen.spline import fit

SAMPLES = pathlib.Path(__file__).resolve().parents[1] / "samples"
NAMES = ("bracket", "hook", "plate", "profile")


def _sample(name):
    return fit_outline(read_points(SAMPLES / f"{name}.csv"))


def _noisy_ellipse():
    # seeded probe-like noise (sigma 5 µm) on a 30 x 20 mm ellipse, points ~0.8 mm
    # apart (denser noisy points make the interpolating spline bend tighter than
    # a 6 mm tool in places, which is the trimming's business, not this file's)
    rng = np.random.default_rng(5)
    pts = ellipse_points(30.0, 20.0, 200) + rng.normal(0.0, 0.005, (200, 2))
    return fit(pts, closed=True)


def _moves(tp, *, z=None):
    """Cutting moves of a toolpath (one pass: the given z) as a 2-D Chain."""
    m = tp.kind != RAPID
    m &= tp.start[:, 2] == tp.end[:, 2]
    if z is not None:
        m &= tp.start[:, 2] == z
    nan = np.full(m.sum(), np.nan)
    return Chain(tp.kind[m], tp.start[m, :2], tp.end[m, :2], tp.center[m], nan, nan)


def _dense_curve(contour, d, tol):
    """Points of q = P + d·N, m steps per spline piece, and their chord bound.

    Chord bound (Filip, Magedson & Markot 1986, from memory; sources: filip-1986): a
    step h strays from its chord by at most h²/8·max‖q''‖.  Steps never
    straddle a break (corners); q'' is taken from second differences inside
    each piece, doubled for safety.  Returns (points, bound).
    """
    b = contour.breaks
    m = 8
    for _ in range(10):
        f = np.arange(m + 1) / m
        h = np.diff(b)[:, None]
        # a hair inside each piece at its ends, so a corner's two sides both appear
        t = b[:-1, None] + h * np.clip(f, 1e-12, 1 - 1e-12)[None, :]
        q = contour(t) + d * contour.normal(t) if d else contour(t)
        d2 = np.linalg.norm(q[:, 2:] - 2 * q[:, 1:-1] + q[:, :-2], axis=2)  # ≈ h_step²·‖q''‖
        bound = 2.0 * float(d2.max()) / 8.0
        if bound <= 2e-3 * tol or m >= 4096:
            return q.reshape(-1, 2), bound
        m *= 2
    return q.reshape(-1, 2), bound


def _polyline_distance(poly, pts, k=16):
    """Distance from points to a polyline (k nearest vertices, both segments of each).

    Missing the true nearest segment can only make the result larger
    (a conservative check of an upper bound).
    """
    tree = cKDTree(poly)
    _, idx = tree.query(pts, k=min(k, len(poly)))
    best = np.full(len(pts), np.inf)
    for j in range(idx.shape[1]):
        for off in (-1, 0):
            i0 = np.clip(idx[:, j] + off, 0, len(poly) - 2)
            a, b = poly[i0], poly[i0 + 1]
            ab = b - a
            u = np.einsum("ij,ij->i", pts - a, ab) / np.maximum(np.einsum("ij,ij->i", ab, ab), 1e-300)
            foot = a + np.clip(u, 0.0, 1.0)[:, None] * ab
            best = np.minimum(best, np.linalg.norm(pts - foot, axis=1))
    return best


def _sample_moves(chain, step):
    """Points along the moves (chord step ``step`` mm) and the sagitta of that sampling."""
    pts, sag = [], 0.0
    for i in range(len(chain)):
        s, e = chain.start[i], chain.end[i]
        if chain.kind[i] == LINE:
            m = max(int(np.ceil(np.hypot(*(e - s)) / step)), 1)
            pts.append(s + (e - s) * (np.arange(m + 1) / m)[:, None])
            continue
        r, a0, sw = arc_geometry(s, e, chain.center[i], chain.kind[i] == ARC_CCW)
        # at most ``step`` apart, and a sagitta of at most 1e-3·step/2 (sources: sagitta)
        dphi = 2.0 * np.arccos(max(1.0 - 5e-4 * step / r, -1.0))
        m = max(int(np.ceil(abs(sw) * r / step)), int(np.ceil(abs(sw) / dphi)), 1)
        a = a0 + sw * np.arange(m + 1) / m
        pts.append(chain.center[i] + r * np.c_[np.cos(a), np.sin(a)])
        sag = max(sag, r * (1.0 - np.cos(0.5 * abs(sw) / m)))  # sagitta, sources: sagitta
    return np.vstack(pts), sag


def _independent_deviation(chain, contour, d, tol):
    """(moves → curve, curve → moves) upper bounds, mm, from k-d trees."""
    q, q_bound = _dense_curve(contour, d, tol)
    pts, sag = _sample_moves(chain, 2.0 * tol)  # the sagitta of this step is added below
    to_curve = _polyline_distance(q, pts).max() + q_bound
    to_moves = _polyline_distance(pts, q).max() + sag
    return to_curve, to_moves


def _joint_kinks(chain):
    """Angle between the end tangent of each move and the start tangent of the next."""
    tang = []
    for at_end in (False, True):
        p = chain.end if at_end else chain.start
        rel = p - chain.center
        arc_t = np.where((chain.kind == ARC_CCW)[:, None], np.c_[-rel[:, 1], rel[:, 0]], np.c_[rel[:, 1], -rel[:, 0]])
        v = np.where((chain.kind == LINE)[:, None], chain.end - chain.start, arc_t)
        tang.append(v / np.linalg.norm(v, axis=1, keepdims=True))
    u, v = tang[1][:-1], tang[0][1:]
    cross = u[:, 0] * v[:, 1] - u[:, 1] * v[:, 0]
    return np.abs(np.arctan2(cross, np.einsum("ij,ij->i", u, v))), chain.end[:-1]


# -- the curvature interval behind the band test --------------------------------
def test_curvature_interval_matches_circle_distance(rng):
    # Circle through S tangent to T with curvature k: center S + N/k, radius
    # 1/|k|.  A point X is within e of it exactly when
    # k ∈ [2(a - e), 2(a + e)] / (b - e²), a = (X - S)·N, b = |X - S|²
    # (derived in the module).  Checked against plain circle geometry.
    S = rng.normal(size=2)
    ang = rng.uniform(0, 2 * np.pi)
    T = np.array([np.cos(ang), np.sin(ang)])
    N = np.array([-T[1], T[0]])
    X = S + rng.normal(scale=3.0, size=(2000, 2))
    k = rng.uniform(-1.0, 1.0, 2000)
    e = 0.05
    w = X - S
    a, b = w @ N, np.einsum("ij,ij->i", w, w)
    C = S + N / k[:, None]
    exact = np.abs(np.linalg.norm(X - C, axis=1) - 1.0 / np.abs(k))  # |distance to the circle|
    np.testing.assert_allclose(np.abs(_dist(k, a, b)), exact, rtol=1e-9, atol=1e-12)
    inside = (k >= 2 * (a - e) / (b - e * e)) & (k <= 2 * (a + e) / (b - e * e))
    far = b > e * e
    margin = np.abs(exact - e) > 1e-9  # not on the band's edge
    assert inside.sum() > 20 and (~inside).sum() > 20
    np.testing.assert_array_equal(inside[far & margin], exact[far & margin] <= e)


# -- within tolerance, measured and independently -------------------------------
@pytest.mark.parametrize("tol", [0.1, 0.01, 0.001])
@pytest.mark.parametrize("name", NAMES + ("noisy ellipse",))
def test_band_arcs_within_tolerance_and_tangent_continuous(name, tol):
    c = _noisy_ellipse() if name == "noisy ellipse" else _sample(name)
    tp = contour_moves(c, tolerance=tol, moves="arcs")
    assert 0 <= tp.deviation <= tol
    to_curve, to_moves = _independent_deviation(_moves(tp), c, 0.0, tol)
    assert to_curve <= tol * 1.001
    assert to_moves <= tol * 1.001
    assert np.isfinite(tp.start).all() and np.isfinite(tp.center).all()
    np.testing.assert_array_equal(tp.start[1:], tp.end[:-1])  # moves meet exactly
    # tangent-continuous at every joint (the seam of a closed one too) except corners
    ch = _moves(tp)
    if c.closed:
        ch = Chain.concat([ch, ch.take(slice(0, 1))])
    kink, at = _joint_kinks(ch)
    corners = c(c.breaks[list(c.corners)]) if c.corners else np.zeros((0, 2))
    near = np.zeros(len(at), bool)
    if len(corners):
        near = np.min(np.linalg.norm(at[:, None] - corners[None], axis=2), axis=1) < 1e-9
        assert near.sum() == len(corners) and kink[near].min() > 0.1  # real corners stay corners
    # a near-straight arc is written as its chord (radius > 1000 chords: half sweep < 5e-4 rad;
    # bulge b < 5 % of tol: half sweep ~ 4b/L < 0.2 tol/L; derived): such a line may
    # meet its neighbours at that small angle; every other joint is tangent
    L = np.hypot(*(ch.end - ch.start).T)
    slack = np.where(ch.kind == LINE, np.maximum(5.1e-4, 0.21 * tol / np.maximum(L, 1e-12)), 0.0)
    allowed = 1e-9 + slack[:-1] + slack[1:]
    assert np.all(kink[~near] <= allowed[~near])


@pytest.mark.parametrize("name, side", [("bracket", "outside"), ("bracket", "inside"),
                                        ("profile", "outside"), ("profile", "inside"),
                                        ("noisy ellipse", "outside"), ("noisy ellipse", "inside")])
def test_offsets_stay_within_tolerance_of_the_true_offset(name, side):
    # the tool center must follow P + d·N, d = ±r (Farouki & Neff 1990; sources: farouki-neff-1990)
    c = _noisy_ellipse() if name == "noisy ellipse" else _sample(name)
    tol = 0.01
    tp = make_toolpath(c, Tool(6.0), Cut(side=side, tolerance=tol), lead="none")
    assert tp.info["trimmed"] == []  # nothing unreachable on these: the offset is all of q
    assert tp.deviation <= tol
    ch = _moves(tp, z=tp.start[:, 2].min())
    to_curve, to_moves = _independent_deviation(ch, c, tp.info["offset"], tol)
    assert to_curve <= tol * 1.001
    assert to_moves <= tol * 1.001
    kink, _ = _joint_kinks(ch)
    # tangent except where a near-straight arc was written as its chord (bound as above)
    L = np.hypot(*(ch.end - ch.start).T)
    slack = np.where(ch.kind == LINE, np.maximum(5.1e-4, 0.21 * tol / np.maximum(L, 1e-12)), 0.0)
    assert np.all(kink <= 1e-9 + slack[:-1] + slack[1:])


# -- fewer blocks ---------------------------------------------------------------
@pytest.mark.parametrize("name", NAMES + ("noisy ellipse",))
def test_band_arcs_need_no_more_blocks_than_biarcs_or_lines(name):
    # the reason the band fit is the default: measured on each part at 0.01 mm
    c = _noisy_ellipse() if name == "noisy ellipse" else _sample(name)
    lo, hi = c.domain
    windows, _, _ = regular_windows(c, 0.0, lo, hi)
    band, dev, _ = band_arcs(c, windows, 0.0, 0.01)
    old = sum(len(approximate(c, w[None], 0.0, 0.01, moves="arcs")[0]) for w in windows)
    lines = len(contour_moves(c, tolerance=0.01, moves="lines"))
    assert dev <= 0.01
    assert len(band) <= old
    assert len(band) <= lines
    if name != "plate":  # the plate is straight lines between corners: 8 either way
        assert len(band) < old and len(band) < lines


def test_noisy_ellipse_blocks_scale_like_arcs():
    # arcs: count ∝ e^(-1/3) on smooth curves (scaling only; sources: arc-order); a
    # noisy outline needs more as the tolerance nears the noise, never fewer
    c = _noisy_ellipse()
    n = [len(contour_moves(c, tolerance=e, moves="arcs")) for e in (0.1, 0.01)]
    assert n[1] > n[0]
    assert n[1] / n[0] >= 10 ** (1 / 3) * 0.75


def test_straight_stretch_is_one_line_and_circle_is_exact():
    # a circle is reproduced by arcs of its own radius and center (circle
    # reproduction, sources: meek-walton: the minimax arc of co-circular samples is
    # their circle); a straight run between corners is one line: plate sides
    th = np.linspace(0, 2 * np.pi, 400, endpoint=False)
    c = fit(np.c_[10 * np.cos(th), 10 * np.sin(th)], closed=True)
    tp = contour_moves(c, tolerance=0.01)
    assert len(tp) <= 4
    np.testing.assert_allclose(np.hypot(*(tp.start[:, :2] - tp.center).T), 10.0, atol=1e-5)
    plate = contour_moves(_sample("plate"), tolerance=0.01)
    assert len(plate) == 8 and (plate.kind == LINE).all()


def _polygon_outline(corners, step):
    """Points every ``step`` mm along a closed polygon (its corners exact)."""
    corners = np.asarray(corners, dtype=np.float64)
    pts = []
    for p0, p1 in zip(corners, np.roll(corners, -1, axis=0)):
        k = max(1, int(np.ceil(np.hypot(*(p1 - p0)) / step)))
        pts.append(p0 + (p1 - p0) * (np.arange(k) / k)[:, None])
    return np.vstack(pts)


def test_corner_past_the_seam_is_seen_from_the_side_asked_for():
    # A closed outline's corner one or more periods away (windows after the
    # seam run past the last break) must give the incoming edge's direction
    # from the left and the outgoing one from the right.  Reference: the
    # polygon's own edge directions (plane geometry).
    from pathgen.outline import fit_outline
    from pathgen.path.measure import unit_tangent_side
    from pathgen.points import clean_points

    poly = np.array([[0.0, 0.0], [37.3, 0.0], [41.9, 13.7], [29.1, 31.3], [3.7, 26.9], [-6.1, 11.3]])
    c = fit_outline(clean_points(_polygon_outline(poly, 1.7), closed=True))
    assert len(c.corners) == len(poly)
    b = c.breaks
    period = b[-1] - b[0]
    edges = np.diff(np.vstack([poly, poly[:1]]), axis=0)
    edges /= np.hypot(*edges.T)[:, None]
    for i, k in enumerate(sorted(c.corners)):
        at = c(b[k])
        j = int(np.argmin(np.hypot(*(poly - at).T)))  # which polygon corner
        incoming, outgoing = edges[j - 1], edges[j]
        for shift in (-2, -1, 1, 2, 3):
            t = np.array([b[k] + shift * period])
            np.testing.assert_allclose(unit_tangent_side(c, t, left=True)[0], incoming, atol=1e-9)
            np.testing.assert_allclose(unit_tangent_side(c, t, left=False)[0], outgoing, atol=1e-9)


def test_straight_window_with_tangent_ends_is_one_line():
    # An offset window along a straight edge between two corners ends along
    # the curve's tangent; the band fit must give one line there (rounding
    # leaves a curvature of ~1e-17/mm, and an arc of that radius is no line:
    # its measured deviation is garbage and the fit falls back).
    from pathgen.outline import fit_outline
    from pathgen.path.arcfit import _fit_window
    from pathgen.points import clean_points

    poly = np.array([[0.0, 0.0], [37.3, 0.0], [41.9, 13.7], [29.1, 31.3], [3.7, 26.9], [-6.1, 11.3]])
    c = fit_outline(clean_points(_polygon_outline(poly, 1.7), closed=True))
    b = c.breaks
    ks = sorted(c.corners) + [sorted(c.corners)[0] + c.pieces]
    for k0, k1 in zip(ks[:-1], ks[1:]):
        t0 = b[k0]
        t1 = b[k1] if k1 < len(b) else b[k1 - c.pieces] + (b[-1] - b[0])
        chain, restarts = _fit_window(c, t0, t1, -3.0, 0.002, 0.97, False)
        assert len(chain) == 1 and chain.kind[0] == LINE and restarts == 0


def test_splitting_that_makes_no_progress_stops_with_a_clear_error(monkeypatch):
    # A span that fails however short it gets must end the split rounds
    # with an error naming the spot, not double the spans every round.
    import pathgen.path.flatten as flatten
    from pathgen.errors import PathgenError

    th = np.linspace(0, 2 * np.pi, 200, endpoint=False)
    c = fit(np.c_[30 * np.cos(th), 20 * np.sin(th)], closed=True)
    real, calls = flatten._build, []

    def refuse_near_zero(contour, ta, tb, d, tol, moves):
        calls.append(len(ta))
        chain, span, ok = real(contour, ta, tb, d, tol, moves)
        return chain, span, ok & ~((ta <= 1.0) & (tb >= 1.0))  # any span over t = 1 "fails"

    monkeypatch.setattr(flatten, "_build", refuse_near_zero)
    with pytest.raises(PathgenError, match="could not approximate"):
        approximate(c, np.array([[0.0, c.breaks[-1]]]), 0.0, 0.01, moves="arcs")
    assert len(calls) < 30 and max(calls) < 1000


def test_windows_leave_out_a_curvature_spike_between_close_readings():
    # Farouki & Neff (sources: farouki-neff-1990): the offset P + d·N is regular only where
    # 1 - dκ > 0.  Four readings within 0.04 mm on a circle probed every
    # 1.5 mm (a few µm apart radially) make the interpolating curve bend
    # to a 0.017 mm radius over a few µm of its length; every parameter
    # where 1 - dκ <= 0 must lie outside the windows the path is built on.
    from pathgen.outline import fit_outline
    from pathgen.points import clean_points

    R = 45.0
    s = np.arange(0, 2 * np.pi * R, 1.5)
    s0 = np.pi / 2 * R
    keep = np.abs(s - s0 - 0.02) > 0.2
    ss = np.concatenate([s[keep], s0 + np.array([0.0, 0.0281, 0.0358, 0.0400])])
    dr = np.concatenate([np.zeros(keep.sum()), [0.0, 0.0020, 0.0021, 0.0031]])
    order = np.argsort(ss)
    th, rr = ss[order] / R, R + dr[order]
    c = fit_outline(clean_points(np.c_[rr * np.cos(th), rr * np.sin(th)], closed=True))
    b = c.breaks
    t = np.unique(np.concatenate([np.linspace(*c.domain, 200001),
                                  (b[:-1, None] + np.diff(b)[:, None] * np.linspace(0, 1, 201)).ravel()]))
    d = -6.0  # a 12 mm tool outside
    irregular = t[1.0 - d * c.curvature(t) <= 0.0]
    assert len(irregular) > 100
    windows, _, spots = regular_windows(c, d, *c.domain, 0.002)
    for a, z in windows:
        assert not np.any((irregular > a) & (irregular < z))
    assert len(spots) >= 1


def test_windows_leave_out_an_irregular_stretch_just_before_a_corner():
    # Farouki & Neff (sources: farouki-neff-1990) again, at a corner: the curve is evaluated
    # on the piece after a corner, so the end of the piece before it must be
    # looked at too.  tests/data/regress/wiggly_corners.csv (a random wiggly
    # outline with close readings, 383 points, 16 corners) bends the wrong
    # way in the last 0.005 of a 0.046-long piece before a corner; with a
    # 6 mm tool inside, that stretch is irregular and must not be in a window.
    from pathgen.outline import fit_outline

    c = fit_outline(read_points(pathlib.Path(__file__).parent / "data" / "regress" / "wiggly_corners.csv",
                                closed=True))
    b = c.breaks
    d = 3.0
    t = np.linspace(*c.domain, 400001)
    ends = (b[:-1, None] + np.diff(b)[:, None] * np.linspace(0.9, 1.0, 101)[None, :-1]).ravel()
    t = np.concatenate([t, ends])
    irregular = t[1.0 - d * c.curvature(t) <= 0.0]
    assert len(irregular) > 0
    windows, _, _ = regular_windows(c, d, *c.domain, 0.002)
    for a, z in windows:
        assert not np.any((irregular > a) & (irregular < z))


def test_every_move_has_a_length_and_a_direction():
    # tests/data/regress/restart_at_end.csv (a random closed outline): the
    # arc fit once returned to the curve exactly at a window's end and then
    # added a move of no length there; cut on the line from the flattest
    # spot, the path's last move had no direction and its lead-out none.
    from pathgen.outline import fit_outline

    c = fit_outline(read_points(pathlib.Path(__file__).parent / "data" / "regress" / "restart_at_end.csv",
                                closed=True))
    tp = make_toolpath(c, Tool(1.0), Cut(side="on", tolerance=0.1), moves="arcs")
    length = np.linalg.norm(tp.end - tp.start, axis=1)  # plunges move in z only
    cutting = tp.kind != RAPID
    assert np.all(length[cutting] > 1e-6)
    assert np.all(np.isfinite(tp.start)) and np.all(np.isfinite(tp.end))
    assert tp.deviation <= 0.1
