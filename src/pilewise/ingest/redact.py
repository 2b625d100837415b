"""Redaction of personal data in document text: e-mail addresses, phone numbers, payment card numbers, IBANs
and IP addresses.

Design: `redact` returns ONE text in which every value found is replaced by a placeholder word,
``xredacted<kind>`` (``xredactedemail``, ``xredactedphone``, ``xredactedcard``, ``xredactediban``,
``xredactedip``). That text is the one vectorized (the analyzer drops every token that starts with
`PLACEHOLDER_PREFIX`, so a placeholder never becomes a term) and the one shown, after
`display_text` has turned the placeholders into bracket labels ("[e-mail]", "[phone]", "[card]", "[IBAN]",
"[IP address]"). One text means that terms, keyword-in-context windows and exemplars are all computed on
the string that is shown, and that the original value exists in no output.

The patterns are conservative: each candidate found by a precompiled regular expression must also pass a
check before it is replaced, and what cannot be told apart from ordinary numbers is left alone.

- e-mail: RFC 5322 dot-atom characters (Unicode letters allowed, RFC 6531) ``@`` host names of letters,
  digits and inner hyphens, ending in a top-level domain of at least two letters (or ``xn--`` punycode).
  Quoted local parts, IP-literal domains and single-label hosts (``user@localhost``) are not matched.
- IBAN: two letters, two check digits, then letters and digits optionally grouped by single spaces
  (ISO 13616 paper format groups them in fours); redacted only if the length is the one the SWIFT IBAN
  registry gives for the country and the ISO 7064 MOD 97-10 check (ISO 13616-1) leaves 1. Countries not in
  the registry (the "experimental" lists) are not matched, and IBANs are looked for only in texts with at
  least 7 digits (every registry example holds at least 10; a BBAN of letters is possible in principle).
- payment card: 13-19 digits, as one run or in groups separated by single spaces or hyphens (the first
  group of at least 4 digits, the others of at least 2, at most 5 groups), with the IIN prefix and a length
  of a card network (`CARD_NETWORKS`: Visa, Mastercard, American Express, Discover, JCB, Diners Club,
  UnionPay; "100644100644100644" has none) and passing the Luhn check (ISO/IEC 7812-1 Annex B). A longer
  run of groups is searched for the longest span of whole groups that qualifies.
- IPv4: four dotted numbers 0-255 without leading zeros (RFC 3986 dec-octet: "01.02.03.04" is not an
  address), not part of a longer dotted number, and not right after a word that numbers a part or a
  release ("section 5.11.2.2", "§ 4.1.2.3", "version 1.2.3.4", "v 2.0.1.1", "chapter", "figure", "table",
  "clause", "release", "build", "RFC" ...: `_NUMBERED_PART`). A bare four-part version number whose parts
  are all valid octets ("upgrade to 1.2.3.4") cannot be told from an address and is redacted.
- IPv6: colon-separated hex groups, valid for the standard library's `ipaddress.IPv6Address`, with a
  digit and at least two non-empty groups (so "::", "::1" and "fe80::", which say nothing about a person,
  and words such as "std::vector" are left). Zone ids ("%eth0") and prefix lengths ("/64") are left.
- phone: groups of digits separated by single spaces, dots, hyphens or slashes, with parentheses around
  an area code, 7-15 digits in all (ITU-T E.164 allows at most 15). Never inside a word, after "#" (order
  numbers), after a currency sign, or after a digit and ``.,:/-`` (decimals, times, ranges), and never
  followed by a letter, "%" or a further ``.,:/-`` and digit. Accepted shapes:

  * international: ``+`` then a country code, any grouping, 7-15 digits ("+44 (0)20 ...": the "(0)" is
    not counted), or ``00`` then a country code in at least two groups ("0044 20 7946 0958"; a bare run
    starting with 00 is more often a zero-padded number);
  * after a label ("tel", "phone", "mobile", "cell", "fax", "telefon", "téléphone" ...) or a phrase that
    announces one ("call me on", "my number is", "reach the desk at"): any grouping;
  * an area code in parentheses: "(555) 123-4567", "(030) 1234567";
  * national with a trunk prefix 0 (Europe, Australia ...): 9-12 digits in at least two groups, or a
    run of 10-11 digits ("0171 1234567", "06 12 34 56 78", "020 7946 0958", "0612345678");
  * North American 3-3-4 with an optional leading 1: "555-123-4567", "555.123.4567", "1 800 555 0199";
  * a seven-digit local number, exchange (2-9 first) and line joined by "-" or ".": "555-0149";
  * otherwise at least four hyphen-separated groups of 2-4 digits ("612-34-56-78").

  Never a phone number: anything after "ISBN" or "ISSN", and three-two-four digits joined by hyphens
  ("078-05-1120", the shape of a US social security or case number).

  Not redacted: dates (year-month-day and day-month-year or month-day-year with "-", "." or "/" are
  skipped whole, so "2026-01-05 16:45" stays), times, order numbers ("#75025", "order 7502512": a bare
  run of digits without a prefix or label), prices and other thousands groupings ("12 500 000",
  "1.250.000"), version numbers ("2.10.3", "10.0.19045.2006"). Missed by design: national numbers
  without a trunk prefix written in other groupings ("612 345 678" looks like a thousands grouping,
  "98765 43210", "138 0013 8000"), and any phone number written as a bare run of digits without "+", a
  trunk prefix or a label.

Kinds are searched in a fixed order, each on the text left by the ones before: e-mail (addresses may hold
digits), IPv6 (may end in an IPv4 address), IBAN (holds digit runs), card, IPv4 (dotted numbers would pass
as phone numbers), phone. A replacement changes what its neighbours see ("0958-+44 20 ..." blocks the
second number, "xredactedphone-+44 20 ..." does not), so passes repeat until one finds nothing; that makes
`redact` idempotent. If a placeholder would be joined to a word by a hyphen or an apostrophe
("host-10.0.0.1"), a space is put between them, because the tokenizer would make one token of them that
does not start with the placeholder prefix.

Speed: cheap checks skip every kind that cannot occur (no "@": no e-mail; fewer than 7 ASCII digits: no
phone; no "::" and fewer than 7 colons: no IPv6 ...); numbers are found through one scan for clusters of
digits (a pattern starting with a digit, which `re` skips to quickly), and only clusters that can hold a
value of a kind are searched for it.
"""

from __future__ import annotations

import ipaddress
import re
from dataclasses import dataclass, replace

from pilewise.model import Document

# The placeholder redaction puts in place of personal data; never a term (the analyzer in
# `pilewise.vectors.text` imports it from here, so ingest does not depend on the vectors stage).
PLACEHOLDER_PREFIX = "xredacted"
KINDS = ("email", "phone", "card", "iban", "ip")
# The word put in place of a value of each kind; the analyzer drops it (it starts with PLACEHOLDER_PREFIX).
PLACEHOLDERS = {kind: PLACEHOLDER_PREFIX + kind for kind in KINDS}
# What `display_text` shows for each placeholder.
LABELS = {"email": "[e-mail]", "phone": "[phone]", "card": "[card]", "iban": "[IBAN]", "ip": "[IP address]"}

# IBAN length by country, SWIFT IBAN registry (release of December 2024; cross-checked against two
# open-source validators' copies of the registry). Territories that use their parent's code are covered
# by it.
IBAN_LENGTHS = {
    "AD": 24, "AE": 23, "AL": 28, "AT": 20, "AZ": 28, "BA": 20, "BE": 16, "BG": 22, "BH": 22, "BI": 27,
    "BR": 29, "BY": 28, "CH": 21, "CR": 22, "CY": 28, "CZ": 24, "DE": 22, "DJ": 27, "DK": 18, "DO": 28,
    "EE": 20, "EG": 29, "ES": 24, "FI": 18, "FK": 18, "FO": 18, "FR": 27, "GB": 22, "GE": 22, "GI": 23,
    "GL": 18, "GR": 27, "GT": 28, "HN": 28, "HR": 21, "HU": 28, "IE": 22, "IL": 23, "IQ": 23, "IS": 26,
    "IT": 27, "JO": 30, "KW": 30, "KZ": 20, "LB": 28, "LC": 32, "LI": 21, "LT": 20, "LU": 20, "LV": 21,
    "LY": 25, "MC": 27, "MD": 24, "ME": 22, "MK": 19, "MN": 20, "MR": 27, "MT": 31, "MU": 30, "NI": 28,
    "NL": 18, "NO": 15, "OM": 23, "PK": 24, "PL": 28, "PS": 29, "PT": 25, "QA": 29, "RO": 24, "RS": 22,
    "RU": 33, "SA": 24, "SC": 31, "SD": 18, "SE": 24, "SI": 19, "SK": 24, "SM": 27, "SO": 23, "ST": 25,
    "SV": 28, "TL": 23, "TN": 24, "TR": 26, "UA": 29, "VA": 22, "VG": 24, "XK": 20, "YE": 30,
}  # fmt: skip

_ATEXT = r"\w!#$%&'*+/=?^`{|}~\-"  # RFC 5322 atext, with Unicode letters and digits (RFC 6531)
_EMAIL = re.compile(
    rf"""
    (?<![{_ATEXT}])                        # start at the beginning of a run
    [{_ATEXT}][{_ATEXT}.]*+                # local part (dots anywhere but first, to catch sloppy ones too)
    @
    (?:[^\W_](?:[\w\-]{{0,61}}[^\W_])?\.)+  # host labels
    (?:[^\W\d_]{{2,63}}|xn--[\w\-]{{1,59}})   # top-level domain
    (?![\w\-])
    """,
    re.VERBOSE,
)
# Two letters, two check digits, then up to 30 letters or digits, each optionally after one space.
_IBAN = re.compile(r"(?<!\w)[A-Za-z]{2}[0-9]{2}(?:\ ?[A-Za-z0-9]){11,30}")
_IBAN_CLEAN = re.compile(r"[A-Z]{2}[0-9]{2}[A-Z0-9]+")
# A run of digit groups separated by single spaces or hyphens; the card check looks for spans of it.
_DIGIT_RUN = re.compile(r"(?<![\w#+.,])[0-9]++(?:[\ \-][0-9]++)*+(?!\w)")
_DIGITS = re.compile(r"[0-9]+")
_TRIGGERS = tuple("0123456789@:")
# Digits joined by up to three separators; it starts with a digit, so that `re` scans for it quickly.
_CLUSTER = re.compile(r"[0-9][0-9]*+(?:[\ .\-/():]{1,3}[0-9]++)*+")
_LOCAL_CHARS = frozenset("_!#$%&'*+/=?^`{|}~-.")
_IPV4 = re.compile(r"(?<![\w.])([0-9]{1,3})\.([0-9]{1,3})\.([0-9]{1,3})\.([0-9]{1,3})(?!\w|\.[0-9])")
_IPV6 = re.compile(
    r"""
    (?<![\w:.])
    (?:[0-9A-Fa-f]{0,4}:){2,7}
    (?:[0-9]{1,3}(?:\.[0-9]{1,3}){3}|[0-9A-Fa-f]{1,4})?    # an embedded IPv4 address or a last group
    (?![\w:]|\.[0-9])
    """,
    re.VERBOSE,
)
_PHONE = re.compile(
    r"""
    (?<![\w\#$€£¥+])(?<![0-9][.,:/\-])   # not in a word, an order number, a price, a decimal or a time
    (?:
        (?P<date>                        # dates are matched first, so that they are skipped whole
            (?:19|20)[0-9]{2}(?P<s1>[\-./])(?:0?[1-9]|1[0-2])(?P=s1)(?:0?[1-9]|[12][0-9]|3[01])
          | (?:0?[1-9]|[12][0-9]|3[01])(?P<s2>[\-./])(?:0?[1-9]|[12][0-9]|3[01])(?P=s2)(?:(?:19|20)[0-9]{2}|[0-9]{2})
        )
        (?![0-9]|[\-./][0-9])
      |
        (?P<number>
            (?:\+\ ?)?
            (?:\([0-9]{1,5}+\)|[0-9]++)
            (?:(?:[\ .\-/]|\ ?(?=\()|(?<=\))\ ?)(?:\([0-9]{1,5}+\)|[0-9]++))*+
        )
        (?![\w+\#%€£$¥]|[.,:/\-][0-9])
    )
    """,
    re.VERBOSE,
)
_DATE = re.compile(r"(?:19|20)[0-9]{2}([\-./])[0-9]{1,2}\1[0-9]{1,2}|[0-9]{1,2}([\-./])[0-9]{1,2}\2(?:19|20)?[0-9]{2}")
_PHONE_LABEL = re.compile(
    r"""(?i)\b(?:tel|tél|phone|telephone|téléphone|telefon|telefono|teléfono|mobile|mob|cell|cellphone|fax
    |whatsapp|handy)\.?(?:\s*(?:no|nr|number|num)\.?)?\s*[:\#]?\s*\Z""",
    re.VERBOSE,
)
# A seven-digit local number, exchange and line ("555-0149", "555.0149"): North American exchange codes start
# with 2-9. A space as the separator is read only after a label: "555 0149" is as often two counts.
_LOCAL_SEVEN = re.compile(r"[2-9][0-9]{2}[\-.][0-9]{4}")
# Phrases that announce a phone number as a label does: "call me on", "my number is", "reach the desk at".
_CALL_PHRASE = re.compile(
    r"(?i)\b(?:call(?:\s+(?:me|us|him|her|them))?(?:\s+(?:on|at))?|dial|ring(?:\s+(?:me|us))?(?:\s+on)?"
    r"|(?:my|our|his|her|their)\s+(?:phone\s+|mobile\s+|cell\s+)?number(?:\s+is)?"
    r"|reach(?:\s+[^\W\d_]+){0,2}\s+at)\s*:?\s*\Z"
)
# "ISBN", "ISBN-13:", "ISSN" right before a number: a book's or serial's number, whatever its grouping.
_ISBN_LABEL = re.compile(r"(?i)\b(?:isbn|issn)(?:-?1[03])?\s*:?\s*\Z")
# Three, two and four digits joined by hyphens: the shape of a US social security number or a case number,
# not of a phone number in any national plan.
_THREE_TWO_FOUR = re.compile(r"[0-9]{3}-[0-9]{2}-[0-9]{4}")
_NANP = re.compile(r"(?:1[\ .\-]?)?(?:\([0-9]{3}\)\ ?|[0-9]{3}[\ .\-])[0-9]{3}[\ .\-][0-9]{4}", re.VERBOSE)
_PLACEHOLDER = re.compile(r"\b" + PLACEHOLDER_PREFIX + "(" + "|".join(sorted(KINDS, key=len, reverse=True)) + r")\b")


@dataclass(frozen=True)
class Redaction:
    """A text with its personal data replaced by placeholders, and how many values of each kind were found.

    Attributes
    ----------
    text : str
        The text with ``xredacted<kind>`` placeholders; give it to `display_text` to show it.
    counts : tuple of (str, int)
        ``(kind, n)`` for every kind found at least once, in the order of `KINDS`.
    """

    text: str
    counts: tuple[tuple[str, int], ...]


def luhn_valid(digits: str) -> bool:
    """Whether a string of ASCII digits passes the Luhn check (ISO/IEC 7812-1, Annex B).

    From the rightmost digit (the check digit) leftwards, every second digit is doubled and 9 is
    subtracted from doubles above 9; the number is valid if the sum of all digits is a multiple of 10.
    Anything other than one or more ASCII digits is not valid.
    """
    if not digits or not digits.isascii() or not digits.isdigit():
        return False
    total = 0
    for position, char in enumerate(reversed(digits)):
        value = ord(char) - 48
        if position % 2:
            value = value * 2 - 9 if value > 4 else value * 2
        total += value
    return total % 10 == 0


# Card networks' issuer identification number (IIN) prefixes and card lengths, from their published IIN
# ranges as remembered (from memory; the networks publish them in their issuer guides, and ISO/IEC 7812-1
# defines the IIN): (first prefix, last prefix, lengths).
CARD_NETWORKS: dict[str, tuple[tuple[int, int, tuple[int, ...]], ...]] = {
    "Visa": ((4, 4, (13, 16, 19)),),
    "Mastercard": ((51, 55, (16,)), (2221, 2720, (16,))),
    "American Express": ((34, 34, (15,)), (37, 37, (15,))),
    "Discover": ((6011, 6011, (16, 17, 18, 19)), (644, 649, (16, 17, 18, 19)), (65, 65, (16, 17, 18, 19))),
    "JCB": ((3528, 3589, (16, 17, 18, 19)),),
    "Diners Club": ((36, 36, (14,)), (300, 305, (14,))),
    "UnionPay": ((62, 62, (16, 17, 18, 19)),),
}


def card_network(digits: str) -> str | None:
    """The card network whose IIN prefix and card length `digits` has (see CARD_NETWORKS), else None."""
    for network, ranges in CARD_NETWORKS.items():
        for first, last, lengths in ranges:
            width = len(str(first))
            if len(digits) in lengths and digits[:width].isdigit() and first <= int(digits[:width]) <= last:
                return network
    return None


def iban_valid(candidate: str) -> bool:
    """Whether `candidate` is an IBAN: registry length for its country and ISO 7064 MOD 97-10 check.

    Spaces are ignored and letters may be of either case. ISO 13616-1: move the first four characters
    to the end, replace every letter by two digits (A = 10 ... Z = 35) and read the result as an
    integer; its remainder modulo 97 must be 1. The length must be the one the SWIFT IBAN registry gives
    for the country code (`IBAN_LENGTHS`); a country not in the registry is not valid.
    """
    compact = candidate.replace(" ", "").upper()
    if not compact.isascii() or _IBAN_CLEAN.fullmatch(compact) is None:
        return False
    if IBAN_LENGTHS.get(compact[:2]) != len(compact):
        return False
    rearranged = compact[4:] + compact[:4]
    return int("".join(str(int(char, 36)) for char in rearranged)) % 97 == 1


def redact(text: str) -> Redaction:
    """Replace e-mail addresses, phone numbers, payment card numbers, IBANs and IP addresses by placeholders.

    The patterns, their checks and their limits are described in this module's docstring.

    Parameters
    ----------
    text : str
        Any text.

    Returns
    -------
    Redaction
        The text with ``xredacted<kind>`` placeholders, and the number of values replaced per kind.
    """
    text, found = _redact_once(text)
    if not found:  # the common case: nothing personal
        return Redaction(text, ())
    counts = dict.fromkeys(KINDS, 0)
    # A replacement changes the context of its neighbours ("8-+44 ..." becomes "xredactedphone-+44 ..."),
    # so a second pass may find more; passes repeat until one finds nothing, which makes redaction
    # idempotent. Each pass that finds something removes at least one digit, "@" or ":", so this ends.
    while found:
        for kind, n in found.items():
            counts[kind] += n
        text, found = _redact_once(text)
    return Redaction(text, tuple((kind, n) for kind, n in counts.items() if n))


def redact_document(doc: Document, counts: dict[str, int]) -> Document:
    """`doc` with placeholders in its text (for vectorizing) and labels in its title and table cells (for
    display); the values replaced are added to `counts` per kind."""
    found = redact(doc.text)
    for kind, n in found.counts:
        counts[kind] = counts.get(kind, 0) + n
    title = display_text(redact(doc.title).text)
    metadata = tuple((name, display_text(redact(value).text)) for name, value in doc.metadata)
    if found.text == doc.text and title == doc.title and metadata == doc.metadata:
        return doc  # nothing replaced (the common case): no copy of the document
    return replace(doc, text=found.text, title=title, metadata=metadata)


def _redact_once(text: str) -> tuple[str, dict[str, int]]:
    """One pass of every kind over `text`: the new text and the number of values replaced per kind."""
    found: dict[str, int] = {}
    if not any(char in text for char in _TRIGGERS):  # every kind needs a digit, "@" or ":"; this rules most
        return text, found  # texts out (twelve substring scans: 4x faster than one search for [0-9@:])
    has_at = "@" in text
    encoded = text.encode("utf-8", "surrogatepass")
    n_digits = len(encoded) - len(encoded.translate(None, b"0123456789"))
    has_ipv6 = "::" in text or text.count(":") >= 7
    # An IPv4 address needs 4 digits and 3 dots, a phone number 7 digits, a card 13; IBANs are looked for
    # in texts with 7 digits (all registry examples hold at least 10).
    search_numbers = n_digits >= 7 or (n_digits >= 4 and text.count(".") >= 3)
    if has_at:
        text, found["email"] = _splice(text, _email_spans(text), "email")
    if has_ipv6:  # before IPv4, which would take the end of "::ffff:192.0.2.1"
        text, found["ip"] = _splice(text, _ipv6_spans(text), "ip")
    if search_numbers:
        # Every IBAN, card, IPv4 address and phone number overlaps a cluster of digits joined by single
        # separators; only clusters that can hold one are searched further.
        clusters = _clusters(text)
        for kind, finder in _NUMBER_FINDERS:
            spans = finder(text, clusters)
            if spans:
                text, n = _splice(text, spans, kind)
                found[kind] = found.get(kind, 0) + n
                clusters = _clusters(text)
    return text, {kind: n for kind, n in found.items() if n}


def display_text(text: str) -> str:
    """Text for display: every placeholder becomes its bracket label ("xredactedemail" -> "[e-mail]")."""
    if PLACEHOLDER_PREFIX not in text:
        return text
    return _PLACEHOLDER.sub(lambda m: LABELS[m.group(1)], text)


def _splice(text: str, spans: list[tuple[int, int]], kind: str) -> tuple[str, int]:
    """`text` with every (start, end) span replaced by the placeholder of `kind`, and the number of spans."""
    if not spans:
        return text, 0
    token = PLACEHOLDERS[kind]
    parts = []
    last = 0
    for start, end in spans:
        parts.append(text[last:start])
        # The tokenizer joins words across "-" and "'": keep the placeholder a token of its own.
        before = " " if start >= 2 and text[start - 1] in "-'" and text[start - 2].isalpha() else ""
        after = " " if end + 1 < len(text) and text[end] in "-'" and text[end + 1].isalpha() else ""
        parts.append(before + token + after)
        last = end
    parts.append(text[last:])
    return "".join(parts), len(spans)


def _email_spans(text: str) -> list[tuple[int, int]]:
    """Spans of e-mail addresses, found from each "@" (a scan of the whole text would be slower)."""
    spans = []
    at = text.find("@")
    while at != -1:
        start = at
        while start > 0 and (text[start - 1].isalnum() or text[start - 1] in _LOCAL_CHARS):
            start -= 1
        while start < at and text[start] == ".":
            start += 1
        m = _EMAIL.match(text, start) if start < at else None
        if m is not None:
            spans.append(m.span())
            at = text.find("@", m.end())
        else:
            at = text.find("@", at + 1)
    return spans


def _clusters(text: str) -> list[tuple[int, int]]:
    """Spans of runs of digits joined by up to three of ``.-/():`` and space."""
    return [m.span() for m in _CLUSTER.finditer(text)]


def _n_digits(text: str, start: int, end: int) -> int:
    return sum(map(len, _DIGITS.findall(text, start, end)))


def _iban_spans(text: str, clusters: list[tuple[int, int]]) -> list[tuple[int, int]]:
    """Spans of IBANs: the check digits start a cluster right after the two letters of the country code."""
    spans: list[tuple[int, int]] = []
    last = 0
    for start, _ in clusters:
        if start < last + 2 or not text[start - 2 : start].isalpha():
            continue
        m = _IBAN.match(text, start - 2)
        if m is not None and (end := _iban_end(text, m)) is not None:
            spans.append((m.start(), end))
            last = end
    return spans


def _iban_end(text: str, m: re.Match[str]) -> int | None:
    """Where the IBAN starting at match `m` ends in `text`, or None if it is not a valid IBAN.

    The candidate is cut at the registry length of its country, which must end a word.
    """
    candidate = m.group()
    length = IBAN_LENGTHS.get(candidate[:2].upper())
    if length is None:
        return None
    seen = 0
    for offset, char in enumerate(candidate):
        if char != " ":
            seen += 1
            if seen == length:
                end = m.start() + offset + 1
                break
    else:
        return None
    if end < len(text) and (text[end].isalnum() or text[end] == "_"):
        return None
    return end if iban_valid(text[m.start() : end]) else None


def _card_spans(text: str, clusters: list[tuple[int, int]]) -> list[tuple[int, int]]:
    """Spans of whole digit groups that make a payment card number (see the module docstring)."""
    spans = []
    for start, end in clusters:
        if end - start < 13 or _n_digits(text, start, end) < 13:
            continue
        for run in _DIGIT_RUN.finditer(text, start, end + 1):
            groups = [g.span() for g in _DIGITS.finditer(text, run.start(), run.end())]
            i = 0
            while i < len(groups):
                best = None
                if groups[i][1] - groups[i][0] >= 4:
                    digits = ""
                    for j in range(i, min(i + 5, len(groups))):
                        if j > i and groups[j][1] - groups[j][0] < 2:
                            break
                        digits += text[groups[j][0] : groups[j][1]]
                        if len(digits) > 19:
                            break
                        if len(digits) >= 13 and card_network(digits) is not None and luhn_valid(digits):
                            best = j
                if best is None:
                    i += 1
                else:
                    spans.append((groups[i][0], groups[best][1]))
                    i = best + 1
    return spans


def _ipv4_spans(text: str, clusters: list[tuple[int, int]]) -> list[tuple[int, int]]:
    spans = []
    for start, end in clusters:
        if end - start >= 7 and text.count(".", start, end) >= 3:
            for m in _IPV4.finditer(text, start, end + 2):
                before = text[max(0, m.start() - 30) : m.start()]
                if all(_octet(part) for part in m.groups()) and not _NUMBERED_PART.search(before):
                    spans.append(m.span())
    return spans


def _octet(part: str) -> bool:
    """A dotted-decimal octet as RFC 3986's dec-octet writes it: 0-255 without leading zeros."""
    return int(part) <= 255 and (part == "0" or part[0] != "0")


# Words after which dotted numbers are a numbered part or a release, not an address: "section 5.11.2.2",
# "§ 4.1.2.3", "version 1.2.3.4", "v 2.0.1.1", "release", "chapter", "figure", "table", "clause". Words that
# may stand before an address in a log ("rule", "host", "from") are not in the list.
_NUMBERED_PART = re.compile(
    r"(?i)(?:\b(?:sections?|sect?|§§?|versions?|vers?|v|releases?|rel|builds?|chapters?|ch|figures?|figs?|tables?"
    r"|clauses?|paragraphs?|paras?|articles?|arts?|appendix|annex|rfc)\.?|§)\s*\Z"
)


def _phone_spans(text: str, clusters: list[tuple[int, int]]) -> list[tuple[int, int]]:
    spans: list[tuple[int, int]] = []
    last = 0
    for start, end in clusters:
        if end - start < 7 or _n_digits(text, start, end) < 7 or _DATE.fullmatch(text, start, end):
            continue
        # a number may start up to three characters before its first digit: "+ (44)"
        for m in _PHONE.finditer(text, max(start - 3, last), end + 2):
            number = m.group("number")
            if number is not None and _phone_ok(number, text[max(0, m.start() - 30) : m.start()]):
                spans.append(m.span())
            last = m.end()
    return spans


_NUMBER_FINDERS = (("iban", _iban_spans), ("card", _card_spans), ("ip", _ipv4_spans), ("phone", _phone_spans))


def _ipv6_spans(text: str) -> list[tuple[int, int]]:
    spans = []
    for m in _IPV6.finditer(text):
        candidate = m.group()
        if sum(1 for group in re.split(r"[:.]", candidate) if group) < 2 or not any(c.isdigit() for c in candidate):
            continue
        try:
            ipaddress.IPv6Address(candidate)
        except ValueError:
            continue
        spans.append(m.span())
    return spans


def _phone_ok(number: str, before: str) -> bool:
    """Whether a candidate is a phone number in one of the accepted shapes; `before` is the text before it."""
    groups = _DIGITS.findall(number)
    n = sum(map(len, groups))
    if _ISBN_LABEL.search(before) or _THREE_TWO_FOUR.fullmatch(number):
        return False
    if number.startswith("+"):
        return 7 <= n - number.count("(0)") <= 15
    if not 7 <= n <= 17:
        return False
    digits = "".join(groups)
    if digits.startswith("00") and not number.startswith("("):  # international call prefix
        # a bare run of digits starting with 00 is more often a zero-padded number than a phone number
        return len(groups) > 1 and digits[2] != "0" and 7 <= n - 2 <= 15
    if n > 15:
        return False
    if _PHONE_LABEL.search(before) or _CALL_PHRASE.search(before):
        return True
    if number.startswith("("):
        rest = groups[1:]
        area = len(groups[0])
        return 2 <= area <= 5 and n <= 12 and not _thousands(number[number.index(")") + 1 :].strip(), rest)
    if groups[0][0] == "0":
        if len(groups[0]) < 2 or groups[0][1] == "0":
            return False
        return 10 <= n <= 11 if len(groups) == 1 else 9 <= n <= 12
    if _NANP.fullmatch(number) or _LOCAL_SEVEN.fullmatch(number):
        return True
    separators = set(_DIGITS.sub("", number))
    return separators == {"-"} and len(groups) >= 4 and n <= 12 and all(2 <= len(group) <= 4 for group in groups)


def _thousands(number: str, groups: list[str]) -> bool:
    """Whether digit groups look like a number in thousands grouping ("12 500 000", "1.250.000")."""
    return (
        len(groups) >= 2
        and 1 <= len(groups[0]) <= 3
        and all(len(group) == 3 for group in groups[1:])
        and len(set(_DIGITS.sub("", number))) == 1
    )
