"""pathgen.fit against scipy.interpolate.CubicSpline, side by side.

Prints, for n = 10³ … 10⁶ points and every end condition, the median time
of each and the ratio pathgen / scipy (lower is better; target ≤ 0.5), and
the same for evaluating value, first and second derivative at 10·n sorted
parameters (target ≤ 1.0).  Both fit the same (n, 2) data on the same
parameters, and the results are compared before timing.

Run:  python benchmarks/fit.py [--quick]
"""

from __future__ import annotations

import argparse

import numpy as np
from scipy.interpolate import CubicSpline

import pathgen
from _timing import median_time




def _data(n, closed):
    rng = np.random.default_rng(n)
    th = np.sort(rng.uniform(0, 2 * np.pi, n)) if closed else np.linspace(0, 6 * np.pi, n)
    r = 50 + rng.normal(0, 0.01, n) if closed else 1 + th
    return np.c_[r * np.cos(th), r * np.sin(th)]


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="n up to 10^5, fewer repeats")
    args = ap.parse_args(argv)
    sizes = [10**3, 10**4, 10**5] if args.quick else [10**3, 10**4, 10**5, 10**6]
    tangents = ((1.0, 0.0), (0.0, 1.0))
    print(f"numpy {np.__version__}; times are medians; ratio = pathgen / scipy")
    print(f"{'n':>8} {'end':>11} {'pathgen s':>10} {'scipy s':>10} {'ratio':>6}   max |diff|")
    for n in sizes:
        repeat = 3 if n >= 10**6 else (5 if args.quick else 9)
        for end in ("not-a-knot", "natural", "clamped", "periodic"):
            closed = end == "periodic"
            p = _data(n, closed)
            kw = {"tangents": tangents} if end == "clamped" else {}
            c = pathgen.fit(p, closed=closed, end="not-a-knot" if closed else end, **kw)
            t = c.breaks
            if closed:
                y, bc = np.vstack([p, p[:1]]), "periodic"
            elif end == "clamped":
                y, bc = p, ((1, np.array(tangents[0])), (1, np.array(tangents[1])))
            else:
                y, bc = p, end
            ref = CubicSpline(t, y, bc_type=bc)
            diff = np.abs(c.coefficients - ref.c).max() / np.abs(ref.c).max()
            tp = median_time(lambda: pathgen.fit(p, closed=closed, end="not-a-knot" if closed else end, **kw), repeat)
            ts = median_time(lambda: CubicSpline(t, y, bc_type=bc), repeat)
            print(f"{n:>8} {end:>11} {tp:10.5f} {ts:10.5f} {tp / ts:6.2f}   {diff:.1e}")
    print()
    print("evaluation of value, 1st and 2nd derivative at 10·n sorted parameters")
    print(f"{'n':>8} {'pathgen s':>10} {'scipy s':>10} {'ratio':>6}   max |diff|")
    for n in sizes:
        p = _data(n, False)
        c = pathgen.fit(p)
        ref = CubicSpline(c.breaks, p)
        u = np.linspace(c.breaks[0], c.breaks[-1], 10 * n)
        repeat = 3 if n >= 10**6 else 5
        diff = max(np.abs(c(u, nu) - ref(u, nu)).max() for nu in range(3))
        tp = median_time(lambda: [c(u, nu) for nu in range(3)], repeat)
        ts = median_time(lambda: [ref(u, nu) for nu in range(3)], repeat)
        print(f"{n:>8} {tp:10.5f} {ts:10.5f} {tp / ts:6.2f}   {diff:.1e}")


if __name__ == "__main__":
    main()
