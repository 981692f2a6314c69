"""Alignment against the open treebank: re-tokenized tokens land on their own characters.

The sentences of ../shared/data/ud-english-gum (read in place) are imported as CoNLL-U.
Then the test writes what a forced aligner would: one ``spoken`` row per surface token
(multiword tokens whole, "don't"), punctuation (UPOS PUNCT) dropped, every token lower-
or upper-cased, ``{laugh}``-style events inserted, with invented times. Every token must
land on exactly the characters of the word it came from; those characters are
computed here from the ``conllu`` reference library's parse (forms and SpaceAfter=No,
sentences joined by a newline: the text convention of DEVELOPERS.md), not by strata.
"""
from __future__ import annotations

import csv
from pathlib import Path

import conllu
import pytest

from engine import Corpus
from tests.conftest import gum_file

EVENTS = ("laugh", "cough", "breath", "click")   # non-speech events an aligner writes in braces


def _expected(path: Path) -> dict[str, list[tuple[str, int, int]]]:
    """doc name -> surface tokens (form, start, end) in document-local characters, from ``conllu``."""
    docs: dict[str, list[list[tuple[str, str, int, int]]]] = {}
    name = None
    with open(path, encoding="utf-8") as f:
        for sent in conllu.parse_incr(f):
            if "newdoc id" in sent.metadata:
                name = sent.metadata["newdoc id"]
            pos, toks = 0, []
            skip_until = 0
            for tok in sent:
                tid = tok["id"]
                if isinstance(tid, tuple) and tid[1] == "-":          # multiword token a-b
                    skip_until = tid[2]
                    upos = "X"
                elif isinstance(tid, tuple):                            # empty node
                    continue
                elif tid <= skip_until:
                    continue
                else:
                    upos = tok["upos"]
                form = tok["form"]
                toks.append((form, upos, pos, pos + len(form)))
                pos += len(form)
                misc = tok["misc"] or {}
                if misc.get("SpaceAfter") != "No":
                    pos += 1
            docs.setdefault(name, []).append(toks)
    out = {}
    for name, sents in docs.items():
        offset, tokens = 0, []
        for toks in sents:
            text_len = max((e for _, _, _, e in toks), default=0)
            tokens += [(form, offset + s, offset + e) for form, upos, s, e in toks if upos != "PUNCT"]
            offset += text_len + 1
        out[name] = tokens
    return out


def _tiers_file(expected: dict, path: Path) -> dict[tuple[str, int], tuple[int, int]]:
    """Write the re-tokenized tokens; returns (doc, row index) -> expected characters."""
    truth = {}
    with open(path, "w", encoding="utf-8", newline="") as f:
        w = csv.writer(f, delimiter="\t", lineterminator="\n")
        w.writerow(["doc", "tier", "start", "end", "label"])
        for name, tokens in expected.items():
            t = 0.0
            k = 0
            for i, (form, s, e) in enumerate(tokens):
                if i % 23 == 7:
                    w.writerow([name, "spoken", f"{t:.3f}", f"{t + 0.4:.3f}", "{" + EVENTS[i % 4] + "}"])
                    t += 0.4
                    k += 1
                label = form.upper() if i % 5 == 0 else form.lower()
                w.writerow([name, "spoken", f"{t:.3f}", f"{t + 0.25:.3f}", label])
                truth[(name, k)] = (s, e)
                t += 0.25
                k += 1
    return truth


@pytest.fixture(scope="module", params=["dev", "test"])
def gum_aligned(request, tmp_path_factory):
    path = gum_file(request.param)
    tmp = tmp_path_factory.mktemp("gum-align")
    corpus = Corpus.create(tmp / "corpus")
    corpus.import_files([path], progress=False)
    expected = _expected(path)
    tiers = tmp / "gum.tiers.tsv"
    truth = _tiers_file(expected, tiers)
    corpus.import_files([tiers], progress=False)
    return corpus, truth


def test_every_word_lands_on_its_own_characters(gum_aligned):
    corpus, truth = gum_aligned
    con = corpus.connect()
    rows = con.execute("""SELECT d.name, w.ord - min(w.ord) OVER (PARTITION BY w.doc), w.start - d.base,
                                 w."end" - d.base, w.align, w.label
                          FROM spoken w JOIN documents d USING (doc)""").fetchall()
    got = {(name, k): (s, e, cls, label) for name, k, s, e, cls, label in rows}
    assert len(got) == len(truth) + sum(1 for _, _, _, _, c, _ in rows if c == "event")
    wrong = [(key, truth[key], got[key]) for key in truth if got[key][:2] != truth[key]]
    assert wrong == [], f"{len(wrong)} of {len(truth)} tokens misplaced, first: {wrong[:5]}"
    classes = {got[key][2] for key in truth}
    assert classes <= {"exact", "normalised"}


def test_events_are_points_between_the_words(gum_aligned):
    corpus, truth = gum_aligned
    con = corpus.connect()
    rows = con.execute("""SELECT w.start, w."end", lag(w."end") OVER o, lead(w.start) OVER o, w.align
                          FROM spoken w WINDOW o AS (PARTITION BY w.doc ORDER BY w.ord)""").fetchall()
    events = [r for r in rows if r[4] == "event"]
    assert events
    for start, end, prev_end, next_start, _ in events:
        assert start == end
        assert prev_end is None or prev_end <= start
        assert next_start is None or start <= next_start


def test_tokens_take_the_times_of_their_words(gum_aligned):
    """A syntactic word inside a surface token ("do" in "don't") gets that token's times."""
    corpus, _ = gum_aligned
    con = corpus.connect()
    bad = con.execute("""SELECT count(*) FROM word t JOIN spoken w ON w.doc = t.doc AND w.start <= t.start
                           AND t."end" <= w."end" AND w.align IN ('exact', 'normalised')
                         WHERE t.t_start IS DISTINCT FROM w.t_start OR t.t_end IS DISTINCT FROM w.t_end"""
                      ).fetchone()[0]
    assert bad == 0
    # a word gets a time exactly when an aligned timed word covers some of its characters;
    # the others (punctuation, which was not spoken) have none, so a mean duration skips them
    # instead of counting a 0
    wrong = con.execute("""SELECT count(*) FROM word t WHERE (t.t_start IS NULL) = EXISTS (
                             SELECT 1 FROM spoken w WHERE w.doc = t.doc AND w.start < t."end" AND w."end" > t.start
                             AND w.align IN ('exact', 'normalised') AND w.t_start IS NOT NULL)""").fetchone()[0]
    assert wrong == 0
    untimed = con.execute("SELECT count(*), count(*) FILTER (WHERE upos = 'PUNCT') FROM word WHERE t_start IS NULL"
                          ).fetchone()
    assert untimed[0] > 0 and untimed[1] == untimed[0]       # here only punctuation lacks a time
