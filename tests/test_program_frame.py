"""The program frame from the machine profile: every word read back by the
independent interpreter (tests/gcode_reader.py), the body's moves unchanged.

Sources beside the checks:
* NISTIR 6556 (Kramer, Proctor, Messina, "The NIST RS274NGC Interpreter -
  Version 3", 2000; sources: nistir-6556): T selects a tool and M6 changes
  it; G43 H turns on the tool length offset (modal group 8); G54-G59 select
  a work coordinate system (group 12); M3/M4/M5 spindle (M group 7);
  M7/M8/M9 coolant (M group 8); G28 return home (group 0); M2/M30 end (M
  group 4); one member of a modal group per line (§3.3.5); line numbers at
  most 5 digits (§3.3.1); comments in parentheses (§3.3.4).  Section
  numbers from memory where not given.
* The O program number, % delimiter lines and ";" comments: common practice
  of ISO 6983 controls (from memory), not part of the NIST language.
* Sagitta of a chord c on radius R: R - sqrt(R^2 - c^2/4) (handbook
  circle geometry; sources: sagitta).
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pytest

import gcode_reader as gr
from pathgen.checks.machine import load_machine, load_tool_settings
from pathgen.errors import ExportError, InputError
from pathgen.export.frame import Frame, load_frame
from pathgen.export.gcode import gcode_text
from pathgen.path.model import Arc, Line, Rapid, Toolpath
from pathgen.pipeline import run

ROOT = Path(__file__).resolve().parents[1]
SAMPLES = ROOT / "samples"
FULL = dict(number=12, percent=True, tool=7, length_offset=True, work_offset="G55", spindle="counter-clockwise",
            coolant="mist", return_home=True, end_code="M30", block_step=5, radius_offset=17)


def _tp():
    moves = [
        Rapid((10, 0, 5), (10, 0, 5)),
        Line((10, 0, 5), (10, 0, -1), 200.0),
        Arc((10, 0, -1), (-10, 0, -1), (0, 0), True, 700.0),
        Line((-10, 0, -1), (-10, -5, -1), 650.0),
        Arc((-10, -5, -1), (10, -5, -1), (0, -5), True, 700.0),
        Rapid((10, -5, -1), (10, -5, 5)),
    ]
    return Toolpath.from_moves(moves, tool_diameter=4.0, side="outside", info={"safe_height": 5.0})


def _geometry(prog):
    return [(m.g, m.start, m.end, m.center, m.feed) for m in prog.moves]


def test_default_frame_writes_the_program_of_before_byte_for_byte():
    tp = _tp()
    plain = gcode_text(tp, spindle_speed=9000, line_numbers=True)
    assert gcode_text(tp, spindle_speed=9000, line_numbers=True, frame=Frame()) == plain
    assert load_frame(SAMPLES / "mill.toml") == Frame()  # a profile without [program]
    # the frame-free program as it was written before frames (common practice: a safe default)
    code = [ln for ln in plain.splitlines() if not ln.startswith("(")]
    assert code[:2] == ["N1 G21 G90 G17 G94 G40", "N2 S9000 M3"]
    assert code[-2:] == [f"N{len(code) - 1} M5", f"N{len(code)} M2"]


@pytest.mark.parametrize("frame", [
    Frame(**FULL),
    Frame(tool=2, tool_change=False, comment_style="capitals"),
    Frame(work_offset="G59", coolant="flood", comment_style="semicolon", end_code="M2"),
    Frame(number=9999, block_step=10, length_offset=3, tool=3),
])
def test_frame_words_parse_keep_modal_rules_and_leave_the_moves_alone(frame):
    tp = _tp()
    bare = gr.read(gcode_text(tp, spindle_speed=9000))
    text = gcode_text(tp, spindle_speed=9000, frame=frame)
    prog = gr.read(text)  # the reader refuses two words of one modal group on a line (§3.3.5)
    assert _geometry(prog) == _geometry(bare)  # the body's geometry is unchanged by the frame
    events = [w for _, w in prog.events]
    first_move = prog.moves[0].line
    before = [w for ln, w in prog.events if ln < first_move]
    after = [w for ln, w in prog.events if ln > prog.moves[-1].line]
    assert prog.end_word == frame.end_code
    assert prog.number == frame.number and prog.percent == frame.percent
    if frame.tool is not None:
        assert f"T{frame.tool}" in before and (("M6" in before) == frame.tool_change)
    if frame.length_offset is not None:
        assert f"G43 H{frame.length_offset}" in before
        assert events.index(f"G43 H{frame.length_offset}") > events.index(f"T{frame.tool}")
    if frame.work_offset:
        assert frame.work_offset in before
    spin = "M4" if frame.spindle == "counter-clockwise" else "M3"
    assert spin in before and "M5" in after
    if frame.coolant != "off":
        assert {"flood": "M8", "mist": "M7"}[frame.coolant] in before and "M9" in after
    assert ("G28" in after) == frame.return_home
    code = [ln for ln in text.splitlines() if ln and ln[0] not in "(;%O"]
    if frame.block_step:
        numbers = [int(re.match(r"N(\d+) ", ln).group(1)) for ln in code]
        assert numbers == [frame.block_step * (i + 1) for i in range(len(code))]
    assert any("CAUTION" in c.upper() for c in prog.comments)
    assert all(";" not in c for c in prog.comments)


def test_comment_styles_as_written():
    tp = _tp()
    caps = gcode_text(tp, frame=Frame(comment_style="capitals"))
    assert all(ln == ln.upper() for ln in caps.splitlines() if ln.startswith("("))
    semi = gcode_text(tp, frame=Frame(comment_style="semicolon"))
    heads = [ln for ln in semi.splitlines() if not re.match(r"[GMNSTO%]", ln)]
    assert heads and all(ln.startswith("; ") for ln in heads)
    assert "(" not in semi


def test_line_numbers_with_a_step_stop_at_five_digits():
    n = 10_000
    x = np.arange(1, n + 1, dtype=float)
    start = np.column_stack([x - 1, np.zeros(n), np.zeros(n)])
    end = np.column_stack([x, np.zeros(n), np.zeros(n)])
    tp = Toolpath(np.full(n, 1), start, end, np.zeros((n, 2)), np.full(n, 100.0), info={"safe_height": 0.0})
    gr.read(gcode_text(tp, frame=Frame(block_step=9)))  # N90018 at the end: 5 digits (§3.3.1)
    with pytest.raises(ExportError, match=r"line numbers stop at N99999"):
        gcode_text(tp, frame=Frame(block_step=10))


def test_arcs_too_wide_for_the_digits_become_lines_within_the_tolerance():
    # a gentle arc of radius 2000 mm: I/J need 4 integer digits
    R, half = 2000.0, 0.02
    a = np.array([-half, half]) + np.pi / 2
    s, e = (R * np.cos(a[0]), R * np.sin(a[0]) - R, -1.0), (R * np.cos(a[1]), R * np.sin(a[1]) - R, -1.0)
    # the arc runs clockwise from e (left) to s (right)
    moves = [Rapid((e[0], e[1], 5), (e[0], e[1], 5)), Line((e[0], e[1], 5), e, 200.0),
             Arc(e, s, (0.0, -R), False, 800.0), Rapid(s, (s[0], s[1], 5))]
    tp = Toolpath.from_moves(moves, tolerance=0.01, deviation=0.004, info={"safe_height": 5.0})
    wide = gr.read(gcode_text(tp, frame=Frame(arc_digits=4)))
    assert any(m.center is not None for m in wide.moves)  # 4 digits hold I/J of 2000
    text = gcode_text(tp, frame=Frame(arc_digits=3))
    prog = gr.read(text)
    assert all(m.center is None for m in prog.moves)
    assert "arcs written as lines: 1," in text
    dev = float(re.search(r"measured deviation: ([0-9.]+) mm", text).group(1))
    assert dev <= 0.01
    # every written point of the lines lies within the stated deviation of the circle (sagitta)
    pts = np.vstack([gr.sample(m, 0.05) for m in prog.moves if m.g == 1 and m.start[2] == m.end[2]])
    gap = np.abs(np.hypot(pts[:, 0], pts[:, 1] + R) - R)
    assert gap.max() <= dev - 0.004 + 2e-4  # + rounding to 4 decimals


def test_frame_profile_keys_are_read_and_unknown_ones_refused(tmp_path):
    frame = load_frame(SAMPLES / "mill-frame.toml")
    assert frame.tool == 4 and frame.length_offset == 4 and frame.register == 24
    assert frame.work_offset == "G54" and frame.end_code == "M30" and frame.block_step == 10
    assert load_machine(SAMPLES / "mill-frame.toml").max_feed == 10000.0
    assert load_tool_settings(SAMPLES / "mill-frame.toml") == {"plunge_feed": 300.0}
    p = tmp_path / "m.toml"
    p.write_text('units = "inch"\n[tool]\nplunge_feed = 10\n')
    assert load_tool_settings(p)["plunge_feed"] == pytest.approx(254.0)  # 25.4 mm per inch
    cases = [
        ("[program]\ntool = 3\ncolant = 'flood'\n", r"line 3: unknown key 'colant' in \[program\]"),
        ("[program]\nwork_offset = 'G60'\n", r"line 2: work_offset = 'G60' is not one of: G54"),
        ("[program]\nend_code = 'M99'\n", r"end_code = 'M99' is not one of: M2, M30"),
        ("[program]\ntool = 3.5\n", r"tool must be a whole number from 0 to 99"),
        ("[program]\nlength_offset = true\n", r"length_offset = true takes the tool number"),
        ("[program]\nblock_step = -1\n", r"block_step must be a whole number"),
        ("[program]\npercent = 'yes'\n", r"percent must be true or false"),
        ("[program]\narc_digits = 0\n", r"arc_digits must be a whole number from 1 to 9"),
        ("program = 3\n", r"program must be a table"),
        ("[tool]\nplunge_speed = 3\n", r"unknown key 'plunge_speed' in \[tool\]"),
        ("[tool]\nplunge_feed = 0\n", r"plunge_feed must be a number from 1"),
    ]
    for body, message in cases:
        p.write_text(body)
        with pytest.raises(InputError, match=message):
            load_frame(p)
            load_tool_settings(p)
            load_machine(p)


def test_pipeline_writes_the_frame_and_the_plunge_feed_of_the_profile(tmp_path):
    out = tmp_path / "bracket.nc"
    run(SAMPLES / "bracket.csv", tool_diameter=6.0, machine=SAMPLES / "mill-frame.toml", spindle_speed=12000,
        gcode=out, depth=2.0)
    text = out.read_text()
    prog = gr.read(text)
    assert prog.percent and prog.number == 1201 and prog.end_word == "M30"
    assert [w for _, w in prog.events][:5] == ["T4", "M6", "G54", "G43 H4", "M3"]
    plunge = [m for m in prog.moves if m.g == 1 and m.start[:2] == m.end[:2] and m.end[2] < m.start[2]]
    assert plunge and all(m.feed == 300.0 for m in plunge)  # the profile's plunge feed, not half the feed
    # the sample's arc_digits = 4: the bracket's near-straight arcs are written as lines, and said
    assert all(abs(m.center[k] - m.start[k]) < 1e4 for m in prog.moves if m.center for k in (0, 1))
    assert re.search(r"\(arcs written as lines: [1-9]\d*, their I or J would need more than 4", text)
    # the same job without the frame (and without the digit limit): the same moves
    framed = tmp_path / "framed.toml"
    framed.write_text((SAMPLES / "mill-frame.toml").read_text().replace("arc_digits = 4", ""))
    run(SAMPLES / "bracket.csv", tool_diameter=6.0, machine=framed, spindle_speed=12000, gcode=out,
        depth=2.0, force=True)
    bare = tmp_path / "bare.nc"
    run(SAMPLES / "bracket.csv", tool_diameter=6.0, machine=SAMPLES / "mill.toml", spindle_speed=12000,
        gcode=bare, depth=2.0, plunge_feed=300.0)
    assert _geometry(gr.read(bare.read_text())) == _geometry(gr.read(out.read_text()))


def test_a_counter_clockwise_spindle_keeps_climb_milling(tmp_path):
    # climb milling with the spindle turning the other way runs the contour the other way round
    # (common practice: the cutting direction of the teeth decides climb or conventional)
    p = tmp_path / "ccw.toml"
    p.write_text('[program]\nspindle = "counter-clockwise"\n')
    a = run(SAMPLES / "plate.csv", tool_diameter=6.0, machine=p, spindle_speed=9000, gcode=tmp_path / "a.nc")
    b = run(SAMPLES / "plate.csv", tool_diameter=6.0, spindle_speed=9000, gcode=tmp_path / "b.nc")
    assert a.toolpath.info["travel"] != b.toolpath.info["travel"]
    assert "M4" in [w for _, w in gr.read((tmp_path / "a.nc").read_text()).events]
    assert "direction: climb" in (tmp_path / "a.nc").read_text()
    assert a.toolpath.info["direction"] == "climb"


def test_no_comment_of_any_sample_program_holds_a_semicolon(tmp_path):
    # several senders read ";" as the start of a line comment and leave "(" open (common practice)
    # every header kind (plain, a machine frame with a spindle, machine
    # compensation) on the plate, whose tight corners add the most notes;
    # the bracket and the open profile each under one of the other kinds
    texts = []
    plain, frame, comp = ({}, {"machine": SAMPLES / "mill-frame.toml", "spindle_speed": 9000},
                          {"compensation": "machine", "depth": 2.0, "step_down": 1.0})
    for i, (name, extra) in enumerate([("plate.csv", plain), ("plate.csv", frame), ("plate.csv", comp),
                                       ("bracket.csv", frame), ("profile.csv", comp)]):
        out = tmp_path / f"p{i}.nc"
        run(SAMPLES / name, tool_diameter=6.0, gcode=out, **extra)
        texts.append(out.read_text())
    hook = tmp_path / "odd;name.csv"
    hook.write_text((SAMPLES / "plate.csv").read_text())
    run(hook, tool_diameter=6.0, gcode=tmp_path / "odd.nc", units="mm")
    texts.append((tmp_path / "odd.nc").read_text())
    for text in texts:
        comments = gr.read(text).comments
        assert len(comments) >= 9
        assert [c for c in comments if ";" in c] == []
        assert "motion blocks:" in text and "moves:" not in text


@pytest.mark.parametrize("marker, extra", [("frame", {}), ("compensated", {"compensation": "machine"})])
def test_the_programs_shown_in_the_docs_are_the_real_output(tmp_path, marker, extra):
    # docs/gcode.md shows two programs in full: regenerate them and compare, byte for byte
    doc = (ROOT / "docs" / "gcode.md").read_text()
    m = re.search(rf"<!-- program: {marker} -->\n```\n(.*?)```", doc, re.S)
    assert m, f"docs/gcode.md lost its '{marker}' example"
    a = np.linspace(0, 2 * np.pi, 37)
    ring = tmp_path / "ring.csv"
    ring.write_text("x,y\n" + "".join(f"{22 * np.cos(t):.4f},{22 * np.sin(t):.4f}\n" for t in a))
    out = tmp_path / ("ring.nc" if marker == "frame" else "ring-comp.nc")
    run(ring, tool_diameter=6.0, depth=1.0, machine=SAMPLES / "mill-frame.toml", spindle_speed=12000,
        gcode=out, **extra)
    assert m.group(1) == out.read_text()
    gr.read(m.group(1))  # and it reads back under the rules


@pytest.mark.parametrize("program, message", [
    ("G21 G90 G17 G94 G40\nG0 X0 Y0 Z0\nG41 G1 X5 F100\nG40 G1 X9\nM2\n", "G41 without a D word"),
    ("G21 G90 G17 G94 G40\nG0 X0 Y0 Z0\nG41 D1 G2 X5 Y5 I5 J0 F100\nG40 G1 X9\nM2\n", "turned on on a G2 move"),
    ("G21 G90 G17 G94 G40\nG0 X0 Y0 Z0\nG42 D1 G1 X5 F100\nG2 X10 Y0 I2.5 J0\nG40 G1 X20\nM2\n",
     "an arc as the first move after cutter compensation"),
    ("G21 G90 G17 G94 G40\nG0 X0 Y0 Z0\nG41 D1 G1 X5 F100\nG1 X6\nG42 D1 G1 X7\nM2\n", "while cutter compensation is on"),
    ("G21 G90 G17 G94 G40\nG0 X0 Y0 Z0\nG41 D1 G1 X5 F100\nG1 X6\nM2\n", "program end with cutter compensation on"),
    ("G21 G90 G17 G94 G40\nG0 X0 Y0 Z0\nG40 G41 D1 G1 X5 F100\nM2\n", "two G words of one modal group"),
    ("G21 G90 G17 G94 G40\nG43\nM2\n", "G43 without an H word"),
    ("G21 G90 G17 G94 G40\nM6\nM2\n", "M6 without a selected tool"),
    ("G21 G90 G17 G94 G40\nM7 M8\nM2\n", "two of one group"),
    ("G21 G90 G17 G94 G40\nG54 G55\nM2\n", "two G words of one modal group"),
    ("%\nG21 G90 G17 G94 G40\nM2\n", "must close with one"),
    ("G21 G90 G17 G94 G40\nO12\nM2\n", "the O program number must be the first code line"),
    ("G21 G90 G17 G94 G40\nG0 X0 Y0 Z5\nG28\nG1 X5 F100\nM2\n", "cutting move from an unknown position"),
])
def test_the_reader_refuses_what_the_rules_forbid(program, message):
    # the checker itself: each rule above fails a program that breaks it (sources: nistir-6556)
    with pytest.raises(gr.GcodeError, match=message):
        gr.read(program)
