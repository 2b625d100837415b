"""The run's search index: what it holds, and that no document text can break out of the script."""

from __future__ import annotations

import json

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
