"""The offset's trimming, driven by real outlines whose tool-center curve
crosses itself, checked against an outside reference: shapely's buffer.

For a closed outline P and a tool of radius r, the tool center of an
outside cut runs on the outer boundary of P grown by r (the Minkowski sum
of P and a disc), and of a pocket on the boundary of P shrunk by r; shapely
computes both with ``buffer`` (shapely 2 documentation, ``buffer``; GEOS
offsets with round joins, whose chords here are ``quad_segs`` = 64 per
quarter circle) (sources: shapely, farouki-neff-1990).  Where two parts of
the outline are closer than the tool's diameter (a narrow mouth, a narrow
neck) or the outline bends tighter than the tool, the offset curve makes
loops and the path must be trimmed; the result must still lie on the
buffer's boundary and, where it goes, follow all of it.
"""

from __future__ import annotations

import math
import re
from types import SimpleNamespace

import numpy as np
import pytest
import shapely

from gcode_reader import sample
from pathgen import Cut, Tool, clean_points, fit_outline
from pathgen.errors import InputError
from pathgen.path.build import make_toolpath

TOL = 0.01
R = 3.0
# The buffer's round joins are chords of a circle of radius r, 64 per
# quarter turn: sagitta r(1 - cos(π/128)) (sources: sagitta); the outline
# itself is a polygon of 20000 points, whose chords are far finer.
SLACK = R * (1 - math.cos(math.pi / 128)) + 1e-4


def _c_shape(gap, R_out=20.0, r_in=12.0, n=400):
    # a thick ring opened by a mouth of width ``gap`` (an invented clip)
    ao, ai = math.asin(gap / 2 / R_out), math.asin(gap / 2 / r_in)
    outer = np.linspace(ao, 2 * np.pi - ao, n)
    inner = np.linspace(2 * np.pi - ai, ai, int(n * r_in / R_out))
    return np.vstack([np.c_[R_out * np.cos(outer), R_out * np.sin(outer)],
                      np.c_[r_in * np.cos(inner), r_in * np.sin(inner)]])


def _bean(neck, n=400):
    # two lobes joined by a neck of width ``neck`` (an invented cam plate)
    t = np.linspace(0, 2 * np.pi, n, endpoint=False)
    rr = 20 - (20 - neck / 2) * np.exp(-((np.mod(t, np.pi) - np.pi / 2) / 0.25) ** 2)
    return np.c_[1.5 * rr * np.cos(t), rr * np.sin(t)]


def _hook():
    from pathlib import Path

    text = (Path(__file__).resolve().parent.parent / "samples" / "hook.csv").read_text()
    rows = [ln for ln in text.splitlines() if ln and not ln.startswith("#")][1:]
    return np.array([[float(v) for v in ln.split(",")] for ln in rows])


def _path_points(tp, step=0.02):
    """Points along the cutting moves, every ``step`` mm or finer, by the
    tests' own G-code interpreter (G2/G3 from start, end and center)."""
    cut = tp.kind != 0
    moves = [SimpleNamespace(start=tuple(s), end=tuple(e), center=None if k == 1 else tuple(c), g=int(k))
             for k, s, e, c in zip(tp.kind[cut], tp.start[cut], tp.end[cut], tp.center[cut])]
    return np.vstack([sample(m, step)[:, :2] for m in moves])


def _distance(points, vertices):
    """Distance from each point to the polyline through ``vertices`` (the
    segments between consecutive rows), by shapely's nearest-neighbour query
    (shapely 2 documentation, ``STRtree.query_nearest``)."""
    segments = shapely.linestrings(np.stack([vertices[:-1], vertices[1:]], axis=1))
    _, d = shapely.STRtree(segments).query_nearest(shapely.points(points), return_distance=True,
                                                   all_matches=False)
    return d


def _outline_polygon(contour):
    return shapely.Polygon(contour(np.linspace(contour.breaks[0], contour.breaks[-1], 20000, endpoint=False)))


def _run(points, side):
    contour = fit_outline(clean_points(points, closed=True))
    tp = make_toolpath(contour, Tool(2 * R), Cut(side=side, tolerance=TOL), lead="none")
    return contour, tp


def test_clip_with_a_mouth_cut_outside_follows_the_grown_outline():
    # A mouth wider than the tool (10 mm, tool 6 mm): the tool goes in and
    # round the inside, as the grown outline's exterior does.
    contour, tp = _run(_c_shape(10.0), "outside")
    assert not tp.info["trimmed"]
    ext = np.asarray(_outline_polygon(contour).buffer(R, quad_segs=64).exterior.coords)
    path = _path_points(tp)
    assert _distance(path, ext).max() <= TOL + SLACK  # every point of the path on the exterior
    dense_ext = np.asarray(shapely.segmentize(shapely.LinearRing(ext), 0.02).coords)
    assert _distance(dense_ext, np.vstack([path, path[:1]])).max() <= TOL + SLACK  # and all of it followed
    assert np.hypot(*path.T).min() < 12.0 + R + 0.1  # the inside of the clip is cut


def _left_uncut(message):
    m = re.search(r"region around \((\S+), (\S+)\) mm \((\S+) mm²", message)
    assert m, message
    return float(m.group(1)), float(m.group(2)), float(m.group(3))


def test_clip_with_a_mouth_narrower_than_the_tool_is_refused_not_half_cut():
    # A 2 mm mouth and a 6 mm tool: the tool passes the mouth by, and the
    # clip's inside (a disc of radius 12 behind the mouth) would stay as
    # material: a disc with a slot instead of a clip.  No program: the
    # message says where and how much.  The tool center could stand in the
    # inner disc shrunk by the tool radius: area π(12 - 3)² (geometry).
    with pytest.raises(InputError) as info:
        _run(_c_shape(2.0), "outside")
    x, y, area = _left_uncut(str(info.value))
    assert math.hypot(x, y) < 12.0 - R
    assert area == pytest.approx(math.pi * (12.0 - R) ** 2, rel=0.01)


def test_hook_sample_cut_outside_follows_the_grown_outline():
    # The hook sample's 2 mm slot is too tight for a 6 mm tool: the offset
    # loops there and is trimmed; the path is the grown outline's exterior.
    contour, tp = _run(_hook(), "outside")
    assert any(s["reason"] in ("tight", "overlap") for s in tp.info["trimmed"])
    ext = np.asarray(_outline_polygon(contour).buffer(R, quad_segs=64).exterior.coords)
    path = _path_points(tp)
    assert _distance(path, ext).max() <= TOL + SLACK
    dense_ext = np.asarray(shapely.segmentize(shapely.LinearRing(ext), 0.02).coords)
    assert _distance(dense_ext, np.vstack([path, path[:1]])).max() <= TOL + SLACK


def test_pocket_with_a_neck_narrower_than_the_tool():
    # A 3 mm neck and a 6 mm tool: the shrunk outline falls apart into two
    # lobes (shapely says so).  One closed path cuts one lobe only, so no
    # program is made: the message names the other lobe and its area, as
    # shapely measures it.
    contour = fit_outline(clean_points(_bean(3.0), closed=True))
    shrunk = _outline_polygon(contour).buffer(-R, quad_segs=64)
    assert shrunk.geom_type == "MultiPolygon" and len(shrunk.geoms) == 2
    with pytest.raises(InputError, match="falls apart into separate regions") as info:
        make_toolpath(contour, Tool(2 * R), Cut(side="inside", tolerance=TOL), lead="none")
    x, y, area = _left_uncut(str(info.value))
    lobe = next(g for g in shrunk.geoms if g.contains(shapely.Point(x, y)))
    assert area == pytest.approx(lobe.area, rel=0.01)


def test_pocket_with_a_neck_wider_than_the_tool_is_one_loop():
    # An 8 mm neck and a 6 mm tool: the shrunk outline is one region and the
    # path follows all of its boundary, through the neck, with nothing to trim
    # there.
    contour, tp = _run(_bean(8.0), "inside")
    shrunk = _outline_polygon(contour).buffer(-R, quad_segs=64)
    assert shrunk.geom_type == "Polygon"
    ring = np.asarray(shrunk.exterior.coords)
    path = _path_points(tp)
    assert _distance(path, ring).max() <= TOL + SLACK
    dense = np.asarray(shapely.segmentize(shapely.LinearRing(ring), 0.02).coords)
    assert _distance(dense, np.vstack([path, path[:1]])).max() <= TOL + SLACK


@pytest.mark.parametrize("gap", [2.0, 5.0])
def test_largest_tool_counts_a_narrow_mouth_as_well_as_a_bend(gap):
    # The clip's lips are ``gap`` apart: a tool reaches their faces only if
    # it fits between them.  Reference: the morphological opening (shapely:
    # shrink by r, grow by r) keeps every point of the outline's outside
    # exactly when a tool of radius r reaches all of it; just under the
    # stated diameter it does, just over it the lips' faces are lost
    # (sources: shapely).  The outline's tightest bend toward the tool is
    # R 12 (the inner circle), so without the mouth the answer would be 24.
    from pathgen import check

    contour = fit_outline(clean_points(_c_shape(gap), closed=True))
    big = check(contour, tool=Tool(1.0), cut=Cut(side="outside", tolerance=TOL)).largest_tool_diameter
    assert big == pytest.approx(gap, abs=0.02)
    outside = shapely.box(-40, -40, 40, 40).difference(_outline_polygon(contour))

    def lost(r):  # how far the opened outside falls short of the outline
        opened = outside.buffer(-r, quad_segs=32).buffer(r, quad_segs=32)
        near = shapely.Point(0, 0).buffer(30.0)  # the box's own corners are no concern
        return outside.difference(opened).intersection(near).area

    assert lost(0.49 * big) < 0.05
    assert lost(0.51 * big + 0.02) > 1.0
