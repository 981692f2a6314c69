"""Names and types against the catalog: the pass that turns a parsed query into a safe one.

Every attribute name is resolved to a catalog column (so the compiler can only ever emit
identifiers the catalog knows), every relation is checked against the layers it joins,
and mistakes become a :class:`StrataError` pointing at the place, with "did you mean"
suggestions from :mod:`difflib`.
"""
from __future__ import annotations

import difflib
from dataclasses import dataclass, field, replace

import duckdb

from querylang.errors import StrataError
from querylang import ast, outputs
from querylang.bounds import ALLEN_RELATIONS, LENGTH_UNITS, TIME_UNITS, check_modifiers, normalised
from querylang.catalog import AttrInfo, Catalog, LayerInfo
from querylang.line_order import is_empty_layer, is_word_layer
from querylang.types import NUMERIC, is_time, type_name as _type_name, type_of as _type, written as _written

TEXT_RELATIONS = {"inside", "contains", "overlaps", "same span as", "precedes", "follows",
                  "directly precedes", "directly follows"}
TREE_RELATIONS = {"child of", "parent of", "under", "above", "sibling of"}
DEPENDENCY_RELATIONS = {"depends on", "governs"}
# Tree relations that, with `via EDGESET`, walk the edge set's graph any number of steps instead.
WALK_RELATIONS = {"under", "above"}
COREF_RELATIONS = {"same entity as", "antecedent of", "previous mention of"}
# Allen (1983): the thirteen interval relations.
TIME_RELATIONS = ALLEN_RELATIONS
# our own, beside Allen's strict ones (querylang/allen.py): "shares time with" is about time
# only; "inside ... in time" is containment where edges may coincide
OWN_TIME_RELATIONS = {"shares time with"}
TIME_ONLY = (TIME_RELATIONS | OWN_TIME_RELATIONS) - TEXT_RELATIONS   # the ones that need no "in time"


ANCHOR_COLUMNS = {"id": "int", "doc": "int", "sent": "int", "t_start": "float", "t_end": "float",
                  "tok_first": "int", "tok_last": "int", "word_first": "int", "word_last": "int"}
TREE_COLUMNS = {"parent": "int", "depth": "int", "pre": "int", "post": "int"}
# Derived values: written like attributes, computed by the compiler.
DERIVED = {"text": ("text", "str"), "start": ("time", "time"), "end": ("time", "time"),
           "duration": ("time", "time"), "char_start": ("offset", "int"), "char_end": ("offset", "int")}



@dataclass(frozen=True)
class Checked:
    """A query whose names are all resolved, with the layer of every variable."""

    query: ast.Query
    layers: dict[str, LayerInfo]                     # outer variables, in find order
    inner_layers: tuple[dict[str, LayerInfo], ...]  # variables of each without clause
    catalog: Catalog = field(compare=False)
    text: str = ""


ORDERING = {"<", "<=", ">", ">="}

#: the layer of sentences, whose nodes know their length in words (``s.words``)
SENTENCE_LAYER = "sentence"

#: names a query uses for stored columns: CoNLL-U's own words for its ID and HEAD (``id`` is the
#: CoNLL-U ID, see :func:`columns_of`), and ``node`` for strata's internal node number
QUERY_NAMES = {"node": "id", "head": "head_num"}
#: the parts of a constituent's label, spelled out (stored as ``cat`` and ``func``): ``NP-SBJ`` has
#: category ``NP`` and function ``SBJ``
TREE_NAMES = {"category": "cat", "function": "func"}
#: short names of earlier versions, answered with "did you mean"
OLD_NAMES = {stored: name for name, stored in TREE_NAMES.items()}


def columns_of(layer: LayerInfo) -> dict[str, str]:
    """Every column a query may name on this layer, with its type (query names, see QUERY_NAMES).

    ``id`` is the CoNLL-U ID where the layer has one: a number on syntactic words (the layer with
    the dependency tree, whose IDs are integers), text elsewhere (``1-2``, ``9.1``).  The
    internal node number is ``node``, so nobody takes it for a word's ID.
    """
    cols = {("node" if k == "id" else k): t for k, t in ANCHOR_COLUMNS.items()}
    if "cid" in layer.attrs:
        cols["id"] = "int" if layer.tree else "str"
    if "head_num" in layer.attrs:
        cols["head"] = "int"
    if layer.kind == "sequence":
        cols["ord"] = "int"
    if layer.tree:
        cols.update(TREE_COLUMNS)
    if layer.readings:
        cols["reading"] = "int"
    for name, info in layer.attrs.items():
        cols[name] = info.type
    for name, stored in TREE_NAMES.items():
        if stored in cols and layer.tree:
            cols[name] = cols.pop(stored)
    return cols


_REGEX_CON: duckdb.DuckDBPyConnection | None = None


def regex_problem(pattern: str) -> str | None:
    """Why the pattern is not a valid RE2 expression (the engine's dialect), or None."""
    global _REGEX_CON
    if _REGEX_CON is None:
        _REGEX_CON = duckdb.connect()
    try:
        _REGEX_CON.execute("SELECT regexp_matches('', $1)", [pattern]).fetchall()
    except duckdb.Error as err:
        text = str(err).strip().splitlines()[0]
        return text.split(":", 1)[-1].strip() if ":" in text else text
    return None


def suggest(name: str, candidates: list[str] | set[str]) -> str | None:
    """A "did you mean" hint, or None when nothing is close."""
    close = difflib.get_close_matches(name, sorted(candidates), n=3, cutoff=0.6)
    if not close:
        return None
    return "did you mean: " + ", ".join(close) + "?"


class _Checker:
    def __init__(self, catalog: Catalog, text: str) -> None:
        self.catalog = catalog
        self.text = text
        self.all_layers = catalog.layers()

    # ---- errors --------------------------------------------------------------
    def fail(self, message: str, pos: ast.Pos | None, hint: str | None = None) -> None:
        pos = pos or ast.NOWHERE
        raise StrataError(message, query=self.text, line=pos.line, column=pos.column, hint=hint)

    # ---- bindings --------------------------------------------------------------
    def layer(self, binding: ast.Binding) -> LayerInfo:
        info = self.all_layers.get(binding.layer)
        node_layers = [n for n, l in self.all_layers.items() if l.kind != "edges"]
        if info is None:
            hint = suggest(binding.layer, node_layers) or "layers: " + ", ".join(sorted(node_layers))
            self.fail(f"unknown layer {binding.layer!r}", binding.layer_pos, hint)
        if info.kind == "edges":
            self.fail(f"{binding.layer!r} is an edge set, not a layer of nodes; use it with "
                      f"`depends on ... via {binding.layer}`", binding.layer_pos)
        return info

    def bind(self, bindings: tuple[ast.Binding, ...], scope: dict[str, LayerInfo]) -> dict[str, LayerInfo]:
        own: dict[str, LayerInfo] = {}
        for b in bindings:
            if b.var in scope or b.var in own:
                self.fail(f"variable {b.var!r} is defined twice", b.pos)
            own[b.var] = self.layer(b)
        return own

    # ---- references ------------------------------------------------------------
    def resolve_attr(self, var: str, layer: LayerInfo, parts: tuple[str, ...], pos: ast.Pos,
                     written: str) -> ast.Ref:
        # a node's document is its name and its sentence its id, as the hit table shows them
        # (the stored numbers behind them are internal)
        if parts == ("doc",) and "name" in self.catalog.doc_attrs():
            return self._extra(var, "doc", "name", self.catalog.doc_attrs(), pos, written)
        if parts == ("sentence",) and "sent_id" in self.catalog.sentence_attrs():
            return self._extra(var, "sentence", "sent_id", self.catalog.sentence_attrs(), pos, written)
        # lengths in words (syntactic words, punctuation included), unless the data name their own
        if parts == ("sentence", "words") and "words" not in self.catalog.sentence_attrs():
            return ast.Ref(var, "sentence_words", "words", "int", pos, written)
        if parts == ("doc", "words") and "words" not in self.catalog.doc_attrs():
            return ast.Ref(var, "doc_words", "words", "int", pos, written)
        if parts == ("words",) and layer.name == SENTENCE_LAYER and "words" not in layer.attrs:
            return ast.Ref(var, "own_words", "words", "int", pos, written)
        if len(parts) > 1 and parts[0] == "sentence":
            return self._extra(var, "sentence", ".".join(parts[1:]), self.catalog.sentence_attrs(), pos, written)
        if len(parts) > 1 and parts[0] == "doc":
            return self._extra(var, "doc", ".".join(parts[1:]), self.catalog.doc_attrs(), pos, written)
        name = ".".join(parts)
        cols = columns_of(layer)
        if name == "id" and name in cols:
            return ast.Ref(var, "conllu_id", "cid", cols[name], pos, written)
        if name in cols:
            stored = TREE_NAMES.get(name, name) if layer.tree and name not in layer.attrs else name
            return ast.Ref(var, "column", QUERY_NAMES.get(stored, stored), cols[name], pos, written)
        if name == "phrase" and layer.tree and "deprel" in layer.attrs and name not in layer.attrs:
            return ast.Ref(var, "phrase", name, "str", pos, written)         # the dependency subtree's text
        if name == "chain_length" and "chain" in layer.attrs and name not in layer.attrs:
            return ast.Ref(var, "chain_length", name, "int", pos, written)     # mentions in the chain
        if name in DERIVED:
            kind, typ = DERIVED[name]
            if kind == "time" and not layer.time:
                self.fail(f"layer {layer.name!r} has no time stamps, so {written!r} has no value", pos)
            return ast.Ref(var, kind, name, typ, pos, written)
        # the layer's own attributes first; the values every node has only when none is close
        own = set(cols) - set(ANCHOR_COLUMNS) - set(TREE_COLUMNS) - {"node", "ord"}
        if "chain" in layer.attrs:
            own.add("chain_length")
        if layer.tree and "deprel" in layer.attrs:
            own.add("phrase")
        hint = suggest(name, own) or suggest(
            name, set(cols) | set(DERIVED) | {"sentence." + s for s in self.catalog.sentence_attrs()}
            | {"doc." + d for d in self.catalog.doc_attrs()} | {"sentence.words", "doc.words"})
        elsewhere = sorted(n for n, info in self.catalog.layers().items() if name in info.attrs and info.rows)
        if elsewhere:   # e.g. upos asked of surface tokens: it lives on the syntactic words
            where = (f"layer {elsewhere[0]!r}" if len(elsewhere) == 1 else
                     "layers " + ", ".join(repr(n) for n in elsewhere[:4]))
            hint = f"{name!r} is an attribute of {where}" + ("" if not hint else f"; {hint}")
        if name == "id":
            hint = f"layer {layer.name!r} has no CoNLL-U ID; strata's own node number is {var}.node"
        if name in OLD_NAMES and OLD_NAMES[name] in cols:
            hint = f"did you mean: {OLD_NAMES[name]}? (label is the whole label, e.g. NP-SBJ)"
        self.fail(f"layer {layer.name!r} has no attribute {name!r}", pos, hint)
        raise AssertionError

    def _extra(self, var: str, kind: str, name: str, attrs: dict[str, AttrInfo], pos: ast.Pos,
               written: str) -> ast.Ref:
        if name not in attrs:
            self.fail(f"{'sentences' if kind == 'sentence' else 'documents'} have no attribute {name!r}",
                      pos, suggest(name, set(attrs) | {"words"}) or (f"{kind} attributes: " + ", ".join(sorted(attrs)) if attrs else None))
        return ast.Ref(var, kind, name, attrs[name].type, pos, written)

    def node(self, expr: ast.Expr, scope: dict[str, LayerInfo]) -> ast.Ref:
        """A relation operand: a bare variable name."""
        if isinstance(expr, ast.Path) and len(expr.parts) == 1:
            name = expr.parts[0]
            if name not in scope:
                self.fail(f"unknown variable {name!r}", expr.pos,
                          suggest(name, set(scope)) or "variables: " + ", ".join(scope))
            return ast.Ref(name, "node", "", "node", expr.pos, name)
        self.fail("a relation joins two variables; write a variable name here, e.g. `a inside b`",
                  getattr(expr, "pos", None))
        raise AssertionError

    #: where aggregates may stand: set by querylang/outputs.py while it checks having and order by
    aggregates_allowed = False

    def expr(self, expr: ast.Expr, scope: dict[str, LayerInfo], own: str | None) -> ast.Expr:
        """Resolve a value; ``own`` is the variable whose binding parentheses we are in."""
        if isinstance(expr, ast.Literal):
            return expr
        if isinstance(expr, ast.Call):
            arg = self.expr(expr.arg, scope, own)
            if _type(arg) != "str":
                self.fail(f"{expr.name}() takes text, but {_written(arg)} is {_type_name(arg)}", expr.pos,
                          "e.g. lower(v.form)")
            return replace(expr, arg=arg)
        if isinstance(expr, ast.AggCall):
            if not self.aggregates_allowed:
                self.fail(f"`{expr.label}` is a value of a group of hits: it goes after `find ... where ...` "
                          "as the output, or in `having` and `order by`", expr.pos)
            return outputs.aggregate_call(self, expr, scope)
        if isinstance(expr, ast.Func):
            for v in (expr.a, expr.b):
                if v not in scope:
                    self.fail(f"unknown variable {v!r} in {expr.name}()", expr.pos, suggest(v, set(scope)))
            if expr.name == "gap":
                for v in (expr.a, expr.b):
                    if not scope[v].time:
                        self.fail(f"gap() needs time stamps; layer {scope[v].name!r} has none", expr.pos)
            if expr.name == "label":
                return replace(expr, edges=self.dependency_between(expr, scope))
            return expr
        assert isinstance(expr, ast.Path)
        if own is not None:
            return self.resolve_attr(own, scope[own], expr.parts, expr.pos, expr.text)
        var = expr.parts[0]
        if var not in scope:
            self.fail(f"unknown variable {var!r}", expr.pos,
                      suggest(var, set(scope)) or "variables: " + ", ".join(scope))
        if len(expr.parts) == 1:
            self.fail(f"{var!r} is a node; name one of its values, e.g. {var}.text", expr.pos)
        return self.resolve_attr(var, scope[var], expr.parts[1:], expr.pos, expr.text)

    # ---- conditions --------------------------------------------------------------
    def cond(self, cond: ast.Cond, scope: dict[str, LayerInfo], own: str | None) -> ast.Cond:
        if isinstance(cond, ast.And):
            return ast.And(tuple(self.cond(c, scope, own) for c in cond.items))
        if isinstance(cond, ast.Or):
            return ast.Or(tuple(self.cond(c, scope, own) for c in cond.items))
        if isinstance(cond, ast.Not):
            return ast.Not(self.cond(cond.item, scope, own))
        if isinstance(cond, ast.Compare):
            left, right = self.expr(cond.left, scope, own), self.expr(cond.right, scope, own)
            self.compatible(left, right, cond.op, cond.pos)
            return replace(cond, left=_in_seconds(left, right), right=_in_seconds(right, left))
        if isinstance(cond, ast.InList):
            expr = self.expr(cond.expr, scope, own)
            if not cond.values:
                self.fail("an empty list matches nothing; give at least one value", cond.pos)
            for v in cond.values:
                self.compatible(expr, v, "in", v.pos)
            return replace(cond, expr=expr, values=tuple(_in_seconds(v, expr) for v in cond.values))
        if isinstance(cond, ast.Matches):
            expr = self.expr(cond.expr, scope, own)
            if _type(expr) != "str":
                self.fail(f"a regular expression needs a text value, but {_written(expr)} is {_type_name(expr)}",
                          cond.pos, "compare numbers with =, <, > instead")
            problem = regex_problem(str(cond.pattern.value))
            if problem:
                self.fail(f"bad regular expression: {problem}", cond.pattern.pos,
                          "the syntax is RE2's (no look-around, no back-references)")
            return replace(cond, expr=expr)
        if isinstance(cond, ast.Missing):
            return replace(cond, expr=self.expr(cond.expr, scope, own))
        if isinstance(cond, ast.Root):
            if own is not None:
                self.fail("write `v is root` in the where clause", cond.pos)
            var = self.node(cond.subject, scope).var
            layer = scope[var]
            rel = ast.Relation("depends on", ast.Path((var,), cond.pos), ast.Path((var,), cond.pos),
                               label=cond.label, via=cond.via, pos=cond.pos, label_matches=cond.label_matches)
            via = self.edge_set(replace(rel, name="is root"), layer, layer)
            if cond.label_matches:
                problem = regex_problem(str(cond.label.value))
                if problem:
                    self.fail(f"bad regular expression: {problem}", cond.label.pos)
            return replace(cond, subject=ast.Ref(var, "node", "", "node", cond.pos, var), via=via)
        if isinstance(cond, ast.FirstMention):
            if cond.subject is None:
                if own is None:
                    self.fail("write `v is first mention` in a where clause", cond.pos)
                var = own
            else:
                if own is not None:
                    self.fail("inside a binding write just `first mention`", cond.pos)
                var = self.node(cond.subject, scope).var
            self.coref_layer(scope[var], cond.pos, need_first=True)
            return ast.FirstMention(ast.Ref(var, "node", "", "node", cond.pos, var), cond.pos)
        if isinstance(cond, ast.Relation):
            if own is not None:
                self.fail("relations between variables belong in the where clause", cond.pos)
            return self.relation(cond, scope)
        raise AssertionError(f"unknown condition {cond!r}")

    def compatible(self, left: ast.Expr, right: ast.Expr, op: str, pos: ast.Pos) -> None:
        """Explain a comparison that cannot mean anything (text vs number, wrong unit)."""
        for a, b in ((left, right), (right, left)):
            if isinstance(b, ast.Literal):
                ta = _type(a)
                if b.unit is not None:
                    if b.unit in TIME_UNITS and ta != "time":
                        self.fail(f"{_written(a)} is {_type_name(a)}, so the time unit {b.unit!r} does not apply",
                                  b.pos, "time units go with start, end, duration and gap(a, b)")
                    if b.unit in LENGTH_UNITS and ta != "length":
                        self.fail(f"{_written(a)} is {_type_name(a)}, so the unit {b.unit!r} does not apply",
                                  b.pos, "word, token and char units go with distance(a, b)")
                    continue
                tb = _type(b)
                # the caret goes under the comparison; in a list, under the value
                at = b.pos if op == "in" else pos
                if ta == "str" and tb in NUMERIC | {"literal_number"}:
                    if op in ORDERING:   # quoting would make it a comparison of text, by code point
                        self.fail(f"{_written(a)} is text and {b.value!r} a number: text has no numeric order",
                                  at, "compare a number attribute, or the length of the text: length(x) > 3")
                    self.fail(f"{_written(a)} is text but {b.value!r} is a number", at,
                              f'to compare the text, write "{b.value}"')
                if ta in NUMERIC and tb == "str":
                    self.fail(f"{_written(a)} is a number but {b.value!r} is text", at,
                              "write the number without quotes")
                if ta == "bool" and tb != "bool":
                    self.fail(f"{_written(a)} is true or false", at, "compare with true or false")
                if ta != "bool" and tb == "bool" and ta != "literal":
                    self.fail(f"{_written(a)} is {_type_name(a)}, not true or false", at,
                              "compare with a value of its kind")
        if not isinstance(left, ast.Literal) and not isinstance(right, ast.Literal):
            kinds = {_type(left), _type(right)}
            if "str" in kinds and kinds & NUMERIC:
                self.fail(f"{_written(left)} and {_written(right)} are not comparable: one is text, the other "
                          "a number", pos)
            if "bool" in kinds and len(kinds) > 1:
                self.fail(f"{_written(left)} and {_written(right)} are not comparable: one is true or false, "
                          "the other is not", pos)
            if ("time" in kinds and "length" in kinds):
                self.fail("a time is compared with a distance", pos)
        if op in ORDERING and "bool" in (_type(left), _type(right)):
            self.fail("true/false values have no order", pos)

    def coref_layer(self, layer: LayerInfo, pos: ast.Pos, need_first: bool = False) -> None:
        need = ["chain", "chain_pos"] + (["first_mention"] if need_first else [])
        missing = [c for c in need if c not in layer.attrs]
        if missing:
            self.fail(f"layer {layer.name!r} has no coreference chains (no {', '.join(missing)} column)", pos,
                      "coreference relations work on mention layers")

    def relation(self, rel: ast.Relation, scope: dict[str, LayerInfo]) -> ast.Relation:
        left, right = self.node(rel.left, scope), self.node(rel.right, scope)
        la, lb = scope[left.var], scope[right.var]
        name = rel.name
        is_time = name in TIME_ONLY or (name in ("overlaps", "contains", "inside") and rel.in_time)
        if rel.in_time and not is_time:
            self.fail(f"`{name}` is not a time relation; `in time` goes with Allen's relations", rel.pos)
        if rel.depth is not None and name not in ("under", "above"):
            self.fail("`at depth` goes with `under` and `above`", rel.pos)
        if rel.depth is not None and not (1 <= rel.depth[0] <= rel.depth[1]):
            self.fail("depth range must be 1..n with the smaller number first", rel.pos)
        walk = name in WALK_RELATIONS and rel.via is not None
        if rel.via is not None and name not in DEPENDENCY_RELATIONS | WALK_RELATIONS:
            self.fail("`via` goes with `depends on`, `governs`, `under` and `above`", rel.pos)
        if rel.label is not None and not (name in DEPENDENCY_RELATIONS or walk):
            hint = f"name the edge set the walk follows: `a {name} b via dep as ...`" if name in WALK_RELATIONS else None
            self.fail("`as` goes with `depends on`, `governs`, and `under`/`above` with `via`", rel.pos, hint)
        check_modifiers(rel, is_time, la, lb, self.fail)
        if rel.label_matches:
            problem = regex_problem(str(rel.label.value))
            if problem:
                self.fail(f"bad regular expression: {problem}", rel.label.pos,
                          "the syntax is RE2's (no look-around, no back-references)")
        via = rel.via
        if is_time:
            for info in (la, lb):
                if not info.time:
                    self.fail(f"`{name}` compares time spans, but layer {info.name!r} has no time stamps", rel.pos)
        elif walk:
            via = self.edge_set(rel, la, lb)
        elif name in TREE_RELATIONS:
            if not (la.tree and lb.tree):
                bad = la if not la.tree else lb
                self.fail(f"`{name}` needs a tree; layer {bad.name!r} has none", rel.pos)
            if la.name != lb.name:
                self.fail(f"`{name}` relates nodes of the same tree, but {left.var} is {la.name!r} and "
                          f"{right.var} is {lb.name!r}", rel.pos)
        elif name in DEPENDENCY_RELATIONS:
            via = self.edge_set(rel, la, lb)
        elif name in COREF_RELATIONS:
            self.coref_layer(la, rel.pos)
            self.coref_layer(lb, rel.pos)
        elif name in ("directly precedes", "directly follows"):
            empties = [l for l in (la, lb) if is_empty_layer(l)]
            if empties:
                other = next((l for l in (la, lb) if not (is_empty_layer(l) or is_word_layer(l))), None)
                if other is not None or (len(empties) == 2 and la.name != lb.name):
                    self.fail(f"`{name}` orders empty nodes among the lines of their CoNLL-U sentence, so it "
                              f"relates them to words ({empties[0].word_layer!r}) and to each other only", rel.pos)
            elif _adjacency_layer(la, lb) is None:
                self.fail(f"cannot tell adjacency between {la.name!r} and {lb.name!r}: they count no common "
                          "token layer", rel.pos)
        return normalised(replace(rel, left=left, right=right, via=via, in_time=is_time))

    def dependency_between(self, func: ast.Func, scope: dict[str, LayerInfo]) -> ast.Relation:
        """The dependency relation of the where clause that joins label(a, b)'s two variables."""
        for atom in ast.atoms(self.where):
            if (isinstance(atom, ast.Relation) and atom.name in DEPENDENCY_RELATIONS and
                    {getattr(atom.left, "parts", (None,))[0], getattr(atom.right, "parts", (None,))[0]}
                    == {func.a, func.b}):
                return self.relation(atom, scope)
        self.fail(f"label({func.a}, {func.b}) is the label of the edges that join {func.a} and {func.b}, and the "
                  f"query relates them by none", func.pos,
                  f"join them first: `where {func.a} depends on {func.b}` (via an edge set if need be)")
        raise AssertionError

    def edge_set(self, rel: ast.Relation, la: LayerInfo, lb: LayerInfo) -> str:
        """The edge set a dependency relation or walk follows; both layers must be its nodes."""
        edges = {n: l for n, l in self.all_layers.items() if l.kind == "edges"}
        if rel.via is not None:
            if rel.via not in edges:
                self.fail(f"unknown edge set {rel.via!r}", rel.pos,
                          suggest(rel.via, set(edges)) or ("edge sets: " + ", ".join(sorted(edges)) if edges else None))
            chosen = rel.via
        else:
            offered = [e for e in la.edge_sets if e in lb.edge_sets] or list(la.edge_sets) or list(lb.edge_sets)
            if not offered:
                which = f"layer {la.name!r} has none" if la.name == lb.name else \
                    f"neither {la.name!r} nor {lb.name!r} has any"
                self.fail(f"`{rel.name}` follows dependency edges, and {which}",
                          rel.pos, "edge sets: " + ", ".join(sorted(edges)) if edges else "this corpus has no edge sets")
            chosen = "dep" if "dep" in offered else offered[0]
        for layer in (la, lb):
            if chosen not in layer.edge_sets:
                joined = sorted(n for n, l in self.all_layers.items() if chosen in l.edge_sets)
                self.fail(f"`{rel.name}` follows the edges of {chosen!r}, which join nodes of "
                          f"{', '.join(repr(j) for j in joined) or 'no layer'}; layer {layer.name!r} has none",
                          rel.pos, "relate it to those nodes with a text or time relation, e.g. `inside`")
        return chosen

    # ---- the whole query -----------------------------------------------------------------
    #: the where clause as written (label(a, b) looks its edges up there)
    where: ast.Cond | None = None

    def check(self, query: ast.Query) -> Checked:
        self.where = query.where
        scope = self.bind(query.bindings, {})
        bindings = tuple(
            replace(b, cond=self.cond(b.cond, scope, b.var) if b.cond is not None else None)
            for b in query.bindings)
        where = self.cond(query.where, scope, None) if query.where is not None else None
        withouts: list[ast.Without] = []
        inner_layers: list[dict[str, LayerInfo]] = []
        for w in query.withouts:
            own = self.bind(w.bindings, scope)
            inner = {**scope, **own}
            wb = tuple(replace(b, cond=self.cond(b.cond, inner, b.var) if b.cond is not None else None)
                       for b in w.bindings)
            wc = self.cond(w.cond, inner, None) if w.cond is not None else None
            withouts.append(ast.Without(wb, wc))
            inner_layers.append(own)
        if query.qualifiers & {"same reading", "every reading"}:
            if not any(l.readings for l in scope.values()):
                pos = query.bindings[0].pos if query.bindings else None
                self.fail("`in the same reading` / `in every reading` need a variable on a layer with "
                          "alternative readings", pos)
        if query.limit is not None and query.limit < 0:
            self.fail("limit must not be negative", None)
        checked = replace(query, bindings=bindings, where=where, withouts=tuple(withouts),
                          **outputs.check_outputs(self, query, scope))
        if "cross product" not in query.qualifiers:
            self.connected(checked, scope)
        return Checked(checked, scope, tuple(inner_layers), self.catalog, self.text)

    def connected(self, query: ast.Query, scope: dict[str, LayerInfo]) -> None:
        """Refuse an accidental cross product: every variable must be related to the others."""
        parent = {v: v for v in scope}

        def find(v: str) -> str:
            while parent[v] != v:
                parent[v] = parent[parent[v]]
                v = parent[v]
            return v

        for a, b in related_pairs(query.where, set(scope)):
            parent[find(b)] = find(a)
        if query.qualifiers & {"same reading", "every reading"}:
            by_layer: dict[str, list[str]] = {}
            for v, info in scope.items():
                if info.readings:
                    by_layer.setdefault(info.name, []).append(v)
            for vs in by_layer.values():
                for v in vs[1:]:
                    parent[find(v)] = find(vs[0])
        groups: dict[str, list[str]] = {}
        for v in scope:
            groups.setdefault(find(v), []).append(v)
        if len(groups) > 1:
            parts = list(groups.values())
            a, b = parts[0][0], parts[1][0]
            binding = next(bd for bd in query.bindings if bd.var == b)
            self.fail(f"{a!r} and {b!r} are not related, so every pair of them would match (a cross product)",
                      binding.pos, f"relate them, e.g. `where {b} inside {a}`, or add `allow cross product`; a test "
                      "under `not`, or in only one branch of `or`, does not relate them")


def _adjacency_layer(la: LayerInfo, lb: LayerInfo) -> str | None:
    """The token layer in which "directly precedes" is decided (None if the layers share none)."""
    def counted(layer: LayerInfo) -> set[str]:
        out = {x for x in (layer.token_layer, layer.word_layer) if x}
        if layer.kind == "sequence":
            out.add(layer.name)
        return out
    if la.kind == "sequence" and la.name == lb.name:
        return la.name
    common = counted(la) & counted(lb)
    # syntactic words (the layers' word_layer) first: the finer sequence, where UD relations live
    for preferred in (la.word_layer, lb.word_layer, la.token_layer, lb.token_layer):
        if preferred in common:
            return preferred
    return sorted(common)[0] if common else None


def _in_seconds(value: ast.Expr, other: ast.Expr) -> ast.Expr:
    """A bare number compared with a time is in seconds: give it the unit, so the compiler
    turns it into whole microseconds like ``300ms`` or ``0.3s``."""
    if (isinstance(value, ast.Literal) and value.unit is None and isinstance(value.value, (int, float))
            and not isinstance(value.value, bool) and is_time(other)):
        return replace(value, unit="s")
    return value


def related_pairs(cond: ast.Cond | None, variables: set[str]) -> set[tuple[str, str]]:
    """Pairs of variables that every match has related: by a test on both in an ``and``, or in
    every branch of an ``or``; never under ``not`` (``not a precedes b`` holds for almost every
    pair).  Transitive closure is the caller's (union-find).  On a checked condition.
    """
    if cond is None or isinstance(cond, ast.Not):
        return set()
    if isinstance(cond, ast.And):
        return set().union(*(related_pairs(c, variables) for c in cond.items))
    if isinstance(cond, ast.Or):
        branches = [_components(related_pairs(c, variables), variables) for c in cond.items]
        return {(a, b) for a in sorted(variables) for b in sorted(variables)
                if a < b and all(br[a] == br[b] for br in branches)}
    vs = sorted(ast.vars_in(cond) & variables)
    return {(vs[0], v) for v in vs[1:]}


def _components(pairs: set[tuple[str, str]], variables: set[str]) -> dict[str, str]:
    """Each variable's component (a representative) under the pairs."""
    comp = {v: v for v in variables}

    def find(v: str) -> str:
        while comp[v] != v:
            v = comp[v]
        return v
    for a, b in pairs:
        comp[find(b)] = find(a)
    return {v: find(v) for v in variables}


def check(query: ast.Query, catalog: Catalog, text: str = "") -> Checked:
    """Resolve and check every name and type in ``query``."""
    return _Checker(catalog, text).check(query)
