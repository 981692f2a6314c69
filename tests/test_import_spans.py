"""Standoff span tables with each anchor kind, on the open treebank's text.

The spans are written here from the ``conllu`` reference library's parse of the first
document of ../shared/data/ud-english-gum (read in place): every span is one of the
treebank's own entity mentions (MISC ``Entity`` brackets, the CorefUD convention), given
once as characters, once as word ordinals; both must land on the characters the
``mention`` layer has for that mention.
"""
from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import conllu
import pytest

from engine import Corpus, StrataError
from tests.conftest import first_gum_document


def _first_doc(tmp: Path) -> tuple[Corpus, Path]:
    return first_gum_document(tmp)


def _single_token_mentions(src: Path) -> list[tuple[int, str]]:
    """Document-level word ordinals (from 0) of one-token mentions ``(id-type...)``, per ``conllu``."""
    out, k = [], 0
    with open(src, encoding="utf-8") as f:
        for sent in conllu.parse_incr(f):
            for tok in sent:
                if not isinstance(tok["id"], int):
                    continue
                ent = (tok["misc"] or {}).get("Entity") or ""
                if ent.startswith("(") and ent.endswith(")") and ent.count("(") == 1:
                    out.append((k, ent[1:-1].split("-")[1]))
                k += 1
    return out


def test_token_and_char_anchors_land_on_the_mentions(tmp_path):
    corpus, src = _first_doc(tmp_path)
    name = corpus.store.documents()[0].name
    mentions = _single_token_mentions(src)
    assert len(mentions) >= 10
    tok = tmp_path / "m.spans.tsv"
    tok.write_text("doc\tstart\tend\tlabel\n" + "".join(f"{name}\t{k}\t{k}\t{t}\n" for k, t in mentions),
                   encoding="utf-8")
    corpus.import_files([tok], anchor="tokens:word", layer="bytoken", progress=False)
    con = corpus.connect()
    base = con.execute("SELECT base FROM documents").fetchone()[0]
    chars = con.execute('SELECT start - ?, "end" - ?, label FROM bytoken ORDER BY id', [base, base]).fetchall()
    con.close()
    ch = tmp_path / "c.spans.tsv"
    ch.write_text("doc\tstart\tend\tlabel\n" + "".join(f"{name}\t{s}\t{e}\t{t}\n" for s, e, t in chars),
                  encoding="utf-8")
    corpus.import_files([ch], anchor="chars", layer="bychar", progress=False)
    con = corpus.connect()
    same = con.execute("""SELECT count(*) FROM bytoken a JOIN bychar b ON a.start = b.start AND a."end" = b."end"
                          JOIN mention m ON m.start = a.start AND m."end" = a."end" AND m.type = a.label
                          WHERE a.word_first = b.word_first AND b.sent = m.sent""").fetchone()[0]
    assert same == len(mentions)


@pytest.mark.parametrize("anchor, row, message", [
    ("chars", "{d}\t10\t99999\tx", "outside document"),
    ("chars", "{d}\t10\t5\tx", "before start"),
    ("tokens:word", "{d}\t0\t99999\tx", "outside document"),
    ("chars", "other\t0\t1\tx", "unknown document 'other'"),
    ("chars", "{d}\tten\t12\tx", "not a whole number"),
])
def test_bad_spans_exit_2_with_the_place(tmp_path, anchor, row, message):
    corpus, _ = _first_doc(tmp_path)
    name = corpus.store.documents()[0].name
    path = tmp_path / "bad.spans.tsv"
    path.write_text("doc\tstart\tend\tlabel\n" + row.format(d=name) + "\n", encoding="utf-8")
    before = sorted(p.relative_to(corpus.path) for p in corpus.path.rglob("*") if p.is_file())
    proc = subprocess.run([sys.executable, "-m", "engine.cli", "import", str(corpus.path), str(path),
                           "--anchor", anchor], capture_output=True, text=True)
    err = proc.stderr.replace("\n", " ")
    assert proc.returncode == 2 and f"{path}:2" in proc.stderr.replace("\n", "") and message in err, err
    assert sorted(p.relative_to(corpus.path) for p in corpus.path.rglob("*") if p.is_file()) == before


def test_unknown_anchor_layer_is_named(tmp_path):
    corpus, _ = _first_doc(tmp_path)
    path = tmp_path / "x.spans.tsv"
    path.write_text("doc\tstart\tend\tlabel\n", encoding="utf-8")
    with pytest.raises(StrataError, match="no layer 'wrod'"):
        corpus.import_files([path], anchor="tokens:wrod", progress=False)


def test_attribute_columns_keep_number_types_and_a_layer_of_mixed_imports_reads_as_text(tmp_path):
    """A ``group`` of whole numbers is stored as a number; when a later import into the same
    layer brings text in that column, the layer reads it as text (DuckDB's union of the parts),
    and the catalog's type says so, so conditions on it are checked as text."""
    corpus, src = _first_doc(tmp_path)
    name = corpus.store.documents()[0].name
    mentions = _single_token_mentions(src)[:6]
    first = tmp_path / "a.spans.tsv"
    first.write_text("doc\tstart\tend\tlabel\tgroup\tweight\n" + "".join(
        f"{name}\t{k}\t{k}\t{t}\t{i // 2}\t{i / 4}\n" for i, (k, t) in enumerate(mentions[:4])), encoding="utf-8")
    corpus.import_files([first], anchor="tokens:word", layer="marks", progress=False)
    assert corpus.store.layers()["marks"].attrs["group"].type == "int"
    assert corpus.query("find m = marks sum(m.group), sum(m.weight)").rows()[0] == \
        pytest.approx({"sum(m.group)": 0 + 0 + 1 + 1, "sum(m.weight)": 0 + 0.25 + 0.5 + 0.75, "count": 4})
    later = tmp_path / "b.spans.tsv"
    later.write_text("doc\tstart\tend\tlabel\tgroup\n" + "".join(
        f"{name}\t{k}\t{k}\t{t}\tx{i}\n" for i, (k, t) in enumerate(mentions[4:])), encoding="utf-8")
    corpus.import_files([later], anchor="tokens:word", layer="marks", progress=False)
    assert corpus.store.layers()["marks"].attrs["group"].type == "str"
    assert corpus.query('find m = marks(group = "1") count').rows()[0]["count"] == 2
    assert corpus.query('find m = marks(group = "x0") count').rows()[0]["count"] == 1
