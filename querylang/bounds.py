"""Distance bounds, tolerances and the same sentence: the modifiers that qualify a relation.

Each modifier has one meaning, wherever it is written:

* ``by at most N UNIT`` / ``by at least N UNIT`` bound the *gap* between two nodes. On
  ``precedes``/``follows`` the gap is the number of words (``tokens``, ``chars``) strictly
  between them, as ``distance(a, b)`` counts it; on ``before``/``after`` it is the time from
  the end of the first to the start of the second. Both bounds may be given
  (``by at least 2 and at most 5 words``); a gap equal to a bound is inside it.
* ``give or take T`` is a tolerance on Allen's thirteen relations: two end points within T
  of each other count as equal, and one is before the other only when it is more than T
  earlier (so the thirteen stay exclusive and cover every pair).
* ``in the same sentence`` keeps pairs whose nodes have one sentence, the sentence the
  hit table names in ``v.sentence``; a node with no sentence has no such pair.

This pass refuses every other use with the caret under the number or the words, so no
query means something its writer did not say.
"""
from __future__ import annotations

from dataclasses import replace
from decimal import Decimal
from typing import Callable

from querylang import ast
from querylang.catalog import LayerInfo

#: relations a distance bound goes with: text order in words/tokens/chars, time order in ms/s
BOUNDED_IN_TEXT = {"precedes", "follows"}
BOUNDED_IN_TIME = {"before", "after"}
TIME_UNITS = {"ms": 0.001, "s": 1.0}
LENGTH_UNITS = {"words", "tokens", "chars"}
#: Allen (1983): the thirteen interval relations, the ones a tolerance goes with
ALLEN_RELATIONS = {"before", "after", "meets", "met by", "overlaps", "overlapped by", "starts",
                   "started by", "during", "contains", "finishes", "finished by", "equals"}

Fail = Callable[..., None]


def counted_in(layer: LayerInfo, unit: str) -> tuple[str, str] | None:
    """Columns holding a node's first/last ordinal counted in words or tokens (None if not counted)."""
    if unit == "words":
        return ("word_first", "word_last") if layer.word_layer or layer.kind == "sequence" else None
    return ("tok_first", "tok_last") if layer.token_layer or layer.kind == "sequence" else None


def _seconds(lit: ast.Literal) -> Decimal:
    return Decimal(str(lit.value)) * Decimal(str(TIME_UNITS[lit.unit]))


def check_modifiers(rel: ast.Relation, is_time: bool, la: LayerInfo, lb: LayerInfo, fail: Fail) -> None:
    """Refuse a bound, tolerance or unit that does not fit the relation (``fail`` raises).

    ``is_time``: the relation compares time spans (Allen's, or ours with ``in time``).
    """
    name = rel.name
    for word, lit in (("by at least", rel.at_least), ("by at most", rel.at_most)):
        if lit is None:
            continue
        if name not in BOUNDED_IN_TEXT | BOUNDED_IN_TIME:
            hint = ("`directly precedes` already means no word between; write `precedes ... by at most 0 words`"
                    if name.startswith("directly") else
                    "for a tolerance on Allen's relations write `give or take 20ms`" if name in ALLEN_RELATIONS
                    else None)
            fail(f"`{word}` bounds the gap of precedes, follows, before and after, not of `{name}`", lit.pos, hint)
        _number(word, lit, fail)
        if name in BOUNDED_IN_TEXT:
            if lit.unit is None:
                fail(f"say what {lit.value} counts: {lit.value} words, {lit.value} tokens or {lit.value} chars",
                     lit.pos)
            if lit.unit in TIME_UNITS:
                fail(f"`{name}` orders text, so its gap is in words, tokens or chars, not {lit.unit}", lit.pos,
                     "for a gap in time write e.g. `a before b by at most 100ms`")
            if not isinstance(lit.value, int):
                fail(f"a count of {lit.unit} is a whole number, not {lit.value}", lit.pos)
            if lit.unit in ("words", "tokens") and (counted_in(la, lit.unit) is None or counted_in(lb, lit.unit) is None):
                fail(f"layers {la.name!r} and {lb.name!r} are not counted in {lit.unit}", lit.pos,
                     "count in chars instead")
        else:
            if lit.unit is None:
                fail(f"a time bound needs a unit: {lit.value}ms or {lit.value}s", lit.pos)
            if lit.unit in LENGTH_UNITS:
                fail(f"`{name}` orders time, so its gap is in ms or s, not {lit.unit}", lit.pos,
                     "for a gap in text write e.g. `a precedes b by at most 3 words`")
    lo, hi = rel.at_least, rel.at_most
    if lo is not None and hi is not None:
        if (lo.unit in TIME_UNITS) != (hi.unit in TIME_UNITS) or (lo.unit not in TIME_UNITS and lo.unit != hi.unit):
            fail(f"the two bounds are in different units ({lo.unit} and {hi.unit})", hi.pos)
        low = _seconds(lo) if lo.unit in TIME_UNITS else lo.value
        high = _seconds(hi) if hi.unit in TIME_UNITS else hi.value
        if low > high:
            fail(f"no gap is at least {lo.value}{_u(lo)} and at most {hi.value}{_u(hi)}", hi.pos,
                 "give the smaller number after `at least`")
    tol = rel.tolerance
    if tol is not None:
        if not (is_time and name in ALLEN_RELATIONS):
            hint = ("a gap in text has no tolerance; bound it with `by at most 3 words`" if not is_time else
                    "this relation is ours, not Allen's: it already lets edges coincide" if name == "inside" else
                    "`shares time with` has no end points to compare; compare start and end yourself")
            fail(f"`give or take` is a tolerance for Allen's relations, not for `{name}`", tol.pos, hint)
        _number("give or take", tol, fail)
        if tol.unit is None:
            fail(f"a tolerance needs a unit: {tol.value}ms or {tol.value}s", tol.pos)
        if tol.unit in LENGTH_UNITS:
            fail(f"a tolerance on a time relation is in ms or s, not {tol.unit}", tol.pos)


def _u(lit: ast.Literal) -> str:
    return f" {lit.unit}" if lit.unit in LENGTH_UNITS else lit.unit or ""


def _number(word: str, lit: ast.Literal, fail: Fail) -> None:
    if isinstance(lit.value, bool) or not isinstance(lit.value, (int, float)) or lit.value < 0:
        fail(f"`{word}` needs a number that is not negative", lit.pos)


def normalised(rel: ast.Relation) -> ast.Relation:
    """The relation with zero bounds and tolerances that change nothing dropped."""
    if rel.tolerance is not None and rel.tolerance.value == 0:
        rel = replace(rel, tolerance=None)
    return rel
