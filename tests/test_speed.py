"""Cost follows the work: small jobs import no heavy library they do not
need, and the numpy shortcuts give the reference libraries' answers.

No timing is asserted here (the machine is shared); benchmarks/speed.py
measures the times side by side.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from pathgen.geometry import nearest_distance
from pathgen.points import _clearly_simple
from pathgen.spline import gtsv_steps

ROOT = Path(__file__).resolve().parent.parent

HEAVY = ("scipy.linalg", "scipy.spatial", "shapely", "numpy.ma")


def _imports_after_check(path: Path) -> list[str]:
    code = (
        "import io, sys\n"
        "from pathgen.cli import main\n"
        f"rc = main(['check', {str(path)!r}, '--tool-diameter', '6'], out=io.StringIO(), err=io.StringIO())\n"
        f"print(rc, ','.join(m for m in {HEAVY!r} if m in sys.modules))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True,
                         cwd=ROOT, env={**__import__("os").environ, "PYTHONPATH": str(ROOT)})
    rc, _, heavy = out.stdout.strip().partition(" ")
    assert rc == "0", out.stdout + out.stderr
    return [m for m in heavy.split(",") if m]


def test_small_clean_check_imports_no_scipy_linalg_spatial_or_shapely(tmp_path):
    # A 200-point outline: the fit (numpy tridiagonal solve), the gouge search
    # (numpy nearest points) and the crossing test (numpy orientations) need
    # none of the heavy libraries, which take 0.2-0.6 s each to import (and
    # not numpy.ma, which numpy.median and numpy.unique import on first use).
    th = np.linspace(0.0, 2 * np.pi, 200, endpoint=False)
    r = 30.0 + 4.0 * np.sin(3 * th)
    src = tmp_path / "small.csv"
    np.savetxt(src, np.c_[r * np.cos(th), r * np.sin(th)], fmt="%.4f", delimiter=",", header="x,y",
               comments="")
    assert _imports_after_check(src) == []


def test_small_noisy_check_with_corners_imports_none_either():
    # The bracket sample (296 probed points, sharp corners, smoothed to its
    # noise): the pieces between corners and the smoothing's banded systems
    # are solved in numpy at this size.
    assert _imports_after_check(ROOT / "samples" / "bracket.csv") == []


def test_gtsv_steps_gives_lapacks_numbers_bit_for_bit():
    # Reference: LAPACK's DGTSV (Anderson et al., LAPACK Users' Guide, 3rd
    # ed., SIAM 1999) as scipy exposes it; the same steps in the same order
    # must give the same floats, with and without row interchanges.
    from scipy.linalg.lapack import dgtsv

    rng = np.random.default_rng(15)
    swapped = 0
    for trial in range(300):
        n = int(rng.integers(2, 40))
        k = int(rng.integers(1, 4))
        dl, du = rng.normal(size=n - 1), rng.normal(size=n - 1)
        d = rng.normal(size=n) * (0.2 if trial % 2 else 3.0)
        b = rng.normal(size=(n, k))
        swapped += bool(np.any(np.abs(d[:-1]) < np.abs(dl)))
        _, _, _, want, info = dgtsv(dl.copy(), d.copy(), du.copy(), np.asfortranarray(b))
        assert info == 0
        got = gtsv_steps(dl, d, du, b)
        assert got.shape == want.shape
        assert np.array_equal(got, want), trial
    assert swapped > 100  # the interchange branch was exercised


def test_nearest_distance_matches_the_kd_tree():
    # Reference: scipy.spatial.cKDTree.query with distance_upper_bound; the
    # numpy brute-force and grid paths must give the same numbers.
    from scipy.spatial import cKDTree

    rng = np.random.default_rng(7)
    th = np.linspace(0.0, 2 * np.pi, 30_000)
    curve = np.c_[50 * np.cos(th), 30 * np.sin(th)]
    cases = [
        (rng.normal(size=(700, 2)), rng.normal(size=(900, 2)), 0.05),  # brute force
        (curve[::7], curve + rng.normal(0, 0.5, curve.shape), 2.0),  # grid
        (curve[::5], curve[::3] * 1.05, np.inf),  # no bound, large: the tree itself
        (rng.normal(size=(50, 2)), rng.normal(size=(40, 2)) + 100.0, 1.0),  # none within the bound
    ]
    for ref, query, bound in cases:
        want = cKDTree(ref).query(query, k=1, distance_upper_bound=bound)[0]
        got = nearest_distance(ref, query, bound)
        assert got.shape == want.shape
        np.testing.assert_array_equal(got, want)


@pytest.mark.parametrize("seed", range(4))
def test_clearly_simple_never_contradicts_geos(seed):
    # Reference: GEOS's is_simple (shapely).  The numpy test may leave a
    # ring undecided (False: GEOS then decides) but must never call a
    # crossing ring simple; straight runs of collinear points stay simple.
    import shapely

    rng = np.random.default_rng(seed)
    decided = 0
    for k in range(400):
        n = int(rng.integers(4, 40))
        if k % 3 == 0:
            p = rng.normal(size=(n, 2))  # mostly crossing
        else:
            th = np.sort(rng.uniform(0, 2 * np.pi, n))
            r = rng.uniform(0.5, 1.5, n)
            p = np.c_[r * np.cos(th), r * np.sin(th)]
        if k % 5 == 0:
            p = np.round(p * 2) / 2  # on a coarse grid: collinear and touching cases
        keep = np.r_[True, np.any(np.diff(p, axis=0) != 0, axis=1)]
        p = p[keep]
        if len(p) > 1 and np.array_equal(p[0], p[-1]):
            p = p[:-1]
        if len(p) < 4:
            continue
        if _clearly_simple(p):
            decided += 1
            assert shapely.is_simple(shapely.linearrings(p)), p
    assert decided > 50
    # a square with points along its sides, and one that doubles back along a side
    side = np.linspace(0, 10, 6)[:-1]
    square = np.r_[np.c_[side, 0 * side], np.c_[10 + 0 * side, side], np.c_[10 - side, 10 + 0 * side],
                   np.c_[0 * side, 10 - side]]
    assert _clearly_simple(square)
    back = np.array([[0, 0], [10, 0], [10, 5], [6, 0], [3, 0], [0, 5]], float)
    assert not shapely.is_simple(shapely.linearrings(back))
    assert not _clearly_simple(back)


@pytest.mark.parametrize("closed", [False, True])
def test_small_smoothing_solve_agrees_with_the_banded_lapack_solve(monkeypatch, closed):
    # Reference: scipy.linalg.solve_banded (LAPACK's banded LU), which solves
    # the same pentadiagonal smoothing systems above the numpy size; the two
    # agree to rounding (the contour of a 296-point sample moved 1.4e-14 mm).
    import pathgen.smooth as sm

    rng = np.random.default_rng(3)
    n = 120
    th = np.linspace(0, 2 * np.pi, n, endpoint=not closed)
    y = np.c_[20 * np.cos(th), 12 * np.sin(th)] + rng.normal(0, 0.01, (n, 2))
    t = np.r_[0.0, np.cumsum(np.hypot(*np.diff(np.vstack([y, y[:1]]) if closed else y, axis=0).T))]
    t = t[: n + 1] if closed else t
    S = sm._system(t, n, np.ones(n), closed)
    for lam in (1e-4, 0.3, 50.0):
        dense = sm._solve(S, lam, y)
        monkeypatch.setattr(sm, "DENSE_MAX", 0)
        banded = sm._solve(S, lam, y)
        monkeypatch.setattr(sm, "DENSE_MAX", 400)
        assert dense.shape == banded.shape
        np.testing.assert_allclose(dense, banded, rtol=1e-10, atol=1e-12 * np.abs(banded).max())


@pytest.mark.parametrize("units", ["mm", "inch"])
def test_spline_written_in_bulk_is_byte_identical_to_ezdxfs_own_way(tmp_path, monkeypatch, units):
    # Reference: ezdxf's documented way (Spline.control_points / knots, then
    # doc.saveas, which writes one tag at a time).  The bulk writer must give
    # the same file byte for byte: values of every magnitude and sign,
    # exact zeros (the z column), inch conversion.
    import pathgen.export.dxf as dxf
    from pathgen.spline import fit

    rng = np.random.default_rng(11)
    th = np.linspace(0.0, 2 * np.pi, 3000, endpoint=False)
    r = 1e-3 + 40.0 * (1.2 + np.sin(3 * th)) + rng.normal(0, 1e-4, th.size)
    pts = np.c_[r * np.cos(th) - 1e4, r * np.sin(th) + 3e-7]
    contour = fit(pts, closed=True)
    bulk = dxf.write_dxf(tmp_path / "bulk.dxf", contour, points=np.empty((0, 2)), units=units)
    monkeypatch.setattr(dxf, "_write_in_bulk", lambda spline: None)
    tagwise = dxf.write_dxf(tmp_path / "tagwise.dxf", contour, points=np.empty((0, 2)), units=units)
    a, b = bulk.read_bytes(), tagwise.read_bytes()
    assert len(a) > 100_000
    assert a == b
    # and it reads back: as many control points and knots as written
    import ezdxf

    (spline,) = ezdxf.readfile(bulk).modelspace().query("SPLINE")
    assert len(spline.knots) == len(spline.control_points) + 4


def test_a_spike_on_one_short_piece_of_a_long_move_is_measured():
    # A straight run of 40 000 readings 3 mm apart with one reading pair
    # 0.01 mm apart raised 0.05 mm: the curve's bump there is narrow; the
    # measured deviation of the straight move over the whole run must see it
    # (at least the height of the readings above the line, derived: the
    # interpolating curve passes through them).
    from pathgen.path.measure import LINE, Chain, chain_deviation
    from pathgen.spline import fit

    x = np.arange(40_001) * 3.0
    k = 23_457
    x = np.r_[x[: k + 1], x[k] + 0.01, x[k + 1:]]
    y = np.zeros_like(x)
    y[k:k + 2] = 0.05
    contour = fit(np.c_[x, y], end="natural")
    b = contour.breaks
    chain = Chain(np.array([LINE], np.int8), contour(b[:1]), contour(b[-1:]), np.zeros((1, 2)),
                  b[:1].copy(), b[-1:].copy())
    (dev,) = chain_deviation(contour, 0.0, chain, 0.01)
    assert dev >= 0.05


def test_nearest_distance_with_a_tiny_bound_matches_the_kd_tree():
    # A bound far below the points' spread (a tool of 1e-289 mm, found by a
    # random search) must not make grid cells beyond the integers.
    from scipy.spatial import cKDTree

    rng = np.random.default_rng(5)
    ref = rng.normal(size=(3000, 2)) * 50
    query = np.vstack([ref[:10], rng.normal(size=(2000, 2)) * 50])
    for bound in (4.6e-289, 1e-12):
        want = cKDTree(ref).query(query, k=1, distance_upper_bound=bound)[0]
        with np.errstate(all="raise"):
            got = nearest_distance(ref, query, bound)
        np.testing.assert_array_equal(got, want)


def test_spline_with_height_written_in_bulk_is_byte_identical_to_ezdxfs_own_way(tmp_path):
    # The bulk writer's other branch (control points off the plane z = 0,
    # signed zeros): against ezdxf's documented tag-by-tag export.
    import ezdxf

    import pathgen.export.dxf as dxf

    rng = np.random.default_rng(5)
    cp = np.c_[rng.normal(0, 50, (400, 2)), rng.normal(0, 1e-5, 400)]
    cp[::7, 2] = -0.0
    knots = np.concatenate([[0.0] * 4, np.sort(rng.uniform(0, 9, len(cp) - 4)), [9.0] * 4]).tolist()

    def save(bulk, name):
        with dxf.fixed_metadata():
            doc = ezdxf.new("R2010", setup=False)
            spline = doc.modelspace().add_spline()
            spline.dxf.degree = 3
            spline.control_points.set(cp)
            spline.knots = knots
            if bulk:
                dxf._write_in_bulk(spline)
            doc.saveas(tmp_path / name)
        return (tmp_path / name).read_bytes()

    a, b = save(True, "bulk.dxf"), save(False, "tagwise.dxf")
    assert b"-0.0\n" in b
    assert a == b


def test_median_and_unique_of_our_own_give_numpys_values():
    # Reference: numpy.median (the middle value, or the mean of the two
    # middle ones) and numpy.unique, bit for bit, on odd and even sizes and
    # values of every magnitude.
    from pathgen.noise import median
    from pathgen.outline import _unique

    rng = np.random.default_rng(8)
    for n in [*range(1, 40), 1000, 1001, 100_000]:
        a = rng.normal(size=n) * 10.0 ** rng.uniform(-12, 12)
        assert median(a) == np.median(a)
        b = np.round(a / np.abs(a).max(), 1)  # ties
        assert median(b) == np.median(b)
        k = rng.integers(0, 9, n)
        assert np.array_equal(_unique(k), np.unique(k)) and _unique(k).dtype == np.unique(k).dtype
    assert len(_unique(np.zeros(0, np.int64))) == 0
