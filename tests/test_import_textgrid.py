"""TextGrid text files (long and short variants): read like the registry's praatio reads them,
imported onto the treebank's text, refused with file:line where broken.

References: praatio 6.2.2 from the package registry (``openTextgrid``, ``Textgrid.save``) writes
and reads the files the reader is compared with; the format's layout is that of its editor's
manual page on TextGrid file formats (from memory: header, then per tier class, name, xmin,
xmax, size and the entries).  The text is the first document of UD English GUM's dev split
(read in place); the tiers are written from its tokens with times given by construction.
"""
from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

praatio = pytest.importorskip("praatio.textgrid", reason="praatio (a test dependency) is not installed")
from praatio.data_classes.interval_tier import IntervalTier  # noqa: E402
from praatio.data_classes.point_tier import PointTier  # noqa: E402

from engine import StrataError  # noqa: E402
from engine.importers.textgrid import read_tiers  # noqa: E402
from tests.conftest import first_gum_document  # noqa: E402

FORMATS = ["long_textgrid", "short_textgrid"]


def _build(forms: list[str], speakers: bool) -> tuple[object, dict]:
    """A praatio Textgrid: words (an empty interval before every 5th word), phones, a point tier;
    and what was built: word intervals, pause count."""
    words, phones, t, built = [], [], 0.5, {"words": [], "pauses": 0}
    for k, form in enumerate(forms):
        if k % 5 == 4:
            words.append((t, t + 0.2, ""))
            built["pauses"] += 1
            t += 0.2
        words.append((t, t + 0.3, form.lower()))
        built["words"].append((round(t * 1e6), round((t + 0.3) * 1e6)))
        for p in range(2):
            phones.append((t + 0.15 * p, t + 0.15 * (p + 1), f'{form[:1]}"{p}'))
        t += 0.3
    tg = praatio.Textgrid()
    name = "Ann - words" if speakers else "orthography"
    tg.addTier(IntervalTier(name, words, 0, t + 1))
    tg.addTier(IntervalTier("Ann - phones" if speakers else "segments", phones, 0, t + 1))
    tg.addTier(PointTier("events", [(1.0, "click"), (2.5, "laugh ö")], 0, t + 1))
    return tg, built


def _silences(path: Path, tier: str) -> int:
    """Empty intervals of a tier, as praatio reads the file."""
    grid = praatio.openTextgrid(str(path), includeEmptyIntervals=True)
    return sum(1 for e in grid.getTier(tier).entries if e.label == "")


@pytest.fixture()
def gum(tmp_path):
    corpus, _ = first_gum_document(tmp_path)
    doc = corpus.store.documents()[0].name
    forms = [f for (f,) in corpus.connect().execute("SELECT form FROM token ORDER BY ord LIMIT 150").fetchall()]
    return corpus, doc, forms


@pytest.mark.parametrize("fmt", FORMATS)
def test_read_as_praatio_reads_it(tmp_path, gum, fmt):
    _, doc, forms = gum
    tg, _ = _build(forms, speakers=False)
    path = tmp_path / f"{doc}.TextGrid"
    tg.save(str(path), format=fmt, includeBlankSpaces=True)
    ours, xmin, xmax = read_tiers(path)
    theirs = praatio.openTextgrid(str(path), includeEmptyIntervals=True)
    assert [t.name for t in ours] == list(theirs.tierNames)
    assert (xmin, xmax) == (round(theirs.minTimestamp * 1e6), round(theirs.maxTimestamp * 1e6))
    for tier in ours:
        entries = theirs.getTier(tier.name).entries
        assert len(entries) == len(tier.start)
        if tier.points:
            assert [(round(e.time * 1e6), e.label) for e in entries] == list(zip(tier.start.tolist(),
                                                                                 tier.label.to_pylist()))
        else:
            assert [(round(e.start * 1e6), round(e.end * 1e6), e.label) for e in entries] == \
                list(zip(tier.start.tolist(), tier.end.tolist(), [x.strip() for x in tier.label.to_pylist()]))


def test_the_two_variants_of_the_format_read_the_same(tmp_path):
    """A small file in the long variant and the same in the short one, as the format's manual
    lays them out (from memory): the same tiers, times and labels, each entry at its line."""
    long = ('File type = "ooTextFile"\nObject class = "TextGrid"\n\nxmin = 0\nxmax = 2.3\ntiers? <exists>\n'
            'size = 2\nitem []:\n    item [1]:\n        class = "IntervalTier"\n        name = "Mary"\n'
            '        xmin = 0\n        xmax = 2.3\n        intervals: size = 2\n        intervals [1]:\n'
            '            xmin = 0\n            xmax = 1.5\n            text = "say ""yes"""\n'
            '        intervals [2]:\n            xmin = 1.5\n            xmax = 2.3\n            text = ""\n'
            '    item [2]:\n        class = "TextTier"\n        name = "bell"\n        xmin = 0\n'
            '        xmax = 2.3\n        points: size = 1\n        points [1]:\n            number = 0.9\n'
            '            mark = "ding"\n')
    short = ('File type = "ooTextFile"\nObject class = "TextGrid"\n\n0\n2.3\n<exists>\n2\n"IntervalTier"\n'
             '"Mary"\n0\n2.3\n2\n0\n1.5\n"say ""yes"""\n1.5\n2.3\n""\n"TextTier"\n"bell"\n0\n2.3\n1\n0.9\n"ding"\n')
    read = []
    for name, text in (("long.TextGrid", long), ("short.TextGrid", short)):
        (tmp_path / name).write_text(text, encoding="utf-8")
        tiers, _, xmax = read_tiers(tmp_path / name)
        read.append([(t.name, t.points, t.start.tolist(), t.end.tolist(), t.label.to_pylist()) for t in tiers])
        assert xmax == 2_300_000
    assert read[0] == read[1] == [("Mary", False, [0, 1_500_000], [1_500_000, 2_300_000], ['say "yes"', ""]),
                                  ("bell", True, [900_000], [900_000], ["ding"])]
    tiers, _, _ = read_tiers(tmp_path / "long.TextGrid")
    assert tiers[0].line.tolist() == [16, 20] and tiers[1].line.tolist() == [30]


@pytest.mark.parametrize("fmt", FORMATS)
def test_one_recording_per_speaker_onto_the_treebank_text(tmp_path, gum, fmt):
    """Every timed word gets its characters; each text token lies inside its timed word and
    takes its time; the empty intervals are the pauses (counted by construction)."""
    corpus, doc, forms = gum
    tg, built = _build(forms, speakers=True)
    path = tmp_path / f"{doc}.TextGrid"
    tg.save(str(path), format=fmt, includeBlankSpaces=True)
    corpus.import_files([path], words_tier="* - words", progress=False)
    silences = _silences(path, "Ann - words")
    assert silences == built["pauses"] + 2          # praatio fills the gaps before and after the words
    con = corpus.connect()
    words = con.execute('SELECT start, "end", t_start, t_end, speaker FROM words ORDER BY t_start').fetchall()
    assert [(a, b) for _, _, a, b, _ in words] == built["words"]
    assert {w[4] for w in words} == {"Ann"}
    assert con.execute("SELECT count(*), min(speaker) FROM pauses").fetchone() == (silences, "Ann")
    inside = 0
    for start, end, t_start, t_end, _ in words:
        tokens = con.execute('SELECT t_start, t_end FROM token WHERE start >= ? AND "end" <= ?', [start, end]).fetchall()
        inside += len(tokens) >= 1 and all(a >= t_start and b <= t_end for a, b in tokens)
    assert inside == len(forms)
    assert con.execute("SELECT count(*) FROM events WHERE t_start = t_end").fetchone() == (2,)


def test_pauses_from_a_label(tmp_path, gum):
    corpus, doc, forms = gum
    tg, built = _build(forms[:20], speakers=False)
    path = tmp_path / f"{doc}.TextGrid"
    tg.save(str(path), format="short_textgrid", includeBlankSpaces=True)
    silences = _silences(path, "orthography")
    path.write_text(path.read_text(encoding="utf-8").replace('""\n', '"sil"\n'), encoding="utf-8")
    corpus.import_files([path], pauses_from="sil", words_tier="orthography", progress=False)
    assert corpus.connect().execute("SELECT count(*) FROM pauses").fetchone() == (silences,) and silences > 0


def _broken(tmp_path: Path, doc: str, forms: list[str]) -> dict[str, tuple[str, int, str]]:
    """Broken files: name -> (content, line, piece of the message); lines counted in the text."""
    tg, _ = _build(forms[:12], speakers=False)
    good = tmp_path / "good.TextGrid"
    tg.save(str(good), format="long_textgrid", includeBlankSpaces=True)
    lines = good.read_text(encoding="utf-8").splitlines(keepends=True)
    first = next(i for i, line in enumerate(lines) if line.strip().startswith("intervals [2]"))
    out = {"header": ("".join(['File type = "ooTextFile"\n', 'Object class = "Table"\n'] + lines[2:]), 1,
                      "not a TextGrid text file"),
           "cut": ("".join(lines[:first + 2]), first + 2, "the file ends inside tier 'orthography'"),
           "empty": ("", 1, "empty")}
    backwards = list(lines)
    backwards[first + 2] = "            xmax = 0.1\n"
    out["backwards"] = ("".join(backwards), first + 3, "ends (0.1 s) before it starts")
    overlap = list(lines)
    overlap[first + 1] = "            xmin = 0.1\n"
    out["overlap"] = ("".join(overlap), first + 2, "starts before the one before it ends")
    word = list(lines)
    word[first + 1] = "            xmin = soon\n"
    out["time"] = ("".join(word), first + 2, "xmin 'soon' is not a number")
    return out


@pytest.mark.parametrize("case", ["header", "cut", "empty", "backwards", "overlap", "time"])
def test_broken_files_are_refused_at_their_line(tmp_path, gum, case):
    corpus, doc, forms = gum
    content, line, says = _broken(tmp_path, doc, forms)[case]
    path = tmp_path / f"{doc}.TextGrid"
    path.write_text(content, encoding="utf-8")
    before = sorted((p.relative_to(corpus.path), p.stat().st_size) for p in corpus.path.rglob("*") if p.is_file())
    done = subprocess.run([sys.executable, "-m", "engine.cli", "import", str(corpus.path), str(path)],
                          capture_output=True, text=True)
    assert done.returncode == 2 and "Traceback" not in done.stderr, done.stderr
    assert f"{path}:{line}:" in done.stderr.replace("\n", "") and says in done.stderr.replace("\n", " "), done.stderr
    after = sorted((p.relative_to(corpus.path), p.stat().st_size) for p in corpus.path.rglob("*") if p.is_file())
    assert after == before


def test_a_label_over_two_lines_and_an_unknown_document(tmp_path, gum):
    corpus, doc, forms = gum
    short = ('File type = "ooTextFile"\nObject class = "TextGrid"\n\n0\n2\n<exists>\n1\n"IntervalTier"\n'
             '"note"\n0\n2\n1\n0\n2\n"two\nlines"\n')
    path = tmp_path / "x.TextGrid"
    path.write_text(short, encoding="utf-8")
    tiers, _, _ = read_tiers(path)
    assert tiers[0].label.to_pylist() == ["two\nlines"] and tiers[0].line.tolist() == [13]
    with pytest.raises(StrataError, match="unknown document 'x'"):
        corpus.import_files([path], progress=False)
