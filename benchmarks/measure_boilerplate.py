"""Boilerplate rule, before and after: lines and texts removed, and NMI of CLI runs, on open corpora and
on generated templated tickets. Figures go into docs/method.md ("Boilerplate lines").

    PILEWISE_CORPORA=corpora/.cache PYTHONPATH=src python benchmarks/measure_boilerplate.py
    PYTHONPATH=src python benchmarks/measure_boilerplate.py headers FOLDER [FOLDER ...]

The second form counts repeated headers and footers (first and last non-empty line of each text) found as
boilerplate in folders of real files (manual pages rendered by man, licence files), with lines matched as
written ("as written") and as patterns (dedup.normalize_line: numbers, dates and the document's own name
replaced; "patterns").

"Old" is the rule before issue 10 (every boilerplate line removed from every text); "new" keeps the
lines that are most of a text's content (dedup.strip_boilerplate); "off" is --keep-boilerplate.
"""

from __future__ import annotations

import csv
import random
import sys
import tempfile
from collections.abc import Callable
from pathlib import Path
from unittest import mock

from sklearn.metrics import normalized_mutual_info_score
from typer.testing import CliRunner

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))  # the open-corpora loaders

import open_sets
from pilewise import pipeline
from pilewise.cli import app
from pilewise.ingest import dedup
from pilewise.ingest.dedup import Boilerplate, Stripped, find_boilerplate, line_keys, normalize_line, strip_texts
from pilewise.ingest.reading import ReadLimits, read_source
from pilewise.ingest.redact import redact_document
from pilewise.ingest.tables import ColumnChoice
from pilewise.model import Document

SEEDS = (0, 1, 2)
THEMES = {
    "damaged": "My order arrived damaged, please refund the full amount to my card.",
    "late": "My parcel is now two weeks late, where is my delivery?",
    "login": "I cannot log in to my account, please reset my password.",
    "invoice": "The invoice shows the wrong billing address, please correct it.",
    "cancel": "Please cancel my subscription before the next renewal date.",
}
SIGNATURE = "Sent via the Example Shop help centre - please do not reply to this message"
LIST_FOOTER = ("You received this message because you are subscribed to the discussion list.\n"
               "To leave the list, send a message with the subject unsubscribe to the list address.")


def templated_tickets(n: int = 300, seed: int = 0) -> tuple[list[str], list[str]]:
    """Greeting with a name and an e-mail address, one of five templated bodies, a shared signature."""
    rng = random.Random(seed)
    first = ["Anna", "Ben", "Chloe", "Dev", "Emma", "Farid", "Grace", "Hugo", "Ines", "Jon", "Kira", "Luis"]
    last = ["Berg", "Costa", "Dubois", "Evans", "Fischer", "Garcia", "Haas", "Ito", "Jensen", "Kowalski"]
    texts, labels = [], []
    for i in range(n):
        theme = list(THEMES)[i % len(THEMES)]
        a, b = rng.choice(first), rng.choice(last)
        texts.append(f"Hello, this is {a} {b} ({a.lower()}.{b.lower()}{i}@example.org)\n{THEMES[theme]}\n{SIGNATURE}")
        labels.append(theme)
    return texts, labels


def old_strip_texts(texts: list[str], boilerplate: Boilerplate) -> Stripped:
    """The rule before: every boilerplate line goes."""
    out, removed, changed = [], 0, 0
    for text in texts:
        lines = text.splitlines(keepends=True)
        kept = [line for line in lines if normalize_line(line) not in boilerplate.normalized]
        out.append("".join(kept))
        removed += len(lines) - len(kept)
        changed += len(kept) < len(lines)
    return Stripped(out, removed, changed, 0)


def line_figures(texts: list[str]) -> dict[str, int]:
    """Lines and texts each rule removes, on the distinct redacted texts (as the pipeline sees them)."""
    redacted = [redact_document(Document(f"d{i}", "x", "", t), {}).text for i, t in enumerate(texts)]
    distinct = list({" ".join(t.split()): t for t in redacted}.values())
    found = find_boilerplate(distinct)
    old, new = old_strip_texts(distinct, found), strip_texts(distinct, found)
    return {
        "distinct": len(distinct), "boilerplate_lines": len(found.lines),
        "old_removed": old.lines_removed, "old_texts": old.texts_changed,
        "old_emptied": sum(bool(t.strip()) and not s.strip() for t, s in zip(distinct, old.texts, strict=True)),
        "new_removed": new.lines_removed, "new_texts": new.texts_changed, "new_kept": new.lines_kept,
        "new_emptied": sum(bool(t.strip()) and not s.strip() for t, s in zip(distinct, new.texts, strict=True)),
    }


def nmi_of_run(texts: list[str], labels: list[str], k: int, seed: int, variant: str) -> str:
    """NMI of `pilewise run` on the texts as a table, or the error it stopped with."""
    with tempfile.TemporaryDirectory() as folder:
        table = Path(folder) / "texts.csv"
        with table.open("w", encoding="utf-8", newline="") as handle:
            writer = csv.writer(handle)
            writer.writerow(["id", "text"])
            writer.writerows([f"d{i:05d}", t] for i, t in enumerate(texts))
        args = ["run", str(table), "--k", str(k), "--seed", str(seed), "--out", f"{folder}/site", "--quiet"]
        patch: Callable[..., object] = old_strip_texts if variant == "old" else strip_texts
        with mock.patch.object(pipeline, "strip_texts", patch):
            result = CliRunner().invoke(app, [*args, *(["--keep-boilerplate"] if variant == "off" else [])])
        if result.exit_code != 0:
            return result.stderr.strip().splitlines()[-1]
        with (Path(folder) / "site" / "runs" / f"k{k}" / "assignments.csv").open(encoding="utf-8") as handle:
            rows = list(csv.DictReader(handle))
        truth = {f"d{i:05d}": label for i, label in enumerate(labels)}
        return f"{normalized_mutual_info_score([truth[r['doc_id']] for r in rows], [r['cluster'] for r in rows]):.3f}"


def _as_written(line: str, own_names: frozenset[str] = frozenset()) -> str:
    """The line matching before issue 11: white space collapsed and lower-cased, no patterns."""
    return " ".join(line.split()).lower()


def header_footer_figures(texts: list[str]) -> dict[str, int]:
    """Boilerplate lines found, and texts whose first / last non-empty line is one of them, and lines removed."""
    found = find_boilerplate(texts)
    stripped = strip_texts(texts, found)
    headers = footers = 0
    for text in texts:
        keys = [key for key, line in zip(line_keys(text), text.splitlines(), strict=True) if line.strip()]
        headers += bool(keys) and keys[0] in found.normalized
        footers += bool(keys) and keys[-1] in found.normalized
    return {"texts": len(texts), "boilerplate_lines": len(found.lines), "texts_with_header_found": headers,
            "texts_with_footer_found": footers, "lines_removed": stripped.lines_removed,
            "texts_changed": stripped.texts_changed, "lines_kept": stripped.lines_kept}


def headers_main(folders: list[str]) -> None:
    for folder in folders:
        docs = read_source(Path(folder), ColumnChoice(), ReadLimits()).documents
        texts = list({" ".join(doc.text.split()): doc.text for doc in docs}.values())  # distinct, as the run
        with mock.patch.object(dedup, "normalize_line", _as_written):
            print(folder, "as written:", header_footer_figures(texts))
        print(folder, "patterns:  ", header_footer_figures(texts))


def main() -> None:
    if sys.argv[1:2] == ["headers"]:
        headers_main(sys.argv[2:])
        return
    sets: list[tuple[str, list[str], list[str], int]] = []
    for loader in (open_sets.load_mini_newsgroups, open_sets.load_reuters_sample):
        try:
            found = loader()
        except FileNotFoundError as err:
            print(f"skipped: {err}", file=sys.stderr)
            continue
        sets.append((found.name, list(found.texts), list(found.labels), len(set(found.labels))))
        if found.name == "mini_newsgroups":  # the same posts as a mailing list would send them
            sets.append((f"{found.name} + list footer", [f"{t}\n{LIST_FOOTER}" for t in found.texts],
                         list(found.labels), len(set(found.labels))))
    tickets, ticket_labels = templated_tickets()
    sets.append(("templated_tickets", tickets, ticket_labels, 5))
    for name, texts, labels, k in sets:
        print(name, line_figures(texts))
        for variant in ("old", "new", "off"):
            print(f"  {variant}: NMI at k={k}, seeds {SEEDS}:",
                  ", ".join(nmi_of_run(texts, labels, k, seed, variant) for seed in SEEDS))


if __name__ == "__main__":
    main()
