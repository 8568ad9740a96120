"""The command line: help, usage errors, exit codes, output on every sample.

Most tests call ``pathgen.cli.main([...])`` in-process (fast); a few run
the real ``python -m pathgen`` in a subprocess.
"""

from __future__ import annotations

import io
import re
import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from pathgen.cli import CAUTION, main

ROOT = Path(__file__).resolve().parent.parent
SAMPLES = ROOT / "samples"
SAMPLE_CSV = sorted(SAMPLES.glob("*.csv"))
BAD = sorted((ROOT / "tests" / "data" / "bad").glob("*"))
#: Exit status of each sample with a 6 mm tool cut outside: the hook's 2 mm
#: slot and the plate's two sharp inside corners cannot be reached by a
#: 3 mm radius (tool-radius rule; sources: tool-radius-rule); without a
#: tool, every sample exits 0.
STATUS_6MM = {"bracket.csv": 0, "hook.csv": 1, "plate.csv": 1, "profile.csv": 0}
COMMANDS = ("check", "gcode", "dxf", "plot", "demo", "batch")
SHARED = (
    "--closed", "--open", "--end", "--param", "--units", "--smooth", "--corner-angle",
    "--tolerance", "--moves", "--tool-diameter", "--side", "--feed", "--accel", "--machine",
    "--depth", "--step-down", "--safe-height", "--seam", "--lead", "--force", "--json", "--quiet",
)


def call(*args):
    """Run main in-process; return (status, stdout, stderr)."""
    out, err = io.StringIO(), io.StringIO()
    status = main([str(a) for a in args], out=out, err=err)
    return status, out.getvalue(), err.getvalue()


def rows_of(path: Path) -> np.ndarray:
    """Independent reading of a sample file ('#' comments, 'x,y' header)."""
    lines = [ln for ln in path.read_text().splitlines() if ln and not ln.startswith("#")][1:]
    return np.array([[float(v) for v in ln.split(",")] for ln in lines])


def assert_one_line_error(status, out, err, *, names=None):
    """Exit 2, exactly one line on stderr, no traceback, nothing on stdout."""
    assert status == 2, (status, out, err)
    assert err.endswith("\n") and err.count("\n") == 1, err
    assert "Traceback" not in err
    assert out == ""
    if names is not None:
        assert names in err, err


# -- help, version, speed of import -------------------------------------------
def test_cli_module_imports_no_heavy_library():
    # `pathgen --help` must stay fast: the heavy libraries load lazily
    # (each costs 0.2-1.2 s to import on this kind of machine; measured in
    # benchmarks/e2e.py, never asserted as a time here).
    code = (
        "import sys, pathgen.cli, pathgen.__main__;"
        "print(sorted(m for m in ('numpy','scipy','ezdxf','matplotlib','shapely') if m in sys.modules))"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, cwd=ROOT, check=True)
    assert out.stdout.strip() == "[]"


def test_help_lists_every_command_with_an_example():
    status, out, err = call("--help")
    assert status == 0 and err == ""
    for name in COMMANDS:
        assert name in out
    assert "example:" in out and "exit status" in out
    assert CAUTION in " ".join(out.split())


@pytest.mark.parametrize("command", COMMANDS)
def test_every_command_help_is_complete(command):
    status, out, err = call(command, "--help")
    assert status == 0 and err == ""
    assert f"example:\n  pathgen {command}" in out
    flat = " ".join(out.split())
    assert CAUTION in flat
    for option in SHARED:
        assert option in out, option
    if command not in ("check", "demo"):
        assert "-o " in out and "--output" in out


def test_version():
    import pathgen

    status, out, _ = call("--version")
    assert status == 0 and out.strip() == f"pathgen {pathgen.__version__}"


# -- usage errors: one line, exit 2 ---------------------------------------------
@pytest.mark.parametrize(
    "args, says",
    [
        (["check"], "POINTS"),
        (["frobnicate"], "frobnicate"),
        (["check", "samples/plate.csv", "--moves", "curves"], "--moves"),
        (["check", "samples/plate.csv", "--seam", "3"], "--seam"),
        (["check", "samples/plate.csv", "--tolerance", "fine"], "--tolerance"),
        (["check", "samples/plate.csv", "--closed", "--open"], "--open"),
        (["check", "samples/plate.csv", "--bogus"], "--bogus"),
    ],
)
def test_usage_errors(args, says):
    assert_one_line_error(*call(*args), names=says)


def test_no_command_is_a_usage_error():
    assert_one_line_error(*call(), names="give a command: check, gcode, dxf, plot, verify, demo, batch")


@pytest.mark.parametrize(
    "args, says",
    [
        (["check", "no/such/file.csv"], "no/such/file.csv"),
        (["check", str(SAMPLES / "plate.csv"), "--tolerance", "-1"], "tolerance"),
        (["check", str(SAMPLES / "plate.csv"), "--tool-diameter", "nan"], "tool diameter"),
        (["check", str(SAMPLES / "plate.csv"), "--seam", "inf,0"], "seam"),
        (["check", str(SAMPLES / "router.toml")], "router.toml"),
    ],
)
def test_bad_values_are_one_line_errors(args, says):
    assert_one_line_error(*call(*args), names=says)


# -- check on every sample ----------------------------------------------------------
@pytest.mark.parametrize("path", SAMPLE_CSV, ids=lambda p: p.name)
def test_check_json_on_every_sample(path):
    status, out, err = call("check", path, "--json")
    assert status == 0  # no tool: nothing it cannot reach
    data = json.loads(out)  # stdout is pure JSON
    facts = data["contour"]
    p = rows_of(path)
    closed = bool(np.array_equal(p[0], p[-1]))
    assert facts["closed"] == closed
    assert facts["points"] == len(p) - closed
    # A curve through the points is at least as long as the polygon through
    # them (the straight segment is the shortest path); dense smooth samples
    # exceed it only slightly.
    q = np.vstack([p[:-1], p[:1]]) if closed else p
    steps = np.hypot(*np.diff(q, axis=0).T)
    polygon = float(np.sum(steps))
    fit = data["report"]["fit"]
    if fit["smoothing"] == "noise":
        # Smoothed to the noise, the contour no longer passes through the
        # points: noise σ normal to a step h lengthens the polygon by about
        # (Δn)²/(2h) with E(Δn)² = 2σ², i.e. by the fraction σ²/h² (derived
        # from Pythagoras); allow four times that.
        shorter = 4.0 * (fit["sigma_used"] / float(np.median(steps))) ** 2
        assert polygon * (1 - shorter) <= facts["length"] <= 1.01 * polygon
    else:
        assert polygon * (1 - 1e-12) <= facts["length"] <= 1.01 * polygon
    if path.name == "plate.csv":
        # a polygon's edges are straight (curvature 0): no finite radius, JSON null
        assert facts["min_radius"] is None
    else:
        assert facts["min_radius"] > 0


@pytest.mark.parametrize("path", SAMPLE_CSV, ids=lambda p: p.name)
def test_check_text_on_every_sample(path):
    status, out, err = call("check", path)
    assert status == 0
    assert out.startswith(f"{path}:")
    assert "smallest radius" in out and "length" in out
    assert CAUTION in out


def test_check_quiet_and_json_keep_stdout_clean():
    path = SAMPLES / "bracket.csv"
    assert call("check", path, "--quiet")[1] == ""
    status, out, err = call("check", path, "--json")
    json.loads(out)
    assert CAUTION not in out


def test_check_is_deterministic_in_a_subprocess():
    cmd = [sys.executable, "-m", "pathgen", "check", "samples/bracket.csv", "--json"]
    a = subprocess.run(cmd, capture_output=True, cwd=ROOT, check=False)
    b = subprocess.run(cmd, capture_output=True, cwd=ROOT, check=False)
    assert a.returncode == 0
    assert a.stdout == b.stdout and len(a.stdout) > 100


def test_bad_input_in_a_subprocess_has_no_traceback():
    bad = ROOT / "tests" / "data" / "bad" / "nan.csv"
    r = subprocess.run([sys.executable, "-m", "pathgen", "check", str(bad)],
                       capture_output=True, text=True, cwd=ROOT, check=False)
    assert r.returncode == 2 and r.stdout == ""
    assert r.stderr.count("\n") == 1 and "nan.csv" in r.stderr and "Traceback" not in r.stderr


# -- the bad-input corpus through every command -------------------------------------
@pytest.mark.skipif(not BAD, reason="bad-input corpus tests/data/bad/ not present")
@pytest.mark.parametrize("command", ["check", "gcode", "dxf", "plot"])
@pytest.mark.parametrize("bad", BAD, ids=lambda p: p.name)
def test_bad_corpus_through_every_command(bad, command, tmp_path):
    args = [command, bad]
    if command != "check":
        suffix = {"gcode": ".nc", "dxf": ".dxf", "plot": ".png"}[command]
        args += ["-o", tmp_path / f"out{suffix}", "--tool-diameter", "6"]
    assert_one_line_error(*call(*args), names=bad.name)
    assert list(tmp_path.iterdir()) == []  # no output file, no temporary file


# -- the whole job on every sample ----------------------------------------------------
def _job(tmp: Path, sample: Path, *extra):
    """`pathgen gcode` in a real subprocess; returns (status, stdout, stderr, program)."""
    tmp.mkdir(exist_ok=True)
    prog = tmp / (sample.stem + ".nc")
    cmd = [sys.executable, "-m", "pathgen", "gcode", str(sample), "-o", str(prog),
           "--tool-diameter", "6", "--machine", str(SAMPLES / "router.toml"), *extra]
    r = subprocess.run(cmd, capture_output=True, text=True, cwd=ROOT, check=False)
    return r.returncode, r.stdout, r.stderr, prog


@pytest.mark.parametrize("sample", SAMPLE_CSV, ids=lambda p: p.name)
def test_gcode_on_every_sample_in_a_subprocess(sample, tmp_path):
    status, out, err, prog = _job(tmp_path / "a", sample)
    assert status == STATUS_6MM[sample.name], err
    assert "Traceback" not in err
    report = json.loads((prog.with_name(prog.stem + ".report.json")).read_text()) \
        if prog.with_name(prog.stem + ".report.json").exists() else None
    # the exit status says what the check found (exit 1: the tool cannot reach)
    status_check, jout, _ = call("check", sample, "--json", "--tool-diameter", "6",
                                 "--machine", SAMPLES / "router.toml")
    assert status == status_check == (1 if json.loads(jout)["report"]["tool_cannot_reach"] else 0)
    if report is not None:
        assert isinstance(report, dict)
    text = prog.read_text()
    # NISTIR 6556 §3.3.2.1: fixed-point numbers, no exponent; never NaN or inf
    assert not re.search(r"[XYZIJF][-+]?\d*\.?\d*[eE]", text)
    assert not re.search(r"nan|inf", text, flags=re.I)
    assert all(len(line) <= 256 for line in text.splitlines())  # §3.3
    assert "Verify" in text and "before cutting" in text  # the caution in the header
    assert CAUTION in " ".join(out.split())  # and on the command line
    assert "wrote gcode" in out
    # same input, same bytes: run again in this process (another process
    # than the first run, with its own hash seed)
    prog2 = tmp_path / "b" / prog.name
    prog2.parent.mkdir()
    status2, _, _ = call("gcode", sample, "-o", prog2, "--tool-diameter", "6", "--machine", SAMPLES / "router.toml")
    assert status2 == status and prog2.read_bytes() == prog.read_bytes()


def test_hook_is_too_tight_for_6mm_but_not_for_2mm(tmp_path):
    # The hook's slot ends in a 2 mm radius (its construction in pathgen.demo,
    # measured ~1.4-2 mm on the noisy points): a 6 mm tool (r = 3) cannot reach
    # it, a 2 mm tool (r = 1) can (tool-radius rule, sources: tool-radius-rule).
    hook = SAMPLES / "hook.csv"
    status, out, _ = call("check", hook, "--tool-diameter", "6")
    assert status == 1 and "tool cannot reach" in out
    status, jout, _ = call("check", hook, "--tool-diameter", "6", "--json")
    spots = json.loads(jout)["report"]["tight_spots"]
    near = [s for s in spots if s["reason"] in ("tool cannot reach", "reach", "tool_cannot_reach")
            and abs(s["x"] - 40.0) < 3.0 and 24.0 < s["y"] < 40.0]
    assert near, spots
    assert call("check", hook, "--tool-diameter", "2")[0] == 0


def test_quiet_gcode_still_prints_the_caution(tmp_path):
    status, out, err = call("gcode", SAMPLES / "profile.csv", "-o", tmp_path / "p.nc",
                            "--tool-diameter", "6", "--quiet")
    assert status == STATUS_6MM["profile.csv"] and out == ""
    assert CAUTION in err


def test_gcode_refuses_to_overwrite(tmp_path):
    target = tmp_path / "p.nc"
    target.write_text("keep")
    assert_one_line_error(*call("gcode", SAMPLES / "profile.csv", "-o", target, "--tool-diameter", "6"),
                          names="--force")
    assert target.read_text() == "keep"
    status, _, _ = call("gcode", SAMPLES / "profile.csv", "-o", target, "--tool-diameter", "6", "--force")
    assert status == STATUS_6MM["profile.csv"] and target.read_text() != "keep"


def test_gcode_without_a_tool_is_refused(tmp_path):
    assert_one_line_error(*call("gcode", SAMPLES / "bracket.csv", "-o", tmp_path / "b.nc"),
                          names="--tool-diameter")
    assert list(tmp_path.iterdir()) == []


@pytest.mark.parametrize("sample", SAMPLE_CSV, ids=lambda p: p.name)
def test_dxf_on_every_sample(sample, tmp_path):
    import ezdxf

    paths = [tmp_path / "a.dxf", tmp_path / "b.dxf"]
    for p in paths:
        status, out, err = call("dxf", sample, "-o", p, "--tool-diameter", "6")
        assert status == STATUS_6MM[sample.name], err
    assert paths[0].read_bytes() == paths[1].read_bytes()
    doc = ezdxf.readfile(paths[0])
    assert len(doc.audit().errors) == 0  # ezdxf's auditor (the DXF reference library)
    msp = doc.modelspace()
    assert len(msp.query("SPLINE")) >= 1
    assert len(msp.query("POINT")) == len(rows_of(sample)) - bool(np.array_equal(rows_of(sample)[0], rows_of(sample)[-1]))


def test_plot_png_and_svg(tmp_path):
    status, out, err = call("plot", SAMPLES / "hook.csv", "-o", tmp_path / "h.png", "--tool-diameter", "6")
    assert status == 1 and "wrote plot" in out
    # PNG signature (PNG specification, ISO/IEC 15948) and a real picture
    assert (tmp_path / "h.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    status, _, _ = call("plot", SAMPLES / "bracket.csv", "-o", tmp_path / "b.svg", "--quiet")
    assert status == 0  # no tool
    assert b"<svg" in (tmp_path / "b.svg").read_bytes()[:2000]


# -- batch and demo ------------------------------------------------------------------
@pytest.fixture
def mixed_folder(tmp_path):
    import shutil

    d = tmp_path / "parts"
    d.mkdir()
    for name in ("plate.csv", "profile.csv"):
        shutil.copy(SAMPLES / name, d / name)
    for name in ("nan.csv", "one_point.csv"):
        shutil.copy(ROOT / "tests" / "data" / "bad" / name, d / name)
    return d


def test_batch_table_and_worst_status(mixed_folder, tmp_path):
    out_dir = tmp_path / "out"
    status, out, err = call("batch", mixed_folder, "-o", out_dir, "--tool-diameter", "6")
    assert status == 2  # the worst case: a bad file
    head = out.splitlines()[0].split()
    assert head[:2] == ["file", "length"] and "status" in head
    for name in ("plate.csv", "profile.csv", "nan.csv", "one_point.csv"):
        assert name in out
    assert "skipped (bad input):" in out and "nan.csv line 3" in out
    assert "2 of 4 files done" in out
    assert sorted(p.name for p in out_dir.iterdir()) == [
        "plate.nc", "plate.report.json", "plate.report.txt",
        "profile.nc", "profile.report.json", "profile.report.txt"]
    assert err == ""  # no progress bar: stderr is not a terminal here
    # the table is the same whatever the number of worker processes
    status1, out1, _ = call("batch", mixed_folder, "-o", tmp_path / "out1", "--tool-diameter", "6", "--jobs", "1")
    assert status1 == status and out1 == out


def test_batch_json_and_good_only(tmp_path, mixed_folder):
    for bad in ("nan.csv", "one_point.csv"):
        (mixed_folder / bad).unlink()
    status, out, err = call("batch", mixed_folder, "-o", tmp_path / "o", "--tool-diameter", "6", "--json")
    data = json.loads(out)
    rows = {r["file"]: r for r in data["files"]}
    assert set(rows) == {"plate.csv", "profile.csv"}
    assert status == data["exit"] == max(r["exit"] for r in rows.values())
    assert all(r["blocks"] > 0 and r["time"] > 0 for r in rows.values())
    assert CAUTION in err


def test_batch_needs_an_output_folder_and_points(tmp_path):
    assert_one_line_error(*call("batch", SAMPLES), names="--output")
    (tmp_path / "empty").mkdir()
    assert_one_line_error(*call("batch", tmp_path / "empty", "-o", tmp_path / "o"), names="no points files")


def test_demo_writes_everything(tmp_path):
    from pathgen import demo

    d = tmp_path / "demo"
    status, out, err = call("demo", d, "--jobs", "2")
    assert status == 1  # the hook's slot is too tight for the demo's 6 mm tool
    names = sorted(p.name for p in d.iterdir())
    for part in demo.PARTS:
        for suffix in (".csv", ".nc", ".report.json", ".report.txt", ".dxf", ".png"):
            assert f"{part}{suffix}" in names, (part, suffix)
    assert "router.toml" in names
    assert (d / "bracket.csv").read_bytes() == (SAMPLES / "bracket.csv").read_bytes()
    assert "hook.csv" in out and "tool cannot reach" in out
    # a second run refuses to overwrite, and changes nothing
    before = {p.name: p.stat().st_mtime_ns for p in d.iterdir()}
    assert_one_line_error(*call("demo", d), names="--force")
    assert {p.name: p.stat().st_mtime_ns for p in d.iterdir()} == before


GOOD = sorted((ROOT / "tests" / "data" / "good").glob("*"))


@pytest.mark.parametrize("good", GOOD, ids=lambda p: p.name)
def test_good_corpus_checks_clean(good):
    status, out, err = call("check", good, "--json")
    assert status == 0, err
    assert json.loads(out)["contour"]["points"] >= 3


def test_dxf_input_needs_a_layer_when_it_holds_two_outlines():
    two = ROOT / "tests" / "data" / "bad" / "two_outlines.dxf"
    assert_one_line_error(*call("check", two), names="--layer")
    status, out, err = call("check", two, "--layer", "OUTER", "--json")
    assert status == 0 and json.loads(out)["contour"]["points"] >= 3


class _Terminal(io.StringIO):
    def isatty(self):
        return True


def test_progress_only_on_a_terminal_and_only_for_long_work(tmp_path, monkeypatch):
    import pathgen.cli as cli

    big = tmp_path / "big.csv"
    th = np.linspace(0, 2 * np.pi, 2000, endpoint=False)
    np.savetxt(big, np.c_[50 * np.cos(th), 30 * np.sin(th)], fmt="%.6f", delimiter=",")
    out, err = io.StringIO(), _Terminal()
    assert main(["check", str(big), "--quiet"], out=out, err=err) == 0
    assert err.getvalue() == ""  # small input: no progress
    monkeypatch.setattr(cli, "LONG_INPUT_BYTES", 1000)
    out, err = io.StringIO(), _Terminal()
    assert main(["check", str(big), "--json"], out=out, err=err) == 0
    assert "pathgen check: read ..." in err.getvalue() and "fit ..." in err.getvalue()
    json.loads(out.getvalue())  # stdout stays clean
    out, err = io.StringIO(), io.StringIO()  # not a terminal: silent
    assert main(["check", str(big), "--json"], out=out, err=err) == 0 and err.getvalue() == ""


def test_corner_angle_option():
    # The plate is a polygon with 8 vertices, each turning by 90 degrees
    # (its construction in pathgen.demo): above the 40-degree default, all
    # corners; with detection off, none and a curved spline instead.
    plate = SAMPLES / "plate.csv"
    facts = json.loads(call("check", plate, "--json")[1])["contour"]
    assert facts["corners"] == 8 and facts["min_radius"] is None
    facts = json.loads(call("check", plate, "--json", "--corner-angle", "off")[1])["contour"]
    assert facts["corners"] == 0 and facts["min_radius"] < 5
    assert_one_line_error(*call("check", plate, "--corner-angle", "200"), names="180")


@pytest.mark.skipif(not BAD, reason="bad-input corpus tests/data/bad/ not present")
def test_batch_on_the_whole_bad_corpus(tmp_path):
    import shutil

    d = tmp_path / "bad"
    shutil.copytree(ROOT / "tests" / "data" / "bad", d)
    status, out, err = call("batch", d, "-o", tmp_path / "out", "--tool-diameter", "6", "--json")
    data = json.loads(out)
    assert status == data["exit"] == 2
    points_files = [p for p in BAD if p.suffix.lower() in (".csv", ".txt", ".xy", ".dxf")]
    assert [r["file"] for r in data["files"]] == [p.name for p in points_files]
    for row in data["files"]:
        assert row["exit"] == 2 and row["file"] in row["message"] and "\n" not in row["message"]
    assert list((tmp_path / "out").iterdir()) == []  # nothing written, no temporary file


def test_direction_and_plunge_feed_reach_the_program(tmp_path):
    # Common practice (M3 spindle, the sense of left cutter compensation G41):
    # an outside cut of a counter-clockwise part is climb when the tool travels
    # clockwise (G2), conventional when it travels counter-clockwise (G3).
    import gcode_reader as gr
    import numpy as np

    th = np.linspace(0, 2 * np.pi, 120, endpoint=False)
    pts = tmp_path / "disc.csv"
    pts.write_text("x,y\n" + "".join(f"{50 + 25 * np.cos(a):.4f},{50 + 25 * np.sin(a):.4f}\n" for a in th))
    senses = {}
    for direction in ("climb", "conventional"):
        nc = tmp_path / f"{direction}.nc"
        code = main([
            "gcode", str(pts), "-o", str(nc), "--tool-diameter", "6", "--direction", direction,
            "--plunge-feed", "123", "--quiet",
        ], out=io.StringIO(), err=io.StringIO())
        assert code == 0
        prog = gr.read(nc.read_text())
        arcs = [m.g for m in prog.moves if m.g in (2, 3)]
        senses[direction] = max(set(arcs), key=arcs.count)
        plunges = [m for m in prog.moves if m.g == 1 and m.start[:2] == m.end[:2] and m.end[2] < m.start[2]]
        assert plunges and all(m.feed == 123 for m in plunges)
    assert senses == {"climb": 2, "conventional": 3}


def test_program_options_spindle_one_feed_line_numbers(tmp_path):
    # NISTIR 6556 §3.3.1 (N words 0-99999), §3.6 (M3 starts the spindle
    # clockwise, M5 stops it, S sets the speed): the words appear when asked.
    import gcode_reader as gr

    nc = tmp_path / "bracket.nc"
    code = main(["gcode", str(SAMPLES / "bracket.csv"), "-o", str(nc), "--tool-diameter", "6",
                 "--spindle-speed", "18000", "--one-feed", "--line-numbers", "--feed", "900", "--quiet"],
                out=io.StringIO(), err=io.StringIO())
    assert code == 0
    text = nc.read_text()
    prog = gr.read(text)
    assert [(w, s) for _, w, s in prog.spindle] == [("M3", 18000.0), ("M5", None)]
    cut_feeds = {m.feed for m in prog.moves if m.g in (1, 2, 3) and m.start[:2] != m.end[:2]}
    assert cut_feeds == {900.0}
    blocks = [ln for ln in text.splitlines() if ln and not ln.startswith("(")]
    assert all(re.match(r"N\d{1,5} ", ln) for ln in blocks)
    assert "(pathgen program: bracket)" in text
