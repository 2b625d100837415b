"""The run's pages: sortable tables, previous/next links, titles that match the menu, the comparison page
grouped by pairs of clusters, snippets cut at word boundaries, the files list and the per-cluster CSVs."""

from __future__ import annotations

import csv
import json
import unicodedata
from collections import Counter
from pathlib import Path

import pytest
from bs4 import BeautifulSoup
from hypothesis import given
from hypothesis import strategies as st

from helpers import write_topic_folder
from pilewise.describe.compare import MOVED_PER_PAIR, MovedDoc, moved_pairs
from pilewise.describe.snippets import ELLIPSIS, clip_text
from pilewise.options import RunOptions
from pilewise.output.exports import describe_file, file_key
from pilewise.output.site import _after_badge
from pilewise.pipeline import compare_runs, run_collection


def _soup(path: Path) -> BeautifulSoup:
    return BeautifulSoup(path.read_text(encoding="utf-8"), "html.parser")


def _rows(path: Path) -> list[list[str]]:
    with path.open(encoding="utf-8", newline="") as handle:
        return list(csv.reader(handle))


@pytest.fixture(scope="module")
def site(tmp_path_factory: pytest.TempPathFactory) -> Path:
    base = tmp_path_factory.mktemp("pages")
    data = base / "notes"
    write_topic_folder(data, per_topic=12)
    # a title a spreadsheet would run as a formula, and a note whose words are in no cluster's top terms
    (data / "formula.txt").write_text("=SUM(1,2) soil\nsoil compost seedling mulch soil compost\n", encoding="utf-8")
    (data / "stray.txt").write_text("Stray\nquokka wombat platypus echidna dingo\n", encoding="utf-8")
    run_collection(RunOptions(source=data, k=3, out=base / "site", quiet=True))
    run_collection(RunOptions(source=data, k=5, out=base / "site", quiet=True))
    compare_runs(base / "site" / "runs" / "k3", base / "site" / "runs" / "k5")
    return base / "site"


# --- snippets -----------------------------------------------------------------------------------------


def test_snippets_cut_after_the_last_whole_word() -> None:
    # UAX #14 (line breaking): a break may follow a space; the cut keeps whole words only
    assert clip_text("alpha beta gamma delta", 12) == "alpha beta" + ELLIPSIS
    assert clip_text("  alpha\n\tbeta  ", 20) == "alpha beta"  # fits: whitespace folded, no ellipsis


def test_a_long_word_is_cut_inside_rather_than_dropped() -> None:
    # common practice: a URL longer than the room still shows its start
    url = "https://example.org/" + "x" * 200
    assert clip_text("see " + url, 40) == ("see " + url)[:39] + ELLIPSIS


def test_cjk_text_is_cut_between_ideographs() -> None:
    # UAX #14: ideographs (line-break class ID) allow a break between any two of them
    text = "日本語の文章を短く切ります"
    assert clip_text(text, 6) == text[:5] + ELLIPSIS


def test_a_text_opening_with_marks_is_cut_safely() -> None:
    # regression (found by the property test below): a text opening with a bare mark and no word that fits
    assert clip_text("\u0301aa", 2) == "\u0301" + ELLIPSIS
    assert clip_text("a\u0301\u0301b", 2) == ELLIPSIS  # the first cluster (3 code points) does not fit


def test_combining_marks_stay_with_their_base() -> None:
    # UAX #29: a combining mark (Extend) belongs to the grapheme cluster of the letter before it
    decomposed = unicodedata.normalize("NFD", "é") * 20  # e + U+0301, twenty times, no spaces
    clipped = clip_text(decomposed, 10)
    assert clipped.endswith(ELLIPSIS)
    assert unicodedata.normalize("NFC", clipped[:-1]) == "é" * 4
    emoji = "👩\u200d💻" * 10  # woman + zero-width joiner + laptop: one cluster (UAX #29 GB11)
    assert clip_text(emoji, 6)[:-1] == "👩\u200d💻"


@given(st.text(alphabet=st.sampled_from("ab é\u0301日本 \n"), max_size=80), st.integers(2, 40))
def test_clipped_text_is_a_prefix_that_fits(text: str, limit: int) -> None:
    folded = " ".join(text.split())
    clipped = clip_text(text, limit)
    assert len(clipped) <= limit
    if clipped == folded:
        return
    assert clipped.endswith(ELLIPSIS) and folded.startswith(clipped[:-1])
    rest = folded[len(clipped) - 1 :]
    if clipped[:-1]:  # UAX #29: never between a letter and its mark
        assert not unicodedata.combining(rest[0])


# --- cluster and document pages -----------------------------------------------------------------------


def test_named_tables_are_sortable_with_raw_numbers(site: Path) -> None:
    run = site / "runs" / "k3"
    page = _soup(run / "cluster-00.html")
    tables = page.find_all("table", class_="sortable")
    assert {"terms", "members"} <= {c for t in tables for c in t["class"]}
    for table in tables:
        for cell in table.select("td.n"):
            float(cell["data-sort"])  # a raw number (the text shows it with thousands separators)
    for name in ("levels.html", "comparisons.html", "files.html"):
        assert _soup(run / name).find("table", class_="sortable") is not None, name
    assert _soup(site / "compare" / "k3--k5" / "index.html").find("table", class_="moved sortable") is not None
    for folder in (run, site, site / "compare" / "k3--k5"):
        assert (folder / "pilewise-sort.js").is_file(), folder


def test_clusters_link_to_their_neighbours(site: Path) -> None:
    run = site / "runs" / "k5"
    for c in range(5):
        page = _soup(run / f"cluster-{c:02d}.html")
        prev = {a["href"] for a in page.find_all("a", rel="prev")}
        nxt = {a["href"] for a in page.find_all("a", rel="next")}
        assert prev == ({f"cluster-{c - 1:02d}.html"} if c > 0 else set())
        assert nxt == ({f"cluster-{c + 1:02d}.html"} if c < 4 else set())


def test_members_link_nearest_first_through_the_whole_cluster(site: Path) -> None:
    run = site / "runs" / "k3"
    rows = _rows(run / "assignments.csv")
    header, body = rows[0], rows[1:]
    cluster, distance = header.index("cluster"), header.index("distance")
    for c in range(3):
        members = {i for i, row in enumerate(body) if int(row[cluster]) == c}
        # the nearest member: the smallest distance, the first in reading order among ties
        start = min(members, key=lambda i: (float(body[i][distance]), i))
        seen, current = [], f"d{start:07d}.html"
        while current:
            seen.append(int(current[1:8]))
            page = _soup(run / "docs" / current)
            links = page.find_all("a", rel="next")
            current = links[0]["href"] if links else ""
        assert sorted(seen) == sorted(members)
        assert [float(body[i][distance]) for i in seen] == sorted(float(body[i][distance]) for i in seen)


def test_every_page_title_starts_with_its_menu_label(site: Path) -> None:
    pages = [p for p in site.rglob("*.html")]
    assert len(pages) > 50
    for path in pages:
        page = _soup(path)
        current = page.find("nav").find("a", attrs={"aria-current": "page"})
        assert current is not None, path
        assert page.title.string.split(" · ")[0] == current.get_text(), path


def test_a_document_without_marked_terms_says_so(site: Path) -> None:
    run = site / "runs" / "k3"
    with_message = 0
    for path in (run / "docs").glob("*.html"):
        page = _soup(path)
        marked = page.select("article.doctext mark")
        message = page.find(class_="no-marks")
        assert (message is None) == bool(marked), path  # exactly one of the two
        with_message += message is not None
    assert with_message >= 1  # the stray note: none of its words is a top term of any cluster


def test_member_snippets_are_cut_at_word_boundaries(site: Path) -> None:
    run = site / "runs" / "k3"
    texts = {p.name: " ".join(p.read_text(encoding="utf-8").split()) for p in (site.parent / "notes").iterdir()}
    checked = 0
    for snippet in _soup(run / "cluster-00.html").select("table.members .snippet"):
        shown = snippet.get_text()
        assert len(shown) <= 160
        if shown.endswith(ELLIPSIS):
            source = next(t for t in texts.values() if t.startswith(shown[:-1]))
            assert source[len(shown) - 1] == " "  # the next character starts a new word
            checked += 1
    assert checked > 0


# --- exports ------------------------------------------------------------------------------------------


def test_every_written_file_is_described_and_listed(site: Path) -> None:
    run = site / "runs" / "k3"
    written = [p.relative_to(run).as_posix() for p in run.rglob("*") if p.is_file()]
    assert {"cuts.csv", "boilerplate.csv", "members/cluster-00.csv", "comparisons.html"} <= set(written)
    assert [name for name in written if not describe_file(name)] == []
    listed = {file_key(a["href"]) for a in _soup(run / "files.html").select("table.files td:first-child a")}
    assert {file_key(name) for name in written} <= listed
    exports = {a["href"] for a in _soup(run / "index.html").select("section.exports li a")}
    assert {"cuts.csv", "boilerplate.csv", "assignments.csv", "names.csv", "members/cluster-00.csv"} <= exports


def test_per_cluster_csvs_hold_the_assignments_rows(site: Path) -> None:
    run = site / "runs" / "k5"
    rows = _rows(run / "assignments.csv")
    header = rows[0]
    cluster = header.index("cluster")
    for c in range(5):
        mine = _rows(run / "members" / f"cluster-{c:02d}.csv")
        assert mine[0] == header
        assert mine[1:] == [r for r in rows[1:] if r[cluster] == str(c)]
        page = _soup(run / f"cluster-{c:02d}.html")
        assert page.find("a", href=f"members/cluster-{c:02d}.csv") is not None
    # OWASP CSV Injection guidance: a cell starting with = gets a leading single quote
    titles = [r[header.index("title")] for c in range(5) for r in _rows(run / "members" / f"cluster-{c:02d}.csv")[1:]]
    assert "'=SUM(1,2) soil" in titles


# --- comparison page ----------------------------------------------------------------------------------


def test_moved_documents_are_grouped_by_pair_largest_first(site: Path) -> None:
    document = json.loads((site / "compare" / "k3--k5" / "compare.json").read_text(encoding="utf-8"))
    matched = {m["cluster_a"]: m["cluster_b"] for m in document["matching"]}
    a, b = (_rows(site / "runs" / k / "assignments.csv") for k in ("k3", "k5"))
    label_b = {r[0]: int(r[3]) for r in b[1:]}
    # independent count: a shared document moved when its cluster in B is not the match of its cluster in A
    expected = Counter((int(r[3]), label_b[r[0]]) for r in a[1:] if matched.get(int(r[3])) != label_b[r[0]])
    pairs = document["moved"]["pairs"]
    assert {(p["cluster_a"], p["cluster_b"]): p["count"] for p in pairs} == dict(expected)
    assert [p["count"] for p in pairs] == sorted(expected.values(), reverse=True)
    assert sum(expected.values()) == document["moved"]["total"] > 0
    page = _soup(site / "compare" / "k3--k5" / "index.html")
    links = page.select("table.moved ul.moved-docs a")
    assert links
    for link in links:  # each links to the document's page in run B, which shows the same title
        target = (site / "compare" / "k3--k5" / link["href"]).resolve()
        assert target.parent == (site / "runs" / "k5" / "docs").resolve()
        assert _soup(target).find("h1").get_text().startswith(link.get_text().rstrip(ELLIPSIS))


def test_moved_pairs_list_a_bounded_number_of_documents() -> None:
    moved = [MovedDoc(f"d{i}", 0, "x", 1, "y") for i in range(MOVED_PER_PAIR + 5)] + [MovedDoc("e", 2, "z", 1, "y")]
    pairs = moved_pairs(moved)
    assert [(p["cluster_a"], p["count"], len(p["documents"])) for p in pairs] == [(0, MOVED_PER_PAIR + 5,
                                                                                    MOVED_PER_PAIR), (2, 1, 1)]


def test_no_badge_word_is_repeated_beside_it(site: Path) -> None:
    # readings whose sentence opens with only part of the badge ("split and merged": "split into ...")
    assert _after_badge("split into 0 and 6; in 0 it merged with 2", "split and merged") == (
        "into 0 and 6; in 0 it merged with 2")
    assert _after_badge("merged from 0 (75%) and 1", "merged from parts of") == "0 (75%) and 1"
    assert _after_badge("mostly went to 2", "reshaped") == "mostly went to 2"
    page = _soup(site / "compare" / "k3--k5" / "index.html")
    badges = page.select("table.fates span.reading")
    assert badges
    for badge in badges:
        after = badge.next_sibling.strip() if isinstance(badge.next_sibling, str) else ""
        assert not after.startswith(badge.get_text().split()[0]), after
