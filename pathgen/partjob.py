"""The whole job on a part of several outlines: read → nest → per outline
fit, check and toolpath → one program, one report, one drawing, one picture.

:func:`run_part` calls the same stages as :func:`pathgen.pipeline.run` for
each outline; :func:`pathgen.pipeline.run` hands a part file (a drawing, or
a text file of several outlines) to it.  See :mod:`pathgen.part` for the
reading, nesting and order rules.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ._options import CAUTION, MM_PER_INCH, SIDES, check_option
from .errors import InputError
from .job import JobResult

__all__ = ["run_part", "PartResult", "PartReport"]


@dataclass(frozen=True, eq=False)
class PartReport:
    """The checks of every outline, in cutting order, and the part's totals."""

    rows: tuple  # dicts: number, where, layer, level, side, order, report, drawn
    rapid_length: float = 0.0  # mm
    program_time: float | None = None  # s
    steps: tuple = ()  # what reading did, plain sentences
    program: dict | None = None  # what the replay of the written program measured (mm), per outline

    @property
    def reports(self):
        return [r["report"] for r in self.rows]

    @property
    def tight_spots(self) -> tuple:
        return tuple(s for r in self.reports for s in r.tight_spots)

    @property
    def tool_cannot_reach(self) -> bool:
        return any(r.tool_cannot_reach for r in self.reports)

    @property
    def cycle_time(self) -> float:
        return float(sum(r.cycle_time for r in self.reports))

    @property
    def largest_tool_diameter(self):
        vals = [r.largest_tool_diameter for r in self.reports if r.largest_tool_diameter is not None]
        return min(vals) if vals else None

    def to_dict(self, *, units: str = "mm") -> dict:
        k = MM_PER_INCH if units == "inch" else 1.0
        big = self.largest_tool_diameter
        out = {
            "units": units,
            "outlines": [],
            "outline_count": len(self.rows),
            "rapid_length": self.rapid_length / k,
            "largest_tool_diameter": None if big is None or not math.isfinite(big) else big / k,
            "tool_cannot_reach": self.tool_cannot_reach,
            "program_time": self.program_time,
            "steps": list(self.steps),
        }
        for r in sorted(self.rows, key=lambda r: r["order"]):
            row = {key: r[key] for key in ("number", "where", "layer", "level", "side", "order")}
            row["kind"] = "outer" if r["level"] % 2 == 0 else "hole"
            if r["drawn"]:
                row["drawn"] = dict(r["drawn"])
            row["tabs"] = [{"x": t["x"] / k, "y": t["y"] / k, "s": t["s"] / k, "width": t["width"] / k,
                            "height": t["height"] / k} for t in r.get("tabs", [])]
            row["check"] = r["report"].to_dict(units=units)
            if self.program:
                from .verify.part import part_program_dict

                row["program"] = part_program_dict(self.program, units).get(r["number"])
            out["outlines"].append(row)
        return out

    def to_text(self, *, units: str = "mm") -> str:
        k = MM_PER_INCH if units == "inch" else 1.0
        u = units
        lines = [f"input: {s}" for s in self.steps]
        lines.append(f"Part of {len(self.rows)} outline{'s' if len(self.rows) != 1 else ''}, cut in this order "
                     "(holes and inner features first):")
        from .checks.report import count

        for r in sorted(self.rows, key=lambda r: r["order"]):
            rep = r["report"]
            rmin = rep.min_radius
            rtxt = "straight" if rmin is None else f"{rmin.radius / k:.4f} {u}"
            big = rep.largest_tool_diameter
            btxt = "any" if big is None or not math.isfinite(big) else f"{big / k:.4f} {u}"
            lines.append(f"  {r['order']}. outline {r['number']} ({r['where']}): level {r['level']}, "
                         f"cut {r['side']}; length {rep.length / k:.4f} {u}, smallest radius {rtxt}, "
                         f"{count(len(rep.corners), 'sharp corner')}, {count(len(rep.tight_spots), 'tight spot')}, "
                         f"largest tool {btxt}")
            for t in r.get("tabs", []):
                lines.append(f"     tab {t['width'] / k:.4g} {u} wide, {t['height'] / k:.4g} {u} high, tool "
                             f"center at ({t['x'] / k:.4f}, {t['y'] / k:.4f}) {u}")
        big = self.largest_tool_diameter
        lines.append(f"largest tool for the part: "
                     f"{'any' if big is None or not math.isfinite(big) else f'{big / k:.4f} {u}'}")
        lines.append(f"rapid travel between outlines: {self.rapid_length / k:.4f} {u}")
        for r in sorted(self.rows, key=lambda r: r["order"]):
            lines.append("")
            lines.append(f"outline {r['number']} ({r['side']}):")
            # each outline's report without its caution: the part's text says it once, at the end
            body = [ln for ln in r["report"].to_text(units=units).rstrip("\n").splitlines() if ln != CAUTION]
            if self.program:
                from .verify.part import part_header_lines

                said = [ln for ln in part_header_lines(self.program, units)
                        if ln.startswith((f"outline {r['number']}:", f"outline {r['number']} budget:"))]
                body += ["program as written: " + ln.split(" ", 2)[2].lstrip(": ") + "." for ln in said]
            lines.extend("  " + ln for ln in body)
        lines.append(CAUTION)
        return "\n".join(lines) + "\n"


@dataclass(frozen=True, eq=False)
class PartResult(JobResult):
    """What :func:`run_part` made; the fields :class:`pathgen.pipeline.Result`
    has (``report`` is a :class:`PartReport`, ``toolpath`` the joined
    program) plus the part's outlines, levels, sides, order, contours,
    reports and per-outline toolpaths (in input order).  Lengths are mm,
    the toolpaths' too, whatever ``units`` (the job's units, which the
    written files speak)."""

    source: str
    outlines: tuple
    levels: tuple
    sides: tuple
    order: tuple
    contours: tuple
    reports: tuple
    toolpaths: tuple
    report: PartReport
    specs: tuple = ()  # what each outline expects of a program (pathgen.verify.part.PartOutlineSpec)
    material: object = None  # the part's material (shapely, mm) when a toolpath was made
    tool_radius: float = 0.0  # mm

    @property
    def outline(self):
        return self.outlines


def _sides(outlines, levels, sides) -> list[str]:
    """Side per outline: from nesting, unless ``sides`` maps an outline
    number or a layer name to a side."""
    out = []
    given = dict(sides or {})
    numbers = {o.number for o in outlines}
    layers = {o.layer for o in outlines}
    for key, v in given.items():
        check_option(f"side of {key}", v, SIDES)
        num = int(key) if isinstance(key, int) or (isinstance(key, str) and key.isdigit()) else None
        if num not in numbers and key not in layers:
            raise InputError(f"sides: no outline numbered or on layer {key!r} (outlines 1-{len(outlines)}; "
                             f"layers {', '.join(repr(x) for x in sorted(layers) if x)})")
    for o, lev in zip(outlines, levels):
        s = given.get(o.number, given.get(str(o.number), given.get(o.layer)))
        out.append(s if s is not None else ("outside" if lev % 2 == 0 else "inside"))
    return out


def _material(outlines, contours, levels=None, sides=None):
    """The part's material (shapely, mm): outlines by the even-odd rule
    (an outer outline's inside, less its holes, plus their islands); drawn
    outlines within 1e-4 mm of the drawing, fitted ones 16 samples a piece.

    With ``levels`` and ``sides``: the region just inside an outline (less
    the outlines directly inside it) is material when that outline is cut
    outside, and not when it is cut inside, whatever its level; when every
    outer outline is cut inside (a pocket drawn on its own), the stock around
    them is material too (a margin of the drawing's size)."""
    import numpy as np
    import shapely

    polys = []
    for o, c in zip(outlines, contours):
        if o.shape is not None:
            p = shapely.Polygon(o.polygon_points(1e-4))
        else:
            b = c.breaks
            t = (b[:-1, None] + np.diff(b)[:, None] * (np.arange(16) / 16)).ravel()
            p = shapely.Polygon(c(t))
        polys.append(p)
    parity = [("outside" if lev % 2 == 0 else "inside") for lev in (levels or [0] * len(polys))]
    if sides is None or list(sides) == parity or levels is None:
        m = None
        for p in polys:
            m = p if m is None else m.symmetric_difference(p)
        return m
    faces = []
    for i, p in enumerate(polys):
        inner = [polys[j] for j in range(len(polys))
                 if levels[j] == levels[i] + 1 and p.contains(polys[j])]
        face = p.difference(shapely.union_all(inner)) if inner else p
        side = sides[i] if sides[i] != "on" else parity[i]
        if side == "outside":
            faces.append(face)
    outer = [i for i in range(len(polys)) if levels[i] == 0]
    if all((sides[i] if sides[i] != "on" else parity[i]) == "inside" for i in outer):
        x0, y0, x1, y1 = shapely.union_all([polys[i] for i in outer]).bounds
        grow = max(x1 - x0, y1 - y0)
        stock = shapely.box(x0 - grow, y0 - grow, x1 + grow, y1 + grow)
        faces.append(stock.difference(shapely.union_all([polys[i] for i in outer])))
    return shapely.union_all(faces) if faces else shapely.Polygon()


def _clear_leads(tp, contour, tool, cut, mach, kw, material, tol, outline, notes):
    """The toolpath, with its leads shortened (halved, then none) while its
    tool disc would enter the part's material by more than the tolerance
    (a long lead-in in a narrow slot crosses to the far side); measured on
    the exact geometry (mm).  Raises when even without leads it would."""
    from .path.build import make_toolpath
    from .path.join import intrusion

    depth, at = intrusion(tp, material)
    if depth <= tol + 1e-9:
        return tp
    first = (depth, at)
    length = tp.info["lead_length"]
    tries = [dict(kw, lead_length=length / 2 ** k) for k in (1, 2, 3)] + [dict(kw, lead="none")]
    for k2 in tries:
        if kw.get("lead") == "none" and k2.get("lead") != "none":
            continue
        tp = make_toolpath(contour, tool, cut, mach, **k2)
        depth, at = intrusion(tp, material)
        if depth <= tol + 1e-9:
            what = "no lead" if k2.get("lead") == "none" else f"a {k2['lead_length']:.4g} mm lead"
            notes.append(f"outline {outline.number} ({outline.where}): the {length:.4g} mm lead would cut "
                         f"{first[0]:.4g} mm into the part near ({first[1][0]:.4f}, {first[1][1]:.4f}) mm; "
                         f"cut with {what} instead")
            return tp
    raise InputError(f"the tool would cut {depth:.4g} mm into the part near ({at[0]:.4f}, {at[1]:.4f}) mm "
                     f"(more than the tolerance {tol:g} mm), even without leads; use a smaller tool")


def _outline_budget(contour, tol_mm: float, units: str) -> dict:
    """The tolerance budget of one outline (mm): decimals from the tolerance,
    the points → contour part (a drawn outline: its measured distance from
    the drawing; points: the fit's residual, stated apart when smoothed)."""
    from .verify.replay import budget, decimals_for

    info = getattr(contour, "info", {}) or {}
    drawn = info.get("drawn")
    if drawn:
        residual = (max(float(drawn.get("arc_distance", 0.0)), float(drawn.get("curve_distance", 0.0))), 0.0)
        smoothed = False
    else:
        residual = (float(info.get("max_residual", 0.0)), float(info.get("rms_residual", 0.0)))
        smoothed = info.get("smoothing") in ("tolerance", "noise")
    plan = budget(tol_mm, decimals=decimals_for(tol_mm, units), units=units, residual=residual, smoothed=smoothed)
    if plan["approximation_target"] <= 0.5 * tol_mm:
        raise InputError(f"tolerance {tol_mm:g} mm is too small to write: rounding to {plan['decimals']} decimals "
                         f"and the outline's distance from its input take more than half of it")
    return plan


def _replay_part(material, tool_mm: float, tol_mm: float, specs=(), plans=(), out=None, units: str = "mm"):
    """The check run on a part program's text before it is put in place:
    read back under the word and arc rules (pathgen.verify.reader); every
    flat move below the stock top swept against the part's material
    (pathgen.path.join.intrusion); and, outline by outline, the two-sided
    deviation from its tool-center curve, its clearance, its tabs read back
    and the cutting order (pathgen.verify.part.replay_part).  The figures go
    into ``out``; any failure raises InternalCheckError (nothing is written)."""
    from .errors import InternalCheckError
    from .verify.part import deepest_intrusion, replay_part
    from .verify.reader import read_gcode

    def check(text):
        try:
            prog = read_gcode(text, source="<program>", strict=True)
        except InputError as exc:
            raise InternalCheckError(f"internal check failed: the part program does not read back: {exc}") from None
        worst, where, line, moves = deepest_intrusion(prog, material, 0.5 * float(tool_mm or 0.0))
        if worst > tol_mm:
            raise InternalCheckError(
                f"internal check failed: the written part program cuts {worst:.6g} mm into the part near "
                f"({where[0]:.4f}, {where[1]:.4f}) mm at line {line} (tolerance {tol_mm:g} mm); nothing was written")
        k = MM_PER_INCH if units == "inch" else 1.0  # the header speaks the program's units
        # positional, never exponent notation in a program (a part cut exactly reads 7.7e-05)
        deepest = np.format_float_positional(round(max(worst, 0.0) / k, 9) + 0.0, precision=6, unique=False,
                                             fractional=False, trim="-")
        lines = [f"replayed from this text: {moves} cutting blocks below the stock top read back, none enters "
                 f"the part by more than the tolerance (deepest {deepest} {units})"]
        if not specs:
            return lines
        facts = replay_part(prog, list(specs), tool_radius=0.5 * float(tool_mm or 0.0), tolerance=tol_mm)
        bad = []
        for row, plan in zip(facts["outlines"], plans):
            n = row["number"]
            if row["missing"]:
                bad.append(f"outline {n}: no cutting moves follow it")
                continue
            plan = dict(plan)
            plan["total"] = plan["points"] + plan["approximation"] + plan["rounding"]
            row["budget"] = plan
            if not row["within_tolerance"]:
                w = row["deviation_worst_line"]
                bad.append(f"outline {n}: strays {row['deviation']:.6g} mm from its tool-center curve (moves to "
                           f"curve {row['deviation_moves_to_curve']:.6g}, curve to moves "
                           f"{row['deviation_curve_to_moves']:.6g}" + (f", worst at line {w}" if w else "") + ")")
            if row["gouges"]:
                g = max(row["gouges"], key=lambda x: x["depth"])
                bad.append(f"outline {n}: cuts {g['depth']:.6g} mm into the part at line {g['line']}")
            if row["tabs"] is not None and not row["tabs"]["ok"]:
                t = row["tabs"]
                bad.append(f"outline {n}: {t['count']} tab(s) read back cut to {t['cut_depth']} mm, expected "
                           f"{t['expected_count']} cut to {t['expected_cut_depth']:.6g} mm")
        if facts["stray_runs"]:
            bad.append(f"cutting moves at line(s) {', '.join(map(str, facts['stray_runs']))} follow no outline")
        bad += facts["order"]
        if bad:
            raise InternalCheckError("internal check failed: the written part program, read back: "
                                     + "; ".join(bad) + f" (chord tolerance {tol_mm:g} mm); nothing was written")
        from .verify.part import part_header_lines, shift_lines

        said = lines + part_header_lines(facts, units)
        if out is not None:  # the figures name the lines of the file, which has these lines more in its header
            out.update(shift_lines(facts, len(said)))
        return said

    return check


def _tab_options(tabs, spacing, width, height, scale, tool_mm, depth):
    """Tab options in mm, checked; None when no tabs are asked for.

    ``spacing``, ``width``, ``height`` and ``depth`` are mm (checked by
    :class:`pathgen.job.JobOptions`); ``scale`` (mm per user unit) is for
    the messages."""
    if tabs is None and spacing is None:
        if width is not None or height is not None:
            raise InputError("tab width and height need tabs= (--tabs N) or tab_spacing= (--tab-spacing L)")
        return None
    if tabs is not None and spacing is not None:
        raise InputError("give tabs= (--tabs N) or tab_spacing= (--tab-spacing L), not both")
    if tabs is not None and (isinstance(tabs, bool) or not isinstance(tabs, int) or tabs < 1 or tabs > 100):
        raise InputError(f"tabs must be a whole number from 1 to 100, got {tabs!r}")
    if depth is None:
        raise InputError("tabs hold a part cut through: give the depth (depth=, --depth)")
    d = depth
    tool = tool_mm or 0.0
    w = max(3.0, tool) if width is None else width
    h = min(1.0, 0.5 * d) if height is None else height
    if h >= d:
        raise InputError(f"tab height {h / scale:g} must be below the depth {d / scale:g}")
    sp = spacing
    return {"count": tabs, "spacing": sp, "width": w, "height": h}


def _with_tabs(tp, outline, contour, rep, opts, units):
    """One outline's toolpath with tabs (see :mod:`pathgen.path.tabs`); mm
    in and out, ``units`` only words the messages."""
    import numpy as np
    from scipy.spatial import cKDTree

    from .path.tabs import add_tabs, place_tabs

    b = contour.breaks
    per = np.maximum(1, np.ceil(np.diff(contour.arc_length(b)) / 0.02)).astype(int)  # samples 0.02 mm apart
    t = np.concatenate([b[i] + (b[i + 1] - b[i]) * np.arange(n) / n for i, n in enumerate(per)])
    tree = cKDTree(contour(t))

    def edge_distance(p):
        return tree.query(np.asarray(p))[0]

    if opts["count"] is not None:
        count = opts["count"]
    else:
        count = max(1, round(contour.length / opts["spacing"]))
    spots = [(s.x, s.y) for s in rep.tight_spots]
    try:
        tabs = place_tabs(tp, count=count, width=opts["width"], edge_distance=edge_distance, spots=spots)
    except InputError as exc:
        k = MM_PER_INCH if units == "inch" else 1.0  # the message speaks the job's units
        raise InputError(f"{exc} (tab width {opts['width'] / k:g} {units}, "
                         f"tool {tp.tool_diameter / k:g} {units})") from None
    out = add_tabs(tp, tabs, height=opts["height"])
    out.info["tabs"] = [dict(t, width=opts["width"], points=tt["points"]) for t, tt in zip(out.info["tabs"], tabs)]
    return out


def _tabs_of(tp):
    """The tabs of a toolpath (info["tabs"], mm) for the report, drawing and picture."""
    h = tp.info.get("tab_height")
    return [{"x": t["x"], "y": t["y"], "s": t["s"], "width": t["width"], "height": h, "points": t["points"]}
            for t in tp.info.get("tabs", [])]


def run_part(points, options=None, *, gcode=None, dxf=None, report=None, plot=None, force: bool = False,
             progress=None, make_path: bool = False, **kwargs):
    """Run the whole job on a part file: every closed outline, nested, in one program.

    Options are those of :func:`pathgen.pipeline.run` (a
    :class:`pathgen.job.JobOptions`, or keywords with lengths in ``units``;
    called directly with keywords, ``smooth`` defaults to None, exact
    interpolation, as it always has here; :func:`pathgen.pipeline.run`
    passes its "auto")
    plus ``sides`` ({outline number or layer name: "outside"/"inside"/"on"},
    overriding the nesting) and ``join_gap`` (DXF: open elements whose ends
    lie within it are joined, default 0.01 mm).  ``side`` and ``seam`` apply
    to single outlines and are refused here (use ``sides``).

    Tabs (outer outlines cut outside, i.e. the cuts that free a part):
    ``tabs`` (a count per outline) or ``tab_spacing`` (about one tab per
    that length of path), ``tab_width`` (the bridge left, default the tool
    diameter but at least 3 mm), ``tab_height`` (default half the depth,
    at most 1 mm); lengths in ``units``.  See :mod:`pathgen.path.tabs`.

    Returns
    -------
    PartResult
    """
    import time

    from .job import job_options, load_job_machine
    from .pipeline import _check_targets, _check_work, _refuse_clobber, stage_timer

    if options is None:
        kwargs.setdefault("smooth", None)
    opts = job_options(points, options, kwargs)
    units = opts.units
    if opts.closed is False:
        raise InputError("a part's outlines are closed; closed=False (--open) applies to one outline")
    if opts.seam is not None:
        raise InputError("seam applies to one outline; a part's outlines each start at their flattest stretch")
    if opts.side != "outside" and opts.sides:
        raise InputError(f"side={opts.side!r} and sides= both given: give the sides per outline or layer "
                         "(sides=, --outline-side KEY=SIDE) only")
    scale = opts.scale
    tol_mm = opts.tolerance
    tool_mm = opts.tool_diameter
    gap_mm = opts.join_gap
    from .checks.machine import Cut, Tool

    mach = load_job_machine(opts)
    tool = Tool(tool_mm if tool_mm is not None else 0.0)
    feed_mm = opts.feed
    targets = _check_targets({"gcode": gcode, "dxf": dxf, "report": report, "plot": plot}, force)
    if "report" in targets:
        targets.update(_check_targets({"report_text": targets["report"].with_suffix(".txt")}, force))
    path = Path(points)
    source = str(points)
    _refuse_clobber(targets, path)
    given = [name for name, value, default in (
        ("entry", opts.entry, "plunge"), ("ramp angle", opts.ramp_angle, None),
        ("lead length", opts.lead_length, None), ("retract height", opts.retract_height, None),
        ("overlap", opts.overlap, None), ("compensation", opts.compensation, "computed"),
        ("flutes", opts.flutes, None), ("chip load", opts.chip_load, None))
        if value != default]
    if given:
        raise InputError(f"{source}: a part of several outlines takes no {', '.join(given)} yet: "
                         "run its outlines one at a time for these options")
    timings = {}
    timed = stage_timer(progress, timings)

    from .part import cut_order, enclosed, nest, read_part

    outlines, steps, warnings = timed("read", read_part, path, units=units, layers=opts.layer,
                                      tolerance=tol_mm, gap=gap_mm)
    import numpy as np

    allpts = np.vstack([o.polygon_points(0.01) for o in outlines])
    _check_work(allpts, tol_mm, tool_mm, opts.depth, opts.step_down, units)
    levels = timed("nest", nest, outlines)
    sides = opts.sides
    if opts.side != "outside":
        # one drawn outline: the side asked for is its side (a pocket, say)
        if len(outlines) != 1:
            raise InputError(f"side={opts.side!r} applies to one outline and {source} holds {len(outlines)}; a "
                             "part's sides come from the nesting (holes inside, outer outlines outside): set "
                             "them per outline or layer with sides= (--outline-side KEY=SIDE)")
        sides = {outlines[0].number: opts.side}
    side_list = _sides(outlines, levels, sides)
    makes_path = make_path or "gcode" in targets or (tool_mm is not None and ("dxf" in targets or "plot" in targets))
    if "gcode" in targets and tool_mm is None and any(s != "on" for s in side_list):
        raise InputError("a program cutting a part needs the tool diameter (tool_diameter=, --tool-diameter)")

    from .checks.report import check
    from .drawing import shape_contour
    from .outline import fit_outline

    # points files: "auto" (the default) smooths each outline to its own noise
    fit_kw = {"end": opts.end, "param": opts.param, "smooth": opts.smooth,
              "corner_angle": opts.corner_angle_degrees, "find_arcs": opts.find_arcs}
    contours, reports, paths = [], [], []
    for o, s in zip(outlines, side_list):
        try:
            if o.shape is not None:
                contours.append(timed("fit", shape_contour, o.shape, tolerance=tol_mm))
            else:
                contours.append(timed("fit", fit_outline, o.outline, **fit_kw))
                rec = contours[-1].info.get("recognised")
                if rec is not None:
                    from .primitives import describe_counts

                    text = describe_counts(rec["lines"], rec["radii"], scale=scale, decimals=3 if scale == 1 else 4)
                    steps = [*steps, f"outline {o.number}: {text} recognised in the points"
                             + (f" ({rec['free']} free-form stretches between them fitted with splines)"
                                if rec["free"] else "")]
        except InputError as exc:
            raise InputError(f"outline {o.number} ({o.where}): {exc}") from None
    tab_opts = _tab_options(opts.tabs, opts.tab_spacing, opts.tab_width, opts.tab_height, scale, tool_mm,
                            opts.depth)
    if tab_opts and not makes_path:
        tab_opts = None  # tabs belong to a program
    material = _material(outlines, contours, levels, side_list) if makes_path else None
    lead_notes = []
    plans = []
    for o, s, c in zip(outlines, side_list, contours):
        try:
            cut = Cut(side=s, tolerance=tol_mm, **({"feed": feed_mm} if feed_mm else {}))
            rep = timed("check", check, c, mach, tool, cut)
            tp = None
            if makes_path:
                import dataclasses

                from .path.build import make_toolpath

                # the tolerance budget: rounding to the written decimals takes at most 5 %, the moves the rest
                plan = _outline_budget(c, tol_mm, units)
                plans.append(plan)
                cut = Cut(side=s, tolerance=plan["approximation_target"], **({"feed": feed_mm} if feed_mm else {}))

                kw = {"moves": opts.moves, "lead": opts.lead, "units": units, "direction": opts.direction}
                for name in ("depth", "step_down", "safe_height", "plunge_feed"):
                    if getattr(opts, name) is not None:
                        kw[name] = getattr(opts, name)
                tp = timed("toolpath", make_toolpath, c, tool, cut, mach, **kw)  # mm, as every stage
                if s != "on":
                    tp = timed("clearance", _clear_leads, tp, c, tool, cut, mach, kw, material, tol_mm,
                               o, lead_notes)
                level = levels[len(paths)]
                if tab_opts and s == "outside" and level % 2 == 0:
                    try:
                        tp = timed("tabs", _with_tabs, tp, o, c, rep, tab_opts, units)
                    except InputError as exc:
                        if level == 0:
                            raise
                        # an island inside a hole: a loose piece, noted, not a reason to stop
                        lead_notes.append(f"outline {o.number} ({o.where}): no tabs: {exc}; "
                                          "this piece comes loose when the cut goes through")
                plan["approximation"] = float(tp.deviation)
                tp = dataclasses.replace(tp, tolerance=tol_mm,
                                         info={**tp.info, "approximation_target": plan["approximation_target"]})
        except InputError as exc:
            raise InputError(f"outline {o.number} ({o.where}, cut {s}): {exc}") from None
        reports.append(rep)
        paths.append(tp)

    # -- order and one program -------------------------------------------------------
    if makes_path:
        starts = [tp.end[0, :2] for tp in paths]
        ends = [tp.end[-1, :2] for tp in paths]
    else:
        starts = ends = [c(np.array([c.domain[0]]))[0] for c in contours]
    order = cut_order(outlines, levels, starts, ends)
    rank = {i: n + 1 for n, i in enumerate(order)}
    joined = None
    if makes_path:
        from .path.join import join_toolpaths

        desc = [{"number": outlines[i].number, "side": side_list[i], "level": levels[i], "order": rank[i]}
                for i in order]
        joined = join_toolpaths([paths[i] for i in order], rapid_feed=mach.rapid_feed, outlines=desc)
    rapid_mm = joined.info["rapid_length"] if joined is not None else 0.0
    rows = tuple({"number": o.number, "where": o.where, "layer": o.layer, "level": levels[i],
                  "side": side_list[i], "order": rank[i], "report": reports[i],
                  "drawn": contours[i].info.get("drawn"),
                  "tabs": _tabs_of(paths[i]) if paths[i] is not None else []}
                 for i, o in enumerate(outlines))
    prep = PartReport(rows, rapid_length=rapid_mm,
                      program_time=None if joined is None else float(joined.time), steps=tuple(steps))
    lengths = [r.length for r in reports]
    radii = [r.min_radius.radius for r in reports if r.min_radius is not None]
    facts = {"points": int(sum(len(c.points) for c in contours)), "closed": True,
             "pieces": int(sum(c.pieces for c in contours)), "corners": int(sum(len(c.corners) for c in contours)),
             "outlines": len(outlines), "length": float(sum(lengths)),
             "min_radius": float(min(radii)) if radii else math.inf}

    # -- write ----------------------------------------------------------------------------
    import warnings as _w

    from .export._atomic import staged_outputs

    files = {}
    replayed = {}
    specs = ()
    if makes_path:
        from .verify.check import Moves
        from .verify.part import PartOutlineSpec

        inner = enclosed(outlines, levels)
        specs = tuple(PartOutlineSpec(
            number=o.number, contour=contours[i], offset=float(paths[i].info.get("offset", 0.0)),
            side=side_list[i], expected=Moves.from_toolpath(paths[i]),
            inside=tuple(outlines[j].number for j in inner[i]),
            tabs=None if not paths[i].info.get("tabs") else {
                "count": len(paths[i].info["tabs"]), "height": float(paths[i].info["tab_height"]),
                "depth": float(paths[i].info["depth"])})
            for i, o in enumerate(outlines))
    notes = list(warnings) + [s for s in steps if "bridged" in s] + lead_notes
    final = dict(targets)
    with _w.catch_warnings(record=True) as caught, staged_outputs(final, force=force) as (stage, tmp):
        _w.simplefilter("always")
        if "gcode" in tmp:
            from .export.gcode import write_gcode

            timed("gcode", write_gcode, joined, tmp["gcode"], force=True, source=path.name, units=units,
                  program_name=Path(final["gcode"]).stem, spindle_speed=opts.spindle_speed,
                  single_feed=opts.one_feed, line_numbers=opts.line_numbers, decimals=plans[0]["decimals"],
                  check=_replay_part(material, tool_mm, tol_mm, specs, plans, replayed, units)
                  if material is not None else None)
            files["gcode"] = final["gcode"]
            if replayed:
                import dataclasses

                prep = dataclasses.replace(prep, program=replayed)
        if "report" in tmp:
            from .export.report import write_report

            timed("report", write_report, prep, tmp["report"], units=units, force=True)
            files["report"], files["report_text"] = final["report"], final["report_text"]
        if "dxf" in tmp:
            from .export.part import write_part_dxf

            timed("dxf", write_part_dxf, tmp["dxf"], outlines, contours, rows,
                  toolpaths=paths if makes_path else None, units=units, tolerance=tol_mm,
                  tabs=[t for r in rows for t in r["tabs"]])
            files["dxf"] = final["dxf"]
        if "plot" in tmp:
            from .export.part import plot_part

            timed("plot", plot_part, tmp["plot"], contours, rows,
                  toolpaths=paths if makes_path else None, units=units,
                  tabs=[t for r in rows for t in r["tabs"]])
            files["plot"] = final["plot"]
        stage.commit()
    notes += [str(w.message) for w in caught if issubclass(w.category, UserWarning)]
    return PartResult(source, tuple(outlines), tuple(levels), tuple(side_list), tuple(order),
                      tuple(contours), tuple(reports), tuple(paths), prep, toolpath=joined,
                      files=files, facts=facts, timings=timings, units=units, notes=tuple(notes),
                      specs=specs, material=material, tool_radius=0.5 * float(tool_mm or 0.0))
