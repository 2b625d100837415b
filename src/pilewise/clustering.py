"""Clustering stage: seeded k-means over the clustering space, and distances to the centroids."""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from sklearn.cluster import KMeans
from sklearn.exceptions import ConvergenceWarning
from sklearn.preprocessing import normalize

from pilewise.errors import PilewiseError


@dataclass(frozen=True)
class Clustering:
    """k-means result over the distinct texts.

    Attributes
    ----------
    labels : ndarray of int, shape (n_texts,)
        Cluster of each distinct text, numbered by size (0 = largest).
    centroids : ndarray, shape (k, n_dims)
        Unit-length centroid directions.
    distances : ndarray, shape (n_texts,)
        Cosine distance of each text to its own cluster's centroid.
    """

    labels: np.ndarray
    centroids: np.ndarray
    distances: np.ndarray
    inertia: float


def kmeans_clusters(
    space: np.ndarray | sp.csr_matrix,
    weights: np.ndarray,
    *,
    k: int,
    seed: int,
    n_init: int,
    init: np.ndarray | None = None,
) -> Clustering:
    """Seeded k-means (k-means++ starts, or the given `init` centroids) with duplicate counts as weights."""
    model = KMeans(n_clusters=k, n_init=1 if init is not None else n_init, random_state=seed,
                   init=init if init is not None else "k-means++")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)  # checked just below, with a message that helps
        raw_labels = model.fit_predict(space, sample_weight=weights)
    found = int(np.unique(raw_labels).size)
    if found < k:
        raise PilewiseError(
            f"k={k} is more than the {found} groups of texts that differ in their counted words; "
            f"pass a smaller --k (at most {found})"
        )
    return clustering_from_labels(space, weights, raw_labels, k=k, inertia=float(model.inertia_))


def clustering_from_labels(
    space: np.ndarray | sp.csr_matrix, weights: np.ndarray, raw_labels: np.ndarray, *, k: int, inertia: float = 0.0
) -> Clustering:
    """Number clusters by weighted size (largest first, ties by label) and compute centroids and distances."""
    sizes = np.bincount(raw_labels, weights=weights, minlength=k)
    order = sorted(range(k), key=lambda c: (-sizes[c], c))
    remap = np.empty(k, dtype=int)
    remap[order] = np.arange(k)
    labels = remap[raw_labels]
    centroids = weighted_centroids(space, weights, labels, k)
    similarity = cosine_rowwise(space, centroids[labels])
    distances = np.clip(1.0 - similarity, 0.0, 2.0)
    return Clustering(labels=labels, centroids=centroids, distances=distances, inertia=inertia)


def weighted_centroids(
    space: np.ndarray | sp.csr_matrix, weights: np.ndarray, labels: np.ndarray, k: int
) -> np.ndarray:
    """Unit-length weighted mean direction of each cluster's rows, shape (k, n_dims)."""
    indicator = sp.csr_matrix((weights, (labels, np.arange(labels.size))), shape=(k, labels.size))
    sums = indicator @ space
    sums = sums.toarray() if sp.issparse(sums) else np.asarray(sums)
    return normalize(sums)


def farthest_row(space: np.ndarray | sp.csr_matrix, clustering: Clustering, weights: np.ndarray) -> int:
    """The row with the largest weighted distance to its centroid: a new centre when growing k by one."""
    return int(np.argmax(clustering.distances * weights))


def cosine_rowwise(space: np.ndarray | sp.csr_matrix, other: np.ndarray) -> np.ndarray:
    """Cosine similarity of each row of `space` with the same row of `other`."""
    space = normalize(space)
    other = normalize(other)
    if sp.issparse(space):
        return np.asarray(space.multiply(other).sum(axis=1)).ravel()
    return np.einsum("ij,ij->i", np.asarray(space), other)
