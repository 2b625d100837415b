"""Clustering stage: seeded k-means over the clustering space, and distances to the centroids."""

from __future__ import annotations

import copy
import itertools
import multiprocessing
import warnings
from collections.abc import Callable, Iterable
from concurrent.futures import ProcessPoolExecutor
from concurrent.futures.process import BrokenProcessPool
from dataclasses import dataclass
from typing import Any

import numpy as np
import scipy.sparse as sp
from sklearn.cluster import KMeans, MiniBatchKMeans
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
    workers: int = 1,
) -> Clustering:
    """Seeded k-means (k-means++ starts, or the given `init` centroids) with duplicate counts as weights.

    With `workers` > 1, at least SPLIT_STARTS_MIN rows and more than one start, the later half of the starts
    runs in a forked process (`split_starts`); the clustering is the same as with one process. Only where
    OpenMP runs one thread (`--threads 1`, OMP_NUM_THREADS=1): with more, scikit-learn's k-means already
    uses the cores.
    """
    if (init is None and n_init > 1 and workers > 1 and space.shape[0] >= SPLIT_STARTS_MIN and _can_fork()
            and _one_openmp_thread()):
        raw_labels, inertia = split_starts(space, weights, k=k, seed=seed, n_init=n_init)
    else:
        model = KMeans(n_clusters=k, n_init=1 if init is not None else n_init, random_state=seed,
                       init=init if init is not None else "k-means++")
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ConvergenceWarning)  # checked just below, with a message that helps
            raw_labels = model.fit_predict(space, sample_weight=weights)
        inertia = float(model.inertia_)
    found = int(np.unique(raw_labels).size)
    if found < k:
        raise PilewiseError(
            f"k={k} is more than the {found} groups of texts that differ in their counted words; "
            f"pass a smaller --k (at most {found})"
        )
    return clustering_from_labels(space, weights, raw_labels, k=k, inertia=inertia)


SPLIT_STARTS_MIN = 10_000  # rows from which the k-means starts are split over two processes (a fork costs ~0.1 s)
Start = tuple[np.ndarray, float, bool]  # one start's labels, its inertia, whether its generator state was right
_handed_starts: dict[str, Any] = {}  # the forked process's inputs, inherited at the fork instead of pickled


def split_starts(
    space: np.ndarray | sp.csr_matrix, weights: np.ndarray, *, k: int, seed: int, n_init: int
) -> tuple[np.ndarray, float]:
    """`KMeans(n_init=n_init, random_state=seed)`'s labels and inertia, its starts run on two processes.

    scikit-learn runs the starts one after the other on one `RandomState(seed)`; each k-means++ start
    draws a fixed count of numbers from it (one for the first centre, then `2 + log k` per centre
    whatever the rows), so the generator at start j is known beforehand (`start_states`). The first
    half of the starts runs here, the rest in a forked process from their own states; every process checks
    that the generator it ends a start with is the state predicted for the next one, and a start whose
    state was not the predicted one (another scikit-learn) is run again here in order. The winner is
    chosen as scikit-learn chooses it (`_best_start`), so labels and inertia are the same bit for bit as
    KMeans on one OpenMP thread. Both processes run one OpenMP thread: OpenMP's thread pool does not
    survive a fork (a forked child that starts OpenMP threads can hang).
    """
    from threadpoolctl import threadpool_limits  # a dependency of scikit-learn

    with threadpool_limits(limits=1, user_api="openmp"):
        return _split_starts(space, weights, k=k, seed=seed, n_init=n_init)


def _split_starts(
    space: np.ndarray | sp.csr_matrix, weights: np.ndarray, *, k: int, seed: int, n_init: int
) -> tuple[np.ndarray, float]:
    states = start_states(k, seed, n_init + 1)
    here = (n_init + 1) // 2
    global _handed_starts
    _handed_starts = {"space": space, "weights": weights, "k": k, "states": states}
    executor = ProcessPoolExecutor(1, mp_context=multiprocessing.get_context("fork"))
    try:
        later = executor.submit(_handed_run, here, n_init)  # the fork happens here and inherits the inputs
    except OSError:  # no process could be started (a process limit): every start here, in order
        executor.shutdown(wait=False, cancel_futures=True)
        return _best_start(run_starts(space, weights, k=k, states=states, first=0, stop=n_init, trust=False), k)
    finally:
        _handed_starts = {}
    try:
        starts = run_starts(space, weights, k=k, states=states, first=0, stop=here)
        try:
            starts += later.result()
        except BrokenProcessPool:  # a worker that died (memory, a signal) leaves its starts to this process
            starts += run_starts(space, weights, k=k, states=states, first=here, stop=n_init)
    finally:
        executor.shutdown(wait=False, cancel_futures=True)
    if not all(checked for _, _, checked in starts):
        starts = run_starts(space, weights, k=k, states=states, first=0, stop=n_init, trust=False)
    return _best_start(starts, k)


def _handed_run(first: int, stop: int) -> list[Start]:
    h = _handed_starts
    return run_starts(h["space"], h["weights"], k=h["k"], states=h["states"], first=first, stop=stop)


def start_states(k: int, seed: int, count: int) -> list[np.random.RandomState]:
    """The generator as `KMeans(random_state=seed)` holds it before each of `count` k-means++ starts.

    Found by seeding k single points with each start's generator: k-means++ draws the same count of numbers
    whatever the rows (checked by every start of `run_starts`).
    """
    generator = np.random.RandomState(seed)
    points = np.arange(k, dtype=np.float64)[:, None]
    states = []
    for _ in range(count):
        states.append(copy.deepcopy(generator))
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ConvergenceWarning)
            KMeans(n_clusters=k, n_init=1, max_iter=1, random_state=generator).fit(points)
    return states


def run_starts(
    space: np.ndarray | sp.csr_matrix, weights: np.ndarray, *, k: int, states: list[np.random.RandomState],
    first: int, stop: int, trust: bool = True,
) -> list[Start]:
    """Starts `first` to `stop - 1` as one-start fits, each from `states[first]` on one running generator.

    Each start records whether its generator ended at the state predicted for the next start. With `trust`
    False (the fallback of `split_starts`, from start 0) the starts are run as scikit-learn runs them and
    marked as checked.
    """
    generator = copy.deepcopy(states[first])
    done: list[Start] = []
    for j in range(first, stop):
        model = KMeans(n_clusters=k, n_init=1, random_state=generator)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ConvergenceWarning)
            labels = model.fit_predict(space, sample_weight=weights)
        done.append((labels, float(model.inertia_), not trust or _same_state(generator, states[j + 1])))
    return done


def _same_state(a: np.random.RandomState, b: np.random.RandomState) -> bool:
    state_a, state_b = a.get_state(legacy=False), b.get_state(legacy=False)
    return bool(state_a["state"]["pos"] == state_b["state"]["pos"]
                and np.array_equal(state_a["state"]["key"], state_b["state"]["key"])
                and state_a["has_gauss"] == state_b["has_gauss"])


def _best_start(starts: list[Start], k: int) -> tuple[np.ndarray, float]:
    """The start KMeans keeps: the first, replaced by each later one of lower inertia and another partition."""
    best_labels, best_inertia, _ = starts[0]
    for labels, inertia, _ in starts[1:]:
        if inertia < best_inertia and not _same_partition(labels, best_labels, k):
            best_labels, best_inertia = labels, inertia
    return best_labels, best_inertia


def _same_partition(labels: np.ndarray, best: np.ndarray, k: int) -> bool:
    """scikit-learn's `_is_same_clustering`: every label of `labels` maps to one label of `best`."""
    pairs = np.unique(labels.astype(np.int64) * k + best)
    return bool(np.unique(pairs // k).size == pairs.size)


def _one_openmp_thread() -> bool:
    """Whether OpenMP (scikit-learn's k-means) runs one thread in this process."""
    from threadpoolctl import threadpool_info

    return all(pool["num_threads"] == 1 for pool in threadpool_info() if pool["user_api"] == "openmp")


def _can_fork() -> bool:
    return "fork" in multiprocessing.get_all_start_methods()


MINIBATCH_ROWS = 4_096  # rows per mini-batch step
MINIBATCH_EPOCHS = 3  # passes over the data after the seeding
MINIBATCH_STARTS = 3  # seeded starts; the one with the lowest inertia over all rows is kept
SEED_SAMPLE = 20_000  # rows of the seeded sample on which k-means picks the starting centroids
ROW_BLOCK = 65_536  # rows per block when a pass over the whole space is made
LLOYD_PASSES = 10  # full k-means steps after the mini-batches, at most
LLOYD_SETTLED = 0.001  # ... stopping once fewer than this share of the rows change cluster


def minibatch_clusters(
    space: np.ndarray | sp.csr_matrix, weights: np.ndarray, *, k: int, seed: int,
    track: Callable[[list[tuple[int, int, int]], int], Iterable[tuple[int, int, int]]] | None = None,
) -> Clustering:
    """Mini-batch k-means (Sculley 2010) fed block by block, for collections too large for full k-means.

    Each of MINIBATCH_STARTS starts takes its starting centroids from full k-means (4 k-means++ starts)
    on a seeded sample of SEED_SAMPLE rows; then MINIBATCH_EPOCHS passes over the rows in shuffled
    mini-batches refine them (scikit-learn's MiniBatchKMeans.partial_fit), and up to LLOYD_PASSES full
    k-means (Lloyd) steps, each one pass over the rows in blocks, move the centroids to the weighted means
    of their rows until fewer than LLOYD_SETTLED of the rows change cluster. The start with the lowest
    inertia over all rows wins (a sample's best start is not always the collection's). `track(steps,
    total)` may wrap the mini-batch loop (a progress bar).
    """
    n = space.shape[0]
    steps = [(start, epoch, begin) for start in range(MINIBATCH_STARTS) for epoch in range(MINIBATCH_EPOCHS)
             for begin in range(0, n, MINIBATCH_ROWS)]
    tracked = iter(track(steps, len(steps)) if track else steps)
    best: tuple[np.ndarray, float] | None = None
    for start in range(MINIBATCH_STARTS):
        rng = np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(start,)))
        sample = np.sort(rng.choice(n, min(n, SEED_SAMPLE), replace=False))
        seeding = KMeans(n_clusters=k, n_init=4, random_state=int(rng.integers(2**31 - 1)))
        seeding.fit(space[sample], sample_weight=weights[sample])
        model = MiniBatchKMeans(n_clusters=k, init=seeding.cluster_centers_, n_init=1, batch_size=MINIBATCH_ROWS,
                                random_state=int(rng.integers(2**31 - 1)))
        order, shuffled_for = np.arange(n), -1
        for _, epoch, begin in itertools.islice(tracked, MINIBATCH_EPOCHS * len(range(0, n, MINIBATCH_ROWS))):
            if epoch != shuffled_for:  # a fresh shuffle for every pass
                order, shuffled_for = rng.permutation(n), epoch
            rows = np.sort(order[begin : begin + MINIBATCH_ROWS])
            model.partial_fit(space[rows], sample_weight=weights[rows])
        raw_labels, inertia = _lloyd_steps(space, weights, model.cluster_centers_, k)
        if best is None or inertia < best[1]:
            best = (raw_labels, inertia)
    assert best is not None
    raw_labels, inertia = best
    found = int(np.unique(raw_labels).size)
    if found < k:
        raise PilewiseError(f"mini-batch k-means filled only {found} of k={k} clusters; pass a smaller --k")
    return clustering_from_labels(space, weights, raw_labels, k=k, inertia=inertia)


def _lloyd_steps(
    space: np.ndarray | sp.csr_matrix, weights: np.ndarray, centers: np.ndarray, k: int
) -> tuple[np.ndarray, float]:
    """Full k-means steps from `centers`, one blocked pass each, until hardly any row changes cluster."""
    n = space.shape[0]
    raw_labels, inertia = _nearest_centers(space, weights, centers)
    for _ in range(LLOYD_PASSES):
        sums = weighted_sums(space, weights, raw_labels, k)
        mass = np.bincount(raw_labels, weights=weights, minlength=k)
        filled = mass > 0
        centers = centers.copy()
        centers[filled] = sums[filled] / mass[filled, None]
        new_labels, inertia = _nearest_centers(space, weights, centers)
        moved = int(np.count_nonzero(new_labels != raw_labels))
        raw_labels = new_labels
        if moved <= LLOYD_SETTLED * n:
            break
    return raw_labels, inertia


def _nearest_centers(
    space: np.ndarray | sp.csr_matrix, weights: np.ndarray, centers: np.ndarray
) -> tuple[np.ndarray, float]:
    """Each row's nearest center (Euclidean) and the weighted sum of squared distances, block by block."""
    n = space.shape[0]
    labels = np.empty(n, dtype=np.int64)
    inertia = 0.0
    for begin in range(0, n, ROW_BLOCK):
        block = space[begin : begin + ROW_BLOCK]
        if sp.issparse(block):  # --lsa-components 0: the TF-IDF rows themselves
            squared = np.asarray(sp.csr_matrix(block).multiply(block).sum(axis=1)).ravel()
        else:
            block = np.asarray(block, dtype=np.float64)
            squared = (block**2).sum(axis=1)
        distances = squared[:, None] - 2 * np.asarray(block @ centers.T) + (centers**2).sum(axis=1)[None, :]
        labels[begin : begin + ROW_BLOCK] = np.argmin(distances, axis=1)
        inertia += float(np.sum(np.min(distances, axis=1).clip(0) * weights[begin : begin + ROW_BLOCK]))
    return labels, inertia


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
    similarity = cosine_to_centroids(space, centroids, labels)
    distances = np.clip(1.0 - similarity, 0.0, 2.0)
    return Clustering(labels=labels, centroids=centroids, distances=distances, inertia=inertia)


def weighted_centroids(
    space: np.ndarray | sp.csr_matrix, weights: np.ndarray, labels: np.ndarray, k: int
) -> np.ndarray:
    """Unit-length weighted mean direction of each cluster's rows, shape (k, n_dims)."""
    return normalize(weighted_sums(space, weights, labels, k))


def weighted_sums(space: np.ndarray | sp.csr_matrix, weights: np.ndarray, labels: np.ndarray, k: int) -> np.ndarray:
    """Weighted sum of each group's rows, shape (k, n_dims), in float64; dense spaces go block by block, so a
    float32 space is never copied whole."""
    if sp.issparse(space):
        return cluster_sums(sp.csr_matrix(space), weights, labels, k)[0].toarray()
    sums = np.zeros((k, space.shape[1]))
    for begin in range(0, space.shape[0], ROW_BLOCK):
        block_labels = labels[begin : begin + ROW_BLOCK]
        indicator = sp.csr_matrix((weights[begin : begin + ROW_BLOCK], (block_labels, np.arange(block_labels.size))),
                                  shape=(k, block_labels.size))
        sums += indicator @ np.asarray(space[begin : begin + ROW_BLOCK], dtype=np.float64)
    return sums


def cluster_sums(
    rows: sp.csr_matrix, weights: np.ndarray, labels: np.ndarray, k: int,
    *weighings: Callable[[sp.csr_matrix], sp.csr_matrix],
) -> tuple[sp.csr_matrix, ...]:
    """Weighted sum per cluster (k x columns, sparse) of the rows, or of each weighing of them, in one pass.

    Each weighing maps a block of rows to the rows to sum (presence, TF-IDF, ...); without any, the rows
    themselves are summed. Rows go block by block, so no weighing of the whole matrix is ever held.
    """
    weighings = weighings or (lambda block: block,)
    sums = [sp.csr_matrix((k, rows.shape[1])) for _ in weighings]
    for begin in range(0, rows.shape[0], ROW_BLOCK):
        block = rows[begin : begin + ROW_BLOCK]
        block_labels = labels[begin : begin + ROW_BLOCK]
        indicator = sp.csr_matrix((weights[begin : begin + ROW_BLOCK], (block_labels, np.arange(block.shape[0]))),
                                  shape=(k, block.shape[0]))
        for i, weigh in enumerate(weighings):
            sums[i] = sums[i] + indicator @ weigh(block)
    return tuple(sp.csr_matrix(total) for total in sums)


def farthest_row(space: np.ndarray | sp.csr_matrix, clustering: Clustering, weights: np.ndarray) -> int:
    """The row with the largest weighted distance to its centroid: a new centre when growing k by one."""
    return int(np.argmax(clustering.distances * weights))


def cosine_to_centroids(space: np.ndarray | sp.csr_matrix, centroids: np.ndarray, labels: np.ndarray) -> np.ndarray:
    """Cosine similarity of each row of `space` with its cluster's centroid, block by block (no copy of `space`)."""
    centroids = normalize(centroids)
    out = np.empty(space.shape[0])
    for begin in range(0, space.shape[0], ROW_BLOCK):
        block = space[begin : begin + ROW_BLOCK]
        own = centroids[labels[begin : begin + ROW_BLOCK]]
        if sp.issparse(block):
            out[begin : begin + ROW_BLOCK] = np.asarray(normalize(block).multiply(own).sum(axis=1)).ravel()
        else:
            out[begin : begin + ROW_BLOCK] = np.einsum("ij,ij->i", normalize(np.asarray(block, dtype=np.float64)), own)
    return out
