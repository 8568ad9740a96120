"""Stated limits: jobs outside them are refused at once, with the range in
the message (exit 2), instead of running for minutes or failing inside."""

from __future__ import annotations

import io

import numpy as np
import pytest

from pathgen.cli import main
from pathgen.pipeline import MAX_PASSES, MAX_TOLERANCES, SIZE_RANGE, TOLERANCE_MIN


def circle_file(tmp_path, radius, n=60):
    th = np.linspace(0, 2 * np.pi, n, endpoint=False)
    p = tmp_path / "circle.csv"
    np.savetxt(p, np.c_[radius * np.cos(th), radius * np.sin(th)], delimiter=",", header="x,y",
               comments="", fmt="%.12g")
    return p


def call(*args):
    out, err = io.StringIO(), io.StringIO()
    status = main([str(a) for a in args], out=out, err=err)
    return status, out.getvalue(), err.getvalue()


@pytest.mark.parametrize("radius, says", [(1e6, "across; pathgen works on outlines from"),
                                          (1e-6, "across; pathgen works on outlines from")])
def test_circles_far_outside_the_size_range_are_refused(tmp_path, radius, says):
    # a radius-1e6 mm circle ran for minutes; a radius-1e-6 mm one failed
    # with a message about internals
    status, out, err = call("gcode", circle_file(tmp_path, radius), "--closed", "--tool-diameter", "1",
                            "-o", tmp_path / "c.nc")
    assert status == 2 and says in err and err.count("\n") == 1, err
    assert "0.01 mm to 10000 mm" in err
    assert not (tmp_path / "c.nc").exists()


@pytest.mark.parametrize("option, value, says", [
    ("--tolerance", "1e-12", "below the smallest pathgen honours"),
    ("--tolerance", "1e-300", "below the smallest pathgen honours"),
    ("--tolerance", "10", "more than a tenth of the outline's size"),
    ("--tool-diameter", "1e308", "above the largest pathgen accepts"),
    ("--step-down", "1e-9", "passes; pathgen writes at most"),
    ("--depth", "1e6", "above the deepest pathgen accepts"),
])
def test_options_beyond_the_limits_are_refused(tmp_path, option, value, says):
    args = ["gcode", circle_file(tmp_path, 20.0), "--closed", "--tool-diameter", "6", "-o", tmp_path / "c.nc"]
    status, out, err = call(*args, option, value)
    assert status == 2 and says in err and err.count("\n") == 1, err


def test_size_over_tolerance_is_bounded(tmp_path):
    # 8 m across at 0.001 mm is 8e6 tolerances: refused with the coarsest
    # tolerance that would be accepted
    p = circle_file(tmp_path, 2800.0)
    status, out, err = call("check", p, "--closed", "--tolerance", "0.001")
    assert status == 2 and "tolerances" in err, err
    suggested = float(err.split("at least ")[1].split()[0])
    assert suggested == pytest.approx(2800 * 2 * np.sqrt(2) / MAX_TOLERANCES, rel=1e-3)


def test_limits_are_stated_in_inch_for_inch_jobs(tmp_path):
    status, out, err = call("check", circle_file(tmp_path, 200.0), "--closed", "--units", "inch")
    assert status == 2 and "inch across" in err and "393.701 inch" in err, err  # 10 m = 393.701 in


def test_the_limits_themselves():
    assert SIZE_RANGE == (0.01, 10_000.0) and TOLERANCE_MIN == 1e-4 and MAX_PASSES == 1000
    # the default tolerance must fit the whole size range's top end
    assert SIZE_RANGE[1] / 0.01 <= MAX_TOLERANCES


def test_default_tolerance_is_one_length_in_mm_and_inch(tmp_path):
    # 0.01 mm = 0.000393701 inch (1 in = 25.4 mm, by definition): an inch job
    # without --tolerance once took 0.01 inch, 25.4 times coarser
    from pathgen.moves import toolpath_in_units
    from pathgen.pipeline import run

    pts = np.loadtxt(circle_file(tmp_path, 20.0), delimiter=",", skiprows=1)
    mm = run(pts, closed=True, tool_diameter=6, gcode=tmp_path / "mm.nc")
    inch = run(pts / 25.4, closed=True, units="inch", tool_diameter=6 / 25.4, gcode=tmp_path / "in.nc")
    assert mm.toolpath.tolerance == pytest.approx(0.01)
    assert inch.toolpath.tolerance == pytest.approx(0.01)  # the toolpath is mm, whatever the job's units
    assert toolpath_in_units(inch.toolpath, "inch").tolerance == pytest.approx(0.01 / 25.4)


def test_a_drawings_units_win_and_a_disagreeing_units_option_is_an_error(tmp_path):
    # a 4 x 3 inch rectangle drawn in an inch drawing ($INSUNITS = 1, DXF
    # reference via ezdxf's documented doc.units): read as inch without
    # --units; --units mm is an error naming both
    from conftest import inch_plate_dxf

    p = inch_plate_dxf(tmp_path / "plate.dxf")
    status, out, err = call("check", p, "--json")
    assert status == 0, err
    import json

    data = json.loads(out)
    assert data["contour"]["units"] == "inch" and data["contour"]["length"] == pytest.approx(14.0)
    assert data["report"]["length"] == pytest.approx(14.0)  # the report in the job's units too
    status, out, err = call("check", p, "--units", "mm")
    assert status == 2 and "declares its units as inch" in err and "units mm" in err
    status, out, err = call("check", p, "--units", "inch", "--quiet")
    assert status == 0
