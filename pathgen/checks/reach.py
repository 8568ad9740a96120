"""Geometry facts for the checks: radii, inflections, tool reach, material left.

Conventions (see ``pathgen._options``): κ > 0 on a left turn, closed
outlines run counter-clockwise, d = side_sign·r is the tool offset along
the left normal.  The tool of radius r cannot reach where d·κ ≥ 1: there
the contour bends toward the tool with radius R = 1/|κ| ≤ r, the offset
curve has a cusp (d·κ = 1) or a loop (Farouki & Neff 1990), and the loop
is trimmed, leaving material.  A sharp corner that turns toward the tool
cannot be reached by any tool of radius r > 0.
"""

from __future__ import annotations

import math

import numpy as np

__all__ = ["radius_extremes", "inflections", "place_inflections", "largest_tool_diameter", "gouges", "material_left"]

#: A tool position cuts into the contour when a contour point lies closer
#: than r·(1 − GOUGE_RTOL) to it.
GOUGE_RTOL = 1e-6

#: Most points sampled round one group of reach spots to measure the material
#: left (the step grows beyond r/1000 on very long groups).
MAX_GRID = 50_000


def radius_extremes(samples):
    """Smallest radius of left turns and of right turns.

    Returns
    -------
    (left, right) : each None (no such turn) or (radius mm, sample index).
    """
    k = samples.kappa
    out = []
    for sign in (1.0, -1.0):
        q = sign * k
        i = int(np.argmax(q))
        out.append((float(1.0 / q[i]), i) if q[i] > 0 else None)
    return tuple(out)


def inflections(samples, size: float, *, min_bow: float = 0.0) -> np.ndarray:
    """Arc lengths (mm) where the curvature changes sign along a smooth stretch.

    Curvature with |κ| ≤ 1e-4·max|κ| (or |κ|·size ≤ 1e-9) counts as zero:
    such stretches are straight for any cutting purpose, and the fit's own
    error makes the sign of so small a curvature meaningless (a spline
    through points of a sine wobbles about zero near its straight ends).
    A sign change across a run of zeros is one inflection, placed where κ
    interpolated linearly between the two nonzero samples crosses zero.
    Sign changes across a sharp corner are not inflections.

    A wiggle between two sign changes that bows less than
    :data:`WIGGLE_BOW` × size away from its chord (bow ≤ max|κ|·L²/8 for a
    stretch of length L, the sagitta bound) is rounding noise, not a shape:
    the two sign changes cancel.  (Coordinates rounded to 1e-10 mm at
    10⁶ points 0.4 µm apart make thousands of such wiggles, each bowing
    about 1e-11 mm.)  ``min_bow`` (mm) raises that threshold: the fit
    passes it twice the points' noise, since a wiggle that bows less than
    the noise cannot be told from it.
    """
    S = samples
    kmax = float(np.abs(S.kappa).max()) if len(S.kappa) else 0.0
    eps = max(1e-9 / max(size, 1e-300), 1e-4 * kmax)
    nz = np.flatnonzero(np.abs(S.kappa) > eps)
    if nz.size < 2:
        return np.zeros(0)
    i0, i1 = nz[:-1], nz[1:]
    pairs = [(i0, i1)]
    if S.closed:
        pairs.append((nz[-1:], nz[:1]))
    # a corner between two nonzero samples: some corner index in (i0, i1]
    corner_count = np.r_[0, np.cumsum(S.corner & (S.turn != 0))]
    found, before, after = [], [], []
    for a, b in pairs:
        ka, kb = S.kappa[a], S.kappa[b]
        change = np.sign(ka) != np.sign(kb)
        if b is nz[:1]:  # the seam pair of a closed contour
            across = (corner_count[-1] - corner_count[a[0] + 1] + corner_count[b[0] + 1]) > 0
            sa, sb = S.s[a], S.s[b] + S.length
        else:
            across = corner_count[b + 1] - corner_count[a + 1] > 0
            sa, sb = S.s[a], S.s[b]
        keep = change & ~across
        frac = ka[keep] / (ka[keep] - kb[keep])
        s = sa[keep] + frac * (sb[keep] - sa[keep])
        found.append(np.mod(s, S.length) if S.closed else s)
        before.append(a[keep])
        after.append(b[keep])
    s = np.concatenate(found)
    order = np.argsort(s, kind="stable")
    s, before, after = s[order], np.concatenate(before)[order], np.concatenate(after)[order]
    return _cancel_wiggles(S, s, before, after, corner_count, max(WIGGLE_BOW * size, min_bow))


def place_inflections(contour, samples, found: np.ndarray, points: int = 257) -> np.ndarray:
    """Inflections found on samples placed by geometry, placed on the contour.

    Where runs of short pieces have a sample every geometric step (see
    :mod:`pathgen.checks.sampling`), κ interpolated between samples places
    a zero to within a fraction of the step only: each inflection is
    placed again where the tangent angle turns back (its extremum), on
    ``points`` evenly spread parameters from two samples before it to one
    after it.  The angle is the integral of κ, so noise in κ hardly moves
    that extremum.  Unchanged when every piece has its own samples, or
    where the window holds a corner or shows no extremum inside.
    """
    S = samples
    found = np.asarray(found, dtype=float)
    if found.size == 0 or not getattr(S, "geometric", 0):
        return found
    n = len(S)
    i = np.searchsorted(S.s, found)
    a = np.maximum(i - 2, 0)
    b = np.minimum(i + 1, n - 1)
    u = np.linspace(0.0, 1.0, points)
    t = S.t[a, None] + (S.t[b] - S.t[a])[:, None] * u[None, :]
    d = np.asarray(contour(t.ravel(), nu=1)).reshape(len(found), points, 2)
    th = np.unwrap(np.arctan2(d[..., 1], d[..., 0]), axis=1)
    ends_hi = np.maximum(th[:, 0], th[:, -1])
    ends_lo = np.minimum(th[:, 0], th[:, -1])
    rise = th.max(axis=1) - ends_hi
    fall = ends_lo - th.min(axis=1)
    j = np.where(rise >= fall, th.argmax(axis=1), th.argmin(axis=1))
    corners = np.r_[0, np.cumsum(S.corner)]
    ok = (np.maximum(rise, fall) > 0) & (j > 0) & (j < points - 1) & (corners[b + 1] == corners[a])
    t_new = t[np.arange(len(found)), j]
    out = np.where(ok, np.interp(t_new, S.t, S.s), found)
    return np.sort(out)


#: A wiggle between two curvature sign changes that bows less than this
#: fraction of the contour's size is not reported (see :func:`inflections`).
WIGGLE_BOW = 1e-7


def _cancel_wiggles(S, s, before, after, corner_count, min_bow):
    """Merge sign changes joined by wiggles that bow less than ``min_bow`` mm.

    A run of sign changes whose stretches in between are all such wiggles
    (and hold no corner) is one cluster: an even number of them is no
    inflection at all, an odd number is one, placed where the tangent
    angle turns back (its extremum over the cluster, where the smoothly
    varying angle shows the true zero of κ that the noisy κ hides).  A
    lone sign change keeps its interpolated place.
    """
    k = len(s)
    if k < 2:
        return s
    kabs = np.abs(S.kappa)
    n = len(kabs)
    # the stretch after each sign change up to the next (the last one: round
    # the seam to the first on a closed contour; open contours have none)
    a = after.astype(np.int64)
    b = np.r_[before[1:], before[:1]].astype(np.int64)
    # every stretch at once: the peak |κ| over samples lo..hi (one reduceat
    # over the pairs (lo, hi + 1)), its corners and its length
    m = k if S.closed else k - 1
    lo, hi = a[:m], b[:m]
    plain = lo <= hi
    small = np.zeros(k, bool)
    span = np.r_[np.diff(s), S.length + s[0] - s[-1]][:m]
    peak = np.zeros(m)
    if plain.any():
        bounds = np.column_stack([lo[plain], hi[plain] + 1]).ravel()
        peak[plain] = np.maximum.reduceat(np.r_[kabs, 0.0], bounds)[0::2]
    corners = corner_count[hi + 1] - corner_count[lo]
    for i in np.flatnonzero(~plain):  # round the seam (at most one on a closed contour)
        peak[i] = max(kabs[lo[i]:].max(), kabs[:hi[i] + 1].max())
        corners[i] = corner_count[n] - corner_count[lo[i]] + corner_count[hi[i] + 1]
        span[i] = S.length + s[(i + 1) % k] - s[i]
    small[:m] = (corners == 0) & (peak * span * span / 8.0 < min_bow)
    if not small.any():
        return s
    if S.closed:
        if small.all():  # wiggles only, all the way round: no inflection
            return np.zeros(0)
        # start the runs after a stretch that is not a wiggle
        first = int(np.flatnonzero(~small)[0]) + 1
        order = np.r_[np.arange(first, k), np.arange(first)]
    else:
        order = np.arange(k)
    theta = np.unwrap(np.arctan2(S.tangent[:, 1], S.tangent[:, 0]))
    out = []
    run = [int(order[0])]
    for j in list(order[1:]) + [None]:
        if j is not None and small[run[-1]]:
            run.append(int(j))
            continue
        if len(run) == 1:
            out.append(s[run[0]])
        elif len(run) % 2 == 1:
            lo, hi = int(before[run[0]]), int(after[run[-1]])
            idx = np.arange(lo, hi + 1) if lo <= hi else np.r_[np.arange(lo, n), np.arange(hi + 1)]
            th = np.unwrap(theta[idx])
            turn_left_first = S.kappa[lo] > 0  # angle rises, then falls back
            pick = int(np.argmax(th) if turn_left_first else np.argmin(th))
            out.append(S.s[idx[pick]])
        if j is not None:
            run = [int(j)]
    return np.sort(np.asarray(out, dtype=np.float64))


#: Tangent discs wider than this many times the contour's length are not
#: gaps (no tool that size exists; they come from points on one straight
#: edge, whose distance ahead of each other is rounding).
GAP_DISC_LIMIT = 1000.0


def largest_tool_diameter(samples, sign: int):
    """Largest tool diameter (mm) that reaches everywhere on the side ``sign``.

    A tool of radius r touches the contour at P exactly when the disc of
    radius r tangent at P on the tool's side stays clear of the contour,
    i.e. r is at most the radius of the largest such disc,
    ρ(P) = min over contour points Q on that side of |Q − P|² / (2 (Q − P)·n)
    (n the unit normal toward the tool; the circle through Q tangent at P).
    As Q → P this is the radius of curvature; a far Q gives the half-width
    of a gap or neck.  The answer is 2 · min ρ, so a slot or a pocket's neck
    narrower than the tool counts as well as a tight bend: twice the
    smallest radius of the stretches that bend toward the tool, or the
    narrowest gap, whichever is smaller.  0 when a sharp corner turns
    toward the tool; None when nothing bends toward the tool and no gap
    closes on it (any tool reaches), or ``sign`` = 0 (cutting on the line).

    Gaps are measured between samples of the contour (pairs searched on at
    most 1500 of them, then refined on every sample around the narrowest pairs),
    so a gap reads at most about a sample spacing's sagitta wide of its true
    width.  A tool of exactly this diameter touches with no margin: pick a
    smaller one.
    """
    if sign == 0:
        return None
    S = samples
    if np.any(sign * S.turn[S.corner] > 0):
        return 0.0
    q = sign * S.kappa
    qmax = float(q.max()) if len(q) else 0.0
    bend = 2.0 / qmax if qmax > 0 else math.inf
    gap = 2.0 * _narrowest_disc(S, sign)
    if gap > GAP_DISC_LIMIT * S.length:
        # a disc that large is rounding, not a gap: points on one straight
        # edge seen from each other 1e-16 "ahead" read 1.1e12 inch
        gap = math.inf
    best = min(bend, gap)
    return best if math.isfinite(best) else None


def _disc_radii(p, n, q, sp, sq, length, closed, skip):
    """ρ for each point p (k, 2) with unit normal n toward the tool, against
    the points q (m, 2): min |Q − P|² / (2 (Q − P)·n) over Q ahead of P.
    ``sp``, ``sq``: their arc lengths; points within ``skip`` of P along the
    contour (wrapped when ``closed``) are left out: they measure the
    curvature, which the caller counts exactly."""
    out = np.full(len(p), np.inf)
    for a in range(0, len(p), 256):
        dx = q[None, :, 0] - p[a:a + 256, None, 0]
        dy = q[None, :, 1] - p[a:a + 256, None, 1]
        ahead = dx * n[a:a + 256, None, 0] + dy * n[a:a + 256, None, 1]
        ds = np.abs(sq[None, :] - sp[a:a + 256, None])
        if closed:
            ds = np.minimum(ds, length - ds)
        with np.errstate(divide="ignore", invalid="ignore"):
            rho = np.where((ahead > 0) & (ds > skip), (dx * dx + dy * dy) / (2 * ahead), np.inf)
        out[a:a + 256] = rho.min(axis=1)
    return out


def _narrowest_disc(S, sign, most: int = 1500) -> float:
    """Smallest ρ (see :func:`largest_tool_diameter`) over the samples, from
    contour points more than two sample spacings apart along the contour
    (closer ones measure the curvature, which is counted exactly).

    Pairs are searched on at most ``most`` samples evenly spread in index
    (in arc length where runs of short pieces were sampled by geometry,
    the samples then being uneven); around the
    16 narrowest, the point and its contact are searched again, on finer
    and finer samples down to every one (the cost stays about most²
    whatever the number of samples)."""
    n_all = len(S.xy)
    if n_all < 4 or not S.length > 0:
        return math.inf
    normal = sign * np.stack([-S.tangent[:, 1], S.tangent[:, 0]], axis=1)
    step = max(1, -(-n_all // most))
    sub = np.arange(0, n_all, step)
    if getattr(S, "geometric", 0) and step > 1:
        # uneven samples: spread the search evenly in arc length, and let
        # the windows round a pair reach the next search sample either side
        sub = np.unique(np.searchsorted(S.s, np.linspace(0.0, S.length, most, endpoint=False)))
        sub = sub[sub < n_all]
        step = int(np.diff(np.r_[sub, sub[0] + n_all if S.closed else n_all - 1]).max())
    skip = 2.0 * S.length / len(sub)
    args = (S.length, S.closed, skip)
    rho = _disc_radii(S.xy[sub], normal[sub], S.xy[sub], S.s[sub], S.s[sub], *args)
    if not np.isfinite(rho).any():
        return math.inf
    best = float(rho.min())
    if step == 1:
        return best

    def around(i, half, stride):
        win = np.arange(i - half, i + half + 1, stride)
        return win % n_all if S.closed else win[(win >= 0) & (win < n_all)]

    for k in np.argsort(rho)[:16]:
        if not np.isfinite(rho[k]):
            break
        # the contact on the coarse samples
        d = S.xy[sub] - S.xy[sub[k]]
        ahead = d @ normal[sub[k]]
        with np.errstate(divide="ignore", invalid="ignore"):
            r = np.where(ahead > 0, (d * d).sum(axis=1) / (2 * ahead), np.inf)
        ds = np.abs(S.s[sub] - S.s[sub[k]])
        r[np.minimum(ds, S.length - ds) <= skip if S.closed else ds <= skip] = np.inf
        pi, qi, half = int(sub[k]), int(sub[int(np.argmin(r))]), step
        # then around the point and its contact, ever finer down to every sample
        while True:
            stride = max(1, half // 64)
            p, q = around(pi, half, stride), around(qi, half, stride)
            found = _disc_radii(S.xy[p], normal[p], S.xy[q], S.s[p], S.s[q], *args)
            j = int(np.argmin(found))
            if not np.isfinite(found[j]):
                break
            best = min(best, float(found[j]))
            if stride == 1:
                break
            d = S.xy[q] - S.xy[p[j]]
            ahead = d @ normal[p[j]]
            with np.errstate(divide="ignore", invalid="ignore"):
                r = np.where(ahead > 0, (d * d).sum(axis=1) / (2 * ahead), np.inf)
            pi, qi, half = int(p[j]), int(q[int(np.argmin(r))]), stride
    return best


def gouges(samples, d: float) -> np.ndarray:
    """True where the tool, centered on the offset point, cuts into the contour.

    The tool center for sample i is P_i + d·N_i (N the left normal); it
    gouges when some sample of the contour lies closer than r·(1 − 1e-6)
    to it (a KD-tree query).  This catches what curvature alone cannot: a
    gap or neck narrower than the tool, where the contour's far side comes
    within r.  The contour points used are at most r/32 apart, so gouges
    shallower than about (r/32)²/(8r) ≈ r/8000 can slip through.
    """
    from ..geometry import nearest_distance

    S = samples
    r = abs(d)
    if r == 0 or len(S) < 2:
        return np.zeros(len(S), bool)
    normal = np.stack([-S.tangent[:, 1], S.tangent[:, 0]], axis=1)
    centers = S.xy + d * normal
    bound = r * (1.0 - GOUGE_RTOL)
    # Many contour points lie just beyond r from each center, which makes a
    # nearest-point search on a dense contour slow; contour points every
    # r/32 or closer are enough to see a gouge deeper than about r/8000.
    if getattr(S, "geometric", 0):
        # uneven samples (runs of short pieces sampled by geometry, their
        # step at most r/32 in a check): pick by arc length, the first
        # sample in each r/64 (r/512) of it, so that contour points lie
        # r/32 apart or closer and tool positions r/256 or closer (or every
        # sample where the samples are farther apart)
        ref = S.xy[_first_in_bins(S.s, r / 64.0)]
        tested = np.unique(np.r_[_first_in_bins(S.s, r / 512.0), len(S) - 1])
        step = 1 if len(tested) == len(S) else 2
    else:
        spacing = S.length / max(len(S) - 1, 1)
        every = max(1, int((r / 32.0) / max(spacing, 1e-300)))
        ref = S.xy[::every]
        # tool positions every r/256 or closer; a sample between two tested
        # positions gouges when either of them does
        step = max(1, int((r / 256.0) / max(spacing, 1e-300)))
        tested = np.r_[np.arange(0, len(S), step), len(S) - 1] if step > 1 else np.arange(len(S))
    dist = nearest_distance(ref, centers[tested], bound)  # numpy when small, else a KD-tree
    hit = dist < bound
    if step == 1:
        return hit
    pos = np.arange(len(S))
    lo = np.minimum(np.searchsorted(tested, pos, side="right") - 1, len(tested) - 1)
    hi = np.minimum(lo + 1, len(tested) - 1)
    return hit[lo] | hit[hi]


def _first_in_bins(s: np.ndarray, width: float) -> np.ndarray:
    """Index of the first of the sorted arc lengths ``s`` in each bin of
    ``width`` that holds any (so consecutive picks are less than two bins
    apart, or as far apart as the samples themselves)."""
    b = np.floor(s / width)
    return np.flatnonzero(np.r_[True, b[1:] != b[:-1]])


def _window(s0: float, s1: float, margin: float, length: float, closed: bool):
    """Arc-length window [s0 - margin, s1 + margin], wrapped or clipped."""
    lo, hi = s0 - margin, s1 + margin
    if closed:
        if hi - lo >= length:
            return 0.0, length, True
        return lo, hi, False
    return max(lo, 0.0), min(hi, length), False


def material_left(contour, samples, d: float, spans, *, step_fraction: float = 1e-3):
    """Depth (mm) of the material the tool leaves in each reach span.

    Parameters
    ----------
    contour : Contour
    samples : Samples of the contour.
    d : signed tool offset along the left normal (side_sign·r), mm, ≠ 0.
    spans : list of (s0, s1) arc-length spans (mm) where the tool cannot
        reach; s1 < s0 wraps round the seam of a closed contour.
    step_fraction : spacing of the local sampling as a fraction of r.

    Returns
    -------
    list of float or None
        For each span, the largest distance from a contour point near the
        span to the region the tool sweeps (the union of tool discs at the
        tool positions that do not cut into the contour there); None when
        no such tool position exists near the span (the tool does not fit).

    Notes
    -----
    Measured on the geometry: the contour near the span is sampled every
    r·step_fraction (coarser when spans closer than 10 r to each other
    run together over more than MAX_GRID samples); a tool position (a point
    of the offset curve P + d·N) is kept when no contour point (every r/64)
    lies closer than r·(1 − 1e-6) to it;
    the depth at a contour point is its distance to the nearest kept
    position minus r.  For a sharp inside corner of opening angle θ this
    gives the handbook r·(1/sin(θ/2) − 1).
    """
    from scipy.spatial import cKDTree

    S = samples
    r = abs(d)
    L = S.length
    step = r * step_fraction
    spans = [(s0, s1 + L if (S.closed and s1 < s0) else s1) for s0, s1 in spans]
    # spans closer than 10 r share one neighbourhood: measure them together
    groups: list[list[int]] = []
    for i, (s0, _) in enumerate(spans):
        if groups and s0 - spans[groups[-1][-1]][1] < 10.0 * r:
            groups[-1].append(i)
        else:
            groups.append([i])
    out: list = [None] * len(spans)
    for g in groups:
        g0, g1 = spans[g[0]][0], max(spans[i][1] for i in g)
        grids = []
        for margin in (5.0 * r, 3.0 * r):
            lo, hi, whole = _window(g0, g1, margin, L, S.closed)
            n = int(min(max((hi - lo) / step, 64), MAX_GRID))
            grids.append(np.linspace(lo, hi, n, endpoint=not whole))
        pts_s, ctr_s = grids
        t_pts = np.interp(np.mod(pts_s, L) if S.closed else pts_s, S.s, S.t)
        t_ctr = np.interp(np.mod(ctr_s, L) if S.closed else ctr_s, S.s, S.t)
        P = contour(t_pts)
        C = contour(t_ctr) + d * contour.normal(t_ctr)
        # contour points every r/64 or closer are enough to see a gouge
        # deeper than about r/30000 (see gouges); denser ones slow the search
        every = max(1, int((r / 64.0) / max(float(pts_s[1] - pts_s[0]), 1e-300)))
        bound = r * (1.0 - GOUGE_RTOL)
        dist, _ = cKDTree(P[::every]).query(C, k=1, distance_upper_bound=bound)
        valid = C[dist >= bound]
        if len(valid) == 0:
            continue
        tree = cKDTree(valid)
        lo_i = np.searchsorted(pts_s, [spans[i][0] - r for i in g])
        hi_i = np.searchsorted(pts_s, [spans[i][1] + r for i in g], side="right")
        a, b = int(lo_i.min()), int(hi_i.max())
        if b <= a:
            continue
        depth, _ = tree.query(P[a:b], k=1)
        for i, i0, i1 in zip(g, lo_i - a, hi_i - a):
            if i1 > i0:
                out[i] = float(max(depth[i0:i1].max() - r, 0.0))
    return out
