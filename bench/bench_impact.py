"""Time the pooled adverse-impact functions over many strata, and the per-cut interval path, against references.

    python bench/bench_impact.py                 # 1,000 strata of 20-120 applicants; 2,000 cuts
    python bench/bench_impact.py --strata 5000 --repeat 5

Pooled: POOLED_IMPACT_P, POOLED_ODDS_RATIO (estimate and a limit), POOLED_HOMOGENEITY_P and
POOLED_EXACT_P through the registry, from nested Python lists as a workbook range arrives, against
statsmodels' ``StratifiedTable`` (built from a numpy array, its CMH test, pooled odds ratio with its
interval and Breslow-Day test) on the same strata; the exact conditional test has no reference
library here (tests/test_pooled.py and tests/test_pooled_exact_tail.py check it). Target (issue 17):
each pooled function well under 0.1 s over 1,000 strata, the exact conditional test also when the
observed total lies far in a tail (printed for the focal selections scaled by 0.9 and 0.7).

Per cut: the log-method limits of the impact ratio for every cut at once
(``impact_ratio_limits`` on arrays) against ``scipy.stats.contingency.relative_risk`` called per cut.
Printed as times and ratios reference / trueband (above 1: trueband faster), with the largest
difference; no thresholds: the numbers are for reading.
"""

from __future__ import annotations

import argparse

import numpy as np
from scipy.stats.contingency import relative_risk
from statsmodels.stats.contingency_tables import StratifiedTable

from trueband.funcs import call
from trueband.funcs.impact_intervals import impact_ratio_limits
from _timing import best_time  # bench/ is on sys.path when a script here runs


def make_strata(k: int, seed: int) -> list[list[int]]:
    rng = np.random.default_rng(seed)
    fa = rng.integers(20, 121, k)
    ra = rng.integers(20, 121, k)
    rate = rng.uniform(0.2, 0.7, k)
    fs = rng.binomial(fa, rate * 0.85)
    rs = rng.binomial(ra, rate)
    return np.column_stack([fs, fa, rs, ra]).tolist()


def statsmodels_all(rows: np.ndarray):
    t = np.empty((2, 2, len(rows)))
    t[0, 0], t[0, 1] = rows[:, 0], rows[:, 1] - rows[:, 0]
    t[1, 0], t[1, 1] = rows[:, 2], rows[:, 3] - rows[:, 2]
    st = StratifiedTable(t)
    return (st.test_null_odds(correction=True).pvalue, st.oddsratio_pooled, st.oddsratio_pooled_confint()[0],
            st.test_equal_odds(adjust=True).pvalue)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--strata", type=int, default=1000)
    parser.add_argument("--cuts", type=int, default=2000)
    parser.add_argument("--repeat", type=int, default=5)
    args = parser.parse_args()

    rows = make_strata(args.strata, seed=1)
    array = np.asarray(rows, dtype=float)
    print(f"Pooled over {args.strata:,} strata of 40-240 applicants (a range of nested lists, through the registry)")
    ours = {}
    for label, name, extra in (("CMH p", "POOLED_IMPACT_P", ()), ("MH odds ratio", "POOLED_ODDS_RATIO", ()),
                               ("MH lower limit", "POOLED_ODDS_RATIO", ("lower",)),
                               ("Breslow-Day p", "POOLED_HOMOGENEITY_P", ()), ("exact p", "POOLED_EXACT_P", ())):
        t, ours[label] = best_time(lambda: call(name, rows, *extra), args.repeat)
        print(f"  {label:15s} {t * 1e3:8.2f} ms")
    for factor in (0.9, 0.7):  # the focal selections scaled down: the observed total far in a tail
        tail = array.copy()
        tail[:, 0] = np.round(tail[:, 0] * factor)
        tail_rows = tail.astype(int).tolist()
        t, p = best_time(lambda: call("POOLED_EXACT_P", tail_rows), args.repeat)
        print(f"  exact p, focal selections x {factor}: {t * 1e3:8.2f} ms (p = {p:.3g})")
    t_ref, ref = best_time(lambda: statsmodels_all(array), args.repeat)
    worst = max(abs(a - b) for a, b in zip(ref, (ours["CMH p"], ours["MH odds ratio"], ours["MH lower limit"],
                                                 ours["Breslow-Day p"])))
    print(f"  statsmodels StratifiedTable, the four figures it has, from a numpy array: {t_ref * 1e3:.2f} ms; "
          f"max |difference| {worst:.2e}")

    rng = np.random.default_rng(2)
    fa, ra = 4 * args.cuts, 6 * args.cuts
    fs = np.sort(rng.integers(1, fa, args.cuts))
    rs = np.clip((fs * 1.3 * ra / fa).astype(int), 1, ra - 1)
    t_ours, (low, high) = best_time(lambda: impact_ratio_limits(fs, fa, rs, ra), args.repeat)

    def per_cut():
        out = [relative_risk(int(a), fa, int(c), ra).confidence_interval() for a, c in zip(fs, rs)]
        return np.array([o.low for o in out]), np.array([o.high for o in out])

    t_ref, (ref_low, ref_high) = best_time(per_cut, max(1, args.repeat // 2))
    diff = max(np.max(np.abs(low - ref_low)), np.max(np.abs(high - ref_high)))
    print(f"Impact ratio limits at {args.cuts:,} cuts: trueband arrays {t_ours * 1e3:.2f} ms   scipy per cut "
          f"{t_ref * 1e3:.2f} ms   scipy/trueband {t_ref / t_ours:.0f}x   max |difference| {diff:.2e}")


if __name__ == "__main__":
    main()
