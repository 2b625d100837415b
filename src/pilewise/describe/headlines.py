"""Headlines of clusters: a title or sentence that carries the cluster's distinguishing terms.

Among the members nearest each centroid, the title holding the most weight of the cluster's
distinguishing terms is the headline. Titles that say nothing about content (ids and order numbers,
URLs, manual-page header lines, titles that follow one template with varying numbers) are passed over;
reply and forward prefixes ("Re:", "Fwd:", "Out of Office:") are cut off before a title is judged, and a
title that is a quotation's attribution ("... writes:") or the first line of a sentence that runs on
(wrapped text) is passed over. When no title carries a term, the headline is the sentence of those
members' texts with the highest weight of the terms; fragments (ending in a comma, semicolon or colon)
and copyright and credit lines are passed over, and sentences repeated in several members (a template's
formula, a footer) or holding a web address come last. No two clusters get the same headline.
"""

from __future__ import annotations

import math
import re
from collections import Counter
from collections.abc import Callable, Sequence
from dataclasses import dataclass

from pilewise.ingest.redact import display_text
from pilewise.model import TermScore

HEADLINE_CANDIDATES = 15  # members nearest the centroid whose titles and texts may give the headline
SENTENCE_SCAN_CHARS = 4000  # of each candidate's text, the part searched for sentences
SENTENCE_WORDS = (5, 40)  # a headline sentence has this many words (inclusive)
SHOUTING_FACTOR = 0.5  # weight kept by a sentence written all in capitals
PLAIN_WORDS_MIN = 0.7  # and at least this share of its tokens are plain words (not options, numbers, paths)
HEADLINE_CHARS = 150  # a longer sentence is cut on a word boundary
TEMPLATE_MIN_TITLES = 3  # a title shape shared by this many candidate documents, with varying parts
RUN_ON_WORDS = 6  # a first line this long, followed by more text without a blank line, is wrapped running text
WRAPPED_SHARE = 0.5  # when this share of first-line titles run on, every first line followed by text is wrapped

_PREFIX = re.compile(
    r"^\s*(?:(?:re|aw|sv|fw|fwd|wg|tr|antw|out of office(?: reply)?|automatic reply|auto(?:matic)?[- ]?reply)"
    r"\s*(?:\[\d+\])?\s*:\s*)+",
    re.IGNORECASE,
)
_URL = re.compile(r"(?:[a-z][a-z0-9+.-]*://|www\.)\S+", re.IGNORECASE)
_MAN_HEADER = re.compile(r"^\S+\(\d[^)\s]*\)(?:\s|$)")  # "LS(1)   User Commands   LS(1)"
_CONTENT_WORD = re.compile(r"^[^\W\d_]{3,}$")  # three letters or more, no digit
_WORD = re.compile(r"\S+")
_SENTENCE_END = re.compile(r"(?<=[.!?])\s+(?=[\"'(\[]?[A-Z0-9])")
_PARAGRAPH = re.compile(r"\n\s*\n")
_HEADING = re.compile(r"^(?=(?:\S+\s*){1,4}$)[^\Wa-z\d_][^a-z]*$")  # up to 4 words, upper case: "SEE ALSO"
# bullets, dashes and stray punctuation before a sentence (an option's "-v" or "--help" is kept, and refused)
_LEAD = re.compile(r"^(?:[^\w\"'(\[<-]|-+(?=\s))+\s*")
_QUOTE_MARK = re.compile(r"^\s*(?:>\s?)+")
_ATTRIBUTION = re.compile(r"\b(?:writes|wrote|said|schrieb|a écrit)\s*:\s*$", re.IGNORECASE)
_OPTION = re.compile(r"^-{1,2}[\w?]")
_RULER = re.compile(r"\s(?:-{2,}|={3,}|_{3,}|\*{3,}|~{3,})(?:\s.*)?$")  # a signature mark or ruled line
_FIELD = re.compile(r"^[A-Z][\w-]*:(?:\s|$)")  # "Format: ...", "Upstream-Name: ..."
_BROKEN_WORD = re.compile(r"([^\W\d_])[-‐]\n\s*(?=[a-z])")  # "clus-" at a line's end, "ters" on the next
_PLAIN_WORD = re.compile(r"^[^\W\d_]+(?:['’-][^\W\d_]+)*$")
# a line that stops before its sentence does: a comma, semicolon, colon or hyphen, or a word that needs a next one
_RUNS_ON = re.compile(r"(?:[,;:-]|\b(?:a|an|and|at|by|for|from|in|into|of|on|or|the|to|with|I))$")
_FRAGMENT_END = re.compile(r"[,;:]$")  # a list's introduction or an item of it, not a statement
_CREDIT = re.compile(r"^(?:copyright\b|©|\(c\)\s)", re.IGNORECASE)
_YEAR = re.compile(r"\b(?:19|20)\d\d\b")
_BULLET = re.compile(r"^\s*(?:[*\u2022+]|-(?!-)|\d{1,2}[.)])\s+\S|^\s*\[[^\]]{1,60}\]\s*$")  # "* item", "[ Name ]"
_LONE_DOT = re.compile(r"^\s*\.\s*$")  # a paragraph break in Debian control-style files (copyright files)


@dataclass(frozen=True)
class Headline:
    """A cluster's headline and where it comes from."""

    text: str
    source: str  # "title", "sentence" or "terms"
    doc_index: int  # the document it comes from; -1 for "terms"


@dataclass(frozen=True)
class _Option:
    text: str
    source: str
    doc_index: int
    score: float


def strip_reply_prefix(title: str) -> str:
    """The title without leading reply, forward and absence-notice prefixes ("Re: Fwd: x" -> "x")."""
    return _PREFIX.sub("", title).strip()


def title_shape(title: str) -> str:
    """A title with its varying parts blanked: lower case, every token holding a digit becomes "#"."""
    words = [("#" if any(ch.isdigit() for ch in w) else w) for w in _WORD.findall(strip_reply_prefix(title).lower())]
    return " ".join(w.strip(".,:;!?#\"'()[]") or "#" for w in words)


def title_problem(title: str) -> str | None:
    """Why a title (reply prefixes already cut) cannot stand for a cluster, or None when it can."""
    if not title or title == "(untitled)":
        return "no title"
    if _MAN_HEADER.match(title):
        return "a manual-page header line"
    if _ATTRIBUTION.search(title):
        return "a quotation's attribution line"
    if _RUNS_ON.search(title):
        return "a line cut before its sentence ends"
    words = _URL.sub(" ", title).split()
    content = [w.strip(".,:;!?\"'()[]<>") for w in words]
    if len([w for w in content if _CONTENT_WORD.match(w)]) < 2:
        return "a URL" if _URL.search(title) else "an id or number, not words"
    return None


def template_shapes(titles: Sequence[str]) -> frozenset[str]:
    """Shapes shared by at least TEMPLATE_MIN_TITLES titles that differ in their varying parts.

    Identical titles (a thread's replies) are not a template; "Order 4711" and "Order 4712" are.
    """
    count: Counter[str] = Counter()
    variants: dict[str, set[str]] = {}
    for title in titles:
        shape = title_shape(title)
        count[shape] += 1
        variants.setdefault(shape, set()).add(strip_reply_prefix(title).lower())
    return frozenset(s for s, n in count.items() if n >= TEMPLATE_MIN_TITLES and len(variants[s]) > 1 and "#" in s)


def term_weights(terms: Sequence[TermScore]) -> dict[str, float]:
    """Weight of each distinguishing term: its document share in the cluster minus its share outside."""
    return {t.key: max(t.share_in - t.share_out, 0.0) for t in terms}


def carried_weight(text: str, weights: dict[str, float], keys_of: Callable[[str], list[str]]) -> float:
    """Sum of the weights of the distinct terms (words and adjacent pairs) that `text` holds.

    Summed with `math.fsum`, whose correctly rounded result does not depend on the order of the terms: a plain
    sum over the set followed its iteration order, which changes with Python's string hash seed, so two
    candidates of nearly equal weight could swap places from one run to the next (seen on a change-log mailbox).
    """
    keys = keys_of(text)
    found = set(keys) | {f"{a} {b}" for a, b in zip(keys, keys[1:], strict=False)}
    return math.fsum(weights.get(k, 0.0) for k in found)


def sentences(text: str) -> list[str]:
    """Sentences of a text: paragraphs (split at blank lines) with their lines joined, split after . ! ?

    A line that is a heading (upper case only, as "NAME" or "SYNOPSIS" in manual pages) or a header field
    ("Upstream-Name: foo") stands alone, a list item ("* fix ...", "- add ...", "2) ...") or a bracketed label
    line ("[ A. Person ]") begins a new sentence, and leading bullets and dashes are cut.
    """
    out: list[str] = []
    for paragraph in _PARAGRAPH.split(text):
        for unit in _units(paragraph):
            joined = " ".join(unit.split())
            out.extend(t for t in (_RULER.sub("", _LEAD.sub("", s)) for s in _SENTENCE_END.split(joined)) if t)
    return out


def _units(paragraph: str) -> list[str]:
    """The paragraph's lines grouped into runs, a heading or header-field line always alone."""
    units: list[list[str]] = [[]]
    for line in paragraph.splitlines():
        line = _QUOTE_MARK.sub("", line)  # "> quoted text" of a reply reads as text
        stripped = line.strip()
        if _ATTRIBUTION.search(stripped) or _LONE_DOT.match(stripped):
            units.append([])  # "In article <id>, someone writes:" says who, not what; " ." ends a paragraph
        elif _HEADING.match(stripped) or _FIELD.match(stripped):
            units.extend([[stripped], []])
        elif _BULLET.match(line):
            units.append([line])  # a list item begins its own sentence (change logs, release notes)
        else:
            units[-1].append(line)
    return [_BROKEN_WORD.sub(r"\1", "\n".join(u)) for u in units if u]


def plain_word_share(text: str) -> float:
    """Share of a text's white-space tokens that are words of letters (with inner hyphens or apostrophes)."""
    tokens = [t.strip(".,:;!?\"'()") for t in text.split()]  # "[e-mail]", "<id>", ">quoted" are not words
    # one letter counts only as "a" or "I": "(c)" and "-v" are not words
    plain = sum(1 for t in tokens if _PLAIN_WORD.match(t) and (len(t) > 1 or t in ("a", "A", "I")))
    return plain / max(len(tokens), 1)


def shorten(text: str, limit: int = HEADLINE_CHARS) -> str:
    """`text` cut on a word boundary to about `limit` characters, with an ellipsis when cut."""
    if len(text) <= limit:
        return text
    cut = text[:limit].rsplit(" ", 1)[0]
    return (cut if len(cut) > limit // 2 else text[:limit]) + "…"


def same_line(line: str, title: str) -> bool:
    """Whether a text's line is the title, spaces collapsed and redaction placeholders shown as labels (titles
    are kept in display form, texts with placeholders)."""
    return " ".join(display_text(line).split()) == " ".join(display_text(title).split())


def runs_on(text: str, title: str, *, wrapped: bool = False) -> bool:
    """Whether `title` is the text's first line and its sentence goes on in the next line (wrapped text).

    The next line must follow without a blank line, and either begin in lower case or with a digit ("<Sale
    Tilney Plc> said it has purchased" / "80 pct of ..."), or the title line be as long as running text
    (RUN_ON_WORDS words or more: "Deputy oil ministers from six Gulf" / "Arab states will meet ..."). A short
    line followed by a capitalized one ("Meeting notes" / "We met ...") is taken as a title, unless the
    collection's first lines are `wrapped` text (`first_lines_wrapped`): then any next line will do. A next
    line indented deeper than the first starts a block under it, and never continues it (a Debian package
    description is a one-line synopsis followed by lines that begin with a space: Debian Policy 5.6.13).
    """
    raw_head, _, rest = text.lstrip("\r\n").partition("\n")
    head = raw_head.strip()
    if not same_line(head, title) or head.rstrip().endswith((".", "!", "?", ":")):
        return False
    raw_following = rest.split("\n", 1)[0]
    following = raw_following.strip()
    if not following or _indent(raw_following) > _indent(raw_head):
        return False
    return wrapped or following[0].islower() or following[0].isdigit() or len(head.split()) >= RUN_ON_WORDS


def _indent(line: str) -> int:
    """Width of a line's leading white space, a tab counting as one."""
    return len(line) - len(line.lstrip())


def first_lines_wrapped(
    candidates: Sequence[Sequence[int]], title_of: Callable[[int], str], text_of: Callable[[int], str],
) -> bool:
    """Whether at least WRAPPED_SHARE of all candidates' titles are first lines that run on (`runs_on`).

    Then the titles are no titles at all but the first lines of wrapped paragraphs (news wires, mailing-list
    bodies), and even "Financial Corp of Santa" / "Barbara ..." is one.
    """
    docs = [d for group in candidates for d in group]
    running = sum(runs_on(text_of(d)[:SENTENCE_SCAN_CHARS], title_of(d)) for d in docs)
    return bool(docs) and running >= WRAPPED_SHARE * len(docs)


def _title_options(
    candidates: Sequence[int], title_of: Callable[[int], str], text_of: Callable[[int], str],
    weights: dict[str, float], keys_of: Callable[[str], list[str]], templates: frozenset[str], wrapped: bool,
) -> list[_Option]:
    options = []
    for doc_index in candidates:
        raw = title_of(doc_index)
        title = strip_reply_prefix(raw)
        if (title_problem(title) is None and title_shape(raw) not in templates
                and not runs_on(text_of(doc_index)[:SENTENCE_SCAN_CHARS], raw, wrapped=wrapped)):
            options.append(_Option(title, "title", doc_index, carried_weight(title, weights, keys_of)))
    return options


def without_title_line(text: str, title: str, *, wrapped: bool = False, templated: bool = False) -> str:
    """The text without its first non-empty line when that line is the title (a title made from it), unless
    the line's sentence runs on into the next line: then the whole sentence stays a candidate. A `templated`
    title ("Entry 19 of the kitchen log") is a title whatever follows it."""
    if not templated and runs_on(text, title, wrapped=wrapped):
        return text
    head, _, rest = text.lstrip().partition("\n")
    shown = display_text(title).rstrip("…")
    same = same_line(head, title) or (title.endswith("…") and display_text(head).startswith(shown))
    return rest if same else text


def _sentence_options(
    candidates: Sequence[int], title_of: Callable[[int], str], text_of: Callable[[int], str],
    weights: dict[str, float], keys_of: Callable[[str], list[str]], templates: frozenset[str], *,
    every: bool = False, wrapped: bool = False,
) -> list[_Option]:
    """The usable sentences of the candidates' texts that carry a term (`every`: all usable sentences)."""
    options = []
    low, high = SENTENCE_WORDS
    for doc_index in candidates:
        title = title_of(doc_index)
        text = without_title_line(text_of(doc_index)[:SENTENCE_SCAN_CHARS], title, wrapped=wrapped,
                                  templated=title_shape(title) in templates)
        for sentence in sentences(text):
            words = sentence.split()
            if (not low <= len(words) <= high or title_problem(sentence) is not None or _OPTION.match(sentence)
                    or sentence_problem(sentence) is not None
                    or plain_word_share(display_text(sentence)) < PLAIN_WORDS_MIN):
                continue
            score = carried_weight(sentence, weights, keys_of)
            if sentence.upper() == sentence:
                score *= SHOUTING_FACTOR  # a sentence in capitals (a disclaimer) reads badly as a headline
            if score > 0 or every:
                options.append(_Option(shorten(display_text(sentence)), "sentence", doc_index, score))
    return options


def sentence_problem(sentence: str) -> str | None:
    """Why a sentence (already judged as a title would be) cannot stand for a cluster, or None when it can."""
    if _FRAGMENT_END.search(sentence.rstrip(" .")):
        return "a fragment: it ends in a comma, semicolon or colon"
    if _CREDIT.match(sentence) or len(_YEAR.findall(sentence)) >= 2:
        return "a copyright or credit line"
    return None


def repeated_sentences(options: Sequence[_Option], least: int = TEMPLATE_MIN_TITLES) -> frozenset[str]:
    """Sentences (without case) found in at least `least` different documents among the candidates.

    A sentence many texts share is a formula of their template or a footer ("GNU coreutils online help:
    ..."), true of every member and of other clusters alike, so it says little about any one cluster.
    """
    holders: dict[str, set[int]] = {}
    for option in options:
        holders.setdefault(option.text.casefold(), set()).add(option.doc_index)
    return frozenset(text for text, docs in holders.items() if len(docs) >= least)


def choose_headlines(
    candidates: Sequence[Sequence[int]],
    terms: Sequence[Sequence[TermScore]],
    title_of: Callable[[int], str],
    text_of: Callable[[int], str],
    keys_of: Callable[[str], list[str]],
) -> list[Headline]:
    """One headline per cluster, none shared by two clusters.

    Parameters
    ----------
    candidates : sequence of sequence of int, one per cluster
        Document indexes of the members nearest the centroid, nearest first.
    terms : sequence of sequence of TermScore, one per cluster
        The cluster's distinguishing terms (chi-square), best first.
    title_of, text_of : callable
        A document's title (display form) and text.
    keys_of : callable
        The analyzer's terms of a string, in order (words only; adjacent pairs are formed here).

    Returns
    -------
    list of Headline
        In cluster order. Per cluster the order of preference is: titles that carry a term (most weight
        first, then nearest), sentences that carry a term (most weight, then nearest), the other usable
        titles (nearest first), sentences found in several candidate documents (`repeated_sentences`) or
        holding a web address, and last the top terms themselves. Clusters choose in order (largest
        first), each taking its best option that no earlier cluster took (compared without case).
    """
    templates = template_shapes([title_of(d) for group in candidates for d in group])
    # every usable sentence of every cluster's candidates, unweighted, to find those many documents share
    wrapped = first_lines_wrapped(candidates, title_of, text_of)
    everywhere = [o for group in candidates
                  for o in _sentence_options(group, title_of, text_of, {}, keys_of, templates, every=True,
                                             wrapped=wrapped)]
    repeated = repeated_sentences(everywhere)
    taken: set[str] = set()
    chosen = []
    for group, cluster_terms in zip(candidates, terms, strict=True):
        weights = term_weights(cluster_terms)
        titles = _title_options(group, title_of, text_of, weights, keys_of, templates, wrapped)
        rank = {d: i for i, d in enumerate(group)}
        carrying = sorted((o for o in titles if o.score > 0), key=lambda o: (-o.score, rank[o.doc_index]))
        said = sorted(_sentence_options(group, title_of, text_of, weights, keys_of, templates, wrapped=wrapped),
                      key=lambda o: -o.score)  # stable
        # a sentence many documents share, or one that points to a web address, says little of its own
        own = [o for o in said if o.text.casefold() not in repeated and not _URL.search(o.text)]
        shared = [o for o in said if o.text.casefold() in repeated or _URL.search(o.text)]
        plain = [o for o in titles if o.score <= 0]
        fallback = _Option("terms: " + ", ".join(t.term for t in cluster_terms[:4]) if cluster_terms else "(no terms)",
                           "terms", -1, 0.0)
        pick = next((o for o in (*carrying, *own, *plain, *shared) if o.text.casefold() not in taken), fallback)
        taken.add(pick.text.casefold())
        chosen.append(Headline(pick.text, pick.source, pick.doc_index))
    return chosen
