"""Writing the check report as JSON and text.

Sources beside the checks:
* RFC 8259 (JSON): numbers have no NaN or Infinity; Python's ``json`` module
  (reference library) with ``allow_nan=False`` enforces it and reads the
  file back.
* The real report's own ``to_dict``/``to_text`` (pathgen.checks.report) are
  the content; these tests check that the files hold exactly that.
"""

from __future__ import annotations

import json
import math
import os

import numpy as np
import pytest

from pathgen.errors import ExportError, InputError
from pathgen.export.report import report_json, report_paths_for, write_report
from pathgen.spline import fit


class StandIn:
    """A small report with the two methods the writer uses."""

    def __init__(self, data, text="summary\n"):
        self.data, self.text = data, text

    def to_dict(self, *, units="mm"):
        d = dict(self.data)
        d["units"] = units
        return d

    def to_text(self, *, units="mm"):
        return self.text + f"({units})"


def test_paths_next_to_the_program():
    assert report_paths_for("cuts/part.nc") == (
        report_paths_for("cuts/part.nc")[0].with_name("part.report.json"),
        report_paths_for("cuts/part.nc")[1].with_name("part.report.txt"),
    )
    assert [p.name for p in report_paths_for("a.b.nc")] == ["a.b.report.json", "a.b.report.txt"]


def test_json_and_text_are_written_sorted_and_read_back(tmp_path):
    rep = StandIn({"zeta": np.float64(0.25), "alpha": [np.int64(3), True, None], "mid": {"b": 1, "a": 2.5}})
    js, tx = write_report(rep, tmp_path / "part.nc")
    assert (js.name, tx.name) == ("part.report.json", "part.report.txt")
    raw = js.read_text()
    data = json.loads(raw)  # Python's json reads it back
    assert data == {"zeta": 0.25, "alpha": [3, True, None], "mid": {"a": 2.5, "b": 1}, "units": "mm"}
    assert list(data) == ["alpha", "mid", "units", "zeta"]  # sorted keys, stable
    assert raw.endswith("}\n")
    assert tx.read_text() == "summary\n(mm)\n"


def test_user_named_json_or_text(tmp_path):
    js, tx = write_report(StandIn({"a": 1}), tmp_path / "check.json")
    assert (js.name, tx.name) == ("check.json", "check.txt")
    js, tx = write_report(StandIn({"a": 1}), tmp_path / "notes.txt")
    assert (js.name, tx.name) == ("notes.json", "notes.txt")


def test_inch_is_passed_to_the_report(tmp_path):
    js, tx = write_report(StandIn({"a": 1}), tmp_path / "p.nc", units="inch")
    assert json.loads(js.read_text())["units"] == "inch" and tx.read_text().endswith("(inch)\n")
    with pytest.raises(InputError, match="units='feet' is not one of"):
        write_report(StandIn({}), tmp_path / "q.nc", units="feet")


@pytest.mark.parametrize(
    "data, match",
    [
        ({"spots": [{"min_radius": math.nan}]}, r"report field spots\[0\].min_radius is nan: JSON has no NaN"),
        ({"time": np.float64(np.inf)}, "report field time is inf"),
        ({"shape": object()}, "report field shape holds a value of type object"),
        ({1: "x"}, "has a key 1 that is not text"),
    ],
)
def test_values_json_cannot_hold_are_refused_by_name(tmp_path, data, match):
    with pytest.raises(ExportError, match=match):
        write_report(StandIn(data), tmp_path / "bad.nc")
    assert os.listdir(tmp_path) == []


def test_both_or_neither(tmp_path):
    (tmp_path / "p.report.txt").write_text("old")
    with pytest.raises(ExportError, match="p.report.txt already exists"):
        write_report(StandIn({"a": 1}), tmp_path / "p.nc")
    assert sorted(os.listdir(tmp_path)) == ["p.report.txt"]  # the JSON was not written either
    write_report(StandIn({"a": 1}), tmp_path / "p.nc", force=True)
    assert sorted(os.listdir(tmp_path)) == ["p.report.json", "p.report.txt"]

    class Broken(StandIn):
        def to_text(self, **kw):
            raise RuntimeError("text failed")

    with pytest.raises(RuntimeError, match="text failed"):
        write_report(Broken({"a": 1}), tmp_path / "r.nc")
    assert sorted(os.listdir(tmp_path)) == ["p.report.json", "p.report.txt"]


def test_real_report_round_trips(tmp_path):
    from pathgen.checks.machine import Cut, Tool
    from pathgen.checks.report import check

    t = np.linspace(0, 2 * np.pi, 64, endpoint=False)
    contour = fit(np.column_stack([30 * np.cos(t), 12 * np.sin(t)]), closed=True)
    rep = check(contour, tool=Tool(6.0), cut=Cut(side="outside"))
    js, tx = write_report(rep, tmp_path / "oval.nc")
    assert json.loads(js.read_text()) == json.loads(json.dumps(rep.to_dict()))
    assert tx.read_text() == rep.to_text()
    again = tmp_path / "again"
    again.mkdir()
    js2, _ = write_report(rep, again / "oval.nc")
    assert js2.read_bytes() == js.read_bytes()  # byte-identical
    assert report_json(rep) == js.read_text()
