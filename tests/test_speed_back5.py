"""The faster back half, fifth pass (issue 15): k-means starts on two processes, term tables over the held
terms, the levels' exemplars by leaf.

No test here times anything; each checks that the faster path gives what the plain one gives (scikit-learn's
own KMeans, or a copy of the replaced code, is the reference).
"""

from __future__ import annotations

import os

import numpy as np
import pytest
import scipy.sparse as sp
from sklearn.cluster import KMeans
from sklearn.preprocessing import normalize
from threadpoolctl import threadpool_limits

from pilewise.clustering import kmeans
from pilewise.clustering.levels import build_levels, centroid_tree
from pilewise.describe.rules import _ranked_columns
from pilewise.describe.stats import best_first, chi_square_2x2
from pilewise.describe.summaries import _chi2_terms

pytestmark = pytest.mark.skipif("fork" not in __import__("multiprocessing").get_all_start_methods(),
                                reason="the split starts need the fork start method")


def _blobs(n: int, dims: int, centres: int, seed: int) -> tuple[np.ndarray, np.ndarray]:
    """Rows around `centres` random unit directions, unit length, with whole-number weights (copies)."""
    rng = np.random.default_rng(seed)
    middle = normalize(rng.normal(size=(centres, dims)))
    rows = normalize(middle[rng.integers(0, centres, size=n)] + 0.6 * rng.normal(size=(n, dims)))
    return rows, rng.integers(1, 4, size=n).astype(float)


def _reference(space: np.ndarray | sp.csr_matrix, weights: np.ndarray, k: int, seed: int,
               n_init: int) -> KMeans:
    """KMeans on one OpenMP thread, as the split starts run (with more, its sums' order varies by thread)."""
    model = KMeans(n_clusters=k, n_init=n_init, random_state=seed)
    with threadpool_limits(limits=1, user_api="openmp"):
        model.fit(space, sample_weight=weights)
    return model


@pytest.mark.parametrize(("k", "n_init", "seed"), [(6, 4, 0), (9, 3, 7), (4, 10, 3), (12, 2, 11)])
def test_split_starts_equal_scikit_learn(k: int, n_init: int, seed: int) -> None:
    # reference: scikit-learn's KMeans with n_init starts in one process (the code path replaced)
    space, weights = _blobs(1_200, 12, k + 2, seed)
    model = _reference(space, weights, k, seed, n_init)
    labels, inertia = kmeans.split_starts(space, weights, k=k, seed=seed, n_init=n_init)
    assert np.array_equal(labels, model.labels_)
    assert inertia == model.inertia_


def test_split_starts_sparse_and_float32() -> None:
    # sparse rows (--lsa-components 0) are not centred by KMeans; float32 rows stay float32 (scikit-learn)
    space, weights = _blobs(900, 30, 5, 2)
    space[np.abs(space) < 0.15] = 0.0
    for rows in (sp.csr_matrix(space), space.astype(np.float32)):
        model = _reference(rows, weights, 5, 4, 4)
        labels, inertia = kmeans.split_starts(rows, weights, k=5, seed=4, n_init=4)
        assert np.array_equal(labels, model.labels_) and inertia == model.inertia_


def test_kmeans_clusters_same_with_two_workers(monkeypatch: pytest.MonkeyPatch) -> None:
    space, weights = _blobs(1_500, 10, 7, 5)
    called: list[int] = []
    split = kmeans.split_starts
    monkeypatch.setattr(kmeans, "SPLIT_STARTS_MIN", 100)
    monkeypatch.setattr(kmeans, "split_starts", lambda *a, **kw: called.append(1) or split(*a, **kw))
    with threadpool_limits(limits=1, user_api="openmp"):  # the split runs only on one OpenMP thread
        one = kmeans.kmeans_clusters(space, weights, k=7, seed=5, n_init=4, workers=1)
        two = kmeans.kmeans_clusters(space, weights, k=7, seed=5, n_init=4, workers=2)
    assert called  # the split path ran
    assert np.array_equal(one.labels, two.labels) and np.array_equal(one.centroids, two.centroids)
    assert one.inertia == two.inertia


def _die(*_: object) -> None:
    os._exit(1)


def test_dead_worker_leaves_its_starts_here(monkeypatch: pytest.MonkeyPatch) -> None:
    space, weights = _blobs(800, 8, 6, 9)
    model = _reference(space, weights, 6, 9, 4)
    monkeypatch.setattr(kmeans, "_handed_run", _die)  # the forked process exits without an answer
    labels, inertia = kmeans.split_starts(space, weights, k=6, seed=9, n_init=4)
    assert np.array_equal(labels, model.labels_) and inertia == model.inertia_


def test_no_process_started_runs_every_start_here(monkeypatch: pytest.MonkeyPatch) -> None:
    space, weights = _blobs(700, 8, 5, 6)
    model = _reference(space, weights, 5, 6, 4)

    def refuse(*_: object, **__: object) -> None:
        raise OSError("Resource temporarily unavailable")  # what fork() raises at a process limit (EAGAIN)

    monkeypatch.setattr(kmeans.ProcessPoolExecutor, "submit", refuse)
    labels, inertia = kmeans.split_starts(space, weights, k=5, seed=6, n_init=4)
    assert np.array_equal(labels, model.labels_) and inertia == model.inertia_


def test_wrong_predicted_states_fall_back_to_one_process(monkeypatch: pytest.MonkeyPatch) -> None:
    # every start handed the generator of start 0: the checks fail and the starts run again in order
    space, weights = _blobs(800, 8, 6, 1)
    model = _reference(space, weights, 6, 1, 4)
    monkeypatch.setattr(kmeans, "start_states", lambda k, seed, count: [np.random.RandomState(seed)] * count)
    labels, inertia = kmeans.split_starts(space, weights, k=6, seed=1, n_init=4)
    assert np.array_equal(labels, model.labels_) and inertia == model.inertia_


def test_same_partition_matches_the_mapping_rule() -> None:
    # scikit-learn's _is_same_clustering (sklearn/cluster/_k_means_common.pyx): labels maps into best
    best = np.array([0, 0, 1, 1, 2, 2])
    assert kmeans._same_partition(np.array([2, 2, 0, 0, 1, 1]), best, 3)
    assert not kmeans._same_partition(np.array([2, 2, 0, 1, 1, 1]), best, 3)
    assert kmeans._same_partition(np.array([0, 0, 0, 0, 1, 1]), np.array([0, 0, 1, 1, 2, 2]), 3) is False


def _old_chi2_ranking(df_in: np.ndarray, df_all: np.ndarray, size: float, total: float, top: int) -> np.ndarray:
    """The ranking of summaries._chi2_terms before this pass, over every term (copied)."""
    df_out = df_all - df_in
    rest = total - size
    scores = chi_square_2x2(df_in, df_out, size - df_in, rest - df_out)
    share_in = df_in / size
    share_out = df_out / rest if rest > 0 else np.zeros_like(df_out)
    candidates = np.flatnonzero((share_in > share_out) & (scores > 0))
    return best_first(candidates, scores, top)


@pytest.mark.parametrize("whole", [True, False])
def test_chi2_terms_over_held_terms_equal_all_terms(whole: bool) -> None:
    rng = np.random.default_rng(3)
    terms = 3_000
    for trial in range(20):
        df_all = rng.integers(0, 40, size=terms).astype(float)
        df_in = np.floor(df_all * rng.random(terms) * (rng.random(terms) < 0.3))
        if not whole:
            df_all, df_in = df_all * 1.37, df_in * 1.37
        size, total = float(df_in.max() * 3 + 1), float(df_all.max() * 20 + 50)
        keys = [f"t{i}" for i in range(terms)]
        got = _chi2_terms(df_in, df_all, size, total, keys, keys, 40)
        expected = _old_chi2_ranking(df_in, df_all, size, total, 40)
        assert [t.key for t in got] == [keys[i] for i in expected], trial
        df_out = df_all - df_in
        scores = chi_square_2x2(df_in, df_out, size - df_in, (total - size) - df_out)
        assert [t.score for t in got] == [float(scores[i]) for i in expected]


def _old_ranked_columns(df_in: np.ndarray, sizes: np.ndarray, total: float, top: int) -> np.ndarray:
    """rules._ranked_columns before this pass (copied): every column scored for every class."""
    df_all = df_in.sum(axis=1)
    ranks, columns, klass_of = [], [], []
    for c in range(sizes.size):
        size, rest = sizes[c], total - sizes[c]
        df_c = df_in[:, c]
        df_out = df_all - df_c
        scores = chi_square_2x2(df_c, df_out, size - df_c, rest - df_out)
        candidates = np.flatnonzero((df_c * rest > df_out * size) & (scores > 0))
        best = best_first(candidates, scores, top)
        ranks.append(np.arange(best.size))
        columns.append(best)
        klass_of.append(np.full(best.size, c))
    rank, column, klass = np.concatenate(ranks), np.concatenate(columns), np.concatenate(klass_of)
    column = column[np.lexsort((klass, rank))]
    _, first = np.unique(column, return_index=True)
    return column[np.sort(first)][:top].astype(np.intp)


def test_ranked_columns_equal_the_old_ranking() -> None:
    rng = np.random.default_rng(8)
    for classes in (2, 5, 20):
        df_in = rng.integers(0, 6, size=(2_000, classes)) * (rng.random((2_000, classes)) < 0.2)
        df_in = df_in.astype(float)
        sizes = df_in.sum(axis=0) + rng.integers(5, 30, size=classes)
        total = float(sizes.sum())
        assert np.array_equal(_ranked_columns(df_in, sizes, total, 60), _old_ranked_columns(df_in, sizes, total, 60))


def test_level_exemplars_are_each_cut_clusters_nearest_row() -> None:
    # independent: for every cut and cluster, the member of least cosine distance to the weighted mean
    # direction of its members, ties to the earlier row (ties made on purpose by repeated rows)
    space, weights = _blobs(600, 6, 8, 4)
    space = np.vstack([space, space[:50]])
    weights = np.r_[weights, weights[:50]]
    clustering = kmeans.kmeans_clusters(space, weights, k=8, seed=0, n_init=2)
    levels = build_levels(centroid_tree(clustering, weights), space, weights, clustering.labels,
                          k_min=2, k_max=8, run_k=8)
    for k, cut in levels.cuts.items():
        for cluster in levels.clusters[k]:
            members = np.flatnonzero(cut == cluster.cluster_id)
            centre = normalize((weights[members, None] * space[members]).sum(axis=0)[None, :])[0]
            distance = 1.0 - normalize(space[members]) @ centre
            nearest = members[distance <= distance.min() + 1e-12]
            assert cluster.exemplar_text in nearest
            assert cluster.exemplar_text == int(members[np.argmin(np.round(distance, 12))])
