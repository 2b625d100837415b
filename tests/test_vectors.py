"""Weighting, cosine, tokenizing and stem display against published examples."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.sparse as sp

from pilewise.clustering.kmeans import cosine_to_centroids
from pilewise.vectors.text import Analyzer, load_stop_words
from pilewise.vectors.tfidf import VectorSettings, default_min_df, tfidf_weights, vectorize, with_phrases


def test_tfidf_matches_the_scikit_learn_user_guide_example() -> None:
    # scikit-learn user guide, "Tf-idf term weighting" (TfidfTransformer, smooth idf, raw tf):
    # counts below -> row 0 = [0.85151335, 0, 0.52433293] (shared/CHECKS.md, confirmed).
    counts = sp.csr_matrix([[3, 0, 1], [2, 0, 0], [3, 0, 0], [4, 0, 0], [3, 2, 0], [3, 0, 2]])
    weights = tfidf_weights(counts, sublinear=False).toarray()
    assert weights[0] == pytest.approx([0.85151335, 0.0, 0.52433293], abs=1e-8)


def test_sublinear_tfidf_follows_its_formula() -> None:
    # Independent computation: tf = 1 + ln(count), idf = ln((1+n)/(1+df)) + 1, rows L2-normalized.
    counts = np.array([[3, 0, 1], [2, 0, 0], [3, 0, 0], [4, 0, 0], [3, 2, 0], [3, 0, 2]], dtype=float)
    tf = np.where(counts > 0, 1 + np.log(np.where(counts > 0, counts, 1)), 0)
    df = (counts > 0).sum(axis=0)
    idf = np.log((1 + 6) / (1 + df)) + 1
    expected = tf * idf
    expected /= np.linalg.norm(expected, axis=1, keepdims=True)
    assert tfidf_weights(sp.csr_matrix(counts)).toarray() == pytest.approx(expected)


def test_cosine_matches_the_three_novels_example() -> None:
    # Manning, Raghavan & Schütze, IIR §6.3.1, raw term frequencies of affection, jealous, gossip in
    # Sense and Sensibility, Pride and Prejudice, Wuthering Heights: sim(SaS,PaP)=0.999, sim(SaS,WH)=0.888
    # (values from memory, shared/CHECKS.md; exact 0.8889 for the second).
    sas, pap, wh = [115.0, 10.0, 2.0], [58.0, 7.0, 0.0], [20.0, 11.0, 6.0]
    sims = cosine_to_centroids(np.array([sas, sas]), np.array([pap, wh]), np.array([0, 1]))
    assert sims == pytest.approx([0.999, 0.888], abs=0.0015)
    sparse_sims = cosine_to_centroids(sp.csr_matrix([sas, sas]), np.array([pap, wh]), np.array([0, 1]))
    assert sparse_sims == pytest.approx([0.999, 0.888], abs=0.0015)


def test_tokens_are_lower_cased_and_stop_words_and_contractions_dropped() -> None:
    analyzer = Analyzer(stop_words=load_stop_words(None), stem=False)
    assert analyzer.terms("The courier's van DIDN'T come; we'd like a log-in link, it's 3 days") == [
        "courier", "van", "come", "like", "log-in", "link", "days"
    ]


def test_stems_are_shown_as_their_most_frequent_surface_word() -> None:
    # Porter (1980) step 1a turns "ponies" into "poni" (shared/CHECKS.md); users must never read it.
    analyzer = Analyzer(stop_words=frozenset(), stem=True)
    terms = analyzer.terms("ponies ponies pony plastered")
    assert terms[0] == terms[2]  # one stem for "ponies" and "pony"
    assert analyzer.surface(terms[0]) == "ponies"
    assert analyzer.surface(f"{terms[0]} {terms[3]}") == "ponies plastered"


def test_extra_stop_words_file(tmp_path) -> None:  # type: ignore[no-untyped-def]
    path = tmp_path / "stop.txt"
    path.write_text("# shop words\nplant\nOrder  # trailing comment\n", encoding="utf-8")
    words = load_stop_words(path)
    assert {"plant", "order", "the"} <= words


def test_phrases_join_adjacent_kept_terms() -> None:
    assert with_phrases(["password", "reset", "link"]) == ["password", "reset", "link", "password reset", "reset link"]


@pytest.mark.parametrize(("n", "expected"), [(10, 1), (50, 2), (20_000, 2), (100_000, 5), (1_000_000, 50)])
def test_min_df_grows_with_collection_size(n: int, expected: int) -> None:
    assert default_min_df(n) == expected


def test_vectorize_keeps_phrases_for_description_but_clusters_on_words() -> None:
    texts = [f"password reset failed again {i}" if i % 2 else f"parcel arrived broken pot {i}" for i in range(40)]
    analyzer = Analyzer(stop_words=load_stop_words(None), stem=False)
    result = vectorize(texts, analyzer, VectorSettings(lsa_components=0))
    assert "password reset" in result.terms
    assert result.space.shape == (40, int((~result.is_phrase).sum()))
    assert result.facts["phrases"] == int(result.is_phrase.sum()) > 0


def test_bulk_tokenizing_gives_the_same_tokens_as_nltk() -> None:
    # The analyzer compiles nltk's RegexpTokenizer pattern with `re` for speed; the tokens must not differ.
    from nltk.tokenize import RegexpTokenizer

    from pilewise.vectors.text import TOKEN_PATTERN

    text = "Re-potted the Monstera; it's fine — don't panic! Café naïve e-mail log-in 42 x y-z O'Neil -- a'b"
    analyzer = Analyzer(stop_words=frozenset(), stem=False)
    assert analyzer.tokens(text) == RegexpTokenizer(TOKEN_PATTERN).tokenize(text.lower())
    assert "o'neil" in analyzer.tokens(text) and "re-potted" in analyzer.tokens(text)
    assert [t for _, _, t in analyzer.spans(text) if t] == analyzer.terms(text)  # "" items stand for gaps


def test_phrase_counts_follow_the_text_order() -> None:
    """Regression: sorting the word matrix in place once scrambled the adjacent pairs."""
    import random

    from pilewise.vectors.tfidf import count_terms

    analyzer = Analyzer(stop_words=frozenset({"the"}), stem=False)
    rng = random.Random(0)
    texts = [" ".join(rng.choice(["aa", "bb", "cc", "the", "dd"]) for _ in range(rng.randint(0, 8))) for _ in range(60)]
    _, terms, pairs, pair_words = count_terms(texts, analyzer)
    for i, text in enumerate(texts):
        expected: dict[tuple[str, str], int] = {}
        for phrase in analyzer.phrases(text):  # words side by side, none removed between them (issue 11)
            pair = tuple(phrase.split(" "))
            expected[pair] = expected.get(pair, 0) + 1  # type: ignore[index]
        row = pairs.getrow(i)
        got = {(terms[pair_words[j][0]], terms[pair_words[j][1]]): int(c) for j, c in zip(row.indices, row.data,
                                                                                           strict=True)}
        assert got == expected, text
