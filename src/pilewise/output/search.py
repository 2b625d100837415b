"""The run's search index: a script file that sets one variable, read by the site's own search script.

Pages open from disk, where a browser refuses to fetch a JSON file; a `<script src>` of the run's own
folder is allowed by the pages' Content-Security-Policy (`script-src 'self'`). The index holds what the
pages already show: every document's title and the opening of its text (redacted as on the pages), and
every cluster's name and top terms. The script builds result links with DOM text nodes, never markup, so
no document text can run as code.
"""

from __future__ import annotations

import json
from collections.abc import Sequence
from dataclasses import dataclass

from pilewise.describe.snippets import clip_text

INDEX_FILE = "search-index.js"
SCRIPT_FILE = "pilewise-search.js"
SNIPPET_CHARS = 200  # opening of each text kept for searching and for the result line
SNIPPETS_UP_TO = 50_000  # above this many documents only titles are searched (the index stays near 10 MB)
DOCUMENTS_UP_TO = 200_000  # above this many only clusters are searched


@dataclass(frozen=True)
class SearchCluster:
    cluster_id: int
    label: str  # name, or headline
    terms: tuple[str, ...]
    href: str


@dataclass(frozen=True)
class SearchDocument:
    title: str
    text: str
    cluster_id: int
    href: str


def index_script(clusters: Sequence[SearchCluster], documents: Sequence[SearchDocument]) -> str:
    """The index as one JavaScript statement, `window.pilewiseSearch = {...};`, safe inside any page.

    JSON is a subset of JavaScript once U+2028 and U+2029 are escaped; "<" is escaped too so that no
    "</script>" in a document can end a script element if the file is ever inlined.
    """
    with_text = len(documents) <= SNIPPETS_UP_TO
    with_docs = len(documents) <= DOCUMENTS_UP_TO
    data = {
        "clusters": [[c.cluster_id, c.label, list(c.terms), c.href] for c in clusters],
        "docs": [[d.title, _snippet(d.text) if with_text else "", d.cluster_id, d.href]
                 for d in (documents if with_docs else ())],
        "documents": len(documents),
        "searched": "titles and text openings" if with_text else "titles" if with_docs else "clusters only",
    }
    payload = json.dumps(data, ensure_ascii=False, separators=(",", ":"))
    payload = payload.replace("<", "\\u003c").replace("\u2028", "\\u2028").replace("\u2029", "\\u2029")
    return f"window.pilewiseSearch = {payload};\n"


def _snippet(text: str) -> str:
    """The opening of a text for the index: whitespace folded and cut at a word boundary by the pages' one cutter."""
    return clip_text(text[: SNIPPET_CHARS * 2], SNIPPET_CHARS)

