"""Tokenizing, stop words and stemming, with the surface word to show for every stem.

Only nltk code that needs no downloaded data is used: the regular-expression tokenizer and the
Snowball stemmer. The English stop-word list is scikit-learn's (built in, no download).
"""

from __future__ import annotations

import re
from collections import Counter
from collections.abc import Iterable
from pathlib import Path

import numpy as np
from sklearn.feature_extraction.text import ENGLISH_STOP_WORDS

from pilewise.errors import PilewiseError
from pilewise.ingest.redact import PLACEHOLDER_PREFIX  # redaction's placeholder words are never terms

# Runs of letters, with inner apostrophes and hyphens kept ("don't", "log-in"); one-letter words are
# dropped by the analyzer. Each repetition of the group must start with ' or -, so matching is linear.
TOKEN_PATTERN = r"[^\W\d_]+(?:['\-][^\W\d_]+)*"
# What stands between two words and keeps them from making a phrase: punctuation (".", ",", quotes,
# brackets, dashes), numbers and underscores, and a blank line. `Analyzer.words` gives each run as a
# "break" item, which `normalize` never keeps, so that a phrase is two kept words with only white space
# (at most one line break) between them; see `joined_to_previous`.
BREAK_PATTERN = r"[^\w\s]+|[\d_]+|\n[^\S\n]*\n"
_WORD_START = re.compile(r"[^\W\d_]")  # how every token of TOKEN_PATTERN starts, and no break item
_MISSING = object()


def load_stop_words(extra_file: Path | None) -> frozenset[str]:
    """scikit-learn's English stop words plus one word per line from `extra_file` ('#' starts a comment)."""
    words = set(ENGLISH_STOP_WORDS)
    if extra_file is not None:
        try:
            lines = extra_file.read_text(encoding="utf-8", errors="replace").splitlines()
        except OSError as err:
            raise PilewiseError(f"cannot read --stop-words file {str(extra_file)!r}: {err.strerror}") from err
        for line in lines:
            word = line.split("#", 1)[0].strip().lower()
            if word:
                words.add(word)
    return frozenset(words)


class Analyzer:
    """Turns a text into its list of normalized terms (lower-case, stop words out, optionally stemmed).

    Stems are computed once per distinct word and cached; ``surface`` maps every stem to the word
    form seen most often, which is what users are shown.
    """

    def __init__(self, *, stop_words: frozenset[str], stem: bool) -> None:
        self.stop_words = stop_words
        self.stem = stem
        # nltk's RegexpTokenizer (3.9+) wraps its patterns in a timed guard against catastrophic
        # backtracking, which triples the cost of tokenizing a large collection. The same pattern compiled
        # by `re` gives the same tokens and spans (tested) and cannot backtrack catastrophically, so
        # tokenizing uses it, and nltk (about 0.3 s to import) is imported only for stemming.
        pattern = re.compile(TOKEN_PATTERN)
        self._findall = pattern.findall
        self._find_words_and_breaks = re.compile(f"{TOKEN_PATTERN}|{BREAK_PATTERN}").findall
        self._finditer = pattern.finditer
        self._stemmer = None
        if stem:
            from nltk.stem.snowball import SnowballStemmer

            self._stemmer = SnowballStemmer("english")
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
        elif self._stemmer is not None:
            term = self._stemmer.stem(word.replace("'", ""))
        else:
            term = word
        self._cache[original] = term
        return term

    def terms(self, text: str) -> list[str]:
        """Normalized terms of `text` in order."""
        out: list[str] = []
        cache = self._cache
        append = out.append
        stemming = self._stemmer is not None
        for word in self._findall(text.lower()):
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
        return self._find_words_and_breaks(text.lower())

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
        if self._stemmer is None:
            return
        for word, count in zip(words, counts, strict=True):
            term = self.normalize(word)
            if term is not None and count:
                self._surface_counts.setdefault(term, Counter())[word] += int(count)

    def tokens(self, text: str) -> list[str]:
        """The lower-cased words of `text`, before stop words and stemming."""
        return list(self._findall(text.lower()))

    def spans(self, text: str) -> list[tuple[int, int, str]]:
        """(start, end, term) of every kept word of `text`, for marking and keyword-in-context lines."""
        out: list[tuple[int, int, str]] = []
        cache = self._cache
        for match in self._finditer(text.lower()):
            term = cache.get(match.group(), _MISSING)
            if term is _MISSING:
                term = self.normalize(match.group())
            if term is not None:
                out.append((match.start(), match.end(), term))  # type: ignore[arg-type]
        return out

    def surface(self, term: str) -> str:
        """The word to show for a term: for a stem, its most frequent surface form; bigrams word by word."""
        if self._stemmer is None:
            return term
        return " ".join(self._surface_one(part) for part in term.split(" "))

    def _surface_one(self, stem: str) -> str:
        counts = self._surface_counts.get(stem)
        if not counts:
            return stem
        # most frequent, ties broken alphabetically so that output is reproducible
        return min(counts.items(), key=lambda item: (-item[1], item[0]))[0]


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
