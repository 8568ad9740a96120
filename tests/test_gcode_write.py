"""Writing program files: atomic, refuse to overwrite, byte-identical.

Common practice for files that machines run: write to a temporary file in
the same folder and rename it (POSIX rename is atomic within one file
system), so that a crash never leaves half a program behind.
"""

from __future__ import annotations

import os

import numpy as np
import pytest

import gcode_reader as gr
from pathgen.errors import ExportError, InputError
from pathgen.export import _atomic
from pathgen.export._atomic import atomic_paths, atomic_write
from pathgen.export.gcode import write_gcode
from pathgen.path.model import Arc, Line, Rapid, Toolpath


def _toolpath():
    moves = [
        Rapid((10, 0, 5), (10, 0, 5)),
        Line((10, 0, 5), (10, 0, -1), 200.0),
        Arc((10, 0, -1), (-10, 0, -1), (0, 0), True, 700.0),
        Arc((-10, 0, -1), (10, 0, -1), (0, 0), True, 700.0),
        Rapid((10, 0, -1), (10, 0, 5)),
    ]
    return Toolpath.from_moves(moves, tool_diameter=4.0, side="outside", info={"safe_height": 5.0})


def test_write_gcode_is_byte_identical_across_runs(tmp_path):
    a = write_gcode(_toolpath(), tmp_path / "a.nc", source="ring.csv")
    b = write_gcode(_toolpath(), tmp_path / "b.nc", source="ring.csv", program_name="a")
    assert a.read_bytes() == b.read_bytes()
    assert gr.read(a.read_text()).end_word == "M2"
    assert "(pathgen program: a)" in a.read_text()  # name defaults to the file stem


def test_refuses_to_overwrite_without_force(tmp_path):
    p = tmp_path / "part.nc"
    p.write_text("old program\n")
    with pytest.raises(ExportError, match=r"part.nc already exists; pass force=True \(--force\) to overwrite it"):
        write_gcode(_toolpath(), p)
    assert p.read_text() == "old program\n"
    write_gcode(_toolpath(), p, force=True)
    assert p.read_text().startswith("(pathgen program: part)")
    assert sorted(os.listdir(tmp_path)) == ["part.nc"]


def test_missing_folder_and_folder_target_are_refused(tmp_path):
    with pytest.raises(ExportError, match="folder .*nowhere does not exist"):
        write_gcode(_toolpath(), tmp_path / "nowhere" / "part.nc")
    with pytest.raises(ExportError, match="it is a folder"):
        write_gcode(_toolpath(), tmp_path, force=True)
    with pytest.raises(InputError, match="unknown option"):
        write_gcode(_toolpath(), tmp_path / "x.nc", spindle=100)


def test_a_refused_toolpath_writes_nothing(tmp_path):
    bad = Toolpath.from_moves([Arc((0, 0, 0), (10, 0, 0), (4, 3), True, 100.0)])
    with pytest.raises(ExportError, match="arc move 0"):
        write_gcode(bad, tmp_path / "bad.nc")
    assert os.listdir(tmp_path) == []


def test_failure_in_the_middle_of_writing_leaves_no_file(tmp_path):
    target = tmp_path / "half.nc"

    class Boom(RuntimeError):
        pass

    with pytest.raises(Boom):
        with atomic_paths([target]) as (tmp,):
            with open(tmp, "w") as fh:
                fh.write("G21 G90 G17 G94\nG0 X1")  # half a program
            raise Boom("power cut")
    assert os.listdir(tmp_path) == []


def test_disk_error_at_flush_leaves_no_file(tmp_path, monkeypatch):
    def fail(fd):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(_atomic.os, "fsync", fail)
    with pytest.raises(ExportError, match="cannot write .*part.nc: No space left on device"):
        write_gcode(_toolpath(), tmp_path / "part.nc")
    assert os.listdir(tmp_path) == []


def test_interrupt_during_rename_leaves_no_temp(tmp_path, monkeypatch):
    def interrupted(a, b):
        raise KeyboardInterrupt

    monkeypatch.setattr(_atomic.os, "replace", interrupted)
    with pytest.raises(KeyboardInterrupt):
        atomic_write(tmp_path / "x.txt", "data")
    assert os.listdir(tmp_path) == []


def test_several_files_are_all_or_nothing(tmp_path):
    (tmp_path / "b.txt").write_text("keep")
    with pytest.raises(ExportError, match="b.txt already exists"):
        with atomic_paths([tmp_path / "a.txt", tmp_path / "b.txt"]):
            pass
    assert sorted(os.listdir(tmp_path)) == ["b.txt"]
    with pytest.raises(ExportError, match="same file"):
        with atomic_paths([tmp_path / "c.txt", tmp_path / "c.txt"]):
            pass


def test_new_file_gets_ordinary_permissions(tmp_path):
    p = atomic_write(tmp_path / "perm.nc", "M2\n")
    mask = os.umask(0)
    os.umask(mask)
    assert (p.stat().st_mode & 0o777) == (0o666 & ~mask)  # not mkstemp's 0o600


def test_large_program_round_trips(tmp_path):
    # 20 000 lines on a spiral: the vectorized writer and the reader agree
    n = 20_000
    a = np.linspace(0, 40 * np.pi, n + 1)
    r = 5 + a
    xy = np.column_stack([r * np.cos(a), r * np.sin(a)])
    start = np.column_stack([xy[:-1], np.full(n, -1.0)])
    end = np.column_stack([xy[1:], np.full(n, -1.0)])
    tp = Toolpath(np.ones(n), start, end, np.zeros((n, 2)), np.full(n, 1500.0), info={"safe_height": 2.0})
    p = write_gcode(tp, tmp_path / "spiral.nc")
    prog = gr.read(p.read_text())
    got = np.array([m.end for m in prog.moves if m.g == 1][1:])  # skip the plunge
    assert got.shape == (n, 3)
    assert np.max(np.abs(got - end)) <= 0.5e-4 + 1e-12  # half a unit of the 4th decimal


def test_program_moves_only_where_the_path_goes():
    # A machinist expects the first motion after the safe-height retract to go
    # to the lead-in start, never to an unrequested point such as the work
    # origin (common practice). The planner's rapid from an assumed origin
    # must not become a G0 X0 Y0.
    from pathgen import fit, make_toolpath
    from pathgen.checks.machine import Cut, Tool
    from pathgen.export.gcode import gcode_text

    th = np.linspace(0, 2 * np.pi, 90, endpoint=False)
    contour = fit(np.c_[60 + 20 * np.cos(th), 40 + 20 * np.sin(th)], closed=True)
    tp = make_toolpath(contour, Tool(6.0), Cut(feed=800.0, side="outside", tolerance=0.01))
    prog = gr.read(gcode_text(tp))
    xy = [(m.end[0], m.end[1]) for m in prog.moves if m.end[0] is not None]
    # every position lies near the circle's tool-center path (R + r = 23, lead inside 35)
    assert all(15 < np.hypot(x - 60, y - 40) < 35 for x, y in xy), xy[:3]
    first_xy = next(m for m in prog.moves if m.end[0] is not None)
    np.testing.assert_allclose(first_xy.end[:2], tp.end[0, :2], atol=1e-4)
