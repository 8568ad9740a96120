"""Corners, straight edges and piecewise fits (pathgen.outline).

Outside references, named beside each check: scipy.interpolate.CubicSpline
(each curved piece, with its end conditions), handbook geometry (circle
curvature 1/R, rounded-rectangle perimeter 2(w + h) - 8r + 2πr, ellipse
curvature ab/(a² sin²t + b² cos²t)^{3/2}), and the theorem of turning
tangents (Hopf 1935; from memory): a simple closed curve turns by +2π when
counter-clockwise, counting the jumps at corners.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import given, strategies as st
from scipy.integrate import quad
from scipy.interpolate import CubicSpline

from pathgen import InputError, fit
from pathgen.outline import (
    DEFAULT_CORNER_ANGLE,
    STRAIGHT_RTOL,
    _piece_moments,
    find_corners,
    fit_outline,
    straight_runs,
    turning_angles,
)
from pathgen.points import clean_points

from conftest import ellipse_curvature, ellipse_points


def densify(vertices, step, closed=True):
    """Points along a polygon, every ``step`` mm or less; vertex indices too."""
    v = np.asarray(vertices, float)
    q = np.vstack([v, v[:1]]) if closed else v
    pts, idx = [], []
    for a, b in zip(q[:-1], q[1:]):
        k = max(1, math.ceil(np.hypot(*(b - a)) / step))
        idx.append(len(pts))
        pts.extend(a + (b - a) * s for s in np.arange(k) / k)
    if not closed:
        idx.append(len(pts))
        pts.append(q[-1])
    return np.array(pts), idx


# An invented L-shaped bracket plate with one 45° chamfer (mm).
PLATE = [(0, 0), (80, 0), (80, 15), (75, 20), (30, 20), (30, 50), (0, 50)]


def rounded_rectangle(w=40.0, h=20.0, r=5.0, per_side=6, per_arc=7):
    """Counter-clockwise, starting on the right arc; straight sides sampled too."""
    cx = [w / 2 - r, -w / 2 + r, -w / 2 + r, w / 2 - r]
    cy = [h / 2 - r, h / 2 - r, -h / 2 + r, -h / 2 + r]
    pts = []
    for k in range(4):
        th = np.linspace(k * np.pi / 2, (k + 1) * np.pi / 2, per_arc)
        arc = np.c_[cx[k] + r * np.cos(th), cy[k] + r * np.sin(th)]
        nxt = (k + 1) % 4
        end = np.array([cx[nxt] + r * np.cos(th[-1]), cy[nxt] + r * np.sin(th[-1])])
        side = arc[-1] + np.linspace(0, 1, per_side)[1:-1, None] * (end - arc[-1])
        pts += [arc, side]
    return np.vstack(pts)


def tangent_jump(c, k):
    """Signed angle between the tangents just before and just after break k."""
    m = c.pieces
    i = (k - 1) % m
    h = c.breaks[i + 1] - c.breaks[i]
    co = c.coefficients
    left = (3 * co[0, i] * h + 2 * co[1, i]) * h + co[2, i]
    right = co[2, k % m]
    return math.atan2(left[0] * right[1] - left[1] * right[0], left @ right)


def total_turning(c):
    """∫κ ds over every piece plus the tangent jumps at the corners (radians)."""
    smooth = sum(
        quad(lambda t: c.curvature(t) * np.hypot(*c(t, 1)), a, b, epsabs=1e-12)[0]
        for a, b in zip(c.breaks[:-1], c.breaks[1:])
    )
    return smooth + sum(tangent_jump(c, k) for k in c.corners)


# -- the piece solver against scipy -------------------------------------------------


@pytest.mark.parametrize(
    "start, stop, bc",
    [
        ("not-a-knot", "not-a-knot", ("not-a-knot", "not-a-knot")),
        ("natural", "not-a-knot", ("natural", "not-a-knot")),
        ((0.6, -0.8), "not-a-knot", ((1, [0.6, -0.8]), "not-a-knot")),
        ("natural", (1.0, 2.0), ("natural", (1, [1.0, 2.0]))),
        ((1.0, 0.0), (0.0, 1.0), ((1, [1.0, 0.0]), (1, [0.0, 1.0]))),
    ],
)
@pytest.mark.parametrize("n", [3, 4, 9])
def test_piece_moments_match_scipy(rng, start, stop, bc, n):
    t = np.cumsum(rng.uniform(0.3, 2.0, n))
    y = rng.normal(size=(n, 2))
    bc = tuple(b if isinstance(b, str) else (b[0], np.array(b[1])) for b in bc)
    ref = CubicSpline(t, y, bc_type=bc)  # reference: scipy.interpolate.CubicSpline
    np.testing.assert_allclose(_piece_moments(t, y, start, stop), ref(t, 2),
                               rtol=0, atol=1e-11)


# -- corners --------------------------------------------------------------------------


def test_turning_angles_of_a_polygon_sum_to_two_pi():
    pts, idx = densify(PLATE, 4.0)
    ang = turning_angles(pts, True)
    # theorem of turning tangents for a simple CCW polygon: Σφ = +2π (Hopf; from memory)
    assert ang.sum() == pytest.approx(2 * np.pi, abs=1e-12)
    np.testing.assert_allclose(np.degrees(ang[idx]), [90, 90, 45, 45, -90, 90, 90], atol=1e-9)


def test_plate_corners_straight_sides_and_angles():
    pts, idx = densify(PLATE, 4.0)
    c = fit_outline(pts, closed=True)
    assert c.corners == tuple(idx)
    assert c.info["corners"] == idx
    # every side is an exact straight line: distance of dense samples from
    # the side's line (handbook point-line distance)
    v = np.array(PLATE, float)
    for k, (a, b) in enumerate(zip(v, np.roll(v, -1, axis=0))):
        lo, hi = c.breaks[idx[k]], c.breaks[idx[k + 1]] if k + 1 < len(idx) else c.breaks[-1]
        q = c(np.linspace(lo, hi, 101))
        d = b - a
        dist = np.abs((q[:, 0] - a[0]) * d[1] - (q[:, 1] - a[1]) * d[0]) / np.hypot(*d)
        assert dist.max() <= 1e-9
    # corner angles preserved: tangent jumps equal the polygon's turns
    jumps = [math.degrees(tangent_jump(c, k)) for k in c.corners]
    np.testing.assert_allclose(jumps, [90, 90, 45, 45, -90, 90, 90], atol=1e-9)
    assert total_turning(c) == pytest.approx(2 * np.pi, abs=1e-9)
    # perimeter of the plate (sum of the side lengths)
    assert c.length == pytest.approx(np.hypot(*np.diff(np.vstack([v, v[:1]]), axis=0).T).sum(),
                                     rel=1e-12)


def test_rounded_rectangle_straight_sides_round_arcs():
    w, h, r = 40.0, 20.0, 5.0
    pts = rounded_rectangle(w, h, r)
    c = fit_outline(pts, closed=True)
    assert c.corners == ()  # tangent joins: no sharp corner
    runs = c.info["straight_runs"]
    assert len(runs) == 4
    for i, j in runs:
        a, b = pts[i], pts[j]
        span = (c.breaks[i], c.breaks[j] if j > i else c.breaks[-1])
        q = c(np.linspace(*span, 201))
        d = b - a
        dist = np.abs((q[:, 0] - a[0]) * d[1] - (q[:, 1] - a[1]) * d[0]) / np.hypot(*d)
        assert dist.max() <= 1e-9  # sides straight within 1e-9 mm
        assert np.abs(c.curvature(np.linspace(*span, 21)[1:-1])).max() <= 1e-9
    # G1 everywhere: no tangent jump at any break
    assert max(abs(tangent_jump(c, k)) for k in range(c.pieces)) <= 1e-9
    # the arcs bend like circles of radius r: curvature 1/r (handbook), within 2 %
    t = np.linspace(*c.domain, 4001)
    k = c.curvature(t)
    arcs = np.abs(k) > 0.5 / r
    assert np.abs(k[arcs] * r - 1).max() < 0.02
    # perimeter of a rounded rectangle: 2(w + h) - 8r + 2πr (handbook)
    assert c.length == pytest.approx(2 * (w + h) - 8 * r + 2 * np.pi * r, rel=1e-4)
    assert total_turning(c) == pytest.approx(2 * np.pi, abs=1e-6)


def test_curved_pieces_are_not_a_knot_splines_between_corners():
    # an invented lens: two circular arcs of radius 30 (centres (±20, 0)) meeting
    # at two corners on x = 0, where cos θ0 = 2/3
    th0 = math.acos(2 / 3)
    th = np.linspace(-th0, th0, 9)
    right = np.c_[30 * np.cos(th) - 20, 30 * np.sin(th)]
    left = -right
    pts = np.vstack([right[:-1], left[:-1]])
    # the spline fit itself (--find-arcs would keep these exact arcs as arcs)
    c = fit_outline(pts, closed=True, find_arcs=False)
    assert c.corners == (0, 8)
    for lo in (0, 8):
        seg = np.vstack([pts[lo:lo + 8], pts[(lo + 8) % 16]])
        t = c.breaks[lo:lo + 9]
        ref = CubicSpline(t, seg)  # reference: scipy not-a-knot, same chord parameters
        s = np.linspace(t[0], t[-1], 57)
        np.testing.assert_allclose(c(s), ref(s), rtol=0, atol=1e-11)
    # the lens corner: the tangents turn by π - 2θ0 (circle tangents, handbook)
    for k in c.corners:
        # (9 points per arc: the spline's end tangent is off by O(h³), 5e-3 rad here)
        assert tangent_jump(c, k) == pytest.approx(np.pi - 2 * th0, abs=5e-3)


def test_open_outline_ends_and_clamped_tangents():
    # an invented hook: a straight shank along +x, then a quarter circle of
    # radius 10 turning left, tangent to it
    phi = np.linspace(0, np.pi / 2, 8)
    shank = np.c_[np.linspace(-20, 0, 5)[:-1], np.zeros(4)]
    hook = np.vstack([shank, np.c_[10 * np.sin(phi), 10 - 10 * np.cos(phi)]])
    # the spline fit itself (--find-arcs would keep the 8-point quarter circle as an arc)
    c = fit_outline(hook, find_arcs=False)
    assert not c.closed and c.corners == ()
    assert c.info["straight_runs"][0][0] == 0
    d0, d1 = np.array([1.0, 0.0]), np.array([0.0, 1.0])  # the hook's own end tangents
    cc = fit_outline(hook, end="clamped", tangents=(d0, d1))
    np.testing.assert_allclose(cc(cc.domain[1], 1), d1, atol=1e-12)
    with pytest.raises(InputError, match=r'end="clamped" needs tangents'):
        fit_outline(hook, end="clamped")


def test_closed_smooth_outline_is_one_periodic_spline():
    a, b = 35.0, 21.0
    pts = ellipse_points(a, b, 96)
    c = fit_outline(pts, closed=True)
    ref = fit(pts, closed=True)
    assert c.corners == () and c.end == "periodic" and c.info["straight_runs"] == []
    np.testing.assert_array_equal(c.coefficients, ref.coefficients)
    th = np.linspace(0, 2 * np.pi, 96, endpoint=False)
    # ellipse curvature ab/(a² sin²θ + b² cos²θ)^{3/2} (handbook), at the points
    np.testing.assert_allclose(c.curvature(c.breaks[:-1]), ellipse_curvature(a, b, th), rtol=5e-3)
    assert total_turning(c) == pytest.approx(2 * np.pi, abs=1e-8)


def test_clockwise_input_is_normalized():
    pts = ellipse_points(30.0, 12.0, 40)[::-1]
    c = fit_outline(pts, closed=True)
    assert total_turning(c) == pytest.approx(2 * np.pi, abs=1e-8)  # +2π: counter-clockwise
    o = clean_points(pts, closed=True)
    assert "the points ran clockwise: reversed to counter-clockwise" in o.steps


def test_dense_circle_has_no_corners_and_no_straight_runs():
    th = np.linspace(0, 2 * np.pi, 3000, endpoint=False)
    c = fit_outline(np.c_[25 * np.cos(th), 25 * np.sin(th)], closed=True)
    assert c.corners == () and c.info["straight_runs"] == []
    t = np.linspace(*c.domain, 5000)
    np.testing.assert_allclose(c.curvature(t), 1 / 25, rtol=1e-6)  # circle: κ = 1/R (handbook)


def test_forced_corners_and_disabled_detection():
    pts, idx = densify(PLATE, 4.0)
    smooth = fit_outline(pts, closed=True, corner_angle=None)
    assert smooth.corners == () and smooth.end == "periodic"
    forced = fit_outline(pts, closed=True, corner_angle=None, corners=idx)
    assert forced.corners == tuple(idx)
    ell = ellipse_points(30.0, 20.0, 36)
    c = fit_outline(ell, closed=True, corners=[5, 20])
    assert c.corners == (5, 20)
    seg = ell[5:21]
    ref = CubicSpline(c.breaks[5:21], seg)  # scipy not-a-knot on the forced piece
    s = np.linspace(c.breaks[5], c.breaks[20], 33)
    np.testing.assert_allclose(c(s), ref(s), rtol=0, atol=1e-11)
    # a higher threshold misses the chamfer's 45° turns, a lower one keeps them
    assert len(find_corners(pts, True, 50.0)) == 5
    assert len(find_corners(pts, True, DEFAULT_CORNER_ANGLE)) == 7


def test_straight_runs_need_three_points_and_length():
    line = np.c_[np.linspace(0, 10, 11), np.zeros(11)]
    assert straight_runs(line, 1e-9, 0.5) == [(0, 10)]
    assert straight_runs(line, 1e-9, 50.0) == []
    assert straight_runs(line[:2], 1e-9, 0.1) == []


@pytest.mark.parametrize(
    "kw, pattern",
    [
        ({"corner_angle": 200}, r"corner_angle must be below 180 degrees, got 200"),
        ({"corner_angle": -5}, r"corner_angle must be a finite number > 0, got -5"),
        ({"corners": [99]}, r"corners: index 99 is outside the outline's points 0\.\.9"),
        ({"corners": "x"}, r"corners must be point indices \(integers\)"),
        ({"end": "loose"}, r"end='loose' is not one of"),
        ({"param": "random"}, r"param='random' is not one of"),
        ({"smooth": 0}, r"smooth must be a finite number > 0, got 0"),
        ({"end": "clamped", "tangents": [[0, 0], [1, 0]]}, r"non-zero 2-vectors"),
    ],
)
def test_option_errors(kw, pattern):
    pts = ellipse_points(5.0, 3.0, 10)[:, ::-1] * [1, 1]
    with pytest.raises(InputError, match=pattern):
        fit_outline(pts, **kw)


def test_closed_flag_contradiction():
    o = clean_points(ellipse_points(5.0, 3.0, 10), closed=True)
    with pytest.raises(InputError, match="closed= contradicts the Outline"):
        fit_outline(o, closed=False)


# -- properties -------------------------------------------------------------------------


@given(st.lists(st.floats(0.3, 1.0), min_size=5, max_size=40), st.integers(0, 2**32 - 1),
       st.sampled_from(["chord", "centripetal", "uniform"]))
def test_random_star_outlines_fit_without_nan(radii, seed, param):
    th = np.sort(np.random.default_rng(seed).uniform(0, 2 * np.pi, len(radii)))
    pts = np.c_[np.cos(th), np.sin(th)] * np.array(radii)[:, None] * 50.0
    try:
        o = clean_points(pts, closed=True)
    except InputError:
        return
    c = fit_outline(o, param=param)
    t = np.linspace(*c.domain, 500)
    assert np.isfinite(c.coefficients).all()
    assert np.isfinite(c(t)).all()
    assert c.info["max_residual"] <= 1e-9 * 100


@given(st.lists(st.tuples(st.floats(-100, 100), st.floats(-100, 100)), min_size=2, max_size=30))
def test_random_open_walks_fit_without_nan(rows):
    try:
        o = clean_points(rows, closed=False)
    except InputError:
        return
    c = fit_outline(o)
    assert np.isfinite(c.coefficients).all()
    assert np.isfinite(c(np.linspace(*c.domain, 300))).all()
    # every point on the curve, or on a straight run within the documented
    # straight tolerance, STRAIGHT_RTOL × the size (three points 1e-6 mm off
    # one line over 2 mm are a line: 5e-7 mm residual)
    size = float(np.hypot(*np.ptp(o.points, axis=0)))
    assert c.info["max_residual"] <= max(1e-9 * 300, 1.000001 * STRAIGHT_RTOL * size)


def test_noisy_dense_points_give_no_false_corners(rng):
    # noise 4x the spacing: the support (10·smooth mm) must be measured along
    # the curve, not along the zigzag of the noise
    th = np.linspace(0, 2 * np.pi, 100_000, endpoint=False)
    ell = ellipse_points(50.0, 30.0, theta=th) + rng.normal(0, 0.01, (100_000, 2))
    assert len(find_corners(ell, True, DEFAULT_CORNER_ANGLE, support=0.3)) == 0
    # a densely probed square plate with the same noise: exactly its 4 corners
    s = np.linspace(0, 1, 5000, endpoint=False)
    sq = np.vstack([np.c_[s * 40, 0 * s], np.c_[40 + 0 * s, s * 40],
                    np.c_[40 - s * 40, 40 + 0 * s], np.c_[0 * s, 40 - s * 40]])
    found = find_corners(sq + rng.normal(0, 0.01, sq.shape), True, DEFAULT_CORNER_ANGLE,
                         support=0.3)
    assert len(found) == 4
    assert np.abs(found - [0, 5000, 10000, 15000]).max() <= 20  # within 0.16 mm


def test_chance_straight_runs_in_noisy_points_join_tangent(rng):
    # noisy points fitted without smoothing: triples that happen to be
    # collinear within the straight tolerance become tiny lines, and the
    # curves meet them tangent (no kink), so no corner appears
    th = np.linspace(0, 2 * np.pi, 600, endpoint=False)
    pts = np.c_[30 * np.cos(th), 30 * np.sin(th)] + rng.normal(0, 0.005, (600, 2))
    c = fit_outline(pts, closed=True, straight_tol=0.002)
    assert len(c.info["straight_runs"]) > 0  # the case this test is about
    assert c.corners == ()
    assert max(abs(tangent_jump(c, k)) for k in range(c.pieces)) <= 1e-9


def test_smooth_dense_loop_has_no_false_corner_at_its_seam():
    # A smooth invented cam outline r(θ) = 60 + 8 sin 3θ + 3 cos 7θ has no
    # corner anywhere (its tangent turns continuously: differential geometry,
    # do Carmo §1-5, from memory). Densely sampled, short stretches near its
    # inflections pass the straight-run test; the loop must still come out
    # tangent-continuous, with no kink at whatever seam the fit chooses.
    n = 100_000
    th = np.linspace(0, 2 * np.pi, n, endpoint=False)
    r = 60 + 8 * np.sin(3 * th) + 3 * np.cos(7 * th)
    c = fit_outline(np.round(np.c_[r * np.cos(th), r * np.sin(th)], 10), closed=True)
    assert c.corners == ()
    b = c.breaks
    right = c.tangent(b[:-1])
    left = c.tangent(b[1:] - 1e-9 * np.diff(b))  # end of each piece
    nxt = np.roll(right, -1, axis=0)
    jump = np.abs(np.arctan2(left[:, 0] * nxt[:, 1] - left[:, 1] * nxt[:, 0], (left * nxt).sum(axis=1)))
    assert jump.max() < 1e-6


def _polar_cam(th, scale=1.0):
    """The invented cam r(θ) = 60 + 8 sin 3θ + 3 cos 7θ (times ``scale``) and
    its curvature by the polar formula κ = (r² + 2r′² − r r″)/(r² + r′²)^{3/2}
    ([curvature], written for r(θ); derived)."""
    r = 60 + 8 * np.sin(3 * th) + 3 * np.cos(7 * th)
    r1 = 24 * np.cos(3 * th) - 21 * np.sin(7 * th)
    r2 = -72 * np.sin(3 * th) - 147 * np.cos(7 * th)
    k = (r * r + 2 * r1 * r1 - r * r2) / (r * r + r1 * r1) ** 1.5
    return scale * np.c_[r * np.cos(th), r * np.sin(th)], k / scale


def test_straight_runs_on_dense_curves_do_not_fake_tight_spots():
    # Near an inflection of the cam, stretches of points 0.2 µm apart lie
    # within the straight tolerance (1e-6 × size) of their chord over more
    # than 1 % of the size; made lines, the spline beside them must turn onto
    # them within a few steps, bending by about 16·d/(L·h): here far more than
    # the cam itself. Exact points (float64 only): the curvature of the fit
    # must stay within 1 % of the polar formula [curvature] (it was 380 times
    # the cam's largest before such runs were checked).
    th0 = math.atan2(22.9485, 60.4017)
    th = th0 + np.linspace(-0.05, 0.05, 31_830)  # 2·10⁶ points per turn
    pts, k = _polar_cam(th)
    c = fit_outline(pts, closed=False)
    assert c.info["straight_runs"] == []
    at = (c.breaks[:-1, None] + np.diff(c.breaks)[:, None] * np.array([0.25, 0.75])).ravel()
    assert np.abs(c.curvature(at)).max() <= 1.01 * np.abs(k).max()


def test_straight_run_join_curvature_rule():
    # a true straight side (exact points) costs nothing at its joins; a bow
    # of sagitta d over L on spacing h is judged at 16·d/(L·h) (JOIN_FACTOR,
    # from the circle's sagitta d = L²κ/8 [sagitta] and the clamped spline's
    # end moment [stoer-bulirsch])
    from pathgen.outline import JOIN_FACTOR, _join_curvature

    x = np.linspace(0.0, 10.0, 101)
    assert _join_curvature(np.c_[x, 0 * x], 0, 100) == 0.0
    R = 1e4  # a bow of radius 10 m over 10 mm: sagitta L²/(8R)
    bow = np.c_[x, R - np.sqrt(R * R - (x - 5.0) ** 2)]
    d = 100.0 / (8 * R)
    assert _join_curvature(bow, 0, 100) == pytest.approx(JOIN_FACTOR * d / (10.0 * 0.1), rel=1e-3)
