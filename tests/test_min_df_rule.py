"""The default min_df rises to 3 for collections of long texts (docs/vectorizing.md, "min_df and text length").

Why (the rule's reason, common practice rather than a published value): a long text holds many words that
only one other text shares (names, numbers, one story's details); they tie pairs of texts together by
chance, and a long text keeps plenty of shared words without them. A short text holds few content words,
and a rare one is often all that places it, so short texts keep min_df 2.
"""

from __future__ import annotations

import random
import statistics
from pathlib import Path

import numpy as np
import pytest

from pilewise.clustering.kmeans import kmeans_clusters
from pilewise.options import RunOptions, kmeans_starts
from pilewise.vectors.text import Analyzer, load_stop_words
from pilewise.vectors.tfidf import LONG_TEXT_WORDS, VectorSettings, default_min_df, vectorize

ANALYZER = Analyzer(stop_words=load_stop_words(None), stem=False)
TOPICS = ("parcel courier delivery tracking depot van label", "invoice refund payment card charge bank receipt")


def _texts(n: int, words_per_text: int, seed: int = 0) -> list[str]:
    """`n` generated texts of `words_per_text` content words from two topics, plus one word shared by
    exactly two texts (texts 0 and 1) and one word found in a single text each."""
    rng = random.Random(seed)
    texts = []
    for i in range(n):
        vocabulary = TOPICS[i % 2].split()
        body = [rng.choice(vocabulary) for _ in range(words_per_text - 1)] + [f"single{i:03d}"]
        texts.append(" ".join(body))
    texts[0] += " zanzibar"  # a word in exactly two documents
    texts[1] += " zanzibar"
    return texts


@pytest.mark.parametrize(("median", "expected"), [(None, 2), (0.0, 2), (LONG_TEXT_WORDS - 1, 2),
                                                   (LONG_TEXT_WORDS, 3), (400.0, 3)])
def test_long_texts_raise_min_df_to_three(median: float | None, expected: int) -> None:
    # the threshold itself: a median of LONG_TEXT_WORDS content words or more counts as long (common practice:
    # more than two sentences' worth); without a length (streaming, Spark) only the size counts
    assert default_min_df(500, median) == expected


@pytest.mark.parametrize(("n", "expected"), [(10, 1), (29, 1), (30, 3), (60_000, 3), (100_000, 5)])
def test_size_rule_still_applies_to_long_texts(n: int, expected: int) -> None:
    # below 30 texts min_df stays 1 whatever the length; above 60,000 the size rule (one per 20,000) passes 3
    assert default_min_df(n, 100.0) == expected


def test_vectorize_drops_words_of_two_long_texts() -> None:
    long_texts = _texts(60, 30)
    result = vectorize(long_texts, ANALYZER, VectorSettings(lsa_components=0))
    assert result.facts["min_df"] == 3
    assert "zanzibar" not in result.terms  # in 2 documents: below min_df 3
    assert "parcel" in result.terms


def test_vectorize_keeps_words_of_two_short_texts() -> None:
    short_texts = _texts(60, 5)
    result = vectorize(short_texts, ANALYZER, VectorSettings(lsa_components=0))
    assert result.facts["min_df"] == 2
    assert "zanzibar" in result.terms


def test_stop_words_do_not_make_a_text_long() -> None:
    # 5 content words padded with 40 stop words: short by content, long by raw words
    padding = " ".join(["the", "of", "and", "to", "in", "it", "is", "was"] * 5)
    texts = [f"{t} {padding}" for t in _texts(60, 5)]
    assert vectorize(texts, ANALYZER, VectorSettings(lsa_components=0)).facts["min_df"] == 2


def test_given_min_df_overrides_the_length_rule() -> None:
    result = vectorize(_texts(60, 30), ANALYZER, VectorSettings(min_df=2, lsa_components=0))
    assert result.facts["min_df"] == 2
    assert "zanzibar" in result.terms


def test_copies_count_towards_document_frequency_under_the_length_rule() -> None:
    # a text standing for 3 documents gives its words a document frequency of 3: kept at min_df 3
    texts = _texts(60, 30)
    texts[2] += " lighthouse"
    copies = np.ones(len(texts))
    copies[2] = 3
    result = vectorize(texts, ANALYZER, VectorSettings(lsa_components=0), copies=copies)
    assert result.facts["min_df"] == 3
    assert "lighthouse" in result.terms


open_sets = pytest.importorskip("open_sets")


@pytest.mark.corpus
@pytest.mark.slow
def test_reuters_sample_at_defaults_is_within_the_seed_spread_of_scikit_learn() -> None:
    """Issue 11's quality target on the Reuters sample (70 long news texts): pilewise at its defaults is not
    below the best standard scikit-learn pipeline by more than that pipeline's seed-to-seed spread."""
    from sklearn.cluster import KMeans
    from sklearn.decomposition import TruncatedSVD
    from sklearn.feature_extraction.text import TfidfVectorizer
    from sklearn.metrics import normalized_mutual_info_score
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import Normalizer

    try:
        collection = open_sets.load_reuters_sample()
    except FileNotFoundError as err:
        pytest.skip(str(err))
    texts, k = list(collection.texts), len(set(collection.labels))
    starts = kmeans_starts(RunOptions(source=Path("."), k=k), len(texts))
    ours, theirs = [], []
    for seed in range(5):
        vectors = vectorize(texts, ANALYZER, VectorSettings(seed=seed))
        assert vectors.facts["min_df"] == 3  # long texts: median far above LONG_TEXT_WORDS content words
        labels = kmeans_clusters(np.asarray(vectors.space), np.ones(len(texts)), k=k, seed=seed, n_init=starts).labels
        ours.append(normalized_mutual_info_score(collection.labels, labels))
        # the pipeline of issue 11 (TF-IDF + TruncatedSVD(100) + normalisation + k-means, n_init 10), scikit-learn
        space = make_pipeline(TfidfVectorizer(stop_words="english", sublinear_tf=True, max_df=0.5, min_df=2),
                              TruncatedSVD(100, random_state=seed), Normalizer()).fit_transform(texts)
        theirs.append(normalized_mutual_info_score(collection.labels,
                                                   KMeans(k, n_init=10, random_state=seed).fit_predict(space)))
    assert statistics.mean(ours) >= statistics.mean(theirs) - statistics.stdev(theirs)
