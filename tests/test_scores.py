"""Measurement error and score interpretation, checked against outside values.

Sources:
* normal quantiles: scipy.stats.norm (reference library);
* percentile ranks: scipy.stats.percentileofscore(kind="mean") (reference
  library), the mid-point definition of Crocker & Algina (1986), ch. 19;
* stanines: the 4-7-12-17-20-17-12-7-4 percent distribution, Angoff (1971);
* SEM, SED, Kelley, banding: formulas of Lord & Novick (1968) and Cascio,
  Outtz, Zedeck & Goldstein (1991); the numeric examples marked "from memory"
  are textbook values recalled, not copied from a page in hand.
"""

import math

import numpy as np
import pytest
from scipy import stats

from helpers import raises_code
from trueband.funcs import call
from trueband.funcs import scores as s


# ---------------------------------------------------------------- SEM and relatives

@pytest.mark.parametrize("sd, r, expected, source", [
    (15, 0.91, 4.5, "IQ-type scale, SEM 4.5 (from memory; standard textbook example)"),
    (10, 0.91, 3.0, "Harvill (1991) ITEMS module style example, SD 10 and r .91 give SEM 3 (from memory)"),
    (15, 0.92, 15 * math.sqrt(0.08), "SD 15, r .92: SEM about 4.2 (worked by hand from Lord & Novick eq. 3.8.4)"),
    (80, 0.87, 80 * math.sqrt(0.13), "SD 80, r .87: SEM about 29.5 (worked by hand)"),
    (12, 1.0, 0.0, "perfect reliability: no error (definition)"),
    (12, 0.0, 12.0, "zero reliability: SEM equals SD (definition)"),
])
def test_sem(sd, r, expected, source):
    assert call("SEM", sd, r) == pytest.approx(expected, rel=1e-12, abs=1e-12), source


def test_sed_is_sem_times_root_two():
    # Definition: Gulliksen (1950), ch. 4; SED = SEM * sqrt(2).
    assert call("SED", 15, 0.91) == pytest.approx(4.5 * math.sqrt(2), rel=1e-12)


def test_score_ci_uses_exact_normal_quantile():
    z = stats.norm.ppf(0.975)  # reference library: scipy.stats.norm
    assert z == pytest.approx(1.959963984540054, rel=1e-15)
    sem = 15 * math.sqrt(1 - 0.91)
    assert call("SCORE_CI", 100, 15, 0.91, "lower") == pytest.approx(100 - z * sem, rel=1e-14)
    assert call("SCORE_CI", 100, 15, 0.91, "upper") == pytest.approx(100 + z * sem, rel=1e-14)
    z90 = stats.norm.ppf(0.95)
    assert call("SCORE_CI", 100, 15, 0.91, "upper", 0.90) == pytest.approx(100 + z90 * sem, rel=1e-14)


@pytest.mark.parametrize("confidence", [0.5, 0.68, 0.9, 0.95, 0.99, 0.999999])
def test_two_sided_z_against_scipy(confidence):
    # Reference library: scipy.stats.norm. isf((1 - c)/2) is the accurate form; interval() goes through
    # ppf((1 + c)/2), which loses digits as c nears 1, hence its looser tolerance.
    assert s.two_sided_z(confidence) == pytest.approx(stats.norm.isf((1 - confidence) / 2), rel=1e-14)
    assert s.two_sided_z(confidence) == pytest.approx(stats.norm.interval(confidence)[1], rel=1e-10)


def test_kelley_true_score():
    # Kelley (1947): T = r*x + (1 - r)*mean. IQ 130, mean 100, r .90 -> 127 (from memory, common textbook example).
    assert call("TRUE_SCORE", 130, 100, 0.9) == pytest.approx(127.0, rel=1e-14)
    assert call("TRUE_SCORE", 70, 100, 0.9) == pytest.approx(73.0, rel=1e-14)


def test_true_score_interval_uses_standard_error_of_estimation():
    # Lord & Novick (1968), sec. 3.8: SE of estimation = sd * sqrt(r (1 - r)); centred on Kelley's estimate.
    see = 15 * math.sqrt(0.9 * 0.1)
    z = stats.norm.ppf(0.975)
    assert call("TRUE_SCORE_CI", 130, 100, 15, 0.9, "lower") == pytest.approx(127 - z * see, rel=1e-14)
    assert call("TRUE_SCORE_CI", 130, 100, 15, 0.9, "upper") == pytest.approx(127 + z * see, rel=1e-14)


def test_band_width_and_differences():
    # Cascio et al. (1991): band width = 1.96 * SED; SD 10, r .90 -> SED 4.47, width 8.77 (worked by hand).
    width = stats.norm.ppf(0.975) * 10 * math.sqrt(2 * 0.1)
    assert call("BAND_WIDTH", 10, 0.9) == pytest.approx(width, rel=1e-14)
    assert call("SCORES_DIFFER", 100, 100 - width + 1e-9, 10, 0.9) is False
    assert call("SCORES_DIFFER", 100, 100 - width - 1e-9, 10, 0.9) is True


def test_score_band_fixed_bands_from_the_top():
    # Fixed bands of Cascio et al. (1991), worked by hand: width 8.765 (SD 10, r .90).
    scores = [100, 95, 91.3, 91, 85, 82.3, 82, 70, None]
    bands = [call("SCORE_BAND", x, scores, 10, 0.9) for x in scores[:-1]]
    # band 1: 100..91.235 ; band 2 starts at 91: 91..82.235 ; band 3 starts at 82: 82..73.2 ; band 4: 70
    assert bands == [1, 1, 1, 2, 2, 2, 3, 4]


def test_score_band_column_matches_single_calls():
    from trueband.funcs.registry import call_column
    rng = np.random.default_rng(7)
    pool = np.round(rng.normal(50, 10, 400), 1).tolist()
    many = call_column("SCORE_BAND", {"score": pool}, {"scores": pool, "sd": 10, "reliability": 0.8})
    assert many == [call("SCORE_BAND", x, pool, 10, 0.8) for x in pool]


# ---------------------------------------------------------------- norms

@pytest.mark.parametrize("data", [
    [1, 2, 3, 4],
    [5, 5, 5, 6, 7, 7, 9, 10, 10, 10],
    list(np.random.default_rng(3).integers(0, 30, 200)),
])
def test_percentile_rank_against_scipy(data):
    # Reference library: scipy.stats.percentileofscore(kind="mean") is 100 (below + equal/2) / N.
    for x in sorted(set(data)) + [min(data) - 1, max(data) + 1, 4.5]:
        assert call("PERCENTILE_RANK", x, [[d] for d in data]) == pytest.approx(
            stats.percentileofscore(data, x, kind="mean"), rel=1e-13)


@pytest.mark.slow  # seconds: the whole suite runs it, the quick loop leaves it out
def test_stanine_distribution_is_4_7_12_17_20_17_12_7_4():
    # Angoff (1971): stanines 1..9 hold 4, 7, 12, 17, 20, 17, 12, 7, 4 percent of a distribution.
    data = list(range(1, 1001))
    counts = np.bincount([call("STANINE", x, data) for x in data], minlength=10)[1:]
    assert counts.tolist() == [40, 70, 120, 170, 200, 170, 120, 70, 40]


def test_t_score_and_sten():
    # T = 50 + 10 z (McCall 1939); sten = 5.5 + 2 z in half-SD bands (Canfield 1951).
    assert call("T_SCORE", 85, 100, 15) == pytest.approx(40.0)
    assert [call("STEN", z, 0, 1) for z in (-2.01, -2.0, -1.6, -0.5, -0.01, 0, 0.5, 1.99, 2.0, 5)] == \
        [1, 2, 2, 5, 5, 6, 7, 9, 10, 10]


# ---------------------------------------------------------------- errors

def test_errors_name_the_argument():
    with raises_code("#NUM!", "reliability", match="between 0 and 1, got 1.3"):
        call("SEM", 15, 1.3)
    with raises_code("#NUM!", "sd"):
        call("SEM", -1, 0.5)
    with raises_code("#VALUE!", "sd", match="text"):
        call("SEM", "fifteen", 0.5)
    with raises_code("#VALUE!", "part"):
        call("SCORE_CI", 100, 15, 0.9, 3)
    # (common practice: spreadsheet apps answer bad text with #VALUE!)
    with raises_code("#VALUE!", "part", match='"lower", "upper"'):
        call("SCORE_CI", 100, 15, 0.9, "middle")
    with raises_code("#NUM!", "confidence"):
        call("BAND_WIDTH", 10, 0.9, 1.0)
    with raises_code("#NUM!", "sd"):
        call("T_SCORE", 1, 0, 0)
    with raises_code("#N/A", "scores"):
        call("SCORE_BAND", 1, [None, None], 10, 0.9)
    with raises_code("#VALUE!", "scores", match="row 2, column 1"):
        call("PERCENTILE_RANK", 1, [[1], ["n/a"], [3]])
    with raises_code("#VALUE!", "scores", match="single row or column"):
        call("STANINE", 1, [[1, 2], [3, 4]])


def test_part_is_case_insensitive_and_blank_optional_takes_default():
    assert call("SCORE_CI", 100, 15, 0.91, " Upper ") == call("SCORE_CI", 100, 15, 0.91, "upper", None)
