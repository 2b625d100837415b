"""Bounds that keep a large run's site small: the members listed on a cluster page, the search index's openings."""

from __future__ import annotations

import csv
import json
import random
import unicodedata
from collections.abc import Iterator
from pathlib import Path

import pytest
from bs4 import BeautifulSoup

from pilewise.describe.snippets import clip_text
from pilewise.output import search, site
from pilewise.output.search import SearchCluster, SearchDocument, index_script

PREFIX, SUFFIX = "window.pilewiseSearch = ", ";\n"


def _words(text: str) -> list[str]:
    """pilewise-search.js `words`: lower case, split on every character that is no letter or number."""
    # ECMAScript /[^\p{L}\p{N}]+/u: the Unicode general categories L* and N* (Unicode Standard, ch. 4.5)
    out, word = [], []
    for ch in text.lower():
        if unicodedata.category(ch)[0] in "LN":
            word.append(ch)
        elif word:
            out.append("".join(word))
            word = []
    if word:
        out.append("".join(word))
    return out


def _found(docs: list[list[object]], query: str) -> list[int]:
    """pilewise-search.js `search` for documents: every query word a substring of the lower-cased title + text."""
    needles = _words(query)
    return [i for i, (title, text, *_) in enumerate(docs)
            if all(n in (str(title) + " " + str(text)).lower() for n in needles)]


def _docs(script: str) -> list[list[object]]:
    assert script.startswith(PREFIX) and script.endswith(SUFFIX)
    return json.loads(script[len(PREFIX):-len(SUFFIX)])["docs"]


def _collection(rng: random.Random) -> list[SearchDocument]:
    """Titles from the first line (cut or whole), titles of their own, titles cut inside a long word."""
    vocab = ["Σοφία", "ΟΔΟΣ", "İstanbul", "straße", "東京都", "café", "x-ray", "order", "1042", "naïve", "ﬁle",
             "Supercalifragilisticexpialidocious", "don't", "tea", "bike", "…", "A.B", "ΣΣ"]
    docs = []
    for n in range(400):
        text = " ".join(rng.choice(vocab) for _ in range(rng.randint(1, 60)))
        kind = n % 4
        if kind == 0:  # a title taken from the text's first line, cut at a word boundary as the readers do
            title = clip_text(text, rng.randint(4, 80))
        elif kind == 1:  # a title of its own (a title column, a subject line)
            title = " ".join(rng.choice(vocab) for _ in range(rng.randint(0, 5)))
        elif kind == 2:  # the text's whole opening as title, a word joined to it without a space
            title = clip_text(text, 250)
            text = text + rng.choice(["", "s", ".", " and more"])
        else:  # a title that is a cut-off start of the text's first word
            title = text[: rng.randint(1, 12)]
        docs.append(SearchDocument(title, text, n % 3, f"cluster-{n % 3:02d}.html"))
    return docs


def _replaced_index(documents: list[SearchDocument]) -> list[list[object]]:
    """The index's documents as written before openings lost their title's copy (the replaced code path)."""
    return [[d.title, search.opening(d.text), d.cluster_id, d.href] for d in documents]


def test_openings_without_the_titles_copy_give_the_same_search_results() -> None:
    rng = random.Random(15)
    documents = _collection(rng)
    new = _docs(index_script([SearchCluster(0, "a", ("a",), "c.html")], documents))
    old = _replaced_index(documents)
    assert [d[0] for d in new] == [d[0] for d in old] and [d[2:] for d in new] == [d[2:] for d in old]
    shortened = sum(len(str(n[1])) < len(str(o[1])) for n, o in zip(new, old, strict=True))
    assert shortened >= 100  # the first kind (100 documents) at least: the check below is not empty
    # every word and every piece of a word of the collection, alone and in pairs, finds the same documents
    queries = set()
    for d in old:
        for word in _words(f"{d[0]} {d[1]}"):
            queries.update({word, word[:3], word[1:], word[-2:]})
    queries_list = sorted(queries)
    queries_list += [f"{a} {b}" for a, b in zip(queries_list, reversed(queries_list), strict=True)]
    for query in queries_list:
        assert _found(new, query) == _found(old, query), query


def test_a_title_that_is_not_the_openings_start_leaves_the_opening_whole() -> None:
    # the examples of the rule in search._after_title's docstring
    assert search._after_title("Refund", "Refund for order 12") == "for order 12"
    assert search._after_title("Refund for…", "Refund for order 12") == "order 12"
    assert search._after_title("Refund", "Refunds for order 12") == "Refunds for order 12"  # inside a word
    assert search._after_title("Order", "Refund for order 12") == "Refund for order 12"
    assert search._after_title("", "Refund") == "Refund"
    assert search._after_title("Refund", "Refund") == ""


def _cluster_sizes(assignments: Path) -> dict[int, list[tuple[float, str]]]:
    """Each cluster's (distance, doc_id) pairs, read from assignments.csv (Python csv module)."""
    members: dict[int, list[tuple[float, str]]] = {}
    with assignments.open(encoding="utf-8", newline="") as handle:
        for row in csv.DictReader(handle):
            members.setdefault(int(row["cluster"]), []).append((float(row["distance"]), row["doc_id"]))
    return members


@pytest.mark.parametrize("doc_pages", [True, False])
def test_cluster_pages_list_the_nearest_members_and_link_every_member(
    topic_folder: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch, doc_pages: bool
) -> None:
    from pilewise.options import RunOptions
    from pilewise.pipeline import run_collection

    monkeypatch.setattr(site, "MEMBERS_LISTED", 7)
    if not doc_pages:
        monkeypatch.setattr(site, "DOC_PAGE_CAP", 10)
    run = run_collection(RunOptions(source=topic_folder, k=3, out=tmp_path / "out", quiet=True)).run_folder
    assert not list(run.glob("cluster-*-members-*.html"))  # one page per cluster
    assert (run / "docs").is_dir() == doc_pages
    members = _cluster_sizes(run / "assignments.csv")
    assert sum(len(m) for m in members.values()) == 60  # conftest: 60 notes, every one a document
    for cluster, pairs in members.items():
        page = BeautifulSoup((run / f"cluster-{cluster:02d}.html").read_text(encoding="utf-8"), "html.parser")
        rows = page.find("table", class_="members").tbody.find_all("tr")
        # nearest first, ties in reading order (the documents are read in file-name order, as their ids)
        nearest = [doc_id for _, doc_id in sorted(pairs, key=lambda p: (round(p[0], 6), p[1]))][:7]
        assert [r.find_all("td")[2].get_text() for r in rows] == nearest
        assert [r.td.get_text() for r in rows] == [str(n) for n in range(1, 8)]
        text = " ".join(page.get_text().split())
        assert (f"The 7 members nearest the centroid are listed here; {len(pairs) - 7} more are not: every one "
                f"of the {len(pairs)} members, with its distance, is in members/cluster-{cluster:02d}.csv.") in text
        link = page.find("a", href=f"members/cluster-{cluster:02d}.csv")
        assert link is not None
        with (run / link["href"]).open(encoding="utf-8", newline="") as handle:
            listed = sorted(row["doc_id"] for row in csv.DictReader(handle))
        assert listed == sorted(doc_id for _, doc_id in pairs)  # nothing lost: every member is in the file


def test_the_index_written_in_pieces_is_one_json_dump_of_the_whole(monkeypatch: pytest.MonkeyPatch) -> None:
    # the replaced code path: one json.dumps of the whole index (compact separators, Python json module docs),
    # then "<", U+2028 and U+2029 escaped
    monkeypatch.setattr(search, "PART_DOCUMENTS", 3)
    hostile = "</script>\u2028\u2029 <b>x</b>"
    clusters = [SearchCluster(0, hostile, ("a", hostile), "cluster-00.html"), SearchCluster(1, "b", (), "c1.html")]
    rng = random.Random(7)
    for n in (0, 1, 3, 4, 10):  # no document, one, a piece exactly full, one over, several pieces
        documents = [d if i % 3 else SearchDocument(hostile, hostile + d.text, d.cluster_id, d.href)
                     for i, d in enumerate(_collection(rng)[:n])]
        data = {"clusters": [[c.cluster_id, c.label, list(c.terms), c.href] for c in clusters],
                "docs": [[d.title, search._after_title(d.title, search.opening(d.text)), d.cluster_id, d.href]
                         for d in documents],
                "documents": n, "searched": "titles and text openings"}
        payload = json.dumps(data, ensure_ascii=False, separators=(",", ":"))
        payload = payload.replace("<", "\\u003c").replace("\u2028", "\\u2028").replace("\u2029", "\\u2029")
        parts = list(search.index_parts(clusters, iter(documents), n))
        assert "".join(parts) == f"{PREFIX}{payload}{SUFFIX}"
        assert len(parts) == 2 + -(-n // 3)  # head, one piece per 3 documents, tail


def test_above_the_cap_the_documents_are_not_read_and_the_index_says_clusters_only() -> None:
    def unread() -> Iterator[SearchDocument]:
        raise AssertionError("documents read above DOCUMENTS_UP_TO")
        yield  # pragma: no cover

    script = "".join(search.index_parts([SearchCluster(0, "a", ("a",), "c.html")], unread(),
                                        search.DOCUMENTS_UP_TO + 1))
    data = json.loads(script[len(PREFIX):-len(SUFFIX)])
    # regression: a run above the cap wrote "documents": 0 and "searched": "titles and text openings"
    assert data["docs"] == [] and data["documents"] == search.DOCUMENTS_UP_TO + 1
    assert data["searched"] == "clusters only"
