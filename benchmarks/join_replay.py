"""The offset join, the clearance and the program replay at large point counts,
this tree next to another one (``--base DIR``, e.g. a worktree of main),
measured side by side in one run.

For the closed invented cam outline of ``benchmarks/speed.py`` at each size,
``pathgen gcode`` (6 mm tool, 0.01 mm, arcs) runs under cProfile in a fresh
process per run, the trees taking turns; printed are the medians of each
stage's cumulative time, the ratio base/this, and each run's peak memory:

* ``assemble`` (the offset join) and ``regular_windows`` (its windows);
* ``clearance``: every clearance polyline built (``Probe.__init__``) plus
  every clearance measured (``Probe._measure``);
* ``check_program`` (the written program replayed), of which
  ``tool_center_polyline`` and ``replay_deviation``.

    PYTHONPATH=. python3 benchmarks/join_replay.py --base /tmp/main-tree
    PYTHONPATH=. python3 benchmarks/join_replay.py --sizes 100000 --repeat 1

The machine is shared: read ratios, never absolute times.
"""

from __future__ import annotations

import argparse
import json
import os
import statistics
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent

CHILD = r"""
import cProfile, json, pstats, resource, sys
import scipy.spatial, scipy.linalg, shapely  # imported before the profile: their import is not a stage's cost
from pathgen.cli import main
prof = cProfile.Profile()
prof.enable()
rc = main(sys.argv[2:])
prof.disable()
st = pstats.Stats(prof).stats
want = {"assemble": ("offset.py", "assemble"), "regular_windows": ("offset.py", "regular_windows"),
        "probe_init": ("clearance.py", "__init__"), "probe_measure": ("clearance.py", "_measure"),
        "check_program": ("check.py", "check_program"),
        "tool_center_polyline": ("replay.py", "tool_center_polyline"),
        "replay_deviation": ("replay.py", "replay_deviation")}
out = {k: 0.0 for k in want}
for (fn, _, name), (_, _, _, ct, _) in st.items():
    for k, (f, n) in want.items():
        if fn.endswith(f) and name == n:
            out[k] += ct
out["clearance"] = out.pop("probe_init") + out.pop("probe_measure")
out["peak_mb"] = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
out["rc"] = rc
out["tree"] = __import__("pathgen").__file__
json.dump(out, open(sys.argv[1], "w"))
"""

STAGES = ["assemble", "regular_windows", "clearance", "check_program", "tool_center_polyline",
          "replay_deviation", "peak_mb"]


def _run(tree: Path, csv: Path, tmp: Path) -> dict:
    res = tmp / "res.json"
    cmd = [sys.executable, "-c", CHILD, str(res), "gcode", str(csv), "--closed", "--tool-diameter", "6",
           "--tolerance", "0.01", "-o", str(tmp / "o.nc"), "--force", "--quiet"]
    subprocess.run(cmd, check=True, env={**os.environ, "PYTHONPATH": str(tree)}, capture_output=True, cwd=tree)
    out = json.loads(res.read_text())
    assert Path(out["tree"]).resolve().is_relative_to(tree), (out["tree"], tree)  # the tree asked for
    return out


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--base", type=Path, help="another tree to run side by side (e.g. a worktree of main)")
    ap.add_argument("--sizes", default="100000,1000000")
    ap.add_argument("--repeat", type=int, default=3)
    a = ap.parse_args(argv)
    sys.path.insert(0, str(ROOT / "benchmarks"))
    import numpy as np

    from speed import outline

    trees = [("this", ROOT)] + ([("base", a.base.resolve())] if a.base else [])
    with tempfile.TemporaryDirectory() as d:
        tmp = Path(d)
        for n in (int(s) for s in a.sizes.split(",")):
            csv = tmp / f"cam_{n}.csv"
            np.savetxt(csv, outline(n), fmt="%.10f", delimiter=",", header="x,y", comments="")
            runs = {name: [] for name, _ in trees}
            for _ in range(a.repeat):
                for name, tree in (trees if _ % 2 == 0 else trees[::-1]):
                    runs[name].append(_run(tree, csv, tmp))
            print(f"\n{n} points, medians of {a.repeat} (cProfile cumulative s; peak MB)")
            head = f"{'stage':<22}" + "".join(f"{name:>10}" for name, _ in trees)
            print(head + (f"{'base/this':>11}" if a.base else ""))
            for st in STAGES:
                med = {name: statistics.median(r[st] for r in runs[name]) for name, _ in trees}
                line = f"{st:<22}" + "".join(f"{med[name]:>10.3f}" for name, _ in trees)
                if a.base:
                    line += f"{med['base'] / max(med['this'], 1e-9):>11.1f}"
                print(line)


if __name__ == "__main__":
    main()
