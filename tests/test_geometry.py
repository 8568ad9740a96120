"""The shared plane-geometry formulas (pathgen.geometry) and the move
lengths (pathgen.moves), each against an outside reference."""

from __future__ import annotations

import numpy as np
import pytest
import shapely

from pathgen.geometry import (angle_along_arc, arc_geometry, arc_sweep, curvature, orientation, shoelace_area,
                              turn_angle)
from pathgen.moves import ARC_CCW, ARC_CW, LINE, RAPID, lengths

RNG = np.random.default_rng(18)


def test_curvature_of_an_ellipse_is_the_handbook_formula():
    # x = a cos t, y = b sin t: κ = ab / (a² sin² t + b² cos² t)^{3/2}
    # (sources: curvature, ellipse)
    a, b = 3.0, 2.0
    t = np.linspace(0, 2 * np.pi, 101)
    d1 = np.c_[-a * np.sin(t), b * np.cos(t)]
    d2 = np.c_[-a * np.cos(t), -b * np.sin(t)]
    want = a * b / (a * a * np.sin(t) ** 2 + b * b * np.cos(t) ** 2) ** 1.5
    np.testing.assert_allclose(curvature(d1, d2), want, rtol=1e-13, atol=0)
    # reversed direction: the same curve turns right, κ changes sign
    np.testing.assert_allclose(curvature(-d1, d2), -want, rtol=1e-13, atol=0)


def test_curvature_where_the_curve_stops_is_never_nan():
    k = curvature(np.zeros((2, 2)), np.array([[0.0, 0.0], [0.0, 1.0]]))
    assert np.all(np.isfinite(k)) and k[0] == 0.0


def test_turn_angle_matches_the_complex_argument():
    # the turn from a to b is arg(b / a) for a, b as complex numbers
    # (numpy.angle, the reference)
    a, b = RNG.normal(size=(500, 2)), RNG.normal(size=(500, 2))
    want = np.angle((b[:, 0] + 1j * b[:, 1]) / (a[:, 0] + 1j * a[:, 1]))
    np.testing.assert_allclose(turn_angle(a, b), want, rtol=0, atol=1e-12)


def test_turns_of_a_simple_closed_polygon_add_up_to_one_full_turn():
    # Hopf's turning tangents theorem: the exterior angles of a simple
    # counter-clockwise polygon add up to 2π (sources: turning-tangents)
    th = np.sort(RNG.uniform(0, 2 * np.pi, 40))
    p = np.c_[(5 + np.cos(3 * th)) * np.cos(th), (5 + np.cos(3 * th)) * np.sin(th)]
    d = np.roll(p, -1, axis=0) - p
    assert float(turn_angle(d, np.roll(d, -1, axis=0)).sum()) == pytest.approx(2 * np.pi, abs=1e-9)


def test_arc_sweep_against_the_complex_argument():
    c = RNG.normal(size=(300, 2))
    r = RNG.uniform(0.5, 5, 300)
    a0, sw = RNG.uniform(-np.pi, np.pi, 300), RNG.uniform(0.01, 2 * np.pi - 0.01, 300)
    ccw = RNG.random(300) < 0.5
    s = c + r[:, None] * np.c_[np.cos(a0), np.sin(a0)]
    a1 = np.where(ccw, a0 + sw, a0 - sw)
    e = c + r[:, None] * np.c_[np.cos(a1), np.sin(a1)]
    np.testing.assert_allclose(arc_sweep(s, e, c, ccw), sw, rtol=0, atol=1e-9)
    radius, start, signed = arc_geometry(s, e, c, ccw)
    np.testing.assert_allclose(radius, r, rtol=1e-12)
    np.testing.assert_allclose(np.angle(np.exp(1j * (start - a0))), 0.0, atol=1e-12)
    np.testing.assert_allclose(signed, np.where(ccw, sw, -sw), atol=1e-9)
    # an arc whose ends coincide is a full turn, either way (G-code: a full
    # circle is written with the end at the start; sources: nistir-6556)
    assert arc_sweep([1.0, 0.0], [1.0, 0.0], [0.0, 0.0], False) == 2 * np.pi


def test_angle_along_an_arc_against_the_complex_argument():
    # the angle from direction a0 to ang, turning counter-clockwise, is
    # arg(e^{i·ang} / e^{i·a0}) taken in [0, 2π) (numpy.angle, the reference);
    # clockwise it is the same angle measured the other way
    a0, ang = RNG.uniform(-np.pi, np.pi, 400), RNG.uniform(-np.pi, np.pi, 400)
    ccw = np.mod(np.angle(np.exp(1j * (ang - a0))), 2 * np.pi)
    np.testing.assert_allclose(angle_along_arc(ang, a0, 1.0), ccw, atol=1e-12)
    np.testing.assert_allclose(angle_along_arc(ang, a0, -1.0), np.mod(-ccw, 2 * np.pi), atol=1e-12)
    # with a shift, angles just before the start come out slightly negative
    assert float(angle_along_arc(-1e-9, 0.0, 1.0, 1e-6)) == pytest.approx(-1e-9, abs=1e-15)


def test_orientation_and_area_agree_with_shapely():
    for _ in range(20):
        th = np.sort(RNG.uniform(0, 2 * np.pi, 30))
        p = np.c_[RNG.uniform(3, 6, 30) * np.cos(th), RNG.uniform(3, 6, 30) * np.sin(th)] + RNG.normal(size=2) * 100
        if RNG.random() < 0.5:
            p = p[::-1]
        ring = shapely.LinearRing(p)
        assert orientation(p) == (1 if shapely.is_ccw(ring) else -1)
        assert abs(shoelace_area(p)) == pytest.approx(shapely.Polygon(p).area, rel=1e-9)


def test_move_lengths_are_the_handbook_lengths():
    # a line's length is its chord (3-D); an arc's is radius × swept angle
    # (sources: curvature); a closed arc is a full circle, 2πr
    kind = np.array([RAPID, LINE, ARC_CCW, ARC_CW, ARC_CCW])
    start = np.array([[0, 0, 5], [0, 0, 0], [2, 0, -1], [2, 0, -1], [2, 0, -1]], float)
    end = np.array([[3, 4, 5], [1, 2, 2], [0, 2, -1], [0, 2, -1], [2, 0, -1]], float)
    center = np.array([[0, 0], [0, 0], [0, 0], [0, 0], [0, 0]], float)
    want = [5.0, 3.0, np.pi, 3 * np.pi, 4 * np.pi]
    np.testing.assert_allclose(lengths(kind, start, end, center), want, rtol=1e-15)
