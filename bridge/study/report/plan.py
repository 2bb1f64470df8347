"""What a validation report holds, in order: its sections, which study sheets feed each, and the parts only a
person can write.

The headings follow the documentation the Uniform Guidelines ask of a criterion-related validity study
(29 CFR 1607.15B: users, location and dates; the problem and setting; job analysis; the job titles; the
criterion measures; the sample; the selection procedures; the techniques and results, including adverse
impact and fairness; alternative procedures; uses and applications, including cut scores; source data;
contact person) and the report contents the professional guidelines list (Society for Industrial and
Organizational Psychology, *Principles for the Validation and Use of Personnel Selection Procedures*,
5th ed., 2018). A sheet a later study adds and no section names goes to "Further analyses", so the report
never drops a sheet.
"""

from __future__ import annotations

from dataclasses import dataclass

__all__ = ["PLACEHOLDER_MARK", "SECTIONS", "Section", "section_of"]

#: every part only a person can write starts with this mark (and is shaded), so none is handed over unwritten
PLACEHOLDER_MARK = "[TO BE WRITTEN BY THE STUDY'S AUTHOR]"

#: a test that finds no significant difference is not evidence that there is none: said before the figures
FAIRNESS_NOT_SHOWN = (
    "Read these figures as indicators, not as a finding. A difference between groups' regression lines, or an "
    "item's difference between groups, that is not statistically significant does not establish that the test "
    "predicts equally well, or works the same way, for every group: with groups of these sizes a real difference "
    "can go undetected, so look at the intervals as well as the p values.")
IMPACT_NOT_SHOWN = (
    "Read these figures as indicators, not as a legal finding. An impact ratio at or above four-fifths, or a "
    "difference in selection rates that is not statistically significant, does not establish that adverse "
    "impact is absent: small groups give wide intervals, and the Uniform Guidelines also weigh differences "
    "that are practically or statistically significant whatever the ratio, and each step of the process "
    "(29 CFR 1607.4C and 1607.4D).")   # 4C: components of the process; 4D: four-fifths and significance (from memory)


@dataclass(frozen=True)
class Section:
    heading: str
    sheets: tuple[str, ...] = ()         # study sheets (by title, or a title's first word) shown here, in order
    summary_heading: str | None = None   # the Summary's heading whose rows open the section
    placeholders: tuple[str, ...] = ()   # what the author must write here
    intro: str = ""
    caution: str = ""                    # what the section's figures do not support, said before them


SECTIONS: tuple[Section, ...] = (
    Section("Identification", placeholders=(
        ("Who carried out the study and who is responsible for it (name, role, contact), where and when the "
        "data were collected, and when this report was written (29 CFR 1607.15B(1))."),)),
    Section("Purpose and setting", placeholders=(
        ("Why the selection procedure is used, for which decisions, and the labour market and applicant "
        "population it is used with (1607.15B(2))."),)),
    Section("The job and its analysis", sheets=("Content",), placeholders=(
        ("The job analysis: its method, the important work behaviours and outcomes found, and how the "
        "selection procedure and the criterion relate to them (1607.15B(3), 1607.14B(2))."),)),
    Section("The selection procedures", intro="The procedure studied is named on the study's Setup sheet.",
            placeholders=(("How the procedure is given and scored, its content, and how it was developed or "
                          "chosen; alternative procedures considered and why they were not used (1607.15B(9))."),)),
    Section("The criterion", placeholders=(
        ("What the criterion measures, how and when it was collected, by whom, and why it is relevant to the "
        "job; any bias in the criterion considered (1607.15B(5), 1607.14B(2))."),)),
    Section("The sample and its groups", sheets=("Groups",), summary_heading="The people", placeholders=(
        "How the sample was drawn and how it compares with the applicant population (1607.15B(6)).",)),
    Section("Reliability", sheets=("Reliability", "Items", "Options", "Raters"),
            summary_heading="Is the test consistent?"),
    Section("Validity and its corrections", sheets=("Validity", "Combined"),
            summary_heading="Does the score predict job performance?"),
    Section("Fairness", sheets=("Fairness", "DIF"), caution=FAIRNESS_NOT_SHOWN),
    Section("Adverse impact", sheets=("Impact", "Strata", "Stages", "Cuts"),
            summary_heading="Does the cut screen out a group?", caution=IMPACT_NOT_SHOWN),
    Section("The cut score and how it was set", sheets=("Cut score", "Standard setting", "Bands"),
            placeholders=(("The rationale for the cut score and the method used to set it, in the author's "
                          "own words: why it is reasonable and consistent with normal expectations of "
                          "proficiency in the workforce (1607.5H)."),)),
    Section("Utility", sheets=("Utility",), summary_heading="What is the test worth?"),
    Section("Further analyses"),
    Section("Cautions and limits"),
    Section("References"),
)


def section_of(title: str) -> str:
    """The heading of the section that shows the sheet ``title``: by its title, or its title's first word."""
    first = title.split()[0] if title.split() else title
    for section in SECTIONS:
        if title in section.sheets or first in section.sheets:
            return section.heading
    return "Further analyses"
