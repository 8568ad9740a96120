"""Noise of digitized points: the estimate, smoothing to it, and the default.

Outside references, named beside each check:
* difference-based noise estimates: Gasser, T., Sroka, L. & Jennen-Steinmetz,
  C., "Residual variance and residual pattern in nonlinear regression",
  Biometrika 73(3):625-633, 1986 (pseudo-residuals from neighbouring
  points); Hall, P., Kay, J.W. & Titterington, D.M., "Asymptotically optimal
  difference-based estimation of variance in nonparametric regression",
  Biometrika 77(3):521-528, 1990 (longer difference sequences);
* rounding to a step q adds a uniform error of variance q²/12 per
  coordinate (Sheppard's correction; common practice);
* Reinsch, C.H., "Smoothing by spline functions", Numerische Mathematik
  10:177-183, 1967: the smoothing spline whose residual sum is n·σ² (from
  memory);
* scipy.interpolate.make_smoothing_spline (scipy 1.10+) for the smoother's
  degrees of freedom (the trace of the map from points to values);
* the ellipse's curvature ab/(a²sin²θ + b²cos²θ)^{3/2} and its smallest
  radius b²/a (handbook formula; do Carmo, Differential Geometry of Curves
  and Surfaces, 1976, §1-5, from memory).
The noise added here is invented, seeded test data.
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

from pathgen.checks.report import check
from pathgen.noise import estimate_noise, quantization_step
from pathgen.outline import fit_outline
from pathgen.points import clean_points, read_points
from pathgen.smooth import fit_noise, smoothing_spline
from pathgen.spline import fit

from conftest import ellipse_curvature, ellipse_points


def _even_ellipse(a, b, n):
    """n points evenly spaced along the ellipse's length (counter-clockwise)."""
    u = np.linspace(0, 2 * np.pi, 200_001)
    sp = np.hypot(a * np.sin(u), b * np.cos(u))
    s = np.concatenate([[0], np.cumsum(0.5 * (sp[1:] + sp[:-1]) * np.diff(u))])
    return ellipse_points(a, b, theta=np.interp(np.arange(n) * s[-1] / n, s, u))


def _cam(n):
    """The cam r = 60 + 8 cos 5θ (an invented part), n points."""
    th = np.linspace(0, 2 * np.pi, n, endpoint=False)
    r = 60 + 8 * np.cos(5 * th)
    return np.c_[r * np.cos(th), r * np.sin(th)]


def _cam_min_radius():
    # polar-curve curvature (r² + 2r'² − r r'')/(r² + r'²)^{3/2} (handbook
    # formula, from memory), on a fine grid
    th = np.linspace(0, 2 * np.pi, 400_000, endpoint=False)
    r, dr, ddr = 60 + 8 * np.cos(5 * th), -40 * np.sin(5 * th), -200 * np.cos(5 * th)
    k = (r * r + 2 * dr * dr - r * ddr) / (r * r + dr * dr) ** 1.5
    return float(1 / np.abs(k).max())


def _write(path, p, fmt="%.17g", closed=True):
    if closed:
        p = np.vstack([p, p[:1]])
    np.savetxt(path, p, fmt=fmt, delimiter=",", header="x,y", comments="")
    return path


# -- the rounding step --------------------------------------------------------------


def test_quantization_step_is_the_decimals_used():
    assert quantization_step([1.25, 3.5, -7.125]) == 0.001
    assert quantization_step([12.0, -3.0]) == 1.0
    assert quantization_step(np.round(np.random.default_rng(1).normal(0, 50, 1000), 6)) == 1e-6
    assert quantization_step([0.1 + 1e-12]) is None  # more than 9 decimals


def test_file_rounding_step_in_mm_also_for_inch(tmp_path):
    p = _cam(400)
    o = read_points(_write(tmp_path / "mm.csv", p, "%.3f"))
    assert o.quantization == 0.001
    # a file that prints 4 decimals has a 0.0001 step even where its values are round
    o = read_points(_write(tmp_path / "round.csv", np.round(p), "%.4f"))
    assert o.quantization == 0.0001
    o = read_points(_write(tmp_path / "in.csv", p / 25.4, "%.4f"), units="inch")
    assert o.quantization == pytest.approx(0.00254, rel=1e-12)


# -- the noise estimate --------------------------------------------------------------


@pytest.mark.parametrize("sigma", [0.001, 0.005, 0.02])
def test_noise_estimate_on_a_noisy_ellipse(sigma):
    # Gasser et al. 1986 / Hall et al. 1990: difference-based estimates are
    # unaffected by a smooth signal when the spacing is small; seeded noise,
    # 4000 points: the sample standard deviation itself varies by ~1 %.
    p = _even_ellipse(60, 25, 4000)
    noisy = p + np.random.default_rng(7).normal(0, sigma, p.shape)
    est = estimate_noise(noisy, True)
    assert est.resolved and est.smooth
    assert est.sigma == pytest.approx(sigma, rel=0.08)
    # the curvature noise fakes at this spacing: 4σ/h² (derived: second difference)
    assert est.fake_curvature == pytest.approx(4 * est.sigma_used / est.spacing_median**2, rel=1e-12)


def test_noise_estimate_ignores_corners():
    # a 100 x 60 rectangle with four sharp corners: the robust scale leaves
    # the few large pseudo-residuals at the corners out (Gasser et al. 1986)
    edge = np.linspace(0, 1, 500, endpoint=False)[:, None]
    sq = np.vstack([np.c_[100 * edge, 0 * edge], np.c_[100 + 0 * edge, 60 * edge],
                    np.c_[100 - 100 * edge, 60 + 0 * edge], np.c_[0 * edge, 60 - 60 * edge]])
    noisy = sq + np.random.default_rng(3).normal(0, 0.004, sq.shape)
    assert estimate_noise(noisy, True).sigma == pytest.approx(0.004, rel=0.1)


def test_rounding_noise_is_measured_at_q_over_sqrt12():
    # Sheppard (common practice): rounding to q = 0.001 adds σ = q/√12 = 0.000289
    p = np.round(_cam(20_000), 3)
    est = estimate_noise(p, True)
    assert est.quantization == 0.001
    assert est.sigma == pytest.approx(0.001 / math.sqrt(12), rel=0.25)
    assert est.smooth  # 4σ/h² ≈ 2.7 /mm: a fake radius of 0.4 mm


@pytest.mark.parametrize("n", [16, 64, 400, 100_000])
def test_clean_points_are_not_taken_for_noise(n):
    # exact points (full precision): at any spacing the estimate finds no
    # noise that could fake the curvature
    est = estimate_noise(_even_ellipse(3.0, 1.0, n), True)
    assert not est.smooth


# -- Reinsch's criterion ------------------------------------------------------------


def test_fit_noise_meets_reinsch_criterion_and_counts_the_freedom(rng):
    n = 80
    t = np.cumsum(rng.uniform(0.5, 1.5, n))
    y = np.c_[np.sin(t / 5), np.cos(t / 7)] + rng.normal(0, 0.05, (n, 2))
    c, f = fit_noise(t, y, 0.05, rtol=1e-3, probes=64)
    # Reinsch 1967: Σ |P_i − g(t_i)|² = n σ² (both coordinates, one λ)
    assert f["residual_sum"] == pytest.approx(n * 0.05**2, rel=1e-3)
    g, _ = smoothing_spline(t, y, f["lambda"])
    assert float(((y - g) ** 2).sum()) == pytest.approx(f["residual_sum"], rel=1e-9)
    # degrees of freedom: trace of the smoother, exactly, from scipy's
    # make_smoothing_spline (same criterion, natural ends) on unit vectors
    from scipy.interpolate import make_smoothing_spline

    trace = sum(float(make_smoothing_spline(t, np.eye(n)[j], lam=f["lambda"])(t[j])) for j in range(n))
    assert abs(f["dof"] - trace) <= 3 * f["dof_error"] + 1e-9
    assert 2 < trace < n


def test_fit_noise_closed_loop_matches_the_noise():
    p = _even_ellipse(60, 25, 3000)
    noisy = p + np.random.default_rng(5).normal(0, 0.005, p.shape)
    t = np.concatenate([[0], np.cumsum(np.hypot(*np.diff(np.vstack([noisy, noisy[:1]]), axis=0).T))])
    c, f = fit_noise(t, noisy, 0.005, periodic=True)
    assert f["residual_sum"] == pytest.approx(3000 * 0.005**2, rel=0.01)
    # measured distances: RMS near σ, none beyond 4σ (3000 Gaussian draws)
    assert f["rms_residual"] == pytest.approx(0.005, rel=0.1)
    assert f["max_residual"] <= 4 * 0.005


# -- the default: auto ---------------------------------------------------------------


def test_auto_interpolates_clean_points_exactly():
    p = _even_ellipse(3.0, 2.0, 64)
    a = fit_outline(p, closed=True, smooth="auto")
    b = fit(p, closed=True)
    assert a.info["smoothing"] == "none"
    np.testing.assert_array_equal(a.coefficients, b.coefficients)


def test_auto_smooths_a_noisy_ellipse_to_its_handbook_curvature():
    a_, b_ = 150.0, 50.0
    p = _even_ellipse(a_, b_, 3000)
    noisy = p + np.random.default_rng(11).normal(0, 0.005, p.shape)
    exact = fit_outline(noisy, closed=True, smooth="off")
    c = fit_outline(noisy, closed=True, smooth="auto")
    assert c.info["smoothing"] == "noise"
    rep, rep_exact = check(c), check(exact)
    # handbook: smallest radius b²/a at the ends of the long axis
    assert rep.min_radius.radius == pytest.approx(b_ * b_ / a_, rel=0.03)
    assert rep_exact.min_radius.radius < 0.5 * b_ * b_ / a_  # the noise fakes it
    # the curvature along the outline, against the formula at each point's angle
    th = np.arctan2(p[:, 1] / b_, p[:, 0] / a_)
    k_true = ellipse_curvature(a_, b_, th)
    err = np.abs(c.curvature(c.breaks[:-1]) - k_true)
    assert float(np.sqrt(np.mean(err**2))) < 0.02 * (a_ / b_**2)
    assert c.info["max_residual"] <= 4 * 0.005
    assert len(rep.inflections) == 0  # an ellipse has none


def test_non_chained_merge_keeps_a_dense_outline():
    # a closed cam sampled 4x finer than the merge distance: thinned, never
    # collapsed (each point is judged against the last point kept)
    p = _cam(20_000)
    h = float(np.median(np.hypot(*np.diff(p, axis=0).T)))
    o = clean_points(np.vstack([p, p[:1]]), merge_tol=3.5 * h)
    assert o.closed
    assert 4000 <= len(o) <= 6000
    steps = np.hypot(*np.diff(o.points, axis=0).T)
    assert steps.min() > 3.5 * h
    length = lambda q: float(np.hypot(*np.diff(np.vstack([q, q[:1]]), axis=0).T).sum())  # noqa: E731
    assert length(o.points) == pytest.approx(length(p), rel=1e-5)


def test_rounded_dense_points_merge_only_exact_repeats():
    # a 2 x 1 mm tab probed every 0.05 µm, 6 decimals, on a 100 x 50 mm plate:
    # closer than 1e-6 x the plate's size (0.11 µm), but the values resolve
    # 0.01 µm (5 decimals), so the merge distance is half that and the tab
    # stays (merging each point into the one before, chained, used to erase it)
    x = np.round(np.arange(0, 2, 0.00005), 6)
    up = np.round(np.arange(0, 1, 0.00005), 6)
    tab = np.vstack([np.c_[40 + 0 * up, up], np.c_[40 + x, 1 + 0 * x], np.c_[42 + 0 * up, 1 - up]])
    plate = np.vstack([[[0, 0]], tab, [[100, 0], [100, 50], [0, 50]]])
    o = clean_points(plate, closed=True)
    assert o.quantization == 1e-5
    assert len(o) == len(plate)
    def area(q):  # shoelace
        return 0.5 * abs(np.dot(q[:, 0], np.roll(q[:, 1], -1)) - np.dot(q[:, 1], np.roll(q[:, 0], -1)))

    assert area(o.points) == pytest.approx(area(plate), rel=1e-12)
    assert area(plate) == pytest.approx(100 * 50 - 2 * 1, abs=0.01)  # the notch is there


# -- the whole job --------------------------------------------------------------------


def test_cli_default_smooths_rounded_dense_points_and_says_so(tmp_path):
    from pathgen.cli import main
    import io

    f = _write(tmp_path / "cam.csv", _cam(10_000), "%.3f")
    out, err = io.StringIO(), io.StringIO()
    status = main(["check", str(f), "--tool-diameter", "6"], out=out, err=err)
    lines = out.getvalue().splitlines()
    assert status == 0
    assert lines[1].startswith("fit: smoothed to the points' noise") and "--smooth off" in lines[1]
    assert "rounding step 0.001 mm" in lines[2] and "spacing" in lines[2] and "radii of about" in lines[2]
    out2 = io.StringIO()
    status = main(["check", str(f), "--tool-diameter", "6", "--json"], out=out2, err=io.StringIO())
    data = json.loads(out2.getvalue())
    fit_ = data["report"]["fit"]
    assert fit_["smoothing"] == "noise" and fit_["quantization"] == 0.001
    assert fit_["sigma"] == pytest.approx(0.001 / math.sqrt(12), rel=0.25)  # Sheppard
    assert fit_["max_residual"] <= 0.001
    assert data["report"]["min_radius"]["radius"] == pytest.approx(_cam_min_radius(), rel=0.03)
    # forced exact interpolation: the rounding fakes radii under the tool's;
    # those spots vanish when smoothed, so they are the noise's, not machining
    # problems (listed apart; exit 0)
    out3 = io.StringIO()
    status = main(["check", str(f), "--tool-diameter", "6", "--smooth", "off", "--json"],
                  out=out3, err=io.StringIO())
    rep = json.loads(out3.getvalue())["report"]
    assert status == 0 and rep["fit"]["smoothing"] == "off"
    assert rep["min_radius"]["radius"] < 3.0  # the tool's radius: the noise's curvature
    assert len(rep["noise_spots"]) > 10 and not rep["tool_cannot_reach"]
    out4 = io.StringIO()
    main(["check", str(f), "--tool-diameter", "6", "--smooth", "off"], out=out4, err=io.StringIO())
    text = out4.getvalue()
    assert "exact interpolation (--smooth off); CAUTION: in an exact fit the points' noise fakes" in text
    assert "vanish when the points are smoothed to their noise" in text


def test_a_real_tight_spot_survives_the_noise_check():
    # the hook sample (pathgen.demo): its slot end, inner radius 2 mm, is too
    # tight for a 6 mm tool whether the points are smoothed or fitted exactly
    from pathgen import demo
    from pathgen.pipeline import run

    for smooth in ("auto", "off"):
        rep = run(demo.make_part("hook"), closed=True, tool_diameter=6, smooth=smooth).report
        reach = [t for t in rep.tight_spots if t.reason == "reach"]
        assert rep.tool_cannot_reach
        assert any(35 < t.x < 45 and 24 < t.y < 31 for t in reach)  # the slot's end, centre (40, 28)


def test_inch_noise_is_stated_in_inch(tmp_path):
    from pathgen.pipeline import run

    p = _cam(3000) / 25.4
    noisy = p + np.random.default_rng(2).normal(0, 0.0002, p.shape)
    r = run(_write(tmp_path / "cam_in.csv", noisy), units="inch", tool_diameter=0.25)
    fit_ = r.report.to_dict(units="inch")["fit"]
    assert fit_["smoothing"] == "noise"
    assert fit_["sigma"] == pytest.approx(0.0002, rel=0.15)
    assert r.report.fit["sigma"] == pytest.approx(0.0002 * 25.4, rel=0.15)  # mm inside
    assert r.report.min_radius.radius == pytest.approx(_cam_min_radius(), rel=0.03)  # mm inside
    assert r.status == 0


def test_demo_bracket_reports_its_fillets_not_the_noise():
    # pathgen.demo draws the bracket with outer corners R 8 and an inner
    # fillet R 10, probed with σ = 0.005 mm noise every 1.3 mm
    from pathgen import demo
    from pathgen.pipeline import run

    r = run(demo.make_part("bracket"), closed=True, tool_diameter=6)
    rep = r.report
    assert rep.fit["smoothing"] == "noise"
    assert 0.9 * 8 <= rep.min_radius_left.radius <= 1.03 * 8
    assert 0.9 * 10 <= rep.min_radius_right.radius <= 1.03 * 10
    # the drawn bracket's dent has 4 inflections (its noise-free points give
    # 4); the noise gave 164 before the check knew the noise
    assert len(rep.inflections) <= 2 * 4


def test_smooth_option_errors(tmp_path):
    import io

    from pathgen.cli import main
    from pathgen.errors import InputError
    from pathgen.pipeline import run

    f = _write(tmp_path / "c.csv", _cam(100), "%.3f")
    err = io.StringIO()
    assert main(["check", str(f), "--smooth", "lots"], out=io.StringIO(), err=err) == 2
    assert err.getvalue().count("\n") == 1 and "expected auto, off or a distance, got 'lots'" in err.getvalue()
    with pytest.raises(InputError, match=r"smooth='lots' is not one of: 'auto', 'off'"):
        run(f, smooth="lots")
    with pytest.raises(InputError, match=r"smooth='lots' is not one of: 'auto', 'off'"):
        fit_outline(_cam(100), closed=True, smooth="lots")


def test_smoothing_makes_no_false_corners_far_from_the_origin():
    # the cam 900 m from the origin, 20 000 points rounded to 0.001 mm: the
    # tangent of a smoothing spline is continuous by construction, but at
    # these coordinates rounding makes it jump by more than 1e-9 rad at many
    # breaks; such jumps are not corners (they made 17 936 of them, and the
    # tool path cut the outline into as many windows)
    p = np.round(_cam(20_000) + 9e5, 3)
    c = fit_outline(p, closed=True, smooth="auto")
    assert c.info["smoothing"] == "noise"
    assert c.corners == ()
    # the rectangle's four corners stay corners when its noisy edges are smoothed
    edge = np.linspace(0, 1, 300, endpoint=False)[:, None]
    sq = np.vstack([np.c_[100 * edge, 0 * edge], np.c_[100 + 0 * edge, 60 * edge],
                    np.c_[100 - 100 * edge, 60 + 0 * edge], np.c_[0 * edge, 60 - 60 * edge]])
    noisy = sq + np.random.default_rng(4).normal(0, 0.004, sq.shape)
    c = fit_outline(noisy, closed=True, smooth="auto")
    assert len(c.corners) == 4


# -- dense noisy points: noise as large as the spacing ------------------------------


def _lobed(n, sigma, seed, decimals=None):
    """An invented lobed outline r = 40 + 5 cos 3θ + 2 sin 5θ (264 mm long)
    with Gaussian noise σ per coordinate, n points."""
    th = np.linspace(0, 2 * np.pi, n, endpoint=False)
    r = 40 + 5 * np.cos(3 * th) + 2 * np.sin(5 * th)
    p = np.c_[r * np.cos(th), r * np.sin(th)] + np.random.default_rng(seed).normal(0, sigma, (n, 2))
    return p if decimals is None else np.round(p, decimals)


def _lobed_truth():
    # polar-curve curvature (r² + 2r'² − r r'')/(r² + r'²)^{3/2} (handbook
    # formula, from memory) and the length ∫√(r² + r'²) dθ, on a fine grid
    th = np.linspace(0, 2 * np.pi, 2_000_000, endpoint=False)
    r = 40 + 5 * np.cos(3 * th) + 2 * np.sin(5 * th)
    dr = -15 * np.sin(3 * th) + 10 * np.cos(5 * th)
    ddr = -45 * np.cos(3 * th) - 50 * np.sin(5 * th)
    k = (r * r + 2 * dr * dr - r * ddr) / (r * r + dr * dr) ** 1.5
    sign_changes = int(np.count_nonzero(np.sign(k) != np.sign(np.roll(k, 1))))
    return 1 / k.max(), 1 / (-k).max(), sign_changes, float(np.hypot(r, dr).mean() * 2 * np.pi)


@pytest.mark.parametrize("n", [20_000, 100_000])
def test_noise_as_large_as_the_spacing_is_not_read_low(n):
    # σ = 0.004 mm on points 0.013 and 0.0026 mm apart (σ = 0.3 and 1.5
    # spacings): the chord lengths carry the noise, and divided differences
    # on them read σ 7 % and 19 % low; the estimate must still find the σ the
    # points were made with (the difference-based estimators of Gasser et al.
    # 1986 and Hall et al. 1990 assume a parameter free of noise)
    est = [estimate_noise(_lobed(n, 0.004, seed), True).sigma for seed in (1, 2)]
    assert est == pytest.approx([0.004, 0.004], rel=0.03)


def test_dense_noisy_scan_reads_the_true_radii_and_inflections():
    # 20 000 points 0.013 mm apart, σ = 0.004 mm, rounded to 0.001 mm (a
    # dense noisy scan).  Smoothing to the residual alone (Reinsch) left the
    # noise's wiggles in: smallest radius 0.39 mm against the true 15.7 mm,
    # thousands of curvature sign changes.  The curve must read the true radii
    # (the polar-curvature formula) within 3 %, the true number of
    # inflections, and the true length within 0.01 %.
    r_left, r_right, inflections, length = _lobed_truth()
    c = fit_outline(clean_points(_lobed(20_000, 0.004, 7, decimals=3), closed=True), smooth="auto")
    assert c.info["smoothing"] == "noise"
    assert c.info["curvature_noise_share"] <= 0.02
    s = np.linspace(c.breaks[0], c.breaks[-1], 400_000, endpoint=False)
    k = c.curvature(s)
    assert 1 / k.max() == pytest.approx(r_left, rel=0.03)
    assert 1 / (-k).max() == pytest.approx(r_right, rel=0.03)
    assert int(np.count_nonzero(np.sign(k) != np.sign(np.roll(k, 1)))) == inflections
    assert c.length == pytest.approx(length, rel=1e-4)
    # and the points stay as close as their noise says (RMS near σ)
    assert c.info["rms_residual"] == pytest.approx(0.004, rel=0.1)


def test_the_curvature_rule_stops_before_it_rounds_a_real_corner_off():
    # a noisy ring with one small bump (radius 0.5 mm, 0.3 mm high, invented):
    # smoothing further to quiet the noise must not flatten the bump, whose
    # curvature the answers need; the guard keeps every point within the
    # largest distance n Gaussian draws reach (σ√(2 ln 2n), from memory), × 1.25
    n, sigma = 20_000, 0.004
    th = np.linspace(0, 2 * np.pi, n, endpoint=False)
    r = 40 + 0.3 * np.exp(-((th - 1.0) * 40 / 0.5) ** 2)
    p = np.c_[r * np.cos(th), r * np.sin(th)] + np.random.default_rng(3).normal(0, sigma, (n, 2))
    c = fit_outline(clean_points(p, closed=True), smooth="auto")
    assert c.info["max_residual"] <= 1.25 * max(sigma * math.sqrt(2 * math.log(2 * n)), 0.0) * 1.05
    # the bump is still there: the curve reaches 40.25 mm or more from the center near θ = 1
    s = np.linspace(c.breaks[0], c.breaks[-1], 400_000, endpoint=False)
    q = c(s)
    rad = np.hypot(q[:, 0], q[:, 1])
    assert rad.max() > 40.25  # 40.29 measured
    # its curvature, 2A/w² = 2.4 /mm on top (second derivative of a Gaussian
    # bump A·exp(−x²/w²), A = 0.3, w = 0.5), is read at 80 % or more
    # (2.05 measured: the noise leaves no sharper detail to be told apart)
    assert c.curvature(s).max() >= 0.8 * 2.4


def test_a_program_is_made_from_a_dense_noisy_scan(tmp_path):
    # the polygon through such points crosses itself in noise loops; the
    # outline they trace does not, so the program is written, and what it
    # says holds (its replayed deviation within the tolerance: the reading
    # back follows the G-code word rules, ISO 6983-1)
    from pathgen.pipeline import run

    p = _lobed(20_000, 0.004, 7, decimals=3)
    src = tmp_path / "scan.csv"
    np.savetxt(src, p, fmt="%.3f", delimiter=",", header="x,y", comments="")
    res = run(src, closed=True, tool_diameter=10.0, side="inside", gcode=tmp_path / "scan.nc")
    assert res.program["within_tolerance"]
    assert res.report.tool_cannot_reach == 0 or not res.report.tool_cannot_reach
    assert (tmp_path / "scan.nc").read_text().count("G2") + (tmp_path / "scan.nc").read_text().count("G3") > 10

def _small_cam(n, decimals):
    """The invented cam r(θ) = 6 + 0.8 sin 3θ + 0.3 cos 7θ (mm), n points
    rounded to ``decimals``, and its curvature at them by the polar formula
    κ = (r² + 2r′² − r r″)/(r² + r′²)^{3/2} ([curvature], for r(θ); derived)."""
    th = np.linspace(0, 2 * np.pi, n, endpoint=False)
    r = 6 + 0.8 * np.sin(3 * th) + 0.3 * np.cos(7 * th)
    r1 = 2.4 * np.cos(3 * th) - 2.1 * np.sin(7 * th)
    r2 = -7.2 * np.sin(3 * th) - 14.7 * np.cos(7 * th)
    k = (r * r + 2 * r1 * r1 - r * r2) / (r * r + r1 * r1) ** 1.5
    return np.round(np.c_[r * np.cos(th), r * np.sin(th)], decimals), k


def test_rounding_on_points_closer_than_it_fakes_curvature_4_sigma_over_h2():
    # Rounding to q (σ = q/√12 per coordinate, [quantization]) on points h
    # apart fakes curvature of about 4σ/h² in an exact fit (the second
    # difference of the noise over h²): measured on the cam at two roundings,
    # the fit's error at its points is 1 to 2.5 times 4σ/h², growing tenfold
    # with q, whatever the shape.
    ratios = []
    for decimals in (7, 8):
        pts, k = _small_cam(40_000, decimals)
        c = fit(pts, closed=True)
        h = float(np.median(np.diff(c.breaks)))
        err = np.sqrt(np.mean((c.curvature(c.breaks[:-1]) - k) ** 2))
        ratios.append(err / (4 * 10.0**-decimals / math.sqrt(12) / h**2))
    assert all(1.0 <= r <= 2.5 for r in ratios), ratios
    assert ratios[0] == pytest.approx(ratios[1], rel=0.1)


def test_dense_points_rounded_to_8_decimals_are_smoothed_to_the_true_radii():
    # 40 000 points of a 38 mm cam rounded to 10 nm: σ = 2.9 nm, far below
    # any instrument, yet at 0.95 µm spacing it fakes 7 % of the mean
    # curvature, and an exact fit misses the smallest radius by about 8 %.
    # --smooth auto must see it and come within 0.1 % of the polar formula.
    pts, k = _small_cam(40_000, 8)
    o = clean_points(pts, closed=True)
    est = estimate_noise(o.points, True, quantization=o.quantization)
    assert est.resolved and est.smooth
    assert est.sigma_used == pytest.approx(1e-8 / math.sqrt(12), rel=0.05)  # [quantization]
    at = None
    found = {}
    for mode in ("off", "auto"):
        c = fit_outline(o, noise=est, smooth=mode)
        at = (c.breaks[:-1, None] + np.diff(c.breaks)[:, None] * np.array([0.25, 0.75])).ravel()
        kk = c.curvature(at)
        found[mode] = (kk.max() / k.max() - 1, kk.min() / k.min() - 1)
        if mode == "auto":
            assert c.info["smoothing"] == "noise"
            assert len(c.breaks) == len(o.points) + 1  # one break per point still
            assert c.info["max_residual"] <= 3 * 1e-8  # the points stay within their rounding
    assert max(abs(v) for v in found["off"]) > 0.03  # the effect this test is about
    assert max(abs(v) for v in found["auto"]) <= 1e-3, found


def test_dense_rounded_open_outline_with_a_corner_is_smoothed_to_the_ellipse():
    # A quarter of an ellipse (a = 6, b = 4 mm) in 30 000 points rounded to
    # 8 decimals, then a straight leg from a sharp corner: the rounding fakes
    # curvature (est.smooth), the curved piece ends at the corner. Its
    # curvature must follow ab/(a² sin²θ + b² cos²θ)^{3/2} [ellipse] to 0.5 %
    # up to both ends; the exact fit is off by more than 100 %.
    n = 30_000
    th = np.linspace(0, np.pi / 2, n)
    leg = np.c_[np.linspace(0, -3, 8000)[1:], np.linspace(4, 1, 8000)[1:]]
    o = clean_points(np.round(np.vstack([np.c_[6 * np.cos(th), 4 * np.sin(th)], leg]), 8), closed=False)
    est = estimate_noise(o.points, False, quantization=o.quantization)
    assert est.smooth
    err = {}
    for mode in ("off", "auto"):
        c = fit_outline(o, noise=est, smooth=mode)
        assert c.corners == (n - 1,)
        t = c.breaks[: n - 1] + 0.5 * np.diff(c.breaks[:n])
        x, y = c(t).T
        phi = np.arctan2(y / 4, x / 6)
        err[mode] = np.abs(c.curvature(t) / (24 / (36 * np.sin(phi) ** 2 + 16 * np.cos(phi) ** 2) ** 1.5) - 1).max()
    assert err["off"] > 1.0
    assert err["auto"] <= 0.005, err
