"""Run options and their validation, in one place against one table of limits."""

from __future__ import annotations

import codecs
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path

from pilewise.errors import PilewiseError
from pilewise.ingest.reading import ReadLimits
from pilewise.ingest.tables import ColumnChoice
from pilewise.vectors.languages import SUPPORTED

# option name -> (lowest allowed, highest allowed, the CLI flag that sets it)
LIMITS: dict[str, tuple[float, float, str]] = {
    "k": (2, 1000, "--k"),
    "lsa_components": (0, 1000, "--lsa-components"),
    "max_file_mb": (0.001, 10_000, "--max-file-mb"),
    "max_doc_chars": (100, 100_000_000, "--max-doc-chars"),
    "max_documents": (2, 100_000_000, "--max-documents"),
    "top_terms": (1, 100, "--top-terms"),
    "resamples": (1, 1000, "--resamples"),
    "workers": (0, 256, "--workers"),
    "seed": (0, 2**32 - 1, "--seed"),  # numpy's RandomState takes seeds from 0 to 2**32 - 1
}


METHODS = ("kmeans", "ward")
MODES = ("auto", "memory", "stream")
ENGINES = ("local", "spark")
PERIODS = ("auto", "day", "week", "month", "quarter", "year")
# --mode auto streams when the files to read hold at least this many bytes (about 250,000 short
# texts; the in-memory path measured 956 MB for 100,000 texts of 20-120 words, docs/performance.md)
STREAM_ABOVE_BYTES = 100 * 1024 * 1024


@dataclass(frozen=True)
class RunOptions:
    """Every setting of one run; the defaults are the measured ones (docs/vectorizing.md).

    Parameters
    ----------
    source : Path
        A folder (read recursively) or one table file.
    k : int
        Number of clusters, 2 <= k < number of distinct documents.
    out : Path
        The site's root folder; the run goes into ``out/runs/<name>``.
    seed : int
        Seeds every random stage.
    name : str
        Run folder name; default ``k<k>``.
    """

    source: Path
    k: int  # 0 with k_auto
    out: Path = Path("pilewise-site")
    k_auto: bool = False
    k_min: int = 2
    k_max: int = 20
    method: str = "kmeans"
    seed: int = 0
    name: str = ""
    text_column: str | None = None
    title_column: str | None = None
    id_column: str | None = None
    date_column: str | None = None
    period: str = "auto"  # trend periods: day, week, month, quarter, year, or auto (from the span of the dates)
    delimiter: str | None = None  # table separator; None: sniffed
    encoding: str | None = None  # forced text encoding; None: detected
    records_key: str | None = None  # key of a JSON object holding the list of records; None: found
    follow_links: bool = False  # read links that leave SOURCE
    boilerplate: bool = True  # remove repeated lines (signatures, footers) before vectorizing
    stop_words_file: Path | None = None
    stem: bool = False
    language: str | None = None  # one language (ISO 639-1) for every document; None: detected per document
    bigrams_in_space: bool = False
    lsa_components: int = 100
    min_df: int | None = None
    max_df: float = 0.5
    n_init: int | None = None  # k-means starts; None: 10 below 1,000 distinct texts, else 4 (measured)
    resamples: int = 20
    top_terms: int = 15
    max_file_mb: float = 100.0
    max_doc_chars: int = 1_000_000
    max_documents: int = 2_000_000
    redact: bool = True
    near_duplicate: float = 0.8
    mode: str = "auto"  # memory, stream, or auto: stream above STREAM_ABOVE_BYTES of input
    workers: int = 0  # tokenizing processes (streaming; memory mode from 10,000 texts); 0: one per core
    engine: str = "local"  # local (this process), or spark (engines/spark_engine.py)
    spark_master: str = "local[*]"  # --spark-master: where the spark engine runs
    quiet: bool = False
    extra: dict[str, str] = field(default_factory=dict)

    def run_name(self, k: int | None = None) -> str:
        """The run's folder name: --name, else from the method and k (k5, ward-k5)."""
        if self.name:
            return self.name
        prefix = "ward-" if self.method == "ward" else ""
        return f"{prefix}k{k if k is not None else self.k}"


@dataclass(frozen=True)
class Check:
    """One rule of the options: `broken` says whether the options break it, `message` what to change."""

    broken: Callable[[RunOptions], bool]
    message: Callable[[RunOptions], str]


def _range_check(attr: str, low: float, high: float, flag: str) -> Check:
    def broken(o: RunOptions) -> bool:
        return not (attr == "k" and o.k_auto) and not low <= getattr(o, attr) <= high

    return Check(broken, lambda o: f"{flag}={getattr(o, attr)} is out of range; use a value from {_limit(low)} "
                                   f"to {_limit(high)}")


def _choice_check(attr: str, choices: tuple[str, ...], flag: str) -> Check:
    return Check(lambda o: getattr(o, attr) not in choices,
                 lambda o: f"{flag} {getattr(o, attr)!r} is not known; use one of: {', '.join(choices)}")


def _known_encoding(name: str) -> bool:
    try:
        codecs.lookup(name)
    except LookupError:
        return False
    return True


def _safe_name(name: str) -> bool:
    return name.replace("-", "").replace("_", "").replace(".", "").isalnum() and not name.startswith(".")


STREAM_ONE_K = ("streaming mode clusters with mini-batch k-means at one given k; pass --k N without --method ward, "
                "or --mode memory (choose k with `pilewise sweep` on a sample of the collection)")
SPARK_ONE_K = ("the spark engine clusters with Spark's k-means at one given k; pass --k N without --method ward "
               "(choose k with `pilewise sweep` on a sample of the collection)")
WARD_NEEDS_LSA = "--method ward needs the LSA space; do not pass --lsa-components 0 with it"

# Every check of the options, in the order their messages are reported: ranges (LIMITS), shares and
# counts, values that must name something, choices, and combinations of options.
CHECKS: tuple[Check, ...] = (
    *(_range_check(attr, low, high, flag) for attr, (low, high, flag) in LIMITS.items()),
    Check(lambda o: not 0.0 < o.max_df <= 1.0,
          lambda o: f"--max-df={o.max_df} is out of range; use a share above 0 and at most 1"),
    Check(lambda o: not 0.5 <= o.near_duplicate <= 1.0,
          lambda o: f"--near-duplicate={o.near_duplicate} is out of range; use a Jaccard similarity from 0.5 to 1 "
                    "(1 turns grouping off)"),
    Check(lambda o: o.min_df is not None and o.min_df < 1,
          lambda o: f"--min-df={o.min_df} is out of range; use a document count of at least 1"),
    Check(lambda o: o.delimiter is not None and table_delimiter(o.delimiter) is None,
          lambda o: f"--delimiter {o.delimiter!r} is not one character; pass e.g. --delimiter ';' or --delimiter tab"),
    Check(lambda o: o.encoding is not None and not _known_encoding(o.encoding),
          lambda o: f"--encoding {o.encoding!r} is not a known encoding; pass e.g. utf-8, cp1252, latin-1, shift_jis"),
    Check(lambda o: o.language is not None and o.language not in SUPPORTED,
          lambda o: f"--language {o.language!r} is not supported; pass an ISO 639-1 code, one of: "
                    f"{', '.join(SUPPORTED)}"),
    _choice_check("method", METHODS, "--method"),
    _choice_check("mode", MODES, "--mode"),
    _choice_check("engine", ENGINES, "--engine"),
    _choice_check("period", PERIODS, "--period"),
    Check(lambda o: not 2 <= o.k_min < o.k_max <= LIMITS["k"][1],
          lambda o: f"k range {o.k_min}:{o.k_max} must have 2 <= LOW < HIGH <= {LIMITS['k'][1]:g}"),
    Check(lambda o: not _safe_name(o.run_name()),
          lambda o: f"--name {o.run_name()!r} is not a safe folder name; use letters, digits, '-', '_' or '.'"),
    # combinations; --mode auto chooses streaming only after measuring SOURCE, so the streaming path
    # repeats the first check as a fallback
    Check(lambda o: o.mode == "stream" and (o.k_auto or o.method == "ward"), lambda o: STREAM_ONE_K),
    Check(lambda o: o.method == "ward" and o.lsa_components == 0, lambda o: WARD_NEEDS_LSA),
    Check(lambda o: o.engine == "spark" and (o.k_auto or o.method == "ward"), lambda o: SPARK_ONE_K),
    Check(lambda o: o.engine == "spark" and o.lsa_components == 0,
          lambda o: "the spark engine clusters in the LSA space; do not pass --lsa-components 0 with --engine spark"),
)


def validate(options: RunOptions, *, with_source: bool = True) -> None:
    """Check the options against every rule of CHECKS and report all problems in one message, before any reading.

    `with_source` False leaves out the checks of SOURCE (for `pilewise demo`, which checks its
    options before it writes the demo collection that becomes SOURCE).
    """
    problems = [check.message(options) for check in CHECKS if check.broken(options)]
    if with_source:
        problems.extend(_source_problems(options))
    if problems:
        raise PilewiseError("; ".join(problems))


def _source_problems(options: RunOptions) -> list[str]:
    problems: list[str] = []
    if options.engine == "spark" and _is_url(str(options.source)):
        return problems  # a path on another file system (hdfs:, s3a:) is checked by Spark when it reads
    if not options.source.exists():
        problems.append(f"source {str(options.source)!r} does not exist; pass a folder or a table file")
    if options.stop_words_file is not None and not options.stop_words_file.is_file():
        problems.append(f"--stop-words {str(options.stop_words_file)!r} is not a file; pass a text file")
    if options.source.exists():
        src = options.source.resolve()
        out = options.out.resolve()
        if src.is_dir() and (out == src or src in out.parents):
            problems.append(
                f"--out {str(options.out)!r} lies inside the source folder, so the next run would read "
                "its own pages; choose an output folder outside the source"
            )
    return problems


def _is_url(source: str) -> bool:
    """A source with a scheme (hdfs:, s3a:, file:), as a Path keeps it ('hdfs:/host/path')."""
    scheme, colon, _ = source.partition(":")
    return bool(colon) and len(scheme) > 1 and scheme.replace("+", "").replace(".", "").replace("-", "").isalnum()


def _limit(value: float) -> str:
    """A limit as written in a message: whole numbers in full (4294967295, not 4.29497e+09)."""
    return str(int(value)) if float(value).is_integer() else f"{value:g}"


def table_delimiter(given: str) -> str | None:
    """The one-character separator that --delimiter names ('tab' and '\\t' mean a tab), else None."""
    named = {"tab": "\t", "\\t": "\t", "comma": ",", "semicolon": ";", "pipe": "|", "space": " "}
    value = named.get(given.lower(), given)
    return value if len(value) == 1 and value not in "\r\n\"" else None


def kmeans_starts(options: RunOptions, texts: int) -> int:
    """k-means++ starts: the option, else 10 below 1,000 distinct texts and 4 above (docs/vectorizing.md)."""
    if options.n_init is not None:
        return options.n_init
    return 10 if texts < 1_000 else 4


def check_k_range(k_min: int, k_max: int, distinct_documents: int) -> tuple[int, int]:
    """Clip a k range to the collection: HIGH at most distinct documents - 1; LOW must fit."""
    check_k(k_min, distinct_documents)
    return k_min, min(k_max, distinct_documents - 1)


def check_k(k: int, distinct_documents: int, what: str = "distinct documents found") -> None:
    """Validate k against the collection before any heavy work."""
    if distinct_documents < 3:
        raise PilewiseError(
            f"found {distinct_documents} distinct document(s); clustering needs at least 3, "
            "so add documents or point SOURCE at a larger collection"
        )
    if not 2 <= k < distinct_documents:
        raise PilewiseError(
            f"k={k} must be at least 2 and less than the {distinct_documents} {what}; "
            f"pass --k between 2 and {distinct_documents - 1}"
        )


def reading_settings(options: RunOptions) -> tuple[ReadLimits, ColumnChoice]:
    """The size limits and column choices that reading SOURCE takes from the options (every command that reads)."""
    limits = ReadLimits(int(options.max_file_mb * 1024 * 1024), options.max_doc_chars,
                        follow_links=options.follow_links)
    columns = ColumnChoice(options.text_column, options.title_column, options.id_column, options.date_column,
                           delimiter=table_delimiter(options.delimiter) if options.delimiter else None,
                           encoding=options.encoding, records_key=options.records_key)
    return limits, columns
