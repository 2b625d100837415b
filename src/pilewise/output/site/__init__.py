"""Site writer: renders a run's pages and the root index from computed summaries.

Templates get display-ready context and never compute. Autoescape is on for every template:
pages show raw document text, which is never trusted HTML.
"""

from __future__ import annotations

import os
import posixpath
from collections.abc import Callable, Iterable, Iterator, Sequence
from dataclasses import dataclass
from importlib.resources import files
from pathlib import Path
from typing import Any
from urllib.parse import quote

from jinja2 import Environment, PackageLoader, StrictUndefined
from markupsafe import Markup

from pilewise.clustering.sweep import Sweep
from pilewise.describe.compare import RunPair
from pilewise.describe.rules import RULES_ROWS
from pilewise.describe.runfolders import FinishedAssignment, FinishedRun, FinishedSweep
from pilewise.describe.snippets import clip_text
from pilewise.ingest.redact import display_text, redact
from pilewise.model import ClusterSummary, Document, RunResult
from pilewise.output import docmap, search
from pilewise.output.exports import LATE_FILES, listed_files, members_csv_name
from pilewise.output.outfolder import write_text_atomically
from pilewise.output.plots import trend_bars_svg, trend_rows_svg
from pilewise.vectors.languages import shares_line

DOC_PAGE_CAP = 20_000  # above this many documents no page per document is written
# members listed on a cluster's page, nearest the centroid first: a reader scans a few hundred excerpts, not
# thousands; members/cluster-NN.csv (and assignments.csv) hold every member with its distance
MEMBERS_LISTED = 200
MARKED_TERMS = 12
GROUP_LISTED = 50  # copies and near-duplicates linked from a document page
SNIPPET_CHARS = 160  # a member's excerpt in lists, cut at a word boundary
LABEL_CHARS = 60  # a document's label in the menu, the page title and previous/next links
STYLESHEET = "pilewise.css"
SORT_SCRIPT = "pilewise-sort.js"  # sorts tables of class "sortable"; the pages read the same without it
STATIC_FILES = (STYLESHEET, SORT_SCRIPT)

CAUTION = (
    "These pages contain the documents' own text. Share them only as your data-protection rules allow. "
    "Clusters are an exploratory view of the text, not facts about the people who wrote it; do not use them "
    "as the sole basis for decisions about individuals."
)


def _environment() -> Environment:
    env = Environment(
        loader=PackageLoader("pilewise.output.site", "templates"),
        autoescape=True,
        undefined=StrictUndefined,
        trim_blocks=True,
        lstrip_blocks=True,
        keep_trailing_newline=True,
    )
    env.filters["num"] = lambda v, places=0: "–" if v is None else f"{v:,.{places}f}"
    env.filters["pct"] = lambda v: f"{100 * v:.1f}%"
    return env


def _copy_stylesheet(folder: Path, *, atomic: bool = False) -> None:
    """The static files (STATIC_FILES: stylesheet, scripts) beside the pages; `atomic` for folders readers may see."""
    for name in STATIC_FILES:
        source = files("pilewise.output.site").joinpath("static", name)
        if atomic:
            write_text_atomically(folder / name, source.read_text(encoding="utf-8"))
        else:
            (folder / name).write_bytes(source.read_bytes())


@dataclass(frozen=True)
class Segment:
    """A piece of a document's text; marked pieces are the cluster's top terms."""

    text: str
    marked: bool


def cluster_page_name(cluster_id: int) -> str:
    return f"cluster-{cluster_id:02d}.html"


def doc_page_name(doc_index: int) -> str:
    return f"docs/d{doc_index:07d}.html"


def render_run_site(
    folder: Path, result: RunResult, track: Callable[[Iterable[Any]], Iterable[Any]] | None = None,
    exports_written: Callable[[], None] | None = None,
) -> None:
    """Write index.html, one page per cluster (the MEMBERS_LISTED members nearest its centroid), document pages,
    the ingest page, the map and the search index.

    Parameters
    ----------
    folder : Path
        The run's folder, its exports written or being written (their member files made).
    result : RunResult
        The finished run.
    track : callable, optional
        Wraps the pass over the documents (a progress bar).
    exports_written : callable, optional
        Returns once every export is complete (the document tables may be written beside the pages by
        another process); called before the pages that list the exports' files (index.html, files.html).
    """
    env = _environment()
    _copy_stylesheet(folder)
    docs = result.collection.documents
    with_doc_pages = len(docs) <= DOC_PAGE_CAP
    common = {
        "run": result.name,
        "caution": CAUTION,
        "css": STYLESHEET,
        "k": result.k,
        "documents": result.population.documents if result.population else len(docs),
        "distinct": result.population.texts if result.population else int(result.collection.copies.size),
        "skipped": result.population.skipped if result.population else len(result.ingested.skipped()),
        "quality": result.quality,
        "silhouette_note": after_figure(result.quality.silhouette_reading, result.quality.silhouette),
        "with_doc_pages": with_doc_pages,
        "doc_page_cap": DOC_PAGE_CAP,
        "members_listed": MEMBERS_LISTED,
        "stability_mean": result.stability.mean,
        "has_sweep": result.sweep is not None,
        "metadata": result.metadata,
        "names_from_run": result.naming.source_run,
        "names_not_carried": result.naming.not_carried,
        "resamples": result.stability.resamples,
        "finder": True,  # base.html: the search form and the run's two script files
    }
    cards = [_card(c, result) for c in result.clusters]
    _write_search(folder, result, cards, with_doc_pages)
    _render_map(folder, result, env, common, cards, with_doc_pages)
    # ids and file names are the user's own and may hold e-mail addresses or phone numbers: pages show
    # them redacted, as titles are (exports keep them as they are, so rows can be joined back)
    shown: Callable[[str], str] = private_text if result.options.redact else str
    _render_levels(folder, result, env, common)
    _write(folder / "tree.html", env.get_template("tree.html").render(
        common, rules=result.rules, root=result.rules.whole_tree, has_metadata=result.metadata is not None,
        rows=min(int(result.collection.copies.size), RULES_ROWS),
        names={c.cluster_id: c.shown for c in result.naming.clusters},
        hrefs={c.cluster_id: cluster_page_name(c.cluster_id) for c in result.clusters}, up=""))
    if result.sweep is not None:
        render_sweep(folder, result.sweep, name=result.name, in_run=True)
    _write(folder / "ingest.html", env.get_template("ingest.html").render(
        common, entries=[{"source": shown(e.source), "status": e.status, "reason": e.reason, "detail": shown(e.detail)}
                         for e in result.ingested.entries], notes=result.ingested.notes,
        files_found=result.ingested.files_found, boilerplate=result.boilerplate.lines,
        boilerplate_share=result.boilerplate.min_share, redacted=result.redacted, up="",
        languages=[(code, f"{share:.1%}") for code, share in result.languages.collection] if result.languages else [],
        languages_forced=bool(result.languages and result.languages.forced)))
    # every member when documents have pages (their previous/next links follow this order), else the listed ones
    members_by_cluster = _members_nearest_first(result, None if with_doc_pages else MEMBERS_LISTED)
    for position, (cluster, card) in enumerate(zip(result.clusters, cards, strict=True)):
        listed = members_by_cluster[cluster.cluster_id][:MEMBERS_LISTED]
        csv_name = members_csv_name(cluster.cluster_id)
        context = {
            "card": card,
            "cluster": cluster,
            "nearest": [_member_row(n.doc_index, n.distance, docs[n.doc_index], with_doc_pages, shown)
                        for n in cluster.nearest],
            "kwic_groups": _kwic_groups(cluster, with_doc_pages, shown),
            "members": [_member_row(i, dist, docs[i], with_doc_pages, shown) for i, dist in listed],
            "profile": result.profiles[cluster.cluster_id],
            "attributes": _attributes(result, cluster.cluster_id),
            "listed": len(listed),
            # written with the assignments; a Spark run above its single-file cap has only Spark's parts
            "members_csv": csv_name if (folder / csv_name).is_file() else "",
            "prev_cluster": _cluster_link(cards[position - 1]) if position > 0 else None,
            "next_cluster": _cluster_link(cards[position + 1]) if position + 1 < len(cards) else None,
            "up": "",
        }
        _write(folder / cluster_page_name(cluster.cluster_id),
               env.get_template("cluster.html").render(common, **context))
    if with_doc_pages:
        (folder / "docs").mkdir()
        template = env.get_template("document.html")
        keys_by_cluster = {c.cluster_id: [t.key for t in c.chi2_terms[:MARKED_TERMS]] for c in result.clusters}
        members_of_text: dict[int, list[int]] = {}
        for j, text_index in enumerate(result.collection.text_of_doc):
            if result.collection.copies[text_index] > 1:
                members_of_text.setdefault(int(text_index), []).append(j)
        ranks = {i: (c, r) for c, members in members_by_cluster.items() for r, (i, _) in enumerate(members)}
        numbered = enumerate(docs)
        for i, doc in track(numbered) if track else numbered:
            t = result.collection.text_of_doc[i]
            cluster_id = int(result.clustering.labels[t])
            segments = mark_terms(doc.text, result.analyzer.spans(doc.text), keys_by_cluster[cluster_id])
            group = [j for j in members_of_text.get(int(t), []) if j != i][:GROUP_LISTED]
            order, rank = members_by_cluster[ranks[i][0]], ranks[i][1]
            _write(folder / doc_page_name(i), template.render(
                common, doc=doc, doc_id=shown(doc.doc_id), source=shown(doc.source), segments=segments,
                label=doc_label(doc.title), self_href=doc_page_name(i).removeprefix("docs/"),
                marked=sum(s.marked for s in segments), marked_terms=MARKED_TERMS, rank=rank + 1,
                prev_member=_doc_link(order[rank - 1][0], docs) if rank > 0 else None,
                next_member=_doc_link(order[rank + 1][0], docs) if rank + 1 < len(order) else None,
                cluster=result.clusters[cluster_id],
                cluster_href="../" + cluster_page_name(cluster_id),
                cluster_title=result.naming.clusters[cluster_id].name or result.clusters[cluster_id].headline,
                distance=float(result.clustering.distances[t]),
                copies=int(result.collection.copies[t]), up="../",
                group=[{"title": docs[j].title, "href": "../" + doc_page_name(j)} for j in group]))
    if exports_written is not None:
        exports_written()
    # the overview lists the exports' files, so it waits for them (no other page reads the folder's files)
    _write(folder / "index.html", env.get_template("run_index.html").render(
        common, exports=listed_files(folder, data_only=True), cards=cards, overview=_overview(cards),
        first=_first_listed(result, cards), over_time=_over_time(result, cards), up=""))
    # last, so that it lists every file written before it (and the few written when the run is put in place)
    _write(folder / "files.html", env.get_template("files.html").render(
        common, files=listed_files(folder, late=(*LATE_FILES, "files.html")), up=""))


def _write_search(folder: Path, result: RunResult, cards: Sequence[dict[str, Any]], with_doc_pages: bool) -> None:
    """search-index.js (documents by title and text opening, clusters by label and terms) and the script."""
    docs = result.collection.documents
    clusters = [search.SearchCluster(card["id"], card["title"], tuple(t.term for t in c.chi2_terms[:20]), card["href"])
                for card, c in zip(cards, result.clusters, strict=True)]
    labels = result.clustering.labels[result.collection.text_of_doc].tolist()  # Python ints, made once
    with_text = len(docs) <= search.SNIPPETS_UP_TO
    cluster_pages = [cluster_page_name(c) for c in range(max(labels, default=-1) + 1)]

    def found() -> Iterator[search.SearchDocument]:
        """The documents one at a time, written as they come: the index is never held whole."""
        for i, doc in enumerate(docs):
            cluster_id = labels[i]
            # a placeholder cut at the end of the slice may show half; the index keeps only the opening
            text = display_text(doc.text[: search.SNIPPET_CHARS * 3]) if with_text else ""
            href = doc_page_name(i) if with_doc_pages else cluster_pages[cluster_id]
            yield search.SearchDocument(doc.title, text, cluster_id, href)

    with (folder / search.INDEX_FILE).open("w", encoding="utf-8") as handle:
        handle.writelines(search.index_parts(clusters, found(), len(docs)))
    script = files("pilewise.output.site").joinpath("static", search.SCRIPT_FILE)
    (folder / search.SCRIPT_FILE).write_bytes(script.read_bytes())


def _render_map(
    folder: Path, result: RunResult, env: Environment, common: dict[str, Any], cards: Sequence[dict[str, Any]],
    with_doc_pages: bool,
) -> None:
    """map.html: the seeded sample of distinct texts laid out in 2-D, coloured and numbered by cluster."""
    docs, collection = result.collection.documents, result.collection
    rows = docmap.sample_rows(int(collection.copies.size), docmap.MAP_CAP, result.options.seed)
    space = result.vectors.space
    # computed by the pipeline beside describing (pipeline._Beside); in place for a result built without it
    points = result.map_points if result.map_points is not None else docmap.layout(space[rows], result.options.seed)
    marks = []
    for row, (x, y) in zip(rows, points, strict=True):
        first = int(collection.first_doc_of_text[row])
        marks.append(docmap.Mark(float(x), float(y), int(result.clustering.labels[row]), docs[first].title,
                                 doc_page_name(first) if with_doc_pages else None))
    placed = docmap.cluster_labels(marks, {c["id"]: c["title"] for c in cards}, {c["id"]: c["size"] for c in cards})
    label = (f"Map of {len(marks):,} of {int(collection.copies.size):,} distinct texts, coloured and numbered by "
             "cluster (t-SNE layout)")
    _write(folder / "map.html", env.get_template("map.html").render(
        common, svg=Markup(docmap.map_svg(marks, placed, label=label)), drawn=len(marks),
        texts=int(collection.copies.size), cap=docmap.MAP_CAP, sampled=len(marks) < collection.copies.size,
        legend=[{"id": c.cluster, "colour": c.colour, "label": c.label, "size": c.size,
                 "href": cluster_page_name(c.cluster), "drawn": sum(m.cluster == c.cluster for m in marks)}
                for c in placed], seed=result.options.seed, up=""))


def _overview(cards: Sequence[dict[str, Any]]) -> list[dict[str, Any]]:
    """One short row per cluster for the table above the cards."""
    return [{"id": c["id"], "title": c["title"], "href": c["href"], "size": c["size"], "share": c["share"],
             "stability": c["stability"], "stability_class": c["stability_class"],
             "stability_word": c["stability_reading"].split(",")[0],  # the reading's first words: "stable"
             "trend": c["trend"].reading if c["trend"] else ""} for c in cards]


def _first_listed(result: RunResult, cards: Sequence[dict[str, Any]]) -> list[dict[str, Any]]:
    """The new and rising clusters, new first, with the evidence of each (empty without dates)."""
    if result.trends is None:
        return []
    trends = result.trends
    listed = []
    for c in trends.first():
        trend = trends.clusters[c]
        before, latest = _share_change(trend.periods, trends.totals)
        listed.append({"id": c, "title": cards[c]["title"], "href": cards[c]["href"], "reading": trend.reading,
                       "evidence": trend.evidence, "before": before, "latest": latest})
    return listed


def _share_change(periods: Sequence[Any], totals: Sequence[int]) -> tuple[float, float]:
    """The cluster's share of the dated documents in the first and in the latest quarter of the periods."""
    quarter = max(1, len(periods) // 4)

    def share(chosen: Sequence[Any], total: Sequence[int]) -> float:
        return sum(p.count for p in chosen) / max(sum(total), 1)

    return share(periods[:quarter], totals[:quarter]), share(periods[-quarter:], totals[-quarter:])


def _over_time(result: RunResult, cards: Sequence[dict[str, Any]]) -> Markup | None:
    """All clusters' shares per period as small multiples (one row per cluster); None without dates."""
    if result.trends is None:
        return None
    trends = result.trends
    rows = [(f"{card['id']} {card['title']}", [p.count for p in t.periods], [p.share for p in t.periods], t.reading)
            for card, t in zip(cards, trends.clusters, strict=True)]
    label = (f"Share of each {trends.period}'s dated documents per cluster, {trends.starts[0]} to "
             f"{trends.starts[-1]}; each row scaled to its own peak")
    return Markup(trend_rows_svg(trends.starts, rows, label=label))


def _render_levels(folder: Path, result: RunResult, env: Environment, common: dict[str, Any]) -> None:
    """levels.html and dendrogram.svg: the tree's cuts for a range of k and how each splits at the next."""
    levels = result.levels
    docs = result.collection.documents
    first = result.collection.first_doc_of_text
    (folder / "dendrogram.svg").write_text(levels.dendrogram, encoding="utf-8")

    def described(k: int, cluster: int) -> str:
        """A cut's cluster by its terms (a coarse cluster is many documents: no one document stands for it)."""
        terms = levels.terms.get(k, ())
        if cluster < len(terms) and terms[cluster]:
            return ", ".join(terms[cluster])
        return str(docs[first[levels.clusters[k][cluster].exemplar_text]].title)  # no terms computed

    names = {c.cluster_id: c.shown for c in result.naming.clusters}
    splits = [
        {"k": s.k, "parent": s.parent, "parent_size": s.parent_size, "parent_terms": described(s.k, s.parent),
         "children": [{"id": c, "size": n, "terms": described(s.k + 1, c)} for c, n in s.children]}
        for s in levels.splits
    ]
    rows = [
        {"k": k, "sizes": ", ".join(f"{c.size:,}" for c in clusters),
         "clusters": [{"id": c.cluster_id, "size": c.size, "terms": described(k, c.cluster_id),
                       "run_clusters": [{"id": r, "href": cluster_page_name(r), "name": names.get(r, ""),
                                         "mixed": result.clusters[r].mixed}
                                        for r in c.run_clusters]}
                      for c in clusters]}
        for k, clusters in sorted(levels.clusters.items())
    ]
    _write(folder / "levels.html", env.get_template("levels.html").render(
        common, tree_method=levels.tree_method, k_min=levels.k_min, k_max=levels.k_max, splits=splits,
        levels=rows, centroid_tree=result.options.method != "ward", has_sweep=result.sweep is not None, up=""))


def render_sweep(folder: Path, sweep: Sweep, *, name: str, in_run: bool, source: str = "", method: str = "") -> Path:
    """sweep.html (or index.html for a stand-alone sweep) and sweep-curves.svg."""
    from pilewise.clustering.sweep import RECOMMENDATION_RULE
    from pilewise.output.plots import sweep_curves_svg

    folder.mkdir(parents=True, exist_ok=True)
    ks = [p.k for p in sweep.points]
    svg = sweep_curves_svg(ks, [
        ("Silhouette (cosine)", [p.silhouette for p in sweep.points], "higher is better"),
        ("Calinski-Harabasz", [p.calinski_harabasz for p in sweep.points], "higher is better"),
        ("Davies-Bouldin", [p.davies_bouldin for p in sweep.points], "lower is better"),
        ("Mean stability", [p.stability_mean for p in sweep.points], "higher is better"),
    ], sweep.recommended_k)
    (folder / "sweep-curves.svg").write_text(svg, encoding="utf-8")
    if not in_run:  # a stand-alone sweep's sweep.json is written by output.exports.write_sweep_json
        _copy_stylesheet(folder)
    page = folder / ("sweep.html" if in_run else "index.html")
    _write(page, _environment().get_template("sweep.html").render(
        run=name, sweep=sweep, rule=RECOMMENDATION_RULE, in_run=in_run, source=source, method=method,
        caution=CAUTION, css=STYLESHEET, up="" if in_run else "../../", finder=in_run))
    return page


def _attributes(result: RunResult, c: int) -> dict[str, Any] | None:
    """Display rows for one cluster's metadata: over- then under-represented values, numeric quartiles."""
    if result.metadata is None:
        return None
    cells = []
    for column in result.metadata.categorical:
        for r in (*column.over[c], *column.under[c]):
            cells.append({"column": column.column, "value": r.value, "count": r.count, "expected": r.expected,
                          "residual": r.residual})
    return {
        "cells": cells,
        "columns": ", ".join(col.column for col in result.metadata.categorical) or "the columns",
        "numeric": [{"column": col.column, **vars(col.clusters[c])} for col in result.metadata.numeric],
    }


def _kwic_groups(cluster: ClusterSummary, with_pages: bool, shown: Callable[[str], str]) -> list[dict[str, Any]]:
    """Keyword-in-context lines grouped by term, in the order of the terms."""
    groups: dict[str, list[dict[str, Any]]] = {}
    for line in cluster.kwic:
        href = doc_page_name(line.doc_index) if with_pages else None
        groups.setdefault(line.term, []).append({"line": line, "href": href, "doc_id": shown(line.doc_id)})
    return [{"term": term, "lines": lines} for term, lines in groups.items()]


def _card(cluster: ClusterSummary, result: RunResult) -> dict[str, Any]:
    largest = max(c.share for c in result.clusters)
    naming = result.naming.clusters[cluster.cluster_id]
    return {
        "id": cluster.cluster_id,
        "name": naming.name,
        # an unnamed mixed cluster's headline is one corner of it: the title says so
        "title": naming.name or (f"(mixed) {cluster.headline}" if cluster.mixed else cluster.headline),
        "suggested": naming.suggested,
        "name_origin": naming.origin,
        "name_note": naming.note,
        "name_flag": naming.flag,
        "href": cluster_page_name(cluster.cluster_id),
        "headline": cluster.headline,
        "headline_note": _headline_note(cluster, result),
        "mixed": cluster.mixed,
        "mixed_reason": cluster.mixed_reason,
        "languages": shares_line(result.languages.clusters[cluster.cluster_id])
        if result.languages is not None and result.languages.mixed else "",
        "size": cluster.size,
        "share": cluster.share,
        "bar": round(100 * cluster.share / largest, 1),
        "terms": [t.term for t in cluster.chi2_terms[:8]],
        "silhouette": cluster.silhouette,
        "stability": cluster.stability,
        "stability_reading": cluster.stability_reading,
        "stability_class": "stab-" + cluster.stability_reading.split(",")[0].replace(" ", "-"),
        "rule": result.rules.rules[cluster.cluster_id],
        **_trend_context(cluster.cluster_id, result),
    }


def _trend_context(c: int, result: RunResult) -> dict[str, Any]:
    """The cluster's trend reading, its evidence and two bar charts (card and page); empty without dates."""
    if result.trends is None:
        return {"trend": None}
    trends, trend = result.trends, result.trends.clusters[c]
    starts = trends.starts
    counts = [p.count for p in trend.periods]
    shares = [p.share for p in trend.periods]
    label = (f"{trend.dated:,} dated documents per {trends.period} from {starts[0]} to {starts[-1]}; "
             f"reading: {trend.reading}")
    return {
        "trend": trend,
        "trend_period": trends.period,
        "trend_small": Markup(trend_bars_svg(starts, counts, shares, width=180, height=28, label=label)),
        "trend_large": Markup(trend_bars_svg(starts, counts, shares, width=640, height=140, label=label, axis=True)),
    }


def _headline_note(cluster: ClusterSummary, result: RunResult) -> str:
    """Where the headline comes from, in one sentence."""
    if cluster.headline_source == "terms":
        return "The headline lists top terms: no title or sentence of the nearest members carries them."
    doc = result.collection.documents[cluster.headline_doc]
    what = "the title" if cluster.headline_source == "title" else "a sentence"
    doc_id = private_text(doc.doc_id) if result.options.redact else doc.doc_id  # ids may hold personal data
    return (f"The headline is {what} of {doc_id}, the member among the nearest that carries most of "
            "the cluster's terms.")


def _member_row(
    doc_index: int, distance: float, doc: Document, with_pages: bool, shown: Callable[[str], str]
) -> dict[str, Any]:
    return {
        "doc_id": shown(doc.doc_id),
        "title": doc.title,
        "distance": distance,
        "href": doc_page_name(doc_index) if with_pages else None,
        "snippet": snippet(doc.text),
    }


def snippet(text: str, limit: int = SNIPPET_CHARS) -> str:
    """A document's opening words for lists, redaction labels shown, cut at a word boundary with an ellipsis."""
    head = text[: 8 * limit]  # enough for `limit` characters unless the text opens with long whitespace runs
    if len(text) > len(head) and len(" ".join(head.split())) <= limit:
        head = text
    return clip_text(display_text(head), limit)


def doc_label(title: str) -> str:
    """A document's short label (menu, page title, previous/next links): its title cut at a word boundary."""
    return clip_text(title, LABEL_CHARS) or "(untitled)"


def _cluster_link(card: dict[str, Any]) -> dict[str, Any]:
    return {"id": card["id"], "href": card["href"], "title": clip_text(card["title"], LABEL_CHARS)}


def _doc_link(doc_index: int, docs: Sequence[Document]) -> dict[str, str]:
    """A link from one document page to another (both live in docs/)."""
    return {"href": doc_page_name(doc_index).removeprefix("docs/"), "title": doc_label(docs[doc_index].title)}


def _members_nearest_first(result: RunResult, cap: int | None) -> dict[int, list[tuple[int, float]]]:
    """Each cluster's first `cap` documents (all when None), nearest to its centroid first (ties in reading order)."""
    import numpy as np

    labels = result.clustering.labels[result.collection.text_of_doc]
    distances = result.clustering.distances[result.collection.text_of_doc]
    order = np.lexsort((np.arange(labels.size), distances, labels))
    starts = np.searchsorted(labels[order], np.arange(len(result.clusters) + 1))
    return {
        c.cluster_id: [(int(i), float(distances[i]))
                       for i in order[starts[c.cluster_id] : starts[c.cluster_id + 1]][:cap]]
        for c in result.clusters
    }


def mark_terms(text: str, spans: Sequence[tuple[int, int, str]], keys: Sequence[str]) -> list[Segment]:
    """Split `text` into segments, marking words and two-word phrases that are among `keys`."""
    words = {k for k in keys if " " not in k}
    phrases = {tuple(k.split(" ")) for k in keys if " " in k}
    marks: list[tuple[int, int]] = []
    for j, (start, end, term) in enumerate(spans):
        if j + 1 < len(spans) and (term, spans[j + 1][2]) in phrases:
            marks.append((start, spans[j + 1][1]))
        elif term in words:
            marks.append((start, end))
    segments: list[Segment] = []
    cursor = 0
    for start, end in marks:
        if start < cursor:
            continue
        if start > cursor:
            segments.append(Segment(display_text(text[cursor:start]), False))
        segments.append(Segment(text[start:end], True))
        cursor = end
    if cursor < len(text):
        segments.append(Segment(display_text(text[cursor:]), False))
    return segments


def _write(path: Path, content: str) -> None:
    path.write_text(content, encoding="utf-8")


MOVED_PAIRS_ON_PAGE = 200  # pairs of clusters listed on a comparison page, the largest first; compare.json has all


def _after_badge(text: str, reading: str) -> str:
    """A fate's sentence without the opening words the badge beside it already says ("kept" "kept as 3": "as 3")."""
    words, badge = text.split(" "), reading.split(" ")
    same = 0
    while same < min(len(words) - 1, len(badge)) and words[same] == badge[same]:
        same += 1
    return " ".join(words[same:])


def _moved_row(m: dict[str, Any], pages_b: str | None) -> dict[str, Any]:
    """A moved document as the comparison page shows it: ids and titles with personal data redacted."""
    row_b = m.get("row_b", -1)
    href = pages_b + doc_page_name(row_b) if pages_b is not None and isinstance(row_b, int) and row_b >= 0 else None
    return {"doc_id": private_text(str(m["doc_id"])), "title": doc_label(private_text(str(m.get("title") or ""))),
            "href": href}


def _shade(share: float) -> str:
    """CSS class for a cell's share of its row (the pages' CSP forbids inline styles)."""
    if share <= 0:
        return ""
    return f"s{min(5, 1 + int(share * 5))}"


def render_comparison(folder: Path, out: Path, document: dict[str, Any], run_a: Path, run_b: Path) -> Path:
    """Write the comparison's page (index.html) and stylesheet into `folder` (OUT/compare/A--B).

    Links to the runs are relative paths from the comparison's folder to the run folders themselves,
    so that they hold wherever the runs lie. The folder may be a finished one that a later run
    refreshes, so every file is replaced atomically.
    """
    _copy_stylesheet(folder, atomic=True)
    a, b = document["runs"]["a"], document["runs"]["b"]
    table = document["contingency"]
    rows = [
        {"cluster": row["cluster"], "headline": row["headline"], "size": row["size"],
         "cells": [{"count": c, "share": sh, "shade": _shade(sh)} for c, sh in zip(row["counts"], row["shares"],
                                                                                   strict=True)]}
        for row in table["rows"]
    ]
    # documents link to their pages in run B when B wrote document pages (it does up to DOC_PAGE_CAP documents)
    pages_b = _href(folder, run_b) + "/" if (run_b / "docs").is_dir() else None
    pairs = [{**p, "headline_a": clip_text(p["headline_a"], LABEL_CHARS),
              "headline_b": clip_text(p["headline_b"], LABEL_CHARS),
              "documents": [_moved_row(m, pages_b) for m in p["documents"]]}
             for p in document["moved"].get("pairs", [])[:MOVED_PAIRS_ON_PAGE]]
    # headlines cut as in the moved pairs below: a table row per cluster stays a line or two high
    fates = {side: [{**f, "headline": clip_text(str(f["headline"]), LABEL_CHARS),
                     "text": _after_badge(f["text"], f["reading"])} for f in document[side]]
             for side in ("fates_a", "fates_b")}
    homes = [out / "index.html", *(f.resolve().parent.parent / "index.html" for f in (run_a, run_b)
                                   if f.resolve().parent.name == "runs")]
    home = next((_href(folder, h) for h in homes if h.is_file()), None)
    page = folder / "index.html"
    write_text_atomically(page, _environment().get_template("compare.html").render(
        doc=document, fates_a=fates["fates_a"], fates_b=fates["fates_b"], a=a, b=b, ka=len(table["clusters_a"]),
        kb=len(table["clusters_b"]), rows=rows,
        pairs=pairs, pairs_total=len(document["moved"].get("pairs", [])), home=home,
        href_a=_href(folder, run_a) + "/", href_b=_href(folder, run_b) + "/",
        caution=CAUTION, css=STYLESHEET, up=""))
    return page


def _href(folder: Path, target: Path) -> str:
    """A relative link from a page in `folder` to `target`, URL-quoted."""
    return quote(os.path.relpath(target.resolve(), folder.resolve()).replace(os.sep, "/"))


def private_text(text: str) -> str:
    """`text` as pages show it: e-mail addresses, phone numbers and the like replaced by labels."""
    return display_text(redact(text).text)


def render_root_index(
    out: Path, runs: Sequence[FinishedRun], pairs: Sequence[tuple[RunPair, Path]], sweeps: Sequence[FinishedSweep],
    notes: Sequence[str], assigned: Sequence[FinishedAssignment] = (),
) -> Path:
    """(Re)write OUT/index.html and every listed run's comparisons.html from finished records.

    `pairs` are the comparisons written, each with its page; `assigned` the `pilewise assign` folders;
    `notes` name what was left out. The
    caller holds the site's lock. Run folders are finished, so their comparisons.html is replaced
    atomically.
    """
    env = _environment()
    listed = [{"a": p.run_a.folder.name, "b": p.run_b.folder.name, "ka": p.run_a.k, "kb": p.run_b.k,
               "ari": p.ari, "nmi": p.nmi, "href": _href(out, page)} for p, page in pairs]
    for run in runs:
        name = run.folder.name
        mine = [{"other": p["b"] if p["a"] == name else p["a"], "k": p["kb"] if p["a"] == name else p["ka"], **p}
                for p in listed if name in (p["a"], p["b"])]
        write_text_atomically(out / "runs" / name / "comparisons.html", env.get_template("comparisons.html").render(
            run=name, pairs=mine, caution=CAUTION, css=STYLESHEET, up="",
            has_sweep=(run.folder / "sweep.html").is_file(),
            finder=(run.folder / search.INDEX_FILE).is_file()))  # runs written before search have none
    _copy_stylesheet(out, atomic=True)
    page = out / "index.html"
    write_text_atomically(page, env.get_template("root_index.html").render(
        runs=[_run_line(run) for run in runs], comparisons=listed,
        sweeps=[{"name": s.folder.name, "href": f"sweeps/{quote(s.folder.name)}/index.html", "k": s.recommended_k,
                 "reason": s.reason} for s in sweeps],
        assigned=[_assigned_line(a) for a in assigned],
        notes=list(notes), caution=CAUTION, css=STYLESHEET, up=""))
    return page


def _assigned_line(found: FinishedAssignment) -> dict[str, Any]:
    """The root index's line for one `pilewise assign` folder; its run linked where assigned.json says."""
    folder = f"assigned/{quote(found.folder.name)}"
    # run_href is relative to the assignment's folder (already URL-safe path parts from os.path.relpath)
    run_href = posixpath.normpath(f"{folder}/{quote(found.run_href)}") if found.run_href else ""
    return {
        "name": found.folder.name,
        "href": f"{folder}/index.html",
        "run": found.run,
        "run_href": run_href,
        "documents": found.documents,
        "fits": ", ".join(f"{found.fits[fit]:,} {fit}" for fit in ("good", "weak", "none") if fit in found.fits),
        "source": private_text(found.source),
        "created": found.created,
    }


def after_figure(reading: str, value: float | int | None) -> str:
    """A reading without the figure it starts with, for a page that shows the figure just before it
    ("0.162 against 0.066 ..." beside 0.162 reads "against 0.066 ...")."""
    if value is None:
        return reading
    shown = f"{value:.3f} "
    return reading.removeprefix(shown) if reading.startswith(shown) else reading


def _run_line(run: FinishedRun) -> dict[str, Any]:
    """The root index's line for one run."""
    return {
        "name": run.folder.name,
        "href": f"runs/{quote(run.folder.name)}/index.html",
        "k": run.k,
        "documents": run.clustered,
        "silhouette": run.silhouette,
        "reading": after_figure(run.silhouette_reading, run.silhouette),
        "created": run.created,
        "source": private_text(run.source),
        "headlines": [c.headline for c in run.clusters[:3]],
    }
