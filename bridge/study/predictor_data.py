"""The further predictors' data: each predictor's columns read and checked as the first predictor's are.

Each further predictor (a block of the Setup sheet, see :mod:`.setup_predictors`) becomes a
:class:`.setup.StudyData` of its own: its items, total, ratings and retest column, its item scale and
reverse keys, its cut; the people, their ids, groups, criterion and hired flags are the study's. Its
problems and notes join the study's, the notes headed by the predictor's name. A column may have one role
in the whole study: a questionnaire's item cannot be the test's retest column.
"""

from __future__ import annotations

import dataclasses

from .data_checks import check_data
from .setup import SetupError, StudyData
from .setup_predictors import full_setup

__all__ = ["further_predictors", "columns_used"]

#: The roles that are the study's, not a predictor's (the predictor's data take the study's reading).
_STUDY_ROLES = ("id", "group", "hired")
#: The study-wide impact settings (several demographic columns, strata, stages): read once, for the study
_STUDY_WIDE_CLEARED = {"group_columns": (), "reference_groups": None, "stratum": None, "stages": (),
                       "answer_key_sheet": None}   # the key scores the first predictor's raw answers


def columns_used(data: StudyData) -> dict[int, str]:
    """0-based column -> the role it has in ``data`` (single-column roles, items and ratings)."""
    used = {c: f"{role} column" for role, c in data.columns.items()}
    used.update({c: "item columns" for c in data.item_columns})
    used.update({c: "rating columns" for c in data.rating_columns})
    return used


def further_predictors(data: StudyData, header, rows) -> list[StudyData]:
    """The checked data of each further predictor of ``data.setup`` (empty for a one-predictor study)."""
    out: list[StudyData] = []
    used = columns_used(data)
    first = data.setup.test_name
    seen = {" ".join(first.split()).casefold()}
    for predictor in data.setup.predictors:
        key = " ".join(predictor.test_name.split()).casefold()
        if key in seen:
            raise SetupError(f"{predictor.source.get('test_name', 'Setup')}: two predictors are called "
                             f"{predictor.test_name!r}; give each its own name (the sheets are named after it)")
        seen.add(key)
        setup = full_setup(data.setup, predictor)
        own = dataclasses.replace(setup, **{role: None for role in _STUDY_ROLES}, **_STUDY_WIDE_CLEARED)
        name = setup.test_name
        try:
            pdata = check_data(own, data.path, data.sheet, header, rows)
        except SetupError as exc:
            raise SetupError(f"predictor {name!r}: {exc}") from None
        mine = columns_used(pdata)
        for c, role in mine.items():
            if role != "criterion column" and c in used:
                owner = used[c]
                raise SetupError(f"predictor {name!r}: column {header[c]!r} of sheet '{data.sheet}' is named in "
                                 f"its {role} and already has the role '{owner}'; each column has one role "
                                 f"(a setting never passes from {first!r} to another predictor)")
        used.update({c: f"{role} of {name!r}" for c, role in mine.items() if role != "criterion column"})
        columns = dict(pdata.columns)
        columns.update({role: data.columns[role] for role in _STUDY_ROLES if role in data.columns})
        data.problems.extend(pdata.problems)
        data.notes.extend(f"{name}: {note}" for note in pdata.notes)
        out.append(dataclasses.replace(pdata, setup=setup, columns=columns, ids=data.ids, groups=data.groups,
                                       group_tally=data.group_tally, hired=data.hired, hired_codes=data.hired_codes,
                                       notes=data.notes, problems=data.problems, raw_header=data.raw_header))
    return out
