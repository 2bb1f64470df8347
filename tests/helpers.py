"""Helpers shared by the tests."""

from __future__ import annotations

import contextlib

import pytest

from trueband.funcs.errors import TruebandError


@contextlib.contextmanager
def raises_code(code: str, argument: str | None = None, match: str | None = None):
    """Expect a project error with this spreadsheet code (and argument name, and message pattern)."""
    with pytest.raises(TruebandError, match=match) as info:
        yield info
    assert info.value.code == code, f"expected {code}, got {info.value.code}: {info.value}"
    if argument is not None:
        assert info.value.argument == argument, f"expected argument {argument!r}, got {info.value.argument!r}"
        assert argument in info.value.message, f"message does not name {argument!r}: {info.value.message}"


def stratified_by_total(items, focal, j):
    """statsmodels' ``StratifiedTable`` of item ``j`` (0-based column of ``items``), one 2x2 table per total score.

    Each table is [[A, B], [C, D]]: reference keyed/other, focal keyed/other (Holland & Thayer 1988's layout);
    tables of fewer than 2 people are left out (they add nothing to the Mantel–Haenszel sums)."""
    import numpy as np
    from statsmodels.stats.contingency_tables import StratifiedTable

    total = items.sum(axis=1)
    tables = []
    for s in np.unique(total):
        at = total == s
        ref, foc = at & ~focal, at & focal
        a, c = items[ref, j].sum(), items[foc, j].sum()
        table = np.array([[a, ref.sum() - a], [c, foc.sum() - c]])
        if table.sum() >= 2:
            tables.append(table)
    return StratifiedTable(tables)
