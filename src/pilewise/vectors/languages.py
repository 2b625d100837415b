"""Languages of a collection: detection per document, stop words, Snowball stemmers, and words of scripts
written without spaces.

Sources: language detection is py3langid (a maintained fork of Lui and Baldwin's langid.py, 2012; its
model ships inside the wheel, BSD-3-Clause); stop words other than English are the stopwords-iso lists
(package stopwordsiso, MIT); English stop words stay scikit-learn's list, as before; Chinese words come
from jieba's dictionary segmenter (MIT, dictionary inside the package); Japanese is read as character
bigrams of kanji runs plus whole katakana runs, the common practice of information retrieval for CJK text
(as Lucene's CJK bigram filter does). The heavy parts (the detection model, about 0.4 s and 100 MB; jieba,
about 1 s and 70 MB) load only when a document needs them, so a pile in plain English loads neither.
"""

from __future__ import annotations

import multiprocessing
import re
import unicodedata
from collections import Counter
from collections.abc import Iterator, Mapping, Sequence
from dataclasses import dataclass
from functools import cache
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    import numpy as np

UNDETERMINED = "und"  # ISO 639-2 code for "undetermined", used where detection is unsure
# Languages with both a stop-word list (stopwords-iso) and a class in py3langid's model; `--language`
# accepts these (tests/test_languages.py checks the tuple against both packages).
SUPPORTED = (
    "af", "ar", "bg", "bn", "br", "ca", "cs", "da", "de", "el", "en", "eo", "es", "et", "eu", "fa", "fi", "fr",
    "ga", "gl", "gu", "ha", "he", "hi", "hr", "hu", "hy", "id", "it", "ja", "ko", "ku", "la", "lt", "lv", "mr",
    "ms", "nl", "no", "pl", "pt", "ro", "ru", "sk", "sl", "so", "st", "sv", "sw", "th", "tl", "tr", "uk", "ur",
    "vi", "yo", "zh", "zu",
)
# Snowball stemmers that nltk ships, by language code (nltk's SnowballStemmer.languages).
SNOWBALL = {"ar": "arabic", "da": "danish", "de": "german", "en": "english", "es": "spanish", "fi": "finnish",
            "fr": "french", "hu": "hungarian", "it": "italian", "nl": "dutch", "no": "norwegian",
            "pt": "portuguese", "ro": "romanian", "ru": "russian", "sv": "swedish"}
# Question particles of Turkish, written as separate words ("geldi mi"); stopwords-iso's Turkish list
# lacks them (from memory of Turkish grammar).
EXTRA_STOP_WORDS = {"tr": ("mi", "mı", "mu", "mü", "misin", "mısın", "musun", "müsün", "miyim", "mıyım")}

DETECT_CHARS = 600  # the start of a text is read: about 0.7 ms per text at 2,000 characters, linear in length
MIN_CONFIDENCE = 0.7  # below this (py3langid's normalized probability) a document's language is "und"
MIN_LETTERS = 8  # fewer letters than this: too little to tell, "und"
PRESENT_SHARE = 0.02  # a language's stop words are used when at least this share of documents is in it
# A text is taken as English without the model when it is ASCII, has at least ENGLISH_MIN_WORDS words,
# and scikit-learn's English stop words make at least ENGLISH_STOP_SHARE of them (English running text has
# about 40-50% function words; German or Turkish text in ASCII has far fewer of these particular words).
ENGLISH_MIN_WORDS = 5
ENGLISH_STOP_SHARE = 0.2
ENGLISH_FOREIGN_LETTERS = 0.05  # non-ASCII letters per word allowed ("café" in an English text)
_ASCII_WORDS = re.compile(r"[a-z]+(?:'[a-z]+)?")
# Every ASCII character but a-z becomes a space: on ASCII text without an apostrophe, _ASCII_WORDS finds
# exactly the runs of a-z, which ``str.split`` after this table gives about twice as fast.
_NOT_ASCII_LETTER = str.maketrans({c: " " for c in range(128) if not 0x61 <= c <= 0x7A})
_NON_ASCII_LETTER = re.compile(r"[^\W\d_a-zA-Z]")

# Combining marks (Unicode categories Mn, Mc, Me) of the Basic Multilingual Plane: part of the word they
# follow (decomposed accents, Arabic vowel signs, Devanagari vowel signs), never a break between words.
COMBINING_MARKS = "".join(
    chr(c) for c in range(0x300, 0x10000) if unicodedata.category(chr(c)).startswith("M")
)
_HAN = "\u3400-\u4dbf\u4e00-\u9fff\uf900-\ufaff"
_HIRAGANA = "\u3041-\u309f"
_KATAKANA = "\u30a0-\u30ff\u31f0-\u31ff\uff66-\uff9f"
CJK = re.compile(f"[{_HAN}{_HIRAGANA}{_KATAKANA}]")
_KANA = re.compile(f"[{_HIRAGANA}{_KATAKANA}]")
_HIRAGANA_CHAR = re.compile(f"[{_HIRAGANA}]")
_KATAKANA_CHAR = re.compile(f"[{_KATAKANA}]")
_CJK_OR_OTHER = re.compile(f"[{_HAN}]+|[{_HIRAGANA}]+|[{_KATAKANA}]+|[^{_HAN}{_HIRAGANA}{_KATAKANA}]+")
BREAK_ITEM = "|"  # stands between two CJK pieces that must not make a phrase (normalize drops it)


@dataclass(frozen=True)
class LanguageMix:
    """Languages of a run's documents: per distinct text, for the collection and per cluster.

    Attributes
    ----------
    of_text : tuple of str
        The language code of every distinct text ("und" when unsure).
    collection : tuple of (str, float)
        Every language with its share of documents (copies counted), largest first.
    clusters : tuple of tuple of (str, float)
        The same per cluster.
    forced : bool
        True when --language set every document's language.
    """

    of_text: tuple[str, ...]
    collection: tuple[tuple[str, float], ...]
    clusters: tuple[tuple[tuple[str, float], ...], ...]
    forced: bool

    @property
    def mixed(self) -> bool:
        """True when more than one language (not counting "und") holds documents."""
        return sum(1 for code, _ in self.collection if code != UNDETERMINED) > 1


_identifier: Any = None


def _model() -> Any:
    """py3langid's identifier restricted to SUPPORTED, loaded on first use (about 0.4 s)."""
    global _identifier
    if _identifier is None:
        from py3langid.langid import MODEL_FILE, LanguageIdentifier

        identifier = LanguageIdentifier.from_model_file(MODEL_FILE, norm_probs=True)
        identifier.set_languages(list(SUPPORTED))  # short texts are not read as a language we cannot serve
        _identifier = identifier
    return _identifier


@cache
def english_stop_words() -> frozenset[str]:
    """scikit-learn's English stop words (imported on first use: `options` imports this module)."""
    from sklearn.feature_extraction.text import ENGLISH_STOP_WORDS

    return frozenset(ENGLISH_STOP_WORDS)


def looks_english(text: str) -> bool:
    """The cheap test that spares plain English piles the detection model (see ENGLISH_STOP_SHARE)."""
    lowered = text.lower()
    words = _ascii_words(lowered)
    if len(words) < ENGLISH_MIN_WORDS:
        return False
    if not text.isascii() and len(_NON_ASCII_LETTER.findall(text)) > ENGLISH_FOREIGN_LETTERS * len(words):
        return False
    stop = english_stop_words()
    hits = sum(map(stop.__contains__, words))  # in C: this test runs on every text of a pile
    if "n't" in lowered:  # a word of `words` can end in "n't" only if the text it was found in holds it
        hits += sum(1 for w in words if w not in stop and w.endswith("n't"))
    return hits >= ENGLISH_STOP_SHARE * len(words)


def _ascii_words(lowered: str) -> list[str]:
    """``_ASCII_WORDS.findall(lowered)``, by a translation and a split where the two agree (see
    _NOT_ASCII_LETTER): the regular search took most of `looks_english`'s time."""
    if lowered.isascii() and "'" not in lowered:
        return lowered.translate(_NOT_ASCII_LETTER).split()
    return _ASCII_WORDS.findall(lowered)


def _short_and_plain(text: str) -> bool:
    """Too few words to tell, in ASCII letters only ("ok thanks", "test")."""
    return len(_ASCII_WORDS.findall(text.lower())) < ENGLISH_MIN_WORDS and _NON_ASCII_LETTER.search(text) is None


def _enough_letters(sample: str) -> bool:
    """At least MIN_LETTERS letters (``str.isalpha``) in `sample`; stops counting there."""
    letters = 0
    for char in sample:
        if char.isalpha():
            letters += 1
            if letters >= MIN_LETTERS:
                return True
    return False


def detect_language(text: str) -> str:
    """The ISO 639-1 code of `text`'s language, or "und" when the text is too short or the model unsure."""
    sample = text[:DETECT_CHARS]
    if looks_english(sample):
        return "en"
    if not _enough_letters(sample):
        return UNDETERMINED
    return _confident(*_model().classify(sample))


def _confident(code: str, probability: float) -> str:
    """The model's code when it is sure enough (MIN_CONFIDENCE), else "und"."""
    return str(code) if probability >= MIN_CONFIDENCE else UNDETERMINED


def detect_languages(texts: Sequence[str], forced: str | None = None, workers: int = 1, *,
                     english: Sequence[bool] | None = None) -> tuple[str, ...]:
    """The language of every text (`forced`, from --language, for all when given).

    Texts that `looks_english` are English without the model. When every other text is short and in ASCII
    letters, those are "und" and the model is never loaded: a plain English pile runs as fast as before
    languages were detected. Otherwise every other text goes to the model, all at once (`classify_many`, in
    `workers` processes when there are many; the codes of `detect_language` one by one). `english`, when
    given, is `looks_english` of every text's first DETECT_CHARS characters, found beforehand (`screen_ahead`).
    """
    if forced is not None:
        return (forced,) * len(texts)
    if english is None:
        english = [looks_english(text[:DETECT_CHARS]) for text in texts]
    codes = ["en" if is_english else "" for is_english in english]
    rest = [i for i, code in enumerate(codes) if not code]
    if all(_short_and_plain(texts[i][:DETECT_CHARS]) for i in rest):
        return tuple(code or UNDETERMINED for code in codes)
    asked = []
    for i in rest:
        if not _enough_letters(texts[i][:DETECT_CHARS]):
            codes[i] = UNDETERMINED
        else:
            asked.append(i)
    for i, code in zip(asked, classify_many([texts[i][:DETECT_CHARS] for i in asked], workers), strict=True):
        codes[i] = code
    return tuple(codes)


_ahead: tuple[list[str], list[bool]] | None = None  # texts and their `looks_english`, from `screen_ahead`


def screen_ahead(texts: Sequence[str]) -> None:
    """The part of `detect_languages` that can run before the texts are final, kept in this process for
    `screened_ahead`: `looks_english` of every text, and the model loaded when any other text is not short
    and plain (as `detect_languages` would). A worker forked before boilerplate lines are stripped does it
    while they are found; most texts lose none, and only those that do are screened again."""
    global _ahead
    english = [looks_english(text[:DETECT_CHARS]) for text in texts]
    _ahead = (list(texts), english)
    rest = (text for text, is_english in zip(texts, english, strict=True) if not is_english)
    if not all(_short_and_plain(text[:DETECT_CHARS]) for text in rest):
        _model()


# Input bytes taken as one text when guessing, before reading, whether a source holds CLASSIFY_PARALLEL_MIN
# texts (pipeline.prepare_collection forks the detection worker then): 1 KB is long for messages and tickets.
# A wrong guess either way costs little: a model loaded in vain on the idle core, or the worker forked after
# reading.
DETECT_EARLY_BYTES = 1024


def load_model() -> None:
    """Load the detection model into this process ahead of `detect_languages` (a worker does it while the
    texts are still read)."""
    _model()


def screened_ahead(changed: Mapping[int, str]) -> tuple[list[str], list[bool]]:
    """The texts given to `screen_ahead` with `changed` (index -> new text) put in, and `looks_english` of
    each (the changed texts screened anew): `detect_languages(texts, english=...)` then gives the codes that
    it gives on these texts alone."""
    global _ahead
    if _ahead is None:
        raise RuntimeError("screened_ahead needs screen_ahead first, in the same process")
    texts, english = _ahead
    _ahead = None
    for i, text in changed.items():
        texts[i] = text
        english[i] = looks_english(text[:DETECT_CHARS])
    return texts, english


# What the batched path reads of py3langid's identifier (its 0.4 layout: one feature per automaton state)
_BATCH_NEEDS = ("tk_nextmove", "tk_row", "tk_output", "nb_ptc", "nb_pc", "nb_classes", "_alias_pairs", "_encode")
CLASSIFY_BLOCK = 2048  # texts walked together: a block's padded bytes stay a few MB


# Texts from which detection runs in worker processes: the pool of two forks added 0.08 s of CPU time at 8,192
# texts (1.05 s in one process), and a block of texts takes about 0.1 s of CPU time.
CLASSIFY_PARALLEL_MIN = 4 * CLASSIFY_BLOCK
_shared: tuple[Sequence[str], Any, tuple[Any, Any, Any, Any]] | None = None  # set before the fork


def _classify_shared(start: int) -> list[str]:
    assert _shared is not None
    samples, model, automaton = _shared
    return _classify_block(samples[start : start + CLASSIFY_BLOCK], model, automaton)


def classify_many(samples: Sequence[str], workers: int = 1) -> list[str]:
    """`detect_language`'s model step for many texts at once: the same codes as py3langid's `classify`.

    py3langid walks a byte automaton in Python, one text at a time (about 0.7 ms per text, the whole
    detection cost of a pile of 50,000 non-English texts: 35 s). Here every text of a block advances by one
    byte per numpy step, and the naive Bayes scores of the block are one sparse product; the model, the
    encoding, the temperature and the softmax are py3langid's own (``LanguageIdentifier._decide``). Sums
    run in another order than in py3langid, so a score may differ in its last float32 bits; a code can
    change only for a text whose confidence lies that close to MIN_CONFIDENCE or to a tie. `workers` > 1
    classifies blocks in that many forked processes when there are at least CLASSIFY_PARALLEL_MIN samples
    (the codes are the same).
    """
    global _identifier, _shared
    if not samples:
        return []
    model = _model()
    if not all(hasattr(model, name) for name in _BATCH_NEEDS):  # another py3langid layout: its own classify
        return [_confident(*model.classify(sample)) for sample in samples]
    automaton = _automaton(model)
    starts = range(0, len(samples), CLASSIFY_BLOCK)
    codes: list[str] = []
    if workers > 1 and len(samples) >= CLASSIFY_PARALLEL_MIN and "fork" in multiprocessing.get_all_start_methods():
        _shared = (samples, model, automaton)  # forked workers read them without pickling
        try:
            with multiprocessing.get_context("fork").Pool(min(workers, len(starts))) as pool:
                for block in pool.imap(_classify_shared, starts):
                    codes.extend(block)
        finally:
            _shared = None
    else:
        for start in starts:
            codes.extend(_classify_block(samples[start : start + CLASSIFY_BLOCK], model, automaton))
    # The model (about 80 MB with the arrays above) is needed again only by a later detection, which loads it
    # anew (0.4 s): the run's later stages, whose peak memory is the run's, do not carry it.
    _identifier = None
    return codes


def _automaton(model: Any) -> tuple[Any, Any, Any, Any]:
    """The model's automaton as numpy arrays: next states, row offsets, the feature of each state, log P(t|c)
    (about 0.1 s and 25 MB beside the model itself)."""
    import numpy as np

    nextmove = np.frombuffer(model.tk_nextmove, dtype=np.dtype(model.tk_nextmove.typecode))  # a view, no copy
    rowbase = np.frombuffer(model.tk_row, dtype=np.dtype(model.tk_row.typecode)).astype(np.int64) << 8
    output = np.asarray(model.tk_output, dtype=np.int32)
    return nextmove, rowbase, output, model.nb_ptc.astype(np.float32)  # 23 MB, once; py3langid's sums are float32


def _classify_block(samples: Sequence[str], model: Any, automaton: tuple[Any, Any, Any, Any]) -> list[str]:
    """Codes of one block of texts (see `classify_many`)."""
    import numpy as np
    import scipy.sparse as sp

    nextmove, rowbase, output, ptc = automaton
    encoded = [model._encode(sample) for sample in samples]  # py3langid's own case folding, NFC and UTF-8
    lengths = np.array([len(raw) for raw in encoded], dtype=np.int64)
    order = np.argsort(-lengths, kind="stable")  # longest first: the texts still walking are a prefix
    padded = np.zeros((len(samples), int(lengths.max(initial=0))), dtype=np.uint8)
    for row, i in enumerate(order.tolist()):
        padded[row, : lengths[i]] = np.frombuffer(encoded[i], dtype=np.uint8)
    walking = np.searchsorted(-lengths[order], -np.arange(padded.shape[1]), side="right")
    state = np.zeros(len(samples), dtype=np.int64)
    rows, features = [np.zeros(0, np.int64)], [np.zeros(0, np.int32)]
    for step, alive in enumerate(walking.tolist()):
        state[:alive] = nextmove[rowbase[state[:alive]] + padded[:alive, step]]
        found = output[state[:alive]]
        hit = np.flatnonzero(found >= 0)
        rows.append(order[hit])
        features.append(found[hit])
    row_ids, feature_ids = np.concatenate(rows), np.concatenate(features)
    counts = sp.csr_matrix((np.ones(row_ids.size, dtype=np.float32), (row_ids, feature_ids)),
                           shape=(len(samples), ptc.shape[0]))
    counts.sum_duplicates()
    counts.data = np.log1p(counts.data)
    scores = np.asarray(counts @ ptc, dtype=np.float32) + model.nb_pc
    featureless = np.diff(counts.indptr) == 0
    scores[featureless] = 0.0  # py3langid: no features, a uniform (undecided) score
    scores *= (1.0 / np.sqrt(np.maximum(lengths, 1))).astype(np.float32)[:, None]
    np.exp(scores - scores.max(axis=1, keepdims=True), out=scores)
    scores /= scores.sum(axis=1, keepdims=True)
    for i, j in model._alias_pairs:  # a label with two columns: one merged score (py3langid does the same)
        scores[:, i] += scores[:, j]
        scores[:, j] = 0.0
    best = scores.argmax(axis=1)
    confidence = scores[np.arange(len(samples)), best]
    return [str(model.nb_classes[b]) if c >= MIN_CONFIDENCE else UNDETERMINED
            for b, c in zip(best.tolist(), confidence.tolist(), strict=True)]


def shares(codes: Sequence[str], weights: np.ndarray) -> tuple[tuple[str, float], ...]:
    """Every language with its weighted share, largest first (ties by code, for reproducible output)."""
    total = float(weights.sum())
    counts: Counter[str] = Counter()
    for code, weight in zip(codes, weights.tolist(), strict=True):
        counts[code] += weight
    if total <= 0:
        return ()
    return tuple(sorted(((code, n / total) for code, n in counts.items()), key=lambda item: (-item[1], item[0])))


def shares_line(found: Sequence[tuple[str, float]], most: int = 6) -> str:
    """"en 60%, undetermined 40%, 3 others under 1%": shares for a line of text, largest first.

    A language is named when its share shows as at least 1% (at most `most` of them); the rest are counted.
    "und" reads "undetermined" (too short or too unsure to tell)."""
    named = [(code, share) for code, share in found if f"{share:.0%}" != "0%"][:most]  # "0%" would read as absent
    parts = [f"{'undetermined' if code == UNDETERMINED else code} {share:.0%}" for code, share in named]
    rest = len(found) - len(named)
    if rest:
        under = all(f"{share:.0%}" == "0%" for _, share in found[len(named):])
        parts.append(f"{rest} other{'s' if rest > 1 else ''}" + (" under 1%" if under else ""))
    return ", ".join(parts)


def present_languages(codes: Sequence[str], weights: np.ndarray) -> tuple[str, ...]:
    """Languages of at least PRESENT_SHARE of the documents ("und" left out), largest first."""
    return tuple(code for code, share in shares(codes, weights) if code != UNDETERMINED and share >= PRESENT_SHARE)


def language_mix(codes: Sequence[str], weights: np.ndarray, labels: np.ndarray, k: int, *,
                 forced: bool) -> LanguageMix:
    """Shares of languages for the collection and for each of the `k` clusters (`labels` per distinct text)."""
    import numpy as np

    per_cluster = []
    for c in range(k):
        rows = np.flatnonzero(labels == c)
        per_cluster.append(shares([codes[int(i)] for i in rows], weights[rows]))
    return LanguageMix(tuple(codes), shares(codes, weights), tuple(per_cluster), forced)


def stop_words_for(languages: Sequence[str]) -> set[str]:
    """scikit-learn's English list, plus the stopwords-iso list (and EXTRA_STOP_WORDS) of every other language."""
    words = set(english_stop_words())
    others = [code for code in languages if code not in ("en", UNDETERMINED)]
    if others:
        import stopwordsiso

        for code in others:
            words.update(word.lower() for word in stopwordsiso.stopwords(code))
            words.update(EXTRA_STOP_WORDS.get(code, ()))
    return words


def script_of(word: str) -> str:
    """"latin", "cyrillic", "arabic" or "other", from the word's first character (for choosing a stemmer)."""
    point = ord(word[0])
    if point < 0x250:
        return "latin"
    if 0x400 <= point < 0x530:
        return "cyrillic"
    if 0x600 <= point < 0x700 or 0x750 <= point < 0x780:
        return "arabic"
    return "other"


def stemmers_by_script(languages: Sequence[str]) -> dict[str, str]:
    """For each script, the Snowball language to stem its words with: the most common present language of
    that script that Snowball has (English for Latin script when none is)."""
    chosen = {"latin": "english"}
    seen: set[str] = set()
    for code in languages:  # largest first
        name = SNOWBALL.get(code)
        if name is None:
            continue
        script = {"ar": "arabic", "ru": "cyrillic"}.get(code, "latin")
        if script not in seen:
            chosen[script] = name
            seen.add(script)
    return chosen


_jieba: Any = None


def _jieba_tokenizer() -> Any:
    """jieba's segmenter with its shipped dictionary, loaded on the first Chinese text (about 1 s)."""
    global _jieba
    if _jieba is None:
        import logging

        import jieba

        logging.getLogger("jieba").setLevel(logging.WARNING)  # it prints its loading times otherwise
        tokenizer = jieba.Tokenizer()
        tokenizer.initialize()
        _jieba = tokenizer
    return _jieba


def segment_cjk(run: str, offset: int, *, japanese: bool) -> Iterator[tuple[int, int, str]]:
    """(start, end, item) of the words of a run of Han and kana characters that begins at `offset`.

    Chinese (no kana in the text): jieba's words. Japanese: a kanji run of two characters is one word,
    a longer one gives its overlapping character bigrams (kept apart by BREAK_ITEM so that they make no
    phrases), a katakana run is one word (loanwords are written so), and a hiragana run (particles,
    inflections) is a break.
    """
    if not japanese:
        for word, start, end in _jieba_tokenizer().tokenize(run):
            yield offset + start, offset + end, word
        return
    for piece in _CJK_OR_OTHER.finditer(run):
        text, start = piece.group(), offset + piece.start()
        first = text[0]
        if _HIRAGANA_CHAR.match(first):
            yield start, start + len(text), BREAK_ITEM
        elif _KATAKANA_CHAR.match(first) or len(text) <= 2:
            yield start, start + len(text), text
        else:
            for i in range(len(text) - 1):
                if i:
                    yield start + i, start + i, BREAK_ITEM
                yield start + i, start + i + 2, text[i : i + 2]


def has_kana(text: str) -> bool:
    """True when `text` holds hiragana or katakana (then its Han characters are read as Japanese)."""
    return _KANA.search(text) is not None
