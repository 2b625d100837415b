"""Safety of the output folder: what pilewise owns there, locks on names, safe paths.

pilewise writes into a folder the user names (--out). It marks every folder it writes (the site
folder and each run, sweep and comparison folder) with a small `.pilewise` file and replaces or
rewrites only folders and pages that carry that mark (or that an earlier pilewise wrote, recognized by
its exports). Writers of one name take an exclusive lock, so that two runs cannot interleave. CSV
cells escaped against spreadsheet formulas live in `pilewise.csvcells`, a base module that the
describe stage (names.csv, compare) can import too.
"""

from __future__ import annotations

import errno
import fcntl
import hashlib
import json
import os
import re
import tempfile
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import IO, Any

from pilewise.errors import PilewiseError

MARKER = ".pilewise"
MARKER_FORMAT = 1
LOCKS = ".pilewise-locks"
SITE_FILES = ("index.html", "pilewise.css")  # what pilewise (re)writes at the top of OUT
SITE_FOLDERS = ("runs", "sweeps", "compare")
NAME_MAX = 60  # characters of one path part built from a recorded name
# Files by which folders written by an earlier pilewise (before the marker existed) are recognized.
LEGACY_EXPORTS = {"runs": "manifest.json", "sweeps": "sweep.json", "compare": "compare.json"}

_UNSAFE_CHARS = re.compile(r"[^A-Za-z0-9._-]+")


# --- names used in paths -------------------------------------------------------------------------

def safe_name(name: str) -> str:
    """A folder name made from a recorded name: letters, digits, '-', '_' and '.', no leading dot, no '..'.

    A name that had to change (or was too long) gets a short hash of the original, so that two different
    names never share a folder.
    """
    safe = _UNSAFE_CHARS.sub("_", name)
    safe = re.sub(r"\.{2,}", "_", safe).lstrip("._-")
    if safe == name and 0 < len(safe) <= NAME_MAX:
        return safe
    digest = hashlib.sha256(name.encode("utf-8", "surrogatepass")).hexdigest()[:8]
    return f"{safe[: NAME_MAX - 9] or 'run'}-{digest}"


def inside(out: Path, path: Path) -> Path:
    """`path`, after checking that it resolves to a place under `out` (nothing is written elsewhere)."""
    if not path.resolve().is_relative_to(out.resolve()):
        raise PilewiseError(f"{path} lies outside --out {out}; pass run folders with plain names")
    return path


# --- ownership markers ---------------------------------------------------------------------------

def mark(folder: Path) -> None:
    """Write the marker that says pilewise owns `folder`."""
    record = {"tool": "pilewise", "format": MARKER_FORMAT}
    (folder / MARKER).write_text(json.dumps(record) + "\n", encoding="utf-8")


def is_marked(folder: Path) -> bool:
    try:
        record = json.loads((folder / MARKER).read_text(encoding="utf-8"))
    except (OSError, ValueError, UnicodeDecodeError):
        return False
    return isinstance(record, dict) and record.get("tool") == "pilewise"


def is_legacy(folder: Path, kind: str) -> bool:
    """Whether an unmarked folder under OUT/`kind` holds the exports an earlier pilewise wrote there."""
    try:
        document = json.loads((folder / LEGACY_EXPORTS[kind]).read_text(encoding="utf-8"))
    except (OSError, ValueError, UnicodeDecodeError):
        return False
    if not isinstance(document, dict):
        return False
    if kind == "runs":
        return document.get("tool") == "pilewise"
    if kind == "sweeps":
        return {"recommended_k", "points", "rule"} <= document.keys()
    return {"runs", "agreement", "contingency"} <= document.keys()


def owned(folder: Path, kind: str) -> bool:
    """Whether pilewise may replace `folder` (a run, sweep or comparison folder of kind `kind`)."""
    return folder.is_dir() and (is_marked(folder) or is_legacy(folder, kind))


def claim_site(out: Path) -> None:
    """Check that pilewise may write OUT's pages, then mark OUT as a pilewise site.

    A missing or empty OUT is fine, and so is OUT written by pilewise (the marker, or, from an earlier
    version, a runs/sweeps/compare folder holding pilewise exports). An unmarked OUT whose index.html,
    stylesheet or runs/sweeps/compare entries pilewise did not write is refused before any work starts.
    """
    if out.exists() and not out.is_dir():
        raise PilewiseError(f"--out {out} is a file; choose a folder (new or empty) for the site")
    if out.is_dir() and not is_marked(out):
        foreign = _foreign_entries(out)
        if foreign:
            raise PilewiseError(
                f"--out {out} holds files pilewise did not write ({', '.join(foreign)}); choose a new or empty "
                "folder, or move those files away"
            )
    out.mkdir(parents=True, exist_ok=True)
    if not is_marked(out):
        mark(out)


def _foreign_entries(out: Path) -> list[str]:
    """Entries of an unmarked OUT that pilewise would overwrite but did not write."""
    ours = [folder for kind in SITE_FOLDERS if (out / kind).is_dir()
            for folder in (out / kind).iterdir() if owned(folder, kind)]
    foreign: list[str] = []
    for name in SITE_FILES:
        if (out / name).exists() and not ours:  # an earlier pilewise site has runs beside its index
            foreign.append(name)
    for kind in SITE_FOLDERS:
        path = out / kind
        if path.exists() and not path.is_dir():
            foreign.append(kind)
        elif path.is_dir():
            foreign.extend(f"{kind}/{entry.name}" for entry in sorted(path.iterdir())
                           if not entry.name.startswith(".") and not owned(entry, kind))
    return foreign[:3] + ([f"{len(foreign) - 3} more"] if len(foreign) > 3 else [])


def check_replaceable(folder: Path, kind: str, option: str) -> None:
    """Refuse to replace an existing OUT/`kind`/NAME that pilewise did not write; `option` names the fix."""
    if folder.is_symlink() or (folder.exists() and not owned(folder, kind)):
        raise PilewiseError(
            f"{folder} holds files pilewise did not write; {option}, or move that folder away"
        )


# --- locks ---------------------------------------------------------------------------------------

@contextmanager
def name_lock(folder: Path, *, what: str, wait: bool = False) -> Iterator[None]:
    """Hold an exclusive lock on OUT/`kind`/NAME (file OUT/.pilewise-locks/`kind`-NAME.lock), or refuse at once.

    With `wait`, wait for the other writer instead (for a name known only after the computation). The
    lock (fcntl.flock) is released by the system when the process ends, so a killed run never leaves a
    stale lock behind.
    """
    with _open_lock(folder.parent.parent, f"{folder.parent.name}-{folder.name}") as handle:
        try:
            fcntl.flock(handle, fcntl.LOCK_EX if wait else fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            raise PilewiseError(
                f"another pilewise is writing {folder} right now; wait for it to finish or pass another {what}"
            ) from None
        yield


@contextmanager
def site_lock(out: Path) -> Iterator[None]:
    """Wait for, then hold, the site's own lock: pages that list every run are written one writer at a time."""
    with _open_lock(out, "site") as handle:
        fcntl.flock(handle, fcntl.LOCK_EX)
        yield


@contextmanager
def _open_lock(out: Path, name: str) -> Iterator[IO[Any]]:
    """Lock files live in one hidden folder of OUT, out of the way of the listings of runs."""
    (out / LOCKS).mkdir(parents=True, exist_ok=True)
    with (out / LOCKS / f"{name}.lock").open("a+b") as handle:
        yield handle


# --- errors of the file system -------------------------------------------------------------------

_FIXES = {
    errno.ENOSPC: "free space or choose another --out",
    errno.EDQUOT: "free space or choose another --out",
    errno.EROFS: "choose a folder you can write to with --out",
    errno.EACCES: "choose a folder you can write to with --out",
    errno.EPERM: "choose a folder you can write to with --out",
    errno.ENOTDIR: "a part of that path is a file; choose a folder with --out",
    errno.EEXIST: "a part of that path is a file; choose a folder with --out",
}


@contextmanager
def writing_to(out: Path) -> Iterator[None]:
    """Turn an OSError of writing into one line naming --out and the fix (disk full, read-only, ...)."""
    try:
        yield
    except OSError as err:
        reason = err.strerror or str(err)
        fix = _FIXES.get(err.errno or 0, "choose another --out")
        raise PilewiseError(f"cannot write to --out {out}: {reason}; {fix}") from None


def write_text_atomically(path: Path, content: str) -> None:
    """Write a file through a temporary sibling, so that a reader never sees half of it."""
    handle, temporary = tempfile.mkstemp(prefix=f".{path.name}-", dir=path.parent)
    try:
        with os.fdopen(handle, "w", encoding="utf-8") as stream:
            stream.write(content)
        os.chmod(temporary, 0o644)
        os.replace(temporary, path)
    finally:
        if os.path.exists(temporary):
            os.unlink(temporary)
