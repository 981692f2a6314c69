"""Distance bounds, tolerances and the same sentence: what the checker lets through and what
it refuses, with the caret where the mistake is (querylang/bounds.py)."""
from __future__ import annotations

import re

import pytest

from engine.errors import StrataError
from querylang import ast
from querylang.pipeline import run_passes
from tests.test_querylang_checker import catalog, error, run


def _caret(text: str, err: StrataError, under: str) -> None:
    assert (err.line, err.column) == (1, text.index(under) + 1), (err.column, text)


@pytest.mark.parametrize("text, under, says", [
    # a bound on a time relation without a unit: the caret under the number
    ("find a = word, b = word where a before b by at most 100", "100", "needs a unit"),
    ("find a = word, b = word where a precedes b by at least 2", "2", "words, 2 tokens or 2 chars"),
    # a text unit on a time relation, a time unit on a text relation
    ("find a = word, b = word where a after b by at most 3 words", "3 words", "ms or s, not words"),
    ("find a = word, b = word where a precedes b by at most 30ms", "30ms", "not ms"),
    ("find a = word, b = word where a follows b by at least 1s", "1s", "not s"),
    # a bound where it means nothing
    ("find a = word, b = word where a directly precedes b by at most 2 words", "2 words", "not of `directly precedes`"),
    ("find a = word, b = word where a meets b by at most 20ms", "20ms", "not of `meets`"),
    ("find a = mention, b = mention where a inside b by at most 1 word", "1 word", "not of `inside`"),
    # numbers that are no gap
    ("find a = word, b = word where a precedes b by at most -1 words", "-1", "not negative"),
    ("find a = word, b = word where a precedes b by at most 1.5 words", "1.5", "whole number"),
    ("find a = word, b = word where a precedes b by at least 5 and at most 3 words", "3 words", "no gap is at least 5"),
    ("find a = word, b = word where a before b by at least 1s and at most 900ms", "900ms", "no gap is at least 1s"),
    ("find a = word, b = word where a precedes b by at least 1 words by at most 9 chars", "9 chars", "different units"),
    # a tolerance outside Allen's relations, or without a time unit
    ("find a = word, b = word where a precedes b give or take 1 words", "1 words", "not for `precedes`"),
    ("find a = word, b = word where a inside b in time give or take 5ms", "5ms", "not for `inside`"),
    ("find a = word, b = word where a shares time with b give or take 5ms", "5ms", "not for `shares time with`"),
    ("find a = word, b = word where a meets b give or take 20", "20", "needs a unit"),
    ("find a = word, b = word where a meets b give or take 2 words", "2 words", "not words"),
])
def test_refused_with_the_caret_under_the_quantity(text, under, says):
    err = error(text)
    assert says in err.message, err.message
    _caret(text, err, under)


def test_words_need_layers_counted_in_words():
    text = "find a = phrase, b = word where a precedes b by at most 2 words"
    err = error(text)
    assert "not counted in words" in err.message and "chars" in err.hint
    run("find a = phrase, b = word where a precedes b by at most 2 chars")


def test_accepted_forms_keep_their_values():
    rel = run("find a = word, b = word where a follows b by at least 0 words and at most 3 words "
              "in the same sentence").query.where
    assert rel.at_least == ast.Literal(0, "words") and rel.at_most == ast.Literal(3, "words") and rel.same_sentence
    rel = run("find a = word, b = word where a after b by at least 1s and at most 1000ms").query.where
    assert rel.in_time and rel.at_least.unit == "s" and rel.at_most.unit == "ms"
    rel = run("find a = word, b = word where a meets b give or take 20ms").query.where
    assert rel.tolerance == ast.Literal(20, "ms")
    assert run("find a = word, b = word where a meets b give or take 0ms").query.where.tolerance is None


def test_the_sql_has_each_bound_as_a_range_test_with_a_parameter():
    """The bounds are range tests on the second node's start, as the compiler docstring
    states, with their values bound as parameters (microseconds for times); `strata explain`
    prints this SQL and its parameters."""
    sql = run_passes("find a = word, b = word where a after b by at least 100ms and at most 1.5s", catalog()).sql
    tests = re.findall(r'(\w+)\."t_start" (>=|<=) (\w+)\."t_end" \+ \$(\d+)', sql.sql)
    assert {(op, sql.params[int(n) - 1]) for _, op, _, n in tests} == {(">=", 100_000), ("<=", 1_500_000)}
    assert {(x, y) for x, _, y, _ in tests} == {("v0", "v1")}       # a after b: a's start - b's end
    sql = run_passes("find a = word, b = word where a precedes b by at most 2 words in the same sentence",
                     catalog()).sql
    assert re.search(r'(\w+)\."sent" = (\w+)\."sent"', sql.sql)
    found = re.search(r'\w+\."ord" <= \w+\."ord" \+ \$(\d+) \+ 1', sql.sql)
    assert found and sql.params[int(found.group(1)) - 1] == 2
