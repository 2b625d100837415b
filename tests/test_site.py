"""The written site: hostile text stays inert, pages request nothing remote, output is reproducible."""

from __future__ import annotations

import re
from pathlib import Path

import pytest
from bs4 import BeautifulSoup

from helpers import read_manifest
from pilewise.options import RunOptions
from pilewise.pipeline import run_collection

HOSTILE_TITLE = '<script>alert("t")</script><img src=x onerror="alert(1)">'
HOSTILE_BODY = (
    'Click <a href="javascript:alert(2)">here</a> <svg onload=alert(3)> </script><script>alert(4)</script> '
    '<iframe src="https://example.com/"></iframe> "quoted" & ampersand'
)


OWN_SCRIPTS = {"pilewise-sort.js"}


def _hostile_collection(folder: Path) -> Path:
    folder.mkdir()
    table = folder / "tickets.csv"
    lines = ["id,title,text"]
    for i in range(12):
        words = ["soil compost seedling mulch", "chain saddle pedal spoke", "oven flour dough whisk"][i % 3]
        body = f"{words} {words} note {i} {HOSTILE_BODY}".replace('"', '""')
        lines.append(f'H{i},"{HOSTILE_TITLE.replace(chr(34), chr(34) * 2)}","{body}"')
    table.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return table


@pytest.fixture(scope="module")
def hostile_site(tmp_path_factory: pytest.TempPathFactory) -> Path:
    base = tmp_path_factory.mktemp("hostile")
    table = _hostile_collection(base / "data")
    outcome = run_collection(RunOptions(source=table, k=3, out=base / "site", quiet=True, near_duplicate=1.0))
    return outcome.run_folder.parent.parent


def _pages(site: Path) -> list[Path]:
    pages = sorted(site.rglob("*.html"))
    assert len(pages) > 5
    return pages


def test_hostile_text_is_inert_in_every_page(hostile_site: Path) -> None:
    for page in _pages(hostile_site):
        soup = BeautifulSoup(page.read_text(encoding="utf-8"), "html.parser")
        assert soup.find_all(["iframe", "object", "embed"]) == [], page
        # the only scripts are pilewise's own files beside the run's pages, never inline text
        own = {"search-index.js", "pilewise-search.js", "pilewise-sort.js"}
        for script in soup.find_all("script"):
            assert str(script.get("src", "")).rsplit("/", 1)[-1] in own and not script.get_text(), page
        # the only images are pilewise's own figures, next to the page
        assert {img["src"] for img in soup.find_all("img")} <= {"dendrogram.svg", "sweep-curves.svg"}, page
        for tag in soup.find_all(True):
            assert not any(name.lower().startswith("on") for name in tag.attrs), (page, tag.name)
            href = str(tag.get("href", ""))
            assert not href.lower().startswith("javascript:"), page
    document_pages = sorted((hostile_site / "runs" / "k3" / "docs").glob("*.html"))
    text = document_pages[0].read_text(encoding="utf-8")
    assert "&lt;script&gt;alert(&#34;t&#34;)&lt;/script&gt;" in text  # shown as text, escaped


def test_figures_hold_no_script_and_no_outside_reference(hostile_site: Path) -> None:
    figures = sorted(hostile_site.rglob("*.svg"))
    assert figures
    for figure in figures:
        text = figure.read_text(encoding="utf-8")
        assert "<script" not in text.lower() and "alert(" not in text
        assert not re.search(r"(href|src)=[\"'](?!#)", text), figure


def test_pages_forbid_and_make_no_remote_requests(hostile_site: Path) -> None:
    for page in _pages(hostile_site):
        soup = BeautifulSoup(page.read_text(encoding="utf-8"), "html.parser")
        csp = soup.find("meta", attrs={"http-equiv": "Content-Security-Policy"})
        assert csp is not None and "default-src 'none'" in csp["content"]
        for tag in soup.find_all(["link", "img", "script", "iframe"]):
            for attribute in ("href", "src"):
                value = str(tag.get(attribute, ""))
                assert "://" not in value and not value.startswith("//"), (page, value)


def test_same_input_and_seed_give_the_same_files(topic_folder: Path, tmp_path: Path,
                                                 monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("SOURCE_DATE_EPOCH", "1767225600")
    first = run_collection(RunOptions(source=topic_folder, k=3, out=tmp_path / "a", seed=7, quiet=True))
    second = run_collection(RunOptions(source=topic_folder, k=3, out=tmp_path / "b", seed=7, quiet=True))
    files_a = sorted(p.relative_to(first.run_folder) for p in first.run_folder.rglob("*") if p.is_file())
    files_b = sorted(p.relative_to(second.run_folder) for p in second.run_folder.rglob("*") if p.is_file())
    assert files_a == files_b
    differing = [f for f in files_a if (first.run_folder / f).read_bytes() != (second.run_folder / f).read_bytes()]
    # Only the manifest may differ, and only in its measured stage timings and the output path.
    assert [str(f) for f in differing] in ([], ["manifest.json"])

    def stable(run: Path) -> dict[str, object]:
        manifest = read_manifest(run)
        manifest.pop("timings_seconds")
        manifest["parameters"].pop("out")
        return manifest

    assert stable(first.run_folder) == stable(second.run_folder)
    assert stable(first.run_folder)["created"] == "2026-01-01T00:00:00Z"
