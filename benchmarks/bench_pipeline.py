"""Benchmark: pilewise end to end against the bare scikit-learn pipeline it is built on.

What it measures
----------------
A synthetic collection is generated inside this script (seeded numpy): N documents of 30-200
made-up pronounceable words, ~60% drawn from one of 20 planted topics (150 topic words each) and
~40% from a Zipf-like background vocabulary of 30,000 words. It is written as a CSV
(``doc_id,text``); the planted topic of every document is kept in a separate file.

Three pipelines then run over that CSV, each in its own fresh subprocess, so that every figure
is that pipeline's alone:

a. ``bare``     pandas.read_csv, TfidfVectorizer(sublinear_tf=True, min_df=2, max_df=0.5,
                stop_words="english"), KMeans(20, n_init=1) fit_predict, labels written to CSV (the
                bare pipeline of issue 15, as worded there);
b. ``bare+lsa`` the same with TruncatedSVD(100) and Normalizer before KMeans (the fairer
                reference: pilewise clusters in an LSA space too);
c. ``pilewise`` ``pilewise run <csv> --k 20 --out <dir> --quiet``, exports and site included;
                its own stage timings are read from ``<dir>/runs/k20/manifest.json``
                (``timings_seconds``) and its clusters from ``assignments.csv``.

For each: wall time (process start to exit, interpreter start and imports included), CPU time
(user + system; less sensitive than wall time to other work on the machine, whose 1-minute load
average is recorded before every run), peak resident memory of the process (``ru_maxrss`` of that
one child, from ``os.wait4`` in a small launcher process: see ``run_measured``), and the normalized
mutual information of its clusters with the planted topics. What the recorded stages leave out (imports,
the root index) is estimated as the wall time less the recorded stages and a separately timed
``import pilewise.cli, pilewise.pipeline``.

The script prints the machine, a Markdown table, the ratios pilewise / bare, and writes every
figure to ``benchmarks/.out/bench-<N>[-threads<T>]-<UTC time>.json`` (gitignored).

How to run
----------
    python benchmarks/bench_pipeline.py --docs 10000           # quick check, about a minute
    python benchmarks/bench_pipeline.py                        # 100,000 documents, a few minutes
    python benchmarks/bench_pipeline.py --docs 20000 --profile # also profile pilewise with cProfile

Options:
  --workdir DIR   keep the generated CSV and the outputs there (default: a temporary folder, removed at the end);
  --repeat R      run every pipeline R times, round by round (bare, bare+lsa, pilewise, then again, so that a slow
                  spell of the machine falls on every pipeline alike), and report its median run by wall time (the
                  lower middle one for an even R) with that run's stage timings, the largest peak memory of all
                  runs, and pilewise's wall-time ratio in every round;
  --pipelines P   the references run besides pilewise, comma-separated (default bare,bare+lsa; bare alone
                  saves bare+lsa's full LSA, the longest run at 200,000 documents);
  --seed S        seed of the synthetic collection (default 0), or of the glosses' sample;
  --glosses       real English instead of the synthetic collection: a seeded sample of --docs WordNet noun glosses
                  (at most 82,115; `bash corpora/fetch.sh --all`), their lexicographer files as the labels. The
                  synthetic words are in no language, so language detection reads every text with its model;
                  English text mostly passes its cheap stop-word test;
  --threads T     set OMP_NUM_THREADS, OPENBLAS_NUM_THREADS and MKL_NUM_THREADS for every child alike. On a
                  machine shared with other jobs, multi-threaded BLAS can slow down several-fold while it waits
                  for a descheduled thread; one thread per process gives steadier figures there.
"""

from __future__ import annotations

import argparse
import csv
import hashlib
import json
import os
import platform
import shutil
import subprocess
import sys
import tempfile
import time
from collections.abc import Iterable, Iterator
from dataclasses import asdict, dataclass, field
from datetime import UTC, datetime
from importlib.metadata import PackageNotFoundError, version
from pathlib import Path
from typing import Any

import numpy as np

K = 20
MINIBATCH_SIZE = 4096
N_INIT = 1  # the bare pipeline's k-means starts (issue 15: KMeans(20, n_init=1))
BARE_MIN_DF = 2  # the bare pipeline's min_df (issue 15), whatever pilewise's default for N
LSA_COMPONENTS = 100
MAX_DF = 0.5
BACKGROUND_WORDS = 30_000
TOPICS = 20
TOPIC_WORDS = 150
TOPIC_SHARE = 0.6
MIN_WORDS, MAX_WORDS = 30, 200
TARGET_RATIO = 1.5
OUT_FOLDER = Path(__file__).resolve().parent / ".out"
THREAD_VARIABLES = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS")
LIBRARIES = ("numpy", "scipy", "scikit-learn", "pandas", "nltk", "jinja2", "pyarrow", "pilewise")

ONSETS = ("b", "d", "f", "g", "k", "l", "m", "n", "p", "r", "s", "t", "v", "z", "ch", "sh", "th", "br", "dr",
          "gl", "kr", "pl", "st", "tr", "")
VOWELS = ("a", "e", "i", "o", "u", "ai", "ou", "ea")
CODAS = ("", "", "", "n", "r", "l", "s", "m", "k", "t")


# --------------------------------------------------------------------------------------------
# Synthetic collection
# --------------------------------------------------------------------------------------------


def make_words(count: int, rng: np.random.Generator, banned: frozenset[str]) -> list[str]:
    """`count` distinct made-up words of 1-3 syllables and 3+ letters, none in `banned`, shortest first.

    Shortest first, so that the most frequent ranks get the shortest words, as in natural language.
    """
    words: list[str] = []
    seen: set[str] = set(banned)
    while len(words) < count:
        batch = count - len(words) + 1000
        syllables = rng.choice([1, 2, 3], size=batch, p=[0.2, 0.5, 0.3])
        for n_syl in syllables:
            parts = []
            for _ in range(int(n_syl)):
                parts.append(ONSETS[rng.integers(len(ONSETS))])
                parts.append(VOWELS[rng.integers(len(VOWELS))])
                parts.append(CODAS[rng.integers(len(CODAS))])
            word = "".join(parts)
            if len(word) >= 3 and word not in seen:
                seen.add(word)
                words.append(word)
                if len(words) == count:
                    break
    return sorted(words, key=len)


def zipf_weights(n: int, exponent: float, shift: float) -> np.ndarray:
    """Zipf-Mandelbrot probabilities p(r) ~ 1 / (r + shift) ** exponent for ranks 1..n."""
    weights = 1.0 / (np.arange(1, n + 1) + shift) ** exponent
    return weights / weights.sum()


@dataclass(frozen=True)
class Collection:
    csv_path: Path
    topics_path: Path
    documents: int
    words: int
    bytes: int
    seconds: float
    labels: str = f"{TOPICS} planted topics"


def write_collection(folder: Path, stem: str, rows: Iterable[tuple[str, str, int]]) -> tuple[Path, Path]:
    """Write `folder`/STEM.csv (doc_id,text) and `folder`/STEM-topics.csv (doc_id,topic) from (doc_id, text, topic)."""
    csv_path, topics_path = folder / f"{stem}.csv", folder / f"{stem}-topics.csv"
    with csv_path.open("w", encoding="utf-8", newline="") as text_out, topics_path.open(
        "w", encoding="utf-8", newline=""
    ) as topic_out:
        text_writer = csv.writer(text_out, lineterminator="\n")
        topic_writer = csv.writer(topic_out, lineterminator="\n")
        text_writer.writerow(["doc_id", "text"])
        topic_writer.writerow(["doc_id", "topic"])
        for doc_id, text, topic in rows:
            text_writer.writerow([doc_id, text])
            topic_writer.writerow([doc_id, topic])
    return csv_path, topics_path


def gloss_collection(n_docs: int, folder: Path, seed: int) -> Collection:
    """Write `folder`/glosses-N.csv (doc_id,text) and glosses-N-topics.csv (doc_id,topic) from a seeded sample of
    N WordNet noun glosses (real English, 5-30 words each: the length of short survey answers), labelled by their
    26 lexicographer files (tests/open_sets.py; `bash corpora/fetch.sh --all`)."""
    sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))
    import open_sets

    start = time.perf_counter()
    glosses = open_sets.load_wordnet_glosses(sample=n_docs, seed=seed)
    if len(glosses.texts) < n_docs:
        raise SystemExit(f"--glosses: WordNet has {len(glosses.texts):,} noun glosses, fewer than --docs {n_docs:,}")
    names = sorted(set(glosses.labels))
    csv_path, topics_path = write_collection(folder, f"glosses-{n_docs}", (
        (f"g{d:07d}", text, names.index(label))
        for d, (text, label) in enumerate(zip(glosses.texts, glosses.labels, strict=True))))
    words = sum(len(text.split()) for text in glosses.texts)
    return Collection(csv_path, topics_path, n_docs, words, csv_path.stat().st_size, time.perf_counter() - start,
                      labels=f"WordNet noun glosses, {len(names)} lexicographer files")


def generate_collection(n_docs: int, folder: Path, seed: int) -> Collection:
    """Write `folder`/synthetic-N.csv (doc_id,text) and `folder`/synthetic-N-topics.csv (doc_id,topic)."""
    from sklearn.feature_extraction.text import ENGLISH_STOP_WORDS

    start = time.perf_counter()
    rng = np.random.default_rng(seed)
    banned = frozenset(ENGLISH_STOP_WORDS)
    background = np.array(make_words(BACKGROUND_WORDS, rng, banned), dtype=object)
    topic_words = make_words(TOPICS * TOPIC_WORDS, rng, banned | frozenset(background.tolist()))
    # deal the topic words out round-robin so that every topic gets short and long words alike
    topic_vocab = np.array(topic_words, dtype=object).reshape(TOPIC_WORDS, TOPICS).T
    background_p = zipf_weights(BACKGROUND_WORDS, 1.05, 2.7)
    topic_p = zipf_weights(TOPIC_WORDS, 0.8, 1.0)

    topics = rng.integers(0, TOPICS, size=n_docs)
    lengths = rng.integers(MIN_WORDS, MAX_WORDS + 1, size=n_docs)
    total = int(lengths.sum())
    from_topic = rng.random(total) < TOPIC_SHARE
    background_draws = background[rng.choice(BACKGROUND_WORDS, size=total, p=background_p)]
    topic_ranks = rng.choice(TOPIC_WORDS, size=total, p=topic_p)
    doc_of_word = np.repeat(np.arange(n_docs), lengths)
    topic_draws = topic_vocab[topics[doc_of_word], topic_ranks]
    tokens = np.where(from_topic, topic_draws, background_draws).tolist()
    # sentences of 6-18 words: a capital letter at the start and a full stop at the end
    sentence_lengths = rng.integers(6, 19, size=total // 6 + n_docs)

    bounds = np.concatenate([[0], np.cumsum(lengths)])

    def rows() -> Iterator[tuple[str, str, int]]:
        next_sentence = 0
        for d in range(n_docs):
            words = tokens[bounds[d] : bounds[d + 1]]
            sentences = []
            i = 0
            while i < len(words):
                size = int(sentence_lengths[next_sentence])
                next_sentence += 1
                chunk = words[i : i + size]
                sentences.append(chunk[0].capitalize() + " " + " ".join(chunk[1:]) + ".")
                i += size
            yield f"d{d:07d}", " ".join(sentences), int(topics[d])

    csv_path, topics_path = write_collection(folder, f"synthetic-{n_docs}", rows())
    return Collection(csv_path, topics_path, n_docs, total, csv_path.stat().st_size, time.perf_counter() - start)


# --------------------------------------------------------------------------------------------
# The bare pipelines, run as children of this script
# --------------------------------------------------------------------------------------------


def bare_child(
    csv_path: Path, labels_out: Path, timings_out: Path, min_df: int, lsa: bool, *, k: int = K, minibatch: bool = False
) -> None:
    """The library pipeline, timed step by step; writes doc_id,cluster to `labels_out`.

    With `minibatch`, MiniBatchKMeans(k, n_init=N_INIT, batch_size=MINIBATCH_SIZE) instead of KMeans: the
    library pipeline a streaming clusterer is built on (bench_scale.py).
    """
    timings: dict[str, float] = {}
    mark = time.perf_counter()

    def lap(name: str) -> None:
        nonlocal mark
        now = time.perf_counter()
        timings[name] = round(now - mark, 3)
        mark = now

    import pandas as pd
    from sklearn.cluster import KMeans, MiniBatchKMeans
    from sklearn.decomposition import TruncatedSVD
    from sklearn.feature_extraction.text import TfidfVectorizer
    from sklearn.preprocessing import Normalizer

    lap("imports")
    frame = pd.read_csv(csv_path, dtype=str, keep_default_na=False)
    lap("reading")
    vectorizer = TfidfVectorizer(stop_words="english", sublinear_tf=True, min_df=min_df, max_df=MAX_DF)
    space: Any = vectorizer.fit_transform(frame["text"])
    terms = len(vectorizer.vocabulary_)
    lap("vectorizing")
    if lsa:
        space = TruncatedSVD(n_components=LSA_COMPONENTS, random_state=0).fit_transform(space)
        space = Normalizer(copy=False).fit_transform(space)
        lap("lsa")
    model = MiniBatchKMeans(n_clusters=k, n_init=N_INIT, batch_size=MINIBATCH_SIZE, random_state=0) if minibatch \
        else KMeans(n_clusters=k, n_init=N_INIT, random_state=0)
    labels = model.fit_predict(space)
    lap("clustering")
    pd.DataFrame({"doc_id": frame["doc_id"], "cluster": labels}).to_csv(labels_out, index=False)
    lap("writing")
    timings_out.write_text(json.dumps({"timings_seconds": timings, "terms": terms}), encoding="utf-8")


# --------------------------------------------------------------------------------------------
# Running and measuring children
# --------------------------------------------------------------------------------------------


@dataclass
class Measurement:
    """One pipeline's figures: those of its median run by wall time, and the largest peak RSS of all runs."""

    pipeline: str
    command: list[str]
    wall_seconds: float
    peak_rss_mb: float
    cpu_seconds: float
    nmi: float
    wall_seconds_all: list[float] = field(default_factory=list)
    peak_rss_mb_all: list[float] = field(default_factory=list)
    cpu_seconds_all: list[float] = field(default_factory=list)
    load_average_before: list[float] = field(default_factory=list)
    stage_seconds: dict[str, float] = field(default_factory=dict)
    extra: dict[str, Any] = field(default_factory=dict)


# A fresh interpreter that starts the command, waits for it with os.wait4 and writes its figures as JSON.
LAUNCHER = """
import json, os, sys, time
command, log, result = json.loads(sys.argv[1]), sys.argv[2], sys.argv[3]
fd = os.open(log, os.O_WRONLY | os.O_CREAT | os.O_TRUNC, 0o644)
actions = [(os.POSIX_SPAWN_DUP2, fd, 1), (os.POSIX_SPAWN_DUP2, fd, 2)]
start = time.perf_counter()
pid = os.posix_spawn(command[0], command, os.environ, file_actions=actions)
_, status, usage = os.wait4(pid, 0)
wall = time.perf_counter() - start
with open(result, "w") as handle:
    json.dump({"status": os.waitstatus_to_exitcode(status), "wall": wall, "maxrss": usage.ru_maxrss,
               "cpu": usage.ru_utime + usage.ru_stime}, handle)
"""


def run_measured(command: list[str], log: Path) -> tuple[float, float, float]:
    """Run `command` to its end: wall seconds, peak resident MB and CPU seconds of that process alone.

    The command is started from a small launcher process rather than from this one:
    on Linux a child's ru_maxrss starts from the resident memory of the process that spawned it (the kernel
    keeps the old address space's high-water mark at exec), so children of this script, which holds numpy,
    pandas, scikit-learn and the generated collection, would never report less than its own resident size.
    """
    result = log.with_suffix(".usage.json")
    executable = command[0] if os.sep in command[0] else shutil.which(command[0]) or command[0]
    launcher = [sys.executable, "-I", "-S", "-c", LAUNCHER, json.dumps([executable, *command[1:]]), str(log),
                str(result)]
    subprocess.run(launcher, check=True)
    usage = json.loads(result.read_text(encoding="utf-8"))
    if usage["status"] != 0:
        tail = log.read_text(encoding="utf-8", errors="replace")[-3000:]
        raise SystemExit(f"command failed with status {usage['status']}: {' '.join(command)}\n{tail}")
    scale = 1024 * 1024 if sys.platform == "darwin" else 1024  # bytes on macOS, KiB on Linux
    return usage["wall"], usage["maxrss"] / scale, usage["cpu"]


def read_labels(path: Path, column: str) -> dict[str, int]:
    with path.open(encoding="utf-8", newline="") as handle:
        return {row["doc_id"]: int(row[column]) for row in csv.DictReader(handle)}


def nmi_against(planted: dict[str, int], found: dict[str, int]) -> float:
    from sklearn.metrics import normalized_mutual_info_score

    missing = set(planted) - set(found)
    if missing:
        raise SystemExit(f"{len(missing)} documents have no cluster label (e.g. {sorted(missing)[:3]})")
    ids = sorted(planted)
    return float(normalized_mutual_info_score([planted[i] for i in ids], [found[i] for i in ids]))


def pilewise_command() -> list[str]:
    script = shutil.which("pilewise")
    return [script] if script else [sys.executable, "-m", "pilewise"]


@dataclass
class Pipeline:
    """One pipeline to measure: its command and how to read its stages and clusters after a run."""

    name: str
    command: list[str]
    labels_of: Any
    stages_of: Any
    prepare: Any = None
    runs: list[tuple[float, float, float, float, dict[str, float], dict[str, Any]]] = field(default_factory=list)


def run_once(pipeline: Pipeline, work: Path, r: int, repeat: int) -> None:
    """Run `pipeline` once and keep its figures (wall, peak memory, CPU, load before, stages, extra)."""
    if pipeline.prepare:
        pipeline.prepare()
    load = os.getloadavg()[0]
    print(f"  {pipeline.name}: run {r + 1}/{repeat} (load average {load:.2f}) ...", end="", flush=True)
    wall, peak, cpu = run_measured(pipeline.command, work / f"{pipeline.name}-{r + 1}.log")
    print(f" {wall:.1f} s, {peak:,.0f} MB, {cpu:.1f} CPU s", flush=True)
    stages, extra = pipeline.stages_of()
    extra["nmi"] = pipeline.labels_of()
    pipeline.runs.append((round(wall, 3), round(peak, 1), round(cpu, 3), round(load, 2), stages, extra))


def measurement(pipeline: Pipeline) -> Measurement:
    """A pipeline's figures: those of its median run by wall time, peak memory the largest.

    Stage timings and NMI come from that same median run, so that they add up with its wall time.
    """
    runs = pipeline.runs
    wall, _, cpu, _, stages, extra = sorted(runs, key=lambda run: run[0])[(len(runs) - 1) // 2]
    nmi = float(extra.pop("nmi"))
    return Measurement(
        pipeline.name, pipeline.command, wall, max(run[1] for run in runs), cpu, nmi,
        wall_seconds_all=[run[0] for run in runs], peak_rss_mb_all=[run[1] for run in runs],
        cpu_seconds_all=[run[2] for run in runs], load_average_before=[run[3] for run in runs],
        stage_seconds=stages, extra=extra,
    )


def measure(
    name: str, command: list[str], work: Path, repeat: int, labels_of: Any, stages_of: Any, prepare: Any = None
) -> Measurement:
    """Run one pipeline `repeat` times in a row (`measurement` of its runs); bench_scale.py measures this way."""
    pipeline = Pipeline(name, command, labels_of, stages_of, prepare)
    for r in range(repeat):
        run_once(pipeline, work, r, repeat)
    return measurement(pipeline)


def round_ratios(results: list[Measurement], reference: str) -> list[float]:
    """pilewise's wall time over the reference's in each round (the runs of one round follow one another)."""
    by_name = {m.pipeline: m for m in results}
    pile, ref = by_name["pilewise"], by_name[reference]
    return [ratio(a, b) for a, b in zip(pile.wall_seconds_all, ref.wall_seconds_all, strict=True)]


# --------------------------------------------------------------------------------------------
# Machine and report
# --------------------------------------------------------------------------------------------


def machine() -> dict[str, Any]:
    cpu = platform.processor() or platform.machine()
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                cpu = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    ram_gb: float | None = None
    try:
        for line in Path("/proc/meminfo").read_text().splitlines():
            if line.startswith("MemTotal:"):
                ram_gb = round(int(line.split()[1]) / 1024 / 1024, 1)
                break
    except OSError:
        pass
    usable = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count()
    versions = {"python": platform.python_version()}
    for name in LIBRARIES:
        try:
            versions[name] = version(name)
        except PackageNotFoundError:
            versions[name] = "not installed"
    return {
        "measured_at": datetime.now(UTC).replace(microsecond=0).isoformat(),
        "pilewise_source_sha256": source_fingerprint(),
        "cpu": cpu,
        "logical_cores": os.cpu_count(),
        "usable_cores": usable,
        "ram_gb": ram_gb,
        "os": platform.platform(),
        "versions": versions,
    }


def source_fingerprint() -> str:
    """SHA-256 over the installed pilewise package's .py files (names and contents), to tie figures to code."""
    import pilewise

    digest = hashlib.sha256()
    root = Path(pilewise.__file__).resolve().parent
    for path in sorted(root.rglob("*.py")):
        digest.update(path.relative_to(root).as_posix().encode() + b"\0" + path.read_bytes() + b"\0")
    return digest.hexdigest()[:16]


def add_child_arguments(parser: argparse.ArgumentParser, children: tuple[str, ...]) -> None:
    """The hidden options with which the script runs itself as one bare pipeline's child process."""
    parser.add_argument("--child", choices=children, help=argparse.SUPPRESS)
    parser.add_argument("--csv", type=Path, help=argparse.SUPPRESS)
    parser.add_argument("--labels-out", type=Path, help=argparse.SUPPRESS)
    parser.add_argument("--timings-out", type=Path, help=argparse.SUPPRESS)
    parser.add_argument("--min-df", type=int, help=argparse.SUPPRESS)


def start_benchmark(threads: int | None, workdir: Path | None, prefix: str) -> tuple[dict[str, Any], Path, bool]:
    """Thread settings for every child, the machine's description, and the work folder (temporary unless given)."""
    if threads:
        for variable in THREAD_VARIABLES:
            os.environ[variable] = str(threads)  # inherited by every child
    info = machine()
    info["threads_setting"] = threads
    temporary = workdir is None
    work = Path(tempfile.mkdtemp(prefix=prefix)) if workdir is None else workdir.resolve()
    work.mkdir(parents=True, exist_ok=True)
    return info, work, temporary


def ratio(a: float, b: float) -> float:
    return round(a / b, 2) if b else float("nan")


def report(n_docs: int, collection: Collection, min_df: int, results: list[Measurement], info: dict[str, Any]) -> dict:
    by_name = {m.pipeline: m for m in results}
    pile = by_name["pilewise"]
    ratios = {
        ref: {"time": ratio(pile.wall_seconds, by_name[ref].wall_seconds),
              "cpu": ratio(pile.cpu_seconds, by_name[ref].cpu_seconds),
              "memory": ratio(pile.peak_rss_mb, by_name[ref].peak_rss_mb)}
        for ref in ("bare", "bare+lsa") if ref in by_name
    }
    rounds = {ref: round_ratios(results, ref) for ref in ratios}
    lines = [
        f"Machine: {info['cpu']}, {info['usable_cores']} usable cores ({info['logical_cores']} logical), "
        f"{info['ram_gb']} GB RAM, {info['os']}",
        f"Measured at {info['measured_at']}, pilewise source sha256 {info['pilewise_source_sha256']}, "
        f"threads: {info['threads_setting'] or 'library defaults'}",
        "Versions: " + ", ".join(f"{k} {v}" for k, v in info["versions"].items()),
        f"Collection: {n_docs:,} documents, {collection.words:,} words, {collection.bytes / 1e6:.1f} MB CSV, "
        f"{collection.labels}; min_df={min_df}, max_df={MAX_DF}, k={K}, n_init={N_INIT}",
        "",
        "| pipeline | wall time (s) | CPU time (s) | peak RSS (MB) | NMI vs planted |",
        "|---|---:|---:|---:|---:|",
    ]
    for m in results:
        lines.append(f"| {m.pipeline} | {m.wall_seconds:.1f} | {m.cpu_seconds:.1f} | {m.peak_rss_mb:,.0f} "
                     f"| {m.nmi:.3f} |")
    lines += ["", "| pilewise / ... | wall time | CPU time | memory |", "|---|---:|---:|---:|"]
    for ref, r in ratios.items():
        lines.append(f"| {ref} | {r['time']:.2f}x | {r['cpu']:.2f}x | {r['memory']:.2f}x |")
    if any(len(r) > 1 for r in rounds.values()):
        lines += ["", "Wall-time ratio in each round (the pipelines run one after another in every round, so a slow "
                  "spell of the machine falls on all of them):"]
        lines += [f"- pilewise / {ref}: " + ", ".join(f"{x:.2f}x" for x in r) for ref, r in rounds.items()]
    lines += ["", "Stage timings (s):"]
    for m in results:
        lines.append(f"- {m.pipeline}: " + ", ".join(f"{k} {v:.2f}" for k, v in m.stage_seconds.items()))
    # What the manifest's stages do not cover (the root index, process exit; and, before the manifest was
    # rewritten last, the "writing site" stage): the wall time less the recorded stages and a separately
    # timed `import pilewise.cli, pilewise.pipeline`.
    startup = float(pile.extra.get("startup_and_imports_seconds", 0.0))
    rest = pile.wall_seconds - sum(pile.stage_seconds.values()) - startup
    pile.extra["writing_site_estimate_seconds"] = round(rest, 3)
    lines.append(f"- pilewise, not in the manifest: startup and imports {startup:.2f} (timed apart), "
                 f"not in the recorded stages ~{rest:.2f} (wall time less everything else)")
    met = all(r["time"] <= TARGET_RATIO and r["memory"] <= TARGET_RATIO for r in ratios.values())
    lines.append("")
    lines.append(f"Target (pilewise within {TARGET_RATIO}x of the bare pipelines' time and memory): "
                 + ("met" if met else "NOT met"))
    print("\n".join(lines))
    return {
        "documents": n_docs,
        "collection": {**asdict(collection), "csv_path": str(collection.csv_path),
                       "topics_path": str(collection.topics_path)},
        "settings": {"k": K, "n_init": N_INIT, "min_df": min_df, "max_df": MAX_DF, "lsa_components": LSA_COMPONENTS,
                     "background_words": BACKGROUND_WORDS, "topics": TOPICS, "topic_words": TOPIC_WORDS,
                     "topic_share": TOPIC_SHARE},
        "machine": info,
        "results": [asdict(m) for m in results],
        "ratios_pilewise_over": ratios,
        "wall_ratio_by_round": rounds,
        "target_ratio": TARGET_RATIO,
        "target_met": met,
    }


def profile_pilewise(csv_path: Path, work: Path, n_docs: int) -> None:
    """Run pilewise once more under cProfile (not timed) and print the top functions."""
    import pstats

    out = work / "pilewise-profiled"
    shutil.rmtree(out, ignore_errors=True)
    OUT_FOLDER.mkdir(exist_ok=True)
    prof = OUT_FOLDER / f"pilewise-{n_docs}.prof"
    command = [sys.executable, "-m", "cProfile", "-o", str(prof), "-m", "pilewise",
               "run", str(csv_path), "--k", str(K), "--out", str(out), "--quiet"]
    wall, _, _ = run_measured(command, work / "pilewise-profiled.log")
    print(f"\ncProfile of pilewise ({wall:.1f} s under the profiler), written to {prof}")
    stats = pstats.Stats(str(prof))
    stats.sort_stats("cumulative").print_stats(40)
    stats.sort_stats("tottime").print_stats(25)


# --------------------------------------------------------------------------------------------
# Main
# --------------------------------------------------------------------------------------------


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0] if __doc__ else None)
    parser.add_argument("--docs", type=int, default=100_000, help="number of synthetic documents (default 100000)")
    parser.add_argument("--workdir", type=Path, default=None, help="folder for the CSV and outputs (kept)")
    parser.add_argument("--repeat", type=int, default=1, help="runs per pipeline (median time, largest memory)")
    parser.add_argument("--seed", type=int, default=0, help="seed of the collection (or of the glosses' sample)")
    parser.add_argument("--glosses", action="store_true",
                        help="a seeded sample of --docs WordNet noun glosses instead of synthetic documents")
    parser.add_argument("--profile", action="store_true", help="also run pilewise once under cProfile")
    parser.add_argument("--pipelines", type=lambda text: tuple(text.split(",")), default=("bare", "bare+lsa"),
                        help="references to run besides pilewise, comma-separated (default: bare,bare+lsa)")
    parser.add_argument("--threads", type=int, default=None,
                        help="set OMP/OpenBLAS/MKL thread counts of every child (default: the libraries' own)")
    add_child_arguments(parser, ("bare", "bare+lsa"))
    args = parser.parse_args(argv)

    if args.child:
        bare_child(args.csv, args.labels_out, args.timings_out, args.min_df, lsa=args.child == "bare+lsa")
        return

    from pilewise.options import RunOptions
    from pilewise.vectors.tfidf import default_min_df

    info, work, temporary = start_benchmark(args.threads, args.workdir, "pilewise-bench-")
    try:
        print(f"{'sampling' if args.glosses else 'generating'} {args.docs:,} documents in {work} ...", flush=True)
        collection = (gloss_collection if args.glosses else generate_collection)(args.docs, work, args.seed)
        print(f"  {collection.words:,} words, {collection.bytes / 1e6:.1f} MB, {collection.seconds:.1f} s", flush=True)
        # the bare pipelines use the min_df=2; pilewise keeps its own default (recorded beside it)
        min_df = BARE_MIN_DF
        print(f"  pilewise's own min_df default at this size: {default_min_df(args.docs)}", flush=True)
        planted = read_labels(collection.topics_path, "topic")
        pipelines: list[Pipeline] = []
        for name in [p for p in ("bare", "bare+lsa") if p in args.pipelines]:
            labels_path = work / f"{name}-labels.csv"
            timings_path = work / f"{name}-timings.json"
            command = [sys.executable, str(Path(__file__).resolve()), "--child", name,
                       "--csv", str(collection.csv_path), "--labels-out", str(labels_path),
                       "--timings-out", str(timings_path), "--min-df", str(min_df)]

            def stages(timings_path: Path = timings_path) -> tuple[dict[str, float], dict[str, Any]]:
                data = json.loads(timings_path.read_text(encoding="utf-8"))
                return data["timings_seconds"], {"terms": data["terms"]}

            pipelines.append(Pipeline(
                name, command,
                labels_of=lambda p=labels_path: nmi_against(planted, read_labels(p, "cluster")),
                stages_of=stages,
            ))
        out = work / "pilewise-site"

        def run_folder() -> Path:
            """The one run folder pilewise wrote (named k20 by default)."""
            found = [p for p in (out / "runs").iterdir() if p.is_dir() and not p.name.startswith(".")]
            if len(found) != 1:
                raise SystemExit(f"expected one run folder under {out / 'runs'}, found {[p.name for p in found]}")
            return found[0]
        command = [*pilewise_command(), "run", str(collection.csv_path), "--k", str(K), "--out", str(out), "--quiet"]
        size_mb = collection.bytes / 1024 / 1024
        if size_mb > RunOptions.max_file_mb:  # pilewise skips larger files unless told otherwise
            command += ["--max-file-mb", str(int(size_mb) + 1)]
            print(f"  note: the CSV is {size_mb:.0f} MB, above pilewise's default --max-file-mb; raised it", flush=True)

        # interpreter start and imports of the pilewise command, to split the time the manifest does not cover
        # (the command imports the pipeline when it runs: `import pilewise.cli` alone no longer does)
        startup, _, _ = run_measured([sys.executable, "-c", "import pilewise.cli, pilewise.pipeline"],
                                     work / "pilewise-import.log")

        def pilewise_stages() -> tuple[dict[str, float], dict[str, Any]]:
            run = run_folder()
            manifest = json.loads((run / "manifest.json").read_text(encoding="utf-8"))
            files = [p for p in run.rglob("*") if p.is_file()]
            extra = {"run_folder": run.name, "vectors": manifest.get("vectors", {}), "site_files": len(files),
                     "site_mb": round(sum(p.stat().st_size for p in files) / 1e6, 1),
                     "startup_and_imports_seconds": round(startup, 3)}
            return manifest["timings_seconds"], extra

        pipelines.append(Pipeline(
            "pilewise", command,
            labels_of=lambda: nmi_against(planted, read_labels(run_folder() / "assignments.csv", "cluster")),
            stages_of=pilewise_stages,
            prepare=lambda: shutil.rmtree(out, ignore_errors=True),
        ))
        # round by round (bare, bare+lsa, pilewise, then again), so that the machine's slow and fast spells fall
        # on every pipeline alike: on the shared 2-core machine the same bare run took 32-38 s within an hour
        for r in range(args.repeat):
            for pipeline in pipelines:
                run_once(pipeline, work, r, args.repeat)
        print()
        figures = report(args.docs, collection, min_df, [measurement(p) for p in pipelines], info)
        OUT_FOLDER.mkdir(exist_ok=True)
        suffix = f"-threads{args.threads}" if args.threads else ""
        stamp = info["measured_at"].replace("-", "").replace(":", "").replace("+0000", "Z")
        json_path = OUT_FOLDER / f"bench-{args.docs}{suffix}-{stamp}.json"
        json_path.write_text(json.dumps(figures, indent=2) + "\n", encoding="utf-8")
        print(f"\nfigures written to {json_path}")
        if args.profile:
            profile_pilewise(collection.csv_path, work, args.docs)
    finally:
        if temporary:
            shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    main()
