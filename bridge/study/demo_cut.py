"""The demo's invented standard-setting panel and content experts (for the Standard setting and Content sheets).

Six invented judges rate the 40 items of the demo test (Angoff probabilities, Nedelsky options left), sort
them into an Ebel grid, state Hofstee and Beuk judgments, and judge 30 of the applicants they know; nine
invented subject-matter experts rate each item essential, useful or not necessary. Everything comes from a
fixed seed; the judgments follow the items' difficulty in the demo with noise, so the methods' cuts land in
the same region without agreeing exactly, as real panels do. No check value in the tests comes from it.
"""

from __future__ import annotations

import numpy as np

from .demo import DemoData

__all__ = ["JUDGES_SHEET", "CONTENT_SHEET", "CUT_SEED", "judges_rows", "content_rows", "setup_values"]

JUDGES_SHEET = "Judges"
CONTENT_SHEET = "Content ratings"
CUT_SEED = 20261204
_JUDGES = tuple(f"Judge {j}" for j in range(1, 7))
_EXPERTS = tuple(f"Expert {j}" for j in range(1, 10))


def setup_values(demo: DemoData | None) -> dict:
    """The Setup settings of the cut-score evidence: named for the demo, blank for a template."""
    if demo is None:
        return {}
    return {"judges sheet": JUDGES_SHEET, "standard setting method": "Angoff", "sem adjustment": 1,
            "content ratings sheet": CONTENT_SHEET, "content critical value": "exact"}


def judges_rows(demo: DemoData | None, cut: float | None) -> list[list]:
    """The judges' sheet as rows: each block's title, header and (for the demo) judgments, a blank row between."""
    rng = np.random.default_rng(CUT_SEED)
    items = list(demo.item_names) if demo is not None else [f"Q{j:02d}" for j in range(1, 41)]
    k = len(items)
    rows: list[list] = [["Standard-setting judgments (one block per method; leave out the blocks you do not use)"],
                        []]

    def block(title: str, header: list, body: list[list]) -> None:
        rows.extend([[title], header, *body, []])

    p = demo.items.mean(axis=0) if demo is not None else None
    angoff = nedelsky = None
    if demo is not None:
        # a minimally competent candidate does somewhat worse than the average applicant
        target = cut if cut is not None else float(np.median(demo.items.sum(axis=1)))
        angoff = np.clip(np.round((p[:, None] * target / p.sum() + rng.normal(0.0, 0.08, (k, 6))) * 20) / 20,
                         0.05, 0.95)
        nedelsky = np.clip(np.rint(1.0 / np.clip(0.9 * p[:, None] + rng.normal(0, 0.1, (k, 6)), 0.26, 1.0)),
                           1, 4).astype(int)
    block("Angoff", ["Item", *_JUDGES], [[items[i], *(angoff[i].tolist() if angoff is not None else [])]
                                         for i in range(k)])
    block("Nedelsky", ["Item", *_JUDGES], [[items[i], *(nedelsky[i].tolist() if nedelsky is not None else [])]
                                           for i in range(k)])
    relevance = ["Essential", "Important", "Acceptable"]
    counts = [[8, 7, 3], [6, 6, 4], [2, 2, 2]] if demo is not None else [[], [], []]
    judged = [[0.95, 0.8, 0.6], [0.85, 0.65, 0.45], [0.7, 0.5, 0.3]] if demo is not None else [[], [], []]
    block("Ebel counts", ["Relevance", "Easy", "Medium", "Hard"], [[r, *c] for r, c in zip(relevance, counts)])
    block("Ebel proportions", ["Relevance", "Easy", "Medium", "Hard"], [[r, *c] for r, c in zip(relevance, judged)])
    hofstee_header = ["Judge", "Lowest acceptable cut", "Highest acceptable cut", "Lowest acceptable fail rate",
                      "Highest acceptable fail rate"]
    beuk_header = ["Judge", "Cut", "Expected pass rate"]
    if demo is not None:
        base = cut if cut is not None else float(np.median(demo.items.sum(axis=1)))
        hofstee = [[j, base - 5 + int(rng.integers(-1, 2)), base + 3 + int(rng.integers(-1, 2)),
                    round(0.3 + rng.uniform(-0.05, 0.05), 2), round(0.7 + rng.uniform(-0.05, 0.05), 2)]
                   for j in _JUDGES]
        beuk = [[j, base + int(rng.integers(-3, 3)), round(0.45 + rng.uniform(-0.1, 0.1), 2)] for j in _JUDGES]
    else:
        hofstee = [[j] for j in _JUDGES]
        beuk = [[j] for j in _JUDGES]
    block("Hofstee", hofstee_header, hofstee)
    block("Beuk", beuk_header, beuk)
    candidates = []
    if demo is not None:
        scores = demo.items.sum(axis=1)
        known = rng.choice(demo.n, 30, replace=False)
        base = cut if cut is not None else float(np.median(scores))
        for i in sorted(known):
            impression = scores[i] + rng.normal(0.0, 3.0)
            candidates.append([demo.ids[i], "yes" if impression >= base else "no",
                               "yes" if abs(impression - base) <= 2.5 else "no"])
    block("Candidate judgments", ["Applicant", "Qualified", "Borderline"], candidates)
    return rows


def content_rows(demo: DemoData | None) -> list[list]:
    """The experts' content ratings as rows: a header, then one row per item (ratings for the demo only)."""
    rng = np.random.default_rng(CUT_SEED + 1)
    items = list(demo.item_names) if demo is not None else [f"Q{j:02d}" for j in range(1, 41)]
    rows: list[list] = [["Item", *_EXPERTS]]
    words = ("essential", "useful", "not necessary")
    for i, item in enumerate(items):
        if demo is None:
            rows.append([item])
            continue
        essential = 0.85 if i % 7 else 0.45   # every seventh item is of doubtful relevance (invented)
        draw = rng.choice(3, len(_EXPERTS), p=[essential, (1 - essential) * 0.7, (1 - essential) * 0.3])
        rows.append([item, *(words[d] for d in draw)])
    return rows
