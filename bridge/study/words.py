"""Fixed wording of the validation study, kept apart from the builder so the command line loads it cheaply."""

from __future__ import annotations

from trueband.funcs.cautions import CAUTION  # the one general caution, shared by every way in

__all__ = ["CAUTION", "NOT_COMPUTABLE"]

#: What a study cell shows, before the reason, when its figure cannot be computed from the data.
NOT_COMPUTABLE = "not computable: "
