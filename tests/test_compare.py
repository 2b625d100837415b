"""Comparing two runs: agreement figures against published values, cluster fates, moved documents, loading."""

from __future__ import annotations

import csv
import json
from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.optimize import linear_sum_assignment
from sklearn.metrics import adjusted_rand_score, normalized_mutual_info_score

from helpers import invoke, read_clusters, write_topic_folder
from pilewise.describe.compare import (
    MOVED_LISTED,
    READINGS_A,
    READINGS_B,
    Comparison,
    compare_labelings,
    compare_run_folders,
    comparison_document,
)
from pilewise.errors import PilewiseError


def compare(labels_a: list[int], labels_b: list[int]) -> Comparison:
    """Two labelings of the same documents, ids "0", "1", ... in the same order."""
    ids = [str(i) for i in range(len(labels_a))]
    return compare_labelings(ids, labels_a, ids, labels_b)


def labels_from_table(table: list[list[int]]) -> tuple[list[int], list[int]]:
    """Label vectors whose contingency table is `table` (rows: first labeling, columns: second)."""
    rows: list[int] = []
    columns: list[int] = []
    for i, row in enumerate(table):
        for j, count in enumerate(row):
            rows += [i] * count
            columns += [j] * count
    return rows, columns


def blocks(*sizes: int) -> list[int]:
    """Labels 0, 0, ..., 1, 1, ... with the given cluster sizes."""
    return [c for c, size in enumerate(sizes) for _ in range(size)]


# --- agreement figures against published values ---------------------------------------------------------


def test_ari_of_a_published_contingency_table() -> None:
    # stats.stackexchange question 207366 (confirmed, shared/CHECKS.md): table [[1,1,0],[1,2,1],[0,0,4]] -> 0.3126.
    a, b = labels_from_table([[1, 1, 0], [1, 2, 1], [0, 0, 4]])
    c = compare(a, b)
    assert c.contingency.tolist() == [[1, 1, 0], [1, 2, 1], [0, 0, 4]]
    assert c.ari == pytest.approx(0.3126, abs=5e-5)


@pytest.mark.parametrize(
    ("labels_a", "labels_b", "ari"),
    [
        ([0, 0, 1, 2], [0, 0, 1, 1], 0.5714),  # scikit-learn docs of adjusted_rand_score (confirmed)
        ([0, 0, 1, 1], [0, 1, 0, 1], -0.5),  # scikit-learn docs of adjusted_rand_score (confirmed)
        ([1, 1, 2, 2, 3, 3], [1, 1, 1, 1, 2, 2], 0.4444),  # R package documentation (confirmed)
    ],
)
def test_ari_of_documented_examples(labels_a: list[int], labels_b: list[int], ari: float) -> None:
    assert compare(labels_a, labels_b).ari == pytest.approx(ari, abs=5e-5)


def test_ari_homogeneity_completeness_v_measure_of_the_user_guide_example() -> None:
    # Older scikit-learn user guide (confirmed): true [0,0,0,1,1,1], predicted [0,0,1,1,2,2] -> ARI 0.2424,
    # homogeneity 0.6667, completeness 0.4206, V-measure 0.5158. Run A plays the true labels.
    c = compare([0, 0, 0, 1, 1, 1], [0, 0, 1, 1, 2, 2])
    assert c.ari == pytest.approx(0.2424, abs=5e-5)
    assert c.homogeneity == pytest.approx(0.6667, abs=5e-5)
    assert c.completeness == pytest.approx(0.4206, abs=5e-5)
    assert c.v_measure == pytest.approx(0.5158, abs=5e-5)


def test_nmi_of_the_iir_flat_clustering_example() -> None:
    # Manning, Raghavan & Schuetze (2008), IIR §16.3, Fig. 16.4: clusters {5x,1o}, {1x,4o,1d}, {2x,3d};
    # NMI 0.36 (value from memory, shared/CHECKS.md), arithmetic-mean normalization as in the book.
    x, o, d = 0, 1, 2
    classes = [x] * 5 + [o] + [x] + [o] * 4 + [d] + [x] * 2 + [d] * 3
    clusters = blocks(6, 6, 5)
    assert compare(clusters, classes).nmi == pytest.approx(0.36, abs=0.005)
    assert compare(classes, clusters).nmi == pytest.approx(0.36, abs=0.005)


# --- cluster fates and moved documents ------------------------------------------------------------------


def test_a_run_compared_with_itself_keeps_every_cluster_and_moves_nothing() -> None:
    labels = blocks(5, 7, 3, 9)
    c = compare(labels, labels)
    assert c.ari == pytest.approx(1.0) and c.nmi == pytest.approx(1.0)
    assert [f.reading for f in c.fates_a] == ["kept"] * 4 and [f.reading for f in c.fates_b] == ["kept"] * 4
    assert [f.text for f in c.fates_a] == [f"kept as {i} (Jaccard 1.00)" for i in range(4)]
    assert [f.text for f in c.fates_b] == [f"kept from {i} (Jaccard 1.00)" for i in range(4)]
    assert c.fates_a[1].partners == ((1, 7, 1.0),)
    assert c.moved == ()


def test_renumbered_clusters_are_matched_and_nothing_moves() -> None:
    a = blocks(5, 7, 3)
    renumber = {0: 2, 1: 0, 2: 1}
    c = compare(a, [renumber[x] for x in a])
    assert c.ari == pytest.approx(1.0)
    assert sorted(c.matching) == [(0, 2), (1, 0), (2, 1)]
    assert [f.text for f in c.fates_a] == ["kept as 2 (Jaccard 1.00)", "kept as 0 (Jaccard 1.00)",
                                           "kept as 1 (Jaccard 1.00)"]
    assert c.moved == ()


def test_two_clusters_merged_and_the_reverse_split() -> None:
    a = blocks(10, 10, 10)  # 0: docs 0-9, 1: docs 10-19, 2: docs 20-29
    b = blocks(20, 10)  # A's 0 and 1 united, A's 2 kept
    forward = compare(a, b)
    assert [f.reading for f in forward.fates_a] == ["merged", "merged", "kept"]
    assert [f.text for f in forward.fates_a] == [
        "merged with A's 1 into 0 (100% of its documents)",
        "merged with A's 0 into 0 (100% of its documents)",
        "kept as 1 (Jaccard 1.00)",
    ]
    assert forward.fates_a[0].partners == ((0, 10, 0.5),)
    assert [f.reading for f in forward.fates_b] == ["merged from", "kept"]
    assert forward.fates_b[0].text == "merged from 0 (50%) and 1 (50%)"
    assert forward.fates_b[0].partners == ((0, 10, 0.5), (1, 10, 0.5))
    # One of A's 0 and 1 is matched with B's 0; the other's ten documents moved.
    assert len(forward.moved) == 10
    assert len({m.cluster_a for m in forward.moved}) == 1 and {m.cluster_b for m in forward.moved} == {0}

    backward = compare(b, a)
    assert [f.reading for f in backward.fates_a] == ["split", "kept"]
    assert backward.fates_a[0].text == "split into 0 (50%) and 1 (50%)"
    assert [f.reading for f in backward.fates_b] == ["formed by a split of", "formed by a split of", "kept"]
    # The rows here are clusters of compare(b, a)'s second run, named "B".
    assert backward.fates_b[0].text == "formed by a split of 0 (50% of it came here), which also went into B's 1"
    assert len(backward.moved) == 10


def test_split_and_merged_in_both_directions() -> None:
    # A's 0 splits into B's 0 and 1; B's 1 also takes all of A's 1.
    a, b = labels_from_table([[6, 4], [0, 6]])
    c = compare(a, b)
    assert c.fates_a[0].reading == "split"  # its main partner, B's 0, draws only from A's 0
    a, b = labels_from_table([[4, 7], [0, 6]])
    c = compare(a, b)
    assert c.fates_a[0].reading == "split and merged"
    assert c.fates_a[0].text == "split into 1 (63%) and 0 (36%); in 1 it merged with A's 1"
    assert c.fates_a[1].reading == "merged"
    assert c.fates_b[1].reading == "merged from parts of"
    assert c.fates_b[1].text == "merged from 0 (53%) and 1 (46%); 0 also went into B's 0"
    # Both runs number clusters from 0: the row run's own clusters carry its name (common practice).


def test_a_share_of_exactly_one_fifth_makes_a_partner() -> None:
    """Regression guard: 3 of 15 is exactly 20%, though 0.2 * 15 > 3 in floating point."""
    a, b = labels_from_table([[12, 3], [0, 30]])
    fate = compare(a, b).fates_a[0]
    assert fate.reading == "split"
    assert fate.text == "split into 0 (80%) and 1 (20%)"


def test_dissolved_and_new_clusters() -> None:
    # A's 0 (12 documents) goes 2 by 2 into six clusters of B that are each mostly from A's 1 (60 documents).
    a, b = labels_from_table([[2] * 6, [10] * 6])
    c = compare(a, b)
    assert c.fates_a[0].reading == "dissolved" and c.fates_a[0].partners == ()
    assert c.fates_a[0].text == "dissolved: no cluster of B holds 20% of its documents (largest share 16%, in 0)"
    assert c.fates_a[1].reading == "dissolved"
    assert [f.reading for f in c.fates_b] == ["reshaped"] * 6
    assert c.fates_b[0].text == "mostly came from 1 (83% of its documents; Jaccard 0.16)"
    back = compare(b, a)
    assert [f.reading for f in back.fates_b] == ["new", "new"]
    assert back.fates_b[0].text == "new: no cluster of A gave it 20% of its documents (largest share 16%, from 0)"


def test_a_cluster_that_sheds_members_is_reshaped_not_kept() -> None:
    a, b = labels_from_table([[7, 1, 1, 1], [0, 9, 0, 0], [0, 0, 9, 0], [0, 0, 0, 9]])
    fate = compare(a, b).fates_a[0]
    assert fate.reading == "reshaped"
    assert fate.text == "mostly went to 0 (70% of its documents; Jaccard 0.70)"


def test_only_shared_documents_are_compared() -> None:
    ids_a = [f"d{i}" for i in range(30)]
    labels_a = blocks(10, 10, 10)
    ids_b = [f"d{i}" for i in range(39, 9, -1)]  # d39 ... d10, in another order
    labels_b = [0 if int(d[1:]) < 25 else 1 for d in ids_b]
    c = compare_labelings(ids_a, labels_a, ids_b, labels_b, name_a="k3", name_b="k2")
    assert (c.shared, c.only_a, c.only_b) == (20, 10, 10)
    assert c.contingency.sum() == 20
    assert c.contingency.tolist() == [[0, 0], [10, 0], [5, 5]]
    assert c.fates_a[0].text == "none of its documents are in k2"
    # Independent computation on the shared documents only.
    of_b = dict(zip(ids_b, labels_b, strict=True))
    shared = [(la, of_b[d]) for d, la in zip(ids_a, labels_a, strict=True) if d in of_b]
    sa, sb = [x for x, _ in shared], [y for _, y in shared]
    assert c.ari == pytest.approx(adjusted_rand_score(sa, sb))
    assert c.nmi == pytest.approx(normalized_mutual_info_score(sa, sb))


def test_moved_documents_carry_their_clusters_and_headlines() -> None:
    c = compare_labelings(["x", "y", "z", "w"], [0, 0, 0, 1], ["x", "y", "z", "w"], [0, 0, 1, 1],
                          headlines_a={0: "Seeds", 1: "Bikes"}, headlines_b={0: "Seeds!", 1: "Bikes!"})
    assert [(m.doc_id, m.cluster_a, m.headline_a, m.cluster_b, m.headline_b) for m in c.moved] == [
        ("z", 0, "Seeds", 1, "Bikes!")
    ]


def test_a_repeated_id_is_refused() -> None:
    with pytest.raises(PilewiseError) as err:
        compare_labelings(["a", "b", "a"], [0, 1, 0], ["a", "b"], [0, 1], name_a="k3")
    assert str(err.value) == ("run k3 repeats doc_id 'a', so its documents cannot be matched with another run's; "
                              "re-run with an --id-column that holds unique ids")


def test_runs_without_shared_documents_are_refused() -> None:
    with pytest.raises(PilewiseError) as err:
        compare_labelings(["a", "b"], [0, 1], ["c", "d"], [0, 1], name_a="k2", name_b="other")
    assert str(err.value) == ("runs k2 and other share no document id (2 and 2 documents); "
                              "compare two runs of the same collection")


@settings(max_examples=60, deadline=None)
@given(st.lists(st.tuples(st.integers(0, 4), st.integers(0, 5)), min_size=1, max_size=80))
def test_figures_hold_together_on_random_labelings(pairs: list[tuple[int, int]]) -> None:
    a = [x for x, _ in pairs]
    b = [y for _, y in pairs]
    c = compare(a, b)
    assert c.contingency.sum() == c.shared == len(pairs)
    assert c.ari == pytest.approx(adjusted_rand_score(a, b))
    # Moved documents are those off the maximum one-to-one matching.
    rows, cols = linear_sum_assignment(c.contingency, maximize=True)
    assert len(c.moved) == len(pairs) - int(c.contingency[rows, cols].sum())
    assert {f.reading for f in c.fates_a} <= set(READINGS_A)
    assert {f.reading for f in c.fates_b} <= set(READINGS_B)
    # Where B's clusters came from is what becomes of them when the runs swap places.
    swapped = compare(b, a)
    assert [f.partners for f in c.fates_b] == [f.partners for f in swapped.fates_a]
    for fate in c.fates_a:
        size = c.contingency[c.clusters_a.index(fate.cluster)].sum()
        assert all(shared / size >= 0.2 for _, shared, _ in fate.partners)


# --- the JSON document ------------------------------------------------------------------------------------


def test_comparison_document_holds_every_figure() -> None:
    a, b = labels_from_table([[12, 3], [0, 30]])
    c = compare(a, b)
    doc = json.loads(json.dumps(comparison_document(c)))
    assert doc["runs"] == {"a": "A", "b": "B"}
    assert doc["documents"] == {"shared": 45, "only_a": 0, "only_b": 0}
    assert doc["agreement"]["adjusted_rand_index"] == pytest.approx(c.ari, abs=1e-6)
    assert set(doc["agreement"]) == {"adjusted_rand_index", "nmi_arithmetic", "v_measure", "homogeneity",
                                     "completeness"}
    assert doc["contingency"]["rows"][0] == {"cluster": 0, "headline": "", "size": 15, "counts": [12, 3],
                                             "shares": [0.8, 0.2]}
    assert doc["fates_a"][0]["partners"] == [
        {"cluster": 0, "shared": 12, "share": 0.8, "jaccard": 0.8},
        {"cluster": 1, "shared": 3, "share": 0.2, "jaccard": round(3 / 45, 4)},
    ]
    assert doc["fates_a"][0]["reading"] == "split"
    assert doc["moved"]["total"] == doc["moved"]["listed"] == 3


def test_moved_documents_are_capped_in_the_document_with_the_total_recorded() -> None:
    n = 12_000
    c = compare(blocks(n // 2, n // 2), [i % 2 for i in range(n)])
    assert len(c.moved) == n // 2
    moved = comparison_document(c)["moved"]
    assert moved["total"] == n // 2
    assert moved["listed"] == len(moved["documents"]) == MOVED_LISTED


# --- run folders written by the command line -----------------------------------------------------------------


@pytest.fixture(scope="module")
def site(tmp_path_factory: pytest.TempPathFactory) -> Path:
    base = tmp_path_factory.mktemp("compare")
    folder = base / "notes"
    write_topic_folder(folder)
    out = base / "site"
    for k in ("3", "5"):
        result = invoke("run", str(folder), "--k", k, "--out", str(out), "--quiet")
        assert result.exit_code == 0, result.output
    return out


def _read_run(folder: Path) -> tuple[dict[str, int], dict[int, str]]:
    with (folder / "assignments.csv").open(encoding="utf-8", newline="") as handle:
        labels = {row["doc_id"]: int(row["cluster"]) for row in csv.DictReader(handle)}
    clusters = read_clusters(folder)
    return labels, {c["id"]: c["headline"] for c in clusters["clusters"]}


def test_compare_run_folders_written_by_the_cli(site: Path) -> None:
    c = compare_run_folders(site / "runs" / "k3", site / "runs" / "k5")
    labels_a, heads_a = _read_run(site / "runs" / "k3")
    labels_b, heads_b = _read_run(site / "runs" / "k5")
    assert (c.run_a, c.run_b) == ("k3", "k5")
    assert (c.shared, c.only_a, c.only_b) == (60, 0, 0)
    assert c.clusters_a == (0, 1, 2) and c.clusters_b == (0, 1, 2, 3, 4)
    ids = sorted(labels_a)
    a = [labels_a[d] for d in ids]
    b = [labels_b[d] for d in ids]
    assert c.ari == pytest.approx(adjusted_rand_score(a, b))
    assert c.nmi == pytest.approx(normalized_mutual_info_score(a, b, average_method="arithmetic"))
    assert c.headlines_a == tuple(heads_a[i] for i in range(3))
    assert c.notes == ("both runs read the same input (equal fingerprints)",)
    for m in c.moved:
        assert (m.cluster_a, m.cluster_b) == (labels_a[m.doc_id], labels_b[m.doc_id])
        assert (m.headline_a, m.headline_b) == (heads_a[m.cluster_a], heads_b[m.cluster_b])
    # Five clusters over three well-separated topics: every cluster of k5 lies inside one of k3, so none
    # of them can read as merged from several.
    assert c.homogeneity == pytest.approx(1.0)
    assert {f.reading for f in c.fates_b} <= {"kept", "formed by a split of", "reshaped"}
    doc = comparison_document(c)
    assert doc["input"]["same_input"] is True
    json.dumps(doc)


def test_a_run_folder_compared_with_itself(site: Path) -> None:
    c = compare_run_folders(site / "runs" / "k5", site / "runs" / "k5")
    assert c.ari == pytest.approx(1.0)
    assert {f.reading for f in c.fates_a} == {"kept"} and c.moved == ()
    assert c.run_a == c.run_b == str(site / "runs" / "k5")  # equal run names give way to the folder paths


def test_a_site_folder_instead_of_a_run_folder_is_refused_with_its_runs(site: Path) -> None:
    with pytest.raises(PilewiseError) as err:
        compare_run_folders(site, site / "runs" / "k3")
    runs = site / "runs"
    assert str(err.value) == (
        f"{site} is not a pilewise run folder (no assignments.csv, clusters.json, manifest.json); "
        f"it looks like a site; pass one of its runs: {runs / 'k3'}, {runs / 'k5'}"
    )


def test_a_missing_run_folder_is_refused(tmp_path: Path) -> None:
    with pytest.raises(PilewiseError) as err:
        compare_run_folders(tmp_path / "nowhere", tmp_path)
    assert str(err.value) == f"run folder {tmp_path / 'nowhere'} not found; pass a run folder such as OUT/runs/k5"
