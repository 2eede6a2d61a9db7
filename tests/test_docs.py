"""The caution of DESIGN.md is in the README, word for word with the engine's text."""

from pathlib import Path

from engine.base.caution import CAUTION

ROOT = Path(__file__).resolve().parent.parent


def _words(text: str) -> str:
    return " ".join(text.split())


def test_readme_carries_the_caution():
    assert _words(CAUTION) in _words((ROOT / "README.md").read_text())


def test_readme_quick_start_has_exactly_two_commands():
    text = (ROOT / "README.md").read_text()
    block = text.split("## Quick start", 1)[1].split("```", 2)[1]
    commands = [line.split("#")[0].strip() for line in block.strip().splitlines()]
    assert commands == ["make run", "make test"]
