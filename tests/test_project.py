"""Project-level promises: the README's commands, CI, one-way stages, lazy imports."""

from __future__ import annotations

import ast
import re
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent


def _quick_start_commands():
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    section = text.split("## Quick start", 1)[1].split("\n## ", 1)[0]
    return [b.strip() for b in re.findall(r"```sh\n(.*?)```", section, flags=re.S)]


def test_readme_quick_start_has_exactly_two_commands():
    commands = _quick_start_commands()
    assert len(commands) == 2, commands
    assert all("\n" not in c for c in commands)
    assert "pathgen" in commands[0] and "samples/" in commands[0]
    assert "pytest" in commands[1]


def test_ci_runs_exactly_the_readme_test_command():
    ci = (ROOT / ".ci" / "run").read_text(encoding="utf-8").splitlines()
    assert _quick_start_commands()[1] in ci


def test_readme_and_help_carry_the_caution():
    readme = (ROOT / "README.md").read_text(encoding="utf-8").lower()
    assert "verify every program by simulation or an air cut" in readme


# Stages of the data flow; a module may import only its own stage or earlier
# ones.  Every module of the package has a stage (checked below), and there
# is no exception: the plain model of moves lives in the first stage.
_STAGES = [
    {"errors", "_options", "_version", "geometry", "moves"},
    {"spline", "points", "outline", "smooth", "noise", "simple", "drawing", "part", "primitives"},
    {"checks"},
    {"path"},
    {"export", "verify"},
    {"job", "pipeline", "partjob"},
    {"cli", "demo", "__main__", "__init__"},
]


def _stage(module_parts):
    head = module_parts[0] if module_parts else "__init__"
    for i, names in enumerate(_STAGES):
        if head in names:
            return i
    return None


def _imports(path: Path, package_parts):
    tree = ast.parse(path.read_text(encoding="utf-8"))
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom):
            if node.level:
                base = package_parts[: len(package_parts) - node.level + 1]
                target = base + (node.module.split(".") if node.module else [])
                if not node.module:  # from . import x
                    for alias in node.names:
                        yield target + [alias.name]
                    continue
            elif node.module and node.module.split(".")[0] == "pathgen":
                target = node.module.split(".")[1:]
            else:
                continue
            yield target
        elif isinstance(node, ast.Import):
            for alias in node.names:
                parts = alias.name.split(".")
                if parts[0] == "pathgen":
                    yield parts[1:]


def test_stages_import_only_earlier_stages():
    # The design in the brief: each stage imports only earlier ones.
    offenders = []
    for path in sorted((ROOT / "pathgen").rglob("*.py")):
        rel = path.relative_to(ROOT / "pathgen").with_suffix("")
        parts = list(rel.parts)
        if parts[-1] == "__init__":
            parts = parts[:-1]
        own = _stage(parts)
        if own is None:
            offenders.append(f"{rel} has no stage: add it to _STAGES")
            continue
        package_parts = parts[:-1] if path.name != "__init__.py" else parts
        for target in _imports(path, package_parts):
            other = _stage(target)
            if other is None:
                offenders.append(f"{rel} imports {'.'.join(target)}, which has no stage")
            elif other > own:
                offenders.append(f"{rel} imports {'.'.join(target)}")
    assert not offenders, offenders


@pytest.mark.parametrize("module", ["pathgen", "pathgen.cli"])
def test_import_is_light(module):
    # `pathgen --help` must stay fast: no heavy library at import time.
    code = (
        f"import sys, {module}; heavy = [m for m in ('scipy', 'ezdxf', 'matplotlib', 'shapely') "
        "if m in sys.modules]; print(','.join(heavy))"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == ""


def _project_text_files():
    for folder in ("pathgen", "tests", "docs", "benchmarks", "samples"):
        for path in sorted((ROOT / folder).rglob("*")):
            if path.suffix in {".py", ".md", ".toml", ".txt"} and "data" not in path.parts:
                yield path
    yield ROOT / "README.md"


def test_sources_are_cited_inside_the_project():
    # The project keeps its own list of published sources (docs/sources.md);
    # every "(sources: NAME)" comment names an entry there, and nothing
    # points at a sources list outside the repository.
    listed = set(re.findall(r"\*\*\[([a-z0-9.-]+)\]\*\*", (ROOT / "docs" / "sources.md").read_text("utf-8")))
    assert len(listed) >= 30
    unknown, outside = [], []
    for path in _project_text_files():
        text = path.read_text(encoding="utf-8")
        for group in re.findall(r"sources: ([a-z0-9., -]+)", text):
            for name in re.split(r"[,\s]+", group.strip(" ,.")):
                if name and name not in listed:
                    unknown.append(f"{path.relative_to(ROOT)}: {name}")
        if re.search(r"SOURCES(\.md)?\s*§|shared/|\bBRIEF\b|STYLE\.md", text) and path.name != "test_project.py":
            outside.append(str(path.relative_to(ROOT)))
    assert not unknown, unknown
    assert not outside, outside


def test_one_caution_text_everywhere():
    # one text, defined once: the command line, the program header, the
    # report, the drawing and the picture all carry it
    from pathgen import _options
    from pathgen.checks import report
    from pathgen.cli import CAUTION as cli_caution
    from pathgen.export import gcode

    assert cli_caution == report.CAUTION == _options.CAUTION
    assert gcode.CAUTION == _options.CAUTION_LINES and all(len(c) + 2 <= 256 for c in gcode.CAUTION)
    defined = [p.relative_to(ROOT) for p in (ROOT / "pathgen").rglob("*.py")
               if re.search(r"^CAUTION\w* = \(", p.read_text(encoding="utf-8"), flags=re.M)]
    assert [str(p) for p in defined] == ["pathgen/_options.py"]
