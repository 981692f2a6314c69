"""The type of a resolved value, how it is written back, and whether it is a time.

Shared by the checker (messages, comparisons) and the compiler (times are whole
microseconds in SQL and seconds in the hit table).
"""
from __future__ import annotations

from querylang import ast
from querylang.bounds import LENGTH_UNITS, TIME_UNITS

NUMERIC = {"int", "float", "time", "length"}

#: aggregates whose value has the type of what they aggregate (a time stays a time)
SAME_TYPE = {"min", "max", "sum"}
#: aggregates whose value is a number, or a time over times
AVERAGING = {"mean", "median", "stdev", "quantile"}


def type_of(expr: ast.Expr) -> str:
    """``str``, ``int``, ``float``, ``bool``, ``time``, ``length``, ``literal_number`` or ``node``."""
    if isinstance(expr, ast.Ref):
        return expr.type
    if isinstance(expr, ast.Func):
        return {"distance": "length", "gap": "time", "label": "str"}[expr.name]
    if isinstance(expr, ast.Call):
        return "int" if expr.name == "length" else "str"
    if isinstance(expr, ast.AggCall):
        if expr.func in ("count", "count distinct"):
            return "int"
        if expr.func == "rate":
            return "float"
        inner = type_of(expr.arg)
        if expr.func in SAME_TYPE:
            return inner
        return "time" if inner == "time" else "float"
    if isinstance(expr, ast.Literal):
        if isinstance(expr.value, bool):
            return "bool"
        if isinstance(expr.value, (int, float)):
            return "time" if expr.unit in TIME_UNITS else "length" if expr.unit in LENGTH_UNITS else "literal_number"
        return "str"
    return "unknown"


_TYPE_NAMES = {"str": "text", "int": "a whole number", "float": "a number", "bool": "true/false",
               "time": "a time in seconds", "length": "a distance", "literal_number": "a number",
               "node": "a node"}


def type_name(expr: ast.Expr) -> str:
    return _TYPE_NAMES.get(type_of(expr), type_of(expr))


def written(expr: ast.Expr) -> str:
    """The expression as the user wrote it (for messages and column names)."""
    if isinstance(expr, ast.Ref):
        return expr.written or f"{expr.var}.{expr.name}"
    return ast._expr_label(expr)


def is_time(e: ast.Expr) -> bool:
    """Whether the value is a time (start, end, duration, gap, or an aggregate of times other
    than a count): whole microseconds in SQL, seconds in the hit table."""
    if isinstance(e, ast.AggCall):
        return e.arg is not None and e.func in SAME_TYPE | AVERAGING and is_time(e.arg)
    return (isinstance(e, ast.Func) and e.name == "gap") or (isinstance(e, ast.Ref) and e.type == "time")
