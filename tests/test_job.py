"""The options object: every option checked once, lengths converted to mm
and angles to radians once, the same job whether the options come as an
object or as keywords, and ``corner_angle=None`` meaning one thing."""

from __future__ import annotations

import dataclasses
import math
from pathlib import Path

import numpy as np
import pytest

from pathgen import InputError
from pathgen.job import DEFAULT_CORNER_ANGLE, DEFAULT_TOLERANCE, JobOptions
from pathgen.pipeline import run

ROOT = Path(__file__).resolve().parent.parent
PLATE = ROOT / "samples" / "plate.csv"  # 8 vertices, each turning by 90 degrees
# 1 in = 25.4 mm exactly (International Yard and Pound Agreement, 1959; NIST
# Special Publication 811, Guide for the Use of the International System of
# Units, 2008, appendix B.8)
IN = 25.4


def cam():
    # an invented three-lobed cam, about 60 x 48 mm
    th = np.linspace(0, 2 * np.pi, 120, endpoint=False)
    r = 30 + 4 * np.cos(3 * th)
    return np.c_[r * np.cos(th), 0.8 * r * np.sin(th)]


LENGTHS = ("tool_diameter", "depth", "step_down", "safe_height", "lead_length", "retract_height", "overlap",
           "join_gap", "tab_spacing", "tab_width", "tab_height", "smooth", "tolerance")
FEEDS = ("feed", "plunge_feed")


def test_inch_lengths_feeds_and_acceleration_become_mm_once():
    given = {name: 0.1 + 0.01 * i for i, name in enumerate(LENGTHS + FEEDS + ("accel",))}
    o = JobOptions.from_user(units="inch", seam=(1.5, -2.25), **given)
    for name, value in given.items():
        assert getattr(o, name) == value * IN, name  # the one multiplication, exact as floats go
    assert o.seam == (1.5 * IN, -2.25 * IN)
    assert o.units == "inch" and o.scale == IN
    mm = JobOptions.from_user(units="mm", **given)
    for name, value in given.items():
        assert getattr(mm, name) == value, name


def test_angles_become_radians():
    # radians = degrees * pi / 180 (definition of the radian)
    o = JobOptions.from_user(ramp_angle=3, corner_angle=30)
    assert o.ramp_angle == pytest.approx(3 * math.pi / 180, rel=1e-15)
    assert o.corner_angle == pytest.approx(math.pi / 6, rel=1e-15)
    assert JobOptions.from_user().corner_angle == pytest.approx(math.radians(DEFAULT_CORNER_ANGLE), rel=1e-15)
    assert JobOptions.from_user().corner_angle_degrees == DEFAULT_CORNER_ANGLE == 40.0


def test_defaults_are_the_documented_ones():
    o = JobOptions.from_user()
    assert (o.units, o.units_given, o.side, o.moves, o.lead, o.direction, o.entry, o.compensation) == (
        "mm", False, "outside", "arcs", "arc", "climb", "plunge", "computed")
    assert o.tolerance == DEFAULT_TOLERANCE == 0.01 and o.smooth == "auto"
    assert o.tool_diameter is None and o.depth is None and o.ramp_angle is None
    # inch jobs keep the same default tolerance length (0.01 mm)
    assert JobOptions.from_user(units="inch").tolerance == 0.01
    assert JobOptions.from_user().given() == {}
    assert JobOptions.from_user(units="inch", tool_diameter=0.25).given() == {
        "units": "inch", "units_given": True, "tool_diameter": 0.25 * IN}


def test_frozen():
    o = JobOptions.from_user(tool_diameter=6)
    with pytest.raises(dataclasses.FrozenInstanceError):
        o.tool_diameter = 3


@pytest.mark.parametrize("kw, message", [
    ({"side": "under"}, r"side='under' is not one of: 'outside', 'inside', 'on'"),
    ({"moves": "spline"}, r"moves='spline' is not one of: 'arcs', 'lines'"),
    ({"lead": "loop"}, r"lead='loop' is not one of"),
    ({"direction": "forward"}, r"direction='forward' is not one of: 'climb', 'conventional'"),
    ({"entry": "drill"}, r"entry='drill' is not one of: 'plunge', 'ramp', 'helix'"),
    ({"compensation": "both"}, r"compensation='both' is not one of"),
    ({"units": "cm"}, r"units='cm' is not one of: 'mm', 'inch'"),
    ({"closed": "no"}, r"closed must be True, False or None, got 'no'"),
    ({"smooth": "strong"}, r"smooth='strong' is not one of: 'auto', 'off'"),
    ({"smooth": -1}, r"smooth must be a finite number > 0, got -1"),
    ({"ramp_angle": 50}, r"ramp angle must be at most 45 degrees, got 50"),
    ({"ramp_angle": 0}, r"ramp angle must be a finite number > 0, got 0"),
    ({"corner_angle": 200}, r"corner angle must be below 180 degrees, got 200"),
    ({"corner_angle": -5}, r"corner angle must be a finite number > 0, got -5"),
    ({"tolerance": 0}, r"tolerance must be a finite number > 0, got 0"),
    ({"tool_diameter": "six"}, r"tool diameter must be a number, got 'six'"),
    ({"depth": math.inf}, r"depth must be a finite number > 0, got inf"),
    ({"overlap": -1}, r"overlap must be a finite number >= 0, got -1"),
    ({"seam": (1,)}, r"seam must be two numbers x,y, got \(1,\)"),
    ({"seam": (1, math.nan)}, r"seam must be finite"),
    ({"flutes": 2}, r"needs both flutes \(--flutes\) and chip load \(--chip-load\)"),
    ({"flutes": 2, "chip_load": 0.05}, r"needs the spindle speed \(--spindle-speed\)"),
    ({"flutes": 2.5, "chip_load": 0.05, "spindle_speed": 1000}, r"flutes must be a whole number from 1 to 100"),
    ({"compensation": "machine"}, r"cutter compensation at the control \(--compensation machine\) needs a tool"),
    ({"compensation": "machine", "tool_diameter": 6, "side": "on"}, r"needs a tool diameter and a side outside"),
])
def test_each_bad_option_is_refused_with_its_message(kw, message):
    with pytest.raises(InputError, match=message):
        JobOptions.from_user(**kw)


def test_chip_load_feed_is_checked_and_kept_in_mm():
    o = JobOptions.from_user(units="inch", flutes=2, chip_load=0.002, spindle_speed=12000)
    assert o.flutes == 2 and o.chip_load == 0.002 * IN and o.feed is None
    o = JobOptions.from_user(feed=500)
    assert o.feed == 500 and o.flutes is None and o.chip_load is None


@pytest.mark.parametrize("units, scale", [("mm", 1.0), ("inch", IN)])
def test_options_object_and_keywords_make_the_same_files(tmp_path, units, scale):
    kw = {"closed": True, "units": units, "tool_diameter": 6 / scale, "depth": 2 / scale,
          "step_down": 1 / scale, "entry": "ramp", "ramp_angle": 5, "lead": "line", "seam": (30 / scale, 0)}
    (tmp_path / "a").mkdir(), (tmp_path / "b").mkdir()
    a = run(cam() / scale, gcode=tmp_path / "a" / "p.nc", report=tmp_path / "a" / "p.json", **kw)
    opts = JobOptions.from_user(**kw)
    b = run(cam() / scale, opts, gcode=tmp_path / "b" / "p.nc", report=tmp_path / "b" / "p.json")
    for name in ("p.nc", "p.json", "p.txt"):
        assert (tmp_path / "a" / name).read_bytes() == (tmp_path / "b" / name).read_bytes(), name
    assert a.units == b.units == units
    assert a.toolpath.block_count == b.toolpath.block_count


def test_options_and_keywords_together_are_refused():
    opts = JobOptions.from_user(tool_diameter=6)
    with pytest.raises(InputError, match=r"not both \(got closed, depth beside options=\)"):
        run(cam(), opts, closed=True, depth=2)
    with pytest.raises(InputError, match=r"options must be a JobOptions .* got dict"):
        run(cam(), {"tool_diameter": 6})


def test_a_drawings_declared_units_and_options_built_without_it(tmp_path):
    # DXF $INSUNITS = 1 is inches (the DXF reference, header variables, as
    # ezdxf's documented doc.units writes it)
    from conftest import inch_plate_dxf

    p = inch_plate_dxf(tmp_path / "plate.dxf")
    assert JobOptions.from_user(p).units == "inch"  # read from the drawing
    with pytest.raises(InputError, match=r"declares its units as inch .* the options are in mm"):
        run(p, JobOptions.from_user(tool_diameter=0.25))
    res = run(p, JobOptions.from_user(p, tool_diameter=0.25))
    assert res.units == "inch"


def test_corner_angle_none_means_no_corners_everywhere():
    # The plate's 8 vertices each turn by 90 degrees (its construction in
    # pathgen.demo): above the 40-degree default all are corners.  None and
    # "off" both mean no corner detection, in run as in fit_outline.
    from pathgen.outline import fit_outline
    from pathgen.points import read_points

    assert len(run(PLATE).contour.corners) == 8
    assert len(run(PLATE, corner_angle=DEFAULT_CORNER_ANGLE).contour.corners) == 8
    assert len(run(PLATE, corner_angle=None).contour.corners) == 0
    assert len(run(PLATE, corner_angle="off").contour.corners) == 0
    assert len(fit_outline(read_points(PLATE), corner_angle=None).corners) == 0
    assert JobOptions.from_user(corner_angle=None) == JobOptions.from_user(corner_angle="off")


def test_api_page_runs_as_written(tmp_path, monkeypatch):
    # docs/api.md is a notebook session: every line runs and prints what the page says
    import doctest

    monkeypatch.chdir(tmp_path)  # the example writes cam.nc into the current folder
    result = doctest.testfile(str(ROOT / "docs" / "api.md"), module_relative=False,
                              optionflags=doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE)
    assert result.attempted >= 10 and result.failed == 0
    assert (tmp_path / "cam.nc").is_file()


def test_verify_takes_the_options_object_and_measures_an_inch_program_in_mm(tmp_path):
    # the program pathgen wrote for an inch job, read back against the same
    # options given either way: the same facts; its tolerance is the job's
    # 0.01 mm (the default length in either unit)
    from pathgen.pipeline import verify

    kw = {"closed": True, "units": "inch", "tool_diameter": 0.25, "depth": 0.08}
    run(cam() / IN, gcode=tmp_path / "p.nc", **kw)
    a, _ = verify(tmp_path / "p.nc", cam() / IN, **kw)
    b, res = verify(tmp_path / "p.nc", cam() / IN, JobOptions.from_user(**kw))
    assert a == b
    assert res.units == "inch" and a["status"] == 0
    assert a["tolerance"] == pytest.approx(0.01, rel=1e-9)
    with pytest.raises(InputError, match=r"verify writes no files \(gcode= was given\)"):
        verify(tmp_path / "p.nc", cam() / IN, gcode=tmp_path / "q.nc", **kw)


def test_the_command_line_builds_the_options_once(monkeypatch, tmp_path):
    # the CLI checks and converts the options once, then hands the object on
    import io

    import pathgen.cli as cli

    built = []
    real = JobOptions.from_user

    def counting(*a, **kw):
        built.append(kw)
        return real(*a, **kw)

    monkeypatch.setattr(cli.JobOptions, "from_user", counting)
    out, err = io.StringIO(), io.StringIO()
    status = cli.main(["gcode", str(PLATE), "--tool-diameter", "3", "-o", str(tmp_path / "p.nc"), "--quiet"],
                      out=out, err=err)
    # exit 1: the plate's notch has sharp inside corners no round tool can cut
    assert status == 1, err.getvalue()
    assert (tmp_path / "p.nc").is_file()
    assert len(built) == 1 and built[0]["tool_diameter"] == 3.0
    assert built[0]["corner_angle"] == DEFAULT_CORNER_ANGLE  # the command line's default is the API's
