"""Comparison of two runs: agreement figures, what became of each cluster, and the documents that moved.

Runs are matched on the documents they share (equal ``doc_id``); documents found in only one run are
counted and left out of every figure.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

import numpy as np
from scipy.optimize import linear_sum_assignment
from sklearn.metrics import adjusted_rand_score, homogeneity_completeness_v_measure, normalized_mutual_info_score

from pilewise.describe.runfolders import Assignments, FinishedRun, open_run, read_assignments
from pilewise.errors import PilewiseError

# Thresholds of the readings (our choice; see cluster_fates).
SHARE_MIN = 0.2  # a cluster of the other run is a partner when it holds this share of the members
KEEP_MIN = 0.8  # "kept": one partner holds this share of the members and draws this share of its own from them
MOVED_LISTED = 5_000  # moved documents listed in compare.json; the total is always recorded
MOVED_PER_PAIR = 10  # documents shown for each pair of clusters they moved between; every pair is counted

READINGS_A = ("kept", "split", "merged", "split and merged", "dissolved", "reshaped", "no shared documents")
"""Readings of a cluster of run A: what became of it in run B."""
READINGS_B = ("kept", "merged from", "formed by a split of", "merged from parts of", "new", "reshaped",
              "no shared documents")
"""Readings of a cluster of run B: where it came from in run A (the same tests on the transposed table)."""


@dataclass(frozen=True)
class ClusterFate:
    """What became of one cluster of run A in run B (or where one cluster of B came from in A).

    ``partners`` are the clusters of the other run holding at least SHARE_MIN of this cluster's shared
    members, as (cluster, shared documents, Jaccard of the two member sets over the shared documents),
    most shared documents first. ``text`` says the reading in plain words.
    """

    cluster: int
    reading: str
    partners: tuple[tuple[int, int, float], ...]
    text: str


@dataclass(frozen=True)
class MovedDoc:
    """A shared document whose cluster in B is not the matched partner of its cluster in A."""

    doc_id: str
    cluster_a: int
    headline_a: str
    cluster_b: int
    headline_b: str
    title: str = ""  # the title in run B (else A); "" when the runs record none
    row_b: int = -1  # its row in run B's assignments.csv (the number of its page in B)


@dataclass(frozen=True)
class Comparison:
    """Everything pilewise says about two clusterings of the same documents.

    ``contingency[i, j]`` counts the shared documents in cluster ``clusters_a[i]`` of A and
    ``clusters_b[j]`` of B; a cluster whose documents are all unshared has a row (column) of zeros.
    Homogeneity and completeness take A as the reference: homogeneity is 1 when every cluster of B
    holds documents of one cluster of A only. ``matching`` pairs clusters of A and B one to one
    (Hungarian assignment maximizing shared documents; pairs sharing nothing are left out).
    """

    run_a: str
    run_b: str
    shared: int
    only_a: int
    only_b: int
    contingency: np.ndarray
    clusters_a: tuple[int, ...]
    clusters_b: tuple[int, ...]
    ari: float
    nmi: float
    v_measure: float
    homogeneity: float
    completeness: float
    fates_a: tuple[ClusterFate, ...]
    fates_b: tuple[ClusterFate, ...]
    moved: tuple[MovedDoc, ...]
    matching: tuple[tuple[int, int], ...] = ()
    headlines_a: tuple[str, ...] = ()
    headlines_b: tuple[str, ...] = ()
    fingerprint_a: str = ""
    fingerprint_b: str = ""
    notes: tuple[str, ...] = ()


def compare_labelings(
    ids_a: Sequence[str],
    labels_a: Sequence[int] | np.ndarray,
    ids_b: Sequence[str],
    labels_b: Sequence[int] | np.ndarray,
    *,
    name_a: str = "A",
    name_b: str = "B",
    headlines_a: Mapping[int, str] | None = None,
    headlines_b: Mapping[int, str] | None = None,
    titles_a: Sequence[str] = (),
    titles_b: Sequence[str] = (),
) -> Comparison:
    """Compare two clusterings over the documents they share.

    Parameters
    ----------
    ids_a, labels_a : sequences of length n_a
        Document ids of run A (unique) and their cluster numbers.
    ids_b, labels_b : sequences of length n_b
        The same for run B.
    name_a, name_b : str, default "A" and "B"
        Run names used in the plain readings.
    headlines_a, headlines_b : mapping cluster -> headline, optional
        Headlines for the moved documents and the per-cluster listing; "" when absent.
    titles_a, titles_b : sequences of length n_a and n_b, optional
        Document titles, shown with the moved documents (B's first); "" when absent.

    Returns
    -------
    Comparison
        Agreement figures from scikit-learn: adjusted Rand index (Hubert & Arabie 1985), NMI with the
        arithmetic mean of the entropies (the normalization of Manning et al. 2008, §16.3), and
        homogeneity, completeness and V-measure (Rosenberg & Hirschberg 2007) with A as the reference.
        Cluster fates follow the transition types of MONIC (Spiliopoulou et al. 2006: survival, split,
        absorption, disappearance, emergence); see ``cluster_fates`` for the thresholds.

    Raises
    ------
    PilewiseError
        When a run repeats a document id, or the runs share no document.
    """
    if len(ids_a) != len(labels_a) or len(ids_b) != len(labels_b):
        raise ValueError("ids and labels must have the same length")
    index_a = _unique_index(ids_a, name_a)
    index_b = _unique_index(ids_b, name_b)
    lab_a = np.asarray(labels_a, dtype=np.int64)
    lab_b = np.asarray(labels_b, dtype=np.int64)
    shared_ids = [doc_id for doc_id in ids_a if doc_id in index_b]
    if not shared_ids:
        raise PilewiseError(
            f"runs {name_a} and {name_b} share no document id ({len(ids_a):,} and {len(ids_b):,} documents); "
            "compare two runs of the same collection"
        )
    rows_a = np.fromiter((index_a[d] for d in shared_ids), dtype=np.int64, count=len(shared_ids))
    rows_b = np.fromiter((index_b[d] for d in shared_ids), dtype=np.int64, count=len(shared_ids))
    shared_a = lab_a[rows_a]
    shared_b = lab_b[rows_b]

    clusters_a = np.unique(lab_a)
    clusters_b = np.unique(lab_b)
    pos_a = np.searchsorted(clusters_a, shared_a)
    pos_b = np.searchsorted(clusters_b, shared_b)
    table = np.zeros((clusters_a.size, clusters_b.size), dtype=np.int64)
    np.add.at(table, (pos_a, pos_b), 1)

    homogeneity, completeness, v_measure = homogeneity_completeness_v_measure(shared_a, shared_b)
    ids_a_t = tuple(int(c) for c in clusters_a)
    ids_b_t = tuple(int(c) for c in clusters_b)
    heads_a = tuple((headlines_a or {}).get(c, "") for c in ids_a_t)
    heads_b = tuple((headlines_b or {}).get(c, "") for c in ids_b_t)

    match_rows, match_cols = linear_sum_assignment(table, maximize=True)
    partner = np.full(clusters_a.size, -1, dtype=np.int64)
    matching: list[tuple[int, int]] = []
    for r, c in zip(match_rows, match_cols, strict=True):
        if table[r, c] > 0:
            partner[r] = c
            matching.append((ids_a_t[r], ids_b_t[c]))
    moved_mask = partner[pos_a] != pos_b
    moved_at = np.flatnonzero(moved_mask)
    # Grouped by cluster of A, then of B, in A's reading order within a group.
    moved_at = moved_at[np.lexsort((moved_at, pos_b[moved_at], pos_a[moved_at]))]
    moved = tuple(
        MovedDoc(shared_ids[i], ids_a_t[pos_a[i]], heads_a[pos_a[i]], ids_b_t[pos_b[i]], heads_b[pos_b[i]],
                 title=_title(titles_b, int(rows_b[i])) or _title(titles_a, int(rows_a[i])), row_b=int(rows_b[i]))
        for i in moved_at
    )
    n_shared = len(shared_ids)
    return Comparison(
        run_a=name_a,
        run_b=name_b,
        shared=n_shared,
        only_a=len(ids_a) - n_shared,
        only_b=len(ids_b) - n_shared,
        contingency=table,
        clusters_a=ids_a_t,
        clusters_b=ids_b_t,
        ari=float(adjusted_rand_score(shared_a, shared_b)),
        nmi=float(normalized_mutual_info_score(shared_a, shared_b, average_method="arithmetic")),
        v_measure=float(v_measure),
        homogeneity=float(homogeneity),
        completeness=float(completeness),
        fates_a=cluster_fates(table, ids_a_t, ids_b_t, own_run=name_a, other_run=name_b, forward=True),
        fates_b=cluster_fates(table.T, ids_b_t, ids_a_t, own_run=name_b, other_run=name_a, forward=False),
        moved=moved,
        matching=tuple(matching),
        headlines_a=heads_a,
        headlines_b=heads_b,
    )


def cluster_fates(
    table: np.ndarray, rows: Sequence[int], columns: Sequence[int], *, other_run: str, forward: bool,
    own_run: str = "this run",
) -> tuple[ClusterFate, ...]:
    """Read what became of each row cluster among the column clusters of a contingency table.

    For a row cluster R with n_R shared members, a column cluster C is a *partner* when it holds at
    least SHARE_MIN (20%) of R's members. Then, in order:

    - no partner: "dissolved" (forward) / "new" (backward);
    - two or more partners: "split" / "merged from";
    - the main partner (most shared members) draws at least SHARE_MIN of its own members from another
      row cluster: "merged" / "formed by a split of"; with the previous case, "split and merged" /
      "merged from parts of";
    - one partner holding at least KEEP_MIN (80%) of R's members and drawing at least KEEP_MIN of its
      own from R: "kept";
    - otherwise, one main partner without a clean match: "reshaped".

    Numbers in a reading are clusters of `other_run`, except the other row clusters sharing a partner,
    which are named with `own_run` ("k5's 2"): both runs number their clusters from 0.
    A row with no shared member reads "no shared documents". ``forward=True`` reads clusters of A
    against B (rows of the table); ``forward=False`` expects the transposed table and reads clusters
    of B against A. The readings are those of MONIC (Spiliopoulou, Ntoutsi, Theodoridis & Schult 2006,
    "MONIC: modeling and monitoring cluster transitions", KDD): survival, split, absorption,
    disappearance, emergence. The thresholds are our choice, in the range of common practice; the
    MONIC implementation in the R package clusTransition defaults to 0.7 for survival and 0.3 for a split.
    """
    table = np.asarray(table, dtype=np.int64)
    row_sizes = table.sum(axis=1)
    col_sizes = table.sum(axis=0)
    fates: list[ClusterFate] = []
    for r, row_cluster in enumerate(rows):
        n_r = int(row_sizes[r])
        if n_r == 0:
            fates.append(ClusterFate(int(row_cluster), "no shared documents", (),
                                     f"none of its documents are in {other_run}"))
            continue
        counts = table[r]
        order = sorted((int(c) for c in np.flatnonzero(counts)),
                       key=lambda c: (-int(counts[c]), -_jaccard(counts[c], n_r, col_sizes[c]), int(columns[c])))
        partner_cols = [c for c in order if counts[c] / n_r >= SHARE_MIN]
        partners = tuple((int(columns[c]), int(counts[c]), _jaccard(counts[c], n_r, col_sizes[c]))
                         for c in partner_cols)
        if not partner_cols:
            top = order[0]
            share, threshold = _percent(counts[top], n_r), f"{round(100 * SHARE_MIN)}%"
            if forward:
                reading = "dissolved"
                text = (f"dissolved: no cluster of {other_run} holds {threshold} of its documents "
                        f"(largest share {share}, in {columns[top]})")
            else:
                reading = "new"
                text = (f"new: no cluster of {other_run} gave it {threshold} of its documents "
                        f"(largest share {share}, from {columns[top]})")
            fates.append(ClusterFate(int(row_cluster), reading, partners, text))
            continue
        main = partner_cols[0]
        n_main = int(col_sizes[main])
        # Other row clusters supplying at least SHARE_MIN of the main partner's members, largest first.
        co_rows = [int(rows[o]) for o in np.argsort(-table[:, main], kind="stable")
                   if o != r and table[o, main] > 0 and table[o, main] / n_main >= SHARE_MIN]
        spread = len(partner_cols) >= 2
        kept = counts[main] / n_r >= KEEP_MIN and counts[main] / n_main >= KEEP_MIN
        if spread and co_rows:
            kind = "spread and shared"
        elif spread:
            kind = "spread"
        elif co_rows:
            kind = "shared"
        else:
            kind = "kept" if kept else "reshaped"
        words = _Words(main=int(columns[main]), main_share=_percent(counts[main], n_r),
                       share_of_main=_percent(counts[main], n_main), jaccard=f"{partners[0][2]:.2f}",
                       pieces=_join([f"{columns[c]} ({_percent(counts[c], n_r)})" for c in partner_cols]),
                       others=f"{own_run}'s {_join(co_rows)}" if co_rows else "")
        reading, text = (_forward_reading if forward else _backward_reading)(kind, words)
        fates.append(ClusterFate(int(row_cluster), reading, partners, text))
    return tuple(fates)


@dataclass(frozen=True)
class _Words:
    """The pieces of a plain reading."""

    main: int  # the main partner
    main_share: str  # its share of this cluster's members
    share_of_main: str  # this cluster's share of the main partner's members
    jaccard: str
    pieces: str  # partners with their shares of this cluster's members
    others: str  # other row clusters that also hold SHARE_MIN of the main partner, with their run's name


def _forward_reading(kind: str, w: _Words) -> tuple[str, str]:
    """What became of a cluster of A in B."""
    if kind == "spread and shared":
        return "split and merged", f"split into {w.pieces}; in {w.main} it merged with {w.others}"
    if kind == "spread":
        return "split", f"split into {w.pieces}"
    if kind == "shared":
        return "merged", f"merged with {w.others} into {w.main} ({w.main_share} of its documents)"
    if kind == "kept":
        return "kept", f"kept as {w.main} (Jaccard {w.jaccard})"
    return "reshaped", f"mostly went to {w.main} ({w.main_share} of its documents; Jaccard {w.jaccard})"


def _backward_reading(kind: str, w: _Words) -> tuple[str, str]:
    """Where a cluster of B came from in A."""
    if kind == "spread and shared":
        return "merged from parts of", f"merged from {w.pieces}; {w.main} also went into {w.others}"
    if kind == "spread":
        return "merged from", f"merged from {w.pieces}"
    if kind == "shared":
        return ("formed by a split of",
                f"formed by a split of {w.main} ({w.share_of_main} of it came here), which also went into {w.others}")
    if kind == "kept":
        return "kept", f"kept from {w.main} (Jaccard {w.jaccard})"
    return "reshaped", f"mostly came from {w.main} ({w.main_share} of its documents; Jaccard {w.jaccard})"


def compare_run_folders(folder_a: Path, folder_b: Path) -> Comparison:
    """Compare two run folders (``OUT/runs/NAME``) written by ``pilewise run``.

    Reads each folder's ``assignments.csv`` (``doc_id`` and ``cluster``), the cluster headlines from
    ``clusters.json`` and the run name and input fingerprint from ``manifest.json``.

    Raises
    ------
    PilewiseError
        When a folder is not a run folder or its files cannot be read.
    """
    run_a = open_run(folder_a)
    rows_a = read_assignments(run_a)
    run_b = open_run(folder_b)
    return compare_finished_runs(run_a, run_b, rows_a, read_assignments(run_b))


def compare_finished_runs(run_a: FinishedRun, run_b: FinishedRun, rows_a: Assignments,
                          rows_b: Assignments) -> Comparison:
    """Compare two finished runs read by `describe.runfolders` (their records and assignments)."""
    name_a, name_b = run_a.name, run_b.name
    if name_a == name_b:
        name_a, name_b = str(run_a.folder), str(run_b.folder)
    # a name a person gave wins over the exemplar's title
    headlines_a = {c.cluster_id: c.shown for c in run_a.clusters if c.cluster_id >= 0}
    headlines_b = {c.cluster_id: c.shown for c in run_b.clusters if c.cluster_id >= 0}
    comparison = compare_labelings(rows_a.ids, rows_a.labels, rows_b.ids, rows_b.labels, name_a=name_a,
                                   name_b=name_b, headlines_a=headlines_a, headlines_b=headlines_b,
                                   titles_a=rows_a.titles, titles_b=rows_b.titles)
    notes: list[str] = []
    if run_a.fingerprint and run_a.fingerprint == run_b.fingerprint:
        notes.append("both runs read the same input (equal fingerprints)")
    elif run_a.fingerprint and run_b.fingerprint:
        notes.append("the runs read different inputs (fingerprints differ); only shared documents are compared")
    return replace(comparison, fingerprint_a=run_a.fingerprint, fingerprint_b=run_b.fingerprint, notes=tuple(notes))


def comparison_document(c: Comparison) -> dict[str, Any]:
    """Every figure of a comparison as a JSON-ready dict (the content of ``compare.json``)."""
    row_sizes = c.contingency.sum(axis=1)
    col_sizes = c.contingency.sum(axis=0)
    return {
        "runs": {"a": c.run_a, "b": c.run_b},
        "input": {
            "fingerprint_a": c.fingerprint_a,
            "fingerprint_b": c.fingerprint_b,
            "same_input": bool(c.fingerprint_a) and c.fingerprint_a == c.fingerprint_b,
            "notes": list(c.notes),
        },
        "documents": {"shared": c.shared, "only_a": c.only_a, "only_b": c.only_b},
        "agreement": {
            "adjusted_rand_index": _round(c.ari),
            "nmi_arithmetic": _round(c.nmi),
            "v_measure": _round(c.v_measure),
            "homogeneity": _round(c.homogeneity),
            "completeness": _round(c.completeness),
        },
        "thresholds": {"share_min": SHARE_MIN, "keep_min": KEEP_MIN},
        "contingency": {
            "clusters_a": list(c.clusters_a),
            "clusters_b": list(c.clusters_b),
            "column_sizes": [int(n) for n in col_sizes],
            "rows": [
                {
                    "cluster": cluster,
                    "headline": _at(c.headlines_a, i),
                    "size": int(row_sizes[i]),
                    "counts": [int(n) for n in c.contingency[i]],
                    "shares": [_round(n / row_sizes[i], 4) if row_sizes[i] else 0.0 for n in c.contingency[i]],
                }
                for i, cluster in enumerate(c.clusters_a)
            ],
        },
        "matching": [{"cluster_a": a, "cluster_b": b,
                      "shared": int(c.contingency[c.clusters_a.index(a), c.clusters_b.index(b)])}
                     for a, b in c.matching],
        "fates_a": [_fate_record(f, c.clusters_a, c.headlines_a, row_sizes) for f in c.fates_a],
        "fates_b": [_fate_record(f, c.clusters_b, c.headlines_b, col_sizes) for f in c.fates_b],
        "moved": {
            "total": len(c.moved),
            "listed": min(len(c.moved), MOVED_LISTED),
            "per_pair": MOVED_PER_PAIR,
            "pairs": moved_pairs(c.moved),
            "documents": [_moved_record(m) for m in c.moved[:MOVED_LISTED]],
        },
    }


def moved_pairs(moved: Sequence[MovedDoc]) -> list[dict[str, Any]]:
    """The moved documents grouped by the pair of clusters they moved between, the largest group first.

    Each group: both clusters and headlines, ``count`` (every document of the pair) and ``documents``,
    the first MOVED_PER_PAIR of them in run A's reading order. Ties in size go by cluster of A, then of B.
    """
    groups: dict[tuple[int, int], list[MovedDoc]] = {}
    for m in moved:
        groups.setdefault((m.cluster_a, m.cluster_b), []).append(m)
    ordered = sorted(groups.items(), key=lambda item: (-len(item[1]), item[0]))
    return [{"cluster_a": a, "headline_a": docs[0].headline_a, "cluster_b": b, "headline_b": docs[0].headline_b,
             "count": len(docs), "documents": [_moved_record(m) for m in docs[:MOVED_PER_PAIR]]}
            for (a, b), docs in ordered]


def _moved_record(m: MovedDoc) -> dict[str, Any]:
    return {"doc_id": m.doc_id, "title": m.title, "row_b": m.row_b, "cluster_a": m.cluster_a,
            "headline_a": m.headline_a, "cluster_b": m.cluster_b, "headline_b": m.headline_b}


def _title(titles: Sequence[str], row: int) -> str:
    return titles[row] if row < len(titles) else ""


def _unique_index(ids: Sequence[str], run: str) -> dict[str, int]:
    """Position of each id; a repeated id cannot be matched between runs."""
    index: dict[str, int] = {}
    repeated: list[str] = []
    for i, doc_id in enumerate(ids):
        if doc_id in index:
            repeated.append(doc_id)
        else:
            index[doc_id] = i
    if repeated:
        more = f" and {len(set(repeated)) - 1:,} more" if len(set(repeated)) > 1 else ""
        raise PilewiseError(
            f"run {run} repeats doc_id {repeated[0]!r}{more}, so its documents cannot be matched with another "
            "run's; re-run with an --id-column that holds unique ids"
        )
    return index


def _fate_record(fate: ClusterFate, clusters: tuple[int, ...], headlines: tuple[str, ...],
                 sizes: np.ndarray) -> dict[str, Any]:
    i = clusters.index(fate.cluster)
    size = int(sizes[i])
    return {
        "cluster": fate.cluster,
        "headline": _at(headlines, i),
        "size": size,
        "reading": fate.reading,
        "text": fate.text,
        "partners": [{"cluster": other, "shared": shared, "share": _round(shared / size, 4) if size else 0.0,
                      "jaccard": _round(jaccard, 4)} for other, shared, jaccard in fate.partners],
    }


def _jaccard(both: int | np.integer, n_row: int | np.integer, n_col: int | np.integer) -> float:
    """|R ∩ C| / |R ∪ C| from the overlap and the two sizes."""
    union = int(n_row) + int(n_col) - int(both)
    return int(both) / union if union else 0.0


def _percent(part: int | np.integer, whole: int | np.integer) -> str:
    """Whole percent, rounded down so that a share under a threshold never prints as the threshold."""
    return f"{100 * int(part) // int(whole)}%"


def _join(items: Sequence[object]) -> str:
    """'a', 'a and b', 'a, b and c'."""
    words = [str(item) for item in items]
    return words[0] if len(words) == 1 else ", ".join(words[:-1]) + " and " + words[-1]


def _at(values: tuple[str, ...], i: int) -> str:
    return values[i] if i < len(values) else ""


def _round(value: float, places: int = 6) -> float:
    return round(float(value), places)


AUTO_COMPARE_RUNS = 12  # runs of one collection compared pairwise on the root index; above, neighbours by k only


@dataclass(frozen=True)
class RunPair:
    """Two finished runs of the same collection, compared: the record the root index and run pages show.

    ``document`` is the content of the pair's compare.json (`comparison_document`); ``ari`` and ``nmi``
    are its rounded agreement figures.
    """

    run_a: FinishedRun
    run_b: FinishedRun
    document: dict[str, Any]

    @property
    def ari(self) -> float:
        return float(self.document["agreement"]["adjusted_rand_index"])

    @property
    def nmi(self) -> float:
        return float(self.document["agreement"]["nmi_arithmetic"])


def site_comparisons(runs: Sequence[FinishedRun]) -> tuple[list[RunPair], list[str]]:
    """Compare the runs of a site that read the same collection (equal fingerprints), and say which pairs failed.

    Runs are grouped by fingerprint (a run without one is compared with nothing: nothing says two runs
    read the same input) and sorted by k and folder name; up to AUTO_COMPARE_RUNS runs of a group are
    compared pairwise, more only with their neighbours. A pair that cannot be compared (a damaged or
    edited export) is left out, with a note.
    """
    by_input: dict[str, list[FinishedRun]] = {}
    for run in runs:
        if run.fingerprint:
            by_input.setdefault(run.fingerprint, []).append(run)
    pairs: list[RunPair] = []
    notes: list[str] = []
    assignments: dict[Path, Assignments | PilewiseError] = {}

    def rows(run: FinishedRun) -> Assignments:
        if run.folder not in assignments:  # each run's assignments.csv is read once for all its pairs
            try:
                assignments[run.folder] = read_assignments(run)
            except PilewiseError as err:
                assignments[run.folder] = err
        found = assignments[run.folder]
        if isinstance(found, PilewiseError):
            raise found
        return found

    for group in by_input.values():
        group.sort(key=lambda r: (r.k if r.k is not None else 0, r.folder.name))
        if len(group) <= AUTO_COMPARE_RUNS:
            candidates = [(x, y) for i, x in enumerate(group) for y in group[i + 1 :]]
        else:
            candidates = list(zip(group, group[1:], strict=False))
        for run_a, run_b in candidates:
            try:
                comparison = compare_finished_runs(run_a, run_b, rows(run_a), rows(run_b))
            except PilewiseError as err:
                notes.append(f"a comparison was left out: {err}")
                continue
            pairs.append(RunPair(run_a, run_b, comparison_document(comparison)))
    return pairs, notes
