"""Small things users meet: files of no known type, trend wording, the site's navigation and links, snippets."""

from __future__ import annotations

import struct
import zlib
from pathlib import Path

from helpers import LIMITS, assert_one_line_error, invoke, read
from pilewise.ingest.plaintext import decodes_cleanly
from pilewise.ingest.reading import SNIFF_BYTES
from pilewise.ingest.tables import ColumnChoice

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
