"""The clearance kernel: distance from the tool-center path to the part.

Outside references:
* concentric circles and a circle and a line: handbook plane geometry (the
  distance between concentric circles is the difference of the radii; from
  a point to a circle, |distance to the center - radius|) -- from memory;
* shapely 2 documentation, ``shapely.distance`` (minimum Cartesian distance
  between two geometries) and ``shapely.buffer`` / ``contains_xy``: an
  independent measurement on a dense polygon of the same contour.
"""

from __future__ import annotations

import numpy as np
import pytest

from pathgen.errors import InputError
from pathgen.path.clearance import clearance
from pathgen.path.model import ARC_CCW, ARC_CW, LINE, RAPID
from pathgen.spline import fit

from conftest import circle_points, star_contour


def _one(kind, s, e, c=(0.0, 0.0)):
    return (np.array([kind]), np.array([s], float), np.array([e], float), np.array([c], float))


@pytest.fixture(scope="module")
def disc():
    return fit(circle_points(10.0, 200), closed=True)


def test_concentric_circle_clearance(disc):
    # handbook geometry (from memory): concentric circles are R2 - R1 apart
    k, s, e, c = _one(ARC_CW, (13.5, 0, -1), (13.5, 0, -1))
    res = clearance(k, s, e, c, disc, tool_radius=3.0, side="outside", tolerance=0.01)
    assert res.min_clearance == pytest.approx(3.5, abs=1e-6)
    assert res.margin == pytest.approx(0.5, abs=1e-6)
    assert res.ok and res.move == 0 and res.checked == 1


def test_inside_circle_and_sides(disc):
    # a hole cut inside: an arc of radius 6 about the center is 4 from the wall
    k, s, e, c = _one(ARC_CCW, (6, 0, -1), (0, 6, -1))
    inside = clearance(k, s, e, c, disc, tool_radius=3.0, side="inside", tolerance=0.01)
    # (beyond r + 4 tol the kernel measures to its polyline: within tol/20)
    assert inside.min_clearance == pytest.approx(4.0, abs=0.01 / 20) and inside.ok
    # the same move seen from a cut outside is on the part's side: negative, gouges
    outside = clearance(k, s, e, c, disc, tool_radius=3.0, side="outside", tolerance=0.01)
    assert outside.min_clearance == pytest.approx(-4.0, abs=0.01 / 20)
    assert not outside.ok and outside.gouges[0][0] == 0
    assert outside.gouge_depth[0] == pytest.approx(7.0, abs=0.01 / 20)


def test_line_grazing_the_circle(disc):
    # a line tangent to a circle of radius 12.5 (point-to-line distance 12.5, from memory)
    k, s, e, c = _one(LINE, (-20, 12.5, -1), (20, 12.5, -1))
    res = clearance(k, s, e, c, disc, tool_radius=3.0, side="outside", tolerance=0.01)
    assert res.min_clearance == pytest.approx(2.5, abs=1e-6)
    assert res.where[0] == pytest.approx(0.0, abs=1e-3) and res.where[2] == -1
    assert res.gouges[0][1] == pytest.approx(0.5, abs=1e-6)


@pytest.mark.parametrize("x0", np.linspace(-20.3, -19.7, 7))
def test_grazing_line_exact_wherever_its_samples_fall(disc, x0):
    # the line y = 12.5 passes 2.5 from the circle of radius 10 (handbook
    # point-to-line distance, from memory) wherever the line starts: the
    # distance is refined to the exact curve, not left at the polyline's
    # chord error (up to 1e-4 mm before the stationary-point step)
    k, s, e, c = _one(LINE, (x0, 12.5, -1), (x0 + 40.17, 12.5, -1))
    res = clearance(k, s, e, c, disc, tool_radius=3.0, side="outside", tolerance=0.01)
    assert res.min_clearance == pytest.approx(2.5, abs=1e-6)
    assert res.where[0] == pytest.approx(0.0, abs=1e-2)


def test_stock_top_ignores_moves_above_and_clips_crossings(disc):
    # a rapid straight across the part above the stock top: not checked
    k, s, e, c = _one(RAPID, (-20, 0, 5), (20, 0, 5))
    res = clearance(k, s, e, c, disc, tool_radius=3.0, side="outside", tolerance=0.01)
    assert res.ok and res.checked == 0 and res.move == -1
    # a plunge beside the part counts only below z = 0; a ramp that enters
    # the stock half-way is checked from there on
    kind = np.array([LINE, LINE])
    s = np.array([[13.2, 0, 5], [-12.0, 20, 1]])
    e = np.array([[13.2, 0, -2], [-12.0, -20, -1]])
    res = clearance(kind, s, e, np.zeros((2, 2)), disc, tool_radius=3.0, side="outside", tolerance=0.01)
    assert res.checked == 2
    # the ramp's part below z = 0 runs from y = 0 down to y = -20: its nearest
    # point to the circle is (-12, 0) at z = 0, 2 mm away
    assert res.min_clearance == pytest.approx(2.0, abs=1e-6)
    assert res.move == 1 and res.where[1] == pytest.approx(0.0, abs=1e-3)
    assert res.gouges == [(1, pytest.approx(1.0, abs=1e-6))]
    res = clearance(kind, s, e, np.zeros((2, 2)), disc, tool_radius=3.0, side="outside",
                    tolerance=0.01, stock_top=-1.5)
    assert res.checked == 1 and res.ok  # only the plunge reaches below -1.5


def test_helix_arc_changes_z(disc):
    # a helical arc (z changes with the angle) inside the hole, radius 2 about
    # (5, 0): 10 - 7 = 3 from the wall at its far side
    k, s, e, c = _one(ARC_CCW, (7, 0, 1), (7, 0, -1), (5, 0))
    res = clearance(k, s, e, c, disc, tool_radius=3.0, side="inside", tolerance=0.01)
    assert res.min_clearance == pytest.approx(3.0, abs=1e-5)
    assert res.where[0] == pytest.approx(7.0, abs=1e-2)
    # it is below the stock top only for the second half of the turn
    assert res.where[2] == pytest.approx(-1.0, abs=1e-2)


def test_open_contour_side():
    # an open straight edge along x from 0 to 20; cut "outside" = right of travel
    x = np.linspace(0, 20, 21)
    edge = fit(np.c_[x, np.zeros_like(x)], closed=False)
    kind = np.array([LINE])
    right = clearance(kind, [[2, -3, -1]], [[18, -3, -1]], np.zeros((1, 2)), edge,
                      tool_radius=3.0, side="outside", tolerance=0.01)
    left = clearance(kind, [[2, 3, -1]], [[18, 3, -1]], np.zeros((1, 2)), edge,
                     tool_radius=3.0, side="outside", tolerance=0.01)
    assert right.min_clearance == pytest.approx(3.0, abs=1e-9) and right.ok
    assert left.min_clearance == pytest.approx(-3.0, abs=1e-9) and not left.ok


def test_bad_arguments(disc):
    k, s, e, c = _one(LINE, (0, 0, -1), (1, 0, -1))
    with pytest.raises(InputError, match="not 'on'"):
        clearance(k, s, e, c, disc, tool_radius=3.0, side="on", tolerance=0.01)
    with pytest.raises(InputError, match="tool_radius must be"):
        clearance(k, s, e, c, disc, tool_radius=0.0, side="inside", tolerance=0.01)
    with pytest.raises(InputError, match="not finite"):
        clearance(k, s, np.array([[np.nan, 0, -1]]), c, disc, tool_radius=1.0, side="inside", tolerance=0.01)


def _shapely_distance(part, kind, start, end, center, side, r):
    """Signed distance from each move to the part, measured with shapely
    (shapely 2 docs: ``distance`` is the minimum Cartesian distance;
    ``contains_xy`` tests points against the polygon)."""
    import shapely

    th = part.sample(4000)
    poly = shapely.Polygon(part(th))
    boundary = poly.exterior
    out = []
    for k, s, e, c in zip(kind, start, end, center):
        if k >= ARC_CW:
            rho = np.hypot(*(s[:2] - c))
            a0 = np.arctan2(s[1] - c[1], s[0] - c[0])
            a1 = np.arctan2(e[1] - c[1], e[0] - c[0])
            sw = np.mod(a1 - a0, 2 * np.pi) if k == ARC_CCW else -np.mod(a0 - a1, 2 * np.pi)
            a = a0 + sw * np.linspace(0, 1, 400)
            pts = c + rho * np.c_[np.cos(a), np.sin(a)]
        else:
            pts = np.linspace(s[:2], e[:2], 400)
        geom = shapely.LineString(pts)
        d = shapely.distance(geom, boundary)
        inside_part = shapely.contains_xy(poly, *pts[len(pts) // 2])
        on_part_side = inside_part if side == "outside" else not inside_part
        out.append(-d if (on_part_side and d > 0) else d)
    return np.array(out)


@pytest.mark.parametrize("seed", [1, 2, 3])
@pytest.mark.parametrize("side", ["outside", "inside"])
def test_random_moves_against_shapely(seed, side):
    part = star_contour(seed)
    rng = np.random.default_rng(seed)
    n = 40
    kind = rng.choice([LINE, ARC_CW, ARC_CCW], n).astype(np.int8)
    start = np.c_[rng.uniform(-26, 26, (n, 2)), np.full(n, -1.0)]
    end = np.c_[start[:, :2] + rng.normal(0, 4, (n, 2)), np.full(n, -1.0)]
    # arcs: a center on the chord's bisector, so both ends lie on one circle
    mid = 0.5 * (start[:, :2] + end[:, :2])
    chord = end[:, :2] - start[:, :2]
    center = mid + rng.uniform(-2, 2, (n, 1)) * np.c_[-chord[:, 1], chord[:, 0]]
    center[kind == LINE] = 0.0
    res_all = []
    for i in range(n):
        one = clearance(kind[i:i + 1], start[i:i + 1], end[i:i + 1], center[i:i + 1], part,
                        tool_radius=2.0, side=side, tolerance=0.01)
        res_all.append(one.min_clearance)
    ours = np.array(res_all)
    ref = _shapely_distance(part, kind, start, end, center, side, 2.0)
    # where the move is on the waste side, the distances agree to the
    # sampling of the reference (4000 polygon points, 400 per move)
    waste = ref > 0
    assert waste.sum() >= 5
    np.testing.assert_allclose(ours[waste], ref[waste], atol=2e-3, rtol=0)
    # moves that cross the contour or lie on the part side are negative or zero
    assert np.all(ours[~waste] <= 1e-6)
    # and the batch gives the same per-move verdicts as one move at a time
    batch = clearance(kind, start, end, center, part, tool_radius=2.0, side=side, tolerance=0.01)
    assert set(batch.gouge_index.tolist()) == set(np.flatnonzero(ours < 2.0 - 0.01).tolist())
    assert batch.min_clearance == pytest.approx(ours.min(), abs=1e-9)
