"""End to end: points file → G-code with arcs, report and DXF.

Prints, for closed outlines of 10^5 and 10^6 points, the wall time of each
stage (so the slowest is visible), the total and the peak memory: each the
median of three runs, every run in a fresh process (the machine is shared,
and one run can be 40 % slower than the next); then the time of ``pathgen --help`` and of
``pathgen check`` on a 200-point sample, as medians of a few runs.  Targets
(shared 2-core machine): 10^5 points < 3 s, 10^6 points < 30 s and < 2 GB,
``--help`` < 0.3 s, ``check`` on 200 points < 1 s.

Usage::

    python benchmarks/e2e.py              # 10^5 and 10^6, three runs each
    python benchmarks/e2e.py --quick      # 10^5 only
    python benchmarks/e2e.py --repeat 5   # five runs of each size

Numbers vary with the machine's load: read them as ratios to the targets.
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent


def outline(n: int):
    """A closed, smooth, invented cam-like outline of n points (mm)."""
    import numpy as np

    th = np.linspace(0.0, 2 * np.pi, n, endpoint=False)
    r = 60.0 + 8.0 * np.sin(3 * th) + 3.0 * np.cos(7 * th)
    return np.column_stack([r * np.cos(th), r * np.sin(th)])


def one_size(n: int, workdir: Path) -> dict:
    """Run in a child process: time every stage for n points."""
    import resource

    import numpy as np

    t0 = time.perf_counter()
    src = workdir / f"outline_{n}.csv"
    # 10 decimals: at 10^6 points the spacing is 0.4 µm, and rounding to
    # fewer decimals would put curvature noise of order rounding / spacing²
    # into the interpolating spline (4 decimals: about 3 /mm at 10^5 points).
    np.savetxt(src, outline(n), fmt="%.10f", delimiter=",", header="x,y", comments="")
    t_write_csv = time.perf_counter() - t0

    from pathgen.pipeline import run

    t0 = time.perf_counter()
    res = run(
        src,
        closed=True,  # the file lists each point once: say that it is a loop
        tool_diameter=6.0,
        moves="arcs",
        tolerance=0.01,
        gcode=workdir / f"o{n}.nc",
        report=workdir / f"o{n}.report.json",
        dxf=workdir / f"o{n}.dxf",
        force=True,
    )
    total = time.perf_counter() - t0
    peak_kb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss

    sizes = {k: os.path.getsize(p) for k, p in res.files.items()}
    blocks = res.toolpath.block_count if res.toolpath is not None else None
    return {
        "n": n,
        "stages": res.timings,
        "total": total,
        "peak_mb": peak_kb / 1024.0,
        "blocks": blocks,
        "file_bytes": sizes,
        "csv_write": t_write_csv,
    }


def _child(n: int) -> dict:
    with tempfile.TemporaryDirectory() as d:
        out = subprocess.run(
            [sys.executable, __file__, "--child", str(n), "--dir", d],
            capture_output=True, text=True, cwd=ROOT, check=False,
        )
    if out.returncode != 0:
        raise SystemExit(f"size {n} failed:\n{out.stderr}")
    return json.loads(out.stdout.strip().splitlines()[-1])


def _median_row(runs: list[dict]) -> dict:
    """Stage by stage, total and peak memory: the medians over the runs."""
    out = dict(runs[0])
    out["stages"] = {s: statistics.median(r["stages"].get(s, 0.0) for r in runs) for s in runs[0]["stages"]}
    out["total"] = statistics.median(r["total"] for r in runs)
    out["peak_mb"] = statistics.median(r["peak_mb"] for r in runs)
    out["totals"] = [r["total"] for r in runs]
    return out


def _median_time(cmd: list[str], repeat: int = 5) -> float:
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        subprocess.run(cmd, capture_output=True, cwd=ROOT, check=False)
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--quick", action="store_true", help="10^5 points only")
    ap.add_argument("--repeat", type=int, default=3, help="runs of each size (median reported)")
    ap.add_argument("--child", type=int, help=argparse.SUPPRESS)
    ap.add_argument("--dir", help=argparse.SUPPRESS)
    a = ap.parse_args()
    if a.child:
        print(json.dumps(one_size(a.child, Path(a.dir))))
        return

    targets = {100_000: 3.0, 1_000_000: 30.0}
    sizes = [100_000] if a.quick else [100_000, 1_000_000]
    rows = [_median_row([_child(n) for _ in range(max(1, a.repeat))]) for n in sizes]
    stages = list(dict.fromkeys(s for r in rows for s in r["stages"]))
    print("End to end, closed outline, arcs at 0.01 mm, 6 mm tool, G-code + report + DXF")
    print(f"(median of {max(1, a.repeat)} runs, each in a fresh process; totals of every run: "
          + "; ".join(f"{r['n']:,d}: " + ", ".join(f"{t:.2f}" for t in r["totals"]) for r in rows) + " s)")
    print(f"{'stage':<12}" + "".join(f"{r['n']:>14,d} pts" for r in rows))
    for s in stages:
        print(f"{s:<12}" + "".join(f"{r['stages'].get(s, 0.0):>16.3f} s" for r in rows))
    print(f"{'total':<12}" + "".join(f"{r['total']:>16.3f} s" for r in rows))
    print(f"{'target':<12}" + "".join(f"{targets[r['n']]:>16.1f} s" for r in rows))
    print(f"{'total/target':<12}" + "".join(f"{r['total'] / targets[r['n']]:>18.2f}" for r in rows))
    print(f"{'peak memory':<12}" + "".join(f"{r['peak_mb']:>15.0f} MB" for r in rows))
    print(f"{'blocks':<12}" + "".join(f"{r['blocks'] or 0:>18,d}" for r in rows))
    for r in rows:
        slow = max(r["stages"], key=r["stages"].get)
        files = ", ".join(f"{k} {v / 1e6:.1f} MB" for k, v in r["file_bytes"].items())
        print(f"{r['n']:,d} points: slowest stage {slow} ({r['stages'][slow]:.3f} s); files: {files}")

    py = sys.executable
    t_help = _median_time([py, "-m", "pathgen", "--help"])
    t_import = _median_time([py, "-c", "pass"])
    t_check = _median_time([py, "-m", "pathgen", "check", "samples/bracket.csv", "--tool-diameter", "6"])
    print()
    print(f"python startup alone           {t_import:.3f} s")
    print(f"pathgen --help                 {t_help:.3f} s  (target 0.3 s: ratio {t_help / 0.3:.2f})")
    print(f"pathgen check bracket (296 pts) {t_check:.3f} s  (target 1 s: ratio {t_check:.2f})")


if __name__ == "__main__":
    main()
