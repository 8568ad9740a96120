"""Lines and circular arcs recognised in outline points.

Outside references:
* circle fit: the geometric least squares circle computed independently
  with ``scipy.optimize.least_squares`` on the residuals |P − c| − R
  (Chernov, "Circular and Linear Regression: Fitting Circles and Lines by
  Least Squares", CRC Press 2010, ch. 4: the geometric fit), and exact
  generated circles; the algebraic start is Kåsa's fit (Kåsa, "A circle
  fitting procedure and its error analysis", IEEE Trans. Instrum. Meas.
  IM-25(1), 1976);
* line fit: total least squares, the direction of the largest singular
  vector of the centred points (Golub & Van Loan, "Matrix Computations",
  4th ed. 2013, §6.3 total least squares), computed with numpy's SVD;
* rounded rectangle W × H with corner radius r: area W·H − (4 − π)·r²,
  perimeter 2(W + H) − (8 − 2π)·r (plane geometry, derived);
* a four-centre oval: arcs of radii r and R on centres (±a, 0) and (0, ±b)
  meet tangent when √(a² + b²) = R − r (plane geometry: internally tangent
  circles, the contact point on the line of centres, derived);
* rounding a coordinate to a step q moves a point at most q/√2 (common
  practice).
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest

from pathgen.noise import estimate_noise
from pathgen.outline import fit_outline
from pathgen.points import clean_points
from pathgen.primitives import (MIN_SWEEP, describe, find_pieces, fit_circle, fit_line, pieces_contour,
                                recognition_bound)

from test_part import _exact_ring

W, H, R = 120.0, 80.0, 8.0


def rounded_rect(step, decimals):
    r = R
    pieces = [("line", (r, 0), (W - r, 0)), ("arc", (W - r, r), r, -90, 0), ("line", (W, r), (W, H - r)),
              ("arc", (W - r, H - r), r, 0, 90), ("line", (W - r, H), (r, H)), ("arc", (r, H - r), r, 90, 180),
              ("line", (0, H - r), (0, r)), ("arc", (r, r), r, 180, 270)]
    return np.round(_exact_ring(pieces, step), decimals)


def radii_on(c, mask_fn, n=200001):
    """Smallest and largest radius of curvature where mask_fn(xy) holds."""
    s = np.linspace(*c.domain, n)
    xy = c(s)
    k = np.abs(c.curvature(s))[mask_fn(xy)]
    return 1.0 / k.max(), 1.0 / max(k.min(), 1e-300)


def in_corners(xy):
    """Inside the four fillets' quarter squares, away from the tangent points by 0.05 mm."""
    x, y = xy[:, 0], xy[:, 1]
    return (((x < R - 0.05) | (x > W - R + 0.05)) & ((y < R - 0.05) | (y > H - R + 0.05)))


# -- fits ----------------------------------------------------------------------------------


def test_circle_fit_matches_scipy_geometric_fit():
    from scipy.optimize import least_squares

    rng = np.random.default_rng(7)
    a = rng.uniform(0.3, 2.0, 40)
    p = np.c_[5 + 12 * np.cos(a), -3 + 12 * np.sin(a)] + rng.normal(0, 0.01, (40, 2))
    c, r, e = fit_circle(p)
    # the geometric least squares circle (Chernov 2010, ch. 4), solved by scipy from another start
    ref = least_squares(lambda v: np.hypot(p[:, 0] - v[0], p[:, 1] - v[1]) - v[2], x0=[0.0, 0.0, 5.0],
                        xtol=1e-15, ftol=1e-15, gtol=1e-15)
    np.testing.assert_allclose([*c, r], ref.x, rtol=0, atol=1e-8)
    np.testing.assert_allclose(e, np.abs(ref.fun).max(), rtol=0, atol=1e-8)


@pytest.mark.parametrize("sweep", [0.4, 1.5, 2 * math.pi])
def test_circle_fit_exact_circles(sweep):
    a = np.linspace(0.2, 0.2 + sweep, 50, endpoint=sweep < 6)
    p = np.c_[100 + 7.5 * np.cos(a), 40 + 7.5 * np.sin(a)]
    c, r, e = fit_circle(p)
    np.testing.assert_allclose([*c, r], [100, 40, 7.5], rtol=0, atol=1e-9)
    assert e < 1e-9


def test_line_fit_is_total_least_squares():
    rng = np.random.default_rng(3)
    t = rng.uniform(0, 30, 60)
    p = np.c_[2 + 0.8 * t, 1 + 0.6 * t] + rng.normal(0, 0.02, (60, 2))
    c, d, e = fit_line(p)
    # TLS direction: the first right singular vector of the centred points (Golub & Van Loan §6.3)
    v = np.linalg.svd(p - p.mean(axis=0))[2][0]
    np.testing.assert_allclose(abs(float(d @ v)), 1.0, rtol=0, atol=1e-12)
    np.testing.assert_allclose(c, p.mean(axis=0), rtol=0, atol=1e-12)
    q = p - c
    np.testing.assert_allclose(e, np.abs(q[:, 0] * v[1] - q[:, 1] * v[0]).max(), rtol=0, atol=1e-12)


def test_bound_is_the_rounding():
    p = rounded_rect(0.1, 3)
    # rounding to q moves a point at most q/√2 (common practice); the bound leaves 6 % room
    assert recognition_bound(p, 0.001) == pytest.approx(0.75e-3)
    assert recognition_bound(p, None) == pytest.approx(1e-9 * math.hypot(W, H))


# -- the rounded rectangle -----------------------------------------------------------------


@pytest.mark.parametrize("step, decimals", [(0.1, 9), (0.25, 6), (0.1, 3), (0.01, 3)])
def test_rounded_rectangle_from_points(step, decimals):
    o = clean_points(rounded_rect(step, decimals), closed=True)
    c = fit_outline(o, smooth="auto")
    rec = c.info["recognised"]
    assert (rec["lines"], rec["arcs"], rec["free"]) == (4, 4, 0)
    assert describe_ok(rec["text"])
    # each fillet R8 within 0.001 mm: the fitted radii and the contour's curvature there
    np.testing.assert_allclose(rec["radii"], R, rtol=0, atol=1e-3)
    lo, hi = radii_on(c, in_corners)
    assert R - 1e-3 <= lo and hi <= R + 1e-3
    # tangent everywhere: no corners; every point within the bound (measured)
    assert c.corners == ()
    assert c.info["max_residual"] <= rec["bound"]
    # area W·H − (4 − π)r² and perimeter 2(W + H) − (8 − 2π)r (geometry): within what the
    # points' rounding allows (the fitted lines and radii move by a share of q), and 1e-6 mm²/mm
    # for points at 9 decimals
    q = 10.0 ** -decimals
    area = W * H - (4 - math.pi) * R**2
    per = 2 * (W + H) - (8 - 2 * math.pi) * R
    assert abs(abs(c.area) - area) <= max(1e-6, 2 * (W + H) * q)
    assert abs(c.length - per) <= max(1e-6, 10 * q)


def describe_ok(text):
    return text == "4 lines, 4 arcs R8.000"


def test_spline_only_reads_the_fillets_smaller():
    # what recognition fixes: the interpolating C2 spline overshoots where the curvature jumps
    o = clean_points(rounded_rect(0.1, 9), closed=True)
    c = fit_outline(o, smooth="auto", find_arcs=False)
    assert "recognised" not in c.info
    lo, _ = radii_on(c, lambda xy: np.ones(len(xy), bool))
    assert lo < R - 0.5


def test_sharp_corners_stay_sharp():
    # three sharp corners and one R8 fillet: the lines meet the arc tangent, each other at 90°
    r = R
    pieces = [("line", (0, 0), (W - r, 0)), ("arc", (W - r, r), r, -90, 0), ("line", (W, r), (W, H)),
              ("line", (W, H), (0, H)), ("line", (0, H), (0, 0))]
    o = clean_points(np.round(_exact_ring(pieces, 0.1), 6), closed=True)
    c = fit_outline(o, smooth="auto")
    assert c.info["recognised"]["text"] == "4 lines, 1 arc R8.000"
    assert len(c.corners) == 3
    # the corners are where the drawn lines cross (geometry), within the rounding
    at = c(c.breaks[list(c.corners)])
    want = np.array([(W, H), (0, H), (0, 0)])
    d = np.hypot(*(at[:, None, :] - want[None]).transpose(2, 0, 1)).min(axis=1)
    assert d.max() <= 2e-6
    assert abs(abs(c.area) - (W * H - (1 - math.pi / 4) * r * r)) <= 1e-3


def test_four_centre_oval_arcs_meet_tangent():
    # radii 2 and 7 on centres (±3, 0), (0, ±4): √(3² + 4²) = 7 − 2 (internally tangent, geometry)
    t = math.degrees(math.atan2(4, 3))
    pieces = [("arc", (3, 0), 2, -t, t), ("arc", (0, -4), 7, t, 180 - t), ("arc", (-3, 0), 2, 180 - t, 180 + t),
              ("arc", (0, 4), 7, 180 + t, 360 - t)]
    o = clean_points(np.round(_exact_ring(pieces, 0.02), 6), closed=True)
    c = fit_outline(o, smooth="auto")
    rec = c.info["recognised"]
    assert rec["arcs"] == 4 and rec["free"] == 0
    np.testing.assert_allclose(sorted(rec["radii"]), [2, 2, 7, 7], rtol=0, atol=1e-4)
    assert c.corners == ()
    # the contact points on the lines of centres: (±4.2, ±1.6)
    ends = c(c.breaks)
    for x, y in ((4.2, 1.6), (-4.2, 1.6), (-4.2, -1.6), (4.2, -1.6)):
        assert np.hypot(ends[:, 0] - x, ends[:, 1] - y).min() <= 1e-5


def test_free_form_stretch_between_line_and_arc_is_tangent_and_interpolates():
    # a line, a quarter circle R20, a free-form bump back, a straight side: sharp where the points turn
    bottom = np.c_[np.linspace(0, 40, 401)[:-1], np.zeros(400)]
    a = np.radians(np.linspace(-90, 0, 315)[:-1])
    arc = np.c_[40 + 20 * np.cos(a), 20 + 20 * np.sin(a)]
    u = np.linspace(0, 1, 600)[:-1]
    free = np.c_[60 - 60 * u, 20 + 25 * np.sin(np.pi * u) ** 2 * (1 + 0.3 * u)]
    left = np.c_[np.zeros(200), np.linspace(20, 0, 201)[:-1]]
    pts = np.round(np.vstack([bottom, arc, free, left]), 6)
    for closed, p in ((True, pts), (False, pts[:1100])):
        o = clean_points(p, closed=closed)
        c = fit_outline(o, smooth="auto")
        rec = c.info["recognised"]
        assert rec["arcs"] == 1 and rec["free"] == 1
        assert rec["radii"][0] == pytest.approx(20.0, abs=1e-5)
        lo, hi = radii_on(c, lambda xy: (xy[:, 0] > 40.5) & (xy[:, 1] < 19.5) & (xy[:, 0] < 59.9))
        assert 20 - 1e-3 <= lo and hi <= 20 + 1e-3
        # the free-form points are interpolated (distances measured at the points)
        assert c.info["max_residual"] <= rec["bound"]
        # the line meets the arc tangent (no corner at (40, 0)); the arc meets the bump at a
        # sharp turn of 90° (a corner, as the points say)
        at = c(c.breaks[list(c.corners)])
        assert np.hypot(at[:, 0] - 40, at[:, 1]).min() > 1.0
        assert np.hypot(at[:, 0] - 60, at[:, 1] - 20).min() < 1e-5


# -- no change where the points are not lines and arcs ----------------------------------------


def _same(c1, c2):
    return (np.array_equal(c1.breaks, c2.breaks) and np.array_equal(c1.coefficients, c2.coefficients)
            and c1.corners == c2.corners)


@pytest.mark.parametrize("name", ["bracket", "hook", "plate", "profile"])
def test_samples_unchanged(name):
    from pathlib import Path

    from pathgen.points import read_points

    o = read_points(Path(__file__).parent.parent / "samples" / f"{name}.csv")
    noise = estimate_noise(o.points, o.closed, quantization=o.quantization)
    c1 = fit_outline(o, smooth="auto", noise=noise)
    c2 = fit_outline(o, smooth="auto", noise=noise, find_arcs=False)
    assert "recognised" not in c1.info and _same(c1, c2)


@pytest.mark.parametrize("decimals", [3, 6])
def test_dense_free_form_points_unchanged(decimals):
    # an ellipse rounded to the decimals: locally a circle within the rounding over short
    # stretches (measured: up to 18.5° at 0.001 mm), never over the 45° an arc needs
    a = np.linspace(0, 2 * np.pi, 20000, endpoint=False)
    o = clean_points(np.round(np.c_[50 * np.cos(a), 30 * np.sin(a)], decimals), closed=True)
    start, pieces = find_pieces(o.points, True, recognition_bound(o.points, o.quantization))
    assert not any(p.kind == "arc" for p in pieces)
    c1 = fit_outline(o, smooth="auto")
    c2 = fit_outline(o, smooth="auto", find_arcs=False)
    assert _same(c1, c2)


def test_noisy_circle_is_not_recognised():
    # probe noise σ = 5 µm, rounded to 0.001 mm: the points do not lie within their rounding
    rng = np.random.default_rng(11)
    a = np.linspace(0, 2 * np.pi, 2000, endpoint=False)
    p = np.round(np.c_[30 * np.cos(a), 30 * np.sin(a)] + rng.normal(0, 0.005, (2000, 2)), 3)
    o = clean_points(p, closed=True)
    _, pieces = find_pieces(o.points, True, recognition_bound(o.points, o.quantization))
    assert [x.kind for x in pieces] == ["free"]
    c1 = fit_outline(o, smooth="auto")
    c2 = fit_outline(o, smooth="auto", find_arcs=False)
    assert _same(c1, c2)


def test_short_arcs_stay_splines():
    # a 30° arc between two lines: shorter than the 45° rule, fitted as before
    assert MIN_SWEEP == pytest.approx(math.radians(45))
    r = 30.0
    a0, a1 = -90.0, -60.0
    e = (r * math.cos(math.radians(a1)), r + r * math.sin(math.radians(a1)))
    d = (math.cos(math.radians(a1 + 90)), math.sin(math.radians(a1 + 90)))
    pieces = [("line", (-40, 0), (0, 0)), ("arc", (0, r), r, a0, a1), ("line", e, (e[0] + 40 * d[0], e[1] + 40 * d[1])),
              ("line", (e[0] + 40 * d[0], e[1] + 40 * d[1]), (-40, 60)), ("line", (-40, 60), (-40, 0))]
    o = clean_points(np.round(_exact_ring(pieces, 0.1), 6), closed=True)
    _, found = find_pieces(o.points, True, recognition_bound(o.points, o.quantization))
    assert not any(x.kind == "arc" for x in found)


def test_describe_lists_each_radius_once():
    _, pieces = find_pieces(clean_points(rounded_rect(0.1, 9), closed=True).points, True, 1.5e-7)
    assert describe(pieces) == "4 lines, 4 arcs R8.000"


def test_pieces_contour_single_circle():
    a = np.linspace(0, 2 * np.pi, 100, endpoint=False)
    p = np.c_[2 + 4 * np.cos(a), 1 + 4 * np.sin(a)]
    start, pieces = find_pieces(p, True, 1e-9)
    c = pieces_contour(p, True, start, pieces, 1e-9)
    # a circle's area πr² and circumference 2πr (geometry)
    assert abs(c.area) == pytest.approx(math.pi * 16, abs=1e-6)
    assert c.length == pytest.approx(8 * math.pi, abs=1e-7)
    assert c.corners == ()


def test_arcs_with_a_one_step_straight_side_keep_the_side():
    # a slot sampled only on its half circles: each straight side is one step between two
    # arc ends; the arcs must not be joined across it (they neither touch nor cross there)
    w, length = 10.0, 40.0
    r, a = w / 2, length / 2 - w / 2
    th = np.linspace(-np.pi / 2, np.pi / 2, 100)
    p = np.vstack([np.c_[a + r * np.cos(th), r * np.sin(th)], np.c_[-a - r * np.cos(th), -r * np.sin(th)]])
    c = fit_outline(p, closed=True)
    assert c.info["recognised"]["arcs"] == 2
    # slot area 2a·w + πr² and perimeter 4a + 2πr (geometry)
    assert abs(c.area) == pytest.approx(2 * a * w + math.pi * r * r, abs=1e-6)
    assert c.length == pytest.approx(4 * a + 2 * math.pi * r, abs=1e-7)
    assert c.corners == ()


def test_cli_says_what_was_recognised_and_switches_off(tmp_path):
    import io

    from pathgen.cli import main

    f = tmp_path / "outline.csv"
    f.write_text("x,y\n" + "".join(f"{x:.3f},{y:.3f}\n" for x, y in rounded_rect(0.1, 3)))
    texts = {}
    for flag in ("on", "off"):
        out, err = io.StringIO(), io.StringIO()
        code = main(["check", str(f), "--closed", "--tool-diameter", "6", "--find-arcs", flag], out=out, err=err)
        texts[flag] = out.getvalue()
        # exit 1 = the tool cannot reach somewhere: the spline's rounding wiggles bend toward the tool
        assert code == (0 if flag == "on" else 1)
    assert "fit: lines and arcs recognised in the points (4 lines, 4 arcs R8.000)" in texts["on"]
    assert "recognised" not in texts["off"]
    # the report's smallest radius: the drawn R8 within 0.001 mm, and far below it without
    assert re.search(r"smallest radius: 7\.99\d+ mm|smallest radius: 8(\.000\d*)? mm", texts["on"])
    assert "smallest radius: 8" not in texts["off"] and "smallest radius: 7.99" not in texts["off"]
