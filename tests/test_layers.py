"""The layers of the code, enforced over every module (imports inside functions count).

Layers, from the bottom (``../shared/design/layers.md`` and DEVELOPERS.md):

=====  =========================================  ==============================================
layer  packages                                   may import
=====  =========================================  ==============================================
0      ``trueband.funcs``                         itself only (never ``bridge``)
1      ``bridge.workbook``                        itself only (nothing else of trueband)
2      ``bridge.formulas``                        itself, layers 0 and 1
3      ``bridge.engine``                          itself, layers 0 to 2
4      ``bridge.study``                           itself, layers 0 to 3
4      ``bridge.http``, ``bridge.addin``          itself and ``funcs`` only
5      ``bridge.cli``                             anything below; command modules import
                                                  ``cli.common``, never each other
=====  =========================================  ==============================================

The four rules: (1) a module imports its own sub-package and lower layers only, and the layer-4 packages
never import each other; (2) funcs imports nothing of bridge, workbook nothing of trueband outside itself,
http and addin only funcs; (3) no import cycle anywhere, counting imports inside functions; (4) command
modules never import each other, and the scripts in ``workbooks/`` and ``bench/`` import no ``cli`` module.
(Common practice: dependencies point from the outer layer inward.)
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

import trueband.bridge
import trueband.funcs

BRIDGE = Path(trueband.bridge.__path__[0])
FUNCS = Path(trueband.funcs.__path__[0])
ROOT = BRIDGE.parent

#: package (dotted, without ``trueband.``) -> layer
LAYERS = {"funcs": 0, "bridge.workbook": 1, "bridge.formulas": 2, "bridge.engine": 3,
          "bridge.study": 4, "bridge.http": 4, "bridge.addin": 4, "bridge.cli": 5, "bridge": 6}
#: packages that may import nothing of trueband but these (besides themselves)
ONLY = {"bridge.workbook": set(), "bridge.http": {"funcs"}, "bridge.addin": {"funcs"}, "funcs": set()}
COMMAND_SHARED = {"bridge.cli", "bridge.cli.common"}
#: single modules a restricted package may import besides its ONLY list: the add-in writes its file
#: through the one safe writer, which imports the standard library only
ALSO = {"bridge.addin": {"bridge.workbook.files"}}


def module_name(path: Path, top: Path, prefix: str) -> str:
    parts = list(path.relative_to(top).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join([prefix, *parts])


def all_modules() -> dict[str, Path]:
    """Every module under funcs/ and bridge/ (recursively), by dotted name without ``trueband.``."""
    found = {}
    for top, prefix in ((FUNCS, "funcs"), (BRIDGE, "bridge")):
        for path in sorted(top.rglob("*.py")):
            if "data" in path.relative_to(top).parts:  # files shipped inside the add-in, run by LibreOffice
                continue
            found[module_name(path, top, prefix)] = path
    return found


def imports_of(name: str, path: Path, known: set[str]) -> set[str]:
    """The trueband modules that ``path`` (module ``name``) imports, anywhere in it."""
    package = name if path.name == "__init__.py" else name.rpartition(".")[0]
    out = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")
                base = base[:len(base) - (node.level - 1)]
                target = ".".join(base + ([node.module] if node.module else []))
            else:
                target = (node.module or "").removeprefix("trueband.")
                if not (node.module or "").startswith("trueband."):
                    continue
            for alias in node.names:  # `from pkg import module` imports the module
                sub = f"{target}.{alias.name}"
                out.add(sub if sub in known else target)
        elif isinstance(node, ast.Import):
            out.update(a.name.removeprefix("trueband.") for a in node.names if a.name.startswith("trueband."))
    return {m for m in out if m in known and m != name}


def package_of(name: str) -> str:
    """The layered package a module belongs to (its longest prefix in LAYERS)."""
    parts = name.split(".")
    for i in range(len(parts), 0, -1):
        if ".".join(parts[:i]) in LAYERS:
            return ".".join(parts[:i])
    raise KeyError(name)


def is_command_module(name: str) -> bool:
    return name.startswith("bridge.cli.") and name not in COMMAND_SHARED


def rule_violations(graph: dict[str, set[str]]) -> list[str]:
    """Rules 1, 2 and the command-module half of 4, for an import graph {module: modules it imports}."""
    found = []
    for name, targets in sorted(graph.items()):
        own = package_of(name)
        for target in sorted(targets):
            other = package_of(target)
            if other == own:
                if is_command_module(name) and is_command_module(target):
                    found.append(f"{name} imports {target}: command modules never import each other")
                continue
            if own in ONLY and other not in ONLY[own] and target not in ALSO.get(own, ()):
                found.append(f"{name} imports {target}: {own} may import only {sorted(ONLY[own]) or 'itself'}")
            elif LAYERS[other] >= LAYERS[own]:
                found.append(f"{name} imports {target}: {other} is not below {own}")
    return found


def cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """The strongly connected components of more than one module (Tarjan), each a cycle or knot of cycles."""
    index, low, stack, on_stack, out = {}, {}, [], set(), []

    def visit(node):
        index[node] = low[node] = len(index)
        stack.append(node)
        on_stack.add(node)
        for nxt in graph.get(node, ()):
            if nxt not in index:
                visit(nxt)
                low[node] = min(low[node], low[nxt])
            elif nxt in on_stack:
                low[node] = min(low[node], index[nxt])
        if low[node] == index[node]:
            component = []
            while True:
                top = stack.pop()
                on_stack.discard(top)
                component.append(top)
                if top == node:
                    break
            if len(component) > 1:
                out.append(sorted(component))

    for node in sorted(graph):
        if node not in index:
            visit(node)
    return out


@pytest.fixture(scope="module")
def graph():
    modules = all_modules()
    known = set(modules)
    return {name: imports_of(name, path, known) for name, path in modules.items()}


def test_every_module_is_in_a_layer(graph):
    assert len(graph) > 40  # the walk is recursive: it sees the sub-packages' modules
    for name in graph:
        package_of(name)


def test_imports_go_down_the_layers(graph):
    assert rule_violations(graph) == []


def test_no_import_cycles(graph):
    assert cycles(graph) == []


@pytest.mark.parametrize("folder", ["workbooks", "bench"])
def test_scripts_import_no_command_module(folder):
    scripts = sorted((ROOT / folder).glob("*.py"))
    assert scripts
    for path in scripts:
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            names = ([node.module or ""] + [f"{node.module}.{a.name}" for a in node.names]
                     if isinstance(node, ast.ImportFrom) else
                     [a.name for a in node.names] if isinstance(node, ast.Import) else [])
            assert not any(n.startswith("trueband.bridge.cli") for n in names), f"{path.name} imports {names}"
            if isinstance(node, ast.ImportFrom) and node.module == "trueband.bridge":
                assert "cli" not in {a.name for a in node.names}, path.name


# ------------------------------------------------------------ the checks can fail

def test_an_upward_edge_is_reported():
    fixture = {"bridge.workbook.package": {"bridge.engine.recalc"}, "bridge.engine.recalc": set()}
    assert rule_violations(fixture) == [
        "bridge.workbook.package imports bridge.engine.recalc: bridge.workbook may import only itself"]
    fixture = {"bridge.formulas.text": {"bridge.engine.recalc"}, "bridge.engine.recalc": set()}
    assert "is not below" in rule_violations(fixture)[0]


def test_layer_four_packages_may_not_import_each_other():
    fixture = {"bridge.study.build": {"bridge.http.app"}, "bridge.http.app": {"funcs.registry"}}
    assert rule_violations(fixture) == ["bridge.study.build imports bridge.http.app: bridge.http is not below "
                                        "bridge.study"]


def test_http_may_import_only_funcs():
    assert rule_violations({"bridge.http.app": {"bridge.engine.recalc"}}) != []


def test_command_modules_may_not_import_each_other():
    fixture = {"bridge.cli.fill": {"bridge.cli.recalc", "bridge.cli.common"}}
    assert rule_violations(fixture) == [
        "bridge.cli.fill imports bridge.cli.recalc: command modules never import each other"]


def test_a_cycle_is_reported():
    fixture = {"bridge.formulas.library": {"bridge.formulas.compile"},
               "bridge.formulas.compile": {"bridge.formulas.text"},
               "bridge.formulas.text": {"bridge.formulas.library"}}
    assert cycles(fixture) == [["bridge.formulas.compile", "bridge.formulas.library", "bridge.formulas.text"]]


def test_imports_inside_functions_are_seen(tmp_path):
    module = tmp_path / "recalc.py"
    module.write_text("def f():\n    from ..formulas import text\n    from .store import Store\n")
    found = imports_of("bridge.engine.recalc", module, {"bridge.formulas.text", "bridge.engine.store"})
    assert found == {"bridge.formulas.text", "bridge.engine.store"}
