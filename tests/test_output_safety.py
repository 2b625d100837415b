"""Nothing around the output folder is harmed, and earlier runs that cannot be read never break a new run.

Spreadsheet formulas in CSV cells, names from manifests used in paths, folders pilewise did not write, two
writers of one name, file-system errors at --out, damaged exports of earlier runs, personal data on pages.
"""

from __future__ import annotations

import csv
import errno
import json
import os
import re
import subprocess
import sys
from pathlib import Path
from urllib.parse import unquote

import pytest
from hypothesis import given
from hypothesis import strategies as st

from helpers import assert_one_line_error, invoke, read_assignments, read_clusters, read_csv, read_manifest
from pilewise import pipeline
from pilewise.csvcells import read_spreadsheet_cell, spreadsheet_cell, spreadsheet_row
from pilewise.describe.compare import compare_run_folders
from pilewise.describe.names import find_old_names, read_names_csv
from pilewise.errors import PilewiseError
from pilewise.options import RunOptions
from pilewise.output.outfolder import MARKER, name_lock, safe_name

SRC = str(Path(__file__).resolve().parents[1] / "src")
# OWASP "CSV Injection" guidance: cells starting with these are read as formulas by spreadsheets
FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")
PLAIN_NUMBER = re.compile(r"[+-]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]+)?")


def run_ok(*args: str) -> str:
    result = invoke("run", *args, "--quiet")
    assert result.exit_code == 0, result.output
    assert "Traceback" not in result.stderr
    return str(result.stderr)


TOPIC_WORDS = {
    "garden": "soil compost seedling watering spade mulch greenhouse pruning",
    "bicycle": "chain saddle pedal spoke brake gear puncture handlebar",
    "kitchen": "oven flour dough whisk simmer saucepan recipe butter",
}


def write_table(path: Path, ids: list[str], titles: list[str], notes: list[str]) -> None:
    """A table of three invented topics, one row per id, with title and note columns given."""
    rows = []
    for i, (doc_id, title, note) in enumerate(zip(ids, titles, notes, strict=True)):
        topic = list(TOPIC_WORDS)[i % 3]
        words = TOPIC_WORDS[topic].split()
        text = " ".join(words[(i + j) % len(words)] for j in range(25)) + f" about {topic} number {i}"
        rows.append({"id": doc_id, "title": title, "text": text, "note": note})
    with path.open("w", encoding="utf-8", newline="") as handle:
        writer = csv.DictWriter(handle, fieldnames=["id", "title", "text", "note"])
        writer.writeheader()
        writer.writerows(rows)


# --- 1. spreadsheet formulas in CSV cells ----------------------------------------------------------------


@pytest.mark.parametrize("value", ["=1+1", "+SUM(A1:A9)", "-2+3", "@cmd", "\tx", "\rx", "'=1+1", "''@x"])
def test_a_cell_a_spreadsheet_would_run_gets_a_leading_quote(value: str) -> None:
    # OWASP CSV Injection guidance: prepend a single quote to cells starting with = + - @ tab CR
    assert spreadsheet_cell(value) == "'" + value
    assert read_spreadsheet_cell(str(spreadsheet_cell(value))) == value


@pytest.mark.parametrize("value", ["-0.5", "+3", "-1e5", ".5", "12", "plain", "'quoted", "", "a=b"])
def test_plain_numbers_and_other_text_are_left_alone(value: str) -> None:
    # numbers stay numbers in a spreadsheet (common practice); text not starting with a formula sign is safe
    assert spreadsheet_cell(value) == value
    assert read_spreadsheet_cell(value) == value


@given(st.lists(st.one_of(st.text(alphabet=st.sampled_from("'=+-@\t\r0123456789.eE ab"), max_size=6), st.text(),
                          st.integers(), st.floats(allow_nan=False), st.none()), max_size=8))
def test_a_row_escapes_exactly_the_cells_that_the_cell_rule_escapes(cells: list[object]) -> None:
    # spreadsheet_row passes cells that cannot start a formula without the cell rule: the same row either way
    assert spreadsheet_row(cells) == [spreadsheet_cell(cell) for cell in cells]


@given(st.text(max_size=12))
def test_every_text_round_trips_and_never_starts_a_formula(value: str) -> None:
    written = str(spreadsheet_cell(value))
    assert read_spreadsheet_cell(written) == value
    assert not written.startswith(FORMULA_STARTS) or PLAIN_NUMBER.fullmatch(written)


def csv_cells(folder: Path) -> list[str]:
    """Every cell of every CSV file under `folder`, read with the standard library's csv module."""
    cells: list[str] = []
    for path in sorted(folder.rglob("*.csv")):
        with path.open(encoding="utf-8", newline="") as handle:
            cells += [cell for row in csv.reader(handle) for cell in row]
    return cells


def test_ids_titles_and_cells_starting_with_formula_signs_are_escaped_and_read_back(tmp_path: Path) -> None:
    starts = ["=", "+", "-", "@"]
    ids = ["=1+1"] + [f"{starts[i % 4]}id{i}" for i in range(1, 30)]
    titles = [f"{starts[(i + 1) % 4]}title {i}" for i in range(30)]
    notes = [f"{starts[(i + 2) % 4]}HYPERLINK(x{i % 2})" for i in range(30)]
    table = tmp_path / "tickets.csv"
    write_table(table, ids, titles, notes)
    (tmp_path / "empty").mkdir()
    out = tmp_path / "site"
    args = (str(table), "--k", "3", "--out", str(out), "--id-column", "id", "--title-column", "title",
            "--text-column", "text")
    run_ok(*args, "--name", "first", "--seed", "1")
    run = out / "runs" / "first"
    # Python csv module docs: csv.reader gives the cells as written; none may start a formula (OWASP)
    for cell in csv_cells(run):
        assert not cell.startswith(FORMULA_STARTS) or PLAIN_NUMBER.fullmatch(cell), cell
    rows = read_assignments(run)
    assert sorted(row["doc_id"] for row in rows) == sorted("'" + i for i in ids)
    assert sorted(row["title"] for row in rows) == sorted("'" + t for t in titles)
    assert sorted(row["note"] for row in rows) == sorted("'" + n for n in notes)
    assert all(float(row["distance"]) >= 0 for row in rows)  # numbers are written as numbers
    # pilewise's own readers undo the quote: the ids round-trip
    comparison = compare_run_folders(run, run)
    assert comparison.shared == 30 and comparison.only_a == 0
    # a name a person gives that starts with a formula sign survives names.csv both ways
    names = read_csv(run / "names.csv")
    for row in names:
        row["name"], row["note"] = f"-group {row['cluster']}", "=checked"
    with (run / "names.csv").open("w", encoding="utf-8", newline="") as handle:
        writer = csv.DictWriter(handle, fieldnames=list(names[0]))
        writer.writeheader()
        writer.writerows(names)
    assert read_names_csv(run / "names.csv") == {int(r["cluster"]): (f"-group {r['cluster']}", "=checked")
                                                  for r in names}
    run_ok(*args, "--name", "second", "--seed", "2")
    second = out / "runs" / "second"
    clusters = read_clusters(second)
    assert clusters["names_from_run"] == "first"  # members matched on the unescaped ids
    assert {c["name"] for c in clusters["clusters"]} == {f"-group {r['cluster']}" for r in names}
    written = read_csv(second / "names.csv")
    assert all(row["name"].startswith("'-group ") and row["note"] == "'=checked" for row in written)
    assert sorted(read_names_csv(second / "names.csv").values()) == sorted(read_names_csv(run / "names.csv").values())


def test_the_ingest_report_escapes_file_names(tmp_path: Path, topic_folder: Path) -> None:
    (topic_folder / "=HYPERLINK(1).txt").write_bytes(b"")  # an empty file: a line of the ingest report
    out = tmp_path / "site"
    run_ok(str(topic_folder), "--k", "3", "--out", str(out))
    rows = list(csv.reader((out / "runs" / "k3" / "ingest-report.csv").open(encoding="utf-8")))
    assert [row[0] for row in rows if "HYPERLINK" in row[0]] == ["'=HYPERLINK(1).txt"]


# --- 2. names from manifests used in paths ---------------------------------------------------------------


def test_safe_name_keeps_plain_names_and_makes_others_safe() -> None:
    assert safe_name("k5") == "k5" and safe_name("ward-k5_b.2") == "ward-k5_b.2"
    for crafted in ("../../evil", "/etc/passwd", ".hidden", "a/b", "x" * 300, "", "..", "é"):
        made = safe_name(crafted)
        assert re.fullmatch(r"[A-Za-z0-9._-]+", made) and ".." not in made and not made.startswith(".")
        assert len(made) <= 60
    assert safe_name("a/b") != safe_name("a_b")  # two names never share a folder


def hrefs_resolve(page: Path) -> None:
    """Every link and stylesheet of `page` is relative and points at a file that exists."""
    html = page.read_text(encoding="utf-8")
    links = re.findall(r'(?:href|src)="([^"#]+)"', html)
    assert links
    for link in links:
        assert not link.startswith(("/", "http:", "https:", "file:")), link
        assert (page.parent / unquote(link)).resolve().is_file(), link


def test_a_crafted_run_name_never_leaves_the_site(tmp_path: Path, topic_folder: Path) -> None:
    out = tmp_path / "deep" / "site"
    run_ok(str(topic_folder), "--k", "3", "--out", str(out))
    run_ok(str(topic_folder), "--k", "4", "--out", str(out))
    for name, crafted in (("k3", "../../evil"), ("k4", "/tmp/abs/evil")):
        manifest_path = out / "runs" / name / "manifest.json"
        manifest = json.loads(manifest_path.read_text(encoding="utf-8"))
        manifest["run"] = crafted
        manifest_path.write_text(json.dumps(manifest), encoding="utf-8")
    result = invoke("compare", str(out / "runs" / "k3"), str(out / "runs" / "k4"))
    assert result.exit_code == 0, result.output
    page = Path(result.stdout.strip())
    assert page.resolve().parent.parent == (out / "compare").resolve()
    assert not list(tmp_path.rglob("evil")) and not Path("/tmp/abs").exists()
    hrefs_resolve(page)


def test_runs_given_as_absolute_paths_neither_nest_folders_nor_break_links(tmp_path: Path,
                                                                          topic_folder: Path) -> None:
    one, two, elsewhere = tmp_path / "one", tmp_path / "two", tmp_path / "cmp"
    run_ok(str(topic_folder), "--k", "3", "--out", str(one))
    run_ok(str(topic_folder), "--k", "3", "--out", str(two), "--seed", "5")
    result = invoke("compare", str((one / "runs" / "k3").resolve()), str((two / "runs" / "k3").resolve()),
                    "--out", str(elsewhere))
    assert result.exit_code == 0, result.output
    page = Path(result.stdout.strip())
    # one folder under OUT/compare, whatever the recorded names (equal here, so the paths are used)
    assert page.parent.parent == elsewhere / "compare"
    assert [p.name for p in (elsewhere / "compare").iterdir()] == [page.parent.name]
    assert not (one / "runs" / "k3").joinpath("compare").exists()
    hrefs_resolve(page)
    # a comparison inside one site, absolute paths, no --out
    run_ok(str(topic_folder), "--k", "4", "--out", str(one))
    result = invoke("compare", str((one / "runs" / "k3").resolve()), str((one / "runs" / "k4").resolve()))
    assert result.exit_code == 0, result.output
    assert Path(result.stdout.strip()) == (one / "compare" / "k3--k4" / "index.html").resolve()
    hrefs_resolve(Path(result.stdout.strip()))
    hrefs_resolve(one / "index.html")


# --- 3. folders pilewise did not write ---------------------------------------------------------------


def refuse_compute(monkeypatch: pytest.MonkeyPatch) -> None:
    """A refusal must come before the long computation: computing at all fails the test."""
    def no_compute(*args: object, **kwargs: object) -> None:
        raise AssertionError("computation started before the refusal")

    monkeypatch.setattr(pipeline, "compute_run", no_compute)
    monkeypatch.setattr(pipeline, "prepare_collection", no_compute)


def test_an_index_page_pilewise_did_not_write_is_never_overwritten(
    tmp_path: Path, topic_folder: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    out = tmp_path / "mysite"
    out.mkdir()
    (out / "index.html").write_text("my own page", encoding="utf-8")
    refuse_compute(monkeypatch)
    result = invoke("run", str(topic_folder), "--k", "3", "--out", str(out))
    assert_one_line_error(result, f"--out {out} holds files pilewise did not write (index.html); choose a new "
                                  "or empty folder, or move those files away")
    assert (out / "index.html").read_text(encoding="utf-8") == "my own page"
    assert sorted(p.name for p in out.iterdir()) == ["index.html"]


def test_a_run_folder_pilewise_did_not_write_is_never_replaced(
    tmp_path: Path, topic_folder: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    out = tmp_path / "site"
    run_ok(str(topic_folder), "--k", "3", "--out", str(out))
    mine = out / "runs" / "mine"
    mine.mkdir()
    (mine / "thesis.txt").write_text("keep me", encoding="utf-8")
    refuse_compute(monkeypatch)
    for command in ("run", "sweep"):
        folder = out / ("runs" if command == "run" else "sweeps") / "mine"
        folder.mkdir(parents=True, exist_ok=True)
        (folder / "thesis.txt").write_text("keep me", encoding="utf-8")
        result = invoke(command, str(topic_folder), "--k", "3" if command == "run" else "2:4", "--out", str(out),
                        "--name", "mine")
        assert_one_line_error(result, f"{folder} holds files pilewise did not write; pass another --name, "
                                      "or move that folder away")
        assert [p.name for p in folder.iterdir()] == ["thesis.txt"]


def test_a_site_written_before_the_marker_existed_is_still_pilewise_s(tmp_path: Path, topic_folder: Path) -> None:
    # Decision: an unmarked folder holding pilewise's manifest.json ("tool": "pilewise") counts as owned.
    out = tmp_path / "site"
    run_ok(str(topic_folder), "--k", "3", "--out", str(out))
    for marker in out.rglob(MARKER):
        marker.unlink()
    run_ok(str(topic_folder), "--k", "3", "--out", str(out), "--seed", "4")
    assert (out / MARKER).is_file() and (out / "runs" / "k3" / MARKER).is_file()
    seed = read_manifest(out / "runs" / "k3")["seed"]
    assert seed == 4  # replaced by the new run


def test_an_empty_folder_is_a_fine_out(tmp_path: Path, topic_folder: Path) -> None:
    out = tmp_path / "empty"
    out.mkdir()
    run_ok(str(topic_folder), "--k", "3", "--out", str(out))
    assert json.loads((out / MARKER).read_text(encoding="utf-8"))["tool"] == "pilewise"


# --- 4. two writers of one name ----------------------------------------------------------------------


def test_a_second_run_of_the_same_name_is_told_at_once(
    tmp_path: Path, topic_folder: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    out = tmp_path / "site"
    run_ok(str(topic_folder), "--k", "3", "--out", str(out))
    before = (out / "runs" / "k3" / "manifest.json").read_bytes()
    holder = subprocess.Popen(  # another process holds the lock, as a running pilewise does
        [sys.executable, "-c", "import sys; from pathlib import Path; from pilewise.output.outfolder import name_lock\n"
         f"with name_lock(Path({str(out / 'runs' / 'k3')!r}), what='--name'):\n"
         "    print('locked', flush=True); sys.stdin.readline()"],
        stdin=subprocess.PIPE, stdout=subprocess.PIPE, text=True, env={**os.environ, "PYTHONPATH": SRC},
    )
    try:
        assert holder.stdout is not None and holder.stdout.readline().strip() == "locked"
        refuse_compute(monkeypatch)
        result = invoke("run", str(topic_folder), "--k", "3", "--out", str(out))
        assert_one_line_error(result, f"another pilewise is writing {out / 'runs' / 'k3'} right now; wait for it "
                                      "to finish or pass another --name")
    finally:
        holder.communicate("\n", timeout=30)
    assert (out / "runs" / "k3" / "manifest.json").read_bytes() == before


def test_two_runs_of_one_name_at_once_leave_a_whole_run_folder(tmp_path: Path, topic_folder: Path) -> None:
    out = tmp_path / "site"
    command = [sys.executable, "-m", "pilewise", "run", str(topic_folder), "--k", "3", "--out", str(out),
               "--name", "same", "--quiet"]
    env = {**os.environ, "PYTHONPATH": SRC}
    runs = [subprocess.Popen([*command, "--seed", str(seed)], stderr=subprocess.PIPE, stdout=subprocess.PIPE,
                             text=True, env=env) for seed in (1, 2)]
    results = [(p.wait(timeout=300), p.stderr.read() if p.stderr else "") for p in runs]
    assert any(code == 0 for code, _ in results)
    for code, stderr in results:
        assert "Traceback" not in stderr
        if code != 0:
            assert stderr.strip() == (f"pilewise: error: another pilewise is writing {out / 'runs' / 'same'} "
                                      "right now; wait for it to finish or pass another --name")
    folder = out / "runs" / "same"
    assert compare_run_folders(folder, folder).shared == 60  # a whole, readable run
    assert [p.name for p in (out / "runs").iterdir()] == ["same"]  # no staging folder left behind


# --- 5. file-system errors at --out ------------------------------------------------------------------


def test_out_that_is_a_file_is_one_line(tmp_path: Path, topic_folder: Path) -> None:
    out = tmp_path / "site.html"
    out.write_text("x", encoding="utf-8")
    result = invoke("run", str(topic_folder), "--k", "3", "--out", str(out))
    assert_one_line_error(result, f"--out {out} is a file; choose a folder (new or empty) for the site")
    result = invoke("run", str(topic_folder), "--k", "3", "--out", str(out / "inside"))
    # strerror of ENOTDIR as the C library words it (from memory: glibc "Not a directory")
    assert_one_line_error(result, f"cannot write to --out {out / 'inside'}: Not a directory; a part of that "
                                  "path is a file; choose a folder with --out")
    assert out.read_text(encoding="utf-8") == "x"


def test_a_full_disk_while_writing_is_one_line_and_keeps_the_old_run(
    tmp_path: Path, topic_folder: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    out = tmp_path / "site"
    run_ok(str(topic_folder), "--k", "3", "--out", str(out))
    before = sorted(p.relative_to(out) for p in (out / "runs").rglob("*"))

    def full(*args: object, **kwargs: object) -> None:
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    monkeypatch.setattr("pilewise.output.exports._write_json", full)
    result = invoke("run", str(topic_folder), "--k", "3", "--out", str(out), "--seed", "9")
    assert_one_line_error(result, f"cannot write to --out {out}: {os.strerror(errno.ENOSPC)}; free space or "
                                  "choose another --out")
    assert sorted(p.relative_to(out) for p in (out / "runs").rglob("*")) == before


def test_a_read_only_out_is_one_line_before_any_computation(
    tmp_path: Path, topic_folder: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    def read_only(*args: object, **kwargs: object) -> None:
        raise OSError(errno.EROFS, os.strerror(errno.EROFS))

    refuse_compute(monkeypatch)
    monkeypatch.setattr("pilewise.output.outfolder.mark", read_only)
    out = tmp_path / "site"
    result = invoke("run", str(topic_folder), "--k", "3", "--out", str(out))
    assert_one_line_error(result, f"cannot write to --out {out}: {os.strerror(errno.EROFS)}; choose a folder you "
                                  "can write to with --out")
    result = invoke("sweep", str(topic_folder), "--k", "2:4", "--out", str(out))
    assert_one_line_error(result, f"cannot write to --out {out}: {os.strerror(errno.EROFS)}; choose a folder you "
                                  "can write to with --out")


# --- 6. earlier runs that cannot be read ---------------------------------------------------------------


def damage(run: Path, how: str) -> str:
    """Damage one export of `run` as a spreadsheet or an interrupted copy would; returns the file's name."""
    if how == "names in cp1252":
        rows = list(csv.reader((run / "names.csv").open(encoding="utf-8")))
        rows[1][2] = "Café garden"
        with (run / "names.csv").open("w", encoding="cp1252", newline="") as handle:
            csv.writer(handle).writerows(rows)
        return "names.csv"
    if how == "assignments truncated":
        data = (run / "assignments.csv").read_bytes()
        (run / "assignments.csv").write_bytes(data[: len(data) // 2])
        return "assignments.csv"
    if how == "assignments in cp1252":
        text = (run / "assignments.csv").read_text(encoding="utf-8").replace("A note", "Á note")
        (run / "assignments.csv").write_bytes(text.encode("cp1252"))
        return "assignments.csv"
    if how == "assignments without columns":
        lines = (run / "assignments.csv").read_text(encoding="utf-8").splitlines()
        (run / "assignments.csv").write_text("\n".join(["title", *lines[1:]]) + "\n", encoding="utf-8")
        return "assignments.csv"
    (run / "manifest.json").write_text('{"tool": "pilewise", "run": ', encoding="utf-8")
    return "manifest.json"


def name_every_cluster(run: Path) -> None:
    rows = read_csv(run / "names.csv")
    for row in rows:
        row["name"] = f"group {row['cluster']}"
    with (run / "names.csv").open("w", encoding="utf-8", newline="") as handle:
        writer = csv.DictWriter(handle, fieldnames=list(rows[0]))
        writer.writeheader()
        writer.writerows(rows)


@pytest.mark.parametrize("how", ["names in cp1252", "assignments truncated", "assignments in cp1252",
                                 "assignments without columns", "manifest invalid"])
def test_a_damaged_earlier_run_is_reported_and_skipped(tmp_path: Path, topic_folder: Path, how: str) -> None:
    out = tmp_path / "site"
    run_ok(str(topic_folder), "--k", "3", "--out", str(out))
    name_every_cluster(out / "runs" / "k3")
    damaged = damage(out / "runs" / "k3", how)
    stderr = run_ok(str(topic_folder), "--k", "4", "--out", str(out))
    warnings = [line for line in stderr.splitlines() if line.startswith("pilewise: warning:")]
    assert any(f"runs/k3/{damaged}" in line or f"{out / 'runs' / 'k3' / damaged}" in line for line in warnings), \
        stderr
    clusters = read_clusters(out / "runs" / "k4")
    assert clusters["names_from_run"] == ""  # nothing carried from the damaged run
    assert find_old_names(out / "runs", source=str(topic_folder), fingerprint="") is None
    root = (out / "index.html").read_text(encoding="utf-8")
    assert 'href="runs/k4/index.html"' in root
    if damaged != "names.csv":  # the listing and the comparisons read the other files
        assert "Left out" in root and damaged in root
        result = invoke("compare", str(out / "runs" / "k3"), str(out / "runs" / "k4"))
        assert result.exit_code == 1 and "Traceback" not in result.output + result.stderr
        lines = [line for line in result.stderr.splitlines() if line]
        assert len(lines) == 1 and lines[0].startswith("pilewise: error:") and damaged in lines[0]


def test_a_manifest_that_is_not_an_object_never_breaks_a_run(tmp_path: Path, topic_folder: Path) -> None:
    out = tmp_path / "site"
    run_ok(str(topic_folder), "--k", "3", "--out", str(out))
    (out / "runs" / "k3" / "manifest.json").write_text('["a list"]', encoding="utf-8")
    (out / "runs" / "k3" / "clusters.json").write_text('{"clusters": 5, "k": "x"}', encoding="utf-8")
    run_ok(str(topic_folder), "--k", "4", "--out", str(out))
    assert "Left out" in (out / "index.html").read_text(encoding="utf-8")


# --- 7. personal data on pages -------------------------------------------------------------------------


def page_text(run: Path) -> str:
    return "\n".join(p.read_text(encoding="utf-8") for p in sorted(run.rglob("*.html")))


def test_e_mail_addresses_in_ids_are_redacted_on_pages_and_kept_in_assignments(tmp_path: Path) -> None:
    ids = [f"person{i}@example.com" for i in range(30)]
    table = tmp_path / "messages.csv"
    write_table(table, ids, [f"Message from +44 20 7946 {i:04d}" for i in range(30)], ["" for _ in range(30)])
    out = tmp_path / "site"
    run_ok(str(table), "--k", "3", "--out", str(out), "--id-column", "id", "--title-column", "title",
           "--text-column", "text")
    pages = page_text(out / "runs" / "k3") + (out / "index.html").read_text(encoding="utf-8")
    assert "@example.com" not in pages and "7946" not in pages
    assert "[e-mail]" in pages
    rows = read_assignments(out / "runs" / "k3")
    assert sorted(row["doc_id"] for row in rows) == sorted(ids)  # exports keep the user's ids
    # and the comparison page shows the moved documents' ids redacted as well
    run_ok(str(table), "--k", "4", "--out", str(out), "--id-column", "id", "--title-column", "title",
           "--text-column", "text")
    compare_pages = "\n".join(p.read_text(encoding="utf-8") for p in (out / "compare").rglob("*.html"))
    assert compare_pages and "@example.com" not in compare_pages


def test_e_mail_addresses_in_file_names_are_redacted_on_pages(tmp_path: Path, topic_folder: Path) -> None:
    (topic_folder / "garden-00.txt").rename(topic_folder / "jane.doe@example.org.txt")
    (topic_folder / "from jane.roe@example.net.txt").write_bytes(b"")  # skipped: named on the ingest page
    out = tmp_path / "site"
    run_ok(str(topic_folder), "--k", "3", "--out", str(out))
    pages = page_text(out / "runs" / "k3")
    assert "jane.doe@example.org" not in pages and "jane.roe@example.net" not in pages
    assignments = (out / "runs" / "k3" / "assignments.csv").read_text(encoding="utf-8")
    assert "jane.doe@example.org.txt" in assignments


def test_a_lock_refuses_a_second_holder_and_is_free_once_released(tmp_path: Path) -> None:
    """The lock is released by the system with its holder: a lock held and let go is free again."""
    folder = tmp_path / "site" / "runs" / "k3"
    (tmp_path / "site").mkdir()
    with name_lock(folder, what="--name"):
        second = name_lock(folder, what="--name")
        with pytest.raises(PilewiseError, match="another pilewise is writing"):
            second.__enter__()
    with name_lock(folder, what="--name"):
        pass


def test_run_collection_claims_out_before_computing(tmp_path: Path, topic_folder: Path,
                                                    monkeypatch: pytest.MonkeyPatch) -> None:
    out = tmp_path / "x"
    out.mkdir()
    (out / "runs").write_text("not a folder", encoding="utf-8")
    refuse_compute(monkeypatch)
    with pytest.raises(PilewiseError, match=r"holds files pilewise did not write \(runs\)"):
        pipeline.run_collection(RunOptions(source=topic_folder, k=3, out=out, quiet=True))
