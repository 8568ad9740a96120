"""docs/guide.md shows real output: every example in it is run here, in
order, in a copy of the samples, and every line the guide shows must be a
line the run printed or wrote (in the order shown).  A guide that drifts
from the program fails this test instead of misleading a reader.

The guide is walked block by block:
- a ```python block is executed (it may write files the next command reads);
- a block whose first line is a ``pathgen`` command is run through the
  command line (``pathgen.cli.main``);
- the plain block after a command shows its output: its lines are looked
  up in what the command printed and in the G-code file it wrote;
- the block before the first command shows the head and tail of a sample
  file (``...`` between them).
"""

from __future__ import annotations

import io
import re
import shlex
import shutil
from pathlib import Path

import pytest

from pathgen.cli import main

ROOT = Path(__file__).resolve().parent.parent
GUIDE = ROOT / "docs" / "guide.md"


def _blocks(text):
    """(info string, body, prose before it) of every fenced block, in order."""
    out, last = [], 0
    for m in re.finditer(r"^```(\w*)\n(.*?)^```", text, flags=re.S | re.M):
        out.append((m.group(1), m.group(2), text[last:m.start()]))
        last = m.end()
    return out


def _command(body):
    joined = body.replace("\\\n", " ")
    lines = [ln for ln in joined.splitlines() if ln.strip()]
    if len(lines) == 1 and lines[0].startswith("pathgen "):
        return shlex.split(lines[0])[1:]
    return None


def _in_order(shown, actual, what):
    """Every shown line (bar ``...``) appears in ``actual``, in the order shown."""
    at = 0
    for line in shown:
        if line.strip() in ("", "..."):
            continue
        try:
            at = actual.index(line.rstrip(), at) + 1
        except ValueError:
            pytest.fail(f"docs/guide.md shows a line that {what} does not:\n  {line}\n"
                        f"--- {what} ---\n" + "\n".join(actual[:80]))


def _hand_edit(program: Path, edited: Path, prose: str):
    """The hand edit the guide describes in the words before the command:
    "to `F800` on line N" (a feed), "mistyped `A` as `B` on line N" (a
    number), "on ..., line N, as `TEXT`" (a whole line)."""
    lines = program.read_text().splitlines(keepends=True)
    prose = " ".join(prose.split())
    edits = 0
    for feed, n in re.findall(r"to `F(\d+)` on line (\d+)", prose):
        k = int(n) - 1
        assert re.search(r"F\d", lines[k]), f"line {k + 1} holds no feed: {lines[k]!r}"
        lines[k] = re.sub(r"F\d+(\.\d+)?", f"F{feed}", lines[k])
        edits += 1
    for old, new, n in re.findall(r"mistyped `(\S+)` as `(\S+)` on line (\d+)", prose):
        k = int(n) - 1
        assert old in lines[k], f"line {k + 1} is not the one the guide edits: {lines[k]!r}"
        lines[k] = lines[k].replace(old, new)
        edits += 1
    for n, text in re.findall(r"line (\d+), as `([^`]+)`", prose):
        lines[int(n) - 1] = text + "\n"
        edits += 1
    assert edits, "the guide no longer describes its hand edit"
    edited.write_text("".join(lines))


def test_every_example_in_the_guide_is_real_output(tmp_path, monkeypatch):
    shutil.copytree(ROOT / "samples", tmp_path / "samples")
    (tmp_path / "parts").mkdir()
    shutil.copy(ROOT / "samples" / "hook.csv", tmp_path / "parts" / "hook.csv")  # one file keeps it quick
    monkeypatch.chdir(tmp_path)
    # the drawn plate the guide borrows from docs/part.md
    part_page = _blocks((ROOT / "docs" / "part.md").read_text(encoding="utf-8"))
    exec(compile(next(b[1] for b in part_page if b[0] == "python"), "docs/part.md", "exec"), {})  # noqa: S102
    blocks = _blocks(GUIDE.read_text(encoding="utf-8"))
    commands = [b for b in blocks if _command(b[1])]
    assert len(commands) >= 8, "the guide lost its commands"

    # the points file shown at the start: its head and tail
    first = next(i for i, b in enumerate(blocks) if _command(b[1]))
    shown_points = [b for b in blocks[:first] if not b[0]]
    assert shown_points, "the guide no longer shows the points"
    name = re.search(r"# (\w+):", shown_points[0][1]).group(1)
    _in_order(shown_points[0][1].splitlines(), (tmp_path / "samples" / f"{name}.csv").read_text().splitlines(),
              f"samples/{name}.csv")

    ran, checked = 0, 0
    last_output = None
    for info, body, prose in blocks[first:]:
        if info == "python":
            exec(compile(body, "docs/guide.md", "exec"), {})  # noqa: S102 - our own guide
            last_output = None
            continue
        argv = _command(body)
        if argv is not None:
            if argv[0] == "verify" and not Path(argv[1]).exists():
                _hand_edit(Path(argv[1].replace("-edited", "")), Path(argv[1]), prose)
            out, err = io.StringIO(), io.StringIO()
            status = main(argv, out=out, err=err)
            # exit 1 is the answer 'the tool cannot reach' / 'not clean', shown in the guide
            assert status in (0, 1), f"{' '.join(argv)} exited {status}: {err.getvalue()}"
            written = []
            if "-o" in argv and argv[argv.index("-o") + 1].endswith(".nc"):
                written = Path(argv[argv.index("-o") + 1]).read_text().splitlines()
            last_output = (" ".join(argv[:2]), out.getvalue().splitlines() + written)
            if argv[0] == "verify":
                # the guide's claims around a hand edit: the edit is not clean
                # (exit 1), the unedited program is (exit 0)
                assert status == 1
                unedited = argv[1].replace("-edited", "")
                assert main(["verify", unedited] + argv[2:], out=io.StringIO(), err=io.StringIO()) == 0
            ran += 1
            continue
        if last_output is not None:
            what, actual = last_output
            _in_order(body.splitlines(), actual, f"`pathgen {what}`")
            checked += 1
            last_output = None
    assert ran == len(commands)
    assert checked >= 5, "fewer outputs shown than the guide had"


def _shown_messages(doc: str, after: str):
    """The lines of the first plain block after the words ``after`` in a doc."""
    text = (ROOT / "docs" / doc).read_text(encoding="utf-8")
    block = re.search(r"^```\n(.*?)^```", text[text.index(after):], flags=re.S | re.M)
    return block.group(1).splitlines()


def test_error_lines_shown_in_the_docs_are_the_real_ones(tmp_path, monkeypatch):
    # docs/cli.md and docs/input.md show what some bad inputs print: make
    # those inputs and compare the printed line with the one shown
    import ezdxf

    from pathgen import read_points
    from pathgen.errors import InputError

    monkeypatch.chdir(tmp_path)
    (tmp_path / "nan.csv").write_text("x,y\n0,0\n1.0,nan\n2,2\n")
    (tmp_path / "part.csv").write_text("x,y\n0,0\n1,0\n1,1\n0,1\n2,2\nabc,3\n")
    shutil.copy(ROOT / "samples" / "bracket.csv", tmp_path / "bracket.csv")
    bracket = ["bracket.csv", "-o", "bracket.nc", "--tool-diameter", "6"]
    assert main(["gcode"] + bracket, out=io.StringIO(), err=io.StringIO()) == 0

    def printed(argv):
        err = io.StringIO()
        assert main(argv, out=io.StringIO(), err=err) == 2
        return err.getvalue().strip()

    cli = [printed(["check", "nan.csv"]), printed(["gcode"] + bracket), printed(["check", "bracket.csv", "--bogus"])]
    assert _shown_messages("cli.md", "Error lines look like") == cli

    doc = _shown_messages("input.md", "## Messages")
    assert printed(["check", "part.csv"]) == f"pathgen check: error: {doc[0]}"
    (tmp_path / "part.csv").write_text("0,0,0,0\n1,1\n")
    assert printed(["check", "part.csv"]) == f"pathgen check: error: {doc[1]}"
    drawing = ezdxf.new("R2010")
    msp = drawing.modelspace()
    msp.add_lwpolyline([(0, 0), (50, 0), (50, 30), (0, 30)], close=True, dxfattribs={"layer": "OUTER"})
    msp.add_lwpolyline([(10, 10), (20, 10), (20, 20), (10, 20)], close=True, dxfattribs={"layer": "HOLE"})
    drawing.saveas(tmp_path / "drawing.dxf")
    with pytest.raises(InputError) as info:
        read_points("drawing.dxf")  # one outline asked for, two drawn
    assert str(info.value) == doc[2]
