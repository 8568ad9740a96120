"""A program's moves (as read back from its text) against the part.

:func:`replay_deviation` measures the two-sided distance between the
cutting moves a program makes and the exact tool-center curve
q(t) = P(t) + d·N(t) of the fitted contour (N the unit left normal, d the
signed tool offset; at a sharp corner the tool rolls round the corner
point, so q there is the arc of radius |d| about it):

* file → curve: every cutting move that runs along the curve (both ends
  within the capture distance of q; lead-in and lead-out moves start or
  end away from it), sampled densely, measured against q;
* curve → file: every stretch of q that the expected path covers (the
  toolpath the program was made from, or the one pathgen would make),
  measured against the program's cutting moves at each cutting depth, so
  that a missing or moved stretch shows.

Both sides are dense polylines whose sagitta stays below 0.5 % of the
tolerance and whose vertices are at most 0.25 mm apart (1/8192 of the
length on paths over 2 m); nearest points come from a k-d tree
(``scipy.spatial.cKDTree``) and the exact distance to the segments next to
them.  The curve's polyline is sized by bounds read from the spline
pieces' coefficients (:mod:`pathgen.path.spacing`), not by their number;
no sample count is capped (a program needing more than
:data:`MOST_SAMPLES` is refused).  Lengths in mm.

:func:`decimals_for` and :func:`budget` give the number of decimals a
tolerance needs and the tolerance budget stated in every program.
"""

from __future__ import annotations

import math

import numpy as np

from ..geometry import angle_along_arc, arc_geometry, arc_sweep

__all__ = [
    "decimals_for",
    "rounding_bound",
    "budget",
    "replay_deviation",
    "program_time",
    "ROUNDING_SHARE",
]

#: Largest share of the chord tolerance that rounding to the written decimals may take.
ROUNDING_SHARE = 0.05

_MIN_DECIMALS = {"mm": 4, "inch": 5}
_MAX_DECIMALS = 8
_MM_PER_INCH = 25.4
_SAG_SHARE = 0.005  # polyline sagitta, share of the tolerance
_MAX_STEP = 0.25  # mm between polyline vertices (see _resolution)
#: vertices that a polyline's spacing cap allows along the whole length: the
#: cap is _MAX_STEP up to a length of 0.25 mm x 8192 (2 m), and grows with the
#: length beyond, so a large part is sampled by the sagitta, not its size
_VERTICES = 8192
_K = 8  # nearest vertices examined per point


# ---------------------------------------------------------------------------- decimals and budget
def rounding_bound(decimals: int, units: str = "mm") -> float:
    """Largest distance (mm) a written move can lie from its unrounded move.

    A point rounded to ``decimals`` moves by at most half a unit in the
    last place per axis, √2/2 · 10^-decimals in the plane (arithmetic).  An
    arc is written with its end points rounded and I, J rounded from the
    rounded start, so its center moves by at most twice that and its radius
    by at most three times: the written arc stays within 5 · √2/2 units of
    the arc it stands for (derived).  Returned in mm.

    >>> round(rounding_bound(4) * 1e4, 4), round(rounding_bound(5, "inch"), 7)
    (3.5355, 0.000898)
    """
    unit = 10.0 ** (-int(decimals))
    scale = _MM_PER_INCH if units == "inch" else 1.0
    return 5.0 * math.sqrt(0.5) * unit * scale


def decimals_for(tolerance_mm: float, units: str = "mm") -> int:
    """Fewest decimals whose rounding takes at most 5 % of the tolerance.

    Never fewer than 4 in mm and 5 in inch (fewer can break the arc radius
    rule); at most 8.

    >>> decimals_for(0.1), decimals_for(0.01), decimals_for(0.001), decimals_for(0.0001)
    (4, 4, 5, 6)
    >>> decimals_for(0.1, "inch"), decimals_for(0.01, "inch")
    (5, 6)
    """
    d = _MIN_DECIMALS[units]
    while d < _MAX_DECIMALS and rounding_bound(d, units) > ROUNDING_SHARE * tolerance_mm:
        d += 1
    return d


def budget(tolerance_mm: float, *, decimals: int, units: str = "mm", residual=(0.0, 0.0),
           smoothed: bool = False) -> dict:
    """The tolerance budget of a program, in mm.

    Parameters
    ----------
    tolerance_mm : chord tolerance.
    decimals : decimals written.
    units : units of the program.
    residual : (largest, rms) distance of the points from the contour (mm),
        as measured by the fit.
    smoothed : True when the contour smooths the points (asked for with its
        own tolerance): the residual is then stated apart and not taken
        from the chord tolerance; interpolating, the residual (about 0) is
        the first part of the budget.

    Returns
    -------
    dict with ``tolerance``, ``decimals``, ``points`` (the points → contour
    part), ``smoothing`` ([largest, rms] or None), ``rounding`` (the bound of
    :func:`rounding_bound`) and ``approximation_target`` (what is left for
    the moves: tolerance − points − rounding).  The caller adds the measured
    ``approximation`` and ``total``.

    >>> b = budget(0.01, decimals=4)
    >>> round(b["approximation_target"], 8), b["smoothing"]
    (0.00964645, None)
    """
    rnd = rounding_bound(decimals, units)
    points = 0.0 if smoothed else float(residual[0])
    return {
        "tolerance": float(tolerance_mm),
        "decimals": int(decimals),
        "points": points,
        "smoothing": [float(residual[0]), float(residual[1])] if smoothed else None,
        "rounding": rnd,
        "approximation_target": float(tolerance_mm) - rnd - points,
    }


# ---------------------------------------------------------------------------- polylines
def _resolution(total_length):
    """Largest spacing of polyline vertices (mm) over curves and arcs of this
    total length: _MAX_STEP, or total/_VERTICES on longer paths.  The
    spacing that bounds the measurement is the sagitta step (_SAG_SHARE of
    the tolerance), taken wherever it is shorter; this cap only keeps the
    candidate search fine, and on a large part it follows the part's size
    instead of a fixed 0.25 mm (a 20 m outline had 82 000 vertices)."""
    return max(_MAX_STEP, float(total_length) / _VERTICES)


#: samples the replay takes along a program's moves at most (about 0.5 GB
#: of work arrays); a program that needs more is refused, not sampled thinner
MOST_SAMPLES = 20_000_000


def _arc_counts(radius, sweep, tol, length, cap=_MAX_STEP):
    """Samples per arc: chords within the sagitta share of the tolerance
    (sources: sagitta), at most ``cap`` apart; never capped per arc."""
    sag = _SAG_SHARE * tol
    step = np.sqrt(8.0 * np.maximum(radius, 1e-12) * sag)
    n = np.ceil(np.maximum(np.abs(sweep) * radius / np.minimum(step, cap), length / cap))
    return np.maximum(n, 1) + 1


def move_polylines(kind, start, end, center, tol):
    """Dense points along moves (xy): arcs with their radius interpolated
    from the start radius to the end radius (a written arc's two radii may
    differ by the rounding), lines straight.

    Lines are sampled every _MAX_STEP at most (a line's distance to a curve
    bends with the curve, which this function does not see); arcs by their
    sagitta, at most :func:`_resolution` of the moves' length apart.

    Returns (points (n, 2), owner (n,), last (n,) bool: the point ends its move).
    """
    kind = np.asarray(kind)
    s, e, c = start[:, :2], end[:, :2], center
    k = len(kind)
    arcs = kind >= 2
    length = np.hypot(*(e - s).T)
    counts = np.maximum(2, np.ceil(length / _MAX_STEP).astype(np.int64) + 1)
    r0 = np.hypot(*(s - c).T)
    r1 = np.hypot(*(e - c).T)
    _, a0, sweep = arc_geometry(s, e, c, kind == 3)  # a closed arc sweeps a full turn
    if arcs.any():
        along = np.where(arcs, np.maximum(r0, r1) * np.abs(sweep), length)
        cap = _resolution(along.sum())
        counts = counts.astype(np.float64)
        counts[arcs] = np.maximum(2, _arc_counts(np.maximum(r0, r1)[arcs], sweep[arcs], tol, length[arcs], cap))
    total = float(np.sum(counts))
    if total > MOST_SAMPLES:
        from ..errors import InputError

        i = int(np.argmax(counts))
        what = (f"an arc of radius {max(r0[i], r1[i]):.6g} mm" if arcs[i] else f"a line {length[i]:.6g} mm long")
        raise InputError(
            f"the replay cannot measure these moves at tolerance {tol:g} mm: they need {total:.3g} samples, "
            f"more than {MOST_SAMPLES:.0e} ({what} alone needs {counts[i]:.3g}); nothing was measured")
    counts = counts.astype(np.int64)
    owner = np.repeat(np.arange(k), counts)
    first = np.cumsum(counts) - counts
    j = np.arange(owner.size) - np.repeat(first, counts)
    f = j / np.repeat(counts - 1.0, counts)
    pts = np.repeat(s, counts, axis=0) + np.repeat(e - s, counts, axis=0) * f[:, None]
    am = arcs[owner]
    if am.any():
        o = owner[am]
        ang = a0[o] + sweep[o] * f[am]
        rr = r0[o] + (r1[o] - r0[o]) * f[am]
        pts[am, 0] = c[o, 0] + rr * np.cos(ang)
        pts[am, 1] = c[o, 1] + rr * np.sin(ang)
    pts[first] = s
    pts[first + counts - 1] = e
    last = np.zeros(owner.size, bool)
    last[first + counts - 1] = True
    return pts, owner, last


def tool_center_polyline(contour, d: float, tol: float):
    """Dense points of q(t) = P(t) + d·N(t) (mm), corners rolled round.

    Returns (points (n, 2), joined (n - 1,) bool: consecutive points form a
    segment of the curve).
    """
    from ..path.measure import offset_side
    from ..path.spacing import chord_lengths, curvature_bound, piece_bounds, vertex_params

    b = np.asarray(contour.breaks, dtype=np.float64)
    cuts = sorted(set(int(i) for i in contour.corners) | {0, len(b) - 1})
    pts_all = []
    sag = _SAG_SHARE * tol
    cap = _resolution(chord_lengths(contour).sum())
    # bounds per piece, read from the coefficients: |κ| <= K, |P'| <= v; on
    # q = P + d·N, |q'| = |P'|·|1 - dκ| <= v·(1 + |d|K) and its curvature
    # κ/(1 - dκ) is at most K/(1 - |d|K) (1 - dκ floored at 1e-3 where the
    # bound cannot keep it off 0: a possible cusp, trimmed from the path)
    h, _, _, v = piece_bounds(contour)
    K = curvature_bound(contour)
    ad = abs(d)
    with np.errstate(invalid="ignore", over="ignore"):
        vq = v * (1.0 + ad * K)
        kq = K / np.maximum(1.0 - ad * K, 1e-3)
        loose = np.flatnonzero(~(ad * K < 0.999) | ~np.isfinite(vq * vq * kq))
    if len(loose):
        # where the bounds say nothing useful (speed perhaps 0 on the piece,
        # or a possible cusp), the piece's values are sampled at 9 points
        f = np.linspace(0.0, 1.0, 9)
        tt = (b[loose, None] + h[loose, None] * f[None, :]).ravel()
        kap = contour.curvature(tt)
        stretch = np.maximum(np.abs(1.0 - d * kap), 1e-3)
        sp = np.hypot(*contour(tt, 1).T) * stretch
        vq[loose] = sp.reshape(-1, 9).max(axis=1)
        kq[loose] = (np.abs(kap) / stretch).reshape(-1, 9).max(axis=1)
    second = np.where(kq > 0, vq * vq * kq, 0.0)  # chord error over a step δ <= δ²·second/8
    t_all = vertex_params(contour, sag, cap, second=second, speed=vq)
    for a_i, b_i in zip(cuts[:-1], cuts[1:]):
        tb = b[[a_i, b_i]]
        t = t_all[np.searchsorted(t_all, tb[0]):np.searchsorted(t_all, tb[1], side="right")]
        n = len(t)
        p = contour(t[1:-1]) if n > 2 else np.zeros((0, 2))
        if d != 0.0 and n > 2:
            d1 = contour(t[1:-1], 1)
            nrm = np.stack([-d1[:, 1], d1[:, 0]], axis=-1) / np.hypot(*d1.T)[:, None]
            p = p + d * nrm
        e0 = offset_side(contour, np.array([tb[0]]), d, left=False)
        e1 = offset_side(contour, np.array([tb[-1]]), d, left=True)
        sec = np.vstack([e0, p, e1])
        if pts_all:
            # a corner: the tool rolls round the corner point (radius |d|)
            prev = pts_all[-1][-1]
            corner = contour(np.array([tb[0]]))[0]
            arc = _corner_arc(corner, prev, sec[0], abs(d), tol)
            if len(arc):
                pts_all.append(arc)
        pts_all.append(sec)
    pts = np.vstack(pts_all)
    if contour.closed and len(pts) > 1 and contour.corners and d != 0.0:
        # the seam is a corner too when the closed contour has one there
        if 0 in contour.corners or (len(b) - 1) in contour.corners:
            corner = contour(np.array([b[0]]))[0]
            arc = _corner_arc(corner, pts[-1], pts[0], abs(d), tol)
            if len(arc):
                pts = np.vstack([pts, arc, pts[:1]])
    # one chain: every consecutive pair of points is a segment of the curve
    return pts, np.ones(max(len(pts) - 1, 0), bool)


def _corner_arc(center, p, q, r, tol):
    """Points strictly between p and q on the short arc about center."""
    if r == 0.0:
        return np.zeros((0, 2))
    a0 = math.atan2(p[1] - center[1], p[0] - center[0])
    a1 = math.atan2(q[1] - center[1], q[0] - center[0])
    sweep = (a1 - a0 + math.pi) % (2 * math.pi) - math.pi
    step = min(math.sqrt(8.0 * r * _SAG_SHARE * tol), _MAX_STEP)
    n = int(math.ceil(abs(sweep) * r / step))
    if n < 2:
        return np.zeros((0, 2))
    a = a0 + sweep * np.arange(1, n) / n
    return np.column_stack([center[0] + r * np.cos(a), center[1] + r * np.sin(a)])


def _polyline_distance(x, verts, joined, tree=None):
    """Distance from points x to the polyline (segments i→i+1 where joined[i])."""
    from scipy.spatial import cKDTree

    if len(x) == 0:
        return np.zeros(0), tree
    if tree is None:
        tree = cKDTree(verts)
    k = min(_K, len(verts))
    _, idx = tree.query(x, k=k)
    idx = idx.reshape(len(x), k)
    best = np.full(len(x), np.inf)
    m = len(verts)
    for col in range(k):
        j = idx[:, col]
        best = np.minimum(best, np.hypot(*(x - verts[j]).T))
        for seg in (j - 1, j):
            ok = (seg >= 0) & (seg < m - 1)
            sg = np.clip(seg, 0, max(m - 2, 0))
            ok &= joined[sg] if m > 1 else False
            if not ok.any():
                continue
            a = verts[sg]
            ab = verts[np.minimum(sg + 1, m - 1)] - a
            L2 = np.einsum("ij,ij->i", ab, ab)
            u = np.einsum("ij,ij->i", x - a, ab) / np.where(L2 > 0, L2, 1.0)
            u = np.clip(u, 0.0, 1.0)
            dd = np.hypot(*(x - (a + u[:, None] * ab)).T)
            best = np.where(ok, np.minimum(best, dd), best)
    return best, tree


class _Moves:
    """Lines and arcs (xy) with an exact distance query.

    Candidates come from a k-d tree over points spaced at most 0.25 mm
    (on moves longer than 2 m in all, 1/8192 of their length) along every
    move alike (ends included), so a long move is never hidden behind a
    densely sampled short one; the distance to each candidate is
    then exact: to the segment, or to the arc whose radius runs from its
    start radius to its end radius (a written arc's two radii may differ by
    the rounding).
    """

    def __init__(self, kind, start, end, center):
        from scipy.spatial import cKDTree

        self.kind = np.asarray(kind)
        self.s = np.ascontiguousarray(start[:, :2], dtype=np.float64)
        self.e = np.ascontiguousarray(end[:, :2], dtype=np.float64)
        self.c = np.ascontiguousarray(center, dtype=np.float64)
        c = self.c
        self.arc = self.kind >= 2
        self.r0 = np.hypot(*(self.s - c).T)
        self.r1 = np.hypot(*(self.e - c).T)
        self.a0 = np.arctan2(self.s[:, 1] - c[:, 1], self.s[:, 0] - c[:, 0])
        ccw = self.kind == 3
        self.sweep = arc_sweep(self.s, self.e, c, ccw)  # unsigned; read for arcs only
        self.ccw = ccw
        length = np.where(self.arc, np.maximum(self.r0, self.r1) * self.sweep, np.hypot(*(self.e - self.s).T))
        counts = np.maximum(2, np.ceil(length / _resolution(length.sum())).astype(np.int64) + 1)
        owner = np.repeat(np.arange(len(self.kind)), counts)
        first = np.cumsum(counts) - counts
        f = (np.arange(owner.size) - np.repeat(first, counts)) / np.repeat(counts - 1.0, counts)
        self.owner = owner
        self.tree = cKDTree(self.at(owner, f))

    def at(self, owner, f):
        """Points at fraction f along moves ``owner``."""
        pts = self.s[owner] + (self.e[owner] - self.s[owner]) * f[:, None]
        am = self.arc[owner]
        if am.any():
            o = owner[am]
            sgn = np.where(self.ccw[o], 1.0, -1.0)
            ang = self.a0[o] + sgn * self.sweep[o] * f[am]
            rr = self.r0[o] + (self.r1[o] - self.r0[o]) * f[am]
            pts[am] = np.column_stack([self.c[o, 0] + rr * np.cos(ang), self.c[o, 1] + rr * np.sin(ang)])
        return pts

    def distance_to(self, x, o):
        """Exact distance from points x to moves o (same length)."""
        s, e = self.s[o], self.e[o]
        ab = e - s
        L2 = np.einsum("ij,ij->i", ab, ab)
        u = np.clip(np.einsum("ij,ij->i", x - s, ab) / np.where(L2 > 0, L2, 1.0), 0.0, 1.0)
        d = np.hypot(*(x - (s + u[:, None] * ab)).T)
        am = self.arc[o]
        if am.any():
            oa, xa = o[am], x[am]
            rel = xa - self.c[oa]
            ang = np.arctan2(rel[:, 1], rel[:, 0])
            phi = angle_along_arc(ang, self.a0[oa], np.where(self.ccw[oa], 1.0, -1.0))
            inside = phi <= self.sweep[oa]
            frac = np.where(self.sweep[oa] > 0, phi / self.sweep[oa], 0.0)
            r = self.r0[oa] + (self.r1[oa] - self.r0[oa]) * frac
            ends = np.minimum(np.hypot(*(xa - self.s[oa]).T), np.hypot(*(xa - self.e[oa]).T))
            d[am] = np.where(inside, np.abs(np.hypot(*rel.T) - r), ends)
        return d

    def distance(self, x):
        """Distance from each point to the nearest move; and that move."""
        if len(x) == 0:
            return np.zeros(0), np.zeros(0, np.int64)
        k = min(8, self.tree.n)
        _, idx = self.tree.query(x, k=k)
        idx = idx.reshape(len(x), k)
        best = np.full(len(x), np.inf)
        who = np.zeros(len(x), np.int64)
        for col in range(k):
            o = self.owner[idx[:, col]]
            d = self.distance_to(x, o)
            better = d < best
            best = np.where(better, d, best)
            who = np.where(better, o, who)
        return best, who


def _in_plane(kind, start, end):
    """Cutting moves that move in the plane (arcs always do)."""
    kind = np.asarray(kind)
    return (kind != 0) & ((np.hypot(*(end[:, :2] - start[:, :2]).T) > 0) | (kind >= 2))


def _along(kind, start, end, q, qj, qtree, capture):
    """Indices of cutting moves in the plane, at one depth, whose both ends
    lie within ``capture`` of q.  Moves that descend (ramp and helix
    entries) are entries, checked for clearance, not for deviation: a helix
    in a hole barely larger than the tool runs close to q without following
    it (a ramp along the path is recut at depth, and measured there)."""
    flat = np.abs(np.asarray(end)[:, 2] - np.asarray(start)[:, 2]) <= 1e-9
    idx = np.flatnonzero(_in_plane(kind, start, end) & flat)
    if not len(idx):
        return idx
    ends, _ = _polyline_distance(np.vstack([start[idx, :2], end[idx, :2]]), q, qj, qtree)
    near = (ends[: len(idx)] <= capture) & (ends[len(idx):] <= capture)
    return idx[near]


def _matching(kind, start, end, expected, chosen, match: float = 1e-3):
    """Indices of the program's moves in the plane whose start and end (x, y,
    z) lie within ``match`` mm of those of one of the ``chosen`` expected
    moves (rounding to 4 decimals moves a point by 1e-4 mm at most)."""
    from scipy.spatial import cKDTree

    idx = np.flatnonzero(_in_plane(kind, start, end) & np.isfinite(start).all(axis=1))
    if not len(idx) or not len(chosen):
        return idx[:0]
    keys = np.hstack([np.asarray(expected.start)[chosen], np.asarray(expected.end)[chosen]])
    dist, _ = cKDTree(keys).query(np.hstack([start[idx], end[idx]]))
    return idx[dist <= match]


def replay_deviation(program, contour, d: float, *, tol: float, expected=None, capture=None, passes=None,
                     q=None) -> dict:
    """Two-sided deviation of a program's cutting moves from q = P + d·N.

    Parameters
    ----------
    program : object with ``kind``, ``start``, ``end``, ``center``, ``line``
        arrays in mm (a :class:`~pathgen.verify.reader.Program`).
    contour : the fitted contour (mm).
    d : signed tool offset along the contour's left normal, mm.
    tol : the chord tolerance, mm (sets the sampling density).
    expected : object with ``kind``, ``start``, ``end``, ``center`` in mm:
        the path the program should follow (its stretches of q are the ones
        the program must cover); None: the program's own moves.
    capture : mm; a move runs along the curve when both its ends lie this
        close to q (default max(5·tol, 0.02 mm), at most 0.3 mm).
    passes : list of index arrays into the program's moves, or None.  None:
        the curve → file side is measured per cutting depth (every flat
        move at one z).  Given: per pass instead, each pass's flat moves at
        whatever depth they run (a pass lifted over tabs covers the curve
        with its moves at the full depth and those over the tabs together:
        a tab changes z, not x and y).
    q : (points, joined) of :func:`tool_center_polyline`, when the caller
        has it already.

    Returns
    -------
    dict: ``deviation`` (mm, the larger side), ``file_to_curve`` and
    ``curve_to_file`` (mm), ``worst_line`` (file line of the move farthest
    from the curve, or None), ``gap_at`` ([x, y] of the point of q farthest
    from the program, or None), ``moves`` (cutting moves measured),
    ``levels`` (cutting depths, mm).
    """
    from scipy.spatial import cKDTree

    kind = np.asarray(program.kind)
    start, end, center = program.start, program.end, program.center
    if capture is None:
        capture = min(max(5.0 * tol, 0.02), 0.3)
    q, qj = tool_center_polyline(contour, d, tol) if q is None else q
    qtree = cKDTree(q)
    ex_along = getattr(expected, "along", None) if expected is not None else None
    if ex_along is not None:
        # the moves the expected path says follow the curve, found in the
        # program by their end points (the written numbers are rounded)
        along = _matching(kind, start, end, expected, np.flatnonzero(ex_along))
    else:
        along = _along(kind, start, end, q, qj, qtree, capture)
    out = {"file_to_curve": 0.0, "curve_to_file": 0.0, "worst_line": None, "gap_at": None,
           "moves": int(len(along)), "levels": []}
    lines = getattr(program, "line", None)
    if len(along):
        pts, owner, _ = move_polylines(kind[along], start[along], end[along], center[along], tol)
        dist, _ = _polyline_distance(pts, q, qj, qtree)
        i = int(np.argmax(dist))
        out["file_to_curve"] = float(dist[i])
        out["worst_line"] = int(lines[along[owner[i]]]) if lines is not None else None
    # curve -> file, per cutting depth, on the stretches the expected path covers
    ex = program if expected is None else expected
    ekind = np.asarray(ex.kind)
    if ex_along is not None:
        e_along = np.flatnonzero(np.asarray(ex_along) & _in_plane(ekind, ex.start, ex.end))
    else:
        e_along = _along(ekind, ex.start, ex.end, q, qj, qtree, capture)
    if len(e_along):
        emoves = _Moves(ekind[e_along], ex.start[e_along], ex.end[e_along], ex.center[e_along])
        edist, _ = emoves.distance(q)
        # the stretches the expected path follows: it keeps within the moves'
        # target there (at most 0.95 tol, the budget leaves rounding the
        # rest); points of q beyond that lie where the path leaves q on
        # purpose (a trimmed corner, a lead), and are not the file's to cover
        cov = np.flatnonzero(edist <= 0.95 * tol + 1e-9)
    else:
        cov = np.zeros(0, np.int64)
    covered = q[cov]
    flat = _in_plane(kind, start, end) & (np.abs(end[:, 2] - start[:, 2]) <= 1e-9)
    zs = np.unique(np.round(start[flat, 2], 6))
    out["levels"] = [float(z) for z in zs]
    seen = set()
    groups = ([np.flatnonzero(flat & (np.abs(start[:, 2] - z) <= 1e-6)) for z in zs] if passes is None
              else [np.asarray(p, np.int64)[flat[np.asarray(p, np.int64)]] for p in passes])
    for sel in groups:
        if not len(sel):
            continue
        key = (np.round(start[sel, :2], 9).tobytes(), np.round(end[sel, :2], 9).tobytes(), kind[sel].tobytes())
        if key in seen or not len(covered):
            continue  # the same moves at another depth measure the same
        seen.add(key)
        dist, _ = _Moves(kind[sel], start[sel], end[sel], center[sel]).distance(covered)
        i = int(np.argmax(dist))
        if dist[i] > out["curve_to_file"]:
            out["curve_to_file"] = float(dist[i])
            out["gap_at"] = [float(covered[i, 0]), float(covered[i, 1])]
    out["deviation"] = max(out["file_to_curve"], out["curve_to_file"])
    return out


def program_time(program, machine) -> float | None:
    """Estimated time (s) of the program as written: each cutting block at
    most its F word (and the machine's limits), rapids at the rapid feed;
    None when a feed move has no feed."""
    from ..checks.feed import feeds_for_moves

    kind = np.asarray(program.kind)
    if not len(kind):
        return 0.0
    cut = kind != 0
    if np.any(cut & ~(program.feed > 0)):
        return None
    start = np.array(program.start, dtype=np.float64)
    end = np.asarray(program.end)
    # the first rapids start where the machine stands (not known): they are
    # counted from where they go, and a rapid to an unknown X, Y not at all
    unknown = np.isnan(start)
    start[unknown] = end[unknown]
    known = np.isfinite(end).all(axis=1)
    _, t = feeds_for_moves(kind[known], start[known], end[known], program.center[known],
                           feed=program.feed[known], machine=machine)
    return float(t)
