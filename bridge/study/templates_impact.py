"""The data workbook's layout for the adverse-impact extras: the Setup values of the demo's demographic, site
and stage columns, and yes/no lists on the stage columns."""

from __future__ import annotations

from openpyxl.utils import get_column_letter
from openpyxl.worksheet.datavalidation import DataValidation

__all__ = ["setup_values", "stage_lists"]


def setup_values(demo) -> dict:
    """The Setup rows of the impact settings: the demo's columns, or blank rows to fill for a new study."""
    if demo is None or demo.extras is None:
        return {"group columns": None, "reference groups": None, "stratum column": None, "stage columns": None}
    return {"group columns": "Group, Age band", "reference groups": None, "stratum column": "Site",
            "stage columns": "Passed screen, Interviewed"}


def stage_lists(ws, header: list[str], last: int) -> None:
    """A yes/no list on each stage column of the Applicants sheet (as on the hired column)."""
    for name in ("Passed screen", "Interviewed"):
        if name in header:
            col = get_column_letter(header.index(name) + 1)
            dv = DataValidation(type="list", formula1='"yes,no"', allow_blank=True)
            dv.add(f"{col}2:{col}{last}")
            ws.add_data_validation(dv)
