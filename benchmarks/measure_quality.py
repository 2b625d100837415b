"""Quality target: pilewise at its defaults against standard scikit-learn pipelines, on every open corpus.

What it measures
----------------
On each open labeled collection (``tests/open_sets.py``; the large ones on a seeded sample, see
``SAMPLES``) and for each seed 0-4, NMI (arithmetic mean) against the gold labels, with k = the number of
gold labels, of:

- ``pilewise``: pilewise's own ``vectorize`` (defaults: sublinear TF-IDF of words, LSA 100, unit rows) and
  ``kmeans_clusters`` with the default number of starts (``options.kmeans_starts``); exact duplicate texts
  are clustered once, weighted by their copies, as ``pilewise run`` does;
- ``tfidf+kmeans``: scikit-learn ``TfidfVectorizer(stop_words="english", sublinear_tf=True, max_df=0.5,
  min_df=2)`` + ``KMeans(n_init=10)``;
- ``tfidf+svd100+kmeans``: the same TF-IDF + ``TruncatedSVD(100)`` + ``Normalizer()`` + ``KMeans(n_init=10)``.

NMI is over all documents (every copy takes its text's cluster). pilewise's k-means is also run with 4, 10
and 20 starts on the same space (the "k-means starts" question); its seconds are k-means alone, those of
the scikit-learn pipelines include vectorizing. It also holds the helpers that the other measuring
scripts share (``load_sample``, ``pilewise_space``).

How to run
----------
    bash corpora/fetch.sh --all
    python benchmarks/measure_quality.py                   # all collections, seeds 0-4 (about 10 min)
    python benchmarks/measure_quality.py --collections foldoc --seeds 0 1

It prints a Markdown table and writes every figure to ``benchmarks/.out/quality.json``.
"""

from __future__ import annotations

import argparse
import json
import random
import statistics
import sys
import time
from collections.abc import Sequence
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parent / "tests"))
sys.path.insert(0, str(HERE.parent / "src"))

from open_sets import AVAILABLE, LabeledCollection  # noqa: E402
from pilewise.vectors.text import Analyzer, load_stop_words  # noqa: E402
from pilewise.vectors.tfidf import VectorSettings, vectorize  # noqa: E402

OUT_DIR = HERE / ".out"
SAMPLES: dict[str, int] = {"sentence_sources": 6000, "wordnet_glosses": 6000, "fortunes": 6000}
"""Seeded samples of the large collections (documents kept), to spare a shared 2-core machine."""
ORDER = ("mini_newsgroups", "reuters_sample", "foldoc", "chat_categories", "sentence_sources",
         "wordnet_glosses", "fortunes")


@dataclass(frozen=True)
class Prepared:
    """A collection's distinct texts with copies, the gold label of every document and its LSA space."""

    name: str
    texts: list[str]
    copies: np.ndarray
    text_of_doc: np.ndarray
    labels: np.ndarray
    k_true: int
    documents: int


def load_sample(name: str, sample: int | None = None) -> LabeledCollection:
    """Load a collection; keep a seeded sample (seed 0) of `sample` documents (default: SAMPLES)."""
    kwargs: dict[str, Any] = {"sample": None} if name == "wordnet_glosses" else {}
    collection = AVAILABLE[name](**kwargs)
    size = sample if sample is not None else SAMPLES.get(name)
    if size is None or len(collection.texts) <= size:
        return collection
    keep = sorted(random.Random(0).sample(range(len(collection.texts)), size))
    return replace(collection, texts=tuple(collection.texts[i] for i in keep),
                   labels=tuple(collection.labels[i] for i in keep),
                   titles=tuple(collection.titles[i] for i in keep))


def prepare(collection: LabeledCollection) -> Prepared:
    """Group exact duplicates after collapsing whitespace, as pilewise's pipeline does."""
    index_of: dict[str, int] = {}
    firsts: list[str] = []
    text_of_doc = np.empty(len(collection.texts), dtype=np.int64)
    for i, text in enumerate(collection.texts):
        t = index_of.setdefault(" ".join(text.split()), len(firsts))
        if t == len(firsts):
            firsts.append(text)
        text_of_doc[i] = t
    names = sorted(set(collection.labels))
    labels = np.array([names.index(label) for label in collection.labels])
    return Prepared(collection.name, firsts, np.bincount(text_of_doc, minlength=len(firsts)).astype(float),
                    text_of_doc, labels, len(names), len(collection.texts))


def pilewise_space(prepared: Prepared, seed: int) -> np.ndarray:
    """pilewise's default clustering space (LSA rows of unit length) of the distinct texts."""
    analyzer = Analyzer(stop_words=load_stop_words(None), stem=False)
    vectors = vectorize(prepared.texts, analyzer, VectorSettings(seed=seed), copies=prepared.copies)
    return np.asarray(vectors.space)


def text_labels(prepared: Prepared) -> np.ndarray:
    """The gold label of each distinct text: that of its first document."""
    first = np.full(len(prepared.texts), -1)
    for doc in range(prepared.text_of_doc.size - 1, -1, -1):
        first[prepared.text_of_doc[doc]] = doc
    return prepared.labels[first]


def nmi(prepared: Prepared, text_clusters: np.ndarray) -> float:
    """NMI (arithmetic) over all documents, each taking its text's cluster."""
    from sklearn.metrics import normalized_mutual_info_score

    return float(normalized_mutual_info_score(prepared.labels, text_clusters[prepared.text_of_doc]))


STARTS = (4, 10, 20)
"""k-means++ starts compared for pilewise (item "k-means starts" of issue 11)."""


def run_pilewise(prepared: Prepared, seed: int) -> dict[str, tuple[float, float]]:
    """NMI and k-means seconds of pilewise's space clustered with the default starts and with each of STARTS."""
    from pilewise.clustering.kmeans import kmeans_clusters
    from pilewise.options import RunOptions, kmeans_starts

    space = pilewise_space(prepared, seed)
    default = kmeans_starts(RunOptions(source=Path("."), k=prepared.k_true), len(prepared.texts))
    found: dict[str, tuple[float, float]] = {}
    for starts in sorted({default, *STARTS}):
        started = time.perf_counter()
        clustering = kmeans_clusters(space, prepared.copies, k=prepared.k_true, seed=seed, n_init=starts)
        found[f"starts_{starts}"] = (nmi(prepared, clustering.labels), time.perf_counter() - started)
    found["pilewise"] = found[f"starts_{default}"]
    return found


def run_sklearn(collection: LabeledCollection, k: int, seed: int, *, svd: bool) -> float:
    from sklearn.cluster import KMeans
    from sklearn.decomposition import TruncatedSVD
    from sklearn.feature_extraction.text import TfidfVectorizer
    from sklearn.metrics import normalized_mutual_info_score
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import Normalizer

    steps: list[Any] = [TfidfVectorizer(stop_words="english", sublinear_tf=True, max_df=0.5, min_df=2)]
    if svd:
        steps += [TruncatedSVD(100, random_state=seed), Normalizer()]
    space = make_pipeline(*steps).fit_transform(collection.texts)
    labels = KMeans(k, n_init=10, random_state=seed).fit_predict(space)
    return float(normalized_mutual_info_score(collection.labels, labels))


def measure(name: str, seeds: Sequence[int]) -> dict[str, Any]:
    collection = load_sample(name)
    prepared = prepare(collection)
    rows: dict[str, list[float]] = {}
    seconds: dict[str, float] = {}
    for seed in seeds:
        for key, (value, spent) in run_pilewise(prepared, seed).items():
            rows.setdefault(key, []).append(value)
            seconds[key] = seconds.get(key, 0.0) + spent  # k-means only
        for key in ("tfidf+kmeans", "tfidf+svd100+kmeans"):
            started = time.perf_counter()
            rows.setdefault(key, []).append(run_sklearn(collection, prepared.k_true, seed, svd=key != "tfidf+kmeans"))
            seconds[key] = seconds.get(key, 0.0) + time.perf_counter() - started  # vectorizing included
    return {"collection": name, "documents": prepared.documents, "distinct": len(prepared.texts),
            "k": prepared.k_true, "sampled": name in SAMPLES, "nmi": rows,
            "seconds_per_fit": {key: seconds[key] / len(seeds) for key in rows}}


def table(results: list[dict[str, Any]]) -> str:
    lines = ["| collection | docs | k | pilewise | TF-IDF + k-means | TF-IDF + SVD(100) + norm + k-means | "
             "pilewise - best |", "|---|---|---|---|---|---|---|"]
    for r in results:
        means = {key: statistics.mean(v) for key, v in r["nmi"].items()}
        sds = {key: statistics.stdev(v) if len(v) > 1 else 0.0 for key, v in r["nmi"].items()}
        best = max(means["tfidf+kmeans"], means["tfidf+svd100+kmeans"])
        docs = f"{r['documents']:,}" + (" (sample)" if r["sampled"] else "")
        cells = [f"{means[key]:.3f} ± {sds[key]:.3f}" for key in ("pilewise", "tfidf+kmeans", "tfidf+svd100+kmeans")]
        lines.append(f"| {r['collection']} | {docs} | {r['k']} | " + " | ".join(cells)
                     + f" | {means['pilewise'] - best:+.3f} |")
    lines += ["", "| collection | " + " | ".join(f"{s} starts: NMI, s" for s in STARTS) + " |",
              "|---|" + "---|" * len(STARTS)]
    for r in results:
        cells = []
        for starts in STARTS:
            values = r["nmi"][f"starts_{starts}"]
            cells.append(f"{statistics.mean(values):.3f}, {r['seconds_per_fit'][f'starts_{starts}']:.2f}")
        lines.append(f"| {r['collection']} | " + " | ".join(cells) + " |")
    return "\n".join(lines)


def main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--collections", nargs="+", default=list(ORDER))
    parser.add_argument("--seeds", nargs="+", type=int, default=[0, 1, 2, 3, 4])
    parser.add_argument("--out", type=Path, default=OUT_DIR / "quality.json")
    parser.add_argument("--render", type=Path, help="print the tables of a saved run and stop")
    args = parser.parse_args(argv)
    if args.render:
        print(table(json.loads(args.render.read_text(encoding="utf-8"))))
        return 0
    results = []
    for name in args.collections:
        results.append(measure(name, args.seeds))
        print(f"{name}: done", file=sys.stderr, flush=True)
        args.out.parent.mkdir(parents=True, exist_ok=True)
        args.out.write_text(json.dumps(results, indent=2) + "\n", encoding="utf-8")
    print(table(results))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
