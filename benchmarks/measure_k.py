"""Choosing k: candidate rules for ``--k auto`` measured on every open labeled corpus.

What it measures
----------------
On each open collection (``tests/open_sets.py``; the large ones on the seeded samples of
``measure_quality.SAMPLES``) it builds pilewise's default space (LSA 100, unit rows) with seed 0 and, for
every k of a grid (2 to 30, then every third k up to 1.5 times the number of gold labels), records:

- ``nmi``: NMI against the gold labels of pilewise's k-means at k (4 starts, seed 0);
- ``silhouette``: the cosine silhouette of that clustering (``clustering.quality.assess``);
- ``null_silhouette``, ``null_inertia``: the same for k-means at the same k on the **null reference**
  (``clustering.quality.null_space``: each column of the space shuffled on its own, rows back to unit length);
- ``inertia``: k-means' within-cluster sum of squares;
- ``stability_1``, ``stability``: mean clusterwise bootstrap stability (10 resamples, at most 5,000 rows)
  when each resample is re-clustered with 1 k-means start (pilewise before issue 11; left out with
  ``--no-one-start``) and with the run's starts (``stability.RESAMPLE_STARTS``, after it);
- ``null_stability``: the same stability for the k-means clustering of the null reference at k, the bar
  of ``recommend_k`` when no k reaches ``sweep.STABLE``.

Then it applies each candidate rule of ``RULES`` to those figures and prints, per collection, the k each
rule picks and the NMI at that k, beside the true number of labels and the best NMI over the grid.

How to run
----------
    bash corpora/fetch.sh --all
    python benchmarks/measure_k.py --no-one-start         # every collection (about 25 min on 2 busy cores)
    python benchmarks/measure_k.py --collections foldoc
    python benchmarks/measure_k.py --collections wordnet_glosses fortunes --sample 3000 --coarse --resamples 5 \
        --out benchmarks/.out/k-large.json                   # the large ones on a coarser grid
    python benchmarks/measure_k.py --render benchmarks/.out/k.json benchmarks/.out/k-large.json

Every figure goes to ``benchmarks/.out/k.json`` (``--out``).
"""

from __future__ import annotations

import argparse
import json
import math
import sys
import time
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

import numpy as np

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

from measure_quality import ORDER, OUT_DIR, load_sample, nmi, pilewise_space, prepare  # noqa: E402

from pilewise.clustering.kmeans import kmeans_clusters  # noqa: E402
from pilewise.clustering.quality import assess, null_space  # noqa: E402
from pilewise.clustering.stability import RESAMPLE_STARTS, bootstrap_stability, kmeans_cluster_fn, stability_rows  # noqa: E402
from pilewise.clustering.sweep import MIN_CLUSTER_TEXTS, SweepPoint, recommend_k  # noqa: E402

STARTS = 4
RESAMPLES = 10


def k_grid(k_true: int, n: int, coarse: bool = False) -> list[int]:
    """2..30, then every third k up to 1.5 x the labels (at most n - 1); coarse: 2..10, then every third k."""
    top = max(20, math.ceil(1.5 * k_true))
    dense_to = 10 if coarse else 30
    ks = list(range(2, min(top, dense_to) + 1)) + list(range(dense_to + 3, top + 1, 3))
    return [k for k in ks if k < n]


def per_k(name: str, sample: int | None = None, coarse: bool = False, resamples: int = RESAMPLES,
          one_start: bool = True) -> dict[str, Any]:
    prepared = prepare(load_sample(name, sample))
    space = pilewise_space(prepared, 0)
    weights = prepared.copies
    null = null_space(space, seed=0)
    rows = stability_rows(weights.size, 0)
    points = []
    for k in k_grid(prepared.k_true, weights.size, coarse):
        started = time.perf_counter()
        clustering = kmeans_clusters(space, weights, k=k, seed=0, n_init=STARTS)
        quality = assess(space, clustering.labels, k=k, seed=0)
        null_clustering = kmeans_clusters(null, weights, k=k, seed=0, n_init=STARTS)
        null_quality = assess(null, null_clustering.labels, k=k, seed=0)
        stabilities = {}
        runs = [("stability", space, clustering.labels, RESAMPLE_STARTS),
                ("null_stability", null, null_clustering.labels, RESAMPLE_STARTS)]
        if one_start:
            runs.append(("stability_1", space, clustering.labels, 1))
        for key, rows_of, labels, starts in runs:
            result = bootstrap_stability(rows_of[rows], weights[rows], labels[rows], k=k,
                                         resamples=resamples, seed=0, cluster_fn=kmeans_cluster_fn(k, starts))
            stabilities[key] = result.mean
            stabilities[key + "_min"] = float(np.nanmin([c.mean_jaccard for c in result.clusters]))
        points.append({"k": k, "nmi": nmi(prepared, clustering.labels), "silhouette": quality.silhouette,
                       "null_silhouette": null_quality.silhouette, "inertia": clustering.inertia,
                       "null_inertia": null_clustering.inertia, "calinski_harabasz": quality.calinski_harabasz,
                       "davies_bouldin": quality.davies_bouldin, **stabilities,
                       "seconds": time.perf_counter() - started})
        print(f"{name} k={k} nmi={points[-1]['nmi']:.3f} sil={quality.silhouette:.3f} "
              f"null={null_quality.silhouette:.3f} stab={stabilities['stability']:.2f} "
              f"null_stab={stabilities['null_stability']:.2f}", file=sys.stderr, flush=True)
    return {"collection": name, "documents": prepared.documents, "distinct": int(weights.size),
            "k_true": prepared.k_true, "points": points, "coarse": coarse}


def stability_purity(name: str, resamples: int = 20, sample: int | None = None) -> dict[str, Any]:
    """Per cluster at k = the gold count: purity (share of its largest gold label) and stability, 1 vs 4 starts."""
    from measure_quality import text_labels
    from scipy.stats import spearmanr

    prepared = prepare(load_sample(name, sample))
    space = pilewise_space(prepared, 0)
    weights, k = prepared.copies, prepared.k_true
    clustering = kmeans_clusters(space, weights, k=k, seed=0, n_init=STARTS)
    gold = text_labels(prepared)
    purity = [float(np.bincount(gold[clustering.labels == c], weights=weights[clustering.labels == c]).max()
                    / weights[clustering.labels == c].sum()) for c in range(k)]
    rows = stability_rows(weights.size, 0)
    out: dict[str, Any] = {"collection": name, "k": k, "purity": purity}
    for key, starts in (("starts_1", 1), ("starts_4", RESAMPLE_STARTS)):
        result = bootstrap_stability(space[rows], weights[rows], clustering.labels[rows], k=k, resamples=resamples,
                                     seed=0, cluster_fn=kmeans_cluster_fn(k, starts))
        values = [c.mean_jaccard for c in result.clusters]
        out[key] = values
        out[key + "_spearman"] = float(spearmanr(values, purity).statistic)
    print(f"{name}: spearman 1 start {out['starts_1_spearman']:.2f}, {RESAMPLE_STARTS} starts "
          f"{out['starts_4_spearman']:.2f}", file=sys.stderr, flush=True)
    return out


def _sweep_points(points: list[dict[str, Any]], stability: str) -> list[SweepPoint]:
    return [SweepPoint(p["k"], p["silhouette"], p["calinski_harabasz"], p["davies_bouldin"], p[stability],
                       p[stability + "_min"], p["inertia"], p["null_silhouette"], p.get("null_" + stability))
            for p in points]


def _argmax(points: list[dict[str, Any]], score: Callable[[dict[str, Any]], float]) -> int:
    return int(max(points, key=lambda p: (score(p), -p["k"]))["k"])


def old_rule(points: list[SweepPoint]) -> int:
    """The rule before issue 11: stability >= 0.75, else >= 0.6, else all; then the highest silhouette."""
    kept = [p for p in points if p.stability_mean >= 0.75] or [p for p in points if p.stability_mean >= 0.6] \
        or list(points)
    return max(kept, key=lambda p: (p.silhouette if p.silhouette is not None else -2.0, -p.k)).k


def _largest_stable(points: list[dict[str, Any]], bar: float) -> int:
    kept = [p["k"] for p in points if p["stability"] >= bar]
    return max(kept) if kept else int(points[0]["k"])


def _stays_above(points: list[dict[str, Any]], bar: float) -> int:
    """The largest k before the first k (from the smallest) whose mean stability falls below `bar`."""
    chosen = int(points[0]["k"])
    for p in points:
        if p["stability"] < bar:
            break
        chosen = int(p["k"])
    return chosen


def _filtered_excess(points: list[dict[str, Any]], bar: float, min_size: int) -> int:
    """Highest silhouette excess over the null among k with mean stability >= bar and >= min_size texts a cluster."""
    kept = [p for p in points if p["stability"] >= bar and p["n"] / p["k"] >= min_size] or points[:1]
    return _argmax(kept, lambda p: p["silhouette"] - p["null_silhouette"])


def _plateau(points: list[dict[str, Any]], share: float) -> int:
    """Smallest eligible k (stability >= 0.6, >= 15 texts a cluster) whose excess reaches `share` of the best."""
    kept = [p for p in points if p["stability"] >= 0.6 and p["n"] / p["k"] >= MIN_CLUSTER_TEXTS] or points[:1]
    best = max(p["silhouette"] - p["null_silhouette"] for p in kept)
    if best <= 0:
        return _argmax(kept, lambda p: p["silhouette"] - p["null_silhouette"])
    return int(min(p["k"] for p in kept if p["silhouette"] - p["null_silhouette"] >= share * best))


RULES: dict[str, Callable[[list[dict[str, Any]]], int]] = {
    "old: stability(1 start) filter, max silhouette": lambda ps: old_rule(_sweep_points(ps, "stability_1")),
    "stability filter, max silhouette": lambda ps: old_rule(_sweep_points(ps, "stability")),
    "max silhouette": lambda ps: _argmax(ps, lambda p: p["silhouette"]),
    "max silhouette - null silhouette": lambda ps: _argmax(ps, lambda p: p["silhouette"] - p["null_silhouette"]),
    "max silhouette / null silhouette": lambda ps: _argmax(ps, lambda p: p["silhouette"] / p["null_silhouette"]),
    "max gap log(W_null / W)": lambda ps: _argmax(ps, lambda p: math.log(p["null_inertia"] / p["inertia"])),
    "largest k with stability >= 0.75": lambda ps: _largest_stable(ps, 0.75),
    "stability stays >= 0.6 from the smallest k": lambda ps: _stays_above(ps, 0.6),
    "max (silhouette - null) x stability": lambda ps: _argmax(
        ps, lambda p: (p["silhouette"] - p["null_silhouette"]) * p["stability"]),
    "max silhouette - null, stability >= 0.6, >= 15 texts a cluster": lambda ps: _filtered_excess(
        ps, 0.6, MIN_CLUSTER_TEXTS),
    "as above, smallest k reaching 3/4 of the best excess": lambda ps: _plateau(ps, 0.75),
    "largest k with min cluster stability > 0.5": lambda ps: max(
        [p["k"] for p in ps if p["stability_min"] > 0.5] or [ps[0]["k"]]),
    "largest k with stability >= 0.6": lambda ps: _largest_stable(ps, 0.6),
    "chosen (recommend_k)": lambda ps: recommend_k(_sweep_points(ps, "stability"), ps[0]["n"])[0],
    "chosen, range 2:20 (the default)": lambda ps: recommend_k(
        _sweep_points([p for p in ps if p["k"] <= 20], "stability"), ps[0]["n"])[0],
}


def render(results: list[dict[str, Any]]) -> str:
    heads = [r["collection"] for r in results]
    lines = ["| rule | " + " | ".join(heads) + " |", "|---|" + "---|" * len(heads)]
    lines.append("| true k (best NMI over the grid at k) | " + " | ".join(
        f"{r['k_true']} ({max(p['nmi'] for p in r['points']):.2f} at "
        f"{max(r['points'], key=lambda p: p['nmi'])['k']})" for r in results) + " |")
    for r in results:
        for p in r["points"]:
            p["n"] = r["distinct"]
    for rule, pick in RULES.items():
        cells = []
        for r in results:
            try:
                k = pick(r["points"])
            except KeyError:  # a figure this run did not measure (--no-one-start)
                cells.append("not measured")
                continue
            at = {p["k"]: p for p in r["points"]}[k]
            cells.append(f"{k} ({at['nmi']:.2f})")
        lines.append(f"| {rule} | " + " | ".join(cells) + " |")
    return "\n".join(lines)


def main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--collections", nargs="+", default=list(ORDER))
    parser.add_argument("--out", type=Path, default=OUT_DIR / "k.json")
    parser.add_argument("--render", type=Path, nargs="+", help="print the tables of saved runs and stop")
    parser.add_argument("--sample", type=int, help="documents kept of each collection (default: SAMPLES)")
    parser.add_argument("--coarse", action="store_true", help="every k to 10, then every third k")
    parser.add_argument("--resamples", type=int, help="bootstrap resamples (default 10 per k, 20 for --purity)")
    parser.add_argument("--no-one-start", action="store_true",
                        help="skip the stability with 1 start per resample (the rule before issue 11)")
    parser.add_argument("--purity", action="store_true",
                        help="measure per-cluster stability against purity instead (benchmarks/.out/purity.json)")
    args = parser.parse_args(argv)
    if args.purity:
        found = [stability_purity(name, args.resamples or 20, args.sample) for name in args.collections]
        args.out.parent.mkdir(parents=True, exist_ok=True)
        target = args.out if args.out != OUT_DIR / "k.json" else OUT_DIR / "purity.json"
        target.write_text(json.dumps(found, indent=2) + "\n", encoding="utf-8")
        return 0
    if args.render:
        print(render([r for path in args.render for r in json.loads(path.read_text(encoding="utf-8"))]))
        return 0
    results = []
    for name in args.collections:
        results.append(per_k(name, args.sample, args.coarse, args.resamples or RESAMPLES, not args.no_one_start))
        args.out.parent.mkdir(parents=True, exist_ok=True)
        args.out.write_text(json.dumps(results, indent=2) + "\n", encoding="utf-8")
    print(render(results))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
