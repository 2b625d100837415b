"""Measure what the sampled LSA fit costs and saves: rows of the fit sample and power iterations.

What it measures
----------------
Above ``LSA_FIT_ROWS`` (20,000) distinct texts, pilewise fits LSA (randomized TruncatedSVD, 100 components)
on a seeded sample and projects every text. For each variant (all rows; 20,000 or 10,000 rows; 5, 3 or 2
power iterations; the sampled fit in single or double precision) on one collection it reports:

- ``energy``: the squared Frobenius norm of the whole TF-IDF matrix projected on the variant's components,
  over the same for a fit on all rows with 5 iterations: the share of the variance a fit on everything
  captures that the variant captures (the quantity randomized SVD's error bounds speak of: Halko,
  Martinsson & Tropp 2011, "Finding structure with randomness", SIAM Review 53(2));
- NMI of pilewise's k-means (4 starts) with the gold labels, for seeds 0, 1, 2, and the ARI of each seed's
  clustering with the all-rows fit's clustering of the same seed (and, for scale, ARI between seeds 0 and 1
  of the same variant);
- the CPU seconds of `vectorize` (tokenizing and counting included; one process).

Collections: the WordNet noun glosses (all 82,115, ``tests/open_sets.py``; ``bash corpora/fetch.sh --all``)
and, when given with ``--csv PATH --text-column C --label-column L``, any labelled CSV (the lead measured the
63,440 package synopses of this machine's Debian package lists, labelled by section).

How to run
----------
    OMP_NUM_THREADS=1 python benchmarks/measure_lsa_sample.py                  # WordNet, ~10 minutes
    OMP_NUM_THREADS=1 python benchmarks/measure_lsa_sample.py --csv pkgs.csv --delimiter ';' \\
        --text-column description --label-column section --k 20
"""

from __future__ import annotations

import argparse
import csv
import sys
import time
from pathlib import Path
from typing import Any

import numpy as np
from sklearn.decomposition import TruncatedSVD
from sklearn.metrics import adjusted_rand_score, normalized_mutual_info_score

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))  # the open-corpora loaders

import open_sets  # noqa: E402
import pilewise.vectors.tfidf as tfidf  # noqa: E402
from pilewise.clustering.kmeans import kmeans_clusters  # noqa: E402
from pilewise.vectors.text import Analyzer, load_stop_words  # noqa: E402

# (name, rows of the fit, power iterations, dtype of a sampled fit); a fit on all rows is in float64 always
VARIANTS = (("all rows, 5 iterations", 10**9, 5, np.float64),
            ("20,000 rows, 5 iterations, float32 (pilewise)", 20_000, 5, np.float32),
            ("20,000 rows, 5 iterations, float64", 20_000, 5, np.float64),
            ("10,000 rows, 5 iterations", 10_000, 5, np.float64), ("20,000 rows, 3 iterations", 20_000, 3, np.float64),
            ("20,000 rows, 2 iterations", 20_000, 2, np.float64))
SEEDS = (0, 1, 2)  # --seeds changes them


class _Iterations(TruncatedSVD):
    """TruncatedSVD with the power iterations of the variant being measured."""

    n_iter_now = 5

    def __init__(self, n_components: int = 2, *, algorithm: str = "randomized", n_iter: int = 5,
                 n_oversamples: int = 10, power_iteration_normalizer: str = "auto", random_state: Any = None,
                 tol: float = 0.0) -> None:
        super().__init__(n_components=n_components, algorithm=algorithm, n_iter=_Iterations.n_iter_now,
                         n_oversamples=n_oversamples, power_iteration_normalizer=power_iteration_normalizer,
                         random_state=random_state, tol=tol)


def _collection(args: argparse.Namespace) -> tuple[list[str], list[str]]:
    if args.csv is None:
        glosses = open_sets.load_wordnet_glosses(sample=None)
        return list(glosses.texts), list(glosses.labels)
    with open(args.csv, newline="", encoding="utf-8") as handle:
        rows = list(csv.DictReader(handle, delimiter=args.delimiter))
    return [r[args.text_column] for r in rows], [r[args.label_column] for r in rows]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--csv", type=Path, default=None)
    parser.add_argument("--delimiter", default=",")
    parser.add_argument("--text-column", default="text")
    parser.add_argument("--label-column", default="label")
    parser.add_argument("--k", type=int, default=26, help="clusters (default 26: WordNet's lexicographer files)")
    parser.add_argument("--variants", type=int, nargs="+", default=list(range(len(VARIANTS))),
                        help="which variants, by position (0, the fit on all rows, is every other's reference)")
    parser.add_argument("--seeds", type=int, default=len(SEEDS), help="k-means seeds 0..N-1 (default 3)")
    args = parser.parse_args()
    seeds = tuple(range(args.seeds))
    texts, labels = _collection(args)
    print(f"{len(texts):,} texts, {len(set(labels))} labels, k={args.k}", flush=True)
    analyzer = Analyzer(stop_words=load_stop_words(None, ("en",)), stem=False, languages=("en",))
    tfidf.TruncatedSVD = _Iterations  # type: ignore[misc]
    reference_energy = 0.0
    reference_labels: list[np.ndarray] = []
    print(f"| variant | energy | NMI (seeds {', '.join(map(str, seeds))}) | ARI with all rows | ARI seed 0 vs 1 "
          "| CPU s |")
    print("|---|---:|---|---|---:|---:|")
    for name, rows, iterations, dtype in (VARIANTS[0], *(VARIANTS[i] for i in args.variants if i)):
        tfidf.LSA_FIT_ROWS = rows
        tfidf.LSA_FIT_DTYPE = dtype
        _Iterations.n_iter_now = iterations
        started = time.process_time()
        vectors = tfidf.vectorize(texts, analyzer, tfidf.VectorSettings(seed=0), workers=1)
        cpu = time.process_time() - started
        assert vectors.lsa is not None and vectors.space_columns is not None and vectors.idf is not None
        weighted = tfidf.tfidf_rows(vectors.counts[:, vectors.space_columns].astype(np.float64), vectors.idf)
        energy = float(np.linalg.norm(weighted @ vectors.lsa.T) ** 2)
        reference_energy = reference_energy or energy
        found = [kmeans_clusters(vectors.space, np.ones(vectors.space.shape[0]), k=args.k, seed=seed, n_init=4,
                                 workers=1).labels for seed in seeds]
        reference_labels = reference_labels or found
        nmi = ", ".join(f"{normalized_mutual_info_score(labels, f):.3f}" for f in found)
        ari = ", ".join(f"{adjusted_rand_score(r, f):.2f}" for r, f in zip(reference_labels, found, strict=True))
        print(f"| {name} | {energy / reference_energy:.4f} | {nmi} | {ari} | "
              f"{adjusted_rand_score(found[0], found[1]):.2f} | {cpu:.1f} |", flush=True)


if __name__ == "__main__":
    main()
