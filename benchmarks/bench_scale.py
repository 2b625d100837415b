"""Benchmark: how pilewise scales from ten thousand to a million documents.

What it measures
----------------
One synthetic collection is generated inside this script (seeded numpy, vectorized, written in chunks
of 10,000 documents so that it never sits in memory whole): documents of 20-120 made-up pronounceable
words, ~60% drawn from one of 20 planted topics (150 topic words each) and ~40% from a Zipf-like
background vocabulary of 30,000 words (the vocabulary of bench_pipeline.py). For every size N asked
for, the first N documents are written to ``synthetic-N.csv`` (``doc_id,text``) and their planted
topics to ``synthetic-N-topics.csv`` (``doc_id,topic``), all in one pass; the smaller collections are
prefixes of the larger ones. Its time is reported apart from the pipelines': the time until each file
was complete, split into vocabulary, drawing, assembling text bytes and writing.

For every size, each in its own fresh subprocess:

a. ``pilewise-stream``  ``pilewise run <csv> --k 20 --mode stream --out <dir> --quiet``;
b. ``pilewise-memory``  the same with ``--mode memory`` (sizes up to --memory-up-to only);
c. ``bare-minibatch``   the bare reference for streaming: pandas.read_csv, TfidfVectorizer(stop_words="english",
                        sublinear_tf=True, min_df=<pilewise's default for N>, max_df=0.5), TruncatedSVD(100),
                        Normalizer, MiniBatchKMeans(20, n_init=4, batch_size=4096), labels written to CSV;
d. ``bare-kmeans``      the bare in-memory reference: ``bare_child`` of bench_pipeline.py with LSA, i.e. the
                        same with KMeans(20, n_init=4) (sizes up to --memory-up-to only).

For each: wall time (interpreter start and imports included), CPU time (user + system), peak resident
memory of that one child (``ru_maxrss`` from ``os.wait4``; the child is started from a small launcher
process, because on Linux a child's ``ru_maxrss`` never reports less than the resident memory of the
process that spawned it, ~300 MB for this script), the normalized mutual information of its
clusters with the planted topics (pilewise's from ``<dir>/runs/<name>/assignments.csv``, its id and
cluster columns found from the file's header) and the stage timings (pilewise's ``timings_seconds`` from
``manifest.json``). While ``pilewise run`` has no ``--mode`` option, pilewise runs once per size without
it, as ``pilewise-default``.

The script prints the machine, a Markdown table (size, mode, wall s, CPU s, peak MB, NMI, s and MB per
1,000 documents), pilewise's stage timings, and the growth: for successive sizes the growth of time and
memory divided by the growth of size (1.0 = linear), and a log-log slope fitted over all sizes (near 1.0 =
linear; memory also less the resident memory of ``import pilewise.cli, pilewise.pipeline``, the fixed part).
Every figure goes to ``benchmarks/.out/bench-scale-<UTC time>.json`` and a log-log plot of time and peak memory against
documents to ``benchmarks/.out/bench-scale-<UTC time>.svg`` (the folder is gitignored).

How to run
----------
    python benchmarks/bench_scale.py --sizes 10000 30000 --memory-up-to 30000   # a quick check, a few minutes
    python benchmarks/bench_scale.py                # 10k to 1M documents: likely an hour or more, ~680 MB of CSV
    python benchmarks/bench_scale.py --sizes 1000000 --generate-only --workdir /tmp/scale  # generation alone

Options:
  --sizes N ...        collection sizes (default 10000 30000 100000 300000 1000000);
  --memory-up-to N     also run pilewise --mode memory and bare-kmeans at sizes up to N (default 100000);
  --k K                number of clusters (default 20);
  --workdir DIR        keep the generated CSVs and every output there (default: a temporary folder, removed at
                       the end; each run's site is then removed as soon as it is measured);
  --seed S             seed of the synthetic collection (default 0);
  --threads T          set OMP_NUM_THREADS, OPENBLAS_NUM_THREADS and MKL_NUM_THREADS for every child alike
                       (see bench_pipeline.py: one thread per process gives steadier figures on a shared machine);
  --repeat R           run every pipeline R times: median run by wall time, largest peak memory (default 1);
  --generate-only      generate the collections, report the generation time, and stop.
"""

from __future__ import annotations

import argparse
import csv
import json
import math
import shutil
import sys
import time
from dataclasses import asdict, dataclass
from pathlib import Path
from typing import Any

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))

import bench_pipeline  # noqa: E402
from bench_pipeline import (  # noqa: E402
    BACKGROUND_WORDS,
    LSA_COMPONENTS,
    MAX_DF,
    MINIBATCH_SIZE,
    N_INIT,
    OUT_FOLDER,
    TOPIC_SHARE,
    TOPIC_WORDS,
    TOPICS,
    Collection,
    Measurement,
    make_words,
    measure,
    pilewise_command,
    run_measured,
    zipf_weights,
)

DEFAULT_SIZES = (10_000, 30_000, 100_000, 300_000, 1_000_000)
DEFAULT_MEMORY_UP_TO = 100_000
MIN_WORDS, MAX_WORDS = 20, 120
SENTENCE_WORDS = (6, 18)
CHUNK_DOCS = 10_000
ID_DIGITS = 7  # doc ids d0000000 .. d9999999, as in bench_pipeline.py
# word forms in the vocabulary blob: word * FORMS + CAPITALIZED * capital + ending
ENDINGS = (" ", ". ", ".\n")  # inside a sentence, end of a sentence, end of the document (and of its CSV row)
FORMS = 2 * len(ENDINGS)
CAPITALIZED = len(ENDINGS)


# --------------------------------------------------------------------------------------------
# Synthetic collection, generated in vectorized chunks and written as it goes
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Vocabulary:
    """Every word in its written forms, as one byte array, and the Zipf-like distributions to draw from."""

    blob: np.ndarray  # uint8, every form of every word back to back
    form_starts: np.ndarray  # int64, (words * FORMS,)
    form_lengths: np.ndarray  # int64, (words * FORMS,)
    background_cdf: np.ndarray  # (BACKGROUND_WORDS,)
    topic_cdf: np.ndarray  # (TOPIC_WORDS,)


@dataclass
class GenerationTimes:
    vocabulary: float = 0.0
    drawing: float = 0.0
    assembling: float = 0.0
    writing: float = 0.0

    def total(self) -> float:
        return self.vocabulary + self.drawing + self.assembling + self.writing


def build_vocabulary(seed: int) -> Vocabulary:
    """Background words then topic words (word BACKGROUND_WORDS + rank * TOPICS + topic), each in FORMS forms."""
    from sklearn.feature_extraction.text import ENGLISH_STOP_WORDS

    rng = np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(0,)))
    banned = frozenset(ENGLISH_STOP_WORDS)
    background = make_words(BACKGROUND_WORDS, rng, banned)
    # dealt round-robin, as in bench_pipeline.py: topic t's word of rank r is topic_words[r * TOPICS + t]
    topic_words = make_words(TOPICS * TOPIC_WORDS, rng, banned | frozenset(background))
    pieces = [
        (form + ending).encode("ascii")
        for word in background + topic_words
        for form in (word, word.capitalize())
        for ending in ENDINGS
    ]
    lengths = np.fromiter(map(len, pieces), dtype=np.int64, count=len(pieces))
    starts = np.concatenate([[0], np.cumsum(lengths)[:-1]])
    return Vocabulary(
        blob=np.frombuffer(b"".join(pieces), dtype=np.uint8),
        form_starts=starts,
        form_lengths=lengths,
        background_cdf=np.cumsum(zipf_weights(BACKGROUND_WORDS, 1.05, 2.7)),
        topic_cdf=np.cumsum(zipf_weights(TOPIC_WORDS, 0.8, 1.0)),
    )


def draw(cdf: np.ndarray, uniform: np.ndarray) -> np.ndarray:
    """Inverse-CDF sampling: the index i with cdf[i-1] <= u < cdf[i] for each u (what rng.choice(p=...) does)."""
    return np.minimum(np.searchsorted(cdf, uniform, side="right"), cdf.size - 1)


def generate_chunk(
    vocab: Vocabulary, seed: int, index: int, times: GenerationTimes, topic_share: float = TOPIC_SHARE
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """CHUNK_DOCS documents numbered from index * CHUNK_DOCS, as CSV rows ``doc_id,text\\n``.

    Returns the rows' bytes (uint8), the byte offset of every row plus the end (CHUNK_DOCS + 1,), the planted
    topics (CHUNK_DOCS,) and the words per document (CHUNK_DOCS,). The chunk depends only on (seed, index), so
    a collection of N documents is the prefix of every larger one.
    """
    mark = time.perf_counter()
    rng = np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(1, index)))
    n = CHUNK_DOCS
    topics = rng.integers(0, TOPICS, size=n)
    lengths = rng.integers(MIN_WORDS, MAX_WORDS + 1, size=n)
    total = int(lengths.sum())
    from_topic = rng.random(total) < topic_share
    n_topic = int(from_topic.sum())
    words = np.empty(total, dtype=np.int64)
    topic_of_word = np.repeat(topics, lengths)
    ranks = draw(vocab.topic_cdf, rng.random(n_topic))
    words[from_topic] = BACKGROUND_WORDS + ranks * TOPICS + topic_of_word[from_topic]
    words[~from_topic] = draw(vocab.background_cdf, rng.random(total - n_topic))
    # sentences of 6-18 words run on across documents; every document's last word ends one too
    ending = np.zeros(total, dtype=np.int64)
    stops = np.cumsum(rng.integers(SENTENCE_WORDS[0], SENTENCE_WORDS[1] + 1, size=total // SENTENCE_WORDS[0] + 1)) - 1
    ending[stops[stops < total]] = 1
    doc_ends = np.cumsum(lengths) - 1
    ending[doc_ends] = 2
    capital = np.empty(total, dtype=np.int64)
    capital[0] = 1
    capital[1:] = ending[:-1] > 0
    forms = words * FORMS + capital * CAPITALIZED + ending
    now = time.perf_counter()
    times.drawing += now - mark
    mark = now

    # segments: per document its id "d0001234," then its words; gather all their bytes in one fancy index
    numbers = index * n + np.arange(n)
    ids = np.empty((n, ID_DIGITS + 2), dtype=np.uint8)
    ids[:, 0] = ord("d")
    ids[:, 1:-1] = numbers[:, None] // 10 ** np.arange(ID_DIGITS - 1, -1, -1) % 10 + ord("0")
    ids[:, -1] = ord(",")
    segments = n + total
    id_segments = np.arange(n) + np.concatenate([[0], doc_ends[:-1] + 1])
    is_id = np.zeros(segments, dtype=bool)
    is_id[id_segments] = True
    starts = np.empty(segments, dtype=np.int64)
    sizes = np.empty(segments, dtype=np.int64)
    starts[~is_id] = vocab.form_starts[forms]
    sizes[~is_id] = vocab.form_lengths[forms]
    starts[is_id] = vocab.blob.size + np.arange(n) * ids.shape[1]
    sizes[is_id] = ids.shape[1]
    ends = np.cumsum(sizes)
    out_starts = ends - sizes
    # int32 offsets: a chunk and the blob are far below 2 GB, and half the bytes make the gather faster
    gather = np.repeat((starts - out_starts).astype(np.int32), sizes) + np.arange(int(ends[-1]), dtype=np.int32)
    rows = np.concatenate([vocab.blob, ids.ravel()])[gather]
    row_offsets = np.append(out_starts[id_segments], ends[-1])
    times.assembling += time.perf_counter() - mark
    return rows, row_offsets, topics, lengths


def generate_collections(
    sizes: list[int], folder: Path, seed: int, topic_share: float = TOPIC_SHARE
) -> tuple[dict[int, Collection], GenerationTimes]:
    """Write synthetic-N.csv and synthetic-N-topics.csv for every N in `sizes`, in one pass over the largest.

    Each Collection's `seconds` is the time from the start until its files were complete.
    """
    start = time.perf_counter()
    times = GenerationTimes()
    vocab = build_vocabulary(seed)
    times.vocabulary = time.perf_counter() - start
    largest = max(sizes)
    paths = {n: (folder / f"synthetic-{n}.csv", folder / f"synthetic-{n}-topics.csv") for n in sizes}
    handles = {n: (text.open("wb"), topic.open("w", encoding="utf-8", newline=""))
               for n, (text, topic) in paths.items()}
    words = dict.fromkeys(sizes, 0)
    done: dict[int, float] = {}
    try:
        mark = time.perf_counter()
        for text_out, topic_out in handles.values():
            text_out.write(b"doc_id,text\n")
            topic_out.write("doc_id,topic\n")
        times.writing += time.perf_counter() - mark
        for index in range(math.ceil(largest / CHUNK_DOCS)):
            rows, offsets, topics, doc_words = generate_chunk(vocab, seed, index, times, topic_share)
            mark = time.perf_counter()
            first = index * CHUNK_DOCS
            for n, (text_out, topic_out) in handles.items():
                if n <= first:
                    continue
                count = min(n - first, CHUNK_DOCS)
                part = rows[: offsets[count]]
                text_out.write(part.tobytes())
                topic_out.write("".join(f"d{first + j:0{ID_DIGITS}d},{t}\n" for j, t in enumerate(topics[:count])))
                words[n] += int(doc_words[:count].sum())
                if first + count == n:
                    text_out.close()
                    topic_out.close()
                    done[n] = time.perf_counter() - start
            times.writing += time.perf_counter() - mark
    finally:
        for text_out, topic_out in handles.values():
            text_out.close()
            topic_out.close()
    collections = {
        n: Collection(paths[n][0], paths[n][1], n, words[n], paths[n][0].stat().st_size, round(done[n], 3))
        for n in sizes
    }
    return collections, times



def read_planted(path: Path) -> np.ndarray:
    """The planted topic of every document, indexed by its number (d0001234 -> 1234)."""
    import pandas as pd

    frame = pd.read_csv(path, dtype={"doc_id": str, "topic": np.int64})
    numbers = frame["doc_id"].str.slice(1).astype(np.int64).to_numpy()
    planted = np.full(numbers.size, -1, dtype=np.int64)
    planted[numbers] = frame["topic"].to_numpy()
    return planted


# --------------------------------------------------------------------------------------------
# The bare pipelines, run as children of this script
# --------------------------------------------------------------------------------------------


def bare_minibatch_child(csv_path: Path, labels_out: Path, timings_out: Path, min_df: int, k: int) -> None:
    """The bare reference for streaming: TF-IDF, LSA, MiniBatchKMeans(k) (bench_pipeline's bare_child)."""
    bench_pipeline.bare_child(csv_path, labels_out, timings_out, min_df, lsa=True, k=k, minibatch=True)


def bare_kmeans_child(csv_path: Path, labels_out: Path, timings_out: Path, min_df: int, k: int) -> None:
    """The bare in-memory reference: bench_pipeline's bare_child with LSA and KMeans(k)."""
    bench_pipeline.bare_child(csv_path, labels_out, timings_out, min_df, lsa=True, k=k)


BARE_CHILDREN = {"bare-minibatch": bare_minibatch_child, "bare-kmeans": bare_kmeans_child}


# --------------------------------------------------------------------------------------------
# Measuring
# --------------------------------------------------------------------------------------------


def label_columns(path: Path) -> tuple[str, str]:
    """The document id column and the cluster column of a labels file, found from its header."""
    with path.open(encoding="utf-8", newline="") as handle:
        header = next(csv.reader(handle))
    lowered = [name.lower() for name in header]
    ids = [h for h, low in zip(header, lowered, strict=True) if low in ("doc_id", "document_id", "id")]
    ids = ids or [h for h, low in zip(header, lowered, strict=True) if low.endswith("id")]
    clusters = [h for h, low in zip(header, lowered, strict=True) if low == "cluster"]
    clusters = clusters or [h for h, low in zip(header, lowered, strict=True) if low.startswith("cluster")
                            and "name" not in low]
    if not ids or not clusters:
        raise SystemExit(f"{path}: found no document id or no cluster column in its header {header}")
    return ids[0], clusters[0]


def nmi_from_file(path: Path, planted: np.ndarray) -> float:
    """NMI of the clusters in `path` with the planted topics, matched by document id (d0001234 -> 1234)."""
    import pandas as pd
    from sklearn.metrics import normalized_mutual_info_score

    id_column, cluster_column = label_columns(path)
    frame = pd.read_csv(path, usecols=[id_column, cluster_column], dtype={id_column: str}, keep_default_na=False)
    numbers = pd.to_numeric(frame[id_column].str.slice(1), errors="coerce")
    if numbers.isna().any():
        raise SystemExit(f"{path}: column {id_column} holds ids not of the form d0001234, e.g. "
                         f"{frame[id_column][numbers.isna()].iloc[0]!r}")
    index = numbers.to_numpy(np.int64)
    if index.size != planted.size or np.unique(index).size != planted.size or index.min() < 0 \
            or index.max() >= planted.size:
        raise SystemExit(f"{path}: {index.size:,} rows ({np.unique(index).size:,} distinct ids) for "
                         f"{planted.size:,} documents; every document needs exactly one label")
    return float(normalized_mutual_info_score(planted[index], frame[cluster_column].to_numpy()))


@dataclass(frozen=True)
class Setting:
    """What every measured run shares."""

    work: Path
    k: int
    repeat: int
    keep: bool


def measure_pilewise(mode: str | None, collection: Collection, planted: np.ndarray, setting: Setting,
                     startup: float) -> Measurement:
    """`pilewise run` in `mode` (None: without --mode) over one collection, in a fresh child."""
    from pilewise.options import RunOptions

    n = collection.documents
    name = f"pilewise-{mode or 'default'}-{n}"
    out = setting.work / name
    command = [*pilewise_command(), "run", str(collection.csv_path), "--k", str(setting.k), "--out", str(out),
               "--quiet"]
    if mode:
        command += ["--mode", mode]
    size_mb = collection.bytes / 1024 / 1024
    if size_mb > RunOptions.max_file_mb:  # pilewise skips larger files unless told otherwise
        command += ["--max-file-mb", str(math.ceil(size_mb) + 1)]
    if n > RunOptions.max_documents:
        command += ["--max-documents", str(n)]

    def run_folder() -> Path:
        """The one run folder pilewise wrote (named k20 by default)."""
        found = [p for p in (out / "runs").iterdir() if p.is_dir() and not p.name.startswith(".")]
        if len(found) != 1:
            raise SystemExit(f"expected one run folder under {out / 'runs'}, found {[p.name for p in found]}")
        return found[0]

    def stages() -> tuple[dict[str, float], dict[str, Any]]:
        run = run_folder()
        manifest = json.loads((run / "manifest.json").read_text(encoding="utf-8"))
        parameters = manifest.get("parameters", {})
        extra = {"run_folder": run.name, "mode_in_manifest": parameters.get("mode"),
                 "input": manifest.get("input", {}), "vectors": manifest.get("vectors", {}),
                 "startup_and_imports_seconds": round(startup, 3)}
        return manifest["timings_seconds"], extra

    measurement = measure(
        name, command, setting.work, setting.repeat,
        labels_of=lambda: nmi_from_file(run_folder() / "assignments.csv", planted),
        stages_of=stages,
        prepare=lambda: shutil.rmtree(out, ignore_errors=True),
    )
    # what the manifest's stages leave out (the root index, process exit): the rest of the wall time
    rest = measurement.wall_seconds - sum(measurement.stage_seconds.values()) - startup
    measurement.extra["writing_site_estimate_seconds"] = round(rest, 3)
    if not setting.keep:
        shutil.rmtree(out, ignore_errors=True)
    return measurement


def measure_bare(name: str, collection: Collection, planted: np.ndarray, setting: Setting) -> Measurement:
    """One of BARE_CHILDREN over one collection, in a fresh child of this script."""
    from pilewise.vectors.tfidf import default_min_df

    n = collection.documents
    labels = setting.work / f"{name}-{n}-labels.csv"
    timings = setting.work / f"{name}-{n}-timings.json"
    # pilewise derives min_df from the number of distinct texts; every synthetic text is distinct
    min_df = default_min_df(n)
    command = [sys.executable, str(Path(__file__).resolve()), "--child", name, "--csv", str(collection.csv_path),
               "--labels-out", str(labels), "--timings-out", str(timings), "--min-df", str(min_df),
               "--k", str(setting.k)]

    def stages() -> tuple[dict[str, float], dict[str, Any]]:
        data = json.loads(timings.read_text(encoding="utf-8"))
        return data["timings_seconds"], {"terms": data["terms"], "min_df": min_df}

    measurement = measure(f"{name}-{n}", command, setting.work, setting.repeat,
                          labels_of=lambda: nmi_from_file(labels, planted), stages_of=stages)
    if not setting.keep:
        labels.unlink(missing_ok=True)
    return measurement


# --------------------------------------------------------------------------------------------
# Report
# --------------------------------------------------------------------------------------------


@dataclass(frozen=True)
class Row:
    documents: int
    mode: str
    measurement: Measurement


def slope(xs: list[float], ys: list[float]) -> float | None:
    """Least-squares slope of log y on log x (1.0 = linear growth); None below two points or for y <= 0."""
    if len(xs) < 2 or min(ys) <= 0:
        return None
    return round(float(np.polyfit(np.log(xs), np.log(ys), 1)[0]), 3)


def growth(rows: list[Row], import_rss_mb: float) -> tuple[list[dict[str, Any]], dict[str, dict[str, Any]]]:
    """Per mode: the growth between successive sizes, and log-log slopes fitted over all its sizes."""
    pairs: list[dict[str, Any]] = []
    slopes: dict[str, dict[str, Any]] = {}
    for mode in dict.fromkeys(r.mode for r in rows):
        runs = sorted((r for r in rows if r.mode == mode), key=lambda r: r.documents)
        for a, b in zip(runs, runs[1:], strict=False):
            size_x = b.documents / a.documents
            time_x = b.measurement.wall_seconds / a.measurement.wall_seconds
            memory_x = b.measurement.peak_rss_mb / a.measurement.peak_rss_mb
            pairs.append({"mode": mode, "from": a.documents, "to": b.documents, "size_x": round(size_x, 3),
                          "time_x": round(time_x, 3), "memory_x": round(memory_x, 3),
                          "time_x_over_size_x": round(time_x / size_x, 3),
                          "memory_x_over_size_x": round(memory_x / size_x, 3)})
        xs = [float(r.documents) for r in runs]
        slopes[mode] = {
            "sizes": [r.documents for r in runs],
            "wall": slope(xs, [r.measurement.wall_seconds for r in runs]),
            "cpu": slope(xs, [r.measurement.cpu_seconds for r in runs]),
            "peak_rss": slope(xs, [r.measurement.peak_rss_mb for r in runs]),
            "peak_rss_above_import": slope(xs, [r.measurement.peak_rss_mb - import_rss_mb for r in runs]),
        }
    return pairs, slopes


def fmt(value: float | None) -> str:
    return "-" if value is None else f"{value:.2f}"


def report_lines(info: dict[str, Any], generation: dict[str, Any], rows: list[Row], startup: dict[str, float],
                 pairs: list[dict[str, Any]], slopes: dict[str, dict[str, Any]], k: int) -> list[str]:
    versions = info["versions"]
    largest = generation["collections"][-1]
    times = generation["seconds"]
    lines = [
        f"Machine: {info['cpu']}, {info['usable_cores']} usable cores ({info['logical_cores']} logical), "
        f"{info['ram_gb']} GB RAM, {info['os']}",
        f"Versions: python {versions['python']}, numpy {versions['numpy']}, scikit-learn {versions['scikit-learn']}, "
        f"scipy {versions['scipy']}, pandas {versions['pandas']}, pilewise {versions['pilewise']} "
        f"(source sha256 {info['pilewise_source_sha256']})",
        f"Measured at {info['measured_at']}; threads: {info['threads_setting'] or 'library defaults'}; k={k}",
        f"Generation: {largest['documents']:,} documents, {largest['words']:,} words, {largest['bytes'] / 1e6:,.0f} MB "
        f"of CSV in {times['total']:.1f} s (vocabulary {times['vocabulary']:.1f}, drawing {times['drawing']:.1f}, "
        f"assembling {times['assembling']:.1f}, writing {times['writing']:.1f}); files complete after: "
        + ", ".join(f"{c['documents']:,} {c['seconds']:.1f} s" for c in generation["collections"]),
    ]
    if not rows:
        return lines
    lines += [
        "Startup (`import pilewise.cli, pilewise.pipeline`, not counted out of the figures): "
        f"{startup['wall_seconds']:.2f} s, "
        f"{startup['peak_rss_mb']:.0f} MB",
        "",
        "| documents | mode | wall s | CPU s | peak MB | NMI | s per 1k docs | MB per 1k docs |",
        "|---:|---|---:|---:|---:|---:|---:|---:|",
    ]
    for r in rows:
        m, per_k = r.measurement, r.documents / 1000
        lines.append(f"| {r.documents:,} | {r.mode} | {m.wall_seconds:.1f} | {m.cpu_seconds:.1f} | "
                     f"{m.peak_rss_mb:,.0f} | {m.nmi:.3f} | {m.wall_seconds / per_k:.3f} | "
                     f"{m.peak_rss_mb / per_k:.1f} |")
    lines += ["", "Stage timings of pilewise (s; the rest: wall time less the stages and startup):"]
    for r in rows:
        if r.mode.startswith("pilewise"):
            m = r.measurement
            stages = ", ".join(f"{name} {seconds:.2f}" for name, seconds in m.stage_seconds.items())
            lines.append(f"- {r.documents:,} {r.mode}: {stages}, the rest ~"
                         f"{m.extra['writing_site_estimate_seconds']:.2f}")
    if pairs:
        lines += ["", "Growth between successive sizes (x / size x: 1.00 = linear, above = faster than linear):", "",
                  "| mode | documents | size x | time x | memory x | time x / size x | memory x / size x |",
                  "|---|---|---:|---:|---:|---:|---:|"]
        for p in pairs:
            lines.append(f"| {p['mode']} | {p['from']:,} -> {p['to']:,} | {p['size_x']:.2f} | {p['time_x']:.2f} | "
                         f"{p['memory_x']:.2f} | {p['time_x_over_size_x']:.2f} | {p['memory_x_over_size_x']:.2f} |")
        lines += ["", "Log-log slopes over all sizes (1.0 = linear; memory also less the startup's resident memory):",
                  "", "| mode | sizes | wall time | CPU time | peak memory | peak memory above startup |",
                  "|---|---:|---:|---:|---:|---:|"]
        for mode, s in slopes.items():
            if len(s["sizes"]) >= 2:
                lines.append(f"| {mode} | {len(s['sizes'])} | {fmt(s['wall'])} | {fmt(s['cpu'])} | "
                             f"{fmt(s['peak_rss'])} | {fmt(s['peak_rss_above_import'])} |")
    return lines


def pilewise_over_bare(rows: list[Row]) -> list[dict[str, Any]]:
    """At every size: each pilewise mode's time and memory over its bare reference's."""
    found = {(r.documents, r.mode): r.measurement for r in rows}
    ratios = []
    for (n, mode), m in found.items():
        reference = "bare-kmeans" if mode == "pilewise-memory" else "bare-minibatch"
        if mode.startswith("pilewise") and (n, reference) in found:
            ref = found[(n, reference)]
            ratios.append({"documents": n, "mode": mode, "reference": reference,
                           "time_x": round(m.wall_seconds / ref.wall_seconds, 3),
                           "memory_x": round(m.peak_rss_mb / ref.peak_rss_mb, 3)})
    return ratios


def plot(rows: list[Row], path: Path, title: str) -> None:
    """Wall time and peak memory against documents, log-log, one line per mode, with a linear guide."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    figure, (time_axis, memory_axis) = plt.subplots(1, 2, figsize=(11, 4.5), constrained_layout=True)
    for mode in dict.fromkeys(r.mode for r in rows):
        runs = sorted((r for r in rows if r.mode == mode), key=lambda r: r.documents)
        xs = [r.documents for r in runs]
        time_axis.plot(xs, [r.measurement.wall_seconds for r in runs], marker="o", label=mode)
        memory_axis.plot(xs, [r.measurement.peak_rss_mb for r in runs], marker="o", label=mode)
    # linear guides through the smallest run of pilewise's streaming mode (or of the first mode there is)
    sizes = sorted({r.documents for r in rows})
    smallest = [r for r in rows if r.documents == sizes[0]]
    first = next((r for r in smallest if r.mode == "pilewise-stream"), smallest[0])
    for axis, value in ((time_axis, first.measurement.wall_seconds), (memory_axis, first.measurement.peak_rss_mb)):
        axis.plot(sizes, [value * n / sizes[0] for n in sizes], linestyle=":", color="grey",
                  label=f"linear from {first.mode}")
    for axis, label in ((time_axis, "wall time (s)"), (memory_axis, "peak resident memory (MB)")):
        axis.set_xscale("log")
        axis.set_yscale("log")
        axis.set_xlabel("documents")
        axis.set_ylabel(label)
        axis.grid(True, which="both", alpha=0.3)
        axis.legend(fontsize="small")
    figure.suptitle(title, fontsize="medium")
    figure.savefig(path, format="svg", metadata={"Date": None})
    plt.close(figure)


# --------------------------------------------------------------------------------------------
# Main
# --------------------------------------------------------------------------------------------


def check_arguments(args: argparse.Namespace) -> list[str]:
    """Every problem with the options, so that all are reported at once."""
    problems = []
    if args.k < 2:
        problems.append(f"--k {args.k} must be at least 2")
    for n in args.sizes:
        if not args.k < n <= 10**ID_DIGITS - 1:
            problems.append(f"--sizes {n} must be above --k ({args.k}) and at most {10**ID_DIGITS - 1:,}")
    if args.repeat < 1:
        problems.append(f"--repeat {args.repeat} must be at least 1")
    if args.threads is not None and args.threads < 1:
        problems.append(f"--threads {args.threads} must be at least 1")
    return problems


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0] if __doc__ else None)
    parser.add_argument("--sizes", type=int, nargs="+", default=list(DEFAULT_SIZES),
                        help="collection sizes (default 10000 30000 100000 300000 1000000)")
    parser.add_argument("--memory-up-to", type=int, default=DEFAULT_MEMORY_UP_TO,
                        help="also run --mode memory and bare-kmeans at sizes up to this (default 100000)")
    parser.add_argument("--k", type=int, default=20, help="number of clusters (default 20)")
    parser.add_argument("--workdir", type=Path, default=None, help="folder for the CSVs and outputs (kept)")
    parser.add_argument("--seed", type=int, default=0, help="seed of the synthetic collection")
    parser.add_argument("--threads", type=int, default=None,
                        help="set OMP/OpenBLAS/MKL thread counts of every child (default: the libraries' own)")
    parser.add_argument("--repeat", type=int, default=1, help="runs per pipeline (median time, largest memory)")
    parser.add_argument("--topic-share", type=float, default=0.15,
                        help="share of each document's words drawn from its planted topic (default 0.15; lower is "
                             "harder to separate)")
    parser.add_argument("--generate-only", action="store_true", help="generate the collections, time it, stop")
    bench_pipeline.add_child_arguments(parser, tuple(BARE_CHILDREN))
    args = parser.parse_args(argv)

    if args.child:
        BARE_CHILDREN[args.child](args.csv, args.labels_out, args.timings_out, args.min_df, args.k)
        return
    problems = check_arguments(args)
    if problems:
        parser.error("; ".join(problems))
    sizes = sorted(set(args.sizes))

    info, work, temporary = bench_pipeline.start_benchmark(args.threads, args.workdir, "pilewise-scale-")
    stamp = info["measured_at"].replace("-", "").replace(":", "").replace("+0000", "Z")
    OUT_FOLDER.mkdir(exist_ok=True)
    try:
        print(f"generating {', '.join(f'{n:,}' for n in sizes)} documents in {work} ...", flush=True)
        collections, times = generate_collections(sizes, work, args.seed, args.topic_share)
        generation = {
            "seconds": {**{key: round(value, 3) for key, value in asdict(times).items()},
                        "total": round(times.total(), 3)},
            "chunk_documents": CHUNK_DOCS,
            "collections": [{**asdict(c), "csv_path": str(c.csv_path), "topics_path": str(c.topics_path)}
                            for c in collections.values()],
        }
        figures: dict[str, Any] = {
            "settings": {"sizes": sizes, "memory_up_to": args.memory_up_to, "k": args.k, "seed": args.seed,
                         "repeat": args.repeat, "words_per_document": [MIN_WORDS, MAX_WORDS],
                         "background_words": BACKGROUND_WORDS, "topics": TOPICS, "topic_words": TOPIC_WORDS,
                         "topic_share": args.topic_share, "lsa_components": LSA_COMPONENTS, "max_df": MAX_DF,
                         "n_init": N_INIT, "minibatch_size": MINIBATCH_SIZE},
            "machine": info,
            "generation": generation,
        }
        rows: list[Row] = []
        startup = {"wall_seconds": 0.0, "peak_rss_mb": 0.0, "cpu_seconds": 0.0}
        if not args.generate_only:
            # a run's imports: the command imports the pipeline when it runs, `import pilewise.cli` alone does not
            wall, peak, cpu = run_measured([sys.executable, "-c", "import pilewise.cli, pilewise.pipeline"],
                                           work / "import.log")
            startup = {"wall_seconds": round(wall, 3), "peak_rss_mb": round(peak, 1), "cpu_seconds": round(cpu, 3)}
            setting = Setting(work, args.k, args.repeat, keep=not temporary)
            for n in sizes:
                collection = collections[n]
                planted = read_planted(collection.topics_path)
                in_memory = n <= args.memory_up_to
                print(f"{n:,} documents ({collection.bytes / 1e6:,.0f} MB):", flush=True)
                modes: list[str | None] = ["stream", "memory"] if in_memory else ["stream"]
                for mode in modes:
                    m = measure_pilewise(mode, collection, planted, setting, startup["wall_seconds"])
                    rows.append(Row(n, f"pilewise-{mode or 'default'}", m))
                for name in (["bare-minibatch", "bare-kmeans"] if in_memory else ["bare-minibatch"]):
                    rows.append(Row(n, name, measure_bare(name, collection, planted, setting)))
            rows.sort(key=lambda r: (r.documents, r.mode))
        pairs, slopes = growth(rows, startup["peak_rss_mb"])
        print()
        print("\n".join(report_lines(info, generation, rows, startup, pairs, slopes, args.k)))
        if rows:
            figures.update({
                "startup_import_pilewise_cli": startup,
                "results": [{"documents": r.documents, "mode": r.mode,
                             "seconds_per_1k_docs": round(r.measurement.wall_seconds * 1000 / r.documents, 4),
                             "mb_per_1k_docs": round(r.measurement.peak_rss_mb * 1000 / r.documents, 3),
                             **asdict(r.measurement)} for r in rows],
                "growth": pairs,
                "loglog_slopes": slopes,
                "pilewise_over_bare": pilewise_over_bare(rows),
            })
            svg_path = OUT_FOLDER / f"bench-scale-{stamp}.svg"
            plot(rows, svg_path, f"pilewise scaling, k={args.k}, {info['usable_cores']} cores, "
                                 f"threads {args.threads or 'default'} ({info['measured_at']})")
            figures["plot"] = str(svg_path)
            print(f"\nplot written to {svg_path}")
        json_path = OUT_FOLDER / f"bench-scale-{'generate-' if args.generate_only else ''}{stamp}.json"
        json_path.write_text(json.dumps(figures, indent=2) + "\n", encoding="utf-8")
        print(f"figures written to {json_path}")
    finally:
        if temporary:
            shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    main()
