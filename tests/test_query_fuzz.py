"""The query fuzzer (benchmarks/query_fuzz.py) in the suite: 2,000 queries built from the
grammar's pieces and the corpus's names, or broken by random edits, or random text, against a
corpus with every kind of layer (the first document of UD English GUM's dev split, read in
place, with a time tier, spans and trees written from its tokens).  Every outcome must be a
result or a StrataError that shows its place.  The long campaign is
``python -m benchmarks.reliability --fuzz 100000``."""
from __future__ import annotations

import duckdb
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from benchmarks.query_fuzz import Vocabulary, any_query, fuzz_corpus, outcome, queries
from engine import StrataError
from engine.execute import db_error_place
from tests.conftest import gum_file


@pytest.fixture(scope="module")
def fuzzed(tmp_path_factory):
    corpus = fuzz_corpus(tmp_path_factory.mktemp("fuzz"), gum_file("dev"))
    return corpus, Vocabulary.of(corpus.store)


@settings(max_examples=2000, deadline=None, derandomize=True, database=None,
          suppress_health_check=list(HealthCheck))
@given(data=st.data())
def test_every_fuzzed_query_ends_in_a_result_or_a_placed_error(fuzzed, data):
    corpus, vocab = fuzzed
    text = data.draw(any_query(vocab))
    got = outcome(corpus, text, timeout=10)
    assert got.kind != "defect", f"{text!r}: {got.detail}"


def test_the_fuzzer_reaches_results_as_well_as_errors(fuzzed):
    """A fuzzer whose queries all fail would test only the parser: a fifth of the built ones
    must run (300 drawn with a fixed seed; about a quarter do)."""
    corpus, vocab = fuzzed
    kinds = []

    @settings(max_examples=300, deadline=None, derandomize=True, database=None,
              suppress_health_check=list(HealthCheck))
    @given(st.data())
    def draw(data):
        kinds.append(outcome(corpus, data.draw(queries(vocab)), timeout=10).kind)
    draw()
    assert kinds.count("result") >= len(kinds) // 5 and "defect" not in kinds


def _duckdb_message(sql: str) -> duckdb.Error:
    """A real error of DuckDB's, as it words it."""
    try:
        duckdb.connect().execute(sql)
    except duckdb.Error as err:
        return err
    raise AssertionError(f"{sql} did not fail")


def test_a_database_error_that_gets_through_gets_its_caret(fuzzed, monkeypatch):
    """Were a value to fail a cast at run time, the caret goes under the attribute the
    database names (before: always column 1)."""
    import engine.execute as execute
    corpus, _ = fuzzed
    err = _duckdb_message("SELECT CAST(feats AS BOOLEAN) FROM (SELECT 'Tense=Past' AS feats)")
    assert "feats" in str(err)

    def fail(*args, **kwargs):
        raise err
    monkeypatch.setattr(execute, "_fetch_arrow", fail)
    query = 'find w = word\n  where w.upos = "VERB" and w.feats is not missing count'
    with pytest.raises(StrataError) as caught:
        corpus.query(query)
    assert (caught.value.line, caught.value.column) == (2, 29)
    assert str(caught.value).splitlines()[1:3] == ['    where w.upos = "VERB" and w.feats is not missing count',
                                                   "  " + " " * 28 + "^"]


@pytest.mark.parametrize("text, message, place", [
    ('find w = word where w.feats = "x"', "Could not convert string 'x' to BOOL when casting from source column feats",
     (1, 21)),
    ('find w = word where w.form ~ "(("', "Invalid Input Error: invalid regex '(('", (1, 30)),
    ('find w = word where w.form = "a"\n  or w.form = "b"', "Conversion Error: 'b'", (2, 15)),
    ("find w = word count", "Out of Range Error: overflow", (1, None)),
])
def test_where_a_database_message_points(text, message, place):
    assert db_error_place(text, message) == place
