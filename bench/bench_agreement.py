"""Time the rater-agreement functions against reference libraries, same data, same run.

    python bench/bench_agreement.py               # ICC 20,000 people x 8 raters; alpha 2,000 units x 10 raters
    python bench/bench_agreement.py --quick       # ICC 2,000 x 8; alpha 300 x 10
    python bench/bench_agreement.py --people 50000 --raters 6 --units 5000 --repeat 5

ICC: all six forms (estimate, F, p and both 95% limits) from trueband's
``intraclass_correlations`` (numpy mean squares of the n x k matrix, one pass), against
``pingouin.intraclass_corr`` (long-format two-way ANOVA) on the same ratings;
printed as times, the ratio reference / trueband (above 1 means trueband is
faster) and the largest absolute difference over every number both report.
One form through the registry (``call("ICC", ...)``, one part, as a workbook
cell asks for it), the six forms as six separate calls, and one form from nested Python lists
(what parsing the cells of a range costs) are shown too.

Krippendorff's alpha: trueband's ``KRIPPENDORFF_ALPHA`` at each level against
``krippendorff.alpha`` (which takes raters x units: the data are transposed
for it), ratings 1-7 with about 20% missing. No thresholds: the numbers are
for reading.
"""

from __future__ import annotations

import argparse
import warnings

import krippendorff
import numpy as np
import pandas as pd
import pingouin as pg

from trueband.funcs import agreement as ag
from trueband.funcs import call
from _timing import best_time  # bench/ is on sys.path when a script here runs

FORMS = [  # (model, unit, pingouin's label)
    ("oneway", "single", "ICC(1,1)"), ("agreement", "single", "ICC(A,1)"), ("consistency", "single", "ICC(C,1)"),
    ("oneway", "average", "ICC(1,k)"), ("agreement", "average", "ICC(A,k)"), ("consistency", "average", "ICC(C,k)"),
]


def ratings(n: int, k: int, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    return rng.normal(0, 1, (n, 1)) + rng.normal(0, 0.4, (1, k)) + rng.normal(0, 0.9, (n, k))


def trueband_icc_all(x: np.ndarray) -> dict:
    """All six forms in pingouin's labels, from one pass (intraclass_correlations)."""
    table = ag.intraclass_correlations(x)
    ours = {"ICC(1,1)": "ICC(1,1)", "ICC(A,1)": "ICC(2,1)", "ICC(C,1)": "ICC(3,1)",
            "ICC(1,k)": "ICC(1,k)", "ICC(A,k)": "ICC(2,k)", "ICC(C,k)": "ICC(3,k)"}
    return {label: table[key] for label, key in ours.items()}


def pingouin_icc_all(x: np.ndarray) -> pd.DataFrame:
    n, k = x.shape
    long = pd.DataFrame({"target": np.repeat(np.arange(n), k), "rater": np.tile(np.arange(k), n),
                         "score": x.ravel()})
    return pg.intraclass_corr(long, "target", "rater", "score").set_index("Type")


def max_difference(ours: dict, reference: pd.DataFrame) -> float:
    worst = 0.0
    for form, r in ours.items():
        row = reference.loc[form]
        pairs = [(r.estimate, row["ICC"]), (r.F, row["F"]), (r.p, row["pval"]),
                 (r.lower, row["CI95"][0]), (r.upper, row["CI95"][1])]
        worst = max(worst, max(abs(a - b) for a, b in pairs))
    return worst


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="smaller data for a quick look")
    parser.add_argument("--people", type=int, default=None)
    parser.add_argument("--raters", type=int, default=8)
    parser.add_argument("--units", type=int, default=None)
    parser.add_argument("--unit-raters", type=int, default=10)
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()
    people = args.people or (2_000 if args.quick else 20_000)
    units = args.units or (300 if args.quick else 2_000)

    pg.options["round"] = None
    pg.options["round.column.CI95"] = None
    warnings.simplefilter("ignore")  # pingouin's pandas deprecation notices

    x = ratings(people, args.raters, seed=1)
    t_ours, ours = best_time(lambda: trueband_icc_all(x), args.repeat)
    t_ref, ref = best_time(lambda: pingouin_icc_all(x), args.repeat)
    t_one, _ = best_time(lambda: call("ICC", x, "agreement", "single", "lower"), args.repeat)
    t_six, _ = best_time(lambda: [ag.intraclass_correlation(x, model=m, unit=u) for m, u, _ in FORMS], args.repeat)
    print(f"ICC, {people:,} people x {args.raters} raters, all six forms with F, p and 95% limits")
    print(f"  trueband {t_ours * 1e3:9.2f} ms   pingouin {t_ref * 1e3:9.2f} ms   "
          f"pingouin/trueband {t_ref / t_ours:7.1f}x   max |difference| {max_difference(ours, ref):.2e}")
    print(f"  one part through the registry, call('ICC', ...): {t_one * 1e3:.2f} ms "
          f"(pingouin/trueband {t_ref / t_one:.1f}x)")
    print(f"  six separate intraclass_correlation calls: {t_six * 1e3:.2f} ms (pingouin/trueband {t_ref / t_six:.1f}x)")
    cells = x.tolist()
    t_cells, _ = best_time(lambda: call("ICC", cells, "agreement", "single", "lower"), args.repeat)
    print(f"  one part from nested Python lists (cells as a workbook range arrives): {t_cells * 1e3:.2f} ms "
          f"(pingouin/trueband {t_ref / t_cells:.1f}x)")

    rng = np.random.default_rng(2)
    truth = rng.integers(1, 8, (units, 1))
    y = np.clip(truth + rng.integers(-2, 3, (units, args.unit_raters)), 1, 7).astype(float)
    y[rng.random(y.shape) < 0.2] = np.nan
    print(f"Krippendorff's alpha, {units:,} units x {args.unit_raters} raters, ratings 1-7, ~20% missing")
    for level in ("nominal", "ordinal", "interval", "ratio"):
        t_ours, a_ours = best_time(lambda: call("KRIPPENDORFF_ALPHA", y, level), args.repeat)
        t_ref, a_ref = best_time(lambda: krippendorff.alpha(y.T, level_of_measurement=level), args.repeat)
        print(f"  {level:9s} trueband {t_ours * 1e3:8.2f} ms   krippendorff {t_ref * 1e3:8.2f} ms   "
              f"krippendorff/trueband {t_ref / t_ours:6.1f}x   |difference| {abs(a_ours - a_ref):.2e}")


if __name__ == "__main__":
    main()
