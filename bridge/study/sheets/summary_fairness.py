"""The Summary's lines on fairness and item bias, per demographic column.

For each demographic column the study compares groups on, and each predictor: the reading of each focal
group's step-down tests of differential prediction (its Fairness sheet: "slopes differ", "intercepts differ"
or "no difference detected at this sample size: this does not show the absence of bias"), and the counts of
items whose worst DIF category over the column's focal groups is C and B (its DIF sheet). Each line is a link
to the cell of the sheet that computes it, or says why it is not computable (too few people in the groups).
The rows take the Summary's own form (:func:`.summary.write` lays them out).
"""

from __future__ import annotations

__all__ = ["fairness_rows"]


def fairness_rows(bias) -> list[tuple]:
    """The Summary rows ``(label, key, figure, style, extra)``; ``bias``: ``(predictor, Fairness, Dif)`` per
    predictor, in order (:func:`..build.plan`)."""
    headers: list[str] = []
    for _, fairness, dif in bias:
        for column in (*fairness.columns, *dif.columns):
            if column.header not in headers:
                headers.append(column.header)
    rows: list[tuple] = []
    for header in headers:
        rows.append((f"Do the predictions and the items work alike for the groups of {header!r}? (statistical "
                     f"indicators, not legal findings)", None, None, "", None))
        for predictor, fairness, dif in bias:
            column = next((c for c in fairness.columns if c.header == header), None)
            if column is not None:
                rows += _fairness(predictor, column)
            column = next((c for c in dif.columns if c.header == header), None)
            if column is not None:
                rows += _dif(predictor, column)
    return rows


def _fairness(predictor, column) -> list[tuple]:
    sheet, key = predictor.title("Fairness"), f"{predictor.key_prefix}fairness_{column.key}"
    if column.reason is not None:
        return [(f"{predictor.name}: differential prediction by {column.header!r} ({sheet} sheet)",
                 key.rstrip("_"), column.reason, None, None)]
    return [(f"{predictor.name}: {name} compared with {column.reference}, differential prediction ({sheet} sheet)",
             f"{key}reading_{name}", reading, None, None) for name, reading in column.readings.items()]


def _dif(predictor, column) -> list[tuple]:
    sheet, key = predictor.title("DIF"), f"{predictor.key_prefix}dif_{column.key}"
    if column.reason is not None:
        return [(f"{predictor.name}: item bias (DIF) by {column.header!r} ({sheet} sheet)", key.rstrip("_"),
                 column.reason, None, None)]
    if column.count_c is None:
        return []
    return [(f"{predictor.name}: items in DIF category C by {column.header!r}, for content review ({sheet} sheet)",
             f"{key}count_c", column.count_c, "count", None),
            (f"{predictor.name}: items in DIF category B by {column.header!r} ({sheet} sheet)", f"{key}count_b",
             column.count_b, "count", None)]
