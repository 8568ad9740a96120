"""pathgen's own G-code reader, against programs worked out by hand.

Sources beside the checks:
* Kramer, T.R., Proctor, F.M. & Messina, E., "The NIST RS274/NGC
  Interpreter - Version 3", NISTIR 6556, 2000: numbers without exponents
  (§3.3.2.1), center-format arcs with I, J offsets from the start and the
  0.002 mm / 0.0002 inch radius rule and the worked example (§3.5.3.2),
  units before motion (§3.5.7), G90/G91 distance mode (§3.5.11, section
  number from memory).
* Plane geometry (handbook): a square's side lengths, a circle's radius.
* 1 inch = 25.4 mm exactly (international yard and pound agreement, 1959).
* The independent test interpreter tests/gcode_reader.py (written from the
  same document) as a second reading of the same text.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

import gcode_reader as gr
from pathgen.errors import InputError
from pathgen.verify.reader import read_gcode, read_gcode_file
from pathgen.verify.replay import decimals_for, move_polylines, rounding_bound

PRE = "G21 G90 G17 G94\n"


def test_square_by_hand():
    text = PRE + "G0 X0 Y0 Z5\nG1 Z-1 F200\nG1 X10\nY10\nX0\nY0\nG0 Z5\nM2\n"
    p = read_gcode(text)
    assert p.units == "mm" and p.problems == ()
    np.testing.assert_array_equal(p.kind, [0, 1, 1, 1, 1, 1, 0])
    np.testing.assert_array_equal(p.line, [2, 3, 4, 5, 6, 7, 8])
    corners = p.end[2:6, :2]
    np.testing.assert_array_equal(corners, [[10, 0], [10, 10], [0, 10], [0, 0]])
    # a 10 x 10 square: four sides of 10 mm, back where it started (handbook)
    sides = np.hypot(*(p.end[2:6, :2] - p.start[2:6, :2]).T)
    np.testing.assert_array_equal(sides, 10.0)
    np.testing.assert_array_equal(p.feed[1:6], 200.0)
    assert p.feed[0] == 0.0 and np.isnan(p.start[0]).all()  # where the machine stood is not known


def test_full_circle_as_two_clockwise_halves():
    # (10, 0) -> (-10, 0) about (0, 0), clockwise: through (0, -10); then back through (0, 10)
    text = PRE + "G0 X10 Y0 Z2\nG1 Z-1 F300\nG2 X-10 Y0 I-10 J0\nG2 X10 Y0 I10 J0\nG0 Z2\nM30\n"
    p = read_gcode(text)
    arcs = np.flatnonzero(p.kind == 2)
    assert len(arcs) == 2 and p.problems == ()
    np.testing.assert_array_equal(p.center[arcs], 0.0)
    pts, owner, _ = move_polylines(p.kind[arcs], p.start[arcs], p.end[arcs], p.center[arcs], 0.001)
    np.testing.assert_allclose(np.hypot(*pts.T), 10.0, rtol=0, atol=1e-12)
    assert pts[owner == 0, 1].max() <= 1e-9 and pts[owner == 0, 1].min() == pytest.approx(-10.0, abs=1e-5)
    assert pts[owner == 1, 1].min() >= -1e-9 and pts[owner == 1, 1].max() == pytest.approx(10.0, abs=1e-5)
    # the length of the two halves is the circumference 2*pi*10 (handbook)
    seg = np.hypot(*np.diff(pts[owner == 0], axis=0).T).sum() + np.hypot(*np.diff(pts[owner == 1], axis=0).T).sum()
    assert seg == pytest.approx(20 * math.pi, rel=1e-6)


def test_inch_program_is_read_in_mm():
    # G20: lengths and feeds per minute in inch; 1 inch = 25.4 mm exactly
    text = "G20 G90 G17 G94\nG0 X1 Y2 Z0.2\nG1 Z-0.05 F10\nG3 X0 Y3 I-1 J0\nM2\n"
    p = read_gcode(text)
    assert p.units == "inch" and p.problems == ()
    np.testing.assert_allclose(p.start[2], [25.4, 50.8, -1.27], rtol=0, atol=1e-12)
    np.testing.assert_allclose(p.end[2], [0.0, 76.2, -1.27], rtol=0, atol=1e-12)
    np.testing.assert_allclose(p.center[2], [0.0, 50.8], rtol=0, atol=1e-12)
    np.testing.assert_allclose(p.feed[1:], 254.0)
    # the radius rule is 0.0002 inch in an inch program: 0.00015 passes, 0.0003 does not
    ok = read_gcode("G20 G90 G17 G94\nG0 X1 Y0 Z0\nG2 X-1 Y0.0173 I-1.00015 J0 F10\nM2\n")
    assert ok.problems == ()
    bad = read_gcode("G20 G90 G17 G94\nG0 X1 Y0 Z0\nG2 X-1 Y0.0245 I-1.0003 J0 F10\nM2\n")
    assert [pr.rule for pr in bad.problems] == ["arc radius"]


def test_incremental_moves():
    # G91: each axis word is a step from the current point (NISTIR 6556 distance mode)
    text = PRE + "G0 X5 Y5 Z1\nG91\nG1 Z-2 F100\nX10\nY10\nX-10\nY-10\nG90 G0 Z1\nM2\n"
    p = read_gcode(text)
    np.testing.assert_allclose(p.end[1:6], [[5, 5, -1], [15, 5, -1], [15, 15, -1], [5, 15, -1], [5, 5, -1]])
    assert p.end[-1].tolist() == [5.0, 5.0, 1.0]  # back to absolute
    # I, J are offsets from the start in either mode: a half circle of radius 5
    q = read_gcode(PRE + "G0 X0 Y0 Z0\nG91 G3 X10 Y0 I5 J0 F100\nM2\n")
    assert q.end[-1].tolist() == [10.0, 0.0, 0.0] and q.center[-1].tolist() == [5.0, 0.0]


def test_nist_worked_example_and_the_radius_rule():
    # NISTIR 6556 §3.5.3.2: from (7, 7), G2 X10 Y16 I3 J4 has center (10, 11) and radius 5
    p = read_gcode(PRE + "G0 X7 Y7 Z9\nG2 X10 Y16 I3 J4 F100\nM2\n")
    assert p.center[-1].tolist() == [10.0, 11.0] and p.problems == ()
    # radii differ by 0.0018 mm (under 0.002): fine; by 0.008 mm: a problem, named at its line
    near = read_gcode(PRE + "G0 X7 Y7 Z9\nG2 X10 Y16 I3.003 J4 F100\nM2\n")
    assert abs(math.hypot(3.003, 4) - math.hypot(10 - 10.003, 5)) < 0.002 and near.problems == ()
    far = read_gcode(PRE + "G0 X7 Y7 Z9\nG2 X10 Y16 I3.01 J4 F100\nM2\n")
    assert [(pr.line, pr.rule) for pr in far.problems] == [(3, "arc radius")]
    with pytest.raises(InputError, match=r"line 3: arc start radius 5.006006 .* more than 0.002 mm"):
        read_gcode(PRE + "G0 X7 Y7 Z9\nG2 X10 Y16 I3.01 J4 F100\nM2\n", strict=True)


def test_rule_breaks_the_reader_can_still_interpret():
    text = PRE + "G0 X0 Y0 Z1\nG1 X1.5e1 Z-1\nG1 Y10 F300\nG0 Z1\n"
    p = read_gcode(text)
    rules = [(pr.line, pr.rule) for pr in p.problems]
    # NISTIR 6556 §3.3.2.1: no exponent; a feed move needs a feed; the program needs its end word
    assert rules == [(3, "exponent"), (3, "no feed"), (5, "no end")]
    assert p.end[1].tolist() == [15.0, 0.0, -1.0]
    assert p.feed[1] == 0.0 and p.feed[2] == 300.0
    with pytest.raises(InputError, match="line 3: X1.5e1: exponent notation"):
        read_gcode(text, strict=True)


def test_comments_numbers_and_percent_lines():
    text = "%\n(part: a plate)\nN10 G21 G90 G17 G94 ; set up\nN20 G0 X1 Y2 Z3 (go)\n%\nN30 M2\n%\n"
    p = read_gcode(text)
    assert p.problems == () and p.end.tolist() == [[1.0, 2.0, 3.0]] and p.line.tolist() == [4]


@pytest.mark.parametrize("text, match", [
    (PRE + "G0 X0 Y0 Z0\nG41 G1 X1 F100\nM2\n", r"line 3: G41 is not one pathgen reads"),
    (PRE + "G18\nM2\n", r"line 2: G18 is not one pathgen reads"),  # another plane
    (PRE + "G0 X0 Y0 Z0\nG2 X2 Y0 R1 F100\nM2\n", r"line 3: word R1 is not one pathgen reads"),
    (PRE + "G0 X0 Y0 Z0\nG2 X10 Y0 R5 F100\nM2\n", r"line 3: word R5 .*radius-format arcs are not read"),
    ("G0 X1 Y1 Z1\nG21 G90\nM2\n", r"line 1: motion before the units are set"),
    (PRE + "G0 X0 Y0 Z0\nG21 G0 X2\nG20\nM2\n", r"line 4: the units change"),
    (PRE + "G1 X1 Y1 Z1 F100\nM2\n", r"line 2: G1 from an unknown position"),
    (PRE + "(open comment\nM2\n", r"line 2: comment not closed"),
    (PRE + "G0 X1 X2\nM2\n", r"line 2: two X words"),
    (PRE + "G0 X0 Y0 Z0\nG1 X1 I2 F100\nM2\n", r"line 3: I or J on a move that is not an arc"),
    (PRE + "G0 X#1\nM2\n", r"line 2: "),
])
def test_what_it_cannot_interpret_is_refused_with_the_line(text, match):
    with pytest.raises(InputError, match=match):
        read_gcode(text, source="part.nc")


def test_file_errors(tmp_path):
    with pytest.raises(InputError, match="no such file"):
        read_gcode_file(tmp_path / "none.nc")
    bad = tmp_path / "bin.nc"
    bad.write_bytes(b"G21 G90\nG0 X1\xff\n")
    with pytest.raises(InputError, match=r"bin.nc, line 2: a byte that is not ASCII"):
        read_gcode_file(bad)


def test_same_moves_as_the_independent_test_reader():
    from pathgen.checks.machine import Cut, Tool
    from pathgen.export.gcode import gcode_text
    from pathgen.moves import toolpath_in_units
    from pathgen.path.build import make_toolpath
    from pathgen.spline import fit

    t = np.linspace(0, 2 * np.pi, 90, endpoint=False)
    c = fit(np.c_[40 * np.cos(t), 25 * np.sin(t) + 3 * np.sin(3 * t)], closed=True)
    for units in ("mm", "inch"):
        tp = toolpath_in_units(make_toolpath(c, Tool(6.0), Cut(side="outside"), depth=2.0, step_down=1.0), units)
        text = gcode_text(tp, line_numbers=True, spindle_speed=12000)
        ours = read_gcode(text, strict=True)
        theirs = gr.read(text)
        scale = 25.4 if units == "inch" else 1.0
        assert len(ours) == len(theirs.moves)
        assert ours.kind.tolist() == [m.g for m in theirs.moves]
        assert ours.line.tolist() == [m.line for m in theirs.moves]
        ends = np.array([[np.nan if v is None else v for v in m.end] for m in theirs.moves], float)
        np.testing.assert_allclose(ours.end, ends * scale, rtol=0, atol=1e-9)
        arcs = ours.kind >= 2
        np.testing.assert_allclose(ours.center[arcs], np.array([m.center for m in theirs.moves if m.g >= 2]) * scale,
                                   rtol=0, atol=1e-9)
        np.testing.assert_allclose(ours.feed, np.array([m.feed for m in theirs.moves]) * scale, rtol=1e-12)


# -- decimals against the tolerance -------------------------------------------------
def test_decimals_follow_the_tolerance():
    # rounding may take at most 5 % of the tolerance; never fewer than 4 (mm) or 5 (inch) decimals
    assert [decimals_for(t) for t in (0.1, 0.01, 0.001)] == [4, 4, 5]
    assert decimals_for(0.1, "inch") == 5
    for tol in (0.3, 0.05, 0.01, 0.004, 0.001, 0.0003):
        d = decimals_for(tol)
        assert rounding_bound(d) <= 0.05 * tol or d == 8
        assert d == 4 or rounding_bound(d - 1) > 0.05 * tol  # the fewest that do


@pytest.mark.parametrize("decimals", [4, 5, 6])
def test_rounding_error_of_written_points(decimals, rng):
    # arithmetic: rounding each coordinate to d decimals moves a point by at most
    # half a unit in the last place per axis, sqrt(2)/2 * 10^-d in the plane
    from pathgen.export.gcode import gcode_text
    from pathgen.path.model import LINE, Toolpath

    n = 400
    p = np.cumsum(rng.normal(0, 3, (n + 1, 2)), axis=0)
    z = np.zeros((n, 1)) - 1.0
    tp = Toolpath(np.full(n, LINE), np.hstack([p[:-1], z]), np.hstack([p[1:], z]), np.zeros((n, 2)),
                  np.full(n, 500.0), info={"safe_height": 5.0})
    prog = read_gcode(gcode_text(tp, decimals=decimals), strict=True)
    got = prog.end[prog.kind == 1][1:, :2]  # after the plunge
    err = np.hypot(*(got - p[1:]).T)
    half = 0.5 * 10.0**-decimals
    assert err.max() <= math.sqrt(2) * half * (1 + 1e-9)
    assert err.max() > 0.3 * half  # the rounding is really there (the check can fail)


def test_plain_blocks_and_general_blocks_read_the_same(rng):
    # pathgen's own blocks take a short path through the reader; the same program in
    # lower case with extra spaces takes the general one: the moves must be identical
    from pathgen.export.gcode import gcode_text
    from pathgen.path.model import ARC_CCW, LINE, Toolpath

    n = 300
    p = np.cumsum(rng.normal(0, 4, (n + 1, 2)), axis=0)
    kind = np.where(np.arange(n) % 3 == 0, ARC_CCW, LINE).astype(np.int8)
    mid = 0.5 * (p[:-1] + p[1:])
    chord = p[1:] - p[:-1]
    center = mid + 2.0 * np.c_[-chord[:, 1], chord[:, 0]]  # on the chord's perpendicular: a consistent arc
    z = np.full((n, 1), -1.0)
    tp = Toolpath(kind, np.hstack([p[:-1], z]), np.hstack([p[1:], z]), np.where(kind[:, None] == LINE, 0, center),
                  np.full(n, 700.0), info={"safe_height": 5.0})
    for units in ("mm", "inch"):
        text = gcode_text(tp if units == "mm" else Toolpath(tp.kind, tp.start, tp.end, tp.center, tp.feed,
                                                             units="inch", info=tp.info), line_numbers=True)
        a = read_gcode(text, strict=True)
        b = read_gcode(text.lower().replace(" ", "  "), strict=True)
        for col in ("kind", "start", "end", "center", "feed", "line"):
            np.testing.assert_array_equal(getattr(a, col), getattr(b, col))
        assert a.problems == b.problems == ()


def test_a_framed_program_reads_with_its_frame_words():
    # the frame's words (NISTIR 6556: T and M6 tool change, G43 H length
    # offset, G54 work offset, M4 spindle, M7/M8/M9 coolant, G28 return home;
    # the O line common practice, from memory) move nothing: the moves are
    # those of the same program without them
    body = "G0 Z5\nG0 X10 Y0\nG1 Z-1 F300\nG2 X-10 Y0 I-10 J0 F900\nG0 Z5\n"
    plain = read_gcode(PRE + body + "M2\n")
    framed = read_gcode("%\nO1201\n" + PRE + "T4 M6\nG43 H4\nG54\nS9000 M4\nM8\n" + body + "M9\nM5\nG28\nM30\n%\n")
    assert np.array_equal(plain.kind, framed.kind)
    np.testing.assert_array_equal(plain.end, framed.end)
    np.testing.assert_array_equal(plain.center, framed.center)
