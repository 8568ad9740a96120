"""pathgen: from digitized outline points to a checked contour and toolpath.

The public API works on numpy arrays.  Names are imported lazily so that
``import pathgen`` (and the command line's ``--help``) stays fast; the heavy
libraries (scipy, ezdxf, shapely, matplotlib) load only when a function that
needs them is called.

Data flow: ``read_points`` → ``fit`` / ``fit_outline`` (Contour) →
``check`` (report) → ``make_toolpath`` (Toolpath) → writers.
"""

from __future__ import annotations

import importlib

from ._version import __version__
from .errors import ExportError, InputError, PathgenError

# public name -> module that defines it (imported on first use)
_LAZY = {
    "fit": "pathgen.spline",
    "Contour": "pathgen.spline",
    "read_points": "pathgen.points",
    "clean_points": "pathgen.points",
    "Outline": "pathgen.points",
    "fit_outline": "pathgen.outline",
    "estimate_noise": "pathgen.noise",
    "NoiseEstimate": "pathgen.noise",
    "Machine": "pathgen.checks.machine",
    "Tool": "pathgen.checks.machine",
    "Cut": "pathgen.checks.machine",
    "load_machine": "pathgen.checks.machine",
    "check": "pathgen.checks.report",
    "CheckReport": "pathgen.checks.report",
    "plan_feed": "pathgen.checks.feed",
    "FeedPlan": "pathgen.checks.feed",
    "Toolpath": "pathgen.path.model",
    "Rapid": "pathgen.path.model",
    "Line": "pathgen.path.model",
    "Arc": "pathgen.path.model",
    "make_toolpath": "pathgen.path.build",
    "write_gcode": "pathgen.export.gcode",
    "write_dxf": "pathgen.export.dxf",
    "write_report": "pathgen.export.report",
    "plot": "pathgen.export.plot",
    "run": "pathgen.pipeline",
    "run_part": "pathgen.pipeline",
    "JobOptions": "pathgen.job",
}

__all__ = ["__version__", "PathgenError", "InputError", "ExportError", *_LAZY]


def __getattr__(name: str):
    module = _LAZY.get(name)
    if module is None:
        raise AttributeError(f"module 'pathgen' has no attribute {name!r}")
    value = getattr(importlib.import_module(module), name)
    globals()[name] = value
    return value


def __dir__():
    return sorted(__all__)
