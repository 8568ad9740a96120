"""One job's options, checked once: :class:`JobOptions`.

The command line and the API build one :class:`JobOptions` from what the
user typed (:meth:`JobOptions.from_user`, lengths in the user's units,
angles in degrees) and hand it to :func:`pathgen.pipeline.run` or
:func:`pathgen.partjob.run_part`.  Every check of an option happens here,
with the messages the user sees; inside, the values are trusted.

What an object holds
--------------------
* lengths in mm, feeds in mm/min, acceleration in mm/s² (an inch job's
  values are multiplied by 25.4 here, once);
* angles in radians (``corner_angle``, ``ramp_angle``);
* choices checked against the one list each in :mod:`pathgen._options`;
* ``None`` for an option not given, where the stage that uses it has its
  own default (the depth, the plunge feed, ...).  ``corner_angle=None``
  means "no corner detection", as in :func:`pathgen.outline.fit_outline`;
  the default is 40 degrees.

``units`` stays the user's ("mm" or "inch"): the outputs are written in it.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, field, fields
from pathlib import Path

from ._options import (COMPENSATIONS, ENTRIES, LEADS, MILLING_DIRECTIONS, MM_PER_INCH, MOVES, SIDES,
                       UNITS, check_flag, check_option, check_positive)
from .errors import InputError

__all__ = ["JobOptions", "JobResult", "DEFAULT_TOLERANCE", "DEFAULT_CORNER_ANGLE"]

#: Chord tolerance when none is given (mm), for mm and inch jobs alike.
DEFAULT_TOLERANCE = 0.01
#: Turning angle above which a point is a sharp corner when none is given
#: (degrees, as the user gives it; the object holds radians).
DEFAULT_CORNER_ANGLE = 40.0


@dataclass(frozen=True, eq=False, kw_only=True)
class JobResult:
    """What every job returns beside its geometry: the fields and the exit
    status :class:`pathgen.pipeline.Result` (one outline) and
    :class:`pathgen.partjob.PartResult` (a part) share.  Given by keyword.

    toolpath : the Toolpath (mm), or None when none was asked for.
    files : kind ("gcode", "dxf", "report", "report_text", "plot") → path written.
    facts : plain numbers about the contour or the part (mm).
    timings : stage → wall seconds.
    units : the units the user works in ("mm" or "inch"); the written files
        speak them, every value in the result is mm.
    notes : warnings for the user, plain sentences.
    """

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


@dataclass(frozen=True)
class JobOptions:
    """A job's options, checked, in mm and radians (build with :meth:`from_user`).

    Every attribute is the option of the same name of :meth:`from_user`,
    converted: lengths mm, feeds mm/min, ``accel`` mm/s², ``corner_angle``
    and ``ramp_angle`` radians, ``seam`` an (x, y) pair in mm, ``smooth``
    "auto", "off" or a distance in mm.  ``units`` is the user's ("mm" or
    "inch"), the units the outputs are written in.  ``units_given`` is
    False when no units were given and none were found in the input (mm
    by default).

    Examples
    --------
    >>> o = JobOptions.from_user(units="inch", tool_diameter=0.25, ramp_angle=3)
    >>> o.units, round(o.tool_diameter, 9), round(o.ramp_angle, 6), o.tolerance
    ('inch', 6.35, 0.05236, 0.01)
    >>> JobOptions.from_user(side="under")
    Traceback (most recent call last):
    ...
    pathgen.errors.InputError: side='under' is not one of: 'outside', 'inside', 'on'
    """

    units: str = "mm"
    units_given: bool = False
    closed: bool | None = None
    end: str = "not-a-knot"
    param: str = "chord"
    smooth: object = "auto"
    corner_angle: float | None = math.radians(DEFAULT_CORNER_ANGLE)
    find_arcs: bool = True
    layer: str | None = None
    machine: object = None
    accel: float | None = None
    tool_diameter: float | None = None
    feed: float | None = None
    flutes: int | None = None
    chip_load: float | None = None
    spindle_speed: float | None = None
    side: str = "outside"
    tolerance: float = DEFAULT_TOLERANCE
    moves: str = "arcs"
    depth: float | None = None
    step_down: float | None = None
    safe_height: float | None = None
    seam: tuple | None = None
    lead: str = "arc"
    direction: str = "climb"
    plunge_feed: float | None = None
    lead_length: float | None = None
    entry: str = "plunge"
    ramp_angle: float | None = None
    retract_height: float | None = None
    overlap: float | None = None
    one_feed: bool = False
    line_numbers: bool = False
    allow_crossing: bool = False
    compensation: str = "computed"
    join_gap: float | None = None
    sides: dict | None = None
    tabs: int | None = None
    tab_spacing: float | None = None
    tab_width: float | None = None
    tab_height: float | None = None

    @property
    def scale(self) -> float:
        """mm per unit of the user's units (25.4 for inch jobs, else 1)."""
        return MM_PER_INCH if self.units == "inch" else 1.0

    @property
    def corner_angle_degrees(self) -> float | None:
        """The corner angle in degrees (the fit stage's unit), None for no corners."""
        return None if self.corner_angle is None else math.degrees(self.corner_angle)

    @classmethod
    def from_user(cls, points=None, *, units=None, closed=None, end: str = "not-a-knot",
                  param: str = "chord", smooth="auto", corner_angle=DEFAULT_CORNER_ANGLE, find_arcs=True, layer=None,
                  machine=None, tool_diameter=None, feed=None, accel=None, side: str = "outside",
                  tolerance=None, moves: str = "arcs", depth=None, step_down=None, safe_height=None,
                  seam=None, lead: str = "arc", direction: str = "climb", plunge_feed=None,
                  lead_length=None, entry: str = "plunge", ramp_angle=None, retract_height=None,
                  overlap=None, spindle_speed=None, flutes=None, chip_load=None, one_feed: bool = False,
                  line_numbers: bool = False, allow_crossing: bool = False,
                  compensation: str = "computed", join_gap=None, sides=None, tabs=None,
                  tab_spacing=None, tab_width=None, tab_height=None) -> "JobOptions":
        """Check a job's options as the user gives them and convert them.

        Parameters
        ----------
        points : str, Path, array-like or None
            The job's input, only to read a drawing's declared units
            ($INSUNITS) when ``units`` is not given.
        units : {"mm", "inch"} or None
            Units of the points and of every length option (feeds per
            minute).  None: a drawing's own units, else mm.  Given units
            that disagree with the drawing's are an error.
        closed : bool or None
            None: decided by the input (a repeated first point closes it).
        end, param : the fit's end condition and parametrization
            (see :func:`pathgen.spline.fit`).
        smooth : "auto", "off", float or None
            "auto" (default): estimate the points' noise
            (:func:`pathgen.noise.estimate_noise`) and, when it can fake
            curvature, smooth to it (Reinsch's criterion); clean points are
            interpolated exactly.  "off" (or None): interpolate exactly.  A
            number: smoothing tolerance (units), the contour stays within it
            of every point.
        corner_angle : float, "off" or None
            Turning angle (degrees, below 180) above which a point is a
            sharp corner; default 40.  "off" or None: no corners (the same
            meaning as in :func:`pathgen.outline.fit_outline`).
        find_arcs : bool
            Points files: find drawn lines and circular arcs in the points
            (runs of at least 8 points within the points' rounding of one
            line or circle) and keep them exact (:mod:`pathgen.primitives`);
            False: fit splines only.
        layer : str or None
            DXF input: the layer holding the outline.
        machine : str, Path, Machine or None
            A machine profile (TOML file) or object; None for the defaults.
        tool_diameter, feed, accel : float or None
            Override the tool diameter (units), programmed feed (units/min)
            and machine acceleration (units/s²).
        side : {"outside", "inside", "on"}
        tolerance : float or None
            Chord tolerance (units): the written moves stay within it of the
            exact tool-center curve.  None: 0.01 mm (0.00039 inch), the same
            length in either unit.
        moves : {"arcs", "lines"}
        depth, step_down, safe_height : float or None
            Total cut depth, depth per pass, clearance height (units).
        seam : (x, y) or None
            Start a closed cut at the contour point nearest to (x, y) (units).
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
            and where passes link; None: 1 mm (0.04 inch), or the safe
            height if that is lower.
        overlap : float or None
            Length (units) to go on past the start of a closed cut before
            the lead-out; None: 0.
        spindle_speed : float or None
            rev/min; when given the program starts the spindle (S… M3) and
            stops it at the end (M5).
        flutes, chip_load : int, float or None
            Cutting edges of the tool and chip load per tooth (units):
            without ``feed``, the cutting feed is flutes × chip load ×
            spindle speed.  Any feed above the machine's highest feed is
            capped to it, with a note.
        one_feed : bool
            Write one constant cutting feed instead of the planned feed per
            block.
        line_numbers : bool
            Number the program's blocks (N words).
        allow_crossing : bool
            Follow a closed outline that crosses itself (a deliberate
            figure, engraved with ``side="on"``); otherwise such an outline
            is refused for cutting.
        compensation : {"computed", "machine"}
            "computed" (default): the program is the tool-center path
            pathgen computed.  "machine": the program follows the part line
            with G41/G42 and a D word, for cutter compensation at the
            control (the register from the profile's ``[program]`` table).
        join_gap, sides, tabs, tab_spacing, tab_width, tab_height
            For parts (see :func:`pathgen.partjob.run_part`); lengths in
            units.

        Returns
        -------
        JobOptions

        Raises
        ------
        InputError
            An option is not one of its allowed values, not a number, out of
            its range, or options contradict each other; the message names
            the option (and its command-line spelling where that helps).
        """
        units, units_given = _job_units(points, units)
        scale = MM_PER_INCH if units == "inch" else 1.0
        closed = check_flag("closed", closed)
        check_option("side", side, SIDES)
        check_option("moves", moves, MOVES)
        check_option("lead", lead, LEADS)
        check_option("direction", direction, MILLING_DIRECTIONS)
        check_option("compensation", compensation, COMPENSATIONS)
        check_option("entry", entry, ENTRIES)
        ramp = None
        if ramp_angle is not None:
            ramp_deg = check_positive("ramp angle", ramp_angle)
            if ramp_deg > 45:
                raise InputError(f"ramp angle must be at most 45 degrees, got {ramp_angle!r}")
            ramp = math.radians(float(ramp_angle))
        if spindle_speed is not None:
            spindle_speed = check_positive("spindle speed", spindle_speed)
        tol_mm = DEFAULT_TOLERANCE if tolerance is None else check_positive("tolerance", tolerance) * scale
        tool_mm = _length("tool diameter", tool_diameter, scale, allow_zero=True)
        if smooth is None:
            smooth = "off"
        if isinstance(smooth, str):
            check_option("smooth", smooth, ("auto", "off"))
            smooth_mm = smooth
        else:
            smooth_mm = _length("smooth", smooth, scale)
        if seam is not None:
            try:
                sx, sy = (float(v) * scale for v in seam)
            except (TypeError, ValueError):
                raise InputError(f"seam must be two numbers x,y, got {seam!r}") from None
            if not (math.isfinite(sx) and math.isfinite(sy)):
                raise InputError(f"seam must be finite, got {seam!r}")
            seam = (sx, sy)
        if corner_angle is None or corner_angle == "off":
            corner = None
        else:
            deg = check_positive("corner angle", corner_angle)
            if deg >= 180.0:
                raise InputError(f"corner angle must be below 180 degrees, got {corner_angle!r}")
            corner = math.radians(deg)
        accel_mm = _length("accel", accel, scale)
        if compensation == "machine" and (tool_mm is None or tool_mm == 0 or side == "on"):
            raise InputError("cutter compensation at the control (--compensation machine) needs a tool diameter "
                             "and a side outside or inside the outline")
        feed_mm, flutes, chip_mm = _feed_options(feed, flutes, chip_load, spindle_speed, scale)
        return cls(
            units=units, units_given=units_given, closed=closed, end=end, param=param, smooth=smooth_mm,
            corner_angle=corner, find_arcs=bool(find_arcs), layer=layer, machine=machine, accel=accel_mm, tool_diameter=tool_mm,
            feed=feed_mm, flutes=flutes, chip_load=chip_mm, spindle_speed=spindle_speed, side=side,
            tolerance=tol_mm, moves=moves,
            depth=_length("depth", depth, scale), step_down=_length("step down", step_down, scale),
            safe_height=_length("safe height", safe_height, scale), seam=seam, lead=lead,
            direction=direction, plunge_feed=_length("plunge feed", plunge_feed, scale),
            lead_length=_length("lead length", lead_length, scale), entry=entry, ramp_angle=ramp,
            retract_height=_length("retract height", retract_height, scale),
            overlap=_length("overlap", overlap, scale, allow_zero=True),
            one_feed=bool(one_feed), line_numbers=bool(line_numbers), allow_crossing=bool(allow_crossing),
            compensation=compensation, join_gap=_length("join gap", join_gap, scale),
            sides=None if sides is None else dict(sides), tabs=tabs,
            tab_spacing=_length("tab spacing", tab_spacing, scale),
            tab_width=_length("tab width", tab_width, scale),
            tab_height=_length("tab height", tab_height, scale))

    def given(self) -> dict:
        """The options that differ from their defaults (name → value, mm and radians)."""
        default = JobOptions()
        return {f.name: getattr(self, f.name) for f in fields(self)
                if getattr(self, f.name) != getattr(default, f.name)}


def _length(name, value, scale, *, allow_zero=False):
    """A length (or feed) option in mm: None stays None; checked finite and > 0 (or >= 0)."""
    if value is None:
        return None
    return check_positive(name, value, allow_zero=allow_zero) * scale


def _job_units(points, units):
    """The job's units and whether they were given or declared: a drawing's
    declared units ($INSUNITS) unless given; given units that disagree with
    the drawing's are an error naming both."""
    if units is not None:
        check_option("units", units, UNITS)
    declared = None
    if isinstance(points, (str, os.PathLike)) and str(points).lower().endswith(".dxf") and Path(points).is_file():
        from .points import drawing_units

        declared = drawing_units(points)
    if units is None:
        return declared or "mm", declared is not None
    if declared is not None and declared != units:
        raise InputError(f"{Path(points).name}: the drawing declares its units as {declared} ($INSUNITS) but "
                         f"units {units} were given; give --units {declared} or leave --units out")
    return units, True


def _feed_options(feed, flutes, chip_load, spindle_speed, scale):
    """The feed options checked: (feed mm/min or None, flutes or None, chip load mm or None).

    A feed from the chip load needs flutes, chip load and spindle speed
    together (checked here, whether or not a feed is also given, as before).
    """
    given = [v is not None for v in (flutes, chip_load)]
    if any(given) and not all(given):
        raise InputError("a feed from the chip load needs both flutes (--flutes) and chip load (--chip-load)")
    if feed is not None:
        feed = check_positive("feed", feed) * scale
    elif not all(given):
        return None, None, None
    elif spindle_speed is None:
        raise InputError("a feed from the chip load needs the spindle speed (--spindle-speed)")
    if not all(given):
        return feed, None, None
    z = check_positive("flutes", flutes)
    if z != int(z) or z > 100:
        raise InputError(f"flutes must be a whole number from 1 to 100, got {flutes!r}")
    return feed, int(z), check_positive("chip load", chip_load) * scale


def cutting_feed(options: JobOptions, machine):
    """The cutting feed (mm/min or None for the default) and notes about it.

    Given ``feed`` wins; else flutes × chip load × spindle speed (common
    practice; sources: chip-load) when all three are given.  A feed above
    the machine's highest feed is capped to it and said.
    """
    o, scale = options, options.scale
    u = "inch" if o.units == "inch" else "mm"
    notes = []
    if o.feed is not None:
        f = o.feed
        source = "the feed asked for"
    elif o.flutes is not None:
        z, fz = o.flutes, o.chip_load
        f = z * fz * o.spindle_speed
        source = (f"the feed from the chip load ({z} flutes x {fz / scale:g} {u} x "
                  f"{o.spindle_speed:g} rev/min = {f / scale:.6g} {u}/min)")
        notes.append(f"cutting feed {f / scale:.6g} {u}/min from {z} flutes x {fz / scale:g} {u} "
                     f"per tooth x {o.spindle_speed:g} rev/min")
    else:
        return None, notes
    if f > machine.max_feed:
        notes.append(f"{source} is above the machine's highest feed {machine.max_feed / scale:.6g} {u}/min: "
                     f"capped to {machine.max_feed / scale:.6g} {u}/min")
        f = machine.max_feed
    return f, notes


def load_job_machine(options: JobOptions):
    """The job's :class:`pathgen.checks.machine.Machine`: the profile (or
    object, or defaults) with the acceleration override applied."""
    from .checks.machine import Machine, load_machine

    overrides = {"max_accel": options.accel}
    machine = options.machine
    if isinstance(machine, Machine):
        return load_machine(None, **{**machine.__dict__, **{k: v for k, v in overrides.items() if v}})
    return load_machine(machine, **overrides)


def job_options(points, options, kwargs: dict) -> JobOptions:
    """The options of a job on ``points``: ``options`` as given (checked
    against a drawing's declared units), or built from the user's keyword
    options ``kwargs``; giving both is an error."""
    if options is None:
        return JobOptions.from_user(points, **kwargs)
    if not isinstance(options, JobOptions):
        raise InputError(f"options must be a JobOptions (JobOptions.from_user(...)), got {type(options).__name__}")
    if kwargs:
        raise InputError(f"give the options as a JobOptions or as keywords, not both (got {', '.join(sorted(kwargs))}"
                         " beside options=)")
    if not options.units_given:
        declared, found = _job_units(points, None)
        if found and declared != options.units:
            raise InputError(f"{Path(points).name}: the drawing declares its units as {declared} ($INSUNITS) but "
                             f"the options are in {options.units}; build them from the drawing "
                             f"(JobOptions.from_user(path, ...)) or give units={declared!r}")
    return options
