"""Exports of a run: assignments.csv, clusters.json, manifest.json, ingest-report.csv, members/cluster-NN.csv, ...

The formats are described in docs/outputs.md; a test keeps the two in step.
"""

from __future__ import annotations

import csv
import json
import os
import platform
import re
from collections.abc import Callable, Iterable, Sequence
from dataclasses import asdict
from datetime import UTC, datetime
from importlib.metadata import PackageNotFoundError, version
from pathlib import Path
from typing import Any

import numpy as np

from pilewise.clustering.stability import STABILITY_ROWS
from pilewise.clustering.sweep import RECOMMENDATION_RULE, Sweep
from pilewise.csvcells import spreadsheet_cell, spreadsheet_row
from pilewise.describe.names import write_names_csv
from pilewise.describe.rules import RULES_ROWS
from pilewise.model import ClusterSummary, RunResult, TermScore
from pilewise.output.outfolder import write_text_atomically

EXPORT_FILES = ("assignments.csv", "clusters.json", "manifest.json", "ingest-report.csv", "levels.json", "cuts.csv",
                "names.csv", "boilerplate.csv")
MEMBERS_FOLDER = "members"
MEMBER_ROWS_BUFFERED = 10_000  # rows held before the per-cluster CSVs are appended to (bounded memory, few open files)

# What each file of a run folder is, by its name with every run of digits written N (`file_key`). The run's
# pages list the folder's files with these lines; a test fails when a run writes a file missing here.
DATA_FILES: dict[str, str] = {
    "names.csv": "cluster, suggested name, your name and note (edit it to name clusters)",
    "assignments.csv": "every document with its cluster and distance to the centroid",
    "members/cluster-N.csv": "one cluster's members, with the columns of assignments.csv",
    "cuts.csv": "every document's cluster at each cut of the tree (columns k2, k3, ...)",
    "clusters.json": "every figure shown on these pages",
    "levels.json": "the tree's cuts for a range of k and how each splits at the next",
    "sweep.json": "every figure of the sweep over k that chose this run's k",
    "manifest.json": "settings, seed, library versions, input fingerprint, timings",
    "ingest-report.csv": "every file or row and what became of it",
    "boilerplate.csv": "lines removed as boilerplate before vectorizing, with how many texts hold each",
    "assignments-parts/": "--engine spark: every document's assignment, CSV parts written by Spark (with its markers)",
    "assignments-parquet/": "--engine spark: the assignments as Parquet parts written by Spark (with its markers)",
    "cuts-parts/": "--engine spark: every document's cluster at each cut, CSV parts by Spark (with its markers)",
    "model/model.json": "what pilewise assign needs besides numbers: vocabulary, settings, versions, cluster names",
    "model/arrays.npz": "the numbers pilewise assign needs: idf, LSA directions, centroids, distance quantiles",
}
SITE_FILES: dict[str, str] = {
    "index.html": "the run's overview: every cluster on a card",
    "cluster-N.html": "a cluster's page: rule, terms, attributes, members nearest first",
    "docs/dN.html": "a document's page, the cluster's terms marked",
    "map.html": "a map of the documents (t-SNE of the clustering space), coloured by cluster",
    "levels.html": "coarser and finer cuts of the tree",
    "dendrogram.svg": "the figure of the top of the tree",
    "tree.html": "one decision tree for the whole clustering",
    "sweep.html": "choosing k: the figures of the sweep",
    "sweep-curves.svg": "the figure of the sweep",
    "ingest.html": "what was read and what was skipped",
    "comparisons.html": "this run compared with other runs of the same collection (written when the site is refreshed)",
    "files.html": "this list",
    "pilewise.css": "the pages' stylesheet",
    "pilewise-sort.js": "sorts the pages' tables when a header is activated (the pages read the same without it)",
    "pilewise-search.js": "the search box's script",
    "search-index.js": "the words the search box looks in",
    ".pilewise": "the mark that pilewise wrote this folder (it replaces only folders so marked)",
}
SPARK_FOLDERS = ("assignments-parts/", "assignments-parquet/", "cuts-parts/")
LATE_FILES = ("comparisons.html", ".pilewise")  # written after the pages, when the run is moved into place
REWRITTEN_LAST = ("manifest.json",)  # written again after the pages (its timings): its size is not listed


def members_csv_name(cluster_id: int) -> str:
    """The per-cluster CSV of members, relative to the run folder (numbered as the cluster pages are)."""
    return f"{MEMBERS_FOLDER}/cluster-{cluster_id:02d}.csv"


def file_key(relative: str) -> str:
    """A run file's key in DATA_FILES or SITE_FILES: its relative path with every run of digits written N."""
    return re.sub(r"[0-9]+", "N", relative)


def _group_key(relative: str) -> str:
    """The key a file is listed under: a Spark output folder as a whole, else `file_key`."""
    folder = relative.split("/", 1)[0] + "/"
    return folder if folder in SPARK_FOLDERS else file_key(relative)


def describe_file(relative: str) -> str:
    """What a file of a run folder is; "" for a file pilewise does not know (a test keeps this from happening)."""
    key = _group_key(relative)  # Spark names its parts (and their checksum files) as it likes
    return DATA_FILES.get(key) or SITE_FILES.get(key, "")


def listed_files(folder: Path, *, data_only: bool = False, late: tuple[str, ...] = ()) -> list[dict[str, Any]]:
    """The files under `folder` (and `late`, files written later), one entry per key, in the order of the dicts.

    Each entry: ``name`` (the first file, for a link), ``last`` (the last file when several share the key,
    else ""), ``count``, ``bytes`` (their total size; 0 for late files and REWRITTEN_LAST) and ``what``.
    """
    found: dict[str, list[tuple[str, int]]] = {}
    for path in sorted(folder.rglob("*")):
        if path.is_file():
            relative = path.relative_to(folder).as_posix()
            size = 0 if relative in REWRITTEN_LAST else path.stat().st_size  # pages stay byte-reproducible
            found.setdefault(_group_key(relative), []).append((relative, size))
    for name in late:
        found.setdefault(file_key(name), [(name, 0)])
    order = list(DATA_FILES) + ([] if data_only else list(SITE_FILES))
    keys = [k for k in order if k in found] + ([] if data_only else sorted(k for k in found if k not in order))
    return [{"name": found[k][0][0], "last": found[k][-1][0] if len(found[k]) > 1 else "", "count": len(found[k]),
             "bytes": sum(size for _, size in found[k]), "what": describe_file(found[k][0][0])} for k in keys]


LIBRARIES = ("pilewise", "numpy", "scipy", "scikit-learn", "pandas", "nltk", "jinja2", "beautifulsoup4",
             "charset-normalizer", "typer")


def write_exports(
    folder: Path, result: RunResult, track: Callable[[Iterable[Any]], Iterable[Any]] | None = None
) -> None:
    """Write every export of `result` into `folder`; `track` wraps the pass over the documents (progress)."""
    if result.population is not None:  # the documents are on the engine that read them; it writes assignments
        result.population.write_assignments(folder, [c.shown for c in result.naming.clusters], cut_groups(result))
    else:
        DocumentTables(folder, result).write(track)
    write_run_records(folder, result)


def write_run_records(folder: Path, result: RunResult) -> None:
    """The exports other than the per-document tables: clusters.json, manifest.json, ingest-report.csv,
    levels.json, names.csv, boilerplate.csv and sweep.json."""
    _write_json(folder / "clusters.json", clusters_document(result))
    write_manifest(folder, result)
    write_ingest_report(folder / "ingest-report.csv", result)
    _write_json(folder / "levels.json", levels_document(result))
    write_names_csv(folder / "names.csv", result.naming)
    with (folder / "boilerplate.csv").open("w", encoding="utf-8", newline="") as handle:
        writer = csv.writer(handle, lineterminator="\n")
        writer.writerow(["line", "texts"])
        writer.writerows(spreadsheet_row(line) for line in result.boilerplate.lines)
    if result.sweep is not None:
        _write_json(folder / "sweep.json", sweep_document(result.sweep, result.name))


def cut_groups(result: RunResult) -> dict[int, list[int]]:
    """k -> the group of every run cluster at that cut of the levels, when each cut maps the run's clusters
    to coarser groups (a tree over the k-means centroids); {} when a cut splits a run cluster (a Ward tree)."""
    labels = result.clustering.labels
    groups: dict[int, list[int]] = {}
    for k, cut in result.levels.cuts.items():
        pairs = np.unique(np.column_stack([labels, cut]).astype(np.int64), axis=0)
        if pairs.shape[0] != np.unique(labels).size or pairs.shape[0] != result.k:
            return {}  # a run cluster in two groups, or one without members: no mapping by label
        groups[k] = [int(group) for group in pairs[:, 1]]
    return groups


def levels_document(result: RunResult) -> dict[str, Any]:
    """The tree's cuts for a range of k: clusters with size and headline, and how each k splits at k + 1."""
    levels = result.levels
    docs = result.collection.documents
    first = result.collection.first_doc_of_text
    return {
        "run": result.name,
        "tree": levels.tree_method,
        "k_range": [levels.k_min, levels.k_max],
        "levels": [
            {"k": k, "clusters": [
                {"id": c.cluster_id, "size": c.size,
                 "terms": list(levels.terms[k][c.cluster_id]) if k in levels.terms else [],
                 "headline": docs[first[c.exemplar_text]].title,
                 "exemplar_doc_id": docs[first[c.exemplar_text]].doc_id, "run_clusters": list(c.run_clusters)}
                for c in clusters]}
            for k, clusters in sorted(levels.clusters.items())
        ],
        "splits": [
            {"k": s.k, "parent": s.parent, "parent_size": s.parent_size,
             "children": [{"id": c, "size": n} for c, n in s.children],
             "carried": [{"from": a, "to": b} for a, b in s.carried]}
            for s in levels.splits
        ],
    }


def sweep_document(sweep: Sweep, name: str) -> dict[str, Any]:
    """Every figure of a sweep over k, and the recommended k with the rule's reason."""
    return {
        "run": name,
        "recommended_k": sweep.recommended_k, "runner_up_k": sweep.runner_up_k,
        "reason": sweep.reason,
        "rule": RECOMMENDATION_RULE,
        "stability_resamples": sweep.resamples,
        "stability_rows": sweep.stability_rows,
        "warm_start_kept": list(sweep.warm_start_kept),
        "points": [
            {"k": p.k, "silhouette_cosine": _round(p.silhouette), "calinski_harabasz": _round(p.calinski_harabasz, 4),
             "davies_bouldin": _round(p.davies_bouldin), "stability_mean": _round(p.stability_mean, 4),
             "stability_min": _round(p.stability_min, 4), "inertia": _round(p.inertia, 4),
             "silhouette_null_reference": _round(p.null_silhouette)}
            for p in sweep.points
        ],
    }


class DocumentTables:
    """assignments.csv (one row per document in reading order; metadata columns of table inputs follow),
    cuts.csv (its cluster at every cut of the tree, columns k2, k3, ...) and members/cluster-NN.csv.

    Made before the pages: the member files exist (with their header) from then on, so that the pages that
    link them may be written while `write` fills them (in a worker process, see `output.writing`).
    """

    def __init__(self, folder: Path, result: RunResult) -> None:
        self.folder = folder
        self.result = result
        docs = result.collection.documents
        known = getattr(docs, "metadata_names", None)  # a shelf keeps them; a tuple is looked through
        self.extra = sorted(known if known is not None else {name for doc in docs for name, _ in doc.metadata})
        self.header = spreadsheet_row(["doc_id", "source", "title", "cluster", "cluster_name", "distance", "date",
                                       "copies", *self.extra])
        self._members()

    def _members(self) -> MemberFiles:
        return MemberFiles(self.folder, self.header, [c.cluster_id for c in self.result.clusters])

    def write(self, track: Callable[[Iterable[Any]], Iterable[Any]] | None = None) -> None:
        """The three tables in one pass over the documents; each file is written from its start.

        Every row is formatted once by the csv module (into a list of lines) and that line goes to both
        assignments.csv and the cluster's member file. Cells that are never text (cluster, copies) or that
        are the same for many rows (the cluster's name) are escaped once, not per row: the same cells as
        `spreadsheet_row` of the whole row (tested).
        """
        result, extra = self.result, self.extra
        docs = result.collection.documents
        # per distinct text, as Python values made once: a document reads them instead of numpy scalars
        labels = np.asarray(result.clustering.labels, dtype=np.int64).tolist()
        distances = np.asarray(result.clustering.distances, dtype=float).tolist()
        text_of_doc = np.asarray(result.collection.text_of_doc, dtype=np.int64).tolist()
        copies = np.asarray(result.collection.copies, dtype=np.int64).tolist()
        cuts = result.levels.cuts
        ks = sorted(cuts)
        cut_table = np.column_stack([np.asarray(cuts[k], dtype=np.int32) for k in ks]) if ks else \
            np.zeros((len(labels), 0), dtype=np.int32)  # one row per text, read a row at a time (bounded at 1M)
        shown = spreadsheet_row([c.shown for c in result.naming.clusters])
        members = self._members()
        lines, cut_lines = _Lines(), _Lines()
        writer = csv.writer(lines, lineterminator="\n")
        cuts_writer = csv.writer(cut_lines, lineterminator="\n")
        with (self.folder / "assignments.csv").open("w", encoding="utf-8", newline="") as handle, \
                (self.folder / "cuts.csv").open("w", encoding="utf-8", newline="") as cuts_handle:
            writer.writerow(self.header)
            cuts_writer.writerow(["doc_id", *(f"k{k}" for k in ks)])
            numbered = enumerate(docs)
            for i, doc in track(numbered) if track else numbered:
                t = text_of_doc[i]
                label = labels[t]
                texts = [doc.doc_id, doc.source, doc.title, doc.date]
                if extra:
                    meta = dict(doc.metadata)
                    texts.extend(meta.get(name, "") for name in extra)
                doc_id, source, title, date, *more = spreadsheet_row(texts)
                distance = f"{distances[t]:.6f}"
                if distance[:1] == "-":  # a plain negative number stays as it is; "-inf" would not
                    distance = str(spreadsheet_cell(distance))
                writer.writerow([doc_id, source, title, label, shown[label], distance, date, copies[t], *more])
                members.add_line(label, lines[-1])
                cuts_writer.writerow([doc_id, *cut_table[t].tolist()])
                if len(lines) >= MEMBER_ROWS_BUFFERED:
                    handle.write("".join(lines))
                    cuts_handle.write("".join(cut_lines))
                    lines.clear()
                    cut_lines.clear()
            handle.write("".join(lines))
            cuts_handle.write("".join(cut_lines))
        members.flush()


class _Lines(list[str]):
    """A list that a csv writer writes into: every row it writes becomes one item, the row's formatted line."""

    write = list.append  # the csv writer calls it once per row


class MemberFiles:
    """members/cluster-NN.csv for every cluster, appended to in batches: memory and open files stay bounded."""

    def __init__(self, folder: Path, header: list[object], clusters: list[int]) -> None:
        self.folder = folder
        self.lines: dict[int, list[str]] = {c: [] for c in clusters}
        self.held = 0
        self._formatted = _Lines()
        self._writer = csv.writer(self._formatted, lineterminator="\n")
        (folder / MEMBERS_FOLDER).mkdir(exist_ok=True)
        for c in clusters:  # every cluster gets its file, with the header, even before its first row
            with (folder / members_csv_name(c)).open("w", encoding="utf-8", newline="") as handle:
                csv.writer(handle, lineterminator="\n").writerow(header)

    def add(self, cluster: int, row: list[object]) -> None:
        """A row of cells (escaped already), formatted as the csv module writes it."""
        self._writer.writerow(row)
        self.add_line(cluster, self._formatted.pop())

    def add_line(self, cluster: int, line: str) -> None:
        """A row already formatted by a csv writer with "\\n" line ends (as every pilewise CSV)."""
        self.lines[cluster].append(line)
        self.held += 1
        if self.held >= MEMBER_ROWS_BUFFERED:
            self.flush()

    def flush(self) -> None:
        for c, lines in self.lines.items():
            if lines:
                with (self.folder / members_csv_name(c)).open("a", encoding="utf-8", newline="") as handle:
                    handle.write("".join(lines))
                lines.clear()
        self.held = 0


def write_ingest_report(path: Path, result: RunResult) -> None:
    """Every file (and table row) that was read, skipped or noted, with its reason."""
    with path.open("w", encoding="utf-8", newline="") as handle:
        writer = csv.writer(handle, lineterminator="\n")
        writer.writerow(["source", "status", "reason", "detail"])
        for entry in result.ingested.entries:
            writer.writerow(spreadsheet_row([entry.source, entry.status, entry.reason, entry.detail]))


def _round(value: float | None, places: int = 6) -> float | None:
    return None if value is None else round(float(value), places)


def _term_record(term: TermScore, statistic: str) -> dict[str, Any]:
    record: dict[str, Any] = {"term": term.term}
    if statistic == "chi2":
        record["score"] = _round(term.score, 4)
    else:
        record["log_odds"] = _round(term.score, 4)
        record["z"] = _round(term.z, 4)
    record.update(docs_in=term.docs_in, docs_out=term.docs_out,
                  share_in=_round(term.share_in, 4), share_out=_round(term.share_out, 4))
    return record


def cluster_record(cluster: ClusterSummary, result: RunResult) -> dict[str, Any]:
    docs = result.collection.documents
    exemplar = docs[cluster.nearest[0].doc_index]
    naming = result.naming.clusters[cluster.cluster_id]
    return {
        "id": cluster.cluster_id,
        "name": naming.name,
        "suggested_name": naming.suggested,
        "name_note": naming.note,
        "name_origin": naming.origin,
        "name_flag": naming.flag,
        "size": cluster.size,
        "share": _round(cluster.share, 4),
        "distinct_texts": cluster.distinct_texts,
        "headline": cluster.headline,
        "headline_source": cluster.headline_source,
        "headline_doc_id": docs[cluster.headline_doc].doc_id if cluster.headline_doc >= 0 else "",
        "mixed": cluster.mixed,
        "mixed_reason": cluster.mixed_reason,
        "name_terms": [{"term": t, "share_in": _round(share, 4)} for t, share in cluster.name_terms],
        "exemplar": {"doc_id": exemplar.doc_id, "title": exemplar.title,
                     "distance": _round(cluster.nearest[0].distance)},
        "nearest": [{"doc_id": docs[n.doc_index].doc_id, "title": docs[n.doc_index].title,
                     "distance": _round(n.distance)} for n in cluster.nearest],
        "terms": {
            "chi2": [_term_record(t, "chi2") for t in cluster.chi2_terms],
            "log_odds": [_term_record(t, "log_odds") for t in cluster.log_odds_terms],
        },
        "kwic": [{"term": line.term, "left": line.left, "match": line.match, "right": line.right,
                  "doc_id": line.doc_id} for line in cluster.kwic],
        "rule": _rule_record(result, cluster.cluster_id),
        "profile": _profile_record(result, cluster.cluster_id),
        "attributes": _attributes_record(result, cluster.cluster_id),
        "mean_distance": _round(cluster.mean_distance),
        "silhouette": _round(cluster.silhouette),
        "stability": {"mean_jaccard": _round(cluster.stability, 4), "reading": cluster.stability_reading,
                      "resamples_counted": result.stability.clusters[cluster.cluster_id].resamples_counted},
        "trend": _trend_record(result, cluster.cluster_id),
        "languages": _language_shares(result.languages.clusters[cluster.cluster_id]) if result.languages else [],
    }


def _language_shares(shares: Sequence[tuple[str, float]]) -> list[dict[str, Any]]:
    return [{"language": code, "share": _round(share, 4)} for code, share in shares]


def _trend_record(result: RunResult, c: int) -> dict[str, Any] | None:
    """Counts per period and the reading of the cluster's trend; None when no document has a date."""
    if result.trends is None:
        return None
    trend = result.trends.clusters[c]
    return {
        "reading": trend.reading,
        "evidence": trend.evidence,
        "test": "Cochran-Armitage trend in the share of each period's dated documents",
        "z": _round(trend.z, 4), "p_value": _round(trend.p_value, 6), "q_value": _round(trend.q_value, 6),
        "dated": trend.dated, "latest_share": _round(trend.latest_share, 4),
        "share_change": _round(trend.share_change, 4), "caution": trend.caution,
        "periods": [{"start": p.start, "count": p.count, "share": _round(p.share, 4)} for p in trend.periods],
    }


def trends_document(result: RunResult) -> dict[str, Any] | None:
    """The periods of the run's trend readings and how many documents carried a date."""
    trends = result.trends
    if trends is None:
        return None
    return {
        "period": trends.period, "period_chosen_by": trends.period_chosen_by,
        "starts": list(trends.starts), "totals": list(trends.totals),
        "dated": trends.dated, "undated": trends.undated, "unreadable": trends.unreadable,
        "adjustment": "Benjamini-Hochberg across the tested clusters",
        "first": list(trends.first()),
    }


def _rule_record(result: RunResult, c: int) -> dict[str, Any]:
    rule = result.rules.rules[c]
    return {"text": rule.rule_text, "words": rule.rule_words, "precision": _round(rule.precision, 4),
            "coverage": _round(rule.coverage, 4),
            "no_rule_reason": rule.no_rule_reason}


def _profile_record(result: RunResult, c: int) -> dict[str, Any]:
    profile = result.profiles[c]

    def terms(items: Any) -> list[dict[str, Any]]:
        return [{"term": t.term, "mean_in": _round(t.mean_in), "mean_out": _round(t.mean_out)} for t in items]

    return {"stronger": terms(profile.stronger), "weaker": terms(profile.weaker)}


def _attributes_record(result: RunResult, c: int) -> dict[str, Any]:
    """Per metadata column: values over- and under-represented in this cluster, or its quartiles."""
    if result.metadata is None:
        return {}
    record: dict[str, Any] = {}
    for column in result.metadata.categorical:
        def cells(items: Any) -> list[dict[str, Any]]:
            return [{"value": r.value, "count": r.count, "expected": _round(r.expected, 2),
                     "residual": _round(r.residual, 3)} for r in items]

        record[column.column] = {"over": cells(column.over[c]), "under": cells(column.under[c])}
    for numeric in result.metadata.numeric:
        n = numeric.clusters[c]
        record[numeric.column] = {
            "count": n.count, "q1": _round(n.q1), "median": _round(n.median), "q3": _round(n.q3),
            "rest_count": n.rest_count, "rest_q1": _round(n.rest_q1), "rest_median": _round(n.rest_median),
            "rest_q3": _round(n.rest_q3), "p_value": _round(n.p_value),
        }
    return record


def metadata_document(result: RunResult) -> dict[str, Any]:
    """Column-level tests of the metadata against the clusters."""
    if result.metadata is None:
        return {}
    return {
        "categorical": [
            {"column": col.column, "values": list(col.values), "chi2": _round(col.chi2, 4), "dof": col.dof,
             "p_value": col.p_value, "cramers_v": _round(col.cramers_v, 4), "sparse_warning": col.sparse_warning,
             "table": col.table.tolist()}
            for col in result.metadata.categorical
        ],
        "numeric": [col.column for col in result.metadata.numeric],
        "skipped": [{"column": s.column, "reason": s.reason} for s in result.metadata.skipped],
    }


def clusters_document(result: RunResult) -> dict[str, Any]:
    q = result.quality
    return {
        "run": result.name,
        "k": result.k,
        "documents": documents_read(result),
        "quality": {
            "silhouette_cosine": _round(q.silhouette),
            "silhouette_reading": q.silhouette_reading, "silhouette_null_reference": _round(q.null_silhouette),
            "silhouette_sample": q.silhouette_sample,
            "calinski_harabasz": _round(q.calinski_harabasz, 4),
            "davies_bouldin": _round(q.davies_bouldin),
            "stability_mean": _round(result.stability.mean, 4),
            "stability_resamples": result.stability.resamples,
            "stability_rows": int(min(result.collection.copies.size, STABILITY_ROWS)),
        },
        "metadata": metadata_document(result),
        "rules": {"fidelity_accuracy": _round(result.rules.fidelity_accuracy, 4),
                  "fidelity_macro_f1": _round(result.rules.fidelity_macro_f1, 4),
                  "folds": result.rules.folds, "features": result.rules.features,
                  "rows": int(min(result.collection.copies.size, RULES_ROWS))},
        "trends": trends_document(result),
        "languages": _language_shares(result.languages.collection) if result.languages else [],
        "languages_forced": bool(result.languages and result.languages.forced),
        "names_from_run": result.naming.source_run,
        "names_not_carried": list(result.naming.not_carried),
        "clusters": [cluster_record(c, result) for c in result.clusters],
    }


def documents_read(result: RunResult) -> int:
    """Documents of the whole run (the described sample's population under the Spark engine)."""
    return result.population.documents if result.population else len(result.collection.documents)


def write_manifest(folder: Path, result: RunResult) -> None:
    _write_json(folder / "manifest.json", manifest_document(result))


def build_time() -> str:
    """UTC time of the build, from SOURCE_DATE_EPOCH when set (reproducible builds)."""
    epoch = os.environ.get("SOURCE_DATE_EPOCH")
    moment = datetime.fromtimestamp(int(epoch), UTC) if epoch and epoch.isdigit() else datetime.now(UTC)
    return moment.replace(microsecond=0).isoformat().replace("+00:00", "Z")


def library_versions() -> dict[str, str]:
    found = {"python": platform.python_version()}
    for name in LIBRARIES:
        try:
            found[name] = version(name)
        except PackageNotFoundError:
            found[name] = "not installed"
    return found


def manifest_document(result: RunResult) -> dict[str, Any]:
    options = asdict(result.options)
    parameters = {key: (str(value) if isinstance(value, Path) else value) for key, value in options.items()
                  if key not in {"quiet", "extra"}}
    ingested = result.ingested
    return {
        "tool": "pilewise",
        "run": result.name,
        "created": build_time(),
        "method": "k-means" if result.options.method == "kmeans" else "Ward",
        "k": result.k,
        "k_chosen_by": "sweep" if result.sweep is not None else "user",
        "k_runner_up": result.sweep.runner_up_k if result.sweep is not None else None,
        "tree": result.levels.tree_method,
        "seed": result.options.seed,
        "parameters": parameters,
        "input": {
            "fingerprint": result.fingerprint,
            "files_found": ingested.files_found,
            "documents": documents_read(result),
            "distinct_texts": result.population.texts if result.population else result.collection.distinct_texts,
            "skipped": result.population.skipped if result.population else len(ingested.skipped()),
            "notes": list(ingested.notes),
            "redacted": dict(result.redacted) if result.options.redact else "redaction off",
            "boilerplate_lines_removed": len(result.boilerplate.lines),
            "texts_clustered": result.population.texts if result.population else int(result.collection.copies.size),
            "texts_described": int(result.collection.copies.size),
        },
        "vectors": result.vectors.facts,
        "libraries": library_versions(),
        "timings_seconds": dict(result.timings),
    }


def _write_json(path: Path, document: dict[str, Any]) -> None:
    path.write_text(json.dumps(document, indent=2, ensure_ascii=False) + "\n", encoding="utf-8")


def write_sweep_json(folder: Path, sweep: Sweep, name: str) -> None:
    """sweep.json of a stand-alone sweep (OUT/sweeps/NAME), ASCII-escaped as it has always been."""
    (folder / "sweep.json").write_text(json.dumps(sweep_document(sweep, name), indent=2) + "\n", encoding="utf-8")


def write_compare_json(folder: Path, document: dict[str, Any]) -> None:
    """compare.json of a comparison folder; replaced atomically, since a later run may refresh a finished one."""
    write_text_atomically(folder / "compare.json", json.dumps(document, indent=2, ensure_ascii=False) + "\n")
