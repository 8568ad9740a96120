"""A part program (several outlines in one program) replayed against its part.

The program's text is read back (:mod:`pathgen.verify.reader`) and cut
into *runs*: consecutive feed moves between two rapids that go below the
stock top (z = 0).  A pass of one outline is one run (the tool rises over a
tab on feed moves, so a pass lifted over tabs stays one run).  Each run
belongs to the outline whose exact tool-center curve q = P + d·N its flat
cutting moves follow most closely (the median distance of their end
points), so a hand-edited program is split the same way as one pathgen
wrote.  Then, per outline, on its own runs only:

* the two-sided deviation from that outline's tool-center curve
  (:func:`pathgen.verify.replay.replay_deviation`, curve → file measured per
  pass, so that the stretches over tabs, at another z but on the same x, y,
  cover the curve with the rest of their pass);
* the clearance of the tool center from that outline and the moves that
  gouge it (:func:`pathgen.path.clearance.clearance`);
* with tabs: the deepest pass read back, its depth, the stretches over the
  tabs and the depth cut under them (depth − tab height);
* the order: every run of an outline inside another comes before the
  deepest pass of the one around it (common practice: inner features are
  cut while the part is still held).

Lengths in mm.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np

from .check import _facts
from .replay import _Moves, _in_plane, tool_center_polyline

__all__ = ["cutting_runs", "replay_part", "shift_lines", "verify_part", "PartOutlineSpec"]


@dataclass(frozen=True, eq=False)
class PartOutlineSpec:
    """What one outline of a part expects (mm).

    number : the outline's number in the input.  contour : its fitted
    contour.  offset : signed tool offset along the left normal.  side :
    "outside", "inside" or "on".  expected : :class:`~pathgen.verify.check.Moves`
    of the toolpath made for it, or None.  inside : numbers of the outlines
    that lie inside it.  tabs : {"count", "height", "depth"} when the
    outline is cut with tabs, else None.
    """

    number: int
    contour: object
    offset: float
    side: str
    expected: object = None
    inside: tuple = ()
    tabs: dict | None = None


def cutting_runs(program, *, stock_top: float = 0.0) -> list[np.ndarray]:
    """Index arrays of the runs of consecutive feed moves between rapids
    that reach below ``stock_top`` (mm), in program order."""
    kind = np.asarray(program.kind)
    known = np.isfinite(program.start).all(axis=1) & np.isfinite(program.end).all(axis=1)
    idx = np.flatnonzero((kind != 0) & known)
    if not len(idx):
        return []
    cuts = np.flatnonzero(np.diff(idx) != 1) + 1
    runs = np.split(idx, cuts)
    low = np.minimum(program.start[:, 2], program.end[:, 2])
    return [r for r in runs if (low[r] < stock_top - 1e-9).any()]


def _sub(program, idx):
    """Some moves of a program: the same :class:`pathgen.verify.reader.Program`
    with the rows ``idx`` of its columns."""
    def pick(a):
        return None if a is None else np.asarray(a)[idx]

    return dataclasses.replace(program, **{name: pick(getattr(program, name)) for name in
                                           ("kind", "start", "end", "center", "feed", "line", "comp", "switch")})


def _run_points(program, run):
    """End points (xy) of a run's flat moves in the plane below the stock top (all its ends if none)."""
    k, s, e = np.asarray(program.kind)[run], program.start[run], program.end[run]
    flat = _in_plane(k, s, e) & (np.abs(e[:, 2] - s[:, 2]) <= 1e-9) & (e[:, 2] < 0)
    pick = flat if flat.any() else np.ones(len(run), bool)
    return np.vstack([s[pick, :2], e[pick, :2]])


def _tabs_read_back(program, passes, spec, tol):
    """The deepest pass, the stretches of it over the tabs and their depth (mm)."""
    want = spec.tabs
    expected_z = -(float(want["depth"]) - float(want["height"]))
    out = {"expected_count": int(want["count"]), "expected_cut_depth": -expected_z, "count": 0,
           "cut_depth": None, "depth": None, "lines": [], "ok": False}
    if not passes:
        return out
    kind = np.asarray(program.kind)
    flat = _in_plane(kind, program.start, program.end) & (np.abs(program.end[:, 2] - program.start[:, 2]) <= 1e-9)
    lows = [float(program.end[p[flat[p]], 2].min()) if flat[p].any() else np.inf for p in passes]
    deep = passes[int(np.argmin(lows))]
    zmin = min(lows)
    f = deep[flat[deep]]
    z = program.end[f, 2]
    over = f[(z > zmin + 1e-6) & (z < 0)]
    out["depth"] = -zmin
    if len(over):
        groups = np.split(over, np.flatnonzero(np.diff(over) != 1) + 1)
        out["count"] = len(groups)
        zs = program.end[over, 2]
        out["cut_depth"] = -float(zs.max())  # the shallowest stretch: the least that holds the part
        out["lines"] = [int(program.line[g[0]]) for g in groups]
        same = float(zs.max() - zs.min()) <= 1e-6
        out["ok"] = bool(same and out["count"] == out["expected_count"]
                         and abs(float(zs.max()) - expected_z) <= max(1e-3, 0.1 * tol))
    return out


def replay_part(program, specs, *, tool_radius: float, tolerance: float, machine=None) -> dict:
    """Measure a part program, read back, outline by outline.

    Parameters
    ----------
    program : :class:`~pathgen.verify.reader.Program` (mm).
    specs : list of :class:`PartOutlineSpec`, one per outline.
    tool_radius : mm (0 on the line).
    tolerance : the chord tolerance, mm.
    machine : Machine for the time estimate of the whole program, or None.

    Returns
    -------
    dict with ``outlines`` (one dict per spec, in the specs' order: the
    figures of :func:`pathgen.verify.check.verify_program` for that
    outline's runs, plus ``number``, ``passes``, ``lines`` [first, last] of
    its runs, ``tabs`` (see the module notes) and ``missing`` (no run
    follows it)), ``stray_runs`` (first lines of runs that follow no
    outline), ``order`` (problems of the cutting order, plain sentences)
    and ``time`` (s, the whole program as written, or None).
    """
    from scipy.spatial import cKDTree

    from .replay import program_time

    runs = cutting_runs(program)
    qs = [tool_center_polyline(s.contour, s.offset, tolerance) for s in specs]
    trees = [cKDTree(q[0]) for q in qs]
    owner = []
    far = max(0.5 * tool_radius, 20.0 * tolerance, 0.5)
    stray = []
    for run in runs:
        pts = _run_points(program, run)
        med = [float(np.median(t.query(pts)[0])) for t in trees]
        k = int(np.argmin(med))
        if med[k] > far:
            owner.append(-1)
            stray.append(int(program.line[run[0]]))
        else:
            owner.append(k)
    rows = []
    for k, spec in enumerate(specs):
        mine = [r for r, o in zip(runs, owner) if o == k]
        row = {"number": int(spec.number), "passes": len(mine), "missing": not mine, "tabs": None}
        if not mine:
            row.update({"deviation": None, "within_tolerance": False, "gouges": [], "clearance": None,
                        "lines": None, "tolerance": float(tolerance)})
            rows.append(row)
            continue
        idx = np.concatenate(mine)
        sub = _sub(program, idx)
        pos, local = 0, []
        for r in mine:
            local.append(np.arange(pos, pos + len(r)))
            pos += len(r)
        facts = _facts(sub, spec.contour, offset=spec.offset, tool_radius=tool_radius, side=spec.side,
                       tolerance=tolerance, expected=spec.expected, machine=None, passes=local, q=qs[k])
        row.update(facts)
        row["lines"] = [int(program.line[mine[0][0]]), int(program.line[mine[-1][-1]])]
        if spec.tabs is not None:
            row["tabs"] = _tabs_read_back(sub, local, spec, tolerance)
        rows.append(row)
    order = []
    by_number = {s.number: k for k, s in enumerate(specs)}
    for k, spec in enumerate(specs):
        mine = [r for r, o in zip(runs, owner) if o == k]
        if not mine:
            continue
        lows = [float(np.minimum(program.start[r, 2], program.end[r, 2]).min()) for r in mine]
        through = mine[int(np.argmin(lows))]  # the deepest pass: the one that frees what it encloses
        for n in spec.inside:
            j = by_number.get(n)
            theirs = [r for r, o in zip(runs, owner) if o == j]
            late = [r for r in theirs if r[-1] > through[0]]
            if late:
                order.append(f"outline {n} is cut at line {int(program.line[late[0][0]])}, after the deepest "
                             f"pass of outline {spec.number} around it (line {int(program.line[through[0]])}): "
                             "the part may have come loose")
    return {"outlines": rows, "stray_runs": stray, "order": order,
            "time": program_time(program, machine) if machine is not None else None}


def shift_lines(facts: dict, n: int) -> dict:
    """:func:`replay_part`'s figures with every line number moved ``n``
    lines down: a program's header gains the replay's own comment lines
    after the replay, and the figures must name the lines of the file."""
    import re

    def move(v):
        return None if v is None else int(v) + n

    from .check import shift_facts

    rows = []
    for row in facts["outlines"]:
        row = shift_facts(row, n)  # worst line, gouges, clearance: as for one outline
        if row.get("lines") is not None:
            row["lines"] = [move(v) for v in row["lines"]]
        if isinstance(row.get("tabs"), dict) and row["tabs"].get("lines") is not None:
            row["tabs"] = dict(row["tabs"], lines=[move(v) for v in row["tabs"]["lines"]])
        rows.append(row)
    order = [re.sub(r"\bline (\d+)", lambda m: f"line {int(m.group(1)) + n}", t) for t in facts["order"]]
    return {**facts, "outlines": rows, "stray_runs": [move(v) for v in facts["stray_runs"]], "order": order}


def deepest_intrusion(program, material, tool_radius: float):
    """How deep the tool disc enters the part's material (shapely, mm) on
    the flat cutting moves below the stock top, where, and at which line
    (:func:`pathgen.path.join.intrusion` per depth).  Returns
    (depth, (x, y) or None, line or None, blocks measured)."""
    from ..path.join import intrusion
    from ..path.model import Toolpath

    known = np.isfinite(program.start).all(axis=1) & np.isfinite(program.end).all(axis=1)
    flat = known & (program.kind != 0) & (np.abs(program.start[:, 2] - program.end[:, 2]) <= 1e-9) \
        & (program.end[:, 2] < 0)
    worst, where, line, moves = 0.0, None, None, 0
    for z in np.unique(np.round(program.end[flat, 2], 6)):
        sel = np.flatnonzero(flat & (np.abs(program.end[:, 2] - z) <= 1e-6))
        moves += len(sel)
        level = Toolpath(program.kind[sel], program.start[sel], program.end[sel], program.center[sel],
                         program.feed[sel], units="mm", tool_diameter=2.0 * float(tool_radius))
        depth, at = intrusion(level, material)
        if depth > worst:
            mv = _Moves(program.kind[sel], program.start[sel], program.end[sel], program.center[sel])
            _, who = mv.distance(np.asarray([at], float))
            worst, where, line = depth, at, int(program.line[sel[int(who[0])]])
    return worst, where, line, moves


def part_header_lines(facts: dict, units: str) -> list[str]:
    """Comment texts (without parentheses) for a part program's header: one
    line per outline with its replayed figures and its tolerance budget."""
    from .check import _num, _u

    u = units
    out = []
    for row in facts["outlines"]:
        if row.get("missing"):
            out.append(f"outline {row['number']}: no cutting moves read back")
            continue
        n = row["number"]
        npass = f"{row['passes']} pass{'es' if row['passes'] != 1 else ''}"
        parts = [f"outline {n}: replayed deviation {_num(_u(row['deviation'], u))} {u} "
                 f"[two-sided, {row['moves_measured']} moves, {npass}]"]
        cl = row.get("clearance")
        if cl is not None:
            parts.append(f"clearance {_num(_u(cl['smallest'], u))} {u} [tool radius {_num(_u(cl['tool_radius'], u))}]")
        t = row.get("tabs")
        if t is not None:
            parts.append(f"{t['count']} tabs read back, cut {_num(_u(t['cut_depth'], u)) if t['cut_depth'] else 0} "
                         f"{u} deep under them [depth {_num(_u(t['depth'], u))}]")
        out.append(", ".join(parts))
        b = row.get("budget")
        if b is not None:
            pts = (f"points to contour {_num(_u(b['points'], u))}" if b["smoothing"] is None
                   else f"points to contour: smoothed, stated apart [largest {_num(_u(b['smoothing'][0], u))}]")
            out.append(f"outline {n} budget: {pts}, contour to moves {_num(_u(b['approximation'], u))}, moves to "
                       f"text at most {_num(_u(b['rounding'], u))} [{b['decimals']} decimals], total "
                       f"{_num(_u(b['total'], u))} <= {_num(_u(b['tolerance'], u))} {u}")
    return out


def part_program_dict(facts: dict, units: str) -> dict:
    """The replay's figures for a part's JSON, lengths in ``units``: per
    outline number, the fields of :func:`pathgen.verify.check.program_dict`
    plus ``passes``, ``lines``, ``missing`` and ``tabs``."""
    from .check import _u, program_dict

    def u(v):
        return None if v is None else _u(float(v), units)

    rows = {}
    for row in facts["outlines"]:
        if row.get("missing"):
            d = {"missing": True, "deviation": None, "within_tolerance": False, "gouges": [], "clearance": None}
        else:
            d = program_dict(row, units)
            d["missing"] = False
        d["passes"] = row["passes"]
        d["lines"] = row["lines"]
        t = row.get("tabs")
        d["tabs"] = None if t is None else {
            "count": t["count"], "expected_count": t["expected_count"], "cut_depth": u(t["cut_depth"]),
            "expected_cut_depth": u(t["expected_cut_depth"]), "depth": u(t["depth"]), "lines": t["lines"],
            "ok": t["ok"]}
        rows[row["number"]] = d
    return rows


def verify_part(program, result, *, machine=None) -> dict:
    """Figures and problems of any program (already read) against a part
    (a :class:`pathgen.partjob.PartResult` made with a toolpath), for
    ``pathgen verify``.

    Returns :func:`replay_part`'s figures plus ``material`` (the deepest
    entry of the tool disc into the part's material on any flat cutting
    move: ``depth``, ``at``, ``line``), ``tolerance``, ``problems`` (the
    reader's rule breaks), ``feed_moves_without_f``, ``units``, ``program``
    (the file) and ``status``: 0 clean, 1 a gouge, an outline off the
    tolerance or not cut, cutting moves that follow no outline, a hole cut
    after the outline around it, or a rule break.
    """
    tol = float(result.toolpath.tolerance)  # mm, as the part's toolpath
    facts = replay_part(program, list(result.specs), tool_radius=result.tool_radius, tolerance=tol, machine=machine)
    depth, at, line = 0.0, None, None
    if result.material is not None and result.tool_radius > 0:
        depth, at, line, _ = deepest_intrusion(program, result.material, result.tool_radius)
    facts["material"] = {"depth": float(depth), "at": None if at is None else [float(at[0]), float(at[1])],
                         "line": line, "ok": bool(depth <= tol)}
    facts["tolerance"] = tol
    facts["units"] = program.units
    facts["program"] = program.source
    facts["problems"] = [p.to_dict() for p in program.problems]
    facts["feed_moves_without_f"] = [p.line for p in program.problems if p.rule == "no feed"]
    bad = (any(r["missing"] or not r["within_tolerance"] or r["gouges"]
               or (r["tabs"] is not None and not r["tabs"]["ok"]) for r in facts["outlines"])
           or facts["stray_runs"] or facts["order"] or facts["problems"] or not facts["material"]["ok"])
    facts["status"] = 1 if bad else 0
    return facts


def part_verify_dict(facts: dict, units: str) -> dict:
    """``pathgen verify --json`` on a part: lengths in ``units``."""
    from .check import _u

    m = facts["material"]
    return {
        "outlines": part_program_dict(facts, units),
        "stray_runs": facts["stray_runs"],
        "order": facts["order"],
        "material": {"depth": _u(m["depth"], units), "line": m["line"], "ok": m["ok"],
                     "at": None if m["at"] is None else [_u(v, units) for v in m["at"]]},
        "tolerance": _u(facts["tolerance"], units),
        "time": facts["time"],
        "units": facts["units"],
        "program": facts["program"],
        "problems": facts["problems"],
        "feed_moves_without_f": facts["feed_moves_without_f"],
        "status": facts["status"],
    }
