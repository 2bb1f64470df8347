"""The study's build speed-ups leave the study as it was.

Reference: the same build with the speed-ups switched off by their module flags (the binder's memo,
``calc_binding.MEMO``; the column reader's inline-string pass, ``sheet_columns.INLINE_PASS``; the long
sheets' row templates, ``long_sheets.ROW_MEMO``; the intermediate package's zlib level, ``long_sheets.LEVEL``,
at 6 as before). These are speed changes only, so the intermediate package's sheet parts must be
byte-identical and the recalculated study the same in every entry.
"""

from __future__ import annotations

import zipfile

import pytest

from trueband.bridge.formulas import calc_binding
from trueband.bridge.study import long_sheets
from trueband.bridge.study.build import build_study, make_study
from trueband.bridge.study.data_workbook import read_study_data
from trueband.bridge.study.demo import make_demo
from trueband.bridge.study.templates import study_data_workbook
from trueband.bridge.workbook import sheet_columns

pytestmark = pytest.mark.slow  # two studies built and recalculated: seconds

_STAMPED = {"docProps/core.xml"}  # the time the package was written


def _switched_off(monkeypatch):
    monkeypatch.setattr(calc_binding, "MEMO", False)
    monkeypatch.setattr(sheet_columns, "INLINE_PASS", False)
    monkeypatch.setattr(long_sheets, "LEVEL", 6)
    monkeypatch.setattr(long_sheets, "ROW_MEMO", False)


def _entries(path):
    with zipfile.ZipFile(path) as z:
        return {i.filename: (z.read(i.filename), i.compress_type, i.compress_size) for i in z.infolist()}


def test_intermediate_sheets_and_study_unchanged(tmp_path, monkeypatch):
    data = study_data_workbook(tmp_path / "data.xlsx", make_demo(120), cut=24)
    fast = tmp_path / "fast"
    slow = tmp_path / "slow"
    fast.mkdir()
    slow.mkdir()
    build_study(read_study_data(data), fast / "raw.xlsx")
    make_study(data, fast / "study.xlsx")
    with monkeypatch.context() as m:
        _switched_off(m)
        build_study(read_study_data(data), slow / "raw.xlsx")
        make_study(data, slow / "study.xlsx")
    raw_fast, raw_slow = _entries(fast / "raw.xlsx"), _entries(slow / "raw.xlsx")
    sheets = [n for n in raw_fast if n.startswith("xl/worksheets/") and n.endswith(".xml")]
    assert len(sheets) > 5 and sorted(raw_fast) == sorted(raw_slow)
    for name in sheets:  # the spliced long sheets and the bound formulas: the same bytes
        assert raw_fast[name][0] == raw_slow[name][0], name
    assert any(b"_xludf." in raw_fast[n][0] for n in sheets)
    study_fast, study_slow = _entries(fast / "study.xlsx"), _entries(slow / "study.xlsx")
    assert list(study_fast) == list(study_slow)
    for name in study_fast:  # recompressed by the recalculation's writer: same text, same compressed size
        if name not in _STAMPED:
            assert study_fast[name] == study_slow[name], name
