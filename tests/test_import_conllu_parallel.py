"""The two-process CoNLL-U import gives what the one-process import gives.

Checked on the open treebank (../shared/data/ud-english-gum, both splits): the same
bytes exported (and those are the input files' bytes), the same query answers, the same
errors at the same file and line when the input is bad.
"""
from __future__ import annotations

from pathlib import Path

import pytest

from engine import Corpus, StrataError
from engine.importers import conllu_parallel
from tests.conftest import gum_file

QUERIES = [
    'find t = word(upos = "VERB") count',
    'find t = word, m = mention(type = "person") where t inside m count',
    'find s = word(upos = "PRON", deprel = "nsubj"), v = word(upos = "VERB") where s depends on v count',
    'find a = mention, b = mention where a previous mention of b count',
    'find a = mention, b = mention where a same entity as b count',
    'find a = word(upos = "ADJ"), o = word(deprel = "obj") where a under o count',
    'find t = word(feats.Number = "Plur") count per t.upos',
]


@pytest.fixture
def split_small(monkeypatch):
    """Force the split on small files: blocks of ~256 KB, the main process stops at half of
    the bytes (alone it would often be done before the child has started)."""
    monkeypatch.setattr(conllu_parallel, "MIN_BYTES", 0)
    monkeypatch.setattr(conllu_parallel, "SPLIT_BLOCK_BYTES", 256 << 10)
    monkeypatch.setattr(conllu_parallel, "MAIN_MAX_SHARE", 0.5)
    monkeypatch.delenv(conllu_parallel.ENV, raising=False)


def _import(tmp: Path, name: str, files: list[Path], parallel: bool, monkeypatch, **kw) -> Corpus:
    monkeypatch.setenv(conllu_parallel.ENV, "2" if parallel else "1")
    corpus = Corpus.create(tmp / name)
    corpus.import_files(files, progress=False, **kw)
    return corpus


def _parts(corpus: Corpus) -> list[str]:
    con = corpus.store.catalog_connection()
    try:
        return [p for (p,) in con.execute("SELECT path FROM parts").fetchall()]
    finally:
        con.close()


def test_two_processes_give_the_same_corpus(tmp_path, split_small, monkeypatch):
    files = [gum_file("dev"), gum_file("test")]
    one = _import(tmp_path, "one", files, False, monkeypatch)
    two = _import(tmp_path, "two", files, True, monkeypatch)
    # the second process really worked: some parts carry its tag
    assert any(Path(p).name.split("-")[-1].startswith("q") for p in _parts(two))
    assert not any(Path(p).name.split("-")[-1].startswith("q") for p in _parts(one))
    # the export is the input, byte for byte, both ways
    expected = b"".join(f.read_bytes() for f in files)
    for c, name in ((one, "one"), (two, "two")):
        out = tmp_path / f"{name}.conllu"
        c.export("conllu", out)
        assert out.read_bytes() == expected
    for q in QUERIES:
        assert one.query(q).to_arrow().to_pylist() == two.query(q).to_arrow().to_pylist(), q
    assert one.info()["documents"] == two.info()["documents"] == 60      # README: 30 per split
    for layer, info in one.store.layers().items():
        assert two.store.layers()[layer].rows == info.rows, layer


def test_node_ids_stay_unique_and_anchors_disjoint(tmp_path, split_small, monkeypatch):
    two = _import(tmp_path, "two", [gum_file("dev"), gum_file("test")], True, monkeypatch)
    con = two.connect()
    try:
        ids = con.execute("SELECT count(*), count(DISTINCT id) FROM (SELECT id FROM word UNION ALL "
                          "SELECT id FROM token UNION ALL SELECT id FROM sentence UNION ALL "
                          "SELECT id FROM mention UNION ALL SELECT id FROM empty)").fetchall()[0]
        assert ids[0] == ids[1]
        overlap = con.execute("""SELECT count(*) FROM documents a JOIN documents b ON a.doc < b.doc
                                 AND a.base < b.base + b.length AND b.base < a.base + a.length""").fetchall()
        assert overlap == [(0,)]
        outside = con.execute("""SELECT count(*) FROM word t JOIN documents d ON d.doc = t.doc
                                 WHERE t.start < d.base OR t."end" > d.base + d.length""").fetchall()
        assert outside == [(0,)]
    finally:
        con.close()


def _error(tmp: Path, name: str, files: list[Path], parallel: bool, monkeypatch) -> str:
    corpus = _import(tmp, name, [gum_file("dev")], False, monkeypatch)   # something already stored
    before = corpus.info()
    with pytest.raises(StrataError) as err:
        monkeypatch.setenv(conllu_parallel.ENV, "2" if parallel else "1")
        Corpus.open(corpus.path).import_files(files, progress=False, prefix="again")
    assert Corpus.open(corpus.path).info() == before                     # nothing half-written
    return str(err.value)


def _late_copy(tmp: Path, change) -> Path:
    lines = gum_file("test").read_text(encoding="utf-8").split("\n")
    change(lines)
    out = tmp / "bad.conllu"
    out.write_text("\n".join(lines), encoding="utf-8")
    return out


def test_a_bad_line_in_the_second_half_is_reported_as_without_the_split(tmp_path, split_small, monkeypatch):
    def head_out_of_range(lines):
        k = max(i for i, x in enumerate(lines) if x and not x.startswith("#") and x.split("\t")[0].isdigit())
        cols = lines[k].split("\t")
        cols[6] = "999"
        lines[k] = "\t".join(cols)
    bad = _late_copy(tmp_path, head_out_of_range)
    one = _error(tmp_path, "e1", [bad], False, monkeypatch)
    two = _error(tmp_path, "e2", [bad], True, monkeypatch)
    assert one == two and "999" in one and f"{bad}:" in one


def test_a_sentence_id_of_the_first_half_again_in_the_second(tmp_path, split_small, monkeypatch):
    def repeat_first_id(lines):
        ids = [i for i, x in enumerate(lines) if x.startswith("# sent_id = ")]
        lines[ids[-1]] = lines[ids[0]]
    bad = _late_copy(tmp_path, repeat_first_id)
    one = _error(tmp_path, "d1", [bad], False, monkeypatch)
    two = _error(tmp_path, "d2", [bad], True, monkeypatch)
    assert one == two and "used twice" in one


def test_small_or_lenient_imports_stay_in_one_process(tmp_path, monkeypatch):
    monkeypatch.delenv(conllu_parallel.ENV, raising=False)
    from engine.importers.base import ImportOptions
    f = gum_file("dev")
    assert not conllu_parallel.worthwhile([f], ImportOptions())            # 3 MB < MIN_BYTES
    monkeypatch.setattr(conllu_parallel, "MIN_BYTES", 0)
    assert conllu_parallel.worthwhile([f], ImportOptions())
    assert not conllu_parallel.worthwhile([f], ImportOptions(lenient=True))
    monkeypatch.setenv(conllu_parallel.ENV, "1")
    assert not conllu_parallel.worthwhile([f], ImportOptions())


def test_bounds_cover_what_a_half_uses(tmp_path, split_small, monkeypatch):
    """The counters a half really used stay under the bounds computed from its bytes and lines."""
    f = gum_file("dev")
    blocks = conllu_parallel.plan([f])
    room = conllu_parallel.bounds(blocks)
    c = _import(tmp_path, "b", [f], False, monkeypatch)
    con = c.connect()
    try:
        used = con.execute("""SELECT (SELECT max(id) + 1 FROM (SELECT id FROM word UNION ALL SELECT id FROM token
                                  UNION ALL SELECT id FROM sentence UNION ALL SELECT id FROM mention
                                  UNION ALL SELECT id FROM empty)),
                                 (SELECT max(chain) + 1 FROM mention),
                                 (SELECT max(base + length) FROM documents),
                                 (SELECT max(ord) + 1 FROM word), (SELECT max(post) + 1 FROM word)""").fetchall()[0]
    finally:
        con.close()
    for value, key in zip(used, ("next_id", "next_chain", "next_base", "tok_ord", "order")):
        assert value <= room[key], key


def _stand_in_child(monkeypatch, code: str) -> None:
    """Start ``code`` instead of the real second process (it never claims a block)."""
    real = conllu_parallel.subprocess.Popen

    def popen(args, **kw):
        return real([args[0], "-c", code], **kw)
    monkeypatch.setattr(conllu_parallel.subprocess, "Popen", popen)


def test_a_child_that_claims_nothing_leaves_every_block_to_the_main_process(tmp_path, split_small, monkeypatch):
    """The main process claims every block and stops the idle child instead of waiting for it."""
    monkeypatch.setattr(conllu_parallel, "MAIN_MAX_SHARE", None)
    _stand_in_child(monkeypatch, "import time; time.sleep(60)")
    files = [gum_file("dev")]
    one = _import(tmp_path, "one", files, False, monkeypatch)
    two = _import(tmp_path, "two", files, True, monkeypatch)
    assert not any(Path(p).name.split("-")[-1].startswith("q") for p in _parts(two))
    out = tmp_path / "two.conllu"
    two.export("conllu", out)
    assert out.read_bytes() == files[0].read_bytes()
    for layer, info in one.store.layers().items():
        assert two.store.layers()[layer].rows == info.rows, layer


@pytest.mark.parametrize("code", ["import sys; sys.stdin.buffer.read(); sys.exit(3)",   # dies after the task
                                  "import sys; sys.exit(3)"])                           # dies before it
def test_a_child_that_dies_leaves_its_blocks_to_the_main_process(tmp_path, split_small, monkeypatch, code):
    """The main process stops at half (MAIN_MAX_SHARE), finds the child gone (no result, or a
    closed pipe) and imports the rest itself."""
    _stand_in_child(monkeypatch, code)
    files = [gum_file("dev")]
    two = _import(tmp_path, "two", files, True, monkeypatch)
    out = tmp_path / "two.conllu"
    two.export("conllu", out)
    assert out.read_bytes() == files[0].read_bytes()


def test_parts_of_both_processes_are_in_file_order_and_the_reports_agree(tmp_path, split_small, monkeypatch):
    """The child works from the last block down; its parts are still named and listed in file
    order (ids and anchors increase along the catalog's parts), and the import report (files,
    counts, warnings) is the one-process report."""
    def text_differs(lines):
        # a '# text' that disagrees with its words, in several late sentences: one warning each
        at = [i for i, x in enumerate(lines) if x.startswith("# text = ")]
        for i in at[-40::8]:
            lines[i] += " (edited)"
    bad = _late_copy(tmp_path, text_differs)
    files = [gum_file("dev"), bad]
    reports = {}
    for name, parallel in (("one", False), ("two", True)):
        monkeypatch.setenv(conllu_parallel.ENV, "2" if parallel else "1")
        corpus = Corpus.create(tmp_path / name)
        reports[name] = corpus.import_files(files, progress=False)
    assert len(reports["one"].warnings) == 5
    for key in ("files", "counts", "warnings", "skipped"):
        assert getattr(reports["one"], key) == getattr(reports["two"], key), key
    two = Corpus.open(tmp_path / "two")
    con = two.store.catalog_connection()
    try:
        token_parts = [str(two.path / p) for (p,) in con.execute(
            "SELECT path FROM parts WHERE layer = 'word' ORDER BY path").fetchall()]
    finally:
        con.close()
    assert any(Path(p).name.split("-")[-1].startswith("q") for p in token_parts)
    import duckdb
    firsts = duckdb.sql(f"SELECT min(id), max(id), min(start), max(\"end\") FROM read_parquet({token_parts!r}, "
                        "filename = true) GROUP BY filename ORDER BY min(id)").fetchall()
    order = duckdb.sql(f"SELECT filename FROM read_parquet({token_parts!r}, filename = true) "
                       "GROUP BY filename ORDER BY min(id)").fetchall()
    assert [f for (f,) in order] == token_parts                   # the views' order of parts = id order
    for (lo, hi, s0, e0), (lo2, _, s1, _) in zip(firsts, firsts[1:]):
        assert hi < lo2 and e0 <= s1


def test_the_same_input_gives_the_same_ids_whoever_imports_a_block(tmp_path, split_small, monkeypatch):
    """Each block has counters of its own: two imports, where the processes met at different
    blocks (MAIN_MAX_SHARE 0.3 and 0.7), store the same ids, anchors, ordinals and tree numbers."""
    files = [gum_file("dev")]
    tables = []
    for share in (0.3, 0.7):
        monkeypatch.setattr(conllu_parallel, "MAIN_MAX_SHARE", share)
        corpus = _import(tmp_path, f"s{share}", files, True, monkeypatch)
        con = corpus.connect()
        tables.append(con.sql('SELECT id, doc, start, "end", sent, ord, parent, pre, post FROM word ORDER BY id')
                      .to_arrow_table())
        tables.append(con.sql("SELECT id, chain, start FROM mention ORDER BY id").to_arrow_table())
        tables.append(con.sql("SELECT doc, name, base FROM documents ORDER BY doc").to_arrow_table())
        con.close()
    assert tables[0].equals(tables[3]) and tables[1].equals(tables[4]) and tables[2].equals(tables[5])
