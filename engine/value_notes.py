"""Notes on values a query asks for that no node has: `upos = "VREB"` runs (it is a valid
query, and finds nothing), and the user is told the nearest values that do occur.

Only text attributes with few distinct values are looked at (the catalog's statistics say how
many: at most :data:`MAX_VALUES`), so the values of one attribute are read once per corpus
state with one GROUP BY and remembered until the corpus changes; open-ended attributes
(forms, lemmas) are not: a form missing from a corpus is an answer, not a slip.
"""
from __future__ import annotations

import difflib

import duckdb

from querylang import ast
from querylang.catalog import AttrInfo
from querylang.sqltext import DOC_VIEW, SENTENCE_VIEW, ident

MAX_VALUES = 2000
NEAREST = 3


def value_notes(con: duckdb.DuckDBPyConnection, catalog, checked) -> tuple[str, ...]:
    """One note per asked-for value that no node of its layer has."""
    notes: list[str] = []
    q = checked.query
    layers = dict(checked.layers)
    for inner in checked.inner_layers:
        layers.update(inner)
    conds = [b.cond for b in q.bindings] + [q.where] + [b.cond for w in q.withouts for b in w.bindings] + \
            [w.cond for w in q.withouts]
    for cond in conds:
        for ref, values in _asked(cond):
            where = _column(ref, layers, catalog)
            if where is None:
                continue
            view, column, info, what = where
            if info.n_distinct is None or info.n_distinct > MAX_VALUES:
                continue
            present = _values(con, catalog, view, column)
            for v in values:
                if v in present:
                    continue
                near = difflib.get_close_matches(v, list(present), n=NEAREST, cutoff=0.5) or \
                    sorted(present, key=lambda x: -present[x])[:NEAREST]
                notes.append(f"no {what} has {ref.written or ref.name} = {v!r}; the nearest values that occur: "
                             + ", ".join(repr(n) for n in near))
    return tuple(dict.fromkeys(notes))


def _asked(cond):
    """(reference, text values) of the equality tests and `in` lists of a condition."""
    for atom in ast.atoms(cond):
        if isinstance(atom, ast.Compare) and atom.op == "=":
            for a, b in ((atom.left, atom.right), (atom.right, atom.left)):
                if isinstance(a, ast.Ref) and isinstance(b, ast.Literal) and isinstance(b.value, str):
                    yield a, [b.value]
        elif isinstance(atom, ast.InList) and not atom.negated and isinstance(atom.expr, ast.Ref):
            values = [v.value for v in atom.values if isinstance(v.value, str)]
            if values:
                yield atom.expr, values


def _column(ref: ast.Ref, layers, catalog) -> tuple[str, str, AttrInfo, str] | None:
    """(view, stored column, its statistics, what a node of it is called) for a reference."""
    if ref.type != "str":
        return None
    if ref.kind == "column":
        layer = layers.get(ref.var)
        info = layer.attrs.get(ref.name) if layer is not None else None
        return (layer.name, ref.name, info, f"node of {layer.name!r}") if info is not None else None
    if ref.kind == "sentence":
        info = catalog.sentence_attrs().get(ref.name)
        return (SENTENCE_VIEW, ref.name, info, "sentence") if info is not None else None
    if ref.kind == "doc" and ref.name != "name":
        info = catalog.doc_attrs().get(ref.name)
        return (DOC_VIEW, ref.name, info, "document") if info is not None else None
    return None


def _values(con: duckdb.DuckDBPyConnection, catalog, view: str, column: str) -> dict[str, int]:
    """Value -> count, remembered in the catalog's memo (forgotten when the corpus changes)."""
    memo = getattr(catalog, "_memo", None)
    key = ("values", view, column)
    if memo is not None and key in memo:
        return memo[key]
    rows = con.execute(f"SELECT {ident(column)}, count(*) FROM {ident(view)} WHERE {ident(column)} IS NOT NULL "
                       f"GROUP BY 1 LIMIT {MAX_VALUES + 1}").fetchall()
    out = {str(v): n for v, n in rows}
    if memo is not None:
        memo[key] = out
    return out
