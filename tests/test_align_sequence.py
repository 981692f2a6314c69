"""Many segments in one call (``align_segments``) against the ``conllu`` reference reader and edlib.

The sentences of ../shared/data/ud-english-gum (dev, read in place) are joined by a newline into
one text, as DEVELOPERS.md says documents are; the surface tokens of each sentence and their
characters come from the ``conllu`` library's parse (form, then a space unless SpaceAfter=No).
Sentences whose tokens are the text character for character take the no-edit-distance path;
changed sentences (upper case, a dropped comma, a misspelling) take edlib's. Both must give the
spans the reference says, and the same as one ``align_forms`` call per sentence.
"""
from __future__ import annotations

import conllu
import edlib
import numpy as np

from engine.align.normalise import normalise_form, normalise_text
from engine.align.sequence import align_forms, align_segments
from tests.conftest import gum_file

SENTENCES = 300


def _gum_sentences() -> tuple[str, list[list[tuple[str, int, int]]], list[tuple[int, int]]]:
    """Text, per sentence its surface tokens (form, start, end), and per sentence its span."""
    sents, spans, parts, at = [], [], [], 0
    with open(gum_file("dev"), encoding="utf-8") as f:
        for sent in conllu.parse_incr(f):
            pos, toks, skip_until = 0, [], 0
            for tok in sent:
                tid = tok["id"]
                if isinstance(tid, tuple) and tid[1] == "-":      # multiword token: written once
                    skip_until = tid[2]
                elif isinstance(tid, tuple) or tid <= skip_until:  # empty node, part of a multiword token
                    continue
                toks.append((tok["form"], at + pos, at + pos + len(tok["form"])))
                pos += len(tok["form"]) + (0 if (tok["misc"] or {}).get("SpaceAfter") == "No" else 1)
            line = sent.metadata["text"]
            sents.append(toks), spans.append((at, at + len(line))), parts.append(line)
            at += len(line) + 1
            if len(sents) == SENTENCES:
                break
    return "\n".join(parts), sents, spans


def _segments(sents):
    forms = [w for toks in sents for w, _, _ in toks]
    cuts = np.concatenate([[0], np.cumsum([len(t) for t in sents])])
    return forms, cuts


def test_unchanged_sentences_land_on_the_reference_characters():
    text, sents, spans = _gum_sentences()
    forms, cuts = _segments(sents)
    lo, hi = np.array([s for s, _ in spans]), np.array([e for _, e in spans])
    al = align_segments(text, forms, cuts, lo, hi)
    expected = [(s, e) for toks in sents for _, s, e in toks]
    assert list(zip(al.start.tolist(), al.end.tolist())) == expected
    assert set(al.cls) == {"exact"}
    # what edlib itself says of such a sentence: every character matched, no edit
    q = "".join(normalise_form(w) for w, _, _ in sents[0])
    t = normalise_text(text[lo[0]:hi[0]])[0]
    res = edlib.align(q, t, mode="NW", task="path")
    assert res["editDistance"] == 0 and res["cigar"] == f"{len(q)}="


def test_changed_sentences_take_edlib_and_agree_with_one_call_each():
    text, sents, spans = _gum_sentences()
    changed = []
    for k, toks in enumerate(sents):
        if k % 3 == 0:                                 # upper case, commas dropped
            toks = [(w.upper(), s, e) for w, s, e in toks if w != ","]
        elif k % 3 == 1 and toks and len(toks[0][0]) > 3:
            w, s, e = toks[0]
            toks = [(w[0] + "z" + w[2:], s, e)] + toks[1:]    # one letter wrong: still half the letters
        changed.append(toks)
    forms, cuts = _segments(changed)
    lo, hi = np.array([s for s, _ in spans]), np.array([e for _, e in spans])
    al = align_segments(text, forms, cuts, lo, hi)
    for k, toks in enumerate(changed):
        one = align_forms(text, [w for w, _, _ in toks], int(lo[k]), int(hi[k]))
        a, b = int(cuts[k]), int(cuts[k + 1])
        assert al.start[a:b].tolist() == one.start.tolist() and al.end[a:b].tolist() == one.end.tolist()
        assert al.cls[a:b] == one.cls and np.allclose(al.score[a:b], one.score)
        assert al.start[a:b].tolist() == [s for _, s, _ in toks], k
        if k % 3 == 0:
            assert set(al.cls[a:b]) <= {"exact", "normalised"}
        elif k % 3 == 1 and toks and len(toks[0][0]) > 3:
            assert al.cls[a] == "fuzzy"
