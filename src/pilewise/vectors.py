"""Vectorizing stage: term counts (words and two-word phrases), sublinear TF-IDF, LSA.

The defaults come from measurements on open labeled corpora (docs/vectorizing.md).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from sklearn.decomposition import TruncatedSVD
from sklearn.feature_extraction.text import CountVectorizer, TfidfTransformer
from sklearn.preprocessing import normalize

from pilewise.errors import PilewiseError
from pilewise.text import Analyzer


@dataclass(frozen=True)
class VectorSettings:
    """Vectorizing options; None for min_df means the size-dependent default."""

    min_df: int | None = None
    max_df: float = 0.5
    bigrams_in_space: bool = False
    lsa_components: int = 100
    seed: int = 0


@dataclass(frozen=True)
class Vectorized:
    """The vectors of the distinct texts.

    Attributes
    ----------
    counts : scipy.sparse.csr_matrix, shape (n_texts, n_terms)
        Occurrence counts of every kept term (words and two-word phrases).
    terms : tuple of str
        Normalized term of each column (stems when stemming); phrases hold one space.
    space : ndarray of shape (n_texts, n_dims) or csr_matrix
        The L2-normalized clustering space (LSA of the TF-IDF, or the TF-IDF itself).
    facts : dict
        What was used and measured: min_df, vocabulary sizes, LSA explained variance.
    """

    counts: sp.csr_matrix
    terms: tuple[str, ...]
    is_phrase: np.ndarray
    space: np.ndarray | sp.csr_matrix
    facts: dict[str, float | int | str | bool]


def default_min_df(n_texts: int) -> int:
    """1 below 30 texts, else 2, growing by one per 20,000 texts (50 at a million)."""
    if n_texts < 30:
        return 1
    return max(2, math.ceil(n_texts / 20_000))


def tfidf_weights(counts: sp.spmatrix, *, sublinear: bool = True) -> sp.csr_matrix:
    """L2-normalized TF-IDF rows: tf = 1 + ln(count) when sublinear, idf = ln((1 + n) / (1 + df)) + 1."""
    return sp.csr_matrix(TfidfTransformer(sublinear_tf=sublinear).fit_transform(counts))


def with_phrases(terms: list[str]) -> list[str]:
    """Terms followed by the two-word phrases of adjacent kept terms."""
    return terms + [f"{a} {b}" for a, b in zip(terms, terms[1:], strict=False)]


def vectorize(
    texts: Sequence[str],
    analyzer: Analyzer,
    settings: VectorSettings,
    progress: Callable[[str], None] | None = None,
    track: Callable[[Iterable[str]], Iterable[str]] | None = None,
) -> Vectorized:
    """Count terms and phrases, weight with sublinear TF-IDF and reduce with LSA."""
    n = len(texts)
    min_df = settings.min_df if settings.min_df is not None else default_min_df(n)
    max_df: float | int = settings.max_df if n * settings.max_df >= min_df else 1.0
    counter = CountVectorizer(
        analyzer=lambda text: with_phrases(analyzer.terms(text)), min_df=min_df, max_df=max_df, dtype=np.int32
    )
    try:
        counts = counter.fit_transform(track(texts) if track else texts).tocsr()
    except ValueError as err:
        raise PilewiseError(
            f"no terms are left after removing stop words and terms in fewer than {min_df} documents "
            f"or more than {max_df:g} of them; lower --min-df or raise --max-df ({err})"
        ) from err
    terms = tuple(str(t) for t in counter.get_feature_names_out())
    is_phrase = np.fromiter((" " in t for t in terms), dtype=bool, count=len(terms))
    if progress:
        progress(f"{len(terms):,} terms kept ({int(is_phrase.sum()):,} two-word phrases)")
    space_columns = np.arange(len(terms)) if settings.bigrams_in_space else np.flatnonzero(~is_phrase)
    if space_columns.size == 0:
        raise PilewiseError("no single words are left to cluster on; lower --min-df or raise --max-df")
    tfidf = tfidf_weights(counts[:, space_columns])
    empty_rows = int(np.sum(tfidf.getnnz(axis=1) == 0))
    facts: dict[str, float | int | str | bool] = {
        "min_df": min_df,
        "max_df": float(max_df),
        "terms": len(terms),
        "phrases": int(is_phrase.sum()),
        "space_terms": int(space_columns.size),
        "texts_without_terms": empty_rows,
        "bigrams_in_space": settings.bigrams_in_space,
    }
    components = min(settings.lsa_components, tfidf.shape[1] - 1, n - 1)
    space: np.ndarray | sp.csr_matrix
    if settings.lsa_components > 0 and components >= 2:
        svd = TruncatedSVD(n_components=components, random_state=settings.seed, algorithm="randomized")
        reduced = svd.fit_transform(tfidf)
        space = normalize(reduced)
        facts["lsa_components"] = components
        facts["lsa_explained_variance"] = round(float(svd.explained_variance_ratio_.sum()), 4)
    else:
        space = tfidf
        facts["lsa_components"] = 0
    return Vectorized(counts=counts, terms=terms, is_phrase=is_phrase, space=space, facts=facts)
