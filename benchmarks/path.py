"""Toolpath benchmark: block counts against their references, arcs vs lines, speed.

Run: python benchmarks/path.py
Prints, all measured in this run:
  * line count vs the asymptotic minimum N ≈ ∫√(|κ|/(8e)) ds and, for a
    circle, vs ⌈π / acos(1 − e/R)⌉;
  * arcs vs lines block ratios at 0.01 mm on the sample parts and on an
    ellipse and a superellipse: the default arcs (fitted inside the
    tolerance band) and the curve-tangent biarcs side by side;
  * the same ratios on the sample parts at 0.1 and 0.001 mm;
  * what limits the ratio on the samples: the same parts without their
    probe noise, and a four times wider arc search on the noisy ones;
  * the time to turn a 10⁵-point closed outline into an arc toolpath.
"""

from __future__ import annotations

import contextlib
import glob
import math
import os
import sys
import time

import numpy as np

sys.path.insert(0, os.path.join(os.path.dirname(__file__), ".."))

import pathgen  # noqa: E402
from pathgen import demo  # noqa: E402
from pathgen.checks.machine import Cut, Tool  # noqa: E402
from pathgen.path import arcfit  # noqa: E402
from pathgen.path.build import contour_moves, make_toolpath  # noqa: E402
from pathgen.path.flatten import approximate  # noqa: E402
from pathgen.path.offset import regular_windows  # noqa: E402
from pathgen.spline import fit  # noqa: E402


def asymptotic_lines(contour, e, n=200_000):
    """∫√(|κ|/(8e)) ds by the midpoint rule on n arc-length-even pieces."""
    b = contour.breaks
    t = np.linspace(b[0], b[-1], n + 1)
    tm = 0.5 * (t[1:] + t[:-1])
    ds = np.hypot(*contour(tm, 1).T) * np.diff(t)
    return float(np.sum(np.sqrt(np.abs(contour.curvature(tm)) / (8 * e)) * ds))


def tangent_biarcs(contour, e, d=0.0):
    """The curve-tangent biarcs (the arcs before the band fit): (count, deviation)."""
    lo, hi = contour.domain
    windows, _, _ = regular_windows(contour, d, lo, hi, e)
    n, dev = 0, 0.0
    for w in windows:
        chain, dv, _ = approximate(contour, w[None], d, e, moves="arcs")
        n, dev = n + len(chain), max(dev, dv)
    return n, dev


def shapes():
    th = np.linspace(0, 2 * np.pi, 2000, endpoint=False)
    c, s = np.cos(th), np.sin(th)
    yield "circle R=10", fit(np.c_[10 * c, 10 * s], closed=True)
    yield "ellipse 30x20", fit(np.c_[30 * c, 20 * s], closed=True)
    yield "superellipse 30x20 n=4", fit(np.c_[30 * np.sign(c) * np.abs(c) ** 0.5,
                                                20 * np.sign(s) * np.abs(s) ** 0.5], closed=True)
    # 200 points with seeded 5 µm noise: probe noise well below the tolerance
    rng = np.random.default_rng(5)
    th2 = np.linspace(0, 2 * np.pi, 200, endpoint=False)
    yield "ellipse 30x20 noise 5um", fit(np.c_[30 * np.cos(th2), 20 * np.sin(th2)]
                                         + rng.normal(0.0, 0.005, (200, 2)), closed=True)
    for f in sorted(glob.glob(os.path.join(os.path.dirname(__file__), "..", "samples", "*.csv"))):
        name = os.path.splitext(os.path.basename(f))[0]
        outline = pathgen.read_points(f)
        yield f"sample {name}", pathgen.fit_outline(outline)
        yield f"sample {name} (smooth 0.02)", pathgen.fit_outline(outline, smooth=0.02)


@contextlib.contextmanager
def wide_search(beam=24):
    """The band arc fit with a 4x wider beam and denser candidate lists."""
    saved = arcfit._BEAM, arcfit._J_FRACTIONS, arcfit._K_FRACTIONS
    arcfit._BEAM = beam
    arcfit._J_FRACTIONS = np.array([1.0, 0.99, 0.98, 0.96, 0.95, 0.92, 0.9, 0.85, 0.8, 0.75, 0.7,
                                    0.6, 0.5, 0.45, 0.3, 0.2])
    arcfit._K_FRACTIONS = np.linspace(0.02, 0.98, 13)
    try:
        yield
    finally:
        arcfit._BEAM, arcfit._J_FRACTIONS, arcfit._K_FRACTIONS = saved


def limits(e):
    """Lines/arcs on the samples: as shipped, without their probe noise, and
    with a wider search; the part of the gap to 5x each explains."""
    print(f"\n3. what limits lines/arcs on the sample parts at e = {e} mm")
    print("   noise-free: the same points without the probe noise (pathgen.demo.make_part(noise=False))")
    print("   wide search: beam 24 instead of 6, 16 end and 13 curvature fractions instead of 9 and 5")
    print(f"   {'part':10s} {'as shipped':>16s} {'noise-free':>16s} {'wide search':>22s}")
    for name, (closed, _) in demo.PARTS.items():
        cells = []
        for noise in (True, False):
            c = pathgen.fit_outline(pathgen.clean_points(demo.make_part(name, noise=noise), closed=closed))
            nl = len(contour_moves(c, tolerance=e, moves="lines"))
            na = len(contour_moves(c, tolerance=e, moves="arcs"))
            cells.append(f"{nl:4d}/{na:<4d}{nl / na:5.2f}")
            if noise:
                t0 = time.perf_counter()
                with wide_search():
                    nw = len(contour_moves(c, tolerance=e, moves="arcs"))
                dt = time.perf_counter() - t0
                wide = f"{nl:4d}/{nw:<4d}{nl / nw:5.2f} {dt:5.1f} s"
        print(f"   {name:10s} {cells[0]:>16s} {cells[1]:>16s} {wide:>22s}")


def main():
    e = 0.01
    print("pathgen toolpath benchmark (measured in this run)")
    print(f"\n1. lines at e = {e} mm against their references")
    th = np.linspace(0, 2 * np.pi, 2000, endpoint=False)
    circle = fit(np.c_[10 * np.cos(th), 10 * np.sin(th)], closed=True)
    n_lines = len(contour_moves(circle, tolerance=e, moves="lines"))
    n_ref = math.ceil(math.pi / math.acos(1 - e / 10))
    print(f"   circle R=10: {n_lines} lines, ceil(pi/acos(1-e/R)) = {n_ref}, ratio {n_lines / n_ref:.3f}")
    print(f"   {'shape':32s} {'lines':>7s} {'asympt.':>8s} {'ratio':>6s}")
    rows = []
    for name, c in shapes():
        lines = contour_moves(c, tolerance=e, moves="lines")
        arcs = contour_moves(c, tolerance=e, moves="arcs")
        n_min = asymptotic_lines(c, e)
        ratio = f"{len(lines) / n_min:6.3f}" if n_min >= 1 else "   n/a"  # straight edges only
        print(f"   {name:32s} {len(lines):7d} {n_min:8.1f} {ratio}")
        rows.append((name, len(lines), len(arcs), lines.deviation, arcs.deviation, *tangent_biarcs(c, e)))
    print(f"\n2. arcs vs lines at e = {e} mm (blocks of the contour itself)")
    print("   arcs: fitted in the tolerance band (default); biarcs: on the curve's tangents")
    print(f"   {'shape':32s} {'lines':>6s} {'arcs':>5s} {'biarcs':>6s} {'lines/arcs':>10s} "
          f"{'lines/biarcs':>12s} {'dev lines':>9s} {'dev arcs':>8s} {'dev biarcs':>10s}")
    for name, nl, na, dl, da, nb, db in rows:
        print(f"   {name:32s} {nl:6d} {na:5d} {nb:6d} {nl / na:10.2f} {nl / nb:12.2f} "
              f"{dl:9.5f} {da:8.5f} {db:10.5f}")

    print("\n   lines/arcs on the sample parts at other tolerances (arcs: band fit)")
    print(f"   {'shape':32s} " + " ".join(f"{'e=' + str(t):>14s}" for t in (0.1, 0.01, 0.001)))
    for name, c in shapes():
        if not name.startswith("sample"):
            continue
        cells = []
        for t in (0.1, 0.01, 0.001):
            nl = len(contour_moves(c, tolerance=t, moves="lines"))
            na = len(contour_moves(c, tolerance=t, moves="arcs"))
            cells.append(f"{nl:5d}/{na:<4d}{nl / na:5.2f}")
        print(f"   {name:32s} " + " ".join(f"{x:>14s}" for x in cells))

    limits(e)

    print("\n4. speed: 10^5-point closed outline (invented cam-like part) to an arc toolpath")
    n = 100_000
    t = np.linspace(0, 2 * np.pi, n, endpoint=False)
    rr = 40 + 6 * np.cos(3 * t) + 2 * np.sin(7 * t)
    pts = np.c_[rr * np.cos(t), rr * np.sin(t)]
    t0 = time.perf_counter()
    c = fit(pts, closed=True)
    t1 = time.perf_counter()
    res = {}
    for moves in ("arcs", "lines"):
        t2 = time.perf_counter()
        tp = make_toolpath(c, Tool(6.0), Cut(side="outside", tolerance=e), moves=moves)
        res[moves] = (time.perf_counter() - t2, tp)
    print(f"   fit: {t1 - t0:.2f} s")
    for moves, (dt, tp) in res.items():
        print(f"   toolpath ({moves}): {dt:.2f} s, {tp.info['blocks']['per_pass']} blocks per pass, "
              f"measured deviation {tp.deviation:.5f} mm")
    ratio = res["lines"][1].info["blocks"]["per_pass"] / res["arcs"][1].info["blocks"]["per_pass"]
    print(f"   lines/arcs on this part: {ratio:.2f}")
    t2 = time.perf_counter()
    nb, db = tangent_biarcs(c, e, d=res["arcs"][1].info["offset"])
    print(f"   curve-tangent biarcs of the same offset (approximation only): {time.perf_counter() - t2:.2f} s, "
          f"{nb} moves, measured deviation {db:.5f} mm")


if __name__ == "__main__":
    main()
