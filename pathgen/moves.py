"""The plain model of moves: rapid moves, lines and arcs, and the Toolpath.

An early stage (it needs only the errors and the shared geometry): the
checks plan feeds over moves, the path stage builds them and the writers
format them, so every stage that speaks of moves imports them from here
(``pathgen.path.model`` re-exports the same names).

A :class:`Toolpath` stores its moves column-wise in read-only numpy arrays
(one row per move), so that a million-move path costs a few arrays rather
than a million Python objects, and writers can format it vectorized.
Iterating over a toolpath yields the immutable primitives
:class:`Rapid`, :class:`Line` and :class:`Arc`.

Conventions
-----------
* Coordinates are (x, y, z) in the toolpath's ``units`` (mm unless said).
* An arc turns in the XY plane; ``ccw`` is True for counter-clockwise as
  seen from +Z (G3), False for clockwise (G2).  Its z is constant, except
  in ramp and helix entries, where z changes linearly with the swept angle
  (a helical move, G2/G3 with a Z word).
* ``feed`` is in units per minute; a rapid has feed 0 (the machine's rapid).

Move kinds (``Toolpath.kind``): ``RAPID = 0``, ``LINE = 1``, ``ARC_CW = 2``,
``ARC_CCW = 3`` -- the same numbers as the G words G0..G3.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Iterator

import numpy as np

from .errors import InputError
from .geometry import arc_sweep

__all__ = ["RAPID", "LINE", "ARC_CW", "ARC_CCW", "Rapid", "Line", "Arc", "Toolpath", "move_lengths",
           "lengths", "toolpath_in_units"]

RAPID, LINE, ARC_CW, ARC_CCW = 0, 1, 2, 3


@dataclass(frozen=True)
class Rapid:
    """Rapid move (G0) from ``start`` to ``end``, (x, y, z) each."""

    start: tuple[float, float, float]
    end: tuple[float, float, float]
    feed: float = 0.0


@dataclass(frozen=True)
class Line:
    """Straight cutting move (G1) from ``start`` to ``end`` at ``feed``."""

    start: tuple[float, float, float]
    end: tuple[float, float, float]
    feed: float


@dataclass(frozen=True)
class Arc:
    """Circular move in the XY plane at constant z.

    ``center`` is (x, y); ``ccw`` True means counter-clockwise (G3).
    """

    start: tuple[float, float, float]
    end: tuple[float, float, float]
    center: tuple[float, float]
    ccw: bool
    feed: float

    @property
    def radius(self) -> float:
        return float(np.hypot(self.start[0] - self.center[0], self.start[1] - self.center[1]))


def _frozen(a, dtype=np.float64) -> np.ndarray:
    a = np.ascontiguousarray(a, dtype=dtype)
    a.setflags(write=False)
    return a


@dataclass(frozen=True, eq=False)
class Toolpath:
    """A sequence of moves plus what a writer needs to know about them.

    Attributes
    ----------
    kind : (k,) int8 array of RAPID, LINE, ARC_CW, ARC_CCW.
    start, end : (k, 3) float arrays, (x, y, z) of each move.
    center : (k, 2) float array, arc centers (0 for rapids and lines).
    feed : (k,) float array, units per minute (0 for rapids).
    units : "mm" or "inch".
    tool_diameter : tool diameter in ``units`` (0 when cutting on the line
        with no tool given).
    side : "outside", "inside" or "on".
    tolerance : the promised maximum distance of the cutting moves from the
        exact (offset) curve, in ``units``.
    deviation : the measured maximum distance, <= tolerance.
    time : estimated cycle time in seconds (0 when not estimated).
    info : extra read-only facts for writers (e.g. "direction": "climb",
        "passes": 3, "safe_height": 5.0, "plunge_feed": 300.0).
    """

    kind: np.ndarray
    start: np.ndarray
    end: np.ndarray
    center: np.ndarray
    feed: np.ndarray
    units: str = "mm"
    tool_diameter: float = 0.0
    side: str = "on"
    tolerance: float = 0.01
    deviation: float = 0.0
    time: float = 0.0
    info: dict = field(default_factory=dict)

    def __post_init__(self):
        k = len(self.kind)
        set_ = object.__setattr__
        set_(self, "kind", _frozen(self.kind, np.int8).reshape(k))
        set_(self, "start", _frozen(self.start).reshape(k, 3))
        set_(self, "end", _frozen(self.end).reshape(k, 3))
        set_(self, "center", _frozen(self.center).reshape(k, 2))
        set_(self, "feed", _frozen(self.feed).reshape(k))
        if self.units not in ("mm", "inch"):
            raise InputError(f"units={self.units!r} is not one of: 'mm', 'inch'")
        for name in ("start", "end", "center", "feed"):
            if not np.all(np.isfinite(getattr(self, name))):
                raise InputError(f"toolpath {name} holds a non-finite value")
        if np.any((self.kind < RAPID) | (self.kind > ARC_CCW)):
            raise InputError("toolpath kind must be 0 (rapid), 1 (line), 2 (cw arc) or 3 (ccw arc)")

    def __len__(self) -> int:
        return len(self.kind)

    def __iter__(self) -> Iterator[Rapid | Line | Arc]:
        for i in range(len(self.kind)):
            yield self[i]

    def __getitem__(self, i: int) -> Rapid | Line | Arc:
        k = int(self.kind[i])
        s = tuple(float(v) for v in self.start[i])
        e = tuple(float(v) for v in self.end[i])
        f = float(self.feed[i])
        if k == RAPID:
            return Rapid(s, e, f)
        if k == LINE:
            return Line(s, e, f)
        c = (float(self.center[i, 0]), float(self.center[i, 1]))
        return Arc(s, e, c, k == ARC_CCW, f)

    @classmethod
    def from_moves(cls, moves, **meta) -> "Toolpath":
        """Build a toolpath from a sequence of Rapid/Line/Arc objects."""
        moves = list(moves)
        k = len(moves)
        kind = np.empty(k, np.int8)
        start = np.empty((k, 3))
        end = np.empty((k, 3))
        center = np.zeros((k, 2))
        feed = np.empty(k)
        for i, m in enumerate(moves):
            start[i] = m.start
            end[i] = m.end
            feed[i] = m.feed
            if isinstance(m, Arc):
                kind[i] = ARC_CCW if m.ccw else ARC_CW
                center[i] = m.center
            elif isinstance(m, Line):
                kind[i] = LINE
            elif isinstance(m, Rapid):
                kind[i] = RAPID
            else:
                raise InputError(f"move {i} is not a Rapid, Line or Arc: {m!r}")
        return cls(kind, start, end, center, feed, **meta)

    @property
    def cutting_length(self) -> float:
        """Length of all cutting moves (lines and arcs), in ``units``."""
        return float(np.sum(move_lengths(self)[self.kind != RAPID]))

    @property
    def block_count(self) -> int:
        """Number of moves (each becomes one G-code block)."""
        return len(self.kind)


def lengths(kind, start, end, center) -> np.ndarray:
    """Length of each move from its columns: 3-D for lines and rapids, in
    the plane for arcs (radius × swept angle; an arc whose ends coincide is
    a full turn).

    >>> float(lengths([ARC_CCW], [[1.0, 0, 0]], [[0, 1.0, 0]], [[0.0, 0.0]])[0]) == np.pi / 2
    True
    """
    kind = np.asarray(kind)
    start, end, center = (np.asarray(a, np.float64) for a in (start, end, center))
    out = np.linalg.norm(end - start, axis=1)
    arcs = kind >= ARC_CW
    if np.any(arcs):
        s, e, c = start[arcs, :2], end[arcs, :2], center[arcs]
        r = np.hypot(*(s - c).T)
        out[arcs] = r * arc_sweep(s, e, c, kind[arcs] == ARC_CCW)
    return out


def move_lengths(path: Toolpath) -> np.ndarray:
    """Length of each move of ``path`` (see :func:`lengths`)."""
    return lengths(path.kind, path.start, path.end, path.center)


#: Keys of ``Toolpath.info`` that hold one length (or a feed, a length per minute).
_INFO_LENGTHS = ("offset", "depth", "step_down", "safe_height", "plunge_feed", "feed", "lead_length",
                 "lead_in_length", "lead_out_length", "helix_radius", "retract_height", "overlap",
                 "tab_height", "rapid_length")
#: Keys of ``Toolpath.info`` that hold one point (x, y).
_INFO_POINTS = ("seam", "entry_xy", "helix_center")


def toolpath_in_units(path: Toolpath, units: str) -> Toolpath:
    """The same toolpath with its lengths in ``units`` ("mm" or "inch").

    Toolpaths are made and kept in mm; the writers call this at the edge,
    when they write a program, a drawing or a report in inch: coordinates,
    arc centers, feeds (per minute), tool diameter, deviation and the
    lengths of ``info`` are multiplied by 1/25.4 (1 inch = 25.4 mm exactly;
    within an ulp of dividing, and what the programs were always written
    from), the tolerance and the approximation target divided by 25.4;
    ``time`` (s) and counts stay.  A path already in ``units`` is returned
    as it is.

    >>> tp = Toolpath.from_moves([Line((0.0, 0.0, 0.0), (25.4, 0.0, 0.0), 254.0)])
    >>> t2 = toolpath_in_units(tp, "inch")
    >>> t2.units, round(float(t2.end[0, 0]), 12), round(float(t2.feed[0]), 12)
    ('inch', 1.0, 10.0)
    """
    if units not in ("mm", "inch"):
        raise InputError(f"units={units!r} is not one of: 'mm', 'inch'")
    if path.units == units:
        return path
    f = 1.0 / 25.4 if units == "inch" else 25.4

    def per(v):  # the tolerances are divided, as the job divides the user's tolerance
        return v / 25.4 if units == "inch" else v * 25.4

    info = dict(path.info)
    if info.get("approximation_target") is not None:
        info["approximation_target"] = per(info["approximation_target"])
    for key in _INFO_LENGTHS:
        if info.get(key) is not None:
            info[key] = info[key] * f
    for key in _INFO_POINTS:
        if info.get(key) is not None:
            info[key] = (info[key][0] * f, info[key][1] * f)
    if info.get("clearance"):
        info["clearance"] = {k: (v * f if k in ("min", "margin", "tool_radius", "x", "y", "z") else v)
                             for k, v in info["clearance"].items()}
    if "trimmed" in info:
        info["trimmed"] = [{**s, **{k: s[k] * f for k in ("x", "y", "radius") if k in s}} for s in info["trimmed"]]
    if info.get("compensation"):
        info["compensation"] = {**info["compensation"], "radius": info["compensation"]["radius"] * f}
    if info.get("tabs"):  # a part's outline cut with tabs (pathgen.path.tabs)
        info["tabs"] = [{**t, **{k: t[k] * f for k in ("x", "y", "s", "width") if t.get(k) is not None},
                         **({"span": tuple(v * f for v in t["span"])} if t.get("span") is not None else {}),
                         **({"points": [[x * f, y * f] for x, y in t["points"]]} if t.get("points") else {})}
                        for t in info["tabs"]]
    if info.get("outlines"):  # a part's joined program (pathgen.path.join)
        info["outlines"] = [{**o, "deviation": o["deviation"] * f,
                             **({"seam": (o["seam"][0] * f, o["seam"][1] * f)} if o.get("seam") is not None else {})}
                            if o.get("deviation") is not None else o for o in info["outlines"]]
    return Toolpath(path.kind, path.start * f, path.end * f, path.center * f, path.feed * f, units=units,
                    tool_diameter=path.tool_diameter * f, side=path.side, tolerance=per(path.tolerance),
                    deviation=path.deviation * f, time=path.time, info=info)
