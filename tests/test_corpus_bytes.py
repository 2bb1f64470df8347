"""``recalc --all`` over workbooks saved by desktop spreadsheet apps: never stops, keeps every byte but the values.

The corpus is ``../shared/corpus/desktop-saved/`` beside the repository (122 workbooks that no one here
wrote; ``MANIFEST.json`` names each file's public origin, repository, commit and path, and the app that
saved it). It is not part of the repository: where it is absent (a user's clone) the test is skipped
with a message saying where it looked.

For every file, :func:`~trueband.bridge.engine.recalc.recalculate` with ``all_formulas`` (what
``trueband recalc --all`` runs) must finish without refusing the file (every file here is read by an XML
parser, ElementTree, the reference), and its output must equal its input byte for byte except, in the
worksheet parts, the ``<v>`` values and the ``t`` attributes of the cells it wrote: the comparer
(:func:`differences_outside_values`) takes each cell element of both parts in order and strips exactly
those two things from the cells that differ. One deliberate change elsewhere is allowed, exactly: the
workbook part loses a ``fullCalcOnLoad`` request (``PackageChanges.keep_cached_values``: an app asked to
recompute everything on opening would replace trueband's values by ``#NAME?``). Whether the values themselves agree with what the apps
stored is checked elsewhere (``tests/test_corpus_values.py``).
"""

from __future__ import annotations

import json
import re
import zipfile
from pathlib import Path
from xml.etree import ElementTree as ET

import pytest

from trueband.bridge.engine.recalc import UnusableWorkbook, recalculate

CORPUS = Path(__file__).resolve().parents[1].parent / "shared" / "corpus" / "desktop-saved"
_SHEET_PART = re.compile(r"xl/worksheets/[^/]+\.xml")
# a cell element (any prefix): its start tag, and its content (None when self-closing)
_CELL = re.compile(rb"<((?:[\w.-]+:)?)c\b((?:[^>\"']|\"[^\"]*\"|'[^']*')*?)(/?)>", re.S)
_VALUE = re.compile(rb"<((?:[\w.-]+:)?)v\b[^>]*?(?:/>|>[^<]*</\1v\s*>)")
_FULL_CALC = re.compile(rb'(<(?:[\w.-]+:)?calcPr\b[^>]*?)\s+fullCalcOnLoad\s*=\s*(["\'])(?:1|true)\2')
_T_ATTRIBUTE = re.compile(rb"""\st\s*=\s*(?:"[^"]*"|'[^']*')""")


def _files() -> list[str]:
    if not CORPUS.is_dir():
        return ["(corpus absent)"]
    manifest = CORPUS / "MANIFEST.json"
    if manifest.is_file():
        return sorted(entry["file"] for entry in json.loads(manifest.read_text(encoding="utf-8")))
    return sorted(p.name for p in CORPUS.glob("*.xls[xm]"))


def _cells(xml: bytes) -> tuple[list[tuple[int, int]], list[bytes]]:
    """(spans of the cell elements, in document order; the bytes between them)."""
    spans, gaps, pos = [], [], 0
    for m in _CELL.finditer(xml):
        if m.start() < pos:  # a cell tag inside a cell cannot happen in a sheet; stay safe
            continue
        end = m.end()
        if not m.group(3):
            close = xml.find(b"</" + m.group(1) + b"c>", end)
            end = len(xml) if close < 0 else close + len(m.group(1)) + 4
        gaps.append(xml[pos:m.start()])
        spans.append((m.start(), end))
        pos = end
    gaps.append(xml[pos:])
    return spans, gaps


def _stripped(cell: bytes) -> bytes:
    """A cell element without its ``t`` attribute and its ``<v>`` element."""
    tag_end = _CELL.match(cell).end()
    return _T_ATTRIBUTE.sub(b"", cell[:tag_end]) + _VALUE.sub(b"", cell[tag_end:])


def differences_outside_values(before: bytes, after: bytes) -> list[str]:
    """Where two worksheet parts differ other than in the ``<v>`` values and ``t`` attributes of their cells
    (empty when they do not): the bytes between cells must be equal, and each pair of cells equal once
    those two things are stripped from both."""
    (spans_a, gaps_a), (spans_b, gaps_b) = _cells(before), _cells(after)
    if len(spans_a) != len(spans_b):
        return [f"{len(spans_a)} cells before, {len(spans_b)} after"]
    found = []
    for k, (ga, gb) in enumerate(zip(gaps_a, gaps_b)):
        if ga != gb:
            found.append(f"bytes between cells differ before cell {k + 1}: {ga[-80:]!r} → {gb[-80:]!r}")
    for (a0, a1), (b0, b1) in zip(spans_a, spans_b):
        ca, cb = before[a0:a1], after[b0:b1]
        if ca != cb and _stripped(ca) != _stripped(cb):
            found.append(f"cell changed beyond its value: {ca[:160]!r} → {cb[:160]!r}")
    return found


def _readable_by_a_parser(path: Path) -> bool:
    with zipfile.ZipFile(path) as z:
        for name in z.namelist():
            if name.endswith((".xml", ".rels")):
                try:
                    ET.fromstring(z.read(name))
                except ET.ParseError:
                    return False
    return True


# ------------------------------------------------------------------ the comparer can fail

_BEFORE = (b'<worksheet><sheetData>\r\n<row r="1"><c r="A1" s="1"><f>1+1</f><v>2</v></c><c r="B1"/>'
           b'<c r="C1" t="str"><f>"a"</f><v>a</v></c></row></sheetData></worksheet>')


@pytest.mark.parametrize("after, ok", [
    (_BEFORE, True),
    (_BEFORE.replace(b"<v>2</v>", b"<v>3</v>"), True),  # a new value
    (_BEFORE.replace(b'<c r="C1" t="str"><f>"a"</f><v>a</v>', b'<c r="C1" t="e"><f>"a"</f><v>#N/A</v>'), True),
    (_BEFORE.replace(b'<c r="C1" t="str">', b'<c r="C1">').replace(b"<v>a</v>", b"<v>1</v>"), True),
    (_BEFORE.replace(b"\r\n", b"\n"), False),  # a line end between tags lost
    (_BEFORE.replace(b'<c r="B1"/>', b'<c r="B1"></c>'), False),  # an empty element written again
    (_BEFORE.replace(b's="1"', b's="2"'), False),  # a style changed
    (_BEFORE.replace(b"<f>1+1</f>", b"<f>1+2</f>"), False),  # a formula changed
    (_BEFORE.replace(b'<c r="B1"/>', b""), False),  # a cell lost
    (_BEFORE.replace(b"</row>", b'<c r="D1"><v>1</v></c></row>'), False),  # a cell added
    (_BEFORE.replace(b"<v>2</v>", b"<v>2</v><is><t>x</t></is>"), False),  # more than the value
])
def test_the_comparer_tells_a_value_from_any_other_change(after, ok):
    assert (differences_outside_values(_BEFORE, after) == []) is ok


# ------------------------------------------------------------------ the corpus


@pytest.mark.slow  # about a minute for the whole corpus on two cores
@pytest.mark.parametrize("name", _files())
def test_recalc_all_keeps_every_byte_but_the_values(name, tmp_path):
    if not CORPUS.is_dir():
        pytest.skip(f"the corpus of desktop-saved workbooks is not here: looked for {CORPUS}")
    src = CORPUS / name
    try:
        report = recalculate(src, tmp_path / ("out" + src.suffix), all_formulas=True)
    except UnusableWorkbook as exc:
        assert not _readable_by_a_parser(src), f"{name}: refused a file an XML parser reads: {exc}"
        return
    with zipfile.ZipFile(src) as a, zipfile.ZipFile(report.output) as b:
        assert b.namelist() == a.namelist(), name
        for part in a.namelist():
            before, after = a.read(part), b.read(part)
            if before == after:
                continue
            if part == "xl/workbook.xml":
                assert after == _FULL_CALC.sub(rb"\1", before, count=1), f"{name}: the workbook part changed"
                continue
            assert _SHEET_PART.fullmatch(part), f"{name}: {part} changed and it is not a worksheet"
            found = differences_outside_values(before, after)
            assert found == [], f"{name}: {part}: {found[:3]}"
