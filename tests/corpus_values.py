"""Compare ``recalc --all`` with the values desktop spreadsheet apps stored, over a folder of their workbooks.

Used by ``tests/test_corpus_values.py``; run as a script to print the disagreements grouped by function::

    python tests/corpus_values.py [FOLDER] [-v]
"""

from __future__ import annotations

import collections
import dataclasses
import math
import re
import sys
import tempfile
from pathlib import Path

from trueband.bridge.engine.recalc import recalculate
from trueband.bridge.workbook import sheet_read
from trueband.bridge.workbook.package import UnusableWorkbook, open_workbook_package
from trueband.bridge.workbook.sheet_data import ErrorValue, SheetXmlError

#: The corpus: beside the repository (``<repo>/../shared/corpus/desktop-saved``).
CORPUS = Path(__file__).resolve().parents[1].parent / "shared" / "corpus" / "desktop-saved"

#: Functions whose stored value cannot be expected again (time, chance, the sheet's layout or the app).
ASIDE = ("NOW", "TODAY", "RAND", "RANDBETWEEN", "RANDARRAY", "INDIRECT", "OFFSET", "CELL", "INFO")
_ASIDE = re.compile(r"(?<![\w.])(?:_xlfn\.)?(?:%s)\s*\(" % "|".join(ASIDE), re.IGNORECASE)
_FUNCTION = re.compile(r"(?<![\w.])((?:_xlfn\.|_xlws\.)?[A-Za-z][\w.]*)\s*\(")


@dataclasses.dataclass
class Outcome:
    """The comparison over a corpus: cells compared, agreeing, kept and listed, and the disagreements."""

    compared: int = 0
    agree: int = 0
    kept: int = 0
    disagreements: list[tuple[str, str, str, object, object, bool]] = dataclasses.field(default_factory=list)
    refused: list[tuple[str, str]] = dataclasses.field(default_factory=list)

    @property
    def unlisted(self):
        return [d for d in self.disagreements if not d[5]]

    @property
    def agreement(self) -> float:
        return self.agree / self.compared if self.compared else 1.0


def _formula_cells(path: Path) -> dict[tuple[str, str], tuple[str, object]]:
    """(sheet, cell) → (formula text, stored value) for each formula cell with a stored value."""
    out = {}
    with open_workbook_package(path, check_lock=False) as pkg:
        strings = pkg.shared_strings
        for info in pkg.worksheets:
            masters: dict[int, str] = {}
            for cell in sheet_read.iter_cells(pkg.read(info.part), strings):
                f = cell.formula
                if f is None or f.kind == "dataTable":
                    continue
                text = f.text
                if f.kind == "shared" and f.shared_index is not None:
                    if text is not None:
                        masters[f.shared_index] = text
                    text = masters.get(f.shared_index, "")
                out[(info.name, cell.ref)] = (text or "", cell.value)
    return out


def _aside_cells(path: Path) -> set[tuple[str, str]]:
    """The formula cells that use a function of :data:`ASIDE` or read one that does, transitively."""
    from trueband.bridge.engine.model import load_model
    from trueband.bridge.workbook.cells import column_letters, split_ref

    names = {n for a in ASIDE for n in (a, "_XLFN." + a)}
    with open_workbook_package(path, check_lock=False) as pkg:
        model = load_model(pkg)
        seeds = [i for i, run in enumerate(model.runs) if run.compiled.functions & names]
        out = set()
        for i in model.graph.dependents(seeds):
            run = model.runs[i]
            if run.array_ref:
                a, _, b = run.array_ref.partition(":")
                (r1, c1), (r2, c2) = split_ref(a), split_ref(b or a)
            else:
                r1, c1, r2, c2 = run.first, run.col, run.last, run.col
            out |= {(run.sheet, f"{column_letters(c)}{r}") for r in range(r1, r2 + 1) for c in range(c1, c2 + 1)}
    return out


def same(stored, new) -> bool:
    """Numbers to 1e-9 relative, text exactly, errors by code, logicals as logicals."""
    if isinstance(stored, ErrorValue) or isinstance(new, ErrorValue):
        return isinstance(stored, ErrorValue) and isinstance(new, ErrorValue) and str(stored) == str(new)
    if isinstance(stored, bool) or isinstance(new, bool):
        return type(stored) is type(new) and stored == new
    if isinstance(stored, float) and isinstance(new, float):
        return math.isclose(stored, new, rel_tol=1e-9, abs_tol=1e-300) or (abs(stored - new) < 1e-12)
    if isinstance(stored, str) and isinstance(new, str):
        return stored == new
    if stored is None or new is None:
        return (stored in (None, "")) and (new in (None, ""))
    return False


def functions_of(text: str) -> list[str]:
    return sorted({m.group(1).upper() for m in _FUNCTION.finditer(text)}) or ["(operators)"]


def compare_book(path: Path, outcome: Outcome, workdir: Path) -> None:
    out_path = workdir / (path.stem + ".recalc" + path.suffix)
    try:
        before = _formula_cells(path)
        aside = _aside_cells(path)
        report = recalculate(path, out_path, all_formulas=True, overwrite=True)
    except (UnusableWorkbook, SheetXmlError) as exc:
        outcome.refused.append((path.name, str(exc)))
        return
    listed = {(k.sheet, k.cell) for k in getattr(report, "kept", ())}
    after = _formula_cells(out_path)
    for key, (text, stored) in before.items():
        if stored is None or _ASIDE.search(text) or key in aside:
            continue
        new = after.get(key, (text, None))[1]
        outcome.compared += 1
        if key in listed:
            outcome.kept += 1
            if not same(stored, new):
                outcome.disagreements.append((path.name, f"{key[0]}!{key[1]}", text, stored, new, True))
            continue
        if same(stored, new):
            outcome.agree += 1
        else:
            outcome.disagreements.append((path.name, f"{key[0]}!{key[1]}", text, stored, new, False))


def compare_folder(folder: Path = CORPUS) -> Outcome:
    outcome = Outcome()
    with tempfile.TemporaryDirectory() as tmp:
        for path in sorted(folder.glob("*.xls[xm]")):
            compare_book(path, outcome, Path(tmp))
    return outcome


def describe(outcome: Outcome, limit: int = 3) -> str:
    groups: dict[str, list] = collections.defaultdict(list)
    for d in outcome.unlisted:
        for name in functions_of(d[2]):
            groups[name].append(d)
    lines = [f"compared {outcome.compared}, agree {outcome.agree} ({outcome.agreement:.2%}), kept and listed "
             f"{outcome.kept}, unlisted disagreements {len(outcome.unlisted)}, refused {len(outcome.refused)}"]
    for name, ds in sorted(groups.items(), key=lambda kv: -len(kv[1])):
        lines.append(f"  {name}: {len(ds)}")
        for book, cell, text, stored, new, _ in ds[:limit]:
            lines.append(f"      {book} {cell} ={text[:90]!s}  stored {stored!r}  got {new!r}")
    lines += [f"  refused {name}: {why}" for name, why in outcome.refused]
    return "\n".join(lines)


if __name__ == "__main__":
    args = [a for a in sys.argv[1:] if not a.startswith("-")]
    result = compare_folder(Path(args[0]) if args else CORPUS)
    print(describe(result, limit=20 if "-v" in sys.argv else 3))
