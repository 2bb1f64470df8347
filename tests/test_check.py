"""trueband check: registered-function cells, unknown names with a suggestion, argument counts,
references outside the used range; nothing written.

The argument counts come from the registry (SEM takes sd and reliability, Lord & Novick 1968,
eq. 3.8.4); the suggestions: registered and standard names within an edit distance of the name.
"""

from __future__ import annotations

import re
from collections import Counter

import golden_books as gb
import pytest
import recalc_books as rb
from trueband.bridge import cli
from trueband.bridge.formulas.text import suggestions
from trueband.bridge.engine.check import check_workbook


def test_findings_of_the_check_book(tmp_path):
    src = rb.check_book(tmp_path / "check.xlsx")
    findings = check_workbook(src)
    assert findings.registered == [("Scores!D3", "SEM"), ("Scores!D4", "SEM"), ("Scores!D7", "SEM")]
    assert findings.unknown == [("Scores!D2", "SCORE_BNAD (did you mean SCORE_BAND?)")]
    assert findings.argument_counts == [
        ("Scores!D3", "SEM takes 2 arguments, got 1: SEM(sd, reliability)"),
        ("Scores!D4", "SEM takes 2 arguments, got 3: SEM(sd, reliability)"),
    ]
    assert findings.outside == [
        ("Scores!D5", "reads Scores!B2:B500, outside the used range A1:D9"),
        ("Scores!D6", "refers to a sheet that does not exist: 'Missing'"),
    ]
    assert not findings.ok


def test_check_writes_nothing_and_sets_the_exit_status(tmp_path, capsys):
    src = rb.check_book(tmp_path / "check.xlsx")
    before = src.read_bytes()
    assert cli.main(["check", str(src)]) == cli.EXIT_CELL_ERRORS
    out = capsys.readouterr().out
    assert "did you mean SCORE_BAND?" in out and "SEM takes 2 arguments, got 1" in out
    assert src.read_bytes() == before and sorted(p.name for p in tmp_path.iterdir()) == ["check.xlsx"]
    clean = gb.features_book(tmp_path / "features.xlsx")
    assert cli.main(["check", str(clean)]) == cli.EXIT_OK
    assert "Applicants!D2:D7  SCORE_BAND" in capsys.readouterr().out


def test_check_of_an_unusable_file(tmp_path, capsys):
    bad = tmp_path / "scores.xlsx"
    bad.write_text("id,score\n1,20\n")
    assert cli.main(["check", str(bad)]) == cli.EXIT_FAILED
    assert "not an .xlsx" in capsys.readouterr().err


def test_suggestions_cover_prefixes_and_standard_names():
    assert suggestions("_xludf.SCORECI")[0] == "SCORE_CI"
    assert suggestions("AVERAG") == ["AVERAGE"]
    assert suggestions("QQQQQQ") == []


def test_a_misspelt_name_gets_the_close_names_of_both_families():
    # SME is as close to the standard SUM as to trueband's SEM (difflib ratio 2/3 each): both are offered,
    # trueband's first on the tie.
    assert suggestions("SME") == ["SEM"]  # SUM is two slips away: not offered for a three-letter name
    assert suggestions("_xludf.sme") == ["SEM"]


# ---------------------------------------------------------------- names, words and groups (issues 14 and 16)

def _names_book(path):
    """Data in A1:B9; D2..D9 formulas: standard functions the engine does not evaluate, a misspelt one, a table
    reference, a word outside an option's choices, and SEM with number constants that differ row by row."""
    formulas = {2: "COMBIN(5,2)", 3: "OFFSET(A2,1,0)", 4: "_xlfn.COMBINA(4,2)", 5: "COMBIM(5,2)",
                6: "SUBTOTAL(109,Scores[score])", 7: 'SCORE_CI(B7,4,0.9,"top")', 8: "SEM(4,0.9)", 9: "SEM(5,0.8)"}
    rows = [gb.row_xml(1, [gb.cell_xml("A1", "0", t="s"), gb.cell_xml("B1", "1", t="s")])]
    for r in range(2, 10):
        rows.append(gb.row_xml(r, [gb.cell_xml(f"A{r}", r - 1), gb.cell_xml(f"B{r}", 20 + r),
                                   gb.cell_xml(f"D{r}", 0, formula=formulas[r])]))
    gb.handmade_package(path, [("Scores", gb.sheet_part(rows, dimension="A1:D9"))], shared_strings=["id", "score"])
    return path


def test_standard_functions_the_engine_lacks_are_named_so_not_unknown(tmp_path):
    # COMBIN, OFFSET, SUBTOTAL: ECMA-376 Part 1, §18.17.7 predefined functions; COMBINA: a later standard
    # function stored with the _xlfn. prefix (common practice).
    findings = check_workbook(_names_book(tmp_path / "names.xlsx"))
    assert ("Scores!D2", "COMBIN: standard function not evaluated by trueband") in findings.not_evaluated
    assert ("Scores!D3", "OFFSET: standard function not evaluated by trueband") in findings.not_evaluated
    assert ("Scores!D4", "COMBINA: standard function not evaluated by trueband") in findings.not_evaluated
    assert ("Scores!D6", "SUBTOTAL: standard function not evaluated by trueband") not in findings.not_evaluated
    assert [text.split()[0] for _, text in findings.unknown] == ["COMBIM"]
    # a slip of one letter gets the close name; nothing far (COMBIN → MIN is three deletions)
    assert findings.unknown == [("Scores!D5", "COMBIM (did you mean COMBIN?)")]


def test_a_table_reference_is_named_as_such(tmp_path):
    findings = check_workbook(_names_book(tmp_path / "names.xlsx"))
    assert ("Scores!D6", "structured table reference (Table[Column]): not evaluated by trueband") \
        in findings.not_evaluated
    assert not any(where == "Scores!D6" for where, _ in findings.unreadable)


def test_only_close_names_are_suggested():
    from trueband.bridge.formulas.standard_functions import close_names

    assert "MIN" not in close_names("COMBIN") and close_names("OFFSET") == []  # both are standard names themselves
    assert close_names("COMBINX") == ["COMBIN", "COMBINA"]
    assert close_names("OFSET") == ["OFFSET"]
    assert close_names("ANGOF_SE") == ["ANGOFF_SE"]


def test_a_word_outside_an_options_choices_is_reported_with_its_cell(tmp_path, capsys):
    src = _names_book(tmp_path / "names.xlsx")
    findings = check_workbook(src)
    assert findings.choices == [("Scores!D7", 'SCORE_CI: part must be one of "lower", "upper", got "top"')]
    assert not findings.ok
    assert cli.main(["check", str(src)]) == cli.EXIT_CELL_ERRORS
    out = capsys.readouterr().out
    assert "words that are not one of an option's choices: 1" in out and "Scores!D7  SCORE_CI: part" in out


def test_cells_that_differ_only_in_constants_are_one_group(tmp_path):
    findings = check_workbook(_names_book(tmp_path / "names.xlsx"))
    assert ("Scores!D8:D9", "SEM") in findings.registered


@pytest.mark.slow
def test_a_built_study_is_listed_in_a_handful_of_groups(tmp_path):
    from trueband.bridge.study.build import make_study
    from trueband.bridge.study.demo import make_demo
    from trueband.bridge.study.templates import study_data_workbook

    demo = make_demo()
    result = make_study(study_data_workbook(tmp_path / "data.xlsx", demo, cut=24.0), tmp_path / "study.xlsx")
    findings = check_workbook(result.path)
    n_items = demo.items.shape[1]
    for col, name in zip("BCDE", ("ITEM_DIFFICULTY", "ITEM_SD", "ITEM_TOTAL", "ALPHA_IF_DELETED")):
        assert (f"Items!{col}7:{col}{6 + n_items}", name) in findings.registered
    per_sheet = Counter(where.split("!")[0] for where, _ in findings.registered)
    assert per_sheet["Items"] == 4  # one group per item row and function gave 160
    # the Cuts sheet repeats one row of formulas per cut: one group per column, not one per cell
    cuts_columns = {re.sub(r"\d", "", where.split("!")[1].split(":")[0]) for where, _ in findings.registered
                    if where.startswith("Cuts!")}
    # two demographic columns, each block two stacked tables (the groups' rates and ratios; the lowest ratio's
    # comparison): at most one group per column of each table
    assert per_sheet["Cuts"] <= 2 * 2 * len(cuts_columns)
    assert all(":" in where for where, _ in findings.registered if where.startswith("Cuts!"))
    assert findings.ok
