"""Write the check report next to the program: JSON for programs, text for people.

``part.nc`` → ``part.report.json`` and ``part.report.txt`` (see
:func:`report_paths_for`).  The JSON comes from ``report.to_dict()``, written
with sorted keys, two-space indent and no NaN or infinity (the report turns
non-finite numbers into null; anything else non-finite is refused with the
field named).  The text comes from ``report.to_text()``.  Both files are
written together, atomically: either both appear or neither.
"""

from __future__ import annotations

import json
import math
import os
from pathlib import Path

import numpy as np

from .._options import UNITS, check_option
from ..errors import ExportError
from ..moves import toolpath_in_units
from ._atomic import atomic_paths

__all__ = ["write_report", "report_paths_for", "report_json", "toolpath_section", "toolpath_text"]


def report_paths_for(program_path) -> tuple[Path, Path]:
    """The report files that belong to a program (or any output) file.

    >>> [str(p) for p in report_paths_for("out/part.nc")]
    ['out/part.report.json', 'out/part.report.txt']
    >>> [str(p) for p in report_paths_for("part")]
    ['part.report.json', 'part.report.txt']
    """
    p = Path(os.fspath(program_path))
    base = p.with_suffix("") if p.suffix else p
    return base.with_name(base.name + ".report.json"), base.with_name(base.name + ".report.txt")


def _paths(path) -> tuple[Path, Path]:
    p = Path(os.fspath(path))
    suffix = p.suffix.lower()
    if suffix == ".json":
        return p, p.with_suffix(".txt")
    if suffix == ".txt":
        return p.with_suffix(".json"), p
    return report_paths_for(p)


def _plain(value, where: str):
    """JSON-ready copy of ``value``; numpy scalars and arrays become Python."""
    if isinstance(value, dict):
        out = {}
        for k, v in value.items():
            if not isinstance(k, str):
                raise ExportError(f"report field {where or '<top>'} has a key {k!r} that is not text")
            out[k] = _plain(v, f"{where}.{k}" if where else k)
        return out
    if isinstance(value, (list, tuple)):
        return [_plain(v, f"{where}[{i}]") for i, v in enumerate(value)]
    if isinstance(value, np.ndarray):
        return _plain(value.tolist(), where)
    if value is None or isinstance(value, (str, bool)):
        return value
    if isinstance(value, np.bool_):
        return bool(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        v = float(value)
        if not math.isfinite(v):
            raise ExportError(f"report field {where} is {v}: JSON has no NaN or infinity")
        return v
    raise ExportError(f"report field {where} holds a value of type {type(value).__name__}, which JSON cannot store")


def toolpath_section(tp) -> dict:
    """The program's entry, leads, heights and measured clearance, in the
    toolpath's units (the ``toolpath`` field of the report; docs/report.md);
    the report writers pass it the toolpath converted to the report's units."""
    info = tp.info
    c = info.get("clearance")
    return {
        "units": tp.units,
        "side": tp.side,
        "tool_diameter": float(tp.tool_diameter),
        "entry": info.get("entry"),
        "entry_asked": info.get("entry_asked"),
        "entry_at": list(info["entry_xy"]) if "entry_xy" in info else None,
        "start_at": list(info["seam"]) if "seam" in info else None,
        "ramp_angle": info.get("ramp_angle"),
        "helix_radius": info.get("helix_radius"),
        "lead": info.get("lead"),
        "lead_asked": info.get("lead_asked"),
        "lead_in_length": info.get("lead_in_length"),
        "lead_out_length": info.get("lead_out_length"),
        "overlap": info.get("overlap"),
        "safe_height": info.get("safe_height"),
        "retract_height": info.get("retract_height"),
        "stock_top": info.get("stock_top"),
        "passes": info.get("passes"),
        "depth": info.get("depth"),
        "clearance": None if not c else {k: c[k] for k in ("min", "margin", "tool_radius", "x", "y", "z",
                                                             "move", "role")},
        "deviation": float(tp.deviation),
        "tolerance": float(tp.tolerance),
        # the figures the program's header states, from the same values
        "cutting_length": float(tp.cutting_length),
        "cycle_time": float(tp.time),
        "notes": list(info.get("notes", ())),
    }


def toolpath_text(tp) -> str:
    """The toolpath section as a few lines for people."""
    t = toolpath_section(tp)
    u = t["units"]

    def g(v):
        return "-" if v is None else f"{float(v):.6g}"

    lines = [f"program: entry {t['entry']}"
             + (f" at {g(t['ramp_angle'])} deg" if t["entry"] in ("ramp", "helix") else "")
             + (f", helix radius {g(t['helix_radius'])} {u}" if t["entry"] == "helix" else "")
             + f"; lead {t['lead']} in {g(t['lead_in_length'])} {u}, out {g(t['lead_out_length'])} {u}"
             + f"; overlap {g(t['overlap'])} {u}",
             f"heights: safe {g(t['safe_height'])} {u}, retract {g(t['retract_height'])} {u}, "
             f"stock top {g(t['stock_top'])} {u}; {t['passes']} passes to depth {g(t['depth'])} {u}"]
    c = t["clearance"]
    if c:
        lines.append(f"smallest clearance of the tool center to the part: {g(c['min'])} {u} (tool radius "
                     f"{g(c['tool_radius'])} {u}) at ({g(c['x'])}, {g(c['y'])}, {g(c['z'])}), {c['role']} move")
    else:
        lines.append("clearance: not checked (cutting on the line)")
    lines += [f"note: {n}" for n in t["notes"]]
    return "\n".join(lines) + "\n"


def report_json(report, *, units: str = "mm", toolpath=None) -> str:
    """The report as JSON text: sorted keys, indent 2, ends with a newline.

    >>> class R:
    ...     def to_dict(self): return {"b": np.float64(1.5), "a": [np.int64(2), None]}
    >>> print(report_json(R()), end="")
    {
      "a": [
        2,
        null
      ],
      "b": 1.5
    }
    """
    data = report.to_dict() if units == "mm" else report.to_dict(units=units)
    if not isinstance(data, dict):
        raise ExportError(f"report.to_dict() gave a {type(data).__name__}, not a dict")
    if toolpath is not None:
        data = {**data, "toolpath": toolpath_section(toolpath_in_units(toolpath, units))}
    return json.dumps(_plain(data, ""), allow_nan=False, sort_keys=True, indent=2, ensure_ascii=False) + "\n"


def write_report(report, path, *, units: str = "mm", force: bool = False,
                 program: dict | None = None, toolpath=None, notes=()) -> tuple[Path, Path]:
    """Write ``report`` as JSON and text files, both or neither.

    Parameters
    ----------
    report : CheckReport or any object with ``to_dict()`` and ``to_text()``
    path : path-like
        ``x.json`` or ``x.txt`` names one file and the other gets the other
        suffix; any other name (e.g. the program ``part.nc``) gives
        ``part.report.json`` and ``part.report.txt`` beside it.
    units : "mm" or "inch"
        Units the report states (passed to ``to_dict``/``to_text`` when
        not mm).
    force : bool
        Replace existing files; otherwise ExportError if either exists and
        nothing is written.
    program : dict, optional
        Facts about the program written beside the report (e.g. the cutter
        compensation at the control: ``word``, ``side``, ``register``,
        ``radius``): a ``program`` field in the JSON and a line in the text.
    notes : sequence of str
        The job's notes that belong with its figures (e.g. a feed capped to
        the machine's highest): a ``notes`` field in the JSON, "note:" lines
        in the text.
    toolpath : Toolpath, optional
        Adds the program's ``toolpath`` section (entry, leads, heights,
        measured clearance) to both files.

    Returns
    -------
    (json_path, text_path) : tuple of pathlib.Path
    """
    units = check_option("units", units, UNITS)
    json_path, text_path = _paths(path)
    text_json = report_json(report, units=units, toolpath=toolpath)
    text = report.to_text() if units == "mm" else report.to_text(units=units)
    if not isinstance(text, str):
        raise ExportError(f"report.to_text() gave a {type(text).__name__}, not text")
    if toolpath is not None:
        text = text.rstrip("\n") + "\n" + toolpath_text(toolpath_in_units(toolpath, units))
    if not text.endswith("\n"):
        text += "\n"
    if program:
        data = json.loads(text_json)
        data["program"] = _plain(dict(program), "")
        text_json = json.dumps(data, allow_nan=False, sort_keys=True, indent=2, ensure_ascii=False) + "\n"
        text += "program: " + ", ".join(f"{k} {v}" for k, v in sorted(program.items())) + "\n"
    if notes:
        data = json.loads(text_json)
        data["notes"] = [str(n) for n in notes]
        text_json = json.dumps(data, allow_nan=False, sort_keys=True, indent=2, ensure_ascii=False) + "\n"
        text += "".join(f"note: {n}\n" for n in notes)
    with atomic_paths([json_path, text_path], force=force) as (tmp_json, tmp_text):
        tmp_json.write_bytes(text_json.encode("utf-8"))
        tmp_text.write_bytes(text.encode("utf-8"))
    return json_path, text_path
