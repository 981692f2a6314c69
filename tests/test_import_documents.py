"""Recordings: a documents manifest or ``--recording`` names each document's recording, and the
hit table carries that path and the hit's times, so a hit can be played.

The text is the open treebank's first two documents (UD English GUM dev, read in place); the
words tier is written here from the corpus's tokens with times by construction (token k of the
document spoken from 0.3 k to 0.3 k + 0.25 s), so every hit's times are known independently.
"""
from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

from engine import Corpus
from tests.conftest import first_gum_document

STEP, LENGTH = 0.3, 0.25


def _two_documents(tmp: Path) -> Corpus:
    return first_gum_document(tmp, docs=2)[0]


def _tier(corpus: Corpus, tmp: Path, doc: str, n: int = 40) -> tuple[Path, list[tuple[str, float, float]]]:
    """The first ``n`` non-punctuation tokens of ``doc`` as a words tier; returns the file and (form, start, end)."""
    forms = [f for (f,) in corpus.connect().execute(
        """SELECT t.form FROM token t JOIN documents d USING (doc) JOIN word w ON w.ord = t.word_first
           WHERE d.name = ? AND w.upos <> 'PUNCT' ORDER BY t.ord LIMIT ?""", [doc, n]).fetchall()]
    rows = [(f, round(k * STEP, 3), round(k * STEP + LENGTH, 3)) for k, f in enumerate(forms)]
    path = tmp / f"{doc}.tiers.tsv"
    path.write_text("doc\ttier\tstart\tend\tlabel\n" + "".join(f"{doc}\tspoken\t{a}\t{b}\t{f.lower()}\n"
                                                                for f, a, b in rows), encoding="utf-8")
    return path, rows


def _cli(*args: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-m", "engine.cli", *map(str, args)], capture_output=True, text=True)


def test_a_manifest_names_recordings_and_hits_carry_path_and_times(tmp_path):
    corpus = _two_documents(tmp_path)
    first, second = [d.name for d in corpus.store.documents()]
    tier, rows = _tier(corpus, tmp_path, first)
    corpus.import_files([tier], progress=False, words_tier="spoken")
    (tmp_path / "audio").mkdir()
    (tmp_path / "audio" / "one.wav").write_bytes(b"RIFF")
    manifest = tmp_path / "documents.tsv"
    manifest.write_text(f"doc\trecording\tspeakers\troom\n{first}\taudio/one.wav\tA;B\t12\n"
                        f"{second}\t/elsewhere/two.flac\tC\t\n", encoding="utf-8")
    report = corpus.import_files([manifest], progress=False)
    assert report.counts["documents"] == 2
    assert any("1 recording(s) not found" in n and "/elsewhere/two.flac" in n for n in report.notes)
    # relative to the manifest's folder, made absolute
    recordings = dict(corpus.connect().execute("SELECT name, recording FROM doc").fetchall())
    assert recordings == {first: str(tmp_path / "audio" / "one.wav"), second: "/elsewhere/two.flac"}
    assert corpus.query('find w = spoken(doc.room = "12") count').rows()[0]["count"] == len(rows)
    # one variable: the hit's times are its word's
    form, a, b = rows[7]
    hits = corpus.query(f'find w = spoken(label = "{form.lower()}")').rows()
    hit = next(h for h in hits if h["w.start"] == pytest.approx(a))
    assert (hit["recording"], hit["start"], hit["end"]) == (str(tmp_path / "audio" / "one.wav"), a, b)
    # two variables: from the earlier start to the later end; a token takes the times of its word
    hits = corpus.query("find x = spoken, y = spoken where y follows x by at most 1 word").rows()
    assert hits and all(h["start"] == h["x.start"] and h["end"] == h["y.end"] for h in hits)
    pair = next(h for h in hits if h["x.start"] == pytest.approx(rows[3][1]) and h["y.end"] == pytest.approx(rows[5][2]))
    assert (pair["start"], pair["end"]) == (rows[3][1], rows[5][2])
    # a hit in the document without times has a recording and no times
    hits = corpus.query(f'find s = sentence(doc.name = "{second}")').rows()
    assert hits and all(h["recording"] == "/elsewhere/two.flac" and h["start"] is None for h in hits)
    # given again, a value replaces the stored one; an empty cell leaves it
    manifest.write_text(f"doc\trecording\troom\n{first}\t/new/one.wav\t\n", encoding="utf-8")
    corpus.import_files([manifest], progress=False)
    assert corpus.connect().execute(f"SELECT recording, room FROM doc WHERE name = '{first}'").fetchone() == \
        ("/new/one.wav", "12")


def test_recording_option_names_the_one_document_of_the_files(tmp_path):
    corpus = _two_documents(tmp_path)
    first, second = [d.name for d in corpus.store.documents()]
    tier, rows = _tier(corpus, tmp_path, first)
    done = _cli("import", corpus.path, tier, "--words-tier", "spoken", "--recording", "rec/one.wav")
    assert done.returncode == 0, done.stderr
    got = Corpus.open(corpus.path).connect().execute("SELECT name, recording FROM doc ORDER BY doc").fetchall()
    assert got == [(first, str(Path.cwd() / "rec" / "one.wav")), (second, None)]
    # a file about two documents cannot have one recording: refused, nothing stored
    both = tmp_path / "both.tiers.tsv"
    second_tier, _ = _tier(corpus, tmp_path, second, 10)
    both.write_text(second_tier.read_text(encoding="utf-8").replace("spoken", "other"), encoding="utf-8")
    before = sorted(p.name for p in corpus.path.rglob("*.parquet"))
    third = tmp_path / "x.tiers.tsv"
    third.write_text(both.read_text(encoding="utf-8") + "".join(
        f"{first}\tother\t{a}\t{b}\t{f.lower()}\n" for f, a, b in rows[:5]), encoding="utf-8")
    done = _cli("import", corpus.path, third, "--words-tier", "other", "--recording", "x.wav")
    assert done.returncode == 2 and "Traceback" not in done.stderr
    assert "one document" in done.stderr and "documents.tsv" in done.stderr
    assert sorted(p.name for p in corpus.path.rglob("*.parquet")) == before


@pytest.mark.parametrize("body, line, message", [
    ("doc\trecording\n{d}x\ta.wav\n", 2, "did you mean '{d}'"),
    ("doc\trecording\n{d}\ta.wav\n{d}\tb.wav\n", 3, "has a row already"),
    ("doc\tmy room\n{d}\t1\n", 1, "cannot be a document attribute"),
    ("doc\tname\n{d}\tx\n", 1, "the document's own"),
    ("recording\na.wav\n", 1, "lacks the column(s) doc"),
    ("doc\trecording\n{d}\ta.wav\textra\n", 2, "fields"),
])
def test_bad_manifests_exit_2_with_the_place_and_change_nothing(tmp_path, body, line, message):
    corpus = _two_documents(tmp_path)
    first = corpus.store.documents()[0].name
    path = tmp_path / "documents.tsv"
    path.write_text(body.format(d=first), encoding="utf-8")
    before = corpus.connect().execute("SELECT * FROM doc ORDER BY doc").fetchall()
    done = _cli("import", corpus.path, path)
    assert done.returncode == 2 and "Traceback" not in done.stderr
    assert f"documents.tsv:{line}" in done.stderr and message.format(d=first) in done.stderr.replace("\n", " ")
    assert Corpus.open(corpus.path).connect().execute("SELECT * FROM doc ORDER BY doc").fetchall() == before
