"""The check's samples are sized by the geometry, and no piece's feature escapes.

A contour of many short pieces gets a sample every geometric step; a piece
whose curvature bounds show something the step would miss keeps samples
of its own (pathgen.checks.sampling).  Reference values from outside the
project: scipy.interpolate.CubicSpline through the same points (sources:
scipy-cubicspline), the curvature of a plane curve and its polar form
(sources: curvature), the ellipse's smallest radius b²/a (sources:
ellipse), the rest-to-rest time L/v + v/a (sources: time-optimal).
"""

import numpy as np
import pytest
from scipy.interpolate import CubicSpline
from scipy.optimize import minimize_scalar

import pathgen.checks.sampling as sampling
from pathgen import Cut, Machine, Tool, check, fit
from pathgen.checks.feed import sampling_limits
from pathgen.checks.sampling import sample_contour

FAST = Machine(max_feed=3000, max_accel=1e6, block_rate=1e6)


def _reference(points, breaks):
    """scipy's periodic spline through the points at the contour's own
    parameters (chord lengths): the same curve, computed elsewhere."""
    return CubicSpline(breaks, np.r_[points, points[:1]], bc_type="periodic")


def _kappa(cs, t):
    # (sources: curvature)  κ = (x'y'' − y'x'') / (x'² + y'²)^{3/2}
    d1, d2 = cs(t, 1), cs(t, 2)
    return (d1[:, 0] * d2[:, 1] - d1[:, 1] * d2[:, 0]) / np.hypot(d1[:, 0], d1[:, 1]) ** 3


def _peak(cs, t, sign=1.0):
    """Largest sign·κ of scipy's spline over the grid ``t`` and the knots in
    it (κ' jumps at a knot: a peak can sit on one), refined by scipy's
    bounded scalar minimizer between the grid's neighbours."""
    knots = cs.x[(cs.x > t[0]) & (cs.x < t[-1])]
    t = np.sort(np.r_[t, knots])
    k = sign * _kappa(cs, t)
    i = int(np.argmax(k))
    a, b = t[max(i - 1, 0)], t[min(i + 1, len(t) - 1)]
    res = minimize_scalar(lambda u: -sign * _kappa(cs, np.array([u]))[0], bounds=(a, b),
                          method="bounded", options={"xatol": 1e-13 * max(abs(a), 1.0)})
    return max(float(k[i]), -float(res.fun))


def _cam(n):
    th = np.linspace(0.0, 2 * np.pi, n, endpoint=False)
    r = 60.0 + 8.0 * np.sin(3 * th) + 3.0 * np.cos(7 * th)
    return np.c_[r * np.cos(th), r * np.sin(th)]


@pytest.mark.parametrize("push", [0.2e-3, 2e-6])
def test_a_spike_on_one_short_piece_is_sampled_with_its_curvature(push):
    # 10^5 points on a circle of radius 50 (pieces 3 µm long); single
    # points pushed out by 0.2 µm (or 2 nm) bend the pieces round them far
    # tighter than the circle: radius 0.015 mm (or about 1.5 mm).  The
    # geometric step (about 0.08 mm) would step over them: the samples
    # must still hold each spike's largest |κ| (on its point's knot: κ'
    # jumps there), as scipy's spline through the same points has it (16
    # points per piece and the knots, refined by scipy's bounded
    # minimizer).  The sharper spikes turn the tangent too fast for a
    # geometric step; the milder ones are found by their pieces' curvature
    # bounds against the samples either side.
    n = 100_000
    th = np.linspace(0, 2 * np.pi, n, endpoint=False)
    pts = np.c_[50 * np.cos(th), 50 * np.sin(th)]
    spikes = [31_416 + 1009 * j for j in range(6)]  # at all phases of the geometric step
    pts[spikes] *= 1 + push / 50
    c = fit(pts, closed=True)
    S = sample_contour(c)
    assert S.geometric > 0.9 * n  # most pieces are sampled by geometry
    assert len(S) < 10_000  # 4 per piece would be 400 000
    cs = _reference(pts, np.asarray(c.breaks))
    tops = []
    for k0 in spikes:
        t = np.linspace(c.breaks[k0 - 3], c.breaks[k0 + 3], 6 * 16 + 1)
        tops.append(_peak(cs, t))
        assert tops[-1] > 25 / 50  # the spike: radius under 2 mm on a 50 mm circle
        near = (S.t >= t[0]) & (S.t <= t[-1])
        assert S.kappa[near].max() == pytest.approx(tops[-1], rel=1e-9)
    # and the report's smallest radius is the spikes'
    rep = check(c, FAST, Tool(0.0), Cut(side="on"))
    assert rep.min_radius.radius == pytest.approx(1 / max(tops), rel=1e-9)


def test_a_bump_that_binds_nothing_and_is_not_the_tightest_turn_is_still_sampled():
    # An ellipse 40 × 25 of 10^5 points (b/a² = 0.0156/mm on its flat
    # side, a/b² = 0.064/mm at its ends; sources: ellipse) with a bump
    # 40 nm high and about 0.1 mm wide on the flat side: |κ| there rises
    # to about 0.028/mm, nearly twice its neighbours', but stays below the ends'.
    # No limit binds (a fast machine, cutting on the line), so only the
    # curvature bounds against the samples either side can catch it: the
    # samples must hold the bump's largest κ (scipy's spline, as above).
    n = 100_000
    th = np.linspace(0, 2 * np.pi, n, endpoint=False)
    ds = 206.93 / n
    w = 0.05 / 25.0  # about 0.05 mm of arc either side on the flat side
    mid = np.pi / 2 + 0.0123  # off the geometric grid's symmetry
    bump = 4e-5 * np.exp(-(((th - mid) / w) ** 2))
    pts = np.c_[40 * np.cos(th), (25 + bump) * np.sin(th)]
    c = fit(pts, closed=True)
    cs = _reference(pts, np.asarray(c.breaks))
    k_mid = int(round(mid / (2 * np.pi) * n))
    lo, hi = c.breaks[k_mid - 200], c.breaks[k_mid + 200]
    t = np.linspace(lo, hi, 400 * 16 + 1)
    top = _peak(cs, t)
    assert 0.025 < top < 0.064 and ds < 0.003  # the bump, short pieces
    for side in ("on", "outside"):
        S = sample_contour(c, **sampling_limits(FAST, Tool(0.0), Cut(side=side)))
        assert len(S) < 20_000
        near = (S.t >= lo) & (S.t <= hi)
        assert S.kappa[near].max() == pytest.approx(top, rel=1e-6)
    # without the bump the same 0.8 mm are sampled by geometry only (a
    # sample every 207/4096 mm or so, where 4 per piece would be 1600)
    plain = fit(np.c_[40 * np.cos(th), 25 * np.sin(th)], closed=True)
    S0 = sample_contour(plain)
    assert np.count_nonzero((S0.t >= lo) & (S0.t <= hi)) < 30


def test_a_short_tight_notch_among_a_million_pieces_is_found_with_its_radius():
    # r(θ) = 60 − 0.3·exp(−(θ/w)²): at θ = 0, r' = 0 and r'' = 0.6/w², so
    # κ = (r − r'')/r² (sources: curvature; its polar form): w is chosen for a
    # concave radius of 1 mm, about 1.5 mm wide, among 10^6 points 0.38 µm
    # apart.  A 6 mm tool outside cannot reach into it (tool radius 3 > 1).
    n = 1_000_000
    r0 = 60.0 - 0.3
    w = np.sqrt(0.6 / (r0 + r0 * r0))  # (r0 − 0.6/w²)/r0² = −1
    th = np.linspace(-np.pi, np.pi, n, endpoint=False)
    r = 60.0 - 0.3 * np.exp(-((th / w) ** 2))
    c = fit(np.c_[r * np.cos(th), r * np.sin(th)], closed=True)
    machine, tool, cut = Machine(), Tool(6.0), Cut(side="outside")
    S = sample_contour(c, **sampling_limits(machine, tool, cut))
    assert len(S) < 100_000  # 4 per piece would be 4·10^6
    rep = check(c, machine, tool, cut)
    reach = [t for t in rep.tight_spots if t.reason == "reach"]
    assert len(reach) == 1
    spot = reach[0]
    assert spot.min_radius == pytest.approx(1.0, rel=1e-4)
    assert np.hypot(spot.x - r0, spot.y) < 1e-3  # at θ = 0
    assert rep.min_radius_right.radius == pytest.approx(1.0, rel=1e-4)


def test_smallest_radius_of_a_dense_ellipse_is_b2_over_a():
    # (sources: ellipse) smallest radius b²/a at the ends of the long axis
    a, b = 40.0, 25.0
    th = np.linspace(0, 2 * np.pi, 100_000, endpoint=False)
    c = fit(np.c_[a * np.cos(th), b * np.sin(th)], closed=True)
    rep = check(c, FAST, Tool(0.0), Cut(side="on"))
    assert rep.min_radius.radius == pytest.approx(b * b / a, rel=1e-7)
    assert abs(abs(rep.min_radius.x) - a) < 1e-6 and abs(rep.min_radius.y) < 1e-3


def test_the_number_of_samples_follows_the_shape_not_the_points():
    # the same cam at 2·10^4 and 2·10^5 points: about the same samples,
    # far fewer than 4 per piece
    counts = []
    for n in (20_000, 200_000):
        c = fit(_cam(n), closed=True)
        S = sample_contour(c, **sampling_limits(Machine(), Tool(6.0), Cut()))
        counts.append(len(S))
        assert len(S) < n / 2
    assert max(counts) / min(counts) < 1.5


def test_a_circle_takes_the_rest_to_rest_time_on_geometric_samples():
    # (sources: time-optimal) no limit binds on a 20 mm circle cut outside
    # with a 6 mm tool (√(a·R_c) = √(500·23) mm/s > 1000 mm/min): the cut
    # takes L/v + v/a on the tool-center circle, L = 2π·23
    th = np.linspace(0, 2 * np.pi, 100_000, endpoint=False)
    c = fit(np.c_[20 * np.cos(th), 20 * np.sin(th)], closed=True)
    rep = check(c, Machine(), Tool(6.0), Cut(feed=1000.0))
    L, v, a = 2 * np.pi * 23.0, 1000.0 / 60.0, 500.0
    assert rep.feed_plan.length == pytest.approx(L, rel=1e-7)
    assert rep.cycle_time == pytest.approx(L / v + v / a, rel=1e-7)
    assert not rep.tight_spots


@pytest.mark.parametrize("diameter", [24.0, 30.0])
def test_feed_plan_and_tight_spots_match_four_samples_per_piece(monkeypatch, diameter):
    # A machine whose acceleration binds on the cam's tighter bends
    # ((sources: centripetal-limit) √(a·R_c) < 1500 mm/min below R_c = 5 mm
    # on the tool-center path, R_c = R − r toward the tool), cut outside:
    # a 24 mm tool reaches everywhere (the tightest concave radius is about
    # 14.4 mm), a 30 mm one does not (sources: tool-radius-rule).  The
    # report on geometric samples against the report on 4 samples per
    # piece (the sampling before): same spots, radii, feeds, cycle time.
    c = fit(_cam(20_000), closed=True)
    machine, tool, cut = Machine(max_accel=125.0), Tool(diameter), Cut(feed=1500.0)
    rep = check(c, machine, tool, cut)
    real = sampling.sample_contour
    monkeypatch.setattr(sampling, "sample_contour", lambda contour, **kw: real(contour, per_piece=4))
    old = check(c, machine, tool, cut)
    # (the pieces that may bind keep their own samples: half of them here)
    assert old.feed_plan.s.size > 1.5 * rep.feed_plan.s.size
    reasons = [t.reason for t in rep.tight_spots]
    assert reasons == [t.reason for t in old.tight_spots]
    assert set(reasons) == ({"accel"} if diameter == 24.0 else {"reach", "accel"})
    # where the tool cannot reach, the stretch ends where the tool would cut
    # into the contour nearby, tested at tool positions r/256 apart: the
    # ends (and the acceleration stretches next to them) move within that
    r = tool.radius
    beside = [any(abs(t.start_s - u.end_s) < r / 64 or abs(t.end_s - u.start_s) < r / 64
                  for u in old.tight_spots if u.reason == "reach") for t in old.tight_spots]
    for new, was, near_reach in zip(rep.tight_spots, old.tight_spots, beside):
        assert (new.start_s, new.end_s) == pytest.approx((was.start_s, was.end_s), abs=r / 128)
        if near_reach:
            continue
        assert new.min_radius == pytest.approx(was.min_radius, rel=1e-9)
        assert (new.x, new.y, new.s) == pytest.approx((was.x, was.y, was.s), abs=1e-6)
        assert new.allowed_feed == pytest.approx(was.allowed_feed, rel=1e-9)
        if new.reason == "reach":  # measured on tool positions r/1000 apart
            assert new.material_left == pytest.approx(was.material_left, abs=r / 30_000)
    assert not all(beside)
    # the tool-center length ∫(1 − dκ) ds by the trapezoid rule on samples
    # 0.09 mm apart where no limit binds, against 4 per 0.02 mm piece:
    # about 2e-6 apart with these tool radii
    assert rep.cycle_time == pytest.approx(old.cycle_time, rel=1e-5)
    assert rep.path_length == pytest.approx(old.path_length, rel=1e-5)
    assert rep.min_radius.radius == pytest.approx(old.min_radius.radius, rel=1e-12)
    assert rep.largest_tool_diameter == pytest.approx(old.largest_tool_diameter, rel=1e-9)
    assert len(rep.inflections) == len(old.inflections)
    got = np.array([p[2] for p in rep.inflections])
    was = np.array([p[2] for p in old.inflections])
    assert np.abs(got - was).max() < 1e-3


def test_tool_center_length_on_noisy_short_pieces_is_the_contour_length_plus_2_pi_r():
    # (sources: turning-tangents, farouki-neff-1990) the tool-center path
    # of a closed counter-clockwise contour cut outside with radius r,
    # where the tool reaches everywhere, is ∫(1 + rκ) ds = L + 2πr.  10^5
    # points with 0.1 µm of noise, fitted exactly, make κ wiggle by about
    # its own size from piece to piece: samples a geometric step apart
    # must not read that wiggle into the length.
    rng = np.random.default_rng(7)
    pts = _cam(100_000) + rng.normal(0.0, 1e-7, (100_000, 2))
    c = fit(pts, closed=True)
    rep = check(c, FAST, Tool(2.0), Cut(side="outside"))
    assert not rep.tight_spots
    S = sample_contour(c, **sampling_limits(FAST, Tool(2.0), Cut(side="outside")))
    assert S.geometric > 50_000
    assert rep.path_length == pytest.approx(c.length + 2 * np.pi * 1.0, rel=1e-9)
