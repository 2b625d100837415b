"""One preparation path: one tokenizing core, one weighting and reduction step for memory and streaming mode."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import scipy.sparse as sp
from sklearn.decomposition import TruncatedSVD
from sklearn.feature_extraction.text import ENGLISH_STOP_WORDS, TfidfVectorizer
from sklearn.preprocessing import normalize

from pilewise.model import Document
from pilewise.progress import Reporter
from pilewise.vectors.streaming import hashed_counts, prepare_streamed
from pilewise.vectors.text import TOKEN_PATTERN, Analyzer, load_stop_words
from pilewise.vectors.tfidf import (
    TermCounts,
    VectorSettings,
    alphabetical,
    exact_counts,
    smooth_idf,
    tfidf_rows,
    vectorize,
    weigh_and_reduce,
    within_limits,
)

# Texts without apostrophes, digits or one-letter words other than stop words, so that the analyzer's
# tokens are those of scikit-learn's TfidfVectorizer with the same pattern and stop-word list.
TEXTS = [
    "The courier left the parcel at the wrong door and the parcel was wet",
    "Repotting a fern means loosening the roots and adding fresh compost",
    "Refund requested because the pot arrived cracked and the courier left quickly",
    "The fern arrived with yellow leaves and dry compost in a cracked pot",
    "Parcel tracking stopped updating and the courier never rang the door",
    "Yellow leaves on the fern again so we watered the compost less",
]


def _analyzer(stem: bool = False) -> Analyzer:
    return Analyzer(stop_words=load_stop_words(None), stem=stem)


def _streamed(texts: list[str], settings: VectorSettings, work: Path):  # type: ignore[no-untyped-def]
    documents = [Document(f"d{i}", "test", "", text) for i, text in enumerate(texts)]
    return prepare_streamed(documents, work, _analyzer(), settings, redact=False, workers=1,
                            reporter=Reporter(quiet=True), boilerplate=False)


def test_memory_mode_equals_scikit_learns_tfidf_vectorizer() -> None:
    # Reference: scikit-learn's TfidfVectorizer(sublinear_tf=True) with the analyzer's token pattern and the same
    # English stop-word list; its vocabulary is in alphabetical order, as pilewise's columns are.
    settings = VectorSettings(min_df=1, max_df=1.0, lsa_components=0)
    ours = vectorize(TEXTS, _analyzer(), settings)
    reference = TfidfVectorizer(sublinear_tf=True, token_pattern=TOKEN_PATTERN, stop_words=list(ENGLISH_STOP_WORDS))
    expected = reference.fit_transform(TEXTS)
    words = [t for t, phrase in zip(ours.terms, ours.is_phrase, strict=True) if not phrase]
    assert words == list(reference.get_feature_names_out())
    assert isinstance(ours.space, sp.csr_matrix)
    np.testing.assert_allclose(ours.space.toarray(), expected.toarray(), rtol=1e-12, atol=1e-12)


def test_both_modes_give_the_same_counts_and_tfidf_on_the_same_texts(tmp_path: Path) -> None:
    # Independent computation: memory mode's exact vocabulary against streaming mode's hashed one; with no hash
    # collision among these few words both must keep the same words, counts and weights.
    settings = VectorSettings(min_df=1, max_df=1.0, lsa_components=0)
    memory = vectorize(TEXTS, _analyzer(), settings)
    streamed = _streamed(TEXTS, settings, tmp_path).vectors
    words = np.flatnonzero(~memory.is_phrase)
    assert [memory.terms[i] for i in words] == list(streamed.terms)
    assert (memory.counts[:, words] != streamed.counts).nnz == 0
    assert isinstance(streamed.space, sp.csr_matrix) and isinstance(memory.space, sp.csr_matrix)
    np.testing.assert_allclose(streamed.space.toarray(), memory.space.toarray(), rtol=1e-12, atol=1e-12)
    assert streamed.facts["texts_without_terms"] == memory.facts["texts_without_terms"] == 0


def test_the_weighting_step_is_the_same_for_both_vocabularies() -> None:
    # The same TermCounts through weigh_and_reduce, as memory mode calls it (LSA fitted on every row, the fit's
    # own projection U*Sigma) and as streaming mode calls it (fitted on a sample that here holds every row,
    # rows projected as X*V in blocks of two). Linear algebra: U*Sigma = X*V when the components span the
    # rows; three distinct texts twice over have rank 3, below the 5 components lsa_size allows (n_rows - 1),
    # so both spaces must agree up to the sign of each axis.
    texts = TEXTS[:3] * 2
    kept = exact_counts(texts, _analyzer(), VectorSettings(min_df=1, max_df=1.0), np.ones(len(texts)))
    settings = VectorSettings(lsa_components=100)
    whole = weigh_and_reduce(kept, settings)
    blocks = weigh_and_reduce(kept, settings, fit_rows=len(texts), block_rows=2)
    assert whole.facts["lsa_components"] == blocks.facts["lsa_components"] == 5
    assert "lsa_fitted_on_rows" not in whole.facts and blocks.facts["lsa_fitted_on_rows"] == len(texts)
    a, b = np.asarray(whole.space), np.asarray(blocks.space)
    signs = np.where(np.sum(a * b, axis=0) < 0, -1.0, 1.0)
    np.testing.assert_allclose(a * signs, b, atol=1e-6)


def test_a_sampled_fit_projects_every_row_as_scikit_learn_would(tmp_path: Path) -> None:
    # Reference: TruncatedSVD fitted on the same seeded sample of rows (numpy's default_rng choice, sorted) in
    # single precision (LSA_FIT_DTYPE), then `transform` of every row and L2 normalization: the block-by-block
    # projection must equal it.
    texts = [f"{a} {b} {c}" for a in ("fern", "pot", "parcel", "courier") for b in ("wet", "dry", "cracked")
             for c in ("leaves", "compost", "door", "refund", "tracking")]
    kept = exact_counts(texts, _analyzer(), VectorSettings(min_df=1, max_df=1.0), np.ones(len(texts)))
    settings = VectorSettings(lsa_components=3, seed=7)
    ours = weigh_and_reduce(kept, settings, fit_rows=20, block_rows=7, space_dtype=np.float32)
    sample = np.sort(np.random.default_rng(7).choice(len(texts), 20, replace=False))
    words = np.flatnonzero(~kept.is_phrase)
    tfidf = tfidf_rows(kept.counts[:, words], smooth_idf(kept.df[words], kept.n_documents))
    svd = TruncatedSVD(n_components=3, random_state=7, algorithm="randomized").fit(tfidf[sample].astype(np.float32))
    expected = normalize(svd.transform(tfidf))
    assert ours.space.dtype == np.float32 and ours.facts["lsa_fitted_on_rows"] == 20
    np.testing.assert_allclose(np.asarray(ours.space), expected, atol=1e-6)


def test_hashed_counts_record_the_surface_words_of_stems_as_terms_does() -> None:
    # Independent computation: Analyzer.terms, word by word, records each stem's surface words; the chunked
    # tokenizing of hashed_counts must leave the same surface word for every stem.
    texts = ["Watering the ferns, watered ferns, waters", "The fern was watered; watering again"]
    one_by_one, chunked = _analyzer(stem=True), _analyzer(stem=True)
    terms = [t for text in texts for t in one_by_one.terms(text)]
    _, words = hashed_counts(texts, chunked)
    assert sorted(words.elements()) == sorted(terms)
    assert {t: chunked.surface(t) for t in terms} == {t: one_by_one.surface(t) for t in terms}


def test_both_modes_refuse_a_vocabulary_with_no_terms_left(tmp_path: Path) -> None:
    # The one message of tfidf.no_terms_left, in both modes (min_df above every word's document count).
    settings = VectorSettings(min_df=50, max_df=1.0)
    message = ("no terms are left after removing stop words and terms in fewer than 50 documents or more than 1 "
               "of them; lower --min-df or raise --max-df")
    with pytest.raises(Exception, match="^" + message.replace("(", r"\(") + "$"):
        vectorize(TEXTS, _analyzer(), settings)
    with pytest.raises(Exception, match="^" + message + "$"):
        _streamed(TEXTS, settings, tmp_path)


def test_column_selection_and_order_helpers() -> None:
    # Definition (docs/method.md): a term is kept when min_df <= df <= max_df * n; columns are alphabetical,
    # ties kept in their order (a stable sort, as Python's sorted).
    df = np.array([1.0, 2.0, 5.0, 3.0, 6.0])
    assert within_limits(df, 2, 0.5, 10).tolist() == [1, 2, 3]
    names = ["pot", "fern", "courier", "fern"]
    assert [names[i] for i in alphabetical(names)] == sorted(names)
    assert alphabetical(names).tolist() == sorted(range(4), key=lambda i: names[i])
    kept = TermCounts(sp.csr_matrix(np.eye(2, dtype=np.int32)), ("a b", "c d"), np.array([True, True]),
                      np.ones(2), 2.0, 1, 1.0, {})
    with pytest.raises(Exception, match="^no single words are left to cluster on; lower --min-df or raise --max-df$"):
        weigh_and_reduce(kept, VectorSettings())


def test_memory_mode_fits_lsa_on_a_sample_above_lsa_fit_rows(monkeypatch: pytest.MonkeyPatch) -> None:
    # The contract of tfidf.vectorize (docs/method.md): up to LSA_FIT_ROWS texts LSA is fitted on all of them,
    # above it on a seeded sample of LSA_FIT_ROWS, as streaming mode does; the sampled space must equal the one
    # step called with that sample size.
    import pilewise.vectors.tfidf as tfidf

    texts = [f"{a} {b} {c}" for a in ("fern", "pot", "parcel", "courier") for b in ("wet", "dry", "cracked")
             for c in ("leaves", "compost", "door", "refund", "tracking")]
    settings = VectorSettings(min_df=1, max_df=1.0, lsa_components=3)
    assert "lsa_fitted_on_rows" not in vectorize(texts, _analyzer(), settings).facts
    monkeypatch.setattr(tfidf, "LSA_FIT_ROWS", 25)
    sampled = vectorize(texts, _analyzer(), settings)
    assert sampled.facts["lsa_fitted_on_rows"] == 25
    kept = exact_counts(texts, _analyzer(), settings, np.ones(len(texts)))
    np.testing.assert_array_equal(np.asarray(sampled.space), np.asarray(weigh_and_reduce(kept, settings,
                                                                                         fit_rows=25).space))


@pytest.mark.corpus
def test_the_single_precision_sampled_fit_captures_what_a_double_precision_fit_captures() -> None:
    # Open corpus: the 20 Newsgroups sample (tests/open_sets.py). The sampled LSA fit runs in float32
    # (LSA_FIT_DTYPE, for speed); the quantity randomized SVD's error bounds speak of is the share of the TF-IDF
    # matrix's squared norm that the components capture (Halko, Martinsson & Tropp 2011, "Finding structure with
    # randomness", SIAM Review 53(2)). Reference: scikit-learn's TruncatedSVD on the same sample in float64. On
    # this sample the two captured shares agreed to 3e-7 (relative) and the singular values to 5e-7; float32's
    # unit roundoff is 6e-8, so a bound of 1e-4 leaves room for other machines' BLAS and still fails a fit that
    # lost a direction (the smallest of the 20 components holds 3.5% of what the sample's fit captures).
    import open_sets
    from pilewise.vectors import tfidf as module

    texts = list(open_sets.load_mini_newsgroups().texts)
    kept = exact_counts(texts, _analyzer(), VectorSettings(min_df=2, max_df=0.5), np.ones(len(texts)))
    settings = VectorSettings(lsa_components=20, seed=3)
    fit_rows = len(texts) * 3 // 4
    ours = weigh_and_reduce(kept, settings, fit_rows=fit_rows)
    assert module.LSA_FIT_DTYPE is np.float32 and ours.lsa is not None and ours.lsa.dtype == np.float32
    assert ours.lsa.shape[0] == 20
    words = np.flatnonzero(~kept.is_phrase)
    tfidf = tfidf_rows(kept.counts[:, words], smooth_idf(kept.df[words], kept.n_documents))
    sample = np.sort(np.random.default_rng(3).choice(len(texts), fit_rows, replace=False))
    double = TruncatedSVD(n_components=20, random_state=3, algorithm="randomized").fit(tfidf[sample])

    def captured(components: np.ndarray) -> float:
        return float(np.linalg.norm(tfidf @ components.astype(np.float64).T) ** 2 / sp.linalg.norm(tfidf) ** 2)

    assert captured(ours.lsa) == pytest.approx(captured(double.components_), rel=1e-4)
    single = TruncatedSVD(n_components=20, random_state=3, algorithm="randomized").fit(
        tfidf[sample].astype(np.float32))
    np.testing.assert_allclose(single.singular_values_, double.singular_values_, rtol=1e-4)
