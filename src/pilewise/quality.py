"""Collection-level quality of a clustering: silhouette, Calinski-Harabasz, Davies-Bouldin."""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from sklearn import config_context
from sklearn.metrics import calinski_harabasz_score, davies_bouldin_score, silhouette_samples

from pilewise.model import QualityScores

SILHOUETTE_SAMPLE = 10_000


def silhouette_reading(value: float | None) -> str:
    """Kaufman & Rousseeuw (1990) bands for the average silhouette width (attribution from memory)."""
    if value is None:
        return "not defined"
    if value > 0.70:
        return "strong structure"
    if value > 0.50:
        return "reasonable structure"
    if value > 0.25:
        return "weak structure, could be artificial"
    return "no substantial structure"


def assess(space: np.ndarray | sp.csr_matrix, labels: np.ndarray, *, k: int, seed: int) -> QualityScores:
    """Silhouette (cosine; a seeded sample above SILHOUETTE_SAMPLE texts), CH and DB (Euclidean).

    Scores are over the distinct texts. Silhouette is defined for 2 <= clusters <= n - 1.
    """
    n = labels.shape[0]
    present = np.unique(labels).size
    if present < 2 or present > n - 1:
        return QualityScores(None, 0, None, None, silhouette_reading(None))
    rows = np.arange(n)
    if n > SILHOUETTE_SAMPLE:
        rows = np.sort(np.random.default_rng(seed).choice(n, SILHOUETTE_SAMPLE, replace=False))
    sample_labels = labels[rows]
    per_cluster: list[float] = []
    silhouette: float | None = None
    if np.unique(sample_labels).size >= 2:
        # scikit-learn computes distances in chunks of `working_memory` MB (1 GB by default); 64 MB keeps the
        # run's peak memory near its data at the same speed
        with config_context(working_memory=64):
            widths = silhouette_samples(space[rows], sample_labels, metric="cosine")
        silhouette = float(widths.mean())
        per_cluster = [float(widths[sample_labels == c].mean()) if np.any(sample_labels == c) else float("nan")
                       for c in range(k)]
    dense: np.ndarray | None = None
    if not sp.issparse(space):
        dense = np.asarray(space)
    elif space.shape[0] * space.shape[1] <= 50_000_000:
        dense = sp.csr_matrix(space).toarray()
    ch = db = None
    if dense is not None:
        ch = float(calinski_harabasz_score(dense, labels))
        db = float(davies_bouldin_score(dense, labels))
    return QualityScores(
        silhouette=silhouette,
        silhouette_sample=int(rows.size),
        calinski_harabasz=ch,
        davies_bouldin=db,
        silhouette_reading=silhouette_reading(silhouette),
        per_cluster_silhouette=tuple(per_cluster),
    )
