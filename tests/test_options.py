"""Every validation branch of options.py, with the exact one-line message a user sees.

The limits in the expected messages are the table of options.LIMITS as written in docs/usage.md (defaults
and ranges); the message wording is the user-facing contract (DEVELOPERS.md: a user mistake is one line
that says what is wrong and names the option to change), so it is matched exactly.
"""

from __future__ import annotations

import dataclasses
import re
from pathlib import Path
from typing import Any

import pytest

from pilewise.errors import PilewiseError
from pilewise.options import RunOptions, check_k, check_k_range, kmeans_starts, table_delimiter, validate


@pytest.fixture
def options(tmp_path: Path) -> RunOptions:
    """Valid options: an existing source folder and an output folder beside it."""
    source = tmp_path / "texts"
    source.mkdir()
    return RunOptions(source=source, k=3, out=tmp_path / "site")


def problem(options: RunOptions, **changes: Any) -> str:
    """The message validate() raises for `options` with `changes`."""
    with pytest.raises(PilewiseError) as caught:
        validate(dataclasses.replace(options, **changes))
    return str(caught.value)


def test_valid_options_pass(options: RunOptions) -> None:
    validate(options)  # no exception: the defaults and a real source are valid
    validate(dataclasses.replace(options, k=0, k_auto=True))  # k is not checked when --k auto chooses it


@pytest.mark.parametrize(
    ("attr", "value", "expected"),
    [
        ("k", 1001, "--k=1001 is out of range; use a value from 2 to 1000"),
        ("lsa_components", -1, "--lsa-components=-1 is out of range; use a value from 0 to 1000"),
        # a limit that is not a whole number is written as given (0.001), whole ones in full
        ("max_file_mb", 0.0005, "--max-file-mb=0.0005 is out of range; use a value from 0.001 to 10000"),
        ("max_doc_chars", 99, "--max-doc-chars=99 is out of range; use a value from 100 to 100000000"),
        ("max_documents", 1, "--max-documents=1 is out of range; use a value from 2 to 100000000"),
        ("top_terms", 0, "--top-terms=0 is out of range; use a value from 1 to 100"),
        ("top_terms", 101, "--top-terms=101 is out of range; use a value from 1 to 100"),
        ("resamples", 0, "--resamples=0 is out of range; use a value from 1 to 1000"),
        ("workers", 257, "--workers=257 is out of range; use a value from 0 to 256"),
        ("max_df", 0.0, "--max-df=0.0 is out of range; use a share above 0 and at most 1"),
        ("near_duplicate", 0.4, "--near-duplicate=0.4 is out of range; use a Jaccard similarity from 0.5 to 1 "
                                "(1 turns grouping off)"),
        ("near_duplicate", 1.5, "--near-duplicate=1.5 is out of range; use a Jaccard similarity from 0.5 to 1 "
                                "(1 turns grouping off)"),
        ("min_df", 0, "--min-df=0 is out of range; use a document count of at least 1"),
        ("delimiter", ";;", "--delimiter ';;' is not one character; pass e.g. --delimiter ';' or --delimiter tab"),
        ("encoding", "utf-99", "--encoding 'utf-99' is not a known encoding; pass e.g. utf-8, cp1252, latin-1, "
                               "shift_jis"),
        ("method", "spectral", "--method 'spectral' is not known; use one of: kmeans, ward"),
        ("mode", "fast", "--mode 'fast' is not known; use one of: auto, memory, stream"),
        ("name", "a/b", "--name 'a/b' is not a safe folder name; use letters, digits, '-', '_' or '.'"),
        ("name", ".hidden", "--name '.hidden' is not a safe folder name; use letters, digits, '-', '_' or '.'"),
    ],
)
def test_each_out_of_range_option_is_named_with_its_fix(
    options: RunOptions, attr: str, value: object, expected: str
) -> None:
    assert problem(options, **{attr: value}) == expected


@pytest.mark.parametrize(("k_min", "k_max"), [(1, 5), (5, 5), (6, 5), (2, 1001)])
def test_a_k_range_outside_2_to_1000_or_empty_is_refused(options: RunOptions, k_min: int, k_max: int) -> None:
    assert problem(options, k_min=k_min, k_max=k_max) == f"k range {k_min}:{k_max} must have 2 <= LOW < HIGH <= 1000"


def test_well_formed_delimiter_and_encoding_pass(options: RunOptions) -> None:
    # Python codecs docs: cp1252 and shift_jis are standard encodings; 'tab' is a documented --delimiter name
    validate(dataclasses.replace(options, delimiter="tab", encoding="shift_jis", min_df=1, near_duplicate=1.0))


def test_every_problem_is_reported_in_one_message(options: RunOptions) -> None:
    message = problem(options, top_terms=0, method="spectral", mode="fast")
    assert message == ("--top-terms=0 is out of range; use a value from 1 to 100; "
                       "--method 'spectral' is not known; use one of: kmeans, ward; "
                       "--mode 'fast' is not known; use one of: auto, memory, stream")
    assert "\n" not in message


def test_a_missing_stop_words_file_is_named(options: RunOptions, tmp_path: Path) -> None:
    missing = tmp_path / "stop.txt"
    assert problem(options, stop_words_file=missing) == f"--stop-words {str(missing)!r} is not a file; pass a text file"


def test_out_equal_to_the_source_folder_is_refused(options: RunOptions) -> None:
    assert problem(options, out=options.source) == (
        f"--out {str(options.source)!r} lies inside the source folder, so the next run would read its own "
        "pages; choose an output folder outside the source"
    )


def test_out_inside_a_source_file_folder_is_allowed(options: RunOptions, tmp_path: Path) -> None:
    # a table file as SOURCE: only its own file is read, so --out beside it is no loop
    table = options.source / "notes.csv"
    table.write_text("text\nsoil\n", encoding="utf-8")
    validate(dataclasses.replace(options, source=table, out=options.source / "site"))


def test_without_source_checks_a_missing_source_passes(options: RunOptions, tmp_path: Path) -> None:
    # `pilewise demo` checks its options before it writes the collection that becomes SOURCE
    later = dataclasses.replace(options, source=tmp_path / "demo", out=tmp_path / "demo" / "site")
    validate(later, with_source=False)
    assert problem(later).startswith(f"source {str(tmp_path / 'demo')!r} does not exist")


@pytest.mark.parametrize(
    ("given", "separator"),
    [("tab", "\t"), ("TAB", "\t"), ("\\t", "\t"), ("comma", ","), ("semicolon", ";"), ("pipe", "|"),
     ("space", " "), (";", ";"), ("\t", "\t")],
)
def test_delimiter_names_and_single_characters(given: str, separator: str) -> None:
    assert table_delimiter(given) == separator


@pytest.mark.parametrize("given", ["", ";;", "\n", "\r", '"'])
def test_delimiters_csv_cannot_use_are_refused(given: str) -> None:
    # Python csv module docs / RFC 4180 §2: line breaks end records and '"' quotes, so neither can separate
    assert table_delimiter(given) is None


def test_run_names_follow_method_and_k(options: RunOptions) -> None:
    assert options.run_name() == "k3" and options.run_name(5) == "k5"
    assert dataclasses.replace(options, method="ward").run_name(4) == "ward-k4"
    assert dataclasses.replace(options, name="mine").run_name(4) == "mine"


def test_kmeans_starts_given_or_by_size(options: RunOptions) -> None:
    # docs/usage.md (--n-init): 10 starts below 1,000 distinct texts, 4 from 1,000 on, unless given
    assert kmeans_starts(options, 999) == 10 and kmeans_starts(options, 1_000) == 4
    assert kmeans_starts(dataclasses.replace(options, n_init=7), 999) == 7


def test_k_range_is_clipped_to_the_collection() -> None:
    assert check_k_range(2, 20, 8) == (2, 7)  # HIGH at most distinct documents - 1
    assert check_k_range(2, 5, 100) == (2, 5)
    with pytest.raises(PilewiseError, match=re.escape("k=9 must be at least 2 and less than the 8 distinct")):
        check_k_range(9, 20, 8)


def test_check_k_messages() -> None:
    with pytest.raises(PilewiseError) as caught:
        check_k(2, 2)
    assert str(caught.value) == ("found 2 distinct document(s); clustering needs at least 3, so add documents "
                                 "or point SOURCE at a larger collection")
    with pytest.raises(PilewiseError) as caught:
        check_k(5, 5, "texts left after grouping near-duplicates (--near-duplicate 1 turns grouping off)")
    assert str(caught.value) == ("k=5 must be at least 2 and less than the 5 texts left after grouping "
                                 "near-duplicates (--near-duplicate 1 turns grouping off); pass --k between 2 and 4")
    check_k(2, 3)  # the smallest collection: 3 distinct texts, k = 2
