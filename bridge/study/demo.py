"""The demo scenario: an invented employer, an invented role, invented applicants.

*Osterfell Harbour Logistics* (invented) is hiring **cargo dispatch
coordinators**. Each applicant took a 40-item *Dispatch Knowledge Test*
(items scored 0/1) and a structured interview rated 1 to 5 by three raters;
the people hired earlier under the old process have a supervisor performance
rating; a few applicants sat the test twice; applicants belong to two groups
named neutrally ("Group A", "Group B") for the adverse-impact analysis, and
to an age band; they applied at one of three invented sites and passed (or
not) a paper screen and an interview before hiring (:mod:`.demo_impact`).
They also answered a 12-statement
*Work Style Questionnaire* (a second predictor, :mod:`.demo_predictors`).

Everything is generated from a fixed seed with :func:`numpy.random.default_rng`,
so the demo is the same on every machine. The structure is chosen to look like
real selection data, not to reproduce any real study:

* ability is normal; the 40 items follow a two-parameter logistic model with
  moderate discriminations, so coefficient alpha comes out near .85; two items
  are made weak on purpose (one barely discriminates, one nearly everyone
  answers correctly) so the item analysis has something to flag;
* the interview shares some variance with ability, each rater has a leniency
  of their own and rating noise;
* the people hired earlier were chosen on a mix of test score and interview
  (indirect range restriction); their performance rating relates to ability
  modestly, so the observed validity among those hired is near .3;
* Group B's mean ability is half a standard deviation lower (an invented
  difference, large enough for a cut score to show adverse impact).

This data is for demonstration only; no check value in the tests comes from it.
"""

from __future__ import annotations

import dataclasses

import numpy as np

from .demo_impact import HEADER as EXTRA_HEADER, ImpactExtras, make_impact_extras
from .demo_predictors import QUESTIONNAIRE_ITEMS, make_questionnaire

__all__ = ["DemoData", "make_demo", "DEMO_SEED", "ORGANISATION", "ROLE", "TEST_NAME"]

DEMO_SEED = 20261201
ORGANISATION = "Osterfell Harbour Logistics"
ROLE = "cargo dispatch coordinator"
TEST_NAME = "Dispatch Knowledge Test"


@dataclasses.dataclass(frozen=True)
class DemoData:
    """The demo applicants, one entry per applicant in every array."""

    ids: list[str]
    groups: list[str]
    items: np.ndarray           # applicants x 40, 0/1
    ratings: np.ndarray         # applicants x 3, 1..5
    performance: list[float | None]   # blank (None) for people not hired or not yet rated
    retest: list[float | None]  # blank for people who sat the test once
    hired: list[str]            # "yes" / "no"
    extras: ImpactExtras | None = None   # age band, site and stages (see .demo_impact)
    questionnaire: np.ndarray | None = None   # applicants x 12, 1..5: the second predictor (demo_predictors)

    @property
    def n(self) -> int:
        return len(self.ids)

    item_names = tuple(f"Q{j:02d}" for j in range(1, 41))
    rater_names = ("Interview rater 1", "Interview rater 2", "Interview rater 3")

    def header(self) -> list[str]:
        return ["Applicant", "Group", *self.item_names, *self.rater_names,
                "Supervisor rating", "Retest score", "Hired", *(EXTRA_HEADER if self.extras is not None else ()),
                *self.questionnaire_names]

    @property
    def questionnaire_names(self) -> tuple[str, ...]:
        return QUESTIONNAIRE_ITEMS if self.questionnaire is not None else ()

    def rows(self):
        """The data rows as lists of plain Python values (blank = None)."""
        for i in range(self.n):
            yield [self.ids[i], self.groups[i], *self.items[i].tolist(), *self.ratings[i].tolist(),
                   self.performance[i], self.retest[i], self.hired[i],
                   *(self.extras.row(i) if self.extras is not None else ()),
                   *(self.questionnaire[i].tolist() if self.questionnaire is not None else ())]


def make_demo(n: int = 400, seed: int = DEMO_SEED) -> DemoData:
    """Generate the demo applicants (``n`` of them, at least 50) from a fixed seed."""
    if n < 50:
        raise ValueError(f"the demo needs at least 50 applicants, got {n}")
    rng = np.random.default_rng(seed)
    n_items = 40

    group_b = rng.random(n) < 0.38
    ability = rng.standard_normal(n) - 0.5 * group_b

    # two-parameter logistic items; item 13 barely discriminates, item 27 is very easy
    discrimination = rng.uniform(0.3, 0.8, n_items)
    difficulty = rng.normal(-0.2, 0.9, n_items)
    discrimination[12], difficulty[12] = 0.08, 0.0
    discrimination[26], difficulty[26] = 0.9, -3.2
    p = 1.0 / (1.0 + np.exp(-1.7 * discrimination * (ability[:, None] - difficulty)))
    items = (rng.random((n, n_items)) < p).astype(int)

    # retest: about one applicant in eight sat the test again on fresh responses
    retook = rng.random(n) < 0.125
    retest_items = (rng.random((n, n_items)) < p).astype(int)
    retest = [float(retest_items[i].sum()) if retook[i] else None for i in range(n)]

    # interview: shares variance with ability; rater leniency and noise
    interview = 0.35 * ability + np.sqrt(1 - 0.35 ** 2) * rng.standard_normal(n)
    leniency = np.array([0.0, 0.3, -0.25])
    raw = 3.0 + 0.85 * interview[:, None] + leniency + rng.normal(0.0, 0.5, (n, 3))
    ratings = np.clip(np.rint(raw), 1, 5).astype(int)

    # earlier hiring on a mix of test score and interview: about 30% hired (indirect restriction)
    score = items.sum(axis=1)
    composite = (0.8 * (score - score.mean()) / score.std() + 0.5 * (ratings.mean(axis=1) - ratings.mean())
                 / ratings.mean(axis=1).std() + 0.8 * rng.standard_normal(n))
    hired = composite >= np.quantile(composite, 0.70)
    # performance relates to ability and the interview; a few hires left before their review
    latent = 0.27 * ability + 0.12 * interview + 0.92 * rng.standard_normal(n)
    rating = np.clip(np.round(3.3 + 0.55 * latent, 1), 1.0, 5.0)
    reviewed = hired & (rng.random(n) > 0.06)
    performance = [float(rating[i]) if reviewed[i] else None for i in range(n)]

    ids = [f"OHL-{1001 + i}" for i in range(n)]
    groups = ["Group B" if b else "Group A" for b in group_b]
    extras = make_impact_extras(rng, group_b, composite, hired)  # drawn last: the values above are unchanged
    return DemoData(ids=ids, groups=groups, items=items, ratings=ratings, performance=performance,
                    retest=retest, hired=["yes" if h else "no" for h in hired], extras=extras,
                    questionnaire=make_questionnaire(seed, latent, group_b))
