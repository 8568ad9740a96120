"""A part's drawing and picture: every outline with its number, side and order.

DXF layers (R2010, ``$INSUNITS`` set): ``CONTOUR`` the outlines (drawn
lines and arcs as LWPOLYLINE with bulges, fitted outlines as arcs within
the tolerance), ``TOOLPATH`` the tool-center path of the final pass,
``LABELS`` one TEXT per outline "N side, cut K", ``TABS`` the stretch of
the tool-center path that rises over each tab.
"""

from __future__ import annotations

import math
import os
from pathlib import Path

import numpy as np

from .._options import MM_PER_INCH
from ._atomic import atomic_paths

__all__ = ["write_part_dxf", "plot_part", "label"]

_LAYERS = {"CONTOUR": 7, "TOOLPATH": 1, "LABELS": 3, "TABS": 6}


def label(row) -> str:
    """The outline's tag in drawings and pictures: "3 inside, cut 1"."""
    return f"{row['number']} {row['side']}, cut {row['order']}"


def _label_point(contour):
    """Where to put an outline's label: its highest point (mm)."""
    b = contour.breaks
    t = np.linspace(b[0], b[-1], 512, endpoint=False)
    p = contour(t)
    return p[int(np.argmax(p[:, 1]))]


def _shape_vertices(shape, k):
    """LWPOLYLINE (x, y, bulge) rows of a drawn shape (bulge = tan(θ/4))."""
    rows = []
    for s in shape.segments:
        if s.kind == "curve":
            rows.extend((x * k, y * k, 0.0) for x, y in s.points[:-1])
        elif s.kind == "line":
            rows.append((s.start[0] * k, s.start[1] * k, 0.0))
        else:
            n = 1 if abs(s.sweep) < math.pi * 0.999 else 2  # a full circle needs two bulges
            a0 = math.atan2(s.start[1] - s.center[1], s.start[0] - s.center[0])
            for j in range(n):
                a = a0 + s.sweep * j / n
                x, y = s.center[0] + s.radius * math.cos(a), s.center[1] + s.radius * math.sin(a)
                rows.append((x * k, y * k, math.tan(s.sweep / n / 4.0)))
    return rows


def write_part_dxf(path, outlines, contours, rows, *, toolpaths=None, units="mm", tolerance=0.01,
                   tabs=None, force: bool = True) -> Path:
    """Write the part's drawing (see the module notes); lengths mm in, ``units`` out."""
    from .dxf import fixed_metadata

    with fixed_metadata():  # the same part, the same bytes
        return _write_part_dxf(path, outlines, contours, rows, toolpaths, units, tolerance, tabs, force)


def _write_part_dxf(path, outlines, contours, rows, toolpaths, units, tolerance, tabs, force) -> Path:
    import ezdxf

    from ..path.build import contour_moves
    from .dxf import polyline_vertices

    k = 1.0 / MM_PER_INCH if units == "inch" else 1.0
    doc = ezdxf.new("R2010", setup=False)
    doc.units = ezdxf.units.IN if units == "inch" else ezdxf.units.MM
    doc.header["$MEASUREMENT"] = 0 if units == "inch" else 1
    for name, color in _LAYERS.items():
        doc.layers.add(name, color=color)
    msp = doc.modelspace()
    for i, (o, c, row) in enumerate(zip(outlines, contours, rows)):
        if o.shape is not None:
            msp.add_lwpolyline(_shape_vertices(o.shape, k), format="xyb", close=True,
                               dxfattribs={"layer": "CONTOUR"})
        else:
            mv = contour_moves(c, tolerance=tolerance, moves="arcs")
            for verts, closed in polyline_vertices(mv, scale=k):
                msp.add_lwpolyline(verts.tolist(), format="xyseb", close=closed,
                                   dxfattribs={"layer": "CONTOUR"})
        if toolpaths is not None and toolpaths[i] is not None:
            for verts, closed in polyline_vertices(toolpaths[i], scale=k):  # toolpaths are mm
                msp.add_lwpolyline(verts.tolist(), format="xyseb", close=closed,
                                   dxfattribs={"layer": "TOOLPATH"})
        x, y = _label_point(c) * k
        size = max(2.5 * k, 0.02 * math.sqrt(abs(c.area)) * k)
        msp.add_text(label(row), height=size, dxfattribs={"layer": "LABELS", "insert": (x, y + size)})
    for t in tabs or ():
        msp.add_lwpolyline([(x * k, y * k) for x, y in t["points"]], dxfattribs={"layer": "TABS"})
    from .dxf import save_drawing

    return save_drawing(doc, path, force=force)


def plot_part(path, contours, rows, *, toolpaths=None, units="mm", tabs=None, force: bool = True) -> Path:
    """Draw the part: outlines, tool paths, labels "N side, cut K", tabs (PNG/SVG)."""
    import matplotlib

    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.figure import Figure

    from .plot import tool_lines

    k = 1.0 / MM_PER_INCH if units == "inch" else 1.0
    p = Path(os.fspath(path))
    fmt = p.suffix.lower().lstrip(".")
    with matplotlib.rc_context({"svg.hashsalt": "pathgen", "svg.fonttype": "path"}):
        fig = Figure(figsize=(12, 8))
        FigureCanvasAgg(fig)
        ax = fig.add_subplot(1, 1, 1)
        for i, (c, row) in enumerate(zip(contours, rows)):
            b = c.breaks
            t = np.linspace(b[0], b[-1], max(400, 8 * c.pieces))
            xy = c(t) * k
            ax.plot(xy[:, 0], xy[:, 1], color="black", lw=1.2, label="contour" if i == 0 else None)
            if toolpaths is not None and toolpaths[i] is not None:
                tp = toolpaths[i]
                cut, _ = tool_lines(tp, k)
                for seg in cut:
                    ax.plot(seg[:, 0], seg[:, 1], color="tab:blue", lw=0.8,
                            label="tool center" if i == 0 and seg is cut[0] else None)
            x, y = _label_point(c) * k
            ax.annotate(label(row), (x, y), xytext=(0, 6), textcoords="offset points", ha="center",
                        fontsize=9, color="darkgreen")
        for j, t in enumerate(tabs or ()):
            q = np.asarray(t["points"]) * k
            ax.plot(q[:, 0], q[:, 1], color="magenta", lw=4, solid_capstyle="butt",
                    label="tab (tool rises)" if j == 0 else None)
        ax.set_aspect("equal")
        ax.set_xlabel(f"x ({units})")
        ax.set_ylabel(f"y ({units})")
        ax.set_title(f"{len(rows)} outline{'' if len(rows) == 1 else 's'}: number, side, cutting order")
        ax.legend(loc="best", fontsize=8)
        meta = {"Software": None} if fmt == "png" else {"Date": None, "Creator": None}
        with atomic_paths([p], force=force) as (tmp,):
            with open(tmp, "wb") as fh:
                fig.savefig(fh, format=fmt, dpi=100, metadata=meta, facecolor="white")
    return p
