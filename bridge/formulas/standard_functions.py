"""Standard spreadsheet function names beyond the engine's library, and how close one name is to another.

``trueband check`` sorts every function name a formula calls into one of three kinds: a trueband
function (:mod:`.names`), a standard function the engine evaluates (the ``formulas`` package's
table, :func:`.names.standard_names`), a standard function the engine does *not* evaluate (the
names below: ``OFFSET``, ``COMBIN``, ``SUBTOTAL`` …), or a name no spreadsheet app knows, which
gets "did you mean" only for names that are really close (:func:`close_names`).

==================================  ==========================================================
name                                what
==================================  ==========================================================
:data:`OTHER_STANDARD_NAMES`        standard function names the ``formulas`` library lacks
:func:`name_kind`                   ``"registered"``, ``"evaluated"``, ``"not evaluated"`` or
                                    ``"unknown"`` for a name as written
:func:`edit_distance`               optimal-string-alignment distance of two names
:func:`close_names`                 registered and standard names close enough to suggest
:func:`name_findings`               what a compiled formula's calls are (for ``check``)
:func:`structured_reference`        whether formula text holds a table reference ``Table1[Col]``
==================================  ==========================================================
"""

from __future__ import annotations

import re

from trueband.funcs.registry import REGISTRY

from .names import bare_name, registered_name, standard_names

__all__ = ["OTHER_STANDARD_NAMES", "name_kind", "edit_distance", "close_names", "name_findings",
           "structured_reference", "NOT_EVALUATED"]

#: What ``check`` says of a standard function the engine does not evaluate.
NOT_EVALUATED = "standard function not evaluated by trueband"

#: Standard function names that the ``formulas`` library (1.3) has no function for. Sources: the
#: predefined functions of ECMA-376 Part 1, §18.17.7 (the 2007 set: CELL … SUBTOTAL); the functions
#: spreadsheet apps added later and store with the ``_xlfn.`` prefix (AGGREGATE, COMBINA, LET, LAMBDA,
#: SEQUENCE, RANDARRAY …; common practice); OpenDocument Formula (ODF 1.2 Part 2, §6) names that only
#: LibreOffice-family apps write (B, DAYSINMONTH, MULTIPLE.OPERATIONS …; from memory).
OTHER_STANDARD_NAMES = frozenset("""
CELL COMBIN CUBEKPIMEMBER CUBEMEMBER CUBEMEMBERPROPERTY CUBERANKEDMEMBER CUBESET CUBESETCOUNT CUBEVALUE
DAVERAGE DCOUNT DCOUNTA DGET DMAX DMIN DOLLAR DPRODUCT DSTDEV DSTDEVP DSUM DVAR DVARP ECMA.CEILING
GETPIVOTDATA HYPERLINK INDIRECT INFO JIS OFFSET PHONETIC QUOTIENT RTD SERIESSUM SUBTOTAL
AGGREGATE COMBINA LET LAMBDA ISOMITTED SEQUENCE RANDARRAY ENCODEURL FILTERXML WEBSERVICE DBCS FIELDVALUE
IMAGE STOCKHISTORY FORMULATEXT SHEET SHEETS BASE CALL REGISTER.ID EUROCONVERT TRANSLATE DETECTLANGUAGE
B CHISQDIST CHISQINV DAYSINMONTH DAYSINYEAR DDE EASTERSUNDAY FORMULA ISLEAPYEAR MONTHS MULTIPLE.OPERATIONS
STYLE WEEKS WEEKSINYEAR YEARS CURRENT
""".split())

def name_kind(name: str) -> str:
    """What a function name as written is: one of ``registered``, ``evaluated``, ``not evaluated``, ``unknown``.

    >>> [name_kind(n) for n in ("_xludf.SEM", "SUM", "_xlfn.COMBINA", "OFFSET", "SCORE_BNAD")]
    ['registered', 'evaluated', 'not evaluated', 'not evaluated', 'unknown']
    """
    if registered_name(name) is not None:
        return "registered"
    key = name.upper()
    if key in standard_names():
        return "evaluated"
    bare = bare_name(key)
    if bare in OTHER_STANDARD_NAMES or bare in standard_names():
        return "not evaluated"  # a library name under a prefix the engine does not read is not evaluated either
    return "unknown"


def edit_distance(a: str, b: str) -> int:
    """Edits (insert, delete, replace, swap of two neighbours) that turn ``a`` into ``b`` (optimal string alignment).

    >>> edit_distance("SME", "SEM"), edit_distance("COMBIN", "MIN"), edit_distance("OFFSET", "EFFECT")
    (1, 3, 3)
    """
    previous2: list[int] = []
    previous = list(range(len(b) + 1))
    for i, ca in enumerate(a, 1):
        current = [i] + [0] * len(b)
        for j, cb in enumerate(b, 1):
            current[j] = min(previous[j] + 1, current[j - 1] + 1, previous[j - 1] + (ca != cb))
            if i > 1 and j > 1 and ca == b[j - 2] and a[i - 2] == cb:
                current[j] = min(current[j], previous2[j - 2] + 1)
        previous2, previous = previous, current
    return previous[-1]


def _limit(name: str) -> int:
    # One slip (a wrong, missing or extra letter, or two swapped) in a name of up to 7 characters, two up to 11,
    # and so on (common practice for "did you mean"; COMBIN → MIN, three deletions, is not a slip).
    return 1 + max(0, len(name) - 4) // 4


def close_names(name: str, most: int = 3) -> list[str]:
    """Registered and standard names within a slip or two of ``name``, closest first (trueband's on a tie).

    >>> close_names("SME"), close_names("_xludf.SCORECI"), close_names("COMBIM"), close_names("OFFSTE")
    (['SEM'], ['SCORE_CI'], ['COMBIN'], ['OFFSET'])
    >>> close_names("QQQQQQ"), close_names("CMBN")
    ([], [])
    """
    key = bare_name(name)
    limit = _limit(key)
    scored = []
    families = (sorted(REGISTRY), sorted(n for n in standard_names() | OTHER_STANDARD_NAMES if not n.startswith("_")))
    for rank, family in enumerate(families):
        for candidate in family:
            if abs(len(candidate) - len(key)) > limit or candidate == key:
                continue
            distance = edit_distance(key, candidate)
            if distance <= limit:
                scored.append((distance, rank, candidate))
    scored.sort()
    return [n for _, _, n in scored[:most]]


def name_findings(tree) -> tuple[list[str], list[str]]:
    """(standard functions not evaluated, unknown names with their "did you mean") of a compiled formula tree."""
    not_evaluated: list[str] = []
    unknown: list[str] = []
    for node in tree.walk():
        if node.kind != "fn" or node.name in ("ARRAY", "ARRAYROW"):
            continue
        kind = name_kind(node.name)
        if kind == "not evaluated":
            text = f"{bare_name(node.name)}: {NOT_EVALUATED}"
            if text not in not_evaluated:
                not_evaluated.append(text)
        elif kind == "unknown" and not any(u.split(" ", 1)[0] == node.name for u in unknown):
            found = close_names(node.name)
            unknown.append(node.name + (f" (did you mean {' or '.join(found)}?)" if found else ""))
    return not_evaluated, unknown


# A table reference: ``[`` opening anything but an external book's number (``[1]Sheet1!A1``); text in quotes aside.
_QUOTED = re.compile(r'"(?:[^"]|"")*"|\'(?:[^\']|\'\')*\'')
_TABLE_REFERENCE = re.compile(r"\[(?!\d+\])")


def structured_reference(formula: str) -> bool:
    """Whether formula text holds a structured (table) reference such as ``Sales[Amount]`` or ``[@Score]``.

    >>> structured_reference("SUBTOTAL(109,[Column1])"), structured_reference("Sales[[#This Row],[Amount]]*2")
    (True, True)
    >>> structured_reference("[1]Sheet1!$A$1"), structured_reference('"[x]"&A1')
    (False, False)
    """
    return bool(_TABLE_REFERENCE.search(_QUOTED.sub("", formula)))
