"""`in every reading` against a brute-force reading of its definition: a hit holds in every
reading when, in each reading of its sentence, nodes with the same spans and labels stand in the
same relations.  Random sentences with one to three tree readings (hypothesis), and the demo's
ambiguous sentences read with `nltk.Tree` (PyPI); the evaluator shares no code with strata."""
from __future__ import annotations

import io
from collections import Counter

import pytest
from hypothesis import HealthCheck, given, settings, strategies as st
from rich.console import Console

from corpora_demo.run import DATA, build
from engine.execute import run_query
from tests.querylang_corpus import CorpusBuilder
from tests.test_demo_run import category, read_sentences, read_trees, word_leaves

LABELS = ["NP", "VP", "PP"]
RELATIONS = ["child of", "under", "inside", "sibling of"]


@st.composite
def readings(draw):
    """A corpus of 1-2 sentences of 2-5 tokens, each with 1-3 random bracketings."""
    b = CorpusBuilder()
    b.layer("token", "sequence", word_layer="token", token_layer="token")
    b.layer("sentence", "span", word_layer="token", token_layer="token", separate=True)
    b.layer("phrase", "tree", tree=True, readings=True, word_layer="token", token_layer="token")
    nodes = []       # (key, sentence, reading, label, start, end, parent key)
    pos, parts = 0, []
    for k in range(draw(st.integers(1, 2))):
        n = draw(st.integers(2, 5))
        spans = []
        for _ in range(n):
            spans.append((pos, pos + 1))
            pos += 2
        parts.append(spans)
    text = " ".join("x" for spans in parts for _ in spans)
    doc = b.doc("d", text)
    for k, spans in enumerate(parts):
        for i, (s, e) in enumerate(spans):
            b.node("token", doc, s, e, f"t{k}.{i}")
        b.node("sentence", doc, spans[0][0], spans[-1][1], sent_id=f"s{k}")
        for r in range(draw(st.integers(1, 3))):
            def grow(i: int, j: int, parent: str | None, unary: int = 0) -> None:
                key = f"p{k}.{r}.{len(nodes)}"
                label = draw(st.sampled_from(LABELS))
                start, end = spans[i][0], spans[j - 1][1]
                b.node("phrase", doc, start, end, key, parent=parent, label=label, reading=r)
                nodes.append((key, k, r, label, start, end, parent))
                if j - i > 1 and draw(st.booleans()):
                    cut = draw(st.integers(i + 1, j - 1))
                    grow(i, cut, key)
                    grow(cut, j, key)
                elif unary < 2 and draw(st.integers(0, 3)) == 3:     # a unary node: the same span twice
                    grow(i, j, key, unary + 1)
            grow(0, len(spans), None)
    con, cat = b.build()
    return con, cat, nodes


def holds(rel: str, x, y, by_key) -> bool:
    """x rel y on the stored phrase tuples (key, sentence, reading, label, start, end, parent)."""
    if rel == "child of":
        return x[6] == y[0]
    if rel == "under":
        p = x[6]
        while p is not None:
            if p == y[0]:
                return True
            p = by_key[p][6]
        return False
    if rel == "inside":
        return y[4] <= x[4] and x[5] <= y[5] and x[0] != y[0]
    if rel == "sibling of":
        return x[6] == y[6] and x[0] != y[0]
    raise AssertionError(rel)


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(c=readings(), rel=st.sampled_from(RELATIONS), la=st.sampled_from(LABELS), lb=st.sampled_from(LABELS))
def test_every_reading_against_its_definition(c, rel, la, lb):
    con, cat, nodes = c
    by_key = {n[0]: n for n in nodes}
    want: set[tuple[str, str]] = set()
    for k in {n[1] for n in nodes}:
        readings = sorted({n[2] for n in nodes if n[1] == k})
        found: dict[int, list[tuple]] = {}
        for r in readings:
            mine = [n for n in nodes if n[1] == k and n[2] == r]
            found[r] = [(x, y) for x in mine for y in mine if x[3] == la and y[3] == lb and holds(rel, x, y, by_key)]
        signatures = [{((x[3], x[4], x[5]), (y[3], y[4], y[5])) for x, y in found[r]} for r in readings]
        common = set.intersection(*signatures)
        want |= {(x[0], y[0]) for r in readings for x, y in found[r]
                 if ((x[3], x[4], x[5]), (y[3], y[4], y[5])) in common}
    hits = run_query(con, cat, f'find x = phrase(label = "{la}"), y = phrase(label = "{lb}") '
                               f"where x {rel} y in every reading show x.label")
    key_of = _keys(con, nodes)
    got = {(key_of[r["x.node"]], key_of[r["y.node"]]) for r in hits.rows()}
    assert got == want


def _keys(con, nodes) -> dict[int, str]:
    """Stored node id -> the key the test gave it (the builder numbers nodes in the order given)."""
    rows = con.execute('SELECT id, "start", "end", reading, label FROM phrase ORDER BY id').fetchall()
    order = sorted(nodes, key=lambda n: int(n[0].rsplit(".", 1)[1]))
    assert [(s, e, r, l) for _, s, e, r, l in rows] == [(n[4], n[5], n[2], n[3]) for n in order]
    return {row[0]: n[0] for row, n in zip(rows, order)}


# ---- the demo's ambiguous sentences ---------------------------------------------------------

@pytest.fixture(scope="module")
def demo_corpus(tmp_path_factory):
    return build(tmp_path_factory.mktemp("every") / "calls", Console(file=io.StringIO()))


def test_a_pp_under_a_vp_in_every_reading_of_the_demo(demo_corpus):
    sentences = {s.sent_id: s for s in read_sentences(DATA / "calls.conllu")[0]}
    want = 0
    ambiguous = 0
    for sid, trees in read_trees(DATA / "calls.trees").items():
        per_reading = []
        for tree in trees:
            leaves = word_leaves(tree)
            assert [tree[p] for p in leaves] == sentences[sid].tokens

            def span(pos):
                covered = [k for k, leaf in enumerate(leaves) if leaf[:len(pos)] == pos]
                return (covered[0], covered[-1]) if covered else None
            pairs = Counter()
            for pos in tree.treepositions():
                node = tree[pos]
                if not hasattr(node, "label") or not pos or span(pos) is None:
                    continue
                parent = tree[pos[:-1]]
                if category(node.label()) == "PP" and category(parent.label()) == "VP":
                    pairs[((node.label(), span(pos)), (parent.label(), span(pos[:-1])))] += 1
            per_reading.append(pairs)
        common = set.intersection(*(set(p) for p in per_reading))
        ambiguous += len(trees) > 1 and any(set(p) - common for p in per_reading)
        want += sum(n for p in per_reading for sig, n in p.items() if sig in common)
    assert ambiguous > 0, "some ambiguous sentence attaches a PP to a VP in one reading only"
    [row] = demo_corpus.query('find pp = tree(category = "PP"), vp = tree(category = "VP") '
                              "where pp child of vp in every reading count").rows()
    assert row["count"] == want
    [everywhere] = demo_corpus.query('find pp = tree(category = "PP"), vp = tree(category = "VP") '
                                     "where pp child of vp count").rows()
    assert everywhere["count"] > want
