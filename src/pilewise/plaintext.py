"""Decoding bytes and making titles: helpers shared by the readers."""

from __future__ import annotations

import charset_normalizer

TITLE_CHARS = 120


def decode_bytes(raw: bytes, encoding: str | None = None) -> tuple[str, str]:
    """Decode bytes as UTF-8, else as the detected encoding, else Latin-1; say which when not UTF-8.

    A given `encoding` (--encoding) is used as it is; bytes it cannot decode read as U+FFFD.
    """
    if encoding is not None:
        text = raw.decode(encoding, errors="replace")
        return (text[1:] if text.startswith("\ufeff") else text), ""
    try:
        return raw.decode("utf-8-sig"), ""
    except UnicodeDecodeError:
        pass
    best = charset_normalizer.from_bytes(raw[:1_000_000]).best()
    if best is not None and best.encoding:
        try:
            return raw.decode(best.encoding, errors="replace"), f"not UTF-8; decoded as {best.encoding}"
        except LookupError:
            pass
    return raw.decode("latin-1"), "not UTF-8 and no encoding detected; decoded as latin-1"


def first_line_title(text: str) -> str:
    """The first non-empty line, cut at about TITLE_CHARS characters on a word boundary."""
    for line in text.splitlines():
        line = " ".join(line.split())
        if line:
            if len(line) <= TITLE_CHARS:
                return line
            cut = line[:TITLE_CHARS].rsplit(" ", 1)[0]
            return (cut if len(cut) > TITLE_CHARS // 2 else line[:TITLE_CHARS]) + "…"
    return "(untitled)"
