"""The sample parts: invented outlines of our own, made deterministically.

Every sample is built from exact geometry (straight edges and circular
arcs, or a smooth function), sampled along its length the way a person
with a probe or a tracing would sample it, and, where a probe would add
it, given seeded Gaussian noise.  The same call always writes the same
bytes, so ``samples/`` in the repository is this module's output and a
test checks that it still is.

The parts (lengths in mm)
-------------------------
bracket
    An L-shaped bracket, 120 x 80, outer corners rounded (R 8), inner
    corner filleted (R 10), probed on a worn part: the long bottom edge has
    a shallow dent (1.2 deep, about 20 wide).  Closed, ~300 points,
    probe noise sigma 0.005.
profile
    An open moulding edge, 130 long: a rounded step and a cove, traced
    from a template.  ~160 points, noise sigma 0.01.
plate
    A mounting plate 140 x 70 with a 30 x 15 notch in its bottom edge.
    Straight edges, sharp corners given exactly, points every ~5 along the
    edges, no noise (taken from a drawing).
hook
    A hanger plate 60 x 40 (corners R 6) with a slot 4 wide whose rounded
    end (inner radius 2) catches a wire: too tight for a 6 mm cutter.
    Closed, points ~1 apart (0.4 around the slot end), noise sigma 0.003.

``pathgen demo DIR`` writes these files and a machine profile into DIR
and runs the whole job on them (see :func:`run_demo`).  Regenerate
``samples/`` with ``python -m pathgen.demo samples``.

Examples
--------
>>> p = make_part("plate")
>>> p.shape, p.dtype
((90, 2), dtype('float64'))
"""

from __future__ import annotations

import math
import os
from pathlib import Path

__all__ = ["PARTS", "make_part", "sample_text", "write_samples", "run_demo", "ROUTER_TOML"]

#: name -> (closed, one-line description)
PARTS = {
    "bracket": (True, "L-shaped bracket probed on a worn part (dent on the bottom edge)"),
    "profile": (False, "open moulding edge traced from a template"),
    "plate": (True, "mounting plate with a notch, corners exact, from a drawing"),
    "hook": (True, "hanger plate with a 4 mm wire slot (inner radius 2 mm)"),
}

# A copy of samples/router.toml (the machine profile sample), so that an
# installed pathgen can write it too; a test keeps the two the same.
ROUTER_TOML = """\
# Machine profile: a small gantry router (an invented example for pathgen).
# Load it with `pathgen ... --machine samples/router.toml` or
# pathgen.load_machine("samples/router.toml").  Every key is optional: a
# missing key takes pathgen's conservative default (shown in brackets).
# Unknown keys are refused, so a typo cannot slip through.
# These numbers are examples, not your machine: take yours from its manual.

name = "small router"

# Unit of the lengths below: "mm" or "inch".  Feeds are per minute,
# acceleration per second squared.  ["mm"]
units = "mm"

# Highest cutting feed the machine runs, mm/min.  [3000]
highest_feed = 4000.0

# Path acceleration limit, mm/s², used both for speeding up along the path
# and for the centripetal acceleration v²/R on curves.  [500]
acceleration = 300.0

# Motion blocks (G-code lines) the controller processes per second.  [250]
blocks_per_second = 400.0

# Rapid traverse speed, mm/min (for the cycle-time estimate).  [5000]
rapid_speed = 8000.0
"""


# -- geometry helpers --------------------------------------------------------
def _line(p0, p1):
    return ("line", tuple(map(float, p0)), tuple(map(float, p1)))


def _arc(center, radius, a0_deg, sweep_deg):
    """Arc around ``center``, from angle a0 (degrees), sweeping ``sweep``
    degrees (positive counter-clockwise)."""
    return ("arc", tuple(map(float, center)), float(radius), math.radians(a0_deg), math.radians(sweep_deg))


def _seg_length(seg) -> float:
    if seg[0] == "line":
        return math.dist(seg[1], seg[2])
    return abs(seg[2] * seg[4])


def _seg_points(seg, count):
    """``count`` points from the segment's start (its end excluded)."""
    import numpy as np

    u = np.arange(count) / count
    if seg[0] == "line":
        p0, p1 = np.array(seg[1]), np.array(seg[2])
        return p0 + u[:, None] * (p1 - p0)
    _, c, r, a0, sw = seg
    a = a0 + u * sw
    return np.column_stack([c[0] + r * np.cos(a), c[1] + r * np.sin(a)])


def _sample_loop(segments, spacing, *, fine=None):
    """Sample a closed chain of segments about ``spacing`` apart.

    ``fine`` maps a segment index to a finer spacing (dense probing near a
    tight spot).  Segment ends must meet; the loop's last point is not
    repeated.
    """
    import numpy as np

    fine = fine or {}
    out = []
    for i, seg in enumerate(segments):
        step = fine.get(i, spacing)
        count = max(1, math.ceil(_seg_length(seg) / step - 1e-9))
        out.append(_seg_points(seg, count))
    return np.vstack(out)


def _round_rect_with_slot():
    """Segments of the hanger plate (hook), counter-clockwise."""
    w, h, r = 60.0, 40.0, 6.0
    xs, rs, fr, depth = 40.0, 2.0, 1.0, 12.0  # slot centre x, end radius, mouth fillet, depth
    yb = h - depth  # centre of the slot's rounded end
    return [
        _line((r, 0), (w - r, 0)),
        _arc((w - r, r), r, -90, 90),
        _line((w, r), (w, h - r)),
        _arc((w - r, h - r), r, 0, 90),
        _line((w - r, h), (xs + rs + fr, h)),
        _arc((xs + rs + fr, h - fr), fr, 90, 90),  # mouth, convex
        _line((xs + rs, h - fr), (xs + rs, yb)),
        _arc((xs, yb), rs, 0, -180),  # slot end, concave, R 2
        _line((xs - rs, yb), (xs - rs, h - fr)),
        _arc((xs - rs - fr, h - fr), fr, 0, 90),  # mouth, convex
        _line((xs - rs - fr, h), (r, h)),
        _arc((r, h - r), r, 90, 90),
        _line((0, h - r), (0, r)),
        _arc((r, r), r, 180, 90),
    ]


def _probe_noise(seed: int, sigma: float, shape, on: bool):
    """Seeded Gaussian noise of ``sigma`` mm (zeros when ``on`` is false)."""
    import numpy as np

    if not on:
        return np.zeros(shape)
    return np.random.default_rng(seed).normal(0.0, sigma, shape)


def _bracket_segments():
    """Segments of the L-bracket, counter-clockwise from the bottom-left."""
    ro, ri = 8.0, 10.0  # outer corner radius, inner fillet radius
    return [
        _line((ro, 0), (120 - ro, 0)),
        _arc((120 - ro, ro), ro, -90, 90),
        _line((120, ro), (120, 40 - ro)),
        _arc((120 - ro, 40 - ro), ro, 0, 90),
        _line((120 - ro, 40), (60 + ri, 40)),
        _arc((60 + ri, 40 + ri), ri, -90, -90),  # inside corner, concave
        _line((60, 40 + ri), (60, 80 - ro)),
        _arc((60 - ro, 80 - ro), ro, 0, 90),
        _line((60 - ro, 80), (ro, 80)),
        _arc((ro, 80 - ro), ro, 90, 90),
        _line((0, 80 - ro), (0, ro)),
        _arc((ro, ro), ro, 180, 90),
    ]


def _bracket(noise=True):
    import numpy as np

    p = _sample_loop(_bracket_segments(), 1.3)
    # wear: a smooth dent pushed into the bottom edge
    bottom = p[:, 1] < 1e-9
    dent = 1.2 * np.exp(-0.5 * ((p[:, 0] - 70.0) / 5.0) ** 2)
    p[bottom, 1] += dent[bottom]
    return p + _probe_noise(20261, 0.005, p.shape, noise)


def _profile(noise=True):
    import numpy as np

    x = np.linspace(0.0, 130.0, 20001)
    y = 15.0 + 6.0 * np.tanh((x - 40.0) / 8.0) - 4.0 * np.exp(-0.5 * ((x - 88.0) / 9.0) ** 2)
    s = np.concatenate([[0.0], np.cumsum(np.hypot(np.diff(x), np.diff(y)))])
    ss = np.linspace(0.0, s[-1], 160)
    p = np.column_stack([np.interp(ss, s, x), np.interp(ss, s, y)])
    return p + _probe_noise(20262, 0.01, p.shape, noise)


def _plate(noise=True):  # from a drawing: never noisy
    import numpy as np

    corners = [(0, 0), (55, 0), (55, 15), (85, 15), (85, 0), (140, 0), (140, 70), (0, 70)]
    segs = [_line(corners[i], corners[(i + 1) % len(corners)]) for i in range(len(corners))]
    return np.asarray(_sample_loop(segs, 5.0))


def _hook(noise=True):
    import numpy as np

    segs = _round_rect_with_slot()
    p = _sample_loop(segs, 1.0, fine={5: 0.4, 6: 0.5, 7: 0.4, 8: 0.5, 9: 0.4})
    return p + _probe_noise(20264, 0.003, p.shape, noise)


_MAKERS = {"bracket": _bracket, "profile": _profile, "plate": _plate, "hook": _hook}


def make_part(name: str, *, noise: bool = True):
    """The sample part ``name`` as an (n, 2) float64 array in mm, rounded
    to 4 decimals (what its file holds).

    ``noise=False`` gives the same points without the probe noise (the
    exact geometry, sampled the same way), to tell what the noise costs.
    """
    import numpy as np

    from ._options import check_option

    check_option("part", name, PARTS)
    p = np.round(_MAKERS[name](noise=bool(noise)), 4)
    p[p == 0.0] = 0.0  # no negative zero
    return p


def sample_text(name: str) -> str:
    """The CSV text of sample ``name``: a comment, the units, ``x,y``, rows.

    A closed part's last row repeats its first (that is what marks a points
    file closed).
    """
    p = make_part(name)
    closed, what = PARTS[name]
    kind = "closed" if closed else "open"
    lines = [f"# {name}: {what} ({kind}, invented part)", "# units: mm", "x,y"]
    rows = p.tolist()
    if closed:  # a closed outline repeats its first point at the end
        rows.append(rows[0])
    lines += [f"{x:.4f},{y:.4f}" for x, y in rows]
    return "\n".join(lines) + "\n"


def _atomic_write(path: Path, text: str) -> None:
    tmp = path.with_name(f".{path.name}.tmp{os.getpid()}")
    try:
        with open(tmp, "w", encoding="utf-8", newline="\n") as f:
            f.write(text)
        os.replace(tmp, path)
    finally:
        if tmp.exists():
            tmp.unlink()


def _refuse_existing(paths, force: bool) -> None:
    from .errors import InputError

    if force:
        return
    for p in paths:
        if p.exists():
            raise InputError(f"{p} already exists; pass force=True (--force) to overwrite it")


def write_samples(directory, *, force: bool = False, machine: bool = False) -> list[Path]:
    """Write every sample part as ``DIR/<name>.csv`` (and, with
    ``machine=True``, the router profile as ``DIR/router.toml``).

    Existing files are refused (before anything is written) unless
    ``force``.  Returns the paths written, parts first.
    """
    d = Path(directory)
    if d.exists() and not d.is_dir():
        from .errors import InputError

        raise InputError(f"{d}: exists and is not a folder")
    texts = {d / f"{name}.csv": sample_text(name) for name in PARTS}
    if machine:
        texts[d / "router.toml"] = ROUTER_TOML
    _refuse_existing(texts, force)
    d.mkdir(parents=True, exist_ok=True)
    for path, text in texts.items():
        _atomic_write(path, text)
    return list(texts)


def run_demo(directory, *, force: bool = False, jobs=None, progress=None, **options) -> list[dict]:
    """Write the sample parts and a router profile into ``directory`` and
    run the whole job on each part: program, report, drawing, picture.

    Unless given in ``options``, the job uses the router profile written
    there and a 6 mm tool, so the hook's 2 mm slot shows a spot the tool
    cannot reach.  Returns the batch rows (see
    :func:`pathgen.pipeline.run_batch`).
    """
    from .pipeline import OUTPUT_SUFFIXES, run_batch

    d = Path(directory)
    outputs = tuple(OUTPUT_SUFFIXES)
    names = [d / f"{n}{suffix}" for n in PARTS for suffix in (*OUTPUT_SUFFIXES.values(), ".report.txt")]
    _refuse_existing(names, force)
    paths = write_samples(d, force=force, machine=True)
    options.setdefault("machine", d / "router.toml")
    options.setdefault("tool_diameter", 6.0)
    return run_batch(d, d, files=paths[:-1], jobs=jobs, outputs=outputs, progress=progress,
                     force=force, **options)


if __name__ == "__main__":  # pragma: no cover - regenerate samples/
    import sys

    for p in write_samples(sys.argv[1] if len(sys.argv) > 1 else "samples", force=True):
        print(p)
