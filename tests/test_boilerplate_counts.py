"""Boilerplate lines that are a text's content stay; figures that count documents count every copy.

Counting copies is checked against scikit-learn's CountVectorizer/TfidfVectorizer run on the full list
of documents, copies included (the reference: pilewise vectorizes each distinct text once and must get
the same document frequencies and idf as if it had vectorized every document).
"""

from __future__ import annotations

import csv
import json
import random
from dataclasses import replace
from pathlib import Path

import numpy as np
import pytest
from sklearn.feature_extraction.text import CountVectorizer, TfidfVectorizer
from sklearn.metrics import normalized_mutual_info_score

from helpers import invoke, read_assignments, read_clusters, read_manifest, write_texts
from pilewise.ingest.dedup import Boilerplate, find_boilerplate, strip_boilerplate, strip_texts
from pilewise.model import Document
from pilewise.options import RunOptions
from pilewise.pipeline import collect_distinct, prepare_collection
from pilewise.progress import Reporter
from pilewise.vectors.text import Analyzer, load_stop_words
from pilewise.vectors.tfidf import VectorSettings, document_frequency, smooth_idf, vectorize

ANALYZER = Analyzer(stop_words=load_stop_words(None), stem=False)


# ---------------------------------------------------------------------------------------------------------------
# Counting copies

def short_answer_collection() -> list[str]:
    """"yes thanks" as 10 identical documents and inside 1 other; the rest varied, one text twice."""
    docs = ["yes thanks"] * 10 + ["yes thanks, the solar panel quote arrived"]
    docs += [f"garden hose {w} leaking at the tap" for w in ("green", "blue", "long", "short")]
    docs += [f"invoice {w} shows the wrong billing address" for w in ("march", "april", "june")]
    docs += ["parcel tracking number never updated"] * 2  # "tracking": one text, two copies
    docs += ["train delay refund form rejected", "train ticket refund still missing"]
    return docs


def vectorize_documents(docs: list[str], settings: VectorSettings):  # type: ignore[no-untyped-def]
    documents = [_doc(i, text) for i, text in enumerate(docs)]
    collection = collect_distinct(documents)
    texts = [docs[i] for i in collection.first_doc_of_text]
    return vectorize(texts, ANALYZER, settings, copies=collection.copies), collection


def _doc(i: int, text: str) -> Document:
    return Document(doc_id=f"d{i}", source="test", title=text[:20], text=text)


def test_document_frequency_counts_every_copy() -> None:
    docs = short_answer_collection()
    vectors, collection = vectorize_documents(docs, VectorSettings(min_df=1, max_df=1.0, lsa_components=0))
    words = ~vectors.is_phrase
    df = document_frequency(vectors.counts, collection.copies)
    column = {t: i for i, t in enumerate(vectors.terms)}
    assert df[column["yes"]] == 11 and df[column["thanks"]] == 11  # 10 identical documents and 1 other
    # reference: CountVectorizer's document frequencies on all 22 documents, copies included
    reference = CountVectorizer(analyzer=ANALYZER.terms).fit(docs)
    ref_df = np.bincount(reference.transform(docs).indices, minlength=len(reference.vocabulary_))
    ref_terms = reference.get_feature_names_out().tolist()
    assert [vectors.terms[i] for i in np.flatnonzero(words)] == ref_terms
    assert df[words].tolist() == ref_df.tolist()


@pytest.mark.parametrize(("min_df", "max_df"), [(1, 1.0), (2, 1.0), (1, 0.4), (2, 0.5)])
def test_idf_and_vectors_equal_tfidfvectorizer_on_all_documents(min_df: int, max_df: float) -> None:
    docs = short_answer_collection()
    vectors, collection = vectorize_documents(docs, VectorSettings(min_df=min_df, max_df=max_df, lsa_components=0))
    # reference: scikit-learn's TfidfVectorizer(smooth_idf=True, sublinear_tf=True) fitted on every document
    reference = TfidfVectorizer(analyzer=ANALYZER.terms, smooth_idf=True, sublinear_tf=True,
                                min_df=min_df, max_df=max_df).fit(docs)
    words = np.flatnonzero(~vectors.is_phrase)
    assert [vectors.terms[i] for i in words] == reference.get_feature_names_out().tolist()
    idf = smooth_idf(document_frequency(vectors.counts, collection.copies)[words], float(collection.copies.sum()))
    np.testing.assert_allclose(idf, reference.idf_, rtol=1e-12)
    # the clustering space (TF-IDF rows when LSA is off) of each distinct text equals the reference row of
    # any of its documents
    expected = reference.transform([docs[i] for i in collection.first_doc_of_text]).toarray()
    np.testing.assert_allclose(vectors.space.toarray(), expected, atol=1e-12)


def test_min_df_two_keeps_a_word_of_two_copies_of_one_text() -> None:
    docs = short_answer_collection()
    vectors, collection = vectorize_documents(docs, VectorSettings(min_df=2, max_df=1.0, lsa_components=0))
    assert "tracking" in vectors.terms  # one distinct text, two documents
    assert "solar" not in vectors.terms  # one document
    # reference: CountVectorizer(min_df=2) on all documents keeps the same words
    reference = CountVectorizer(analyzer=ANALYZER.terms, min_df=2).fit(docs)
    assert [t for t in vectors.terms if " " not in t] == reference.get_feature_names_out().tolist()


def test_max_df_counts_copies() -> None:
    """"yes" is in 11 of 22 documents (one distinct text of 17 besides): max_df 0.4 drops it."""
    docs = short_answer_collection()
    vectors, _ = vectorize_documents(docs, VectorSettings(min_df=1, max_df=0.4, lsa_components=0))
    assert "yes" not in vectors.terms and "garden" in vectors.terms
    assert 11 / len(docs) > 0.4 and 2 / 13 < 0.4  # counted over distinct texts it would have stayed


@pytest.mark.parametrize("mode", ["memory", "stream"])
def test_both_modes_count_copies(tmp_path: Path, mode: str) -> None:
    docs = short_answer_collection()
    source = write_texts(tmp_path / "docs", docs)
    options = RunOptions(source=source, k=2, out=tmp_path / "site", min_df=2, max_df=1.0, lsa_components=0,
                         near_duplicate=1.0, mode=mode, workers=1, quiet=True)
    work = tmp_path / "work"
    work.mkdir()
    prepared = prepare_collection(options, Reporter(quiet=True), k_needed=2, work=work)
    try:
        reference = TfidfVectorizer(analyzer=ANALYZER.terms, smooth_idf=True, sublinear_tf=True, min_df=2).fit(docs)
        words = [t for t in prepared.vectors.terms if " " not in t]
        assert words == reference.get_feature_names_out().tolist()
        assert "tracking" in words
        # the rows of each distinct text equal TfidfVectorizer's row of its first document (reading order is
        # file order here, and the streaming mode's hashed columns are named by their word)
        firsts = [docs[int(prepared.ingested.documents[i].doc_id.split(".")[0])]
                  for i in prepared.collection.first_doc_of_text]
        space = prepared.vectors.space.toarray()  # LSA off: the TF-IDF rows over the single words
        np.testing.assert_allclose(space, reference.transform(firsts).toarray(), atol=1e-12)
    finally:
        close = getattr(prepared.ingested.documents, "close", None)
        if close:
            close()


# ---------------------------------------------------------------------------------------------------------------
# Boilerplate: a templated body is content, a shared signature is not

THEMES = {
    "damaged": "My order arrived damaged, please refund the full amount to my card.",
    "late": "My parcel is now two weeks late, where is my delivery?",
    "login": "I cannot log in to my account, please reset my password.",
    "invoice": "The invoice shows the wrong billing address, please correct it.",
    "cancel": "Please cancel my subscription before the next renewal date.",
}
SIGNATURE = "Sent via the Example Shop help centre - please do not reply to this message"
FIRST = ["Anna", "Ben", "Chloe", "Dev", "Emma", "Farid", "Grace", "Hugo", "Ines", "Jon", "Kira", "Luis"]
LAST = ["Berg", "Costa", "Dubois", "Evans", "Fischer", "Garcia", "Haas", "Ito", "Jensen", "Kowalski"]


def templated_tickets(n: int = 300, seed: int = 0) -> tuple[list[str], list[str]]:
    """Tickets: a greeting with a name and an e-mail address (redacted to a placeholder), one of five
    templated bodies, and a signature line shared by all."""
    rng = random.Random(seed)
    texts, labels = [], []
    for i in range(n):
        theme = list(THEMES)[i % len(THEMES)]
        first, last = rng.choice(FIRST), rng.choice(LAST)
        texts.append(f"Hello, this is {first} {last} ({first.lower()}.{last.lower()}{i}@example.org)\n"
                     f"{THEMES[theme]}\n{SIGNATURE}")
        labels.append(theme)
    return texts, labels


def old_rule(text: str, boilerplate: Boilerplate) -> str:
    """The rule before: every boilerplate line goes."""
    return "".join(line for line in text.splitlines(keepends=True)
                   if " ".join(line.split()).lower() not in boilerplate.normalized)


def test_templated_bodies_stay_and_the_signature_goes() -> None:
    texts, _ = templated_tickets()
    texts = [t.replace(t[t.index("(") : t.index(")") + 1], "(xredactedemail)") for t in texts]  # as redacted
    boilerplate = find_boilerplate(texts)
    found = dict(boilerplate.lines)
    # each body is in 60 of 300 texts (20% >= 5%), the signature in all: all six are boilerplate lines
    assert found == {" ".join(line.split()).lower(): n for line, n in
                     [(SIGNATURE, 300), *((body, 60) for body in THEMES.values())]}
    stripped = strip_texts(texts, boilerplate)
    for before, after in zip(texts, stripped.texts, strict=True):
        greeting, body, _ = before.split("\n")
        assert after == f"{greeting}\n{body}\n"  # the body kept, the signature removed
        assert old_rule(before, boilerplate) == f"{greeting}\n"  # the old rule kept only the greeting
    assert (stripped.lines_removed, stripped.texts_changed, stripped.lines_kept) == (300, 300, 300)


def test_a_signature_goes_from_texts_with_their_own_content() -> None:
    texts = [f"Ticket about the {w} heater that makes a loud noise at night\n{SIGNATURE}" for w in
             ("red", "blue", "green", "old", "new", "small", "large", "cheap")]
    boilerplate = find_boilerplate(texts)
    assert strip_boilerplate(texts[0], boilerplate) == "Ticket about the red heater that makes a loud noise at night\n"


def test_stripping_never_empties_a_text() -> None:
    texts = [SIGNATURE] * 3 + [f"note {i} on the boiler service\n{SIGNATURE}" for i in range(7)]
    boilerplate = find_boilerplate(texts)
    assert strip_boilerplate(SIGNATURE, boilerplate) == SIGNATURE
    assert strip_boilerplate(f"  \n{SIGNATURE}\n", boilerplate) == f"  \n{SIGNATURE}\n"


def test_a_rare_line_that_is_most_of_a_short_text_stays() -> None:
    """An agent's signature (in 6 of 100 texts) is kept in a two-word reply, where it is most of the text."""
    agent = "Maria Lopez, Senior Support Agent, Example Shop"
    texts = [f"the boiler {i} needs a new valve and a pressure check soon" for i in range(94)]
    texts += [f"{w} thanks\n{agent}" for w in ("ok", "yes", "great", "good", "fine", "sure")]
    boilerplate = find_boilerplate(texts)
    assert dict(boilerplate.lines) == {agent.lower(): 6}
    assert strip_boilerplate(texts[-1], boilerplate) == texts[-1]
    longer = f"The valve was replaced yesterday and the pressure is stable now\n{agent}"
    assert strip_boilerplate(longer, boilerplate) == "The valve was replaced yesterday and the pressure is stable now\n"


def tickets_table(path: Path, texts: list[str]) -> Path:
    with path.open("w", encoding="utf-8", newline="") as handle:
        writer = csv.writer(handle)
        writer.writerow(["id", "body"])
        writer.writerows([f"t{i:03d}", text] for i, text in enumerate(texts))
    return path


@pytest.mark.parametrize("mode", ["memory", "stream"])
def test_templated_tickets_cluster_by_theme(tmp_path: Path, mode: str) -> None:
    """Regression: the old rule removed every templated body, leaving greetings (names) to cluster on."""
    texts, labels = templated_tickets()
    table = tickets_table(tmp_path / "tickets.csv", texts)
    out = tmp_path / "site"
    result = invoke("run", str(table), "--k", "5", "--out", str(out), "--mode", mode, "--workers", "1")
    assert result.exit_code == 0, result.stderr
    rows = read_assignments(out / "runs" / "k5")
    truth = {f"t{i:03d}": label for i, label in enumerate(labels)}
    # five themes, planted: the clusters must recover them exactly (NMI 1, scikit-learn's definition)
    assert normalized_mutual_info_score([truth[r["doc_id"]] for r in rows], [r["cluster"] for r in rows]) == 1.0
    if mode == "memory":  # every distinct text (after redaction) lost its signature and kept its body
        distinct = len({t.replace(t[t.index("(") : t.index(")") + 1], "") for t in texts})
        assert (f"pilewise: 6 boilerplate line(s) found; {distinct} removed from {distinct} distinct texts before "
                f"vectorizing; {distinct} kept where they are most of their text") in result.stderr.splitlines()


@pytest.mark.parametrize("mode", ["memory", "stream"])
def test_keep_boilerplate_turns_detection_off(tmp_path: Path, mode: str) -> None:
    texts, _ = templated_tickets(60)
    table = tickets_table(tmp_path / "tickets.csv", texts)
    out = tmp_path / "site"
    result = invoke("run", str(table), "--k", "5", "--out", str(out), "--mode", mode, "--workers", "1",
                    "--keep-boilerplate")
    assert result.exit_code == 0, result.stderr
    off = "boilerplate removal is off (--keep-boilerplate); every line of every text is vectorized"
    assert f"pilewise: {off}" in result.stderr.splitlines()
    run = out / "runs" / "k5"
    assert (run / "boilerplate.csv").read_text(encoding="utf-8").count("\n") == 1  # the header alone
    manifest = read_manifest(run)
    assert off in json.dumps(manifest)
    assert off in (run / "ingest.html").read_text(encoding="utf-8")  # the ingest page's notes


def test_options_default_is_on() -> None:
    options = RunOptions(source=Path("."), k=2)
    assert options.boilerplate is True and replace(options, boilerplate=False).boilerplate is False


def test_table_columns_count_every_copy_with_its_own_cells(tmp_path: Path) -> None:
    """Regression: a copy of a text used to be counted under its first document's table cells.

    Ten documents say "yes thanks" (four from channel "phone", six from "mail"); the cluster-by-value
    table of clusters.json must count each document with its own cell, so its column sums are the
    channel counts of the rows written (an independent count of the input, not of pilewise's output).
    """
    rows = [("yes thanks", "phone" if i < 4 else "mail") for i in range(10)]
    topics = ["soil compost seedling mulch watering spade trowel", "chain saddle pedal spoke brake gear tyre",
              "oven flour dough whisk butter saucepan ladle"]
    rng = random.Random(3)
    for i in range(30):
        words = topics[i % 3].split()
        rows.append((" ".join(rng.choice(words) for _ in range(12)) + f" note {i}", "phone" if i % 2 else "mail"))
    table = tmp_path / "answers.csv"
    with table.open("w", encoding="utf-8", newline="") as handle:
        writer = csv.writer(handle)
        writer.writerow(["text", "channel"])
        writer.writerows(rows)
    out = tmp_path / "site"
    result = invoke("run", str(table), "--k", "3", "--out", str(out), "--quiet")
    assert result.exit_code == 0, result.output
    document = read_clusters(out / "runs" / "k3")
    (channel,) = [c for c in document["metadata"]["categorical"] if c["column"] == "channel"]
    sums = dict(zip(channel["values"], np.asarray(channel["table"]).sum(axis=0).tolist(), strict=True))
    expected = {value: sum(1 for _, v in rows if v == value) for value in ("mail", "phone")}
    assert sums == expected


def test_manifest_counts_exact_distinct_texts_before_near_duplicate_grouping(tmp_path: Path) -> None:
    """Regression: manifest.json's `distinct_texts` equalled `texts_clustered` (near-duplicate groups).

    Six auto-replies differ in one word only (word 5-gram Jaccard far above 0.8, so they form one group);
    the expected counts are those of the files written here: 6 + 15 exactly distinct texts, 16 clustered.
    """
    folder = tmp_path / "texts"
    folder.mkdir()
    reply = ("Thank you for your message. We have received your request and a member of our team will answer "
             "within two working days. Please keep the reference of this message for any further questions {}.")
    for i, word in enumerate(["alpha", "bravo", "charlie", "delta", "echo", "foxtrot"]):
        (folder / f"reply-{i}.txt").write_text(reply.format(word), encoding="utf-8")
    topics = ["soil compost seedling mulch watering spade trowel", "chain saddle pedal spoke brake gear tyre",
              "oven flour dough whisk butter saucepan ladle"]
    rng = random.Random(5)
    for i in range(15):
        words = topics[i % 3].split()
        (folder / f"note-{i}.txt").write_text(" ".join(rng.choice(words) for _ in range(14)), encoding="utf-8")
    out = tmp_path / "site"
    result = invoke("run", str(folder), "--k", "3", "--out", str(out), "--quiet")
    assert result.exit_code == 0, result.output
    manifest = read_manifest(out / "runs" / "k3")
    assert manifest["input"]["distinct_texts"] == 21
    assert manifest["input"]["texts_clustered"] == 16
