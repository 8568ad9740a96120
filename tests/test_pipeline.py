"""pathgen.run and run_batch: the stages wired end to end.

The programs written are replayed by the tests' own G-code reader
(tests/gcode_reader.py, written from NISTIR 6556) and compared with
geometry from outside the project: a circle's curvature 1/R and its
offset, a concentric circle of radius R + r (offset curves: Farouki &
Neff 1990; sources: farouki-neff-1990).
"""

from __future__ import annotations

import math
import shutil
from pathlib import Path

import numpy as np
import pytest

import gcode_reader
from pathgen import InputError, PathgenError
from pathgen.pipeline import Result, contour_facts, run, run_batch

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "samples"
BAD = ROOT / "tests" / "data" / "bad"


def circle(radius, n=180):
    th = np.linspace(0.0, 2 * np.pi, n, endpoint=False)
    return np.c_[radius * np.cos(th), radius * np.sin(th)]


def cutting_points(program_text: str, step: float = 0.05):
    """Replay a program; sample points of the feed moves at the deepest z."""
    prog = gcode_reader.read(program_text)
    moves = [m for m in prog.moves if m.g in (1, 2, 3)]
    zmin = min(m.end[2] for m in moves)
    pts = [gcode_reader.sample(m, step) for m in moves if m.start[2] == zmin and m.end[2] == zmin]
    return prog, np.vstack(pts)


def test_contour_facts_on_a_circle():
    # Handbook: a circle of radius R has curvature 1/R and length 2*pi*R.
    from pathgen.spline import fit

    f = contour_facts(fit(circle(20.0), closed=True))
    assert f["closed"] and f["points"] == 180
    np.testing.assert_allclose(f["length"], 2 * np.pi * 20.0, rtol=1e-7)
    # curvature is a second derivative: error <= (3/8) h^2 max|f^(4)| (Hall &
    # Meyer 1976; the derivative constant from memory), here h = 0.70 mm on
    # R = 20: relative bound (3/8) h^2 / R^2 = 4.6e-4
    np.testing.assert_allclose(f["min_radius"], 20.0, rtol=5e-4)
    np.testing.assert_allclose(np.hypot(*f["min_radius_at"]), 20.0, rtol=1e-6)


def test_circle_outside_program_follows_the_offset_circle(tmp_path):
    R, D, tol = 20.0, 6.0, 0.01
    res = run(circle(R), closed=True, tool_diameter=D, tolerance=tol, gcode=tmp_path / "c.nc",
              report=tmp_path / "c.report.json")
    assert isinstance(res, Result) and res.status == 0 and not res.tool_cannot_reach
    assert res.files["gcode"] == tmp_path / "c.nc"
    prog, pts = cutting_points((tmp_path / "c.nc").read_text())
    assert prog.units == "mm" and prog.ended
    dist = np.hypot(pts[:, 0], pts[:, 1])
    r_off = R + D / 2  # offset of a circle: concentric, radius R + r
    # never gouges the part: the tool center stays at least r from it
    # (the spline through 180 points is itself within ~1e-6 of the circle)
    assert dist.min() >= r_off - tol - 1e-5
    # and the cut itself is the offset circle within the chord tolerance
    # (leads lie outside it, on the tool side)
    on = np.abs(dist - r_off) <= tol + 1e-5
    assert on.mean() > 0.8
    assert res.toolpath.deviation <= tol


def test_inch_units_convert_at_the_boundary(tmp_path):
    # 25.4 mm per inch exactly (international inch, 1959; common practice).
    R, D = 1.0, 0.25
    res = run(circle(R), closed=True, units="inch", tool_diameter=D, tolerance=0.0005,
              gcode=tmp_path / "c.nc")
    np.testing.assert_allclose(res.facts["length"], 2 * np.pi * 25.4, rtol=1e-6)
    prog, pts = cutting_points((tmp_path / "c.nc").read_text(), step=0.002)
    assert prog.units == "inch"
    dist = np.hypot(pts[:, 0], pts[:, 1])
    assert dist.min() >= R + D / 2 - 0.0005 - 1e-6
    assert np.mean(np.abs(dist - (R + D / 2)) <= 0.0005 + 1e-6) > 0.8


def test_same_input_same_bytes(tmp_path):
    a, b = tmp_path / "a", tmp_path / "b"
    a.mkdir(), b.mkdir()
    for d in (a, b):
        run(SAMPLES / "bracket.csv", tool_diameter=6, gcode=d / "p.nc", report=d / "p.report.json")
    for name in ("p.nc", "p.report.json"):
        if (a / name).exists():
            assert (a / name).read_bytes() == (b / name).read_bytes(), name


def test_existing_output_is_refused_before_anything_is_written(tmp_path):
    (tmp_path / "p.report.json").write_text("keep me")
    with pytest.raises(PathgenError, match=r"p\.report\.json already exists.*--force"):
        run(circle(10.0), tool_diameter=3, gcode=tmp_path / "p.nc", report=tmp_path / "p.report.json")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["p.report.json"]
    assert (tmp_path / "p.report.json").read_text() == "keep me"


def test_force_overwrites(tmp_path):
    (tmp_path / "p.nc").write_text("old")
    run(circle(10.0), tool_diameter=3, gcode=tmp_path / "p.nc", force=True)
    assert (tmp_path / "p.nc").read_text().rstrip().endswith(("M2", "M30"))


def test_bad_input_leaves_no_file(tmp_path):
    with pytest.raises(InputError, match=r"nan\.csv line 3"):
        run(BAD / "nan.csv", tool_diameter=6, gcode=tmp_path / "p.nc", report=tmp_path / "p.report.json")
    assert list(tmp_path.iterdir()) == []


@pytest.mark.parametrize(
    "kwargs, message",
    [
        ({"moves": "curves"}, r"moves='curves' is not one of"),
        ({"side": "left"}, r"side='left' is not one of"),
        ({"lead": "spiral"}, r"lead='spiral' is not one of"),
        ({"units": "cm"}, r"units='cm' is not one of"),
        ({"tolerance": 0}, r"tolerance must be a finite number > 0"),
        ({"tool_diameter": -6}, r"tool diameter must be a finite number >= 0"),
        ({"seam": (1.0,)}, r"seam must be two numbers"),
        ({"seam": (math.nan, 0.0)}, r"seam must be finite"),
        ({"accel": math.inf}, r"accel must be a finite number > 0"),
        ({"feed": "fast"}, r"feed must be a number"),
    ],
)
def test_bad_options(kwargs, message):
    with pytest.raises(InputError, match=message):
        run(circle(10.0), **kwargs)


def test_a_program_cutting_beside_the_line_needs_a_tool(tmp_path):
    with pytest.raises(InputError, match="needs the tool diameter"):
        run(circle(10.0), gcode=tmp_path / "p.nc")
    assert list(tmp_path.iterdir()) == []
    # on the line, no tool is needed: the path is the contour itself
    res = run(circle(10.0), side="on", gcode=tmp_path / "p.nc")
    _, pts = cutting_points((tmp_path / "p.nc").read_text())
    assert np.mean(np.abs(np.hypot(pts[:, 0], pts[:, 1]) - 10.0) <= 0.01 + 1e-5) > 0.8
    assert res.toolpath.tool_diameter == 0


def test_unknown_points_file_kind(tmp_path):
    with pytest.raises(InputError, match=r"router\.toml: unknown kind of points file"):
        run(SAMPLES / "router.toml")


def test_timings_name_every_stage_that_ran(tmp_path):
    res = run(circle(10.0), tool_diameter=3, gcode=tmp_path / "p.nc")
    assert {"read", "fit", "toolpath", "gcode"} <= set(res.timings)
    assert all(v >= 0 for v in res.timings.values())
    res = run(circle(10.0))
    assert "toolpath" not in res.timings and res.toolpath is None and res.files == {}


# -- batch ------------------------------------------------------------------------
@pytest.fixture
def mixed_folder(tmp_path):
    d = tmp_path / "parts"
    d.mkdir()
    for name in ("bracket.csv", "profile.csv"):
        shutil.copy(SAMPLES / name, d / name)
    for name in ("nan.csv", "empty.csv", "not_a.dxf"):
        shutil.copy(BAD / name, d / name)
    (d / "notes.md").write_text("not a points file: ignored")
    return d


@pytest.mark.parametrize("jobs", [1, 2])
def test_batch_good_and_bad(mixed_folder, tmp_path, jobs):
    out = tmp_path / "out"
    ticks = []
    rows = run_batch(mixed_folder, out, jobs=jobs, tool_diameter=6,
                     progress=lambda done, total: ticks.append((done, total)))
    # file-name order whatever the finishing order
    assert [r["file"] for r in rows] == ["bracket.csv", "empty.csv", "nan.csv", "not_a.dxf", "profile.csv"]
    assert ticks[-1] == (5, 5) and len(ticks) == 5
    by = {r["file"]: r for r in rows}
    for bad in ("empty.csv", "nan.csv", "not_a.dxf"):
        assert by[bad]["exit"] == 2 and by[bad]["status"] == "error"
        assert bad in by[bad]["message"]
    for good in ("bracket", "profile"):
        row = by[f"{good}.csv"]
        assert row["exit"] == 0 and row["blocks"] > 0 and row["length"] > 0  # a 6 mm tool reaches both
        text = (out / f"{good}.nc").read_text()
        assert text.rstrip().endswith(("M2", "M30"))
    assert not (out / "nan.nc").exists() and not (out / "empty.nc").exists()
    assert not list(out.glob(".*"))  # no temporary files left


def test_batch_same_stem_twice(tmp_path):
    d = tmp_path / "parts"
    d.mkdir()
    shutil.copy(SAMPLES / "plate.csv", d / "part.csv")
    np.savetxt(d / "part.txt", circle(15.0), fmt="%.4f")
    rows = run_batch(d, tmp_path / "out", jobs=1, tool_diameter=3, side="on")
    # on the line nothing is out of the tool's reach: both files are done (exit 0)
    assert [r["exit"] for r in rows] == [0, 0], rows
    assert (tmp_path / "out" / "part_csv.nc").exists() and (tmp_path / "out" / "part_txt.nc").exists()


def test_batch_bad_arguments(tmp_path):
    with pytest.raises(InputError, match="no such folder"):
        run_batch(tmp_path / "missing", tmp_path / "out")
    with pytest.raises(InputError, match="jobs must be a whole number"):
        run_batch(tmp_path, tmp_path / "out", jobs=0)


def test_facts_come_from_the_report_when_checked():
    # circle of radius 20: handbook curvature 1/R, length 2*pi*R
    res = run(circle(20.0), closed=True, tool_diameter=6)
    assert res.report is not None
    f = res.facts
    assert f["min_radius"] == res.report.min_radius.radius
    np.testing.assert_allclose(f["min_radius"], 20.0, rtol=5e-4)  # bound as in test_contour_facts_on_a_circle
    np.testing.assert_allclose(f["length"], 2 * np.pi * 20.0, rtol=1e-7)
    # a polygon's edges are straight: no finite radius
    from pathgen.pipeline import contour_facts
    from pathgen.outline import fit_outline

    square = fit_outline([[0, 0], [10, 0], [10, 10], [0, 10]], closed=True)
    g = contour_facts(square)
    assert g["min_radius"] == math.inf and g["min_radius_at"] is None and g["corners"] == 4


def test_an_impossible_cut_is_an_error_and_writes_nothing(tmp_path):
    # A circle of radius 5 cut inside with a 20 mm tool: nothing can be cut
    # (the inward offset of a circle by d > R is empty; sources: steiner).
    with pytest.raises(PathgenError, match="empty|cannot"):
        run(circle(5.0), closed=True, side="inside", tool_diameter=20, gcode=tmp_path / "p.nc",
            report=tmp_path / "p.report.json")
    assert list(tmp_path.iterdir()) == []
