"""Deviation of the written programs, read back from the text.

Six smooth test shapes (ellipse, superellipse, epitrochoid, limaçon, cam,
spiral) x tolerances 0.1, 0.01, 0.001 mm x outside / inside, 6 mm tool:
each program is written by ``pathgen.run`` (which replays it before the
rename) and then read again by the tests' independent interpreter
(``tests/gcode_reader.py``); its cutting moves (leads left out) are
measured against a dense polyline of the exact tool-center curve, both
ways.  Printed per case: the deviation over the tolerance (independent and
as the header states it), the decimals, and the time of the replay as a
share of the whole run.

    PYTHONPATH=. python3 benchmarks/written.py
"""

from __future__ import annotations

import re
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tests"))

import gcode_reader as gr  # noqa: E402
from test_verify import SHAPES, _independent_deviation, _shape  # noqa: E402

from pathgen.pipeline import run  # noqa: E402


def main():
    tmp = Path(tempfile.mkdtemp())
    ok = total = 0
    print(f"{'shape':13s} {'side':8s} {'tol':>6s} {'dec':>3s} {'indep/tol':>9s} {'header/tol':>10s} "
          f"{'replay s':>8s} {'run s':>6s}")
    for name in SHAPES:
        pts = _shape(name)
        if name != "spiral":
            pts = np.vstack([pts, pts[:1]])
        src = tmp / f"{name}.csv"
        np.savetxt(src, pts, delimiter=",", fmt="%.9f")
        for side in ("outside", "inside"):
            for tol in (0.1, 0.01, 0.001):
                nc = tmp / f"{name}-{side}-{tol}.nc"
                t0 = time.perf_counter()
                try:
                    res = run(src, tool_diameter=6.0, side=side, tolerance=tol, gcode=nc)
                except Exception as exc:  # a refusal is a result too
                    print(f"{name:13s} {side:8s} {tol:6g} refused: {exc}")
                    total += 1
                    continue
                wall = time.perf_counter() - t0
                text = nc.read_text()
                to_curve, to_moves = _independent_deviation(text, res.contour, res.toolpath.info["offset"], tol)
                indep = max(to_curve, to_moves if not res.toolpath.info["trimmed"] else 0.0)
                stated = float(re.search(r"deviation from the tool-center curve (\S+) mm", text)[1])
                dec = max(len(n.split(".")[1]) for _, l, n in gr.read(text).numbers if l in "XY" and "." in n)
                total += 1
                ok += indep <= tol
                print(f"{name:13s} {side:8s} {tol:6g} {dec:3d} {indep / tol:9.4f} {stated / tol:10.4f} "
                      f"{res.timings.get('gcode', 0):8.2f} {wall:6.2f}")
    print(f"written deviation within the tolerance: {ok}/{total}")


if __name__ == "__main__":
    main()
