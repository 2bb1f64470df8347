"""The general caution: one text, shown wherever trueband's figures are presented.

The command line (``trueband functions``, ``trueband study``, ``trueband demo``), the function
reference (``docs/functions.md``) and the study workbooks all show this sentence, and the demo
workbooks hold it, so its wording changes only with them. A topic module may add a caution of
its own for its figures (:data:`trueband.funcs.impact.CAUTION` for adverse impact); the registry
shows that one beside the topic's functions.
"""

from __future__ import annotations

__all__ = ["CAUTION"]

CAUTION = ("These figures are statistical indicators to support professional judgment, not legal findings. "
           "Hiring decisions must follow the employment law and regulations that apply where you hire and the "
           "guidance of qualified professionals (for a US employer, the Uniform Guidelines on Employee Selection "
           "Procedures and the professional testing standards are where to start).")
