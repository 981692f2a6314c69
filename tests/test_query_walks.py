"""Walks over edge sets (`a under b via E`, `a above b via E`) against networkx.

The reference side shares nothing with strata: the treebank (UD English GUM, dev) is parsed
with the `conllu` library (PyPI), its DEPS column becomes a networkx DiGraph (edge dependent ->
head, as the `enhanced` edge set stores it), and reachability is `nx.descendants`; depth is
`nx.single_source_shortest_path_length`, the definition the compiler documents (a pair's
depth is its shortest walk).  The GUM enhanced graph has cycles (checked below), so these
tests also show that the walk terminates there.
"""
from __future__ import annotations

from collections import defaultdict

import conllu
import networkx as nx
import pytest

from engine.errors import StrataError
from querylang.catalog import AttrInfo, LayerInfo, StaticCatalog
from querylang.checker import check
from querylang.parser import parse
from tests.conftest import gum_file

Key = tuple[str, str]     # (sent_id, CoNLL-U ID as written, e.g. "7" or "39.1")


def _cid(value: object) -> str:
    """conllu gives an empty node's ID as a tuple (39, ".", 1)."""
    return "".join(str(x) for x in value) if isinstance(value, tuple) else str(value)


@pytest.fixture(scope="module")
def graphs() -> dict[str, object]:
    """The DEPS graph and the basic HEAD graph of GUM dev, and each node's layer."""
    enhanced, basic = nx.DiGraph(), nx.DiGraph()
    labels: dict[tuple[Key, Key], set[str]] = defaultdict(set)
    layer: dict[Key, str] = {}
    with open(gum_file("dev"), encoding="utf-8") as f:
        for sent in conllu.parse_incr(f):
            sid = sent.metadata["sent_id"]
            for tok in sent:
                tid = tok["id"]
                if isinstance(tid, tuple) and tid[1] == "-":
                    continue                               # a multiword token line: no relations
                me = (sid, _cid(tid))
                layer[me] = "word" if isinstance(tid, int) else "empty"
                if isinstance(tid, int) and tok["head"]:
                    basic.add_edge(me, (sid, str(tok["head"])))
                for rel, head in tok["deps"] or []:
                    if head != 0:
                        enhanced.add_edge(me, (sid, _cid(head)))
                        labels[(me, (sid, _cid(head)))].add(rel)
    return {"enhanced": enhanced, "basic": basic, "labels": labels, "layer": layer}


@pytest.fixture(scope="module")
def corpus(gum_corpora):
    return gum_corpora["dev"][0]


def strata_pairs(corpus, la: str, lb: str, relation: str) -> set[tuple[Key, Key]]:
    """(a, b) pairs of `find a = la, b = lb where <relation>` as (sent_id, cid) keys."""
    rows = corpus.query(f"find a = {la}, b = {lb} where {relation} "
                        "show a.cid, b.cid, a.sentence.sent_id, b.sentence.sent_id", context=0).rows()
    return {((r["a.sentence.sent_id"], r["a.cid"]), (r["b.sentence.sent_id"], r["b.cid"])) for r in rows}


def reachable(graph: nx.DiGraph, depth: tuple[int, int] | None = None) -> set[tuple[Key, Key]]:
    """Pairs (a, b), a != b, with b reachable from a; with depth, the shortest walk's length in range."""
    out = set()
    for a in graph:
        if depth is None:
            out |= {(a, b) for b in nx.descendants(graph, a)}
        else:
            lengths = nx.single_source_shortest_path_length(graph, a, cutoff=depth[1])
            out |= {(a, b) for b, k in lengths.items() if b != a and depth[0] <= k}
    return out


def of_layers(pairs: set[tuple[Key, Key]], layer: dict[Key, str], la: str, lb: str) -> set[tuple[Key, Key]]:
    return {(a, b) for a, b in pairs if layer[a] == la and layer[b] == lb}


def test_the_enhanced_graph_of_gum_dev_has_cycles(graphs):
    # the premise of the termination tests: nx.find_cycle raises NetworkXNoCycle on a DAG
    cycle = nx.find_cycle(graphs["enhanced"])
    assert len(cycle) >= 2


@pytest.mark.parametrize("la,lb", [("word", "word"), ("word", "empty"), ("empty", "word")])
def test_under_via_enhanced_equals_networkx_descendants(corpus, graphs, la, lb):
    want = of_layers(reachable(graphs["enhanced"]), graphs["layer"], la, lb)
    assert want, "the reference found no pairs: the comparison would say nothing"
    assert strata_pairs(corpus, la, lb, "a under b via enhanced") == want


def test_above_is_the_inverse_walk(corpus, graphs):
    want = {(b, a) for a, b in of_layers(reachable(graphs["enhanced"]), graphs["layer"], "word", "word")}
    assert strata_pairs(corpus, "word", "word", "a above b via enhanced") == want


@pytest.mark.parametrize("depth", [(1, 1), (2, 3), (1, 4), (5, 100000)])
def test_depth_is_the_shortest_walk(corpus, graphs, depth):
    lo, hi = depth
    mod = f"at depth {lo}" if lo == hi else f"at depth {lo}..{hi}"
    want = of_layers(reachable(graphs["enhanced"], depth), graphs["layer"], "word", "word")
    assert want
    assert strata_pairs(corpus, "word", "word", f"a under b via enhanced {mod}") == want


def test_a_depth_range_beyond_the_graph_is_the_whole_closure(corpus, graphs):
    """On a graph with cycles the walk stops when a level finds no new pair."""
    want = of_layers(reachable(graphs["enhanced"]), graphs["layer"], "word", "word")
    assert strata_pairs(corpus, "word", "word", "a under b via enhanced at depth 1..1000000") == want


def test_depth_one_is_a_single_edge(corpus, graphs):
    edges = of_layers(set(graphs["enhanced"].edges), graphs["layer"], "word", "word")
    assert strata_pairs(corpus, "word", "word", "a under b via enhanced at depth 1") == edges


@pytest.mark.parametrize("label", ["conj:and", "nmod:of", "nsubj"])
def test_a_label_restricts_every_edge_walked(corpus, graphs, label):
    only = nx.DiGraph([e for e, rels in graphs["labels"].items() if label in rels])
    want = of_layers(reachable(only), graphs["layer"], "word", "word")
    assert want
    assert strata_pairs(corpus, "word", "word", f'a under b via enhanced as "{label}"') == want


def test_no_node_is_under_itself_even_on_a_cycle(corpus, graphs):
    on_cycles = {n for comp in nx.strongly_connected_components(graphs["enhanced"]) if len(comp) > 1 for n in comp}
    assert on_cycles
    got = strata_pairs(corpus, "word", "word", "a under b via enhanced")
    assert not any(a == b for a, b in got)
    # a node on a cycle reaches the other nodes of its cycle
    some = next(iter(on_cycles))
    assert {b for a, b in got if a == some} >= (nx.descendants(graphs["enhanced"], some) - {some}) & {
        n for n in on_cycles if graphs["layer"][n] == "word"}


@pytest.mark.parametrize("mod", ["", " at depth 1", " at depth 2..3"])
def test_walking_the_basic_set_equals_the_tree_numbers(corpus, graphs, mod):
    walked = strata_pairs(corpus, "word", "word", f"a under b via dep{mod}")
    numbered = strata_pairs(corpus, "word", "word", f"a under b{mod}")
    assert walked == numbered
    depth = None if not mod else (1, 1) if mod == " at depth 1" else (2, 3)
    assert walked == reachable(graphs["basic"], depth)


def test_a_walk_under_or_and_without(corpus, graphs):
    """The walk is also a subquery test (under `or`, in `without`); same answers as a join."""
    plain = strata_pairs(corpus, "word", "word", "a under b via enhanced at depth 2")
    either = strata_pairs(corpus, "word", "word",
                          "a under b via enhanced at depth 2 or a under b via enhanced at depth 2")
    assert either == plain
    rows = corpus.query("find a = word without b = word where a under b via enhanced "
                        "show a.cid, a.sentence.sent_id", context=0).rows()
    got = {(r["a.sentence.sent_id"], r["a.cid"]) for r in rows}
    g, layer = graphs["enhanced"], graphs["layer"]
    want = {n for n, l in layer.items() if l == "word"
            and not any(layer[m] == "word" for m in (nx.descendants(g, n) if n in g else ()))}
    assert got == want


# ---- checker ---------------------------------------------------------------------------

def catalog() -> StaticCatalog:
    word = LayerInfo("word", "sequence", {"form": AttrInfo("form"), "deprel": AttrInfo("deprel")}, rows=10,
                      tree=True, word_layer="word", edge_sets=("dep", "enhanced"))
    span = LayerInfo("chunk", "span", {"kind": AttrInfo("kind")}, rows=5, word_layer="word")
    edges = [LayerInfo(n, "edges", {"label": AttrInfo("label")}) for n in ("dep", "enhanced")]
    return StaticCatalog({l.name: l for l in (word, span, *edges)})


def error(text: str) -> StrataError:
    with pytest.raises(StrataError) as info:
        check(parse(text), catalog(), text)
    return info.value


def test_an_unknown_edge_set_suggests_the_closest():
    err = error("find a = word, b = word where a under b via enhancd")
    assert "unknown edge set 'enhancd'" in err.message
    assert "did you mean: enhanced?" in (err.hint or "")


def test_a_walk_may_join_layers_without_tree_columns():
    """A layer whose nodes the edge set joins may walk it without tree columns of its own."""
    cat = catalog()
    layers = dict(cat.layer_map)
    layers["chunk"] = LayerInfo("chunk", "span", {"kind": AttrInfo("kind")}, rows=5, word_layer="word",
                                edge_sets=("enhanced",))
    text = "find a = chunk, b = word where b above a via enhanced"
    checked = check(parse(text), StaticCatalog(layers), text)
    assert checked.query.where.via == "enhanced"


def test_a_walk_over_edges_that_never_touch_a_layer_is_refused():
    text = "find a = chunk, b = word where b above a via enhanced"
    err = error(text)
    assert "layer 'chunk' has none" in err.message and err.column == text.index("above") + 1


def test_a_label_needs_an_edge_set_and_via_needs_a_relation_that_walks():
    assert "`as` goes with" in error('find a = word, b = word where a under b as "nsubj"').message
    assert "`via` goes with" in error("find a = word, b = word where a inside b via dep").message
