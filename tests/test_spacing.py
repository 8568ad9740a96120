"""Polylines of a contour sized by curvature and tolerance (pathgen.path.spacing).

Outside references:
* the sagitta of a chord, s = R - sqrt(R² - L²/4) ≈ L²/(8R), and the chord
  count of a circle within e, ⌈π / acos(1 - e/R)⌉ (sources: sagitta);
* the least number of chords ∫√(|κ|/(8e)) ds (sources: levien-2019);
* shapely's ``distance`` on a dense polygon of every fitted piece
  (sources: shapely).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import shapely

from pathgen.path.spacing import curvature_bound, piece_bounds, vertex_params
from pathgen.outline import fit_outline
from pathgen.spline import fit

from conftest import circle_points


def _chord_error(contour, t, per=16):
    """Largest distance of the curve from the polyline through contour(t),
    the curve sampled ``per`` times on every chord."""
    V = contour(t)
    f = (np.arange(1, per) / per)[None, :]
    tm = (t[:-1, None] + np.diff(t)[:, None] * f).ravel()
    P = contour(tm)
    a = np.repeat(V[:-1], per - 1, axis=0)
    ab = np.repeat(np.diff(V, axis=0), per - 1, axis=0)
    u = np.clip(np.einsum("ij,ij->i", P - a, ab) / np.einsum("ij,ij->i", ab, ab), 0, 1)
    return float(np.hypot(*(P - a - u[:, None] * ab).T).max())


@pytest.mark.parametrize("e", [0.01, 0.001])
def test_circle_chords_within_the_sagitta_and_near_the_least_count(e):
    # a circle of radius 40 through 20 000 points: the polyline follows the
    # circle's curvature, not the points
    R = 40.0
    c = fit(circle_points(R, 20_000), closed=True)
    t = vertex_params(c, e)
    # every chord stands off the exact circle by at most e (sources: sagitta)
    V = c(t)
    mid = 0.5 * (V[:-1] + V[1:])
    assert float(np.max(R - np.hypot(*mid.T))) <= e
    assert _chord_error(c, t) <= e
    # at least the handbook count for a circle, and not far above it:
    # ⌈π / acos(1 - e/R)⌉ chords (sources: sagitta); the grading and the
    # bound's (1 - 1/4)² share cost at most a factor 1/(1 - 1/4) = 4/3 more
    least = math.ceil(math.pi / math.acos(1 - e / R))
    assert least <= len(t) - 1 <= 1.5 * least


def test_length_cap_and_corners():
    # a rectangle with rounded ends: two straight sides and four corners
    # where the sides meet a half-circle of radius 5 (a slot outline)
    th = np.linspace(-np.pi / 2, np.pi / 2, 41)
    right = np.c_[20 + 5 * np.cos(th), 5 * np.sin(th)]
    left = np.c_[-5 * np.cos(th), -5 * np.sin(th)]
    pts = np.vstack([np.c_[np.linspace(0, 20, 9)[:-1], np.full(8, -5.0)], right[:-1],
                     np.c_[np.linspace(20, 0, 9)[:-1], np.full(8, 5.0)], left[:-1]])
    c = fit_outline(pts, closed=True, corners=[0, 8, 48, 56])
    assert len(c.corners) >= 4
    t = vertex_params(c, 0.001, 0.5)
    # every corner is a vertex, no chord is longer than the cap, and every
    # chord is within e of the curve
    assert set(c.breaks[list(c.corners)]) <= set(t)
    V = c(t)
    assert float(np.hypot(*np.diff(V, axis=0).T).max()) <= 0.5 + 1e-12
    assert _chord_error(c, t) <= 0.001


def test_spike_on_one_short_piece_among_many():
    # 200 000 points on a circle of radius 50, one of them pushed out by
    # 0.2 mm: the spline makes a narrow bump on the few pieces around it.
    # The polyline must follow the bump within e, measured against shapely's
    # distance from a dense polygon through every piece (sources: shapely).
    n, R, e = 200_000, 50.0, 0.002
    pts = circle_points(R, n)
    k = 123_457
    pts[k] *= (R + 0.2) / R
    c = fit(pts, closed=True)
    t = vertex_params(c, e)
    assert len(t) < n / 20  # sized by the shape, not the point count
    # the bump's top is a vertex's neighbour: the polyline passes within e of it
    line = shapely.LineString(c(t))
    assert shapely.distance(line, shapely.Point(pts[k])) <= e
    # and within e of the curve everywhere near the bump (every piece sampled 32 times)
    b = c.breaks
    near = (t >= b[k - 40]) & (t <= b[k + 40])
    assert near.sum() > 20  # the bump got vertices of its own
    lo, hi = np.flatnonzero(near)[[0, -1]]
    assert _chord_error(c, t[max(lo - 1, 0):hi + 2], per=64) <= e


def test_bounds_hold_against_sampled_values():
    # the bounds read from the coefficients hold at sampled points of every piece
    th = np.linspace(0, 2 * np.pi, 300, endpoint=False)
    r = 20 + 3 * np.cos(5 * th)
    c = fit(np.c_[r * np.cos(th), r * np.sin(th)], closed=True)
    h, M, vmin, vmax = piece_bounds(c)
    f = np.linspace(0, 1, 9)
    tt = (c.breaks[:-1, None] + h[:, None] * f[None, :])
    d1 = np.hypot(*c(tt.ravel(), 1).T).reshape(tt.shape)
    d2 = np.hypot(*c(tt.ravel(), 2).T).reshape(tt.shape)
    assert np.all(d2 <= M[:, None] * (1 + 1e-12))
    assert np.all(d2.max(axis=1) >= M * (1 - 1e-9))  # exact at an end
    assert np.all(d1 >= vmin[:, None] * (1 - 1e-12)) and np.all(d1 <= vmax[:, None] * (1 + 1e-12))
    k = np.abs(c.curvature(tt.ravel())).reshape(tt.shape)
    assert np.all(k <= curvature_bound(c)[:, None] * (1 + 1e-12))
