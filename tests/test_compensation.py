"""Cutter compensation at the control (--compensation machine), checked from the rules.

Sources beside the checks:
* Kramer, Proctor & Messina, "The NIST RS274NGC Interpreter - Version 3",
  NISTIR 6556, 2000, cutter radius compensation section (sources:
  nistir-6556): G41 puts the tool on the left of the programmed path in the
  direction of travel, G42 on the right, G40 turns compensation off; the
  radius comes from the register the D word names.  Common practice with
  it: turn compensation on on a straight move longer than the tool radius,
  no arc as the first compensated move, turn it off on a straight move
  away from the part.
* Offset of a line by r along its normal is a parallel line; of an arc of
  radius R a concentric arc of radius R +- r; at a convex corner the offset
  goes round the corner on an arc of radius r (handbook plane geometry;
  sources: farouki-neff-1990).  The tests' helper below does this offsetting
  itself, from the moves the independent reader replays.
* Climb milling with a clockwise (M3) spindle keeps the tool on the left of
  the cut edge, the sense of G41 (common practice).
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest
from scipy.spatial import cKDTree

import gcode_reader as gr
from conftest import star_contour
from pathgen.checks.machine import Cut, Machine, Tool
from pathgen.cli import main
from pathgen.errors import InputError
from pathgen.export.gcode import gcode_text
from pathgen.path.build import make_toolpath
from pathgen.path.compensate import part_line_toolpath
from pathgen.path.measure import offset_points
from pathgen.spline import fit

STEP = 0.002  # sampling step, mm: well under the tolerance


def _tangent(m, at_end):
    """Unit tangent of a replayed move in XY."""
    if m.center is None:
        v = np.subtract(m.end[:2], m.start[:2])
        return v / np.hypot(*v)
    p = np.array(m.end[:2] if at_end else m.start[:2]) - m.center
    t = np.array([-p[1], p[0]]) if m.g == 3 else np.array([p[1], -p[0]])
    return t / np.hypot(*t)


def offset_by_rules(moves, r, word):
    """The tool-center path a control makes of compensated moves: each line or
    arc moved by r along its normal on the stated side, joined round convex
    corners by arcs of radius r.  Returns dense (k, 2) samples."""
    left = 1.0 if word == "G41" else -1.0
    out = []
    for k, m in enumerate(moves):
        pts = gr.sample(m, STEP)[:, :2]
        if m.center is None:
            t = _tangent(m, False)
            n = left * np.array([-t[1], t[0]])
            pts = pts + r * n
        else:
            c = np.array(m.center)
            R = np.hypot(*(pts[0] - c))
            toward_center = (m.g == 3) == (word == "G41")  # the left normal of a ccw arc points inward
            pts = c + (pts - c) * ((R - r if toward_center else R + r) / R)
            assert R - r > 0 if toward_center else True
        if k:
            t0, t1 = _tangent(moves[k - 1], True), _tangent(m, False)
            turn = math.atan2(t0[0] * t1[1] - t0[1] * t1[0], t0 @ t1)
            if abs(turn) > 1e-3:
                # convex as seen by the tool when the path turns away from the tool side
                assert np.sign(turn) == -left, "a concave corner: not needed by these tests"
                p = np.array(m.start[:2])
                a0 = math.atan2(*(left * np.array([-t0[1], t0[0]]))[::-1])
                a = a0 + np.linspace(0.0, turn, max(2, int(abs(turn) * r / STEP)))
                out.append(p + r * np.c_[np.cos(a), np.sin(a)])
        out.append(pts)
    return np.vstack(out)


def _passes(prog):
    """Per pass: (activation move, compensated moves, cancel move)."""
    result, current, on = [], None, None
    for m in prog.moves:
        if m.comp_change == "on":
            on, current = m, []
        elif m.comp_change == "off":
            result.append((on, current, m))
            current = None
        elif current is not None:
            current.append(m)
    return result


def _computed_contour_moves(prog):
    """The computed program's cutting moves in XY at the last depth, leads left out."""
    z = min(m.end[2] for m in prog.moves)
    flat = [m for m in prog.moves if m.g != 0 and m.start[2] == z and m.end[2] == z]
    return flat[1:-1]  # the lead-in and lead-out arcs


CASES = {
    "ellipse outside climb": (lambda: fit(np.c_[30 * np.cos(_TH), 18 * np.sin(_TH)], closed=True),
                              "outside", "climb", "G41"),
    "ellipse inside climb": (lambda: fit(np.c_[30 * np.cos(_TH), 18 * np.sin(_TH)], closed=True),
                             "inside", "climb", "G41"),
    "star outside conventional": (lambda: star_contour(7, amplitude=1.5), "outside", "conventional", "G42"),
}
_TH = np.linspace(0, 2 * np.pi, 90, endpoint=False)


@pytest.mark.parametrize("name", sorted(CASES))
def test_compensated_program_offset_by_the_rules_is_the_computed_path(name):
    make, side, direction, word = CASES[name]
    contour = make()
    tol, r = 0.01, 3.0
    tool, cut, machine = Tool(2 * r), Cut(side=side, feed=1200.0, tolerance=tol), Machine()
    center = make_toolpath(contour, tool, cut, machine, direction=direction, depth=2.0, step_down=1.0)
    part = part_line_toolpath(contour, center, tool, cut, machine, register=7)
    text = gcode_text(part)
    prog = gr.read(text)  # the reader holds the rules: G41/G42 with D on a straight G1, no arc first, G40 on a line
    assert f"{word} D7" in text and f"cutter compensation at the control: {word} D7" in text
    assert ("tool left of travel" if word == "G41" else "tool right of travel") in text
    passes = _passes(prog)
    assert len(passes) == 2
    d = part.info["offset"]
    t = np.linspace(*contour.domain, 400_000)
    exact = cKDTree(offset_points(contour, t, d))
    computed = _computed_contour_moves(gr.read(gcode_text(center)))
    computed_pts = np.vstack([gr.sample(m, STEP)[:, :2] for m in computed])
    for on, moves, off in passes:
        assert on.comp == word and on.register == 7 and on.g == 1
        # entry and exit: straight, longer than the tool radius (common practice)
        assert math.dist(on.start[:2], on.end[:2]) > r
        assert off.g == 1 and math.dist(off.start[:2], off.end[:2]) > r
        assert moves[0].g == 1  # no arc as the first compensated move
        tool_center = offset_by_rules(moves, r, word)
        # within the tolerance of the exact tool-center curve P + d N (+ 4-decimal rounding) ...
        gap, _ = exact.query(tool_center)
        assert gap.max() <= tol + 3e-4, gap.max()
        # ... and the same path as the computed program's, each within the tolerance of that curve
        there, _ = cKDTree(tool_center).query(computed_pts)
        back, _ = cKDTree(computed_pts).query(offset_by_rules(moves[2:-1], r, word))
        assert max(there.max(), back.max()) <= 2 * tol + 3e-4, (there.max(), back.max())
        # the free-air point where the plunge is made is clear of the part by at least the radius
        plunge_xy = np.array(on.start[:2])
        part_pts = contour(np.linspace(*contour.domain, 100_000))
        assert np.hypot(*(part_pts - plunge_xy).T).min() >= r


def test_the_plunge_and_the_moves_of_each_pass():
    contour = fit(np.c_[30 * np.cos(_TH), 18 * np.sin(_TH)], closed=True)
    tool, cut = Tool(6.0), Cut(side="outside", feed=1500.0)
    center = make_toolpath(contour, tool, cut, Machine(), depth=3.0, step_down=1.5, plunge_feed=200.0)
    part = part_line_toolpath(contour, center, tool, cut, Machine(), register=2)
    prog = gr.read(gcode_text(part))
    plunges = [m for m in prog.moves if m.g == 1 and m.start[:2] == m.end[:2]]
    assert [m.end[2] for m in plunges] == [-1.5, -3.0]
    assert all(m.feed == 200.0 and m.comp == "G40" for m in plunges)  # plunge with compensation off
    assert all(m.comp == "G40" for m in prog.moves if m.g == 0)  # rapids never compensated


def test_compensation_is_refused_where_a_control_would_gouge():
    # a notch of radius 2 mm cut from outside with a 6 mm tool: the tool cannot reach it
    th = np.linspace(0, 2 * np.pi, 400, endpoint=False)
    x, y = 20 * np.cos(th), 20 * np.sin(th)
    notch = np.exp(-(((th - 1.0 + np.pi) % (2 * np.pi) - np.pi) / 0.08) ** 2)
    pts = np.c_[x, y] * (1 - 0.2 * notch)[:, None]
    contour = fit(pts, closed=True)
    tool, cut = Tool(6.0), Cut(side="outside")
    center = make_toolpath(contour, tool, cut, Machine())
    with pytest.raises(InputError, match="cutter compensation at the control: .*(cannot reach|not larger than)"):
        part_line_toolpath(contour, center, tool, cut, Machine())
    on_line = make_toolpath(contour, Tool(0.0), Cut(side="on"), Machine())
    with pytest.raises(InputError, match="needs a tool diameter and a side outside or inside"):
        part_line_toolpath(contour, on_line, Tool(0.0), Cut(side="on"), Machine())


def test_cli_writes_a_compensated_program_in_inch_and_says_the_side(tmp_path):
    from io import StringIO

    th = np.linspace(0, 2 * np.pi, 120, endpoint=False)
    p = tmp_path / "disc.csv"
    p.write_text("x,y\n" + "".join(f"{1.5 * math.cos(a):.5f},{1.0 * math.sin(a):.5f}\n" for a in th))
    out, err = StringIO(), StringIO()
    status = main(["gcode", str(p), "-o", str(tmp_path / "disc.nc"), "--units", "inch", "--tool-diameter", "0.25",
                   "--compensation", "machine"], out=out, err=err)
    assert status == 0, err.getvalue()
    assert re.search(r"cutter compensation at the control: G41 D1 \(tool left of travel\).*0\.1250 inch",
                     out.getvalue())
    text = (tmp_path / "disc.nc").read_text()
    prog = gr.read(text)
    assert prog.units == "inch" and "G41 D1 G1" in text
    assert "set D1 to the tool radius 0.125 inch" in text
    on = [m for m in prog.moves if m.comp_change == "on"][0]
    assert math.dist(on.start[:2], on.end[:2]) > 0.125
    status = main(["gcode", str(p), "-o", str(tmp_path / "x.nc"), "--side", "on", "--compensation", "machine"],
                  out=StringIO(), err=(e := StringIO()))
    assert status == 2 and "needs a tool diameter and a side outside or inside" in e.getvalue()
    assert not (tmp_path / "x.nc").exists()


def test_the_report_beside_the_program_says_the_side_and_the_register(tmp_path):
    import json

    from pathgen.pipeline import run

    pts = np.c_[30 * np.cos(_TH), 18 * np.sin(_TH)]
    out = tmp_path / "e.nc"
    run(pts, closed=True, tool_diameter=6.0, side="inside", direction="conventional", compensation="machine",
        gcode=out, report=tmp_path / "e.report.json")
    data = json.loads((tmp_path / "e.report.json").read_text())
    # inside, conventional with M3: the tool on the right of travel (common practice); the program's
    # replay (read back from its text) states the word, register and side it read
    comp = data["program"]["compensation"]
    assert (comp["word"], comp["side"], comp["register"], comp["tool_radius"]) == ("G42", "right of travel", 1, 3.0)
    assert comp["ok"] and data["program"]["within_tolerance"]
    assert "Replayed compensation: G42 D1 on at line" in (tmp_path / "e.report.txt").read_text()
    assert "G42 D1 G1" in out.read_text()
    plain = run(pts, closed=True, tool_diameter=6.0, gcode=tmp_path / "p.nc", report=tmp_path / "p.report.json")
    # the computed program's report holds what its replay measured, no compensation
    assert "compensation" not in json.loads((tmp_path / "p.report.json").read_text()).get("program", {})
    assert plain.toolpath is not None
