"""Readers: every file becomes a document or a report entry with its reason."""

from __future__ import annotations

from email.message import EmailMessage
from pathlib import Path

import pytest

from helpers import read
from pilewise.errors import PilewiseError
from pilewise.ingest.plaintext import first_line_title
from pilewise.ingest.reading import html_to_text, strip_mail_quotes
from pilewise.ingest.tables import ColumnChoice


def test_html_keeps_visible_text_and_takes_the_title_tag() -> None:
    title, text = html_to_text(
        "<html><head><title>Repotting guide</title><style>p{color:red}</style></head>"
        "<body><nav>Home | Shop</nav><h1>Heading</h1><p>Use fresh soil.</p><script>var x=1;</script></body></html>"
    )
    assert title == "Repotting guide"
    assert text == "Heading\nUse fresh soil."


def test_html_without_title_uses_the_first_heading() -> None:
    title, _ = html_to_text("<body><h2>Second level first</h2><p>text</p></body>")
    assert title == "Second level first"


def test_mail_quotes_and_signature_are_dropped() -> None:
    body = "Thanks, that worked.\nOn Mon, 3 Jan 2026, A. B. wrote:\n> old text\n> more\n\n-- \nC. D.\nPhone"
    assert strip_mail_quotes(body) == "Thanks, that worked."


def test_eml_subject_is_title_and_text_part_is_body(tmp_path: Path) -> None:
    msg = EmailMessage()
    msg["Subject"] = "Cracked pot"
    msg["From"] = "a@example.org"
    msg.set_content("The pot arrived cracked.\n> quoted earlier mail\n-- \nsig line")
    msg.add_alternative("<p>The pot arrived <b>cracked</b>.</p>", subtype="html")
    (tmp_path / "m.eml").write_bytes(bytes(msg))
    doc = read(tmp_path).documents[0]
    assert (doc.title, doc.text) == ("Cracked pot", "The pot arrived cracked.")


def test_title_falls_back_on_the_first_line_cut_near_120_characters() -> None:
    assert first_line_title("\n\n  Short first line  \nbody") == "Short first line"
    long_line = "word " * 60
    title = first_line_title(long_line)
    assert title.endswith("…") and len(title) <= 121


def test_every_file_is_a_document_or_a_report_entry(tmp_path: Path) -> None:
    (tmp_path / "good.txt").write_text("plain text about soil", encoding="utf-8")
    (tmp_path / "notes.md").write_text("# Title\nmarkdown text", encoding="utf-8")
    (tmp_path / "empty.txt").write_bytes(b"")
    (tmp_path / "blob.txt").write_bytes(b"\x00\x01\x02\x03binary")
    (tmp_path / "scan.pdf").write_bytes(b"%PDF-1.4")
    (tmp_path / "latin.txt").write_bytes("caf\xe9 cr\xe8me br\xfbl\xe9e r\xe9sum\xe9".encode("latin-1"))
    (tmp_path / "big.txt").write_text("x" * 2_000_000, encoding="utf-8")
    sub = tmp_path / "sub"
    sub.mkdir()
    (sub / "deep.txt").write_text("nested document", encoding="utf-8")
    ingested = read(tmp_path)
    reasons = {e.source: e.reason for e in ingested.entries if e.status == "skipped"}
    assert reasons == {"empty.txt": "empty", "blob.txt": "binary", "scan.pdf": "unsupported", "big.txt": "too large"}
    read_ids = {d.doc_id for d in ingested.documents}
    assert read_ids == {"good.txt", "notes.md", "latin.txt", "sub/deep.txt"}
    assert ingested.files_found == 8 == len(read_ids) + len(reasons)
    latin = next(d for d in ingested.documents if d.doc_id == "latin.txt")
    assert "café" in latin.text
    assert any(e.source == "latin.txt" and "not UTF-8" in e.detail for e in ingested.entries)


def test_long_documents_are_truncated_and_the_report_says_so(tmp_path: Path) -> None:
    (tmp_path / "long.txt").write_text("soil " * 5000, encoding="utf-8")
    ingested = read(tmp_path)
    assert len(ingested.documents[0].text) == 10_000
    assert any(e.reason == "truncated" for e in ingested.entries)


def test_csv_columns_are_guessed_and_the_guess_is_reported(tmp_path: Path) -> None:
    (tmp_path / "t.csv").write_text(
        'ticket_id,subject,body,created,channel\n1,Pot broke,"The pot broke, sadly\nin two",2026-01-02,web\n'
        "2,Login,Cannot log in,2026-01-03,chat\n3,Blank,,2026-01-04,chat\n",
        encoding="utf-8",
    )
    ingested = read(tmp_path / "t.csv")
    assert [d.doc_id for d in ingested.documents] == ["1", "2"]
    first = ingested.documents[0]
    assert (first.title, first.text, first.date) == ("Pot broke", "The pot broke, sadly\nin two", "2026-01-02")
    assert dict(first.metadata) == {"channel": "web"}
    assert any("guessed text column 'body'" in n for n in ingested.notes)
    assert [(e.source, e.reason) for e in ingested.entries if e.status == "skipped"] == [("t.csv#row3", "empty")]


def test_ambiguous_text_column_asks_for_the_option(tmp_path: Path) -> None:
    (tmp_path / "t.csv").write_text("a,b\nsome words here,other words there\n", encoding="utf-8")
    with pytest.raises(PilewiseError) as err:
        read(tmp_path / "t.csv")
    assert str(err.value) == "no text column found in t.csv; pass --text-column (columns: a, b)"


def test_unknown_column_names_the_columns(tmp_path: Path) -> None:
    (tmp_path / "t.csv").write_text("id,text\n1,hello there\n", encoding="utf-8")
    with pytest.raises(PilewiseError) as err:
        read(tmp_path / "t.csv", ColumnChoice(text="body"))
    assert str(err.value) == "--text-column 'body' is not a column of t.csv; pass one of: id, text"


def test_json_lines_with_invalid_lines_report_each_one(tmp_path: Path) -> None:
    (tmp_path / "t.jsonl").write_text('{"text": "first one"}\nnot json\n{"text": "second"}\n[1]\n', encoding="utf-8")
    ingested = read(tmp_path / "t.jsonl")
    assert [d.text for d in ingested.documents] == ["first one", "second"]
    skipped = [(e.source, e.reason) for e in ingested.entries if e.status == "skipped"]
    assert skipped == [("t.jsonl#line2", "invalid JSON"), ("t.jsonl#line4", "invalid JSON")]


def test_parquet_and_tsv_tables_are_read(tmp_path: Path) -> None:
    import pandas as pd

    pd.DataFrame({"id": ["a", "b"], "text": ["one text", "two texts"]}).to_parquet(tmp_path / "t.parquet")
    (tmp_path / "t.tsv").write_text("id\ttext\nc\tthird text\n", encoding="utf-8")
    ingested = read(tmp_path)
    assert sorted(d.doc_id for d in ingested.documents) == ["a", "b", "c"]


def test_folder_without_documents_is_a_user_error(tmp_path: Path) -> None:
    (tmp_path / "a.pdf").write_bytes(b"%PDF")
    (tmp_path / "b.txt").write_bytes(b"")
    with pytest.raises(PilewiseError) as err:
        read(tmp_path)
    assert str(err.value).startswith("no documents found in 2 file(s) in ")
    assert "(1 empty, 1 unsupported)" in str(err.value)


def test_ragged_csv_rows_are_reported_with_their_line(tmp_path: Path) -> None:
    (tmp_path / "t.csv").write_text(
        'id,text\n1,"first, with comma"\n2,second,extra\n3,"third\nover two lines"\n4\n', encoding="utf-8"
    )
    ingested = read(tmp_path / "t.csv")
    assert [d.doc_id for d in ingested.documents] == ["1", "3"]
    assert ingested.documents[1].text == "third\nover two lines"
    skipped = [(e.source, e.reason, e.detail) for e in ingested.entries if e.status == "skipped"]
    assert skipped == [("t.csv#line3", "malformed row", "3 fields where the header has 2"),
                       ("t.csv#line6", "malformed row", "1 fields where the header has 2")]


def test_a_skipped_archive_or_document_says_what_to_do(tmp_path: Path) -> None:
    """Report lines of archives and of documents whose text needs a converter name the fix (common practice: a
    skipped file's line says how to make it readable); other skipped types keep their plain line."""
    folder = tmp_path / "export"
    folder.mkdir()
    (folder / "tickets.txt").write_text("the parcel arrived wet", encoding="utf-8")
    (folder / "older.csv.gz").write_bytes(b"\x1f\x8b\x08\x00")
    (folder / "contract.docx").write_bytes(b"PK\x03\x04")
    (folder / "logo.png").write_bytes(b"\x89PNG")
    details = {e.source: e.detail for e in read(folder).entries if e.status == "skipped"}
    assert details == {
        "older.csv.gz": "file type .gz: an archive or compressed file; unpack it and point SOURCE at what it holds",
        "contract.docx": "file type .docx: its text needs a converter; save it as plain text or as a .csv table first",
        "logo.png": "file type .png",
    }
    with pytest.raises(PilewiseError, match=r"'older.csv.gz' is not a supported file type; an archive or compressed "
                                            r"file; unpack it and point SOURCE at what it holds; pass a folder"):
        read(folder / "older.csv.gz")


def test_gzipped_text_files_are_read_in_place_and_gzipped_archives_and_tables_are_not(tmp_path: Path) -> None:
    """A gzip file holding one text, HTML or mail file is read as that file. Reference: the standard library's
    gzip.decompress of the same bytes, read by the same reader. Real files of this machine: the manual pages
    Debian installs gzipped under /usr/share/man/man1 (roff source, read as plain text, which the line says)."""
    import gzip
    import io
    import tarfile

    from pilewise.ingest.reading import ReadLimits, document_from_bytes

    folder = tmp_path / "export"
    folder.mkdir()
    manuals = sorted(Path("/usr/share/man/man1").glob("*.1.gz"))[:3]
    for page in manuals:
        (folder / page.name).write_bytes(page.read_bytes())
    (folder / "ticket.txt.gz").write_bytes(gzip.compress(b"The fern arrived with yellow leaves.\n"))
    (folder / "cut.txt.gz").write_bytes(gzip.compress(b"a parcel left at the wrong door " * 50)[:40])
    (folder / "blob.bin.gz").write_bytes(gzip.compress(bytes(range(256)) * 8))
    (folder / "big.txt.gz").write_bytes(gzip.compress(b"compost " * 200_000))  # 1.6 MB inside 5 KB
    (folder / "rows.csv.gz").write_bytes(gzip.compress(b"id,text\n1,wet parcel\n"))
    bundle = io.BytesIO()
    with tarfile.open(fileobj=bundle, mode="w:gz") as tar:
        info = tarfile.TarInfo("inside.txt")
        info.size = 5
        tar.addfile(info, io.BytesIO(b"hello"))
    (folder / "bundle.tar.gz").write_bytes(bundle.getvalue())
    limits = ReadLimits(max_file_bytes=1_000_000)
    ingested = read(folder, limits=limits)
    docs = {d.doc_id: d for d in ingested.documents}
    lines = {e.source: (e.status, e.reason, e.detail) for e in ingested.entries}
    assert set(docs) == {"ticket.txt.gz", *(page.name for page in manuals)}
    assert docs["ticket.txt.gz"].text == "The fern arrived with yellow leaves."
    for page in manuals:
        expected, _ = document_from_bytes(gzip.decompress(page.read_bytes()), page.name, ".1", limits)
        assert expected is not None and docs[page.name].text == expected.text
        assert lines[page.name] == ("document", "read", "decompressed from gzip; file type .1 read as plain text")
    assert lines["ticket.txt.gz"] == ("document", "read", "decompressed from gzip")
    assert lines["cut.txt.gz"][:2] == ("skipped", "unreadable") and "damaged gzip data" in lines["cut.txt.gz"][2]
    assert lines["blob.bin.gz"][:2] == ("skipped", "binary")
    assert lines["big.txt.gz"] == ("skipped", "too large",
                                   "more than 0.953674 MB once decompressed; raise --max-file-mb to read it")
    unpack = "file type .gz: an archive or compressed file; unpack it and point SOURCE at what it holds"
    assert lines["rows.csv.gz"] == lines["bundle.tar.gz"] == ("skipped", "unsupported", unpack)
    # nothing lost: every file is a document or a line of the report
    assert {p.name for p in folder.iterdir()} == set(docs) | {s for s, (status, *_) in lines.items()
                                                             if status == "skipped"}
    assert [d.doc_id for d in read(folder / "ticket.txt.gz").documents] == ["ticket.txt.gz"]
