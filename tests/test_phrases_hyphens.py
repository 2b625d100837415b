"""Phrases are words side by side in the text; words hyphenated across line breaks and terminal overstrike are
cleaned at reading (issue 11)."""

from __future__ import annotations

import random
import re
import shutil
import subprocess
from pathlib import Path

import pytest
from hypothesis import given
from hypothesis import strategies as st

from helpers import invoke, read, read_json
from pilewise.ingest.plaintext import clean_text
from pilewise.vectors.text import TOKEN_PATTERN, Analyzer, load_stop_words
from pilewise.vectors.tfidf import VectorSettings, count_terms, vectorize


def _analyzer(stem: bool = False) -> Analyzer:
    return Analyzer(stop_words=load_stop_words(None), stem=stem)


def test_stop_words_between_two_words_make_no_phrase() -> None:
    analyzer = _analyzer()
    assert analyzer.phrases("five days in a row") == []
    assert analyzer.phrases("he came to the door") == []
    assert analyzer.phrases("the password reset link") == ["password reset", "reset link"]


def test_punctuation_numbers_and_blank_lines_break_phrases() -> None:
    analyzer = _analyzer()
    assert analyzer.phrases('courier, "delivery late"') == ["delivery late"]
    assert analyzer.phrases("order 42 parcel") == []
    assert analyzer.phrases("parcel\nlabel") == ["parcel label"]  # one line break is still side by side
    assert analyzer.phrases("parcel\n\nlabel") == []  # a blank line ends a paragraph


def _independent_phrases(analyzer: Analyzer, text: str) -> list[str]:
    """Phrases found from the token spans: two kept tokens with only white space (one line break at
    most) between them; an independent reading of the rule in docs/method.md."""
    out = []
    previous: tuple[int, str] | None = None
    for m in re.finditer(TOKEN_PATTERN, text.lower()):
        term = analyzer.normalize(m.group())
        gap = text[previous[0] : m.start()] if previous else ""
        if term is not None and previous is not None and not gap.strip() and gap.count("\n") <= 1:
            out.append(f"{previous[1]} {term}")
        previous = (m.end(), term) if term is not None else None
    return out


@pytest.mark.parametrize("stem", [False, True])
def test_counted_pairs_are_the_phrases_of_each_text(stem: bool) -> None:
    rng = random.Random(11)
    vocabulary = ["parcel", "courier", "the", "in", "a", "late", "box", ",", ".", "42", "\n", "\n\n", "refund's"]
    texts = [" ".join(rng.choice(vocabulary) for _ in range(rng.randint(0, 15))) for _ in range(200)]
    analyzer = _analyzer(stem)
    _, terms, pairs, pair_words = count_terms(texts, analyzer)
    for i, text in enumerate(texts):
        expected = _independent_phrases(analyzer, text)
        assert sorted(analyzer.phrases(text)) == sorted(expected), text
        row = pairs.getrow(i)
        got = sorted(f"{terms[pair_words[j][0]]} {terms[pair_words[j][1]]}" for j, c in
                     zip(row.indices, row.data, strict=True) for _ in range(int(c)))
        assert got == sorted(expected), text


def test_vectorized_terms_hold_no_phrase_across_a_stop_word() -> None:
    extra = ["parcel", "refund", "invoice", "courier", "label"]
    texts = [f"Customer {i} won five days in a row and came to the door {extra[i % 5]}" for i in range(30)]
    result = vectorize(texts, _analyzer(), VectorSettings(min_df=1, max_df=1.0))
    assert "days row" not in result.terms and "came door" not in result.terms
    assert "customer won" not in result.terms  # a number stood between them


@pytest.mark.parametrize(
    ("text", "cleaned"),
    [
        ("an excep-\n       tion here", "an exception\n       here"),
        ("a well-\nknown fact; it is well-known", "a well-known\nfact; it is well-known"),
        ("state-of-\nthe-art is", "state-of-the-art\nis"),
        ("Jean-\nPierre said", "Jean-Pierre\nsaid"),
        ("dif\u2010\n   ferent things", "different\n   things"),  # groff's U+2010 at a line end
        ("extra\u2010cmd", "extra-cmd"),
        ("end-\nword\nnext", "endword\nnext"),
        ("list:\n- item\n- item", "list:\n- item\n- item"),  # dashes of a list are not hyphenation
        ("range 10-\n20", "range 10-\n20"),
        ("well-known on one line", "well-known on one line"),
    ],
)
def test_words_hyphenated_across_line_breaks_are_joined(text: str, cleaned: str) -> None:
    assert clean_text(text) == cleaned


def test_overstrike_is_removed_as_col_b_removes_it() -> None:
    # reference: col(1) -b, the standard filter that removes backspaces (util-linux / BSD col)
    if shutil.which("col") is None:
        pytest.skip("col(1) is not installed")
    text = "N\bNA\bAM\bME\bE\n       l\bls\bs - list _\bd_\bi_\br contents\n"
    reference = subprocess.run(["col", "-b"], input=text, capture_output=True, text=True, check=True).stdout
    assert clean_text(text) == reference


def test_a_saved_manual_page_reads_clean(tmp_path: Path) -> None:
    """A page rendered by man with its formatting kept is a document, with no backspace and no broken word."""
    if shutil.which("man") is None:
        pytest.skip("man(1) is not installed")
    source = tmp_path / "demo.1"
    words = " ".join(["extraordinarily"] * 40)
    source.write_text(f'.TH DEMO 1 "2024" "demo 1.0" "User Commands"\n.SH NAME\ndemo \\- a demo\n.SH DESCRIPTION\n'
                      f"{words}\n", encoding="utf-8")
    rendered = subprocess.run(["man", "-l", "-P", "cat", str(source)], capture_output=True,
                              env={"MAN_KEEP_FORMATTING": "1", "MANWIDTH": "40", "PATH": "/usr/bin:/bin",
                                   "LANG": "C.UTF-8"}, check=False).stdout
    if b"\b" not in rendered:
        pytest.skip("man kept no overstrike here")
    folder = tmp_path / "pages"
    folder.mkdir()
    (folder / "demo.txt").write_bytes(rendered)
    docs = read(folder).documents
    assert len(docs) == 1
    assert "\b" not in docs[0].text and "NAME" in docs[0].text
    assert docs[0].title.startswith("DEMO(1)")
    assert set(re.findall(r"[^\W\d_]+", docs[0].text)) >= {"extraordinarily"}
    assert not {w for w in re.findall(r"[^\W\d_]+", docs[0].text) if "extraordinarily".startswith(w)} - {
        "extraordinarily", "a"}


def test_both_modes_count_the_joined_words(tmp_path: Path) -> None:
    """Cleaning is done by the readers, which memory and streaming mode share: neither counts a broken word."""
    folder = tmp_path / "notes"
    folder.mkdir()
    rng = random.Random(5)
    topics = [("garden", "compost soil watering mulch", "seed-\n  lings"),
              ("bicycle", "chain brakes gears pedals", "handle-\n  bars")]
    for i in range(40):
        name, words, broken = topics[i % 2]
        body = " ".join(rng.sample(words.split(), 3))
        (folder / f"{i:02d}.txt").write_text(f"Note {i} on the {name}\nabout {body} and the {broken} today\n",
                                             encoding="utf-8")
    for mode in ("memory", "stream"):
        out = tmp_path / f"site-{mode}"
        result = invoke("run", str(folder), "--k", "2", "--mode", mode, "--out", str(out), "--quiet")
        assert result.exit_code == 0, result.stderr
        clusters = read_json(out / "runs" / "k2" / "clusters.json")["clusters"]
        terms = {t["term"] for c in clusters for t in c["terms"]["chi2"] + c["terms"]["log_odds"]}
        words = {w for t in terms for w in t.split(" ")}
        assert not words & {"seed", "lings", "handle", "bars"}, (mode, terms)
        assert words >= {"seedlings", "handlebars"}, (mode, terms)


_PIECES = st.lists(st.sampled_from(["excep", "tion", "well", "known", "Jean", "-", "\u2010", "\n", "  ", "\b", "_",
                                    "N", ",", "1", " ", "\r\n", "e", "mail", "\u00ad", "\r"]), max_size=40).map("".join)


@given(_PIECES)
def test_cleaning_is_idempotent(text: str) -> None:
    """Property: cleaning a cleaned text changes nothing (so a text read twice reads the same)."""
    assert clean_text(clean_text(text)) == clean_text(text)


@given(st.text(alphabet=st.characters(blacklist_characters="-\u2010\u2011\u00ad\b")))
def test_text_without_hyphens_or_backspaces_is_left_as_it_is(text: str) -> None:
    assert clean_text(text) == text


def test_a_word_broken_over_three_lines_is_joined() -> None:
    """Regression: found by the idempotence property; one pass joined only the first break."""
    assert clean_text("excep-\nexcep-\nexcep") == "excepexcepexcep"
