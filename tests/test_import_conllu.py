"""CoNLL-U import checked against the treebank's published figures and the `conllu` library."""
from __future__ import annotations

import re

import conllu
import networkx as nx
import pytest

from tests.conftest import gum_file

# Published figures of UD English GUM (its stats.xml, as tabled in
# ../shared/data/ud-english-gum/README.md, commit afb41ee9 of the UD release repository).
PUBLISHED = {
    "dev": {"sentences": 1575, "tokens": 27602, "words": 28119, "multiword tokens": 517, "empty nodes": 12},
    "test": {"sentences": 1464, "tokens": 27986, "words": 28397, "multiword tokens": 411, "empty nodes": 15},
}


@pytest.mark.parametrize("split", ["dev", "test"])
def test_published_figures(gum_corpora, split):
    corpus, report, _ = gum_corpora[split]
    for key, value in PUBLISHED[split].items():
        assert report.counts[key] == value, key
    layers = corpus.store.layers()
    assert layers["sentence"].rows == PUBLISHED[split]["sentences"]
    assert layers["token"].rows == PUBLISHED[split]["tokens"]          # surface tokens
    assert layers["word"].rows == PUBLISHED[split]["words"]        # syntactic words
    assert corpus.info()["documents"] == 30                          # README: 30 documents per split
    assert report.warnings == []                                     # every "# text" agrees with the words


def _stored(corpus, sql):
    con = corpus.connect()
    try:
        return con.execute(sql).fetchall()
    finally:
        con.close()


@pytest.mark.parametrize("split", ["dev", "test"])
def test_every_sentence_matches_the_reference_library(gum_corpora, split):
    """Forms, lemmas, tags, heads, relations and features against `conllu` (PyPI), sentence by sentence."""
    corpus, _, path = gum_corpora[split]
    feat_cols = [a for a in corpus.store.layers()["word"].attrs if a.startswith("feats.")]
    cols = ", ".join(f'"{c}"' for c in feat_cols)
    rows = _stored(corpus, f"SELECT s.sent_id, t.cid, t.form, t.lemma, t.upos, t.xpos, t.head_num, t.deprel, {cols} "
                           "FROM word t JOIN sentence s ON t.sent = s.id ORDER BY t.id")
    by_sent: dict[str, list] = {}
    for r in rows:
        by_sent.setdefault(r[0], []).append(r)
    n = 0
    with open(path, encoding="utf-8") as f:
        for sentence in conllu.parse_incr(f):
            mine = by_sent.pop(sentence.metadata["sent_id"])
            tokens = [t for t in sentence if isinstance(t["id"], int)]
            assert len(mine) == len(tokens)
            for row, tok in zip(mine, tokens):
                _, cid, form, lemma, upos, xpos, head, deprel, *feats = row
                assert (int(cid), form, lemma) == (tok["id"], tok["form"], tok["lemma"])
                assert upos == tok["upos"] and xpos == tok["xpos"]
                assert head == tok["head"] and deprel == tok["deprel"]
                expected = dict(tok["feats"] or {})
                got = {c[len("feats."):]: v for c, v in zip(feat_cols, feats) if v is not None}
                assert got == expected
                n += 1
    assert by_sent == {}
    assert n == PUBLISHED[split]["words"]


@pytest.mark.parametrize("split", ["dev"])
def test_offsets_point_at_the_forms(gum_corpora, split):
    """Every surface token, and every syntactic word outside a multiword token, sits on its own characters."""
    corpus, _, _ = gum_corpora[split]
    bad = _stored(corpus, """
        SELECT w.form, substr(d.text, CAST(w.start - d.base + 1 AS INTEGER), CAST(w."end" - w.start AS INTEGER))
        FROM token w JOIN documents d USING (doc)
        WHERE substr(d.text, CAST(w.start - d.base + 1 AS INTEGER), CAST(w."end" - w.start AS INTEGER)) <> w.form""")
    assert bad == []
    # syntactic words of a multiword token stay inside it and tile it
    tiles = _stored(corpus, """
        SELECT w.id, min(t.start) = w.start, max(t."end") = w."end", sum(t."end" - t.start) = w."end" - w.start
        FROM token w JOIN word t ON t.start >= w.start AND t."end" <= w."end" AND t.doc = w.doc
        WHERE w.mwt GROUP BY w.id, w.start, w."end"
        """)
    assert len(tiles) == PUBLISHED[split]["multiword tokens"]
    assert all(a and b and c for _, a, b, c in tiles)


def test_dependency_tree_numbers_match_graph_ancestry(gum_corpora):
    """`under` by pre/post intervals equals ancestry in the head graph, computed with networkx."""
    corpus, _, _ = gum_corpora["dev"]
    rows = _stored(corpus, "SELECT id, parent, pre, post, depth, sent FROM word WHERE sent IN "
                           "(SELECT id FROM sentence ORDER BY id LIMIT 60)")
    g = nx.DiGraph()
    info = {}
    for id_, parent, pre, post, depth, sent in rows:
        info[id_] = (pre, post, depth, sent)
        g.add_node(id_)
        if parent is not None:
            g.add_edge(parent, id_)
    for a in info:
        ancestors = nx.ancestors(g, a)
        assert info[a][2] == len(ancestors)                       # depth = number of ancestors
        for b in info:
            if info[b][3] != info[a][3]:
                continue
            under = info[b][0] < info[a][0] and info[a][1] < info[b][1]
            assert under == (b in ancestors)


def _reference_mentions(path):
    """An independent reader of the MISC Entity brackets (UD coreference notation).

    Written for this test from the notation's description in the treebank's README and the
    UD guidelines; shares no code with the importer. Returns (doc, sent_id, first, last, eid)
    with token positions counted within the sentence.
    """
    out = []
    doc = None
    with open(path, encoding="utf-8") as f:
        for sentence in conllu.parse_incr(f):
            doc = sentence.metadata.get("newdoc id", doc)
            opened: dict[str, list[int]] = {}
            tokens = [t for t in sentence if isinstance(t["id"], int)]
            for pos, tok in enumerate(tokens):
                value = (tok["misc"] or {}).get("Entity")
                if not value:
                    continue
                i = 0
                while i < len(value):
                    if value[i] == "(":
                        j = i + 1
                        while j < len(value) and value[j] not in "()":
                            j += 1
                        eid = value[i + 1:j].split("-")[0]
                        if j < len(value) and value[j] == ")":
                            out.append((doc, sentence.metadata["sent_id"], pos, pos, eid))
                            i = j + 1
                        else:
                            opened.setdefault(eid, []).append(pos)
                            i = j
                    else:
                        j = value.index(")", i)
                        eid = value[i:j]
                        out.append((doc, sentence.metadata["sent_id"], opened[eid].pop(), pos, eid))
                        i = j + 1
    return out


@pytest.mark.parametrize("split", ["dev", "test"])
def test_mentions_and_chains_match_an_independent_reader(gum_corpora, split):
    corpus, report, path = gum_corpora[split]
    expected = _reference_mentions(path)
    rows = _stored(corpus, """
        SELECT d.name, s.sent_id, m.word_first - s.word_first, m.word_last - s.word_first, m.entity, m.chain,
               m.chain_pos, m.first_mention, m.start, m."end"
        FROM mention m JOIN sentence s ON m.sent = s.id JOIN documents d ON d.doc = m.doc""")
    assert sorted(r[:5] for r in rows) == sorted(expected)
    # chains: one per (document, entity id); positions follow text order
    chains: dict[tuple, set] = {}
    for name, _, _, _, eid, chain, *_ in rows:
        chains.setdefault((name, eid), set()).add(chain)
    assert all(len(c) == 1 for c in chains.values())
    assert len({next(iter(c)) for c in chains.values()}) == len(chains) == report.counts["chains"]
    by_chain: dict[int, list] = {}
    for r in rows:
        by_chain.setdefault(r[5], []).append(r)
    for ms in by_chain.values():
        ms.sort(key=lambda r: r[6])
        assert [r[6] for r in ms] == list(range(len(ms)))
        assert [r[7] for r in ms] == [True] + [False] * (len(ms) - 1)
        starts = [r[8] for r in ms]
        assert starts == sorted(starts)


def test_entity_fields_are_named_by_the_global_entity_comment(gum_corpora):
    corpus, _, _ = gum_corpora["dev"]
    attrs = corpus.store.layers()["mention"].attrs
    # "# global.Entity = GRP-etype-infstat-salience-centering-minspan-link-identity" in every GUM document
    for name in ("entity", "type", "infstat", "salience", "centering", "minspan", "link", "identity"):
        assert name in attrs
    types = {r[0] for r in _stored(corpus, "SELECT DISTINCT type FROM mention")}
    assert {"person", "place", "abstract", "object"} <= types   # GUM's entity types (its documentation)


@pytest.mark.parametrize("split", ["dev", "test"])
def test_round_trip_is_byte_for_byte(gum_corpora, split, tmp_path):
    corpus, _, path = gum_corpora[split]
    out = tmp_path / "out.conllu"
    corpus.export("conllu", out)
    assert out.read_bytes() == path.read_bytes()


def test_document_and_sentence_attributes(gum_corpora):
    corpus, _, _ = gum_corpora["dev"]
    genres = {r[0] for r in _stored(corpus, "SELECT DISTINCT genre FROM doc")}
    assert "academic" in genres                      # "# meta::genre = academic" of the first document
    speakers = _stored(corpus, "SELECT count(*) FROM sentence WHERE speaker IS NOT NULL")[0][0]
    with open(gum_file("dev"), encoding="utf-8") as f:
        expected = sum(1 for line in f if line.startswith("# speaker = "))
    assert speakers == expected > 0


def test_empty_nodes_and_enhanced_graph_kept(gum_corpora):
    corpus, _, path = gum_corpora["dev"]
    empties = _stored(corpus, "SELECT count(*) FROM empty")[0][0]
    assert empties == PUBLISHED["dev"]["empty nodes"]
    expected = 0
    with open(path, encoding="utf-8") as f:
        for line in f:
            cols = line.rstrip("\n").split("\t")
            if len(cols) == 10 and re.fullmatch(r"\d+(\.\d+)?", cols[0]) and cols[8] != "_":
                expected += len(cols[8].split("|"))
    assert _stored(corpus, "SELECT count(*) FROM enhanced")[0][0] == expected


@pytest.mark.parametrize("split", ["dev", "test"])
def test_layer_names_follow_the_standard(gum_corpora, split):
    """CoNLL-U: a word has an integer ID (and UPOS); a token is a surface token, a multiword
    range such as 1-2 once instead of its words. Counted here with the `conllu` library."""
    corpus, _, path = gum_corpora[split]
    verbs = surface = 0
    with open(path, encoding="utf-8") as f:
        for sentence in conllu.parse_incr(f):
            covered: set[int] = set()
            for t in sentence:
                if isinstance(t["id"], tuple) and t["id"][1] == "-":      # a multiword token a-b
                    surface += 1
                    covered.update(range(t["id"][0], t["id"][2] + 1))
            for t in sentence:
                if isinstance(t["id"], int):
                    verbs += t["upos"] == "VERB"
                    surface += t["id"] not in covered
    assert corpus.query('find x = word(upos = "VERB") count').rows() == [{"count": verbs}]
    assert corpus.query("find x = token count").rows() == [{"count": surface}]
    assert surface == PUBLISHED[split]["tokens"] and verbs > 1000


@pytest.mark.parametrize("split", ["dev", "test"])
def test_id_and_head_are_the_conllu_columns(gum_corpora, split):
    """`id` is the CoNLL-U ID (a number on words, so `id <= 2` compares numbers; `1-2` on a
    multiword token) and `head` the HEAD column; counted here with the `conllu` library."""
    corpus, _, path = gum_corpora[split]
    first_two = roots = ranges = 0
    heads: dict[tuple[str, int], int] = {}
    with open(path, encoding="utf-8") as f:
        for sentence in conllu.parse_incr(f):
            for t in sentence:
                if isinstance(t["id"], int):
                    first_two += t["id"] <= 2
                    roots += t["head"] == 0
                    heads[sentence.metadata["sent_id"], t["id"]] = t["head"]
                elif t["id"][1] == "-":
                    ranges += 1
    count = lambda q: corpus.query(q).rows()[0]["count"]
    assert count("find w = word(id <= 2) count") == first_two     # as text, "10" <= "2" would hold
    assert count("find w = word(head = 0) count") == roots
    assert count('find t = token(id ~ "^[0-9]+-[0-9]+$") count') == ranges == PUBLISHED[split]["multiword tokens"]
    listed = corpus.query('find w = word(upos = "ADJ") show w.id, w.head', limit=300).rows()
    assert len(listed) == 300
    assert all(heads[r["w.sentence"], r["w.id"]] == r["w.head"] and r["w.conllu_id"] == str(r["w.id"])
               for r in listed)


def test_id_of_a_layer_without_conllu_ids_names_the_node_number(gum_corpora):
    from engine import StrataError
    corpus, _, _ = gum_corpora["dev"]
    with pytest.raises(StrataError) as info:
        corpus.query("find m = mention(id = 3) count")
    assert "no CoNLL-U ID" in str(info.value) and "m.node" in str(info.value)
    assert len(corpus.query("find m = mention(node >= 0)")) == corpus.store.layers()["mention"].rows
