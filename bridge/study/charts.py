"""Native charts of the validation-study workbook (openpyxl chart parts).

Each function returns a chart whose series refer to cells of the study, so the
chart follows the numbers when the workbook is recalculated. The charts use
only the plain chart types that every spreadsheet app draws the same way
(scatter, clustered or stacked columns, a line), and they set every axis to
visible: openpyxl leaves axes flagged as deleted unless told otherwise.
"""

from __future__ import annotations

from openpyxl.chart import BarChart, LineChart, Reference, ScatterChart, Series
from openpyxl.chart.shapes import GraphicalProperties
from openpyxl.drawing.line import LineProperties
from openpyxl.chart.trendline import Trendline

from .grid import INK

#: Series of the study's charts, told apart in grey print by lightness (dark, middle, light: CIE L* about 24,
#: 57 and 79), and by the line's dashes and the marker's shape as well as by hue.
SERIES_COLOURS = (INK, "6F8F87", "D2C29A")
SERIES_DASHES = ("solid", "dash", "sysDot", "lgDash", "dashDot", "sysDash")
SERIES_MARKERS = ("circle", "triangle", "square", "diamond", "x", "plus")
#: Columns of the score chart: below the cut light, at or above it dark (passing is not shown as a warning).
BELOW_CUT, AT_OR_ABOVE_CUT = "D2C29A", INK

__all__ = ["SERIES_COLOURS", "SERIES_DASHES", "SERIES_MARKERS", "BELOW_CUT", "AT_OR_ABOVE_CUT", "score_vs_criterion", "score_distribution", "selection_rates", "item_map", "area", "group_lines",
           "threshold_line"]


def area(ref) -> Reference:
    """A chart reference to the cells of a :class:`.context.Ref`, absolute and by sheet name (sheets are written
    in streaming mode)."""
    return Reference(range_string=ref.qualified().address(ref.sheet))


def threshold_line(series: Series) -> Series:
    """A threshold drawn as a line (the four-fifths line): the palette's dark ink, dashed and 2.25 pt wide, no
    markers, so that it reads in grey print and is told from the data series by its dashes, not by a warning hue."""
    series.marker.symbol = "none"
    series.smooth = False
    series.graphicalProperties = GraphicalProperties(ln=LineProperties(solidFill=INK, w=28575, prstDash="dash"))
    return series


def _axes(chart, x_title: str, y_title: str):
    chart.x_axis.title = x_title
    chart.y_axis.title = y_title
    for axis in (chart.x_axis, chart.y_axis):
        axis.delete = False
    chart.width, chart.height = 17, 9.5
    chart.legend.position = "b"


def _points_only(series: Series, colour: str = INK, marker: str = "circle"):
    series.marker.symbol = marker
    series.marker.size = 5
    series.marker.graphicalProperties = GraphicalProperties(solidFill=colour)
    series.marker.graphicalProperties.line.solidFill = colour
    series.graphicalProperties.line.noFill = True


def score_vs_criterion(x: Reference, y: Reference, *, x_title: str, y_title: str) -> ScatterChart:
    """Test score against the criterion, one point per person, with the least-squares line."""
    chart = ScatterChart()
    chart.title = "Test score against job performance"
    chart.scatterStyle = "marker"
    chart.style = 13
    series = Series(y, x, title="People with a performance rating")
    _points_only(series)
    series.trendline = Trendline(trendlineType="linear", dispRSqr=False, dispEq=False)
    series.trendline.spPr = GraphicalProperties(ln=LineProperties(solidFill=INK, w=28575, prstDash="dash"))
    chart.series.append(series)
    _axes(chart, x_title, y_title)
    return chart


def score_distribution(labels: Reference, below: Reference, above: Reference, *, cut_text: str) -> BarChart:
    """Stacked columns of how many scored each score: below the cut and at or above it in two colours."""
    chart = BarChart()
    chart.type = "col"
    chart.grouping = "stacked"
    chart.overlap = 100
    chart.gapWidth = 20
    chart.title = f"Score distribution ({cut_text})"
    chart.add_data(below, titles_from_data=True)
    chart.add_data(above, titles_from_data=True)
    chart.set_categories(labels)
    for series, colour in zip(chart.series, (BELOW_CUT, AT_OR_ABOVE_CUT)):
        series.graphicalProperties = GraphicalProperties(solidFill=colour)
        series.graphicalProperties.line.solidFill = INK
    _axes(chart, "Test score", "Applicants")
    return chart


def selection_rates(groups: Reference, rates: Reference, line: Reference) -> BarChart:
    """Selection rate of each group as columns, with four-fifths of the highest rate as a line."""
    bars = BarChart()
    bars.type = "col"
    bars.title = "Selection rate by group against the four-fifths line"
    bars.add_data(rates, titles_from_data=True)
    bars.set_categories(groups)
    bars.y_axis.scaling.min = 0
    bars.series[0].graphicalProperties = GraphicalProperties(solidFill=SERIES_COLOURS[1])
    bars.series[0].graphicalProperties.line.solidFill = INK
    threshold = LineChart()
    threshold.add_data(line, titles_from_data=True)
    threshold.set_categories(groups)
    threshold.series[0].marker.symbol = "dash"
    threshold.series[0].graphicalProperties.line.width = 28575  # 2.25 pt
    threshold.series[0].graphicalProperties.line.solidFill = INK
    threshold.series[0].graphicalProperties.line.prstDash = "dash"
    _axes(bars, "Group", "Selection rate")
    bars += threshold
    return bars


def item_map(difficulty: Reference, discrimination: Reference, *, binary: bool = True,
             scale: tuple[float, float] = (0.0, 1.0)) -> ScatterChart:
    """Each item's difficulty (proportion correct; for rating-scale items the mean, on an axis spanning
    the item scale) against its corrected item-total correlation."""
    chart = ScatterChart()
    chart.title = "Item difficulty against discrimination" if binary else "Item mean against discrimination"
    chart.scatterStyle = "marker"
    chart.style = 13
    series = Series(discrimination, difficulty, title="Items")
    _points_only(series)
    chart.series.append(series)
    chart.x_axis.scaling.min = scale[0]
    chart.x_axis.scaling.max = scale[1]
    _axes(chart, "Difficulty (proportion correct)" if binary else "Mean item score",
          "Corrected item-total correlation")
    chart.legend = None
    return chart


def group_lines(series: list, *, x_title: str, y_title: str) -> ScatterChart:
    """Score against the criterion, one colour of points and one least-squares line per group (``series``:
    (group name, scores reference, criterion reference) for each group)."""
    chart = ScatterChart()
    chart.title = "Criterion on score: one line per group"
    chart.scatterStyle = "marker"
    chart.style = 13
    for k, (name, x, y) in enumerate(series):
        colour = SERIES_COLOURS[k % len(SERIES_COLOURS)]
        s = Series(y, x, title=str(name))
        _points_only(s, colour, SERIES_MARKERS[k % len(SERIES_MARKERS)])
        s.trendline = Trendline(trendlineType="linear", dispRSqr=False, dispEq=False)
        s.trendline.spPr = GraphicalProperties(ln=LineProperties(solidFill=colour, w=28575,
                                                                 prstDash=SERIES_DASHES[k % len(SERIES_DASHES)]))
        chart.series.append(s)
    _axes(chart, x_title, y_title)
    return chart
