"""Near-duplicate groups (shingles, MinHash, LSH) and boilerplate lines, checked against exact set computations."""

from __future__ import annotations

import math
import re

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from pilewise.ingest.dedup import (
    NEAR_DUPLICATE_THRESHOLD,
    Boilerplate,
    NearDuplicates,
    find_boilerplate,
    lsh_bands,
    minhash_signatures,
    near_duplicate_groups,
    shingle_hashes,
    strip_boilerplate,
)

# ---------------------------------------------------------------------------------------------------------------
# Independent computations, written from the definitions and not from pilewise's code.


def shingle_set(text: str) -> set[tuple[str, ...]]:
    """Word 5-shingles as in Broder (1997): lower-cased runs of \\w, digit runs masked; a short text is one shingle."""
    words = re.findall(r"\w+", text.lower())
    if len(words) < 5:
        return {("<whole>", *words)}
    masked = [re.sub(r"\d+", "0", word) for word in words]
    return {tuple(masked[i : i + 5]) for i in range(len(masked) - 4)}


def resemblance(a: str, b: str) -> float:
    """Jaccard similarity of the shingle sets (Broder 1997, 'resemblance')."""
    sa, sb = shingle_set(a), shingle_set(b)
    return len(sa & sb) / len(sa | sb)


def random_words(rng: np.random.Generator, count: int) -> list[str]:
    """`count` distinct invented words of letters only, so that no shingle repeats within a text."""
    letters = np.array(list("abcdefghijklmnopqrstuvwxyz"))
    words: dict[str, None] = {}
    while len(words) < count:
        words["".join(rng.choice(letters, 8))] = None
    return list(words)


def pair_with_changes(rng: np.random.Generator, n_words: int, changes: int) -> tuple[str, str]:
    """A text and a copy with `changes` words replaced, at least 5 words apart (each replaces 5 shingles)."""
    words = random_words(rng, n_words + changes)
    original, fresh = words[:n_words], words[n_words:]
    copy = list(original)
    step = n_words // max(changes, 1)
    for c in range(changes):
        copy[c * step + step // 2] = fresh[c]
    return " ".join(original), " ".join(copy)


def same_group(result: NearDuplicates, a: int, b: int) -> bool:
    return bool(result.group_of[a] == result.group_of[b])


# ---------------------------------------------------------------------------------------------------------------
# Near-duplicate groups

ORDER_TEMPLATE = (
    "Hello {name},\n\nThank you for your order #{number} placed on {date}. We have received your payment of "
    "${amount} and your items will ship within 2 business days. You can follow your parcel on our website with "
    "the tracking number {tracking}. If you have any questions about your order, reply to this e-mail or call "
    "our support line, open Monday to Friday from 9:00 to 17:00.\n\nKind regards,\nThe Example Shop team"
)
RESET_TEMPLATE = (
    "Hi {name}, someone asked to reset the password of your account on {date}. If it was you, open the link "
    "below within 24 hours; if it was not, ignore this message and your password stays as it is. Code: {number}"
)
TICKETS = [
    "My printer on the third floor jams every morning when I print double-sided reports for the finance team.",
    "The VPN client disconnects every ten minutes since the update last week, and I lose my remote desktop.",
    "Could you please add me to the marketing shared drive? My manager approved it yesterday by phone.",
    "I was charged twice for the same subscription this month; please refund one of the two payments.",
    "The laptop battery swells and the touchpad no longer clicks, I think it needs to be replaced soon.",
    "Our team calendar shows meetings an hour late since the clocks changed, for everyone in the Berlin office.",
    "I cannot log in to the expense tool: it says my account is locked after three wrong passwords.",
    "Please cancel my order, I bought the wrong size of running shoes and would like a different model.",
]
LONG_TICKET = (
    "Since Monday the shared printer on the third floor jams every morning when the finance team prints the "
    "double-sided monthly reports. We cleared the paper path twice, replaced the toner and restarted the "
    "machine, but the jam comes back after about twenty pages and the display shows a paper feed error. The "
    "reports are due to the auditors on Friday, so we would be grateful if a technician could come by this "
    "week, ideally before noon, when the room is free. Please call me on my desk phone if you need more details."
)
NAMES = ["Alice", "Bob", "Chidi", "Dolores", "Eun-ji", "Farid"]


def order_mail(i: int, name: str) -> str:
    return ORDER_TEMPLATE.format(
        name=name, number=40_000 + 137 * i, date=f"2024-0{1 + i % 9}-{10 + i}", amount=f"{19 + i}.99",
        tracking=f"ZX{9_000_000 + 7_919 * i}",
    )


def test_templated_notifications_are_grouped_and_unrelated_texts_are_not() -> None:
    # Common practice for near-duplicate detection (Broder 1997): copies of a template that differ in the
    # customer's name, order number, date and amount are near-duplicates; independent texts are not.
    orders = [order_mail(i, name) for i, name in enumerate(NAMES)]
    resets = [RESET_TEMPLATE.format(name=name, date=f"3 May 202{i}", number=100_000 + 31 * i)
              for i, name in enumerate(NAMES[:3])]
    forwarded = "---------- Forwarded message ---------\nFrom: Alice <alice@example.org>\nSubject: Fwd: printer\n\n"
    texts = [*TICKETS, *orders, *resets, LONG_TICKET, forwarded + LONG_TICKET]
    for a in orders[1:]:
        assert resemblance(orders[0], a) >= 0.8  # the premise, computed independently
    assert resemblance(LONG_TICKET, texts[-1]) >= 0.8
    assert resemblance(TICKETS[0], forwarded + TICKETS[0]) < 0.8  # a short one forwarded is not (see docs)

    result = near_duplicate_groups(texts)

    n_tickets = len(TICKETS)
    order_ids = range(n_tickets, n_tickets + len(orders))
    reset_ids = range(order_ids.stop, order_ids.stop + len(resets))
    assert len({int(result.group_of[i]) for i in order_ids}) == 1
    assert len({int(result.group_of[i]) for i in reset_ids}) == 1
    assert same_group(result, len(texts) - 2, len(texts) - 1)  # a forwarded copy
    assert result.group_of[n_tickets] != result.group_of[reset_ids.start]
    for i in range(n_tickets):  # every other ticket stands alone
        assert result.sizes[result.group_of[i]] == 1
    assert result.sizes.sum() == len(texts)
    assert result.threshold == NEAR_DUPLICATE_THRESHOLD


@pytest.mark.parametrize("seed", [0, 1, 2, 3, 4])
def test_pairs_with_clear_margins_are_decided_as_their_exact_resemblance(seed: int) -> None:
    # Pairs far from the threshold (0.95 and below 0.35 against 0.8), so that MinHash's estimation error
    # (standard error 0.02-0.04 at 128 functions) cannot change the decision for any seed.
    rng = np.random.default_rng(100 + seed)
    pairs = [pair_with_changes(rng, 200, 1) for _ in range(5)] + [pair_with_changes(rng, 200, 20) for _ in range(5)]
    texts = [text for pair in pairs for text in pair]
    result = near_duplicate_groups(texts, seed=seed)
    for p, (a, b) in enumerate(pairs):
        exact = resemblance(a, b)
        assert exact >= 0.95 or exact <= 0.35
        assert same_group(result, 2 * p, 2 * p + 1) == (exact >= 0.8)
    assert result.representative.size == 15


def test_pair_at_the_threshold_is_grouped_and_one_just_below_is_not() -> None:
    # The decision is the exact resemblance >= threshold (MinHash only proposes candidates): 94 words with
    # two changes give (90 - 10) / (90 + 10) = 0.800 exactly; 93 words give 79 / 99 = 0.798.
    rng = np.random.default_rng(7)
    at = [pair_with_changes(rng, 94, 2) for _ in range(4)]
    below = [pair_with_changes(rng, 93, 2) for _ in range(4)]
    texts = [text for pair in at + below for text in pair]
    result = near_duplicate_groups(texts)
    for p, (a, b) in enumerate(at + below):
        exact = resemblance(a, b)
        assert exact == pytest.approx(0.8 if p < len(at) else 79 / 99)
        assert same_group(result, 2 * p, 2 * p + 1) == (exact >= 0.8)


@pytest.mark.parametrize(("n_words", "changes"), [(200, 1), (200, 4), (200, 10), (200, 20)])
def test_minhash_estimate_error_matches_the_binomial_standard_error(n_words: int, changes: int) -> None:
    # The fraction of agreeing MinHash positions is an unbiased estimate of the resemblance J with
    # standard error sqrt(J (1 - J) / k) for k functions (Broder 1997; Leskovec, Rajaraman & Ullman,
    # Mining of Massive Datasets, §3.3). Over 200 independent pairs and seeds, the standardized errors
    # should have mean about 0 (standard error of the mean 0.07) and standard deviation about 1.
    k = 128
    rng = np.random.default_rng(n_words + changes)
    z = []
    for trial in range(200):
        a, b = pair_with_changes(rng, n_words, changes)
        exact = resemblance(a, b)
        hashes, offsets = shingle_hashes([a, b])
        signatures = minhash_signatures(hashes, offsets, num_perm=k, seed=trial)
        estimate = float(np.mean(signatures[0] == signatures[1]))
        z.append((estimate - exact) / math.sqrt(exact * (1 - exact) / k))
    z_arr = np.asarray(z)
    assert abs(z_arr.mean()) < 0.3
    assert 0.8 < z_arr.std() < 1.2
    assert np.mean(np.abs(z_arr) > 3) < 0.02


def test_shingle_hashes_are_the_shingle_sets_without_collisions() -> None:
    texts = [*TICKETS, order_mail(0, "Alice"), "Short one!", "", "a b c d e a b c d e"]
    hashes, offsets = shingle_hashes(texts)
    assert offsets.shape == (len(texts) + 1,) and offsets[0] == 0 and offsets[-1] == hashes.size
    for i, text in enumerate(texts):
        assert np.unique(hashes[offsets[i] : offsets[i + 1]]).size == len(shingle_set(text))
    # Hashes depend on the text only, not on its neighbours or position.
    again, again_offsets = shingle_hashes(texts[::-1])
    assert np.array_equal(again[again_offsets[-2] : again_offsets[-1]], hashes[offsets[0] : offsets[1]])


def test_same_seed_gives_the_same_groups() -> None:
    texts = [*TICKETS, *(order_mail(i, name) for i, name in enumerate(NAMES))]
    first = near_duplicate_groups(texts, seed=3)
    second = near_duplicate_groups(list(texts), seed=3)
    for field in ("group_of", "representative", "sizes"):
        assert np.array_equal(getattr(first, field), getattr(second, field))
    # Margins are clear here, so another seed finds the same groups too.
    assert np.array_equal(near_duplicate_groups(texts, seed=4).group_of, first.group_of)


def test_short_texts_group_only_with_the_same_words() -> None:
    # A text of fewer than 5 words is one shingle: its whole word sequence, digits kept.
    texts = ["hello?", "help!", "Thanks!", "thanks", "error 404", "error 500", "", "!!!", "???", "Hello",
             "hello there, how are you today my friend"]
    result = near_duplicate_groups(texts)
    assert not same_group(result, 0, 1)  # "hello?" and "help!"
    assert same_group(result, 2, 3)  # "Thanks!" and "thanks": same words up to case and punctuation
    assert not same_group(result, 4, 5)  # in a short text the number is the message
    assert not same_group(result, 7, 8)  # no words at all: compared by their characters
    assert same_group(result, 0, 9)  # "hello?" and "Hello"
    assert result.sizes[result.group_of[10]] == 1  # a long text starting with a short one's word
    assert result.sizes[result.group_of[6]] == 1


def test_groups_are_numbered_by_their_first_text() -> None:
    texts = ["alone one", order_mail(0, "Alice"), "alone two", order_mail(1, "Bob"), order_mail(2, "Chidi")]
    result = near_duplicate_groups(texts)
    assert result.group_of.tolist() == [0, 1, 2, 1, 1]
    assert result.representative.tolist() == [0, 1, 2]
    assert result.sizes.tolist() == [1, 3, 1]
    assert result.group_of.dtype == np.int64


def test_a_large_family_of_templated_texts_is_one_group() -> None:
    """Regression guard: a bucket of hundreds of texts is checked in linear, not quadratic, pairs."""
    texts = [order_mail(i, f"Customer{chr(97 + i % 26)}{chr(97 + i // 26 % 26)}") for i in range(400)]
    result = near_duplicate_groups([*TICKETS, *texts])
    assert result.sizes.tolist() == [1] * len(TICKETS) + [400]


def test_no_texts_give_no_groups() -> None:
    result = near_duplicate_groups([])
    assert result.group_of.size == result.representative.size == result.sizes.size == 0


def test_bad_options_are_all_named() -> None:
    with pytest.raises(ValueError, match=re.escape(
        "threshold=1.5 must be in (0, 1]; num_perm=0 must be a positive integer; seed=-1 must be a non-negative integer"
    )):
        near_duplicate_groups(["x"], threshold=1.5, num_perm=0, seed=-1)


def test_bands_catch_a_pair_at_the_threshold_with_high_probability() -> None:
    # Leskovec, Rajaraman & Ullman, Mining of Massive Datasets, §3.4.2: P(candidate) = 1 - (1 - s^r)^b.
    bands, rows = lsh_bands(128, 0.8)
    assert (bands, rows) == (21, 6)
    assert 1 - (1 - 0.8**rows) ** bands > 0.995
    assert 1 - (1 - 0.8 ** (rows + 1)) ** (128 // (rows + 1)) < 0.995  # and r is the largest such


# ---------------------------------------------------------------------------------------------------------------
# Boilerplate lines


def normalized(line: str) -> str:
    return " ".join(line.split()).lower()


FOOTER = "This e-mail and any attachment are confidential and meant for the addressee only."
SIGNATURE = "Jane Doe | Support Team Lead | Example Shop"


def test_boilerplate_is_found_counted_and_stripped() -> None:
    # Common practice (e.g. CCNet, Wenzek et al. 2020): lines repeated verbatim across many documents are
    # templates. 40 texts: the footer in all, the signature in 10 (with varied case and spacing), a long line
    # in 3 (below min_docs=5), "Thanks," in all (shorter than min_chars=20).
    texts = []
    for i in range(40):
        lines = [f"Ticket {i}: the parcel number {1000 + i} has not arrived yet.", "Thanks,"]
        if i < 10:
            lines.append(SIGNATURE if i % 2 else "  jane doe |  SUPPORT team lead | Example Shop ")
        if i < 3:
            lines.append("Sent from the customer portal of the regional office")
        lines.append(FOOTER)
        texts.append("\n".join(lines))
    boilerplate = find_boilerplate(texts)
    assert boilerplate.lines == ((normalized(FOOTER), 40), (normalized(SIGNATURE), 10))
    assert boilerplate.min_share == 0.05

    stripped = strip_boilerplate(texts[0], boilerplate)
    assert stripped == "Ticket 0: the parcel number 1000 has not arrived yet.\nThanks,\n" \
                       "Sent from the customer portal of the regional office\n"
    expected_last = "Ticket 39: the parcel number 1039 has not arrived yet.\nThanks,\n"
    assert strip_boilerplate(texts[39], boilerplate) == expected_last


def test_a_line_counts_once_per_document() -> None:
    texts = [f"{FOOTER}\n{FOOTER}\nbody {i}\n{FOOTER}" for i in range(5)] + ["other"] * 5
    assert find_boilerplate(texts).lines == ((normalized(FOOTER), 5),)


@pytest.mark.parametrize(
    ("holding", "total", "min_share", "found"),
    [(10, 200, 0.05, True), (9, 200, 0.05, False), (7, 100, 0.07, True), (6, 100, 0.07, False), (4, 20, 0.05, False)],
)
def test_a_line_is_boilerplate_from_min_share_and_min_docs(holding: int, total: int, min_share: float,
                                                           found: bool) -> None:
    """Regression: 0.07 * 100 is 7.000000000000001 in floating point and must still ask for 7 documents."""
    texts = [f"{FOOTER}\nbody" if i < holding else "body" for i in range(total)]
    assert bool(find_boilerplate(texts, min_share=min_share).lines) == found


def test_short_frequent_lines_are_never_boilerplate() -> None:
    texts = [f"Hi team,\nThanks,\nbody number {i}" for i in range(50)]
    assert find_boilerplate(texts).lines == ()
    assert find_boilerplate(texts, min_chars=8).lines == (("hi team,", 50),)


def test_stripping_keeps_line_breaks_and_other_lines() -> None:
    """Regression: a kept line ending in a lone CR must not merge with a following empty LF line."""
    boilerplate = Boilerplate(((normalized(FOOTER), 9),), 0.05)
    text = f"first\r{FOOTER}\n\nlast"
    assert strip_boilerplate(text, boilerplate).splitlines() == ["first", "", "last"]
    assert strip_boilerplate("no footer here\r\n", boilerplate) == "no footer here\r\n"
    assert strip_boilerplate(f"x\r\n{FOOTER.upper()}\r\ny", boilerplate) == "x\r\ny"


def test_bad_boilerplate_options_are_all_named() -> None:
    with pytest.raises(ValueError, match=re.escape(
        "min_share=0 must be in (0, 1]; min_docs=0 must be at least 1; min_chars=0 must be at least 1"
    )):
        find_boilerplate(["x"], min_share=0, min_docs=0, min_chars=0)


LINE_BREAKS = ["\n", "\r\n", "\r", "\x0b", "\x1c", "\u2028"]
repeated_lines = st.sampled_from(
    [FOOTER, FOOTER.upper(), f"  {FOOTER}  ", SIGNATURE, "Thanks,", "", "short but common"]
)
free_lines = st.text(alphabet=st.sampled_from("abcXYZ \t.,!"), max_size=30)
texts_strategy = st.lists(
    st.lists(st.tuples(st.one_of(repeated_lines, free_lines), st.sampled_from(LINE_BREAKS)), max_size=8).map(
        lambda pairs: "".join(line + end for line, end in pairs)
    ),
    max_size=12,
)


@settings(max_examples=200, deadline=None)
@given(texts=texts_strategy, min_docs=st.integers(1, 4), min_chars=st.integers(1, 25))
def test_strip_removes_only_reported_lines_and_counts_are_exact(texts: list[str], min_docs: int,
                                                                 min_chars: int) -> None:
    boilerplate = find_boilerplate(texts, min_share=0.2, min_docs=min_docs, min_chars=min_chars)
    reported = {line for line, _ in boilerplate.lines}
    for text in texts:
        # only reported lines go (the ones most of a text's content may stay: docs/method.md), the rest stay
        # in order, and a text is never emptied
        result = strip_boilerplate(text, boilerplate).splitlines()
        lines = iter(text.splitlines())
        assert all(any(line == kept for line in lines) for kept in result)  # a subsequence of the lines
        assert [line for line in result if normalized(line) not in reported] == \
               [line for line in text.splitlines() if normalized(line) not in reported]
        assert bool("".join(result).strip()) == bool(text.strip())
    # Counts recomputed from the definition: documents holding the normalized line.
    holding: dict[str, int] = {}
    for text in texts:
        for line in {normalized(line) for line in text.splitlines()}:
            holding[line] = holding.get(line, 0) + 1
    needed = max(min_docs, math.ceil(0.2 * len(texts) - 1e-9))
    expected = {line: count for line, count in holding.items() if len(line) >= min_chars and count >= needed}
    assert dict(boilerplate.lines) == expected
    counts = [count for _, count in boilerplate.lines]
    assert counts == sorted(counts, reverse=True)
