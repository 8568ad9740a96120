"""Random sweep: many invented outlines through check and toolpath.

Each case is a random star-shaped outline (closed or open, even or random
spacing, 8 to 400 points, 8 to 200 mm across, probe noise 0 to 0.05 mm)
cut with a random tool (0 to 12 mm), side, move kind and tolerance.  Every
case must end in one of two ways within the time limit: a toolpath whose
measured deviation is within the tolerance and whose end points are
finite, or a one-line refusal (:class:`pathgen.errors.PathgenError`).
Prints the counts, and every case that crashed, ran too long or broke the
tolerance, with its seed and number so that it can be run again alone.

Usage::

    python benchmarks/sweep.py                  # seed 1, 120 s
    python benchmarks/sweep.py --seed 7 --seconds 600
    python benchmarks/sweep.py --seed 7 --case 100   # one case, in detail

This is a search for defects, not a timing: nothing here is compared with
a reference, and a refusal is not a failure (very noisy points really do
leave no room for a large tool).
"""

from __future__ import annotations

import argparse
import collections
import os
import signal
import sys
import time
import traceback

import numpy as np

sys.path.insert(0, os.path.join(os.path.dirname(__file__), ".."))

import pathgen  # noqa: E402
from pathgen.checks.machine import Cut, Tool, load_machine  # noqa: E402
from pathgen.checks.report import check  # noqa: E402
from pathgen.errors import PathgenError  # noqa: E402
from pathgen.path.build import make_toolpath  # noqa: E402


def cases(seed: int):
    """Endless stream of (number, points, closed, tool, side, moves, tolerance, noise)."""
    rng = np.random.default_rng(seed)
    i = 0
    while True:
        i += 1
        n = int(rng.integers(8, 400))
        closed = bool(rng.random() < 0.7)
        if rng.random() < 0.3:
            th = np.sort(rng.uniform(0, 2 * np.pi, n))
        else:
            th = np.linspace(0, 2 * np.pi, n, endpoint=False)
        if not closed:
            th = th * rng.uniform(0.3, 0.95)
        k = int(rng.integers(1, 8))
        r = 20 + sum(rng.uniform(0, 4) * np.cos(j * th + rng.uniform(0, 6)) for j in range(1, k + 1))
        p = np.c_[r * np.cos(th), r * np.sin(th)] * rng.uniform(0.2, 5)
        noise = float(rng.choice([0, 0.001, 0.01, 0.05]))
        p = p + rng.normal(0, noise, p.shape)
        tool = float(rng.choice([0, 1, 3, 6, 12]))
        side = str(rng.choice(["outside", "inside", "on"]))
        moves = str(rng.choice(["arcs", "lines"]))
        tol = float(rng.choice([0.1, 0.01, 0.002]))
        yield i, p, closed, tool, side, moves, tol, noise


class _Slow(Exception):
    pass


def _alarm(*_):
    raise _Slow()


def run_case(p, closed, tool, side, moves, tol, limit):
    """'ok', 'refused: ...', 'slow', 'bad: ...' or 'crash: ...'."""
    signal.signal(signal.SIGALRM, _alarm)
    signal.alarm(limit)
    try:
        contour = pathgen.fit_outline(pathgen.clean_points(p, closed=closed))
        check(contour, load_machine(None), Tool(tool), Cut(side=side, tolerance=tol))
        tp = make_toolpath(contour, Tool(tool), Cut(side=side, tolerance=tol), moves=moves)
        ends = np.asarray(tp.end)
        if not tp.deviation <= tol or not np.all(np.isfinite(ends)):
            return f"bad: deviation {tp.deviation} mm, finite ends {np.all(np.isfinite(ends))}"
        return "ok"
    except _Slow:
        return "slow"
    except PathgenError as exc:
        return f"refused: {exc}"
    except Exception:  # noqa: BLE001 - the sweep reports whatever breaks
        return "crash: " + traceback.format_exc(limit=4)
    finally:
        signal.alarm(0)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--seconds", type=float, default=120.0, help="length of the sweep")
    ap.add_argument("--limit", type=int, default=30, help="seconds one case may take")
    ap.add_argument("--case", type=int, help="run only this case of the seed, and say what it is")
    a = ap.parse_args()
    counts = collections.Counter()
    t_end = time.time() + a.seconds
    for i, p, closed, tool, side, moves, tol, noise in cases(a.seed):
        if a.case is not None and i < a.case:
            continue
        t0 = time.perf_counter()
        got = run_case(p, closed, tool, side, moves, tol, a.limit)
        dt = time.perf_counter() - t0
        kind = got.split(":")[0]
        counts[kind] += 1
        what = (f"seed {a.seed} case {i}: {len(p)} points, {'closed' if closed else 'open'}, "
                f"noise {noise:g} mm, tool {tool:g} mm {side}, {moves}, tolerance {tol:g} mm")
        if a.case is not None:
            print(f"{what}\n  {got}\n  {dt:.2f} s")
            return
        if kind in ("slow", "bad", "crash"):
            print(f"{what}: {got}", flush=True)
        if time.time() > t_end:
            break
    total = sum(counts.values())
    print(f"{total} cases (seed {a.seed}): " + ", ".join(f"{counts[k]} {k}" for k in
                                                         ("ok", "refused", "slow", "bad", "crash")))


if __name__ == "__main__":
    main()
