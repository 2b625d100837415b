"""How language shares read on the cluster cards and in the run's progress line.

"und" is ISO 639-2's code for "undetermined" (ISO 639-2, special codes); a share that would print as "0%"
is counted, not named (common practice: a rounded 0% reads as absent).
"""

from __future__ import annotations

import numpy as np

from pilewise.pipeline import _languages_line
from pilewise.vectors.languages import shares, shares_line


def test_undetermined_is_spelled_out_and_tiny_shares_counted() -> None:
    found = (("en", 0.5912), ("und", 0.4060), ("la", 0.0014), ("fr", 0.0009), ("es", 0.0005))
    assert shares_line(found) == "en 59%, undetermined 41%, 3 others under 1%"


def test_one_other_language_reads_singular() -> None:
    assert shares_line((("de", 0.996), ("en", 0.004))) == "de 100%, 1 other under 1%"


def test_more_languages_than_named_are_counted_without_the_under_note() -> None:
    found = tuple((code, 0.1) for code in ("de", "en", "es", "fr", "it", "nl", "pt", "sv", "da", "fi"))
    assert shares_line(found, most=6) == "de 10%, en 10%, es 10%, fr 10%, it 10%, nl 10%, 4 others"


def test_progress_line_uses_the_same_wording() -> None:
    codes = ["en"] * 590 + ["und"] * 405 + ["la"] * 5
    line = _languages_line(codes, np.ones(len(codes)), forced=False)
    assert line == "languages (detected per text): en 59%, undetermined 40%, 1 other under 1%"
    assert shares(codes, np.ones(len(codes)))[2] == ("la", 0.005)  # prints as "0%" (Python rounds half to even)
