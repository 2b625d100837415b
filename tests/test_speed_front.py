"""Speed levers of the front half (issue 15): each must give what the slower path gave.

Batched language detection against py3langid's own per-text `classify`; the boilerplate line keys against
the character loop they replace; LSA projected in blocks against one projection; the pair codes' distinct
values against numpy's `unique`. Inputs are generated here (seeded); no figure is timed.
"""

from __future__ import annotations

import math
import random

import numpy as np
import pytest
import stopwordsiso
from hypothesis import given
from hypothesis import strategies as st

from pilewise.ingest import dedup
from pilewise.vectors import languages, tfidf
from pilewise.vectors.text import Analyzer, load_stop_words

# Languages of several scripts, written with words of their stopwords-iso lists (generated texts)
LANGUAGES = ("de", "fr", "es", "ru", "ar", "tr", "pl", "nl", "sv", "hi", "el", "vi")


def _mixed_texts(n: int, seed: int = 5) -> list[str]:
    """Texts of 1 to 60 words from one or two stop-word lists, some upper-case, some with digits or signs only."""
    rng = random.Random(seed)
    pools = {code: sorted(stopwordsiso.stopwords(code)) for code in LANGUAGES}
    texts = []
    for i in range(n):
        first, second = rng.choice(LANGUAGES), rng.choice(LANGUAGES)
        words = [rng.choice(pools[first if rng.random() < 0.8 else second]) for _ in range(rng.randint(1, 60))]
        text = " ".join(words)
        if i % 7 == 0:
            text = text.upper()  # py3langid lower-cases a text that is all upper case
        if i % 11 == 0:
            text = f"{rng.randint(0, 10**6)} -- {rng.randint(0, 99)} !!"  # no letters: no features to score
        texts.append(text)
    return texts


def _per_text_codes(samples: list[str]) -> list[str]:
    """py3langid's own `classify`, one text at a time, with pilewise's confidence rule."""
    model = languages._model()
    codes = []
    for sample in samples:
        code, probability = model.classify(sample)
        codes.append(str(code) if probability >= languages.MIN_CONFIDENCE else languages.UNDETERMINED)
    return codes


def test_batched_detection_gives_py3langids_codes(monkeypatch: pytest.MonkeyPatch) -> None:
    samples = [text[: languages.DETECT_CHARS] for text in _mixed_texts(600)]
    expected = _per_text_codes(samples)
    assert len(set(expected)) >= 8  # the generated texts do reach many languages (and "und")
    monkeypatch.setattr(languages, "CLASSIFY_BLOCK", 64)  # several blocks, a short last one
    assert languages.classify_many(samples) == expected
    assert languages.classify_many([]) == []


def test_batched_detection_in_workers_equals_one_process(monkeypatch: pytest.MonkeyPatch) -> None:
    samples = [text[: languages.DETECT_CHARS] for text in _mixed_texts(300, seed=6)]
    one = languages.classify_many(samples)
    monkeypatch.setattr(languages, "CLASSIFY_BLOCK", 32)
    monkeypatch.setattr(languages, "CLASSIFY_PARALLEL_MIN", 10)  # force the worker path on a small input
    assert languages.classify_many(samples, workers=2) == one
    assert languages.detect_languages(samples, workers=2) == languages.detect_languages(samples)


def test_other_model_layouts_fall_back_to_classify(monkeypatch: pytest.MonkeyPatch) -> None:
    samples = [text[: languages.DETECT_CHARS] for text in _mixed_texts(40, seed=8)]
    expected = _per_text_codes(samples)
    monkeypatch.setattr(languages, "_BATCH_NEEDS", ("an_attribute_no_layout_has",))
    assert languages.classify_many(samples) == expected


def test_detect_languages_equals_detecting_one_text_at_a_time() -> None:
    texts = _mixed_texts(300, seed=9) + ["The parcel arrived broken and the box was wet.", "ok", "x1 y2"]
    batched = languages.detect_languages(texts)
    assert languages._identifier is None  # the model is dropped after a batch (memory of the later stages)
    assert list(batched) == [languages.detect_language(text) for text in texts]


@given(st.text(alphabet=st.sampled_from("ab 1٣²①߂\u0660.-"), max_size=30))
def test_digit_test_agrees_with_str_isdigit(text: str) -> None:
    # Python docs, str.isdigit: decimal characters and digits that need special handling (superscripts)
    assert dedup._has_digit(text) == any(char.isdigit() for char in text)


def _line_key_by_character_loop(line: str, own_names: frozenset[str] = frozenset()) -> str:
    """`normalize_line` as it was written before the regular digit search (the reference)."""
    import re

    plain = " ".join(line.split()).lower()
    pattern = plain
    for name in own_names:
        if name in pattern:
            pattern = re.sub(rf"(?<![\w\-]){re.escape(name)}(?![\w\-])", "<name>", pattern)
    if any(char.isdigit() for char in pattern):
        pattern = dedup._MONTH.sub("<month>", dedup._NUMBERISH.sub("#", pattern))
    if pattern == plain:
        return plain
    letters = sum(char.isalpha() for char in pattern.replace("<name>", "").replace("<month>", ""))
    return pattern if letters >= dedup.BOILERPLATE_PATTERN_LETTERS else plain


def test_boilerplate_keys_and_lines_equal_the_character_loop() -> None:
    rng = random.Random(2)
    parts = ["Sent from my phone", "v5.36.0", "2023-03-01", "May", "12", "LS(1)", "ls", "١٢", "²", "Ticket", "é"]
    texts = []
    for _ in range(400):
        lines = [" ".join(rng.choice(parts) for _ in range(rng.randint(1, 8))) for _ in range(rng.randint(1, 5))]
        texts.append("\n".join(lines))
    for text in texts:
        names = dedup.own_names(text)
        for line in text.splitlines():
            assert dedup.normalize_line(line, names) == _line_key_by_character_loop(line, names)
    found = dedup.find_boilerplate(texts, min_docs=2, min_share=0.01)
    assert found.lines  # the generated texts share lines
    # the same count as one pass over every line with the reference keys (common practice: a Counter of sets)
    from collections import Counter

    counts: Counter[str] = Counter()
    for text in texts:
        names = dedup.own_names(text)
        counts.update({_line_key_by_character_loop(line, names) for line in text.splitlines()
                       if len(" ".join(line.split())) >= dedup.BOILERPLATE_MIN_CHARS})
    needed = max(2, math.ceil(0.01 * len(texts)))  # find_boilerplate's docstring: >= min_share and >= min_docs
    assert dict(found.lines) == {line: n for line, n in counts.items() if n >= needed}


def test_own_names_without_a_bracket_are_none() -> None:
    assert dedup.own_names("GIT-COMMIT(1)  Git Manual  GIT-COMMIT(1)\nbody") == frozenset({"git-commit"})
    assert dedup.own_names("\n  \nno section here, only words\nLS(1)") == frozenset()


def test_lsa_projected_in_blocks_equals_one_projection() -> None:
    rng = np.random.default_rng(4)
    vocabulary = ["".join(rng.choice(list("bcdfgklmnprst"))) + "".join(rng.choice(list("aeiou"), size=3))
                  + "".join(rng.choice(list("bcdfgklmnprst"), size=2)) for _ in range(300)]
    texts = [" ".join(rng.choice(vocabulary, size=rng.integers(5, 40))) for _ in range(900)]
    analyzer = Analyzer(stop_words=load_stop_words(None), stem=False)
    settings = tfidf.VectorSettings(lsa_components=20)
    kept = tfidf.exact_counts(texts, analyzer, settings, np.ones(len(texts)))
    whole = tfidf.weigh_and_reduce(kept, settings, fit_rows=500, block_rows=len(texts))
    blocks = tfidf.weigh_and_reduce(kept, settings, fit_rows=500, block_rows=128)
    assert np.array_equal(whole.space, blocks.space)  # rows are projected independently (CSR rows times a matrix)


@given(st.lists(st.integers(min_value=-(2**40), max_value=2**40), max_size=60))
def test_sorted_distinct_equals_numpy_unique(values: list[int]) -> None:
    array = np.array(values, dtype=np.int64)
    assert np.array_equal(tfidf._sorted_distinct(array.copy()), np.unique(array))  # numpy docs: sorted unique


@given(st.text(alphabet=st.sampled_from("a1:@ ٣.-"), max_size=20))
def test_redaction_gate_finds_what_the_character_class_finds(text: str) -> None:
    import re

    from pilewise.ingest import redact

    # the class every redacted kind needs (redact module docstring): an ASCII digit, "@" or ":"
    assert any(char in text for char in redact._TRIGGERS) == (re.search(r"[0-9@:]", text) is not None)
