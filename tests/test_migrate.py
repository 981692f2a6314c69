"""`strata migrate`: a corpus written by the last strata of schema 1 (CoNLL-U layer names the
other way round), of schema 2 (floating-point times) or of schema 3 (a zero-width time for a
text node no timed word covers) becomes, all or nothing, the corpus a fresh import of the same
files makes today.

The old corpus is written by that strata itself: its source is taken from this repository's
history (`git archive` of the last commit before the rename) and run in a child process. The
input is the open treebank's first sentences (read in place) and a span table anchored on
surface-token ordinals. Judge: a fresh import by the current strata, layer by layer and row by
row, and the catalog's layer list; plus queries whose answers the `conllu` library gives.
"""
from __future__ import annotations

import io
import json
import shutil
import subprocess
import sys
import tarfile
from pathlib import Path

import conllu
import pytest

from engine import Corpus, StrataError
from engine.lock import LOCK_FILE
from engine.migrate import migrate
from tests.conftest import REPO, first_gum_sentences

LAST_SCHEMA_1 = "8a5af74ccd4b19b7c4a6f94ca2d05afc3a6c37bf"   # the commit before the layer rename
LAST_SCHEMA_2 = "8dc1e57517405e340c52aa4494f41e1e4e64adbd"   # the commit before whole-microsecond times
LAST_SCHEMA_3 = "3ff21056a70037eb8f6d11f25964f31693c4087b"   # the commit before untimed text nodes
#: (commit, its schema, the anchor it needs for surface-token ordinals)
OLD = {"1": (LAST_SCHEMA_1, "tokens:word"), "2": (LAST_SCHEMA_2, "tokens:token"),
       "3": (LAST_SCHEMA_3, "tokens:token")}


def old_strata(tmp: Path, commit: str) -> Path:
    """The source tree of an older strata, or skip when the history is not here."""
    if shutil.which("git") is None:
        pytest.skip("git is not installed: cannot take the old strata from the history")
    done = subprocess.run(["git", "-C", str(REPO), "archive", "--format=tar", commit],
                          capture_output=True, timeout=120)
    if done.returncode != 0:
        pytest.skip(f"commit {commit[:8]} is not in this clone (shallow?): migration check skipped")
    out = tmp / "old-strata"
    with tarfile.open(fileobj=io.BytesIO(done.stdout)) as tar:
        tar.extractall(out, filter="data")
    return out


def spans_on_tokens(tmp: Path, source: Path) -> Path:
    """Spans over surface-token ordinals (per document, from 0): every 7th token, two long."""
    rows, doc, k = [], None, 0
    for sentence in conllu.parse(source.read_text(encoding="utf-8")):
        if "newdoc id" in sentence.metadata:
            doc, k = sentence.metadata["newdoc id"], 0
        covered: set[int] = set()
        for t in sentence:
            if isinstance(t["id"], tuple) and t["id"][1] == "-":
                covered.update(range(t["id"][0], t["id"][2] + 1))
        n = sum(1 for t in sentence if (isinstance(t["id"], tuple) and t["id"][1] == "-")
                or (isinstance(t["id"], int) and t["id"] not in covered))
        rows += [f"{doc}\t{i}\t{i + 1}\tpair\n" for i in range(k, k + n - 1, 7)]
        k += n
    path = tmp / "pairs.spans.tsv"
    path.write_text("doc\tstart\tend\tlabel\n" + "".join(rows), encoding="utf-8")
    return path


def spoken_tier(tmp: Path, source: Path) -> Path:
    """The first document's surface tokens (no punctuation) as an aligner's words, with times
    of 3 decimals written as text (floats in schema 1 and 2, whole microseconds now)."""
    rows, t, doc = [], 0.0, None
    for sentence in conllu.parse(source.read_text(encoding="utf-8")):
        if "newdoc id" in sentence.metadata:
            if doc is not None:
                break
            doc = sentence.metadata["newdoc id"]
        covered: set[int] = set()
        for tok in sentence:
            if isinstance(tok["id"], tuple) and tok["id"][1] == "-":
                covered.update(range(tok["id"][0], tok["id"][2] + 1))
                rows.append(tok["form"])
            elif isinstance(tok["id"], int) and tok["id"] not in covered and tok["upos"] != "PUNCT":
                rows.append(tok["form"])
    lines = []
    for i, form in enumerate(rows):
        d = 0.137 + (i % 5) * 0.061
        lines.append(f"{doc}\tspoken\t{t:.3f}\t{t + d:.3f}\t{form.lower()}\n")
        t = round(t + d + (0.2 if i % 4 == 3 else 0.0), 3)
    path = tmp / "timed.tiers.tsv"
    path.write_text("doc\ttier\tstart\tend\tlabel\n" + "".join(lines), encoding="utf-8")
    return path


@pytest.fixture(scope="module", params=sorted(OLD), ids=lambda v: f"schema{v}")
def corpora(tmp_path_factory, request):
    """(migrated corpus, fresh corpus, the CoNLL-U source, an unmigrated copy of the old corpus)."""
    tmp = tmp_path_factory.mktemp("migrate")
    source = first_gum_sentences(tmp, 80)
    spans = spans_on_tokens(tmp, source)
    tiers = spoken_tier(tmp, source)
    commit, anchor = OLD[request.param]
    old_src = old_strata(tmp, commit)
    old = tmp / "old"
    script = (f"import sys; sys.path.insert(0, {str(old_src)!r})\n"
              "from engine import Corpus\nfrom engine.store import SCHEMA_VERSION\n"
              f"assert SCHEMA_VERSION == {request.param!r}, SCHEMA_VERSION\n"
              f"c = Corpus.create({str(old)!r})\n"
              f"c.import_files([{str(source)!r}], progress=False)\n"
              f"c.import_files([{str(spans)!r}], anchor={anchor!r}, layer='pairs', progress=False)\n"
              f"c.import_files([{str(tiers)!r}], progress=False)\n")
    done = subprocess.run([sys.executable, "-c", script], cwd=old_src, capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stderr
    with pytest.raises(StrataError, match="strata migrate"):
        Corpus.open(old)
    shutil.copytree(old, tmp / "kept", symlinks=True)       # an unmigrated copy for the failure test
    cli = subprocess.run([sys.executable, "-m", "engine.cli", "migrate", str(old)], capture_output=True, text=True)
    assert cli.returncode == 0, cli.stderr
    assert not [p for p in tmp.iterdir() if p.name.startswith(".old.")]     # no folder left behind
    fresh = Corpus.create(tmp / "fresh")
    fresh.import_files([source], progress=False)
    fresh.import_files([spans], anchor="tokens:token", layer="pairs", progress=False)
    fresh.import_files([tiers], progress=False)
    return old, tmp / "fresh", source, tmp / "kept"


def as_dicts(con, layer: str, order: str) -> list[dict]:
    """Every row of a layer's view as {column: value}: column order may differ, values not."""
    cur = con.execute(f'SELECT * FROM "{layer}" ORDER BY {order}')
    names = [d[0] for d in cur.description]
    return [dict(zip(names, row)) for row in cur.fetchall()]


def test_the_migrated_corpus_equals_a_fresh_import(corpora):
    migrated, fresh = Corpus.open(corpora[0]), Corpus.open(corpora[1])
    a, b = migrated.store.layers(), fresh.store.layers()
    assert set(a) == set(b) and {"word", "token", "pairs"} <= set(a)
    assert {n: (i.kind, i.token_layer, i.word_layer, i.tree, i.edge_sets) for n, i in a.items()} == \
        {n: (i.kind, i.token_layer, i.word_layer, i.tree, i.edge_sets) for n, i in b.items()}
    ca, cb = migrated.connect(), fresh.connect()
    for name in a:
        order = "src, dst" if a[name].kind == "edges" else "id"
        assert as_dicts(ca, name, order) == as_dicts(cb, name, order), name
    ca.close(), cb.close()


def test_queries_on_the_migrated_corpus(corpora):
    migrated = Corpus.open(corpora[0])
    words = tokens = verbs = 0
    for sentence in conllu.parse(corpora[2].read_text(encoding="utf-8")):
        covered: set[int] = set()
        for t in sentence:
            if isinstance(t["id"], tuple) and t["id"][1] == "-":
                tokens += 1
                covered.update(range(t["id"][0], t["id"][2] + 1))
        for t in sentence:
            if isinstance(t["id"], int):
                words += 1
                verbs += t["upos"] == "VERB"
                tokens += t["id"] not in covered
    count = lambda q: migrated.query(q).rows()[0]["count"]
    assert (count("find w = word count"), count("find t = token count")) == (words, tokens)
    assert count('find w = word(upos = "VERB") count') == verbs
    # a span over two surface tokens holds both tokens (and their words)
    assert count("find p = pairs, t = token where t inside p count") == 2 * count("find p = pairs count")


def test_migrating_twice_or_a_missing_corpus_is_a_user_error(corpora, tmp_path):
    with pytest.raises(StrataError, match="already has the current schema"):
        migrate(corpora[0])
    with pytest.raises(StrataError, match="no corpus"):
        migrate(tmp_path / "nothing")


def test_a_failed_migration_leaves_the_old_corpus(corpora, tmp_path, monkeypatch):
    old = tmp_path / "old"
    shutil.copytree(corpora[3], old)
    before = sorted((p.relative_to(old), p.read_bytes()) for p in old.rglob("*")
                    if p.is_file() and p.name != LOCK_FILE)
    written = []

    def interrupted(table, where, **kwargs):          # the third part: a Ctrl-C half way
        written.append(where)
        if len(written) == 3:
            raise KeyboardInterrupt
        return real(table, where, **kwargs)
    import engine.migrate
    real = engine.migrate.pq.write_table
    monkeypatch.setattr(engine.migrate.pq, "write_table", interrupted)
    with pytest.raises(KeyboardInterrupt):
        migrate(old)
    assert len(written) == 3
    # the data are as they were (the writer lock's empty file aside, left for the next writer)
    assert sorted((p.relative_to(old), p.read_bytes()) for p in old.rglob("*")
                  if p.is_file() and p.name != LOCK_FILE) == before
    assert [p.name for p in tmp_path.iterdir()] == ["old"]          # the half-built copy is gone
    with pytest.raises(StrataError, match="strata migrate"):
        Corpus.open(old)
