"""Feed plan, acceleration passes, per-block feeds and cycle time.

Reference values come from kinematics and the machining handbook formulas
listed beside each check (see the module docstring of pathgen.checks.feed).
"""

import math

import numpy as np
import pytest
from conftest import star_contour
from hypothesis import given, settings
from hypothesis import strategies as st

from pathgen import Cut, Machine, Tool, fit
from pathgen.checks.feed import (
    FeedPlan,
    accel_passes,
    chord_length,
    feeds_for_moves,
    plan_feed,
    segment_profile,
)
from pathgen.errors import InputError


def circle(R, n=400, ccw=True, center=(0.0, 0.0)):
    th = np.linspace(0, 2 * np.pi, n, endpoint=False)
    if not ccw:
        th = -th
    return fit(np.c_[center[0] + R * np.cos(th), center[1] + R * np.sin(th)], closed=True)


def line(L):
    return fit([[0.0, 0.0], [L, 0.0]])


# -- closed-form kinematics ---------------------------------------------------------


def test_trapezoid_line_time_from_rest_to_rest():
    # Kinematics (constant acceleration, rest to rest): t = L/v + v/a;
    # L = 100 mm, v = 50 mm/s, a = 500 mm/s² gives 2.1 s.
    plan = plan_feed(line(100.0), Machine(max_feed=3000, max_accel=500, block_rate=1000),
                     Tool(0), Cut(feed=3000, side="on"))
    assert plan.time == pytest.approx(2.1, rel=1e-12)
    assert plan.naive_time == pytest.approx(2.0, rel=1e-12)
    # speeding up takes v²/(2a) = 2.5 mm at each end: 95 % at full feed (kinematics)
    assert plan.full_feed_share == pytest.approx(0.95, rel=1e-9)
    assert plan.feed.max() == pytest.approx(3000.0, rel=1e-12)
    assert plan.feed[0] == 0.0 and plan.feed[-1] == 0.0


def test_triangle_profile_on_a_short_line():
    # Kinematics: a short line never reaches the feed; peak √(a·L), time 2√(L/a);
    # L = 1 mm, a = 500 mm/s²: 22.36 mm/s and 0.08944 s.
    plan = plan_feed(line(1.0), Machine(max_feed=3000, max_accel=500, block_rate=1e6),
                     Tool(0), Cut(feed=3000, side="on"))
    assert plan.time == pytest.approx(2 * math.sqrt(1.0 / 500.0), rel=1e-12)
    assert plan.time == pytest.approx(0.08944, abs=5e-6)
    assert plan.feed.max() / 60 == pytest.approx(22.36, abs=5e-3)
    assert plan.full_feed_share == 0.0


def test_segment_profile_matches_kinematics():
    # Kinematics: from v0 to v1 over a distance with a cap: accelerate,
    # cruise, brake.  v0 = 10, v1 = 20, cap 30 mm/s, a = 100 mm/s², 20 mm:
    # accelerating 10 -> 30 takes 0.2 s over 4 mm, braking 30 -> 20 takes
    # 0.1 s over 2.5 mm, cruising 13.5 mm takes 0.45 s.
    t, peak, cruise = segment_profile(np.array([20.0]), np.array([100.0]), np.array([400.0]),
                                      np.array([30.0]), 100.0)
    assert t[0] == pytest.approx(0.2 + 0.1 + 0.45, rel=1e-12)
    assert peak[0] == pytest.approx(30.0) and cruise[0] == pytest.approx(13.5)


def test_chord_length_has_the_sagitta_of_the_tolerance():
    # Handbook sagitta: a chord L on radius R deviates by R - √(R² - L²/4);
    # approximately L²/(8R).
    R = np.array([0.5, 5.0, 50.0, 5000.0])
    e = 0.01
    L = chord_length(R, e)
    assert R - np.sqrt(R**2 - L**2 / 4) == pytest.approx(np.full(4, e), rel=1e-9)
    assert L[-1] == pytest.approx(math.sqrt(8 * 5000.0 * e), rel=1e-5)
    assert np.isinf(chord_length(np.inf, e))


# -- acceleration and block-rate limits on curves -------------------------------------


def test_centripetal_limit_on_a_circle():
    # Centripetal limit a = v²/R (sources: centripetal-limit): R = 5 mm, a = 1000 mm/s² allow 60·√(a·R) = 4242.6 mm/min.
    plan = plan_feed(circle(5.0, n=600), Machine(max_feed=20000, max_accel=1000, block_rate=1e6),
                     Tool(0), Cut(feed=20000, side="on"))
    mid = slice(len(plan.limit) // 4, 3 * len(plan.limit) // 4)
    assert plan.limit[mid] == pytest.approx(np.full(plan.limit[mid].shape, 4242.6), rel=1e-4)


@pytest.mark.parametrize("side, R_path", [("outside", 6.0), ("inside", 4.0)])
def test_tool_center_radius_sets_the_limit(side, R_path):
    # Offset curvature κ/(1 - dκ) (Farouki & Neff 1990): a tool of radius 1
    # round a circle of radius 5 runs on radius 6 outside, 4 inside.
    plan = plan_feed(circle(5.0, n=600), Machine(max_feed=20000, max_accel=1000, block_rate=1e6),
                     Tool(2.0), Cut(feed=20000, side=side))
    mid = len(plan.limit) // 2
    assert plan.limit[mid] == pytest.approx(60 * math.sqrt(1000 * R_path), rel=1e-4)
    assert plan.length == pytest.approx(2 * math.pi * R_path, rel=1e-6)


def test_block_rate_limit_on_a_circle():
    # (sources: sagitta) lines within the chord tolerance are L = 2√(e(2R - e)) long,
    # so v ≤ B·L: R = 5, e = 0.01, B = 250/s gives 60·250·0.63214 = 9482 mm/min.
    plan = plan_feed(circle(5.0, n=600), Machine(max_feed=20000, max_accel=1e6, block_rate=250),
                     Tool(0), Cut(feed=20000, side="on", tolerance=0.01))
    mid = len(plan.limit) // 2
    expected = 60 * 250 * 2 * math.sqrt(0.01 * (2 * 5.0 - 0.01))
    assert plan.limit[mid] == pytest.approx(expected, rel=1e-4)


def test_circle_time_is_a_trapezoid_when_the_feed_is_lower_than_the_limit():
    # Kinematics: rest to rest round a circle of radius 50 at 50 mm/s with
    # a = 500 mm/s²: t = 2π·50/50 + 50/500 (the curve's √(a·R) = 158 mm/s
    # is above the feed, so only speeding up and slowing down cost time).
    plan = plan_feed(circle(50.0, n=400), Machine(max_feed=3000, max_accel=500, block_rate=1e6),
                     Tool(0), Cut(feed=3000, side="on"))
    assert plan.time == pytest.approx(2 * math.pi + 0.1, rel=1e-7)
    assert plan.feed_at(plan.s[-1] / 2) == pytest.approx(3000.0)
    # closed contours wrap: a full turn further on gives the same feed
    s = np.array([1.0, 100.0])
    assert plan.feed_at(s + plan.s[-1]) == pytest.approx(plan.feed_at(s), rel=1e-12)


def test_plan_is_read_only():
    plan = plan_feed(line(10.0))
    assert isinstance(plan, FeedPlan)
    with pytest.raises(ValueError, match="read-only"):
        plan.feed[0] = 1.0


# -- the passes against a plain loop ------------------------------------------------------


def passes_by_loop(w_limit, step, a):
    """The textbook recurrences, one sample at a time (reference)."""
    w = np.array(w_limit, dtype=float)
    for i in range(len(w) - 1):
        w[i + 1] = min(w[i + 1], w[i] + 2 * a * step[i])
    for i in range(len(w) - 2, -1, -1):
        w[i] = min(w[i], w[i + 1] + 2 * a * step[i])
    return w


def test_accumulate_passes_equal_the_sequential_recurrences():
    # The forward/backward recurrences v²_{i+1} ≤ v²_i + 2aΔs (sources: time-optimal)
    # computed one by one, against the cumulative-minimum form.
    rng = np.random.default_rng(7)
    for _ in range(20):
        n = int(rng.integers(2, 300))
        wl = rng.uniform(0, 1e4, n) * (rng.random(n) > 0.1)
        step = rng.uniform(0, 2.0, n - 1) * (rng.random(n - 1) > 0.05)
        a = float(rng.uniform(10, 5000))
        got = accel_passes(wl, step, a)
        want = passes_by_loop(wl, step, a)
        np.testing.assert_allclose(got, want, rtol=1e-9, atol=1e-9 * wl.max())


@settings(max_examples=40, deadline=None)
@given(
    n=st.integers(2, 200),
    a=st.floats(1.0, 1e4),
    seed=st.integers(0, 2**32 - 1),
)
def test_passes_respect_the_limit_and_the_slope(n, a, seed):
    rng = np.random.default_rng(seed)
    wl = rng.uniform(0, 1e5, n)
    wl[[0, -1]] = 0.0
    step = rng.uniform(0, 5.0, n - 1)
    w = accel_passes(wl, step, a)
    scale = 1e-9 * (wl.max() + 2 * a * step.sum())
    assert np.all(w <= wl)
    assert np.all(np.abs(np.diff(w)) <= 2 * a * step + scale)


def star(seed, n=120):
    """A smooth random star-shaped closed outline (CCW), about 20-60 mm across."""
    return star_contour(seed, n, amplitude=3.0, harmonics=5)


@settings(max_examples=15, deadline=None)
@given(
    seed=st.integers(0, 10_000),
    accel=st.floats(50.0, 5000.0),
    block_rate=st.floats(20.0, 2000.0),
    feed=st.floats(100.0, 8000.0),
    diameter=st.floats(0.0, 12.0),
    side=st.sampled_from(["outside", "inside", "on"]),
)
def test_plan_properties_on_random_outlines(seed, accel, block_rate, feed, diameter, side):
    # (sources: time-optimal, centripetal-limit) the speed never exceeds a limit, the v²
    # slope never exceeds 2a, and the time is at least length / feed.
    m = Machine(max_feed=6000, max_accel=accel, block_rate=block_rate)
    plan = plan_feed(star(seed), m, Tool(diameter), Cut(feed=feed, side=side))
    assert np.all(plan.feed <= plan.limit * (1 + 1e-9) + 1e-9)
    assert np.all(plan.limit <= min(feed, 6000) * (1 + 1e-12))
    v2 = (plan.feed / 60) ** 2
    ds = np.diff(plan.path_s)
    assert np.all(np.abs(np.diff(v2)) <= 2 * accel * ds * (1 + 1e-9) + 1e-6)
    assert plan.time >= plan.naive_time * (1 - 1e-12)
    assert 0.0 <= plan.full_feed_share <= 1.0


# -- per-block feeds ---------------------------------------------------------------------------


def blocks_from_points(pts, z=0.0):
    pts = np.asarray(pts, float)
    k = len(pts) - 1
    start = np.c_[pts[:-1], np.full(k, z)]
    end = np.c_[pts[1:], np.full(k, z)]
    return np.ones(k, int), start, end, np.zeros((k, 2))


def test_block_rate_on_short_segments():
    # (sources: block-rate) 0.1 mm segments at 1000 blocks/s allow 100 mm/s = 6000 mm/min.
    x = np.arange(0, 1001) * 0.1
    kind, start, end, center = blocks_from_points(np.c_[x, np.zeros_like(x)])
    m = Machine(max_feed=20000, max_accel=1e6, block_rate=1000)
    feeds, _ = feeds_for_moves(kind, start, end, center, feed=20000.0, machine=m)
    assert feeds[10:-10] == pytest.approx(np.full(len(feeds) - 20, 6000.0), rel=1e-12)


def test_one_block_line_trapezoid_and_triangle():
    # Kinematics (sources: time-optimal): 2.1 s for 100 mm at 50 mm/s, a = 500;
    # peak 22.36 mm/s and 0.08944 s for 1 mm.
    m = Machine(max_feed=3000, max_accel=500, block_rate=1e6)
    kind, start, end, center = blocks_from_points([[0, 0], [100, 0]])
    feeds, t = feeds_for_moves(kind, start, end, center, feed=3000.0, machine=m)
    assert t == pytest.approx(2.1, rel=1e-12) and feeds[0] == pytest.approx(3000.0)
    kind, start, end, center = blocks_from_points([[0, 0], [1, 0]])
    feeds, t = feeds_for_moves(kind, start, end, center, feed=3000.0, machine=m)
    assert t == pytest.approx(0.08944, abs=5e-6)
    assert feeds[0] == pytest.approx(60 * 22.36, abs=0.3)


def test_sharp_corner_stops_and_gentle_joints_do_not():
    m = Machine(max_feed=3000, max_accel=500, block_rate=1e6)
    # a 90° corner between two 100 mm lines: two trapezoids, 2 × 2.1 s (kinematics)
    kind, start, end, center = blocks_from_points([[0, 0], [100, 0], [100, 100]])
    _, t = feeds_for_moves(kind, start, end, center, feed=3000.0, machine=m)
    assert t == pytest.approx(4.2, rel=1e-12)
    # collinear blocks: one trapezoid over 200 mm, 4 s + 0.1 s
    kind, start, end, center = blocks_from_points([[0, 0], [100, 0], [200, 0]])
    _, t = feeds_for_moves(kind, start, end, center, feed=3000.0, machine=m)
    assert t == pytest.approx(4.1, rel=1e-12)


def test_lines_round_a_circle_run_at_the_centripetal_limit():
    # (sources: centripetal-limit) √(a·R) on radius R; lines inscribed in a circle of radius
    # 5 turn by the chord angle, which the joint speed reads as radius ≈ 5.
    th = np.linspace(0, 2 * np.pi, 721)
    pts = np.c_[5 * np.cos(th), 5 * np.sin(th)]
    kind, start, end, center = blocks_from_points(pts)
    m = Machine(max_feed=20000, max_accel=1000, block_rate=1e6)
    feeds, _ = feeds_for_moves(kind, start, end, center, feed=20000.0, machine=m)
    # within 0.5 % of 60·√(a·R) = 4242.6 mm/min (sources: centripetal-limit) ...
    assert np.median(feeds) == pytest.approx(4242.6, rel=5e-3)
    # ... and exactly what the joint model gives [der]: joints at √(a·L/θ),
    # each straight chord gains a·L in v² up to its middle
    L = 2 * 5 * math.sin(math.pi / 720)
    theta = 2 * math.pi / 720
    assert np.median(feeds) == pytest.approx(60 * math.sqrt(1000 * (L / theta + L)), rel=1e-9)


def test_arc_block_limit_and_rapid_time():
    # (sources: centripetal-limit) an arc of radius 5 at a = 1000 holds 4242.6 mm/min;
    # kinematics: a 100 mm rapid at 6000 mm/min (100 mm/s), a = 1000, rest
    # to rest takes L/v + v/a = 1.1 s.
    m = Machine(max_feed=20000, max_accel=1000, block_rate=1e6, rapid_feed=6000)
    kind = np.array([0, 3])
    start = np.array([[-100.0, 0, 0], [5.0, 0, 0]])
    end = np.array([[0.0, 0, 0], [-5.0, 0, 0]])
    center = np.array([[0.0, 0], [0.0, 0]])
    feeds, t = feeds_for_moves(kind, start, end, center, feed=20000.0, machine=m)
    assert feeds[0] == 0.0
    assert feeds[1] == pytest.approx(4242.6, rel=1e-5)
    v = math.sqrt(1000 * 5)
    half_circle = math.pi * 5
    # the half circle, rest to rest at the centripetal limit (kinematics)
    assert t == pytest.approx(1.1 + half_circle / v + v / 1000, rel=1e-9)


@settings(max_examples=30, deadline=None)
@given(seed=st.integers(0, 10_000), k=st.integers(1, 60))
def test_block_feeds_never_exceed_their_caps(seed, k):
    rng = np.random.default_rng(seed)
    pts = np.cumsum(rng.uniform(-5, 5, (k + 1, 2)), axis=0)
    kind, start, end, center = blocks_from_points(pts)
    kind[rng.random(k) < 0.2] = 0
    m = Machine(max_feed=4000, max_accel=300, block_rate=200)
    feed = rng.uniform(100, 6000, k)
    feeds, t = feeds_for_moves(kind, start, end, center, feed=feed, machine=m)
    L = np.linalg.norm(end - start, axis=1)
    cutting = kind != 0
    assert np.all(feeds[~cutting] == 0)
    cap = np.minimum(np.minimum(feed, 4000), 60 * 200 * L)
    cap = np.maximum(cap, np.minimum(feed, 1.0))  # the 1 mm/min floor of the writer's F words
    assert np.all(feeds[cutting] <= cap[cutting] * (1 + 1e-12))
    naive = float((L[cutting] / (np.minimum(feed, 4000)[cutting] / 60)).sum())
    assert t >= naive * (1 - 1e-12)


def test_tiny_block_feed_never_rounds_to_zero():
    m = Machine(max_feed=3000, max_accel=500, block_rate=250)
    kind, start, end, center = blocks_from_points([[0, 0], [1e-8, 0], [10, 0]])
    feeds, _ = feeds_for_moves(kind, start, end, center, feed=3000.0, machine=m)
    assert feeds[0] == 1.0 and feeds[1] > 1.0


def test_feeds_for_moves_errors():
    kind, start, end, center = blocks_from_points([[0, 0], [1, 0]])
    m = Machine()
    with pytest.raises(InputError, match="kind must be"):
        feeds_for_moves(np.array([7]), start, end, center, feed=100.0, machine=m)
    with pytest.raises(InputError, match="feed of block 0"):
        feeds_for_moves(kind, start, end, center, feed=0.0, machine=m)
    with pytest.raises(InputError, match="do not match 1 blocks"):
        feeds_for_moves(kind, start[:0], end, center, feed=100.0, machine=m)
    with pytest.raises(InputError, match="not finite"):
        feeds_for_moves(kind, start * np.nan, end, center, feed=100.0, machine=m)
    with pytest.raises(InputError, match="machine must be a pathgen Machine"):
        feeds_for_moves(kind, start, end, center, feed=100.0, machine={"max_feed": 1})
    with pytest.raises(InputError, match="corner_angle"):
        feeds_for_moves(kind, start, end, center, feed=100.0, machine=m, corner_angle=0)
    feeds, t = feeds_for_moves(np.zeros(0, int), np.zeros((0, 3)), np.zeros((0, 3)),
                               np.zeros((0, 2)), feed=100.0, machine=m)
    assert feeds.shape == (0,) and t == 0.0


def test_plan_feed_rejects_bad_arguments():
    with pytest.raises(InputError, match="machine must be a pathgen Machine"):
        plan_feed(line(10.0), "router")
    with pytest.raises(InputError, match="contour must be a pathgen Contour"):
        plan_feed(np.zeros((4, 2)))
