"""Machine, tool and cut: the numbers a check and a toolpath need.

All lengths in mm, feeds in mm/min, acceleration in mm/s², block rate in
blocks per second.  Defaults are conservative (a small hobby router):
they under-promise rather than over-promise what a machine can do.
"""

from __future__ import annotations

from dataclasses import dataclass

from .._options import SIDES, check_option, check_positive

__all__ = ["Machine", "Tool", "Cut", "DEFAULT_MACHINE"]


@dataclass(frozen=True)
class Machine:
    """What the machine can do.

    Parameters
    ----------
    max_feed : highest cutting feed, mm/min.
    max_accel : path acceleration limit, mm/s² (tangential and centripetal).
    block_rate : blocks (G-code lines of motion) the controller processes
        per second.
    rapid_feed : rapid traverse speed, mm/min (for time estimates).
    name : a label for reports.
    """

    max_feed: float = 3000.0
    max_accel: float = 500.0
    block_rate: float = 250.0
    rapid_feed: float = 5000.0
    name: str = "default"

    def __post_init__(self):
        for f in ("max_feed", "max_accel", "block_rate", "rapid_feed"):
            object.__setattr__(self, f, check_positive(f, getattr(self, f)))


@dataclass(frozen=True)
class Tool:
    """The cutter: ``diameter`` in mm (0 means a point, e.g. a laser's kerf ignored)."""

    diameter: float = 6.0

    def __post_init__(self):
        object.__setattr__(self, "diameter", check_positive("tool diameter", self.diameter, allow_zero=True))

    @property
    def radius(self) -> float:
        return self.diameter / 2.0


@dataclass(frozen=True)
class Cut:
    """How to cut: programmed ``feed`` (mm/min), ``side`` and chord ``tolerance`` (mm)."""

    feed: float = 1000.0
    side: str = "outside"
    tolerance: float = 0.01

    def __post_init__(self):
        object.__setattr__(self, "feed", check_positive("feed", self.feed))
        object.__setattr__(self, "tolerance", check_positive("tolerance", self.tolerance))
        check_option("side", self.side, SIDES)


DEFAULT_MACHINE = Machine()
