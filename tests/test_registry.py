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

from trueband.bridge.cli.functions import render_markdown
from trueband.bridge.formulas.names import standard_names
from trueband.funcs import REGISTRY, catalog
from trueband.funcs.registry import RESULT_KINDS, normalize_name

ROOT = Path(__file__).resolve().parents[1]
NAMES = sorted(REGISTRY)


def test_registry_is_not_empty():
    assert len(REGISTRY) >= 12


@pytest.mark.parametrize("name", NAMES)
def test_name_does_not_collide_with_a_builtin_spreadsheet_function(name):
    builtins = {normalize_name(n) for n in standard_names()} | {normalize_name(n) for n in FORMULAE}
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


def _looks_like_a_cell(name):
    # A1-style address within the grid of current spreadsheet apps (XFD1048576), common practice.
    m = re.fullmatch(r"([A-Z]{1,3})([0-9]+)", name)
    if not m:
        return False
    col = 0
    for ch in m.group(1):
        col = col * 26 + ord(ch) - 64
    return col <= 16384 and 1 <= int(m.group(2)) <= 1048576


@pytest.mark.parametrize("name", NAMES)
def test_every_function_has_a_name_a_cell_can_hold(name):
    spec = REGISTRY[name]
    usable = [n for n in (spec.name, *spec.aliases) if not _looks_like_a_cell(n)]
    assert usable, f"{name} reads as a cell address; give it an alias such as {name[:2]}_{name[2:]}"
    for alias in spec.aliases:
        assert normalize_name(alias.lower()) == name
        assert normalize_name("_xludf." + alias) == name


# ---------------------------------------------------------------- argument descriptions (issue 16, item 1)

def test_argument_descriptions_keep_their_whole_first_paragraph():
    # A split at the first "." or ";" cut "(e.g. those hired)" and "(one row or column; blanks ignored)".
    args = {name: {a.name: a.description for a in spec.arguments} for name, spec in REGISTRY.items()}
    assert args["SCORE_BAND"]["scores"] == "All the scores that are banded (one row or column; blanks ignored)"
    assert args["RANGE_CORRECT"]["r"] == "Correlation observed in the restricted group (e.g. those hired), between −1 and 1"
    assert args["COHEN_KAPPA"]["weights"].endswith('"linear" and "quadratic" need numeric, ordered categories. '
                                                   'Default "none"')


@pytest.mark.parametrize("name", NAMES)
def test_argument_descriptions_are_whole(name):
    for arg in REGISTRY[name].arguments:
        text = arg.description
        assert text.count("(") == text.count(")"), f"{name} {arg.name}: {text!r} is cut inside brackets"
        assert not text.endswith(("e.g", "i.e")), f"{name} {arg.name}: {text!r} is cut after an abbreviation"
        # an internal constant is no wording for a user (TAYLOR_RUSSELL said "at least 1e-12")
        assert "1e-12" not in text, f"{name} {arg.name}: {text!r}"


def test_an_unknown_name_gets_the_closest_registered_names():
    # Every way in (HTTP, the catalog, Python) looks names up here, so each gets the suggestion.
    from trueband.funcs import UnknownFunctionError, lookup

    with pytest.raises(UnknownFunctionError, match=r"no function named 'SME'; did you mean SEM\b"):
        lookup("SME")
    with pytest.raises(UnknownFunctionError, match=r"no function named 'QQQQQQ'; see `trueband functions`"):
        lookup("QQQQQQ")
