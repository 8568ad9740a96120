"""The program frame: the blocks around a toolpath that a shop's control expects.

A :class:`Frame` says what goes before and after the moves of a program:
program number, ``%`` delimiters, tool number and tool change, tool length
offset, work offset, spindle direction, coolant, return home, end code,
block numbering and comment style.  It never changes the moves themselves
(the one exception, ``arc_digits``, replaces arcs whose I or J would need
more integer digits than the control reads by lines within the tolerance,
and says so in the header).

The default ``Frame()`` writes exactly what pathgen wrote before frames
existed: ``G21 G90 G17 G94 G40``, ``S… M3`` when a spindle speed is given,
``M5``, ``M2``, comments in parentheses, no numbers.

A machine profile (TOML) sets the frame in its ``[program]`` table; the
keys and their meaning are listed in :data:`FRAME_KEYS` and in
``docs/gcode.md``.  Unknown keys are refused.

Words and their rules (NISTIR 6556, Kramer, Proctor and Messina, 2000):
``T`` selects a tool and ``M6`` changes to it; ``G43 H…`` turns the tool
length offset on (modal group 8); ``G54``–``G59`` select a work coordinate
system (modal group 12); ``M3``/``M4``/``M5`` spindle clockwise, counter-
clockwise, stop (M group 7); ``M7``/``M8``/``M9`` mist, flood, off (M group
8); ``G28`` return home (non-modal group 0); ``M2``/``M30`` end (M group 4).
The ``O`` program number and ``%`` delimiter lines are common practice of
ISO 6983 controls, not part of the NIST interpreter's language.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, fields

import numpy as np

from ..errors import InputError

__all__ = ["Frame", "FRAME_KEYS", "frame_from_table", "load_frame", "COMMENT_STYLES"]

COMMENT_STYLES = ("parentheses", "capitals", "semicolon")
COOLANTS = {"off": None, "flood": "M8", "mist": "M7"}
SPINDLES = {"clockwise": "M3", "counter-clockwise": "M4"}
END_CODES = ("M2", "M30")
WORK_OFFSETS = ("G54", "G55", "G56", "G57", "G58", "G59")

#: Profile keys of the ``[program]`` table and what they set.
FRAME_KEYS = {
    "number": "program number: an O line at the top, 1 to 9999",
    "percent": "true: a % line before and after the program",
    "tool": "tool number: a T word before the first move, 0 to 99",
    "tool_change": "true (default): M6 with the T word; false: the T word alone",
    "length_offset": "G43 with this H register before the first move (true: the tool number)",
    "radius_offset": "D register for cutter compensation at the control (default: the tool number, else 1)",
    "work_offset": "a work offset word before the first move: G54 to G59",
    "spindle": "spindle direction: clockwise (M3, default) or counter-clockwise (M4)",
    "coolant": "off (default), flood (M8) or mist (M7); M9 before the end",
    "return_home": "true: G28 (return home) after the last retract",
    "end_code": "M2 (default) or M30",
    "block_step": "number every block N10, N20, ... with this step (0: no numbers)",
    "comment_style": "parentheses (default), capitals (upper case in parentheses) or semicolon (; to the line end)",
    "arc_digits": "most integer digits an I or J word may have; arcs that need more are written as lines",
}


@dataclass(frozen=True)
class Frame:
    """What surrounds the moves of a program (see :data:`FRAME_KEYS`)."""

    number: int | None = None
    percent: bool = False
    tool: int | None = None
    tool_change: bool = True
    length_offset: int | None = None
    radius_offset: int | None = None
    work_offset: str | None = None
    spindle: str = "clockwise"
    coolant: str = "off"
    return_home: bool = False
    end_code: str = "M2"
    block_step: int = 0
    comment_style: str = "parentheses"
    arc_digits: int | None = None

    def __post_init__(self):
        _whole("number", self.number, 1, 9999, none=True)
        _whole("tool", self.tool, 0, 99, none=True)
        _whole("radius_offset", self.radius_offset, 0, 99, none=True)
        _whole("block_step", self.block_step, 0, 1000)
        _whole("arc_digits", self.arc_digits, 1, 9, none=True)
        for name in ("percent", "tool_change", "return_home"):
            if not isinstance(getattr(self, name), bool):
                raise InputError(f"{name} must be true or false, got {getattr(self, name)!r}")
        lo = self.length_offset
        if lo is True:
            if self.tool is None:
                raise InputError("length_offset = true takes the tool number, but no tool is given")
            object.__setattr__(self, "length_offset", self.tool)
        elif lo is False:
            object.__setattr__(self, "length_offset", None)
        else:
            _whole("length_offset", lo, 0, 99, none=True)
        _choice("work_offset", self.work_offset, WORK_OFFSETS, none=True)
        _choice("spindle", self.spindle, tuple(SPINDLES))
        _choice("coolant", self.coolant, tuple(COOLANTS))
        _choice("end_code", self.end_code, END_CODES)
        _choice("comment_style", self.comment_style, COMMENT_STYLES)

    @property
    def register(self) -> int:
        """The D register cutter compensation names."""
        if self.radius_offset is not None:
            return self.radius_offset
        return self.tool if self.tool else 1

    def start_blocks(self, spindle_speed_word: str | None) -> list[str]:
        """Blocks after the preamble and before the first move."""
        out = []
        if self.tool is not None:
            out.append(f"T{self.tool} M6" if self.tool_change else f"T{self.tool}")
        if self.work_offset is not None:
            out.append(self.work_offset)
        if self.length_offset is not None:
            out.append(f"G43 H{self.length_offset}")
        if spindle_speed_word is not None:
            out.append(f"{spindle_speed_word} {SPINDLES[self.spindle]}")
        if COOLANTS[self.coolant]:
            out.append(COOLANTS[self.coolant])
        return out

    def end_blocks(self, spindle_on: bool) -> list[str]:
        """Blocks after the last retract."""
        out = []
        if COOLANTS[self.coolant]:
            out.append("M9")
        if spindle_on:
            out.append("M5")
        if self.return_home:
            out.append("G28")
        out.append(self.end_code)
        return out

    def summary(self) -> str | None:
        """One header line naming what the frame writes (None for the default)."""
        parts = []
        if self.number is not None:
            parts.append(f"program O{self.number}")
        if self.tool is not None:
            parts.append(f"tool T{self.tool}" + (" with M6" if self.tool_change else ""))
        if self.length_offset is not None:
            parts.append(f"length offset H{self.length_offset}")
        if self.work_offset is not None:
            parts.append(f"work offset {self.work_offset}")
        if self.coolant != "off":
            parts.append(f"coolant {self.coolant}")
        if self.spindle != "clockwise":
            parts.append(f"spindle {self.spindle}")
        if self.return_home:
            parts.append("G28 at the end")
        if not parts:
            return None
        return "frame: " + ", ".join(parts)

    def style_comment(self, line: str) -> str:
        """A ``(text)`` comment line in this frame's comment style."""
        if self.comment_style == "parentheses":
            return line
        text = line[1:-1]
        if self.comment_style == "capitals":
            return "(" + text.upper() + ")"
        return "; " + text

    def wrap(self, text: str) -> str:
        """The program text with the O line and % lines when asked for."""
        if self.number is not None:
            text = f"O{self.number:04d}\n" + text
        if self.percent:
            text = "%\n" + text + "%\n"
        return text


def _whole(name, value, lo, hi, *, none=False):
    if value is None and none:
        return
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or not lo <= value <= hi:
        raise InputError(f"{name} must be a whole number from {lo} to {hi}, got {value!r}")


def _choice(name, value, valid, *, none=False):
    if value is None and none:
        return
    if not isinstance(value, str) or value not in valid:
        raise InputError(f"{name} = {value!r} is not one of: {', '.join(valid)}")


def frame_from_table(table: dict, where=lambda key: "") -> Frame:
    """A :class:`Frame` from a profile's ``[program]`` table (a dict).

    ``where(key)`` names the file and line for messages.  Unknown keys are
    refused.
    """
    if not isinstance(table, dict):
        raise InputError(f"{where('program')}program must be a table ([program]), got {table!r}")
    known = {f.name for f in fields(Frame)}
    for key in table:
        if key not in known:
            raise InputError(f"{where(key)}unknown key {key!r} in [program]; valid keys: {', '.join(FRAME_KEYS)}")
    try:
        return Frame(**table)
    except InputError as exc:
        key = str(exc).split(" ", 1)[0]
        raise InputError(f"{where(key)}{exc}") from None


def load_frame(path) -> Frame:
    """The frame of a machine profile's ``[program]`` table (default when absent).

    >>> load_frame(None) == Frame()
    True
    """
    if path is None:
        return Frame()
    from pathlib import Path

    from ..checks.machine import read_toml, toml_line

    path = Path(path)
    data, text = read_toml(path)

    def where(key):
        line = toml_line(text, key)
        return f"{path}, line {line}: " if line else f"{path}: "

    if "program" not in data:
        return Frame()
    return frame_from_table(data["program"], where)


def lines_for_wide_arcs(tp, digits: int, decimals: int):
    """``tp`` with every arc whose I or J needs more than ``digits`` integer
    digits replaced by chords, and the number of arcs replaced.

    The chords' sagitta r − √(r² − c²/4) stays within what the tolerance
    leaves (tolerance − measured deviation, at least a tenth of the
    tolerance); the new deviation adds the largest sagitta written.
    """
    from ..path.model import ARC_CCW, ARC_CW, LINE, Toolpath, arc_sweep

    limit = 10.0**digits - 10.0 ** (-decimals)
    arcs = np.flatnonzero(tp.kind >= ARC_CW)
    if arcs.size == 0:
        return tp, 0
    off = np.abs(tp.center[arcs] - tp.start[arcs, :2]).max(axis=1)
    wide = arcs[off > limit]
    if wide.size == 0:
        return tp, 0
    budget = tp.tolerance - tp.deviation
    if budget < 1e-3 * tp.tolerance:
        from ..errors import ExportError

        raise ExportError(f"arc_digits = {digits}: {wide.size} arc(s) need wider I/J words, and the tolerance "
                          f"leaves no room to write them as lines; raise arc_digits or use moves = lines")
    rows = {int(i) for i in wide}
    kind, start, end, center, feed = [], [], [], [], []
    worst = 0.0
    for i in range(len(tp)):
        if i not in rows:
            kind.append(tp.kind[i]), start.append(tp.start[i]), end.append(tp.end[i])
            center.append(tp.center[i]), feed.append(tp.feed[i])
            continue
        s, e, c = tp.start[i], tp.end[i], tp.center[i]
        ccw = tp.kind[i] == ARC_CCW
        r = float(np.hypot(*(s[:2] - c)))
        sweep = float(arc_sweep(s[:2], e[:2], c, ccw))
        # chord angle with sagitta r(1 - cos(a/2)) <= budget
        a_max = 2.0 * math.acos(max(-1.0, 1.0 - budget / r))
        k = max(1, math.ceil(sweep / a_max))
        a0 = math.atan2(s[1] - c[1], s[0] - c[0])
        ang = a0 + (1 if ccw else -1) * sweep * np.arange(k + 1) / k
        pts = np.column_stack([c[0] + r * np.cos(ang), c[1] + r * np.sin(ang), np.linspace(s[2], e[2], k + 1)])
        pts[0], pts[-1] = s, e
        worst = max(worst, r * (1.0 - math.cos(sweep / k / 2.0)))
        for j in range(k):
            kind.append(LINE), start.append(pts[j]), end.append(pts[j + 1])
            center.append(np.zeros(2)), feed.append(tp.feed[i])
    info = dict(tp.info)
    info["arcs_as_lines"] = int(wide.size)
    out = Toolpath(np.array(kind, np.int8), np.array(start), np.array(end), np.array(center), np.array(feed),
                   units=tp.units, tool_diameter=tp.tool_diameter, side=tp.side, tolerance=tp.tolerance,
                   deviation=tp.deviation + worst, time=tp.time, info=info)
    return out, int(wide.size)
