"""The registry is the single source of truth: every registered function is complete and documented.

Built-in spreadsheet function names come from two outside lists: the function
table of the `formulas` package and openpyxl's list of Excel formula names
(`openpyxl.utils.formulas.FORMULAE`), both reference libraries.
"""

import inspect
import re
from pathlib import Path

import pytest
from openpyxl.utils.formulas import FORMULAE

from trueband.bridge.cmd_catalog import render_markdown
from trueband.bridge.formula_functions import BUILTIN_NAMES
from trueband.funcs import REGISTRY, catalog
from trueband.funcs.registry import RESULT_KINDS, normalize_name

ROOT = Path(__file__).resolve().parents[1]
NAMES = sorted(REGISTRY)


def test_registry_is_not_empty():
    assert len(REGISTRY) >= 12


@pytest.mark.parametrize("name", NAMES)
def test_name_does_not_collide_with_a_builtin_spreadsheet_function(name):
    builtins = {normalize_name(n) for n in BUILTIN_NAMES} | {normalize_name(n) for n in FORMULAE}
    # also the dotted modern forms, e.g. PERCENTRANK.INC -> PERCENTRANK_INC would not collide, but check bases
    bases = {b.split(".")[0] for b in builtins}
    assert name not in builtins and name not in bases, f"{name} is a built-in spreadsheet function name"


@pytest.mark.parametrize("name", NAMES)
def test_function_is_fully_documented(name):
    spec = REGISTRY[name]
    doc = inspect.getdoc(spec.body) or ""
    assert spec.description and spec.description.endswith("."), f"{name}: one-line description"
    assert spec.reference and re.search(r"\(?(1[89]\d\d|20\d\d)\)?", spec.reference), f"{name}: reference with year"
    assert "Parameters" in doc and "Examples" in doc, f"{name}: numpydoc Parameters and Examples"
    for arg in spec.arguments:
        assert arg.description, f"{name}: argument {arg.name} has no description in the docstring"
    assert spec.returns in RESULT_KINDS


@pytest.mark.parametrize("name", NAMES)
def test_spreadsheet_argument_order_is_the_signature(name):
    spec = REGISTRY[name]
    assert [a.name for a in spec.arguments] == list(inspect.signature(spec.body).parameters)


def test_catalog_entries_have_the_documented_shape():
    for entry in catalog():
        assert set(entry) >= {"name", "arguments", "returns", "description", "reference"}
        for arg in entry["arguments"]:
            assert set(arg) >= {"name", "kind"}


def test_generated_function_reference_is_current():
    committed = (ROOT / "docs" / "functions.md").read_text(encoding="utf-8")
    assert committed == render_markdown(), "docs/functions.md is stale: run `trueband functions --markdown > docs/functions.md`"


def test_every_function_is_named_in_the_readme_catalog_link():
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    assert "docs/functions.md" in readme


def test_adverse_impact_entries_carry_the_caution():
    # Issue requirement (common practice in the trade): impact figures are indicators, not legal findings.
    impact = [e for e in catalog() if e["topic"] == "impact"]
    assert impact, "no adverse impact functions registered"
    for entry in impact:
        assert "not legal findings" in entry["caution"], entry["name"]
    assert "not legal findings" in render_markdown()
