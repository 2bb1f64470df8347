"""The study's charts, read for the report: where each sits, what it plots, and the stored values of its cells.

Nothing here knows a particular chart: every chart part the study's drawings hold is read the same way (its
title, axis titles, and per series its name and the cells of its x or category values and of its y values), and
the values are the ones the study stores in those cells. A chart a later sheet adds is read without a change
here. Drawing them is :mod:`.draw`'s (matplotlib, an optional extra).
"""

from __future__ import annotations

import re
import zipfile
from dataclasses import dataclass
from pathlib import Path, PurePosixPath
from typing import Any

from openpyxl.utils import column_index_from_string, get_column_letter

from ...workbook.shared_strings import safe_xml

__all__ = ["ChartSeries", "StudyChart", "read_charts"]

_C = "{http://schemas.openxmlformats.org/drawingml/2006/chart}"
_A = "{http://schemas.openxmlformats.org/drawingml/2006/main}"
_XDR = "{http://schemas.openxmlformats.org/drawingml/2006/spreadsheetDrawing}"
_R = "{http://schemas.openxmlformats.org/officeDocument/2006/relationships}"
_PLOTS = {"scatterChart": "scatter", "barChart": "bar", "bar3DChart": "bar", "lineChart": "line",
          "line3DChart": "line", "areaChart": "line"}
_RANGE = re.compile(r"^(?:'((?:[^']|'')+)'|([^'!]+))!\$?([A-Z]{1,3})\$?(\d+)(?::\$?([A-Z]{1,3})\$?(\d+))?$")


@dataclass(frozen=True)
class ChartSeries:
    """One series: its name, what kind of plot draws it, its x (scatter) or category values and its y values,
    and the cells each came from (``Validity!P3:P117``; empty when the chart holds literal values)."""

    name: str
    kind: str                      # "scatter", "bar" or "line"
    x: tuple[Any, ...]
    y: tuple[Any, ...]
    x_cells: str
    y_cells: str
    trend: bool = False            # the chart draws a least-squares line through the points


@dataclass(frozen=True)
class StudyChart:
    sheet: str
    row: int                       # the sheet row of the chart's top-left corner
    anchor: str                    # its top-left cell, e.g. "A63"
    title: str
    x_title: str
    y_title: str
    series: tuple[ChartSeries, ...]
    stacked: bool = False

    def sources(self) -> str:
        """The cells the chart's data come from, said in words (for its caption)."""
        parts = []
        for s in self.series:
            name = s.name or "series"
            if s.x_cells and s.y_cells:
                how = "against" if s.kind == "scatter" else "by"
                parts.append(f"{name}: {s.y_cells} {how} {s.x_cells}")
            elif s.y_cells:
                parts.append(f"{name}: {s.y_cells}")
        return "; ".join(parts)


def _text(el) -> str:
    if el is None:
        return ""
    return "".join(t.text or "" for t in el.iter(_A + "t")).strip()


def _title(el) -> str:
    return _text(el.find(_C + "title")) if el is not None else ""


def _split(ref: str) -> tuple[str, str, int, str, int] | None:
    m = _RANGE.match(ref.strip())
    if not m:
        return None
    sheet = (m.group(1) or m.group(2)).replace("''", "'")
    c1, r1 = m.group(3), int(m.group(4))
    c2, r2 = (m.group(5) or c1), int(m.group(6) or r1)
    return sheet, c1, r1, c2, r2


def _where(ref: str) -> str:
    parts = _split(ref)
    if parts is None:
        return ref
    sheet, c1, r1, c2, r2 = parts
    return f"{sheet}!{c1}{r1}" + ("" if (c1, r1) == (c2, r2) else f":{c2}{r2}")


class _Cells:
    """The stored values of the cells a chart reads (``values_wb``: a workbook opened with its values)."""

    def __init__(self, values_wb):
        self.wb = values_wb

    def read(self, ref: str) -> tuple[Any, ...]:
        parts = _split(ref)
        if parts is None or parts[0] not in self.wb.sheetnames:
            return ()
        sheet, c1, r1, c2, r2 = parts
        k1, k2 = column_index_from_string(c1), column_index_from_string(c2)
        ws = self.wb[sheet]
        out = []
        for row in ws.iter_rows(min_row=min(r1, r2), max_row=max(r1, r2), min_col=min(k1, k2), max_col=max(k1, k2),
                                values_only=True):
            out.extend(row)
        return tuple(out)


def _data(el, cells: _Cells) -> tuple[tuple[Any, ...], str]:
    """A series' values and their cells: a reference (read from the stored cells) or a literal list."""
    if el is None:
        return (), ""
    f = el.find(f".//{_C}f")
    if f is not None and f.text:
        return cells.read(f.text), _where(f.text)
    points = sorted(((int(p.get("idx", "0")), p.findtext(_C + "v")) for p in el.iter(_C + "pt")))
    values = []
    for _, v in points:
        try:
            values.append(float(v))
        except (TypeError, ValueError):
            values.append(v)
    return tuple(values), ""


def _series_name(ser, cells: _Cells) -> str:
    tx = ser.find(_C + "tx")
    if tx is None:
        return ""
    literal = tx.findtext(_C + "v")
    if literal:
        return literal
    values, _ = _data(tx, cells)
    return str(values[0]) if values and values[0] is not None else ""


def _chart(root, cells: _Cells, sheet: str, row: int, col: int) -> StudyChart | None:
    chart = root.find(_C + "chart")
    plot = chart.find(_C + "plotArea") if chart is not None else None
    if plot is None:
        return None
    series, stacked = [], False
    for group in plot:
        kind = _PLOTS.get(group.tag.replace(_C, ""))
        if kind is None:
            continue
        grouping = group.find(_C + "grouping")
        stacked = stacked or (grouping is not None and grouping.get("val") in ("stacked", "percentStacked"))
        for ser in group.findall(_C + "ser"):
            xs, x_cells = _data(ser.find(_C + ("xVal" if kind == "scatter" else "cat")), cells)
            ys, y_cells = _data(ser.find(_C + ("yVal" if kind == "scatter" else "val")), cells)
            if kind == "scatter" and ser.find(_C + "marker/" + _C + "symbol") is not None \
                    and ser.find(_C + "marker/" + _C + "symbol").get("val") == "none":
                kind_here = "line"      # a scatter series drawn as a line only (a reference line)
            else:
                kind_here = kind
            series.append(ChartSeries(_series_name(ser, cells), kind_here, xs, ys, x_cells, y_cells,
                                      trend=ser.find(_C + "trendline") is not None))
    axes = [a for a in plot if a.tag in (_C + "valAx", _C + "catAx", _C + "dateAx")]
    x_title = _title(axes[0]) if axes else ""
    y_title = _title(axes[1]) if len(axes) > 1 else ""
    return StudyChart(sheet, row, f"{get_column_letter(col)}{row}", _title(chart), x_title, y_title, tuple(series),
                      stacked)


def _rels(z: zipfile.ZipFile, part: str) -> dict[str, str]:
    """A part's relationships: id -> the target part's name."""
    p = PurePosixPath(part)
    name = str(p.parent / "_rels" / (p.name + ".rels"))
    if name not in z.namelist():
        return {}
    out = {}
    for rel in safe_xml(z.read(name)):
        target, rid = rel.get("Target", ""), rel.get("Id", "")
        if target.startswith("/"):
            full = target.lstrip("/")
        else:
            full = str(PurePosixPath(*_normal((p.parent / target).parts)))
        out[rid] = full
    return out


def _normal(parts) -> list[str]:
    out: list[str] = []
    for part in parts:
        if part == "..":
            if out:
                out.pop()
        elif part != ".":
            out.append(part)
    return out


def read_charts(path: Path, sheet_parts: dict[str, str], values_wb, titles) -> list[StudyChart]:
    """The charts on the sheets ``titles`` (in workbook order), top to bottom and left to right on each sheet,
    with the stored values of the cells they read."""
    cells = _Cells(values_wb)
    out: list[StudyChart] = []
    with zipfile.ZipFile(path) as z:
        for title, part in sheet_parts.items():
            if title not in titles:
                continue
            found = []
            for drawing in _rels(z, part).values():
                if "/drawings/" not in drawing or drawing not in z.namelist():
                    continue
                targets = _rels(z, drawing)
                for anchor in safe_xml(z.read(drawing)):
                    start = anchor.find(_XDR + "from")
                    ref = next((e.get(_R + "id") for e in anchor.iter() if e.tag == _C + "chart"), None)
                    if start is None or ref not in targets or targets[ref] not in z.namelist():
                        continue
                    row = int(start.findtext(_XDR + "row", "0")) + 1
                    col = int(start.findtext(_XDR + "col", "0")) + 1
                    chart = _chart(safe_xml(z.read(targets[ref])), cells, title, row, col)
                    if chart is not None:
                        found.append((row, col, chart))
            out.extend(c for _, _, c in sorted(found, key=lambda t: (t[0], t[1])))
    return out
