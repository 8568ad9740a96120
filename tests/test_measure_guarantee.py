"""The sampling guarantee of the deviation measurement (pathgen.path.measure).

Promise: on every primitive the measured curve → move deviation is within
1 % of the tolerance of the true maximum distance of the curve span from
its move.  Derivation: between samples h apart on a curve with |q''| <= M
the curve leaves the chord by at most h²·M/8 (the linear interpolation
error bound; de Boor, A Practical Guide to Splines, rev. ed. 2001, ch. III,
broken line interpolation), and the distance to a line or arc is 1-Lipschitz.  The "true maximum" here
is measured independently on a grid 400 times finer per spline piece.
"""

from __future__ import annotations

import numpy as np
import pytest

from pathgen.path.measure import (
    ARC_CCW,
    LINE,
    Chain,
    chain_deviation,
    distance_to_own,
    offset_points,
    piece_second_derivative_bound,
)
from pathgen.spline import fit


def _true_curve_to_move(contour, d, chain, per_piece=400):
    """Max over a grid of ``per_piece`` points on every spline piece under each span."""
    b = contour.breaks
    out = np.zeros(len(chain))
    for i in range(len(chain)):
        lo, hi = sorted((chain.t0[i], chain.t1[i]))
        inner = b[(b > lo) & (b < hi)]
        knots = np.r_[lo, inner, hi]
        t = np.concatenate([np.linspace(a, e, per_piece) for a, e in zip(knots[:-1], knots[1:])])
        q = offset_points(contour, t, d)
        out[i] = distance_to_own(q, np.full(len(t), i), chain).max()
    return out


def _noisy_wave(seed=3, n=3000):
    # invented: a gently waved edge 0.5 mm apart with probe noise of 2 µm
    # and one reading knocked 0.03 mm out of line, 0.02 mm from its neighbour
    rng = np.random.default_rng(seed)
    x = np.arange(n) * 0.5
    y = 0.4 * np.sin(x / 37.0) + rng.normal(0, 0.002, n)
    k = 2 * n // 5
    x = np.r_[x[:k + 1], x[k] + 0.02, x[k + 1:]]
    y = np.r_[y[:k + 1], y[k] + 0.03, y[k + 1:]]
    return np.c_[x, y]


@pytest.mark.parametrize("d", [0.0, 0.6, -0.6])
def test_measured_deviation_of_long_lines_is_within_one_percent_of_tol_of_the_true_maximum(d):
    contour = fit(_noisy_wave(), end="natural")
    b = contour.breaks
    cuts = np.r_[b[0], b[137], b[1000], b[1202], b[2400], b[-1]]
    t0, t1 = cuts[:-1], cuts[1:]
    start, end = offset_points(contour, t0, d), offset_points(contour, t1, d)
    chain = Chain(np.full(len(t0), LINE, np.int8), start, end, np.zeros((len(t0), 2)), t0, t1)
    tol = 0.01
    got = chain_deviation(contour, d, chain, tol)
    want = _true_curve_to_move(contour, d, chain)
    # the promise: the true curve → move maximum exceeds the measure by at most 1 % of tol
    assert np.all(want <= got + 0.01 * tol)
    assert want[2] > 0.02  # the knocked reading lies under the third line


def test_a_span_walked_backwards_keeps_the_guarantee():
    contour = fit(_noisy_wave(seed=8), end="natural")
    b = contour.breaks
    t0, t1 = b[1100:1101], b[1300:1301]
    p0, p1 = contour(t0), contour(t1)
    fwd = Chain(np.array([LINE], np.int8), p0, p1, np.zeros((1, 2)), t0, t1)
    tol = 0.005
    a = chain_deviation(contour, 0.0, fwd, tol)
    r = chain_deviation(contour, 0.0, fwd.reversed(), tol)
    want = _true_curve_to_move(contour, 0.0, fwd)
    assert want[0] > 0.03  # the knocked reading is under this span
    assert want[0] <= a[0] + 0.01 * tol
    assert want[0] <= r[0] + 0.01 * tol


def test_a_short_bump_under_one_arc_of_a_closed_outline_is_measured():
    # invented: a ring of radius 50 read every 1 mm, one reading pushed out
    # 0.04 mm; one arc of the nominal circle stands for a third of the ring
    # (a span crossing the seam)
    n = 314
    th = np.linspace(0.0, 2 * np.pi, n, endpoint=False)
    r = np.full(n, 50.0)
    r[3] += 0.04
    contour = fit(np.c_[r * np.cos(th), r * np.sin(th)], closed=True)
    b = contour.breaks
    period = b[-1] - b[0]
    t0 = np.array([b[-60] - period])  # before the seam, as a span that wraps
    t1 = np.array([b[40]])
    s, e = contour(t0), contour(t1)
    chain = Chain(np.array([ARC_CCW], np.int8), s, e, np.zeros((1, 2)), t0, t1)
    tol = 0.01
    got = chain_deviation(contour, 0.0, chain, tol)
    want = _true_curve_to_move(contour, 0.0, chain)
    assert want[0] >= 0.039  # the spline passes through the pushed reading
    assert want[0] <= got[0] + 0.01 * tol


@pytest.mark.parametrize("d", [0.0, 1.5, -0.8])
def test_second_derivative_bound_holds_on_a_fine_grid(d):
    # q'' by central differences on a grid inside every piece; the bound is
    # derived (Taylor's theorem on the speed, product rule on N), checked here
    contour = fit(_noisy_wave(seed=11, n=400), end="natural")
    b = contour.breaks
    pieces = np.arange(len(b) - 1)
    bound = piece_second_derivative_bound(contour, pieces, d)
    u = np.linspace(0.05, 0.95, 19)
    t = b[:-1, None] + np.diff(b)[:, None] * u[None, :]
    e = 1e-4 * np.diff(b)[:, None]
    q2 = (offset_points(contour, t + e, d) - 2 * offset_points(contour, t, d)
          + offset_points(contour, t - e, d)) / (e * e)[..., None]
    mag = np.hypot(q2[..., 0], q2[..., 1]).max(axis=1)
    assert np.all(mag <= bound * (1 + 1e-3) + 1e-6)
    if d == 0.0:
        # exact for the contour itself: |P''| is largest at a piece end
        left_end = contour(b[1:] - 1e-12 * np.diff(b), 2)
        ends = np.maximum(np.hypot(*contour(b[:-1], 2).T), np.hypot(*left_end.T))
        np.testing.assert_allclose(bound, ends, rtol=1e-6, atol=1e-9)


def _samples_used(contour, d, chain, tol, density=1):
    """Curve samples chain_deviation takes: the even ones and the extras."""
    from pathgen.path.measure import _dense_extras, _sample_counts

    counts = _sample_counts(contour, chain, tol, density, d)
    extras = _dense_extras(contour, chain, counts, d, tol)
    return int(counts.sum()) + (0 if extras is None else len(extras[1]))


def test_a_spike_on_one_piece_among_100000_under_one_move_is_found_by_few_samples():
    # invented: a straight edge read every 0.01 mm over 1 m (10^5 pieces),
    # one reading knocked 0.05 mm off; one line move stands for all of it.
    # Reference: scipy.interpolate.CubicSpline [scipy-cubicspline] on the
    # same parameters (natural ends) evaluated 400 times per piece around the
    # reading gives the true maximum; the promise [broken-line-error] is the
    # measure within 1 % of tol of it.  Sized by geometry, the measure takes
    # a few hundred samples, not one per piece (the pieces far from the
    # reading are exactly straight: |P''| = 0 there).
    from scipy.interpolate import CubicSpline

    n = 100_001
    x = np.arange(n) * 0.01
    y = np.zeros(n)
    k = 61_803
    y[k] = 0.05
    contour = fit(np.c_[x, y], end="natural")
    b = contour.breaks
    chain = Chain(np.array([LINE], np.int8), contour(b[:1]), contour(b[-1:]), np.zeros((1, 2)),
                  b[:1].copy(), b[-1:].copy())
    tol = 0.01
    (got,) = chain_deviation(contour, 0.0, chain, tol)
    ref = CubicSpline(b, np.c_[x, y], bc_type="natural")
    t = np.concatenate([np.linspace(b[i], b[i + 1], 400) for i in range(k - 30, k + 30)])
    want = np.abs(ref(t)[:, 1]).max()  # distance to the x axis, the move
    assert want >= 0.05  # the curve passes through the knocked reading
    assert want - 0.01 * tol <= got <= want + 0.01 * tol
    used = _samples_used(contour, 0.0, chain, tol)
    assert used < 2_000 < len(b) - 1


@pytest.mark.parametrize("d", [0.0, 2.0])
def test_a_chord_over_a_densely_read_circle_measures_its_sagitta(d):
    # A line move across a third of a circle of radius 50 read at 10^5
    # points (33 000 pieces under the move) stands off the arc by the
    # sagitta R - sqrt(R² - L²/4) [sagitta], R the offset's radius 50 - d
    # (d to the left of a counter-clockwise circle, towards the centre).
    # Sized by geometry: a few hundred samples for the move, not a sample
    # per piece.
    n = 100_000
    th = np.linspace(0.0, 2 * np.pi, n, endpoint=False)
    contour = fit(np.c_[50 * np.cos(th), 50 * np.sin(th)], closed=True)
    b = contour.breaks
    period = b[-1] - b[0]
    # the second move crosses the seam, its span given one period on
    t0 = np.array([b[n // 2], b[n - n // 6]])
    t1 = np.array([b[n // 2 + n // 3], b[n // 3 - n // 6] + period])
    s, e = offset_points(contour, t0, d), offset_points(contour, t1, d)
    chain = Chain(np.full(2, LINE, np.int8), s, e, np.zeros((2, 2)), t0, t1)
    tol = 0.01
    got = chain_deviation(contour, d, chain, tol)
    R = 50.0 - d
    L = np.hypot(*(e - s).T)
    want = R - np.sqrt(R * R - L * L / 4)
    assert np.all(np.abs(got - want) <= 0.01 * tol)
    assert _samples_used(contour, d, chain, tol) < 2_000 < n // 3
