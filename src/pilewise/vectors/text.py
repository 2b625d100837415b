"""Tokenizing, stop words and stemming, with the surface word to show for every stem.

Only nltk code that needs no downloaded data is used: the Snowball stemmer. The English stop-word list is
scikit-learn's (built in, no download); other languages' lists, the stemmer per script and the words of
Chinese and Japanese come from `vectors.languages`. Words are found on the original text and lower-cased one
by one, so that every span points at the original characters even where lower-casing changes a text's length
("İ" lower-cases to two characters).
"""

from __future__ import annotations

import re
from collections import Counter
from collections.abc import Iterable, Iterator, Sequence
from pathlib import Path

import numpy as np

from pilewise.errors import PilewiseError
from pilewise.ingest.redact import PLACEHOLDER_PREFIX  # redaction's placeholder words are never terms
from pilewise.vectors.languages import (
    CJK,
    COMBINING_MARKS,
    has_kana,
    script_of,
    segment_cjk,
    stemmers_by_script,
    stop_words_for,
)

# Runs of letters, with combining marks (decomposed accents, vowel signs) and inner apostrophes and hyphens
# kept ("don't", "log-in"); one-letter words are dropped by the analyzer. Each repetition of a group must
# start with a mark, ' or -, so matching is linear.
_MARKS = f"[{re.escape(COMBINING_MARKS)}]+[^\\W\\d_]*"
TOKEN_PATTERN = f"[^\\W\\d_]+(?:{_MARKS})*(?:['\\-][^\\W\\d_]+(?:{_MARKS})*)*"
# What stands between two words and keeps them from making a phrase: punctuation (".", ",", quotes,
# brackets, dashes), numbers and underscores, and a blank line. `Analyzer.words` gives each run as a
# "break" item, which `normalize` never keeps, so that a phrase is two kept words with only white space
# (at most one line break) between them; see `joined_to_previous`.
BREAK_PATTERN = r"[^\w\s]+|[\d_]+|\n[^\S\n]*\n"
# The same two patterns for a text of ASCII characters only, where each class is a plain character set that
# `re` tests by one table lookup instead of by Unicode categories (the search 35-45% faster, measured in issue 15):
# on ASCII, [^\W\d_] is [A-Za-z], \d is [0-9], \s is [\t\n\x0b\x0c\r\x1c-\x1f ] (as `str.isspace`), and no
# combining mark occurs. Tested to give the same items as the patterns above on every ASCII character.
_ASCII_SPACE = r"\t\n\x0b\x0c\r\x1c-\x1f "
_ASCII_ITEMS = re.compile(
    r"[A-Za-z]+(?:['\-][A-Za-z]+)*"  # TOKEN_PATTERN
    rf"|[^A-Za-z0-9_{_ASCII_SPACE}]+|[0-9_]+|\n[^\S\n]*\n"  # BREAK_PATTERN
)
_WORD_START = re.compile(r"[^\W\d_]")  # how every token of TOKEN_PATTERN starts, and no break item
_find_ascii_items = _ASCII_ITEMS.findall
_MISSING = object()
_DOTTED_CAPITAL_I = "\u0130"  # "İ": str.lower gives "i" plus a combining dot; Turkish reads it as "i"


def lower(word: str) -> str:
    """`word` lower-cased, with Turkish capital dotted I read as "i" (not "i" and a combining dot)."""
    if _DOTTED_CAPITAL_I in word:
        word = word.replace(_DOTTED_CAPITAL_I, "i")
    return word.lower()


def load_stop_words(extra_file: Path | None, languages: Sequence[str] = ("en",)) -> frozenset[str]:
    """Stop words of `languages` (`languages.stop_words_for`) plus one word per line from `extra_file`
    ('#' starts a comment)."""
    words = stop_words_for(languages)
    if extra_file is not None:
        try:
            lines = extra_file.read_text(encoding="utf-8", errors="replace").splitlines()
        except OSError as err:
            raise PilewiseError(f"cannot read --stop-words file {str(extra_file)!r}: {err.strerror}") from err
        for line in lines:
            word = lower(line.split("#", 1)[0].strip())
            if word:
                words.add(word)
    return frozenset(words)


class Analyzer:
    """Turns a text into its list of normalized terms (lower-case, stop words out, optionally stemmed).

    Stems are computed once per distinct word and cached; ``surface`` maps every stem to the word
    form seen most often, which is what users are shown. `languages` (the collection's languages, largest
    first) choose the Snowball stemmer of each script (`languages.stemmers_by_script`).
    """

    def __init__(self, *, stop_words: frozenset[str], stem: bool, languages: Sequence[str] = ("en",)) -> None:
        self.stop_words = stop_words
        self.stem = stem
        self.languages = tuple(languages)
        # nltk's RegexpTokenizer (3.9+) wraps its patterns in a timed guard against catastrophic
        # backtracking, which triples the cost of tokenizing a large collection. The same pattern compiled
        # by `re` gives the same tokens and spans (tested) and cannot backtrack catastrophically, so
        # tokenizing uses it, and nltk (about 0.3 s to import) is imported only for stemming.
        self._find_words_and_breaks = re.compile(f"{TOKEN_PATTERN}|{BREAK_PATTERN}").findall
        self._iter_words_and_breaks = re.compile(f"{TOKEN_PATTERN}|{BREAK_PATTERN}").finditer
        self._stemmers: dict[str, object] = {}
        if stem:
            from nltk.stem.snowball import SnowballStemmer

            self._stemmers = {script: SnowballStemmer(name)
                              for script, name in stemmers_by_script(self.languages).items()}
        self._cache: dict[str, str | None] = {}
        self._surface_counts: dict[str, Counter[str]] = {}

    def normalize(self, word: str) -> str | None:
        """The term for one lower-cased word, or None for a stop word."""
        cached = self._cache.get(word, "")
        if cached != "":
            return cached
        original = word
        if word.endswith("'s"):
            word = word[:-2]  # possessive: "courier's" counts as "courier"
        if (
            _WORD_START.match(word) is None  # a phrase break from `words` (punctuation, a number, a blank line)
            or word in self.stop_words
            or word.startswith(PLACEHOLDER_PREFIX)
            or len(word) < 2
            or ("'" in word and (word.endswith("n't") or word.split("'", 1)[0] in self.stop_words))
        ):  # negated auxiliaries and contractions of stop words: doesn't, we'd, it's
            term = None
        elif self._stemmers and (stemmer := self._stemmers.get(script_of(word))) is not None:
            term = stemmer.stem(word.replace("'", ""))  # type: ignore[attr-defined]
        else:
            term = word
        self._cache[original] = term
        return term

    def terms(self, text: str) -> list[str]:
        """Normalized terms of `text` in order."""
        out: list[str] = []
        cache = self._cache
        append = out.append
        stemming = bool(self._stemmers)
        for word in self.words(text):
            term = cache.get(word, _MISSING)
            if term is _MISSING:
                term = self.normalize(word)
            if term is not None:
                append(term)  # type: ignore[arg-type]
                if stemming:
                    self._surface_counts.setdefault(str(term), Counter())[word] += 1
        return out

    def words(self, text: str) -> list[str]:
        """The lower-cased words of `text` as `terms` reads them, before possessives, stop words and stemming,
        with the phrase breaks between them (BREAK_PATTERN; `normalize` gives None for a break)."""
        if text.isascii():
            return _find_ascii_items(text.lower())  # one call with plain character sets: most texts
        if CJK.search(text) is None:
            return self._find_words_and_breaks(lower(text))  # one call: the fast path of every Western text
        return [item for _, _, item in self.items(text)]

    def items(self, text: str) -> Iterator[tuple[int, int, str]]:
        """(start, end, item) of every word and phrase break of `text`, as `words` gives them, with spans
        into the original `text`; Han and kana runs become words by `languages.segment_cjk`."""
        japanese: bool | None = None
        for match in self._iter_words_and_breaks(text):
            found = match.group()
            if CJK.search(found) is None:
                yield match.start(), match.end(), lower(found)
                continue
            if japanese is None:
                japanese = has_kana(text)
            yield from _split_cjk(found, match.start(), japanese=japanese)

    def phrases(self, text: str) -> list[str]:
        """The two-word phrases of `text` in order ("first second"), as the vectorizer counts them."""
        words = self.words(text)
        terms = [self.normalize(word) for word in words]
        kept = np.fromiter((term is not None for term in terms), dtype=bool, count=len(terms))
        kept_terms = [term for term in terms if term is not None]
        joined = joined_to_previous(kept)
        return [f"{kept_terms[i - 1]} {kept_terms[i]}" for i in np.flatnonzero(joined)]

    def count_surfaces(self, words: Iterable[str], counts: Iterable[int]) -> None:
        """Record `counts` occurrences of each word, as `terms` does per occurrence (for `surface`)."""
        if not self._stemmers:
            return
        for word, count in zip(words, counts, strict=True):
            term = self.normalize(word)
            if term is not None and count:
                self._surface_counts.setdefault(term, Counter())[word] += int(count)

    def tokens(self, text: str) -> list[str]:
        """The lower-cased words of `text`, before stop words and stemming."""
        return [word for word in self.words(text) if _WORD_START.match(word) is not None]

    def spans(self, text: str) -> list[tuple[int, int, str]]:
        """(start, end, term) of every kept word of `text`, for marking and keyword-in-context lines.

        Spans index the original `text`. Where anything was dropped between two kept words (a stop word,
        punctuation, a number, a blank line: what keeps them from making a phrase, `joined_to_previous`),
        one item (position, position, "") stands for the gap, so that two consecutive items with terms are
        exactly a phrase of the vectorizer.
        """
        out: list[tuple[int, int, str]] = []
        cache = self._cache
        gap = False
        for start, end, word in self.items(text):
            term = cache.get(word, _MISSING)
            if term is _MISSING:
                term = self.normalize(word)
            if term is None:
                if out and not gap:
                    out.append((start, start, ""))
                gap = True
                continue
            gap = False
            out.append((start, end, term))  # type: ignore[arg-type]
        if gap and out and out[-1][2] == "":
            out.pop()  # nothing kept after the last gap
        return out

    def surface(self, term: str) -> str:
        """The word to show for a term: for a stem, its most frequent surface form; bigrams word by word."""
        if not self._stemmers:
            return term
        return " ".join(self._surface_one(part) for part in term.split(" "))

    def _surface_one(self, stem: str) -> str:
        counts = self._surface_counts.get(stem)
        if not counts:
            return stem
        # most frequent, ties broken alphabetically so that output is reproducible
        return min(counts.items(), key=lambda item: (-item[1], item[0]))[0]


_CJK_PARTS = re.compile(f"(?:{CJK.pattern})+")


def _split_cjk(found: str, offset: int, *, japanese: bool) -> Iterator[tuple[int, int, str]]:
    """A matched word holding Han or kana: its other parts as lower-cased words, its CJK runs segmented."""
    cursor = 0
    for run in _CJK_PARTS.finditer(found):
        if run.start() > cursor:
            yield offset + cursor, offset + run.start(), lower(found[cursor : run.start()])
        yield from segment_cjk(run.group(), offset + run.start(), japanese=japanese)
        cursor = run.end()
    if cursor < len(found):
        yield offset + cursor, offset + len(found), lower(found[cursor:])


def joined_to_previous(kept: np.ndarray) -> np.ndarray:
    """The phrase rule: for every kept word, whether it makes a phrase with the kept word before it.

    `kept` (n_items,) marks which items of `Analyzer.words` (words and phrase breaks, in text order)
    became terms. Two terms make a phrase only when they stood next to each other: no stop word, one-letter
    word, redaction placeholder, number, punctuation or blank line was removed between them, so "days in a
    row" gives no "days row". Returns a boolean array of one entry per kept item (the first is False);
    callers that join several texts' items must also require both words to be of one text.
    """
    joined = np.zeros(kept.size, dtype=bool)
    joined[1:] = kept[1:] & kept[:-1]
    return joined[kept]
