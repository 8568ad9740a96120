"""A whole part: several closed outlines, their nesting, sides and order.

Reading
-------
:func:`read_part` reads every closed outline of an input:

* a DXF drawing: every closed entity and every chain of open entities
  (see :mod:`pathgen.drawing`), arcs kept exact;
* a text file of points holding several outlines, in either form:

  - **blocks**: the outlines one after another, separated by one or more
    blank lines (comment lines starting with ``#`` do not separate); every
    block has at least 3 points, else the blank lines are ignored and the
    file holds one outline, as before;
  - **outline column**: a header line naming the columns ``x``, ``y`` and
    ``outline`` (in any order, separated like the numbers); rows with the
    same outline number form one outline, in file order.

  Every outline of a part is closed (a repeated first point is dropped).

Nesting and sides
-----------------
An outline's *level* is the number of other outlines around it (shapely
containment, sources: shapely).  Level 0 is an outer outline, cut
outside; level 1 a hole, cut inside; level 2 an island in a hole, cut
outside again; and so on.  Outlines whose boundaries cross or touch are
refused, naming both.

Order
-----
Inner features first, so the part stays held: an outline is cut only
after every outline inside it.  Among the outlines ready to cut, the one
whose start is nearest to where the tool stands goes next (nearest
neighbour, from the program origin).
"""

from __future__ import annotations

import math
import os
import re
from dataclasses import dataclass, field

import numpy as np

from .errors import InputError

__all__ = ["PartOutline", "read_part", "nest", "cut_order", "is_part_input", "text_outlines"]


@dataclass(frozen=True)
class PartOutline:
    """One closed outline of a part.

    number : 1-based, in input order.
    where : what it came from ("part.dxf CIRCLE 2A on layer 'HOLES'",
        "part.csv lines 4-120").
    layer : the DXF layer, or "" for text files.
    shape : the drawn :class:`pathgen.drawing.Shape`, or None for points.
    outline : the cleaned :class:`pathgen.points.Outline`, or None for drawings.
    """

    number: int
    where: str
    layer: str = ""
    shape: object = None
    outline: object = None

    def polygon_points(self, step: float = 1e-3) -> np.ndarray:
        """Polygon vertices (mm): the drawn outline within ``step``, or the points."""
        if self.shape is not None:
            return self.shape.polygon_points(step)
        return np.asarray(self.outline.points)


#: a blank line followed by a line holding data (not a comment)
_BLANK_BETWEEN = re.compile(r"\n[ \t]*\n(?:[ \t]*(?:#[^\n]*)?\n)*[ \t]*[^\s#]")


def _head_lines(text: str):
    """The lines of ``text`` one at a time, without splitting all of it."""
    pos = 0
    while pos <= len(text):
        nl = text.find("\n", pos)
        nl = len(text) if nl < 0 else nl
        yield text[pos:nl]
        pos = nl + 1


def _split_fields(line: str) -> list[str]:
    for sep in (";", "\t", ","):
        if sep in line:
            return [t.strip() for t in line.split(sep)]
    return line.split()


def text_outlines(path) -> tuple[list, list] | None:
    """The outlines of a text file holding several, or None when it holds one.

    Returns (blocks, steps): blocks of (points (n, 2), line numbers (n,)).
    Raises InputError naming the file and line for a value that is not a
    number or a bad outline column.
    """
    path = os.fspath(path)
    name = os.path.basename(path)
    try:
        with open(path, "rb") as f:
            raw = f.read()
    except OSError as exc:
        raise InputError(f"{name}: cannot read the file ({exc.strerror})") from None
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        return None  # the single-outline reader explains
    if "\r" in text:
        text = text.replace("\r\n", "\n").replace("\r", "\n")
    # fast answer for the usual file of one outline: no outline column in the
    # first content line and no blank line between content lines
    first_text = next((ln.split("#", 1)[0].strip() for ln in _head_lines(text)
                       if ln.split("#", 1)[0].strip()), None)
    if first_text is None:
        return None
    if "outline" not in first_text.lower() and not _BLANK_BETWEEN.search(text, text.find(first_text)):
        return None
    lines = text.split("\n")
    content = [(i + 1, ln.split("#", 1)[0].strip()) for i, ln in enumerate(lines)]
    first = next(((n, s) for n, s in content if s), None)
    head = [t.lower() for t in _split_fields(first[1])]
    if "outline" in head:
        return _by_column(content, first[0], head, name)
    blocks, cur, blank = [], [], False
    for n, s in content:
        if n == first[0] and not any(_number(t) is not None for t in _split_fields(s)):
            continue  # a header
        if not lines[n - 1].strip():
            blank = True
            continue
        if not s:
            continue  # a comment line
        if blank and cur:
            blocks.append(cur)
            cur = []
        blank = False
        cur.append((n, s))
    if cur:
        blocks.append(cur)
    if len(blocks) < 2 or min(len(b) for b in blocks) < 3:
        return None  # one outline with blank lines in it (a block too short to be an outline)
    out = []
    for b in blocks:
        rows = []
        for n, s in b:
            toks = _split_fields(s)
            vals = [_number(t) for t in toks[:2]]
            if len(toks) < 2 or None in vals:
                raise InputError(f"{name} line {n}: {s!r} is not x y (two numbers)")
            rows.append(vals)
        out.append((np.array(rows, float), np.array([n for n, _ in b])))
    return out, [f"read {len(out)} outlines from {name}, separated by blank lines"]


def _number(tok: str):
    try:
        v = float(tok)
    except ValueError:
        return None
    return v if math.isfinite(v) else None


def _by_column(content, header_line, head, name):
    try:
        ix, iy, io = head.index("x"), head.index("y"), head.index("outline")
    except ValueError:
        raise InputError(f"{name} line {header_line}: the header names an outline column; it also "
                         f"needs columns named x and y, got {', '.join(head)}") from None
    groups: dict[int, list] = {}
    for n, s in content:
        if n <= header_line or not s:
            continue
        toks = _split_fields(s)
        if len(toks) != len(head):
            raise InputError(f"{name} line {n}: {len(toks)} values, expected {len(head)} "
                             f"({', '.join(head)})")
        x, y, o = _number(toks[ix]), _number(toks[iy]), _number(toks[io])
        if x is None or y is None:
            raise InputError(f"{name} line {n}: x and y must be finite numbers, got {s!r}")
        if o is None or o != int(o):
            raise InputError(f"{name} line {n}: the outline number must be a whole number, got {toks[io]!r}")
        groups.setdefault(int(o), []).append((x, y, n))
    if not groups:
        raise InputError(f"{name}: a header and no points after it")
    out = [(np.array([g[:2] for g in rows], float), np.array([g[2] for g in rows]))
           for _, rows in sorted(groups.items(), key=lambda kv: kv[1][0][2])]
    return out, [f"read {len(out)} outline{'s' if len(out) != 1 else ''} from {name} by its outline column"]


def is_part_input(path, layer=None) -> bool:
    """True when ``path`` holds a part rather than one outline of points:
    a DXF with drawn entities (lines, arcs, circles, ellipses, splines,
    polylines with bulges) or two or more closed polylines (on ``layer``
    when it holds any), or a text file with several outlines.  Open
    polylines without bulges and POINT entities stay outlines of points."""
    path = os.fspath(path)
    if path.lower().endswith(".dxf"):
        try:
            import ezdxf

            msp = ezdxf.readfile(path).modelspace()
        except Exception:
            return False  # the points reader explains
        verdict = _drawing_kind(msp, layer)
        if verdict is None and layer is not None:
            verdict = _drawing_kind(msp, None)  # nothing on that layer: the part reader lists the layers
        return bool(verdict)
    try:
        return text_outlines(path) is not None
    except InputError:
        return True  # the part reader names the bad line


def _drawing_kind(msp, layer):
    """True (a part), False (outlines of points) or None (nothing on ``layer``)."""
    closed = seen = 0
    for e in msp:
        if layer is not None and e.dxf.get("layer", "0") != layer:
            continue
        kind = e.dxftype()
        if kind in ("CIRCLE", "ARC", "LINE", "ELLIPSE", "SPLINE"):
            return True
        if kind == "LWPOLYLINE":
            seen += 1
            if any(b != 0 for *_, b in e.get_points("xyb")):
                return True
            closed += bool(e.closed)
        elif kind == "POLYLINE" and e.is_2d_polyline:
            seen += 1
            if any(v.dxf.get("bulge", 0.0) != 0 for v in e.vertices):
                return True
            closed += bool(e.is_closed)
        elif kind in ("POINT", "POLYLINE"):
            seen += 1
    return None if not seen else closed > 1


def read_part(path, *, units: str = "mm", layers=None, tolerance: float = 0.01, gap=None):
    """Every closed outline of a part file, as :class:`PartOutline` objects.

    Returns (outlines, steps, warnings).
    """
    from ._options import UNITS, check_option
    from .points import clean_points

    check_option("units", units, UNITS)
    path = os.fspath(path)
    name = os.path.basename(path)
    if not os.path.isfile(path):
        raise InputError(f"{name}: no such file ({path})")
    warnings = []
    if path.lower().endswith(".dxf"):
        from .drawing import JOIN_GAP, read_drawing

        shapes, steps, declared = read_drawing(path, units=units, layers=layers, tolerance=tolerance,
                                               gap=JOIN_GAP if gap is None else gap)
        if declared is not None and declared != units:
            warnings.append(f"{name} declares its units as {declared} ($INSUNITS) but "
                            f"units={units!r} was given; read as {units}")
        outs = [PartOutline(i + 1, s.where, s.layer, shape=s) for i, s in enumerate(shapes)]
        return outs, steps, warnings
    if layers is not None:
        raise InputError(f"{name}: layers apply to DXF drawings only")
    found = text_outlines(path)
    if found is None:
        from .points import read_points

        o = read_points(path, units=units, closed=True)
        return [PartOutline(1, f"{name}", outline=o)], list(o.steps), list(o.warnings)
    blocks, steps = found
    outs = []
    for i, (pts, nums) in enumerate(blocks):
        where = f"{name} lines {nums[0]}-{nums[-1]}"
        if len(pts) < 3:
            raise InputError(f"{where}: outline {i + 1} has {len(pts)} point{'s' if len(pts) != 1 else ''}; "
                             "a closed outline needs at least 3")
        o = clean_points(pts, closed=True, units=units, source=name, line_numbers=nums)
        warnings.extend(o.warnings)
        outs.append(PartOutline(i + 1, where, outline=o))
    return outs, steps, warnings


def nest(outlines, *, step: float = 1e-3) -> list[int]:
    """Level of each outline: how many others lie around it.

    Raises InputError naming both outlines when two boundaries cross or touch.
    """
    import shapely

    polys = [shapely.Polygon(o.polygon_points(step)) for o in outlines]
    for k, (o, p) in enumerate(zip(outlines, polys)):
        if not p.is_valid and o.shape is None:
            # points whose noise is as large as their spacing cross their own
            # path in small loops: the outline they trace is looked at on
            # every k-th point, k the points per chord of the fit's parameter
            from .noise import chord_span, estimate_noise
            from .simple import crossing

            pts = np.asarray(o.outline.points)
            noise = estimate_noise(pts, True, quantization=getattr(o.outline, "quantization", None))
            span = chord_span(noise.sigma, noise.spacing_median, len(pts)) if noise.smooth else 1
            c = crossing(pts)
            if span > 1 and c is not None and c.local and crossing(pts, step=span) is None:
                polys[k] = p = shapely.Polygon(pts[::span])
        if not p.is_valid:
            raise InputError(f"{o.where}: outline {o.number} crosses itself; a program cannot cut it")
    shapely.prepare(polys)
    n = len(polys)
    levels = [0] * n
    for i in range(n):
        for j in range(i + 1, n):
            a, b = polys[i], polys[j]
            if a.boundary.intersects(b.boundary):
                x = a.boundary.intersection(b.boundary).representative_point()
                raise InputError(f"outline {outlines[i].number} ({outlines[i].where}) and outline "
                                 f"{outlines[j].number} ({outlines[j].where}) cross or touch near "
                                 f"({x.x:.4f}, {x.y:.4f}) mm; a part's outlines must lie apart")
            if a.contains(b):
                levels[j] += 1
            elif b.contains(a):
                levels[i] += 1
    return levels


def side_of(level: int) -> str:
    """Outer outlines (even level) are cut outside, holes (odd) inside."""
    return "outside" if level % 2 == 0 else "inside"


def enclosed(outlines, levels) -> list[list[int]]:
    """For each outline, the indices of the outlines that lie inside it."""
    import shapely

    n = len(outlines)
    polys = [shapely.Polygon(o.polygon_points(1e-2)) for o in outlines]
    return [[j for j in range(n) if j != i and levels[j] > levels[i] and polys[i].contains(polys[j])]
            for i in range(n)]


def cut_order(outlines, levels, starts, ends, *, origin=(0.0, 0.0)) -> list[int]:
    """Indices in cutting order: an outline after every outline inside it;
    among those ready, the nearest start to where the tool stands."""
    n = len(outlines)
    inside = enclosed(outlines, levels)
    done, order = set(), []
    here = np.asarray(origin, float)
    while len(order) < n:
        ready = [i for i in range(n) if i not in done and all(j in done for j in inside[i])]
        i = min(ready, key=lambda k: (float(np.hypot(*(np.asarray(starts[k]) - here))), k))
        order.append(i)
        done.add(i)
        here = np.asarray(ends[i], float)
    return order
