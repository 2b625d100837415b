"""The contract every stage on the main path keeps (DEVELOPERS.md, "Rules the code keeps").

For each stage function: the same inputs and the same seed give equal outputs (one seed flows through
every random step, so runs are reproducible); the inputs are left as they were (stages take and return
plain objects, and the pipeline hands one stage's output to several later stages); and it runs on the
smallest collection pilewise accepts, 3 distinct texts with k = 2 (options.check_k). Stages are called
as pipeline.compute_run and pipeline.prepare_collection call them; each case is named by its stage.
"""

from __future__ import annotations

import copy
import dataclasses
from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np
import pytest
import scipy.sparse as sp

from helpers import LIMITS, write_texts
from pilewise.clustering.hierarchy import cut_tree, ward_tree
from pilewise.clustering.kmeans import Clustering, clustering_from_labels, kmeans_clusters
from pilewise.clustering.levels import build_levels, centroid_tree
from pilewise.clustering.quality import assess
from pilewise.clustering.stability import bootstrap_stability, kmeans_cluster_fn
from pilewise.describe.names import ClusterName, Naming, OldNames, carry_names, suggested_name
from pilewise.describe.profiles import term_profiles_from_counts
from pilewise.describe.rules import explain_clusters
from pilewise.describe.summaries import describe_clusters
from pilewise.ingest.dedup import find_boilerplate, near_duplicate_groups
from pilewise.ingest.reading import read_source
from pilewise.ingest.redact import redact_document
from pilewise.ingest.tables import ColumnChoice
from pilewise.model import Collection, Document
from pilewise.vectors.text import Analyzer, load_stop_words
from pilewise.vectors.tfidf import VectorSettings, vectorize

SEED = 7
K = 2

# Invented notes on three topics; the e-mail address and phone number give redaction work to do, and the
# shared last line gives the boilerplate finder a candidate.
TWELVE = [
    *(f"Repotting the {w} needs fresh soil, compost and mulch; water the seedling {i} times a week.\n"
      "Sent from the garden club desk" for i, w in enumerate(["fern", "rose", "basil", "ivy"])),
    *(f"The {w} chain slipped and the brake pad wore out after {i} rides; adjust the saddle and pedal.\n"
      "Sent from the garden club desk" for i, w in enumerate(["road", "city", "cargo", "folding"])),
    *(f"Whisk the flour and butter, rest the dough {i} hours, then bake the {w} in a hot oven. "
      "Questions to baker@example.org or +49 30 123456" for i, w in enumerate(["bread", "pie", "tart", "loaf"])),
]
THREE = [TWELVE[0], TWELVE[4], TWELVE[8]]  # one text per topic: the smallest collection pilewise clusters


def same(a: Any, b: Any) -> bool:
    """Deep equality of stage values: dataclasses, numpy arrays (NaN equals NaN), sparse matrices, containers."""
    if type(a) is not type(b):
        return False
    if isinstance(a, Analyzer):
        # its configuration; its caches (stems, and surface-word counts that vectorizing adds to by design,
        # so that `surface` shows the commonest form) are working state, not an input value
        return a.stop_words == b.stop_words and a.stem == b.stem
    if isinstance(a, np.ndarray):
        return a.shape == b.shape and a.dtype == b.dtype and bool(np.array_equal(a, b, equal_nan=a.dtype.kind in "fc"))
    if sp.issparse(a):
        return a.shape == b.shape and same(a.toarray(), b.toarray())
    if isinstance(a, float | np.floating):
        return bool(a == b or (np.isnan(a) and np.isnan(b)))
    if isinstance(a, np.generic):
        return bool(a == b)
    if dataclasses.is_dataclass(a):
        return all(same(getattr(a, f.name), getattr(b, f.name)) for f in dataclasses.fields(a))
    if isinstance(a, list | tuple):
        return len(a) == len(b) and all(same(x, y) for x, y in zip(a, b, strict=True))
    if isinstance(a, dict):
        return a.keys() == b.keys() and all(same(a[key], b[key]) for key in a)
    if isinstance(a, set | frozenset | str | int | bool | type(None) | Path):
        return bool(a == b)
    if callable(a):
        return a is b  # a function passed in (the stability re-clustering): the same object
    raise TypeError(f"no equality rule for {type(a).__name__}")


def folder_state(folder: Path) -> dict[str, bytes]:
    """Every file under `folder` with its bytes: reading must leave SOURCE as it was."""
    return {str(p.relative_to(folder)): p.read_bytes() for p in sorted(folder.rglob("*")) if p.is_file()}


@dataclasses.dataclass
class Upstream:
    """Every stage's inputs, each made by the stage before it, as compute_run chains them."""

    folder: Path
    documents: tuple[Document, ...]
    collection: Collection
    texts: list[str]
    analyzer: Analyzer
    vectors: Any
    weights: np.ndarray
    clustering: Clustering
    terms: list[str]
    quality: Any
    stability: Any
    clusters: Any


def redact_all(documents: tuple[Document, ...]) -> tuple[tuple[Document, ...], dict[str, int]]:
    """Redaction as prepare_collection runs it: every document, counts per kind of personal data."""
    counts: dict[str, int] = {}
    return tuple(redact_document(doc, counts) for doc in documents), counts


def collection_of(documents: tuple[Document, ...]) -> Collection:
    """Distinct texts of the planted documents (they are all different), in reading order."""
    n = len(documents)
    return Collection(documents, np.arange(n, dtype=np.int64), np.arange(n, dtype=np.int64),
                      np.ones(n, dtype=np.int64))


def ward_cut(space: np.ndarray, weights: np.ndarray, k: int, seed: int) -> Clustering:
    """--method ward: one tree, cut at k, numbered like k-means clusters (pipeline._cluster_at)."""
    tree = ward_tree(np.asarray(space), weights, seed=seed)
    return clustering_from_labels(space, weights, cut_tree(tree, k), k=k)


def levels_of(clustering: Clustering, space: np.ndarray, weights: np.ndarray) -> Any:
    """Levels of a k-means run: the centroid tree of its clusters, cut at the run's k."""
    return build_levels(centroid_tree(clustering, weights), space, weights, clustering.labels,
                        k_min=K, k_max=K, run_k=K)


def present_terms(counts: sp.csr_matrix) -> sp.csr_matrix:
    """Term presence (0/1), as pipeline.explain_run gives it to the rules."""
    return sp.csr_matrix((np.ones_like(counts.data), counts.indices, counts.indptr), shape=counts.shape)


def name_clusters(clusters: Any, doc_ids: list[str], labels: np.ndarray, space: np.ndarray) -> Naming:
    """Suggested names, then carry-over of names an earlier run (the same clustering) gave."""
    suggestions = [suggested_name([t.term for t in c.chi2_terms]) for c in clusters]
    old = OldNames("earlier", {c: (f"name {c}", "") for c in range(K)},
                   {c: frozenset(d for d, label in zip(doc_ids, labels, strict=True) if label == c) for c in range(K)})
    return carry_names(old, doc_ids, labels, space, np.arange(len(doc_ids)), suggestions)


def upstream(folder: Path, texts: list[str]) -> Upstream:
    write_texts(folder, texts)
    ingested = read_source(folder, ColumnChoice(), LIMITS)
    documents, _ = redact_all(ingested.documents)
    collection = collection_of(documents)
    redacted = [d.text for d in documents]
    analyzer = Analyzer(stop_words=load_stop_words(None), stem=False)
    vectors = vectorize(redacted, analyzer, VectorSettings(seed=SEED), copies=collection.copies)
    weights = collection.copies.astype(float)
    clustering = kmeans_clusters(vectors.space, weights, k=K, seed=SEED, n_init=4)
    quality = assess(vectors.space, clustering.labels, k=K, seed=SEED)
    stability = bootstrap_stability(vectors.space, weights, clustering.labels, k=K, resamples=3, seed=SEED,
                                    cluster_fn=kmeans_cluster_fn(K))
    clusters = describe_clusters(collection, vectors, clustering, quality, analyzer, top_terms=5,
                                 stability=stability)
    terms = [analyzer.surface(t) for t in vectors.terms]
    return Upstream(folder, ingested.documents, collection, redacted, analyzer, vectors, weights, clustering,
                    terms, quality, stability, clusters)


Call = tuple[Callable[..., Any], tuple[Any, ...], dict[str, Any]]
STAGES: dict[str, Callable[[Upstream], Call]] = {
    "reading": lambda u: (read_source, (u.folder, ColumnChoice(), LIMITS), {}),
    "redaction": lambda u: (redact_all, (u.documents,), {}),
    "boilerplate": lambda u: (find_boilerplate, (u.texts,), {}),
    "near-duplicates": lambda u: (near_duplicate_groups, (u.texts,), {"threshold": 0.8, "seed": SEED}),
    "vectorizing": lambda u: (vectorize, (u.texts, u.analyzer, VectorSettings(seed=SEED)),
                              {"copies": u.collection.copies}),
    "k-means": lambda u: (kmeans_clusters, (u.vectors.space, u.weights), {"k": K, "seed": SEED, "n_init": 4}),
    "ward tree and cut": lambda u: (ward_cut, (u.vectors.space, u.weights, K, SEED), {}),
    "quality": lambda u: (assess, (u.vectors.space, u.clustering.labels), {"k": K, "seed": SEED}),
    "stability": lambda u: (bootstrap_stability, (u.vectors.space, u.weights, u.clustering.labels),
                            {"k": K, "resamples": 3, "seed": SEED, "cluster_fn": kmeans_cluster_fn(K)}),
    "describing": lambda u: (describe_clusters, (u.collection, u.vectors, u.clustering, u.quality, u.analyzer),
                             {"top_terms": 5, "stability": u.stability}),
    "levels": lambda u: (levels_of, (u.clustering, u.vectors.space, u.weights), {}),
    "profiles": lambda u: (term_profiles_from_counts, (u.vectors.counts, u.clustering.labels, u.weights, u.terms),
                           {"k": K}),
    "rules": lambda u: (explain_clusters, (present_terms(u.vectors.counts), u.clustering.labels, u.weights,
                                           u.terms), {"k": K, "seed": SEED}),
    "names": lambda u: (name_clusters, (u.clusters, [d.doc_id for d in u.documents], u.clustering.labels,
                                        u.vectors.space), {}),
}


@pytest.fixture(scope="module")
def twelve(tmp_path_factory: pytest.TempPathFactory) -> Upstream:
    return upstream(tmp_path_factory.mktemp("contract") / "twelve", TWELVE)


@pytest.fixture(scope="module")
def three(tmp_path_factory: pytest.TempPathFactory) -> Upstream:
    return upstream(tmp_path_factory.mktemp("contract") / "three", THREE)


def test_the_upstream_chain_is_what_the_cases_expect(twelve: Upstream, three: Upstream) -> None:
    # the planted collections reach every stage whole: no file skipped, three clean topics at k = 2
    assert len(twelve.documents) == 12 and len(three.documents) == 3
    assert all("xredacted" in t for t in twelve.texts[8:]) and "baker@example.org" in twelve.documents[8].text
    assert twelve.clustering.labels.shape == (12,) and set(twelve.clustering.labels.tolist()) == {0, 1}
    assert set(three.clustering.labels.tolist()) == {0, 1}
    assert len(twelve.clusters) == K and len(three.clusters) == K


@pytest.mark.parametrize("stage", list(STAGES))
def test_same_inputs_and_seed_give_equal_outputs(stage: str, twelve: Upstream) -> None:
    fn, args, kwargs = STAGES[stage](twelve)
    assert same(fn(*args, **kwargs), fn(*args, **kwargs))


@pytest.mark.parametrize("stage", list(STAGES))
def test_inputs_are_left_unchanged(stage: str, twelve: Upstream) -> None:
    fn, args, kwargs = STAGES[stage](twelve)
    before = copy.deepcopy((args, kwargs))
    files = folder_state(twelve.folder)
    fn(*args, **kwargs)
    assert same((args, kwargs), before)
    assert folder_state(twelve.folder) == files


@pytest.mark.parametrize("stage", list(STAGES))
def test_runs_on_three_texts_with_k_2(stage: str, three: Upstream) -> None:
    fn, args, kwargs = STAGES[stage](three)
    first = fn(*args, **kwargs)
    assert same(first, fn(*args, **kwargs))
    if isinstance(first, Clustering):
        assert first.labels.shape == (3,) and set(first.labels.tolist()) == {0, 1}
    if isinstance(first, Naming):
        assert [c.cluster_id for c in first.clusters] == [0, 1]
        assert all(isinstance(c, ClusterName) and c.name == f"name {c.cluster_id}" for c in first.clusters)
