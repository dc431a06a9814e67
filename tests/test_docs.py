"""Every CLI command has help text and is documented in the README (common practice, no
source)."""

from __future__ import annotations

from pathlib import Path

import click
import pytest
from click.testing import CliRunner

from labelreview.cli import cli

README = (Path(__file__).parent.parent / "README.md").read_text(encoding="utf-8")


def _commands(group: click.Group, prefix: str = "") -> list[tuple[str, click.Command]]:
    out = []
    for name, cmd in sorted(group.commands.items()):
        full = f"{prefix}{name}"
        if isinstance(cmd, click.Group):
            out.extend(_commands(cmd, full + " "))
        else:
            out.append((full, cmd))
    return out


@pytest.mark.parametrize(("name", "command"), _commands(cli))
def test_command_has_help_and_is_in_readme(name, command):
    assert command.help and len(command.help.strip()) > 20
    assert f"labelreview {name}" in README, f"`labelreview {name}` is not in README.md"
    result = CliRunner().invoke(cli, [*name.split(), "--help"])
    assert result.exit_code == 0
    assert "Usage:" in result.output


def test_readme_states_the_cautions():
    text = " ".join(README.split()).lower()
    for phrase in (
        "candidates for human judgement",
        "a clean scan does not prove a dataset fair",
        "consent",
        "never inferred",
        "ethics review",
    ):
        assert phrase in text, phrase
