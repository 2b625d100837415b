"""Stability readings against purity: does a "stable" cluster hold one gold group?

What it measures
----------------
On each open labeled collection (``tests/open_sets.py``; the large ones on seeded samples, ``--sample``)
it writes every document as a text file into a scratch folder and runs pilewise's own computation
(``pipeline.compute_run``, defaults, k = the number of gold labels, 20 resamples). Per cluster it records
the size, purity (share of its largest gold label among its documents), bootstrap stability, the mixed flag
and the stability reading. It prints, per collection and pooled:

- Spearman's rho between stability and purity over all clusters, and over the clusters not flagged mixed;
- the clusters whose stability alone reads "stable" or "highly stable" (>= 0.75): how many, how many of
  them are mixed, and their mean purity; then the same for the clusters the run reads so (a mixed cluster
  is read "mixed, yet it reappears in resamples" instead, ``stability.mixed_stability_reading``).

How to run
----------
    python benchmarks/measure_readings.py                       # every collection (about 10 min)
    python benchmarks/measure_readings.py --collections chat_categories foldoc

Every figure goes to ``benchmarks/.out/readings.json`` (``--out``).
"""

from __future__ import annotations

import argparse
import json
import sys
import tempfile
from collections import Counter
from collections.abc import Sequence
from pathlib import Path
from typing import Any

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

from measure_quality import ORDER, OUT_DIR, SAMPLES, load_sample  # noqa: E402

from pilewise.options import RunOptions  # noqa: E402
from pilewise.pipeline import compute_run  # noqa: E402
from pilewise.progress import Reporter  # noqa: E402

STABLE_READINGS = ("stable", "highly stable")
LARGE_SAMPLE = 2000  # documents kept of the three large collections by default


def clusters_of(name: str, sample: int | None) -> dict[str, Any]:
    """One default run at the gold k; per cluster: size, purity, stability, mixed, reading."""
    collection = load_sample(name, sample if name in SAMPLES else None)
    with tempfile.TemporaryDirectory() as scratch:
        folder = Path(scratch) / name
        folder.mkdir()
        gold: dict[str, str] = {}
        for i, (text, label) in enumerate(zip(collection.texts, collection.labels, strict=True)):
            file_name = f"doc-{i:05d}.txt"
            (folder / file_name).write_text(text, encoding="utf-8")
            gold[file_name] = label
        k = len(set(collection.labels))
        result = compute_run(RunOptions(source=folder, k=k, quiet=True), Reporter(quiet=True))
    shares = subsample_stability(result)
    labels_in: list[Counter[str]] = [Counter() for _ in range(result.k)]
    docs = result.collection.documents
    for doc, text in enumerate(result.collection.text_of_doc):
        labels_in[int(result.clustering.labels[text])][gold[docs[doc].doc_id]] += 1
    rows = []
    for cluster in result.clusters:
        counts = labels_in[cluster.cluster_id]
        rows.append({"size": cluster.size, "purity": max(counts.values()) / sum(counts.values()),
                     "stability": cluster.stability, "mixed": cluster.mixed, "reading": cluster.stability_reading,
                     **{key: values[cluster.cluster_id] for key, values in shares.items()}})
    return {"collection": name, "k": result.k, "documents": len(docs), "clusters": rows}


SUBSAMPLES = (0.5, 0.8)  # shares of rows drawn without replacement, Hennig's "subsetting" scheme


def subsample_stability(result: Any) -> dict[str, list[float]]:
    """Per cluster stability of the run's clustering with subsampling instead of the bootstrap (20 draws)."""
    import numpy as np

    from pilewise.clustering.stability import bootstrap_stability, kmeans_cluster_fn, stability_rows

    weights = result.collection.copies.astype(float)
    rows = stability_rows(weights.size, 0)
    out = {}
    for share in SUBSAMPLES:
        found = bootstrap_stability(np.asarray(result.vectors.space)[rows], weights[rows],
                                    result.clustering.labels[rows], k=result.k, resamples=20, seed=0,
                                    cluster_fn=kmeans_cluster_fn(result.k), subsample=share)
        out[f"subsample_{share}"] = [c.mean_jaccard for c in found.clusters]
    return out


def summary(label: str, clusters: list[dict[str, Any]]) -> str:
    from scipy.stats import spearmanr

    measured = [c for c in clusters if c["stability"] is not None]
    rho = spearmanr([c["stability"] for c in measured], [c["purity"] for c in measured]).statistic
    themed = [c for c in measured if not c["mixed"]]
    rho_themed = spearmanr([c["stability"] for c in themed], [c["purity"] for c in themed]).statistic \
        if len(themed) > 2 else float("nan")
    before = [c for c in measured if c["stability"] >= 0.75]
    after = [c for c in measured if c["reading"] in STABLE_READINGS]

    def purity(group: list[dict[str, Any]]) -> str:
        return f"{sum(c['purity'] for c in group) / len(group):.2f}" if group else "-"

    subsampled = " | ".join(
        f"{spearmanr([c[f'subsample_{s}'] for c in measured], [c['purity'] for c in measured]).statistic:.2f}"
        if all(f"subsample_{s}" in c for c in measured) else "-" for s in SUBSAMPLES)
    return (f"| {label} | {len(measured)} | {sum(c['mixed'] for c in measured)} | {rho:.2f} | {subsampled} | "
            f"{rho_themed:.2f} | "
            f"{len(before)} ({sum(c['mixed'] for c in before)} mixed), {purity(before)} | "
            f"{len(after)} ({sum(c['mixed'] for c in after)} mixed), {purity(after)} |")


def render(results: list[dict[str, Any]]) -> str:
    lines = ["| collection | clusters | mixed | Spearman(stability, purity) | "
             + " | ".join(f"the same, subsampling {s:.0%}" for s in SUBSAMPLES)
             + " | the same, clusters not mixed | stability >= 0.75: clusters, mean purity | "
             "read stable now: clusters, mean purity |", "|---|---|---|---|---|---|---|---|---|"]
    lines += [summary(r["collection"], r["clusters"]) for r in results]
    lines.append(summary("pooled", [c for r in results for c in r["clusters"]]))
    return "\n".join(lines)


def main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--collections", nargs="+", default=list(ORDER))
    parser.add_argument("--sample", type=int, default=LARGE_SAMPLE,
                        help="documents kept of the large collections (the others are whole)")
    parser.add_argument("--out", type=Path, default=OUT_DIR / "readings.json")
    parser.add_argument("--render", type=Path, help="print the table of a saved run and stop")
    args = parser.parse_args(argv)
    if args.render:
        print(render(json.loads(args.render.read_text(encoding="utf-8"))))
        return 0
    results = []
    for name in args.collections:
        results.append(clusters_of(name, args.sample))
        print(f"{name}: done", file=sys.stderr, flush=True)
        args.out.parent.mkdir(parents=True, exist_ok=True)
        args.out.write_text(json.dumps(results, indent=2) + "\n", encoding="utf-8")
    print(render(results))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
