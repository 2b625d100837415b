"""Encodings: a folder's non-UTF-8 files decided by a vote, per file only where they differ; round trips.

Each text is written in a legacy code page by Python's own codecs (the reference encoders) and must read
back exactly. The sentences are written for these tests.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from helpers import read
from pilewise.ingest.plaintext import EncodingVote, decode_bytes, vote_encoding
from pilewise.ingest.tables import ColumnChoice

# (codec, sentences in a language that code page serves); each sentence becomes one file
SAMPLES = {
    "cp1252": ["Le café était fermé, mais la crème brûlée restait naïve et déjà célèbre à Noël.",
               "Über die Straße gingen fünf Männer; größere Häuser standen dort für Bürger.",
               "El niño comió piña y jamón en la mañana; después bebió café con azúcar."],
    "cp1250": ["Příliš žluťoučký kůň úpěl ďábelské ódy, když šel přes řeku k městu.",
               "Zażółć gęślą jaźń, powiedział człowiek, który szedł wieczorem przez łąkę.",
               "Dobrý den, objednávka číslo devět ještě nepřišla, prosím o vrácení peněz."],
    "cp1254": ["Siparişim hâlâ gelmedi; iade için ne yapmalıyım, lütfen yardım edin.",
               "Şifremi unuttum ve hesabıma giriş yapamıyorum, bugün öğleden sonra denedim.",
               "Kargo çok geç geldi, paketin içindeki ürün kırılmıştı ve değişim istiyorum."],
    "koi8_r": ["Мой заказ до сих пор не пришёл, прошу вернуть деньги за покупку.",
               "Я забыл пароль и не могу войти в личный кабинет на сайте магазина.",
               "Посылка пришла поздно, коробка была мятая, а товар внутри разбит."],
    "shift_jis": ["注文した商品がまだ届きません。配送状況を確認していただけますか。",
                  "パスワードを忘れてしまい、会員ページにログインできません。",
                  "届いた箱が壊れていて、中の商品も割れていました。交換をお願いします。"],
    "euc_kr": ["주문한 상품이 아직 도착하지 않았습니다. 배송 상태를 확인해 주세요.",
               "비밀번호를 잊어버려서 회원 페이지에 로그인할 수 없습니다.",
               "도착한 상자가 찢어져 있었고 안의 상품도 깨져 있었습니다. 교환 부탁드립니다."],
    "gb18030": ["我的订单还没有到，请帮我查一下物流信息，谢谢。",
                "我忘记了密码，无法登录会员账户，请问怎么重新设置？",
                "收到的包裹破损了，里面的商品也坏了，我想申请退款。"],
}


def _write_folder(folder: Path, codec: str, sentences: list[str]) -> Path:
    folder.mkdir(parents=True, exist_ok=True)
    for i, sentence in enumerate(sentences):
        (folder / f"{i}.txt").write_bytes(sentence.encode(codec))
    return folder


@pytest.mark.parametrize("codec", sorted(SAMPLES))
def test_a_folder_in_one_code_page_reads_back_exactly(tmp_path: Path, codec: str) -> None:
    # round trip through Python's codecs (the reference encoder and decoder)
    folder = _write_folder(tmp_path / codec, codec, SAMPLES[codec])
    ingested = read(folder)
    texts = {doc.doc_id: doc.text for doc in ingested.documents}
    assert texts == {f"{i}.txt": s for i, s in enumerate(SAMPLES[codec])}
    assert any("the folder's encoding is" in note for note in ingested.notes)


def test_vote_takes_the_encoding_of_most_files_and_names_the_count() -> None:
    shift_jis = [(f"{i}.txt", s.encode("shift_jis")) for i, s in enumerate(SAMPLES["shift_jis"] * 2)]
    utf8 = [("u.txt", "déjà vu".encode())]
    vote = vote_encoding(shift_jis + utf8)
    assert vote.encoding in ("shift_jis", "cp932")  # cp932: Microsoft's superset of Shift_JIS (WHATWG's decoder)
    assert set(vote.of_file) == {key for key, _ in shift_jis}  # UTF-8 files do not vote
    assert "6 file(s) are not UTF-8" in vote.note() and "--encoding" in vote.note()


def test_a_file_that_differs_keeps_its_own_encoding() -> None:
    # a Russian KOI8-R file among Western cp1252 files: cp1252 decodes its bytes too, into mojibake
    western = [(f"w{i}.txt", s.encode("cp1252")) for i, s in enumerate(SAMPLES["cp1252"] * 2)]
    russian = [("r.txt", " ".join(SAMPLES["koi8_r"]).encode("koi8_r"))]
    vote = vote_encoding(western + russian)
    assert vote.encoding == "cp1252"
    assert vote.of_file["r.txt"] == "koi8_r"
    text, note = decode_bytes(russian[0][1], voted=vote.of_file["r.txt"])
    assert text == " ".join(SAMPLES["koi8_r"]) and "koi8_r" in note


def test_all_utf8_means_no_vote_and_no_note() -> None:
    vote = vote_encoding([("a.txt", "naïve café".encode()), ("b.txt", "Straße".encode())])
    assert vote == EncodingVote(None, ()) and vote.note() == ""


def test_forced_encoding_skips_the_vote(tmp_path: Path) -> None:
    folder = _write_folder(tmp_path / "f", "cp1250", SAMPLES["cp1250"])
    ingested = read(folder, ColumnChoice(encoding="cp1250"))
    assert [d.text for d in sorted(ingested.documents, key=lambda d: d.doc_id)] == SAMPLES["cp1250"]
    assert not any("the folder's encoding" in note for note in ingested.notes)


def test_a_sample_cut_inside_a_utf8_character_still_counts_as_utf8() -> None:
    raw = ("é" * 10).encode()[:-1]  # the last character cut in half, as a 64 KB sample may end
    vote = vote_encoding([("a.txt", raw)])
    assert vote.encoding is None


@pytest.mark.parametrize("codec", ["cp1252", "cp1250", "cp1254", "koi8_r"])
def test_a_table_in_a_code_page_reads_back_exactly(tmp_path: Path, codec: str) -> None:
    # a CSV export (RFC 4180: header row, comma separator) written by Python's codecs
    rows = [f'{i},"{sentence}"' for i, sentence in enumerate(SAMPLES[codec])]
    table = tmp_path / "export.csv"
    table.write_bytes(("id,text\r\n" + "\r\n".join(rows) + "\r\n").encode(codec))
    ingested = read(table)
    assert [doc.text for doc in ingested.documents] == SAMPLES[codec]


def test_naive_in_a_windows_1252_table_is_not_read_as_windows_1250(tmp_path: Path) -> None:
    """Regression (issue 12): a short cp1252 CSV came out as cp1250, "naïve" as "naďve"."""
    table = tmp_path / "short.csv"
    table.write_bytes("id,text\r\n1,a naïve question\r\n2,café crème\r\n".encode("cp1252"))
    assert [doc.text for doc in read(table).documents] == ["a naïve question", "café crème"]
