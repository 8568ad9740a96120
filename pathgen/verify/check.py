"""Replay a program's text against its part and say what it measured.

:func:`check_program` is run on every program pathgen writes, before the
file is renamed into place: the text is read back by
:mod:`pathgen.verify.reader` (strictly: any rule break fails), its cutting
moves are measured against the exact tool-center curve
(:func:`pathgen.verify.replay.replay_deviation`) and the swept tool against
the part (:func:`pathgen.path.clearance.clearance`).  A program that strays
beyond the chord tolerance or cuts into the part is a bug in pathgen:
:class:`~pathgen.errors.InternalCheckError`, nothing is written.

:func:`verify_program` does the same for any program (a hand-edited one),
collecting problems instead of failing, for ``pathgen verify``.

All lengths in mm inside; figures are stated in the program's units.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import InternalCheckError
from .reader import read_gcode
from .replay import program_time, replay_deviation

__all__ = ["check_program", "verify_program", "header_lines", "summary_lines", "Moves", "ReportWithProgram"]

_MM_PER_INCH = 25.4


@dataclass(frozen=True, eq=False)
class Moves:
    """Moves as plain arrays in mm (kind, start (k, 3), end (k, 3), center (k, 2))."""

    kind: np.ndarray
    start: np.ndarray
    end: np.ndarray
    center: np.ndarray
    along: np.ndarray | None = None  # (k,) bool: the moves that follow the curve, when known

    @classmethod
    def from_toolpath(cls, tp) -> "Moves":
        f = _MM_PER_INCH if tp.units == "inch" else 1.0
        along = tp.info.get("along_curve") if isinstance(tp.info, dict) else None
        if along is not None and len(along) != len(tp.kind):
            along = None
        return cls(np.asarray(tp.kind), tp.start * f, tp.end * f, tp.center * f,
                   None if along is None else np.asarray(along, bool))


def _num(v, digits=6) -> str:
    """A figure for a comment or a line: positional, ``digits`` significant digits."""
    v = float(v)
    if not math.isfinite(v):
        return "unknown"
    v = round(v, 9) + 0.0
    s = np.format_float_positional(v, precision=digits, unique=False, fractional=False, trim="-")
    return "0" if s in ("-0", "0") else s


def _clearance(program, contour, *, tool_radius, side, tolerance):
    """Clearance of the program's moves (None when cutting on the line)."""
    if side == "on" or tool_radius <= 0:
        return None
    from ..path.clearance import clearance

    start = np.array(program.start, dtype=np.float64)
    end = np.asarray(program.end)
    unknown = np.isnan(start)
    start[unknown] = end[unknown]  # the first rapids: only where they go is known
    known = np.flatnonzero(np.isfinite(end).all(axis=1))  # a rapid to an unknown X, Y is above the part
    cl = clearance(program.kind[known], start[known], end[known], program.center[known], contour,
                   tool_radius=tool_radius, side=side, tolerance=tolerance)
    return cl, known


def _facts(program, contour, *, offset, tool_radius, side, tolerance, expected, machine, passes=None, q=None):
    dev = replay_deviation(program, contour, offset, tol=tolerance, expected=expected, passes=passes, q=q)
    cl = _clearance(program, contour, tool_radius=tool_radius, side=side, tolerance=tolerance)
    facts = {
        "blocks": int(len(program.kind)),  # motion blocks as written (the header's count)
        "deviation": dev["deviation"],
        "deviation_moves_to_curve": dev["file_to_curve"],
        "deviation_curve_to_moves": dev["curve_to_file"],
        "deviation_worst_line": dev["worst_line"],
        "deviation_gap_at": dev["gap_at"],
        "moves_measured": dev["moves"],
        "cutting_depths": dev["levels"],
        "tolerance": float(tolerance),
        "within_tolerance": bool(dev["deviation"] <= tolerance),
        "clearance": None,
        "gouges": [],
        "time": program_time(program, machine) if machine is not None else None,
    }
    if cl is not None:
        cl, known = cl
        lines = program.line[known]
        facts["clearance"] = {
            "smallest": float(cl.min_clearance),
            "tool_radius": float(cl.tool_radius),
            "line": int(lines[cl.move]) if cl.move >= 0 else None,
            "at": [float(v) for v in cl.where],
            "ok": bool(cl.ok),
        }
        facts["gouges"] = [{"line": int(lines[i]), "depth": float(dp)}
                           for i, dp in zip(cl.gouge_index, cl.gouge_depth)]
    return facts


def check_program(text: str, contour, *, offset: float, tool_radius: float, side: str, tolerance: float,
                  expected=None, budget: dict | None = None, machine=None, source: str = "<program>") -> dict:
    """Read ``text`` back and measure it; raise if it is not what pathgen promises.

    Parameters
    ----------
    text : the program.
    contour : the fitted contour (mm).
    offset : signed tool offset along the contour's left normal, mm.
    tool_radius : mm (0 on the line).
    side : "outside", "inside" or "on".
    tolerance : the chord tolerance, mm.
    expected : :class:`Moves` the program was made from (mm).
    budget : the tolerance budget (:func:`pathgen.verify.replay.budget`),
        kept in the result with the measured approximation.
    machine : Machine for the time estimate, or None.

    Returns
    -------
    dict of figures (mm): ``deviation`` (two-sided, moves ↔ curve),
    ``clearance`` (smallest distance of the tool center from the part,
    where), ``gouges``, ``time`` (s), ``budget``.

    Raises
    ------
    InternalCheckError
        The text breaks a rule of the reader, strays beyond the tolerance,
        or cuts into the part.
    """
    from ..errors import InputError

    try:
        program = read_gcode(text, source=source, strict=True)
    except InputError as exc:
        raise InternalCheckError(f"internal check failed: the program does not read back: {exc}") from None
    facts = _facts(program, contour, offset=offset, tool_radius=tool_radius, side=side, tolerance=tolerance,
                   expected=expected, machine=machine)
    facts["budget"] = budget
    if not facts["within_tolerance"]:
        where = facts["deviation_worst_line"]
        raise InternalCheckError(
            f"internal check failed: the written program strays {_num(facts['deviation'])} mm from the tool-center "
            f"curve (chord tolerance {_num(tolerance)} mm; moves to curve {_num(facts['deviation_moves_to_curve'])}, "
            f"curve to moves {_num(facts['deviation_curve_to_moves'])}"
            + (f", worst at line {where}" if where else "") + "); nothing was written")
    if facts["gouges"]:
        g = max(facts["gouges"], key=lambda x: x["depth"])
        raise InternalCheckError(
            f"internal check failed: the written program cuts {_num(g['depth'])} mm into the part at line "
            f"{g['line']} ({len(facts['gouges'])} move(s) below the tool radius minus the tolerance); nothing "
            "was written")
    return facts


def verify_program(program, contour, *, offset: float, tool_radius: float, side: str, tolerance: float,
                   expected=None, machine=None) -> dict:
    """Figures and problems of any program (already read) against its part.

    Returns the figures of :func:`check_program` plus ``problems`` (the
    reader's rule breaks: arc radius, exponent, feed moves without F, …),
    ``feed_moves_without_f`` (their lines), ``units`` and ``status``: 0
    clean, 1 a gouge, off tolerance or a rule break.
    """
    facts = _facts(program, contour, offset=offset, tool_radius=tool_radius, side=side, tolerance=tolerance,
                   expected=expected, machine=machine)
    facts["units"] = program.units
    facts["program"] = program.source
    facts["problems"] = [p.to_dict() for p in program.problems]
    facts["feed_moves_without_f"] = [p.line for p in program.problems if p.rule == "no feed"]
    bad = (not facts["within_tolerance"]) or facts["gouges"] or facts["problems"]
    facts["status"] = 1 if bad else 0
    return facts


def _u(v_mm, units):
    return v_mm / _MM_PER_INCH if units == "inch" else v_mm


def header_lines(facts: dict, units: str) -> list[str]:
    """Comment texts (without parentheses) for the program's header."""
    u = units
    out = []
    b = facts.get("budget")
    if b is not None:
        approx = b.get("approximation")
        parts = [
            (f"points to contour {_num(_u(b['points'], u))} [interpolating]" if b["smoothing"] is None
             else "points to contour: smoothing, stated apart"),
            f"contour to moves {_num(_u(approx, u))} [target {_num(_u(b['approximation_target'], u))}]",
            f"moves to text at most {_num(_u(b['rounding'], u))} [{b['decimals']} decimals]",
            f"total {_num(_u(b['total'], u))} <= {_num(_u(b['tolerance'], u))} {u}",
        ]
        out.append("tolerance budget: " + "; ".join(parts))
        if b["smoothing"] is not None:
            out.append(f"smoothing moved the contour from the points by at most {_num(_u(b['smoothing'][0], u))} "
                       f"{u} [RMS {_num(_u(b['smoothing'][1], u))}]; asked for apart from the chord tolerance")
    if facts.get("compensation") is not None:  # the part line, for cutter compensation at the control
        from .compensated import compensation_lines

        return out + compensation_lines(facts, units)
    line = (f"replayed from this text: deviation from the tool-center curve {_num(_u(facts['deviation'], u))} {u} "
            f"[two-sided, {facts['moves_measured']} moves]")
    out.append(line)
    cl = facts.get("clearance")
    if cl is not None:
        out.append("replayed clearance: " + clearance_words(cl, facts["tolerance"], u))
    return out


def clearance_words(cl: dict, tolerance: float, units: str) -> str:
    """What the replayed clearance means for the part: the smallest distance
    of the tool center from it, and how far the tool then cuts into the part
    (a toolpath within a chord tolerance may come that close; more is a gouge)."""
    u = units
    smallest, r = cl["smallest"], cl["tool_radius"]
    said = f"the tool center keeps {_num(_u(smallest, u))} {u} from the part [tool radius {_num(_u(r, u))}]"
    into = r - smallest
    if into <= 1e-9:
        return said + ", so the tool never cuts into it"
    word = "within" if into <= tolerance + 1e-12 else "beyond"
    return (said + f", so the tool cuts up to {_num(_u(into, u))} {u} into it, {word} the "
            f"{_num(_u(tolerance, u))} {u} tolerance" + ("" if word == "within" else ": a gouge"))


def shift_facts(facts: dict, n: int) -> dict:
    """The replay's figures with every line number moved ``n`` lines down:
    the header gains the replay's own comment lines after the replay, and
    the figures must name the lines of the file as written."""
    def move(v):
        return None if v is None else int(v) + n

    out = dict(facts)
    if out.get("deviation_worst_line") is not None:
        out["deviation_worst_line"] = move(out["deviation_worst_line"])
    if out.get("gouges"):
        out["gouges"] = [dict(g, line=move(g["line"])) for g in out["gouges"]]
    if isinstance(out.get("clearance"), dict) and "line" in out["clearance"]:
        out["clearance"] = dict(out["clearance"], line=move(out["clearance"]["line"]))
    c = out.get("compensation")
    if isinstance(c, dict):
        c = dict(c, problems=[dict(p, line=move(p["line"])) for p in c.get("problems") or []])
        if "swept_line" in c:
            c["swept_line"] = move(c["swept_line"])
        out["compensation"] = c
    return out


def summary_lines(facts: dict, units: str) -> list[str]:
    """Plain lines for the report's text and the command line."""
    return [ln[0].upper() + ln[1:] + "." for ln in header_lines(facts, units)]


class ReportWithProgram:
    """A check report plus what the written program's replay measured
    (``program`` in the JSON, lines at the end of the text)."""

    def __init__(self, report, facts: dict):
        self._report = report
        self._facts = facts

    def to_dict(self, *, units: str = "mm") -> dict:
        data = self._report.to_dict(units=units)
        data["program"] = program_dict(self._facts, units)
        return data

    def to_text(self, *, units: str = "mm") -> str:
        lines = self._report.to_text(units=units).rstrip("\n").split("\n")
        at = len(lines) - 1 if lines and lines[-1].startswith("Verify") else len(lines)  # the caution stays last
        lines[at:at] = summary_lines(self._facts, units)
        return "\n".join(lines) + "\n"


def program_dict(facts: dict, units: str) -> dict:
    """The replay's figures for JSON, lengths in ``units``."""

    def u(v):
        return None if v is None else _u(float(v), units)

    out = {
        "blocks": facts.get("blocks"),
        "deviation": u(facts["deviation"]),
        "deviation_moves_to_curve": u(facts["deviation_moves_to_curve"]),
        "deviation_curve_to_moves": u(facts["deviation_curve_to_moves"]),
        "deviation_worst_line": facts["deviation_worst_line"],
        "deviation_gap_at": None if facts["deviation_gap_at"] is None else [u(v) for v in facts["deviation_gap_at"]],
        "moves_measured": facts["moves_measured"],
        "cutting_depths": [u(v) for v in facts["cutting_depths"]],
        "tolerance": u(facts["tolerance"]),
        "within_tolerance": facts["within_tolerance"],
        "clearance": None,
        "gouges": [{"line": g["line"], "depth": u(g["depth"])} for g in facts["gouges"]],
        "time": facts["time"],
    }
    cl = facts.get("clearance")
    if cl is not None:
        out["clearance"] = {"smallest": u(cl["smallest"]), "tool_radius": u(cl["tool_radius"]), "line": cl["line"],
                            "at": [u(v) for v in cl["at"]], "ok": cl["ok"]}
    b = facts.get("budget")
    if b is not None:
        out["budget"] = {
            "tolerance": u(b["tolerance"]),
            "decimals": b["decimals"],
            "points_to_contour": u(b["points"]),
            "smoothing": None if b["smoothing"] is None else {"largest": u(b["smoothing"][0]),
                                                               "rms": u(b["smoothing"][1])},
            "contour_to_moves": u(b["approximation"]),
            "approximation_target": u(b["approximation_target"]),
            "moves_to_text": u(b["rounding"]),
            "total": u(b["total"]),
        }
    c = facts.get("compensation")
    if c is not None:
        out["compensation"] = {
            "word": c["word"], "register": c["register"], "side": c["side"], "on_lines": c["on_lines"],
            "off_lines": c["off_lines"],
            "entry_lengths": [u(v) for v in c["entry_lengths"]], "exit_lengths": [u(v) for v in c["exit_lengths"]],
            "tightest_arc_toward_tool": u(c["tightest_toward"]), "swept_depth": u(max(c["swept_depth"], 0.0)),
            "swept_at": None if c["swept_at"] is None else [u(v) for v in c["swept_at"]],
            "swept_line": c["swept_line"], "tool_radius": u(c["tool_radius"]), "problems": c["problems"],
            "ok": c["ok"]}
    for key in ("units", "program", "problems", "feed_moves_without_f", "status"):
        if key in facts:
            out[key] = facts[key]
    return out
