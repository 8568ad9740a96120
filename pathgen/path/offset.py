"""Tool-radius offsets: regular stretches, corner joins and loop trimming.

The tool center of a tool of radius r cutting on one side of the contour
runs on q(t) = P(t) + d·N(t) with d = ±r (N the left normal).  Its
curvature is κ/(1 - dκ) (Farouki & Neff 1990): where dκ reaches 1 the
offset has a cusp, and beyond it a swallow-tail loop — the contour bends
toward the tool tighter than the tool's radius and the tool cannot reach.
Narrow gaps (two parts of the outline closer than the tool's diameter)
give loops too, without any tight curvature.

The offset is built in three steps:

1. :func:`regular_windows` splits the parameter range at corners and
   cuts out the stretches where 1 - dκ <= 0.001 (recorded as spots);
2. the caller approximates each window (lines, or arcs fitted in the tolerance band);
3. :func:`assemble` joins the windows: a corner the tool goes around gets
   an arc of radius r about the corner (the exact offset of a sharp
   corner); where the sides overlap (a corner the tool sits in, a tight
   spot) they are cut at their exact crossing (line/line, line/arc or
   arc/arc) nearest to the gap; then every move that comes closer to the
   contour than r (minus the tolerance) is cut away the same way (narrow
   gaps); then any remaining self-crossing is cut out; last, the finished
   path is measured against the contour and refused (InputError) if it
   would cut into the part.  What was cut is recorded as a spot.

Distances to the contour come from a polyline of it sized by its curvature
and the tolerance (:mod:`pathgen.path.spacing`) and a k-d tree
(``scipy.spatial.cKDTree``); no quadratic all-pairs distances.
"""

from __future__ import annotations

import math

import numpy as np

from ..errors import InputError
from ..geometry import angle_along_arc, turn_angle
from .measure import Chain, arc_geometry, eval_side, offset_points, sample_chain, unit_tangent_side
from .model import ARC_CCW, ARC_CW, LINE
from .spacing import curvature_bound, vertex_params

__all__ = ["regular_windows", "assemble", "distance_to_contour", "unique_spots"]

_EPS_REG = 1e-3
#: The end of every refusal: what the user can do.  Noise in digitized
#: points makes tiny concave wiggles that no tool of any size follows.
_ADVICE = "use a smaller tool, or smooth the points if they are noisy"


def _curvature(contour, t):
    return contour.curvature(t)


def _break_grid(contour, lo: float, hi: float, most: int = 2_000_000, *, with_pieces: bool = False):
    """Sorted parameters over [lo, hi]: every break (unwrapped past the seam
    of a closed contour) and 2 to 8 even sub-steps on every piece (fewer
    on very many pieces, keeping about ``most`` values); on a contour with
    corners also the very end of every piece.

    Every break is on the grid: where two points lie very close together
    the piece between them is short and its curvature can peak sharply at
    its ends, far inside one step of an even grid.  ``with_pieces``: also
    return the piece each grid value (but the last) lies on.
    """
    b = contour.breaks
    if contour.closed:
        period = b[-1] - b[0]
        k0 = int(np.floor((lo - b[0]) / period))
        k1 = int(np.ceil((hi - b[0]) / period))
        bb = np.concatenate([b[:-1] + k * period for k in range(k0, k1 + 1)])
    else:
        bb = b
    bb = bb[(bb > lo) & (bb < hi)]
    edges = np.concatenate([[lo], bb, [hi]])
    sub = int(np.clip(most // max(len(edges) - 1, 1), 2, 8))
    steps = np.arange(sub) / sub
    if contour.corners:
        # at a corner the curve is evaluated on the piece after it: add the
        # end of the piece before it (its curvature there is another one)
        steps = np.append(steps, 1.0 - 1e-6)
    g = (edges[:-1, None] + np.diff(edges)[:, None] * steps).ravel()
    if not with_pieces:
        return np.append(g, hi)
    # the piece each interval lies on (the one its middle falls in)
    mid = 0.5 * (edges[:-1] + edges[1:])
    if contour.closed:
        mid = b[0] + np.mod(mid - b[0], b[-1] - b[0])
    piece = np.clip(np.searchsorted(b, mid, side="right") - 1, 0, len(b) - 2)
    return np.append(g, hi), np.repeat(piece, len(steps))


def regular_windows(contour, d: float, lo: float, hi: float, tol: float = 0.01):
    """Windows [a, b] of [lo, hi] split at corners, without unreachable stretches.

    Returns
    -------
    windows : (w, 2) array.
    joins : list of (w - 1) labels for what lies between window i and i+1:
        ("corner", t) or ("tight", spot dict).
    spots : list of dicts {"x", "y", "reason": "tight", "radius"} for each
        stretch where the contour's radius is below the tool's.
    """
    b = contour.breaks
    cuts = []  # (t, label)
    if contour.corners:
        ct = b[list(contour.corners)]
        if contour.closed:
            period = b[-1] - b[0]
            ct = np.concatenate([ct + k * period for k in (-1, 0, 1, 2)])
        for t in np.sort(ct):
            if lo < t < hi and not np.isclose(t, lo) and not np.isclose(t, hi):
                cuts.append((float(t), float(t), ("corner", float(t))))
    spots = []
    # the curvature is evaluated only on pieces where the bound read from
    # the coefficients (|κ| <= |P''|/|P'|², spacing.curvature_bound) lets
    # d·κ reach 1 - eps; everywhere else 1 - dκ - eps > 0 is proven (on a
    # smooth part no piece may: no grid at all)
    may = abs(d) * curvature_bound(contour) >= (1.0 - _EPS_REG) * (1.0 - 1e-9) if d != 0.0 else None
    if d != 0.0 and np.any(may):
        g, piece = _break_grid(contour, lo, hi, with_pieces=True)
        f = np.ones(len(g))
        ask = np.append(may[piece], True)
        if np.any(ask):
            f[ask] = 1.0 - d * _curvature(contour, g[ask]) - _EPS_REG
        bad = f <= 0
        if np.any(bad):
            edges = np.diff(bad.astype(np.int8))
            starts = list(np.flatnonzero(edges == 1) + 1)
            ends = list(np.flatnonzero(edges == -1))
            if bad[0]:
                starts.insert(0, 0)
            if bad[-1]:
                ends.append(len(g) - 1)
            # neighbouring tight stretches are one spot when they are closer
            # than half the tool radius along the contour, or when the
            # regular bit between them would be trimmed anyway (its tool
            # positions all come closer to the contour than the tool radius):
            # noise splits one tight fillet into several
            def along(i, j):  # arc length from g[i] to g[j] (trapezoids on the grid)
                gg = g[i:j + 1]
                if len(gg) < 2:
                    return 0.0
                d1 = contour(gg, 1)
                sp = np.hypot(d1[:, 0], d1[:, 1])
                return float(np.sum(0.5 * (sp[1:] + sp[:-1]) * np.diff(gg)))

            merged = [[starts[0], ends[0]]]
            dist = None
            for i0, i1 in zip(starts[1:], ends[1:]):
                mid = g[merged[-1][1] + 1:i0]
                if dist is None:
                    dist = distance_to_contour(contour, tol, abs(d))
                if len(mid) > 64:
                    mid = mid[np.linspace(0, len(mid) - 1, 64).astype(np.int64)]
                q = offset_points(contour, mid, d) if len(mid) else np.zeros((0, 2))
                close = along(merged[-1][1], i0) < 0.5 * abs(d)
                if len(mid) == 0 or close or np.all(dist(q) < abs(d) - tol):
                    merged[-1][1] = i1
                else:
                    merged.append([i0, i1])
            for i0, i1 in merged:
                a = _root(contour, d, g[max(i0 - 1, 0)], g[i0]) if i0 > 0 else g[0]
                z = _root(contour, d, g[i1], g[min(i1 + 1, len(g) - 1)]) if i1 < len(g) - 1 else g[-1]
                seg = g[i0:i1 + 1]
                k = _curvature(contour, seg)
                m = int(np.argmax(d * k))
                p = contour(seg[m])
                spot = {"x": float(p[0]), "y": float(p[1]), "reason": "tight",
                        "radius": float(1.0 / abs(k[m]))}
                spots.append(spot)
                cuts.append((float(a), float(z), ("tight", spot)))
    cuts.sort(key=lambda c: c[0])
    windows, joins = [], []
    cur = lo
    for a, z, label in cuts:
        if a > cur:
            windows.append((cur, a))
            joins.append(label)
        elif joins and windows:
            joins[-1] = label if label[0] == "tight" else joins[-1]
        cur = max(cur, z)
    if cur < hi:
        windows.append((cur, hi))
    else:
        joins = joins[:-1] if len(joins) >= len(windows) else joins
    joins = joins[: max(len(windows) - 1, 0)]
    if not windows:
        raise InputError(
            f"the tool (radius {abs(d):g} mm) cannot reach any part of the contour: "
            "its radius is everywhere smaller than the tool's"
        )
    return np.array(windows), joins, spots


def _root(contour, d, a, z):
    """Bisection for 1 - dκ(t) = eps between a (regular) and z (not)."""
    fa = 1.0 - d * _curvature(contour, a) - _EPS_REG
    for _ in range(50):
        m = 0.5 * (a + z)
        fm = 1.0 - d * _curvature(contour, m) - _EPS_REG
        if (fm > 0) == (fa > 0):
            a, fa = m, fm
        else:
            z = m
    return float(a if fa > 0 else z)


def _corner_arc(contour, t, d):
    """Arc about the corner point from the end of one offset side to the next."""
    p = eval_side(contour, np.array([t]), 0, left=False)[0]
    ta = unit_tangent_side(contour, np.array([t]), left=True)[0]
    tb = unit_tangent_side(contour, np.array([t]), left=False)[0]
    a = p + d * np.array([-ta[1], ta[0]])
    bpt = p + d * np.array([-tb[1], tb[0]])
    turn = float(turn_angle(ta, tb))
    if d * turn >= 0 or np.hypot(*(a - bpt)) <= 1e-12:
        return None  # tool on the inner side of the corner: overlap, trimmed later
    kind = ARC_CCW if turn > 0 else ARC_CW
    return Chain(np.array([kind], np.int8), a[None], bpt[None], p[None], np.array([np.nan]), np.array([np.nan]))


# -- distances to the contour ---------------------------------------------------
def _contour_polyline(contour, tol, r):
    """Points on the contour whose chords stay within tol/10 of it and are at
    most √(0.8·tol·r) long (:func:`pathgen.path.spacing.vertex_params`:
    sized by the curvature and the tolerance, every corner a vertex; no cap).

    The length cap keeps the nearest-vertex search of
    :class:`distance_to_contour` within tol/10 at distances about r: a point
    at distance D from a chord of length h whose nearest vertex is not an
    end of that chord is still within √(D² + h²/4) ≈ D + h²/(8D) of it."""
    t = vertex_params(contour, tol / 10.0, math.sqrt(0.8 * tol * max(r, 1e-3)))
    return contour(t), contour.closed


def separate_regions(contour, r: float, inside: bool, tol: float):
    """Regions the tool center can reach but one closed path cannot join.

    The tool center of an inside cut may stand anywhere in the contour
    shrunk by r (shapely's ``buffer(-r)``); where the pocket narrows below
    the tool diameter the shrunk region falls apart into pieces, and one
    closed path cuts only one of them.  Outside, a cavity of the outline
    wider than the tool behind a mouth narrower than it is a hole in the
    outline grown by r: the tool never gets in.  Returns ``(left, widest)``:
    ``left`` the (area mm², a point inside) of every piece beyond the
    largest (inside) or every such hole (outside) whose area is more than
    ``tol · r`` (what a single path would leave uncut), and ``widest`` the
    largest tool diameter that keeps one region (bisection on the radius to
    within ``tol``; None when nothing is left)."""
    import shapely

    pts, _ = _contour_polyline(contour, 10.0 * tol, r)
    poly = shapely.make_valid(shapely.Polygon(pts))

    def left_at(radius):
        if inside:
            grown = poly.buffer(-radius, quad_segs=16)
            pieces = sorted((g for g in getattr(grown, "geoms", [grown]) if g.area > tol * radius),
                            key=lambda g: -g.area)[1:]
        else:
            grown = poly.buffer(radius, quad_segs=16)
            pieces = [shapely.Polygon(ring) for g in getattr(grown, "geoms", [grown]) for ring in g.interiors]
            pieces = [g for g in pieces if g.area > tol * radius]
        return [(float(g.area), tuple(np.asarray(g.representative_point().coords)[0])) for g in pieces]

    left = left_at(r)
    if not left:
        return [], None
    lo, hi = 0.0, r
    while hi - lo > tol:
        mid = 0.5 * (lo + hi)
        lo, hi = (lo, mid) if left_at(mid) else (mid, hi)
    return left, 2.0 * lo


class distance_to_contour:
    """Callable: distance (mm) from points to the contour's dense polyline."""

    def __init__(self, contour, tol, r):
        from scipy.spatial import cKDTree

        self.pts, closed = _contour_polyline(contour, tol, r)
        if closed:
            self.pts = self.pts[:-1]
        self.closed = closed
        self.tree = cKDTree(self.pts)

    def __call__(self, x):
        x = np.asarray(x, float)
        _, i = self.tree.query(x)
        n = len(self.pts)
        best = np.hypot(*(x - self.pts[i]).T)
        for j0 in (i - 1, i):
            if self.closed:
                a, b = self.pts[j0 % n], self.pts[(j0 + 1) % n]
                valid = np.ones(len(x), bool)
            else:
                valid = (j0 >= 0) & (j0 + 1 < n)
                a, b = self.pts[np.clip(j0, 0, n - 1)], self.pts[np.clip(j0 + 1, 0, n - 1)]
            ab = b - a
            L2 = np.einsum("ij,ij->i", ab, ab)
            u = np.clip(np.einsum("ij,ij->i", x - a, ab) / np.where(L2 > 0, L2, 1.0), 0, 1)
            dd = np.hypot(*(x - a - u[:, None] * ab).T)
            best = np.where(valid, np.minimum(best, dd), best)
        return best


# -- intersections of two primitives --------------------------------------------
def _on(chain, i, pts, eps):
    """Mask of candidate points lying on primitive i (within eps mm)."""
    s, e = chain.start[i], chain.end[i]
    if chain.kind[i] == LINE:
        ab = e - s
        L2 = ab @ ab
        if L2 == 0.0:  # a line of no length: only its point
            return np.hypot(*(pts - s).T) <= eps
        u = (pts - s) @ ab / L2
        L = np.sqrt(L2)
        return (u >= -eps / L) & (u <= 1 + eps / L)
    c = chain.center[i]
    r, a0, sw = arc_geometry(s, e, c, chain.kind[i] == ARC_CCW)
    ang = np.arctan2(pts[:, 1] - c[1], pts[:, 0] - c[0])
    phi = angle_along_arc(ang, a0, np.sign(sw), eps / r)
    return phi <= abs(sw) + eps / r


def _circle_of(chain, i):
    if chain.kind[i] == LINE:
        return None
    c = chain.center[i]
    return c, float(np.hypot(*(chain.start[i] - c)))


def _intersections(chain, i, j, eps):
    """Points where primitives i and j cross."""
    ci, cj = _circle_of(chain, i), _circle_of(chain, j)
    out = []
    if ci is None and cj is None:
        p, r_ = chain.start[i], chain.end[i] - chain.start[i]
        q, s_ = chain.start[j], chain.end[j] - chain.start[j]
        den = r_[0] * s_[1] - r_[1] * s_[0]
        if abs(den) > 1e-15 * (r_ @ r_ + s_ @ s_):
            u = ((q - p)[0] * s_[1] - (q - p)[1] * s_[0]) / den
            out.append(p + u * r_)
    elif ci is None or cj is None:
        (c, r), li = (cj, i) if ci is None else (ci, j)
        p, v = chain.start[li], chain.end[li] - chain.start[li]
        f = p - c
        a, bq, cq = v @ v, 2 * f @ v, f @ f - r * r
        disc = bq * bq - 4 * a * cq
        if disc >= 0 and a > 0:  # a line of no length crosses nothing
            for sgn in (-1, 1):
                out.append(p + (-bq + sgn * np.sqrt(disc)) / (2 * a) * v)
    else:
        (c0, r0), (c1, r1) = ci, cj
        dv = c1 - c0
        dist = np.hypot(*dv)
        if 0 < dist <= r0 + r1 and dist >= abs(r0 - r1):
            a = (r0 * r0 - r1 * r1 + dist * dist) / (2 * dist)
            h = np.sqrt(max(r0 * r0 - a * a, 0.0))
            m = c0 + a * dv / dist
            perp = np.array([-dv[1], dv[0]]) / dist
            out += [m + h * perp, m - h * perp]
    if not out:
        return np.zeros((0, 2))
    pts = np.array(out)
    return pts[_on(chain, i, pts, eps) & _on(chain, j, pts, eps)]


def _param_on(chain, i, x):
    """Signed fraction of point x along primitive i (< 0 before its start)."""
    s, e = chain.start[i], chain.end[i]
    if chain.kind[i] == LINE:
        ab = e - s
        return float((x - s) @ ab / (ab @ ab))
    r, a0, sw = arc_geometry(s, e, chain.center[i], chain.kind[i] == ARC_CCW)
    ang = np.arctan2(x[1] - chain.center[i][1], x[0] - chain.center[i][0])
    rest = 0.5 * (2 * np.pi - abs(sw))  # the gap of the circle, split before and after
    phi = angle_along_arc(ang, a0, np.sign(sw), rest)
    return float(phi / abs(sw))


def _snap(chain, i, x):
    """x moved exactly onto primitive i (onto its circle for arcs)."""
    if chain.kind[i] == LINE:
        return x
    c = chain.center[i]
    r = np.hypot(*(chain.start[i] - c))
    v = x - c
    return c + v * (r / np.hypot(*v))


# -- assembling ------------------------------------------------------------------
def _cross(chain, a_idx, b_idx, eps):
    """The crossing of the A moves (in path order, ending at the gap) with
    the B moves (starting after it) that lies nearest to the gap: fewest
    moves walked back on A plus forward on B.  Returns (ia, ib, x) or None.
    """
    best = None
    na = len(a_idx)
    for pa, ia in enumerate(a_idx):
        for pb, ib in enumerate(b_idx):
            if ib == ia:
                continue
            for x in _intersections(chain, ia, ib, eps):
                fa, fb = _param_on(chain, ia, x), _param_on(chain, ib, x)
                if fa <= 1e-12 or fb >= 1 - 1e-12:
                    continue  # at the very start of A's move or end of B's: use the neighbours
                score = (na - 1 - pa) + (1.0 - fa) + pb + fb
                if best is None or score < best[0]:
                    best = (score, ia, ib, x)
    return None if best is None else best[1:]


def _apply_cut(chain, alive, ks, ke, ia, ib, x, between):
    for m in between:
        alive[m] = False
    alive[ia] = alive[ib] = True
    ke[ia] = _snap(chain, ia, x)
    ks[ib] = _snap(chain, ib, x)


def assemble(contour, parts, joins, d, tol, *, closed):
    """Join approximated windows into one simple tool-center chain.

    Parameters
    ----------
    parts : list of Chain, one per window, in order.
    joins : labels between consecutive parts (see :func:`regular_windows`);
        for a closed path, the join between the last part and the first is
        the seam (smooth, or a corner when the seam was put on one).
    d : signed offset, mm.  tol : tolerance, mm.

    Returns
    -------
    chain : Chain, the trimmed tool-center path.
    spots : list of dicts for what was trimmed ("overlap" at corners and
        narrow gaps).
    """
    pieces, gaps, n = [], [], 0
    labels = list(joins) + ([("seam", None)] if closed else [])
    for i, part in enumerate(parts):
        pieces.append(part)
        n += len(part)
        if i < len(labels):
            label = labels[i]
            arc = None
            if label[0] == "corner" and d != 0:
                arc = _corner_arc(contour, label[1], d)
                if arc is None:
                    gaps.append(n)
            elif label[0] == "tight":
                gaps.append(n)
            if arc is not None:
                pieces.append(arc)
                n += 1
    chain = Chain.concat(pieces)
    if d == 0.0:
        return chain, []
    k = len(chain)
    r = abs(d)
    eps = 1e-9 * max(1.0, float(np.abs(chain.start).max()))
    alive = np.ones(k, bool)
    ks, ke = chain.start.copy(), chain.end.copy()
    spots = []

    def around(j, before, count):
        out = []
        m = j - 1 if before else j
        while len(out) < count and (0 <= m < k or closed) and abs(m - j) <= k:
            if alive[m % k]:
                out.append(m % k)
            m += -1 if before else 1
            if not closed and not (0 <= m < k):
                break
        return out

    # 1. overlaps at concave corners and tight spots: cut where the sides cross
    for j in gaps:
        j = j % k if closed else j
        found = None
        for count in (24, 96):
            half = max(min(count, (k - 1) // 2), 1)
            a_idx, b_idx = around(j, True, half)[::-1], around(j, False, half)
            b_idx = [m for m in b_idx if m not in a_idx]
            if a_idx and b_idx:
                found = _cross(chain, a_idx, b_idx, eps)
            if found:
                break
        if found:
            ia, ib, x = found
            between = range(ia + 1, ib if ib > ia else ib + k)
            _apply_cut(chain, alive, ks, ke, ia, ib, x, [m % k for m in between])
            spots.append(_spot(x, "overlap"))
    # 2. anything still closer to the contour than the tool radius (narrow gaps)
    dist = distance_to_contour(contour, tol, r)
    cur = Chain(chain.kind, ks, ke, chain.center, chain.t0, chain.t1)
    step = _clear_step(contour, cur, r, tol)
    counts = np.maximum(np.ceil(_lengths(cur) / step) + 2, 4).astype(np.int64)  # no cap: the step holds on every move
    pts, _, _ = sample_chain(cur, counts)
    first = np.cumsum(counts) - counts
    bad = (np.minimum.reduceat(dist(pts), first) < r - 1.2 * tol - 1e-9) & alive
    if np.all(bad[alive]):
        raise InputError(
            f"the tool (radius {r:g} mm) does not fit: every part of its path comes closer "
            f"to the contour than its radius; {_ADVICE}"
        )
    idx = np.flatnonzero(bad)
    runs = np.split(idx, np.flatnonzero(np.diff(idx) > 1) + 1) if len(idx) else []
    for run in runs:
        if not np.all(bad[run]):
            continue  # already cut by an earlier run
        j0, j1 = int(run[0]), int(run[-1]) + 1
        found = None
        for count in (8, 32, 128):
            half = max(min(count, (k - len(run)) // 2), 1)
            a_idx = around(j0, True, half)[::-1]
            b_idx = [m for m in around(j1, False, half) if m not in a_idx]
            inner = [int(m) for m in run]
            found = _cross(chain, a_idx + inner[:4], inner[-4:] + b_idx, eps)
            if found is not None:
                break
        if found is None:
            x0 = ke[a_idx[-1]] if a_idx else ks[j0]
            raise InputError(
                f"the tool (radius {r:g} mm) cannot pass near ({x0[0]:.4f}, {x0[1]:.4f}): "
                f"its path splits there; {_ADVICE}"
            )
        ia, ib, x = found
        between = range(ia + 1, ib if ib > ia else ib + k)
        _apply_cut(chain, alive, ks, ke, ia, ib, x, [m % k for m in between])
        bad[[m % k for m in between]] = False
        spots.append(_spot(x, "overlap"))
    cut = Chain(chain.kind, ks, ke, chain.center, chain.t0, chain.t1).take(alive)
    cut = cut.take(_lengths(cut) > 1e-9)
    if len(cut) == 0:
        raise InputError(
            f"the tool (radius {r:g} mm) does not fit: nothing of its path stays clear of the contour; {_ADVICE}"
        )
    cut = _bridge(cut, closed)
    # 3. whatever still crosses itself (loops the steps above left, e.g.
    # where noise makes many tiny tight spots) is cut at the crossing
    cut, more = _remove_loops(cut, closed, dist, r, tol)
    # 4. safety net: the finished path must stay clear of the contour
    step = _clear_step(contour, cut, r, tol)
    counts = np.maximum(np.ceil(_lengths(cut) / step) + 2, 4).astype(np.int64)
    pts, _, _ = sample_chain(cut, counts)
    dd = dist(pts)
    worst = int(np.argmin(dd))
    if dd[worst] < r - 1.5 * tol - 1e-9:
        x = pts[worst]
        raise InputError(
            f"the tool (radius {r:g} mm) path would cut {r - dd[worst]:.4f} mm into the part near "
            f"({x[0]:.4f}, {x[1]:.4f}) after trimming; {_ADVICE}"
        )
    return cut, unique_spots(spots + more, tol)


def unique_spots(spots, tol):
    out = []
    for sp in spots:
        if not any(o["reason"] == sp["reason"] and math.hypot(o["x"] - sp["x"], o["y"] - sp["y"]) <= 10 * tol
                   for o in out):
            out.append(sp)
    return out


def _remove_loops(chain, closed, dist, r, tol, max_rounds=200):
    """Cut self-crossings out of a chain: at each crossing keep the side
    that stays at least r - tol from the contour (the loop is the part that
    would cut into it)."""
    import shapely

    spots = []
    before, before_len = chain, float(_lengths(chain).sum())
    done_all = False
    for _ in range(max_rounds):
        k = len(chain)
        if k < 3:
            done_all = True
            break
        counts = np.full(k, 16)
        pts, owner, _ = sample_chain(chain, counts)
        lines = shapely.linestrings(pts, indices=owner)
        tree = shapely.STRtree(lines)
        a, b = tree.query(lines, predicate="intersects")
        keep = (b > a + 1) & ~(closed & (a == 0) & (b == k - 1))
        if not np.any(keep):
            done_all = True
            break
        a, b = a[keep], b[keep]
        order = np.lexsort((b, a))
        done = False
        real = False  # a crossing away from the moves' ends that could not be computed
        eps = 1e-9 * max(1.0, float(np.abs(chain.start).max()))
        for i, j in zip(a[order], b[order]):
            xs = [x for x in _intersections(chain, int(i), int(j), eps)
                  if 1e-12 < _param_on(chain, int(i), x) and _param_on(chain, int(j), x) < 1 - 1e-12]
            if not xs:
                touch = shapely.get_coordinates(lines[i].intersection(lines[j]))
                ends = np.vstack([chain.start[[i, j]], chain.end[[i, j]]])
                near_end = np.hypot(*(touch[:, None, :] - ends[None]).transpose(2, 0, 1)).min(axis=1) <= 1e-6
                real |= not bool(np.all(near_end))
                continue
            x = min(xs, key=lambda p: _param_on(chain, int(i), p))
            inner = np.arange(i + 1, j)
            inner_pts = pts[np.isin(owner, inner)] if len(inner) else np.zeros((0, 2))
            outer = np.r_[np.arange(j + 1, k), np.arange(0, i)]
            outer_pts = pts[np.isin(owner, outer)] if len(outer) else np.zeros((0, 2))
            d_in = dist(inner_pts).min() if len(inner_pts) else np.inf
            d_out = dist(outer_pts).min() if len(outer_pts) else np.inf
            ks, ke = chain.start.copy(), chain.end.copy()
            if not closed or d_in <= d_out:
                # the loop is i..j: keep the path before i and after j
                ke[i] = _snap(chain, int(i), x)
                ks[j] = _snap(chain, int(j), x)
                idx = np.r_[np.arange(0, i + 1), np.arange(j, k)]
            else:
                # the loop is the rest: keep j..end, 0..i (closed chains only)
                ks[i] = _snap(chain, int(i), x)
                ke[j] = _snap(chain, int(j), x)
                idx = np.arange(i, j + 1)
            chain = Chain(chain.kind, ks, ke, chain.center, chain.t0, chain.t1).take(idx)
            chain = chain.take(_lengths(chain) > 1e-9)
            spots.append(_spot(x, "overlap"))
            done = True
            break
        if not done:
            done_all = not real
            break
    if len(chain) == 0 or float(_lengths(chain).sum()) < 0.25 * before_len or not done_all:
        # the crossings did not resolve into one simple path: refuse rather
        # than hand out a path that may cut into the part
        x = spots[-1] if spots else _spot(before.start[0], "overlap")
        raise InputError(
            f"the tool (radius {r:g} mm) path could not be trimmed into one simple path near "
            f"({x['x']:.4f}, {x['y']:.4f}); {_ADVICE}"
        )
    return chain, spots


def _spot(x, reason):
    return {"x": float(x[0]), "y": float(x[1]), "reason": reason}


#: samples of the clearance test that today's rule may take before the
#: step follows the curvature (ordinary parts keep their samples)
_CLEAR_ORDINARY = 8192


def _clear_step(contour, chain, r, tol):
    """Step (mm) of the samples that test the path's clearance from the
    contour.  Between samples the distance to the contour bends by at most
    about h²·K/2 with K the largest curvature near the path: h = √(2·tol/K)
    keeps that to tol/4 (the sagitta h²K/8, doubled for the two curves).
    Today's rule takes K = 1/r (no part of the contour the tool reaches
    bends tighter than the tool); on a long path whose contour and arcs all
    bend gentler than that (a large part), K is their largest curvature, so
    the samples follow the shape, not its size."""
    step = math.sqrt(2.0 * r * tol)
    if float(np.sum(_lengths(chain))) / step <= _CLEAR_ORDINARY:
        return step
    b = contour.breaks
    t = np.concatenate([b, 0.5 * (b[:-1] + b[1:])])
    k = float(np.max(np.abs(contour.curvature(t)), initial=0.0))
    arcs = chain.kind != LINE
    if np.any(arcs):
        rad, _, _ = arc_geometry(chain.start[arcs], chain.end[arcs], chain.center[arcs], chain.kind[arcs] == ARC_CCW)
        k = max(k, float(np.max(1.0 / rad)))
    if not k * r < 0.5:  # anything tight (or NaN): today's rule
        return step
    return math.sqrt(2.0 * tol / k)


def _lengths(chain):
    L = np.hypot(*(chain.end - chain.start).T)
    arcs = chain.kind != LINE
    if np.any(arcs):
        r, _, sw = arc_geometry(chain.start[arcs], chain.end[arcs], chain.center[arcs], chain.kind[arcs] == ARC_CCW)
        # no move here is a full circle (joined arcs stop at half a turn):
        # an arc whose ends meet is a remnant of length 0
        L[arcs] = np.where(L[arcs] > 1e-12, r * np.abs(sw), 0.0)
    return L


def _bridge(chain, closed):
    """Insert short lines where consecutive moves do not meet (after trimming)."""
    if len(chain) < 2:
        return chain
    nxt = np.roll(chain.start, -1, axis=0) if closed else chain.start[1:]
    gaps = np.hypot(*(nxt - chain.end[: len(nxt)]).T) > 1e-9
    if not np.any(gaps):
        return chain
    idx = np.flatnonzero(gaps)
    pieces, prev = [], 0
    for i in idx:
        pieces.append(chain.take(slice(prev, i + 1)))
        s, e = chain.end[i], nxt[i]
        pieces.append(Chain(np.array([LINE], np.int8), s[None], e[None], np.zeros((1, 2)),
                            np.array([np.nan]), np.array([np.nan])))
        prev = i + 1
    pieces.append(chain.take(slice(prev, len(chain))))
    return Chain.concat(pieces)
