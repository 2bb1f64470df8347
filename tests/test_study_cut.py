"""The cut-score evidence of the study: the Cut score, Standard setting and Content sheets.

The study is built from the demo (invented applicants, an invented panel of judges and of experts, used here
only as input). Sources of the check values:

* decision consistency and accuracy, normal model: ``scipy.stats.multivariate_normal`` (bivariate normal
  probabilities of Peng & Subkoviak 1980's model) on the mean, SD and reliability computed here with numpy;
* the same, beta-binomial model: numerical integration (``scipy.integrate.quad``) over the beta true-score
  distribution of ``scipy.stats.binom`` probabilities, the beta's parameters from Huynh's (1976) moment
  equations written out here;
* conditional SEM: Lord's (1955) formula √(c(n − c)/(n − 1)) written out here; Keats' (1957) factor
  √((1 − reliability)/(1 − KR-21));
* CVR critical value for 9 experts: Ayre & Scally (2014), Table 1: 8 essential ratings, CVR 0.778 (from
  memory), confirmed with ``scipy.stats.binom.sf``; the normal approximation 1.645/√N of Wilson, Pan &
  Schumsky (2012);
* standard-setting cuts: Angoff's cut as the mean over judges of their summed probabilities (numpy), the
  other methods the registered functions called directly on the judges' values as the demo writes them;
* the sliding band's floor: top score − 1.96·SD·√(2(1 − reliability)) (Cascio, Outtz, Zedeck & Goldstein 1991)
  with ``scipy.stats.norm.ppf`` for 1.96.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from openpyxl import Workbook, load_workbook
from scipy import integrate, stats

from trueband.bridge.study.build import NOT_COMPUTABLE, StudyError, make_study
from trueband.bridge.study.demo import make_demo
from trueband.bridge.study.demo_cut import content_rows, judges_rows
from trueband.bridge.study.setup import SetupError
from trueband.bridge.study.templates import study_data_workbook
from trueband.funcs import call

CUT = 24.0


@pytest.fixture(scope="module")
def demo():
    return make_demo()


@pytest.fixture(scope="module")
def study(tmp_path_factory, demo):
    folder = tmp_path_factory.mktemp("cut")
    data = study_data_workbook(folder / "data.xlsx", demo, cut=CUT)
    result = make_study(data, folder / "study.xlsx")
    return result, load_workbook(result.path, data_only=True), load_workbook(result.path)


def value(study, key):
    result, wb, _ = study
    sheet, coord = result.cells[key]
    return wb[sheet][coord].value


def formula(study, key):
    result, _, wb = study
    sheet, coord = result.cells[key]
    return wb[sheet][coord].value


@pytest.fixture(scope="module")
def stats_of(demo, study):
    scores = demo.items.sum(axis=1).astype(float)
    return dict(scores=scores, mean=scores.mean(), sd=scores.std(ddof=1), sd_n=scores.std(ddof=0),
                rel=value(study, "reliability"), n=demo.items.shape[1])


def test_the_new_sheets_are_there_and_computed(study):
    result, wb, _ = study
    assert result.recalc_report.ok, [tuple(e) for e in result.recalc_report.errors[:10]]
    # the demo's other sheets have their own expected gaps (test_study.py); these three have none
    assert [x for x in result.not_computable if x[0] in ("Cut score", "Standard setting", "Content")] == []
    assert {"Cut score", "Standard setting", "Content"} <= set(wb.sheetnames)
    assert wb.sheetnames.index("Content") < wb.sheetnames.index("Notes")


@pytest.mark.parametrize("key, function", [
    ("agreement_bb", "DECISION_CONSISTENCY_BB"), ("kappa_bb", "DECISION_CONSISTENCY_BB"),
    ("accuracy_bb", "CLASSIFICATION_ACCURACY_BB"), ("false_pass_bb", "CLASSIFICATION_ACCURACY_BB"),
    ("false_fail_bb", "CLASSIFICATION_ACCURACY_BB"), ("agreement_normal", "DECISION_CONSISTENCY"),
    ("accuracy_normal", "CLASSIFICATION_ACCURACY"), ("csem_lord", "CSEM_BINOMIAL"), ("kr21", "KR21"),
])
def test_figures_are_live_formulas(study, key, function):
    assert f"{function}(" in formula(study, key).upper().replace("KR_21", "KR21")


def _huynh_beta(mean, sd_n, n):
    """Huynh (1976): KR-21 and the beta parameters of the true proportion correct, from the moments."""
    kr21 = n / (n - 1) * (1 - mean * (n - mean) / (n * sd_n ** 2))
    a = (-1 + 1 / kr21) * mean
    return kr21, a, -a + n / kr21 - n


def test_beta_binomial_figures_against_numerical_integration(study, stats_of):
    s = stats_of
    n, c = s["n"], int(math.ceil(CUT))
    kr21, a, b = _huynh_beta(s["mean"], s["sd_n"], n)
    beta = stats.beta(a, b)

    def passes(t):
        return stats.binom.sf(c - 1, n, t)

    agreement = integrate.quad(lambda t: (passes(t) ** 2 + (1 - passes(t)) ** 2) * beta.pdf(t), 0, 1,
                               epsabs=1e-12)[0]
    tau = c / n
    false_pass = integrate.quad(lambda t: passes(t) * beta.pdf(t), 0, tau, epsabs=1e-12)[0]
    false_fail = integrate.quad(lambda t: (1 - passes(t)) * beta.pdf(t), tau, 1, epsabs=1e-12)[0]
    p = integrate.quad(lambda t: passes(t) * beta.pdf(t), 0, 1, epsabs=1e-12)[0]
    chance = p ** 2 + (1 - p) ** 2
    assert value(study, "kr21") == pytest.approx(kr21, rel=1e-10)
    assert value(study, "agreement_bb") == pytest.approx(agreement, abs=1e-7)
    assert value(study, "kappa_bb") == pytest.approx((agreement - chance) / (1 - chance), abs=1e-6)
    assert value(study, "false_pass_bb") == pytest.approx(false_pass, abs=1e-7)
    assert value(study, "false_fail_bb") == pytest.approx(false_fail, abs=1e-7)
    assert value(study, "accuracy_bb") == pytest.approx(1 - false_pass - false_fail, abs=1e-7)


def test_normal_figures_against_scipy_bivariate_normal(study, stats_of):
    s = stats_of
    rho = s["rel"]
    h = (CUT - 0.5 - s["mean"]) / s["sd"]  # whole-number scores pass at cut - 0.5
    both_fail = stats.multivariate_normal([0, 0], [[1, rho], [rho, 1]]).cdf([h, h])
    agreement = both_fail + (1 - 2 * stats.norm.cdf(h) + both_fail)
    chance = stats.norm.cdf(h) ** 2 + stats.norm.sf(h) ** 2
    k, r = h / math.sqrt(rho), math.sqrt(rho)
    fail_both = stats.multivariate_normal([0, 0], [[1, r], [r, 1]]).cdf([h, k])
    accuracy = fail_both + (1 - stats.norm.cdf(h) - stats.norm.cdf(k) + fail_both)
    assert value(study, "agreement_normal") == pytest.approx(agreement, abs=1e-6)
    assert value(study, "kappa_normal") == pytest.approx((agreement - chance) / (1 - chance), abs=1e-5)
    assert value(study, "accuracy_normal") == pytest.approx(accuracy, abs=1e-6)
    assert value(study, "false_pass_normal") == pytest.approx(stats.norm.cdf(k) - fail_both, abs=1e-6)


def test_conditional_sem_lord_and_keats(study, stats_of):
    s = stats_of
    n = s["n"]
    lord = math.sqrt(CUT * (n - CUT) / (n - 1))
    kr21, _, _ = _huynh_beta(s["mean"], s["sd_n"], n)
    assert value(study, "csem_lord") == pytest.approx(lord, rel=1e-12)
    assert value(study, "csem_keats") == pytest.approx(lord * math.sqrt((1 - s["rel"]) / (1 - kr21)), rel=1e-10)


def test_pass_rates_by_group_link_to_impact(study, demo, stats_of):
    result, wb, formulas = study
    groups = np.array(demo.groups)
    ws, fs = wb["Cut score"], formulas["Cut score"]
    found = {}
    for row in ws.iter_rows(max_col=2):
        if row[0].value in ("Group A", "Group B") and isinstance(row[1].value, float):
            found[row[0].value] = (row[1].value, fs.cell(row[0].row, 2).value)
    for name in ("Group A", "Group B"):
        rate, text = found[name]
        assert rate == pytest.approx((stats_of["scores"][groups == name] >= CUT).mean(), rel=1e-12)
        assert text.startswith("='Impact'!") or text.startswith("=Impact!")
        assert rate == value(study, f"rate_{name}")


def test_sliding_band_floor(study, stats_of):
    s = stats_of
    z = stats.norm.ppf(0.975)
    top = s["scores"].max()
    floor = top - z * s["sd"] * math.sqrt(2 * (1 - s["rel"]))
    assert value(study, "band_floor_1") == pytest.approx(floor, rel=1e-12)
    second = np.unique(s["scores"])[-2]
    assert value(study, "band_floor_2") == pytest.approx(second - z * s["sd"] * math.sqrt(2 * (1 - s["rel"])),
                                                         rel=1e-12)
    result, wb, _ = study
    # the sliding band is on Bands, beside the applicants' rows, with its caution; Cut score points there
    assert result.cells["band_floor_1"][0] == "Bands"
    text = " ".join(str(c.value) for row in wb["Bands"].iter_rows(min_row=1, max_row=40, min_col=12) for c in row
                    if isinstance(c.value, str))
    assert "section 106" in text and "not a neutral one" in text and "Fixed bands" in text
    cut_text = " ".join(str(c.value) for row in wb["Cut score"].iter_rows(max_col=1) for c in row if c.value)
    assert "section 106" not in cut_text and "is on the Bands sheet" in cut_text


def _blocks(rows):
    """The demo's judges' sheet rows split into blocks: title -> (header, rows), as a reader of the layout would."""
    out, i = {}, 0
    titles = {"angoff", "nedelsky", "ebel counts", "ebel proportions", "hofstee", "beuk", "candidate judgments"}
    while i < len(rows):
        if rows[i] and str(rows[i][0]).lower() in titles:
            j = i + 2
            while j < len(rows) and rows[j]:
                j += 1
            out[str(rows[i][0]).lower()] = (rows[i + 1], rows[i + 2:j])
            i = j
        else:
            i += 1
    return out


def test_standard_setting_cuts(study, demo, stats_of):
    blocks = _blocks(judges_rows(demo, CUT))
    angoff = np.array([r[1:] for r in blocks["angoff"][1]], dtype=float)
    sums = angoff.sum(axis=0)
    assert value(study, "angoff_cut") == pytest.approx(sums.mean(), rel=1e-12)
    assert value(study, "angoff_judges_sd") == pytest.approx(sums.std(ddof=1), rel=1e-12)
    assert value(study, "angoff_se") == pytest.approx(call("ANGOFF_SE", angoff), rel=1e-12)
    nedelsky = np.array([r[1:] for r in blocks["nedelsky"][1]], dtype=float)
    assert value(study, "nedelsky_cut") == pytest.approx((1 / nedelsky).mean(axis=1).sum(), rel=1e-12)
    counts = np.array([r[1:] for r in blocks["ebel counts"][1]], dtype=float)
    judged = np.array([r[1:] for r in blocks["ebel proportions"][1]], dtype=float)
    assert value(study, "ebel_cut") == pytest.approx((counts * judged).sum(), rel=1e-12)
    scores = stats_of["scores"]
    hof = np.array([r[1:] for r in blocks["hofstee"][1]], dtype=float).mean(axis=0)
    assert value(study, "hofstee_cut") == call("HOFSTEE_CUT", scores, *hof)
    beuk = np.array([r[1:] for r in blocks["beuk"][1]], dtype=float)
    assert value(study, "beuk_cut") == call("BEUK_CUT", scores, beuk[:, 0], beuk[:, 1])
    by_id = dict(zip(demo.ids, scores))
    cand = blocks["candidate judgments"][1]
    x = [by_id[r[0]] for r in cand]
    assert value(study, "contrasting_groups_cut") == call("CONTRASTING_GROUPS_CUT", x,
                                                          [r[1] == "yes" for r in cand])
    assert value(study, "borderline_group_cut") == float(np.median([s for s, r in zip(x, cand) if r[2] == "yes"]))


def test_method_cut_and_sem_adjustment(study):
    assert value(study, "method_cut") == value(study, "angoff_cut")  # the demo names Angoff
    assert value(study, "n_judges") == 6
    assert value(study, "adjusted_cut") == pytest.approx(value(study, "angoff_cut") - 1 * value(study, "sem"),
                                                         rel=1e-12)
    _, wb, _ = study
    text = " ".join(str(c.value) for row in wb["Standard setting"].iter_rows(max_col=2) for c in row if c.value)
    assert "RATIONALE (to be written by the person responsible" in text
    assert "Angoff (modified: judged probabilities)" in text


def test_content_validity_ratios_and_cvi(study, demo):
    rows = content_rows(demo)[1:]
    n = len(rows[0]) - 1
    # Ayre & Scally (2014), Table 1: 9 experts need 8 essential ratings, CVR 0.778 (from memory); scipy confirms
    assert stats.binom.sf(7, 9, 0.5) <= 0.05 < stats.binom.sf(6, 9, 0.5)
    critical = (8 - n / 2) / (n / 2)
    assert critical == pytest.approx(0.778, abs=5e-4)
    cvrs = [(sum(r == "essential" for r in row[1:]) - n / 2) / (n / 2) for row in rows]
    for i, cvr in enumerate(cvrs, start=1):
        assert value(study, f"cvr_{i}") == pytest.approx(cvr, rel=1e-12)
    kept = [c for c in cvrs if c >= critical - 1e-12]
    assert value(study, "content_pass") == len(kept)
    assert value(study, "cvi") == pytest.approx(sum(kept) / len(kept), rel=1e-12)
    assert value(study, "cvr_mean") == pytest.approx(np.mean(cvrs), rel=1e-12)


def test_summary_rows(study):
    assert value(study, "summary_decision_consistency") == value(study, "agreement_bb")
    assert value(study, "summary_cvi") == value(study, "cvi")
    assert value(study, "summary_method_cut") == value(study, "method_cut")


# ---------------------------------------------------------------- other studies

def book(path, rows, setup: dict, extra: dict | None = None):
    wb = Workbook()
    ws = wb.active
    ws.title = "Candidates"
    for row in rows:
        ws.append(row)
    st = wb.create_sheet("Setup")
    for k, v in setup.items():
        st.append([k, v])
    for name, cells in (extra or {}).items():
        sheet = wb.create_sheet(name)
        for row in cells:
            sheet.append(row)
    wb.save(path)
    return path


def candidates(n=40, k=8, seed=5):
    rng = np.random.default_rng(seed)
    theta = rng.standard_normal(n)
    items = (rng.random((n, k)) < 1 / (1 + np.exp(-(theta[:, None] - rng.normal(0, 1, k))))).astype(int)
    return [["id", "group", *[f"i{j}" for j in range(1, k + 1)], "total"]] + [
        [f"P{i}", "A" if i % 2 else "B", *items[i].tolist(), float(items[i].sum())] for i in range(n)]


def test_a_study_without_the_new_settings_has_none_of_the_sheets(tmp_path):
    path = book(tmp_path / "d.xlsx", candidates(), {"id column": "id", "item columns": "i1:i8"})
    result = make_study(path, tmp_path / "s.xlsx")
    names = load_workbook(result.path).sheetnames
    assert not {"Cut score", "Standard setting", "Content"} & set(names)
    assert not [k for k in result.cells if k.endswith("_bb") or k.startswith("cvr")]


def test_a_total_only_study_says_why_the_beta_binomial_is_not_computed(tmp_path):
    rows = candidates()
    rng = np.random.default_rng(8)
    rows = [rows[0] + ["retest"]] + [r + [r[-1] + float(rng.integers(-1, 2))] for r in rows[1:]]
    setup = {"id column": "id", "total column": "total", "cut score": 5, "group column": "group"}
    path = book(tmp_path / "d.xlsx", rows, {**setup, "retest column": "retest"})
    result = make_study(path, tmp_path / "s.xlsx")
    wb = load_workbook(result.path, data_only=True)
    sheet, coord = result.cells["agreement_bb"]
    assert wb[sheet][coord].value.startswith(NOT_COMPUTABLE + "the beta-binomial model")
    sheet, coord = result.cells["agreement_normal"]
    assert isinstance(wb[sheet][coord].value, float)
    sheet, coord = result.cells["csem_lord"]
    assert wb[sheet][coord].value.startswith(NOT_COMPUTABLE)
    # without a retest either there is no reliability: the figures say so
    result = make_study(book(tmp_path / "d2.xlsx", candidates(), setup), tmp_path / "s2.xlsx")
    wb = load_workbook(result.path, data_only=True)
    sheet, coord = result.cells["agreement_normal"]
    assert wb[sheet][coord].value == NOT_COMPUTABLE + "it needs the reliability, which is not computable"


def test_a_small_panel_has_no_critical_value_and_a_bad_rating_is_listed(tmp_path):
    ratings = [["Item", "E1", "E2", "E3"], ["i1", "essential", "Essential", "useful"],
               ["i2", "essential", "maybe", "essential"]]
    path = book(tmp_path / "d.xlsx", candidates(), {"item columns": "i1:i8", "content ratings sheet": "Ratings"},
                {"Ratings": ratings})
    result = make_study(path, tmp_path / "s.xlsx")
    wb = load_workbook(result.path, data_only=True)
    ws = wb["Content"]
    texts = [c.value for row in ws.iter_rows() for c in row if isinstance(c.value, str)]
    assert any(t.startswith(NOT_COMPUTABLE) and "too small" in t for t in texts)
    sheet, coord = result.cells["cvi"]
    assert wb[sheet][coord].value == NOT_COMPUTABLE + "no item reaches the critical value"
    assert any("sheet 'Ratings', cell C3" in p and "'maybe'" in p for p in result.problems)
    assert value((result, wb, None), "cvr_1") == pytest.approx((2 - 1.5) / 1.5)


def test_the_normal_approximation_is_labelled(tmp_path):
    ratings = [["Item", *[f"E{j}" for j in range(13)]], ["i1", *(["essential"] * 10 + ["useful"] * 3)]]
    path = book(tmp_path / "d.xlsx", candidates(), {"item columns": "i1:i8", "content ratings sheet": "Ratings",
                                                     "content critical value": "normal"}, {"Ratings": ratings})
    result = make_study(path, tmp_path / "s.xlsx")
    wb = load_workbook(result.path, data_only=True)
    headers = [c.value for row in wb["Content"].iter_rows() for c in row if isinstance(c.value, str)]
    assert "Critical CVR (normal approximation)" in headers
    # Wilson, Pan & Schumsky (2012): CVR critical = z(1 - alpha) / sqrt(N)
    row = next(r for r in wb["Content"].iter_rows() if r[0].value == "i1")
    assert row[4].value == pytest.approx(stats.norm.ppf(0.95) / math.sqrt(13), rel=1e-9)
    # 13 experts: their ratings in two tables below the figures (at most eight a table, so each prints across a
    # page); the counts read both: Lawshe (1975), CVR = (ne - N/2)/(N/2) with 10 essential of 13
    assert row[1].value == 13 and row[2].value == 10
    assert row[3].value == pytest.approx((10 - 6.5) / 6.5, rel=1e-12)
    items = [r for r in wb["Content"].iter_rows(values_only=True) if r[0] == "Item"]
    assert [sum(1 for v in r[1:] if v) for r in items] == [8, 5]


@pytest.mark.parametrize("setup, extra, match", [
    ({"standard setting method": "guesswork", "judges sheet": "J"}, {"J": [["Beuk"], ["Judge", "Cut", "Rate"],
                                                                           ["a", 3, 0.5]]},
     "standard setting method: 'guesswork' is not one of"),
    ({"standard setting method": "Angoff"}, {}, "name the judges' sheet too"),
    ({"judges sheet": "Panel"}, {}, "judges sheet: no sheet named 'Panel'"),
    ({"content ratings sheet": "Experts"}, {}, "content ratings sheet: no sheet named 'Experts'"),
    ({"content critical value": "approximate"}, {}, "content critical value: give exact or normal"),
    ({"judges sheet": "J"}, {"J": [["Angoff"], ["Item", "J1"], ["i1", "high"]]},
     r"sheet 'J', cell B3 \(Angoff block\): 'high' is not a number"),
    ({"judges sheet": "J"}, {"J": [["nothing here"]]}, "has no block"),
])
def test_unusable_settings_name_the_setting(tmp_path, setup, extra, match):
    path = book(tmp_path / "d.xlsx", candidates(), {"item columns": "i1:i8", **setup}, extra)
    with pytest.raises((SetupError, StudyError), match=match):
        make_study(path, tmp_path / "s.xlsx")
    assert not (tmp_path / "s.xlsx").exists()


# ---------------------------------------------------------------- as LibreOffice Calc shows it

@pytest.mark.slow
def test_libreoffice_shows_and_recomputes_the_new_sheets(study, tmp_path, soffice):
    # every formula cell of the three sheets as Calc shows the stored values; and, with a profile that makes
    # Calc recompute on loading, every formula of standard functions only (COUNTIF, LARGE, INDEX/MATCH,
    # AVERAGEIF, STDEVP, VARP, ROUNDUP, NORMSDIST...) recomputed by Calc itself to the value trueband stored
    from openpyxl.formula import Tokenizer
    from openpyxl.utils import get_column_letter, range_boundaries

    from test_study_libreoffice import CSV_FILTER, convert, mismatched_cells, read_csv, recalc_to_csv, same, shown
    from trueband.funcs import REGISTRY
    from trueband.funcs.registry import normalize_name

    result, values, formulas = study
    sheets = ("Cut score", "Standard setting", "Content", "Bands")  # Bands: the sliding band beside the rows
    convert(soffice, result.path, CSV_FILTER, tmp_path / "csv", tmp_path / "profile")
    checked, mismatches = mismatched_cells(result, tmp_path, sheets)
    assert checked > 300 and not mismatches, mismatches[:10]

    folder = tmp_path / "again"
    folder.mkdir()
    profile = folder / "profile"
    recalc_to_csv(soffice, result.path, folder / "csv", profile)
    memo: dict = {}

    def uses_ours(sheet: str, coordinate: str) -> bool:
        """Whether the cell calls a trueband function or reads (at any depth) a cell that does."""
        key = (sheet, coordinate)
        if key not in memo:
            memo[key] = False  # no cycles in a study; this stops a walk that meets itself
            text = formulas[sheet][coordinate].value
            if isinstance(text, str) and text.startswith("="):
                tokens = Tokenizer(text).items
                names = {normalize_name(t.value.rstrip("(")) for t in tokens if t.type == "FUNC" and t.subtype == "OPEN"}
                memo[key] = bool(names & set(REGISTRY)) or any(
                    uses_ours(*ref) for t in tokens if t.type == "OPERAND" and t.subtype == "RANGE"
                    for ref in cells_of(t.value, sheet))
        return memo[key]

    def cells_of(reference: str, sheet: str):
        if "!" in reference:
            sheet, reference = reference.rsplit("!", 1)
            sheet = sheet.strip("'").replace("''", "'")
        (c0, r0, c1, r1) = range_boundaries(reference.replace("$", ""))
        for r in range(r0, r1 + 1):
            for c in range(c0, c1 + 1):
                yield sheet, f"{get_column_letter(c)}{r}"

    recomputed, wrong, recomputed_cells = {}, [], set()
    floor_col = result.cells["band_floor_1"][1].rstrip("0123456789")
    top_col = get_column_letter(range_boundaries(floor_col + "1")[0] - 1)
    tops = {f"{top_col}{r}" for r in range(1, 60) if isinstance(formulas["Bands"][f"{top_col}{r}"].value, str)
            and formulas["Bands"][f"{top_col}{r}"].value.startswith("=")}
    for sheet in sheets:
        rows = read_csv(folder, sheet)
        for row in formulas[sheet].iter_rows():
            for cell in row:
                text = cell.value
                if not (isinstance(text, str) and text.startswith("=")):
                    continue
                theirs = shown(rows, cell.row, cell.column)
                if uses_ours(sheet, cell.coordinate):
                    continue  # a trueband function, or a cell that depends on one: Calc has no add-in here
                recomputed[sheet] = recomputed.get(sheet, 0) + 1
                recomputed_cells.add((sheet, cell.coordinate))
                if not same(values[sheet][cell.coordinate].value, theirs):
                    wrong.append((sheet, cell.coordinate, text[:60], values[sheet][cell.coordinate].value, theirs))
    assert not wrong, wrong[:10]
    # Content: panel and essential counts of 40 items, and the summary counts; Cut score: the sliding band
    assert recomputed.get("Content", 0) >= 80 and recomputed.get("Cut score", 0) >= 5, recomputed
    # the sliding band's top scores (MAX, then LARGE/COUNTIF) recomputed by Calc on the Bands sheet
    side = [k for k in recomputed_cells if k[0] == "Bands" and k[1] in tops]
    assert len(side) == len(tops) >= 2, (side, tops)


def test_a_consensus_method_and_a_yes_no_panel(tmp_path):
    # Ebel's grid is a consensus: the number of judges is not on the sheet, and the sheet says so; a yes/no
    # Angoff panel (1/0 judgments) is labelled as such. Ebel (1972): Σ items × judged proportion.
    judges = [["Ebel counts"], ["Relevance", "Easy", "Hard"], ["Essential", 3, 2], ["Useful", 2, 1], [],
              ["Ebel proportions"], ["Relevance", "Easy", "Hard"], ["Essential", 0.9, 0.5], ["Useful", 0.8, 0.4], [],
              ["Angoff"], ["Item", "J1", "J2", "J3"], ["i1", 1, 1, 0], ["i2", 0, 1, 1], ["i3", 1, 1, 1]]
    setup = {"item columns": "i1:i8", "judges sheet": "Panel", "standard setting method": "Ebel",
             "sem adjustment": 0.5}
    result = make_study(book(tmp_path / "d.xlsx", candidates(), setup, {"Panel": judges}), tmp_path / "s.xlsx")
    wb = load_workbook(result.path, data_only=True)
    study = (result, wb, None)
    assert value(study, "method_cut") == pytest.approx(3 * 0.9 + 2 * 0.5 + 2 * 0.8 + 1 * 0.4, rel=1e-12)
    assert "n_judges" not in result.cells
    assert value(study, "adjusted_cut") == pytest.approx(value(study, "method_cut") - 0.5 * value(study, "sem"))
    texts = [c.value for row in wb["Standard setting"].iter_rows() for c in row if isinstance(c.value, str)]
    assert "not recorded on the judges' sheet for this method (a consensus grid)" in texts
    # k is the yellow input cell (0.5 here); the text beside it names no value that would go stale when it is edited
    assert not [t for t in texts if "k = 0.5" in t] and any(t.startswith("Why lower the cut by k SEM") for t in texts)
    assert "Angoff cut (yes/no judgments)" in texts
    assert value(study, "angoff_cut") == pytest.approx((2 + 3 + 2) / 3, rel=1e-12)  # mean of the judges' sums
