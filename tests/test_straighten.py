"""Near-straight arcs are written as lines, and the lines stay within tolerance.

Sources beside the checks:
* Sagitta of an arc of radius R and sweep θ: s = R(1 − cos(θ/2)) (handbook
  circle geometry).
* Controllers accept a limited number of integer digits in I and J (common
  practice): no sample program may need more than 5.
"""

from __future__ import annotations

import re
from pathlib import Path

import numpy as np
import pytest

from pathgen.checks.machine import Cut, Tool
from pathgen.outline import fit_outline
from pathgen.path.build import contour_moves, make_toolpath
from pathgen.path.straighten import LINE_BULGE_SHARE, MAX_RADIUS_RATIO
from pathgen.points import read_points
from pathgen.spline import fit

SAMPLES = Path(__file__).resolve().parents[1] / "samples"


def _arc_facts(tp):
    a = tp.kind >= 2
    s, e, c = tp.start[a, :2], tp.end[a, :2], tp.center[a]
    r = np.hypot(*(s - c).T)
    chord = np.hypot(*(e - s).T)
    half = np.arcsin(np.clip(chord / (2 * r), 0, 1))  # half sweep of the minor arc
    return r, chord, r * (1 - np.cos(half))


def _slot_plate():
    # invented part: a stadium 120 x 40 mm (straight 80 mm edges, R 20 ends), counter-
    # clockwise, probed every 0.5 mm and rounded to 0.001 mm (a scan's resolution)
    t = np.arange(160) / 160
    a = np.arange(126) / 126 * np.pi
    bottom = np.c_[-40 + 80 * t, np.full(160, -20.0)]
    right = np.c_[40 + 20 * np.sin(a), -20 * np.cos(a)]
    top = np.c_[40 - 80 * t, np.full(160, 20.0)]
    left = np.c_[-40 - 20 * np.sin(a), 20 * np.cos(a)]
    return np.round(np.vstack([bottom, right, top, left]), 3)


@pytest.mark.parametrize("tol", [0.1, 0.01, 0.001])
def test_no_arc_is_a_line_in_disguise(tol):
    c = fit_outline(_slot_plate(), closed=True)
    for tp in (contour_moves(c, tolerance=tol),
               make_toolpath(c, Tool(6.0), Cut(side="outside", tolerance=tol), lead="none")):
        r, chord, sag = _arc_facts(tp)
        assert np.all(r <= MAX_RADIUS_RATIO * chord)
        assert np.all(sag >= LINE_BULGE_SHARE * tol * (1 - 1e-9))
        assert tp.deviation <= tol  # measured after the replacement
        # the two 80 mm straight edges are lines (the seam may split one of them in two)
        L = np.hypot(*(tp.end - tp.start)[:, :2].T)
        assert L[tp.kind == 1].sum() == pytest.approx(160.0, abs=1e-3)  # (a plunge has no length in the plane)
        assert np.sum((tp.kind == 1) & (L > 30.0)) >= 2


def test_straight_edge_of_a_noisy_profile_is_a_line_within_tolerance():
    # a straight 30 mm edge probed with 2 µm noise: before, an arc of R ~ 160 m was written
    rng = np.random.default_rng(3)
    x = np.linspace(0, 30, 61)
    pts = np.c_[x, 0.002 * rng.standard_normal(61)]
    c = fit(pts)
    tp = contour_moves(c, tolerance=0.01)
    r, chord, _ = _arc_facts(tp)
    assert np.all(r <= MAX_RADIUS_RATIO * chord)
    assert tp.deviation <= 0.01


@pytest.mark.parametrize("name", ["bracket", "hook", "plate", "profile"])
@pytest.mark.parametrize("tol", [0.01, 0.001])
def test_sample_programs_need_at_most_five_integer_digits_in_i_and_j(name, tol):
    from pathgen.export.gcode import gcode_text

    c = fit_outline(read_points(SAMPLES / f"{name}.csv"))
    tp = make_toolpath(c, Tool(6.0 if name != "hook" else 2.0), Cut(side="outside", tolerance=tol), lead="arc")
    words = re.findall(r"[IJR](-?\d+)(?:\.\d+)?", gcode_text(tp))
    assert words, "the program has arcs"
    assert max(len(w.lstrip("-")) for w in words) <= 5
