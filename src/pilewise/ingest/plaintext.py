"""Decoding bytes, cleaning typeset text and making titles: helpers shared by the readers."""

from __future__ import annotations

import codecs
import re

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
    detected = detect_encoding(raw[:1_000_000])
    if detected is not None:
        return raw.decode(detected, errors="replace"), f"not UTF-8; decoded as {detected}"
    return raw.decode("latin-1"), "not UTF-8 and no encoding detected; decoded as latin-1"


def detect_encoding(raw: bytes) -> str | None:
    """The encoding charset-normalizer finds for `raw` (a codec Python knows), else None.

    Where it scores windows-1252 exactly as well as its first answer (same mess and coherence),
    windows-1252 is taken: the detector then has no evidence either way and lists the tied code
    pages by name (cp1250 before cp1252), so "naïve" would read as "naďve". The WHATWG Encoding
    Standard makes windows-1252 the legacy default that browsers fall back on, and it is what
    Western spreadsheet exports write, which makes it the better prior for a tie.
    """
    matches = charset_normalizer.from_bytes(raw)
    best = matches.best()
    if best is None or not best.encoding:
        return None
    chosen = str(best.encoding)
    for match in matches:
        if match.encoding == "cp1252" and (match.chaos, match.coherence) == (best.chaos, best.coherence):
            chosen = "cp1252"
    if chosen.startswith(_DOS_AND_MAC_PAGES) and _reads_as_cp1252_as_well(raw, chosen):
        chosen = "cp1252"
    try:
        codecs.lookup(chosen)
    except LookupError:
        return None
    return chosen


# Code pages of DOS consoles and classic Mac OS: the detector offers them for Western text that is
# cp1252 (a Windows export with curly quotes and dashes read as cp775 gave "ōQuotedö"), while
# current programs rarely write them.
_DOS_AND_MAC_PAGES = ("cp437", "cp737", "cp775", "cp850", "cp852", "cp855", "cp857", "cp858", "cp860",
                      "cp861", "cp862", "cp863", "cp865", "cp866", "cp869", "mac_")
_MESS_SAMPLE = 200_000


def _reads_as_cp1252_as_well(raw: bytes, detected: str) -> bool:
    """True when `raw` is valid cp1252 and charset-normalizer's mess ratio rates it no worse than `detected`."""
    from charset_normalizer.md import mess_ratio

    try:
        as_cp1252 = raw.decode("cp1252")  # strict: cp1252 leaves five bytes undefined
    except UnicodeDecodeError:
        return False
    as_detected = raw.decode(detected, errors="replace")
    return mess_ratio(as_cp1252[:_MESS_SAMPLE], 1.0) <= mess_ratio(as_detected[:_MESS_SAMPLE], 1.0)


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


# A character then a backspace: terminal overstrike, as man and nroff write bold ("N\bN") and underline
# ("_\bN") for a printer or pager (grotty(1), "legacy output format"); the visible character is the last.
_OVERSTRIKE = re.compile(r"[^\x08\n]\x08")
# A word broken at the end of a line: letters (maybe already holding hyphens), a hyphen (ASCII, U+2010
# HYPHEN as groff writes it, or U+00AD SOFT HYPHEN), the line break with the next line's indentation, and
# the rest of the word with punctuation glued to it (and one space after them: the line break comes there
# instead).
_BROKEN_WORD = re.compile(
    r"(?<![\w\u2010])([^\W\d_]+(?:[\-\u2010][^\W\d_]+)*)([\-\u2010\u00ad])[^\S\n]*(\r?\n[^\S\n]*)([^\W\d_]+(?:-[^\W\d_]+)*)([^\w\s]*)(?:[^\S\n](?=\S))?"
)
_INNER_HYPHEN = re.compile(r"(?<=[^\W\d_])[\u2010\u2011](?=[^\W\d_])")  # typeset hyphens inside a word


def clean_text(text: str) -> str:
    """`text` with terminal overstrike removed and words hyphenated across line breaks joined again.

    Overstrike ("N\\bNA\\bA" for a bold "NA", as in manual pages saved from a terminal) keeps the last
    character of each pair. A word broken at a line end ("excep-" then "tion" on the next line) is
    joined and moved to the first line: the line break and the next line's indentation follow the whole
    word (or go, when the word was all its line held). The hyphen is dropped when the second part starts with a
    lower-case letter and the text does not also hold the hyphenated form on one line ("well-known"
    elsewhere keeps "well-\\nknown" as "well-known"); typesetters' own hyphens (U+2010 at a line end,
    U+00AD) are always dropped before a lower-case letter. A compound already holding a hyphen
    ("state-of-" then "the-art") and a second part starting with a capital keep the hyphen. Hyphens
    written as U+2010 or U+2011 inside a word become "-", which the analyzer reads as part of the word.
    """
    if "\x08" in text:
        text = _OVERSTRIKE.sub("", text).replace("\x08", "")
    if "\u2010" in text or "\u2011" in text:
        text = _INNER_HYPHEN.sub("-", text)
    # a word broken over three lines ("ex-", "cep-", "tion") is joined one break per pass
    while "\n" in text and _BROKEN_WORD.search(text) is not None:
        text = _BROKEN_WORD.sub(lambda m: _rejoined(m, m.string), text)
    return text


def _rejoined(m: re.Match[str], text: str) -> str:
    """The word broken at match `m` of `_BROKEN_WORD`, whole, then the line break that split it."""
    first, hyphen, newline, second, glued = m.groups()
    typeset = hyphen != "-"
    after_hyphen = m.start() > 0 and m.string[m.start() - 1] == "-"  # "--no-" then "wrap": an option's parts
    keep_hyphen = (
        not second[0].islower()
        or "-" in first
        or (not typeset and after_hyphen)
        or (not typeset and f"{first}-{second}".lower() in text.lower())
    )
    word = (f"{first}-{second}" if keep_hyphen else first + second) + glued
    rest = text[m.end() : m.end() + 2]
    # a word that ended its line leaves no empty line behind (which would read as a paragraph break)
    return word if rest[:1] in ("", "\n") or rest == "\r\n" else word + newline
