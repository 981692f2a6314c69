"""Small corpora built straight into DuckDB tables with the schema of DEVELOPERS.md.

Used by the query-language tests until (and besides) the real store: nodes are given with
local character offsets and plain attributes; the builder derives what the importer would
(global anchors, ids, ordinals, sentence of each node, tree columns, coreference chains).
The texts are invented (calls to a fictional island ferry line's booking desk).
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import duckdb
import pyarrow as pa

from querylang.catalog import AttrInfo, LayerInfo, StaticCatalog


@dataclass
class Node:
    key: str
    layer: str
    doc: int
    start: int            # local offsets
    end: int
    attrs: dict[str, Any]
    time: tuple[float, float] | None = None
    parent: str | None = None
    entity: str | None = None


@dataclass
class LayerSpec:
    name: str
    kind: str
    tree: bool = False
    readings: bool = False
    word_layer: str | None = None
    token_layer: str | None = None
    edge_sets: tuple[str, ...] = ()
    time: bool | None = None          # None: true when some node has a time span
    types: dict[str, str] = field(default_factory=dict)   # declared attributes (present even if unused)
    sentence_layer: str | None = None  # what ``sent`` names (LayerInfo.sentence_layer)
    separate: bool = False             # LayerInfo.separate: the caller keeps it true
    count_missing: bool = True         # LayerInfo.sent_missing counted (else None: unknown)


ARROW_TYPES = {"str": pa.string(), "int": pa.int64(), "float": pa.float64(), "bool": pa.bool_()}


class CorpusBuilder:
    def __init__(self) -> None:
        self.stale: set[str] = set()   # nodes stored without their sentence (``sent`` NULL though inside one)
        self.docs: list[tuple[str, str, dict[str, str]]] = []
        self.layers: dict[str, LayerSpec] = {}
        self.nodes: list[Node] = []
        self.edges: dict[str, list[tuple[str, str, str]]] = {}

    def doc(self, name: str, text: str, **attrs: str) -> int:
        self.docs.append((name, text, attrs))
        return len(self.docs) - 1

    def layer(self, name: str, kind: str, **props: Any) -> None:
        self.layers[name] = LayerSpec(name, kind, **props)

    def node(self, layer: str, doc: int, start: int, end: int, key: str | None = None, *,
             time: tuple[float, float] | None = None, parent: str | None = None,
             entity: str | None = None, **attrs: Any) -> str:
        key = key or f"{layer}:{len(self.nodes)}"
        self.nodes.append(Node(key, layer, doc, start, end, attrs, time, parent, entity))
        return key

    def edge(self, edge_set: str, src: str, dst: str, label: str) -> None:
        self.edges.setdefault(edge_set, []).append((src, dst, label))

    # ---- derivation ----------------------------------------------------------------------
    def build(self, con: duckdb.DuckDBPyConnection | None = None) -> tuple[duckdb.DuckDBPyConnection, StaticCatalog]:
        con = con or duckdb.connect()
        bases, base = [], 0
        for _, text, _ in self.docs:
            bases.append(base)
            base += len(text) + 1
        ids = {n.key: i + 1 for i, n in enumerate(self.nodes)}
        by_layer: dict[str, list[Node]] = {name: [] for name in self.layers}
        for n in self.nodes:
            by_layer[n.layer].append(n)
        for name in by_layer:
            by_layer[name].sort(key=lambda n: (n.doc, n.start, n.end, ids[n.key]))

        def g(n: Node) -> tuple[int, int]:
            return bases[n.doc] + n.start, bases[n.doc] + n.end

        ords: dict[str, dict[str, int]] = {}
        for name, spec in self.layers.items():
            if spec.kind == "sequence":
                ords[name] = {n.key: i for i, n in enumerate(by_layer[name])}

        def covered(n: Node, layer: str | None) -> tuple[int | None, int | None]:
            if layer is None or layer not in ords:
                return None, None
            if n.layer == layer:
                o = ords[layer][n.key]
                return o, o
            s, e = g(n)
            inside = [ords[layer][t.key] for t in by_layer[layer]
                      if t.doc == n.doc and s <= g(t)[0] and g(t)[1] <= e and g(t)[0] < g(t)[1]]
            return (min(inside), max(inside)) if inside else (None, None)

        sentences = by_layer.get("sentence", [])

        def sentence_of(n: Node) -> int | None:
            s, e = g(n)
            for sn in sentences:
                ss, se = g(sn)
                if ss <= s and e <= se:
                    return ids[sn.key]
            return None

        layer_infos: dict[str, LayerInfo] = {}
        for name, spec in self.layers.items():
            rows = by_layer[name]
            cols: dict[str, list[Any]] = {c: [] for c in (
                "id", "doc", "start", "end", "t_start", "t_end", "sent", "word_first", "word_last",
                "tok_first", "tok_last")}
            if spec.kind == "sequence":
                cols["ord"] = []
            tree = self._tree_columns(rows) if spec.tree else {}
            if spec.tree:
                for c in ("parent", "depth", "pre", "post"):
                    cols[c] = []
            if spec.readings:
                cols["reading"] = []
            coref = name == "mention" or any(n.entity for n in rows)
            chains = self._chains(rows)
            attr_names: list[str] = [a for a in spec.types if a not in ("chain", "chain_pos", "first_mention")]
            for n in rows:
                for a in n.attrs:
                    if a not in attr_names and a != "reading":
                        attr_names.append(a)
            if coref:
                attr_names += ["chain", "chain_pos", "first_mention"]
            for a in attr_names:
                cols[a] = []
            for n in rows:
                s, e = g(n)
                tf, tl = covered(n, spec.word_layer)
                wf, wl = covered(n, spec.token_layer)
                cols["id"].append(ids[n.key]); cols["doc"].append(n.doc)
                cols["start"].append(s); cols["end"].append(e)
                # stored as the store does: whole microseconds (given here in seconds)
                cols["t_start"].append(round(n.time[0] * 1_000_000) if n.time else None)
                cols["t_end"].append(round(n.time[1] * 1_000_000) if n.time else None)
                cols["sent"].append(None if n.key in self.stale else sentence_of(n) if name != "sentence"
                                    else ids[n.key])
                cols["word_first"].append(tf); cols["word_last"].append(tl)
                cols["tok_first"].append(wf); cols["tok_last"].append(wl)
                if spec.kind == "sequence":
                    cols["ord"].append(ords[name][n.key])
                if spec.tree:
                    parent, depth, pre, post = tree[n.key]
                    cols["parent"].append(ids[parent] if parent else None)
                    cols["depth"].append(depth); cols["pre"].append(pre); cols["post"].append(post)
                if spec.readings:
                    cols["reading"].append(int(n.attrs.get("reading", 0)))
                for a in attr_names:
                    if a in ("chain", "chain_pos", "first_mention"):
                        chain, pos = chains.get(n.key, (None, None))
                        cols[a].append({"chain": chain, "chain_pos": pos,
                                        "first_mention": None if pos is None else pos == 0}[a])
                    else:
                        cols[a].append(n.attrs.get(a))
            types = {"chain": "int", "chain_pos": "int", "first_mention": "bool", **spec.types}
            schema = {c: pa.int64() for c in cols}
            for a in attr_names:
                schema[a] = ARROW_TYPES[types.get(a, "str")]
            table = pa.table({c: pa.array(v, type=schema[c]) for c, v in cols.items()})
            con.register("_tmp", table)
            con.execute(f'CREATE TABLE "{name}" AS SELECT * FROM _tmp')
            con.unregister("_tmp")
            attrs = {}
            for a in attr_names:
                values = [v for v in cols[a] if v is not None]
                attrs[a] = AttrInfo(a, types.get(a, "str"), len(set(values)), len(cols[a]) - len(values))
            layer_infos[name] = LayerInfo(
                name, spec.kind, attrs, len(rows), tree=spec.tree,
                time=spec.time if spec.time is not None else any(n.time for n in rows), readings=spec.readings,
                word_layer=spec.word_layer, token_layer=spec.token_layer, edge_sets=spec.edge_sets,
                sentence_layer=spec.sentence_layer, separate=spec.separate,
                sent_missing=cols["sent"].count(None) if spec.count_missing else None)
        for set_name, edges in self.edges.items():
            table = pa.table({
                "src": pa.array([ids[s] for s, _, _ in edges], pa.int64()),
                "dst": pa.array([ids[d] for _, d, _ in edges], pa.int64()),
                "label": pa.array([l for _, _, l in edges], pa.string()),
                "doc": pa.array([next(n.doc for n in self.nodes if n.key == s) for s, _, _ in edges], pa.int32()),
            })
            con.register("_tmp", table)
            con.execute(f'CREATE TABLE "{set_name}" AS SELECT * FROM _tmp')
            con.unregister("_tmp")
            layer_infos[set_name] = LayerInfo(set_name, "edges", {"label": AttrInfo("label")}, len(edges))
        docs = pa.table({
            "doc": pa.array(list(range(len(self.docs))), pa.int32()),
            "name": [d[0] for d in self.docs],
            "base": pa.array(bases, pa.int64()),
            "length": pa.array([len(d[1]) for d in self.docs], pa.int64()),
            "text": [d[1] for d in self.docs],
            "duration": pa.array([None] * len(self.docs), pa.float64()),
        })
        con.register("_tmp", docs)
        con.execute("CREATE TABLE documents AS SELECT * FROM _tmp")
        con.unregister("_tmp")
        doc_keys = sorted({k for _, _, a in self.docs for k in a})
        doc_cols = {"doc": pa.array(list(range(len(self.docs))), pa.int32())}
        for k in doc_keys:
            doc_cols[k] = pa.array([a.get(k) for _, _, a in self.docs], pa.string())
        con.register("_tmp", pa.table(doc_cols))
        con.execute("CREATE TABLE doc AS SELECT * FROM _tmp")
        con.unregister("_tmp")
        sentence_attrs = layer_infos["sentence"].attrs if "sentence" in layer_infos else {}
        catalog = StaticCatalog(layer_infos, dict(sentence_attrs), {k: AttrInfo(k) for k in doc_keys})
        return con, catalog

    def _tree_columns(self, rows: list[Node]) -> dict[str, tuple[str | None, int, int, int]]:
        children: dict[str | None, list[Node]] = {}
        for n in rows:
            children.setdefault(n.parent, []).append(n)
        out: dict[str, tuple[str | None, int, int, int]] = {}
        counter = {"pre": 0, "post": 0}

        def visit(n: Node, depth: int) -> None:
            pre = counter["pre"]; counter["pre"] += 1
            for c in children.get(n.key, []):
                visit(c, depth + 1)
            out[n.key] = (n.parent, depth, pre, counter["post"]); counter["post"] += 1

        for root in children.get(None, []):
            visit(root, 0)
        return out

    def _chains(self, rows: list[Node]) -> dict[str, tuple[int, int]]:
        chains: dict[str, list[Node]] = {}
        for n in rows:
            if n.entity:
                chains.setdefault(n.entity, []).append(n)
        out = {}
        for number, (_, members) in enumerate(sorted(chains.items(), key=lambda kv: (kv[1][0].doc, kv[1][0].start))):
            for pos, n in enumerate(members):
                out[n.key] = (number, pos)
        return out


def add_sentence(b: CorpusBuilder, doc: int, text: str, offset: int, rows: list[tuple], *,
                 sent_id: str, speaker: str, t0: float = 0.0, step: float = 0.3) -> list[str]:
    """Add one sentence: tokens split on spaces, each with (lemma, upos, deprel, head index).

    ``rows[i] = (lemma, upos, deprel, head)`` with head 0 for the root, 1-based otherwise.
    Words get time stamps ``step`` seconds apart starting at ``t0``.
    """
    forms = text.split(" ")
    assert len(forms) == len(rows), (forms, rows)
    b.node("sentence", doc, offset, offset + len(text), sent_id=sent_id, speaker=speaker,
           time=(t0, t0 + step * len(forms)))
    keys, pos = [], offset
    for i, form in enumerate(forms):
        start, end = pos, pos + len(form)
        t = (t0 + step * i, t0 + step * i + step * 0.8)
        b.node("token", doc, start, end, f"w{doc}.{start}", time=t, form=form)
        keys.append(f"t{doc}.{start}")
        pos = end + 1
    pos = offset
    for i, (form, (lemma, upos, deprel, head)) in enumerate(zip(forms, rows)):
        start, end = pos, pos + len(form)
        parent = keys[head - 1] if head else None
        b.node("word", doc, start, end, keys[i], time=(t0 + step * i, t0 + step * i + step * 0.8),
               parent=parent, form=form, lemma=lemma, upos=upos, deprel=deprel,
               **({"feats.Number": "Plur"} if form.endswith("s") and upos == "NOUN" else {}))
        if parent:
            b.edge("dep", keys[i], parent, deprel)
        pos = end + 1
    return keys


def ferry_corpus() -> tuple[duckdb.DuckDBPyConnection, StaticCatalog]:
    """Two invented calls to the booking desk of a fictional island ferry line."""
    b = CorpusBuilder()
    b.layer("token", "sequence", token_layer="token", word_layer="word")
    b.layer("word", "sequence", tree=True, word_layer="word", token_layer="token", edge_sets=("dep",))
    b.layer("sentence", "span", word_layer="word", token_layer="token")
    b.layer("mention", "span", word_layer="word", token_layer="token")
    b.layer("phrase", "tree", tree=True, readings=True, word_layer="word", token_layer="token")
    s1 = "um when does the first ferry leave"
    s2 = "the first ferry leaves at seven"
    s3 = "can I book two seats on it"
    text0 = f"{s1} {s2} {s3}"
    d0 = b.doc("call-01", text0, genre="booking")
    add_sentence(b, d0, s1, 0, [("um", "INTJ", "discourse", 7), ("when", "ADV", "advmod", 7),
                                ("do", "AUX", "aux", 7), ("the", "DET", "det", 6),
                                ("first", "ADJ", "amod", 6), ("ferry", "NOUN", "nsubj", 7),
                                ("leave", "VERB", "root", 0)], sent_id="call-01-1", speaker="caller")
    o2 = len(s1) + 1
    add_sentence(b, d0, s2, o2, [("the", "DET", "det", 3), ("first", "ADJ", "amod", 3),
                                 ("ferry", "NOUN", "nsubj", 4), ("leave", "VERB", "root", 0),
                                 ("at", "ADP", "case", 6), ("seven", "NUM", "obl", 4)],
                 sent_id="call-01-2", speaker="agent", t0=3.0)
    o3 = o2 + len(s2) + 1
    add_sentence(b, d0, s3, o3, [("can", "AUX", "aux", 3), ("I", "PRON", "nsubj", 3),
                                 ("book", "VERB", "root", 0), ("two", "NUM", "nummod", 5),
                                 ("seat", "NOUN", "obj", 3), ("on", "ADP", "case", 7),
                                 ("it", "PRON", "obl", 3)], sent_id="call-01-3", speaker="caller", t0=6.0)
    # mentions: "the first ferry" (twice) and "it" form one chain; "I" alone
    b.node("mention", d0, 13, 28, "m1", entity="ferry", type="vehicle")
    b.node("mention", d0, o2, o2 + 15, "m2", entity="ferry", type="vehicle")
    b.node("mention", d0, o3 + 4, o3 + 5, "m3", entity="caller", type="person")
    b.node("mention", d0, o3 + 24, o3 + 26, "m4", entity="ferry", type="vehicle")
    # phrases of sentence 1 in two readings
    for reading in (0, 1):
        root = b.node("phrase", d0, 0, len(s1), f"p{reading}.s", label="S", reading=reading)
        if reading == 0:
            b.node("phrase", d0, 13, 28, "p0.np", parent=root, label="NP", reading=0)
            b.node("phrase", d0, 13, 34, "p0.vp", parent=root, label="VP", reading=0)
        else:
            vp = b.node("phrase", d0, 13, 34, "p1.vp", parent=root, label="VP", reading=1)
            b.node("phrase", d0, 13, 28, "p1.np", parent=vp, label="NP", reading=1)
    s4 = "yes the ferry has seats"
    d1 = b.doc("call-02", s4, genre="timetable")
    add_sentence(b, d1, s4, 0, [("yes", "INTJ", "discourse", 4), ("the", "DET", "det", 3),
                                ("ferry", "NOUN", "nsubj", 4), ("have", "VERB", "root", 0),
                                ("seat", "NOUN", "obj", 4)], sent_id="call-02-1", speaker="agent")
    b.node("phrase", d1, 4, 13, "q.np", label="NP", reading=0)
    return b.build()
