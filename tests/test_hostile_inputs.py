"""Hostile and messy inputs: every file is a document or a line of the ingest report, never a traceback."""

from __future__ import annotations

import csv
import os
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from helpers import invoke, read_assignments, read_ingest_report
from pilewise.errors import PilewiseError
from pilewise.ingest.reading import ReadLimits, read_source
from pilewise.ingest.tables import ColumnChoice

TOPICS = ["soil compost seedling mulch watering", "chain saddle pedal spoke brake", "oven flour dough whisk butter"]


def _good_files(folder: Path, n: int = 12) -> None:
    import random

    rng = random.Random(n)
    for i in range(n):
        words = TOPICS[i % 3].split()
        text = " ".join(rng.choice(words) for _ in range(12))
        (folder / f"good-{i:02d}.txt").write_text(f"{text} note {i}", encoding="utf-8")


def _hostile_folder(folder: Path) -> None:
    folder.mkdir()
    _good_files(folder)
    (folder / "random.txt").write_bytes(bytes(range(256)) * 40)
    (folder / "nul.txt").write_bytes(b"soil\x00compost\x00" * 100)
    (folder / "latin1.txt").write_bytes("compost for the caf\xe9 garden, cr\xe8me soil".encode("latin-1"))
    (folder / "cp1252.md").write_bytes("\u201csmart quotes\u201d about pedal and chain \u2013 brake".encode("cp1252"))
    (folder / "mixed.txt").write_bytes(b"oven flour " + "caf\xe9".encode("latin-1") + b" dough")
    (folder / "utf16.txt").write_text("whisk butter oven flour dough", encoding="utf-16")
    (folder / "big-line.txt").write_text("flour " * 9_000_000, encoding="utf-8")  # one line, 54 MB
    (folder / "nested.html").write_text("<div>" * 5000 + "spoke saddle deep inside" + "</div>" * 5000)
    (folder / "broken.html").write_text("<html><title>Half <b>open<p>pedal chain <td>brake</tr></table", "utf-8")
    (folder / "empty.txt").write_bytes(b"")
    (folder / "blank.md").write_text("   \n\t\n", encoding="utf-8")
    (folder / "scan.pdf").write_bytes(b"%PDF-1.4 binary")
    with (folder / "export.csv").open("w", encoding="utf-8", newline="") as handle:
        writer = csv.writer(handle)
        writer.writerow(["id", "text"])
        writer.writerow(["c1", 'soil "quoted" compost,\nover two lines'])
        writer.writerow(["c2", ""])
    with (folder / "export.csv").open("a", encoding="utf-8") as handle:
        handle.write("c3,too,many,fields\n")
    (folder / "lines.jsonl").write_text('{"text": "pedal chain"}\n{broken\n["not", "an object"]\n', "utf-8")
    (folder / "loop-a").symlink_to(folder / "loop-b")
    (folder / "loop-b").symlink_to(folder / "loop-a")
    (folder / "dangling.txt").symlink_to(folder / "nowhere.txt")
    (folder / "self-dir").symlink_to(folder, target_is_directory=True)
    os.mkfifo(folder / "pipe.txt")
    _mailbox(folder / "mail.mbox")
    (folder.parent / "outside-target.txt").write_text("text outside SOURCE about spokes", encoding="utf-8")
    (folder / "outside.txt").symlink_to(folder.parent / "outside-target.txt")
    handle = os.open(os.path.join(os.fsencode(folder), b"caf\xe9-name.txt"), os.O_WRONLY | os.O_CREAT, 0o644)
    os.write(handle, b"oven whisk butter under a name that is not UTF-8")
    os.close(handle)


def _mailbox(path: Path) -> None:
    """Two messages, the second without a text part."""
    import mailbox
    from email.message import EmailMessage

    box = mailbox.mbox(path)
    first = EmailMessage()
    first["Subject"] = "Saddle"
    first.set_content("From the shop: the saddle is loose.")
    second = EmailMessage()
    second["Subject"] = "Attachment only"
    second.add_attachment(b"\x00binary", maintype="application", subtype="octet-stream", filename="x.bin")
    box.add(first)
    box.add(second)
    box.close()


def _shown(path: Path, folder: Path) -> str:
    """How a path found is named in the report: bytes that are not UTF-8 as \\xNN (Python codecs docs)."""
    return os.fsencode(path.relative_to(folder).as_posix()).decode("utf-8", "backslashreplace")


@pytest.fixture(scope="module")
def hostile(tmp_path_factory: pytest.TempPathFactory) -> Path:
    folder = tmp_path_factory.mktemp("hostile") / "data"
    _hostile_folder(folder)
    return folder


def test_every_file_found_is_a_document_or_a_report_line(hostile: Path) -> None:
    ingested = read_source(hostile, ColumnChoice(), ReadLimits())
    found = {_shown(p, hostile) for p in hostile.iterdir()}
    documents = {d.source.split("#")[0] for d in ingested.documents}
    reported = {e.source.split("#")[0] for e in ingested.entries}
    assert found <= documents | reported
    reasons = {e.source: e.reason for e in ingested.entries if e.status == "skipped"}
    assert reasons["random.txt"] == "binary" and reasons["nul.txt"] == "binary"
    assert reasons["empty.txt"] == "empty" and reasons["blank.md"] == "empty"
    assert reasons["scan.pdf"] == "unsupported"
    assert reasons["self-dir"] == "link to a folder"
    assert reasons["pipe.txt"] == "not a regular file"
    assert {reasons["loop-a"], reasons["loop-b"], reasons["dangling.txt"]} == {"unreadable"}
    assert reasons["export.csv#row2"] == "empty" and reasons["export.csv#line5"] == "malformed row"
    assert reasons["lines.jsonl#line2"] == "invalid JSON" and reasons["lines.jsonl#line3"] == "invalid JSON"
    assert reasons["outside.txt"] == "link outside the source"
    assert reasons["mail.mbox#msg2"] == "empty"
    texts = {d.source: d.text for d in ingested.documents}
    assert "café" in texts["latin1.txt"] and "\u201csmart quotes\u201d" in texts["cp1252.md"]
    assert texts["utf16.txt"] == "whisk butter oven flour dough"
    assert texts["nested.html"] == "spoke saddle deep inside"
    assert len(texts["big-line.txt"]) == 1_000_000  # truncated, and said so
    assert any(e.source == "big-line.txt" and e.reason == "truncated" for e in ingested.entries)
    assert texts["export.csv#row1"] == 'soil "quoted" compost,\nover two lines'
    assert texts["mail.mbox#msg1"] == "From the shop: the saddle is loose."
    assert texts["caf\\xe9-name.txt"] == "oven whisk butter under a name that is not UTF-8"


@pytest.mark.parametrize("mode", ["memory", "stream"])
def test_a_run_on_the_hostile_folder_finishes_with_a_truthful_report(hostile: Path, tmp_path: Path, mode: str) -> None:
    result = invoke("run", str(hostile), "--k", "3", "--out", str(tmp_path / "site"), "--mode", mode)
    assert result.exit_code == 0, result.stderr
    report = read_ingest_report(tmp_path / "site" / "runs" / "k3")
    assignments = read_assignments(tmp_path / "site" / "runs" / "k3")
    skipped = [r for r in report if r["status"] == "skipped"]
    summary = [line for line in result.stderr.splitlines() if "documents in 3 clusters" in line][0]
    assert summary.startswith(f"{len(assignments):,} documents")
    assert f"{len(skipped):,} files or rows skipped" in summary
    found = {_shown(p, hostile) for p in hostile.iterdir()}
    listed = {row["source"].split("#")[0] for row in assignments} | {row["source"].split("#")[0] for row in report}
    assert found <= listed  # nothing lost, in either mode


def test_a_folder_where_every_document_is_identical(tmp_path: Path) -> None:
    for i in range(5):
        (tmp_path / f"copy-{i}.txt").write_text("the same auto-reply text", encoding="utf-8")
    result = invoke("run", str(tmp_path), "--k", "2", "--out", str(tmp_path.parent / "out-same"),
                    "--quiet")
    assert result.exit_code == 1
    assert result.stderr.strip() == (
        "pilewise: error: found 1 distinct document(s); clustering needs at least 3, so add documents or point "
        "SOURCE at a larger collection"
    )


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(payload=st.binary(max_size=3000), suffix=st.sampled_from([".txt", ".md", ".html", ".eml", ".csv", ".jsonl",
                                                                  ".json", ".tsv", ".mbox"]))
def test_random_bytes_never_crash_a_reader(tmp_path: Path, payload: bytes, suffix: str) -> None:
    folder = tmp_path / f"fuzz{abs(hash((payload, suffix)))}"
    folder.mkdir()
    (folder / f"x{suffix}").write_bytes(payload)
    try:
        ingested = read_source(folder, ColumnChoice(), ReadLimits())
    except PilewiseError as err:
        assert "\n" not in str(err)
        return
    assert ingested.documents or ingested.entries


@pytest.mark.slow
def test_ctrl_c_prints_one_line_and_leaves_the_previous_run_intact(tmp_path: Path) -> None:
    import signal
    import subprocess
    import sys
    import time

    folder = tmp_path / "data"
    folder.mkdir()
    _good_files(folder, n=3000)
    out = tmp_path / "site"
    first = invoke("run", str(folder), "--k", "3", "--out", str(out), "--quiet", "--resamples", "1")
    assert first.exit_code == 0, first.stderr
    before = (out / "runs" / "k3" / "clusters.json").read_bytes()
    process = subprocess.Popen(
        [sys.executable, "-m", "pilewise", "run", str(folder), "--k", "3", "--out", str(out), "--seed", "5",
         "--resamples", "200"],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
    )
    deadline = time.time() + 60
    while time.time() < deadline and not list((out / "runs").glob(".k3-building-*")):
        if process.poll() is not None:
            break
        time.sleep(0.05)
    # interrupt mid-run (while assessing or writing), as Ctrl-C in a terminal would
    process.send_signal(signal.SIGINT)
    _, stderr = process.communicate(timeout=120)
    if process.returncode == 0:
        pytest.skip("the run finished before the interrupt arrived")
    assert process.returncode == 130
    assert "Traceback" not in stderr
    assert stderr.strip().splitlines()[-1] == "pilewise: interrupted; the previous site is unchanged"
    assert (out / "runs" / "k3" / "clusters.json").read_bytes() == before
    assert not list((out / "runs").glob(".k3-*"))


def test_near_duplicates_are_clustered_once_and_every_copy_is_assigned(tmp_path: Path) -> None:
    """Regression: merging near-duplicate groups once crashed on weights of the wrong length."""
    folder = tmp_path / "data"
    folder.mkdir()
    _good_files(folder, n=30)
    template = ("Thank you for your message about order {n}. We are out of the office until {d} January and will "
                "reply as soon as we are back. For urgent matters please use the contact form on our website.")
    for i in range(8):
        (folder / f"auto-{i}.txt").write_text(template.format(n=40000 + 17 * i, d=3 + i), encoding="utf-8")
    out = tmp_path / "site"
    result = invoke("run", str(folder), "--k", "4", "--out", str(out))
    assert result.exit_code == 0, result.stderr
    assert "7 near-duplicate texts joined their groups" in result.stderr
    rows = read_assignments(out / "runs" / "k4")
    assert len(rows) == 38
    auto = [r for r in rows if r["doc_id"].startswith("auto-")]
    assert {r["cluster"] for r in auto} == {auto[0]["cluster"]} and {r["copies"] for r in auto} == {"8"}
    page = (out / "runs" / "k4" / "docs" / "d0000000.html").read_text(encoding="utf-8")
    assert "near-duplicate" in page


def test_a_folder_of_near_duplicates_names_the_grouping_as_the_cause(tmp_path: Path) -> None:
    """Six distinct texts that grouping joins into one: the error says so and names --near-duplicate, instead of
    asking for more documents (before: "found 1 distinct document(s) ... add documents")."""
    base = "the parcel arrived two days late and the box was wet so please send a replacement for order"
    for i in range(6):
        (tmp_path / f"note-{i}.txt").write_text(f"{base} {1000 + i}", encoding="utf-8")
    result = invoke("run", str(tmp_path), "--k", "2", "--out", str(tmp_path.parent / "out-near"), "--quiet")
    assert result.exit_code == 1
    assert result.stderr.strip() == (
        "pilewise: error: 1 text(s) left of 6 distinct texts after grouping near-duplicates (Jaccard 0.8 or more); "
        "clustering needs at least 3, so pass --near-duplicate 1 to turn grouping off, or a value nearer 1"
    )
