"""Measure where the full Ward tree stops being practical, and what the two-stage tree costs instead.

What it measures
----------------
On n random unit vectors of 100 dimensions (seeded; a stand-in for the LSA space) it times
``pilewise.clustering.hierarchy.ward_tree`` in two ways, each n in a fresh subprocess:

- ``full``: ``full_limit=n``, i.e. ``scipy.cluster.hierarchy.linkage(method="ward")`` on the rows;
- ``two-stage``: ``full_limit=2``, i.e. mini-batch k-means into 300 groups, then weighted Ward,

and, on the tree built, the cuts for k = 2..30 (``cuts_for_range``) that the site needs. Peak memory is the
child's maximum resident set size, read with ``os.wait4`` for exactly that child: it is the per-child form
of ``resource.getrusage(RUSAGE_CHILDREN).ru_maxrss``, which instead reports the largest of all children
waited for so far and so cannot show a small child after a big one. The peak includes the interpreter,
numpy/scipy/scikit-learn and the data (n x 100 doubles), so the "baseline" column gives the peak just
before the tree is built.

Full Ward needs the condensed distance matrix, n(n-1)/2 doubles, and SciPy copies it once more inside
``linkage``; the "predicted" column is 2 x 8 x n(n-1)/2 bytes. A size is not run when the prediction exceeds
``--max-gb`` or when the previous size of the same method took longer than ``--max-seconds``.

Timings are wall-clock on a shared machine; the load average before each run is printed beside it.
Random unit vectors have no cluster structure, so these figures say nothing about the quality of the trees.

With ``--quality COLLECTION...`` it measures instead, on the open corpora, the NMI of pilewise's Ward cut,
of scikit-learn's ``AgglomerativeClustering(linkage="ward")`` and of pilewise's k-means on the same vectors.

How to run
----------
    python benchmarks/measure_ward.py                         # 2k..30k both methods, 100k two-stage only
    python benchmarks/measure_ward.py --sizes 2000 5000 --two-stage-only 20000

It prints a Markdown table and writes every figure to ``benchmarks/.out/ward.json`` and the table beside it
as ``ward.md`` (``--out`` changes the JSON path; the Markdown goes beside it).
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import subprocess
import sys
import tempfile
import time
from collections.abc import Sequence
from importlib.metadata import version
from pathlib import Path
from typing import Any

import numpy as np

OUT_DIR = Path(__file__).resolve().parent / ".out"
DIMS = 100
SEED = 0
KS = (2, 30)


def unit_rows(n: int, dims: int, seed: int) -> np.ndarray:
    """n seeded random unit vectors in `dims` dimensions."""
    rows = np.random.default_rng(seed).standard_normal((n, dims))
    return rows / np.linalg.norm(rows, axis=1, keepdims=True)


def child(method: str, n: int, dims: int, seed: int) -> dict[str, Any]:
    """Build one tree in this process and return its timings (runs inside the subprocess)."""
    import resource

    from pilewise.clustering.hierarchy import cuts_for_range, ward_tree

    space = unit_rows(n, dims, seed)
    weights = np.ones(n)
    baseline_kib = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    started = time.perf_counter()
    tree = ward_tree(space, weights, seed=seed, full_limit=n if method == "full" else 2)
    tree_seconds = time.perf_counter() - started
    started = time.perf_counter()
    cuts_for_range(tree, *KS)
    cut_seconds = time.perf_counter() - started
    return {
        "tree_seconds": tree_seconds,
        "cut_seconds": cut_seconds,
        "baseline_mib": baseline_kib / 1024,
        "method_built": tree.method,
        "n_leaves": tree.n_leaves,
    }


def predicted_full_gb(n: int) -> float:
    """Condensed distance matrix plus SciPy's working copy, in GB (10^9 bytes)."""
    return 2 * 8 * n * (n - 1) / 2 / 1e9


def run_child(method: str, n: int, dims: int, seed: int, timeout: float) -> dict[str, Any]:
    """Run `child` in a fresh interpreter; add its peak RSS (os.wait4) and the load average."""
    load_before = os.getloadavg()[0]
    with tempfile.TemporaryFile() as out, tempfile.TemporaryFile() as err:
        process = subprocess.Popen(
            [sys.executable, __file__, "--child", method, "--n", str(n), "--dims", str(dims), "--seed", str(seed)],
            stdout=out,
            stderr=err,
        )
        started = time.monotonic()
        while True:
            pid, status, usage = os.wait4(process.pid, os.WNOHANG)
            if pid:
                break
            if time.monotonic() - started > timeout:
                process.kill()  # our own child, by its pid
                pid, status, usage = os.wait4(process.pid, 0)
                break
            time.sleep(0.2)
        process.returncode = os.waitstatus_to_exitcode(status)  # reaped here, so tell Popen
        wall = time.monotonic() - started
        out.seek(0)
        lines = out.read().decode().strip().splitlines()
        err.seek(0)
        errors = err.read().decode(errors="replace").strip().splitlines()
    result: dict[str, Any] = {
        "method": method,
        "n": n,
        "exit": process.returncode,
        "peak_mib": usage.ru_maxrss / 1024,  # Linux reports KiB
        "wall_seconds": wall,
        "load_before": load_before,
    }
    if process.returncode == 0 and lines:
        result.update(json.loads(lines[-1]))
    elif wall > timeout:
        result["error"] = f"killed after {timeout:.0f} s"
    elif process.returncode < 0:
        result["error"] = f"killed by signal {-process.returncode} (out of memory?)"
    else:
        result["error"] = f"exit status {process.returncode}: {errors[-1] if errors else 'no message'}"
    return result


def fmt(value: Any, spec: str) -> str:
    """Format a number, or an em dash when missing."""
    return "—" if value is None else format(value, spec)


def table(rows: list[dict[str, Any]]) -> str:
    """The Markdown table of all runs."""
    lines = [
        "| n | method | tree s | cuts 2..30 s | peak RSS MiB | baseline MiB | predicted full GB | load | note |",
        "|---:|---|---:|---:|---:|---:|---:|---:|---|",
    ]
    for row in rows:
        predicted = predicted_full_gb(row["n"]) if row["method"] == "full" else None
        lines.append(
            f"| {row['n']:,} | {row['method']} | {fmt(row.get('tree_seconds'), '.2f')} "
            f"| {fmt(row.get('cut_seconds'), '.2f')} | {fmt(row.get('peak_mib'), ',.0f')} "
            f"| {fmt(row.get('baseline_mib'), ',.0f')} | {fmt(predicted, '.2f')} "
            f"| {fmt(row.get('load_before'), '.1f')} | {row.get('error') or row.get('skipped') or ''} |"
        )
    return "\n".join(lines)


def quality(names: Sequence[str], seeds: Sequence[int]) -> str:
    """NMI of pilewise's Ward cut, scikit-learn's Ward and pilewise's k-means on the same vectors, k = the labels.

    The vectors are pilewise's default space of each open corpus (``measure_quality.pilewise_space``; the
    large ones on ``measure_quality.SAMPLES``); ``same partition`` is the NMI between the two Ward cuts.
    """
    sys.path.insert(0, str(Path(__file__).resolve().parent))
    from measure_quality import load_sample, nmi, pilewise_space, prepare
    from sklearn.cluster import AgglomerativeClustering
    from sklearn.metrics import normalized_mutual_info_score

    from pilewise.clustering.hierarchy import cut_tree, ward_tree
    from pilewise.clustering.kmeans import kmeans_clusters

    lines = ["| collection | texts | k | pilewise Ward | scikit-learn Ward | same partition | pilewise k-means |",
             "|---|---|---|---|---|---|---|"]
    for name in names:
        prepared = prepare(load_sample(name))
        k = prepared.k_true
        found: dict[str, list[float]] = {"ward": [], "sklearn": [], "same": [], "kmeans": []}
        for seed in seeds:
            space = pilewise_space(prepared, seed)
            ours = cut_tree(ward_tree(space, prepared.copies, seed=seed), k)
            theirs = AgglomerativeClustering(n_clusters=k, linkage="ward").fit_predict(space)
            found["ward"].append(nmi(prepared, ours))
            found["sklearn"].append(nmi(prepared, theirs))
            found["same"].append(float(normalized_mutual_info_score(ours, theirs)))
            found["kmeans"].append(nmi(prepared, kmeans_clusters(space, prepared.copies, k=k, seed=seed,
                                                                 n_init=4).labels))
        cells = " | ".join(f"{np.mean(found[key]):.3f}" for key in ("ward", "sklearn", "same", "kmeans"))
        lines.append(f"| {name} | {len(prepared.texts):,} | {k} | {cells} |")
        print(lines[-1], file=sys.stderr, flush=True)
    return "\n".join(lines)


def main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0] if __doc__ else None)
    parser.add_argument("--sizes", type=int, nargs="+", default=[2000, 5000, 10000, 20000, 30000])
    parser.add_argument("--two-stage-only", type=int, nargs="*", default=[100000])
    parser.add_argument("--dims", type=int, default=DIMS)
    parser.add_argument("--seed", type=int, default=SEED)
    parser.add_argument("--max-seconds", type=float, default=120.0, help="stop growing a method after a slower run")
    parser.add_argument("--max-gb", type=float, default=8.0, help="skip full Ward when predicted memory exceeds it")
    parser.add_argument("--timeout", type=float, default=900.0, help="kill a single run after this many seconds")
    parser.add_argument("--out", type=Path, default=OUT_DIR / "ward.json", help="JSON output; Markdown beside it")
    parser.add_argument("--child", choices=["full", "two-stage"], help=argparse.SUPPRESS)
    parser.add_argument("--n", type=int, help=argparse.SUPPRESS)
    parser.add_argument("--quality", nargs="+", metavar="COLLECTION",
                        help="instead: NMI of Ward (pilewise, scikit-learn) and k-means on these open corpora")
    parser.add_argument("--seeds", type=int, nargs="+", default=[0, 1, 2, 3, 4], help="seeds for --quality")
    args = parser.parse_args(argv)
    if args.quality:
        print(quality(args.quality, args.seeds))
        return 0
    if args.child:
        print(json.dumps(child(args.child, args.n, args.dims, args.seed)))
        return 0

    plan = [(method, n) for n in sorted(args.sizes) for method in ("full", "two-stage")]
    plan += [("two-stage", n) for n in sorted(args.two_stage_only)]
    rows: list[dict[str, Any]] = []
    stopped: dict[str, str] = {}
    for method, n in plan:
        if method in stopped:
            rows.append({"method": method, "n": n, "skipped": stopped[method]})
        elif method == "full" and predicted_full_gb(n) > args.max_gb:
            rows.append({"method": method, "n": n, "skipped": f"predicted {predicted_full_gb(n):.1f} GB"})
        else:
            row = run_child(method, n, args.dims, args.seed, args.timeout)
            rows.append(row)
            seconds = row.get("tree_seconds")
            if seconds is not None and seconds > args.max_seconds:
                stopped[method] = f"not run: n={n:,} took {seconds:.0f} s"
            elif "killed" in row.get("error", ""):
                stopped[method] = f"not run: n={n:,} was {row['error']}"
        print(json.dumps(rows[-1]), file=sys.stderr, flush=True)

    header = (
        f"Ward trees on n x {args.dims} random unit vectors, seed {args.seed}; "
        f"{os.cpu_count()} CPUs, Python {platform.python_version()}, numpy {version('numpy')}, "
        f"scipy {version('scipy')}, scikit-learn {version('scikit-learn')}; "
        f"load average when done {os.getloadavg()[0]:.1f}."
    )
    markdown = f"{header}\n\n{table(rows)}\n"
    print(markdown)
    args.out.parent.mkdir(parents=True, exist_ok=True)
    args.out.write_text(json.dumps({"header": header, "rows": rows}, indent=1), encoding="utf-8")
    args.out.with_suffix(".md").write_text(markdown, encoding="utf-8")
    return 0


if __name__ == "__main__":
    sys.exit(main())
