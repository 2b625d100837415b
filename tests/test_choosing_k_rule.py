"""The rule of `--k auto` (clustering.sweep.recommend_k) and the stability it filters on (issue 11, "Choosing k")."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from scipy.stats import spearmanr

from helpers import invoke, write_topic_folder
from open_sets import CorpusNotFetchedError, load_foldoc, load_mini_newsgroups
from pilewise.clustering.kmeans import kmeans_clusters
from pilewise.clustering.stability import bootstrap_stability, kmeans_cluster_fn
from pilewise.clustering.sweep import MIN_CLUSTER_TEXTS, PATTERN, PLATEAU, SweepPoint, recommend_k, sweep_kmeans
from pilewise.vectors.text import Analyzer, load_stop_words
from pilewise.vectors.tfidf import VectorSettings, vectorize


def point(k: int, silhouette: float, null: float, stability: float) -> SweepPoint:
    return SweepPoint(k, silhouette, None, None, stability, stability, 0.0, null)


def test_a_still_rising_score_gives_the_smallest_k_reaching_the_plateau_share() -> None:
    # docs/method.md, "Choosing k": when the excess over the null still rises at the end of the range, the
    # smallest k reaching PLATEAU of the best is taken and the best k is the runner-up. Excesses 0.01 k.
    points = [point(k, 0.05 + 0.01 * k + 0.003, 0.05, 0.7) for k in range(2, 21)]
    k, runner_up, reason = recommend_k(points, texts=10_000)
    expected = min(k for k in range(2, 21) if 0.01 * k + 0.003 >= PLATEAU * 0.203)  # independent recomputation
    assert (k, runner_up) == (expected, 20)
    assert reason.endswith("runner-up k=20")


def test_a_peak_is_taken_and_the_next_best_is_the_runner_up() -> None:
    # A score that peaks at 6 and falls below PLATEAU of the peak by the end of the range: the peak wins.
    excesses = {2: 0.05, 3: 0.08, 4: 0.1, 5: 0.2, 6: 0.4, 7: 0.3, 8: 0.2, 9: 0.1, 10: 0.05}
    points = [point(k, 0.1 + e, 0.1, 0.8) for k, e in excesses.items()]
    assert recommend_k(points, texts=10_000)[:2] == (6, 7)


def test_unstable_k_and_k_with_tiny_clusters_are_never_chosen() -> None:
    # The filter: mean stability >= PATTERN (Hennig's "pattern") and >= MIN_CLUSTER_TEXTS texts a cluster.
    points = [point(2, 0.2, 0.1, 0.9), point(3, 0.5, 0.1, PATTERN - 0.01), point(4, 0.3, 0.1, 0.9),
              point(5, 0.6, 0.1, 0.9)]
    texts = 4 * MIN_CLUSTER_TEXTS  # k = 5 would average fewer than MIN_CLUSTER_TEXTS texts
    k, runner_up, _ = recommend_k(points, texts=texts)
    assert k == 4 and runner_up == 2


def test_with_no_stable_k_the_size_bound_still_applies() -> None:
    # Nothing reaches PATTERN: the rule falls back to every k that passes the size bound, and says so.
    points = [point(2, 0.2, 0.1, 0.3), point(3, 0.3, 0.1, 0.3), point(4, 0.9, 0.1, 0.3)]
    k, _, reason = recommend_k(points, texts=3 * MIN_CLUSTER_TEXTS)
    assert k == 3
    assert f"no k reached mean stability {PATTERN}" in reason


def planted(k: int, per: int, spread: float, dims: int = 30, seed: int = 0) -> np.ndarray:
    """`k` groups of `per` rows around random directions (common practice for planted cluster data)."""
    rng = np.random.default_rng(seed)
    centres = rng.standard_normal((k, dims))
    rows = np.repeat(centres, per, axis=0)
    rows += spread * np.linalg.norm(centres, axis=1).repeat(per)[:, None] * rng.standard_normal(rows.shape)
    return rows / np.linalg.norm(rows, axis=1, keepdims=True)


def test_six_planted_groups_give_k_six() -> None:
    # Six well-separated planted groups: the peak of the excess is at the true count (by construction).
    space = planted(6, 40, 0.15)
    sweep, _ = sweep_kmeans(space, np.ones(len(space)), list(range(2, 13)), seed=0, n_init=4, resamples=5)
    assert sweep.recommended_k == 6


def test_runner_up_is_in_the_manifest_and_the_reason(tmp_path: Path) -> None:
    # docs/outputs.md: manifest.json `k_runner_up`, sweep.json `runner_up_k`, and the reason (shown on the
    # sweep page) names it.
    folder = tmp_path / "notes"
    write_topic_folder(folder, per_topic=20)
    result = invoke("run", str(folder), "--k", "auto", "--k-range", "2:6", "--out", str(tmp_path / "site"), "--quiet")
    assert result.exit_code == 0, result.stderr
    run = next((tmp_path / "site" / "runs").iterdir())
    manifest = json.loads((run / "manifest.json").read_text(encoding="utf-8"))
    sweep = json.loads((run / "sweep.json").read_text(encoding="utf-8"))
    assert manifest["k_runner_up"] == sweep["runner_up_k"] != manifest["k"]
    assert sweep["reason"].endswith(f"runner-up k={sweep['runner_up_k']}")
    assert "runner-up k=" in (run / "sweep.html").read_text(encoding="utf-8")


def space_of(texts: tuple[str, ...]) -> np.ndarray:
    vectors = vectorize(list(texts), Analyzer(stop_words=load_stop_words(None), stem=False), VectorSettings())
    return np.asarray(vectors.space)


@pytest.mark.corpus
@pytest.mark.slow
def test_two_newsgroups_give_k_two() -> None:
    # shared/CORPORA.md: 200 posts of two newsgroups; the rule must not pick more than the two groups
    # (benchmarks/measure_k.py: k = 2 with NMI 0.68).
    try:
        collection = load_mini_newsgroups()
    except CorpusNotFetchedError as exc:
        pytest.skip(str(exc))
    space = space_of(collection.texts)
    sweep, _ = sweep_kmeans(space, np.ones(len(space)), list(range(2, 9)), seed=0, n_init=10, resamples=10)
    assert sweep.recommended_k == 2


def _foldoc() -> tuple[np.ndarray, np.ndarray]:
    try:
        collection = load_foldoc()
    except CorpusNotFetchedError as exc:
        pytest.skip(str(exc))
    names = sorted(set(collection.labels))
    return space_of(collection.texts), np.array([names.index(label) for label in collection.labels])


@pytest.mark.corpus
@pytest.mark.slow
def test_computing_dictionary_does_not_collapse_to_the_smallest_k() -> None:
    # Issue 11: on FOLDOC's eight subjects (shared/CORPORA.md) the old rule chose k = 2 or 3; the rule must
    # choose at least half the true count and the runner-up must differ.
    space, gold = _foldoc()
    sweep, _ = sweep_kmeans(space, np.ones(len(space)), list(range(2, 11)), seed=0, n_init=4, resamples=3)
    assert sweep.recommended_k >= np.unique(gold).size // 2
    assert sweep.runner_up_k is not None and sweep.runner_up_k != sweep.recommended_k


@pytest.mark.corpus
@pytest.mark.slow
def test_stability_follows_purity_better_with_the_runs_own_starts() -> None:
    # Issue 11: with one k-means start per resample, nearly pure FOLDOC clusters read "dissolved". Re-clustering
    # with the run's starts (the default of kmeans_cluster_fn) must rank clusters by stability closer to their
    # purity (Spearman) than one start does; purity = share of the cluster's largest gold label.
    space, gold = _foldoc()
    k = np.unique(gold).size
    labels = kmeans_clusters(space, np.ones(len(space)), k=k, seed=0, n_init=4).labels
    purity = [np.bincount(gold[labels == c]).max() / np.count_nonzero(labels == c) for c in range(k)]
    rho = {}
    for starts in (1, 4):
        result = bootstrap_stability(space, np.ones(len(space)), labels, k=k, resamples=10, seed=0,
                                     cluster_fn=kmeans_cluster_fn(k, starts))
        rho[starts] = spearmanr([c.mean_jaccard for c in result.clusters], purity).statistic
    assert rho[4] > rho[1]
    assert rho[4] > 0.5  # a clear positive rank correlation (benchmarks/measure_k.py --purity: 0.71)
