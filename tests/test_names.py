"""Names that people give carry over to matching clusters of later runs, and changes are flagged."""

from __future__ import annotations

import csv
import json
import shutil
from collections.abc import Iterator
from pathlib import Path

import numpy as np
import pytest

from helpers import invoke, read_clusters, read_csv
from pilewise.describe.names import (
    Naming,
    OldNames,
    carry_names,
    earlier_run_problems,
    find_old_names,
    read_names_csv,
    suggested_name,
)


def _run(folder: Path, out: Path, *extra: str) -> None:
    result = invoke("run", str(folder), "--out", str(out), "--quiet", *extra)
    assert result.exit_code == 0, result.stderr


def _members_by_topic(run: Path) -> dict[str, str]:
    """topic (file name prefix) -> cluster name shown in assignments.csv."""
    found: dict[str, set[str]] = {}
    for row in csv.DictReader((run / "assignments.csv").open(encoding="utf-8")):
        found.setdefault(row["doc_id"].split("-")[0], set()).add(row["cluster_name"])
    assert all(len(names) == 1 for names in found.values())
    return {topic: names.pop() for topic, names in found.items()}


def _name_clusters(run: Path, names_by_topic: dict[str, str]) -> None:
    """Edit names.csv as a person would: a name and a note per cluster, chosen by its topic."""
    topic_of_cluster = {}
    for row in csv.DictReader((run / "assignments.csv").open(encoding="utf-8")):
        topic_of_cluster[row["cluster"]] = row["doc_id"].split("-")[0]
    rows = read_csv(run / "names.csv")
    for row in rows:
        row["name"] = names_by_topic[topic_of_cluster[row["cluster"]]]
        row["note"] = "checked by hand"
    with (run / "names.csv").open("w", encoding="utf-8", newline="") as handle:
        writer = csv.DictWriter(handle, fieldnames=list(rows[0]))
        writer.writeheader()
        writer.writerows(rows)


def test_names_carry_over_exactly_when_rerun_with_another_seed(topic_folder: Path, tmp_path: Path) -> None:
    out = tmp_path / "site"
    _run(topic_folder, out, "--k", "3", "--seed", "1", "--name", "first")
    given = {"garden": "Garden work", "bicycle": "Bike repairs", "kitchen": "Baking"}
    _name_clusters(out / "runs" / "first", given)
    _run(topic_folder, out, "--k", "3", "--seed", "2", "--name", "second")
    assert _members_by_topic(out / "runs" / "second") == given
    clusters = read_clusters(out / "runs" / "second")
    assert clusters["names_from_run"] == "first" and clusters["names_not_carried"] == []
    for record in clusters["clusters"]:
        assert record["name_flag"] == "" and record["name_note"] == "checked by hand"
        assert record["name_origin"].startswith("carried from cluster")
        assert "Jaccard of members 1.00" in record["name_origin"]
    page = (out / "runs" / "second" / "index.html").read_text(encoding="utf-8")
    assert all(f"<h2>{name}</h2>" in page for name in given.values())
    document_page = (out / "runs" / "second" / "docs" / "d0000000.html").read_text(encoding="utf-8")
    assert any(f": {name}</a>" in document_page for name in given.values())


def test_a_named_cluster_that_splits_is_flagged(topic_folder: Path, tmp_path: Path) -> None:
    out = tmp_path / "site"
    _run(topic_folder, out, "--k", "2", "--method", "ward", "--name", "coarse")
    by_topic = _members_by_topic(out / "runs" / "coarse")
    merged_topics = [t for t in by_topic if list(by_topic.values()).count(by_topic[t]) == 2]
    assert len(merged_topics) == 2  # two of the three topics share the bigger cluster at k=2
    names = {t: ("Two topics" if t in merged_topics else "One topic") for t in by_topic}
    _name_clusters(out / "runs" / "coarse", names)
    _run(topic_folder, out, "--k", "3", "--method", "ward", "--name", "fine")
    clusters = read_clusters(out / "runs" / "fine")
    flagged = [(r["name"], r["name_flag"]) for r in clusters["clusters"] if r["name"]]
    assert ("Two topics", "split") in flagged and ("One topic", "") in flagged


def test_names_carry_over_when_documents_are_added(topic_folder: Path, tmp_path: Path) -> None:
    # The same folder, re-run after new files arrived: another fingerprint, the same source.
    out = tmp_path / "site"
    grown = tmp_path / "grown"
    shutil.copytree(topic_folder, grown)
    _run(grown, out, "--k", "3", "--name", "before")
    given = {"garden": "Garden work", "bicycle": "Bike repairs", "kitchen": "Baking"}
    _name_clusters(out / "runs" / "before", given)
    for path in sorted(topic_folder.glob("*-0[0-4].txt")):  # five more notes per topic, new ids
        (grown / path.name.replace(".txt", "-more.txt")).write_text(path.read_text(encoding="utf-8") + " again")
    _run(grown, out, "--k", "3", "--name", "after")
    assert _members_by_topic(out / "runs" / "after") == given


def test_suggested_names_skip_words_already_in_a_chosen_phrase() -> None:
    # common practice for readable labels: no "password reset / password / reset"
    assert suggested_name(["password reset", "password", "reset", "link", "email"]) == "password reset / link / email"


# --- carry_names on planted memberships (docs/outputs.md, "names.csv and names that last") -----------------
# Documents are planted in clusters by hand, so every Jaccard similarity below is a ratio of set sizes
# counted in the comment beside it, and every centroid cosine is recomputed with numpy.

SUGGESTED = "suggested from the top terms"


def _ids(prefix: str, count: int, start: int = 0) -> list[str]:
    return [f"{prefix}{i}" for i in range(start, start + count)]


def _labels(doc_ids: list[str], clusters: list[list[str]]) -> np.ndarray:
    cluster_of = {d: c for c, members in enumerate(clusters) for d in members}
    return np.array([cluster_of[d] for d in doc_ids])


def _carry(old: OldNames | None, clusters: list[list[str]], space: np.ndarray | None = None) -> Naming:
    doc_ids = [d for members in clusters for d in members]
    space = np.eye(len(doc_ids)) if space is None else space
    suggestions = [f"terms {c}" for c in range(len(clusters))]
    return carry_names(old, doc_ids, _labels(doc_ids, clusters), space, np.arange(len(doc_ids)), suggestions)


def test_nothing_to_carry_gives_every_cluster_its_suggested_name() -> None:
    clusters = [_ids("d", 3), _ids("d", 3, 3)]
    for old in (None, OldNames("earlier", {}, {0: frozenset(clusters[0])})):  # no run, or a run nobody named
        naming = _carry(old, clusters)
        assert naming.source_run == "" and naming.not_carried == ()
        assert [(c.cluster_id, c.name, c.shown, c.origin, c.flag) for c in naming.clusters] == [
            (0, "", "terms 0", SUGGESTED, ""), (1, "", "terms 1", SUGGESTED, "")]


def test_a_name_carries_at_jaccard_one_half_and_not_below() -> None:
    d = _ids("d", 10)
    old = OldNames("earlier", {0: ("Garden", "by hand")}, {0: frozenset(d[:3]), 1: frozenset(d[3:])})
    # new cluster 0 = d0..d5: shared with old cluster 0 = 3, union = 6, Jaccard 0.5 (the limit)
    naming = _carry(old, [d[:6], d[6:]])
    first = naming.clusters[0]
    assert (first.name, first.note, first.flag) == ("Garden", "by hand", "")
    assert first.origin == "carried from cluster 0 of earlier (Jaccard of members 0.50)"
    assert naming.clusters[1].name == "" and naming.not_carried == () and naming.source_run == "earlier"
    # new cluster 0 = d0 d1 d3 d4 d5 d6: shared 2, union 7, Jaccard 0.29; cluster 1 = d2 d7 d8 d9: 1 / 6;
    # every new cluster holds only old documents, so no centroid fallback either
    naming = _carry(old, [[d[0], d[1], *d[3:7]], [d[2], *d[7:]]])
    assert [c.name for c in naming.clusters] == ["", ""]
    assert naming.not_carried == ("Garden (cluster 0 of earlier; best member overlap 0.29)",)


def test_two_named_clusters_in_one_new_cluster_are_flagged_merged() -> None:
    d = _ids("d", 10)
    old = OldNames("earlier", {0: ("Soil", ""), 1: ("Compost", "")},
                   {0: frozenset(d[:4]), 1: frozenset(d[4:8]), 2: frozenset(d[8:])})
    # new cluster 0 = d0..d7: Jaccard 4/8 with each old cluster; the tie keeps the lower old cluster first
    naming = _carry(old, [d[:8], d[8:]])
    merged = naming.clusters[0]
    assert (merged.name, merged.flag) == ("Soil", "merged")
    assert merged.origin == ("carried from cluster 0 of earlier (Jaccard of members 0.50); "
                             "it now also holds most of: Compost")
    assert naming.clusters[1].name == "" and naming.not_carried == ()


def test_a_named_cluster_spread_over_two_clusters_is_flagged_split() -> None:
    d = _ids("d", 14)
    old = OldNames("earlier", {0: ("Tools", "")}, {0: frozenset(d[:10]), 1: frozenset(d[10:])})
    # new cluster 0 = d0..d5 (Jaccard 6/10), cluster 1 = d6..d13 holds 4 of the 10 (40%, above the 20% mark)
    naming = _carry(old, [d[:6], d[6:]])
    split = naming.clusters[0]
    assert (split.name, split.flag) == ("Tools", "split")
    assert split.origin == ("carried from cluster 0 of earlier (Jaccard of members 0.60); "
                            "part of the old cluster went to cluster 1")


def _fallback_case(new_row: list[float]) -> tuple[OldNames, list[list[str]], np.ndarray]:
    """Old cluster 0 = d0..d5, spread thinly over three new clusters; new cluster 0 is mostly new documents."""
    d, n = _ids("d", 14), _ids("n", 10)
    old = OldNames("earlier", {0: ("Watering", "")}, {0: frozenset(d[:6]), 1: frozenset(d[6:])})
    clusters = [[d[0], d[1], *n], [d[2], d[3], *d[6:10]], [d[4], d[5], *d[10:]]]
    rows = {**{doc: [10.0, 0.0, 0.0] for doc in d[:6]}, **{doc: [0.0, 0.0, 10.0] for doc in d[6:]},
            **{doc: new_row for doc in n}}
    space = np.array([rows[doc] for members in clusters for doc in members])
    return old, clusters, space


def _cosine(a: np.ndarray, b: np.ndarray) -> float:
    return float(a @ b / (np.linalg.norm(a) * np.linalg.norm(b)))


def test_a_cluster_of_mostly_new_documents_takes_the_name_at_centroid_cosine_0_8() -> None:
    # Jaccard of old cluster 0 with the new clusters (on old documents): 2/6, 2/10, 2/10, all below 0.5.
    # New cluster 0 holds 2 old and 10 new documents, so its centroid is compared: old centroid (10, 0, 0),
    # new centroid (2 * (10, 0, 0) + 10 * (10, 9, 0)) / 12 = (10, 7.5, 0), a 4-3-5 triangle: cosine 4/5 = 0.8
    old, clusters, space = _fallback_case([10.0, 9.0, 0.0])
    assert _cosine(np.array([10.0, 0, 0]), space[:12].mean(axis=0)) == 0.8
    naming = _carry(old, clusters, space)
    carried = naming.clusters[0]
    assert carried.name == "Watering" and naming.not_carried == ()
    # it spreads over all three new clusters (2 of 6 = 33% in each), so the carried name is flagged split
    assert carried.origin == ("carried from cluster 0 of earlier (centroid cosine 0.80); "
                              "part of the old cluster went to cluster 1, 2")
    assert carried.flag == "split" and [c.name for c in naming.clusters[1:]] == ["", ""]


def test_a_centroid_below_0_8_does_not_carry_the_name() -> None:
    old, clusters, space = _fallback_case([10.0, 10.0, 0.0])
    assert _cosine(np.array([10.0, 0, 0]), space[:12].mean(axis=0)) == pytest.approx(0.768, abs=1e-3)
    naming = _carry(old, clusters, space)
    assert [c.name for c in naming.clusters] == ["", "", ""]
    assert naming.not_carried == ("Watering (cluster 0 of earlier; best member overlap 0.33)",)


def test_a_cluster_with_half_old_documents_is_left_to_the_member_overlap() -> None:
    # new cluster 0 = d0 d1 + 2 new documents: half old (not "mostly new"), so no centroid match, even
    # though its centroid points exactly at the old one
    d, n = _ids("d", 14), _ids("n", 2)
    old = OldNames("earlier", {0: ("Watering", "")}, {0: frozenset(d[:6]), 1: frozenset(d[6:])})
    clusters = [[d[0], d[1], *n], [d[2], d[3], *d[6:10]], [d[4], d[5], *d[10:]]]
    space = np.array([[1.0, 0.0] if doc in d[:6] or doc in n else [0.0, 1.0] for m in clusters for doc in m])
    naming = _carry(old, clusters, space)
    assert [c.name for c in naming.clusters] == ["", "", ""]
    assert naming.not_carried == ("Watering (cluster 0 of earlier; best member overlap 0.33)",)


def test_an_old_cluster_whose_documents_are_all_gone_is_not_carried() -> None:
    # none of its documents is in the new run: Jaccard 0 and no centroid to compare
    d = _ids("d", 6)
    old = OldNames("earlier", {0: ("Gone", "")}, {0: frozenset(_ids("x", 3)), 1: frozenset(d)})
    naming = _carry(old, [d[:3], d[3:]])
    assert naming.not_carried == ("Gone (cluster 0 of earlier; best member overlap 0.00)",)


# --- names.csv and assignments.csv of earlier runs that cannot be used are skipped with their reason ------


def _earlier_run(runs: Path, names: bytes, assignments: str, documents: int) -> Path:
    """runs/first with a manifest of `documents` documents, the given names.csv bytes and assignments.csv."""
    folder = runs / "first"
    folder.mkdir(parents=True)
    manifest = {"input": {"fingerprint": "same", "documents": documents}, "parameters": {"source": "notes"}}
    (folder / "manifest.json").write_text(json.dumps(manifest), encoding="utf-8")
    # read_run needs clusters.json too; without it the folder is a damaged run the root index lists
    (folder / "clusters.json").write_text(json.dumps({"k": 2, "clusters": []}), encoding="utf-8")
    (folder / "names.csv").write_bytes(names)
    (folder / "assignments.csv").write_text(assignments, encoding="utf-8", newline="")
    return folder


NAMED = b"cluster,suggested_name,name,note\n0,soil / compost,Garden,\n1,chain / saddle,,\n"
ASSIGNED = "doc_id,cluster\na,0\nb,0\nc,1\n"


def test_names_csv_without_name_column_is_skipped_with_its_reason(tmp_path: Path) -> None:
    runs = tmp_path / "runs"
    folder = _earlier_run(runs, b"cluster,label\n0,Garden\n", ASSIGNED, 3)
    assert read_names_csv(folder / "names.csv") == {}
    assert earlier_run_problems(runs) == [
        "runs/first/names.csv is skipped for carrying names over: it has no cluster and name columns"]
    assert find_old_names(runs, source="notes", fingerprint="same") is None


def test_names_csv_saved_as_cp1252_is_skipped_with_its_reason(tmp_path: Path) -> None:
    # Python codecs docs: cp1252 writes "é" as the single byte 0xE9, which is not valid UTF-8
    runs = tmp_path / "runs"
    _earlier_run(runs, "cluster,name\n0,Café\n".encode("cp1252"), ASSIGNED, 3)
    assert earlier_run_problems(runs) == [
        "runs/first/names.csv is skipped for carrying names over: it is not UTF-8 (saved from a spreadsheet?); "
        "save it again as CSV UTF-8"]
    assert find_old_names(runs, source="notes", fingerprint="same") is None


@pytest.fixture
def small_csv_fields() -> Iterator[int]:
    """A csv field size limit of 1,000 for one test (table reading raises the process-wide limit to 2**31 - 1)."""
    before = csv.field_size_limit(1_000)
    yield 1_000
    csv.field_size_limit(before)


def test_csv_files_the_csv_module_refuses_are_skipped_with_their_reason(tmp_path: Path, small_csv_fields: int) -> None:
    # Python csv module docs: a field longer than csv.field_size_limit() raises csv.Error
    limit = small_csv_fields
    runs = tmp_path / "names" / "runs"
    _earlier_run(runs, f"cluster,name\n0,{'x' * (limit + 1)}\n".encode(), ASSIGNED, 3)
    assert earlier_run_problems(runs) == [
        f"runs/first/names.csv is skipped for carrying names over: cannot read it "
        f"(field larger than field limit ({limit}))"]
    runs = tmp_path / "assignments" / "runs"
    _earlier_run(runs, NAMED, f"doc_id,cluster\n{'x' * (limit + 1)},0\n", 1)
    assert earlier_run_problems(runs) == [
        f"runs/first/assignments.csv is skipped for carrying names over: it cannot be read "
        f"(field larger than field limit ({limit}))"]
    assert find_old_names(runs, source="notes", fingerprint="same") is None


def test_rows_without_a_cluster_number_make_the_run_skipped_with_their_line(tmp_path: Path) -> None:
    # pilewise writes a cluster number on every row of assignments.csv; a short row or a row whose cluster
    # is not a number means the file was edited or cut, so the run is not used for carrying names over
    runs = tmp_path / "runs"
    _earlier_run(runs, NAMED, ASSIGNED + "d\ne,x\n", 5)
    assert earlier_run_problems(runs) == [
        "runs/first/assignments.csv is skipped for carrying names over: it has no cluster number on line 5"]
    assert find_old_names(runs, source="notes", fingerprint="other") is None
