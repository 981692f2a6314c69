"""The output clauses (querylang/outputs.py): per, having, order by, count distinct, the
aggregates, value functions and sample, as the parser reads them and the checker resolves or
refuses them, with the caret at the place."""
from __future__ import annotations

import pytest

from engine.errors import StrataError
from querylang import ast
from querylang.parser import parse
from tests.test_querylang_checker import catalog, error, run


def caret_at(err: StrataError, text: str, word: str, nth: int = 0) -> bool:
    """Whether the error's column is the start of the ``nth`` occurrence of ``word``."""
    at = -1
    for _ in range(nth + 1):
        at = text.index(word, at + 1)
    return (err.line, err.column) == (1, at + 1)


# ---- reading ---------------------------------------------------------------------------

def test_per_groups_and_by_is_refused_naming_per():
    q = parse("find t = word count per t.lemma, t.upos")
    assert [i.label for i in q.output.per] == ["t.lemma", "t.upos"]
    text = "find t = word mean(t.ord) by t.lemma"
    with pytest.raises(StrataError) as info:
        parse(text)
    assert caret_at(info.value, text, "by") and "per" in info.value.message
    assert info.value.hint == "write `per t.lemma`"


def test_several_aggregates_having_order_sample_and_limit_in_one_query():
    q = parse("find t = word count, count distinct t.lemma, quantile(t.ord, 0.9) as q90 per t.upos "
              "having count >= 5 and mean(t.ord) > 2 order by q90 desc, count sample 100 seed 7 limit 3")
    assert [i.label for i in q.output.items] == ["count", "count distinct t.lemma", "q90"]
    assert q.output.items[2].call == ast.AggCall("quantile", ast.Path(("t", "ord")), 0.9)
    assert isinstance(q.output.having, ast.And)
    assert [(o.expr, o.descending) for o in q.order] == [(ast.Path(("q90",)), True), (ast.AggCall("count"), False)]
    assert (q.sample.size, q.sample.seed, q.limit) == (100, 7, 3)


def test_a_variable_may_still_be_called_count_rate_or_left():
    q = parse('find count = word, left = word where count.form = "a" and left precedes count '
              'show left.form order by left.form, left')
    assert q.order[0].expr == ast.Path(("left", "form")) and q.order[1].expr == "left"


def test_sample_without_seed_is_seed_0():
    assert parse("find t = word sample 5").sample == ast.Sample(5, 0)


# ---- checking --------------------------------------------------------------------------

def test_count_distinct_of_a_variable_counts_its_nodes():
    c = run('find v = word(upos = "VERB"), o = word(deprel = "obl") where o depends on v count, count distinct v')
    assert c.query.output.items[1].call.arg == ast.Ref("v", "node", "", "node")


@pytest.mark.parametrize("text, word, message", [
    ("find t = word where count > 3", "count", "value of a group"),
    ("find t = word show t.form, mean(t.ord)", "mean", "value of a group"),
    ("find t = word count per t.lemma having t.upos = \"X\"", "t.upos", "single hits"),
    ("find t = word count per t.lemma having t.lemma = \"be\"", "having", "needs an aggregate"),
    ("find t = word mean(t.form)", "t.form", "needs numbers"),
    ("find t = word quantile(t.ord, 1.5)", "quantile", "between 0 and 1"),
    ("find t = word mean(t.ord, 0.5)", "mean", "only quantile"),
    ("find t = word count per t.lemma order by t.upos", "t.upos", "not one"),
    ("find t = word show t.form order by t.lemma", "t.lemma", "not one"),
    ("find t = word count per t.lemma order by left", "left", "no context"),
    ("find t = word sample 0", "0", "at least 1"),
    ("find t = word rate", "rate", "documents or sentences"),
    ("find t = word rate per t.lemma", "t.lemma", "not an attribute"),
    ("find t = word count, count per t.lemma", "count", "two output columns"),
    ("find t = word count distinct mean(t.ord)", "mean", "value of a group"),
    ("find t = word show lower(t.ord)", "lower", "takes text"),
])
def test_mistakes_in_outputs_are_refused_at_their_place(text, word, message):
    err = error(text)
    assert message in err.message, err.message
    assert caret_at(err, text, word, nth=1 if (word == "count" and "count," in text) else 0), (err.column, text)


def test_order_by_an_aggregate_resolves_to_its_output_column():
    c = run("find t = word count, mean(t.ord) as m per t.lemma order by mean(t.ord) desc, t.lemma")
    assert [(o.expr, o.descending) for o in c.query.order] == [("m", True), ("t.lemma", False)]


def test_order_by_in_a_listing_takes_shown_values_and_hit_columns():
    c = run("find t = word show lower(t.form) as f order by f, t.start desc, t, right")
    keys = [o.expr for o in c.query.order]
    assert keys[0] == ast.Call("lower", ast.Ref("t", "column", "form", "str"))
    assert keys[1] == ast.Ref("t", "time", "start", "time") and keys[2] == ast.Ref("t", "text", "text", "str")
    assert keys[3] == "right"


def test_having_may_test_a_group_key():
    c = run('find t = word count per t.lemma having count > 2 and t.lemma != "be"')
    assert isinstance(c.query.output.having, ast.And)


def test_rate_needs_a_layer_of_words():
    cat = catalog()
    layers = {n: l for n, l in cat.layer_map.items() if n != "word"}
    layers = {n: (l if l.word_layer != "word" else l.__class__(**{**l.__dict__, "word_layer": None}))
              for n, l in layers.items()}
    from querylang.catalog import StaticCatalog
    from querylang.checker import check
    text = "find m = mention rate per m.doc.genre"
    with pytest.raises(StrataError) as info:
        check(parse(text), StaticCatalog(layers, cat.sentence, cat.doc), text)
    assert "no layer of words" in info.value.message
