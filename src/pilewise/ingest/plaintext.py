"""Decoding bytes, cleaning typeset text and making titles: helpers shared by the readers."""

from __future__ import annotations

import codecs
import re
from collections import Counter
from collections.abc import Iterable
from dataclasses import dataclass, field

import charset_normalizer

TITLE_CHARS = 120


def decode_bytes(raw: bytes, encoding: str | None = None, voted: str | None = None) -> tuple[str, str]:
    """Decode bytes as UTF-8, else as the detected encoding, else Latin-1; say which when not UTF-8.

    A given `encoding` (--encoding) is used as it is; bytes it cannot decode read as U+FFFD. `voted` is
    the encoding `vote_encoding` chose for this file, used when the bytes are not UTF-8.
    """
    if encoding is not None:
        text = raw.decode(encoding, errors="replace")
        return (text[1:] if text.startswith("\ufeff") else text), ""
    try:
        return raw.decode("utf-8-sig"), ""
    except UnicodeDecodeError:
        pass
    if voted is not None:
        return raw.decode(voted, errors="replace"), f"not UTF-8; decoded as {voted} (the vote of the folder)"
    detected = detect_encoding(raw[:1_000_000])
    if detected is not None:
        return raw.decode(detected, errors="replace"), f"not UTF-8; decoded as {detected}"
    return raw.decode("latin-1"), "not UTF-8 and no encoding detected; decoded as latin-1"


def decodes_cleanly(head: bytes, encoding: str | None = None) -> bool:
    """Whether the first bytes of a file decode as text by the rules of `decode_bytes`, without replacement.

    `encoding` (--encoding) is tried alone; else UTF-8 (with or without its byte-order mark), else the
    encoding `detect_encoding` finds. Latin-1, `decode_bytes`'s last resort, decodes any bytes, so it
    proves nothing and is not tried. `head` may end inside a character: a multi-byte character cut at
    its end still counts as clean (an incremental decoder is not asked to finish).
    """
    candidates = [encoding] if encoding is not None else ["utf-8-sig", detect_encoding(head)]
    for name in candidates:
        if name is None:
            continue
        try:
            codecs.getincrementaldecoder(name)(errors="strict").decode(head, final=False)
        except (UnicodeDecodeError, LookupError):
            continue
        return True
    return False


CP1252_TOLERANCE = 0.1  # measured: a French sentence scored 0.032 as cp1257, 0.095 as cp1252
VOTE_SAMPLE_BYTES = 65_536  # bytes of each file read for the vote
VOTE_MESS_MARGIN = 0.2  # a file keeps its own detected encoding only when it reads this much cleaner


@dataclass(frozen=True)
class EncodingVote:
    """The encoding of a folder's non-UTF-8 files, decided by a vote, and the encoding chosen for each file.

    Attributes
    ----------
    encoding : str or None
        The encoding detected on all non-UTF-8 files' samples together (None: all files are UTF-8).
    votes : tuple of (str, int)
        Every detected encoding and its number of files, most first.
    of_file : dict
        The encoding chosen for each non-UTF-8 file, by its key: the folder's, unless the file reads
        clearly cleaner (charset-normalizer's mess ratio lower by VOTE_MESS_MARGIN) as its own detection.
    """

    encoding: str | None
    votes: tuple[tuple[str, int], ...]
    of_file: dict[str, str] = field(default_factory=dict)

    def note(self) -> str:
        """One line for the ingest page: what was decided and how sure (the share of files that agree)."""
        if self.encoding is None:
            return ""
        files = sum(n for _, n in self.votes)
        agree = sum(1 for enc in self.of_file.values() if enc == self.encoding)
        tally = ", ".join(f"{n} {enc}" for enc, n in self.votes)
        return (f"encoding: {files} file(s) are not UTF-8; the folder's encoding is {self.encoding} "
                f"({agree} of {files} read as it; detected per file: {tally}); pass --encoding to force one")


def vote_encoding(samples: Iterable[tuple[str, bytes]]) -> EncodingVote:
    """Decide the encoding of a folder from the first bytes of each of its files (key, bytes).

    UTF-8 files do not vote. The folder's encoding is the one detected on all non-UTF-8 samples together
    (the votes per file are reported beside it, as how sure the decision is); each file is read in it
    unless it does not decode in it or reads clearly cleaner in its own detected encoding (files that
    differ stay per file).
    """
    detected: dict[str, str] = {}
    raws: dict[str, bytes] = {}
    for key, raw in samples:
        if _is_utf8_start(raw):
            continue
        found = detect_encoding(raw)
        if found is not None:
            detected[key], raws[key] = found, raw
    if not detected:
        return EncodingVote(None, ())
    counts = Counter(detected.values())
    votes = tuple(sorted(counts.items(), key=lambda item: (-item[1], item[0])))
    # one detection on all samples together: far more evidence than any one short file (per file,
    # charset-normalizer took short Shift_JIS texts for cp949 and French cp1252 for cp1257)
    together = detect_encoding(b"\n".join(raws[key] for key in sorted(raws))[:1_000_000])
    chosen = together if together is not None else votes[0][0]
    of_file = {key: _file_choice(raws[key], chosen, own) for key, own in detected.items()}
    return EncodingVote(chosen, votes, of_file)


def _is_utf8_start(raw: bytes) -> bool:
    """True when `raw` (maybe cut inside a character at its end) is UTF-8."""
    try:
        raw.decode("utf-8")
    except UnicodeDecodeError as err:
        return err.start >= len(raw) - 3 and err.reason == "unexpected end of data"
    return True


def _file_choice(raw: bytes, folder: str, own: str) -> str:
    """The folder's encoding for one file, unless the file does not decode in it or reads clearly cleaner
    in its own detected encoding."""
    from charset_normalizer.md import mess_ratio

    if own == folder:
        return folder
    try:
        as_folder = raw.decode(folder)
    except UnicodeDecodeError:
        return own
    as_own = raw.decode(own, errors="replace")
    if mess_ratio(as_own[:_MESS_SAMPLE], 1.0) + VOTE_MESS_MARGIN < mess_ratio(as_folder[:_MESS_SAMPLE], 1.0):
        return own
    return folder


def detect_encoding(raw: bytes) -> str | None:
    """The encoding charset-normalizer finds for `raw` (a codec Python knows), else None.

    Where it scores windows-1252 about as well as its first answer (mess ratio within CP1252_TOLERANCE,
    coherence as high), windows-1252 is taken: the detector then has little evidence either way and lists
    the tied code pages by name (cp1250 before cp1252), or rates a short French sentence a little cleaner
    as Baltic cp1257, so "naïve" would read as "naďve". The WHATWG Encoding
    Standard makes windows-1252 the legacy default that browsers fall back on, and it is what
    Western spreadsheet exports write, which makes it the better prior for a tie.
    """
    matches = charset_normalizer.from_bytes(raw)
    best = matches.best()
    if best is None or not best.encoding:
        return None
    chosen = str(best.encoding)
    for match in matches:
        if match.encoding == "cp1252" and match.chaos <= best.chaos + CP1252_TOLERANCE \
                and match.coherence >= best.coherence:
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
    # Most texts are long and their title is in their first few hundred characters: the lines of a head of the
    # text are the text's lines, but for the last one, which may go on; its collapsed form is a prefix of the
    # whole line's, so once it is longer than TITLE_CHARS the title is the same (tested against the whole text).
    head = text[:_TITLE_HEAD]
    if len(head) < len(text):
        lines = head.splitlines()
        for line in lines[:-1]:
            line = " ".join(line.split())
            if line:
                return _title_of_line(line)
        last = " ".join(lines[-1].split()) if lines else ""
        if len(last) > TITLE_CHARS:
            return _title_of_line(last)
    for line in text.splitlines():
        line = " ".join(line.split())
        if line:
            return _title_of_line(line)
    return "(untitled)"


_TITLE_HEAD = 2 * TITLE_CHARS  # characters of a text that `first_line_title` reads first (any number gives the same)


def _title_of_line(line: str) -> str:
    """A collapsed, non-empty line cut at about TITLE_CHARS characters on a word boundary."""
    if len(line) <= TITLE_CHARS:
        return line
    cut = line[:TITLE_CHARS].rsplit(" ", 1)[0]
    return (cut if len(cut) > TITLE_CHARS // 2 else line[:TITLE_CHARS]) + "…"


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
