"""The demo test's raw answers and answer key (invented), for the Options sheet and the keyed Scored items.

Each of the 40 items offers options A to D. A candidate who answered an item correctly in the demo chose its
key; one who did not chose a distractor, the more plausible distractors more often. Three items are made to
show what the option analysis is for:

* item Q05: one distractor that nobody chooses (a distractor that does no work);
* item Q13 (the weak item of the demo): one distractor drawn mostly by the stronger candidates;
* item Q21: the key sheet gives the wrong key (the option most strong candidates choose is the right one), so the
  item shows a negative item–total correlation and every "check the key" flag.

Everything comes from a fixed seed; the data is for demonstration only.
"""

from __future__ import annotations

import numpy as np

from .demo import DemoData

__all__ = ["KEY_SHEET", "ANSWERS_SEED", "OPTIONS", "raw_answers", "key_rows"]

KEY_SHEET = "Answer key"
ANSWERS_SEED = 20261205
OPTIONS = "ABCD"
UNUSED_DISTRACTOR_ITEM, UPPER_DISTRACTOR_ITEM, MISKEYED_ITEM = 4, 12, 20   # 0-based: Q05, Q13, Q21


def _true_keys(k: int) -> list[str]:
    rng = np.random.default_rng(ANSWERS_SEED)
    return [OPTIONS[i] for i in rng.integers(0, 4, k)]


def raw_answers(demo: DemoData) -> list[list[str]]:
    """The answer each applicant chose on each item (letters A to D), consistent with ``demo.items``."""
    rng = np.random.default_rng(ANSWERS_SEED + 1)
    n, k = demo.items.shape
    keys = _true_keys(k)
    score = demo.items.sum(axis=1)
    strong = score >= np.median(score)
    out = [[""] * k for _ in range(n)]
    for j in range(k):
        distractors = [o for o in OPTIONS if o != keys[j]]
        weights = np.array([0.5, 0.3, 0.2])
        if j == UNUSED_DISTRACTOR_ITEM:
            weights = np.array([0.65, 0.35, 0.0])
        for i in range(n):
            if demo.items[i, j]:
                out[i][j] = keys[j]
                continue
            w = weights
            if j == UPPER_DISTRACTOR_ITEM:
                w = np.array([0.8, 0.1, 0.1]) if strong[i] else np.array([0.1, 0.45, 0.45])
            out[i][j] = distractors[int(rng.choice(3, p=w / w.sum()))]
    return out


def key_rows(demo: DemoData) -> list[list]:
    """The answer key sheet: item headers, the key (one of them wrong, as a demonstration), the options offered."""
    keys = _true_keys(len(demo.item_names))
    # the most chosen distractor of the mis-keyed item becomes its (wrong) key
    answers = np.array(raw_answers(demo))[:, MISKEYED_ITEM]
    wrong = [o for o in OPTIONS if o != keys[MISKEYED_ITEM]]
    keys[MISKEYED_ITEM] = max(wrong, key=lambda o: int((answers == o).sum()))
    return [["Item", *demo.item_names], ["Key", *keys], ["Options offered", *([OPTIONS] * len(keys))]]
