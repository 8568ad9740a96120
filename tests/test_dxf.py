"""DXF drawing: exact SPLINE, bulge polylines, tight spots; read back with ezdxf.

Sources beside the checks:
* ezdxf 1.4.5 (reference library): its reader, ``Auditor``, the SPLINE
  construction tool (B-spline evaluator) and ``ezdxf.math.bulge_to_arc``.
* scipy.interpolate.BSpline (reference library): an independent evaluator of
  the control points and knots.
* DXF LWPOLYLINE rules as ezdxf documents them (sources: dxf-bulge): bulge =
  tan(θ/4), positive counter-clockwise; group 70 bit 1 = closed; bulges
  90° → 0.41421356237309503, 180° → 1.
* B-spline invariant (de Boor, A Practical Guide to Splines, from memory):
  number of knots = control points + degree + 1.
"""

from __future__ import annotations

import math
import os
import subprocess
import sys
import warnings
from types import SimpleNamespace

import numpy as np
import pytest

ezdxf = pytest.importorskip("ezdxf")
from ezdxf.math import bulge_to_arc  # noqa: E402
from scipy.interpolate import BSpline  # noqa: E402

from pathgen.errors import ExportError, InputError  # noqa: E402
from pathgen.export import dxf as dxf_mod  # noqa: E402
from pathgen.export.dxf import LargeDrawingWarning, contour_bspline, polyline_vertices, write_dxf  # noqa: E402
from pathgen.path.model import Arc, Line, Rapid, Toolpath  # noqa: E402
from pathgen.spline import fit  # noqa: E402


def _ellipse(n=40, a=40.0, b=25.0):
    t = np.linspace(0, 2 * np.pi, n, endpoint=False)
    return fit(np.column_stack([a * np.cos(t), b * np.sin(t)]), closed=True)


def _open_wave(n=30):
    x = np.linspace(0, 90, n)
    return fit(np.column_stack([x, 8 * np.sin(x / 9) + 0.01 * x**2]))


def _cornered():
    from pathgen.outline import fit_outline

    # a D-shaped part: a straight edge and a half-ellipse, with two sharp corners
    t = np.linspace(0, np.pi, 25)
    arc = np.column_stack([30 * np.cos(t), 18 * np.sin(t)])
    edge = np.column_stack([np.linspace(-30, 30, 9)[1:-1], np.zeros(7)])
    return fit_outline(np.vstack([arc, edge]), closed=True)


def _read(path):
    doc = ezdxf.readfile(path)
    return doc, doc.modelspace()


CONTOURS = {"closed": _ellipse, "open": _open_wave, "corners": _cornered}


@pytest.mark.parametrize("name", sorted(CONTOURS))
def test_spline_matches_the_contour(tmp_path, name):
    contour = CONTOURS[name]()
    p = write_dxf(tmp_path / "c.dxf", contour)
    doc, msp = _read(p)
    assert len(doc.audit().errors) == 0  # ezdxf Auditor: no errors
    (spline,) = msp.query("SPLINE")
    assert spline.dxf.layer == "CONTOUR"
    assert spline.dxf.degree == 3
    assert len(spline.fit_points) == 0  # control points and knots, not fit points
    n_cp, n_kn = len(spline.control_points), len(spline.knots)
    assert n_kn == n_cp + 3 + 1  # knots = control points + degree + 1
    t = np.linspace(*contour.domain, 3001)
    tool = spline.construction_tool()  # ezdxf's own B-spline evaluator
    got = np.array([tool.point(float(x - contour.breaks[0])) for x in t])[:, :2]
    assert np.max(np.abs(got - contour(t))) <= 1e-6  # mm
    # scipy's BSpline as a second, independent evaluator of the same data
    cp, knots = contour_bspline(contour)
    assert np.allclose(BSpline(knots, cp, 3)(t), contour(t), rtol=0, atol=1e-9)


def test_knots_are_simple_where_c2_and_triple_at_corners():
    smooth = _ellipse(40)
    _, knots = contour_bspline(smooth)
    assert len(knots) == smooth.pieces + 7  # 4 + (m - 1) simple + 4
    cornered = _cornered()
    _, knots = contour_bspline(cornered)
    _, counts = np.unique(knots, return_counts=True)
    interior = counts[1:-1]
    assert counts[0] == 4 and counts[-1] == 4
    assert set(interior.tolist()) <= {1, 3}
    corner_breaks = [cornered.breaks[k] for k in cornered.corners if 0 < k < cornered.pieces]
    for b in corner_breaks:
        assert np.sum(knots == b) == 3


def _arc_path(sweeps_deg, R=10.0, ccw=True, z=0.0):
    """Consecutive arcs on one circle about (0, 0), starting at angle 0."""
    moves, a = [], 0.0
    sgn = 1 if ccw else -1
    for sw in sweeps_deg:
        b = a + sgn * math.radians(sw)
        s = (R * math.cos(a), R * math.sin(a), z)
        e = (R * math.cos(b), R * math.sin(b), z)
        moves.append(Arc(s, e, (0.0, 0.0), ccw, 100.0))
        a = b
    return Toolpath.from_moves(moves)


@pytest.mark.parametrize("ccw", [True, False])
def test_bulges_of_known_arcs(tmp_path, ccw):
    # 90° → tan(π/8) = 0.41421356237309503, 180° → 1 (sources: dxf-bulge; recomputed);
    # 270° is drawn as two 135° halves, each tan(135°/4)
    arcs = _arc_path([90, 180, 270], ccw=ccw)
    write_dxf(tmp_path / "b.dxf", _ellipse(), arcs=arcs)
    _, msp = _read(tmp_path / "b.dxf")
    (lw,) = msp.query("LWPOLYLINE[layer=='CONTOUR-ARCS']")
    pts = lw.get_points("xyb")
    sign = 1 if ccw else -1
    want = [0.41421356237309503, 1.0, math.tan(math.radians(135) / 4), math.tan(math.radians(135) / 4), 0.0]
    assert [p[2] for p in pts] == pytest.approx([sign * w for w in want], rel=1e-12)
    assert not lw.closed  # 90 + 180 + 270 = 540°: ends half a turn from the start
    # every bulge segment read back by ezdxf is on the circle R = 10 about the origin
    xy = [(p[0], p[1]) for p in pts]
    for i, (x, y, b) in enumerate(pts[:-1]):
        center, a0, a1, r = bulge_to_arc((x, y), xy[i + 1], b)
        assert r == pytest.approx(10.0, rel=1e-12)
        assert abs(center[0]) < 1e-9 and abs(center[1]) < 1e-9


def test_full_turn_of_arcs_is_a_closed_polyline(tmp_path):
    write_dxf(tmp_path / "f.dxf", _ellipse(), arcs=_arc_path([90, 180, 90], ccw=False))
    _, msp = _read(tmp_path / "f.dxf")
    (lw,) = msp.query("LWPOLYLINE")
    assert lw.closed and (lw.dxf.flags & 1) == 1 and len(lw) == 3  # group 70 bit 1 (sources: dxf-bulge)
    assert [p[2] for p in lw.get_points("xyb")] == pytest.approx([-0.41421356237309503, -1.0, -0.41421356237309503])


def test_open_run_is_not_closed_and_lines_have_zero_bulge(tmp_path):
    moves = [Line((0, 0, 0), (10, 0, 0), 100.0), Arc((10, 0, 0), (20, 0, 0), (15, 0), True, 100.0),
             Line((20, 0, 0), (30, 5, 0), 100.0)]
    write_dxf(tmp_path / "o.dxf", _open_wave(), arcs=Toolpath.from_moves(moves))
    _, msp = _read(tmp_path / "o.dxf")
    (lw,) = msp.query("LWPOLYLINE")
    assert not lw.closed and (lw.dxf.flags & 1) == 0  # group 70 bit 1 clear
    pts = lw.get_points("xyb")
    assert [p[2] for p in pts] == pytest.approx([0.0, 1.0, 0.0, 0.0], abs=1e-15)  # ccw semicircle: bulge 1
    assert [(p[0], p[1]) for p in pts] == [(0, 0), (10, 0), (20, 0), (30, 5)]


def test_closed_contour_arcs_polyline_has_the_closed_flag(tmp_path):
    from pathgen.path.build import contour_moves

    contour = _ellipse(60)
    arcs = contour_moves(contour, tolerance=0.01)
    write_dxf(tmp_path / "e.dxf", contour, arcs=arcs)
    doc, msp = _read(tmp_path / "e.dxf")
    assert len(doc.audit().errors) == 0
    (lw,) = msp.query("LWPOLYLINE[layer=='CONTOUR-ARCS']")
    assert lw.closed and (lw.dxf.flags & 1) == 1
    # the polyline stays within the arc fit's tolerance of the contour (ezdxf flattening as reference)
    from scipy.spatial import cKDTree

    flat = np.array([v[:2] for v in lw.virtual_entities() for v in _points_of(v)])
    dense = contour(np.linspace(*contour.domain, 100_000))
    d, _ = cKDTree(dense).query(flat)
    assert d.max() <= 0.01 + 1e-6


def _points_of(entity):
    if entity.dxftype() == "LINE":
        return [tuple(entity.dxf.start), tuple(entity.dxf.end)]
    return [tuple(v) for v in entity.flattening(0.001)]


def test_bulk_vertices_give_the_same_file_as_add_lwpolyline(tmp_path):
    # the documented call (ezdxf add_lwpolyline) against the bulk assignment we use
    verts, closed = polyline_vertices(_arc_path([30, 60, 90, 45, 100]))[0]

    def save(bulk, name):
        ezdxf.options.write_fixed_meta_data_for_testing = True
        try:
            doc = ezdxf.new("R2010", setup=False)
            msp = doc.modelspace()
            if bulk:
                lw = msp.add_lwpolyline([])
                lw.lwpoints.values = verts
                lw.closed = closed
            else:
                msp.add_lwpolyline(verts.tolist(), format="xyseb", close=closed)
            doc.saveas(tmp_path / name)
        finally:
            ezdxf.options.write_fixed_meta_data_for_testing = False
        return (tmp_path / name).read_bytes()

    assert save(True, "bulk.dxf") == save(False, "documented.dxf")


def test_tool_center_layer_holds_the_final_pass_only(tmp_path):
    R = 20.0
    moves = [Rapid((0, 0, 5), (R, 0, 5)), Line((R, 0, 5), (R, 0, -1), 100.0)]
    for z in (-1.0, -2.0):
        if z == -2.0:
            moves.append(Line((R, 0, -1), (R, 0, -2), 100.0))
        moves += [Arc((R, 0, z), (-R, 0, z), (0, 0), True, 500.0), Arc((-R, 0, z), (R, 0, z), (0, 0), True, 500.0)]
    moves.append(Rapid((R, 0, -2), (R, 0, 5)))
    tp = Toolpath.from_moves(moves, tool_diameter=4.0, side="outside")
    write_dxf(tmp_path / "t.dxf", _ellipse(), toolpath=tp)
    _, msp = _read(tmp_path / "t.dxf")
    (lw,) = msp.query("LWPOLYLINE[layer=='TOOL-CENTER']")
    assert lw.closed and len(lw) == 2
    assert [p[2] for p in lw.get_points("xyb")] == pytest.approx([1.0, 1.0], abs=1e-15)  # tan(180°/4)


class _Spot(SimpleNamespace):
    pass


def test_tight_spots_from_a_stand_in_report(tmp_path):
    report = SimpleNamespace(tight_spots=[
        _Spot(x=40.0, y=0.0, min_radius=15.625, allowed_feed=850.0, reason="accel"),
        _Spot(x=-40.0, y=0.0, min_radius=1.2, allowed_feed=0.0, reason="reach"),
    ])
    write_dxf(tmp_path / "s.dxf", _ellipse(), report=report)
    _, msp = _read(tmp_path / "s.dxf")
    circles = msp.query("CIRCLE[layer=='TIGHT-SPOTS']")
    texts = [t.dxf.text for t in msp.query("TEXT[layer=='TIGHT-SPOTS']")]
    assert sorted((round(c.dxf.center.x, 9), round(c.dxf.center.y, 9)) for c in circles) == [(-40, 0), (40, 0)]
    assert texts == ["1 accel R15.6 F850 mm/min", "2 reach R1.2 cannot cut"]  # no feed where the tool cannot reach


def test_tight_spots_from_the_real_check(tmp_path):
    from pathgen.checks.machine import Cut, Tool
    from pathgen.checks.report import check

    # a 3 mm radius hole cut from the inside with a 10 mm tool: the tool cannot reach
    t = np.linspace(0, 2 * np.pi, 48, endpoint=False)
    contour = fit(np.column_stack([3 * np.cos(t), 3 * np.sin(t)]), closed=True)
    rep = check(contour, tool=Tool(10.0), cut=Cut(side="inside"))
    assert rep.tight_spots
    write_dxf(tmp_path / "r.dxf", contour, report=rep)
    _, msp = _read(tmp_path / "r.dxf")
    assert len(msp.query("CIRCLE[layer=='TIGHT-SPOTS']")) == len(rep.tight_spots)
    assert any("reach" in t.dxf.text for t in msp.query("TEXT[layer=='TIGHT-SPOTS']"))


def test_inch_drawing_converts_and_sets_insunits(tmp_path):
    contour = _ellipse()
    write_dxf(tmp_path / "mm.dxf", contour)
    write_dxf(tmp_path / "in.dxf", contour, units="inch")
    dmm, mmm = _read(tmp_path / "mm.dxf")
    din, min_ = _read(tmp_path / "in.dxf")
    assert dmm.header["$INSUNITS"] == 4 and din.header["$INSUNITS"] == 1  # DXF: 4 = mm, 1 = inch
    a = np.array([p.dxf.location.x for p in mmm.query("POINT")])
    b = np.array([p.dxf.location.x for p in min_.query("POINT")])
    assert np.allclose(b * 25.4, a, rtol=1e-14, atol=1e-12)


def test_layers_and_caution_note(tmp_path):
    write_dxf(tmp_path / "l.dxf", _ellipse())
    doc, msp = _read(tmp_path / "l.dxf")
    names = {layer.dxf.name for layer in doc.layers}
    assert {"POINTS", "CONTOUR", "CONTOUR-ARCS", "TOOL-CENTER", "TIGHT-SPOTS", "NOTES"} <= names
    (note,) = msp.query("TEXT[layer=='NOTES']")
    assert "Verify every program by simulation or an air cut" in note.dxf.text
    contour = _ellipse()
    got = np.array([(p.dxf.location.x, p.dxf.location.y) for p in msp.query("POINT[layer=='POINTS']")])
    assert np.array_equal(got, contour.points)  # same geometry read back, in drawing order


def test_two_runs_in_two_processes_give_the_same_bytes(tmp_path):
    code = (
        "import sys, numpy as np; from pathgen.spline import fit; from pathgen.export.dxf import write_dxf;"
        "t = np.linspace(0, 2*np.pi, 30, endpoint=False);"
        "write_dxf(sys.argv[1], fit(np.c_[5*np.cos(t), 3*np.sin(t)], closed=True))"
    )
    # different hash seeds: set orders inside ezdxf must not leak into the file
    # (seeds 1 and 5 gave two CLASS orders with ezdxf 1.4.5 before the fix)
    for seed, name in (("1", "1.dxf"), ("5", "2.dxf"), ("3", "3.dxf")):
        env = {**os.environ, "PYTHONHASHSEED": seed}
        subprocess.run([sys.executable, "-c", code, str(tmp_path / name)], check=True, env=env)
    one = (tmp_path / "1.dxf").read_bytes()
    assert one == (tmp_path / "2.dxf").read_bytes() == (tmp_path / "3.dxf").read_bytes()


def test_failure_while_saving_leaves_no_file(tmp_path, monkeypatch):
    from ezdxf.document import Drawing

    def half_then_fail(self, stream, fmt="asc"):
        stream.write("  0\nSECTION\n")
        raise OSError(5, "Input/output error")

    monkeypatch.setattr(Drawing, "write", half_then_fail)
    with pytest.raises(ExportError, match="cannot write .*part.dxf: Input/output error"):
        write_dxf(tmp_path / "part.dxf", _ellipse())
    assert os.listdir(tmp_path) == []


def test_refuses_to_overwrite_and_checks_inputs(tmp_path):
    p = write_dxf(tmp_path / "p.dxf", _ellipse())
    with pytest.raises(ExportError, match="p.dxf already exists"):
        write_dxf(p, _ellipse())
    write_dxf(p, _ellipse(), force=True)
    with pytest.raises(InputError, match="units='cm' is not one of: 'mm', 'inch'"):
        write_dxf(tmp_path / "u.dxf", _ellipse(), units="cm")
    with pytest.raises(InputError, match=r"points must be an \(n, 2\) array"):
        write_dxf(tmp_path / "u.dxf", _ellipse(), points=np.zeros((3, 3)))
    with pytest.raises(InputError, match="arcs must be a Toolpath, got list"):
        write_dxf(tmp_path / "u.dxf", _ellipse(), arcs=[])
    assert sorted(os.listdir(tmp_path)) == ["p.dxf"]


def test_large_drawing_warns(tmp_path, monkeypatch):
    monkeypatch.setattr(dxf_mod, "LARGE_DRAWING", 10)
    with pytest.warns(LargeDrawingWarning, match="the drawing holds .* vertices"):
        write_dxf(tmp_path / "w.dxf", _ellipse())
    monkeypatch.setattr(dxf_mod, "MAX_DEFAULT_POINTS", 5)
    monkeypatch.setattr(dxf_mod, "LARGE_DRAWING", 10**9)
    with pytest.warns(LargeDrawingWarning, match="40 input points were not drawn"):
        write_dxf(tmp_path / "w2.dxf", _ellipse())
    _, msp = _read(tmp_path / "w2.dxf")
    assert len(msp.query("POINT")) == 0
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        write_dxf(tmp_path / "w3.dxf", _ellipse(), points=np.zeros((0, 2)))


def test_a_tight_spot_without_a_place_is_refused(tmp_path):
    with pytest.raises(InputError, match="report.tight_spots holds .* which has no numeric x and y"):
        write_dxf(tmp_path / "x.dxf", _ellipse(), report=SimpleNamespace(tight_spots=[object()]))
    assert os.listdir(tmp_path) == []
