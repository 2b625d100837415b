"""Cluster descriptions recomputed independently from the texts."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import scipy.sparse as sp

import pilewise.describe.summaries as describe
from helpers import write_topic_folder
from pilewise.describe.stats import chi_square_2x2
from pilewise.describe.summaries import NearestDigest
from pilewise.options import RunOptions
from pilewise.pipeline import compute_run
from pilewise.progress import Reporter
from pilewise.vectors.tfidf import with_phrases


@pytest.fixture(scope="module")
def result(tmp_path_factory: pytest.TempPathFactory):  # type: ignore[no-untyped-def]
    folder = tmp_path_factory.mktemp("describe") / "notes"
    write_topic_folder(folder, per_topic=15)
    # three exact copies of one garden note: clustered once, counted three times
    text = (folder / "garden-00.txt").read_text(encoding="utf-8")
    for i in range(2):
        (folder / f"copy-{i}.txt").write_text(text, encoding="utf-8")
    return compute_run(RunOptions(source=folder, k=3, quiet=True), Reporter(quiet=True))


def test_exact_copies_are_clustered_once_and_counted(result) -> None:  # type: ignore[no-untyped-def]
    assert len(result.collection.documents) == 47
    assert result.collection.copies.size == 45
    assert sum(c.size for c in result.clusters) == 47
    labels = result.clustering.labels[result.collection.text_of_doc]
    ids = [d.doc_id for d in result.collection.documents]
    assert labels[ids.index("copy-0.txt")] == labels[ids.index("garden-00.txt")] == labels[ids.index("copy-1.txt")]


def test_nearest_lists_the_member_nearest_the_centroid_first(result) -> None:  # type: ignore[no-untyped-def]
    # the headline is chosen among the nearest members (tests/test_descriptions.py); nearest[0] is the nearest
    space = np.asarray(result.vectors.space)
    for cluster in result.clusters:
        members = np.flatnonzero(result.clustering.labels == cluster.cluster_id)
        weights = result.collection.copies[members]
        centroid = (space[members] * weights[:, None]).sum(axis=0)
        cosine = space[members] @ centroid / (np.linalg.norm(space[members], axis=1) * np.linalg.norm(centroid))
        nearest_text = members[int(np.argmax(cosine))]
        expected_doc = result.collection.documents[result.collection.first_doc_of_text[nearest_text]]
        assert result.collection.documents[cluster.nearest[0].doc_index].title == expected_doc.title
        assert [n.distance for n in cluster.nearest] == sorted(n.distance for n in cluster.nearest)
        assert len(cluster.nearest) == 5


def test_chi_square_terms_recomputed_from_document_counts(result) -> None:  # type: ignore[no-untyped-def]
    docs = result.collection.documents
    labels = result.clustering.labels[result.collection.text_of_doc]
    analyzer = result.analyzer
    term_sets = [set(with_phrases(analyzer.terms(d.text))) for d in docs]
    for cluster in result.clusters:
        inside = labels == cluster.cluster_id
        assert cluster.chi2_terms, "a cluster of a separated topic has discriminating terms"
        for term in cluster.chi2_terms:
            has = np.array([term.key in s for s in term_sets])
            n11, n10 = int((has & inside).sum()), int((has & ~inside).sum())
            n01, n00 = int((~has & inside).sum()), int((~has & ~inside).sum())
            assert (term.docs_in, term.docs_out) == (n11, n10)
            assert term.score == pytest.approx(chi_square_2x2(n11, n10, n01, n00))
            assert n11 / inside.sum() > n10 / (~inside).sum()  # only over-represented terms
        scores = [t.score for t in cluster.chi2_terms]
        assert scores == sorted(scores, reverse=True)


def test_log_odds_terms_are_over_represented_and_ranked_by_z(result) -> None:  # type: ignore[no-untyped-def]
    for cluster in result.clusters:
        zs = [t.z for t in cluster.log_odds_terms]
        assert zs == sorted(zs, reverse=True)
        assert all(t.score > 0 for t in cluster.log_odds_terms)


def test_kwic_lines_come_from_distinct_members(result) -> None:  # type: ignore[no-untyped-def]
    labels = result.clustering.labels[result.collection.text_of_doc]
    for cluster in result.clusters:
        assert cluster.kwic
        by_term: dict[str, list[int]] = {}
        for line in cluster.kwic:
            by_term.setdefault(line.term, []).append(line.doc_index)
            assert labels[line.doc_index] == cluster.cluster_id
            assert " ".join(result.analyzer.terms(line.match)) == line.term  # no stemming: term shown as is
        for doc_indexes in by_term.values():
            assert len(doc_indexes) == len(set(doc_indexes)) <= 5


def test_clusters_are_numbered_largest_first(result) -> None:  # type: ignore[no-untyped-def]
    sizes = [c.size for c in result.clusters]
    assert sizes == sorted(sizes, reverse=True)
    assert sum(c.share for c in result.clusters) == pytest.approx(1.0)


def test_same_folder_path_is_accepted(tmp_path: Path) -> None:
    # Regression: a relative --out must resolve before the inside-source check.
    from pilewise.options import validate

    validate(RunOptions(source=tmp_path, k=2, out=Path("pilewise-site")))


# The bounded nearest-first lists of describe.summaries (used by both paths; here since the stage split)


def test_digest_keeps_exactly_the_nearest_rows_of_every_key() -> None:
    # checked against a full sort of all rows (ties by row number), fed in blocks of 1,000
    rng = np.random.default_rng(3)
    n, keys = 20_000, 6
    labels = rng.integers(0, keys, n)
    distances = np.round(rng.random(n), 3)  # rounded: many ties, broken by row
    digest = NearestDigest(7)
    for begin in range(0, n, 1_000):
        rows = np.arange(begin, begin + 1_000)
        digest.update(rows, labels[rows], distances[rows])
        assert digest.largest_held() <= 7
    for key in range(keys):
        members = np.flatnonzero(labels == key)
        expected = members[np.lexsort((members, distances[members]))][:7]
        rows, dist = digest.nearest(key)
        assert rows.tolist() == expected.tolist()
        assert dist.tolist() == distances[expected].tolist()
    assert digest.nearest(keys)[0].size == 0


@pytest.mark.parametrize("block", [None, 700])
def test_term_holders_are_the_nearest_members_holding_each_term(block: int | None,
                                                                monkeypatch: pytest.MonkeyPatch) -> None:
    """Whatever the row blocks (one, or five with ties of distance across them: ties go to the earlier row)."""
    if block is not None:
        monkeypatch.setattr(describe, "HOLDER_BLOCK", block)
    rng = np.random.default_rng(4)
    counts = sp.random(3_000, 40, density=0.1, format="csr", random_state=4, data_rvs=lambda m: np.ones(m))
    labels = rng.integers(0, 3, 3_000)
    distances = np.round(rng.random(3_000), 2)
    pairs = [(0, 5), (1, 5), (2, 17), (1, 39)]
    holders = describe.term_holders(counts, labels, distances, pairs, cap=4)
    dense = counts.toarray() > 0
    for key, (c, column) in enumerate(pairs):
        members = np.flatnonzero((labels == c) & dense[:, column])
        expected = members[np.argsort(distances[members], kind="stable")][:4]
        assert holders.nearest(key)[0].tolist() == expected.tolist()
