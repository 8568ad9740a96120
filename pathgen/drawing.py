"""Drawn outlines: DXF entities read as exact lines and circular arcs.

A drawing gives a part's outlines as polylines with bulges, circles, arcs,
lines, ellipses and splines.  :func:`read_drawing` reads every closed
entity, and every chain of open entities joined end to end, into a
:class:`Shape`: a closed sequence of :class:`Segment` (an exact line, an
exact circular arc, or a sampled free-form curve).

:func:`shape_contour` turns a shape into a :class:`pathgen.spline.Contour`
so that the checks and the toolpath stages work on it unchanged:

* a line becomes one cubic piece that is exactly straight;
* a circular arc becomes cubic pieces (Bézier arcs with handle length
  4/3·tan(φ/4)·R) of a sweep φ small enough that the radius of curvature
  of every piece stays within ``ARC_RADIUS_ERROR`` (1e-5 mm) of the drawn
  radius; the distance from the drawn circle is far smaller still (about
  1e-12·R at 5°).  Both are measured on the built contour, not assumed,
  and kept in ``contour.info["drawn"]``;
* an ELLIPSE or SPLINE is sampled with chords within a tenth of the
  tolerance and fitted with a cubic spline through the samples; the
  fitted curve's distance from the drawn one is measured at the midpoints
  between samples;
* where two drawn elements meet at an angle the contour has a corner (a
  break where only the position is continuous); tangent joins stay smooth.

Bulge (sources: dxf-bulge): a polyline vertex with bulge b starts an arc
to the next vertex of included angle θ = 4·atan(b), counter-clockwise for
b > 0, radius c(1 + b²)/(4|b|) on a chord c.

Conventions: lengths in mm inside (inch drawings scaled at reading),
angles in radians, counter-clockwise positive; every shape is returned
counter-clockwise.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np

from .errors import InputError

__all__ = ["Segment", "Shape", "read_drawing", "shape_contour", "bulge_arc", "DRAWN_KINDS",
           "JOIN_GAP", "ARC_RADIUS_ERROR", "CORNER_ANGLE"]

#: Entity kinds read as drawn geometry.
DRAWN_KINDS = ("LWPOLYLINE", "POLYLINE", "CIRCLE", "ARC", "LINE", "ELLIPSE", "SPLINE")
#: Open entities whose ends lie closer than this (mm) are joined into one chain.
JOIN_GAP = 0.01
#: Ends closer than this (mm) are the same point; a larger gap (up to the
#: join gap) is bridged with a straight line and reported.
SNAP = 1e-6
#: Largest difference (mm) between a drawn arc's radius and the radius of
#: curvature of the cubic pieces standing for it.
ARC_RADIUS_ERROR = 1e-5
#: Two drawn elements meeting with tangents more than this apart (radians)
#: make a sharp corner.
CORNER_ANGLE = 1e-6
#: Free-form curves (ELLIPSE, SPLINE) are sampled with chords within this
#: fraction of the tolerance.
CURVE_SHARE = 0.1


@dataclass(frozen=True)
class Segment:
    """One drawn element of an outline, mm.

    kind : "line", "arc" or "curve".
    start, end : (x, y).
    center, radius, sweep : arcs only; ``sweep`` is the signed included
        angle (radians, positive counter-clockwise, ±2π for a full circle).
    points : curves only, (n, 2) samples from ``start`` to ``end``.
    mids : curves only, (n - 1, 2) the drawn curve halfway (in its own
        parameter) between consecutive samples: where the fit is measured.
    seam_turn : closed curves only, the drawn curve's turn where it ends on
        its start (radians; 0 for a smooth loop).
    """

    kind: str
    start: tuple
    end: tuple
    center: tuple = (0.0, 0.0)
    radius: float = 0.0
    sweep: float = 0.0
    points: np.ndarray | None = None
    mids: np.ndarray | None = None
    seam_turn: float = 0.0

    def reversed(self) -> "Segment":
        if self.points is None:
            return replace(self, start=self.end, end=self.start, sweep=-self.sweep)
        return replace(self, start=self.end, end=self.start, points=self.points[::-1].copy(),
                       mids=self.mids[::-1].copy(), seam_turn=-self.seam_turn)

    @property
    def length(self) -> float:
        if self.kind == "arc":
            return abs(self.sweep) * self.radius
        if self.kind == "line":
            return math.dist(self.start, self.end)
        return float(np.hypot(*np.diff(self.points, axis=0).T).sum())

    def area_term(self) -> float:
        """∮ (x dy − y dx)/2 along the segment (Green's theorem), mm²; exact
        for lines and arcs: chord term plus R²(θ − sin θ)/2."""
        (x0, y0), (x1, y1) = self.start, self.end
        if self.kind == "curve":
            p = self.points
            return 0.5 * float(np.sum(p[:-1, 0] * p[1:, 1] - p[1:, 0] * p[:-1, 1]))
        chord = 0.5 * (x0 * y1 - x1 * y0)
        if self.kind == "line":
            return chord
        th = self.sweep
        return chord + 0.5 * self.radius**2 * (th - math.sin(th))

    def tangents(self) -> tuple[np.ndarray, np.ndarray]:
        """Unit tangents at the start and at the end."""
        if self.kind == "line":
            v = np.subtract(self.end, self.start)
            v = v / np.hypot(*v)
            return v, v
        if self.kind == "arc":
            s = 1.0 if self.sweep > 0 else -1.0
            out = []
            for p in (self.start, self.end):
                r = np.subtract(p, self.center)
                out.append(s * np.array([-r[1], r[0]]) / np.hypot(*r))
            return out[0], out[1]
        p = self.points
        a, b = p[1] - p[0], p[-1] - p[-2]
        return a / np.hypot(*a), b / np.hypot(*b)

    def sample(self, step: float) -> np.ndarray:
        """Polygon vertices from start (included) to end (excluded): a line's
        start, a curve's samples, an arc's points with chords of sagitta at
        most ``step`` (mm), so a polygon of them stays within ``step``."""
        if self.kind == "line":
            return np.array([self.start])
        if self.kind == "curve":
            return self.points[:-1]
        r = self.radius
        e = min(step, 0.5 * r)
        dphi = 2.0 * math.acos(max(-1.0, 1.0 - e / r))
        n = max(4, math.ceil(abs(self.sweep) / dphi))
        a0 = math.atan2(self.start[1] - self.center[1], self.start[0] - self.center[0])
        a = a0 + self.sweep * np.arange(n) / n
        return np.c_[self.center[0] + r * np.cos(a), self.center[1] + r * np.sin(a)]


@dataclass(frozen=True)
class Shape:
    """A closed drawn outline: segments end to end, counter-clockwise.

    ``where`` names what it came from ("part.dxf CIRCLE 2A on layer 'HOLES'"),
    ``layer`` its layer, ``steps`` what reading did (bridged gaps, joins).
    """

    segments: tuple
    where: str
    layer: str = "0"
    steps: tuple = ()

    @property
    def area(self) -> float:
        """Signed area (mm²), exact for lines and arcs."""
        return float(sum(s.area_term() for s in self.segments))

    @property
    def length(self) -> float:
        return float(sum(s.length for s in self.segments))

    def reversed(self) -> "Shape":
        return replace(self, segments=tuple(s.reversed() for s in reversed(self.segments)))

    def polygon_points(self, step: float = 1e-3) -> np.ndarray:
        """Vertices of a polygon within ``step`` (mm) of the drawn outline."""
        return np.vstack([s.sample(step) for s in self.segments])

    def bounds(self) -> tuple:
        p = self.polygon_points(0.01)
        return (*p.min(axis=0), *p.max(axis=0))


def bulge_arc(p0, p1, bulge: float) -> Segment:
    """The arc segment a polyline vertex with ``bulge`` starts (sources: dxf-bulge).

    >>> s = bulge_arc((1, 0), (0, 1), math.tan(math.pi / 8))
    >>> [round(v, 12) + 0.0 for v in s.center], round(s.radius, 12), round(math.degrees(s.sweep), 9)
    ([0.0, 0.0], 1.0, 90.0)
    """
    (x0, y0), (x1, y1) = p0, p1
    c = math.hypot(x1 - x0, y1 - y0)
    theta = 4.0 * math.atan(bulge)
    # the center lies on the chord's left normal at c(1 - b²)/(4b) from its middle
    d = c * (1.0 - bulge * bulge) / (4.0 * bulge)
    nx, ny = -(y1 - y0) / c, (x1 - x0) / c
    cx, cy = 0.5 * (x0 + x1) + d * nx, 0.5 * (y0 + y1) + d * ny
    r = c * (1.0 + bulge * bulge) / (4.0 * abs(bulge))
    return Segment("arc", (float(x0), float(y0)), (float(x1), float(y1)), (cx, cy), r, theta)


# -- reading ---------------------------------------------------------------------


def _polyline_segments(xyb, closed: bool, scale: float) -> list:
    """Segments of polyline vertices (x, y, bulge), mm; repeated vertices dropped."""
    pts = [(float(x) * scale, float(y) * scale, float(b)) for x, y, b in xyb]
    keep = [pts[0]]
    for p in pts[1:]:
        if math.dist(p[:2], keep[-1][:2]) > SNAP:
            keep.append(p)
        else:
            keep[-1] = (keep[-1][0], keep[-1][1], p[2])  # the later bulge goes on
    if closed and len(keep) > 1 and math.dist(keep[0][:2], keep[-1][:2]) <= SNAP:
        keep.pop()
    segs = []
    n = len(keep)
    for i in range(n if closed else n - 1):
        a, b = keep[i], keep[(i + 1) % n]
        if abs(a[2]) > 1e-12:
            segs.append(bulge_arc(a[:2], b[:2], a[2]))
        else:
            segs.append(Segment("line", a[:2], b[:2]))
    return segs


def _curve_points(entity, kind: str, scale: float, distance: float):
    """Samples of an ELLIPSE or SPLINE (mm) with chords within ``distance``,
    the drawn curve's points halfway (in its own parameter) between them,
    whether the entity is closed, and its turn at the seam (closed: the
    angle between its end and start tangents, from ezdxf's derivatives)."""
    m = sum(1 for _ in entity.flattening(distance / scale, segments=8))
    n = max(16, 2 * m)
    turn = 0.0
    if kind == "ELLIPSE":
        ce = entity.construction_tool()
        span = (ce.end_param - ce.start_param) % (2 * math.pi)
        closed = span < 1e-12 or abs(span - 2 * math.pi) < 1e-12
        span = 2 * math.pi if closed else span
        t = ce.start_param + span * np.arange(2 * n + 1) / (2 * n)
        pts = np.array([(v.x, v.y) for v in ce.vertices(t)], float)
    else:
        bs = entity.construction_tool()
        t = np.linspace(0.0, bs.max_t, 2 * n + 1)
        pts = np.array([(v.x, v.y) for v in bs.points(t)], float)
        closed = bool(entity.closed) or math.dist(pts[0], pts[-1]) <= SNAP / scale
        if closed:
            a, b = bs.derivative(bs.max_t, 1)[1], bs.derivative(0.0, 1)[1]
            turn = math.atan2(a.x * b.y - a.y * b.x, a.x * b.x + a.y * b.y)
    if closed:
        pts[-1] = pts[0]
    return pts[0::2] * scale, pts[1::2] * scale, closed, turn


def _read_entities(msp, name, layers, scale, tolerance, gap):
    """Closed shapes and open pieces (lists of segments) of the model space."""
    closed_shapes, pieces = [], []
    seen_layers = set()
    for e in msp:
        kind = e.dxftype()
        if kind not in DRAWN_KINDS:
            continue
        lay = e.dxf.get("layer", "0")
        seen_layers.add(lay)
        if layers is not None and lay not in layers:
            continue
        where = f"{name} {kind} {e.dxf.handle} on layer {lay!r}"
        ext = e.dxf.get("extrusion", (0, 0, 1))
        if kind != "LINE" and (abs(ext[0]) > 1e-9 or abs(ext[1]) > 1e-9 or ext[2] < 0):
            raise InputError(f"{where}: drawn in another plane (extrusion {tuple(ext)}); "
                             "pathgen reads outlines drawn in the XY plane")
        if kind == "LWPOLYLINE":
            xyb = list(e.get_points("xyb"))
            if len(xyb) < 2:
                continue
            segs = _polyline_segments(xyb, bool(e.closed), scale)
            (closed_shapes if e.closed else pieces).append((segs, where, lay))
        elif kind == "POLYLINE":
            if not e.is_2d_polyline:
                continue
            xyb = [(v.dxf.location.x, v.dxf.location.y, v.dxf.get("bulge", 0.0)) for v in e.vertices]
            if len(xyb) < 2:
                continue
            segs = _polyline_segments(xyb, bool(e.is_closed), scale)
            (closed_shapes if e.is_closed else pieces).append((segs, where, lay))
        elif kind == "CIRCLE":
            c, r = e.dxf.center, e.dxf.radius * scale
            cx, cy = c.x * scale, c.y * scale
            p = (cx + r, cy)
            closed_shapes.append(([Segment("arc", p, p, (cx, cy), r, 2 * math.pi)], where, lay))
        elif kind == "ARC":
            c, r = e.dxf.center, e.dxf.radius * scale
            cx, cy = c.x * scale, c.y * scale
            a0, a1 = math.radians(e.dxf.start_angle), math.radians(e.dxf.end_angle)
            sweep = (a1 - a0) % (2 * math.pi)
            sweep = 2 * math.pi if sweep < 1e-12 else sweep
            s = (cx + r * math.cos(a0), cy + r * math.sin(a0))
            t = (cx + r * math.cos(a0 + sweep), cy + r * math.sin(a0 + sweep))
            seg = Segment("arc", s, t, (cx, cy), r, sweep)
            (closed_shapes if sweep == 2 * math.pi else pieces).append(([seg], where, lay))
        elif kind == "LINE":
            s = (e.dxf.start.x * scale, e.dxf.start.y * scale)
            t = (e.dxf.end.x * scale, e.dxf.end.y * scale)
            if math.dist(s, t) > SNAP:
                pieces.append(([Segment("line", s, t)], where, lay))
        else:  # ELLIPSE, SPLINE
            pts, mids, closed, turn = _curve_points(e, kind, scale, CURVE_SHARE * tolerance)
            seg = Segment("curve", tuple(pts[0]), tuple(pts[-1]), points=pts, mids=mids, seam_turn=turn)
            (closed_shapes if closed else pieces).append(([seg], where, lay))
    return closed_shapes, pieces, seen_layers


def _chain(pieces, name, gap):
    """Join open pieces end to end into closed shapes (within ``gap`` mm)."""
    shapes = []
    left = list(pieces)
    while left:
        segs, where, lay = left.pop(0)
        segs = list(segs)
        members = [where]
        steps = []
        while True:
            head, tail = segs[0].start, segs[-1].end
            if len(members) > 1 or len(segs) > 1 or segs[0].kind != "line":
                if math.dist(head, tail) <= gap and not (len(segs) == 1 and segs[0].kind == "line"):
                    if math.dist(head, tail) > SNAP:
                        segs.append(Segment("line", tail, head))
                        steps.append(f"bridged a gap of {math.dist(head, tail):.3g} mm at "
                                     f"({tail[0]:.4f}, {tail[1]:.4f}) with a line")
                    else:
                        segs[-1] = replace(segs[-1], end=head)
                    break
            best = None
            for j, (s2, w2, l2) in enumerate(left):
                for flip in (False, True):
                    a = s2[-1].end if flip else s2[0].start
                    d = math.dist(tail, a)
                    if d <= gap and (best is None or d < best[0]):
                        best = (d, j, flip)
            if best is None:
                raise InputError(
                    f"{where}: the chain of {len(members)} element{'s' if len(members) > 1 else ''} "
                    f"starting here does not close: its end ({tail[0]:.4f}, {tail[1]:.4f}) mm meets no "
                    f"other element within the join gap {gap:g} mm and is {math.dist(head, tail):.4g} mm "
                    "from its start (draw the outline closed, or raise the join gap)")
            d, j, flip = best
            s2, w2, l2 = left.pop(j)
            s2 = [s.reversed() for s in reversed(s2)] if flip else list(s2)
            if d > SNAP:
                segs.append(Segment("line", tail, s2[0].start))
                steps.append(f"bridged a gap of {d:.3g} mm at ({tail[0]:.4f}, {tail[1]:.4f}) with a line")
            else:
                s2[0] = replace(s2[0], start=tail)
            segs.extend(s2)
            members.append(w2)
        label = where if len(members) == 1 else f"{where} and {len(members) - 1} more joined end to end"
        shapes.append((segs, label, lay, tuple(steps)))
    return shapes


def read_drawing(path, *, units: str = "mm", layers=None, tolerance: float = 0.01,
                 gap: float = JOIN_GAP) -> tuple[list, list, str | None]:
    """Every closed outline of a DXF drawing as exact :class:`Shape` objects.

    Parameters
    ----------
    path : DXF file.
    units : "mm" or "inch": the drawing's units (converted to mm).
    layers : None (every layer) or a collection of layer names.
    tolerance : the job's chord tolerance (mm); free-form curves are
        sampled within ``CURVE_SHARE`` of it.
    gap : open elements whose ends lie within this (mm) are joined.

    Returns
    -------
    (shapes, steps, declared_units)
        shapes counter-clockwise, in drawing order; the reading steps; the
        units the drawing declares ($INSUNITS), or None.

    Raises
    ------
    InputError : unreadable file, no outline on the chosen layers, a chain
        that does not close, an element drawn in another plane.
    """
    import ezdxf

    from ._options import MM_PER_INCH
    import os

    path = os.fspath(path)
    name = os.path.basename(path)
    try:
        doc = ezdxf.readfile(path)
    except Exception as exc:  # OSError for non-DXF text, ezdxf's structure errors
        msg = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        raise InputError(f"{name}: not a readable DXF drawing ({msg.replace(repr(path), repr(name))})") from None
    scale = MM_PER_INCH if units == "inch" else 1.0
    if layers is not None:
        layers = {layers} if isinstance(layers, str) else set(layers)
    closed, pieces, seen = _read_entities(doc.modelspace(), name, layers, scale, tolerance, gap)
    if layers is not None and not (layers & seen):
        listed = ", ".join(repr(x) for x in sorted(seen)) or "none"
        raise InputError(f"{name}: no drawn outline on layer{'s' if len(layers) > 1 else ''} "
                         f"{', '.join(repr(x) for x in sorted(layers))} (layers with outlines: {listed})")
    shapes, steps = [], []
    for segs, where, lay in closed:
        shapes.append(Shape(tuple(segs), where, lay))
    for segs, where, lay, st in _chain(pieces, name, gap):
        shapes.append(Shape(tuple(segs), where, lay, st))
        steps.extend(f"{where}: {s}" for s in st)
    if not shapes:
        raise InputError(f"{name}: no closed outline drawn (LWPOLYLINE, POLYLINE, CIRCLE, ELLIPSE, "
                         "SPLINE, or LINE and ARC chains) in the model space")
    out = []
    for s in shapes:
        if abs(s.area) <= 1e-12 * max(s.length, 1e-300) ** 2:
            raise InputError(f"{s.where}: the outline encloses no area")
        out.append(s if s.area > 0 else replace(s.reversed(), steps=s.steps))
    kinds = {}
    for s in out:
        for g in s.segments:
            kinds[g.kind] = kinds.get(g.kind, 0) + 1
    steps.insert(0, f"read {len(out)} closed outline{'s' if len(out) != 1 else ''} from {name}: "
                    + ", ".join(f"{v} {k}{'s' if v != 1 else ''}" for k, v in sorted(kinds.items()))
                    + " (arcs kept as exact arcs)")
    insunits = doc.header.get("$INSUNITS", 0)
    return out, steps, {1: "inch", 4: "mm"}.get(insunits)


# -- contour -------------------------------------------------------------------------


def _hermite(p0, p1, t0, t1, h):
    """Power-basis coefficients (4, 2) of the cubic with P(0)=p0, P(h)=p1,
    P'(0)=t0, P'(h)=t1 (the ``Contour`` layout)."""
    p0, p1, t0, t1 = (np.asarray(v, float) for v in (p0, p1, t0, t1))
    q = (p1 - p0) / h
    b = (3.0 * q - 2.0 * t0 - t1) / h
    a = (t0 + t1 - 2.0 * q) / (h * h)
    return np.stack([a, b, t0, p0])


def _arc_pieces(seg: Segment, radius_error: float):
    """Cubic pieces of an arc: (coefficients (4, k, 2), steps h (k,))."""
    r = seg.radius
    # radius-of-curvature error of a Bézier arc ~ 0.0219·R·(φ/(π/2))^4 (measured)
    phi_max = 0.5 * math.pi * (radius_error / (0.0219 * r)) ** 0.25
    phi_max = min(max(phi_max, math.radians(0.25)), math.radians(10.0))
    k = max(1, math.ceil(abs(seg.sweep) / phi_max))
    phi = seg.sweep / k
    a0 = math.atan2(seg.start[1] - seg.center[1], seg.start[0] - seg.center[0])
    ang = a0 + phi * np.arange(k + 1)
    cx, cy = seg.center
    pts = np.c_[cx + r * np.cos(ang), cy + r * np.sin(ang)]
    pts[0], pts[-1] = seg.start, seg.end
    s = 1.0 if phi > 0 else -1.0
    tan = s * np.c_[-np.sin(ang), np.cos(ang)]
    h = r * abs(phi)
    mag = 4.0 * math.tan(abs(phi) / 4.0) / abs(phi)  # Bézier handle 4/3·tan(φ/4)·R, per unit t
    coef = np.stack([_hermite(pts[i], pts[i + 1], mag * tan[i], mag * tan[i + 1], h) for i in range(k)], axis=1)
    return coef, np.full(k, h)


def shape_contour(shape: Shape, *, tolerance: float = 0.01, radius_error: float = ARC_RADIUS_ERROR):
    """The contour of a drawn shape (see the module notes), mm.

    ``contour.info["drawn"]`` holds the measured errors: ``arc_radius_error``
    (largest |radius of curvature − drawn radius| on arc pieces),
    ``arc_distance`` (largest distance from the drawn circle), ``curve_distance``
    (fitted free-form curves from the drawn ones, at the midpoints between
    samples), and the counts of lines, arcs and curves.

    >>> sq = Shape((Segment("line", (0, 0), (1, 0)), Segment("line", (1, 0), (1, 1)),
    ...             Segment("line", (1, 1), (0, 1)), Segment("line", (0, 1), (0, 0))), "square")
    >>> c = shape_contour(sq)
    >>> round(c.area, 12), c.corners
    (1.0, (0, 1, 2, 3))
    """
    from .spline import Contour, fit

    coefs, steps, kinds, first_piece = [], [], [], []
    curve_dev = 0.0
    segs = shape.segments
    if len(segs) == 1 and segs[0].kind == "curve" and abs(segs[0].seam_turn) <= CORNER_ANGLE:
        # a smooth closed curve: one periodic spline (C2 across the seam)
        c = fit(segs[0].points[:-1], closed=True)
        dev = _curve_distance(c, segs[0].mids)
        c.info["drawn"] = {"lines": 0, "arcs": 0, "curves": 1, "arc_radius_error": 0.0,
                           "arc_distance": 0.0, "curve_distance": dev}
        return c
    for seg in segs:
        first_piece.append(sum(len(h) for h in steps))
        if seg.kind == "line":
            L = seg.length
            d = np.subtract(seg.end, seg.start) / L
            coefs.append(np.stack([np.zeros(2), np.zeros(2), d, np.asarray(seg.start, float)])[:, None, :])
            steps.append(np.array([L]))
        elif seg.kind == "arc":
            cf, h = _arc_pieces(seg, radius_error)
            coefs.append(cf)
            steps.append(h)
        else:
            c = fit(seg.points, closed=False)
            cf = np.asarray(c.coefficients)
            coefs.append(cf)
            steps.append(np.diff(c.breaks))
            curve_dev = max(curve_dev, _curve_distance(c, seg.mids))
        kinds.append(seg.kind)
    coef = np.concatenate(coefs, axis=1)
    h = np.concatenate(steps)
    breaks = np.concatenate([[0.0], np.cumsum(h)])
    corners = []
    n = len(segs)
    for i in range(n):
        _, t_end = segs[i - 1].tangents()
        t_start, _ = segs[i].tangents()
        turn = math.atan2(t_end[0] * t_start[1] - t_end[1] * t_start[0], float(t_end @ t_start))
        if n == 1 and segs[0].kind == "curve":
            turn = segs[0].seam_turn  # the drawn curve's own turn (its samples only estimate it)
        if abs(turn) > CORNER_ANGLE and not (n == 1 and segs[0].kind == "arc"):
            corners.append(first_piece[i])
    points = coef[3]
    c = Contour(breaks, coef, True, points, corners=tuple(corners), end="periodic", param="arc")
    c.info["drawn"] = _arc_errors(c, segs, first_piece, steps)
    c.info["drawn"].update(lines=kinds.count("line"), arcs=kinds.count("arc"),
                           curves=kinds.count("curve"), curve_distance=curve_dev)
    return c


def _arc_errors(c, segs, first_piece, steps) -> dict:
    """Measured radius-of-curvature and distance errors of the arc pieces."""
    rad_err = dist_err = 0.0
    u = (np.arange(16) + 0.5) / 16
    for seg, i0, h in zip(segs, first_piece, steps):
        if seg.kind != "arc":
            continue
        t = (c.breaks[i0:i0 + len(h), None] + h[:, None] * u).ravel()
        p = c(t)
        k = np.abs(c.curvature(t))
        rad_err = max(rad_err, float(np.abs(1.0 / k - seg.radius).max()))
        dist_err = max(dist_err, float(np.abs(np.hypot(*(p - seg.center).T) - seg.radius).max()))
    return {"arc_radius_error": rad_err, "arc_distance": dist_err}


def _curve_distance(c, mids: np.ndarray) -> float:
    """Largest distance (mm) from the drawn curve's points ``mids`` (one per
    piece, halfway between the samples) to the fitted piece, measured on 257
    points of the piece (their spacing adds at most its sagitta, far below)."""
    b = c.breaks
    u = np.linspace(0.0, 1.0, 257)
    worst = 0.0
    for a in range(0, len(mids), 256):
        idx = np.arange(a, min(a + 256, len(mids)))
        t = b[idx, None] + (b[idx + 1] - b[idx])[:, None] * u
        p = c(t)
        d = np.hypot(p[..., 0] - mids[idx, None, 0], p[..., 1] - mids[idx, None, 1]).min(axis=1)
        worst = max(worst, float(d.max()))
    return worst
