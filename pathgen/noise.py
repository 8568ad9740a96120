"""How noisy are the points?  Quantization step and measurement noise.

Digitized outline points carry two kinds of error: the rounding of the
file (a step q visible in the decimals it uses; rounding to q adds a
uniform error of variance q²/12 per coordinate, Sheppard's correction) and
the measurement noise of the probe or scanner.  An interpolating spline
turns noise of size δ on a point spacing h into curvature of about
4δ/h² (the second difference of the noise over h²): on dense points that
fake curvature swamps the part's own.

:func:`estimate_noise` measures both from the points alone and decides
whether the noise can fake the answers (``NoiseEstimate.smooth``).

Notes
-----
The noise σ (mm, normal to the outline) comes from difference-based
pseudo-residuals (Gasser, Sroka & Jennen-Steinmetz 1986; longer
difference sequences: Hall, Kay & Titterington 1990).  For every run of
four points P_a..P_d the third divided difference of the component normal
to the chord P_a P_d, taken in the chord-length parameter t,

    e = Σ_j w_j (P_j · n),   w_j = 1 / Π_{k≠j} (t_j − t_k),

annihilates any quadratic (so a smooth outline's position, direction and
curvature leave no trace) and, divided by √(Σ w_j²), has variance σ² for
independent noise of variance σ² per coordinate.  The robust scale
1.4826 × median |e − median e| (the normal-consistent median absolute
deviation) picks out corners and short features, which touch few of the
e; those beyond 4 such scales are left out and the standard deviation of
the rest is σ (plain, so rounding noise, which is not Gaussian, is
measured at its true size).

The shape still shows in e through its third derivative, which grows like
h³ with the spacing, while noise does not grow at all.  So σ is measured
twice, at lag 1 (σ₁) and lag 2 (σ₂, every other point):

* σ₂ < 2 σ₁: the differences are noise (pure noise gives σ₂ = σ₁, a
  pure shape σ₂ = 8 σ₁); the shape's share is removed by extrapolation,
  σ² = (64 σ₁² − σ₂²) / 63.
* otherwise the shape dominates: the points are resolved finer than their
  spacing shows, and σ₁ is only an upper bound (reported as such).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["NoiseEstimate", "estimate_noise", "quantization_step", "chord_span", "chord_parameter", "FLOAT_ULPS",
           "FAKE_RATIO", "MAX_DECIMALS"]

#: Noise below this many units in the last place of the largest
#: coordinate is float64's own rounding, not the file's: taken as clean.
#: Any noise above it is judged by the curvature it fakes alone (4σ/h²
#: against ``FAKE_RATIO``): rounding to 10 decimals (σ = 2.9·10⁻¹¹ mm) on
#: points 0.2 µm apart fakes radii of about 400 mm, 0.0025 /mm, a sixth of
#: a 380 mm cam's mean curvature, so it is no longer "clean" there.
FLOAT_ULPS = 16.0
#: Noise matters when the curvature it can fake (4σ/h²) exceeds this
#: share of the outline's mean curvature (2π / length for a closed
#: outline, its coarse total turning / length for an open one).
FAKE_RATIO = 0.01
#: Most decimals looked for when reading the quantization step.
MAX_DECIMALS = 9
#: Noise above this share of the point spacing moves the chord-length
#: parameter and the chords' normals with it, and the divided differences
#: then read it low (7 % low at σ = 0.28 h, 19 % at 1.5 h, measured on an
#: invented closed outline with Gaussian noise); above it the parameter and
#: the normals come from chords many points long.
NOISY_SPACING = 0.02
#: Normal-consistent scale of the median absolute deviation.
MAD_SCALE = 1.4826
#: Pseudo-residuals beyond this many robust scales are left out of the
#: standard deviation (4: 0.006 % of Gaussian noise, every corner).
CLIP = 4.0


@dataclass(frozen=True)
class NoiseEstimate:
    """What the points say about their own noise.  Lengths in mm.

    Attributes
    ----------
    points : number of points looked at.
    spacing_median, spacing_min : distance between neighbouring points.
    quantization : the rounding step of the coordinates (mm), or None when
        they use more than ``MAX_DECIMALS`` decimals (full precision).
    sigma : measured noise, normal to the outline (standard deviation, mm);
        0 when too few points.
    resolved : True when the differences are noise (``sigma`` is a
        measurement); False when the shape dominates them (``sigma`` is
        then an upper bound: the noise is too small to see at this spacing).
    sigma_used : the noise the smoothing aims at: ``max(sigma, q/√12)``
        when resolved, else 0.
    fake_curvature : 4·sigma_used/h² with h = spacing_median, 1/mm: the
        curvature the noise can fake in an exact interpolation.
    reference_curvature : the outline's mean curvature, 1/mm (2π/length
        closed, coarse total turning/length open).
    smooth : True when the noise can fake the answers: resolved, above
        float64's own rounding of the coordinates (``FLOAT_ULPS`` units in
        the last place) and fake_curvature > ``FAKE_RATIO`` × the
        reference curvature.
    """

    points: int
    spacing_median: float
    spacing_min: float
    quantization: float | None
    sigma: float
    resolved: bool
    sigma_used: float
    fake_curvature: float
    reference_curvature: float
    smooth: bool

    @property
    def fake_radius(self) -> float:
        """1 / fake_curvature, mm (inf when the noise fakes nothing)."""
        return 1.0 / self.fake_curvature if self.fake_curvature > 0 else math.inf

    def to_dict(self, scale: float = 1.0) -> dict:
        """Plain numbers (lengths times ``scale``; curvature divided by it)."""

        def num(v, k=scale):
            if v is None or not math.isfinite(v):
                return None
            return float(f"{v * k:.6g}")

        return {
            "points": self.points,
            "spacing_median": num(self.spacing_median),
            "spacing_min": num(self.spacing_min),
            "quantization": num(self.quantization),
            "sigma": num(self.sigma),
            "resolved": self.resolved,
            "sigma_used": num(self.sigma_used),
            "fake_radius": num(self.fake_radius),
            "smooth": self.smooth,
        }


def quantization_step(values, *, max_decimals: int = MAX_DECIMALS) -> float | None:
    """The rounding step the values show: 10^-k for the fewest decimals k
    that hold every value exactly, or None when more than ``max_decimals``.

    >>> quantization_step([1.25, 3.5, -7.125])
    0.001
    >>> quantization_step([1.0, 2.0]) , quantization_step([0.1 + 1e-12])
    (1.0, None)
    """
    v = np.asarray(values, dtype=np.float64).ravel()
    v = v[np.isfinite(v)]
    if v.size == 0:
        return None
    top = float(np.abs(v).max())

    def holds(x, k):
        r = np.round(x, k)
        slack = 4.0 * np.spacing(np.maximum(np.abs(x), 1.0)) + 4.0 * np.spacing(top) * (top > 0)
        return bool(np.all(np.abs(r - x) <= slack))

    head = v[:20000]
    for k in range(0, max_decimals + 1):
        if top * 10.0**k > 2.0**52:  # beyond float64's integer range: cannot tell
            return None
        if holds(head, k) and holds(v, k):
            return float(f"1e-{k}") if k else 1.0
    return None


def _chords(p, closed):
    """x, y (contiguous), the steps between neighbouring points (closed: n
    of them, the last back to the first) and their running sum t (len + 1)."""
    x, y = np.ascontiguousarray(p[:, 0]), np.ascontiguousarray(p[:, 1])
    dx = np.diff(np.append(x, x[0]) if closed else x)
    dy = np.diff(np.append(y, y[0]) if closed else y)
    seg = np.hypot(dx, dy)
    t = np.empty(len(seg) + 1)
    t[0] = 0.0
    np.cumsum(seg, out=t[1:])
    return x, y, seg, t


def _pseudo_residuals(p, closed, lag, chords=None):
    """Third divided differences of the normal component at ``lag``,
    scaled to unit variance per unit noise (see the module notes).

    Every window P_i, P_{i+lag}, P_{i+2lag}, P_{i+3lag} at once, on shifted
    slices of the coordinates (a closed outline's are continued past the
    seam, its parameter by the loop's length), one array per term.
    ``chords``: :func:`_chords` of ``p``, when already at hand."""
    n = len(p)
    x, y, _, t = chords if chords is not None else _chords(p, closed)
    if closed:
        reach = 3 * lag
        if reach <= n:
            xs, ys = np.concatenate([x, x[:reach]]), np.concatenate([y, y[:reach]])
            ts = np.concatenate([t[:n], t[:reach]])
        else:  # tiny outlines: windows longer than the loop
            turns = -(-reach // n) + 1
            xs = np.tile(x, turns)[: n + reach]
            ys = np.tile(y, turns)[: n + reach]
            ts = np.tile(t[:n], turns)[: n + reach]
        m = n
    else:
        m = n - 3 * lag
        if m <= 0:
            return np.zeros(0)
        xs, ys, ts = x, y, t
    X = [xs[j * lag: j * lag + m] for j in range(4)]
    Y = [ys[j * lag: j * lag + m] for j in range(4)]
    T = [ts[j * lag: j * lag + m] for j in range(4)]
    if closed:  # past the seam the parameter goes on by the loop's length
        T = [T[0]] + [Tk - T[0] for Tk in T[1:]]
        for Tk in T[1:]:
            np.mod(Tk[-reach:], t[n], out=Tk[-reach:])  # only the windows over the seam wrap
            Tk += T[0]
    d01, d02, d03 = T[0] - T[1], T[0] - T[2], T[0] - T[3]
    d12, d13, d23 = T[1] - T[2], T[1] - T[3], T[2] - T[3]
    # w_j = 1 / prod over k != j of (t_j - t_k)
    w0 = d01 * d02 * d03
    w1 = -d01 * d12 * d13
    w2 = d02 * d12 * d23
    w3 = -(d03 * d13 * d23)
    cx, cy = X[3] - X[0], Y[3] - Y[0]
    length = np.hypot(cx, cy)
    ok = (w0 != 0) & (w1 != 0) & (w2 != 0) & (w3 != 0) & (length > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        for w in (w0, w1, w2, w3):
            np.divide(1.0, w, out=w)
        nx, ny = -cy / length, cx / length
        e = w1 * ((X[1] - X[0]) * nx + (Y[1] - Y[0]) * ny)  # the j = 0 term is 0
        e += w2 * ((X[2] - X[0]) * nx + (Y[2] - Y[0]) * ny)
        e += w3 * ((X[3] - X[0]) * nx + (Y[3] - Y[0]) * ny)
        e /= np.sqrt(w0 * w0 + w1 * w1 + w2 * w2 + w3 * w3)
    e = e[ok]
    return e[np.isfinite(e)]


def chord_parameter(points, closed: bool, span: int) -> np.ndarray:
    """Chord-length parameter of the points (closed: n + 1 values, the last
    closing the loop), measured on chords ``span`` points long and spread
    evenly over the points between (``span`` = 1: plain chord length)."""
    p = np.asarray(points, dtype=np.float64)
    n = len(p)
    if span <= 1:
        seg = np.hypot(*np.diff(np.vstack([p, p[:1]]) if closed else p, axis=0).T)
        return np.concatenate([[0.0], np.cumsum(seg)])
    last = n if closed else n - 1
    knots = np.unique(np.r_[np.arange(0, last, span), last])
    q = p[knots % n]
    tk = np.concatenate([[0.0], np.cumsum(np.hypot(*np.diff(q, axis=0).T))])
    return np.interp(np.arange(last + 1), knots, tk)


def chord_span(sigma: float, spacing: float, n: int) -> int:
    """Points per chord for a parameter the noise does not move: 1 (plain
    chord length) while σ ≤ NOISY_SPACING × the spacing, else chords about
    100 σ long (at most n/64 points)."""
    if not (spacing > 0 and sigma > NOISY_SPACING * spacing):
        return 1
    return int(min(max(math.ceil(sigma / (0.01 * spacing)), 2), max(n // 64, 2)))


def _pseudo_residuals_span(p, closed, lag, span):
    """:func:`_pseudo_residuals` for points so close that their noise shows
    in the short chords: the parameter from chords ``span`` points long, and
    the normal from a chord reaching ``span`` points beyond the run at each
    end."""
    n = len(p)
    t = chord_parameter(p, closed, span)
    m = span if span > 1 else 0
    if closed:
        i = np.arange(n)
        idx = np.stack([(i + k * lag) % n for k in range(4)])
        tt = np.stack([t[i] + (t[(i + k * lag) % n] - t[i]) % t[-1] for k in range(4)])
        tt[0] = t[i]
        ends = ((i - m) % n, (i + 3 * lag + m) % n)
    else:
        i = np.arange(m, n - 3 * lag - m)
        if len(i) == 0:
            return np.zeros(0)
        idx = np.stack([i + k * lag for k in range(4)])
        tt = t[idx]
        ends = (i - m, i + 3 * lag + m)
    w = np.ones_like(tt)
    for j in range(4):
        for k in range(4):
            if k != j:
                w[j] = w[j] * (tt[j] - tt[k])
    ok = np.all(w != 0, axis=0)
    w = np.where(ok, 1.0 / np.where(w == 0, 1.0, w), 0.0)
    pa = p[idx[0]]
    chord = p[ends[1]] - p[ends[0]]
    length = np.hypot(chord[:, 0], chord[:, 1])
    ok &= length > 0
    nx = np.where(ok, -chord[:, 1] / np.where(ok, length, 1.0), 0.0)
    ny = np.where(ok, chord[:, 0] / np.where(ok, length, 1.0), 0.0)
    e = np.zeros(len(i))
    for j in range(4):
        q = p[idx[j]]
        e += w[j] * ((q[:, 0] - pa[:, 0]) * nx + (q[:, 1] - pa[:, 1]) * ny)
    norm = np.sqrt((w * w).sum(axis=0))
    e = np.where(ok, e / np.where(ok, norm, 1.0), np.nan)
    return e[np.isfinite(e)]


def median(a) -> float:
    """The median of the values in ``a``, as ``numpy.median`` gives it (the
    middle value, or the mean of the two middle ones), for finite values.

    numpy.median imports numpy.ma on its first call (for a NaN check) and a
    small job pays for that; this takes the same partition and the same
    arithmetic without it.

    >>> median([3.0, 1.0, 2.0]), median([4.0, 1.0, 2.0, 3.0])
    (2.0, 2.5)
    """
    a = np.asarray(a, dtype=np.float64).ravel()
    k = len(a) // 2
    if len(a) % 2:
        return float(np.partition(a, k)[k])
    part = np.partition(a, [k - 1, k])
    return float((part[k - 1] + part[k]) / 2.0)


def _robust_scale(e):
    """Standard deviation of the bulk of ``e``: values farther than
    ``CLIP`` robust scales (MAD × 1.4826) from the median (corners, sharp
    features) are left out, the rest give a plain root mean square."""
    if len(e) < 8:
        return 0.0
    mid = median(e)
    dev = np.abs(e - mid)
    mad = float(MAD_SCALE * median(dev))
    if mad == 0.0:
        return 0.0
    kept = e[dev <= CLIP * mad]
    return float(np.sqrt(np.mean((kept - kept.mean()) ** 2)))


def _reference_curvature(p, closed, length):
    if closed:
        return 2.0 * math.pi / length
    # open: total turning of a coarse polyline (about 64 points) over its length
    step = max(1, len(p) // 64)
    q = p[::step]
    if len(q) < 3:
        return 0.0
    d = np.diff(q, axis=0)
    turn = np.arctan2(d[:-1, 0] * d[1:, 1] - d[:-1, 1] * d[1:, 0], (d[:-1] * d[1:]).sum(axis=1))
    return float(np.abs(turn).sum()) / length


def estimate_noise(points, closed: bool, *, quantization=None) -> NoiseEstimate:
    """Estimate the noise of ordered outline points (mm).

    Parameters
    ----------
    points : (n, 2) float64, mm
        Cleaned points (closed outlines without the repeated first point).
    closed : bool
    quantization : float or None
        The coordinates' rounding step in mm (from the file), if known;
        None reads it from the values.

    Returns
    -------
    NoiseEstimate

    Examples
    --------
    >>> th = np.linspace(0, 2 * np.pi, 4000, endpoint=False)
    >>> p = np.c_[50 * np.cos(th), 50 * np.sin(th)]
    >>> rng = np.random.default_rng(1)
    >>> e = estimate_noise(p + rng.normal(0, 0.01, p.shape), True)
    >>> e.resolved, e.smooth, round(e.sigma, 3)
    (True, True, 0.01)
    >>> estimate_noise(p, True).smooth
    False
    """
    p = np.asarray(points, dtype=np.float64)
    n = len(p)
    if quantization is None:
        quantization = quantization_step(p)
    chords = _chords(p, closed) if n else (None, None, np.zeros(0), np.zeros(1))
    seg = chords[2]
    h = median(seg) if len(seg) else 0.0
    hmin = float(seg.min()) if len(seg) else 0.0
    length = float(seg.sum())
    s1 = _robust_scale(_pseudo_residuals(p, closed, 1, chords)) if n >= 8 else 0.0
    s2 = _robust_scale(_pseudo_residuals(p, closed, 2, chords)) if n >= 12 else 0.0
    span = chord_span(s1, h, n)
    if span > 1 and n >= 8 + 4 * span:
        # the noise shows in the chords themselves: a parameter and normals
        # from chords about 100 σ long (each reaching past the run)
        s1 = _robust_scale(_pseudo_residuals_span(p, closed, 1, span))
        s2 = _robust_scale(_pseudo_residuals_span(p, closed, 2, span))
    resolved = s1 > 0 and s2 < 2.0 * s1
    if resolved:
        sigma = math.sqrt(max(64.0 * s1 * s1 - s2 * s2, 0.0) / 63.0)
    else:
        sigma = s1
    q = quantization or 0.0
    used = max(sigma, q / math.sqrt(12.0)) if resolved else 0.0
    fake = 4.0 * used / (h * h) if h > 0 else 0.0
    ref = _reference_curvature(p, closed, length) if length > 0 else 0.0
    floor = FLOAT_ULPS * float(np.spacing(np.abs(p).max())) if n else 0.0
    smooth = bool(resolved and used > floor and fake > FAKE_RATIO * ref)
    return NoiseEstimate(points=n, spacing_median=h, spacing_min=hmin, quantization=quantization,
                         sigma=sigma, resolved=bool(resolved), sigma_used=used,
                         fake_curvature=fake, reference_curvature=ref, smooth=smooth)
