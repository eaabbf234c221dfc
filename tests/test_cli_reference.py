"""The command line documents itself: help text everywhere, and DEVELOPERS.md's generated tables current."""

from __future__ import annotations

from pathlib import Path

import click
import pytest

from bodyplan.cli import COMMANDS, LazyGroup, cli, reference_markdown
from bodyplan.ingest.findings import CODES, codes_markdown

ROOT = Path(__file__).parent.parent
DEVELOPERS = (ROOT / "DEVELOPERS.md").read_text(encoding="utf-8")
README = (ROOT / "README.md").read_text(encoding="utf-8")


def _between(text: str, name: str) -> str:
    return text.split(f"<!-- {name}:start -->\n")[1].split(f"<!-- {name}:end -->")[0]


@pytest.mark.parametrize("name", sorted(COMMANDS))
def test_every_command_and_option_has_help_and_is_documented(name):
    command = LazyGroup().get_command(None, name)
    assert command.help and command.help.strip(), name
    reference = _between(DEVELOPERS, "reference")
    assert f"**`bodyplan {name}" in reference
    assert f"`bodyplan {name}" in README  # the README's table of commands names every command
    for param in command.params:
        if isinstance(param, click.Option):
            assert param.help and param.help.strip(), f"{name} {param.opts}"
            if not param.hidden:
                assert f"`{param.opts[0]}`" in reference.split(f"**`bodyplan {name}")[1].split("**`bodyplan")[0]


def test_group_options_have_help():
    assert all(p.help for p in cli.params if isinstance(p, click.Option))


def test_command_reference_is_current():
    assert _between(DEVELOPERS, "reference") == reference_markdown().rstrip("\n") + "\n"


def test_finding_code_table_is_current():
    assert _between(DEVELOPERS, "codes") == codes_markdown().rstrip("\n") + "\n"


def test_codes_are_short_and_unique_in_kind():
    assert all(len(code) == 4 and code[0] in "RVW" and code[1:].isdigit() for code in CODES)
    assert all(meaning.endswith(".") for meaning in CODES.values())
