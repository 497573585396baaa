"""The README stays true: its set-up commands, and every scanmass command it shows uses
commands and options that exist."""

from __future__ import annotations

import re
import shlex
from pathlib import Path

import pytest
import typer.main

from scanmass.cli.app import app

README = Path(__file__).resolve().parent.parent / "README.md"


def _commands() -> list[list[str]]:
    text = README.read_text(encoding="utf-8")
    lines = []
    for block in re.findall(r"```bash\n(.*?)```", text, flags=re.S):
        for line in block.splitlines():
            line = line.split("  #")[0].strip()
            if line.startswith("scanmass "):
                lines.append(shlex.split(line))
    return lines


def test_readme_opens_with_the_job_then_the_two_setup_commands():
    text = README.read_text(encoding="utf-8")
    first_block = re.search(r"```bash\n(.*?)```", text, flags=re.S).group(1)
    assert 'python -m pip install -e ".[test]" && scanmass demo' in first_block
    assert "python -m pytest" in first_block
    intro = text.split("```bash")[0]
    assert intro.count("\n\n") <= 2, "one paragraph before the set-up commands"


@pytest.mark.parametrize("argv", _commands(), ids=lambda a: " ".join(a[:3]))
def test_readme_commands_use_existing_options(argv):
    group = typer.main.get_command(app)
    assert argv[0] == "scanmass"
    if argv[1].startswith("-"):
        return  # e.g. scanmass --help
    command = group.commands.get(argv[1])
    assert command is not None, f"README shows unknown command {argv[1]!r}"
    known = {opt for p in command.params for opt in getattr(p, "opts", [])} | {"--help", "-h"}
    for word in argv[2:]:
        if word.startswith("--"):
            assert word.split("=")[0] in known, f"README shows unknown option {word} of {argv[1]}"
