"""A picture of the contour for people: PNG or SVG, readable at a glance.

It shows the input points, the contour, a curvature comb along it (lines
along the normal whose length is proportional to the curvature, on the
outer side of each bend), the tool-center path of the final pass and the
rapid moves, the tight spots circled and labelled with their radius and
allowed feed, a scale bar, the units, a legend and the caution.

matplotlib is imported inside the functions (the Agg renderer, no pyplot
state), so importing this module is cheap.  The files carry no dates:
the same input gives the same bytes (SVG ids are salted with a constant).
"""

from __future__ import annotations

import math
import os
from pathlib import Path

import numpy as np

from .._options import CAUTION, CAUTION_LINES, MM_PER_INCH, UNITS, check_option, duration_text
from ..moves import toolpath_in_units
from ..errors import InputError
from ..path.model import ARC_CCW, ARC_CW, LINE, RAPID, Toolpath
from ._atomic import atomic_paths

__all__ = ["plot", "plot_figure", "CAUTION"]


#: at most this many tight spots get a text label (the tightest first)
MAX_LABELS = 12
#: at most this many input points are drawn (every k-th beyond)
MAX_POINTS_SHOWN = 20_000

_COLORS = {
    "points": "#222222",
    "contour": "#1f5fbf",
    "comb": "#9a7bc4",
    "tool": "#d9480f",
    "rapid": "#7a7a7a",
    "spot": "#c2185b",
}


def _nice(x: float) -> float:
    """1, 2 or 5 times a power of ten, at most x."""
    if x <= 0 or not math.isfinite(x):
        return 1.0
    p = 10 ** math.floor(math.log10(x))
    for m in (5, 2, 1):
        if m * p <= x:
            return m * p
    return p


def _fmt(v: float, digits: int = 3) -> str:
    v = float(v)
    if not math.isfinite(v):
        return "-"
    return np.format_float_positional(v + 0.0, precision=digits, unique=False, fractional=False, trim="-")


def tool_lines(tp: Toolpath, k: float):
    """(cut polyline list, rapid segments) in display units, final pass only."""
    from .dxf import polyline_vertices

    runs = []
    to_mm = 1.0 if tp.units == "mm" else MM_PER_INCH  # cuts and rapids alike: mm, then display units
    for verts, closed in polyline_vertices(tp, scale=to_mm * k, final_pass=True):
        v = np.vstack([verts, verts[:1]]) if closed else verts
        p, q, b = v[:-1, :2], v[1:, :2], v[:-1, 4]
        nseg = len(p)
        steps = 12 if nseg <= 20_000 else 3
        u = np.linspace(0.0, 1.0, steps + 1)[:-1]
        # points along each segment: straight, or on the arc of bulge b
        chord = q - p
        c = np.hypot(chord[:, 0], chord[:, 1])
        theta = 4.0 * np.arctan(b)  # signed included angle, + counter-clockwise
        with np.errstate(divide="ignore", invalid="ignore"):
            left = np.column_stack([-chord[:, 1], chord[:, 0]]) / np.where(c > 0, c, 1.0)[:, None]
            dist = np.where(b != 0, c * (1 - b * b) / (4 * np.where(b != 0, b, 1.0)), 0.0)
        center = (p + q) / 2 + left * dist[:, None]
        r = np.hypot(*(p - center).T)
        a0 = np.arctan2(p[:, 1] - center[:, 1], p[:, 0] - center[:, 0])
        ang = a0[:, None] + theta[:, None] * u[None, :]
        arc_pts = np.stack([center[:, None, 0] + r[:, None] * np.cos(ang),
                            center[:, None, 1] + r[:, None] * np.sin(ang)], axis=-1)
        line_pts = p[:, None, :] + chord[:, None, :] * u[None, :, None]
        pts = np.where((b != 0)[:, None, None], arc_pts, line_pts).reshape(-1, 2)
        runs.append(np.vstack([pts, q[-1:]]))
    rapid = tp.kind == RAPID
    moves_xy = np.any(tp.start[:, :2] != tp.end[:, :2], axis=1)
    sel = rapid & moves_xy
    segs = np.stack([tp.start[sel, :2], tp.end[sel, :2]], axis=1) * to_mm * k
    return runs, segs


def _start_marks(tp: Toolpath, k: float):
    """(entry xy, start xy, unit direction, entry kind) in display units, or
    None when the toolpath does not say where it starts."""
    info = tp.info
    if "entry_xy" not in info or "seam" not in info:
        return None
    scale = (1.0 if tp.units == "mm" else MM_PER_INCH) * k
    seam = np.asarray(info["seam"], float)
    cut = np.flatnonzero((tp.kind != RAPID) & np.any(tp.start[:, :2] != tp.end[:, :2], axis=1)
                         & (np.hypot(*(tp.start[:, :2] - seam).T) <= 1e-6 * max(1.0, float(np.abs(seam).max())))
                         & (tp.start[:, 2] == tp.end[:, 2]))
    if not len(cut):
        return None
    i = int(cut[0])
    s, e = tp.start[i, :2], tp.end[i, :2]
    if tp.kind[i] == LINE:
        t = e - s
    else:
        rel = s - tp.center[i]
        t = np.array([-rel[1], rel[0]]) if tp.kind[i] == ARC_CCW else np.array([rel[1], -rel[0]])
    t = t / max(float(np.hypot(*t)), 1e-300)
    entry = np.asarray(info["entry_xy"], float)
    return tuple(entry * scale), tuple(seam * scale), tuple(t), str(info.get("entry", "plunge"))


def _group_spots(spots, near: float) -> list[list[int]]:
    """Groups of spots chained by distances <= ``near``; tightest groups first.

    Each group lists its spots by index, its tightest (lowest allowed feed)
    spot first.
    """
    n = len(spots)
    xy = np.array([(sp[0], sp[1]) for sp in spots], float).reshape(n, 2)
    feed = np.array([sp[3] if math.isfinite(sp[3]) else math.inf for sp in spots])
    label = np.arange(n)
    close = np.hypot(*(xy[:, None, :] - xy[None, :, :]).transpose(2, 0, 1)) <= near if n <= 2000 else np.eye(n, dtype=bool)
    for _ in range(n):  # single-linkage: spread the smallest label along "close" until stable
        new = np.where(close, label[None, :], n).min(axis=1)
        if np.array_equal(new, label):
            break
        label = new
    groups = {}
    for i in sorted(range(n), key=lambda i: (feed[i], i)):
        groups.setdefault(int(label[i]), []).append(i)
    return list(groups.values())


def _spot_label(spots, members, u: str) -> str:
    """'3: reason' / '1-4: reason' and the smallest radius and lowest feed."""
    nums = [m + 1 for m in members]
    if len(nums) == 1:
        ids = str(nums[0])
    elif nums == list(range(nums[0], nums[-1] + 1)):
        ids = f"{nums[0]}–{nums[-1]}"
    else:
        ids = ", ".join(map(str, nums))
    reasons = sorted({spots[m][4] for m in members})
    radius = min(spots[m][2] for m in members)
    feed = min(spots[m][3] for m in members)
    rtext = "sharp corner" if radius == 0 else f"R {_fmt(radius)} {u}"
    # a spot the tool cannot reach has no feed: it cannot be cut at all
    ftext = "cannot cut" if not feed > 0 else f"F {_fmt(feed)} {u}/min"
    return f"{ids}: {reasons[0] if len(reasons) == 1 else 'several reasons'}\n{rtext}, {ftext}"


def plot_figure(contour, *, points=None, toolpath=None, report=None, units: str = "mm"):
    """The picture as a matplotlib Figure (not saved; for notebooks and tests).

    Parameters are those of :func:`plot`.  Tight-spot markers carry the
    artist ids (gid) ``tight-spot-1``, ``tight-spot-2``, …; spots within 5 %
    of the drawing's size share one label, whose id names its tightest spot
    (``tight-spot-label-N``); up to 12 labels, the tightest first.
    """
    from matplotlib.collections import LineCollection
    from matplotlib.figure import Figure
    from matplotlib.lines import Line2D
    from matplotlib.patches import Circle
    from mpl_toolkits.axes_grid1.anchored_artists import AnchoredSizeBar

    units = check_option("units", units, UNITS)
    k = 1.0 / MM_PER_INCH if units == "inch" else 1.0
    u = "in" if units == "inch" else "mm"
    if toolpath is not None and not isinstance(toolpath, Toolpath):
        raise InputError(f"toolpath must be a Toolpath, got {type(toolpath).__name__}")

    fig = Figure(figsize=(12, 8), dpi=100)
    ax = fig.add_axes((0.06, 0.13, 0.64, 0.77))  # room below for the two lines of the caution
    ax.set_aspect("equal", adjustable="datalim")
    legend = []

    # contour and curvature comb
    n = int(min(4000, max(400, 20 * contour.pieces)))
    t = contour.sample(n)
    if contour.closed:
        t = np.r_[t, t[:1]]
    xy = contour(t) * k
    x0, y0, x1, y1 = (v * k for v in contour.bbox)
    size = max(math.hypot(x1 - x0, y1 - y0), 1e-9)
    ts = contour.sample(720)
    if contour.closed:
        ts = np.r_[ts, ts[:1]]
    kappa = contour.curvature(ts) / k  # 1/display unit
    nrm = contour.normal(ts)
    pc = contour(ts) * k
    ref = float(np.percentile(np.abs(kappa), 95)) if len(kappa) else 0.0
    if ref > 0:
        scale = 0.08 * size / ref
        cap = 0.16 * size
        length = np.clip(kappa * scale, -cap, cap)
        tips = pc - length[:, None] * nrm  # on the outer side of each bend
        teeth = np.stack([pc, tips], axis=1)[::2]
        ax.add_collection(LineCollection(teeth, colors=_COLORS["comb"], linewidths=0.8, alpha=0.7, zorder=1))
        env = tips.copy()
        env[np.abs(kappa * scale) > cap] = np.nan  # no envelope across clipped (very tight) teeth
        ax.plot(env[:, 0], env[:, 1], color=_COLORS["comb"], lw=0.9, alpha=0.8, zorder=1)
        legend.append(Line2D([], [], color=_COLORS["comb"], lw=1.5,
                             label="curvature comb (length ∝ 1/radius)"))
    ax.plot(xy[:, 0], xy[:, 1], color=_COLORS["contour"], lw=2.2, zorder=3, label="contour")
    legend.append(Line2D([], [], color=_COLORS["contour"], lw=2.2, label="contour"))

    # input points
    pts = np.asarray(contour.points if points is None else points, float)
    if pts.ndim != 2 or pts.shape[1] != 2:
        raise InputError(f"points must be an (n, 2) array of x, y, got shape {pts.shape}")
    if len(pts):
        step = max(1, math.ceil(len(pts) / MAX_POINTS_SHOWN))
        shown = pts[::step] * k
        ax.plot(shown[:, 0], shown[:, 1], "o", ms=3.2 if len(shown) < 2000 else 1.2,
                color=_COLORS["points"], zorder=4)
        label = f"input points ({len(pts)})" if step == 1 else f"input points ({len(pts)}, every {step}th shown)"
        legend.append(Line2D([], [], marker="o", ls="", ms=5, color=_COLORS["points"], label=label))

    # tool-center path
    if toolpath is not None:
        toolpath = toolpath_in_units(toolpath, "mm")  # drawn from mm, in the picture's units
        runs, rapids = tool_lines(toolpath, k)
        for run in runs:
            ax.plot(run[:, 0], run[:, 1], color=_COLORS["tool"], lw=1.6, ls="-", zorder=2)
        if len(rapids):
            ax.add_collection(LineCollection(rapids, colors=_COLORS["rapid"], linewidths=1.0,
                                             linestyles=(0, (4, 3)), zorder=2))
            legend.append(Line2D([], [], color=_COLORS["rapid"], lw=1.0, ls=(0, (4, 3)), label="rapid moves"))
        if runs:
            d = toolpath.tool_diameter * k
            legend.append(Line2D([], [], color=_COLORS["tool"], lw=1.6,
                                 label=f"tool center, {_fmt(d)} {u} tool, {toolpath.side}"))
        marks = _start_marks(toolpath, k)
        if marks is not None:
            (ex, ey), (sx, sy), (tx, ty), entry = marks
            ax.plot([ex], [ey], "v", ms=11, color="#6a1b9a", zorder=8, gid="entry")
            hc, hr = toolpath.info.get("helix_center"), toolpath.info.get("helix_radius") or 0.0
            if hc is not None and hr > 0:
                sc = k
                ax.add_patch(Circle((hc[0] * sc, hc[1] * sc), hr * sc, fill=False, ec="#6a1b9a", lw=1.2,
                                    ls=(0, (2, 2)), zorder=8, gid="helix"))
            legend.append(Line2D([], [], marker="v", ls="", ms=9, color="#6a1b9a", label=f"entry: {entry}"))
            arrow = 0.06 * size * k
            ann = ax.annotate("", (sx + tx * arrow, sy + ty * arrow), xytext=(sx, sy), zorder=8,
                              arrowprops=dict(arrowstyle="-|>", color="#6a1b9a", lw=2.2, mutation_scale=18))
            ann.arrow_patch.set_gid("direction")
            ax.plot([sx], [sy], "s", ms=8, mfc="white", mec="#6a1b9a", mew=2, zorder=8, gid="start")
            legend.append(Line2D([], [], marker="s", ls="", ms=8, mfc="white", mec="#6a1b9a", mew=2,
                                 label="start of the cut, arrow: direction"))

    # tight spots: every one circled; nearby ones share a label; the tightest
    # (lowest allowed feed) groups are labelled first
    from .dxf import tight_spot_rows

    spots = [(x * k, y * k, r * k, f * k, text) for x, y, r, f, _, text in tight_spot_rows(report)]
    if spots:
        for i, (x, y, *_rest) in enumerate(spots, start=1):
            ax.plot([x], [y], "o", ms=22, mfc="none", mec=_COLORS["spot"], mew=2.5, zorder=6,
                    gid=f"tight-spot-{i}")
        groups = _group_spots(spots, 0.05 * size)
        cx, cy = (x0 + x1) * k / 2, (y0 + y1) * k / 2
        for g, members in enumerate(groups[:MAX_LABELS]):
            head = members[0]
            x, y = spots[head][0], spots[head][1]
            ang = math.atan2(y - cy, x - cx) + 0.35 * ((g % 3) - 1)
            reach = 80 + 30 * (g % 2)
            off = (reach * math.cos(ang), 0.75 * reach * math.sin(ang))
            ax.annotate(_spot_label(spots, sorted(members), u), (x, y), xytext=off, textcoords="offset points",
                        fontsize=10.5, ha="center", va="center", color="#111111", zorder=7,
                        bbox=dict(boxstyle="round,pad=0.3", fc="white", ec=_COLORS["spot"], lw=1.2),
                        arrowprops=dict(arrowstyle="-", color=_COLORS["spot"], lw=1.2),
                        gid=f"tight-spot-label-{head + 1}")
        labelled = sum(len(m) for m in groups[:MAX_LABELS])
        extra = "" if labelled == len(spots) else f", {labelled} labelled"
        legend.append(Line2D([], [], marker="o", ls="", ms=12, mfc="none", mec=_COLORS["spot"], mew=2.5,
                             label=f"tight spots ({len(spots)}{extra})"))

    ax.autoscale_view()
    ax.margins(0.12)
    ax.set_xlabel(f"x ({u})", fontsize=12)
    ax.set_ylabel(f"y ({u})", fontsize=12)
    ax.tick_params(labelsize=10)
    ax.grid(True, color="#dddddd", lw=0.6)
    bar = _nice(0.2 * (x1 - x0 if x1 > x0 else size))
    ax.add_artist(AnchoredSizeBar(ax.transData, bar, f"{_fmt(bar)} {u}", "lower right", pad=0.6,
                                  color="black", frameon=True, size_vertical=bar / 40, fontproperties={"size": 11}))
    ax.legend(handles=legend, loc="upper left", bbox_to_anchor=(1.02, 1.0), fontsize=11, frameon=False)

    # facts beside the picture
    facts = [f"{'closed' if contour.closed else 'open'} contour",
             f"length {_fmt(contour.length * k, 5)} {u}", f"{len(pts)} points"]
    min_r = getattr(getattr(report, "min_radius", None), "radius", None)
    if min_r is not None and math.isfinite(float(min_r)):
        facts.append(f"smallest radius {_fmt(float(min_r) * k)} {u}")
    if report is not None:
        facts.append(f"tight spots: {len(spots)}")
    if toolpath is not None:
        # the program's estimate, as in the G-code header and the batch table
        facts.append(f"program: {toolpath.block_count} blocks")
        facts.append(f"estimated cycle time {duration_text(toolpath.time)}")
    elif report is not None:
        # no program: one pass along the contour, without rapids or leads
        ct = getattr(report, "cycle_time", None)
        if ct is not None and math.isfinite(float(ct)):
            facts.append(f"one pass along the contour {float(ct):.1f} s")
    fig.text(0.72, 0.32, "\n".join(facts), fontsize=11.5, va="top", family="DejaVu Sans", linespacing=1.6)
    fig.suptitle("pathgen: contour, tool path and tight spots", fontsize=15, x=0.06, ha="left", y=0.97)
    fig.text(0.06, 0.012, "\n".join(CAUTION_LINES), fontsize=10, color="#b00020", weight="bold",
             linespacing=1.3)
    return fig


def plot(path, contour, *, points=None, toolpath=None, report=None, units: str = "mm",
         force: bool = False) -> Path:
    """Draw ``contour`` (and what is given) to a PNG or SVG file.

    Parameters
    ----------
    path : path-like
        ``.png`` (1200 × 800 pixels) or ``.svg``; its folder must exist.
    contour : Contour
        mm.
    points : (n, 2) array, optional
        Input points, mm; default the contour's points; empty draws none.
    toolpath : Toolpath, optional
        Its final-pass cutting moves (tool center) and rapid moves.
    report : CheckReport or any object with ``tight_spots``, optional
        Each spot (x, y mm, min_radius mm, allowed_feed mm/min, reason) is
        circled and, up to 12 of the tightest, labelled.
    units : "mm" or "inch"
        Units shown.
    force : bool
        Replace an existing file.

    Returns
    -------
    pathlib.Path
    """
    import matplotlib

    p = Path(os.fspath(path))
    fmt = p.suffix.lower().lstrip(".")
    if fmt not in ("png", "svg"):
        raise InputError(f"{p}: the picture must be .png or .svg, got {p.suffix or 'no suffix'!r}")
    with matplotlib.rc_context({"svg.hashsalt": "pathgen", "svg.fonttype": "path", "path.simplify": True}):
        fig = plot_figure(contour, points=points, toolpath=toolpath, report=report, units=units)
        from matplotlib.backends.backend_agg import FigureCanvasAgg

        FigureCanvasAgg(fig)
        meta = {"Software": None} if fmt == "png" else {"Date": None, "Creator": None}
        with atomic_paths([p], force=force) as (tmp,):
            with open(tmp, "wb") as fh:
                fig.savefig(fh, format=fmt, dpi=100, metadata=meta, facecolor="white")
    return p
