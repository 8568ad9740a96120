"""Reading and cleaning outline points (pathgen.points).

Outside references: ezdxf writes the DXF files read back here (its own
``add_point`` / ``add_lwpolyline`` / ``add_polyline2d`` calls); the inch is
25.4 mm exactly (international yard and pound agreement, 1959; common
practice); the shoelace formula gives the signed area whose sign is the
orientation (handbook formula); shapely's ``is_simple`` is the reference
for self-crossing.
"""

from __future__ import annotations

import string
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, strategies as st

from pathgen import InputError
from pathgen.points import MERGE_RTOL, Outline, clean_points, read_points

DATA = Path(__file__).parent / "data"

# Each bad file, the expected error (regex) and why the file exists.  The
# same table is written out for people in tests/data/bad/EXPECTED.md.
BAD = [
    ("empty.csv", r"^empty\.csv: no points", "nothing at all"),
    ("header_only.csv", r"^header_only\.csv line 1: a header and no points", "header row only"),
    ("one_point.csv", r"^one_point\.csv: only 1 distinct point \(one_point\.csv line 2",
     "an outline needs two points"),
    ("two_identical.csv", r"only 1 distinct point .*2 given", "a repeat leaves one point"),
    ("nan.csv", r"^nan\.csv line 3: \[nan, 5\.0\] is not a finite number", "NaN"),
    ("inf.csv", r"^inf\.csv line 3: \[10\.0, inf\] is not a finite number", "infinity"),
    ("huge.csv", r"^huge\.csv line 3: coordinate 1e\+308 mm is absurd", "absurd magnitude"),
    ("text_in_numbers.csv", r"^text_in_numbers\.csv line 4: 'abc' is not a number",
     "a word among the numbers"),
    ("random_bytes.csv", r"^random_bytes\.csv line \d+: holds .*not a text file", "binary"),
    ("mixed_separators.csv", r"^mixed_separators\.csv line 3: .*mixed separators",
     "comma lines and a semicolon line"),
    ("decimal_commas.csv", r"^decimal_commas\.csv line 1: .*decimal commas cannot be told",
     "decimal commas with comma separators: ambiguous"),
    ("long_line.csv", r"^long_line\.csv line 2: line is 19999 bytes long", "a runaway line"),
    ("not_a.dxf", r"^not_a\.dxf: not a readable DXF drawing", "text named .dxf"),
    ("no_points.dxf", r"^no_points\.dxf: no POINT, LWPOLYLINE or POLYLINE", "only a line and a circle"),
    ("two_outlines.dxf", r"^two_outlines\.dxf: 2 candidate outlines .*'OUTER'.*'HOLE'.*layer=",
     "two polylines on two layers, no layer named"),
    ("collinear_closed.csv", r"^collinear_closed\.csv: all 4 points .* one straight line",
     "a closed outline with no area"),
    ("missing_value.csv", r"^missing_value\.csv line 3: an empty field is not a number",
     "a line with one value"),
    ("four_columns.csv", r"^four_columns\.csv line 1: 4 values, expected x y",
     "too many columns"),
]


@pytest.mark.parametrize("name, pattern, why", BAD, ids=[b[0] for b in BAD])
def test_bad_file_is_refused_with_file_and_line(name, pattern, why):
    with pytest.raises(InputError, match=pattern) as info:
        read_points(DATA / "bad" / name)
    assert "\n" not in str(info.value)  # one line, printable as it is


def test_bad_corpus_is_complete_and_documented():
    files = {p.name for p in (DATA / "bad").iterdir()} - {"EXPECTED.md"}
    assert files == {b[0] for b in BAD}
    doc = (DATA / "bad" / "EXPECTED.md").read_text()
    for name, _, _ in BAD:
        assert f"`{name}`" in doc


def test_semicolons_decimal_commas_bom_crlf_header():
    o = read_points(DATA / "good" / "semicolon_decimal_comma.csv")
    expect = np.array([[0, 0], [12.5, 0], [12.5, 3.75], [0, 3.75]])
    np.testing.assert_array_equal(o.points, expect)
    assert o.closed and o.units == "mm" and o.source == "semicolon_decimal_comma.csv"
    assert o.line_numbers.tolist() == [2, 3, 4, 5]
    assert any("decimal commas" in s for s in o.steps)
    assert any("header on line 1" in s for s in o.steps)
    assert any("repeats the first" in s for s in o.steps)


def test_tabs_third_column_comments_blank_lines():
    o = read_points(DATA / "good" / "tabs_with_z.txt")
    np.testing.assert_array_equal(o.points, [[0, 0], [20, 0], [20, 10], [0, 10]])
    assert not o.closed
    assert o.line_numbers.tolist() == [2, 3, 5, 6]
    assert any("third column (z)" in s for s in o.steps)
    assert any("skipped 2 comment or blank lines" in s for s in o.steps)


def test_three_comma_values_warn_about_decimal_commas(tmp_path):
    (tmp_path / "xyz.csv").write_text("12,5,3\n14,5,3\n14,7,3\n")
    o = read_points(tmp_path / "xyz.csv")
    np.testing.assert_array_equal(o.points, [[12, 5], [14, 5], [14, 7]])
    assert any("decimal commas" in w and "';'" in w for w in o.warnings)


def test_spaces_with_decimal_commas_and_quotes():
    o = read_points(DATA / "good" / "spaces_decimal_comma.xy")
    np.testing.assert_array_equal(o.points, [[0, 0], [12.5, 0], [12.5, 3.75]])
    q = read_points(DATA / "good" / "quoted.csv")
    np.testing.assert_array_equal(q.points, [[0, 0], [4.5, 1], [9, 0]])


def test_inch_converted_and_clockwise_reversed():
    o = read_points(DATA / "good" / "clockwise_inch.csv", units="inch")
    # 1 inch = 25.4 mm exactly (1959 agreement; common practice)
    np.testing.assert_array_equal(o.points, np.array([[0, 0], [2, 0], [2, 1], [0, 1]]) * 25.4)
    assert o.units == "inch"
    assert "the points ran clockwise: reversed to counter-clockwise" in o.steps
    assert o.line_numbers.tolist() == [1, 4, 3, 2]
    x, y = o.points.T
    # shoelace formula (handbook): positive area means counter-clockwise
    assert 0.5 * np.sum(x * np.roll(y, -1) - y * np.roll(x, -1)) == pytest.approx(2 * 25.4**2)


def test_careful_and_fast_parse_agree(tmp_path, rng):
    pts = rng.uniform(-50, 50, (200, 2))
    plain = "\n".join(f"{float(x)!r},{float(y)!r}" for x, y in pts) + "\n"
    lines = plain.splitlines()
    lines.insert(100, "# a comment in the middle forces the line-by-line pass")
    (tmp_path / "a.csv").write_text(plain)
    (tmp_path / "b.csv").write_text("\n".join(lines) + "\n")
    a = read_points(tmp_path / "a.csv")
    b = read_points(tmp_path / "b.csv")
    np.testing.assert_array_equal(a.points, pts)  # repr round-trips float64 exactly
    np.testing.assert_array_equal(b.points, pts)
    assert b.line_numbers[99] == 100 and b.line_numbers[100] == 102


def test_bad_line_found_after_many_good_lines(tmp_path):
    lines = [f"{i},{i % 7}" for i in range(5000)]
    lines[4321] = "4321,7O"  # letter O for zero
    (tmp_path / "probe.csv").write_text("\n".join(lines))
    with pytest.raises(InputError, match=r"^probe\.csv line 4322: '7O' is not a number$"):
        read_points(tmp_path / "probe.csv")


def test_missing_file_and_layer_on_text(tmp_path):
    with pytest.raises(InputError, match=r"nothere\.csv: no such file"):
        read_points(tmp_path / "nothere.csv")
    (tmp_path / "a.csv").write_text("0,0\n1,1\n")
    with pytest.raises(InputError, match="layer= applies to DXF drawings only"):
        read_points(tmp_path / "a.csv", layer="OUTER")
    with pytest.raises(InputError, match=r"units='cm' is not one of: 'mm', 'inch'"):
        read_points(tmp_path / "a.csv", units="cm")


# -- DXF ------------------------------------------------------------------------


def _drawing(tmp_path, build, units=4):
    import ezdxf

    doc = ezdxf.new("R2010")
    doc.header["$INSUNITS"] = units
    build(doc.modelspace())
    path = tmp_path / "part.dxf"
    doc.saveas(path)
    return path


def test_dxf_points_round_trip(tmp_path, rng):
    pts = rng.uniform(-80, 80, (37, 2))
    path = _drawing(tmp_path, lambda m: [m.add_point((x, y)) for x, y in pts])
    o = read_points(path)
    np.testing.assert_array_equal(o.points, pts)  # drawing order, exact doubles
    assert not o.closed and o.line_numbers is None
    assert "37 POINT entities" in o.steps[0]


def test_dxf_lwpolyline_round_trip_closed_flag(tmp_path, rng):
    th = np.sort(rng.uniform(0, 2 * np.pi, 25))
    pts = np.c_[40 * np.cos(th), 25 * np.sin(th)]  # counter-clockwise
    path = _drawing(tmp_path, lambda m: m.add_lwpolyline(pts, close=True))
    o = read_points(path)
    np.testing.assert_array_equal(o.points, pts)
    assert o.closed
    opened = _drawing(tmp_path, lambda m: m.add_lwpolyline(pts, close=False))
    assert not read_points(opened).closed


def test_dxf_polyline2d_and_layer_choice(tmp_path):
    outer = np.array([[0, 0], [60, 0], [60, 30], [0, 30]], float)
    hole = np.array([[10, 10], [20, 10], [20, 20]], float)

    def build(m):
        m.add_polyline2d(outer, close=True, dxfattribs={"layer": "OUTER"})
        m.add_lwpolyline(hole, dxfattribs={"layer": "HOLE"})

    path = _drawing(tmp_path, build)
    np.testing.assert_array_equal(read_points(path, layer="OUTER").points, outer)
    np.testing.assert_array_equal(read_points(path, layer="HOLE").points, hole)
    with pytest.raises(InputError, match=r"2 candidate outlines .*layer="):
        read_points(path)
    with pytest.raises(InputError, match=r"no points or polylines on layer 'NOPE' "
                                         r"\(layers with outlines: 'HOLE', 'OUTER'\)"):
        read_points(path, layer="NOPE")


def test_dxf_units_mismatch_and_bulges_are_warned(tmp_path):
    path = _drawing(tmp_path, lambda m: m.add_lwpolyline([(0, 0, 0, 0, 0.5), (10, 0), (10, 5)]),
                    units=1)
    o = read_points(path)
    assert any("declares its units as inch" in w for w in o.warnings)
    assert any("bulges" in w for w in o.warnings)


# -- cleaning -------------------------------------------------------------------


def test_near_duplicates_merged_and_reported():
    # full-precision coordinates (more than 9 decimals): the merge distance is
    # MERGE_RTOL x size (a point 1.2e-7 mm from the last one kept is a repeat)
    pts = np.array([[0, 0], [10, 0], [10, 1.234567891234e-7], [10, 10], [0, 10], [0, 10]], float)
    o = clean_points(pts)
    assert o.quantization is None
    np.testing.assert_array_equal(o.points, [[0, 0], [10, 0], [10, 10], [0, 10]])
    assert any(s.startswith("merged 2 repeated points") and "points 2, 5" in s for s in o.steps)
    assert not o.closed
    # a gap of the merge tolerance's size times 10 is kept
    size = np.hypot(10, 10)
    far = pts.copy()
    far[2, 1] = 10 * MERGE_RTOL * size
    assert len(clean_points(far)) == 5


def test_closing_point_marks_closed_and_explicit_closed():
    sq = [[0, 0], [5, 0], [5, 5], [0, 5]]
    assert not clean_points(sq).closed
    o = clean_points(sq, closed=True)
    assert o.closed and len(o) == 4
    assert "closed the outline (from the last point back to the first)" in o.steps


def test_jump_warning_names_the_gap():
    th = np.linspace(0, np.pi, 30)
    arc = np.c_[np.cos(th), np.sin(th)]
    pts = np.vstack([arc[:15], arc[15:] + [40, 0]])
    o = clean_points(pts)
    assert len(o.warnings) == 1
    assert o.warnings[0].startswith("array point 14: a gap of")
    assert "check that the points are in order" in o.warnings[0]
    assert clean_points(arc).warnings == ()
    # with a repeated point merged first, the gap is still named
    o = clean_points(np.vstack([pts[:3], pts[2:]]))
    assert any("merged 1 repeated point" in s for s in o.steps)
    assert len(o.warnings) == 1 and o.warnings[0].startswith("array point 14: a gap of")
    assert "(point 15)" in o.warnings[0]


def test_self_crossing_warned_as_shapely_says():
    import shapely

    bowtie = np.array([[0, 0], [10, 10], [10, 0], [0, 10]], float)
    assert not shapely.is_simple(shapely.linearrings(bowtie))  # the reference
    o = clean_points(bowtie, closed=True)
    assert "array: the closed outline crosses itself" in o.warnings
    assert clean_points(bowtie, closed=True, check_crossing=False).warnings == ()


@pytest.mark.parametrize(
    "points, pattern",
    [
        ([[0, 0], [np.nan, 1]], r"^array point 1: \[nan, 1\.0\] is not a finite"),
        ([[0, 0], [1, np.inf], [2, 2]], r"^array point 1: .*not a finite"),
        ([[0, 0], [2e6, 1]], r"^array point 1: coordinate 2e\+06 mm is absurd"),
        ([[1, 2, 3]], r"shape \(n, 2\), got \(1, 3\)"),
        ([["a", "b"]], r"must be an \(n, 2\) array of numbers"),
        (np.zeros((0, 2)), r"^array: no points$"),
        ([[3, 3], [3, 3]], r"only 1 distinct point"),
        ([[0, 0], [1, 0]], None),
    ],
)
def test_array_input_errors(points, pattern):
    if pattern is None:
        with pytest.raises(InputError, match="closed outline needs at least 3"):
            clean_points(points, closed=True)
        return
    with pytest.raises(InputError, match=pattern):
        clean_points(points)


def test_outline_is_frozen_and_read_only():
    o = clean_points([[0, 0], [1, 0], [1, 1]])
    assert isinstance(o, Outline)
    with pytest.raises(ValueError):
        o.points[0, 0] = 5.0
    with pytest.raises(AttributeError):
        o.closed = True
    assert o.where(1) == "array point 1"


# -- properties -----------------------------------------------------------------

_finite = st.floats(-1e4, 1e4, allow_nan=False, allow_infinity=False)


@given(st.lists(st.tuples(_finite, _finite), min_size=2, max_size=60), st.booleans())
def test_random_points_clean_or_refuse_never_crash(rows, closed):
    try:
        o = clean_points(rows, closed=closed or None)
    except InputError:
        return
    assert np.isfinite(o.points).all() and len(o) >= 2
    step = np.hypot(*np.diff(o.points, axis=0).T)
    assert (step > 0).all()


@given(st.binary(min_size=0, max_size=400), st.integers(0, 399))
def test_junk_bytes_always_input_error(tmp_path_factory, junk, at):
    # a NUL byte somewhere guarantees the bytes are not a points file
    data = junk[:at] + b"\x00" + junk[at:]
    path = tmp_path_factory.mktemp("junk") / "junk.csv"
    path.write_bytes(data)
    with pytest.raises(InputError, match=r"^junk\.csv"):
        read_points(path)


_word = st.text(alphabet=string.ascii_letters, min_size=1, max_size=6)
_num = st.floats(-1e3, 1e3, allow_nan=False).map(repr)


@given(st.lists(st.lists(st.one_of(_num, _word), min_size=1, max_size=4), min_size=1,
                max_size=20), _word, st.sampled_from([",", ";", "\t", " "]))
def test_junk_text_always_input_error(tmp_path_factory, rows, word, sep):
    rows = [list(r) for r in rows]
    rows.append(["1.0", word + "x"])  # a word where a number must be
    text = "\n".join(sep.join(r) for r in rows)
    path = tmp_path_factory.mktemp("junk") / "junk.txt"
    path.write_text(text)
    with pytest.raises(InputError, match=r"^junk\.txt"):
        read_points(path)


def test_inline_comments_in_both_parses(tmp_path):
    body = "0,0  # start\n10,0\n10,5 # probe 3\n"
    (tmp_path / "fast.csv").write_text(body)
    (tmp_path / "slow.csv").write_text("# header comment\n\n" + body)  # blank: careful pass
    for name in ("fast.csv", "slow.csv"):
        o = read_points(tmp_path / name)
        np.testing.assert_array_equal(o.points, [[0, 0], [10, 0], [10, 5]])
    assert read_points(tmp_path / "slow.csv").line_numbers.tolist() == [3, 4, 5]


def test_crowded_points_warned():
    # Two readings 7 µm apart on a circle probed every 1.05 mm, the second
    # 4 µm inside the first: the interpolating curve swings about 0.1 mm
    # wide over several mm (measured against the R 20 circle, handbook
    # geometry), so the reader says where they are.
    from pathgen.outline import fit_outline

    th = np.linspace(0, 2 * np.pi, 120, endpoint=False)
    p = np.c_[20 * np.cos(th), 20 * np.sin(th)]
    along = np.array([-np.sin(th[30]), np.cos(th[30])])
    p = np.insert(p, 31, p[30] + 0.006 * along - 0.004 * p[30] / 20, axis=0)
    o = clean_points(p, closed=True)
    assert len(o.warnings) == 1
    assert o.warnings[0].startswith("array point 30: only 0.007211 mm to the next point (point 31)")
    assert "1/145 of the median spacing" in o.warnings[0]
    c = fit_outline(o)
    swing = np.abs(np.hypot(*c(np.linspace(*c.domain, 20001)).T) - 20.0).max()
    assert swing > 0.05
    # the same circle without the second reading: no warning, no swing
    o = clean_points(np.delete(p, 31, axis=0), closed=True)
    assert o.warnings == ()
    c = fit_outline(o)
    assert np.abs(np.hypot(*c(np.linspace(*c.domain, 20001)).T) - 20.0).max() < 1e-4


def test_notes_on_crowded_points_speak_the_files_units():
    # an inch file: the same crowded pair as in mm, stated in inch (25.4 mm
    # per inch exactly, the international inch of 1959; from memory) and
    # never in exponent notation
    th = np.linspace(0, 2 * np.pi, 120, endpoint=False)
    p = np.c_[20 * np.cos(th), 20 * np.sin(th)] / 25.4
    along = np.array([-np.sin(th[30]), np.cos(th[30])])
    p = np.insert(p, 31, p[30] + 0.00001 * along, axis=0)
    o = clean_points(p, closed=True, units="inch")
    assert len(o.warnings) == 1
    assert o.warnings[0].startswith("array point 30: only 0.00001 inch to the next point (point 31)")
    med = 2 * 20 * np.sin(np.pi / 120) / 25.4  # the chord of a 3° step on R 20 mm, in inch
    assert f"the median spacing {med:.4g} inch" in o.warnings[0]
    assert "e-" not in o.warnings[0]


def test_noise_loops_are_told_from_a_crossing_outline():
    # a ring of 20 000 points 0.0063 mm apart with noise σ = 0.004 mm: the
    # polygon through the points crosses itself in loops a few points long
    # (shapely, the reference, says it is not simple), while the ring it
    # traces does not; a figure-eight (the lemniscate of Gerono, x = sin 2t / 2,
    # y = sin t, crossing at the origin: handbook curve) is found on
    # every step-th point as well
    import shapely

    from pathgen.simple import crossing

    n = 20_000
    th = np.linspace(0, 2 * np.pi, n, endpoint=False)
    p = np.c_[20 * np.cos(th), 20 * np.sin(th)] + np.random.default_rng(4).normal(0, 0.004, (n, 2))
    assert not shapely.is_simple(shapely.linearrings(p))
    c = crossing(p)
    assert c is not None and c.local and c.span <= 4
    assert crossing(p, step=32) is None
    o = clean_points(p, closed=True)
    assert any("cross their own path in" in w and "small loops" in w for w in o.warnings)
    assert not any("the closed outline crosses itself" in w for w in o.warnings)
    t = np.linspace(0, 2 * np.pi, n, endpoint=False) + 0.1
    eight = np.c_[np.sin(2 * t) / 2, np.sin(t)] * 20
    c8 = crossing(eight, step=32)
    assert c8 is not None and not c8.local
    assert np.hypot(c8.x, c8.y) < 0.01

def test_repeats_merged_in_one_pass_as_the_point_by_point_rule_does():
    # Derived (the merge rule itself): a point closer than tol to the last
    # point kept is dropped. The one-pass shortcut for isolated close points
    # must give the same points as the rule applied one point at a time, on
    # dense walks with steps around tol (alternating close and far steps,
    # runs of close steps, close last points).
    from pathgen.points import _merge_repeats

    def by_rule(p, tol):
        keep, last = [True], p[0]
        for q in p[1:]:
            keep.append(bool(np.hypot(*(q - last)) > tol))
            if keep[-1]:
                last = q
        return np.array(keep)

    rng = np.random.default_rng(21)
    for case in range(300):
        n = int(rng.integers(2, 60))
        steps = rng.uniform(0.2, 1.8, n - 1) if case % 3 else np.where(rng.random(n - 1) < 0.5, 0.6, 1.4)
        ang = rng.uniform(0, 2 * np.pi, n - 1)
        p = np.vstack([[0.0, 0.0], np.cumsum(np.c_[steps * np.cos(ang), steps * np.sin(ang)], axis=0)])
        got = _merge_repeats(p, 1.0)
        assert np.array_equal(np.ones(n, bool) if got is None else got, by_rule(p, 1.0))
    # dense points along a gentle curve, every other step short: the shape of
    # a scan written finer than the merge distance (the one-pass case)
    for case in range(50):
        n = int(rng.integers(3, 400))
        steps = np.where(np.arange(n - 1) % 2 == case % 2, rng.uniform(0.3, 0.99, n - 1), rng.uniform(1.01, 1.5, n - 1))
        ang = np.cumsum(rng.normal(0, 0.05, n - 1))
        p = np.vstack([[0.0, 0.0], np.cumsum(np.c_[steps * np.cos(ang), steps * np.sin(ang)], axis=0)])
        got = _merge_repeats(p, 1.0)
        assert got is not None and np.array_equal(got, by_rule(p, 1.0))
    # runs of 1 to 4 short steps (0.55-0.99) between longer ones: every other
    # point of a run goes, as long as the points around it lie apart
    for case in range(100):
        pattern = np.concatenate([np.r_[np.full(int(rng.integers(1, 5)), 0.0), 1.0] for _ in range(40)])
        steps = np.where(pattern == 0.0, rng.uniform(0.55, 0.99, len(pattern)), rng.uniform(1.01, 1.6, len(pattern)))
        ang = np.cumsum(rng.normal(0, 0.3 if case % 2 else 0.02, len(pattern)))
        p = np.vstack([[0.0, 0.0], np.cumsum(np.c_[steps * np.cos(ang), steps * np.sin(ang)], axis=0)])
        assert np.array_equal(_merge_repeats(p, 1.0), by_rule(p, 1.0))
