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
from ..geometry import angle_along_arc, orientation
from .arcfit import band_arcs
from .entry import ENTRIES, arc_as_lines, helix_moves, move_length, ramp_route, take_length
from .flatten import MOVES, drop_tiny, approximate
from .measure import Chain, arc_geometry
from .model import ARC_CCW, ARC_CW, LINE, RAPID, Toolpath
from .offset import assemble, regular_windows, separate_regions, unique_spots
from .straighten import arcs_and_lines, straight_spans

__all__ = ["make_toolpath", "contour_moves", "choose_seam", "DIRECTIONS", "LEADS"]

DIRECTIONS = ("climb", "conventional", "forward", "reverse")
from .._options import LEADS  # noqa: E402  (one list, shared)


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


def close_chain(chain: Chain, closed: bool) -> Chain:
    """A closed path ends exactly where it starts (not a last-bit apart)."""
    if closed and len(chain):
        gap = float(np.hypot(*(chain.end[-1] - chain.start[0])))
        if gap <= 1e-9 * max(1.0, float(np.abs(chain.start).max())):
            chain.end[-1] = chain.start[0]
    return chain


def start_at(chain: Chain, point) -> Chain:
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
        phi = float(angle_along_arc(ang, a0, np.sign(sw)))
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


def approximate_all(contour, windows, d, tol, moves):
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
    parts, dev, stats = approximate_all(contour, windows, 0.0, tol, moves)
    chain = close_chain(drop_tiny(Chain.concat(parts)), contour.closed)
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
    m = contour.pieces
    if m <= 200_000:
        # 2 to 16 samples to a piece (about 200 000 in all)
        sub = int(np.clip(200_000 // m, 2, 16))
        grid = b[:-1, None] + np.diff(b)[:, None] * (np.arange(sub) / sub)
        g = grid.ravel()

        def on_grid(nu):  # row i on piece i: broadcast, no search
            return contour.on_pieces(grid, 0, nu).reshape(-1, 2)
    else:
        # more pieces than that (10^6 points): the breaks of every k-th
        # piece, about 200 000 samples still, a few µm apart on a part
        g = b[:-1:-(-m // 200_000)]

        def on_grid(nu):
            return contour(g, nu)

    if near is not None:
        try:
            xy = np.asarray(near, dtype=np.float64).reshape(2)
        except (TypeError, ValueError):
            raise InputError(f"seam must be a point (x, y), got {near!r}") from None
        if not np.all(np.isfinite(xy)):
            raise InputError(f"seam must be a finite point (x, y), got {near!r}")
        p = on_grid(0)
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
    d1 = on_grid(1)
    d2 = on_grid(2)
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


def tangent_at(chain: Chain, i: int, at_end: bool) -> np.ndarray:
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


def _fits(probe, moves2, z=-1.0):
    """Smallest clearance of each 2-D move put at depth z."""
    if not moves2:
        return np.zeros(0)
    k = np.array([m[0] for m in moves2], np.int8)
    s = np.array([[m[1][0], m[1][1], z] for m in moves2])
    e = np.array([[m[2][0], m[2][1], z] for m in moves2])
    c = np.array([[m[3][0], m[3][1]] for m in moves2])
    return probe.per_move(k, s, e, c)


def _plan_entry(chain, *, closed, forward, n_out, lead, lead_len, entry, ramp, pass_depth, overlap,
                probe, r, tol, user_seam, units="mm"):
    """Leads, seam and entry that keep clear of the part.

    Leads start at ``lead_len`` and shrink (by a quarter at a time) until
    their moves keep at least min(r - tol/2, the path's own clearance there)
    from the contour; a closed cut without a seam given by the user tries
    16 other seams (move starts evenly spaced along the path) when a lead
    does not fit full size, and keeps the seam where the leads come out
    largest; where no lead fits the tool enters or leaves straight on the
    path.  A helix is placed through the lead-in's start where the room
    allows r_helix + r <= clearance - tol (r_helix from 0.75 r down to
    0.1 r); without room the entry falls back to a ramp.
    """
    notes = []
    floor = max(0.05 * r, 4.0 * tol)
    k = 1.0 / MM_PER_INCH if units == "inch" else 1.0

    def at(p):  # a point for the notes, in the program's units
        return f"({p[0] * k:.4f}, {p[1] * k:.4f})"

    def ln(v):  # a length for the notes
        return f"{v * k:.4g} {units}"

    def tool_side(t_dir):
        nl = np.array([-t_dir[1], t_dir[0]]) * (1.0 if forward else -1.0)
        return n_out * nl

    def max_radius(ch, i, at_end):
        if ch.kind[i] == LINE:
            return np.inf
        rr = float(np.hypot(*(ch.start[i] - ch.center[i])))
        p = ch.end[i] if at_end else ch.start[i]
        t_dir = tangent_at(ch, i, at_end)
        return 0.45 * rr if (ch.center[i] - p) @ tool_side(t_dir) > 0 else np.inf

    def one_lead(point, t_dir, entering, max_r):
        if lead == "none":
            return [], 0.0
        if probe is None:
            return [_lead(point, t_dir, tool_side(t_dir), lead_len, lead, entering=entering, max_radius=max_r)], \
                min(lead_len, max_r) if lead == "arc" else lead_len
        need = min(r - 0.5 * tol, float(probe.distance(point)[0])) - 1e-6
        sizes = lead_len * 0.75 ** np.arange(64)
        sizes = sizes[sizes >= floor]
        mv = [_lead(point, t_dir, tool_side(t_dir), float(L), lead, entering=entering, max_radius=np.inf)
              for L in sizes]
        ok = np.flatnonzero(_fits(probe, mv) >= need)
        if len(ok):
            return [mv[ok[0]]], float(sizes[ok[0]])
        return [], 0.0

    def leads_at(ch):
        S = ch.start[0]
        ov = take_length(ch, overlap, closed=True) if (closed and overlap > 0) else []
        if ov:
            oc = Chain(np.array([m[0] for m in ov], np.int8), np.array([m[1] for m in ov]),
                       np.array([m[2] for m in ov]), np.array([m[3] for m in ov]),
                       np.full(len(ov), np.nan), np.full(len(ov), np.nan))
            E, Te, mo = oc.end[-1], tangent_at(oc, len(oc) - 1, True), max_radius(oc, len(oc) - 1, True)
        else:
            E, Te, mo = ch.end[-1], tangent_at(ch, len(ch) - 1, True), max_radius(ch, len(ch) - 1, True)
        if entry == "ramp":
            lin, lin_len = [], 0.0
        else:
            lin, lin_len = one_lead(S, tangent_at(ch, 0, False), True, max_radius(ch, 0, False))
        lout, lout_len = one_lead(E, Te, False, mo)
        return lin, lin_len, lout, lout_len, ov

    total = float(sum(move_length(int(k), a, b, c) for k, a, b, c in
                      zip(chain.kind, chain.start, chain.end, chain.center)))
    if closed and overlap > total:
        raise InputError(f"overlap {ln(overlap)} is longer than the path itself ({ln(total)})")
    if not closed and overlap > 0:
        notes.append("overlap applies to closed cuts only; this open cut ends at its end")
    lin, lin_len, lout, lout_len, ov = leads_at(chain)
    full = lead == "none" or ((lin_len >= lead_len or entry == "ramp") and lout_len >= lead_len)
    if not full and closed and not user_seam and probe is not None and len(chain) > 1:
        lengths = np.array([move_length(int(k), a, b, c) for k, a, b, c in
                            zip(chain.kind, chain.start, chain.end, chain.center)])
        cum = np.concatenate([[0.0], np.cumsum(lengths)[:-1]])
        starts = np.unique(np.searchsorted(cum, total * np.arange(1, 16) / 16.0))
        best = (min(lin_len if entry != "ramp" else lout_len, lout_len), 0, chain, lin, lin_len, lout, lout_len, ov)
        for j in starts:
            if j <= 0 or j >= len(chain):
                continue
            ch = chain.take(np.roll(np.arange(len(chain)), -int(j)))
            cand = leads_at(ch)
            score = min(cand[1] if entry != "ramp" else cand[3], cand[3])
            if score > best[0] + 1e-9:
                best = (score, int(j), ch, *cand)
                if score >= lead_len:
                    break
        if best[1] != 0:
            S0, S1 = chain.start[0], best[2].start[0]
            notes.append(f"the lead did not fit at the seam {at(S0)}; the cut starts at {at(S1)} instead")
        _, _, chain, lin, lin_len, lout, lout_len, ov = best
    S = chain.start[0]
    if lead != "none":
        if entry != "ramp" and lin_len < lead_len:
            notes.append(f"lead-in shrunk to {ln(lin_len)} to fit at {at(S)}" if lin else
                         f"no lead-in fits at {at(S)}: the tool enters straight onto the path")
        if lout_len < lead_len:
            E = lout[0][1] if lout else (ov[-1][2] if ov else chain.end[-1])
            notes.append(f"lead-out shrunk to {ln(lout_len)} to fit at {at(E)}" if lout else
                         f"no lead-out fits at {at(E)}: the tool leaves straight up from the path")
    plan = {"chain": chain, "lead_in": lin, "lead_out": lout, "overlap": ov,
            "lead_in_length": lin_len, "lead_out_length": lout_len,
            "overlap_length": overlap if closed else 0.0, "entry": entry, "helix_radius": 0.0,
            "helix_center": None, "helix_ccw": True, "ramp": [], "notes": notes}
    if lin_len == 0.0 and lout_len == 0.0 and lead != "none":
        plan["lead"] = "none"
    else:
        plan["lead"] = lead
    E0 = lin[0][1] if lin else S
    if entry == "helix":
        found = _helix_place(E0, tool_side(tangent_at(chain, 0, False)), probe, r, tol)
        if found is None:
            # the ramp replaces the lead-in too: what was said about it no longer holds
            notes[:] = [n for n in notes if not n.startswith(("lead-in", "no lead-in"))]
            notes.append(f"no room for a helix at {at(E0)}; the tool ramps down along the path instead")
            plan["entry"] = "ramp"
        else:
            plan["helix_center"], plan["helix_radius"] = found
            if closed:
                plan["helix_ccw"] = orientation(chain.start) > 0
    if plan["entry"] == "ramp":  # the ramp enters along the path: no lead-in
        plan["lead_in"], plan["lead_in_length"] = [], 0.0
        plan["ramp"] = ramp_route(chain, pass_depth / ramp, closed=closed)
        E0 = plan["ramp"][0][1]
    plan["entry_xy"] = np.asarray(E0, float)
    return plan


def _helix_place(point, away, probe, r, tol):
    """(center, radius) of a helix through ``point`` with room around it, or None."""
    point = np.asarray(point, float)
    away = np.asarray(away, float) / max(float(np.hypot(*away)), 1e-300)
    angles = np.radians([0, 30, -30, 60, -60, 90, -90, 120, -120, 150, -150, 180])
    dirs = np.c_[away[0] * np.cos(angles) - away[1] * np.sin(angles),
                 away[0] * np.sin(angles) + away[1] * np.cos(angles)]
    rho = 0.75 * r
    while rho >= 0.1 * r:
        centers = point + rho * dirs
        if probe is None:
            return centers[0], rho
        room = probe.distance(centers)
        ok = np.flatnonzero(room >= rho + r + tol)
        if len(ok):
            return centers[ok[0]], rho
        rho *= 0.8
    return None


def make_toolpath(contour, tool=None, cut=None, machine=None, *, moves: str = "arcs",
                  direction: str = "climb", seam=None, lead: str = "arc", lead_length=None,
                  depth: float = 1.0, step_down=None, safe_height: float = 5.0,
                  plunge_feed=None, units: str = "mm", entry: str = "plunge", ramp_angle=None,
                  retract_height=None, overlap: float = 0.0) -> Toolpath:
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
    units : "mm" or "inch": the units its notes and messages are worded in
        (the user's units); the toolpath itself is always in mm (a writer
        converts it when it writes inch: :func:`pathgen.moves.toolpath_in_units`).

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
    for name, value, kind in (("tool", tool, Tool), ("cut", cut, Cut), ("machine", machine, Machine)):
        if not isinstance(value, kind):
            raise InputError(f"{name} must be a pathgen {kind.__name__} (e.g. pathgen.{kind.__name__}(...)), "
                             f"got {type(value).__name__} {value!r}")
    check_option("moves", moves, MOVES)
    check_option("direction", direction, DIRECTIONS)
    check_option("lead", lead, LEADS)
    check_option("units", units, UNITS)
    depth = check_positive("depth", depth)
    safe_height = check_positive("safe_height", safe_height)
    check_option("entry", entry, ENTRIES)
    retract = min(1.0, safe_height) if retract_height is None else check_positive("retract_height", retract_height)
    if retract > safe_height:
        raise InputError(f"retract height {retract:g} mm is above the safe height {safe_height:g} mm; "
                         "the retract height is just above the stock, the safe height clears the clamps")
    ramp_angle = math.radians(3.0) if ramp_angle is None else ramp_angle
    if not (isinstance(ramp_angle, (int, float)) and 0 < ramp_angle <= math.radians(45)):
        raise InputError(f"ramp angle must be above 0 and at most 45 degrees, got {math.degrees(ramp_angle)!r} degrees")
    overlap = check_positive("overlap", overlap, allow_zero=True)
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
        orient = float(orientation(contour.points))
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
    parts, dev, stats = approximate_all(contour, windows, d, tol, moves)
    chain, trims = assemble(contour, parts, joins, d, tol, closed=contour.closed)
    if contour.closed and trims and cut.side in ("inside", "outside"):
        # trimmed at an overlap: is it a swallow-tail, or a whole region one path cannot reach?
        left, widest = separate_regions(contour, r, cut.side == "inside", tol)
        if left:
            area, (x, y) = left[0]
            what = ("the pocket narrows below the tool diameter and falls apart into separate regions"
                    if cut.side == "inside" else "a cavity of the outline is wider than the tool behind a mouth "
                    "narrower than it")
            raise InputError(
                f"one path cannot cut this outline with a {2 * r:g} mm tool: {what}; the region around "
                f"({x:.4f}, {y:.4f}) mm ({area:.4g} mm², {len(left)} region(s) in all) would be left uncut; "
                f"use a tool under {widest:.4g} mm (the widest that passes the narrowing), or cut each "
                "region as an outline of its own")
    # a move without length (a window that ended where its last move did)
    # has no direction: the leads and the G-code need one
    chain = close_chain(drop_tiny(chain), contour.closed)
    if target is not None:
        chain = start_at(chain, target)
    spots = unique_spots(spots + trims, tol)
    forward = _travel_forward(d, direction)
    if not forward:
        chain = chain.reversed()
    if len(chain) == 0:
        raise InputError("the toolpath is empty: nothing of the contour can be cut with this tool")

    # leads, entry, passes: every move below the stock top (z = 0) is
    # checked against the part before the path is returned
    n_out = np.sign(d) if d != 0 else -orient  # tool side along the left normal
    probe = None
    if d != 0.0:
        from .clearance import Probe

        probe = Probe(contour, tool_radius=r, side=cut.side, tolerance=tol)
    n_pass = max(1, math.ceil(depth / step - 1e-9))
    plan = _plan_entry(chain, closed=contour.closed, forward=forward, n_out=n_out, lead=lead,
                       lead_len=lead_len, entry=entry, ramp=math.tan(ramp_angle), pass_depth=depth / n_pass,
                       overlap=overlap, probe=probe, r=r, tol=tol, user_seam=seam is not None, units=units)
    chain = plan["chain"]
    S = chain.start[0]
    if moves == "lines":
        for key in ("lead_in", "lead_out"):
            plan[key] = [ln for m in plan[key] for ln in
                         (arc_as_lines(*m, tol) if m[0] != LINE else [m])]
    blocks = []  # (kind, start3, end3, center2, feed, role) column blocks
    roles = []

    def add(kind, s2, e2, c2, z0, z1, f, role):
        blocks.append((np.array([kind], np.int8), np.array([[s2[0], s2[1], z0]], float),
                       np.array([[e2[0], e2[1], z1]], float), np.array([[c2[0], c2[1]]], float),
                       np.array([f], float)))
        roles.append((role, 1))

    def add_flat(mv, z, f, role):  # 2-D moves at one z
        for kind, a, b, c in mv:
            add(kind, a, b, c, z, z, f, role)

    def add_sloped(mv, z0, z1, f, role):  # 2-D moves descending linearly with length
        lengths = np.array([move_length(*m) for m in mv])
        cum = np.concatenate([[0.0], np.cumsum(lengths)])
        total = max(cum[-1], 1e-300)
        for (kind, a, b, c), c0, c1 in zip(mv, cum[:-1], cum[1:]):
            za, zb = z0 + (z1 - z0) * c0 / total, z0 + (z1 - z0) * c1 / total
            if moves == "lines" and kind != LINE:
                for lk, la, lb, lc in arc_as_lines(kind, (a[0], a[1], za), (b[0], b[1], zb), c, tol):
                    add(lk, la, lb, lc, la[2], lb[2], f, role)
            else:
                add(kind, a, b, c, za, zb, f, role)

    origin = np.zeros(2)  # the center column of moves that are not arcs
    E0 = plan["entry_xy"]
    # the path opens above the entry at safe height: where the machine stands
    # before is not known here, so no traverse from an assumed origin; then
    # down at rapid to the retract height, just above the stock
    add(RAPID, E0, E0, origin, safe_height, safe_height, 0.0, "traverse")
    add(RAPID, E0, E0, origin, safe_height, retract, 0.0, "traverse")
    ck, cs, ce, cc, cf = _chain_toolpath(chain, 0.0, feed)
    last_xy, z_last = E0, retract
    for k in range(1, n_pass + 1):
        z, z_prev = -depth * k / n_pass, -depth * (k - 1) / n_pass
        if k > 1:  # up to the retract height, across, and in again
            add(RAPID, last_xy, last_xy, origin, z_last, retract, 0.0, "retract")
            add(RAPID, last_xy, E0, origin, retract, retract, 0.0, "link")
        if plan["entry"] == "plunge":
            add(LINE, E0, E0, origin, retract, z, plunge, "plunge")
        else:
            # at the plunge feed down to the previous pass's floor (cut
            # already, or air above the stock), then down the ramp or helix
            add(LINE, E0, E0, origin, retract, z_prev, plunge, "plunge")
            if plan["entry"] == "ramp":
                add_sloped(plan["ramp"], z_prev, z, feed, "ramp")
            else:
                hx, _ = helix_moves(E0, plan["helix_center"], ccw=plan["helix_ccw"], z0=z_prev, z1=z,
                                    slope=math.tan(ramp_angle))
                for kind, a, b, c in hx:
                    parts = arc_as_lines(kind, a, b, c, tol) if moves == "lines" else [(kind, a, b, c)]
                    for pk, pa, pb, pc in parts:
                        add(pk, pa, pb, pc, pa[2], pb[2], feed, "helix")
        add_flat(plan["lead_in"], z, feed, "lead-in")
        zs = np.full((len(ck), 1), z)
        blocks.append((ck, np.hstack([cs[:, :2], zs]), np.hstack([ce[:, :2], zs]), cc, cf))
        roles.append(("contour", len(ck)))
        add_sloped(plan["overlap"], z, z, feed, "overlap")
        add_flat(plan["lead_out"], z, feed, "lead-out")
        last_xy = blocks[-1][2][-1, :2]
        z_last = z
    add(RAPID, last_xy, last_xy, origin, z_last, safe_height, 0.0, "retract")

    kind = np.concatenate([b[0] for b in blocks])
    start = np.vstack([b[1] for b in blocks])
    end = np.vstack([b[2] for b in blocks])
    center = np.vstack([b[3] for b in blocks])
    feed_arr = np.concatenate([b[4] for b in blocks])
    role_of = np.repeat(np.arange(len(roles)), [n for _, n in roles])
    # the check on the final moves: refuse rather than return a path that
    # cuts into the part anywhere below the stock top
    found = None
    if probe is not None:
        found = probe.measure(kind, start, end, center, stock_top=0.0)
        if not found.ok:
            i = int(found.move)
            role = roles[int(role_of[i])][0]
            x, y, zz = found.where
            k = 1.0 / MM_PER_INCH if units == "inch" else 1.0
            raise InputError(
                f"the {role} move {i} would cut {(r - found.min_clearance) * k:.4f} {units} into the part at "
                f"({x * k:.4f}, {y * k:.4f}, {zz * k:.4f}) (tool radius {r * k:g} {units}, tolerance "
                f"{tol * k:g} {units}); "
                f"try --lead none, a smaller --lead-length, another --seam or --entry, or a smaller tool"
            )
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
        "lead": plan["lead"],
        "lead_asked": lead,
        "lead_length": float(lead_len),
        "lead_in_length": float(plan["lead_in_length"]),
        "lead_out_length": float(plan["lead_out_length"]),
        "entry": plan["entry"],
        "entry_asked": entry,
        "entry_xy": (float(E0[0]), float(E0[1])),
        "ramp_angle": float(math.degrees(ramp_angle)),
        "helix_radius": float(plan["helix_radius"]),
        "helix_center": None if plan["helix_center"] is None or plan["entry"] != "helix" else
        (float(plan["helix_center"][0]), float(plan["helix_center"][1])),
        "retract_height": float(retract),
        "stock_top": 0.0,
        "overlap": float(plan["overlap_length"]),
        "clearance": None if found is None else {
            "min": float(found.min_clearance), "margin": float(found.margin),
            "tool_radius": float(r), "x": float(found.where[0]), "y": float(found.where[1]),
            "z": float(found.where[2]), "move": int(found.move),
            "role": roles[int(role_of[found.move])][0] if found.move >= 0 else None},
        "notes": list(plan["notes"]),
        # which moves follow the tool-center curve (the cut and the overlap):
        # a replay measures those for deviation; entries, leads and links it
        # checks for clearance only
        "along_curve": np.isin(role_of, [i for i, (role, _) in enumerate(roles)
                                         if role in ("contour", "overlap")]),
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
    return Toolpath(kind, start, end, center, feed_arr, **meta)
