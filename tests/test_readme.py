"""README and DEVELOPERS.md stay true: links resolve, quick start is the two commands."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parent.parent


@pytest.mark.parametrize("page", ["README.md", "DEVELOPERS.md"])
def test_relative_links_resolve(page: str) -> None:
    text = (REPO / page).read_text()
    targets = re.findall(r"\]\(([^)#:]+)(?:#[^)]*)?\)", text)
    assert targets
    for target in targets:
        assert (REPO / target).exists(), f"{page} links to missing {target}"


def test_readme_starts_with_the_job_and_has_two_setup_commands() -> None:
    text = (REPO / "README.md").read_text()
    first_paragraph = text.split("\n\n")[1]
    for word in ("balance", "mass", "ISO 21940-11", "1x"):
        assert word in first_paragraph
    quick = text.split("## Quick start", 1)[1].split("##", 1)[0]
    commands = re.findall(r"^make (\w+)", quick, re.M)
    assert commands == ["demo", "test"]


def test_readme_links_every_hardware_page() -> None:
    text = (REPO / "README.md").read_text()
    for page in sorted((REPO / "hardware").glob("*.md")):
        assert f"hardware/{page.name}" in text, page.name


def test_every_cli_command_is_in_the_readme_table() -> None:
    from trueturn.cli.main import COMMANDS

    text = (REPO / "README.md").read_text()
    for name in COMMANDS:
        assert f"trueturn {name}" in text, name
