"""What looking for lines and arcs in the points costs, side by side.

Prints, for outlines of 10³ … 10⁵ (10⁶ without --quick) points, the median
time of ``fit_outline(smooth="auto")`` with ``find_arcs=True`` (the
default) and with ``find_arcs=False``, and the ratio on / off (the cost of
recognition; lower is better).  Two invented outlines, both rounded to
0.001 mm: a rounded rectangle 120 × 80 mm with R8 fillets (recognised: 4
lines, 4 arcs) and an ellipse 50 × 30 mm (free-form: nothing recognised,
the fit unchanged).

Run:  python benchmarks/find_arcs.py [--quick]
"""

from __future__ import annotations

import argparse
import math

import numpy as np

from pathgen.outline import fit_outline
from pathgen.points import clean_points
from _timing import median_time


def rounded_rectangle(n, w=120.0, h=80.0, r=8.0):
    """n points evenly along a rounded rectangle (counter-clockwise)."""
    straight = [(r, 0, w - r, 0), (w, r, w, h - r), (w - r, h, r, h), (0, h - r, 0, r)]
    corners = [(w - r, r, -90), (w - r, h - r, 0), (r, h - r, 90), (r, r, 180)]
    total = 2 * (w + h) - (8 - 2 * math.pi) * r
    s = total * np.arange(n) / n
    out = np.empty((n, 2))
    at = 0.0
    for (x0, y0, x1, y1), (cx, cy, a0) in zip(straight, corners):
        L = math.hypot(x1 - x0, y1 - y0)
        m = (s >= at) & (s < at + L)
        u = (s[m] - at) / L
        out[m] = np.c_[x0 + u * (x1 - x0), y0 + u * (y1 - y0)]
        at += L
        A = r * math.pi / 2
        m = (s >= at) & (s < at + A)
        ang = np.radians(a0) + (s[m] - at) / r
        out[m] = np.c_[cx + r * np.cos(ang), cy + r * np.sin(ang)]
        at += A
    return out


def ellipse(n, a=50.0, b=30.0):
    t = np.linspace(0, 2 * np.pi, n, endpoint=False)
    return np.c_[a * np.cos(t), b * np.sin(t)]


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="stop at 10^5 points, one run each")
    a = ap.parse_args(argv)
    sizes = [10**3, 10**4, 10**5] + ([] if a.quick else [10**6])
    repeat = 1 if a.quick else 3
    print(f"{'outline':<18} {'points':>8} {'on s':>8} {'off s':>8} {'on/off':>7}  found")
    for name, make in (("rounded rectangle", rounded_rectangle), ("ellipse", ellipse)):
        for n in sizes:
            o = clean_points(np.round(make(n), 3), closed=True)
            found = fit_outline(o, smooth="auto").info.get("recognised", {}).get("text", "nothing")
            on = median_time(lambda: fit_outline(o, smooth="auto"), repeat)
            off = median_time(lambda: fit_outline(o, smooth="auto", find_arcs=False), repeat)
            print(f"{name:<18} {len(o.points):>8} {on:>8.3f} {off:>8.3f} {on / off:>7.2f}  {found}")


if __name__ == "__main__":
    main()
