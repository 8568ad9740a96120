"""G-code formatting speed: pathgen's vectorized writer against plain
per-line f-strings over the same moves, side by side in one run.

Prints lines per second and the ratio (median of several runs).  The
f-string version is a minimal baseline (no checks), so the ratio is a
lower bound of the writer's advantage.

    python benchmarks/gcode_write.py [blocks ...]
"""

from __future__ import annotations

import statistics
import sys
import time

import numpy as np

from pathgen.export.gcode import gcode_text
from pathgen.path.model import ARC_CCW, LINE, Toolpath


def make_toolpath(n: int) -> Toolpath:
    """Alternating lines and quarter-ish arcs along a wavy band."""
    rng = np.random.default_rng(1)
    step = rng.uniform(0.05, 0.5, n)
    x = np.cumsum(step)
    y = 20 * np.sin(x / 15)
    pts = np.column_stack([np.r_[0.0, x], np.r_[0.0, y]])
    start = np.column_stack([pts[:-1], np.full(n, -1.0)])
    end = np.column_stack([pts[1:], np.full(n, -1.0)])
    kind = np.where(np.arange(n) % 2 == 0, LINE, ARC_CCW)
    # arcs: center on the left normal of the chord at distance 2 * chord
    chord = pts[1:] - pts[:-1]
    left = np.column_stack([-chord[:, 1], chord[:, 0]])
    center = (pts[:-1] + pts[1:]) / 2 + 2 * left
    center[kind == LINE] = 0
    feed = np.where(np.arange(n) % 50 < 25, 1200.0, 800.0)
    return Toolpath(kind, start, end, center, feed, info={"safe_height": 5.0})


def fstring_baseline(tp: Toolpath) -> str:
    out = []
    last_f = None
    for k, e, c, s, f in zip(tp.kind.tolist(), tp.end.tolist(), tp.center.tolist(), tp.start.tolist(), tp.feed.tolist()):
        words = f"G{k} X{e[0]:.4f} Y{e[1]:.4f}"
        if k >= 2:
            words += f" I{c[0] - s[0]:.4f} J{c[1] - s[1]:.4f}"
        if f != last_f:
            words += f" F{f:.1f}"
            last_f = f
        out.append(words)
    return "\n".join(out)


def median_time(fn, arg, repeat=3):
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn(arg)
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def main(argv):
    sizes = [int(a) for a in argv] or [10_000, 100_000, 1_000_000]
    print(f"{'blocks':>9} {'pathgen s':>10} {'lines/s':>10} {'f-string s':>11} {'lines/s':>10} {'ratio':>6}")
    for n in sizes:
        tp = make_toolpath(n)
        tv = median_time(gcode_text, tp)
        tf = median_time(fstring_baseline, tp)
        print(f"{n:>9} {tv:>10.3f} {n / tv:>10.3g} {tf:>11.3f} {n / tf:>10.3g} {tv / tf:>6.2f}")


if __name__ == "__main__":
    main(sys.argv[1:])
