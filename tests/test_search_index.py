"""The run's search index: what it holds, and that no document text can break out of the script."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from pilewise.output.search import (
    DOCUMENTS_UP_TO,
    SNIPPET_CHARS,
    SearchCluster,
    SearchDocument,
    index_script,
)

PREFIX, SUFFIX = "window.pilewiseSearch = ", ";\n"


def _data(script: str) -> dict:
    assert script.startswith(PREFIX) and script.endswith(SUFFIX)
    return json.loads(script[len(PREFIX):-len(SUFFIX)])


def test_index_round_trips_titles_text_openings_and_clusters() -> None:
    clusters = [SearchCluster(0, "soil / compost", ("soil", "compost"), "clusters/c00.html")]
    docs = [SearchDocument("Mulch  order", "Soil\nand   compost " + "x" * 500, 0, "docs/d0000000.html")]
    data = _data(index_script(clusters, docs))
    assert data["clusters"] == [[0, "soil / compost", ["soil", "compost"], "clusters/c00.html"]]
    title, text, cluster, href = data["docs"][0]
    assert (title, cluster, href) == ("Mulch  order", 0, "docs/d0000000.html")
    assert text.startswith("Soil and compost x") and len(text) == SNIPPET_CHARS  # white space collapsed
    assert data["documents"] == 1 and data["searched"] == "titles and text openings"


def test_markup_and_line_separators_cannot_end_the_script() -> None:
    # HTML Living Standard, "restrictions for contents of script elements": "</script" ends a script element;
    # ECMAScript before ES2019 ends a string at U+2028/U+2029 (JSON allows them raw). Both must be escaped.
    hostile = "</script><script>alert(1)</script>\u2028\u2029<!--"
    script = index_script([SearchCluster(0, hostile, (hostile,), "c.html")],
                          [SearchDocument(hostile, hostile, 0, "d.html")])
    assert "<" not in script and "\u2028" not in script and "\u2029" not in script
    data = _data(script)
    assert data["docs"][0][0] == hostile and data["clusters"][0][1] == hostile  # the text itself is kept


def test_very_large_runs_search_clusters_only() -> None:
    docs = [SearchDocument("t", "x", 0, "c.html")] * (DOCUMENTS_UP_TO + 1)
    data = _data(index_script([SearchCluster(0, "a", ("a",), "c.html")], docs))
    assert data["docs"] == [] and data["searched"] == "clusters only" and data["documents"] == DOCUMENTS_UP_TO + 1


def test_a_run_writes_its_index_and_every_result_link_exists(
    topic_folder: Path, tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    from bs4 import BeautifulSoup

    from pilewise.options import RunOptions
    from pilewise.output import site
    from pilewise.pipeline import run_collection

    run = run_collection(RunOptions(source=topic_folder, k=3, out=tmp_path / "out", quiet=True)).run_folder
    data = _data((run / "search-index.js").read_text(encoding="utf-8"))
    assert (run / "pilewise-search.js").is_file()
    assert data["documents"] == len(data["docs"]) == 60  # every document, titled as its page
    for title, _, cluster, href in data["docs"]:
        page = BeautifulSoup((run / href).read_text(encoding="utf-8"), "html.parser")
        assert page.h1.get_text() == title and f"Cluster {cluster}" in page.find("p", class_="cid").get_text()
    assert [c[3] for c in data["clusters"]] == ["cluster-00.html", "cluster-01.html", "cluster-02.html"]
    # without document pages (above the cap) results lead to the document's cluster page
    monkeypatch.setattr(site, "DOC_PAGE_CAP", 10)
    run = run_collection(RunOptions(source=topic_folder, k=3, out=tmp_path / "out2", quiet=True)).run_folder
    data = _data((run / "search-index.js").read_text(encoding="utf-8"))
    assert not (run / "docs").exists()
    assert {href for *_, href in data["docs"]} == {"cluster-00.html", "cluster-01.html", "cluster-02.html"}
    assert all(href == f"cluster-{cluster:02d}.html" for _, _, cluster, href in data["docs"])
