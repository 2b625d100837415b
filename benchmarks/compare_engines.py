"""The spark engine against the local engine on an open corpus: agreement (ARI), NMI with the labels, time.

    PYTHONPATH=src:. python benchmarks/compare_engines.py [mini_newsgroups|reuters|foldoc] [--master local[2]]

Needs the corpora fetched (corpora/fetch.sh) and PySpark with Java 17. Prints one line per engine and the
agreement; docs/scale.md records what was measured.
"""

from __future__ import annotations

import argparse
import csv
import tempfile
import time
from pathlib import Path

from sklearn.metrics import adjusted_rand_score, normalized_mutual_info_score
from tests import open_sets

from pilewise.options import RunOptions
from pilewise.pipeline import run_collection

LOADERS = {"mini_newsgroups": open_sets.load_mini_newsgroups, "reuters": open_sets.load_reuters_sample,
           "foldoc": open_sets.load_foldoc}


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("corpus", nargs="?", default="mini_newsgroups", choices=sorted(LOADERS))
    parser.add_argument("--master", default="local[2]")
    parser.add_argument("--seeds", type=int, default=1)
    args = parser.parse_args()
    corpus = LOADERS[args.corpus]()
    k = len(set(corpus.labels))
    with tempfile.TemporaryDirectory() as scratch:
        source = Path(scratch) / "collection.csv"
        with source.open("w", encoding="utf-8", newline="") as handle:
            writer = csv.writer(handle)
            writer.writerow(["id", "title", "body"])
            writer.writerows((f"n{i}", t, x) for i, (x, t) in enumerate(zip(corpus.texts, corpus.titles, strict=True)))
        for seed in range(args.seeds):
            labels = {}
            for engine in ("local", "spark"):
                options = RunOptions(source=source, out=Path(scratch) / engine, k=k, seed=seed, quiet=True,
                                     engine=engine, spark_master=args.master, name=f"{engine}{seed}")
                start = time.perf_counter()
                outcome = run_collection(options)
                seconds = time.perf_counter() - start
                with (outcome.run_folder / "assignments.csv").open(encoding="utf-8") as handle:
                    rows = list(csv.DictReader(handle))
                labels[engine] = [int(r["cluster"]) for r in rows]
                gold = [corpus.labels[int(r["doc_id"][1:])] for r in rows]
                nmi = normalized_mutual_info_score(gold, labels[engine])
                print(f"{args.corpus} seed {seed} {engine}: NMI {nmi:.3f} in {seconds:.1f} s "
                      f"({len(rows)} documents, k={k})")
            print(f"{args.corpus} seed {seed}: ARI between engines "
                  f"{adjusted_rand_score(labels['local'], labels['spark']):.3f}")


if __name__ == "__main__":
    main()
