"""Drawing the study's charts as images for the report, with matplotlib (the optional extra ``charts``).

Each series is told apart by its marker, its line's dashes or its bars' hatching as well as by its shade, so
that a chart printed in grey still reads. The numbers are the ones the study stores in the chart's cells
(:mod:`.charts`); a series the study draws with a least-squares line gets the same line here (numpy's
first-degree polynomial fit, the line a spreadsheet's linear trendline draws).
"""

from __future__ import annotations

import io
import math
from typing import Any

from .charts import StudyChart

__all__ = ["available", "draw"]

#: the report's shades, dark to light, distinct in grey print; markers, dashes and hatches tell series apart too
_SHADES = ("#1E2A36", "#7A8591", "#4B3A2A", "#A9A196", "#000000", "#5E6B5A")
_MARKERS = ("o", "s", "^", "D", "v", "P")
_DASHES = ("-", "--", ":", "-.", (0, (5, 1, 1, 1)), (0, (1, 1)))
_HATCHES = ("", "///", "xx", "..", "\\\\", "++")


def available() -> bool:
    """Whether matplotlib can be imported (the ``charts`` extra is installed)."""
    try:
        import matplotlib  # noqa: F401
    except ImportError:
        return False
    return True


def _number(v: Any) -> float | None:
    if isinstance(v, bool) or not isinstance(v, (int, float)):
        return None
    return float(v) if math.isfinite(v) else None


def _pairs(xs, ys) -> tuple[list[float], list[float]]:
    px, py = [], []
    for x, y in zip(xs, ys):
        fx, fy = _number(x), _number(y)
        if fx is not None and fy is not None:
            px.append(fx)
            py.append(fy)
    return px, py


def _scatter(ax, chart: StudyChart) -> None:
    import numpy as np

    for k, s in enumerate(chart.series):
        xs, ys = _pairs(s.x, s.y)
        shade, dash = _SHADES[k % len(_SHADES)], _DASHES[k % len(_DASHES)]
        if s.kind == "line":
            ax.plot(xs, ys, linestyle=dash, color=shade, linewidth=1.8, label=s.name)
            continue
        marker = _MARKERS[k % len(_MARKERS)]
        filled = k % 2 == 0
        ax.scatter(xs, ys, s=16, marker=marker, label=s.name, edgecolors=shade,
                   facecolors=shade if filled else "none", linewidths=0.8)
        if s.trend and len(set(xs)) > 1:
            slope, intercept = np.polyfit(xs, ys, 1)
            ends = np.array([min(xs), max(xs)])
            ax.plot(ends, intercept + slope * ends, linestyle=dash, color=shade, linewidth=1.6,
                    label=f"{s.name}: least-squares line")


def _bars(ax, chart: StudyChart) -> None:
    import numpy as np

    bars = [s for s in chart.series if s.kind == "bar"]
    lines = [s for s in chart.series if s.kind != "bar"]
    labels = [str(c) for c in (bars or lines)[0].x]
    where = np.arange(len(labels))
    width = 0.85 if chart.stacked or len(bars) < 2 else 0.85 / len(bars)
    bottom = np.zeros(len(labels))
    for k, s in enumerate(bars):
        heights = np.array([_number(v) or 0.0 for v in s.y[:len(labels)]] + [0.0] * (len(labels) - len(s.y)))
        offset = 0 if chart.stacked or len(bars) < 2 else (k - (len(bars) - 1) / 2) * width
        ax.bar(where + offset, heights, width, bottom=bottom if chart.stacked else None, label=s.name,
               color=("#5F6B77", "#E4DFD7", "#2E2A25", "#B8B1A6")[k % 4], edgecolor="#1E2A36", linewidth=0.6,
               hatch=_HATCHES[k % len(_HATCHES)])
        if chart.stacked:
            bottom = bottom + heights
    for k, s in enumerate(lines):
        ys = [_number(v) for v in s.y[:len(labels)]]
        ax.plot(where[:len(ys)], [math.nan if v is None else v for v in ys], color="#000000",
                linestyle=_DASHES[(k + 1) % len(_DASHES)], linewidth=2.0, label=s.name)
    ax.margins(y=0.08)
    step = max(1, len(labels) // 20)
    ax.set_xticks(where[::step], labels[::step], fontsize=7, rotation=0 if len(labels) <= 12 else 90)


def draw(chart: StudyChart) -> bytes:
    """The chart as a PNG image (about 16 cm by 9 cm at 200 dots per inch)."""
    from matplotlib.figure import Figure   # a bare figure: no pyplot, no global backend state

    fig = Figure(figsize=(6.3, 3.6), dpi=200)
    ax = fig.add_subplot()
    if any(s.kind == "bar" for s in chart.series):
        _bars(ax, chart)
    else:
        _scatter(ax, chart)
    ax.set_title(chart.title, fontsize=9)
    ax.set_xlabel(chart.x_title, fontsize=8)
    ax.set_ylabel(chart.y_title, fontsize=8)
    ax.tick_params(labelsize=7)
    ax.grid(True, color="#D0D0D0", linewidth=0.5)
    ax.set_axisbelow(True)
    if any(s.name for s in chart.series):
        ax.legend(fontsize=7, frameon=False, loc="best")
    fig.tight_layout()
    out = io.BytesIO()
    fig.savefig(out, format="png")
    return out.getvalue()
