"""Vectorizing stage: term counts (words and two-word phrases), sublinear TF-IDF, LSA.

The defaults come from measurements on open labeled corpora (docs/vectorizing.md).
"""

from __future__ import annotations

import itertools
import math
from array import array
from collections import defaultdict
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from sklearn.decomposition import TruncatedSVD
from sklearn.feature_extraction.text import TfidfTransformer
from sklearn.preprocessing import normalize

from pilewise.errors import PilewiseError
from pilewise.vectors.text import Analyzer


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


def smooth_idf(df: np.ndarray, n_documents: float) -> np.ndarray:
    """idf = ln((1 + n) / (1 + df)) + 1, scikit-learn's smoothed idf; `df` and `n` count every document."""
    return np.log((1.0 + n_documents) / (1.0 + np.asarray(df, dtype=float))) + 1.0


def document_frequency(counts: sp.csr_matrix, copies: np.ndarray | None = None) -> np.ndarray:
    """Documents holding each term: each row (a distinct text) counts as often as it has copies.

    Rows are distinct texts (or near-duplicate groups); `copies` (n_rows,) says how many documents
    each stands for. Without it every row counts once.
    """
    if copies is None:
        return np.bincount(counts.indices, minlength=counts.shape[1])
    row_weights = np.repeat(np.asarray(copies, dtype=np.float64), np.diff(counts.indptr))
    return np.bincount(counts.indices, weights=row_weights, minlength=counts.shape[1])


def tfidf_rows(counts: sp.csr_matrix, idf: np.ndarray) -> sp.csr_matrix:
    """L2-normalized sublinear TF-IDF rows, as `tfidf_weights`, with a given
    idf = ln((1 + n) / (1 + df)) + 1 (for blocks of rows of a larger collection)."""
    weighted = sp.csr_matrix(counts, dtype=np.float64, copy=True)
    weighted.data = (1.0 + np.log(weighted.data)) * idf[weighted.indices]
    return sp.csr_matrix(normalize(weighted))


def with_phrases(terms: list[str]) -> list[str]:
    """Terms followed by the two-word phrases of adjacent kept terms."""
    return terms + [f"{a} {b}" for a, b in zip(terms, terms[1:], strict=False)]


MAX_PHRASES = 50_000  # two-word phrases kept at most, the most widespread first


def count_terms(
    texts: Iterable[str], analyzer: Analyzer, min_df: float = 1, copies: np.ndarray | None = None
) -> tuple[sp.csr_matrix, list[str], sp.csr_matrix, np.ndarray]:
    """Word counts and adjacent-word-pair counts of every text, with integer ids instead of strings.

    Returns the word count matrix (texts x words), the words, the pair count matrix (texts x pairs) and
    the pairs as (first word id, second word id) rows. Pairs are counted as 64-bit codes in numpy, which
    keeps a large collection's millions of distinct pairs out of Python dictionaries. Pairs with a word in
    fewer than `min_df` documents are left out: a pair is never in more documents than either of its
    words. Documents are counted with `copies` (documents per text; default one), as `document_frequency`.
    """
    vocabulary: defaultdict[str, int] = defaultdict(itertools.count().__next__)
    ids = array("i")
    indptr = array("q", [0])
    id_of = vocabulary.__getitem__
    for text in texts:
        ids.extend(map(id_of, analyzer.terms(text)))
        indptr.append(len(ids))
    n_texts, n_words = len(indptr) - 1, max(len(vocabulary), 1)
    word_ids = np.frombuffer(ids, dtype=np.int32) if len(ids) else np.zeros(0, dtype=np.int32)
    bounds = np.frombuffer(indptr, dtype=np.int64)
    # the matrix gets its own copy of the ids: sum_duplicates sorts them in place, and the pairs need text order
    words = sp.csr_matrix((np.ones(word_ids.size, dtype=np.int32), word_ids.copy(), bounds.copy()),
                          shape=(n_texts, n_words))
    words.sum_duplicates()
    # pairs of adjacent kept words inside one text, already in text order: build the CSR matrix directly
    lengths = np.diff(bounds)
    starts_of_text = np.zeros(word_ids.size, dtype=bool)
    starts_of_text[bounds[1:-1][lengths[1:] > 0]] = True  # first word of every text but the first
    weight = np.ones(n_texts) if copies is None else np.asarray(copies, dtype=np.float64)
    frequent = document_frequency(words, weight) >= min_df
    inside = ~starts_of_text[1:] & frequent[word_ids[:-1]] & frequent[word_ids[1:]]
    codes = word_ids[:-1][inside].astype(np.int64) * n_words + word_ids[1:][inside]
    text_of_pair = np.repeat(np.arange(n_texts, dtype=np.int32), lengths)[:-1][inside]
    del inside, starts_of_text, frequent, word_ids, ids
    # distinct pairs, and each pair's number of texts: keep only those that can pass min_df
    pair_codes, pair_ids = np.unique(codes, return_inverse=True)
    del codes
    pair_ids = pair_ids.astype(np.int32)
    first_in_text = np.ones(pair_ids.size, dtype=bool)
    if pair_ids.size > 1:  # a pair counts once per text: compare with the previous occurrence in the same text
        order = np.lexsort((pair_ids, text_of_pair))
        same = (text_of_pair[order][1:] == text_of_pair[order][:-1]) & (pair_ids[order][1:] == pair_ids[order][:-1])
        first_in_text[order[1:][same]] = False
        del order, same
    pair_df = np.bincount(pair_ids[first_in_text], weights=weight[text_of_pair[first_in_text]],
                          minlength=pair_codes.size)
    del first_in_text
    wanted = pair_df >= min_df
    keep = wanted[pair_ids]
    renumber = np.cumsum(wanted) - 1
    pair_codes = pair_codes[wanted]
    pair_ids = renumber[pair_ids[keep]].astype(np.int32)
    text_of_pair = text_of_pair[keep]
    del keep, renumber, wanted, pair_df
    pair_indptr = np.concatenate([[0], np.cumsum(np.bincount(text_of_pair, minlength=n_texts))])
    del text_of_pair
    pairs = sp.csr_matrix((np.ones(pair_ids.size, dtype=np.int32), pair_ids, pair_indptr),
                          shape=(n_texts, pair_codes.size))
    del pair_ids
    pairs.sum_duplicates()
    terms = [""] * len(vocabulary)
    for term, i in vocabulary.items():
        terms[i] = term
    return words, terms, pairs, np.column_stack([pair_codes // n_words, pair_codes % n_words])


def vectorize(
    texts: Sequence[str],
    analyzer: Analyzer,
    settings: VectorSettings,
    progress: Callable[[str], None] | None = None,
    track: Callable[[Iterable[str]], Iterable[str]] | None = None,
    copies: np.ndarray | None = None,
) -> Vectorized:
    """Count terms and phrases, weight with sublinear TF-IDF and reduce with LSA.

    `texts` are the distinct texts to cluster; `copies` (n_texts,) says how many documents each one
    stands for (exact copies, near-duplicate group members; default one). Every figure that counts
    documents counts them all: min_df, max_df and the idf are those of the full list of documents,
    as scikit-learn's TfidfVectorizer(sublinear_tf=True) would compute them on it (docs/method.md,
    "Counting copies").
    """
    n = len(texts)
    weight = np.ones(n) if copies is None else np.asarray(copies, dtype=np.float64)
    if weight.shape != (n,) or np.any(weight < 1):
        raise ValueError(f"copies must hold one count of at least 1 per text ({n}), got shape {weight.shape}")
    n_documents = float(weight.sum())
    min_df = settings.min_df if settings.min_df is not None else default_min_df(int(n_documents))
    max_df: float | int = settings.max_df if n_documents * settings.max_df >= min_df else 1.0
    words, word_terms, pairs, pair_words = count_terms(track(texts) if track else texts, analyzer, min_df, weight)
    df_words, df_pairs = document_frequency(words, weight), document_frequency(pairs, weight)
    ceiling = max_df * n_documents
    keep_words = np.flatnonzero((df_words >= min_df) & (df_words <= ceiling))
    keep_pairs = np.flatnonzero((df_pairs >= min_df) & (df_pairs <= ceiling))
    phrases_within_df = int(keep_pairs.size)
    if keep_pairs.size > MAX_PHRASES:
        keep_pairs = np.sort(keep_pairs[np.lexsort((keep_pairs, -df_pairs[keep_pairs]))][:MAX_PHRASES])
    if keep_words.size == 0:
        raise PilewiseError(
            f"no terms are left after removing stop words and terms in fewer than {min_df} documents "
            f"or more than {max_df:g} of them; lower --min-df or raise --max-df"
        )
    phrase_terms = [f"{word_terms[a]} {word_terms[b]}" for a, b in pair_words[keep_pairs]]
    all_terms = [word_terms[i] for i in keep_words] + phrase_terms
    order = np.argsort(np.array(all_terms, dtype=object), kind="stable")  # alphabetical, as before
    counts = sp.hstack([words[:, keep_words], pairs[:, keep_pairs]], format="csr")[:, order]
    counts = sp.csr_matrix(counts, dtype=np.int32)
    terms = tuple(all_terms[i] for i in order)
    is_phrase = np.fromiter((" " in t for t in terms), dtype=bool, count=len(terms))
    if progress:
        progress(f"{len(terms):,} terms kept ({int(is_phrase.sum()):,} two-word phrases)")
    space_columns = np.arange(len(terms)) if settings.bigrams_in_space else np.flatnonzero(~is_phrase)
    if space_columns.size == 0:
        raise PilewiseError("no single words are left to cluster on; lower --min-df or raise --max-df")
    df_space = np.concatenate([df_words[keep_words], df_pairs[keep_pairs]])[order][space_columns]
    tfidf = tfidf_rows(counts[:, space_columns], smooth_idf(df_space, n_documents))
    empty_rows = int(np.sum(tfidf.getnnz(axis=1) == 0))
    facts: dict[str, float | int | str | bool] = {
        "min_df": min_df,
        "max_df": float(max_df),
        "terms": len(terms),
        "phrases": int(is_phrase.sum()),
        "phrases_within_df": phrases_within_df,
        "space_terms": int(space_columns.size),
        "texts_without_terms": empty_rows,
        "bigrams_in_space": settings.bigrams_in_space,
    }
    # a tenth of the data's smaller side, at least 10: small collections cluster better in fewer dimensions
    # (measured in docs/vectorizing.md); collections of 1,000+ texts and terms keep the full setting
    components = min(settings.lsa_components, max(10, min(n, tfidf.shape[1]) // 10), tfidf.shape[1] - 1, n - 1)
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
