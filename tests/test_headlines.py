"""Weak headlines seen on real collections (issue 11, item "headlines") and the rules that pass them over.

Every title and sentence below is written after one seen on a run over the two newsgroups, the Reuters sample,
FOLDOC (shared/CORPORA.md), this machine's licence files (/usr/share/doc/*/copyright, /usr/share/common-licenses)
or manual pages; names and numbers are changed.
"""

from __future__ import annotations

import os
import subprocess
import sys

import pytest

from pilewise.describe.headlines import (
    choose_headlines,
    first_lines_wrapped,
    runs_on,
    sentence_problem,
    sentences,
    title_problem,
)
from pilewise.ingest.redact import redact
from pilewise.model import TermScore
from pilewise.vectors.text import Analyzer, load_stop_words

ANALYZER = Analyzer(stop_words=load_stop_words(None), stem=False)


def _keys(text: str) -> list[str]:
    return [key for _, _, key in ANALYZER.spans(text)]


def _term(word: str, share_in: float) -> TermScore:
    return TermScore(word, word, 1.0, 0, 0, share_in, 0.0)


@pytest.mark.parametrize(("title", "problem"), [
    # newsgroup bodies begin with who is quoted (Usenet quoting convention, RFC 1036 era practice)
    ("In article <[e-mail]>, [e-mail] (Ann Example) writes:", "a quotation's attribution line"),
    ("[e-mail] (Bo Example) wrote:", "a quotation's attribution line"),
    # Debian copyright files: the first line of a sentence that goes on in the next line
    ("This package was debianized by Cy Example <[e-mail]> on", "a line cut before its sentence ends"),
    ("This is the prepackaged version of the assembler,", "a line cut before its sentence ends"),
    ("This work was packaged for Debian by:", "a line cut before its sentence ends"),
    ("Gamma ray bursters and their distance", None),
])
def test_attribution_lines_and_cut_lines_are_not_titles(title: str, problem: str | None) -> None:
    assert title_problem(title) == problem


@pytest.mark.parametrize(("text", "expected"), [
    # Reuters bodies are wrapped wire text: the first line's sentence continues in lower case or a number
    ("Acme Plc said it has purchased\n80 pct of the share capital of Example Inc.", True),
    ("Saudi crude oil output last month fell\nto an average of 3.5 mln barrels.", True),
    # a line as long as running text (6 words or more) followed by more text
    ("Deputy oil ministers from six Gulf\nArab states will meet in Bahrain today.", True),
    # a short line before a capitalized one is a title; so is a line before a blank line (common practice)
    ("Meeting notes\nWe met on Tuesday and agreed on the plan.", False),
    ("Deputy oil ministers from six Gulf states\n\nThey will meet in Bahrain today.", False),
    ("The meeting ended.\nanother line", False),
    # a Debian package description: a synopsis line, then lines that begin with a space (Debian Policy 5.6.13)
    ("shared library for ATM (Asynchronous Transfer Mode)\n Shared libraries needed by ATM programs.", False),
    # the same indentation on both lines is still wrapped text
    ("  Deputy oil ministers from six Gulf\n  Arab states will meet in Bahrain today.", True),
])
def test_a_first_line_runs_on_when_its_sentence_continues(text: str, expected: bool) -> None:
    assert runs_on(text, text.split("\n", 1)[0]) is expected


def test_a_wrapped_first_line_gives_way_to_its_whole_sentence() -> None:
    # The title is the wire text's first line; the headline is the complete sentence it begins.
    titles = ["Acme Plc said it has purchased"]
    texts = ["Acme Plc said it has purchased\n80 pct of the share capital of Example Insurance, a broker."]
    [headline] = choose_headlines([[0]], [[_term("purchased", 0.6), _term("broker", 0.5)]],
                                  titles.__getitem__, texts.__getitem__, _keys)
    assert headline.source == "sentence"
    assert headline.text == "Acme Plc said it has purchased 80 pct of the share capital of Example Insurance, a broker."


def test_when_most_first_lines_run_on_every_first_line_followed_by_text_is_wrapped() -> None:
    # "Four Seasons Example of Santa" / "Barbara ..." alone looks like a title (short, next line capitalized);
    # beside three wire texts whose first lines plainly run on, it is one of them.
    texts = ["Four Seasons Example of Santa\nBarbara said it agreed to buy the hotel for undisclosed terms.",
             "Acme said it has purchased\n80 pct of Example.", "Oil output fell\nto 3 mln barrels.",
             "Prices rose\nsharply on Monday."]
    titles = [t.split("\n", 1)[0] for t in texts]
    assert not runs_on(texts[0], titles[0])
    assert first_lines_wrapped([[0, 1], [2, 3]], titles.__getitem__, texts.__getitem__)
    assert runs_on(texts[0], titles[0], wrapped=True)
    [headline] = choose_headlines([[0]], [[_term("hotel", 0.6)]], titles.__getitem__, texts.__getitem__, _keys)
    assert headline.text.startswith("Barbara said")  # alone, the short line reads as a title and is cut off
    first, _ = choose_headlines([[0, 1], [2, 3]], [[_term("hotel", 0.6)], [_term("oil", 0.6)]],
                                titles.__getitem__, texts.__getitem__, _keys)
    assert first.text == "Four Seasons Example of Santa Barbara said it agreed to buy the hotel for undisclosed terms."


@pytest.mark.parametrize(("sentence", "problem"), [
    # list introductions and list items of manual pages
    ("To avoid prompting when this flag is omitted, you can set the compute/region property:",
     "a fragment: it ends in a comma, semicolon or colon"),
    ("provide the argument api_config on the command line with a fully specified name;",
     "a fragment: it ends in a comma, semicolon or colon"),
    # copyright notices and credit lists of licence files
    ("Copyright Ann Example Copyright Bo Example", "a copyright or credit line"),
    ("Example 2016 Cy Example <[e-mail]> 2011-2014 The Example OS authors", "a copyright or credit line"),
    ("No patent license is granted to make, use or sell embodiments of any patent claims.", None),
])
def test_fragments_and_credit_lines_are_not_sentences_for_a_headline(sentence: str, problem: str | None) -> None:
    assert sentence_problem(sentence) == problem


def test_a_lone_dot_line_ends_a_paragraph() -> None:
    # Debian Policy §5.6.13 (control-file syntax, also used by machine-readable copyright files): a line
    # holding " ." is an empty line inside a field; it must not glue two paragraphs into ". ." sentences.
    text = " This program is free software under the Artistic License.\n .\n On Debian systems the text is here."
    assert sentences(text) == ["This program is free software under the Artistic License.",
                               "On Debian systems the text is here."]


def test_a_footer_many_members_share_or_a_web_address_comes_after_a_sentence_of_its_own() -> None:
    # Manual pages: the project footer is in every member and carries the cluster's terms ("help", "options")
    # more than any one page's own sentence; it still comes last, and so does a sentence with a web address.
    footer = "Full documentation for these options and more help is online at the project site."
    texts = [f"Print the checksum of each file and exit.\n\n{footer}",
             f"Report any options and help translation problems to the team.\n\n{footer}",
             f"Display help about the options of this tool.\n\n{footer}",
             "The options and help are at https://example.org/help for every tool."]
    titles = ["cksum(1)", "(untitled)", "(untitled)", "(untitled)"]
    terms = [[_term("options", 0.9), _term("help", 0.8)]]
    [headline] = choose_headlines([[0, 1, 2, 3]], terms, titles.__getitem__, texts.__getitem__, _keys)
    assert headline.text != footer and "https://" not in headline.text
    assert headline.text in ("Report any options and help translation problems to the team.",
                             "Display help about the options of this tool.")
    # with nothing else to say, the shared sentence is still better than the bare terms
    [alone] = choose_headlines([[0, 1, 2]], terms, titles.__getitem__, ([footer] * 3).__getitem__, _keys)
    assert alone.text == footer


def test_a_title_with_a_redacted_address_is_still_recognised_as_the_first_line() -> None:
    # Regression: titles are kept in display form ("<[e-mail]>"), texts with placeholders, so the first line
    # of a licence file holding an e-mail address never matched its title and a cut line was kept as a title.
    raw = "This package was debianized by Ann Example <ann@example.org> and is now\nmaintained by Bo Example."
    text = redact(raw).text
    assert "[e-mail]" not in text  # the placeholder form, as documents keep their texts
    title = "This package was debianized by Ann Example <[e-mail]> and is now"
    assert runs_on(text, title)


def test_list_items_of_a_change_log_are_sentences_of_their_own() -> None:
    # Debian changelog entries (Debian Policy 4.4): a "[ Name ]" line, then "  * " items, each wrapped over
    # lines; an item's continuation lines belong to it, the next item starts a new sentence (common practice)
    text = ("  [ Alex Packager ]\n  * Fix a crash when the cache is empty, which happened\n    on first start.\n"
            "  * Update the standards version\n  - drop an old patch\n  2) build with the new compiler")
    assert sentences(text) == ["[ Alex Packager ]",
                               "Fix a crash when the cache is empty, which happened on first start.",
                               "Update the standards version", "drop an old patch", "2) build with the new compiler"]
    # a wrapped line that merely starts with a number is not a list item
    assert sentences("Output rose\n1.5 pct in May.") == ["Output rose 1.5 pct in May."]


def test_carried_weight_does_not_depend_on_the_string_hash_seed() -> None:
    """The weights of a text's terms add up to the same float whatever Python's hash seed (which orders a set of
    strings). With these weights a plain sum gives 1.0 or 0.0 by the order it meets them; `math.fsum` gives the
    correctly rounded 1.0 in every order. Before, a change-log mailbox's cluster got another headline under one
    hash seed of four."""
    code = ("from pilewise.describe.headlines import carried_weight;"
            "print(carried_weight('alpha beta gamma', {'alpha': 1e16, 'beta': 1.0, 'gamma': -1e16}, str.split))")
    found = {subprocess.run([sys.executable, "-c", code], env={**os.environ, "PYTHONHASHSEED": str(seed)},
                            capture_output=True, text=True, check=True).stdout.strip() for seed in range(8)}
    assert found == {"1.0"}
