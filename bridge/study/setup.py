"""A study's setup: which column of the data workbook is which, the settings, and the checked data.

Reading the workbook is :mod:`.data_workbook`; checking its data, :mod:`.data_checks`.

A data workbook has one sheet of candidates (a header row, then one row per
person) and, optionally, a sheet named ``Setup`` whose rows are
``setting | value`` pairs (column A the setting, column B its value; anything
to the right is ignored, and the settings end at the first empty row). Command-line options override the setup sheet.

=======================  ====================================================
setting                  value
=======================  ====================================================
``data sheet``           the sheet of candidates (default: the first sheet
                         that is not ``Setup``)
``id column``            header of the candidate id column
``group column``         header of the applicant-group column (impact analysis)
``item columns``         item response columns: ``Q01:Q40`` (a span from one
                         header to another) or ``Q01, Q02, Q03`` (a list)
``reverse keyed items``  items scored in reverse (score = minimum + maximum
                         of the item scale − response); needs the item scale
``item scale minimum``,  the lowest and highest response an item allows
``item scale maximum``   (e.g. 1 and 5); values outside it are reported
``total column``         a test total, when there are no item columns (or to
                         use instead of their sum)
``rating columns``       interview or assessor ratings, one column per rater
``criterion column``     job performance, blank for people not hired
``retest column``        a second sitting of the test (optional)
``hired column``         yes/no, y/n, hired/not hired, 1/0, TRUE/FALSE or
                         T/F, any case (optional)
``cut score``            the cut for the adverse-impact analysis
``confidence``           confidence level of every interval (default 0.95)
``criterion reliability``  reliability of the criterion (default 0.52)
``success threshold``    criterion value that counts as success (default:
                         the median criterion value)
``reference group``      the group others are compared with (default: the
                         group with the highest selection rate)
``group columns``,       several demographic columns, a reference group per
``reference groups``,    column, a stratum column and the stages of the
``stratum column``,      process (read by :mod:`.setup_impact`)
``stage columns``
``test name``, ``job title``, ``organisation``  words for the titles
``predictor``            starts the block of a further predictor (a
                         questionnaire, an interview...): the predictor
                         settings below it belong to it alone (see
                         :mod:`.setup_predictors`)
=======================  ====================================================

The settings of the cut-score evidence (``judges sheet``, ``standard setting method``, ``sem adjustment``,
``content ratings sheet``, ``content critical value``) are described in :mod:`.setup_cut`; the ``answer key
sheet`` of raw multiple-choice answers in :mod:`.setup_answers`.

A setup the study cannot use is a :class:`SetupError` whose message names the
setting, the column and the sheet; nothing is written before the whole setup
and every data cell it names have been read and checked. Data the study can use
but that look wrong (an item value outside the item scale, a duplicate id, a
blank group, a hired value that is no yes/no coding, a formula without a stored
value) are listed in :attr:`StudyData.problems`, one line per cell naming the
sheet and cell; the study shows them on its Notes sheet and the command prints
them.

Group labels are matched as :func:`trueband.funcs.impact.group_key` does:
labels that differ only in letter case or spacing are one group.
"""

from __future__ import annotations

import dataclasses
import math
import numbers
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from . import setup_predictors
from .setup_answers import ANSWER_SETTINGS
from .setup_cells import cell_text
from .setup_cut import CUT_SETTINGS

__all__ = ["SetupError", "StudySetup", "StudyData", "SETTINGS", "normalise_key", "cell_text", "read_setup_sheet",
           "SETUP_SHEET", "DEFAULT_CRITERION_RELIABILITY", "HIRED_CODINGS", "YES_CODES", "NO_CODES"]

SETUP_SHEET = "Setup"

#: Interrater reliability of supervisory ratings of overall job performance, .52
#: (Viswesvaran, Ones & Schmidt, 1996, J. Applied Psychology 81, 557-574), the usual default.
DEFAULT_CRITERION_RELIABILITY = 0.52

#: Codings of the hired column, compared after trimming and case folding (common practice).
YES_CODES = frozenset({"yes", "y", "true", "t", "1", "1.0", "hired"})
NO_CODES = frozenset({"no", "n", "false", "f", "0", "0.0", "not hired"})
#: The codings in words, for the Setup help, the study and the messages.
HIRED_CODINGS = "yes/no, y/n, hired/not hired, 1/0, TRUE/FALSE or T/F"


#: setting -> (field name, kind, what it means); kinds: column, columns, number, text
SETTINGS: dict[str, tuple[str, str, str]] = {
    "data sheet": ("data_sheet", "text", "the sheet that holds one row per candidate, headers in row 1"),
    "id column": ("id", "column", "header of the candidate id column"),
    "group column": ("group", "column", "header of the applicant-group column used for adverse impact"),
    "item columns": ("items", "columns", "item response columns, e.g. Q01:Q40 (a span) or Q01, Q02 (a list)"),
    "reverse keyed items": ("reverse", "columns", "items scored in reverse: score = scale minimum + maximum − "
                                                  "response, e.g. Q03, Q07 (optional; needs the item scale)"),
    "item scale minimum": ("item_min", "number", "lowest response an item allows, e.g. 1 (optional)"),
    "item scale maximum": ("item_max", "number", "highest response an item allows, e.g. 5 (optional)"),
    "total column": ("total", "column", "a test total to use instead of summing the items (optional)"),
    "rating columns": ("ratings", "columns", "interview ratings, one column per rater (optional)"),
    "criterion column": ("criterion", "column", "job performance; blank for people not hired"),
    "retest column": ("retest", "column", "score on a second sitting of the test (optional)"),
    "hired column": ("hired", "column", "was the person hired: " + HIRED_CODINGS + " (optional)"),
    "cut score": ("cut", "number", "scores at or above the cut pass (adverse impact and utility)"),
    "confidence": ("confidence", "number", "confidence level of every interval, e.g. 0.95"),
    "criterion reliability": ("criterion_reliability", "number",
                              "reliability of the criterion; 0.52 is the published average for supervisor ratings"),
    "success threshold": ("success", "number", "criterion value that counts as success (default: the median)"),
    "reference group": ("reference_group", "text", "group the others are compared with (default: highest rate)"),
    "test name": ("test_name", "text", "name of the test, for titles"),
    "job title": ("job_title", "text", "the job, for titles"),
    "organisation": ("organisation", "text", "the employer, for titles"),
}
# adverse impact by several columns, strata and stages (read by .setup_impact)
SETTINGS.update({
    "group columns": ("group_columns", "columns", "several demographic columns for adverse impact, e.g. Sex, "
                                                  "Ethnicity, Age 40+ (one impact table each; optional)"),
    "reference groups": ("reference_groups", "text", "the reference group of each demographic column, e.g. "
                                                     "Sex: Men; Ethnicity: White (default: the group with the "
                                                     "highest selection rate)"),
    "stratum column": ("stratum", "column", "sites, years or job groups to pool the impact analysis over "
                                            "(optional; the Strata sheet)"),
    "stage columns": ("stages", "columns", "the stages of the selection process in order, each coded "
                                           "yes/no as the hired column (optional; the Stages sheet)"),
})
SETTINGS.update(CUT_SETTINGS)  # the cut-score evidence: judges' sheet, method, content ratings (setup_cut)
SETTINGS.update(ANSWER_SETTINGS)  # raw multiple-choice answers and their key (setup_answers)
SETTINGS.update({  # the utility's base rate (issue 20)
    "applicant base rate": ("applicant_base_rate", "number",
                            "share of all applicants who would reach the success threshold, if you know it "
                            "(optional; default: the share of the hires who reach it)"),
})
# printing (issue 20): the currency shown in the money cells' number format (checked by .printing.money_format)
SETTINGS["currency"] = ("currency", "text", "the currency of money figures, a code or symbol shown beside them, "
                                            "e.g. EUR, GBP or $ (default USD)")



class SetupError(Exception):
    """The data workbook or its setup cannot be used; the message says why."""


def normalise_key(key: str) -> str:
    return " ".join(str(key).replace("_", " ").replace("-", " ").lower().split())


@dataclasses.dataclass(frozen=True)
class StudySetup:
    """Which columns play which role, and the study's settings (as given; not yet checked)."""

    data_sheet: str | None = None
    id: str | None = None
    group: str | None = None
    items: tuple[str, ...] = ()
    reverse: tuple[str, ...] = ()
    item_min: float | None = None
    item_max: float | None = None
    total: str | None = None
    ratings: tuple[str, ...] = ()
    criterion: str | None = None
    retest: str | None = None
    hired: str | None = None
    cut: float | None = None
    confidence: float = 0.95
    criterion_reliability: float = DEFAULT_CRITERION_RELIABILITY
    success: float | None = None
    reference_group: str | None = None
    test_name: str = "the test"
    job_title: str = ""
    organisation: str = ""
    group_columns: tuple[str, ...] = ()   # several demographic columns (see .setup_impact)
    reference_groups: str | None = None
    stratum: str | None = None
    stages: tuple[str, ...] = ()
    judges_sheet: str | None = None             # the cut-score evidence (setup_cut)
    standard_setting_method: str | None = None
    sem_adjustment: float | None = None
    content_sheet: str | None = None
    content_critical: str | None = None
    answer_key_sheet: str | None = None         # raw answers and their key (setup_answers)
    applicant_base_rate: float | None = None    # the utility's base rate among applicants, when known
    currency: str = "USD"                       # shown in the money format (printing)
    source: Mapping[str, str] = dataclasses.field(default_factory=dict)  # field -> where it was given
    predictors: tuple = ()  # the further predictors (StudySetup of their own settings; see setup_predictors)

    def merged(self, overrides: Mapping[str, Any]) -> "StudySetup":
        """This setup with the non-empty ``overrides`` (field name -> value) applied; the word ``none`` clears
        a setting back to its default."""
        overrides, scoped = setup_predictors.split_scoped(overrides)  # the settings after --predictor NAME
        changes, source = {}, dict(self.source)
        clear = setup_predictors.cleared(self, overrides)
        for name, value in overrides.items():
            if value is None or value == () or value == "":
                continue
            if name in clear:
                changes[name] = clear[name]
                source.pop(name, None)
                continue
            changes[name] = value
            source[name] = "command line"
        merged = dataclasses.replace(self, **changes, source=source)
        return setup_predictors.apply_scoped(merged, scoped, SetupError) if scoped else merged


@dataclasses.dataclass
class StudyData:
    """The checked data: arrays in row order (blank = nan for numbers, None for labels)."""

    setup: StudySetup
    path: Path
    sheet: str
    header: list[str]
    rows: list[tuple]              # every data row as read (values), for the copy
    columns: dict[str, int]        # role -> 0-based column (single-column roles)
    item_columns: list[int]
    rating_columns: list[int]
    ids: list[Any]
    groups: list[str | None]
    items: np.ndarray | None       # n x k floats, nan for blank
    total: np.ndarray | None
    ratings: np.ndarray | None
    criterion: np.ndarray | None
    retest: np.ndarray | None
    hired: np.ndarray | None       # bool, or None when no hired column (an unreadable value counts False)
    hired_codes: list | None = None  # each row's reading of the hired cell: True, False, or None (blank, unreadable)
    notes: list[str] = dataclasses.field(default_factory=list)
    problems: list[str] = dataclasses.field(default_factory=list)   # one line per doubtful cell
    raw_header: list = dataclasses.field(default_factory=list)      # row 1 as written, for the copy
    formats: dict = dataclasses.field(default_factory=dict)         # (sheet row, 0-based col) -> number format
    group_tally: Any = None                                         # funcs.impact.GroupTally of the groups
    reverse_items: list[int] = dataclasses.field(default_factory=list)  # 0-based positions among the items
    item_scale: tuple[float, float] | None = None                   # (min, max) given, or read from the data
    item_scale_given: bool = False
    raw_items: np.ndarray | None = None                             # the responses before reverse keying
    impact: Any = None                                              # setup_impact.ImpactData
    predictors: list = dataclasses.field(default_factory=list)      # the further predictors' StudyData
    judgments: Any = None                                           # setup_cut.Judgments, when a judges' sheet is named
    content_ratings: Any = None                                     # setup_cut.ContentRatings, when named
    answer_key: tuple | None = None                                 # keyed option per item, when answers are raw
    answer_options: tuple | None = None                             # the options offered per item (None: not given)
    raw_answers: np.ndarray | None = None                           # the raw answers (object), None for a blank

    @property
    def scored_sheet(self) -> bool:
        """Whether the item scores the study uses are on the Scored items sheet (reverse keying or raw answers)."""
        return bool(self.reverse_items) or self.answer_key is not None

    @property
    def binary_items(self) -> bool:
        """The items are scored 0/1: given so, or (nearly) every answer is 0 or 1 (see :func:`_item_scale`)."""
        return self.items is not None and self.item_scale == (0.0, 1.0)

    @property
    def n(self) -> int:
        return len(self.rows)

    @property
    def scores(self) -> np.ndarray:
        """Each person's test score: the total column, or the sum of the items (blank items count 0;
        a person with no item answered has no score)."""
        if self.total is not None:
            return self.total
        if self.items is None and self.ratings is not None:  # a panel of ratings only: the raters' mean
            return panel_scores(self.ratings)
        answered = (~np.isnan(self.items)).sum(axis=1)
        s = np.nansum(self.items, axis=1)
        return np.where(answered > 0, s, np.nan)


def panel_scores(ratings: np.ndarray) -> np.ndarray:
    """The score of a predictor given only as a panel of ratings: each person's mean of the ratings given
    (``AVERAGE`` over the person's rating cells); no score without a rating."""
    given = (~np.isnan(ratings)).sum(axis=1)
    with np.errstate(invalid="ignore"):
        total = np.nansum(ratings, axis=1)
    return np.where(given > 0, total / np.maximum(given, 1), np.nan)


# ---------------------------------------------------------------- the Setup sheet


def read_setup_sheet(wb) -> tuple[dict[str, Any], dict[str, str]]:
    """Settings from the Setup sheet of ``wb`` (a :class:`.data_workbook.DataWorkbook`): field -> raw value,
    field -> where it was given ("sheet 'Setup', cell B7")."""
    sheet = next((n for n in wb.sheetnames if n.strip().lower() == SETUP_SHEET.lower()), None)
    if sheet is None:
        return {}, {}
    values, where = {}, {}
    blocks = setup_predictors.PredictorBlocks(sheet, SetupError, cell_text)
    started = False
    for r, row in enumerate(wb.rows(sheet, max_col=2), start=1):
        key = cell_text(row[0]) if row else None
        if key is None:
            if started:
                break  # the settings end at the first empty row; notes may follow
            continue
        started = True
        norm = normalise_key(key)
        if norm in ("setting", "settings", "key"):
            continue  # a header row
        if norm == setup_predictors.PREDICTOR_SETTING:
            blocks.start(row[1] if len(row) > 1 else None, r)
            continue
        if norm not in SETTINGS:
            known = ", ".join(repr(k) for k in (*SETTINGS, setup_predictors.PREDICTOR_SETTING))
            raise SetupError(f"sheet '{sheet}', cell A{r}: unknown setting {key!r}; the settings are {known}")
        value = row[1] if len(row) > 1 else None
        if isinstance(value, str):
            value = value.strip() or None
        if value is None:
            continue
        field = SETTINGS[norm][0]
        into, into_where = blocks.target(field, key, r, values, where)
        into[field] = value
        into_where[field] = f"sheet '{sheet}', cell B{r}"
    blocks.finish(values, where)
    return values, where


def _parse_columns(spec) -> tuple[str, ...]:
    if isinstance(spec, (list, tuple)):
        return tuple(str(s).strip() for s in spec if str(s).strip())
    return tuple(p.strip() for p in str(spec).split(",") if p.strip())


def setup_from_values(values: Mapping[str, Any], where: Mapping[str, str]) -> StudySetup:
    kwargs: dict[str, Any] = {}
    by_field = {f: (k, kind) for k, (f, kind, _) in SETTINGS.items()}
    values = dict(values)
    if "predictors" in values:
        kwargs["predictors"] = setup_predictors.predictor_setups(values.pop("predictors"), setup_from_values)
    for field, raw in values.items():
        key, kind = by_field[field]
        if kind == "columns":
            kwargs[field] = _parse_columns(raw)
        elif kind == "number":
            if isinstance(raw, bool) or not isinstance(raw, numbers.Real):
                try:
                    raw = float(str(raw).strip())
                except ValueError:
                    raise SetupError(f"{where.get(field, key)}: {key} must be a number, got {raw!r}") from None
            if not math.isfinite(float(raw)):
                raise SetupError(f"{where.get(field, key)}: {key} must be a finite number, got {raw!r}")
            kwargs[field] = float(raw)
        else:
            kwargs[field] = cell_text(raw)
    return StudySetup(**kwargs, source=dict(where))

