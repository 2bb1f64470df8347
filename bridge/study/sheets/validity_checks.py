"""Validity sheet: the restricted group's own reliability, and the indirect correction shown only where plausible.

The indirect range-restriction correction (Hunter, Schmidt & Le 2006) implies the test's reliability in the
restricted group, 1 − (1 − rxx_applicants)/u². Its cell is a live formula that shows the corrected validity only
when that implied reliability is above 0 and not below the lower confidence limit (Feldt) of the restricted
group's own alpha; otherwise it shows ``not computable:`` and the reason (the rule: ``words.INDIRECT_RULE``).
"""

from __future__ import annotations

from trueband.funcs import call
from trueband.funcs.errors import TruebandError

from ..context import Expr, Ref, StudyContext
from ..words import NOT_COMPUTABLE, INDIRECT_IMPLAUSIBLE, INDIRECT_NOT_POSITIVE, NO_OWN_RELIABILITY
from .reliability import Reliability

__all__ = ["restricted_reliability", "indirect"]


def restricted_reliability(ctx: StudyContext, g, row: int, rel: Reliability, restricted_range: Ref, confidence: Ref):
    """The restricted group's own alpha (B) and its Feldt limits (C, D) at ``row``; returns (alpha, lower)."""
    g.set(row, 1, "Test reliability among the restricted group: their own alpha (KR-20 for 0/1 items)")
    if rel.items is None:
        ctx.not_computable_at(g, row, 2, NO_OWN_RELIABILITY, key="alpha_restricted")
        return None
    alpha = ctx.formula(g, row, 2, "ALPHA_AMONG", rel.items, restricted_range, style="coef", key="alpha_restricted")
    lower, _ = (ctx.formula(g, row, col, "ALPHA_AMONG", rel.items, restricted_range, part, confidence, style="coef",
                            key=f"alpha_restricted_{part}") for col, part in ((3, "lower"), (4, "upper")))
    return alpha, lower


def _branch(implied: Ref, lower: Ref) -> str | None:
    """Which text the rule shows at build time (None: the correction), from the checked values."""
    if not isinstance(implied.value, float):
        return None
    if implied.value <= 0:
        return INDIRECT_NOT_POSITIVE
    if isinstance(lower.value, float) and implied.value < lower.value:
        return INDIRECT_IMPLAUSIBLE
    return None


def indirect(ctx: StudyContext, g, row: int, r: Ref, limits: tuple[Ref, Ref], u: Ref, rxx: Ref, ryy: Ref,
             implied: Ref, own) -> Ref:
    """The indirect correction and its corrected limits at ``row`` (B, C, D), each a live IF on the rule."""
    if own is None or isinstance(implied.value, TruebandError):
        why = NO_OWN_RELIABILITY if own is None else "the implied reliability is not computable (see the row above)"
        return ctx.not_computable_at(g, row, 2, why, key="operational_indirect")
    _, lower = own
    if not isinstance(lower.value, float):
        return ctx.not_computable_at(g, row, 2, "the restricted group's own alpha is not computable (see the rows "
                                                "above), so the reliability the correction implies cannot be checked",
                                     key="operational_indirect")
    shown = _branch(implied, lower)
    estimate = None
    for col, value, key in ((2, r, "operational_indirect"), (3, limits[0], "operational_indirect_lower"),
                            (4, limits[1], "operational_indirect_upper")):
        call_text = ctx.call_text("RANGE_CORRECT_INDIRECT", (value, u, rxx, ryy), g.title)

        def check(value=value):
            if shown is not None:
                return shown if col == 2 else ""
            return call("RANGE_CORRECT_INDIRECT", *(ctx.value(a) for a in (value, u, rxx, ryy)))

        template = ("IF({implied}<=0,{not_positive},IF({implied}<{lower},{implausible},{call}))" if col == 2 else
                    'IF(ISNUMBER({estimate}),{call},"")')
        text = ctx.text(template, g.title, implied=implied, lower=lower, not_positive=INDIRECT_NOT_POSITIVE,
                        implausible=INDIRECT_IMPLAUSIBLE, estimate=estimate or implied,
                        call=Expr(call_text))
        made = ctx.put(g, row, col, "=" + text, check, style="coef", key=key)
        if col == 2:
            estimate = made
            if shown is not None:
                ctx.not_computable.append((g.title, made.coordinate, shown.removeprefix(NOT_COMPUTABLE)))
    return estimate

