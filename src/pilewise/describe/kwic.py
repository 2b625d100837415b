"""Keyword-in-context lines: fixed-width left and right context, keyword aligned in one column."""

from __future__ import annotations

import re
import unicodedata

from pilewise.ingest.redact import display_text
from pilewise.vectors.text import Analyzer

CONTEXT_CHARS = 45
_SPACE = re.compile(r"\s+")


def _flat(text: str) -> str:
    return _SPACE.sub(" ", text)


def find_term(spans: list[tuple[int, int, str]], key: str) -> tuple[int, int] | None:
    """Character span of the first occurrence of a term or two-word phrase among a text's kept words."""
    parts = key.split(" ")
    if len(parts) == 1:
        for start, end, term in spans:
            if term == key:
                return start, end
        return None
    first, second = parts
    for (start, _, term), (_, end, next_term) in zip(spans, spans[1:], strict=False):
        if term == first and next_term == second:
            return start, end
    return None


def kwic_window(text: str, start: int, end: int, width: int = CONTEXT_CHARS) -> tuple[str, str, str]:
    """Left context, match and right context; each context fills exactly `width` columns.

    Whitespace runs become one space and redaction placeholders their labels; the left context is
    right-aligned so that every match starts in the same column. A wide character (Chinese, Japanese,
    Korean: East Asian Width W or F, Unicode Standard Annex #11) takes two columns, a combining mark none,
    every other character one, as terminals and monospace fonts draw them.
    """
    left = _flat(display_text(text[max(0, start - 4 * width) : start]))
    if len(left) < width and start > 4 * width:  # long whitespace runs: look further back
        left = _flat(display_text(text[:start]))
    right = _flat(display_text(text[end : end + 4 * width]))
    if len(right) < width and len(text) > end + 4 * width:
        right = _flat(display_text(text[end:]))
    return _fit_end(left, width), _flat(text[start:end]), _fit_start(right, width)


def _columns(char: str) -> int:
    """Columns a character takes in a monospace line (UAX #11 East Asian Width; marks take none)."""
    if unicodedata.combining(char):
        return 0
    return 2 if unicodedata.east_asian_width(char) in ("W", "F") else 1


def _fit_start(text: str, width: int) -> str:
    """The start of `text` that fits `width` columns, padded with spaces on the right to exactly `width`."""
    used = 0
    for i, char in enumerate(text):
        if used + _columns(char) > width:
            return text[:i] + " " * (width - used)
        used += _columns(char)
    return text + " " * (width - used)


def _fit_end(text: str, width: int) -> str:
    """The end of `text` that fits `width` columns, padded with spaces on the left to exactly `width`."""
    return _fit_start(text[::-1], width)[::-1]


def kwic_line(
    text: str, analyzer: Analyzer, key: str, width: int = CONTEXT_CHARS, *,
    spans: list[tuple[int, int, str]] | None = None,
) -> tuple[str, str, str] | None:
    """The keyword-in-context line for the first occurrence of `key` in `text`, if any; `spans`, when given, is
    `analyzer.spans(text)` already found (a caller looking for several terms in one text finds them once)."""
    found = find_term(analyzer.spans(text) if spans is None else spans, key)
    if found is None:
        return None
    return kwic_window(text, found[0], found[1], width)
