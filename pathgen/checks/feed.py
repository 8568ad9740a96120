"""Feed plan: the speed the machine can hold along the path, and the time.

Speeds are v in mm/s inside and feeds F = 60·v in mm/min at the surface.
The acceleration limit a (mm/s²) bounds both the centripetal acceleration
on curves and the tangential acceleration along the path, independently.

Notes
-----
Speed limit at each point of the tool-center path (radius R_c):

    v_lim = min(F_prog, √(a·R_c), B·L(R_c))

with F_prog the programmed feed capped by the machine's maximum feed,
√(a·R_c) from the centripetal acceleration a = v²/R, and the block-rate
limit B·L: at chord tolerance e a line on radius R is at most
L = 2√(e(2R − e)) ≈ √(8·R·e) long (sagitta), and the controller runs at
most B blocks per second.  On the tool-center path R_c = |1 − dκ|/|κ|,
d = side_sign·r (offset curvature κ/(1 − dκ), Farouki & Neff 1990).

Then a forward pass from rest and a backward pass to rest with
v²_{i+1} ≤ v²_i + 2·a·Δs (constant tangential acceleration makes v²
linear in arc length).  Both passes are cumulative minima: with
S_i = Σ 2aΔs, w = v² obeys w_i − S_i = min_{j ≤ i}(w_lim,j − S_j), so
each pass is one ``np.minimum.accumulate``.  This is the minimum-time
speed profile for a point mass under independent tangential and normal
acceleration bounds (the velocity-limit-curve construction of Bobrow,
Dubowsky & Gibson 1985; Timar, Farouki et al. 2005 for CNC paths).

Time: between two samples the speed follows the fastest profile allowed
by the end speeds, a and the segment's cap (accelerate, cruise, brake),
whose time is closed-form; so a straight line from rest to rest takes
exactly L/v + v/a (trapezoid) or 2√(L/a) (triangle).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .._options import side_sign
from ..errors import InputError
from .machine import Cut, Machine, Tool

__all__ = [
    "FeedPlan",
    "plan_feed",
    "feeds_for_moves",
    "speed_limits",
    "accel_passes",
    "segment_profile",
    "chord_length",
    "cut_sign",
    "sampling_limits",
]


#: Lowest feed (mm/min) written for a cutting block by :func:`feeds_for_moves`.
MIN_BLOCK_FEED = 1.0


def chord_length(radius, tolerance) -> np.ndarray:
    """Longest chord of a circle of ``radius`` whose sagitta is ``tolerance``.

    L = 2√(e(2R − e)) for R ≥ e (≈ √(8·R·e) when e ≪ R), else 2R; infinite
    on a straight stretch (R = inf).  mm.

    >>> round(float(chord_length(5.0, 0.01)), 6)
    0.632139
    """
    R = np.asarray(radius, dtype=float)
    e = float(tolerance)
    with np.errstate(invalid="ignore"):
        return np.where(R >= e, 2.0 * np.sqrt(e * np.maximum(2.0 * R - e, 0.0)), 2.0 * R)


def accel_passes(w_limit: np.ndarray, step: np.ndarray, accel: float) -> np.ndarray:
    """Forward pass from the first sample, backward pass to the last.

    Parameters
    ----------
    w_limit : (n,) upper bound of v² at each sample, (mm/s)²; give 0 for
        rest (the first and last samples usually are).
    step : (n-1,) distance between consecutive samples, mm (>= 0).
    accel : tangential acceleration limit, mm/s².

    Returns
    -------
    (n,) v², never above ``w_limit`` and with |v²_{i+1} − v²_i| ≤ 2·a·Δs_i
    (to rounding).

    >>> w = accel_passes(np.array([0.0, 1e6, 1e6, 0.0]), np.array([1.0, 1.0, 1.0]), 500.0)
    >>> w.tolist()
    [0.0, 1000.0, 1000.0, 0.0]
    """
    w_limit = np.asarray(w_limit, dtype=float)
    S = np.empty(len(w_limit))
    S[0] = 0.0
    np.cumsum(2.0 * accel * np.asarray(step, dtype=float), out=S[1:])
    fwd = S + np.minimum.accumulate(w_limit - S)
    R = S[-1] - S
    w = R + np.minimum.accumulate((fwd - R)[::-1])[::-1]
    np.minimum(w, w_limit, out=w)
    np.maximum(w, 0.0, out=w)
    return w


def segment_profile(step, w0, w1, cap, accel):
    """The fastest speed profile over segments with given end speeds.

    Parameters
    ----------
    step : (k,) segment lengths, mm.
    w0, w1 : (k,) squared speed at the start and end, (mm/s)²; they must
        be reachable: |w1 − w0| ≤ 2·a·step.
    cap : (k,) speed cap inside the segment, mm/s (at least √w0, √w1).
    accel : mm/s².

    Returns
    -------
    time : (k,) seconds.
    peak : (k,) highest speed reached, mm/s.
    cruise : (k,) length run at the cap, mm.

    >>> t, peak, cruise = segment_profile(np.array([100.0]), np.zeros(1), np.zeros(1), np.array([50.0]), 500.0)
    >>> round(float(t[0]), 12), float(peak[0]), float(cruise[0])
    (2.1, 50.0, 95.0)
    """
    step = np.asarray(step, dtype=float)
    w0 = np.asarray(w0, dtype=float)
    w1 = np.asarray(w1, dtype=float)
    cap = np.asarray(cap, dtype=float)
    a = float(accel)
    top = np.maximum(w0, w1)
    peak2 = np.maximum(np.minimum(0.5 * (w0 + w1) + a * step, cap * cap), top)
    vp, v0, v1 = np.sqrt(peak2), np.sqrt(w0), np.sqrt(w1)
    cruise = np.maximum(step - (2.0 * peak2 - w0 - w1) / (2.0 * a), 0.0)
    moving = vp > 0
    time = (2.0 * vp - v0 - v1) / a
    time += np.divide(cruise, vp, out=np.zeros_like(cruise), where=moving)
    return time, vp, cruise


@dataclass(frozen=True, eq=False)
class FeedPlan:
    """Planned feed along a contour's cut, from rest to rest.

    Attributes
    ----------
    s : (n,) arc length along the contour (the outline, not the tool
        center) at each sample, mm, non-decreasing; a sharp corner has two
        samples at the same s.
    path_s : (n,) distance travelled by the tool center at each sample, mm.
    feed : (n,) planned feed of the tool center, mm/min.
    limit : (n,) feed limit before the acceleration passes, mm/min:
        min(programmed feed, machine max feed, 60√(a·R_c), 60·B·L).
    time : estimated time of the cut, s (one pass along the tool-center
        path, from rest to rest; no rapids, leads or plunges).
    naive_time : tool-center length / programmed feed, s.
    full_feed_share : share of the tool-center length cut at the
        programmed feed (capped by the machine's max feed), 0..1.
    programmed_feed : the programmed feed, mm/min.
    closed : whether the contour is closed.
    """

    s: np.ndarray
    path_s: np.ndarray
    feed: np.ndarray
    limit: np.ndarray
    time: float
    naive_time: float
    full_feed_share: float
    programmed_feed: float
    closed: bool = False

    def __post_init__(self):
        for name in ("s", "path_s", "feed", "limit"):
            getattr(self, name).setflags(write=False)

    @property
    def length(self) -> float:
        """Tool-center path length, mm."""
        return float(self.path_s[-1]) if len(self.path_s) else 0.0

    def feed_at(self, s) -> np.ndarray:
        """Planned feed (mm/min) at contour arc length ``s`` (mm), interpolated.

        Closed contours wrap ``s`` around; open ones clip it to the ends.
        """
        s = np.asarray(s, dtype=float)
        L = float(self.s[-1])
        if self.closed and L > 0:
            s = np.mod(s, L)
        return np.interp(s, self.s, self.feed)


def tool_cut(machine, tool, cut):
    machine = Machine() if machine is None else machine
    tool = Tool() if tool is None else tool
    cut = Cut() if cut is None else cut
    for value, cls, name in ((machine, Machine, "machine"), (tool, Tool, "tool"), (cut, Cut, "cut")):
        if not isinstance(value, cls):
            raise InputError(f"{name} must be a pathgen {cls.__name__}, got {type(value).__name__}")
    return machine, tool, cut


@dataclass(frozen=True, eq=False)
class SpeedLimits:
    """Speed limits at the samples of a contour (internal to the checks).

    Speeds in mm/s, lengths in mm.  ``d`` is the signed tool offset along
    the left normal; ``gap`` = 1 − dκ (the tool-center path is regular
    where gap > 0); ``path_radius`` is R_c (inf on straight stretches, 0
    where the tool cannot reach or at a sharp corner of the tool-center
    path); ``reach`` marks the samples the tool cannot reach and
    ``concave_corner`` both samples of each sharp corner toward the tool.
    """

    samples: object
    d: float
    gap: np.ndarray
    path_radius: np.ndarray
    path_step: np.ndarray
    v_prog: float
    v_accel: np.ndarray
    v_block: np.ndarray
    v_limit: np.ndarray
    reach: np.ndarray
    concave_corner: np.ndarray


def cut_sign(contour, cut: Cut) -> int:
    """Sign of the tool offset along the contour's left normal.

    ``side_sign(cut.side)``, reversed for a closed contour that runs
    clockwise, so that "outside" is always outside a closed part.
    """
    sign = side_sign(cut.side)
    if sign and contour.closed and contour.area < 0:
        sign = -sign
    return sign


def speed_limits(samples, machine: Machine, tool: Tool, cut: Cut, *, sign=None) -> SpeedLimits:
    """Speed limits on the tool-center path at each sample (mm/s).

    ``sign`` is the offset sign along the left normal (default
    ``side_sign(cut.side)``; see :func:`cut_sign`).
    """
    S = samples
    r = tool.radius
    d = (side_sign(cut.side) if sign is None else sign) * r
    a = machine.max_accel
    kappa = S.kappa
    gap = 1.0 - d * kappa
    absk = np.abs(kappa)
    with np.errstate(divide="ignore"):
        Rc = np.where(gap > 0, gap / absk, 0.0)
    # corners: the tool center turns on an arc of radius r round a corner
    # that bends away from the tool, and stops at any other corner.
    turn = S.turn
    pair_first = S.corner & (turn != 0)
    convex_corner = np.zeros(len(S), bool)
    if d != 0:
        away = pair_first & (np.sign(turn) * np.sign(d) < 0)
        convex_corner = away | np.r_[False, away[:-1]]
        if S.closed and away[-1]:
            convex_corner[0] = True
    Rc = np.where(S.corner, np.where(convex_corner, r, 0.0), Rc)
    # out of reach: the contour bends toward the tool with R <= r, a sharp
    # corner turns toward it, or the tool there would cut into the contour
    # elsewhere (a gap narrower than the tool, or the sides of an inside
    # corner).  The tool-center path skips these samples (its loops are
    # trimmed) and has a sharp corner there: it stops.
    concave_corner = np.zeros(len(S), bool)
    reach = np.zeros(len(S), bool)
    if d != 0:
        from .reach import gouges

        toward = pair_first & (np.sign(turn) * np.sign(d) > 0)
        concave_corner = toward | np.r_[False, toward[:-1]]
        if S.closed and toward[-1]:
            concave_corner[0] = True
        reach = (gap <= 0) | concave_corner | gouges(S, d)
    Rc = np.where(reach, 0.0, Rc)
    v_prog = min(cut.feed, machine.max_feed) / 60.0
    v_accel = np.sqrt(a * Rc)
    v_block = machine.block_rate * chord_length(Rc, cut.tolerance)
    v_limit = np.minimum(np.minimum(v_accel, v_block), v_prog)
    # tool-center distance: (1 − dκ) ds where the tool reaches, 0 where the
    # path is trimmed (half a step at each end of a trimmed stretch), plus
    # the arc of radius r round each corner that points at the tool.
    g = np.where(reach, 0.0, np.maximum(gap, 0.0))
    step = np.diff(S.s) * 0.5 * (g[1:] + g[:-1])
    if d != 0 and getattr(S, "geometric", 0):
        # samples a geometric step apart: the trapezoid on κ would miss what
        # κ does in between (noise bends the length), but ∫κ ds is the
        # tangent's turn, so ∫(1 − dκ) ds = Δs − d·Δθ exactly where the tool
        # reaches both ends (the step turns by at most about 0.015 rad)
        from ..geometry import turn_angle

        ds = np.diff(S.s)
        exact = ds - d * turn_angle(S.tangent[:-1], S.tangent[1:])
        use = (ds > 0) & (g[:-1] > 0) & (g[1:] > 0)
        step = np.where(use, np.maximum(exact, 0.0), step)
    if d != 0:
        firsts = np.flatnonzero(pair_first & convex_corner)
        inner = firsts[firsts < len(step)]
        step[inner] += r * np.abs(turn[inner])
        if len(step) and S.closed and convex_corner[-1] and pair_first[-1]:
            # round the seam corner on the way to the end of a closed cut
            step[-1] += r * abs(turn[-1])
    return SpeedLimits(S, d, gap, Rc, step, v_prog, v_accel, v_block, v_limit, reach,
                       concave_corner)


def sampling_limits(machine: Machine, tool: Tool, cut: Cut) -> dict:
    """How finely the checks must sample for this cut (keywords of
    :func:`pathgen.checks.sampling.sample_contour`).

    ``bind``: the smallest |κ| (1/mm) at which a limit can bind on the
    tool-center path.  The acceleration limit binds below the radius
    R_a = v²/a, the block rate below R_b with B·2√(e(2R_b − e)) = v (so
    R_b = ((v/2B)²/e + e)/2), v the programmed feed capped by the machine's;
    the path radius is 1/|κ| − r where the contour bends toward the tool,
    so both bind from |κ| = 1/(max(R_a, R_b) + r) on, and the tool's reach
    (|κ| ≥ 1/r) lies beyond.  ``max_step``: r/32, the spacing of the
    contour points the gouge test needs (None without a tool).
    """
    v = min(cut.feed, machine.max_feed) / 60.0
    r = tool.radius if side_sign(cut.side) else 0.0
    e = cut.tolerance
    r_accel = v * v / machine.max_accel
    r_block = ((v / (2.0 * machine.block_rate)) ** 2 / e + e) / 2.0 if e > 0 else 0.0
    reach = max(r_accel, r_block) + r
    return {"bind": 1.0 / reach if reach > 0 else np.inf, "max_step": r / 32.0 if r > 0 else None}


def plan_from_limits(lim: SpeedLimits, machine: Machine, cut: Cut) -> FeedPlan:
    """The feed plan for speed limits already computed."""
    a = machine.max_accel
    wl = lim.v_limit**2
    wl[0] = wl[-1] = 0.0  # rest at the start and the end (and the seam)
    w = accel_passes(wl, lim.path_step, a)
    v = np.sqrt(w)
    seg_cap = np.maximum(np.minimum(lim.v_limit[1:], lim.v_limit[:-1]), np.maximum(v[1:], v[:-1]))
    t, _, cruise = segment_profile(lim.path_step, w[:-1], w[1:], seg_cap, a)
    path_s = np.r_[0.0, np.cumsum(lim.path_step)]
    length = float(path_s[-1])
    full = seg_cap >= lim.v_prog * (1.0 - 1e-12)
    share = float(cruise[full].sum() / length) if length > 0 else 0.0
    return FeedPlan(
        s=np.array(lim.samples.s, dtype=float),
        path_s=path_s,
        feed=60.0 * v,
        limit=60.0 * lim.v_limit,
        time=float(t.sum()),
        naive_time=length / (cut.feed / 60.0),
        full_feed_share=min(share, 1.0),
        programmed_feed=float(cut.feed),
        closed=bool(lim.samples.closed),
    )


def plan_feed(contour, machine=None, tool=None, cut=None) -> FeedPlan:
    """Plan the feed along ``contour`` cut with ``tool`` on ``machine``.

    Parameters
    ----------
    contour : Contour
        Closed contours are cut once round from the seam (their start)
        back to it; the plan starts and ends at rest.
    machine, tool, cut : Machine, Tool, Cut or None (None: the defaults)

    Returns
    -------
    FeedPlan

    Examples
    --------
    >>> from pathgen import fit, Machine, Tool, Cut
    >>> line = fit([[0, 0], [100, 0]])
    >>> plan = plan_feed(line, Machine(max_accel=500), Tool(0), Cut(feed=3000))
    >>> round(plan.time, 9), round(plan.naive_time, 9)      # L/v + v/a
    (2.1, 2.0)
    """
    from .sampling import sample_contour

    machine, tool, cut = tool_cut(machine, tool, cut)
    S = sample_contour(contour, **sampling_limits(machine, tool, cut))
    lim = speed_limits(S, machine, tool, cut, sign=cut_sign(contour, cut))
    return plan_from_limits(lim, machine, cut)


# -- per-block planner for toolpaths ------------------------------------------


def _block_tangents(kind, start, end, center, length):
    """Unit tangents (3-D) at the start and the end of each block."""
    k = len(kind)
    t0 = np.zeros((k, 3))
    t1 = np.zeros((k, 3))
    nz = length > 0
    chord = end - start
    t0[nz] = chord[nz] / length[nz, None]
    t1[:] = t0
    arcs = kind >= 2
    if np.any(arcs):
        sgn = np.where(kind[arcs] == 3, 1.0, -1.0)[:, None]  # ccw: tangent = +90° of radius
        for pts, out in ((start, t0), (end, t1)):
            rad = pts[arcs, :2] - center[arcs]
            rn = np.hypot(rad[:, 0], rad[:, 1])
            ok = rn > 0
            tang = sgn * np.stack([-rad[:, 1], rad[:, 0]], axis=1) / np.where(ok, rn, 1.0)[:, None]
            sub = out[arcs]
            sub[:, :2] = np.where(ok[:, None], tang, 0.0)
            sub[:, 2] = 0.0
            out[arcs] = sub
    return t0, t1


def feeds_for_moves(kind, start, end, center, *, feed, machine, corner_angle: float = 30.0):
    """Feed for each block of a move sequence, and the sequence's time.

    Parameters
    ----------
    kind : (k,) int, 0 rapid, 1 line, 2 clockwise arc, 3 counter-clockwise
        arc (the ``Toolpath`` columns).
    start, end : (k, 3) block end points, mm.
    center : (k, 2) arc centers, mm (ignored for rapids and lines).
    feed : float or (k,) programmed feed, mm/min.
    machine : Machine
    corner_angle : float
        Direction change (degrees) between consecutive cutting blocks above
        which the machine stops at the joint.  Smaller changes are taken at
        √(a·R) with R = (L_before + L_after) / (2·angle), the radius of the
        curve that the blocks approximate.

    Returns
    -------
    feeds : (k,) mm/min; rapids get 0.  Each cutting block's feed is the
        highest speed the plan reaches in it, never above the programmed
        feed, the machine's max feed, √(a·R) on an arc of radius R, or
        length × block rate (but never below 1 mm/min, ``MIN_BLOCK_FEED``,
        or the programmed feed if that is lower, so that no F word rounds
        to zero on a tiny block).
    time : float
        Estimated time of the whole sequence, s: cutting blocks by the
        planned speed profile (rest at the start and the end of each run
        of cutting blocks and at sharp joints), rapids at the rapid feed
        with acceleration a from rest to rest.

    Examples
    --------
    >>> from pathgen import Machine
    >>> kind = np.array([1, 1])
    >>> start = np.array([[0.0, 0, 0], [50, 0, 0]])
    >>> end = np.array([[50.0, 0, 0], [100, 0, 0]])
    >>> feeds, t = feeds_for_moves(kind, start, end, np.zeros((2, 2)), feed=3000.0,
    ...                            machine=Machine(max_feed=6000, max_accel=500))
    >>> feeds.tolist(), round(t, 9)
    ([3000.0, 3000.0], 2.1)
    """
    if not isinstance(machine, Machine):
        raise InputError(f"machine must be a pathgen Machine, got {type(machine).__name__}")
    kind = np.asarray(kind).astype(np.int64).reshape(-1)
    k = len(kind)
    try:
        start = np.asarray(start, dtype=float).reshape(k, 3)
        end = np.asarray(end, dtype=float).reshape(k, 3)
        center = np.asarray(center, dtype=float).reshape(k, 2)
        prog = np.broadcast_to(np.asarray(feed, dtype=float), (k,)).copy()
    except ValueError as exc:
        raise InputError(f"moves: columns do not match {k} blocks ({exc})") from None
    if np.any((kind < 0) | (kind > 3)):
        raise InputError("moves: kind must be 0 (rapid), 1 (line), 2 (cw arc) or 3 (ccw arc)")
    if not (np.isfinite(start).all() and np.isfinite(end).all() and np.isfinite(center).all()):
        raise InputError("moves: a coordinate is not finite")
    cutting = kind != 0
    if np.any(cutting & ~(np.isfinite(prog) & (prog > 0))):
        i = int(np.flatnonzero(cutting & ~(np.isfinite(prog) & (prog > 0)))[0])
        raise InputError(f"moves: feed of block {i} must be a finite number > 0, got {prog[i]!r}")
    if not (0 < corner_angle <= 180):
        raise InputError(f"corner_angle must be in (0, 180] degrees, got {corner_angle!r}")
    if k == 0:
        return np.zeros(0), 0.0
    from ..moves import lengths

    a = machine.max_accel
    length = lengths(kind, start, end, center)
    arcs = kind >= 2
    radius = np.full(k, np.inf)
    radius[arcs] = np.hypot(*(start[arcs, :2] - center[arcs]).T)
    v_prog = np.minimum(prog, machine.max_feed) / 60.0
    cap = np.minimum(np.minimum(v_prog, np.sqrt(a * radius)), machine.block_rate * length)
    feeds = np.zeros(k)
    time = 0.0
    # rapids: rest to rest at the rapid feed
    vr = machine.rapid_feed / 60.0
    Lr = length[~cutting]
    time += float(np.where(Lr >= vr * vr / a, Lr / vr + vr / a, 2.0 * np.sqrt(Lr / a)).sum())
    # cutting blocks of zero length do not move: no time, the programmed feed
    live = cutting & (length > 0)
    feeds[cutting & ~live] = 60.0 * v_prog[cutting & ~live]
    sel = np.flatnonzero(live)
    if sel.size == 0:
        return feeds, time
    t0, t1 = _block_tangents(kind[sel], start[sel], end[sel], center[sel], length[sel])
    L, c = length[sel], cap[sel]
    # joints between consecutive live blocks; a rapid or a gap between them
    # (the previous live block is not the move just before) means rest
    rapids_before = np.cumsum(~cutting)
    follows = np.r_[False, rapids_before[sel[1:]] == rapids_before[sel[:-1]]]
    cosang = np.clip((t1[:-1] * t0[1:]).sum(axis=1), -1.0, 1.0)
    ang = np.arccos(cosang)
    with np.errstate(divide="ignore"):
        r_eq = np.where(ang > 0, 0.5 * (L[:-1] + L[1:]) / ang, np.inf)
    v_joint = np.minimum(np.sqrt(a * r_eq), np.minimum(c[:-1], c[1:]))
    v_joint = np.where(ang > np.radians(corner_angle), 0.0, v_joint)
    v_joint = np.where(follows[1:], v_joint, 0.0)
    w_lim = np.r_[0.0, v_joint**2, 0.0]
    w = accel_passes(w_lim, L, a)
    t, peak, _ = segment_profile(L, w[:-1], w[1:], np.maximum(c, np.sqrt(np.maximum(w[:-1], w[1:]))), a)
    # never below 1 mm/min (or the programmed feed if lower): a block so
    # short that the plan's peak is slower would write an F word that
    # rounds to zero; the controller's own acceleration limit still holds
    feeds[sel] = np.maximum(60.0 * peak, np.minimum(60.0 * v_prog[sel], MIN_BLOCK_FEED))
    return feeds, time + float(t.sum())
