"""Benchmark: placing N new documents in a saved run (`pilewise assign`) against reading and vectorizing them.

What it measures
----------------
The synthetic collection of `bench_pipeline.py` (20 planted topics in a Zipf background), with short texts of
20-60 words: N documents for placing, and a run (`pilewise run --k 20`) on another 10,000 of the same kind.
Then, in this process, timed once each (wall time, `time.perf_counter`):

a. reading the N documents (`ingest.reading.read_source`, as `run` and `assign` read them);
b. vectorizing them as a run does (`vectors.tfidf.vectorize`: counting, sublinear TF-IDF, LSA fitted on a
   sample of 20,000 and every row projected), the work a new run would repeat;
c. placing them (`assign.placing.place`: counts in the run's vocabulary, idf, LSA directions, nearest centroid,
   fit), and the whole command (`assign.command.assign_source`: reading, placing, writing the folder).

It prints the figures as a Markdown table; docs/performance.md quotes them.

How to run
----------
    python benchmarks/bench_assign.py                 # 100,000 documents, a few minutes
    python benchmarks/bench_assign.py --docs 20000    # quick check
"""

from __future__ import annotations

import argparse
import csv
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "src"))

import bench_pipeline  # noqa: E402

from pilewise.assign.command import assign_source  # noqa: E402
from pilewise.assign.placing import place  # noqa: E402
from pilewise.assign.saved import load_model  # noqa: E402
from pilewise.ingest.reading import ReadLimits, read_source  # noqa: E402
from pilewise.ingest.tables import ColumnChoice  # noqa: E402
from pilewise.options import RunOptions  # noqa: E402
from pilewise.vectors.streaming import default_workers  # noqa: E402
from pilewise.vectors.text import Analyzer, load_stop_words  # noqa: E402
from pilewise.vectors.tfidf import VectorSettings, vectorize  # noqa: E402

TRAIN_DOCS = 10_000


def split(source: Path, train: Path, new: Path, n_new: int) -> None:
    """The first TRAIN_DOCS rows for the run, the next `n_new` to place."""
    with source.open(encoding="utf-8", newline="") as handle:
        rows = csv.reader(handle)
        header = next(rows)
        with train.open("w", encoding="utf-8", newline="") as a, new.open("w", encoding="utf-8", newline="") as b:
            wa, wb = csv.writer(a, lineterminator="\n"), csv.writer(b, lineterminator="\n")
            wa.writerow(header)
            wb.writerow(header)
            for i, row in enumerate(rows):
                (wa if i < TRAIN_DOCS else wb).writerow(row)
                if i + 1 >= TRAIN_DOCS + n_new:
                    break


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--docs", type=int, default=100_000)
    args = parser.parse_args(argv)
    bench_pipeline.MIN_WORDS, bench_pipeline.MAX_WORDS = 20, 60  # short texts
    with tempfile.TemporaryDirectory() as tmp:
        work = Path(tmp)
        collection = bench_pipeline.generate_collection(TRAIN_DOCS + args.docs, work, seed=0)
        train, new = work / "train.csv", work / "new.csv"
        split(collection.csv_path, train, new, args.docs)
        start = time.perf_counter()
        subprocess.run([sys.executable, "-m", "pilewise.cli", "run", str(train), "--k", "20", "--out",
                        str(work / "site"), "--quiet", "--resamples", "2"], check=True)
        run_seconds = time.perf_counter() - start
        run = work / "site" / "runs" / "k20"

        start = time.perf_counter()
        ingested = read_source(new, ColumnChoice(), ReadLimits(100 * 2**20, 1_000_000))
        read_seconds = time.perf_counter() - start
        texts = [doc.text for doc in ingested.documents]
        start = time.perf_counter()
        vectorize(texts, Analyzer(stop_words=load_stop_words(None), stem=False), VectorSettings(),
                  workers=default_workers())
        vectorize_seconds = time.perf_counter() - start
        model = load_model(run)
        start = time.perf_counter()
        placement = place(texts, model)
        place_seconds = time.perf_counter() - start
        start = time.perf_counter()
        assign_source(run, RunOptions(source=new, k=2, quiet=True), out=work / "site", name="bench")
        command_seconds = time.perf_counter() - start
    print(f"{args.docs:,} new documents of 20-60 words; run on {TRAIN_DOCS:,} ({run_seconds:.1f} s); "
          f"{placement.none_share():.1%} fit none")
    print("| step | seconds |\n|---|---|")
    print(f"| reading (read_source) | {read_seconds:.1f} |")
    print(f"| vectorizing as a run does (vectorize) | {vectorize_seconds:.1f} |")
    print(f"| reading + vectorizing | {read_seconds + vectorize_seconds:.1f} |")
    print(f"| placing (place) | {place_seconds:.1f} |")
    print(f"| the whole assign command (read, place, write the folder) | {command_seconds:.1f} |")


if __name__ == "__main__":
    main()
