"""Noisy and rounded points: does the default fit give the part's answers?

For four invented closed outlines with exact curvature formulas (an
ellipse with semi-axes 150 and 50, the cam r = 60 + 8 cos 5θ, an
epitrochoid and a limaçon; see ``_shapes.py``), each written as

* 20 000 and 100 000 points rounded to 0.001 mm (3 decimals), and
* 3 000 points with seeded Gaussian noise σ = 0.005 mm (full precision),

runs ``pathgen.run`` with default options and a 6 mm tool outside, and
prints side by side: the smallest radius against the curve's own (from its
curvature formula), whether the tool "cannot reach", the cycle time
against the clean input's (the same points at full precision, fitted
exactly), the largest distance from the points to the contour against
4σ (or the rounding step), and the noise estimate against the true σ
(q/√12 for rounding to q).  Then the cam table of issue 11 (2 000 points
at 3 decimals; 20 000 at 3; 100 000 at 6 and at 9) with the default and
with exact interpolation (``smooth="off"``).

``--big`` adds the 2.5-million-point ellipse 800 × 500 mm (6 decimals;
closed? perimeter against 4a·E(m), scipy.special.ellipe with
m = 1 − b²/a², smallest radius against b²/a) and the peak memory of
reading 5 million points, each in a fresh process.  ``--speed`` times the
whole job (G-code with arcs and the report) with default options on 10⁶
points of the cam at full precision (fitted exactly) and rounded to
0.0001 mm (smoothed to the rounding), in fresh processes, and prints the
ratio.  (The exact fit of the rounded points is no baseline: its
curvature is the rounding's, and the tool path is refused.)

Usage::

    python benchmarks/noise.py            # the table (about 2 minutes)
    python benchmarks/noise.py --big      # also 2.5 M and 5 M points
    python benchmarks/noise.py --speed    # also auto vs off at 10^6 points
"""

from __future__ import annotations

import argparse
import json
import math
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
sys.path.insert(0, str(HERE))
sys.path.insert(0, str(ROOT))

import numpy as np  # noqa: E402

import _shapes  # noqa: E402

TOOL = 6.0
SIGMA = 0.005
Q = 0.001


def _run(path, **kw):
    from pathgen.pipeline import run

    t0 = time.perf_counter()
    r = run(path, tool_diameter=TOOL, **kw)
    return r, time.perf_counter() - t0


def table(tmp: Path):
    print(f"{'shape':<12} {'points':>7} {'input':<10} {'R found':>9} {'R true':>8} {'dR %':>6} "
          f"{'reach':>5} {'time s':>7} {'clean s':>7} {'dt %':>6} {'max dist':>9} {'bound':>8} "
          f"{'sigma':>9} {'true':>9} {'ds %':>6} {'q':>7} {'fit':<6} {'run s':>6}")
    ok = True
    for name in _shapes.SHAPES:
        r_true = _shapes.min_radius(name)
        for n, kind in ((20_000, "3 dec"), (100_000, "3 dec"), (3_000, "σ 0.005")):
            exact = _shapes.sample(name, n)
            clean = tmp / f"{name}_{n}_clean.csv"
            _shapes.write(clean, exact)
            if kind == "3 dec":
                f = tmp / f"{name}_{n}_3dec.csv"
                _shapes.write(f, exact, decimals=3)
                true_sigma, bound = Q / math.sqrt(12), max(4 * Q / math.sqrt(12), Q)
            else:
                noisy = exact + np.random.default_rng(11).normal(0.0, SIGMA, exact.shape)
                f = tmp / f"{name}_{n}_noisy.csv"
                _shapes.write(f, noisy)
                true_sigma, bound = SIGMA, 4 * SIGMA
            ref, _ = _run(clean, smooth="off")
            res, secs = _run(f)
            rep = res.report
            fit = rep.fit
            radius = rep.min_radius.radius
            dr = 100 * (radius / r_true - 1)
            dt = 100 * (rep.cycle_time / ref.report.cycle_time - 1)
            ds = 100 * (fit["sigma"] / true_sigma - 1)
            good = (abs(dr) <= 3 and not rep.tool_cannot_reach and abs(dt) <= 2
                    and fit["max_residual"] <= bound and abs(ds) <= 25)
            ok &= good
            q = fit["quantization"]
            print(f"{name:<12} {n:>7} {kind:<10} {radius:>9.3f} {r_true:>8.3f} {dr:>6.2f} "
                  f"{'NO' if rep.tool_cannot_reach else 'ok':>5} {rep.cycle_time:>7.2f} "
                  f"{ref.report.cycle_time:>7.2f} {dt:>6.2f} {fit['max_residual']:>9.5f} {bound:>8.5f} "
                  f"{fit['sigma']:>9.6f} {true_sigma:>9.6f} {ds:>6.1f} {q if q else '-':>7} "
                  f"{fit['smoothing']:<6} {secs:>6.2f}{'' if good else '  <- misses a target'}")
    print("all targets met" if ok else "SOME TARGETS MISSED (marked)")


def cam_table(tmp: Path):
    print()
    print("cam r = 60 + 8 cos 5θ (smallest radius %.3f mm), 6 mm tool outside:" % _shapes.min_radius("cam"))
    print(f"{'points':>7} {'decimals':>8} {'smooth':<6} {'R found':>9} {'tight':>6} {'cannot reach':>12} "
          f"{'cycle s':>8} {'exit':>4}")
    for n, dec in ((2_000, 3), (20_000, 3), (100_000, 6), (100_000, 9)):
        f = tmp / f"cam_{n}_{dec}.csv"
        _shapes.write(f, _shapes.sample("cam", n), decimals=dec)
        for smooth in ("auto", "off"):
            res, _ = _run(f, smooth=smooth)
            rep = res.report
            print(f"{n:>7} {dec:>8} {smooth:<6} {rep.min_radius.radius:>9.3f} {len(rep.tight_spots):>6} "
                  f"{rep.count('reach'):>12} {rep.cycle_time:>8.2f} {res.status:>4}")


_BIG = """
import json, resource, sys, time
sys.path.insert(0, {root!r})
from pathgen.pipeline import run
from pathgen.points import read_points
t0 = time.perf_counter()
if {read_only}:
    o = read_points({path!r})
    out = {{"points": len(o), "closed": o.closed}}
else:
    r = run({path!r})
    rep = r.report
    out = {{"points": len(r.outline), "closed": rep.closed, "length": rep.length,
           "min_radius": rep.min_radius.radius, "smoothing": rep.fit["smoothing"],
           "sigma": rep.fit["sigma"], "quantization": rep.fit["quantization"]}}
out["seconds"] = time.perf_counter() - t0
out["peak_mb"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
print(json.dumps(out))
"""


def _child(path, read_only):
    code = _BIG.format(root=str(ROOT), path=str(path), read_only=read_only)
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def big(tmp: Path):
    from scipy.special import ellipe

    a, b = 400.0, 250.0
    print()
    for n, read_only in ((2_500_000, False), (5_000_000, True)):
        u = np.linspace(0, 2 * np.pi, n, endpoint=False)
        p = np.c_[a * np.cos(u), b * np.sin(u)]
        f = tmp / f"ellipse_{n}.csv"
        _shapes.write(f, p, decimals=6)
        size_mb = f.stat().st_size / 1e6
        res = _child(f, read_only)
        f.unlink()
        if read_only:
            print(f"{n} points, 6 decimals ({size_mb:.0f} MB file, {n * 16 / 1e6:.0f} MB of numbers): "
                  f"read {res['points']} points, closed={res['closed']}, {res['seconds']:.1f} s, "
                  f"peak memory {res['peak_mb']:.0f} MB")
            continue
        perim = 4 * a * ellipe(1 - b * b / (a * a))
        rmin = b * b / a
        print(f"ellipse 800 x 500 mm, {n} points, 6 decimals ({size_mb:.0f} MB): read {res['points']} "
              f"points, closed={res['closed']}, fit: {res['smoothing']} (sigma {res['sigma']:.3g} mm, "
              f"step {res['quantization']})")
        print(f"  perimeter {res['length']:.4f} mm vs 4aE(m) {perim:.4f} mm: "
              f"{100 * (res['length'] / perim - 1):+.5f} %")
        print(f"  smallest radius {res['min_radius']:.3f} mm vs b^2/a {rmin:.3f} mm: "
              f"{100 * (res['min_radius'] / rmin - 1):+.3f} %")
        print(f"  whole check {res['seconds']:.1f} s, peak memory {res['peak_mb']:.0f} MB")


_SPEED = """
import sys, time
sys.path.insert(0, {root!r})
t0 = time.perf_counter()
from pathgen.pipeline import run
r = run({path!r}, tool_diameter=6, smooth={smooth!r}, gcode={out!r}, report={rep!r}, force=True)
print(time.perf_counter() - t0, r.report.fit["smoothing"], r.timings.get("fit", 0.0))
"""


def speed(tmp: Path, repeat: int = 2):
    n = 1_000_000
    p = _shapes.sample("cam", n)
    files = {"exact": tmp / "cam_1e6_full.csv", "smoothed": tmp / "cam_1e6_4dec.csv"}
    _shapes.write(files["exact"], p)               # full precision: fitted exactly
    _shapes.write(files["smoothed"], p, decimals=4)  # 0.0001 mm: smoothed to its rounding
    print()
    print(f"{n} points of the cam, default options: full precision (fitted exactly) against "
          "rounded to 0.0001 mm (smoothed); the whole job (G-code with arcs, report), fresh process per run")
    res = {}
    for rnd in range(repeat):
        for kind, f in files.items():
            code = _SPEED.format(root=str(ROOT), path=str(f), smooth="auto",
                                 out=str(tmp / f"o_{kind}.nc"), rep=str(tmp / f"o_{kind}.json"))
            out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
            if out.returncode != 0:
                print(f"  run {rnd + 1}, {kind}: failed: {out.stderr.strip().splitlines()[-1]}")
                continue
            secs, mode, fit = out.stdout.split()
            res.setdefault(kind, []).append(float(secs))
            print(f"  run {rnd + 1}, {kind:<8} (fit: {mode}): {float(secs):6.1f} s (fit stage {float(fit):.1f} s)")
    if len(res) == 2:
        a, b = min(res["exact"]), min(res["smoothed"])
        print(f"  best of {repeat}: exact {a:.1f} s, smoothed {b:.1f} s, ratio {b / a:.2f} (target <= 3)")


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--big", action="store_true")
    ap.add_argument("--speed", action="store_true")
    ap.add_argument("--skip-table", action="store_true")
    a = ap.parse_args(argv)
    with tempfile.TemporaryDirectory() as d:
        tmp = Path(d)
        if not a.skip_table:
            table(tmp)
            cam_table(tmp)
        if a.big:
            big(tmp)
        if a.speed:
            speed(tmp)


if __name__ == "__main__":
    main()
