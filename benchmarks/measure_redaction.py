"""Precision and recall of redaction per kind, on a seeded labelled sample of positives and hard negatives.

    PYTHONPATH=src python benchmarks/measure_redaction.py [--seed 0] [--per-form 40] [--show-errors]

The sample is generated here: every item is a short text holding one value of a kind (e-mail, phone, card,
IBAN, IP) written in one of several forms, or one hard negative (section and version numbers, ISBNs, date
ranges, git file modes, hashes, times, prices, order numbers, Luhn-valid numbers of no card network) that
should be left alone. An item counts as found for a kind when the value is gone from the redacted text and a
placeholder of that kind stands in it. Figures go into docs/method.md ("Redaction: precision and recall");
tests/test_redaction_quality.py holds floors measured here, minus a margin.
"""

from __future__ import annotations

import argparse
import random
from collections.abc import Callable
from dataclasses import dataclass

from pilewise.ingest.redact import KINDS, PLACEHOLDERS, redact


@dataclass(frozen=True)
class Item:
    """One labelled text: the value in it, its kind (None for a hard negative) and the form it is written in."""

    text: str
    value: str
    kind: str | None
    form: str


def luhn_complete(prefix_and_body: str) -> str:
    """`prefix_and_body` with the Luhn check digit appended (ISO/IEC 7812-1 Annex B)."""
    total = 0
    for position, char in enumerate(reversed(prefix_and_body)):
        value = int(char)
        if position % 2 == 0:  # these positions are doubled once the check digit is appended
            value = value * 2 - 9 if value > 4 else value * 2
        total += value
    return prefix_and_body + str((10 - total % 10) % 10)


def _digits(rng: random.Random, n: int) -> str:
    return "".join(rng.choice("0123456789") for _ in range(n))


# Card networks' IIN prefixes and lengths, from their published ranges (from memory): Visa 4 (13, 16, 19),
# Mastercard 51-55 and 2221-2720 (16), American Express 34, 37 (15), Discover 6011, 644-649, 65 (16).
CARD_NETWORKS: dict[str, tuple[Callable[[random.Random], str], tuple[int, ...]]] = {
    "visa": (lambda r: "4", (16, 13, 19)),
    "mastercard": (lambda r: str(r.randint(51, 55)), (16,)),
    "mastercard 2-series": (lambda r: str(r.randint(2221, 2720)), (16,)),
    "amex": (lambda r: r.choice(["34", "37"]), (15,)),
    "discover": (lambda r: r.choice(["6011", "65", str(r.randint(644, 649))]), (16,)),
}


def card_number(rng: random.Random, network: str) -> str:
    prefix, lengths = CARD_NETWORKS[network]
    start = prefix(rng)
    length = rng.choice(lengths)
    return luhn_complete(start + _digits(rng, length - len(start) - 1))


def _grouped_card(number: str, rng: random.Random) -> str:
    if len(number) == 13:  # the old 13-digit Visa numbers: printed as one run here (no common grouping)
        return number
    if len(number) == 15:  # American Express prints 4-6-5
        parts = [number[:4], number[4:10], number[10:]]
    else:
        parts = [number[i : i + 4] for i in range(0, len(number), 4)]
    return rng.choice([" ", "-", ""]).join(parts)


def iban(rng: random.Random) -> str:
    """A valid IBAN of a few countries (ISO 13616: check digits 98 - (BBAN + country + 00) mod 97)."""
    country, length = rng.choice([("DE", 22), ("GB", 22), ("FR", 27), ("NL", 18), ("ES", 24), ("IT", 27)])
    if country == "GB":
        bban = "".join(rng.choice("ABCDEFGHIJKLMNOPQRSTUVWXYZ") for _ in range(4)) + _digits(rng, 14)
    elif country == "NL":
        bban = "".join(rng.choice("ABCDEFGHIJKLMNOPQRSTUVWXYZ") for _ in range(4)) + _digits(rng, 10)
    elif country == "IT":
        bban = rng.choice("ABCDEFGHIJKLMNOPQRSTUVWXYZ") + _digits(rng, 22)
    else:
        bban = _digits(rng, length - 4)
    numeric = "".join(str(int(c, 36)) for c in bban + country + "00")
    check = 98 - int(numeric) % 97
    compact = f"{country}{check:02d}{bban}"
    if rng.random() < 0.5:
        return " ".join(compact[i : i + 4] for i in range(0, len(compact), 4))
    return compact


def _email(rng: random.Random) -> tuple[str, str]:
    user = rng.choice(["anna", "j.smith", "b_lee", "support+tickets", "Chloe.Dubois", "dev-ops", "o'neil", "x9"])
    host = rng.choice(["example.com", "mail.example.org", "example.co.uk", "uni-example.de", "EXAMPLE.NET"])
    form = rng.choice(["plain", "angle", "mailto"])
    value = f"{user}@{host}"
    return value, {"plain": value, "angle": f"<{value}>", "mailto": f"mailto:{value}"}[form]


def _phone(rng: random.Random) -> tuple[str, str]:
    d = lambda n: _digits(rng, n)  # noqa: E731
    area = str(rng.randint(201, 989))
    forms = {
        "+44 20 7946 0958": f"+44 20 {d(4)} {d(4)}",
        "+1 (555) 123-4567": f"+1 ({area}) {area[:1]}{d(2)}-{d(4)}",
        "+33 6 12 34 56 78": f"+33 6 {d(2)} {d(2)} {d(2)} {d(2)}",
        "+49 30 1234567": f"+49 30 {d(7)}",
        "+61 2 9876 5432": f"+61 2 {d(4)} {d(4)}",
        "+353871234567": f"+3538{d(8)}",
        "(555) 123-4567": f"({area}) {rng.randint(2, 9)}{d(2)}-{d(4)}",
        "555-123-4567": f"{area}-{rng.randint(2, 9)}{d(2)}-{d(4)}",
        "555.123.4567": f"{area}.{rng.randint(2, 9)}{d(2)}.{d(4)}",
        "1 800 555 0199": f"1 800 {rng.randint(2, 9)}{d(2)} {d(4)}",
        "555-0149": f"{rng.randint(2, 9)}{d(2)}-{d(4)}",
        "555 0149": f"{rng.randint(2, 9)}{d(2)} {d(4)}",
        "020 7946 0958": f"020 {d(4)} {d(4)}",
        "06 12 34 56 78": f"06 {d(2)} {d(2)} {d(2)} {d(2)}",
        "0044 20 7946 0958": f"0044 20 {d(4)} {d(4)}",
        "0171 1234567": f"0171 {d(7)}",
    }
    form = rng.choice(list(forms))
    return form, forms[form]


def _ip(rng: random.Random) -> tuple[str, str]:
    octet = lambda: str(rng.choice([rng.randint(0, 255), rng.randint(0, 9), rng.randint(10, 99)]))  # noqa: E731
    forms = {
        "ipv4": ".".join([str(rng.randint(1, 223))] + [octet() for _ in range(3)]),
        "ipv4 private": f"192.168.{rng.randint(0, 255)}.{rng.randint(1, 254)}",
        "ipv4 port": f"10.{rng.randint(0, 255)}.{rng.randint(0, 255)}.{rng.randint(1, 254)}",
        "ipv6": f"2001:db8:{rng.randint(0, 0xffff):x}::{rng.randint(1, 0xffff):x}",
    }
    form = rng.choice(list(forms))
    value = forms[form]
    return form, value + (f":{rng.randint(1024, 65535)}" if form == "ipv4 port" else "")


POSITIVE_CONTEXTS = {
    "email": ["Please write to {} for a refund.", "From: {}", "Contact: {}", "cc {} and the team"],
    "phone": ["Call me on {} after five.", "Tel: {}", "Phone {} (office)", "Reach the desk at {}.",
              "my number is {}", "Mobile: {}"],
    "card": ["Card number {} was charged twice.", "Paid with {}.", "card: {}", "the card {} expired"],
    "iban": ["Please refund to IBAN {}.", "Account {} (savings)", "IBAN: {}"],
    "ip": ["The server at {} did not answer.", "login from IP {} blocked", "host {} timed out",
           "connect to {} failed"],
}


def positives(rng: random.Random, per_form: int) -> list[Item]:
    items: list[Item] = []
    for _ in range(per_form):
        value, shown = _email(rng)
        items.append(Item(rng.choice(POSITIVE_CONTEXTS["email"]).format(shown), value, "email", "e-mail"))
    for _ in range(per_form * 4):
        form, value = _phone(rng)
        items.append(Item(rng.choice(POSITIVE_CONTEXTS["phone"]).format(value), value, "phone", form))
    for network in CARD_NETWORKS:
        for _ in range(per_form):
            number = card_number(rng, network)
            value = _grouped_card(number, rng)
            items.append(Item(rng.choice(POSITIVE_CONTEXTS["card"]).format(value), value, "card", network))
    for _ in range(per_form):
        value = iban(rng)
        items.append(Item(rng.choice(POSITIVE_CONTEXTS["iban"]).format(value), value, "iban", "IBAN"))
    for _ in range(per_form * 2):
        form, value = _ip(rng)
        items.append(Item(rng.choice(POSITIVE_CONTEXTS["ip"]).format(value), value, "ip", form))
    return items


def _negative_forms(rng: random.Random) -> dict[str, tuple[str, str]]:
    d = lambda n: _digits(rng, n)  # noqa: E731
    small = lambda: str(rng.randint(1, 12))  # noqa: E731
    section = ".".join(small() for _ in range(4))
    year = rng.randint(1990, 2020)
    isbn13 = "978" + d(9)
    isbn13 += str((10 - sum((3 if i % 2 else 1) * int(c) for i, c in enumerate(isbn13)) % 10) % 10)
    isbn10 = d(9)
    isbn10 += "0123456789X"[sum((10 - i) * int(c) for i, c in enumerate(isbn10)) * 10 % 11]
    unknown_prefix = luhn_complete(rng.choice(["9", "8", "7", "1"]) + d(15))
    fake_visa = luhn_complete("4" + d(13))  # 15 digits: Visa has none of that length
    return {
        "section number": (section, f"as described in section {section} of the standard"),
        "section sign": (section, f"see § {section} above"),
        "version": (section, f"upgraded to version {section} last week"),
        "version v": (section, f"fixed in v{section}"),
        "release number": (f"{rng.randint(1, 20)}.{rng.randint(0, 30)}.{rng.randint(0, 30)}.{d(4)}",
                           "build {} is out"),
        "ISBN-13": (f"{isbn13[:3]}-{isbn13[3]}-{isbn13[4:7]}-{isbn13[7:12]}-{isbn13[12]}", "ISBN {}"),
        "ISBN-10": (f"{isbn10[0]}-{isbn10[1:4]}-{isbn10[4:9]}-{isbn10[9]}", "ISBN {} (paperback)"),
        "ISBN bare": (f"{isbn13[:3]}-{isbn13[3:]}", "isbn: {}"),
        "date range": (f"{year}-{year + rng.randint(1, 6)}", "copyright {} the authors"),
        "date range spaced": (f"{year} - {year + rng.randint(1, 6)}", "in the years {} we grew"),
        "date": (f"{year}-{rng.randint(1, 12):02d}-{rng.randint(1, 28):02d}", "released on {}"),
        "dates": (f"{year}-01-05 to {year}-02-07", "open from {}"),
        "git modes": ("100644 100644 100644", ":{} M\tsrc/main.c"),
        "git index": (f"{d(7)}..{d(7)} 100755", "index {}"),
        "hash": (f"{rng.getrandbits(160):040x}", "commit {}"),
        "digit hash": (d(16), "trace id {} in the log"),
        "time": (f"{rng.randint(0, 23):02d}:{rng.randint(0, 59):02d}:{rng.randint(0, 59):02d}", "at {} UTC"),
        "time range": (f"{rng.randint(7, 9):02d}:00-{rng.randint(16, 19)}:30", "open {} daily"),
        "price": (f"${rng.randint(1, 99)},{d(3)}.{d(2)}", "total {} incl. VAT"),
        "price grouped": (f"{rng.randint(1, 99)} {d(3)} {d(3)}", "budget of {} EUR"),
        "order number": (f"#{d(7)}", "order {} shipped"),
        "order run": (d(8), "order number {} shipped"),
        "count before word": (str(rng.randint(2, 9)), "{} phone calls and 12 e-mails"),
        "counts": (f"{d(3)} {d(4)}", "{} items, 3 boxes"),
        "luhn, no network": (unknown_prefix, "tracking {}"),
        "luhn, wrong length": (fake_visa, "serial {}"),
        "invalid octets": (f"{rng.randint(256, 999)}.{rng.randint(0, 255)}.{rng.randint(0, 255)}.{rng.randint(0, 255)}",
                           "counter {}"),
        "leading zeros": (f"0{rng.randint(1, 9)}.0{rng.randint(1, 9)}.0{rng.randint(1, 9)}.0{rng.randint(1, 9)}",
                          "code {}"),
        "coordinates": (f"{rng.randint(10, 89)}.{d(4)}, {rng.randint(10, 179)}.{d(4)}", "located at {}"),
        "percent": (f"{rng.randint(1, 99)}.{d(2)}%", "growth of {}"),
        "phone-like id": (f"{d(3)}-{d(2)}-{d(4)}", "case {} closed"),
    }


def negatives(rng: random.Random, per_form: int) -> list[Item]:
    items = []
    for _ in range(per_form):
        for form, (value, context) in _negative_forms(rng).items():
            text = context.format(value) if "{}" in context else context
            items.append(Item(text, value, None, form))
    return items


def labelled_sample(seed: int = 0, per_form: int = 40) -> list[Item]:
    """Positives of every kind in varied forms and hard negatives, `per_form` of each form (about).

    These are the forms the rules were adjusted on; `held_out_sample` has forms written afterwards."""
    rng = random.Random(seed)
    return positives(rng, per_form) + negatives(rng, per_form)


def held_out_sample(seed: int = 0, per_form: int = 40) -> list[Item]:
    """Further forms, written after the rules were set and not used to adjust them (an honest second reading)."""
    rng = random.Random(seed + 1000)
    items = []
    for _ in range(per_form):
        d = lambda n: _digits(rng, n)  # noqa: E731
        area = str(rng.randint(201, 989))
        visa = card_number(rng, "visa")
        ean = "40" + d(10)
        ean += str((10 - sum((3 if i % 2 else 1) * int(c) for i, c in enumerate(ean)) % 10) % 10)
        for kind, form, value, context in [
            ("phone", "+1-202-555-0143", f"+1-{area}-{rng.randint(2, 9)}{d(2)}-{d(4)}", "call {} now"),
            ("phone", "+44 (0)20 7946 0958", f"+44 (0)20 {d(4)} {d(4)}", "office: {}"),
            ("phone", "(02) 9876 5432", f"(02) {d(4)} {d(4)}", "Sydney office {}"),
            ("phone", "+81 3-1234-5678", f"+81 3-{d(4)}-{d(4)}", "Tokyo {}"),
            ("phone", "Tel.: 0049 89 123456", f"0049 89 {d(6)}", "Tel.: {}"),
            ("phone", "202 555 0143", f"{area} {rng.randint(2, 9)}{d(2)} {d(4)}", "please call {} today"),
            ("phone", "+91 98765 43210", f"+91 9{d(4)} {d(5)}", "WhatsApp {}"),
            ("phone", "07700 900123", f"07{d(3)} {d(6)}", "text me at {}"),
            ("email", "subdomain e-mail", f"first.last{d(2)}@sub.example.travel", "reply to {} please"),
            ("email", "short e-mail", f"x{d(1)}@example.io", "({})"),
            ("card", "compact in a URL", visa if len(visa) == 16 else card_number(rng, "mastercard"), "pay?cc={}&ok=1"),
            ("card", "amex 4-6-5", _grouped_card(card_number(rng, "amex"), rng), "Amex {}"),
            ("ip", "CIDR", f"192.0.2.{rng.randint(1, 254)}", "route {}/24 via gw"),
            ("ip", "bracketed", f"203.0.113.{rng.randint(1, 254)}", "client [{}] refused"),
            ("ip", "key=value", f"198.51.100.{rng.randint(1, 254)}", "ip={},port=22"),
            (None, "EAN-13", ean, "EAN {}"),
            (None, "dotted date", f"{rng.randint(1, 28):02d}.{rng.randint(1, 12):02d}.{rng.randint(1990, 2030)}",
             "invoice of {}"),
            (None, "US date time", f"{rng.randint(1, 12)}/{rng.randint(1, 28)}/{rng.randint(1990, 2030)} 11:59",
             "due {}"),
            (None, "table number", f"{rng.randint(1, 9)}.{rng.randint(1, 9)}.{rng.randint(1, 9)}.{rng.randint(1, 9)}",
             "Table {} lists them"),
            (None, "figure number", f"{rng.randint(1, 9)}.{rng.randint(1, 9)}.{rng.randint(1, 9)}.{rng.randint(1, 9)}",
             "as Figure {} shows"),
            (None, "big amount", f"{rng.randint(1, 9)},{d(3)},{d(3)},{d(3)}", "revenue of {} dollars"),
            (None, "OID", f"1.3.6.1.4.1.{d(4)}", "OID {}"),
            (None, "plain dotted", ".".join(str(rng.randint(1, 20)) for _ in range(4)), "upgrade to {} fixed it"),
            (None, "measurements", f"{rng.randint(100, 999)} {rng.randint(100, 999)} {rng.randint(1000, 9999)}",
             "sizes {} mm"),
            (None, "phone word without number", "", "6 phone calls, 2 e-mails"),
        ]:
            items.append(Item(context.format(value), value or "phone", kind, form))
    return items


@dataclass(frozen=True)
class Score:
    true_positives: int
    false_negatives: int
    false_positives: int

    @property
    def precision(self) -> float:
        found = self.true_positives + self.false_positives
        return self.true_positives / found if found else 1.0

    @property
    def recall(self) -> float:
        wanted = self.true_positives + self.false_negatives
        return self.true_positives / wanted if wanted else 1.0


def score(items: list[Item]) -> tuple[dict[str, Score], list[tuple[Item, set[str]]]]:
    """Per kind: positives found, missed, and false alarms (a placeholder of the kind on any other item)."""
    counts = {kind: [0, 0, 0] for kind in KINDS}
    errors = []
    for item in items:
        out = redact(item.text).text
        gone = item.value not in out
        placed = {kind for kind in KINDS if PLACEHOLDERS[kind] in out}
        if item.kind is not None:
            hit = gone and item.kind in placed
            counts[item.kind][0 if hit else 1] += 1
            wrong = placed - {item.kind}
        else:
            hit = True
            wrong = placed
        for kind in wrong:
            counts[kind][2] += 1
        if not hit or wrong:
            errors.append((item, placed))
    return {kind: Score(*values) for kind, values in counts.items()}, errors


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seed", type=int, default=0)
    parser.add_argument("--per-form", type=int, default=40)
    parser.add_argument("--show-errors", action="store_true")
    args = parser.parse_args()
    for name, items in (("tuned forms", labelled_sample(args.seed, args.per_form)),
                        ("held-out forms", held_out_sample(args.seed, args.per_form))):
        scores, errors = score(items)
        print(f"{name}: {len(items)} items: {sum(i.kind is not None for i in items)} positives, "
              f"{sum(i.kind is None for i in items)} hard negatives (seed {args.seed})")
        print("| kind | positives | found | missed | false alarms | precision | recall |")
        print("|---|---|---|---|---|---|---|")
        for kind, s in scores.items():
            print(f"| {kind} | {s.true_positives + s.false_negatives} | {s.true_positives} | {s.false_negatives} | "
                  f"{s.false_positives} | {s.precision:.3f} | {s.recall:.3f} |")
        if args.show_errors:
            for item, placed in errors:
                print(f"  {item.kind or '-':6} {item.form:22} {sorted(placed)!s:18} {item.text!r} -> "
                      f"{redact(item.text).text!r}")


if __name__ == "__main__":
    main()
