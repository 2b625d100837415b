"""Placing new texts in a saved run's space: the run's vocabulary, idf and LSA directions (no refit), the
nearest centroid by cosine distance, and how well each text fits (docs/method.md, "Assigning new documents").
"""

from __future__ import annotations

import itertools
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from sklearn.preprocessing import normalize

from pilewise.assign.saved import QUANTILES, SavedModel
from pilewise.vectors.text import joined_to_previous
from pilewise.vectors.tfidf import PAIR_BLOCK_TEXTS, chunk_words, tfidf_rows

GOOD_QUANTILE = 0.9  # good: no farther from its cluster's centroid than 90% of that cluster's own members
WEAK_QUANTILE = 0.99  # none: farther from every centroid than 99% of that cluster's own members
NONE_SHARE_WARNING = 0.10  # a larger share of `none` is said plainly
NONE_WARNING = ("{share:.0%} of these documents fit no cluster of run {run}: they may hold a theme the run does "
                "not know; consider a new run that includes them")
FITS = ("good", "weak", "none")


@dataclass(frozen=True)
class Placement:
    """Where each new text goes.

    Attributes
    ----------
    clusters : ndarray of int, shape (n_texts,)
        Nearest cluster; -1 for a text holding no term of the run's vocabulary.
    distances : ndarray of float, shape (n_texts,)
        Cosine distance to that cluster's centroid; NaN for a text without a known term.
    fit : tuple of str
        "good", "weak" or "none" per text (`fit_of`).
    """

    clusters: np.ndarray
    distances: np.ndarray
    fit: tuple[str, ...]

    def none_share(self) -> float:
        """Share of the texts that fit no cluster."""
        return sum(f == "none" for f in self.fit) / max(1, len(self.fit))


def known_counts(texts: Sequence[str], model: SavedModel) -> sp.csr_matrix:
    """Counts of the run's terms in `texts` (n_texts, n_terms), tokenized by the run's one core (`chunk_words`).

    A word is a term as the run normalized it; a phrase is two terms that stood side by side
    (`joined_to_previous`), as the run counted them. Terms the run did not keep are left out.
    """
    parts = []
    iterator = iter(texts)
    while chunk := list(itertools.islice(iterator, PAIR_BLOCK_TEXTS)):
        parts.append(_chunk_counts(chunk, model))
    if not parts:
        return sp.csr_matrix((0, len(model.vocabulary)), dtype=np.int32)
    return sp.csr_matrix(sp.vstack(parts, format="csr"))


def _chunk_counts(chunk: list[str], model: SavedModel) -> sp.csr_matrix:
    words, ids, lengths = chunk_words(chunk, model.analyzer)
    terms = [model.analyzer.normalize(w) for w in words]
    column_of_word = np.fromiter((model.vocabulary.get(t, -1) if t is not None else -1 for t in terms),
                                 dtype=np.int64, count=len(terms))
    row = np.repeat(np.arange(len(chunk)), lengths)
    columns = column_of_word[ids] if ids.size else np.zeros(0, dtype=np.int64)
    rows_out, columns_out = [row[columns >= 0]], [columns[columns >= 0]]
    if model.phrases and ids.size:
        kept = np.fromiter((t is not None for t in terms), dtype=bool, count=len(terms))[ids]
        kept_at = np.flatnonzero(kept)
        joined = joined_to_previous(kept)  # the run's phrase rule, per kept item
        second = kept_at[1:][joined[1:] & (row[kept_at[1:]] == row[kept_at[:-1]])]  # ... within one text
        phrase_columns = np.fromiter(
            (model.vocabulary.get(f"{terms[ids[j - 1]]} {terms[ids[j]]}", -1) for j in second),
            dtype=np.int64, count=second.size)
        rows_out.append(row[second][phrase_columns >= 0])
        columns_out.append(phrase_columns[phrase_columns >= 0])
    r, c = np.concatenate(rows_out), np.concatenate(columns_out)
    counts = sp.csr_matrix((np.ones(r.size, dtype=np.int32), (r, c)), shape=(len(chunk), len(model.vocabulary)))
    counts.sum_duplicates()
    return counts


def project(texts: Sequence[str], model: SavedModel) -> tuple[np.ndarray | sp.csr_matrix, np.ndarray]:
    """The texts' rows in the run's space (L2-normalized), and whether each holds a known term.

    Sublinear TF-IDF with the run's idf, then the run's LSA directions (TruncatedSVD.transform: the rows
    times the components), then L2 normalization, as the run projected its own rows.
    """
    counts = known_counts(texts, model)
    known = np.diff(counts.indptr) > 0
    weighted = tfidf_rows(counts, model.idf)
    if model.lsa is None:
        return weighted, known
    return normalize(np.asarray(weighted @ model.lsa.T)), known


def place(texts: Sequence[str], model: SavedModel) -> Placement:
    """Nearest centroid of every text, its cosine distance, and its fit (`fit_of`)."""
    rows, known = project(texts, model)
    similarity = np.asarray(rows @ model.centroids.T) if len(texts) else np.zeros((0, model.centroids.shape[0]))
    distances = np.clip(1.0 - similarity, 0.0, 2.0)
    nearest = distances.argmin(axis=1) if len(texts) else np.zeros(0, dtype=np.int64)
    own = distances[np.arange(len(texts)), nearest]
    fit = fit_of(distances, nearest, model.distance_quantiles)
    return Placement(
        clusters=np.where(known, nearest, -1),
        distances=np.where(known, own, np.nan),
        fit=tuple(f if k else "none" for f, k in zip(fit, known, strict=True)),
    )


def fit_of(distances: np.ndarray, nearest: np.ndarray, quantiles: np.ndarray) -> tuple[str, ...]:
    """The fit rule: `good` when no farther from the nearest centroid than GOOD_QUANTILE of that cluster's own
    members; `none` when farther from every centroid than WEAK_QUANTILE of each cluster's own members;
    `weak` in between. `distances` (n, k) to every centroid; `quantiles` (k, len(QUANTILES)) of the run."""
    good_limit = quantiles[:, QUANTILES.index(GOOD_QUANTILE)]
    weak_limit = quantiles[:, QUANTILES.index(WEAK_QUANTILE)]
    own = distances[np.arange(nearest.size), nearest]
    good = own <= good_limit[nearest]
    within_some: np.ndarray = np.asarray((distances <= weak_limit[None, :]).any(axis=1))
    return tuple("good" if g else "weak" if w else "none" for g, w in zip(good, within_some, strict=True))
