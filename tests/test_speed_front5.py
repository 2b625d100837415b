"""Speed levers of the front half, fifth pass (issue 15): each must give what the slower path gave.

Titles read from a head of the text against the whole-text reading they replace; shingle hashes and MinHash
signatures computed in halves (this process and forked ones) against one process; language detection with
its screen done before boilerplate stripping against detection of the stripped texts; the pipeline's
detection beside grouping (with boilerplate stripped) against detection in place. Inputs are generated here
(seeded or by hypothesis); no figure is timed.
"""

from __future__ import annotations

import csv
import multiprocessing
import os
import random
from pathlib import Path

import numpy as np
import pytest
import stopwordsiso
from hypothesis import given, settings
from hypothesis import strategies as st

from pilewise import pipeline
from pilewise.ingest import dedup, plaintext
from pilewise.options import RunOptions
from pilewise.progress import Reporter
from pilewise.vectors import languages

FORK = "fork" in multiprocessing.get_all_start_methods()


def _title_whole_text(text: str) -> str:
    """first_line_title as it was before (main at b15eb11): every line of the whole text."""
    for line in text.splitlines():
        line = " ".join(line.split())
        if line:
            if len(line) <= plaintext.TITLE_CHARS:
                return line
            cut = line[: plaintext.TITLE_CHARS].rsplit(" ", 1)[0]
            return (cut if len(cut) > plaintext.TITLE_CHARS // 2 else line[: plaintext.TITLE_CHARS]) + "…"
    return "(untitled)"


# Line boundaries of str.splitlines (Python docs, "str.splitlines"), white space that is not one (\x1f, \xa0),
# "\r" before "\n" (one boundary), and words short and long, so that a head can end anywhere in a line.
_PIECES = st.sampled_from(["\n", "\r", "\r\n", "\x0b", "\x0c", "\x1c", "\x1d", "\x1e", "\x85", "\u2028", "\u2029",
                           " ", "  ", "\t", "\x1f", "\xa0", "word", "a", "Überschrift", "x" * 70, "ab cd ef " * 9])


@settings(max_examples=300)
@given(st.lists(_PIECES, max_size=60).map("".join), st.sampled_from([1, 2, 5, 40, 119, 120, 121, 122, 300]))
def test_title_from_a_head_equals_title_from_the_whole_text(text: str, head: int) -> None:
    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(plaintext, "_TITLE_HEAD", head)  # small heads: the cut falls inside every kind of line
        assert plaintext.first_line_title(text) == _title_whole_text(text)
    assert plaintext.first_line_title(text) == _title_whole_text(text)


def _texts(n: int, seed: int) -> list[str]:
    """Texts of 0-60 words from a small vocabulary with digits and non-ASCII words, some near-duplicates."""
    rng = random.Random(seed)
    words = ["order", "Parcel", "late", "refund", "42", "x9", "café", "Straße", "the", "and", "naïve", "_id"]
    texts = [" ".join(rng.choice(words) for _ in range(rng.randint(0, 60))) for _ in range(n)]
    for i in range(0, n - 1, 7):
        texts[i + 1] = texts[i].replace("late", "early", 1)
    return texts


@pytest.mark.skipif(not FORK, reason="the halves run in forked processes")
@pytest.mark.parametrize("workers", [2, 3])
def test_shingles_and_signatures_in_halves_equal_one_process(monkeypatch: pytest.MonkeyPatch, workers: int) -> None:
    texts = _texts(500, seed=workers)
    hashes, offsets = dedup.shingle_hashes(texts)
    signatures = dedup.minhash_signatures(hashes, offsets, num_perm=64, seed=5)
    monkeypatch.setattr(dedup, "_PARALLEL_MIN_TEXTS", 10)  # the forked path on a small input
    monkeypatch.setattr(dedup, "_BATCH_TEXTS", 64)  # several batches in each half
    split_hashes, split_offsets, split_signatures = dedup._shingled(texts, workers, (64, 5))
    assert np.array_equal(split_hashes, hashes)
    assert np.array_equal(split_offsets, offsets)
    assert split_signatures is not None and np.array_equal(split_signatures, signatures)
    assert dedup.shingle_hashes(texts, workers)[0].tolist() == hashes.tolist()
    one = dedup.near_duplicate_groups(texts, workers=1)
    split = dedup.near_duplicate_groups(texts, workers=workers)
    assert one.group_of.tolist() == split.group_of.tolist()
    assert one.representative.size < len(texts)  # the planted near-duplicates were joined: the check can fail


def _pool(code: str) -> list[str]:
    return sorted(stopwordsiso.stopwords(code))[:150] if code != "en" else sorted(languages.english_stop_words())


def _sentence(rng: random.Random, code: str, n: int) -> str:
    return " ".join(rng.choice(_pool(code)) for _ in range(n))


@pytest.mark.parametrize("case", ["model both", "model after", "model before only", "no model"])
def test_screen_ahead_then_changes_equals_detecting_the_changed_texts(case: str) -> None:
    """Codes from `screen_ahead` on the texts before a change and `screened_ahead` with the changed ones equal
    `detect_languages` on the texts after it, also when the change decides whether the model is needed (short
    plain ASCII texts are "und" without it, and go to the model when another text needs it)."""
    rng = random.Random(len(case))
    before = [_sentence(rng, "en", 30) for _ in range(6)] + ["ok thanks", "test", "see you soon"]
    after = list(before)
    german = _sentence(rng, "de", 30)
    if case in ("model both", "model before only"):
        before[0] = german
    if case in ("model both", "model after"):
        after[1] = german
    if case == "model before only":
        after[0] = _sentence(rng, "en", 30)
    changed = {i: text for i, text in enumerate(after) if text != before[i]}
    languages.screen_ahead(before)
    texts, english = languages.screened_ahead(changed)
    assert texts == after
    expected = languages.detect_languages(after)
    assert languages.detect_languages(texts, english=english) == expected
    # the short plain texts: "und" without the model, the model's codes with it (py3langid, from memory)
    assert (set(expected[6:]) == {"und"}) == (case in ("model before only", "no model"))


def test_screened_ahead_needs_the_screen_first() -> None:
    languages._ahead = None
    with pytest.raises(RuntimeError, match="screen_ahead first"):
        languages.screened_ahead({})


_PARENT = os.getpid()


def _screen_dying_in_a_worker(texts: list[str]) -> None:
    """screen_ahead, except that a worker process running it dies at once (as one killed for memory would)."""
    if os.getpid() != _PARENT:
        os._exit(1)
    languages.screen_ahead(texts)


@pytest.mark.parametrize(("background", "dies"), [(True, False), (True, True), (False, False)])
def test_a_later_job_equals_its_in_place_form(background: bool, dies: bool) -> None:
    """`_Beside.then`: the job sent to the worker after the fork gives the in-place result; a worker that died
    leaves it to the calling process."""
    rng = random.Random(3)
    before = [_sentence(rng, code, 25) for code in ("en", "de", "es", "fr") * 3]
    after = list(before)
    after[2] = _sentence(rng, "en", 25)
    changed = {2: after[2]}
    screen = _screen_dying_in_a_worker if dies else languages.screen_ahead
    with pipeline._Beside({"screen": (screen, (before,), {})}, background=background and FORK) as beside:
        beside.then("languages", (pipeline._detect_changed, (changed, None), {}),
                    in_place=(languages.detect_languages, (after, None), {}))
        codes = beside.result("languages")
    assert codes == languages.detect_languages(after)
    assert codes[2] == "en"  # the changed text's own code, not the one before the change


def _write_footed_collection(path: Path) -> None:
    """German, Spanish and English texts; an English footer of function words under a third of them
    (boilerplate: in more than 5% and 5 of the texts, docs/method.md), which makes a German or Spanish text
    look English to the screen until stripping removes it."""
    rng = random.Random(11)
    topics = [a + b for a in ("druck", "factur", "invoic", "liefer", "entreg") for b in ("er", "ung", "os", "al")]
    footer = "Thank you for your message, we will get back to you as soon as we can and then we will be there"
    rows = []
    for i in range(90):
        text = _sentence(rng, ("de", "es", "en")[i % 3], rng.randint(25, 35))
        text += " " + " ".join(rng.choice(topics) for _ in range(6))  # words that are no language's stop words
        rows.append(f"{text}\n{footer}" if i % 3 != 2 and i % 2 == 0 else text)
    rows += [rows[i].replace(rows[i].split()[10], "anders", 1) for i in range(12)]  # near-duplicates
    rng.shuffle(rows)
    with path.open("w", encoding="utf-8", newline="") as out:
        writer = csv.writer(out)
        writer.writerow(["id", "text"])
        for i, text in enumerate(rows):
            writer.writerow([f"t{i}", text])


@pytest.mark.parametrize("early", [True, False])
def test_detection_beside_grouping_with_boilerplate_equals_detection_in_place(
        tmp_path: Path, monkeypatch: pytest.MonkeyPatch, early: bool) -> None:
    """prepare_collection with the detection worker forked before reading (`early`: the texts are sent to it)
    or after it (the texts inherited), and before boilerplate stripping either way (workers 2), gives the codes
    that detection after grouping gives in place (workers 1), and the same grouping."""
    source = tmp_path / "footed.csv"
    _write_footed_collection(source)
    monkeypatch.setattr(pipeline, "CLASSIFY_PARALLEL_MIN", 10)
    monkeypatch.setattr(pipeline, "DETECT_EARLY_BYTES", 1 if early else 10**9)
    forks = []
    beside = pipeline._Beside

    def noted(jobs: dict[str, pipeline.Job], *, background: bool) -> pipeline._Beside:
        forks.append(sorted(jobs))
        return beside(jobs, background=background)

    monkeypatch.setattr(pipeline, "_Beside", noted)
    results = {}
    for workers in (2, 1):
        options = RunOptions(source=source, k=3, out=tmp_path / f"site{workers}", seed=3, quiet=True,
                             workers=workers)
        results[workers] = pipeline.prepare_collection(options, Reporter(quiet=True), k_needed=3)
    beside, after = results[2], results[1]
    assert forks == ([["model"]] if early else [["screen"]])  # workers 1 forks nothing
    assert after.boilerplate.lines  # the footer was found: the changed texts were sent to the worker
    footed = languages.detect_languages([doc.text for doc in after.ingested.documents]).count("en")
    stripped = sum(n for code, n in zip(after.text_languages, after.collection.copies.tolist(), strict=True)
                   if code == "en")
    assert footed >= stripped + 10  # the footer made texts look English: a worker that missed the change differs
    assert beside.text_languages == after.text_languages
    assert np.array_equal(beside.collection.first_doc_of_text, after.collection.first_doc_of_text)
    assert {"de", "es", "en"} <= set(after.text_languages)  # py3langid tells them apart (from memory)


# Every white space of str.split (Python docs: Unicode White_Space and the ASCII separators \x1c-\x1f) and
# unprintable characters that are not white space.
_SPACES = st.sampled_from([" ", "  ", "\t", "\n", "\r\n", "\x0b", "\x0c", "\x1c", "\x1f", "\x85", "\xa0", "\u2028",
                           "\u3000", "\x00", "\x7f", "a", "Wort", "é", "\u200b"])


@settings(max_examples=300)
@given(st.lists(_SPACES, max_size=30).map("".join))
def test_distinct_key_equals_split_and_join(text: str) -> None:
    assert dedup.distinct_key(text) == " ".join(text.split())
