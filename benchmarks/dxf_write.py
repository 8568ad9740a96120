"""DXF writing: the LWPOLYLINE built by ezdxf's documented add_lwpolyline
against pathgen's bulk vertex assignment, side by side in one run; and the
time of write_dxf for contours of growing size.

    python benchmarks/dxf_write.py [vertices ...]
"""

from __future__ import annotations

import sys
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np
from _timing import median_time




def polyline_ratio(n: int):
    import ezdxf

    a = np.linspace(0, 2 * np.pi, n, endpoint=False)
    verts = np.zeros((n, 5))
    verts[:, 0], verts[:, 1], verts[:, 4] = 50 * np.cos(a), 50 * np.sin(a), np.tan(2 * np.pi / n / 4)

    def documented():
        doc = ezdxf.new("R2010", setup=False)
        doc.modelspace().add_lwpolyline(verts.tolist(), format="xyseb", close=True)

    def bulk():
        doc = ezdxf.new("R2010", setup=False)
        lw = doc.modelspace().add_lwpolyline([])
        lw.lwpoints.values = verts
        lw.closed = True

    tb = median_time(bulk)
    td = median_time(documented, repeat=1 if n > 20_000 else 3)
    print(f"{n:>9} {td:>14.4f} {tb:>10.4f} {td / tb:>8.0f}")


def write_times(n: int):
    from pathgen.export.dxf import write_dxf
    from pathgen.path.build import contour_moves
    from pathgen.spline import fit

    t = np.linspace(0, 2 * np.pi, n, endpoint=False)
    r = 50 + 3 * np.sin(7 * t)
    contour = fit(np.column_stack([r * np.cos(t), r * np.sin(t)]), closed=True)
    arcs = contour_moves(contour, tolerance=0.01)
    with tempfile.TemporaryDirectory() as d, warnings.catch_warnings():
        warnings.simplefilter("ignore")
        t0 = time.perf_counter()
        write_dxf(Path(d) / "a.dxf", contour, arcs=arcs, points=np.empty((0, 2)))
        t1 = time.perf_counter()
        write_dxf(Path(d) / "b.dxf", contour, arcs=arcs, points=contour.points)
        t2 = time.perf_counter()
        size = (Path(d) / "a.dxf").stat().st_size
    print(f"{n:>9} {len(arcs):>6} {t1 - t0:>14.3f} {t2 - t1:>16.3f} {size / 1e6:>8.2f}")


def main(argv):
    sizes = [int(a) for a in argv] or [1_000, 10_000]
    print("LWPOLYLINE: documented add_lwpolyline vs bulk assignment (s, median)")
    print(f"{'vertices':>9} {'add_lwpolyline':>14} {'bulk':>10} {'ratio':>8}")
    for n in sizes:
        polyline_ratio(n)
    print("\nwrite_dxf of a closed contour (spline + arc polyline), s")
    print(f"{'points':>9} {'arcs':>6} {'without points':>14} {'with POINT each':>16} {'MB':>8}")
    for n in sizes + [100_000]:
        write_times(n)


if __name__ == "__main__":
    main(sys.argv[1:])
