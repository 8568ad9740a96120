"""The picture: files written, right size, tight spots present, no dates.

Sources beside the checks:
* PNG specification (W3C Recommendation / ISO/IEC 15948): the file starts
  with the 8-byte signature, then the IHDR chunk whose first 8 data bytes
  are width and height as big-endian 32-bit integers.
* SVG is XML (W3C): read back with Python's xml.etree (reference library)
  and the tight-spot elements found by their ids.
"""

from __future__ import annotations

import os
import struct
import subprocess
import sys
import xml.etree.ElementTree as ET
from types import SimpleNamespace

import numpy as np
import pytest

pytest.importorskip("matplotlib")

from pathgen.errors import ExportError, InputError  # noqa: E402
from pathgen.export.plot import CAUTION, plot, plot_figure  # noqa: E402
from pathgen.path.model import Arc, Line, Rapid, Toolpath  # noqa: E402
from pathgen.spline import fit  # noqa: E402


def _part():
    # an invented bracket outline: an oval with a shallow dent
    t = np.linspace(0, 2 * np.pi, 90, endpoint=False)
    r = 30 - 4 * np.exp(-((t - np.pi / 2) / 0.3) ** 2)
    return fit(np.column_stack([1.4 * r * np.cos(t), r * np.sin(t)]), closed=True)


def _spots(n, spread=True):
    """n stand-in spots around the oval (or bunched within 1 mm)."""
    a = 2 * np.pi * np.arange(n) / n
    xs, ys = (42 * np.cos(a), 30 * np.sin(a)) if spread else (10.0 + 0.3 * np.arange(n), np.zeros(n))
    return SimpleNamespace(tight_spots=[
        SimpleNamespace(x=float(xs[i]), y=float(ys[i]), min_radius=1.5 + i, allowed_feed=500.0 + 10 * i,
                        reason="accel", text="acceleration")
        for i in range(n)
    ])


def _png_size(path):
    data = path.read_bytes()[:24]
    assert data[:8] == b"\x89PNG\r\n\x1a\n" and data[12:16] == b"IHDR"  # PNG signature and first chunk
    return struct.unpack(">II", data[16:24])


def _svg_ids(path):
    root = ET.parse(path).getroot()
    return [el.get("id") for el in root.iter() if el.get("id")]


def _toolpath():
    R = 47.0
    moves = [Rapid((0, 0, 5), (R, 0, 5)), Line((R, 0, 5), (R, 0, -1), 200.0),
             Arc((R, 0, -1), (-R, 0, -1), (0, 0), True, 800.0), Arc((-R, 0, -1), (R, 0, -1), (0, 0), True, 800.0),
             Rapid((R, 0, -1), (R, 0, 5))]
    return Toolpath.from_moves(moves, tool_diameter=6.0, side="outside")


def test_png_is_written_with_the_promised_size(tmp_path):
    p = plot(tmp_path / "part.png", _part(), toolpath=_toolpath(), report=_spots(3))
    assert p.stat().st_size > 10_000
    assert _png_size(p) == (1200, 800)
    data = p.read_bytes()
    assert b"tIME" not in data  # PNG spec: the tIME chunk would hold the modification time


def test_svg_holds_every_tight_spot_and_labels(tmp_path):
    p = plot(tmp_path / "part.svg", _part(), report=_spots(3))
    ids = _svg_ids(p)
    assert sorted(i for i in ids if i.startswith("tight-spot-") and "label" not in i) == [
        "tight-spot-1", "tight-spot-2", "tight-spot-3"]
    assert sorted(i for i in ids if i.startswith("tight-spot-label-")) == [
        "tight-spot-label-1", "tight-spot-label-2", "tight-spot-label-3"]
    text = p.read_text()
    assert "<dc:date>" not in text  # no dates in the metadata


def test_many_tight_spots_are_all_marked_and_the_tightest_labelled():
    fig = plot_figure(_part(), report=_spots(20))
    ax = fig.axes[0]
    marks = [a for a in ax.lines if (a.get_gid() or "").startswith("tight-spot-")]
    labels = [a for a in ax.texts if (a.get_gid() or "").startswith("tight-spot-label-")]
    assert len(marks) == 20
    # the 12 lowest allowed feeds are labelled: spots 1..12 in this data
    assert sorted(int(a.get_gid().rsplit("-", 1)[1]) for a in labels) == list(range(1, 13))
    first = [a for a in labels if a.get_gid() == "tight-spot-label-1"][0]
    assert first.get_text() == "1: acceleration\nR 1.5 mm, F 500 mm/min"
    legend = [t.get_text() for t in ax.get_legend().get_texts()]
    assert "tight spots (20, 12 labelled)" in legend


def test_bunched_tight_spots_share_one_label():
    fig = plot_figure(_part(), report=_spots(4, spread=False))
    ax = fig.axes[0]
    marks = [a for a in ax.lines if (a.get_gid() or "").startswith("tight-spot-")]
    labels = [a for a in ax.texts if (a.get_gid() or "").startswith("tight-spot-label-")]
    assert len(marks) == 4 and len(labels) == 1
    # one label for spots 1-4: the smallest radius and the lowest feed of the group
    assert labels[0].get_text() == "1–4: acceleration\nR 1.5 mm, F 500 mm/min"


def test_caution_units_scale_bar_and_legend():
    fig = plot_figure(_part(), toolpath=_toolpath(), units="inch")
    texts = [" ".join(t.get_text().split()) for t in fig.texts]  # the caution wraps onto two lines
    assert any(CAUTION in t for t in texts)
    ax = fig.axes[0]
    assert ax.get_xlabel() == "x (in)" and ax.get_ylabel() == "y (in)"
    legend = [t.get_text() for t in ax.get_legend().get_texts()]
    assert "contour" in legend and any(s.startswith("tool center, 0.236 in tool") for s in legend)
    assert any(s.startswith("curvature comb") for s in legend)
    from mpl_toolkits.axes_grid1.anchored_artists import AnchoredSizeBar

    bars = [a for a in ax.artists if isinstance(a, AnchoredSizeBar)]
    assert len(bars) == 1


def test_curvature_comb_follows_the_handbook_curvature():
    # circle of radius R: every comb tooth has the same length (κ = 1/R, handbook)
    # and the 95th-percentile tooth is drawn 8 % of the bounding-box diagonal long
    t = np.linspace(0, 2 * np.pi, 256, endpoint=False)
    fig = plot_figure(fit(np.column_stack([20 * np.cos(t), 20 * np.sin(t)]), closed=True))
    from matplotlib.collections import LineCollection

    (comb,) = [c for c in fig.axes[0].collections if isinstance(c, LineCollection)]
    seg = np.array(comb.get_segments())
    lengths = np.hypot(*(seg[:, 1] - seg[:, 0]).T)
    diagonal = 40 * np.sqrt(2)
    assert np.allclose(lengths, 0.08 * diagonal, rtol=1e-3)  # spline curvature error ~h^2 is far below
    # teeth point away from the center of curvature (outer side of the bend)
    assert np.all(np.hypot(*seg[:, 1].T) > np.hypot(*seg[:, 0].T))


def test_same_input_same_bytes(tmp_path):
    code = (
        "import sys, numpy as np; from pathgen.spline import fit; from pathgen.export.plot import plot;"
        "t = np.linspace(0, 2*np.pi, 40, endpoint=False);"
        "c = fit(np.c_[9*np.cos(t), 5*np.sin(t)], closed=True);"
        "[plot(name, c) for name in sys.argv[1:]]"
    )
    # two processes with different hash seeds, each drawing both formats
    for seed in ("1", "5"):
        env = {**os.environ, "PYTHONHASHSEED": seed}
        subprocess.run([sys.executable, "-c", code, str(tmp_path / f"{seed}.png"), str(tmp_path / f"{seed}.svg")],
                       check=True, env=env)
    for suffix in ("png", "svg"):
        assert (tmp_path / f"1.{suffix}").read_bytes() == (tmp_path / f"5.{suffix}").read_bytes(), suffix


def test_bad_names_and_overwrite(tmp_path):
    with pytest.raises(InputError, match="the picture must be .png or .svg, got '.jpg'"):
        plot(tmp_path / "p.jpg", _part())
    p = plot(tmp_path / "p.png", _part())
    with pytest.raises(ExportError, match="p.png already exists"):
        plot(p, _part())
    plot(p, _part(), force=True)
    with pytest.raises(InputError, match="toolpath must be a Toolpath"):
        plot(tmp_path / "q.png", _part(), toolpath="path")
    assert sorted(os.listdir(tmp_path)) == ["p.png"]


def test_real_check_and_toolpath(tmp_path):
    from pathgen.checks.machine import Cut, Tool
    from pathgen.checks.report import check
    from pathgen.path.build import make_toolpath

    contour = _part()
    tool, cut = Tool(10.0), Cut(side="inside", feed=4000.0)
    rep = check(contour, tool=tool, cut=cut)
    tp = make_toolpath(contour, tool, cut)
    p = plot(tmp_path / "real.svg", contour, toolpath=tp, report=rep)
    ids = _svg_ids(p)
    assert sum(i.startswith("tight-spot-") and "label" not in i for i in ids) == len(rep.tight_spots)


def test_picture_time_is_the_programs_estimate(tmp_path):
    # The picture, the G-code header and the batch table give one estimate
    # of the program's time (rapids, leads and passes included); without a
    # program the picture says it is one pass along the contour.
    import re

    from pathgen.checks.machine import Cut, Tool
    from pathgen.checks.report import check
    from pathgen.export.gcode import write_gcode
    from pathgen.path.build import make_toolpath

    contour = _part()
    tool, cut = Tool(6.0), Cut(side="outside", feed=500.0)
    rep = check(contour, tool=tool, cut=cut)
    tp = make_toolpath(contour, tool, cut, depth=3.0, step_down=1.0)
    header = write_gcode(tp, tmp_path / "p.nc").read_text()
    in_header = re.search(r"estimated cycle time: ([^)]*)\)", header).group(1)
    texts = " | ".join(t.get_text() for t in plot_figure(contour, toolpath=tp, report=rep).texts)
    assert f"estimated cycle time {in_header}" in texts
    assert "min" in in_header  # three passes of about 230 mm at 500 mm/min: over a minute
    texts = " | ".join(t.get_text() for t in plot_figure(contour, report=rep).texts)
    assert f"one pass along the contour {rep.cycle_time:.1f} s" in texts


def test_inch_toolpath_is_drawn_where_the_mm_one_is():
    # The same toolpath in mm and converted to inch (1 in = 25.4 mm exactly,
    # by definition) must draw the same picture in inch units: cuts and
    # rapids alike (the cuts were once drawn 25.4 times too small).
    from matplotlib.collections import LineCollection

    from pathgen.checks.machine import Cut, Tool
    from pathgen.moves import toolpath_in_units
    from pathgen.path.build import make_toolpath

    contour = _part()
    tool, cut = Tool(6.0), Cut(side="outside")
    pictures = []
    for units in ("mm", "inch"):
        tp = toolpath_in_units(make_toolpath(contour, tool, cut), units)
        fig = plot_figure(contour, toolpath=tp, units="inch")
        ax = fig.axes[0]
        lines = [np.asarray(l.get_xydata()) for l in ax.get_lines()]
        segs = [np.asarray(s) for c in ax.collections if isinstance(c, LineCollection) for s in c.get_segments()]
        pictures.append((lines, segs))
    (l_mm, s_mm), (l_in, s_in) = pictures
    assert [a.shape for a in l_mm] == [a.shape for a in l_in] and len(s_mm) == len(s_in)
    for a, b in zip(l_mm + s_mm, l_in + s_in):
        np.testing.assert_allclose(a, b, rtol=0, atol=1e-9)
    # and the tool path stands about r = 3 mm = 0.118 in outside the contour
    far = max(float(np.abs(a).max()) for a in l_in)
    x0, y0, x1, y1 = contour.bbox
    assert far >= max(abs(x0), abs(x1), abs(y0), abs(y1)) / 25.4


def test_tight_spot_rings_are_drawn_where_the_spots_are(tmp_path):
    # The picture's content, read back as pixels (PNG decoded by
    # matplotlib.image.imread): each tight spot has a ring in the spot colour
    # (#c2185b) about 15 px (a 22 pt marker at 100 dpi) around its position,
    # and a place with no spot has none.
    from matplotlib.image import imread

    from pathgen.export.plot import _COLORS

    contour, rep = _part(), _spots(4)
    path = plot(tmp_path / "spots.png", contour, report=rep)
    img = imread(path)[:, :, :3]
    height = img.shape[0]
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    fig = plot_figure(contour, report=rep)
    FigureCanvasAgg(fig).draw()  # lay the figure out as the PNG writer does
    to_px = fig.axes[0].transData.transform
    want = np.array([int(_COLORS["spot"][i:i + 2], 16) / 255 for i in (1, 3, 5)])
    yy, xx = np.mgrid[0:height, 0:img.shape[1]]
    close = np.abs(img - want).max(axis=2) < 0.12

    def ring_pixels(x, y):
        px, py = to_px((x, y))
        r = np.hypot(xx - px, yy - (height - py))
        return int(np.sum(close & (r >= 10) & (r <= 20)))

    for s in rep.tight_spots:
        assert ring_pixels(s.x, s.y) >= 40, (s.x, s.y)
    assert ring_pixels(0.0, 0.0) == 0  # the middle of the part: no spot there


def test_spots_the_tool_cannot_reach_say_cannot_cut():
    # "F 0 mm/min" read as a feed to set; a spot with no feed cannot be cut
    from pathgen.checks.machine import Cut, Tool
    from pathgen.checks.report import check

    t = np.linspace(0, 2 * np.pi, 120, endpoint=False)
    r = 30 - 6 * np.exp(-((t - np.pi / 2) / 0.08) ** 2)  # a narrow dent a 10 mm tool cannot reach
    contour = fit(np.c_[r * np.cos(t), r * np.sin(t)], closed=True)
    rep = check(contour, tool=Tool(10.0), cut=Cut(side="outside"))
    assert any(s.reason == "reach" or "reach" in s.text for s in rep.tight_spots)
    fig = plot_figure(contour, report=rep)
    texts = " | ".join(t.get_text() for t in fig.texts + [a for ax in fig.axes for a in ax.texts])
    assert "cannot cut" in texts and "F 0 " not in texts
