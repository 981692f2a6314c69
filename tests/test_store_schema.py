"""A corpus of an older schema is refused with a message that says what to do, never misread.

Schema 1 named the CoNLL-U syntactic words `token` and the surface tokens `word` (the reverse
of the CoNLL-U standard, universaldependencies.org/format.html); schema 2 uses the standard's
names; schema 3 keeps times as whole microseconds instead of floating-point seconds; schema 4 gives
a text node no timed word covers no time (schema 3 gave it a point at a neighbour's edge). The old corpus is made here by writing version 1 into a new corpus's catalog, as the
older strata did; its files must be left exactly as they were.
"""
from __future__ import annotations

import subprocess
import sys

import duckdb
import pytest

from engine import Corpus, StrataError
from engine.store import CATALOG_FILE, SCHEMA_VERSION


def _with_version(tmp_path, version: str):
    path = tmp_path / "old"
    Corpus.create(path)
    con = duckdb.connect(str(path / CATALOG_FILE))
    con.execute("UPDATE meta SET value = ? WHERE key = 'schema_version'", [version])
    con.close()
    return path


def _files(path):
    return sorted((p.relative_to(path), p.read_bytes()) for p in path.rglob("*") if p.is_file())


def test_a_new_corpus_has_the_current_schema(tmp_path):
    assert SCHEMA_VERSION == "4"
    assert Corpus.create(tmp_path / "c").store.meta("schema_version") == SCHEMA_VERSION


@pytest.mark.parametrize("version, says", [("1", "strata migrate"), ("2", "strata migrate"), ("3", "strata migrate"), ("9", "does not know")])
def test_an_older_or_unknown_schema_is_refused_and_left_alone(tmp_path, version, says):
    path = _with_version(tmp_path, version)
    before = _files(path)
    with pytest.raises(StrataError, match=says):
        Corpus.open(path)
    done = subprocess.run([sys.executable, "-m", "engine.cli", "info", str(path)], capture_output=True, text=True)
    assert done.returncode == 2 and "Traceback" not in done.stderr
    assert f"schema {version}" in done.stderr.replace("\n", " ") or f"schema {version!r}" in done.stderr
    assert _files(path) == before
