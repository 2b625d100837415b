"""min_df and text length: does a word found in only two texts help or hurt, and does text length decide it?

What it measures
----------------
1. For every open collection (``measure_quality.load_sample``) and every held-out collection built from this
   machine's own files (``HELD_OUT``), the length of its distinct texts: words (split at white space) and
   content words (pilewise's tokens without stop words), median and mean.
2. NMI against the gold labels (k = their number) of pilewise's space and k-means at min_df 2 and min_df 3,
   and at the length rule (``tfidf.default_min_df`` given the median content words), beside the two
   scikit-learn pipelines of ``measure_quality`` (``--no-baselines`` leaves them out).

The held-out collections are not among the seven the defaults were measured on; they check the rule chosen
on those seven (docs/vectorizing.md, "min_df and text length"). Built once into ``benchmarks/.out/heldout``:

- ``man_pages``: manual pages of sections 1, 3, 5, 7 and 8 in /usr/share/man (a seeded sample of at most
  ``MAN_PER_SECTION`` per section, links left out), rendered with ``man -l FILE | col -b`` without the
  header and footer lines (they name the section); label = section.
- ``package_synopses``: the one-line descriptions of the packages in the apt lists of
  /var/lib/apt/lists (Debian main), label = Section, for ``SYNOPSIS_SECTIONS`` (sections named by subject,
  not by packaging form such as libs or libdevel), at most ``SYNOPSES_PER_SECTION`` each (seeded).
- ``package_descriptions``: the long descriptions of the installed packages
  (``dpkg-query -W -f='${Section}\\t${Description}'``), label = Section, sections with at least 20 packages.

How to run
----------
    python benchmarks/measure_min_df.py --lengths                      # lengths only (seconds)
    python benchmarks/measure_min_df.py --collections man_pages package_synopses package_descriptions
    python benchmarks/measure_min_df.py --collections reuters_sample --seeds 20
    python benchmarks/measure_min_df.py --render benchmarks/.out/min_df.json

Figures go to ``benchmarks/.out/min_df.json`` (``--out``).
"""

from __future__ import annotations

import argparse
import json
import random
import re
import statistics
import subprocess
import sys
from collections import Counter
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

from measure_quality import ORDER, OUT_DIR, Prepared, load_sample, nmi, prepare, run_sklearn  # noqa: E402

from open_sets import LabeledCollection  # noqa: E402
from pilewise.clustering.kmeans import kmeans_clusters  # noqa: E402
from pilewise.options import RunOptions, kmeans_starts  # noqa: E402
from pilewise.vectors.text import Analyzer, load_stop_words  # noqa: E402
from pilewise.vectors.tfidf import VectorSettings, count_terms, default_min_df, vectorize  # noqa: E402

HELD_OUT_DIR = OUT_DIR / "heldout"
MAN_SECTIONS = ("1", "3", "5", "7", "8")
MAN_PER_SECTION = 200
SYNOPSIS_SECTIONS = ("games", "science", "math", "sound", "graphics", "mail", "database", "electronics",
                     "hamradio", "fonts", "editors", "web")
SYNOPSES_PER_SECTION = 400
APT_PACKAGES = Path("/var/lib/apt/lists/deb.debian.org_debian_dists_bookworm_main_binary-amd64_Packages.lz4")


def _collection(name: str, pairs: Sequence[tuple[str, str]]) -> LabeledCollection:
    """A LabeledCollection of (label, text) pairs; titles are the texts' first 60 characters."""
    return LabeledCollection(name=name, texts=tuple(t for _, t in pairs), labels=tuple(label for label, _ in pairs),
                             titles=tuple(t[:60] for _, t in pairs), source="this machine", licence="various")


def _cached(name: str, build: Callable[[], list[tuple[str, str]]]) -> LabeledCollection:
    """Build a held-out collection once; later runs read it from HELD_OUT_DIR."""
    path = HELD_OUT_DIR / f"{name}.json"
    if not path.exists():
        HELD_OUT_DIR.mkdir(parents=True, exist_ok=True)
        path.write_text(json.dumps(build()), encoding="utf-8")
    return _collection(name, [(label, text) for label, text in json.loads(path.read_text(encoding="utf-8"))])


def _man_pages() -> list[tuple[str, str]]:
    found: list[tuple[str, str]] = []
    for section in MAN_SECTIONS:
        files = sorted(p for p in Path(f"/usr/share/man/man{section}").iterdir() if not p.is_symlink())
        for path in random.Random(0).sample(files, min(MAN_PER_SECTION, len(files))):
            shown = subprocess.run(f"man -l '{path}' 2>/dev/null | col -b", shell=True, capture_output=True,
                                   env={"MANWIDTH": "80", "PATH": "/usr/bin:/bin"}, check=False).stdout
            # the header and footer lines name the section ("LS(1)  General Commands Manual"): left out
            text = "\n".join(shown.decode("utf-8", "replace").strip().split("\n")[1:-1]).strip()
            if len(text.split()) >= 30:  # pages that only point to another page (.so) are left out
                found.append((section, text))
    return found


def _package_synopses() -> list[tuple[str, str]]:
    listing = subprocess.run(["lz4cat", str(APT_PACKAGES)], capture_output=True, check=True).stdout.decode()
    by_section: dict[str, set[str]] = {}
    for stanza in listing.split("\n\n"):
        section = re.search(r"^Section: (.+)$", stanza, re.M)
        synopsis = re.search(r"^Description: (.+)$", stanza, re.M)
        if section and synopsis and section.group(1) in SYNOPSIS_SECTIONS:
            by_section.setdefault(section.group(1), set()).add(synopsis.group(1).strip())
    found = []
    for section in SYNOPSIS_SECTIONS:
        texts = sorted(by_section.get(section, ()))
        found += [(section, t) for t in random.Random(0).sample(texts, min(SYNOPSES_PER_SECTION, len(texts)))]
    return found


END = "--end of package--"


def _package_descriptions() -> list[tuple[str, str]]:
    listing = subprocess.run(["dpkg-query", "-W", "-f=${Section}\\t${Description}\\n" + END + "\\n"],
                             capture_output=True, check=True).stdout.decode("utf-8", "replace")
    pairs = []
    for record in listing.split(END):
        section, _, description = record.strip("\n").partition("\t")
        lines = [line[1:] if line.startswith(" ") else line for line in description.split("\n")]
        text = "\n".join("" if line == "." else line for line in lines).strip()
        if section and text:
            pairs.append((section, text))
    sizes = Counter(section for section, _ in pairs)
    return sorted({(s, t) for s, t in pairs if sizes[s] >= 20})


HELD_OUT: dict[str, Callable[[], list[tuple[str, str]]]] = {
    "man_pages": _man_pages, "package_synopses": _package_synopses, "package_descriptions": _package_descriptions,
}


def load_any(name: str) -> LabeledCollection:
    """An open collection (its seeded sample) or a held-out one."""
    return _cached(name, HELD_OUT[name]) if name in HELD_OUT else load_sample(name)


def content_lengths(prepared: Prepared) -> np.ndarray:
    """Content words (tokens without stop words) of each distinct text, as pilewise counts them."""
    analyzer = Analyzer(stop_words=load_stop_words(None), stem=False)
    words = count_terms(prepared.texts, analyzer, 2, prepared.copies)[0]
    return np.asarray(words.sum(axis=1)).ravel()


def lengths(name: str) -> dict[str, Any]:
    prepared = prepare(load_any(name))
    raw = np.array([len(t.split()) for t in prepared.texts])
    content = content_lengths(prepared)
    return {"collection": name, "distinct": len(prepared.texts), "k": prepared.k_true,
            "words_median": float(np.median(raw)), "words_mean": float(raw.mean()),
            "content_median": float(np.median(content)), "content_mean": float(content.mean()),
            "rule_min_df": default_min_df(len(prepared.texts), float(np.median(content)))}


def pilewise_nmi(prepared: Prepared, seed: int, min_df: int | None) -> float:
    """pilewise's space at `min_df` (None: its default rule) clustered with its default k-means starts."""
    analyzer = Analyzer(stop_words=load_stop_words(None), stem=False)
    vectors = vectorize(prepared.texts, analyzer, VectorSettings(seed=seed, min_df=min_df), copies=prepared.copies)
    starts = kmeans_starts(RunOptions(source=Path("."), k=prepared.k_true), len(prepared.texts))
    return nmi(prepared, kmeans_clusters(vectors.space, prepared.copies, k=prepared.k_true, seed=seed,
                                         n_init=starts).labels)


def measure(name: str, seeds: Sequence[int], baselines: bool) -> dict[str, Any]:
    collection = load_any(name)
    prepared = prepare(collection)
    rows: dict[str, list[float]] = {}
    for seed in seeds:
        for key, min_df in (("min_df 2", 2), ("min_df 3", 3), ("rule", None)):
            rows.setdefault(key, []).append(pilewise_nmi(prepared, seed, min_df))
        for key in ("tfidf+kmeans", "tfidf+svd100+kmeans") if baselines else ():
            rows.setdefault(key, []).append(run_sklearn(collection, prepared.k_true, seed, svd=key != "tfidf+kmeans"))
        print(f"{name} seed {seed}: " + ", ".join(f"{k} {v[-1]:.3f}" for k, v in rows.items()), file=sys.stderr,
              flush=True)
    return {**lengths(name), "seeds": list(seeds), "nmi": rows}


def render(results: list[dict[str, Any]]) -> str:
    keys = ("min_df 2", "min_df 3", "rule", "tfidf+kmeans", "tfidf+svd100+kmeans")
    lines = ["| collection (seeds) | texts | k | words median / mean | content words median / mean | rule min_df | "
             + " | ".join(keys) + " |", "|---|" + "---|" * (5 + len(keys))]
    for r in results:
        cells = []
        for key in keys:
            values = r.get("nmi", {}).get(key)
            if not values:
                cells.append("")
                continue
            sd = statistics.stdev(values) if len(values) > 1 else 0.0
            cells.append(f"{statistics.mean(values):.3f} ± {sd:.3f}")
        lines.append(f"| {r['collection']} ({len(r.get('seeds', []))}) | {r['distinct']:,} | {r['k']} | "
                     f"{r['words_median']:.0f} / {r['words_mean']:.0f} | {r['content_median']:.0f} / "
                     f"{r['content_mean']:.0f} | {r['rule_min_df']} | " + " | ".join(cells) + " |")
    return "\n".join(lines)


def main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--collections", nargs="+", default=[*ORDER, *HELD_OUT])
    parser.add_argument("--seeds", type=int, default=5, help="seeds 0..N-1 (default 5)")
    parser.add_argument("--lengths", action="store_true", help="measure the lengths only")
    parser.add_argument("--no-baselines", action="store_true", help="leave out the scikit-learn pipelines")
    parser.add_argument("--out", type=Path, default=OUT_DIR / "min_df.json")
    parser.add_argument("--render", type=Path, help="print the table of a saved run and stop")
    args = parser.parse_args(argv)
    if args.render:
        print(render(json.loads(args.render.read_text(encoding="utf-8"))))
        return 0
    results = []
    for name in args.collections:
        results.append(lengths(name) if args.lengths else measure(name, range(args.seeds), not args.no_baselines))
        args.out.parent.mkdir(parents=True, exist_ok=True)
        args.out.write_text(json.dumps(results, indent=2) + "\n", encoding="utf-8")
    print(render(results))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
