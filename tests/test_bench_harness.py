"""The query benchmark harness: suite pairs agree on a small synthetic corpus; mismatches fail.

The reference for each query is the hand-written SQL beside it in benchmarks/queries/, written
from the documented semantics (querylang/compiler.py docstring; Allen 1983 for time relations).
"""
from __future__ import annotations

import re

import pytest

from benchmarks import harness

TOKENS = 3_000


@pytest.fixture(scope="module")
def corpus(tmp_path_factory):
    work = tmp_path_factory.mktemp("harness")
    folder, manifest = harness.corpus_input(TOKENS, 5, work)
    target = work / "corpus"
    imports = harness.import_corpus(folder, manifest, target, list(harness.ALL_FORMATS))
    return target, imports


def test_every_format_of_the_synthetic_corpus_imports(corpus):
    _, imports = corpus
    assert set(imports) == set(harness.ALL_FORMATS)
    assert all("seconds" in v for v in imports.values()), imports


def test_suite_agrees_with_hand_written_sql(corpus):
    target, _ = corpus
    suite = harness.load_suite()
    assert len(suite) >= 10
    results = [r for r in harness.run_suite(target, suite, repeat=1) if r["status"] != "setup"]
    assert [r["query"] for r in results] == [e.name for e in suite]
    assert {r["query"]: r["status"] for r in results} == {e.name: "agree" for e in suite}
    assert any(r["rows"] > 1 for r in results)  # grouped counts, not only single numbers


def test_a_wrong_reference_is_reported_as_a_difference(corpus, tmp_path):
    target, _ = corpus
    (tmp_path / "x.query").write_text('find t = token(upos = "NOUN") count\n')
    (tmp_path / "x.sql").write_text("SELECT count(*) + 1 FROM token WHERE upos = 'NOUN'\n")
    [r] = [r for r in harness.run_suite(target, harness.load_suite(tmp_path), 1) if r["status"] != "setup"]
    assert r["status"] == "DIFFER"


def test_a_query_without_its_sql_is_refused(tmp_path, capsys):
    (tmp_path / "lonely.query").write_text("find t = token count\n")
    assert harness.main(["--queries", str(tmp_path), "--work", str(tmp_path / "w")]) == 2
    assert "lonely.query: no hand-written lonely.sql" in capsys.readouterr().err


def test_first_word_selects_the_other_benchmarks(tmp_path, capsys):
    assert harness.main(["synth", "--tokens", "200", "--out", str(tmp_path), "--seed", "2"]) == 0
    assert (tmp_path / "manifest.json").exists() and re.match(r"[\d,]+ tokens, ", capsys.readouterr().out)
    assert harness.main(["import", "--tokens", "10", "--data", str(tmp_path / "absent")]) == 2
    assert "treebank not found" in capsys.readouterr().err
