"""The README's command blocks run verbatim, in order, in a fresh folder (as after a clone)."""
import re
import shlex
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent


def readme_commands() -> list[list[str]]:
    """Every `hiplan ...` command of the README's ```sh blocks, continuation lines joined."""
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    commands = []
    for block in re.findall(r"```sh\n(.*?)```", text, flags=re.S):
        joined = re.sub(r"\\\n\s*", " ", block)
        for line in joined.splitlines():
            words = shlex.split(line, comments=True)
            if words and words[0] == "hiplan":
                commands.append(words[1:])
    return commands


def test_readme_has_commands():
    commands = readme_commands()
    assert len(commands) >= 10
    assert {c[0] for c in commands} >= {"park", "month", "calendar", "brief", "tune", "survey",
                                        "crossings", "lsr", "plan-log", "sites"}


def test_readme_commands_run_verbatim(tmp_path):
    """In a fresh folder holding only what a clone brings (examples/, sites/)."""
    for folder in ("examples", "sites"):
        shutil.copytree(ROOT / folder, tmp_path / folder)
    for argv in readme_commands():  # a dozen commands, in the README's order
        run = subprocess.run([sys.executable, "-m", "planner.cli", *argv], cwd=tmp_path,
                             capture_output=True, text=True, timeout=300)
        assert run.returncode == 0, f"hiplan {' '.join(argv)}: {run.stderr.strip()}"
        assert "Traceback" not in run.stderr
