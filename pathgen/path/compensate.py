"""The part line for cutter compensation at the control (G41/G42).

Shops that trim size with wear offsets at the control want the program to
follow the part's own line and let the control offset it by the radius in
a D register.  :func:`part_line_toolpath` builds that program's moves from
the same choices as the computed tool-center path (seam, travel, passes,
depths, heights), so the control, offsetting by the tool radius, follows
the same tool-center path within the tolerance.

Rules followed (NISTIR 6556, Kramer, Proctor and Messina, 2000, cutter
radius compensation; with the common practice of the trade):

* G41 when the tool is on the left of the direction of travel, G42 on the
  right; the D word names the register holding the radius.
* Compensation is turned on on a straight G1 move in free air that is
  longer than the tool radius (here: lead length + radius, perpendicular
  to the part line), from a point at least the tool radius clear of the
  part (the plunge is made there, compensation off).
* The first compensated move is a straight line: the part line's tangent
  at the seam, short enough that it strays from the curve by at most half
  the tolerance (√(tol·R) on an arc of radius R).
* After the part line, a straight tangent move, then G40 on a straight
  move away from the part, as long as the entry.

Spots the tool cannot reach, and arcs bending toward the tool with a
radius not larger than the tool's, are refused: a control offsetting there
stops or gouges.
"""

from __future__ import annotations

import math

import numpy as np

from ..errors import InputError
from .build import approximate_all, close_chain, start_at, tangent_at, choose_seam
from .flatten import drop_tiny
from .measure import Chain
from .model import ARC_CCW, ARC_CW, LINE, RAPID, Toolpath
from .offset import distance_to_contour, regular_windows

__all__ = ["part_line_toolpath"]


def _rot(v, left: bool):
    """v turned a quarter to the left (or right)."""
    return np.array([-v[1], v[0]]) if left else np.array([v[1], -v[0]])


def part_line_toolpath(contour, tool_center: Toolpath, tool, cut, machine, *, register: int = 1,
                       seam=None, moves: str = "arcs", units: str = "mm") -> Toolpath:
    """The part line, with entry and exit moves for compensation at the control.

    Parameters
    ----------
    contour : Contour (mm).
    tool_center : the computed tool-center toolpath **in mm** for the same
        contour, tool and cut (:func:`pathgen.path.build.make_toolpath`):
        its seam, travel, passes, depths, heights and feeds are followed.
    tool, cut, machine : as for ``make_toolpath``.
    register : the D register (0 to 99).
    seam : the seam point asked for (mm), as given to ``make_toolpath``.
    moves : "arcs" or "lines".
    units : "mm" or "inch": kept for callers; the toolpath is in mm (a
        writer converts it when it writes inch).

    Returns
    -------
    Toolpath
        Moves on the part line (offset 0) with ``info["compensation"]`` =
        ``{"word": "G41"|"G42", "register": D, "radius": r, "on": [i], "off":
        [i]}`` (indices of the moves that turn compensation on and off),
        ``deviation`` the measured distance of the part line from the
        contour, ``time`` planned on the tool-center geometry.

    Raises
    ------
    InputError
        No tool or a cut on the line; spots the tool cannot reach; no room
        for the entry or exit move.
    """
    from ..checks.feed import feeds_for_moves

    info0 = tool_center.info
    r = float(tool.radius)
    d = float(info0.get("offset", 0.0))
    if r <= 0 or d == 0.0:
        raise InputError("cutter compensation at the control needs a tool diameter and a side "
                         "outside or inside the outline (on the line there is nothing to offset)")
    # trims at the contour's sharp corners are what a control does there too
    # (it meets the two offsets); any other trim (a stretch tighter than the
    # tool, a neck narrower than it) would make an offsetting control gouge
    corners = contour(contour.breaks[list(contour.corners)]) if contour.corners else np.zeros((0, 2))
    odd = [s for s in info0.get("trimmed", ()) if s.get("reason") != "overlap" or not len(corners)
           or np.hypot(*(corners - [s["x"], s["y"]]).T).min() > 4.0 * float(tool.radius)]
    if odd:
        s = odd[0]
        raise InputError(f"cutter compensation at the control: the tool cannot reach the contour near "
                         f"({s['x']:.4f}, {s['y']:.4f}) mm, where a control offsetting the part line would "
                         f"stop or gouge; use the computed tool-center path (the default) or a smaller tool")
    tol = float(cut.tolerance)
    lead_len = float(info0["lead_length"])
    forward = info0["travel"] == "with the contour"
    lo, hi = contour.domain
    if contour.closed:
        ts = choose_seam(contour, keep_away=lead_len + r, d=d)
        lo, hi = ts, ts + (hi - lo)
    windows, _, _ = regular_windows(contour, 0.0, lo, hi, tol)
    parts, dev, _ = approximate_all(contour, windows, 0.0, tol, moves)
    chain = close_chain(drop_tiny(Chain.concat(parts)), contour.closed)
    if seam is not None and contour.closed:
        chain = start_at(chain, contour(choose_seam(contour, near=seam)))
    if not forward:
        chain = chain.reversed()
    left = (d > 0) == forward  # tool on the left of travel
    word = "G41" if left else "G42"

    # arcs bending toward the tool must be larger than the tool
    arcs = np.flatnonzero(chain.kind != LINE)
    radius = np.hypot(*(chain.start[arcs] - chain.center[arcs]).T)
    tangents = np.array([tangent_at(chain, int(i), False) for i in arcs]).reshape(-1, 2)
    toward = np.array([(_rot(t, left) @ (c - s)) > 0 for t, c, s in
                       zip(tangents, chain.center[arcs], chain.start[arcs])], bool)
    small = toward & (radius <= r + tol)
    if small.any():
        i = int(arcs[np.flatnonzero(small)[0]])
        raise InputError(f"cutter compensation at the control: an arc of radius {radius[small][0]:.4f} mm "
                         f"near ({chain.start[i][0]:.4f}, {chain.start[i][1]:.4f}) bends toward the tool "
                         f"and is not larger than the tool radius {r:g} mm")

    dist = distance_to_contour(contour, tol, r)

    def run(point, tangent, kind_first, radius_first, backwards):
        """The tangent run (straight, on the part line's tangent) and the free-air point."""
        room = lead_len if kind_first == LINE else min(lead_len, math.sqrt(tol * radius_first))
        n = _rot(tangent, left)
        u = np.linspace(0.0, 1.0, 50)[:, None]
        for _ in range(20):  # shorter until its offset stays clear of the part within half the tolerance
            p_run = point - room * tangent if backwards else point + room * tangent
            if dist(point + u * (p_run - point) + r * n).min() >= r - 0.5 * tol:
                break
            room *= 0.5
        else:
            raise InputError("cutter compensation at the control: no straight run along the part line fits "
                             f"at ({point[0]:.4f}, {point[1]:.4f}) mm; choose another seam")
        for la in (lead_len + r, 0.5 * lead_len + r, 0.25 * lead_len + r, 1.1 * r):
            free = p_run + la * n
            if dist(free[None])[0] >= r + tol:
                return p_run, free
        raise InputError(f"cutter compensation at the control: no room for a straight move longer than "
                         f"the tool radius {r:g} mm on the tool side near ({point[0]:.4f}, {point[1]:.4f}) mm")

    def first_radius(i):
        return float(np.hypot(*(chain.start[i] - chain.center[i]))) if chain.kind[i] != LINE else math.inf

    k_last = len(chain) - 1
    p0, t0 = chain.start[0], tangent_at(chain, 0, False)
    pe, te = chain.end[-1], tangent_at(chain, k_last, True)
    p_in, a_in = run(p0, t0, chain.kind[0], first_radius(0), True)
    p_out, a_out = run(pe, te, chain.kind[k_last], first_radius(k_last), False)
    # the tangent runs, offset by the radius, stay clear of the part (within the tolerance)
    for a, b in ((p_in, p0), (pe, p_out)):
        n = _rot((b - a) / np.hypot(*(b - a)), left)
        u = np.linspace(0.0, 1.0, 50)[:, None]
        clear = dist(a + u * (b - a) + r * n).min()
        if clear < r - tol:
            raise InputError("cutter compensation at the control: the straight run at the seam would cut "
                             f"{r - clear:.4f} mm into the part; choose another seam")

    safe = float(info0["safe_height"])
    depth = float(info0["depth"])
    n_pass = int(info0["passes"])
    feed = float(info0["feed"])
    plunge = float(info0["plunge_feed"])
    rows = []  # kind, start2, end2, center2, z0, z1, feed
    on, off = [], []
    zero = np.zeros(2)
    rows.append((RAPID, a_in, a_in, zero, safe, safe, 0.0))
    for k in range(1, n_pass + 1):
        z = -depth * k / n_pass
        if k > 1:
            rows.append((RAPID, a_out, a_out, zero, z_prev, safe, 0.0))
            rows.append((RAPID, a_out, a_in, zero, safe, safe, 0.0))
        rows.append((LINE, a_in, a_in, zero, safe, z, plunge))
        on.append(len(rows))
        rows.append((LINE, a_in, p_in, zero, z, z, feed))
        rows.append((LINE, p_in, p0, zero, z, z, feed))
        rows.extend((int(chain.kind[i]), chain.start[i], chain.end[i], chain.center[i], z, z, feed)
                    for i in range(len(chain)))
        rows.append((LINE, pe, p_out, zero, z, z, feed))
        off.append(len(rows))
        rows.append((LINE, p_out, a_out, zero, z, z, feed))
        z_prev = z
    rows.append((RAPID, a_out, a_out, zero, z_prev, safe, 0.0))

    kind = np.array([row[0] for row in rows], np.int8)
    start = np.array([[*row[1], row[4]] for row in rows], float)
    end = np.array([[*row[2], row[5]] for row in rows], float)
    center = np.array([row[3] for row in rows], float)
    feeds = np.array([row[6] for row in rows], float)

    # the feed plan runs on the tool-center geometry (lines moved by r, arcs R ± r)
    ts_, te_, = start.copy(), end.copy()
    comp = np.zeros(len(rows), bool)
    for a, b in zip(on, off):
        comp[a + 1 : b] = True
    for i in np.flatnonzero(comp):
        s2, e2, c2 = start[i, :2], end[i, :2], center[i]
        if kind[i] == LINE:
            n = _rot((e2 - s2) / np.hypot(*(e2 - s2)), left)
            ts_[i, :2], te_[i, :2] = s2 + r * n, e2 + r * n
        else:
            rr = float(np.hypot(*(s2 - c2)))
            tang = _rot(s2 - c2, kind[i] == ARC_CCW) / rr
            grow = -1.0 if (_rot(tang, left) @ (c2 - s2)) > 0 else 1.0
            f = (rr + grow * r) / rr
            ts_[i, :2], te_[i, :2] = c2 + f * (s2 - c2), c2 + f * (e2 - c2)
    planned, time_s = feeds_for_moves(kind, ts_, te_, center, feed=feeds, machine=machine)
    planned = np.where(kind == RAPID, 0.0, planned)

    info = dict(info0)
    info.update({
        "programmed": "part line",
        "lead": "line",
        "compensation": {"word": word, "register": int(register), "radius": r, "on": on, "off": off},
        "blocks": {"rapid": int(np.sum(kind == RAPID)), "line": int(np.sum(kind == LINE)),
                   "arc": int(np.sum(kind >= ARC_CW)), "per_pass": int(len(chain))},
        "part_line_deviation": float(dev),
    })
    meta = dict(units="mm", tool_diameter=float(tool.diameter), side=cut.side, tolerance=tol,
                deviation=float(dev), time=float(time_s), info=info)
    return Toolpath(kind, start, end, center, planned, **meta)
