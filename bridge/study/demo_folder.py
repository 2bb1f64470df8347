"""Writing the demo folder: the invented data workbook, its validation study and its report, the filled scoring and
adverse-impact sheets and the empty templates, all recalculated, through a temporary folder."""

from __future__ import annotations

import os
from pathlib import Path
from typing import TYPE_CHECKING

import numpy as np

from trueband.funcs.impact import tally_groups

from ..workbook.files import apply_permissions, temporary_folder
from .demo import make_demo

if TYPE_CHECKING:
    from .build import StudyResult


DEMO_FILES = {
    "data": "osterfell-applicants.xlsx",
    "study": "osterfell-study.xlsx",
    "report": "osterfell-report.docx",
    "scoring": "osterfell-scoring-sheet.xlsx",
    "impact": "osterfell-adverse-impact.xlsx",
    "blank_data": "templates/study-data-template.xlsx",
    "blank_scoring": "templates/scoring-sheet-template.xlsx",
    "blank_impact": "templates/adverse-impact-template.xlsx",
    "answers": "osterfell-answers.xlsx",              # the same applicants' raw answers (A to D) and the key
    "answers_study": "osterfell-answers-study.xlsx",  # its study, with the Options sheet
}


class DemoFolderError(Exception):
    """The demo's target folder cannot be used (one line; nothing was written)."""


def write_demo(target: Path, *, n: int = 400) -> tuple[StudyResult, dict[str, Path]]:
    """Write the demo into ``target`` (a new or empty folder) through a temporary folder beside it."""
    from ..engine.recalc import recalculate
    from trueband.funcs import __version__

    from .build import make_study
    from .report import write_report
    from .templates import impact_template, scoring_template, study_data_workbook

    if target.exists() and (not target.is_dir() or any(target.iterdir())):
        raise DemoFolderError(f"{target} exists and is not an empty folder; give a new folder (nothing was written)")
    parent = target.parent if target.parent != Path("") else Path.cwd()
    parent.mkdir(parents=True, exist_ok=True)
    with temporary_folder(parent, "demo") as work:  # private (0700) while it fills; removed if anything fails
        (work / "templates").mkdir()
        demo = make_demo(n)
        scores = demo.items.sum(axis=1)
        cut = float(np.ceil(np.quantile(scores, 0.6)))  # about 40% pass
        paths = {k: work / v for k, v in DEMO_FILES.items()}
        study_data_workbook(paths["data"], demo, cut=cut)
        study_data_workbook(paths["answers"], demo, cut=cut, answers=True)
        scoring_template(paths["scoring"], ids=demo.ids, responses=demo.items.tolist(),
                         title="Scoring sheet: Dispatch Knowledge Test (demo)")
        tally = tally_groups(demo.groups, scores >= cut)  # labels merged as the study merges them
        counts = [(g, tally.applicants[g], tally.selected[g]) for g in tally.names]
        impact_template(paths["impact"], groups=counts,
                        title=f"Adverse impact at a cut of {cut:g} on the Dispatch Knowledge Test (demo)")
        study_data_workbook(paths["blank_data"])
        scoring_template(paths["blank_scoring"])
        impact_template(paths["blank_impact"])
        for key in ("data", "scoring", "impact", "blank_data", "blank_scoring", "blank_impact", "answers"):
            recalculate(paths[key], in_place=True)
        result = make_study(paths["data"], paths["study"])
        make_study(paths["answers"], paths["answers_study"])
        write_report(paths["study"], paths["report"], version=__version__)
        apply_permissions(work, None)  # the private temporary folder becomes an ordinary one
        if target.exists():
            target.rmdir()  # empty, checked above; a rename cannot replace a folder on every platform
        os.replace(work, target)
    final = {k: target / v for k, v in DEMO_FILES.items()}
    result.path = final["study"]
    return result, final
