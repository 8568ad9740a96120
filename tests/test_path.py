"""Toolpath: lines and biarcs within tolerance, offsets, trimming, seam, leads, passes.

Reference values and their sources are named beside each check.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from conftest import circle_points, ellipse_distance, ellipse_points
from pathgen.checks.machine import Cut, Tool
from pathgen.errors import InputError
from pathgen.moves import toolpath_in_units
from pathgen.path.biarc import biarc
from pathgen.path.build import contour_moves, make_toolpath
from pathgen.path.measure import Chain, sample_chain
from pathgen.path.model import ARC_CCW, LINE, RAPID
from pathgen.spline import fit


def _cut_chain(tp):
    """The cutting moves of the first pass at the deepest... (all z equal) as a 2-D Chain."""
    z = tp.start[:, 2]
    cut = (tp.kind != RAPID) & (tp.start[:, 2] == tp.end[:, 2])
    zc = z[cut].min()
    m = cut & (z == zc)
    nan = np.full(m.sum(), np.nan)
    return Chain(tp.kind[m], tp.start[m, :2], tp.end[m, :2], tp.center[m], nan, nan)


def _distances_to_ring(pts, ring_vertices):
    """Exact distance from each point to the closed polyline through
    ``ring_vertices``, by shapely's nearest-neighbour query on its segments
    (shapely 2 documentation, ``STRtree.query_nearest``): the same numbers as
    ``shapely.distance`` to the ring, without its quadratic cost."""
    import shapely

    v = np.asarray(ring_vertices, np.float64)
    segments = shapely.linestrings(np.stack([v, np.roll(v, -1, axis=0)], axis=1))
    _, d = shapely.STRtree(segments).query_nearest(shapely.points(pts), return_distance=True,
                                                   all_matches=False)
    return d


def _dense(chain, per=200):
    """Points along the moves; a joint appears once (no repeated points)."""
    pts, owner, _ = sample_chain(chain, np.full(len(chain), per))
    last = np.r_[owner[1:] != owner[:-1], False]
    return pts[~last]


def _moves_chain(tp):
    nan = np.full(len(tp), np.nan)
    return Chain(tp.kind, tp.start[:, :2], tp.end[:, :2], tp.center, nan, nan)


def _tangents(chain):
    """Unit tangents at start and end of every move."""
    out = []
    for at_end in (False, True):
        p = chain.end if at_end else chain.start
        v = chain.end - chain.start
        rel = p - chain.center
        arc_t = np.where((chain.kind == ARC_CCW)[:, None], np.c_[-rel[:, 1], rel[:, 0]], np.c_[rel[:, 1], -rel[:, 0]])
        t = np.where((chain.kind == LINE)[:, None], v, arc_t)
        norm = np.linalg.norm(t, axis=1, keepdims=True)
        out.append(t / np.where(norm > 0, norm, 1.0))  # vertical moves have no xy tangent
    return out


def _angle(u, v):
    """Angle between unit vectors row by row (atan2: accurate near 0)."""
    cross = u[:, 0] * v[:, 1] - u[:, 1] * v[:, 0]
    return np.abs(np.arctan2(cross, np.einsum("ij,ij->i", u, v)))


def superellipse_points(a=30.0, b=20.0, n=4.0, count=400):
    # |x/a|^n + |y/b|^n = 1, angle-parametrized (handbook superellipse)
    th = np.linspace(0, 2 * np.pi, count, endpoint=False)
    c, s = np.cos(th), np.sin(th)
    return np.c_[a * np.sign(c) * np.abs(c) ** (2 / n), b * np.sign(s) * np.abs(s) ** (2 / n)]


def rounded_rectangle_points(w=60.0, h=30.0, r=6.0, step=0.5):
    """Rectangle with corner radius r, counter-clockwise, evenly spaced points."""
    pts = []
    cx, cy = w / 2 - r, h / 2 - r
    for k, (ox, oy) in enumerate(((cx, cy), (-cx, cy), (-cx, -cy), (cx, -cy))):
        a0 = k * np.pi / 2
        arc = np.linspace(a0, a0 + np.pi / 2, max(int(r * np.pi / 2 / step), 4), endpoint=False)
        pts.append(np.c_[ox + r * np.cos(arc), oy + r * np.sin(arc)])
        # straight side from the end of this arc to the start of the next
        p0 = np.array([ox + r * np.cos(a0 + np.pi / 2), oy + r * np.sin(a0 + np.pi / 2)])
        nx, ny = [(-cx, cy), (-cx, -cy), (cx, -cy), (cx, cy)][k]
        a1 = a0 + np.pi / 2
        p1 = np.array([nx + r * np.cos(a1), ny + r * np.sin(a1)])
        m = max(int(np.hypot(*(p1 - p0)) / step), 1)
        f = np.arange(m)[:, None] / m
        pts.append(p0 + f * (p1 - p0))
    return np.vstack(pts)


# -- biarc construction ---------------------------------------------------------
def test_biarc_reproduces_a_circle():
    # Biarc check value (sources: bolton-1975): P1 = (1,0), T1 = (0,1), P2 = (cos 2, sin 2) with its
    # counter-clockwise tangent; the equal-chord joint is (cos 1, sin 1), both
    # centers (0, 0), radii 1 (biarc circle reproduction, Bolton 1975).
    p1, t1 = np.array([[1.0, 0.0]]), np.array([[0.0, 1.0]])
    p2, t2 = np.array([[math.cos(2), math.sin(2)]]), np.array([[-math.sin(2), math.cos(2)]])
    pm, kind, center, ok = biarc(p1, t1, p2, t2)
    assert ok.all()
    np.testing.assert_allclose(pm[0], [math.cos(1), math.sin(1)], atol=1e-14)
    np.testing.assert_allclose(center[0], 0.0, atol=1e-14)
    assert (kind == ARC_CCW).all()


def test_biarc_joint_is_tangent_continuous(rng):
    # G1 at the joint by construction; checked numerically (< 1e-9 rad)
    p1 = rng.normal(size=(200, 2))
    p2 = p1 + rng.normal(size=(200, 2)) * 3
    a1, a2 = rng.uniform(0, 2 * np.pi, (2, 200))
    t1, t2 = np.c_[np.cos(a1), np.sin(a1)], np.c_[np.cos(a2), np.sin(a2)]
    pm, kind, center, ok = biarc(p1, t1, p2, t2)
    ch = Chain(kind.ravel(), np.stack([p1, pm], 1).reshape(-1, 2), np.stack([pm, p2], 1).reshape(-1, 2),
               center.reshape(-1, 2), np.zeros(400), np.zeros(400))
    ts, te = _tangents(ch)
    good = np.repeat(ok, 2)
    jump = _angle(te[0::2], ts[1::2])
    assert ok.mean() > 0.5
    assert jump[ok].max() < 1e-9
    # and the end tangents are the given ones
    np.testing.assert_allclose(ts[0::2][ok], t1[ok], atol=1e-9)
    np.testing.assert_allclose(te[1::2][ok], t2[ok], atol=1e-9)
    assert good.sum() == 2 * ok.sum()


def test_biarc_error_order_three_on_ellipse():
    # Biarc approximation order 3 (Šír, Feichtinger & Jüttler 2006, from memory; sources: sir-2006);
    # the table there (a = 3, b = 1, equal parameter pieces) gives 3.56e-4 at n = 32.
    a, b = 3.0, 1.0
    errs = []
    for n in (16, 32, 64, 128):
        th = np.linspace(0, 2 * np.pi, n + 1)
        p = np.c_[a * np.cos(th), b * np.sin(th)]
        t = np.c_[-a * np.sin(th), b * np.cos(th)]
        t /= np.linalg.norm(t, axis=1, keepdims=True)
        pm, kind, center, ok = biarc(p[:-1], t[:-1], p[1:], t[1:])
        assert ok.all()
        ch = Chain(kind.ravel(), np.stack([p[:-1], pm], 1).reshape(-1, 2), np.stack([pm, p[1:]], 1).reshape(-1, 2),
                   center.reshape(-1, 2), np.zeros(2 * n), np.zeros(2 * n))
        errs.append(ellipse_distance(a, b, _dense(ch, 400)).max())
    order = np.polyfit(np.log([16, 32, 64, 128]), np.log(errs), 1)[0]
    assert -3.5 < order < -2.6
    assert errs[1] == pytest.approx(3.56e-4, rel=0.15)


# -- flattening counts ----------------------------------------------------------
def test_lines_on_circle_match_the_chord_count():
    # N = ceil(pi / acos(1 - e/R)) = 71 for R = 10, e = 0.01 (sources: sagitta)
    c = fit(circle_points(10.0, 400), closed=True)
    tp = contour_moves(c, tolerance=0.01, moves="lines")
    n_ref = math.ceil(math.pi / math.acos(1 - 0.01 / 10.0))
    assert n_ref == 71
    assert n_ref <= len(tp) <= 1.1 * n_ref
    assert tp.deviation <= 0.01


def test_arcs_on_circle_are_a_handful_of_exact_arcs():
    c = fit(circle_points(10.0, 400), closed=True)
    tp = contour_moves(c, tolerance=0.01, moves="arcs")
    assert len(tp) <= 4 and (tp.kind >= 2).all()
    r = np.hypot(*(tp.start[:, :2] - tp.center).T)
    np.testing.assert_allclose(r, 10.0, atol=1e-5)  # the spline of 400 points is a circle to ~1e-7
    np.testing.assert_allclose(tp.center, 0.0, atol=1e-5)


def test_lines_near_the_asymptotic_minimum_on_ellipse():
    # Recomputed (sources: levien-2019): ellipse 3 x 2, e = 0.01: integral gives 34.50, greedy 35
    c = fit(ellipse_points(3.0, 2.0, 400), closed=True)
    tp = contour_moves(c, tolerance=0.01, moves="lines")
    assert 35 <= len(tp) <= 1.1 * 34.50


SHAPES = {
    "ellipse": lambda: (fit(ellipse_points(30.0, 20.0, 600), closed=True), ("ellipse", 30.0, 20.0)),
    "superellipse": lambda: (fit(superellipse_points(), closed=True), None),
    "rounded_rectangle": lambda: (fit(rounded_rectangle_points(), closed=True), None),
}


@pytest.mark.parametrize("shape", sorted(SHAPES))
@pytest.mark.parametrize("tol", [0.1, 0.01, 0.001])
@pytest.mark.parametrize("moves", ["arcs", "lines"])
def test_measured_deviation_within_tolerance(shape, tol, moves):
    c, ref = SHAPES[shape]()
    tp = contour_moves(c, tolerance=tol, moves=moves)
    assert 0 < tp.deviation <= tol
    if ref is not None:
        # independent check against the handbook ellipse (Newton foot point):
        # the fit itself is within ~1e-7 mm of the ellipse at 600 points
        d = ellipse_distance(ref[1], ref[2], _dense(_moves_chain(tp), 100))
        assert d.max() <= tol * 1.001 + 1e-6


def test_arcs_are_tangent_continuous_on_a_smooth_outline():
    c = fit(ellipse_points(30.0, 20.0, 600), closed=True)
    ch = _moves_chain(contour_moves(c, tolerance=0.01, moves="arcs"))
    ts, te = _tangents(ch)
    jump = _angle(te, np.roll(ts, -1, axis=0))
    assert jump.max() < 1e-9


@pytest.mark.parametrize("shape", sorted(SHAPES))
def test_no_empty_moves_and_no_huge_radius_arcs(shape):
    # an arc whose radius is huge against its chord is written as a line (R < 1e4 chord)
    c, _ = SHAPES[shape]()
    tp = contour_moves(c, tolerance=0.01, moves="arcs")
    chord = np.hypot(*(tp.end - tp.start)[:, :2].T)
    assert chord.min() >= 1e-6
    arcs = tp.kind >= 2
    radius = np.hypot(*(tp.start[arcs, :2] - tp.center[arcs]).T)
    assert (radius < 1e4 * chord[arcs]).all()
    np.testing.assert_array_equal(tp.start[1:], tp.end[:-1])  # consecutive moves meet exactly
    np.testing.assert_array_equal(tp.start[0], tp.end[-1])  # and the closed path closes


def test_offset_arcs_are_tangent_continuous():
    c = fit(ellipse_points(30.0, 20.0, 600), closed=True)
    tp = make_toolpath(c, Tool(6.0), Cut(side="outside"), lead="arc")
    ts, te = _tangents(_cut_chain(tp))  # lead-in, the cut, lead-out: all tangent
    assert _angle(te[:-1], ts[1:]).max() < 1e-9


def test_arcs_need_fewer_blocks_than_lines_on_an_ellipse():
    # lines grow like e^(-1/2), arcs like e^(-1/3) (scaling only; sources: arc-order)
    c = fit(ellipse_points(30.0, 20.0, 600), closed=True)
    n = {(mv, e): len(contour_moves(c, tolerance=e, moves=mv)) for mv in ("lines", "arcs") for e in (0.01, 0.0001)}
    assert n["lines", 0.01] >= 3 * n["arcs", 0.01]
    assert n["lines", 0.0001] >= 5 * n["arcs", 0.0001]
    # growth over a 100x smaller tolerance: lines ~10x, arcs ~4.6x
    assert n["lines", 0.0001] / n["lines", 0.01] == pytest.approx(10.0, rel=0.1)
    assert n["arcs", 0.0001] / n["arcs", 0.01] == pytest.approx(100 ** (1 / 3), rel=0.25)


# -- offsets --------------------------------------------------------------------
@pytest.mark.parametrize("side, radius", [("outside", 13.0), ("inside", 7.0)])
def test_circle_offset_is_a_circle(side, radius):
    # offset of a circle is a concentric circle R ± r (sources: farouki-neff-1990)
    c = fit(circle_points(10.0, 400), closed=True)
    tp = make_toolpath(c, Tool(6.0), Cut(side=side, tolerance=0.01), lead="none")
    ch = _cut_chain(tp)
    assert (ch.kind >= 2).all() and len(ch) <= 4
    np.testing.assert_allclose(np.hypot(*(ch.start - ch.center).T), radius, atol=1e-5)
    assert tp.deviation <= 0.01


@pytest.mark.parametrize("moves", ["arcs", "lines"])
@pytest.mark.parametrize("side", ["outside", "inside"])
def test_ellipse_offset_matches_true_offset(moves, side):
    # every point of the tool-center path lies at r ± tol from the handbook ellipse
    a, b, r, tol = 30.0, 20.0, 3.0, 0.01
    c = fit(ellipse_points(a, b, 600), closed=True)
    tp = make_toolpath(c, Tool(2 * r), Cut(side=side, tolerance=tol), moves=moves, lead="none")
    pts = _dense(_cut_chain(tp), 100)
    d = ellipse_distance(a, b, pts)
    assert np.abs(d - r).max() <= tol + 1e-6
    assert tp.deviation <= tol


def test_steiner_area_of_outer_offset():
    # Steiner: A_r = A + P r + pi r^2 for a convex outline (sources: steiner);
    # A = pi a b, P = 4 a E(1 - b²/a²) with scipy.special.ellipe (sources: ellipe)
    from scipy.special import ellipe

    a, b, r, tol = 30.0, 20.0, 3.0, 0.001
    c = fit(ellipse_points(a, b, 800), closed=True)
    tp = make_toolpath(c, Tool(2 * r), Cut(side="outside", tolerance=tol), lead="none")
    pts = _dense(_cut_chain(tp), 400)
    x, y = pts[:, 0], pts[:, 1]
    area = 0.5 * abs(np.dot(x, np.roll(y, -1)) - np.dot(y, np.roll(x, -1)))
    ref = math.pi * a * b + 4 * a * ellipe(1 - b * b / (a * a)) * r + math.pi * r * r
    # the path lies within tol of the offset: area within perimeter × tol
    assert abs(area - ref) <= (2 * math.pi * 35) * tol


def test_shapely_buffer_cross_check():
    # shapely buffer as an independent offset; its polygonal arcs carry a sagitta
    # of R(1 - cos(pi / (4 quad_segs))) (sources: shapely), added to the tolerance
    import shapely

    a, b, r, tol = 30.0, 20.0, 3.0, 0.01
    c = fit(ellipse_points(a, b, 600), closed=True)
    tp = make_toolpath(c, Tool(2 * r), Cut(side="outside", tolerance=tol), lead="none")
    poly = shapely.Polygon(c(np.linspace(0, c.breaks[-1], 20000, endpoint=False)))
    ring = poly.buffer(r, quad_segs=64).exterior
    sag = r * (1 - math.cos(math.pi / 256)) + 1e-4  # + the polygon's own chord sagitta
    pts = _dense(_cut_chain(tp), 50)
    d = shapely.distance(shapely.points(pts), ring)
    assert d.max() <= tol + sag


def _star(n=400, k=5, amp=2.5, base=12.0):
    th = np.linspace(0, 2 * np.pi, n, endpoint=False)
    rr = base + amp * np.cos(k * th)
    return np.c_[rr * np.cos(th), rr * np.sin(th)]


def test_tight_concave_spot_is_trimmed_and_reported():
    import shapely

    c = fit(_star(), closed=True)
    kappa = c.curvature(np.linspace(0, c.breaks[-1], 5000))
    r = 4.0
    assert (-kappa * r >= 1).any()  # the valleys are tighter than the tool (outside cut)
    tp = make_toolpath(c, Tool(2 * r), Cut(side="outside", tolerance=0.01), lead="none")
    spots = tp.info["trimmed"]
    assert sum(s["reason"] == "tight" for s in spots) == 5
    pts = _dense(_cut_chain(tp), 60)
    assert shapely.LinearRing(pts).is_simple
    # no gouge: the tool center never comes closer to the contour than r - tol
    dense = c(np.linspace(0, c.breaks[-1], 40000, endpoint=False))
    assert _distances_to_ring(pts, dense).min() >= r - 0.02


def test_concave_corner_overlap_is_trimmed():
    from pathgen.outline import fit_outline

    pts = np.array([[0, 0], [55, 0], [55, 15], [85, 15], [85, 0], [140, 0], [140, 70], [0, 70]], float)
    c = fit_outline(pts, closed=True)
    tp = make_toolpath(c, Tool(6.0), Cut(side="outside"), lead="none")
    ch = _cut_chain(tp)
    xy = {(round(x, 6), round(y, 6)) for x, y in np.vstack([ch.start, ch.end])}
    assert (58.0, 12.0) in xy and (82.0, 12.0) in xy  # offsets of the notch walls meet there
    assert len(tp.info["trimmed"]) == 2


def test_offset_of_a_biarc_is_exact():
    # offset of an arc is a concentric arc R - d (ccw, d to the left) (sources: farouki-neff-1990)
    from pathgen.path.biarc import biarc_chain, offset_chain

    th = np.array([0.0, 1.0, 2.5])
    p = np.c_[10 * np.cos(th), 10 * np.sin(th)]
    t = np.c_[-np.sin(th), np.cos(th)]
    ch, ok = biarc_chain(p[:-1], t[:-1], p[1:], t[1:], th[:-1], th[1:])
    assert ok.all()
    off, ok2 = offset_chain(ch, 3.0)  # to the left of a ccw circle: toward its center
    assert ok2.all()
    np.testing.assert_allclose(np.hypot(*(off.start - off.center).T), 7.0, atol=1e-12)
    np.testing.assert_allclose(np.hypot(*(off.end - off.center).T), 7.0, atol=1e-12)
    _, ok3 = offset_chain(ch, 10.5)  # radius through zero: the tool cannot follow
    assert not ok3.any()


def _closed_simple(tp):
    import shapely

    return shapely.LinearRing(_dense(_cut_chain(tp), 30)).is_simple


def test_seam_at_a_corner_the_tool_sits_inside():
    # the closing join of the path is then an overlap to trim, like any other corner
    from pathgen.outline import fit_outline

    pts = np.array([[0, 0], [55, 0], [55, 15], [85, 15], [85, 0], [140, 0], [140, 70], [0, 70]], float)
    c = fit_outline(pts, closed=True)
    tp = make_toolpath(c, Tool(6.0), Cut(side="inside"), seam=(0.0, 0.0), lead="none")
    assert _closed_simple(tp)
    sx, sy = tp.info["seam"]
    assert math.hypot(sx - 3.0, sy - 3.0) < 1e-6  # the tool's corner position nearest (0, 0)


def test_tool_radius_near_noisy_fillet_radius():
    # invented part: a 60 x 40 plate with 5 mm corner fillets, probed with
    # 0.005 mm noise; a 12 mm tool (r = 6 > 5) inside cannot reach the fillets
    rng = np.random.default_rng(7)
    pts = rounded_rectangle_points(60.0, 40.0, 5.0, step=1.0)
    pts = pts + rng.normal(scale=0.005, size=pts.shape)
    c = fit(pts, closed=True)
    tp = make_toolpath(c, Tool(12.0), Cut(side="inside", tolerance=0.01), lead="none")
    assert _closed_simple(tp)
    tight = [sp for sp in tp.info["trimmed"] if sp["reason"] == "tight"]
    assert 4 <= len(tight) <= 8  # one per corner, noise may split one
    # the trimmed corners of the tool-center path are the corners of the 48 x 28 rectangle
    ch = _cut_chain(tp)
    xy = np.vstack([ch.start, ch.end])
    for cx, cy in ((24, 14), (-24, 14), (-24, -14), (24, -14)):
        assert np.hypot(xy[:, 0] - cx, xy[:, 1] - cy).min() < 0.05


def test_tool_too_big_for_the_hole():
    c = fit(circle_points(2.0, 64), closed=True)
    with pytest.raises(InputError, match="cannot reach|does not fit"):
        make_toolpath(c, Tool(6.0), Cut(side="inside"))


# -- direction, seam, leads, passes -------------------------------------------------
def _signed_area(ch):
    p = _dense(ch, 20)
    return 0.5 * (np.dot(p[:, 0], np.roll(p[:, 1], -1)) - np.dot(p[:, 1], np.roll(p[:, 0], -1)))


@pytest.mark.parametrize("side, direction, ccw", [
    # common practice (M3 spindle): climb keeps the tool left of the cut edge (G41 sense)
    ("outside", "climb", False), ("outside", "conventional", True),
    ("inside", "climb", True), ("inside", "conventional", False),
    ("on", "climb", True), ("on", "reverse", False),
])
def test_direction_rule_on_a_circle(side, direction, ccw):
    c = fit(circle_points(10.0, 200), closed=True)
    tp = make_toolpath(c, Tool(4.0), Cut(side=side), direction=direction, lead="none")
    assert (_signed_area(_cut_chain(tp)) > 0) == ccw


def test_direction_of_a_clockwise_contour():
    c = fit(circle_points(10.0, 200)[::-1], closed=True)
    tp = make_toolpath(c, Tool(4.0), Cut(side="outside"), lead="none")
    ch = _cut_chain(tp)
    assert _signed_area(ch) < 0  # outside climb runs clockwise whatever the input's orientation
    np.testing.assert_allclose(np.hypot(*(ch.start - ch.center).T), 12.0, atol=1e-5)


def test_seam_defaults_to_flattest_stretch_and_follows_a_given_point():
    c = fit(ellipse_points(30.0, 20.0, 400), closed=True)
    tp = make_toolpath(c, Tool(6.0), Cut(side="outside"), lead="none")
    sx, sy = tp.info["seam"]
    assert abs(sx) < 0.5 and abs(abs(sy) - 23.0) < 0.01  # flattest: ends of the minor axis
    tp = make_toolpath(c, Tool(6.0), Cut(side="outside"), seam=(40.0, 1.0), lead="none")
    sx, sy = tp.info["seam"]
    assert math.hypot(sx - 33.0, sy - 1.0) < 1.0


@pytest.mark.parametrize("lead", ["arc", "line"])
def test_leads_passes_and_heights(lead):
    c = fit(ellipse_points(30.0, 20.0, 400), closed=True)
    tp = make_toolpath(c, Tool(6.0), Cut(side="outside", feed=900.0), lead=lead, depth=3.0,
                       step_down=1.0, safe_height=5.0, plunge_feed=200.0)
    assert tp.info["passes"] == 3
    zs = sorted(set(np.round(tp.end[tp.kind != RAPID, 2], 9)))
    np.testing.assert_allclose(zs, [-3.0, -2.0, -1.0])
    assert tp.start[0, 2] == 5.0 and tp.end[-1, 2] == 5.0
    plunges = (tp.kind == LINE) & (tp.start[:, 2] != tp.end[:, 2])
    assert plunges.sum() == 3 and np.all(tp.feed[plunges] <= 200.0)
    assert np.all(tp.feed[tp.kind != RAPID] <= 900.0)
    assert np.all(np.isfinite(tp.start)) and tp.time > 0
    # leads stay on the tool side: never closer to the part than the tool radius
    lead_moves = Chain(tp.kind[2:3], tp.start[2:3, :2], tp.end[2:3, :2], tp.center[2:3], [np.nan], [np.nan])
    d = ellipse_distance(30.0, 20.0, _dense(lead_moves, 100))
    assert d.min() >= 3.0 - 1e-6
    # the lead-in ends where the cut starts, tangent to it
    ts, te = _tangents(_moves_chain(tp))
    cut_first = 3
    np.testing.assert_allclose(tp.end[2], tp.start[cut_first], atol=1e-12)
    if lead == "arc":
        assert _angle(te[2:3], ts[cut_first:cut_first + 1])[0] < 1e-6


def test_feeds_follow_the_machine_limits():
    # centripetal limit v <= sqrt(a R), F = 60 v (sources: centripetal-limit); programmed feed is a ceiling
    from pathgen.checks.machine import Machine

    c = fit(circle_points(5.0, 200), closed=True)
    m = Machine(max_feed=6000.0, max_accel=200.0, block_rate=1000.0)
    tp = make_toolpath(c, Tool(2.0), Cut(side="inside", feed=5000.0), m, lead="none")
    arcs = tp.kind >= 2
    radius = np.hypot(*(tp.start[arcs, :2] - tp.center[arcs]).T)  # 4 mm: tool center
    assert np.all(tp.feed[arcs] <= 60 * np.sqrt(200.0 * radius) * (1 + 1e-9))
    assert np.all(tp.feed[tp.kind != RAPID] <= 5000.0)
    assert np.all(tp.feed[tp.kind != RAPID] > 0)


def test_open_profile_and_inch_units():
    x = np.linspace(0, 50, 60)
    c = fit(np.c_[x, 5 * np.sin(x / 8)])
    mm = make_toolpath(c, Tool(4.0), Cut(side="outside"), lead="line")
    # an inch job's toolpath is in mm too (units only word its notes); a
    # writer converts it when it writes inch (1 inch = 25.4 mm exactly: Taylor
    # & Thompson, Guide for the Use of the SI, NIST SP 811, 2008, appendix B.8;
    # sources: inch)
    worded = make_toolpath(c, Tool(4.0), Cut(side="outside"), lead="line", units="inch")
    assert worded.units == "mm"
    np.testing.assert_array_equal(worded.start, mm.start)
    inch = toolpath_in_units(worded, "inch")
    assert inch.units == "inch"
    np.testing.assert_allclose(inch.start * 25.4, mm.start, atol=1e-9)  # exact inch definition
    assert inch.deviation * 25.4 == pytest.approx(mm.deviation)
    with pytest.raises(InputError, match="seam applies to closed"):
        make_toolpath(c, seam=(0, 0))


@pytest.mark.parametrize("kw, match", [
    ({"moves": "curves"}, "moves='curves' is not one of"),
    ({"direction": "up"}, "direction='up' is not one of"),
    ({"lead": "spiral"}, "lead='spiral' is not one of"),
    ({"depth": -1}, "depth must be a finite number > 0"),
    ({"step_down": 0}, "step_down must be a finite number > 0"),
    ({"units": "cm"}, "units='cm' is not one of"),
    ({"seam": (1.0, float("nan"))}, "seam must be a finite point"),
])
def test_bad_options(kw, match):
    c = fit(circle_points(10.0, 64), closed=True)
    with pytest.raises(InputError, match=match):
        make_toolpath(c, **kw)


def test_same_input_same_output():
    c = fit(ellipse_points(30.0, 20.0, 300), closed=True)
    a = make_toolpath(c, Tool(6.0), Cut(side="outside"), step_down=0.5)
    b = make_toolpath(c, Tool(6.0), Cut(side="outside"), step_down=0.5)
    for col in ("kind", "start", "end", "center", "feed"):
        assert np.array_equal(getattr(a, col), getattr(b, col))


# -- property test ----------------------------------------------------------------
@settings(max_examples=30, deadline=None)
@given(seed=st.integers(0, 10_000), side=st.sampled_from(["outside", "inside"]),
       moves=st.sampled_from(["arcs", "lines"]), diameter=st.sampled_from([4.0, 10.0, 16.0]))
def test_random_outlines_give_simple_finite_paths(seed, side, moves, diameter):
    import shapely

    rng = np.random.default_rng(seed)
    n = 60
    th = np.sort(rng.uniform(0, 2 * np.pi, n))
    th = th[np.r_[True, np.diff(th) > 0.02]]
    # smooth random star: a few low harmonics (invented shapes)
    rr = 20 + sum(rng.uniform(-2, 2) * np.cos(k * th + rng.uniform(0, 6)) for k in range(2, 5))
    c = fit(np.c_[rr * np.cos(th), rr * np.sin(th)], closed=True)
    tol = 0.01
    # larger tools reach past the tighter dents: trimming is exercised too
    tp = make_toolpath(c, Tool(diameter), Cut(side=side, tolerance=tol), moves=moves, lead="none")
    assert np.all(np.isfinite(tp.start)) and np.all(np.isfinite(tp.center))
    assert tp.deviation <= tol
    pts = _dense(_cut_chain(tp), 30)
    assert shapely.LinearRing(pts).is_simple
    # no gouge (independent check with shapely on a dense polygon of the contour)
    dense = c(np.linspace(0, c.breaks[-1], 20000, endpoint=False))
    assert _distances_to_ring(pts, dense).min() >= diameter / 2 - 1.5 * tol
