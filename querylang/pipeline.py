"""The compilation pipeline: one visible list of small passes, each state -> state.

    PASSES = [parse, check, plan, to_sql]

A reader follows a query through the passes in this order; ``strata explain`` prints the
state after each.
"""
from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Callable

from querylang import checker, compiler, parser, planner
from querylang.ast import Query
from querylang.catalog import Catalog
from querylang.checker import Checked
from querylang.compiler import SqlQuery
from querylang.planner import Plan


@dataclass(frozen=True)
class Compilation:
    """Everything known about a query so far; each pass fills one more field."""

    text: str
    catalog: Catalog
    limit: int | None = None
    context: int = 5
    cross_sentences: bool = False
    ast: Query | None = None
    checked: Checked | None = None
    plan: Plan | None = None
    sql: SqlQuery | None = None


def parse(c: Compilation) -> Compilation:
    return replace(c, ast=parser.parse(c.text))


def check(c: Compilation) -> Compilation:
    return replace(c, checked=checker.check(c.ast, c.catalog, c.text))


def plan(c: Compilation) -> Compilation:
    return replace(c, plan=planner.plan(c.checked))


def to_sql(c: Compilation) -> Compilation:
    return replace(c, sql=compiler.to_sql(c.checked, c.plan, limit=c.limit, context=c.context,
                                         cross_sentences=c.cross_sentences))


PASSES: list[Callable[[Compilation], Compilation]] = [parse, check, plan, to_sql]


def run_passes(text: str, catalog: Catalog, *, limit: int | None = None, context: int = 5,
               cross_sentences: bool = False) -> Compilation:
    state = Compilation(text, catalog, limit, context, cross_sentences)
    for step in PASSES:
        state = step(state)
    return state
