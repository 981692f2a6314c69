"""Word times in the NIST CTM layout and speaker turns in the NIST RTTM layout.

The layouts are those of NIST's documentation (from memory): CTM ``recording channel start
duration word [confidence]`` with ``;;`` comments; RTTM ten fields ``SPEAKER file channel start
duration <NA> <NA> speaker <NA> <NA>`` and other line types such as ``SPKR-INFO``.  The text is
the first document of UD English GUM's dev split (read in place); words get times by
construction (0.3 s apart, 0.25 s long) and sentences alternate between two speakers, so the
test knows every time and every turn without strata.
"""
from __future__ import annotations

import subprocess
import sys
from decimal import Decimal

import pytest

from engine import StrataError
from tests.conftest import first_gum_document


@pytest.fixture()
def gum(tmp_path):
    corpus, _ = first_gum_document(tmp_path)
    doc = corpus.store.documents()[0].name
    rows = corpus.connect().execute("""SELECT t.sent, t.form FROM token t JOIN word w ON w.ord = t.word_first
                                       WHERE w.upos <> 'PUNCT' ORDER BY t.ord""").fetchall()
    ctm, times, turns, t = [";; words of one recording\n"], [], [], Decimal("0.5")
    for sent, form in rows:
        ctm.append(f"{doc} A {t} 0.25 {form.lower()} 0.93\n")
        times.append((int(t * 10 ** 6), int((t + Decimal("0.25")) * 10 ** 6)))
        who = "spk1" if sent % 2 else "spk2"
        if not turns or turns[-1][0] != who:
            turns.append([who, t, t, set()])
        turns[-1][2] = t + Decimal("0.25")
        turns[-1][3].add(sent)
        t += Decimal("0.3")
    rttm = [f"SPKR-INFO {doc} 1 <NA> <NA> <NA> unknown {who} <NA> <NA>\n" for who in ("spk1", "spk2")]
    rttm += [f"SPEAKER {doc} 1 {a} {b - a} <NA> <NA> {who} <NA> <NA>\n" for who, a, b, _ in turns]
    (tmp_path / "a.ctm").write_text("".join(ctm), encoding="utf-8")
    (tmp_path / "a.rttm").write_text("".join(rttm), encoding="utf-8")
    return corpus, doc, times, turns


def test_ctm_words_keep_their_times_and_carry_the_text_tokens(gum, tmp_path):
    corpus, _, times, _ = gum
    corpus.import_files([tmp_path / "a.ctm"], progress=False)
    con = corpus.connect()
    words = con.execute('SELECT start, "end", t_start, t_end, confidence, channel FROM words ORDER BY t_start').fetchall()
    assert [(a, b) for _, _, a, b, _, _ in words] == times
    assert {(c, ch) for *_, c, ch in words} == {("0.93", "A")}
    inside = sum(1 for start, end, a, b, _, _ in words
                 if all(x >= a and y <= b for x, y in con.execute(
                     'SELECT t_start, t_end FROM token WHERE start >= ? AND "end" <= ?', [start, end]).fetchall()))
    assert inside == len(times)


def test_rttm_turns_give_sentences_their_speaker(gum, tmp_path):
    corpus, _, _, turns = gum
    with pytest.raises(StrataError, match="import those first"):
        corpus.import_files([tmp_path / "a.rttm"], progress=False)
    corpus.import_files([tmp_path / "a.ctm"], progress=False)
    corpus.import_files([tmp_path / "a.rttm"], progress=False)
    got = corpus.query("find s = sentence, t = turns where s inside t in time count per t.speaker").table.to_pylist()
    expected = {}
    for who, _, _, sents in turns:
        expected[who] = expected.get(who, 0) + len(sents)
    assert {r["t.speaker"]: r["count"] for r in got} == expected
    assert corpus.connect().execute("SELECT count(*) FROM turns").fetchone() == (len(turns),)


@pytest.mark.parametrize("suffix, line, says", [
    (".ctm", "{d} A 1.0 0.25\n", "has 4 fields; a CTM line"),
    (".ctm", "{d} A soon 0.25 word\n", "start 'soon' is not a number"),
    (".ctm", "{d} A 1.0 -0.25 word\n", "duration '-0.25' is not a time"),
    (".rttm", "SPEAKER {d} 1 1.0 2.0 <NA> <NA> spk1\n", "has 8 fields; an RTTM line"),
    (".rttm", "SPEAKER {d} 1 1.0 x <NA> <NA> spk1 <NA> <NA>\n", "duration 'x' is not a number"),
])
def test_broken_lines_are_refused_at_their_line(gum, tmp_path, suffix, line, says):
    corpus, doc, _, _ = gum
    if suffix == ".rttm":
        corpus.import_files([tmp_path / "a.ctm"], progress=False)
    path = tmp_path / f"bad{suffix}"
    path.write_text(";; first line\n" + line.format(d=doc), encoding="utf-8")
    before = sorted((p.relative_to(corpus.path), p.stat().st_size) for p in corpus.path.rglob("*") if p.is_file())
    done = subprocess.run([sys.executable, "-m", "engine.cli", "import", str(corpus.path), str(path)],
                          capture_output=True, text=True)
    said = done.stderr.replace("\n", " ")
    assert done.returncode == 2 and f"{path}:2:" in done.stderr.replace("\n", "") and says in said, said
    assert "Traceback" not in said
    after = sorted((p.relative_to(corpus.path), p.stat().st_size) for p in corpus.path.rglob("*") if p.is_file())
    assert after == before
