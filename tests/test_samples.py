"""The sample parts in samples/ are pathgen.demo's output, and they are the
parts they claim to be (sizes, closedness, the hook's tight slot)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from pathgen import demo
from pathgen.spline import fit

SAMPLES = Path(__file__).resolve().parent.parent / "samples"


def _rows(text: str) -> np.ndarray:
    """Independent reading of a sample: skip '#' lines and the 'x,y' header."""
    lines = [ln for ln in text.splitlines() if ln and not ln.startswith("#")]
    assert lines[0] == "x,y"
    return np.array([[float(v) for v in ln.split(",")] for ln in lines[1:]])


@pytest.mark.parametrize("name", list(demo.PARTS))
def test_sample_file_is_the_generators_output(name):
    # Byte for byte: samples/ must be regenerated (python -m pathgen.demo samples)
    # whenever the generator changes.
    assert (SAMPLES / f"{name}.csv").read_bytes() == demo.sample_text(name).encode()


@pytest.mark.parametrize("name", list(demo.PARTS))
def test_sample_format(name):
    text = (SAMPLES / f"{name}.csv").read_text()
    assert "# units: mm" in text.splitlines()[:3]
    p = _rows(text)
    closed = demo.PARTS[name][0]
    # a closed part repeats its first point at the end, an open one does not
    assert np.array_equal(p[0], p[-1]) == closed
    # 3-4 decimals: every number is a multiple of 0.0001 (no exponent, no long tails)
    assert np.allclose(np.round(p * 1e4), p * 1e4, atol=1e-6)
    for line in text.splitlines()[3:]:
        assert "e" not in line.lower() and len(line.split(",")[0].split(".")[1]) == 4


def test_sample_sizes_and_densities():
    # Invented parts, checked against their stated construction.
    b = _rows((SAMPLES / "bracket.csv").read_text())
    assert 250 <= len(b) <= 400  # "a few hundred points"
    size = b.max(axis=0) - b.min(axis=0)
    np.testing.assert_allclose(size, [120.0, 80.0], atol=0.05)
    plate = _rows((SAMPLES / "plate.csv").read_text())
    # corners given exactly (no noise on a part taken from a drawing)
    for corner in [(0, 0), (55, 0), (55, 15), (85, 15), (85, 0), (140, 0), (140, 70), (0, 70)]:
        assert np.any(np.all(plate == corner, axis=1)), corner


def test_same_output_every_time():
    # Seeded noise: two calls give identical bytes.
    assert demo.sample_text("bracket") == demo.sample_text("bracket")


def test_write_samples(tmp_path):
    paths = demo.write_samples(tmp_path)
    assert [p.name for p in paths] == [f"{n}.csv" for n in demo.PARTS]
    for p in paths:
        assert p.read_bytes() == (SAMPLES / p.name).read_bytes()
    assert not list(tmp_path.glob(".*"))  # no temporary file left


def test_hook_slot_is_too_tight_for_a_6mm_tool():
    # The slot end is a circle of radius 2 mm (handbook: curvature of a circle
    # is 1/R), traversed clockwise on a counter-clockwise outline: concave,
    # so the fitted curvature there is near -1/2 per mm, tighter than a 6 mm
    # tool's radius of 3 mm.
    p = _rows((SAMPLES / "hook.csv").read_text())
    c = fit(p)
    assert c.closed
    t = np.linspace(*c.domain, 20001)
    xy = c(t)
    near = np.hypot(xy[:, 0] - 40.0, xy[:, 1] - 26.0) < 0.7  # around the slot's bottom point
    k = c.curvature(t[near])
    assert near.sum() > 10
    assert np.all(k < 0)
    np.testing.assert_allclose(np.median(1.0 / -k), 2.0, rtol=0.15)
    assert np.max(1.0 / -k) < 3.0


def test_bracket_dent_is_within_reach():
    # The worn dent (1.2 mm deep, sigma 5 mm) is a gentle concave spot: a
    # Gaussian bump's curvature at its peak is depth / sigma**2 = 0.048 /mm
    # (R about 21 mm, well above a 3 mm tool radius).
    p = _rows((SAMPLES / "bracket.csv").read_text())
    c = fit(p)
    t = np.linspace(*c.domain, 40001)
    xy = c(t)
    near = (np.abs(xy[:, 0] - 70.0) < 1.0) & (xy[:, 1] < 5.0)
    k = c.curvature(t[near])
    assert near.sum() > 10
    np.testing.assert_allclose(np.median(-k), 1.2 / 5.0**2, rtol=0.3)


def test_unknown_part_is_refused():
    with pytest.raises(ValueError, match="part='gear' is not one of"):
        demo.make_part("gear")


def test_embedded_router_profile_is_the_sample():
    # demo writes ROUTER_TOML when samples/ is not at hand (installed package):
    # it must stay a copy of samples/router.toml.
    assert demo.ROUTER_TOML == (SAMPLES / "router.toml").read_text()


def _distance_to_segments(p, segments):
    """Distance from points to a chain of exact lines and arcs (handbook geometry)."""
    best = np.full(len(p), np.inf)
    for seg in segments:
        if seg[0] == "line":
            a, b = np.array(seg[1]), np.array(seg[2])
            u = np.clip(((p - a) @ (b - a)) / ((b - a) @ (b - a)), 0.0, 1.0)
            d = np.hypot(*(p - (a + u[:, None] * (b - a))).T)
        else:
            _, c, r, a0, sw = seg
            rel = p - np.array(c)
            ang = np.mod((np.arctan2(rel[:, 1], rel[:, 0]) - a0) * np.sign(sw), 2 * np.pi)
            ends = [np.array(c) + r * np.array([np.cos(a), np.sin(a)]) for a in (a0, a0 + sw)]
            d_end = np.minimum(*(np.hypot(*(p - e).T) for e in ends))
            d = np.where(ang <= abs(sw), np.abs(np.hypot(*rel.T) - r), d_end)
        best = np.minimum(best, d)
    return best


def test_noise_free_parts_lie_on_their_geometry():
    # Without the probe noise the hook's points lie on its lines and arcs to
    # the file's rounding (4 decimals: at most 0.5e-4·√2 mm); with it they
    # scatter with the documented sigma of 0.003 mm.
    exact = demo.make_part("hook", noise=False)
    noisy = demo.make_part("hook")
    segs = demo._round_rect_with_slot()
    assert _distance_to_segments(exact, segs).max() <= 0.5e-4 * np.sqrt(2) + 1e-12
    spread = noisy - exact
    assert np.std(spread) == pytest.approx(0.003, rel=0.15)
    assert np.array_equal(demo.make_part("plate", noise=False), demo.make_part("plate"))
