"""Short excerpts of a text for lists: whitespace folded, cut at a word boundary, an ellipsis where cut.

Where a cut may fall follows the spirit of Unicode's line-breaking rules (UAX #14): after a space, and
between two ideographs or kana (scripts written without spaces); never inside a grapheme cluster
(UAX #29), so a combining mark, a variation selector or a zero-width joiner stays with its base.
"""

from __future__ import annotations

import unicodedata

ELLIPSIS = "…"
_JOINERS = {"\u200c", "\u200d"}  # zero-width non-joiner and joiner: part of the cluster around them


def clip_text(text: str, limit: int) -> str:
    """`text` with whitespace runs folded to one space, cut to at most `limit` characters.

    A cut text ends with an ellipsis (counted in `limit`) after the last whole word that fits. A
    single word longer than half the room is cut inside, at a grapheme boundary, so that a long URL
    or identifier still shows its start.

    Parameters
    ----------
    text : str
        Any text; it is not escaped (the templates do that).
    limit : int
        Largest length of the result in characters (code points), at least 2.

    Returns
    -------
    str
        The folded text itself when it fits, else a prefix ending in ``…``.
    """
    if limit < 2:
        raise ValueError("limit must be at least 2")
    flat = " ".join(text.split())
    if len(flat) <= limit:
        return flat
    room = limit - len(ELLIPSIS)
    cut = _word_cut(flat, room)
    if cut == 0 or cut < room // 2:  # one long word (or a long run without breaks): cut inside it
        cut = _grapheme_cut(flat, room)
    return flat[:cut].rstrip() + ELLIPSIS


def _word_cut(flat: str, room: int) -> int:
    """The last position at or before `room` where a line may break (0 when none)."""
    for i in range(room, 0, -1):
        if flat[i] == " " or flat[i - 1] == " ":
            return i
        if _wide(flat[i - 1]) and _wide(flat[i]) and not _extends(flat[i]):
            return i
    return 0


def _grapheme_cut(flat: str, room: int) -> int:
    """`room`, moved back so that no combining mark, joiner or selector is split from its base."""
    cut = room
    while cut > 0 and (_extends(flat[cut]) or flat[cut - 1] in _JOINERS):
        cut -= 1
    return cut  # 0 when even the first cluster does not fit: the ellipsis alone


def _extends(ch: str) -> bool:
    """A character that belongs to the grapheme cluster before it (UAX #29 Extend, ZWJ, spacing marks)."""
    return (unicodedata.category(ch) in ("Mn", "Me", "Mc") or ch in _JOINERS
            or "\ufe00" <= ch <= "\ufe0f" or "\U000e0100" <= ch <= "\U000e01ef")


def _wide(ch: str) -> bool:
    """An ideograph, kana or hangul syllable: scripts where a break may fall between two characters."""
    return unicodedata.east_asian_width(ch) in ("W", "F") and unicodedata.category(ch).startswith("L")
