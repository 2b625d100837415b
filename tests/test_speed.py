"""The faster paths give the same results as the plain ones (worker processes, chunked counting)."""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.feature_extraction.text import CountVectorizer

from pilewise.ingest import dedup
from pilewise.vectors import tfidf
from pilewise.vectors.text import Analyzer, load_stop_words


def _texts() -> list[str]:
    rng = np.random.default_rng(3)
    words = ["parcel", "courier", "refund", "late", "damaged", "invoice", "address", "box", "label", "return"]
    texts = [" ".join(rng.choice(words, size=int(rng.integers(0, 12)))) for _ in range(300)]
    return texts + ["", "the and of", "Parcels parcel's parcel 42 box-label", "x"]


@pytest.mark.parametrize("stem", [False, True])
def test_count_terms_in_workers_and_small_chunks_equals_one_pass(monkeypatch: pytest.MonkeyPatch, stem: bool) -> None:
    texts = _texts()
    plain = Analyzer(stop_words=load_stop_words(None), stem=stem)
    words, terms, pairs, pair_words = tfidf.count_terms(texts, plain, 2)
    monkeypatch.setattr(tfidf, "PARALLEL_MIN_TEXTS", 10)
    monkeypatch.setattr(tfidf, "PAIR_BLOCK_TEXTS", 7)  # many chunks and pair blocks
    split = Analyzer(stop_words=load_stop_words(None), stem=stem)
    words2, terms2, pairs2, pair_words2 = tfidf.count_terms(texts, split, 2, workers=2)
    assert terms2 == terms
    assert (words2 != words).nnz == 0 and (pairs2 != pairs).nnz == 0
    assert np.array_equal(pair_words2, pair_words)
    assert [split.surface(t) for t in terms] == [plain.surface(t) for t in terms]


def test_word_counts_match_scikit_learn_count_vectorizer() -> None:
    # independent computation: CountVectorizer with the analyzer's own terms (scikit-learn docs, "analyzer"
    # may be a callable); columns compared by term
    texts = _texts()
    analyzer = Analyzer(stop_words=load_stop_words(None), stem=False)
    words, terms, _, _ = tfidf.count_terms(texts, analyzer, 1)
    reference = CountVectorizer(analyzer=Analyzer(stop_words=load_stop_words(None), stem=False).terms)
    expected = reference.fit_transform(texts)
    order = [reference.vocabulary_[t] for t in terms]
    assert (words - expected[:, order]).nnz == 0


def test_shingle_hashes_in_workers_equal_one_process(monkeypatch: pytest.MonkeyPatch) -> None:
    texts = _texts() * 3
    hashes, offsets = dedup.shingle_hashes(texts)
    monkeypatch.setattr(dedup, "_PARALLEL_MIN_TEXTS", 10)
    monkeypatch.setattr(dedup, "_RANGE_TEXTS", 50)
    hashes2, offsets2 = dedup.shingle_hashes(texts, workers=2)
    assert np.array_equal(hashes, hashes2) and np.array_equal(offsets, offsets2)


def test_spans_equal_nltk_span_tokenize() -> None:
    # Analyzer.spans uses `re.finditer` with nltk's pattern; nltk's RegexpTokenizer.span_tokenize (nltk docs,
    # nltk.tokenize.regexp) gives the same spans of the lower-cased text where no combining mark occurs
    from nltk.tokenize import RegexpTokenizer

    from pilewise.vectors.text import TOKEN_PATTERN

    text = "Re-potted the Monstera; it's fine — don't panic! Café naïve e-mail log-in 42 x y-z O'Neil -- a'b"
    analyzer = Analyzer(stop_words=frozenset(), stem=False)
    expected = [span for span in RegexpTokenizer(TOKEN_PATTERN).span_tokenize(text.lower())
                if analyzer.normalize(text.lower()[span[0]:span[1]]) is not None]
    # spans' gap items (start, start, "") stand between words that make no phrase (issue 12)
    assert [(start, end) for start, end, term in analyzer.spans(text) if term] == expected


def test_spans_give_the_counted_terms_with_combining_marks() -> None:
    # "İ" lower-cases to "i" + U+0307 (Python str.lower, Unicode SpecialCasing); nltk 3.10's tokenizer keeps
    # the mark inside the word while `re` (which counting uses) splits there: the marked words must be the
    # counted ones
    analyzer = Analyzer(stop_words=frozenset(), stem=False)
    text = "İstanbul parcel naïve"
    assert [term for _, _, term in analyzer.spans(text) if term] == analyzer.terms(text)
