"""One policy for text categories: the one :func:`trueband.funcs.impact.group_key` applies to group labels.

Category labels (in ``COHEN_KAPPA``, ``FLEISS_KAPPA`` and nominal
``KRIPPENDORFF_ALPHA``) are compared after trimming, collapsing repeated
spaces and folding letter case: "Hire", "hire " and "HIRE" are one category (a
data-entry slip, not a different judgment). A whole number and its text are
one category too: the number 1, 1.0 and the text "1" (as for group labels,
where a code typed as text is the same group); "1.5" and 1.5 likewise.
"""

from __future__ import annotations

import numpy as np

from .impact import group_key

__all__ = ["category_codes"]


def category_codes(labels) -> tuple[np.ndarray, int]:
    """Integer codes of category labels (no blanks among them), merged by :func:`group_key`.

    >>> codes, count = category_codes(["Hire", "hire ", "Reject", 1, "1"])
    >>> codes.tolist(), count
    ([0, 0, 1, 2, 2], 3)
    """
    table: dict = {}
    seen: dict = {}  # each raw label is keyed once: group_key is a few string steps
    codes = np.empty(len(labels), dtype=np.int64)
    for i, label in enumerate(labels):
        raw = (type(label), label)
        code = seen.get(raw)
        if code is None:
            code = seen[raw] = table.setdefault(group_key(label), len(table))
        codes[i] = code
    return codes, len(table)
