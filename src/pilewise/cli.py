"""Command line: thin wrappers that build options and call the pipeline."""

from __future__ import annotations

import functools
import importlib
import sys
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Annotated, Any, TypeVar

import typer
from typer.core import TyperCommand, TyperGroup

import pilewise
from pilewise.errors import PilewiseError

# The pipeline (scikit-learn, scipy, pandas: about 1.5 s of imports) is imported by the commands that run it,
# so that --help, --version and a mistyped command line answer at once.
if TYPE_CHECKING:
    from pilewise.options import RunOptions
    from pilewise.pipeline import RunOutcome

# click's exception classes, from wherever this typer takes them (recent typer carries its own copy of click)
_click_errors: Any = importlib.import_module(typer.BadParameter.__module__)
# click < 8.2 has no such class; bare `pilewise` then already prints the help
_NoArgsIsHelp: type[Exception] = getattr(_click_errors, "NoArgsIsHelpError", type("_Never", (Exception,), {}))


class OneLineErrors(TyperGroup):
    """The command group, with usage errors as one line and exit status 1, like every other user mistake.

    Click (and typer's boxed rendering of it) reports a wrong command line with a usage block and
    exit status 2; pilewise keeps one form for every user mistake (docs/usage.md):
    ``pilewise: error: <what is wrong>; see 'pilewise COMMAND --help'`` and exit status 1. Overriding
    ``main`` covers both the console script and typer's test runner, which calls ``main`` too.
    """

    def main(  # type: ignore[override]
        self, args: Sequence[str] | None = None, prog_name: str | None = None, complete_var: str | None = None,
        standalone_mode: bool = True, **extra: Any,
    ) -> Any:
        try:
            status = super().main(args, prog_name, complete_var, standalone_mode=False, **extra)
        except _NoArgsIsHelp as err:  # bare `pilewise`: the help, and success
            typer.echo(err.ctx.get_help())  # type: ignore[attr-defined]
            status = 0
        except _click_errors.ClickException as err:
            given = list(args) if args is not None else sys.argv[1:]
            typer.echo(usage_error_line(err, list(self.commands), given), err=True)
            status = 1
        except typer.Abort:
            typer.echo("pilewise: interrupted; the previous site is unchanged", err=True)
            status = 130
        if not standalone_mode:
            return status
        sys.exit(status if isinstance(status, int) else 0)


class PlainUsage(TyperCommand):
    """A command whose usage line names its arguments in capitals, as most command-line tools do.

    typer writes a required argument as ``{source}``; ``pilewise run [OPTIONS] SOURCE`` is what a reader
    of other tools' help expects.
    """

    def collect_usage_pieces(self, ctx: Any) -> list[str]:
        pieces = [self.options_metavar] if self.options_metavar else []
        for param in self.get_params(ctx):
            if param.param_type_name == "argument":
                name = (param.metavar or param.name or "").upper()
                pieces.append(name if param.required else f"[{name}]")
        return pieces


def usage_error_line(err: Any, commands: Sequence[str], args: Sequence[str]) -> str:
    """Click's message as pilewise's one error line, pointing at the help of the command concerned.

    The command comes from the error's context, else (the parser's errors carry none) from the first
    argument that names one of `commands`.
    """
    message = " ".join(err.format_message().split()).rstrip(".")
    names: list[str] = []
    ctx = getattr(err, "ctx", None)
    while ctx is not None and ctx.parent is not None:  # the root context is the program itself
        names.insert(0, ctx.info_name)
        ctx = ctx.parent
    if not names:
        names = [arg for arg in args if arg in commands][:1]
    return f"pilewise: error: {message}; see '{' '.join(['pilewise', *names])} --help'"


app = typer.Typer(
    cls=OneLineErrors,
    add_completion=False,
    no_args_is_help=True,
    help="Cluster a pile of unlabeled text and describe every cluster with evidence, as a static site.",
    pretty_exceptions_enable=False,
    # plain help: flags without a "<bool>" value and no box drawing, readable in any terminal or pager
    rich_markup_mode=None,
    context_settings={"help_option_names": ["-h", "--help"]},
)


def _print_version(given: bool) -> None:
    if given:
        typer.echo(f"pilewise {pilewise.__version__}")
        raise typer.Exit()


@app.callback()
def _root(
    version: Annotated[bool, typer.Option(
        "--version", callback=_print_version, is_eager=True, help="Print the version and exit.")] = False,
) -> None:
    """Cluster a pile of unlabeled text and describe every cluster with evidence, as a static site."""

OutOption = Annotated[Path, typer.Option(
    "--out", metavar="OUT", help="Site folder; each run goes to OUT/runs/NAME.")]
SeedOption = Annotated[int, typer.Option(
    "--seed", metavar="N", help="Seed for every random step; same seed, same files.")]
QuietOption = Annotated[bool, typer.Option("--quiet", help="Print only the result and errors.")]


F = TypeVar("F", bound=Callable[..., None])


def user_errors(command: F) -> F:
    """Turn a PilewiseError into one line on standard error and exit status 1, never a traceback."""

    @functools.wraps(command)
    def wrapper(*args: object, **kwargs: object) -> None:
        try:
            command(*args, **kwargs)
        except PilewiseError as err:
            typer.echo(f"pilewise: error: {err}", err=True)
            raise typer.Exit(1) from None
        except KeyboardInterrupt:
            typer.echo("pilewise: interrupted; the previous site is unchanged", err=True)
            raise typer.Exit(130) from None

    return wrapper  # type: ignore[return-value]


def _print_outcome(outcome: RunOutcome, *, quiet: bool) -> None:
    """The summary line (not with --quiet) on standard error, the index page's path on standard output."""
    if not quiet:
        typer.echo(
            f"{outcome.documents:,} documents in {outcome.clusters} clusters; "
            f"{outcome.skipped:,} files or rows skipped (see ingest-report.csv)",
            err=True,
        )
    typer.echo(str(outcome.index_page.resolve()))


SourceArg = Annotated[Path, typer.Argument(
    metavar="SOURCE", help="A folder (read recursively) or one table file.", show_default=False)]
NameOption = Annotated[str, typer.Option("--name", metavar="NAME", help="Folder name; default from the method and k.")]
TextColumn = Annotated[str | None, typer.Option(
    "--text-column", metavar="COLUMN", help="Table column holding the text.")]
TitleColumn = Annotated[str | None, typer.Option(
    "--title-column", metavar="COLUMN", help="Table column holding titles.")]
IdColumn = Annotated[str | None, typer.Option(
    "--id-column", metavar="COLUMN", help="Table column holding document ids.")]
Period = Annotated[str, typer.Option(
    "--period", metavar="day|week|month|quarter|year|auto",
    help="Periods of the trend counts; auto: the finest with at most 60 periods over the span.")]
DateColumn = Annotated[str | None, typer.Option("--date-column", metavar="COLUMN", help="Table column holding dates.")]
Delimiter = Annotated[str | None, typer.Option(
    "--delimiter", metavar="CHAR", help="Table separator, e.g. ';' or 'tab'; default: guessed from the file.")]
Encoding = Annotated[str | None, typer.Option(
    "--encoding", metavar="NAME", help="Text encoding of every file, e.g. cp1252; default: detected.")]
RecordsKey = Annotated[str | None, typer.Option(
    "--records-key", metavar="KEY", help="Key of a JSON object that holds the list of records; default: found.")]
FollowLinks = Annotated[bool, typer.Option(
    "--follow-links", help="Also read links whose target lies outside SOURCE.")]
Boilerplate = Annotated[bool, typer.Option(
    "--boilerplate/--keep-boilerplate", help="Remove lines repeated across many texts before vectorizing.")]
StopWords = Annotated[Path | None, typer.Option("--stop-words", metavar="FILE", help="Extra stop words, one per line.")]
Stem = Annotated[bool, typer.Option("--stem/--no-stem", help="Snowball-stem words before counting.")]
Language = Annotated[str | None, typer.Option(
    "--language", metavar="CODE", help="Language of every document (ISO 639-1, e.g. de); default: detected.")]
PhrasesInSpace = Annotated[bool, typer.Option("--phrases-in-space", help="Also cluster on two-word phrases.")]
LsaComponents = Annotated[int, typer.Option("--lsa-components", metavar="N", help="LSA dimensions; 0 turns LSA off.")]
MinDf = Annotated[int | None, typer.Option(
    "--min-df", metavar="N", help="Drop terms in fewer documents; default by size.")]
MaxDf = Annotated[float, typer.Option("--max-df", metavar="SHARE", help="Drop terms in a larger share of documents.")]
Method = Annotated[str, typer.Option("--method", metavar="kmeans|ward", help="kmeans, or ward (a tree cut at k).")]
Resamples = Annotated[int, typer.Option("--resamples", metavar="N", help="Bootstrap resamples for cluster stability.")]
MaxFileMb = Annotated[float, typer.Option(
    "--max-file-mb", metavar="MB",
    help="Skip text, HTML, mail and .json files larger than this; tables and mailboxes stream.")]
MaxDocChars = Annotated[int, typer.Option(
    "--max-doc-chars", metavar="N", help="Truncate longer documents (and say so).")]
Redact = Annotated[bool, typer.Option("--redact/--no-redact", help="Hide e-mails, phones, cards, IBANs, IPs.")]
NearDuplicate = Annotated[float, typer.Option(
    "--near-duplicate", metavar="JACCARD", help="Jaccard at which texts group; 1 = off.")]
MaxDocuments = Annotated[int, typer.Option(
    "--max-documents", metavar="N", help="Refuse collections with more documents.")]
Mode = Annotated[str, typer.Option(
    "--mode", metavar="memory|stream|auto",
    help="memory, stream (chunk by chunk, for very large collections), or auto (stream above 100 MB).")]
Workers = Annotated[int, typer.Option(
    "--workers", metavar="N", help="Tokenizing processes (streaming; in memory from 10,000 texts); 0 = one per core."
)]
Engine = Annotated[str, typer.Option(
    "--engine", metavar="local|spark",
    help="local (this process), or spark (Apache Spark; pip install 'pilewise[spark]', Java 17).")]
SparkMaster = Annotated[str, typer.Option(
    "--spark-master", metavar="URL", help="Spark master for --engine spark, e.g. local[4] or spark://host:7077.")]
KRange = Annotated[str, typer.Option(
    "--k-range", metavar="LOW:HIGH", help="Range of k for the levels view and --k auto.")]


def parse_k(text: str) -> tuple[int, bool]:
    """'8' -> (8, False); 'auto' -> (0, True)."""
    if text.strip().lower() == "auto":
        return 0, True
    # ASCII digits only: str.isdigit() also accepts '²' and other digits that int() refuses
    if not (text.strip().isascii() and text.strip().isdigit()):
        raise PilewiseError(f"--k {text!r} is neither a number of clusters nor 'auto'; pass --k 8 or --k auto")
    return int(text), False


def parse_range(text: str, flag: str) -> tuple[int, int]:
    from pilewise.clustering.sweep import parse_k_range

    try:
        return parse_k_range(text)
    except ValueError as err:
        raise PilewiseError(f"{flag} {err}".replace(f"{flag} k range", flag)) from None


# CLI parameter names that differ from RunOptions fields; parameters handled by the command itself are left out
_OPTION_FIELDS = {"stop_words": "stop_words_file", "phrases_in_space": "bigrams_in_space"}
_COMMAND_ONLY = {"k", "k_range", "k_value", "k_auto", "k_min", "k_max"}


def _run_options(params: dict[str, Any], *, k: str | None, k_range: tuple[str, str]) -> RunOptions:
    """RunOptions from a command's parameters (its locals()), with --k (run) and the k range parsed.

    Every problem is reported at once: a --k or range that cannot be read is named together with what
    `options.validate` finds in the other options.
    """
    from pilewise.options import RunOptions, validate

    fields = {_OPTION_FIELDS.get(name, name): value for name, value in params.items() if name not in _COMMAND_ONLY}
    problems: list[str] = []
    k_value, k_auto = 0, True
    if k is not None:
        try:
            k_value, k_auto = parse_k(k)
        except PilewiseError as err:
            problems.append(str(err))
            k_value, k_auto = 2, False
    try:
        k_min, k_max = parse_range(*k_range)
    except PilewiseError as err:
        problems.append(str(err))
        k_min, k_max = 2, 20
    options = RunOptions(**fields, k=k_value, k_auto=k_auto, k_min=k_min, k_max=k_max)
    if problems:
        try:
            validate(options)
        except PilewiseError as err:
            problems.append(str(err))
        raise PilewiseError("; ".join(problems))
    return options


@app.command(cls=PlainUsage, short_help="Cluster SOURCE; write a run's site and exports to OUT/runs/NAME/.")
@user_errors
def run(
    source: SourceArg,
    k: Annotated[str | None, typer.Option(
        "--k", metavar="K|auto", show_default=False,
        help="Number of clusters (2 <= k < distinct documents), or auto; without --k: auto.")] = None,
    out: OutOption = Path("pilewise-site"),
    seed: SeedOption = 0,
    name: NameOption = "",
    method: Method = "kmeans",
    k_range: KRange = "2:20",
    text_column: TextColumn = None,
    title_column: TitleColumn = None,
    id_column: IdColumn = None,
    date_column: DateColumn = None,
    period: Period = "auto",
    delimiter: Delimiter = None,
    encoding: Encoding = None,
    records_key: RecordsKey = None,
    follow_links: FollowLinks = False,
    boilerplate: Boilerplate = True,
    stop_words: StopWords = None,
    stem: Stem = False,
    language: Language = None,
    phrases_in_space: PhrasesInSpace = False,
    lsa_components: LsaComponents = 100,
    min_df: MinDf = None,
    max_df: MaxDf = 0.5,
    resamples: Resamples = 20,
    max_file_mb: MaxFileMb = 100.0,
    max_doc_chars: MaxDocChars = 1_000_000,
    max_documents: MaxDocuments = 2_000_000,
    redact: Redact = True,
    near_duplicate: NearDuplicate = 0.8,
    mode: Mode = "auto",
    workers: Workers = 0,
    engine: Engine = "local",
    spark_master: SparkMaster = "local[*]",
    quiet: QuietOption = False,
) -> None:
    """Cluster SOURCE into K clusters (or the k the figures favour) and write OUT/runs/NAME/: site and exports."""
    options = _run_options(locals(), k=k, k_range=(k_range, "--k-range"))
    if k is None and not options.quiet:
        typer.echo(f"no --k given: choosing k between {options.k_min} and {options.k_max} (--k auto)", err=True)
    from pilewise.pipeline import run_collection

    _print_outcome(run_collection(options), quiet=options.quiet)


@app.command(cls=PlainUsage, short_help="Score a range of k on SOURCE and recommend one (OUT/sweeps/NAME/).")
@user_errors
def sweep(
    source: SourceArg,
    k: Annotated[str, typer.Option("--k", metavar="LOW:HIGH", help="Range of cluster counts.")] = "2:20",
    out: OutOption = Path("pilewise-site"),
    seed: SeedOption = 0,
    name: NameOption = "",
    method: Method = "kmeans",
    text_column: TextColumn = None,
    title_column: TitleColumn = None,
    id_column: IdColumn = None,
    date_column: DateColumn = None,
    delimiter: Delimiter = None,
    encoding: Encoding = None,
    records_key: RecordsKey = None,
    follow_links: FollowLinks = False,
    boilerplate: Boilerplate = True,
    stop_words: StopWords = None,
    stem: Stem = False,
    language: Language = None,
    phrases_in_space: PhrasesInSpace = False,
    lsa_components: LsaComponents = 100,
    min_df: MinDf = None,
    max_df: MaxDf = 0.5,
    resamples: Resamples = 10,
    max_file_mb: MaxFileMb = 100.0,
    max_doc_chars: MaxDocChars = 1_000_000,
    redact: Redact = True,
    near_duplicate: NearDuplicate = 0.8,
    quiet: QuietOption = False,
) -> None:
    """Score every k of a range (silhouette, Calinski-Harabasz, Davies-Bouldin, stability), recommend one,
    and write OUT/sweeps/NAME/."""
    options = _run_options(locals(), k=None, k_range=(k, "--k"))
    from pilewise.pipeline import sweep_collection  # after locals() is read: it holds the options only

    outcome = sweep_collection(options)
    typer.echo(f"recommended {outcome.reason}", err=True)
    typer.echo(str(outcome.page.resolve()))


@app.command(cls=PlainUsage, short_help="Compare two runs: kept, split and merged clusters, moved documents.")
@user_errors
def compare(
    run_a: Annotated[Path, typer.Argument(metavar="RUN_A", help="The first run's folder, e.g. pilewise-site/runs/k5.")],
    run_b: Annotated[Path, typer.Argument(
        metavar="RUN_B", help="The second run's folder, e.g. pilewise-site/runs/k10.")],
    out: Annotated[
        Path | None, typer.Option(
            "--out", metavar="OUT", help="Site folder for the comparison; default: the runs' site folder.")
    ] = None,
) -> None:
    """Compare two runs: agreement figures, which clusters were kept, split or merged, which documents moved."""
    from pilewise.pipeline import compare_runs

    typer.echo(str(compare_runs(run_a, run_b, out).resolve()))


@app.command(cls=PlainUsage, short_help="Place new documents in a saved run's clusters (OUT/assigned/NAME/).")
@user_errors
def assign(
    run_folder: Annotated[Path, typer.Argument(
        metavar="RUN", help="A run's folder (e.g. pilewise-site/runs/k5), or a run's name under OUT/runs.")],
    source: SourceArg,
    out: Annotated[Path | None, typer.Option(
        "--out", metavar="OUT", help="Site folder; default: the one holding RUN (pilewise-site for a name).")] = None,
    name: Annotated[str, typer.Option(
        "--name", metavar="NAME", help="Folder name under OUT/assigned; default from SOURCE and the time.")] = "",
    text_column: TextColumn = None,
    title_column: TitleColumn = None,
    id_column: IdColumn = None,
    date_column: DateColumn = None,
    delimiter: Delimiter = None,
    encoding: Encoding = None,
    records_key: RecordsKey = None,
    follow_links: FollowLinks = False,
    max_file_mb: MaxFileMb = 100.0,
    max_doc_chars: MaxDocChars = 1_000_000,
    max_documents: MaxDocuments = 2_000_000,
    quiet: QuietOption = False,
) -> None:
    """Read SOURCE as `run` reads it and place every document in the nearest cluster of the saved run RUN, with
    its distance and fit; write OUT/assigned/NAME/."""
    from pilewise.assign.command import assign_source
    from pilewise.options import RunOptions

    reading = RunOptions(source=source, k=2, text_column=text_column, title_column=title_column,
                         id_column=id_column, date_column=date_column, delimiter=delimiter, encoding=encoding,
                         records_key=records_key, follow_links=follow_links, max_file_mb=max_file_mb,
                         max_doc_chars=max_doc_chars, max_documents=max_documents, quiet=quiet)
    outcome = assign_source(run_folder, reading, out=out, name=name)
    if not quiet:
        typer.echo(f"{outcome.documents:,} documents placed; {outcome.none_share:.0%} fit no cluster", err=True)
    typer.echo(str(outcome.index_page.resolve()))


@app.command(cls=PlainUsage, short_help="Write the invented demo collection and cluster it.")
@user_errors
def demo(
    out: OutOption = Path("pilewise-site"),
    k: Annotated[int, typer.Option("--k", metavar="K", help="Number of clusters.")] = 10,
    seed: SeedOption = 0,
    quiet: QuietOption = False,
) -> None:
    """Write the invented demo collection (a plant shop's customer messages) and cluster it."""
    from pilewise.demo.shop_messages import write_demo_collection
    from pilewise.options import RunOptions, validate
    from pilewise.pipeline import run_collection

    options = RunOptions(source=out.resolve() / "demo-data", k=k, out=out, seed=seed, name=f"demo-k{k}",
                         quiet=quiet)
    validate(options, with_source=False)  # before writing 1,500 files for a run that cannot start
    collection = write_demo_collection(options.source)
    if not quiet:
        typer.echo(f"demo collection written to {collection}", err=True)
    _print_outcome(run_collection(options), quiet=quiet)


def main() -> None:
    """Entry point of the console script."""
    app(prog_name="pilewise")


if __name__ == "__main__":
    main()
