"""`directly precedes` and `directly follows` with CoNLL-U empty nodes, on the open treebank
(UD English GUM, dev and test), against the order of the file's lines read with the `conllu`
library (PyPI): in the CoNLL-U format an empty node's line (ID "8.1") stands after word 8 and
before word 9, and multiword token ranges ("3-4") are not nodes."""
from __future__ import annotations

import conllu
import pytest


def kind(token) -> str | None:
    tid = token["id"]
    if isinstance(tid, int):
        return "word"
    if isinstance(tid, tuple) and tid[1] == ".":
        return "empty"
    return None             # a multiword token range


def cid(token) -> str:
    tid = token["id"]
    return str(tid) if isinstance(tid, int) else f"{tid[0]}.{tid[2]}"


def line_pairs(path) -> dict[tuple[str, str], set[tuple[str, str, str]]]:
    """(kind of a, kind of b) -> {(sentence id, a's ID, b's ID)} for b on the next node line."""
    out: dict[tuple[str, str], set] = {}
    for s in conllu.parse(path.read_text(encoding="utf-8")):
        nodes = [t for t in s if kind(t)]
        for x, y in zip(nodes, nodes[1:]):
            out.setdefault((kind(x), kind(y)), set()).add((s.metadata["sent_id"], cid(x), cid(y)))
    return out


@pytest.mark.parametrize("split", ["dev", "test"])
@pytest.mark.parametrize("la, lb", [("word", "empty"), ("empty", "empty"), ("empty", "word")])
def test_an_empty_node_is_next_to_the_lines_around_it(gum_corpora, split, la, lb):
    corpus, _, path = gum_corpora[split]
    want = line_pairs(path).get((la, lb), set())
    if la != lb or la == "empty":
        assert want or (la, lb) == ("empty", "empty"), "the split has empty nodes after words and before words"
    hits = corpus.query(f"find a = {la}, b = {lb} where a directly precedes b show a.id, b.id").rows()
    assert {(r["a.sentence"], str(r["a.id"]), str(r["b.id"])) for r in hits} == want
    back = corpus.query(f"find b = {lb}, a = {la} where b directly follows a show a.id, b.id").rows()
    assert {(r["a.sentence"], str(r["a.id"]), str(r["b.id"])) for r in back} == want


def test_the_dev_split_has_a_run_of_empty_nodes(gum_corpora):
    _, _, path = gum_corpora["dev"]
    assert line_pairs(path).get(("empty", "empty"))


def test_two_words_stay_adjacent_across_an_empty_node(gum_corpora):
    """Between words `directly precedes` counts words: word 9 and word 10 with 9.1 between them."""
    corpus, _, path = gum_corpora["dev"]
    pairs = line_pairs(path)
    around = {(s, a) for s, a, _ in pairs[("word", "empty")]}
    hits = corpus.query("find a = word, b = word where a directly precedes b and a.sentence = b.sentence "
                        "show a.id").rows()
    assert around <= {(r["a.sentence"], str(r["a.id"])) for r in hits}


def test_empty_nodes_and_surface_tokens_are_not_ordered(gum_corpora):
    from engine.errors import StrataError
    corpus, _, _ = gum_corpora["dev"]
    with pytest.raises(StrataError, match="relates them to words"):
        corpus.query("find a = empty, b = token where a directly precedes b")
