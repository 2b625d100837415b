"""The command line behaves like its neighbours: --version, -h, plain flags, readable usage lines, --k auto.

Conventions checked here are common practice of command-line tools (GNU coding standards, "--version" and
"--help"; POSIX utility syntax guidelines for option and operand names in usage lines), not a pilewise
invention.
"""

from __future__ import annotations

import importlib.metadata
from pathlib import Path

import pilewise
from helpers import invoke, read_manifest, write_topic_folder


def test_version_prints_the_installed_distribution_version() -> None:
    # GNU coding standards, "--version": the program name and its version on standard output, exit 0;
    # the reference is the installed distribution's metadata, not a number written here
    result = invoke("--version")
    assert result.exit_code == 0
    assert result.stdout.strip() == f"pilewise {importlib.metadata.version('pilewise')}"
    assert pilewise.__version__ == importlib.metadata.version("pilewise")


def test_short_help_is_the_same_as_long_help() -> None:
    for command in ([], ["run"], ["sweep"], ["compare"], ["demo"]):
        short, long = invoke(*command, "-h"), invoke(*command, "--help")
        assert short.exit_code == long.exit_code == 0
        assert short.stdout == long.stdout
        assert "Usage: pilewise" in short.stdout


def test_flags_take_no_value_in_the_help() -> None:
    # a flag is written alone (`--quiet`), an option with a value names it (`--out OUT`); no "<bool>", no boxes
    text = invoke("run", "--help").stdout
    assert "<bool>" not in text and "╭" not in text
    assert "\n  --quiet " in text
    assert "--redact / --no-redact" in text
    assert "--out OUT " in text and "--k K|auto " in text


def test_usage_lines_name_arguments_in_capitals() -> None:
    # POSIX utility syntax guidelines write operands as words; capitals are the common practice of help texts
    assert invoke("run", "-h").stdout.splitlines()[0] == "Usage: pilewise run [OPTIONS] SOURCE"
    assert invoke("sweep", "-h").stdout.splitlines()[0] == "Usage: pilewise sweep [OPTIONS] SOURCE"
    assert invoke("compare", "-h").stdout.splitlines()[0] == "Usage: pilewise compare [OPTIONS] RUN_A RUN_B"
    assert invoke("demo", "-h").stdout.splitlines()[0] == "Usage: pilewise demo [OPTIONS]"


def test_help_says_where_each_command_writes() -> None:
    assert "OUT/runs/NAME/" in invoke("run", "-h").stdout
    assert "OUT/sweeps/NAME/" in invoke("sweep", "-h").stdout
    listing = invoke("--help").stdout
    assert "OUT/runs/NAME/" in listing and "OUT/sweeps/NAME/" in listing
    assert "..." not in listing.split("Commands:")[1]  # every command's line is whole


def test_run_without_k_chooses_k_says_so_and_prints_an_absolute_path(tmp_path: Path, monkeypatch) -> None:
    write_topic_folder(tmp_path / "notes", per_topic=12)
    monkeypatch.chdir(tmp_path)  # relative SOURCE and OUT, as a user types them
    result = invoke("run", "notes", "--out", "site", "--k-range", "2:4", "--resamples", "3")
    assert result.exit_code == 0, result.output
    assert "no --k given: choosing k between 2 and 4 (--k auto)" in result.stderr
    printed = Path(result.stdout.strip())
    assert printed.is_absolute() and printed.is_file() and printed.name == "index.html"
    manifest = read_manifest(printed.parent)
    assert manifest["k_chosen_by"] == "sweep"
    assert 2 <= manifest["k"] <= 4
