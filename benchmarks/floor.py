"""The floor: the least work any tool must do to go from points to a curve.

Read the CSV with numpy, fit the same spline with scipy's ``CubicSpline``
(chord-length parameters; periodic when the outline is closed, else
not-a-knot) and evaluate the value and the first two derivatives at 4
points per piece.  pathgen does all of this and more (checks, toolpath,
writers), so its time over the floor's, measured side by side, says how
much of its cost follows from the work itself.

    PYTHONPATH=. python3 benchmarks/floor.py POINTS.csv [--open]

Prints one line of JSON: the seconds spent importing, reading, fitting and
evaluating, and the whole (from the start of this script).
"""

from __future__ import annotations

import json
import sys
import time

T_START = time.perf_counter()


def floor(path: str, closed: bool = True) -> dict:
    t0 = time.perf_counter()
    import numpy as np
    from scipy.interpolate import CubicSpline

    t1 = time.perf_counter()
    pts = np.loadtxt(path, delimiter=",", skiprows=1, comments="#")
    t2 = time.perf_counter()
    if closed:
        pts = np.vstack([pts, pts[:1]])
    step = np.hypot(*np.diff(pts, axis=0).T)
    t = np.concatenate([[0.0], np.cumsum(step)])
    cs = CubicSpline(t, pts, bc_type="periodic" if closed else "not-a-knot")
    t3 = time.perf_counter()
    at = (t[:-1, None] + step[:, None] * np.array([0.125, 0.375, 0.625, 0.875])).ravel()
    value, d1, d2 = cs(at), cs(at, 1), cs(at, 2)
    t4 = time.perf_counter()
    return {"n": int(len(pts) - closed), "import": t1 - t0, "read": t2 - t1, "fit": t3 - t2,
            "evaluate": t4 - t3, "work": t4 - t1, "checksum": float(value.sum() + d1.sum() + d2.sum())}


def main() -> None:
    args = sys.argv[1:]
    closed = "--open" not in args
    path = next(a for a in args if not a.startswith("--"))
    out = floor(path, closed)
    out["whole"] = time.perf_counter() - T_START
    print(json.dumps(out))


if __name__ == "__main__":
    main()
