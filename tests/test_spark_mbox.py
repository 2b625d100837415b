"""Mailboxes on the spark engine: an mbox file (or a file without suffix that starts with a "From " line) is
split into one document per message, by the local reader's own code, as the other modes split it."""

from __future__ import annotations

import mailbox
from email.message import EmailMessage
from pathlib import Path
from typing import Any

import pytest
from tests.helpers import TOPICS, invoke, read, read_assignments, read_ingest_report

pytestmark = [pytest.mark.spark, pytest.mark.slow]  # a Spark run: over 10 s


def _message(subject: str, body: str) -> EmailMessage:
    msg = EmailMessage()
    msg["Subject"] = subject
    msg["From"] = "customer@example.org"
    msg.set_content(body)
    return msg


def test_spark_splits_mailboxes_into_messages_like_the_local_reader(
        spark: Any, one_kmeans_start: None, tmp_path: Path) -> None:
    """Before: the spark engine skipped every .mbox file ("does not split mailboxes")."""
    folder = tmp_path / "mail"
    folder.mkdir()
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
    (folder / "note.txt").write_text("The oven and the whisk, flour and butter.\n", encoding="utf-8")
    local = read(folder)
    result = invoke("run", str(folder), "--k", "3", "--engine", "spark", "--quiet",
                    "--out", str(tmp_path / "out"))
    assert result.exit_code == 0, result.output
    run = Path(result.output.strip().splitlines()[-1]).parent
    rows = read_assignments(run)
    # the same documents in the same reading order as the local reader: files by path, messages in order
    assert [(row["doc_id"], row["title"]) for row in rows] == [(d.doc_id, d.title) for d in local.documents]
    assert "support.mbox#msg9" in {row["doc_id"] for row in rows}
    report = {(row["source"], row["status"], row["reason"], row["detail"]) for row in read_ingest_report(run)}
    assert ("support.mbox", "document", "mailbox", "9 of 10 messages became documents") in report
    assert ("support.mbox#msg10", "skipped", "empty", "message 10 has no text (no text part)") in report
    assert ("Inbox", "document", "mailbox", "2 of 2 messages became documents") in report
