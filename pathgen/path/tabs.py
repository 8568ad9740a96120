"""Tabs: small uncut bridges that keep a through-cut part in the sheet.

Common practice for sheet work: a few tabs, evenly spaced, on straight or
gentle stretches away from corners; on the passes that go below the tab
top the tool rises over each tab, so the material under it is cut only to
depth − tab height.  The tool center rises over the tab width plus the
tool diameter, so the bridge left in the part is the tab width wide.

Placement (:func:`place_tabs`): the deepest pass's cutting moves are
walked by length; a stretch is *eligible* when the tool center there
follows the outline at the tool radius (not a lead), the move is a line or
an arc of radius at least twice the tab's span, and it lies at least the
tool radius from a corner of the path (a turn of more than 5° between
moves) and a tab span from every tight spot.  Tab k aims at
(k + ½)·L/N along the path and moves to the nearest eligible place.

:func:`add_tabs` rewrites the passes below the tab top: each move is split
where a tab starts and ends (lines into lines, arcs into arcs about the
same center, so the XY path is unchanged), the stretch over the tab runs
at z = −depth + height, and straight vertical moves at the plunge feed go
up and down at its ends.
"""

from __future__ import annotations

import math

import numpy as np

from ..errors import InputError
from ..geometry import arc_geometry, turn_angle
from .model import ARC_CCW, ARC_CW, LINE, RAPID, Toolpath

__all__ = ["place_tabs", "add_tabs", "TURN_LIMIT"]

#: A turn between two moves above this (radians) is a corner tabs keep away from.
TURN_LIMIT = math.radians(5.0)


def _pass_moves(tp: Toolpath):
    """Indices of the XY cutting moves of the deepest pass, and its z."""
    zmin = float(min(tp.start[:, 2].min(), tp.end[:, 2].min()))
    sel = (tp.kind != RAPID) & (tp.start[:, 2] == zmin) & (tp.end[:, 2] == zmin)
    sel &= np.any(tp.start[:, :2] != tp.end[:, :2], axis=1) | (tp.kind >= ARC_CW)
    return np.flatnonzero(sel), zmin


def _arc(tp, i):
    s, e, c = tp.start[i, :2], tp.end[i, :2], tp.center[i]
    r, a0, sw = arc_geometry(s, e, c, tp.kind[i] == ARC_CCW)
    return c, float(r), float(a0), float(sw)


def _length(tp, i) -> float:
    if tp.kind[i] == LINE:
        return float(np.hypot(*(tp.end[i, :2] - tp.start[i, :2])))
    _, r, _, sw = _arc(tp, i)
    return r * abs(sw)


def _point(tp, i, u):
    """XY and unit tangent at fraction u of move i."""
    if tp.kind[i] == LINE:
        s, e = tp.start[i, :2], tp.end[i, :2]
        v = (e - s) / max(float(np.hypot(*(e - s))), 1e-300)
        return s + u * (e - s), v
    c, r, a0, sw = _arc(tp, i)
    a = a0 + u * sw
    sgn = 1.0 if sw > 0 else -1.0
    return c + r * np.array([math.cos(a), math.sin(a)]), sgn * np.array([-math.sin(a), math.cos(a)])


def place_tabs(tp: Toolpath, *, count: int, width: float, edge_distance, spots=(),
               step: float = 0.1) -> list[dict]:
    """Tab places on a toolpath (lengths in mm, as pathgen's toolpaths are).

    Parameters
    ----------
    tp : one outline's toolpath.
    count : number of tabs.
    width : tab width (the bridge left in the part).
    edge_distance : callable (k, 2) points → distance to the outline; a
        stretch is on the cut (not a lead) when it is the tool radius.
    spots : (x, y) of tight spots to keep away from.

    Returns
    -------
    list of dicts: s (along the deepest pass), x, y (tool center), span
    (s0, s1) and the span's polyline points.
    """
    idx, _ = _pass_moves(tp)
    r = 0.5 * tp.tool_diameter
    span = width + tp.tool_diameter
    lengths = np.array([_length(tp, i) for i in idx])
    edges = np.concatenate([[0.0], np.cumsum(lengths)])
    total = float(edges[-1])
    n = max(2, int(math.ceil(total / step)))
    s = (np.arange(n) + 0.5) * total / n
    owner = np.clip(np.searchsorted(edges, s, side="right") - 1, 0, len(idx) - 1)
    u = (s - edges[owner]) / np.maximum(lengths[owner], 1e-300)
    pts = np.array([_point(tp, idx[o], uu)[0] for o, uu in zip(owner, u)])
    ok = np.abs(edge_distance(pts) - r) <= max(tp.tolerance * 1.5, 1e-3)
    gentle = np.array([tp.kind[i] == LINE or _arc(tp, i)[1] >= 2 * span for i in idx])
    ok &= gentle[owner]
    # corners: joins where the path turns by more than TURN_LIMIT
    corner_s = []
    for j in range(1, len(idx)):
        a, b = idx[j - 1], idx[j]
        if np.hypot(*(tp.start[b, :2] - tp.end[a, :2])) > 1e-9:
            corner_s.append(edges[j])  # a gap: treat as a corner
            continue
        t0, t1 = _point(tp, a, 1.0)[1], _point(tp, b, 0.0)[1]
        if abs(float(turn_angle(t0, t1))) > TURN_LIMIT:
            corner_s.append(edges[j])
    for cs in corner_s:
        ok &= np.abs(s - cs) >= 0.5 * span + r
    for x, y in spots:
        ok &= np.hypot(pts[:, 0] - x, pts[:, 1] - y) >= span
    # a tab's whole span must be eligible: erode the mask by half a span
    half = int(math.ceil(0.5 * span / (total / n)))
    bad = np.flatnonzero(~ok)
    good = ok.copy()
    for b in bad:
        good[max(0, b - half): b + half + 1] = False
    good[:half] = good[n - half:] = False
    tabs = []
    taken = np.zeros(n, bool)
    for k in range(count):
        target = (k + 0.5) * total / count
        cand = np.flatnonzero(good & ~taken)
        if cand.size == 0:
            raise InputError(f"only {k} tab{'s' if k != 1 else ''} of this width fit on the flat, "
                             f"gentle stretches of this outline ({count} asked); ask for fewer or narrower tabs")
        j = int(cand[np.argmin(np.abs(s[cand] - target))])
        taken[max(0, j - 2 * half - 1): j + 2 * half + 2] = True
        p = pts[j]
        s0, s1 = float(s[j] - 0.5 * span), float(s[j] + 0.5 * span)
        m = (s >= s0) & (s <= s1)
        tabs.append({"s": float(s[j]), "x": float(p[0]), "y": float(p[1]), "span": (s0, s1),
                     "points": pts[m].tolist()})
    tabs.sort(key=lambda t: t["s"])
    return tabs


def _split(tp, i, u0, u1, z):
    """Move i between fractions u0 < u1, at height z: (kind, start3, end3, center2)."""
    p0, _ = _point(tp, i, u0)
    p1, _ = _point(tp, i, u1)
    if u0 == 0.0:
        p0 = tp.start[i, :2]
    if u1 == 1.0:
        p1 = tp.end[i, :2]
    return (int(tp.kind[i]), (p0[0], p0[1], z), (p1[0], p1[1], z), tuple(tp.center[i]))


def add_tabs(tp: Toolpath, tabs: list[dict], *, height: float) -> Toolpath:
    """The toolpath with the passes below the tab top rising over ``tabs``.

    ``height`` (toolpath units) above the final depth; the tab top is at
    z = −depth + height.  Returns a new Toolpath; ``info["tabs"]`` lists the
    tabs and the time grows by the vertical moves.
    """
    depth = float(tp.info["depth"])
    if not 0 < height < depth:
        raise InputError(f"tab height {height:g} must be above 0 and below the depth {depth:g}")
    z_top = -depth + height
    plunge = float(tp.info.get("plunge_feed") or tp.feed[tp.kind != RAPID].min())
    idx_last, _ = _pass_moves(tp)
    rows = []
    extra_time = 0.0
    i = 0
    n = len(tp)
    while i < n:
        z = float(tp.start[i, 2])
        in_pass = (tp.kind[i] != RAPID and z < z_top - 1e-12 and tp.end[i, 2] == z
                   and (np.any(tp.start[i, :2] != tp.end[i, :2]) or tp.kind[i] >= ARC_CW))
        if not in_pass:
            rows.append((int(tp.kind[i]), tuple(tp.start[i]), tuple(tp.end[i]), tuple(tp.center[i]),
                         float(tp.feed[i])))
            i += 1
            continue
        # a run of XY moves at this pass's z: the same moves as the deepest pass
        j = i
        while (j < n and tp.kind[j] != RAPID and tp.start[j, 2] == z and tp.end[j, 2] == z
               and (np.any(tp.start[j, :2] != tp.end[j, :2]) or tp.kind[j] >= ARC_CW)):
            j += 1
        s_at = 0.0
        for m in range(i, j):
            L = _length(tp, m)
            cuts = sorted({0.0, 1.0, *[min(max((b - s_at) / L, 0.0), 1.0) for t in tabs for b in t["span"]
                                        if s_at < b < s_at + L]})
            for u0, u1 in zip(cuts[:-1], cuts[1:]):
                if u1 - u0 <= 1e-12:
                    continue
                mid = s_at + 0.5 * (u0 + u1) * L
                over = any(t["span"][0] <= mid <= t["span"][1] for t in tabs)
                zz = z_top if over else z
                k, a, b, c = _split(tp, m, u0, u1, zz)
                last_z = rows[-1][2][2] if rows else z
                if abs(last_z - zz) > 1e-12:  # rise onto or drop off a tab
                    rows.append((LINE, (a[0], a[1], last_z), (a[0], a[1], zz), (0.0, 0.0), plunge))
                    extra_time += 60.0 * abs(zz - last_z) / plunge
                rows.append((k, a, b, c, float(tp.feed[m])))
            s_at += L
        if rows[-1][2][2] != z:  # a tab at the very end: back down before going on
            e = rows[-1][2]
            rows.append((LINE, e, (e[0], e[1], z), (0.0, 0.0), plunge))
        i = j
    kind = np.array([r[0] for r in rows], np.int8)
    start = np.array([r[1] for r in rows], float)
    end = np.array([r[2] for r in rows], float)
    center = np.array([r[3] for r in rows], float)
    feed = np.array([r[4] for r in rows], float)
    info = dict(tp.info)
    info["tabs"] = [{k: v for k, v in t.items() if k != "points"} for t in tabs]
    info["tab_height"] = float(height)
    return Toolpath(kind, start, end, center, feed, units=tp.units, tool_diameter=tp.tool_diameter,
                    side=tp.side, tolerance=tp.tolerance, deviation=tp.deviation,
                    time=float(tp.time + extra_time), info=info)
