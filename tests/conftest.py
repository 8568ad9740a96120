"""Canonical shapes shared by the tests.

Every shape here is analytic, so tests can compare against its handbook
formulas (circle and ellipse curvature, perimeter, area).
"""

from __future__ import annotations

import numpy as np
import pytest

from hypothesis import settings

settings.register_profile("pathgen", deadline=None, max_examples=40, derandomize=True)
settings.load_profile("pathgen")


def circle_points(radius=10.0, n=64, center=(0.0, 0.0), phase=0.0):
    """n points on a counter-clockwise circle (no repeated closing point)."""
    th = phase + np.linspace(0.0, 2.0 * np.pi, n, endpoint=False)
    return np.c_[center[0] + radius * np.cos(th), center[1] + radius * np.sin(th)]


def ellipse_points(a=3.0, b=2.0, n=64, theta=None):
    """Points (a cos θ, b sin θ), counter-clockwise; θ evenly spaced unless given."""
    if theta is None:
        theta = np.linspace(0.0, 2.0 * np.pi, n, endpoint=False)
    return np.c_[a * np.cos(theta), b * np.sin(theta)]


def ellipse_curvature(a, b, theta):
    """Handbook curvature of (a cos θ, b sin θ): ab / (a² sin²θ + b² cos²θ)^(3/2)."""
    return a * b / (a**2 * np.sin(theta) ** 2 + b**2 * np.cos(theta) ** 2) ** 1.5


def ellipse_distance(a, b, p):
    """Distance from points p to the ellipse x²/a² + y²/b² = 1 (Newton on the foot point)."""
    x, y = np.abs(p[..., 0]), np.abs(p[..., 1])
    th = np.arctan2(a * y, b * x)
    for _ in range(30):
        c, s = np.cos(th), np.sin(th)
        # f(θ) = (a²−b²) s c − x a s + y b c = 0 (normal of the foot point passes through p)
        f = (a * a - b * b) * s * c - x * a * s + y * b * c
        df = (a * a - b * b) * (c * c - s * s) - x * a * c - y * b * s
        th = th - f / df
    return np.hypot(x - a * np.cos(th), y - b * np.sin(th))


@pytest.fixture
def rng():
    return np.random.default_rng(20261201)


def star_contour(seed, n=150, amplitude=2.5, harmonics=6):
    """A smooth random star-shaped closed contour (counter-clockwise), radius
    about 20 mm plus ``harmonics`` seeded cosine terms of up to ``amplitude``."""
    from pathgen import fit

    rng = np.random.default_rng(seed)
    th = np.linspace(0, 2 * np.pi, n, endpoint=False)
    r = 20.0 + sum(rng.uniform(-amplitude, amplitude) * np.cos(k * th + rng.uniform(0, 6))
                   for k in range(1, harmonics + 1))
    return fit(np.c_[r * np.cos(th), r * np.sin(th)], closed=True)


def inch_plate_dxf(path):
    """A 4 x 3 inch rectangle in a drawing that declares inch ($INSUNITS = 1,
    the DXF reference's header variable, as ezdxf's documented doc.units
    writes it); returns the path."""
    import ezdxf

    doc = ezdxf.new("R2010")
    doc.units = ezdxf.units.IN
    doc.modelspace().add_lwpolyline([(0, 0), (4, 0), (4, 3), (0, 3)], close=True)
    doc.saveas(path)
    return path
