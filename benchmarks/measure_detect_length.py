"""Measure how much of each text language detection must read: accuracy and CPU time by characters read.

What it measures
----------------
Real translated text with a known language: the message catalogues (``.mo`` files, GNU gettext) installed on
this machine under /usr/share/locale/<language>/LC_MESSAGES/, read with the standard library's
``gettext.GNUTranslations``. Each catalogue's translated messages of three or more words (format directives
and markup removed) are shuffled (seed 0) and joined into documents of about 150, 400 and 1,000 characters,
two of each per catalogue, for the languages pilewise supports (``languages.SUPPORTED``); the catalogue's
folder names the language.

For DETECT_CHARS = 600 (pilewise), 400, 300 and 200 it runs ``detect_languages`` on every document in one
process and reports, per document length, the share detected as the catalogue's language, the share left
"und", the share with the same code as at 600 characters, and the CPU seconds of the whole pass (the first
pass includes loading the model, about 0.4 s).

How many documents there are depends on the packages installed; the figures in docs/performance.md are from
the project's machine (12,669 documents in 55 languages).

How to run
----------
    OMP_NUM_THREADS=1 python benchmarks/measure_detect_length.py        # about a minute
"""

from __future__ import annotations

import gettext
import random
import re
import time
from pathlib import Path

import pilewise.vectors.languages as languages

LOCALE = Path("/usr/share/locale")
LENGTHS = (150, 400, 1000)
READ = (600, 400, 300, 200)
_DIRECTIVES = re.compile(r"%\S|\{[^}]*\}|<[^>]+>|_")


def catalogue_documents() -> list[tuple[str, int, str]]:
    """(language, target length, text) for every document built from the installed catalogues."""
    documents = []
    rng = random.Random(0)
    for path in sorted(LOCALE.glob("*/LC_MESSAGES/*.mo")):
        folder = path.parts[-3]
        code = folder.split("_")[0]
        if "@" in folder or code not in languages.SUPPORTED:
            continue
        try:
            with path.open("rb") as handle:
                catalogue = gettext.GNUTranslations(handle)
        except (OSError, ValueError, UnicodeDecodeError):
            continue
        messages = []
        for key, value in catalogue._catalog.items():  # type: ignore[attr-defined]  # the stdlib's parsed pairs
            if isinstance(value, str) and value and key != "" and key != value:
                text = " ".join(_DIRECTIVES.sub(" ", value).split())
                if len(text.split()) >= 3:
                    messages.append(text)
        rng.shuffle(messages)
        for target in LENGTHS:
            for _ in range(2):
                text = ""
                while messages and len(text) < target:
                    text += messages.pop() + " "
                if len(text) >= 0.8 * target:
                    documents.append((code, target, text.strip()))
    return documents


def main() -> None:
    documents = catalogue_documents()
    texts = [text for _, _, text in documents]
    print(f"{len(documents):,} documents in {len({code for code, _, _ in documents})} languages")
    found: dict[int, tuple[tuple[str, ...], float]] = {}
    for chars in READ:
        languages.DETECT_CHARS = chars
        started = time.process_time()
        found[chars] = (languages.detect_languages(texts, None, workers=1), time.process_time() - started)
    base = found[READ[0]][0]
    print("| characters read | CPU s | document length | documents | correct | und | same as 600 |")
    print("|---:|---:|---:|---:|---:|---:|---:|")
    for chars, (codes, cpu) in found.items():
        for target in LENGTHS:
            rows = [i for i, (_, t, _) in enumerate(documents) if t == target]
            correct = sum(codes[i] == documents[i][0] for i in rows) / len(rows)
            undetermined = sum(codes[i] == languages.UNDETERMINED for i in rows) / len(rows)
            same = sum(codes[i] == base[i] for i in rows) / len(rows)
            print(f"| {chars} | {cpu:.2f} | ~{target:,} | {len(rows):,} | {correct:.2%} | {undetermined:.2%} | "
                  f"{same:.2%} |")


if __name__ == "__main__":
    main()
