"""Why pilewise trails the best scikit-learn pipeline on some collections: one change at a time.

What it measures
----------------
For each open collection (``measure_quality.load_sample``; the large ones on their seeded samples) and each
seed, NMI against the gold labels (k = their number) of pilewise's space and k-means with one choice changed
from the defaults (``VARIANTS``), beside the two scikit-learn pipelines of ``measure_quality``. Reuters, the
70-text sample where every pipeline swings with the seed, gets more seeds (``--seeds-small``) so that a
difference can be told from the spread.

How to run
----------
    python benchmarks/measure_ablation.py --collections reuters_sample foldoc
    python benchmarks/measure_ablation.py --render benchmarks/.out/ablation.json

Every figure goes to ``benchmarks/.out/ablation.json`` (``--out``).
"""

from __future__ import annotations

import argparse
import json
import statistics
import sys
from collections.abc import Sequence
from pathlib import Path
from typing import Any

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

from measure_quality import OUT_DIR, Prepared, load_sample, nmi, prepare, run_sklearn  # noqa: E402

from pilewise.clustering.kmeans import kmeans_clusters  # noqa: E402
from pilewise.vectors.text import Analyzer, load_stop_words  # noqa: E402
from pilewise.vectors.tfidf import VectorSettings, vectorize  # noqa: E402

SMALL = 1_000  # below this many distinct texts pilewise uses 10 k-means starts, else 4 (options.kmeans_starts)
VARIANTS: dict[str, tuple[dict[str, Any], int | None]] = {
    "default": ({}, None),
    "10 starts": ({}, 10),
    "20 starts": ({}, 20),
    "LSA 50": ({"lsa_components": 50}, None),
    "min_df 3": ({"min_df": 3}, None),
    "min_df 1": ({"min_df": 1}, None),
    "max_df 0.3": ({"max_df": 0.3}, None),
    "no LSA": ({"lsa_components": 0}, None),
}


def pilewise_nmi(prepared: Prepared, seed: int, settings: dict[str, Any], starts: int | None) -> float:
    analyzer = Analyzer(stop_words=load_stop_words(None), stem=False)
    vectors = vectorize(prepared.texts, analyzer, VectorSettings(seed=seed, **settings), copies=prepared.copies)
    n_init = starts if starts is not None else (10 if len(prepared.texts) < SMALL else 4)
    clustering = kmeans_clusters(vectors.space, prepared.copies, k=prepared.k_true, seed=seed, n_init=n_init)
    return nmi(prepared, clustering.labels)


def measure(name: str, seeds: Sequence[int], variants: Sequence[str] = tuple(VARIANTS),
            baselines: bool = True) -> dict[str, Any]:
    collection = load_sample(name)
    prepared = prepare(collection)
    rows: dict[str, list[float]] = {}
    for seed in seeds:
        for variant in variants:
            settings, starts = VARIANTS[variant]
            rows.setdefault(variant, []).append(pilewise_nmi(prepared, seed, settings, starts))
        for key in ("tfidf+kmeans", "tfidf+svd100+kmeans") if baselines else ():
            rows.setdefault(key, []).append(run_sklearn(collection, prepared.k_true, seed, svd=key != "tfidf+kmeans"))
        print(f"{name} seed {seed}: " + ", ".join(f"{k} {v[-1]:.3f}" for k, v in rows.items()), file=sys.stderr,
              flush=True)
    return {"collection": name, "seeds": list(seeds), "nmi": rows}


def render(results: list[dict[str, Any]]) -> str:
    keys = [key for key in [*VARIANTS, "tfidf+kmeans", "tfidf+svd100+kmeans"]
            if any(key in r["nmi"] for r in results)]
    lines = ["| collection (seeds) | " + " | ".join(keys) + " |", "|---|" + "---|" * len(keys)]
    for r in results:
        cells = []
        for key in keys:
            if key not in r["nmi"]:
                cells.append("not measured")
                continue
            values = r["nmi"][key]
            sd = statistics.stdev(values) if len(values) > 1 else 0.0
            cells.append(f"{statistics.mean(values):.3f} ± {sd:.3f}")
        lines.append(f"| {r['collection']} ({len(r['seeds'])}) | " + " | ".join(cells) + " |")
    return "\n".join(lines)


def main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--collections", nargs="+", default=["reuters_sample", "foldoc"])
    parser.add_argument("--seeds", type=int, default=5, help="seeds 0..N-1 (default 5)")
    parser.add_argument("--seeds-small", type=int, default=20, help="seeds for reuters_sample (default 20)")
    parser.add_argument("--out", type=Path, default=OUT_DIR / "ablation.json")
    parser.add_argument("--render", type=Path, help="print the table of a saved run and stop")
    parser.add_argument("--variants", nargs="+", choices=list(VARIANTS), default=list(VARIANTS))
    parser.add_argument("--no-baselines", action="store_true", help="leave out the scikit-learn pipelines")
    args = parser.parse_args(argv)
    if args.render:
        print(render(json.loads(args.render.read_text(encoding="utf-8"))))
        return 0
    results = []
    for name in args.collections:
        count = args.seeds_small if name == "reuters_sample" else args.seeds
        results.append(measure(name, range(count), args.variants, not args.no_baselines))
        args.out.parent.mkdir(parents=True, exist_ok=True)
        args.out.write_text(json.dumps(results, indent=2) + "\n", encoding="utf-8")
    print(render(results))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
