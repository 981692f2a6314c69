"""Checked query + plan -> one DuckDB SQL statement with bound parameters.

Safety: every value from the query text becomes a ``$n`` parameter; the only identifiers
in the SQL are catalog names (layers, columns), double-quoted, and aliases the compiler
generates itself.  Result columns get generated names (``c0``, ``c1``, ...) and are renamed
after execution, so not even a variable name reaches the SQL text.

Definitions the SQL implements (the user-facing semantics):

* Spans are half-open ``[start, end)`` on the global character line.  ``a inside b``:
  ``b.start <= a.start and a.end <= b.end``; a zero-width node at point p is therefore inside
  every span with ``start <= p <= end`` (a pause right after the last word of a sentence is
  inside that sentence).  ``overlaps`` means sharing at least one character, so a zero-width
  node overlaps nothing.  A node is never inside, overlapping or the same span as itself.
* ``a precedes b``: both in one document, ``a.end <= b.start and a.start < b.end`` (two
  points at the same place precede neither way).  Inside/overlaps/same span need no
  document test: documents never share a character of the global line.
* Distance bounds (querylang/bounds.py): ``a precedes b by at least L and at most H UNIT``
  is ``a precedes b and L <= distance(a, b) <= H`` in that unit; as a precedes b this is
  ``b.start - a.end`` in chars and ``b.first - a.last - 1`` in words/tokens (ordinals), so
  ``by at most 0 words`` is adjacency and a gap equal to a bound is inside it.  ``a before b
  by at least L and at most H`` (ms, s) is Allen's ``before`` and
  ``L <= b.t_start - a.t_end <= H``; ``after`` the same with a and b swapped.
* ``in the same sentence``: ``a.sent = b.sent`` (the sentence of each node, as the hit
  table's ``v.sentence`` names it); a node without one has no pair.
* ``distance(a, b)``: the number of words (``tokens``/``chars`` with that unit) strictly
  between the two nodes; 0 when adjacent or overlapping; no value for nodes of different
  documents.  Words and tokens are counted
  with the ordinals of the words each node covers (``word_first``..``word_last``), so a node
  covering no word (a zero-width point without ordinals) has no distance in words.
* ``directly precedes``: in one document, for two nodes of one token layer
  ``b.ord = a.ord + 1``; otherwise ``a`` precedes ``b`` and no token of the shared token
  layer lies between them (``b.first = a.last + 1`` in that layer's ordinals).
* With a CoNLL-U empty node on either side, ``directly precedes`` follows the file's line
  order (querylang/line_order.py): word k, then k.1, k.2, ..., then word k+1.
* ``a under b`` (tree columns): ``b.pre < a.pre and a.post < b.post``; ``at depth lo..hi``
  bounds ``a.depth - b.depth``.  ``a under b via E``: b is reached from a by following
  edges of the set E from ``src`` to ``dst`` (dependent -> head) one or more times, so b is
  an ancestor of a in E's graph, which may be a DAG or have cycles; a node is never under
  itself.  ``at depth lo..hi`` bounds the edges of the shortest such walk; ``as "L"`` walks
  only edges labelled exactly L.  ``above`` is the inverse.  Recursive SQL, not networkx:
  it was 2-20x faster on the open treebank (benchmarks/walks.py).
* ``in every reading``: the nodes of a layer with readings come from one reading of one
  sentence (as with ``in the same reading``), and a hit is kept when every reading of that
  sentence has a hit with the same other nodes and, on that layer, nodes of the same spans and
  labels: ``pp child of vp in every reading`` keeps a PP under a VP of the same span and label
  in each reading, not one whose VP exists only in some.
* Time: Allen's (1983) thirteen relations over ``[t_start, t_end]``, only between nodes of
  the same document (each document has its own recording clock).  ``give or take T`` is a
  tolerance on Allen's relations: two end points are equal when they differ by at most T,
  and one is before the other when it is more than T earlier.  A node never meets, is met
  by or equals itself (with a tolerance as long as it, or at zero duration, it would).  Two relations of our own, not strict:
  ``a inside b in time`` is ``b.t_start <= a.t_start and a.t_end <= b.t_end`` (edges may
  coincide), ``a shares time with b`` is ``a.t_start < b.t_end and b.t_start < a.t_end``.
  Times are whole microseconds (exact integers); ``gap(a, b) = b.t_start - a.t_end``, and
  the hit table shows times in seconds (``to_seconds``).
"""
from __future__ import annotations

from dataclasses import dataclass, field, replace
from decimal import ROUND_HALF_EVEN, Decimal

from querylang import ast, grouping
from querylang.catalog import LayerInfo
from querylang.checker import LENGTH_UNITS, TIME_UNITS, Checked, _adjacency_layer, is_time
from querylang.line_order import is_empty_layer, next_line
from querylang.listing import listing_statement, place_columns
from querylang.outputs import CONTEXT_SIDES, words_layer
from querylang.sqltext import DOC_VIEW, DOCUMENTS_VIEW, SENTENCE_VIEW, ident, to_seconds, with_
from querylang.keys import sentence_key_branches
from querylang.planner import Plan

#: ``fold(x)``: NFC, typographic apostrophes and quotes made plain, then lower case, so
#: "Don’t" and "don't" are one value
FOLD_FROM = "\u2019\u2018\u201b\u02bc\u201c\u201d\u201e"
FOLD_TO = "'" * 4 + '"' * 3


def ordinals(layer: LayerInfo, unit: str) -> tuple[str, str]:
    """Columns of a node's first/last ordinal in words or tokens."""
    ref = layer.word_layer if unit == "words" else layer.token_layer
    if ref is None or ref == layer.name:
        if layer.kind == "sequence":
            return ("ord", "ord")
    return ("word_first", "word_last") if unit == "words" else ("tok_first", "tok_last")


def ordinals_in(layer: LayerInfo, token_layer: str) -> tuple[str, str]:
    """Columns of a node's first/last ordinal counted in ``token_layer``."""
    if layer.name == token_layer:
        return ("ord", "ord")
    if layer.token_layer == token_layer:
        return ("tok_first", "tok_last")
    return ("word_first", "word_last")


@dataclass
class Scope:
    """The variables visible at one level (the main query or a without subquery)."""

    aliases: dict[str, str]
    layers: dict[str, LayerInfo]
    own: list[str]                                   # variables this level puts in FROM
    edge_joins: list[str] = field(default_factory=list)
    edge_conds: list[str] = field(default_factory=list)
    walk_joins: list[str] = field(default_factory=list)   # first in FROM (see SqlBuilder.walk)


class SqlBuilder:
    def __init__(self, checked: Checked, plan: Plan) -> None:
        self.checked = checked
        self.plan = plan
        self.params: list[object] = []
        self.needs: dict[str, set[str]] = {}          # alias -> {"sentence", "doc", "text"}
        self.alias_layer: dict[str, LayerInfo] = {}
        self.n_edges = 0
        self.walks: dict[tuple, str] = {}             # (edge set, label, depth) -> CTE name
        self.walk_ctes: list[str] = []
        #: values already computed as columns (aggregates and group keys, for having)
        self.computed: dict[ast.Expr, str] = {}

    # ---- parameters and names ---------------------------------------------------
    def param(self, value: object) -> str:
        self.params.append(value)
        return f"${len(self.params)}"

    def col(self, alias: str, name: str) -> str:
        return f"{alias}.{ident(name)}"

    def need(self, alias: str, what: str) -> None:
        self.needs.setdefault(alias, set()).add(what)

    # ---- values ---------------------------------------------------------------------
    def literal(self, lit: ast.Literal) -> str:
        """A bound parameter; a time in ms or s becomes whole microseconds, the unit of the store."""
        value = lit.value
        if lit.unit in TIME_UNITS and not isinstance(value, bool):
            value = microseconds(value, lit.unit)
        return self.param(value)

    def text_of(self, a: str) -> str:
        self.need(a, "text")
        t = f"{a}_t"
        return (f"substr({t}.{ident('text')}, CAST({self.col(a, 'start')} - {t}.{ident('base')} + 1 AS BIGINT), "
                f"CAST({self.col(a, 'end')} - {self.col(a, 'start')} AS BIGINT))")

    def expr(self, e: ast.Expr, scope: Scope, unit: str | None = None) -> str:
        if e in self.computed:
            return self.computed[e]
        if isinstance(e, ast.Literal):
            return self.literal(e)
        if isinstance(e, ast.Call):
            arg = self.expr(e.arg, scope)
            if e.name == "fold":
                return (f"lower(translate(nfc_normalize({arg}), {self.param(FOLD_FROM)}, "
                        f"{self.param(FOLD_TO)}))")
            return f"{e.name}({arg})"       # lower, length (characters, not bytes)
        if isinstance(e, ast.Func) and e.name == "label":
            return self.edge_labels(e.edges, scope)
        if isinstance(e, ast.Func):
            a, b = scope.aliases[e.a], scope.aliases[e.b]
            if e.name == "gap":   # times are per recording: no gap between documents
                return (f"(CASE WHEN {self.col(a, 'doc')} = {self.col(b, 'doc')} "
                        f"THEN {self.col(b, 't_start')} - {self.col(a, 't_end')} END)")
            return self.distance(a, b, scope.layers[e.a], scope.layers[e.b], unit or "words")
        assert isinstance(e, ast.Ref), e
        a = scope.aliases[e.var]
        if e.kind == "column":
            return self.col(a, e.name)
        if e.kind == "conllu_id":   # integers on syntactic words: compare as numbers
            return f"TRY_CAST({self.col(a, 'cid')} AS BIGINT)" if e.type == "int" else self.col(a, "cid")
        if e.kind == "sentence":
            self.need(a, "sentence")
            return f"{a}_s.{ident(e.name)}"
        if e.kind == "doc":
            self.need(a, "doc")
            return f"{a}_d.{ident(e.name)}"
        if e.kind in ("own_words", "sentence_words", "doc_words"):
            return self.words_of(a, e.kind)
        if e.kind == "phrase":
            return self.phrase(a, scope.layers[e.var])
        if e.kind == "chain_length":    # the mentions of the node's chain (none without a chain)
            layer = scope.layers[e.var]
            return (f"(CASE WHEN {self.col(a, 'chain')} IS NOT NULL THEN (SELECT count(*) FROM "
                    f"{ident(layer.name)} AS cl WHERE cl.{ident('chain')} = {self.col(a, 'chain')}) END)")
        if e.kind == "text":
            return self.text_of(a)
        if e.kind == "offset":
            self.need(a, "text")
            return f"({self.col(a, e.name[5:])} - {a}_t.{ident('base')})"
        if e.kind == "time":
            if e.name == "duration":
                return f"({self.col(a, 't_end')} - {self.col(a, 't_start')})"
            return self.col(a, "t_start" if e.name == "start" else "t_end")
        raise AssertionError(e)

    def phrase(self, a: str, layer: LayerInfo) -> str:
        """``v.phrase``: the text of v's dependency subtree (v and every word under it, by the
        tree's ``pre``/``post`` numbers), in text order; a subtree with a gap (a non-projective
        one) is its runs of consecutive words joined by " … "."""
        w, q = ident(layer.name), lambda x: ident(x)
        run = (f"SELECT y.{q('start')}, y.{q('end')}, y.{q('ord')} - row_number() OVER (ORDER BY y.{q('ord')}) AS run "
               f"FROM {w} AS y WHERE y.{q('sent')} = {self.col(a, 'sent')} AND y.{q('pre')} >= {self.col(a, 'pre')} "
               f"AND y.{q('post')} <= {self.col(a, 'post')}")
        runs = f"SELECT min(z.{q('start')}) AS s, max(z.{q('end')}) AS e FROM ({run}) AS z GROUP BY z.run"
        piece = f"substr(d.{q('text')}, CAST(r.s - d.{q('base')} + 1 AS BIGINT), CAST(r.e - r.s AS BIGINT))"
        return (f"(SELECT string_agg({piece}, {self.param(' … ')} ORDER BY r.s) FROM ({runs}) AS r, "
                f"{ident(DOCUMENTS_VIEW)} AS d WHERE d.{q('doc')} = {self.col(a, 'doc')})")

    def words_of(self, a: str, kind: str) -> str:
        """A length in words: a sentence spans the words ``word_first..word_last`` (consecutive
        ordinals of syntactic words, punctuation included, empty nodes not); a document holds
        the words of its sentences."""
        first, last = ident("word_first"), ident("word_last")
        if kind == "own_words":
            return f"({a}.{last} - {a}.{first} + 1)"
        if kind == "sentence_words":
            self.need(a, "sentence")
            return f"({a}_s.{last} - {a}_s.{first} + 1)"
        return (f"(SELECT sum({last} - {first} + 1) FROM {ident(SENTENCE_VIEW)} AS ws "
                f"WHERE ws.{ident('doc')} = {self.col(a, 'doc')})")

    def shown(self, e: ast.Expr, scope: Scope) -> str:
        """A value for the hit table: like :meth:`expr`, but a time in seconds.

        Times are whole microseconds in the store and in every condition (exact integer
        arithmetic); divided by 10^6 only for the hit table, each is the double nearest to
        its exact decimal, which prints as that decimal (1628000 - 902000 -> 0.726).
        """
        return to_seconds(self.expr(e, scope)) if is_time(e) else self.expr(e, scope)

    def distance(self, a: str, b: str, la: LayerInfo, lb: LayerInfo, unit: str) -> str:
        same_doc = f"{self.col(a, 'doc')} = {self.col(b, 'doc')}"
        if unit == "chars":
            return (f"(CASE WHEN {same_doc} THEN greatest(0, {self.col(b, 'start')} - {self.col(a, 'end')}, "
                    f"{self.col(a, 'start')} - {self.col(b, 'end')}) END)")
        fa, la_ = ordinals(la, unit)
        fb, lb_ = ordinals(lb, unit)
        # greatest() skips NULLs, so a node without ordinals must be caught first
        known = " AND ".join(f"{self.col(x, y)} IS NOT NULL" for x, y in ((a, fa), (a, la_), (b, fb), (b, lb_)))
        return (f"(CASE WHEN {same_doc} AND {known} THEN greatest(0, {self.col(b, fb)} - {self.col(a, la_)} - 1, "
                f"{self.col(a, fa)} - {self.col(b, lb_)} - 1) END)")

    # ---- conditions ----------------------------------------------------------------------
    def cond(self, c: ast.Cond, scope: Scope, top: bool = False) -> str:
        if isinstance(c, ast.And):
            return "(" + " AND ".join(self.cond(i, scope, top) for i in c.items) + ")"
        if isinstance(c, ast.Or):
            return "(" + " OR ".join(self.cond(i, scope) for i in c.items) + ")"
        if isinstance(c, ast.Not):
            return f"(NOT coalesce({self.cond(c.item, scope)}, false))"
        if isinstance(c, ast.Compare):
            unit = _unit_of(c.left) or _unit_of(c.right)
            op = "<>" if c.op == "!=" else c.op
            return f"({self.expr(c.left, scope, unit)} {op} {self.expr(c.right, scope, unit)})"
        if isinstance(c, ast.InList):
            e = self.expr(c.expr, scope)
            values = ", ".join(self.literal(v) for v in c.values)
            return f"({e} {'NOT IN' if c.negated else 'IN'} ({values}))"
        if isinstance(c, ast.Matches):
            return f"regexp_matches({self.expr(c.expr, scope)}, {self.literal(c.pattern)})"
        if isinstance(c, ast.Missing):
            return f"({self.expr(c.expr, scope)} IS {'NOT ' if c.negated else ''}NULL)"
        if isinstance(c, ast.Root):
            return self.root(c, scope)
        if isinstance(c, ast.FirstMention):
            assert isinstance(c.subject, ast.Ref)
            a = scope.aliases[c.subject.var]
            info = scope.layers[c.subject.var].attrs["first_mention"]
            column = self.col(a, "first_mention")
            if info.type == "bool":
                return f"coalesce({column}, false)"
            if info.type in ("int", "float"):
                return f"({column} = 1)"
            return f"(lower({column}) IN ({self.param('true')}, {self.param('1')}, {self.param('yes')}))"
        if isinstance(c, ast.Relation):
            return self.relation(c, scope, top)
        raise AssertionError(c)

    def relation(self, r: ast.Relation, scope: Scope, top: bool) -> str:
        assert isinstance(r.left, ast.Ref) and isinstance(r.right, ast.Ref)
        name = r.name
        a, b = scope.aliases[r.left.var], scope.aliases[r.right.var]
        la, lb = scope.layers[r.left.var], scope.layers[r.right.var]
        if name in ("contains", "follows", "directly follows", "parent of", "above", "governs") and not r.in_time:
            inverse = {"contains": "inside", "follows": "precedes", "directly follows": "directly precedes",
                       "parent of": "child of", "above": "under", "governs": "depends on"}[name]
            return self.relation(replace(r, name=inverse, left=r.right, right=r.left, in_time=False), scope, top)
        if r.same_sentence:
            # the sentence each node has (``v.sentence``): an equality key the join can hash on
            same = f"{self.col(a, 'sent')} = {self.col(b, 'sent')}"
            return f"({same} AND {self.relation(replace(r, same_sentence=False), scope, top)})"
        c = self.col
        # node ids are unique across the corpus, so nodes of two layers are never the same node:
        # the test is needed within one layer only (left out, the range join runs without a residual)
        different = f"{c(a, 'id')} <> {c(b, 'id')}" if la.name == lb.name else "TRUE"
        if r.in_time:
            return self.allen(r, a, b)
        if name == "inside":
            return f"({c(b, 'start')} <= {c(a, 'start')} AND {c(a, 'end')} <= {c(b, 'end')} AND {different})"
        if name == "overlaps":
            return (f"({c(a, 'start')} < {c(b, 'end')} AND {c(b, 'start')} < {c(a, 'end')} AND "
                    f"{c(a, 'start')} < {c(a, 'end')} AND {c(b, 'start')} < {c(b, 'end')} AND {different})")
        if name == "same span as":
            return f"({c(a, 'start')} = {c(b, 'start')} AND {c(a, 'end')} = {c(b, 'end')} AND {different})"
        if name == "precedes":
            out = (f"({c(a, 'end')} <= {c(b, 'start')} AND {c(a, 'start')} < {c(b, 'end')} AND "
                   f"{c(a, 'doc')} = {c(b, 'doc')}")
            # a precedes b, so a bound on distance(a, b) is a plain range bound on b's start,
            # which DuckDB can use in the join (about 30% faster than testing distance(a, b),
            # benchmarks/queries/13)
            for lit, op in ((r.at_least, ">="), (r.at_most, "<=")):
                if lit is None:
                    continue
                if lit.unit == "chars":
                    out += f" AND {c(b, 'start')} {op} {c(a, 'end')} + {self.param(lit.value)}"
                    continue
                _, last_a = ordinals(la, lit.unit)
                first_b, _ = ordinals(lb, lit.unit)
                if op == ">=" and lit.value == 0:     # no words between is a gap of 0, not -1
                    out += f" AND {c(a, last_a)} IS NOT NULL AND {c(b, first_b)} IS NOT NULL"
                else:
                    out += f" AND {c(b, first_b)} {op} {c(a, last_a)} + {self.param(lit.value)} + 1"
            return out + ")"
        if name == "directly precedes" and (is_empty_layer(la) or is_empty_layer(lb)):
            return next_line(a, b, la, lb, self.param("."))
        if name == "directly precedes":
            ref = _adjacency_layer(la, lb)
            assert ref is not None
            if la.name == lb.name == ref:
                return f"({c(b, 'ord')} = {c(a, 'ord')} + 1 AND {c(a, 'doc')} = {c(b, 'doc')})"
            _, last_a = ordinals_in(la, ref)
            first_b, _ = ordinals_in(lb, ref)
            return (f"({c(b, first_b)} = {c(a, last_a)} + 1 AND {c(a, 'end')} <= {c(b, 'start')} AND "
                    f"{c(a, 'doc')} = {c(b, 'doc')})")
        if name == "child of":
            return f"({c(a, 'parent')} = {c(b, 'id')})"
        if name == "sibling of":
            return f"({c(a, 'parent')} = {c(b, 'parent')} AND {different})"
        if name == "under" and r.via is not None:
            return self.walk(r, a, b, scope, top)
        if name == "under":
            out = f"({c(b, 'pre')} < {c(a, 'pre')} AND {c(a, 'post')} < {c(b, 'post')}"
            if r.depth is not None:
                out += (f" AND {c(a, 'depth')} - {c(b, 'depth')} BETWEEN {self.param(r.depth[0])} "
                        f"AND {self.param(r.depth[1])}")
            return out + ")"
        if name == "depends on":
            return self.dependency(r, a, b, scope, top)
        if name == "same entity as":
            return f"({c(a, 'chain')} = {c(b, 'chain')} AND {different})"
        if name == "antecedent of":
            return f"({c(a, 'chain')} = {c(b, 'chain')} AND {c(a, 'chain_pos')} < {c(b, 'chain_pos')})"
        if name == "previous mention of":
            return f"({c(a, 'chain')} = {c(b, 'chain')} AND {c(a, 'chain_pos')} = {c(b, 'chain_pos')} - 1)"
        raise AssertionError(name)

    def dependency(self, r: ast.Relation, a: str, b: str, scope: Scope, top: bool) -> str:
        la, lb = scope.layers[r.left.var], scope.layers[r.right.var]
        if basic_tree_edges(r.via or "dep", la, lb):
            # the basic dependency set is the layer's own tree: parent = head, label = deprel
            out = f"{self.col(a, 'parent')} = {self.col(b, 'id')}"
            if r.label is not None:
                out += f" AND {self.label_test(self.col(a, 'deprel'), r)}"
            return f"({out})"
        edges = ident(r.via or "dep")
        if top:
            label = f" WHERE {self.label_test(ident('label'), r)}" if r.label is not None else ""
            e = f"e{self.n_edges}"
            self.n_edges += 1
            scope.edge_joins.append(f"(SELECT DISTINCT {ident('src')}, {ident('dst')} FROM {edges}{label}) AS {e}")
            return f"({e}.{ident('src')} = {self.col(a, 'id')} AND {e}.{ident('dst')} = {self.col(b, 'id')})"
        cond = f" AND {self.label_test('x.' + ident('label'), r)}" if r.label is not None else ""
        return (f"EXISTS (SELECT 1 FROM {edges} AS x WHERE x.{ident('src')} = {self.col(a, 'id')} "
                f"AND x.{ident('dst')} = {self.col(b, 'id')}{cond})")

    def root(self, c: ast.Root, scope: Scope) -> str:
        """``v is root``: the basic tree's HEAD 0 (``head_num``), or an edge of the set with no head."""
        a, layer = scope.aliases[c.subject.var], scope.layers[c.subject.var]
        if basic_tree_edges(c.via, layer, layer) and "head_num" in layer.attrs:
            out = f"{self.col(a, 'head_num')} = 0"
            return f"({out} AND {self.label_test(self.col(a, 'deprel'), c)})" if c.label is not None else f"({out})"
        test = f" AND {self.label_test('x.' + ident('label'), c)}" if c.label is not None else ""
        return (f"EXISTS (SELECT 1 FROM {ident(c.via)} AS x WHERE x.{ident('src')} = {self.col(a, 'id')} "
                f"AND x.{ident('dst')} IS NULL{test})")

    def label_test(self, column: str, r: ast.Relation) -> str:
        """The relation's label test on an edge's label column: exact, or a regular expression."""
        if r.label_matches:
            return f"regexp_matches({column}, {self.literal(r.label)})"
        return f"{column} = {self.literal(r.label)}"

    def edge_labels(self, r: ast.Relation, scope: Scope) -> str:
        """``label(a, b)``: the labels of r's edges from the dependent to the head that pass r's
        label test, in code point order, joined by "|" (one edge: its label)."""
        dep, head = (r.left, r.right) if r.name == "depends on" else (r.right, r.left)
        a, b = scope.aliases[dep.var], scope.aliases[head.var]
        test = f" AND {self.label_test('x.' + ident('label'), r)}" if r.label is not None else ""
        return (f"(SELECT array_to_string(list_sort(list_distinct(list(x.{ident('label')}))), {self.param('|')}) "
                f"FROM {ident(r.via or 'dep')} AS x WHERE x.{ident('src')} = {self.col(a, 'id')} "
                f"AND x.{ident('dst')} = {self.col(b, 'id')}{test})")

    def walk(self, r: ast.Relation, a: str, b: str, scope: Scope, top: bool) -> str:
        """``a under b via E``: a pair of the closure CTE of E (see :meth:`closure`)."""
        table = self.closure(r.via or "dep", r, r.depth)
        src, dst = ident("src"), ident("dst")
        if top:
            e = f"e{self.n_edges}"
            self.n_edges += 1
            # first in the FROM list: after nodes with LEFT JOINs (sentence attributes), DuckDB
            # chose a cross product of the two node sets (GUM dev: 790M rows, 15 s; first: 0.5 s)
            scope.walk_joins.append(f"{table} AS {e}")
            return f"({e}.{src} = {self.col(a, 'id')} AND {e}.{dst} = {self.col(b, 'id')})"
        return (f"EXISTS (SELECT 1 FROM {table} AS x WHERE x.{src} = {self.col(a, 'id')} "
                f"AND x.{dst} = {self.col(b, 'id')})")

    def closure(self, edge_set: str, r: ast.Relation, depth: tuple[int, int] | None) -> str:
        """A recursive CTE of the pairs (a, b) with b reachable from a along src -> dst.

        Measured against networkx on the open treebank (benchmarks/walks.py), so the walk
        stays in SQL.  UNION (not UNION ALL) keeps the recursion finite on cycles: a row
        already found is never walked again.  With ``at depth`` the rows carry the number of
        edges and stop at the upper bound; a pair's depth is its shortest walk.  A pair
        (a, a) -- a cycle back to the start -- is dropped.  One CTE per distinct walk,
        MATERIALIZED: inlined into the join, DuckDB re-ran the recursion (GUM dev: 65 s -> 0.06 s).
        """
        key = (edge_set, None if r.label is None else (r.label.value, r.label_matches), depth)
        if key in self.walks:
            return self.walks[key]
        name = f"walk{len(self.walks)}"
        self.walks[key] = name
        src, dst, lab = ident("src"), ident("dst"), ident("label")
        only = f" AND {self.label_test(lab, r)}" if r.label is not None else ""
        edges = f"{name}_e"
        self.walk_ctes.append(f"{edges} AS MATERIALIZED (SELECT DISTINCT {src}, {dst} FROM {ident(edge_set)} "
                              f"WHERE {dst} IS NOT NULL{only})")
        if depth is None:
            self.walk_ctes.append(
                f"{name}_r({src}, {dst}) AS (SELECT {src}, {dst} FROM {edges} UNION "
                f"SELECT r.{src}, e.{dst} FROM {name}_r AS r JOIN {edges} AS e ON e.{src} = r.{dst})")
            self.walk_ctes.append(f"{name} AS MATERIALIZED (SELECT {src}, {dst} FROM {name}_r WHERE {src} <> {dst})")
        else:
            # breadth first, one row per pair (USING KEY), extended only to pairs not found yet
            # (``recurring``: the rows so far): a pair's k is its shortest walk, and on a graph
            # with cycles the walk stops when a level adds no new pair, so a depth range beyond
            # the number of nodes costs no more than the whole closure (was: a row per pair and
            # length, 104 s and 3.4 GB at 1..10000)
            lo, hi = self.param(depth[0]), self.param(depth[1])
            self.walk_ctes.append(
                f"{name}_r({src}, {dst}, k) USING KEY ({src}, {dst}) AS (SELECT {src}, {dst}, 1 FROM {edges} UNION "
                f"SELECT r.{src}, e.{dst}, r.k + 1 FROM {name}_r AS r JOIN {edges} AS e ON e.{src} = r.{dst} "
                f"WHERE r.k < {hi} AND NOT EXISTS (SELECT 1 FROM recurring.{name}_r AS x "
                f"WHERE x.{src} = r.{src} AND x.{dst} = e.{dst}))")
            self.walk_ctes.append(f"{name} AS MATERIALIZED (SELECT {src}, {dst} FROM {name}_r WHERE {src} <> {dst} "
                                  f"AND k BETWEEN {lo} AND {hi})")
        return name

    def allen(self, r: ast.Relation, a: str, b: str) -> str:
        name = r.name
        tol = self.literal(r.tolerance) if r.tolerance is not None else None
        s = {a: self.col(a, "t_start"), b: self.col(b, "t_start")}
        e = {a: self.col(a, "t_end"), b: self.col(b, "t_end")}

        def eq(x: str, y: str) -> str:
            return f"abs({x} - {y}) <= {tol}" if tol else f"{x} = {y}"

        def lt(x: str, y: str) -> str:
            return f"{x} < {y} - {tol}" if tol else f"{x} < {y}"

        def le(x: str, y: str) -> str:
            return f"{x} <= {y} + {tol}" if tol else f"{x} <= {y}"
        different = f"{self.col(a, 'id')} <> {self.col(b, 'id')}"

        forms = {
            "before": [lt(e[a], s[b])],
            "after": [lt(e[b], s[a])],
            "meets": [eq(e[a], s[b]), different],
            "met by": [eq(e[b], s[a]), different],
            "overlaps": [lt(s[a], s[b]), lt(s[b], e[a]), lt(e[a], e[b])],
            "overlapped by": [lt(s[b], s[a]), lt(s[a], e[b]), lt(e[b], e[a])],
            "starts": [eq(s[a], s[b]), lt(e[a], e[b])],
            "started by": [eq(s[a], s[b]), lt(e[b], e[a])],
            "during": [lt(s[b], s[a]), lt(e[a], e[b])],
            "contains": [lt(s[a], s[b]), lt(e[b], e[a])],
            "finishes": [eq(e[a], e[b]), lt(s[b], s[a])],
            "finished by": [eq(e[a], e[b]), lt(s[a], s[b])],
            "equals": [eq(s[a], s[b]), eq(e[a], e[b]), different],
            # our own (querylang/allen.py): containment with shared edges, and any shared stretch
            "inside": [le(s[b], s[a]), le(e[a], e[b]), different],
            "shares time with": [lt(s[a], e[b]), lt(s[b], e[a]), different],
        }
        same_recording = f"{self.col(a, 'doc')} = {self.col(b, 'doc')}"
        bounds = []
        if name in ("before", "after"):
            first, second = (a, b) if name == "before" else (b, a)
            # the gap s[second] - e[first] as a range bound on the second's start
            bounds = [f"{s[second]} {op} {e[first]} + {self.literal(lit)}"
                      for lit, op in ((r.at_least, ">="), (r.at_most, "<=")) if lit is not None]
        return "(" + " AND ".join([same_recording] + forms[name] + bounds) + ")"

    # ---- FROM and WHERE of one level ---------------------------------------------------------
    def level(self, bindings: tuple[ast.Binding, ...], cond: ast.Cond | None, scope: Scope) -> tuple[str, str]:
        """FROM list and WHERE text for the bindings of one level."""
        wheres: list[str] = []
        for b in bindings:
            if b.cond is not None:
                wheres.append(self.cond(b.cond, scope, top=True))
        for atom in ast.conjuncts(cond):
            wheres.append(self.cond(atom, scope, top=True))
        items = scope.walk_joins + [self.from_item(v, scope) for v in scope.own] + scope.edge_joins
        return ", ".join(items), " AND ".join(wheres) if wheres else "true"

    def from_item(self, var: str, scope: Scope) -> str:
        a = scope.aliases[var]
        out = f"{ident(scope.layers[var].name)} AS {a}"
        self.alias_layer[a] = scope.layers[var]
        needs = self.needs.get(a, set())
        if "sentence" in needs:
            out += f" LEFT JOIN {ident(SENTENCE_VIEW)} AS {a}_s ON {a}_s.{ident('id')} = {self.col(a, 'sent')}"
        if "doc" in needs:
            out += f" LEFT JOIN {ident(DOC_VIEW)} AS {a}_d ON {a}_d.{ident('doc')} = {self.col(a, 'doc')}"
        if "text" in needs:
            out += f" LEFT JOIN {ident(DOCUMENTS_VIEW)} AS {a}_t ON {a}_t.{ident('doc')} = {self.col(a, 'doc')}"
        return out


def basic_tree_edges(edge_set: str, la: LayerInfo, lb: LayerInfo) -> bool:
    """Whether an edge set is the basic dependency tree stored in the layer's own columns.

    DEVELOPERS.md: the ``dep`` set has src = dependent, dst = head, label = DEPREL, and the
    token layer carrying it has ``parent`` = head and a ``deprel`` column.  A join on
    ``parent`` is about 2x faster than one through the edge table (benchmarks/queries/03).
    """
    return (la.name == lb.name and la.tree and edge_set in la.edge_sets and "deprel" in la.attrs
            and (edge_set == "dep" or edge_set.endswith(".dep")))


EQUALITY_RELATIONS = {"child of", "parent of", "sibling of", "depends on", "governs", "same entity as",
                      "antecedent of", "previous mention of", "directly precedes", "directly follows"}


def _has_range_relation(cond: ast.Cond | None) -> bool:
    """Whether a condition relates nodes by ranges (spans, times, pre/post), not by an equal key."""
    if cond is None:
        return False
    if isinstance(cond, (ast.And, ast.Or)):
        return any(_has_range_relation(c) for c in cond.items)
    if isinstance(cond, ast.Not):
        return _has_range_relation(cond.item)
    return isinstance(cond, ast.Relation) and cond.name not in EQUALITY_RELATIONS


MAX_OR_BRANCHES = 8


def or_branches(where: ast.Cond | None, variables: set[str]) -> list[ast.Cond | None]:
    """Split the first top-level ``or`` that relates variables into one condition per branch.

    DuckDB cannot join on a disjunction (``a depends on b or b depends on a``) and would
    pair every row with every row; one join per branch, combined with UNION, keeps each
    branch an equality or range join.  UNION also removes a match found by two branches,
    so the rows are the same as with the ``or``.
    """
    items = ast.conjuncts(where)
    for i, item in enumerate(items):
        if (isinstance(item, ast.Or) and len(item.items) <= MAX_OR_BRANCHES
                and any(len(ast.vars_in(b) & variables) >= 2 for b in item.items)):
            return [ast.And(tuple(items[:i] + [branch] + items[i + 1:])) for branch in item.items]
    return [where]


def _unit_of(e: ast.Expr) -> str | None:
    return e.unit if isinstance(e, ast.Literal) and e.unit in LENGTH_UNITS else None


@dataclass(frozen=True)
class Window:
    """The same listing restricted to documents ``lo <= doc < hi`` (parameters ``doc_lo``, ``doc_hi``).

    Hits are ordered by their first character on the global line and every hit lies in one
    document, so the windowed hits of consecutive document ranges, concatenated, are the
    first rows of the full listing; the execution layer widens the window until the limit
    is reached (see ``engine.execute``).  ``anchor`` is the most selective variable.
    """

    sql: str
    params: list[object]
    doc_lo: int                 # indexes into params
    doc_hi: int
    limit: int
    anchor: str


@dataclass(frozen=True)
class SqlQuery:
    sql: str
    params: list[object]
    columns: list[str]          # result column names, in order (renaming c0, c1, ...)
    kind: str                   # "hits" or "aggregate"
    limit_param: int | None = None    # index of the LIMIT value in params
    window: Window | None = None      # the windowed form of a document-local listing
    locality: str = ""                # the planner's reason for windowing or not


def _word_counts(sb: SqlBuilder, checked: Checked, out: ast.Aggregate) -> str:
    """The words of every group a ``rate`` lists: each per key evaluated on the words
    themselves (every key is a document or sentence attribute), ``_d0..`` and ``_w``."""
    name = words_layer(checked.catalog.layers())
    layer = checked.catalog.layers()[name]
    variables = list(checked.layers)
    scope = Scope({v: "rw" for v in variables}, {v: layer for v in variables}, [variables[0]])
    keys = [f"{sb.shown(i.expr, scope)} AS _d{k}" for k, i in enumerate(out.per)]
    frm = sb.from_item(variables[0], scope)
    group = ", ".join(f"_d{k}" for k in range(len(out.per)))
    return f"SELECT {', '.join(keys)}, count(*) AS _w FROM {frm} GROUP BY {group}"


def _reading_groups(checked: Checked) -> dict[str, list[str]]:
    groups: dict[str, list[str]] = {}
    for v, info in checked.layers.items():
        if info.readings:
            groups.setdefault(info.name, []).append(v)
    return groups


US_PER = {"ms": 1_000, "s": 1_000_000}


def microseconds(value, unit: str) -> int:
    """A time literal as whole microseconds (the decimal as written, half to even below a µs).

    >>> microseconds(0.3, "s"), microseconds(250, "ms"), microseconds(1.186, "s")
    (300000, 250000, 1186000)
    """
    return int((Decimal(str(value)) * US_PER[unit]).to_integral_value(rounding=ROUND_HALF_EVEN))


#: the largest LIMIT DuckDB takes (BIGINT); a larger one cannot change any result
LIMIT_MAX = 2 ** 63 - 1


def effective_limit(in_query: int | None, given: int | None) -> int | None:
    """The smaller of the query's own ``limit`` and the caller's, capped at :data:`LIMIT_MAX`.

    >>> effective_limit(10, None), effective_limit(None, 5), effective_limit(10 ** 30, None) == LIMIT_MAX
    (10, 5, True)
    """
    limits = [n for n in (in_query, given) if n is not None]
    return min(limits + [LIMIT_MAX]) if limits else None


def to_sql(checked: Checked, plan: Plan, *, limit: int | None = None, context: int = 5,
           cross_sentences: bool = False) -> SqlQuery:
    """The whole statement: matches (m), reading filter (k), output with KWIC.

    A listing with a limit whose hits each lie in one document (``plan.document_local``) also
    gets a windowed form of the same statement (:class:`Window`) for the execution layer.
    """
    plain = _statement(checked, plan, limit, context, cross_sentences, windowed=False)
    q = checked.query
    eff_limit = effective_limit(q.limit, limit)
    if plain.kind != "hits":
        return plain
    # an order of the user's or a sample needs every hit before the first n: no windows
    if not plan.document_local or eff_limit is None or eff_limit <= 0 or q.order or q.sample:
        return replace(plain, locality=plan.locality)
    w = _statement(checked, plan, limit, context, cross_sentences, windowed=True)
    assert w.limit_param is not None
    window = Window(w.sql, w.params, doc_lo=0, doc_hi=1, limit=w.limit_param, anchor=plan.order[0])
    return replace(plain, window=window, locality=plan.locality)


def _statement(checked: Checked, plan: Plan, limit: int | None, context: int, cross_sentences: bool, *,
               windowed: bool) -> SqlQuery:
    """One statement; ``windowed`` adds ``lo <= doc < hi`` for every variable as $1 and $2."""
    q = checked.query
    sb = SqlBuilder(checked, plan)
    if windowed:
        doc_lo, doc_hi = sb.param(0), sb.param(0)
    main = Scope(dict(plan.aliases), dict(checked.layers), list(plan.order))
    wheres: list[str] = []

    # without clauses become NOT EXISTS subqueries
    outer_bindings = {b.var: b for b in q.bindings}
    for i, (w, own) in enumerate(zip(q.withouts, checked.inner_layers)):
        # An outer variable met through a range relation is re-bound inside the subquery to a
        # copy joined on id: the subquery is then an uncorrelated (IE) join and the test an
        # anti join on id.  Correlated range tests made DuckDB loop: benchmarks/queries/12 at
        # 1e6 tokens took 6.3 s that way and 0.07 s this way.
        copied = [v for v in outer_bindings if v in ast.vars_in(w.cond)] if _has_range_relation(w.cond) else []
        copies = {v: f"w{i}_o{j}" for j, v in enumerate(copied)}
        aliases = {**main.aliases, **copies, **{v: f"w{i}_{j}" for j, v in enumerate(own)}}
        sub = Scope(aliases, {**main.layers, **own}, list(own) + copied)
        frm, whr = sb.level(w.bindings + tuple(outer_bindings[v] for v in copied), w.cond, sub)
        links = [f"{copies[v]}.{ident('id')} = {sb.col(main.aliases[v], 'id')}" for v in copied]
        if windowed:   # a copy is the outer node itself, so it lies in the window too
            links += [f"{sb.col(copies[v], 'doc')} >= {doc_lo} AND {sb.col(copies[v], 'doc')} < {doc_hi}"
                      for v in copied]
        wheres.append(f"NOT EXISTS (SELECT 1 FROM {frm} WHERE {' AND '.join([whr] + links)})")

    if q.qualifiers & {"same reading", "every reading"}:
        for vs in _reading_groups(checked).values():
            a0 = main.aliases[vs[0]]
            for v in vs[1:]:
                a = main.aliases[v]
                wheres.append(f"({sb.col(a, 'sent')} = {sb.col(a0, 'sent')} AND "
                              f"{sb.col(a, 'reading')} = {sb.col(a0, 'reading')})")

    # select list of the match level
    select: list[str] = []
    variables = [b.var for b in q.bindings]
    listing = not isinstance(q.output, ast.Aggregate)
    if windowed:
        # every variable in the window's documents; a hit whose nodes all lack a start sorts
        # last in the full listing (NULL _hs), so no window may return it
        for v in variables:
            a = main.aliases[v]
            wheres.append(f"({sb.col(a, 'doc')} >= {doc_lo} AND {sb.col(a, 'doc')} < {doc_hi})")
        starts_known = " OR ".join(f"{sb.col(main.aliases[v], 'start')} IS NOT NULL" for v in variables)
        wheres.append(f"({starts_known})")
    for i, v in enumerate(variables):
        a = main.aliases[v]
        select += [f"{sb.col(a, 'id')} AS _id{i}", f"{sb.col(a, 'doc')} AS _doc{i}",
                   f"{sb.col(a, 'start')} AS _start{i}", f"{sb.col(a, 'end')} AS _end{i}",
                   f"{sb.col(a, 'sent')} AS _sent{i}"]
        if checked.layers[v].readings:
            select.append(f"{sb.col(a, 'reading')} AS _read{i}")
            if "every reading" in q.qualifiers and "label" in checked.layers[v].attrs:
                select.append(f"{sb.col(a, 'label')} AS _lab{i}")
        if listing:   # where each node is, in the user's terms (see place_columns)
            select += [f"{sb.col(a, c)} AS _{c}{i}" for c in place_columns(checked.layers[v])]
    out = q.output
    items: list[ast.ShowItem] = list(out.items if isinstance(out, ast.Show) else
                                     out.per if isinstance(out, ast.Aggregate) else ())
    for k, item in enumerate(items):
        select.append(f"{sb.shown(item.expr, main)} AS _x{k}")
    calls: list[ast.AggCall] = []
    args: list[ast.Expr] = []
    if isinstance(out, ast.Aggregate):
        # aggregates over times run on whole microseconds (an exact sum), in seconds only after
        calls = grouping.calls_in(out)
        args = grouping.arguments(calls)
        for j, arg in enumerate(args):
            node = isinstance(arg, ast.Ref) and arg.kind == "node"     # count distinct v
            select.append(f"{sb.col(main.aliases[arg.var], 'id') if node else sb.expr(arg, main)} AS _a{j}")
    else:
        for k, o in enumerate(q.order):
            if o.expr not in CONTEXT_SIDES:
                select.append(f"{sb.expr(o.expr, main)} AS _o{k}")
    starts = [f"{sb.col(main.aliases[v], 'start')}" for v in variables]
    ends = [f"{sb.col(main.aliases[v], 'end')}" for v in variables]
    select.append(f"least({', '.join(starts)}) AS _hs" if len(starts) > 1 else f"{starts[0]} AS _hs")
    select.append(f"greatest({', '.join(ends)}) AS _he" if len(ends) > 1 else f"{ends[0]} AS _he")

    bodies = []
    keyed = sentence_key_branches(q.where, checked.layers, checked.catalog.layers())
    for where in or_branches(keyed, set(variables)):
        scope = Scope(dict(main.aliases), dict(main.layers), list(main.own))
        frm, whr = sb.level(q.bindings, where, scope)
        if wheres:
            whr = " AND ".join([whr] + wheres)
        bodies.append(f"SELECT {', '.join(select)} FROM {frm} WHERE {whr}")
    ctes = sb.walk_ctes + [f"m AS ({' UNION '.join(bodies)})"]

    # in every reading: keep groups whose matched readings are all the sentence's readings
    last = "m"
    if "every reading" in q.qualifiers:
        for n, (layer_name, vs) in enumerate(_reading_groups(checked).items()):
            # a hit of one reading is the same hit in another when its other nodes are the same
            # and its nodes of this layer have the same spans and labels there
            i0 = variables.index(vs[0])
            keys = [f"_id{i}" for i, v in enumerate(variables) if v not in vs] + [f"_sent{i0}"]
            for v in vs:
                i = variables.index(v)
                keys += [f"_start{i}", f"_end{i}"] + ([f"_lab{i}"] if "label" in checked.layers[v].attrs else [])
            key_list = ", ".join(keys)
            ctes.append(f"g{n} AS (SELECT {key_list}, count(DISTINCT _read{i0}) AS n FROM {last} GROUP BY {key_list})")
            ctes.append(f"r{n} AS (SELECT {ident('sent')} AS s, count(DISTINCT {ident('reading')}) AS n "
                        f"FROM {ident(layer_name)} GROUP BY {ident('sent')})")
            on = " AND ".join(f"g{n}.{k} IS NOT DISTINCT FROM {last}.{k}" for k in keys)
            ctes.append(f"k{n} AS (SELECT {last}.* FROM {last} JOIN g{n} ON {on} JOIN r{n} "
                        f"ON r{n}.s = {last}._sent{i0} WHERE g{n}.n = r{n}.n)")
            last = f"k{n}"

    if q.sample is not None:
        # the hits whose hash under the seed is smallest: a uniform sample (a hash is a fixed
        # function of seed and node ids, so threads and runs cannot change it).  The hash of the
        # text "seed:id:id..": DuckDB's hash(seed, id) mixes the seed in too weakly, and
        # samples over consecutive seeds failed the chi-square test (tests/test_query_sample.py)
        ids = ", ".join(f"_id{i}" for i in range(len(variables)))
        ctes.append(f"smp AS (SELECT * FROM {last} ORDER BY hash(concat_ws(':', {sb.param(int(q.sample.seed))}, "
                    f"{ids})), {ids} LIMIT {sb.param(int(q.sample.size))})")
        last = "smp"

    eff_limit = effective_limit(q.limit, limit)
    limit_sql = f" LIMIT {sb.param(int(eff_limit))}" if eff_limit is not None else ""
    limit_param = len(sb.params) - 1 if eff_limit is not None else None

    if isinstance(out, ast.Aggregate):
        rate = any(i.call.func == "rate" for i in out.items)
        words = _word_counts(sb, checked, out) if rate else None
        sql, names = grouping.group_statement(sb, out, with_(ctes, bool(sb.walk_ctes)), last, calls, args,
                                              limit_sql, q.order, words)
        return SqlQuery(sql, sb.params, names, "aggregate", limit_param=limit_param)

    ranges = _has_range_relation(q.where) or any(_has_range_relation(x.cond) for x in q.withouts)
    sql, names = listing_statement(sb, checked, ctes, last, items, limit_sql, context, cross_sentences,
                                   (doc_lo, doc_hi) if windowed else None, ranges)
    return SqlQuery(sql, sb.params, names, "hits", limit_param=limit_param)
