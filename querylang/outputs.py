"""The output clauses, checked: ``show``, aggregates ``per`` group with ``having``, ``order by``
and ``sample``.

A pass of its own beside the checker of names (querylang/checker.py, which calls
:func:`check_outputs`), because these clauses follow their own rules: an aggregate stands
only in the output, in ``having`` and in ``order by``; ``having`` may name only aggregates
and group keys; ``order by`` names an output column; ``rate`` groups by documents or
sentences, whose words it counts.
"""
from __future__ import annotations

from dataclasses import replace
from typing import TYPE_CHECKING

from querylang import ast
from querylang.catalog import LayerInfo
from querylang.types import NUMERIC, type_name, type_of, written

if TYPE_CHECKING:
    from querylang.checker import _Checker

#: aggregates that need numbers (a time is a number of microseconds)
NUMERIC_AGGREGATES = {"mean", "sum", "median", "stdev", "quantile"}
#: the per-variable columns of a listing's hit table, as resolved references (kind, name)
HIT_COLUMNS = {("text", "text"), ("offset", "char_start"), ("offset", "char_end"), ("time", "start"),
               ("time", "end"), ("doc", "name"), ("sentence", "sent_id"), ("column", "id"),
               ("column", "reading"), ("conllu_id", "cid")}
CONTEXT_SIDES = ("left", "right")


def check_outputs(ck: "_Checker", query: ast.Query, scope: dict[str, LayerInfo]) -> dict[str, object]:
    """The query's ``output``, ``order`` and ``sample``, resolved (fields of :class:`ast.Query`)."""
    output = _output(ck, query.output, scope)
    order = _order(ck, query.order, output, scope)
    if query.sample is not None and query.sample.size < 1:
        ck.fail("a sample needs at least 1 hit", query.sample.pos)
    return {"output": output, "order": order, "sample": query.sample}


def words_layer(layers: dict[str, LayerInfo]) -> str | None:
    """The layer of syntactic words that ``rate`` counts: the one other layers name as their
    words (CoNLL-U's), else a sequence layer called ``word``."""
    named = sorted({l.word_layer for l in layers.values() if l.word_layer and l.word_layer in layers})
    if named:
        return named[0]
    word = layers.get("word")
    return "word" if word is not None and word.kind == "sequence" else None


# ---- show and aggregates ---------------------------------------------------------------

def _item(ck: "_Checker", item: ast.ShowItem, scope: dict[str, LayerInfo]) -> ast.ShowItem:
    e = item.expr
    if isinstance(e, ast.Path) and len(e.parts) == 1 and e.parts[0] in scope:
        e = ast.Path((e.parts[0], "text"), e.pos)   # a bare variable shows its text
    if isinstance(e, ast.Literal):
        ck.fail("show a value of a variable, e.g. v.form", e.pos)
    return ast.ShowItem(ck.expr(e, scope, None), item.label)


def aggregate_call(ck: "_Checker", call: ast.AggCall, scope: dict[str, LayerInfo]) -> ast.AggCall:
    """Resolve the argument of one aggregate (no aggregate inside another)."""
    if call.func in ("count", "rate"):
        return call
    if call.q is not None and call.func != "quantile":
        ck.fail(f"{call.func}() takes one value; only quantile(x, q) takes a second number", call.pos)
    if call.func == "quantile" and (call.q is None or not 0 <= call.q <= 1):
        ck.fail("quantile(x, q) needs q between 0 and 1, e.g. quantile(p.duration, 0.9)", call.pos)
    arg = call.arg
    allowed, ck.aggregates_allowed = ck.aggregates_allowed, False
    try:
        if call.func == "count distinct" and isinstance(arg, ast.Path) and len(arg.parts) == 1:
            var = ck.node(arg, scope).var      # count distinct v: its distinct nodes
            return replace(call, arg=ast.Ref(var, "node", "", "node", arg.pos, var))
        arg = ck.expr(arg, scope, None)
    finally:
        ck.aggregates_allowed = allowed
    if call.func in NUMERIC_AGGREGATES and type_of(arg) not in NUMERIC:
        ck.fail(f"{call.func}() needs numbers, but {written(arg)} is {type_name(arg)}", getattr(arg, "pos", call.pos))
    return replace(call, arg=arg)


def _output(ck: "_Checker", out: ast.Output | None, scope: dict[str, LayerInfo]) -> ast.Output | None:
    if out is None:
        return None
    if isinstance(out, ast.Show):
        return ast.Show(tuple(_item(ck, i, scope) for i in out.items))
    per = tuple(_item(ck, i, scope) for i in out.per)
    ck.aggregates_allowed = True
    try:
        items = tuple(ast.AggItem(aggregate_call(ck, i.call, scope), i.label) for i in out.items)
        having = ck.cond(out.having, scope, None) if out.having is not None else None
    finally:
        ck.aggregates_allowed = False
    labels = [i.label for i in per] + [i.label for i in items]
    twice = next((x for x in labels if labels.count(x) > 1), None)
    if twice is not None:
        places = [i.expr.pos for i in per if i.label == twice] + [i.call.pos for i in items if i.label == twice]
        ck.fail(f"two output columns are called {twice!r}", places[-1], "name one of them with `as`")
    _check_rate(ck, items, per)
    if having is not None:
        _check_having(ck, having, per, out.having_pos)
    return ast.Aggregate(items, per, having, out.having_pos)


def _check_rate(ck: "_Checker", items: tuple[ast.AggItem, ...], per: tuple[ast.ShowItem, ...]) -> None:
    rates = [i.call for i in items if i.call.func == "rate"]
    if not rates:
        return
    if len(rates) > 1:
        ck.fail("`rate` is given twice", rates[1].pos)
    pos = rates[0].pos
    if not per:
        ck.fail("`rate` needs groups of documents or sentences: e.g. `rate per w.doc` or `rate per w.doc.genre`",
                pos)
    for key in per:
        e = key.expr
        if not (isinstance(e, ast.Ref) and e.kind in ("doc", "sentence")):
            ck.fail(f"`rate` counts the words of each group, so groups are documents or sentences; "
                    f"{written(e)} is not an attribute of either", getattr(e, "pos", pos),
                    f"e.g. `rate per {_first_var(e)}.doc.genre` or `per {_first_var(e)}.sentence.speaker`")
    if words_layer(ck.all_layers) is None:
        ck.fail("`rate` is per 1,000 syntactic words, but this corpus has no layer of words", pos)


def _first_var(e: ast.Expr) -> str:
    return e.var if isinstance(e, ast.Ref) else "w"


def _check_having(ck: "_Checker", cond: ast.Cond, per: tuple[ast.ShowItem, ...], pos: ast.Pos) -> None:
    """``having`` tests groups: every value in it is an aggregate or a group key."""
    keys = {i.expr for i in per}
    for atom in ast.atoms(cond):
        if isinstance(atom, ast.Relation) or isinstance(atom, ast.FirstMention):
            ck.fail("relations and `first mention` test hits, in `where`; `having` tests groups, "
                    "e.g. `having count >= 5`", atom.pos)
        values = [getattr(atom, f) for f in ("left", "right", "expr") if hasattr(atom, f)]
        for v in values:
            if isinstance(v, (ast.Literal, ast.AggCall)) or v in keys:
                continue
            ck.fail(f"{written(v)} is a value of single hits, not of a group", getattr(v, "pos", None),
                    "test hits in `where`; `having` takes aggregates (count, mean(...)) and the `per` keys")
    if not any(isinstance(v, ast.AggCall) for a in ast.atoms(cond)
               for v in (getattr(a, f, None) for f in ("left", "right", "expr"))):
        ck.fail("`having` needs an aggregate, e.g. `having count >= 5`", pos)


# ---- order by --------------------------------------------------------------------------

def _order(ck: "_Checker", order: tuple[ast.OrderItem, ...], output: ast.Output | None,
           scope: dict[str, LayerInfo]) -> tuple[ast.OrderItem, ...]:
    """Each key resolved: for aggregates the label of an output column; for listings an
    expression of the hit table, or ``left`` / ``right``."""
    return tuple(_order_key(ck, item, output, scope) for item in order)


def _order_key(ck: "_Checker", item: ast.OrderItem, output: ast.Output | None,
               scope: dict[str, LayerInfo]) -> ast.OrderItem:
    key = item.expr
    if isinstance(output, ast.Aggregate):
        columns = [i.label for i in output.per] + [i.label for i in output.items]
        columns += [c for c in ("count",) if c not in columns]
        if any(i.call.func == "rate" for i in output.items):
            columns.append("words")
        if key in CONTEXT_SIDES:
            ck.fail(f"`order by {key}` sorts a listing of hits by their context; groups have no context",
                    item.pos, "order groups by a column: " + ", ".join(columns))
        if isinstance(key, ast.Path) and key.text in columns:
            return replace(item, expr=key.text)
        if isinstance(key, ast.AggCall):
            ck.aggregates_allowed = True
            try:
                call = aggregate_call(ck, key, scope)
            finally:
                ck.aggregates_allowed = False
            found = next((i.label for i in output.items if i.call == call), None)
            if found is None and call.func in ("count", "rate"):
                found = call.func if call.func in columns else None
            if found is not None:
                return replace(item, expr=found)
        else:
            resolved = ck.expr(_bare_text(key, scope), scope, None)
            found = next((i.label for i in output.per if i.expr == resolved), None)
            if found is not None:
                return replace(item, expr=found)
        ck.fail(f"`order by` names an output column, and {written(key)} is not one", item.pos,
                "columns: " + ", ".join(columns))
    if key in CONTEXT_SIDES:
        return item
    shown = output.items if isinstance(output, ast.Show) else ()
    if isinstance(key, ast.Path) and len(key.parts) == 1 and key.text in {i.label for i in shown}:
        return replace(item, expr=next(i.expr for i in shown if i.label == key.text))
    resolved = ck.expr(_bare_text(key, scope), scope, None)
    if any(i.expr == resolved for i in shown) or (
            isinstance(resolved, ast.Ref) and (resolved.kind, resolved.name) in HIT_COLUMNS):
        return replace(item, expr=resolved)
    ck.fail(f"`order by` names a column of the hit table, and {written(resolved)} is not one", item.pos,
            f"show it first (`show {written(resolved)}`), or order by left, right, or a variable's text, "
            "start, end, doc or sentence")
    raise AssertionError


def _bare_text(key: ast.Expr, scope: dict[str, LayerInfo]) -> ast.Expr:
    """A bare variable in ``order by`` is its text, as in ``show``."""
    if isinstance(key, ast.Path) and len(key.parts) == 1 and key.parts[0] in scope:
        return ast.Path((key.parts[0], "text"), key.pos)
    return key
