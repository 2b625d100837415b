"""Benchmark: a sweep over k = 2..20 against a single run at one k, on the same synthetic collection.

The target (docs/performance.md): the sweep within 3x the time of one run. Both are measured in one
invocation, each in its own child process, on a collection generated here (see bench_pipeline.py).

    python benchmarks/bench_sweep.py --docs 20000
"""

from __future__ import annotations

import argparse
import json
import sys
import tempfile
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

from bench_pipeline import generate_collection, machine, pilewise_command, run_measured  # noqa: E402


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--docs", type=int, default=20_000)
    parser.add_argument("--k", type=int, default=10, help="k of the single run")
    parser.add_argument("--range", default="2:20", help="k range of the sweep")
    parser.add_argument("--workdir", type=Path, default=None)
    args = parser.parse_args(argv)
    work = args.workdir or Path(tempfile.mkdtemp(prefix="pilewise-sweep-"))
    work.mkdir(parents=True, exist_ok=True)
    collection = generate_collection(args.docs, work, seed=0)
    csv_path = Path(collection.csv_path)
    base = pilewise_command()
    runs = {
        "run": [*base, "run", str(csv_path), "--k", str(args.k), "--out", str(work / "site"), "--quiet"],
        "sweep": [*base, "sweep", str(csv_path), "--k", args.range, "--out", str(work / "site"), "--quiet"],
    }
    figures = {}
    for name, command in runs.items():
        wall, rss, cpu = run_measured(command, work / f"{name}.log")
        figures[name] = {"wall_seconds": round(wall, 2), "peak_rss_mb": round(rss, 1), "cpu_seconds": round(cpu, 2)}
        print(f"{name}: {wall:.1f} s wall, {cpu:.1f} s CPU, {rss:,.0f} MB peak", flush=True)
    ratio = figures["sweep"]["wall_seconds"] / figures["run"]["wall_seconds"]
    print(f"sweep / run: {ratio:.2f}x (target: at most 3x)")
    out = Path(__file__).resolve().parent / ".out"
    out.mkdir(exist_ok=True)
    (out / f"sweep-{args.docs}.json").write_text(json.dumps(
        {"documents": args.docs, "range": args.range, "k": args.k, "figures": figures, "ratio": round(ratio, 2),
         "machine": machine()}, indent=2) + "\n", encoding="utf-8")


if __name__ == "__main__":
    main()
