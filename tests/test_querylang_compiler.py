"""Compiler: literals travel only as bound parameters, identifiers only from the catalog."""
from __future__ import annotations

import dataclasses

import re

import pytest

from querylang.catalog import StaticCatalog

from engine.execute import compile_query, run_query
from querylang.compiler import ident
from querylang.pipeline import PASSES, run_passes
from tests.querylang_corpus import ferry_corpus

HOSTILE = [
    "x'; DROP TABLE token; --",
    'a"; DELETE FROM word; --',
    "../../../etc/passwd",
    "'); COPY token TO '/tmp/stolen.csv'; --",
    "read_parquet('/etc/shadow')",
    "$1 OR true",
    "\\\\ ; ATTACH 'evil.db'",
]


@pytest.fixture(scope="module")
def corpus():
    return ferry_corpus()


def quoted(value: str) -> str:
    return '"' + value.replace("\\", "\\\\").replace('"', '\\"') + '"'


def string_literals_of(sql: str) -> list[str]:
    return re.findall(r"'[^']*'", sql)


def test_pipeline_is_one_visible_list():
    assert [p.__name__ for p in PASSES] == ["parse", "check", "plan", "to_sql"]


@pytest.mark.parametrize("value", HOSTILE)
def test_hostile_strings_become_parameters(corpus, value):
    con, cat = corpus
    text = (f"find w = token(form = {quoted(value)} or form in [{quoted(value)}] or form matches {quoted(re.escape(value))})"
            f" where w.sentence.speaker != {quoted(value)}")
    before = [con.execute(f'SELECT count(*) FROM "{t}"').fetchall()[0][0] for t in ("token", "word")]
    compiled = compile_query(text, cat)
    assert value not in compiled.sql
    assert string_literals_of(compiled.sql) == []          # no quoted value at all in the SQL text
    assert value in compiled.params
    hits = run_query(con, cat, text)
    assert len(hits) == 0
    # nothing was dropped or deleted
    after = [con.execute(f'SELECT count(*) FROM "{t}"').fetchall()[0][0] for t in ("token", "word")]
    assert after == before and before[0] > 0


def test_numbers_units_and_labels_are_parameters(corpus):
    _, cat = corpus
    compiled = compile_query('find a = word, b = word where a depends on b as "nsubj" and '
                             'distance(a, b) > 7 tokens and gap(a, b) < 250ms limit 3', cat)
    assert "nsubj" not in compiled.sql and " 7" not in compiled.sql and "250" not in compiled.sql
    assert {"nsubj", 7, 250_000, 3} <= set(compiled.params)          # 250 ms as whole microseconds


def test_every_identifier_is_quoted_catalog_name_or_generated_alias(corpus):
    _, cat = corpus
    compiled = compile_query('find np = phrase(label = "NP"), w = token where w inside np show w.feats_missing_ok'
                             .replace(" show w.feats_missing_ok", " show w.form, w.doc.genre"), cat)
    quoted_names = set(re.findall(r'"((?:[^"]|"")*)"', compiled.sql))
    catalog_names = set(cat.layers()) | {"documents", "doc", "sentence"}
    for info in cat.layers().values():
        catalog_names |= set(info.attrs)
    catalog_names |= {"id", "doc", "start", "end", "t_start", "t_end", "sent", "ord", "tok_first", "tok_last",
                      "word_first", "word_last", "parent", "depth", "pre", "post", "reading", "text", "base",
                      "length", "name", "genre", "sent_id", "src", "dst", "label"}
    assert quoted_names <= catalog_names
    # bare tokens in the SQL are keywords, functions or generated aliases (v0, w0_1, e0, c3, _x0, ...)
    unquoted = re.sub(r'"(?:[^"]|"")*"', "", compiled.sql)
    names = set(re.findall(r"[A-Za-z_][A-Za-z_0-9]*", unquoted))
    assert "np" not in names and "w" not in names                  # user variable names never reach SQL


def test_ident_escapes_double_quotes():
    assert ident('a"b') == '"a""b"'


def test_explain_lists_passes_output(corpus):
    con, cat = corpus
    compiled = compile_query('find s = word(deprel = "nsubj"), v = word where s depends on v count per v.lemma', cat)
    text = compiled.explain_text(con)
    for part in ("variables:", "join order:", "sql:", "parameters:", "$1 = 'nsubj'", "duckdb plan:"):
        assert part in text


def test_join_order_starts_from_the_most_selective_variable(corpus):
    _, cat = corpus
    state = run_passes('find w = token, v = word(lemma = "book") where w inside v', cat)
    assert state.plan.order == ("v", "w")
    assert state.plan.estimates["v"] < state.plan.estimates["w"]


def test_dependency_through_edge_table_or_tree_columns(corpus):
    con, cat = corpus
    # a layer the edge set joins but with no tree of its own (here the tokens, declared so for
    # this check of the SQL's shape): the edge set is joined (deduplicated) or tested with EXISTS
    layers = dict(cat.layer_map)
    layers["token"] = dataclasses.replace(layers["token"], edge_sets=("dep",))
    joined = StaticCatalog(layers, cat.sentence, cat.doc)
    top = compile_query("find a = token, b = token where a depends on b", joined).sql
    nested = compile_query("find a = token, b = token where a precedes b and not a depends on b", joined).sql
    assert "SELECT DISTINCT" in top and "EXISTS" not in top
    assert "EXISTS" in nested
    # an "or" between relations becomes one join per branch
    either = compile_query("find a = token, b = token where a depends on b or b depends on a", joined).sql
    assert " UNION " in either and "EXISTS" not in either
    # word layer carrying the basic tree: parent = head, label = deprel (no edge table needed)
    tree = compile_query('find a = word, b = word where a depends on b as "nsubj"', cat)
    assert '"dep"' not in tree.sql and '"parent"' in tree.sql
    edges = {(s, d) for s, d in con.execute('SELECT src, dst FROM "dep" WHERE label = \'nsubj\'').fetchall()}
    hits = run_query(con, cat, 'find a = word, b = word where a depends on b as "nsubj"').to_arrow()
    assert set(zip(hits.column("a.node").to_pylist(), hits.column("b.node").to_pylist())) == edges


def test_names_that_are_sql_keywords_stay_identifiers():
    from tests.querylang_corpus import CorpusBuilder
    b = CorpusBuilder()
    b.layer("group", "sequence")
    b.layer("sentence", "span")
    d = b.doc("d", "x y")
    b.node("sentence", d, 0, 3, sent_id="s1")
    b.node("group", d, 0, 1, order="1", **{"from": "a"})
    b.node("group", d, 2, 3, order="2", **{"from": "b"})
    con, cat = b.build()
    hits = run_query(con, cat, 'find select = group(order = "1") where select.from != "b" show select.order')
    assert hits.to_arrow().column("select.order").to_pylist() == ["1"]
    assert hits.to_arrow().column("select.text").to_pylist() == ["x"]
