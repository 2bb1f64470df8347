"""Time the item-data functions on a large item matrix against reference libraries, same data, same run.

    python bench/bench_items.py                   # 100,000 people x 60 items
    python bench/bench_items.py --quick           # 10,000 x 60, for a quick look
    python bench/bench_items.py --people 50000 --items 40 --repeat 5

Each line prints the best of ``--repeat`` wall times for trueband (called through the
registry, as a workbook or the HTTP bridge would, with a numpy array as the range), the
reference computation of the same number, and the ratio trueband / reference (below 1 means
trueband is faster). References: pingouin.cronbach_alpha (alpha, its Feldt interval, KR-20 on
0/1 items, alpha if deleted), pandas (corrected item-total and split-half correlations,
item means) and statsmodels' ML factor analysis (omega). ITEM_DIFFICULTY reads and checks the
whole range (listwise deletion needs every cell) where the pandas reference reads one column,
hence its large ratio. The last line times alpha on the same data given as nested Python lists
with a blank, as a spreadsheet range arrives, to show what parsing cells costs. No thresholds:
the numbers are for reading; on a busy machine they vary by a factor of two between runs.
"""

from __future__ import annotations

import argparse
import warnings

import numpy as np
import pandas as pd
import pingouin as pg
from statsmodels.multivariate.factor import Factor

from trueband.funcs import call
from _timing import best_time  # bench/ is on sys.path when a script here runs


def one_factor_items(n: int, k: int, seed: int, binary: bool) -> np.ndarray:
    rng = np.random.default_rng(seed)
    loadings = rng.uniform(0.3, 0.8, size=k)
    latent = rng.normal(size=(n, 1)) * loadings + rng.normal(size=(n, k)) * np.sqrt(1 - loadings ** 2)
    if binary:
        return (latent > rng.normal(scale=0.7, size=k)).astype(float)
    return np.clip(np.round(3 + 1.2 * latent), 1, 5)


def statsmodels_omega(x: np.ndarray) -> float:
    corr = np.corrcoef(x, rowvar=False)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        fit = Factor(corr=corr, n_factor=1, method="ml", nobs=len(x)).fit(rng=0)
    sd = x.std(axis=0, ddof=1)
    lam = fit.loadings.ravel() * sd
    return lam.sum() ** 2 / (lam.sum() ** 2 + (fit.uniqueness * sd ** 2).sum())


def main(argv=None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--people", type=int, default=100_000)
    parser.add_argument("--items", type=int, default=60)
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--quick", action="store_true", help="10,000 people (unless --people is given)")
    args = parser.parse_args(argv)
    n = 10_000 if args.quick and args.people == 100_000 else args.people
    k = args.items

    x = one_factor_items(n, k, seed=1, binary=False)
    b = one_factor_items(n, k, seed=2, binary=True)
    fx, fb = pd.DataFrame(x), pd.DataFrame(b)
    item = k // 2 + 1  # a middle item, 1-based
    col = item - 1
    odd, even = list(range(0, k, 2)), list(range(1, k, 2))

    cases = [
        ("CRONBACH_ALPHA", lambda: call("CRONBACH_ALPHA", x),
         "pingouin.cronbach_alpha", lambda: pg.cronbach_alpha(fx)[0]),
        ("ALPHA + ALPHA_CI x2", lambda: (call("CRONBACH_ALPHA", x), call("ALPHA_CI", 0.8, n, k, "lower"),
                                         call("ALPHA_CI", 0.8, n, k, "upper"))[0],
         "pingouin.cronbach_alpha (with CI)", lambda: pg.cronbach_alpha(fx)[0]),
        ("KR20 (0/1 items)", lambda: call("KR20", b),
         "pingouin.cronbach_alpha", lambda: pg.cronbach_alpha(fb)[0]),
        ("SPLIT_HALF odd-even", lambda: call("SPLIT_HALF", x),
         "pandas corr + step-up", lambda: (lambda r: 2 * r / (1 + r))(fx[odd].sum(axis=1).corr(fx[even].sum(axis=1)))),
        ("ITEM_DIFFICULTY", lambda: call("ITEM_DIFFICULTY", b, item),
         "pandas mean", lambda: fb[col].mean()),
        ("ITEM_TOTAL", lambda: call("ITEM_TOTAL", x, item),
         "pandas corr with rest", lambda: fx[col].corr(fx.drop(columns=col).sum(axis=1))),
        ("ALPHA_IF_DELETED", lambda: call("ALPHA_IF_DELETED", x, item),
         "pingouin.cronbach_alpha(drop)", lambda: pg.cronbach_alpha(fx.drop(columns=col))[0]),
        ("OMEGA", lambda: call("OMEGA", x),
         "statsmodels Factor(ml)", lambda: statsmodels_omega(x)),
    ]

    print(f"item matrix: {n:,} people x {k} items; best of {args.repeat}")
    print(f"{'trueband':<22}{'seconds':>10}   {'reference':<34}{'seconds':>10}{'ratio':>9}   agree")
    for name, ours, ref_name, ref in cases:
        t_ours, v_ours = best_time(ours, args.repeat)
        t_ref, v_ref = best_time(ref, args.repeat)
        agree = abs(float(v_ours) - float(v_ref))
        print(f"{name:<22}{t_ours:>10.4f}   {ref_name:<34}{t_ref:>10.4f}{t_ours / t_ref:>9.2f}   |diff| {agree:.1e}")

    cells = x.tolist()
    cells[0][0] = None  # one blank, so listwise deletion has work to do
    t_cells, _ = best_time(lambda: call("CRONBACH_ALPHA", cells), 1)
    t_ref, _ = best_time(lambda: pg.cronbach_alpha(pd.DataFrame(cells, dtype=float), nan_policy="listwise"), 1)
    print(f"{'ALPHA from cells':<22}{t_cells:>10.4f}   {'pingouin (DataFrame from cells)':<34}{t_ref:>10.4f}"
          f"{t_cells / t_ref:>9.2f}   (nested lists with one blank, as a range arrives)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
