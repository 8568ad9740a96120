"""A part program (several outlines) read back outline by outline, and
``pathgen verify`` on a part.

Sources beside the checks:
* The written programs are read by the independent test interpreter
  tests/gcode_reader.py, written from Kramer, T.R., Proctor, F.M. &
  Messina, E., "The NIST RS274/NGC Interpreter - Version 3", NISTIR 6556,
  2000 (center-format arcs, §3.5.3.2).
* The tool-center curve of an outline at tool radius r is its offset curve,
  the points at distance r from it on the tool's side (Farouki, R.T. &
  Neff, C.A., "Analytic properties of plane offset curves", CAGD 7:83-99,
  1990).  The plate's outlines are a rounded rectangle, circles and a
  slot (a stadium): their distance functions are plane geometry (derived
  here: a circle |p - c| - R; a stadium the distance to its core segment
  minus its radius; a rounded rectangle with half sides (a, b) and corner
  radius ρ: with q = |p - c| - (a - ρ, b - ρ) per axis, |max(q, 0)| +
  min(max(qx, qy), 0) - ρ).
* Tabs left uncut under a lifted stretch, holes cut before the outline
  around them: common practice.
* The budget: arithmetic (its parts sum to the total, which is at most the
  tolerance and at least what was measured).
"""

from __future__ import annotations

import json
import re

import numpy as np
import pytest

import gcode_reader as gr
from pathgen.cli import main
from pathgen.pipeline import run

from test_part import H, HOLES, R_HOLE, R_OUT, TOOL, W, plate_csv, plate_dxf

RADIUS = TOOL / 2


# -- the plate's exact distance functions (signed: negative inside) -----------------------
def _sdf_outer(p):
    c = np.array([W / 2, H / 2])
    q = np.abs(p - c) - np.array([W / 2 - R_OUT, H / 2 - R_OUT])
    return np.hypot(*np.maximum(q, 0.0).T) + np.minimum(q.max(axis=1), 0.0) - R_OUT


def _sdf_circle(p, c):
    return np.hypot(*(p - np.asarray(c)).T) - R_HOLE


def _sdf_slot(p):
    a, b = np.array([45.0, 40.0]), np.array([75.0, 40.0])
    u = np.clip((p - a) @ (b - a) / ((b - a) @ (b - a)), 0.0, 1.0)
    return np.hypot(*(p - a - u[:, None] * (b - a)).T) - 5.0


def _features():
    """(outline number in the drawing, distance function): outer 1, holes 2-5, slot 6."""
    out = [(1, _sdf_outer)]
    out += [(k + 2, (lambda c: (lambda p: _sdf_circle(p, c)))(c)) for k, c in enumerate(HOLES)]
    out.append((6, _sdf_slot))
    return out


def _independent_file_to_curve(text, tol):
    """Per outline: the largest distance of the written cutting moves that run
    along the outline's tool-center curve (both ends within 2·tol of it) from
    that curve, read by the test interpreter."""
    prog = gr.read(text)
    feats = _features()
    worst = {n: 0.0 for n, _ in feats}
    step = min(0.02, tol)
    for m in prog.moves:
        if m.g == 0 or None in m.start or m.start[2] != m.end[2] or m.end[2] >= 0:
            continue
        ends = np.array([m.start[:2], m.end[:2]])
        dev_ends = [np.abs(np.abs(f(ends)) - RADIUS) for _, f in feats]
        k = int(np.argmin([d.max() for d in dev_ends]))
        if dev_ends[k].max() > 2 * tol:
            continue  # a lead, a link: not along the curve
        pts = gr.sample(m, step)[:, :2]
        n, f = feats[k]
        worst[n] = max(worst[n], float(np.abs(np.abs(f(pts)) - RADIUS).max()))
    return worst


@pytest.fixture(scope="module")
def plate_program(tmp_path_factory):
    """The test plate cut through in two passes with two tabs (tolerance 0.01 mm)."""
    d = tmp_path_factory.mktemp("plate")
    src = plate_dxf(d / "plate.dxf")
    nc = d / "plate.nc"
    res = run(src, tool_diameter=TOOL, depth=3.0, step_down=1.5, tabs=2, tab_width=6.0, tab_height=1.0,
              gcode=nc, report=d / "plate.report.json")
    return src, nc, res


OPTS = ["--tool-diameter", str(TOOL), "--depth", "3", "--step-down", "1.5", "--tabs", "2", "--tab-width", "6",
        "--tab-height", "1"]


def _verify(capsys, *args):
    code = main(["verify", *map(str, args)])
    cap = capsys.readouterr()
    return code, cap.out, cap.err


# -- the written part program, replayed per outline ------------------------------------------
def test_part_header_and_report_state_each_outline_replayed(plate_program):
    src, nc, res = plate_program
    text = nc.read_text()
    head = [ln[1:-1] for ln in text.splitlines() if ln.startswith("(")]
    assert not any("not replayed" in ln for ln in head)
    data = json.loads((nc.parent / "plate.report.json").read_text())
    independent = _independent_file_to_curve(text, 0.01)
    for row in data["outlines"]:
        n = row["number"]
        said = [ln for ln in head if ln.startswith(f"outline {n}: replayed deviation")]
        assert len(said) == 1 and len(said[0]) <= 254
        stated = float(re.search(r"replayed deviation (\S+) mm", said[0])[1])
        prog = row["program"]
        # (the header states 6 significant digits of the value rounded to 1e-9 mm)
        assert prog["deviation"] == pytest.approx(stated, rel=1e-5, abs=5e-10)
        assert prog["within_tolerance"] and stated <= 0.01
        # the file -> curve side agrees with the test interpreter's own measure (offset curve)
        assert independent[n] <= 0.01
        assert prog["deviation_moves_to_curve"] == pytest.approx(independent[n], abs=2e-4)
        assert prog["deviation"] >= independent[n] - 1e-6
        # the budget (arithmetic): the parts sum to the total, at most the tolerance, at least the measure
        b = prog["budget"]
        assert b["points_to_contour"] + b["contour_to_moves"] + b["moves_to_text"] == pytest.approx(b["total"])
        assert b["total"] <= 0.01 and b["moves_to_text"] <= 0.05 * 0.01
        assert b["contour_to_moves"] + b["moves_to_text"] >= prog["deviation"] - 1e-9
        assert any(ln.startswith(f"outline {n} budget:") and "<= 0.01 mm" in ln for ln in head)
        # the clearance, per outline: the tool center keeps the radius less the tolerance
        assert prog["clearance"]["smallest"] >= RADIUS - 0.01 and prog["gouges"] == []
    txt = (nc.parent / "plate.report.txt").read_text()
    assert txt.count("program as written: replayed deviation") == 6
    assert txt.rstrip().endswith("before cutting.")  # the caution stays last


def test_tabs_are_read_back_and_are_no_deviation(plate_program):
    # common practice: over a tab the tool rises by the tab height; x, y stay on the path
    src, nc, res = plate_program
    prog = gr.read(nc.read_text())
    over = [m for m in prog.moves if m.g != 0 and None not in m.start and m.start[2] == m.end[2] == -2.0]
    assert over  # the stretches over the tabs: depth 3 - tab height 1, read back
    data = json.loads((nc.parent / "plate.report.json").read_text())
    outer = next(r for r in data["outlines"] if r["number"] == 1)["program"]
    assert outer["tabs"]["count"] == 2 and outer["tabs"]["ok"]
    assert outer["tabs"]["cut_depth"] == pytest.approx(2.0, abs=1e-9)
    assert outer["tabs"]["depth"] == pytest.approx(3.0, abs=1e-9)
    # the deepest pass and the stretches over the tabs together cover the whole curve
    assert outer["deviation_curve_to_moves"] <= 0.01
    assert -2.0 in outer["cutting_depths"] and -3.0 in outer["cutting_depths"]
    # the over-tab moves lie on the tool-center curve in x, y (the offset curve of the outer outline)
    pts = np.vstack([gr.sample(m, 0.05)[:, :2] for m in over])
    assert np.abs(_sdf_outer(pts) - RADIUS).max() <= 0.01


@pytest.mark.parametrize("tol", [0.001])
def test_fine_tolerance_part_decimals_follow(tmp_path, tol):
    # a text file of several outlines at 0.001 mm: 5 decimals (rounding <= 5 % of it), each outline within
    src = plate_csv(tmp_path / "plate.csv", step=0.5)
    nc = tmp_path / "plate.nc"
    run(src, tool_diameter=TOOL, tolerance=tol, gcode=nc, report=tmp_path / "plate.report.json")
    text = nc.read_text()
    decimals = {len(n.split(".")[1]) for _, letter, n in gr.read(text).numbers if letter in "XY" and "." in n}
    assert max(decimals) == 5
    data = json.loads((tmp_path / "plate.report.json").read_text())
    independent = _independent_file_to_curve(text, tol)
    for row in data["outlines"]:
        assert row["program"]["within_tolerance"] and row["program"]["budget"]["total"] <= tol
    # the points are the exact plate sampled every 0.5 mm: the contour stays within the tolerance of it
    # far from the fillets' ends, so the written moves stay within twice it of the exact offset
    assert max(independent.values()) <= 2 * tol
    assert all(len(w) <= 5 for w in re.findall(r"[IJ]-?(\d+)", text))


def test_a_part_program_that_strays_is_not_written(tmp_path, monkeypatch, capsys):
    # simulate a bug: one straight cutting move of the outer outline ends 0.05 mm away from
    # the part; no gouge (the material check passes), but the deviation is 5 times the tolerance
    import dataclasses

    import pathgen.path.build as build

    real = build.make_toolpath

    def buggy(*a, **kw):
        tp = real(*a, **kw)
        if tp.side != "outside":
            return tp
        cut = np.flatnonzero((tp.kind == 1) & (tp.start[:, 2] < 0) & (tp.start[:, 2] == tp.end[:, 2])
                             & (np.hypot(*(tp.end[:, :2] - tp.start[:, :2]).T) > 20))
        i = int(cut[0])
        # the line is split at its middle, and the middle point moved 0.05 mm away from the plate's center
        mid = 0.5 * (tp.start[i] + tp.end[i])
        away = mid[:2] - (W / 2, H / 2)
        mid[:2] += 0.05 * away / np.hypot(*away)
        ins = lambda arr, v: np.insert(arr, i + 1, v, axis=0)  # noqa: E731
        start = ins(tp.start, mid)
        end = tp.end.copy()
        end[i] = mid
        end = ins(end, tp.end[i])
        return dataclasses.replace(tp, kind=ins(tp.kind, 1), start=start, end=end,
                                   center=ins(tp.center, (0.0, 0.0)), feed=ins(tp.feed, tp.feed[i]))

    monkeypatch.setattr(build, "make_toolpath", buggy)
    src = plate_dxf(tmp_path / "plate.dxf")
    nc = tmp_path / "plate.nc"
    code = main(["gcode", str(src), "-o", str(nc), "--tool-diameter", str(TOOL)])
    err = capsys.readouterr().err
    assert code == 3, err
    assert "internal check failed" in err and "nothing was written" in err
    assert re.search(r"outline 1: strays 0\.0[45]\d* mm from its tool-center curve", err)
    assert not nc.exists() and not (tmp_path / "plate.report.json").exists()


# -- pathgen verify on a part -----------------------------------------------------------------
def test_verify_passes_pathgen_part_programs(plate_program, tmp_path, capsys):
    src, nc, res = plate_program
    code, out, err = _verify(capsys, nc, src, *OPTS)
    assert code == 0, out
    assert out.splitlines()[-2] == "clean"
    assert len(re.findall(r"^outline \d+ .*deviation \S+ mm \(within the tolerance", out, re.M)) == 6
    assert "tabs: 2 read back (expected 2), cut 2.00000 mm deep" in out
    # a text file of several outlines, one pass
    pts = plate_csv(tmp_path / "plate.csv", step=0.5)
    nc2 = tmp_path / "plate2.nc"
    assert main(["gcode", str(pts), "-o", str(nc2), "--tool-diameter", str(TOOL), "--quiet"]) == 0
    code, out, err = _verify(capsys, nc2, pts, "--tool-diameter", str(TOOL), "--json")
    data = json.loads(out)
    assert code == 0 and data["status"] == 0 and len(data["outlines"]) == 6


def test_verify_finds_a_hand_gouge_in_a_part_at_its_line_and_depth(plate_program, tmp_path, capsys):
    src, nc, res = plate_program
    lines = nc.read_text().split("\n")
    prog = gr.read(nc.read_text())
    # the outer outline's bottom edge at full depth (tool center at y = -3): a long G1 along y = -r
    edge = next(m for m in prog.moves if m.g == 1 and None not in m.start and m.start[2] == m.end[2] == -3.0
                and m.start[1] == m.end[1] == -RADIUS and abs(m.end[0] - m.start[0]) > 20)
    k = edge.line - 1
    assert re.match(r"G1 X\S+( Y-3)?( F\S+)?$", lines[k]), lines[k]
    lines[k] = re.sub(r"^(G1 X\S+)(?: Y-3)?", r"\1 Y-2.5", lines[k])  # its end 0.5 mm toward the part
    edited = tmp_path / "edited.nc"
    edited.write_text("\n".join(lines))
    # the depth, worked out independently: the moved end point's distance from the plate's edge
    want = RADIUS - float(_sdf_outer(np.array([[edge.end[0], -2.5]]))[0])
    assert want == pytest.approx(0.5, abs=1e-9)
    code, out, err = _verify(capsys, edited, src, *OPTS)
    assert code == 1
    gouges = {int(a): float(b) for a, b in re.findall(r"GOUGE: line (\d+) cuts (\S+) mm into the part$", out, re.M)}
    assert k + 1 in gouges and gouges[k + 1] == pytest.approx(want, abs=0.01)
    assert "NOT clean" in out and re.search(r"^outline 1 .*OFF the tolerance", out, re.M)
    code, out, err = _verify(capsys, edited, src, *OPTS, "--json")
    data = json.loads(out)
    g = {x["line"]: x["depth"] for x in data["outlines"]["1"]["gouges"]}
    assert code == 1 and data["status"] == 1 and g[k + 1] == pytest.approx(want, abs=0.01)
    assert "CAUTION" in err


def test_verify_says_when_a_hole_comes_after_the_outline_around_it(plate_program, tmp_path, capsys):
    src, nc, res = plate_program
    code, out, err = _verify(capsys, nc, src, *OPTS, "--json")
    rows = json.loads(out)["outlines"]
    lines = nc.read_text().split("\n")
    a, b = rows["2"]["lines"]  # a hole: its feed moves run from line a to line b
    s = a - 1  # 0-based index of line a
    while lines[s - 1].startswith("G0"):
        s -= 1  # with the rapids that bring the tool there (a retract first)
    block = lines[s:b]
    end_outer = rows["1"]["lines"][1]
    moved = lines[:s] + lines[b:end_outer] + block + lines[end_outer:]
    edited = tmp_path / "late.nc"
    edited.write_text("\n".join(moved))
    code, out, err = _verify(capsys, edited, src, *OPTS)
    assert code == 1
    assert re.search(r"problem: outline 2 is cut at line \d+, after the deepest pass of outline 1 around it", out)


def test_verify_part_refuses_what_it_cannot_read(plate_program, tmp_path, capsys):
    src, nc, res = plate_program
    bad = tmp_path / "bad.nc"
    bad.write_text("G21 G90 G17 G94\nG0 X0 Y0 Z5\nG1 X1 Y1 R4 F100\nM2\n")
    code, out, err = _verify(capsys, bad, src, *OPTS)
    assert code == 2 and out == "" and "bad.nc, line 3" in err and "Traceback" not in err


def test_part_report_text_says_the_caution_once(plate_program):
    # one caution for the part, not one per outline (common practice: a
    # warning repeated on every page stops being read)
    from pathgen._options import CAUTION

    _, _, res = plate_program
    text = res.report.to_text()
    assert text.count(CAUTION) == 1 and text.rstrip("\n").endswith(CAUTION)
    assert "program as written: replayed deviation" in text  # each outline keeps its replayed figures


def test_the_report_names_the_lines_of_the_written_file(plate_program):
    # the replay runs before the header gains its replayed figures; the
    # lines the report names must still be the file's: read back by the
    # test interpreter (NISTIR 6556; sources: nistir-6556), the flat cutting
    # moves between an outline's first and last line follow that outline's
    # tool-center curve (|distance| = r, the distance functions above)
    src, nc, res = plate_program
    data = json.loads(nc.with_name("plate.report.json").read_text())
    prog = gr.read(nc.read_text())
    by_line = {m.line: m for m in prog.moves}
    feats = dict(_features())
    assert len(data["outlines"]) == 6
    for row in data["outlines"]:
        a, b = row["program"]["lines"]
        assert a in by_line and b in by_line, (row["number"], a, b)  # moves, not header lines
        assert by_line[a].g != 0 and by_line[b].g != 0  # feed moves, where the outline's cutting starts and ends
        flat = [m for m in prog.moves if a <= m.line <= b and m.g != 0 and None not in m.start
                and m.start[2] == m.end[2] < 0]
        ends = np.array([m.end[:2] for m in flat])
        on = np.abs(np.abs(feats[row["number"]](ends)) - RADIUS) <= 0.05
        assert len(flat) >= 4 and on.mean() > 0.5, (row["number"], a, b)
        if row["program"]["tabs"] is not None:  # the stretches over the tabs: at the tab top
            for k in row["program"]["tabs"]["lines"]:
                assert by_line[k].end[2] == pytest.approx(-3.0 + 1.0, abs=1e-6)
