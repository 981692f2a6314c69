"""Aggregates per group -> SQL: the statement after the matches of a query that ends in
``count``, ``mean(...)``, ``rate`` ... ``per`` keys ``having`` ... ``order by`` ...

Definitions the SQL implements:

* A group is one combination of ``per`` key values over the hits (a missing value is a key
  like any other); without ``per`` the whole result is one group.
* ``count`` counts hits; ``count distinct x`` the distinct non-missing values of x, and
  ``count distinct v`` the distinct nodes bound to v.  ``mean``, ``min``, ``max``, ``sum``
  skip missing values; ``median`` and ``quantile(x, q)`` interpolate linearly between the
  two nearest values (``quantile_cont``: Hyndman and Fan's type 7, numpy's default);
  ``stdev`` is the sample standard deviation (n - 1).  Over times they run on whole
  microseconds and are shown in seconds.
* ``rate`` is ``1000 * hits / words``, where ``words`` counts the nodes of the layer of
  syntactic words (punctuation included, empty nodes not: CoNLL-U's integer IDs) whose own
  document or sentence has the group's key values; every group of the corpus is listed,
  those without hits with count 0 and rate 0.
* ``having`` keeps the groups its condition holds for.
* Order: the ``order by`` keys first, then the default: the first aggregate's value
  descending, then the keys ascending; missing values last in either direction, text by
  code point.
"""
from __future__ import annotations

from querylang import ast
from querylang.types import is_time

#: the SQL aggregate of each function (the argument as ``{x}``; ``{q}`` the quantile)
FUNCTIONS = {"count": "count(*)", "count distinct": "count(DISTINCT {x})", "mean": "avg({x})",
             "min": "min({x})", "max": "max({x})", "sum": "sum({x})", "median": "quantile_cont({x}, 0.5)",
             "stdev": "stddev_samp({x})", "quantile": "quantile_cont({x}, {q})"}


def calls_in(out: ast.Aggregate) -> list[ast.AggCall]:
    """Every aggregate the output needs (its items and those in ``having``), without repeats;
    ``count`` always, as the hit table shows it beside every aggregate."""
    found: list[ast.AggCall] = [i.call for i in out.items]
    found.append(ast.AggCall("count"))
    stack: list[object] = [out.having] if out.having is not None else []
    while stack:
        node = stack.pop()
        if isinstance(node, ast.AggCall):
            found.append(node)
        elif isinstance(node, tuple):
            stack.extend(node)
        elif hasattr(node, "__dataclass_fields__"):
            stack.extend(getattr(node, f) for f in node.__dataclass_fields__)
    out_calls: list[ast.AggCall] = []
    for c in found:
        c = ast.AggCall("count") if c.func == "count" else c
        if c not in out_calls and c.func != "rate":
            out_calls.append(c)
    return out_calls


def arguments(calls: list[ast.AggCall]) -> list[ast.Expr]:
    """The distinct argument values the aggregates read, computed once per hit."""
    args: list[ast.Expr] = []
    for c in calls:
        if c.arg is not None and c.arg not in args:
            args.append(c.arg)
    return args


def aggregate_sql(call: ast.AggCall, arg_column: str | None, q_param: str | None) -> str:
    return FUNCTIONS[call.func].format(x=arg_column, q=q_param)


def group_statement(sb, out: ast.Aggregate, head: str, last: str, calls: list[ast.AggCall],
                    args: list[ast.Expr], limit_sql: str, order: tuple[ast.OrderItem, ...],
                    words: str | None) -> tuple[str, list[str]]:
    """The grouping SQL after ``head`` (the WITH clause of the matches, ending in CTE ``last``)
    and the result's column names.  ``words``: the FROM item of the rate's word counts
    (``SELECT keys AS _d0.., count(*) AS _w ... GROUP BY``), or None without a rate."""
    keys = [f"_x{k}" for k in range(len(out.per))]
    aggs = []
    for j, c in enumerate(calls):
        x = f"_a{args.index(c.arg)}" if c.arg is not None else None
        q = sb.param(float(c.q)) if c.q is not None else None
        aggs.append(f"{aggregate_sql(c, x, q)} AS _g{j}")
    group = f" GROUP BY {', '.join(keys)}" if keys else ""
    grouped = f"grp AS (SELECT {', '.join(keys + aggs)} FROM {last}{group})"
    count_at = calls.index(ast.AggCall("count"))
    final: dict[ast.AggCall, str] = {}
    if words is None:
        source = "grp AS g"
        key_cols = [f"g.{k}" for k in keys]
        for j, c in enumerate(calls):
            final[c] = f"g._g{j}"
    else:
        on = " AND ".join(f"g._x{k} IS NOT DISTINCT FROM d._d{k}" for k in range(len(keys))) or "true"
        source = f"({words}) AS d LEFT JOIN grp AS g ON {on}"
        key_cols = [f"d._d{k}" for k in range(len(keys))]
        for j, c in enumerate(calls):   # a group without hits counts 0
            final[c] = f"coalesce(g._g{j}, 0)" if c.func in ("count", "count distinct") else f"g._g{j}"
        final[ast.AggCall("rate")] = f"(1000.0 * {final[calls[count_at]]} / d._w)"
    shown: list[tuple[str, str]] = [(k, i.label) for k, i in zip(key_cols, out.per)]
    count_value = final[calls[count_at]]
    for item in out.items:
        call = ast.AggCall("count") if item.call.func == "count" else item.call
        if call.func == "rate":        # the figures behind the rate, beside it
            if not _has_count(out):
                shown.append((count_value, "count"))
            shown.append(("d._w", "words"))
        shown.append((_seconds(final[call]) if is_time(call) else final[call], item.label))
    if not _has_count(out) and words is None:
        shown.append((count_value, "count"))
    names = [label for _, label in shown]
    # having: aggregates and keys by their computed columns
    # (a time key is shown in seconds; conditions compare whole microseconds)
    sb.computed = {**final, **{i.expr: (f"CAST(round({k} * 1000000) AS BIGINT)" if is_time(i.expr) else k)
                               for k, i in zip(key_cols, out.per)}}
    where = f" WHERE {sb.cond(out.having, None, top=True)}" if out.having is not None else ""
    sb.computed = {}
    by_label = dict((label, value) for value, label in shown)
    first = out.items[0].call
    first = ast.AggCall("count") if first.func == "count" else first
    ordering = [f"{by_label[o.expr]} {'DESC' if o.descending else 'ASC'} NULLS LAST" for o in order]
    ordering += [f"{final[first]} DESC NULLS LAST"] + [f"{k} ASC NULLS LAST" for k in key_cols]
    cols = ", ".join(f"{value} AS c{n}" for n, (value, _) in enumerate(shown))
    sql = (f"{head}, {grouped} SELECT {cols} FROM {source}{where} ORDER BY {', '.join(ordering)}{limit_sql}")
    return sql, names


def _has_count(out: ast.Aggregate) -> bool:
    return any(i.call.func == "count" for i in out.items)


def _seconds(us_sql: str) -> str:
    return f"({us_sql} / 1000000.0)"
