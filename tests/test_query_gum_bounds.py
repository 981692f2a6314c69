"""Distance bounds and the same sentence on the open treebank (UD English GUM, dev and test),
against counts made here from the CoNLL-U files with the `conllu` reference library (PyPI).

The reference puts every syntactic word of a document in file order, with the number of the
surface token it belongs to (a multiword token such as "country’s" is one token holding two
words) and of its sentence. A pair (a, b) with a before b is then `by at most N words` when
fewer than N + 1 words lie between them (j - i - 1 <= N), and `by at most N tokens` when at most
N tokens lie wholly between them (max(0, tok_j - tok_i - 1) <= N): the definition of a gap in
the README, counted without strata. Empty nodes (IDs like 8.1) are no words here, as in strata's
layer `word`; punctuation is a word, as in CoNLL-U.
"""
from __future__ import annotations

from dataclasses import dataclass

import conllu
import pytest

from tests.conftest import gum_file

SPLITS = ["dev", "test"]


@dataclass(frozen=True)
class Word:
    upos: str
    token: int       # number of the surface token in the document
    sentence: int    # number of the sentence in the file


def _documents(split: str) -> list[list[Word]]:
    docs: list[list[Word]] = []
    n_sent = 0
    with open(gum_file(split), encoding="utf-8") as f:
        for sent in conllu.parse_incr(f):
            if "newdoc id" in sent.metadata or not docs:
                docs.append([])
                n_token = 0
            words, mwt_until = docs[-1], 0
            for tok in sent:
                tid = tok["id"]
                if isinstance(tid, tuple) and tid[1] == "-":        # a multiword token: one token
                    n_token += 1
                    mwt_until = tid[2]
                elif isinstance(tid, int):
                    if tid > mwt_until:
                        n_token += 1
                    words.append(Word(tok["upos"], n_token, n_sent))
            n_sent += 1
    return docs


@pytest.fixture(scope="module")
def documents() -> dict[str, list[list[Word]]]:
    return {split: _documents(split) for split in SPLITS}


def reference_count(docs: list[list[Word]], upos_a: str, upos_b: str, unit: str, lo: int | None, hi: int,
                    same_sentence: bool = False) -> int:
    """Pairs a before b (a of upos_a, b of upos_b, one document) whose gap lies in [lo, hi]."""
    n = 0
    for words in docs:
        for i, a in enumerate(words):
            if a.upos != upos_a:
                continue
            for j in range(i + 1, len(words)):
                b = words[j]
                gap = j - i - 1 if unit == "words" else max(0, b.token - a.token - 1)
                if gap > hi:
                    break           # gaps only grow with j
                if b.upos == upos_b and (lo is None or gap >= lo) and (not same_sentence or a.sentence == b.sentence):
                    n += 1
    return n


def _count(corpus, query: str) -> int:
    rows = corpus.query(query).rows()
    assert len(rows) == 1, rows
    return rows[0]["count"]


@pytest.mark.parametrize("split", SPLITS)
@pytest.mark.parametrize("upos_a, upos_b, bound, lo, hi", [
    ("DET", "NOUN", "by at most 0 words", None, 0),                   # adjacency
    ("ADJ", "NOUN", "by at most 3 words", None, 3),
    ("VERB", "ADP", "by at most 1 word", None, 1),                    # the README's example
    ("ADJ", "NOUN", "by at least 2 and at most 3 words", 2, 3),
    ("PUNCT", "PRON", "by at most 0 words", None, 0),                 # across sentence ends too
])
def test_word_bounds_match_the_conllu_count(gum_corpora, documents, split, upos_a, upos_b, bound, lo, hi):
    corpus = gum_corpora[split][0]
    docs = documents[split]
    query = f'find a = word(upos = "{upos_a}"), b = word(upos = "{upos_b}") where a precedes b {bound}'
    want = reference_count(docs, upos_a, upos_b, "words", lo, hi)
    assert _count(corpus, query + " count") == want > 0
    # the inverse relation finds the same pairs
    flipped = f'find a = word(upos = "{upos_a}"), b = word(upos = "{upos_b}") where b follows a {bound} count'
    assert _count(corpus, flipped) == want
    # in the same sentence: the pairs whose two words have one sentence
    same = reference_count(docs, upos_a, upos_b, "words", lo, hi, same_sentence=True)
    assert _count(corpus, query + " in the same sentence count") == same > 0
    if upos_a == "PUNCT":        # a sentence-final mark and the next sentence's first pronoun
        assert want > same


@pytest.mark.parametrize("split", SPLITS)
def test_token_bounds_count_a_multiword_token_once(gum_corpora, documents, split):
    """NOUN then PART (the possessive ’s) at most 0 tokens apart: "country’s" is one token, so
    the noun and its ’s have no token between them, as do the words right before the noun."""
    corpus = gum_corpora[split][0]
    docs = documents[split]
    for upos_a, upos_b, hi in (("NOUN", "PART", 0), ("DET", "PART", 0), ("DET", "PART", 1)):
        want = reference_count(docs, upos_a, upos_b, "tokens", None, hi)
        got = _count(corpus, f'find a = word(upos = "{upos_a}"), b = word(upos = "{upos_b}") '
                             f'where a precedes b by at most {hi} tokens count')
        assert got == want > 0, (upos_a, upos_b, hi)
    # in words the same noun and ’s are adjacent, and a determiner before the noun is one away
    assert (reference_count(docs, "DET", "PART", "words", None, 0)
            < reference_count(docs, "DET", "PART", "tokens", None, 0))
