"""Folders of files on the spark engine: real files of this machine (the licence texts Debian installs under
/usr/share/common-licenses), files that are not documents, and mailboxes, read by one Spark run and compared
with the local reader on the same folder (the same documents in the same reading order, the same report lines).

One run serves both checks: a Spark run is some 60 Spark jobs of fixed cost however small its folder.
"""

from __future__ import annotations

import gzip
import mailbox
import shutil
from email.message import EmailMessage
from pathlib import Path
from typing import Any

import pytest
from tests.helpers import TOPICS, invoke, read, read_assignments, read_ingest_report

from pilewise.model import Ingested

pytestmark = [pytest.mark.spark, pytest.mark.slow]  # a Spark run: over 10 s

LICENCES = Path("/usr/share/common-licenses")


def _message(subject: str, body: str) -> EmailMessage:
    msg = EmailMessage()
    msg["Subject"] = subject
    msg["From"] = "customer@example.org"
    msg.set_content(body)
    return msg


def _write_mailboxes(folder: Path) -> None:
    """support.mbox: 9 messages with text and one with an attachment only; Inbox: a Thunderbird folder."""
    box = mailbox.mbox(folder / "support.mbox")
    topics = list(TOPICS.values())
    for i in range(9):  # Python mailbox docs: mbox.add writes each message after a "From " line
        box.add(_message(f"Ticket {i}", " ".join(topics[i % 3][j % 8] for j in range(i, i + 12))))
    empty = EmailMessage()
    empty["Subject"] = "Only a scan"
    empty.add_attachment(b"\x00\x01scan", maintype="application", subtype="octet-stream", filename="scan.bin")
    box.add(empty)
    box.flush()
    box.close()
    # Thunderbird's folders have no suffix and start with "From - " and a date (from memory)
    (folder / "Inbox").write_bytes(
        b"From - Sat Jan 03 12:00:00 2026\nSubject: Spoke broke\nFrom: a@example.org\n\nA spoke and a chain broke.\n\n"
        b"From - Sun Jan 04 09:30:00 2026\nSubject: Mulch\nFrom: b@example.org\n\nWhich mulch and compost?\n")


@pytest.fixture(scope="module")
def folder_run(spark: Any, tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, Ingested, Path]:
    """The folder, the local reader's reading of it, and its Spark run (one k-means start: reading is checked)."""
    from pilewise.engines import spark_engine

    if not LICENCES.is_dir():
        pytest.skip("no /usr/share/common-licenses on this machine")
    work = tmp_path_factory.mktemp("files")
    folder = work / "pile"
    shutil.copytree(LICENCES, folder, symlinks=False)
    for path in folder.iterdir():  # the readers read .txt files; Debian's licences have no suffix
        path.rename(path.with_name(path.name + ".txt"))
    (folder / "logo.png").write_bytes(b"\x89PNG\r\n\x1a\n" + bytes(range(256)))
    (folder / "empty.txt").write_bytes(b"")
    (folder / "note.txt").write_text("The oven and the whisk, flour and butter.\n", encoding="utf-8")
    # gzip files holding one text file are read in place by both readers (a real manual page where there is one)
    (folder / "recipe.txt.gz").write_bytes(gzip.compress(b"Flour, butter and sugar, whisked in the oven dish.\n"))
    (folder / "cut.txt.gz").write_bytes(gzip.compress(b"a whisk and an oven " * 40)[:30])
    (folder / "nothing.txt.gz").write_bytes(b"")
    for page in sorted(Path("/usr/share/man/man1").glob("*.1.gz"))[:1]:
        (folder / page.name).write_bytes(page.read_bytes())
    _write_mailboxes(folder)
    local = read(folder)
    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(spark_engine, "kmeans_starts", lambda options, texts: 1)
        result = invoke("run", str(folder), "--k", "3", "--engine", "spark", "--quiet", "--out", str(work / "out"))
    assert result.exit_code == 0, result.output
    return folder, local, Path(result.output.strip().splitlines()[-1]).parent


def test_spark_reads_a_folder_of_real_files_like_the_local_reader(folder_run: tuple[Path, Ingested, Path]) -> None:
    folder, local, run = folder_run
    rows = read_assignments(run)
    # the same documents in the same reading order as the local reader: files by path, messages in order
    assert [(row["doc_id"], row["title"]) for row in rows] == [(d.doc_id, d.title) for d in local.documents]
    report = read_ingest_report(run)
    reasons = {row["source"]: row["reason"] for row in report if row["status"] == "skipped"}
    assert reasons["logo.png"] == "unsupported" and reasons["empty.txt"] == "empty"
    assert reasons["cut.txt.gz"] == "unreadable" and "recipe.txt.gz" in {row["doc_id"] for row in rows}
    local_lines = {e.source: (e.reason, e.detail) for e in local.entries if e.status == "skipped"}
    assert {row["source"]: (row["reason"], row["detail"]) for row in report if row["source"].endswith(".gz")
            and row["status"] == "skipped"} == {s: r for s, r in local_lines.items() if s.endswith(".gz")}
    # nothing lost: every file of the folder is the source of a document or a skipped line of the report
    # (a message's source is its mailbox's name, "#msgN" after it)
    accounted = {source.split("#")[0] for source in [*(row["source"] for row in rows), *reasons]}
    assert accounted == {path.name for path in folder.iterdir()}


def test_spark_splits_mailboxes_into_messages_like_the_local_reader(folder_run: tuple[Path, Ingested, Path]) -> None:
    """Before: the spark engine skipped every .mbox file ("does not split mailboxes")."""
    _, _, run = folder_run
    assert "support.mbox#msg9" in {row["doc_id"] for row in read_assignments(run)}
    report = {(row["source"], row["status"], row["reason"], row["detail"]) for row in read_ingest_report(run)}
    assert ("support.mbox", "document", "mailbox", "9 of 10 messages became documents") in report
    assert ("support.mbox#msg10", "skipped", "empty", "message 10 has no text (no text part)") in report
    assert ("Inbox", "document", "mailbox", "2 of 2 messages became documents") in report
