"""Long conditions: chains of 10,000 `or`, `and` or `not` terms parse, check, compile and run
(the grammar reads chains as lists, so nothing recurses per term); parentheses nest up to 100
levels and one more is refused with the caret on it.  Expected counts come from the invented
test corpus's own rows (tests/querylang_corpus.py), read back with plain SQL."""
from __future__ import annotations

import pytest

from engine.errors import StrataError
from engine.execute import run_query
from querylang.parser import MAX_NESTING, parse
from tests.querylang_corpus import ferry_corpus

TERMS = 10_000


@pytest.fixture(scope="module")
def ferry():
    return ferry_corpus()


def count(ferry, where: str) -> int:
    con, cat = ferry
    return run_query(con, cat, f"find t = token where {where} count").rows()[0]["count"]


def test_ten_thousand_ors_run(ferry):
    con, _ = ferry
    forms = [f for (f,) in con.execute('SELECT DISTINCT form FROM "token"').fetchall()]
    terms = [f't.form = "{forms[i % len(forms)]}"' if i % 3 == 0 else f't.form = "absent{i}"' for i in range(TERMS)]
    assert count(ferry, " or ".join(terms)) == con.execute('SELECT count(*) FROM "token"').fetchone()[0]


def test_ten_thousand_ands_run(ferry):
    con, _ = ferry
    want = con.execute("SELECT count(*) FROM token WHERE form <> 'ferry'").fetchone()[0]
    assert count(ferry, " and ".join(['t.form != "ferry"'] * TERMS)) == want


@pytest.mark.parametrize("nots, negated", [(TERMS, False), (TERMS + 1, True)])
def test_ten_thousand_nots_run(ferry, nots, negated):
    con, _ = ferry
    ferries = con.execute("SELECT count(*) FROM token WHERE form = 'ferry'").fetchone()[0]
    total = con.execute('SELECT count(*) FROM "token"').fetchone()[0]
    assert count(ferry, "not " * nots + 't.form = "ferry"') == (total - ferries if negated else ferries)


def nested(levels: int) -> str:
    """`a or (b and (c or (...)))` with ``levels`` parentheses."""
    text = 't.form = "z"'
    for i in range(levels):
        text = f't.form = "a{i}" {"or" if i % 2 else "and"} ({text})'
    return text


def test_parentheses_nest_to_the_limit_and_no_further(ferry):
    assert count(ferry, nested(MAX_NESTING)) == 0
    text = f"find t = token where {nested(MAX_NESTING + 1)} count"
    with pytest.raises(StrataError) as info:
        parse(text)
    err = info.value
    assert "nest deeper than 100" in err.message
    assert text[err.column - 1] == "(" and text[:err.column - 1].count("(") == MAX_NESTING
