"""Contracts that a small change could break without any other test
noticing.  Each test names the planted bug it was written against (checked
by planting it: the test fails)."""

from __future__ import annotations

import math
import re

import numpy as np
import pytest
import shapely

from gcode_reader import read
from pathgen import Cut, Tool, clean_points, fit, fit_outline
from pathgen.export.gcode import gcode_text
from pathgen.path.biarc import biarc, joint_circle
from pathgen.path.build import make_toolpath
from pathgen.path.measure import Chain, chain_deviation
from pathgen.path.model import ARC_CCW, ARC_CW, LINE, Arc, Line, Rapid, Toolpath

RNG = np.random.default_rng(20261203)


def _unit(a):
    return np.c_[np.cos(a), np.sin(a)]


def _sweep(start, end, center, ccw):
    """Arc sweep (rad, 0..2π) from the arc's own geometry, independently."""
    a0 = np.arctan2(start[:, 1] - center[:, 1], start[:, 0] - center[:, 0])
    a1 = np.arctan2(end[:, 1] - center[:, 1], end[:, 0] - center[:, 0])
    return np.where(ccw, np.mod(a1 - a0, 2 * np.pi), np.mod(a0 - a1, 2 * np.pi))


def test_no_biarc_turns_more_than_half_a_circle():
    # Planted bug: removing the refusal of arcs over 180° in biarc().  A
    # biarc arc is the arc tangent to t at p through the joint; over 180°
    # it bulges away from the chord (Bolton 1975; sources: bolton-1975) and
    # the span must be split instead.
    k = 4000
    p1 = RNG.uniform(-1, 1, (k, 2))
    p2 = RNG.uniform(-1, 1, (k, 2))
    t1, t2 = _unit(RNG.uniform(0, 2 * np.pi, k)), _unit(RNG.uniform(0, 2 * np.pi, k))
    # any point of the joint circle gives a tangent-continuous pair; random
    # joints on it give arcs of every sweep
    jc, jr, good = joint_circle(p1, t1, p2, t2)
    joint = jc + jr[:, None] * _unit(RNG.uniform(0, 2 * np.pi, k))
    pm, kind, center, ok = biarc(p1, t1, p2, t2, joint=joint)
    ok &= good
    checked = 0
    for i, (a, b) in enumerate(((p1, pm), (pm, p2))):
        arc = ok & (kind[:, i] != LINE)
        sw = _sweep(a[arc], b[arc], center[arc, i], kind[arc, i] == ARC_CCW)
        assert np.all(sw <= np.pi + 1e-7), float(sw.max())
        checked += int(arc.sum())
    assert checked > 1000 and (~ok).sum() > 100  # both kinds of span were present


def test_an_arc_written_as_a_line_kinks_by_at_most_5e_5_rad():
    # Planted bug: loosening the near-straight bound 10x.  The docstring of
    # pathgen.path.biarc promises that a biarc arc replaced by its chord
    # leaves a tangent kink of at most its half-sweep, 5e-5 rad (derived:
    # the chord of an arc meets its tangent at half the sweep).
    k = 4000
    p1 = np.zeros((k, 2))
    p2 = np.c_[np.ones(k), np.zeros(k)]
    tilt = RNG.uniform(-1e-3, 1e-3, (k, 2))  # tangents a hair off the chord
    t1, t2 = _unit(tilt[:, 0]), _unit(tilt[:, 1])
    pm, kind, center, ok = biarc(p1, t1, p2, t2)
    lines = 0
    for i, (a, b, t) in enumerate(((p1, pm, t1), (pm, p2, t2))):
        is_line = ok & (kind[:, i] == LINE)
        chord = b[is_line] - a[is_line]
        chord /= np.linalg.norm(chord, axis=1, keepdims=True)
        kink = np.arccos(np.clip((chord * t[is_line]).sum(axis=1), -1, 1))
        assert np.all(kink <= 5e-5 + 1e-9), float(kink.max())
        lines += int(is_line.sum())
    assert lines > 100


def _random_arcs(n=300):
    """A toolpath of n unrelated arcs with many-digit coordinates."""
    at = np.array([0.123456789, -0.987654321])
    moves = [Rapid((*at, 5.0), (*at, 5.0)), Line((*at, 5.0), (*at, -1.0), 200.0)]
    for _ in range(n):
        c = at + _unit(RNG.uniform(0, 2 * np.pi))[0] * RNG.uniform(0.5, 40)
        r = float(np.hypot(*(at - c)))
        a0 = math.atan2(at[1] - c[1], at[0] - c[0])
        a1 = a0 + RNG.uniform(0.2, 2.5)
        end = c + r * np.array([math.cos(a1), math.sin(a1)])
        moves.append(Arc((*at, -1.0), (*end, -1.0), tuple(c), True, 500.0))
        at = end
    return Toolpath.from_moves(moves, tool_diameter=6.0, side="outside")


def test_arc_centers_are_offsets_from_the_rounded_start():
    # Planted bug: I, J computed from the unrounded start point.  NISTIR
    # 6556 (sources: nistir-6556): I, J are offsets of the center from the
    # arc's start as the controller knows it, i.e. as written.  The center
    # read back is then the true center within half a unit of the last
    # decimal per axis; from the unrounded start it strays up to a whole unit.
    tp = _random_arcs()
    text = gcode_text(tp)
    decimals = len(re.search(r"X-?\d+\.(\d+)", text).group(1))
    half = 0.5 * 10.0 ** -decimals
    prog = read(text)
    arcs = [m for m in prog.moves if m.g in (2, 3)]
    true = tp.center[tp.kind >= ARC_CW]
    assert len(arcs) == len(true)
    got = np.array([m.center for m in arcs])
    assert np.abs(got - true).max() <= half * (1 + 1e-6)


def test_deviation_is_measured_both_ways():
    # Planted bug: a one-sided deviation (path to curve only).  A path that
    # stops short of the curve's end lies on the curve, yet misses a part of
    # it: the two-sided (Hausdorff) distance sees the gap.
    th = np.linspace(0, np.pi, 60)
    contour = fit(np.c_[10 * np.cos(th), 10 * np.sin(th)], closed=False, end="natural")
    t_end = contour.breaks[-1]
    # one arc of the true circle over the first 80 % of the parameter span
    stop = 0.8 * t_end
    e = contour(stop)
    chain = Chain(np.array([ARC_CCW], np.int8), np.array([[10.0, 0.0]]), e[None], np.zeros((1, 2)),
                  np.array([0.0]), np.array([t_end]))
    dev = chain_deviation(contour, 0.0, chain, 0.01)
    gap = float(np.hypot(*(contour(t_end) - e)))
    assert dev[0] >= 0.9 * gap and gap > 5.0
    # and a path that runs on past the curve's end: every curve point is
    # on the path (the curve-to-path distance is 0), but the path strays
    beyond = np.array([-10.0 * math.cos(0.6), -10.0 * math.sin(0.6)])  # 0.6 rad past the end, same circle
    chain = Chain(np.array([ARC_CCW], np.int8), np.array([[10.0, 0.0]]), beyond[None], np.zeros((1, 2)),
                  np.array([0.0]), np.array([t_end]))
    dev = chain_deviation(contour, 0.0, chain, 0.01)
    over = float(np.hypot(*(contour(t_end) - beyond)))
    assert dev[0] >= 0.9 * over and over > 5.0


def _c_shape(R=20.0, r=12.0, gap=2.0, n=400):
    # a thick ring opened by a gap narrower than the tool (an invented clip)
    ao, ai = math.asin(gap / 2 / R), math.asin(gap / 2 / r)
    outer = np.linspace(ao, 2 * np.pi - ao, n)
    inner = np.linspace(2 * np.pi - ai, ai, int(n * r / R))
    return np.vstack([np.c_[R * np.cos(outer), R * np.sin(outer)], np.c_[r * np.cos(inner), r * np.sin(inner)]])


def _bean(n=400, neck=3.0):
    # two lobes joined by a neck narrower than the tool
    t = np.linspace(0, 2 * np.pi, n, endpoint=False)
    rr = 20 - (20 - neck / 2) * np.exp(-((np.mod(t, np.pi) - np.pi / 2) / 0.25) ** 2)
    return np.c_[1.5 * rr * np.cos(t), rr * np.sin(t)]


def _trimmed_chain(contour, side, r, tol):
    """The trimmed tool-center chain as make_toolpath assembles it, before
    the check that refuses a path which leaves a region uncut (the clip and
    the bean are refused there; the trimming that precedes it is what this
    contract pins)."""
    from pathgen._options import side_sign
    from pathgen.geometry import orientation
    from pathgen.path.build import approximate_all, choose_seam
    from pathgen.path.offset import assemble, regular_windows

    d = side_sign(side) * r * float(orientation(contour.points))
    lo, hi = contour.domain
    ts = choose_seam(contour, keep_away=2 * r, d=d)
    windows, joins, _ = regular_windows(contour, d, ts, ts + (hi - lo), tol)
    parts, _, _ = approximate_all(contour, windows, d, tol, "arcs")
    return assemble(contour, parts, joins, d, tol, closed=True)


@pytest.mark.parametrize("make, side", [(_c_shape, "outside"), (_bean, "inside")])
def test_loop_removal_keeps_the_side_clear_of_the_part(make, side):
    # Planted bug: keeping the wrong side of a crossing in loop removal.
    # These outlines make the tool-center curve cross itself (a gap or a
    # neck narrower than the tool); what remains must keep the tool disc
    # off the part: distance from every cutting move to the outline >= r -
    # tolerance, checked with shapely (sources: shapely) on the contour
    # sampled densely (its chord sagitta is far below the tolerance).
    contour = fit_outline(clean_points(make(), closed=True))
    r, tol = 3.0, 0.01
    chain, trims = _trimmed_chain(contour, side, r, tol)
    pts = []
    for k, s, e, c in zip(chain.kind, chain.start, chain.end, chain.center):
        if k == LINE:
            pts.append(np.linspace(s[:2], e[:2], 8))
        else:
            ccw = k == ARC_CCW
            sw = float(_sweep(s[None, :2], e[None, :2], c[None], np.array([ccw]))[0])
            a0 = math.atan2(s[1] - c[1], s[0] - c[0])
            rad = math.hypot(s[0] - c[0], s[1] - c[1])
            # chords of sagitta <= 1e-5 mm: 2·acos(1 - s/R) per step (sources: sagitta)
            steps = max(2, math.ceil(sw / (2 * math.acos(1 - 1e-5 / rad))) + 1)
            a = a0 + (sw if ccw else -sw) * np.linspace(0, 1, steps)
            pts.append(c + rad * _unit(a))
    path = shapely.LineString(np.vstack(pts))
    dense = contour(np.linspace(contour.breaks[0], contour.breaks[-1], 20000, endpoint=False))
    edge = shapely.LinearRing(dense)
    assert trims, "the outline no longer needs trimming: the test lost its point"
    assert shapely.distance(path, edge) >= r - tol - 1e-3
    # and the kept path is on the waste side: outside the part for an
    # outside cut, inside the outline for a pocket
    inside = shapely.contains(shapely.Polygon(dense), shapely.Point(pts[0][0]))
    assert inside == (side == "inside")


def test_a_straight_open_line_is_cut_along_its_parallel():
    # A straight open outline (a 100 mm edge): its offset by r is the
    # parallel line at distance r (sources: farouki-neff-1990).  It was
    # refused with "use a smaller tool": one move was taken for a failed trim.
    x = np.linspace(0, 100, 50)
    contour = fit_outline(clean_points(np.c_[x, 0 * x], closed=False))
    tp = make_toolpath(contour, Tool(6.0), Cut(side="outside"), lead="none")
    cut = tp.kind == LINE
    horizontal = cut & (tp.start[:, 2] == tp.end[:, 2])
    ends = np.vstack([tp.start[horizontal, :2], tp.end[horizontal, :2]])
    np.testing.assert_allclose(ends[:, 1], -3.0, atol=1e-9)  # outside = right of travel along +x
    assert ends[:, 0].min() == pytest.approx(0.0, abs=1e-9) and ends[:, 0].max() == pytest.approx(100.0)
