"""Layering: the math imports nothing of the ways in, and the engine modules of bridge/ never import the command
line (cli.py, cmd_*.py), so the HTTP bridge, the study builder and Python users get the engine without it.
(Common practice: dependencies point from the outer layer inward.)"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

import trueband.bridge
import trueband.funcs

BRIDGE = Path(trueband.bridge.__path__[0])
FUNCS = Path(trueband.funcs.__path__[0])


def _imported(path: Path) -> set[str]:
    """Every module ``path`` imports (anywhere in it, also inside functions), as dotted names within trueband."""
    names = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.ImportFrom):
            base = node.module or ""
            if node.level:  # relative: within the module's own package
                base = f"{path.parent.name}.{base}" if base else path.parent.name
            names.add(base.removeprefix("trueband."))
            names.update(f"{base.removeprefix('trueband.')}.{a.name}" for a in node.names)
        elif isinstance(node, ast.Import):
            names.update(a.name.removeprefix("trueband.") for a in node.names)
    return names


def _is_command_line(name: str) -> bool:
    leaf = name.split(".")[-1]
    return name.startswith("bridge.") and (leaf == "cli" or leaf.startswith("cmd_"))


@pytest.mark.parametrize("path", sorted(p for p in BRIDGE.glob("*.py")
                                        if p.stem != "cli" and not p.stem.startswith(("cmd_", "__main__"))),
                         ids=lambda p: p.stem)
def test_engine_modules_do_not_import_the_command_line(path):
    assert not {n for n in _imported(path) if _is_command_line(n)}


@pytest.mark.parametrize("path", sorted(FUNCS.glob("*.py")), ids=lambda p: p.stem)
def test_the_math_does_not_import_the_ways_in(path):
    assert not {n for n in _imported(path) if n.startswith("bridge")}


def test_the_check_sees_a_command_line_import():
    # The check itself must be able to fail: a relative import of the CLI is seen.
    names = _imported(BRIDGE / "cmd_fill.py")
    assert any(_is_command_line(n) for n in names)
