"""The demo's adverse-impact extras (invented): a second demographic column, three sites and two stages.

Drawn after every other demo value from the same generator, so the rest of the demo is unchanged:

* ``Age band``: "Under 40" or "40 and over" (about one in three), unrelated to ability;
* ``Site``: three invented hiring sites (Northquay, Eastbasin, Westmoor) with different shares of the
  groups, so pooling over sites and adding sites together can differ;
* ``Passed screen`` and ``Interviewed``, yes/no: everybody hired passed both; of the others, most passed the
  paper screen, and those interviewed are the screened with the better mix of test and interview.
"""

from __future__ import annotations

import dataclasses

import numpy as np

__all__ = ["ImpactExtras", "make_impact_extras", "SITES", "HEADER"]

SITES = ("Northquay", "Eastbasin", "Westmoor")
HEADER = ("Age band", "Site", "Passed screen", "Interviewed")


@dataclasses.dataclass(frozen=True)
class ImpactExtras:
    age: list[str]
    site: list[str]
    screen: list[str]
    interviewed: list[str]

    def row(self, i: int) -> list[str]:
        return [self.age[i], self.site[i], self.screen[i], self.interviewed[i]]


def make_impact_extras(rng: np.random.Generator, group_b: np.ndarray, composite: np.ndarray,
                       hired: np.ndarray) -> ImpactExtras:
    """The extras for the demo applicants, from the demo's generator after its own draws."""
    n = group_b.size
    older = rng.random(n) < 0.33
    # Group B applies more often at Westmoor (an invented pattern)
    u = rng.random(n)
    site = np.where(group_b, np.digitize(u, [0.25, 0.5]), np.digitize(u, [0.45, 0.8]))
    screened = hired | (rng.random(n) < 0.82)
    interviewed = hired | (screened & (composite >= np.quantile(composite, 0.45)))
    yes = ("no", "yes")
    return ImpactExtras(age=["40 and over" if o else "Under 40" for o in older],
                        site=[SITES[s] for s in site], screen=[yes[int(x)] for x in screened],
                        interviewed=[yes[int(x)] for x in interviewed])
