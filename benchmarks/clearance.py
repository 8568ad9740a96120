"""The clearance check, measured side by side with a dense-sampling baseline.

For a closed cam-like contour of n points and m line moves running at the
tool radius outside it, prints the median time of

1. ``pathgen.path.clearance.clearance`` (polyline + KD-tree + exact
   segment/arc distances + Newton onto the curve), and
2. a plain baseline: the moves sampled every tolerance/2 and each sample's
   nearest contour sample found with one KD-tree query (a lower-quality
   answer: its error is up to the sampling steps),

their ratio, and both smallest clearances (the exact answer is the tool
radius, 3 mm).  2-core shared machines are noisy: read the ratios.

Run:  python benchmarks/clearance.py [--quick]
"""

from __future__ import annotations

import argparse

import numpy as np
from scipy.spatial import cKDTree

from pathgen.path.clearance import clearance
from pathgen.path.model import LINE
from pathgen.spline import fit
from _timing import median_time


def _case(n, m, r=3.0):
    th = np.linspace(0, 2 * np.pi, n, endpoint=False)
    rad = 50 + 3 * np.cos(5 * th)
    part = fit(np.c_[rad * np.cos(th), rad * np.sin(th)], closed=True)
    # moves: chords of the exact offset at distance r, outside
    t = part.sample(m + 1)
    q = part(t) - r * part.normal(t)
    start = np.c_[q[:-1], np.full(m, -1.0)]
    end = np.c_[q[1:], np.full(m, -1.0)]
    return part, start, end


def _baseline(part, start, end, tol):
    seg = np.hypot(*(end[:, :2] - start[:, :2]).T)
    k = np.maximum(np.ceil(seg / (tol / 2)), 1).astype(int)
    owner = np.repeat(np.arange(len(seg)), k)
    frac = (np.arange(owner.size) - np.repeat(np.cumsum(k) - k, k)) / np.repeat(k, k)
    pts = start[owner, :2] + (end - start)[owner, :2] * frac[:, None]
    ring = part(part.sample(max(int(part.length / (tol / 2)), 1000)))
    d, _ = cKDTree(ring).query(pts)
    return float(d.min())


def main(argv=None):
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true")
    a = ap.parse_args(argv)
    sizes = [(10_000, 10_000), (100_000, 100_000)] if a.quick else [
        (10_000, 10_000), (100_000, 100_000), (1_000_000, 100_000)]
    tol = 0.01
    print(f"{'points':>9} {'moves':>8} {'clearance s':>12} {'baseline s':>11} {'ratio':>6} "
          f"{'min (kernel)':>13} {'min (baseline)':>15}")
    for n, m in sizes:
        part, start, end = _case(n, m)
        kind = np.full(m, LINE, np.int8)
        center = np.zeros((m, 2))
        res = clearance(kind, start, end, center, part, tool_radius=3.0, side="outside", tolerance=tol)
        base = _baseline(part, start, end, tol)
        t1 = median_time(lambda: clearance(kind, start, end, center, part, tool_radius=3.0, side="outside",
                                           tolerance=tol), repeat=1 if a.quick else 3)
        t2 = median_time(lambda: _baseline(part, start, end, tol), repeat=1 if a.quick else 3)
        print(f"{n:>9} {m:>8} {t1:>12.2f} {t2:>11.2f} {t1 / t2:>6.2f} {res.min_clearance:>13.6f} {base:>15.6f}")


if __name__ == "__main__":
    main()
