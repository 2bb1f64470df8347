"""Standard-setting cut scores (Nedelsky, Ebel, Hofstee, Beuk, contrasting groups, borderline group).

Sources: the definitions in Nedelsky (1954), Ebel (1972, pp. 492-494), Hofstee (1983), Beuk (1984),
Livingston & Zieky (1982) and Berk (1976), as summarised in Cizek & Bunch (2007), chs. 5, 8 and 11.
No printed worked example with its data could be retrieved for any of them, so the checks are:
constructed cases whose answer follows from the definition by hand (said so beside each), numpy
(median, means) as a reference library, and for the crossing methods an independent brute-force
search over a fine grid of candidate cuts.

A search of the project's page and code corpora (Dec 2026) for openly published numerical worked examples of
Nedelsky, Ebel, Hofstee and Beuk found none with their data. It found Mills & Melican (1987), "A preliminary
investigation of three compromise methods for establishing cut-off scores", ETS Research Report RR-87-14
(ERIC ED 283 842), whose abstract describes the two compromise constructions tested here: Hofstee's line
through (maximum cut, minimum failure rate) and (minimum cut, maximum failure rate), and Beuk's line through
the judges' mean cut and mean pass rate with its slope set by the ratio of the two standard deviations. The
values asserted stay constructed, hand-checkable cases.
"""

import numpy as np
import pytest

from helpers import raises_code
from trueband.funcs import call


def test_nedelsky_by_hand():
    # constructed: judge 1 leaves 2 and 1 options (1/2 + 1), judge 2 leaves 4 and 2 (1/4 + 1/2); mean 1.125
    assert call("NEDELSKY_CUT", [[2, 4], [1, 2]]) == 1.125
    # one judge, forty four-option items with nothing struck out: chance score 10
    assert call("NEDELSKY_CUT", [[4]] * 40) == pytest.approx(10.0, rel=1e-15)
    # padding rows and columns are ignored, as in the Angoff functions
    assert call("NEDELSKY_CUT", [[2, 4, None], [1, 2, None], [None, None, None]]) == 1.125
    with raises_code("#N/A", "options_left"):
        call("NEDELSKY_CUT", [[2, None], [1, 2]])
    with raises_code("#NUM!", "options_left"):
        call("NEDELSKY_CUT", [[0, 2]])
    with raises_code("#NUM!", "options_left"):
        call("NEDELSKY_CUT", [[2.5, 2]])


def test_ebel_by_hand():
    # constructed 2 x 3 grid (relevance by difficulty): Σ n·p
    counts = [[5, 10, 3], [8, 0, 4]]
    p = [[0.9, 0.7, 0.5], [0.8, None, 0.4]]
    assert call("EBEL_CUT", counts, p) == pytest.approx(5 * .9 + 10 * .7 + 3 * .5 + 8 * .8 + 4 * .4, rel=1e-14)
    with raises_code("#N/A", "judged_p"):
        call("EBEL_CUT", [[5, 2]], [[0.9, None]])
    with raises_code("#NUM!", "judged_p"):
        call("EBEL_CUT", [[5]], [[70]])
    with raises_code("#VALUE!", "judged_p"):
        call("EBEL_CUT", [[5, 2]], [[0.9]])
    with raises_code("#N/A", "counts"):
        call("EBEL_CUT", [[0, None]], [[0.9, 0.5]])


def brute_force_crossing(scores, line, lo, hi, steps=200001):
    """The first grid point where the fail rate #(x < k)/n reaches the line: an independent search."""
    x = np.asarray(scores, dtype=float)
    grid = np.linspace(lo, hi, steps)
    fail = (x[None, :] < grid[:, None]).mean(axis=1)
    hit = np.flatnonzero(fail >= line(grid))
    return grid[hit[0]]


@pytest.mark.parametrize("seed", [3, 4, 5, 6])
def test_hofstee_against_brute_force(seed):
    rng = np.random.default_rng(seed)
    scores = rng.binomial(50, 0.65, 300)
    k_min, k_max, f_min, f_max = 28.0, 36.0, 0.10, 0.45
    line = lambda k: f_max - (f_max - f_min) * (k - k_min) / (k_max - k_min)  # noqa: E731
    want = brute_force_crossing(scores, line, k_min, k_max)
    assert call("HOFSTEE_CUT", scores.tolist(), k_min, k_max, f_min, f_max) == pytest.approx(want, abs=1e-4)


def test_hofstee_by_hand_and_refusals():
    # constructed: scores 1..10, line from (3, 0.6) to (7, 0.2) meets the step F = 0.4 at k = 5
    assert call("HOFSTEE_CUT", list(range(1, 11)), 3, 7, 0.2, 0.6) == pytest.approx(5.0, abs=1e-12)
    with raises_code("#NUM!", "f_max"):  # half fail already at the lowest acceptable cut
        call("HOFSTEE_CUT", list(range(1, 11)), 6, 8, 0.1, 0.3)
    with raises_code("#NUM!", "f_min"):  # too few fail even at the highest acceptable cut
        call("HOFSTEE_CUT", list(range(1, 11)), 1, 2, 0.5, 0.9)
    with raises_code("#NUM!", "k_max"):
        call("HOFSTEE_CUT", list(range(1, 11)), 5, 5, 0.1, 0.3)
    with raises_code("#NUM!", "f_max"):
        call("HOFSTEE_CUT", list(range(1, 11)), 3, 7, 0.3, 0.3)


@pytest.mark.parametrize("seed", [7, 8, 9])
def test_beuk_against_brute_force(seed):
    rng = np.random.default_rng(seed)
    scores = rng.binomial(40, 0.6, 250)
    cuts = np.array([22.0, 25.0, 27.0, 24.0, 26.0])
    rates = np.array([0.70, 0.55, 0.50, 0.65, 0.60])
    slope = np.std(rates, ddof=1) / np.std(cuts, ddof=1)  # Beuk (1984): the ratio of the judges' SDs
    line = lambda k: (1 - rates.mean()) - slope * (k - cuts.mean())  # noqa: E731  (fail-rate scale)
    want = brute_force_crossing(scores, line, 0, 40, 400001)
    assert call("BEUK_CUT", scores.tolist(), cuts.tolist(), rates.tolist()) == pytest.approx(want, abs=2e-4)


def test_beuk_by_hand_and_special_cases():
    # constructed: means (7, 0.5), slope 0.1; the line passes through the jump of the pass-rate curve at 6
    assert call("BEUK_CUT", list(range(1, 11)), [6, 8], [0.6, 0.4]) == 6.0
    # judges agreeing on the cut: the line is vertical at their cut (definition)
    assert call("BEUK_CUT", list(range(1, 11)), [7, 7, 7], [0.3, 0.6, 0.5]) == 7.0
    with raises_code("#N/A", "judged_pass_rates"):
        call("BEUK_CUT", list(range(1, 11)), [6, 8], [0.6, None])
    with raises_code("#NUM!", "judged_pass_rates"):
        call("BEUK_CUT", list(range(1, 11)), [6, 8], [60, 40])
    with raises_code("#N/A", "judged_cuts"):
        call("BEUK_CUT", list(range(1, 11)), [6], [0.6])


def misclassified(scores, qualified, cut):
    s, q = np.asarray(scores, float), np.asarray(qualified, bool)
    return int(np.sum(~q & (s >= cut)) + np.sum(q & (s < cut)))


@pytest.mark.parametrize("seed", [10, 11, 12])
def test_contrasting_groups_minimises_misclassification(seed):
    rng = np.random.default_rng(seed)
    qualified = rng.random(120) < 0.5
    scores = np.round(rng.normal(np.where(qualified, 30, 24), 4))
    got = call("CONTRASTING_GROUPS_CUT", scores.tolist(), qualified.tolist())
    counts = {c: misclassified(scores, qualified, c) for c in np.unique(scores)}
    best = min(counts.values())
    assert counts[got] == best and got == min(c for c, n in counts.items() if n == best)  # the lowest of ties
    # the midpoint rule against numpy's means
    assert call("CONTRASTING_GROUPS_CUT", scores.tolist(), qualified.tolist(), "midpoint") == pytest.approx(
        (scores[qualified].mean() + scores[~qualified].mean()) / 2, rel=1e-14)


def test_contrasting_groups_flags_and_refusals():
    # TRUE/FALSE, 1/0 and the words are all read as judgments; blanks leave the candidate out
    scores = [3, 4, 5, 6, 7, 8, 9]
    assert call("CONTRASTING_GROUPS_CUT", scores, [False, False, True, False, True, True, None]) == 5.0
    assert call("CONTRASTING_GROUPS_CUT", scores, ["FALSE", 0, 1, 0, "TRUE", 1, ""]) == 5.0
    with raises_code("#N/A", "qualified"):
        call("CONTRASTING_GROUPS_CUT", scores, [1] * 7)
    with raises_code("#VALUE!", "qualified"):
        call("CONTRASTING_GROUPS_CUT", scores, [1, 0, 2, 0, 1, 1, 0])
    with raises_code("#VALUE!", "qualified"):
        call("CONTRASTING_GROUPS_CUT", scores, [1, 0])


def test_borderline_is_the_median_of_the_borderline_group():
    rng = np.random.default_rng(13)
    scores = rng.integers(10, 40, 60).astype(float)
    flags = rng.random(60) < 0.3
    assert call("BORDERLINE_CUT", scores.tolist(), flags.tolist()) == float(np.median(scores[flags]))  # numpy
    assert call("BORDERLINE_CUT", [10, 12, 15, 18, 20], [0, 1, 1, 1, 0]) == 15.0
    with raises_code("#N/A", "borderline"):
        call("BORDERLINE_CUT", [10, 12], [0, 0])
