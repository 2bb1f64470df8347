"""Time DIF for every item of a large 0/1 item matrix, against statsmodels on the same data, same run.

    python bench/bench_dif.py                     # 100,000 people x 60 items, 2 groups
    python bench/bench_dif.py --quick             # 10,000 x 60, for a quick look
    python bench/bench_dif.py --people 50000 --items 40 --repeat 5

Prints the best of ``--repeat`` wall times for trueband's all-items functions (numpy arrays in, as the
study would pass them): the Mantel-Haenszel statistics (mantel_haenszel_dif), the logistic-regression
DIF (logistic_dif), and both from one tabulation (item_dif), the target of issue 18 (under 2 s for
100,000 x 60).
The references, timed on ``--ref-items`` items and scaled to all of them: statsmodels' StratifiedTable
(its tables built with numpy from the same data) for MH, and three statsmodels Logit fits per item on
one row per person for the logistic DIF. The last column is the largest difference of the statistic
over the reference items. No thresholds: the numbers are for reading.
"""

from __future__ import annotations

import argparse

import numpy as np
import statsmodels.api as sm
from statsmodels.stats.contingency_tables import StratifiedTable

from trueband.funcs.dif import item_dif, logistic_dif, mantel_haenszel_dif
from _timing import best_time  # bench/ is on sys.path when a script here runs


def simulate(n: int, k: int, seed: int):
    rng = np.random.default_rng(seed)
    focal = rng.random(n) < 0.3
    theta = rng.normal(size=n) - 0.4 * focal
    logit = 1.2 * (theta[:, None] - np.linspace(-2, 2, k))
    logit[:, : k // 10] -= 0.5 * focal[:, None]  # a tenth of the items harder for the focal group
    items = (rng.random((n, k)) < 1 / (1 + np.exp(-logit))).astype(np.float64)
    return items, np.where(focal, "focal", "reference").astype(object)


def statsmodels_mh(items, focal, columns):
    total = items.sum(axis=1).astype(int)
    out = []
    for j in columns:
        tables = []
        for s in np.unique(total):
            at = total == s
            ref, foc = at & ~focal, at & focal
            a, c = items[ref, j].sum(), items[foc, j].sum()
            table = np.array([[a, ref.sum() - a], [c, foc.sum() - c]])
            if table.sum() >= 2:
                tables.append(table)
        out.append(StratifiedTable(tables).test_null_odds(correction=True).statistic)
    return out


def statsmodels_lr(items, focal, columns):
    total = items.sum(axis=1)
    g = focal.astype(float)
    out = []
    for j in columns:
        lls = [sm.Logit(items[:, j], sm.add_constant(np.column_stack(cols))).fit(disp=0).llf
               for cols in ([total], [total, g, total * g])]
        out.append(2 * (lls[1] - lls[0]))
    return out


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--people", type=int, default=100_000)
    parser.add_argument("--items", type=int, default=60)
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--ref-items", type=int, default=3, help="items the slow references are timed on")
    parser.add_argument("--quick", action="store_true", help="10,000 people (unless --people is given)")
    args = parser.parse_args(argv)
    n = 10_000 if args.quick and args.people == 100_000 else args.people
    k = args.items
    items, groups = simulate(n, k, seed=1)
    focal = groups == "focal"
    columns = list(range(min(args.ref_items, k)))
    scale = k / len(columns)

    t_mh, mh = best_time(lambda: mantel_haenszel_dif(items, groups, "focal", "reference"), args.repeat)
    t_lr, lr = best_time(lambda: logistic_dif(items, groups, "focal", "reference"), args.repeat)
    t_both, _ = best_time(lambda: item_dif(items, groups, "focal", "reference"), args.repeat)
    t_ref_mh, ref_mh = best_time(lambda: statsmodels_mh(items, focal, columns), 1)
    t_ref_lr, ref_lr = best_time(lambda: statsmodels_lr(items, focal, columns), 1)
    diff_mh = max(abs(mh[j].chi_square - ref_mh[i]) for i, j in enumerate(columns))
    diff_lr = max(abs(lr[j].chi_square - ref_lr[i]) for i, j in enumerate(columns))

    print(f"DIF: {n:,} people x {k} items, 2 groups ({int(focal.sum()):,} focal); best of {args.repeat}")
    print(f"{'trueband (all items)':<28}{'seconds':>9}   {'reference (scaled to all items)':<36}{'seconds':>9}"
          f"{'ratio':>8}   agree")
    print(f"{'mantel_haenszel_dif':<28}{t_mh:>9.3f}   {'statsmodels StratifiedTable':<36}{t_ref_mh * scale:>9.3f}"
          f"{t_mh / (t_ref_mh * scale):>8.3f}   |chi2 diff| {diff_mh:.1e}")
    print(f"{'logistic_dif':<28}{t_lr:>9.3f}   {'statsmodels Logit, one row a person':<36}{t_ref_lr * scale:>9.3f}"
          f"{t_lr / (t_ref_lr * scale):>8.3f}   |chi2 diff| {diff_lr:.1e}")
    print(f"{'item_dif: both, one table':<28}{t_both:>9.3f}   (issue 18 target: under 2 s at 100,000 x 60)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
