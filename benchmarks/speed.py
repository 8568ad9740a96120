"""pathgen's commands next to the floor, measured side by side in one run.

For closed invented cam-like outlines of 10^5, 10^6 and 2·10^6 points
(the slopes need the two ends), every run a fresh process, in turn: the
floor (``benchmarks/floor.py``: numpy reads the CSV, scipy's CubicSpline
fits it, value and two derivatives at 4 points per piece), then
``pathgen gcode`` (arcs at 0.01 mm, 6 mm tool, the report beside it),
``pathgen dxf`` and ``pathgen check``.  Printed: the medians of the wall
times and their ratios to the floor's, the stage times (from
``pathgen.pipeline.stage_timer``), the peak memory of each command and
every stage's log-log slope between the smallest and the largest size.

Then the small job (``pathgen check`` on a 200-point outline against
``python -c "import numpy"`` + 0.1 s, medians of 5) and the arc fit's
scaling (one 100-point ellipse scaled ×1, ×10, ×100 through ``pathgen
gcode``, interleaved, medians of --repeat; pathgen refuses outlines over
10 m across, so ×100, 8 m, is the largest).

    PYTHONPATH=. python3 benchmarks/speed.py                     # all
    PYTHONPATH=. python3 benchmarks/speed.py --sizes 100000 --repeat 1
    PYTHONPATH=. python3 benchmarks/speed.py --only small,scale

The machine is shared: read ratios, never absolute times.
"""

from __future__ import annotations

import argparse
import json
import math
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
HERE = Path(__file__).resolve().parent

# the child: run the command line with the stage timer recording, then
# write the timings and the peak memory to the file named in argv[1]
CHILD = r"""
import json, resource, sys
import pathgen.pipeline as pl
seen = []
_timer = pl.stage_timer
def stage_timer(progress, timings):
    seen.append(timings)
    return _timer(progress, timings)
pl.stage_timer = stage_timer
from pathgen.cli import main
rc = main(sys.argv[2:])
stages = {}
for t in seen:
    for k, v in t.items():
        stages[k] = stages.get(k, 0.0) + v
peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
with open(sys.argv[1], "w") as f:
    json.dump({"rc": rc, "stages": stages, "peak_mb": peak}, f)
"""


def outline(n: int):
    """A closed, smooth, invented cam-like outline of n points (mm)."""
    import numpy as np

    th = np.linspace(0.0, 2 * np.pi, n, endpoint=False)
    r = 60.0 + 8.0 * np.sin(3 * th) + 3.0 * np.cos(7 * th)
    return np.column_stack([r * np.cos(th), r * np.sin(th)])


#: Compiled modules go here (set by main): every run reads pathgen's
#: bytecode as an installed package has it, not compiling its sources
#: anew (PYTHONDONTWRITEBYTECODE, set on some machines, would add 0.1-0.4 s
#: of compiling to every run, a cost no installed copy pays).
PYCACHE: Path | None = None


def _env():
    env = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}
    env["PYTHONPATH"] = str(ROOT)
    if PYCACHE is not None:
        env["PYTHONPYCACHEPREFIX"] = str(PYCACHE)
    return env


def run_floor(csv: Path) -> dict:
    t0 = time.perf_counter()
    out = subprocess.run([sys.executable, str(HERE / "floor.py"), str(csv)], capture_output=True,
                         text=True, env=_env(), check=True)
    wall = time.perf_counter() - t0
    res = json.loads(out.stdout)
    res["wall"] = wall
    return res


def run_command(argv: list[str], workdir: Path) -> dict:
    rec = workdir / "child.json"
    t0 = time.perf_counter()
    out = subprocess.run([sys.executable, "-c", CHILD, str(rec), *argv], capture_output=True, text=True,
                         env=_env(), cwd=workdir, check=False)
    wall = time.perf_counter() - t0
    res = json.loads(rec.read_text()) if rec.exists() else {"rc": out.returncode, "stages": {}, "peak_mb": 0.0}
    rec.unlink(missing_ok=True)
    if res["rc"] not in (0, 1):  # a refusal or a crash is a result too: say it, go on
        print(f"  {argv[0]} {Path(argv[1]).name}: exit {res['rc']}: {out.stderr.strip()[-300:]}", file=sys.stderr)
        res["failed"] = out.stderr.strip().splitlines()[-1:] or ["?"]
    res["wall"] = wall
    return res


COMMANDS = {
    "gcode": lambda csv, d: ["gcode", str(csv), "--closed", "--tool-diameter", "6", "--tolerance", "0.01",
                             "-o", str(d / "o.nc"), "--force", "--quiet"],
    "dxf": lambda csv, d: ["dxf", str(csv), "--closed", "--tool-diameter", "6", "--tolerance", "0.01",
                           "-o", str(d / "o.dxf"), "--force", "--quiet"],
    "check": lambda csv, d: ["check", str(csv), "--closed", "--tool-diameter", "6", "--quiet"],
}


def _median(runs: list[dict], key: str) -> float:
    return statistics.median(r[key] for r in runs)


def sizes_table(sizes: list[int], repeat: int, workdir: Path) -> None:
    import numpy as np

    rows = {}
    for n in sizes:
        csv = workdir / f"cam_{n}.csv"
        np.savetxt(csv, outline(n), fmt="%.10f", delimiter=",", header="x,y", comments="")
        runs = {"floor": [], **{c: [] for c in COMMANDS}}
        for _ in range(repeat):  # interleaved: each round runs every command once
            runs["floor"].append(run_floor(csv))
            for c, argv in COMMANDS.items():
                runs[c].append(run_command(argv(csv, workdir), workdir))
            print(f"  {n:,d}: " + ", ".join(f"{c} {r[-1]['wall']:.2f} s" for c, r in runs.items()),
                  file=sys.stderr)
        rows[n] = runs
        csv.unlink()

    print(f"Wall time, median of {repeat} (each a fresh process), ratio to the floor's wall time"
          " (! = the command refused or failed: see above)")
    print(f"{'command':<10}" + "".join(f"{n:>22,d}" for n in sizes))
    for c in ("floor", *COMMANDS):
        cells = []
        for n in sizes:
            w = _median(rows[n][c], "wall")
            f = _median(rows[n]["floor"], "wall")
            bad = "!" if any(r.get("failed") for r in rows[n][c]) else " "
            cells.append(f"{w:8.2f} s ({w / f:5.2f}x){bad}" if c != "floor" else f"{w:8.2f} s         ")
        print(f"{c:<10}" + "".join(f"{x:>22}" for x in cells))
    print("floor parts (median): " + "; ".join(
        f"{n:,d}: " + ", ".join(f"{k} {_median(rows[n]['floor'], k):.3f}"
                                 for k in ("import", "read", "fit", "evaluate", "work"))
        for n in sizes))
    for c in COMMANDS:
        print(f"{'peak MB ' + c:<16}" + "".join(f"{_median(rows[n][c], 'peak_mb'):>16.0f}" for n in sizes))
    for c in COMMANDS:
        stages = list(dict.fromkeys(s for n in sizes for r in rows[n][c] for s in r["stages"]))
        print(f"\n{c}: stage medians (s)" + (f"; slope = log-log {sizes[0]:,d} -> {sizes[-1]:,d}"
                                             if len(sizes) > 1 else ""))
        for s in stages:
            vals = [statistics.median(r["stages"].get(s, 0.0) for r in rows[n][c]) for n in sizes]
            slope = ""
            if len(sizes) > 1 and vals[0] > 0 and vals[-1] > 0:
                slope = f"  slope {math.log(vals[-1] / vals[0]) / math.log(sizes[-1] / sizes[0]):5.2f}"
            print(f"  {s:<18}" + "".join(f"{v:>10.3f}" for v in vals) + slope)
        tot = [_median(rows[n][c], "wall") for n in sizes]
        if len(sizes) > 1:
            print(f"  {'wall':<18}" + "".join(f"{v:>10.3f}" for v in tot)
                  + f"  slope {math.log(tot[-1] / tot[0]) / math.log(sizes[-1] / sizes[0]):5.2f}")


def _wall(cmd: list[str], cwd: Path) -> float:
    t0 = time.perf_counter()
    subprocess.run(cmd, capture_output=True, cwd=cwd, env=_env(), check=False)
    return time.perf_counter() - t0


def small_job(workdir: Path, repeat: int = 5) -> None:
    import numpy as np

    th = np.linspace(0.0, 2 * np.pi, 200, endpoint=False)
    r = 30.0 + 4.0 * np.sin(3 * th)
    csv = workdir / "small.csv"
    np.savetxt(csv, np.column_stack([r * np.cos(th), r * np.sin(th)]), fmt="%.4f", delimiter=",",
               header="x,y", comments="")
    py = sys.executable
    check = [py, "-m", "pathgen", "check", str(csv), "--closed", "--tool-diameter", "6"]
    _wall(check, workdir)  # compiles pathgen's modules once, as installing does
    t_np, t_check = [], []
    for _ in range(repeat):  # interleaved
        t_np.append(_wall([py, "-c", "import numpy"], workdir))
        t_check.append(_wall(check, workdir))
    a, b = statistics.median(t_np), statistics.median(t_check)
    print(f"\nSmall job, median of {repeat}: python -c 'import numpy' {a:.3f} s; "
          f"pathgen check (200 points) {b:.3f} s; ratio to (numpy + 0.1 s) {b / (a + 0.1):.2f} (target 1.3)")


def scaled_ellipse(workdir: Path, scales=(1, 10, 100), repeat: int = 3) -> None:
    """One 100-point ellipse scaled (pathgen takes outlines up to 10 m across,
    so x100, 8 m, is the largest): runs interleaved, medians of ``repeat``."""
    import numpy as np

    th = np.linspace(0.0, 2 * np.pi, 100, endpoint=False)
    base = np.column_stack([40.0 * np.cos(th), 25.0 * np.sin(th)])
    runs = {s: [] for s in scales}
    for s in scales:
        np.savetxt(workdir / f"ellipse_x{s}.csv", base * s, fmt="%.6f", delimiter=",", header="x,y",
                   comments="")
    for _ in range(repeat):
        for s in scales:
            res = run_command(["gcode", str(workdir / f"ellipse_x{s}.csv"), "--closed", "--tool-diameter", "6",
                               "-o", str(workdir / f"e{s}.nc"), "--force", "--quiet"], workdir)
            if res.get("failed"):
                print(f"  ellipse x{s:<5} refused: {res['failed'][0]}")
                continue
            res["blocks"] = sum(1 for ln in (workdir / f"e{s}.nc").read_text().splitlines()
                                if ln[:2] in ("G1", "G2", "G3"))
            runs[s].append(res)
    base_wall = None
    for s in scales:
        if not runs[s]:
            continue
        wall = _median(runs[s], "wall")
        base_wall = wall if base_wall is None else base_wall
        stages = {k: statistics.median(r["stages"].get(k, 0.0) for r in runs[s]) for k in runs[s][0]["stages"]}
        top = max(stages, key=stages.get)
        print(f"  ellipse x{s:<5} {wall:8.2f} s  ({wall / base_wall:6.2f}x of x1)"
              f"  peak {_median(runs[s], 'peak_mb'):6.0f} MB  {runs[s][0]['blocks']} moves;"
              f" toolpath {stages.get('toolpath', 0.0):.2f} s, gcode {stages.get('gcode', 0.0):.2f} s,"
              f" slowest stage {top}")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", default="100000,1000000,2000000")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--only", default="sizes,small,scale")
    a = ap.parse_args()
    only = set(a.only.split(","))
    global PYCACHE
    with tempfile.TemporaryDirectory() as d:
        d = Path(d)
        PYCACHE = d / "pycache"
        if "sizes" in only:
            sizes_table([int(s) for s in a.sizes.split(",")], a.repeat, d)
        if "small" in only:
            small_job(d)
        if "scale" in only:
            print(f"\nArc fit: one 100-point ellipse 80 x 50 mm scaled, pathgen gcode at 0.01 mm, 6 mm tool,"
                  f" median of {a.repeat}")
            scaled_ellipse(d, repeat=a.repeat)


if __name__ == "__main__":
    main()
