"""The README's first quick-start command, run verbatim in a fresh virtual
environment (slow: it installs the package; CI runs it)."""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent


def first_quick_start_command() -> str:
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    section = text.split("## Quick start", 1)[1].split("\n## ", 1)[0]
    blocks = re.findall(r"```sh\n(.*?)```", section, flags=re.S)
    return blocks[0].strip()


def _copy_checkout(dst: Path) -> Path:
    """The project's files without build leftovers (the install must not
    write into the shared working tree)."""
    ignore = shutil.ignore_patterns(".git", "build", "dist", "*.egg-info", "__pycache__",
                                    ".pytest_cache", ".hypothesis", "*.pyc")
    shutil.copytree(ROOT, dst, ignore=ignore)
    return dst


@pytest.mark.slow
@pytest.mark.skipif(os.environ.get("CI") != "true",
                    reason="installs the package into a fresh virtual environment: runs only in CI "
                           "(bash .ci/run, which sets CI=true)")
def test_readme_first_command_in_a_fresh_venv(tmp_path):
    command = first_quick_start_command()
    assert "pathgen" in command and "samples/" in command
    venv = tmp_path / "venv"
    # --system-site-packages: the dependencies already installed here are
    # reused, so nothing needs downloading.
    subprocess.run([sys.executable, "-m", "venv", "--system-site-packages", str(venv)], check=True)
    work = _copy_checkout(tmp_path / "checkout")
    env = dict(os.environ)
    env["PATH"] = f"{venv / 'bin'}{os.pathsep}{env.get('PATH', '')}"
    env["VIRTUAL_ENV"] = str(venv)
    env.pop("PYTHONPATH", None)
    env["PIP_DISABLE_PIP_VERSION_CHECK"] = "1"
    r = subprocess.run(command, shell=True, cwd=work, env=env, capture_output=True, text=True, timeout=600)
    # 0: done (a 6 mm tool reaches every spot of the bracket; a failed install
    # or a tight spot would exit 1)
    assert r.returncode == 0, f"{command!r} exited {r.returncode}:\n{r.stdout[-2000:]}\n{r.stderr[-2000:]}"
    # The install landed in the fresh environment (the command itself may
    # import the checkout's source: `python -m` puts the current folder first).
    installed = list((venv / "lib").glob("python3*/site-packages/pathgen/cli.py"))
    assert installed, "pip did not install pathgen into the fresh environment"
    assert (venv / "bin" / "pathgen").exists()  # the console script
    # ... and did the job it promises: the summary (and the caution) on stdout.
    assert "bracket.csv" in r.stdout and "length" in r.stdout
    assert "verify every program by simulation or an air cut" in " ".join(r.stdout.split()).lower()
    # The program, when the command writes one, is there and complete.
    for out in re.findall(r"-o\s+(\S+\.nc)", command):
        text = (work / out).read_text()
        assert text.rstrip().endswith(("M2", "M30"))
