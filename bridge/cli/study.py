"""``trueband study`` (a validation-study workbook from a data workbook) and ``trueband demo``."""

from __future__ import annotations

import argparse
import functools
import sys
from pathlib import Path
from typing import TYPE_CHECKING


from .common import EXIT_CELL_ERRORS, EXIT_OK, CommandError
from ..study.demo_folder import DEMO_FILES, DemoFolderError, write_demo  # noqa: F401  (DEMO_FILES: tests)
from ..study.setup_predictors import CLEAR, PREDICTOR_FIELDS, SCOPED, is_clear
from ..study.words import CAUTION, NOT_COMPUTABLE

if TYPE_CHECKING:
    from ..study.build import StudyResult


#: command-line option -> setup field
_OPTIONS = {"sheet": "data_sheet", "id": "id", "group": "group", "items": "items", "reverse": "reverse",
            "item_min": "item_min", "item_max": "item_max", "total": "total",
            "ratings": "ratings", "criterion": "criterion", "retest": "retest", "hired": "hired", "cut": "cut",
            "confidence": "confidence", "criterion_reliability": "criterion_reliability", "success": "success",
            "reference_group": "reference_group", "test_name": "test_name",
            "reference_groups": "reference_groups", "stratum": "stratum", "stages": "stages",
            "applicant_base_rate": "applicant_base_rate"}


def register(sub) -> None:
    p = _Declarations(sub.add_parser(
        "study", help="build a validation-study workbook from a data workbook",
        description="Build a new workbook with a copy of the data and analysis sheets (reliability, items, raters, "
                    "validity, bands, adverse impact, utility) whose every number is a live formula, recalculated. "
                    "Column roles come from the data workbook's Setup sheet; the options below override it. "
                    "Give the word none to clear a setting of the Setup sheet (--retest none: no retest column). "
                    "The options set the first predictor's settings; a further predictor (a questionnaire, an "
                    "interview total...) is a 'predictor | NAME' block on the Setup sheet, whose settings belong to "
                    "it alone. To set a predictor's settings from the command line, put --predictor NAME before "
                    "them: the predictor options after it (--items, --reverse, --item-min, --item-max, --total, "
                    "--ratings, --retest, --cut, --test-name) set that predictor's, up to the next --predictor "
                    "(e.g. --cut 24 --predictor 'Work Style Questionnaire' --cut 40 --retest none); the study-wide "
                    "options go before the first --predictor. " + CAUTION))
    p.add_argument("data", help="the data workbook (.xlsx)")
    p.add_argument("-o", "--output", help="the study workbook to write (default: DATA-study.xlsx beside it)")
    p.add_argument("--overwrite", action="store_true", help="replace the output if it exists")
    p.add_argument("--sheet", help="the data sheet")
    p.add_argument("--id", help="header of the id column")
    p.add_argument("--group", help="header of the applicant-group column, or several demographic columns separated by "
                                   "commas (e.g. Sex,Ethnicity), one impact table each")
    p.add_argument("--items", help="item columns: FIRST:LAST or a comma-separated list of headers")
    p.add_argument("--reverse", help="reverse-keyed items (scored minimum + maximum - response): FIRST:LAST or a "
                                     "comma-separated list of headers; needs --item-min and --item-max")
    p.add_argument("--item-min", type=_number_or_none, help="lowest response an item allows (e.g. 1)")
    p.add_argument("--item-max", type=_number_or_none, help="highest response an item allows (e.g. 5)")
    p.add_argument("--total", help="header of a total-score column")
    p.add_argument("--ratings", help="rating columns: FIRST:LAST or a list")
    p.add_argument("--criterion", help="header of the job-performance column")
    p.add_argument("--retest", help="header of the retest-score column")
    p.add_argument("--hired", help="header of the hired (yes/no) column")
    p.add_argument("--cut", type=_number_or_none, help="cut score for adverse impact and utility")
    p.add_argument("--confidence", type=_number_or_none, help="confidence level (default 0.95)")
    p.add_argument("--criterion-reliability", type=_number_or_none, help="criterion reliability (default 0.52)")
    p.add_argument("--success", type=_number_or_none, help="criterion value that counts as success (default: median)")
    p.add_argument("--reference-group", help="the group others are compared with")
    p.add_argument("--reference-groups", help="a reference group per demographic column, e.g. "
                                              "'Sex: Men; Ethnicity: White' (default: the highest selection rate)")
    p.add_argument("--stratum", help="header of the stratum column (sites, years, job groups) to pool impact over")
    p.add_argument("--stages", help="stage columns of the selection process in order, each yes/no: a "
                                    "comma-separated list of headers or FIRST:LAST")
    p.add_argument("--test-name", help="name of the test, for titles")
    p.add_argument("--applicant-base-rate", type=_number_or_none,
                   help="share of all applicants who would reach the success threshold, if known (Utility's base "
                        "rate; default: the share of the hires who reach it)")
    p.set_defaults(handler=run_study)

    p = sub.add_parser(
        "demo", help="write the demo data, templates and study into a new folder",
        description="Write the invented demo (Osterfell Harbour Logistics hiring cargo dispatch coordinators), the "
                    "workbook templates, and the demo's validation study into DIR (default: a new folder "
                    "trueband-demo in the current directory); nothing existing is overwritten.")
    p.add_argument("dir", nargs="?", help="a new or empty folder")
    p.set_defaults(handler=run_demo)


def _number_or_none(text: str):
    """A number option's value: a number, or the word none (clears the Setup sheet's setting)."""
    if is_clear(text):
        return CLEAR
    try:
        return float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"expected a number or {CLEAR}, got {text!r}") from None


#: The predictor options: the options of ``_OPTIONS`` whose Setup field is a predictor's setting. ``register``
#: declares every option in one list; :class:`_Declarations` puts these in the "predictor options" group with the
#: :class:`_Scoped` action (before any ``--predictor`` the first predictor's setting, after ``--predictor NAME``
#: that predictor's); every other option is a setting of the whole study (refused after ``--predictor``).
_PREDICTOR_OPTIONS = tuple(opt for opt, field in _OPTIONS.items() if field in PREDICTOR_FIELDS)


class _PredictorScope(argparse.Action):
    """``--predictor NAME``: the predictor options after it set that predictor's settings."""

    def __call__(self, parser, namespace, values, option_string=None):
        name = " ".join(str(values).split())
        if not name or is_clear(name):
            parser.error(f"argument {option_string}: give the predictor's name as on the Setup sheet, got {values!r}")
        if namespace.before_predictor is None:  # the study-wide options as they stood before the first --predictor
            namespace.before_predictor = {opt: getattr(namespace, opt, None) for opt in _OPTIONS
                                          if opt not in _PREDICTOR_OPTIONS}
        namespace.predictor_scopes = dict(namespace.predictor_scopes or {})
        namespace.predictor_scopes.setdefault(name, {})
        setattr(namespace, self.dest, name)


class _Scoped(argparse.Action):
    """A predictor option: the first predictor's setting, or after ``--predictor NAME`` that predictor's.
    ``convert`` (the type the option was declared with) runs here, so that its message names the predictor."""

    def __init__(self, option_strings, dest, convert=None, **kwargs):
        super().__init__(option_strings, dest, **kwargs)
        self.convert = convert

    def __call__(self, parser, namespace, values, option_string=None):
        name = getattr(namespace, "current_predictor", None)
        where = f"argument {option_string}" + (f" (predictor {name!r})" if name else "")
        if self.convert is not None:
            try:
                values = self.convert(values)
            except (argparse.ArgumentTypeError, ValueError) as exc:
                parser.error(f"{where}: {exc}")
        if name is None:
            setattr(namespace, self.dest, values)
            return
        scope = namespace.predictor_scopes[name]
        if self.dest in scope:
            parser.error(f"{where}: given twice for this predictor")
        scope[self.dest] = values


class _Declarations:
    """The study parser as :func:`register` declares its options (public argparse calls only): a predictor
    option (``_PREDICTOR_OPTIONS``) goes to the "predictor options" group, after ``--predictor NAME``, with the
    :class:`_Scoped` action; every other option, and ``set_defaults``, to the parser as given. An option added to
    ``register`` and ``_OPTIONS`` is therefore study-wide unless its Setup field is one of ``PREDICTOR_FIELDS``."""

    def __init__(self, parser: argparse.ArgumentParser):
        self.parser = parser
        self.group = parser.add_argument_group(
            "predictor options", "the first predictor's settings; after --predictor NAME, that predictor's (up to "
                                 "the next --predictor)")
        self.group.add_argument("--predictor", metavar="NAME", action=_PredictorScope, dest="current_predictor",
                                help="the predictor (its name on the Setup sheet) whose settings the predictor "
                                     "options after it set, up to the next --predictor; none clears a setting for "
                                     "that predictor alone")
        parser.set_defaults(predictor_scopes=None, before_predictor=None)

    def add_argument(self, *names, **kwargs):
        dest = names[-1].lstrip("-").replace("-", "_")
        if not names[-1].startswith("-") or dest not in _PREDICTOR_OPTIONS:
            return self.parser.add_argument(*names, **kwargs)
        convert = kwargs.pop("type", None)
        return self.group.add_argument(*names, action=functools.partial(_Scoped, convert=convert), **kwargs)

    def set_defaults(self, **kwargs) -> None:
        self.parser.set_defaults(**kwargs)


def _field_value(opt: str, value):
    """(setup field, value) of a command-line option's value."""
    field = _OPTIONS[opt]
    if is_clear(value):
        return field, CLEAR
    if field in ("items", "ratings", "reverse", "stages"):
        value = tuple(p.strip() for p in value.split(",") if p.strip())
    elif field == "group" and "," in value:  # several demographic columns
        field, value = "group_columns", tuple(p.strip() for p in value.split(",") if p.strip())
    return field, value


def _overrides(args) -> dict:
    out = {}
    for opt in _OPTIONS:
        value = getattr(args, opt, None)
        if value is None:
            continue
        field, value = _field_value(opt, value)
        out[field] = value
    before = getattr(args, "before_predictor", None)
    scopes = getattr(args, "predictor_scopes", None)
    if scopes:
        first = next(iter(scopes))
        for opt, value in (before or {}).items():
            if getattr(args, opt, None) != value:
                raise CommandError(f"--{opt.replace('_', '-')} after --predictor {first!r}: it is a setting of the "
                                   f"whole study; give it before the first --predictor")
        out[SCOPED] = {name: dict(_field_value(opt, value) for opt, value in fields.items())
                       for name, fields in scopes.items()}
    return out


def _progress_printer():
    if not sys.stderr.isatty():
        return None

    def show(stage: str, fraction: float):
        print(f"\r  {stage}: {fraction:4.0%}", end="", file=sys.stderr, flush=True)

    return show


def headline_values(path: Path, result: StudyResult) -> dict:
    """The headline numbers as the study workbook shows them (read back from its cached values)."""
    from openpyxl import load_workbook

    keys = ("n_scored", "n_criterion", "alpha", "alpha_lower", "alpha_upper", "sem", "band_width",
            "icc_agreement_average", "r", "r_lower", "r_upper", "r_p", "operational", "min_ratio", "n_below",
            "min_ratio_where", "taylor_russell", "base_rate", "bcg", "multiple_r", "cross_validity", "panel_icc")
    wanted = {k: result.cells[k] for k in keys if k in result.cells}
    wb = load_workbook(path, read_only=True, data_only=True)
    try:
        out = {}
        for key, (sheet, coord) in wanted.items():
            out[key] = wb[sheet][coord].value
        out["cut"] = wb["Summary"][result.cells["cut"][1]].value if "cut" in result.cells else None
        return out
    finally:
        wb.close()


def _fmt(value, digits: int = 3) -> str:
    if isinstance(value, bool):
        return "TRUE" if value else "FALSE"
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        if float(value).is_integer() and digits == 0:
            return f"{int(value)}"
        return f"{value:.{digits}f}"
    if isinstance(value, str) and value.startswith(NOT_COMPUTABLE):
        return value
    return "—" if value is None else str(value)


def headline_lines(h: dict) -> list[str]:
    lines = [f"  applicants with a score: {_fmt(h.get('n_scored'), 0)}; with a performance value: "
             f"{_fmt(h.get('n_criterion'), 0)}"]
    if "alpha" in h and "panel_icc" not in h:
        ci = (f" [{_fmt(h.get('alpha_lower'))}, {_fmt(h.get('alpha_upper'))}]"
              if isinstance(h.get("alpha_lower"), float) else "")
        lines.append(f"  reliability (coefficient alpha): {_fmt(h['alpha'])}{ci}; SEM {_fmt(h.get('sem'), 2)}; "
                     f"band width {_fmt(h.get('band_width'), 2)}")
    if "panel_icc" in h:  # the first predictor is a panel of ratings: its score is the raters' mean
        lines.append(f"  reliability of the panel's mean rating, ICC(A,k): {_fmt(h['panel_icc'])}; SEM "
                     f"{_fmt(h.get('sem'), 2)}; band width {_fmt(h.get('band_width'), 2)}")
    if "icc_agreement_average" in h:
        lines.append(f"  interview panel agreement ICC(A,k): {_fmt(h['icc_agreement_average'])}")
    if "r" in h:
        ci = f" [{_fmt(h.get('r_lower'))}, {_fmt(h.get('r_upper'))}]" if isinstance(h.get("r_lower"), float) else ""
        lines.append(f"  observed validity r: {_fmt(h['r'])}{ci}, p {_fmt(h.get('r_p'), 4)}; operational validity "
                     f"{_fmt(h.get('operational'))}")
    if "min_ratio" in h:
        below = h.get("n_below")
        flag = (f"; {below} group(s) below four-fifths" if isinstance(below, (int, float)) else "")
        where = f" ({h['min_ratio_where']})" if isinstance(h.get("min_ratio_where"), str) and not h[
            "min_ratio_where"].startswith(NOT_COMPUTABLE) else ""
        lines.append(f"  lowest impact ratio at cut {_fmt(h.get('cut'), 1)}: {_fmt(h['min_ratio'])}{where}{flag}")
    if "multiple_r" in h:  # several predictors (the Combined sheet)
        lines.append(f"  predictors combined: multiple R {_fmt(h['multiple_r'])}; cross-validated R² "
                     f"{_fmt(h.get('cross_validity'))}")
    if "taylor_russell" in h:
        tr, base = _fmt(h["taylor_russell"]), _fmt(h.get("base_rate"))
        if isinstance(h["taylor_russell"], (int, float)):
            lines.append(f"  success rate among those selected (Taylor–Russell): {tr} against a base rate of {base}")
        else:  # a reason, which reads last
            lines.append(f"  success rate among those selected (Taylor–Russell; base rate {base}): {tr}")
    return lines


def _report(result: StudyResult, out: Path) -> int:
    for line in result.problems:
        print(f"data problem: {line}", file=sys.stderr)
    print(f"Study written: {out}")
    if result.problems:
        print(f"  {len(result.problems)} data problem(s), listed above and on the Notes sheet")
    if result.cut_message:
        print(f"  Cut score: {result.cut_message}")
    for line in headline_lines(headline_values(out, result)):
        print(line)
    if result.not_computable:
        print(f"  {len(result.not_computable)} cell(s) marked 'not computable' (the reasons are in the cells and on "
              f"the Notes sheet), e.g. {result.not_computable[0][0]}!{result.not_computable[0][1]}: "
              f"{result.not_computable[0][2]}")
    report = result.recalc_report
    code = EXIT_OK
    if report is not None and not report.ok:
        print(f"  {len(report.errors)} cell(s) evaluated to an error:")
        for e in report.errors[:20]:
            print(f"    {e.sheet}!{e.cell}  {e.code}  {e.function}: {e.message}")
        code = EXIT_CELL_ERRORS
    print("Caution: " + CAUTION)
    return code


def run_study(args) -> int:
    src = Path(args.data)
    out = Path(args.output) if args.output else src.with_name(src.stem + "-study.xlsx")
    from ..study.build import StudyError, make_study
    from ..study.setup import SetupError

    try:
        result = make_study(src, out, _overrides(args), overwrite=args.overwrite, progress=_progress_printer())
    except (SetupError, StudyError) as exc:
        raise CommandError(f"{exc}; nothing was written") from None
    return _report(result, out)


# ---------------------------------------------------------------- the demo

def _new_folder(base: Path) -> Path:
    path = base / "trueband-demo"
    k = 2
    while path.exists():
        path = base / f"trueband-demo-{k}"
        k += 1
    return path


def run_demo(args) -> int:
    from ..study.build import StudyError
    from ..study.setup import SetupError

    target = Path(args.dir) if args.dir else _new_folder(Path.cwd())
    try:
        result, paths = write_demo(target)
    except DemoFolderError as exc:
        raise CommandError(str(exc)) from None
    except (SetupError, StudyError) as exc:
        raise CommandError(f"{exc}; nothing was written") from None
    print(f"Demo written to {target}/ (Osterfell Harbour Logistics, an invented employer hiring cargo dispatch "
          f"coordinators; invented data):")
    print(f"  {paths['data'].name:34} the applicants' data and its Setup sheet")
    print(f"  {paths['study'].name:34} the validation study built from it")
    print(f"  {paths['report'].name:34} the report drafted from the study (parts for you to write are marked)")
    print(f"  {paths['scoring'].name:34} scoring sheet: totals, intervals and score bands")
    print(f"  {paths['impact'].name:34} adverse-impact sheet at the demo cut")
    print(f"  {'templates/':34} the three workbooks, empty, to copy and fill")
    print("Headline figures of the study:")
    for line in headline_lines(headline_values(paths["study"], result)):
        print(line)
    print(f"Rebuild the study from the data with: trueband study {paths['data']} -o my-study.xlsx")
    print("Caution: " + CAUTION)
    report = result.recalc_report
    return EXIT_OK if report is None or report.ok else EXIT_CELL_ERRORS
