"""The compiled SQL against an independent evaluator on random small corpora.

The evaluator below reads the stored nodes back from DuckDB and decides every relation in
plain Python straight from the definitions (character sets for overlap, parent chains for
ancestry, token counting for distance, Allen's end-point tests for time), sharing no code
with the compiler.  Hypothesis draws the corpora: token-aligned spans, zero-width points,
random forests, duplicate dependency edges, coreference chains and integer time stamps.
"""
from __future__ import annotations

from dataclasses import dataclass

from hypothesis import HealthCheck, given, settings, strategies as st

from engine.execute import run_query
from tests.querylang_corpus import CorpusBuilder

SETTINGS = settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow])
FORMS = ["a", "bb", "c"]


@dataclass
class Drawn:
    con: object
    catalog: object
    nodes: dict[str, list[dict]]
    edges: list[dict]


@st.composite
def corpora(draw) -> Drawn:
    b = CorpusBuilder()
    # ``sent`` names the sentence a node lies inside (the compiler may then join on it, see
    # querylang/keys.py); the tree layer does not say so, and chunks are not counted
    keyed = {"sentence_layer": "sentence"}
    b.layer("token", "sequence", word_layer="token", token_layer="token", edge_sets=("dep",), time=True, **keyed)
    b.layer("sentence", "span", word_layer="token", token_layer="token", separate=True, **keyed)
    b.layer("chunk", "span", word_layer="token", token_layer="token", time=True, types={"kind": "str", "tag": "str"},
            count_missing=False, **keyed)
    b.layer("tree", "tree", tree=True, word_layer="token", token_layer="token")
    b.layer("mention", "span", word_layer="token", token_layer="token", **keyed)
    for d in range(draw(st.integers(1, 2))):
        forms = draw(st.lists(st.sampled_from(FORMS), min_size=1, max_size=6))
        text = " ".join(forms)
        doc = b.doc(f"d{d}", text)
        bounds, pos = [], 0
        tokens = []
        for i, form in enumerate(forms):
            bounds.append((pos, pos + len(form)))
            t0 = draw(st.integers(0, 8))
            tokens.append(b.node("token", doc, pos, pos + len(form), f"w{d}.{i}",
                                time=(t0, t0 + draw(st.integers(1, 3))), form=form))
            pos += len(form) + 1
        # sentences: consecutive runs of tokens, a space between two (they never touch)
        cuts = sorted(set(draw(st.lists(st.integers(1, len(forms) - 1), max_size=2)))) if len(forms) > 1 else []
        for k, (i, j) in enumerate(zip([0] + cuts, cuts + [len(forms)])):
            b.node("sentence", doc, bounds[i][0], bounds[j - 1][1], sent_id=f"d{d}-{k + 1}")

        def span():
            i = draw(st.integers(0, len(forms) - 1))
            if draw(st.booleans()) and draw(st.booleans()):          # a zero-width point after a token
                return bounds[i][1], bounds[i][1]
            j = draw(st.integers(i, len(forms) - 1))
            # sometimes take the following space too, so that spans can touch
            trailing = 1 if j < len(forms) - 1 and draw(st.booleans()) and draw(st.booleans()) else 0
            return bounds[i][0], bounds[j][1] + trailing

        for k in range(draw(st.integers(0, 4))):
            s, e = span()
            t0 = draw(st.integers(0, 8))
            extra = {"tag": draw(st.sampled_from(["p", "q"]))} if draw(st.booleans()) else {}
            b.node("chunk", doc, s, e, f"c{d}.{k}", time=(t0, t0 + draw(st.integers(1, 4))),
                   kind=draw(st.sampled_from(["x", "y", "xy"])), **extra)
        tree_keys: list[str] = []
        for k in range(draw(st.integers(0, 5))):
            s, e = span()
            parent = draw(st.sampled_from([None] + tree_keys)) if tree_keys else None
            tree_keys.append(b.node("tree", doc, s, e, f"t{d}.{k}", parent=parent, label="X"))
        for k in range(draw(st.integers(0, 6))):
            s, e = span()
            b.node("mention", doc, s, e, f"m{d}.{k}", entity=f"d{d}e{draw(st.integers(0, 1))}")
            if draw(st.integers(0, 4)) == 0:
                b.stale.add(f"m{d}.{k}")
        for _ in range(draw(st.integers(0, 5))):
            src, dst = draw(st.sampled_from(tokens)), draw(st.sampled_from(tokens))
            if src != dst:
                b.edge("dep", src, dst, draw(st.sampled_from(["nsubj", "obj"])))
    if "dep" not in b.edges:
        b.edges["dep"] = []
    con, catalog = b.build()
    nodes = {}
    for layer in ("token", "sentence", "chunk", "tree", "mention"):
        cur = con.execute(f'SELECT * FROM "{layer}"')
        names = [d[0] for d in cur.description]
        nodes[layer] = [dict(zip(names, row)) for row in cur.fetchall()]
    cur = con.execute('SELECT * FROM "dep"')
    names = [d[0] for d in cur.description]
    edges = [dict(zip(names, row)) for row in cur.fetchall()]
    return Drawn(con, catalog, nodes, edges)


# ---- the independent evaluator ----------------------------------------------------------

def chars(n: dict) -> set[int]:
    return set(range(n["start"], n["end"]))


def words_between(c: Drawn, a: dict, b: dict) -> int | None:
    """Words lying wholly between two nodes (0 if they touch or overlap); None if a node covers no token."""
    for n in (a, b):
        if not any(n["start"] <= w["start"] and w["end"] <= n["end"] for w in c.nodes["token"] if w["doc"] == n["doc"]):
            return None
    first, second = (a, b) if a["start"] <= b["start"] else (b, a)
    return sum(1 for w in c.nodes["token"] if w["doc"] == a["doc"] and first["end"] <= w["start"]
               and w["end"] <= second["start"])


def ancestors(n: dict, by_id: dict[int, dict]) -> list[int]:
    out, cur = [], n["parent"]
    while cur is not None:
        out.append(cur)
        cur = by_id[cur]["parent"]
    return out


def precedes(a: dict, b: dict) -> bool:
    same_point = a["start"] == a["end"] == b["start"] == b["end"]
    return a["doc"] == b["doc"] and a["end"] <= b["start"] and not same_point


def text_rel(c: Drawn, name: str, a: dict, b: dict) -> bool:
    if a["id"] == b["id"]:
        return False
    if name == "inside":
        return b["start"] <= a["start"] and a["end"] <= b["end"]
    if name == "contains":
        return a["start"] <= b["start"] and b["end"] <= a["end"]
    if name == "overlaps":
        return bool(chars(a) & chars(b))
    if name == "same span as":
        return (a["start"], a["end"]) == (b["start"], b["end"])
    if name == "precedes":
        return precedes(a, b)
    if name == "follows":
        return precedes(b, a)
    if name == "directly precedes":
        return precedes(a, b) and words_between(c, a, b) == 0
    if name == "directly follows":
        return precedes(b, a) and words_between(c, b, a) == 0
    raise AssertionError(name)


def allen(name: str, a: dict, b: dict, tol: float) -> bool:
    if a["doc"] != b["doc"]:
        return False
    eq = lambda x, y: abs(x - y) <= tol           # noqa: E731
    lt = lambda x, y: x < y - tol                  # noqa: E731
    le = lambda x, y: x <= y + tol                 # noqa: E731
    s1, e1, s2, e2 = a["t_start"], a["t_end"], b["t_start"], b["t_end"]
    return {
        "before": lt(e1, s2), "after": lt(e2, s1), "meets": eq(e1, s2) and a["id"] != b["id"], "met by": eq(e2, s1) and a["id"] != b["id"],
        "overlaps": lt(s1, s2) and lt(s2, e1) and lt(e1, e2),
        "overlapped by": lt(s2, s1) and lt(s1, e2) and lt(e2, e1),
        "starts": eq(s1, s2) and lt(e1, e2), "started by": eq(s1, s2) and lt(e2, e1),
        "during": lt(s2, s1) and lt(e1, e2), "contains": lt(s1, s2) and lt(e2, e1),
        "finishes": eq(e1, e2) and lt(s2, s1), "finished by": eq(e1, e2) and lt(s1, s2),
        "equals": eq(s1, s2) and eq(e1, e2) and a["id"] != b["id"],
        # our own: containment with edges that may coincide, and any shared stretch of time
        "inside": le(s2, s1) and le(e1, e2) and a["id"] != b["id"],
        "shares time with": lt(s1, e2) and lt(s2, e1) and a["id"] != b["id"],
    }[name]


def pairs(c: Drawn, query: str) -> set[tuple[int, int]]:
    hits = run_query(c.con, c.catalog, query, context=0)
    t = hits.to_arrow()
    return set(zip(t.column("a.node").to_pylist(), t.column("b.node").to_pylist()))


def expected(c: Drawn, la: str, lb: str, test) -> set[tuple[int, int]]:
    return {(a["id"], b["id"]) for a in c.nodes[la] for b in c.nodes[lb] if test(a, b)}


LAYERS = ["token", "chunk", "tree", "mention", "sentence"]
TEXT = ["inside", "contains", "overlaps", "same span as", "precedes", "follows",
        "directly precedes", "directly follows"]


LAYER_PAIRS = st.lists(st.tuples(st.sampled_from(LAYERS), st.sampled_from(LAYERS)), min_size=1, max_size=3,
                       unique=True)


@SETTINGS
@given(corpora(), LAYER_PAIRS)
def test_text_relations(c, layer_pairs):
    for la, lb in layer_pairs:
        for rel in TEXT:
            got = pairs(c, f"find a = {la}, b = {lb} where a {rel} b")
            assert got == expected(c, la, lb, lambda a, b: text_rel(c, rel, a, b)), (rel, la, lb)


@SETTINGS
@given(corpora(), st.sampled_from(TEXT), st.sampled_from(TEXT), st.sampled_from(LAYERS), st.sampled_from(LAYERS))
def test_or_between_relations(c, r1, r2, la, lb):
    got = pairs(c, f"find a = {la}, b = {lb} where a {r1} b or (b {r2} a and not a {r1} b)")
    want = expected(c, la, lb, lambda a, b: text_rel(c, r1, a, b) or text_rel(c, r2, b, a))
    assert got == want


BOUNDS = st.tuples(st.one_of(st.none(), st.integers(0, 3)), st.one_of(st.none(), st.integers(0, 4))).filter(
    lambda lh: lh != (None, None) and (None in lh or lh[0] <= lh[1]))


def bound_words(lo: int | None, hi: int | None, unit: str) -> str:
    if lo is not None and hi is not None:
        return f"by at least {lo} and at most {hi} {unit}"
    return f"by at least {lo} {unit}" if lo is not None else f"by at most {hi} {unit}"


def in_bounds(gap: int | None, lo: int | None, hi: int | None) -> bool:
    return gap is not None and (lo is None or gap >= lo) and (hi is None or gap <= hi)


@SETTINGS
@given(corpora(), st.sampled_from(["precedes", "follows"]), BOUNDS,
       st.sampled_from(["token", "chunk", "mention"]), st.sampled_from(["token", "chunk", "mention"]))
def test_distance_bounds_in_text(c, rel, bounds, la, lb):
    """``by at least/at most N tokens|chars``: the tokens (characters) strictly between the two."""
    lo, hi = bounds
    got = pairs(c, f"find a = {la}, b = {lb} where a {rel} b {bound_words(lo, hi, 'tokens')}")
    want = expected(c, la, lb, lambda a, b: text_rel(c, rel, a, b) and in_bounds(words_between(c, a, b), lo, hi))
    assert got == want
    got = pairs(c, f"find a = {la}, b = {lb} where a {rel} b {bound_words(lo, hi, 'chars')}")

    def chars_between(a, b):
        first, second = (a, b) if rel == "precedes" else (b, a)
        return second["start"] - first["end"]
    assert got == expected(c, la, lb, lambda a, b: text_rel(c, rel, a, b) and in_bounds(chars_between(a, b), lo, hi))


@SETTINGS
@given(corpora(), st.sampled_from(["before", "after"]), BOUNDS, st.sampled_from(["s", "ms"]),
       st.sampled_from(["token", "chunk"]), st.sampled_from(["token", "chunk"]))
def test_distance_bounds_in_time(c, rel, bounds, unit, la, lb):
    """``a before b by at least/at most T``: Allen's before, and the time from a's end to b's start."""
    lo, hi = bounds
    scale = 1000 if unit == "ms" else 1
    got = pairs(c, f"find a = {la}, b = {lb} where a {rel} b "
                   f"{bound_words(*(None if x is None else x * scale for x in bounds), unit)}".replace(f" {unit}", unit))

    def test(a, b):
        first, second = (a, b) if rel == "before" else (b, a)
        gap = second["t_start"] - first["t_end"]            # microseconds
        return (a["doc"] == b["doc"] and gap > 0
                and in_bounds(gap, None if lo is None else lo * 1_000_000, None if hi is None else hi * 1_000_000))
    assert got == expected(c, la, lb, test)


@SETTINGS
@given(corpora(), st.sampled_from(TEXT + ["shares time with"]), st.sampled_from(["token", "chunk", "mention"]),
       st.sampled_from(["token", "chunk", "mention"]))
def test_in_the_same_sentence(c, rel, la, lb):
    """``in the same sentence``: the relation, and one sentence holds both nodes (what ``sent``
    names, and the sentence layer's span holds them both)."""
    if rel == "shares time with" and "mention" in (la, lb):
        return
    got = pairs(c, f"find a = {la}, b = {lb} where a {rel} b in the same sentence")
    sentences = c.nodes["sentence"]

    def sentence_of(n):
        if n["sent"] is None:
            return None
        s = next(s for s in sentences if s["id"] == n["sent"])
        assert s["doc"] == n["doc"] and s["start"] <= n["start"] and n["end"] <= s["end"]
        return s["id"]

    def test(a, b):
        holds = allen(rel, a, b, 0) if rel == "shares time with" else text_rel(c, rel, a, b)
        return holds and sentence_of(a) is not None and sentence_of(a) == sentence_of(b)
    assert got == expected(c, la, lb, test)


@SETTINGS
@given(corpora(), st.integers(0, 6))
def test_distance_in_words_and_chars(c, n):
    hits = run_query(c.con, c.catalog, f"find a = chunk, b = mention where distance(a, b) >= {n} tokens "
                                       "allow cross product", context=0).to_arrow()
    got = set(zip(hits.column("a.node").to_pylist(), hits.column("b.node").to_pylist()))

    def test(a, b):
        d = words_between(c, a, b)
        return a["doc"] == b["doc"] and d is not None and d >= n
    assert got == expected(c, "chunk", "mention", test)
    hits = run_query(c.con, c.catalog, f"find a = chunk, b = mention where distance(a, b) <= {n} chars", context=0)
    t = hits.to_arrow()
    got = set(zip(t.column("a.node").to_pylist(), t.column("b.node").to_pylist()))

    def char_gap(a, b):
        first, second = (a, b) if a["start"] <= b["start"] else (b, a)
        return max(0, second["start"] - first["end"])
    assert got == expected(c, "chunk", "mention", lambda a, b: a["doc"] == b["doc"] and char_gap(a, b) <= n)


TREE = ["child of", "parent of", "under", "above", "sibling of"]


@SETTINGS
@given(corpora(), st.one_of(st.none(), st.tuples(st.integers(1, 3), st.integers(0, 2))))
def test_tree_relations(c, depth):
    for rel in TREE:
        check_tree_relation(c, rel, depth)


def check_tree_relation(c, rel, depth):
    by_id = {n["id"]: n for n in c.nodes["tree"]}
    mod = ""
    if depth is not None and rel in ("under", "above"):
        lo, extra = depth
        mod = f" at depth {lo}..{lo + extra}" if extra else f" at depth {lo}"
    else:
        depth = None

    def steps(low: dict, high: dict) -> int | None:
        chain = ancestors(low, by_id)
        return chain.index(high["id"]) + 1 if high["id"] in chain else None

    def test(a, b):
        if rel == "child of":
            return a["parent"] == b["id"]
        if rel == "parent of":
            return b["parent"] == a["id"]
        if rel == "sibling of":
            return a["parent"] is not None and a["parent"] == b["parent"] and a["id"] != b["id"]
        k = steps(a, b) if rel == "under" else steps(b, a)
        if k is None:
            return False
        return depth is None or depth[0] <= k <= depth[0] + depth[1]
    got = pairs(c, f"find a = tree, b = tree where a {rel} b{mod}")
    assert got == expected(c, "tree", "tree", test), (rel, mod)


@SETTINGS
@given(corpora(), st.sampled_from(["depends on", "governs"]), st.sampled_from([None, "nsubj", "obj"]))
def test_dependency_edges(c, rel, label):
    mod = f' as "{label}"' if label else ""
    edges = {(e["src"], e["dst"]) for e in c.edges if label is None or e["label"] == label}

    def test(a, b):
        return (a["id"], b["id"]) in edges if rel == "depends on" else (b["id"], a["id"]) in edges
    got = pairs(c, f"find a = token, b = token where a {rel} b{mod}")
    assert got == expected(c, "token", "token", test)
    # the same relation under "or" compiles to EXISTS instead of a join: same answer
    got_or = pairs(c, f"find a = token, b = token where a {rel} b{mod} or a {rel} b{mod}")
    assert got_or == got


@SETTINGS
@given(corpora())
def test_coreference(c):
    for rel in ("same entity as", "antecedent of", "previous mention of"):
        check_coreference(c, rel)


def check_coreference(c, rel):
    def test(a, b):
        if a["chain"] is None or a["chain"] != b["chain"]:
            return False
        if rel == "same entity as":
            return a["id"] != b["id"]
        if rel == "antecedent of":
            return a["chain_pos"] < b["chain_pos"]
        return a["chain_pos"] == b["chain_pos"] - 1
    assert pairs(c, f"find a = mention, b = mention where a {rel} b") == expected(c, "mention", "mention", test)


ALLEN = ["before", "after", "meets", "met by", "overlaps", "overlapped by", "starts", "started by",
         "during", "contains", "finishes", "finished by", "equals", "inside", "shares time with"]


@SETTINGS
@given(corpora(), st.sampled_from([0, 1]), st.sampled_from(["token", "chunk"]), st.sampled_from(["token", "chunk"]))
def test_allen_relations(c, tol, la, lb):
    mod = f" give or take {tol}s" if tol else ""
    for rel in ALLEN if not tol else ALLEN[:13]:          # a tolerance is for Allen's thirteen only
        got = pairs(c, f"find a = {la}, b = {lb} where a {rel} b in time{mod}")
        assert got == expected(c, la, lb, lambda a, b: allen(rel, a, b, tol * 1_000_000)), rel   # µs


@SETTINGS
@given(corpora(), st.sampled_from(["token", "chunk", "mention"]), st.sampled_from(["token", "chunk", "tree"]))
def test_negation(c, la, lb):
    for rel in TEXT:
        hits = run_query(c.con, c.catalog, f"find a = {la} without b = {lb} where b {rel} a", context=0).to_arrow()
        got = set(hits.column("a.node").to_pylist())
        want = {a["id"] for a in c.nodes[la] if not any(text_rel(c, rel, b, a) for b in c.nodes[lb])}
        assert got == want, rel


@SETTINGS
@given(corpora())
def test_hits_come_in_document_order_with_text(c):
    hits = run_query(c.con, c.catalog, "find a = chunk, b = token where b inside a", context=2).to_arrow()
    rows = hits.to_pylist()
    starts = [(min(r["a.char_start"], r["b.char_start"]), r["doc"]) for r in rows]
    docs = [r["doc"] for r in rows]
    assert docs == sorted(docs)
    texts = {(n["doc"], n["start"], n["end"]): n["form"] for n in c.nodes["token"]}
    base = {d: b for d, b in c.con.execute("SELECT name, base FROM documents").fetchall()}
    doc_no = {name: d for d, name in c.con.execute("SELECT doc, name FROM documents").fetchall()}
    for r in rows:
        key = (doc_no[r["doc"]], base[r["doc"]] + r["b.char_start"], base[r["doc"]] + r["b.char_end"])
        assert r["b.text"] == texts[key]
    assert len(starts) == len(rows)


# ---- attribute tests and boolean logic ------------------------------------------------------
# SQL's three-valued logic, written out: a test on a missing value is unknown (None); `not`
# treats unknown as false first, so `not tag = "p"` holds where tag is missing.

def and3(values):
    return False if False in values else None if None in values else True


def or3(values):
    return True if True in values else None if None in values else False


ATOMS = [
    ('kind = "x"', lambda n: n["kind"] == "x"),
    ('kind != "y"', lambda n: n["kind"] != "y"),
    ('kind matches "^x"', lambda n: n["kind"].startswith("x")),
    ('tag in ["p", "q"]', lambda n: None if n.get("tag") is None else n["tag"] in ("p", "q")),
    ('tag not in ["p"]', lambda n: None if n.get("tag") is None else n["tag"] not in ("p",)),
    ('tag = "p"', lambda n: None if n.get("tag") is None else n["tag"] == "p"),
    ("tag is missing", lambda n: n.get("tag") is None),
    ("tag is not missing", lambda n: n.get("tag") is not None),
    # stored times are whole microseconds (a bare number compared with a time is seconds)
    ("duration >= 2", lambda n: n["t_end"] - n["t_start"] >= 2_000_000),
    ("duration < 2500ms", lambda n: n["t_end"] - n["t_start"] < 2_500_000),
    ("char_start > 1", lambda n: n["local_start"] > 1),
    ('text = "a"', lambda n: n["text"] == "a"),
]


def conditions():
    atom = st.sampled_from(ATOMS)

    def extend(inner):
        return st.one_of(
            st.tuples(inner, inner).map(lambda ab: (f"({ab[0][0]} and {ab[1][0]})",
                                                    lambda n, ab=ab: and3([ab[0][1](n), ab[1][1](n)]))),
            st.tuples(inner, inner).map(lambda ab: (f"({ab[0][0]} or {ab[1][0]})",
                                                    lambda n, ab=ab: or3([ab[0][1](n), ab[1][1](n)]))),
            inner.map(lambda a: (f"not {a[0]}", lambda n, a=a: not (a[1](n) is True))),
        )
    return st.recursive(atom, extend, max_leaves=5)


@SETTINGS
@given(corpora(), st.lists(conditions(), min_size=1, max_size=6))
def test_attribute_conditions_and_logic(c, conds):
    for cond in conds:
        check_condition(c, cond)


def check_condition(c, cond):
    text, test = cond
    docs = {d: (base, t) for d, base, t in c.con.execute("SELECT doc, base, text FROM documents").fetchall()}
    for n in c.nodes["chunk"]:
        base, doc_text = docs[n["doc"]]
        n["local_start"] = n["start"] - base
        n["text"] = doc_text[n["start"] - base:n["end"] - base]
    hits = run_query(c.con, c.catalog, f"find a = chunk({text})", context=0).to_arrow()
    want = {n["id"] for n in c.nodes["chunk"] if test(n) is True}
    assert set(hits.column("a.node").to_pylist()) == want, text


def reachable_steps(edges: set[tuple[int, int]], start: int) -> dict[int, int]:
    """Breadth-first: every node reachable from ``start`` along src -> dst, with its fewest edges."""
    steps, frontier, k = {}, [start], 0
    while frontier:
        k += 1
        nxt = []
        for n in frontier:
            for s, d in edges:
                if s == n and d not in steps:
                    steps[d] = k
                    nxt.append(d)
        frontier = nxt
    return steps


@SETTINGS
@given(corpora(), st.sampled_from(["under", "above"]), st.sampled_from([None, "nsubj"]),
       st.one_of(st.none(), st.tuples(st.integers(1, 3), st.integers(0, 2))))
def test_walks_via_an_edge_set(c, rel, label, depth):
    """Random dep edges have cycles and repeats: the walk must end and never pair a node with itself."""
    mod = f' as "{label}"' if label else ""
    if depth is not None:
        mod += f" at depth {depth[0]}..{depth[0] + depth[1]}"
    edges = {(e["src"], e["dst"]) for e in c.edges if label is None or e["label"] == label}

    def test(a, b):
        low, high = (a, b) if rel == "under" else (b, a)
        k = reachable_steps(edges, low["id"]).get(high["id"])
        if k is None or low["id"] == high["id"]:
            return False
        return depth is None or depth[0] <= k <= depth[0] + depth[1]
    got = pairs(c, f"find a = token, b = token where a {rel} b via dep{mod}")
    assert got == expected(c, "token", "token", test)
