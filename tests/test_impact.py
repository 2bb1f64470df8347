"""Adverse impact, checked against outside values.

Sources:
* the four-fifths rule: the wording of the Uniform Guidelines, 29 CFR 1607.4(D)
  (1978) ("less than four-fifths (4/5) (or eighty percent) of the rate for the
  group with the highest rate"), evaluated in exact rational arithmetic with
  Python's ``fractions``;
* the worked examples of the Questions and Answers on the Uniform Guidelines
  (1979): the 60% / 45% / 48% / 51% example, whose wording was found quoted
  from the Questions and Answers ("adverse impact is indicated for American
  Indians but not for Hispanics or Blacks"; quoted with the rates 60%, 45%,
  48%, 51% and the ratios 75%, 80%, 85% by the NC State data ethics
  repository's entry for the Q&A, dataethicsrepository.iaa.ncsu.edu/?p=1099,
  found by search; its question number, 11, is from memory); the 48-of-80 against 12-of-40 example of Q&A 12 (from memory); the
  80-of-120 against 20-of-50 example (from memory);
* IMPACT_FISHER: scipy.stats.fisher_exact (reference library) and Fisher's
  (1935) tea-tasting table, two-sided p = 34/70 (from memory);
* IMPACT_Z: statsmodels.stats.proportion.proportions_ztest (reference
  library; it reports first-minus-second, so its z is the negative of ours
  when the focal group is given first);
* SELECTION_RATE and IMPACT_RATIO: their definitions, in exact fractions.
"""

import dataclasses
import itertools
from fractions import Fraction

import numpy as np
import pytest
from scipy import stats
from statsmodels.stats.proportion import proportions_ztest

from helpers import raises_code
from trueband.funcs import REGISTRY, call
from trueband.funcs import impact
from trueband.funcs.errors import TruebandError
from trueband.funcs.registry import call_column

IMPACT_FUNCTIONS = ["SELECTION_RATE", "IMPACT_RATIO", "FOUR_FIFTHS", "IMPACT_Z", "IMPACT_FISHER",
                    "IMPACT_EXTRA_SELECTIONS"]


def random_tables(seed, n, max_applicants=60):
    rng = np.random.default_rng(seed)
    for _ in range(n):
        fa, ra = (int(x) for x in rng.integers(1, max_applicants + 1, 2))
        yield int(rng.integers(0, fa + 1)), fa, int(rng.integers(0, ra + 1)), ra


# ---------------------------------------------------------------- four-fifths rule

@pytest.mark.parametrize("focal_rate, expected_ratio, flagged", [
    (45, Fraction(3, 4), True),     # American Indians 45/60 or 75%: adverse impact indicated
    (48, Fraction(4, 5), False),    # Hispanics 48/60 or 80%: not indicated (exactly four-fifths)
    (51, Fraction(17, 20), False),  # Blacks 51/60 or 85%: not indicated
])
@pytest.mark.parametrize("applicants", [100, 300, 1000])
def test_questions_and_answers_example_60_45_48_51(focal_rate, expected_ratio, flagged, applicants):
    # Questions and Answers on the Uniform Guidelines (1979), Q&A 11 (number from memory): hiring rates 60% for
    # whites, 45% American Indians, 48% Hispanics, 51% Blacks; impact ratios 75%, 80%, 85%; "adverse impact is
    # indicated for American Indians but not for Hispanics or Blacks". The Q&A gives rates; the applicant counts
    # are any that give those rates.
    k = applicants // 100
    args = (focal_rate * k, applicants, 60 * k, applicants)
    assert call("IMPACT_RATIO", *args) == float(expected_ratio)
    assert call("FOUR_FIFTHS", *args) is flagged


def test_questions_and_answers_example_48_of_80_and_12_of_40():
    # Q&A 12 (from memory): 48 of 80 whites (60%) and 12 of 40 blacks (30%) hired; 30/60 = 50% < 80%.
    assert call("SELECTION_RATE", 48, 80) == 0.6
    assert call("SELECTION_RATE", 12, 40) == 0.3
    assert call("IMPACT_RATIO", 12, 40, 48, 80) == 0.5
    assert call("FOUR_FIFTHS", 12, 40, 48, 80) is True


def test_example_80_of_120_and_20_of_50():
    # From memory (attributed to the Questions and Answers, 1979; not found by search): 80 of 120 White
    # applicants (66.7%) and 20 of 50 Black applicants (40%) hired; ratio 60%: adverse impact indicated.
    assert call("SELECTION_RATE", 80, 120) == pytest.approx(0.667, abs=5e-4)
    assert call("IMPACT_RATIO", 20, 50, 80, 120) == pytest.approx(0.60, rel=1e-15)
    assert call("FOUR_FIFTHS", 20, 50, 80, 120) is True


@pytest.mark.parametrize("args", [
    (36, 100, 45, 100),   # 0.36 / 0.45 is 0.7999999999999999 in floating point
    (2, 3, 5, 6),         # (2/3) / (5/6) likewise
    (4, 100, 5, 100),
    (48, 100, 60, 100),
    (8, 10, 10, 10),
    (4, 5, 1, 1),
    (800_000_000_000, 1_000_000_000_000, 1_000_000_000_000, 1_000_000_000_000),
])
def test_ratio_of_exactly_four_fifths_is_not_flagged(args):
    # 29 CFR 1607.4(D): "less than four-fifths" is a strict inequality, so exactly 4/5 is not flagged.
    fs, fa, rs, ra = args
    assert Fraction(fs, fa) / Fraction(rs, ra) == Fraction(4, 5)
    assert call("FOUR_FIFTHS", *args) is False
    assert call("IMPACT_RATIO", *args) == 0.8  # one correctly rounded division of the exact counts
    # one fewer focal selection is below four-fifths
    assert call("FOUR_FIFTHS", fs - 1, fa, rs, ra) is True


@pytest.mark.slow  # seconds: the whole suite runs it, the quick loop leaves it out
def test_four_fifths_matches_the_rule_in_exact_fractions_on_every_small_table():
    # 29 CFR 1607.4(D), evaluated with Python's fractions for every table with up to 12 applicants a group.
    for fa, ra in itertools.product(range(1, 13), repeat=2):
        for fs, rs in itertools.product(range(fa + 1), range(1, ra + 1)):
            exact = Fraction(fs, fa) < Fraction(4, 5) * Fraction(rs, ra)
            assert call("FOUR_FIFTHS", fs, fa, rs, ra) is exact, (fs, fa, rs, ra)
            assert call("IMPACT_RATIO", fs, fa, rs, ra) == float(Fraction(fs * ra, fa * rs))


def test_focal_rate_above_reference_rate():
    # 4(D): "a greater than four-fifths rate will generally not be regarded ... as evidence of adverse impact".
    assert call("FOUR_FIFTHS", 30, 40, 10, 40) is False
    assert call("IMPACT_RATIO", 30, 40, 10, 40) == 3.0


def test_every_impact_docstring_carries_the_caution():
    # Project rule: impact figures are statistical indicators, not legal findings.
    for name in IMPACT_FUNCTIONS:
        doc = " ".join(REGISTRY[name].body.__doc__.split())
        assert "not a legal finding" in doc and "qualified professional advice" in doc, name
        assert "employment law that applies" in doc, name
    assert impact.CAUTION in " ".join(impact.__doc__.split())


def test_four_fifths_docstring_quotes_the_rule():
    # The wording of 29 CFR 1607.4(D).
    doc = " ".join(REGISTRY["FOUR_FIFTHS"].body.__doc__.split())
    assert ("A selection rate for any race, sex, or ethnic group which is less than four-fifths (4/5) (or eighty "
            "percent) of the rate for the group with the highest rate will generally be regarded") in doc


# ---------------------------------------------------------------- rates

def test_selection_rate_by_definition():
    # Uniform Guidelines, sec. 16 (29 CFR 1607.16; the same text is 41 CFR 60-3.16): selection rate is "the
    # proportion of applicants or candidates who are hired, promoted, or otherwise selected".
    for fs, fa, _, _ in random_tables(1, 200):
        assert call("SELECTION_RATE", fs, fa) == fs / fa
    assert call("SELECTION_RATE", 0, 7) == 0.0
    assert call("SELECTION_RATE", 7, 7) == 1.0


# ---------------------------------------------------------------- z test

@pytest.mark.parametrize("table", list(random_tables(2, 60, 500)) + [
    (12, 40, 48, 80), (20, 50, 80, 120), (1, 1, 0, 1), (0, 3, 3, 3), (5000, 20000, 9000, 30000)])
def test_impact_z_against_statsmodels(table):
    # Reference library: statsmodels proportions_ztest (pooled variance, no continuity correction) reports
    # (p1 - p2) / se; given (focal, reference) that is the negative of IMPACT_Z.
    fs, fa, rs, ra = table
    if fs + rs in (0, fa + ra):
        pytest.skip("zero pooled variance (tested among the errors)")
    z, _ = proportions_ztest([fs, rs], [fa, ra])
    assert call("IMPACT_Z", *table) == pytest.approx(-z, rel=1e-12, abs=1e-12)
    z_reversed, _ = proportions_ztest([rs, fs], [ra, fa])
    assert call("IMPACT_Z", *table) == pytest.approx(z_reversed, rel=1e-12, abs=1e-12)


def test_impact_z_is_positive_when_the_focal_rate_is_lower():
    assert call("IMPACT_Z", 12, 40, 48, 80) > 0
    assert call("IMPACT_Z", 48, 80, 12, 40) == pytest.approx(-call("IMPACT_Z", 12, 40, 48, 80), rel=1e-15)
    assert call("IMPACT_Z", 10, 40, 20, 80) == 0.0


# ---------------------------------------------------------------- Fisher exact test

def scipy_fisher(fs, fa, rs, ra):
    return stats.fisher_exact([[fs, fa - fs], [rs, ra - rs]], alternative="two-sided").pvalue


@pytest.mark.parametrize("table", list(random_tables(3, 150, 40)) + list(random_tables(4, 40, 3000)) + [
    (12, 40, 48, 80), (20, 50, 80, 120), (0, 5, 0, 7), (5, 5, 7, 7), (0, 1, 1, 1), (3, 10, 3, 10),
    (1, 2, 1, 2), (2, 4, 2, 4), (0, 20, 20, 20), (20, 20, 0, 20), (45, 100, 60, 100),
    (40_000, 100_000, 41_000, 100_000), (300, 1_000_000, 350, 1_000_000),
    (3, 500_000_000, 10, 499_999_999),  # near-tie: P(10) exceeds P(3) by a relative 1.4e-8, so 10 is excluded
    (300_000_000, 500_000_000, 299_990_000, 500_000_000)])
@pytest.mark.slow  # seconds: the whole suite runs it, the quick loop leaves it out
def test_impact_fisher_against_scipy(table):
    # Reference library: scipy.stats.fisher_exact, alternative="two-sided" (probability-ordering definition).
    ours = call("IMPACT_FISHER", *table)
    assert ours == pytest.approx(scipy_fisher(*table), rel=1e-9, abs=1e-300)


def test_impact_fisher_tea_tasting():
    # Fisher (1935), The Design of Experiments, ch. 2: 8 cups, 4 with milk first, 3 of them identified; the
    # table probabilities are 1, 16, 36, 16, 1 (over 70), so the two-sided p is 34/70 (from memory; also
    # Agresti 2013, sec. 3.5.2, two-sided P = 0.486).
    assert call("IMPACT_FISHER", 3, 4, 1, 4) == pytest.approx(34 / 70, rel=1e-12)
    assert call("IMPACT_FISHER", 4, 4, 0, 4) == pytest.approx(2 / 70, rel=1e-12)
    assert call("IMPACT_FISHER", 2, 4, 2, 4) == pytest.approx(1.0, rel=1e-12)


def test_impact_fisher_is_symmetric_in_the_groups():
    for table in random_tables(5, 50, 30):
        fs, fa, rs, ra = table
        assert call("IMPACT_FISHER", rs, ra, fs, fa) == pytest.approx(call("IMPACT_FISHER", *table), rel=1e-9)


# ---------------------------------------------------------------- extra selections to a target ratio

def extra_by_search(fs, fa, rs, ra, target):
    """Definition: add focal selections one at a time until the exact ratio reaches the target."""
    t = Fraction(str(target))
    for extra in range(fa - fs + 1):
        if Fraction(fs + extra, fa) / Fraction(rs, ra) >= t:
            return extra
    return None


@pytest.mark.parametrize("target", [0.8, 0.5, 0.9, 1.0, 1.25])
def test_extra_selections_against_search(target):
    for fs, fa, rs, ra in random_tables(6, 300, 50):
        if rs == 0:
            continue
        want = extra_by_search(fs, fa, rs, ra, target)
        if want is None:
            with raises_code("#NUM!", "target", match="cannot be reached"):
                call("IMPACT_EXTRA_SELECTIONS", fs, fa, rs, ra, target)
        else:
            assert call("IMPACT_EXTRA_SELECTIONS", fs, fa, rs, ra, target) == want, (fs, fa, rs, ra)


def test_extra_selections_are_where_the_four_fifths_flag_turns_off():
    # With the default target 0.8, adding the extra selections clears the 29 CFR 1607.4(D) flag; one fewer does not.
    for fs, fa, rs, ra in random_tables(7, 300, 50):
        if rs == 0 or extra_by_search(fs, fa, rs, ra, 0.8) is None:
            continue
        k = call("IMPACT_EXTRA_SELECTIONS", fs, fa, rs, ra)
        assert call("FOUR_FIFTHS", fs + k, fa, rs, ra) is False
        if k > 0:
            assert call("FOUR_FIFTHS", fs + k - 1, fa, rs, ra) is True


def test_extra_selections_boundaries():
    # Worked by hand: 80% of 60% is 48%; 48% of 40 focal applicants is 19.2, so 20 selections (8 more).
    assert call("IMPACT_EXTRA_SELECTIONS", 12, 40, 48, 80) == 8
    assert call("IMPACT_EXTRA_SELECTIONS", 36, 100, 45, 100) == 0   # exactly four-fifths already reaches 0.8
    assert call("IMPACT_EXTRA_SELECTIONS", 35, 100, 45, 100) == 1
    assert call("IMPACT_EXTRA_SELECTIONS", 30, 40, 10, 40) == 0     # focal rate above the reference rate
    assert call("IMPACT_EXTRA_SELECTIONS", 0, 10, 10, 10, 1.0) == 10
    with raises_code("#NUM!", "target", match="cannot be reached"):
        call("IMPACT_EXTRA_SELECTIONS", 0, 10, 5, 10, 2.5)           # would need 125% of 10 focal applicants


# ---------------------------------------------------------------- errors

def test_errors_name_the_argument():
    with raises_code("#NUM!", "focal_selected", match="at most focal_applicants \\(10\\), got 11"):
        call("IMPACT_RATIO", 11, 10, 5, 10)
    with raises_code("#NUM!", "ref_selected", match="at most ref_applicants"):
        call("FOUR_FIFTHS", 1, 10, 12, 10)
    with raises_code("#NUM!", "selected", match="at most applicants"):
        call("SELECTION_RATE", 3, 2)
    with raises_code("#NUM!", "focal_applicants", match="at least 0, got -4"):
        call("IMPACT_Z", 0, -4, 5, 10)
    with raises_code("#NUM!", "ref_selected", match="whole number, got 2.5"):
        call("IMPACT_FISHER", 1, 10, 2.5, 10)
    with raises_code("#VALUE!", "ref_applicants", match="text"):
        call("IMPACT_RATIO", 1, 10, 2, "ten")
    with raises_code("#VALUE!", "focal_selected", match="blank"):
        call("FOUR_FIFTHS", None, 10, 2, 10)
    with raises_code("#DIV/0!", "applicants"):
        call("SELECTION_RATE", 0, 0)
    with raises_code("#DIV/0!", "focal_applicants"):
        call("IMPACT_RATIO", 0, 0, 5, 10)
    with raises_code("#DIV/0!", "ref_applicants"):
        call("IMPACT_FISHER", 1, 10, 0, 0)


@pytest.mark.parametrize("name", ["IMPACT_RATIO", "FOUR_FIFTHS", "IMPACT_EXTRA_SELECTIONS"])
def test_zero_reference_rate_is_div0(name):
    with raises_code("#DIV/0!", "ref_selected", match="selection rate is 0"):
        call(name, 3, 10, 0, 10)


def test_zero_pooled_variance_is_div0():
    with raises_code("#DIV/0!", "ref_selected", match="nobody was selected"):
        call("IMPACT_Z", 0, 10, 0, 20)
    with raises_code("#DIV/0!", "ref_selected", match="everybody was selected"):
        call("IMPACT_Z", 10, 10, 20, 20)
    # the exact test is defined there: one possible table, p = 1 (scipy agrees)
    assert call("IMPACT_FISHER", 0, 10, 0, 20) == 1.0 == scipy_fisher(0, 10, 0, 20)


def test_other_domain_errors():
    with raises_code("#NUM!", "target", match="greater than 0"):
        call("IMPACT_EXTRA_SELECTIONS", 1, 10, 5, 10, 0)
    with raises_code("#NUM!", "focal_applicants", match="too large for the exact test"):
        call("IMPACT_FISHER", 1, 2 * 10**9, 5, 10)
    with raises_code("#VALUE!"):
        call("IMPACT_RATIO", 1, 2, 3)


# ---------------------------------------------------------------- column path

@pytest.mark.parametrize("name", ["SELECTION_RATE", "IMPACT_RATIO", "FOUR_FIFTHS", "IMPACT_Z", "IMPACT_EXTRA_SELECTIONS"])
def test_bodies_compute_whole_columns_of_counts(name, monkeypatch):
    # The registry vectorises float arguments only; these bodies are written for arrays of counts too.
    # Declare the counts elementwise on a copy of the entry and compare whole columns with single calls,
    # good and bad rows mixed (selected above applicants, zero applicants, fractions, negatives).
    spec = REGISTRY[name]
    monkeypatch.setitem(REGISTRY, name, dataclasses.replace(
        spec, elementwise=frozenset(a.name for a in spec.arguments if a.kind in ("number", "integer"))))
    rng = np.random.default_rng(8)
    n = 400
    cols = {}
    for a in spec.arguments:
        if a.name == "target":
            cols[a.name] = rng.choice([0.5, 0.8, 0.8, 1.0, 1.3, 0.0], n).tolist()
        elif "applicants" in a.name:
            cols[a.name] = rng.choice([0, 1, 3, 10, 25, 40, 1e12], n).astype(float).tolist()
        else:
            cols[a.name] = rng.choice([0, 0, 1, 2, 5, 9, 12, 30, -1, 2.5, 8e11], n).astype(float).tolist()
    got = call_column(name, cols)
    for i in range(n):
        try:
            want = spec(**{k: c[i] for k, c in cols.items()})
        except TruebandError as exc:
            want = exc
        if isinstance(want, TruebandError):
            assert isinstance(got[i], TruebandError) and got[i].code == want.code, (i, got[i], want)
        else:
            assert got[i] == pytest.approx(want, rel=1e-12, abs=0), (i, got[i], want)
            assert type(got[i]) is type(want), (i, got[i], want)


# ---------------------------------------------------------------- counting by group

def test_tally_groups_merges_labels_as_documented_and_agrees_with_pandas():
    """Labels differing only in case or spacing are one group (the convention in funcs/impact.py);
    the counts are checked against pandas grouping on the stripped, space-collapsed, casefolded label."""
    import pandas as pd

    from trueband.funcs.impact import group_key, tally_groups

    labels = ["Group A", " group a", "GROUP  A ", "Group B", "group b", None, "  ", 2, 2.0, "Straße", "STRASSE"]
    selected = [True, False, True, False, True, True, False, True, False, True, True]
    t = tally_groups(labels, selected)
    df = pd.DataFrame({"label": [x if isinstance(x, str) else None if x is None else str(int(x)) for x in labels],
                       "selected": selected})
    df["key"] = df["label"].str.split().str.join(" ").str.casefold().replace("", None)
    expected = df.dropna(subset=["key"]).groupby("key")["selected"].agg(["size", "sum"])
    assert {group_key(n): (t.applicants[n], t.selected[n]) for n in t.names} == {
        k: (int(r["size"]), int(r["sum"])) for k, r in expected.iterrows()}
    assert t.blank == 2
    assert t.merged["Group A"] == ("Group A", " group a", "GROUP  A ")
    assert t.names == ("2", "Group A", "Group B", "Straße")  # casefold: "ß" is "ss" (Unicode case folding)
    assert t.name(" GROUP b ") == "Group B" and t.name("Group C") is None


def test_tally_groups_refuses_logical_labels_and_mismatched_lengths():
    from trueband.funcs.errors import ArgumentTypeError
    from trueband.funcs.impact import tally_groups

    with pytest.raises(ArgumentTypeError, match="group label"):
        tally_groups(["A", True])
    with pytest.raises(ArgumentTypeError, match="selected"):
        tally_groups(["A", "B"], [True])
