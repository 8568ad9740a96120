"""A closed outline that crosses itself is refused for cutting, with where
and why; a deliberate figure can still be followed on the line."""

from __future__ import annotations

import io

import numpy as np
import pytest
import shapely

from pathgen.cli import main
from pathgen.simple import crossing, turning_number

N = 120


def save(tmp_path, pts, name="part.csv"):
    p = tmp_path / name
    np.savetxt(p, pts, delimiter=",", header="x,y", comments="", fmt="%.6f")
    return p


def circle(r=20.0, n=N):
    th = np.linspace(0, 2 * np.pi, n, endpoint=False)
    return np.c_[r * np.cos(th), r * np.sin(th)]


def figure_eight(n=N):
    # a lemniscate of Gerono: x = 30 sin t, y = 15 sin t cos t, crossing at 0
    t = np.linspace(0, 2 * np.pi, n, endpoint=False) + 0.01
    return np.c_[30 * np.sin(t), 15 * np.sin(t) * np.cos(t)]


def call(*args):
    out, err = io.StringIO(), io.StringIO()
    status = main([str(a) for a in args], out=out, err=err)
    return status, out.getvalue(), err.getvalue()


def test_turning_number_of_simple_and_double_loops():
    # theorem of turning tangents (sources: turning-tangents): a simple loop
    # turns once; the same circle run twice turns twice
    assert turning_number(circle()) == 1
    assert turning_number(circle()[::-1]) == -1
    th = np.linspace(0, 4 * np.pi, 2 * N, endpoint=False)
    assert turning_number(np.c_[np.cos(th), np.sin(th)]) == 2
    assert turning_number(figure_eight()) == 0


@pytest.mark.parametrize("make, cause", [
    (lambda: circle()[np.random.default_rng(7).permutation(N)], "order"),
    (lambda: np.vstack([circle(), circle(20.02)]), "laps"),
    (figure_eight, "figure"),
])
def test_crossing_finds_the_point_and_the_cause(make, cause):
    pts = make()
    c = crossing(pts)
    assert c is not None and c.cause == cause
    # the point lies on both segments named (shapely as the independent check)
    a, b = c.rows
    seg = lambda i: shapely.LineString([pts[i], pts[(i + 1) % len(pts)]])
    here = shapely.Point(c.x, c.y)
    assert seg(a).distance(here) < 1e-9 and seg(b).distance(here) < 1e-9
    # and shapely agrees the ring is not simple
    assert not shapely.is_simple(shapely.linearrings(pts))


def test_simple_outline_has_no_crossing():
    assert crossing(circle()) is None


@pytest.mark.parametrize("make, says", [
    (lambda: circle()[np.random.default_rng(3).permutation(N)], "out of order"),
    (lambda: np.vstack([circle(), circle(20.02)]), "runs round 2 times"),
    (figure_eight, "figure-eight"),
])
def test_programs_refuse_crossing_outlines(tmp_path, make, says):
    # the random-order circle once gave a program 24 times the outline's
    # length, exit 0, with only a note
    src = save(tmp_path, make())
    status, out, err = call("gcode", src, "--closed", "--tool-diameter", "3", "--side", "on",
                            "-o", tmp_path / "p.nc")
    assert status == 2 and err.count("\n") == 1, err
    assert "crosses itself at (" in err and says in err and "part.csv line " in err
    assert not (tmp_path / "p.nc").exists()


def test_a_deliberate_figure_is_followed_on_the_line(tmp_path):
    src = save(tmp_path, figure_eight())
    status, out, err = call("gcode", src, "--closed", "--side", "on", "--allow-crossing",
                            "--corner-angle", "off", "-o", tmp_path / "p.nc")
    assert status == 0, err
    assert "followed on the line as asked" in err
    text = (tmp_path / "p.nc").read_text()
    assert "G1" in text or "G2" in text or "G3" in text
    # but never offset to a side: a crossing outline has no inside
    status, out, err = call("gcode", src, "--closed", "--side", "outside", "--tool-diameter", "3",
                            "--allow-crossing", "-o", tmp_path / "q.nc")
    assert status == 2 and "--side on" in err


def test_check_alone_still_reports_a_crossing_outline(tmp_path):
    src = save(tmp_path, figure_eight())
    status, out, err = call("check", src, "--closed")
    assert status == 0 and "crosses itself" in err, err  # no tool given: nothing it cannot reach
