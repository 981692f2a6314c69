"""Join order from catalog statistics: the most selective variable first, then its neighbours.

DuckDB reorders joins itself; the plan still matters for two reasons: it is what
``strata explain`` shows, and it fixes the FROM order DuckDB starts from when its own
estimates tie.  Estimates are deliberately simple (common practice in textbook query
optimisers): an equality test keeps 1/n_distinct of the rows, an ``in`` list k/n_distinct,
any other test half of them.

The planner also decides whether a listing with a limit may run on a few documents at a
time (:func:`document_locality`); the execution layer does the widening.
"""
from __future__ import annotations

from dataclasses import dataclass

from querylang import ast
from querylang.checker import Checked

OTHER_TEST_SELECTIVITY = 0.5   # rule of thumb for tests we cannot estimate

#: Relations whose SQL itself confines both nodes to one document: ranges on the global line
#: (documents never share a character, DEVELOPERS.md "Global anchors") or a ``doc`` equality
#: (precedes, directly precedes, every relation "in time").
SAME_DOCUMENT_RELATIONS = {"inside", "contains", "overlaps", "same span as", "precedes", "follows",
                           "directly precedes", "directly follows"}
#: Relations over tree columns and edge sets: only the CoNLL-U and bracket importers write them,
#: one tree (and its HEAD/DEPS edges) per sentence, and the table importers refuse those column
#: names, so both ends are in one document.  Coreference is left out on purpose: ``chain`` is an
#: ordinary column a spans or tiers table may carry, with no promise about documents.
SENTENCE_STRUCTURE_RELATIONS = {"child of", "parent of", "sibling of", "under", "above",
                                "depends on", "governs"}


@dataclass(frozen=True)
class Plan:
    order: tuple[str, ...]          # variables in join order
    estimates: dict[str, float]     # estimated rows of each variable after its own tests
    aliases: dict[str, str]         # variable -> SQL alias (generated, never user text)
    document_local: bool = False    # every hit lies in one document: a limit may run windowed
    locality: str = ""              # why (or why not), for ``strata explain``


def document_locality(query: ast.Query) -> tuple[bool, str]:
    """Whether the where-clause ties every variable of a hit to one document, and why.

    Only top-level ``and`` items count (a relation under ``or``/``not`` ties nothing).  When
    it holds, the hits whose variables all lie in documents ``lo <= doc < hi`` are exactly
    the hits whose first character lies in those documents' range of the global line, so
    a listing can be computed window by window in document order.
    """
    variables = [b.var for b in query.bindings]
    if "every reading" in query.qualifiers:
        return False, "not windowed: 'in every reading' compares readings across the whole corpus"
    group = {v: v for v in variables}

    def root(v: str) -> str:
        while group[v] != v:
            v = group[v]
        return v
    for atom in ast.conjuncts(query.where):
        if not isinstance(atom, ast.Relation):
            continue
        if not (atom.in_time or atom.name in SAME_DOCUMENT_RELATIONS or atom.name in SENTENCE_STRUCTURE_RELATIONS):
            continue
        if not (isinstance(atom.left, ast.Ref) and isinstance(atom.right, ast.Ref)):
            continue
        a, b = atom.left.var, atom.right.var
        if a in group and b in group:
            group[root(a)] = root(b)
    roots = {root(v) for v in variables}
    if len(roots) == 1:
        if len(variables) == 1:
            return True, "windowed: one variable, so every hit lies in one document"
        return True, "windowed: the relations of the where-clause tie every variable to one document"
    groups = [", ".join(v for v in variables if root(v) == r) for r in sorted(roots, key=variables.index)]
    return False, (f"not windowed: nothing ties {' | '.join(groups)} to one document "
                   f"(only range, order, time, tree and dependency relations joined by 'and' do)")


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
    local, why = document_locality(query)
    return Plan(tuple(order), est, aliases, local, why)
