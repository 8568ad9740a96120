"""Invented test outlines with their exact curvature (for benchmarks/noise.py).

Each shape is a closed parametric curve x(u), y(u), u in [0, 2π), with
analytic first and second derivatives, so its curvature comes from the
formula κ = (x'y'' − y'x'')/(x'² + y'²)^{3/2}.
"""

import numpy as np


def ellipse(u, a=150.0, b=50.0):
    c, s = np.cos(u), np.sin(u)
    return (np.c_[a * c, b * s], np.c_[-a * s, b * c], np.c_[-a * c, -b * s])


def polar(u, r, dr, ddr):
    """A polar curve r(θ) with its derivatives, as (P, P', P'')."""
    c, s = np.cos(u), np.sin(u)
    x, y = r * c, r * s
    dx, dy = dr * c - r * s, dr * s + r * c
    ddx = ddr * c - 2 * dr * s - r * c
    ddy = ddr * s + 2 * dr * c - r * s
    return np.c_[x, y], np.c_[dx, dy], np.c_[ddx, ddy]


def cam(u):
    """r = 60 + 8 cos 5θ."""
    return polar(u, 60 + 8 * np.cos(5 * u), -40 * np.sin(5 * u), -200 * np.cos(5 * u))


def limacon(u):
    """r = 60 + 25 cos θ (convex: 60 > 2·25)."""
    return polar(u, 60 + 25 * np.cos(u), -25 * np.sin(u), -25 * np.cos(u))


def epitrochoid(u, R=40.0, r=10.0, d=4.0):
    """A circle of radius r rolling outside one of radius R, tracing a point at d."""
    k = (R + r) / r
    x = (R + r) * np.cos(u) - d * np.cos(k * u)
    y = (R + r) * np.sin(u) - d * np.sin(k * u)
    dx = -(R + r) * np.sin(u) + d * k * np.sin(k * u)
    dy = (R + r) * np.cos(u) - d * k * np.cos(k * u)
    ddx = -(R + r) * np.cos(u) + d * k * k * np.cos(k * u)
    ddy = -(R + r) * np.sin(u) + d * k * k * np.sin(k * u)
    return np.c_[x, y], np.c_[dx, dy], np.c_[ddx, ddy]


SHAPES = {"ellipse": ellipse, "cam": cam, "epitrochoid": epitrochoid, "limacon": limacon}


def curvature(d1, d2):
    return (d1[:, 0] * d2[:, 1] - d1[:, 1] * d2[:, 0]) / np.hypot(d1[:, 0], d1[:, 1]) ** 3


def min_radius(name, m=2_000_000):
    """Smallest radius from the curvature formula on a fine parameter grid, mm."""
    u = np.linspace(0, 2 * np.pi, m, endpoint=False)
    _, d1, d2 = SHAPES[name](u)
    return float(1.0 / np.abs(curvature(d1, d2)).max())


def perimeter(name, m=2_000_000):
    u = np.linspace(0, 2 * np.pi, m, endpoint=False)
    _, d1, _ = SHAPES[name](u)
    return float(np.hypot(d1[:, 0], d1[:, 1]).mean() * 2 * np.pi)


def sample(name, n, **kw):
    """n points evenly spaced along the arc length, counter-clockwise."""
    fine = max(20 * n, 200_000)
    u = np.linspace(0, 2 * np.pi, fine + 1)
    _, d1, _ = SHAPES[name](u, **kw) if kw else SHAPES[name](u)
    sp = np.hypot(d1[:, 0], d1[:, 1])
    s = np.concatenate([[0], np.cumsum(0.5 * (sp[1:] + sp[:-1]) * np.diff(u))])
    us = np.interp(np.arange(n) * s[-1] / n, s, u)
    return (SHAPES[name](us, **kw) if kw else SHAPES[name](us))[0]


def write(path, p, decimals=None, closed=True):
    """Write x,y rows (the first point repeated at the end when closed)."""
    if closed:
        p = np.vstack([p, p[:1]])
    fmt = f"%.{decimals}f" if decimals is not None else "%.17g"
    np.savetxt(path, p, fmt=fmt, delimiter=",", header="x,y", comments="")
