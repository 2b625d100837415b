"""Spans, keyword-in-context windows and page marks point at the original text in every script.

Lower-casing changes the length of some texts ("İ" lower-cases to "i" and a combining dot, Python's
str.lower following Unicode SpecialCasing.txt), so spans found on a lower-cased copy land on the wrong
characters. These tests build texts from letters of many scripts, combining marks and emoji (hypothesis)
and check every span against the original string.
"""

from __future__ import annotations

from hypothesis import given, settings
from hypothesis import strategies as st

from pilewise.describe.kwic import find_term, kwic_line
from pilewise.output.site import mark_terms
from pilewise.vectors.text import Analyzer, load_stop_words, lower

ANALYZER = Analyzer(stop_words=load_stop_words(None, ["de", "tr", "ru", "ar", "zh", "ja"]), stem=False)
PIECES = ["İstanbul", "İADE", "ŞİFRE", "Straße", "STRASSE", "ẞ", "café", "cafe\u0301", "naïve", "Ωμέγα",
          "посылка", "ДОСТАВКА", "الطرد", "مَرْحَبًا", "包裹", "物流信息", "パスワード", "荷物が届きません",
          "👍🏽", "👨‍👩‍👧", "🙂", "refund", "parcel", "und", "the", "42", ",", ".", "\n", "\n\n", " ", "  "]
texts = st.lists(st.sampled_from(PIECES), min_size=1, max_size=30).map(lambda parts: " ".join(parts))


@settings(max_examples=200, deadline=None)
@given(texts)
def test_every_span_holds_its_term_in_the_original_text(text: str) -> None:
    for start, end, term in ANALYZER.spans(text):
        if term:
            assert ANALYZER.normalize(lower(text[start:end])) == term


@settings(max_examples=200, deadline=None)
@given(texts)
def test_words_of_the_fast_path_equal_the_spans_path(text: str) -> None:
    assert ANALYZER.words(text) == [item for _, _, item in ANALYZER.items(text)]


@settings(max_examples=200, deadline=None)
@given(texts)
def test_kwic_match_is_the_original_text_of_the_span(text: str) -> None:
    spans = ANALYZER.spans(text)
    for _, _, term in spans:
        if term:
            line = kwic_line(text, ANALYZER, term)
            found = find_term(spans, term)
            assert line is not None and found is not None
            assert line[1] == " ".join(text[found[0] : found[1]].split())


@settings(max_examples=200, deadline=None)
@given(texts)
def test_marks_cover_the_original_words_and_lose_no_character(text: str) -> None:
    spans = ANALYZER.spans(text)
    keys = sorted({term for _, _, term in spans if term})
    segments = mark_terms(text, spans, keys)
    assert "".join(segment.text for segment in segments) == text  # no placeholders here: display text is the text
    for segment in segments:
        if segment.marked:
            assert ANALYZER.normalize(lower(segment.text)) is not None


def test_dotted_capital_i_does_not_shift_the_window() -> None:
    """Regression (issue 12): after "İ" every mark and keyword-in-context window landed one character late."""
    text = "İİİ İade talebi: kargo gecikti ve paket hasarlı."
    line = kwic_line(text, ANALYZER, "kargo")
    assert line is not None and line[1] == "kargo"
    assert line[0].endswith("İİİ İade talebi: ") and line[2].startswith(" gecikti")


def test_a_phrase_is_only_two_words_side_by_side() -> None:
    """Regression (issue 12): kwic matched "days row" across "in a"; phrases are adjacent kept words only."""
    analyzer = Analyzer(stop_words=load_stop_words(None), stem=False)
    assert kwic_line("three days in a row", analyzer, "days row") is None
    line = kwic_line("three days in a row, then days row again", analyzer, "days row")
    assert line is not None and line[1] == "days row"
    segments = mark_terms("days in a row", analyzer.spans("days in a row"), ["days row"])
    assert not any(segment.marked for segment in segments)


def test_combining_marks_stay_in_their_word() -> None:
    decomposed = "cafe\u0301 au lait"
    assert ANALYZER.spans(decomposed)[0] == (0, 5, "cafe\u0301")


def _columns(text: str) -> int:
    # Unicode Standard Annex #11: East Asian Wide and Fullwidth characters take two columns
    import unicodedata

    return sum(0 if unicodedata.combining(c) else 2 if unicodedata.east_asian_width(c) in "WF" else 1 for c in text)


@settings(max_examples=100, deadline=None)
@given(texts)
def test_kwic_contexts_fill_the_same_columns_in_every_script(text: str) -> None:
    for _, _, term in ANALYZER.spans(text):
        if term:
            line = kwic_line(text, ANALYZER, term, width=20)
            assert line is not None
            assert _columns(line[0]) == 20 and _columns(line[2]) == 20
