"""A small, independent interpreter of the G-code subset pathgen writes.

Written for the tests from the rules of the NIST RS274/NGC interpreter
document (Kramer, Proctor, Messina, NISTIR 6556, 2000), section numbers
beside each rule.  It shares no code with ``pathgen.export.gcode``: it reads
the text the way a controller would and replays the motion, so that the
tests check the writer against the standard's rules, not against itself.

Supported subset: G0 G1 G2 G3 (motion, group 1), G17 (plane, group 2),
G90 (distance, group 3), G94 (feed mode, group 5), G20 G21 (units,
group 6), G40 G41 G42 (cutter radius compensation, group 7), G43 (tool
length offset, group 8), G54-G59 (work coordinate system, group 12), G28
(return home, non-modal group 0), M2 M30 (stop, M group 4), M6 (tool
change, M group 6), M3 M4 M5 (spindle, M group 7), M7 M8 M9 (coolant, M
group 8), words X Y Z I J F S T H D, line numbers N, comments.  Outside
the NIST language, as common practice of ISO 6983 controls (from memory):
a ``%`` line first and last, an ``O`` program-number line as the first
code line, and ``;`` comments to the end of the line.
Anything else is refused with a :class:`GcodeError` naming the line.

Cutter radius compensation (NISTIR 6556, the cutter radius compensation
section; sources: nistir-6556; with the common practice of the trade):
G41/G42 need a D word and may not be given while compensation is on; the
block that turns it on must be a straight G1 move, and so must the first
move after it (no arc as the first compensated move); G40 goes on a
straight move.  Each move records the compensation it ran under, so tests
can offset the programmed line by the tool radius themselves.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field

import numpy as np

# §3.3.2.1: optional sign, digits, optional point, digits; at least one digit; no exponent
_NUMBER = re.compile(r"[+-]?(?:\d+\.?\d*|\.\d+)")
_LETTERS = set("GMXYZIJFSTHD")

# Table 4 (§3.4) modal groups of the G codes in the subset
_G_GROUP = {0: 1, 1: 1, 2: 1, 3: 1, 17: 2, 90: 3, 94: 5, 20: 6, 21: 6, 40: 7, 41: 7, 42: 7, 43: 8, 28: 0,
            54: 12, 55: 12, 56: 12, 57: 12, 58: 12, 59: 12}
_M_GROUP = {2: 4, 30: 4, 6: 6, 3: 7, 4: 7, 5: 7, 7: 8, 8: 8, 9: 8}

# §3.5.3.2: allowed difference of start and end radius of a center-format arc
_ARC_RULE = {"mm": 0.002, "inch": 0.0002}


class GcodeError(ValueError):
    """The program breaks a rule of the subset; the message names the line."""


@dataclass(frozen=True)
class Move:
    """One replayed motion: ``g`` is 0..3, points are (x, y, z)."""

    g: int
    start: tuple
    end: tuple
    center: tuple | None
    feed: float
    line: int
    comp: str = "G40"  # G40, G41 or G42: the compensation this move ran under
    register: int | None = None  # the D word in force
    comp_change: str | None = None  # "on" or "off" when this block turned it on or off


@dataclass
class Program:
    units: str | None = None
    moves: list = field(default_factory=list)
    comments: list = field(default_factory=list)
    spindle: list = field(default_factory=list)  # (line, "M3"/"M5", speed)
    numbers: list = field(default_factory=list)  # (line, letter, raw text) of every word
    ended: bool = False
    end_word: str = ""
    events: list = field(default_factory=list)  # (line, word) of T, M6, G43 Hn, G54.., M3/M4, M7/M8/M9, G28
    number: int | None = None  # the O line's program number
    percent: bool = False  # the program is wrapped in % lines


def _words(text: str, lineno: int):
    """Split one line into (letter, raw number) words and comments (§3.3)."""
    words, comments = [], []
    i, n = 0, len(text)
    while i < n:
        c = text[i]
        if c in " \t":
            i += 1
            continue
        if c == "(":
            j = text.find(")", i + 1)
            if j < 0:
                raise GcodeError(f"line {lineno}: comment not closed on the same line (§3.3.4)")
            body = text[i + 1 : j]
            if "(" in body:
                raise GcodeError(f"line {lineno}: '(' inside a comment (§3.3.4)")
            if any(not (32 <= ord(ch) < 127) for ch in body):
                raise GcodeError(f"line {lineno}: non-printable character in a comment (§3.3.4)")
            comments.append(body)
            i = j + 1
            continue
        if c == ";":  # a comment to the end of the line (common practice, from memory)
            body = text[i + 1 :].strip()
            if any(not (32 <= ord(ch) < 127) for ch in body):
                raise GcodeError(f"line {lineno}: non-printable character in a comment")
            comments.append(body)
            break
        if c == ")":
            raise GcodeError(f"line {lineno}: ')' without '(' (§3.3.4)")
        letter = c.upper()
        if not letter.isalpha():
            raise GcodeError(f"line {lineno}: unexpected character {c!r}")
        # spaces are allowed inside a number outside comments (§3.3); we only
        # skip spaces between the letter and the number
        j = i + 1
        while j < n and text[j] in " \t":
            j += 1
        m = _NUMBER.match(text, j)
        if not m:
            raise GcodeError(f"line {lineno}: letter {letter} is not followed by a number (§3.3.2)")
        k = m.end()
        if k < n and text[k] in "eE" and k + 1 < n and (text[k + 1].isdigit() or text[k + 1] in "+-"):
            raise GcodeError(f"line {lineno}: exponent notation is not allowed (§3.3.2.1)")
        words.append((letter, m.group(0)))
        i = k
    return words, comments


def read(text: str, *, initial=(None, None, None)) -> Program:
    """Interpret ``text``; return the replayed moves or raise GcodeError."""
    prog = Program()
    pos = list(initial)
    feed = 0.0
    motion = None
    distance = plane = feed_mode = None
    cutter_comp = None
    register = None
    tool = None  # the selected tool (T word)
    comp_just_on = False  # the last move turned compensation on
    moved = False
    all_lines = text.split("\n")
    filled = [k for k, ln in enumerate(all_lines) if ln.strip(" \t\r")]
    if filled and all_lines[filled[0]].strip(" \t\r") == "%":
        # a % line first: the program ends at the next % line, nothing after it (common practice)
        closing = [k for k in filled[1:] if all_lines[k].strip(" \t\r") == "%"]
        if not closing or closing[0] != filled[-1]:
            raise GcodeError("a program that opens with a % line must close with one, last")
        prog.percent = True
        all_lines = [("" if k in (filled[0], filled[-1]) else ln) for k, ln in enumerate(all_lines)]
    seen_code = False
    for lineno, raw in enumerate(all_lines, start=1):
        line = raw.rstrip("\r")
        if len(line) > 256:  # §3.3
            raise GcodeError(f"line {lineno}: {len(line)} characters, more than 256 (§3.3)")
        body = line.strip(" \t")
        if not body:
            continue  # blank lines are ignored (§3.3)
        if body == "%":
            raise GcodeError(f"line {lineno}: a % line inside the program")
        mo = re.fullmatch(r"[oO](\d{1,5})", body)
        if mo:  # program number: alone, as the first code line (common practice, from memory)
            if seen_code or prog.number is not None:
                raise GcodeError(f"line {lineno}: the O program number must be the first code line")
            prog.number = int(mo.group(1))
            seen_code = True
            continue
        if body.startswith("/"):
            raise GcodeError(f"line {lineno}: block delete is not used by pathgen")
        m = re.match(r"[nN]\s*(\d+)", body)
        if m:  # §3.3.1: N and an unsigned integer of at most 5 digits
            if len(m.group(1)) > 5:
                raise GcodeError(f"line {lineno}: line number longer than 5 digits (§3.3.1)")
            body = body[m.end() :]
        words, comments = _words(body, lineno)
        prog.comments.extend(comments)
        if not words:
            continue
        seen_code = True
        if prog.ended:
            raise GcodeError(f"line {lineno}: code after the program end")
        gs, ms, vals = [], [], {}
        for letter, num in words:
            prog.numbers.append((lineno, letter, num))
            if letter == "N":
                raise GcodeError(f"line {lineno}: line number not at the start of the line (§3.3.1)")
            if letter not in _LETTERS:
                raise GcodeError(f"line {lineno}: word {letter}{num} is not in the subset")
            v = float(num)
            if letter == "G":
                if v not in _G_GROUP:
                    raise GcodeError(f"line {lineno}: G{num} is not in the subset")
                gs.append(int(v))
            elif letter == "M":
                if v not in _M_GROUP:
                    raise GcodeError(f"line {lineno}: M{num} is not in the subset")
                ms.append(int(v))
            else:
                if letter in vals:  # §3.3.5: other letters at most once a line
                    raise GcodeError(f"line {lineno}: two {letter} words on one line (§3.3.5)")
                vals[letter] = v
        groups = [_G_GROUP[g] for g in gs]
        if len(groups) != len(set(groups)):
            raise GcodeError(f"line {lineno}: two G words of one modal group (§3.3.5)")
        mgroups = [_M_GROUP[x] for x in ms]
        if len(ms) > 4 or len(mgroups) != len(set(mgroups)):
            raise GcodeError(f"line {lineno}: too many M words or two of one group (§3.3.5)")

        # order of execution (§3.8, section number from memory): feed rate, spindle, plane, units, comp, distance, motion, stop
        if "F" in vals:
            if vals["F"] <= 0:
                raise GcodeError(f"line {lineno}: feed must be positive")
            feed = vals["F"]
        if "S" in vals and vals["S"] < 0:
            raise GcodeError(f"line {lineno}: negative spindle speed")
        for letter in "THD":
            if letter in vals and (vals[letter] != int(vals[letter]) or vals[letter] < 0):
                raise GcodeError(f"line {lineno}: {letter} must be a whole number >= 0")
        if "T" in vals:  # tool selection comes before the change (§3.8, from memory)
            tool = int(vals["T"])
            prog.events.append((lineno, f"T{tool}"))
        for x in ms:
            if x in (3, 4, 5):
                prog.spindle.append((lineno, f"M{x}", vals.get("S")))
                prog.events.append((lineno, f"M{x}"))
            elif x == 6:
                if tool is None:
                    raise GcodeError(f"line {lineno}: M6 without a selected tool (T word)")
                prog.events.append((lineno, "M6"))
            elif x in (7, 8, 9):
                prog.events.append((lineno, f"M{x}"))
        if "H" in vals and 43 not in gs:
            raise GcodeError(f"line {lineno}: H word without G43")
        if "D" in vals and not (41 in gs or 42 in gs):
            raise GcodeError(f"line {lineno}: D word without G41 or G42")
        comp_change = None
        for g in gs:
            if g in (41, 42):
                if cutter_comp in ("G41", "G42"):
                    raise GcodeError(f"line {lineno}: G{g} while cutter compensation is on (nistir-6556)")
                if "D" not in vals:
                    raise GcodeError(f"line {lineno}: G{g} without a D word")
                cutter_comp, register, comp_change = f"G{g}", int(vals["D"]), "on"
            elif g == 43:
                if "H" not in vals:
                    raise GcodeError(f"line {lineno}: G43 without an H word")
                prog.events.append((lineno, f"G43 H{int(vals['H'])}"))
            elif 54 <= g <= 59:
                prog.events.append((lineno, f"G{g}"))
        for g in gs:
            if g in (41, 42, 43, 28) or 54 <= g <= 59:
                continue
            if g == 17:
                plane = "XY"
            elif g == 94:
                feed_mode = "per minute"
            elif g == 90:
                distance = "absolute"
            elif g == 40:
                if cutter_comp in ("G41", "G42"):
                    comp_change = "off"
                cutter_comp = "off"
            elif g in (20, 21):
                units = "inch" if g == 20 else "mm"
                if moved or (prog.units is not None and prog.units != units):
                    raise GcodeError(f"line {lineno}: units word after motion or changed (§3.5.7)")
                prog.units = units
            else:
                motion = g
        axes = {a: vals[a] for a in "XYZ" if a in vals}
        has_motion_g = any(_G_GROUP[g] == 1 for g in gs)
        if 28 in gs:  # return home (group 0): the position is the machine's home, unknown here
            if axes or has_motion_g:
                raise GcodeError(f"line {lineno}: G28 with axis words or a motion word is not in the subset")
            if cutter_comp in ("G41", "G42"):
                raise GcodeError(f"line {lineno}: G28 with cutter compensation on")
            prog.events.append((lineno, "G28"))
            pos = [None, None, None]
        elif axes or has_motion_g:
            if prog.units is None or distance is None or plane is None or feed_mode is None:
                raise GcodeError(f"line {lineno}: motion before units, G90, G17 and G94 are set")
            if cutter_comp is None:
                raise GcodeError(f"line {lineno}: motion before G40 (tool-center path needs compensation off)")
            if comp_change is not None and motion != 1:
                raise GcodeError(f"line {lineno}: cutter compensation turned {comp_change} on a "
                                 f"G{motion} move; it needs a straight G1 move (nistir-6556, common practice)")
            if comp_just_on and motion in (2, 3):
                raise GcodeError(f"line {lineno}: an arc as the first move after cutter compensation "
                                 f"is turned on (nistir-6556, common practice)")
            if motion is None:
                raise GcodeError(f"line {lineno}: axis words without a motion mode")
            if not axes:  # G0 and G1 need at least one axis word (sources: nistir-6556; section number from memory)
                raise GcodeError(f"line {lineno}: G{motion} without an axis word")
            start = tuple(pos)
            end = [axes.get(a, pos[i]) for i, a in enumerate("XYZ")]
            center = None
            if motion in (1, 2, 3):
                if None in start:
                    raise GcodeError(f"line {lineno}: cutting move from an unknown position")
                if feed <= 0:
                    raise GcodeError(f"line {lineno}: cutting move with no feed set (G94 needs a feed; from memory)")
            if motion in (2, 3):
                if "X" not in vals and "Y" not in vals:
                    raise GcodeError(f"line {lineno}: arc without X or Y (§3.5.3.2)")
                if "I" not in vals and "J" not in vals:
                    raise GcodeError(f"line {lineno}: arc without I or J (§3.5.3.2)")
                # §3.5.17: I and J are increments from the current point in any distance mode
                cx, cy = start[0] + vals.get("I", 0.0), start[1] + vals.get("J", 0.0)
                r0 = math.hypot(start[0] - cx, start[1] - cy)
                r1 = math.hypot(end[0] - cx, end[1] - cy)
                if abs(r0 - r1) > _ARC_RULE[prog.units]:
                    raise GcodeError(
                        f"line {lineno}: arc radii {r0:.6f} and {r1:.6f} differ by more than "
                        f"{_ARC_RULE[prog.units]} {prog.units} (§3.5.3.2)"
                    )
                center = (cx, cy)
            elif "I" in vals or "J" in vals:
                raise GcodeError(f"line {lineno}: I or J without an arc")
            prog.moves.append(Move(motion, start, tuple(end), center, feed if motion else 0.0, lineno,
                                   comp="G40" if cutter_comp == "off" else cutter_comp,
                                   register=register if cutter_comp != "off" else None,
                                   comp_change=comp_change))
            comp_just_on = comp_change == "on"
            pos = end
            moved = True
        elif comp_change is not None:
            raise GcodeError(f"line {lineno}: cutter compensation turned {comp_change} without a move")
        elif "I" in vals or "J" in vals:
            raise GcodeError(f"line {lineno}: I or J without an arc")
        for x in ms:
            if x in (2, 30):
                if cutter_comp in ("G41", "G42"):
                    raise GcodeError(f"line {lineno}: program end with cutter compensation on")
                prog.ended = True
                prog.end_word = f"M{x}"
    if not prog.ended:
        raise GcodeError("the program does not end with M2 or M30 (§3.6.1)")
    return prog


def sample(move: Move, step: float) -> np.ndarray:
    """Points along a replayed move, at most ``step`` apart, shape (k, 3)."""
    s = np.array(move.start, float)
    e = np.array(move.end, float)
    if move.center is None:
        n = max(2, int(math.ceil(np.linalg.norm(e - s) / step)) + 1)
        u = np.linspace(0.0, 1.0, n)[:, None]
        return s + u * (e - s)
    cx, cy = move.center
    r = math.hypot(s[0] - cx, s[1] - cy)
    a0 = math.atan2(s[1] - cy, s[0] - cx)
    a1 = math.atan2(e[1] - cy, e[0] - cx)
    if move.g == 3:  # counter-clockwise seen from +Z (§3.5.3)
        sweep = (a1 - a0) % (2 * math.pi)
    else:
        sweep = -((a0 - a1) % (2 * math.pi))
    if sweep == 0.0:  # end point = start point: a full circle (§3.5.3.2)
        sweep = 2 * math.pi if move.g == 3 else -2 * math.pi
    n = max(2, int(math.ceil(abs(sweep) * r / step)) + 1)
    a = a0 + np.linspace(0.0, sweep, n)
    z = np.linspace(s[2], e[2], n)
    r_end = math.hypot(e[0] - cx, e[1] - cy)
    rr = np.linspace(r, r_end, n)  # tolerate the rounding difference of the two radii
    return np.column_stack([cx + rr * np.cos(a), cy + rr * np.sin(a), z])


def sweep_of(move: Move) -> float:
    """Signed swept angle of an arc move (radians, + counter-clockwise)."""
    cx, cy = move.center
    a0 = math.atan2(move.start[1] - cy, move.start[0] - cx)
    a1 = math.atan2(move.end[1] - cy, move.end[0] - cx)
    if move.g == 3:
        return (a1 - a0) % (2 * math.pi) or 2 * math.pi
    return -((a0 - a1) % (2 * math.pi) or 2 * math.pi)
