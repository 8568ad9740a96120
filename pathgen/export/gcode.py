"""Write a :class:`~pathgen.path.model.Toolpath` as a G-code program.

The program uses only the common subset of ISO 6983 that the NIST RS274/NGC
interpreter document (NISTIR 6556, Kramer, Proctor and Messina, 2000)
specifies; ``docs/gcode.md`` lists every word written and the rule behind it.

Program layout
--------------
1. Header comments: program name, input, units, tool, side, tolerance and
   measured deviation, estimated cycle time, and the caution.
2. Preamble ``G21 G90 G17 G94 G40`` (``G20`` for inch), before any motion.
3. Optional ``S… M3`` when a spindle speed is given.
4. ``G0 Z<safe height>``, ``G0`` to the first move's start in X and Y,
   ``G1 Z…`` down to its depth at the plunge feed when it starts lower.
   When the path itself opens with a rapid at safe height, that rapid's
   start is only the planner's assumption of where the machine stands, so
   the program goes from safe height straight to the rapid's end.
5. The moves: ``G0`` rapids, ``G1`` lines, ``G2``/``G3`` arcs in center
   format (I, J = the center's offset from the arc's start; never R).
   Axis words are written when their value changes; an F word where the
   feed changes.
6. ``G0 Z<safe height>`` when the last move ends lower, ``M5`` when the
   spindle was started, ``M2``.

Numbers are fixed point with ``decimals`` digits (at least 4 in mm, 5 in
inch), trailing zeros trimmed, never exponent notation, NaN, inf or "-0".
I and J are computed from the rounded current point, and every arc is
checked against the radius rule (start and end radius within 0.002 mm,
0.0002 inch) before anything is returned.  Formatting is vectorized: the
digits of every number are produced with integer numpy arithmetic into one
byte matrix per chunk of blocks.
"""

from __future__ import annotations

import math
import os
from pathlib import Path

import numpy as np

from .._options import CAUTION_LINES, duration_text
from ..errors import ExportError, InputError
from ..moves import toolpath_in_units
from ..path.model import ARC_CCW, ARC_CW, LINE, RAPID, Toolpath, arc_sweep
from ._atomic import atomic_write

__all__ = ["gcode_text", "write_gcode", "CAUTION", "MIN_DECIMALS", "RADIUS_RULE"]

#: The caution written into every program header (two comment lines).
CAUTION = CAUTION_LINES

#: Fewest decimals allowed per unit: 3 decimals in mm can break the radius rule.
MIN_DECIMALS = {"mm": 4, "inch": 5}
MAX_DECIMALS = 8

#: NISTIR 6556 §3.5.3.2: start and end radius of a center-format arc may
#: differ by at most this much (units of the program).
RADIUS_RULE = {"mm": 0.002, "inch": 0.0002}

#: Coordinates beyond this magnitude (in program units) are refused.
MAX_COORDINATE = 1.0e6

_FEED_DECIMALS = {"mm": 1, "inch": 2}
_MAX_LINE = 256  # NISTIR 6556 §3.3
_MAX_LINE_NUMBER = 99999  # NISTIR 6556 §3.3.1: at most 5 digits
_CHUNK = 1 << 17


# ---------------------------------------------------------------------------
# small text helpers
def _comment(text: str) -> str:
    """One comment line: printable ASCII, no parentheses, at most 256 chars."""
    clean = "".join(c if 32 <= ord(c) < 127 else "?" for c in str(text))
    # no ";" either: several senders take it for a line comment and leave "(" open
    clean = clean.replace("(", "[").replace(")", "]").replace(";", ",")
    return "(" + clean[: _MAX_LINE - 2] + ")"


def _num(v: float, digits: int = 6) -> str:
    """A value for a comment: positional, ``digits`` significant digits."""
    v = float(v) + 0.0
    if not math.isfinite(v):
        return "unknown"
    v = round(v, 9) + 0.0  # a comment needs no digits below a nanometre
    s = np.format_float_positional(v, precision=digits, unique=False, fractional=False, trim="-")
    return "0" if s in ("-0", "0") else s


def _fixed(value: float, decimals: int) -> str:
    """Fixed point, trailing zeros trimmed, no "-0" (used for a few words)."""
    q = int(round(float(value) * 10**decimals))
    sign = "-" if q < 0 else ""
    ip, fp = divmod(abs(q), 10**decimals)
    frac = f"{fp:0{decimals}d}".rstrip("0") if decimals else ""
    return f"{sign}{ip}" + (f".{frac}" if frac else "")


# ---------------------------------------------------------------------------
# vectorized formatting
def _field_number(letter: str, q: np.ndarray, decimals: int, write: np.ndarray):
    """Byte matrix and keep-mask of " <letter><number>" for integers q = value·10^d."""
    n = len(q)
    neg = q < 0
    a = np.abs(q)
    scale = 10**decimals
    ip, fp = np.divmod(a, scale)
    top = int(ip.max()) if n else 0
    nint = max(1, len(str(top)))
    width = 3 + nint + (1 + decimals if decimals else 0)
    ch = np.empty((n, width), np.uint8)
    keep = np.zeros((n, width), bool)
    ch[:, 0] = 32
    ch[:, 1] = ord(letter)
    ch[:, 2] = 45  # "-"
    keep[:, 0] = True
    keep[:, 1] = True
    keep[:, 2] = neg  # q is an integer: zero is never negative, so never "-0"
    rem = ip.copy()
    for k in range(nint - 1, -1, -1):
        ch[:, 3 + k] = 48 + rem % 10
        rem //= 10
    powers = 10 ** np.arange(nint - 1, -1, -1, dtype=np.int64)
    keep[:, 3 : 3 + nint] = (ip[:, None] >= powers[None, :]) | (np.arange(nint) == nint - 1)[None, :]
    if decimals:
        col = 3 + nint
        ch[:, col] = 46  # "."
        rem = fp.copy()
        for j in range(decimals - 1, -1, -1):
            ch[:, col + 1 + j] = 48 + rem % 10
            rem //= 10
        nonzero = ch[:, col + 1 :] != 48
        last = decimals - 1 - np.argmax(nonzero[:, ::-1], axis=1)
        last[~nonzero.any(axis=1)] = -1
        keep[:, col + 1 :] = np.arange(decimals)[None, :] <= last[:, None]
        keep[:, col] = last >= 0
    keep &= write[:, None]
    return ch, keep


def _field_text(words: list[str], index: np.ndarray, write: np.ndarray):
    """Byte matrix of " <word>" choosing words[index] per row."""
    width = 1 + max(len(w) for w in words)
    table = np.zeros((len(words), width), np.uint8)
    tkeep = np.zeros((len(words), width), bool)
    for i, w in enumerate(words):
        b = (" " + w).encode("ascii")
        table[i, : len(b)] = np.frombuffer(b, np.uint8)
        tkeep[i, : len(b)] = True
    return table[index], tkeep[index] & write[:, None]


def _render(fields, n: int) -> str:
    """Join field matrices row by row; drop each line's leading space."""
    mats = [f[0] for f in fields]
    keeps = [f[1] for f in fields]
    mats.append(np.full((n, 1), 10, np.uint8))
    keeps.append(np.ones((n, 1), bool))
    mat = np.concatenate(mats, axis=1)
    keep = np.concatenate(keeps, axis=1)
    # every line starts with the leading space of its first field: remove it
    first = np.argmax(keep, axis=1)
    keep[np.arange(n), first] = False
    lengths = keep.sum(axis=1) - 1
    if n and lengths.max() > _MAX_LINE:
        i = int(np.argmax(lengths))
        raise ExportError(f"G-code block {i} would be {int(lengths[i])} characters long (limit {_MAX_LINE})")
    return mat[keep].tobytes().decode("ascii")


# ---------------------------------------------------------------------------
def _options(toolpath, decimals, spindle_speed):
    if not isinstance(toolpath, Toolpath):
        raise InputError(f"toolpath must be a pathgen Toolpath, got {type(toolpath).__name__}")
    units = toolpath.units
    lo = MIN_DECIMALS[units]
    if decimals is None:
        decimals = lo
    if isinstance(decimals, bool) or not isinstance(decimals, (int, np.integer)) or not lo <= decimals <= MAX_DECIMALS:
        raise InputError(
            f"decimals={decimals!r} must be a whole number from {lo} to {MAX_DECIMALS} for {units} "
            f"(fewer decimals can break the 0.002 mm arc radius rule)"
        )
    if spindle_speed is not None:
        try:
            s = float(spindle_speed)
        except (TypeError, ValueError):
            raise InputError(f"spindle_speed must be a number (rev/min), got {spindle_speed!r}") from None
        if not (math.isfinite(s) and 0 < s <= 1e6):
            raise InputError(f"spindle_speed must be a finite number > 0 and <= 1000000 rev/min, got {spindle_speed!r}")
        spindle_speed = s
    return units, int(decimals), spindle_speed


def _info_float(info, key):
    v = info.get(key)
    try:
        v = float(v)
    except (TypeError, ValueError):
        return None
    return v if math.isfinite(v) else None


def _header(tp: Toolpath, program_name: str, source: str, notes=(), blocks: int | None = None) -> list[str]:
    u = tp.units
    info = tp.info
    lines = [
        _comment(f"pathgen program: {program_name}"),
        _comment(f"input: {source if source else 'not given'}"),
        _comment(f"units: {u}, feeds in {u}/min, absolute coordinates, XY plane"),
    ]
    tool = f"tool diameter: {_num(tp.tool_diameter)} {u}, side: {tp.side}"
    if info.get("direction"):
        tool += f", direction: {info['direction']}"
    lines.append(_comment(tool))
    lines.append(
        _comment(f"chord tolerance: {_num(tp.tolerance)} {u}, measured deviation: {_num(tp.deviation)} {u}")
    )
    depth = []
    if _info_float(info, "depth") is not None:
        depth.append(f"depth: {_num(info['depth'])} {u}")
    if info.get("passes") is not None:
        depth.append(f"passes: {info['passes']}")
    if _info_float(info, "safe_height") is not None:
        depth.append(f"safe height: {_num(info['safe_height'])} {u}")
    if depth:
        lines.append(_comment(", ".join(depth)))
    lines.extend(_comment(t) for t in _entry_lines(tp))
    lines.append(
        _comment(
            f"motion blocks: {len(tp) if blocks is None else blocks}, "
            f"cutting length: {_num(tp.cutting_length)} {u}, "
            f"estimated cycle time: {duration_text(tp.time)}"
        )
    )
    lines.extend(_comment(c) for c in notes)  # e.g. what the replay of this text measured
    lines.extend(_comment(c) for c in CAUTION)
    return lines


def _entry_lines(tp: Toolpath) -> list[str]:
    """Header sentences on the entry, leads, heights and the measured clearance."""
    u, info = tp.units, tp.info
    out = []
    entry = info.get("entry")
    if entry:
        how = {"plunge": "plunge straight down", "ramp": "ramp down along the path",
               "helix": "helix down"}.get(entry, entry)
        text = f"entry: {how}"
        if entry in ("ramp", "helix") and _info_float(info, "ramp_angle") is not None:
            text += f" at {_num(info['ramp_angle'])} deg"
        if entry == "helix" and _info_float(info, "helix_radius"):
            text += f", helix radius {_num(info['helix_radius'])} {u}"
        lead = info.get("lead")
        if lead and lead != "none":
            for end in ("in", "out"):
                size = _info_float(info, f"lead_{end}_length") or 0.0
                text += f"; lead-{end}: " + (f"{lead} {_num(size)} {u}" if size > 0 else "none")
        else:
            text += "; no leads: straight onto and off the path"
        if _info_float(info, "overlap"):
            text += f"; overlap past the start: {_num(info['overlap'])} {u}"
        out.append(text)
    if _info_float(info, "retract_height") is not None and _info_float(info, "safe_height") is not None:
        out.append(f"heights: safe {_num(info['safe_height'])} {u} for traverses; retract "
                   f"{_num(info['retract_height'])} {u}, entries start there at feed; stock top z = 0")
    c = info.get("clearance")
    if isinstance(c, dict) and _info_float(c, "min") is not None:
        out.append(f"smallest clearance of the tool center to the part: {_num(c['min'])} {u} "
                   f"(tool radius {_num(c['tool_radius'])} {u}) at X{_num(c['x'])} Y{_num(c['y'])} "
                   f"Z{_num(c['z'])}; no move below the stock top comes closer than radius - tolerance")
    for note in info.get("notes", ()) or ():
        out.append(f"note: {note}")
    return out


def _program_rows(tp: Toolpath, units: str, decimals: int, single_feed: bool):
    """The motion rows of the program (approach + moves + retract), rounded."""
    n = len(tp)
    if n == 0:
        raise ExportError("the toolpath has no moves: nothing to write")
    scale = 10**decimals
    tol_gap = 1.0 / scale
    if not all(np.isfinite(a).all() for a in (tp.start, tp.end, tp.center, tp.feed)):
        raise ExportError("the toolpath holds NaN or infinite values: nothing is written")
    big = max(float(np.abs(a).max()) for a in (tp.start, tp.end, tp.center))
    if big > MAX_COORDINATE:
        raise ExportError(f"a toolpath coordinate ({_num(big)} {units}) is beyond ±{MAX_COORDINATE:.0f} {units}")
    if n > 1:
        gap = np.abs(tp.start[1:] - tp.end[:-1]).max(axis=1)
        bad = np.flatnonzero(gap > tol_gap)
        if bad.size:
            k = int(bad[0]) + 1
            s, e = tp.start[k], tp.end[k - 1]
            raise ExportError(
                f"move {k} starts at ({_num(s[0])}, {_num(s[1])}, {_num(s[2])}) but move {k - 1} ends at "
                f"({_num(e[0])}, {_num(e[1])}, {_num(e[2])}): the toolpath has a gap"
            )
    cutting = tp.kind != RAPID
    if np.any(cutting & ~(tp.feed > 0)):
        k = int(np.flatnonzero(cutting & ~(tp.feed > 0))[0])
        raise ExportError(f"move {k} is a cutting move with feed {_num(tp.feed[k])}: every cut needs a feed > 0")
    safe = _info_float(tp.info, "safe_height")
    if safe is None:
        safe = float(max(tp.start[:, 2].max(), tp.end[:, 2].max()))
    if cutting.any():
        plunge = _info_float(tp.info, "plunge_feed")
        if plunge is None or plunge <= 0:
            plunge = float(tp.feed[cutting].min())
    else:
        plunge = 0.0

    p0 = tp.start[0]
    pre_kind = [RAPID, RAPID]
    pre_end = [[np.nan, np.nan, safe], [p0[0], p0[1], safe]]
    pre_feed = [0.0, 0.0]
    if tp.kind[0] == RAPID and p0[2] == safe:
        # the path opens with a rapid at safe height: its start is only where
        # the planner assumed the machine to be, so go straight to its end
        pre_kind, pre_end, pre_feed = [RAPID], [[np.nan, np.nan, safe]], [0.0]
    elif p0[2] != safe:  # down at the plunge feed, or up at rapid
        pre_kind.append(LINE if p0[2] < safe else RAPID)
        pre_end.append([p0[0], p0[1], p0[2]])
        pre_feed.append(plunge if p0[2] < safe else 0.0)
    post = tp.end[-1, 2] < safe
    m = len(pre_kind) + n + int(post)
    kind = np.empty(m, np.int8)
    end = np.empty((m, 3))
    center = np.zeros((m, 2))
    feed = np.empty(m)
    source = np.full(m, -1, np.int64)
    a = len(pre_kind)
    kind[:a], end[:a], feed[:a] = pre_kind, pre_end, pre_feed
    kind[a : a + n], end[a : a + n], center[a : a + n], feed[a : a + n] = tp.kind, tp.end, tp.center, tp.feed
    source[a : a + n] = np.arange(n)
    if post:
        kind[-1], end[-1], feed[-1] = RAPID, [tp.end[-1, 0], tp.end[-1, 1], safe], 0.0

    if single_feed:
        moves_xy = np.any(np.abs(tp.end[:, :2] - tp.start[:, :2]) > 0, axis=1) | (tp.kind >= ARC_CW)
        xy_cut = cutting & moves_xy
        one = _info_float(tp.info, "feed")
        if one is None or one <= 0:
            one = float(tp.feed[xy_cut].max()) if xy_cut.any() else 0.0
        f = feed[a : a + n]
        f[xy_cut] = one
        feed[a : a + n] = f

    given = ~np.isnan(end)
    q = np.rint(np.where(given, end, 0.0) * scale).astype(np.int64)
    # the current point before each row (rounded); row 0 starts unknown
    prev = np.empty_like(q)
    prev[1:] = q[:-1]
    prev[0] = 0
    prev_known = np.ones_like(given)
    prev_known[0] = False
    prev_known[1] = given[0]

    arcs = kind >= ARC_CW
    # moves shorter than the last written digit are dropped; a rounded arc whose
    # end equals its start is kept only if it really is a full circle
    same = np.all((q == prev) & prev_known, axis=1) | np.all(~given, axis=1)
    if arcs.any():
        same_xy = np.all(q[:, :2] == prev[:, :2], axis=1)
        sweep = np.zeros(m)
        ai = np.flatnonzero(arcs & same_xy)  # only these can be a full circle or a speck
        src = source[ai]
        sweep[ai] = arc_sweep(tp.start[src, :2], tp.end[src, :2], tp.center[src], tp.kind[src] == ARC_CCW)
        full = arcs & same_xy & (sweep > np.pi)
        drop = np.where(arcs, same_xy & ~full, same)
    else:
        full = np.zeros(m, bool)
        drop = same
    drop[0] = False
    if drop.any():
        keep = ~drop
        kind, q, given, center, feed, source = (
            kind[keep], q[keep], given[keep], center[keep], feed[keep], source[keep],
        )
    m = len(kind)
    prev = np.empty_like(q)
    prev[1:] = q[:-1]
    prev[0] = 0
    prev_known = np.ones_like(given)
    prev_known[0] = False
    prev_known[1:] = given[:-1] | prev_known[:-1]  # rows after the first XY rapid know X and Y

    arcs = kind >= ARC_CW
    axis_write = given & ((q != prev) | ~prev_known)
    axis_write[arcs, 0] = True  # arcs always carry X and Y
    axis_write[arcs, 1] = True
    if m > 1:
        # G0/G1 must carry an axis word (only possible to miss if a move was not dropped)
        empty = ~axis_write.any(axis=1) & ~arcs
        if empty.any():
            axis_write[empty, 2] = True

    iq = np.zeros(m, np.int64)
    jq = np.zeros(m, np.int64)
    if arcs.any():
        ai = np.flatnonzero(arcs)
        cq = center[ai]
        # I, J from the rounded current point (NISTIR 6556 §3.5.3.2: offsets from the start)
        sx, sy = prev[ai, 0] / scale, prev[ai, 1] / scale
        iq[ai] = np.rint((cq[:, 0] - sx) * scale).astype(np.int64)
        jq[ai] = np.rint((cq[:, 1] - sy) * scale).astype(np.int64)
        r1 = np.hypot(iq[ai], jq[ai]) / scale
        r2 = np.hypot(q[ai, 0] - prev[ai, 0] - iq[ai], q[ai, 1] - prev[ai, 1] - jq[ai]) / scale
        rule = RADIUS_RULE[units]
        bad = (np.abs(r1 - r2) > rule) | (r1 <= 0)
        if bad.any():
            b = int(np.flatnonzero(bad)[0])
            k = int(source[ai[b]])
            raise ExportError(
                f"arc move {k}: start radius {_num(r1[b])} and end radius {_num(r2[b])} {units} differ by more than "
                f"{rule} {units} (NISTIR 6556 arc rule); the toolpath's arc is not consistent"
            )

    fd = _FEED_DECIMALS[units]
    fq = np.rint(feed * 10**fd).astype(np.int64)
    f_write = np.zeros(m, bool)
    cut_rows = np.flatnonzero(kind != RAPID)
    if cut_rows.size and fq[cut_rows].min() <= 0:
        zero = cut_rows[fq[cut_rows] <= 0]
        own = zero[source[zero] >= 0]
        b = int(own[0] if own.size else zero[0])
        what = f"move {int(source[b])}" if source[b] >= 0 else "the plunge to the first move"
        raise ExportError(f"{what}: feed {_num(feed[b])} {units}/min rounds to 0 at {fd} decimal(s)")
    if cut_rows.size:
        fc = fq[cut_rows]
        change = np.ones(len(fc), bool)
        change[1:] = fc[1:] != fc[:-1]
        f_write[cut_rows] = change
    return dict(
        kind=kind, q=q, axis_write=axis_write, iq=iq, jq=jq, arcs=arcs, fq=fq, f_write=f_write, fd=fd,
        source=source,
    )


def _format_rows(rows, decimals: int, first_number: int | None, step: int = 1) -> str:
    kind, q, aw = rows["kind"], rows["q"], rows["axis_write"]
    m = len(kind)
    out = []
    for lo in range(0, m, _CHUNK):
        hi = min(m, lo + _CHUNK)
        sl = slice(lo, hi)
        k = hi - lo
        fields = []
        if first_number is not None:
            nums = step * np.arange(first_number + lo, first_number + hi, dtype=np.int64)
            fields.append(_field_number("N", nums, 0, np.ones(k, bool)))
        fields.append(_field_text(["G0", "G1", "G2", "G3"], kind[sl].astype(np.intp), np.ones(k, bool)))
        for c, letter in enumerate("XYZ"):
            fields.append(_field_number(letter, q[sl, c], decimals, aw[sl, c]))
        arcs = rows["arcs"][sl]
        fields.append(_field_number("I", rows["iq"][sl], decimals, arcs))
        fields.append(_field_number("J", rows["jq"][sl], decimals, arcs))
        fields.append(_field_number("F", rows["fq"][sl], rows["fd"], rows["f_write"][sl]))
        out.append(_render(fields, k))
    return "".join(out)


def gcode_text(
    toolpath: Toolpath,
    *,
    program_name: str = "pathgen",
    source: str = "",
    spindle_speed: float | None = None,
    line_numbers: bool = False,
    single_feed: bool = False,
    decimals: int | None = None,
    notes=(),
    frame=None,
    units: str | None = None,
) -> str:
    """The G-code program for ``toolpath``, as text ending in a newline.

    Parameters
    ----------
    toolpath : Toolpath
        Moves in ``toolpath.units`` (pathgen's toolpaths are in mm), feeds
        in units/min.
    program_name : str
        Name in the header comment.
    source : str
        The input file named in the header comment.
    spindle_speed : float, optional
        Spindle speed in rev/min; when given, ``S… M3`` starts the spindle
        before the first motion and ``M5`` stops it before ``M2``.
    line_numbers : bool
        Number the code lines ``N1``, ``N2``, … (at most N99999).
    single_feed : bool
        Write one feed (``toolpath.info["feed"]``, else the highest cutting
        feed) for every cutting move in XY instead of the per-move feeds;
        plunges keep their own feed.
    decimals : int, optional
        Decimals of coordinates: default and minimum 4 in mm, 5 in inch;
        at most 8.
    notes : sequence of str
        Extra header comment lines, before the caution.
    frame : pathgen.export.frame.Frame, optional
        What surrounds the moves (program number, tool, offsets, coolant,
        end code, numbering, comment style); None: the default frame, the
        program above.  The moves are the same with any frame.
    units : "mm", "inch" or None
        Units of the program: mm → G21, inch → G20; the toolpath is
        converted here, when it is written
        (:func:`pathgen.moves.toolpath_in_units`, 1 inch = 25.4 mm exactly).
        None: the toolpath's own units, written as they are.

    Returns
    -------
    str
        The program; byte-identical for the same input.

    Raises
    ------
    ExportError
        The toolpath cannot be written safely: no moves, a gap between
        moves, a cutting move without feed, an arc whose start and end radii
        differ by more than 0.002 mm (0.0002 inch) after rounding,
        coordinates beyond ±10⁶, too many lines for line numbers.
    InputError
        An option value is invalid.

    Examples
    --------
    >>> from pathgen.path.model import Toolpath, Line, Arc
    >>> tp = Toolpath.from_moves([Line((10, 0, -1), (0, 10, -1), 600.0)], info={"safe_height": 5.0})
    >>> print(gcode_text(tp).split("before cutting.)\\n")[1], end="")
    G21 G90 G17 G94 G40
    G0 Z5
    G0 X10 Y0
    G1 Z-1 F600
    G1 X0 Y10
    G0 Z5
    M2
    """
    if units is not None:
        toolpath = toolpath_in_units(toolpath, units)
    units, decimals, spindle_speed = _options(toolpath, decimals, spindle_speed)
    from .frame import Frame, lines_for_wide_arcs

    frame = Frame() if frame is None else frame
    if not isinstance(frame, Frame):
        raise InputError(f"frame must be a pathgen Frame, got {type(frame).__name__}")
    if frame.arc_digits is not None:
        toolpath, _ = lines_for_wide_arcs(toolpath, frame.arc_digits, decimals)
    rows = _program_rows(toolpath, units, decimals, bool(single_feed))
    head = _header(toolpath, str(program_name), str(source), notes, blocks=len(rows["kind"]))
    head = _frame_comments(head, toolpath, frame)
    pre = [("G20" if units == "inch" else "G21") + " G90 G17 G94 G40"]
    pre += frame.start_blocks(None if spindle_speed is None else f"S{_fixed(spindle_speed, 1)}")
    post = frame.end_blocks(spindle_speed is not None)
    m = len(rows["kind"])
    step = frame.block_step or (1 if line_numbers else 0)
    if step:
        total = step * (len(pre) + m + len(post))
        if total > _MAX_LINE_NUMBER:
            raise ExportError(
                f"the program has {len(pre) + m + len(post)} code lines, numbered every {step}, but line "
                f"numbers stop at N{_MAX_LINE_NUMBER} (5 digits, NISTIR 6556 §3.3.1): write it without "
                f"line numbers"
            )
        pre = [f"N{step * (i + 1)} {t}" for i, t in enumerate(pre)]
        first = len(pre) + 1
        post = [f"N{step * (first + m + i)} {t}" for i, t in enumerate(post)]
        body = _format_rows(rows, decimals, first, step)
    else:
        body = _format_rows(rows, decimals, None)
    body = _compensation_words(body, rows, toolpath)
    return frame.wrap("\n".join(head + pre) + "\n" + body + "\n".join(post) + "\n")


def _frame_comments(head: list[str], tp: Toolpath, frame) -> list[str]:
    """The header with the frame's and the compensation's lines, in the frame's comment style."""
    extra = []
    summary = frame.summary()
    if summary:
        extra.append(_comment(summary))
    comp = tp.info.get("compensation")
    if comp:
        word = comp["word"]
        extra.append(_comment(
            f"cutter compensation at the control: {word} D{comp['register']} "
            f"= tool {'left' if word == 'G41' else 'right'} of travel, the part line is programmed, "
            f"set D{comp['register']} to the tool radius {_num(comp['radius'])} {tp.units}"))
    if tp.info.get("arcs_as_lines"):
        extra.append(_comment(f"arcs written as lines: {tp.info['arcs_as_lines']}, their I or J "
                              f"would need more than {frame.arc_digits} integer digits"))
    head = head[: len(head) - len(CAUTION)] + extra + head[len(head) - len(CAUTION):]
    return [frame.style_comment(c) for c in head]


def _compensation_words(body: str, rows, tp: Toolpath) -> str:
    """Put G41/G42 Dn on the blocks that turn compensation on, G40 on those that turn it off."""
    comp = tp.info.get("compensation")
    if not comp:
        return body
    source = rows["source"]
    on = {int(i) for i in comp["on"]}
    off = {int(i) for i in comp["off"]}
    lines = body.split("\n")
    found = 0
    for row in np.flatnonzero(np.isin(source, list(on | off))):
        k = int(source[row])
        word = f"{comp['word']} D{comp['register']}" if k in on else "G40"
        text = lines[row]
        if text.startswith("N"):
            n, rest = text.split(" ", 1)
            lines[row] = f"{n} {word} {rest}"
        else:
            lines[row] = f"{word} {text}"
        found += 1
    if found != len(on) + len(off):
        raise ExportError("a move that turns cutter compensation on or off was too short to write")
    return "\n".join(lines)


def _code(text: str) -> str:
    """The program without its comment lines (the text a controller moves by);
    the frame may put % and O lines before the header."""
    return "\n".join(ln for ln in text.split("\n") if not ln.startswith(("(", ";")))


def write_gcode(toolpath: Toolpath, path, *, force: bool = False, check=None, **options) -> Path:
    """Write :func:`gcode_text` of ``toolpath`` to ``path`` atomically.

    Parameters
    ----------
    toolpath : Toolpath
    path : path-like
        The program file; its folder must exist.
    force : bool
        Replace an existing file (default: refuse with ExportError).
    **options
        Passed to :func:`gcode_text` (``program_name``, ``source``,
        ``spindle_speed``, ``line_numbers``, ``single_feed``, ``decimals``).
        ``program_name`` defaults to the file's stem.
    check : callable(text) -> list of str, optional
        Replays the program's text before anything is written (e.g.
        :func:`pathgen.verify.check.check_program`) and returns header lines
        stating what it measured; it raises to stop the write.  The file
        then carries those lines, and its code is the text checked.

    Returns
    -------
    pathlib.Path
        The path written.  Nothing is written if any check fails.
    """
    unknown = set(options) - {"program_name", "source", "spindle_speed", "line_numbers", "single_feed", "decimals",
                              "frame", "notes", "units"}
    if unknown:
        raise InputError(f"write_gcode got unknown option(s): {', '.join(sorted(unknown))}")
    p = Path(os.fspath(path))
    options.setdefault("program_name", p.stem)
    text = gcode_text(toolpath, **options)
    if check is not None:
        notes = list(options.pop("notes", ())) + list(check(text))
        checked = text
        text = gcode_text(toolpath, notes=notes, **options)
        if _code(text) != _code(checked):  # pragma: no cover - the notes are comments only
            raise ExportError("internal error: the program changed after its check; nothing was written")
    return atomic_write(p, text.encode("ascii"), force=force)
