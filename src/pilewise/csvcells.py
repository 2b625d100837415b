"""CSV cells escaped against spreadsheet formulas, and read back (a base module: any stage may import it).

Every CSV cell that a spreadsheet would read as a formula is written with a leading single quote (OWASP,
"CSV Injection"), and pilewise's own readers remove that quote again.
"""

from __future__ import annotations

import re
from collections.abc import Iterable

_FORMULA_START = re.compile(r"'*[=+\-@\t\r]")  # OWASP: = + - @ tab CR start a formula; quotes counted
_ESCAPED = re.compile(r"'+[=+\-@\t\r]")
_PLAIN_NUMBER = re.compile(r"[+-]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]+)?")
_RISKY_FIRST = frozenset("'=+-@\t\r")  # the first characters _FORMULA_START can match


def spreadsheet_cell(value: object) -> object:
    """A CSV cell that no spreadsheet runs as a formula (OWASP "CSV Injection" guidance).

    A text cell that starts with ``=``, ``+``, ``-``, ``@``, a tab or a carriage return (after any
    single quotes of its own) gets one leading single quote; a plain number such as ``-0.5`` or ``+3``
    is left alone, and so is every value that is not text. `read_spreadsheet_cell` undoes it exactly.
    """
    # the start test first: most cells fail it, and it is cheaper than the number test
    if not isinstance(value, str) or not _FORMULA_START.match(value) or _PLAIN_NUMBER.fullmatch(value):
        return value
    return "'" + value


def spreadsheet_row(cells: Iterable[object]) -> list[object]:
    """Every cell of a row through `spreadsheet_cell`; a text cell whose first character cannot start a formula
    is passed as it is without the call (the same cells: a run's exports hold millions of them)."""
    return [spreadsheet_cell(cell) if isinstance(cell, str) and cell[:1] in _RISKY_FIRST else cell for cell in cells]


def read_spreadsheet_cell(cell: str) -> str:
    """The value `spreadsheet_cell` was given: one leading quote removed from an escaped cell."""
    return cell[1:] if _ESCAPED.match(cell) else cell


def read_spreadsheet_row(cells: Iterable[str]) -> list[str]:
    """Every cell of a row through `read_spreadsheet_cell`."""
    return [read_spreadsheet_cell(cell) for cell in cells]
