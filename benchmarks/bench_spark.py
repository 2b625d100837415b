"""Benchmark: the spark engine in Spark's local mode against streaming mode, on one synthetic collection.

What it measures
----------------
The synthetic collection of bench_scale.py (planted topics, made-up words; generated here, seeded) of N
documents, then, each in its own subprocess:

a. ``stream``        ``pilewise run <csv> --k 20 --mode stream``;
b. ``spark-local1``  ``pilewise run <csv> --k 20 --engine spark --spark-master local[1]``;
c. ``spark-local2``  the same with ``local[2]``;
d. ``spark-cluster``  the same with ``--spark-master URL`` of ``--cluster URL`` (a standalone cluster started
                      beforehand, e.g. as tests/test_spark_cluster.py starts one; its JVMs are not in the
                      process tree, so its peak memory is the driver's alone).

For each: wall time, peak resident memory of the whole process tree (the driver, Spark's JVM and its Python
workers; sampled from /proc every 0.2 s, so a shorter peak can be missed) and the NMI of its clusters with
the planted topics. local[1] against local[2] shows how Spark's time falls with more executor cores.
Prints a Markdown table; docs/scale.md records the figures and the paper estimate for a cluster.

    PYTHONPATH=src python benchmarks/bench_spark.py --size 100000 [--workdir DIR] [--only stream spark-local2]
        [--event-log DIR]

With --event-log, Spark runs write Spark's event log (spark.eventLog.enabled, through PYSPARK_SUBMIT_ARGS)
into DIR, and the benchmark sums its task times by stage: the executor work (the part that spreads over
more executors) apart from the driver's. docs/scale.md builds its paper estimate for a cluster on them.
"""

from __future__ import annotations

import argparse
import json
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


def stage_costs(logs: list[Path]) -> list[tuple[str, int, float, float]]:
    """Per stage of one application's Spark event log files: (name, tasks, summed task run time s, longest task
    s), most costly first.

    Task run time is the "Executor Run Time" of each SparkListenerTaskEnd (wall time of the task, Python worker
    included); a stage run again (a recomputed RDD) counts each time."""
    names: dict[int, str] = {}
    tasks: dict[int, list[float]] = {}
    for log in logs:
        with log.open(encoding="utf-8") as events:
            for line in events:
                event = json.loads(line)
                if event.get("Event") == "SparkListenerStageCompleted":
                    info = event["Stage Info"]
                    names[info["Stage ID"]] = info["Stage Name"]
                elif event.get("Event") == "SparkListenerTaskEnd" and event.get("Task Metrics"):
                    tasks.setdefault(event["Stage ID"], []).append(event["Task Metrics"]["Executor Run Time"] / 1000)
    rows = [(f"{stage}: {names.get(stage, '?')}", len(times), sum(times), max(times)) for stage, times in tasks.items()]
    return sorted(rows, key=lambda row: -row[2])


def print_stage_costs(log_dir: Path, documents: int) -> None:
    """The task times of the newest application in `log_dir` (a file, or Spark 4's eventlog_v2_* folder of
    events_* files), by stage, and per document."""
    apps = sorted(log_dir.iterdir(), key=lambda path: path.stat().st_mtime)
    if not apps:
        return
    app = apps[-1]
    files = sorted(app.glob("events_*")) if app.is_dir() else [app]
    rows = stage_costs(files)
    total = sum(row[2] for row in rows)
    print(f"\nevent log {app.name}: {len(rows)} stages, {sum(r[1] for r in rows):,} tasks, "
          f"{total:.1f} s of task time ({1000 * total / documents:.3f} ms a document)")
    print("| stage | tasks | task time s | longest task s |")
    print("|---|---:|---:|---:|")
    for name, count, seconds, longest in rows[:15]:
        print(f"| {name} | {count} | {seconds:.1f} | {longest:.1f} |")


def measure(name: str, csv_path: Path, out: Path, k: int,
            event_log: Path | None = None) -> tuple[float, float, Path]:
    env = dict(os.environ)
    if event_log is not None and name.startswith("spark"):
        event_log.mkdir(parents=True, exist_ok=True)
        env["PYSPARK_SUBMIT_ARGS"] = (f"--conf spark.eventLog.enabled=true --conf spark.eventLog.compress=false "
                                      f"--conf spark.eventLog.dir="
                                      f"{event_log.resolve().as_uri()} pyspark-shell")
    command = [sys.executable, "-m", "pilewise.cli", "run", str(csv_path), "--k", str(k), "--out", str(out),
               "--name", name, "--quiet", *RUNS[name]]
    start = time.perf_counter()
    child = subprocess.Popen(command, stdout=subprocess.PIPE, stderr=subprocess.PIPE, env=env)
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
    parser.add_argument("--only", nargs="*", choices=[*sorted(RUNS), "spark-cluster"], default=sorted(RUNS))
    parser.add_argument("--cluster", metavar="URL", help="also run on this Spark master (spark-cluster)")
    parser.add_argument("--event-log", type=Path, help="write Spark's event logs here and sum task times by stage")
    args = parser.parse_args()
    if args.cluster:
        RUNS["spark-cluster"] = ["--engine", "spark", "--spark-master", args.cluster]
        args.only = [*args.only, "spark-cluster"] if "spark-cluster" not in args.only else args.only
    with tempfile.TemporaryDirectory() as scratch:
        folder = args.workdir or Path(scratch)
        folder.mkdir(parents=True, exist_ok=True)
        csv_path = folder / f"synthetic-{args.size}.csv"
        if not csv_path.exists():
            generate_collections([args.size], folder, seed=0)
        planted = read_planted(folder / f"synthetic-{args.size}-topics.csv")
        print(f"{args.size:,} documents, k={args.k}, {os.cpu_count()} cores")
        print("| run | wall s | peak MB (process tree) | NMI | load average at the end (1 min) |")
        print("|---|---:|---:|---:|---|")
        for name in args.only:
            seconds, peak, assignments = measure(name, csv_path, folder / "out", args.k, args.event_log)
            load = os.getloadavg()[0]
            print(f"| {name} | {seconds:.1f} | {peak:.0f} | {nmi_from_file(assignments, planted):.3f} | "
                  f"load {load:.1f} |", flush=True)
            if args.event_log is not None and name.startswith("spark"):
                print_stage_costs(args.event_log, args.size)


if __name__ == "__main__":
    main()
