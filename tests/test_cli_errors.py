"""Command-line mistakes as one line and exit status 1, through typer's runner and through the console script.

docs/usage.md promises one form for every user mistake: ``pilewise: error: ...`` on one line, exit 1.
Usage errors found by click (unknown option, missing argument, a value that is not a number) get
click's message followed by ``; see 'pilewise COMMAND --help'``.
"""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from helpers import invoke
from pilewise.cli import main

SRC = str(Path(__file__).resolve().parents[1] / "src")


@pytest.fixture()
def small_folder(tmp_path: Path) -> Path:
    folder = tmp_path / "texts"
    folder.mkdir()
    topics = ["garden shed roses soil", "invoice payment refund card", "train ticket platform delay"]
    for i in range(9):
        words = topics[i % 3].split()
        text = " ".join(words[j % 4] for j in range(i, i + 7))  # distinct texts, three clear topics
        (folder / f"{i}.txt").write_text(f"{text}\n", encoding="utf-8")
    return folder


def one_error_line(stderr: str) -> str:
    lines = [line for line in stderr.splitlines() if line.strip()]
    assert len(lines) == 1, stderr
    assert "Traceback" not in stderr and "╭" not in stderr  # no traceback, no boxed message
    return lines[0]


def run_cli(*args: str) -> tuple[int, str, str]:
    """Through typer's test runner."""
    result = invoke(*args)
    return result.exit_code, result.stdout, result.stderr


def run_script(*args: str) -> tuple[int, str, str]:
    """Through the console script's entry point, in a child process (`python -m pilewise` calls cli.main)."""
    env = {**os.environ, "PYTHONPATH": SRC + os.pathsep + os.environ.get("PYTHONPATH", "")}
    done = subprocess.run([sys.executable, "-m", "pilewise", *args], capture_output=True, text=True, env=env,
                          timeout=120)
    return done.returncode, done.stdout, done.stderr


BOTH = pytest.mark.parametrize("invoke", [run_cli, run_script], ids=["runner", "script"])


@BOTH
def test_unknown_option(invoke, small_folder: Path) -> None:  # type: ignore[no-untyped-def]
    status, _, stderr = invoke("run", str(small_folder), "--k", "2", "--zzzz")
    assert status == 1
    # click's message for an unknown option is "No such option: NAME" (click's parser, from memory)
    assert one_error_line(stderr) == "pilewise: error: No such option: --zzzz; see 'pilewise run --help'"


@BOTH
def test_missing_argument(invoke) -> None:  # type: ignore[no-untyped-def]
    status, _, stderr = invoke("run")
    assert status == 1
    assert one_error_line(stderr) == "pilewise: error: Missing argument 'SOURCE'; see 'pilewise run --help'"


@BOTH
def test_option_without_its_value(invoke, small_folder: Path) -> None:  # type: ignore[no-untyped-def]
    status, _, stderr = invoke("sweep", str(small_folder), "--seed")
    assert status == 1
    assert one_error_line(stderr) == (
        "pilewise: error: Option '--seed' requires an argument; see 'pilewise sweep --help'")


@BOTH
def test_unknown_command(invoke) -> None:  # type: ignore[no-untyped-def]
    status, _, stderr = invoke("frobnicate")
    assert status == 1
    assert one_error_line(stderr) == "pilewise: error: No such command 'frobnicate'; see 'pilewise --help'"


@BOTH
def test_seed_that_is_not_a_number(invoke, small_folder: Path) -> None:  # type: ignore[no-untyped-def]
    status, _, stderr = invoke("run", str(small_folder), "--k", "2", "--seed", "abc")
    assert status == 1
    line = one_error_line(stderr)
    # the middle is the wording of click/typer's integer conversion, which differs between their versions
    assert line.startswith("pilewise: error: Invalid value for '--seed': ")
    assert line.endswith("; see 'pilewise run --help'")


@BOTH
@pytest.mark.parametrize("seed", ["-1", "4294967296"])
def test_seed_outside_numpys_range(invoke, small_folder: Path, tmp_path: Path, seed: str) -> None:  # type: ignore[no-untyped-def]
    status, _, stderr = invoke("run", str(small_folder), "--k", "2", "--seed", seed, "--out", str(tmp_path / "s"))
    assert status == 1
    assert one_error_line(stderr) == (
        f"pilewise: error: --seed={seed} is out of range; use a value from 0 to 4294967295")
    assert not (tmp_path / "s" / "runs").exists()


def test_seed_range_is_numpys() -> None:
    # numpy's legacy RandomState (used by scikit-learn's random_state) takes 0 .. 2**32 - 1 (numpy docs)
    np.random.RandomState(2**32 - 1)
    with pytest.raises(ValueError):
        np.random.RandomState(2**32)
    with pytest.raises(ValueError):
        np.random.RandomState(-1)


def test_highest_seed_is_accepted(small_folder: Path, tmp_path: Path) -> None:
    status, stdout, stderr = run_cli("run", str(small_folder), "--k", "2", "--seed", "4294967295",
                                     "--out", str(tmp_path / "s"), "--quiet")
    assert status == 0, stderr
    assert stdout.strip() == str(tmp_path / "s" / "runs" / "k2" / "index.html")


@pytest.mark.parametrize("k", ["²", "٣", "３"])
def test_k_with_non_ascii_digits(small_folder: Path, tmp_path: Path, k: str) -> None:
    """Regression: '²'.isdigit() is True, and int('²') raised a ValueError (a traceback)."""
    assert k.isdigit()  # the trap: Python calls these digits (str.isdigit docs)
    status, _, stderr = run_cli("run", str(small_folder), "--k", k, "--out", str(tmp_path / "s"))
    assert status == 1
    assert one_error_line(stderr) == (
        f"pilewise: error: --k {k!r} is neither a number of clusters nor 'auto'; pass --k 8 or --k auto")


def test_every_problem_at_once(small_folder: Path, tmp_path: Path) -> None:
    status, _, stderr = run_cli("run", str(small_folder), "--k", "1", "--seed", "-5", "--max-df", "2",
                                "--out", str(tmp_path / "s"))
    assert status == 1
    assert one_error_line(stderr) == (
        "pilewise: error: --k=1 is out of range; use a value from 2 to 1000; "
        "--seed=-5 is out of range; use a value from 0 to 4294967295; "
        "--max-df=2.0 is out of range; use a share above 0 and at most 1")


@BOTH
@pytest.mark.parametrize("args", [(), ("--help",), ("run", "--help")])
def test_help_still_succeeds(invoke, args: tuple[str, ...]) -> None:  # type: ignore[no-untyped-def]
    status, stdout, stderr = invoke(*args)
    assert status == 0, stderr
    assert "Usage:" in stdout and "error" not in stderr


def test_main_exits_with_status_one(monkeypatch: pytest.MonkeyPatch, capsys: pytest.CaptureFixture[str]) -> None:
    """cli.main as the console script calls it, with sys.argv set."""
    monkeypatch.setattr(sys, "argv", ["pilewise", "run", "--zzzz"])
    with pytest.raises(SystemExit) as stop:
        main()
    assert stop.value.code == 1
    assert one_error_line(capsys.readouterr().err) == (
        "pilewise: error: No such option: --zzzz; see 'pilewise run --help'")


def test_unreadable_k_is_reported_with_the_other_problems(small_folder: Path, tmp_path: Path) -> None:
    status, _, stderr = run_cli("run", str(small_folder), "--k", "²", "--k-range", "5:2", "--seed", "-3",
                                "--out", str(tmp_path / "s"))
    assert status == 1
    assert one_error_line(stderr) == (
        "pilewise: error: --k '²' is neither a number of clusters nor 'auto'; pass --k 8 or --k auto; "
        "--k-range '5:2' must have 2 <= LOW < HIGH, for example 2:20; "
        "--seed=-3 is out of range; use a value from 0 to 4294967295")


def test_sweep_reports_an_unreadable_range_with_the_other_problems(small_folder: Path, tmp_path: Path) -> None:
    status, _, stderr = run_cli("sweep", str(small_folder), "--k", "x", "--max-df", "3", "--out", str(tmp_path / "s"))
    assert status == 1
    assert one_error_line(stderr) == (
        "pilewise: error: --k 'x' is not of the form LOW:HIGH, for example 2:20; "
        "--max-df=3.0 is out of range; use a share above 0 and at most 1")


def test_demo_checks_its_options_before_writing_anything(tmp_path: Path) -> None:
    """Regression: `pilewise demo --seed 4294967296` wrote 1,500 demo files, then refused the seed."""
    code, _, stderr = run_cli("demo", "--seed", "4294967296", "--out", str(tmp_path / "site"))
    assert code == 1
    assert one_error_line(stderr) == ("pilewise: error: --seed=4294967296 is out of range; use a value from 0 to "
                                      "4294967295")
    assert not (tmp_path / "site").exists()


def test_quiet_prints_only_the_index_path(small_folder: Path, tmp_path: Path) -> None:
    """--quiet: the index page's path on standard output and nothing on standard error (docs/usage.md)."""
    code, stdout, stderr = run_cli("run", str(small_folder), "--k", "3", "--out", str(tmp_path / "site"), "--quiet")
    assert code == 0
    assert stderr == ""
    assert Path(stdout.strip()) == tmp_path / "site" / "runs" / "k3" / "index.html"
