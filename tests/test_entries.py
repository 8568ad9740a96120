"""Entries, leads, heights and overlap: no written move cuts into the part.

Every program here is read back from its written text with the test's own
interpreter (``gcode_reader``, written from NISTIR 6556: Kramer, Proctor,
Messina, "The NIST RS274/NGC Interpreter - Version 3", 2000) and checked with
shapely, independently of pathgen's clearance kernel: the tool disc swept
along every move below the stock top is the path's buffer (shapely 2
documentation, ``shapely.buffer``: all points within the distance; its round
joins are polygons of ``quad_segs`` segments per quarter circle, inscribed, so
they fall short of the true disc by r(1 - cos(pi/(4 quad_segs)))), and it must
not reach the part's polygon deeper than the tolerance (``shapely.intersects``,
``shapely.distance``: the smallest Cartesian distance between geometries).
"""

from __future__ import annotations

import io
import math
import re

import numpy as np
import pytest
import shapely
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import gcode_reader as gr
from pathgen.cli import main
from pathgen.errors import InputError
from pathgen.pipeline import run

TOL = 0.01
QUAD = 16


# -- invented parts ---------------------------------------------------------------
def _resample(poly, n):
    """n points evenly spaced along a shapely polygon's exterior, counter-clockwise."""
    ring = shapely.LineString(shapely.get_coordinates(shapely.geometry.polygon.orient(poly, 1).exterior))
    d = np.linspace(0.0, ring.length, n, endpoint=False)
    return shapely.get_coordinates(shapely.line_interpolate_point(ring, d))


def stadium(width, length, n=200):
    """A closed slot: straight sides joined by half circles (counter-clockwise)."""
    r, a = width / 2, length / 2 - width / 2
    th = np.linspace(-np.pi / 2, np.pi / 2, n // 2)
    return np.vstack([np.c_[a + r * np.cos(th), r * np.sin(th)], np.c_[-a - r * np.cos(th), -r * np.sin(th)]])


def keyhole(n=360):
    """A round hole of radius 6 with a 4 mm wide slot out to x = 20."""
    shape = shapely.Point(0, 0).buffer(6, quad_segs=64).union(
        shapely.LineString([(0, 0), (18, 0)]).buffer(2, quad_segs=64))
    return _resample(shape, n)


def gear(n=600, teeth=10):
    """A gear-like outline: flat-topped teeth, radius 17..21."""
    th = np.linspace(0, 2 * np.pi, n, endpoint=False)
    r = 19 + 2 * np.tanh(3 * np.cos(teeth * th)) / np.tanh(3)
    return np.c_[r * np.cos(th), r * np.sin(th)]


def circle(radius, n=120):
    th = np.linspace(0, 2 * np.pi, n, endpoint=False)
    return np.c_[radius * np.cos(th), radius * np.sin(th)]


# (name, points, tool diameter, side).  The simple disc (cut outside) and
# hole (cut inside) get every entry x lead, with 1 and 2 passes swapped
# between them (so each side x entry x lead runs, and each entry x lead with
# both pass counts); the harder parts three programs each, the entries and
# leads rotated so that every pair appears among them.
SIMPLE = {
    "disc-outside": (circle(20.0, 60), 6.0, "outside"),
    "hole-inside": (circle(10.0, 60), 6.0, "inside"),
}
CASES = {
    "slot": (stadium(6, 34, 120), 4.0, "inside"),
    "pocket": (stadium(10, 40, 120), 6.0, "inside"),
    "keyhole": (keyhole(240), 3.0, "inside"),
    "gear-inside": (gear(240), 3.0, "inside"),
    "gear-outside": (gear(240), 3.0, "outside"),
    "tight-hole": (circle(3.3, 60), 6.0, "inside"),
}
ENTRIES = ("plunge", "ramp", "helix")
LEADS = ("arc", "line", "none")


def combos(name):
    """(entry, lead, passes) for a case."""
    if name in SIMPLE:
        flip = list(SIMPLE).index(name)
        return [(e, ld, 1 + (i + j + flip) % 2) for i, e in enumerate(ENTRIES) for j, ld in enumerate(LEADS)]
    i = list(CASES).index(name)
    return [(ENTRIES[(i + j) % 3], LEADS[j], 1 + (i + j) % 2) for j in range(3)]


# -- reading back and the independent check ---------------------------------------
def below_stock_runs(prog, step=0.05, top=0.0):
    """Runs of points (x, y) sampled along the replayed moves, where z < top."""
    runs, cur = [], []
    for m in prog.moves:
        if m.start[2] is None or m.start[0] is None:
            continue
        pts = gr.sample(m, step)
        below = pts[:, 2] < top
        if not below.any():
            if len(cur):
                runs.append(np.array(cur))
            cur = []
            continue
        cur.extend(pts[below, :2].tolist())
    if len(cur):
        runs.append(np.array(cur))
    return runs


def part_region(contour, side):
    """The part as a polygon: the inside of the contour for an outside cut,
    everything around the hole (a large frame minus the hole) for an inside cut."""
    t = contour.sample(8000)
    poly = shapely.Polygon(contour(t))
    if side == "outside":
        return poly
    x0, y0, x1, y1 = poly.bounds
    m = 10 * max(x1 - x0, y1 - y0)
    return shapely.box(x0 - m, y0 - m, x1 + m, y1 + m).difference(poly)


def shapely_clearance(runs, contour, side):
    """Smallest distance (shapely) from the below-stock path to the part's edge,
    and whether any path point lies inside the part."""
    part = part_region(contour, side)
    geoms = [shapely.LineString(r) if len(r) > 1 else shapely.Point(r[0]) for r in runs]
    path = shapely.GeometryCollection(geoms)
    ring = contour(contour.sample(8000))
    edges = shapely.linestrings(np.stack([ring, np.roll(ring, -1, axis=0)], axis=1))
    # nearest edge of every path point (shapely STRtree.query_nearest)
    pts = shapely.points(np.vstack(runs))
    _, dist = shapely.STRtree(edges).query_nearest(pts, return_distance=True, all_matches=False)
    inside_part = any(shapely.contains_xy(part, r[:, 0], r[:, 1]).any() for r in runs)
    return float(dist.min()), inside_part, path, part


def assert_no_gouge(text, contour, r, side):
    prog = gr.read(text)
    runs = below_stock_runs(prog)
    assert runs, "the program never goes below the stock top"
    dist, inside_part, path, part = shapely_clearance(runs, contour, side)
    assert not inside_part
    # the swept disc, a little smaller than r - tol for shapely's inscribed
    # round joins and the 0.05 mm sampling, must not reach the part
    slack = r * (1 - math.cos(math.pi / (4 * QUAD))) + 1e-3
    swept = shapely.buffer(path, r - TOL - slack, quad_segs=QUAD)
    assert not shapely.intersects(swept, part), f"clearance {dist:.5f} < {r - TOL:.5f}"
    assert dist >= r - TOL - 1e-4
    return dist, prog


def header_clearance(text):
    m = re.search(r"smallest clearance of the tool center to the part: ([0-9.]+) mm", text)
    return float(m.group(1)) if m else None


def _program(tmp, name, pts, tool, side, entry, lead, passes):
    nc = tmp / f"{name}-{entry}-{lead}-{passes}.nc"
    res = run(pts, closed=True, tool_diameter=tool, side=side, gcode=nc, lead=lead, entry=entry,
              depth=2.0, step_down=2.0 / passes)
    return res, nc.read_text()


@pytest.mark.parametrize("name", list(SIMPLE) + list(CASES))
def test_every_entry_and_lead_keeps_clear_of_the_part(tmp_path, name):
    pts, tool, side = {**SIMPLE, **CASES}[name]
    r = tool / 2
    for entry, lead, passes in combos(name):
        res, text = _program(tmp_path, name, pts, tool, side, entry, lead, passes)
        dist, prog = assert_no_gouge(text, res.contour, r, side)
        # the header states what the kernel measured; shapely agrees (to its
        # 8000-point polygon, the 0.05 mm sampling and the written 4 decimals)
        stated = header_clearance(text)
        assert stated is not None and stated >= r - TOL
        assert stated == pytest.approx(dist, abs=2e-3)
        # every pass reaches its depth, the entry is the one asked for or
        # (a helix without room) a ramp, and the program says so
        zs = sorted({m.end[2] for m in prog.moves if m.g in (1, 2, 3)})
        assert zs[0] == pytest.approx(-2.0, abs=1e-4)
        info = res.toolpath.info
        assert info["passes"] == passes
        assert info["entry"] == entry or (entry == "helix" and info["entry"] == "ramp"
                                          and "no room for a helix" in text)


def test_issue_cases_with_default_options(tmp_path):
    # the slot and the pocket from the issue, every option at its default
    for pts, tool in ((stadium(6, 34), 4.0), (stadium(10, 40), 6.0)):
        nc = tmp_path / "a.nc"
        res = run(pts, closed=True, tool_diameter=tool, side="inside", gcode=nc, depth=3, step_down=1, force=True)
        assert_no_gouge(nc.read_text(), res.contour, tool / 2, "inside")
        info = res.toolpath.info
        assert info["entry"] == "plunge" and info["lead"] == "arc"
        assert 0 < info["lead_in_length"] < tool  # shrunk to the room, and said so
        assert any("shrunk" in n for n in info["notes"])


def test_gear_with_a_seam_in_a_tooth_gap(tmp_path):
    # a seam given by the user in the valley between two teeth, cut inside:
    # the lead is fitted there (or left out), never through a tooth
    pts, tool, side = CASES["gear-inside"]
    for seam in ((17.0 * math.cos(math.pi / 10), 17.0 * math.sin(math.pi / 10)), (21.0, 0.0)):
        nc = tmp_path / "g.nc"
        res = run(pts, closed=True, tool_diameter=8.0, side="inside", gcode=nc, seam=seam, force=True)
        assert_no_gouge(nc.read_text(), res.contour, 4.0, "inside")
        # the seam stays where the user put it: no other seam is tried
        assert not any("the cut starts at" in n for n in res.toolpath.info["notes"])


def test_ramp_descends_at_the_angle(tmp_path):
    # trigonometry: a ramp at angle a descends tan(a) per unit of travel
    nc = tmp_path / "ramp.nc"
    run(stadium(10, 40), closed=True, tool_diameter=6.0, side="inside", gcode=nc, entry="ramp",
        ramp_angle=5.0, depth=2.0, step_down=1.0)
    prog = gr.read(nc.read_text())
    ramps = [m for m in prog.moves if m.g in (1, 2, 3) and m.end[2] < m.start[2]
             and (m.start[0], m.start[1]) != (m.end[0], m.end[1])]
    assert len(ramps) >= 2
    total_len = total_drop = 0.0
    for m in ramps:
        if m.center is None:
            length = math.hypot(m.end[0] - m.start[0], m.end[1] - m.start[1])
        else:
            length = math.hypot(m.start[0] - m.center[0], m.start[1] - m.center[1]) * abs(gr.sweep_of(m))
        drop = m.start[2] - m.end[2]
        assert drop / length == pytest.approx(math.tan(math.radians(5.0)), rel=5e-3)
        total_len += length
        total_drop += drop
    # two passes of 1 mm each
    assert total_drop == pytest.approx(2.0, abs=1e-3)
    assert total_drop / total_len == pytest.approx(math.tan(math.radians(5.0)), rel=1e-3)


def test_helix_fits_the_hole(tmp_path):
    # common practice: r_helix + r_tool <= R_hole - tolerance; the helix
    # descends at most tan(angle) per unit of travel
    R, tool = 10.0, 6.0
    nc = tmp_path / "helix.nc"
    run(circle(R, 200), closed=True, tool_diameter=tool, side="inside", gcode=nc, entry="helix",
        ramp_angle=4.0, depth=3.0, step_down=1.5, report=tmp_path / "helix.json", plot=tmp_path / "helix.svg")
    prog = gr.read(nc.read_text())
    # the report lists the entry, the leads, the heights and the clearance found
    import json

    section = json.loads((tmp_path / "helix.json").read_text())["toolpath"]
    assert section["entry"] == "helix" and section["ramp_angle"] == pytest.approx(4.0)
    assert section["helix_radius"] > 0 and section["lead"] == "arc" and section["lead_in_length"] > 0
    assert section["safe_height"] == 5.0 and section["retract_height"] == 1.0
    assert section["clearance"]["min"] >= tool / 2 - TOL
    assert "smallest clearance of the tool center" in (tmp_path / "helix.txt").read_text()
    # the picture marks the entry, the helix, the start of the cut and the direction
    svg = (tmp_path / "helix.svg").read_text()
    for gid in ("entry", "helix", "start", "direction"):
        assert f'id="{gid}' in svg
    helix = [m for m in prog.moves if m.g in (2, 3) and m.end[2] < m.start[2]]
    assert len(helix) >= 8
    for m in helix:
        rh = math.hypot(m.start[0] - m.center[0], m.start[1] - m.center[1])
        room = R - math.hypot(*m.center)  # distance from the helix center to the wall
        assert rh + tool / 2 <= room - TOL + 1e-4
        assert (m.start[2] - m.end[2]) / (rh * abs(gr.sweep_of(m))) <= math.tan(math.radians(4.0)) * (1 + 1e-3)


def test_a_hole_too_tight_for_a_helix_ramps_and_says_so(tmp_path):
    nc = tmp_path / "tight.nc"
    res = run(circle(3.3), closed=True, tool_diameter=6.0, side="inside", gcode=nc, entry="helix")
    assert res.toolpath.info["entry"] == "ramp"
    text = nc.read_text()
    assert "no room for a helix" in text
    assert_no_gouge(text, res.contour, 3.0, "inside")


def test_lines_only_has_no_arcs(tmp_path):
    # "--moves lines": arcs of leads and helices are written as lines too
    for entry in ("plunge", "helix", "ramp"):
        nc = tmp_path / f"lines-{entry}.nc"
        res = run(stadium(10, 40), closed=True, tool_diameter=6.0, side="inside", gcode=nc, entry=entry,
                  lead="arc", moves="lines", depth=2, step_down=1)
        text = nc.read_text()
        blocks = [ln for ln in text.splitlines() if ln and not ln.startswith("(")]
        assert not any(re.search(r"\bG0?[23]\b", b) for b in blocks)
        assert_no_gouge(text, res.contour, 3.0, "inside")


def test_heights_rapids_stay_at_or_above_the_retract_height(tmp_path):
    # common practice: traverses at the safe height, entries from the retract height at feed
    nc = tmp_path / "h.nc"
    run(circle(20), closed=True, tool_diameter=6.0, side="outside", gcode=nc, safe_height=12.0,
        retract_height=2.0, depth=3, step_down=1)
    prog = gr.read(nc.read_text())
    rapids = [m for m in prog.moves if m.g == 0 and m.start[0] is not None]
    across = [m for m in rapids if (m.start[0], m.start[1]) != (m.end[0], m.end[1])]
    assert across and all(min(m.start[2], m.end[2]) >= 2.0 for m in across)
    assert all(m.end[2] >= 2.0 or m.end[2] > m.start[2] for m in rapids)  # rapids go down only to 2
    downs = [m for m in prog.moves if m.g == 1 and (m.start[0], m.start[1]) == (m.end[0], m.end[1])
             and m.end[2] < m.start[2]]
    assert len(downs) == 3 and all(m.start[2] == 2.0 for m in downs)
    assert max(m.end[2] for m in prog.moves) == 12.0
    with pytest.raises(InputError, match="retract height 6 mm is above the safe height 5 mm"):
        run(circle(20), closed=True, tool_diameter=6.0, gcode=tmp_path / "x.nc", retract_height=6.0)


def test_overlap_goes_on_past_the_start(tmp_path):
    lengths = {}
    for overlap in (0.0, 5.0):
        nc = tmp_path / f"o{overlap}.nc"
        res = run(circle(20), closed=True, tool_diameter=6.0, side="outside", gcode=nc, overlap=overlap,
                  depth=1)
        prog = gr.read(nc.read_text())
        cut = [m for m in prog.moves if m.g in (1, 2, 3) and m.start[2] == m.end[2] == -1.0]
        total = 0.0
        for m in cut:
            if m.center is None:
                total += math.hypot(m.end[0] - m.start[0], m.end[1] - m.start[1])
            else:
                total += math.hypot(m.start[0] - m.center[0], m.start[1] - m.center[1]) * abs(gr.sweep_of(m))
        lengths[overlap] = total
        assert res.toolpath.info["lead_in_length"] == res.toolpath.info["lead_out_length"] == 6.0
    assert lengths[5.0] - lengths[0.0] == pytest.approx(5.0, abs=1e-3)


def test_lead_length_option(tmp_path):
    nc = tmp_path / "l.nc"
    res = run(circle(20), closed=True, tool_diameter=6.0, gcode=nc, lead_length=2.5, lead="arc")
    assert res.toolpath.info["lead_in_length"] == 2.5
    prog = gr.read(nc.read_text())
    arcs = [m for m in prog.moves if m.g in (2, 3)]
    radii = {round(math.hypot(m.start[0] - m.center[0], m.start[1] - m.center[1]), 3) for m in arcs}
    assert 2.5 in radii


def test_inch_program_keeps_clear(tmp_path):
    # the same slot in inches: options read as inches, checks done in mm
    pts = stadium(6, 34) / 25.4
    nc = tmp_path / "in.nc"
    res = run(pts, closed=True, units="inch", tool_diameter=4 / 25.4, side="inside", gcode=nc, depth=0.1,
              step_down=0.05, tolerance=0.01 / 25.4)
    text = nc.read_text()
    assert "G20" in text
    prog = gr.read(text)
    runs = [r * 25.4 for r in below_stock_runs(prog)]
    dist, inside_part, path, part = shapely_clearance(runs, res.contour, "inside")
    assert not inside_part and dist >= 2.0 - TOL - 1e-3
    # the toolpath is mm (units are converted only when written): 0.04 in
    assert res.toolpath.info["retract_height"] == pytest.approx(0.04 * 25.4)
    notes = res.toolpath.info["notes"]
    assert notes and all(" inch to fit at " in n for n in notes if "shrunk" in n)
    assert "smallest clearance of the tool center to the part: 0.07" in text


def test_refusal_is_one_line_and_writes_nothing(tmp_path, monkeypatch):
    # the last net: if a planned move would cut into the part (here a lead
    # forced through the opposite wall of the slot), the command refuses
    import pathgen.path.build as build

    real = build._plan_entry

    def bad_plan(chain, **kw):
        plan = real(chain, **kw)
        s = chain.start[0]
        plan["lead_in"] = [(1, (s[0], s[1] - 6.0), (s[0], s[1]), (0.0, 0.0))]
        plan["entry_xy"] = np.array([s[0], s[1] - 6.0])
        return plan

    monkeypatch.setattr(build, "_plan_entry", bad_plan)
    pts = tmp_path / "slot.csv"
    p = stadium(6, 34)
    pts.write_text("x,y\n" + "".join(f"{x:.4f},{y:.4f}\n" for x, y in np.vstack([p, p[:1]])))
    out, err = io.StringIO(), io.StringIO()
    nc = tmp_path / "slot.nc"
    code = main(["gcode", str(pts), "-o", str(nc), "--tool-diameter", "4", "--side", "inside", "--quiet"],
                out=out, err=err)
    assert code == 2
    msg = [ln for ln in err.getvalue().splitlines() if ln and not ln.startswith("CAUTION")]
    assert len(msg) == 1 and "would cut" in msg[0] and "into the part at (" in msg[0]
    assert "Traceback" not in err.getvalue()
    assert not nc.exists()


@settings(max_examples=6, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(seed=st.integers(0, 10_000), tool=st.floats(1.0, 10.0), side=st.sampled_from(["inside", "outside"]),
       entry=st.sampled_from(["plunge", "ramp", "helix"]), lead=st.sampled_from(["arc", "line", "none"]))
def test_random_outlines_never_gouge(tmp_path_factory, seed, tool, side, entry, lead):
    # property: a written program keeps clear of the part, or the command refuses
    rng = np.random.default_rng(seed)
    th = np.linspace(0, 2 * np.pi, 180, endpoint=False)
    rad = 15 + sum(rng.uniform(-2, 2) * np.cos(k * th + rng.uniform(0, 6)) for k in range(2, 6))
    p = np.c_[rad * np.cos(th), rad * np.sin(th)]
    d = tmp_path_factory.mktemp("prop")
    pts = d / "part.csv"
    pts.write_text("x,y\n" + "".join(f"{x:.4f},{y:.4f}\n" for x, y in np.vstack([p, p[:1]])))
    nc = d / "part.nc"
    out, err = io.StringIO(), io.StringIO()
    code = main(["gcode", str(pts), "-o", str(nc), "--tool-diameter", f"{tool:.3f}", "--side", side,
                 "--entry", entry, "--lead", lead, "--depth", "2", "--step-down", "1", "--quiet"],
                out=out, err=err)
    if code == 2:
        assert not nc.exists() and "Traceback" not in err.getvalue()
        return
    from pathgen.pipeline import run as run_
    checked = run_(pts, tool_diameter=tool, side=side)
    # the exit status is fixed by the check: 1 exactly when the report says the
    # tool cannot cut some spot, else 0 (docs/cli.md, Exit status)
    assert code == (1 if checked.report.tool_cannot_reach else 0)
    contour = checked.contour
    assert_no_gouge(nc.read_text(), contour, tool / 2, side)
