"""The machinability check and the feed planners, measured side by side.

Prints median times (2-core shared machines are noisy: read the ratios,
not the absolute numbers):

1. ``check`` on closed outlines of 10³ … 10⁵ points (smooth and with probe
   noise), with the share spent fitting for scale;
2. the acceleration passes as cumulative minima against the plain
   sample-by-sample loop (results compared before timing);
3. ``feeds_for_moves`` on 10³ … 10⁵ blocks;
4. ``check`` on the cam of ``speed.py`` at 10⁵ and 10⁶ points (10⁵ only
   with --quick) with its samples sized by the geometry against 4 samples
   per piece (the sampling before), interleaved, medians: time, samples,
   and the report's text compared.

Run:  python benchmarks/checks.py [--quick]
"""

from __future__ import annotations

import argparse
import statistics
import time

import numpy as np

import pathgen
from pathgen.checks.feed import accel_passes, feeds_for_moves
from _timing import median_time




def _outline(n, noise):
    rng = np.random.default_rng(n)
    th = np.linspace(0, 2 * np.pi, n, endpoint=False)
    r = 40 + 6 * np.cos(3 * th) + rng.normal(0, noise, n)
    return np.c_[1.4 * r * np.cos(th), r * np.sin(th)]


def _passes_loop(w, step, a):
    w = w.copy()
    for i in range(len(w) - 1):
        w[i + 1] = min(w[i + 1], w[i] + 2 * a * step[i])
    for i in range(len(w) - 2, -1, -1):
        w[i] = min(w[i], w[i + 1] + 2 * a * step[i])
    return w


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="smaller sizes, fewer repeats")
    args = ap.parse_args(argv)
    repeat = 3 if args.quick else 5
    sizes = (1_000, 10_000) if args.quick else (1_000, 10_000, 100_000)
    machine = pathgen.Machine(max_feed=4000, max_accel=300, block_rate=400)
    tool, cut = pathgen.Tool(6.0), pathgen.Cut(feed=2500, side="outside")

    print("check() on closed outlines (tool 6 mm outside)")
    print(f"{'points':>8} {'noise mm':>9} {'fit s':>8} {'check s':>8} {'check/fit':>10} {'spots':>6}")
    for n in sizes:
        for noise in (0.0, 0.002):
            pts = _outline(n, noise)
            t_fit = median_time(lambda: pathgen.fit(pts, closed=True), repeat)
            contour = pathgen.fit(pts, closed=True)
            rep = pathgen.check(contour, machine, tool, cut)
            t_chk = median_time(lambda: pathgen.check(contour, machine, tool, cut), repeat)
            print(f"{n:>8} {noise:>9} {t_fit:>8.3f} {t_chk:>8.3f} {t_chk / t_fit:>10.1f} "
                  f"{len(rep.tight_spots):>6}")

    print("\nacceleration passes: cumulative minima vs a plain loop")
    print(f"{'samples':>8} {'accumulate s':>13} {'loop s':>8} {'loop/accumulate':>16}")
    rng = np.random.default_rng(1)
    for n in (10_000, 100_000) if args.quick else (10_000, 100_000, 1_000_000):
        wl = rng.uniform(0, 1e4, n)
        wl[[0, -1]] = 0
        step = rng.uniform(0, 0.1, n - 1)
        fast = accel_passes(wl, step, 300.0)
        slow = _passes_loop(wl, step, 300.0)
        assert np.allclose(fast, slow, rtol=1e-9, atol=1e-6)
        t_fast = median_time(lambda: accel_passes(wl, step, 300.0), repeat)
        t_slow = median_time(lambda: _passes_loop(wl, step, 300.0), 1)
        print(f"{n:>8} {t_fast:>13.4f} {t_slow:>8.3f} {t_slow / t_fast:>16.0f}")

    print("\nfeeds_for_moves on lines round an outline")
    print(f"{'blocks':>8} {'time s':>8} {'us/block':>9}")
    for k in sizes:
        pts = _outline(k + 1, 0.0)
        z = np.zeros((k, 1))
        start, end = np.hstack([pts[:-1], z]), np.hstack([pts[1:], z])
        kind, center = np.ones(k, int), np.zeros((k, 2))
        t = median_time(lambda: feeds_for_moves(kind, start, end, center, feed=2500.0,
                                                 machine=machine), repeat)
        print(f"{k:>8} {t:>8.4f} {1e6 * t / k:>9.2f}")


    geometric_against_per_piece((100_000,) if args.quick else (100_000, 1_000_000), repeat)


def geometric_against_per_piece(sizes, repeat):
    import pathgen.checks.sampling as sampling
    from speed import outline

    real = sampling.sample_contour
    machine, tool, cut = pathgen.Machine(), pathgen.Tool(6.0), pathgen.Cut()
    print("\ncheck() on the cam: samples by geometry against 4 per piece (tool 6 mm outside)")
    print(f"{'points':>9} {'geometric s':>12} {'4/piece s':>10} {'ratio':>6} {'samples':>9} {'4/piece':>9} "
          f"{'same text':>10}")
    for n in sizes:
        contour = pathgen.fit(outline(n), closed=True)
        contour.area  # computed once, as the pipeline does
        times = {"geo": [], "old": []}
        texts = {}
        for _ in range(repeat):  # interleaved
            for key in times:
                sampling.sample_contour = real if key == "geo" else (lambda c, **kw: real(c, per_piece=4))
                t0 = time.perf_counter()
                texts[key] = pathgen.check(contour, machine, tool, cut).to_text()
                times[key].append(time.perf_counter() - t0)
        sampling.sample_contour = real
        from pathgen.checks.feed import sampling_limits

        count = len(real(contour, **sampling_limits(machine, tool, cut)))
        geo, old = statistics.median(times["geo"]), statistics.median(times["old"])
        print(f"{n:>9} {geo:>12.3f} {old:>10.3f} {old / geo:>6.1f} {count:>9} {4 * (len(contour.breaks) - 1):>9} "
              f"{'yes' if texts['geo'] == texts['old'] else 'NO':>10}")


if __name__ == "__main__":
    main()
