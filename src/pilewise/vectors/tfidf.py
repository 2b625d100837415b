"""Vectorizing stage: term counts (words and two-word phrases), sublinear TF-IDF, LSA.

Both preparation modes take one path through this module: texts are tokenized chunk by chunk by one core
(`chunk_words`); the counts of a chunk go to a vocabulary, which is exact and held in memory here
(`exact_counts`, with two-word phrases) or hashed in `streaming.py` (`hashed_counts`); the kept columns
(`within_limits`, in `alphabetical` order) become one `TermCounts`; and one step, `weigh_and_reduce`,
weights them (sublinear TF-IDF with the idf of every document) and reduces them (LSA fitted on all rows or
on a seeded sample, rows projected block by block). The defaults come from measurements on open labeled
corpora (docs/vectorizing.md).
"""

from __future__ import annotations

import itertools
import math
import multiprocessing
from array import array
from collections import defaultdict
from collections.abc import Callable, Iterable, Iterator, Sequence
from concurrent.futures import ProcessPoolExecutor
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from sklearn.decomposition import TruncatedSVD
from sklearn.feature_extraction.text import TfidfTransformer
from sklearn.preprocessing import normalize

from pilewise.cores import one_thread_each
from pilewise.errors import PilewiseError
from pilewise.vectors.text import Analyzer, joined_to_previous


@dataclass(frozen=True)
class VectorSettings:
    """Vectorizing options; None for min_df means the size-dependent default."""

    min_df: int | None = None
    max_df: float = 0.5
    bigrams_in_space: bool = False
    lsa_components: int = 100
    seed: int = 0


@dataclass(frozen=True)
class Vectorized:
    """The vectors of the distinct texts.

    Attributes
    ----------
    counts : scipy.sparse.csr_matrix, shape (n_texts, n_terms)
        Occurrence counts of every kept term (words and two-word phrases).
    terms : tuple of str
        Normalized term of each column (stems when stemming); phrases hold one space.
    space : ndarray of shape (n_texts, n_dims) or csr_matrix
        The L2-normalized clustering space (LSA of the TF-IDF, or the TF-IDF itself).
    facts : dict
        What was used and measured: min_df, vocabulary sizes, LSA explained variance.
    space_columns, idf, lsa :
        What places new texts in the same space (`pilewise assign`): the columns of `counts` in the space,
        their idf, and the LSA directions (TruncatedSVD.components_, shape (n_dims, n_space_columns); None
        without LSA).
    """

    counts: sp.csr_matrix
    terms: tuple[str, ...]
    is_phrase: np.ndarray
    space: np.ndarray | sp.csr_matrix
    facts: dict[str, float | int | str | bool]
    space_columns: np.ndarray | None = None
    idf: np.ndarray | None = None
    lsa: np.ndarray | None = None


LONG_TEXT_WORDS = 20
"""Median content words (stop words left out) from which a collection's texts count as long: more than two
sentences' worth (an English sentence runs 15-20 words, about half of them stop words; common practice)."""


def default_min_df(n_texts: int, median_words: float | None = None) -> int:
    """The default min_df for `n_texts` texts whose median text has `median_words` content words.

    1 below 30 texts, else 2, growing by one per 20,000 texts (50 at a million); at least 3 when the texts
    are long (median of at least LONG_TEXT_WORDS content words). Why length: a long text holds many words
    that only one other text shares (names, numbers, one story's details), which tie pairs of texts
    together by chance, and it keeps plenty of shared words without them; a short text holds few words,
    and a rare one is often all that places it (measured in docs/vectorizing.md, "min_df and text length").
    Without `median_words` (streaming and Spark runs) only the size counts.
    """
    if n_texts < 30:
        return 1
    by_size = max(2, math.ceil(n_texts / 20_000))
    return max(by_size, 3) if median_words is not None and median_words >= LONG_TEXT_WORDS else by_size


def median_content_words(words: sp.csr_matrix) -> float:
    """Median content words per text of a word count matrix (texts x words)."""
    return float(np.median(np.asarray(words.sum(axis=1)).ravel())) if words.shape[0] else 0.0


def term_limits(settings: VectorSettings, n_documents: float, median_words: float | None = None
                ) -> tuple[int, float]:
    """(min_df, max_df) for `n_documents` documents: the size- and length-dependent min_df unless given; max_df
    1.0 when the given share would keep no term that passes min_df. Both preparation paths use it."""
    min_df = settings.min_df if settings.min_df is not None else default_min_df(int(n_documents), median_words)
    max_df = settings.max_df if n_documents * settings.max_df >= min_df else 1.0
    return min_df, max_df


def no_terms_left(min_df: int, max_df: float) -> PilewiseError:
    """The user error when min_df and max_df leave no term to cluster on."""
    return PilewiseError(
        f"no terms are left after removing stop words and terms in fewer than {min_df} documents "
        f"or more than {max_df:g} of them; lower --min-df or raise --max-df"
    )


def lsa_size(settings: VectorSettings, n_rows: int, n_terms: int) -> int:
    """LSA dimensions: the setting, at most a tenth of the data's smaller side (at least 10) and below both
    sides; small collections cluster better in fewer dimensions (measured in docs/vectorizing.md), and
    collections of 1,000+ texts and terms keep the full setting. Below 2, no LSA is done."""
    return min(settings.lsa_components, max(10, min(n_rows, n_terms) // 10), n_terms - 1, n_rows - 1)


def tfidf_weights(counts: sp.spmatrix, *, sublinear: bool = True) -> sp.csr_matrix:
    """L2-normalized TF-IDF rows: tf = 1 + ln(count) when sublinear, idf = ln((1 + n) / (1 + df)) + 1."""
    return sp.csr_matrix(TfidfTransformer(sublinear_tf=sublinear).fit_transform(counts))


def smooth_idf(df: np.ndarray, n_documents: float) -> np.ndarray:
    """idf = ln((1 + n) / (1 + df)) + 1, scikit-learn's smoothed idf; `df` and `n` count every document."""
    return np.log((1.0 + n_documents) / (1.0 + np.asarray(df, dtype=float))) + 1.0


def document_frequency(counts: sp.csr_matrix, copies: np.ndarray | None = None) -> np.ndarray:
    """Documents holding each term: each row (a distinct text) counts as often as it has copies.

    Rows are distinct texts (or near-duplicate groups); `copies` (n_rows,) says how many documents
    each stands for. Without it every row counts once.
    """
    if copies is None:
        return np.bincount(counts.indices, minlength=counts.shape[1])
    row_weights = np.repeat(np.asarray(copies, dtype=np.float64), np.diff(counts.indptr))
    return np.bincount(counts.indices, weights=row_weights, minlength=counts.shape[1])


WEIGH_ENTRIES = 1 << 20  # stored entries whose idf is gathered at once in `tfidf_rows` (8 MB of float64)


def tfidf_rows(counts: sp.csr_matrix, idf: np.ndarray) -> sp.csr_matrix:
    """L2-normalized sublinear TF-IDF rows, as `tfidf_weights`, with a given
    idf = ln((1 + n) / (1 + df)) + 1 (for blocks of rows of a larger collection).

    The weights are computed in place in the one float64 copy of `counts`, the idf gathered WEIGH_ENTRIES
    entries at a time, and the rows normalized in place: the same operations in the same order as
    `(1 + log(tf)) * idf[column]` and sklearn's `normalize`, so the same values, without four temporaries
    of the copy's size (at 50,000 texts, 5.4 M entries: 43 MB each; it was the describing stage's peak).
    """
    weighted = sp.csr_matrix(counts, dtype=np.float64, copy=True)
    data, indices = weighted.data, weighted.indices
    np.log(data, out=data)
    data += 1.0
    for begin in range(0, data.size, WEIGH_ENTRIES):
        data[begin : begin + WEIGH_ENTRIES] *= idf[indices[begin : begin + WEIGH_ENTRIES]]
    return sp.csr_matrix(normalize(weighted, copy=False))


def with_phrases(terms: list[str]) -> list[str]:
    """Terms followed by the two-word phrases of consecutive terms (for a text without stop words or
    punctuation; `Analyzer.phrases` gives a text's phrases as they are counted)."""
    return terms + [f"{a} {b}" for a, b in zip(terms, terms[1:], strict=False)]


LSA_FIT_ROWS = 20_000  # rows of the seeded sample LSA is fitted on in both modes (more rows: fitted on all)
# Rows projected at once when LSA is fitted on a sample: at 50,000 texts, 10,000 rows at a time lowers the
# step's peak memory from 236 to 150 MB (tracemalloc) with the same space (rows are projected one by one).
PROJECT_ROWS = 10_000
# The sampled LSA fit runs in single precision: randomized SVD's time is in the sparse-dense products, which
# float32 halves (2.62 s against 1.37 s of CPU on 20,000 rows of the 50,000-document benchmark), and the
# captured variance agrees to five digits (0.275191 against 0.275190 there; docs/performance.md, "Eighth pass").
# The rows are projected on the float32 components in double precision, as `pilewise assign` projects them. A fit
# on every row (up to LSA_FIT_ROWS texts, the demo among them) stays in double precision.
LSA_FIT_DTYPE = np.float32
MAX_PHRASES = 50_000  # two-word phrases kept at most, the most widespread first


PAIR_BLOCK_TEXTS = 20_000  # texts whose adjacent pairs are sorted at once (bounds the temporaries)


def count_terms(
    texts: Iterable[str], analyzer: Analyzer, min_df: float = 1, copies: np.ndarray | None = None, workers: int = 1,
    on_words: Callable[[sp.csr_matrix, list[str]], None] | None = None,
) -> tuple[sp.csr_matrix, list[str], sp.csr_matrix, np.ndarray]:
    """Word counts and adjacent-word-pair counts of every text, with integer ids instead of strings.

    Returns the word count matrix (texts x words), the words, the pair count matrix (texts x pairs) and
    the pairs as (first word id, second word id) rows. Words get ids in order of first occurrence, as
    `Analyzer.terms` would give them one by one; each distinct lower-cased word is normalized once
    (word -> column, or none for a stop word), so a token costs one dictionary lookup. Pairs are counted
    as 64-bit codes in numpy, which keeps a large collection's millions of distinct pairs out of Python
    dictionaries. Pairs with a word in fewer than `min_df` documents are left out: a pair is never in more
    documents than either of its words. Documents are counted with `copies` (documents per text; default
    one), as `document_frequency`. `workers` > 1 tokenizes a large sequence of texts in that many forked
    processes (the result is the same). `on_words(words, terms)` is called once the word matrix is made,
    before the pairs are counted (`exact_counts` starts the LSA fit there).
    """
    word_ids, bounds, terms, joined = _term_ids(texts, analyzer, workers)
    n_texts, n_words = bounds.size - 1, max(len(terms), 1)
    words = sp.csr_matrix((np.ones(word_ids.size, dtype=np.int32), word_ids.copy(), bounds.copy()),
                          shape=(n_texts, n_words))
    words.sum_duplicates()
    if on_words is not None:
        on_words(words, terms)
    weight = np.ones(n_texts) if copies is None else np.asarray(copies, dtype=np.float64)
    frequent = document_frequency(words, weight) >= min_df
    # distinct (pair, text) entries with their counts, block by block of texts, sorted by pair code; each
    # block's distinct pairs with their documents, so that no search runs over every entry
    blocks: list[tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]] = []
    block_codes, block_df = [], []
    per_block = max(1, min(PAIR_BLOCK_TEXTS, (2**62) // (n_words * n_words)))  # keys fit in int64
    for begin in range(0, n_texts, per_block):
        stop = min(begin + per_block, n_texts)
        ids = word_ids[bounds[begin] : bounds[stop]]
        text = np.repeat(np.arange(stop - begin, dtype=np.int64), np.diff(bounds[begin : stop + 1]))
        inside = (text[1:] == text[:-1]) & frequent[ids[:-1]] & frequent[ids[1:]] \
            & joined[bounds[begin] + 1 : bounds[stop]]  # the words stood side by side (text.joined_to_previous)
        keyed = (ids[:-1][inside].astype(np.int64) * n_words + ids[1:][inside]) * (stop - begin) + text[1:][inside]
        del text, inside
        distinct, counts = _sorted_unique(keyed)
        del keyed
        code, text = np.divmod(distinct, stop - begin)
        del distinct
        new_code = np.empty(code.size, dtype=bool)
        new_code[:1] = True
        np.not_equal(code[1:], code[:-1], out=new_code[1:])
        starts = np.flatnonzero(new_code)
        block_codes.append(code[starts])
        del code
        local = (np.cumsum(new_code, dtype=np.int64) - 1).astype(np.int32)  # entry -> its pair among the block's
        del new_code
        block_df.append(np.add.reduceat(weight[text + begin], starts) if starts.size else np.zeros(0))
        blocks.append((text.astype(np.int32), local, counts.astype(np.int32), np.array([begin, stop])))
        del text, counts, starts
    del word_ids, joined
    # every pair's documents over all blocks (the blocks' pair lists are sorted: the search is cache-friendly)
    # (sorted in place, ids as int32, documents added block by block: the peak memory of a large collection is
    # here, and each block's sum adds in the same order as one bincount over all blocks would)
    pair_codes = _sorted_distinct(np.concatenate(block_codes) if block_codes else np.zeros(0, dtype=np.int64))
    block_ids = []
    pair_df = np.zeros(pair_codes.size)
    while block_codes:
        ids = np.searchsorted(pair_codes, block_codes.pop(0)).astype(np.int32)
        pair_df += np.bincount(ids, weights=block_df.pop(0), minlength=pair_codes.size)
        block_ids.append(ids)
    wanted = pair_df >= min_df
    renumber = (np.cumsum(wanted) - 1).astype(np.int32)
    pair_codes = pair_codes[wanted]
    # each block's kept entries are sorted by pair, then text: a CSC matrix as it stands, turned into rows
    parts = []
    while blocks:
        (text, local, counts, (begin, stop)), ids = blocks.pop(0), block_ids.pop(0)
        column = renumber[ids[local]]
        keep = wanted[ids[local]]
        column, text, counts = column[keep], text[keep], counts[keep]
        indptr = np.concatenate([[0], np.cumsum(np.bincount(column, minlength=pair_codes.size))])
        parts.append(sp.csc_matrix((counts, text, indptr), shape=(stop - begin, pair_codes.size)).tocsr())
        del text, local, counts, column, keep
    pairs = sp.csr_matrix(sp.vstack(parts, format="csr")) if parts else sp.csr_matrix((n_texts, pair_codes.size),
                                                                                      dtype=np.int32)
    pairs.sort_indices()
    return words, terms, pairs, np.column_stack([pair_codes // n_words, pair_codes % n_words])


def _sorted_unique(values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Distinct values in order (and how often each occurs), sorting `values` in place.

    `np.unique` without return options hashes on numpy 2.3+, measured several times slower than a sort on
    millions of 64-bit codes with many distinct values.
    """
    values.sort()
    first = np.empty(values.size + 1, dtype=bool)
    first[0] = first[-1] = True
    np.not_equal(values[1:], values[:-1], out=first[1:-1])
    starts = np.flatnonzero(first)
    distinct = values[starts[:-1]]
    return distinct, np.diff(starts)


def _sorted_distinct(values: np.ndarray) -> np.ndarray:
    """Distinct values in order, sorting `values` in place: `_sorted_unique` without the counts, whose
    temporaries (two int64 arrays of the distinct values' size) fell at the peak memory of `count_terms`."""
    values.sort()
    first = np.empty(values.size, dtype=bool)
    first[:1] = True
    np.not_equal(values[1:], values[:-1], out=first[1:])
    return values[first]


def _term_ids(
    texts: Iterable[str], analyzer: Analyzer, workers: int = 1
) -> tuple[np.ndarray, np.ndarray, list[str], np.ndarray]:
    """Every text's term ids in order (int32), the texts' bounds in them (int64), the terms by id, and
    whether each term id makes a phrase with the one before it (`text.joined_to_previous`).

    Texts are read in chunks, each giving its words numbered locally by first occurrence (in worker
    processes when `workers` > 1 and `texts` is a large sequence); chunks are taken in order, so the
    words' global numbers follow first occurrence over all texts. Words then become terms through one
    array (word id -> term id, -1 for a stop word); a term's id is its first occurrence among the kept
    words, as numbering `Analyzer.terms` output one by one would give.
    """
    word_of: defaultdict[str, int] = defaultdict(itertools.count().__next__)
    word_id = word_of.__getitem__
    term_id: dict[str, int] = {}
    term_of_word = np.zeros(0, dtype=np.int32)
    seen = np.zeros(0, dtype=np.int64)  # occurrences of every word (surface forms of stems)
    kept_parts: list[np.ndarray] = []
    joined_parts: list[np.ndarray] = []
    bounds = [np.zeros(1, dtype=np.int64)]
    kept_total = 0

    def take(chunk: tuple[list[str], np.ndarray, np.ndarray]) -> None:
        nonlocal term_of_word, seen, kept_total
        local_words, local_ids, lengths = chunk
        known = term_of_word.size
        ids_of_local = np.fromiter(map(word_id, local_words), dtype=np.int32, count=len(local_words))
        raw = ids_of_local[local_ids] if local_ids.size else np.zeros(0, dtype=np.int32)
        names = list(itertools.islice(word_of, known, None))
        added = np.fromiter(
            (term_id.setdefault(t, len(term_id)) if (t := analyzer.normalize(w)) is not None else -1 for w in names),
            dtype=np.int32, count=len(names))
        term_of_word = np.concatenate([term_of_word, added])
        seen = np.concatenate([seen, np.zeros(len(names), dtype=np.int64)])
        seen += np.bincount(raw, minlength=seen.size)
        ids = term_of_word[raw]
        kept = ids >= 0
        kept_before = np.concatenate([[0], np.cumsum(kept)])  # kept words before each raw position
        bounds.append(kept_total + kept_before[np.cumsum(lengths)])
        kept_parts.append(ids[kept])
        joined_parts.append(joined_to_previous(kept))
        kept_total += int(kept_before[-1])

    for chunk in _word_chunks(texts, analyzer, workers):
        take(chunk)
    analyzer.count_surfaces(word_of, seen.tolist())
    terms = [""] * len(term_id)
    for term, i in term_id.items():
        terms[i] = term
    ids = np.concatenate(kept_parts) if kept_parts else np.zeros(0, dtype=np.int32)
    joined = np.concatenate(joined_parts) if joined_parts else np.zeros(0, dtype=bool)
    return ids, np.concatenate(bounds), terms, joined


# Fewer texts are tokenized in this process. Measured on 2 cores (load 6-8, so by CPU time): the pool's own cost
# is about 0.1 s of CPU at 10,000 texts and none to see at 20,000, against about 1 s (10,000) and 2 s (20,000)
# of tokenizing that the two processes share.
PARALLEL_MIN_TEXTS = 10_000
CHUNKS_PER_WORKER = 2  # each worker's share of the texts, in equal chunks, so that neither waits for the other (at
# 50,000 texts on 2 cores, chunks of 20,000 gave one worker 20,000 + 10,000 texts and the other 20,000)
_shared: tuple[Sequence[str], Analyzer] | None = None  # what forked workers read (set before the fork)


def _word_chunks(
    texts: Iterable[str], analyzer: Analyzer, workers: int
) -> Iterator[tuple[list[str], np.ndarray, np.ndarray]]:
    """`chunk_words` of consecutive chunks of texts, in order: PAIR_BLOCK_TEXTS texts at a time in this
    process, CHUNKS_PER_WORKER chunks per worker (at most PAIR_BLOCK_TEXTS texts each) in worker processes."""
    global _shared
    if workers > 1 and isinstance(texts, Sequence) and len(texts) >= PARALLEL_MIN_TEXTS \
            and "fork" in multiprocessing.get_all_start_methods():
        size = min(PAIR_BLOCK_TEXTS, -(-len(texts) // (CHUNKS_PER_WORKER * workers)))
        ranges = [(b, min(b + size, len(texts))) for b in range(0, len(texts), size)]
        _shared = (texts, analyzer)  # forked workers see it without pickling the texts
        try:
            with multiprocessing.get_context("fork").Pool(min(workers, len(ranges))) as pool:
                yield from pool.imap(_words_of_range, ranges)
        finally:
            _shared = None
        return
    iterator = iter(texts)
    while chunk := list(itertools.islice(iterator, PAIR_BLOCK_TEXTS)):
        yield chunk_words(chunk, analyzer)


def _words_of_range(bounds: tuple[int, int]) -> tuple[list[str], np.ndarray, np.ndarray]:
    assert _shared is not None
    texts, analyzer = _shared
    return chunk_words(texts[bounds[0] : bounds[1]], analyzer)


def chunk_words(texts: Iterable[str], analyzer: Analyzer) -> tuple[list[str], np.ndarray, np.ndarray]:
    """The chunk's distinct lower-cased words in order of first occurrence, every token as an index into
    them (int32), and the number of tokens of every text (int64); a token costs one dictionary lookup.

    The one tokenizing core of both modes: words become terms per distinct word afterwards (exact ids in
    `_term_ids`, hashed columns in `streaming.hashed_counts`), as `Analyzer.terms` would give them.
    """
    local: defaultdict[str, int] = defaultdict(itertools.count().__next__)
    local_id = local.__getitem__
    lower_words = analyzer.words
    raw = array("i")
    lengths = array("q")
    for text in texts:
        found = lower_words(text)
        raw.extend(map(local_id, found))
        lengths.append(len(found))
    return list(local), np.frombuffer(raw, dtype=np.int32), np.frombuffer(lengths, dtype=np.int64)


@dataclass(frozen=True)
class TermCounts:
    """The kept columns of a vocabulary (exact or hashed), counted, before weighting: what both modes hand
    to `weigh_and_reduce`.

    Attributes
    ----------
    counts : scipy.sparse.csr_matrix of int32, shape (n_texts, n_terms)
        Occurrences of every kept term in every distinct text, columns in `alphabetical` order of `terms`.
    terms : tuple of str
        The term of each column (phrases hold one space; a hashed column shows its most frequent word).
    is_phrase : ndarray of bool, shape (n_terms,)
    df : ndarray of float, shape (n_terms,)
        Documents holding each term, every text counted as often as it has copies (`document_frequency`).
    n_documents : float
        Documents the texts stand for (the sum of their copies).
    min_df, max_df :
        The limits used (`term_limits`).
    facts : dict
        What the vocabulary adds to the run's facts (phrases within the limits; hashed columns).
    """

    counts: sp.csr_matrix
    terms: tuple[str, ...]
    is_phrase: np.ndarray
    df: np.ndarray
    n_documents: float
    min_df: int
    max_df: float
    facts: dict[str, float | int | str | bool]


def within_limits(df: np.ndarray, min_df: float, max_df: float, n_documents: float) -> np.ndarray:
    """Columns (sorted) whose document frequency lies in [min_df, max_df * n_documents]."""
    return np.flatnonzero((df >= min_df) & (df <= max_df * n_documents))


def alphabetical(names: Sequence[str]) -> np.ndarray:
    """The order that sorts `names` alphabetically (stable): the column order of both modes."""
    return np.argsort(np.array(names, dtype=object), kind="stable")


def exact_counts(
    texts: Sequence[str],
    analyzer: Analyzer,
    settings: VectorSettings,
    copies: np.ndarray,
    track: Callable[[Iterable[str]], Iterable[str]] | None = None,
    workers: int = 1,
) -> TermCounts:
    """Counts of the kept words and two-word phrases of `texts` in an exact vocabulary (memory mode).

    Phrases are pairs of adjacent kept words; at most MAX_PHRASES of them are kept, the most widespread
    first. `copies` (n_texts,) says how many documents each text stands for.
    """
    return _counted(texts, analyzer, settings, copies, track, workers)[0]


def _counted(
    texts: Sequence[str],
    analyzer: Analyzer,
    settings: VectorSettings,
    copies: np.ndarray,
    track: Callable[[Iterable[str]], Iterable[str]] | None = None,
    workers: int = 1,
    fit_rows: int | None = None,
) -> tuple[TermCounts, FitBeside | None]:
    """`exact_counts`, and with `fit_rows` (a sampled LSA fit) where `fit_beside` allows it, the fit of the
    single words' sample started in a forked worker while this process counts the phrases."""
    n_documents = float(copies.sum())
    beside: list[FitBeside] = []

    def start_fit(words: sp.csr_matrix, word_terms: list[str]) -> None:
        # the words' limits and columns as `_kept_terms` finds them (they depend on the words only)
        low, high = term_limits(settings, n_documents, median_content_words(words))
        keep = within_limits(document_frequency(words, copies), low, high, n_documents)
        if keep.size and fit_rows is not None:
            columns = keep[alphabetical([word_terms[i] for i in keep])]
            beside.append(FitBeside(words, keep, columns, copies, n_documents, settings, fit_rows))

    early = start_fit if fit_rows is not None and fit_beside(len(texts), settings, workers) else None
    try:
        kept, keep_words = _kept_terms(texts, analyzer, settings, copies, track, workers, early)
    except BaseException:
        for started in beside:
            started.close()
        raise
    if beside and not np.array_equal(beside[0].keep, keep_words):  # cannot differ (the same steps); never trusted
        beside.pop().close()
    return kept, (beside[0] if beside else None)


def _kept_terms(
    texts: Sequence[str],
    analyzer: Analyzer,
    settings: VectorSettings,
    copies: np.ndarray,
    track: Callable[[Iterable[str]], Iterable[str]] | None,
    workers: int,
    on_words: Callable[[sp.csr_matrix, list[str]], None] | None,
) -> tuple[TermCounts, np.ndarray]:
    """The body of `exact_counts`, with the kept words' ids (`on_words` as in `count_terms`)."""
    n_documents = float(copies.sum())
    min_df, max_df = term_limits(settings, n_documents)  # the floor: the length of the texts can only raise it
    parallel = workers > 1 and len(texts) >= PARALLEL_MIN_TEXTS  # worker processes need the sequence, not a bar
    words, word_terms, pairs, pair_words = count_terms(
        track(texts) if track and not parallel else texts, analyzer, min_df, copies, workers=workers,
        on_words=on_words)
    min_df, max_df = term_limits(settings, n_documents, median_content_words(words))
    df_words, df_pairs = document_frequency(words, copies), document_frequency(pairs, copies)
    keep_words = within_limits(df_words, min_df, max_df, n_documents)
    keep_pairs = within_limits(df_pairs, min_df, max_df, n_documents)
    phrases_within_df = int(keep_pairs.size)
    if keep_pairs.size > MAX_PHRASES:
        keep_pairs = np.sort(keep_pairs[np.lexsort((keep_pairs, -df_pairs[keep_pairs]))][:MAX_PHRASES])
    if keep_words.size == 0:
        raise no_terms_left(min_df, max_df)
    phrase_terms = [f"{word_terms[a]} {word_terms[b]}" for a, b in pair_words[keep_pairs]]
    all_terms = [word_terms[i] for i in keep_words] + phrase_terms
    order = alphabetical(all_terms)
    counts = sp.hstack([words[:, keep_words], pairs[:, keep_pairs]], format="csr")[:, order]
    terms = tuple(all_terms[i] for i in order)
    return TermCounts(
        counts=sp.csr_matrix(counts, dtype=np.int32), terms=terms,
        is_phrase=np.fromiter((" " in t for t in terms), dtype=bool, count=len(terms)),
        df=np.concatenate([df_words[keep_words], df_pairs[keep_pairs]])[order], n_documents=n_documents,
        min_df=min_df, max_df=max_df, facts={"phrases_within_df": phrases_within_df},
    ), keep_words


# The LSA fit of a sample needs only the single words' columns (phrases are not in the space by default), so
# with a second core it runs in one forked worker while this process counts the phrases and orders the columns
# (at 50,000 texts a 2.5 s fit beside 1.4 s of phrase counting). The same matrix, sample and seed: the same fit.
_fit_inputs: tuple[sp.csr_matrix, np.ndarray, np.ndarray, float, VectorSettings, int] | None = None


def fit_beside(n_texts: int, settings: VectorSettings, workers: int) -> bool:
    """Whether the sampled LSA fit runs in a forked worker while the phrases are counted: with a second core,
    more than LSA_FIT_ROWS texts (a sampled fit), LSA on, and phrases not in the space."""
    return (workers > 1 and n_texts > LSA_FIT_ROWS and settings.lsa_components > 0
            and not settings.bigrams_in_space and "fork" in multiprocessing.get_all_start_methods())


def fit_sampled(svd: TruncatedSVD, rows: sp.csr_matrix) -> TruncatedSVD:
    """`svd` fitted on the TF-IDF rows of an LSA sample, in LSA_FIT_DTYPE (both modes, and the Spark engine)."""
    return svd.fit(rows.astype(LSA_FIT_DTYPE))


def lsa_sample(n_rows: int, fit_rows: int, seed: int) -> np.ndarray:
    """The rows (sorted) of the seeded sample that LSA is fitted on."""
    return np.sort(np.random.default_rng(seed).choice(n_rows, min(n_rows, fit_rows), replace=False))


def _fit_words() -> TruncatedSVD | None:
    """In the worker: the space's columns of the sample's rows, weighted as `weigh_and_reduce` weights them."""
    assert _fit_inputs is not None
    words, columns, copies, n_documents, settings, fit_rows = _fit_inputs
    n = words.shape[0]
    components = lsa_size(settings, n, int(columns.size))
    if components < 2:
        return None
    sample = lsa_sample(n, fit_rows, settings.seed)
    idf = smooth_idf(document_frequency(words, copies)[columns], n_documents)
    svd = TruncatedSVD(n_components=components, random_state=settings.seed, algorithm="randomized")
    with one_thread_each():  # the main process counts phrases on the other core meanwhile
        return fit_sampled(svd, tfidf_rows(words[sample][:, columns], idf))


class FitBeside:
    """The LSA fit of a sample of the single words' columns, in one forked worker (it inherits the word
    matrix at the fork; only the fitted model comes back pickled). `fitted()` waits for it; a worker that
    died gives None, and the caller fits in place."""

    def __init__(self, words: sp.csr_matrix, keep: np.ndarray, columns: np.ndarray, copies: np.ndarray,
                 n_documents: float, settings: VectorSettings, fit_rows: int) -> None:
        global _fit_inputs
        self.keep = keep  # the kept words (by word id) that `columns` orders alphabetically
        _fit_inputs = (words, columns, copies, n_documents, settings, fit_rows)
        try:  # the worker is forked at the submit and inherits the inputs
            self.executor = ProcessPoolExecutor(1, mp_context=multiprocessing.get_context("fork"))
            self.future = self.executor.submit(_fit_words)
        finally:
            _fit_inputs = None

    def fitted(self) -> TruncatedSVD | None:
        """The fitted model, or None when the worker died or failed (the caller then fits in place, where a
        real failure shows itself again)."""
        try:
            return self.future.result()
        except Exception:  # BrokenProcessPool (a dead worker) or the fit's own error
            return None
        finally:
            self.close()

    def close(self) -> None:
        """Let the worker go (a fit not yet taken is dropped)."""
        self.executor.shutdown(wait=False, cancel_futures=True)


def weigh_and_reduce(
    kept: TermCounts,
    settings: VectorSettings,
    *,
    fit_rows: int | None = None,
    block_rows: int = PROJECT_ROWS,
    space_dtype: type = np.float64,
    say: Callable[[str], None] | None = None,
    track: Callable[[range], Iterable[int]] | None = None,
    beside: FitBeside | None = None,
) -> Vectorized:
    """The one weighting and reduction step of both modes: sublinear TF-IDF, then LSA.

    The clustering space holds the single words (and the phrases with `settings.bigrams_in_space`), weighted
    with the smoothed idf of every document (`smooth_idf` of `kept.df`) and L2-normalized. LSA
    (`TruncatedSVD`, randomized, seeded) is fitted on every row when `fit_rows` is None, and the fit's own
    projection (U times Sigma) is the space; otherwise it is fitted on a seeded sample of at most `fit_rows`
    rows and every row is projected block by block (`block_rows` rows at a time, `track` showing the blocks),
    so that the TF-IDF of the whole collection is never held at once. Projected rows are L2-normalized and
    stored as `space_dtype`. `beside` is the same sampled fit started in a worker (`_counted`); where its
    worker died, the fit is done here.
    """
    counts, n = kept.counts, kept.counts.shape[0]
    n_phrases = int(kept.is_phrase.sum())
    if say:
        hashed = kept.facts.get("hashed_columns")
        say(f"{len(kept.terms):,} terms kept " + (f"from a hashed vocabulary of {hashed:,} columns" if hashed
                                                  else f"({n_phrases:,} two-word phrases)"))
    every = settings.bigrams_in_space or n_phrases == 0
    space_columns = np.arange(len(kept.terms)) if every else np.flatnonzero(~kept.is_phrase)
    if space_columns.size == 0:
        raise PilewiseError("no single words are left to cluster on; lower --min-df or raise --max-df")
    in_space = counts if space_columns.size == counts.shape[1] else counts[:, space_columns]
    idf = smooth_idf(kept.df[space_columns], kept.n_documents)
    facts: dict[str, float | int | str | bool] = {
        "min_df": kept.min_df,
        "max_df": float(kept.max_df),
        "terms": len(kept.terms),
        "phrases": n_phrases,
        "phrases_within_df": 0,
        "space_terms": int(space_columns.size),
        "texts_without_terms": int(np.sum(np.diff(in_space.indptr) == 0)),
        "bigrams_in_space": settings.bigrams_in_space,
        **kept.facts,
    }
    components = lsa_size(settings, n, int(space_columns.size))
    if settings.lsa_components <= 0 or components < 2:
        facts["lsa_components"] = 0
        return Vectorized(counts=counts, terms=kept.terms, is_phrase=kept.is_phrase, space=tfidf_rows(in_space, idf),
                          facts=facts, space_columns=space_columns, idf=idf)
    svd = TruncatedSVD(n_components=components, random_state=settings.seed, algorithm="randomized")
    space: np.ndarray
    if fit_rows is None:
        space = normalize(svd.fit_transform(tfidf_rows(in_space, idf))).astype(space_dtype, copy=False)
    else:
        sample = lsa_sample(n, fit_rows, settings.seed)
        fitted = beside.fitted() if beside is not None else None
        if fitted is not None and fitted.n_components == components:
            svd = fitted
        else:
            fit_sampled(svd, tfidf_rows(in_space[sample], idf))
        space = np.empty((n, components), dtype=space_dtype)
        starts = range(0, n, block_rows)
        for start in track(starts) if track else starts:
            block = tfidf_rows(in_space[start : start + block_rows], idf)
            space[start : start + block_rows] = normalize(svd.transform(block))
    facts["lsa_components"] = components
    facts["lsa_explained_variance"] = round(float(svd.explained_variance_ratio_.sum()), 4)
    if fit_rows is not None:
        facts["lsa_fitted_on_rows"] = int(sample.size)
    return Vectorized(counts=counts, terms=kept.terms, is_phrase=kept.is_phrase, space=space, facts=facts,
                      space_columns=space_columns, idf=idf, lsa=svd.components_)


def vectorize(
    texts: Sequence[str],
    analyzer: Analyzer,
    settings: VectorSettings,
    progress: Callable[[str], None] | None = None,
    track: Callable[[Iterable[str]], Iterable[str]] | None = None,
    copies: np.ndarray | None = None,
    workers: int = 1,
) -> Vectorized:
    """Count terms and phrases, weight with sublinear TF-IDF and reduce with LSA (memory mode: one chunk).

    `texts` are the distinct texts to cluster; `copies` (n_texts,) says how many documents each one
    stands for (exact copies, near-duplicate group members; default one). Every figure that counts
    documents counts them all: min_df, max_df and the idf are those of the full list of documents,
    as scikit-learn's TfidfVectorizer(sublinear_tf=True) would compute them on it (docs/method.md,
    "Counting copies"). `workers` > 1 tokenizes in that many processes (see `count_terms`). LSA is fitted
    on every text up to LSA_FIT_ROWS texts, else on a seeded sample of that many (`weigh_and_reduce`).
    """
    n = len(texts)
    weight = np.ones(n) if copies is None else np.asarray(copies, dtype=np.float64)
    if weight.shape != (n,) or np.any(weight < 1):
        raise ValueError(f"copies must hold one count of at least 1 per text ({n}), got shape {weight.shape}")
    # above LSA_FIT_ROWS texts LSA is fitted on a sample, as in streaming mode: a third of the time at 50,000
    # texts, and NMI within the spread of seeds (docs/performance.md, "Issue 15")
    fit_rows = LSA_FIT_ROWS if n > LSA_FIT_ROWS else None
    kept, beside = _counted(texts, analyzer, settings, weight, track=track, workers=workers, fit_rows=fit_rows)
    try:
        return weigh_and_reduce(kept, settings, fit_rows=fit_rows, say=progress, beside=beside)
    finally:
        if beside is not None:
            beside.close()
