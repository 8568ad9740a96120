"""The whole job in one call: read → fit → check → toolpath → write.

:func:`run` is the one place that wires pathgen's stages in order; the
command line is a thin layer over it.  Each stage is a pure function of
the previous stage's value, and :class:`Result` keeps every value so a
notebook can look at any of them.

Lengths are mm inside.  With ``units="inch"`` the points *and every length
option* (tool diameter, tolerance, depths, seam, smoothing) are read as
inches and feeds as inch/min; they are converted to mm at this boundary.

Nothing is written unless asked for (``gcode=``, ``dxf=``, ``report=``,
``plot=``).  Before any file is written, every target is checked: an
existing file is refused unless ``force=True``, so a refused run leaves
no file behind, and each writer writes atomically.
"""

from __future__ import annotations

import math
import os
import time
from dataclasses import dataclass, field
from pathlib import Path

from ._options import MM_PER_INCH, SIDES, UNITS, check_option, check_positive
from .errors import InputError, PathgenError

__all__ = ["run", "Result", "MOVES", "LEADS", "contour_facts"]

MOVES = ("arcs", "lines")
LEADS = ("arc", "line", "none")
POINT_SUFFIXES = (".csv", ".txt", ".xy", ".dxf")


@dataclass(frozen=True, eq=False)
class Result:
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
    units : the units the user works in ("mm" or "inch"); the values above
        are mm, the toolpath and written files are in these units.
    notes : warnings for the user, plain sentences (the input's warnings,
        e.g. points out of order or a self-crossing outline, and writers'
        warnings, e.g. a very large drawing).
    """

    source: str
    outline: object
    contour: object
    report: object = None
    toolpath: object = None
    files: dict = field(default_factory=dict)
    facts: dict = field(default_factory=dict)
    timings: dict = field(default_factory=dict)
    units: str = "mm"
    notes: tuple = ()

    @property
    def tool_cannot_reach(self) -> bool:
        """True when the report says the tool cannot cut some spot as drawn."""
        return bool(getattr(self.report, "tool_cannot_reach", False))

    @property
    def status(self) -> int:
        """0: done; 1: done, but the tool cannot reach some spot."""
        return 1 if self.tool_cannot_reach else 0


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


def _check_targets(targets: dict, force: bool) -> dict:
    """Resolve output paths; refuse existing files unless ``force``
    (all checked before anything is written)."""
    from .export._atomic import check_target

    return {kind: check_target(p, force=force) for kind, p in targets.items() if p is not None}


def _length(name, value, scale, *, allow_zero=False):
    if value is None:
        return None
    return check_positive(name, value, allow_zero=allow_zero) * scale


def run(
    points,
    *,
    closed=None,
    end: str = "not-a-knot",
    param: str = "chord",
    units: str = "mm",
    smooth=None,
    corner_angle=None,
    layer=None,
    machine=None,
    tool_diameter=None,
    feed=None,
    accel=None,
    side: str = "outside",
    tolerance: float = 0.01,
    moves: str = "arcs",
    depth=None,
    step_down=None,
    safe_height=None,
    seam=None,
    lead: str = "arc",
    direction: str = "climb",
    plunge_feed=None,
    lead_length=None,
    entry: str = "plunge",
    ramp_angle=None,
    retract_height=None,
    overlap=None,
    spindle_speed=None,
    one_feed: bool = False,
    line_numbers: bool = False,
    gcode=None,
    dxf=None,
    report=None,
    plot=None,
    force: bool = False,
    progress=None,
) -> Result:
    """Run the whole job on a points file or an (n, 2) array.

    Parameters
    ----------
    points : str, Path or array-like (n, 2)
        A points file (.csv .txt .xy .dxf) or the points themselves.
    closed : bool or None
        None: decided by the input (a repeated first point closes it).
    end, param : the fit's end condition and parametrization
        (see :func:`pathgen.spline.fit`).
    units : {"mm", "inch"}
        Units of the points and of every length option (feeds per minute).
    smooth : float or None
        Smoothing tolerance (units): the contour stays within it of every
        point.  None interpolates the points exactly.
    corner_angle : float, "off" or None
        Turning angle (degrees, below 180) above which a point is a sharp
        corner; "off": no corners; None: the input stage's default (40).
    layer : str or None
        DXF input: the layer holding the outline.
    machine : str, Path, Machine or None
        A machine profile (TOML file) or object; None for the defaults.
    tool_diameter, feed, accel : float or None
        Override the tool diameter (units), programmed feed (units/min) and
        machine acceleration (units/s²).
    side : {"outside", "inside", "on"}
    tolerance : float
        Chord tolerance (units): the written moves stay within it of the
        exact tool-center curve.
    moves : {"arcs", "lines"}
    depth, step_down, safe_height : float or None
        Total cut depth, depth per pass, clearance height (units).
    seam : (x, y) or None
        Start a closed cut at the contour point nearest to (x, y).
    lead : {"arc", "line", "none"}
    direction : {"climb", "conventional"}
        Milling direction with a clockwise (M3) spindle; see
        ``docs/toolpath.md`` for the rule relating side and travel.
    plunge_feed : float or None
        Feed of the plunge to depth (units/min); None: half the
        programmed feed (the toolpath stage's default).
    lead_length : float or None
        Lead size (units): arc radius or line length; None: the tool
        diameter.  Either way a lead that would touch the part shrinks.
    entry : {"plunge", "ramp", "helix"}
        How the tool goes down to each pass (see ``docs/toolpath.md``).
    ramp_angle : float or None
        Descent angle of a ramp or helix, degrees (0 < angle <= 45);
        None: 3 degrees.
    retract_height : float or None
        Height (units) just above the stock where entries start at feed
        and where passes link; None: 1 mm (0.04 inch), or the safe height
        if that is lower.
    overlap : float or None
        Length (units) to go on past the start of a closed cut before the
        lead-out; None: 0.
    spindle_speed : float or None
        rev/min; when given the program starts the spindle (S… M3) and
        stops it at the end (M5).
    one_feed : bool
        Write one constant cutting feed instead of the planned feed per block.
    line_numbers : bool
        Number the program's blocks (N words).
    gcode, dxf, report, plot : path or None
        Files to write.  ``report`` names the JSON report; a text version
        is written beside it with the suffix ``.txt``.
    force : bool
        Overwrite existing files.
    progress : callable(str) or None
        Called with each stage's name as it starts (for long work).

    Returns
    -------
    Result
    """
    check_option("units", units, UNITS)
    check_option("side", side, SIDES)
    check_option("moves", moves, MOVES)
    check_option("lead", lead, LEADS)
    check_option("direction", direction, ("climb", "conventional"))
    from .path.entry import ENTRIES

    check_option("entry", entry, ENTRIES)
    if ramp_angle is not None:
        ramp_deg = check_positive("ramp angle", ramp_angle)
        if ramp_deg > 45:
            raise InputError(f"ramp angle must be at most 45 degrees, got {ramp_angle!r}")
    if spindle_speed is not None:
        spindle_speed = check_positive("spindle speed", spindle_speed)
    scale = MM_PER_INCH if units == "inch" else 1.0
    tol_mm = check_positive("tolerance", tolerance) * scale
    tool_mm = _length("tool diameter", tool_diameter, scale, allow_zero=True)
    smooth_mm = _length("smooth", smooth, scale)
    if seam is not None:
        try:
            sx, sy = (float(v) * scale for v in seam)
        except (TypeError, ValueError):
            raise InputError(f"seam must be two numbers x,y, got {seam!r}") from None
        if not (math.isfinite(sx) and math.isfinite(sy)):
            raise InputError(f"seam must be finite, got {seam!r}")
        seam = (sx, sy)
    from .checks.machine import Cut, Machine, Tool, load_machine

    if gcode is not None and tool_mm is None and side != "on":
        raise InputError(f"a program cutting {side} the outline needs the tool diameter "
                         "(tool_diameter=, --tool-diameter), or side='on' (--side on) to follow the line")
    overrides = {"max_accel": _length("accel", accel, scale)}
    if isinstance(machine, Machine):
        mach = load_machine(None, **{**machine.__dict__, **{k: v for k, v in overrides.items() if v}})
    else:
        mach = load_machine(machine, **overrides)
    tool = Tool(tool_mm if tool_mm is not None else 0.0)
    cut_kw = {"side": side, "tolerance": tol_mm}
    if feed is not None:
        cut_kw["feed"] = check_positive("feed", feed) * scale
    cut = Cut(**cut_kw)
    targets = _check_targets({"gcode": gcode, "dxf": dxf, "report": report, "plot": plot}, force)
    if "report" in targets:
        txt = targets["report"].with_suffix(".txt")
        targets.update(_check_targets({"report_text": txt}, force))

    timings = {}
    note = progress or (lambda stage: None)

    def timed(stage, fn, *a, **kw):
        note(stage)
        t0 = time.perf_counter()
        value = fn(*a, **kw)
        timings[stage] = time.perf_counter() - t0
        return value

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
    from .points import clean_points, read_points

    if path is not None:
        outline = timed("read", read_points, path, units=units, layer=layer, closed=closed)
    else:
        outline = timed("read", clean_points, points, units=units, closed=closed)
    closed = outline.closed

    # -- fit -----------------------------------------------------------------
    from .outline import fit_outline

    kw = {"end": end, "param": param, "smooth": smooth_mm}
    if corner_angle == "off":
        kw["corner_angle"] = None
    elif corner_angle is not None:
        kw["corner_angle"] = check_positive("corner angle", corner_angle)
    contour = timed("fit", fit_outline, outline, **kw)

    # -- check -----------------------------------------------------------------
    # (Check, toolpath and the drawing's arcs do not depend on each other;
    # running them side by side in worker processes was measured at 10^6
    # points on the shared 2-core machine: no faster, 0.9 GB more memory.)
    from .checks.report import check

    rep = timed("check", check, contour, mach, tool, cut)
    facts = timed("facts", contour_facts, contour, rep)

    # -- toolpath --------------------------------------------------------------
    tp = None
    if "gcode" in targets or (tool_mm is not None and ("dxf" in targets or "plot" in targets)):
        from .path.build import make_toolpath

        kw = {"moves": moves, "lead": lead, "seam": seam, "units": units, "direction": direction}
        for name, value in (("depth", depth), ("step_down", step_down), ("safe_height", safe_height),
                            ("plunge_feed", plunge_feed)):
            if value is not None:
                kw[name] = _length(name.replace("_", " "), value, scale)
        kw["entry"] = entry
        if ramp_angle is not None:
            kw["ramp_angle"] = math.radians(float(ramp_angle))
        if lead_length is not None:
            kw["lead_length"] = _length("lead length", lead_length, scale)
        if overlap is not None:
            kw["overlap"] = _length("overlap", overlap, scale, allow_zero=True)
        if retract_height is not None:
            kw["retract_height"] = _length("retract height", retract_height, scale)
        elif units == "inch":
            kw["retract_height"] = min(0.04 * MM_PER_INCH, kw.get("safe_height", 5.0))
        tp = timed("toolpath", make_toolpath, contour, tool, cut, mach, **kw)

    # -- write -----------------------------------------------------------------
    import warnings

    files = {}
    notes = list(getattr(outline, "warnings", ()))
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        if "gcode" in targets:
            from .export.gcode import write_gcode

            files["gcode"] = timed("gcode", write_gcode, tp, targets["gcode"], force=force,
                                   source=Path(source).name, program_name=Path(targets["gcode"]).stem,
                                   spindle_speed=spindle_speed, single_feed=one_feed,
                                   line_numbers=line_numbers)
        if "report" in targets:
            from .export.report import write_report

            files["report"], files["report_text"] = timed(
                "report", write_report, rep, targets["report"], units=units, force=force, toolpath=tp)
        if "dxf" in targets:
            from .export.dxf import write_dxf
            from .path.build import contour_moves

            arcs = timed("dxf arcs", contour_moves, contour, tolerance=tol_mm, moves="arcs")
            files["dxf"] = timed("dxf", write_dxf, targets["dxf"], contour, toolpath=tp, arcs=arcs,
                                 report=rep, units=units, force=force)
        if "plot" in targets:
            from .export.plot import plot as draw

            files["plot"] = timed("plot", draw, targets["plot"], contour, toolpath=tp, report=rep,
                                  units=units, force=force)
    notes += [str(w.message) for w in caught if issubclass(w.category, UserWarning)]
    return Result(source, outline, contour, report=rep, toolpath=tp, facts=facts,
                  timings=timings, files=files, units=units, notes=tuple(notes))


# -- many files -----------------------------------------------------------------
#: Outputs :func:`run_batch` can write for each file, with their suffixes.
OUTPUT_SUFFIXES = {"gcode": ".nc", "report": ".report.json", "dxf": ".dxf", "plot": ".png"}


def points_files(directory) -> list[Path]:
    """The points files (.csv .txt .xy .dxf) of a folder, sorted by name."""
    d = Path(directory)
    if not d.is_dir():
        raise InputError(f"{d}: no such folder")
    return sorted(p for p in d.iterdir() if p.is_file() and p.suffix.lower() in POINT_SUFFIXES)


def _output_stems(files: list[Path]) -> list[str]:
    """Output names: the stem, or the full name when two stems collide."""
    from collections import Counter

    count = Counter(p.stem for p in files)
    return [p.stem if count[p.stem] == 1 else p.name.replace(".", "_") for p in files]


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
    try:
        result = run(source, **targets, **options)
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
