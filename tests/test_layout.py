"""The host package's rooms follow the flow of the data: tester -> logbook ->
analysis -> judgement -> outputs -> procedures -> cli. No module imports from a
room later in the flow, nothing outside cli/ imports cli/, and the shared
top-level modules import only each other. Imports are read with ast, so lazy
imports inside functions count too."""

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parent.parent / "host" / "glowtrace"
FLOW = ["tester", "logbook", "analysis", "circuits", "judgement", "outputs", "procedures",
        "cli"]
SHARED = {"__init__", "paths", "errors", "catalogue", "config", "outfile", "safety"}


def _modules():
    for path in sorted(PACKAGE.rglob("*.py")):
        parts = list(path.relative_to(PACKAGE).with_suffix("").parts)
        yield path, parts


def _room(parts: list[str]) -> int:
    """-1 for the shared top-level modules, else the room's place in FLOW."""
    if parts == ["__main__"]:  # `python -m glowtrace`: the command line's own door
        return FLOW.index("cli")
    if len(parts) == 1:
        assert parts[0] in SHARED, f"{parts[0]}.py lies at the top: give it a room"
        return -1
    return FLOW.index(parts[0])


def _imports(path: Path, parts: list[str]):
    """Every glowtrace module this file imports, as parts under glowtrace."""
    package = parts[:-1]  # a module's package; for __init__, its own package
    for node in ast.walk(ast.parse(path.read_text())):
        if isinstance(node, ast.ImportFrom):
            if node.level:
                base = package[: len(package) - node.level + 1]
                target = base + (node.module.split(".") if node.module else [])
            elif node.module and node.module.split(".")[0] == "glowtrace":
                target = node.module.split(".")[1:]
            else:
                continue
            if not target:  # `from .. import x`: x is a module or a name at the top
                for alias in node.names:
                    yield [alias.name]
            else:
                yield target
        elif isinstance(node, ast.Import):
            for alias in node.names:
                if alias.name.split(".")[0] == "glowtrace":
                    yield alias.name.split(".")[1:]


def test_every_room_is_known_and_documented():
    rooms = sorted(p.name for p in PACKAGE.iterdir() if (p / "__init__.py").exists())
    assert rooms == sorted(FLOW), "a new room must take its place in FLOW (and DEVELOPERS.md)"
    for room in FLOW:
        doc = ast.get_docstring(ast.parse((PACKAGE / room / "__init__.py").read_text()))
        assert doc and "import" in doc, f"{room}/__init__.py must say what it may import"


@pytest.mark.parametrize("path,parts", list(_modules()), ids=lambda x: str(x)[-40:])
def test_imports_run_downhill(path, parts):
    mine = _room(parts)
    for target in _imports(path, parts):
        if target[0] in SHARED or target[0] == "__version__":
            theirs = -1
        else:
            theirs = FLOW.index(target[0])
        where = ".".join(parts)
        assert theirs <= mine, f"{where} imports {'.'.join(target)}, later in the flow"
        if theirs == FLOW.index("cli"):
            assert mine == theirs, f"{where} imports the command line"
        if mine == -1:
            assert theirs == -1, f"shared module {where} imports the room {target[0]}"


def test_the_command_line_is_small_modules():
    for path in (PACKAGE / "cli").glob("*.py"):
        n = len(path.read_text().splitlines())
        assert n <= 400, f"cli/{path.name} has {n} lines: split the command group"


def test_the_rule_would_catch_an_uphill_import(tmp_path):
    """The checker itself: an analysis module importing judgement fails it."""
    bad = tmp_path / "bad.py"
    bad.write_text("def f():\n    from ..judgement import scoring\n")
    targets = list(_imports(bad, ["analysis", "bad"]))
    assert targets == [["judgement"]]
    assert FLOW.index(targets[0][0]) > _room(["analysis", "bad"])
