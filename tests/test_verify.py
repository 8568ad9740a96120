"""What the written program says: replay before writing, the tolerance budget, ``pathgen verify``.

Sources beside the checks:
* Kramer, T.R., Proctor, F.M. & Messina, E., "The NIST RS274/NGC
  Interpreter - Version 3", NISTIR 6556, 2000: center-format arcs and the
  0.002 mm radius rule (§3.5.3.2), fixed-point numbers (§3.3.2.1), feed
  before feed moves (G94 feed per minute; from memory).  The written files
  are read by the independent test interpreter tests/gcode_reader.py.
* Offset curve q = P + d·N of a plane curve, and the distance of the tool
  center from the part (Farouki, R.T. & Neff, C.A., "Analytic properties of
  plane offset curves", CAGD 7:83-99, 1990).
* The test shapes are textbook curves (ellipse, superellipse |x/a|^4 +
  |y/b|^4 = 1, epitrochoid, limaçon r = b + a cos θ, Archimedean spiral
  r = c + kθ) and an invented cam; the budget is arithmetic.
"""

from __future__ import annotations

import json
import math
import re

import numpy as np
import pytest

import gcode_reader as gr
from pathgen.cli import main
from pathgen.pipeline import run

ROUTER = "samples/router.toml"


# -- test shapes (closed unless said), mm ------------------------------------------
def _shape(name, n=240):
    th = np.linspace(0, 2 * np.pi, n, endpoint=False)
    if name == "ellipse":
        return np.c_[40 * np.cos(th), 25 * np.sin(th)]
    if name == "superellipse":
        c, s = np.cos(th), np.sin(th)
        return np.c_[30 * np.sign(c) * np.abs(c) ** 0.5, 20 * np.sign(s) * np.abs(s) ** 0.5]
    if name == "epitrochoid":  # R = 30, r = 10, distance 4: three gentle lobes
        R, r, d = 30.0, 10.0, 4.0
        return np.c_[(R + r) * np.cos(th) - d * np.cos((R + r) / r * th),
                     (R + r) * np.sin(th) - d * np.sin((R + r) / r * th)]
    if name == "limacon":  # r = b + a cos θ, b = 25, a = 10 (b > 2a: convex)
        rr = 25 + 10 * np.cos(th)
        return np.c_[rr * np.cos(th), rr * np.sin(th)]
    if name == "cam":  # invented cam r = 40 + 8 sin 3θ + 3 cos 7θ
        rr = 40 + 8 * np.sin(3 * th) + 3 * np.cos(7 * th)
        return np.c_[rr * np.cos(th), rr * np.sin(th)]
    if name == "spiral":  # open: r = 10 + 5θ, θ in [0, 3π] (turns 31 mm apart: room for the leads)
        t = np.linspace(0, 3 * np.pi, n)
        rr = 10 + 5 * t
        return np.c_[rr * np.cos(t), rr * np.sin(t)]
    raise KeyError(name)


SHAPES = ("ellipse", "superellipse", "epitrochoid", "limacon", "cam", "spiral")


def _write_points(tmp_path, name):
    p = tmp_path / f"{name}.csv"
    pts = _shape(name)
    if name != "spiral":
        pts = np.vstack([pts, pts[:1]])  # a repeated first point closes the outline
    np.savetxt(p, pts, delimiter=",", fmt="%.9f")
    return p


def _polyline_distance(x, verts):
    """Exact distance from points x to the polyline through verts (nearest vertex, then its two segments)."""
    from scipy.spatial import cKDTree

    _, j = cKDTree(verts).query(x, k=4)
    best = np.full(len(x), np.inf)
    for col in range(j.shape[1]):
        for s in (j[:, col] - 1, j[:, col]):
            s = np.clip(s, 0, len(verts) - 2)
            a, b = verts[s], verts[s + 1]
            ab = b - a
            u = np.clip(np.einsum("ij,ij->i", x - a, ab) / np.maximum(np.einsum("ij,ij->i", ab, ab), 1e-300), 0, 1)
            best = np.minimum(best, np.hypot(*(x - a - u[:, None] * ab).T))
    return best


def _independent_deviation(text, contour, d, tol):
    """Moves of the written text (test interpreter) against q = P + d·N, both ways, mm."""
    prog = gr.read(text)
    zcut = min(m.end[2] for m in prog.moves)
    flat = [m for m in prog.moves if m.g != 0 and m.start[2] == zcut and m.end[2] == zcut]
    path = flat[1:-1]  # pathgen writes lead-in, the path, lead-out at each depth
    t = np.linspace(*contour.domain, 200_001)
    q = contour(t) + d * contour.normal(t)
    step = min(0.02, tol)
    pts = np.vstack([gr.sample(m, step)[:, :2] for m in path])
    to_curve = _polyline_distance(pts, q).max()
    to_moves = _polyline_distance(q, pts).max()
    return to_curve, to_moves


@pytest.mark.parametrize("tol", [0.1, 0.01, 0.001])
@pytest.mark.parametrize("name", SHAPES)
def test_written_programs_stay_within_the_tolerance(tmp_path, name, tol):
    # the target: every smooth shape x tolerance, read back by an independent interpreter
    pts = _write_points(tmp_path, name)
    nc = tmp_path / "part.nc"
    res = run(pts, tool_diameter=6.0, tolerance=tol, gcode=nc, machine=ROUTER)
    text = nc.read_text()
    d = res.toolpath.info["offset"]
    to_curve, to_moves = _independent_deviation(text, res.contour, d, tol)
    assert to_curve <= tol
    if not res.toolpath.info["trimmed"]:
        assert to_moves <= tol + 1e-6  # (+ the reference polyline's own sagitta, < 1e-6 here)
    # the header states the replay's figure, and it agrees with this independent one
    stated = float(re.search(r"replayed from this text: deviation from the tool-center curve (\S+) mm", text)[1])
    assert stated <= tol
    assert stated == pytest.approx(max(to_curve, to_moves if not res.toolpath.info["trimmed"] else 0), rel=0.02)
    # decimals follow the tolerance: at most 5 % of it for rounding (4 decimals at 0.01, 5 at 0.001)
    want = {0.1: 4, 0.01: 4, 0.001: 5}[tol]
    decimals = {len(n.split(".")[1]) for _, letter, n in gr.read(text).numbers if letter in "XY" and "." in n}
    assert max(decimals) == want
    # the budget: its parts sum to at least what was measured and at most the tolerance (arithmetic)
    b = res.program["budget"]
    assert b["points"] + b["approximation"] + b["rounding"] == pytest.approx(b["total"])
    assert b["total"] <= tol
    assert b["approximation"] + b["rounding"] >= res.program["deviation"]
    assert b["rounding"] <= 0.05 * tol
    # no I/J word with more than 5 integer digits
    ij = re.findall(r"[IJ]-?(\d+)", text)
    assert all(len(w) <= 5 for w in ij)


def test_budget_is_in_the_header_and_the_report(tmp_path):
    pts = _write_points(tmp_path, "cam")
    nc = tmp_path / "cam.nc"
    res = run(pts, tool_diameter=6.0, gcode=nc, report=tmp_path / "cam.report.json")
    head = [ln for ln in nc.read_text().splitlines() if ln.startswith("(")]
    budget = [ln for ln in head if ln.startswith("(tolerance budget:")]
    assert len(budget) == 1
    assert "[interpolating]" in budget[0] and "[4 decimals]" in budget[0] and "<= 0.01 mm" in budget[0]
    assert any(ln.startswith("(replayed from this text: deviation") for ln in head)
    assert any(ln.startswith("(replayed clearance: the tool center keeps") for ln in head)
    data = json.loads((tmp_path / "cam.report.json").read_text())
    assert data["program"]["within_tolerance"] is True
    assert data["program"]["budget"]["decimals"] == 4
    assert data["program"]["deviation"] == pytest.approx(res.program["deviation"])
    txt = (tmp_path / "cam.report.txt").read_text()
    assert "Tolerance budget:" in txt and "Replayed from this text: deviation" in txt
    assert "Verify every program by simulation or an air cut" in txt  # the caution stays


def test_smoothing_is_stated_apart(tmp_path):
    # noisy probe points (seeded, 5 µm) smoothed with their own tolerance: the budget says so
    rng = np.random.default_rng(11)
    pts = _shape("ellipse", 500) + rng.normal(0, 0.005, (500, 2))
    p = tmp_path / "noisy.csv"
    np.savetxt(p, np.vstack([pts, pts[:1]]), delimiter=",", fmt="%.4f")
    nc = tmp_path / "noisy.nc"
    res = run(p, tool_diameter=6.0, smooth=0.02, gcode=nc)
    b = res.program["budget"]
    assert b["points"] == 0.0 and 0 < b["smoothing"][0] <= 0.02 + 1e-9 and b["smoothing"][1] <= b["smoothing"][0]
    text = nc.read_text()
    assert "points to contour: smoothing, stated apart" in text
    assert "(smoothing moved the contour from the points by at most" in text


def test_inch_program_budget_in_inch(tmp_path):
    pts = _shape("limacon") / 25.4
    p = tmp_path / "lim.csv"
    np.savetxt(p, np.vstack([pts, pts[:1]]), delimiter=",", fmt="%.8f")
    nc = tmp_path / "lim.nc"
    res = run(p, units="inch", tool_diameter=0.25, tolerance=0.0004, gcode=nc)
    text = nc.read_text()
    assert "G20" in text and re.search(r"<= 0.0004 inch\)", text)
    assert res.program["within_tolerance"]
    # 0.0004 inch = 0.01016 mm; at 5 decimals an arc's rounding bound is 5·(√2/2)·0.00001 inch = 0.000898 mm,
    # over 5 % of it (0.000508 mm); at 6 decimals 0.0000898 mm (arithmetic)
    assert max(len(n.split(".")[1]) for _, l, n in gr.read(text).numbers if l in "XY" and "." in n) == 6


# -- a program that fails its replay is never written ---------------------------------
def test_a_program_that_strays_is_not_written(tmp_path, monkeypatch, capsys):
    # simulate a bug in the toolpath stage: one cutting move ends 0.5 mm toward the part
    import pathgen.path.build as build

    real = build.make_toolpath

    def buggy(*a, **kw):
        tp = real(*a, **kw)
        end = tp.end.copy()
        start = tp.start.copy()
        i = int(np.flatnonzero(tp.kind == 1)[len(np.flatnonzero(tp.kind == 1)) // 2])
        xy = end[i, :2]
        end[i, :2] = xy - 0.5 * xy / np.hypot(*xy)  # toward the center of the ellipse: into the part
        start[i + 1, :2] = end[i, :2]
        import dataclasses

        return dataclasses.replace(tp, start=start, end=end)

    monkeypatch.setattr(build, "make_toolpath", buggy)
    pts = _write_points(tmp_path, "ellipse")
    nc = tmp_path / "e.nc"
    code = main(["gcode", str(pts), "-o", str(nc), "--tool-diameter", "6", "--moves", "lines"])
    err = capsys.readouterr().err
    assert code == 3
    assert "internal check failed" in err and "exit status 3" in err and "nothing was written" in err
    assert re.search(r"cuts 0\.49\d* mm into the part at line \d+|strays 0\.4\d* mm", err)
    assert not nc.exists() and not (tmp_path / "e.report.json").exists()
    assert list(tmp_path.glob(".e.nc*")) == []  # no temporary file left


# -- pathgen verify ------------------------------------------------------------------
def _program(tmp_path, name="ellipse", *extra):
    pts = _write_points(tmp_path, name)
    nc = tmp_path / f"{name}.nc"
    assert main(["gcode", str(pts), "-o", str(nc), "--tool-diameter", "6", "--quiet", *extra]) == 0
    return pts, nc


def _verify(capsys, *args):
    code = main(["verify", *map(str, args)])
    cap = capsys.readouterr()
    return code, cap.out, cap.err


@pytest.mark.parametrize("extra", [
    (), ("--depth", "3", "--step-down", "1", "--line-numbers", "--spindle-speed", "12000"),
    ("--side", "inside", "--one-feed", "--lead", "line"),
])
def test_verify_passes_what_pathgen_writes(tmp_path, capsys, extra):
    pts, nc = _program(tmp_path, "cam", *extra)
    # the same fit, tool and toolpath options; the program-only words (N, S, one feed) need none
    opts = [e for e in extra if e not in ("--line-numbers", "--one-feed", "--spindle-speed", "12000")]
    code, out, err = _verify(capsys, nc, pts, "--tool-diameter", "6", *opts)
    assert code == 0, out
    assert out.splitlines()[-2] == "clean" and "CAUTION" in out


def test_verify_finds_a_hand_put_gouge_at_its_line_and_depth(tmp_path, capsys):
    pts, nc = _program(tmp_path, "ellipse", "--moves", "lines")
    lines = nc.read_text().split("\n")
    cuts = [i for i, ln in enumerate(lines) if ln.startswith("G1 X")]
    k = cuts[len(cuts) // 2]
    m = re.match(r"G1 X(\S+) Y(\S+)(.*)", lines[k])
    x, y = float(m[1]), float(m[2])
    # the nearest point of the ellipse (dense), and a shift of 0.5 mm toward it
    t = np.linspace(0, 2 * np.pi, 2_000_001)
    e = np.c_[40 * np.cos(t), 25 * np.sin(t)]
    j = int(np.argmin(np.hypot(e[:, 0] - x, e[:, 1] - y)))
    v = e[j] - (x, y)
    gap = float(np.hypot(*v))
    assert gap == pytest.approx(3.0, abs=0.011)  # the tool radius, within the tolerance
    nx, ny = np.array([x, y]) + 0.5 * v / gap
    lines[k] = f"G1 X{nx:.4f} Y{ny:.4f}{m[3]}"
    edited = tmp_path / "edited.nc"
    edited.write_text("\n".join(lines))
    code, out, err = _verify(capsys, edited, pts, "--tool-diameter", "6", "--moves", "lines")
    assert code == 1
    gouges = re.findall(r"GOUGE: line (\d+) cuts (\S+) mm into the part", out)
    assert gouges and int(gouges[0][0]) == k + 1  # the edited line (1-based)
    depth = float(gouges[0][1])
    assert depth == pytest.approx(0.5 + (3.0 - gap), abs=0.01)
    assert "OFF the tolerance" in out and "NOT clean" in out
    # JSON: the same figures
    code, out, err = _verify(capsys, edited, pts, "--tool-diameter", "6", "--moves", "lines", "--json")
    data = json.loads(out)
    assert code == 1 and data["status"] == 1 and data["gouges"][0]["line"] == k + 1
    assert data["gouges"][0]["depth"] == pytest.approx(depth, abs=1e-5)
    assert "CAUTION" in err


def test_verify_names_word_problems_and_feed_moves_without_f(tmp_path, capsys):
    pts, nc = _program(tmp_path, "limacon")
    text = nc.read_text()
    first_f = re.search(r"^(G1 Z\S+) F\S+$", text, re.M)  # the plunge carries the first feed
    text = text.replace(first_f[0], first_f[1], 1)
    lines = text.split("\n")
    arc = next(i for i, ln in enumerate(lines) if ln.startswith(("G2", "G3")) and " I" in ln)
    lines[arc] = re.sub(r"I(-?[\d.]+)", lambda mm: f"I{float(mm[1]) + 0.01:.4f}", lines[arc])
    edited = tmp_path / "edited.nc"
    edited.write_text("\n".join(lines))
    code, out, err = _verify(capsys, edited, pts, "--tool-diameter", "6")
    assert code == 1
    assert f"problem: line {arc + 1}: arc start radius" in out  # NISTIR 6556 §3.5.3.2
    assert re.search(r"feed moves without F: \d+ \(lines \d+", out)
    assert "estimated cycle time as written: not known" in out


@pytest.mark.parametrize("content, match", [
    ("G21 G90 G17 G94\nG0 X0 Y0 Z0\nG41 G1 X1 F100\nM2\n", r"edited.nc, line 3: G41 is not one pathgen reads"),
    ("G0 X0 Y0\nM2\n", r"edited.nc, line 1: motion before the units are set"),
])
def test_verify_refuses_what_it_cannot_read(tmp_path, capsys, content, match):
    pts = _write_points(tmp_path, "ellipse")
    bad = tmp_path / "edited.nc"
    bad.write_text(content)
    code, out, err = _verify(capsys, bad, pts, "--tool-diameter", "6")
    assert code == 2 and out == ""
    assert re.search(match, err) and len(err.strip().splitlines()) == 1 and "Traceback" not in err


def test_verify_reads_an_inch_program_against_inch_points(tmp_path, capsys):
    pts = _shape("ellipse") / 25.4
    p = tmp_path / "e.csv"
    np.savetxt(p, np.vstack([pts, pts[:1]]), delimiter=",", fmt="%.8f")
    nc = tmp_path / "e.nc"
    assert main(["gcode", str(p), "-o", str(nc), "--units", "inch", "--tool-diameter", "0.25",
                 "--tolerance", "0.0004", "--quiet"]) == 0
    code, out, err = _verify(capsys, nc, p, "--units", "inch", "--tool-diameter", "0.25", "--tolerance", "0.0004")
    assert code == 0 and " inch" in out


def test_the_clearance_line_says_how_far_the_tool_cuts_into_the_part():
    # arithmetic of the line itself: the tool cuts into the part by its radius
    # less the tool center's distance (a disc of radius r about a center at
    # distance c from a line reaches r - c past it: handbook geometry)
    from pathgen.verify.check import clearance_words

    within = clearance_words({"smallest": 2.99071, "tool_radius": 3.0}, 0.01, "mm")
    assert within.endswith("so the tool cuts up to 0.00929 mm into it, within the 0.01 mm tolerance")
    clear = clearance_words({"smallest": 3.2, "tool_radius": 3.0}, 0.01, "mm")
    assert clear.endswith("so the tool never cuts into it")
    gouge = clearance_words({"smallest": 2.5, "tool_radius": 3.0}, 0.01, "mm")
    assert gouge.endswith("so the tool cuts up to 0.5 mm into it, beyond the 0.01 mm tolerance: a gouge")
    inch = clearance_words({"smallest": 2.99071, "tool_radius": 3.0}, 0.01, "inch")
    assert "0.000365748 inch into it" in inch  # 0.00929 mm / 25.4 mm per inch (exact since 1959, from memory)


def test_the_header_lines_shown_in_docs_gcode_are_the_real_ones(tmp_path):
    # docs/gcode.md shows the bracket's budget and replay lines: the same
    # command must write the same lines
    from pathlib import Path

    root = Path(__file__).resolve().parent.parent
    doc = (root / "docs" / "gcode.md").read_text()
    block = re.search(r"`pathgen gcode (samples/bracket\.csv[^`]*)`\)\n\n```\n(.*?)```", doc, re.S)
    assert block, "docs/gcode.md lost its header example"
    argv = block.group(1).split()
    argv[0] = str(root / argv[0])
    argv[argv.index("-o") + 1] = str(tmp_path / "bracket.nc")
    import io

    assert main(["gcode", *argv], out=io.StringIO(), err=io.StringIO()) == 0
    written = (tmp_path / "bracket.nc").read_text().splitlines()
    shown = block.group(2).splitlines()
    assert len(shown) == 3
    for line in shown:
        assert line in written


def test_the_report_names_the_lines_of_the_written_program(tmp_path):
    # the replay's figures name lines of the file as written: the header
    # gains the replay's own comment lines after the replay, and a line
    # number 4 short pointed at the wrong move (the move read back there,
    # under the G-code word rules of ISO 6983-1, passes through the stated
    # point of smallest clearance)
    from pathlib import Path

    root = Path(__file__).resolve().parent.parent
    nc = tmp_path / "bracket.nc"
    run(root / "samples" / "bracket.csv", tool_diameter=6.0, gcode=nc, report=tmp_path / "b.report.json")
    data = json.loads((tmp_path / "b.report.json").read_text())["program"]
    prog = gr.read(nc.read_text())
    by_line = {m.line: m for m in prog.moves}
    cl = data["clearance"]
    move = by_line[cl["line"]]
    pts = gr.sample(move, 0.01)
    assert np.hypot(*(pts[:, :2] - np.array(cl["at"][:2])).T).min() < 0.02
    assert data["deviation_worst_line"] in by_line
