"""Keyword-in-context lines: fixed width, keyword aligned in one column (property tests)."""

from __future__ import annotations

import re

from hypothesis import given
from hypothesis import strategies as st

from pilewise.describe.kwic import CONTEXT_CHARS, find_term, kwic_line, kwic_window
from pilewise.vectors.text import Analyzer

analyzer = Analyzer(stop_words=frozenset({"the", "a"}), stem=False)
filler = st.text(alphabet=st.sampled_from("abcdefgh \n\t.,"), max_size=200)


@given(before=filler, after=filler)
def test_keyword_sits_in_one_column_with_fixed_width_context(before: str, after: str) -> None:
    # Common practice for concordances (Brew & Moens, Data-Intensive Linguistics, "Concordances"):
    # fixed context on each side so that the keyword lines up in one column.
    text = f"{before} Zucchini {after}"
    line = kwic_line(text, analyzer, "zucchini")
    assert line is not None
    left, match, right = line
    assert len(left) == CONTEXT_CHARS and len(right) == CONTEXT_CHARS
    assert match == "Zucchini"
    assert "\n" not in left + right and "\t" not in left + right
    expected_left = re.sub(r"\s+", " ", before + " ")[-CONTEXT_CHARS:].rjust(CONTEXT_CHARS)
    expected_right = re.sub(r"\s+", " ", " " + after)[:CONTEXT_CHARS].ljust(CONTEXT_CHARS)
    assert (left, right) == (expected_left, expected_right)


@given(start=st.integers(0, 300), width=st.integers(1, 80))
def test_window_widths_are_exact_anywhere_in_the_text(start: int, width: int) -> None:
    text = "x" * 300 + "KEY" + "y" * 300
    position = min(start, 300)
    left, match, right = kwic_window(text, position, position + 3, width)
    assert (len(left), len(right)) == (width, width)
    assert match == text[position : position + 3]


def test_two_word_phrases_are_found_only_side_by_side() -> None:
    # issue 12: a phrase is two kept words side by side (text.joined_to_previous), never across a stop word
    assert find_term(analyzer.spans("Please reset the password for me"), "reset password") is None
    assert find_term(analyzer.spans("Please reset password for me"), "reset password") == (7, 21)
    text = "Please reset the password for me"
    assert kwic_line(text, analyzer, "missing phrase") is None
