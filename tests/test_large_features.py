"""A tiny feature among 2·10⁵ points is still seen by the offset join's
distances, the clearance and the replay, now that their polylines follow the
curvature instead of the piece count.

Outside reference: shapely's ``distance`` (sources: shapely) from a dense
polyline through every fitted piece near the feature (64 samples a piece),
and handbook plane geometry (distance of a line from a circle's center,
from memory).
"""

from __future__ import annotations

import numpy as np
import pytest
import shapely

from pathgen.path.clearance import clearance
from pathgen.path.model import LINE
from pathgen.path.offset import distance_to_contour
from pathgen.spline import fit
from pathgen.verify.replay import tool_center_polyline

from conftest import circle_points

N, R, BUMP, K = 200_000, 50.0, 0.2, 50_000  # point K (at 90°, top of the circle) pushed out by BUMP


@pytest.fixture(scope="module")
def bumped():
    pts = circle_points(R, N)
    pts[K] *= (R + BUMP) / R
    return fit(pts, closed=True), pts[K]


def _dense_near(contour, lo, hi, per=64):
    b = contour.breaks
    t = (b[lo:hi, None] + np.diff(b)[lo:hi, None] * (np.arange(per) / per)[None, :]).ravel()
    return shapely.LineString(contour(t))


def test_join_distance_sees_the_bump(bumped):
    c, top = bumped
    ref = _dense_near(c, K - 200, K + 200)
    # points above the bump at about the tool radius (3 mm) and beside it
    q = np.array([[x, R + BUMP + 3.0] for x in np.linspace(-0.3, 0.3, 13)])
    tol = 0.01
    got = distance_to_contour(c, tol, 3.0)(q)
    want = shapely.distance(ref, shapely.points(q))
    # the polyline is within tol/10 of the curve; a vertex search near r adds
    # at most tol/10 more (the join's stated accuracy)
    assert np.all(np.abs(got - want) <= 0.2 * tol + 1e-9)
    # the bump is seen: without it the distance would be BUMP more
    assert got.min() < 3.0 + 0.2 * tol


def test_clearance_sees_the_bump(bumped):
    c, top = bumped
    ref = _dense_near(c, K - 2000, K + 2000)
    # a line 3 mm above the undisturbed circle: it clears the circle by exactly
    # the tool radius (handbook), but the bump reaches BUMP closer
    y = R + 3.0
    k = np.array([LINE])
    s, e = np.array([[-20.0, y, -1.0]]), np.array([[20.0, y, -1.0]])
    res = clearance(k, s, e, np.zeros((1, 2)), c, tool_radius=3.0, side="outside", tolerance=0.01)
    want = shapely.distance(ref, shapely.LineString([(-20.0, y), (20.0, y)]))
    assert want == pytest.approx(3.0 - BUMP, abs=0.02)  # the bump's top
    assert res.min_clearance == pytest.approx(want, abs=1e-4)
    assert not res.ok and res.gouges[0][0] == 0
    assert res.where[0] == pytest.approx(top[0], abs=0.05)


def test_replay_curve_follows_the_bump(bumped):
    c, top = bumped
    tol = 0.01
    q, _ = tool_center_polyline(c, -3.0, tol)  # outside a counter-clockwise circle
    assert len(q) < N / 10  # sized by the shape
    # the tool-center curve's points over the bump: the offset of the bump's
    # top lies 3 mm above it, and the polyline passes within the replay's
    # sagitta share of it
    b = c.breaks
    t = np.linspace(b[K - 30], b[K + 30], 2001)
    off = c(t) - 3.0 * c.normal(t)
    d = shapely.distance(shapely.LineString(q), shapely.points(off))
    assert float(d.max()) <= 0.01 * tol


def test_replay_refuses_rather_than_sampling_thinner():
    # an arc of radius 10¹¹ mm over a quarter turn needs about
    # (π/2)·√(R / (8·0.005·tol)) ≈ 2.5·10⁷ chords at tol = 0.01 (sources:
    # sagitta): more than the replay's limit, so it refuses with the figures
    # instead of capping the samples (which would drop the sagitta bound)
    from pathgen.errors import InputError
    from pathgen.verify.replay import MOST_SAMPLES, move_polylines

    Rb = 1e11
    start = np.array([[Rb, 0.0, -1.0]])
    end = np.array([[0.0, Rb, -1.0]])
    with pytest.raises(InputError, match="an arc of radius 1e\\+11 mm") as err:
        move_polylines(np.array([3]), start, end, np.zeros((1, 2)), 0.01)
    assert f"{MOST_SAMPLES:.0e}" in str(err.value)
    # a radius of 10⁵ mm on the same quarter turn is measured in full: its
    # chords stand off the arc by at most the sagitta share (0.5 % of tol)
    Rs = 1e5
    pts, owner, _ = move_polylines(np.array([3]), np.array([[Rs, 0.0, -1.0]]), np.array([[0.0, Rs, -1.0]]),
                                   np.zeros((1, 2)), 0.01)
    chord = np.hypot(*np.diff(pts, axis=0).T).max()
    assert Rs - np.sqrt(Rs * Rs - chord * chord / 4) <= 0.005 * 0.01
