"""The simplifier of decision-rule paths, checked against truth tables (and sympy where it is installed)."""

from __future__ import annotations

import itertools
import random
from collections.abc import Sequence

import pytest

from pilewise.describe.rules import _Columns, exclusive_groups, rule_text, rule_words, simplify_paths

Literal = tuple[int, bool]
Term = Sequence[Literal]


def _holds(terms: Sequence[Term], assignment: dict[int, bool]) -> bool:
    """Truth of an "or" of "and"s under one assignment (the definition of disjunctive normal form)."""
    return any(all(assignment[c] == present for c, present in term) for term in terms)


def _assignments(variables: Sequence[int], exclusive: Sequence[frozenset[int]] = ()) -> list[dict[int, bool]]:
    """Every assignment of the variables (itertools truth table), without those two exclusive columns share."""
    rows = []
    for values in itertools.product((False, True), repeat=len(variables)):
        row = dict(zip(variables, values, strict=True))
        if all(sum(row.get(c, False) for c in group) <= 1 for group in exclusive):
            rows.append(row)
    return rows


def _random_paths(rng: random.Random, n_vars: int) -> list[list[Literal]]:
    """1-3 paths of 1-3 conditions on distinct columns, as a depth-3 tree's leaves give them."""
    paths = []
    for _ in range(rng.randint(1, 3)):
        columns = rng.sample(range(n_vars), rng.randint(1, min(3, n_vars)))
        paths.append([(c, rng.random() < 0.5) for c in columns])
    return paths


def _literals(terms: Sequence[Term]) -> int:
    return sum(len(t) for t in terms)


def test_simplified_rule_equals_the_paths_on_every_assignment() -> None:
    # Truth tables (itertools): the simplified "or" of "and"s is the same Boolean function, never longer.
    rng = random.Random(0)
    for _ in range(300):
        n_vars = rng.randint(1, 6)
        paths = _random_paths(rng, n_vars)
        simple = simplify_paths(paths)
        for row in _assignments(range(n_vars)):
            assert _holds(simple, row) == _holds(paths, row), (paths, simple, row)
        assert _literals(simple) <= _literals(paths)
        assert len(simple) <= len(paths)


def test_simplified_rule_equals_the_paths_where_categories_of_one_field_exclude_each_other() -> None:
    # Truth tables without the impossible rows (two values of one field at once): equal on every other row.
    rng = random.Random(2)
    for _ in range(200):
        n_vars = rng.randint(2, 6)
        shuffled = rng.sample(range(n_vars), n_vars)
        cut = rng.randint(2, n_vars)
        exclusive = [frozenset(shuffled[:cut])]
        paths = _random_paths(rng, n_vars)
        simple = simplify_paths(paths, exclusive)
        for row in _assignments(range(n_vars), exclusive):
            assert _holds(simple, row) == _holds(paths, row), (paths, exclusive, simple, row)
        assert _literals(simple) <= _literals(paths)


def test_simplified_rule_is_as_short_as_sympys_minimal_dnf() -> None:
    # Reference: sympy's simplify_logic(form="dnf", force=True), Quine-McCluskey minimization; the
    # simplifier needs no more terms, and both expressions agree on every assignment.
    sympy = pytest.importorskip("sympy")
    rng = random.Random(1)
    symbols = sympy.symbols("x0:6")
    for _ in range(120):
        n_vars = rng.randint(2, 6)
        paths = _random_paths(rng, n_vars)
        expression = sympy.Or(*[sympy.And(*[s if p else ~s for s, p in ((symbols[c], p) for c, p in path)])
                                for path in paths])
        reference = sympy.simplify_logic(expression, form="dnf", force=True)
        terms = sympy.Or.make_args(reference) if reference not in (sympy.true, sympy.false) else ()
        simple = simplify_paths(paths)
        if reference == sympy.true:
            assert simple == ((),)
            continue
        assert len(simple) <= len(terms), (paths, simple, reference)
        for row in _assignments(range(n_vars)):
            value = bool(reference.subs({symbols[c]: v for c, v in row.items()}))
            assert _holds(simple, row) == value


def test_alternatives_that_differ_in_one_condition_merge() -> None:
    # The case reported in issue 11: (code and not phone and not greenup) or (code and not phone and greenup)
    # is code and not phone (Boolean algebra: (A and x) or (A and not x) = A).
    code, phone, greenup = 0, 1, 2
    paths = [[(code, True), (phone, False), (greenup, False)], [(code, True), (phone, False), (greenup, True)]]
    assert simplify_paths(paths) == (((code, True), (phone, False)),)


def test_a_condition_implied_by_another_category_of_the_field_is_dropped() -> None:
    # A text has one value per field: channel = chat implies channel != phone, so the second condition goes;
    # checked on the truth table without the impossible rows.
    columns = _Columns(labels=("refund", "channel = chat", "channel = phone"),
                       present_text=('mentions "refund"', 'channel is "chat"', 'channel is "phone"'),
                       absent_text=('does not mention "refund"', 'channel is not "chat"', 'channel is not "phone"'),
                       field=("", "channel", "channel"), shown=("refund", "chat", "phone"))
    exclusive = exclusive_groups(columns.field)
    assert exclusive == [frozenset({1, 2})]
    paths = [[(0, True), (1, True), (2, False)]]
    simple = simplify_paths(paths, exclusive)
    assert simple == (((0, True), (1, True)),)
    for row in _assignments(range(3), exclusive):
        assert _holds(simple, row) == _holds(paths, row)
    assert rule_text(simple, columns) == 'mentions "refund" and channel is "chat"'
    assert rule_words(simple, columns) == 'Documents that mention "refund", whose channel is "chat".'


def test_positive_conditions_are_preferred_when_the_rule_is_as_short() -> None:
    # (not a and b) or a = a or b (absorption); the simplifier keeps the form without the negation.
    assert set(simplify_paths([[(0, False), (1, True)], [(0, True)]])) == {((0, True),), ((1, True),)}
    # within a term the positive condition comes first
    assert simplify_paths([[(0, False), (1, True)]]) == (((1, True), (0, False)),)


def test_a_path_contained_in_another_is_dropped_and_impossible_or_certain_rules_are_named() -> None:
    # Absorption: a or (a and b) = a; a or not a is always true; an empty "or" never holds.
    assert simplify_paths([[(0, True)], [(0, True), (1, True)]]) == (((0, True),),)
    assert simplify_paths([[(0, True)], [(0, False)]]) == ((),)
    assert simplify_paths([]) == ()


def test_rule_words_say_the_rule_in_plain_words() -> None:
    # Wording chosen for docs/method.md ("common practice": negations after "but not", "either" for a choice).
    columns = _Columns(labels=("copying", "andreas", "david", "www"),
                       present_text=tuple(f'mentions "{w}"' for w in ("copying", "andreas", "david", "www")),
                       absent_text=tuple(f'does not mention "{w}"' for w in ("copying", "andreas", "david", "www")),
                       field=("", "", "", ""), shown=("copying", "andreas", "david", "www"))
    assert rule_words((((0, True), (3, False)),), columns) == 'Documents that mention "copying" but not "www".'
    assert rule_words((((0, True), (1, True)), ((0, True), (2, True))), columns) == (
        'Documents that mention "copying" and either "andreas" or "david".')
    assert rule_words((((1, True),), ((2, True),)), columns) == 'Documents that mention "andreas" or "david".'
    assert rule_words((((1, False), (2, False)),), columns) == 'Documents that mention neither "andreas" nor "david".'
    assert rule_words((), columns) == ""
