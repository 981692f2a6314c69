"""Syntax errors that name what the user wrote (querylang/syntax_help.py): an unclosed string,
arithmetic, a function the language lacks, a word of SQL (ISO/IEC 9075 keywords), a misspelt
relation; each with its caret and a hint, never the parser's list of expected terminals."""
from __future__ import annotations

import pytest

from engine.errors import StrataError
from querylang.parser import parse
from querylang.syntax_help import relation_words


def error(text: str) -> StrataError:
    with pytest.raises(StrataError) as info:
        parse(text)
    return info.value


@pytest.mark.parametrize("text, at, message, hint", [
    ('find t = word(form = "abc) count', '"abc', "not closed", 'double quote'),
    ('find t = word(form = "a\\") count', '"a', "not closed", None),
    ("find t = word where lower(t.form) + 1 > 3", "+", "arithmetic", "length(t.form) > 3"),
    ("find t = word where t.ord * 2 > 3", "*", "arithmetic", None),
    ("find t = word where upper(t.form) = \"A\"", "upper", "no function `upper()`", "lower(x)"),
    ("find t = word show avg(t.ord)", "avg", "no function `avg()`", "did you mean mean()?"),
    ("SELECT * FROM word", "SELECT", "word of SQL", "find v = layer"),
    ('find t = word where t.form = "a" group by t.lemma', "group", "word of SQL", "per"),
    ('find t = word where t.form like "a%"', "like", "word of SQL", "~"),
    ("find t = word, p = word where t dependson p", "dependson", "unknown relation `dependson`", "depends on"),
    ("find t = word, p = word where t child off p", "child", "unknown relation `child off`", "child of"),
    ("find t = word, p = word where t insde p", "insde", "unknown relation", "inside"),
])
def test_constructs_the_language_lacks_are_named(text, at, message, hint):
    err = error(text)
    assert message in err.message, err.message
    assert (err.line, err.column) == (1, text.index(at) + 1)
    if hint:
        assert hint in (err.hint or ""), err.hint
    assert "expected one of" not in str(err)


def test_an_unknown_word_far_from_any_relation_lists_the_relations():
    err = error("find t = word, p = word where t zzzzqqq p")
    assert err.message == "unknown relation `zzzzqqq`" and "depends on" in err.hint


def test_the_relation_words_come_from_the_grammar():
    words = relation_words()
    assert "depends on" in words and "previous mention of" in words and "meets" in words
    assert all(r"\s" not in w for w in words)
    for w in words:       # each relation word parses as a relation
        parse(f"find a = word, b = word where a {w} b")


def test_a_valid_query_is_untouched():
    parse('find t = word where length(t.form) > 3 and lower(t.form) != "x" count per fold(t.form)')
