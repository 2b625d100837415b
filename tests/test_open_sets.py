"""Tests of the open labeled corpora loaders in ``open_sets``.

Tests marked ``corpus`` need the files that ``bash corpora/fetch.sh`` (``--all`` for the larger
collections) puts into the cache; without them they skip with that instruction.
"""

import dataclasses
import re
import subprocess
import sys
import textwrap
from collections import Counter
from collections.abc import Callable
from pathlib import Path

import pytest

from open_sets import (
    AVAILABLE,
    CorpusNotFetchedError,
    LabeledCollection,
    cache_dir,
    load_mini_newsgroups,
    load_reuters_sample,
)


def _load(loader: Callable[[], LabeledCollection]) -> LabeledCollection:
    try:
        return loader()
    except CorpusNotFetchedError as exc:
        pytest.skip(str(exc))


@pytest.fixture(scope="module")
def newsgroups() -> LabeledCollection:
    return _load(load_mini_newsgroups)


@pytest.fixture(scope="module")
def reuters() -> LabeledCollection:
    return _load(load_reuters_sample)


def _assert_well_formed(collection: LabeledCollection) -> None:
    assert len(collection.texts) == len(collection.labels) == len(collection.titles) > 0
    assert all(isinstance(text, str) and text.strip() for text in collection.texts)
    assert all(isinstance(label, str) and label for label in collection.labels)
    assert collection.source and collection.licence


@pytest.mark.corpus
def test_mini_newsgroups_counts(newsgroups: LabeledCollection) -> None:
    assert newsgroups.name == "mini_newsgroups"
    assert len(newsgroups.texts) == 200
    assert Counter(newsgroups.labels) == {"alt.atheism": 100, "sci.space": 100}
    _assert_well_formed(newsgroups)


@pytest.mark.corpus
def test_mini_newsgroups_headers_do_not_leak(newsgroups: LabeledCollection) -> None:
    leaking = [i for i, text in enumerate(newsgroups.texts) if re.search(r"^Newsgroups:", text, re.MULTILINE)]
    assert leaking == []
    # The headers went away as a block: no text starts with a header line.
    assert not any(re.match(r"(Path|From|Subject|Message-ID|Newsgroups):", text) for text in newsgroups.texts)


@pytest.mark.corpus
def test_mini_newsgroups_titles_are_subjects(newsgroups: LabeledCollection) -> None:
    assert all(title.strip() for title in newsgroups.titles)
    assert not any(title.lower().startswith("subject:") for title in newsgroups.titles)


@pytest.mark.corpus
def test_reuters_counts(reuters: LabeledCollection) -> None:
    assert reuters.name == "reuters_sample"
    assert len(reuters.texts) == 70
    assert Counter(reuters.labels) == {"acq": 50, "crude": 20}
    _assert_well_formed(reuters)


@pytest.mark.corpus
def test_reuters_titles_and_bodies(reuters: LabeledCollection) -> None:
    assert all(title.strip() for title in reuters.titles)
    assert not any("<BODY>" in text or "<TITLE>" in text for text in reuters.texts)
    assert not any(re.search(r"\breuter\W*$", text, re.IGNORECASE) for text in reuters.texts)


# Counts of the --all collections as fetched from the pinned package versions (wordnet: default sample).
_EXPECTED_ALL = {
    "chat_categories": (752, 21),
    "sentence_sources": (23703, 4),
    "wordnet_glosses": (20000, 26),
    "fortunes": (15217, 43),
}


@pytest.mark.corpus
@pytest.mark.parametrize("name", sorted(AVAILABLE))
def test_every_available_collection_is_well_formed(name: str) -> None:
    if name == "chat_categories":
        pytest.importorskip("yaml")
    collection = _load(AVAILABLE[name])
    assert collection.name == name
    _assert_well_formed(collection)
    if name in _EXPECTED_ALL:
        assert (len(collection.texts), len(set(collection.labels))) == _EXPECTED_ALL[name]


@pytest.mark.corpus
def test_loading_imports_no_heavy_library() -> None:
    script = textwrap.dedent(
        """
        import sys
        sys.path.insert(0, TESTS)  # open_sets lives beside the tests, outside the package
        import pilewise
        before = set(sys.modules)
        import open_sets
        try:
            open_sets.load_mini_newsgroups()
        except open_sets.CorpusNotFetchedError:
            sys.exit(3)
        new = {m.split(".")[0] for m in set(sys.modules) - before}
        print(sorted(new & {"sklearn", "gensim", "nltk"}))
        """
    ).replace("TESTS", repr(str(Path(__file__).resolve().parent)))
    done = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, check=False)
    if done.returncode == 3:
        pytest.skip("open corpora not fetched; run bash corpora/fetch.sh")
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip() == "[]"


def test_missing_cache_names_the_fetch_command(monkeypatch: pytest.MonkeyPatch, tmp_path: Path) -> None:
    monkeypatch.setenv("PILEWISE_CORPORA", str(tmp_path / "absent"))
    with pytest.raises(FileNotFoundError, match="run bash corpora/fetch.sh"):
        cache_dir()
    with pytest.raises(CorpusNotFetchedError, match="open corpora not fetched"):
        load_reuters_sample()


def test_missing_files_in_existing_cache_name_the_fetch_command(
    monkeypatch: pytest.MonkeyPatch, tmp_path: Path
) -> None:
    monkeypatch.setenv("PILEWISE_CORPORA", str(tmp_path))
    assert cache_dir() == tmp_path
    for loader in AVAILABLE.values():
        with pytest.raises(CorpusNotFetchedError, match="run bash corpora/fetch.sh"):
            loader()


def test_collection_is_frozen_and_checks_alignment() -> None:
    collection = LabeledCollection("x", ("a b",), ("l",), ("t",), "here", "none")
    with pytest.raises(dataclasses.FrozenInstanceError):
        collection.__setattr__("name", "y")
    with pytest.raises(ValueError, match="texts"):
        LabeledCollection("x", ("a", "b"), ("l",), ("t",), "here", "none")
