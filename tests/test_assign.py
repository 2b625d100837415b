"""`pilewise assign`: the saved model (open formats, no pickle, checked versions), placing new documents with
the run's own vocabulary, weights and reduction, the fit of each document, and the folder it writes."""

from __future__ import annotations

import csv
import json
import random
import zipfile
from pathlib import Path

import numpy as np
import pytest
from sklearn.decomposition import TruncatedSVD
from sklearn.feature_extraction.text import TfidfVectorizer
from sklearn.metrics import normalized_mutual_info_score
from sklearn.preprocessing import normalize

from helpers import TOPICS, assert_one_line_error, invoke, read_assignments, read_csv, write_topic_folder
from pilewise.assign.placing import NONE_SHARE_WARNING, known_counts, place, project
from pilewise.assign.saved import MODEL_FORMAT, load_model, major_minor
from pilewise.output.exports import library_versions
from pilewise.vectors.tfidf import tfidf_rows

OTHER_POOL = ["quasar", "nebula", "galaxy", "comet", "telescope", "asteroid", "pulsar", "eclipse"]


def _table(path: Path, texts: list[str]) -> Path:
    with path.open("w", encoding="utf-8", newline="") as handle:
        writer = csv.writer(handle)
        writer.writerow(["id", "text"])
        writer.writerows([f"r{i:03d}", text] for i, text in enumerate(texts))
    return path


def _topic_texts(rng: random.Random, per_topic: int, words: int = 30) -> tuple[list[str], list[str]]:
    texts, labels = [], []
    for topic, pool in TOPICS.items():
        for _ in range(per_topic):
            texts.append(" ".join(rng.choice(pool) for _ in range(words)))
            labels.append(topic)
    return texts, labels


def _run(source: Path, out: Path, *extra: str) -> Path:
    result = invoke("run", str(source), "--k", "3", "--out", str(out), "--quiet", *extra)
    assert result.exit_code == 0, result.stderr
    return out / "runs" / "k3"


@pytest.fixture
def topic_run(tmp_path: Path) -> Path:
    """A run (k=3) on 60 notes of three invented topics."""
    write_topic_folder(tmp_path / "notes")
    return _run(tmp_path / "notes", tmp_path / "site")


def test_assigned_vectors_equal_scikit_learn_with_the_saved_vocabulary_and_svd(tmp_path: Path) -> None:
    # reference: scikit-learn's TfidfVectorizer(vocabulary=..., sublinear_tf=True) fitted on the run's documents
    # gives the run's idf (smooth idf, l2 rows), and TruncatedSVD.transform with the saved components
    # gives the projection; both to 1e-9
    rng = random.Random(4)
    texts, _ = _topic_texts(rng, 20)
    texts = [t + " " + " ".join(rng.choice(["extra", "words", "here", "there", "maybe"]) for _ in range(3))
             for t in texts]
    run = _run(_table(tmp_path / "train.csv", texts), tmp_path / "site", "--near-duplicate", "1")
    model = load_model(run)
    assert model.lsa is not None  # this size gets LSA (docs/vectorizing.md)
    vocabulary = sorted(model.vocabulary, key=model.vocabulary.__getitem__)
    reference = TfidfVectorizer(analyzer=model.analyzer.terms, vocabulary=vocabulary, sublinear_tf=True).fit(texts)
    np.testing.assert_allclose(model.idf, reference.idf_, rtol=0, atol=1e-9)
    new_texts, _ = _topic_texts(random.Random(9), 4)
    new_texts.append("soil soil soil chain oven and a word the run never saw")
    expected = reference.transform(new_texts)
    ours = tfidf_rows(known_counts(new_texts, model), model.idf)
    np.testing.assert_allclose(ours.toarray(), expected.toarray(), rtol=0, atol=1e-9)
    svd = TruncatedSVD(n_components=model.lsa.shape[0])
    svd.components_ = model.lsa
    rows, known = project(new_texts, model)
    np.testing.assert_allclose(rows, normalize(svd.transform(expected)), rtol=0, atol=1e-9)
    assert known.all()


def test_the_runs_own_documents_go_back_to_their_clusters(tmp_path: Path, topic_run: Path) -> None:
    # k-means ends at a fixed point of Lloyd's algorithm: every text is nearest its own cluster's centroid
    # (Lloyd 1982), so placing the run's documents again gives the run's clusters
    result = invoke("assign", str(topic_run), str(tmp_path / "notes"), "--name", "again", "--quiet")
    assert result.exit_code == 0, result.stderr
    run_rows = {r["doc_id"]: r for r in read_assignments(topic_run)}
    placed = read_csv(tmp_path / "site" / "assigned" / "again" / "assigned.csv")
    assert len(placed) == len(run_rows) == 60
    assert all(r["cluster"] == run_rows[r["doc_id"]]["cluster"] for r in placed)
    assert all(r["cluster_name"] == run_rows[r["doc_id"]]["cluster_name"] for r in placed)
    # the run's own distances come from the LSA fit's own projection; placing uses its transform
    assert max(abs(float(r["distance"]) - float(run_rows[r["doc_id"]]["distance"])) for r in placed) < 1e-3


def test_off_topic_documents_fit_none_and_the_warning_is_said(tmp_path: Path, topic_run: Path) -> None:
    rng = random.Random(7)
    new = tmp_path / "new"
    new.mkdir()
    for topic, pool in TOPICS.items():
        (new / f"{topic}.txt").write_text(f"More on {topic}\n" + " ".join(rng.choice(pool) for _ in range(30)) + "\n",
                                          encoding="utf-8")
    for i in range(4):  # another domain: words the run never saw
        (new / f"sky-{i}.txt").write_text("=HYPERLINK(\"x\")\n" + " ".join(rng.choice(OTHER_POOL) for _ in range(30)),
                                          encoding="utf-8")
    # the three themes in equal parts: far from every centroid, though every word is known
    (new / "blend.txt").write_text("Blend\n" + " ".join(w for ws in zip(*TOPICS.values(), strict=True) for w in ws),
                                   encoding="utf-8")
    result = invoke("assign", str(topic_run), str(new), "--name", "mixed-bag")
    assert result.exit_code == 0, result.stderr
    folder = tmp_path / "site" / "assigned" / "mixed-bag"
    rows = {r["doc_id"]: r for r in read_csv(folder / "assigned.csv")}
    run_cluster = {r["doc_id"].split("-")[0]: r["cluster"] for r in read_assignments(topic_run)}
    for topic in TOPICS:
        assert rows[f"{topic}.txt"]["cluster"] == run_cluster[topic]
        assert rows[f"{topic}.txt"]["fit"] in ("good", "weak")
    for i in range(4):
        assert rows[f"sky-{i}.txt"]["fit"] == "none" and rows[f"sky-{i}.txt"]["cluster"] == ""
        # OWASP CSV Injection guidance: a cell starting with = is written with a leading quote
        assert rows[f"sky-{i}.txt"]["title"] == "'=HYPERLINK(\"x\")"
    assert rows["blend.txt"]["fit"] == "none" and rows["blend.txt"]["cluster"] != ""
    share = 5 / 8
    assert share > NONE_SHARE_WARNING
    warning = (f"{share:.0%} of these documents fit no cluster of run k3: they may hold a theme the run does not "
               "know; consider a new run that includes them")
    assert f"pilewise: warning: {warning}" in result.stderr
    index = (folder / "index.html").read_text(encoding="utf-8")
    assert warning in index and "4 of the none hold no word the run knows" in index
    page = (folder / "cluster-00.html").read_text(encoding="utf-8")
    assert "New members, nearest the centroid first" in page
    assert read_csv(folder / "ingest-report.csv")[0].keys() == {"source", "status", "reason", "detail"}
    # no second writer of one name: an existing assignment is never replaced
    again = invoke("assign", str(topic_run), str(new), "--name", "mixed-bag")
    assert_one_line_error(again, f"{folder} already exists; pass another --name")


def test_a_run_is_found_by_its_name_under_out(tmp_path: Path, topic_run: Path) -> None:
    result = invoke("assign", "k3", str(tmp_path / "notes"), "--out", str(tmp_path / "site"), "--quiet")
    assert result.exit_code == 0, result.stderr
    assert Path(result.stdout.strip()).parent.parent == (tmp_path / "site" / "assigned").resolve()
    missing = invoke("assign", "k9", str(tmp_path / "notes"), "--out", str(tmp_path / "site"))
    assert_one_line_error(missing, f"run 'k9' is neither a run folder nor a run under {tmp_path / 'site' / 'runs'}; "
                                   "pass a run's folder, e.g. pilewise-site/runs/k5")


def test_the_model_holds_no_pickle_and_loads_without_it(topic_run: Path) -> None:
    path = topic_run / "model" / "arrays.npz"
    # numpy's format: an .npz is a zip of .npy members; allow_pickle=False loads every one (numpy docs, np.load)
    with zipfile.ZipFile(path) as archive:
        assert sorted(archive.namelist()) == sorted(f"{n}.npy" for n in
                                                    ("idf", "lsa", "centroids", "distance_quantiles", "members"))
    with np.load(path, allow_pickle=False) as data:
        arrays = {name: data[name] for name in data.files}
    assert all(array.dtype.kind in "fiu" for array in arrays.values())
    document = json.loads((topic_run / "model" / "model.json").read_text(encoding="utf-8"))
    assert document["format"] == MODEL_FORMAT and document["assignable"] is True
    assert len(document["vocabulary"]) == arrays["idf"].size > 0
    assert arrays["centroids"].shape[0] == len(document["clusters"]) == 3
    assert set(document["libraries"]) >= {"pilewise", "numpy", "scipy", "scikit-learn"}


def _edit_model(run: Path, change: dict[str, object]) -> None:
    path = run / "model" / "model.json"
    document = json.loads(path.read_text(encoding="utf-8"))
    document.update(change)
    path.write_text(json.dumps(document), encoding="utf-8")


def test_another_format_version_is_refused(tmp_path: Path, topic_run: Path) -> None:
    _edit_model(topic_run, {"format": MODEL_FORMAT + 1})
    result = invoke("assign", str(topic_run), str(tmp_path / "notes"))
    assert_one_line_error(result, f"{topic_run / 'model' / 'model.json'} has model format {MODEL_FORMAT + 1} and this "
                                  f"pilewise reads format {MODEL_FORMAT}; re-run `pilewise run` on the collection to "
                                  "save a model this pilewise reads")


def test_another_library_version_is_refused(tmp_path: Path, topic_run: Path) -> None:
    versions = library_versions()
    _edit_model(topic_run, {"libraries": {**versions, "scikit-learn": "0.1.0"}})
    result = invoke("assign", str(topic_run), str(tmp_path / "notes"))
    assert_one_line_error(result, f"run k3 was saved with scikit-learn 0.1.0 and this installation has scikit-learn "
                                  f"{versions['scikit-learn']}; another scikit-learn version may place documents "
                                  "differently, so install scikit-learn 0.1 or re-run `pilewise run` here")
    assert major_minor("1.5.2") == "1.5"


def test_an_object_array_is_refused_unread(tmp_path: Path, topic_run: Path) -> None:
    path = topic_run / "model" / "arrays.npz"
    with np.load(path, allow_pickle=False) as data:
        arrays = {name: data[name] for name in data.files}
    arrays["idf"] = np.array([{"a": 1}], dtype=object)  # np.save pickles object arrays
    np.savez(path, **arrays)  # type: ignore[arg-type]
    result = invoke("assign", str(topic_run), str(tmp_path / "notes"))
    assert_one_line_error(result, f"{path} holds an object array (idf) that only pickle can load, and pilewise never "
                                  "loads pickle; re-run `pilewise run` on the collection to save a model this "
                                  "pilewise reads")


def test_a_missing_or_damaged_model_is_one_line(tmp_path: Path, topic_run: Path) -> None:
    (topic_run / "model" / "arrays.npz").write_bytes(b"not a zip")
    result = invoke("assign", str(topic_run), str(tmp_path / "notes"))
    assert_one_line_error(result, f"{topic_run / 'model' / 'arrays.npz'} is missing or is not an .npz archive of "
                                  "arrays; re-run `pilewise run` on the collection to save a model this pilewise "
                                  "reads")
    (topic_run / "model" / "model.json").unlink()
    result = invoke("assign", str(topic_run), str(tmp_path / "notes"))
    assert_one_line_error(result, f"{topic_run} has no saved model (model/model.json is missing); re-run `pilewise "
                                  "run` on the collection to save one")


def test_a_streamed_run_says_why_it_cannot_be_assigned_to(tmp_path: Path) -> None:
    write_topic_folder(tmp_path / "notes")
    run = _run(tmp_path / "notes", tmp_path / "site", "--mode", "stream")
    result = invoke("assign", str(run), str(tmp_path / "notes"))
    assert_one_line_error(result, "run k3 was streamed (--mode stream): its terms were counted in a hashed "
                                  "vocabulary, which pilewise does not save for assignment; re-run it with --mode "
                                  "memory to assign documents to it")


def test_phrases_in_the_space_are_counted_as_the_run_counts_them(tmp_path: Path) -> None:
    # independent count: Analyzer.phrases (the run's phrase list per text) against the columns placing counts
    rng = random.Random(11)
    texts, _ = _topic_texts(rng, 15, words=20)
    texts = [t.replace(" ", ". ", 2) for t in texts]  # punctuation breaks phrases
    run = _run(_table(tmp_path / "train.csv", texts), tmp_path / "site", "--phrases-in-space", "--near-duplicate", "1")
    model = load_model(run)
    assert model.phrases
    counts = known_counts(texts, model).toarray()
    for row, text in zip(counts, texts, strict=True):
        expected = np.zeros(len(model.vocabulary))
        for term in model.analyzer.terms(text) + model.analyzer.phrases(text):
            if term in model.vocabulary:
                expected[model.vocabulary[term]] += 1
        np.testing.assert_array_equal(row, expected)
    placement = place(texts, model)
    assert set(placement.fit) <= {"good", "weak", "none"}


@pytest.mark.corpus
@pytest.mark.parametrize("loader", ["load_mini_newsgroups", "load_reuters_sample"])
def test_held_out_documents_are_placed_about_as_well_as_the_run_clusters(tmp_path: Path, loader: str) -> None:
    # Open corpora (tests/open_sets.py): 20 Newsgroups sample (alt.atheism, sci.space; 200 posts) and the
    # Reuters-21578 sample (acq, crude; 70). Run on a seeded 70%, place the other 30%; NMI against the labels
    # (scikit-learn) of the placed documents against the run's own NMI. Measured over split seeds 0-3: the
    # placed documents' NMI was 0.02 to 0.25 above the run's own at min_df 2 (newsgroups 0.53 -> 0.66 at seed
    # 0, Reuters 0.53 -> 0.63). With the default min_df of 3 for long texts (docs/vectorizing.md) the
    # newsgroups runs improve and the 60 placed posts swing around them: placed minus own -0.14 (seed 0:
    # 0.79 -> 0.64), +0.25, +0.11, +0.07, so "no more than 0.15 below" is the floor the measurements support.
    open_sets = pytest.importorskip("open_sets")
    try:
        collection = getattr(open_sets, loader)()
    except FileNotFoundError as err:
        pytest.skip(str(err))
    k = len(set(collection.labels))
    order = list(range(len(collection.texts)))
    random.Random(0).shuffle(order)
    cut = int(0.7 * len(order))
    truth: dict[str, str] = {}

    def table(path: Path, rows: list[int]) -> Path:
        with path.open("w", encoding="utf-8", newline="") as handle:
            writer = csv.writer(handle)
            writer.writerow(["doc_id", "title", "text"])
            for i in rows:
                writer.writerow([f"d{i:04d}", collection.titles[i], collection.texts[i]])
                truth[f"d{i:04d}"] = collection.labels[i]
        return path

    run = tmp_path / "site" / "runs" / f"k{k}"
    result = invoke("run", str(table(tmp_path / "train.csv", order[:cut])), "--k", str(k), "--out",
                    str(tmp_path / "site"), "--quiet")
    assert result.exit_code == 0, result.stderr
    own = read_assignments(run)
    run_nmi = normalized_mutual_info_score([truth[r["doc_id"]] for r in own], [r["cluster"] for r in own])
    result = invoke("assign", str(run), str(table(tmp_path / "held.csv", order[cut:])), "--name", "held", "--quiet")
    assert result.exit_code == 0, result.stderr
    placed = read_csv(tmp_path / "site" / "assigned" / "held" / "assigned.csv")
    assert len(placed) == len(order) - cut
    placed_nmi = normalized_mutual_info_score([truth[r["doc_id"]] for r in placed], [r["cluster"] for r in placed])
    assert placed_nmi >= run_nmi - 0.15
    # documents of the run's own domain: hardly any fits none, and no warning
    assert sum(r["fit"] == "none" for r in placed) / len(placed) <= NONE_SHARE_WARNING
