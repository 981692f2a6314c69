"""Sentence keys (querylang/keys.py): when a span relation joins on ``sent``, and on what.

Whether the keyed form gives the same rows as the range join is checked against an
independent evaluator on random corpora (tests/test_query_bruteforce.py: sentences that
never touch, nodes across sentence boundaries, nodes stored without their sentence) and on
the open treebank below; here: which queries get the key and how many branches.
"""
from __future__ import annotations

import pytest

from engine import Corpus
from engine.execute import compile_query
from querylang.catalog import LayerInfo, StaticCatalog
from tests.conftest import gum_file


def _catalog(sent_missing: int | None = 0, separate: bool = True, tree_key: bool = False) -> StaticCatalog:
    s = "sentence"
    return StaticCatalog({
        "sentence": LayerInfo("sentence", "span", rows=10, sentence_layer=s, sent_missing=0, separate=separate),
        "word": LayerInfo("word", "sequence", rows=100, sentence_layer=s, sent_missing=0),
        "mention": LayerInfo("mention", "span", rows=30, sentence_layer=s, sent_missing=sent_missing),
        "tree": LayerInfo("tree", "tree", rows=50, tree=True, sentence_layer=s if tree_key else None),
        "spoken": LayerInfo("spoken", "sequence", rows=90, time=True, sentence_layer=s, sent_missing=0),
    })


def _sql(query: str, catalog: StaticCatalog) -> str:
    return compile_query(query, catalog).state.sql.sql


def _branches(sql: str) -> int:
    return sql.split(" AS (", 1)[1].split(") SELECT", 1)[0].count(" UNION ") + 1


@pytest.mark.parametrize("rel", ["inside", "contains", "overlaps"])
def test_span_relations_between_keyed_layers_join_on_the_sentence(rel):
    sql = _sql(f"find t = word, m = mention where t {rel} m count", _catalog())
    assert '"sent" = ' in sql and _branches(sql) == 1


@pytest.mark.parametrize("missing,branches", [(0, 1), (3, 2), (None, 2)])
def test_nodes_without_a_sentence_get_a_range_branch(missing, branches):
    """A layer with NULL ``sent`` rows (or not counted) adds a branch ``m.sent is missing``."""
    sql = _sql("find t = word, m = mention where t inside m count", _catalog(sent_missing=missing))
    assert _branches(sql) == branches
    assert ('"sent" IS NULL' in sql) == (branches > 1)


@pytest.mark.parametrize("query,catalog", [
    ("find t = word, n = tree where t inside n count", _catalog()),                  # tree: sent not a key
    ("find t = word, m = mention where t inside m count", _catalog(separate=False)),  # sentences may touch
    ("find t = spoken, u = spoken where t overlaps u in time count", _catalog()),        # time, not characters
    ("find t = word, m = mention where t precedes m count", _catalog()),              # not containment
    ("find t = word, m = mention where t inside m or m inside t count", _catalog()),  # an or is split already
])
def test_no_key_where_it_would_not_hold(query, catalog):
    assert '"sent" = ' not in _sql(query, catalog)


def test_the_treebank_counts_are_those_of_the_range_join(tmp_path, monkeypatch):
    """GUM dev: every keyed query gives the count of the same question as a plain range join
    (hand-written SQL against the layer views)."""
    monkeypatch.setenv("STRATA_IMPORT_PROCESSES", "1")
    corpus = Corpus.create(tmp_path / "c")
    corpus.import_files([gum_file("dev")], progress=False)
    con = corpus.connect()
    cases = [
        ('find t = word, m = mention(type = "person") where t inside m count',
         "SELECT count(*) FROM word t JOIN mention m ON m.start <= t.start AND t.\"end\" <= m.\"end\" "
         "WHERE m.type = 'person'"),
        ("find m = mention, s = sentence where s contains m count",
         "SELECT count(*) FROM mention m JOIN sentence s ON s.start <= m.start AND m.\"end\" <= s.\"end\""),
        ("find w = token, m = mention where w overlaps m count",
         "SELECT count(*) FROM token w JOIN mention m ON w.start < m.\"end\" AND m.start < w.\"end\" "
         "AND w.start < w.\"end\" AND m.start < m.\"end\""),
        ("find e = empty, s = sentence where e inside s count",
         "SELECT count(*) FROM empty e JOIN sentence s ON s.start <= e.start AND e.\"end\" <= s.\"end\""),
    ]
    for query, hand in cases:
        assert '"sent" = ' in corpus.explain(query), query
        got = corpus.query(query).to_arrow().column("count").to_pylist()
        assert got == [con.execute(hand).fetchall()[0][0]], query
    con.close()


def test_a_layer_stays_separate_only_while_every_import_says_so(tmp_path):
    """Spans imported into the sentence layer may overlap: the layer is no longer separate and
    the compiler goes back to the range join; the other CoNLL-U layers keep their sentence key."""
    from tests.conftest import first_gum_document
    corpus, _ = first_gum_document(tmp_path)
    layers = corpus.store.layers()
    assert layers["sentence"].separate and layers["word"].sentence_layer == "sentence"
    assert layers["word"].sent_missing == 0
    doc = corpus.store.documents()[0].name
    spans = tmp_path / "extra.spans.tsv"
    spans.write_text(f"doc\tstart\tend\tlabel\n{doc}\t0\t12\tx\n{doc}\t5\t30\ty\n", encoding="utf-8")
    corpus.import_files([spans], progress=False, layer="sentence")
    layers = corpus.store.layers()
    assert not layers["sentence"].separate
    assert '"sent" = ' not in corpus.explain("find t = word, s = sentence where t inside s count")
