"""Fixed wording of the validation study, kept apart from the builder so the command line loads it cheaply."""

from __future__ import annotations

__all__ = ["CAUTION", "NOT_COMPUTABLE"]

CAUTION = ("These figures are statistical indicators to support professional judgment, not legal findings. "
           "Hiring decisions must follow the employment law and regulations that apply where you hire and the "
           "guidance of qualified professionals (for a US employer, the Uniform Guidelines on Employee Selection "
           "Procedures and the professional testing standards are where to start).")

#: What a study cell shows, before the reason, when its figure cannot be computed from the data.
NOT_COMPUTABLE = "not computable: "
