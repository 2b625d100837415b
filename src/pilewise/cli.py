"""Command line: thin wrappers that build options and call the pipeline."""

from __future__ import annotations

import functools
from collections.abc import Callable
from pathlib import Path
from typing import Annotated, TypeVar

import typer

from pilewise.errors import PilewiseError
from pilewise.options import RunOptions
from pilewise.pipeline import RunOutcome, compare_runs, run_collection

app = typer.Typer(
    add_completion=False,
    no_args_is_help=True,
    help="Cluster a pile of unlabeled text and describe every cluster with evidence, as a static site.",
    pretty_exceptions_enable=False,
)

OutOption = Annotated[Path, typer.Option("--out", help="Site folder; each run goes to OUT/runs/NAME.")]
SeedOption = Annotated[int, typer.Option("--seed", help="Seed for every random step; same seed, same files.")]
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


def _print_outcome(outcome: RunOutcome) -> None:
    typer.echo(
        f"{outcome.documents:,} documents in {outcome.clusters} clusters; "
        f"{outcome.skipped:,} files or rows skipped (see ingest-report.csv)",
        err=True,
    )
    typer.echo(str(outcome.index_page))


@app.command()
@user_errors
def run(
    source: Annotated[Path, typer.Argument(help="A folder (read recursively) or one table file.")],
    k: Annotated[int, typer.Option("--k", help="Number of clusters (2 <= k < distinct documents).")],
    out: OutOption = Path("pilewise-site"),
    seed: SeedOption = 0,
    name: Annotated[str, typer.Option("--name", help="Run folder name; default k<K>.")] = "",
    text_column: Annotated[str | None, typer.Option("--text-column", help="Table column holding the text.")] = None,
    title_column: Annotated[str | None, typer.Option("--title-column", help="Table column holding titles.")] = None,
    id_column: Annotated[str | None, typer.Option("--id-column", help="Table column holding document ids.")] = None,
    date_column: Annotated[str | None, typer.Option("--date-column", help="Table column holding dates.")] = None,
    stop_words: Annotated[
        Path | None, typer.Option("--stop-words", help="Extra stop words, one per line.")
    ] = None,
    stem: Annotated[bool, typer.Option("--stem/--no-stem", help="Snowball-stem words before counting.")] = False,
    phrases_in_space: Annotated[
        bool, typer.Option("--phrases-in-space", help="Also cluster on two-word phrases (slower).")
    ] = False,
    lsa_components: Annotated[
        int, typer.Option("--lsa-components", help="LSA dimensions before clustering; 0 turns LSA off.")
    ] = 100,
    min_df: Annotated[
        int | None, typer.Option("--min-df", help="Drop terms in fewer documents; default grows with size.")
    ] = None,
    max_df: Annotated[float, typer.Option("--max-df", help="Drop terms in a larger share of documents.")] = 0.5,
    resamples: Annotated[
        int, typer.Option("--resamples", help="Bootstrap resamples for cluster stability (more: slower, firmer).")
    ] = 20,
    max_file_mb: Annotated[float, typer.Option("--max-file-mb", help="Skip files larger than this.")] = 100.0,
    max_doc_chars: Annotated[
        int, typer.Option("--max-doc-chars", help="Truncate longer documents (and say so).")
    ] = 1_000_000,
    quiet: QuietOption = False,
) -> None:
    """Cluster SOURCE into K clusters and write the run's site and exports."""
    options = RunOptions(
        source=source, k=k, out=out, seed=seed, name=name, text_column=text_column, title_column=title_column,
        id_column=id_column, date_column=date_column, stop_words_file=stop_words, stem=stem,
        bigrams_in_space=phrases_in_space, lsa_components=lsa_components, min_df=min_df, max_df=max_df,
        max_file_mb=max_file_mb, max_doc_chars=max_doc_chars, resamples=resamples, quiet=quiet,
    )
    _print_outcome(run_collection(options))


@app.command()
@user_errors
def compare(
    run_a: Annotated[Path, typer.Argument(help="The first run's folder, e.g. pilewise-site/runs/k5.")],
    run_b: Annotated[Path, typer.Argument(help="The second run's folder, e.g. pilewise-site/runs/k10.")],
    out: Annotated[
        Path | None, typer.Option("--out", help="Site folder for the comparison; default: the runs' site folder.")
    ] = None,
) -> None:
    """Compare two runs: agreement figures, which clusters were kept, split or merged, which documents moved."""
    typer.echo(str(compare_runs(run_a, run_b, out)))


@app.command()
@user_errors
def demo(
    out: OutOption = Path("pilewise-site"),
    k: Annotated[int, typer.Option("--k", help="Number of clusters.")] = 10,
    seed: SeedOption = 0,
    quiet: QuietOption = False,
) -> None:
    """Write the invented demo collection (a plant shop's customer messages) and cluster it."""
    from pilewise.corpora.shop_messages import write_demo_collection

    collection = write_demo_collection(out.parent.resolve() / f"{out.name}-demo-data")
    typer.echo(f"demo collection written to {collection}", err=True)
    options = RunOptions(source=collection, k=k, out=out, seed=seed, name=f"demo-k{k}", quiet=quiet)
    _print_outcome(run_collection(options))


def main() -> None:
    """Entry point of the console script."""
    app()
