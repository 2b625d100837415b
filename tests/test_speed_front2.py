"""Speed levers of the front half, second pass (issue 15): each must give what the slower path gave.

The word lists of `looks_english` and of the shingles against the regular searches they replace; the
shingle hashes against their definition computed here with Python integers; collapsed lines and boilerplate
counts against the split-and-join and re-keying they replace; language detection beside the near-duplicate
grouping against detection after it. Inputs are generated here (seeded or by hypothesis); no figure is timed.
"""

from __future__ import annotations

import csv
import hashlib
import multiprocessing
import os
import random
import re
import sys
from collections import Counter
from pathlib import Path
from typing import Any

import numpy as np
import pytest
import stopwordsiso
from hypothesis import given, settings
from hypothesis import strategies as st

from pilewise import pipeline
from pilewise.ingest import dedup
from pilewise.options import RunOptions
from pilewise.progress import Reporter
from pilewise.vectors import languages

# Characters that make the fast paths and the regular searches disagree if anything does: ASCII letters of
# both cases, digits, "_", apostrophes, every ASCII white space and control character, and a few non-ASCII
# letters, digits and spaces (the Kelvin sign lower-cases to an ASCII "k").
_TRICKY = st.sampled_from(
    list("aAzZnNtT09_'’-. ,;!?") + [chr(c) for c in range(0, 32)] + ["\x7f", "é", "K", "ß", "١", "²", "\xa0",
                                                                      "\u2028", "\u3000", "ǅ", "İ"]
)
_TEXTS = st.lists(st.one_of(_TRICKY, st.sampled_from(["don't", "DON'T", "isn't", "the", "and", "word"])),
                  max_size=60).map("".join)


def _looks_english_by_search(text: str) -> bool:
    """`languages.looks_english` as written before the split path (the reference)."""
    words = languages._ASCII_WORDS.findall(text.lower())
    if len(words) < languages.ENGLISH_MIN_WORDS:
        return False
    if not text.isascii() and len(languages._NON_ASCII_LETTER.findall(text)) > (
            languages.ENGLISH_FOREIGN_LETTERS * len(words)):
        return False
    stop = languages.english_stop_words()
    return sum(1 for w in words if w in stop or w.endswith("n't")) >= languages.ENGLISH_STOP_SHARE * len(words)


@given(_TEXTS)
def test_ascii_words_equal_the_regular_search(text: str) -> None:
    lowered = text.lower()
    assert languages._ascii_words(lowered) == languages._ASCII_WORDS.findall(lowered)


@given(_TEXTS)
def test_looks_english_equals_the_reference(text: str) -> None:
    assert languages.looks_english(text) == _looks_english_by_search(text)


def test_looks_english_on_generated_sentences() -> None:
    """Both answers occur, and "n't" words count as before (English stop-word share, ENGLISH_STOP_SHARE)."""
    rng = random.Random(3)
    english = sorted(languages.english_stop_words())
    german = sorted(stopwordsiso.stopwords("de"))
    texts = ["I don't know, it isn't there and WON'T BE", "Zzz qqq don't won't can't xx yy zz"]
    for _ in range(300):
        pool = rng.choice([english, german, ["blorp", "quaxe", "mintal", "ferro"]])
        words = [rng.choice(pool) for _ in range(rng.randint(1, 30))]
        texts.append(" ".join(words).upper() if rng.random() < 0.2 else " ".join(words))
    answers = [languages.looks_english(text) for text in texts]
    assert answers == [_looks_english_by_search(text) for text in texts]
    assert any(answers) and not all(answers)
    # 3 "n't" words of 7: only the rule's "n't" clause passes this text (3/7 >= 0.2)
    assert languages.looks_english("Zzz qqq don't won't can't xx yy") is True


@given(_TEXTS)
def test_shingle_words_equal_the_word_search(text: str) -> None:
    assert dedup.shingle_words(text) == dedup._WORD.findall(text.lower())


def _reference_shingle_hashes(text: str) -> list[int]:
    """A text's shingle hashes from `near_duplicate_groups`' definition, with Python integers: BLAKE2b of every
    word with digit runs masked, position-weighted sums of 5 words mod 2^64, SplitMix64 (Steele, Lea & Flood
    2014); a text of fewer words is one hash of its words (digits kept), or of its characters when wordless."""
    mask = (1 << 64) - 1

    def blake(key: str) -> int:
        return int.from_bytes(hashlib.blake2b(key.encode("utf-8", "surrogatepass"), digest_size=8).digest(), "little")

    def splitmix(x: int) -> int:
        x ^= x >> 30
        x = (x * 0xBF58476D1CE4E5B9) & mask
        x ^= x >> 27
        x = (x * 0x94D049BB133111EB) & mask
        return x ^ (x >> 31)

    words = re.findall(r"\w+", text.lower())
    if len(words) < dedup.SHINGLE_WORDS:
        return [blake("w\0" + " ".join(words) if words else "c\0" + " ".join(text.lower().split()))]
    tokens = [blake(re.sub(r"\d+", "0", word)) for word in words]
    weights = [int(w) for w in dedup._POSITION_WEIGHTS]
    return [splitmix(sum(t * w for t, w in zip(tokens[i : i + 5], weights, strict=True)) & mask)
            for i in range(len(words) - 4)]


def test_shingle_hashes_equal_their_definition() -> None:
    rng = random.Random(8)
    vocabulary = ["order", "Order", "ORDER", "42", "a1b22", "café", "naïve", "x_y", "don't", "١٢٣", "ok"]
    texts = ["", "   ", "!!", "error 404", "Error 404!"]
    for _ in range(200):
        texts.append(rng.choice([" ", "\t", ", ", "\n", "--"]).join(
            rng.choice(vocabulary) for _ in range(rng.randint(1, 14))))
    hashes, offsets = dedup.shingle_hashes(texts)
    for i, text in enumerate(texts):
        assert hashes[offsets[i] : offsets[i + 1]].tolist() == _reference_shingle_hashes(text)


def test_word_ids_are_the_same_across_batches() -> None:
    """A word met again in a later batch keeps its id; words equal up to digits share one masked id."""
    vocabulary = dedup._Vocabulary()
    first = vocabulary.ids(["alpha", "beta", "alpha", "order1"])
    second = vocabulary.ids(["order2", "beta", "gamma", "alpha"])
    assert first.tolist() == [0, 1, 0, 2]
    assert second.tolist() == [2, 1, 3, 0]
    hashes = vocabulary.hashes()
    assert hashes.size == 4 and hashes[2] == dedup._hash64("order0")


def test_no_white_space_but_the_space_is_printable() -> None:
    """`collapse_space` relies on it (Python's str.isspace and str.isprintable, every code point)."""
    assert [c for c in range(sys.maxunicode + 1) if chr(c).isspace() and chr(c).isprintable()] == [0x20]


@given(_TEXTS)
def test_collapse_space_equals_split_and_join(text: str) -> None:
    assert dedup.collapse_space(text) == " ".join(text.split())


def _footer_texts(seed: int) -> list[str]:
    """Texts with a shared footer, a manual-page header (the text's own name) and mixed line ends."""
    rng = random.Random(seed)
    words = ["ticket", "printer", "refund", "login", "blocked", "screen", "invoice", "delivery", "late"]
    texts = []
    for i in range(120):
        body = [" ".join(rng.choice(words) for _ in range(rng.randint(3, 12))) for _ in range(rng.randint(1, 4))]
        if i % 3 == 0:
            body.append(f"Sent from my phone  --  Example Corp support v1.{i % 4}")
        if i % 5 == 0:
            body.insert(0, f"TOOL{i % 2}(1)   General Commands Manual   TOOL{i % 2}(1)")
        if i % 7 == 0:
            body.insert(0, "Please do not reply to this automated message ever")
        end = rng.choice(["\n", "\r\n", "\r", "\n\n"])
        texts.append(end.join(body) + (end if i % 2 else ""))
    texts.append("Please do not reply to this automated message ever\r\n\n"
                 "Sent from my phone -- Example Corp support v1.0")
    return texts


def test_boilerplate_counts_equal_the_reference() -> None:
    texts = _footer_texts(4)
    found = dedup.find_boilerplate(texts, min_docs=2, min_share=0.01)
    # the reference: every line's `normalize_line` key, counted once per text (common practice: a Counter of sets)
    counts: Counter[str] = Counter()
    for text in texts:
        names = dedup.own_names(text)
        counts.update({dedup.normalize_line(line, names) for line in text.splitlines()
                       if len(" ".join(line.split())) >= dedup.BOILERPLATE_MIN_CHARS})
    assert dict(found.lines) == {line: n for line, n in counts.items() if n >= 2}
    assert len(found.lines) >= 3  # footer, header pattern, notice

    stripped = dedup.strip_texts(texts, found)
    removed = kept = changed = 0
    for text, after in zip(texts, stripped.texts, strict=True):
        assert after == dedup.strip_boilerplate(text, found)
        # the counts as strip_texts took them before: every line of both texts keyed anew
        before_count = sum(key in found.normalized for key in dedup.line_keys(text))
        after_count = sum(key in found.normalized for key in dedup.line_keys(after))
        removed += before_count - after_count
        kept += after_count
        changed += before_count > after_count
    assert (stripped.lines_removed, stripped.lines_kept, stripped.texts_changed) == (removed, kept, changed)
    assert removed > 0 and kept > 0


def _write_mixed_collection(path: Path) -> None:
    """A CSV of texts in English, German and Spanish (stop-word lists of stopwords-iso and scikit-learn),
    with near-duplicate copies (one word changed: at 80 words a resemblance of at least 71/81, above 0.8 by
    `near_duplicate_groups`' bound) and exact copies."""
    rng = random.Random(11)
    pools = {"de": sorted(stopwordsiso.stopwords("de")), "es": sorted(stopwordsiso.stopwords("es")),
             "en": sorted(languages.english_stop_words())}
    topics = ["Drucker", "impresora", "printer", "Rechnung", "factura", "invoice", "Lieferung", "entrega"]
    texts = []
    for i in range(90):
        pool = pools[("de", "es", "en")[i % 3]]
        texts.append(" ".join(rng.choice(pool + topics) for _ in range(rng.randint(80, 120))))
    copies = [t.replace(t.split()[10], "anders", 1) for t in texts[:20]] + texts[:5]
    rows = texts + copies
    rng.shuffle(rows)  # copies before their originals too: the representatives are not a prefix
    with path.open("w", encoding="utf-8", newline="") as out:
        writer = csv.writer(out)
        writer.writerow(["id", "text"])
        for i, text in enumerate(rows):
            writer.writerow([f"t{i}", text])


def test_languages_detected_beside_grouping_equal_those_after_it(tmp_path: Path,
                                                                 monkeypatch: pytest.MonkeyPatch) -> None:
    """The codes of the texts left after near-duplicate grouping are the same whether languages are detected in
    a forked worker on every distinct text or after grouping on the texts left (workers 2 against 1)."""
    source = tmp_path / "mixed.csv"
    _write_mixed_collection(source)
    monkeypatch.setattr(pipeline, "CLASSIFY_PARALLEL_MIN", 10)
    marks = tmp_path / "detected-in"
    detect = pipeline.detect_languages

    def detect_marked(*args: Any, **kwargs: Any) -> tuple[str, ...]:
        """The real detection, noting the process it ran in."""
        with marks.open("a") as out:
            out.write(f"{os.getpid()}\n")
        return detect(*args, **kwargs)

    monkeypatch.setattr(pipeline, "detect_languages", detect_marked)
    results = {}
    for workers in (2, 1):
        options = RunOptions(source=source, k=3, out=tmp_path / f"site{workers}", seed=3, quiet=True,
                             workers=workers)
        results[workers] = pipeline.prepare_collection(options, Reporter(quiet=True), k_needed=3)
    pids = marks.read_text().split()
    assert pids[1] == str(os.getpid())  # workers 1: in place
    if "fork" in multiprocessing.get_all_start_methods():
        assert pids[0] != pids[1]  # workers 2: in the forked worker
    beside, after = results[2], results[1]
    assert beside.collection.copies.size == 90  # the 20 near-duplicates were joined, the 5 exact copies too
    assert beside.text_languages == after.text_languages
    assert np.array_equal(beside.collection.first_doc_of_text, after.collection.first_doc_of_text)
    assert {"de", "es", "en"} <= set(after.text_languages)  # py3langid tells them apart (from memory)


@pytest.mark.parametrize(("n_texts", "forced", "workers", "expected"), [
    (10_000, None, 2, True), (10_000, "de", 2, False), (10_000, None, 1, False), (100, None, 2, False)])
def test_when_detection_goes_beside(n_texts: int, forced: str | None, workers: int, expected: bool) -> None:
    fork = "fork" in multiprocessing.get_all_start_methods()
    assert pipeline._detect_beside(n_texts, forced, workers) == (expected and fork)


@settings(max_examples=30)
@given(st.lists(st.sampled_from(["Sent from my phone by Example", "x", "", "  a  b  ", "\tTabbed line of text here"]),
                min_size=1, max_size=6).map("\n".join))
def test_normalize_line_is_unchanged_by_collapsing_once(text: str) -> None:
    for line in text.splitlines():
        assert dedup.normalize_line(line) == dedup._line_pattern(" ".join(line.split()).lower(), frozenset())
