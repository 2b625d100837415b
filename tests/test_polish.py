"""Small things users meet: files of no known type, trend wording, the site's navigation and links, snippets."""

from __future__ import annotations

import csv
import json
import re
import shutil
import struct
import zlib
from pathlib import Path

import numpy as np
import pytest
from bs4 import BeautifulSoup

from helpers import LIMITS, TOPICS, assert_one_line_error, invoke, read, write_topic_folder
from pilewise.describe.trends import cluster_trends, fitted_share_change, fitted_share_ends
from pilewise.ingest.plaintext import decodes_cleanly
from pilewise.ingest.reading import SNIFF_BYTES
from pilewise.ingest.tables import ColumnChoice
from pilewise.output.search import SNIPPET_CHARS, SearchDocument, index_script

# --- files without a known extension ------------------------------------------------------------------------


def _png() -> bytes:
    """A 1x1 grey PNG: signature, IHDR, IDAT, IEND, each chunk with its CRC (PNG specification, ISO/IEC 15948 §5)."""
    def chunk(kind: bytes, data: bytes) -> bytes:
        return struct.pack(">I", len(data)) + kind + data + struct.pack(">I", zlib.crc32(kind + data))

    header = struct.pack(">IIBBBBB", 1, 1, 8, 0, 0, 0, 0)
    pixels = zlib.compress(b"\x00\x00")
    return b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", header) + chunk(b"IDAT", pixels) + chunk(b"IEND", b"")


# The ELF header's first bytes (System V ABI, "ELF Identification"): magic, 64-bit, little-endian, version 1,
# then padding with NUL bytes, as every executable of this machine starts.
ELF_START = b"\x7fELF\x02\x01\x01\x00" + bytes(8) + b"\x02\x00\x3e\x00" + bytes(200)


def _entries(ingested: object, source: str) -> list[tuple[str, str, str]]:
    return [(e.status, e.reason, e.detail) for e in ingested.entries if e.source == source]  # type: ignore[attr-defined]


def test_files_of_no_known_type_are_read_when_their_content_is_text(tmp_path: Path) -> None:
    (tmp_path / "README").write_text("Soil and compost notes for the allotment.\n", encoding="utf-8")
    (tmp_path / "Apache-2.0").write_text("Licence text about seedlings and watering.\n", encoding="utf-8")
    (tmp_path / "ChangeLog").write_bytes("Crème brûlée recipe changed, the café's résumé.\n".encode("cp1252"))
    (tmp_path / "true").write_bytes(ELF_START)
    (tmp_path / "logo").write_bytes(_png())
    (tmp_path / "logo.png").write_bytes(_png())
    (tmp_path / "notes.txt").write_text("A plain note on pruning.\n", encoding="utf-8")
    ingested = read(tmp_path)
    docs = {d.doc_id: d for d in ingested.documents}
    assert sorted(docs) == ["Apache-2.0", "ChangeLog", "README", "notes.txt"]
    assert docs["README"].text == "Soil and compost notes for the allotment."
    # not UTF-8: decoded by the same rules as the same bytes in a .txt file
    twin = tmp_path / "twin"  # made after the folder was read
    twin.mkdir()
    (twin / "ChangeLog.txt").write_bytes((tmp_path / "ChangeLog").read_bytes())
    assert docs["ChangeLog"].text == read(twin).documents[0].text
    assert _entries(ingested, "README") == [("document", "read", "file type (none) read as plain text")]
    assert _entries(ingested, "Apache-2.0") == [("document", "read", "file type .0 read as plain text")]
    assert _entries(ingested, "ChangeLog")[0][2].startswith("file type (none) read as plain text; not UTF-8")
    assert _entries(ingested, "notes.txt") == [("document", "read", "")]  # a known type needs no note
    # ELF and PNG hold NUL bytes in their first bytes (System V ABI; PNG chunk lengths are 4-byte big-endian)
    binary = ("skipped", "binary", "binary content (NUL or control bytes in its first 8 KB); no known file type")
    assert _entries(ingested, "true") == [binary]
    assert _entries(ingested, "logo") == [binary]
    # a known binary type is not opened: it stays unsupported, as before
    assert _entries(ingested, "logo.png") == [("skipped", "unsupported", "file type .png")]
    # nothing lost: every file is a document or a skipped line
    skipped = {e.source for e in ingested.entries if e.status == "skipped"}
    assert len(docs) + len(skipped) == ingested.files_found == 7


def test_a_real_folder_of_licences_and_binaries_loses_nothing(tmp_path: Path) -> None:
    licences = Path("/usr/share/common-licenses")
    folder = tmp_path / "mixed"
    folder.mkdir()
    copied = sorted(licences.iterdir())[:4] if licences.is_dir() else []
    for path in copied:  # Debian's licence texts have no suffix (GPL-3) or a version as one (Apache-2.0)
        (folder / path.name).write_bytes(path.read_bytes())
    true = Path("/bin/true")
    (folder / "true").write_bytes(true.read_bytes() if true.is_file() else ELF_START)
    (folder / "pixel.png").write_bytes(_png())
    ingested = read(folder)
    assert sorted(d.doc_id for d in ingested.documents) == [p.name for p in copied]
    assert {e.source: e.reason for e in ingested.entries if e.status == "skipped"} == {
        "true": "binary", "pixel.png": "unsupported"}


def test_a_letter_cut_by_the_sniffed_bytes_is_still_text(tmp_path: Path) -> None:
    # a two-byte UTF-8 letter cut by the 8 KB boundary is still text (Python codecs docs: an incremental
    # decoder keeps an unfinished sequence for the next call)
    (tmp_path / "NOTES").write_bytes(b"a" + "é".encode() * 5000)
    assert (tmp_path / "NOTES").read_bytes()[:SNIFF_BYTES].decode("utf-8", errors="replace").endswith("\ufffd")
    ingested = read(tmp_path)
    assert [d.text for d in ingested.documents] == ["a" + "é" * 5000]


def test_bytes_that_decode_in_no_encoding_are_binary_content(tmp_path: Path) -> None:
    # --encoding ascii: bytes above 0x7f are not ASCII (Python codecs docs, "ascii")
    (tmp_path / "MEMO").write_bytes("Café notes\n".encode("cp1252"))
    (tmp_path / "plain.txt").write_text("A note on mulch.\n", encoding="ascii")
    ingested = read(tmp_path, ColumnChoice(encoding="ascii"), LIMITS)
    assert _entries(ingested, "MEMO") == [("skipped", "binary", "binary content (its first 8 KB do not decode as "
                                           "--encoding ascii); no known file type")]
    assert decodes_cleanly("Café".encode("cp1252"), "cp1252") and not decodes_cleanly(b"\xe9", "ascii")
    assert decodes_cleanly(b"plain") and decodes_cleanly(b"\xef\xbb\xbfwith a byte-order mark")


def test_one_file_of_no_known_type_as_source(tmp_path: Path) -> None:
    texts = tmp_path / "COPYING"
    texts.write_text("Notes on soil.\n", encoding="utf-8")
    ingested = read(texts)
    assert [d.text for d in ingested.documents] == ["Notes on soil."]
    program = tmp_path / "true"
    program.write_bytes(ELF_START)
    result = invoke("run", str(program), "--k", "2", "--out", str(tmp_path / "out"), "--quiet")
    assert_one_line_error(result, "'true' holds binary content (NUL or control bytes in its first 8 KB) and no known "
                                  "file type; pass a folder, a text file, or a .csv/.tsv/.json/.jsonl/.parquet table")


# --- trends: a share that vanishes ------------------------------------------------------------------------------


def _weighted_line(counts: np.ndarray, totals: np.ndarray) -> np.poly1d:
    """The least-squares line of the period shares weighted by the period totals, by numpy.polyfit (its docs:
    `w` multiplies the residuals, so weights n are passed as sqrt(n)); an independent computation."""
    held = totals > 0
    s = np.arange(totals.size, dtype=float)[held]
    return np.poly1d(np.polyfit(s, counts[held] / totals[held], 1, w=np.sqrt(totals[held])))


def test_fitted_share_ends_are_the_weighted_least_squares_line() -> None:
    counts, totals = np.array([3, 0, 9, 4, 12]), np.array([20, 0, 30, 25, 40])
    line = _weighted_line(counts, totals)
    first, last = fitted_share_ends(counts, totals) or (0.0, 0.0)
    assert (first, last) == pytest.approx((line(0), line(4)), rel=1e-9)
    # the relative change of trends.fitted_share_change is the same line's rise over the pooled share
    assert fitted_share_change(counts, totals) == pytest.approx((last - first) / (counts.sum() / totals.sum()))
    assert fitted_share_ends(np.array([0, 0]), np.array([5, 5])) is None  # no member: nothing to fit


def _vanishing() -> tuple[list[str], np.ndarray]:
    """Eight months of 20 documents; cluster 0 holds half of each of the first four months and nothing after."""
    dates, labels = [], []
    for month in range(1, 9):
        for day in range(1, 21):
            dates.append(f"2024-{month:02d}-{day:02d}")
            labels.append(0 if month <= 4 and day <= 10 else 1)
    return dates, np.array(labels)


def test_a_cluster_that_vanishes_halfway_reads_falls_to_about_zero() -> None:
    dates, labels = _vanishing()
    trends = cluster_trends(dates, labels, 2, period="month")
    assert trends is not None
    gone, grown = trends.clusters
    totals = np.array(trends.totals)
    line = _weighted_line(np.array([p.count for p in gone.periods]), totals)
    assert line(7) < 0  # the straight line itself ends below zero: the statement must not follow it there
    assert gone.reading == "falling"
    assert f"fitted share from {line(0):.1%} to about zero over the span" in gone.evidence
    assert re.search(r"[-−]\d{3,}%", gone.evidence) is None  # no "-311%": a share cannot fall by more than all
    assert "to about 100% over the span" in grown.evidence  # the mirror image ends above 1


def test_a_trend_inside_zero_and_one_keeps_its_relative_change() -> None:
    # shares 10%, 20%, 30%, 40% of 100 documents a month: the line runs from 10% to 40% exactly
    dates = [f"2024-{m:02d}-01" for m in range(1, 5) for _ in range(100)]
    labels = np.array([0 if i < 10 * m else 1 for m in range(1, 5) for i in range(100)])
    trends = cluster_trends(dates, labels, 2, period="month")
    assert trends is not None
    rising = trends.clusters[0]
    # mean share 25%, change 30 points: +120% of the mean share (computed by hand)
    assert "fitted share from 10.0% to 40.0% over the span (+120% of its mean share)" in rising.evidence


# --- the site: assigned runs on the root index, the same top navigation on every run page ------------------------


@pytest.fixture(scope="module")
def site(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """A site with a run at k = 3, a run choosing k (so it has sweep.html), and one assignment into k3."""
    base = tmp_path_factory.mktemp("polish-site")
    write_topic_folder(base / "notes", per_topic=12)
    out = base / "site"
    for extra in (["--k", "3", "--name", "k3"], ["--k", "auto", "--k-range", "2:4", "--name", "chosen"]):
        result = invoke("run", str(base / "notes"), "--out", str(out), "--quiet", *extra)
        assert result.exit_code == 0, result.output
    new = base / "new"
    new.mkdir()
    for i, topic in enumerate(TOPICS):
        (new / f"new-{i}.txt").write_text(" ".join(TOPICS[topic]) + "\n", encoding="utf-8")
    result = invoke("assign", str(out / "runs" / "k3"), str(new), "--name", "fresh", "--quiet")
    assert result.exit_code == 0, result.output
    return out


def _soup(path: Path) -> BeautifulSoup:
    return BeautifulSoup(path.read_text(encoding="utf-8"), "html.parser")


def test_the_root_index_links_every_assignment_and_its_run(site: Path) -> None:
    rows = _soup(site / "index.html").select("#assigned tbody tr")
    assert len(rows) == 1
    links = {a.get_text(): a["href"] for a in rows[0].find_all("a")}
    assert links == {"fresh": "assigned/fresh/index.html", "k3": "runs/k3/index.html"}
    assert all((site / href).is_file() for href in links.values())
    # the documents column counts assigned.csv's rows (Python csv module docs: one record per row)
    with (site / "assigned" / "fresh" / "assigned.csv").open(encoding="utf-8", newline="") as handle:
        placed = len(list(csv.DictReader(handle)))
    assert placed == 3 and rows[0].find_all("td")[2].get_text() == str(placed)


def test_a_later_run_keeps_the_assignments_and_notes_a_damaged_one(site: Path, tmp_path: Path) -> None:
    copy = tmp_path / "site"
    shutil.copytree(site, copy)
    damaged = copy / "assigned" / "broken"
    shutil.copytree(copy / "assigned" / "fresh", damaged)
    (damaged / "assigned.json").write_text("{not json", encoding="utf-8")
    result = invoke("run", str(site.parent / "notes"), "--out", str(copy), "--k", "2", "--name", "k2", "--quiet")
    assert result.exit_code == 0, result.output
    page = _soup(copy / "index.html")
    assert [a.get_text() for a in page.select("#assigned tbody tr td:first-child a")] == ["fresh"]
    notes = [li.get_text() for li in page.select("#notes li")]
    assert len(notes) == 1 and notes[0].startswith("assigned/broken is not listed: its assigned.json cannot be read")


RUN_PAGES = {"index.html", "map.html", "levels.html", "tree.html", "comparisons.html", "ingest.html", "files.html"}


def test_every_page_of_a_run_reaches_the_same_top_level_pages(site: Path) -> None:
    for run, extra in (("k3", set()), ("chosen", {"sweep.html"})):
        folder = site / "runs" / run
        expected = {folder / name for name in RUN_PAGES | extra}
        assert all(path.is_file() for path in expected)
        pages = [p for p in folder.rglob("*.html")]
        kinds = {p.name.split("-")[0] if p.parent == folder else p.parent.name for p in pages}
        assert {"cluster", "docs", "map.html", "levels.html", "tree.html", "files.html"} <= kinds
        for page in pages:
            nav = _soup(page).find("header").find("nav")
            reached = {(page.parent / a["href"]).resolve() for a in nav.find_all("a")}
            assert {p.resolve() for p in expected} <= reached, page
            assert (site / "index.html").resolve() in reached, page
            assert all(target.is_file() for target in reached), page


def test_search_snippets_end_at_a_word_boundary() -> None:
    words = [f"word{i}" for i in range(200)]
    text = "  ".join(words)
    data = json.loads(index_script([], [SearchDocument("t", text, 0, "d.html")]).removeprefix(
        "window.pilewiseSearch = ").removesuffix(";\n"))
    snippet = data["docs"][0][1]
    folded = " ".join(words)
    # common practice: a cut excerpt ends in an ellipsis after a whole word, within the limit
    assert snippet.endswith("…") and len(snippet) <= SNIPPET_CHARS
    kept = snippet.removesuffix("…")
    assert folded.startswith(kept) and folded[len(kept)] == " "


def test_pages_show_a_figure_once_and_the_tree_links_its_clusters(site: Path) -> None:
    """Regression: the root index showed "0.162 0.162 against 0.066 ..." (the reading repeats its figure)."""
    for row in _soup(site / "index.html").select("table.runs")[0].select("tbody tr"):
        cell = " ".join(row.find_all("td")[3].get_text().split())
        figure = cell.split(" ")[0]
        assert cell.count(figure) == 1, cell
    run = site / "runs" / "k3"
    tree_links = [a["href"] for a in _soup(run / "tree.html").select("ul.tree a")]
    assert tree_links and all((run / href).is_file() and href.startswith("cluster-") for href in tree_links)
