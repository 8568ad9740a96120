"""Same outputs in mm and in inch before and after a change to where units are converted.

Writes, through the command line (in this process), the G-code, the report
(JSON and text), the DXF and the SVG picture of every sample in mm and in
inch (the sample points / 25.4 with ``--units inch``), the same with
``--compensation machine`` and with tabs, and of a plate drawn in a DXF
(holes, tabs) in mm and in inch.  Run it once with ``--write DIR`` before a
change and with ``--compare DIR`` after it: every file whose bytes differ
is listed (nothing listed: byte-identical).

    PYTHONPATH=. python3 benchmarks/units_outputs.py --write /tmp/units-before
    PYTHONPATH=. python3 benchmarks/units_outputs.py --compare /tmp/units-before
"""

from __future__ import annotations

import io
import sys
import tempfile
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
MM_PER_INCH = 25.4


def _inch_copy(src: Path, folder: Path) -> Path:
    """The sample's points divided by 25.4, written without a units line."""
    pts = np.loadtxt(src, delimiter=",", comments="#", skiprows=3)
    p = folder / f"{src.stem}_inch.csv"
    np.savetxt(p, pts / MM_PER_INCH, fmt="%.7f", delimiter=",", header="x,y", comments="")
    return p


def _plate(folder: Path, units: str) -> Path:
    """An invented mounting plate: rounded outline, four round holes, a slot."""
    import ezdxf

    k = 1.0 if units == "mm" else 1.0 / MM_PER_INCH
    doc = ezdxf.new("R2010")
    doc.units = ezdxf.units.MM if units == "mm" else ezdxf.units.IN
    msp = doc.modelspace()
    b = np.tan(np.pi / 8)
    w, h, r = 120.0, 80.0, 8.0
    pts = [(r, 0, 0), (w - r, 0, b), (w, r, 0), (w, h - r, b), (w - r, h, 0), (r, h, b), (0, h - r, 0), (0, r, b)]
    msp.add_lwpolyline([(x * k, y * k, bb) for x, y, bb in pts], format="xyb", close=True)
    for x, y in ((15.0, 15.0), (105.0, 15.0), (105.0, 65.0), (15.0, 65.0)):
        msp.add_circle((x * k, y * k), 4.0 * k)
    msp.add_line((45 * k, 35 * k), (75 * k, 35 * k))
    msp.add_arc((75 * k, 40 * k), 5 * k, -90, 90)
    msp.add_line((75 * k, 45 * k), (45 * k, 45 * k))
    msp.add_arc((45 * k, 40 * k), 5 * k, 90, 270)
    p = folder / f"plate_{units}.dxf"
    doc.saveas(p)
    return p


def _cases(gen: Path):
    """(name, points file, options) for every job."""
    for src in sorted((ROOT / "samples").glob("*.csv")):
        shape = ["--open"] if src.stem == "profile" else ["--closed"]
        mm = [str(src), *shape, "--tool-diameter", "6"]
        inch = [str(_inch_copy(src, gen)), *shape, "--units", "inch", "--tool-diameter", "0.25"]
        for u, base in (("mm", mm), ("inch", inch)):
            yield f"{src.stem}.{u}", base
            yield f"{src.stem}.{u}.machine", base + ["--compensation", "machine"]
            yield f"{src.stem}.{u}.router", base + ["--machine", str(ROOT / "samples" / "router.toml")]
            if src.stem != "profile":
                d = ["--depth", "6", "--step-down", "2"] if u == "mm" else ["--depth", "0.25", "--step-down", "0.1"]
                yield f"{src.stem}.{u}.tabs", base + d + ["--tabs", "3"]
    for u, tool, d in (("mm", "6", ["--depth", "6", "--step-down", "3"]),
                       ("inch", "0.25", ["--depth", "0.25", "--step-down", "0.125"])):
        base = [str(_plate(gen, u)), "--tool-diameter", tool, *d]
        # "plate_dxf", not "plate": the sample plate.csv's files are named "plate.*"
        yield f"plate_dxf.{u}", base
        yield f"plate_dxf.{u}.tabs", base + ["--tabs", "2"]
        yield f"plate_dxf.{u}.lines", base + ["--moves", "lines", "--lead", "line"]


def write_all(out: Path) -> None:
    from pathgen.cli import main

    out.mkdir(parents=True, exist_ok=True)
    with tempfile.TemporaryDirectory() as gen:
        for name, base in _cases(Path(gen)):
            cmds = (("gcode", ["gcode", *base, "-o", f"{out}/{name}.nc"]),
                    ("dxf", ["dxf", *base, "-o", f"{out}/{name}.dxf"]),
                    ("plot", ["plot", *base, "-o", f"{out}/{name}.svg"]),
                    ("check", ["check", *base]),
                    ("json", ["check", *base, "--json"]))
            if "--compensation" in base:  # a G-code option only
                cmds = cmds[:1]
            for cmd, argv in cmds:
                o, e = io.StringIO(), io.StringIO()
                rc = main(argv, out=o, err=e)
                text = o.getvalue().replace(str(out), "OUT").replace(gen, "GEN").replace(str(ROOT), "ROOT")
                etext = e.getvalue().replace(str(out), "OUT").replace(gen, "GEN").replace(str(ROOT), "ROOT")
                (out / f"{name}.{cmd}.stdout").write_text(f"exit {rc}\n{text}")
                (out / f"{name}.{cmd}.stderr").write_text(etext)
                print(f"{name} {cmd}: exit {rc}", file=sys.stderr)


if __name__ == "__main__":
    from same_outputs import main  # the same --write / --compare, with this script's outputs

    sys.exit(main(write_all, __doc__))
