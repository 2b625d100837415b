"""Keyword-in-context lines: fixed-width left and right context, keyword aligned in one column."""

from __future__ import annotations

import re

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
    """Left context, match and right context; each context is exactly `width` characters.

    Whitespace runs become one space and redaction placeholders their labels; the left context is
    right-aligned so that every match starts in the same column.
    """
    left = _flat(display_text(text[max(0, start - 4 * width) : start]))
    if len(left) < width and start > 4 * width:  # long whitespace runs: look further back
        left = _flat(display_text(text[:start]))
    right = _flat(display_text(text[end : end + 4 * width]))
    if len(right) < width and len(text) > end + 4 * width:
        right = _flat(display_text(text[end:]))
    left, right = left[-width:].rjust(width), right[:width].ljust(width)
    return left, _flat(text[start:end]), right


def kwic_line(text: str, analyzer: Analyzer, key: str, width: int = CONTEXT_CHARS) -> tuple[str, str, str] | None:
    """The keyword-in-context line for the first occurrence of `key` in `text`, if any."""
    found = find_term(analyzer.spans(text), key)
    if found is None:
        return None
    return kwic_window(text, found[0], found[1], width)
