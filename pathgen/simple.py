"""Is a closed outline one simple loop?  Where does it cross itself, and why.

A part's outline is a simple closed curve: it never crosses or touches
itself.  Points that cross are almost always a mistake a program must not
cut: points out of order (a scan exported unsorted), the outline listed
twice (two laps), or a figure-eight.  :func:`crossing` finds one crossing
of the closed polygon through the points and names the likely cause; the
pipeline refuses to cut such an outline unless the user asks to follow a
deliberate figure on the line.

Notes
-----
A simple outline is recognized by GEOS's ``is_simple`` (0.14 s at 10⁶
points); only an outline that is not simple has its segments searched with
shapely's STRtree (candidate pairs by bounding box, then an exact segment
intersection) for the first crossing and the number of crossings.  The winding of the
polygon (its total turning divided by 2π, the theorem of turning tangents:
a simple loop turns exactly once) tells two laps (turning twice) from a
figure-eight (turning zero times).
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np

from .geometry import turn_angle

__all__ = ["Crossing", "crossing", "turning_number"]


@dataclass(frozen=True)
class Crossing:
    """Where a closed outline first crosses itself.

    ``x``, ``y``: the crossing point (mm); ``rows``: the two segments that
    cross, each as the index of its first point; ``count``: how many pairs
    of segments cross in all; ``turns``: the polygon's turning number;
    ``cause``: "order" (points out of order), "laps" (runs round more than
    once) or "figure" (a loop that crosses itself).
    """

    x: float
    y: float
    rows: tuple
    count: int
    turns: int
    cause: str
    #: the most points between two segments that cross (along the outline,
    #: the shorter way round): a few for the small loops of noise larger
    #: than the spacing, many for a figure-eight or a second lap
    span: int = 0
    #: the points of the polygon looked at
    points: int = 0

    @property
    def local(self) -> bool:
        """Every crossing closes a loop of at most LOCAL_LOOP points, and of
        at most 1/32 of the outline's points."""
        return self.span <= LOCAL_LOOP and 32 * self.span <= self.points

    def hint(self) -> str:
        return {
            "order": "the points look out of order along the outline (sort them along the outline)",
            "laps": f"the outline runs round {abs(self.turns)} times (the same lap listed twice?)",
            "figure": "it crosses itself like a figure-eight",
        }[self.cause]


def turning_number(points) -> int:
    """Total turning of the closed polygon through ``points`` over 2π.

    +1 for a simple counter-clockwise loop, -1 clockwise (sources:
    turning-tangents).

    >>> th = np.linspace(0, 2 * np.pi, 12, endpoint=False)
    >>> turning_number(np.c_[np.cos(th), np.sin(th)])
    1
    >>> turning_number(np.c_[np.cos(2 * th), np.sin(2 * th)][::-1])
    -2
    """
    p = np.asarray(points, dtype=np.float64)
    d = np.roll(p, -1, axis=0) - p
    d = d[np.hypot(d[:, 0], d[:, 1]) > 0]
    e = np.roll(d, -1, axis=0)
    phi = turn_angle(d, e)
    return int(round(float(phi.sum()) / (2 * np.pi)))


#: Loops of at most this many points count as local (see Crossing.span).
LOCAL_LOOP = 16


def crossing(points, *, step: int = 1) -> Crossing | None:
    """The first crossing of the closed polygon through ``points`` (mm), or None.

    Touching segments count as crossing; neighbouring segments (which share
    a point) do not.  ``step`` > 1 looks at every step-th point only (the
    rows given are still indices into ``points``): for points whose noise is
    as large as their spacing, whose own polygon crosses itself in loops a
    few points long while the outline they trace does not.

    Examples
    --------
    >>> crossing([[0, 0], [2, 0], [2, 2], [0, 2]]) is None
    True
    >>> c = crossing([[0, 0], [2, 2], [2, 0], [0, 2]])   # a bow tie
    >>> (c.x, c.y, c.cause)
    (1.0, 1.0, 'figure')
    """
    import shapely

    p = np.asarray(points, dtype=np.float64)
    if step > 1 and len(p) >= 8 * step:
        c = crossing(p[::step])
        if c is None:
            return None
        return dataclasses.replace(c, rows=(c.rows[0] * step, c.rows[1] * step), span=c.span * step,
                                   points=len(p))
    n = len(p)
    if n < 4:
        return None
    if shapely.is_simple(shapely.linearrings(p)):  # GEOS's own test: fast where all is well
        return None
    q = np.roll(p, -1, axis=0)
    segs = shapely.linestrings(np.stack([p, q], axis=1))
    tree = shapely.STRtree(segs)
    i, j = tree.query(segs, predicate="intersects")
    gap = (j - i) % n
    keep = (i < j) & (gap != 1) & (gap != n - 1)
    i, j = i[keep], j[keep]
    if len(i) == 0:
        return None
    first = int(np.lexsort((j, i))[0])
    a, b = int(i[first]), int(j[first])
    where = shapely.intersection(segs[a], segs[b])
    x, y = shapely.get_coordinates(where)[0]
    turns = turning_number(p)
    count = int(len(i))
    if count > max(4, n // 20):
        cause = "order"
    elif abs(turns) >= 2:
        cause = "laps"
    else:
        cause = "figure"
    span = int(np.minimum(gap[keep], n - gap[keep]).max())
    return Crossing(float(x), float(y), (a, b), count, turns, cause, span, n)
