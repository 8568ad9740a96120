"""The same part in mm and in inch: every length and time agrees within
rounding, and the programs trace the same geometry (read back from their
text by the tests' own interpreter, inch converted with 1 in = 25.4 mm,
exact by definition since 1959)."""

from __future__ import annotations

import json
import re

import numpy as np
import pytest
import gcode_reader as gr
from pathgen.pipeline import run

IN = 25.4
STEP = 0.01  # mm between samples of the read-back paths


def _part():
    # an invented three-lobed cam, 60 x 48 mm
    th = np.linspace(0, 2 * np.pi, 120, endpoint=False)
    r = 30 + 4 * np.cos(3 * th)
    return np.c_[r * np.cos(th), 0.8 * r * np.sin(th)]


@pytest.fixture(scope="module")
def jobs(tmp_path_factory):
    d = tmp_path_factory.mktemp("inch")
    p = _part()
    mm = run(p, closed=True, tool_diameter=6, depth=2, step_down=1, gcode=d / "mm.nc", report=d / "mm.report.json")
    inch = run(p / IN, closed=True, units="inch", tool_diameter=6 / IN, depth=2 / IN, step_down=1 / IN,
               gcode=d / "in.nc", report=d / "in.report.json")
    return {k: (json.loads((d / f"{k}.report.json").read_text()), (d / f"{k}.nc").read_text(), res)
            for k, res in (("mm", mm), ("in", inch))}


@pytest.mark.parametrize("key, power", [
    ("length", 1), ("area", 2), ("path_length", 1), ("largest_tool_diameter", 1),
    ("cycle_time", 0), ("naive_time", 0), ("max_constant_feed", 1),
])
def test_report_figures_agree(jobs, key, power):
    a, b = jobs["mm"][0][key], jobs["in"][0][key]
    assert b * IN ** power == pytest.approx(a, rel=1e-6)


def test_report_units_and_radii(jobs):
    a, b = jobs["mm"][0], jobs["in"][0]
    assert a["units"]["length"] == "mm" and b["units"]["length"] == "in"
    assert b["min_radius"]["radius"] * IN == pytest.approx(a["min_radius"]["radius"], rel=1e-6)
    assert b["cut"]["tolerance"] * IN == pytest.approx(a["cut"]["tolerance"], rel=1e-6)  # 0.01 mm both
    ta, tb = a["toolpath"], b["toolpath"]
    for key in ("depth", "safe_height", "lead_in_length", "lead_out_length"):
        assert tb[key] * IN == pytest.approx(ta[key], rel=1e-9), key
    assert ta["passes"] == tb["passes"] == 2


def _cutting_path(text, scale):
    prog = gr.read(text)
    pts = [gr.sample(m, STEP / scale) for m in prog.moves if m.g in (1, 2, 3) and m.start[0] is not None]
    xyz = np.vstack(pts) * scale
    return xyz[xyz[:, 2] < -0.5]  # the passes below the stock top (both at -1 and -2 mm)


def test_programs_trace_the_same_geometry(jobs):
    # each program is within the tolerance (0.01 mm) of the same tool-center
    # curve, so the two lie within twice that of each other, plus rounding
    a = _cutting_path(jobs["mm"][1], 1.0)
    b = _cutting_path(jobs["in"][1], IN)
    assert "G21" in jobs["mm"][1] and "G20" in jobs["in"][1]
    from scipy.spatial import cKDTree

    for z in (-1.0, -2.0):
        pa = a[np.isclose(a[:, 2], z, atol=1e-3), :2]
        pb = b[np.isclose(b[:, 2], z, atol=1e-3), :2]
        # two-sided distance between the sampled paths (k-d tree, scipy),
        # plus the sampling step the nearest sample can be off by
        gap = max(cKDTree(pb).query(pa)[0].max(), cKDTree(pa).query(pb)[0].max())
        assert len(pa) > 1000 and len(pb) > 1000
        assert gap <= 2 * 0.01 + STEP + 0.001


def test_inch_part_program_header_speaks_inch(tmp_path):
    # a drawing in inch ($INSUNITS 1, the DXF header's unit code): a square
    # plate with a round hole; every figure in the program's header is in
    # inch, none in mm (the unit is said once, in the units line)
    import ezdxf

    doc = ezdxf.new("R2010")
    doc.units = ezdxf.units.IN
    msp = doc.modelspace()
    msp.add_lwpolyline([(0, 0), (3, 0), (3, 2), (0, 2)], close=True)
    msp.add_circle((1.5, 1.0), 0.25)
    doc.saveas(tmp_path / "plate.dxf")
    run(tmp_path / "plate.dxf", tool_diameter=0.125, depth=0.1, step_down=0.05, gcode=tmp_path / "plate.nc")
    header = [ln for ln in (tmp_path / "plate.nc").read_text().splitlines() if ln.startswith("(")]
    assert any("units: inch" in ln for ln in header)
    assert not [ln for ln in header if re.search(r"\d mm\b|\bmm\)", ln)], header
