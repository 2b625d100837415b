"""Speed levers of the vectorizing stage (issue 15): each must give what the slower path gave.

The ASCII tokenizing pattern against the Unicode pattern it stands in for (every ASCII character, generated
texts, and a whole vectorizing run); the worker processes' chunks against tokenizing in one process. Inputs
are generated here (seeded); no figure is timed.
"""

from __future__ import annotations

import random
import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from pilewise.vectors import text as text_module
from pilewise.vectors import tfidf
from pilewise.vectors.text import BREAK_PATTERN, TOKEN_PATTERN, Analyzer, load_stop_words, lower

# The replaced path: the module's documented patterns, compiled by `re` with Unicode classes
UNICODE_ITEMS = re.compile(f"{TOKEN_PATTERN}|{BREAK_PATTERN}")
ASCII = "".join(map(chr, range(128)))


def _analyzer() -> Analyzer:
    return Analyzer(stop_words=load_stop_words(None, ("en",)), stem=False)


def test_ascii_pattern_gives_the_unicode_items_for_every_pair_of_ascii_characters() -> None:
    analyzer = _analyzer()
    # every ASCII character next to every other, between letters and beside spaces, apostrophes and line breaks
    # (the classes' edges: Python's `\s` holds \x1c-\x1f, `\w` holds "_"; Python re docs, "Regular Expression
    # Syntax")
    for a in ASCII:
        for b in ASCII:
            sample = f"ab{a}{b}cd {a}'x-{b}\n \n{b}{a}9_"
            assert analyzer.words(sample) == UNICODE_ITEMS.findall(lower(sample)), repr(sample)


@settings(max_examples=400, deadline=None)
@given(st.text(alphabet=st.sampled_from(ASCII + "aaaeeettt''--  \n\n"), max_size=80))
def test_ascii_pattern_gives_the_unicode_items_on_generated_ascii_text(sample: str) -> None:
    assert _analyzer().words(sample) == UNICODE_ITEMS.findall(lower(sample))


def test_text_with_one_non_ascii_character_keeps_the_unicode_path() -> None:
    analyzer = _analyzer()
    # "é" and a combining acute accent (U+0301) are letters of a word only under the Unicode classes
    assert analyzer.words("Caf\u00e9 ole") == ["caf\u00e9", "ole"]
    assert analyzer.words("Cafe\u0301 ole") == ["cafe\u0301", "ole"]


def _mixed_collection(n: int, seed: int = 3) -> list[str]:
    """Texts of made-up words, punctuation, digits and line breaks; every fifth one holds a non-ASCII word."""
    rng = random.Random(seed)
    words = ["".join(rng.choice("bcdfgklmnprstvz") + rng.choice("aeiou") for _ in range(rng.randint(1, 3)))
             for _ in range(300)]
    extras = [", ", ". ", " - ", " 42 ", "\n", "\n\n", " don't ", " log-in ", " (", ") ", " the ", " a "]
    texts = []
    for i in range(n):
        parts = []
        for _ in range(rng.randint(3, 40)):
            parts.append(rng.choice(words).capitalize() if rng.random() < 0.1 else rng.choice(words))
            parts.append(rng.choice(extras) if rng.random() < 0.2 else " ")
        if i % 5 == 0:
            parts.append(" na\u00efve \u201cquoted\u201d")
        texts.append("".join(parts))
    return texts


def test_vectorizing_gives_the_same_output_as_the_unicode_pattern(monkeypatch: pytest.MonkeyPatch) -> None:
    texts = _mixed_collection(400)
    assert sum(t.isascii() for t in texts) == 320  # both paths are taken
    settings_ = tfidf.VectorSettings(lsa_components=20)
    fast = tfidf.vectorize(texts, _analyzer(), settings_)
    monkeypatch.setattr(text_module, "_find_ascii_items", UNICODE_ITEMS.findall)
    slow = tfidf.vectorize(texts, _analyzer(), settings_)
    assert fast.terms == slow.terms
    assert (fast.counts != slow.counts).nnz == 0
    assert np.array_equal(fast.space, slow.space)
    assert fast.facts == slow.facts


@pytest.mark.parametrize(("n_texts", "workers"), [(101, 2), (57, 3)])
def test_counts_from_worker_chunks_equal_one_process(monkeypatch: pytest.MonkeyPatch, n_texts: int,
                                                    workers: int) -> None:
    texts = _mixed_collection(n_texts, seed=n_texts)
    alone = tfidf.count_terms(texts, _analyzer(), 2, workers=1)
    monkeypatch.setattr(tfidf, "PARALLEL_MIN_TEXTS", 10)  # small texts in the worker processes
    shared = tfidf.count_terms(texts, _analyzer(), 2, workers=workers)
    assert alone[1] == shared[1]
    for one, other in ((alone[0], shared[0]), (alone[2], shared[2])):
        assert one.shape == other.shape and (one != other).nnz == 0
    assert np.array_equal(alone[3], shared[3])


def test_worker_chunks_cover_the_texts_in_order_in_equal_parts(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(tfidf, "PARALLEL_MIN_TEXTS", 10)
    monkeypatch.setattr(tfidf, "CHUNKS_PER_WORKER", 2)
    texts = [f"w{chr(97 + i // 26)}{chr(97 + i % 26)}" for i in range(101)]  # one distinct word per text
    chunks = list(tfidf._word_chunks(texts, _analyzer(), workers=2))
    # 101 texts for 2 workers in 2 chunks each: ceil(101 / 4) = 26, 26, 26, 23 texts (arithmetic)
    assert [int(lengths.size) for _, _, lengths in chunks] == [26, 26, 26, 23]
    assert [word for local, _, _ in chunks for word in local] == [lower(t) for t in texts]


def test_the_command_line_imports_the_pipeline_only_for_a_command_that_runs_it() -> None:
    """`pilewise --help` and usage errors answer without importing scikit-learn, scipy or pandas."""
    probe = ("import sys, pilewise, pilewise.cli; "
             "heavy = ('sklearn', 'scipy', 'pandas', 'bs4', 'pilewise.pipeline'); "
             "print(sorted(m for m in heavy if m in sys.modules)); "
             "print(pilewise.RunOptions.__name__, pilewise.run_collection.__name__, pilewise.RunOutcome.__name__)")
    src = str(Path(__file__).resolve().parents[1] / "src")
    found = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, check=True,
                           env={"PYTHONPATH": src, "PATH": ""}).stdout.splitlines()
    assert found == ["[]", "RunOptions run_collection RunOutcome"]
