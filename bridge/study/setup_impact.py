"""The adverse-impact settings of a study: several demographic columns, their reference groups, a stratum
column and the stages of the selection process; read and checked here, used by the Impact, Strata, Cuts,
Stages and Groups sheets.

=======================  ====================================================
setting                  value
=======================  ====================================================
``group columns``        several demographic columns, e.g. ``Sex, Ethnicity,
                         Age 40+`` (each gets its own impact table); with
                         ``group column`` too, that column comes first
``reference groups``     a reference group per column: ``Sex: Men;
                         Ethnicity: White`` (default: the group with the
                         highest selection rate at the cut)
``stratum column``       sites, years or job groups to pool over (the Strata
                         sheet: Mantel–Haenszel and its companions)
``stage columns``        the stages of the process in order, each coded yes/no
                         as the hired column is (the Stages sheet)
=======================  ====================================================

Labels are merged by case and spacing per column, as :func:`trueband.funcs.impact.group_key` does. A study
without these settings reads exactly as before: ``group column`` alone is the one demographic column.
"""

from __future__ import annotations

import dataclasses

from openpyxl.utils import get_column_letter

from trueband.funcs.impact import GroupTally, tally_groups

from .setup import HIRED_CODINGS, SetupError, cell_text

__all__ = ["ImpactData", "Demographic", "Stage", "normalise", "read_impact_data",
           "parse_reference_groups", "bands_columns", "bands_rows"]

@dataclasses.dataclass(frozen=True)
class Demographic:
    """One column of labels (a demographic column, or the strata): each row's group name (``None``: blank)."""

    header: str
    col: int                            # 0-based column of the data sheet
    groups: tuple                       # each row's group name as counted, None for a blank label
    tally: GroupTally
    reference: str | None = None        # the reference group as given (not yet matched), or None
    where: str = ""                     # where the reference group was given, for messages

    @property
    def numbers(self) -> dict[str, int]:
        """Group name -> its number on the Bands sheet (1 for the first group of the table, and so on)."""
        return {name: k + 1 for k, name in enumerate(self.tally.names)}


@dataclasses.dataclass(frozen=True)
class Stage:
    """One stage of the process: each row's yes/no coding (True, False, or None for blank or unreadable)."""

    header: str
    col: int
    codes: tuple


@dataclasses.dataclass(frozen=True)
class ImpactData:
    """The demographic columns (the first is the study's ``group column``), the strata and the stages."""

    demographics: tuple[Demographic, ...]
    stratum: Demographic | None
    stages: tuple[Stage, ...]

    @property
    def several(self) -> bool:
        return len(self.demographics) > 1


def normalise(setup):
    """The setup with ``group`` set to the first of ``group columns`` when only those are given, so the
    first demographic column is read as the group column always was."""
    if setup.group is None and setup.group_columns:
        return dataclasses.replace(setup, group=setup.group_columns[0])
    return setup


def parse_reference_groups(text: str | None, where: str = "reference groups") -> dict[str, str]:
    """``"Sex: Men; Ethnicity: White"`` -> {"sex": "Men", "ethnicity": "White"} (column names case-folded).

    >>> parse_reference_groups("Sex: Men; Ethnicity : White")
    {'sex': 'Men', 'ethnicity': 'White'}
    """
    out: dict[str, str] = {}
    if not text:
        return out
    for part in str(text).split(";"):
        if not part.strip():
            continue
        column, sep, group = part.partition(":")
        if not sep or not column.strip() or not group.strip():
            raise SetupError(f"{where}: write each as 'column: group', separated by ';' (e.g. 'Sex: Men; "
                             f"Ethnicity: White'), got {part.strip()!r}")
        key = " ".join(column.split()).casefold()
        if key in out:
            raise SetupError(f"{where}: column {column.strip()!r} is given twice")
        out[key] = group.strip()
    return out


def _labels(rows, col: int) -> list:
    # a label as the cell shows it: 2.0 is "2", a logical value is TRUE/FALSE, text keeps its spaces
    return [("TRUE" if g else "FALSE") if isinstance(g, bool) else g if isinstance(g, str) else cell_text(g)
            for g in (row[col] if col < len(row) else None for row in rows)]


def _demographic(rows, col: int, header, reference=None, where="") -> Demographic:
    labels = _labels(rows, col)
    tally = tally_groups(labels)
    return Demographic(str(header[col]), col, tuple(tally.name(x) for x in labels), tally, reference, where)


def _blank_lines(d: Demographic, sheet: str, role: str) -> list[str]:
    letter = get_column_letter(d.col + 1)
    return [f"sheet '{sheet}', cell {letter}{i + 2} (column {d.header!r}, {role}): blank; the person is left out of "
            f"the counts by {d.header!r}" for i, x in enumerate(d.groups) if x is None]


def read_impact_data(data, resolve, used: list[int], report, hired_code) -> ImpactData:
    """Read the demographic, stratum and stage columns of ``data`` (a :class:`.setup.StudyData` whose group
    column is read already). ``resolve(name, setting)`` gives a column's 0-based index (or refuses);
    ``used`` the columns other roles take; ``report(kind, lines)`` lists doubtful cells; ``hired_code`` reads a
    yes/no coding (that of the hired column)."""

    s, sheet, header, rows = data.setup, data.sheet, data.header, data.rows
    given = parse_reference_groups(s.reference_groups, s.source.get("reference_groups", "reference groups"))
    demographics: list[Demographic] = []
    if "group" in data.columns:
        col = data.columns["group"]
        key = " ".join(str(header[col]).split()).casefold()
        field = "reference_groups" if key in given else "reference_group"
        reference = given.pop(key, None) or s.reference_group
        demographics.append(Demographic(str(header[col]), col, tuple(data.groups), data.group_tally, reference,
                                        s.source.get(field, field.replace("_", " "))))
    taken = set(used)
    for name in s.group_columns:
        col = resolve(name, "group columns")
        if col == data.columns.get("group"):
            continue
        if col in taken:
            raise SetupError(f"group columns: column {header[col]!r} of sheet '{sheet}' is given two roles; each "
                             f"column has one role")
        taken.add(col)
        key = " ".join(str(header[col]).split()).casefold()
        d = _demographic(rows, col, header, given.pop(key, None), s.source.get("reference_groups", "reference groups"))
        report(f"blank cells of {d.header!r}", _blank_lines(d, sheet, "group columns"))
        demographics.append(d)
    if given:
        names = ", ".join(repr(d.header) for d in demographics) or "none"
        raise SetupError(f"reference groups: {', '.join(repr(k) for k in given)} is not one of the demographic "
                         f"columns ({names})")
    stratum = None
    if s.stratum:
        col = resolve(s.stratum, "stratum column")
        if col in taken:
            raise SetupError(f"stratum column: column {header[col]!r} of sheet '{sheet}' is given two roles; each "
                             f"column has one role")
        taken.add(col)
        stratum = _demographic(rows, col, header)
        report(f"blank cells of {stratum.header!r}", _blank_lines(stratum, sheet, "stratum column"))
    stages = []
    for col in _stage_columns(s.stages, resolve, header, sheet):
        if col in taken:
            raise SetupError(f"stage columns: column {header[col]!r} of sheet '{sheet}' is given two roles; each "
                             f"column has one role")
        taken.add(col)
        codes = tuple(hired_code(row[col] if col < len(row) else None) for row in rows)
        letter = get_column_letter(col + 1)
        report(f"values of {header[col]!r}", [
            f"sheet '{sheet}', cell {letter}{i + 2} (column {header[col]!r}, stage column): {rows[i][col]!r} is not "
            f"a yes/no coding ({HIRED_CODINGS}); the person is counted as not passing the stage"
            for i, c in enumerate(codes) if c is None and rows[i][col] not in (None, "")
            and not (isinstance(rows[i][col], str) and not rows[i][col].strip())])
        stages.append(Stage(str(header[col]), col, codes))
    return ImpactData(tuple(demographics), stratum, tuple(stages))


def _stage_columns(names, resolve, header, sheet: str) -> list[int]:
    """The stage columns in order: each a header, or FIRST:LAST for the columns from one to the other."""
    out: list[int] = []
    for name in names:
        if ":" in name:
            first, last = (resolve(p.strip(), "stage columns") for p in name.split(":", 1))
            if last < first:
                raise SetupError(f"stage columns: {name!r} runs backwards on sheet '{sheet}'")
            out.extend(range(first, last + 1))
        else:
            out.append(resolve(name, "stage columns"))
    if len(set(out)) != len(out):
        raise SetupError(f"stage columns: a column of sheet '{sheet}' is named twice")
    return out


def bands_columns(data) -> list[tuple[str, str]]:
    """The Bands columns this module adds: (key, header): group numbers of the second and later demographic
    columns, the stratum number, each stage as 1/0."""
    impact: ImpactData | None = getattr(data, "impact", None)
    if impact is None:
        return []
    out = [(f"group:{k}", f"Group number: {d.header} (as counted on Impact)")
           for k, d in enumerate(impact.demographics) if k > 0]
    if impact.stratum is not None:
        out.append(("stratum", f"Stratum number: {impact.stratum.header} (as counted on Strata)"))
    out += [(f"stage:{k}", f"{st.header} (1 = yes, as read)") for k, st in enumerate(impact.stages)]
    # no per-group copies of the scores or the criterion: the Groups sheet reads the whole columns beside the
    # group numbers (SUBGROUP_SD, SUBGROUP_D, criteria functions)
    return out


def bands_rows(data, layout):
    """A function of the row index giving each person's values of :func:`bands_columns` (numbers, blank for no
    group or no coding); None when there are none."""
    impact: ImpactData | None = getattr(data, "impact", None)
    keys = [k for k, _ in bands_columns(data)]
    if impact is None or not keys:
        return None
    columns = [[d.numbers.get(x) if x is not None else None for x in d.groups]
               for k, d in enumerate(impact.demographics) if k > 0]
    if impact.stratum is not None:
        numbers = impact.stratum.numbers
        columns.append([numbers.get(x) if x is not None else None for x in impact.stratum.groups])
    columns += [[None if c is None else int(c) for c in st.codes] for st in impact.stages]
    constants = [list(r) for r in zip(*columns)]

    def row(i: int) -> list:
        return constants[i]

    return row
