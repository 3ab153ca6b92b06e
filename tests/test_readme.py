"""Every example in the README runs (slow: CI runs it with -m slow)."""

from __future__ import annotations

import os
import shlex
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
README = (ROOT / "README.md").read_text()

#: Examples that need what a test machine lacks: a display, a running cluster, an evolver
#: of the user's own. `watch` is exercised headless by tests/test_viewer.py; the stage-3
#: evolver run is repeated and compared bit for bit by tests/test_champions.py.
SKIP = ("neurodrome watch", "SCHEDULER-HOST", "my_evolver.py", "dask scheduler", "dask worker", "evolve-restock-3")


def blocks(language: str) -> list[str]:
    """Contents of the README's fenced code blocks opened with ```language."""
    out, current, inside = [], [], None
    for line in README.splitlines():
        stripped = line.strip()
        if stripped.startswith("```"):
            if inside is None:
                inside = stripped[3:].strip()
                current = []
            else:
                if inside == language:
                    out.append("\n".join(current) + "\n")
                inside = None
            continue
        if inside is not None:
            current.append(line)
    return out


def commands() -> list[str]:
    out = []
    for block in blocks("") + blocks("sh"):
        text = block.replace("\\\n", " ")
        for line in text.splitlines():
            line = line.strip()
            synopsis = "[" in line or "..." in line  # a usage line, not an example
            if line.startswith("neurodrome ") and not synopsis and not any(s in line for s in SKIP):
                out.append(line)
    return out


@pytest.fixture(scope="module")
def workdir(tmp_path_factory):
    work = tmp_path_factory.mktemp("readme")
    shutil.copytree(ROOT / "worlds", work / "worlds")
    shutil.copytree(ROOT / "assets", work / "assets")
    return work


def test_readme_has_examples():
    """The README's command examples are found (the parser below is not silently empty)."""
    found = commands()
    assert any(c.startswith("neurodrome evaluate") for c in found)
    assert any(c.startswith("neurodrome new") for c in found)


@pytest.mark.slow
def test_readme_commands_run(workdir):
    """Each `neurodrome ...` line of the README, in order, exits 0 (or 1 where a
    controller in it may fault) with no traceback."""
    env = {**os.environ, "SDL_VIDEODRIVER": "dummy", "SDL_AUDIODRIVER": "dummy", "MPLBACKEND": "Agg"}
    for command in commands():
        args = shlex.split(command)[1:]
        proc = subprocess.run([sys.executable, "-m", "neurodrome", *args], cwd=workdir, env=env,
                              capture_output=True, text=True, timeout=900)
        assert "Traceback" not in proc.stderr, f"{command}\n{proc.stderr}"
        assert proc.returncode == 0, f"{command} exited {proc.returncode}\n{proc.stderr[-2000:]}"


@pytest.mark.slow
def test_readme_python_examples_run(workdir, monkeypatch):
    """The README's Python examples run as written."""
    monkeypatch.chdir(workdir)
    for block in blocks("python"):
        exec(compile(block, "README.md", "exec"), {"__name__": "__readme__"})
