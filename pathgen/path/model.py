"""The toolpath model, kept where the path stage and the writers have always
imported it: the moves themselves live in :mod:`pathgen.moves` (an early
stage, so that the checks can plan feeds over moves without importing the
path stage)."""

from __future__ import annotations

from ..geometry import arc_sweep  # noqa: F401  (re-exported: writers import it from here)
from ..moves import ARC_CCW, ARC_CW, LINE, RAPID, Arc, Line, Rapid, Toolpath, move_lengths  # noqa: F401

__all__ = ["RAPID", "LINE", "ARC_CW", "ARC_CCW", "Rapid", "Line", "Arc", "Toolpath"]
