"""The package's layering: a stage imports only base modules and its own or lower stages.

Stages, lowest first: ingest < vectors < clustering < describe < output (DEVELOPERS.md, "Architecture").
Base modules (errors, model, progress, csvcells) may be imported by any module; they import only other
base modules, except for annotations under ``typing.TYPE_CHECKING``. The top level (cli, pipeline,
options, the package's ``__init__``/``__main__``, the demo generator, the assign command and the Spark
engine) may import
anything. Imports are read with the standard library's ``ast`` module, so lazy imports inside functions count too.
"""

from __future__ import annotations

import ast
from collections.abc import Iterator
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "src" / "pilewise"
STAGES = ("ingest", "vectors", "clustering", "describe", "output")
BASE = frozenset({"errors", "model", "progress", "csvcells", "cores"})


def module_name(path: Path) -> str:
    """Dotted name of a module file under src/pilewise (a package's ``__init__`` is the package)."""
    parts = path.relative_to(PACKAGE.parent).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def _type_checking_blocks(tree: ast.Module) -> set[int]:
    """ids of the import nodes inside ``if TYPE_CHECKING:`` blocks."""
    inside: set[int] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.If) and "TYPE_CHECKING" in ast.unparse(node.test):
            inside.update(id(child) for stmt in node.body for child in ast.walk(stmt))
    return inside


def imported_modules(source: str, module: str, is_package: bool) -> Iterator[tuple[str, bool, int]]:
    """Every pilewise module imported by `source`: (dotted name, under TYPE_CHECKING, line)."""
    tree = ast.parse(source)
    typing_only = _type_checking_blocks(tree)
    here = module.split(".") if is_package else module.split(".")[:-1]
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names = [alias.name for alias in node.names]
        elif isinstance(node, ast.ImportFrom):
            base = node.module or ""
            if node.level:  # relative: resolved against the importing module's package
                anchor = here[: len(here) - node.level + 1]
                base = ".".join([*anchor, base] if base else anchor)
            # `from pilewise.x import y` may name a submodule y; count both, the stricter one decides
            names = [base] + [f"{base}.{alias.name}" for alias in node.names]
        else:
            continue
        for name in names:
            if name == "pilewise" or name.startswith("pilewise."):
                yield name, id(node) in typing_only, node.lineno


def layer(name: str) -> tuple[str, int | None]:
    """("base" | "stage" | "top", rank of the stage) of a dotted pilewise name."""
    parts = name.split(".")
    if len(parts) < 2:
        return "top", None
    if parts[1] in STAGES:
        return "stage", STAGES.index(parts[1])
    if parts[1] in BASE:
        return "base", None
    return "top", None


def violations(source: str, module: str, is_package: bool = False) -> list[str]:
    """The imports of `module` that break the layering, one line each."""
    kind, rank = layer(module)
    found: dict[int, str] = {}  # one line per import statement
    for name, typing_only, line in imported_modules(source, module, is_package):
        if not _known(name):
            continue  # `from pilewise.x import SomeClass`: the class name is no module
        target, target_rank = layer(name)
        if kind == "top" or target == "base" or name == "pilewise":
            bad = False
        elif kind == "base":
            bad = not typing_only
        else:
            bad = target == "top" or (target_rank is not None and rank is not None and target_rank > rank)
        if bad:
            found.setdefault(line, f"{module}:{line} imports {name}")
    return list(found.values())


def _known(name: str) -> bool:
    """Whether a dotted name is a module or package of src/pilewise."""
    relative = Path(*name.split(".")[1:]) if "." in name else Path()
    return (PACKAGE / relative).with_suffix(".py").is_file() or (PACKAGE / relative / "__init__.py").is_file()


def test_every_module_imports_only_downward() -> None:
    problems = []
    for path in sorted(PACKAGE.rglob("*.py")):
        name = module_name(path)
        problems += violations(path.read_text(encoding="utf-8"), name, path.name == "__init__.py")
    assert problems == []


def test_every_module_sits_in_a_known_place() -> None:
    # a new top-level module must be placed on purpose: as a base module, at the top, or in a stage
    top = {"__init__", "__main__", "cli", "pipeline", "options"} | BASE
    loose = {p.stem for p in PACKAGE.glob("*.py")} - top
    folders = {p.name for p in PACKAGE.iterdir() if p.is_dir() and (p / "__init__.py").is_file()}
    assert loose == set()
    assert folders == set(STAGES) | {"demo", "assign", "engines"}


@pytest.mark.parametrize(
    ("module", "source", "expected"),
    [
        # a lower stage importing a higher one: the violation this test exists for
        ("pilewise.ingest.redact", "from pilewise.vectors.text import Analyzer\n", 1),
        ("pilewise.vectors.streaming", "import pilewise.describe.summaries\n", 1),
        ("pilewise.describe.names", "from pilewise.output import outfolder\n", 1),
        ("pilewise.output.exports", "def f():\n    from pilewise.pipeline import run_collection\n", 1),
        ("pilewise.output.exports", "from typing import TYPE_CHECKING\nif TYPE_CHECKING:\n"
         "    from pilewise.pipeline import RunOutcome\n", 1),
        ("pilewise.model", "from pilewise.clustering.kmeans import Clustering\n", 1),
        ("pilewise.clustering.sweep", "from ..describe import stats\n", 1),
        # allowed: downward, same stage, base, top level, and annotations of base modules
        ("pilewise.describe.kwic", "from pilewise.ingest.redact import display_text\n", 0),
        ("pilewise.clustering.sweep", "from pilewise.clustering.quality import assess\n", 0),
        ("pilewise.ingest.reading", "from pilewise.model import Document\nfrom pilewise.progress import Reporter\n", 0),
        ("pilewise.pipeline", "from pilewise.output.site import render_run_site\n", 0),
        ("pilewise.model", "from typing import TYPE_CHECKING\nif TYPE_CHECKING:\n"
         "    from pilewise.clustering.kmeans import Clustering\n", 0),
    ],
)
def test_the_rule_catches_upward_imports(module: str, source: str, expected: int) -> None:
    assert len(violations(source, module)) == expected
