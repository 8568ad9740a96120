"""The ``pathgen`` command: a thin layer over :func:`pathgen.pipeline.run`.

Commands: check, gcode, dxf, plot, verify, demo, batch (``pathgen COMMAND --help``).

Exit status
-----------
0  done.
1  done, but the tool cannot cut some spot as drawn (see the report's tight
   spots); a script should stop before cutting.  ``verify``: the program
   gouges the part, strays beyond the tolerance, or breaks a rule.
2  bad input or usage: one line on stderr naming the file (and line) and
   what is wrong; no output file is left behind.
3  internal error (a bug in pathgen): one line on stderr and the file that
   holds the details, or "internal check failed" when the program pathgen
   made, read back from its text, strays beyond the tolerance or cuts into
   the part (the figures on stderr); no output file is left behind.
130  interrupted (Ctrl-C or SIGTERM); no output file is left behind.

This module imports only the standard library at load time, so that
``pathgen --help`` is instant; numpy, scipy, ezdxf and matplotlib load
inside the commands that need them.
"""

from __future__ import annotations

import argparse
import math
import os
import sys

from ._options import CAUTION, COMPENSATIONS, ENTRIES, LEADS, MILLING_DIRECTIONS, MOVES, SIDES, UNITS
from ._version import __version__
from .job import DEFAULT_CORNER_ANGLE, JobOptions

__all__ = ["main", "CAUTION"]


EXIT_OK, EXIT_TIGHT, EXIT_BAD, EXIT_INTERNAL = 0, 1, 2, 3

_DESCRIPTION = """\
From ordered outline points to a smooth contour, a machinability check and a
toolpath: G-code, DXF, a report and a picture.

Lengths are in mm (or inch with --units inch), feeds in mm/min (or inch/min),
acceleration in mm/s^2.

exit status: 0 done; 1 done, but the tool cannot reach some spot (see the
report); 2 bad input or usage (one line on stderr, no output file); 3 internal
error (a bug: one line on stderr, details in a file it names).
"""

_EPILOG = """\
example:
  pathgen gcode samples/bracket.csv -o bracket.nc --tool-diameter 6 --machine samples/router.toml

""" + CAUTION

_COMMANDS = {
    "check": (
        "read, fit and check the points; print the summary and the tight spots",
        "pathgen check samples/hook.csv --tool-diameter 6",
    ),
    "gcode": (
        "the whole job: write the program (and its report beside it)",
        "pathgen gcode samples/bracket.csv -o bracket.nc --tool-diameter 6 --depth 3 --step-down 1",
    ),
    "dxf": (
        "write the drawing: points, contour, tool path, tight spots",
        "pathgen dxf samples/profile.csv -o profile.dxf --tool-diameter 6",
    ),
    "plot": (
        "draw the picture (PNG or SVG)",
        "pathgen plot samples/bracket.csv -o bracket.png --tool-diameter 6",
    ),
    "verify": (
        "check a program (e.g. hand-edited) against the part: deviation, gouges, word problems, time",
        "pathgen verify bracket.nc samples/bracket.csv --tool-diameter 6 --machine samples/router.toml",
    ),
    "demo": (
        "write the sample parts and a machine profile into DIR and run the whole job on them",
        "pathgen demo pathgen-demo",
    ),
    "batch": (
        "run the whole job on every points file of a folder, in parallel",
        "pathgen batch parts/ -o programs/ --tool-diameter 6 --machine samples/router.toml",
    ),
}


class _UsageError(Exception):
    """Bad command-line usage (argparse would otherwise exit by itself)."""


class _Parser(argparse.ArgumentParser):
    def error(self, message):  # one line, our exit code, no usage dump
        raise _UsageError(f"{self.prog}: {message}")


def _pair(text: str):
    parts = text.replace(";", ",").split(",")
    try:
        x, y = (float(p) for p in parts)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected X,Y (two numbers), got {text!r}") from None
    return (x, y)


def _number(text: str) -> float:
    try:
        return float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a number, got {text!r}") from None


def _smooth(text: str):
    word = text.strip().lower()
    if word in ("auto", "off"):
        return word
    try:
        return float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected auto, off or a distance, got {text!r}") from None


def _keyed_side(text: str):
    key, sep, side = text.partition("=")
    if not sep or not key.strip() or side.strip() not in ("outside", "inside", "on"):
        raise argparse.ArgumentTypeError(f"expected KEY=SIDE with SIDE outside, inside or on, got {text!r}")
    key = key.strip()
    return (int(key) if key.isdigit() else key), side.strip()


def _angle(text: str):
    return "off" if text.strip().lower() == "off" else _number(text)


def _add_shared(p: argparse.ArgumentParser, *, output: str | None, program: bool = False) -> None:
    """The options every job command shares (one spelling each); ``program``
    adds the options of the G-code program for commands that write one."""
    g = p.add_argument_group("input and fit")
    shape = g.add_mutually_exclusive_group()
    shape.add_argument("--closed", dest="closed", action="store_const", const=True, default=None,
                       help="treat the outline as closed (default: closed when the last point repeats the first)")
    shape.add_argument("--open", dest="closed", action="store_const", const=False,
                       help="treat the outline as open")
    g.add_argument("--end", choices=("not-a-knot", "natural"), default="not-a-knot",
                   help="end condition of an open outline (default: not-a-knot)")
    g.add_argument("--param", choices=("chord", "centripetal", "uniform"), default="chord",
                   help="how the spline parameter advances between points (default: chord)")
    g.add_argument("--units", choices=UNITS,
                   help="units of the points and of every length option (default: a drawing's own units, "
                        "else mm)")
    g.add_argument("--smooth", type=_smooth, default="auto", metavar="auto|off|TOL",
                   help="auto: smooth to the points' measured noise when it would fake curvature, "
                        "else fit exactly (default); off: fit the points exactly; TOL: smooth, "
                        "keeping the contour within TOL of every point")
    g.add_argument("--corner-angle", type=_angle, metavar="DEG", default=DEFAULT_CORNER_ANGLE,
                   help="turning angle above which a point is a sharp corner (default: 40; off: no corners)")
    g.add_argument("--find-arcs", choices=("on", "off"), default="on",
                   help="points files: keep runs of points that lie on a line or a circle (within their "
                        "rounding) as exact lines and arcs (on, default); off: fit splines only")
    g.add_argument("--layer", metavar="NAME", help="DXF input: the layer that holds the outline")
    g.add_argument("--allow-crossing", action="store_true",
                   help="follow a closed outline that crosses itself (a deliberate figure, with --side on); "
                        "otherwise such an outline is refused for cutting")

    g = p.add_argument_group("machine, tool and cut")
    g.add_argument("--machine", metavar="PROFILE.toml", help="machine profile (feed, acceleration, block rate)")
    g.add_argument("--tool-diameter", type=_number, metavar="D", help="cutter diameter")
    g.add_argument("--side", choices=SIDES, default="outside",
                   help="cut outside the outline, inside it (a pocket or hole) or on it (default: outside)")
    g.add_argument("--feed", type=_number, metavar="F",
                   help="programmed cutting feed per minute (default: from the chip load, else 1000 mm/min; "
                        "capped to the machine's highest feed)")
    g.add_argument("--spindle-speed", type=_number, metavar="RPM",
                   help="spindle speed; a program starts the spindle clockwise (S… M3) and stops it at the end (M5)")
    g.add_argument("--flutes", type=_number, metavar="Z", help="cutting edges of the tool (for the chip-load feed)")
    g.add_argument("--chip-load", type=_number, metavar="FZ",
                   help="chip load per tooth; with --flutes and --spindle-speed sets the feed to Z x FZ x RPM")
    g.add_argument("--accel", type=_number, metavar="A", help="machine path acceleration per second squared")
    g.add_argument("--tolerance", type=_number, metavar="E",
                   help="chord tolerance: largest distance of the moves from the curve "
                        "(default: 0.01 mm, 0.00039 inch)")
    g.add_argument("--moves", choices=MOVES, default="arcs",
                   help="write the path as arcs (G2/G3 and G1) or lines only (default: arcs)")

    g = p.add_argument_group("toolpath")
    g.add_argument("--depth", type=_number, metavar="Z", help="total cut depth")
    g.add_argument("--step-down", type=_number, metavar="DZ", help="depth of each pass")
    g.add_argument("--safe-height", type=_number, metavar="H", help="clearance height for rapid moves")
    g.add_argument("--seam", type=_pair, metavar="X,Y", help="start a closed cut nearest to this point")
    g.add_argument("--lead", choices=LEADS, default="arc",
                   help="lead-in and lead-out move (default: arc)")
    g.add_argument("--direction", choices=MILLING_DIRECTIONS, default="climb",
                   help="milling direction with a clockwise (M3) spindle (default: climb)")
    g.add_argument("--plunge-feed", type=_number, metavar="F",
                   help="feed of the plunge to depth per minute (default: half the cutting feed)")
    g.add_argument("--lead-length", type=_number, metavar="L",
                   help="lead size: arc radius or line length (default: the tool diameter, shrunk to fit)")
    g.add_argument("--entry", choices=ENTRIES, default="plunge",
                   help="how the tool goes down to each pass: straight, along the path, or a helix "
                        "(default: plunge)")
    g.add_argument("--ramp-angle", type=_number, metavar="DEG",
                   help="descent angle of a ramp or helix entry, degrees (default: 3)")
    g.add_argument("--retract-height", type=_number, metavar="H",
                   help="height just above the stock where entries start at feed and passes link "
                        "(default: 1 mm, 0.04 in, or the safe height if lower)")
    g.add_argument("--overlap", type=_number, metavar="L",
                   help="go on past the start of a closed cut by L before the lead-out (default: 0)")

    g = p.add_argument_group("part (a drawing, or a text file of several outlines)")
    g.add_argument("--join-gap", type=_number, metavar="G",
                   help="DXF: join open lines, arcs and curves whose ends lie within G (default: 0.01 mm)")
    g.add_argument("--outline-side", action="append", metavar="KEY=SIDE", type=_keyed_side,
                   help="cut outline number KEY (or the outlines on layer KEY) outside, inside or on; "
                        "repeat for more (default: from the nesting, holes inside)")
    g.add_argument("--tabs", type=int, metavar="N", help="N tabs on each outer outline (through-cuts)")
    g.add_argument("--tab-spacing", type=_number, metavar="L", help="about one tab per L of outer outline")
    g.add_argument("--tab-width", type=_number, metavar="W",
                   help="width of the bridge each tab leaves (default: the tool diameter, at least 3 mm)")
    g.add_argument("--tab-height", type=_number, metavar="H",
                   help="height of the tabs above the bottom of the cut (default: half the depth, at most 1 mm)")

    if program:
        g = p.add_argument_group("program")
        g.add_argument("--one-feed", action="store_true",
                       help="write one constant cutting feed instead of the planned feed per block")
        g.add_argument("--line-numbers", action="store_true", help="number the blocks (N words)")
        g.add_argument("--compensation", choices=COMPENSATIONS, default="computed",
                       help="computed (default): the program is the tool-center path; machine: the program "
                            "follows the part line with G41/G42 and a D word, the control offsets it")

    g = p.add_argument_group("output")
    if output == "OUTDIR":
        g.add_argument("-o", "--output", metavar=output, help="folder for the programs and reports (required)")
    elif output:
        suffix = output.split("|")[0].rsplit(".", 1)[-1]
        g.add_argument("-o", "--output", metavar=output,
                       help=f"file to write (default: the input's name with .{suffix}, in the current folder)")
    g.add_argument("--force", action="store_true", help="overwrite existing files")
    g.add_argument("--json", action="store_true", help="print the report as JSON on stdout (nothing else)")
    g.add_argument("--quiet", action="store_true", help="print nothing but errors and the caution")


def build_parser() -> argparse.ArgumentParser:
    """The argument parser (standard library only)."""
    parser = _Parser(prog="pathgen", description=_DESCRIPTION, epilog=_EPILOG,
                     formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--version", action="version", version=f"pathgen {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)
    outputs = {"check": None, "gcode": "PART.nc", "dxf": "PART.dxf", "plot": "PART.png|PART.svg"}
    for name, (summary, example) in _COMMANDS.items():
        p = sub.add_parser(name, help=summary, description=summary[0].upper() + summary[1:] + ".",
                           epilog=f"example:\n  {example}\n\n{CAUTION}",
                           formatter_class=argparse.RawDescriptionHelpFormatter)
        if name in outputs:
            p.add_argument("points", metavar="POINTS", help="points file (.csv .txt .xy .dxf)")
            _add_shared(p, output=outputs[name], program=name == "gcode")
        elif name == "verify":
            p.add_argument("program", metavar="PROGRAM", help="G-code program to check (.nc, .ngc, .tap, any text)")
            p.add_argument("points", metavar="POINTS", help="the part's points file (.csv .txt .xy .dxf)")
            _add_shared(p, output=None)
            p.add_argument("--compensation", choices=("computed", "machine"), default="computed",
                           help="machine: the program follows the part line with G41/G42 and a D word (cutter "
                                "compensation at the control); checked as the control will need it")
        elif name == "demo":
            p.add_argument("directory", metavar="DIR", nargs="?", default="pathgen-demo",
                           help="folder to write into (default: pathgen-demo)")
            _add_shared(p, output=None, program=True)
            p.add_argument("--jobs", type=int, metavar="N", help="worker processes (default: all CPU cores)")
        else:  # batch
            p.add_argument("directory", metavar="DIR", help="folder of points files (.csv .txt .xy .dxf)")
            _add_shared(p, output="OUTDIR", program=True)
            p.add_argument("--jobs", type=int, metavar="N", help="worker processes (default: all CPU cores)")
    return parser


# -- formatting -----------------------------------------------------------------
def _fmt_len(v, units="mm") -> str:
    if v is None:
        return "-"
    if isinstance(v, float) and math.isinf(v):
        return "straight"
    return f"{v:.3f} {units}"


def _fmt_time(seconds) -> str:
    from ._options import duration_text

    return "-" if seconds is None else duration_text(seconds)


def _summary_lines(result) -> list[str]:
    """A short, plain summary: the report's text when there is a report,
    else the contour's facts; then the program and the files written."""
    text = _report_text(result)
    if text:
        # the report's own caution line is left to the command's closing CAUTION
        body = [ln for ln in text.rstrip("\n").splitlines() if ln != CAUTION]
        lines = [f"{result.source}:", *body]
    else:
        f = result.facts
        kind = "closed" if f["closed"] else "open"
        where = ""
        if f["min_radius_at"] is not None:
            x, y = f["min_radius_at"]
            where = f" at x={x:.3f} y={y:.3f} (s={f['min_radius_s']:.3f} mm)"
        lines = [
            f"{result.source}: {f['points']} points, {kind}, {f['pieces']} pieces, {f['corners']} corners",
            f"  length          {_fmt_len(f['length'])}",
            f"  smallest radius {_fmt_len(f['min_radius'])}{where}",
        ]
    tp = result.toolpath
    if tp is not None:  # the toolpath is mm; the summary speaks the job's units
        from .moves import toolpath_in_units
        from .verify.check import _num

        tp = toolpath_in_units(tp, result.units)
        lines.append(f"program: {tp.block_count} blocks, estimated time {_fmt_time(tp.time)} with rapids "
                     f"and plunges, measured deviation {_num(tp.deviation, 4)} {tp.units} "
                     f"(tolerance {_num(tp.tolerance, 4)} {tp.units})")
    if getattr(result, "program", None):
        from .verify.check import summary_lines

        lines += summary_lines(result.program, tp.units if tp is not None else result.units)
    comp = tp.info.get("compensation") if tp is not None else None
    if comp:
        lines.append(f"cutter compensation at the control: {comp['word']} D{comp['register']} (tool "
                     f"{'left' if comp['word'] == 'G41' else 'right'} of travel); the program follows the "
                     f"part line: set D{comp['register']} to the tool radius {comp['radius']:.4f} {tp.units}; "
                     "pathgen replayed the part line, the entry and exit and the swept offset from the text, "
                     "not the control's own offset (verify it on the control)")
    for kind_, p in result.files.items():
        lines.append(f"wrote {kind_}: {p}")
    return lines


def _report_text(result) -> str:
    rep = result.report
    if rep is None:
        return ""
    return rep.to_text(units=result.units)


def _report_json(result) -> str:
    import json

    rep = result.report
    payload = {"source": result.source, "contour": _finite_or_null(_in_units(result.facts, result.units))}
    if rep is not None:
        payload["report"] = rep.to_dict(units=result.units)
    if getattr(result, "program", None):
        from .verify.check import program_dict

        payload["program"] = program_dict(result.program, result.units)
    if result.files:
        payload["files"] = {k: str(v) for k, v in result.files.items()}
    return json.dumps(payload, indent=2, sort_keys=True, allow_nan=False, default=_json_default)


def _in_units(facts: dict, units: str) -> dict:
    """The contour's facts (mm inside) in the job's units, as the report's."""
    if units != "inch":
        return {**facts, "units": "mm"}
    k = 1.0 / 25.4
    out = dict(facts, units="inch")
    for key in ("length", "min_radius", "min_radius_s"):
        if out.get(key) is not None:
            out[key] = out[key] * k
    if out.get("min_radius_at") is not None:
        out["min_radius_at"] = [v * k for v in out["min_radius_at"]]
    if out.get("points") is not None and not isinstance(out["points"], int):
        out["points"] = [[x * k, y * k] for x, y in out["points"]]
    return out


def _json_default(o):
    return str(o)  # paths


def _finite_or_null(record: dict) -> dict:
    """The record with inf/NaN numbers as None (JSON null, never Infinity)."""
    return {k: (None if isinstance(v, float) and not math.isfinite(v) else v) for k, v in record.items()}


# -- commands -------------------------------------------------------------------
def _run_options(a) -> dict:
    """The job's options as the user typed them (for :meth:`JobOptions.from_user`)."""
    return dict(
        closed=a.closed, end=a.end, param=a.param, units=a.units, smooth=a.smooth,
        corner_angle=a.corner_angle, find_arcs=a.find_arcs == "on", layer=a.layer, machine=a.machine,
        tool_diameter=a.tool_diameter, feed=a.feed, accel=a.accel, side=a.side,
        tolerance=a.tolerance, moves=a.moves, depth=a.depth, step_down=a.step_down,
        safe_height=a.safe_height, seam=a.seam, lead=a.lead,
        direction=a.direction, plunge_feed=a.plunge_feed,
        lead_length=a.lead_length, entry=a.entry, ramp_angle=a.ramp_angle,
        retract_height=a.retract_height, overlap=a.overlap,
        spindle_speed=a.spindle_speed, flutes=a.flutes, chip_load=a.chip_load,
        one_feed=getattr(a, "one_feed", False),
        line_numbers=getattr(a, "line_numbers", False), allow_crossing=a.allow_crossing,
        compensation=getattr(a, "compensation", "computed"),
        join_gap=a.join_gap, sides=dict(a.outline_side) if a.outline_side else None, tabs=a.tabs,
        tab_spacing=a.tab_spacing, tab_width=a.tab_width, tab_height=a.tab_height,
    )


def _default_output(points: str, suffix: str) -> str:
    from pathlib import Path

    return str(Path(Path(points).name).with_suffix(suffix))


def _output(a, suffix: str) -> str:
    """The output named by -o (an empty name is an error), else the default."""
    if a.output is not None and not a.output.strip():
        from .errors import ExportError

        raise ExportError("output path is empty: give a file name after -o")
    return a.output if a.output is not None else _default_output(a.points, suffix)


def _emit(result, a, *, caution: str, out=sys.stdout, err=sys.stderr) -> int:
    """Print a result: JSON alone on stdout, or the summary (unless quiet).

    ``caution``: "always" (a program was written: on stdout with the
    summary, else on stderr) or "text" (only with the text summary).
    """
    text = not (a.json or a.quiet)
    if not a.quiet:
        for note in result.notes:
            err.write(f"pathgen {a.command}: note: {' '.join(note.split())}\n")
    if a.json:
        out.write(_report_json(result) + "\n")
    elif text:
        out.write("\n".join(_summary_lines(result)) + "\n")
        if result.tool_cannot_reach:
            out.write("The tool cannot cut some spot as drawn (exit status 1): see the tight spots.\n")
    if caution == "always" or (caution == "text" and text):
        (out if text else err).write(CAUTION + "\n")
    return result.status


def _cmd_job(a, out, err) -> int:
    from .pipeline import run

    opts = JobOptions.from_user(a.points, **_run_options(a))
    files = {}
    if a.command == "gcode":
        target = _output(a, ".nc")
        files["gcode"] = target
        files["report"] = str(_report_path(target))
    elif a.command == "dxf":
        files["dxf"] = _output(a, ".dxf")
    elif a.command == "plot":
        files["plot"] = _output(a, ".png")
    result = run(a.points, opts, force=a.force, progress=_stage_notes(a, err), **files)
    caution = {"gcode": "always", "check": "text"}.get(a.command, "")
    try:
        status = _emit(result, a, caution=caution, out=out, err=err)
        out.flush()
    except (OSError, ValueError) as exc:  # stdout closed or full: the job is not done
        _remove_outputs(result)
        raise OSError(f"cannot print the summary ({_one_line(exc)}); the files written were "
                      "removed") from None
    return status


def _remove_outputs(result) -> None:
    import contextlib

    for path in result.files.values():
        with contextlib.suppress(OSError):
            os.unlink(path)


#: Inputs larger than this (bytes) announce each stage on stderr.
LONG_INPUT_BYTES = 2_000_000


def _stage_notes(a, err):
    """Stage names on stderr for long work (large inputs), when stderr is a
    terminal and --quiet is not given; otherwise None."""
    isatty = getattr(err, "isatty", None)
    if a.quiet or not (callable(isatty) and isatty()):
        return None
    try:
        size = os.path.getsize(a.points)
    except OSError:
        return None
    if size < LONG_INPUT_BYTES:
        return None

    def note(stage):
        err.write(f"pathgen {a.command}: {stage} ...\n")
        err.flush()

    return note


def _report_path(program):
    from pathlib import Path

    p = Path(program)
    return p.with_name(p.stem + ".report.json")


def _progress_bar(err, quiet: bool):
    """A one-line progress bar on stderr, only when it is a terminal."""
    isatty = getattr(err, "isatty", None)
    if quiet or not (callable(isatty) and isatty()):
        return None

    def show(done, total):
        width = 30
        fill = int(width * done / max(total, 1))
        err.write(f"\r[{'#' * fill}{'.' * (width - fill)}] {done}/{total} files")
        if done == total:
            err.write("\n")
        err.flush()

    return show


def _table(rows) -> str:
    """The batch summary table (plain text, fixed columns)."""
    head = ("file", "length mm", "smallest R mm", "tight spots", "blocks", "est. time", "status")

    def cell(v, fmt):
        return "-" if v is None else fmt(v)

    body = []
    for r in rows:
        body.append((
            r["file"],
            cell(r["length"], lambda v: f"{v:.3f}"),
            cell(r["min_radius"], lambda v: "straight" if math.isinf(v) else f"{v:.3f}"),
            cell(r["tight_spots"], str),
            cell(r["blocks"], str),
            cell(r["time"], _fmt_time),
            r["status"],
        ))
    widths = [max(len(head[i]), *(len(b[i]) for b in body)) if body else len(head[i]) for i in range(len(head))]
    lines = []
    for row in (head, *body):
        cells = [row[0].ljust(widths[0])] + [c.rjust(w) for c, w in zip(row[1:-1], widths[1:-1])] + [row[-1]]
        lines.append("  ".join(cells).rstrip())
    lines.insert(1, "  ".join("-" * w for w in widths))
    errors = [f"  {r['file']}: {r['message']}" for r in rows if r["exit"] == 2]
    if errors:
        lines += ["", "skipped (bad input):", *errors]
    internal = [f"  {r['file']}: {r['message']}" for r in rows if r["exit"] == 3]
    if internal:
        lines += ["", "not written (internal check failed, please report it):", *internal]
    return "\n".join(lines) + "\n"


def _emit_rows(rows, a, out, err, footer: str = "") -> int:
    import json

    worst = max((r["exit"] for r in rows), default=EXIT_OK)
    if a.json:
        clean = [_finite_or_null(r) for r in rows]
        out.write(json.dumps({"files": clean, "exit": worst}, indent=2, sort_keys=True, allow_nan=False) + "\n")
    elif not a.quiet:
        out.write(_table(rows))
        done = sum(r["exit"] < 2 for r in rows)
        out.write(f"{done} of {len(rows)} files done\n")
        tight = [r["file"] for r in rows if r["exit"] == 1]
        if tight:
            out.write(f"The tool cannot cut some spot as drawn in: {', '.join(tight)} (see their reports).\n")
        if footer:
            out.write(footer + "\n")
    text = not (a.json or a.quiet)
    (out if text else err).write(CAUTION + "\n")
    return worst


def _cmd_batch(a, out, err) -> int:
    from .pipeline import points_files, run_batch

    if a.output is None:
        raise _UsageError("pathgen batch: -o/--output OUTDIR is required")
    files = points_files(a.directory, outdir=a.output)
    if not files:
        from .errors import InputError

        raise InputError(f"{a.directory}: no points files (.csv .txt .xy .dxf) in this folder")
    rows = run_batch(a.directory, a.output, jobs=a.jobs, files=files,
                     progress=_progress_bar(err, a.quiet), force=a.force, **_run_options(a))
    return _emit_rows(rows, a, out, err)


def _cmd_demo(a, out, err) -> int:
    from .demo import run_demo

    opts = _run_options(a)
    for key in ("machine", "tool_diameter"):  # demo defaults unless given
        if opts[key] is None:
            del opts[key]
    rows = run_demo(a.directory, progress=_progress_bar(err, a.quiet), force=a.force, **opts)
    footer = (f"Wrote the samples, router.toml and every output into {a.directory}/ "
              "(the hook's 2 mm slot is too tight for the demo's 6 mm tool, on purpose).")
    return _emit_rows(rows, a, out, err, footer)


def _program_lengths(facts):
    """(units, mm per unit, formatter of a length in mm) for verify's lines:
    figures are said in the program's own units."""
    u = facts["units"]
    f = 25.4 if u == "inch" else 1.0

    def L(v):
        return "-" if v is None else f"{v / f:.5f} {u}"

    return u, f, L


def _verify_verdict(facts) -> list[str]:
    """verify's last lines: the time as written and the verdict."""
    t = facts["time"]
    return ["estimated cycle time as written: " + ("not known (a feed move has no F)" if t is None
                                                   else _fmt_time(t)),
            "clean" if facts["status"] == 0 else
            "NOT clean (exit status 1): fix the lines named above before cutting"]


def _verify_text(facts, result, a) -> list[str]:
    """The verify command's plain lines (figures in the program's units)."""
    u, f, L = _program_lengths(facts)
    tol = facts["tolerance"]
    lines = [f"{facts['program']} against {result.source}: {len(result.toolpath)} moves expected, "
             f"{facts['moves_measured']} cutting moves along the part measured"]
    verdict = "within" if facts["within_tolerance"] else "OFF"
    where = ""
    if facts["deviation_worst_line"] is not None:
        where = f"; moves to curve {L(facts['deviation_moves_to_curve'])} worst at line {facts['deviation_worst_line']}"
    gap = facts["deviation_gap_at"]
    if gap is not None:
        where += f"; curve to moves {L(facts['deviation_curve_to_moves'])} at x={gap[0] / f:.4f} y={gap[1] / f:.4f}"
    comp = facts.get("compensation")
    what = "of the programmed part line from the contour" if comp else "from the expected tool-center path"
    lines.append(f"deviation {what}: {L(facts['deviation'])} ({verdict} the tolerance "
                 f"{L(tol)}{where})")
    cl = facts["clearance"]
    if comp:  # cutter compensation at the control: what the control will need, and the swept offset
        from .verify.compensated import compensation_lines

        lines += compensation_lines(facts, u)[1:]
    elif cl is None:
        lines.append("clearance: not checked (cutting on the line)")
    else:
        lines.append(f"clearance: the tool center comes {L(cl['smallest'])} from the part at line {cl['line']} "
                     f"(tool radius {L(cl['tool_radius'])})" + ("" if cl["ok"] else ""))
    for g in facts["gouges"]:
        lines.append(f"GOUGE: line {g['line']} cuts {L(g['depth'])} into the part")
    for pr in facts["problems"]:
        if pr["rule"] != "no feed":
            lines.append(f"problem: line {pr['line']}: {pr['message']}" if pr["line"] is not None
                         else f"problem: {pr['message']}")
    nof = facts["feed_moves_without_f"]
    if nof:
        shown = ", ".join(str(n) for n in nof[:10]) + (" ..." if len(nof) > 10 else "")
        lines.append(f"feed moves without F: {len(nof)} (lines {shown})")
    tp = result.toolpath  # mm, whatever the job's units
    want = sorted({round(float(z), 6)
                   for z, k, z1 in zip(tp.start[:, 2], tp.kind, tp.end[:, 2]) if k != 0 and z == z1})
    got = facts["cutting_depths"]

    def zs(v):
        return ", ".join(f"{z / f:g}" for z in v) or "none"

    lines.append(f"cutting depths: {zs(got)} {u} (the path made from the points: {zs(want)} {u})")
    return lines + _verify_verdict(facts)


def _verify_part_text(facts, result) -> list[str]:
    """The verify command's lines for a part (figures in the program's units)."""
    u, f, L = _program_lengths(facts)
    rows = facts["outlines"]
    lines = [f"{facts['program']} against {result.source}: a part of {len(rows)} outlines, "
             f"tolerance {L(facts['tolerance'])}"]
    where = {o.number: o.where for o in result.outlines}
    for r in sorted(rows, key=lambda r: (r["lines"] is None, (r["lines"] or [0])[0])):  # in cutting order
        head = f"outline {r['number']} ({where.get(r['number'], '')}): "
        if r["missing"]:
            lines.append(head + "NOT CUT: no cutting moves of the program follow it")
            continue
        verdict = "within" if r["within_tolerance"] else "OFF"
        extra = ""
        if r["deviation_worst_line"] is not None:
            extra = f"; worst at line {r['deviation_worst_line']}"
        gap = r["deviation_gap_at"]
        if gap is not None and r["deviation_curve_to_moves"] > r["deviation_moves_to_curve"]:
            extra += f"; curve to moves {L(r['deviation_curve_to_moves'])} at x={gap[0] / f:.4f} y={gap[1] / f:.4f}"
        lines.append(head + f"lines {r['lines'][0]}-{r['lines'][1]}, {r['passes']} "
                     f"pass{'es' if r['passes'] != 1 else ''}, deviation {L(r['deviation'])} "
                     f"({verdict} the tolerance{extra})")
        cl = r["clearance"]
        if cl is not None:
            lines.append(f"  clearance: the tool center comes {L(cl['smallest'])} from it at line {cl['line']} "
                         f"(tool radius {L(cl['tool_radius'])})")
        for g in r["gouges"]:
            lines.append(f"  GOUGE: line {g['line']} cuts {L(g['depth'])} into the part")
        t = r["tabs"]
        if t is not None:
            lines.append(f"  tabs: {t['count']} read back (expected {t['expected_count']}), cut "
                         f"{L(t['cut_depth'])} deep under them (expected {L(t['expected_cut_depth'])})"
                         + ("" if t["ok"] else ": NOT as made from the part"))
    m = facts["material"]
    if not m["ok"]:
        lines.append(f"GOUGE: line {m['line']} cuts {L(m['depth'])} into the part's material near "
                     f"x={m['at'][0] / f:.4f} y={m['at'][1] / f:.4f}")
    for ln in facts["stray_runs"]:
        lines.append(f"problem: the cutting moves from line {ln} follow no outline of the part")
    for o in facts["order"]:
        lines.append(f"problem: {o}")
    for pr in facts["problems"]:
        if pr["rule"] != "no feed":
            lines.append(f"problem: line {pr['line']}: {pr['message']}")
    nof = facts["feed_moves_without_f"]
    if nof:
        shown = ", ".join(str(n) for n in nof[:10]) + (" ..." if len(nof) > 10 else "")
        lines.append(f"feed moves without F: {len(nof)} (lines {shown})")
    return lines + _verify_verdict(facts)


def _cmd_verify(a, out, err) -> int:
    import json

    from .pipeline import verify
    from .verify.check import program_dict

    facts, result = verify(a.program, a.points, JobOptions.from_user(a.points, **_run_options(a)))
    part = "outlines" in facts  # a part of several outlines
    if not a.quiet:
        for note in result.notes:
            err.write(f"pathgen verify: note: {' '.join(note.split())}\n")
    if a.json:
        if part:
            from .verify.part import part_verify_dict

            payload = part_verify_dict(facts, facts["units"])
        else:
            payload = program_dict(facts, facts["units"])
        out.write(json.dumps(payload, indent=2, sort_keys=True, allow_nan=False) + "\n")
        err.write(CAUTION + "\n")
    elif not a.quiet:
        out.write("\n".join(_verify_part_text(facts, result) if part else _verify_text(facts, result, a)) + "\n")
        out.write(CAUTION + "\n")
    else:
        err.write(CAUTION + "\n")
    return facts["status"]


def _commands():
    return {"check": _cmd_job, "gcode": _cmd_job, "dxf": _cmd_job, "plot": _cmd_job,
            "batch": _cmd_batch, "demo": _cmd_demo, "verify": _cmd_verify}


def _one_line(exc: BaseException) -> str:
    text = str(exc).strip() or exc.__class__.__name__
    return " ".join(text.split())


def main(argv=None, *, out=None, err=None) -> int:
    """Run the command line; return the exit status (0, 1, 2, 3 or 130)."""
    out = out or sys.stdout
    err = err or sys.stderr
    parser = build_parser()
    import contextlib

    try:
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
            a = parser.parse_args(argv)
    except _UsageError as exc:
        err.write(f"{_one_line(exc)} (see pathgen --help)\n")
        return EXIT_BAD
    except SystemExit as exc:  # --help and --version exit 0 through argparse
        return int(exc.code or 0)
    if a.command is None:
        err.write(f"pathgen: give a command: {', '.join(_COMMANDS)} (see pathgen --help)\n")
        return EXIT_BAD
    from .errors import InternalCheckError, PathgenError
    import signal
    import warnings

    def _terminate(signum, frame):  # SIGTERM ends a run like Ctrl-C: temporary files removed
        raise KeyboardInterrupt

    try:
        previous = signal.signal(signal.SIGTERM, _terminate)
    except ValueError:  # not the main thread: leave signals alone
        previous = None
    try:
        with warnings.catch_warnings():
            # numerical warnings are pathgen's to handle, never the user's to read
            warnings.simplefilter("ignore", RuntimeWarning)
            return _commands()[a.command](a, out, err)
    except InternalCheckError as exc:
        _safe_write(err, f"pathgen {a.command}: {_one_line(exc)} (exit status 3: please report it)\n")
        return EXIT_INTERNAL
    except _UsageError as exc:
        err.write(f"{_one_line(exc)} (see pathgen {a.command} --help)\n")
        return EXIT_BAD
    except (PathgenError, OSError) as exc:
        _safe_write(err, f"pathgen {a.command}: error: {_one_line(exc)}\n")
        return EXIT_BAD
    except KeyboardInterrupt:
        _safe_write(err, f"pathgen {a.command}: interrupted\n")
        return 130
    except (Exception, RecursionError) as exc:  # a bug: never exit 1, which means "tool cannot reach"
        where = _save_traceback(exc)
        _safe_write(err, f"pathgen {a.command}: internal error (a bug in pathgen, not in your input): "
                         f"{exc.__class__.__name__}: {_one_line(exc)[:200]}; details in {where}\n")
        return EXIT_INTERNAL
    finally:
        if previous is not None:
            signal.signal(signal.SIGTERM, previous)


def _safe_write(stream, text: str) -> None:
    try:
        stream.write(text)
        stream.flush()
    except (OSError, ValueError):
        pass


def _save_traceback(exc: BaseException) -> str:
    """Write the traceback of an unexpected error to a file; return its name."""
    import tempfile
    import traceback

    text = "".join(traceback.format_exception(type(exc), exc, exc.__traceback__))
    try:
        fd, name = tempfile.mkstemp(prefix="pathgen-error-", suffix=".txt")
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(f"pathgen {__version__}\n{text}")
        return name
    except OSError:
        return "(could not save the traceback)"
