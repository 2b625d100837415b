"""Issue 15, vectorizing: the sampled LSA fit in a forked worker beside the phrase counting gives the same vectors
as the fit in place (the replaced code path, `--workers 1`), also when the worker dies."""

from __future__ import annotations

import multiprocessing
import os
import random

import numpy as np
import pytest
import scipy.sparse as sp
from sklearn.preprocessing import normalize

from pilewise.vectors import tfidf
from pilewise.vectors.text import Analyzer, load_stop_words

pytestmark = pytest.mark.skipif("fork" not in multiprocessing.get_all_start_methods(), reason="needs fork")

FIT_ROWS = 300  # a sampled fit on a small collection: the worker path runs above this many texts


def _texts(n: int, seed: int = 0) -> list[str]:
    """Seeded texts of four invented topics' words with shared filler, punctuation and stop words."""
    rng = random.Random(seed)
    topics = [[f"{stem}{i}" for i in range(40)] for stem in ("alpha", "bravo", "carbo", "delta")]
    filler = [f"filler{i}" for i in range(200)] + ["the", "and", "of", "a", "to"]
    texts = []
    for _ in range(n):
        topic = rng.choice(topics)
        words = [rng.choice(topic) if rng.random() < 0.6 else rng.choice(filler) for _ in range(rng.randint(5, 40))]
        texts.append(" ".join(w + ("." if rng.random() < 0.1 else "") for w in words))
    return texts


def _analyzer() -> Analyzer:
    return Analyzer(stop_words=load_stop_words(None), stem=False)


def _equal(a: tfidf.Vectorized, b: tfidf.Vectorized) -> None:
    # the same arrays bit for bit: the worker fits the same matrix, sample and seed (numpy array_equal)
    assert isinstance(a.space, np.ndarray) and isinstance(b.space, np.ndarray)
    assert np.array_equal(a.space, b.space)
    assert a.lsa is not None and b.lsa is not None and np.array_equal(a.lsa, b.lsa)
    assert a.idf is not None and b.idf is not None and np.array_equal(a.idf, b.idf)
    assert a.terms == b.terms and a.facts == b.facts
    for part in ("data", "indices", "indptr"):
        assert np.array_equal(getattr(a.counts, part), getattr(b.counts, part))


@pytest.fixture()
def small_fit(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(tfidf, "LSA_FIT_ROWS", FIT_ROWS)


def test_fit_beside_equals_fit_in_place(small_fit: None, monkeypatch: pytest.MonkeyPatch) -> None:
    texts = _texts(900)
    copies = np.array([1 + i % 3 for i in range(len(texts))], dtype=float)  # copies count in df and idf
    settings = tfidf.VectorSettings(lsa_components=20, seed=3)
    in_place = tfidf.vectorize(texts, _analyzer(), settings, copies=copies, workers=1)
    taken: list[bool] = []
    fitted = tfidf.FitBeside.fitted

    def spy(self: tfidf.FitBeside) -> object:
        svd = fitted(self)
        taken.append(svd is not None)
        return svd

    monkeypatch.setattr(tfidf.FitBeside, "fitted", spy)
    beside = tfidf.vectorize(texts, _analyzer(), settings, copies=copies, workers=2)
    assert taken == [True]  # the worker's fit was the one used
    assert in_place.facts["lsa_fitted_on_rows"] == FIT_ROWS
    _equal(in_place, beside)


def _die() -> None:
    os._exit(3)  # the worker dies as under the out-of-memory killer


def _fail() -> None:
    raise MemoryError("the worker's own allocation failed")


@pytest.mark.parametrize("worker", [_die, _fail])
def test_dead_fit_worker_leaves_the_fit_to_this_process(
    small_fit: None, monkeypatch: pytest.MonkeyPatch, worker: object
) -> None:
    texts = _texts(700, seed=1)
    settings = tfidf.VectorSettings(lsa_components=15, seed=0)
    in_place = tfidf.vectorize(texts, _analyzer(), settings, workers=1)
    monkeypatch.setattr(tfidf, "_fit_words", worker)
    _equal(in_place, tfidf.vectorize(texts, _analyzer(), settings, workers=2))


def test_fit_beside_only_for_a_sampled_fit_of_single_words() -> None:
    settings = tfidf.VectorSettings()
    above = tfidf.LSA_FIT_ROWS + 1
    assert tfidf.fit_beside(above, settings, workers=2)
    assert not tfidf.fit_beside(tfidf.LSA_FIT_ROWS, settings, workers=2)  # fitted on every row: the fit is the space
    assert not tfidf.fit_beside(above, settings, workers=1)
    assert not tfidf.fit_beside(above, tfidf.VectorSettings(bigrams_in_space=True), workers=2)  # needs the phrases
    assert not tfidf.fit_beside(above, tfidf.VectorSettings(lsa_components=0), workers=2)


def test_phrases_in_space_give_the_same_vectors_with_workers(small_fit: None) -> None:
    texts = _texts(600, seed=2)
    settings = tfidf.VectorSettings(lsa_components=10, bigrams_in_space=True)
    _equal(tfidf.vectorize(texts, _analyzer(), settings, workers=1),
           tfidf.vectorize(texts, _analyzer(), settings, workers=2))


def _tfidf_rows_before(counts: sp.csr_matrix, idf: np.ndarray) -> sp.csr_matrix:
    """The replaced `tfidf_rows`: new arrays for every step, sklearn's normalize on a copy."""
    weighted = sp.csr_matrix(counts, dtype=np.float64, copy=True)
    weighted.data = (1.0 + np.log(weighted.data)) * idf[weighted.indices]
    return sp.csr_matrix(normalize(weighted))


@pytest.mark.parametrize("entries", [1, 7, 1 << 20])
def test_tfidf_rows_in_place_equals_the_replaced_steps(monkeypatch: pytest.MonkeyPatch, entries: int) -> None:
    monkeypatch.setattr(tfidf, "WEIGH_ENTRIES", entries)  # idf gathered in several pieces, or at once
    rng = np.random.default_rng(5)
    counts = sp.random(60, 40, density=0.2, format="csr", random_state=rng, dtype=np.float64)
    counts.data = rng.integers(1, 50, counts.data.size).astype(np.int32)
    counts.data[counts.indptr[3] : counts.indptr[4]] = 0  # a text without terms keeps an empty row
    counts.eliminate_zeros()
    counts = sp.csr_matrix(counts, dtype=np.int32)
    original = counts.copy()
    idf = tfidf.smooth_idf(rng.integers(1, 60, 40), 60)
    before, after = _tfidf_rows_before(counts, idf), tfidf.tfidf_rows(counts, idf)
    for part in ("data", "indices", "indptr"):
        assert np.array_equal(getattr(before, part), getattr(after, part))  # bit for bit (numpy array_equal)
    assert np.array_equal(counts.data, original.data) and np.array_equal(counts.indices, original.indices)
    expected = counts.toarray().astype(float)  # scikit-learn's TfidfTransformer weighting, computed densely
    expected[expected > 0] = 1 + np.log(expected[expected > 0])
    expected *= idf
    norms = np.linalg.norm(expected, axis=1, keepdims=True)
    np.testing.assert_allclose(after.toarray(), np.divide(expected, norms, where=norms > 0, out=expected * 0))
