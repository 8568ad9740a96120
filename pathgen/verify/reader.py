"""Read a G-code program back into moves, in mm.

This reader is pathgen's own interpreter of the words pathgen writes and of
the words a hand edit commonly brings in.  It is written from the rules of
the NIST RS274/NGC interpreter document (Kramer, Proctor & Messina,
NISTIR 6556, 2000) and shares nothing with the G-code writer: it reads the
text as a controller would and replays the motion, so a program can be
checked on what it says, not on what the writer meant.

Words read
----------
* ``G0`` rapid, ``G1`` line, ``G2``/``G3`` clockwise / counter-clockwise arc
  in the XY plane with ``I``, ``J`` the center's offset from the arc's start
  (in both distance modes); ``G17`` XY plane; ``G20``/``G21`` inch / mm;
  ``G90``/``G91`` absolute / incremental; ``G94`` feed per minute; ``G40``
  cutter compensation off; ``G41``/``G42`` with ``D`` (cutter compensation
  at the control, tool left / right of travel) only when the caller asks
  for it (``compensation=True``): the moves are then the programmed part
  line, and ``Program.comp`` says which moves the control offsets.
* ``X Y Z I J`` (lengths), ``F`` feed per minute, ``S`` spindle speed,
  ``M3``/``M5`` spindle, ``M8``/``M9`` coolant, ``M2``/``M30`` end,
  ``N`` line numbers, comments in parentheses or after ``;``, and ``%``
  lines.

Anything else (another plane, radius-format arcs, cutter compensation on
when not asked for, tool changes, canned cycles) is refused with :class:`InputError` naming the
file and line: a move the reader cannot interpret is never guessed.

Rule breaks the reader can still interpret are collected as
:class:`Problem` records instead (``strict=False``) or raised
(``strict=True``):

* ``"exponent"``: a number in exponent notation (NISTIR 6556: numbers are
  fixed point);
* ``"arc radius"``: start and end radius of an arc differ by more than
  0.002 mm (0.0002 inch) (NISTIR 6556, center-format arcs);
* ``"no feed"``: a feed move (G1, G2, G3) before any F word;
* ``"no axis words"``: a motion word with no axis word;
* ``"after end"``: code after M2 / M30 (ignored);
* ``"no end"``: the program does not end with M2 or M30.

Units must be set (G20 or G21) before the first motion, and the distance
mode must not be unknown: a program that moves before either cannot be
interpreted and is refused.

Moves (:class:`Program`) are column arrays: ``kind`` (0 rapid, 1 line,
2 clockwise arc, 3 counter-clockwise arc: the numbers of the G words),
``start`` and ``end`` (k, 3), ``center`` (k, 2), ``feed`` (k,) mm/min,
``line`` (k,) the 1-based line of the file.  A G20 program is converted to
mm (1 inch = 25.4 mm exactly).  Axes not yet known (before the first move
names them) are NaN in a rapid's start.
"""

from __future__ import annotations

import math
import os
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..errors import InputError

__all__ = ["Problem", "Program", "read_gcode", "read_gcode_file", "ARC_RULE", "RAPID", "LINE", "ARC_CW", "ARC_CCW"]

# the numbers of the G words; the same as pathgen's move kinds, defined here again on purpose
RAPID, LINE, ARC_CW, ARC_CCW = 0, 1, 2, 3

#: NISTIR 6556, center-format arcs: start and end radius may differ by at most this (file units).
ARC_RULE = {"mm": 0.002, "inch": 0.0002}

_MM_PER_INCH = 25.4
_MAX_LINE = 256

_WORD = re.compile(r"([A-Za-z])[ \t]*([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)?")
# the plain motion block pathgen writes (upper case, one space apart, fixed point): read without the
# general tokenizer; anything else takes the general path, which applies the same rules
_NUM = r"(-?\d+(?:\.\d+)?)"
_FAST = re.compile(rf"(?:N\d{{1,5}} )?G([0-3])(?: X{_NUM})?(?: Y{_NUM})?(?: Z{_NUM})?(?: I{_NUM})?(?: J{_NUM})?"
                   rf"(?: F(\d+(?:\.\d+)?))?")
# G41/G42 are read only when the caller expects compensation: the control
# offsets such a program by a register, so its moves are the part line
_G_KNOWN = {0, 1, 2, 3, 17, 20, 21, 28, 40, 41, 42, 43, 49, 54, 55, 56, 57, 58, 59, 90, 91, 94}
_M_KNOWN = {2, 3, 4, 5, 6, 7, 8, 9, 30}
# T tool, H length-offset register (G43), D radius register (G41/G42): read,
# they move nothing; an O word (program number) stands alone on its line
_LETTERS = set("GMXYZIJFSNTHDO")


def _arc_rule(start, end, cx, cy, units, scale, lineno, problem) -> None:
    """NISTIR 6556, center-format arcs: the start and end radius (mm here)
    may differ by at most ARC_RULE (file units); a radius of 0 is no arc."""
    r0 = math.hypot(start[0] - cx, start[1] - cy)
    r1 = math.hypot(end[0] - cx, end[1] - cy)
    if abs(r0 - r1) > ARC_RULE[units] * scale or r0 == 0.0:
        f = 1.0 / scale
        problem(lineno, "arc radius",
                f"arc start radius {r0 * f:.6f} and end radius {r1 * f:.6f} {units} differ by "
                f"{abs(r0 - r1) * f:.6f}, more than {ARC_RULE[units]} {units} (NISTIR 6556)")


@dataclass(frozen=True)
class Problem:
    """A rule the program breaks, at ``line`` (1-based) of the file."""

    line: int
    rule: str
    message: str

    def to_dict(self) -> dict:
        return {"line": self.line, "rule": self.rule, "message": self.message}


@dataclass(frozen=True, eq=False)
class Program:
    """The moves a program makes, in mm, and the rules it breaks.

    Attributes
    ----------
    kind : (k,) int8, 0 rapid, 1 line, 2 clockwise arc, 3 counter-clockwise arc.
    start, end : (k, 3) float64, mm.  A rapid's start holds NaN for axes
        not known yet (the first moves of a program).
    center : (k, 2) float64, mm; arc centers (0 for rapids and lines).
    feed : (k,) float64, mm/min; 0 for rapids and for feed moves without F.
    line : (k,) int64, the file line of each move.
    units : "mm" or "inch", the units the file is written in.
    problems : tuple of :class:`Problem`.
    source : the file name (or "<text>").
    lines : number of lines in the file.
    comp, switch, register : cutter compensation (read with
        ``compensation=True``; else None): per move 0, 41 or 42 and +1 / -1
        where a block turns it on / off; the last D register.
    """

    kind: np.ndarray
    start: np.ndarray
    end: np.ndarray
    center: np.ndarray
    feed: np.ndarray
    line: np.ndarray
    units: str
    problems: tuple
    source: str = "<text>"
    lines: int = 0
    comp: np.ndarray | None = None  # (k,) int8: 0, 41 or 42, the compensation each move runs under
    switch: np.ndarray | None = None  # (k,) int8: +1 the block turns compensation on, -1 off, else 0
    register: int | None = None  # the D word last given

    def __len__(self) -> int:
        return len(self.kind)


def _fail(source, lineno, message):
    where = f"{source}, line {lineno}" if lineno else source
    raise InputError(f"{where}: {message}")


def read_gcode(text: str, *, source: str = "<text>", strict: bool = False, compensation: bool = False) -> Program:
    """Interpret a program's text into moves in mm.

    Parameters
    ----------
    text : str
        The program.
    source : str
        The file name, for messages.
    strict : bool
        Raise :class:`InputError` at the first rule break instead of
        collecting it in ``Program.problems``.
    compensation : bool
        Read G41/G42 (cutter compensation at the control, NISTIR 6556):
        the moves are the programmed part line.  False: a program that
        turns compensation on is refused (its tool path exists only at the
        control).

    Returns
    -------
    Program

    Raises
    ------
    InputError
        A word or construct the reader does not interpret, a motion before
        the units are set, a cutting move from an unknown position, or (with
        ``strict``) any rule break; the message names the file and line.

    Examples
    --------
    >>> p = read_gcode("G21 G90 G17 G94\\nG0 X0 Y0 Z1\\nG1 Z-1 F300\\nG2 X10 Y0 I5 J0\\nM2\\n")
    >>> p.kind.tolist(), p.end[-1].tolist(), p.center[-1].tolist(), p.line.tolist()
    ([0, 1, 2], [10.0, 0.0, -1.0], [5.0, 0.0], [2, 3, 4])
    """
    problems: list[Problem] = []

    def problem(lineno, rule, message):
        if strict:
            _fail(source, lineno, message)
        problems.append(Problem(lineno, rule, message))

    units = None
    incremental = None
    motion = None
    feed = 0.0
    ended = False
    after_end_noted = False
    pos = [math.nan, math.nan, math.nan]
    kinds, starts, ends, centers, feeds, lines = [], [], [], [], [], []
    comp_now, register, comps, switches = 0, None, [], []
    raw_lines = text.split("\n")
    if raw_lines and raw_lines[-1] == "":
        raw_lines.pop()
    fast = _FAST.fullmatch
    for lineno, raw in enumerate(raw_lines, start=1):
        code = raw.rstrip("\r")
        m = fast(code) if (incremental is False and units is not None and not ended and len(code) <= _MAX_LINE) \
            else None
        if m is not None:
            g, x, y, z, i_, j_, f_ = m.groups()
            g = int(g)
            arc = g >= 2
            if (x is not None or y is not None or z is not None) and arc == (i_ is not None or j_ is not None) \
                    and (f_ is None or float(f_) > 0):
                # a plain absolute move: the same rules as below, without the tokenizer
                motion = g
                if f_ is not None:
                    feed = float(f_)
                scale = _MM_PER_INCH if units == "inch" else 1.0
                start = pos
                end = [pos[0] if x is None else float(x) * scale, pos[1] if y is None else float(y) * scale,
                       pos[2] if z is None else float(z) * scale]
                center = (0.0, 0.0)
                if g:
                    if start[0] != start[0] or start[1] != start[1] or start[2] != start[2]:  # NaN: unknown
                        _fail(source, lineno, f"G{g} from an unknown position (give X, Y and Z first)")
                    if feed <= 0:
                        problem(lineno, "no feed", f"G{g} before any F word (the feed is not set)")
                    if arc:
                        cx = start[0] + (float(i_) * scale if i_ is not None else 0.0)
                        cy = start[1] + (float(j_) * scale if j_ is not None else 0.0)
                        _arc_rule(start, end, cx, cy, units, scale, lineno, problem)
                        center = (cx, cy)
                kinds.append(g)
                starts.append(start)
                ends.append(end)
                centers.append(center)
                feeds.append(feed * scale if g else 0.0)
                lines.append(lineno)
                comps.append(comp_now)
                switches.append(0)
                pos = end
                continue
        if len(code) > _MAX_LINE:
            problem(lineno, "line length", f"{len(code)} characters, more than {_MAX_LINE} (NISTIR 6556)")
        # comments: (...) on one line, or ; to the end of the line
        if "(" in code or ")" in code or ";" in code:
            out, depth = [], 0
            for ch in code:
                if depth:
                    if ch == ")":
                        depth = 0
                    elif ch == "(":
                        _fail(source, lineno, "'(' inside a comment")
                    continue
                if ch == "(":
                    depth = 1
                elif ch == ")":
                    _fail(source, lineno, "')' without '('")
                elif ch == ";":
                    break
                else:
                    out.append(ch)
            if depth:
                _fail(source, lineno, "comment not closed on its line")
            code = "".join(out)
        body = code.strip()
        if not body or body == "%":
            continue
        if body.startswith("/"):
            _fail(source, lineno, "block delete ('/') is not read: remove the line or the slash")
        words = _WORD.findall(body)
        if _WORD.sub("", body).strip(" \t"):
            junk = _WORD.sub("", body).strip(" \t")
            _fail(source, lineno, f"cannot read {junk[:20]!r} (words are a letter and a number)")
        if ended:
            if not after_end_noted:
                problem(lineno, "after end", f"code after the program end (M2/M30): ignored from line {lineno}")
                after_end_noted = True
            continue
        gs, ms, vals = [], [], {}
        for i, (letter, num) in enumerate(words):
            letter = letter.upper()
            if letter not in _LETTERS:
                hint = " (radius-format arcs are not read: give I and J)" if letter == "R" else ""
                _fail(source, lineno, f"word {letter}{num} is not one pathgen reads{hint}")
            if not num:
                _fail(source, lineno, f"letter {letter} is not followed by a number")
            if "e" in num or "E" in num:
                problem(lineno, "exponent", f"{letter}{num}: exponent notation is not allowed in G-code (NISTIR 6556)")
            if letter == "N":
                if i != 0:
                    _fail(source, lineno, "line number N is not at the start of the line")
                continue
            v = float(num)
            if letter == "G":
                g = int(v) if v == int(v) else None
                if g not in _G_KNOWN:
                    _fail(source, lineno, f"G{num} is not one pathgen reads (G0 G1 G2 G3 G17 G20 G21 G28 "
                                          "G40 G41 G42 G43 G49 G54-G59 G90 G91 G94)")
                gs.append(g)
            elif letter == "M":
                m = int(v) if v == int(v) else None
                if m not in _M_KNOWN:
                    _fail(source, lineno, f"M{num} is not one pathgen reads (M2 M3 M4 M5 M6 M7 M8 M9 M30)")
                ms.append(m)
            else:
                if letter in vals:
                    _fail(source, lineno, f"two {letter} words on one line")
                vals[letter] = v
        if "F" in vals:
            if not vals["F"] > 0:
                _fail(source, lineno, f"feed F{vals['F']:g} must be positive")
            feed = vals["F"]
        if "S" in vals and vals["S"] < 0:
            _fail(source, lineno, "negative spindle speed")
        motion_here = None
        for g in gs:
            if g in (20, 21):
                new = "inch" if g == 20 else "mm"
                if units is not None and new != units:
                    _fail(source, lineno, "the units change in the middle of the program")
                units = new
            elif g in (90, 91):
                incremental = g == 91
            elif g in (0, 1, 2, 3):
                if motion_here is not None:
                    _fail(source, lineno, "two motion words on one line")
                motion_here = g
        switch_here = 0
        if sum(g in (40, 41, 42) for g in gs) > 1:
            _fail(source, lineno, "two G words of one modal group (G40, G41, G42) on one line (NISTIR 6556)")
        if "D" in vals:
            register = int(vals["D"])
        for g in gs:
            if g in (41, 42):
                if not compensation:
                    _fail(source, lineno, f"G{g} is not one pathgen reads here: the program relies on the control's "
                                          "cutter compensation (its tool path is the part line offset by the "
                                          "D register); check it with the compensation option (--compensation "
                                          "machine)")
                if comp_now:
                    _fail(source, lineno, f"G{g} while cutter compensation is on (G40 first; NISTIR 6556)")
                if register is None:
                    _fail(source, lineno, f"G{g} without a D word (the register of the tool radius)")
                comp_now, switch_here = g, 1
            elif g == 40 and comp_now:
                comp_now, switch_here = 0, -1
        if "O" in vals and (len(words) != 1 or gs or ms):
            _fail(source, lineno, "a program number O stands alone on its line")
        if 28 in gs:
            # return home (NISTIR 6556, G28): the tool goes to a place the
            # program does not state; nothing after it is measured
            if axes_given := [a for a in "XYZ" if a in vals]:
                _fail(source, lineno, f"G28 with {''.join(axes_given)} (an intermediate point) is not read")
            pos = [math.nan, math.nan, math.nan]
            continue
        if motion_here is not None:
            motion = motion_here
        axes = {a: vals[a] for a in "XYZ" if a in vals}
        has_ij = "I" in vals or "J" in vals
        if axes or motion_here is not None:
            if units is None:
                _fail(source, lineno, "motion before the units are set (G20 or G21 must come first)")
            if motion is None:
                _fail(source, lineno, "axis words without a motion word (G0, G1, G2 or G3)")
            if not axes:
                problem(lineno, "no axis words", f"G{motion} without an axis word")
            else:
                scale = _MM_PER_INCH if units == "inch" else 1.0
                start = list(pos)
                end = list(pos)
                for i, a in enumerate("XYZ"):
                    if a in axes:
                        v = axes[a] * scale
                        if incremental:
                            if math.isnan(pos[i]):
                                _fail(source, lineno, f"incremental {a} move from an unknown position")
                            v = pos[i] + v
                        elif incremental is None:
                            _fail(source, lineno, "motion before the distance mode is set (G90 or G91)")
                        end[i] = v
                center = (0.0, 0.0)
                if motion != RAPID:
                    if any(math.isnan(c) for c in start):
                        _fail(source, lineno, f"G{motion} from an unknown position (give X, Y and Z first)")
                    if feed <= 0:
                        problem(lineno, "no feed", f"G{motion} before any F word (the feed is not set)")
                if motion in (ARC_CW, ARC_CCW):
                    if not has_ij:
                        _fail(source, lineno, f"G{motion} without I or J (the arc's center)")
                    cx = start[0] + vals.get("I", 0.0) * scale
                    cy = start[1] + vals.get("J", 0.0) * scale
                    _arc_rule(start, end, cx, cy, units, scale, lineno, problem)
                    center = (cx, cy)
                elif has_ij:
                    _fail(source, lineno, "I or J on a move that is not an arc")
                kinds.append(motion)
                starts.append(start)
                ends.append(end)
                centers.append(center)
                feeds.append(0.0 if motion == RAPID else feed * (_MM_PER_INCH if units == "inch" else 1.0))
                lines.append(lineno)
                comps.append(comp_now if switch_here >= 0 else 0)
                switches.append(switch_here)
                pos = end
        elif has_ij:
            _fail(source, lineno, "I or J without an arc move")
        if 2 in ms or 30 in ms:
            ended = True
    if not ended:
        problem(len(raw_lines), "no end", "the program does not end with M2 or M30")
    k = len(kinds)
    return Program(
        kind=np.asarray(kinds, np.int8).reshape(k),
        start=np.asarray(starts, np.float64).reshape(k, 3),
        end=np.asarray(ends, np.float64).reshape(k, 3),
        center=np.asarray(centers, np.float64).reshape(k, 2),
        feed=np.asarray(feeds, np.float64).reshape(k),
        line=np.asarray(lines, np.int64).reshape(k),
        units=units or "mm",
        problems=tuple(problems),
        source=source,
        lines=len(raw_lines),
        comp=np.asarray(comps, np.int8).reshape(k) if compensation else None,
        switch=np.asarray(switches, np.int8).reshape(k) if compensation else None,
        register=register if compensation else None,
    )


def read_gcode_file(path, *, strict: bool = False, compensation: bool = False) -> Program:
    """Read a program file (ASCII text) with :func:`read_gcode`."""
    p = Path(os.fspath(path))
    if not p.is_file():
        raise InputError(f"{p}: no such file")
    data = p.read_bytes()
    try:
        text = data.decode("ascii")
    except UnicodeDecodeError as exc:
        line = data[: exc.start].count(b"\n") + 1
        raise InputError(f"{p}, line {line}: a byte that is not ASCII text (is this a G-code program?)") from None
    return read_gcode(text, source=str(p), strict=strict, compensation=compensation)
