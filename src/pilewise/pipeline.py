"""The one path from a source to a written run: read, vectorize, cluster, describe, assess, write.

Everything is computed into typed summaries first; the exports and the site are written from
them into a temporary folder that replaces the run's folder only when complete.
"""

from __future__ import annotations

import hashlib
import itertools
import multiprocessing
import time
from collections.abc import Callable, Iterable, Iterator, Sequence
from concurrent.futures import Future, ProcessPoolExecutor
from concurrent.futures.process import BrokenProcessPool
from contextlib import ExitStack, suppress
from dataclasses import dataclass, replace
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from pilewise.assign.saved import save_model
from pilewise.clustering.hierarchy import Tree, ward_tree
from pilewise.clustering.kmeans import Clustering
from pilewise.clustering.levels import build_levels, centroid_tree
from pilewise.clustering.methods import _cluster_at, _dense, _stability_fn, sweep_k
from pilewise.clustering.quality import assess
from pilewise.clustering.stability import bootstrap_stability, stability_rows
from pilewise.clustering.sweep import Sweep
from pilewise.cores import one_thread_each
from pilewise.describe.compare import RunPair, compare_run_folders, comparison_document, site_comparisons
from pilewise.describe.names import carry_names, earlier_run_problems, find_old_names
from pilewise.describe.profiles import analyse_metadata, metadata_columns, term_profiles_from_counts
from pilewise.describe.rules import RuleSet, explain_run
from pilewise.describe.runfolders import read_site_assigned, read_site_runs, read_site_sweeps
from pilewise.describe.summaries import ClusterTotals, cluster_term_totals, describe_clusters, level_terms
from pilewise.describe.trends import Trends, cluster_trends, counted_trends
from pilewise.errors import PilewiseError
from pilewise.ingest.dedup import (
    NO_BOILERPLATE,
    Boilerplate,
    NearDuplicates,
    distinct_key,
    find_boilerplate,
    near_duplicate_groups,
    strip_texts,
)
from pilewise.ingest.reading import SourceStream, stream_source
from pilewise.ingest.redact import redact_document
from pilewise.ingest.shelf import DocumentShelf, document_fields
from pilewise.model import Collection, Document, Ingested, Population, RunResult, fingerprint_record
from pilewise.options import (
    STREAM_ABOVE_BYTES,
    RunOptions,
    check_k,
    check_k_range,
    kmeans_starts,
    reading_settings,
    validate,
)
from pilewise.output import docmap
from pilewise.output.exports import write_sweep_json
from pilewise.output.outfolder import claim_site, is_marked, owned, site_lock, writing_to
from pilewise.output.site import render_root_index, render_sweep
from pilewise.output.writing import _claim_name, _work_folder, _write_atomically, _write_run, write_comparison
from pilewise.progress import Reporter
from pilewise.vectors.languages import (
    CLASSIFY_PARALLEL_MIN,
    DETECT_EARLY_BYTES,
    detect_languages,
    language_mix,
    load_model,
    present_languages,
    screen_ahead,
    screened_ahead,
    shares,
    shares_line,
)
from pilewise.vectors.streaming import CHUNK_DOCUMENTS, default_workers, prepare_streamed
from pilewise.vectors.text import Analyzer, load_stop_words
from pilewise.vectors.tfidf import Vectorized, VectorSettings, vectorize

if TYPE_CHECKING:  # the Spark engine (and PySpark) load only for --engine spark
    from pilewise.engines.spark_engine import SparkPrepared

REDACTION_OFF = "redaction is off (--no-redact); pages and exports show personal data as written"
BOILERPLATE_OFF = "boilerplate removal is off (--keep-boilerplate); every line of every text is vectorized"


@dataclass(frozen=True)
class RunOutcome:
    """Where a run was written and what it found."""

    run_folder: Path
    index_page: Path
    root_index: Path
    documents: int
    skipped: int
    clusters: int


def run_collection(options: RunOptions, reporter: Reporter | None = None) -> RunOutcome:
    """Read, cluster and describe SOURCE, then write the run's site and exports under OUT.

    Before any computation: OUT must be writable and pilewise's own (or new), the run's folder must be
    pilewise's to replace, and no other run may be writing the same name (an exclusive lock, held until
    the folder is in place). A name known only after the computation (--k auto) waits for that lock.
    """
    reporter = reporter or Reporter(quiet=options.quiet)
    out = options.out
    validate(options)  # the name is checked before it is used in a path
    with writing_to(out):
        claim_site(out)
    for problem in earlier_run_problems(out / "runs"):
        reporter.warn(problem)
    named_early = bool(options.name) or not options.k_auto
    with ExitStack() as held:
        if named_early:
            held.enter_context(_claim_name(out / "runs" / options.run_name(), "runs", "--name"))

        def write(result: RunResult) -> RunOutcome:
            try:
                run_folder = out / "runs" / result.name
                if not named_early:
                    held.enter_context(_claim_name(run_folder, "runs", "--name", wait=True))
                with reporter.stage("writing site"), writing_to(out):
                    _write_atomically(run_folder, lambda folder: _write_run_and_model(folder, result, reporter))
                    root_index = refresh_site(out, warn=reporter.warn)
            finally:
                if isinstance(result.ingested.documents, DocumentShelf):
                    result.ingested.documents.close()
            whole = result.population
            return RunOutcome(
                run_folder=run_folder,
                index_page=run_folder / "index.html",
                root_index=root_index,
                documents=whole.documents if whole else len(result.ingested.documents),
                skipped=whole.skipped if whole else len(result.ingested.skipped()),
                clusters=len(result.clusters),
            )

        with _work_folder(out) as work:
            if options.engine == "spark":  # the result is written while Spark still holds the documents
                from pilewise.engines.spark_engine import run_on_spark

                outcome: RunOutcome = run_on_spark(
                    options, reporter, lambda on_spark: write(compute_run(options, reporter, work, on_spark)))
                return outcome
            return write(compute_run(options, reporter, work))


def _write_run_and_model(folder: Path, result: RunResult, reporter: Reporter) -> None:
    """The run's exports and pages, and the model `pilewise assign` reads (model/)."""
    start = time.perf_counter()
    save_model(folder, result)  # first, so that the pages' list of files names it
    result.timings["saving the model"] = round(time.perf_counter() - start, 3)
    _write_run(folder, result, reporter)


@dataclass(frozen=True)
class SweepOutcome:
    """Where a sweep was written and what it recommends."""

    page: Path
    recommended_k: int
    reason: str


def sweep_collection(options: RunOptions, reporter: Reporter | None = None) -> SweepOutcome:
    """Vectorize once, score every k of the range, and write OUT/sweeps/NAME/ (page, curves, sweep.json)."""
    reporter = reporter or Reporter(quiet=options.quiet)
    options = replace(options, mode="memory")  # a sweep clusters at every k in memory
    validate(options)
    with writing_to(options.out):
        claim_site(options.out)
    with _work_folder(options.out):  # an OUT that cannot be written fails here, before the computation
        pass
    with ExitStack() as held:
        if options.name:
            held.enter_context(_claim_name(options.out / "sweeps" / options.name, "sweeps", "--name"))
        prepared = prepare_collection(options, reporter, k_needed=options.k_min)
        k_min, k_max = check_k_range(options.k_min, options.k_max, int(prepared.weights.size))
        with reporter.stage("sweeping k"):
            tree = ward_tree(_dense(prepared.vectors.space), prepared.weights, seed=options.seed) \
                if options.method == "ward" else None
            result, _ = _sweep(options, prepared, k_min, k_max, tree, reporter)
        name = options.name or f"{'ward-' if options.method == 'ward' else ''}k{k_min}-{k_max}"
        folder = options.out / "sweeps" / name
        if not options.name:
            held.enter_context(_claim_name(folder, "sweeps", "--name", wait=True))

        def write(staging: Path) -> None:
            render_sweep(staging, result, name=name, in_run=False, source=str(options.source), method=options.method)
            write_sweep_json(staging, result, name)

        with writing_to(options.out):
            _write_atomically(folder, write)
            refresh_site(options.out, warn=reporter.warn)
    return SweepOutcome(folder / "index.html", result.recommended_k, result.reason)


def compare_runs(run_a: Path, run_b: Path, out: Path | None = None) -> Path:
    """Compare two run folders and write the comparison page; returns the page's path.

    The page goes to OUT/compare/A--B/, OUT being the site folder holding both runs unless given; A and
    B are the runs' recorded names made safe for a path, and the folder is checked to stay under OUT.
    """
    document = comparison_document(compare_run_folders(run_a, run_b))
    if out is None:
        roots = {folder.resolve().parent.parent for folder in (run_a, run_b) if folder.resolve().parent.name == "runs"}
        if len(roots) != 1 or run_a.resolve().parent != run_b.resolve().parent:
            raise PilewiseError(
                f"{str(run_a)!r} and {str(run_b)!r} are not runs of one site folder; pass --out for the comparison"
            )
        out = roots.pop()
    with writing_to(out):
        claim_site(out)
        with site_lock(out):
            return write_comparison(out, document, run_a, run_b)


def refresh_site(out: Path, warn: Callable[[str], None] | None = None) -> Path:
    """Compare the site's runs of one collection and (re)write the comparisons and the root index.

    The root index lists runs, sweeps and `pilewise assign` folders. Runs, sweeps, assignments and
    comparisons that cannot be read are left out and named in a note on the page
    (and given to `warn`); they never stop the index. One writer at a time (the site's lock).
    """
    out.mkdir(parents=True, exist_ok=True)
    with site_lock(out):
        runs, notes = read_site_runs(out / "runs", lambda folder: owned(folder, "runs"))
        pairs, failed = site_comparisons(runs)
        notes.extend(failed)
        written: list[tuple[RunPair, Path]] = []
        for pair in pairs:
            try:
                written.append((pair, write_comparison(out, pair.document, pair.run_a.folder, pair.run_b.folder)))
            except PilewiseError as err:
                notes.append(f"a comparison was left out: {err}")
        sweeps, more = read_site_sweeps(out / "sweeps")
        assigned, unread = read_site_assigned(out / "assigned", is_marked)
        notes = list(dict.fromkeys([*notes, *more, *unread]))
        if warn is not None:
            for note in notes:
                warn(note)
        return render_root_index(out, runs, written, sweeps, notes, assigned)


@dataclass(frozen=True)
class Prepared:
    """A read, de-duplicated and vectorized collection: the work every k shares."""

    ingested: Ingested
    collection: Collection
    analyzer: Analyzer
    vectors: Vectorized
    weights: np.ndarray
    boilerplate: Boilerplate
    redacted: dict[str, int]
    fingerprint: str
    streamed: bool = False
    text_languages: tuple[str, ...] = ()  # language of every distinct text; () where not detected


def prepare_collection(options: RunOptions, reporter: Reporter, *, k_needed: int, work: Path | None = None) -> Prepared:
    """Read SOURCE, group exact duplicates, check k against the distinct texts, vectorize.

    Large collections (--mode stream, or auto above STREAM_ABOVE_BYTES) go chunk by chunk through
    the streaming path, which needs `work`, a scratch folder.
    """
    limits, columns = reading_settings(options)
    source = stream_source(options.source, columns, limits)
    large = source.total_bytes >= STREAM_ABOVE_BYTES
    if options.mode == "stream" or (options.mode == "auto" and large):
        if work is None:
            raise PilewiseError("streaming is for `pilewise run`; pass --mode memory or run on a sample")
        return _prepare_streamed(options, reporter, source, k_needed, work)
    if large:
        reporter.warn(f"reading {source.total_bytes / 1e6:,.0f} MB of input in memory (about 1 GB per 100,000 "
                      "short texts); on a collection this large, choose k on a sample of a few hundred thousand "
                      "texts and stream the full run with --mode stream --k N")
    workers = options.workers or default_workers()
    # The detection worker is forked before reading, while this process is small, and loads the model while
    # the texts are read (the second core idles then); it is sent the distinct texts afterwards, or stopped.
    with ExitStack() as early:  # a failed read lets the worker go (and the thread limit with it)
        detecting = early.enter_context(_Beside({"model": (load_model, (), {})}, background=True)) \
            if _detect_beside(source.total_bytes // DETECT_EARLY_BYTES, options.language, workers) else None
        with reporter.stage("reading"):
            documents = list(source.read(track=lambda paths: reporter.track(paths, total=len(paths),
                                                                              label="reading files")))
            ingested = source.ingested(documents)
            if len(ingested.documents) > options.max_documents:
                raise PilewiseError(
                    f"found {len(ingested.documents):,} documents, more than --max-documents "
                    f"{options.max_documents:,}; raise --max-documents or point SOURCE at fewer files"
                )
            for note in ingested.notes:
                reporter.say(note)
            if options.redact:
                ingested, redacted = redact_documents(ingested)
                if redacted:
                    reporter.say(_redaction_line(redacted))
            else:
                redacted = {}
                reporter.warn(REDACTION_OFF)
            if not options.boilerplate:
                ingested = replace(ingested, notes=(*ingested.notes, BOILERPLATE_OFF))
                reporter.say(BOILERPLATE_OFF)
            collection = collect_distinct(ingested.documents)
            reporter.say(_reading_line(ingested, collection))
        handed = early.pop_all()  # the worker stays for the grouping below
    with handed as beside_grouping:
        check_k(k_needed, int(collection.copies.size))
        with reporter.stage("grouping near-duplicates"):
            texts = [collection.documents[i].text for i in collection.first_doc_of_text]
            # Languages are detected on the same distinct texts, in the worker forked before reading, while the
            # grouping runs here (on two cores both take seconds at 50,000 texts). There every distinct text is
            # detected; a text's code does not depend on the others, so the codes of the texts left are those
            # that detection after grouping gives (as below CLASSIFY_PARALLEL_MIN texts, with --language or
            # --workers 1). The worker screens the texts while boilerplate lines are found here; it is then sent
            # the texts that stripping changed.
            if detecting is not None and not _detect_beside(len(texts), options.language, workers):
                detecting.__exit__()
                detecting = None
            if detecting is not None:
                detecting.then("screen", (screen_ahead, (texts,), {}), in_place=(_nothing, (), {}))
            elif _detect_beside(len(texts), options.language, workers):  # fewer bytes than texts were expected
                detecting = beside_grouping.enter_context(
                    _Beside({"screen": (screen_ahead, (texts,), {})}, background=True))
            boilerplate = find_boilerplate(texts) if options.boilerplate else NO_BOILERPLATE
            if boilerplate.lines:
                stripped = strip_texts(texts, boilerplate)
                changed = {i: new for i, (old, new) in enumerate(zip(texts, stripped.texts, strict=True))
                           if new != old}
                texts = stripped.texts
                reporter.say(_boilerplate_line(boilerplate, stripped.lines_removed, stripped.texts_changed,
                                               stripped.lines_kept))
            else:
                changed = {}
            if detecting is not None:
                detecting.then("languages", (_detect_changed, (changed, options.language), {}),
                               in_place=(detect_languages, (texts, options.language), {}))
            near = near_duplicate_groups(texts, threshold=options.near_duplicate, seed=options.seed,
                                         workers=workers) if options.near_duplicate < 1.0 else None
            left = near.representative if near is not None else np.arange(len(texts))
            if near is not None and near.representative.size < len(texts):
                collection = merge_near_duplicates(collection, near)
                texts = [texts[i] for i in near.representative]
                reporter.say(f"{len(near.group_of) - near.representative.size:,} near-duplicate texts joined "
                             f"their groups; {near.representative.size:,} texts to cluster")
        if near is not None and near.representative.size < 3:  # the documents were there: grouping joined them
            raise PilewiseError(
                f"{near.representative.size} text(s) left of {len(near.group_of):,} distinct texts after grouping "
                f"near-duplicates (Jaccard {options.near_duplicate:g} or more); clustering needs at least 3, so pass "
                "--near-duplicate 1 to turn grouping off, or a value nearer 1"
            )
        check_k(k_needed, int(collection.copies.size),
                "texts left after grouping near-duplicates (--near-duplicate 1 turns grouping off)")
        with reporter.stage("detecting languages"):
            if detecting is not None:
                every = detecting.result("languages")
                text_languages = tuple(every[i] for i in left.tolist())
            else:
                text_languages = detect_languages(texts, options.language, workers=workers)
            present = present_languages(text_languages, collection.copies) or ("en",)
            reporter.say(_languages_line(text_languages, collection.copies, forced=options.language is not None))
    analyzer = Analyzer(stop_words=load_stop_words(options.stop_words_file, present), stem=options.stem,
                        languages=present)
    with reporter.stage("vectorizing"):
        settings = VectorSettings(
            min_df=options.min_df, max_df=options.max_df, bigrams_in_space=options.bigrams_in_space,
            lsa_components=options.lsa_components, seed=options.seed,
        )
        vectors = vectorize(
            texts, analyzer, settings, progress=reporter.say,
            track=lambda items: reporter.track(items, total=len(texts), label="counting terms"),
            copies=collection.copies, workers=options.workers or default_workers(),
        )
    return Prepared(ingested, collection, analyzer, vectors, collection.copies.astype(float), boilerplate,
                    redacted, fingerprint(ingested.documents), text_languages=text_languages)


def _prepare_streamed(
    options: RunOptions, reporter: Reporter, source: SourceStream, k_needed: int, work: Path
) -> Prepared:
    """The streaming path: chunks of documents, a hashed vocabulary, LSA fitted on a sample."""
    if options.k_auto or options.method == "ward":
        raise PilewiseError(
            "streaming mode clusters with mini-batch k-means at one given k; pass --k N without --method ward, "
            "or --mode memory (choose k with `pilewise sweep` on a sample of the collection)"
        )
    reporter.say(f"streaming {source.total_bytes / 1e6:,.0f} MB of input in chunks of "
                 f"{CHUNK_DOCUMENTS:,} documents")
    if not options.redact:
        reporter.warn(REDACTION_OFF)
    # the stop words and stemmers must be known before the first chunk: languages are detected on the first
    # documents (or named by --language), which are then streamed with the rest
    documents = _capped(source, options.max_documents)
    first = list(itertools.islice(documents, STREAM_LANGUAGE_SAMPLE))
    sample = detect_languages([doc.text for doc in first], options.language)
    present = present_languages(sample, np.ones(len(sample))) or ("en",)
    language_note = _languages_line(sample, np.ones(len(sample)), forced=options.language is not None).replace(
        "languages (", f"languages of the first {len(sample):,} documents (", 1)
    analyzer = Analyzer(stop_words=load_stop_words(options.stop_words_file, present), stem=options.stem,
                        languages=present)
    settings = VectorSettings(min_df=options.min_df, max_df=options.max_df, lsa_components=options.lsa_components,
                              seed=options.seed)
    streamed = prepare_streamed(
        itertools.chain(first, documents), work, analyzer, settings, redact=options.redact,
        workers=options.workers or default_workers(), reporter=reporter, progress=lambda: source.bytes_done,
        total_bytes=source.total_bytes, boilerplate=options.boilerplate,
    )
    streaming_note = ("streaming mode: read and vectorized in chunks; terms counted in a hashed vocabulary; "
                      "near-duplicate grouping not done (exact duplicates are)")
    notes = (*source.notes, streaming_note, language_note, *(() if options.boilerplate else (BOILERPLATE_OFF,)))
    ingested = Ingested(streamed.shelf, tuple(source.entries), notes, source.files_found)
    for note in ingested.notes:
        reporter.say(note)
    if streamed.boilerplate.lines:
        reporter.say(f"{len(streamed.boilerplate.lines)} boilerplate line(s) found in the first chunk; removed "
                     "before vectorizing, except where they are most of their text")
    if streamed.redacted:
        reporter.say(_redaction_line(streamed.redacted))
    collection = streamed.collection
    reporter.say(_reading_line(ingested, collection))
    check_k(k_needed, int(collection.copies.size))
    return Prepared(ingested, collection, analyzer, streamed.vectors, collection.copies.astype(float),
                    streamed.boilerplate, streamed.redacted, streamed.fingerprint, streamed=True)


def _boilerplate_line(boilerplate: Boilerplate, removed: int, changed: int, kept: int) -> str:
    line = (f"{len(boilerplate.lines)} boilerplate line(s) found; {removed:,} removed from {changed:,} distinct "
            "texts before vectorizing")
    return line + (f"; {kept:,} kept where they are most of their text" if kept else "")


STREAM_LANGUAGE_SAMPLE = 2_000  # documents whose languages choose a streamed run's stop words and stemmers


def _languages_line(codes: Sequence[str], weights: np.ndarray, *, forced: bool) -> str:
    return f"languages ({'--language' if forced else 'detected per text'}): {shares_line(shares(codes, weights))}"


def _redaction_line(redacted: dict[str, int]) -> str:
    return "redacted " + ", ".join(f"{n:,} {kind}" for kind, n in redacted.items())


def _reading_line(ingested: Ingested, collection: Collection) -> str:
    return (f"{len(ingested.documents):,} documents ({collection.copies.size:,} distinct texts), "
            f"{len(ingested.skipped()):,} files or rows skipped (see ingest-report.csv)")


def _capped(documents: Iterable[Document], limit: int) -> Iterator[Document]:
    for count, doc in enumerate(documents, start=1):
        if count > limit:
            raise PilewiseError(
                f"found more than --max-documents {limit:,} documents; raise --max-documents or point SOURCE "
                "at fewer files"
            )
        yield doc


def compute_run(
    options: RunOptions, reporter: Reporter, work: Path | None = None, on_spark: SparkPrepared | None = None
) -> RunResult:
    """All computation of a run, no writing; `work` is a scratch folder for the streaming path.

    `on_spark` is a collection prepared and clustered by the Spark engine: the stages from assessing on
    run here on its sample, with the whole collection's totals.
    """
    validate(options)
    sweep: Sweep | None = None
    tree: Tree | None = None
    totals: ClusterTotals | None = None
    if on_spark is not None:
        prepared = Prepared(on_spark.ingested, on_spark.collection, on_spark.analyzer, on_spark.vectors,
                            on_spark.collection.copies.astype(float), on_spark.boilerplate, on_spark.redacted,
                            on_spark.fingerprint)
        k = k_max = options.k
        k_min = min(options.k_min, k)  # the levels: cuts of the tree over the k centroids, as for k-means runs
        clustering, totals = on_spark.clustering, on_spark.totals
    else:
        prepared = prepare_collection(options, reporter, k_needed=options.k_min if options.k_auto else options.k,
                                      work=work)
        k_min, k_max = check_k_range(options.k_min, options.k_max, int(prepared.weights.size))
        # The map's layout needs only the space: its worker starts before clustering (see _map_job)
        with _Beside({"map": _map_job(options, prepared)}, background=_second_core(options)) as early:
            k, clustering, tree, sweep = _clustered(options, prepared, k_min, k_max, reporter)
            return _described(options, reporter, prepared, k, k_min, k_max, clustering, tree, sweep, totals,
                              None, early)
    return _described(options, reporter, prepared, k, k_min, k_max, clustering, tree, sweep, totals,
                      on_spark.population, None)


def _second_core(options: RunOptions) -> bool:
    """Whether jobs go to a worker process beside this one (a second core; `--workers 1` keeps them here)."""
    return (options.workers or default_workers()) > 1


def _map_job(options: RunOptions, prepared: Prepared) -> Job:
    """The map's t-SNE layout of a seeded sample of the space. It needs neither the clusters nor anything after
    them, so local runs start it in a worker before clustering: at 50,000 documents it had been the longest job
    of the worker beside assessing and describing, which this process then waited for (about 1.3 s)."""
    rows = docmap.sample_rows(int(prepared.weights.size), docmap.MAP_CAP, options.seed)
    return (docmap.layout, (prepared.vectors.space[rows], options.seed), {})


def _clustered(
    options: RunOptions, prepared: Prepared, k_min: int, k_max: int, reporter: Reporter
) -> tuple[int, Clustering, Tree | None, Sweep | None]:
    """The run's k, its clustering, Ward's tree (--method ward) and the sweep (--k auto)."""
    space, weights = prepared.vectors.space, prepared.weights
    distinct = int(weights.size)
    sweep: Sweep | None = None
    with reporter.stage("clustering"):
        tree = ward_tree(_dense(space), weights, seed=options.seed) if options.method == "ward" else None
        if options.k_auto:
            sweep, clusterings = _sweep(options, prepared, k_min, k_max, tree, reporter)
            k = sweep.recommended_k
            reporter.say(f"recommended {sweep.reason}")
            clustering = clusterings[k]
        else:
            k = options.k
            clustering = _cluster_at(space, weights, k, tree, seed=options.seed,
                                     starts=kmeans_starts(options, distinct), streamed=prepared.streamed,
                                     reporter=reporter, workers=options.workers or default_workers())
    return k, clustering, tree, sweep


def _described(
    options: RunOptions, reporter: Reporter, prepared: Prepared, k: int, k_min: int, k_max: int,
    clustering: Clustering, tree: Tree | None, sweep: Sweep | None, totals: ClusterTotals | None,
    population: Population | None, early: _Beside | None,
) -> RunResult:
    """Assessing, describing and explaining a clustering (the stages every engine shares), and the map.

    The rules' 126 tree fits need only the counts, the labels and the seed, so they are handed to one worker
    process (`_Beside`) that runs them on the second core while assessing and describing run here, where there
    is a second core (not beside Spark's threads). The map's t-SNE comes from `early`, the worker started before
    clustering, or (Spark runs) is done here with the rules. Their results are the same either way (tested).
    """
    space, weights = prepared.vectors.space, prepared.weights
    distinct = int(weights.size)
    shown = [prepared.analyzer.surface(t) for t in prepared.vectors.terms]
    doc_labels = clustering.labels[prepared.collection.text_of_doc]
    with reporter.stage("table columns"):  # first: the rules read the categorical ones
        # every document's id, date and cells in one pass (from a shelf: its small file, without the texts)
        doc_ids: list[str] = []
        dates: list[str] = []
        cell_rows: list[tuple[tuple[str, str], ...]] = []
        for doc_id, date, cells in document_fields(prepared.collection.documents):
            doc_ids.append(doc_id)
            dates.append(date)
            cell_rows.append(cells)
        doc_columns = metadata_columns(cell_rows)
        del cell_rows
        # every document counts, copies too: a copy of a text may carry other cells than its first document
        metadata = analyse_metadata(doc_columns, doc_labels, np.ones(doc_labels.size), k=k) if doc_columns else None
        first = prepared.collection.first_doc_of_text
        columns = {name: [column[j] for j in first] for name, column in doc_columns.items()}
    jobs: dict[str, Job] = {
        "rules": (explain_run, (prepared.vectors.counts, weights, clustering.labels, shown, metadata, columns),
                  {"k": k, "seed": options.seed}),
    }
    if early is None:
        jobs["map"] = _map_job(options, prepared)
    with _Beside(jobs, background=population is None and _second_core(options)) as beside:
        with reporter.stage("assessing"):
            quality = assess(space, clustering.labels, k=k, seed=options.seed)
            sample = stability_rows(distinct, options.seed)
            stability = bootstrap_stability(
                space[sample], weights[sample], clustering.labels[sample], k=k, resamples=options.resamples,
                seed=options.seed, cluster_fn=_stability_fn(options.method, k),
                track=lambda steps: reporter.track(steps, total=len(steps), label="resamples", unit="resample"),
            )
        with reporter.stage("describing"):
            # the clusters' term frequencies, counted once for the summaries and the levels' terms
            term_totals = None if totals is not None else cluster_term_totals(prepared.vectors.counts,
                                                                              clustering.labels, weights, k)
            clusters = describe_clusters(
                prepared.collection, prepared.vectors, clustering, quality, prepared.analyzer,
                top_terms=options.top_terms, stability=stability, totals=totals, term_totals=term_totals,
            )
            levels_tree = tree if tree is not None else centroid_tree(clustering, weights)
            levels = build_levels(levels_tree, space, weights, clustering.labels, k_min=k_min,
                                  k_max=k_max if tree is not None else k, run_k=k)
            levels = replace(levels, terms=level_terms(
                levels, prepared.vectors.counts, weights, shown,
                run=(clustering.labels, term_totals[0]) if term_totals is not None else None))
            profiles = term_profiles_from_counts(prepared.vectors.counts, clustering.labels, weights, shown, k=k)
            mixed = [c.mixed for c in clusters]
            if population is not None and population.dated is not None:  # counted over every document on Spark
                trends = counted_trends(population.dated, k, None if options.period == "auto" else options.period,
                                        mixed)
            else:
                trends = dated_trends(dates, doc_labels, k, options.period, mixed=mixed)
        with reporter.stage("explaining"):  # in the worker: the wait for it
            rules: RuleSet = beside.result("rules")
        with reporter.stage("laying out the map"):
            points: np.ndarray = (early or beside).result("map")
    suggestions = [c.suggested_name for c in clusters]
    old_names = find_old_names(options.out / "runs", source=str(options.source), fingerprint=prepared.fingerprint)
    naming = carry_names(old_names, doc_ids, clustering.labels[prepared.collection.text_of_doc], space,
                         prepared.collection.text_of_doc, suggestions)
    if naming.source_run:
        carried = sum(1 for c in naming.clusters if c.name)
        reporter.say(f"{carried} cluster name(s) carried over from {naming.source_run}; "
                     f"{len(naming.not_carried)} did not carry over")
    return RunResult(
        options=options, name=options.run_name(k), k=k, ingested=prepared.ingested, naming=naming,
        profiles=profiles, metadata=metadata, rules=rules, boilerplate=prepared.boilerplate,
        redacted=prepared.redacted,
        collection=prepared.collection, vectors=prepared.vectors, clustering=clustering, quality=quality,
        stability=stability, clusters=clusters, analyzer=prepared.analyzer, levels=levels, sweep=sweep,
        fingerprint=prepared.fingerprint, timings=reporter.timings, trends=trends, population=population,
        languages=language_mix(prepared.text_languages, weights, clustering.labels, k,
                               forced=options.language is not None) if prepared.text_languages else None,
        map_points=points,
    )


Job = tuple[Callable[..., Any], tuple[Any, ...], dict[str, Any]]  # a function, its arguments, its keywords
_handed: dict[str, Job] = {}  # the jobs of the worker being forked: it inherits them instead of a pickled copy


def _run_handed(name: str) -> Any:
    fn, args, kwargs = _handed[name]
    return fn(*args, **kwargs)


class _Beside:
    """Computations handed to one forked worker process, run there one after the other; or run in place.

    The jobs are named when the block starts and the worker is forked then, so it inherits their arguments
    (the term counts, tens of MB) instead of a pickled copy; only their names go to it and their results come
    back pickled. `result(name)` waits for one. A worker that dies (out of memory, a signal) leaves its jobs
    to the calling process, which runs them in place, as it does without `background`. Leaving the block
    cancels what has not started.
    """

    def __init__(self, jobs: dict[str, Job], *, background: bool) -> None:
        self.jobs = jobs
        self.background = background
        self.executor: ProcessPoolExecutor | None = None
        self.futures: dict[str, Future[Any]] = {}
        self.limits: Any = None

    def __enter__(self) -> _Beside:
        if self.background:
            global _handed
            _handed = self.jobs
            self.limits = one_thread_each()  # before the fork: the worker inherits the limit
            try:  # the worker is forked at the first submit and inherits the jobs
                self.executor = ProcessPoolExecutor(1, mp_context=multiprocessing.get_context("fork"))
                self.futures = {name: self.executor.submit(_run_handed, name) for name in self.jobs}
            except BaseException:  # no block to leave: give the threads back here
                self.__exit__()
                raise
            finally:
                _handed = {}
        return self

    def __exit__(self, *_: object) -> None:
        if self.executor is not None:
            self.executor.shutdown(wait=False, cancel_futures=True)
        if self.limits is not None:
            self.limits.restore_original_limits()
            self.limits = None

    def then(self, name: str, job: Job, *, in_place: Job) -> None:
        """One more job for the worker, after those it has; its arguments go to it pickled. It may use what the
        earlier jobs left in the worker's memory, so `in_place` is what the calling process runs instead when
        the worker is gone (or without `background`): the same result from its own inputs."""
        self.jobs[name] = in_place
        if self.executor is not None:
            fn, args, kwargs = job
            with suppress(BrokenProcessPool):  # a worker already gone: `result` runs `in_place`
                self.futures[name] = self.executor.submit(fn, *args, **kwargs)

    def result(self, name: str) -> Any:
        fn, args, kwargs = self.jobs[name]
        if name in self.futures:
            try:
                return self.futures[name].result()
            except BrokenProcessPool:
                pass
        return fn(*args, **kwargs)


def dated_trends(dates: Sequence[str], doc_labels: np.ndarray, k: int, period: str,
                 mixed: Sequence[bool] = ()) -> Trends | None:
    """Counts per period and trend readings of every cluster, when any document carries a date ("" where not)."""
    if not any(dates):
        return None
    return cluster_trends(dates, doc_labels, k, period=None if period == "auto" else period, mixed=mixed)


def _detect_beside(n_texts: int, forced: str | None, workers: int) -> bool:
    """Whether languages are detected in a forked worker beside the near-duplicate grouping (see
    prepare_collection): with a second core, no --language, and as many texts as detection's own workers need."""
    return (workers > 1 and forced is None and n_texts >= CLASSIFY_PARALLEL_MIN
            and "fork" in multiprocessing.get_all_start_methods())


def _nothing() -> None:
    """The in-place form of a job that only prepares the worker's memory for a later one."""


def _detect_changed(changed: dict[int, str], forced: str | None) -> tuple[str, ...]:
    """Languages of the distinct texts after boilerplate stripping, in the worker that ran `screen_ahead` on
    them before (see prepare_collection): only the texts in `changed` are screened again."""
    texts, english = screened_ahead(changed)
    return detect_languages(texts, forced, english=english)


def redact_documents(ingested: Ingested) -> tuple[Ingested, dict[str, int]]:
    """Replace personal data in texts (placeholders, for vectorizing) and titles and table cells (labels)."""
    counts: dict[str, int] = {}
    documents = tuple(redact_document(doc, counts) for doc in ingested.documents)
    return replace(ingested, documents=documents), counts


def merge_near_duplicates(collection: Collection, near: NearDuplicates) -> Collection:
    """Each near-duplicate group of distinct texts becomes one text to cluster, weighted by all its documents."""
    text_of_doc = near.group_of[collection.text_of_doc]
    copies = np.bincount(text_of_doc, minlength=near.representative.size).astype(np.int64)
    first = collection.first_doc_of_text[near.representative]
    return Collection(collection.documents, text_of_doc, first, copies, exact_texts=collection.distinct_texts)


def collect_distinct(documents: Sequence[Document]) -> Collection:
    """Group exact duplicate texts (after collapsing whitespace) so that each is clustered once."""
    index_of: dict[str, int] = {}
    text_of_doc = np.empty(len(documents), dtype=np.int64)
    first: list[int] = []
    for i, doc in enumerate(documents):
        key = distinct_key(doc.text)
        t = index_of.setdefault(key, len(first))
        if t == len(first):
            first.append(i)
        text_of_doc[i] = t
    copies = np.bincount(text_of_doc, minlength=len(first))
    return Collection(documents, text_of_doc, np.asarray(first, dtype=np.int64), copies)


def fingerprint(documents: Iterable[Document]) -> str:
    """SHA-256 over every document's id and text, in reading order."""
    digest = hashlib.sha256()
    for doc in documents:
        digest.update(fingerprint_record(doc))
    return "sha256:" + digest.hexdigest()


def _sweep(
    options: RunOptions, prepared: Prepared, k_min: int, k_max: int, tree: Tree | None, reporter: Reporter
) -> tuple[Sweep, dict[int, Clustering]]:
    """clustering.methods.sweep_k with the run's options."""
    weights = prepared.weights
    return sweep_k(prepared.vectors.space, weights, k_min, k_max, tree, method=options.method, seed=options.seed,
                   starts=kmeans_starts(options, int(weights.size)), resamples=options.resamples,
                   say=(lambda k: reporter.say(f"k={k}")) if not reporter.quiet else None)
