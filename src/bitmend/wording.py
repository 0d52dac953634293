"""Counts in words for the text bitmend prints: "1 frame", "2 frames", "1,024 codewords"."""

from __future__ import annotations


def counted(count: int, noun: str, plural: str | None = None, spec: str = "") -> str:
    """count and noun, the noun plural unless count is exactly 1 (plural defaults to noun + "s");
    spec formats the number (e.g. "," for thousands separators)."""
    word = noun if count == 1 else (plural or noun + "s")
    return f"{count:{spec}} {word}"


def counted_with_commas(count: int, noun: str) -> str:
    """'1 bit', '1,024 bits': counted() with thousands separators (for ledgers and reports)."""
    return counted(count, noun, spec=",")
