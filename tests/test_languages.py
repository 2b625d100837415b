"""Piles in other languages: detection, stop words, words of scripts without spaces, planted themes.

Word pools are written for these tests (real words of each language, no quoted text). Themes: parcels and
delivery, passwords and accounts, refunds and payment. NMI (scikit-learn's normalized_mutual_info_score)
floors are set a little under what was measured on these generated piles.
"""

from __future__ import annotations

import random
from pathlib import Path

import pytest
import stopwordsiso
from sklearn.feature_extraction.text import ENGLISH_STOP_WORDS
from sklearn.metrics import normalized_mutual_info_score

from helpers import assert_one_line_error, invoke, read_assignments, read_clusters
from pilewise.vectors.languages import (
    SNOWBALL,
    SUPPORTED,
    detect_language,
    detect_languages,
    stemmers_by_script,
)
from pilewise.vectors.text import Analyzer, load_stop_words

POOLS = {
    "de": (["Paket", "Lieferung", "Zusteller", "Sendung", "Versand", "Adresse", "Kurier", "Verspätung"],
           ["Passwort", "Konto", "Anmeldung", "Benutzername", "Zugang", "Sicherheit", "Bestätigung", "Profil"],
           ["Rückerstattung", "Zahlung", "Rechnung", "Kreditkarte", "Betrag", "Überweisung", "Gutschrift",
            "Quittung"]),
    "ru": (["посылка", "доставка", "курьер", "адрес", "отправление", "почта", "задержка", "склад"],
           ["пароль", "аккаунт", "вход", "логин", "профиль", "регистрация", "доступ", "безопасность"],
           ["возврат", "оплата", "счёт", "карта", "сумма", "перевод", "чек", "деньги"]),
    "ar": (["الطرد", "الشحنة", "المندوب", "العنوان", "التوصيل", "البريد", "التأخير", "المستودع"],
           ["الحساب", "الدخول", "التسجيل", "المستخدم", "الأمان", "الملف", "التحقق", "الرمز"],
           ["الاسترداد", "الدفع", "الفاتورة", "البطاقة", "المبلغ", "التحويل", "الإيصال", "الأموال"]),
    "tr": (["kargo", "teslimat", "kurye", "adres", "paket", "gönderi", "gecikme", "depo"],
           ["şifre", "hesap", "giriş", "kullanıcı", "profil", "kayıt", "güvenlik", "doğrulama"],
           ["İade", "ödeme", "fatura", "kart", "tutar", "havale", "makbuz", "para"]),
    "zh": (["包裹", "快递", "物流", "地址", "配送", "快递员", "仓库", "运单"],
           ["密码", "账户", "登录", "用户名", "注册", "验证码", "安全", "邮箱"],
           ["退款", "付款", "发票", "信用卡", "金额", "转账", "收据", "银行"]),
    "ja": (["荷物", "配送", "宅配便", "住所", "発送", "配達員", "倉庫", "伝票"],
           ["パスワード", "アカウント", "ログイン", "会員登録", "認証", "メールアドレス", "設定", "画面"],
           ["返金", "支払", "請求書", "クレジットカード", "金額", "振込", "領収書", "銀行"]),
}
# function words written between the content words: each is in stopwords-iso's list of its language (or in
# EXTRA_STOP_WORDS for Turkish "mi"), except Japanese hiragana endings, which the Japanese reading treats
# as breaks (test_function_words_are_stop_words checks this)
FUNCTION = {
    "de": ["das", "und", "hat", "ist", "nicht", "ich", "die", "der", "mein", "noch", "wurde", "mit", "auch"],
    "ru": ["что", "на", "и", "не", "я", "мой", "уже", "это", "как", "был", "по"],
    "ar": ["هل", "في", "من", "على", "أن", "إلى", "لم", "هذا", "عن", "قد", "لا"],
    "tr": ["ve", "mi", "bir", "bu", "da", "ama", "çok", "ne", "için", "gibi", "daha"],
    "zh": ["的", "了", "是", "我", "在", "我们", "还", "请"],
    "ja": ["は", "が", "を", "に", "の", "です", "ました", "ください", "まだ"],
}
JOIN = {"zh": "", "ja": ""}  # no spaces between words in these scripts
FLOORS = {"de": 0.8, "ru": 0.8, "ar": 0.8, "tr": 0.8, "zh": 0.8, "ja": 0.8}


def planted_texts(language: str, per_theme: int = 20, seed: int = 3) -> tuple[list[str], list[int]]:
    """Texts of three planted themes: five theme words and one word of another theme, among function words."""
    rng = random.Random(seed)
    pools, function, sep = POOLS[language], FUNCTION[language], JOIN.get(language, " ")
    texts, labels = [], []
    for theme, pool in enumerate(pools):
        for _ in range(per_theme):
            words = rng.sample(pool, 5) + [rng.choice(pools[(theme + 1) % 3])]
            rng.shuffle(words)
            parts = []
            for word in words:
                parts += [word, rng.choice(function)]
            end = "。" if sep == "" else "."
            texts.append(sep.join(parts[: len(parts) // 2]) + ("，" if sep == "" else ", ")
                         + sep.join(parts[len(parts) // 2 :]) + end)
            labels.append(theme)
    return texts, labels


def _write(folder: Path, texts: list[str]) -> Path:
    folder.mkdir(parents=True)
    for i, text in enumerate(texts):
        (folder / f"{i:03d}.txt").write_text(text + "\n", encoding="utf-8")
    return folder


def _run(tmp_path: Path, texts: list[str], *extra: str) -> Path:
    source = _write(tmp_path / "in", texts)
    out = tmp_path / "out"
    result = invoke("run", str(source), "--k", "3", "--out", str(out), "--quiet", *extra)
    assert result.exit_code == 0, result.output
    (run,) = (out / "runs").iterdir()
    return run


@pytest.mark.parametrize("language", sorted(POOLS))
def test_planted_themes_are_found_and_named_by_content_words(tmp_path: Path, language: str) -> None:
    texts, labels = planted_texts(language)
    run = _run(tmp_path, texts)
    rows = sorted(read_assignments(run), key=lambda row: row["doc_id"])
    found = [int(row["cluster"]) for row in rows]
    nmi = normalized_mutual_info_score(labels, found)
    print(f"{language}: NMI {nmi:.3f}")
    assert nmi >= FLOORS[language]
    clusters = read_clusters(run)
    assert clusters["languages"][0]["language"] == language and clusters["languages"][0]["share"] >= 0.9
    # stopwords-iso's list of the language (and scikit-learn's English list): never in a name
    stop = set(stopwordsiso.stopwords(language)) | set(ENGLISH_STOP_WORDS) | set(FUNCTION[language])
    # Turkish "İ" is the capital of "i" (Unicode SpecialCasing.txt, Turkish rules); str.lower adds a dot above
    content = [word.replace("İ", "i").lower() for pool in POOLS[language] for word in pool]
    for cluster in clusters["clusters"]:
        for entry in cluster["name_terms"]:
            for word in entry["term"].split(" "):
                assert word not in stop, (language, cluster["suggested_name"])
                # names come from content words: whole pool words, or for Chinese and Japanese a piece of one
                assert any(word in pool_word for pool_word in content), (language, cluster["suggested_name"])


def test_language_detection_on_the_generated_texts() -> None:
    # py3langid's model on texts written for this test; the first text of each theme
    for language in POOLS:
        texts, _ = planted_texts(language)
        assert {detect_language(text) for text in texts[::20]} == {language}


def test_plain_english_never_loads_the_detection_model() -> None:
    import sys

    sys.modules.pop("py3langid.langid", None)
    import pilewise.vectors.languages as languages

    languages._identifier = None
    codes = detect_languages(["The parcel arrived broken and the box was wet.", "ok thanks", "test"])
    assert codes == ("en", "und", "und")
    assert languages._identifier is None


def test_forced_language_and_its_check(tmp_path: Path) -> None:
    texts, _ = planted_texts("de")
    run = _run(tmp_path, texts, "--language", "de")
    assert read_clusters(run)["languages"] == [{"language": "de", "share": 1.0}]
    assert read_clusters(run)["languages_forced"] is True
    result = invoke("run", str(tmp_path / "in"), "--k", "3", "--out", str(tmp_path / "o2"), "--language", "xx")
    assert_one_line_error(result, "--language 'xx' is not supported; pass an ISO 639-1 code, one of: "
                          + ", ".join(SUPPORTED))


def test_supported_languages_have_a_stop_list_and_a_model_class() -> None:
    from py3langid.langid import MODEL_FILE, LanguageIdentifier

    classes = set(LanguageIdentifier.from_model_file(MODEL_FILE).nb_classes)
    assert set(SUPPORTED) == set(stopwordsiso.langs()) & classes


def test_stemming_uses_the_language_of_each_script() -> None:
    from nltk.stem.snowball import SnowballStemmer

    assert set(SNOWBALL.values()) <= set(SnowballStemmer.languages)
    assert stemmers_by_script(["ru", "de"]) == {"latin": "german", "cyrillic": "russian"}
    analyzer = Analyzer(stop_words=load_stop_words(None, ["ru", "de"]), stem=True, languages=["ru", "de"])
    # Snowball's own German and Russian stemmers (nltk) give the reference stems
    assert analyzer.terms("Lieferungen посылками") == [SnowballStemmer("german").stem("lieferungen"),
                                                        SnowballStemmer("russian").stem("посылками")]


def test_chinese_is_cut_into_words_and_japanese_into_short_spans() -> None:
    analyzer = Analyzer(stop_words=load_stop_words(None, ["zh", "ja"]), stem=False)
    zh = analyzer.terms("我的包裹还没有到，请查一下物流。")
    assert "包裹" in zh and "物流" in zh and all(len(t) <= 4 for t in zh)
    ja = analyzer.terms("荷物がまだ届きません。パスワードを忘れました。")
    assert "荷物" in ja and "パスワード" in ja and all(len(t) <= 6 for t in ja)


def test_mixed_german_and_russian_pile(tmp_path: Path) -> None:
    """Measured, documented in docs/method.md: the same three themes in two languages with k = 3."""
    de, labels_de = planted_texts("de", seed=5)
    ru, labels_ru = planted_texts("ru", seed=6)
    run = _run(tmp_path, de + ru)
    rows = sorted(read_assignments(run), key=lambda row: row["doc_id"])
    found = [int(row["cluster"]) for row in rows]
    language = [0] * len(de) + [1] * len(ru)
    theme_nmi = normalized_mutual_info_score(labels_de + labels_ru, found)
    language_nmi = normalized_mutual_info_score(language, found)
    print(f"mixed de+ru k=3: NMI to themes {theme_nmi:.3f}, to language {language_nmi:.3f}")
    clusters = read_clusters(run)
    assert {"de", "ru"} <= {entry["language"] for entry in clusters["languages"]} <= {"de", "ru", "und"}
    for cluster in clusters["clusters"]:
        assert sum(entry["share"] for entry in cluster["languages"]) == pytest.approx(1.0, abs=1e-3)
    # measured 0.813 to language and 0.302 to themes: texts on one theme in two languages share no word, so
    # the clusters follow the languages (docs/method.md, "Mixed-language piles")
    assert language_nmi > theme_nmi


def test_streaming_mode_uses_the_languages_of_the_first_documents(tmp_path: Path) -> None:
    texts, labels = planted_texts("de")
    run = _run(tmp_path, texts, "--mode", "stream", "--workers", "1")
    clusters = read_clusters(run)
    assert clusters["languages"] == []  # not detected per document while streaming (docs/outputs.md)
    stop = set(stopwordsiso.stopwords("de"))
    for cluster in clusters["clusters"]:
        assert not any(word in stop for entry in cluster["name_terms"] for word in entry["term"].split(" "))
    page = (run / "ingest.html").read_text(encoding="utf-8")
    assert "languages of the first 60 documents (detected per text): de 100%" in page


def test_function_words_are_stop_words() -> None:
    analyzer = Analyzer(stop_words=load_stop_words(None, list(FUNCTION)), stem=False)
    for language, words in FUNCTION.items():
        for word in words:
            assert analyzer.terms(word) == [], (language, word)
