"""What the deviation measurement's sampling costs, side by side in one run.

Runs ``pathgen gcode`` on invented outlines (a smooth closed cam of n
points, and the same cam with 2 µm probe noise rounded to 0.001 mm), records
every call the toolpath stage makes to ``chain_deviation``, then replays the
recorded calls alternately with the samples sized by the geometry (the even
step of each move meets h²·max|q''|/8 <= 1 % of tol over its pieces; pieces
it misses sampled on their own) and with the former rule (at least one even
sample on every piece under a move, plus the same per-piece samples), median
of ``--repeat`` runs each.  Printed per input: calls, primitives, samples
(even + own) each way, both times and their ratio, and the largest
difference of a measured deviation between the two (both are within 1 % of
the tolerance of the true maximum, so they may differ by up to that).

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


def _replay(calls, every_piece: bool):
    import pathgen.path.measure as measure

    measure._EVERY_PIECE = every_piece
    try:
        t = time.perf_counter()
        out = [measure.chain_deviation(c, d, ch, tol, density=de) for c, d, ch, tol, de in calls]
        return time.perf_counter() - t, out
    finally:
        measure._EVERY_PIECE = False


def _samples(calls, every_piece: bool):
    """Even samples and samples of pieces on their own, over all calls."""
    import pathgen.path.measure as measure

    even = extra = 0
    measure._EVERY_PIECE = every_piece
    try:
        for c, d, ch, tol, de in calls:
            counts = measure._sample_counts(c, ch, tol, de, d)
            even += int(counts.sum())
            got = measure._dense_extras(c, ch, counts, d, tol)
            extra += 0 if got is None else len(got[1])
    finally:
        measure._EVERY_PIECE = False
    return even, extra


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", default="20000,100000")
    ap.add_argument("--repeat", type=int, default=3)
    a = ap.parse_args()
    print(f"{'input':22s} {'moves':5s} {'calls':>5s} {'prims':>6s} {'geometry: even+own':>19s} "
          f"{'every piece: even+own':>22s} {'geom s':>7s} {'every s':>8s} {'ratio':>5s}  largest difference mm")
    with tempfile.TemporaryDirectory() as tmp:
        for n in (int(s) for s in a.sizes.split(",")):
            for noisy in (False, True):
                name = f"cam {n}{' noisy' if noisy else ''}"
                src = Path(tmp) / f"cam_{n}_{int(noisy)}.csv"
                np.savetxt(src, _cam(n, noisy), fmt="%.10f", delimiter=",", header="x,y", comments="")
                for moves in ("arcs", "lines"):
                    rc, calls, why = _record(src, moves, Path(tmp) / f"{src.stem}_{moves}.nc")
                    if rc not in (0, 1) or not calls:
                        print(f"{name:22s} {moves:5s} exit {rc}, {len(calls)} calls, skipped: {why[:70]}")
                        continue
                    ge, gx = _samples(calls, False)
                    ee, ex = _samples(calls, True)
                    t_geo, t_every = [], []
                    for _ in range(a.repeat):
                        dt, geo = _replay(calls, False)
                        t_geo.append(dt)
                        dt, every = _replay(calls, True)
                        t_every.append(dt)
                    diff = max(float(np.max(np.abs(x - y))) for x, y in zip(geo, every))
                    m_geo, m_every = statistics.median(t_geo), statistics.median(t_every)
                    print(f"{name:22s} {moves:5s} {len(calls):5d} {sum(len(c[2]) for c in calls):6d} "
                          f"{f'{ge}+{gx}':>19s} {f'{ee}+{ex}':>22s} {m_geo:7.3f} {m_every:8.3f} "
                          f"{m_geo / m_every:5.2f}  {diff:.3g}", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
