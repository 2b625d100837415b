"""Cluster-quality figures against scikit-learn, hand examples and the published reading bands."""

from __future__ import annotations

import tracemalloc
from pathlib import Path

import numpy as np
import pytest
import scipy.sparse as sp
from sklearn.metrics import calinski_harabasz_score, davies_bouldin_score, silhouette_score

from pilewise.clustering import quality
from pilewise.clustering.quality import assess, calinski_harabasz_davies_bouldin


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


def _blobs(seed: int, n: int, dims: int, k: int) -> tuple[np.ndarray, np.ndarray]:
    """Seeded Gaussian blobs around k random centres, offset from the origin, with random labels."""
    rng = np.random.default_rng(seed)
    labels = rng.integers(0, k, size=n)
    centres = rng.normal(scale=3.0, size=(k, dims)) + 5.0
    return centres[labels] + rng.normal(size=(n, dims)), labels


def _sklearn_scores(space: np.ndarray, labels: np.ndarray) -> tuple[float, float]:
    return calinski_harabasz_score(space, labels), davies_bouldin_score(space, labels)


@pytest.mark.parametrize(
    ("seed", "n", "dims", "k", "block_rows"),
    [(0, 500, 7, 4, None), (1, 500, 7, 4, 7), (2, 1_001, 30, 9, 64), (3, 60, 2, 3, 1), (4, 3_000, 5, 20, 999)],
)
def test_chunked_scores_agree_with_scikit_learn(seed: int, n: int, dims: int, k: int, block_rows: int | None) -> None:
    space, labels = _blobs(seed, n, dims, k)
    ch, db = calinski_harabasz_davies_bouldin(space, labels, block_rows=block_rows)
    # reference library: scikit-learn (calinski_harabasz_score, davies_bouldin_score on the same float64 data)
    expected_ch, expected_db = _sklearn_scores(space, labels)
    assert ch == pytest.approx(expected_ch, rel=1e-9)
    assert db == pytest.approx(expected_db, rel=1e-9)


def test_assess_reads_the_space_in_blocks_of_the_module_budget(monkeypatch: pytest.MonkeyPatch) -> None:
    # a 1 KB budget gives blocks of 1024 // (8 * 6) = 21 rows: assess must take the chunked path all the way
    monkeypatch.setattr(quality, "BLOCK_BYTES", 1024)
    space, labels = _blobs(5, 700, 6, 5)
    scores = assess(space, labels, k=5, seed=0)
    # reference library: scikit-learn
    expected_ch, expected_db = _sklearn_scores(space, labels)
    assert scores.calinski_harabasz == pytest.approx(expected_ch, rel=1e-9)
    assert scores.davies_bouldin == pytest.approx(expected_db, rel=1e-9)


@pytest.mark.parametrize("block_rows", [None, 13])
def test_chunked_scores_of_float32_input_agree_with_scikit_learn(block_rows: int | None) -> None:
    space, labels = _blobs(6, 2_000, 12, 6)
    space32 = space.astype(np.float32)
    ch, db = calinski_harabasz_davies_bouldin(space32, labels, block_rows=block_rows)
    # reference library: scikit-learn, which keeps float32 input in float32 (we accumulate in float64)
    expected_ch, expected_db = _sklearn_scores(space32, labels)
    assert ch == pytest.approx(expected_ch, rel=1e-5)
    assert db == pytest.approx(expected_db, rel=1e-5)


def test_chunked_scores_of_a_memory_mapped_space(tmp_path: Path) -> None:
    space, labels = _blobs(7, 1_500, 8, 4)
    mapped = np.memmap(tmp_path / "space.f32", dtype=np.float32, mode="w+", shape=space.shape)
    mapped[:] = space
    ch, db = calinski_harabasz_davies_bouldin(mapped, labels, block_rows=100)
    # reference library: scikit-learn
    expected_ch, expected_db = _sklearn_scores(np.asarray(mapped, dtype=np.float64), labels)
    assert ch == pytest.approx(expected_ch, rel=1e-9)
    assert db == pytest.approx(expected_db, rel=1e-9)


@pytest.mark.parametrize(("seed", "block_rows"), [(0, None), (1, 17), (2, 1)])
def test_chunked_scores_of_sparse_input_agree_with_scikit_learn(seed: int, block_rows: int | None) -> None:
    rng = np.random.default_rng(seed)
    space = sp.random(400, 60, density=0.08, format="csr", random_state=seed)
    labels = rng.integers(0, 5, size=400)
    ch, db = calinski_harabasz_davies_bouldin(space, labels, block_rows=block_rows)
    # reference library: scikit-learn, which takes dense input only
    expected_ch, expected_db = _sklearn_scores(space.toarray(), labels)
    assert ch == pytest.approx(expected_ch, rel=1e-9)
    assert db == pytest.approx(expected_db, rel=1e-9)
    scores = assess(space, labels, k=5, seed=0)
    assert scores.calinski_harabasz == pytest.approx(expected_ch, rel=1e-9)
    assert scores.davies_bouldin == pytest.approx(expected_db, rel=1e-9)


@pytest.mark.parametrize("sparse", [False, True])
def test_absent_cluster_ids_are_left_out_as_scikit_learn_does(sparse: bool) -> None:
    space, labels = _blobs(8, 600, 4, 6)
    labels[labels == 2] = 0
    labels[labels == 5] = 1  # ids 0..5 with 2 (inside) and 5 (the last) carried by no row
    scores = assess(sp.csr_matrix(space) if sparse else space, labels, k=6, seed=0)
    # reference library: scikit-learn, which relabels the ids present to 0..3
    expected_ch, expected_db = _sklearn_scores(space, labels)
    assert scores.calinski_harabasz == pytest.approx(expected_ch, rel=1e-9)
    assert scores.davies_bouldin == pytest.approx(expected_db, rel=1e-9)


@pytest.mark.parametrize(
    ("space", "labels"),
    [([[0.0], [0.0], [1.0], [1.0]], [0, 0, 1, 1]),  # no spread inside the clusters
     ([[-1.0], [1.0], [-2.0], [2.0], [5.0]], [0, 0, 1, 1, 2])],  # clusters 0 and 1 share a centroid
)
def test_degenerate_clusterings_follow_scikit_learn(space: list[list[float]], labels: list[int]) -> None:
    x, y = np.array(space), np.array(labels)
    ch, db = calinski_harabasz_davies_bouldin(x, y, block_rows=2)
    # reference library: scikit-learn (CH 1.0 without spread; DB 0.0 without spread; coincident centroids
    # are infinitely far apart for DB)
    expected_ch, expected_db = _sklearn_scores(x, y)
    assert ch == pytest.approx(expected_ch, rel=1e-9)
    assert db == pytest.approx(expected_db, rel=1e-9)


def test_scoring_a_large_space_allocates_a_small_fraction_of_it() -> None:
    rng = np.random.default_rng(9)
    space = rng.standard_normal((200_000, 50), dtype=np.float32)  # 38.1 MiB
    labels = rng.integers(0, 20, size=200_000)
    tracemalloc.start()
    try:
        calinski_harabasz_davies_bouldin(space, labels)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    # measured 4.19 MiB (11% of the array): one float64 block of BLOCK_BYTES = 4 MiB at a time (scikit-learn's
    # calinski_harabasz_score peaked at 85.8 MiB, 225%). The threshold leaves over twice the measured peak.
    assert peak < 0.25 * space.nbytes


def test_silhouette_is_sampled_with_a_fixed_seed_on_large_collections() -> None:
    rng = np.random.default_rng(0)
    space = rng.normal(size=(12_000, 3))
    labels = (space[:, 0] > 0).astype(int)
    first = assess(space, labels, k=2, seed=5)
    again = assess(space, labels, k=2, seed=5)
    assert first.silhouette_sample == 5_000  # SILHOUETTE_SAMPLE
    assert first.silhouette == again.silhouette


def test_silhouette_is_undefined_when_every_point_is_its_own_cluster() -> None:
    # scikit-learn docs: silhouette is defined for 2 <= number of labels <= n - 1.
    scores = assess(np.eye(3), np.array([0, 1, 2]), k=3, seed=0)
    assert scores.silhouette is None and scores.silhouette_reading == "not defined"


def test_silhouettes_of_a_small_space_keep_scikit_learns_one_chunk_result() -> None:
    """Reference library: scikit-learn's silhouette_score in one chunk (its default 1 GB working memory) sets
    every row's distance to itself to 0. Split into chunks, a row without terms (all zeros) is at cosine
    distance 1 from itself, so its silhouette moves; up to ONE_CHUNK_MB of distances assess stays in one chunk
    (1,500 rows here; 16 MB chunks would split them in two, as they once moved three of the demo's)."""
    rng = np.random.default_rng(3)
    space = rng.normal(size=(1_500, 40))
    space[::100] = 0.0  # 15 texts without terms
    labels = rng.integers(0, 4, 1_500)
    scores = assess(space, labels, k=4, seed=0)
    assert quality.distance_chunk_mb(1_500) == quality.ONE_CHUNK_MB
    assert scores.silhouette == pytest.approx(silhouette_score(space, labels, metric="cosine"), abs=1e-12)
    assert quality.distance_chunk_mb(5_000) == quality.DISTANCE_CHUNK_MB  # 200 MB of distances: chunked
