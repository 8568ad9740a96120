"""Machine profiles (TOML), tool and cut values: loading, overrides, refusals."""

import math
from pathlib import Path

import pytest

from pathgen import Cut, Machine, Tool, load_machine
from pathgen.errors import InputError

SAMPLES = Path(__file__).resolve().parent.parent / "samples"


def write(tmp_path, text, name="m.toml"):
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


@pytest.mark.parametrize("name", ["router.toml", "mill.toml"])
def test_sample_profiles_load_with_plausible_values(name):
    # Plausibility ranges for small routers and mills (sources: machine-ranges,
    # common practice / from memory): accel 100-5000 mm/s², feeds
    # 0.5-20 m/min, block rates 100-5000 /s.
    m = load_machine(SAMPLES / name)
    assert 100 <= m.max_accel <= 5000
    assert 500 <= m.max_feed <= 20000
    assert 100 <= m.block_rate <= 5000
    assert m.rapid_feed >= m.max_feed
    assert m.name


def test_defaults_and_overrides(tmp_path):
    assert load_machine() == Machine()
    p = write(tmp_path, 'name = "shop router"\nhighest_feed = 2500\n')
    m = load_machine(p, max_accel=800, block_rate=None)
    assert (m.name, m.max_feed, m.max_accel, m.block_rate) == ("shop router", 2500.0, 800.0, 250.0)
    assert m.rapid_feed == Machine().rapid_feed  # missing key: the default


def test_inch_profile_is_converted_to_mm(tmp_path):
    # 1 inch = 25.4 mm exactly (international inch, 1959).
    p = write(tmp_path, 'units = "inch"\nhighest_feed = 100\nacceleration = 10\nblocks_per_second = 300\n')
    m = load_machine(p)
    assert m.max_feed == pytest.approx(2540.0)
    assert m.max_accel == pytest.approx(254.0)
    assert m.block_rate == 300.0  # blocks per second have no length


@pytest.mark.parametrize(
    "text, match",
    [
        ("highest_feed = -5\n", r"m\.toml, line 1: highest_feed must be a finite number > 0, got -5"),
        ("name = 'x'\nacceleration = 0\n", r"line 2: acceleration must be a finite number > 0, got 0"),
        ("acceleration = nan\n", r"line 1: acceleration must be a finite number > 0, got nan"),
        ("acceleration = inf\n", r"acceleration must be a finite number > 0, got inf"),
        ("blocks_per_second = true\n", r"blocks_per_second must be a finite number > 0, got True"),
        ("blocks_per_second = '250'\n", r"blocks_per_second must be a finite number > 0, got '250'"),
        ("\naccel = 500\n", r"line 2: unknown key 'accel'; valid keys: highest_feed, acceleration"),
        ("acceleration = 500\nmax_accel = 400\n", r"line 2: 'max_accel' is the old name of 'acceleration', "
                                                   r"which is also given"),
        ("units = 'cm'\n", r"units = 'cm' is not one of: 'mm', 'inch'"),
        ("name = 5\n", r"line 1: name must be text"),
        ("max_feed = \n", r"m\.toml: not valid TOML: .*line 1"),
    ],
)
def test_bad_profiles_name_file_line_and_key(tmp_path, text, match):
    with pytest.raises(InputError, match=match):
        load_machine(write(tmp_path, text))


def test_missing_and_unreadable_profiles(tmp_path):
    with pytest.raises(InputError, match="nope.toml: no such machine profile"):
        load_machine(tmp_path / "nope.toml")
    p = tmp_path / "bin.toml"
    p.write_bytes(b"name = '\xff'\n")
    with pytest.raises(InputError, match="bin.toml: not UTF-8 text"):
        load_machine(p)


def test_bad_overrides():
    with pytest.raises(InputError, match="unknown machine setting 'accel'"):
        load_machine(accel=500)
    with pytest.raises(InputError, match="max_feed must be a finite number > 0"):
        load_machine(max_feed=-1)
    with pytest.raises(InputError, match="max_accel must be a finite number > 0"):
        load_machine(max_accel=True)


@pytest.mark.parametrize(
    "make, match",
    [
        (lambda: Cut(feed=math.nan), "feed must be a finite number > 0"),
        (lambda: Cut(feed=0), "feed must be a finite number > 0"),
        (lambda: Cut(tolerance=-0.01), "tolerance must be a finite number > 0"),
        (lambda: Cut(side="left"), "side='left' is not one of"),
        (lambda: Tool(-6), "tool diameter must be a finite number >= 0"),
        (lambda: Machine(max_accel=0), "max_accel must be a finite number > 0"),
    ],
)
def test_impossible_values_are_refused(make, match):
    with pytest.raises(InputError, match=match):
        make()


@pytest.mark.parametrize("text, key", [
    ("blocks_per_second = 1e-300\n", "blocks_per_second"),   # F1 everywhere and a 0 s cycle time before
    ("highest_feed = 1e12\n", "highest_feed"),
    ("acceleration = 0.001\n", "acceleration"),
    ("units = 'inch'\nrapid_speed = 100000\n", "rapid_speed"),  # 2.54e6 mm/min
])
def test_values_outside_any_machine_are_refused_with_the_line(tmp_path, text, key):
    # Wide plausibility bounds (common practice; sources: machine-ranges):
    # 1 to 1e6 mm/min, mm/s^2 or blocks/s.
    p = write(tmp_path, text)
    line = text.splitlines().index(next(l for l in text.splitlines() if l.startswith(key))) + 1
    with pytest.raises(InputError, match=rf"line {line}: {key} = .* outside the accepted range"):
        load_machine(p)
    field = {"blocks_per_second": "block_rate", "highest_feed": "max_feed", "acceleration": "max_accel",
             "rapid_speed": "rapid_feed"}[key]
    with pytest.raises(InputError, match="outside the accepted range"):
        Machine(**{field: 1e-3 if field != "max_feed" else 1e9})


def test_old_profile_keys_are_still_read_with_a_note(tmp_path):
    # the keys of the previous release keep working for one release
    p = write(tmp_path, "max_feed = 2500\nmax_accel = 800\nblock_rate = 300\nrapid_feed = 9000\n")
    with pytest.warns(UserWarning) as caught:
        m = load_machine(p)
    said = [str(w.message) for w in caught]
    assert len(said) == 4 and any("line 2: 'max_accel' is the old name of 'acceleration'" in s for s in said)
    assert (m.max_feed, m.max_accel, m.block_rate, m.rapid_feed) == (2500.0, 800.0, 300.0, 9000.0)
    new = write(tmp_path, "highest_feed = 2500\nacceleration = 800\nblocks_per_second = 300\n"
                          "rapid_speed = 9000\n", name="new.toml")
    assert load_machine(new) == m


def test_old_key_notes_reach_the_user(tmp_path):
    import io

    from pathgen.cli import main

    p = write(tmp_path, "max_accel = 800\n")
    pts = tmp_path / "c.csv"
    pts.write_text("x,y\n0,0\n10,0\n10,10\n0,10\n")
    err = io.StringIO()
    status = main(["check", str(pts), "--closed", "--machine", str(p)], out=io.StringIO(), err=err)
    assert status == 0 and "'max_accel' is the old name of 'acceleration'" in err.getvalue()
