"""SUBGROUP_SD and SUBGROUP_D: group differences read from a column of values and a column of group labels.

Sources: the open penguins dataset shipped by pingouin (body mass by sex and by species, with missing values);
pandas' groupby standard deviation (n - 1) and Python's statistics.stdev as reference implementations of the SD;
pingouin.compute_effsize(eftype="cohen") for d; COHENS_D_CI on each group's values in a column of their own
(the function these must equal, itself checked against published values in tests/test_validity.py).
"""

from __future__ import annotations

import math
import statistics

import numpy as np
import pingouin
import pytest

from trueband.funcs import call

from helpers import raises_code


def _penguins():
    df = pingouin.read_dataset("penguins")
    mass = [None if math.isnan(x) else float(x) for x in df["body_mass_g"]]
    sex = [None if not isinstance(x, str) else x for x in df["sex"]]
    return df, mass, sex


def test_subgroup_sd_on_the_penguins_against_pandas_and_statistics():
    # Open dataset shipped by pingouin; reference implementations: pandas groupby std (ddof=1), statistics.stdev.
    df, mass, sex = _penguins()
    by_pandas = df.groupby("sex")["body_mass_g"].std()
    for name in ("male", "female"):
        got = call("SUBGROUP_SD", mass, sex, name.upper())  # labels matched ignoring case
        assert got == pytest.approx(by_pandas[name], rel=1e-13)
        picked = [m for m, s in zip(mass, sex) if s == name and m is not None]
        assert got == pytest.approx(statistics.stdev(picked), rel=1e-13)


def test_subgroup_sd_keeps_its_digits_far_from_zero():
    # two passes: values near 1e9 that differ in the units (the "computational formula" loses them)
    x = [1e9 + d for d in (4, 7, 13, 16)] + [5.0]
    assert call("SUBGROUP_SD", x, [1, 1, 1, 1, 2], 1) == pytest.approx(statistics.stdev([4, 7, 13, 16]), rel=1e-12)


@pytest.mark.parametrize("a, b", [("Adelie", "Gentoo"), ("Chinstrap", "Adelie")])
def test_subgroup_d_on_the_penguins_against_pingouin(a, b):
    # Open dataset shipped by pingouin; reference library: pingouin.compute_effsize(eftype="cohen").
    df = pingouin.read_dataset("penguins")
    mass = [None if math.isnan(x) else float(x) for x in df["flipper_length_mm"]]
    xa = df.loc[df["species"] == a, "flipper_length_mm"].dropna().to_numpy()
    xb = df.loc[df["species"] == b, "flipper_length_mm"].dropna().to_numpy()
    want = pingouin.compute_effsize(xa, xb, paired=False, eftype="cohen")
    assert call("SUBGROUP_D", mass, list(df["species"]), a, b) == pytest.approx(want, rel=1e-12)


def test_subgroup_d_is_cohens_d_ci_on_the_split_columns_to_the_last_bit():
    # the study's Groups and Combined sheets used COHENS_D_CI over per-group copies of a column ("" for the others);
    # these must give the very same floats from the whole column and the group column
    rng = np.random.default_rng(7)
    x = rng.normal(20, 4, 300).round(1).tolist()
    groups = rng.choice([1, 2, 3], 300).tolist()
    x[5], groups[9] = "", None
    for a, b in ((1, 2), (3, 1)):
        split_a = [v if g == a else "" for v, g in zip(x, groups)]
        split_b = [v if g == b else "" for v, g in zip(x, groups)]
        for part in ("estimate", "lower", "upper"):
            assert call("SUBGROUP_D", x, groups, a, b, part, 0.9) == call("COHENS_D_CI", split_a, split_b, part, 0.9)
        assert call("SUBGROUP_D", x, groups, a, b) == call("COHENS_D", split_a, split_b)


def test_errors_name_the_argument():
    with raises_code("#N/A", "group", match="nobody"):
        call("SUBGROUP_SD", [1, 2, 3], ["a", "a", "b"], "c")
    with raises_code("#N/A", "group", match="at least 2"):
        call("SUBGROUP_SD", [1, 2, 3], ["a", "a", "b"], "b")
    with raises_code("#VALUE!", "groups", match="one label per value"):
        call("SUBGROUP_SD", [1, 2, 3], ["a", "a"], "a")
    with raises_code("#VALUE!", "values"):
        call("SUBGROUP_SD", [1, "x", 3], ["a", "a", "a"], "a")
    with raises_code("#NUM!", "group_b", match="same group"):
        call("SUBGROUP_D", [1, 2, 3, 4], ["a", "a", "b", "b"], "a", " A ")
    with raises_code("#N/A", "group_b", match="at least 2"):
        call("SUBGROUP_D", [1, 2, 3, 4], ["a", "a", "a", "b"], "a", "b")
    with raises_code("#DIV/0!", "group_a", match="pooled SD is 0"):
        call("SUBGROUP_D", [1, 1, 3, 3], ["a", "a", "b", "b"], "a", "b")
    with raises_code("#NUM!", "confidence"):
        call("SUBGROUP_D", [1, 2, 3, 5], ["a", "a", "b", "b"], "a", "b", "lower", 1.5)
