"""The add-in in a real LibreOffice Calc, headless: live cells against ``trueband.funcs.call``.

The extension written by ``trueband addin`` is unpacked into a folder that LibreOffice is
started with as its bundled extensions (``-env:BUNDLED_EXTENSIONS``), with a fresh private
profile, so nothing is installed for the user. ``addin_uno_driver.py`` drives Calc through UNO
from LibreOffice's Python (on Linux the system ``python3`` with ``python3-uno``): it opens or
creates a document, types formulas and inputs, recalculates, reads the cells back and saves
as xlsx. Each value is compared with ``call`` on the same inputs, or, for whole workbooks
written by trueband (a template, the demo study), with what ``trueband recalc`` computes from
the file Calc saved.
"""

from __future__ import annotations

import json
import math
import os
import re
import subprocess
import sys
import zipfile
from pathlib import Path

import pytest

from openpyxl import load_workbook

from trueband.bridge.addin import extension as calc_addin
from trueband.bridge.workbook.cells import column_index, column_letters
from trueband.bridge.engine.recalc import recalculate
from trueband.funcs import call
from trueband.funcs.errors import TruebandError
from trueband.funcs.registry import REGISTRY, normalize_name

pytestmark = [pytest.mark.libreoffice, pytest.mark.slow]

DRIVER = Path(__file__).with_name("addin_uno_driver.py")


def _runner(soffice: str, folder: Path, **options):
    """Run a job of steps in a headless Calc that has the add-in (written with ``options``); returns the answers."""
    found = calc_addin.libreoffice_python()
    if found is None:
        if os.environ.get("CI"):
            pytest.fail("no Python can import uno; .ci/run installs python3-uno")
        pytest.skip("python3-uno is not installed")
    python, version = found
    ours = "%d.%d" % sys.version_info[:2]
    if options.get("mode", "full") == "full" and version != ours:
        message = f"LibreOffice's Python is {version}, this environment's {ours}: full mode cannot load it here"
        if os.environ.get("CI"):
            pytest.fail(message)
        pytest.skip(message)
    oxt = calc_addin.write_extension(folder / "trueband.oxt", **options)
    unpacked = folder / "extensions" / "trueband"
    unpacked.mkdir(parents=True)
    with zipfile.ZipFile(oxt) as z:
        z.extractall(unpacked)
    runs = iter(range(1000))

    def run(steps):
        job = {"soffice": soffice, "profile": (folder / f"profile{next(runs)}").as_uri(),
               "bundled": (folder / "extensions").as_uri(), "steps": steps}
        done = subprocess.run([python, str(DRIVER)], input=json.dumps(job), capture_output=True, text=True,
                              timeout=600)
        assert done.returncode == 0, done.stderr[-3000:]
        return json.loads(done.stdout.strip().splitlines()[-1])

    return run


@pytest.fixture(scope="module")
def calc(soffice, tmp_path_factory):
    return _runner(soffice, tmp_path_factory.mktemp("addin"))


def expected(name, *args):
    """What a cell must show: trueband's value (logical results as 1/0) or its error code."""
    try:
        return float(call(name, *args))
    except TruebandError as exc:
        return exc.code


def same(cell, want) -> bool:
    if isinstance(want, str) or isinstance(cell, str):
        return cell == want
    return cell == want or math.isclose(cell, want, rel_tol=1e-15, abs_tol=1e-300)


# Inputs on a sheet of their own: A1:D8 items scored 0/1 (one blank), F1:H6 ratings 1-5 by three raters,
# J1:J8 and K1:K8 two columns of test scores, L1:L8 judges' probabilities (invented, for these checks only).
ITEMS = [[1, 1, 0, 1], [1, 0, 0, 1], [1, 1, 1, 1], [0, 0, 0, 1], [1, 1, 1, 0], [0, 1, None, 0], [1, 1, 1, 1],
         [0, 0, 0, 0]]
RATINGS = [[4, 5, 4], [2, 2, 3], [5, 5, 5], [3, 2, 3], [1, 2, 1], [4, 4, 3]]
SCORES_A = [31, 24, 37, 28, 33, 22, 35, 30]
SCORES_B = [26, 20, 30, 25, 28, 18, 31, 27]
JUDGMENTS = [0.6, 0.7, 0.55, 0.8, 0.65, 0.7, 0.75, 0.6]
CRITERION = [3.2, 2.5, 4.1, 2.9, 3.6, 2.2, 3.9, 3.0]
GROUPS = [1, 1, 2, 1, 2, 2, 1, 2]
QUALIFIED = [1, 0, 1, 0, 1, 0, 1, 1]
BORDERLINE = [0, 1, 0, 1, 0, 1, 0, 0]
COLUMNS = {"J": SCORES_A, "K": SCORES_B, "L": JUDGMENTS, "M": GROUPS, "N": CRITERION, "O": QUALIFIED,
           "P": BORDERLINE}
# Small blocks at row 1 and below (invented): a second judge beside L, composite inputs, strata, the
# options each judge left per item, judged cuts and pass rates, raw answers under their key row.
BLOCKS = {
    "AK": [[a, b] for a, b in zip(JUDGMENTS, [0.65, 0.6, 0.6, 0.75, 0.7, 0.6, 0.8, 0.55])],  # two judges
    "R": [[5.0, 4.0], [0.85, 0.75], [0.3, 0.25], [1.0, 1.0]],             # sds, reliabilities, validities, weights
    "T": [[1.0, 0.4], [0.4, 1.0]],                                        # correlations
    "V": [[0.5], [0.3], [0.8]],                                           # subgroup ds
    "W": [[20, 50, 40, 60], [12, 40, 30, 50], [15, 45, 25, 55]],          # strata
    "AA": [[2, 3, 2], [3, 3, 4], [2, 2, 2], [4, 3, 3]],                   # options left, items x judges
    "AD": [[28, 0.6], [30, 0.5], [27, 0.65], [29, 0.55]],                 # judged cuts and pass rates
    "AF": [[1, 2, 3, 1], [1, 2, 3, 4], [1, 3, 3, 1], [2, 2, 1, 1], [1, 2, 3, 1], [3, 4, 3, 2], [1, 2, 4, 1],
           [4, 1, 3, 1], [2, 2, 3, 3]],                                   # answers; row 1 is the key
}

# Range arguments by name: (block, its cells).
RANGES = {
    "ratings": ("$Data.$F$1:$H$6", RATINGS),
    "rater_a": ("$Data.$F$1:$F$6", [row[:1] for row in RATINGS]),
    "rater_b": ("$Data.$G$1:$G$6", [row[1:2] for row in RATINGS]),
    "scores": ("$Data.$J$1:$J$8", [[v] for v in SCORES_A]),
    "group_a": ("$Data.$J$1:$J$8", [[v] for v in SCORES_A]),
    "group_b": ("$Data.$K$1:$K$8", [[v] for v in SCORES_B]),
    "judgments": ("$Data.$L$1:$L$8", [[v] for v in JUDGMENTS]),
    "scores_a": ("$Data.$J$1:$J$8", [[v] for v in SCORES_A]),
    "scores_b": ("$Data.$K$1:$K$8", [[v] for v in SCORES_B]),
    "groups": ("$Data.$M$1:$M$8", [[v] for v in GROUPS]),
    "focal": ("$Data.$M$3", [[2]]),
    "reference": ("$Data.$M$1", [[1]]),
    "criterion": ("$Data.$N$1:$N$8", [[v] for v in CRITERION]),
    "predictors": ("$Data.$J$1:$K$8", [list(pair) for pair in zip(SCORES_A, SCORES_B)]),
    "base_predictors": ("$Data.$J$1:$J$8", [[v] for v in SCORES_A]),
    "added_predictors": ("$Data.$K$1:$K$8", [[v] for v in SCORES_B]),
    "qualified": ("$Data.$O$1:$O$8", [[v] for v in QUALIFIED]),
    "borderline": ("$Data.$P$1:$P$8", [[v] for v in BORDERLINE]),
    "sds": ("$Data.$R$1:$S$1", [BLOCKS["R"][0]]),
    "reliabilities": ("$Data.$R$2:$S$2", [BLOCKS["R"][1]]),
    "validities": ("$Data.$R$3:$S$3", [BLOCKS["R"][2]]),
    "weights": ("$Data.$R$4:$S$4", [BLOCKS["R"][3]]),
    "correlations": ("$Data.$T$1:$U$2", BLOCKS["T"]),
    "ds": ("$Data.$V$1:$V$3", BLOCKS["V"]),
    "strata": ("$Data.$W$1:$Z$3", BLOCKS["W"]),
    "options_left": ("$Data.$AA$1:$AC$4", BLOCKS["AA"]),
    "judged_cuts": ("$Data.$AD$1:$AD$4", [row[:1] for row in BLOCKS["AD"]]),
    "judged_pass_rates": ("$Data.$AE$1:$AE$4", [row[1:] for row in BLOCKS["AD"]]),
    "responses": ("$Data.$AF$1:$AI$9", BLOCKS["AF"]),
    # issue 20: a group marked by a criterion value beside the items, two sittings, a column to list
    "among": ("$Data.$N$1:$N$8", [[v] for v in CRITERION]),
    "first": ("$Data.$J$1:$J$8", [[v] for v in SCORES_A]),
    "second": ("$Data.$K$1:$K$8", [[v] for v in SCORES_B]),
    "column": ("$Data.$N$1:$N$8", [[v] for v in CRITERION]),
}
# Judges' probabilities for functions that need two or more judges.
TWO_JUDGES = ("$Data.$AK$1:$AL$8", BLOCKS["AK"])
# Number arguments by name, for two profiles (plausible values of the trade, invented).
NUMBERS = {
    "reliability": (0.85, 0.7), "rxx": (0.85, 0.7), "ryy": (0.6, 0.8), "rxx_applicants": (0.85, 0.75),
    "validity": (0.35, 0.5), "rxy": (0.3, 0.45), "r": (0.3, 0.45), "alpha": (0.85, 0.7), "target": (0.9, 0.8),
    "base_rate": (0.5, 0.3), "selection_ratio": (0.3, 0.5), "confidence": (0.95, 0.9), "u_x": (0.7, 0.8),
    "score": (31.0, 27.0), "score_a": (31.0, 33.0), "score_b": (25.0, 24.0), "mean": (27.0, 28.0),
    "sd": (5.2, 6.0), "sd_y": (10000.0, 12000.0), "sd_restricted": (4.0, 5.0), "sd_unrestricted": (6.0, 7.0),
    "variance": (27.0, 36.0), "n": (120.0, 60.0), "n_selected": (10.0, 20.0), "tenure": (2.0, 3.0),
    "cost_per_applicant": (50.0, 80.0), "length_factor": (2.0, 1.5), "d": (0.5, 0.8),
    "r2": (0.3, 0.45), "kr21": (0.8, 0.75), "fraction": (0.27, 0.5), "mean_r": (0.3, 0.4),
    "k_min": (24.0, 25.0), "k_max": (32.0, 31.0), "f_min": (0.1, 0.2), "f_max": (0.6, 0.7), "option": (3.0, 1.0),
}
# Arguments whose plausible values depend on the function.
BY_FUNCTION = {("CVR_CRITICAL", "alpha"): (0.05, 0.01), ("IMPACT_FLIP", "alpha"): (0.05, 0.01)}
INTEGERS = {"n_items": (40, 35), "n_people": (200, 80), "n": (120, 60), "k": (2, 3), "cut": (25, 30),
            "panel": (10, 15), "essential": (7, 12), "scale_points": (5, 5), "tails": (2, 1), "item": (1, 2),
            "focal_selected": (20, 12), "focal_applicants": (50, 40), "ref_selected": (40, 30),
            "ref_applicants": (60, 50), "selected": (20, 12), "applicants": (50, 40)}


def _inputs():
    cells = []
    for r, row in enumerate(ITEMS, start=1):
        cells += [["Data", f"{'ABCD'[c]}{r}", v] for c, v in enumerate(row) if v is not None]
    for r, row in enumerate(RATINGS, start=1):
        cells += [["Data", f"{'FGH'[c]}{r}", v] for c, v in enumerate(row)]
    for column, values in COLUMNS.items():
        cells += [["Data", f"{column}{r}", v] for r, v in enumerate(values, start=1)]
    for first, rows in BLOCKS.items():
        start = column_index(first)
        cells += [["Data", f"{column_letters(start + c)}{r}", v]
                  for r, row in enumerate(rows, start=1) for c, v in enumerate(row)]
    return cells


def _as_range(rows):
    return tuple(tuple(None if v is None else float(v) for v in row) for row in rows)


def _arguments(fn, profile: int):
    """Cell texts and the Python values Calc passes for them, for one argument profile (0 or 1)."""
    texts, values = [], []
    for arg in fn.arguments:
        if arg.kind == "range" and arg.name == "judgments" and fn.name == "ANGOFF_SE":  # needs two judges
            texts.append(TWO_JUDGES[0])
            values.append(_as_range(TWO_JUDGES[1]))
        elif arg.kind == "range":
            block, rows = RANGES.get(arg.name, ("$Data.$A$1:$D$8", ITEMS))
            texts.append(block)
            values.append(_as_range(rows))
        elif arg.choices:
            choice = arg.choices[profile % len(arg.choices)]
            texts.append(f'"{choice}"')
            values.append(choice)
        elif arg.kind == "boolean":
            texts.append("1")
            values.append(1.0)
        else:
            table = INTEGERS if arg.kind == "integer" else NUMBERS
            x = float(BY_FUNCTION.get((fn.name, arg.name), table.get(arg.name, (3, 2)))[profile])
            texts.append(repr(x))
            values.append(x)
    return texts, values


def test_every_function_agrees_with_call_in_live_cells(calc):
    """Every registered function under every cell name, with two argument profiles each: values and errors
    alike must be what ``call`` gives for the values Calc passes."""
    cases = []
    for fn in REGISTRY.values():
        for name in calc_addin.cell_names(fn):
            for profile in (0, 1):
                texts, values = _arguments(fn, profile)
                cases.append((f"={name}({';'.join(texts)})", expected(fn.name, *values)))
    cells = [["Sheet1", f"A{i}", formula] for i, (formula, _) in enumerate(cases, start=1)]
    # the input sheet first, then the formulas
    steps = [{"new": True}, {"add_sheet": "Data"}, {"set": _inputs()}, {"set": cells}, {"recalc": True},
             {"read": [[c[0], c[1]] for c in cells]}]
    got = calc(steps)[-1]
    wrong = [(formula, cell, want) for (formula, want), cell in zip(cases, got) if not same(cell, want)]
    assert not wrong, wrong[:10]
    # plausible inputs: most cases compute a value; the others are trueband's errors, compared all the same
    values = sum(isinstance(w, float) for _, w in cases)
    assert values >= 0.8 * len(cases), "too few cases compute a value; the profiles test mostly errors"


def test_blank_missing_extra_and_logical_arguments(calc):
    rows = [
        ("=SEM(A1;A2)", expected("SEM", 10.0, 0.9)),
        ("=SEM(A1;1.3)", "#NUM!"),
        ("=SEM(A1)", expected("SEM", 10.0)),                            # too few: #VALUE!, not Err:504
        ("=SEM(A1;A2;3)", expected("SEM", 10.0, 0.9, 3.0)),             # too many: #VALUE!, not Err:504
        ('=SEM("ten";A2)', expected("SEM", "ten", 0.9)),
        ('=SCORE_CI(31;5.2;0.86;"upper")', expected("SCORE_CI", 31.0, 5.2, 0.86, "upper")),
        ('=SCORE_CI(31;5.2;0.86;"upper";)', expected("SCORE_CI", 31.0, 5.2, 0.86, "upper", None)),  # empty: default
        ('=SCORE_CI(31;5.2;0.86;;0.9)', expected("SCORE_CI", 31.0, 5.2, 0.86, None, 0.9)),
        ("=FOUR_FIFTHS(10;100;20;100)", expected("FOUR_FIFTHS", 10.0, 100.0, 20.0, 100.0)),  # TRUE as 1
        ("=FOUR_FIFTHS(19;100;20;100)", expected("FOUR_FIFTHS", 19.0, 100.0, 20.0, 100.0)),  # FALSE as 0
        ("=KR_20(C1:E4)", expected("KR20", ((1.0, 0.0, 1.0), (1.0, 1.0, 1.0), (0.0, None, 1.0), (0.0, 0.0, 0.0)))),
        ("=CRONBACH_ALPHA(C1:D3)", expected("CRONBACH_ALPHA", ((1.0, 0.0), (1.0, 1.0), (0.0, None)))),
        ("=SEM(A1/0;A2)", "#DIV/0!"),                                    # an input error passes through
        ("=SEM(A3;A2)", "#DIV/0!"),                                      # from a cell holding it too
        # Known difference: a range holding an error value makes Calc refuse the call before trueband sees it.
        ("=CRONBACH_ALPHA(A1:A3)", "Err:504"),
        # Known difference: LibreOffice hands an add-in a blank single cell as 0 (a blank inside a range stays
        # blank). trueband's call says #VALUE! for a blank sd; the cell computes with 0.
        ("=SEM(A9;A2)", expected("SEM", 0.0, 0.9)),
    ]
    inputs = [[0, "A1", 10], [0, "A2", 0.9], [0, "A3", "=1/0"], [0, "C1", 1], [0, "D1", 0], [0, "E1", 1], [0, "C2", 1], [0, "D2", 1],
              [0, "E2", 1], [0, "C3", 0], [0, "E3", 1], [0, "C4", 0], [0, "D4", 0], [0, "E4", 0]]
    cells = [[0, f"G{i}", f] for i, (f, _) in enumerate(rows, start=1)]
    got = calc([{"new": True}, {"set": inputs + cells}, {"recalc": True}, {"read": [c[:2] for c in cells]}])[-1]
    wrong = [(f, cell, want) for (f, want), cell in zip(rows, got) if not same(cell, want)]
    assert not wrong, wrong
    assert expected("SEM", None, 0.9) == "#VALUE!"  # the difference the last row documents


def test_thin_mode_cells_agree_with_call_through_trueband_serve(soffice, tmp_path):
    """Thin mode: LibreOffice's Python sends each call to a running server (standard library only)."""
    from trueband.bridge.http.server import serving_in_background
    from trueband.bridge.http import create_app

    with serving_in_background(create_app()) as url:
        run = _runner(soffice, tmp_path, mode="thin", server_url=url)
        rows = [
            ("=SEM(10;0.9)", expected("SEM", 10.0, 0.9)),
            ("=SEM(10;1.3)", "#NUM!"),
            ("=SEM(10)", "#VALUE!"),
            ('=SCORE_CI(31;5.2;0.86;"upper")', expected("SCORE_CI", 31.0, 5.2, 0.86, "upper")),
            ("=FOUR_FIFTHS(10;100;20;100)", expected("FOUR_FIFTHS", 10.0, 100.0, 20.0, 100.0)),
            ("=KR_20(C1:E4)", expected("KR20", ((1.0, 0.0, 1.0), (1.0, 1.0, 1.0), (0.0, None, 1.0), (0.0, 0.0, 0.0)))),
        ]
        inputs = [[0, c, v] for c, v in (("C1", 1), ("D1", 0), ("E1", 1), ("C2", 1), ("D2", 1), ("E2", 1),
                                         ("C3", 0), ("E3", 1), ("C4", 0), ("D4", 0), ("E4", 0))]
        cells = [[0, f"G{i}", f] for i, (f, _) in enumerate(rows, start=1)]
        got = run([{"new": True}, {"set": inputs + cells}, {"recalc": True}, {"read": [c[:2] for c in cells]}])[-1]
    wrong = [(f, cell, want) for (f, want), cell in zip(rows, got) if not same(cell, want)]
    assert not wrong, wrong


def test_function_wizard_shows_the_registry_descriptions(calc):
    functions = calc_addin.addin_functions()
    shown = calc([{"describe": sorted(functions)}])[0]
    assert set(shown) == set(functions)
    for name, entry in functions.items():
        assert shown[name]["description"] == entry["description"]
        assert shown[name]["category"] == 8  # com.sun.star.sheet.FunctionCategory.STATISTICAL
        assert [a[:2] for a in shown[name]["arguments"]] == [list(a) for a in entry["arguments"]]


def _registered_cells(path: Path) -> dict[tuple[str, str], object]:
    """(sheet, cell) → stored value of every formula cell that calls a registered function (read with openpyxl)."""
    formulas, values = load_workbook(path), load_workbook(path, data_only=True)
    out = {}
    for ws in formulas.worksheets:
        for row in ws.iter_rows():
            for c in row:
                if c.data_type == "f" and isinstance(c.value, str) and any(
                        normalize_name(name) in REGISTRY for name in re.findall(r"([A-Za-z_][\w.]*)\s*\(", c.value)):
                    out[(ws.title, c.coordinate)] = values[ws.title][c.coordinate].value
    return out


def _compare_with_recalc(saved: Path, tmp: Path):
    """Every registered cell Calc saved equals trueband recalc's value of the same saved file."""
    ours = recalculate(saved, tmp / "recalculated.xlsx").output
    live, again = _registered_cells(saved), _registered_cells(ours)
    assert live and live.keys() == again.keys()
    wrong = []
    for key, value in live.items():
        other = again[key]
        if isinstance(value, (int, float)) and not isinstance(value, bool) and isinstance(other, (int, float)):
            # Calc writes 15 significant digits into xlsx
            if not math.isclose(value, other, rel_tol=1e-13, abs_tol=1e-13):
                wrong.append((key, value, other))
        elif value != other and not (value in ("", None) and other in ("", None)):
            wrong.append((key, value, other))
    assert not wrong, wrong[:10]
    return live


def test_template_computes_live_and_calc_saved_file_recalculates(calc, tmp_path):
    from trueband.bridge.study.templates import scoring_template

    responses = [[1, 1, 1, 1], [1, 1, 1, 0], [0, 0, 1, 0], [1, 1, 0, 1], [0, 0, 0, 0], [1, 0, 1, 1]]
    book = scoring_template(tmp_path / "scoring.xlsx", n_items=4, capacity=6, ids=list("abcdef"),
                            responses=responses)
    book = recalculate(book, tmp_path / "scoring.recalc.xlsx").output
    saved = tmp_path / "saved.xlsx"
    # the first person's first item 1 -> 0: their total, interval and band, the alpha, the sd all move
    got = calc([{"open": str(book)}, {"set": [[0, "B8", 0]]}, {"recalc": True},
                {"read": [[0, "F8"], [0, "G8"], [0, "H8"], [0, "C3"], [0, "C4"]]}, {"store": str(saved)}])
    total, lower, upper, alpha, sd = got[3]
    responses[0][0] = 0
    items = tuple(tuple(float(v) for v in row) for row in responses)
    assert same(alpha, expected("CRONBACH_ALPHA", items))
    assert total == sum(responses[0]) and isinstance(alpha, float)
    assert same(lower, expected("SCORE_CI", total, sd, alpha, "lower", 0.95))
    assert same(upper, expected("SCORE_CI", total, sd, alpha, "upper", 0.95))
    _compare_with_recalc(saved, tmp_path)


def test_impact_template_computes_live_and_calc_saved_file_recalculates(calc, tmp_path):
    from trueband.bridge.study.templates import IMPACT_LAYOUT, impact_template

    groups = [("Group A", 120, 48), ("Group B", 80, 22), ("Group C", 40, 15)]  # invented counts
    book = recalculate(impact_template(tmp_path / "impact.xlsx", groups=groups),
                       tmp_path / "impact.recalc.xlsx").output
    first = IMPACT_LAYOUT["first_row"]
    saved = tmp_path / "saved.xlsx"
    # Group B's selections 22 -> 30: its rate, ratio, flag, z, p and extra selections move
    got = calc([{"open": str(book)}, {"set": [[0, f"C{first + 1}", 30]]}, {"recalc": True},
                {"read": [[0, f"E{first + 1}"], [0, f"F{first + 1}"]]}, {"store": str(saved)}])
    ratio, flag = got[3]
    assert same(ratio, expected("IMPACT_RATIO", 30.0, 80.0, 48.0, 120.0))
    assert flag == ("yes" if call("FOUR_FIFTHS", 30.0, 80.0, 48.0, 120.0) else "no")
    _compare_with_recalc(saved, tmp_path)


def test_demo_study_computes_live_and_calc_saved_file_recalculates(calc, tmp_path):
    from trueband.bridge.study.demo import make_demo
    from trueband.bridge.study.build import make_study
    from trueband.bridge.study.templates import study_data_workbook

    data = study_data_workbook(tmp_path / "data.xlsx", make_demo(), cut=24)
    study = make_study(data, tmp_path / "study.xlsx").path
    before = _registered_cells(study)
    saved = tmp_path / "saved.xlsx"
    # an item response of the first applicant in the study's copy of the data flips: the reliability figures move
    book = load_workbook(study, data_only=True)
    data_sheet = "Applicants"  # the data workbook's sheet, copied under its own name (the demo has more sheets)
    flipped = 1 - float(book[data_sheet]["C2"].value)
    # the study's coefficient alpha cell, read back from Calc and compared with call on the changed data
    formulas = load_workbook(study)
    alpha_cell, block = next(
        (c.coordinate, re.search(r"CRONBACH_ALPHA\('?([^'!]+)'?!([$A-Z0-9:]+)\)", c.value, re.I).groups())
        for row in formulas["Reliability"].iter_rows() for c in row
        if c.data_type == "f" and re.match(r"=_xludf\.CRONBACH_ALPHA\(", c.value, re.I))
    answers = calc([{"open": str(study)}, {"set": [[data_sheet, "C2", flipped]]}, {"recalc": True},
                    {"read": [["Reliability", alpha_cell]]}, {"store": str(saved)}])
    assert answers[-1] is True
    book[data_sheet]["C2"].value = flipped
    rows = book[block[0]][block[1].replace("$", "")]
    items = tuple(tuple(None if c.value is None else float(c.value) for c in row) for row in rows)
    assert same(answers[3][0], expected("CRONBACH_ALPHA", items))
    live = _compare_with_recalc(saved, tmp_path)
    assert not [k for k, v in live.items() if v == "#NAME?"]
    changed = [k for k in live if k in before and live[k] != before[k]]
    assert any(sheet == "Reliability" for sheet, _ in changed), "the changed input did not reach the reliability"
