"""The spline engine against outside references.

Sources named beside each check:
* scipy.interpolate.CubicSpline (reference library), same parameters.
* Handbook formulas: circle and ellipse curvature, ellipse perimeter
  4a·E(m) with scipy.special.ellipe (parameter m = 1 − b²/a²), area πab.
* Published convergence orders: de Boor, A Practical Guide to Splines
  (not-a-knot, clamped: 4); Atkinson 1968 (natural: 2); Kershaw 1971
  (periodic: 4); Floater 2006 (chord length 4 on uneven points, from memory).
* Theorem of turning tangents (Hopf 1935; do Carmo §5-7, from memory).
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, strategies as st
from scipy.integrate import quad
from scipy.interpolate import CubicSpline
from scipy.special import ellipe

import pathgen
from pathgen import InputError, fit

from conftest import circle_points, ellipse_curvature, ellipse_distance, ellipse_points

TANGENTS = ((0.6, 0.8), (-1.0, 0.0))


def _scipy_reference(contour, points, end):
    """CubicSpline on pathgen's own breaks (scipy's "clamped" means zero slope:
    given tangents use its ((1, d0), (1, dn)) form)."""
    t = contour.breaks
    if contour.closed:
        return CubicSpline(t, np.vstack([points, points[:1]]), bc_type="periodic")
    if end == "clamped":
        bc = ((1, np.array(TANGENTS[0])), (1, np.array(TANGENTS[1])))
        return CubicSpline(t, points, bc_type=bc)
    return CubicSpline(t, points, bc_type=end)


def _point_sets(rng):
    yield "random", rng.normal(size=(1000, 2)).cumsum(axis=0)
    th = np.linspace(0, 1.7 * np.pi, 1000)
    yield "spiral", np.c_[(1 + th) * np.cos(th), (1 + th) * np.sin(th)]


@pytest.mark.parametrize("param", ["chord", "centripetal", "uniform"])
@pytest.mark.parametrize(
    ("end", "n"),
    [(e, n) for e in ("not-a-knot", "natural", "clamped", "periodic") for n in (2, 3, 4, 5, 1000)
     if not (e == "periodic" and n < 3)],  # periodic needs 3 distinct points (tested below)
)
def test_matches_scipy_cubicspline(rng, end, param, n):
    # Reference library: scipy.interpolate.CubicSpline on the same breaks.
    closed = end == "periodic"
    for label, base in _point_sets(rng):
        points = base[:: max(1, len(base) // n)][:n] if n < 1000 else base
        kw = {"tangents": TANGENTS} if end == "clamped" else {}
        c = fit(points, closed=closed, end="not-a-knot" if closed else end, param=param, **kw)
        ref = _scipy_reference(c, points, end)
        # avoid landing exactly on a break, where P''' jumps (one-sided there)
        t = np.linspace(c.breaks[0], c.breaks[-1], 5001) * (1 - 1e-7) + 1e-7 * c.breaks[-1] / 3
        np.testing.assert_array_equal(c.breaks, ref.x)
        for nu in range(4):
            got, want = c(t, nu), ref(t, nu)
            assert got.shape == want.shape == (5001, 2)
            scale = np.abs(want).max() + 1.0
            # third derivatives at n = 1000 amplify input rounding: a jump of
            # second derivatives over a step h turns float64 rounding ε into
            # about ε/h³ (derived; any solver, scipy's too): looser
            tol = 1e-9 if (nu < 3 or n < 1000) else 1e-7
            np.testing.assert_allclose(got, want, rtol=0, atol=tol * scale, err_msg=f"{label} nu={nu}")


@pytest.mark.parametrize("closed", [False, True])
def test_piece_by_piece_evaluation_matches_scipy_cubicspline(rng, closed):
    # Reference library: scipy.interpolate.CubicSpline on the same breaks
    # [scipy-cubicspline].  Rows of parameters, row i on piece first + i; a
    # closed outline's rows may run past the seam (pieces counted on, one
    # period later) and start before it (a negative first piece).
    points = rng.normal(size=(300, 2)).cumsum(axis=0)
    c = fit(points, closed=closed, end="natural")
    ref = _scipy_reference(c, points, "natural")
    b, m = c.breaks, c.pieces
    period = b[-1] - b[0]
    u = np.array([0.0, 0.1, 0.25, 0.5, 0.75, 0.999])  # not 1: P''' jumps at the next break
    firsts = (-40, 0, 250) if closed else (0, 17, m - 60)
    for first in firsts:
        p = first + np.arange(120 if closed else 60)
        turns, q = np.divmod(p, m)
        t = (b[q] + turns * period)[:, None] + np.diff(b)[q][:, None] * u
        for nu in range(4):
            got = c.on_pieces(t, first, nu)
            want = ref(b[q][:, None] + np.diff(b)[q][:, None] * u, nu)
            scale = np.abs(want).max() + 1.0
            np.testing.assert_allclose(got, want, rtol=0, atol=1e-9 * scale, err_msg=f"first={first} nu={nu}")
    with pytest.raises(InputError):
        fit(points[:20], closed=False).on_pieces(np.zeros((3, 2)), 17)


def test_coefficients_match_scipy_ppoly_layout(rng):
    # Reference library: CubicSpline.c has shape (4, m, 2), highest power first.
    p = rng.normal(size=(30, 2)).cumsum(axis=0)
    c = fit(p)
    ref = CubicSpline(c.breaks, p)
    assert c.coefficients.shape == ref.c.shape == (4, 29, 2)
    np.testing.assert_allclose(c.coefficients, ref.c, rtol=1e-9, atol=1e-9 * np.abs(ref.c).max())


def test_any_shape_parameters_and_seam_wrap():
    c = fit(circle_points(5.0, 40), closed=True)
    t = (np.linspace(0, c.breaks[-1], 24) + 0.0123).reshape(2, 3, 4)  # off the breaks
    assert c(t).shape == (2, 3, 4, 2)
    assert c(1.5).shape == (2,)
    period = c.breaks[-1] - c.breaks[0]
    # Closed contours wrap: P(t + period) = P(t), for every derivative.
    for nu in range(4):
        np.testing.assert_allclose(c(t + period, nu), c(t, nu), atol=1e-10)
        np.testing.assert_allclose(c(t - 3 * period, nu), c(t, nu), atol=1e-9)


@pytest.mark.parametrize("n", [2, 3])
def test_small_inputs(n):
    pts = np.array([[0.0, 0.0], [3.0, 4.0], [7.0, 1.0]])[:n]
    c = fit(pts)
    t = np.linspace(0, c.breaks[-1], 50)
    if n == 2:  # a straight line: second derivative zero, passes both ends
        np.testing.assert_allclose(c(t, 2), 0.0, atol=1e-12)
        np.testing.assert_allclose(c(c.breaks), pts, atol=1e-12)
    else:  # not-a-knot through 3 points is the parabola (numpy.polyfit, degree 2)
        coef = np.polyfit(c.breaks, pts, 2)
        want = np.stack([np.polyval(coef[:, k], t) for k in range(2)], axis=-1)
        np.testing.assert_allclose(c(t), want, atol=1e-10)
        np.testing.assert_allclose(c(t, 3), 0.0, atol=1e-10)


@pytest.mark.parametrize("n", [32, 128, 512])
def test_circle_curvature_and_length(n):
    # Handbook: a circle of radius R has curvature 1/R and length 2πR.  The
    # interpolation error is O(h⁴) (periodic spline, Kershaw 1971), so the
    # tolerance tightens with n as (2π/n)⁴ with a generous constant.
    R = 25.0
    c = fit(circle_points(R, n), closed=True)
    h = 2 * np.pi / n
    t = np.linspace(0, c.breaks[-1], 4000, endpoint=False)
    np.testing.assert_allclose(c.curvature(t), 1.0 / R, rtol=10 * h**2)
    assert abs(c.length - 2 * np.pi * R) <= 2 * np.pi * R * h**4
    assert abs(c.area - np.pi * R * R) <= np.pi * R * R * h**4


def test_circle_closed_by_repeated_point():
    pts = circle_points(3.0, 20)
    c = fit(np.vstack([pts, pts[:1]]))
    assert c.closed and len(c.points) == 20 and len(c.breaks) == 21
    assert not fit(pts).closed  # the last point differs: open unless asked
    assert fit(pts, closed=True).closed


@pytest.mark.parametrize(("a", "b"), [(3.0, 2.0), (3.5, 2.1), (10.0, 1.0)])
def test_ellipse_handbook_values(a, b):
    c = fit(ellipse_points(a, b, 2000), closed=True)
    # Vertex curvature a/b² at (±a, 0) and b/a² at (0, ±b) (handbook formula);
    # curvature converges as O(h²) (Hall & Meyer 1976): 1e-3 at 2000 points.
    t_vertex = c.breaks[[0, 500, 1000, 1500]]
    want = [a / b**2, b / a**2, a / b**2, b / a**2]
    np.testing.assert_allclose(c.curvature(t_vertex), want, rtol=1e-3)
    # Perimeter 4a·E(m), m = 1 − b²/a² (scipy.special.ellipe takes the parameter m).
    assert c.length == pytest.approx(4 * a * ellipe(1 - b * b / (a * a)), rel=1e-8)
    # Area πab (handbook), counter-clockwise positive.
    assert c.area == pytest.approx(np.pi * a * b, rel=1e-8)
    # Curvature along the whole outline (handbook κ(θ) for the ellipse).
    theta = np.linspace(0, 2 * np.pi, 2000, endpoint=False)
    np.testing.assert_allclose(c.curvature(c.breaks[:-1]), ellipse_curvature(a, b, theta), rtol=1e-3)


def test_arc_length_accuracy_and_inverse(rng):
    # Reference: scipy.integrate.quad of the speed |P'(t)| piece by piece.
    p = rng.normal(size=(12, 2)).cumsum(axis=0)
    c = fit(p)
    t = np.sort(rng.uniform(c.breaks[0], c.breaks[-1], 7))
    speed = lambda u: float(np.hypot(*c(u, 1)))  # noqa: E731
    for ti in t:
        knots = [k for k in c.breaks if k < ti] + [ti]
        want = sum(quad(speed, lo, hi, epsabs=0, epsrel=1e-13)[0] for lo, hi in zip(knots, knots[1:]))
        assert c.arc_length(ti) == pytest.approx(want, rel=1e-9)
    s = np.linspace(0, c.length, 33)
    np.testing.assert_allclose(c.arc_length(c.param_at(s)), s, rtol=0, atol=1e-9 * c.length)


def test_bounding_box_is_tight(rng):
    # Compared with dense sampling (an independent, brute-force reference).
    c = fit(rng.normal(size=(15, 2)).cumsum(axis=0))
    dense = c(np.linspace(c.breaks[0], c.breaks[-1], 200001))
    want = (*dense.min(axis=0), *dense.max(axis=0))
    np.testing.assert_allclose(c.bbox, want, atol=1e-6)
    lo = np.array(c.bbox[:2])
    assert np.all(dense.min(axis=0) >= lo - 1e-12)


def _order(ns, errors):
    """Least-squares slope of log(error) against log(n): the convergence order."""
    return -np.polyfit(np.log(ns), np.log(errors), 1)[0]


@pytest.mark.parametrize(
    ("end", "order"),
    # de Boor (Practical Guide, ch. IV-V): not-a-knot and clamped 4;
    # Atkinson 1968: natural 2 when f''(ends) != 0.
    [("not-a-knot", 4.0), ("clamped", 4.0), ("natural", 2.0)],
)
def test_convergence_order_open(end, order):
    # f = exp on [0, 1] as the curve (t, e^t) with uniform parameters, so each
    # coordinate is the scalar spline the published orders speak of.
    ns = np.array([8, 16, 32, 64, 128])
    errors = []
    for n in ns:
        x = np.linspace(0, 1, n + 1)
        h = 1.0 / n
        kw = {"tangents": ((h, h), (h, h * np.e))} if end == "clamped" else {}
        c = fit(np.c_[x, np.exp(x)], end=end, param="uniform", **kw)
        u = np.linspace(0, n, 20 * n + 1)
        errors.append(np.abs(c(u)[:, 1] - np.exp(u * h)).max())
    assert _order(ns, errors) == pytest.approx(order, abs=0.25)
    if end == "natural":
        # Recomputed with scipy CubicSpline (sources: scipy-cubicspline, atkinson-1968): max error 2.081e-3 at n = 8, 8.145e-6 at 128
        assert errors[0] == pytest.approx(2.081e-3, rel=0.01)
    if end == "clamped":
        assert errors[0] == pytest.approx(1.690e-6, rel=0.01)  # same table, clamped


def test_convergence_order_periodic():
    # Kershaw 1971: periodic spline error O(h⁴); f = (cos θ, sin θ + ½ cos 2θ).
    ns = np.array([16, 32, 64, 128])
    errors = []
    for n in ns:
        th = np.linspace(0, 2 * np.pi, n, endpoint=False)
        f = lambda th: np.c_[np.cos(th), np.sin(th) + 0.5 * np.cos(2 * th)]  # noqa: E731
        c = fit(f(th), closed=True, param="uniform")
        u = np.linspace(0, n, 20 * n, endpoint=False)
        errors.append(np.abs(c(u) - f(u * 2 * np.pi / n)).max())
    assert _order(ns, errors) == pytest.approx(4.0, abs=0.25)


@pytest.mark.parametrize(("param", "order"), [("chord", 4.0), ("uniform", 2.0), ("centripetal", 2.0)])
def test_parametrization_orders_on_uneven_ellipse(param, order):
    # Floater 2006 (from memory): chordal cubic interpolation is fourth order;
    # uniform and centripetal only second order on unevenly spaced points.
    # Parametrization reference table (sources: lee-1989, floater-2006): ellipse a = 3, b = 1, parameter steps alternating 1:3.
    ns = np.array([64, 128, 256, 512])
    errors = []
    for n in ns:
        steps = np.tile([1.0, 3.0], n // 2)
        theta = np.concatenate([[0.0], np.cumsum(steps)[:-1]]) * 2 * np.pi / steps.sum()
        c = fit(ellipse_points(3.0, 1.0, theta=theta), closed=True, param=param)
        t = np.linspace(0, c.breaks[-1], 40 * n, endpoint=False)
        errors.append(ellipse_distance(3.0, 1.0, c(t)).max())
    assert _order(ns, errors) == pytest.approx(order, abs=0.35)
    # The same table (recomputed with scipy; sources: floater-2006) at n = 64, 128, 256
    table = {"chord": [2.17e-4, 1.80e-5, 1.24e-6], "uniform": [9.69e-3, 2.47e-3, 6.20e-4],
             "centripetal": [5.94e-3, 1.55e-3, 3.91e-4]}[param]
    np.testing.assert_allclose(errors[:3], table, rtol=0.05)


# -- properties -----------------------------------------------------------

finite = st.floats(-1e3, 1e3, allow_nan=False, allow_infinity=False)


@st.composite
def open_points(draw):
    n = draw(st.integers(2, 30))
    pts = np.array(draw(st.lists(st.tuples(finite, finite), min_size=n, max_size=n)))
    steps = np.hypot(*np.diff(pts, axis=0).T)
    size = np.hypot(*(pts.max(axis=0) - pts.min(axis=0)))
    if not np.all(steps > 1e-6 * max(size, 1.0)):
        pts = np.c_[np.arange(n, dtype=float), np.arange(n, dtype=float) ** 2 % 7]
    return pts


@st.composite
def star_polygons(draw):
    """Star-shaped point sets: simple closed outlines, counter-clockwise."""
    n = draw(st.integers(8, 40))
    radii = np.array(draw(st.lists(st.floats(0.85, 1.15), min_size=n, max_size=n)))
    jitter = np.array(draw(st.lists(st.floats(-0.2, 0.2), min_size=n, max_size=n)))
    theta = (np.arange(n) + jitter) * 2 * np.pi / n
    scale = draw(st.floats(0.5, 200.0))
    return scale * np.c_[radii * np.cos(theta), radii * np.sin(theta)]


@given(open_points(), st.sampled_from(["not-a-knot", "natural"]), st.sampled_from(["chord", "centripetal", "uniform"]))
def test_property_interpolates_every_point(pts, end, param):
    c = fit(pts, closed=False, end=end, param=param)
    scale = np.abs(pts).max() + 1.0
    np.testing.assert_allclose(c(c.breaks), pts, rtol=0, atol=1e-9 * scale)
    t = np.linspace(c.breaks[0], c.breaks[-1], 301)
    assert np.all(np.isfinite(c(t)))


@given(star_polygons(), st.sampled_from(["chord", "centripetal", "uniform"]))
def test_property_closed_is_c2_at_seam_and_turns_once(pts, param):
    c = fit(pts, closed=True, param=param)
    t0, t1 = c.domain
    scale = np.abs(pts).max()
    # Passes through every point, and P, P', P'' agree across the seam
    # (the periodic end condition's defining equations).
    np.testing.assert_allclose(c(c.breaks[:-1]), pts, atol=1e-9 * scale)
    c0, c1, c2, c3 = c.coefficients[:, -1]
    h = c.breaks[-1] - c.breaks[-2]
    at_seam_end = [
        ((c0 * h + c1) * h + c2) * h + c3,
        (3 * c0 * h + 2 * c1) * h + c2,
        6 * c0 * h + 2 * c1,
    ]
    for nu, value in enumerate(at_seam_end):
        ref = c(t0, nu)  # the first piece at its start
        np.testing.assert_allclose(value, ref, rtol=0, atol=1e-8 * (np.abs(ref).max() + scale))
    # Theorem of turning tangents: a simple closed curve turns by ±2π.
    t = np.linspace(t0, t1, 20000)
    d = c(t, 1)
    turning = np.unwrap(np.arctan2(d[:, 1], d[:, 0]))
    assert turning[-1] - turning[0] == pytest.approx(2 * np.pi, abs=1e-6)
    kappa = c.curvature(t)
    assert np.all(np.isfinite(kappa))
    # ∫κ ds by the trapezoid rule on the same samples agrees with 2π.
    speed = np.hypot(d[:, 0], d[:, 1])
    integral = np.trapezoid(kappa * speed, t)
    assert integral == pytest.approx(2 * np.pi, rel=1e-3)


# -- errors -----------------------------------------------------------------

@pytest.mark.parametrize(
    ("kwargs", "points", "match"),
    [
        ({}, [[0, 0]], "at least 2 points, got 1"),
        ({}, [], r"shape \(n, 2\)"),
        ({}, [[0, 0, 1], [1, 1, 1]], r"shape \(n, 2\), got \(2, 3\)"),
        ({}, [[0, 0], [1, np.nan], [2, 0]], r"row 1 is not finite"),
        ({}, [[0, 0], [1, 1], [np.inf, 0]], r"row 2 is not finite"),
        ({}, [["a", 0], [1, 1]], "must be an \\(n, 2\\) array of numbers"),
        ({}, [[0, 0], [1, 1], [1, 1], [2, 0]], "rows 1 and 2 coincide"),
        ({"end": "loose"}, [[0, 0], [1, 1]], "end='loose' is not one of: 'not-a-knot', 'natural', 'clamped'"),
        ({"param": "arc"}, [[0, 0], [1, 1]], "param='arc' is not one of: 'chord', 'centripetal', 'uniform'"),
        ({"end": "clamped"}, [[0, 0], [1, 1]], "needs tangents"),
        ({"end": "clamped", "tangents": [(0, 0), (1, 0)]}, [[0, 0], [1, 1]], "must not be zero"),
        ({"end": "clamped", "tangents": [(1, 0)]}, [[0, 0], [1, 1]], "two finite 2-vectors"),
        ({"closed": True}, [[0, 0], [1, 1]], "at least 3 distinct points, got 2"),
        ({"closed": True}, [[0, 0], [1, 1], [0, 0]], "at least 3 distinct points, got 2"),
    ],
)
def test_errors_name_the_problem(kwargs, points, match):
    with pytest.raises(InputError, match=match):
        fit(points, **kwargs)
    with pytest.raises(ValueError):  # InputError is also a ValueError
        fit(points, **kwargs)


def test_bad_derivative_order():
    c = fit([[0, 0], [1, 1]])
    with pytest.raises(InputError, match="nu must be 0, 1, 2 or 3"):
        c(0.5, nu=4)


def test_contour_is_immutable():
    c = fit(circle_points(1.0, 8), closed=True)
    with pytest.raises(ValueError):
        c.breaks[0] = 1.0
    with pytest.raises(ValueError):
        c.coefficients[0, 0, 0] = 1.0
    with pytest.raises(AttributeError):
        c.closed = False


def test_public_api_is_lazy_and_complete():
    assert pathgen.fit is fit
    assert "fit" in dir(pathgen)
    with pytest.raises(AttributeError, match="no attribute 'nothing'"):
        pathgen.nothing  # noqa: B018


@pytest.mark.parametrize("n", [3, 50, 399, 401, 1200])
def test_tridiag_solve_small_and_large_agree_with_a_dense_solve(n):
    # the one tridiagonal solver: dgtsv's steps in Python up to DENSE_MAX
    # rows, LAPACK dgtsv above; both against numpy.linalg.solve on the full
    # matrix, and the small one bit for bit against LAPACK's dgtsv itself
    from pathgen.spline import DENSE_MAX, tridiag_solve

    rng = np.random.default_rng(n)
    dl, du = rng.uniform(-1, 1, n - 1), rng.uniform(-1, 1, n - 1)
    d = 2.5 + rng.uniform(0, 1, n)
    b = rng.normal(size=(n, 2))
    A = np.diag(d) + np.diag(dl, -1) + np.diag(du, 1)
    x = tridiag_solve(dl.copy(), d.copy(), du.copy(), b.copy())
    np.testing.assert_allclose(x, np.linalg.solve(A, b), rtol=1e-12, atol=1e-12)
    assert (n <= DENSE_MAX) == (n < 400)
    from scipy.linalg.lapack import dgtsv

    assert np.array_equal(x, dgtsv(dl, d, du, b)[3])


def test_a_small_fit_does_not_import_scipy():
    # a 200-point outline is fitted without scipy (its import costs about
    # half a second on a small machine, more than the fit)
    import subprocess
    import sys

    code = ("import sys, numpy as np; from pathgen.spline import fit; "
            "th = np.linspace(0, 6.28, 200, endpoint=False); "
            "fit(np.c_[np.cos(th), np.sin(th)], closed=True); fit(np.c_[th, np.sin(th)]); "
            "print(any(m.startswith('scipy') for m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"
