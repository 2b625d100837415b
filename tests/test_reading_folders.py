"""Real exports as folders: mailboxes, links that leave SOURCE, repeated ids, odd file names, size limits."""

from __future__ import annotations

import csv
import mailbox
import os
from email.message import EmailMessage
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from helpers import LIMITS, invoke, read, read_assignments, read_ingest_report
from pilewise.ingest.reading import ReadLimits, stream_source
from pilewise.ingest.tables import ColumnChoice

TOPICS = ["soil compost seedling mulch watering spade", "chain saddle pedal spoke brake gear",
          "oven flour dough whisk butter saucepan"]


def _message(subject: str, plain: str | None = None, html: str | None = None) -> EmailMessage:
    msg = EmailMessage()
    msg["Subject"] = subject
    msg["From"] = "customer@example.org"
    if plain is not None:
        msg.set_content(plain)
        if html is not None:
            msg.add_alternative(html, subtype="html")
    elif html is not None:
        msg.set_content(html, subtype="html")
    else:
        msg.add_attachment(b"\x00\x01scan", maintype="application", subtype="octet-stream", filename="scan.bin")
    return msg


def _write_mbox(path: Path, messages: list[EmailMessage]) -> None:
    box = mailbox.mbox(path)
    for msg in messages:
        box.add(msg)
    box.flush()
    box.close()


def _entries(ingested, source: str) -> list[tuple[str, str, str]]:  # type: ignore[no-untyped-def]
    return [(e.status, e.reason, e.detail) for e in ingested.entries if e.source == source]


# --- mailboxes --------------------------------------------------------------------------------------------


def test_an_mbox_file_gives_one_document_per_message(tmp_path: Path) -> None:
    _write_mbox(tmp_path / "support.mbox", [
        _message("Seedlings wilted", "From the garden centre we got seedlings.\nThey wilted in a day.\n"
                                     "> an earlier quoted mail\n-- \nsignature"),
        _message("Brake squeaks", "The rear brake squeaks.", "<p>The rear <b>brake</b> squeaks.</p>"),
        _message("Dough recipe", html="<html><body><h1>Dough</h1><p>Knead the dough well.</p></body></html>"),
        _message("Only a scan"),
    ])
    # Python mailbox docs: mbox escapes body lines starting "From " as ">From " (mboxo), so the test file holds one
    assert b"\n>From the garden centre" in (tmp_path / "support.mbox").read_bytes()
    ingested = read(tmp_path)
    docs = {d.doc_id: d for d in ingested.documents}
    assert sorted(docs) == ["support.mbox#msg1", "support.mbox#msg2", "support.mbox#msg3"]
    first = docs["support.mbox#msg1"]
    # the escape is undone, and the quote and signature are dropped as for .eml files
    assert (first.title, first.text) == ("Seedlings wilted", "From the garden centre we got seedlings.\n"
                                                             "They wilted in a day.")
    assert first.source == "support.mbox#msg1"
    assert (docs["support.mbox#msg2"].title, docs["support.mbox#msg2"].text) == ("Brake squeaks",
                                                                                 "The rear brake squeaks.")
    assert docs["support.mbox#msg3"].text == "Dough\nKnead the dough well."  # the HTML part's visible text
    assert _entries(ingested, "support.mbox") == [("document", "mailbox", "3 of 4 messages became documents")]
    assert _entries(ingested, "support.mbox#msg4") == [("skipped", "empty", "message 4 has no text (no text part)")]


def test_a_file_without_suffix_that_starts_with_a_from_line_is_a_mailbox(tmp_path: Path) -> None:
    # Thunderbird writes "From - " and a ctime date before each message (from memory)
    (tmp_path / "Inbox").write_bytes(
        b"From - Sat Jan 03 12:00:00 2026\nSubject: Spoke broke\nFrom: a@example.org\n\nA spoke broke on the trail.\n\n"
        b"From - Sun Jan 04 09:30:00 2026\nSubject: Mulch\nFrom: b@example.org\n\nWhich mulch for roses?\n"
    )
    (tmp_path / "NOTES").write_text("From here the garden at 10:30 looked dry.\n", encoding="utf-8")
    (tmp_path / "old.mbx").write_text("no message starts here\n", encoding="utf-8")
    ingested = read(tmp_path)
    assert [(d.doc_id, d.title, d.text) for d in ingested.documents] == [
        ("Inbox#msg1", "Spoke broke", "A spoke broke on the trail."),
        ("Inbox#msg2", "Mulch", "Which mulch for roses?"),
        # not a mailbox: a file of no known type read as plain text (tests/test_polish.py)
        ("NOTES", "From here the garden at 10:30 looked dry.", "From here the garden at 10:30 looked dry."),
    ]
    assert _entries(ingested, "NOTES") == [("document", "read", "file type (none) read as plain text")]
    assert _entries(ingested, "old.mbx") == [("skipped", "empty", "no messages: no line starts with 'From '")]


def test_one_mbox_file_as_source_and_streamed(tmp_path: Path) -> None:
    path = tmp_path / "box.mbox"
    _write_mbox(path, [_message(f"Subject {i}", f"{TOPICS[i % 3]} note {i}") for i in range(5)])
    stream = stream_source(path, ColumnChoice(), LIMITS)
    assert stream.total_bytes == path.stat().st_size
    docs = list(stream)
    assert [d.doc_id for d in docs] == [f"box.mbox#msg{i}" for i in range(1, 6)]
    assert stream.bytes_done == stream.total_bytes


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(bodies=st.lists(st.binary(max_size=400), min_size=1, max_size=4))
def test_every_message_of_a_messy_mailbox_is_a_document_or_a_report_line(tmp_path: Path, bodies: list[bytes]) -> None:
    import re
    import tempfile

    from pilewise.errors import PilewiseError

    folder = Path(tempfile.mkdtemp(dir=tmp_path))
    # random bytes after each "From " line (the separator line of RFC 4155), their own "From " lines escaped
    (folder / "x.mbox").write_bytes(b"".join(
        b"From a@b Mon Jan  5 10:00:00 2026\n" + re.sub(rb"(?m)^From ", b">From ", body) + b"\n\n"
        for body in bodies
    ))
    try:
        ingested = read(folder)
    except PilewiseError as err:  # no message held text: one line that says so
        assert "\n" not in str(err) and str(err).startswith("no documents found in 1 file(s)")
        return
    numbers = {d.source for d in ingested.documents} | {e.source for e in ingested.entries if e.status == "skipped"}
    assert numbers == {f"x.mbox#msg{i}" for i in range(1, len(bodies) + 1)}
    summary = _entries(ingested, "x.mbox")[0]
    assert summary[2] == f"{len(ingested.documents)} of {len(bodies)} messages became documents"


# --- --encoding for text and HTML files -------------------------------------------------------------------


@pytest.mark.parametrize("encoding", ["cp1252", "latin-1"])
def test_encoding_option_decodes_text_and_html_files(tmp_path: Path, encoding: str) -> None:
    raw = "price \u20ac 12 for the compost, caf\u00e9".encode("cp1252")
    (tmp_path / "a.txt").write_bytes(raw)
    (tmp_path / "b.html").write_bytes(b"<p>" + raw + b"</p>")
    ingested = read(tmp_path, ColumnChoice(encoding=encoding))
    texts = {d.doc_id: d.text for d in ingested.documents}
    # Python codecs: the same bytes read as the forced codec; cp1252 has the euro sign at 0x80, latin-1 a control
    assert texts == {"a.txt": raw.decode(encoding), "b.html": raw.decode(encoding)}


# --- links ------------------------------------------------------------------------------------------------


def test_links_leaving_source_are_listed_unless_followed(tmp_path: Path) -> None:
    outside = tmp_path / "elsewhere"
    outside.mkdir()
    (outside / "secret.txt").write_text("outside text about pedals", encoding="utf-8")
    source = tmp_path / "data"
    (source / "sub").mkdir(parents=True)
    (source / "sub" / "real.txt").write_text("inside text about soil", encoding="utf-8")
    (source / "out.txt").symlink_to(outside / "secret.txt")
    (source / "in.txt").symlink_to(source / "sub" / "real.txt")
    (source / "relative-in.txt").symlink_to(Path("sub") / "real.txt")
    (source / "dangling.txt").symlink_to(source / "gone.txt")
    (source / "dir-link").symlink_to(outside, target_is_directory=True)
    ingested = read(source)
    assert sorted(d.doc_id for d in ingested.documents) == ["in.txt", "relative-in.txt", "sub/real.txt"]
    assert _entries(ingested, "out.txt") == [
        ("skipped", "link outside the source", "its target lies outside SOURCE; pass --follow-links to read it")]
    assert _entries(ingested, "dangling.txt")[0][:2] == ("skipped", "unreadable")
    assert _entries(ingested, "dir-link") == [("skipped", "link to a folder", "not followed")]
    assert ingested.files_found == 6  # five entries of the folder and sub/real.txt

    followed = read(source, limits=ReadLimits(follow_links=True))
    texts = {d.doc_id: d.text for d in followed.documents}
    assert texts["out.txt"] == "outside text about pedals"
    assert "dir-link" not in texts and _entries(followed, "dir-link")[0][1] == "link to a folder"


def test_a_source_reached_through_a_link_still_reads_its_own_files(tmp_path: Path) -> None:
    real = tmp_path / "real"
    real.mkdir()
    (real / "a.txt").write_text("compost text", encoding="utf-8")
    (real / "b.txt").symlink_to(real / "a.txt")
    (tmp_path / "alias").symlink_to(real, target_is_directory=True)
    ingested = read(tmp_path / "alias")
    assert sorted(d.doc_id for d in ingested.documents) == ["a.txt", "b.txt"]


# --- unique ids -------------------------------------------------------------------------------------------


def _id_table(path: Path, ids: list[str], topic: int) -> None:
    import random

    rng = random.Random(path.name)
    with path.open("w", encoding="utf-8", newline="") as handle:
        writer = csv.writer(handle)
        writer.writerow(["id", "text"])
        for i, doc_id in enumerate(ids):
            words = TOPICS[(topic + i) % 3].split()
            writer.writerow([doc_id, " ".join(rng.choice(words) for _ in range(12))])


def test_ids_repeated_across_tables_are_renamed_with_the_file_name(tmp_path: Path) -> None:
    (tmp_path / "exports").mkdir()
    _id_table(tmp_path / "exports" / "2024-01.csv", ["1", "2", "3", "exports/2024-03.csv:2"], 0)
    _id_table(tmp_path / "exports" / "2024-02.csv", ["1", "2", "9"], 1)
    _id_table(tmp_path / "exports" / "2024-03.csv", ["2", "9"], 2)
    (tmp_path / "exports" / "note.txt").write_text("oven dough note", encoding="utf-8")
    _id_table(tmp_path / "first.csv", ["exports/note.txt"], 0)  # read first: files come before folders
    ingested = read(tmp_path)
    ids = [d.doc_id for d in ingested.documents]
    assert len(ids) == len(set(ids)) == 11
    by_source = {d.source: d.doc_id for d in ingested.documents}
    assert by_source["exports/2024-02.csv#row1"] == "exports/2024-02.csv:1"
    assert by_source["exports/2024-02.csv#row3"] == "9"  # not repeated: kept
    # the prefixed id was taken by a row of the first file, so the row's source is its id
    assert by_source["exports/2024-03.csv#row1"] == "exports/2024-03.csv#row1"
    assert by_source["exports/2024-03.csv#row2"] == "exports/2024-03.csv:9"
    assert by_source["exports/note.txt"] == "exports/note.txt~2"  # a table row took the file's path as its id
    notes = [(e.source, e.detail) for e in ingested.entries if e.reason == "repeated id"]
    assert notes == [
        ("exports/2024-02.csv", "2 id(s) repeat ids of earlier documents; renamed with the file name, "
                                "e.g. '1' became 'exports/2024-02.csv:1'"),
        ("exports/2024-03.csv", "2 id(s) repeat ids of earlier documents; renamed with the file name, "
                                "e.g. '2' became 'exports/2024-03.csv#row1'"),
        ("exports/note.txt", "1 id(s) repeat ids of earlier documents; renamed with the file name, "
                             "e.g. 'exports/note.txt' became 'exports/note.txt~2'"),
    ]


@pytest.mark.parametrize("mode", ["memory", "stream"])
def test_a_run_over_tables_with_the_same_ids_gives_unique_ids(tmp_path: Path, mode: str) -> None:
    source = tmp_path / "data"
    source.mkdir()
    for month in range(3):
        _id_table(source / f"2024-0{month + 1}.csv", [str(i) for i in range(1, 13)], month)
    out = tmp_path / "site"
    result = invoke("run", str(source), "--k", "3", "--out", str(out), "--mode", mode, "--quiet")
    assert result.exit_code == 0, result.stderr
    rows = read_assignments(out / "runs" / "k3")
    assert len(rows) == 36 and len({r["doc_id"] for r in rows}) == 36
    report = read_ingest_report(out / "runs" / "k3")
    assert [r["source"] for r in report if r["reason"] == "repeated id"] == ["2024-02.csv", "2024-03.csv"]


def test_the_id_set_stays_small(tmp_path: Path) -> None:
    """Memory of the ids kept for uniqueness: a set of the strings, measured with tracemalloc."""
    import tracemalloc

    rows = 50_000
    with (tmp_path / "big.csv").open("w", encoding="utf-8", newline="") as handle:
        writer = csv.writer(handle)
        writer.writerow(["ticket_id", "text"])
        writer.writerows([f"T-{i:08d}", "soil"] for i in range(rows))
    stream = stream_source(tmp_path / "big.csv", ColumnChoice(), LIMITS)
    tracemalloc.start()
    count = sum(1 for _ in stream)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    assert count == rows
    # 10-character ids: ~60 bytes per str object plus set slots (CPython, from memory); 250 bytes a row is ample
    assert peak < rows * 250, f"{peak / rows:.0f} bytes a row"


# --- file names that are not UTF-8 ------------------------------------------------------------------------


def test_a_file_name_that_is_not_utf8_runs_end_to_end(tmp_path: Path) -> None:
    source = tmp_path / "data"
    source.mkdir()
    for i in range(4):
        (source / f"note-{i}.txt").write_text(f"{TOPICS[i % 3]} note {i}", encoding="utf-8")
    bad = os.path.join(os.fsencode(source), b"caf\xe9.txt")  # Latin-1 e-acute: not valid UTF-8
    handle = os.open(bad, os.O_WRONLY | os.O_CREAT, 0o644)
    os.write(handle, b"oven flour dough whisk in the cafe")
    os.close(handle)
    out = tmp_path / "site"
    result = invoke("run", str(source), "--k", "2", "--out", str(out), "--quiet")
    assert result.exit_code == 0, result.stderr
    # Python codecs docs: "backslashreplace" writes an undecodable byte as \xNN
    shown = "caf\\xe9.txt"
    rows = read_assignments(out / "runs" / "k2")
    assert shown in {r["doc_id"] for r in rows}
    report = read_ingest_report(out / "runs" / "k2")
    assert {(r["source"], r["reason"]) for r in report if r["status"] == "note"} >= {(shown, "file name")}


# --- --max-file-mb ----------------------------------------------------------------------------------------


def test_max_file_mb_skips_whole_files_but_not_tables_read_row_by_row(tmp_path: Path) -> None:
    source = tmp_path / "data"
    source.mkdir()
    limit = 0.001 * 1024 * 1024  # --max-file-mb 0.001, in bytes
    _id_table(source / "big.csv", [str(i) for i in range(60)], 0)
    (source / "big.jsonl").write_text("".join(f'{{"text": "{TOPICS[i % 3]} line {i}"}}\n' for i in range(40)),
                                      encoding="utf-8")
    _write_mbox(source / "big.mbox", [_message(f"S{i}", f"{TOPICS[i % 3]} mail {i}") for i in range(8)])
    (source / "big.txt").write_text("compost " * 200, encoding="utf-8")
    (source / "big.json").write_text("[" + ",".join(f'{{"text": "row {i}"}}' for i in range(100)) + "]",
                                     encoding="utf-8")
    (source / "small.txt").write_text("chain saddle", encoding="utf-8")
    for name in ("big.csv", "big.jsonl", "big.mbox", "big.txt", "big.json"):
        assert (source / name).stat().st_size > limit
    out = tmp_path / "site"
    result = invoke("run", str(source), "--k", "2", "--out", str(out), "--quiet",
                    "--max-file-mb", "0.001")
    assert result.exit_code == 0, result.stderr
    report = read_ingest_report(out / "runs" / "k2")
    too_large = sorted(r["source"] for r in report if r["reason"] == "too large")
    assert too_large == ["big.json", "big.txt"]
    rows = read_assignments(out / "runs" / "k2")
    counts: dict[str, int] = {}
    for row in rows:
        counts[row["source"].split("#")[0]] = counts.get(row["source"].split("#")[0], 0) + 1
    assert counts == {"big.csv": 60, "big.jsonl": 40, "big.mbox": 8, "small.txt": 1}


def test_mail_dates_are_read_from_the_date_header(tmp_path: Path) -> None:
    """A .eml file's and an mbox message's Date header become the document's date, in ISO 8601.

    The header format is RFC 5322 §3.3 (date-time); the expected values are written out by hand from the
    headers, independently of the parser. A message without a Date header gets no date (never a guess).
    """
    folder = tmp_path / "mail"
    folder.mkdir()
    dated = EmailMessage()
    dated["Subject"] = "Seedling tray cracked"
    dated["Date"] = "Tue, 14 Nov 2023 22:13:20 +0100"
    dated.set_content("The tray arrived with a crack along one side.")
    (folder / "one.eml").write_bytes(bytes(dated))
    undated = EmailMessage()
    undated["Subject"] = "Question about watering"
    undated.set_content("How often should the fern be watered in winter?")
    (folder / "two.eml").write_bytes(bytes(undated))
    box = mailbox.mbox(str(folder / "archive.mbox"))
    boxed = EmailMessage()
    boxed["Subject"] = "Late delivery"
    boxed["Date"] = "Fri, 01 Mar 2024 08:00:00 -0500"
    boxed.set_content("The parcel is a week late.")
    box.add(boxed)
    box.flush()
    box.close()
    dates = {doc.source: doc.date for doc in read(folder).documents}
    assert dates == {
        "one.eml": "2023-11-14T22:13:20+01:00",
        "two.eml": "",
        "archive.mbox#msg1": "2024-03-01T08:00:00-05:00",
    }


def test_mail_without_a_declared_charset_is_decoded_like_a_text_file(tmp_path: Path) -> None:
    """Regression: 8-bit mail text without a charset parameter lost every accented letter to U+FFFD.

    RFC 2045 §5.2 makes undeclared text US-ASCII, which 8-bit bytes are not; such mail is read as a
    text file is (detected, or --encoding). The expected strings are Python's cp1252 codec's reading of
    the same bytes.
    """
    folder = tmp_path / "mail"
    folder.mkdir()
    body = "We would like the naïve café order “as soon as possible” – the seedlings arrived fine."
    raw = ("Subject: Café order for the garden\r\nContent-Type: text/plain\r\nContent-Transfer-Encoding: 8bit\r\n\r\n"
           + body + "\r\n").encode("cp1252")
    (folder / "order.eml").write_bytes(raw)
    (folder / "other.eml").write_bytes(raw.replace(b"garden", b"shop"))
    for columns in (ColumnChoice(), ColumnChoice(encoding="cp1252")):
        docs = {doc.source: doc for doc in read(folder, columns).documents}
        assert docs["order.eml"].title == "Café order for the garden"
        assert docs["order.eml"].text == body


def test_a_version_control_folder_is_one_report_line_not_documents(tmp_path: Path) -> None:
    # A checked-out repository holds its history under .git (git-scm.com docs, "git-init"): text files such as
    # HEAD and config that are not the collection's documents. Nothing is lost: the folder is one report line.
    (tmp_path / "notes.txt").write_text("the pump stopped after a power cut", encoding="utf-8")
    git = tmp_path / ".git"
    (git / "refs").mkdir(parents=True)
    (git / "HEAD").write_text("ref: refs/heads/main\n", encoding="utf-8")
    (git / "config").write_text("[core]\n\tbare = false\n", encoding="utf-8")
    (git / "refs" / "main").write_text("0" * 40 + "\n", encoding="utf-8")
    ingested = read(tmp_path)
    assert [d.doc_id for d in ingested.documents] == ["notes.txt"]
    skipped = [e for e in ingested.entries if e.status == "skipped"]
    assert [(e.source, e.reason, e.detail) for e in skipped] == [
        (".git/", "version control", "3 files of version-control data not read")]
