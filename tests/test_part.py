"""A whole part: drawn outlines kept exact, several outlines per file,
nesting and sides, one program with the holes first.

Outside references:
* bulge = tan(θ/4), center and radius from ezdxf's own ``bulge_to_arc``
  (sources: dxf-bulge);
* areas and perimeters of circles, rectangles and rounded rectangles
  (plane geometry: a rounded rectangle W × H with corner radius r has area
  W·H − (4 − π)·r² and perimeter 2(W + H) − 8r + 2πr; derived);
* containment, crossing and the tool's swept disc with shapely as the
  independent geometry (sources: shapely);
* the program read back by the test interpreter ``tests/gcode_reader.py``,
  written from NISTIR 6556 (sources: nistir-6556).
Drawings are built with ezdxf in the tests.
"""

from __future__ import annotations

import math
import re

import numpy as np
import pytest

import ezdxf
import shapely

from pathgen.errors import InputError
from pathgen.drawing import bulge_arc, read_drawing, shape_contour
from pathgen.part import nest, read_part
from pathgen.pipeline import run

from gcode_reader import read as read_gcode, sample as sample_move

W, H, R_OUT, R_HOLE = 120.0, 80.0, 8.0, 4.0
HOLES = ((15.0, 15.0), (105.0, 15.0), (105.0, 65.0), (15.0, 65.0))
TOOL = 6.0


def _new():
    doc = ezdxf.new("R2010")
    doc.units = ezdxf.units.MM
    return doc, doc.modelspace()


def rounded_rect(msp, w, h, r, x0=0.0, y0=0.0, layer="0"):
    b = math.tan(math.pi / 8)  # a 90° arc (sources: dxf-bulge)
    pts = [(r, 0, 0), (w - r, 0, b), (w, r, 0), (w, h - r, b), (w - r, h, 0), (r, h, b), (0, h - r, 0), (0, r, b)]
    msp.add_lwpolyline([(x + x0, y + y0, bb) for x, y, bb in pts], format="xyb", close=True,
                       dxfattribs={"layer": layer})


def plate_dxf(path):
    """The test plate: rounded outer outline (bulges), four CIRCLE holes, a
    slot of LINEs and ARCs drawn in mixed directions."""
    doc, msp = _new()
    rounded_rect(msp, W, H, R_OUT, layer="OUTER")
    for x, y in HOLES:
        msp.add_circle((x, y), R_HOLE, dxfattribs={"layer": "HOLES"})
    msp.add_line((45, 35), (75, 35), dxfattribs={"layer": "SLOT"})
    msp.add_arc((75, 40), 5, -90, 90, dxfattribs={"layer": "SLOT"})
    msp.add_line((45, 45), (75, 45), dxfattribs={"layer": "SLOT"})  # drawn the other way
    msp.add_arc((45, 40), 5, 90, 270, dxfattribs={"layer": "SLOT"})
    doc.saveas(path)
    return path


def plate_polygons():
    """The exact plate as shapely polygons (arc chords' sagitta below 2e-6 mm)."""
    def arc(cx, cy, r, a0, a1, n=2000):
        a = np.radians(np.linspace(a0, a1, n))
        return np.c_[cx + r * np.cos(a), cy + r * np.sin(a)]
    r = R_OUT
    outer = np.vstack([arc(W - r, r, r, -90, 0), arc(W - r, H - r, r, 0, 90), arc(r, H - r, r, 90, 180),
                       arc(r, r, r, 180, 270)])
    holes = [arc(x, y, R_HOLE, 0, 360, 4000)[:-1] for x, y in HOLES]
    slot = np.vstack([arc(75, 40, 5, -90, 90), arc(45, 40, 5, 90, 270)])
    return shapely.Polygon(outer), [shapely.Polygon(h) for h in holes] + [shapely.Polygon(slot)]


def _exact_ring(pieces, step):
    """Points every ``step`` (evenly, also across the seam) along pieces
    ("line", p0, p1) or ("arc", center, r, a0_deg, a1_deg), computed exactly."""
    lengths = [math.dist(p[1], p[2]) if p[0] == "line" else p[2] * math.radians(abs(p[4] - p[3]))
               for p in pieces]
    total = sum(lengths)
    n = round(total / step)
    s = total * np.arange(n) / n
    out = np.empty((n, 2))
    edges = np.concatenate([[0.0], np.cumsum(lengths)])
    for p, a, b in zip(pieces, edges[:-1], edges[1:]):
        m = (s >= a) & (s < b)
        u = (s[m] - a) / (b - a)
        if p[0] == "line":
            out[m] = np.asarray(p[1]) + u[:, None] * (np.asarray(p[2]) - np.asarray(p[1]))
        else:
            ang = np.radians(p[3] + u * (p[4] - p[3]))
            out[m] = np.c_[p[1][0] + p[2] * np.cos(ang), p[1][1] + p[2] * np.sin(ang)]
    return out


def plate_csv(path, step=0.1, mode="blocks"):
    """The same plate as outlines sampled exactly every ``step`` mm along
    their length, written with 9 decimals (measured: 6 decimals at 0.1 mm
    fake a hole radius of 3.9935 by rounding noise, about 4δR²/h²; 0.5 mm
    spacing reads 3.9945, the interpolating spline's O(h²) curvature error)."""
    r = R_OUT
    outer = [("line", (r, 0), (W - r, 0)), ("arc", (W - r, r), r, -90, 0), ("line", (W, r), (W, H - r)),
             ("arc", (W - r, H - r), r, 0, 90), ("line", (W - r, H), (r, H)), ("arc", (r, H - r), r, 90, 180),
             ("line", (0, H - r), (0, r)), ("arc", (r, r), r, 180, 270)]
    rings = [_exact_ring(outer, step)]
    rings += [_exact_ring([("arc", (x, y), R_HOLE, 0, 360)], step) for x, y in HOLES]
    rings.append(_exact_ring([("line", (45, 35), (75, 35)), ("arc", (75, 40), 5, -90, 90),
                              ("line", (75, 45), (45, 45)), ("arc", (45, 40), 5, 90, 270)], step))
    lines = ["x,y,outline"] if mode == "column" else []
    for i, pts in enumerate(rings):
        for x, y in pts:
            lines.append(f"{x:.9f},{y:.9f},{i + 1}" if mode == "column" else f"{x:.9f},{y:.9f}")
        if mode == "blocks":
            lines.append("")
    path.write_text("\n".join(lines) + "\n")
    return path


# -- drawn geometry -------------------------------------------------------------------


@pytest.mark.parametrize("theta_deg", [30.0, 90.0, 180.0, 270.0, -90.0])
def test_bulge_arc_matches_ezdxf(theta_deg):
    # bulge = tan(θ/4); ezdxf's bulge_to_arc gives center, angles and radius (sources: dxf-bulge)
    from ezdxf.math import bulge_to_arc

    p0, p1 = (3.0, 1.0), (-2.0, 4.0)
    b = math.tan(math.radians(theta_deg) / 4)
    seg = bulge_arc(p0, p1, b)
    c, a0, a1, r = bulge_to_arc(p0, p1, b)
    np.testing.assert_allclose(seg.center, (c.x, c.y), rtol=0, atol=1e-12)
    assert seg.radius == pytest.approx(r, rel=1e-12)
    assert math.degrees(seg.sweep) == pytest.approx(theta_deg, abs=1e-9)
    # both ends on the circle
    for p in (p0, p1):
        assert math.dist(p, seg.center) == pytest.approx(seg.radius, rel=1e-12)


def test_rounded_rectangle_exact_area_no_corners(tmp_path):
    # W·H = 4000 mm², r = 10: area W·H − (4 − π)r² = 3914.16 mm² (geometry)
    doc, msp = _new()
    rounded_rect(msp, 80.0, 50.0, 10.0)
    doc.saveas(tmp_path / "rr.dxf")
    shapes, steps, units = read_drawing(tmp_path / "rr.dxf")
    assert len(shapes) == 1 and units == "mm"
    s = shapes[0]
    exact_area = 4000.0 - (4 - math.pi) * 100.0
    exact_perim = 2 * (80 + 50) - 80 + 20 * math.pi
    assert s.area == pytest.approx(exact_area, abs=1e-9)
    assert s.length == pytest.approx(exact_perim, abs=1e-9)
    c = shape_contour(s)
    assert c.corners == ()
    assert round(c.area, 2) == 3914.16
    assert c.area == pytest.approx(exact_area, abs=1e-6)
    assert c.length == pytest.approx(exact_perim, abs=1e-6)
    res = run(tmp_path / "rr.dxf", tool_diameter=6.0)
    rep = res.report.reports[0]
    assert len(rep.corners) == 0
    assert rep.min_radius.radius == pytest.approx(10.0, abs=1e-3)
    assert rep.area == pytest.approx(exact_area, abs=1e-6)


@pytest.mark.parametrize("radius", [0.5, 4.0, 100.0, 2000.0])
def test_circle_exact_area_perimeter_and_radius(tmp_path, radius):
    # circle: area πR², perimeter 2πR, curvature 1/R (geometry)
    doc, msp = _new()
    msp.add_circle((7.0, -3.0), radius)
    doc.saveas(tmp_path / "c.dxf")
    (s,), _, _ = read_drawing(tmp_path / "c.dxf")
    c = shape_contour(s)
    assert c.area == pytest.approx(math.pi * radius**2, rel=1e-9)
    assert c.length == pytest.approx(2 * math.pi * radius, rel=1e-9)
    d = c.info["drawn"]
    assert d["arc_radius_error"] <= 1e-5 and d["arc_distance"] <= 1e-6
    t = np.linspace(*c.domain, 5000, endpoint=False)
    np.testing.assert_allclose(1.0 / c.curvature(t), radius, rtol=0, atol=1e-3)
    np.testing.assert_allclose(np.hypot(*(c(t) - (7.0, -3.0)).T), radius, rtol=0, atol=1e-6)


def test_line_chain_rectangle_sharp_corners(tmp_path):
    # four LINEs, drawn out of order and direction: a W × H rectangle, area W·H,
    # perimeter 2(W + H), four sharp corners (geometry)
    doc, msp = _new()
    msp.add_line((0, 0), (30, 0))
    msp.add_line((30, 20), (0, 20))
    msp.add_line((30, 0), (30, 20))
    msp.add_line((0, 0), (0, 20))
    doc.saveas(tmp_path / "r.dxf")
    (s,), steps, _ = read_drawing(tmp_path / "r.dxf")
    c = shape_contour(s)
    assert c.area == pytest.approx(600.0, abs=1e-9) and c.length == pytest.approx(100.0, abs=1e-9)
    assert len(c.corners) == 4
    t = np.linspace(*c.domain, 4000, endpoint=False)
    assert np.abs(c.curvature(t)).max() < 1e-12  # lines stay straight


def test_chain_gap_bridged_and_open_chain_refused(tmp_path):
    doc, msp = _new()
    msp.add_line((0, 0), (30, 0))
    msp.add_line((30, 0.004), (30, 20))  # 0.004 mm gap: within the 0.01 mm join gap
    msp.add_line((30, 20), (0, 20))
    msp.add_line((0, 20), (0, 0))
    doc.saveas(tmp_path / "g.dxf")
    (s,), steps, _ = read_drawing(tmp_path / "g.dxf")
    assert any("bridged a gap of 0.004 mm" in x for x in steps)
    doc, msp = _new()
    msp.add_line((0, 0), (30, 0))
    msp.add_line((30, 0), (30, 20))
    msp.add_line((30, 20), (0, 20))
    doc.saveas(tmp_path / "open.dxf")
    with pytest.raises(InputError, match=r"open.dxf LINE \w+ on layer '0'.*does not close.*20 mm from its start"):
        read_drawing(tmp_path / "open.dxf")


def test_ellipse_sampled_within_a_share_of_tolerance(tmp_path):
    # ellipse a = 6, b = 3: area πab, vertex radius b²/a (sources: ellipse)
    doc, msp = _new()
    msp.add_ellipse((0, 0), major_axis=(6, 0), ratio=0.5)
    doc.saveas(tmp_path / "e.dxf")
    (s,), _, _ = read_drawing(tmp_path / "e.dxf", tolerance=0.01)
    c = shape_contour(s, tolerance=0.01)
    assert c.corners == ()  # a smooth loop: one periodic spline
    assert c.info["drawn"]["curve_distance"] <= 0.1 * 0.01
    assert c.area == pytest.approx(math.pi * 18.0, abs=0.01 * c.length)
    t = np.linspace(*c.domain, 20000, endpoint=False)
    assert 1.0 / np.abs(c.curvature(t)).max() == pytest.approx(1.5, abs=1e-3)


# -- several outlines, nesting, sides ------------------------------------------------------


def _levels_by_kind(outlines, levels):
    return sorted((round(abs(shapely.Polygon(o.polygon_points(0.01)).area)), lev)
                  for o, lev in zip(outlines, levels))


def test_plate_nesting_matches_shapely(tmp_path):
    outs, _, _ = read_part(plate_dxf(tmp_path / "plate.dxf"))
    levels = nest(outs)
    outer, inner = plate_polygons()
    assert len(outs) == 6
    for o, lev in zip(outs, levels):
        p = shapely.Polygon(o.polygon_points(0.001))
        # independent: a hole lies inside the outer outline and in none of the others
        expected = 0 if p.equals_exact(p, 0) and p.area > 0.5 * outer.area else 1
        assert lev == expected
        assert outer.buffer(1e-6).contains(p)


def test_island_in_a_hole_is_cut_outside(tmp_path):
    doc, msp = _new()
    rounded_rect(msp, 100, 100, 5)
    msp.add_circle((50, 50), 30)
    msp.add_circle((50, 50), 10)
    doc.saveas(tmp_path / "i.dxf")
    res = run(tmp_path / "i.dxf", tool_diameter=4.0)
    by_r = {round(math.sqrt(abs(c.area) / math.pi)): s for c, s in zip(res.contours, res.sides)}
    assert by_r[30] == "inside" and by_r[10] == "outside"
    assert sorted(res.levels) == [0, 1, 2]


def test_crossing_outlines_refused_naming_both(tmp_path):
    doc, msp = _new()
    msp.add_circle((0, 0), 10, dxfattribs={"layer": "A"})
    msp.add_circle((15, 0), 10, dxfattribs={"layer": "B"})
    doc.saveas(tmp_path / "x.dxf")
    # independent: shapely says the boundaries cross
    assert shapely.Point(0, 0).buffer(10).boundary.intersects(shapely.Point(15, 0).buffer(10).boundary)
    with pytest.raises(InputError, match=r"outline 1 \(x.dxf CIRCLE \w+ on layer 'A'\) and outline 2 "
                                         r"\(x.dxf CIRCLE \w+ on layer 'B'\) cross or touch"):
        run(tmp_path / "x.dxf", tool_diameter=2.0)


def test_layers_choose_outlines(tmp_path):
    res = run(plate_dxf(tmp_path / "plate.dxf"), layer="HOLES", tool_diameter=6.0)
    assert len(res.outlines) == 4 and set(res.sides) == {"outside"}  # alone, each is outer
    with pytest.raises(InputError, match=r"no drawn outline on layer 'NOPE' \(layers with outlines: "
                                         r"'HOLES', 'OUTER', 'SLOT'\)"):
        run(tmp_path / "plate.dxf", layer="NOPE")


@pytest.mark.parametrize("mode", ["blocks", "column"])
def test_text_file_of_several_outlines(tmp_path, mode):
    path = plate_csv(tmp_path / f"plate_{mode}.csv", mode=mode)
    outs, steps, _ = read_part(path)
    assert len(outs) == 6
    levels = nest(outs)
    assert sorted(levels) == [0, 1, 1, 1, 1, 1]
    res = run(path, tool_diameter=6.0)
    holes = [rep.min_radius.radius for rep, c in zip(res.reports, res.contours)
             if abs(abs(c.area) - math.pi * R_HOLE**2) < 1.0]
    # the four round holes, sampled every 0.1 mm: their radius within 0.001 mm (geometry)
    assert len(holes) == 4
    np.testing.assert_allclose(holes, R_HOLE, rtol=0, atol=1e-3)
    # the lines and arcs in the points are recognised (the outline's fillets between
    # straight edges would read about R6.93 from an interpolating spline)
    outer = [c for c, lev in zip(res.contours, res.levels) if lev == 0][0]
    rec = outer.info["recognised"]
    assert rec["text"] == "4 lines, 4 arcs R8.000" and rec["free"] == 0
    assert any("outline 1: 4 lines, 4 arcs R8.000 recognised in the points" in s for s in res.report.steps)
    # each fillet R8 and each hole R4 within 0.001 mm: the smallest and the largest radius of
    # curvature on every arc of the contour (geometry: the drawn radii)
    for c in res.contours:
        s = np.linspace(*c.domain, 100001)
        k = np.abs(c.curvature(s))
        on_arc = k > 1e-6
        np.testing.assert_allclose(1.0 / k[on_arc].max(), 1.0 / k[on_arc].min(), rtol=0, atol=1e-3)
        want = R_HOLE if abs(abs(c.area) - math.pi * R_HOLE**2) < 1.0 else 5.0 if abs(c.area) < 1000 else R_OUT
        assert abs(1.0 / k[on_arc].max() - want) <= 1e-3 and abs(1.0 / k[on_arc].min() - want) <= 1e-3
    # the sampled rounded rectangle: area W·H − (4 − π)·r² and perimeter 2(W + H) − (8 − 2π)·r
    # (geometry), within 1e-6 mm² and 1e-6 mm (points at 9 decimals; measured 2e-8 and 3e-9)
    assert abs(abs(outer.area) - (W * H - (4 - math.pi) * R_OUT**2)) <= 1e-6
    assert abs(outer.length - (2 * (W + H) - (8 - 2 * math.pi) * R_OUT)) <= 1e-6
    # switched off, the spline reads the fillets smaller than drawn (safe side), never larger
    off = run(path, tool_diameter=6.0, find_arcs=False)
    for rep, lev in zip(off.reports, off.levels):
        assert rep.min_radius.radius <= (R_OUT if lev == 0 else 5.0) + 1e-3
    assert min(r.min_radius.radius for r, lev in zip(off.reports, off.levels) if lev == 0) < R_OUT - 0.5


def test_bad_outline_column_names_the_line(tmp_path):
    p = tmp_path / "bad.csv"
    p.write_text("x,y,outline\n0,0,1\n1,0,1\n1,1,1.5\n")
    with pytest.raises(InputError, match=r"bad.csv line 4: the outline number must be a whole number"):
        run(p)


# -- one program -------------------------------------------------------------------------------


def _cut_runs(prog):
    """Runs of consecutive cutting moves below the stock top, as (k, 3) samples."""
    runs, cur = [], []
    for m in prog.moves:
        if None in m.start:  # the first move, from an unknown position
            continue
        below = min(m.start[2], m.end[2]) < 0
        if m.g != 0 and below:
            cur.append(sample_move(m, 0.05))
        elif cur:
            runs.append(np.vstack(cur))
            cur = []
    if cur:
        runs.append(np.vstack(cur))
    return runs


@pytest.mark.parametrize("source", ["dxf", "csv"])
def test_plate_program_cuts_each_outline_once_on_its_side_holes_first(tmp_path, source):
    path = plate_dxf(tmp_path / "plate.dxf") if source == "dxf" else plate_csv(tmp_path / "plate.csv", step=0.25)
    res = run(path, tool_diameter=TOOL, depth=3.0, step_down=1.5, gcode=tmp_path / "plate.nc",
              report=tmp_path / "plate.report.json")
    prog = read_gcode((tmp_path / "plate.nc").read_text())
    # no exponent notation anywhere in the program, comments included (an exact cut's tiny figures)
    assert not re.search(r"[0-9][eE][-+]?[0-9]", (tmp_path / "plate.nc").read_text())
    outer, inner = plate_polygons()
    material = outer
    for h in inner:
        material = material.difference(h)
    r = TOOL / 2
    tol = 0.01 + 1e-4  # chord tolerance plus the 4-decimal rounding of the program (sources: rounding)
    runs = _cut_runs(prog)
    # which exact outline each run follows: the one whose boundary is nearest its points
    bounds = [outer.exterior] + [h.exterior for h in inner]
    owner = []
    for run_pts in runs:
        xy = shapely.points(run_pts[::25, :2])
        d = [float(np.median(shapely.distance(b, xy))) for b in bounds]
        owner.append(int(np.argmin(d)))
    # every outline cut once per pass (two passes), in one go: runs of an outline are consecutive
    assert sorted(owner) == sorted(list(range(6)) * 2)
    order = [o for i, o in enumerate(owner) if i == 0 or owner[i - 1] != o]
    assert len(order) == 6 and order[-1] == 0  # the outer outline last
    # the swept tool disc never enters the material beyond the tolerance
    # (sweeping the tool disc against the exact geometry, sources: shapely)
    swept = shapely.union_all([shapely.LineString(p[:, :2]).buffer(r, quad_segs=64) for p in runs])
    bite = swept.intersection(material.buffer(-tol))
    assert bite.area < 1e-6, f"the tool cuts {bite.area} mm² into the part"
    # and it reaches every outline: each boundary lies within the tolerance of the swept disc
    for b in bounds:
        pts = shapely.points(np.asarray(b.coords)[::7])
        assert float(shapely.distance(swept, pts).max()) <= tol
    # each tool-center run follows its outline at r, on its side: inside the
    # holes and the slot, outside the outer outline (leads aside)
    for run_pts, o in zip(runs, owner):
        xy = shapely.points(run_pts[:: max(1, len(run_pts) // 400), :2])
        d = shapely.distance(bounds[o], xy)
        on = np.abs(d - r) <= tol
        assert on.any() and d.min() >= r - tol
        inside = shapely.contains(shapely.Polygon(bounds[o]), xy[on])
        assert (not inside.any()) if o == 0 else inside.all()
    assert res.report.rapid_length > 0
    assert res.toolpath.info["rapid_length"] == pytest.approx(res.report.rapid_length, rel=1e-12)
    data = (tmp_path / "plate.report.json").read_text()
    assert '"outline_count": 6' in data and '"rapid_length"' in data


def _plate_job(d):
    """The plate cut 2 mm deep with the 6 mm tool: program,
    report and drawing (with the tool path) written into ``d``."""
    run(plate_dxf(d / "plate.dxf"), tool_diameter=TOOL, depth=2.0, gcode=d / "p.nc",
        report=d / "p.json", dxf=d / "p.dxf")
    return d


@pytest.fixture(scope="module")
def plate_program(tmp_path_factory):
    """The plate job, written once for the tests that read the same files
    (a part job takes seconds)."""
    return _plate_job(tmp_path_factory.mktemp("plate"))


@pytest.fixture(scope="module")
def plate_program_again(tmp_path_factory):
    """The same job run a second time, from its own copy of the drawing."""
    return _plate_job(tmp_path_factory.mktemp("plate_again"))


def test_part_program_same_bytes_twice(plate_program, plate_program_again):
    for name in ("p.nc", "p.json", "p.txt"):
        assert (plate_program_again / name).read_bytes() == (plate_program / name).read_bytes()


# -- tabs (common practice: uncut bridges on flat stretches, the tool rises over them) -----------


def _deep_xy_runs(prog, z):
    """Runs of consecutive XY cutting moves at height z, as (k, 3) samples."""
    runs, cur = [], []
    for m in prog.moves:
        if None in m.start:
            continue
        flat = m.g != 0 and abs(m.start[2] - z) < 1e-9 and abs(m.end[2] - z) < 1e-9 and \
            (m.start[:2] != m.end[:2] or m.g in (2, 3))
        if flat:
            cur.append(m)
        elif cur:
            runs.append(cur)
            cur = []
    if cur:
        runs.append(cur)
    return runs


def _move_length(m):
    s = sample_move(m, 0.01)
    return float(np.hypot(*np.diff(s[:, :2], axis=0).T).sum())


@pytest.mark.parametrize("count, width, height", [(4, 5.0, 1.2), (3, 8.0, 0.5)])
def test_tabs_depth_count_and_width_read_back(tmp_path, count, width, height):
    depth = 3.0
    path = plate_dxf(tmp_path / "plate.dxf")
    res = run(path, tool_diameter=TOOL, depth=depth, step_down=1.0, tabs=count, tab_width=width,
              tab_height=height, gcode=tmp_path / "p.nc", report=tmp_path / "p.json")
    prog = read_gcode((tmp_path / "p.nc").read_text())
    z_top = -(depth - height)
    # the moves over the tabs: at depth − tab height, read back from the program
    over = _deep_xy_runs(prog, round(z_top, 4))
    deep_passes = sum(1 for z in (-1.0, -2.0, -3.0) if z < z_top)
    assert len(over) == count * deep_passes
    for run_moves in over:
        # the tool center rises over the tab width plus the tool diameter, so the
        # bridge left in the part is the tab width
        assert sum(_move_length(m) for m in run_moves) == pytest.approx(width + TOOL, abs=2e-3)
    lowest = min(min(m.start[2], m.end[2]) for m in prog.moves if None not in m.start)
    assert lowest == pytest.approx(-depth, abs=1e-9)
    # the tabs sit on the straight edges of the plate, away from the fillets
    tabs = [t for row in res.report.rows for t in row["tabs"]]
    assert len(tabs) == count
    for t in tabs:
        x, y = t["x"], t["y"]
        on_bottom_top = (abs(y + TOOL / 2) < 0.02 or abs(y - H - TOOL / 2) < 0.02) and \
            R_OUT + width / 2 <= x <= W - R_OUT - width / 2
        on_sides = (abs(x + TOOL / 2) < 0.02 or abs(x - W - TOOL / 2) < 0.02) and \
            R_OUT + width / 2 <= y <= H - R_OUT - width / 2
        assert on_bottom_top or on_sides
        # no cutting sample of a deep pass near the tab's middle goes below the tab top
        for m in prog.moves:
            if None in m.start or m.g == 0:
                continue
            s = sample_move(m, 0.05)
            near = np.hypot(s[:, 0] - x, s[:, 1] - y) < (width + TOOL) / 2 - 0.01
            assert (s[near, 2] >= z_top - 1e-4).all()
    text = (tmp_path / "p.txt").read_text()
    assert text.count(f"tab {width:g} mm wide, {height:g} mm high") == count


def test_tab_options_checked(tmp_path):
    path = plate_dxf(tmp_path / "plate.dxf")
    with pytest.raises(InputError, match="tab height 3 must be below the depth 3"):
        run(path, tool_diameter=TOOL, depth=3.0, tabs=2, tab_height=3.0, gcode=tmp_path / "x.nc")
    with pytest.raises(InputError, match="tabs hold a part cut through: give the depth"):
        run(path, tool_diameter=TOOL, tabs=2, gcode=tmp_path / "x.nc")
    with pytest.raises(InputError, match=r"only \d+ tabs? of this width fit .*\(tab width 150 mm, tool 6 mm\)"):
        run(path, tool_diameter=TOOL, depth=3.0, tabs=2, tab_width=150.0, gcode=tmp_path / "x.nc")
    assert not (tmp_path / "x.nc").exists()


def test_cli_part_with_tabs_drawing_and_picture(tmp_path):
    from pathgen.cli import main
    import io

    path = plate_dxf(tmp_path / "plate.dxf")
    out, err = io.StringIO(), io.StringIO()
    status = main(["gcode", str(path), "-o", str(tmp_path / "p.nc"), "--tool-diameter", "6", "--depth", "3",
                   "--tabs", "2", "--tab-width", "4", "--tab-height", "1"], out=out, err=err)
    assert status == 0, err.getvalue()
    assert "Verify every program" in out.getvalue() and "cut in this order" in out.getvalue()
    status = main(["dxf", str(path), "-o", str(tmp_path / "p.dxf"), "--tool-diameter", "6", "--depth", "3",
                   "--tabs", "2"], out=io.StringIO(), err=err)
    assert status == 0, err.getvalue()
    doc = ezdxf.readfile(tmp_path / "p.dxf")
    auditor = doc.audit()
    assert not auditor.has_errors
    msp = doc.modelspace()
    labels = sorted(t.dxf.text for t in msp.query("TEXT[layer=='LABELS']"))
    assert len(labels) == 6 and "1 outside, cut 6" in labels
    assert len(msp.query("LWPOLYLINE[layer=='TABS']")) == 2
    # the outlines come back with their bulges: the outer area is exact (geometry, sources: dxf-bulge)
    outer = [e for e in msp.query("LWPOLYLINE[layer=='CONTOUR']") if len(e) == 8][0]
    from pathgen.drawing import _polyline_segments
    segs = _polyline_segments(list(outer.get_points("xyb")), True, 1.0)
    area = sum(s.area_term() for s in segs)
    assert abs(area) == pytest.approx(W * H - (4 - math.pi) * R_OUT**2, abs=1e-9)
    status = main(["plot", str(path), "-o", str(tmp_path / "p.svg"), "--tool-diameter", "6", "--depth", "3",
                   "--tabs", "2"], out=io.StringIO(), err=err)
    assert status == 0, err.getvalue()
    # the picture's content, read back as XML (W3C SVG, Python's xml.etree):
    # every outline's label, and each tab drawn on the outer tool path
    text = (tmp_path / "p.svg").read_text(encoding="utf-8")
    assert set(labels) <= set(re.findall(r"<!-- (.*?) -->", text))  # matplotlib keeps a text as a comment
    tabs, tool = _svg_strokes(text, "#ff00ff"), _svg_strokes(text, "#1f77b4")
    assert len(tabs) == 2 and len(tool) >= 6  # two tabs; a path at least for each outline
    segments = np.vstack([np.stack([q[:-1], q[1:]], axis=1) for q in tool])
    for q in tabs:
        # the tab bridges a gap of the drawn tool path (the tool rises there):
        # both its ends meet the path (svg units, pt), its middle does not
        d = _to_segments(q, segments)
        assert d[[0, -1]].max() <= 0.5 and d.max() > 5.0


def _svg_strokes(text, colour):
    """Vertices of the drawn lines of one stroke colour, outside the legend."""
    import xml.etree.ElementTree as ET

    ns = "{http://www.w3.org/2000/svg}"
    found = []

    def walk(el, in_legend):
        for ch in el:
            legend = in_legend or (ch.get("id") or "").startswith("legend")
            if ch.tag == ns + "path" and f"stroke: {colour}" in (ch.get("style") or "") and not legend:
                found.append(np.array([float(v) for v in re.findall(r"-?[\d.]+", ch.get("d"))]).reshape(-1, 2))
            walk(ch, legend)

    walk(ET.fromstring(text), False)
    return found


def _to_segments(points, segments):
    """Distance from each point to the nearest of the segments (m, 2, 2)."""
    a, b = segments[:, 0], segments[:, 1]
    ab = b - a
    L2 = np.maximum((ab * ab).sum(axis=1), 1e-300)
    u = np.clip((((points[:, None, :] - a) * ab).sum(axis=2)) / L2, 0.0, 1.0)
    near = a + u[:, :, None] * ab
    return np.hypot(*(points[:, None, :] - near).transpose(2, 0, 1)).min(axis=1)


def test_cli_bad_part_one_line_exit_2(tmp_path):
    from pathgen.cli import main
    import io

    doc, msp = _new()
    msp.add_line((0, 0), (30, 0))
    msp.add_line((30, 0), (30, 20))
    doc.saveas(tmp_path / "open.dxf")
    err = io.StringIO()
    status = main(["gcode", str(tmp_path / "open.dxf"), "-o", str(tmp_path / "o.nc"), "--tool-diameter", "6"],
                  out=io.StringIO(), err=err)
    assert status == 2
    assert err.getvalue().count("\n") == 1 and "does not close" in err.getvalue()
    assert not (tmp_path / "o.nc").exists()


def test_sides_set_per_layer_or_outline(tmp_path):
    path = plate_dxf(tmp_path / "plate.dxf")
    res = run(path, tool_diameter=TOOL, sides={"HOLES": "on", 1: "on"})
    by_layer = {o.layer: s for o, s in zip(res.outlines, res.sides)}
    assert by_layer == {"OUTER": "on", "HOLES": "on", "SLOT": "inside"}
    with pytest.raises(InputError, match="side of HOLES='middle' is not one of"):
        run(path, sides={"HOLES": "middle"})
    with pytest.raises(InputError, match=r"sides: no outline numbered or on layer 'HOLE' \(outlines 1-6; "
                                         r"layers 'HOLES', 'OUTER', 'SLOT'\)"):
        run(path, sides={"HOLE": "on"})
    with pytest.raises(InputError, match="applies to one outline"):
        run(path, side="inside")


def test_inch_part_program_in_inches_holes_first(tmp_path):
    # the plate drawn in inches (every length / 25.4), read with --units inch
    doc, msp = _new()
    doc.units = ezdxf.units.IN
    k = 1 / 25.4
    rounded_rect(msp, W * k, H * k, R_OUT * k)
    for x, y in HOLES:
        msp.add_circle((x * k, y * k), R_HOLE * k)
    doc.saveas(tmp_path / "inch.dxf")
    res = run(tmp_path / "inch.dxf", units="inch", tool_diameter=TOOL * k, depth=0.1, step_down=0.05,
              tabs=2, gcode=tmp_path / "inch.nc")
    prog = read_gcode((tmp_path / "inch.nc").read_text())
    assert prog.units == "inch"
    # each hole's tool-center arcs have radius (R_hole - r) in inches (sources: nistir-6556, G2/G3 I J)
    hole_arcs = [m for m in prog.moves if m.g in (2, 3) and None not in m.start and m.start[2] < 0
                 and min(math.dist(m.center, (x * k, y * k)) for x, y in HOLES) < 1e-3]
    assert hole_arcs
    for m in hole_arcs:
        assert math.dist(m.start[:2], m.center) == pytest.approx((R_HOLE - TOOL / 2) * k, abs=2e-5)
    # the outer outline is cut last: the last cutting move lies outside the plate
    last = [m for m in prog.moves if m.g != 0 and None not in m.start and m.start[2] < 0][-1]
    outer, _ = plate_polygons()
    assert not outer.contains(shapely.Point(last.end[0] / k, last.end[1] / k))
    assert res.report.to_dict(units="inch")["rapid_length"] == pytest.approx(res.report.rapid_length * k)


def test_batch_runs_part_files(tmp_path):
    from pathgen.pipeline import run_batch

    src = tmp_path / "in"
    src.mkdir()
    plate_dxf(src / "plate.dxf")
    plate_csv(src / "plate_pts.csv", step=0.25)
    rows = run_batch(src, tmp_path / "out", jobs=1, tool_diameter=TOOL)
    assert [r["status"] for r in rows] == ["ok", "ok"]
    assert rows[0]["min_radius"] == pytest.approx(R_HOLE, abs=1e-3)
    assert all(r["blocks"] > 6 * 3 for r in rows)  # six outlines, each a plunge, a lead in, moves, a lead out


def test_spline_and_polyline_entities(tmp_path):
    # a closed SPLINE loop (about 30 × 20) and a 2-D POLYLINE with bulges
    # (a 40 × 10 slot: two lines and two semicircles, b = 1)
    doc, msp = _new()
    a = np.linspace(0, 2 * np.pi, 13)
    fit = np.c_[15 * np.cos(a) + 100, 10 * np.sin(a)]
    fit[-1] = fit[0]  # ends on its start
    msp.add_spline([(x, y) for x, y in fit]).closed = True
    msp.add_polyline2d([(0, 0), (40, 0), (40, 10), (0, 10)], close=True, format="xy")
    pl = list(msp.query("POLYLINE"))[0]
    for v, b in zip(pl.vertices, (0.0, 1.0, 0.0, 1.0)):
        v.dxf.bulge = b
    doc.saveas(tmp_path / "sp.dxf")
    shapes, steps, _ = read_drawing(tmp_path / "sp.dxf", tolerance=0.01)
    slot = [s for s in shapes if "POLYLINE" in s.where][0]
    # the slot: area 40·10 + π·5², perimeter 80 + 10π (geometry)
    assert slot.area == pytest.approx(400 + 25 * math.pi, abs=1e-9)
    c = shape_contour(slot)
    assert c.length == pytest.approx(80 + 10 * math.pi, abs=1e-6) and c.corners == ()
    # the spline: the fitted contour within a tenth of the tolerance of ezdxf's own
    # evaluation of the drawn B-spline (an outside evaluator), densely sampled
    spline = [s for s in shapes if "SPLINE" in s.where][0]
    cs = shape_contour(spline, tolerance=0.01)
    bs = list(msp.query("SPLINE"))[0].construction_tool()
    truth = np.array([(v.x, v.y) for v in bs.points(np.linspace(0, bs.max_t, 5000))])
    from scipy.spatial import cKDTree
    t = np.linspace(*cs.domain, 400_000, endpoint=False)
    d, _ = cKDTree(cs(t)).query(truth)
    assert d.max() <= 0.1 * 0.01
    assert cs.info["drawn"]["curve_distance"] <= 0.1 * 0.01
    # its ends meet at an angle (ezdxf's derivatives: 30.3°): a sharp corner, kept
    assert len(cs.corners) == 1


def test_long_straight_sides_written_as_lines_not_huge_arcs(tmp_path):
    # a 220 mm square with R5 corners: its 210 mm sides were fitted as arcs of
    # radius 1.49e6 mm and the program was refused; now a line where a line fits
    doc, msp = _new()
    rounded_rect(msp, 220.0, 220.0, 5.0)
    doc.saveas(tmp_path / "sq.dxf")
    run(tmp_path / "sq.dxf", tool_diameter=TOOL, gcode=tmp_path / "sq.nc")
    prog = read_gcode((tmp_path / "sq.nc").read_text())
    radii = [math.dist(m.start[:2], m.center) for m in prog.moves if m.g in (2, 3) and None not in m.start]
    assert max(radii) < 1e6
    outer = shapely.Polygon(np.asarray(shape_contour(read_drawing(tmp_path / "sq.dxf")[0][0]).points))
    cuts = [m for m in prog.moves if m.g == 1 and None not in m.start and m.start[2] < 0
            and math.dist(m.start[:2], m.end[:2]) > 100]
    assert len(cuts) >= 1  # at least one side is one straight move
    for m in cuts:
        d = shapely.distance(outer.exterior, shapely.points(sample_move(m, 1.0)[:, :2]))
        assert np.abs(d - TOOL / 2).max() <= 0.01 + 1e-4


def test_part_program_is_replayed_from_its_text(plate_program):
    # the written part program is read back (pathgen's reader) and its moves
    # swept against the part before it is put in place; the header says so
    out = plate_program / "p.nc"
    head = [ln for ln in out.read_text().splitlines() if ln.startswith("(")]
    said = [ln for ln in head if ln.startswith("(replayed from this text:")]
    assert len(said) == 1 and "none enters the part by more than the tolerance" in said[0]
    assert all(len(ln) <= 256 for ln in head)


def test_part_drawing_is_the_same_bytes_every_run(plate_program, plate_program_again):
    # same input, same output: no creation dates, random GUIDs or time
    # stamps in the part's DXF (common practice for reproducible files)
    first, second = (d / "p.dxf" for d in (plate_program, plate_program_again))
    assert b"TOOLPATH" in first.read_bytes()  # the drawing carries the tool path too
    assert first.read_bytes() == second.read_bytes()


def test_a_part_scanned_densely_with_noise_is_cut(tmp_path):
    # a ring 60 mm across with a hole of R 10 mm, both scanned 0.015-0.024 mm
    # apart with noise σ = 0.004 mm (invented): the polygon through the
    # points crosses itself (shapely, the reference, says it is not valid),
    # the outlines they trace do not; the part is cut, the hole read as R 10
    # (the circle's curvature 1/r, handbook) within 3 %, and every outline's
    # program within the tolerance as read back from the text
    rng = np.random.default_rng(12)

    def ring(r, n):
        th = np.linspace(0, 2 * np.pi, n, endpoint=False)
        return np.c_[r * np.cos(th), r * np.sin(th)] + rng.normal(0, 0.004, (n, 2))

    outer, hole = ring(30, 8000), ring(10, 4000)
    assert not shapely.Polygon(outer).is_valid or not shapely.Polygon(hole).is_valid
    src = tmp_path / "scan.csv"
    src.write_text("x,y\n" + "".join(f"{x:.3f},{y:.3f}\n" for x, y in outer) + "\n"
                   + "".join(f"{x:.3f},{y:.3f}\n" for x, y in hole))
    res = run(src, tool_diameter=6.0, gcode=tmp_path / "scan.nc")
    rows = res.report.program["outlines"]
    assert len(rows) == 2 and all(r["deviation"] <= 0.01 for r in rows)
    radii = sorted(rep.min_radius.radius for rep in res.reports)
    assert radii[0] == pytest.approx(10.0, rel=0.03)
    assert radii[1] == pytest.approx(30.0, rel=0.03)


def _pocket_drawing(path, bulge):
    """A 60 × 40 mm pocket with R 10 corners drawn as one polyline with
    bulges (invented part)."""
    d = ezdxf.new("R2010")
    pts = [(10, 0, 0), (50, 0, bulge), (60, 10, 0), (60, 30, bulge), (50, 40, 0), (10, 40, bulge),
           (0, 30, 0), (0, 10, bulge)]
    d.modelspace().add_lwpolyline(pts, format="xyb", close=True)
    d.saveas(path)


def test_a_pocket_drawn_with_four_digit_bulges_is_cut_inside(tmp_path):
    # A bulge is tan(sweep/4) (the DXF reference's definition of LWPOLYLINE
    # bulges); written as 0.4142 for a quarter circle (tan(π/8) =
    # 0.41421356...) each arc sweeps 4·atan(0.4142), and meets its lines
    # with a kink of (4·atan(0.4142) − π/2)/2 rad, 2.3e-5 rad.  A tool of
    # radius r leaves r(1/cos(θ/2) − 1) there (a circle tangent to two
    # lines, handbook geometry): 2e-10 mm, so no "tool cannot reach", and
    # the one drawn outline is cut inside as asked (side=, --side)
    src = tmp_path / "pocket.dxf"
    _pocket_drawing(src, 0.4142)
    res = run(src, tool_diameter=6.0, side="inside", gcode=tmp_path / "pocket.nc")
    (rep,) = res.reports
    kink = (4 * math.atan(0.4142) - math.pi / 2) / 2
    assert rep.corners == () and rep.tight_spots == ()
    assert len(rep.kinks) == 8
    assert max(abs(a) for *_, a in rep.kinks) == pytest.approx(math.degrees(abs(kink)), rel=1e-3)
    radius = 10 * math.sqrt(2) / (2 * math.sin(4 * math.atan(0.4142) / 2))  # chord 10√2 = 2R sin(sweep/2)
    # twice the fillet radius, read from samples (a gap reads up to a
    # sample's sagitta narrow: 19.965 of 20.0005 measured)
    assert rep.largest_tool_diameter == pytest.approx(2 * radius, rel=2e-3)
    assert rep.largest_tool_diameter <= 2 * radius
    # the program: every move inside the pocket, keeping the tool radius
    # less the tolerance from its wall (shapely's distance, the reference)
    prog = read_gcode((tmp_path / "pocket.nc").read_text())
    pocket = shapely.Polygon(read_part(src)[0][0].polygon_points(1e-4))
    pts = np.vstack([sample_move(m, 0.2) for m in prog.moves if m.g in (1, 2, 3) and m.end[2] < 0
                     and m.start[2] < 0])
    assert all(pocket.contains(shapely.Point(x, y)) for x, y in pts[::7, :2])
    wall = shapely.LinearRing(pocket.exterior.coords)
    assert min(wall.distance(shapely.Point(x, y)) for x, y in pts[::3, :2]) >= 3.0 - 0.01


def test_side_for_a_drawing_of_several_outlines_is_refused(tmp_path):
    d = ezdxf.new("R2010")
    d.modelspace().add_lwpolyline([(0, 0), (50, 0), (50, 30), (0, 30)], close=True)
    d.modelspace().add_circle((10, 10), 3)
    d.saveas(tmp_path / "two.dxf")
    with pytest.raises(InputError, match="applies to one outline and .* holds 2"):
        run(tmp_path / "two.dxf", tool_diameter=2.0, side="inside")


def test_a_convex_part_cut_outside_takes_any_tool(tmp_path):
    # nothing bends toward a tool outside a convex outline and no gap closes
    # on it: the largest tool is "any" (None), not the 1e12 mm that points of
    # one straight edge, 1e-16 mm "ahead" of each other, made of it
    d = ezdxf.new("R2010")
    d.modelspace().add_lwpolyline([(0, 0), (100, 0), (100, 60), (0, 60)], close=True)
    d.modelspace().add_circle((30, 30), 5)
    d.saveas(tmp_path / "plate.dxf")
    res = run(tmp_path / "plate.dxf", tool_diameter=6.0)
    by_side = dict(zip(res.sides, res.reports))
    assert by_side["outside"].largest_tool_diameter is None
    assert by_side["inside"].largest_tool_diameter == pytest.approx(10.0, rel=1e-3)  # the hole's diameter, 2r (handbook)
