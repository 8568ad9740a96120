"""Parametric cubic splines through ordered 2-D points.

:func:`fit` interpolates points P_0 .. P_{n-1} with a piecewise cubic
P(t) = (x(t), y(t)) and returns an immutable :class:`Contour`.

Parameters (``param``)
    chord (default): t_{i+1} - t_i = |P_{i+1} - P_i|; fourth-order accurate
    on smooth outlines.  centripetal: |P_{i+1} - P_i|^(1/2).  uniform: 1.

End conditions (``end``, open outlines; closed ones are periodic)
    not-a-knot (default): the third derivative is continuous at the second
    and second-to-last points.  natural: P'' = 0 at both ends.  clamped:
    P' at both ends given by ``tangents`` (derivatives with respect to t).

Notes
-----
Moment form (Stoer & Bulirsch, Introduction to Numerical Analysis, §2.4):
with h_j = t_{j+1} - t_j, M_j = P''(t_j), λ_j = h_j/(h_{j-1}+h_j),
μ_j = 1 - λ_j, the interior rows are

    μ_j M_{j-1} + 2 M_j + λ_j M_{j+1} = 6 P[t_{j-1}, t_j, t_{j+1}].

Both coordinates share the matrix and are solved as two right-hand sides
with LAPACK's tridiagonal solver (``dgtsv``).  Not-a-knot's end rows
(h_1 M_0 - (h_0+h_1) M_1 + h_0 M_2 = 0) are eliminated so the system stays
tridiagonal; the periodic system is cyclic tridiagonal and is solved by
Sherman-Morrison (Numerical Recipes §2.7), i.e. one tridiagonal solve with
three right-hand sides.  Time and memory are O(n).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ._options import CLOSE_RTOL, check_flag, check_option
from .geometry import curvature
from .errors import InputError

__all__ = ["fit", "Contour", "ENDS", "PARAMS", "as_points", "parameters", "power_form", "tridiag_solve"]

ENDS = ("not-a-knot", "natural", "clamped")
PARAMS = ("chord", "centripetal", "uniform")

#: Largest coordinate magnitude accepted (mm): 1000 km.  Far beyond any
#: machine; squares of such numbers still stay far from float64's range.
MAX_COORDINATE = 1e9

# Evaluation works in chunks that stay in the processor's cache.
_PIECE_CHUNK = 2048
_POINT_CHUNK = 16384

# Gauss-Legendre nodes and weights on [0, 1]: 10 for arc length, 3 for the
# area (exact for its degree-5 integrand).
_GL_X, _GL_W = np.polynomial.legendre.leggauss(10)
_GL_X = (_GL_X + 1.0) / 2.0
_GL_W = _GL_W / 2.0
_GL3_X, _GL3_W = np.polynomial.legendre.leggauss(3)
_GL3_X = (_GL3_X + 1.0) / 2.0
_GL3_W = _GL3_W / 2.0


def points_array(points, name: str = "points") -> np.ndarray:
    """A fresh C-contiguous float64 copy of ``points``, refused (InputError
    naming ``name``) unless it is an (n, 2) array of numbers."""
    try:
        p = np.array(points, dtype=np.float64, order="C", copy=True)
    except (TypeError, ValueError) as exc:
        raise InputError(f"{name} must be an (n, 2) array of numbers: {exc}") from None
    if p.ndim != 2 or p.shape[1] != 2:
        raise InputError(f"{name} must have shape (n, 2), got {p.shape}")
    return p


def as_points(points, name: str = "points") -> np.ndarray:
    """Validate ``points`` into a C-contiguous (n, 2) float64 array.

    Raises InputError for a wrong shape, fewer than 2 points or a
    non-finite coordinate (naming the first bad point).
    """
    if np.iscomplexobj(points):
        raise InputError(f"{name} must be real numbers, got complex values; pass the x and y columns")
    p = points_array(points, name)
    if len(p) < 2:
        raise InputError(f"{name} needs at least 2 points, got {len(p)}")
    if not np.isfinite(p).all():
        i = int(np.argmax(~np.isfinite(p).all(axis=1)))
        raise InputError(f"{name} row {i} is not finite: {p[i].tolist()}")
    big = np.abs(p).max(axis=1) > MAX_COORDINATE
    if big.any():
        i = int(np.argmax(big))
        raise InputError(f"{name} row {i} is out of range: {p[i].tolist()} "
                         f"(coordinates up to {MAX_COORDINATE:g} in magnitude)")
    return p


def _columns(p: np.ndarray):
    """x and y of (n, 2) points as two contiguous 1-D arrays."""
    return np.ascontiguousarray(p[:, 0]), np.ascontiguousarray(p[:, 1])


def _size(x: np.ndarray, y: np.ndarray) -> float:
    """The outline's size: its bounding-box diagonal."""
    return float(np.hypot(x.max() - x.min(), y.max() - y.min()))


def _steps(x, y, closed):
    """Coordinate differences between consecutive points (closed: wrapping)."""
    if closed:
        x = np.concatenate([x, x[:1]])
        y = np.concatenate([y, y[:1]])
    return x, y, np.diff(x), np.diff(y)


def _breaks(dx, dy, param, size):
    """Breaks from the steps; raise naming the first coincident pair."""
    dist = np.sqrt(dx * dx + dy * dy)
    tol = CLOSE_RTOL * max(size, np.finfo(float).tiny)
    if (dist <= tol).any():
        i = int(np.argmax(dist <= tol))
        return None, (i, i + 1)
    if param == "chord":
        h = dist
    elif param == "centripetal":
        h = np.sqrt(dist)
    else:
        h = np.ones_like(dist)
    t = np.empty(len(h) + 1)
    t[0] = 0.0
    np.cumsum(h, out=t[1:])
    return t, None


def parameters(p: np.ndarray, param: str, closed: bool) -> np.ndarray:
    """Breaks t_0 = 0 < t_1 < ... for points ``p`` (closed: n+1 values)."""
    check_option("param", param, PARAMS)
    x, y = _columns(p)
    _, _, dx, dy = _steps(x, y, closed)
    t, clash = _breaks(dx, dy, param, _size(x, y))
    if clash is not None:
        _coincide(p, *clash)
    return t


def _coincide(p, i, j):
    j = j % len(p)
    raise InputError(f"points rows {i} and {j} coincide ({p[i].tolist()}): remove repeated points")


#: Systems up to this size are solved by dgtsv's own steps in Python
#: (:func:`gtsv_steps`, about 1 ms at 200 rows): a small job does not pay
#: the half second it takes to import scipy.linalg, nor a dense LU whose
#: BLAS threads wait for the cores on a busy machine (a 200-row solve with
#: numpy.linalg.solve took 0.18 s at load 7 on 2 cores, the steps 0.004 s).
DENSE_MAX = 400


def tridiag_solve(dl, d, du, b, *, stepwise: bool = False):
    """Solve the tridiagonal system (dl, d, du) x = b for b of shape (n, k).

    The one tridiagonal solver of the package: LAPACK's dgtsv (Gaussian
    elimination with partial pivoting, O(n)) for large systems, dgtsv's own
    steps in Python up to :data:`DENSE_MAX` rows (:func:`gtsv_steps`: the
    same numbers as LAPACK, bit for bit).  ``stepwise`` is kept for callers
    that asked for the steps by name; every small system takes them now.

    >>> x = tridiag_solve(np.ones(2), np.full(3, 4.0), np.ones(2), np.array([[5.0], [6.0], [5.0]]))
    >>> bool(np.allclose(x, 1.0))
    True
    """
    if len(d) == 1:
        return b / d[0]
    if len(d) <= DENSE_MAX:
        return gtsv_steps(dl, d, du, b)
    from scipy.linalg.lapack import dgtsv

    _, _, _, x, info = dgtsv(dl, d, du, b, True, True, True, True)
    if info != 0:  # pragma: no cover - diagonally dominant systems do not fail
        raise InputError(f"spline system is singular (LAPACK dgtsv info={info})")
    return x


def gtsv_steps(dl, d, du, b) -> np.ndarray:
    """LAPACK's dgtsv, step for step, in Python floats: Gaussian elimination
    of a tridiagonal system with partial pivoting between neighbouring rows,
    then back substitution (Anderson et al., LAPACK Users' Guide, 3rd ed.,
    SIAM 1999, routine DGTSV).  The same operations in the same order give
    the same numbers, bit for bit, without importing scipy.linalg; meant for
    small systems (about 1 ms at 400 rows).

    >>> x = gtsv_steps(np.ones(2), np.full(3, 4.0), np.ones(2), np.array([[5.0], [6.0], [5.0]]))
    >>> x.ravel().tolist()
    [1.0, 1.0, 1.0]
    """
    dl, d, du = [float(v) for v in dl], [float(v) for v in d], [float(v) for v in du]
    b = np.asarray(b, dtype=np.float64)
    n = len(d)
    cols = [b[:, j].tolist() for j in range(b.shape[1])]
    for i in range(n - 1):
        if abs(d[i]) >= abs(dl[i]):  # no row interchange
            if d[i] == 0.0:
                raise InputError("spline system is singular")
            fact = dl[i] / d[i]
            d[i + 1] = d[i + 1] - fact * du[i]
            for c in cols:
                c[i + 1] = c[i + 1] - fact * c[i]
            dl[i] = 0.0
        else:  # interchange rows i and i + 1
            fact = d[i] / dl[i]
            d[i] = dl[i]
            temp = d[i + 1]
            d[i + 1] = du[i] - fact * temp
            if i < n - 2:
                dl[i] = du[i + 1]
                du[i + 1] = -fact * dl[i]
            du[i] = temp
            for c in cols:
                temp = c[i]
                c[i] = c[i + 1]
                c[i + 1] = temp - fact * c[i + 1]
    if d[n - 1] == 0.0:
        raise InputError("spline system is singular")
    for c in cols:
        c[n - 1] = c[n - 1] / d[n - 1]
        if n > 1:
            c[n - 2] = (c[n - 2] - du[n - 2] * c[n - 1]) / d[n - 2]
        for i in range(n - 3, -1, -1):
            c[i] = (c[i] - du[i] * c[i + 1] - dl[i] * c[i + 2]) / d[i]
    return np.array(cols, dtype=np.float64).T.reshape(b.shape)


def _moments(h: np.ndarray, slopes, end: str, closed: bool, tangents) -> np.ndarray:
    """Second derivatives M_j at the breaks, shape (2, len(h) + 1).

    ``slopes`` are the two coordinates' divided differences (Δy/h per piece).
    """
    n = len(h)  # intervals
    M = np.zeros((2, n + 1))
    if closed:
        hm = np.concatenate([h[-1:], h[:-1]])  # h_{j-1}, wrapped
        hs = hm + h
        lam = h / hs
        mu = 1.0 - lam
        # cyclic: row j has mu_j at j-1, 2 at j, lam_j at j+1 (indices mod n);
        # Sherman-Morrison with u = (γ, 0, …, α), v = (1, 0, …, β/γ)
        beta = mu[0]  # A[0, n-1]
        alpha = lam[-1]  # A[n-1, 0]
        gamma = -2.0
        d = np.full(n, 2.0)
        d[0] -= gamma
        d[-1] -= alpha * beta / gamma
        b = np.zeros((n, 3), order="F")
        for k, sl in enumerate(slopes):
            np.subtract(sl[1:], sl[:-1], out=b[1:, k])
            b[0, k] = sl[0] - sl[-1]
            b[:, k] *= 6.0 / hs
        b[0, 2] = gamma
        b[-1, 2] = alpha
        x = tridiag_solve(mu[1:].copy(), d, lam[:-1].copy(), b)
        z = x[:, 2]
        factor = beta / gamma
        vz = z[0] + factor * z[-1]
        for k in range(2):
            vy = x[0, k] + factor * x[-1, k]
            M[k, :n] = x[:, k] - (vy / (1.0 + vz)) * z
        M[:, n] = M[:, 0]
        return M
    if n == 1:
        if end == "clamped":
            r = np.array([[(sl[0] - tg) * 6.0 / h[0], (tg2 - sl[0]) * 6.0 / h[0]]
                          for sl, tg, tg2 in zip(slopes, tangents[0], tangents[1])])
            M[:] = np.linalg.solve(np.array([[2.0, 1.0], [1.0, 2.0]]), r.T).T
        return M  # natural and not-a-knot: the straight line
    hl, hr = h[:-1], h[1:]
    lam = hr / (hl + hr)
    mu = 1.0 - lam
    six_over = 6.0 / (hl + hr)
    if end == "clamped":
        b = np.empty((n + 1, 2), order="F")
        for k, sl in enumerate(slopes):
            np.subtract(sl[1:], sl[:-1], out=b[1:n, k])
            b[1:n, k] *= six_over
            b[0, k] = 6.0 / h[0] * (sl[0] - tangents[0][k])
            b[n, k] = 6.0 / h[-1] * (tangents[1][k] - sl[-1])
        d = np.full(n + 1, 2.0)
        du = np.empty(n)
        dl = np.empty(n)
        du[0] = 1.0
        du[1:] = lam
        dl[-1] = 1.0
        dl[:-1] = mu
        M[:] = tridiag_solve(dl, d, du, b).T
        return M
    rhs = np.empty((n - 1, 2), order="F")
    for k, sl in enumerate(slopes):
        np.subtract(sl[1:], sl[:-1], out=rhs[:, k])
        rhs[:, k] *= six_over
    if end == "not-a-knot" and n == 2:
        M[:] = (rhs[0] / 3.0)[:, None]  # the parabola: constant second derivative
        return M
    d = np.full(n - 1, 2.0)
    du = lam[:-1].copy()
    dl = mu[1:].copy()
    if end == "natural":
        M[:, 1:n] = tridiag_solve(dl, d, du, rhs).T
        return M
    # not-a-knot: eliminate h1 M0 - (h0+h1) M1 + h0 M2 = 0 and its mirror
    r0 = h[0] / h[1]
    r1 = h[-1] / h[-2]
    d[0] = 2.0 + r0
    d[-1] = 2.0 + r1
    du[0] = 1.0 - r0
    dl[-1] = 1.0 - r1
    inner = tridiag_solve(dl, d, du, rhs)
    M[:, 1:n] = inner.T
    M[:, 0] = ((h[0] + h[1]) * inner[0] - h[0] * inner[1]) / h[1]
    M[:, n] = ((h[-2] + h[-1]) * inner[-1] - h[-1] * inner[-2]) / h[-2]
    return M


def _coefficients(h, ys, slopes, M) -> np.ndarray:
    """Power-form coefficients per coordinate, shape (2, 4, m), highest power first.

    The one home of moments → coefficients (see :func:`power_form`):
    c3 = (M_{i+1} - M_i)/(6h), c2 = M_i/2, c1 = Δy/h - h(2M_i + M_{i+1})/6,
    c0 = y_i.
    """
    m = len(h)
    c = np.empty((2, 4, m))
    for k in range(2):
        Mk = M[k]
        np.subtract(Mk[1:], Mk[:-1], out=c[k, 0])
        c[k, 0] /= 6.0 * h
        np.multiply(Mk[:-1], 0.5, out=c[k, 1])
        # b = Δy/h − h(2M_i + M_{i+1})/6
        np.multiply(Mk[:-1], 2.0, out=c[k, 2])
        c[k, 2] += Mk[1:]
        c[k, 2] *= h
        c[k, 2] /= -6.0
        c[k, 2] += slopes[k]
        c[k, 3] = ys[k][:m]
    return c


def power_form(t, y, M) -> np.ndarray:
    """Cubic pieces from values ``y`` and second derivatives ``M`` at breaks ``t``.

    ``y`` and ``M`` are (m+1, 2).  Returns coefficients (4, m, 2), highest
    power first, in the local variable t - t_i (the layout of
    ``scipy.interpolate.PPoly`` and of :class:`Contour`):
    c3 = (M_{i+1} - M_i)/(6h), c2 = M_i/2,
    c1 = (y_{i+1} - y_i)/h - h(2M_i + M_{i+1})/6, c0 = y_i.

    >>> t = np.array([0.0, 1.0, 2.0])          # the parabola y = x², x = t
    >>> y = np.c_[t, t ** 2]
    >>> power_form(t, y, np.c_[np.zeros(3), np.full(3, 2.0)])[:, 1].tolist()
    [[0.0, 0.0], [0.0, 1.0], [1.0, 2.0], [1.0, 1.0]]
    """
    h = np.diff(t)
    y = np.asarray(y, np.float64)
    ys = (y[:, 0], y[:, 1])
    slopes = tuple((v[1:] - v[:-1]) / h for v in ys)
    return _coefficients(h, ys, slopes, np.asarray(M, np.float64).T).transpose(1, 2, 0)


def fit(points, *, closed=None, end: str = "not-a-knot", param: str = "chord", tangents=None):
    """Fit a parametric cubic spline through ordered 2-D points.

    Parameters
    ----------
    points : array-like, shape (n, 2)
        Ordered points along the outline, in mm (or any one length unit).
    closed : bool or None
        None: closed when the last point repeats the first (within 1e-9 of
        the outline's size); the repeated point is dropped.  True: close the
        outline (a repeated last point is dropped too).  False: open.
    end : {"not-a-knot", "natural", "clamped"}
        End condition of an open outline.  Closed outlines are periodic
        (C2 across the seam).
    param : {"chord", "centripetal", "uniform"}
        How the parameter t advances from point to point.
    tangents : pair of 2-vectors, required for ``end="clamped"``
        dP/dt at the first and the last point (with chord parameters a unit
        vector is the natural choice); must not be zero.

    Returns
    -------
    Contour

    Examples
    --------
    >>> c = fit([[0, 0], [1, 1], [2, 0]])          # not-a-knot: a parabola
    >>> c.closed, len(c.breaks)
    (False, 3)
    >>> square = fit([[1, 0], [0, 1], [-1, 0], [0, -1]], closed=True)
    >>> bool(abs(square.length - 2 * 3.14159) < 0.2)
    True
    """
    p = as_points(points)
    check_option("end", end, ENDS)
    check_option("param", param, PARAMS)
    closed = check_flag("closed", closed)
    x, y = _columns(p)
    size = _size(x, y)
    repeats = bool(np.hypot(x[-1] - x[0], y[-1] - y[0]) <= CLOSE_RTOL * max(size, np.finfo(float).tiny))
    if closed is None:
        closed = repeats and len(p) > 2
    closed = bool(closed)
    if closed and repeats:
        p, x, y = p[:-1], x[:-1], y[:-1]
    if closed and len(p) < 3:
        raise InputError(f"a closed outline needs at least 3 distinct points, got {len(p)}")
    tan = None
    if end == "clamped" and not closed:
        if tangents is None:
            raise InputError('end="clamped" needs tangents=(start_vector, end_vector)')
        try:
            tan = np.array(tangents, dtype=np.float64)
        except (TypeError, ValueError):
            raise InputError("tangents must be two 2-vectors") from None
        if tan.shape != (2, 2) or not np.isfinite(tan).all():
            raise InputError(f"tangents must be two finite 2-vectors, got shape {tan.shape}")
        if (np.hypot(tan[:, 0], tan[:, 1]) == 0).any():
            raise InputError("tangents must not be zero vectors (a clamped end needs a direction)")
    xs, ys_, dx, dy = _steps(x, y, closed)
    t, clash = _breaks(dx, dy, param, size)
    if clash is not None:
        _coincide(p, *clash)
    h = np.diff(t)
    slopes = (dx / h, dy / h)
    M = _moments(h, slopes, end, closed, tan)
    c = _coefficients(h, (xs, ys_), slopes, M)
    return Contour(t, c.transpose(1, 2, 0), closed, _readonly(p), end="periodic" if closed else end, param=param)


def _parameter_array(t) -> np.ndarray:
    """Curve parameters as a float64 array; refuse text, None and NaN."""
    if t is None or isinstance(t, (str, bytes)) or np.iscomplexobj(t):
        raise InputError(f"t must be a number or an array of numbers (the curve parameter), got {t!r}")
    try:
        a = np.asarray(t, dtype=np.float64)
    except (TypeError, ValueError):
        raise InputError(f"t must be a number or an array of numbers (the curve parameter), got {t!r}") from None
    if not np.isfinite(a).all():
        raise InputError("t must be finite: the curve parameter has NaN or infinite values")
    return a


def _readonly(a) -> np.ndarray:
    a = np.asarray(a)
    a.setflags(write=False)
    return a


@dataclass(frozen=True, eq=False, repr=False)
class Contour:
    """A piecewise cubic curve P(t), t in [breaks[0], breaks[-1]].

    Attributes
    ----------
    breaks : (m+1,) increasing parameter values; for a fit, one per point
        and, when closed, one more at the end of the seam.
    coefficients : (4, m, 2); on piece i, P(t) = sum_k c[k, i] (t - breaks[i])**(3-k)
        (the layout of ``scipy.interpolate.PPoly``).
    closed : whether the curve returns to its start (evaluation wraps).
    points : (n, 2) the points it was fitted through (mm).
    corners : indices into ``breaks`` where the curve is only position
        continuous (sharp corners between separately fitted pieces).
    end, param : how it was fitted.
    info : facts about the fit for the report (e.g. smoothing residuals:
        "smooth", "max_residual", "rms_residual", in mm).
    """

    breaks: np.ndarray
    coefficients: np.ndarray
    closed: bool
    points: np.ndarray
    corners: tuple = ()
    end: str = "not-a-knot"
    param: str = "chord"
    info: dict = field(default_factory=dict)

    def __post_init__(self):
        breaks = np.ascontiguousarray(self.breaks, dtype=np.float64)
        coef = np.asarray(self.coefficients, dtype=np.float64)
        if breaks.ndim != 1 or coef.shape != (4, len(breaks) - 1, 2):
            raise InputError(
                f"a contour needs breaks (m+1,) and coefficients (4, m, 2), got {breaks.shape} and {coef.shape}"
            )
        # stored per coordinate, (2, 4, m) contiguous: evaluation gathers
        # contiguous rows; ``coefficients`` is a (4, m, 2) view of the same memory
        per_coord = _readonly(np.ascontiguousarray(coef.transpose(2, 0, 1)))
        set_ = object.__setattr__
        set_(self, "breaks", _readonly(breaks))
        set_(self, "coefficients", per_coord.transpose(1, 2, 0))
        pts = np.asarray(self.points, dtype=np.float64)
        set_(self, "points", pts if not pts.flags.writeable else _readonly(pts.copy()))
        set_(self, "corners", tuple(int(i) for i in self.corners))
        self.__dict__["_c"] = per_coord

    def __repr__(self):
        kind = "closed" if self.closed else "open"
        return (
            f"Contour({kind}, {len(self.points)} points, {self.pieces} pieces, "
            f"length={self.length:.6g})"
        )

    # -- evaluation ---------------------------------------------------------
    @property
    def pieces(self) -> int:
        """Number of cubic pieces."""
        return len(self.breaks) - 1

    @property
    def domain(self) -> tuple[float, float]:
        return float(self.breaks[0]), float(self.breaks[-1])

    def _wrap(self, t: np.ndarray) -> np.ndarray:
        """Closed contours: map t into [t0, t1] (only when some t lies outside)."""
        if self.closed and t.size:
            t0, t1 = self.breaks[0], self.breaks[-1]
            if t.min() < t0 or t.max() > t1:
                return t0 + np.mod(t - t0, t1 - t0)
        return t

    def _locate(self, t: np.ndarray):
        """Piece index and local offset of (wrapped) parameters t."""
        t = self._wrap(t)
        b = self.breaks
        idx = np.clip(np.searchsorted(b, t, side="right") - 1, 0, len(b) - 2)
        return idx, t - b[idx]

    def _poly(self, nu: int):
        """Per-coordinate Horner coefficients of the nu-th derivative, (2, 4-nu, m)."""
        key = f"_poly{nu}"
        cached = self.__dict__.get(key)
        if cached is None:
            c = self.__dict__["_c"]
            scale = {0: (1.0, 1.0, 1.0, 1.0), 1: (3.0, 2.0, 1.0), 2: (6.0, 2.0), 3: (6.0,)}[nu]
            cached = c[:, : 4 - nu] * np.array(scale)[None, :, None] if nu else c
            self.__dict__[key] = cached
        return cached

    def __call__(self, t, nu: int = 0) -> np.ndarray:
        """P(t) or its nu-th derivative (nu = 0..3); returns t.shape + (2,).

        A closed contour wraps around the seam; an open one extrapolates its
        end pieces outside the domain.  At a break the piece to the right
        is used (the third derivative jumps there).
        """
        if isinstance(nu, bool) or nu not in (0, 1, 2, 3):
            raise InputError(f"nu must be 0, 1, 2 or 3, got {nu!r}")
        t = _parameter_array(t)
        flat = self._wrap(t.ravel())
        out = np.empty((flat.size, 2))
        poly = self._poly(nu)
        # sorted runs (a closed outline's window past the seam wraps into
        # two): each run's pieces are consecutive, so their coefficients are
        # expanded with np.repeat instead of a search and gather per point
        cuts = [0, flat.size]
        if flat.size > 1:
            down = np.flatnonzero(flat[1:] < flat[:-1])
            cuts = [0, *(down + 1).tolist(), flat.size] if len(down) <= 3 else None
        if cuts is None:
            self._eval_searched(flat, poly, out)
        else:
            for r0, r1 in zip(cuts[:-1], cuts[1:]):
                self._eval_sorted(flat[r0:r1], poly, out[r0:r1])
        return out.reshape(t.shape + (2,))

    def _eval_sorted(self, flat, poly, out):
        """Evaluate increasing parameters ``flat`` into ``out``: when they
        are many against the pieces they span, piece by piece (each piece's
        points are one run: its coefficients expanded with np.repeat, no
        search per point); else as :meth:`_eval_searched`."""
        b = self.breaks
        m = len(b) - 1
        if flat.size == 0:
            return
        p0 = int(np.clip(np.searchsorted(b, flat[0], side="right") - 1, 0, m - 1))
        p1 = int(np.clip(np.searchsorted(b, flat[-1], side="right") - 1, 0, m - 1))
        if flat.size < 4 * (p1 - p0 + 1):
            self._eval_searched(flat, poly, out)
            return
        # points of piece p: from the first >= b[p] (p > p0) to the first >= b[p+1]
        first = np.searchsorted(flat, b[p0 + 1:p1 + 1], side="left")
        bounds = np.concatenate([[0], first, [flat.size]])
        counts = np.diff(bounds)
        for a in range(p0, p1 + 1, _PIECE_CHUNK):
            e = min(a + _PIECE_CHUNK, p1 + 1)
            s0, s1 = bounds[a - p0], bounds[e - p0]
            if s0 == s1:
                continue
            cc = counts[a - p0:e - p0]
            x = flat[s0:s1] - np.repeat(b[a:e], cc)
            for k in range(2):
                r = np.repeat(poly[k, 0, a:e], cc)
                for row in poly[k, 1:]:
                    r *= x
                    r += np.repeat(row[a:e], cc)
                out[s0:s1, k] = r

    def _eval_searched(self, flat, poly, out):
        """Evaluate parameters in any order: a search and a gather per point."""
        b = self.breaks
        m = len(b) - 1
        for s0 in range(0, flat.size, _POINT_CHUNK):
            tc = flat[s0 : s0 + _POINT_CHUNK]
            idx = np.clip(np.searchsorted(b, tc, side="right") - 1, 0, m - 1)
            x = tc - b.take(idx)
            for k in range(2):
                r = poly[k, 0].take(idx)
                for row in poly[k, 1:]:
                    r *= x
                    r += row.take(idx)
                out[s0 : s0 + len(tc), k] = r

    def on_pieces(self, t, first: int, nu: int = 0) -> np.ndarray:
        """P(t) or its nu-th derivative where row i of ``t`` lies on piece ``first + i``.

        ``t`` has shape (count, k): row i holds parameters of piece
        first + i (its start to its end; a closed contour counts pieces on
        past the seam, piece p being piece p mod ``pieces`` one period on,
        and so may ``first`` be negative).  Every piece's coefficients are
        broadcast over its row: no search, no gather per point, a few
        operations per value.  Returns (count, k, 2).

        >>> import numpy as np
        >>> c = fit(np.array([[0.0, 0.0], [1.0, 1.0], [2.0, 0.0], [3.0, 1.0]]))
        >>> t = c.breaks[:-1, None] + np.diff(c.breaks)[:, None] * np.array([0.0, 0.5])
        >>> bool(np.allclose(c.on_pieces(t, 0), c(t)))
        True
        """
        if isinstance(nu, bool) or nu not in (0, 1, 2, 3):
            raise InputError(f"nu must be 0, 1, 2 or 3, got {nu!r}")
        t = np.asarray(t, dtype=np.float64)
        if t.ndim != 2:
            raise InputError(f"t must have shape (pieces, k), got {t.shape}")
        count = t.shape[0]
        b = self.breaks
        m = len(b) - 1
        first = int(first)
        if not self.closed and (first < 0 or first + count > m):
            raise InputError(f"pieces {first}..{first + count - 1} are not all on the contour (0..{m - 1})")
        poly = self._poly(nu)
        period = b[-1] - b[0]
        out = np.empty(t.shape + (2,))
        at = 0
        while at < count:  # runs of pieces within one period: slices of the coefficients
            p = first + at
            turn, p0 = divmod(p, m)
            n = min(count - at, m - p0)
            for a in range(0, n, 65536):
                e = min(a + 65536, n)
                rows = slice(at + a, at + e)
                start = b[p0 + a:p0 + e] + turn * period if turn else b[p0 + a:p0 + e]
                x = t[rows] - start[:, None]
                for k in range(2):
                    r = poly[k, 0, p0 + a:p0 + e, None] * x
                    rest = poly[k, 1:, p0 + a:p0 + e]
                    for j, row in enumerate(rest):
                        r += row[:, None]
                        if j < len(rest) - 1:
                            r *= x
                    if len(rest) == 0:
                        r = np.broadcast_to(poly[k, 0, p0 + a:p0 + e, None], x.shape)
                    out[rows, :, k] = r
            at += n
        return out

    def curvature(self, t) -> np.ndarray:
        """Signed curvature κ(t) = (x'y'' - y'x'')/(x'^2 + y'^2)^(3/2), 1/mm.

        Positive on a left (counter-clockwise) turn.
        """
        return curvature(self(t, 1), self(t, 2))

    def tangent(self, t) -> np.ndarray:
        """Unit tangent at t, shape t.shape + (2,)."""
        d1 = self(t, 1)
        return d1 / np.linalg.norm(d1, axis=-1, keepdims=True)

    def normal(self, t) -> np.ndarray:
        """Unit left normal at t (the tangent turned +90°)."""
        tg = self.tangent(t)
        return np.stack([-tg[..., 1], tg[..., 0]], axis=-1)

    # -- arc length ---------------------------------------------------------
    def _speed(self, t) -> np.ndarray:
        d1 = self(t, 1)
        return np.hypot(d1[..., 0], d1[..., 1])

    def _gl_fixed(self, idx: np.ndarray, x1: np.ndarray, sub: int) -> np.ndarray:
        """∫ |P'| over piece ``idx`` from its start to local offset ``x1``,
        by 10-node Gauss-Legendre on ``sub`` equal sub-steps (no piece search)."""
        c = self.coefficients
        a3 = 3.0 * c[0][idx][..., None, :]
        a2 = 2.0 * c[1][idx][..., None, :]
        a1 = c[2][idx][..., None, :]  # (…, 1, 2): broadcast over the nodes
        w = np.asarray(x1, float) / sub
        total = np.zeros_like(w)
        for k in range(sub):
            x = ((k + _GL_X) * w[..., None])[..., None]
            d = (a3 * x + a2) * x + a1
            total += (np.hypot(d[..., 0], d[..., 1]) * _GL_W).sum(axis=-1) * w
        return total

    def _gl_local(self, idx: np.ndarray, x1: np.ndarray) -> np.ndarray:
        """As ``_gl_fixed`` with each piece's own number of sub-steps."""
        self._cum  # noqa: B018 - sets the per-piece sub-step counts
        subs = self.__dict__["_subs"][idx]
        x1 = np.broadcast_to(np.asarray(x1, float), np.shape(idx))
        out = np.empty(np.shape(idx))
        for level in np.unique(subs):
            sel = subs == level
            out[sel] = self._gl_fixed(idx[sel], x1[sel], int(level))
        return out

    @property
    def _cum(self) -> np.ndarray:
        """Cumulative arc length at the breaks (computed once, on demand).

        Each piece doubles its Gauss-Legendre sub-steps until two successive
        estimates agree to 1e-11 of the piece plus 1e-10 of the mean piece
        (at most 256 sub-steps), so the total is good to 1e-10
        relative even where noisy points give pieces a near-cusp.
        """
        cum = self.__dict__.get("_cum_cache")
        if cum is None:
            h = np.diff(self.breaks)
            subs = np.ones(len(h), dtype=np.int64)
            lengths = self._gl_fixed(np.arange(len(h)), h, 1)
            todo = np.arange(len(h))
            level = 1
            floor = 1e-10 * lengths.mean() + 1e-300
            while todo.size and level < 256:
                finer = self._gl_fixed(todo, h[todo], level * 2)
                ok = np.abs(finer - lengths[todo]) <= 1e-11 * finer + floor
                lengths[todo] = finer
                subs[todo] = level * 2
                todo = todo[~ok]
                level *= 2
            cum = np.empty(len(self.breaks))
            cum[0] = 0.0
            np.cumsum(lengths, out=cum[1:])
            self.__dict__["_subs"] = subs
            self.__dict__["_cum_cache"] = _readonly(cum)
        return cum

    @property
    def length(self) -> float:
        """Total arc length (mm)."""
        return float(self._cum[-1])

    def arc_length(self, t) -> np.ndarray:
        """Arc length from breaks[0] to t (closed: t wrapped into one turn)."""
        t = _parameter_array(t)
        cum = self._cum
        idx, x = self._locate(t)
        return cum[idx] + self._gl_local(idx, x)

    def param_at(self, s) -> np.ndarray:
        """Parameter t at arc length s from the start (Newton, vectorized).

        Closed contours wrap s modulo the length; open ones clip s to
        [0, length].
        """
        s = _parameter_array(s)
        shape = s.shape
        cum, b = self._cum, self.breaks
        L = float(cum[-1])
        s = np.mod(s, L) if self.closed else np.clip(s, 0.0, L)
        idx = np.clip(np.searchsorted(cum, s, side="right") - 1, 0, len(b) - 2)
        h = b[idx + 1] - b[idx]
        frac = (s - cum[idx]) / np.maximum(cum[idx + 1] - cum[idx], 1e-300)
        x = frac * h
        c = self.coefficients
        idx, x, h, s = idx.ravel(), x.ravel(), h.ravel(), s.ravel()
        lo, hi = np.zeros_like(x), h.copy()
        active = np.arange(x.size)
        # safeguarded Newton: keep a bracket, bisect when a step leaves it
        for _ in range(60):
            ia, xa = idx[active], x[active]
            err = cum[ia] + self._gl_local(ia, xa) - s[active]
            lo[active] = np.where(err <= 0, xa, lo[active])
            hi[active] = np.where(err >= 0, xa, hi[active])
            xe = xa[:, None]
            d = (3.0 * c[0][ia] * xe + 2.0 * c[1][ia]) * xe + c[2][ia]
            speed = np.hypot(d[:, 0], d[:, 1])
            with np.errstate(divide="ignore", invalid="ignore"):
                step = xa - err / speed
            la, ha = lo[active], hi[active]
            inside = np.isfinite(step) & (step > la) & (step < ha)
            x[active] = np.where(inside, step, 0.5 * (la + ha))
            keep = (np.abs(err) > 1e-12 * max(L, 1e-300)) & (ha - la > 1e-15 * (np.abs(ha) + 1.0))
            active = active[keep]
            if not active.size:
                break
        return (b[idx] + x).reshape(shape)

    # -- shape facts ----------------------------------------------------------
    @property
    def area(self) -> float:
        """Signed area enclosed by a closed contour (mm²), + counter-clockwise.

        Green's theorem, A = ½∮(x dy − y dx); the integrand is a degree-5
        polynomial on each piece, so 3-point Gauss-Legendre is exact.  For
        an open contour the chord from the end back to the start closes it.
        """
        cached = self.__dict__.get("_area")
        if cached is not None:
            return cached
        h = np.diff(self.breaks)
        c = self.__dict__["_c"]
        per_piece = np.empty(len(h))
        # in chunks of pieces: (m, 3) temporaries at 10^6 pieces cost more to
        # allocate than to compute; each piece's value is the same
        for s0 in range(0, len(h), 16384):
            s1 = min(s0 + 16384, len(h))
            x = h[s0:s1, None] * _GL3_X  # (k, 3) local offsets: no search, no gather
            pd = []
            for k in range(2):
                a, b, cc, d = (c[k, i, s0:s1][:, None] for i in range(4))
                pd.append((((a * x + b) * x + cc) * x + d, (3.0 * a * x + 2.0 * b) * x + cc))
            (px, dx), (py, dy) = pd
            integrand = px * dy - py * dx
            per_piece[s0:s1] = (integrand * _GL3_W).sum(axis=1) * h[s0:s1]
        total = float(per_piece.sum())
        if not self.closed:
            a, b = self(self.breaks[-1]), self(self.breaks[0])
            total += float(a[0] * b[1] - a[1] * b[0])
        self.__dict__["_area"] = 0.5 * total
        return 0.5 * total

    @property
    def bbox(self) -> tuple[float, float, float, float]:
        """(xmin, ymin, xmax, ymax) of the curve (exact: derivative roots)."""
        c = self.coefficients
        h = np.diff(self.breaks)
        cand = [self(self.breaks)]
        for k in range(2):
            a, bq, cq = 3.0 * c[0, :, k], 2.0 * c[1, :, k], c[2, :, k]
            disc = bq * bq - 4.0 * a * cq
            ok = disc >= 0
            sq = np.sqrt(np.where(ok, disc, 0.0))
            with np.errstate(divide="ignore", invalid="ignore"):
                quad = np.abs(a) > 1e-300
                r1 = np.where(quad, (-bq + sq) / (2 * a), -cq / np.where(bq == 0, np.inf, bq))
                r2 = np.where(quad, (-bq - sq) / (2 * a), -1.0)
            for r in (r1, r2):
                good = ok & np.isfinite(r) & (r > 0) & (r < h)
                if good.any():
                    cand.append(self(self.breaks[:-1][good] + r[good]))
        pts = np.vstack(cand)
        lo, hi = pts.min(axis=0), pts.max(axis=0)
        return float(lo[0]), float(lo[1]), float(hi[0]), float(hi[1])

    def sample(self, count: int) -> np.ndarray:
        """``count`` parameter values evenly spaced in arc length."""
        if self.closed:
            s = np.linspace(0.0, self.length, count, endpoint=False)
        else:
            s = np.linspace(0.0, self.length, count)
        return self.param_at(s)
