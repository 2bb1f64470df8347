"""How a cell of the data workbook reads as text: the one helper every ``setup_*`` module shares.

It lives below :mod:`.setup` (which imports :mod:`.setup_cut` and :mod:`.setup_answers` for their settings), so
that those modules can use it without importing :mod:`.setup` back.
"""

from __future__ import annotations

__all__ = ["cell_text"]


def cell_text(value) -> str | None:
    """A cell as the text it shows, trimmed (2.0 is "2"); None for a blank."""
    if value is None:
        return None
    if isinstance(value, float) and value.is_integer():
        value = int(value)
    text = str(value).strip()
    return text or None
