"""Cluster-quality figures against scikit-learn, hand examples and the published reading bands."""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.metrics import calinski_harabasz_score, davies_bouldin_score, silhouette_score

from pilewise.quality import assess, silhouette_reading


def test_davies_bouldin_matches_scikit_learn_documentation_example() -> None:
    # scikit-learn documentation of davies_bouldin_score: X=[[0,1],[1,1],[3,4]], labels [0,0,1] -> 0.128037.
    scores = assess(np.array([[0.0, 1.0], [1.0, 1.0], [3.0, 4.0]]), np.array([0, 0, 1]), k=2, seed=0)
    assert scores.davies_bouldin == pytest.approx(0.128037, abs=1e-6)


def test_calinski_harabasz_and_davies_bouldin_of_the_hand_example() -> None:
    # Derived by hand in shared/CHECKS.md: X=[0,1,5,6], labels [0,0,1,1] -> CH 50, DB 0.2.
    scores = assess(np.array([[0.0], [1.0], [5.0], [6.0]]), np.array([0, 0, 1, 1]), k=2, seed=0)
    assert scores.calinski_harabasz == pytest.approx(50.0)
    assert scores.davies_bouldin == pytest.approx(0.2)


def test_figures_agree_with_scikit_learn_on_random_data() -> None:
    rng = np.random.default_rng(3)
    space = rng.normal(size=(300, 5)) + np.repeat(np.eye(5)[:3] * 4, 100, axis=0)
    labels = np.repeat([0, 1, 2], 100)
    scores = assess(space, labels, k=3, seed=0)
    assert scores.silhouette == pytest.approx(silhouette_score(space, labels, metric="cosine"))
    assert scores.calinski_harabasz == pytest.approx(calinski_harabasz_score(space, labels))
    assert scores.davies_bouldin == pytest.approx(davies_bouldin_score(space, labels))
    assert scores.silhouette_sample == 300


def test_silhouette_is_sampled_with_a_fixed_seed_on_large_collections() -> None:
    rng = np.random.default_rng(0)
    space = rng.normal(size=(12_000, 3))
    labels = (space[:, 0] > 0).astype(int)
    first = assess(space, labels, k=2, seed=5)
    again = assess(space, labels, k=2, seed=5)
    assert first.silhouette_sample == 10_000
    assert first.silhouette == again.silhouette


def test_silhouette_is_undefined_when_every_point_is_its_own_cluster() -> None:
    # scikit-learn docs: silhouette is defined for 2 <= number of labels <= n - 1.
    scores = assess(np.eye(3), np.array([0, 1, 2]), k=3, seed=0)
    assert scores.silhouette is None and scores.silhouette_reading == "not defined"


@pytest.mark.parametrize(
    ("value", "reading"),
    [(0.71, "strong structure"), (0.70, "reasonable structure"), (0.51, "reasonable structure"),
     (0.50, "weak structure, could be artificial"), (0.26, "weak structure, could be artificial"),
     (0.25, "no substantial structure"), (-0.3, "no substantial structure")],
)
def test_silhouette_bands(value: float, reading: str) -> None:
    # Kaufman & Rousseeuw (1990): > 0.70 strong, 0.51-0.70 reasonable, 0.26-0.50 weak, <= 0.25 none
    # (attribution from memory, as listed in shared/CHECKS.md).
    assert silhouette_reading(value) == reading
