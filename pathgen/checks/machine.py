"""Machine, tool and cut: the numbers a check and a toolpath need.

All lengths in mm, feeds in mm/min, acceleration in mm/s², block rate in
blocks per second.  Defaults are conservative (a small hobby router):
they under-promise rather than over-promise what a machine can do.
:func:`load_machine` reads a profile from a TOML file (``samples/router.toml``
and ``samples/mill.toml`` are documented examples).
"""

from __future__ import annotations

import math
import re
import warnings
from dataclasses import dataclass
from pathlib import Path

from .._options import MM_PER_INCH, SIDES, UNITS, check_option, check_positive
from ..errors import InputError

__all__ = ["Machine", "Tool", "Cut", "DEFAULT_MACHINE", "load_machine"]


@dataclass(frozen=True)
class Machine:
    """What the machine can do.

    Parameters
    ----------
    max_feed : highest cutting feed, mm/min.
    max_accel : path acceleration limit, mm/s² (tangential and centripetal).
    block_rate : blocks (G-code lines of motion) the controller processes
        per second.
    rapid_feed : rapid traverse speed, mm/min (for time estimates).
    name : a label for reports.
    """

    max_feed: float = 3000.0
    max_accel: float = 500.0
    block_rate: float = 250.0
    rapid_feed: float = 5000.0
    name: str = "default"

    def __post_init__(self):
        for f in ("max_feed", "max_accel", "block_rate", "rapid_feed"):
            value = check_positive(f, getattr(self, f))
            problem = _out_of_range(f, value)
            if problem:
                raise InputError(problem)
            object.__setattr__(self, f, value)


#: Accepted ranges of the machine's numbers (mm, minutes, seconds): wide
#: enough for any hobby router or production machine, narrow enough that a
#: slip of the exponent (a block rate of 1e-300) is caught, not believed.
RANGES = {
    "max_feed": (1.0, 1e6, "mm/min"),
    "max_accel": (1.0, 1e6, "mm/s^2"),
    "block_rate": (1.0, 1e6, "blocks/s"),
    "rapid_feed": (1.0, 1e6, "mm/min"),
}


def _out_of_range(key: str, value: float) -> str | None:
    lo, hi, unit = RANGES[key]
    if lo <= value <= hi:
        return None
    return f"{key} = {value:g} {unit} is outside the accepted range {lo:g} to {hi:g} {unit}"


@dataclass(frozen=True)
class Tool:
    """The cutter: ``diameter`` in mm (0 means a point, e.g. a laser's kerf ignored)."""

    diameter: float = 6.0

    def __post_init__(self):
        object.__setattr__(self, "diameter", check_positive("tool diameter", self.diameter, allow_zero=True))

    @property
    def radius(self) -> float:
        return self.diameter / 2.0


@dataclass(frozen=True)
class Cut:
    """How to cut: programmed ``feed`` (mm/min), ``side`` and chord ``tolerance`` (mm)."""

    feed: float = 1000.0
    side: str = "outside"
    tolerance: float = 0.01

    def __post_init__(self):
        object.__setattr__(self, "feed", check_positive("feed", self.feed))
        object.__setattr__(self, "tolerance", check_positive("tolerance", self.tolerance))
        check_option("side", self.side, SIDES)


DEFAULT_MACHINE = Machine()


_NUMERIC_FIELDS = ("max_feed", "max_accel", "block_rate", "rapid_feed")
#: Profile keys (TOML) and the Machine fields they set.
PROFILE_KEYS = {"highest_feed": "max_feed", "acceleration": "max_accel",
                "blocks_per_second": "block_rate", "rapid_speed": "rapid_feed"}
#: Keys of earlier releases, still read (with a note) for one release.
OLD_PROFILE_KEYS = {field: key for key, field in PROFILE_KEYS.items()}
_KEYS = tuple(PROFILE_KEYS) + ("name", "units")
#: Tables of a profile read elsewhere: [program] (the program frame, read by
#: pathgen.export.frame.load_frame) and [tool] (read by load_tool_settings).
_TABLES = ("program", "tool")
#: Keys of the [tool] table: plunge_feed (units/min, the feed of the plunge
#: to depth; without it half the cutting feed).
TOOL_KEYS = ("plunge_feed",)


def toml_line(text: str, key: str) -> int | None:
    """1-based line of ``key = ...`` in TOML text (None when not found)."""
    pattern = re.compile(rf"^\s*[\"']?{re.escape(key)}[\"']?\s*=")
    for number, line in enumerate(text.splitlines(), start=1):
        if pattern.match(line):
            return number
    return None


def read_toml(path: Path) -> tuple[dict, str]:
    try:
        import tomllib
    except ModuleNotFoundError:  # pragma: no cover - Python 3.10
        import tomli as tomllib
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        raise InputError(f"{path}: no such machine profile") from None
    except OSError as exc:
        raise InputError(f"{path}: cannot read machine profile ({exc.strerror})") from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise InputError(f"{path}: not UTF-8 text (byte {exc.start})") from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"{path}: not valid TOML: {exc}") from None
    return data, text


def load_machine(path=None, **overrides) -> Machine:
    """A :class:`Machine` from a TOML profile, with keyword overrides.

    Parameters
    ----------
    path : str, Path or None
        A TOML file with any of the keys ``name`` (text), ``units`` ("mm"
        or "inch": the unit of the numbers in the file), ``highest_feed``
        (units/min), ``acceleration`` (units/s²), ``blocks_per_second``
        and ``rapid_speed`` (units/min); they set the Machine fields
        ``max_feed``, ``max_accel``, ``block_rate`` and ``rapid_feed``.  The
        earlier key names (the field names) are still read, with a warning.
        Missing keys take the defaults of :class:`Machine`; unknown keys are
        refused (a typo would silently fall back to a default).  None: the
        defaults only.
    **overrides
        ``max_feed``, ``max_accel``, ``block_rate``, ``rapid_feed`` (always
        mm and minutes/seconds) or ``name``; a value of None is ignored, so
        unset command-line options can be passed straight through.

    Returns
    -------
    Machine
        Lengths in mm.

    Raises
    ------
    InputError
        Unreadable file, invalid TOML, unknown key, or a value that is not
        a finite number > 0; the message names the file, line and key.

    Examples
    --------
    >>> load_machine(max_accel=800).max_accel
    800.0
    >>> load_machine(accel=800)
    Traceback (most recent call last):
    ...
    pathgen.errors.InputError: unknown machine setting 'accel'; valid: max_feed, max_accel, block_rate, rapid_feed, name
    """
    values: dict = {}
    if path is not None:
        path = Path(path)
        data, text = read_toml(path)

        def where(key):
            line = toml_line(text, key)
            return f"{path}, line {line}" if line else f"{path}"

        data, given_as = dict(data), {}
        for key in list(data):
            if key in OLD_PROFILE_KEYS:
                new = OLD_PROFILE_KEYS[key]
                if new in data:
                    raise InputError(f"{where(key)}: {key!r} is the old name of {new!r}, which is also "
                                     f"given; keep only {new!r}")
                warnings.warn(f"{where(key)}: {key!r} is the old name of {new!r}; it is still read, "
                              f"but rename it to {new!r}", UserWarning, stacklevel=2)
                data[new] = data.pop(key)
                given_as[new] = key
        for key, value in data.items():
            if key in _TABLES:
                if not isinstance(value, dict):
                    raise InputError(f"{where(key)}: {key} must be a table ([{key}]), got {value!r}")
                continue
            if key not in _KEYS:
                valid = ", ".join(_KEYS + tuple(f"[{t}]" for t in _TABLES))
                raise InputError(f"{where(key)}: unknown key {key!r}; valid keys: {valid}")
        units = data.get("units", "mm")
        if units not in UNITS:
            raise InputError(f"{where('units')}: units = {units!r} is not one of: 'mm', 'inch'")
        scale = MM_PER_INCH if units == "inch" else 1.0
        if "name" in data:
            if not isinstance(data["name"], str):
                raise InputError(f"{where('name')}: name must be text, got {data['name']!r}")
            values["name"] = data["name"]
        for key, field in PROFILE_KEYS.items():
            if key not in data:
                continue
            value = data[key]
            name = given_as.get(key, key)
            bad = isinstance(value, bool) or not isinstance(value, (int, float))
            if bad or not (math.isfinite(value) and value > 0):
                raise InputError(
                    f"{where(name)}: {name} must be a finite number > 0, got {value!r}"
                )
            values[field] = float(value) * (1.0 if field == "block_rate" else scale)
            problem = _out_of_range(field, values[field])
            if problem:
                raise InputError(f"{where(name)}: {problem.replace(field, name, 1)}")
    for key, value in overrides.items():
        if key not in _NUMERIC_FIELDS + ("name",):
            valid = ", ".join(_NUMERIC_FIELDS + ("name",))
            raise InputError(f"unknown machine setting {key!r}; valid: {valid}")
        if value is None:
            continue
        if key == "name":
            values["name"] = str(value)
        else:
            if isinstance(value, bool):
                raise InputError(f"{key} must be a finite number > 0, got {value!r}")
            values[key] = check_positive(key, value)
    return Machine(**values)


def load_tool_settings(path) -> dict:
    """The ``[tool]`` table of a profile, lengths in mm: ``{"plunge_feed": mm/min}``
    (an empty dict when absent or when ``path`` is None).

    Unknown keys and values that are not finite numbers > 0 are refused
    with the file and line.
    """
    if path is None:
        return {}
    path = Path(path)
    data, text = read_toml(path)
    table = data.get("tool")
    if table is None:
        return {}

    def where(key):
        line = toml_line(text, key)
        return f"{path}, line {line}" if line else f"{path}"

    if not isinstance(table, dict):
        raise InputError(f"{where('tool')}: tool must be a table ([tool]), got {table!r}")
    scale = MM_PER_INCH if data.get("units", "mm") == "inch" else 1.0
    out = {}
    for key, value in table.items():
        if key not in TOOL_KEYS:
            raise InputError(f"{where(key)}: unknown key {key!r} in [tool]; valid keys: {', '.join(TOOL_KEYS)}")
        bad = isinstance(value, bool) or not isinstance(value, (int, float))
        if bad or not (math.isfinite(value) and 1.0 <= value * scale <= 1e6):
            raise InputError(f"{where(key)}: {key} must be a number from 1 to 1000000 mm/min, got {value!r}")
        out[key] = float(value) * scale
    return out
