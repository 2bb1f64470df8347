"""The Setup sheet's predictor block in the data workbook templates (see :mod:`.setup_predictors`).

The demo's data workbook names its second predictor, the Work Style Questionnaire, in a block below the
study's settings; the blank template says how to add one.
"""

from __future__ import annotations

from .demo import DemoData
from .demo_predictors import QUESTIONNAIRE_ITEMS, QUESTIONNAIRE_NAME, QUESTIONNAIRE_REVERSED
from .setup_predictors import PREDICTOR_SETTING

__all__ = ["write_block", "HOW_TO"]

#: What the templates say about further predictors.
HOW_TO = ("To study a further predictor (a questionnaire, a work sample...), add a row 'predictor | its name' "
          "right below the settings, then its own rows: item columns, reverse keyed items, item scale minimum "
          "and maximum, total column, retest column, cut score. They belong to that predictor only. A panel "
          "of ratings with no total (an interview rated by 2 to 4 raters) is a predictor too: give only its "
          "'rating columns' (and its cut score); its score is each person's mean rating, its reliability the "
          "ICC of the raters' mean.")


def write_block(st, row: int, demo: DemoData | None, fill) -> int:
    """Write the demo's questionnaire block from ``row`` (no block without ``demo``); returns the rows used.
    ``fill``: the input cells' fill."""
    if demo is None or demo.questionnaire is None:
        return 0
    rows = [(PREDICTOR_SETTING, QUESTIONNAIRE_NAME, "starts a further predictor: the rows below belong to it"),
            ("item columns", f"{QUESTIONNAIRE_ITEMS[0]}:{QUESTIONNAIRE_ITEMS[-1]}", "the questionnaire's statements"),
            ("reverse keyed items", ", ".join(QUESTIONNAIRE_REVERSED), "statements worded the other way round"),
            ("item scale minimum", 1, "lowest response"),
            ("item scale maximum", 5, "highest response"),
            ("cut score", 40, "the questionnaire's own cut (no retest column: nobody retook it)")]
    for k, (key, value, meaning) in enumerate(rows):
        st.cell(row + k, 1, key)
        st.cell(row + k, 2, value).fill = fill
        st.cell(row + k, 3, meaning)
    return len(rows)
