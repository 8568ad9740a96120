"""Getting the tool down to depth: ramps along the path, helices, and arcs
written as lines (all lengths mm, angles radians).

Pure geometry on plain move lists; :mod:`pathgen.path.build` decides which
entry a cut gets and checks every move with :mod:`pathgen.path.clearance`.

A move here is a tuple ``(kind, start, end, center)`` with 2-D points (z is
added when the passes are assembled) or, for helices, ``(kind, start3,
end3, center)`` with 3-D points.

Entry kinds (trade terms, common practice)
------------------------------------------
* ``plunge``: straight down at the plunge feed, at the start of the lead-in.
* ``ramp``: down along the path itself at a small angle α: the descent per
  length of travel is tan α.  A closed path is ramped along the stretch
  before its start (wrapping round as often as needed), so the ramp reaches
  depth exactly at the start and the full loop then recuts the ramped
  stretch at depth.  An open path is ramped zig-zag, forward and back along
  its first stretch, ending at its start.
* ``helix``: down a helix (arcs whose z changes with the angle) through the
  start of the lead-in, where there is room for it: r_helix + r_tool <= the
  distance from the helix center to the contour - tolerance.
"""

from __future__ import annotations

import math

import numpy as np

from .measure import arc_geometry
from .model import ARC_CCW, ARC_CW, LINE

__all__ = ["ENTRIES", "move_length", "take_length", "ramp_route", "helix_moves", "arc_as_lines"]

from .._options import ENTRIES  # noqa: E402  (one list, shared)


def move_length(kind, s, e, c) -> float:
    """In-plane length of one move (line or arc), mm."""
    if kind == LINE:
        return float(math.hypot(e[0] - s[0], e[1] - s[1]))
    r, _, sw = arc_geometry(np.asarray(s, float)[:2], np.asarray(e, float)[:2], np.asarray(c, float),
                            kind == ARC_CCW)
    return float(r * abs(sw))


def _point_at(kind, s, e, c, frac):
    if kind == LINE:
        return np.asarray(s, float)[:2] + frac * (np.asarray(e, float)[:2] - np.asarray(s, float)[:2])
    r, a0, sw = arc_geometry(np.asarray(s, float)[:2], np.asarray(e, float)[:2], np.asarray(c, float),
                             kind == ARC_CCW)
    a = float(a0 + frac * sw)
    return np.asarray(c, float) + float(r) * np.array([math.cos(a), math.sin(a)])


def _reverse(move):
    kind, s, e, c = move
    if kind != LINE:
        kind = ARC_CW + ARC_CCW - kind
    return (kind, e, s, c)


def take_length(chain, length: float, *, closed: bool) -> list:
    """The moves covering the first ``length`` mm of the chain from its start
    (wrapping round a closed chain as often as needed); the last is split."""
    moves = [(int(k), chain.start[i], chain.end[i], chain.center[i]) for i, k in enumerate(chain.kind)]
    lengths = np.array([move_length(*m) for m in moves])
    total = float(lengths.sum())
    out, left = [], float(length)
    if total <= 0:
        return out
    if not closed and left > total * (1 + 1e-12):
        raise ValueError("length beyond the end of an open chain")
    while left > 1e-12:
        for m, L in zip(moves, lengths):
            if left <= 1e-12:
                break
            if L <= left + 1e-12:
                out.append(m)
                left -= L
            else:
                kind, s, e, c = m
                x = _point_at(kind, s, e, c, left / L)
                out.append((kind, s, x, c))
                left = 0.0
        if not closed:
            break
    return out


def ramp_route(chain, length: float, *, closed: bool) -> list:
    """2-D moves of total length ``length`` along the chain that end at its
    start (see the module docstring)."""
    if closed:
        back = take_length(chain.reversed(), length, closed=True)
        return [_reverse(m) for m in reversed(back)]
    total = float(sum(move_length(int(k), s, e, c) for k, s, e, c in
                      zip(chain.kind, chain.start, chain.end, chain.center)))
    legs = max(2, math.ceil(length / max(total, 1e-12) - 1e-9))
    legs += legs % 2
    w = length / legs
    fwd = take_length(chain, w, closed=False)
    back = [_reverse(m) for m in reversed(fwd)]
    return (fwd + back) * (legs // 2)


def helix_moves(point, center, *, ccw: bool, z0: float, z1: float, slope: float) -> tuple[list, float]:
    """Quarter-turn helical arcs (3-D points) through ``point`` about
    ``center`` from z0 down to z1, whole turns, descending at most ``slope``
    (tan of the angle) per length; returns (moves, the slope written)."""
    p = np.asarray(point, float)
    c = np.asarray(center, float)
    rho = float(math.hypot(*(p - c)))
    a0 = math.atan2(p[1] - c[1], p[0] - c[0])
    drop = z0 - z1
    turns = max(1, math.ceil(drop / (2 * math.pi * rho * slope) - 1e-9))
    quarters = 4 * turns
    sgn = 1.0 if ccw else -1.0
    kind = ARC_CCW if ccw else ARC_CW
    out = []
    for q in range(quarters):
        a_s = a0 + sgn * 0.5 * math.pi * q
        a_e = a0 + sgn * 0.5 * math.pi * (q + 1)
        s = p if q == 0 else c + rho * np.array([math.cos(a_s), math.sin(a_s)])
        e = p if q == quarters - 1 else c + rho * np.array([math.cos(a_e), math.sin(a_e)])
        zs = z0 - drop * q / quarters
        ze = z0 - drop * (q + 1) / quarters
        out.append((kind, (s[0], s[1], zs), (e[0], e[1], ze), (c[0], c[1])))
    return out, drop / (2 * math.pi * rho * turns)


def arc_as_lines(kind, s, e, c, tol: float) -> list:
    """An arc (2-D or 3-D ends; z linear in the angle) as lines whose chords
    stay within ``tol`` of it: n = ceil(sweep / (2 acos(1 - tol/r)))
    (the sagitta r(1 - cos(θ/2)) of each chord <= tol)."""
    s3 = tuple(s) if len(s) == 3 else (s[0], s[1], None)
    e3 = tuple(e) if len(e) == 3 else (e[0], e[1], None)
    r, a0, sw = arc_geometry(np.asarray(s3[:2], float), np.asarray(e3[:2], float), np.asarray(c, float),
                             kind == ARC_CCW)
    r, a0, sw = float(r), float(a0), float(sw)
    half = math.acos(max(1.0 - tol / r, -1.0)) if r > 0 else math.pi
    n = max(1, math.ceil(abs(sw) / (2 * half) - 1e-12))
    out = []
    prev = s3
    for j in range(1, n + 1):
        if j == n:
            nxt = e3
        else:
            a = a0 + sw * j / n
            z = None if s3[2] is None else s3[2] + (e3[2] - s3[2]) * j / n
            nxt = (c[0] + r * math.cos(a), c[1] + r * math.sin(a), z)
        out.append((LINE, prev if prev[2] is not None else prev[:2], nxt if nxt[2] is not None else nxt[:2],
                    (0.0, 0.0)))
        prev = nxt
    return out
