"""Write a contour, its toolpath and its tight spots as a DXF drawing.

The drawing (DXF R2010, written with ezdxf, ``$INSUNITS`` set to mm or
inch) holds one layer per kind of thing, with plain names of our own:

========== =====================================================================
Layer       Entities
========== =====================================================================
POINTS      the input points, one POINT each
CONTOUR     the contour as one exact degree-3 SPLINE (control points + knots)
CONTOUR-ARCS the contour as lines and arcs: LWPOLYLINE with bulges
TOOL-CENTER the tool-center path of the final pass: LWPOLYLINE(s) with bulges
TIGHT-SPOTS a CIRCLE and a short TEXT at each tight spot
NOTES       a TEXT with the units and the caution
========== =====================================================================

The SPLINE is the contour itself, not an approximation: every cubic piece
is converted to B-spline form exactly (see :func:`contour_bspline`), so a
CAD program does not re-interpret fit points.  Bulges follow the DXF rule
bulge = tan(θ/4), positive counter-clockwise.

Two runs with the same input give byte-identical files: ezdxf's time
stamps and GUIDs are fixed to its constants while writing.
"""

from __future__ import annotations

import contextlib
import math
import os
import warnings
from pathlib import Path

import numpy as np

from .._options import CAUTION, MM_PER_INCH, UNITS, check_option
from ..moves import toolpath_in_units
from ..errors import ExportError, InputError
from ..path.model import ARC_CCW, ARC_CW, RAPID, Toolpath, arc_sweep
from ._atomic import atomic_paths

__all__ = ["write_dxf", "contour_bspline", "polyline_vertices", "tight_spot_rows", "LAYERS", "LargeDrawingWarning"]

#: layer name -> DXF colour number (ACI) and what it holds
LAYERS = {
    "POINTS": (8, "input points"),
    "CONTOUR": (5, "contour, exact cubic SPLINE"),
    "CONTOUR-ARCS": (3, "contour as lines and arcs (LWPOLYLINE with bulges)"),
    "TOOL-CENTER": (1, "tool-center path of the final pass"),
    "TIGHT-SPOTS": (6, "tight spots: circle and text"),
    "NOTES": (7, "units and caution"),
}

#: above this many vertices in all, write_dxf warns that the drawing is large
LARGE_DRAWING = 100_000
#: without ``points=``, the contour's points are drawn only up to this many
MAX_DEFAULT_POINTS = 20_000



class LargeDrawingWarning(UserWarning):
    """The drawing holds many vertices: slow to write and to open in CAD."""


# ---------------------------------------------------------------------------
# exact B-spline form of the piecewise cubic
def _continuity_c2(contour) -> np.ndarray:
    """True at each interior break where the curve is C2 (to rounding)."""
    b = np.asarray(contour.breaks, float)
    c = np.asarray(contour.coefficients, float)
    h = np.diff(b)
    if len(h) < 2:
        return np.zeros(0, bool)
    x = h[:-1]
    hh = np.minimum(h[:-1], h[1:])
    # jumps converted to lengths on the shorter neighbouring piece, the
    # largest of value, slope and curvature over both coordinates
    jump = np.zeros(len(x))
    for k in range(c.shape[2]):
        a3, a2, a1, a0 = c[0, :-1, k], c[1, :-1, k], c[2, :-1, k], c[3, :-1, k]
        val = ((a3 * x + a2) * x + a1) * x + a0
        d1 = (3 * a3 * x + 2 * a2) * x + a1
        d2 = 6 * a3 * x + 2 * a2
        np.maximum(jump, np.abs(val - c[3, 1:, k]), out=jump)
        np.maximum(jump, np.abs(d1 - c[2, 1:, k]) * hh, out=jump)
        np.maximum(jump, np.abs(d2 - 2 * c[1, 1:, k]) * hh**2, out=jump)
    pts = np.asarray(contour.points)
    size = max(float((pts.max(axis=0) - pts.min(axis=0)).max()) if len(pts) else 0.0, 1.0)
    return jump <= 1e-9 * size


def contour_bspline(contour) -> tuple[np.ndarray, np.ndarray]:
    """Control points and knots of a cubic B-spline equal to ``contour``.

    Where the contour is C2 the knot is simple; at its corners (and any
    break that is not C2) the knot is tripled, so the B-spline is only
    position continuous there, as the contour is.  The ends are clamped
    (knots of multiplicity 4): the curve starts at the first control point
    and ends at the last; a closed contour's ends meet.

    Parameters
    ----------
    contour : Contour
        Piecewise cubic in PPoly layout (``breaks``, ``coefficients``).

    Returns
    -------
    control_points : (k, 2) float array, mm (the contour's units).
    knots : (k + 4,) float array, the contour's own parameter values.

    Notes
    -----
    Control point j is the blossom (polar form) of the polynomial piece on
    any non-empty knot span l with j <= l <= j + 3, evaluated at the knots
    (t[j+1], t[j+2], t[j+3]).  For p(u) = a u³ + b u² + c u + d the blossom
    is f(u1, u2, u3) = a u1 u2 u3 + b (u1 u2 + u1 u3 + u2 u3)/3
    + c (u1 + u2 + u3)/3 + d (de Casteljau/Ramshaw blossoming).  The result
    is exact up to rounding.

    Examples
    --------
    >>> from pathgen.spline import fit
    >>> c = fit([(0, 0), (1, 1), (2, 0), (3, 1)])
    >>> cp, knots = contour_bspline(c)
    >>> len(knots) == len(cp) + 3 + 1
    True
    """
    b = np.asarray(contour.breaks, float)
    coef = np.asarray(contour.coefficients, float)
    m = len(b) - 1
    mult = np.where(_continuity_c2(contour), 1, 3)
    for k in contour.corners:
        if 0 < k < m:
            mult[k - 1] = 3
    knots = np.concatenate([np.full(4, b[0]), np.repeat(b[1:-1], mult), np.full(4, b[-1])])
    k = len(knots) - 4
    j = np.arange(k)
    nonempty = knots[1:] > knots[:-1]  # span l is [knots[l], knots[l+1]]; l + 3 < len for every j
    span = np.full(k, -1)
    for off in (0, 3, 1, 2):  # the spans in the middle of the support win (written last)
        ok = nonempty[off:off + k]
        span[ok] = j[ok] + off
    if np.any(span < 0):
        raise ExportError("internal error: a B-spline control point has no knot span")
    # the break each knot sits at (strictly increasing breaks: the piece that starts there)
    at_break = np.concatenate([np.zeros(4, np.int64), np.repeat(np.arange(1, m), mult), np.full(4, m)])
    piece = np.clip(at_break[span], 0, m - 1)
    bp = b[piece]
    u1, u2, u3 = (knots[i:i + k] - bp for i in (1, 2, 3))
    a3, a2, a1, a0 = (coef[i, piece] for i in range(4))
    e1 = (u1 + u2 + u3)[:, None] / 3.0
    e2 = (u1 * u2 + u1 * u3 + u2 * u3)[:, None] / 3.0
    e3 = (u1 * u2 * u3)[:, None]
    cp = a3 * e3 + a2 * e2 + a1 * e1 + a0
    return cp, knots


# ---------------------------------------------------------------------------
# toolpath -> LWPOLYLINE vertices
def polyline_vertices(toolpath: Toolpath, *, scale: float = 1.0, final_pass: bool = True):
    """Runs of connected cutting moves as LWPOLYLINE vertex arrays.

    Parameters
    ----------
    toolpath : Toolpath
    scale : float
        Factor from the toolpath's units to the drawing's.
    final_pass : bool
        Keep only the cutting moves in the XY plane at the lowest z of the
        cut (the final pass); else every in-plane cutting move.

    Returns
    -------
    list of (vertices, closed)
        ``vertices`` is (k, 5): x, y, start width, end width, bulge (the
        layout of ezdxf's LWPOLYLINE points); bulge = tan(θ/4), + for a
        counter-clockwise arc, on the vertex where the arc starts.  Arcs
        over 180° are split in two halves.  ``closed`` is True when a run
        ends where it starts (the last vertex's bulge then closes it).
    """
    kind = toolpath.kind
    s, e, c = toolpath.start, toolpath.end, toolpath.center
    cut = kind != RAPID
    flat = np.abs(s[:, 2] - e[:, 2]) <= 1e-9 * max(1.0, float(np.abs(e[:, 2]).max(initial=0.0)))
    moves_xy = np.any(s[:, :2] != e[:, :2], axis=1) | (kind >= ARC_CW)
    sel = cut & flat & moves_xy
    if final_pass and sel.any():
        zcut = e[sel, 2].min()
        sel &= np.abs(e[:, 2] - zcut) <= 1e-9 * max(1.0, abs(zcut))
    idx = np.flatnonzero(sel)
    if idx.size == 0:
        return []
    sweep = np.zeros(len(kind))
    arcs = kind >= ARC_CW
    if arcs.any():
        sweep[arcs] = arc_sweep(s[arcs, :2], e[arcs, :2], c[arcs], kind[arcs] == ARC_CCW)
    # a run breaks where the next selected move is not the next move or does not start at the end
    size = max(1.0, float(np.abs(e[idx, :2]).max()))
    brk = np.ones(len(idx), bool)
    brk[1:] = (np.diff(idx) != 1) | (np.abs(s[idx[1:], :2] - e[idx[:-1], :2]).max(axis=1) > 1e-9 * size)
    starts = np.flatnonzero(brk)
    ends = np.r_[starts[1:], len(idx)]
    out = []
    for a, z in zip(starts, ends):
        mv = idx[a:z]
        big = arcs[mv] & (sweep[mv] > np.pi)
        n_vert = len(mv) + int(big.sum())
        v = np.zeros((n_vert + 1, 5))
        pos = np.arange(len(mv)) + np.concatenate([[0], np.cumsum(big)[:-1]])
        v[pos, :2] = s[mv, :2]
        sign = np.where(kind[mv] == ARC_CCW, 1.0, -1.0)
        sw = np.where(big, sweep[mv] / 2, sweep[mv])
        v[pos, 4] = np.where(arcs[mv], sign * np.tan(sw / 4), 0.0)
        if big.any():
            bm = mv[big]
            cx, cy = c[bm, 0], c[bm, 1]
            r = np.hypot(s[bm, 0] - cx, s[bm, 1] - cy)
            a0 = np.arctan2(s[bm, 1] - cy, s[bm, 0] - cx)
            am = a0 + np.where(kind[bm] == ARC_CCW, 1.0, -1.0) * sweep[bm] / 2
            v[pos[big] + 1, 0] = cx + r * np.cos(am)
            v[pos[big] + 1, 1] = cy + r * np.sin(am)
            v[pos[big] + 1, 4] = v[pos[big], 4]
        v[-1, :2] = e[mv[-1], :2]
        closed = bool(np.abs(v[-1, :2] - v[0, :2]).max() <= 1e-9 * size) and n_vert >= 2
        if closed:
            v = v[:-1]
        v[:, :2] *= scale
        out.append((np.ascontiguousarray(v), closed))
    return out


# ---------------------------------------------------------------------------
def _short(v: float) -> str:
    v = float(v)
    if not math.isfinite(v):
        return "-"
    return np.format_float_positional(v + 0.0, precision=3, unique=False, fractional=False, trim="-")


def tight_spot_rows(report) -> list[tuple]:
    """(x, y, min_radius, allowed_feed, reason, text) of each tight spot.

    Duck typing: any object whose ``tight_spots`` items have numeric ``x``
    and ``y`` (mm); ``min_radius`` (mm), ``allowed_feed`` (mm/min),
    ``reason`` and ``text`` (plain words) are optional.  Spots without a
    finite place are left out.
    """
    out = []
    for spot in getattr(report, "tight_spots", ()) or ():
        try:
            x, y = float(spot.x), float(spot.y)
        except (AttributeError, TypeError, ValueError):
            raise InputError(f"report.tight_spots holds {spot!r}, which has no numeric x and y") from None
        if not (math.isfinite(x) and math.isfinite(y)):
            continue
        reason = str(getattr(spot, "reason", ""))
        out.append((x, y, float(getattr(spot, "min_radius", math.nan)),
                    float(getattr(spot, "allowed_feed", math.nan)), reason,
                    str(getattr(spot, "text", reason))))
    return out


def _as_xy(points, name):
    p = np.asarray(points, dtype=float)
    if p.ndim != 2 or p.shape[1] != 2:
        raise InputError(f"{name} must be an (n, 2) array of x, y, got shape {p.shape}")
    if not np.all(np.isfinite(p)):
        raise InputError(f"{name} holds NaN or infinite values")
    return p


def _build(contour, points, toolpath, arcs, report, units):
    import ezdxf

    k = 1.0 / MM_PER_INCH if units == "inch" else 1.0  # contour, points and report are mm
    tp_scale = k  # the contour's arcs are mm: scaled as their vertices are made

    doc = ezdxf.new("R2010", setup=False)
    doc.units = ezdxf.units.IN if units == "inch" else ezdxf.units.MM
    doc.header["$MEASUREMENT"] = 0 if units == "inch" else 1
    for name, (color, _) in LAYERS.items():
        doc.layers.add(name, color=color)
    msp = doc.modelspace()
    count = 0

    notes = []
    if points is None:
        points = np.asarray(contour.points, float)
        if len(points) > MAX_DEFAULT_POINTS:
            notes.append(f"{len(points)} input points were not drawn (more than {MAX_DEFAULT_POINTS}, "
                         f"to keep the drawing small); the contour and paths are complete")
            points = np.empty((0, 2))
    pts = _as_xy(points, "points") * k
    for x, y in pts.tolist():
        msp.add_point((x, y), dxfattribs={"layer": "POINTS"})
    count += len(pts)

    cp, knots = contour_bspline(contour)
    spline = msp.add_spline(dxfattribs={"layer": "CONTOUR"})
    spline.dxf.degree = 3
    # the spline's VertexArray takes a numpy array as it is (assigning to
    # control_points builds a Vec3 per point first: 1.5 s at 10^6 points)
    spline.control_points.set(np.column_stack([cp * k, np.zeros(len(cp))]))
    spline.knots = (knots - knots[0]).tolist()
    _write_in_bulk(spline)
    count += len(cp)

    x0, y0, x1, y1 = contour.bbox
    bottom, left = y0 * k, x0 * k
    for layer, tp in (("CONTOUR-ARCS", arcs), ("TOOL-CENTER", toolpath)):
        if tp is None:
            continue
        if not isinstance(tp, Toolpath):
            raise InputError(f"{'arcs' if layer == 'CONTOUR-ARCS' else 'toolpath'} must be a Toolpath, got {type(tp).__name__}")
        scale = tp_scale
        if layer == "TOOL-CENTER":  # the tool path is mm: converted here, as written
            tp, scale = toolpath_in_units(tp, units), 1.0
        for verts, closed in polyline_vertices(tp, scale=scale, final_pass=(layer == "TOOL-CENTER")):
            lw = msp.add_lwpolyline([], dxfattribs={"layer": layer})
            lw.lwpoints.values = verts  # all vertices at once (add_lwpolyline appends one by one)
            lw.closed = closed
            count += len(verts)
            # an arc segment bows out from its chord by its sagitta |b|·c/2: room for the note below
            chord = np.hypot(*(np.roll(verts[:, :2], -1, axis=0) - verts[:, :2]).T)
            bottom = min(bottom, float((verts[:, 1] - np.abs(verts[:, 4]) * chord / 2).min()))
            left = min(left, float(verts[:, 0].min()))

    size = max(math.hypot(x1 - x0, y1 - y0) * k, 1e-9)
    spots = tight_spot_rows(report)
    rk = k
    if report is not None and getattr(report, "units", "mm") == "inch":
        rk = 1.0 if units == "inch" else MM_PER_INCH
    mark, height = 0.02 * size, 0.012 * size
    fu = "in/min" if units == "inch" else "mm/min"
    for i, (x, y, radius, feed, reason, _) in enumerate(spots, start=1):
        x, y = x * rk, y * rk
        msp.add_circle((x, y), mark, dxfattribs={"layer": "TIGHT-SPOTS"})
        ftext = "cannot cut" if reason == "reach" or not feed > 0 else f"F{_short(feed * rk)} {fu}"
        label = f"{i} {reason} R{_short(radius * rk)} {ftext}"
        msp.add_text(label, height=height, dxfattribs={"layer": "TIGHT-SPOTS", "insert": (x + mark, y + mark)})
    msp.add_text(
        f"pathgen drawing, units {units}. {CAUTION}",
        height=height,
        dxfattribs={"layer": "NOTES", "insert": (left, bottom - 4 * height)},
    )
    return doc, count, notes


def _write_in_bulk(spline) -> None:
    """Let ``spline`` write its knots and control points as one string.

    ezdxf writes a SPLINE's data one tag at a time (about 4·10^6 calls of
    the tag writer at 10^6 control points); this writes the same tags, the
    same text (each value as ``str`` of its float, as ezdxf's tag format
    does), in bulk.  Other writers (binary DXF) and splines with weights or
    fit points take ezdxf's own way.  Tested byte for byte against it.
    """
    from ezdxf.entities import Spline
    from ezdxf.lldxf.tagwriter import TagWriter

    def export_spline_data(tagwriter):
        if type(tagwriter) is not TagWriter or len(spline.weights) or len(spline.fit_points):
            return Spline.export_spline_data(spline, tagwriter)
        knots = np.asarray(spline.knots, np.float64).tolist()
        if knots:
            tagwriter.write_str(" 40\n" + "\n 40\n".join(map(str, knots)) + "\n")
        cv = np.asarray(spline.control_points.values, np.float64).reshape(-1, 3)
        n = len(cv)
        if n == 0:
            return
        parts = [""] * (6 * n)  # code, value, code, value, code, value per point
        parts[0::6] = ["\n 10\n"] * n
        parts[0] = " 10\n"
        parts[2::6] = ["\n 20\n"] * n
        parts[4::6] = ["\n 30\n"] * n
        for i in range(3):
            col = cv[:, i]
            if not np.any(col) and not np.any(np.signbit(col)):  # all +0.0 (the z column)
                parts[2 * i + 1::6] = [str(0.0)] * n
            else:
                parts[2 * i + 1::6] = map(str, col.tolist())
        tagwriter.write_str("".join(parts) + "\n")

    spline.export_spline_data = export_spline_data


def write_dxf(path, contour, *, points=None, toolpath=None, arcs=None, report=None,
              units: str = "mm", force: bool = False) -> Path:
    """Write the drawing of ``contour`` (and what is given) to ``path``.

    Parameters
    ----------
    path : path-like
        The .dxf file; its folder must exist.
    contour : Contour
        The contour, mm.  Written as an exact cubic SPLINE on CONTOUR.
    points : (n, 2) array, optional
        Input points, mm, drawn as POINTs on POINTS; default the points the
        contour was fitted through when there are at most 20 000 of them
        (a warning says when they are left out); an empty array draws none.
    toolpath : Toolpath, optional
        Its cutting moves at the final depth go on TOOL-CENTER.
    arcs : Toolpath, optional
        The contour as lines and arcs (e.g. from
        ``pathgen.path.build.contour_moves``), on CONTOUR-ARCS.
    report : object with ``tight_spots``, optional
        Each spot (x, y, min_radius, allowed_feed, reason; mm, mm/min) is
        drawn on TIGHT-SPOTS as a circle and a text.
    units : "mm" or "inch"
        Units of the drawing ($INSUNITS); mm values are converted.
    force : bool
        Replace an existing file.

    Returns
    -------
    pathlib.Path

    Warns
    -----
    LargeDrawingWarning
        When the drawing holds more than 100 000 vertices (ezdxf writes
        about 70 000 a second; CAD programs are slow to open such files), or
        when the default points were left out.  The library only warns
        (``warnings``); the command line shows the message on stderr.
    """
    import ezdxf

    units = check_option("units", units, UNITS)
    with fixed_metadata():
        return _write(path, contour, points, toolpath, arcs, report, units, force)


@contextlib.contextmanager
def fixed_metadata():
    """While a drawing is made and saved: no creation dates, random GUIDs or
    time stamps (ezdxf's fixed meta data), so the same job writes the same
    bytes (single outline and part drawings)."""
    import ezdxf

    old = ezdxf.options.write_fixed_meta_data_for_testing
    ezdxf.options.write_fixed_meta_data_for_testing = True
    try:
        yield
    finally:
        ezdxf.options.write_fixed_meta_data_for_testing = old


def _write(path, contour, points, toolpath, arcs, report, units, force) -> Path:
    doc, count, notes = _build(contour, points, toolpath, arcs, report, units)
    if count > LARGE_DRAWING:
        notes.append(f"the drawing holds {count} vertices: writing and opening it in CAD will be slow; "
                     f"leave out the points or use arcs to make it smaller")
    for note in notes:
        warnings.warn(LargeDrawingWarning(note), stacklevel=3)
    return save_drawing(doc, path, force=force)


def save_drawing(doc, path, *, force: bool = False) -> Path:
    """Save an ezdxf document atomically, the same bytes for the same drawing.

    ezdxf collects the required CLASS entries from a set, whose order
    changes with Python's hash seed: they are added here and sorted.
    """
    doc.classes.add_required_classes(doc.dxfversion)
    doc.classes.classes = dict(sorted(doc.classes.classes.items()))
    p = Path(os.fspath(path))
    with atomic_paths([p], force=force) as (tmp,):
        doc.saveas(tmp)
    return p
