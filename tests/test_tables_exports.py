"""Table exports as other programs write them: separators, encodings, broken quotes, nested and binary cells.

Every input is a small file written by the test. Expected texts come from the strings the test wrote,
encoded and decoded by Python's own codecs, csv and json modules, never from pilewise itself.
"""

from __future__ import annotations

import csv
import json
from pathlib import Path

import pytest

from helpers import invoke, read, read_assignments, read_manifest
from pilewise.errors import PilewiseError
from pilewise.ingest.tables import ColumnChoice
from pilewise.model import Ingested


def notes_of(ingested: Ingested, reason: str) -> list[str]:
    return [e.detail for e in ingested.entries if e.status == "note" and e.reason == reason]


def skipped_of(ingested: Ingested) -> list[tuple[str, str, str]]:
    return [(e.source, e.reason, e.detail) for e in ingested.entries if e.status == "skipped"]


ROWS = [("1", "Ein Topf, zerbrochen", "Köln"), ("2", "Die Erde ist zu nass", "Bonn"), ("3", "Kette; rostig", "Ulm")]


def semicolon_text(rows: list[tuple[str, str, str]] = ROWS) -> str:
    """A table as a German spreadsheet exports it: ';' between fields, quotes where a field holds one."""
    out: list[str] = []
    writer = csv.writer(_Lines(out), delimiter=";", lineterminator="\r\n")  # Python csv module docs
    writer.writerow(["id", "text", "city"])
    writer.writerows(rows)
    return "".join(out)


class _Lines:
    def __init__(self, out: list[str]) -> None:
        self.out = out

    def write(self, line: str) -> None:
        self.out.append(line)


class TestSeparators:
    def test_semicolon_csv_with_a_utf8_byte_order_mark(self, tmp_path: Path) -> None:
        # Unicode FAQ (BOM): U+FEFF at the start is a signature, not part of the first column name
        (tmp_path / "t.csv").write_bytes(semicolon_text().encode("utf-8-sig"))
        ingested = read(tmp_path / "t.csv")
        assert [(d.doc_id, d.text, d.metadata) for d in ingested.documents] == [
            (i, text, (("city", city),)) for i, text, city in ROWS
        ]
        assert notes_of(ingested, "separator") == ["separator ';' (sniffed)"]  # Python csv.Sniffer docs
        assert "t.csv: separator ';' (sniffed)" in ingested.notes

    def test_text_column_names_the_real_columns_of_a_semicolon_file(self, tmp_path: Path) -> None:
        (tmp_path / "t.csv").write_text("ref;body;notes\nA;first body text;x\nB;second body text;y\n", "utf-8")
        ingested = read(tmp_path / "t.csv", ColumnChoice(text="body"))
        assert [d.text for d in ingested.documents] == ["first body text", "second body text"]
        assert [d.metadata for d in ingested.documents] == [(("ref", "A"), ("notes", "x")),
                                                           (("ref", "B"), ("notes", "y"))]

    def test_a_sep_line_sets_the_separator_and_is_not_a_row(self, tmp_path: Path) -> None:
        # "sep=;" as the first line: the spreadsheet convention (common practice); line 5 is the bad row
        (tmp_path / "t.csv").write_text("sep=;\nid;text\n1;one, two\n2;three\n3;four;extra\n", encoding="utf-8")
        ingested = read(tmp_path / "t.csv")
        assert [d.text for d in ingested.documents] == ["one, two", "three"]
        assert notes_of(ingested, "separator") == ["separator ';' from the sep= line"]
        assert skipped_of(ingested) == [("t.csv#line5", "malformed row", "3 fields where the header has 2")]

    def test_pipe_separated_file(self, tmp_path: Path) -> None:
        (tmp_path / "t.csv").write_text("id|text|tag\n1|first text|a\n2|second, text|b\n3|third|c\n", "utf-8")
        ingested = read(tmp_path / "t.csv")
        assert [d.text for d in ingested.documents] == ["first text", "second, text", "third"]
        assert notes_of(ingested, "separator") == ["separator '|' (sniffed)"]

    def test_a_separator_outside_the_candidates_needs_delimiter(self, tmp_path: Path) -> None:
        (tmp_path / "t.csv").write_text("id:text\n1:first text about soil and water\n2:second text on ovens\n", "utf-8")
        # sniffing only tries , ; tab | (common practice): the header stays one column
        guessed = read(tmp_path / "t.csv")
        assert [d.text for d in guessed.documents] == ["1:first text about soil and water", "2:second text on ovens"]
        given = read(tmp_path / "t.csv", ColumnChoice(delimiter=":"))
        assert [(d.doc_id, d.text) for d in given.documents] == [("1", "first text about soil and water"),
                                                                 ("2", "second text on ovens")]
        assert notes_of(given, "separator") == ["separator ':' (given)"]

    def test_a_comma_csv_gets_no_separator_note(self, tmp_path: Path) -> None:
        (tmp_path / "t.csv").write_text("id,text\n1,plain; with a semicolon\n2,second\n", encoding="utf-8")
        ingested = read(tmp_path / "t.csv")
        assert [d.text for d in ingested.documents] == ["plain; with a semicolon", "second"]
        assert notes_of(ingested, "separator") == []

    def test_tsv_keeps_tab_when_tabs_split_every_row(self, tmp_path: Path) -> None:
        # each line also splits evenly on ',', but the suffix's separator splits them as well (common practice)
        (tmp_path / "t.tsv").write_text("id\ttext\n1\tsoil, water\n2\toven, flour\n", encoding="utf-8")
        ingested = read(tmp_path / "t.tsv")
        assert [d.text for d in ingested.documents] == ["soil, water", "oven, flour"]


class TestEncodings:
    def test_cp1252_semicolon_csv_is_read_as_cp1252(self, tmp_path: Path) -> None:
        rows = [("1", "Eine naïve Frage zum Preis von 5 €", "München"), ("2", "Grüße aus der Küche", "Köln"),
                ("3", "Die Lieferung kam spät", "Zürich")]
        (tmp_path / "t.csv").write_bytes(semicolon_text(rows).encode("cp1252"))  # Python codecs: cp1252
        ingested = read(tmp_path / "t.csv")
        assert [d.text for d in ingested.documents] == [text for _, text, _ in rows]
        assert notes_of(ingested, "encoding") == ["not UTF-8; decoded as cp1252"]
        forced = read(tmp_path / "t.csv", ColumnChoice(encoding="cp1252"))
        assert [d.text for d in forced.documents] == [text for _, text, _ in rows]
        assert notes_of(forced, "encoding") == ["encoding cp1252 (given)"]
        assert "t.csv: encoding cp1252 (given)" in forced.notes

    def test_encoding_option_overrides_detection(self, tmp_path: Path) -> None:
        # too little text to tell cp1250 from cp1252, so the tie goes to cp1252: 0xE8 reads as 'è', not 'č'
        # (Python codecs tables); --encoding is the way out
        raw = "id,text\n1,Lojze Kovačič\n".encode("cp1250")
        (tmp_path / "t.csv").write_bytes(raw)
        assert read(tmp_path / "t.csv").documents[0].text == "Lojze Kovačič".encode("cp1250").decode("cp1252")
        forced = read(tmp_path / "t.csv", ColumnChoice(encoding="cp1250"))
        assert forced.documents[0].text == "Lojze Kovačič"

    def test_utf16_tsv_with_byte_order_mark(self, tmp_path: Path) -> None:
        # Python's utf-16 codec writes a byte-order mark first (codecs docs)
        (tmp_path / "t.tsv").write_text("id\ttext\n1\tkale süß\n2\tplum\n", encoding="utf-16")
        ingested = read(tmp_path / "t.tsv")
        assert [d.text for d in ingested.documents] == ["kale süß", "plum"]
        assert notes_of(ingested, "encoding") == ["not UTF-8; decoded as utf-16 (byte-order mark)"]

    def test_encoding_option_reaches_json(self, tmp_path: Path) -> None:
        (tmp_path / "t.json").write_bytes(json.dumps([{"text": "crème brûlée"}], ensure_ascii=False).encode("cp1252"))
        ingested = read(tmp_path / "t.json", ColumnChoice(encoding="cp1252"))
        assert [d.text for d in ingested.documents] == ["crème brûlée"]
        assert notes_of(ingested, "encoding") == ["encoding cp1252 (given)"]


class TestQuoting:
    def test_a_quote_that_never_closes_does_not_swallow_the_rows(self, tmp_path: Path) -> None:
        # RFC 4180 §2.7: a field that opens with a quote must close with one; here end of file comes first
        (tmp_path / "t.csv").write_text('id,text\n1,"never closes\n2,second\n3,third\n', encoding="utf-8")
        ingested = read(tmp_path / "t.csv")
        assert [(d.doc_id, d.text) for d in ingested.documents] == [("1", '"never closes'), ("2", "second"),
                                                                    ("3", "third")]
        assert notes_of(ingested, "unclosed quote") == [
            "quote opened on line 2 never closes; lines 2-4 read without quoting"
        ]
        assert "t.csv: 1 quote(s) never close; their lines were read one row per line without quoting (see the " \
               "unclosed quote lines of the ingest report)" in ingested.notes

    def test_a_runaway_quote_closed_by_a_later_field(self, tmp_path: Path) -> None:
        # the quote opening "fine, quoted" would close the runaway one and leave text after it (RFC 4180 §2.7)
        (tmp_path / "t.csv").write_text(
            'id,text,tag\n1,"never closes,a\n2,second,b\n3,third,c\n4,"fine, quoted",d\n5,fifth,e\n', "utf-8"
        )
        ingested = read(tmp_path / "t.csv")
        assert [d.text for d in ingested.documents] == ['"never closes', "second", "third", "fine, quoted", "fifth"]
        assert [dict(d.metadata)["tag"] for d in ingested.documents] == ["a", "b", "c", "d", "e"]
        assert notes_of(ingested, "unclosed quote") == [
            "quote opened on line 2 never closes; lines 2-5 read without quoting"
        ]

    def test_a_runaway_quote_that_closes_cleanly_far_below(self, tmp_path: Path) -> None:
        # three lines inside one "cell", each a full row of the three-column table (common practice)
        (tmp_path / "t.csv").write_text(
            'id,text,tag\n1,"opens here,a\n2,second,b\n3,third,c\n4,ends here",d\n5,fifth,e\n', "utf-8"
        )
        ingested = read(tmp_path / "t.csv")
        assert [d.doc_id for d in ingested.documents] == ["1", "2", "3", "4", "5"]
        assert ingested.documents[3].text == 'ends here"'

    def test_quoted_prose_with_two_commas_a_line_stays_one_row(self, tmp_path: Path) -> None:
        # seen in a quotation file written by Python's csv module: every line of the quoted cell splits into
        # three fields at its commas, but its doubled quotes are escapes, which only a quoted field holds
        # (RFC 4180 §2.7)
        text = ('A boy spent years, said the note, collecting stamps.\nHis sister, he said, "bought an album too.'
                '"\nDad, she buys, everything I buy.\nSon, he said, remember: "imitation."')
        with (tmp_path / "t.csv").open("w", encoding="utf-8", newline="") as handle:
            csv.writer(handle).writerows([["id", "file", "text"], ["q1", "sayings", text], ["q2", "sayings", "x"]])
        ingested = read(tmp_path / "t.csv")
        assert [(d.doc_id, d.text) for d in ingested.documents] == [("q1", text), ("q2", "x")]
        assert notes_of(ingested, "unclosed quote") == []

    def test_quoted_cells_with_line_breaks_stay_one_row(self, tmp_path: Path) -> None:
        # RFC 4180 §2.6: line breaks inside double quotes belong to the field
        texts = ["Hello, there\nSecond, line", "one\ntwo\nthree\nfour", 'He said ""hi""\nand left']
        lines = "".join(f'{i},"{text}",x\n' for i, text in enumerate(texts, start=1))
        (tmp_path / "t.csv").write_text("id,text,tag\n" + lines, encoding="utf-8")
        ingested = read(tmp_path / "t.csv")
        assert [d.text for d in ingested.documents] == [t.replace('""', '"') for t in texts]
        assert notes_of(ingested, "unclosed quote") == []

    def test_quotes_in_a_tsv_are_text_unless_fields_are_quoted(self, tmp_path: Path) -> None:
        # IANA text/tab-separated-values: no quoting; a quote is part of the field
        (tmp_path / "t.tsv").write_text('id\ttext\n1\t"Great product\n2\tsecond\n3\t5" pipe\n', encoding="utf-8")
        ingested = read(tmp_path / "t.tsv")
        assert [d.text for d in ingested.documents] == ['"Great product', "second", '5" pipe']
        assert notes_of(ingested, "unclosed quote") == []

    def test_quoted_tsv_as_excel_tab_writes_it(self, tmp_path: Path) -> None:
        # Python csv docs: the excel-tab dialect quotes fields holding tabs, quotes or line breaks
        with (tmp_path / "t.tsv").open("w", encoding="utf-8", newline="") as handle:
            writer = csv.writer(handle, dialect="excel-tab")
            writer.writerows([["id", "text"], ["1", "a\ttab and\na line"], ["2", 'say "hi"'], ["3", "plain"]])
        with (tmp_path / "t.tsv").open("a", encoding="utf-8") as handle:
            handle.write('4\t"never closes\n5\tfifth\n')
        ingested = read(tmp_path / "t.tsv")
        assert [d.text for d in ingested.documents] == ["a\ttab and\na line", 'say "hi"', "plain", '"never closes',
                                                        "fifth"]
        assert notes_of(ingested, "unclosed quote") == [
            "quote opened on line 6 never closes; lines 6-7 read without quoting"
        ]


class TestUnusableTables:
    def test_repeated_column_names_are_an_error_for_a_table_source(self, tmp_path: Path) -> None:
        (tmp_path / "x.csv").write_text("id,text,text\n1,a,b\n", encoding="utf-8")
        with pytest.raises(PilewiseError) as err:
            read(tmp_path / "x.csv")
        assert str(err.value) == (
            "column 'text' appears twice in x.csv; rename one of them in the file so that every column name is unique"
        )

    def test_unusable_tables_in_a_folder_are_skipped_lines(self, tmp_path: Path) -> None:
        (tmp_path / "dup.csv").write_text("id,text,text\n1,a,b\n", encoding="utf-8")
        (tmp_path / "many.csv").write_text("a,a,b,b\n1,2,3,4\n", encoding="utf-8")
        (tmp_path / "notext.csv").write_text("a,b\nx,y\n", encoding="utf-8")
        (tmp_path / "ok.txt").write_text("plain words about soil", encoding="utf-8")
        ingested = read(tmp_path)
        assert [d.source for d in ingested.documents] == ["ok.txt"]
        assert skipped_of(ingested) == [
            ("dup.csv", "repeated columns",
             "column 'text' appears twice in dup.csv; rename one of them in the file so that every column name is "
             "unique"),
            ("many.csv", "repeated columns",
             "columns 'a', 'b' appear twice in many.csv; rename them in the file so that every column name is unique"),
            ("notext.csv", "no text column", "no text column found in notext.csv; pass --text-column (columns: a, b)"),
        ]


class TestJson:
    def test_an_api_response_reads_one_row_per_record(self, tmp_path: Path) -> None:
        results = [{"id": f"r{i}", "text": f"record number {i}", "tags": ["a", "ü"], "author": {"name": "Zoë"}}
                   for i in range(3)]
        dump = {"meta": {"page": 1, "links": {"next": None}}, "count": 3, "results": results}
        (tmp_path / "t.json").write_text(json.dumps(dump, ensure_ascii=False), encoding="utf-8")
        ingested = read(tmp_path / "t.json")
        assert [d.doc_id for d in ingested.documents] == ["r0", "r1", "r2"]
        metadata = dict(ingested.documents[0].metadata)
        # lists as JSON text that parses back to the original (Python json docs); a nested object is spread
        # into dotted columns as pandas.json_normalize names them
        assert json.loads(metadata["tags"]) == ["a", "ü"] and metadata["author.name"] == "Zoë"
        assert metadata["tags"] == '["a", "ü"]'  # not the Python repr "['a', 'ü']"
        assert notes_of(ingested, "records") == ["records from key 'results'"]

    def test_records_are_found_a_few_levels_down(self, tmp_path: Path) -> None:
        data = {"data": {"items": [{"text": "first item"}, {"text": "second item"}]}, "errors": []}
        (tmp_path / "t.json").write_text(json.dumps(data), encoding="utf-8")
        ingested = read(tmp_path / "t.json")
        assert [d.text for d in ingested.documents] == ["first item", "second item"]
        assert notes_of(ingested, "records") == ["records from key 'data.items'"]

    def test_several_lists_of_records_need_records_key(self, tmp_path: Path) -> None:
        data = {"users": [{"name": "ann"}, {"name": "bo"}],
                "export": {"posts": [{"text": "a post"}, {"text": "another post"}]}}
        (tmp_path / "t.json").write_text(json.dumps(data), encoding="utf-8")
        message = ("t.json holds several lists of records ('users', 'export.posts'); pass --records-key KEY with one "
                   "of them")
        with pytest.raises(PilewiseError) as err:
            read(tmp_path / "t.json")
        assert str(err.value) == message
        chosen = read(tmp_path / "t.json", ColumnChoice(records_key="export.posts"))
        assert [d.text for d in chosen.documents] == ["a post", "another post"]
        assert notes_of(chosen, "records") == ["records from key 'export.posts' (given)"]
        (tmp_path / "more.txt").write_text("plain words", encoding="utf-8")
        in_folder = read(tmp_path)
        assert skipped_of(in_folder) == [("t.json", "several record lists", message)]

    def test_a_list_with_twice_the_items_of_every_other_is_taken_and_noted(self, tmp_path: Path) -> None:
        """An API page: the records beside a list of one link object (common practice in paged APIs)."""
        page = {"meta": {"links": [{"rel": "next", "href": "?page=2"}], "total": 5},
                "data": [{"id": i, "text": f"record number {i}"} for i in range(5)]}
        (tmp_path / "page.json").write_text(json.dumps(page), encoding="utf-8")
        taken = read(tmp_path / "page.json")
        assert [d.text for d in taken.documents] == [f"record number {i}" for i in range(5)]
        assert notes_of(taken, "records") == ["records from key 'data', the longest list of objects (also: "
                                              "'meta.links')"]

    def test_records_are_found_deep_inside_objects(self, tmp_path: Path) -> None:
        """Regression: records four levels down became one document holding all of them as JSON."""
        deep = {"a": {"b": {"c": {"d": [{"text": f"entry {i}"} for i in range(4)]}}}}
        (tmp_path / "deep.json").write_text(json.dumps(deep), encoding="utf-8")
        found = read(tmp_path / "deep.json")
        assert [d.text for d in found.documents] == [f"entry {i}" for i in range(4)]
        assert notes_of(found, "records") == ["records from key 'a.b.c.d'"]

    def test_a_records_key_that_is_not_a_list(self, tmp_path: Path) -> None:
        (tmp_path / "t.json").write_text(json.dumps({"items": [{"text": "a"}], "meta": {}}), encoding="utf-8")
        with pytest.raises(PilewiseError) as err:
            read(tmp_path / "t.json", ColumnChoice(records_key="meta"))
        assert str(err.value) == ("--records-key 'meta' is not a list in t.json; pass the key of a list of records "
                                  "(items)")

    def test_arrays_of_arrays_with_and_without_a_header(self, tmp_path: Path) -> None:
        (tmp_path / "h.json").write_text(json.dumps([["id", "text"], [1, "first"], [2, "second"], [3]]), "utf-8")
        headed = read(tmp_path / "h.json")
        assert [(d.doc_id, d.text) for d in headed.documents] == [("1", "first"), ("2", "second")]
        assert notes_of(headed, "arrays") == ["arrays of arrays; the first array is the header"]
        assert skipped_of(headed) == [("h.json#array4", "malformed row", "1 fields where the header has 2")]
        (tmp_path / "n.json").write_text(json.dumps([[1, "soil and water for seedlings"], [2, "ovens and flour"]]))
        bare = read(tmp_path / "n.json", ColumnChoice(text="col2"))
        assert [(d.text, d.metadata) for d in bare.documents] == [("soil and water for seedlings", (("col1", "1"),)),
                                                                  ("ovens and flour", (("col1", "2"),))]
        assert notes_of(bare, "arrays") == ["arrays of arrays without a header; columns named col1..col2"]

    def test_json_lines_nested_values_and_a_list_of_paragraphs(self, tmp_path: Path) -> None:
        record = {"text": ["first paragraph", "second paragraph"], "meta": {"k": [1, 2]}, "flag": True}
        (tmp_path / "t.jsonl").write_text(json.dumps(record) + "\n", encoding="utf-8")
        doc = read(tmp_path / "t.jsonl").documents[0]
        assert doc.text == "first paragraph\nsecond paragraph"
        # JSON spelling of nested values and booleans (RFC 8259), as json.dumps writes them
        assert dict(doc.metadata) == {"meta.k": json.dumps([1, 2]), "flag": "true"}


def test_json_nested_too_deeply_is_a_report_line_not_a_traceback(tmp_path: Path) -> None:
    """Regression: Python's json parser raises RecursionError (not a ValueError) past its nesting limit."""
    deep = "[" * 100_000 + "]" * 100_000
    (tmp_path / "deep.json").write_text(deep, encoding="utf-8")
    (tmp_path / "deep.jsonl").write_text('{"text": "fine line"}\n' + deep + "\n", encoding="utf-8")
    ingested = read(tmp_path)
    assert [d.text for d in ingested.documents] == ["fine line"]
    assert [(source, reason) for source, reason, _ in skipped_of(ingested)] == [
        ("deep.json", "unreadable table"), ("deep.jsonl#line2", "invalid JSON")
    ]


class TestParquet:
    def test_binary_list_and_struct_cells(self, tmp_path: Path) -> None:
        pa = pytest.importorskip("pyarrow")
        pq = pytest.importorskip("pyarrow.parquet")
        table = pa.table({
            "text": ["first text", "second text", "third text"],
            "raw": [b"caf\xc3\xa9", b"\xff\xfe\x00", None],
            "tags": [["x", "y"], ["z"], []],
            "info": [{"n": 1, "l": [1, 2]}, {"n": 2, "l": []}, None],
        })
        pq.write_table(table, tmp_path / "t.parquet")
        ingested = read(tmp_path / "t.parquet")
        assert [d.text for d in ingested.documents] == ["first text", "third text"]
        first = dict(ingested.documents[0].metadata)
        assert first["raw"] == b"caf\xc3\xa9".decode("utf-8")  # valid UTF-8 (Python codecs)
        assert json.loads(first["tags"]) == ["x", "y"] and json.loads(first["info"]) == {"n": 1, "l": [1, 2]}
        assert dict(ingested.documents[1].metadata) == {"raw": "", "tags": "[]", "info": ""}
        assert skipped_of(ingested) == [
            ("t.parquet#row2", "binary cell", "column 'raw' holds bytes that are not UTF-8")
        ]
        assert notes_of(ingested, "binary cells") == ["column 'raw' holds bytes; read as UTF-8 text"]


def test_a_semicolon_csv_runs_end_to_end(tmp_path: Path) -> None:
    topics = ["Erde Kompost Setzling Wasser", "Kette Sattel Pedal Bremse"]
    extra = ["Montag", "bitte", "heute", "wieder", "später", "danke"]
    rows = [(f"T{i}", f"{extra[i % 6]} {topics[i % 2]} {extra[(i * 5 + 1) % 6]} {extra[(i + 3) % 6]}",
             ["Köln", "Bonn"][i % 2]) for i in range(12)]
    out: list[str] = []
    writer = csv.writer(_Lines(out), delimiter=";")
    writer.writerow(["ref", "body", "city"])
    writer.writerows(rows)
    table = tmp_path / "export.csv"
    table.write_bytes("".join(out).encode("utf-8-sig"))
    site = tmp_path / "site"
    result = invoke("run", str(table), "--k", "2", "--text-column", "body", "--id-column", "ref",
                    "--out", str(site), "--quiet")
    assert result.exit_code == 0, result.stderr
    assignments = read_assignments(site / "runs" / "k2")
    assert sorted(row["doc_id"] for row in assignments) == sorted(ref for ref, _, _ in rows)
    assert {row["city"] for row in assignments} == {"Köln", "Bonn"}
    manifest = read_manifest(site / "runs" / "k2")
    assert "export.csv: separator ';' (sniffed)" in manifest["input"]["notes"]


def test_repeated_columns_through_the_cli_are_one_line(tmp_path: Path) -> None:
    table = tmp_path / "x.csv"
    table.write_text("id,text,text\n1,soil,water\n2,oven,flour\n3,chain,pedal\n", encoding="utf-8")
    result = invoke("run", str(table), "--k", "2", "--out", str(tmp_path / "site"))
    assert result.exit_code == 1
    lines = [line for line in result.stderr.splitlines() if line.startswith("pilewise: error")]
    assert lines == ["pilewise: error: column 'text' appears twice in x.csv; rename one of them in the file so "
                     "that every column name is unique"]


class _Match:
    """A stand-in for one charset-normalizer match: only what detect_encoding reads."""

    def __init__(self, encoding: str) -> None:
        self.encoding, self.chaos, self.coherence = encoding, 0.05, 0.85


class _Matches(list):  # type: ignore[type-arg]
    def best(self) -> _Match:
        return self[0]


@pytest.mark.parametrize("dos_page", ["cp775", "cp850", "cp852"])
def test_a_dos_code_page_guess_yields_to_cp1252_when_cp1252_reads_as_well(
    monkeypatch: pytest.MonkeyPatch, dos_page: str
) -> None:
    """Regression: a Windows export with curly quotes and dashes was read as cp775 ("ōQuotedö").

    The detector's answer is replaced by a DOS code page, as charset-normalizer gave on a real export;
    the bytes are cp1252 (Python's codec tables are the reference), so cp1252 must win. Text in a DOS
    page that cp1252 cannot read cleanly keeps the detector's answer.
    """
    from pilewise.ingest import plaintext

    monkeypatch.setattr(plaintext.charset_normalizer, "from_bytes", lambda raw: _Matches([_Match(dos_page)]))
    western = "“Quoted” start – the printer’s queue is stuck; ‘naïve’ café order".encode("cp1252")
    assert plaintext.detect_encoding(western) == "cp1252"
    cyrillic = "Привет, как дела? Это проверка кодировки русского текста.".encode("cp866")
    assert plaintext.detect_encoding(cyrillic) == dos_page


def test_row_numbers_count_the_rows_that_were_reported(tmp_path: Path) -> None:
    """Regression: `#rowN` skipped malformed rows, so default ids pointed at the wrong row of the file.

    `#rowN` is the N-th data record of the file (RFC 4180 §2: each record is one row after the
    header), counted whether or not it became a document; JSON Lines count every non-blank line.
    """
    with (tmp_path / "noid.csv").open("w", encoding="utf-8", newline="") as handle:
        csv.writer(handle).writerows([["title", "text"], ["first", "the first text"], ["bad"],
                                      ["third", "the third text"]])
    rows = read(tmp_path / "noid.csv")
    assert [(d.doc_id, d.title) for d in rows.documents] == [("noid.csv#row1", "first"), ("noid.csv#row3", "third")]
    assert rows.entries[0].detail == "2 of 3 rows became documents (text column 'text')"
    lines = ['{"text": "one"}', "not json", "[1, 2]", '{"text": "four"}']
    (tmp_path / "mixed.jsonl").write_text("\n".join(lines) + "\n", encoding="utf-8")
    records = read(tmp_path / "mixed.jsonl")
    assert [(d.doc_id, d.text) for d in records.documents] == [("mixed.jsonl#row1", "one"),
                                                                ("mixed.jsonl#row4", "four")]


def test_blank_header_cells_are_named_by_position(tmp_path: Path) -> None:
    """A spreadsheet export with trailing empty header cells ("id;text;;;") is read, not refused as
    repeated columns (common practice: spreadsheets pad rows to the widest one)."""
    lines = ["id;text;;;", "1;a first answer about parcels;;;", "2;a second answer about invoices;;;"]
    (tmp_path / "padded.csv").write_text("\r\n".join(lines) + "\r\n", encoding="utf-8")
    padded = read(tmp_path / "padded.csv")
    assert [(d.doc_id, d.text) for d in padded.documents] == [("1", "a first answer about parcels"),
                                                              ("2", "a second answer about invoices")]
    assert [name for name, _ in padded.documents[0].metadata] == ["column 3", "column 4", "column 5"]


def test_many_rows_that_do_not_fit_the_header_earn_a_warning(tmp_path: Path) -> None:
    """A separator the sniffer does not try (`~`) leaves most rows the wrong width: the user is told to
    pass --delimiter, and --delimiter reads every row (common practice: report, never guess silently)."""
    lines = ["id~title~text,notes"] + [f"{i}~item {i}~words about parcel {i}, more words" + (", and" * (i % 2))
                                        for i in range(20)]
    (tmp_path / "tilde.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    guessed = read(tmp_path / "tilde.csv")
    assert any("pass --delimiter or --encoding" in note for note in guessed.notes)
    assert len(guessed.documents) == 10  # the rows that happen to hold one comma
    given = read(tmp_path / "tilde.csv", ColumnChoice(text="text,notes", delimiter="~"))
    assert len(given.documents) == 20
    assert not any("pass --delimiter" in note for note in given.notes)
