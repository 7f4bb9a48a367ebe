"""The README is the newcomer's path: its commands must work as written.

- `.ci/run` runs the README's test command verbatim;
- every shell command of the README tour runs from a folder laid out like the
  repository root and ends with the exit code the README states (0 unless the
  line says "exits N").
"""
from __future__ import annotations

import os
import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
README = (ROOT / "README.md").read_text(encoding="utf-8")


def _fenced_blocks(text: str) -> list[tuple[int, str]]:
    """(offset, body) of every ```bash block."""
    return [(m.start(), m.group(1)) for m in re.finditer(r"```bash\n(.*?)```", text, re.S)]


def _tour_commands() -> list[str]:
    marker = README.index("<!-- tour:")
    offset, body = next((o, b) for o, b in _fenced_blocks(README) if o > marker)
    return [line.strip() for line in body.splitlines() if line.strip() and not line.startswith("#")]


def test_first_paragraph_states_the_job():
    first = README.split("\n\n")[1]
    for word in ("thickness", "n, k", "Psi and Delta", "reflectance", "recipe", "spec"):
        assert word in first, word


def test_setup_has_exactly_two_commands_and_ci_runs_the_test_one_verbatim():
    setup = README.split("## Set-up", 1)[1].split("\n## ", 1)[0]
    commands = [body.strip() for _, body in _fenced_blocks(setup)]
    assert len(commands) == 2
    assert "lamina demo" in commands[0]
    ci = (ROOT / ".ci" / "run").read_text(encoding="utf-8").splitlines()
    assert commands[1] in ci


def _expected_exit(command: str) -> int:
    match = re.search(r"#\s*exits (\d)", command)
    return int(match.group(1)) if match else 0


@pytest.mark.skipif(shutil.which("lamina") is None, reason="the lamina console script is not installed")
def test_every_tour_command_runs_as_written(tmp_path):
    (tmp_path / "sample_data").symlink_to(ROOT / "sample_data")
    env = dict(os.environ, MPLBACKEND="Agg")
    commands = _tour_commands()
    assert len(commands) >= 8
    for command in commands:
        done = subprocess.run(command, shell=True, cwd=tmp_path, env=env, capture_output=True,
                              text=True, timeout=300, stdin=subprocess.DEVNULL)
        assert done.returncode == _expected_exit(command), (
            f"{command}\nexit {done.returncode}\nstdout:\n{done.stdout[-2000:]}\nstderr:\n{done.stderr[-2000:]}")
        assert "Traceback" not in done.stderr, command
    assert (tmp_path / "tour" / "oxide_fit" / "report.html").exists()
    assert (tmp_path / "tour" / "map" / "summary.json").exists()
    assert (tmp_path / "tour" / "check" / "check.json").exists()
