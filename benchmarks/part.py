"""The part job on plates with a grid of holes, measured side by side.

For an invented plate (rounded square, R5 corners) with k × k round holes
(R4, 20 mm pitch) cut with a 6 mm tool, prints the wall time of the whole
part job (program written) and each stage's share, with the time per
outline: the stages that exist only for parts (nesting, the clearance check
against the part, the order) should stay a small share as the count grows.
2-core shared machines are noisy: read the shares and ratios, not the
absolute numbers.

Run:  python benchmarks/part.py [--quick]
"""

from __future__ import annotations

import argparse
import math
import tempfile
import time
from pathlib import Path

import ezdxf

from pathgen.pipeline import run


def plate(path: Path, k: int) -> Path:
    doc = ezdxf.new("R2010")
    msp = doc.modelspace()
    w, r, b = 20.0 * k + 20.0, 5.0, math.tan(math.pi / 8)
    msp.add_lwpolyline([(r, 0, 0), (w - r, 0, b), (w, r, 0), (w, w - r, b), (w - r, w, 0), (r, w, b),
                        (0, w - r, 0), (0, r, b)], format="xyb", close=True)
    for i in range(k):
        for j in range(k):
            msp.add_circle((20.0 + 20.0 * i, 20.0 + 20.0 * j), 4.0)
    doc.saveas(path)
    return path


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--quick", action="store_true", help="2x2 and 4x4 holes only")
    sizes = (2, 4) if ap.parse_args().quick else (2, 4, 8)
    print(f"{'outlines':>8} {'total s':>8} {'s/outline':>9}  shares of the total")
    with tempfile.TemporaryDirectory() as d:
        for k in sizes:
            p = plate(Path(d) / f"plate{k}.dxf", k)
            t0 = time.perf_counter()
            res = run(p, tool_diameter=6.0, depth=3.0, gcode=Path(d) / f"plate{k}.nc", force=True)
            total = time.perf_counter() - t0
            n = len(res.outlines)
            shares = ", ".join(f"{s} {v / total:.0%}" for s, v in sorted(res.timings.items(), key=lambda kv: -kv[1]))
            print(f"{n:>8} {total:>8.2f} {total / n:>9.3f}  {shares}")


if __name__ == "__main__":
    main()
