"""A run's saved model: what `pilewise assign` needs to place new documents in the run's clusters.

Written into the run folder as `model/arrays.npz` (numpy arrays, loaded with ``allow_pickle=False``) and
`model/model.json` (vocabulary, settings, versions, clusters): open formats, no pickle, nothing
executable. docs/outputs.md describes every field.
"""

from __future__ import annotations

import json
import zipfile
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from pilewise.errors import PilewiseError
from pilewise.ingest.dedup import Boilerplate
from pilewise.model import RunResult
from pilewise.output.exports import library_versions
from pilewise.vectors.text import BREAK_PATTERN, TOKEN_PATTERN, Analyzer

MODEL_FORMAT = 1  # raised whenever a field changes meaning; a model of another format is refused
MODEL_FOLDER = "model"
# libraries whose major.minor version must match: numpy, scipy and scikit-learn do the arithmetic of the
# vectors and centroids; nltk's Snowball stemmer makes the terms when the run stems
CHECKED_LIBRARIES = ("numpy", "scipy", "scikit-learn")
STEMMER_LIBRARY = "nltk"
# quantiles of the run's own member distances kept per cluster (columns of `distance_quantiles`)
QUANTILES = (0.5, 0.9, 0.99, 1.0)
ARRAYS = ("idf", "lsa", "centroids", "distance_quantiles", "members")
STREAMED = ("run {run} was streamed (--mode stream): its terms were counted in a hashed vocabulary, which "
            "pilewise does not save for assignment; re-run it with --mode memory to assign documents to it")


def save_model(folder: Path, result: RunResult) -> None:
    """Write `folder`/model/: arrays.npz and model.json of the finished run `result`.

    A streamed run (hashed vocabulary) gets a model.json that says why it cannot be assigned to.
    """
    model = folder / MODEL_FOLDER
    model.mkdir()
    vectors = result.vectors
    document: dict[str, Any] = {
        "format": MODEL_FORMAT,
        "tool": "pilewise",
        "run": result.name,
        "libraries": library_versions(),
    }
    if "hashed_columns" in vectors.facts or vectors.idf is None or vectors.space_columns is None:
        document["assignable"] = False
        document["reason"] = STREAMED.format(run=result.name)
        _write_json(model / "model.json", document)
        return
    labels, copies, k = result.clustering.labels, result.collection.copies, result.k
    quantiles = np.zeros((k, len(QUANTILES)))
    for c in range(k):  # every document counts, copies too (the run's own distance distribution)
        member = labels == c
        quantiles[c] = np.quantile(np.repeat(result.clustering.distances[member], copies[member]), QUANTILES)
    lsa = vectors.lsa if vectors.lsa is not None else np.zeros((0, vectors.idf.size))
    write_npz(model / "arrays.npz", {
        "idf": np.asarray(vectors.idf, dtype=np.float64), "lsa": np.asarray(lsa, dtype=np.float64),
        "centroids": np.asarray(result.clustering.centroids, dtype=np.float64), "distance_quantiles": quantiles,
        "members": np.bincount(labels, weights=copies, minlength=k).astype(np.int64)})
    options, analyzer = result.options, result.analyzer
    document.update({
        "assignable": True,
        "vocabulary": [vectors.terms[i] for i in vectors.space_columns],
        "analyzer": {
            "lowercase": True, "token_pattern": TOKEN_PATTERN, "break_pattern": BREAK_PATTERN,
            "stop_words": sorted(analyzer.stop_words), "stem": analyzer.stem,
            "stemmer": "nltk SnowballStemmer('english')" if analyzer.stem else None,
            "phrases": bool(vectors.is_phrase[vectors.space_columns].any()),
            "min_word_chars": 2, "possessive_s": "dropped",
        },
        "weighting": {
            "min_df": vectors.facts.get("min_df"), "max_df": vectors.facts.get("max_df"),
            "sublinear_tf": True, "idf": "smooth: ln((1 + n) / (1 + df)) + 1", "normalization": "l2",
            "lsa_components": int(lsa.shape[0]), "lsa_rows_normalization": "l2",
        },
        "reading": {"redact": options.redact, "boilerplate": [list(line) for line in result.boilerplate.lines],
                    "boilerplate_min_share": result.boilerplate.min_share,
                    "boilerplate_texts": result.boilerplate.texts},
        "distance": "cosine distance to the unit-length centroid",
        "distance_quantiles": list(QUANTILES),
        "clusters": [{"id": c.cluster_id, "name": result.naming.clusters[c.cluster_id].shown,
                      "headline": c.headline} for c in result.clusters],
    })
    _write_json(model / "model.json", document)


def write_npz(path: Path, arrays: dict[str, np.ndarray]) -> None:
    """An .npz file as `np.savez` writes it (one .npy member per array, numpy's format), but with a fixed
    timestamp on every member, so that equal runs give equal bytes (np.savez stamps the current time)."""
    with zipfile.ZipFile(path, "w", compression=zipfile.ZIP_STORED) as archive:
        for name, array in arrays.items():
            member = zipfile.ZipInfo(f"{name}.npy", date_time=(1980, 1, 1, 0, 0, 0))
            with archive.open(member, "w", force_zip64=True) as handle:
                np.lib.format.write_array(handle, np.ascontiguousarray(array), allow_pickle=False)


def _write_json(path: Path, document: dict[str, Any]) -> None:
    path.write_text(json.dumps(document, indent=1, ensure_ascii=False) + "\n", encoding="utf-8")


@dataclass(frozen=True)
class SavedModel:
    """A run's model as loaded and checked: everything `placing` needs.

    Attributes
    ----------
    vocabulary : dict of str to int
        Term -> column of the run's space (phrases hold one space).
    idf : ndarray, shape (n_terms,)
    lsa : ndarray, shape (n_dims, n_terms), or None when the run clustered the TF-IDF itself
    centroids : ndarray, shape (k, n_dims)
        Unit-length centroids in the run's space.
    distance_quantiles : ndarray, shape (k, len(QUANTILES))
        Quantiles of every cluster's own member distances.
    """

    run: str
    folder: Path
    vocabulary: dict[str, int]
    phrases: bool
    analyzer: Analyzer
    idf: np.ndarray
    lsa: np.ndarray | None
    centroids: np.ndarray
    distance_quantiles: np.ndarray
    members: np.ndarray
    cluster_names: tuple[str, ...]
    headlines: tuple[str, ...]
    redact: bool
    boilerplate: Boilerplate


REWRITE = "re-run `pilewise run` on the collection to save a model this pilewise reads"


def _damaged(path: Path, problem: str) -> PilewiseError:
    return PilewiseError(f"{path} {problem}; {REWRITE}")


def major_minor(version: str) -> str:
    """'1.5.2' -> '1.5' (the part of a version that may change results)."""
    return ".".join(version.split(".")[:2])


def load_model(run_folder: Path) -> SavedModel:
    """Read and check `run_folder`/model/: format, library versions, arrays without pickle, shapes.

    Raises
    ------
    PilewiseError
        One line naming what is wrong and the fix: model missing or damaged, another format, another
        major.minor version of a library that computes the vectors, an array that needs pickle.
    """
    folder = run_folder / MODEL_FOLDER
    json_path, arrays_path = folder / "model.json", folder / "arrays.npz"
    if not json_path.is_file():
        raise PilewiseError(f"{run_folder} has no saved model ({MODEL_FOLDER}/model.json is missing); re-run "
                            "`pilewise run` on the collection to save one")
    document = _read_json(json_path)
    if document.get("format") != MODEL_FORMAT:
        raise PilewiseError(f"{json_path} has model format {document.get('format')!r} and this pilewise reads format "
                            f"{MODEL_FORMAT}; {REWRITE}")
    if document.get("assignable") is not True:
        raise PilewiseError(str(document.get("reason") or f"{json_path} says the run cannot be assigned to"))
    try:
        analyzer_doc, reading, clusters = document["analyzer"], document["reading"], document["clusters"]
        vocabulary = {str(term): i for i, term in enumerate(document["vocabulary"])}
        _check_versions(document["libraries"], stem=bool(analyzer_doc["stem"]), run=str(document["run"]))
        if (analyzer_doc["token_pattern"], analyzer_doc["break_pattern"]) != (TOKEN_PATTERN, BREAK_PATTERN):
            raise PilewiseError(f"{json_path} was saved by a pilewise that reads words differently; {REWRITE}")
        analyzer = Analyzer(stop_words=frozenset(map(str, analyzer_doc["stop_words"])), stem=bool(analyzer_doc["stem"]))
        boilerplate = Boilerplate(tuple((str(line), int(n)) for line, n in reading["boilerplate"]),
                                  float(reading["boilerplate_min_share"]), int(reading["boilerplate_texts"]))
        names = tuple(str(c["name"]) for c in clusters)
        headlines = tuple(str(c["headline"]) for c in clusters)
    except (KeyError, TypeError, ValueError) as err:
        raise _damaged(json_path, f"lacks a field or holds a wrong value ({err})") from None
    arrays = _read_arrays(arrays_path)
    idf, lsa, centroids = arrays["idf"], arrays["lsa"], arrays["centroids"]
    k, dims = len(names), (lsa.shape[0] if lsa.size else idf.size)
    if (idf.shape != (len(vocabulary),) or (lsa.size and lsa.shape != (dims, idf.size))
            or centroids.shape != (k, dims) or arrays["distance_quantiles"].shape != (k, len(QUANTILES))
            or arrays["members"].shape != (k,)):
        raise _damaged(arrays_path, "holds arrays whose shapes do not match model.json")
    return SavedModel(
        run=str(document["run"]), folder=run_folder, vocabulary=vocabulary, phrases=bool(analyzer_doc["phrases"]),
        analyzer=analyzer, idf=idf, lsa=lsa if lsa.size else None, centroids=centroids,
        distance_quantiles=arrays["distance_quantiles"], members=arrays["members"], cluster_names=names,
        headlines=headlines, redact=bool(reading["redact"]), boilerplate=boilerplate,
    )


def _read_json(path: Path) -> dict[str, Any]:
    try:
        document = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, UnicodeDecodeError, ValueError) as err:
        raise _damaged(path, f"cannot be read ({err.__class__.__name__})") from None
    if not isinstance(document, dict):
        raise _damaged(path, "is not a JSON object")
    return document


def _read_arrays(path: Path) -> dict[str, np.ndarray]:
    """Every array of arrays.npz, loaded without pickle; an object array is refused, never unpickled."""
    found: dict[str, np.ndarray] = {}
    if not zipfile.is_zipfile(path):  # np.load would take any other file for a pickle, and refuse it as such
        raise _damaged(path, "is missing or is not an .npz archive of arrays")
    try:
        with np.load(path, allow_pickle=False) as data:
            for name in ARRAYS:
                try:
                    array = data[name]
                except ValueError:  # numpy: "Object arrays cannot be loaded when allow_pickle=False"
                    raise PilewiseError(f"{path} holds an object array ({name}) that only pickle can load, and "
                                        f"pilewise never loads pickle; {REWRITE}") from None
                if array.dtype.kind not in "fiu":
                    raise _damaged(path, f"holds {name} as {array.dtype}, not numbers")
                found[name] = array
    except KeyError as err:
        raise _damaged(path, f"lacks the array {err}") from None
    except (OSError, zipfile.BadZipFile, EOFError, ValueError) as err:
        raise _damaged(path, f"cannot be read ({err.__class__.__name__})") from None
    return found


def _check_versions(saved: dict[str, str], *, stem: bool, run: str) -> None:
    """Refuse another major.minor version of a library that computes the vectors (which one, and the fix)."""
    now = library_versions()
    for name in (*CHECKED_LIBRARIES, *((STEMMER_LIBRARY,) if stem else ())):
        then = str(saved.get(name, "unknown"))
        if major_minor(then) != major_minor(now.get(name, "not installed")):
            raise PilewiseError(
                f"run {run} was saved with {name} {then} and this installation has {name} {now.get(name)}; "
                f"another {name} version may place documents differently, so install {name} {major_minor(then)} "
                "or re-run `pilewise run` here"
            )
