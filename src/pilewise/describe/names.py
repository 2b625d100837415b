"""Cluster names that people give and that last across runs.

Every run writes names.csv (cluster, suggested_name, name, note). When a later run reads the same
collection (same source or same input fingerprint) into the same site folder, the names a person
wrote into the most recently edited names.csv carry over to the new clusters that match the old
ones: by Jaccard similarity of members on the documents both runs hold, or, for a new cluster made
mostly of documents the old run did not have, by the cosine similarity of centroids.
"""

from __future__ import annotations

import csv
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import scipy.sparse as sp
from sklearn.preprocessing import normalize

from pilewise.csvcells import spreadsheet_row
from pilewise.describe.runfolders import (
    NAME_COLUMNS,
    Assignments,
    DamagedRun,
    FinishedRun,
    finished_folders,
    read_assignments,
    read_names,
    read_run,
)
from pilewise.model import TermScore

JACCARD_CARRY = 0.5  # a name carries over to the new cluster whose members overlap the old one's this much
CENTROID_CARRY = 0.8  # cosine of centroids, for new clusters that hold mostly new documents
SHARED_MIN = 0.5  # below this share of documents the old run also had, the centroid fallback is used
# A suggested name uses only terms that occur in at least this share of the cluster's documents (weighted by
# copies): a term found in 6% of a cluster names a corner of it, not the cluster. Our choice, see docs/method.md.
NAME_MIN_SHARE = 0.2
MIXED_NAME_TERMS = 2  # terms shown after "mixed:" for a cluster without a common theme


@dataclass(frozen=True)
class OldNames:
    """Names a person gave in an earlier run, with that run's members."""

    run: str
    names: dict[int, tuple[str, str]]  # cluster -> (name, note)
    members: dict[int, frozenset[str]]  # cluster -> doc_ids


@dataclass(frozen=True)
class ClusterName:
    """The name shown for one cluster and where it came from."""

    cluster_id: int
    suggested: str
    name: str  # the person's name, or "" when none carried over
    note: str
    origin: str  # plain words: where the name comes from
    flag: str  # "", "split" or "merged": the name now covers a changed cluster

    @property
    def shown(self) -> str:
        return self.name or self.suggested


@dataclass(frozen=True)
class Naming:
    """Names of every cluster of a run, and the old names that did not carry over."""

    clusters: tuple[ClusterName, ...]
    source_run: str
    not_carried: tuple[str, ...]


def suggested_name(terms: Sequence[str], count: int = 3) -> str:
    """A name built from the top discriminating terms, skipping words already inside a chosen phrase."""
    chosen: list[str] = []
    for term in terms:
        words = set(term.split())
        if any(words <= set(c.split()) or set(c.split()) <= words for c in chosen):
            continue
        chosen.append(term)
        if len(chosen) == count:
            break
    return " / ".join(chosen)


@dataclass(frozen=True)
class SuggestedName:
    """A suggested name and its terms, each with its document share in the cluster."""

    text: str
    terms: tuple[tuple[str, float], ...]


def suggested_name_from(
    terms: Sequence[TermScore], *, mixed: bool = False, count: int = 3, min_share: float = NAME_MIN_SHARE
) -> SuggestedName:
    """A name from the best distinguishing terms that occur in at least `min_share` of the members.

    Terms are taken in the order given (chi-square, best first), skipping words already inside a chosen
    phrase. A cluster without a common theme (`mixed`) gets "mixed: a, b" from at most two such terms, or
    "(mixed)"; a cluster with no term that common gets "(no term in 20% of members)".
    """
    common = [t for t in terms if t.share_in >= min_share]
    chosen = _distinct_terms(common, MIXED_NAME_TERMS if mixed else count)
    pairs = tuple((t.term, round(t.share_in, 4)) for t in chosen)
    if mixed:
        return SuggestedName("mixed: " + ", ".join(t.term for t in chosen) if chosen else "(mixed)", pairs)
    if not chosen:
        return SuggestedName(f"(no term in {min_share:.0%} of members)", ())
    return SuggestedName(" / ".join(t.term for t in chosen), pairs)


def _distinct_terms(terms: Sequence[TermScore], count: int) -> list[TermScore]:
    """The first `count` terms, skipping one whose words hold or are held by a chosen term's words."""
    chosen: list[TermScore] = []
    for term in terms:
        words = set(term.term.split())
        if any(words <= set(c.term.split()) or set(c.term.split()) <= words for c in chosen):
            continue
        chosen.append(term)
        if len(chosen) == count:
            break
    return chosen


def read_names_csv(path: Path) -> dict[int, tuple[str, str]]:
    """The clusters of a names.csv that a person named (non-empty name), with their notes; {} if unreadable."""
    return read_names(path)[0]


def names_csv_problem(path: Path) -> str | None:
    """Why a names.csv cannot be read (not UTF-8, no cluster/name columns, ...), or None when it can."""
    return read_names(path)[1]


def find_old_names(runs_folder: Path, *, source: str, fingerprint: str) -> OldNames | None:
    """The most recently edited names.csv with names, among runs of the same collection.

    Runs whose manifest.json, clusters.json, names.csv or assignments.csv cannot be read are skipped
    (never fatal); `earlier_run_problems` says which and why.
    """
    candidates: list[tuple[float, str, FinishedRun, dict[int, tuple[str, str]]]] = []
    for folder in finished_folders(runs_folder):
        names_path = folder / "names.csv"
        if not names_path.is_file():
            continue
        try:
            run = read_run(folder)
        except DamagedRun:
            continue
        same = run.fingerprint == fingerprint or run.source == source
        names = read_names_csv(names_path) if same else {}
        if names:
            candidates.append((names_path.stat().st_mtime, folder.name, run, names))
    for _, _, run, names in sorted(candidates, key=lambda item: (item[0], item[1]), reverse=True):
        try:
            members = _members(read_assignments(run))
        except DamagedRun:
            continue
        return OldNames(run.folder.name, names, members)
    return None


def earlier_run_problems(runs_folder: Path) -> list[str]:
    """One line per earlier run whose files name carry-over cannot read; those runs are skipped."""
    problems: list[str] = []
    for folder in finished_folders(runs_folder):
        names_path = folder / "names.csv"
        where = f"{runs_folder.name}/{folder.name}"
        try:
            run = read_run(folder)
        except DamagedRun:
            continue  # the root index names it (its list and comparisons skip it too)
        problem = names_csv_problem(names_path) if names_path.is_file() else None
        if problem is not None:
            problems.append(f"{where}/names.csv is skipped for carrying names over: {problem}")
        elif names_path.is_file() and read_names_csv(names_path):
            try:
                read_assignments(run)
            except DamagedRun as err:
                problems.append(f"{where}/{err.path.name} is skipped for carrying names over: it {err.problem}")
    return problems


def _members(assignments: Assignments) -> dict[int, frozenset[str]]:
    """doc_ids of every cluster."""
    members: dict[int, set[str]] = {}
    for doc_id, cluster in zip(assignments.ids, assignments.labels, strict=True):
        members.setdefault(cluster, set()).add(doc_id)
    return {c: frozenset(ids) for c, ids in members.items()}


def carry_names(
    old: OldNames | None,
    doc_ids: Sequence[str],
    labels: np.ndarray,
    space: np.ndarray | sp.csr_matrix,
    row_of_doc: np.ndarray,
    suggestions: Sequence[str],
) -> Naming:
    """Give each new cluster an old name when it matches the old named cluster.

    Parameters
    ----------
    old : OldNames or None
        Names from an earlier run; None gives every cluster its suggested name only.
    doc_ids : sequence of str, length n_docs
    labels : ndarray of int, shape (n_docs,)
        New cluster of every document.
    space : clustering space, one row per distinct text
    row_of_doc : ndarray of int, shape (n_docs,)
        Row of `space` for every document.
    suggestions : sequence of str, length k
    """
    k = len(suggestions)
    if old is None or not old.names:
        return Naming(tuple(ClusterName(c, suggestions[c], "", "", "suggested from the top terms", "")
                            for c in range(k)), "", ())
    new_members = [set() for _ in range(k)]  # type: list[set[str]]
    for doc_id, label in zip(doc_ids, labels, strict=True):
        new_members[int(label)].add(doc_id)
    old_docs = frozenset().union(*old.members.values()) if old.members else frozenset()
    index_of = {d: i for i, d in enumerate(doc_ids)}
    # best new cluster for every old named cluster, by Jaccard on the documents both runs hold
    matches: dict[int, list[tuple[int, float, str]]] = {}  # new cluster -> [(old cluster, score, how)]
    not_carried: list[str] = []
    spread: dict[int, list[int]] = {}  # old cluster -> new clusters holding >= 20% of its shared members
    for o, (name, _) in sorted(old.names.items()):
        members = old.members.get(o, frozenset())
        shared_new = [m & old_docs for m in new_members]
        scores = [len(members & m) / len(members | m) if members | m else 0.0 for m in shared_new]
        best = int(np.argmax(scores))
        kept = set(members) & set(doc_ids)
        spread[o] = [c for c in range(k) if kept and len(kept & new_members[c]) >= 0.2 * len(kept)]
        if scores[best] >= JACCARD_CARRY:
            matches.setdefault(best, []).append((o, scores[best], "members"))
            continue
        centroid_match = _centroid_match(kept, index_of, row_of_doc, space, new_members, old_docs)
        if centroid_match is not None:
            c, cosine = centroid_match
            matches.setdefault(c, []).append((o, cosine, "centroid"))
        else:
            not_carried.append(f"{name} (cluster {o} of {old.run}; best member overlap {scores[best]:.2f})")
    clusters = []
    for c in range(k):
        found = sorted(matches.get(c, []), key=lambda item: -item[1])
        if not found:
            clusters.append(ClusterName(c, suggestions[c], "", "", "suggested from the top terms", ""))
            continue
        o, score, how = found[0]
        name, note = old.names[o]
        measure = f"Jaccard of members {score:.2f}" if how == "members" else f"centroid cosine {score:.2f}"
        origin = f"carried from cluster {o} of {old.run} ({measure})"
        flag = ""
        if len(found) > 1:
            flag = "merged"
            others = ", ".join(old.names[x][0] for x, _, _ in found[1:])
            origin += f"; it now also holds most of: {others}"
        elif len(spread.get(o, [])) > 1:
            flag = "split"
            parts = ", ".join(str(x) for x in spread[o] if x != c)
            origin += f"; part of the old cluster went to cluster {parts}"
        clusters.append(ClusterName(c, suggestions[c], name, note, origin, flag))
    return Naming(tuple(clusters), old.run, tuple(not_carried))


def _centroid_match(
    kept: set[str], index_of: dict[str, int], row_of_doc: np.ndarray, space: np.ndarray | sp.csr_matrix,
    new_members: list[set[str]], old_docs: frozenset[str],
) -> tuple[int, float] | None:
    """For new clusters made mostly of documents the old run lacked: cosine of centroids in the new space."""
    if not kept:
        return None
    old_rows = row_of_doc[[index_of[d] for d in kept]]
    old_centroid = normalize(np.asarray(space[old_rows].mean(axis=0)).reshape(1, -1))
    best: tuple[int, float] | None = None
    for c, members in enumerate(new_members):
        if not members or len(members & old_docs) >= SHARED_MIN * len(members):
            continue  # mostly old documents: the member overlap already decided
        rows = row_of_doc[[index_of[d] for d in members]]
        centroid = normalize(np.asarray(space[rows].mean(axis=0)).reshape(1, -1))
        cosine = float((old_centroid @ centroid.T).ravel()[0])
        if cosine >= CENTROID_CARRY and (best is None or cosine > best[1]):
            best = (c, cosine)
    return best


def write_names_csv(path: Path, naming: Naming) -> None:
    """names.csv: cluster, suggested_name, name, note; a person edits the last two."""
    with path.open("w", encoding="utf-8", newline="") as handle:
        writer = csv.writer(handle, lineterminator="\n")
        writer.writerow(NAME_COLUMNS)
        for c in naming.clusters:
            writer.writerow(spreadsheet_row([c.cluster_id, c.suggested, c.name, c.note]))
