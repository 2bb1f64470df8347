"""The demo's second predictor: an invented 12-item *Work Style Questionnaire* (responses 1 to 5).

The applicants answered twelve statements about how they work; three are worded the other way round
(reverse keyed). The trait behind the answers relates modestly to later job performance and hardly at all
to the knowledge test, so the questionnaire adds validity over the test (the Combined sheet's increment);
the groups differ little on it (an invented difference of a tenth of a standard deviation), so the
composite's subgroup difference is smaller than the test's. Generated from its own seed so that the rest of
the demo is unchanged. Invented data, for demonstration only.
"""

from __future__ import annotations

import numpy as np

__all__ = ["QUESTIONNAIRE_NAME", "QUESTIONNAIRE_ITEMS", "QUESTIONNAIRE_REVERSED", "make_questionnaire"]

QUESTIONNAIRE_NAME = "Work Style Questionnaire"
QUESTIONNAIRE_ITEMS = tuple(f"W{j:02d}" for j in range(1, 13))
#: The statements worded the other way round (scored 1 + 5 − response).
QUESTIONNAIRE_REVERSED = ("W03", "W07", "W10")


def make_questionnaire(seed: int, performance_latent: np.ndarray, group_b: np.ndarray) -> np.ndarray:
    """Applicants × 12 responses, 1 to 5, from a trait correlated about .4 with the performance latent."""
    rng = np.random.default_rng(seed + 1)
    n = performance_latent.size
    z = (performance_latent - performance_latent.mean()) / performance_latent.std()
    trait = 0.4 * z + np.sqrt(1 - 0.4 ** 2) * rng.standard_normal(n) - 0.1 * group_b
    loading = rng.uniform(0.55, 0.8, len(QUESTIONNAIRE_ITEMS))
    raw = 3.0 + 1.1 * (loading * trait[:, None] + np.sqrt(1 - loading ** 2) * rng.standard_normal((n, loading.size)))
    reversed_ = [QUESTIONNAIRE_ITEMS.index(name) for name in QUESTIONNAIRE_REVERSED]
    raw[:, reversed_] = 6.0 - raw[:, reversed_]
    return np.clip(np.rint(raw), 1, 5).astype(int)
