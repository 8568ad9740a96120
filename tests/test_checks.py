"""The machinability check: tight spots, radii, tool reach, material left, report.

Reference values: handbook geometry (circle, ellipse, corner and fillet
clearance), scipy.special.ellipe, kinematics; sources beside each check.
"""

import json
import math

import numpy as np
import pytest
from conftest import star_contour
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.special import ellipe

from pathgen import Contour, Cut, Machine, Tool, check, fit
from pathgen.checks.report import CAUTION, REASONS
from pathgen.errors import InputError

FAST = Machine(max_feed=3000, max_accel=1e6, block_rate=1e6)


def circle(R, n=400, ccw=True):
    th = np.linspace(0, 2 * np.pi, n, endpoint=False)
    if not ccw:
        th = -th
    return fit(np.c_[R * np.cos(th), R * np.sin(th)], closed=True)


def ellipse(a, b, n=800):
    th = np.linspace(0, 2 * np.pi, n, endpoint=False)
    return fit(np.c_[a * np.cos(th), b * np.sin(th)], closed=True)


def join(*contours):
    """Open contours joined end to start into one, with a corner at each joint."""
    breaks, coefs, points, corners = [0.0], [], [contours[0].points[:1]], []
    for c in contours:
        b = np.asarray(c.breaks)
        breaks.extend((breaks[-1] + b[1:] - b[0]).tolist())
        coefs.append(np.asarray(c.coefficients))
        points.append(c.points[1:])
        corners.append(len(breaks) - 1)
    return Contour(np.array(breaks), np.concatenate(coefs, axis=1), False,
                   np.vstack(points), corners=corners[:-1])


def square(side=40.0):
    """A closed counter-clockwise square, one straight piece per side, corners
    at the joints and at the seam."""
    c = [(0, 0), (side, 0), (side, side), (0, side), (0, 0)]
    sides = [fit([c[i], c[i + 1]]) for i in range(4)]
    open_ = join(*sides)
    return Contour(open_.breaks, open_.coefficients, True, open_.points[:-1],
                   corners=open_.corners)


def wedge(theta, L=20.0):
    """Two straight sides meeting at the origin with opening angle theta (radians)."""
    a = fit([[L, 0.0], [0.0, 0.0]])
    b = fit([[0.0, 0.0], [L * math.cos(theta), L * math.sin(theta)]])
    return join(a, b)


# -- tool reach -------------------------------------------------------------------------


@pytest.mark.parametrize("diameter, reach", [(9.0, True), (7.0, False)])
def test_hole_smaller_than_the_tool(diameter, reach):
    # Geometry / NISTIR 6556's "tool radius not less than arc radius" rule
    # (sources: tool-radius-rule): cutting inside a circle of radius 4, a tool of radius
    # 4.5 cannot reach; radius 3.5 can.
    rep = check(circle(4.0), FAST, Tool(diameter), Cut(side="inside"))
    assert rep.tool_cannot_reach is reach
    assert (rep.count("reach") > 0) is reach
    # the largest tool is the hole's diameter (geometry)
    # (1e-4: the cubic fit's own curvature error on 400 points)
    assert rep.largest_tool_diameter == pytest.approx(8.0, rel=1e-4)


@pytest.mark.parametrize("side", ["outside", "on"])
def test_convex_side_is_never_out_of_reach(side):
    # Geometry: outside a circle (or on its line) nothing bends toward the tool.
    rep = check(circle(4.0), FAST, Tool(20.0), Cut(side=side))
    assert not rep.tool_cannot_reach
    assert rep.largest_tool_diameter is None


def test_side_follows_the_part_for_a_clockwise_outline():
    # Geometry: "inside" is the hole whichever way the outline runs.
    rep = check(circle(4.0, ccw=False), FAST, Tool(9.0), Cut(side="inside"))
    assert rep.orientation == "clockwise"
    assert rep.tool_cannot_reach
    assert not check(circle(4.0, ccw=False), FAST, Tool(9.0), Cut(side="outside")).tool_cannot_reach


def test_ellipse_tight_spots_at_the_major_axis_ends():
    # Handbook: an ellipse's smallest radius b²/a is at (±a, 0); a = 30,
    # b = 20 gives 13.333 mm.  A tool of radius 14 inside reaches everywhere
    # else (the ellipse is 40 mm wide).
    a, b = 30.0, 20.0
    e = ellipse(a, b)
    rep = check(e, FAST, Tool(28.0), Cut(side="inside"))
    reach = [t for t in rep.tight_spots if t.reason == "reach"]
    assert len(reach) == 2
    xs = sorted(t.x for t in reach)
    assert xs == pytest.approx([-a, a], abs=1e-6)
    assert [t.y for t in reach] == pytest.approx([0.0, 0.0], abs=1e-6)
    for t in reach:
        # rel 1e-4: the cubic fit's own curvature error on 800 points
        assert t.min_radius == pytest.approx(b * b / a, rel=1e-4)
        assert t.allowed_feed == 0.0
        assert 0 < t.material_left < 14.0 - b * b / a
    assert rep.min_radius.radius == pytest.approx(b * b / a, rel=1e-4)
    assert rep.largest_tool_diameter == pytest.approx(2 * b * b / a, rel=1e-4)
    # the perimeter: 4·a·E(1 - b²/a²) with scipy.special.ellipe (sources: ellipe)
    assert rep.length == pytest.approx(4 * a * ellipe(1 - b * b / (a * a)), rel=1e-8)
    # the spot at (-a, 0) lies half way round from the start at (a, 0)
    left = min(reach, key=lambda t: t.x)
    assert left.s == pytest.approx(rep.length / 2, rel=1e-6)


def test_ellipse_vertex_curvature_at_both_axes():
    # Handbook: radius b²/a at the major-axis ends, a²/b at the minor-axis ends.
    a, b = 3.5, 2.1
    rep = check(ellipse(a, b, n=1000), FAST, Tool(0.0), Cut(side="on"))
    assert rep.min_radius_left.radius == pytest.approx(b * b / a, rel=1e-4)
    assert rep.min_radius_right is None
    assert abs(rep.min_radius_left.x) == pytest.approx(a, rel=1e-9)


@pytest.mark.parametrize("theta_deg", [90.0, 60.0, 120.0])
def test_material_left_in_a_sharp_inside_corner(theta_deg):
    # Handbook: a tool of radius r in an inside corner of opening angle θ
    # stands r/sin(θ/2) from the corner, leaving r·(1/sin(θ/2) - 1) uncut.
    theta = math.radians(theta_deg)
    r = 3.0
    rep = check(wedge(theta), FAST, Tool(2 * r), Cut(side="outside"))
    reach = [t for t in rep.tight_spots if t.reason == "reach"]
    assert len(reach) == 1
    spot = reach[0]
    assert spot.min_radius == 0.0 and (spot.x, spot.y) == pytest.approx((0.0, 0.0), abs=1e-12)
    expected = r * (1 / math.sin(theta / 2) - 1)
    # sampling every r/1000 along the sides bounds the error by about r/1000
    assert spot.material_left == pytest.approx(expected, abs=r * 2e-3)
    assert rep.largest_tool_diameter == 0.0
    assert len(rep.corners) == 1 and rep.corners[0][3] == pytest.approx(-(180 - theta_deg))


def test_outside_corner_is_reached_and_slows_the_machine():
    # Geometry: on the other side the same corner points at the tool, which
    # rolls round it on an arc of radius r; the centripetal limit there is
    # 60·√(a·r) (sources: centripetal-limit).
    r = 3.0
    m = Machine(max_feed=3000, max_accel=500, block_rate=1e6)
    rep = check(wedge(math.radians(90)), m, Tool(2 * r), Cut(side="inside", feed=3000))
    assert not rep.tool_cannot_reach
    accel = [t for t in rep.tight_spots if t.reason == "accel"]
    assert len(accel) == 1
    assert accel[0].allowed_feed == pytest.approx(60 * math.sqrt(500 * r), rel=1e-12)
    # the tool center goes a quarter circle of radius r further (geometry)
    assert rep.path_length == pytest.approx(40.0 + r * math.pi / 2, rel=1e-12)


def test_square_outside_and_inside():
    r, a = 3.0, 500.0
    m = Machine(max_feed=3000, max_accel=a, block_rate=1e6)
    sq = square(40.0)
    out = check(sq, m, Tool(2 * r), Cut(side="outside", feed=3000))
    assert len(out.corners) == 4 and all(c[3] == pytest.approx(90.0) for c in out.corners)
    assert not out.tool_cannot_reach
    # Steiner (sources: steiner): the outer offset of a convex outline is P + 2πr long
    assert out.path_length == pytest.approx(160.0 + 2 * math.pi * r, rel=1e-12)
    accel = [t for t in out.tight_spots if t.reason == "accel"]
    assert len(accel) == 4
    # (sources: steiner) round each corner the tool center runs an arc of radius r
    for t in accel:
        assert t.allowed_feed == pytest.approx(60 * math.sqrt(a * r), rel=1e-12)
        assert t.length == 0.0
    assert {(t.x, t.y) for t in accel} == {(0.0, 0.0), (40.0, 0.0), (40.0, 40.0), (0.0, 40.0)}
    ins = check(sq, m, Tool(2 * r), Cut(side="inside", feed=3000))
    reach = [t for t in ins.tight_spots if t.reason == "reach"]
    assert len(reach) == 4
    # handbook: r(1/sin(θ/2) - 1) in each 90° inside corner
    for t in reach:
        assert t.material_left == pytest.approx(r * (math.sqrt(2) - 1), abs=r * 2e-3)
    # geometry: inside, each side loses r at both ends; to within the sample
    # spacing (40 mm / 1024) at each of the 8 trimmed ends
    assert ins.path_length == pytest.approx(4 * (40.0 - 2 * r), abs=8 * 40.0 / 1024)
    # kinematics: the tool stops in each inside corner, so four trapezoids
    # of 34 mm at 50 mm/s with a = 500 mm/s²: 4·(34/50 + 50/500) = 3.12 s
    assert ins.cycle_time == pytest.approx(3.12, abs=8 * 40.0 / 1024 / 50)


def test_material_left_in_a_small_fillet():
    # Geometry [derived]: a fillet of radius R between two perpendicular
    # sides, a tool of radius r > R: the tool stands r·√2 from the virtual
    # corner, the fillet's middle R·(√2 - 1) from it, so (r - R)(√2 - 1)
    # is left.
    R, r = 1.0, 3.0
    fillet_pts = np.c_[R + R * np.cos(np.linspace(-np.pi / 2, -np.pi, 60)),
                       R + R * np.sin(np.linspace(-np.pi / 2, -np.pi, 60))]
    a = fit([[20.0, 0.0], fillet_pts[0]])
    arc = fit(fillet_pts, end="clamped", tangents=([-1.0, 0.0], [0.0, 1.0]))
    b = fit([fillet_pts[-1], [0.0, 20.0]])
    rep = check(join(a, arc, b), FAST, Tool(2 * r), Cut(side="outside"))
    reach = [t for t in rep.tight_spots if t.reason == "reach"]
    assert len(reach) == 1
    assert reach[0].min_radius == pytest.approx(R, rel=1e-3)
    assert reach[0].material_left == pytest.approx((r - R) * (math.sqrt(2) - 1), abs=r * 2e-3)


def test_gap_narrower_than_the_tool():
    # Geometry: an ellipse 4.2 mm wide cannot take a 6 mm tool anywhere,
    # although its smallest radius only sits at the ends.
    rep = check(ellipse(3.5, 2.1), FAST, Tool(6.0), Cut(side="inside"))
    assert rep.tool_cannot_reach
    reach = [t for t in rep.tight_spots if t.reason == "reach"]
    assert len(reach) == 1 and reach[0].length == pytest.approx(rep.length)
    assert reach[0].material_left is None


# -- acceleration and block-rate spots ----------------------------------------------------


def test_acceleration_spot_and_max_constant_feed():
    # (sources: centripetal-limit) on radius R the machine holds 60·√(a·R): R = 5, a = 1000
    # gives 4242.6 mm/min; a programmed 6000 mm/min is too fast all round.
    m = Machine(max_feed=10000, max_accel=1000, block_rate=1e6)
    rep = check(circle(5.0, n=600), m, Tool(0.0), Cut(side="on", feed=6000))
    assert rep.max_constant_feed == pytest.approx(4242.6, rel=1e-4)
    accel = [t for t in rep.tight_spots if t.reason == "accel"]
    assert len(accel) == 1
    assert accel[0].allowed_feed == pytest.approx(4242.6, rel=1e-4)
    assert accel[0].length == pytest.approx(rep.length, rel=1e-9)
    assert rep.full_feed_share == 0.0
    # below the limit nothing is tight and the feed is held (kinematics:
    # rest to rest at 4000 mm/min, 66.7 mm/s, a = 1000 loses v²/a of length)
    rep = check(circle(5.0, n=600), m, Tool(0.0), Cut(side="on", feed=4000))
    assert rep.tight_spots == ()
    v = 4000 / 60
    assert rep.full_feed_share == pytest.approx(1 - v * v / 1000 / rep.length, rel=1e-9)


def test_block_rate_spot():
    # (sources: sagitta, block-rate) lines within e = 0.01 on R = 5 are 0.632 mm; at 100 blocks/s
    # that is 63.2 mm/s = 3793 mm/min, below the programmed 4000.
    m = Machine(max_feed=10000, max_accel=1e6, block_rate=100)
    rep = check(circle(5.0, n=600), m, Tool(0.0), Cut(side="on", feed=4000, tolerance=0.01))
    blocks = [t for t in rep.tight_spots if t.reason == "blocks"]
    assert len(blocks) == 1
    expected = 60 * 100 * 2 * math.sqrt(0.01 * (2 * 5 - 0.01))
    assert blocks[0].allowed_feed == pytest.approx(expected, rel=1e-4)
    assert rep.max_constant_feed == pytest.approx(expected, rel=1e-4)


def test_tight_spot_extent_on_an_ellipse():
    # Handbook: the radius of curvature of x = a cos t, y = b sin t is
    # (a² sin² t + b² cos² t)^{3/2} / (a b); the acceleration spot is where
    # 60·√(a_max·R) < feed, i.e. R < (feed/60)²/a_max.
    a, b = 30.0, 20.0
    amax, feed = 100.0, 4000.0
    rep = check(ellipse(a, b, n=2000), Machine(max_feed=10000, max_accel=amax, block_rate=1e6),
                Tool(0.0), Cut(side="on", feed=feed))
    accel = [t for t in rep.tight_spots if t.reason == "accel"]
    assert len(accel) == 2
    Rlim = (feed / 60) ** 2 / amax
    t = np.linspace(0, 2 * np.pi, 2_000_001)
    Rt = (a * a * np.sin(t) ** 2 + b * b * np.cos(t) ** 2) ** 1.5 / (a * b)
    ds = np.hypot(a * np.sin(t), b * np.cos(t)) * (t[1] - t[0])
    expected = float(ds[Rt < Rlim].sum()) / 2
    for spot in accel:
        assert spot.length == pytest.approx(expected, rel=1e-4)


def test_inflections_of_a_sine():
    # Calculus: y = sin x has y'' = 0 and a curvature sign change at x = kπ.
    x = np.linspace(0, 4 * np.pi, 801)
    rep = check(fit(np.c_[x, np.sin(x)]), FAST, Tool(0.0), Cut(side="on"))
    xs = sorted(p[0] for p in rep.inflections)
    assert xs == pytest.approx([np.pi, 2 * np.pi, 3 * np.pi], abs=1e-4)
    assert check(circle(3.0), FAST, Tool(0.0), Cut(side="on")).inflections == ()


def test_area_and_orientation():
    # Handbook: a circle of radius 7 encloses π·49.
    rep = check(circle(7.0), FAST, Tool(1.0), Cut())
    assert rep.area == pytest.approx(math.pi * 49, rel=1e-8)
    assert rep.orientation == "counter-clockwise"
    rep = check(fit([[0, 0], [5, 1], [10, 0]]), FAST, Tool(1.0), Cut())
    assert rep.area is None and rep.orientation is None


def test_closed_spot_running_over_the_seam():
    # The seam of this ellipse is at (a, 0), in the middle of a tight spot:
    # one spot, from near the end of the contour round to near its start.
    a, b = 30.0, 20.0
    rep = check(ellipse(a, b), FAST, Tool(28.0), Cut(side="inside"))
    seam = [t for t in rep.tight_spots if t.reason == "reach" and t.x > 0][0]
    assert seam.end_s < seam.start_s
    assert seam.length == pytest.approx(seam.end_s + rep.length - seam.start_s, rel=1e-9)


# -- the report ---------------------------------------------------------------------------------


def test_report_json_and_text():
    a, b = 30.0, 20.0
    m = Machine(max_feed=5000, max_accel=200, block_rate=300, name="test mill")
    rep = check(ellipse(a, b), m, Tool(28.0), Cut(side="inside", feed=4000))
    data = rep.to_dict()
    text = json.dumps(data, allow_nan=False)  # no NaN or inf anywhere
    assert json.loads(text) == data
    assert data["machine"]["name"] == "test mill" and data["cut"]["side"] == "inside"
    assert data["tool_cannot_reach"] is True
    assert len(data["tight_spots"]) == len(rep.tight_spots)
    assert {s["reason"] for s in data["tight_spots"]} <= set(REASONS)
    assert data["units"]["length"] == "mm"
    inch = rep.to_dict(units="inch")
    assert inch["length"] == pytest.approx(data["length"] / 25.4, rel=1e-9)
    assert inch["machine"]["max_feed"] == pytest.approx(5000 / 25.4, rel=1e-9)
    out = rep.to_text()
    lines = out.splitlines()
    spot_lines = [ln for ln in lines if ln.startswith("  ") and ln.strip().split()[0] in
                  ("tool", "acceleration", "block")]
    assert len(spot_lines) == len(rep.tight_spots)
    assert CAUTION in out and "CANNOT CUT" in out
    assert "e-" not in out and "nan" not in out
    # same input, same bytes
    assert json.dumps(check(ellipse(a, b), m, Tool(28.0), Cut(side="inside", feed=4000)).to_dict()) == text


def test_report_is_immutable_and_null_for_straight():
    rep = check(fit([[0.0, 0.0], [10.0, 0.0]]), FAST, Tool(3.0), Cut())
    assert rep.min_radius is None and rep.largest_tool_diameter is None
    data = rep.to_dict()
    assert data["min_radius"] is None and data["largest_tool_diameter"] is None
    with pytest.raises(AttributeError):
        rep.length = 3.0


def test_check_errors():
    with pytest.raises(InputError, match="contour must be a pathgen Contour"):
        check([[0, 0], [1, 1]])
    with pytest.raises(InputError, match="tool must be a pathgen Tool"):
        check(circle(3.0), Machine(), 6.0)
    with pytest.raises(InputError, match="units='cm' is not one of"):
        check(circle(3.0)).to_dict(units="cm")
    with pytest.raises(InputError, match="reason='gap' is not one of"):
        check(circle(3.0)).count("gap")


def star(seed, n=150):
    """A smooth random star-shaped closed outline (counter-clockwise)."""
    return star_contour(seed, n, amplitude=2.5, harmonics=6)


@settings(max_examples=12, deadline=None)
@given(seed=st.integers(0, 10_000), side=st.sampled_from(["outside", "inside"]))
def test_largest_tool_is_the_reach_threshold(seed, side):
    # Geometry (sources: tool-radius-rule): a tool 5 % larger than the
    # largest that reaches everywhere cannot reach somewhere; one 5 %
    # smaller meets no bend tighter than itself.
    c = star(seed)
    big = check(c, FAST, Tool(0.0), Cut(side=side)).largest_tool_diameter
    if big is None:  # nothing bends toward the tool on this side
        assert not check(c, FAST, Tool(30.0), Cut(side=side)).tool_cannot_reach
        return
    over = check(c, FAST, Tool(1.05 * big), Cut(side=side))
    assert over.tool_cannot_reach
    under = check(c, FAST, Tool(0.95 * big), Cut(side=side))
    assert all(t.min_radius > 0.95 * big / 2 for t in under.tight_spots if t.reason == "reach")
    json.dumps(under.to_dict(), allow_nan=False)


@pytest.mark.parametrize("shape", ["circle", "ellipse", "star", "square"])
@pytest.mark.parametrize("per_piece", [None, 5])
def test_samples_run_in_order_along_the_contour(shape, per_piece):
    # sample_contour merges per-piece grids, piece ends at corners and the
    # refined maxima of |κ| without sorting everything; on a circle |κ| is
    # flat to rounding, so maxima sit next to each other.  The samples must
    # still run in order of parameter and arc length, and the arc length
    # must reach the perimeter: 2πR (handbook), 4a·E(1 - b²/a²) for the
    # ellipse (scipy.special.ellipe), 4 × side for the square (handbook).
    from pathgen.checks.sampling import sample_contour

    if shape == "circle":
        c, perimeter = circle(7.0), 2 * np.pi * 7.0
    elif shape == "ellipse":
        c, perimeter = ellipse(3.5, 2.1, n=400), 4 * 3.5 * ellipe(1 - (2.1 / 3.5) ** 2)
    elif shape == "star":
        c, perimeter = star_contour(3), None
    else:
        c, perimeter = square(5.0), 20.0
    s = sample_contour(c, per_piece=per_piece)
    assert np.all(np.diff(s.t) >= -1e-12 * (c.breaks[-1] - c.breaks[0]))
    assert np.all(np.diff(s.s) >= 0.0)
    assert s.s[0] == 0.0 and s.s[-1] == pytest.approx(s.length, rel=1e-12)
    if perimeter is not None:
        assert s.length == pytest.approx(perimeter, rel=1e-6)
    assert (np.count_nonzero(s.corner) == 8) == (shape == "square")  # both sides of 4 corners
    # away from corners each sample's tangent is the contour's at its parameter
    smooth = ~s.corner
    assert np.allclose(s.tangent[smooth], c.tangent(s.t[smooth]), atol=1e-9)


def test_samples_stay_in_order_when_two_maxima_share_a_gap(monkeypatch):
    # A plateau of |κ| can give two refined maxima between the same pair of
    # samples, reported out of order; the merge must then sort them.
    import pathgen.checks.sampling as sampling

    real = sampling._refine_maxima

    def twice(c, h, idx, x, kabs, iterations=30):
        pi, px, k = real(c, h, idx, x, kabs, iterations)
        assert len(pi) > 0
        # a second maximum just before the first, listed after it
        gap_lo = np.where(px >= x[k], x[k], x[np.maximum(k - 1, 0)])
        extra = px[:1] - 0.5 * (px[:1] - gap_lo[:1])
        return np.r_[pi, pi[:1]], np.r_[px, extra], np.r_[k, k[:1]]

    monkeypatch.setattr(sampling, "_refine_maxima", twice)
    c = ellipse(3.5, 2.1, n=400)
    s = sampling.sample_contour(c)
    assert np.all(np.diff(s.t) >= 0.0)
    assert s.length == pytest.approx(4 * 3.5 * ellipe(1 - (2.1 / 3.5) ** 2), rel=1e-6)  # scipy.special.ellipe


def test_inflections_of_a_dense_rounded_cam(monkeypatch):
    # Calculus: a polar curve r(φ) bends the other way where
    # r² + 2r'² − r r'' changes sign (handbook curvature of a polar curve);
    # roots by scipy.optimize.brentq, arc lengths by scipy.integrate.quad.
    # 20 000 points rounded to 1e-7 mm put curvature noise of about 1e-3/mm
    # into the interpolating spline: near each true inflection κ then
    # changes sign many times (160 sign changes in all).  The report must
    # still list the 14 true inflections, each within 0.05 mm of its place.
    from scipy.integrate import quad
    from scipy.optimize import brentq

    import pathgen.checks.reach as reach

    def r(t, d=0):
        return [60 + 8 * np.sin(3 * t) + 3 * np.cos(7 * t), 24 * np.cos(3 * t) - 21 * np.sin(7 * t),
                -72 * np.sin(3 * t) - 147 * np.cos(7 * t)][d]

    def numerator(t):
        return r(t) ** 2 + 2 * r(t, 1) ** 2 - r(t) * r(t, 2)

    g = np.linspace(0, 2 * np.pi, 20001)
    v = numerator(g)
    roots = [brentq(numerator, g[i], g[i + 1]) for i in np.flatnonzero(np.sign(v[:-1]) != np.sign(v[1:]))]
    expected = [quad(lambda t: np.hypot(r(t), r(t, 1)), 0, t0, limit=200)[0] for t0 in roots]
    th = np.linspace(0, 2 * np.pi, 20000, endpoint=False)
    c = fit(np.round(np.c_[r(th) * np.cos(th), r(th) * np.sin(th)], 7), closed=True)
    rep = check(c, FAST, Tool(0.0), Cut(side="on"))
    got = sorted(p[2] for p in rep.inflections)
    assert len(expected) == 14
    assert got == pytest.approx(expected, abs=0.05)
    # the data does carry the noise this is about: without the wiggle test
    # every sign change would be listed (on 4 samples per piece; the check
    # samples these short pieces by geometry, which sees fewer of them)
    from pathgen.checks.sampling import sample_contour

    monkeypatch.setattr(reach, "WIGGLE_BOW", 0.0)
    assert len(reach.inflections(sample_contour(c, per_piece=4), 150.0)) > 100


def test_spots_the_tool_cannot_reach_have_no_feed_in_the_outputs():
    # a feed of 0 read as a setting; where the tool cannot reach it cannot
    # cut at all (tool-radius rule; sources: tool-radius-rule): the text
    # says so and the JSON has no feed there
    import json

    from pathgen.pipeline import run

    from pathlib import Path

    res = run(Path(__file__).resolve().parent.parent / "samples" / "plate.csv", tool_diameter=6)  # two sharp inside corners
    reach = [t for t in res.report.tight_spots if t.reason == "reach"]
    assert len(reach) == 2
    assert res.report.to_text().count("cannot cut") >= 2
    data = res.report.to_dict()
    assert all(s["allowed_feed"] is None for s in data["tight_spots"] if s["reason"] == "reach")
    json.dumps(data, allow_nan=False)
