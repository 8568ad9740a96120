"""The whole job in one call: read → fit → check → toolpath → write.

:func:`run` is the one place that wires pathgen's stages in order; the
command line is a thin layer over it.  Each stage is a pure function of
the previous stage's value, and :class:`Result` keeps every value so a
notebook can look at any of them.

Lengths are mm inside.  The options travel as one checked
:class:`pathgen.job.JobOptions` (lengths mm, angles radians), built once by
the command line or by :func:`run` from its keywords: with
``units="inch"`` the points *and every length option* (tool diameter,
tolerance, depths, seam, smoothing) are read as inches and feeds as
inch/min, and converted to mm there, once.

Nothing is written unless asked for (``gcode=``, ``dxf=``, ``report=``,
``plot=``).  Before any file is written, every target is checked: an
existing file is refused unless ``force=True``, so a refused run leaves
no file behind, and each writer writes atomically.
"""

from __future__ import annotations

import math
import os
import time
import warnings
from dataclasses import dataclass
from pathlib import Path

from ._options import COMPENSATIONS, LEADS, MM_PER_INCH, MOVES, check_option  # noqa: F401  (MOVES, LEADS re-exported)
from .errors import InputError, PathgenError
from .job import DEFAULT_TOLERANCE, JobOptions, JobResult, cutting_feed, job_options, load_job_machine  # noqa: F401

__all__ = ["run", "run_part", "verify", "Result", "JobOptions", "MOVES", "LEADS", "contour_facts"]

POINT_SUFFIXES = (".csv", ".txt", ".xy", ".dxf")


@dataclass(frozen=True, eq=False)
class Result(JobResult):
    """What :func:`run` made.

    Attributes
    ----------
    source : the points file's path, or ``"<array>"``.
    outline : the cleaned input (``pathgen.points.Outline``), or None when
        the input stage is not available.
    contour : the fitted :class:`pathgen.spline.Contour` (mm).
    report : the machinability report (``pathgen.checks.report.CheckReport``)
        or None when not checked.
    toolpath : the :class:`pathgen.path.model.Toolpath`, or None when no
        program or tool path was asked for.
    files : kind ("gcode", "dxf", "report", "report_text", "plot") → path written.
    facts : plain numbers about the contour (see :func:`contour_facts`).
    timings : stage → wall seconds.
    units : the units the user works in ("mm" or "inch"); the values above,
        the toolpath included, are mm; the written files are in these units.
    notes : warnings for the user, plain sentences (the input's warnings,
        e.g. points out of order or a self-crossing outline, and writers'
        warnings, e.g. a very large drawing).
    program : what the replay of the written program measured (mm; see
        :func:`pathgen.verify.check.check_program`: deviation, clearance,
        time, tolerance budget), or None when no program was written.
    """

    source: str
    outline: object
    contour: object
    report: object = None
    program: dict = None


def contour_facts(contour, report=None, *, per_piece: int | None = None) -> dict:
    """Points, closedness, length and the smallest radius of a contour.

    With a check ``report``, its length and its smallest radius (refined at
    the curvature peaks) are used.  Without one, the curvature is sampled
    ``per_piece`` times on every cubic piece (default: 8, fewer on contours
    of more than 25 000 pieces, at least 1; sorted parameters, so no piece
    search) and the smallest radius is ``1 / max |κ|`` over those samples.
    Either way: its place (x, y) and arc-length position ``s`` from the
    start, all in mm; ``inf`` when the contour is straight.

    >>> from pathgen.spline import fit
    >>> import numpy as np
    >>> a = np.linspace(0, 2 * np.pi, 256, endpoint=False)
    >>> f = contour_facts(fit(np.c_[10 * np.cos(a), 10 * np.sin(a)], closed=True))
    >>> f["closed"], round(f["length"], 3), round(f["min_radius"], 2)
    (True, 62.832, 10.0)
    """
    import numpy as np

    facts = {
        "points": int(len(contour.points)),
        "closed": bool(contour.closed),
        "pieces": int(contour.pieces),
        "corners": len(contour.corners),
    }
    if report is not None:
        r = report.min_radius
        facts["length"] = float(report.length)
        if r is None:
            facts.update(min_radius=math.inf, min_radius_at=None, min_radius_s=None)
        else:
            facts.update(min_radius=float(r.radius), min_radius_at=[float(r.x), float(r.y)],
                         min_radius_s=float(r.s))
        return facts
    b = np.asarray(contour.breaks)
    if per_piece is None:
        per_piece = max(1, min(8, 200_000 // max(contour.pieces, 1)))
    u = np.arange(per_piece) / per_piece
    t = (b[:-1, None] + np.diff(b)[:, None] * u).ravel()
    if not contour.closed:
        t = np.append(t, b[-1])
    k = np.abs(contour.curvature(t))
    i = int(np.argmax(k))
    kmax = float(k[i])
    facts["length"] = float(contour.length)
    if kmax <= 0:
        facts.update(min_radius=math.inf, min_radius_at=None, min_radius_s=None)
        return facts
    xy = contour(t[i : i + 1])[0]
    facts.update(min_radius=1.0 / kmax, min_radius_at=[float(xy[0]), float(xy[1])],
                 min_radius_s=float(contour.arc_length(t[i : i + 1])[0]))
    return facts


def stage_timer(progress, timings: dict):
    """``timed(stage, fn, *args, **kw)``: call ``fn``, announcing the stage to
    ``progress`` (callable(str) or None) and adding its seconds to
    ``timings[stage]``."""
    note = progress or (lambda stage: None)

    def timed(stage, fn, *a, **kw):
        note(stage)
        t0 = time.perf_counter()
        value = fn(*a, **kw)
        timings[stage] = timings.get(stage, 0.0) + time.perf_counter() - t0
        return value

    return timed


def _check_targets(targets: dict, force: bool) -> dict:
    """Resolve output paths; refuse existing files unless ``force``
    (all checked before anything is written)."""
    from .export._atomic import check_target

    return {kind: check_target(p, force=force) for kind, p in targets.items() if p is not None}


def _profile_tables(machine):
    """The program frame and the [tool] settings of a profile file (defaults otherwise)."""
    from .checks.machine import load_tool_settings
    from .export.frame import Frame, load_frame

    if isinstance(machine, (str, os.PathLike)):
        return load_frame(machine), load_tool_settings(machine)
    return Frame(), {}


def _refuse_crossing(outline, side, allow_crossing, scale, units, step=1) -> list[str]:
    """A closed outline that crosses itself is not cut (unless asked, on the
    line); returns the notes to pass on.  ``step``: see ``simple.crossing``."""
    from .simple import crossing

    c = crossing(outline.points, step=step)
    if c is None:
        return []
    u = "inch" if units == "inch" else "mm"
    at = f"({c.x / scale:.4f}, {c.y / scale:.4f}) {u}"
    if allow_crossing and side == "on":
        return [f"the closed outline crosses itself at {at}; followed on the line as asked"]
    a, b = c.rows
    extra = (" (--allow-crossing follows a deliberate figure on the line, with --side on)"
             if c.cause == "figure" else "")
    raise InputError(f"{outline.where(a)}: the closed outline crosses itself at {at}, between the "
                     f"segments from {outline.where(a)} and from {outline.where(b)}"
                     f"{f' ({c.count} crossings)' if c.count > 1 else ''}: {c.hint()}; "
                     f"a program cannot cut it{extra}")


def _refuse_clobber(targets: dict, source) -> None:
    """Refuse outputs that would replace the input or each other."""
    seen = {}
    if source is not None:
        seen[Path(source).resolve()] = "the input"
    for kind, p in targets.items():
        key = Path(p).resolve()
        if key in seen:
            raise InputError(f"{p}: the {kind.replace('_', ' ')} output would replace {seen[key]}; "
                             "choose another output name")
        seen[key] = f"the {kind.replace('_', ' ')} output"


#: What pathgen promises to finish in bounded time (mm): parts from
#: SIZE_RANGE[0] to SIZE_RANGE[1] across (bounding-box diagonal), tolerances
#: from TOLERANCE_MIN up, at most MAX_TOLERANCES tolerances across the part
#: (the limit up to which this is measured: a 100-point ellipse 8 m x 5 m
#: at 1.9e6 tolerances took 3.3 s and 0.18 GB with arcs, 2.7 s with lines,
#: on the 2-core test machine; beyond it the work is not measured), tools up
#: to TOOL_MAX, depths up to DEPTH_MAX in at most MAX_PASSES passes.
SIZE_RANGE = (0.01, 10_000.0)
TOLERANCE_MIN = 1e-4
MAX_TOLERANCES = 2e6
TOOL_MAX = 1000.0
DEPTH_MAX = 1000.0
MAX_PASSES = 1000


def _check_work(points, tol, tool, depth, step, units="mm") -> None:
    """Refuse, before any work, jobs outside the stated limits (mm)."""
    import numpy as np

    k = MM_PER_INCH if units == "inch" else 1.0
    u = "inch" if units == "inch" else "mm"

    def show(mm):
        return f"{mm / k:.6g} {u}"

    lo, hi = points.min(axis=0), points.max(axis=0)
    size = float(np.hypot(*(hi - lo)))
    if not SIZE_RANGE[0] <= size <= SIZE_RANGE[1]:
        raise InputError(f"the outline is {show(size)} across; pathgen works on outlines from "
                         f"{show(SIZE_RANGE[0])} to {show(SIZE_RANGE[1])} across (check the units)")
    if tol < TOLERANCE_MIN:
        raise InputError(f"tolerance {show(tol)} is below the smallest pathgen honours, {show(TOLERANCE_MIN)}")
    if tol > 0.1 * size:
        raise InputError(f"tolerance {show(tol)} is more than a tenth of the outline's size "
                         f"({show(size)} across); use at most {show(0.1 * size)}")
    if size / tol > MAX_TOLERANCES:
        raise InputError(f"the outline is {show(size)} across: at tolerance {show(tol)} that is "
                         f"{size / tol:.2g} tolerances, more than the {MAX_TOLERANCES:.0e} pathgen handles "
                         f"in bounded time; use a tolerance of at least {show(size / MAX_TOLERANCES)}")
    if tool is not None and tool > TOOL_MAX:
        raise InputError(f"tool diameter {show(tool)} is above the largest pathgen accepts, {show(TOOL_MAX)}")
    if depth is not None and depth > DEPTH_MAX:
        raise InputError(f"depth {show(depth)} is above the deepest pathgen accepts, {show(DEPTH_MAX)}")
    if step is not None:
        passes = math.ceil((depth if depth is not None else 1.0) / step - 1e-9)
        if passes > MAX_PASSES:
            raise InputError(f"step down {show(step)} would take {passes} passes; pathgen writes at most "
                             f"{MAX_PASSES} (use a step down of at least "
                             f"{show((depth if depth is not None else 1.0) / MAX_PASSES)})")


def run(points, options=None, *, gcode=None, dxf=None, report=None, plot=None, force: bool = False,
        progress=None, make_path: bool = False, **kwargs) -> Result:
    """Run the whole job on a points file or an (n, 2) array.

    Parameters
    ----------
    points : str, Path or array-like (n, 2)
        A points file (.csv .txt .xy .dxf) or the points themselves.
    options : JobOptions or None
        The job's options, checked and in mm (see
        :meth:`pathgen.job.JobOptions.from_user`, which documents each).
        None: built here from ``**kwargs``.
    gcode, dxf, report, plot : path or None
        Files to write.  ``report`` names the JSON report; a text version
        is written beside it with the suffix ``.txt``.
    force : bool
        Overwrite existing files.
    progress : callable(str) or None
        Called with each stage's name as it starts (for long work).
    make_path : bool
        Make the toolpath even when no program, drawing or picture asks
        for it (:func:`verify` compares a program with it).
    **kwargs
        Without ``options``: the options as the user gives them (lengths in
        ``units``, angles in degrees), e.g. ``tool_diameter=6``.  A part (a
        drawing, a text file of several outlines, or any closed outline
        file when tabs are asked for) is run by :func:`run_part`, which
        returns a ``PartResult``.

    Returns
    -------
    Result
    """
    o = job_options(points, options, kwargs)
    units, side, scale, tol_mm, tool_mm, seam = o.units, o.side, o.scale, o.tolerance, o.tool_diameter, o.seam
    from .checks.machine import Cut, Tool

    if (gcode is not None or make_path) and tool_mm is None and side != "on":
        raise InputError(f"a program cutting {side} the outline needs the tool diameter "
                         "(tool_diameter=, --tool-diameter), or side='on' (--side on) to follow the line")
    with warnings.catch_warnings(record=True) as machine_notes:
        warnings.simplefilter("always")
        mach = load_job_machine(o)
    tool = Tool(tool_mm if tool_mm is not None else 0.0)
    frame, tool_settings = _profile_tables(o.machine)
    direction = o.direction
    if frame.spindle == "counter-clockwise":  # climb and conventional swap with the spindle's turn
        direction = {"climb": "conventional", "conventional": "climb"}[direction]
    cut_kw = {"side": side, "tolerance": tol_mm}
    feed_mm, feed_notes = cutting_feed(o, mach)
    if feed_mm is not None:
        cut_kw["feed"] = feed_mm
    cut = Cut(**cut_kw)
    targets = _check_targets({"gcode": gcode, "dxf": dxf, "report": report, "plot": plot}, force)
    if "report" in targets:
        txt = targets["report"].with_suffix(".txt")
        targets.update(_check_targets({"report_text": txt}, force))

    timings = {}
    timed = stage_timer(progress, timings)

    # -- read ----------------------------------------------------------------
    if isinstance(points, (str, os.PathLike)):
        source = str(points)
        path = Path(points)
        if not path.is_file():
            raise InputError(f"{path}: no such file")
        if path.suffix.lower() not in POINT_SUFFIXES:
            raise InputError(f"{path}: unknown kind of points file; use one of {', '.join(POINT_SUFFIXES)}")
    else:
        source, path = "<array>", None
    _refuse_clobber(targets, path)
    wants_part = any(getattr(o, k) is not None for k in ("join_gap", "sides", "tabs", "tab_spacing", "tab_width",
                                                          "tab_height"))
    if path is not None and (wants_part or _is_part(path, o.layer)):  # a drawing, several outlines, tabs
        given = [name for name, value, default in (
            ("entry", o.entry, "plunge"), ("ramp angle", o.ramp_angle, None), ("lead length", o.lead_length, None),
            ("retract height", o.retract_height, None), ("overlap", o.overlap, None),
            ("compensation", o.compensation, "computed"), ("flutes", o.flutes, None),
            ("chip load", o.chip_load, None))
            if value != default]
        if given:
            raise InputError(f"{source}: a part of several outlines takes no {', '.join(given)} yet: "
                             "run its outlines one at a time for these options")
        # the part job is handed the milling direction as the spindle's turn makes it
        import dataclasses

        return run_part(path, dataclasses.replace(o, direction=direction), gcode=gcode, dxf=dxf, report=report,
                        plot=plot, force=force, progress=progress, make_path=make_path)
    from .points import clean_points, read_points

    if path is not None:
        outline = timed("read", read_points, path, units=units, layer=o.layer, closed=o.closed)
    else:
        outline = timed("read", clean_points, points, units=units, closed=o.closed)
    closed = outline.closed
    _check_work(outline.points, tol_mm, tool_mm, o.depth, o.step_down, units)
    makes_path = "gcode" in targets or (tool_mm is not None and ("dxf" in targets or "plot" in targets))
    early_notes = [str(w.message) for w in machine_notes] + list(feed_notes)
    from .noise import chord_span, estimate_noise

    noise = timed("noise", estimate_noise, outline.points, outline.closed,
                  quantization=getattr(outline, "quantization", None))
    if closed and makes_path:
        # points to be smoothed whose noise is not small against their
        # spacing cross their own path in small loops; the outline they
        # trace is looked at on chords as long as the fit's parameter uses
        step = chord_span(noise.sigma, noise.spacing_median, len(outline.points)) \
            if o.smooth == "auto" and noise.smooth else 1
        early_notes += _refuse_crossing(outline, side, o.allow_crossing, scale, units, step)

    # -- fit -----------------------------------------------------------------
    from .outline import fit_outline
    kw = {"end": o.end, "param": o.param, "smooth": o.smooth, "noise": noise,
          "corner_angle": o.corner_angle_degrees, "find_arcs": o.find_arcs}
    contour = timed("fit", fit_outline, outline, **kw)

    # -- check -----------------------------------------------------------------
    # (Check, toolpath and the drawing's arcs do not depend on each other;
    # running them side by side in worker processes was measured at 10^6
    # points on the shared 2-core machine: no faster, 0.9 GB more memory.)
    from .checks.report import check

    reference = None
    if noise.smooth and contour.info.get("smoothing") in ("off", "tolerance"):
        # noisy points fitted exactly (or within a given tolerance): the same
        # points smoothed to their noise tell the part's tight spots from the noise's
        reference = timed("noise reference", fit_outline, outline,
                          **{**kw, "smooth": "auto", "noise": noise})
    rep = timed("check", check, contour, mach, tool, cut, noise_reference=reference)
    facts = timed("facts", contour_facts, contour, rep)

    # -- toolpath --------------------------------------------------------------
    tp = drawn = None
    plan = None
    if make_path or makes_path:
        from .path.build import make_toolpath

        kw = {"moves": o.moves, "lead": o.lead, "seam": seam, "units": units, "direction": direction}
        for name in ("depth", "step_down", "safe_height", "plunge_feed"):
            if getattr(o, name) is not None:
                kw[name] = getattr(o, name)
        if o.plunge_feed is None and "plunge_feed" in tool_settings:
            kw["plunge_feed"] = tool_settings["plunge_feed"]
        kw["entry"] = o.entry
        for name in ("ramp_angle", "lead_length", "overlap", "retract_height"):
            if getattr(o, name) is not None:
                kw[name] = getattr(o, name)
        if o.retract_height is None and units == "inch":
            kw["retract_height"] = min(0.04 * MM_PER_INCH, kw.get("safe_height", 5.0))
        # the tolerance budget: rounding to the written decimals takes at most 5 %, the moves the rest
        # smoothed points (to a tolerance or to their noise): the residual is stated apart
        plan = _budget(contour, tol_mm, units, contour.info.get("smoothing") in ("tolerance", "noise"))
        cut_moves = Cut(feed=cut.feed, side=cut.side, tolerance=plan["approximation_target"])
        if o.compensation == "machine":
            from .path.compensate import part_line_toolpath

            center_mm = timed("toolpath", make_toolpath, contour, tool, cut_moves, mach, **{**kw, "units": "mm"})
            tp = timed("part line", part_line_toolpath, contour, center_mm, tool, cut_moves, mach,
                       register=frame.register, seam=seam, moves=o.moves, units=units)
            # the drawing and the picture show where the tool's center goes
            drawn = center_mm
            drawn = center_mm
        else:
            tp = timed("toolpath", make_toolpath, contour, tool, cut_moves, mach, **kw)
        import dataclasses

        tp = dataclasses.replace(tp, tolerance=tol_mm,
                                 info={**tp.info, "approximation_target": plan["approximation_target"]})
        if direction != o.direction:  # the program states the milling direction asked for
            tp = dataclasses.replace(tp, info={**tp.info, "direction": o.direction,
                                               "spindle": "counter-clockwise"})
        if drawn is None:
            drawn = tp
        plan["approximation"] = float(tp.deviation)
        plan["total"] = plan["points"] + plan["approximation"] + plan["rounding"]

    # -- write -----------------------------------------------------------------
    from .export._atomic import staged_outputs

    files = {}
    replayed = {}
    notes = list(getattr(outline, "warnings", ())) + early_notes
    final = dict(targets)
    # every output is written under a temporary name first; they appear
    # together once all are written, and a failure leaves none of them
    with warnings.catch_warnings(record=True) as caught, staged_outputs(final, force=force) as (stage, targets):
        warnings.simplefilter("always")
        if "gcode" in targets:
            from .export.gcode import write_gcode

            timed("gcode", write_gcode, tp, targets["gcode"], force=True,
                  source=Path(source).name, program_name=Path(final["gcode"]).stem,
                  spindle_speed=o.spindle_speed, single_feed=o.one_feed, line_numbers=o.line_numbers,
                  decimals=plan["decimals"], frame=frame,
                  notes=tuple(f"note: {n}" for n in feed_notes) + ((_NOT_REPLAYED,) if o.compensation == "machine"
                                                                     else ()),
                  check=(_replay_compensated if o.compensation == "machine" else _replay)(
                      contour, tp, tool_mm, side, tol_mm, plan, mach, replayed, units), units=units)
            files["gcode"] = final["gcode"]
        if "report" in targets:
            from .export.report import write_report

            stated = rep
            if replayed:
                from .verify.check import ReportWithProgram

                stated = ReportWithProgram(rep, replayed)
            comp = tp.info.get("compensation") if tp is not None else None
            # a compensated program's replay states its word, register and side itself (program.compensation)
            program = None if not comp or replayed else {
                "compensation": "machine", "word": comp["word"], "register": comp["register"],
                "side": "left of travel" if comp["word"] == "G41" else "right of travel",
                "radius": comp["radius"] / scale}
            timed("report", write_report, stated, targets["report"], units=units, force=True, program=program,
                  toolpath=tp, notes=feed_notes)
            files["report"], files["report_text"] = final["report"], final["report_text"]
        if "dxf" in targets:
            from .export.dxf import write_dxf
            from .path.build import contour_moves

            arcs = timed("dxf arcs", contour_moves, contour, tolerance=tol_mm, moves="arcs")
            timed("dxf", write_dxf, targets["dxf"], contour, toolpath=drawn, arcs=arcs,
                  report=rep, units=units, force=True)
            files["dxf"] = final["dxf"]
        if "plot" in targets:
            from .export.plot import plot as draw

            timed("plot", draw, targets["plot"], contour, toolpath=drawn, report=rep,
                  units=units, force=True)
            files["plot"] = final["plot"]
        stage.commit()
    notes += [str(w.message) for w in caught if issubclass(w.category, UserWarning)]
    return Result(source, outline, contour, report=rep, toolpath=tp, facts=facts,
                  timings=timings, files=files, units=units, notes=tuple(notes),
                  program=replayed or None)


def verify(program, points, options=None, **kwargs) -> tuple:
    """Check a G-code program (any, e.g. hand-edited) against a part's points.

    The points are fitted and the expected toolpath made with the same
    options as :func:`run` (fit, tool, side, tolerance, moves, depths,
    leads); the program is read back (:mod:`pathgen.verify.reader`, G20
    converted to mm) and measured against the part.

    Parameters
    ----------
    program : path of the program file.
    points : the part's points (file or array), as for :func:`run`.
    options : JobOptions or None
        As for :func:`run`; None: built from ``**kwargs``.
    **kwargs : the options as for :func:`run` (no output files).

    A part (a drawing, a text file of several outlines) is checked outline
    by outline (:func:`pathgen.verify.part.verify_part`); with
    ``compensation="machine"`` the program is read with G41/G42 and checked
    as a part line (:func:`pathgen.verify.compensated.compensated_facts`).

    Returns
    -------
    (facts, result): ``facts`` as :func:`pathgen.verify.check.verify_program`
    gives them (mm): deviation from the expected tool-center path (two-sided,
    the worst line), clearance and gouges (file line, depth), the reader's
    problems, feed moves without F, the estimated time as written, and
    ``status`` (0 clean, 1 a gouge, off tolerance or a rule break);
    ``result`` the :class:`Result` of the fit and the expected path.

    Raises
    ------
    InputError
        The program cannot be read (the file and line are named), or an
        option or the points are bad.
    """
    from .verify.check import Moves, verify_program
    from .verify.reader import read_gcode_file

    for key in ("gcode", "dxf", "report", "plot"):
        if kwargs.get(key) is not None:
            raise InputError(f"verify writes no files ({key}= was given)")
    o = job_options(points, options, kwargs)
    compensated = o.compensation == "machine"
    prog = read_gcode_file(program, compensation=compensated)
    result = run(points, o, make_path=True)
    tp = result.toolpath  # one outline's toolpath: mm (a part's is checked by verify_part)
    mach = load_job_machine(o)
    if getattr(result, "specs", ()):  # a part of several outlines
        from .verify.part import verify_part

        return verify_part(prog, result, machine=mach), result
    if compensated:  # the program follows the part line; the control offsets it
        from .verify.compensated import compensated_facts, part_line_moves
        from .verify.replay import program_time

        facts = compensated_facts(prog, result.contour, tool_radius=0.5 * float(o.tool_diameter),
                                  side=o.side, tolerance=float(tp.tolerance),
                                  expected=part_line_moves(tp))
        facts["time"] = program_time(prog, mach)
        facts["units"] = prog.units
        facts["program"] = prog.source
        facts["problems"] = [p.to_dict() for p in prog.problems] + facts["compensation"]["problems"]
        facts["feed_moves_without_f"] = [p.line for p in prog.problems if p.rule == "no feed"]
        facts["status"] = 1 if (not facts["within_tolerance"] or facts["gouges"] or facts["problems"]) else 0
        return facts, result
    facts = verify_program(prog, result.contour, offset=float(tp.info.get("offset", 0.0)),
                           tool_radius=0.5 * o.tool_diameter if o.tool_diameter else 0.0,
                           side=o.side, tolerance=float(tp.tolerance),
                           expected=Moves.from_toolpath(tp), machine=mach)
    return facts, result


#: Header line of a program written for cutter compensation at the control.
_NOT_REPLAYED = ("not replayed by pathgen: the control's own offset of this part line by the D register "
                 "(its tool path exists only there) - verify it on the control")


def _budget(contour, tol_mm: float, units: str, smoothed: bool) -> dict:
    """The tolerance budget (mm) before the moves are made: decimals from the
    tolerance, the fit's residual, what is left for the moves."""
    from .verify.replay import budget, decimals_for

    info = getattr(contour, "info", {}) or {}
    residual = (float(info.get("max_residual", 0.0)), float(info.get("rms_residual", 0.0)))
    plan = budget(tol_mm, decimals=decimals_for(tol_mm, units), units=units, residual=residual,
                  smoothed=smoothed)
    if plan["approximation_target"] <= 0.5 * tol_mm:
        raise InputError(f"tolerance {tol_mm:g} mm is too small to write: rounding to {plan['decimals']} decimals "
                         f"and the fit's residual take more than half of it")
    return plan


def _replay(contour, tp, tool_mm, side, tol_mm, plan, machine, out: dict, units: str = "mm"):
    """The check run on the program's text before it is renamed into place:
    read back, measured against the part; its figures go into ``out`` and
    its header lines speak ``units`` (the program's)."""
    from .verify.check import Moves, check_program, header_lines, shift_facts

    offset = float(tp.info.get("offset", 0.0))  # the toolpath is mm
    radius = 0.5 * (tool_mm or 0.0)

    def check(text):
        facts = check_program(text, contour, offset=offset, tool_radius=radius, side=side, tolerance=tol_mm,
                              expected=Moves.from_toolpath(tp), budget=plan, machine=machine)
        said = header_lines(facts, units)
        out.update(shift_facts(facts, len(said)))  # the lines of the file as written
        return said

    return check


def _replay_compensated(contour, tp, tool_mm, side, tol_mm, plan, machine, out: dict, units: str = "mm"):
    """The check run on a program for cutter compensation at the control
    before it is renamed into place (:mod:`pathgen.verify.compensated`):
    read back with G41/G42, the part line's deviation, the entry and exit,
    the arcs toward the tool and the swept tool disc; figures into ``out``."""
    from .errors import InternalCheckError
    from .verify.check import header_lines, shift_facts
    from .verify.compensated import compensated_facts, part_line_moves
    from .verify.reader import read_gcode

    radius = 0.5 * (tool_mm or 0.0)

    def check(text):
        try:
            program = read_gcode(text, source="<program>", strict=True, compensation=True)
        except InputError as exc:
            raise InternalCheckError(f"internal check failed: the program does not read back: {exc}") from None
        facts = compensated_facts(program, contour, tool_radius=radius, side=side, tolerance=tol_mm,
                                  expected=part_line_moves(tp))
        from .verify.replay import program_time

        facts["time"] = program_time(program, machine) if machine is not None else None
        facts["budget"] = plan
        c = facts["compensation"]
        bad = [f"line {p['line']}: {p['message']}" for p in c["problems"]]
        if not facts["within_tolerance"]:
            bad.append(f"the part line strays {facts['deviation']:.6g} mm from the contour (worst at line "
                       f"{facts['deviation_worst_line']})")
        if facts["gouges"]:
            bad.append(f"the tool disc along the offset part line enters the part by {c['swept_depth']:.6g} mm "
                       f"near line {c['swept_line']}")
        if bad:
            raise InternalCheckError("internal check failed: the written compensated program, read back: "
                                     + "; ".join(bad) + f" (chord tolerance {tol_mm:g} mm); nothing was written")
        said = header_lines(facts, units)
        out.update(shift_facts(facts, len(said)))  # the lines of the file as written
        return said

    return check


def _is_part(path, layer=None) -> bool:
    from .part import is_part_input

    return is_part_input(path, layer)


def run_part(points, options=None, **kwargs):
    """The whole job on a part: every closed outline of a drawing or of a
    text file of several outlines, nested (holes inside, outer outlines
    outside), in one program with the holes first.  See
    :func:`pathgen.partjob.run_part` for the options; :func:`run` hands part
    files here by itself."""
    from .partjob import run_part as _run_part

    return _run_part(points, options, **kwargs)


# -- many files -----------------------------------------------------------------
#: Outputs :func:`run_batch` can write for each file, with their suffixes.
OUTPUT_SUFFIXES = {"gcode": ".nc", "report": ".report.json", "dxf": ".dxf", "plot": ".png"}


def points_files(directory, *, outdir=None) -> list[Path]:
    """The points files (.csv .txt .xy .dxf) of a folder, sorted by name.

    Reports a batch writes (``*.report.txt``) are never points files; when
    ``outdir`` is the folder itself, the outputs a batch would write for
    the folder's points files (``part.dxf`` beside ``part.csv``) are left
    out too, so a batch run twice in its own folder reads the same inputs.
    """
    d = Path(directory)
    if not d.is_dir():
        raise InputError(f"{d}: no such folder")
    files = sorted(p for p in d.iterdir() if p.is_file() and p.suffix.lower() in POINT_SUFFIXES
                   and not p.name.lower().endswith(".report.txt"))
    if outdir is not None and Path(outdir).is_dir() and Path(outdir).resolve() == d.resolve():
        ours = {p.name.lower() for p in files if p.suffix.lower() != ".dxf"}
        stems = {p.stem.lower() for p in files if p.suffix.lower() != ".dxf"}
        files = [p for p in files if not (p.suffix.lower() == ".dxf" and p.stem.lower() in stems
                                          and p.name.lower() not in ours)]
    return files


def _output_stems(files: list[Path]) -> list[str]:
    """Output names, one per file and all different (compared without case).

    The stem when it is unique; else the full name with its dots made
    underscores; a name still taken gets "-2", "-3", ... in file order.
    """
    from collections import Counter

    count = Counter(p.stem.lower() for p in files)
    wanted = [p.stem if count[p.stem.lower()] == 1 else p.name.replace(".", "_") for p in files]
    taken, stems = set(), []
    for name in wanted:
        candidate, k = name, 1
        while candidate.lower() in taken:
            k += 1
            candidate = f"{name}-{k}"
        taken.add(candidate.lower())
        stems.append(candidate)
    return stems


def batch_row(result: Result | None, source, *, error: str | None = None) -> dict:
    """One line of the batch table: file, length, smallest radius, tight
    spots, blocks, estimated time (s), status and exit code."""
    row = {"file": str(source), "length": None, "min_radius": None, "tight_spots": None,
           "blocks": None, "time": None, "status": "error", "exit": 2, "message": error or ""}
    if result is None:
        return row
    rep, tp = result.report, result.toolpath
    row.update(length=result.facts["length"], min_radius=result.facts["min_radius"])
    spots = getattr(rep, "tight_spots", None)
    if spots is not None:
        row["tight_spots"] = len(spots)
    if tp is not None:
        row["blocks"] = int(tp.block_count)
        row["time"] = float(tp.time) if tp.time else None
    if row["time"] is None and rep is not None:
        t = getattr(rep, "cycle_time", None)
        row["time"] = float(t) if t is not None else None
    row["exit"] = result.status
    row["status"] = "tool cannot reach" if result.status == 1 else "ok"
    return row


def _batch_one(source: Path, outdir: Path, stem: str, outputs: tuple, options: dict) -> dict:
    """Run one file of a batch; a bad file becomes an error row."""
    targets = {k: outdir / (stem + OUTPUT_SUFFIXES[k]) for k in outputs}
    from .errors import InternalCheckError

    try:
        result = run(source, **targets, **options)
    except InternalCheckError as exc:  # pathgen's own check of its program failed: exit 3, not bad input
        row = batch_row(None, source.name, error=" ".join(str(exc).split()))
        row.update(status="internal check failed", exit=3)
        return row
    except (PathgenError, OSError) as exc:
        return batch_row(None, source.name, error=" ".join(str(exc).split()))
    return batch_row(result, source.name)


def run_batch(directory, outdir, *, jobs=None, outputs=("gcode", "report"), progress=None,
              files=None, **options) -> list[dict]:
    """Run the whole job on every points file of ``directory``, in parallel.

    Parameters
    ----------
    directory : path
        Folder of points files (.csv .txt .xy .dxf); not searched recursively.
    outdir : path
        Folder for the outputs (created if missing): for ``part.csv``,
        ``part.nc``, ``part.report.json`` and ``part.report.txt`` (and
        ``part.dxf``, ``part.png`` when asked for in ``outputs``).
    jobs : int or None
        Worker processes; None uses every CPU core.  1 runs in this process.
    outputs : tuple of "gcode", "report", "dxf", "plot"
    progress : callable(done, total) or None
        Called as files finish.
    files : list of paths or None
        Run these instead of the folder's files.
    **options
        Passed to :func:`run` for every file.

    Returns
    -------
    list of dict
        One row per file, in file-name order (see :func:`batch_row`); a bad
        file gives a row with ``status="error"``, ``exit=2`` and the message,
        and never stops the batch.
    """
    files = [Path(f) for f in files] if files is not None else points_files(directory)
    for k in outputs:
        check_option("output", k, OUTPUT_SUFFIXES)
    out = Path(outdir)
    if out.exists() and not out.is_dir():
        raise InputError(f"{out}: exists and is not a folder")
    out.mkdir(parents=True, exist_ok=True)
    stems = _output_stems(files)
    tick = progress or (lambda done, total: None)
    total = len(files)
    if jobs is not None and (not isinstance(jobs, int) or jobs < 1):
        raise InputError(f"jobs must be a whole number >= 1, got {jobs!r}")
    workers = min(jobs or os.cpu_count() or 1, max(total, 1))
    if workers <= 1:
        rows = []
        for i, (f, s) in enumerate(zip(files, stems)):
            rows.append(_batch_one(f, out, s, tuple(outputs), options))
            tick(i + 1, total)
        return rows
    from concurrent.futures import ProcessPoolExecutor, as_completed

    rows: list = [None] * total
    with ProcessPoolExecutor(max_workers=workers) as pool:
        futures = {pool.submit(_batch_one, f, out, s, tuple(outputs), options): i
                   for i, (f, s) in enumerate(zip(files, stems))}
        for done, fut in enumerate(as_completed(futures), 1):
            rows[futures[fut]] = fut.result()
            tick(done, total)
    return rows
