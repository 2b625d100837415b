"""Benchmark: the spark engine in Spark's local mode against streaming mode, on one synthetic collection.

What it measures
----------------
The synthetic collection of bench_scale.py (planted topics, made-up words; generated here, seeded) of N
documents, then, each in its own subprocess:

a. ``stream``        ``pilewise run <csv> --k 20 --mode stream``;
b. ``spark-local1``  ``pilewise run <csv> --k 20 --engine spark --spark-master local[1]``;
c. ``spark-local2``  the same with ``local[2]``.

For each: wall time, peak resident memory of the whole process tree (the driver, Spark's JVM and its Python
workers; sampled from /proc every 0.2 s, so a shorter peak can be missed) and the NMI of its clusters with
the planted topics. local[1] against local[2] shows how Spark's time falls with more executor cores.
Prints a Markdown table; docs/scale.md records the figures and the paper estimate for a cluster.

    PYTHONPATH=src python benchmarks/bench_spark.py --size 100000 [--workdir DIR] [--only stream spark-local2]
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).parent))
from bench_scale import generate_collections, nmi_from_file, read_planted  # noqa: E402

RUNS = {
    "stream": ["--mode", "stream"],
    "spark-local1": ["--engine", "spark", "--spark-master", "local[1]"],
    "spark-local2": ["--engine", "spark", "--spark-master", "local[2]"],
}


def tree_rss_mb(root: int) -> float:
    """Resident memory of `root` and every process below it, from /proc (MB)."""
    children: dict[int, list[int]] = {}
    rss: dict[int, int] = {}
    for entry in os.listdir("/proc"):
        if not entry.isdigit():
            continue
        try:
            stat = Path(f"/proc/{entry}/stat").read_text()
            fields = stat[stat.rindex(")") + 2 :].split()
            children.setdefault(int(fields[1]), []).append(int(entry))
            rss[int(entry)] = int(fields[21]) * os.sysconf("SC_PAGE_SIZE")
        except (OSError, ValueError):
            continue
    total, stack = 0, [root]
    while stack:
        pid = stack.pop()
        total += rss.get(pid, 0)
        stack.extend(children.get(pid, []))
    return total / 1e6


def measure(name: str, csv_path: Path, out: Path, k: int) -> tuple[float, float, Path]:
    command = [sys.executable, "-m", "pilewise.cli", "run", str(csv_path), "--k", str(k), "--out", str(out),
               "--name", name, "--quiet", *RUNS[name]]
    start = time.perf_counter()
    child = subprocess.Popen(command, stdout=subprocess.PIPE, stderr=subprocess.PIPE)
    peak = 0.0
    while child.poll() is None:
        peak = max(peak, tree_rss_mb(child.pid))
        time.sleep(0.2)
    seconds = time.perf_counter() - start
    _, err = child.communicate()
    (out / f"{name}.stderr.log").write_bytes(err)  # kept whole: a failed run is diagnosed from it
    if child.returncode != 0:
        raise SystemExit(f"{name} failed:\n{err.decode(errors='replace')[-3000:]}")
    return seconds, peak, out / "runs" / name / "assignments.csv"


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--size", type=int, default=1_000_000)
    parser.add_argument("--k", type=int, default=20)
    parser.add_argument("--workdir", type=Path)
    parser.add_argument("--only", nargs="*", choices=sorted(RUNS), default=sorted(RUNS))
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as scratch:
        folder = args.workdir or Path(scratch)
        folder.mkdir(parents=True, exist_ok=True)
        csv_path = folder / f"synthetic-{args.size}.csv"
        if not csv_path.exists():
            generate_collections([args.size], folder, seed=0)
        planted = read_planted(folder / f"synthetic-{args.size}-topics.csv")
        print(f"{args.size:,} documents, k={args.k}, {os.cpu_count()} cores")
        print("| run | wall s | peak MB (process tree) | NMI |")
        print("|---|---:|---:|---:|")
        for name in args.only:
            seconds, peak, assignments = measure(name, csv_path, folder / "out", args.k)
            print(f"| {name} | {seconds:.1f} | {peak:.0f} | {nmi_from_file(assignments, planted):.3f} |", flush=True)


if __name__ == "__main__":
    main()
