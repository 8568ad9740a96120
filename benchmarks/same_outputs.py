"""Same outputs before and after a speed change: write them all, then compare.

Runs the command line (in this process) on every sample, on the good and
regression files of ``tests/data`` and on a few generated outlines (dense
and noisy, inch, 10^5 points), for ``gcode`` (arcs and lines, outside and
inside), ``dxf`` and ``check --json``, and writes every file and every
command's stdout, stderr and exit status into a folder.  Run it once
before a change with ``--write DIR`` and after it with ``--compare DIR``:
the second run writes into a fresh folder and lists every file whose bytes
differ (nothing listed: byte-identical).

    PYTHONPATH=. python3 benchmarks/same_outputs.py --write /tmp/before
    PYTHONPATH=. python3 benchmarks/same_outputs.py --compare /tmp/before
"""

from __future__ import annotations

import argparse
import filecmp
import io
import sys
import tempfile
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent


def _generated(folder: Path) -> list[Path]:
    """Invented outlines a machinist brings: dense and noisy, inch, large."""
    rng = np.random.default_rng(15)
    out = []
    th = np.linspace(0.0, 2 * np.pi, 20_000, endpoint=False)
    r = 40.0 + 5.0 * np.sin(3 * th) + 1.5 * np.cos(8 * th)
    pts = np.column_stack([r * np.cos(th), r * np.sin(th)]) + rng.normal(0, 0.002, (th.size, 2))
    p = folder / "noisy_cam_20k.csv"
    np.savetxt(p, np.round(pts, 3), fmt="%.3f", delimiter=",", header="x,y", comments="")
    out.append(p)
    th = np.linspace(0.0, 2 * np.pi, 400, endpoint=False)
    pts = np.column_stack([2.0 * np.cos(th), 1.2 * np.sin(th)])
    p = folder / "ellipse_inch.csv"
    np.savetxt(p, pts, fmt="%.6f", delimiter=",", header="# units: inch\nx,y", comments="")
    out.append(p)
    th = np.linspace(0.0, 2 * np.pi, 100_000, endpoint=False)
    r = 60.0 + 8.0 * np.sin(3 * th) + 3.0 * np.cos(7 * th)
    p = folder / "cam_100k.csv"
    np.savetxt(p, np.column_stack([r * np.cos(th), r * np.sin(th)]), fmt="%.10f", delimiter=",",
               header="x,y", comments="")
    out.append(p)
    return out


def _inputs(gen: Path) -> list[Path]:
    files = sorted((ROOT / "samples").glob("*.csv"))
    files += sorted(p for p in (ROOT / "tests" / "data" / "good").iterdir() if p.is_file())
    files += sorted((ROOT / "tests" / "data" / "regress").glob("*.csv"))
    return files + _generated(gen)


def _jobs(src: Path):
    """(name, argv) pairs for one input file; outputs go to {out}."""
    stem = src.stem
    base = [str(src), "--tool-diameter", "6", "--closed" if stem != "profile" else "--open"]
    if stem in {"ellipse_inch", "clockwise_inch"}:
        base = [str(src), "--tool-diameter", "0.25", "--units", "inch"]
    yield f"{stem}.arcs-out", ["gcode", *base, "-o", "{out}/%s.arcs-out.nc" % stem]
    yield f"{stem}.arcs-in", ["gcode", *base, "--side", "inside", "-o", "{out}/%s.arcs-in.nc" % stem]
    yield f"{stem}.lines-out", ["gcode", *base, "--moves", "lines", "-o", "{out}/%s.lines-out.nc" % stem]
    yield f"{stem}.router", ["gcode", *base, "--machine", str(ROOT / "samples" / "router.toml"),
                             "-o", "{out}/%s.router.nc" % stem]
    yield f"{stem}.dxf", ["dxf", *base, "-o", "{out}/%s.dxf" % stem]
    yield f"{stem}.check", ["check", *base, "--json"]


def write_all(out: Path) -> None:
    from pathgen.cli import main

    out.mkdir(parents=True, exist_ok=True)
    with tempfile.TemporaryDirectory() as gen:
        for src in _inputs(Path(gen)):
            for name, argv in _jobs(src):
                argv = [a.replace("{out}", str(out)) for a in argv]
                o, e = io.StringIO(), io.StringIO()
                rc = main(argv, out=o, err=e)
                text = o.getvalue().replace(str(out), "OUT").replace(gen, "GEN")
                etext = e.getvalue().replace(str(out), "OUT").replace(gen, "GEN")
                (out / f"{name}.stdout").write_text(f"exit {rc}\n{text}")
                (out / f"{name}.stderr").write_text(etext)
                print(f"{name}: exit {rc}", file=sys.stderr)


def compare(before: Path, write=None) -> int:
    """Write the outputs again (with ``write``, default this script's) into a
    fresh folder and list the files whose bytes differ from ``before``."""
    after = Path(tempfile.mkdtemp(prefix="after-"))
    (write or write_all)(after)
    names = sorted({p.name for p in before.iterdir()} | {p.name for p in after.iterdir()})
    bad = []
    for n in names:
        a, b = before / n, after / n
        if not (a.exists() and b.exists()) or not filecmp.cmp(a, b, shallow=False):
            bad.append(n)
    print(f"{len(names)} files compared, {len(bad)} differ (after: {after})")
    for n in bad:
        print("  differs:", n)
    return 1 if bad else 0


def main(write=None, doc=None) -> int:
    """--write DIR or --compare DIR with ``write`` (default this script's)."""
    write = write or write_all
    ap = argparse.ArgumentParser(description=(doc or __doc__).splitlines()[0])
    g = ap.add_mutually_exclusive_group(required=True)
    g.add_argument("--write", type=Path)
    g.add_argument("--compare", type=Path)
    a = ap.parse_args()
    if a.write:
        write(a.write)
        print(f"written to {a.write}")
        return 0
    return compare(a.compare, write)


if __name__ == "__main__":
    sys.exit(main())
