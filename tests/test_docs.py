"""Docs stay in step with the code: every command, option, output file and JSON key is described."""

from __future__ import annotations

import re
from pathlib import Path

import typer

from helpers import read_clusters, read_manifest
from pilewise.cli import app
from pilewise.output.exports import EXPORT_FILES

ROOT = Path(__file__).resolve().parents[1]


def _doc(name: str) -> str:
    return (ROOT / "docs" / name).read_text(encoding="utf-8")


def test_every_command_and_option_is_in_the_usage_doc() -> None:
    usage = _doc("usage.md")
    command = typer.main.get_command(app)
    commands = getattr(command, "commands", {})
    assert set(commands) == {"run", "demo", "compare", "sweep", "assign"}
    for name, sub in commands.items():
        assert f"## `pilewise {name}" in usage, name
        for param in sub.params:
            if param.param_type_name == "option":
                flag = max(param.opts, key=len)
                if flag != "--help":
                    assert f"`{flag}`" in usage or f"`{flag} /" in usage, (name, flag)


def test_every_export_file_is_in_the_outputs_doc_and_the_readme() -> None:
    outputs = _doc("outputs.md")
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    for name in EXPORT_FILES:
        assert f"`{name}`" in outputs and f"`{name}`" in readme, name


def test_every_clusters_json_key_is_documented(topic_folder: Path, tmp_path: Path) -> None:
    from pilewise.options import RunOptions
    from pilewise.pipeline import run_collection

    outcome = run_collection(RunOptions(source=topic_folder, k=3, out=tmp_path / "site", quiet=True))
    outputs = _doc("outputs.md")
    clusters = read_clusters(outcome.run_folder)
    keys = set(clusters["quality"]) | set(clusters["clusters"][0]) | set(clusters["clusters"][0]["terms"])
    for key in sorted(keys):
        assert re.search(rf"`[\w.]*{re.escape(key)}`", outputs), key
    manifest = read_manifest(outcome.run_folder)
    manifest_keys = set(manifest) | set(manifest["input"]) | set(manifest["vectors"]) | set(manifest["timings_seconds"])
    for key in sorted(manifest_keys):
        assert f"`{key}`" in outputs, key
    written = {p.name for p in outcome.run_folder.iterdir()}
    for name in written - {"docs"}:
        pattern = re.sub(r"\d\d", "NN", name)
        assert f"`{name}`" in outputs or f"`{pattern}`" in outputs, name
