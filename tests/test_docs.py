"""The README stays true: its test command is what CI runs, and every command is documented."""

from __future__ import annotations

import re

from atlas.cli import main

from .conftest import REPO


def _quick_start_commands() -> list[str]:
    text = (REPO / "README.md").read_text(encoding="utf-8")
    section = text.split("## Quick start", 1)[1].split("\n## ", 1)[0]
    return re.findall(r"```sh\n(.+?)\n```", section)


def test_quick_start_is_two_commands_and_ci_runs_the_second():
    commands = _quick_start_commands()
    assert len(commands) == 2
    assert "atlas build content --out build" in commands[0]
    ci = (REPO / ".ci" / "run").read_text(encoding="utf-8").splitlines()
    assert commands[1] in ci


def test_every_command_is_in_the_readme():
    text = (REPO / "README.md").read_text(encoding="utf-8")
    for name in main.commands:
        assert f"`atlas {name}" in text, name
