"""`v.phrase`, the text of a word's dependency subtree (its yield), on the open treebank (UD
English GUM, dev split): the subtree is computed here from HEAD with the `conllu` library
(PyPI); its text is cut from the document text at the words' own character offsets, runs of
consecutive words joined by " … " where the subtree has a gap (a non-projective subtree)."""
from __future__ import annotations

from collections import defaultdict

import conllu
import pytest


@pytest.fixture(scope="module")
def gum(gum_corpora):
    corpus, _, path = gum_corpora["dev"]
    return corpus, conllu.parse(path.read_text(encoding="utf-8"))


def subtree(sentence, root: int) -> list[int]:
    children = defaultdict(list)
    for t in sentence:
        if isinstance(t["id"], int) and t["head"]:
            children[t["head"]].append(t["id"])
    out, todo = [], [root]
    while todo:
        n = todo.pop()
        out.append(n)
        todo.extend(children[n])
    return sorted(out)


def runs(ids: list[int]) -> list[list[int]]:
    out: list[list[int]] = []
    for i in ids:
        if out and out[-1][-1] == i - 1:
            out[-1].append(i)
        else:
            out.append([i])
    return out


def test_the_phrase_of_every_subject_is_its_subtree(gum):
    corpus, sentences = gum
    con = corpus.connect()
    texts = dict(con.execute("SELECT name, text FROM documents").fetchall())
    con.close()
    places = {(r["w.sentence"], r["w.id"]): (r["doc"], r["w.char_start"], r["w.char_end"])
              for r in corpus.query("find w = word show w.id").rows()}
    want = {}
    gaps = 0
    for s in sentences:
        sid = s.metadata["sent_id"]
        for t in s:
            if isinstance(t["id"], int) and t["deprel"] == "nsubj":
                pieces = []
                for run in runs(subtree(s, t["id"])):
                    doc, start, _ = places[(sid, run[0])]
                    _, _, end = places[(sid, run[-1])]
                    pieces.append(texts[doc][start:end])
                gaps += len(pieces) > 1
                want[(sid, t["id"])] = " … ".join(pieces)
    got = {(r["s.sentence"], r["s.id"]): r["s.phrase"]
           for r in corpus.query('find s = word(deprel = "nsubj") show s.id, s.phrase').rows()}
    assert got == want
    assert gaps > 0                     # the split has non-projective subjects
    assert any(len(v.split()) > 3 for v in want.values())
