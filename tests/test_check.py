"""trueband check: registered-function cells, unknown names with a suggestion, argument counts,
references outside the used range; nothing written.

The argument counts come from the registry (SEM takes sd and reliability, Lord & Novick 1968,
eq. 3.8.4); the suggestions from difflib over the registered and standard names.
"""

from __future__ import annotations

import golden_books as gb
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
    assert suggestions("SME") == ["SEM", "SUM"]
    assert suggestions("_xludf.sme") == ["SEM", "SUM"]
