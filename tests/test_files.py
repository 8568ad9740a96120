"""Outputs are all or nothing, never clobber an input, and a run's failure
or interruption leaves no file behind (each case as a user met it)."""

from __future__ import annotations

import io
import os
import shutil
import signal
from pathlib import Path

import pytest

import pathgen.pipeline as pipeline
from pathgen.cli import main
from pathgen.export._atomic import Staging, clean_stale
from pathgen.pipeline import _output_stems, points_files

ROOT = Path(__file__).resolve().parent.parent
PLATE = ROOT / "samples" / "profile.csv"  # cut cleanly by the 6 mm tool (exit 0)
JOB = ("--tool-diameter", "6", "--machine", str(ROOT / "samples" / "router.toml"))


def call(*args, out=None):
    out = out if out is not None else io.StringIO()
    err = io.StringIO()
    status = main([str(a) for a in args], out=out, err=err)
    return status, (out.getvalue() if isinstance(out, io.StringIO) else ""), err.getvalue()


def visible(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir())


def test_batch_names_are_unique_by_construction():
    # a.csv and a.txt share a stem; "a_csv" is then also the stem of a_csv.txt
    names = _output_stems([Path("a.csv"), Path("a.txt"), Path("a_csv.txt"), Path("B.csv"), Path("b.txt")])
    assert len({n.lower() for n in names}) == 5, names
    assert names[:3] == ["a_csv", "a_txt", "a_csv-2"]


def test_batch_with_colliding_names_writes_every_program(tmp_path):
    src = tmp_path / "in"
    src.mkdir()
    text = PLATE.read_text()
    for name in ("a.csv", "a.txt", "a_csv.txt"):
        (src / name).write_text(text)
    status, out, err = call("batch", src, "-o", tmp_path / "out", *JOB, "--jobs", "1")
    assert status == 0, (out, err)
    programs = sorted(p.name for p in (tmp_path / "out").glob("*.nc"))
    assert len(programs) == 3, programs


def test_batch_run_twice_in_its_own_folder_reads_the_same_inputs(tmp_path):
    shutil.copy(PLATE, tmp_path / "plate.csv")
    for _ in range(2):
        status, out, err = call("batch", tmp_path, "-o", tmp_path, *JOB, "--jobs", "1", "--force",
                                "--json")
        assert status == 0, err
        assert '"plate.csv"' in out and "report.txt" not in out
    assert points_files(tmp_path, outdir=tmp_path) == [tmp_path / "plate.csv"]


def test_output_equal_to_the_input_is_refused_even_with_force(tmp_path):
    points = tmp_path / "part.csv"
    shutil.copy(PLATE, points)
    before = points.read_bytes()
    status, out, err = call("gcode", points, "-o", points, *JOB, "--force")
    assert status == 2 and "would replace the input" in err, err
    assert points.read_bytes() == before
    assert visible(tmp_path) == ["part.csv"]


def test_empty_output_name_is_refused(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    status, out, err = call("gcode", PLATE, "-o", "", *JOB)
    assert status == 2 and "output path is empty" in err, err
    assert visible(tmp_path) == []


def test_a_failure_between_outputs_leaves_none_of_them(tmp_path, monkeypatch):
    # the program and the report are written, then the picture fails (as a
    # full disk would): nothing of the job may stay
    import pathgen.export.plot as plot_module

    def broken(*args, **kwargs):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(plot_module, "plot", broken)
    out = tmp_path / "part.nc"
    status = pipeline_status(lambda: pipeline.run(PLATE, tool_diameter=6, gcode=out,
                                                   report=tmp_path / "part.report.json",
                                                   plot=tmp_path / "part.png"))
    assert status == "OSError"
    assert visible(tmp_path) == []


def pipeline_status(fn):
    try:
        fn()
    except Exception as exc:  # the error type is the result here
        return type(exc).__name__
    return "ok"


class _FullStream(io.StringIO):
    def write(self, text):
        raise OSError(28, "No space left on device")


def test_stdout_full_removes_the_files_and_says_so(tmp_path):
    out = tmp_path / "part.nc"
    status, _, err = call("gcode", PLATE, "-o", out, *JOB, out=_FullStream())
    assert status == 2 and "removed" in err, err
    assert visible(tmp_path) == []


def test_sigterm_is_handled_like_ctrl_c(tmp_path, monkeypatch):
    # the signal arrives while the outputs are being written
    import pathgen.export.report as report_module

    real = report_module.write_report

    def interrupted(*args, **kwargs):
        real(*args, **kwargs)
        os.kill(os.getpid(), signal.SIGTERM)

    monkeypatch.setattr(report_module, "write_report", interrupted)
    status, out, err = call("gcode", PLATE, "-o", tmp_path / "part.nc", *JOB)
    assert status == 130 and "interrupted" in err
    assert visible(tmp_path) == []
    assert signal.getsignal(signal.SIGTERM) is signal.SIG_DFL  # restored after the run


def test_an_internal_error_exits_3_never_1(tmp_path, monkeypatch):
    import pathgen.checks.report as report_module

    def bug(*args, **kwargs):
        raise ZeroDivisionError("planted")

    monkeypatch.setattr(report_module, "check", bug)
    status, out, err = call("gcode", PLATE, "-o", tmp_path / "part.nc", *JOB)
    assert status == 3, (status, err)
    assert err.count("\n") == 1 and "internal error" in err and "Traceback" not in err
    saved = Path(err.rsplit("details in ", 1)[1].strip())
    assert "ZeroDivisionError: planted" in saved.read_text()
    saved.unlink()
    assert visible(tmp_path) == []


def test_stale_temporary_files_of_a_killed_run_are_cleaned(tmp_path):
    dead = 2 ** 22 + 12345  # above the usual pid range: no such process
    while True:
        try:
            os.kill(dead, 0)
            dead += 1
        except ProcessLookupError:
            break
        except PermissionError:
            dead += 1
    stale = [tmp_path / f".pathgen{dead}-part.nc", tmp_path / f".part.nc.pathgen{dead}.abc123.tmp"]
    live = tmp_path / f".pathgen{os.getpid()}-other.nc"
    user = tmp_path / ".part.nc.keep.tmp"  # not a name pathgen gives
    for p in stale + [live, user]:
        p.write_text("x")
    removed = clean_stale(tmp_path)
    assert sorted(removed) == sorted(stale)
    assert live.exists() and user.exists()
    status, out, err = call("gcode", PLATE, "-o", tmp_path / "part.nc", *JOB)
    assert status == 0, err


def test_a_long_output_name_is_written(tmp_path):
    # 240 characters: the temporary names must not be longer than the file
    # system allows (255 bytes is the common limit)
    name = "p" * 233 + ".nc"
    status, out, err = call("gcode", PLATE, "-o", tmp_path / name, *JOB)
    assert status == 0, err
    assert (tmp_path / name).exists()
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".")]


def test_staging_commits_all_or_nothing(tmp_path):
    with pytest.raises(RuntimeError):
        with Staging() as stage:
            stage.path(tmp_path / "a.nc").write_text("one")
            stage.path(tmp_path / "b.dxf").write_text("two")
            raise RuntimeError("stop before the commit")
    assert visible(tmp_path) == []
