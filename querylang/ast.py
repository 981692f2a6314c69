"""The query as data: frozen dataclasses built by the parser, refined by the checker.

The parser leaves every attribute reference as a :class:`Path` (names as written);
the checker replaces each with a :class:`Ref` that says which variable, which kind of
value (a column, a sentence or document attribute, a derived value) and its type, so
the compiler never has to look names up again.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Union


@dataclass(frozen=True)
class Pos:
    """1-based line and column in the query text (for error carets)."""

    line: int = 1
    column: int = 1


NOWHERE = Pos()


# ---- values -----------------------------------------------------------------

@dataclass(frozen=True)
class Literal:
    """A string, number (with an optional unit such as ``ms`` or ``words``) or boolean."""

    value: str | int | float | bool
    unit: str | None = None
    pos: Pos = field(default=NOWHERE, compare=False)


@dataclass(frozen=True)
class Path:
    """A dotted name as written: ``v.lemma``, ``feats.Number``, ``sentence.speaker``."""

    parts: tuple[str, ...]
    pos: Pos = field(default=NOWHERE, compare=False)

    @property
    def text(self) -> str:
        return ".".join(self.parts)


@dataclass(frozen=True)
class Ref:
    """A resolved reference to a value of a variable's node.

    kind: ``column`` (a column of the layer), ``sentence`` / ``doc`` (an attribute of the
    node's sentence or document), ``text`` (covered text), ``time`` (``start``, ``end``,
    ``duration``: whole microseconds in SQL, seconds in the hit table), ``conllu_id`` (the CoNLL-U ID, a number when ``type`` is int).
    """

    var: str
    kind: str
    name: str
    type: str
    pos: Pos = field(default=NOWHERE, compare=False)
    written: str = field(default="", compare=False)


@dataclass(frozen=True)
class Func:
    """``distance(a, b)`` (words between), ``gap(a, b)`` (seconds between) or ``label(a, b)``
    (the labels of the edges that join a to b; the checker fills in ``edges``, the dependency
    relation of the where clause whose edges they are)."""

    name: str
    a: str
    b: str
    pos: Pos = field(default=NOWHERE, compare=False)
    edges: "Relation | None" = None


@dataclass(frozen=True)
class Call:
    """``lower(x)``, ``fold(x)`` (case and typographic quotes folded), ``length(x)`` (characters)."""

    name: str
    arg: "Expr"
    pos: Pos = field(default=NOWHERE, compare=False)


@dataclass(frozen=True)
class AggCall:
    """An aggregate over the hits of a group: ``count``, ``count distinct x`` (``x`` a value,
    or a variable: its distinct nodes), ``mean``, ``min``, ``max``, ``sum``, ``median``,
    ``stdev``, ``quantile(x, q)``, and ``rate`` (hits per 1,000 words of the group's text)."""

    func: str
    arg: "Expr | None" = None
    q: float | None = None
    pos: Pos = field(default=NOWHERE, compare=False)

    @property
    def label(self) -> str:
        if self.func in ("count", "rate"):
            return self.func
        if self.func == "count distinct":
            return f"count distinct {_expr_label(self.arg)}"
        extra = f", {self.q:g}" if self.q is not None else ""
        return f"{self.func}({_expr_label(self.arg)}{extra})"


def _expr_label(e: "Expr | None") -> str:
    """How an expression is written back in a column name (``v.lemma``, ``lower(v.form)``)."""
    if isinstance(e, Path):
        return e.text
    if isinstance(e, Ref):
        return e.written or f"{e.var}.{e.name}"
    if isinstance(e, Func):
        return f"{e.name}({e.a}, {e.b})"
    if isinstance(e, Call):
        return f"{e.name}({_expr_label(e.arg)})"
    if isinstance(e, AggCall):
        return e.label
    if isinstance(e, Literal):
        return repr(e.value)
    return str(e)


Expr = Union[Literal, Path, Ref, Func, Call, AggCall]


# ---- conditions -------------------------------------------------------------

@dataclass(frozen=True)
class Compare:
    op: str
    left: Expr
    right: Expr
    pos: Pos = field(default=NOWHERE, compare=False)


@dataclass(frozen=True)
class InList:
    expr: Expr
    values: tuple[Literal, ...]
    negated: bool = False
    pos: Pos = field(default=NOWHERE, compare=False)


@dataclass(frozen=True)
class Matches:
    """Regular-expression search (``matches`` or ``~``), unanchored unless the pattern says."""

    expr: Expr
    pattern: Literal
    pos: Pos = field(default=NOWHERE, compare=False)


@dataclass(frozen=True)
class Missing:
    expr: Expr
    negated: bool = False
    pos: Pos = field(default=NOWHERE, compare=False)


@dataclass(frozen=True)
class FirstMention:
    """The node is the first mention of its coreference chain."""

    subject: Expr | None
    pos: Pos = field(default=NOWHERE, compare=False)


@dataclass(frozen=True)
class Root:
    """``v is root``: v's head is the root of its sentence (CoNLL-U HEAD 0) in an edge set
    (``via``, default the basic dependencies), optionally by a label (``as``)."""

    subject: Expr
    via: str | None = None
    label: Literal | None = None
    label_matches: bool = False
    pos: Pos = field(default=NOWHERE, compare=False)


@dataclass(frozen=True)
class Relation:
    """``left <name> right`` with optional modifiers.

    at_least/at_most: bounds on the gap between the two nodes (``by at least 2 words``,
    ``by at most 100ms``): on precedes/follows the words, tokens or characters strictly
    between them, on before/after the time from the end of the first to the start of the
    second; tolerance: ``give or take 20ms`` on Allen's relations (two end points within it
    are equal); same_sentence: both nodes have one sentence (``in the same sentence``);
    depth: (lo, hi) for ``under``/``above``; label: dependency label, exactly (``as "obl"`` is
    not ``obl:tmod``) or, with label_matches, a regular expression (``as ~ "^obl"``); via: edge set;
    in_time: the Allen reading of ``overlaps``/``contains``/``inside``.
    """

    name: str
    left: Expr
    right: Expr
    at_least: Literal | None = None
    at_most: Literal | None = None
    tolerance: Literal | None = None
    same_sentence: bool = False
    depth: tuple[int, int] | None = None
    label: Literal | None = None
    via: str | None = None
    in_time: bool = False
    pos: Pos = field(default=NOWHERE, compare=False)
    label_matches: bool = False    # ``as ~ "regex"``: the label is matched, not compared


@dataclass(frozen=True)
class And:
    items: tuple["Cond", ...]


@dataclass(frozen=True)
class Or:
    items: tuple["Cond", ...]


@dataclass(frozen=True)
class Not:
    item: "Cond"


Cond = Union[Compare, InList, Matches, Missing, FirstMention, Root, Relation, And, Or, Not]


# ---- clauses ----------------------------------------------------------------

@dataclass(frozen=True)
class Binding:
    """``var = layer(cond)``; inside the parentheses names are the node's own attributes."""

    var: str
    layer: str
    cond: Cond | None = None
    pos: Pos = field(default=NOWHERE, compare=False)
    layer_pos: Pos = field(default=NOWHERE, compare=False)


@dataclass(frozen=True)
class Without:
    """No nodes matching these bindings and condition exist."""

    bindings: tuple[Binding, ...]
    cond: Cond | None = None


@dataclass(frozen=True)
class ShowItem:
    expr: Expr
    label: str


@dataclass(frozen=True)
class Show:
    items: tuple[ShowItem, ...]


@dataclass(frozen=True)
class AggItem:
    call: AggCall
    label: str


@dataclass(frozen=True)
class Aggregate:
    """Aggregates per group: ``count, mean(p.duration) per p.speaker having count >= 5``."""

    items: tuple[AggItem, ...]
    per: tuple[ShowItem, ...] = ()
    having: Cond | None = None
    having_pos: Pos = field(default=NOWHERE, compare=False)


Output = Union[Show, Aggregate]


@dataclass(frozen=True)
class OrderItem:
    """One key of ``order by``: an output column's expression, or ``left`` / ``right`` (the
    hit's context, nearest word first)."""

    expr: "Expr | str"
    descending: bool = False
    pos: Pos = field(default=NOWHERE, compare=False)


@dataclass(frozen=True)
class Sample:
    """``sample N seed S``: N hits drawn uniformly at random, the same ones for the same seed."""

    size: int
    seed: int = 0
    pos: Pos = field(default=NOWHERE, compare=False)


@dataclass(frozen=True)
class Query:
    bindings: tuple[Binding, ...]
    where: Cond | None = None
    withouts: tuple[Without, ...] = ()
    qualifiers: frozenset[str] = frozenset()   # "same reading", "every reading", "cross product"
    output: Output | None = None
    limit: int | None = None
    order: tuple[OrderItem, ...] = ()
    sample: Sample | None = None


def conjuncts(cond: Cond | None) -> list[Cond]:
    """The top-level AND items of a condition (empty for None)."""
    if cond is None:
        return []
    if isinstance(cond, And):
        out: list[Cond] = []
        for item in cond.items:
            out.extend(conjuncts(item))
        return out
    return [cond]


def atoms(cond: Cond | None):
    """The comparisons, relations and tests of a condition, under any and/or/not (none for None)."""
    if cond is None:
        return
    if isinstance(cond, (And, Or)):
        for c in cond.items:
            yield from atoms(c)
    elif isinstance(cond, Not):
        yield from atoms(cond.item)
    else:
        yield cond


def refs_in(node: object) -> list[Ref]:
    """Every resolved Ref inside a condition or expression, in order."""
    if isinstance(node, Ref):
        return [node]
    if isinstance(node, (Literal, Path)) or node is None:
        return []
    if isinstance(node, Func) or isinstance(node, str):
        return []
    out: list[Ref] = []
    for name in getattr(node, "__dataclass_fields__", {}):
        value = getattr(node, name)
        if isinstance(value, tuple):
            for v in value:
                out.extend(refs_in(v))
        elif hasattr(value, "__dataclass_fields__"):
            out.extend(refs_in(value))
    return out


def vars_in(node: object) -> set[str]:
    """Variables a condition or expression mentions (refs, relations, functions)."""
    if node is None or isinstance(node, (Literal, Path, str)):
        return set()
    if isinstance(node, Ref):
        return {node.var}
    if isinstance(node, Func):
        return {node.a, node.b}
    out: set[str] = set()
    for name in getattr(node, "__dataclass_fields__", {}):
        value = getattr(node, name)
        if isinstance(value, tuple):
            for v in value:
                out |= vars_in(v)
        elif hasattr(value, "__dataclass_fields__"):
            out |= vars_in(value)
    return out
