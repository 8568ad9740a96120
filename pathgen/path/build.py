"""From a contour to a toolpath: offset, direction, seam, leads and passes.

:func:`make_toolpath` is the one function the pipeline calls; it returns a
:class:`~pathgen.path.model.Toolpath` whose cutting moves stay within the
tolerance of the exact tool-center curve P + d·N (measured, not estimated).
:func:`contour_moves` gives the contour itself as lines or arcs (no
offset, no leads) for drawings.

Direction rule (common practice)
--------------------------------
With a spindle turning clockwise seen from above (M3), climb milling keeps
the material on the right of the direction of travel, i.e. the tool on the
left of the cut edge (the same sense as left cutter compensation, G41).
The tool center sits at d along the contour's left normal, so travelling
along the contour puts the tool on the left exactly when d > 0: an inside
cut (pocket, hole) of a counter-clockwise part is climb when it runs
counter-clockwise, an outside cut when it runs clockwise.  Conventional is
the reverse.  Derivation: with the tool travelling along τ and on the left
of the cut edge, the contact point lies at ρ = -R n (n = ẑ × τ, the left
normal) from the tool axis; a clockwise spindle has ω = -ω ẑ, so the
tooth velocity there is ω × ρ = ωR ẑ × n = -ωR τ: it opposes the tool's
travel relative to the work, which is climb milling.  On the line (no
offset) the contour's own direction is kept unless ``direction="reverse"``.
"""

from __future__ import annotations

import math

import numpy as np

from .._options import MM_PER_INCH, UNITS, check_option, check_positive, side_sign
from ..errors import InputError
from .arcfit import band_arcs
from .flatten import MOVES, _drop_tiny, approximate
from .measure import Chain, arc_geometry
from .model import ARC_CCW, ARC_CW, LINE, RAPID, Toolpath
from .offset import assemble, regular_windows, unique_spots
from .straighten import arcs_and_lines, straight_spans

__all__ = ["make_toolpath", "contour_moves", "choose_seam", "DIRECTIONS", "LEADS"]

DIRECTIONS = ("climb", "conventional", "forward", "reverse")
LEADS = ("arc", "line", "none")


def _travel_forward(d: float, direction: str) -> bool:
    """True when the cut runs along the contour's own direction."""
    if direction == "forward":
        return True
    if direction == "reverse":
        return False
    if d == 0.0:
        return True  # on the line: climb/conventional do not apply
    climb_forward = d > 0  # tool on the left of travel
    return climb_forward if direction == "climb" else not climb_forward


def _chain_toolpath(chain: Chain, z: float, feed: float) -> tuple:
    k = len(chain)
    zs = np.full((k, 1), z)
    return (chain.kind.astype(np.int8), np.hstack([chain.start, zs]), np.hstack([chain.end, zs]),
            chain.center, np.full(k, feed))


def _close(chain: Chain, closed: bool) -> Chain:
    """A closed path ends exactly where it starts (not a last-bit apart)."""
    if closed and len(chain):
        gap = float(np.hypot(*(chain.end[-1] - chain.start[0])))
        if gap <= 1e-9 * max(1.0, float(np.abs(chain.start).max())):
            chain.end[-1] = chain.start[0]
    return chain


def _start_at(chain: Chain, point) -> Chain:
    """The closed chain rotated to start at its point nearest to ``point``.

    The move holding that point is split there (an arc into two arcs about
    the same center, a line into two lines).
    """
    from .measure import sample_chain

    pts, owner, _ = sample_chain(chain, np.full(len(chain), 64))
    i = int(owner[np.argmin(np.hypot(*(pts - point).T))])
    s, e = chain.start[i], chain.end[i]
    if chain.kind[i] == LINE:
        v = e - s
        u = float(np.clip((point - s) @ v / max(v @ v, 1e-300), 0.0, 1.0))
        x = s + u * v
    else:
        c = chain.center[i]
        r, a0, sw = arc_geometry(s, e, c, chain.kind[i] == ARC_CCW)
        ang = math.atan2(point[1] - c[1], point[0] - c[0])
        phi = float(np.mod((ang - a0) * np.sign(sw), 2 * np.pi))
        phi = min(phi, abs(float(sw))) if phi <= abs(float(sw)) + 0.5 * (2 * np.pi - abs(float(sw))) else 0.0
        a = a0 + np.sign(sw) * phi
        x = c + r * np.array([math.cos(a), math.sin(a)])
    k = len(chain)
    scale = 1e-9 * max(1.0, float(np.abs(chain.start).max()))
    if np.hypot(*(x - s)) <= scale:
        order = np.roll(np.arange(k), -i)
        return chain.take(order)
    if np.hypot(*(x - e)) <= scale:
        order = np.roll(np.arange(k), -(i + 1))
        return chain.take(order)
    first = Chain(chain.kind[i:i + 1], x[None], e[None], chain.center[i:i + 1], [np.nan], [np.nan])
    last = Chain(chain.kind[i:i + 1], s[None], x[None], chain.center[i:i + 1], [np.nan], [np.nan])
    rest = chain.take(np.r_[np.arange(i + 1, k), np.arange(0, i)])
    return Chain.concat([first, rest, last])


def _approximate_all(contour, windows, d, tol, moves):
    """Approximate each window; counts add up, rounds take the most."""
    parts, dev = [], 0.0
    stats = {"spans": 0, "merged_spans": 0, "boost_rounds": 0, "split_rounds": 0}
    spans = straight_spans(contour) if moves == "arcs" else []
    for w in windows:
        if moves == "arcs":
            # straight edges of the contour are lines; the rest arcs fitted inside the tolerance band
            # (falls back to curve-tangent biarcs), near-straight arcs (radius > 1000 chords, or bulge
            # < 5 % of tol) lines too, measured
            chain, dv, st = arcs_and_lines(contour, w, d, tol, spans, band_arcs)
        else:
            chain, dv, st = approximate(contour, w[None], d, tol, moves=moves)
        parts.append(chain)
        dev = max(dev, dv)
        for key in stats:
            summed = key in ("spans", "merged_spans")
            stats[key] = stats[key] + st[key] if summed else max(stats[key], st[key])
    return parts, dev, stats


def contour_moves(contour, *, tolerance: float, moves: str = "arcs") -> Toolpath:
    """The contour itself as lines or arcs within ``tolerance`` (mm).

    No offset, no leads, no passes: z = 0 and feed 0 on every move, for
    drawings (the DXF bulge polyline).  A closed contour starts and ends
    at its first point.

    >>> import numpy as np
    >>> from pathgen.spline import fit
    >>> th = np.linspace(0, 2 * np.pi, 400, endpoint=False)
    >>> c = fit(np.c_[10 * np.cos(th), 10 * np.sin(th)], closed=True)
    >>> tp = contour_moves(c, tolerance=0.01)
    >>> len(tp) <= 8, tp.deviation <= 0.01
    (True, True)
    """
    tol = check_positive("tolerance", tolerance)
    check_option("moves", moves, MOVES)
    lo, hi = contour.domain
    windows, joins, _ = regular_windows(contour, 0.0, lo, hi)
    parts, dev, stats = _approximate_all(contour, windows, 0.0, tol, moves)
    chain = _close(_drop_tiny(Chain.concat(parts)), contour.closed)
    kind, s, e, c, f = _chain_toolpath(chain, 0.0, 0.0)
    return Toolpath(kind, s, e, c, f, units="mm", tool_diameter=0.0, side="on",
                    tolerance=tol, deviation=dev, time=0.0,
                    info={"moves": moves, "closed": contour.closed, **stats})


def choose_seam(contour, *, near=None, keep_away: float = 0.0, d: float = 0.0) -> float:
    """Parameter where a closed cut starts.

    Default: the middle of the flattest stretch (smallest |κ| averaged
    over ±``keep_away`` mm, at least 1 mm), away from corners and from
    spots the tool of offset ``d`` cannot reach.  With ``near=(x, y)``:
    the contour point nearest to it.
    """
    b = contour.breaks
    sub = int(np.clip(200_000 // contour.pieces, 2, 16))
    g = (b[:-1, None] + np.diff(b)[:, None] * (np.arange(sub) / sub)).ravel()
    if near is not None:
        try:
            xy = np.asarray(near, dtype=np.float64).reshape(2)
        except (TypeError, ValueError):
            raise InputError(f"seam must be a point (x, y), got {near!r}") from None
        if not np.all(np.isfinite(xy)):
            raise InputError(f"seam must be a finite point (x, y), got {near!r}")
        p = contour(g)
        i = int(np.argmin(np.hypot(*(p - xy).T)))
        t = g[i]
        for _ in range(20):  # Newton on (P - xy)·P' = 0
            r = contour(t) - xy
            d1, d2 = contour(t, 1), contour(t, 2)
            df = d1 @ d1 + r @ d2
            if df <= 0:
                break
            t = t - (r @ d1) / df
        return float(contour.domain[0] + np.mod(t - contour.domain[0], b[-1] - b[0]))
    d1 = contour(g, 1)
    d2 = contour(g, 2)
    speed = np.hypot(d1[:, 0], d1[:, 1])
    kappa = (d1[:, 0] * d2[:, 1] - d1[:, 1] * d2[:, 0]) / speed**3
    ds = speed * np.diff(np.append(g, b[-1]))
    s = np.cumsum(ds) - ds
    L = float(s[-1] + ds[-1])
    w = max(keep_away, 1.0)
    w = min(w, 0.25 * L)
    # moving average of |κ| over ±w (periodic), by cumulative sums
    ext_s = np.concatenate([s - L, s, s + L])
    ext_k = np.tile(np.abs(kappa) * ds, 3)
    cum = np.concatenate([[0.0], np.cumsum(ext_k)])
    lo_i = np.searchsorted(ext_s, s - w)
    hi_i = np.searchsorted(ext_s, s + w, side="right")
    cost = (cum[hi_i] - cum[lo_i]) / (2 * w)
    bad = np.zeros(len(g), bool)
    for ci in contour.corners:
        sc = float(contour.arc_length(b[ci])) if ci < len(b) - 1 else 0.0
        dist = np.abs(np.mod(s - sc + 0.5 * L, L) - 0.5 * L)
        bad |= dist < w
    if d != 0.0:
        tight = 1.0 - d * kappa < 0.5
        if np.any(tight):
            ts = s[tight]
            near_t = np.abs(np.mod(s[:, None] - ts[None, :] + 0.5 * L, L) - 0.5 * L).min(axis=1) \
                if tight.sum() * len(s) < 5e7 else np.zeros(len(s))
            bad |= near_t < w + abs(d)
    if np.all(bad):
        bad[:] = False
    cost = np.where(bad, np.inf, cost)
    best = cost.min()
    flat = cost <= best + 1e-9 * max(best, 1e-12) + 1e-15
    # middle of the longest run of equally flat samples (cyclic)
    idx = np.flatnonzero(flat)
    if len(idx) == len(g):
        return float(g[0])
    runs = np.split(idx, np.flatnonzero(np.diff(idx) > 1) + 1)
    if len(runs) > 1 and runs[0][0] == 0 and runs[-1][-1] == len(g) - 1:
        runs[0] = np.concatenate([runs[-1] - len(g), runs[0]])
        runs.pop()
    run = max(runs, key=len)
    return float(g[run[len(run) // 2] % len(g)])


def _tangent_at(chain: Chain, i: int, at_end: bool) -> np.ndarray:
    s, e = chain.start[i], chain.end[i]
    if chain.kind[i] == LINE:
        v = e - s
    else:
        p = e if at_end else s
        rel = p - chain.center[i]
        v = np.array([-rel[1], rel[0]]) if chain.kind[i] == ARC_CCW else np.array([rel[1], -rel[0]])
    return v / np.hypot(*v)


def _lead(point, tangent, toward, length, kind, *, entering, max_radius):
    """Lead move(s) as (kind, start, end, center) tuples (2-D)."""
    left = np.array([-tangent[1], tangent[0]])
    side = left if left @ toward >= 0 else -left
    if kind == "line":
        v = math.sqrt(0.5) * length * ((-tangent if entering else tangent) + side)
        other = point + v
        return (LINE, other, point, np.zeros(2)) if entering else (LINE, point, other, np.zeros(2))
    rho = min(length, max_radius)
    center = point + rho * side
    ccw = bool(left @ side > 0)
    rel = point - center
    # entering: the arc ends at point, so its start is a quarter turn back
    ang = (-0.5 if ccw else 0.5) * math.pi if entering else (0.5 if ccw else -0.5) * math.pi
    c, s = math.cos(ang), math.sin(ang)
    other = center + np.array([c * rel[0] - s * rel[1], s * rel[0] + c * rel[1]])
    k = ARC_CCW if ccw else ARC_CW
    return (k, other, point, center) if entering else (k, point, other, center)


def make_toolpath(contour, tool=None, cut=None, machine=None, *, moves: str = "arcs",
                  direction: str = "climb", seam=None, lead: str = "arc", lead_length=None,
                  depth: float = 1.0, step_down=None, safe_height: float = 5.0,
                  plunge_feed=None, units: str = "mm") -> Toolpath:
    """Tool-center toolpath for a contour: offset, direction, seam, leads, passes.

    Parameters
    ----------
    contour : Contour (mm).  Closed contours may run either way round.
    tool : Tool (diameter, mm); None → ``Tool()``.
    cut : Cut (feed mm/min, side, tolerance mm); None → ``Cut()``.
    machine : Machine; None → ``Machine()`` (rapid speed for the time).
    moves : "arcs" (tangent-continuous arcs and lines fitted inside the
        tolerance band of the tool-center curve) or "lines".
    direction : "climb", "conventional", "forward" or "reverse" (see the
        module's direction rule).
    seam : None (flattest stretch) or (x, y): the closed cut starts at the
        point of the finished (trimmed) path nearest to the tool position at
        the contour point nearest (x, y).  Open contours start at their start.
    lead : "arc" (quarter circle of radius ``lead_length``, tangent to the
        path), "line" (``lead_length`` long, at 45° from the tool side) or
        "none"; always on the tool side, in and out.
    lead_length : mm; None → the tool diameter (at least 1 mm).
    depth : total depth below z = 0, mm.  step_down : mm per pass (None:
        one pass); passes are equal, each at most ``step_down``.
    safe_height : z of rapid moves, mm.  plunge_feed : mm/min for the
        vertical feed moves (None → half the cutting feed).
    units : "mm" or "inch": units of the returned toolpath (converted at
        the end; all inputs are mm).

    Returns
    -------
    Toolpath with measured ``deviation`` <= tolerance, ``time`` (s) and
    ``info`` (direction, travel, passes, seam, trimmed spots, block counts).

    Raises
    ------
    InputError
        For a bad option, or when the tool cannot cut the contour safely:
        it does not fit, its path would split, or after trimming it would
        still come closer to the contour than its radius (never returned).

    Examples
    --------
    >>> import numpy as np
    >>> from pathgen.spline import fit
    >>> from pathgen.checks.machine import Tool, Cut
    >>> th = np.linspace(0, 2 * np.pi, 200, endpoint=False)
    >>> part = fit(np.c_[10 * np.cos(th), 10 * np.sin(th)], closed=True)
    >>> tp = make_toolpath(part, Tool(6.0), Cut(side="outside"), depth=2.0, step_down=1.0)
    >>> tp.info["passes"], tp.info["travel"], tp.deviation <= 0.01
    (2, 'against the contour', True)
    """
    from ..checks.machine import Cut, Machine, Tool

    tool = Tool() if tool is None else tool
    cut = Cut() if cut is None else cut
    machine = Machine() if machine is None else machine
    check_option("moves", moves, MOVES)
    check_option("direction", direction, DIRECTIONS)
    check_option("lead", lead, LEADS)
    check_option("units", units, UNITS)
    depth = check_positive("depth", depth)
    safe_height = check_positive("safe_height", safe_height)
    step = depth if step_down is None else check_positive("step_down", step_down)
    feed = cut.feed
    plunge = 0.5 * feed if plunge_feed is None else check_positive("plunge_feed", plunge_feed)
    tol = cut.tolerance
    r = tool.radius
    if lead_length is None:
        lead_len = max(tool.diameter, 1.0)
    else:
        lead_len = check_positive("lead_length", lead_length)

    orient = 1.0
    if contour.closed:
        # orientation from the fitted points' shoelace area: same sign as the
        # contour's area, at a fraction of its cost on large outlines
        x, y = contour.points[:, 0], contour.points[:, 1]
        shoelace = float(np.dot(x, np.roll(y, -1)) - np.dot(y, np.roll(x, -1)))
        orient = 1.0 if shoelace >= 0 else -1.0
    d = side_sign(cut.side) * r * orient
    lo, hi = contour.domain
    target = None
    if contour.closed:
        # the path is built from the flattest stretch (a safe place to start
        # trimming from); a user's seam then only picks where it starts
        ts = choose_seam(contour, keep_away=lead_len + r, d=d)
        lo, hi = ts, ts + (hi - lo)
        if seam is not None:
            tu = choose_seam(contour, near=seam)
            p = contour(tu)
            target = p + d * contour.normal(tu)
    elif seam is not None:
        raise InputError("seam applies to closed contours only; an open contour starts at its first point")
    windows, joins, spots = regular_windows(contour, d, lo, hi, tol)
    parts, dev, stats = _approximate_all(contour, windows, d, tol, moves)
    chain, trims = assemble(contour, parts, joins, d, tol, closed=contour.closed)
    # a move without length (a window that ended where its last move did)
    # has no direction: the leads and the G-code need one
    chain = _close(_drop_tiny(chain), contour.closed)
    if target is not None:
        chain = _start_at(chain, target)
    spots = unique_spots(spots + trims, tol)
    forward = _travel_forward(d, direction)
    if not forward:
        chain = chain.reversed()
    if len(chain) == 0:
        raise InputError("the toolpath is empty: nothing of the contour can be cut with this tool")

    # leads on the tool side
    n_out = np.sign(d) if d != 0 else -orient  # tool side along the left normal
    S, E = chain.start[0], chain.end[-1]
    Ts, Te = _tangent_at(chain, 0, False), _tangent_at(chain, len(chain) - 1, True)

    def tool_side(point, t_dir):
        # left normal of the contour's own direction, times the tool side sign
        nl = np.array([-t_dir[1], t_dir[0]]) * (1.0 if forward else -1.0)
        return n_out * nl

    def max_radius(i, at_end):
        if chain.kind[i] == LINE:
            return np.inf
        rr = float(np.hypot(*(chain.start[i] - chain.center[i])))
        p = chain.end[i] if at_end else chain.start[i]
        toward_center = chain.center[i] - p
        t_dir = _tangent_at(chain, i, at_end)
        return 0.45 * rr if toward_center @ tool_side(p, t_dir) > 0 else np.inf

    lead_in, lead_out = [], []
    if lead != "none":
        lead_in = [_lead(S, Ts, tool_side(S, Ts), lead_len, lead, entering=True,
                         max_radius=max_radius(0, False))]
        lead_out = [_lead(E, Te, tool_side(E, Te), lead_len, lead, entering=False,
                          max_radius=max_radius(len(chain) - 1, True))]
    L0 = lead_in[0][1] if lead_in else S
    n_pass = max(1, math.ceil(depth / step - 1e-9))
    rows = []  # (kind, start3, end3, center2, feed)

    def add(kind, s2, e2, c2, z0, z1, f):
        rows.append((kind, (s2[0], s2[1], z0), (e2[0], e2[1], z1), (c2[0], c2[1]), f))

    origin = np.zeros(2)  # the center column of moves that are not arcs
    # the path opens at the lead-in start at safe height: where the machine
    # stands before is not known here, so no traverse from an assumed origin
    add(RAPID, L0, L0, origin, safe_height, safe_height, 0.0)
    ck, cs, ce, cc, cf = _chain_toolpath(chain, 0.0, feed)
    blocks = []
    for k in range(1, n_pass + 1):
        z = -depth * k / n_pass
        if k > 1:
            add(RAPID, last_xy, last_xy, origin, z_prev, safe_height, 0.0)
            add(RAPID, last_xy, L0, origin, safe_height, safe_height, 0.0)
        add(LINE, L0, L0, origin, safe_height, z, plunge)
        for kind, a, b, c in lead_in:
            add(kind, a, b, c, z, z, feed)
        blocks.append(len(rows))
        rows.append(None)  # the chain goes here
        for kind, a, b, c in lead_out:
            add(kind, a, b, c, z, z, feed)
        last_xy = lead_out[-1][2] if lead_out else E
        z_prev = z
    add(RAPID, last_xy, last_xy, origin, z_prev, safe_height, 0.0)

    kinds, starts, ends, centers, feeds = [], [], [], [], []
    for k, row in enumerate(rows):
        if row is None:
            z = -depth * (blocks.index(k) + 1) / n_pass
            kinds.append(ck)
            starts.append(np.column_stack([cs[:, :2], np.full(len(ck), z)]))
            ends.append(np.column_stack([ce[:, :2], np.full(len(ck), z)]))
            centers.append(cc)
            feeds.append(cf)
        else:
            kinds.append(np.array([row[0]], np.int8))
            starts.append(np.array([row[1]]))
            ends.append(np.array([row[2]]))
            centers.append(np.array([row[3]]))
            feeds.append(np.array([row[4]]))
    kind = np.concatenate(kinds)
    start = np.vstack(starts)
    end = np.vstack(ends)
    center = np.vstack(centers)
    feed_arr = np.concatenate(feeds)
    # feed per block from the machine's limits (curvature, acceleration,
    # block rate), never above the programmed feed; and the planned time
    from ..checks.feed import feeds_for_moves

    feed_arr, time_s = feeds_for_moves(kind, start, end, center, feed=feed_arr, machine=machine)
    feed_arr = np.where(kind == RAPID, 0.0, feed_arr)
    seam_xy = (float(S[0]), float(S[1]))
    info = {
        "moves": moves,
        "direction": direction,
        "travel": "with the contour" if forward else "against the contour",
        "orientation": ("ccw" if orient > 0 else "cw") if contour.closed else "open",
        "offset": float(d),
        "passes": int(n_pass),
        "depth": float(depth),
        "step_down": float(depth / n_pass),
        "safe_height": float(safe_height),
        "plunge_feed": float(plunge),
        "feed": float(feed),
        "lead": lead,
        "lead_length": float(lead_len),
        "seam": seam_xy,
        "trimmed": spots,
        "blocks": {
            "rapid": int(np.sum(kind == RAPID)),
            "line": int(np.sum(kind == LINE)),
            "arc": int(np.sum(kind >= ARC_CW)),
            "per_pass": int(len(chain)),
        },
        "feeds": "planned",
        **stats,
    }
    meta = dict(units="mm", tool_diameter=float(tool.diameter), side=cut.side, tolerance=float(tol),
                deviation=float(dev), time=float(time_s), info=info)
    if units == "inch":
        return _to_inch(Toolpath(kind, start, end, center, feed_arr), meta)
    return Toolpath(kind, start, end, center, feed_arr, **meta)


def _to_inch(path: Toolpath, meta: dict) -> Toolpath:
    f = 1.0 / MM_PER_INCH
    info = dict(meta["info"])
    for key in ("offset", "depth", "step_down", "safe_height", "plunge_feed", "feed", "lead_length"):
        info[key] = info[key] * f
    info["seam"] = (info["seam"][0] * f, info["seam"][1] * f)
    info["trimmed"] = [{**s, **{k: s[k] * f for k in ("x", "y", "radius") if k in s}} for s in info["trimmed"]]
    meta = {**meta, "units": "inch", "info": info}
    for key in ("tool_diameter", "tolerance", "deviation"):
        meta[key] = meta[key] * f
    return Toolpath(path.kind, path.start * f, path.end * f, path.center * f, path.feed * f, **meta)
