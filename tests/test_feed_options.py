"""Where the cutting feed comes from: asked for, or flutes × chip load ×
spindle speed; never above the machine's highest feed without a word."""

from __future__ import annotations

import io
import re
from pathlib import Path

import numpy as np
import pytest

from pathgen import InputError
from pathgen.cli import main
from pathgen.pipeline import run

ROOT = Path(__file__).resolve().parent.parent
ROUTER = ROOT / "samples" / "router.toml"  # highest feed 4000 mm/min


def circle(r=30.0, n=80):
    th = np.linspace(0, 2 * np.pi, n, endpoint=False)
    return np.c_[r * np.cos(th), r * np.sin(th)]


def call(*args):
    out, err = io.StringIO(), io.StringIO()
    status = main([str(a) for a in args], out=out, err=err)
    return status, out.getvalue(), err.getvalue()


def feeds(text):
    return [float(f) for f in re.findall(r"\bF(\d+(?:\.\d+)?)", text)]


def test_chip_load_feed(tmp_path):
    # F = z · fz · n (common practice; sources: chip-load):
    # 2 × 0.05 mm × 18 000 rev/min = 1 800 mm/min
    res = run(circle(), closed=True, tool_diameter=6, machine=ROUTER, flutes=2, chip_load=0.05,
              spindle_speed=18000, one_feed=True, gcode=tmp_path / "p.nc")
    assert res.toolpath.info["feed"] == pytest.approx(1800.0)
    assert max(feeds((tmp_path / "p.nc").read_text())) == pytest.approx(1800.0)
    assert any("2 flutes x 0.05 mm per tooth x 18000 rev/min" in n for n in res.notes)


def test_chip_load_feed_in_inch():
    # 2 × 0.002 in × 18 000 rev/min = 72 in/min = 1828.8 mm/min
    res = run(circle() / 25.4, closed=True, units="inch", tool_diameter=0.25, machine=ROUTER,
              flutes=2, chip_load=0.002, spindle_speed=18000)
    assert res.report is not None
    assert any("72 inch/min" in n for n in res.notes), res.notes


def test_feed_above_the_machine_is_capped_and_said(tmp_path):
    # --feed 6000 --one-feed on a 4000 mm/min machine once wrote F6000
    status, out, err = call("gcode", _save(tmp_path), "--closed", "--tool-diameter", "6", "--machine", ROUTER,
                            "--feed", "6000", "--one-feed", "-o", tmp_path / "p.nc")
    assert status == 0, err
    assert "above the machine's highest feed 4000 mm/min: capped to 4000 mm/min" in err
    assert max(feeds((tmp_path / "p.nc").read_text())) <= 4000.0


def test_chip_load_above_the_machine_is_capped():
    res = run(circle(), closed=True, tool_diameter=6, machine=ROUTER, flutes=3, chip_load=0.1,
              spindle_speed=24000)  # 7200 mm/min asked
    assert res.toolpath is None and any("capped to 4000 mm/min" in n for n in res.notes)


@pytest.mark.parametrize("kw, says", [
    ({"flutes": 2}, "needs both flutes"),
    ({"chip_load": 0.05}, "needs both flutes"),
    ({"flutes": 2, "chip_load": 0.05}, "needs the spindle speed"),
    ({"flutes": 2.5, "chip_load": 0.05, "spindle_speed": 10000}, "whole number"),
    ({"flutes": 2, "chip_load": -0.05, "spindle_speed": 10000}, "chip load must be"),
])
def test_chip_load_needs_all_three(kw, says):
    with pytest.raises(InputError, match=says):
        run(circle(), closed=True, **kw)


def _save(tmp_path):
    p = tmp_path / "c.csv"
    np.savetxt(p, circle(), delimiter=",", header="x,y", comments="")
    return p


def test_header_and_report_state_the_same_program_figures(tmp_path):
    # one figure, one value: blocks, cutting length, cycle time and the feed
    # cap, as the program's header states them, are in the report beside it
    import json

    from pathgen._options import duration_text

    out = tmp_path / "p.nc"
    run(circle(), closed=True, tool_diameter=6, machine=ROUTER, feed=6000, depth=2, step_down=1,
        gcode=out, report=tmp_path / "p.report.json")
    text = out.read_text()
    m = re.search(r"\(motion blocks: (\d+), cutting length: ([0-9.]+) mm, estimated cycle time: ([^)]*)\)", text)
    assert m, text[:800]
    data = json.loads((tmp_path / "p.report.json").read_text())
    assert data["program"]["blocks"] == int(m.group(1))
    assert data["toolpath"]["cutting_length"] == pytest.approx(float(m.group(2)), rel=1e-5)
    assert duration_text(data["toolpath"]["cycle_time"]) == m.group(3)
    assert data["toolpath"]["passes"] == 2
    # the feed asked above the machine's highest: said in the header and the report
    assert "capped to 4000 mm/min" in text
    assert any("capped to 4000 mm/min" in n for n in data["notes"])
    assert "capped to 4000 mm/min" in (tmp_path / "p.report.txt").read_text()
    # and the program's motion blocks are what the header counts
    motion = [ln for ln in text.splitlines() if re.match(r"(N\d+ )?G[0-3]\b", ln)]
    assert len(motion) == int(m.group(1))
