"""Programs for cutter compensation at the control (G41/G42), read back before
they are written, and ``pathgen verify --compensation machine``.

Sources beside the checks:
* Kramer, T.R., Proctor, F.M. & Messina, E., "The NIST RS274/NGC
  Interpreter - Version 3", NISTIR 6556, 2000, the cutter radius
  compensation section: G41 tool left of the programmed path, G42 right,
  G40 off, the radius from the register the D word names; its error list
  has "tool radius not less than arc radius with comp" (from memory).
  Common practice with it: compensation on on a straight move at least the
  tool radius long, no arc as the first compensated move, off on a straight
  move away from the part.
* The written files are read by the independent test interpreter
  tests/gcode_reader.py, which records the compensation each move runs
  under; the tests offset the programmed line themselves (lines moved by r
  along their normal, arcs R +- r, convex corners rounded: plane geometry,
  Farouki, R.T. & Neff, C.A., "Analytic properties of plane offset curves",
  CAGD 7:83-99, 1990), with the helper of tests/test_compensation.py.
* The distance to the ellipse x²/a² + y²/b² = 1 by Newton's method on the
  foot point (tests/conftest.py, ``ellipse_distance``).
"""

from __future__ import annotations

import json
import re

import numpy as np
import pytest

import gcode_reader as gr
from conftest import ellipse_distance
from pathgen.cli import main
from pathgen.pipeline import run
from test_compensation import _passes, offset_by_rules

A, B, R = 40.0, 25.0, 3.0
TH = np.linspace(0, 2 * np.pi, 240, endpoint=False)


def _points(tmp_path):
    p = tmp_path / "e.csv"
    pts = np.c_[A * np.cos(TH), B * np.sin(TH)]
    np.savetxt(p, np.vstack([pts, pts[:1]]), delimiter=",", fmt="%.9f")
    return p


@pytest.fixture(scope="module")
def comp_program(tmp_path_factory):
    d = tmp_path_factory.mktemp("comp")
    pts = _points(d)
    nc = d / "e.nc"
    assert main(["gcode", str(pts), "-o", str(nc), "--tool-diameter", str(2 * R), "--compensation", "machine",
                 "--depth", "2", "--step-down", "1", "--quiet"]) == 0
    return pts, nc


def _verify(capsys, *args):
    code = main(["verify", *map(str, args)])
    cap = capsys.readouterr()
    return code, cap.out, cap.err


def test_compensated_program_states_what_its_replay_measured(comp_program):
    pts, nc = comp_program
    text = nc.read_text()
    head = [ln[1:-1] for ln in text.splitlines() if ln.startswith("(")]
    said = next(ln for ln in head if ln.startswith("replayed from this text: the programmed part line strays"))
    stated = float(re.search(r"strays (\S+) mm", said)[1])
    sweep = next(ln for ln in head if ln.startswith("replayed sweep:"))
    stated_depth = float(re.search(r"enters the part by at most (\S+) mm", sweep)[1])
    assert any(ln.startswith("replayed compensation: G41 D1 on at line") for ln in head)
    # what is still not replayed is said: the control's own offset
    assert any("not replayed by pathgen: the control's own offset" in ln for ln in head)
    prog = gr.read(text)
    passes = _passes(prog)
    assert len(passes) == 2
    worst_line, deepest = 0.0, -np.inf
    for on, moves, off in passes:
        # the part line (the tangent runs next to the entry and exit left out) against the ellipse
        line = np.vstack([gr.sample(m, 0.005)[:, :2] for m in moves[1:-1]])
        worst_line = max(worst_line, float(ellipse_distance(A, B, line).max()))
        # the control's tool center (the test's own offset by the rules): never nearer than r - tol
        center = offset_by_rules(moves, R, "G41")
        deepest = max(deepest, float(R - ellipse_distance(A, B, center).min()))
    assert worst_line <= 0.01 and stated <= 0.01
    assert stated >= worst_line - 1e-4  # two-sided, at least the one side measured here (+ sampling)
    assert stated == pytest.approx(worst_line, abs=5e-4)
    assert deepest <= 0.01 and stated_depth <= 0.01
    assert stated_depth == pytest.approx(deepest, abs=1e-3)


def test_plain_verify_says_the_program_relies_on_the_control(comp_program, capsys):
    pts, nc = comp_program
    code, out, err = _verify(capsys, nc, pts, "--tool-diameter", str(2 * R), "--depth", "2", "--step-down", "1")
    assert code == 2 and out == ""
    assert "relies on the control's cutter compensation" in err and "--compensation machine" in err
    code, out, err = _verify(capsys, nc, pts, "--tool-diameter", str(2 * R), "--depth", "2", "--step-down", "1",
                             "--compensation", "machine")
    assert code == 0, out
    assert out.splitlines()[-2] == "clean" and "replayed compensation: G41 D1" in out


def test_verify_compensated_finds_a_short_entry_and_a_gouge(comp_program, tmp_path, capsys):
    pts, nc = comp_program
    lines = nc.read_text().split("\n")
    prog = gr.read(nc.read_text())
    on, moves, off = _passes(prog)[0]
    # 1. the entry move made 2 mm long (less than the tool radius): the control cannot build the offset
    k = on.line - 1
    sx, sy = on.start[:2]
    ex, ey = on.end[:2]
    v = np.array([ex - sx, ey - sy]) / np.hypot(ex - sx, ey - sy)
    nx, ny = np.array([ex, ey]) - 2.0 * v
    edited = list(lines)
    edited.insert(k, f"G1 X{nx:.4f} Y{ny:.4f}")  # comp off still: the tool moves there first
    (tmp_path / "short.nc").write_text("\n".join(edited))
    opts = ["--tool-diameter", str(2 * R), "--depth", "2", "--step-down", "1", "--compensation", "machine"]
    code, out, err = _verify(capsys, tmp_path / "short.nc", pts, *opts)
    assert code == 1
    assert re.search(rf"problem: line {k + 2}: G41 is turned on on a move of 2\.0\d* mm, shorter than the tool "
                     r"radius", out)
    # 2. a part line move shifted 0.5 mm toward the part (the ellipse): the swept disc finds it
    mid = moves[len(moves) // 2]
    j = mid.line - 1
    x, y = mid.end[:2]
    n = np.array([x / A**2, y / B**2])
    n /= np.hypot(*n)  # the outward normal of the ellipse near the point
    gx, gy = np.array([x, y]) - 0.5 * n
    edited = list(lines)
    edited[j] = re.sub(r"X\S+ Y\S+", f"X{gx:.4f} Y{gy:.4f}", edited[j])
    (tmp_path / "gouge.nc").write_text("\n".join(edited))
    code, out, err = _verify(capsys, tmp_path / "gouge.nc", pts, *opts, "--json")
    data = json.loads(out)
    assert code == 1 and data["status"] == 1
    # the programmed point 0.5 mm inside the line: the control's disc enters by about 0.5 (its own
    # distance from the ellipse is the part line's deviation there)
    want = 0.5 + float(ellipse_distance(A, B, np.array([[x, y]]))[0])
    assert data["compensation"]["swept_depth"] == pytest.approx(want, abs=0.02)
    assert data["gouges"][0]["line"] in (j + 1, j + 2)


def test_an_arc_toward_the_tool_tighter_than_the_tool_is_named():
    # NISTIR 6556 (cutter radius compensation): the control cannot follow an arc bending toward the tool
    # whose radius is not larger than the tool's.  Under G41 a G3 arc bends to the left: toward the tool.
    from pathgen.spline import fit
    from pathgen.verify.compensated import compensated_facts
    from pathgen.verify.reader import read_gcode

    th = np.linspace(0, 2 * np.pi, 120, endpoint=False)
    contour = fit(np.c_[20 * np.cos(th), 20 * np.sin(th)], closed=True)
    text = ("G21 G90 G17 G94 G40\nG0 X30 Y-10 Z5\nG1 Z-1 F300\nG41 D1 G1 X30 Y0\nG1 X30 Y5\n"
            "G3 X26 Y9 I-4 J0\nG1 X20 Y9\nG40 G1 X20 Y20\nM2\n")
    prog = read_gcode(text, compensation=True)
    facts = compensated_facts(prog, contour, tool_radius=5.0, side="outside", tolerance=0.01)
    rules = {(p["line"], p["rule"]) for p in facts["compensation"]["problems"]}
    assert (6, "arc toward the tool") in rules
    assert facts["compensation"]["tightest_toward"] == pytest.approx(4.0)
    assert facts["compensation"]["on_lines"] == [4] and facts["compensation"]["off_lines"] == [8]
    # with a 3 mm tool the same arc is fine
    facts = compensated_facts(prog, contour, tool_radius=3.0, side="outside", tolerance=0.01)
    assert not any(p["rule"] == "arc toward the tool" for p in facts["compensation"]["problems"])
    # G41 twice without G40 (NISTIR 6556) and G41 without a D word are refused
    from pathgen.errors import InputError

    with pytest.raises(InputError, match="line 4: G41 while cutter compensation is on"):
        read_gcode("G21 G90\nG0 X0 Y0 Z0\nG41 D1 G1 X10 F100\nG41 G1 X20\nM2\n", compensation=True)
    with pytest.raises(InputError, match="line 3: G42 without a D word"):
        read_gcode("G21 G90\nG0 X0 Y0 Z0\nG42 G1 X10 F100\nM2\n", compensation=True)


def test_a_compensated_program_that_strays_is_not_written(tmp_path, monkeypatch, capsys):
    # simulate a bug: one move of the part line ends 0.05 mm off the contour, away from the part
    import dataclasses

    import pathgen.path.compensate as compensate

    real = compensate.part_line_toolpath

    def buggy(*a, **kw):
        tp = real(*a, **kw)
        c = tp.info["compensation"]
        i = (c["on"][0] + c["off"][0]) // 2
        end, start = tp.end.copy(), tp.start.copy()
        xy = end[i, :2]
        end[i, :2] = xy + 0.05 * xy / np.hypot(*xy)
        start[i + 1, :2] = end[i, :2]
        return dataclasses.replace(tp, start=start, end=end)

    monkeypatch.setattr(compensate, "part_line_toolpath", buggy)
    pts = _points(tmp_path)
    nc = tmp_path / "e.nc"
    code = main(["gcode", str(pts), "-o", str(nc), "--tool-diameter", str(2 * R), "--compensation", "machine",
                 "--moves", "lines"])
    err = capsys.readouterr().err
    assert code == 3, err
    assert "internal check failed" in err and "nothing was written" in err
    assert re.search(r"the part line strays 0\.0[45]\d* mm from the contour", err)
    assert not nc.exists()
