"""Redaction of personal data: published check values, patterns kept and left, and property tests."""

from __future__ import annotations

import dataclasses

import pytest
from hypothesis import given
from hypothesis import strategies as st

from pilewise.ingest.redact import KINDS, LABELS, PLACEHOLDERS, Redaction, display_text, iban_valid, luhn_valid, redact
from pilewise.vectors.text import PLACEHOLDER_PREFIX, Analyzer

analyzer = Analyzer(stop_words=frozenset(), stem=False)


def redacted(text: str) -> str:
    return redact(text).text


# --- Luhn (ISO/IEC 7812-1, Annex B) ---------------------------------------------------------------


def test_luhn_worked_example() -> None:
    # The worked example of the Luhn algorithm, 7992739871 with check digit 3 (Wikipedia, "Luhn
    # algorithm", and most references quoting ISO/IEC 7812-1 Annex B; from memory).
    assert luhn_valid("79927398713")
    assert not any(luhn_valid(f"7992739871{d}") for d in "012456789")


@pytest.mark.parametrize(
    "number",
    [
        "4111111111111111",  # Visa test number (payment processors' test-card lists, e.g. Stripe, PayPal; from memory)
        "5555555555554444",  # Mastercard test number (Stripe's test cards; from memory)
        "378282246310005",  # American Express test number (Stripe's and PayPal's test cards; from memory)
        "6011111111111117",  # Discover test number (Stripe's test cards; from memory)
        "3530111333300000",  # JCB test number (PayPal's test cards; from memory)
        "30569309025904",  # Diners Club test number (PayPal's test cards; from memory)
    ],
)
def test_luhn_accepts_published_test_card_numbers(number: str) -> None:
    assert luhn_valid(number)
    last = int(number[-1])
    assert not luhn_valid(number[:-1] + str((last + 1) % 10))  # any other check digit fails


@pytest.mark.parametrize("bad", ["", "4111 1111 1111 1111", "4111-1111", "abc", "١٢٣"])
def test_luhn_rejects_anything_but_ascii_digits(bad: str) -> None:
    assert not luhn_valid(bad)


def test_card_numbers_are_redacted_only_when_they_pass_luhn() -> None:
    text = "Visa 4111 1111 1111 1111, MC 5555-5555-5555-4444, Amex 3782 822463 10005, plain 6011111111111117."
    result = redact(text)
    assert result.text == "Visa xredactedcard, MC xredactedcard, Amex xredactedcard, plain xredactedcard."
    assert result.counts == (("card", 4),)
    for failing in ["4111 1111 1111 1112", "5555555555554445", "6011 1111 1111 1118"]:
        assert redacted(f"card {failing} please") == f"card {failing} please"


def test_card_inside_a_longer_run_of_groups_is_found_by_whole_groups() -> None:
    # the expiry year after the number does not hide it; a 20-digit run without groups is no card
    assert redacted("4111 1111 1111 1111 2026") == "xredactedcard 2026"
    assert redacted("4111 1111 1111 1111 5555 5555 5555 4444") == "xredactedcard xredactedcard"
    assert redacted("id 41111111111111110000") == "id 41111111111111110000"


@pytest.mark.parametrize("first", "0789")
def test_luhn_valid_numbers_of_other_industries_are_not_cards(first: str) -> None:
    # Major industry identifiers 0 and 7-9 (ISO/IEC 7812-1) are not payment cards; the same digits after a 4
    # (banking) are one.
    body = first + "12345678901234"
    check = next(d for d in "0123456789" if luhn_valid(body + d))
    assert redacted(f"meter {body}{check} read") == f"meter {body}{check} read"
    banking = "4" + body[1:]
    check = next(d for d in "0123456789" if luhn_valid(banking + d))
    assert redacted(f"meter {banking}{check} read") == "meter xredactedcard read"


# --- IBAN (ISO 13616, ISO 7064 MOD 97-10) -----------------------------------------------------------

# Examples of the SWIFT IBAN registry as copied in the IbanNet project's SupportedCountries.md (registry
# releases 2020-2024), except GB82 WEST..., the example of the ECBS and of Wikipedia's IBAN article (from memory).
REGISTRY_EXAMPLES = [
    "GB82 WEST 1234 5698 7654 32",
    "GB29 NWBK 6016 1331 9268 19",
    "DE89 3704 0044 0532 0130 00",
    "NL91 ABNA 0417 1643 00",
    "NO93 8601 1117 947",
    "BE68 5390 0754 7034",
    "FR14 2004 1010 0505 0001 3M02 606",
    "MT84 MALT 0110 0001 2345 MTLC AST0 01S",
    "AT61 1904 3002 3457 3201",
    "CH93 0076 2011 6238 5295 7",
]


@pytest.mark.parametrize("iban", REGISTRY_EXAMPLES)
def test_registry_examples_are_valid_and_redacted_in_paper_and_electronic_format(iban: str) -> None:
    assert iban_valid(iban)
    compact = iban.replace(" ", "")
    assert iban_valid(compact) and iban_valid(compact.lower())
    assert redact(f"IBAN: {iban}.") == Redaction("IBAN: xredactediban.", (("iban", 1),))
    assert redacted(f"pay to {compact} today") == "pay to xredactediban today"


@pytest.mark.parametrize("iban", REGISTRY_EXAMPLES)
def test_a_corrupted_check_digit_is_not_valid_and_not_redacted(iban: str) -> None:
    check = int(iban[2:4])
    corrupted = iban[:2] + f"{(check + 1) % 100:02d}" + iban[4:]
    assert not iban_valid(corrupted)
    assert "xredactediban" not in redacted(f"IBAN {corrupted} thanks")


def test_iban_length_must_match_the_country() -> None:
    assert not iban_valid("DE89 3704 0044 0532 0130 0")  # one character short
    assert not iban_valid("DE89 3704 0044 0532 0130 000")  # one too many
    assert not iban_valid("XX89 3704 0044 0532 0130 00")  # no such country in the registry
    assert not iban_valid("DE8937040044053201300!")
    # The IBAN is cut at its country's length: the word after it stays.
    assert redacted("DE89 3704 0044 0532 0130 00 1234 is mine") == "xredactediban 1234 is mine"
    assert redacted("DE89370400440532013000ABC") == "DE89370400440532013000ABC"


# --- e-mail -----------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    "address",
    [
        "john.doe@example.com",
        "john.doe+tickets@example.com",  # plus-addressing (RFC 5233 subaddress)
        "Support-Team_2@mail.eu.example.co.uk",  # subdomains
        "o'brien@example.ie",
        "jürgen.müller@beispiel.de",  # RFC 6531 internationalized local part and domain
        "x@xn--80ak6aa92e.com",
        "UPPER@EXAMPLE.ORG",
    ],
)
def test_email_addresses_are_redacted(address: str) -> None:
    assert redact(f"Reply to <{address}>, please.") == Redaction("Reply to <xredactedemail>, please.", (("email", 1),))
    assert redacted(f"mailto:{address}") == "mailto:xredactedemail"


@pytest.mark.parametrize("text", ["@mention me", "user@localhost", "a@b", "price @ 5 each", "me@ example.com"])
def test_things_that_are_not_email_addresses_stay(text: str) -> None:
    assert redacted(text) == text


# --- phone numbers ------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    "number",
    [
        "+44 20 7946 0958",  # UK drama number range (Ofcom; from memory)
        "+44 (0)20 7946 0958",
        "+1 (555) 123-4567",
        "+49 30 1234567",
        "+33 6 12 34 56 78",
        "+34 612 345 678",
        "+4915112345678",
        "0044 20 7946 0958",
        "(555) 123-4567",
        "555-123-4567",
        "555.123.4567",
        "555 123 4567",
        "1-800-555-0199",
        "020 7946 0958",
        "0171 1234567",
        "06 12 34 56 78",
        "06.12.34.56.78",
        "030/1234567",
        "(030) 1234567",
        "0612345678",
        "612-34-56-78",
    ],
)
def test_phone_numbers_are_redacted(number: str) -> None:
    assert redact(f"Call {number} today.") == Redaction("Call xredactedphone today.", (("phone", 1),))
    assert redacted(f"({number})") == "(xredactedphone)"


@pytest.mark.parametrize("label", ["Tel: ", "tel. ", "Phone: ", "phone number ", "Mobile ", "Fax: ", "Telefon: "])
def test_a_bare_number_after_a_phone_label_is_redacted(label: str) -> None:
    assert redacted(f"{label}5551234567") == f"{label}xredactedphone"
    assert redacted(f"{label}see order 5551234567") == f"{label}see order 5551234567"  # the label must be next to it


@pytest.mark.parametrize(
    "text",
    [
        "on 2026-01-05",  # ISO 8601 date
        "on 2026-01-05 16:45",
        "at 2026-01-05T16:45:00Z",
        "on 05.01.2026",
        "on 01/05/2026",
        "on 2023.10.15",
        "at 16:45",
        "at 16:45:30",
        "from 16.45 - 17.30",
        "order #75025",
        "Order #1234567",
        "order 7502512",  # a bare run of digits: an order number as likely as a phone number
        "build 20240105",
        "ticket 1234-5678",
        "version 2.10.3",
        "v1.2.3.4",
        "Windows 10.0.19045.2006",
        "$1,299.99",
        "€1.299,00",
        "12 500 000 EUR",
        "1.250.000 units",
        "1 000 000",
        "1,234,567",
        "CHF 1'250'000",
        "pi is 3.14159265",
        "ISBN 978-3-16-148410-0",
        "sizes 36 38 40 42",
        "weights 0.25 0.50 0.75",
        "between 2019 and 2026 15 times",
        "50% of 1234567",
    ],
)
def test_dates_times_order_numbers_versions_and_prices_stay(text: str) -> None:
    assert redact(text) == Redaction(text, ())


# --- IP addresses -------------------------------------------------------------------------------------


def test_ipv4_addresses_have_octets_up_to_255() -> None:
    assert redact("from 192.168.1.10, 10.0.0.1:8080 and 0.0.0.0.") == Redaction(
        "from xredactedip, xredactedip:8080 and xredactedip.", (("ip", 3),)
    )
    for text in ["999.1.1.1", "256.1.1.1", "1.2.3.4.5", "1.2.3", "v10.0.0.1"]:
        assert redacted(f"host {text} down") == f"host {text} down"


@pytest.mark.parametrize(
    "address",
    [
        "2001:db8::8a2e:370:7334",  # RFC 3849 documentation prefix
        "2001:0db8:85a3:0000:0000:8a2e:0370:7334",
        "fe80::1",
        "::ffff:192.0.2.1",  # IPv4-mapped (RFC 4291 §2.5.5.2)
        "2001:DB8::1",
    ],
)
def test_ipv6_addresses_are_redacted(address: str) -> None:
    assert redact(f"client {address} connected") == Redaction("client xredactedip connected", (("ip", 1),))


@pytest.mark.parametrize("text", ["std::vector", "at 12:30:45", "mac 00:1a:2b:3c:4d:5e", "a::b", "loopback ::1"])
def test_things_that_are_not_ipv6_addresses_of_a_person_stay(text: str) -> None:
    assert redacted(text) == text


# --- placeholders, display, counts ----------------------------------------------------------------------


def test_placeholders_produce_no_analyzer_terms() -> None:
    text = (
        "Write to john@example.com or jane-doe@mail.example.org from host-10.0.0.1 (fe80::1), call "
        "555-123-4567, card 4111 1111 1111 1111, IBAN DE89 3704 0044 0532 0130 00, o'4111111111111111, "
        "8.8.8.8-based"
    )
    result = redact(text)
    assert {kind for kind, _ in result.counts} == set(KINDS)
    terms = analyzer.terms(result.text)
    assert terms == ["write", "to", "or", "from", "host", "call", "card", "iban", "based"]
    assert not any(PLACEHOLDER_PREFIX in term for term in terms)


def test_display_text_shows_bracket_labels() -> None:
    result = redact(
        "Mail a@example.com, call +44 20 7946 0958, card 4111111111111111, IBAN NL91ABNA0417164300, ip 8.8.8.8"
    )
    assert display_text(result.text) == "Mail [e-mail], call [phone], card [card], IBAN [IBAN], ip [IP address]"
    assert display_text("nothing here") == "nothing here"
    assert {display_text(PLACEHOLDERS[kind]) for kind in KINDS} == set(LABELS.values())


def test_counts_follow_the_order_of_kinds() -> None:
    result = redact("8.8.8.8 a@b.co c@d.co 555-123-4567 4111111111111111")
    assert result.counts == (("email", 2), ("phone", 1), ("card", 1), ("ip", 1))
    assert redact("nothing personal, 12 items").counts == ()


def test_redaction_is_frozen() -> None:
    with pytest.raises(dataclasses.FrozenInstanceError):
        redact("x").text = "y"  # type: ignore[misc]


# --- properties ---------------------------------------------------------------------------------------

PERSONAL = [
    "john.doe+x@mail.example.com",
    "+44 20 7946 0958",
    "(555) 123-4567",
    "0171 1234567",
    "4111 1111 1111 1111",
    "GB82 WEST 1234 5698 7654 32",
    "192.168.1.10",
    "2001:db8::1",
    "2026-01-05",
    "#75025",
    "16:45",
]
# Characters that patterns care about, so that generated text often comes close to a match.
tricky = st.text(alphabet=st.sampled_from("0123456789 .-/:+()#@'abxDEGBW\n"), max_size=60)
pieces = st.lists(st.one_of(st.sampled_from(PERSONAL), tricky, st.text(max_size=20)), max_size=8)


@given(st.text())
def test_redact_is_idempotent_and_never_raises_on_any_text(text: str) -> None:
    once = redact(text)
    assert redact(once.text).text == once.text
    assert redact(once.text).counts == ()


@given(pieces, st.sampled_from(["", " ", "-", ".", ":", "/", "'"]))
def test_redact_is_idempotent_near_personal_data(parts: list[str], joiner: str) -> None:
    text = joiner.join(parts)
    once = redact(text)
    assert redact(once.text).text == once.text
    assert sum(n for _, n in once.counts) == sum(once.text.count(PLACEHOLDERS[kind]) for kind in KINDS) - sum(
        text.count(PLACEHOLDERS[kind]) for kind in KINDS
    )


@given(st.lists(st.sampled_from(PERSONAL[:8]), min_size=1, max_size=5))
def test_personal_data_between_spaces_is_always_found(values: list[str]) -> None:
    result = redact(" and ".join(values))
    assert sum(n for _, n in result.counts) == len(values)
    assert not any(char.isdigit() for char in result.text)


def test_a_number_right_after_a_replaced_one_is_found_in_one_call() -> None:
    """Regression: the second number was found only by a second call, so redact was not idempotent."""
    result = redact("+44 20 7946 0958-+44 20 7946 0958")
    assert result == Redaction("xredactedphone- xredactedphone", (("phone", 2),))
