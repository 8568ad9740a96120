"""A program for cutter compensation at the control (G41/G42), read back.

Such a program follows the part's own line; the control moves the tool by
the radius held in the D register to the left (G41) or right (G42) of
travel (Kramer, Proctor & Messina, NISTIR 6556, 2000, cutter radius
compensation).  The tool path itself exists only at the control, so what
can be checked on the text is:

* the programmed part line's two-sided deviation from the contour
  (:func:`pathgen.verify.replay.replay_deviation` with offset 0), on the
  moves the control offsets (between the block that turns compensation on
  and the one that turns it off);
* what the control needs to offset it (common practice): compensation
  turned on on a straight move at least the tool radius long, the first
  compensated move a straight line, compensation turned off on a straight
  move at least the tool radius long, and no arc bending toward the tool
  whose radius is not larger than the tool's (the control could not follow
  it; NISTIR 6556 lists it as an error);
* the tool disc swept along the line a control would make: the read-back
  part line offset by the tool radius on the tool side, computed here with
  shapely's ``offset_curve`` (GEOS; round joins at convex corners), not with
  pathgen's own offset code, and joined to the entry and exit moves'
  free-air ends.  It may enter the part by at most the tolerance.

Lengths in mm.
"""

from __future__ import annotations

import math

import numpy as np

from .reader import LINE, RAPID

__all__ = ["compensated_facts", "compensation_lines"]

_SWEEP_STEP = 0.05  # mm between the samples of the offset line


def _length(program, i) -> float:
    return float(np.hypot(*(program.end[i, :2] - program.start[i, :2])))


def _runs(program):
    """(on, off) block indices of each stretch under compensation."""
    sw = np.asarray(program.switch)
    on = list(np.flatnonzero(sw == 1))
    off = list(np.flatnonzero(sw == -1))
    out = []
    for i in on:
        later = [j for j in off if j > i]
        out.append((int(i), int(later[0]) if later else None))
    return out


def compensated_facts(program, contour, *, tool_radius: float, side: str, tolerance: float, expected=None) -> dict:
    """Figures of a compensated program (read with ``compensation=True``).

    Returns the keys of :func:`pathgen.verify.check.verify_program`'s
    figures (``deviation`` is the part line's, from the contour) plus
    ``compensation``: ``word``, ``register``, ``on_lines``, ``off_lines``,
    ``entry_lengths``, ``exit_lengths`` (mm), ``tightest_toward`` (smallest
    radius of an arc bending toward the tool, mm, or None),
    ``swept_depth`` (how far the swept tool disc enters the part, mm),
    ``swept_at``, ``swept_line``, ``tool_radius``, ``problems`` (dicts:
    line, rule, message) and ``ok``.
    """
    import shapely
    from scipy.spatial import cKDTree

    from .check import _facts
    from .part import _sub
    from .replay import move_polylines, tool_center_polyline, _polyline_distance

    r = float(tool_radius)
    kind = np.asarray(program.kind)
    comp = np.asarray(program.comp)
    line = np.asarray(program.line)
    problems = []

    def problem(i, rule, message):
        problems.append({"line": int(line[i]) if i is not None else None, "rule": rule, "message": message})

    runs = _runs(program)
    words = sorted({int(c) for c in comp if c})
    word = f"G{words[0]}" if len(words) == 1 else ("mixed" if words else None)
    if not runs:
        problem(None, "compensation", "no block turns cutter compensation on (G41 or G42)")
    entry_lengths, exit_lengths = [], []
    for i, j in runs:
        L = _length(program, i)
        entry_lengths.append(L)
        if kind[i] != LINE:
            problem(i, "compensation on", f"G{comp[i]} is turned on on a {'rapid' if kind[i] == RAPID else 'arc'}: "
                                          "turn it on on a straight G1 move (common practice)")
        elif L < r - 1e-9:
            problem(i, "compensation on", f"G{comp[i]} is turned on on a move of {L:.4f} mm, shorter than the tool "
                                          f"radius {r:g} mm: the control cannot build the offset (common practice)")
        if i + 1 < len(kind) and kind[i + 1] != LINE:
            problem(i + 1, "first compensated move", "the first move under compensation is not a straight line "
                                                     "(common practice: no arc as the first compensated move)")
        if j is None:
            problem(i, "compensation off", "cutter compensation is never turned off (G40) after this line")
            continue
        L = _length(program, j)
        exit_lengths.append(L)
        if kind[j] != LINE or L < r - 1e-9:
            problem(j, "compensation off", f"G40 on {'an arc' if kind[j] != LINE else f'a move of {L:.4f} mm'}: turn "
                                           f"compensation off on a straight move away from the part at least the tool "
                                           f"radius {r:g} mm long (common practice)")
    # the part line: the moves strictly between on and off
    inner = np.zeros(len(kind), bool)
    for i, j in runs:
        inner[i + 1 : (j if j is not None else len(kind))] = True
    inner &= kind != RAPID
    idx = np.flatnonzero(inner)
    passes, pos = [], 0
    for i, j in runs:
        n = int(np.sum(inner[i + 1 : (j if j is not None else len(kind))]))
        passes.append(np.arange(pos, pos + n))
        pos += n
    sub = _sub(program, idx)
    facts = _facts(sub, contour, offset=0.0, tool_radius=0.0, side="on", tolerance=tolerance, expected=expected,
                   machine=None, passes=passes)
    facts["blocks"] = int(len(kind))
    # arcs bending toward the tool (G3 under G41, G2 under G42): the control needs R > r
    arcs = np.flatnonzero(inner & (kind >= 2))
    toward = arcs[((kind[arcs] == 3) & (comp[arcs] == 41)) | ((kind[arcs] == 2) & (comp[arcs] == 42))]
    radii = np.hypot(*(program.start[toward, :2] - program.center[toward]).T)
    tight = None if not len(toward) else float(radii.min())
    for i, R in zip(toward, radii):
        if R <= r:
            problem(i, "arc toward the tool", f"an arc of radius {R:.4f} mm bends toward the tool, not larger than "
                                              f"the tool radius {r:g} mm: the control cannot follow it "
                                              "(NISTIR 6556: tool radius not less than arc radius with comp)")
    # the tool disc swept along the part line offset by r (shapely), against the part
    q, qj = tool_center_polyline(contour, 0.0, tolerance)
    part = shapely.Polygon(q) if contour.closed else None
    worst, at, where_line = 0.0, None, None
    for (i, j), p in zip(runs, passes):
        if not len(p):
            continue
        sel = idx[p]
        pts, owner, _ = move_polylines(kind[sel], program.start[sel], program.end[sel], program.center[sel], tolerance)
        keep = np.r_[True, np.hypot(*np.diff(pts, axis=0).T) > 1e-9]
        pts, owner = pts[keep], owner[keep]
        if len(pts) < 2:
            continue
        sign = 1.0 if comp[i] == 41 else -1.0
        center = shapely.LineString(pts).offset_curve(sign * r, join_style="round", quad_segs=64)
        c = np.asarray(shapely.get_coordinates(shapely.segmentize(center, _SWEEP_STEP)))
        # the entry and exit moves: from their free-air ends to the offset line's ends
        ends = [np.asarray(program.start[i, :2])] + ([np.asarray(program.end[j, :2])] if j is not None else [])
        for e in ends:
            near = c[0] if np.hypot(*(c[0] - e)) <= np.hypot(*(c[-1] - e)) else c[-1]
            n = max(2, int(math.ceil(np.hypot(*(near - e)) / _SWEEP_STEP)) + 1)
            c = np.vstack([c, e + np.linspace(0.0, 1.0, n)[:, None] * (near - e)])
        d, _ = _polyline_distance(c, q, qj)
        if part is not None:
            inside = shapely.contains_xy(part, c[:, 0], c[:, 1])
            into = inside if side == "outside" else ~inside
        else:
            into = np.zeros(len(c), bool)
        depth = np.where(into, r + d, r - d)
        k = int(np.argmax(depth))
        if depth[k] > worst:
            _, o = cKDTree(pts).query(c[k])
            worst, at, where_line = float(depth[k]), [float(c[k, 0]), float(c[k, 1])], int(line[sel[owner[o]]])
    gouges = [{"line": where_line, "depth": worst}] if worst > tolerance else []
    facts["gouges"] = gouges
    facts["clearance"] = None
    facts["compensation"] = {
        "word": word, "register": program.register,
        "side": {"G41": "left of travel", "G42": "right of travel"}.get(word),
        "on_lines": [int(line[i]) for i, _ in runs], "off_lines": [int(line[j]) for _, j in runs if j is not None],
        "entry_lengths": entry_lengths, "exit_lengths": exit_lengths, "tightest_toward": tight,
        "swept_depth": worst, "swept_at": at, "swept_line": where_line, "tool_radius": r,
        "problems": problems, "ok": not problems and not gouges,
    }
    return facts


def compensation_lines(facts: dict, units: str) -> list[str]:
    """Comment texts for the header (and the report): what the replay of a
    compensated program measured."""
    from .check import _num, _u

    u = units
    c = facts["compensation"]
    on = ", ".join(map(str, c["on_lines"])) or "none"
    entry = min(c["entry_lengths"]) if c["entry_lengths"] else None
    exit_ = min(c["exit_lengths"]) if c["exit_lengths"] else None
    tight = ("no arc bends toward the tool" if c["tightest_toward"] is None
             else f"the tightest arc bending toward the tool has radius {_num(_u(c['tightest_toward'], u))} {u}")
    out = [
        f"replayed from this text: the programmed part line strays {_num(_u(facts['deviation'], u))} {u} from the "
        f"contour [two-sided, {facts['moves_measured']} moves]",
        f"replayed compensation: {c['word']} D{c['register']} on at line(s) {on} on straight moves of at least "
        + (f"{_num(_u(entry, u))}" if entry is not None else "-") + f" {u}, off on straight moves of at least "
        + (f"{_num(_u(exit_, u))}" if exit_ is not None else "-")
        + f" {u} [tool radius {_num(_u(c['tool_radius'], u))}], {tight}",
        f"replayed sweep: the tool disc along this part line offset by the tool radius [computed from the text, "
        f"shapely] enters the part by at most {_num(_u(max(c['swept_depth'], 0.0), u))} {u}",
    ]
    return out


def part_line_moves(tp):
    """:class:`~pathgen.verify.check.Moves` of a part-line toolpath
    (:func:`pathgen.path.compensate.part_line_toolpath`, mm) with ``along``
    the moves of the part line itself: not the entry and exit moves, nor
    the straight tangent runs next to them (they run in free air, and are
    checked by the sweep)."""
    import dataclasses

    from .check import Moves

    m = Moves.from_toolpath(tp)
    along = np.zeros(len(m.kind), bool)
    c = tp.info.get("compensation") or {}
    for a, b in zip(c.get("on", ()), c.get("off", ())):
        along[a + 2 : b - 1] = True
    return dataclasses.replace(m, along=along)
