"""Tests of the invented demo collection generator (pilewise.demo.shop_messages)."""

from __future__ import annotations

import csv
import email.policy
import re
from email.message import EmailMessage
from email.parser import BytesParser
from pathlib import Path

import pytest

from pilewise.demo.shop_messages import CSV_COLUMNS, THEMES, write_demo_collection

_ADDRESS = re.compile(r"[A-Za-z0-9._%+-]+@([A-Za-z0-9-]+(?:\.[A-Za-z0-9-]+)+)")
_ALLOWED_DOMAINS = {"example.org", "example.com", "example.net"}


def _snapshot(folder: Path) -> dict[str, bytes]:
    paths = sorted(p for p in folder.rglob("*") if p.is_file())
    files = {p.relative_to(folder).as_posix(): p.read_bytes() for p in paths}
    key = folder.parent / f"{folder.name}-planted_themes.csv"
    files["<answer key>"] = key.read_bytes()
    return files


def _csv_rows(folder: Path) -> list[dict[str, str]]:
    with (folder / "messages.csv").open(encoding="utf-8", newline="") as handle:
        return list(csv.DictReader(handle))


@pytest.fixture(scope="module")
def demo(tmp_path_factory: pytest.TempPathFactory) -> Path:
    return write_demo_collection(tmp_path_factory.mktemp("demo") / "shop")


def test_same_seed_gives_identical_bytes(tmp_path: Path) -> None:
    first = _snapshot(write_demo_collection(tmp_path / "a" / "shop", seed=3, n_messages=400))
    second = _snapshot(write_demo_collection(tmp_path / "b" / "shop", seed=3, n_messages=400))
    assert first == second


def test_different_seed_gives_different_content(tmp_path: Path) -> None:
    first = _snapshot(write_demo_collection(tmp_path / "a", seed=1, n_messages=400))
    second = _snapshot(write_demo_collection(tmp_path / "b", seed=2, n_messages=400))
    assert first["messages.csv"] != second["messages.csv"]


@pytest.mark.parametrize("n_messages", [1500, 333, 40])
def test_counts_add_up_to_n_messages(tmp_path: Path, n_messages: int) -> None:
    folder = write_demo_collection(tmp_path / "shop", n_messages=n_messages)
    n_eml = len(list((folder / "mailbox").glob("*.eml")))
    n_html = len(list((folder / "web").glob("*.html")))
    assert len(_csv_rows(folder)) + n_eml + n_html == n_messages


def test_default_collection_layout(demo: Path) -> None:
    rows = _csv_rows(demo)
    assert 1400 <= len(rows) <= 1480
    assert 15 <= len(list((demo / "mailbox").glob("*.eml"))) <= 25
    assert 5 <= len(list((demo / "web").glob("*.html"))) <= 15
    assert len({row["message_id"] for row in rows}) == len(rows)


def test_csv_columns_are_exact(demo: Path) -> None:
    with (demo / "messages.csv").open(encoding="utf-8", newline="") as handle:
        header = next(csv.reader(handle))
    assert header == ["message_id", "subject", "body", "received", "product", "channel"]
    assert tuple(header) == CSV_COLUMNS
    for row in _csv_rows(demo):
        assert re.fullmatch(r"M-\d{5}", row["message_id"])
        assert re.fullmatch(r"2026-0[1-6]-\d\d", row["received"])
        assert "2026-01-05" <= row["received"] <= "2026-06-30"
        assert row["channel"] in {"web form", "e-mail", "chat", "phone note"}
        assert row["body"].strip()


def test_eml_files_parse_and_have_subjects(demo: Path) -> None:
    paths = sorted((demo / "mailbox").glob("*.eml"))
    assert paths
    multipart = 0
    quoted = 0
    for path in paths:
        msg = BytesParser(policy=email.policy.default).parsebytes(path.read_bytes())
        assert isinstance(msg, EmailMessage)
        assert str(msg["Subject"]).strip()
        assert msg["From"] and msg["To"] and msg["Date"]
        multipart += msg.is_multipart()
        body = msg.get_body(preferencelist=("plain",))
        assert body is not None
        text = body.get_content()
        assert text.strip()
        quoted += any(line.startswith("> ") for line in text.splitlines()) and "-- " in text.splitlines()
    assert multipart == 2
    assert quoted >= 1


def test_html_pages_have_boilerplate_to_strip(demo: Path) -> None:
    for path in sorted((demo / "web").glob("*.html")):
        page = path.read_text(encoding="utf-8")
        for tag in ("<title>", "<h1>", "<p>", "<script>", "<style>", "<nav"):
            assert tag in page


def test_only_reserved_email_domains(demo: Path) -> None:
    key = demo.parent / f"{demo.name}-planted_themes.csv"
    seen: set[str] = set()
    for path in [*sorted(demo.rglob("*")), key]:
        if path.is_file():
            for match in _ADDRESS.finditer(path.read_text(encoding="utf-8")):
                seen.add(match.group(1).lower())
    assert seen
    assert seen <= _ALLOWED_DOMAINS


def test_answer_key_lies_outside_the_collection(demo: Path) -> None:
    key = demo.parent / f"{demo.name}-planted_themes.csv"
    assert key.is_file()
    assert not list(demo.rglob("*planted*"))
    with key.open(encoding="utf-8", newline="") as handle:
        rows = list(csv.DictReader(handle))
    assert list(rows[0]) == ["source", "message_id", "theme"]
    assert len(rows) == 1500
    planted = {part for row in rows for part in row["theme"].split(" + ")}
    assert set(THEMES) <= planted
    assert planted <= set(THEMES) | {"(noise)", "(auto-reply)"}
