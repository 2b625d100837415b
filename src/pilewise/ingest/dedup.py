"""Near-duplicate texts and boilerplate lines, found before vectorizing.

Near-duplicates (auto-replies, templated notifications, forwarded copies) are pairs of texts whose
word shingles have a resemblance (Jaccard similarity) of at least a threshold (Broder 1997). MinHash
signatures and LSH banding find the candidate pairs in about linear time; every candidate is then
confirmed by the exact resemblance of the two shingle sets, so the decision itself is exact and only
the search is randomized. Boilerplate lines (signatures, legal footers, form templates) are lines that
recur in a large share of the documents.

Strip boilerplate before looking for near-duplicates: a footer on one copy and not on the other lowers
their resemblance (at 100 words, two added footer lines are about ten new shingles). Both stages are
pure computations on sequences of texts; neither reads options or writes files.
"""

from __future__ import annotations

import hashlib
import itertools
import math
import multiprocessing
import re
from collections import Counter
from collections.abc import Iterator, Sequence
from dataclasses import dataclass
from functools import cached_property
from typing import cast

import numpy as np
from scipy.stats import binom

SHINGLE_WORDS = 5  # words per shingle (w-shingles of Broder 1997); see near_duplicate_groups
NEAR_DUPLICATE_THRESHOLD = 0.8  # resemblance at or above which two texts are near-duplicates
NUM_PERM = 128  # MinHash functions per signature
BAND_RECALL = 0.995  # least probability that a pair exactly at the threshold becomes an LSH candidate
PREFILTER_MISS = 1e-9  # most probability that the signature prefilter drops a pair exactly at the threshold
BOILERPLATE_MIN_SHARE = 0.05
BOILERPLATE_MIN_DOCS = 5
BOILERPLATE_MIN_CHARS = 20
# a boilerplate line in at least this share of the texts never counts as a text's content (see strip_boilerplate)
BOILERPLATE_WIDESPREAD_SHARE = 0.5
# stripping leaves a text at least this share of its content characters (see strip_boilerplate)
BOILERPLATE_KEEP_SHARE = 0.5

_WORD = re.compile(r"\w+")
# Every ASCII character but a-z, 0-9 and "_" becomes a space: on lower-cased ASCII text, _WORD finds exactly
# the words that ``str.split`` after this table gives, in about two thirds of the time.
_ASCII_NON_WORD = str.maketrans({c: " " for c in range(128) if not (chr(c).isalnum() or chr(c) == "_")
                                 or chr(c).isupper()})
_DIGITS = re.compile(r"\d+")
_CHUNK_SHINGLES = 1 << 13  # shingles hashed at once: a (num_perm, chunk) uint64 block, 8 MiB at 128
_CHUNK_PAIRS = 1 << 16
_BATCH_TEXTS = 1 << 13
_WORDS_AT_ONCE = 1 << 16  # words looked up in one call of _Vocabulary.ids
# Odd 64-bit constants (digits of pi, e, sqrt 2, sqrt 3, golden ratio) weighting the words of a shingle.
_POSITION_WEIGHTS = np.array(
    [0x243F6A8885A308D3, 0xB7E151628AED2A6B, 0x6A09E667F3BCC909, 0xBB67AE8584CAA73B, 0x9E3779B97F4A7C15],
    dtype=np.uint64,
)
_BAND_KEY_SEED = 0x5EED_BA4D


@dataclass(frozen=True)
class NearDuplicates:
    """Groups of near-duplicate texts; every text is in exactly one group, alone if it has no near-duplicate.

    Groups are numbered in the order of their first text, which is the group's representative.
    """

    group_of: np.ndarray  # (n_texts,) group id per text
    representative: np.ndarray  # (n_groups,) index of the group's first text
    sizes: np.ndarray  # (n_groups,) texts per group (multiply by exact-copy counts for documents)
    threshold: float


def distinct_key(text: str) -> str:
    """What makes two texts exact duplicates: the same words after collapsing every run of whitespace.

    Both preparation paths group documents by it (the streaming one by its BLAKE2b digest). It is
    `collapse_space`, which returns most texts of one line as they are without splitting them."""
    return collapse_space(text)


def near_duplicate_groups(
    texts: Sequence[str],
    *,
    threshold: float = NEAR_DUPLICATE_THRESHOLD,
    seed: int = 0,
    num_perm: int = NUM_PERM,
    workers: int = 1,
) -> NearDuplicates:
    """Group texts whose word 5-shingle sets have a resemblance of at least `threshold`.

    Method: shingling and resemblance from Broder (1997), "On the resemblance and containment of
    documents", Compression and Complexity of Sequences; MinHash from Broder, Charikar, Frieze &
    Mitzenmacher (2000), "Min-wise independent permutations", JCSS 60(3); LSH banding as in Leskovec,
    Rajaraman & Ullman, Mining of Massive Datasets, §3.4 (section from memory): a pair of resemblance s
    becomes a candidate with probability 1 - (1 - s^r)^b for b bands of r rows. Groups are the
    connected components (union-find) of the confirmed pairs, so near-duplication is taken as transitive.

    Shingles are word 5-grams of the lower-cased text (words are runs of ``\\w``), with every run of
    digits replaced by ``0`` so that templates that differ in order numbers, dates or amounts share
    all their shingles. Words rather than characters because the unit that templates change is the
    word, because a text of 100 words gives 96 word shingles against about 600 character shingles
    (six times less hashing), and because at a threshold of 0.8 character 5-shingles (the size MMDS
    §3.2.2 suggests for e-mails, cited from memory) join texts of 100 words that differ in about eight
    words (measured), which is similar rather than near-identical. One changed word changes at most 5
    word shingles, so a text of n words stays at a resemblance of at least (n - 4 - 5m) / (n - 4 + 5m)
    with m words changed: at 100 words and threshold 0.8, two changed words (numbers excepted).

    A text of fewer than 5 words is one shingle, its whole word sequence with digits kept (in a short
    text a number may be all it says: "error 404" is not "error 500"), so short texts join only texts
    with the same words up to case and punctuation ("hello?" and "help!" never do). A text without
    any word is one shingle of its whitespace-collapsed, lower-cased characters.

    LSH bands: the largest r (rows per band, b = num_perm // r bands) for which a pair exactly at the
    threshold becomes a candidate with probability >= BAND_RECALL (r=6, b=21 for 0.8 and 128).
    Within a bucket every text is checked against the bucket's first text and the text before it, so
    a bucket of thousands of templated texts costs a linear number of checks. Candidates whose
    signatures agree in fewer positions than a pair at the threshold would with probability
    PREFILTER_MISS are dropped; the rest are confirmed by the exact resemblance of their shingle sets
    (pairs already joined are skipped).

    Parameters
    ----------
    texts : sequence of str, length n_texts
        Distinct texts (exact duplicates already grouped, as by ``pipeline.collect_distinct``).
    threshold : float, default 0.8
        Least resemblance of two near-duplicates, in (0, 1].
    seed : int, default 0
        Seeds the MinHash functions; the same texts and seed give the same groups.
    num_perm : int, default 128
        MinHash functions per signature. The standard error of a MinHash estimate of a resemblance J
        is sqrt(J (1 - J) / num_perm), 0.035 at J = 0.8 with 128.
    workers : int, default 1
        Processes that hash shingles of a large collection (forked; the groups are the same).

    Returns
    -------
    NearDuplicates
        ``group_of`` (n_texts,), ``representative`` and ``sizes`` (n_groups,), all int64.

    Raises
    ------
    ValueError
        If `threshold`, `seed` or `num_perm` is out of range (every problem is named).
    """
    problems = []
    if not 0.0 < threshold <= 1.0:
        problems.append(f"threshold={threshold} must be in (0, 1]")
    if isinstance(num_perm, bool) or not isinstance(num_perm, int | np.integer) or num_perm < 1:
        problems.append(f"num_perm={num_perm!r} must be a positive integer")
    if isinstance(seed, bool) or not isinstance(seed, int | np.integer) or seed < 0:
        problems.append(f"seed={seed!r} must be a non-negative integer")
    if problems:
        raise ValueError("; ".join(problems))
    n = len(texts)
    if n == 0:
        empty = np.zeros(0, dtype=np.int64)
        return NearDuplicates(empty, empty.copy(), empty.copy(), float(threshold))
    hashes, offsets, signed = _shingled(texts, workers, (num_perm, seed))
    signatures = cast("np.ndarray", signed)  # given, as (num_perm, seed) is
    bands, rows = lsh_bands(num_perm, threshold)
    codes = _candidate_codes(signatures, bands, rows)
    agreeing = _agreements(signatures, codes, n)
    least = int(binom.ppf(PREFILTER_MISS, num_perm, threshold))
    keep = agreeing >= least
    codes, agreeing = codes[keep], agreeing[keep]
    # Most similar pairs first, so that the rest are mostly already joined and skip the exact check.
    codes = codes[np.lexsort((codes, -agreeing))]

    parent = list(range(n))

    def find(x: int) -> int:
        while parent[x] != x:
            parent[x] = parent[parent[x]]
            x = parent[x]
        return x

    for code in codes.tolist():
        lo, hi = divmod(code, n)
        root_lo, root_hi = find(lo), find(hi)
        if root_lo == root_hi:
            continue
        if _resemblance(hashes[offsets[lo] : offsets[lo + 1]], hashes[offsets[hi] : offsets[hi + 1]]) >= threshold:
            # The smaller index stays root, so every root is its component's first text.
            parent[max(root_lo, root_hi)] = min(root_lo, root_hi)
    roots = np.fromiter((find(i) for i in range(n)), dtype=np.int64, count=n)
    representative, group_of = np.unique(roots, return_inverse=True)
    sizes = np.bincount(group_of, minlength=representative.size)
    return NearDuplicates(group_of.astype(np.int64), representative.astype(np.int64), sizes.astype(np.int64),
                          float(threshold))


def shingle_hashes(texts: Sequence[str], workers: int = 1) -> tuple[np.ndarray, np.ndarray]:
    """Each text's shingles as 64-bit hashes (see `near_duplicate_groups` for what the shingles are).

    Words are hashed once each with BLAKE2b; a shingle's hash is a position-weighted sum of its word
    hashes, finalized with the SplitMix64 mixer (Steele, Lea & Flood 2014, "Fast splittable pseudorandom
    number generators"). Hashes depend only on the text, not on the other texts or their order.

    Returns
    -------
    hashes : ndarray of uint64, shape (n_shingles,)
        The texts' shingles one text after the other, in text order; a shingle that recurs in a text
        recurs here (``np.unique`` of a slice gives the set).
    offsets : ndarray of int64, shape (n_texts + 1,)
        Text i's shingles are ``hashes[offsets[i]:offsets[i + 1]]``; every text has at least one.
    """
    hashes, offsets, _ = _shingled(texts, workers, None)
    return hashes, offsets


_PARALLEL_MIN_TEXTS = 40_000  # fewer texts are shingled in this process (a fork costs more than it saves)
_RANGE_TEXTS = 4 * _BATCH_TEXTS  # texts per range in one process
Minhash = tuple[int, int]  # (num_perm, seed) of `minhash_signatures`
Shingled = tuple[np.ndarray, np.ndarray, np.ndarray | None]  # hashes, shingles per text, signatures
_shared: tuple[Sequence[str], Minhash | None] | None = None  # what forked workers read (set before the fork)


def _shingled(texts: Sequence[str], workers: int, minhash: Minhash | None) -> tuple[np.ndarray, np.ndarray,
                                                                                   np.ndarray | None]:
    """`shingle_hashes` of `texts`, with their `minhash_signatures` when `minhash` gives (num_perm, seed)."""
    parts, counts, signed = [], [], []
    for hashes, windows, signatures in _shingle_ranges(texts, workers, minhash):
        parts.append(hashes)
        counts.append(windows)
        signed.append(signatures)
    offsets = np.zeros(len(texts) + 1, dtype=np.int64)
    if parts:
        np.cumsum(np.concatenate(counts), out=offsets[1:])
    hashes = np.concatenate(parts) if parts else np.zeros(0, dtype=np.uint64)
    if minhash is None:
        return hashes, offsets, None
    if not signed:
        return hashes, offsets, minhash_signatures(hashes, offsets, num_perm=minhash[0], seed=minhash[1])
    return hashes, offsets, np.concatenate(cast("list[np.ndarray]", signed))


def _shingle_ranges(texts: Sequence[str], workers: int, minhash: Minhash | None) -> Iterator[Shingled]:
    """`_range_shingles` of consecutive ranges of texts, in order. With `workers` > 1 and enough texts, the
    texts are cut into `workers` equal ranges: forked processes take all but the first, which this process
    takes meanwhile (it would otherwise wait idle). A shingle's hash and a text's MinHash signature depend
    only on the text's words, so every split gives the same hashes and signatures."""
    global _shared
    n = len(texts)
    if workers > 1 and n >= _PARALLEL_MIN_TEXTS and "fork" in multiprocessing.get_all_start_methods():
        cuts = np.linspace(0, n, workers + 1).round().astype(int).tolist()
        ranges = list(itertools.pairwise(cuts))
        _shared = (texts, minhash)
        try:
            with multiprocessing.get_context("fork").Pool(workers - 1) as pool:
                later = pool.map_async(_shared_range, ranges[1:])
                _shared = None  # the workers are forked: this process keeps no reference for them
                yield _range_shingles(texts, ranges[0], _Vocabulary(), minhash)
                yield from later.get()
        finally:
            _shared = None
        return
    vocabulary = _Vocabulary()
    for begin in range(0, n, _RANGE_TEXTS):
        yield _range_shingles(texts, (begin, min(begin + _RANGE_TEXTS, n)), vocabulary, minhash)


def _shared_range(bounds: tuple[int, int]) -> Shingled:
    assert _shared is not None
    texts, minhash = _shared
    return _range_shingles(texts, bounds, _Vocabulary(), minhash)


def _range_shingles(
    texts: Sequence[str], bounds: tuple[int, int], vocabulary: _Vocabulary, minhash: Minhash | None
) -> Shingled:
    """Shingle hashes of texts[begin:end] and their number per text, in batches, so that the per-word
    temporaries stay small next to the result; with the texts' MinHash signatures when `minhash` is given."""
    parts, counts = [], []
    for first in range(bounds[0], bounds[1], _BATCH_TEXTS):
        hashes, windows = _batch_shingles([texts[i] for i in range(first, min(first + _BATCH_TEXTS, bounds[1]))],
                                          vocabulary)
        parts.append(hashes)
        counts.append(windows)
    hashes, windows = np.concatenate(parts), np.concatenate(counts)
    if minhash is None:
        return hashes, windows, None
    offsets = np.zeros(windows.size + 1, dtype=np.int64)
    np.cumsum(windows, out=offsets[1:])
    return hashes, windows, minhash_signatures(hashes, offsets, num_perm=minhash[0], seed=minhash[1])


def _batch_shingles(texts: Sequence[str], vocabulary: _Vocabulary) -> tuple[np.ndarray, np.ndarray]:
    """Shingle hashes of a batch of texts, one text after the other, and the number of shingles of each."""
    n = len(texts)
    batch_words: list[str] = []
    id_parts: list[np.ndarray] = []
    lengths = np.zeros(n, dtype=np.int64)
    whole: dict[int, int] = {}
    for i, text in enumerate(texts):
        words = shingle_words(text)
        if len(words) >= SHINGLE_WORDS:
            batch_words += words
            if len(batch_words) >= _WORDS_AT_ONCE:  # the words as ids: str objects cost 50-60 bytes each
                id_parts.append(vocabulary.ids(batch_words))
                batch_words = []
            lengths[i] = len(words)
        else:
            key = "w\0" + " ".join(words) if words else "c\0" + " ".join(text.lower().split())
            whole[i] = _hash64(key)
    id_parts.append(vocabulary.ids(batch_words))
    word_ids = np.concatenate(id_parts)  # before `hashes`, which hashes the words new in this batch
    tokens = vocabulary.hashes()[word_ids]

    is_long = lengths > 0
    windows = np.where(is_long, lengths - SHINGLE_WORDS + 1, 1)
    long_windows = windows[is_long]
    token_start = np.cumsum(lengths[is_long]) - lengths[is_long]
    window_start = np.cumsum(long_windows) - long_windows
    position = np.repeat(token_start - window_start, long_windows) + np.arange(long_windows.sum(), dtype=np.int64)
    long_hashes = np.zeros(position.size, dtype=np.uint64)
    for j in range(SHINGLE_WORDS):
        long_hashes += tokens[position + j] * _POSITION_WEIGHTS[j]
    hashes = np.empty(int(windows.sum()), dtype=np.uint64)
    in_long = np.repeat(is_long, windows)
    hashes[in_long] = _splitmix64(long_hashes)
    hashes[~in_long] = np.fromiter(whole.values(), dtype=np.uint64, count=len(whole))  # in text order
    return hashes, windows


def shingle_words(text: str) -> list[str]:
    """The words that shingles are made of: ``\\w+`` runs of the lower-cased text (by a translation and a
    split on ASCII text, where the two agree: see _ASCII_NON_WORD)."""
    lowered = text.lower()
    if lowered.isascii():
        return lowered.translate(_ASCII_NON_WORD).split()
    return _WORD.findall(lowered)


def minhash_signatures(hashes: np.ndarray, offsets: np.ndarray, *, num_perm: int, seed: int) -> np.ndarray:
    """MinHash signatures of shingle sets: the least value of each of `num_perm` hash functions.

    The functions are x -> (a x + b) mod 2^64 with random odd a and random b, keeping the top 32 bits
    (multiply-add-shift hashing, Dietzfelbinger 1996, "Universal hashing and k-wise independent random
    variables via integer arithmetic without primes", STACS; cited from memory), applied to already
    well-mixed shingle hashes. The fraction of agreeing positions of two signatures estimates the
    resemblance of the two sets (Broder 1997). The family is not proven min-wise independent, so the
    estimate's bias and spread are checked against the binomial standard error in the tests.

    Parameters
    ----------
    hashes, offsets : as returned by `shingle_hashes` (every set non-empty)
    num_perm : int
    seed : int

    Returns
    -------
    ndarray of uint32, shape (n_texts, num_perm)
    """
    rng = np.random.default_rng(seed)
    a = rng.integers(0, np.iinfo(np.uint64).max, size=num_perm, dtype=np.uint64, endpoint=True) | np.uint64(1)
    b = rng.integers(0, np.iinfo(np.uint64).max, size=num_perm, dtype=np.uint64, endpoint=True)
    n = offsets.size - 1
    signatures = np.full((n, num_perm), np.iinfo(np.uint32).max, dtype=np.uint32)
    total = int(offsets[-1])
    for start in range(0, total, _CHUNK_SHINGLES):
        stop = min(start + _CHUNK_SHINGLES, total)
        first = int(np.searchsorted(offsets, start, side="right")) - 1
        last = int(np.searchsorted(offsets, stop, side="left"))  # texts first..last-1 overlap the chunk
        # (num_perm, chunk) rather than (chunk, num_perm): reducing along contiguous rows is 3x faster.
        block = np.multiply.outer(a, hashes[start:stop])
        block += b[:, None]
        segments = np.maximum(offsets[first:last], start) - start
        least = (np.minimum.reduceat(block, segments, axis=1) >> 32).astype(np.uint32)
        np.minimum(signatures[first:last], least.T, out=signatures[first:last])
    return signatures


def lsh_bands(num_perm: int, threshold: float) -> tuple[int, int]:
    """(bands, rows): the most rows per band for which a pair at `threshold` is a candidate with P >= BAND_RECALL."""
    for rows in range(num_perm, 0, -1):
        bands = num_perm // rows
        if 1.0 - (1.0 - threshold**rows) ** bands >= BAND_RECALL:
            return bands, rows
    return num_perm, 1


def _candidate_codes(signatures: np.ndarray, bands: int, rows: int) -> np.ndarray:
    """Candidate pairs (lo * n + hi, lo < hi, sorted, unique) from texts sharing a bucket in any band."""
    n = signatures.shape[0]
    weights = np.random.default_rng(_BAND_KEY_SEED).integers(
        0, np.iinfo(np.uint64).max, size=rows, dtype=np.uint64, endpoint=True
    ) | np.uint64(1)
    found = []
    for band in range(bands):
        # A weighted sum identifies the band's rows; a rare collision only adds a candidate to check.
        key = signatures[:, band * rows : (band + 1) * rows].astype(np.uint64) @ weights
        order = np.argsort(key, kind="stable")
        sorted_key = key[order]
        new_run = np.ones(n, dtype=bool)
        new_run[1:] = sorted_key[1:] != sorted_key[:-1]
        if new_run.all():
            continue
        run_first = order[np.flatnonzero(new_run)][np.cumsum(new_run) - 1]
        later = np.flatnonzero(~new_run)
        hi = order[later]
        found.append(run_first[later] * n + hi)  # against the bucket's first text
        found.append(order[later - 1] * n + hi)  # against the text before it in the bucket
    if not found:
        return np.zeros(0, dtype=np.int64)
    return np.unique(np.concatenate(found))


def _agreements(signatures: np.ndarray, codes: np.ndarray, n: int) -> np.ndarray:
    """Number of agreeing signature positions of each candidate pair."""
    agreeing = np.zeros(codes.size, dtype=np.int64)
    for start in range(0, codes.size, _CHUNK_PAIRS):
        lo, hi = np.divmod(codes[start : start + _CHUNK_PAIRS], n)
        agreeing[start : start + lo.size] = (signatures[lo] == signatures[hi]).sum(axis=1)
    return agreeing


def _resemblance(a: np.ndarray, b: np.ndarray) -> float:
    """Exact Jaccard similarity of the sets of two arrays of hashes."""
    a, b = np.unique(a), np.unique(b)
    common = np.intersect1d(a, b, assume_unique=True).size
    return common / (a.size + b.size - common)


class _Vocabulary:
    """Word -> id of the word with its digit runs masked; looking up a new word adds it."""

    def __init__(self) -> None:
        self._ids: dict[str, int] = {}
        self._masked: dict[str, int] = {}
        self._hashes = np.zeros(0, dtype=np.uint64)

    def ids(self, words: list[str]) -> np.ndarray:
        """The id of every word of `words`, int64 (new words added in the order of their first occurrence).

        Every word is looked up by a plain dict's ``get``, run in C (a ``__missing__`` method made every
        lookup a slower one); only the words not found are looked at again."""
        ids, masked = self._ids, self._masked
        found = np.fromiter(map(ids.get, words, itertools.repeat(-1)), dtype=np.int64, count=len(words))
        new = np.flatnonzero(found < 0)
        if new.size:
            missing = [words[i] for i in new.tolist()]
            for word in dict.fromkeys(missing):
                ids[word] = masked.setdefault(_DIGITS.sub("0", word), len(masked))
            found[new] = np.fromiter(map(ids.__getitem__, missing), dtype=np.int64, count=len(missing))
        return found

    def hashes(self) -> np.ndarray:
        """BLAKE2b hash of every masked word, indexed by id (hashing only the words new since the last call)."""
        done = self._hashes.size
        if len(self._masked) > done:
            new = itertools.islice(self._masked, done, None)
            self._hashes = np.concatenate([self._hashes, np.fromiter(map(_hash64, new), dtype=np.uint64)])
        return self._hashes


def _hash64(text: str) -> int:
    return int.from_bytes(hashlib.blake2b(text.encode("utf-8", "surrogatepass"), digest_size=8).digest(), "little")


def _splitmix64(x: np.ndarray) -> np.ndarray:
    """The SplitMix64 finalizer (Steele, Lea & Flood 2014), elementwise on uint64."""
    x = x ^ (x >> np.uint64(30))
    x *= np.uint64(0xBF58476D1CE4E5B9)
    x ^= x >> np.uint64(27)
    x *= np.uint64(0x94D049BB133111EB)
    x ^= x >> np.uint64(31)
    return x


@dataclass(frozen=True)
class Boilerplate:
    """Lines that recur in many documents, to be removed before vectorizing.

    ``lines`` holds each normalized line (whitespace collapsed, lower-cased) with the number of
    documents it appears in, most frequent first (ties in alphabetical order). ``texts`` is the number
    of texts they were counted in (0: unknown, every line is then taken as widespread).
    """

    lines: tuple[tuple[str, int], ...]
    min_share: float
    texts: int = 0

    @cached_property
    def normalized(self) -> frozenset[str]:
        """The normalized lines, for matching."""
        return frozenset(line for line, _ in self.lines)

    @cached_property
    def count_of(self) -> dict[str, int]:
        """Texts holding each normalized line."""
        return dict(self.lines)

    def widespread(self, line: str) -> bool:
        """Whether a boilerplate line is in at least BOILERPLATE_WIDESPREAD_SHARE of the texts."""
        return self.count_of[line] >= BOILERPLATE_WIDESPREAD_SHARE * self.texts


NO_BOILERPLATE = Boilerplate((), BOILERPLATE_MIN_SHARE)


# Versions, dates and years, which differ between copies of one template ("GNU coreutils 9.1", "v5.36.0",
# "2023-03-01", "September 2022", "2019-2023"): digits joined by dots, hyphens, slashes or colons, and
# years 1900-2099, become "#". A plain whole number ("ticket 1042") stays: a line that differs from others
# only in an id or a count is as often content (a notification's text) as a template.
_NUMBERISH = re.compile(r"(?<!\w)v?\d+(?:[.\-/:]\d+)+|(?<!\d)(?:19|20)\d\d(?!\d)")
# Month names before a number ("September 2022", "May 12"): only there, so that the verb "may" stays a word.
_MONTH = re.compile(
    r"\b(?:jan(?:uary)?|feb(?:ruary)?|mar(?:ch)?|apr(?:il)?|may|june?|july?|aug(?:ust)?|sep(?:t(?:ember)?)?"
    r"|oct(?:ober)?|nov(?:ember)?|dec(?:ember)?)\.?(?=\s?#)"
)
# A manual page's own name in its header line, "LS(1)" or "git-commit(1)": NAME(section).
_OWN_NAME = re.compile(r"(?<![\w.+\-])([\w.+\-]*\w)\((\d\w*)\)")
# A line made a pattern (numbers, dates or the document's name replaced) must keep this many letters, so
# that rows of a numeric table ("1 2 3 4 5 ...") do not become one line; a footer such as
# "perl v5.36.0  2023-03-01  LWP-REQUEST(1p)" keeps 6 ("perl", "v", "p").
BOILERPLATE_PATTERN_LETTERS = 5


def normalize_line(line: str, own_names: frozenset[str] = frozenset()) -> str:
    """A line as matched against boilerplate: white space collapsed, lower-cased, and made a pattern.

    Lines that differ only in versions, dates and years, or in the document's own name, are the same
    template line: every version or date (digits joined by ``.-/:``) and year becomes "#", a month name before it
    becomes "<month>", and each of `own_names` (lower-case; see `own_names`) becomes "<name>". A line that
    changed keeps its pattern only if it holds at least BOILERPLATE_PATTERN_LETTERS letters outside the
    replaced parts; otherwise it is matched as written.
    """
    return _line_pattern(collapse_space(line).lower(), own_names)


def collapse_space(line: str) -> str:
    """``" ".join(line.split())``, without splitting a line that is already so (most lines of most texts).

    Every white-space character (``str.isspace``) but the space is unprintable (``str.isprintable``;
    checked over all of Unicode in the tests), so a printable line without a double space and without a
    space at either end has nothing to collapse."""
    if line.isprintable() and "  " not in line and not line.startswith(" ") and not line.endswith(" "):
        return line
    return " ".join(line.split())


def _line_pattern(plain: str, own_names: frozenset[str]) -> str:
    """`normalize_line` of a line already collapsed and lower-cased (`plain`)."""
    pattern = plain
    for name in own_names:
        if name in pattern:
            pattern = re.sub(rf"(?<![\w\-]){re.escape(name)}(?![\w\-])", "<name>", pattern)
    if _has_digit(pattern):
        pattern = _MONTH.sub("<month>", _NUMBERISH.sub("#", pattern))
    if pattern == plain:
        return plain
    letters = sum(char.isalpha() for char in pattern.replace("<name>", "").replace("<month>", ""))
    return pattern if letters >= BOILERPLATE_PATTERN_LETTERS else plain


_ASCII_DIGIT = re.compile(r"[0-9]")


def _has_digit(text: str) -> bool:
    """Whether any character of `text` is a digit by ``str.isdigit``; a regular search on ASCII text, where
    the two agree (the character loop took most of `find_boilerplate`'s time on long lines)."""
    if text.isascii():
        return _ASCII_DIGIT.search(text) is not None
    return any(map(str.isdigit, text))


def own_names(text: str) -> frozenset[str]:
    """The document's own name as its header gives it: NAME of every NAME(section) in its first non-empty
    line, lower-cased (a manual page's "LS(1)  User Commands  LS(1)" gives "ls")."""
    for line in text.splitlines():
        if line.strip():
            if "(" not in line:  # no NAME(section) can match; the search is slow on a long first line
                return frozenset()
            return frozenset(m.group(1).lower() for m in _OWN_NAME.finditer(line))
    return frozenset()


def line_keys(text: str) -> list[str]:
    """`normalize_line` of every line of `text` (as split by ``str.splitlines``), with the text's own name."""
    names = own_names(text)
    return [normalize_line(line, names) for line in text.splitlines()]


def find_boilerplate(
    texts: Sequence[str],
    *,
    min_share: float = BOILERPLATE_MIN_SHARE,
    min_docs: int = BOILERPLATE_MIN_DOCS,
    min_chars: int = BOILERPLATE_MIN_CHARS,
) -> Boilerplate:
    """Lines found in at least `min_share` of the texts and in at least `min_docs` texts.

    Common practice in cleaning web and e-mail text: a line repeated verbatim across many documents is
    a template, not content (e.g. Wenzek et al. 2020, "CCNet", LREC, remove lines repeated across
    documents after normalizing them; cited from memory). Lines are normalized with `normalize_line`
    (with each text's `own_names`), so that headers and footers differing only in versions, dates or the
    document's name count as one line, and counted once per text, in one pass with a Counter.

    Defaults: a line in >= 5% of the texts and >= 5 texts. The share finds a company footer or a busy
    agent's signature; the floor of 5 texts keeps a small collection from losing lines that two or
    three texts share by quoting one another. A line of fewer than `min_chars` (20) characters after
    normalizing is never boilerplate: short lines such as "Thanks," or "Hi team" recur by habit, carry
    a word or two that the vectorizer's document-frequency limits already discount, and are as often
    content ("Still not working", "Yes please") that must not be deleted for being common.

    Parameters
    ----------
    texts : sequence of str
        Lines are split as by ``str.splitlines``.
    min_share : float, default 0.05
        Least share of the texts holding the line, in (0, 1].
    min_docs : int, default 5
        Least number of texts holding the line, at least 1.
    min_chars : int, default 20
        Least length of a normalized boilerplate line, at least 1.

    Returns
    -------
    Boilerplate
        The lines and their counts of texts, most frequent first.

    Raises
    ------
    ValueError
        If an option is out of range (every problem is named).
    """
    problems = []
    if not 0.0 < min_share <= 1.0:
        problems.append(f"min_share={min_share} must be in (0, 1]")
    if min_docs < 1:
        problems.append(f"min_docs={min_docs} must be at least 1")
    if min_chars < 1:
        problems.append(f"min_chars={min_chars} must be at least 1")
    if problems:
        raise ValueError("; ".join(problems))
    counts: Counter[str] = Counter()
    for text in texts:
        names = own_names(text)
        keys = set()
        for line in text.splitlines():
            if len(line) >= min_chars:  # a line shorter as written is shorter collapsed
                plain = collapse_space(line)
                if len(plain) >= min_chars:
                    keys.add(_line_pattern(plain.lower(), names))
        counts.update(keys)
    # Rounded first so that, say, 0.07 * 100 asks for 7 texts and not 8.
    needed = max(min_docs, math.ceil(round(min_share * len(texts), 9)))
    lines = sorted(((line, count) for line, count in counts.items() if count >= needed),
                   key=lambda item: (-item[1], item[0]))
    return Boilerplate(tuple(lines), float(min_share), len(texts))


def strip_boilerplate(text: str, boilerplate: Boilerplate) -> str:
    """`text` without its boilerplate lines, except those that are most of what the text says.

    The rule (docs/method.md, "Boilerplate lines"): a text's content characters are its non-space
    characters outside widespread boilerplate lines (lines in at least half of the texts, which no
    text can be about: a word in more than half of the documents is dropped by the default --max-df).
    Every boilerplate line is removed, unless that would leave the text less than half of its content
    characters; then its least widespread boilerplate lines (a templated body found in one theme's
    share of the texts, not the signature found in all) are kept, one at a time, until at least half
    is left. A text made only of boilerplate lines is kept whole: stripping never empties a text.

    Lines keep their own line breaks. A kept line ending in a lone carriage return that comes to stand
    before a line starting with a line feed gets the line feed added, so that the two stay two lines.
    """
    return _strip_counted(text, boilerplate)[0]


def _strip_counted(text: str, boilerplate: Boilerplate) -> tuple[str, int, int]:
    """`strip_boilerplate`'s text, with the number of boilerplate lines in `text` and in the stripped text."""
    if not boilerplate.lines:
        return text, 0, 0
    lines = text.splitlines(keepends=True)
    names = own_names(text)
    keys = [normalize_line(line, names) for line in lines]
    found = [i for i, key in enumerate(keys) if key in boilerplate.normalized]
    if not found:
        return text, 0, 0
    size = [len("".join(line.split())) for line in lines]
    removed = set(found)
    content = sum(n for i, n in enumerate(size) if i not in removed or not boilerplate.widespread(keys[i]))
    left = sum(n for i, n in enumerate(size) if i not in removed)
    # least widespread first; among equals the longer line, then the earlier one
    for i in sorted(removed, key=lambda i: (boilerplate.count_of[keys[i]], -size[i], i)):
        if left >= BOILERPLATE_KEEP_SHARE * content or boilerplate.widespread(keys[i]):
            break
        removed.discard(i)
        left += size[i]
    if left == 0:
        return text, len(found), len(found)
    kept: list[str] = []
    for i, line in enumerate(lines):
        if i in removed:
            continue
        if kept and kept[-1].endswith("\r") and line.startswith("\n"):
            kept[-1] += "\n"
        kept.append(line)
    stripped = "".join(kept)
    # The kept lines are the stripped text's lines (the line feed above keeps them apart), so their keys are
    # the same unless the text's own name changed with its first non-empty line (which only a removed line
    # before it can change, and no empty line is a boilerplate key); then they are found anew.
    first = next((i for i, line in enumerate(lines) if line.strip()), len(lines))
    if "" in boilerplate.normalized or any(i <= first for i in removed):
        return stripped, len(found), sum(key in boilerplate.normalized for key in line_keys(stripped))
    return stripped, len(found), len(found) - len(removed)


@dataclass(frozen=True)
class Stripped:
    """Texts after `strip_texts`, with what was removed."""

    texts: list[str]
    lines_removed: int  # boilerplate lines removed, over all texts
    texts_changed: int  # texts that lost at least one line
    lines_kept: int  # boilerplate lines kept because they are most of their text's content


def strip_texts(texts: Sequence[str], boilerplate: Boilerplate) -> Stripped:
    """`strip_boilerplate` on every text, counting the lines removed and kept."""
    out: list[str] = []
    removed = changed = kept = 0
    for text in texts:
        stripped, before, after = _strip_counted(text, boilerplate)
        out.append(stripped)
        removed += before - after
        kept += after
        changed += before > after
    return Stripped(out, removed, changed, kept)
