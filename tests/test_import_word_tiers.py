"""Which tier carries the words: named (`--words-tier NAME`), one per speaker (`--words-tier
'* - words'`), or taken as the tier whose labels are the text's words, with a note.

The text is the first document of the open treebank (UD English GUM, dev split, read in
place); the tier tables are written here from its tokens, with times given by construction
(each token 0.3 s, each phone a third of its token), so that the test knows every word's
time independently of strata.  Sentences alternate between two speakers.
"""
from __future__ import annotations

from decimal import Decimal

import pytest

from engine import Corpus, StrataError
from engine.importers.word_tiers import SpeakerPattern, layer_name, speaker_tiers
from tests.conftest import first_gum_document


def _tokens(corpus: Corpus) -> list[tuple[int, str]]:
    """(sentence number from 0, form) of each surface token that is not punctuation."""
    rows = corpus.connect().execute("""SELECT t.sent, t.form FROM token t JOIN word w ON w.ord = t.word_first
                                       WHERE w.upos <> 'PUNCT' ORDER BY t.ord LIMIT 120""").fetchall()
    first = {s: k for k, s in enumerate(dict.fromkeys(s for s, _ in rows))}
    return [(first[s], form) for s, form in rows]


def _table(doc: str, tokens: list[tuple[int, str]], words: str, phones: str | None = None,
           speakers: bool = False) -> tuple[str, dict[int, tuple[int, int, str]]]:
    """The tier table text and, per token index, its (start, end, speaker) by construction (µs)."""
    lines, times = ["doc\ttier\tstart\tend\tlabel\n"], {}
    for k, (sent, form) in enumerate(tokens):
        who = "Anna" if sent % 2 == 0 else "Ben"
        start, end = 1.0 + 0.3 * k, 1.0 + 0.3 * k + 0.3
        times[k] = (int(Decimal(f"{start:.3f}") * 10 ** 6), int(Decimal(f"{end:.3f}") * 10 ** 6), who)   # µs
        tier = words.replace("*", who) if speakers else words
        lines.append(f"{doc}\t{tier}\t{start:.3f}\t{end:.3f}\t{form.lower()}\n")
        if phones:
            for p in range(3):
                ptier = phones.replace("*", who) if speakers else phones
                lines.append(f"{doc}\t{ptier}\t{start + 0.1 * p:.3f}\t{start + 0.1 * (p + 1):.3f}\t{form[:1]}{p}\n")
    return "".join(lines), times


@pytest.fixture()
def gum(tmp_path):
    corpus, _ = first_gum_document(tmp_path)
    return corpus, corpus.store.documents()[0].name, _tokens(corpus)


def test_without_the_option_the_tier_of_the_words_is_taken_and_named(gum, tmp_path):
    corpus, doc, tokens = gum
    text, times = _table(doc, tokens, "orthography", "segments")
    path = tmp_path / "a.tiers.tsv"
    path.write_text(text, encoding="utf-8")
    report = corpus.import_files([path], progress=False)
    assert len(report.notes) == 1 and "took tier 'orthography' as the words" in report.notes[0]
    con = corpus.connect()
    # every word of the tier got characters (it is the bridge), the segments got them through it
    assert con.execute("SELECT count(*), count(start) FROM orthography").fetchone() == (len(tokens), len(tokens))
    assert con.execute("SELECT count(*) = count(start) FROM segments").fetchone() == (True,)


def test_a_named_words_tier_and_a_misspelt_one(gum, tmp_path):
    corpus, doc, tokens = gum
    text, _ = _table(doc, tokens, "ort", "seg")
    path = tmp_path / "a.tiers.tsv"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(StrataError) as e:
        corpus.import_files([path], words_tier="orth", progress=False)
    assert "there is no such tier" in str(e.value) and "did you mean: ort?" in str(e.value)
    report = corpus.import_files([path], words_tier="ort", progress=False)
    assert report.notes == []


def test_one_words_tier_per_speaker(gum, tmp_path):
    """Tiers "Anna - words", "Ben - words", "Anna - phones", "Ben - phones" become layers
    ``words`` and ``phones`` with a speaker; every token lies inside its timed word, and takes
    that word's time and speaker (checked against the construction above)."""
    corpus, doc, tokens = gum
    text, times = _table(doc, tokens, "* - words", "* - phones", speakers=True)
    path = tmp_path / "talk.tiers.tsv"
    path.write_text(text, encoding="utf-8")
    corpus.import_files([path], words_tier="* - words", progress=False)
    con = corpus.connect()
    anna = sum(1 for _, _, who in times.values() if who == "Anna")
    got = corpus.query('find w = words(speaker = "Anna") count').table.column("count")[0].as_py()
    assert got == anna and 0 < anna < len(tokens)
    assert con.execute("SELECT count(DISTINCT speaker) FROM phones").fetchone() == (2,)
    words = con.execute('SELECT start, "end", t_start, t_end, speaker FROM words ORDER BY t_start').fetchall()
    inside = 0
    for k, (start, end, t_start, t_end, who) in enumerate(words):
        assert (t_start, t_end, who) == times[k]
        token = con.execute('SELECT t_start, t_end FROM token WHERE start >= ? AND "end" <= ?',
                            [start, end]).fetchall()
        inside += all(a >= t_start and b <= t_end for a, b in token) and len(token) >= 1
    assert inside == len(tokens)


def test_layer_names_a_query_can_write():
    assert [layer_name(t) for t in ("phones", "Speaker A", "1st pass", "Wörter")] == \
        ["phones", "speaker_a", "t_1st_pass", "w_rter"]


def test_speaker_patterns_split_tier_names():
    pattern = SpeakerPattern.parse("* - words")
    assert speaker_tiers(["Anna - words", "Ben - words", "Anna - phones", "noise"], pattern) == {
        "Anna - words": ("Anna", "words"), "Ben - words": ("Ben", "words"), "Anna - phones": ("Anna", "phones")}
    with pytest.raises(StrataError, match="one \\*"):
        SpeakerPattern.parse("words")


def test_a_small_tier_of_text_words_does_not_win_over_the_words(gum, tmp_path):
    """A tier of a few labels that are all words of the text (hesitations written "the", say)
    has a higher share of text words than the words tier, but far fewer of them."""
    corpus, doc, tokens = gum
    text, _ = _table(doc, tokens, "orthography")
    lines = text.splitlines(keepends=True)
    for k in (3, 9, 27):                 # an aligner's unknown-word marks: not words of the text
        lines[k] = lines[k].rsplit("\t", 1)[0] + "\t<unk>\n"
    text = "".join(lines) + "".join(f"{doc}\thesitations\t{200 + k}.000\t{200 + k}.500\tthe\n" for k in range(5))
    path = tmp_path / "a.tiers.tsv"
    path.write_text(text, encoding="utf-8")
    report = corpus.import_files([path], progress=False)
    assert "took tier 'orthography' as the words" in report.notes[0]
