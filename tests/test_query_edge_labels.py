"""Edge labels are values, on the open treebank (UD English GUM, dev and test), against the
enhanced graph (DEPS) and basic tree (HEAD, DEPREL) read with the `conllu` library (PyPI).

The rule: `as "obl"` is the label obl exactly, not its subtypes (`obl:tmod`: a UD subtype is
another value, universaldependencies.org/u/overview/enhanced-syntax); `as ~ "^obl(:|$)"`
is a regular expression and takes obl with every subtype.  `label(a, b)` shows the label of the
edges that join a to b.  Heads that are the root (HEAD 0) or an empty node are reachable.
"""
from __future__ import annotations

from collections import Counter, defaultdict

import conllu
import pytest

SPLITS = ["dev", "test"]


def node_id(head) -> str:
    return str(head) if isinstance(head, int) else f"{head[0]}.{head[2]}"


def enhanced(path):
    """(sentence id, dependent ID, head ID or '0', label) of every DEPS entry."""
    out = []
    for s in conllu.parse(path.read_text(encoding="utf-8")):
        for t in s:
            tid = t["id"]
            if isinstance(tid, tuple) and tid[1] == "-":
                continue
            for label, head in t["deps"] or []:
                out.append((s.metadata["sent_id"], node_id(tid), node_id(head), label))
    return out


def is_word(cid: str) -> bool:
    return "." not in cid


@pytest.fixture(scope="module", params=SPLITS)
def split(request, gum_corpora):
    corpus, _, path = gum_corpora[request.param]
    return corpus, enhanced(path)


def count(corpus, text: str) -> int:
    return corpus.query(text).rows()[0]["count"]


def test_a_label_is_matched_exactly_and_a_regular_expression_takes_the_subtypes(split):
    corpus, deps = split
    word_pairs = [d for d in deps if is_word(d[1]) and is_word(d[2]) and d[2] != "0"]
    exact = sum(1 for d in word_pairs if d[3] == "obl")
    family = sum(1 for d in word_pairs if d[3] == "obl" or d[3].startswith("obl:"))
    assert 0 < exact < family
    assert count(corpus, 'find a = word, b = word where a depends on b via enhanced as "obl" count') == exact
    assert count(corpus, 'find a = word, b = word where a depends on b via enhanced as ~ "^obl(:|$)" count') == family
    assert count(corpus, 'find b = word, a = word where b governs a via enhanced as ~ "^obl(:|$)" count') == family


def test_the_distribution_of_enhanced_labels_is_one_query(split):
    corpus, deps = split
    labels: dict[tuple, set] = defaultdict(set)
    for sid, dep, head, label in deps:
        if is_word(dep) and is_word(head) and head != "0":
            labels[(sid, dep, head)].add(label)
    want = Counter("|".join(sorted(ls)) for ls in labels.values())
    hits = corpus.query("find a = word, b = word where a depends on b via enhanced count per label(a, b)")
    assert {r["label(a, b)"]: r["count"] for r in hits.rows()} == dict(want)


def test_a_basic_label_of_the_tree_columns(gum_corpora):
    corpus, _, path = gum_corpora["dev"]
    want = Counter(t["deprel"] for s in conllu.parse(path.read_text(encoding="utf-8"))
                   for t in s if isinstance(t["id"], int) and t["head"])
    hits = corpus.query("find a = word, b = word where a depends on b count per label(a, b)")
    assert {r["label(a, b)"]: r["count"] for r in hits.rows()} == dict(want)


def test_heads_that_are_empty_nodes(split):
    corpus, deps = split
    want = {(sid, dep, head, label) for sid, dep, head, label in deps if is_word(dep) and not is_word(head)}
    assert want
    hits = corpus.query("find a = word, b = empty where a depends on b via enhanced "
                        "show a.id, b.id, label(a, b)").rows()
    assert {(r["a.sentence"], str(r["a.id"]), r["b.id"], r["label(a, b)"]) for r in hits} == want


def test_the_root_is_reachable_also_beside_other_heads(split):
    corpus, deps = split
    roots = {(sid, dep) for sid, dep, head, _ in deps if head == "0" and is_word(dep)}
    heads = defaultdict(set)
    for sid, dep, head, _ in deps:
        heads[(sid, dep)].add(head)
    both = {k for k in roots if len(heads[k]) > 1}
    assert both, "the treebank has words whose enhanced heads are the root and another word"
    hits = corpus.query("find a = word where a is root via enhanced show a.id").rows()
    assert {(r["a.sentence"], str(r["a.id"])) for r in hits} == roots
    hits = corpus.query("find a = word, b = word where a is root via enhanced and a depends on b via enhanced "
                        "show a.id").rows()
    assert {(r["a.sentence"], str(r["a.id"])) for r in hits} == {k for k in both if any(
        is_word(h) and h != "0" for h in heads[k])}
    assert count(corpus, "find a = word where a is root count") == count(
        corpus, 'find a = word(deprel = "root") count')
