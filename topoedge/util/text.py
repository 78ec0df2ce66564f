"""Small helpers for the words of reports and messages."""

from __future__ import annotations

__all__ = ["count"]


def count(n: int, noun: str, plural: str | None = None) -> str:
    """``"1 band"``, ``"2 bands"``, ``"0 open gaps"``: a number with its noun in the right form."""
    return f"{n} {noun if n == 1 else (plural or noun + 's')}"
