"""Measure the vectorizing and clustering choices of pilewise against labeled open corpora.

What it measures
----------------
On each open labeled collection (``open_sets``: mini_newsgroups, reuters_sample,
chat_categories, sentence_sources, wordnet_glosses with its 20,000-gloss sample, fortunes) it runs
pilewise's own ``vectorize`` + ``kmeans_clusters`` with k = the number of gold labels, once per seed, and
scores the clusters against the labels with scikit-learn: NMI (arithmetic mean), adjusted Rand index and
V-measure, plus the wall time (and the process CPU time) of vectorize + cluster. As in ``pilewise run``,
exact duplicate texts (after collapsing whitespace) are clustered once, weighted by their number of
copies; every document then takes its text's cluster and the scores are over all documents.

One factor is changed at a time around the current defaults (stem off, words only in the clustering
space, LSA 100 components, min_df = ``default_min_df(n)``, max_df 0.5, n_init 4):

1. ``stem``       Snowball stemming off / on;
2. ``phrases``    words only / words and two-word phrases in the clustering space (with the space's size);
3. ``lsa``        0 (k-means on the sparse TF-IDF), 50, 100, 200 components (``--lsa-levels`` to change);
4. ``min_df``     1, 2, the default, 5;  ``max_df``: 0.3, 0.5, 0.8, 1.0;
5. ``n_init``     1, 4, 10.

A ``reference`` row repeats the recipe of shared/CORPORA.md and corpora/README.md (no LSA, n_init 10) so
that its NMI can be set beside the baselines quoted there. Settings that resolve to the same thing (the
default min_df is 2 on every collection here) are run once and shared between tables.

The seed drives both the randomized SVD of LSA and the k-means starts. Figures are the mean and the
sample standard deviation over the seeds. Timings are wall-clock in one process on a shared machine:
compare them within a table, not across runs.

How to run
----------
    bash corpora/fetch.sh --all                        # once: the open corpora (PyYAML needed for chat)
    python benchmarks/measure_vectorizing.py           # everything: about 35 minutes on 2 busy cores
    python benchmarks/measure_vectorizing.py --collections mini_newsgroups reuters_sample --seeds 0
    python benchmarks/measure_vectorizing.py --sample 6000   # seeded 6,000-document sample of big ones

It prints one Markdown table per factor and writes every figure (per seed too) to
``benchmarks/.out/vectorizing.json`` and the tables to ``benchmarks/.out/vectorizing.md`` (``--out``
changes the JSON path; the Markdown goes beside it). ``--render benchmarks/.out/vectorizing.json`` prints
the tables of a saved run again without measuring.
"""

from __future__ import annotations

import argparse
import datetime as dt
import json
import os
import platform
import random
import statistics
import sys
import time
from collections.abc import Callable, Sequence
from dataclasses import asdict, dataclass, replace
from importlib.metadata import version
from pathlib import Path
from typing import Any

import numpy as np
from sklearn.metrics import adjusted_rand_score, normalized_mutual_info_score, v_measure_score

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))  # the open-corpora loaders

import open_sets
from open_sets import LabeledCollection
from pilewise.clustering.kmeans import kmeans_clusters
from pilewise.vectors.text import Analyzer, load_stop_words
from pilewise.vectors.tfidf import VectorSettings, default_min_df, vectorize

COLLECTIONS: dict[str, Callable[[], LabeledCollection]] = {
    "mini_newsgroups": open_sets.load_mini_newsgroups,
    "reuters_sample": open_sets.load_reuters_sample,
    "chat_categories": open_sets.load_chat_categories,
    "sentence_sources": open_sets.load_sentence_sources,
    "wordnet_glosses": lambda: open_sets.load_wordnet_glosses(sample=20000),
    "fortunes": open_sets.load_fortunes,
}
# NMI of plain TF-IDF + k-means (no LSA, n_init 10, seed 0) quoted in shared/CORPORA.md and corpora/README.md.
QUOTED_NMI: dict[str, tuple[float, float]] = {
    "mini_newsgroups": (0.47, 0.47),
    "reuters_sample": (0.72, 0.57),
    "chat_categories": (0.37, 0.38),
    "sentence_sources": (0.27, 0.27),
    "wordnet_glosses": (0.19, 0.18),
    "fortunes": (0.13, 0.13),
}
OUT_DIR = Path(__file__).resolve().parent / ".out"


@dataclass(frozen=True)
class Choice:
    """One set of settings; ``min_df`` None means pilewise's size-dependent default."""

    stem: bool = False
    bigrams_in_space: bool = False
    lsa_components: int = 100
    min_df: int | None = None
    max_df: float = 0.5
    n_init: int = 4

    def resolved(self, n_texts: int) -> Choice:
        """The same choice with the default min_df replaced by its value for `n_texts` distinct texts."""
        return replace(self, min_df=default_min_df(n_texts) if self.min_df is None else self.min_df)

    def key(self) -> str:
        """A stable name for the JSON, e.g. 'stem=0 phrases=0 lsa=100 min_df=2 max_df=0.5 n_init=4'."""
        return (
            f"stem={int(self.stem)} phrases={int(self.bigrams_in_space)} lsa={self.lsa_components} "
            f"min_df={self.min_df} max_df={self.max_df:g} n_init={self.n_init}"
        )


DEFAULT = Choice()
# factor -> [(level shown in the table, choice)]; the first level of each list is shown first.
FACTORS: dict[str, list[tuple[str, Choice]]] = {
    "stem": [("off (default)", DEFAULT), ("Snowball", replace(DEFAULT, stem=True))],
    "phrases": [("words only (default)", DEFAULT), ("words + phrases", replace(DEFAULT, bigrams_in_space=True))],
    "lsa": [],  # filled by lsa_levels()
    "min_df": [
        ("1", replace(DEFAULT, min_df=1)),
        ("2", replace(DEFAULT, min_df=2)),
        ("default", DEFAULT),
        ("5", replace(DEFAULT, min_df=5)),
    ],
    "max_df": [
        ("0.3", replace(DEFAULT, max_df=0.3)),
        ("0.5 (default)", DEFAULT),
        ("0.8", replace(DEFAULT, max_df=0.8)),
        ("1.0", replace(DEFAULT, max_df=1.0)),
    ],
    "n_init": [
        ("1", replace(DEFAULT, n_init=1)),
        ("4 (default)", DEFAULT),
        ("10", replace(DEFAULT, n_init=10)),
    ],
    "reference": [("no LSA, n_init 10", replace(DEFAULT, lsa_components=0, n_init=10))],
}


def lsa_levels(components: Sequence[int]) -> list[tuple[str, Choice]]:
    """The LSA factor's levels: 0 is k-means on the sparse TF-IDF."""
    levels = []
    for n in sorted(set(components)):
        label = "off (sparse TF-IDF)" if n == 0 else f"{n} (default)" if n == DEFAULT.lsa_components else str(n)
        levels.append((label, replace(DEFAULT, lsa_components=n)))
    return levels


FACTORS["lsa"] = lsa_levels([0, 50, 100, 200])


@dataclass(frozen=True)
class Distinct:
    """Distinct texts of a collection, their copy counts, and the distinct text of every document."""

    texts: list[str]
    copies: np.ndarray
    text_of_doc: np.ndarray


def distinct_texts(texts: Sequence[str]) -> Distinct:
    """Group exact duplicates after collapsing whitespace, as pilewise's pipeline does."""
    index_of: dict[str, int] = {}
    firsts: list[str] = []
    text_of_doc = np.empty(len(texts), dtype=np.int64)
    for i, text in enumerate(texts):
        t = index_of.setdefault(" ".join(text.split()), len(firsts))
        if t == len(firsts):
            firsts.append(text)
        text_of_doc[i] = t
    return Distinct(firsts, np.bincount(text_of_doc, minlength=len(firsts)), text_of_doc)


def load(name: str, sample: int | None) -> tuple[LabeledCollection, bool]:
    """Load a collection and, when it holds more than `sample` documents, keep a seeded sample of them."""
    collection = COLLECTIONS[name]()
    n = len(collection.texts)
    if sample is None or n <= sample:
        return collection, False
    keep = sorted(random.Random(0).sample(range(n), sample))
    return (
        replace(
            collection,
            texts=tuple(collection.texts[i] for i in keep),
            labels=tuple(collection.labels[i] for i in keep),
            titles=tuple(collection.titles[i] for i in keep),
        ),
        True,
    )


def measure_once(distinct: Distinct, labels: Sequence[str], k: int, choice: Choice, seed: int) -> dict[str, Any]:
    """Vectorize and cluster once with a fresh analyzer; score against the labels of all documents."""
    settings = VectorSettings(
        min_df=choice.min_df,
        max_df=choice.max_df,
        bigrams_in_space=choice.bigrams_in_space,
        lsa_components=choice.lsa_components,
        seed=seed,
    )
    cpu_start = time.process_time()
    start = time.perf_counter()
    analyzer = Analyzer(stop_words=load_stop_words(None), stem=choice.stem)
    vectors = vectorize(distinct.texts, analyzer, settings)
    vectorized = time.perf_counter()
    clustering = kmeans_clusters(vectors.space, distinct.copies.astype(float), k=k, seed=seed, n_init=choice.n_init)
    done = time.perf_counter()
    cpu_seconds = time.process_time() - cpu_start
    predicted = clustering.labels[distinct.text_of_doc]
    return {
        "seed": seed,
        "nmi": float(normalized_mutual_info_score(labels, predicted, average_method="arithmetic")),
        "ari": float(adjusted_rand_score(labels, predicted)),
        "v_measure": float(v_measure_score(labels, predicted)),
        "seconds": done - start,
        "vectorize_seconds": vectorized - start,
        "cluster_seconds": done - vectorized,
        "cpu_seconds": cpu_seconds,  # all threads of this process: steadier than wall time on a busy machine
        "clusters_found": int(np.unique(clustering.labels).size),
        "load_average_1min": os.getloadavg()[0],
        "facts": dict(vectors.facts),
    }


def mean_sd(values: Sequence[float]) -> tuple[float, float]:
    """Mean and sample standard deviation (0 for a single value)."""
    return statistics.fmean(values), statistics.stdev(values) if len(values) > 1 else 0.0


def summarize(runs: list[dict[str, Any]], baseline: list[dict[str, Any]]) -> dict[str, Any]:
    """Mean and sd of every score and time; the NMI change from the default, paired by seed."""
    out: dict[str, Any] = {}
    for metric in ("nmi", "ari", "v_measure", "seconds", "vectorize_seconds", "cluster_seconds", "cpu_seconds"):
        if any(metric not in r for r in runs):
            continue  # cpu_seconds is missing from JSON files written before it was recorded
        mean, sd = mean_sd([r[metric] for r in runs])
        out[metric] = {"mean": mean, "sd": sd, "min": min(r[metric] for r in runs)}
    base_by_seed = {r["seed"]: r["nmi"] for r in baseline}
    deltas = [r["nmi"] - base_by_seed[r["seed"]] for r in runs if r["seed"] in base_by_seed]
    mean, sd = mean_sd(deltas) if deltas else (float("nan"), float("nan"))
    out["nmi_minus_default"] = {"mean": mean, "sd": sd}
    out["space_terms"] = runs[0]["facts"]["space_terms"]
    out["terms"] = runs[0]["facts"]["terms"]
    out["min_df"] = runs[0]["facts"]["min_df"]
    out["dims"] = runs[0]["facts"]["lsa_components"] or runs[0]["facts"]["space_terms"]
    return out


def fmt(stat: dict[str, float], digits: int = 3, signed: bool = False) -> str:
    """'0.472 ± 0.012'."""
    sign = "+" if signed else ""
    return f"{stat['mean']:{sign}.{digits}f} ± {stat['sd']:.{digits}f}"


def factor_table(factor: str, results: dict[str, Any], names: list[str]) -> str:
    """One Markdown table: a row per collection and level; dims is the number of LSA components or terms used."""
    lines = [
        f"#### {factor}",
        "",
        "| collection | level | NMI | ARI | V-measure | NMI − default | time s (fastest) | space terms | dims |",
        "|---|---|---|---|---|---|---|---|---|",
    ]
    for name in names:
        coll = results[name]
        for level, key in coll["factors"][factor]:
            s = coll["summaries"][key]
            lines.append(
                f"| {name} | {level} | {fmt(s['nmi'])} | {fmt(s['ari'])} | {fmt(s['v_measure'])} "
                f"| {fmt(s['nmi_minus_default'], signed=True)} | {fmt(s['seconds'], 2)} ({s['seconds']['min']:.2f}) "
                f"| {s['space_terms']:,} | {s['dims']:,} |"
            )
    return "\n".join(lines)


def collections_table(results: dict[str, Any], names: list[str]) -> str:
    """Size of every collection and the NMI of the reference recipe beside the quoted baselines."""
    lines = [
        "| collection | docs | distinct texts | labels (k) | min_df used | NMI default | NMI reference "
        "(no LSA, n_init 10), seeds / seed 0 | quoted NMI (CORPORA.md / corpora README) |",
        "|---|---|---|---|---|---|---|---|",
    ]
    for name in names:
        coll = results[name]
        default = coll["summaries"][coll["default_key"]]
        ref_key = coll["factors"]["reference"][0][1]
        ref_runs = coll["runs"][ref_key]
        seed0 = next((r["nmi"] for r in ref_runs if r["seed"] == 0), float("nan"))
        quoted = QUOTED_NMI.get(name, (float("nan"), float("nan")))
        sampled = " (sample)" if coll["sampled"] else ""
        lines.append(
            f"| {name} | {coll['docs']:,}{sampled} | {coll['distinct_texts']:,} | {coll['k']} | {default['min_df']} "
            f"| {fmt(default['nmi'])} | {fmt(coll['summaries'][ref_key]['nmi'])} / {seed0:.3f} "
            f"| {quoted[0]:.2f} / {quoted[1]:.2f} |"
        )
    return "\n".join(lines)


def machine() -> dict[str, Any]:
    """CPU model, core count and library versions."""
    cpu = platform.processor() or platform.machine()
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                cpu = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    return {
        "cpu": cpu,
        "cores": os.cpu_count(),
        "platform": platform.platform(),
        "python": platform.python_version(),
        **{pkg: version(pkg) for pkg in ("numpy", "scipy", "scikit-learn", "nltk", "pilewise")},
    }


def run_collection(
    name: str, seeds: Sequence[int], sample: int | None, factors: dict[str, list[tuple[str, Choice]]]
) -> dict[str, Any]:
    """Every distinct choice of the given factors (name -> levels), once per seed, on one collection."""
    collection, sampled = load(name, sample)
    labels = list(collection.labels)
    k = len(set(labels))
    distinct = distinct_texts(collection.texts)
    n_texts = len(distinct.texts)
    default_key = DEFAULT.resolved(n_texts).key()
    wanted: dict[str, Choice] = {default_key: DEFAULT.resolved(n_texts)}
    table: dict[str, list[tuple[str, str]]] = {}
    for factor, levels in factors.items():
        table[factor] = []
        for level, choice in levels:
            resolved = choice.resolved(n_texts)
            wanted.setdefault(resolved.key(), resolved)
            shown = f"default ({resolved.min_df})" if factor == "min_df" and choice.min_df is None else level
            table[factor].append((shown, resolved.key()))
    measure_once(distinct, labels, k, wanted[default_key], seeds[0])  # warm-up, not timed: imports, thread pools
    runs: dict[str, list[dict[str, Any]]] = {}
    for key, choice in wanted.items():
        runs[key] = []
        for seed in seeds:
            result = measure_once(distinct, labels, k, choice, seed)
            runs[key].append(result)
            print(
                f"  {name:16} {key:60} seed {seed}: NMI {result['nmi']:.3f} ARI {result['ari']:.3f} "
                f"V {result['v_measure']:.3f} {result['seconds']:.2f}s",
                file=sys.stderr,
                flush=True,
            )
    summaries = {key: summarize(r, runs[default_key]) for key, r in runs.items()}
    return {
        "docs": len(collection.texts),
        "sampled": sampled,
        "distinct_texts": n_texts,
        "k": k,
        "source": collection.source,
        "default_key": default_key,
        "choices": {key: asdict(choice) for key, choice in wanted.items()},
        "factors": table,
        "summaries": summaries,
        "runs": runs,
    }


def render(report: dict[str, Any]) -> str:
    """The Markdown tables of a report (summaries recomputed from the per-seed runs)."""
    results = report["collections"]
    names = list(results)
    for coll in results.values():
        baseline = coll["runs"][coll["default_key"]]
        coll["summaries"] = {key: summarize(runs, baseline) for key, runs in coll["runs"].items()}
    factors = list(results[names[0]]["factors"]) if names else []
    m = report["machine"]
    sampled = f"; collections above {report['sample']:,} documents sampled" if report.get("sample") else ""
    parts = [
        f"Measured {report['started']} to {report.get('finished', '(unfinished)')} on {m['cores']} cores "
        f"({m['cpu']}), Python {m['python']}, scikit-learn {m['scikit-learn']}, numpy {m['numpy']}; "
        f"seeds {report['seeds']}; mean ± sample sd{sampled}.",
        "",
        collections_table(results, names),
    ]
    parts += ["", *("\n" + factor_table(f, results, names) for f in factors if f != "reference")]
    return "\n".join(parts) + "\n"


def main(argv: Sequence[str] | None = None) -> int:
    """Parse options, measure (or reload a JSON), print the tables and write the JSON and Markdown."""
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n", 1)[0])
    parser.add_argument("--collections", nargs="+", choices=list(COLLECTIONS), default=list(COLLECTIONS))
    parser.add_argument("--seeds", nargs="+", type=int, default=[0, 1, 2])
    parser.add_argument(
        "--factors", nargs="+", choices=list(FACTORS), default=list(FACTORS), help="factors to measure (default all)"
    )
    parser.add_argument(
        "--sample", type=int, default=None, help="keep a seeded sample of this many documents of larger collections"
    )
    parser.add_argument(
        "--lsa-levels", nargs="+", type=int, default=[0, 50, 100, 200], help="LSA components to try (0 = no LSA)"
    )
    parser.add_argument("--out", type=Path, default=OUT_DIR / "vectorizing.json", help="JSON output path")
    parser.add_argument(
        "--render", type=Path, default=None, metavar="JSON", help="measure nothing: print the tables of a saved JSON"
    )
    args = parser.parse_args(argv)
    if args.render is not None:
        print(render(json.loads(args.render.read_text(encoding="utf-8"))))
        return 0
    chosen = {**FACTORS, "lsa": lsa_levels(args.lsa_levels)}
    factors = {name: chosen[name] for name in dict.fromkeys([*args.factors, "reference"])}

    started = dt.datetime.now(dt.UTC)
    report: dict[str, Any] = {
        "started": started.isoformat(timespec="seconds"),
        "command": " ".join(
            ["python", "benchmarks/measure_vectorizing.py", *(argv if argv is not None else sys.argv[1:])]
        ),
        "machine": machine(),
        "seeds": list(args.seeds),
        "sample": args.sample,
        "default": asdict(DEFAULT),
        "collections": {},
    }
    args.out.parent.mkdir(parents=True, exist_ok=True)
    for name in args.collections:
        print(f"{name} ...", file=sys.stderr, flush=True)
        report["collections"][name] = run_collection(name, args.seeds, args.sample, factors)
        args.out.write_text(json.dumps(report, indent=1), encoding="utf-8")  # partial results survive a crash
    report["finished"] = dt.datetime.now(dt.UTC).isoformat(timespec="seconds")
    args.out.write_text(json.dumps(report, indent=1), encoding="utf-8")
    markdown = render(report)
    args.out.with_suffix(".md").write_text(markdown, encoding="utf-8")
    print(markdown)
    print(f"wrote {args.out} and {args.out.with_suffix('.md')}", file=sys.stderr)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
