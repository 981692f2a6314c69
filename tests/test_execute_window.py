"""Limited listings run on growing windows of documents: the rows must be exactly the first
rows of the full listing, in its order.  Checked on the open treebank (UD English GUM, dev
split, read in place: many documents, so the windows really grow) against the same query run
without a limit, and on the invented ferry corpus for the planner's decision."""
from __future__ import annotations

import pytest
from hypothesis import HealthCheck, given, settings, strategies as st

from engine.execute import compile_query, run_query
from tests.querylang_corpus import ferry_corpus

DOCUMENT_LOCAL = [
    'find t = word(upos = "VERB")',
    'find m = mention, s = sentence where m inside s',
    'find a = word(upos = "ADJ"), n = word(upos = "NOUN") where a directly precedes n',
    'find d = word(deprel = "amod"), h = word where d depends on h',
    'find d = word, h = word(upos = "VERB") where d child of h and d.upos = "PRON"',
    'find s = sentence without t = word(upos = "AUX") where t inside s',
    'find f = word(upos = "INTJ"), n = word(upos = "NOUN") where f precedes n by at most 3 tokens',
    'find a = word(upos = "NUM"), b = word(upos = "NOUN"), s = sentence where a precedes b and b inside s',
]
NOT_LOCAL = [
    # coreference chains are an ordinary column: no promise that a chain stays in one document
    'find a = mention, b = mention where a previous mention of b',
    # a relation under "or" ties nothing
    'find a = word(upos = "ADJ"), n = word(upos = "NOUN") where a directly precedes n or n directly precedes a',
]


@pytest.fixture(scope="module")
def gum(gum_corpora):
    corpus = gum_corpora["dev"][0]
    con = corpus.connect()
    yield con, corpus.store
    con.close()


@pytest.fixture(scope="module")
def full_listings(gum):
    con, store = gum
    return {q: run_query(con, store, q).rows() for q in DOCUMENT_LOCAL + NOT_LOCAL}


@pytest.mark.parametrize("query", DOCUMENT_LOCAL)
@pytest.mark.parametrize("limit", [1, 7, 20, 300])
def test_windowed_rows_are_the_first_rows_of_the_full_listing(gum, full_listings, query, limit):
    con, store = gum
    assert compile_query(query, store, limit=limit).state.sql.window is not None
    hits = run_query(con, store, query, limit=limit)
    full = full_listings[query]
    assert len(full) > 0
    assert hits.rows() == full[:limit]


def test_sparse_hits_widen_the_window(gum, full_listings):
    """INTJ before a noun is rare in GUM dev: the first window holds too few, so it widens,
    each window starting where the last ended and asking only for the rows still missing."""
    con, store = gum
    query = DOCUMENT_LOCAL[6]
    hits = run_query(con, store, query, limit=20)
    assert hits.rows() == full_listings[query][:20]
    assert len(hits.windows) >= 2
    ends = [w[:2] for w in hits.windows]
    assert ends[0][0] == 0 and all(a[1] == b[0] for a, b in zip(ends, ends[1:]))
    assert sum(w[2] for w in hits.windows) == 20


def test_a_dense_listing_reads_a_few_documents_and_a_long_one_runs_plain(gum):
    con, store = gum
    n_docs = con.execute("SELECT count(*) FROM documents").fetchone()[0]
    hits = run_query(con, store, DOCUMENT_LOCAL[0], limit=20)
    assert len(hits.windows) == 1 and hits.windows[0][1] < n_docs // 2
    # 2000 verbs need more than half of the text: one plain statement answers
    assert run_query(con, store, DOCUMENT_LOCAL[0], limit=2000).windows == ()


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.sampled_from(DOCUMENT_LOCAL), st.integers(min_value=0, max_value=400))
def test_random_limits(gum, full_listings, query, limit):
    con, store = gum
    assert run_query(con, store, query, limit=limit).rows() == full_listings[query][:limit]


@pytest.mark.parametrize("query", NOT_LOCAL)
def test_a_query_not_tied_to_one_document_is_not_windowed(gum, full_listings, query):
    con, store = gum
    compiled = compile_query(query, store, limit=20)
    assert compiled.state.sql.window is None
    assert compiled.state.plan.document_local is False
    hits = run_query(con, store, query, limit=20)
    assert hits.windows == ()
    assert hits.rows() == full_listings[query][:20]


def test_aggregates_are_never_windowed(gum):
    _, store = gum
    compiled = compile_query('find t = word(upos = "VERB") count per t.lemma', store, limit=20)
    assert compiled.kind == "aggregate" and compiled.state.sql.window is None


def test_decision_is_shown_by_explain(ferry):
    _, cat = ferry
    text = compile_query('find w = token, s = sentence where w inside s', cat, limit=5).explain_text()
    assert "limit: windowed" in text and "windowed sql" in text
    text = compile_query('find a = mention, b = mention where a same entity as b', cat, limit=5).explain_text()
    assert "limit: not windowed" in text and "windowed sql" not in text


@pytest.fixture(scope="module")
def ferry():
    return ferry_corpus()


@pytest.mark.parametrize(("query", "local"), [
    ("find w = token", True),
    ("find w = token, s = sentence where w inside s", True),
    ("find w = token, p = token where w meets p in time", True),
    ("find a = word, b = word where a depends on b via dep", True),
    ("find a = phrase, b = phrase where a under b", True),
    ("find a = token, b = token, c = token where a precedes b allow cross product", False),   # c is free
    ("find a = mention, b = mention where a same entity as b", False),
    ("find a = token, s = sentence where not (a inside s) allow cross product", False),
])
def test_document_locality(ferry, query, local):
    _, cat = ferry
    plan = compile_query(query, cat, limit=3).state.plan
    assert plan.document_local is local
    assert plan.locality.startswith("windowed" if local else "not windowed")


def test_every_reading_is_not_windowed(ferry):
    _, cat = ferry
    plan = compile_query("find a = phrase, b = phrase where a under b in every reading", cat).state.plan
    assert plan.document_local is False and "every reading" in plan.locality


def test_explain_without_a_limit_names_the_decision(ferry):
    _, cat = ferry
    text = compile_query('find w = token, s = sentence where w inside s', cat).explain_text()
    assert "limit: none given; a listing with one is windowed" in text
    text = compile_query('find w = token, s = sentence where w inside s limit 3', cat).explain_text()
    assert "limit: windowed" in text
