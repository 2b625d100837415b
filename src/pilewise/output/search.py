"""The run's search index: a script file that sets one variable, read by the site's own search script.

Pages open from disk, where a browser refuses to fetch a JSON file; a `<script src>` of the run's own
folder is allowed by the pages' Content-Security-Policy (`script-src 'self'`). The index holds what the
pages already show: every document's title and the opening of its text (redacted as on the pages), and
every cluster's name and top terms. The script builds result links with DOM text nodes, never markup, so
no document text can run as code.
"""

from __future__ import annotations

import json
from collections.abc import Iterable, Iterator, Sequence
from dataclasses import dataclass

from pilewise.describe.snippets import ELLIPSIS, clip_text

INDEX_FILE = "search-index.js"
SCRIPT_FILE = "pilewise-search.js"
SNIPPET_CHARS = 200  # opening of each text kept for searching and for the result line
SNIPPETS_UP_TO = 50_000  # above this many documents only titles are searched (the index stays near 10 MB)
DOCUMENTS_UP_TO = 200_000  # above this many only clusters are searched
PART_DOCUMENTS = 2_000  # documents per piece written: the whole index is never one string
_ENCODER = json.JSONEncoder(ensure_ascii=False, separators=(",", ":"))  # json.dumps with these options


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
    return "".join(index_parts(clusters, documents, len(documents)))


def index_parts(
    clusters: Sequence[SearchCluster], documents: Iterable[SearchDocument], count: int
) -> Iterator[str]:
    """`index_script` in pieces of `PART_DOCUMENTS` documents, for writing to a file as they are made.

    Parameters
    ----------
    clusters : sequence of SearchCluster
        Every cluster of the run.
    documents : iterable of SearchDocument
        Every document, in reading order; read only when `count` is at most `DOCUMENTS_UP_TO`.
    count : int
        How many documents the run has (the caps are decided by it).

    Yields
    ------
    str
        Pieces that join to one statement: the same text as one `json.dumps` of the whole index.
    """
    with_text = count <= SNIPPETS_UP_TO
    with_docs = count <= DOCUMENTS_UP_TO
    head = [[c.cluster_id, c.label, list(c.terms), c.href] for c in clusters]
    yield f'window.pilewiseSearch = {{"clusters":{_json(head)},"docs":['
    rows: list[list[object]] = []
    first = True
    for d in documents if with_docs else ():
        rows.append([d.title, _after_title(d.title, opening(d.text)) if with_text else "", d.cluster_id, d.href])
        if len(rows) == PART_DOCUMENTS:
            yield ("" if first else ",") + _json(rows)[1:-1]  # a list's items without its brackets
            rows, first = [], False
    if rows:
        yield ("" if first else ",") + _json(rows)[1:-1]
    searched = "titles and text openings" if with_text else "titles" if with_docs else "clusters only"
    yield f'],"documents":{count},"searched":{_json(searched)}}};\n'


def _json(value: object) -> str:
    """Compact JSON with "<", U+2028 and U+2029 escaped (see `index_script`)."""
    text = _ENCODER.encode(value)
    return text.replace("<", "\\u003c").replace("\u2028", "\\u2028").replace("\u2029", "\\u2029")


def opening(text: str) -> str:
    """The opening of a text for the index: whitespace folded and cut at a word boundary by the pages' one cutter.

    An opening given again comes back unchanged (it is folded and fits), so callers may cut texts early.
    """
    return clip_text(text[: SNIPPET_CHARS * 2], SNIPPET_CHARS)


def _after_title(title: str, opening: str) -> str:
    """`opening` less the title it starts with (titles taken from a text's first line), up to a space.

    The search script matches a document's words against its title and opening joined by a space, and a word
    never spans a space, so every word of the title's copy is still found in the title: the results are the
    same, and at 50,000 such documents the index is about a third smaller. A title that is not the opening's
    start (a subject line, a title column), or that ends inside one of its words, leaves it whole.
    """
    head = title.removesuffix(ELLIPSIS)  # a title cut short ends in the cutter's ellipsis
    if head and opening.startswith(head) and opening[len(head) : len(head) + 1] in ("", " "):
        return opening[len(head) + 1 :]
    return opening
