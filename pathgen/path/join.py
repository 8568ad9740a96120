"""One program for a part: the outlines' toolpaths joined by rapids at safe height.

Each outline's toolpath (from :func:`pathgen.path.build.make_toolpath`)
opens at its lead-in start at safe height and closes with a retract to
safe height.  :func:`join_toolpaths` puts them one after another: the
opening rapid of each toolpath after the first starts where the previous
one retracted, at safe height, so the tool travels between outlines only
at safe height.
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError
from ..geometry import arc_geometry
from .model import RAPID, Toolpath

__all__ = ["join_toolpaths", "intrusion"]


def join_toolpaths(paths, *, rapid_feed: float, outlines=None) -> Toolpath:
    """Join toolpaths in the given order into one.

    Parameters
    ----------
    paths : sequence of Toolpath in mm (as :func:`pathgen.path.build.make_toolpath`
        makes them; a writer converts the joined path when it writes inch),
        same tool and safe height.
    rapid_feed : the machine's rapid speed, mm/min (for the time).
    outlines : list of dicts describing each path's outline (number, side,
        ...), kept in ``info["outlines"]`` with the block range of each.

    Returns
    -------
    Toolpath with ``side="per outline"``, the largest deviation, the summed
    time plus the traverses between outlines, and ``info["rapid_length"]``
    (the traverse length between outlines, mm).
    """
    paths = list(paths)
    if not paths:
        raise InputError("a part needs at least one toolpath")
    _mm_only(paths)
    safe = paths[0].info.get("safe_height")
    for p in paths[1:]:
        if p.info.get("safe_height") != safe:
            raise InputError("the toolpaths of a part must share the safe height")
    kinds, starts, ends, centers, feeds = [], [], [], [], []
    rapid = 0.0
    first_block = []
    n = 0
    for k, p in enumerate(paths):
        start = np.array(p.start)
        if k > 0:
            if p.kind[0] != RAPID or start[0, 2] != p.end[0, 2]:
                raise InputError("each toolpath must open with a rapid at safe height")
            prev = ends[-1][-1]
            start[0] = (prev[0], prev[1], start[0, 2])
            rapid += float(np.hypot(*(p.end[0, :2] - prev[:2])))
        first_block.append(n)
        n += len(p)
        kinds.append(p.kind)
        starts.append(start)
        ends.append(np.array(p.end))
        centers.append(p.center)
        feeds.append(p.feed)
    time = sum(p.time for p in paths) + 60.0 * rapid / rapid_feed
    info = dict(paths[0].info)
    for key in ("seam", "trimmed", "travel", "orientation", "offset"):
        info.pop(key, None)
    info["blocks"] = {key: int(sum(p.info["blocks"][key] for p in paths)) for key in ("rapid", "line", "arc")}
    info["rapid_length"] = rapid
    info["outlines"] = [
        {**(outlines[k] if outlines else {}), "first_block": first_block[k], "blocks": len(p),
         "deviation": float(p.deviation), "seam": p.info.get("seam"), "travel": p.info.get("travel")}
        for k, p in enumerate(paths)]
    return Toolpath(np.concatenate(kinds), np.vstack(starts), np.vstack(ends), np.vstack(centers),
                    np.concatenate(feeds), units="mm", tool_diameter=paths[0].tool_diameter,
                    side="per outline", tolerance=paths[0].tolerance,
                    deviation=max(p.deviation for p in paths), time=float(time), info=info)


def intrusion(path: Toolpath, material, *, step: float = 0.05) -> tuple[float, tuple | None]:
    """How deep the tool disc of ``path`` enters ``material`` (mm), and where.

    ``path`` and ``material`` (a shapely (multi)polygon of the part) are mm.  The cutting
    moves of the deepest pass (every pass has the same XY) are sampled at
    most ``step`` mm apart (arcs as arcs); at each tool-center sample at
    distance δ from the material the disc of radius r enters by r − δ
    (δ = 0 inside).  δ is measured to the material's boundary sampled every
    0.01 mm (a KD-tree): the nearest sample lies at most √(δ² + 0.005²)
    away, so δ is taken as √(d² − 0.005²) from the nearest-sample distance
    d, never more than the truth.  Returns
    (depth, (x, y)) of the deepest sample, or (0, None) when clear.
    """
    import shapely

    _mm_only([path])
    r = 0.5 * path.tool_diameter
    zmin = float(min(path.start[:, 2].min(), path.end[:, 2].min()))
    cut = (path.kind != RAPID) & (path.end[:, 2] == zmin) & (path.start[:, 2] == zmin)
    pts = []
    for i in np.flatnonzero(cut):
        s, e = path.start[i, :2], path.end[i, :2]
        if path.kind[i] == 1:
            n = max(2, int(np.ceil(np.hypot(*(e - s)) / step)) + 1)
            u = np.linspace(0.0, 1.0, n)[:, None]
            pts.append(s + u * (e - s))
        else:
            c = path.center[i]
            rr, a0, sw = (float(v) for v in arc_geometry(s, e, c, path.kind[i] == 3))
            n = max(2, int(np.ceil(abs(sw) * rr / step)) + 1)
            a = a0 + np.linspace(0.0, sw, n)
            pts.append(np.c_[c[0] + rr * np.cos(a), c[1] + rr * np.sin(a)])
    if not pts:
        return 0.0, None
    p = np.vstack(pts)
    tree = material_tree(material)
    d, _ = tree.query(p)
    d = np.sqrt(np.maximum(d * d - 0.005**2, 0.0))
    shapely.prepare(material)
    d = np.where(shapely.contains_xy(material, p[:, 0], p[:, 1]), 0.0, d)
    depth = r - d
    i = int(np.argmax(depth))
    if depth[i] <= 0:
        return 0.0, None
    return float(depth[i]), (float(p[i, 0]), float(p[i, 1]))


def _mm_only(paths) -> None:
    """Refuse toolpaths not in mm: lengths are mm inside, converted only where
    input is read and output written (:func:`pathgen.moves.toolpath_in_units`)."""
    for p in paths:
        if p.units != "mm":
            raise InputError(f"a part's toolpaths are joined and measured in mm, got one in {p.units} "
                             "(convert it with pathgen.moves.toolpath_in_units(path, 'mm'))")


_TREES: dict = {}


def material_tree(material):
    """KD-tree of the material's boundary sampled every 0.01 mm (kept for
    the last material asked, so the outlines of one part share it)."""
    import shapely
    from scipy.spatial import cKDTree

    key = id(material)
    if key not in _TREES:
        _TREES.clear()
        edge = shapely.segmentize(material.boundary, 0.01)
        _TREES[key] = (material, cKDTree(shapely.get_coordinates(edge)))
    return _TREES[key][1]
