"""The Python API refuses wrong types and values with pathgen's own errors
(an InputError, also a ValueError), never a silent guess or a TypeError
from deep inside."""

from __future__ import annotations

import numpy as np
import pytest

from pathgen import InputError, fit, run
from pathgen._options import check_flag


def _circle(n=40, r=10.0):
    th = np.linspace(0, 2 * np.pi, n, endpoint=False)
    return np.c_[r * np.cos(th), r * np.sin(th)]


@pytest.mark.parametrize("t", ["abc", None, b"1", np.nan, [0.0, np.inf], 1j])
def test_contour_parameter_must_be_real_numbers(t):
    c = fit(_circle(), closed=True)
    with pytest.raises(InputError, match="t must be"):
        c(t)


@pytest.mark.parametrize("nu", [4, -1, 1.5, True, "1"])
def test_contour_derivative_order(nu):
    c = fit(_circle(), closed=True)
    with pytest.raises(InputError, match="nu must be 0, 1, 2 or 3"):
        c(0.5, nu=nu)


@pytest.mark.parametrize("closed", ["no", "yes", 1, 0, "False"])
def test_closed_must_be_a_bool(closed):
    # "no" is truthy in Python: it would silently close an open outline
    with pytest.raises(InputError, match="closed must be True, False or None"):
        fit(_circle(), closed=closed)
    with pytest.raises(InputError, match="closed must be True, False or None"):
        run(_circle(), closed=closed)


def test_numpy_bools_are_flags():
    assert check_flag("closed", np.bool_(True)) is True
    assert fit(_circle(), closed=np.bool_(False)).closed is False


def test_complex_points_are_refused():
    with pytest.raises(InputError, match="complex"):
        fit(_circle() + 1j)


@pytest.mark.parametrize("scale", [1e300, 1e12])
def test_coordinates_out_of_range_are_refused(scale):
    # squares of 1e300 overflow float64 (length NaN before); far beyond any
    # machine either way
    with pytest.raises(InputError, match="out of range"):
        fit(_circle() * scale, closed=True)


@pytest.mark.parametrize("path", [5, 3.0, None, ["a.csv"]])
def test_read_points_wants_a_file_name(path):
    from pathgen import read_points

    with pytest.raises(InputError, match="path must be a file name"):
        read_points(path)


def test_read_points_takes_bytes_paths(tmp_path):
    from pathgen import read_points

    p = tmp_path / "sq.csv"
    p.write_text("x,y\n0,0\n10,0\n10,10\n0,10\n")
    assert len(read_points(bytes(p))) == 4


@pytest.mark.parametrize("kw, says", [({"tool": 6.0}, "tool must be a pathgen Tool"),
                                      ({"cut": "outside"}, "cut must be a pathgen Cut"),
                                      ({"machine": {}}, "machine must be a pathgen Machine")])
def test_make_toolpath_wants_its_objects(kw, says):
    from pathgen import make_toolpath

    with pytest.raises(InputError, match=says):
        make_toolpath(fit(_circle(), closed=True), **kw)
