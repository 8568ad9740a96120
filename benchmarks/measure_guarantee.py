"""What the deviation measurement's sampling guarantee costs, side by side in one run.

Runs ``pathgen gcode`` on invented outlines (a smooth closed cam of n
points, and the same cam with 2 µm probe noise rounded to 0.001 mm), records
every call the toolpath stage makes to ``chain_deviation``, then replays the
recorded calls alternately with the guarantee (pieces whose features are
narrower than the even sample step sampled on their own) and without it
(the even samples alone), median of ``--repeat`` runs each.  Printed per
input: calls, primitives, even samples, extra samples, both times and their
ratio, and the largest change of a measured deviation (the guarantee can
only add samples, so a change is an increase: a feature the even samples
missed).

    PYTHONPATH=. python3 benchmarks/measure_guarantee.py
    PYTHONPATH=. python3 benchmarks/measure_guarantee.py --sizes 100000,1000000 --repeat 3

The machine is shared: read the ratios, not the times.
"""

from __future__ import annotations

import argparse
import io
import statistics
import sys
import tempfile
import time
from pathlib import Path

import numpy as np


def _cam(n: int, noisy: bool) -> np.ndarray:
    th = np.linspace(0.0, 2 * np.pi, n, endpoint=False)
    r = 60.0 + 8.0 * np.sin(3 * th) + 3.0 * np.cos(7 * th)
    pts = np.column_stack([r * np.cos(th), r * np.sin(th)])
    if noisy:
        pts = np.round(pts + np.random.default_rng(15).normal(0, 0.002, pts.shape), 3)
    return pts


def _record(src: Path, moves: str, out: Path):
    import pathgen.path.arcfit as arcfit
    import pathgen.path.flatten as flatten
    import pathgen.path.measure as measure
    import pathgen.path.straighten as straighten
    from pathgen.cli import main

    calls = []
    real = measure.chain_deviation

    def rec(contour, d, chain, tol, *, density=1):
        calls.append((contour, d, chain, tol, density))
        return real(contour, d, chain, tol, density=density)

    mods = (arcfit, flatten, straighten)
    for m in mods:
        m.chain_deviation = rec
    err = io.StringIO()
    try:
        rc = main(["gcode", str(src), "--tool-diameter", "6", "--closed", "--moves", moves,
                   "-o", str(out)], out=io.StringIO(), err=err)
    finally:
        for m in mods:
            m.chain_deviation = real
    return rc, calls, (err.getvalue().strip().splitlines() or [""])[0]


def _replay(calls, guarantee: bool):
    import pathgen.path.measure as measure

    real = measure._dense_extras
    if not guarantee:
        measure._dense_extras = lambda *a: None
    try:
        t = time.perf_counter()
        out = [measure.chain_deviation(c, d, ch, tol, density=de) for c, d, ch, tol, de in calls]
        return time.perf_counter() - t, out
    finally:
        measure._dense_extras = real


def _extras(calls):
    import pathgen.path.measure as measure

    even = extra = 0
    for c, d, ch, tol, de in calls:
        counts = measure._sample_counts(c, ch, tol, de)
        even += int(counts.sum())
        got = measure._dense_extras(c, ch, counts, d, tol)
        extra += 0 if got is None else len(got[1])
    return even, extra


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", default="20000,100000")
    ap.add_argument("--repeat", type=int, default=3)
    a = ap.parse_args()
    print(f"{'input':28s} {'moves':5s} {'calls':>5s} {'prims':>6s} {'even':>9s} {'extra':>8s} "
          f"{'without s':>9s} {'with s':>8s} {'ratio':>5s}  largest increase mm")
    with tempfile.TemporaryDirectory() as tmp:
        for n in (int(s) for s in a.sizes.split(",")):
            for noisy in (False, True):
                name = f"cam {n}{' noisy' if noisy else ''}"
                src = Path(tmp) / f"cam_{n}_{int(noisy)}.csv"
                np.savetxt(src, _cam(n, noisy), fmt="%.10f", delimiter=",", header="x,y", comments="")
                for moves in ("arcs", "lines"):
                    rc, calls, why = _record(src, moves, Path(tmp) / f"{src.stem}_{moves}.nc")
                    if rc not in (0, 1) or not calls:
                        print(f"{name:28s} {moves:5s} exit {rc}, {len(calls)} calls, skipped: {why[:70]}")
                        continue
                    even, extra = _extras(calls)
                    t_off, t_on = [], []
                    for _ in range(a.repeat):
                        dt, off = _replay(calls, False)
                        t_off.append(dt)
                        dt, on = _replay(calls, True)
                        t_on.append(dt)
                    inc = max(float(np.max(y - x)) for x, y in zip(off, on))
                    m_off, m_on = statistics.median(t_off), statistics.median(t_on)
                    print(f"{name:28s} {moves:5s} {len(calls):5d} {sum(len(c[2]) for c in calls):6d} "
                          f"{even:9d} {extra:8d} {m_off:9.3f} {m_on:8.3f} {m_on / m_off:5.2f}  {inc:.3g}",
                          flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
