"""Every hit row says where each of its nodes is, in the user's terms: document name, sentence
id, CoNLL-U ID, character span, and the time span where there is one.

The reference is the open treebank's dev split as the `conllu` library (from the package
registry) parses it: `# newdoc id`, `# sent_id`, each token's ID, FORM and HEAD.
"""
from __future__ import annotations

from collections import Counter

import conllu
import pytest

from engine import Corpus
from tests.conftest import first_gum_sentences

SENTENCES = 120          # several documents


@pytest.fixture(scope="module")
def gum(tmp_path_factory):
    """(corpus, parsed sentences with their document name) of the dev split's first sentences."""
    root = tmp_path_factory.mktemp("places")
    source = first_gum_sentences(root, SENTENCES)
    corpus = Corpus.create(root / "corpus")
    corpus.import_files([source], progress=False)
    parsed, doc = [], None
    for sentence in conllu.parse(source.read_text(encoding="utf-8")):
        doc = sentence.metadata.get("newdoc id", doc)
        parsed.append((doc, sentence))
    assert len({d for d, _ in parsed}) > 1          # several documents
    return corpus, parsed


def words_of(parsed):
    """(document, sent_id, ID, FORM, UPOS, DEPREL, HEAD) of every syntactic word (integer ID)."""
    return [(doc, s.metadata["sent_id"], str(w["id"]), w["form"], w["upos"], w["deprel"], w["head"])
            for doc, s in parsed for w in s if isinstance(w["id"], int)]


def test_each_node_names_its_document_sentence_and_conllu_id(gum):
    corpus, parsed = gum
    hits = corpus.query('find t = word(upos = "VERB")')
    got = [(r["t.doc"], r["t.sentence"], r["t.conllu_id"], r["t.text"]) for r in hits.rows()]
    want = [(d, s, i, f) for d, s, i, f, upos, _, _ in words_of(parsed) if upos == "VERB"]
    assert got == want and len(got) > 100
    assert "t.id" not in hits.columns and "t.node" in hits.columns   # internal numbers are not "ids"
    con = corpus.connect()
    texts = dict(con.execute("SELECT name, text FROM documents").fetchall())
    con.close()
    for r in hits.rows():
        assert texts[r["t.doc"]][r["t.char_start"]:r["t.char_end"]] == r["t.text"]


def test_two_variables_each_with_its_own_place(gum):
    corpus, parsed = gum
    hits = corpus.query('find d = word(deprel = "nsubj"), h = word where d depends on h')
    got = Counter((r["d.doc"], r["d.sentence"], r["d.conllu_id"], r["h.sentence"], r["h.conllu_id"])
                  for r in hits.rows())
    want = Counter((doc, s, i, s, str(head)) for doc, s, i, _, _, deprel, head in words_of(parsed)
                   if deprel == "nsubj")
    assert got == want and sum(got.values()) > 50


def test_a_node_s_doc_and_sentence_are_names(gum):
    corpus, parsed = gum
    by_doc = corpus.query("find t = word count per t.doc").rows()
    want = Counter(d for d, *_ in words_of(parsed))
    assert {r["t.doc"]: r["count"] for r in by_doc} == dict(want)
    listed = corpus.query('find t = word(upos = "PROPN") show t.doc, t.sentence').rows()
    assert [(r["t.doc"], r["t.sentence"]) for r in listed] == \
        [(d, s) for d, s, _, _, upos, _, _ in words_of(parsed) if upos == "PROPN"]


@pytest.mark.parametrize("template", [
    'find t = word({k} = "{v}") count',
    'find t = word where t.{k} = "{v}" count',
    'find t = word(upos = "NOUN") show t.{k} limit 3',
    "find t = word count per t.{k}",
    'find s = sentence without t = word({k} = "{v}") where t inside s count',
    'find t = word without u = word(upos = "PUNCT") where u directly follows t and u.{k} = "{v}" count',
    "find t = word max(t.char_end) per t.{k}",
])
def test_doc_attributes_work_wherever_sentence_attributes_do(gum, template):
    corpus, parsed = gum
    first_doc = parsed[0][0]
    first_sentence = parsed[0][1].metadata["sent_id"]
    by_sentence = corpus.query(template.format(k="sentence.sent_id", v=first_sentence))
    by_doc = corpus.query(template.format(k="doc.name", v=first_doc))
    assert len(by_sentence) > 0 and len(by_doc) > 0
    if "count" in template and "by" not in template:
        tokens = words_of(parsed)
        n_doc = sum(1 for w in tokens if w[0] == first_doc)
        n_sentence = sum(1 for w in tokens if w[1] == first_sentence)
        if template.startswith('find t = word({k}') or template.startswith("find t = word where"):
            assert by_doc.rows()[0]["count"] == n_doc and by_sentence.rows()[0]["count"] == n_sentence
