"""The machinability check: tight spots, feed plan and cycle time.

:func:`check` turns a contour's curvature into what a machinist needs to
know before cutting: where the tool cannot cut the contour as drawn, where
the machine cannot hold the programmed feed and why, the smallest radii,
the largest tool that reaches everywhere, the highest constant feed the
machine holds, and the estimated cycle time.  The result is an immutable
:class:`CheckReport` with a JSON form (:meth:`CheckReport.to_dict`, fields
documented in ``docs/report.md``) and a text form
(:meth:`CheckReport.to_text`).

Units: mm, mm/min, mm/s², seconds inside; ``to_dict`` and ``to_text`` can
state lengths and feeds in inches.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .._options import CAUTION, MM_PER_INCH, UNITS, check_option
from .feed import FeedPlan, tool_cut, cut_sign, plan_from_limits, sampling_limits, speed_limits
from .machine import Cut, Machine, Tool

__all__ = ["check", "CheckReport", "TightSpot", "RadiusAt", "REASONS", "CAUTION", "REPORT_VERSION"]

#: Reason codes of tight spots and their plain words.
REASONS = {
    "reach": "tool cannot reach",
    "accel": "acceleration",
    "blocks": "block rate",
}

REPORT_VERSION = 1


# relative margin under which a limit counts as "below the programmed feed"
_BELOW = 1.0 - 1e-9


@dataclass(frozen=True)
class RadiusAt:
    """A radius (mm) and where it is: (x, y) mm and arc length s (mm) from the start."""

    radius: float
    x: float
    y: float
    s: float


@dataclass(frozen=True)
class TightSpot:
    """A stretch of the contour where the cut cannot go as programmed.

    Attributes
    ----------
    reason : "reach" (tool cannot reach), "accel" (acceleration) or
        "blocks" (block rate); :attr:`text` gives the plain words.
    x, y : the tightest point of the stretch, mm.
    s : its arc length from the start of the contour, mm.
    start_s, end_s : where the stretch begins and ends (arc length, mm);
        on a closed contour end_s < start_s when it runs over the seam.
    length : length of the stretch along the contour, mm (0 at a corner).
    min_radius : smallest contour radius in the stretch, mm (0 at a sharp
        corner).
    path_radius : radius of the tool-center path at the tightest point,
        mm (0 where the path has a sharp corner or a trimmed loop; inf on
        a straight stretch).
    allowed_feed : the highest feed the machine can hold there, mm/min
        (0: it must stop).
    material_left : "reach" only: depth of the uncut material, mm,
        measured on the geometry; None when the tool fits nowhere near.
    note : a short plain explanation.
    """

    reason: str
    x: float
    y: float
    s: float
    start_s: float
    end_s: float
    length: float
    min_radius: float
    path_radius: float
    allowed_feed: float
    material_left: float | None = None
    note: str = ""

    @property
    def text(self) -> str:
        """The reason in plain words."""
        return REASONS[self.reason]


@dataclass(frozen=True, eq=False)
class CheckReport:
    """What the check found.  Lengths mm, feeds mm/min, time s.

    Attributes
    ----------
    machine, tool, cut : the inputs.
    closed : whether the contour is closed.
    length : contour length, mm.
    path_length : tool-center path length, mm (trimmed loops left out).
    area : enclosed area, mm² (closed contours; None when open).
    orientation : "counter-clockwise" or "clockwise" (closed; None when open).
    min_radius : the smallest radius of either turn (RadiusAt) or None (straight).
    min_radius_left, min_radius_right : smallest radius of left
        (counter-clockwise) and right turns, or None.
    corners : sharp corners as RadiusAt-like tuples (x, y, s, turn in
        degrees, + left).
    inflections : (x, y, s) where the curvature changes sign.
    tight_spots : tuple of TightSpot, sorted by s then reason.
    largest_tool_diameter : largest tool diameter that reaches everywhere
        on the chosen side, mm (0: a sharp inside corner; None: any tool,
        or cutting on the line).
    max_constant_feed : the highest constant feed the machine can hold
        along the whole path, mm/min (the stops at sharp corners and where
        the tool cannot reach left aside).
    feed_plan : FeedPlan
    cycle_time, naive_time, full_feed_share : from the feed plan.
    tool_cannot_reach : True when some spot is out of the tool's reach.
    fit : how the contour was fitted, from ``contour.info`` (see
        :func:`fit_facts`): the points' noise and the smoothing; None when
        the contour carries no such facts.
    noise_spots : "tool cannot reach" spots of this contour that vanish
        when the points are smoothed to their noise (checked against
        ``noise_reference``): the noise's curvature, not the part's, so not
        machining problems and not in ``tight_spots``.
    """

    machine: Machine
    tool: Tool
    cut: Cut
    closed: bool
    length: float
    path_length: float
    area: float | None
    orientation: str | None
    min_radius: RadiusAt | None
    min_radius_left: RadiusAt | None
    min_radius_right: RadiusAt | None
    corners: tuple
    inflections: tuple
    tight_spots: tuple
    largest_tool_diameter: float | None
    max_constant_feed: float
    feed_plan: FeedPlan
    fit: dict | None = None
    noise_spots: tuple = ()
    kinks: tuple = ()

    @property
    def cycle_time(self) -> float:
        """Estimated time of the cut, s (one pass, rest to rest)."""
        return self.feed_plan.time

    @property
    def naive_time(self) -> float:
        """Tool-center length / programmed feed, s."""
        return self.feed_plan.naive_time

    @property
    def full_feed_share(self) -> float:
        """Share of the tool-center length cut at the programmed feed, 0..1."""
        return self.feed_plan.full_feed_share

    @property
    def tool_cannot_reach(self) -> bool:
        """True when the tool cannot cut some spot as drawn (the CLI exits 1)."""
        return any(spot.reason == "reach" for spot in self.tight_spots)

    def count(self, reason: str) -> int:
        """Number of tight spots with ``reason`` ("reach", "accel" or "blocks")."""
        check_option("reason", reason, tuple(REASONS))
        return sum(spot.reason == reason for spot in self.tight_spots)

    def to_dict(self, *, units: str = "mm") -> dict:
        """The report as plain JSON-ready data (fields in ``docs/report.md``).

        Non-finite numbers become None (JSON null).  ``units="inch"`` states
        lengths in inches, feeds in inches/min, areas in square inches.
        """
        return _to_dict(self, check_option("units", units, UNITS))

    def to_text(self, *, units: str = "mm") -> str:
        """A short summary, then one line per tight spot."""
        return _to_text(self, check_option("units", units, UNITS))


# -- the check -------------------------------------------------------------------


def _runs(mask: np.ndarray, closed: bool):
    """Index runs (i0, i1) inclusive of True in ``mask``; a run over the seam
    of a closed contour has i1 < i0."""
    n = len(mask)
    if not mask.any():
        return []
    if mask.all():
        return [(0, n - 1)]
    m = mask.astype(np.int8)
    diff = np.diff(np.r_[0, m, 0])
    starts = np.flatnonzero(diff == 1)
    ends = np.flatnonzero(diff == -1) - 1
    runs = list(zip(starts.tolist(), ends.tolist()))
    if closed and len(runs) > 1 and mask[0] and mask[-1]:
        first = runs.pop(0)
        last = runs.pop()
        runs.append((last[0], first[1]))
    return runs


def _edge(S, q, inside: int, outside: int) -> float:
    """Arc length where the margin q crosses zero between two samples."""
    qi, qo = q[inside], q[outside]
    si, so = S.s[inside], S.s[outside]
    if S.closed and abs(outside - inside) > 1:  # across the seam
        so = so + S.length if outside < inside else so - S.length
    if not (math.isfinite(qi) and math.isfinite(qo)) or qo == qi:
        return float(si)
    frac = qi / (qi - qo)
    frac = min(max(frac, 0.0), 1.0)
    return float(si + frac * (so - si))


def _span(S, q, i0: int, i1: int):
    """(start_s, end_s, length) of the run i0..i1 with margin q (< 0 inside)."""
    n = len(S.s)
    L = S.length
    if i0 == 0 and i1 == n - 1:
        return 0.0, float(S.s[-1]), float(S.s[-1])
    prev = i0 - 1 if i0 > 0 else (n - 1 if S.closed else None)
    nxt = i1 + 1 if i1 < n - 1 else (0 if S.closed else None)
    s0 = _edge(S, q, i0, prev) if prev is not None else float(S.s[i0])
    s1 = _edge(S, q, i1, nxt) if nxt is not None else float(S.s[i1])
    if S.closed:
        s0, s1 = s0 % L, s1 % L
        length = (s1 - s0) % L if i1 < i0 else s1 - s0
    else:
        length = s1 - s0
    return s0, s1, max(float(length), 0.0)


def _near_spans(s: np.ndarray, spans, margin: float, length: float, closed: bool) -> np.ndarray:
    """True where sorted arc lengths ``s`` lie within ``margin`` of a span."""
    lo = np.array([a for a, _ in spans]) - margin
    hi = np.array([b + (length if closed and b < a else 0.0) for a, b in spans]) + margin
    shifts = (-length, 0.0, length) if closed else (0.0,)
    count = np.zeros(len(s) + 1, np.int64)
    for shift in shifts:
        np.add.at(count, np.searchsorted(s, lo + shift, side="left"), 1)
        np.add.at(count, np.searchsorted(s, hi + shift, side="right"), -1)
    return np.cumsum(count[:-1]) > 0


def _run_indices(i0: int, i1: int, n: int) -> np.ndarray:
    return np.arange(i0, i1 + 1) if i1 >= i0 else np.r_[np.arange(i0, n), np.arange(0, i1 + 1)]


def check(contour, machine=None, tool=None, cut=None, *, noise_reference=None) -> CheckReport:
    """Check a contour for cutting with ``tool`` on ``machine``.

    Parameters
    ----------
    contour : Contour
        From :func:`pathgen.fit` or :func:`pathgen.fit_outline`; mm.
    machine, tool, cut : Machine, Tool, Cut or None
        None takes the defaults (``Machine()``, ``Tool()``, ``Cut()``).
        For a closed contour "outside" and "inside" refer to the part
        whichever way it runs; for an open one "outside" is the right of
        the direction of travel.
    noise_reference : Contour or None
        The same points smoothed to their noise, when ``contour`` fits
        noisy points exactly: a spot where the contour bends tighter than
        the tool but the reference does not (within the tool radius of
        the spot) is the noise's, and goes to ``noise_spots``.

    Returns
    -------
    CheckReport

    Notes
    -----
    Tight spots (each a run of samples; the sampling puts a sample on
    every local maximum of |κ|):

    * reach: d·κ ≥ 1 with d = side_sign·r, i.e. the contour bends toward
      the tool with radius R ≤ r; and sharp corners that turn toward the
      tool.  The material left is measured on the geometry
      (:func:`pathgen.checks.reach.material_left`).
    * accel: the programmed feed exceeds 60·√(a·R_c) on the tool-center
      path (radius R_c = |1 − dκ|/|κ|), or the path has a sharp corner.
    * blocks: the programmed feed exceeds 60·B·L with L = 2√(e(2R_c − e))
      the longest line within the chord tolerance e.

    Examples
    --------
    >>> import numpy as np
    >>> from pathgen import fit, Machine, Tool, Cut
    >>> th = np.linspace(0, 2 * np.pi, 200, endpoint=False)
    >>> hole = fit(np.c_[4 * np.cos(th), 4 * np.sin(th)], closed=True)
    >>> check(hole, Machine(), Tool(10), Cut(side="inside")).tool_cannot_reach
    True
    >>> check(hole, Machine(), Tool(6), Cut(side="inside")).tool_cannot_reach
    False
    """
    from .reach import inflections, largest_tool_diameter, material_left, place_inflections, radius_extremes
    from .sampling import sample_contour

    machine, tool, cut = tool_cut(machine, tool, cut)
    S, kinks = _smooth_kinks(sample_contour(contour, **sampling_limits(machine, tool, cut)))
    closed = S.closed
    area = orientation = None
    if closed:
        signed = float(contour.area)
        area = abs(signed)
        orientation = "counter-clockwise" if signed >= 0 else "clockwise"
    sign = cut_sign(contour, cut)
    lim = speed_limits(S, machine, tool, cut, sign=sign)
    plan = plan_from_limits(lim, machine, cut)
    r = tool.radius
    n = len(S)

    def at(i):
        s = float(S.s[i])
        if closed and s >= S.length:  # the seam: the start, not the end
            s = 0.0
        return float(S.xy[i, 0]), float(S.xy[i, 1]), s

    # -- geometry facts ---------------------------------------------------------
    xmin, ymin = S.xy.min(axis=0)
    xmax, ymax = S.xy.max(axis=0)
    size = float(np.hypot(xmax - xmin, ymax - ymin))
    left, right = radius_extremes(S)
    rl = RadiusAt(left[0], *at(left[1])) if left else None
    rr = RadiusAt(right[0], *at(right[1])) if right else None
    rmin = min((v for v in (rl, rr) if v is not None), key=lambda v: v.radius, default=None)
    firsts = np.flatnonzero(S.corner & (S.turn != 0))
    corners = tuple((*at(i), math.degrees(float(S.turn[i]))) for i in firsts)
    infl_s = place_inflections(contour, S, inflections(S, size, min_bow=_noise_bow(contour)))
    if infl_s.size:
        t_infl = np.interp(infl_s, S.s, S.t)
        p_infl = contour(t_infl)
        infl = tuple((float(p[0]), float(p[1]), float(s)) for p, s in zip(p_infl, infl_s))
    else:
        infl = ()
    largest = largest_tool_diameter(S, sign)

    # -- tight spots --------------------------------------------------------------
    concave_corner = lim.concave_corner
    reach_mask = lim.reach
    spots = []
    v_prog = lim.v_prog
    q_reach = np.where(reach_mask, np.minimum(lim.gap, 0.0), lim.gap)
    reach_runs = _runs(reach_mask, closed)
    reach_spans = []
    for i0, i1 in reach_runs:
        idx = _run_indices(i0, i1, n)
        has_corner = bool(concave_corner[idx].any())
        bends = bool((lim.gap[idx] <= 0).any())
        if has_corner:
            k = int(idx[np.argmax(concave_corner[idx])])
            radius = 0.0
        else:
            k = int(idx[np.argmax(sign * S.kappa[idx])])
            radius = float(1.0 / max(abs(S.kappa[k]), 1e-300))
        s0, s1, length = _span(S, q_reach, i0, i1)
        if has_corner and length == 0:
            s0 = s1 = float(S.s[k])
        reach_spans.append((s0, s1))
        if has_corner:
            note = "sharp corner toward the tool"
        elif bends:
            note = f"radius {radius:.4g} mm is not larger than the tool radius {r:.4g} mm"
        else:
            note = "the gap is narrower than the tool: the far side comes within the tool radius"
        spots.append(["reach", k, s0, s1, length, radius, 0.0, 60.0 * float(lim.v_limit[idx].min()), note])
    if reach_spans:
        depths = material_left(contour, S, sign * r, reach_spans)
        for spot, depth in zip(spots, depths):
            spot.append(depth)
    for reason, v in (("accel", lim.v_accel), ("blocks", lim.v_block)):
        q = v - v_prog
        mask = (v < v_prog * _BELOW) & ~reach_mask
        for i0, i1 in _runs(mask, closed):
            idx = _run_indices(i0, i1, n)
            k = int(idx[np.argmin(v[idx])])
            s0, s1, length = _span(S, q, i0, i1)
            at_corner = bool(S.corner[k])
            radius = 0.0 if at_corner else float(1.0 / max(abs(S.kappa[k]), 1e-300))
            if reason == "accel":
                note = ("sharp corner: the machine slows down or stops" if at_corner
                        else "centripetal acceleration v²/R would exceed the machine's limit")
            else:
                note = "lines within the chord tolerance are too short for the block rate"
            spots.append([reason, k, s0, s1, length, radius, float(lim.path_radius[k]),
                          60.0 * float(v[k]), note, None])
    tight = []
    for reason, k, s0, s1, length, radius, prad, feed, note, depth in spots:
        x, y, s = at(k)
        tight.append(TightSpot(reason, x, y, s, float(s0), float(s1), float(length), radius,
                               float(prad), feed, depth, note))
    order = {key: i for i, key in enumerate(REASONS)}
    tight.sort(key=lambda t: (t.s, order[t.reason], t.start_s))
    noise_spots = ()
    if noise_reference is not None and any(t.reason == "reach" for t in tight):
        tight, noise_spots = _split_noise(tight, noise_reference, sign, r, S.length, closed)

    # -- the highest constant feed ------------------------------------------------
    free = ~S.corner & (lim.gap > 0)
    if reach_spans:  # the tool-center path near a trimmed loop is cut away
        free &= ~_near_spans(S.s, reach_spans, r, S.length, closed)
    holdable = np.minimum(lim.v_accel, lim.v_block)[free]
    v_const = float(holdable.min()) if holdable.size else math.inf
    max_const = 60.0 * min(v_const, machine.max_feed / 60.0)

    return CheckReport(
        machine=machine,
        tool=tool,
        cut=cut,
        closed=closed,
        length=S.length,
        path_length=plan.length,
        area=area,
        orientation=orientation,
        min_radius=rmin,
        min_radius_left=rl,
        min_radius_right=rr,
        corners=corners,
        inflections=infl,
        tight_spots=tuple(tight),
        largest_tool_diameter=largest,
        max_constant_feed=max_const,
        feed_plan=plan,
        fit=fit_facts(contour),
        noise_spots=tuple(noise_spots),
        kinks=tuple((*at(i), math.degrees(a)) for i, a in kinks),
    )


def _split_noise(tight, reference, sign, r, length, closed):
    """Move the reach spots that do not survive the smoothing to a second list.

    A spot whose note says the contour bends tighter than the tool survives
    when the reference bends toward the tool with radius ≤ r somewhere
    within r of the spot (arc lengths matched by the length ratio).  Sharp
    corners and narrow gaps are geometry, never noise.
    """
    b = np.asarray(reference.breaks)
    per = max(1, min(8, 400_000 // max(len(b) - 1, 1)))
    u = (b[:-1, None] + np.diff(b)[:, None] * (np.arange(per) / per)).ravel()
    s_ref = reference.arc_length(u) * (length / float(reference.length))
    bend = sign * reference.curvature(u) * r >= 1.0 - 1e-9
    keep, noise = [], []
    for t in tight:
        if t.reason != "reach" or not t.note.startswith("radius"):
            keep.append(t)
            continue
        lo, hi = t.start_s - r, t.end_s + r
        if closed and t.end_s < t.start_s:
            hi += length
        near = (s_ref >= lo) & (s_ref <= hi)
        if closed:
            near |= (s_ref + length >= lo) & (s_ref + length <= hi)
            near |= (s_ref - length >= lo) & (s_ref - length <= hi)
        (keep if bool((bend & near).any()) else noise).append(t)
    return keep, noise


def _noise_bow(contour) -> float:
    """Twice the points' noise (mm): wiggles that bow less are not inflections."""
    info = getattr(contour, "info", None) or {}
    sigma = info.get("sigma")
    est = info.get("noise")
    if sigma is None and est is not None and est.resolved:
        sigma = est.sigma_used
    return 2.0 * float(sigma) if sigma else 0.0


#: Corners turning less than this (radians) are taken as smooth joins by the
#: checks: a tool of radius r leaves at most r(1/cos(θ/2) − 1) ≈ r·θ²/8 of
#: material in such a corner toward it (6e-6 mm for r = 50 mm; handbook
#: geometry of a circle tangent to two lines), and the feed changes
#: direction by θ·v there (0.17 mm/s at 10 m/min), so neither the reach nor
#: the feed is limited.  Drawings whose bulges are written with four digits
#: kink by about 2e-5 rad where their lines and arcs meet.
KINK_NEGLIGIBLE = 1e-3


def _smooth_kinks(S):
    """The samples with corners that turn less than KINK_NEGLIGIBLE taken as
    smooth; returns (samples, [(index, turn radians), ...] of those kinks)."""
    first = np.flatnonzero(S.corner & (S.turn != 0) & (np.abs(S.turn) < KINK_NEGLIGIBLE))
    if first.size == 0:
        return S, []
    corner, turn = S.corner.copy(), S.turn.copy()
    corner[first] = False
    corner[(first + 1) % len(S) if S.closed else np.minimum(first + 1, len(S) - 1)] = False
    turn[first] = 0.0
    import dataclasses

    return (dataclasses.replace(S, corner=corner, turn=turn),
            [(int(i), float(S.turn[i])) for i in first])


def count(n: int, noun: str) -> str:
    """'1 tight spot', '2 tight spots'."""
    return f"{n} {noun}{'' if n == 1 else 's'}"


def fit_facts(contour) -> dict | None:
    """How the contour was fitted, as plain numbers (mm): "smoothing" ("off",
    "tolerance", "noise", or "none" when auto found the points clean),
    "points", "spacing_median", "spacing_min", "quantization", "sigma"
    (measured noise), "noise_resolved", "fake_radius" (the smallest radius
    the noise can fake in an exact fit), "sigma_used" (aimed at when
    smoothing to the noise), "max_residual", "rms_residual" (distances
    from the points to the contour), "dof", "dof_error" (degrees of freedom
    kept, estimated).  None when ``contour.info`` has no smoothing facts."""
    info = getattr(contour, "info", None) or {}
    if "smoothing" not in info:
        return None
    out = {"smoothing": info["smoothing"], "tolerance": info.get("smooth"),
           "max_residual": info.get("max_residual"), "rms_residual": info.get("rms_residual"),
           "sigma_used": info.get("sigma"), "dof": info.get("dof"), "dof_error": info.get("dof_error"),
           "chord_span": info.get("chord_span"), "curvature_noise_share": info.get("curvature_noise_share")}
    if "recognised" in info:
        rec = info["recognised"]
        out["recognised"] = {"lines": rec["lines"], "arcs": rec["arcs"], "free": rec["free"],
                             "radii": list(rec["radii"]), "bound": rec["bound"], "text": rec["text"]}
    est = info.get("noise")
    if est is not None:
        out.update(points=est.points, spacing_median=est.spacing_median,
                   spacing_min=est.spacing_min, quantization=est.quantization, sigma=est.sigma,
                   noise_resolved=est.resolved, fake_radius=est.fake_radius,
                   noise_fakes=bool(est.smooth))
    return out


# -- JSON and text -------------------------------------------------------------


def _num(value, scale: float = 1.0):
    """A JSON number: finite floats rounded to 10 significant digits, else None."""
    if value is None:
        return None
    v = float(value) * scale
    if not math.isfinite(v):
        return None
    v = float(f"{round(v, 9):.10g}")
    return 0.0 if v == 0 else v


def _radius_dict(r: RadiusAt | None, k: float):
    if r is None:
        return None
    return {"radius": _num(r.radius, k), "x": _num(r.x, k), "y": _num(r.y, k), "s": _num(r.s, k)}


def _to_dict(rep: CheckReport, units: str) -> dict:
    k = 1.0 / MM_PER_INCH if units == "inch" else 1.0
    u = "in" if units == "inch" else "mm"
    m, tool, cut = rep.machine, rep.tool, rep.cut
    return {
        "report": "pathgen check",
        "version": REPORT_VERSION,
        "units": {"length": u, "feed": f"{u}/min", "acceleration": f"{u}/s^2",
                  "area": f"{u}^2", "time": "s", "angle": "degree"},
        "machine": {"name": m.name, "max_feed": _num(m.max_feed, k),
                    "max_accel": _num(m.max_accel, k), "block_rate": _num(m.block_rate),
                    "rapid_feed": _num(m.rapid_feed, k)},
        "tool": {"diameter": _num(tool.diameter, k)},
        "cut": {"feed": _num(cut.feed, k), "side": cut.side, "tolerance": _num(cut.tolerance, k)},
        "closed": rep.closed,
        "length": _num(rep.length, k),
        "path_length": _num(rep.path_length, k),
        "area": _num(rep.area, k * k),
        "orientation": rep.orientation,
        "min_radius": _radius_dict(rep.min_radius, k),
        "min_radius_left": _radius_dict(rep.min_radius_left, k),
        "min_radius_right": _radius_dict(rep.min_radius_right, k),
        "corners": [{"x": _num(x, k), "y": _num(y, k), "s": _num(s, k), "turn": _num(a)}
                    for x, y, s, a in rep.corners],
        "kinks": [{"x": _num(x, k), "y": _num(y, k), "s": _num(s, k), "turn": _num(a)}
                  for x, y, s, a in rep.kinks],
        "inflections": [{"x": _num(x, k), "y": _num(y, k), "s": _num(s, k)}
                        for x, y, s in rep.inflections],
        "largest_tool_diameter": _num(rep.largest_tool_diameter, k),
        "max_constant_feed": _num(rep.max_constant_feed, k),
        "cycle_time": _num(rep.cycle_time),
        "naive_time": _num(rep.naive_time),
        "full_feed_share": _num(rep.full_feed_share),
        "tool_cannot_reach": rep.tool_cannot_reach,
        "fit": _fit_dict(rep.fit, k),
        "noise_spots": [{"x": _num(t.x, k), "y": _num(t.y, k), "s": _num(t.s, k),
                         "min_radius": _num(t.min_radius, k)} for t in rep.noise_spots],
        "tight_spots": [
            {"reason": t.reason, "text": t.text, "x": _num(t.x, k), "y": _num(t.y, k),
             "s": _num(t.s, k), "start_s": _num(t.start_s, k), "end_s": _num(t.end_s, k),
             "length": _num(t.length, k), "min_radius": _num(t.min_radius, k),
             "path_radius": _num(t.path_radius, k),
             # no feed where the tool cannot reach: it cannot cut there at all
             "allowed_feed": None if t.reason == "reach" else _num(t.allowed_feed, k),
             "material_left": _num(t.material_left, k), "note": t.note}
            for t in rep.tight_spots
        ],
    }


_FIT_LENGTHS = ("tolerance", "max_residual", "rms_residual", "sigma_used", "spacing_median",
                "spacing_min", "quantization", "sigma", "fake_radius")


def _fit_dict(fit, k):
    if fit is None:
        return None
    out = {}
    for key, v in sorted(fit.items()):
        if key in _FIT_LENGTHS:
            out[key] = _num(v, k)
        elif key == "recognised":  # lines and arcs found in the points: radii and bound are lengths
            out[key] = {**v, "radii": [_num(r, k) for r in v["radii"]], "bound": _num(v["bound"], k)}
        elif isinstance(v, float):
            out[key] = _num(v)
        else:
            out[key] = v
    return out


def _fit_lines(fit, k, u) -> list:
    """The summary's first lines: how the contour was fitted and the noise."""
    if fit is None:
        return []
    mode = fit["smoothing"]
    lines = []
    within = (f"every point within {_g(fit['max_residual'], k)} {u} of the contour "
              f"(RMS {_g(fit['rms_residual'], k)} {u})")
    fakes = fit.get("noise_fakes", False)
    if mode == "noise":
        dof = ""
        if fit.get("dof") is not None:
            dof = f", about {fit['dof']:.0f} ± {max(fit['dof_error'], 1.0):.0f} degrees of freedom kept"
        lines.append(f"fit: smoothed to the points' noise (σ {_g(fit['sigma_used'], k)} {u} aimed at): "
                     f"{within}{dof}; exact interpolation: --smooth off")
        further = []
        if fit.get("chord_span"):
            further.append(f"the parameter from chords {fit['chord_span']} points long (the noise is not small "
                           "against the spacing)")
        if fit.get("curvature_noise_share") is not None:
            further.append(f"smoothed beyond the noise until the curvature the noise leaves is "
                           f"{100 * fit['curvature_noise_share']:.1f} % of the largest")
        if further:
            lines.append("fit: dense noisy points: " + "; ".join(further))
    elif mode == "tolerance":
        lines.append(f"fit: smoothed within {_g(fit['tolerance'], k)} {u} (--smooth): {within}")
    elif mode == "none":
        lines.append("fit: exact interpolation (the points are clean: their noise cannot fake "
                     "the curvature)")
    elif mode == "recognised":
        rec = fit.get("recognised") or {}
        free = rec.get("free", 0)
        from ..primitives import describe_counts

        text = describe_counts(rec.get("lines", 0), rec.get("radii", []), scale=1.0 / k,
                               decimals=3 if u == "mm" else 4)
        lines.append(f"fit: lines and arcs recognised in the points ({text}"
                     + (f"; {free} free-form stretch{'es' if free != 1 else ''} fitted with splines" if free else "")
                     + f"): {within}, bound {_g(rec.get('bound', 0.0), k)} {u} (the points' rounding); "
                     "spline only: --find-arcs off")
    else:
        warn = ""
        if fakes:
            warn = (f"; CAUTION: in an exact fit the points' noise fakes radii of about "
                    f"{_g(fit['fake_radius'], k)} {u} (4σ/h²) and smaller: such radii may be noise "
                    "(--smooth auto smooths to it)")
        lines.append(f"fit: exact interpolation (--smooth off){warn}")
    if "points" in fit:
        q = fit.get("quantization")
        qtext = f"rounding step {_g(q, k)} {u}" if q is not None else "no rounding step (full precision)"
        if fit.get("noise_resolved"):
            noise = f"noise σ {_g(fit['sigma'], k)} {u}"
            fake = (f"; at this spacing an exact fit turns it into radii of about "
                    f"{_g(fit['fake_radius'], k)} {u} (4σ/h²)")
        elif fit.get("sigma"):
            noise = f"noise below what the spacing resolves (σ under {_g(fit['sigma'], k)} {u})"
            fake = ""
        else:
            noise, fake = "no noise measurable", ""
        lines.append(f"points: {fit['points']}, spacing {_g(fit['spacing_median'], k)} {u} median, "
                     f"{_g(fit['spacing_min'], k)} {u} smallest; {noise}; {qtext}{fake}")
    return lines


def _g(value, k: float = 1.0, digits: int = 4) -> str:
    if value is None:
        return "-"
    v = float(value) * k
    if not math.isfinite(v):
        return "inf"
    if abs(v) >= 1e12:  # a radius of a straight stretch, say: no 300-digit numbers
        return "straight" if v > 0 else "-straight"
    if abs(v) < 5e-7:
        return "0"
    text = f"{v:.{digits}g}"
    if "e" in text:  # plain notation for people too
        text = f"{v:.0f}" if abs(v) >= 1 else f"{v:.6f}".rstrip("0")
    return text


def _feed_text(t, k: float) -> str:
    """The feed column: "cannot cut" where the tool cannot reach (not a feed of 0)."""
    return "cannot cut" if t.reason == "reach" else _g(t.allowed_feed, k)


def _to_text(rep: CheckReport, units: str) -> str:
    k = 1.0 / MM_PER_INCH if units == "inch" else 1.0
    u = "in" if units == "inch" else "mm"
    m, tool, cut = rep.machine, rep.tool, rep.cut
    lines = _fit_lines(rep.fit, k, u)
    shape = "closed" if rep.closed else "open"
    head = f"{shape} contour, length {_g(rep.length, k, 6)} {u}"
    if rep.closed:
        head += f", area {_g(rep.area, k * k, 6)} {u}², {rep.orientation}"
    lines.append(head)
    lines.append(
        f"tool {_g(tool.diameter, k)} {u} cutting {cut.side}, feed {_g(cut.feed, k)} {u}/min, "
        f"chord tolerance {_g(cut.tolerance, k)} {u}; machine '{m.name}': max feed "
        f"{_g(m.max_feed, k)} {u}/min, accel {_g(m.max_accel, k)} {u}/s², "
        f"{_g(m.block_rate)} blocks/s"
    )
    parts = []
    for label, r in (("left turns", rep.min_radius_left), ("right turns", rep.min_radius_right)):
        if r is not None:
            parts.append(f"{_g(r.radius, k)} {u} on {label} at ({_g(r.x, k, 6)}, {_g(r.y, k, 6)})")
    lines.append("smallest radius: " + ("; ".join(parts) if parts else "none (straight)"))
    lines.append(f"{count(len(rep.corners), 'sharp corner')}, {count(len(rep.inflections), 'inflection')}")
    if rep.kinks:
        worst = max(abs(a) for *_, a in rep.kinks)
        lines.append(f"  {len(rep.kinks)} more joins kink by at most {_g(worst, 1.0)}° (under "
                     f"{math.degrees(KINK_NEGLIGIBLE):.3g}°, e.g. bulges written with few digits): taken as "
                     "smooth, a tool of radius r leaves at most r·θ²/8 there")
    if rep.largest_tool_diameter is None:
        big = "any (nothing bends toward the tool)" if cut.side != "on" else "- (cutting on the line)"
    else:
        big = f"{_g(rep.largest_tool_diameter, k)} {u}"
    lines.append(f"largest tool that reaches everywhere: {big}")
    lines.append(f"highest constant feed the machine holds: {_g(rep.max_constant_feed, k)} {u}/min")
    lines.append(
        f"cycle time {rep.cycle_time:.2f} s (at the programmed feed throughout: "
        f"{rep.naive_time:.2f} s); programmed feed held on {100 * rep.full_feed_share:.1f} % "
        f"of the path"
    )
    counts = ", ".join(f"{rep.count(r)} {REASONS[r]}" for r in REASONS)
    lines.append(f"{count(len(rep.tight_spots), 'tight spot')} ({counts})")
    if rep.noise_spots:
        lines.append(f"  {len(rep.noise_spots)} more spots bend tighter than the tool only in this exact "
                     "fit of noisy points: they vanish when the points are smoothed to their noise "
                     "(the noise's curvature, not the part's; not listed)")
    if rep.tight_spots:
        lines.append(
            f"  {'reason':<18} {'x':>10} {'y':>10} {'s':>10} {'length':>9} {'radius':>9} "
            f"{'feed':>10} {'material':>9}"
        )
        for t in rep.tight_spots:
            lines.append(
                f"  {t.text:<18} {_g(t.x, k, 6):>10} {_g(t.y, k, 6):>10} {_g(t.s, k, 6):>10} "
                f"{_g(t.length, k):>9} {_g(t.min_radius, k):>9} {_feed_text(t, k):>10} "
                f"{_g(t.material_left, k):>9}"
            )
        lines.append(f"  (lengths and radii in {u}, feed in {u}/min)")
    if rep.tool_cannot_reach:
        lines.append(
            "THE TOOL CANNOT CUT THIS CONTOUR AS DRAWN: material is left at the spots "
            "marked 'tool cannot reach'; use a smaller tool or change the part."
        )
    lines.append(CAUTION)
    return "\n".join(lines) + "\n"

