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



def test_toolpath_is_mm_whatever_the_job_units_and_is_written_in_inch(jobs):
    # the contract: lengths are mm inside; units are converted only where
    # input is read and output written (1 inch = 25.4 mm exactly, Taylor &
    # Thompson, Guide for the Use of the SI, NIST SP 811, 2008, appendix B.8;
    # sources: inch).  The API's toolpath of the inch job is in mm ...
    from scipy.spatial import cKDTree

    from pathgen.export.gcode import gcode_text
    from pathgen.moves import RAPID

    tp_mm, tp_in = jobs["mm"][2].toolpath, jobs["in"][2].toolpath
    assert tp_mm.units == "mm" and tp_in.units == "mm"
    assert tp_in.tool_diameter == pytest.approx(6.0, rel=1e-12)
    assert tp_in.tolerance == pytest.approx(0.01, rel=1e-12)
    assert tp_in.info["depth"] == pytest.approx(2.0, rel=1e-12)
    assert tp_in.info["offset"] == pytest.approx(tp_mm.info["offset"], rel=1e-12)
    # ... and traces the mm job's path: both lie within the tolerance (0.01
    # mm) of the same tool-center curve, so every end of a cutting move of
    # one lies within twice that of the other's moves (sampled every STEP).
    # (The moves are not the same ones: an inch program rounds to 5 decimals,
    # a mm one to 4, so the two budgets leave the arc fit different targets.)
    dense = _cutting_path(gcode_text(tp_mm), 1.0)
    for z in (-1.0, -2.0):
        on = (tp_in.kind != RAPID) & np.isclose(tp_in.end[:, 2], z, atol=1e-9)
        ref = dense[np.isclose(dense[:, 2], z, atol=1e-3), :2]
        assert on.sum() > 20 and len(ref) > 1000
        assert cKDTree(ref).query(tp_in.end[on, :2])[0].max() <= 2 * 0.01 + STEP

    # written in inch (G20) and in mm (G21) from that one mm toolpath, read
    # back by the independent reader (NISTIR 6556 rules; sources:
    # nistir-6556): the same moves, ending at the same places in mm within
    # the written rounding (half a unit of the 5th inch decimal, 0.000127 mm,
    # plus half of the 4th mm decimal, 0.00005 mm), at the same feeds
    text_in, text_mm = gcode_text(tp_in, units="inch"), gcode_text(tp_in, units="mm")
    assert "G20" in text_in and "G21" not in text_in and "G21" in text_mm and "G20" not in text_mm
    p_in, p_mm = gr.read(text_in), gr.read(text_mm)
    assert p_in.units == "inch" and p_mm.units == "mm"
    assert [m.g for m in p_in.moves] == [m.g for m in p_mm.moves]
    ends_in = np.array([[np.nan if v is None else v for v in m.end] for m in p_in.moves], float) * IN
    ends_mm = np.array([[np.nan if v is None else v for v in m.end] for m in p_mm.moves], float)
    np.testing.assert_allclose(ends_in, ends_mm, rtol=0, atol=0.5e-5 * IN + 0.5e-4 + 1e-9)
    feeds_in = np.array([m.feed for m in p_in.moves if m.g != 0]) * IN
    feeds_mm = np.array([m.feed for m in p_mm.moves if m.g != 0])
    np.testing.assert_allclose(feeds_in, feeds_mm, rtol=1e-3)  # feeds are rounded: 1 mm/min, 0.1 in/min
    # and the moves of the inch program end on the API's (mm) toolpath
    cut = np.array([m.g != 0 and m.start[0] is not None for m in p_in.moves])
    assert cut.sum() > 50
    tree = cKDTree(tp_in.end[tp_in.kind != RAPID])
    assert tree.query(ends_in[cut])[0].max() <= np.sqrt(3) * 0.5e-5 * IN + 1e-9


def _bracket_dxf(path, units):
    # an invented bracket plate, 100 x 60 mm with R8 corners (bulges), two
    # round holes and an oblong slot, drawn in mm or in inch ($INSUNITS,
    # ezdxf's documented doc.units); the inch drawing holds the mm figures
    # divided by 25.4 (sources: inch)
    import ezdxf

    k = 1.0 if units == "mm" else 1.0 / IN
    doc = ezdxf.new("R2010")
    doc.units = ezdxf.units.MM if units == "mm" else ezdxf.units.IN
    msp = doc.modelspace()
    b = np.tan(np.pi / 8)  # a 90° arc: bulge = tan(θ/4) (sources: dxf-bulge)
    w, h, r = 100.0, 60.0, 8.0
    pts = [(r, 0, 0), (w - r, 0, b), (w, r, 0), (w, h - r, b), (w - r, h, 0), (r, h, b), (0, h - r, 0), (0, r, b)]
    msp.add_lwpolyline([(x * k, y * k, bb) for x, y, bb in pts], format="xyb", close=True)
    for x, y in ((14.0, 30.0), (86.0, 30.0)):
        msp.add_circle((x * k, y * k), 5.0 * k)
    msp.add_line((40 * k, 25 * k), (60 * k, 25 * k))
    msp.add_arc((60 * k, 30 * k), 5 * k, -90, 90)
    msp.add_line((60 * k, 35 * k), (40 * k, 35 * k))
    msp.add_arc((40 * k, 30 * k), 5 * k, 90, 270)
    doc.saveas(path)
    return path


@pytest.fixture(scope="module")
def part_jobs(tmp_path_factory):
    d = tmp_path_factory.mktemp("inch_part")
    out = {}
    for u, k in (("mm", 1.0), ("in", 1.0 / IN)):
        src = _bracket_dxf(d / f"bracket_{u}.dxf", "mm" if u == "mm" else "inch")
        res = run(src, tool_diameter=6.35 * k, depth=6.35 * k, step_down=3.175 * k, tabs=2,
                  gcode=d / f"{u}.nc", report=d / f"{u}.report.json")
        out[u] = (res, (d / f"{u}.nc").read_text(), json.loads((d / f"{u}.report.json").read_text()))
    return out


def test_part_toolpath_is_mm_whatever_the_job_units(part_jobs):
    # the contract for a part too: lengths are mm inside, converted only
    # where input is read and output written (1 inch = 25.4 mm exactly,
    # Taylor & Thompson, NIST SP 811, 2008, appendix B.8; sources: inch)
    from scipy.spatial import cKDTree

    from pathgen.moves import RAPID

    (mm, _, rep_mm), (inch, _, rep_in) = part_jobs["mm"], part_jobs["in"]
    assert inch.units == "inch" and mm.units == "mm"
    assert inch.toolpath.units == "mm" and all(tp.units == "mm" for tp in inch.toolpaths)
    tp_mm, tp_in = mm.toolpath, inch.toolpath
    assert tp_in.tool_diameter == pytest.approx(6.35, rel=1e-12)
    assert tp_in.tolerance == pytest.approx(0.01, rel=1e-12)
    assert tp_in.info["depth"] == pytest.approx(6.35, rel=1e-12)
    assert inch.report.rapid_length == pytest.approx(tp_in.info["rapid_length"], rel=1e-12)
    # 3 traverses between the 4 outlines, each end within twice the
    # tolerance of the mm job's (the two budgets round to 5 inch or 4 mm
    # decimals, so the arc fits aim at slightly different targets)
    assert tp_in.info["rapid_length"] == pytest.approx(tp_mm.info["rapid_length"], abs=3 * 2 * 2 * 0.01)
    # the same part in mm: the same outlines in the same order, and the tool
    # centers of the inch job lie on the mm job's cutting moves (both are
    # within the tolerance, 0.01 mm, of the same offset curves)
    assert inch.order == mm.order and len(inch.toolpaths) == len(mm.toolpaths) == 4
    mm_text = part_jobs["mm"][1]
    dense = np.vstack([gr.sample(m, STEP) for m in gr.read(mm_text).moves if m.g != 0 and None not in m.start])
    on_in = tp_in.end[tp_in.kind != RAPID]
    assert len(on_in) > 50 and len(dense) > 10_000
    assert cKDTree(dense).query(on_in)[0].max() <= 2 * 0.01 + STEP + 0.5e-4 * np.sqrt(3)
    # the tabs (on the outer outline) are searched in mm on a path within
    # the tolerance of the mm job's, every 0.1 mm, so they sit where the mm
    # job's do within a search step (an inch job once searched every 0.1
    # inch, 2.54 mm, and put the samples' tabs 1 to 3 mm elsewhere)
    tabs_mm = [t for r in mm.report.rows for t in r["tabs"]]
    tabs_in = [t for r in inch.report.rows for t in r["tabs"]]
    assert len(tabs_mm) == len(tabs_in) == 2
    for a, b in zip(tabs_mm, tabs_in):
        assert np.hypot(a["x"] - b["x"], a["y"] - b["y"]) <= 0.1 + 2 * 0.01
        assert b["width"] == pytest.approx(a["width"], rel=1e-12)
    # the report speaks the job's units: the inch report's figures × 25.4
    # are the mm report's
    assert rep_in["units"] == "inch" and rep_mm["units"] == "mm"
    assert rep_in["rapid_length"] * IN == pytest.approx(inch.report.rapid_length, rel=1e-9)
    for a, b in zip(rep_mm["outlines"], rep_in["outlines"]):
        for ta, tb in zip(a["tabs"], b["tabs"]):
            assert np.hypot(tb["x"] * IN - ta["x"], tb["y"] * IN - ta["y"]) <= 0.1 + 2 * 0.01


def test_inch_part_program_reads_back_onto_the_mm_toolpath(part_jobs):
    # the inch program, read back by the independent reader (NISTIR 6556
    # rules; sources: nistir-6556) and converted at 25.4 mm per inch
    # (sources: inch), ends its cutting moves on the API's mm toolpath within
    # the written rounding (half a unit of the 5th inch decimal per axis)
    from scipy.spatial import cKDTree

    from pathgen.moves import RAPID

    inch, text, _ = part_jobs["in"]
    assert "G20" in text and "G21" not in text
    prog = gr.read(text)
    assert prog.units == "inch"
    ends = np.array([m.end for m in prog.moves if m.g != 0 and None not in m.end], float) * IN
    tp = inch.toolpath
    assert len(ends) > 50
    assert cKDTree(tp.end[tp.kind != RAPID]).query(ends)[0].max() <= np.sqrt(3) * 0.5e-5 * IN + 1e-9
    # every move of the API's toolpath, cutting or not, is written: the read
    # back ends in mm match them one for one within the rounding
    all_ends = np.array([[np.nan if v is None else v for v in m.end] for m in prog.moves], float) * IN
    tail = all_ends[-len(tp):]
    ok = ~np.isnan(tail).any(axis=1)
    assert ok.sum() > 50
    np.testing.assert_allclose(tail[ok], tp.end[ok], rtol=0, atol=0.5e-5 * IN + 1e-9)
    # feeds per minute: inch/min × 25.4 = the mm/min of the toolpath (rounded to 0.1 inch/min)
    cut = tp.kind != RAPID
    feeds = np.array([m.feed for m in prog.moves], float)[-len(tp):][cut] * IN
    np.testing.assert_allclose(feeds, tp.feed[cut], rtol=0, atol=0.05 * IN + 1e-9)
