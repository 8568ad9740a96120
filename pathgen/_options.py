"""Shared conventions: option checking, units, named tolerances.

Conventions used everywhere in pathgen
--------------------------------------
* Lengths are millimetres inside; inches are converted at the boundary
  (reading and writing).  ``MM_PER_INCH = 25.4`` exactly.
* Angles are radians inside.
* Counter-clockwise is positive: signed curvature is positive on a left
  turn, closed outlines are normalized to counter-clockwise, and a positive
  offset lies to the left of the direction of travel.
* Cutting side: "outside" cuts to the right of the direction of travel
  (outside of a counter-clockwise closed outline), "inside" to the left
  (a pocket or hole), "on" follows the line itself.  ``side_sign`` gives
  the sign of the offset along the left normal: -1, +1, 0.  The tool of
  radius r cannot reach where side_sign * curvature * r >= 1 (the contour
  bends toward the tool with radius R <= r).
"""

from __future__ import annotations

import math
from collections.abc import Iterable

from .errors import InputError

__all__ = [
    "check_option",
    "check_positive",
    "MM_PER_INCH",
    "UNITS",
    "CLOSE_RTOL",
    "SIDES",
    "side_sign",
]

MM_PER_INCH = 25.4
UNITS = ("mm", "inch")

#: Relative tolerance (to the outline's size, the bounding-box diagonal)
#: under which two points count as the same point.
CLOSE_RTOL = 1e-9


#: The caution every output carries (command line, program header, report,
#: drawing, picture): one text, in two sentences so that each fits a G-code
#: comment line.
CAUTION_LINES = (
    "CAUTION: pathgen does not know your machine, fixturing, tool stick-out, material or work offsets.",
    "Verify every program by simulation or an air cut, following your shop's practice and local "
    "safety rules, before cutting.",
)
CAUTION = " ".join(CAUTION_LINES)

SIDES = ("outside", "inside", "on")
#: The allowed values of a job's choice options (one list each; the
#: options object, the pipeline and the command line use these).
MOVES = ("arcs", "lines")
LEADS = ("arc", "line", "none")
#: Milling direction with a clockwise (M3) spindle.
MILLING_DIRECTIONS = ("climb", "conventional")
#: Who offsets the tool: pathgen (the tool-center path) or the control (G41/G42).
COMPENSATIONS = ("computed", "machine")
ENTRIES = ("plunge", "ramp", "helix")


def side_sign(side: str) -> int:
    """Sign of the tool offset along the left normal for a cutting side.

    >>> side_sign("outside"), side_sign("inside"), side_sign("on")
    (-1, 1, 0)
    """
    return {"outside": -1, "inside": 1, "on": 0}[check_option("side", side, SIDES)]


def check_option(name: str, value, valid: Iterable[str]) -> str:
    """Return ``value`` if it is one of ``valid``, else raise InputError.

    >>> check_option("end", "natural", ("natural", "clamped"))
    'natural'
    >>> check_option("end", "loose", ("natural", "clamped"))
    Traceback (most recent call last):
    ...
    pathgen.errors.InputError: end='loose' is not one of: 'natural', 'clamped'
    """
    valid = tuple(valid)
    if not isinstance(value, str) or value not in valid:
        choices = ", ".join(repr(v) for v in valid)
        raise InputError(f"{name}={value!r} is not one of: {choices}")
    return value


def check_positive(name: str, value, *, allow_zero: bool = False) -> float:
    """Return ``value`` as float if finite and > 0 (or >= 0), else raise.

    >>> check_positive("tolerance", 0.01)
    0.01
    >>> check_positive("tolerance", -1)
    Traceback (most recent call last):
    ...
    pathgen.errors.InputError: tolerance must be a finite number > 0, got -1
    """
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{name} must be a number, got {value!r}") from None
    ok = math.isfinite(v) and (v >= 0 if allow_zero else v > 0)
    if not ok:
        bound = ">= 0" if allow_zero else "> 0"
        raise InputError(f"{name} must be a finite number {bound}, got {value!r}")
    return v


def check_flag(name: str, value, *, allow_none: bool = True):
    """Return ``value`` as a bool (or None where allowed); refuse anything else.

    A string such as "no" is truthy in Python: taking it as True would
    silently close an open outline, so it is an error here.

    >>> check_flag("closed", True), check_flag("closed", None)
    (True, None)
    >>> check_flag("closed", "no")
    Traceback (most recent call last):
    ...
    pathgen.errors.InputError: closed must be True, False or None, got 'no'
    """
    if value is None and allow_none:
        return None
    if isinstance(value, bool) or (getattr(value, "dtype", None) is not None
                                   and value.dtype.kind == "b" and getattr(value, "ndim", 1) == 0):
        return bool(value)
    allowed = "True, False or None" if allow_none else "True or False"
    raise InputError(f"{name} must be {allowed}, got {value!r}")


def duration_text(seconds) -> str:
    """A time estimate for people: "8.4 s", "2 min 05.0 s", "1 h 02 min 05.0 s";
    "not estimated" when there is none (not finite, or not positive).

    >>> duration_text(8.44), duration_text(125.0), duration_text(3725.0)
    ('8.4 s', '2 min 05.0 s', '1 h 02 min 05.0 s')
    """
    s = float(seconds)
    if not math.isfinite(s) or s <= 0:
        return "not estimated"
    if s < 60:
        return f"{s:.1f} s"
    m, sec = divmod(s, 60.0)
    if m < 60:
        return f"{int(m)} min {sec:04.1f} s"
    h, m = divmod(int(m), 60)
    return f"{h} h {m:02d} min {sec:04.1f} s"
