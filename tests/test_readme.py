"""The README keeps its promise: a paragraph, then exactly two commands, and
CI runs the same test command."""

import re
from pathlib import Path

REPO = Path(__file__).resolve().parent.parent


def test_quick_start_has_two_commands_and_ci_uses_the_test_one():
    text = (REPO / "README.md").read_text()
    quick = text.split("## Quick start", 1)[1].split("\n## ", 1)[0]
    blocks = re.findall(r"```\n(.*?)\n```", quick, re.S)
    assert len(blocks) == 2
    demo, tests = blocks
    assert demo.strip().endswith("glowtrace demo")
    assert "pytest" in tests
    ci = (REPO / ".ci" / "run").read_text()
    assert tests.strip() in ci.splitlines()


def test_readme_starts_with_a_paragraph():
    lines = (REPO / "README.md").read_text().splitlines()
    assert lines[0].startswith("# ") and lines[2] and not lines[2].startswith(("#", "```"))
