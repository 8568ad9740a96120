"""G-code writer, checked by an independent interpreter of the subset.

Sources beside the checks:
* NISTIR 6556 (Kramer, Proctor, Messina, "The NIST RS274NGC Interpreter -
  Version 3", 2000): number format §3.3.2.1, line length §3.3, line numbers
  §3.3.1, comments §3.3.4, one word per modal group §3.3.5, units before
  motion §3.5.7, center-format arcs and the 0.002 mm / 0.0002 in radius rule
  and the worked example §3.5.3.2, I/J incremental §3.5.17, M2 §3.6.1.
  The interpreter in tests/gcode_reader.py is written from these rules.
* Circle geometry (handbook): an offset of a circle of radius R by r is a
  concentric circle of radius R + r; sagitta s = R - sqrt(R^2 - L^2/4).
* Rounding bound (derived; sources: rounding): with q decimals the radius
  mismatch after rounding is at most 3*sqrt(2)*0.5*10^-q.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import gcode_reader as gr
from pathgen.errors import ExportError, InputError
from pathgen.export.gcode import gcode_text, write_gcode
from pathgen.path.model import ARC_CCW, ARC_CW, LINE, RAPID, Arc, Line, Rapid, Toolpath
from pathgen.spline import fit

NUMBER_WORD = re.compile(r"^-?\d+(\.\d*[1-9])?$")  # fixed point, trimmed, no exponent


def _circle_arcs(R, n, *, z=-2.0, feed=800.0, ccw=True, phase=0.3):
    """n arcs exactly on the circle of radius R about the origin."""
    a = phase + np.linspace(0, 2 * np.pi, n + 1) * (1 if ccw else -1)
    pts = np.column_stack([R * np.cos(a), R * np.sin(a)])
    return [Arc((*pts[i], z), (*pts[i + 1], z), (0.0, 0.0), ccw, feed) for i in range(n)]


def _with_approach(moves, safe=5.0, plunge=250.0):
    """Rapid over the first point, plunge, the moves, retract."""
    s, e = moves[0].start, moves[-1].end
    return (
        [Rapid((s[0], s[1], safe), (s[0], s[1], safe)), Line((s[0], s[1], safe), s, plunge)]
        + list(moves)
        + [Rapid(e, (e[0], e[1], safe))]
    )


def _dense(contour, n=200_000):
    t = np.linspace(*contour.domain, n)
    return contour(t)


def _replay_points(prog, step=0.02, cutting_only=True):
    pts = [gr.sample(m, step) for m in prog.moves if (m.g != 0 or not cutting_only)]
    return np.vstack(pts)


# --------------------------------------------------------------------------- NIST example
def test_nist_worked_example_through_reader_and_writer():
    # NISTIR 6556 §3.5.3.2 worked example: start (7, 7), G2 X10 Y16 I3 J4 gives
    # center (10, 11) and radius 5 (clockwise sweep 143.130 deg, recomputed; sources: nistir-6556)
    text = "G21 G90 G17 G94 G40\nG0 X7 Y7 Z9\nG17 G2 x 10 y 16 i 3 j 4 z 9 F100\nM2\n"
    prog = gr.read(text)
    arc = prog.moves[-1]
    assert arc.center == (10.0, 11.0)
    assert math.hypot(7 - 10, 7 - 11) == 5.0
    assert math.hypot(10 - 10, 16 - 11) == 5.0
    assert math.degrees(gr.sweep_of(arc)) == pytest.approx(-143.130, abs=5e-4)
    # the writer emits the same words for the same arc
    tp = Toolpath.from_moves([Arc((7, 7, 9), (10, 16, 9), (10, 11), False, 100.0)], info={"safe_height": 9.0})
    out = gcode_text(tp)
    assert "G2 X10 Y16 I3 J4 F100\n" in out
    back = gr.read(out).moves[-1]
    assert back.center == (10.0, 11.0)


@pytest.mark.parametrize(
    "text, match",
    [
        ("G21 G90 G17 G94 G40\nG0 X1e-5\nM2", "exponent"),  # §3.3.2.1
        ("G21 G90 G17 G94 G40\nG0 X0 Y0 Z0\nG2 X10 Y0 R5 F100\nM2", "not in the subset"),  # R format refused
        ("G21 G90 G17 G94 G40\nG0 X0 Y0 Z0\nG2 X10 Y0 I5.01 J0 F100\nM2", "differ by more than 0.002"),  # §3.5.3.2
        ("G21 G90 G17 G94 G40\nG0\nM2", "without an axis word"),
        ("G21 G90 G17 G94 G40\nG0 G1 X1\nM2", "modal group"),  # §3.3.5
        ("G0 X1\nG21 G90 G17 G94 G40\nM2", "before units"),  # §3.5.7
        ("G21 G90 G17 G94 G40\n(a (nested) comment)\nM2", "inside a comment"),  # §3.3.4
        ("G21 G90 G17 G94 G40\n(open comment\nM2", "not closed"),  # §3.3.4
        ("G21 G90 G17 G94 G40\nG0 X" + "1" * 260 + "\nM2", "more than 256"),  # §3.3
        ("N123456 G21 G90 G17 G94 G40\nM2", "5 digits"),  # §3.3.1
        ("G21 G90 G17 G94 G40\nG0 X0 Y0 Z0\nG1 X5\nM2", "no feed"),
        ("G21 G90 G17 G94 G40\nG0 X1 X2\nM2", "two X words"),  # §3.3.5
        ("G21 G90 G17 G94 G40\nG0 X1\n", "does not end"),  # §3.6.1
        ("G21 G90 G17 G94 G40\nG0 X1 Y1\nG21 G0 X2\nM2", "units word after motion"),  # §3.5.7
    ],
)
def test_reader_refuses_rule_breaks(text, match):
    # the reader must reject what the standard rejects, or it proves nothing
    with pytest.raises(gr.GcodeError, match=match):
        gr.read(text)


# --------------------------------------------------------------------------- replay vs geometry
def _replay_beside(tp, contour, z):
    """Write, replay; the replayed points at depth z and their distance to the contour."""
    from scipy.spatial import cKDTree

    prog = gr.read(gcode_text(tp))
    pts = _replay_points(prog)
    cut = pts[np.isclose(pts[:, 2], z)]
    d, _ = cKDTree(_dense(contour)).query(cut[:, :2])
    return prog, cut, d


def test_circle_outside_offset_replays_within_tolerance():
    R, r = 20.0, 3.0
    t = np.linspace(0, 2 * np.pi, 64, endpoint=False)
    contour = fit(np.column_stack([R * np.cos(t), R * np.sin(t)]), closed=True)
    # cutting outside: tool center on a concentric circle of radius R + r (handbook)
    moves = _with_approach(_circle_arcs(R + r, 4))
    tp = Toolpath.from_moves(moves, tool_diameter=2 * r, side="outside", tolerance=0.01,
                             info={"safe_height": 5.0})
    prog, cut, d = _replay_beside(tp, contour, -2.0)
    assert np.max(np.abs(d - r)) <= tp.tolerance
    assert np.max(np.abs(np.hypot(cut[:, 0], cut[:, 1]) - (R + r))) <= 2e-4  # arc rounding only


def test_ellipse_inside_offset_lines_replay_within_tolerance():
    a, b, r = 40.0, 25.0, 3.0
    t = np.linspace(0, 2 * np.pi, 200, endpoint=False)
    contour = fit(np.column_stack([a * np.cos(t), b * np.sin(t)]), closed=True)
    s = contour.sample(2000)
    # inside a counter-clockwise outline the tool center is P + r N (left normal)
    center = contour(s) + r * contour.normal(s)
    center = np.vstack([center, center[:1]])
    moves = [Line((*center[i], -1.0), (*center[i + 1], -1.0), 900.0) for i in range(len(center) - 1)]
    tp = Toolpath.from_moves(_with_approach(moves), tool_diameter=2 * r, side="inside", tolerance=0.01,
                             info={"safe_height": 5.0})
    prog, cut, d = _replay_beside(tp, contour, -1.0)
    # chords of 0.1 mm on radius >= b^2/a + r = 18.6 mm sag by < 1e-4 mm (sagitta)
    assert np.max(np.abs(d - r)) <= tp.tolerance
    assert len([m for m in prog.moves if m.g == 1]) == 2000 + 1  # plunge + every line


# --------------------------------------------------------------------------- words and numbers
def _random_toolpath(seed, n=300, units="mm"):
    rng = np.random.default_rng(seed)
    pts = np.cumsum(rng.normal(0, 5, (n + 1, 2)), axis=0)
    moves = []
    for i in range(n):
        s, e = (*pts[i], -1.5), (*pts[i + 1], -1.5)
        feed = float(rng.choice([400.0, 650.5, 1200.0]))
        if i % 3 == 0:
            bulge = rng.uniform(0.05, 1.5) * rng.choice([-1, 1])
            c, ccw = _bulge_center(np.array(s[:2]), np.array(e[:2]), bulge), bulge > 0
            moves.append(Arc(s, e, tuple(c), bool(ccw), feed))
        else:
            moves.append(Line(s, e, feed))
    return Toolpath.from_moves(_with_approach(moves), units=units, info={"safe_height": 5.0})


def _bulge_center(p, q, bulge):
    # bulge = tan(theta/4); center at distance c(1 - b^2)/(4b) from the chord midpoint
    # toward the left normal for b > 0 (DXF bulge geometry; sources: dxf-bulge)
    chord = q - p
    c = np.hypot(*chord)
    left = np.array([-chord[1], chord[0]]) / c
    return (p + q) / 2 + left * c * (1 - bulge**2) / (4 * bulge)


@pytest.mark.parametrize("units, decimals", [("mm", 4), ("mm", 6), ("inch", 5)])
def test_words_and_numbers_follow_the_rules(units, decimals):
    tp = _random_toolpath(7, units=units)
    text = gcode_text(tp, decimals=decimals, spindle_speed=18000, line_numbers=True)
    prog = gr.read(text)  # every NIST rule the reader knows holds
    assert prog.units == units
    lines = text.splitlines()
    assert max(map(len, lines)) <= 256  # §3.3
    code = [ln for ln in lines if not ln.startswith("(")]
    # preamble: units, absolute, XY plane, feed per minute before any motion (§3.5.7)
    assert code[0].split()[1:] == [("G20" if units == "inch" else "G21"), "G90", "G17", "G94", "G40"]
    assert code[-1].split()[-1] == "M2"
    assert "M5" in code[-2] and "S18000 M3" in code[1]
    for ln, letter, num in prog.numbers:
        assert "e" not in num.lower() and "nan" not in num.lower() and "inf" not in num.lower()
        assert NUMBER_WORD.match(num), (ln, letter, num)
        assert num.lstrip("-") != "0" or not num.startswith("-")
        if letter in "XYZIJ":
            assert len(num.split(".")[1]) <= decimals if "." in num else True
    assert not re.search(r"-0(\s|$)", text)
    # line numbers count up from 1 (§3.3.1: at most 5 digits)
    nums = [int(ln.split()[0][1:]) for ln in code]
    assert nums == list(range(1, len(code) + 1))


def test_replayed_moves_match_the_toolpath():
    tp = _random_toolpath(11)
    prog = gr.read(gcode_text(tp))
    cut = [m for m in prog.moves if m.g != 0]
    ref = [m for m in tp if not isinstance(m, Rapid)]
    assert len(cut) == len(ref)
    half = 0.5e-4 * math.sqrt(3)
    for got, want in zip(cut, ref):
        assert np.allclose(got.end, want.end, atol=half)
        assert got.feed == pytest.approx(round(want.feed, 1))
        if isinstance(want, Arc):
            assert got.g == (3 if want.ccw else 2)
            assert np.allclose(got.center, want.center, atol=2e-4)


def test_feed_words_only_where_the_feed_changes():
    pts = [(0, 0), (10, 0), (20, 0), (30, 0), (40, 0), (50, 0)]
    feeds = [600.0, 600.0, 300.0, 300.0, 600.0]
    moves = [Line((*pts[i], -1), (*pts[i + 1], -1), feeds[i]) for i in range(5)]
    tp = Toolpath.from_moves(_with_approach(moves, plunge=200.0), info={"safe_height": 5.0, "feed": 600.0})
    text = gcode_text(tp)
    body = [ln for ln in text.splitlines() if ln.startswith("G1")]
    assert [("F" in ln) for ln in body] == [True, True, False, True, False, True]
    assert [m.feed for m in gr.read(text).moves if m.g == 1] == [200.0] + feeds
    one = gcode_text(tp, single_feed=True)
    assert [m.feed for m in gr.read(one).moves if m.g == 1] == [200.0] + [600.0] * 5  # plunge keeps its feed
    assert one.count(" F") == 2


def test_inch_program_uses_g20_and_five_decimals():
    moves = _circle_arcs(1.234567, 3, z=-0.05, feed=30.0)
    tp = Toolpath.from_moves(_with_approach(moves, safe=0.2, plunge=10.0), units="inch",
                             info={"safe_height": 0.2})
    text = gcode_text(tp)
    prog = gr.read(text)  # 0.0002 in radius rule (§3.5.3.2)
    assert prog.units == "inch" and "G20 G90 G17 G94 G40" in text and "G21" not in text
    assert max(len(n.split(".")[1]) for _, l, n in prog.numbers if l in "XY" and "." in n) == 5
    with pytest.raises(InputError, match="decimals=4 must be a whole number from 5 to 8 for inch"):
        gcode_text(tp, decimals=4)


def test_full_circle_is_written_with_end_equal_to_start():
    R = 12.5
    full = Arc((R, 0, -1), (R, 0, -1), (0, 0), True, 500.0)
    tp = Toolpath.from_moves(_with_approach([full]), info={"safe_height": 5.0})
    prog = gr.read(gcode_text(tp))
    arc = [m for m in prog.moves if m.g == 3][0]
    assert gr.sweep_of(arc) == pytest.approx(2 * np.pi)
    pts = gr.sample(arc, 0.05)
    assert np.allclose(np.hypot(pts[:, 0], pts[:, 1]), R, atol=1e-9)


def test_moves_below_the_resolution_are_dropped_not_turned_into_circles():
    a = Arc((10, 0, -1), (10 * math.cos(1e-7), 10 * math.sin(1e-7), -1), (0, 0), True, 500.0)
    moves = [Line((0, 0, -1), (10, 0, -1), 500.0), a, Line(a.end, (10, 10, -1), 500.0)]
    prog = gr.read(gcode_text(Toolpath.from_moves(_with_approach(moves), info={"safe_height": 5.0})))
    assert [m.g for m in prog.moves if m.g != 0] == [1, 1, 1]  # plunge, line, line: no G3


@settings(max_examples=40, deadline=None)
@given(
    pts=st.lists(st.tuples(st.floats(-500, 500), st.floats(-500, 500)), min_size=2, max_size=12),
    # bulge >= 0.004: radius <= chord/0.016 < 10^5 mm, at most 5 integer digits in I, J (common practice)
    bulges=st.lists(st.floats(0.004, 3.0), min_size=11, max_size=11),
    signs=st.lists(st.booleans(), min_size=11, max_size=11),
)
def test_random_arcs_pass_the_radius_rule_after_rounding(pts, bulges, signs):
    pts = np.array(pts)
    keep = np.ones(len(pts), bool)
    keep[1:] = np.hypot(*np.diff(pts, axis=0).T) > 0.01
    pts = pts[keep]
    if len(pts) < 2:
        return
    moves = []
    for i in range(len(pts) - 1):
        b = bulges[i] * (1 if signs[i] else -1)
        c = _bulge_center(pts[i], pts[i + 1], b)
        moves.append(Arc((*pts[i], 0.0), (*pts[i + 1], 0.0), tuple(c), b > 0, 700.0))
    tp = Toolpath.from_moves(_with_approach(moves), info={"safe_height": 5.0})
    prog = gr.read(gcode_text(tp))  # raises if any arc breaks the 0.002 mm rule (§3.5.3.2)
    arcs = [m for m in prog.moves if m.g in (2, 3)]
    assert len(arcs) == len(moves)
    for got, want in zip(arcs, moves):
        r0 = math.hypot(got.start[0] - got.center[0], got.start[1] - got.center[1])
        r1 = math.hypot(got.end[0] - got.center[0], got.end[1] - got.center[1])
        assert abs(r0 - r1) <= 3 * math.sqrt(2) * 0.5e-4 + 1e-9  # rounding bound, sources: rounding
        assert got.g == (3 if want.ccw else 2)


def test_vectorized_numbers_equal_python_fixed_point_formatting():
    # reference: Python's own fixed-point formatting, trailing zeros trimmed
    rng = np.random.default_rng(3)
    n = 5000
    x = rng.uniform(-2e4, 2e4, n) * rng.choice([1, 1e-3, 1e-6], n)
    x[:4] = [0.0, -0.0, -0.00004, 123.0]
    y = np.arange(n) + 0.5
    start = np.column_stack([np.r_[0.0, x[:-1]], np.r_[0.0, y[:-1]], np.zeros(n)])
    end = np.column_stack([x, y, np.zeros(n)])
    tp = Toolpath(np.full(n, RAPID), start, end, np.zeros((n, 2)), np.zeros(n), info={"safe_height": 0.0})
    for d in (4, 7):
        text = gcode_text(tp, decimals=d)
        xs = [ln.split()[1] for ln in text.splitlines() if ln.startswith("G0 X")][1:]

        def ref(v):
            s = f"{v:.{d}f}".rstrip("0").rstrip(".")
            return "0" if s in ("-0", "") else s

        want = []
        last = ref(0.0)
        for v in x:
            if ref(v) != last:
                want.append("X" + ref(v))
            last = ref(v)
        assert xs[: len(want)] == want[: len(xs)]
        assert len(xs) == len(want)


# --------------------------------------------------------------------------- errors
def _tp(moves, **kw):
    kw.setdefault("info", {"safe_height": 5.0})
    return Toolpath.from_moves(moves, **kw)


@pytest.mark.parametrize(
    "moves, match",
    [
        ([], "no moves"),
        ([Line((0, 0, 0), (1, 0, 0), 100.0), Line((2, 0, 0), (3, 0, 0), 100.0)], "move 1 starts at .* the toolpath has a gap"),
        ([Line((0, 0, 0), (1, 0, 0), 0.0)], "move 0 is a cutting move with feed 0"),
        ([Arc((0, 0, 0), (10, 0, 0), (4, 3), True, 100.0)], r"arc move 0: start radius .* differ by more than 0.002 mm"),
        ([Line((0, 0, 0), (2e6, 0, 0), 100.0)], "beyond"),
        ([Line((0, 0, 0), (1, 0, 0), 0.01)], "move 0: feed 0.01 mm/min rounds to 0"),
    ],
)
def test_unsafe_toolpaths_are_refused(moves, match):
    with pytest.raises(ExportError, match=match):
        gcode_text(_tp(moves))


def test_bad_options_are_refused():
    tp = _tp([Line((0, 0, 0), (1, 0, 0), 100.0)])
    with pytest.raises(InputError, match="decimals=3 must be a whole number from 4 to 8 for mm"):
        gcode_text(tp, decimals=3)
    with pytest.raises(InputError, match="decimals=9"):
        gcode_text(tp, decimals=9)
    with pytest.raises(InputError, match="decimals=True"):
        gcode_text(tp, decimals=True)
    with pytest.raises(InputError, match="spindle_speed must be a finite number > 0"):
        gcode_text(tp, spindle_speed=-100)
    with pytest.raises(InputError, match="spindle_speed must be a number"):
        gcode_text(tp, spindle_speed="fast")
    with pytest.raises(InputError, match="toolpath must be a pathgen Toolpath, got list"):
        gcode_text([])


def test_line_numbers_stop_at_five_digits():
    n = 100_000
    x = np.arange(1, n + 1, dtype=float)
    start = np.column_stack([x - 1, np.zeros(n), np.zeros(n)])
    end = np.column_stack([x, np.zeros(n), np.zeros(n)])
    tp = Toolpath(np.full(n, LINE), start, end, np.zeros((n, 2)), np.full(n, 100.0), info={"safe_height": 0.0})
    with pytest.raises(ExportError, match=r"line numbers stop at N99999 \(5 digits"):
        gcode_text(tp, line_numbers=True)
    assert gcode_text(tp).count("\nG1 X") == n  # without numbers it is fine


def test_header_states_the_facts_and_the_caution():
    tp = _tp(_with_approach(_circle_arcs(10, 4)), tool_diameter=6.0, side="outside", tolerance=0.01,
             deviation=0.0042, time=83.4, info={"safe_height": 5.0, "direction": "climb", "passes": 2, "depth": 4.0})
    text = gcode_text(tp, program_name="bracket (left)", source="parts/bracket.csv")
    head = [ln for ln in text.splitlines() if ln.startswith("(")]
    joined = "\n".join(head)
    assert "(pathgen program: bracket [left])" in joined  # no nested parentheses (§3.3.4)
    assert "input: parts/bracket.csv" in joined
    assert "units: mm" in joined
    assert "tool diameter: 6 mm, side: outside, direction: climb" in joined
    assert "chord tolerance: 0.01 mm, measured deviation: 0.0042 mm" in joined
    assert "motion blocks: " in joined and ";" not in joined  # ";" opens a line comment in some senders
    assert "estimated cycle time: 1 min 23.4 s" in joined
    assert "passes: 2" in joined and "safe height: 5 mm" in joined
    assert "Verify every program by simulation or an air cut" in joined
    assert "local safety rules" in joined
    first_code = text.splitlines().index("G21 G90 G17 G94 G40")
    assert first_code == len(head)  # header first, then the preamble


# --------------------------------------------------------------------------- the main job, end to end
@pytest.mark.parametrize("side, moves", [("outside", "arcs"), ("inside", "lines"), ("on", "arcs")])
def test_real_toolpath_replays_beside_the_contour(side, moves):
    from scipy.spatial import cKDTree

    from pathgen.checks.machine import Cut, Tool
    from pathgen.path.build import make_toolpath

    a, b, r, tol = 40.0, 25.0, 3.0, 0.01
    t = np.linspace(0, 2 * np.pi, 120, endpoint=False)
    contour = fit(np.column_stack([a * np.cos(t), b * np.sin(t)]), closed=True)
    tool = Tool(2 * r if side != "on" else 0.0)
    tp = make_toolpath(contour, tool, Cut(side=side, tolerance=tol, feed=1500.0), moves=moves,
                       depth=2.0, step_down=1.0)
    prog = gr.read(gcode_text(tp))  # every NISTIR 6556 rule the reader knows
    off = 0.0 if side == "on" else r
    zcut = min(m.end[2] for m in prog.moves)
    tree = cKDTree(_dense(contour, 400_000))
    rounding = 1e-4  # a few half-units of the 4th decimal
    follow_len = 0.0
    for m in prog.moves:
        if m.g == 0 or m.start[2] != zcut or m.end[2] != zcut:
            continue
        pts = gr.sample(m, 0.05)[:, :2]
        d, _ = tree.query(pts)
        # the tool never cuts into the part: distance >= offset - tolerance (leads stay on the tool side)
        assert d.min() >= off - tol - rounding
        ends, _ = tree.query(pts[[0, -1]])
        if np.all(np.abs(ends - off) <= tol):  # a move along the contour (not a lead)
            assert np.max(np.abs(d - off)) <= tol + rounding
            follow_len += np.sum(np.hypot(*np.diff(pts, axis=0).T))
    # Steiner (handbook): the offset of a convex closed curve by r has length P + 2πr (outside)
    # or P - 2πr (inside); the ellipse perimeter is 4a·E(1 - b²/a²) (scipy.special.ellipe)
    from scipy.special import ellipe

    perimeter = 4 * a * ellipe(1 - b * b / (a * a))
    want = perimeter + {"outside": 2 * np.pi * r, "inside": -2 * np.pi * r, "on": 0.0}[side]
    assert follow_len == pytest.approx(want, rel=2e-3)


def test_approach_reaches_the_first_move_start_whatever_its_height():
    # the replayed program must start the first move where the toolpath says it starts
    for z0 in (-1.0, 5.0, 8.0):
        tp = _tp([Line((3, 4, z0), (13, 4, z0), 400.0)])
        moves = gr.read(gcode_text(tp)).moves
        first_cut = [m for m in moves if m.end == (13.0, 4.0, z0)][0]
        assert first_cut.start == (3.0, 4.0, z0)
        assert moves[0].end[2] == 5.0  # straight up to the safe height first


def test_non_finite_values_never_reach_the_program():
    tp = _tp([Line((0, 0, 0), (1, 0, 0), 100.0)])
    # Toolpath refuses NaN itself; force one past it to check the writer's own guard
    bad = tp.end.copy()
    bad[0, 0] = np.nan
    object.__setattr__(tp, "end", bad)
    with pytest.raises(ExportError, match="NaN or infinite values"):
        gcode_text(tp)
