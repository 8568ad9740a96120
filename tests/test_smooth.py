"""Smoothing splines for noisy points (pathgen.smooth, fit_outline(smooth=)).

Outside references: scipy.interpolate.make_smoothing_spline (same
criterion Σ|y - f|² + λ∫f''², given one λ; Reinsch 1967 / Woltring 1986,
sources: reinsch-1967), scipy.interpolate.CubicSpline (λ = 0 is the interpolating
spline), scipy.spatial.cKDTree (distances measured independently of the
code under test), the handbook ellipse curvature ab/(a² sin²t + b² cos²t)^{3/2},
and the published behaviour of smoothing splines on noisy data: residual
RMS close to the noise σ (sources: craven-wahba-1979; scipy recomputed: RMS 0.0444 for
σ = 0.05).
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st
from scipy.interpolate import CubicSpline, make_smoothing_spline
from scipy.spatial import cKDTree

from pathgen import InputError
from pathgen.outline import fit_outline
from pathgen.points import clean_points
from pathgen.smooth import fit_within, foot_distances, power_form, smoothing_spline
from pathgen.spline import Contour, parameters

from conftest import ellipse_curvature, ellipse_distance, ellipse_points

A, B, SIGMA = 30.0, 18.0, 0.02  # an invented elliptic cam, digitized with noise


@pytest.fixture
def noisy_ellipse(rng):
    th = np.linspace(0, 2 * np.pi, 400, endpoint=False)
    true = ellipse_points(A, B, theta=th)
    return th, true, true + rng.normal(0.0, SIGMA, true.shape)


@pytest.mark.parametrize("lam", [0.0, 1e-3, 0.1, 10.0])
def test_open_smoothing_matches_scipy_with_one_lambda(rng, lam):
    t = np.cumsum(rng.uniform(0.2, 1.0, 60))
    y = np.c_[np.sin(t), np.cos(0.7 * t)] + rng.normal(0, 0.05, (60, 2))
    g, M = smoothing_spline(t, y, lam)
    # reference: scipy.interpolate.make_smoothing_spline with the same λ
    ref = make_smoothing_spline(t, y, lam=lam)
    np.testing.assert_allclose(g, ref(t), rtol=0, atol=1e-9)
    np.testing.assert_allclose(M, ref(t, 2), rtol=0, atol=1e-8)
    c = Contour(t, power_form(t, g, M), False, y)
    s = np.linspace(t[0], t[-1], 333)
    np.testing.assert_allclose(c(s), ref(s), rtol=0, atol=1e-9)


def test_zero_lambda_is_the_interpolating_spline(rng):
    t = np.cumsum(rng.uniform(0.5, 1.5, 12))
    y = rng.normal(size=(12, 2))
    g, M = smoothing_spline(t, y, 0.0)
    # λ = 0: the natural interpolating spline (scipy CubicSpline, natural ends)
    np.testing.assert_allclose(M, CubicSpline(t, y, bc_type="natural")(t, 2), atol=1e-11)
    # periodic λ = 0: scipy's periodic spline
    yp = np.vstack([y, y[:1]])
    tp = np.concatenate([t, [t[-1] + 1.0]])
    g, M = smoothing_spline(tp, y, 0.0, periodic=True)
    np.testing.assert_allclose(g, y, atol=1e-12)
    np.testing.assert_allclose(M, CubicSpline(tp, yp, bc_type="periodic")(tp, 2), atol=1e-10)


def test_huge_lambda_limits(rng):
    t = np.cumsum(rng.uniform(0.5, 1.5, 30))
    y = rng.normal(size=(30, 2))
    # open: λ → ∞ gives the least-squares straight line (scipy recomputed; sources: craven-wahba-1979)
    g, _ = smoothing_spline(t, y, 1e12)
    line = np.polynomial.polynomial.polyfit(t, y, 1)
    np.testing.assert_allclose(g, np.polynomial.polynomial.polyval(t, line).T, atol=1e-6)
    # periodic: the only periodic function with ∫g''² = 0 is a constant: the mean [der]
    tp = np.concatenate([t, [t[-1] + 1.0]])
    g, _ = smoothing_spline(tp, y, 1e12, periodic=True)
    np.testing.assert_allclose(g, np.broadcast_to(y.mean(axis=0), g.shape), atol=1e-6)


def test_fixed_points_are_kept(rng):
    t = np.cumsum(rng.uniform(0.5, 1.5, 20))
    y = rng.normal(size=(20, 2))
    fixed = np.zeros(20, bool)
    fixed[[0, 7, 19]] = True
    g, _ = smoothing_spline(t, y, 5.0, fixed=fixed)
    np.testing.assert_allclose(g[fixed], y[fixed], atol=1e-12)
    assert np.abs(g[~fixed] - y[~fixed]).max() > 0.01


def test_noisy_ellipse_within_tolerance_and_truer_curvature(noisy_ellipse):
    th, true, noisy = noisy_ellipse
    tol = 3.0 * SIGMA
    c = fit_outline(noisy, closed=True, smooth=tol)
    interp = fit_outline(noisy, closed=True)
    assert c.corners == () and c.info["smooth"] == tol
    # within TOL of every point, measured independently: nearest of 4·10^5
    # contour samples (scipy cKDTree); sampling adds at most half a spacing
    samples = c(np.linspace(*c.domain, 400_000, endpoint=False))
    spacing = c.length / 400_000
    dist, _ = cKDTree(samples).query(noisy)
    assert dist.max() <= tol + spacing / 2
    assert c.info["max_residual"] <= tol
    assert c.info["max_residual"] == pytest.approx(dist.max(), abs=spacing)
    # residual RMS near σ (sources: reinsch-1967, craven-wahba-1979); measured 0.97σ
    assert 0.75 * SIGMA <= c.info["rms_residual"] <= 1.25 * SIGMA
    assert c.info["rms_residual"] == pytest.approx(np.sqrt(np.mean(dist**2)), rel=1e-3)
    # curvature: handbook κ(θ) = ab/(a² sin²θ + b² cos²θ)^{3/2} at the true angles
    k_true = ellipse_curvature(A, B, th)
    err_smooth = np.sqrt(np.mean((c.curvature(c.breaks[:-1]) - k_true) ** 2))
    err_interp = np.sqrt(np.mean((interp.curvature(interp.breaks[:-1]) - k_true) ** 2))
    assert err_smooth < 0.05 * err_interp
    assert err_smooth < 0.05 * (A / B**2)  # under 5 % of the largest curvature
    # the smoothed contour lies closer to the true ellipse than the noise does
    on = ellipse_distance(A, B, samples[::100])
    assert np.sqrt(np.mean(on**2)) < 0.6 * SIGMA  # measured 0.43σ


def test_lambda_is_the_largest_within_tolerance(noisy_ellipse):
    _, _, noisy = noisy_ellipse
    t = parameters(noisy, "chord", True)
    tol = 3.0 * SIGMA
    c, facts = fit_within(t, noisy, tol, periodic=True)
    assert facts["max_residual"] <= tol
    # 2 % more smoothing breaks the tolerance: λ is the largest (within 2 %)
    g, M = smoothing_spline(t, noisy, facts["lambda"] * 1.02, periodic=True)
    more = Contour(t, power_form(t, np.vstack([g, g[:1]]), M), True, noisy)
    assert foot_distances(more, noisy, t[:-1]).max() > tol


def test_foot_distances_against_circle():
    # points at known distance from a circle of radius 10 (handbook: |r - R|)
    th = np.linspace(0, 2 * np.pi, 200, endpoint=False)
    circ = np.c_[10 * np.cos(th), 10 * np.sin(th)]
    # the spline fit (an exact circle would be recognised as one arc, not one break per point)
    c = fit_outline(circ, closed=True, find_arcs=False)
    offs = np.linspace(-0.3, 0.3, 200)
    p = circ * (1 + offs / 10)[:, None]
    # shift the starting parameter a little: Newton must find the foot point
    d = foot_distances(c, p, c.breaks[:-1] + 0.02)
    np.testing.assert_allclose(d, np.abs(offs), atol=1e-6)


def test_smoothing_with_corners_pins_the_corners(rng):
    # an invented square plate probed with noise; the corner points are exact
    s = np.linspace(0, 1, 40, endpoint=False)
    sq = np.vstack([np.c_[s * 50, 0 * s], np.c_[50 + 0 * s, s * 50],
                    np.c_[50 - s * 50, 50 + 0 * s], np.c_[0 * s, 50 - s * 50]])
    corners = [0, 40, 80, 120]
    noise = rng.normal(0, 0.01, sq.shape)
    noise[corners] = 0.0
    c = fit_outline(sq + noise, closed=True, smooth=0.04)
    assert c.corners == tuple(corners)
    np.testing.assert_allclose(c(c.breaks[corners]), sq[corners], atol=1e-12)
    assert c.info["max_residual"] <= 0.04
    samples = c(np.linspace(*c.domain, 200_000, endpoint=False))
    dist, _ = cKDTree(samples).query(sq + noise)  # independent measurement
    assert dist.max() <= 0.04 + c.length / 200_000


def test_smoothing_errors():
    t = np.arange(5.0)
    with pytest.raises(InputError, match=r"smooth must be a finite distance > 0 mm, got -1"):
        fit_within(t, np.c_[t, t], -1.0)
    with pytest.raises(InputError, match=r"smooth must be a finite number > 0, got nan"):
        fit_outline(np.c_[t, t**2], smooth=float("nan"))


def test_open_noisy_outline_pins_its_ends(rng):
    # an invented cam flank probed as an open run of points
    t = np.linspace(0, 1, 300)
    true = np.c_[60 * t, 8 * np.sin(3 * t)]
    pts = true + rng.normal(0, 0.01, true.shape)
    c = fit_outline(pts, smooth=0.03)
    assert not c.closed
    np.testing.assert_allclose(c(np.array(c.domain)), pts[[0, -1]], atol=1e-12)
    samples = c(np.linspace(*c.domain, 300_000))
    dist, _ = cKDTree(samples).query(pts)  # independent measurement
    assert dist.max() <= 0.03 + c.length / 300_000


@settings(max_examples=15)
@given(st.integers(0, 2**32 - 1), st.floats(0.002, 0.05), st.integers(12, 120))
def test_random_noisy_loops_smooth_within_tol_without_nan(seed, sigma, n):
    r = np.random.default_rng(seed)
    th = np.sort(r.uniform(0, 2 * np.pi, n))
    rad = 20 + 3 * np.sin(2 * th + r.uniform(0, 6))
    pts = np.c_[rad * np.cos(th), rad * np.sin(th)] + r.normal(0, sigma, (n, 2))
    try:
        o = clean_points(pts, closed=True)
    except InputError:
        return
    tol = 3 * sigma
    c = fit_outline(o, smooth=tol)
    assert np.isfinite(c.coefficients).all()
    assert np.isfinite(c.curvature(np.linspace(*c.domain, 400))).all()
    assert c.info["max_residual"] <= tol
