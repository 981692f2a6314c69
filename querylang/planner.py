"""Join order from catalog statistics: the most selective variable first, then its neighbours.

DuckDB reorders joins itself; the plan still matters for two reasons: it is what
``strata explain`` shows, and it fixes the FROM order DuckDB starts from when its own
estimates tie.  Estimates are deliberately simple (common practice in textbook query
optimisers): an equality test keeps 1/n_distinct of the rows, an ``in`` list k/n_distinct,
any other test half of them.
"""
from __future__ import annotations

from dataclasses import dataclass

from querylang import ast
from querylang.checker import Checked

OTHER_TEST_SELECTIVITY = 0.5   # rule of thumb for tests we cannot estimate


@dataclass(frozen=True)
class Plan:
    order: tuple[str, ...]          # variables in join order
    estimates: dict[str, float]     # estimated rows of each variable after its own tests
    aliases: dict[str, str]         # variable -> SQL alias (generated, never user text)


def selectivity(cond: ast.Cond | None, layer_attrs: dict) -> float:
    """Fraction of a layer's rows a binding condition keeps (rough, for ordering only)."""
    if cond is None:
        return 1.0
    if isinstance(cond, ast.And):
        out = 1.0
        for c in cond.items:
            out *= selectivity(c, layer_attrs)
        return out
    if isinstance(cond, ast.Or):
        return min(1.0, sum(selectivity(c, layer_attrs) for c in cond.items))
    if isinstance(cond, ast.Not):
        return max(0.0, 1.0 - selectivity(cond.item, layer_attrs))
    if isinstance(cond, (ast.Compare, ast.InList)):
        ref = cond.left if isinstance(cond, ast.Compare) else cond.expr
        info = layer_attrs.get(ref.name) if isinstance(ref, ast.Ref) and ref.kind == "column" else None
        n = info.n_distinct if info is not None and info.n_distinct else None
        if isinstance(cond, ast.Compare) and cond.op == "=" and n:
            return 1.0 / n
        if isinstance(cond, ast.InList) and n:
            k = min(len(cond.values) / n, 1.0)
            return 1.0 - k if cond.negated else k
    return OTHER_TEST_SELECTIVITY


def plan(checked: Checked) -> Plan:
    """Order the outer variables: cheapest first, then always a neighbour of the chosen set."""
    query = checked.query
    est: dict[str, float] = {}
    for b in query.bindings:
        info = checked.layers[b.var]
        est[b.var] = max(float(info.rows or 1), 1.0) * selectivity(b.cond, info.attrs)
    edges: dict[str, set[str]] = {v: set() for v in est}
    for atom in ast.conjuncts(query.where):
        vs = ast.vars_in(atom) & set(est)
        for v in vs:
            edges[v] |= vs - {v}
    order: list[str] = []
    remaining = set(est)
    while remaining:
        frontier = {v for v in remaining if edges[v] & set(order)} if order else set()
        pool = frontier or remaining
        nxt = min(pool, key=lambda v: (est[v], list(est).index(v)))
        order.append(nxt)
        remaining.discard(nxt)
    aliases = {b.var: f"v{i}" for i, b in enumerate(query.bindings)}
    return Plan(tuple(order), est, aliases)
