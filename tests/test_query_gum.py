"""Query results on the open treebank (UD English GUM, dev and test) against values computed
here, straight from the CoNLL-U files, with the `conllu` reference library (PyPI).

Every expected value below is counted in the test from the files; none is typed in. The
coreference chains come from the MISC ``Entity`` brackets, read by a small reader written for
this test from the UD coreference notation (the treebank's README and the UD guidelines).
"""
from __future__ import annotations

import re
from collections import Counter
from dataclasses import dataclass, field
from pathlib import Path

import conllu
import pytest

from tests.conftest import gum_file

SPLITS = ["dev", "test"]


# ---- the reference side: one pass over each file with `conllu` --------------------------

@dataclass
class Mention:
    doc: str
    sent_id: str
    sent_index: int     # position of the sentence in the file
    first: int          # 0-based position among the sentence's syntactic words
    last: int           # inclusive
    eid: str
    etype: str

    @property
    def length(self) -> int:
        return self.last - self.first + 1


@dataclass
class Sentence:
    sent_id: str
    index: int
    doc: str
    genre: str | None
    speaker: str | None
    tokens: list[dict]   # syntactic words only (integer ids), as `conllu` gives them


@dataclass
class Reference:
    sentences: list[Sentence] = field(default_factory=list)
    mentions: list[Mention] = field(default_factory=list)


def _entity_brackets(sent: Sentence) -> list[Mention]:
    """Mentions of one sentence from ``Entity=`` in MISC.

    Notation (UD coreference): ``(eid-type-...`` opens, ``eid)`` closes, ``(eid-type-...)``
    is a one-token mention; several brackets may follow each other in one value.
    """
    out: list[Mention] = []
    opened: dict[str, list[tuple[int, str]]] = {}
    for pos, tok in enumerate(sent.tokens):
        value = (tok["misc"] or {}).get("Entity") or ""
        for m in re.finditer(r"\(([^()]+)\)?|([^()]+)\)", value):
            if m.group(1) is not None:
                fields = m.group(1).split("-")
                eid, etype = fields[0], fields[1] if len(fields) > 1 else ""
                if m.group(0).endswith(")"):
                    out.append(Mention(sent.doc, sent.sent_id, sent.index, pos, pos, eid, etype))
                else:
                    opened.setdefault(eid, []).append((pos, etype))
            else:
                eid = m.group(2)
                first, etype = opened[eid].pop()
                out.append(Mention(sent.doc, sent.sent_id, sent.index, first, pos, eid, etype))
    assert not any(opened.values()), f"unclosed mention in {sent.sent_id}"
    return out


def _read(path: Path) -> Reference:
    ref = Reference()
    doc = genre = None
    with open(path, encoding="utf-8") as f:
        for s in conllu.parse_incr(f):
            if "newdoc id" in s.metadata:
                doc, genre = s.metadata["newdoc id"], None
            genre = s.metadata.get("meta::genre", genre)
            sent = Sentence(s.metadata["sent_id"], len(ref.sentences), doc, genre, s.metadata.get("speaker"),
                            [t for t in s if isinstance(t["id"], int)])
            ref.sentences.append(sent)
            ref.mentions.extend(_entity_brackets(sent))
    return ref


@pytest.fixture(scope="module")
def reference() -> dict[str, Reference]:
    return {split: _read(gum_file(split)) for split in SPLITS}


@pytest.fixture(params=SPLITS)
def split(request, gum_corpora, reference):
    corpus = gum_corpora[request.param][0]
    return corpus, reference[request.param]


def _count(corpus, query: str) -> int:
    rows = corpus.query(query).rows()
    assert len(rows) == 1, rows
    return rows[0]["count"]


def _heads(sent: Sentence) -> dict[int, dict]:
    return {t["id"]: t for t in sent.tokens}


def _ancestors(sent: Sentence, tok: dict) -> list[int]:
    """Ids of the heads above ``tok``, nearest first."""
    by_id, out, cur = _heads(sent), [], tok["head"]
    while cur:
        out.append(cur)
        cur = by_id[cur]["head"]
    return out


# ---- syntax ----------------------------------------------------------------------------

PRONOUN_SUBJECTS = ('find s = word(upos = "PRON", deprel = "nsubj"), v = word(upos = "VERB") '
                    'where s depends on v')


def test_pronoun_subjects_of_verbs(split):
    corpus, ref = split
    want = Counter()
    for sent in ref.sentences:
        by_id = _heads(sent)
        for t in sent.tokens:
            head = by_id.get(t["head"])
            if t["upos"] == "PRON" and t["deprel"] == "nsubj" and head and head["upos"] == "VERB":
                want[head["lemma"]] += 1
    assert _count(corpus, PRONOUN_SUBJECTS + " count") == sum(want.values()) > 0
    got = [(r["v.lemma"], r["count"]) for r in corpus.query(PRONOUN_SUBJECTS + " count per v.lemma").rows()]
    top = sorted(want.items(), key=lambda kv: (-kv[1], kv[0]))
    assert got[:10] == top[:10]
    assert len(got) == len(want)


def test_verbs_without_a_nominal_subject(split):
    corpus, ref = split
    want = 0
    for sent in ref.sentences:
        with_subject = {t["head"] for t in sent.tokens if t["deprel"] == "nsubj"}
        want += sum(1 for t in sent.tokens if t["upos"] == "VERB" and t["id"] not in with_subject)
    got = _count(corpus, 'find v = word(upos = "VERB") without s = word(deprel = "nsubj") '
                         'where s depends on v count')
    verbs = sum(1 for s in ref.sentences for t in s.tokens if t["upos"] == "VERB")
    assert got == want
    assert 0 < want < verbs


def _adjectives_under_objects(ref: Reference) -> tuple[Counter, Counter]:
    """(sentence, adjective id, object id) for any depth and for depth 1."""
    anywhere, direct = Counter(), Counter()
    for sent in ref.sentences:
        by_id = _heads(sent)
        for t in sent.tokens:
            if t["upos"] != "ADJ":
                continue
            for depth, h in enumerate(_ancestors(sent, t), start=1):
                if by_id[h]["deprel"] == "obj":
                    anywhere[(sent.sent_id, t["id"], h)] += 1
                    if depth == 1:
                        direct[(sent.sent_id, t["id"], h)] += 1
    return anywhere, direct


def _pairs(corpus, query: str) -> Counter:
    return Counter((r["sentence"], int(r["a.cid"]), int(r["o.cid"])) for r in corpus.query(query).rows())


def test_adjectives_under_objects_any_depth_and_depth_one(split):
    corpus, ref = split
    anywhere, direct = _adjectives_under_objects(ref)
    base = 'find a = word(upos = "ADJ"), o = word(deprel = "obj") where a under o'
    assert _pairs(corpus, base + " show a.cid, o.cid") == anywhere
    assert _pairs(corpus, base + " at depth 1 show a.cid, o.cid") == direct
    children = _pairs(corpus, 'find a = word(upos = "ADJ"), o = word(deprel = "obj") '
                              'where a child of o show a.cid, o.cid')
    assert children == direct
    assert sum(anywhere.values()) > sum(direct.values()) > 0


def test_determiners_directly_before_nouns_within_a_sentence(split):
    corpus, ref = split
    want = sum(1 for s in ref.sentences for a, b in zip(s.tokens, s.tokens[1:])
               if a["upos"] == "DET" and b["upos"] == "NOUN")
    got = _count(corpus, 'find a = word(upos = "DET"), b = word(upos = "NOUN") '
                         'where a directly precedes b and a.sent = b.sent count')
    assert got == want > 0


# ---- coreference -----------------------------------------------------------------------

def _chain_sizes(ref: Reference) -> list[int]:
    return list(Counter((m.doc, m.eid) for m in ref.mentions).values())


def test_mention_pairs_in_one_chain(split):
    corpus, ref = split
    sizes = _chain_sizes(ref)
    assert _count(corpus, "find a = mention, b = mention where a same entity as b count") == \
        sum(n * (n - 1) for n in sizes)
    assert _count(corpus, "find a = mention, b = mention where a antecedent of b count") == \
        sum(n * (n - 1) // 2 for n in sizes)
    assert _count(corpus, "find a = mention, b = mention where a previous mention of b count") == \
        sum(n - 1 for n in sizes)
    assert max(sizes) > 1


def test_chain_length_is_the_number_of_mentions_in_the_chain(split):
    corpus, ref = split
    want = Counter()                     # chain length -> mentions in chains of that length
    for n in _chain_sizes(ref):
        want[n] += n
    got = {r["m.chain_length"]: r["count"] for r in corpus.query("find m = mention count per m.chain_length").rows()}
    assert got == dict(want)


def test_previous_mention_is_the_one_just_before_in_the_text(split):
    """Each (earlier, later) pair from the query is adjacent in text order within its chain."""
    corpus, ref = split
    chains: dict[tuple, list[Mention]] = {}
    for m in ref.mentions:
        chains.setdefault((m.doc, m.eid), []).append(m)
    want = Counter()
    for ms in chains.values():
        ms.sort(key=lambda m: (m.sent_index, m.first, -m.last))
        for a, b in zip(ms, ms[1:]):
            want[(a.sent_id, b.sent_id)] += 1
    hits = corpus.query("find a = mention, b = mention where a previous mention of b "
                        "show a.sentence.sent_id as sa, b.sentence.sent_id as sb").rows()
    assert Counter((r["sa"], r["sb"]) for r in hits) == want


def test_tokens_inside_person_mentions(split):
    """`inside` from the word layer to the mention layer: one hit per (token, mention) pair."""
    corpus, ref = split
    want = sum(m.length for m in ref.mentions if m.etype == "person")
    got = _count(corpus, 'find t = word, m = mention(type = "person") where t inside m count')
    assert got == want > 0


# ---- attribute tests -------------------------------------------------------------------

def test_feature_regex_and_attribute_tests(split):
    corpus, ref = split
    tokens = [(s, t) for s in ref.sentences for t in s.tokens]
    plural = sum(1 for _, t in tokens if (t["feats"] or {}).get("Number") == "Plur")
    capital = sum(1 for _, t in tokens if re.match(r"[A-Z]", t["form"]))
    spoken = sum(1 for s, _ in tokens if s.speaker is not None)
    academic = sum(1 for s, _ in tokens if s.genre == "academic")
    assert _count(corpus, 'find t = word(feats.Number = "Plur") count') == plural > 0
    assert _count(corpus, 'find t = word(form ~ "^[A-Z]") count') == capital > 0
    assert _count(corpus, "find t = word(sentence.speaker is not missing) count") == spoken > 0
    assert _count(corpus, 'find t = word(doc.genre = "academic") count') == academic > 0
