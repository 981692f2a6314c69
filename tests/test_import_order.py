"""Import order does not matter: a text layer imported after the time tiers gets the same
time spans as one imported before them, row for row.

The text is the first document of UD English GUM's dev split (read in place); the word times
are a NIST CTM file written here with times by construction, and a span table marks every
tenth word (by its character offsets)."""
from __future__ import annotations

from pathlib import Path

import pytest

from engine import Corpus
from tests.conftest import first_gum_document

ROWS = 'SELECT start, "end", t_start, t_end FROM "{}" ORDER BY ALL'


@pytest.fixture()
def files(tmp_path) -> tuple[Path, Path, Path]:
    (tmp_path / "made").mkdir()
    corpus, src = first_gum_document(tmp_path / "made")
    doc = corpus.store.documents()[0]
    rows = corpus.connect().execute("""SELECT t.form, t.start - d.base, t."end" - d.base FROM token t
                                       JOIN word w ON w.ord = t.word_first JOIN documents d ON d.doc = t.doc
                                       WHERE w.upos <> 'PUNCT' ORDER BY t.ord""").fetchall()
    ctm = tmp_path / "w.ctm"
    ctm.write_text("".join(f"{doc.name} A {0.5 + 0.3 * k:.2f} 0.25 {f.lower()}\n" for k, (f, _, _) in enumerate(rows)),
                   encoding="utf-8")
    spans = tmp_path / "m.spans.tsv"
    spans.write_text("doc\tstart\tend\tlabel\n" + "".join(f"{doc.name}\t{s}\t{e}\tmark\n"
                                                          for k, (_, s, e) in enumerate(rows) if k % 10 == 0),
                     encoding="utf-8")
    return src, ctm, spans


def test_text_layers_after_the_times_get_the_same_times(tmp_path, files):
    src, ctm, spans = files
    before = Corpus.create(tmp_path / "before")           # text, spans, then times
    before.import_files([src], progress=False)
    before.import_files([spans], layer="marks", progress=False)
    before.import_files([ctm], progress=False)
    after = Corpus.create(tmp_path / "after")             # text, times, then spans and a second text
    after.import_files([src], progress=False)
    after.import_files([ctm], progress=False)
    after.import_files([spans], layer="marks", progress=False)
    after.import_files([src], prefix="again", progress=False)
    b, a = before.connect(), after.connect()
    for layer in ("word", "token", "sentence", "mention", "marks"):
        rows = b.execute(ROWS.format(layer)).fetchall()
        assert rows == a.execute(ROWS.format(layer)).fetchall(), layer
        assert sum(r[2] is not None for r in rows) > 0.7 * len(rows), layer     # all but punctuation
    for layer in ("word", "token", "sentence", "mention"):     # the second annotation, imported last
        assert a.execute(ROWS.format(f"again.{layer}")).fetchall() == b.execute(ROWS.format(layer)).fetchall(), layer


def test_a_word_that_did_not_align_has_no_time(tmp_path, files):
    """A timed word replaced by one that is nowhere in the text: the text token in its place
    gets no time (before: a zero-width one), a mean duration skips it, and the alignment
    report counts it.  Every other timed word lasts 0.25 s by construction."""
    src, ctm, _ = files
    lines = ctm.read_text(encoding="utf-8").splitlines(keepends=True)
    doc, channel, start, _, gone = lines[40].split()[:5]
    lines[40] = f"{doc} {channel} {start} 0.25 zzqxv\n"
    ctm.write_text("".join(lines), encoding="utf-8")
    corpus = Corpus.create(tmp_path / "c")
    corpus.import_files([src], progress=False)
    corpus.import_files([ctm], progress=False)
    con = corpus.connect()
    timed = con.execute("SELECT count(*) FROM token WHERE t_start IS NOT NULL").fetchone()[0]
    untimed_words = con.execute("""SELECT t.form FROM token t JOIN word w ON w.ord = t.word_first
                                   WHERE t.t_start IS NULL AND w.upos <> 'PUNCT'""").fetchall()
    assert [f.lower() for (f,) in untimed_words] == [gone]
    got = corpus.query("find t = token mean(t.duration) as d, count").table.to_pylist()[0]
    assert got["d"] == 0.25 and got["count"] > timed
    from engine.align.report import align_report
    report = align_report(corpus.store, "words")[0]
    assert report.untimed["token"] == (got["count"], got["count"] - timed)
    assert "without a time" in report.text()
