"""Several predictors in one study: the predictor blocks of the Setup sheet, and clearing a setting.

A study's first predictor is set up as it always was: its settings (``item columns``, ``total column``,
``retest column``, ``cut score``...) stand among the study-wide settings at the top of the Setup sheet. A row
``predictor | NAME`` starts the block of a further predictor; the predictor settings below it, up to the next
``predictor`` row or the end of the settings, belong to that predictor only::

    item columns      Q01:Q40
    retest column     Retest score
    cut score         24
    predictor         Work Style Questionnaire
    item columns      W01:W12
    reverse keyed items  W03, W07
    item scale minimum   1
    item scale maximum   5
    cut score         40

Here the questionnaire has no retest column: a setting never passes from one predictor to another. A
``predictor`` row before any predictor setting names the first predictor (as ``test name`` does). Study-wide
settings (the id, group, criterion and hired columns, the confidence...) stand above the first block; one
inside a block is refused, naming its cell.

On the command line, the options set the first predictor's settings and the study-wide ones; after
``--predictor NAME`` the predictor options (``--items``, ``--reverse``, ``--item-min``, ``--item-max``,
``--total``, ``--ratings``, ``--retest``, ``--cut``, ``--test-name``) set that predictor's settings, up to the
next ``--predictor``. The word ``none`` clears a setting given on the Setup sheet (``--retest none``), back to
its default, for the predictor it is given for. The command line hands these on as ``overrides[SCOPED]``:
predictor name -> {field: value} (:func:`apply_scoped`).
"""

from __future__ import annotations

import dataclasses
import re
from typing import Any, Mapping

__all__ = ["PREDICTOR_SETTING", "PREDICTOR_FIELDS", "CLEAR", "SCOPED", "is_clear", "PredictorBlocks",
           "predictor_setups", "sheet_label", "split_scoped", "apply_scoped"]

#: The Setup row that starts a further predictor's block.
PREDICTOR_SETTING = "predictor"
#: The settings that belong to one predictor (field names of :class:`.setup.StudySetup`).
PREDICTOR_FIELDS = ("items", "reverse", "item_min", "item_max", "total", "ratings", "retest", "cut", "test_name")
#: The word that clears a setting from the command line.
CLEAR = "none"
#: The overrides' key for the settings given after ``--predictor NAME``: {name: {field: value}}.
SCOPED = "predictor_options"


def is_clear(value) -> bool:
    """Whether a command-line value is the word that clears a setting."""
    return isinstance(value, str) and value.strip().lower() == CLEAR


class PredictorBlocks:
    """Collects the Setup rows of the predictor blocks while :func:`.setup.read_setup_sheet` reads the sheet."""

    def __init__(self, sheet: str, error: type, cell_text):
        """``error``: the setup's error class; ``cell_text``: how a cell reads as text (both from :mod:`.setup`,
        which imports this module)."""
        self.sheet, self.error, self.cell_text = sheet, error, cell_text
        self.blocks: list[dict] = []     # {"name", "where", "values", "sources"} of each further predictor
        self._first_has_settings = False

    def start(self, name, row: int) -> None:
        """A ``predictor | NAME`` row at ``row``."""
        text = self.cell_text(name)
        where = f"sheet '{self.sheet}', cell B{row}"
        if text is None:
            raise self.error(f"{where}: a predictor row needs the predictor's name in column B")
        if not self.blocks and not self._first_has_settings:
            self.first_name = (text, where)  # names the first predictor
            return
        self.blocks.append({"name": text, "where": where, "values": {}, "sources": {}})

    def target(self, field: str, key: str, row: int, values: dict, where: dict) -> tuple[dict, dict]:
        """The dicts a setting read at ``row`` goes into: the study's (and first predictor's), or the block's."""
        if not self.blocks:
            if field in PREDICTOR_FIELDS:
                self._first_has_settings = True
            return values, where
        if field not in PREDICTOR_FIELDS:
            raise self.error(f"sheet '{self.sheet}', cell A{row}: {key!r} is a setting of the whole study; put it "
                             f"above the first 'predictor' row (the rows below a 'predictor' row belong to that "
                             f"predictor)")
        block = self.blocks[-1]
        return block["values"], block["sources"]

    def finish(self, values: dict, where: dict) -> None:
        """Put the first predictor's name and the further blocks into ``values`` (under ``predictors``)."""
        first = getattr(self, "first_name", None)
        if first is not None and "test_name" not in values:
            values["test_name"], where["test_name"] = first
        if self.blocks:
            values["predictors"] = list(self.blocks)


def predictor_setups(blocks, parse) -> tuple:
    """The further predictors as :class:`.setup.StudySetup` objects holding their own settings only.

    ``parse(values, where)`` turns one block's raw values into a StudySetup (the reader of the top block).
    Names are compared with the first predictor's in :func:`.predictor_data.further_predictors`."""
    out = []
    for block in blocks:
        values = dict(block["values"])
        values.setdefault("test_name", block["name"])
        where = dict(block["sources"])
        where.setdefault("test_name", block["where"])
        out.append(parse(values, where))
    return tuple(out)


def full_setup(study, predictor):
    """The study's setup for one further ``predictor``: the study-wide settings, and the predictor's own
    settings in place of the first predictor's (a setting it does not give is empty, never inherited)."""
    blank = {f.name: f.default for f in dataclasses.fields(study) if f.name in PREDICTOR_FIELDS}
    own = {f: getattr(predictor, f) for f in PREDICTOR_FIELDS if f in predictor.source}
    source = {k: v for k, v in study.source.items() if k not in PREDICTOR_FIELDS}
    source.update({k: v for k, v in predictor.source.items() if k in PREDICTOR_FIELDS})
    return dataclasses.replace(study, **{**blank, **own}, predictors=(), source=source)


def cleared(setup, overrides: Mapping[str, Any]) -> dict:
    """The fields of ``overrides`` that clear a setting (the word ``none``), each with its default value."""
    defaults = {f.name: (f.default if f.default is not dataclasses.MISSING else f.default_factory())
                for f in dataclasses.fields(setup)}
    return {name: defaults[name] for name, value in overrides.items() if is_clear(value)}


def split_scoped(overrides: Mapping[str, Any]) -> tuple[dict, dict]:
    """``overrides`` without the per-predictor part, and that part (name -> {field: value})."""
    rest = dict(overrides)
    return rest, dict(rest.pop(SCOPED, None) or {})


def _key(name: str) -> str:
    return " ".join(str(name).split()).casefold()


def apply_scoped(setup, scoped: Mapping[str, Mapping[str, Any]], error: type):
    """``setup`` with each predictor's command-line settings (``--predictor NAME`` ...) merged into that
    predictor's own: the first predictor's are the study setup's, a further one's its block's. ``error``: the
    setup's error class; a name that is no predictor's, or a setting that is not a predictor's, is refused in
    one line naming the option and the predictor."""
    for name, fields in scoped.items():
        for field in fields:
            if field not in PREDICTOR_FIELDS:
                raise error(f"--{field.replace('_', '-')} after --predictor {name!r}: it is a setting of the whole "
                            f"study; give it before the first --predictor")
        names = [setup.test_name] + [p.test_name for p in setup.predictors]
        if _key(name) == _key(setup.test_name):
            setup = setup.merged(dict(fields))
            continue
        k = next((k for k, p in enumerate(setup.predictors) if _key(p.test_name) == _key(name)), None)
        if k is None:
            raise error(f"--predictor {name!r}: no predictor of that name on the Setup sheet (its predictors: "
                        f"{', '.join(repr(n) for n in names)})")
        further = list(setup.predictors)
        further[k] = further[k].merged(dict(fields))
        setup = dataclasses.replace(setup, predictors=tuple(further))
    return setup


_NOT_IN_SHEET_NAMES = re.compile(r"[\[\]:*?/\\]")


def sheet_label(name: str, bases, taken: set[str]) -> str:
    """What a further predictor's sheet titles add to each of ``bases``: ``Reliability (Work Style)``. The
    predictor's name without the characters a sheet name may not hold, shortened to whole words so that every
    title keeps within the 31 characters a sheet name may have, and unique (no title of ``taken``, lower case)."""
    clean = " ".join(_NOT_IN_SHEET_NAMES.sub(" ", name).replace("'", "").split()) or "predictor"
    room = 31 - max(len(b) for b in bases) - 3
    label = _shortened(clean, room)
    k = 2
    while any(f"{b} ({label})".lower() in taken for b in bases):
        tag = f" {k}"
        label = _shortened(clean, room - len(tag)) + tag
        k += 1
    return label


def _shortened(name: str, room: int) -> str:
    """``name`` in at most ``room`` characters: whole words while they fit, else its start.

    >>> _shortened("Work Style Questionnaire", 15)
    'Work Style'
    """
    if len(name) <= room:
        return name
    words, out = name.split(), ""
    for w in words:
        if len(out) + len(w) + (1 if out else 0) > room:
            break
        out = f"{out} {w}" if out else w
    return out or name[:room]
