"""Reading and cleaning outline points.

:func:`read_points` reads a text file (.csv, .txt, .xy, any other suffix
but .dxf) or a DXF drawing and returns an :class:`Outline`;
:func:`clean_points` applies the same cleaning to a numpy array.

Text files
    One point per line, ``x`` and ``y`` separated by a comma, a semicolon,
    a tab or spaces.  Allowed around the numbers: one header row (the first
    non-comment line, when it is not numeric), comment lines starting with
    ``#``, blank lines, a UTF-8 byte-order mark, CRLF line ends, quotes
    around fields.  A third column (z) is ignored and the steps say so.
    Decimal commas (``12,5;3,75``) are read when the column separator is a
    semicolon, a tab or spaces, which makes them unambiguous; with commas
    between the columns they are refused, never guessed.

DXF drawings (read with ezdxf)
    POINT entities in drawing order, or the vertices of one LWPOLYLINE or
    POLYLINE (its closed flag gives closedness).  When the drawing holds
    more than one candidate outline, name its layer (``layer=``).

Cleaning, each step recorded in ``Outline.steps``
    the rounding step of the coordinates read from the decimals they use
    (``Outline.quantization``); inch converted to mm; repeated points
    merged: a point closer than the merge distance to the last point
    *kept* is dropped (never judged against a dropped one, so a dense run
    thins out instead of collapsing); the merge distance is half the
    rounding step when the coordinates are rounded (then only exact
    repeats merge), else ``MERGE_RTOL`` times the outline's size; a last point repeating
    the first closes the outline and is dropped; closed outlines given
    clockwise are reversed to counter-clockwise.  Refused with
    :class:`~pathgen.errors.InputError`: fewer than 2 distinct points,
    non-finite values, coordinates beyond ``MAX_COORD_MM``, closed outlines
    whose points all lie on one line.  Warned about (``Outline.warnings``):
    a jump much longer than the typical spacing, two points much closer
    together than the typical spacing (a repeated probe reading: a curve
    through both swings wide when they disagree), a closed outline that
    crosses itself.
"""

from __future__ import annotations

import io
import os
import re
from dataclasses import dataclass, field

import numpy as np

from ._options import MM_PER_INCH, UNITS, check_option
from .errors import InputError
from .geometry import shoelace_area
from .spline import points_array

__all__ = [
    "Outline",
    "read_points",
    "clean_points",
    "MERGE_RTOL",
    "MAX_COORD_MM",
    "MIN_SIZE_MM",
    "JUMP_RATIO",
    "CROWD_RATIO",
    "MAX_LINE_CHARS",
]

#: Consecutive points closer than this times the outline's size (its
#: bounding-box diagonal) are merged: 0.1 µm on a 100 mm part.
MERGE_RTOL = 1e-6
#: Outlines smaller than this (bounding-box diagonal, mm) are refused.
MIN_SIZE_MM = 1e-6
#: Coordinates beyond ±1 km (in mm) are refused as absurd.
MAX_COORD_MM = 1e6
#: A step longer than this many times the median step is reported.
JUMP_RATIO = 10.0
#: A step shorter than this fraction of the median step is reported.
CROWD_RATIO = 0.05
#: Longest line accepted in a text file of points (characters).
MAX_LINE_CHARS = 1000

_NUMBER = re.compile(r"^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$")
_SPECIAL = re.compile(r"^[+-]?(nan|inf|infinity)$", re.IGNORECASE)


@dataclass(frozen=True, eq=False)
class Outline:
    """Cleaned outline points, ready to fit.

    Attributes
    ----------
    points : (n, 2) float64, mm, read-only
        The kept points in order (counter-clockwise when closed).
    closed : bool
        Whether the outline returns to its first point.
    source : str
        File name, or "array".
    units : {"mm", "inch"}
        The units of the input (``points`` are always mm).
    steps : tuple of str
        The reading and cleaning steps taken, plain sentences.
    warnings : tuple of str
        Things the user should look at (possible disorder, self-crossing).
    line_numbers : (n,) int array or None
        The file line (1-based) of each kept point; None for arrays and DXF.
    quantization : float or None
        The rounding step of the coordinates as given (in mm: a file in
        inch with 4 decimals has 0.00254), read from the decimals they use;
        None when they use more than 9 decimals (full precision).
    """

    points: np.ndarray
    closed: bool
    source: str = "array"
    units: str = "mm"
    steps: tuple = ()
    warnings: tuple = ()
    line_numbers: np.ndarray | None = field(default=None)
    quantization: float | None = None

    def __post_init__(self):
        self.points.setflags(write=False)
        if self.line_numbers is not None:
            self.line_numbers.setflags(write=False)

    def __len__(self):
        return len(self.points)

    def where(self, i: int) -> str:
        """Where point ``i`` came from: "part.csv line 7" or "point 7"."""
        if self.line_numbers is not None:
            return f"{self.source} line {int(self.line_numbers[i])}"
        return f"{self.source} point {int(i)}"


# -- text files ---------------------------------------------------------------


def _fail(name: str, line: int | None, message: str):
    where = f"{name} line {line}" if line is not None else name
    raise InputError(f"{where}: {message}")


#: Bytes allowed in a text file of points: tab, line feed, carriage return
#: and everything from the space up, but DEL (0x7f).
_NOT_CONTROL = bytes([9, 10, 13, *range(32, 127), *range(128, 256)])


def _decode(raw: bytes, name: str) -> str:
    """Bytes to text; refuse binary data and very long lines, naming the line."""
    if raw.startswith(b"\xef\xbb\xbf"):
        raw = raw[3:]
    control = raw.translate(None, _NOT_CONTROL)  # what is left: the control bytes
    if control:
        at = raw.find(control[:1])
        line = raw.count(b"\n", 0, at) + 1
        what = "a NUL byte" if raw[at] == 0 else f"control byte 0x{raw[at]:02x}"
        _fail(name, line, f"holds {what}: this is not a text file of points")
    buf = np.frombuffer(raw, dtype=np.uint8)
    ends = np.flatnonzero(buf == 10)
    lengths = np.diff(ends, prepend=-1, append=len(buf)) - 1
    if len(lengths) and lengths.max() > MAX_LINE_CHARS:
        i = int(np.argmax(lengths > MAX_LINE_CHARS))
        _fail(name, i + 1, f"line is {int(lengths[i])} bytes long (at most "
              f"{MAX_LINE_CHARS}): this is not a file of points")
    try:
        return raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = raw.count(b"\n", 0, exc.start) + 1
        _fail(name, line, f"byte 0x{raw[exc.start]:02x} is not UTF-8 text: "
                          "this is not a text file of points")


def _split(line: str, sep: str | None) -> list[str]:
    parts = line.split(sep) if sep is not None else line.split()
    return [p.strip().strip('"').strip("'").strip() for p in parts]


def _layout(line: str, number: int, name: str):
    """Column separator and decimal mark implied by one point line.

    Returns (sep, decimal): sep is ";", "\t", "," or None (spaces);
    decimal is "," when decimal commas are possible, else None.
    """
    if ";" in line:
        return ";", ","
    if "\t" in line:
        return "\t", ","
    if "," in line:
        if re.search(r"\d,\d", line) and re.search(r"\d +[+\-.\d]", line) \
                and not re.search(r",\s", line):
            return None, ","  # "12,5 3,75": spaces between the columns
        if re.search(r"\d,\d", line) and len(line.split(",")) == 4:
            _fail(name, number, f"{line!r} has 4 comma-separated values: decimal "
                  "commas cannot be told from column separators; use ';' or a tab "
                  "between the columns, or '.' as the decimal mark")
        return ",", None
    return None, ","


def _same_layout(a, b) -> bool:
    return a == b or {a, b} <= {None, "\t"}


def _is_number(tok: str) -> bool:
    return bool(_NUMBER.match(tok) or _SPECIAL.match(tok))


def _parse_line(line: str, number: int, name: str, sep, decimal, ncols):
    toks = _split(line, sep)
    if decimal == ",":
        toks = [t.replace(",", ".") for t in toks]
    for t in toks:
        if not _is_number(t):
            what = repr(t) if t else "an empty field"
            _fail(name, number, f"{what} is not a number")
    if ncols is not None and len(toks) != ncols:
        _fail(name, number, f"{len(toks)} values, expected {ncols} like the first "
              "point line (mixed separators or a missing value?)")
    return [float(t) for t in toks]


def _read_text(path: str, name: str):
    try:
        with open(path, "rb") as f:
            raw = f.read()
    except OSError as exc:
        raise InputError(f"{name}: cannot read the file ({exc.strerror})") from None
    text = _decode(raw, name)
    had_cr = "\r" in text
    if had_cr:
        text = text.replace("\r\n", "\n").replace("\r", "\n")
    n_lines = text.count("\n") + (0 if text.endswith("\n") or not text else 1)
    steps = []
    # scan the first lines: the first content line is a header when it holds
    # no number at all
    header = first = None
    pos = i = 0
    while pos < len(text):
        nl = text.find("\n", pos)
        nl = len(text) if nl < 0 else nl
        s = text[pos:nl].split("#", 1)[0].strip()
        if s:
            if header is None:
                sep, dec = _layout(s, i + 1, name)
                toks = _split(s, sep)
                if not any(_is_number(t) or _is_number(t.replace(",", ".")) for t in toks):
                    header = (i, s)
                    pos, i = nl + 1, i + 1
                    continue
            first, fl = i, s
            break
        pos, i = nl + 1, i + 1
    if first is None:
        if header is not None:
            _fail(name, header[0] + 1, "a header and no points after it")
        _fail(name, None, "no points (the file is empty or holds only comments)")
    sep, dec = _layout(fl, first + 1, name)
    ncols = len(_parse_line(fl, first + 1, name, sep, dec, None))
    if ncols not in (2, 3):
        _fail(name, first + 1, f"{ncols} value{'s' if ncols > 1 else ''}, expected "
              "x y (or x y z) on each line")
    if header is not None:
        steps.append(f"skipped the header on line {header[0] + 1}: {header[1]!r}")
    body = text[pos:]
    decimal_commas = dec == "," and "," in body
    quoted = '"' in body or "'" in body
    # a plain file (nothing to rewrite) is read by numpy from the file itself
    plain = not (decimal_commas or quoted or had_cr)
    if decimal_commas:
        body = body.replace(",", ".")
    if quoted:
        body = body.replace('"', "").replace("'", "")
    data = None
    try:
        if plain:
            data = np.loadtxt(path, delimiter=sep, comments="#", ndmin=2, dtype=np.float64,
                              skiprows=first, encoding="utf-8-sig")
        else:
            data = np.loadtxt(io.StringIO(body), delimiter=sep, comments="#", ndmin=2,
                              dtype=np.float64)
    except (ValueError, UnicodeDecodeError):
        pass
    if data is not None and data.shape == (n_lines - first, ncols):
        numbers = np.arange(first + 1, n_lines + 1)
    else:
        # careful pass, line by line: name the bad line, or number each point
        lines = text.split("\n")
        rows, nums = [], []
        for i in range(first, len(lines)):
            s = lines[i].split("#", 1)[0].strip()  # as loadtxt: '#' starts a comment
            if not s:
                continue
            lsep, _ = _layout(s, i + 1, name)
            if not _same_layout(lsep, sep) and ncols > 1:
                names = {";": "';'", ",": "','", "\t": "tabs", None: "spaces"}
                _fail(name, i + 1, f"{s!r} is separated by {names[lsep]}, but line "
                      f"{first + 1} by {names[sep]} (mixed separators)")
            rows.append(_parse_line(s, i + 1, name, sep, dec, ncols))
            nums.append(i + 1)
        data = np.array(rows, dtype=np.float64).reshape(-1, ncols)
        numbers = np.array(nums, dtype=np.int64)
    skipped = n_lines - len(data) - (header is not None)
    sep_name = {";": "semicolons", ",": "commas", "\t": "tabs", None: "spaces"}[sep]
    steps.insert(0, f"read {len(data)} points from {name} (lines {numbers[0]}-"
                    f"{numbers[-1]}, columns separated by {sep_name})")
    if decimal_commas:
        steps.append("read decimal commas as decimal points (the columns are not "
                     "separated by commas)")
    if skipped > 0:
        steps.append(f"skipped {skipped} comment or blank line{'s' if skipped > 1 else ''}")
    if ncols == 3:
        steps.append("ignored the third column (z) on every line")
    warnings = []
    if ncols == 3 and sep == ",":
        warnings.append(f"{name}: 3 comma-separated values per line, read as x, y, z; if "
                        "the file uses decimal commas (12,5,3 for 12.5 and 3), save it "
                        "with ';' between the columns")
    return data[:, :2], numbers, steps, warnings, _printed_step(body)


#: Lines of a text file looked at for the decimals it prints.
DECIMALS_SAMPLE_LINES = 2000


def _printed_step(body: str):
    """10^-d for the most decimals d printed in the first lines of numbers
    (12.5000 has 4: the writer's resolution, even where the value is
    round), or None when they use exponents or more than 9 decimals."""
    head = body[: 200 * DECIMALS_SAMPLE_LINES].split("\n", DECIMALS_SAMPLE_LINES)[:DECIMALS_SAMPLE_LINES]
    text = "\n".join(ln.split("#", 1)[0] for ln in head)
    if re.search(r"\d[eE][+-]?\d", text):
        return None
    digits = [len(m) for m in re.findall(r"\.(\d+)", text)]
    d = max(digits, default=0)
    return None if d > 9 else (float(f"1e-{d}") if d else 1.0)


# -- DXF drawings -------------------------------------------------------------


def _read_dxf(path: str, name: str, layer):
    import ezdxf

    try:
        doc = ezdxf.readfile(path)
    except Exception as exc:  # OSError for non-DXF text, ezdxf's structure errors
        msg = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        msg = msg.replace(f"'{path}'", repr(name))
        raise InputError(f"{name}: not a readable DXF drawing ({msg})") from None
    msp = doc.modelspace()
    candidates = []  # (layer, description, points, closed)
    points_by_layer: dict[str, list] = {}
    for e in msp:
        kind = e.dxftype()
        lay = e.dxf.get("layer", "0")
        if kind == "POINT":
            loc = e.dxf.location
            points_by_layer.setdefault(lay, []).append((loc.x, loc.y))
        elif kind == "LWPOLYLINE":
            xyb = np.array(e.get_points("xyb"), dtype=np.float64).reshape(-1, 3)
            pts, bulge = xyb[:, :2].copy(), bool(np.any(xyb[:, 2] != 0))
            candidates.append((lay, f"LWPOLYLINE {e.dxf.handle}", pts, bool(e.closed), bulge))
        elif kind == "POLYLINE" and (e.is_2d_polyline or e.is_3d_polyline):
            pts = np.array([(v.dxf.location.x, v.dxf.location.y) for v in e.vertices],
                           dtype=np.float64).reshape(-1, 2)
            bulge = any(abs(v.dxf.get("bulge", 0.0)) > 0 for v in e.vertices)
            candidates.append((lay, f"POLYLINE {e.dxf.handle}", pts, bool(e.is_closed), bulge))
    for lay, pts in points_by_layer.items():
        candidates.append((lay, f"{len(pts)} POINT entities", np.array(pts, dtype=np.float64),
                           None, False))
    if layer is not None:
        layers = sorted({c[0] for c in candidates})
        candidates = [c for c in candidates if c[0] == layer]
        if not candidates:
            listed = ", ".join(repr(x) for x in layers) or "none"
            raise InputError(f"{name}: no points or polylines on layer {layer!r} "
                             f"(layers with outlines: {listed})")
    if not candidates:
        raise InputError(f"{name}: no POINT, LWPOLYLINE or POLYLINE entities in the "
                         "model space: nothing to read as an outline")
    if len(candidates) > 1:
        listed = "; ".join(f"{c[1]} on layer {c[0]!r}" for c in candidates[:8])
        more = f" and {len(candidates) - 8} more" if len(candidates) > 8 else ""
        fix = ("choose one with layer= (--layer)" if len({c[0] for c in candidates}) > 1
               else "keep one outline per layer")
        raise InputError(f"{name}: {len(candidates)} candidate outlines ({listed}{more}): {fix}")
    lay, what, pts, closed, bulge = candidates[0]
    steps = [f"read {len(pts)} points from {name} ({what} on layer {lay!r})"]
    warnings = []
    if bulge:
        warnings.append(f"{name}: the polyline has arc segments (bulges); only its "
                        "vertices are used, the arcs between them are not")
    insunits = doc.header.get("$INSUNITS", 0)
    return pts, closed, steps, warnings, {1: "inch", 4: "mm"}.get(insunits)


def drawing_units(path) -> str | None:
    """The units a DXF drawing declares in its header ($INSUNITS: 1 inch,
    4 mm), or None when it declares none of these.

    Read from the text of the HEADER section (group code 9 names the
    variable, group code 70 holds its value; DXF reference), without loading
    the drawing: the reader that follows loads it once.
    """
    try:
        with open(os.fspath(path), "rb") as fh:
            head = fh.read(1 << 20)
    except OSError:
        return None  # the reader says what is wrong, with the file's name
    lines = [ln.strip() for ln in head.split(b"\n", 40000)[:40000]]
    for i, ln in enumerate(lines[:-3]):
        if ln == b"$INSUNITS" and lines[i + 1] == b"70":
            try:
                return {1: "inch", 4: "mm"}.get(int(lines[i + 2]))
            except ValueError:
                return None
        if ln == b"ENDSEC":
            break
    return None


def read_points(path, *, units: str = "mm", layer=None, closed=None) -> Outline:
    """Read outline points from a text file or a DXF drawing.

    Parameters
    ----------
    path : str or os.PathLike
        A text file of points (.csv, .txt, .xy, ...) or a .dxf drawing.
    units : {"mm", "inch"}
        Units of the coordinates in the file; converted to mm.
    layer : str or None
        DXF only: the layer of the outline to read when there are several.
    closed : bool or None
        None: closed when the last point repeats the first (text files) or
        the polyline's closed flag is set (DXF).  True/False forces it.

    Returns
    -------
    Outline

    Raises
    ------
    InputError
        With the file name and line: ``"part.csv line 7: 'abc' is not a number"``.
    """
    check_option("units", units, UNITS)
    try:
        path = os.fsdecode(os.fspath(path))
    except TypeError:
        raise InputError(f"path must be a file name (str or path-like), got {type(path).__name__} {path!r}") from None
    name = os.path.basename(path)
    if not os.path.isfile(path):
        raise InputError(f"{name}: no such file ({path})")
    if path.lower().endswith(".dxf"):
        pts, dxf_closed, steps, warnings, declared = _read_dxf(path, name, layer)
        if declared is not None and declared != units:
            warnings.append(f"{name} declares its units as {declared} ($INSUNITS) but "
                            f"units={units!r} was given; read as {units}")
        if closed is None:
            closed = dxf_closed
        return clean_points(pts, closed=closed, units=units, source=name,
                            steps=steps, warnings=warnings)
    if layer is not None:
        raise InputError(f"{name}: layer= applies to DXF drawings only")
    pts, numbers, steps, warnings, printed = _read_text(path, name)
    return clean_points(pts, closed=closed, units=units, source=name,
                        line_numbers=numbers, steps=steps, warnings=warnings,
                        quantization=printed)


# -- cleaning -----------------------------------------------------------------


def _g4(v: float) -> str:
    """Four significant digits, never in exponent notation (0.00001, not 1e-05)."""
    return np.format_float_positional(float(v), precision=4, unique=False, fractional=False, trim="-")


def clean_points(points, *, closed=None, units: str = "mm", source: str = "array",
                 line_numbers=None, steps=(), warnings=(), merge_tol=None,
                 check_crossing: bool = True, quantization=None) -> Outline:
    """Validate and clean outline points given as an array.

    Parameters
    ----------
    points : array-like, shape (n, 2)
        Ordered points along the outline, in ``units``.
    closed : bool or None
        None: closed when the last point repeats the first.
    units : {"mm", "inch"}
        Units of ``points``; the Outline holds mm.
    source : str
        Name used in messages ("array" or a file name).
    line_numbers : (n,) ints or None
        File line of each point, for messages.
    steps, warnings : sequences of str
        Steps and warnings so far (from reading), kept in front.
    merge_tol : float or None
        Distance (mm) under which consecutive points are merged; default
        ``MERGE_RTOL`` times the outline's size.
    check_crossing : bool
        Warn when a closed outline crosses itself (shapely ``is_simple``).
    quantization : float or None
        The step the file prints (10^-decimals, in ``units``), if known:
        the rounding step is the finer of it and the step the values show.

    Returns
    -------
    Outline

    Examples
    --------
    >>> o = clean_points([[0, 0], [0, 1], [1, 1], [1, 0], [0, 0]])
    >>> o.closed, len(o), o.points[1].tolist()
    (True, 4, [1.0, 0.0])
    >>> o.steps[-1]
    'the points ran clockwise: reversed to counter-clockwise'
    """
    check_option("units", units, UNITS)
    steps, warnings = list(steps), list(warnings)
    p = points_array(points, f"{source}: points")
    if line_numbers is not None:
        nums = np.array(line_numbers, dtype=np.int64).reshape(-1)
    else:
        nums = None

    def where(i):
        if nums is not None:
            return f"{source} line {int(nums[i])}"
        return f"{source} point {int(i)}"

    def label(i):
        return where(i).rsplit(" ", 2)[-2] + " " + where(i).rsplit(" ", 1)[-1]

    if len(p) == 0:
        raise InputError(f"{source}: no points")
    bad = ~np.isfinite(p)
    if bad.any():
        i = int(np.argmax(bad.any(axis=1)))
        raise InputError(f"{where(i)}: {p[i].tolist()} is not a finite number "
                         "(NaN or infinity)")
    from .noise import quantization_step

    shown = quantization_step(p)
    if quantization is not None and shown is not None:
        quantization = min(float(quantization), shown)
    else:
        quantization = shown
    if units == "inch":
        p *= MM_PER_INCH
        steps.append("converted inch to mm (x 25.4)")
        if quantization is not None:
            quantization *= MM_PER_INCH
    big = np.abs(p) > MAX_COORD_MM
    if big.any():
        i = int(np.argmax(big.any(axis=1)))
        v = float(p[i][big[i]][0])
        raise InputError(f"{where(i)}: coordinate {v:.6g} mm is absurd (beyond "
                         f"±{MAX_COORD_MM:.0f} mm = 1 km); check the units and columns")
    size = float(np.hypot(*(p.max(axis=0) - p.min(axis=0))))
    if 0 < size < MIN_SIZE_MM:
        raise InputError(f"{source}: all points lie within {size:.3g} mm of each other "
                         f"(less than {MIN_SIZE_MM:g} mm): check the units")
    if merge_tol is not None:
        tol = float(merge_tol)
    elif quantization is not None:
        tol = min(MERGE_RTOL * size, 0.5 * quantization)
    else:
        tol = MERGE_RTOL * size
    keep = _merge_repeats(p, tol)
    if keep is not None:
        drop = np.flatnonzero(~keep)
        count = len(drop)
        shown = ", ".join(where(i).rsplit(" ", 1)[-1] for i in drop[:5])
        what = "lines" if nums is not None else "points"
        more = f" and {count - 5} more" if count > 5 else ""
        steps.append(f"merged {count} repeated point{'s' if count > 1 else ''} into the last "
                     f"point kept (closer than {tol:.3g} mm; {what} {shown}{more})")
        p = p[keep]
        if nums is not None:
            nums = nums[keep]
    if len(p) < 2:
        raise InputError(f"{source}: only 1 distinct point ({where(0)}, "
                         f"{len(points)} given); an outline needs at least 2")
    repeats = len(p) > 2 and float(np.hypot(*(p[-1] - p[0]))) <= tol
    if closed is None:
        closed = repeats
    closed = bool(closed)
    if closed and repeats:
        steps.append(f"the last point ({where(len(p) - 1)}) repeats the first: "
                     "the outline is closed; dropped the repeat")
        p = p[:-1]
        if nums is not None:
            nums = nums[:-1]
    elif closed:
        steps.append("closed the outline (from the last point back to the first)")
    if closed and len(p) < 3:
        raise InputError(f"{source}: a closed outline needs at least 3 distinct points, "
                         f"got {len(p)}")
    if closed:
        # distance of every point from the best line through them: the
        # principal axis, the major eigenvector of the 2 x 2 scatter matrix
        cx, cy = p[:, 0] - p[:, 0].mean(), p[:, 1] - p[:, 1].mean()
        sxy = float(np.dot(cx, cy))
        _, vec = np.linalg.eigh(np.array([[np.dot(cx, cx), sxy], [sxy, np.dot(cy, cy)]]))
        off = np.abs(cx * vec[0, 0] + cy * vec[1, 0])
        if off.max() <= max(tol, 1e-12 * size):
            raise InputError(f"{source}: all {len(p)} points of the closed outline lie on "
                             "one straight line: it encloses no area")
        if shoelace_area(p - p[0]) < 0:  # (about the first point: fewer digits lost)
            order = np.concatenate([[0], np.arange(len(p) - 1, 0, -1)])
            p = p[order]
            if nums is not None:
                nums = nums[order]
            steps.append("the points ran clockwise: reversed to counter-clockwise")
    # warnings: jumps and self-crossing
    q = np.vstack([p, p[:1]]) if closed else p
    d = np.hypot(*np.diff(q, axis=0).T)
    if len(d) >= 4:
        from .noise import median

        med = median(d)
        # the notes speak the file's units (the points are mm from here on)
        per, u = (MM_PER_INCH, "inch") if units == "inch" else (1.0, "mm")

        def odd_step(found, i, what, ratio, plural, advice):
            n_more = f" ({len(found)} such {plural})" if len(found) > 1 else ""
            warnings.append(f"{where(i)}: {what} to the next point ({label((i + 1) % len(p))}), "
                            f"{ratio} the median spacing {_g4(med / per)} {u}{n_more}; {advice}")

        jumps = np.flatnonzero(d > JUMP_RATIO * med)
        if len(jumps):
            i = int(jumps[np.argmax(d[jumps])])
            odd_step(jumps, i, f"a gap of {_g4(d[i] / per)} {u}", f"{d[i] / med:.0f}x", "gaps",
                     "check that the points are in order along the outline (a long straight edge is fine)")
        crowded = np.flatnonzero(d < CROWD_RATIO * med)
        if len(crowded):
            i = int(crowded[np.argmin(d[crowded])])
            odd_step(crowded, i, f"only {_g4(d[i] / per)} {u}", f"1/{med / d[i]:.0f} of", "pairs",
                     "a curve through two points this close swings wide when they disagree "
                     "(a repeated reading?): drop one, or smooth (--smooth)")
    if closed and check_crossing and len(p) >= 4 and not _clearly_simple(p):
        import shapely

        if not shapely.is_simple(shapely.linearrings(p)):
            from .simple import crossing

            c = crossing(p)
            if c is not None and c.local:
                loops = "a small loop" if c.count == 1 else f"{c.count} small loops"
                warnings.append(f"{source}: the points cross their own path in {loops}, each within {c.span} "
                                "points (noise as large as their spacing, or points out of order there?)")
            else:
                warnings.append(f"{source}: the closed outline crosses itself")
    return Outline(points=p, closed=closed, source=source, units=units,
                   steps=tuple(steps), warnings=tuple(warnings), line_numbers=nums,
                   quantization=quantization)


#: Closed outlines of at most this many points are first tested for
#: crossings in numpy (all pairs of edges, a few milliseconds), so a small
#: job does not import shapely (about 0.2 s).
SIMPLE_MAX_POINTS = 400


def _clearly_simple(p) -> bool:
    """True when no two edges of the closed polygon ``p`` (n, 2) can meet,
    with a margin far above rounding; False when some might (then GEOS
    decides), and for polygons of more than :data:`SIMPLE_MAX_POINTS` points.

    Two edges are apart when both ends of one lie strictly on one side of
    the other's line (orientation signs, common practice), or when both lie
    on one line and their spans along it do not meet; two neighbouring
    edges are apart unless the outline doubles back along itself.
    """
    n = len(p)
    if n > SIMPLE_MAX_POINTS:
        return False
    a = p - p.mean(axis=0)
    b = np.roll(a, -1, axis=0)
    e = b - a
    span = float(np.abs(a).max())
    eps = 1e-9 * span * span  # orientations smaller than this are too close to call

    def cross(u, v):
        return u[..., 0] * v[..., 1] - u[..., 1] * v[..., 0]

    # neighbours: edge i and i+1 share a point; they overlap only when folding back
    en = np.roll(e, -1, axis=0)
    if np.any((np.abs(cross(e, en)) <= eps) & ((e * en).sum(axis=1) <= 0)):
        return False
    # every pair at once, on (n, n) grids: row i is edge i, column j edge j
    ax, ay, ex, ey = a[:, 0], a[:, 1], e[:, 0], e[:, 1]
    bx, by = b[:, 0], b[:, 1]

    def side(k_ex, k_ey, k_ax, k_ay, px, py):  # of points (columns) to edge lines (rows)
        return k_ex[:, None] * (py[None, :] - k_ay[:, None]) - k_ey[:, None] * (px[None, :] - k_ax[:, None])

    o1, o2 = side(ex, ey, ax, ay, ax, ay), side(ex, ey, ax, ay, bx, by)  # edge j's ends to line i
    clear = (o1 * o2 > 0) & (np.abs(o1) > eps) & (np.abs(o2) > eps)  # [i, j]: j's ends on one side of i
    # edges on one line (straight runs): apart when their spans along it do not meet
    on_line = (np.abs(o1) <= eps) & (np.abs(o2) <= eps)
    if on_line.any():
        def along(px, py):  # of points (columns) along edge i's direction, from its start
            return ex[:, None] * (px[None, :] - ax[:, None]) + ey[:, None] * (py[None, :] - ay[:, None])

        t0, t1 = along(ax, ay), along(bx, by)
        length2 = (ex * ex + ey * ey)[:, None]
        clear |= on_line & ((np.maximum(t0, t1) < -eps) | (np.minimum(t0, t1) > length2 + eps))
    apart = clear | clear.T
    idx = np.arange(n)
    far = np.abs(idx[:, None] - idx[None, :]) >= 2
    far[0, n - 1] = far[n - 1, 0] = False  # the first and last edges are neighbours too
    return bool(apart[far].all())


def _merge_repeats(p, tol):
    """Which points to keep: each point closer than ``tol`` to the last
    point kept is dropped.  None when every point is kept.

    Only the points after a close step can be dropped, so the loop visits
    those alone (and the points after a dropped one, until one is kept).
    """
    n = len(p)
    if n < 2:
        return None
    d = np.hypot(*np.diff(p, axis=0).T)
    close = np.flatnonzero(d <= tol) + 1
    if len(close) == 0:
        return None
    # the usual case in one pass.  In a run of consecutive close points
    # s, s+1, ..., each close to its predecessor, the rule drops s (close to
    # s-1, kept), keeps s+1 when it lies farther than tol from s-1, drops
    # s+2, and so on: every other one.  That holds when each dropped point's
    # two neighbours lie farther than tol apart (checked, all at once);
    # otherwise the point-by-point loop below decides.
    first = np.concatenate([[True], np.diff(close) > 1])
    start = np.maximum.accumulate(np.where(first, np.arange(len(close)), 0))
    drop = close[(np.arange(len(close)) - start) % 2 == 0]
    inner = drop[drop < n - 1]
    a, b = p[inner - 1], p[inner + 1]
    if np.all(np.hypot(b[:, 0] - a[:, 0], b[:, 1] - a[:, 1]) > tol):
        keep = np.ones(n, bool)
        keep[drop] = False
        return keep
    cand = close.tolist()
    import bisect

    keep = np.ones(n, bool)
    tol2 = tol * tol
    x, y = p[:, 0], p[:, 1]
    k = 0
    while k < len(cand):
        i = cand[k]
        last = i - 1  # kept: every point between candidates is
        lx, ly = float(x[last]), float(y[last])
        while i < n:
            dx, dy = float(x[i]) - lx, float(y[i]) - ly
            if dx * dx + dy * dy <= tol2:
                keep[i] = False
                i += 1
                continue
            break
        # point i (if any) is kept; go on with the next candidate after it
        k = bisect.bisect_right(cand, i, lo=k)
    return keep
