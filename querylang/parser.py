"""Query text -> AST (querylang.ast), with syntax errors that point at the place.

The grammar lives in ``grammar.lark``; a lark Transformer builds the frozen dataclasses.
Every lark error becomes a :class:`engine.errors.StrataError` carrying the query, line
and column so the command line can draw a caret; no lark exception escapes.
"""
from __future__ import annotations

from dataclasses import replace
from functools import lru_cache
from pathlib import Path as FilePath

from lark import Lark, Transformer, v_args
from lark.exceptions import UnexpectedCharacters, UnexpectedEOF, UnexpectedInput, UnexpectedToken, VisitError

from querylang.errors import StrataError
from querylang import ast, syntax_help

GRAMMAR_FILE = FilePath(__file__).with_name("grammar.lark")

# How the terminals are named in "expected one of ..." messages.
TERMINAL_NAMES = {
    "NAME": "a name",
    "STRING": 'a quoted string ("...")',
    "NUMBER": "a number",
    "INT": "a whole number",
    "RELATION": "a relation (inside, precedes, child of, ...)",
    "COMPARE": "a comparison (=, !=, <, <=, >, >=)",
    "MATCHES": "matches",
    "NOT_IN": "not in",
    "IS_MISSING": "is missing",
    "IS_NOT_MISSING": "is not missing",
    "IS_FIRST_MENTION": "is first mention",
    "IS_ROOT": "is root",
    "FIRST_MENTION": "first mention",
    "SAME_READING": "in the same reading",
    "EVERY_READING": "in every reading",
    "CROSS_PRODUCT": "allow cross product",
    "IN_TIME": "in time",
    "AT_DEPTH": "at depth",
    "BY_AT_MOST": "by at most",
    "BY_AT_LEAST": "by at least",
    "AND_AT_MOST": "and at most",
    "GIVE_OR_TAKE": "give or take",
    "SAME_SENTENCE": "in the same sentence",
    "WITHIN": "within",
    "AGGREGATE": "mean/min/max/sum/median/stdev/quantile",
    "FUNCTION": "distance/gap/label",
    "VALUE_FUNCTION": "lower/fold/length",
    "COUNT": '"count"',
    "RATE": '"rate"',
    "TRUE": "true",
    "NOT": '"not"',
    "FALSE": "false",
    "BY": '"by"',
    "HAVING": '"having"',
    "DIRECTION": "asc or desc",
    "CONTEXT_SIDE": "left or right",
    "_ORDER_BY": '"order by"',
    "UNIT": "a unit (ms, s, words, tokens, chars)",
    "$END": "the end of the query",
}

#: how each relation modifier is written (for "given twice")
MODIFIER_WORDS = {"at_least": "by at least", "at_most": "by at most", "tolerance": "give or take",
                  "same_sentence": "in the same sentence", "in_time": "in time", "depth": "at depth",
                  "label": "as", "via": "via"}


class PlacedError(Exception):
    """A mistake the transformer finds, at a place in the query (becomes a StrataError)."""

    def __init__(self, message: str, pos: ast.Pos, hint: str | None = None):
        super().__init__(message)
        self.message, self.pos, self.hint = message, pos, hint


ESCAPES = {"n": "\n", "t": "\t", "\\": "\\", '"': '"'}


@lru_cache(maxsize=1)
def _lark() -> Lark:
    return Lark(
        GRAMMAR_FILE.read_text(encoding="utf-8"),
        parser="lalr",
        lexer="contextual",
        propagate_positions=True,
        maybe_placeholders=False,
    )


def _pos(item: object) -> ast.Pos:
    line = getattr(item, "line", None)
    column = getattr(item, "column", None)
    if line is None:
        meta = getattr(item, "meta", None)
        line = getattr(meta, "line", 1) if meta is not None and not getattr(meta, "empty", True) else 1
        column = getattr(meta, "column", 1) if meta is not None and not getattr(meta, "empty", True) else 1
    return ast.Pos(int(line or 1), int(column or 1))


def unquote(token: str) -> str:
    """Decode a double-quoted literal: \\" \\\\ \\n \\t; any other escaped char stands for itself."""
    body = token[1:-1]
    out: list[str] = []
    i = 0
    while i < len(body):
        ch = body[i]
        if ch == "\\" and i + 1 < len(body):
            out.append(ESCAPES.get(body[i + 1], body[i + 1]))
            i += 2
        else:
            out.append(ch)
            i += 1
    return "".join(out)


def _number(text: str) -> int | float:
    return float(text) if "." in text else int(text)


def _unit(text: str) -> str:
    """Normalise unit spellings: word -> words, token -> tokens, char -> chars."""
    return {"word": "words", "token": "tokens", "char": "chars"}.get(text, text)


@v_args(inline=True)
class ToAst(Transformer):
    """Builds querylang.ast nodes from the lark tree."""

    def start(self, query):
        return query

    def query(self, *clauses):
        bindings: tuple[ast.Binding, ...] = ()
        where = None
        withouts: list[ast.Without] = []
        qualifiers: set[str] = set()
        output = None
        limit = None
        order: tuple[ast.OrderItem, ...] = ()
        sample = None
        for clause in clauses:
            kind, value = clause
            if kind == "find":
                bindings = value
            elif kind == "where":
                where = value
            elif kind == "without":
                withouts.append(value)
            elif kind == "qualifier":
                qualifiers.add(value)
            elif kind == "output":
                output = value
            elif kind == "limit":
                limit = value
            elif kind == "order":
                order = value
            elif kind == "sample":
                sample = value
        return ast.Query(bindings, where, tuple(withouts), frozenset(qualifiers), output, limit, order, sample)

    def find_clause(self, *bindings):
        return ("find", tuple(bindings))

    def binding(self, name, layer, *conds):
        conds = tuple(c for c in conds if c is not None)
        cond = None if not conds else conds[0] if len(conds) == 1 else ast.And(conds)
        return ast.Binding(str(name), layer.text, cond, _pos(name), layer.pos)

    def layer_name(self, *parts):
        return ast.Path(tuple(str(p) for p in parts), _pos(parts[0]))

    def where_clause(self, cond):
        return ("where", cond)

    def without_clause(self, *items):
        bindings = tuple(i for i in items if isinstance(i, ast.Binding))
        conds = [i for i in items if not isinstance(i, ast.Binding)]
        return ("without", ast.Without(bindings, conds[0] if conds else None))

    def qualifier(self, token):
        text = " ".join(str(token).split())
        return ("qualifier", {"in the same reading": "same reading",
                              "in every reading": "every reading",
                              "allow cross product": "cross product"}[text])

    def show(self, *items):
        return ("output", ast.Show(tuple(items)))

    def aggregate(self, *parts):
        items = tuple(p for p in parts if isinstance(p, ast.AggItem))
        per = next((p[1] for p in parts if isinstance(p, tuple) and p[0] == "per"), ())
        having, having_pos = next((p[1:] for p in parts if isinstance(p, tuple) and p[0] == "having"),
                                  (None, ast.NOWHERE))
        return ("output", ast.Aggregate(items, per, having, having_pos))

    def show_item(self, expr, label=None):
        return ast.ShowItem(expr, str(label) if label is not None else _label(expr))

    def agg_item(self, call, label=None):
        return ast.AggItem(call, str(label) if label is not None else call.label)

    def count_all(self, token):
        return ast.AggCall("count", None, None, _pos(token))

    def count_distinct(self, token, expr):
        return ast.AggCall("count distinct", expr, None, _pos(token))

    def agg_function(self, name, expr, q=None):
        return ast.AggCall(str(name), expr, _number(str(q)) if q is not None else None, _pos(name))

    def rate(self, token):
        return ast.AggCall("rate", None, None, _pos(token))

    def per_clause(self, *exprs):
        return ("per", tuple(ast.ShowItem(e, _label(e)) for e in exprs))

    def by_refused(self, token, *exprs):
        keys = ", ".join(_label(e) for e in exprs)
        raise PlacedError("groups are named with `per`: `by` is kept for distance bounds (`by at most 3 words`)",
                          _pos(token), f"write `per {keys}`")

    def having_clause(self, token, cond):
        return ("having", cond, _pos(token))

    def order_clause(self, *items):
        return ("order", tuple(items))

    def order_item(self, key, direction=None):
        pos = _pos(key) if hasattr(key, "line") else _expr_pos(key)
        if hasattr(key, "type") and key.type == "CONTEXT_SIDE":
            key = str(key)
        return ast.OrderItem(key, direction is not None and str(direction) == "desc", pos)

    def sample_clause(self, size, seed=None):
        return ("sample", ast.Sample(int(size), int(seed) if seed is not None else 0, _pos(size)))

    def limit_clause(self, n):
        return ("limit", int(n))

    # conditions
    def or_(self, *conds):
        return ast.Or(tuple(i for c in conds for i in (c.items if isinstance(c, ast.Or) else (c,))))

    def and_(self, *conds):
        return ast.And(tuple(i for c in conds for i in (c.items if isinstance(c, ast.And) else (c,))))

    def not_(self, *parts):
        """``not not ... c``: an even number of nots is c itself."""
        *nots, item = parts
        return ast.Not(item) if len(nots) % 2 else item

    def compare(self, left, op, right):
        return ast.Compare(str(op), left, right, _pos(op))

    def in_list(self, expr, values):
        return ast.InList(expr, values, False, _expr_pos(expr))

    def not_in_list(self, expr, token, values):
        return ast.InList(expr, values, True, _pos(token))

    def matches(self, expr, token, pattern):
        return ast.Matches(expr, ast.Literal(unquote(str(pattern)), None, _pos(pattern)), _pos(token))

    def missing(self, expr, token):
        return ast.Missing(expr, False, _pos(token))

    def present(self, expr, token):
        return ast.Missing(expr, True, _pos(token))

    def first_mention(self, expr, token):
        return ast.FirstMention(expr, _pos(token))

    def bare_first_mention(self, token):
        return ast.FirstMention(None, _pos(token))

    def root_test(self, expr, token, *mods):
        fields: dict[str, object] = {}
        for key, value, pos in mods:
            if key not in ("via", "label"):
                raise PlacedError(f"`is root` takes `via` and `as`, not `{MODIFIER_WORDS.get(key, key)}`", pos)
            if key in fields:
                raise PlacedError(f"`{MODIFIER_WORDS[key]}` is given twice", pos)
            fields[key] = value
        label = fields.get("label")
        matches = label is not None and label.unit == "regex"
        if matches:
            label = replace(label, unit=None)
        return ast.Root(expr, fields.get("via"), label, matches, _pos(token))

    def relation(self, left, name, right, *mods):
        fields: dict[str, object] = {}
        for key, value, pos in mods:
            items = [("at_least", value[0]), ("at_most", value[1])] if key == "bounds" else [(key, value)]
            for k, v in items:
                if k in fields:
                    raise PlacedError(f"`{MODIFIER_WORDS[k]}` is given twice for one relation", pos)
                fields[k] = v
        label = fields.get("label")
        if label is not None and label.unit == "regex":      # as ~ "regex"
            fields["label"], fields["label_matches"] = replace(label, unit=None), True
        return ast.Relation(" ".join(str(name).split()), left, right, pos=_pos(name), **fields)

    def at_most(self, token, quantity):
        return ("at_most", quantity, _pos(token))

    def at_least(self, token, quantity, and_token=None, most=None):
        if most is None:
            return ("at_least", quantity, _pos(token))
        if quantity.unit is None:         # by at least 2 and at most 5 words: one unit for both
            quantity = replace(quantity, unit=most.unit)
        return ("bounds", (quantity, most), _pos(token))

    def tolerance(self, token, quantity):
        return ("tolerance", quantity, _pos(token))

    def same_sentence(self, token):
        return ("same_sentence", True, _pos(token))

    def within(self, token, quantity=None):
        raise PlacedError("`within` is not a word of this language any more: it meant a distance on some "
                          "relations and a tolerance on others", _pos(token),
                          "write 'by at most 3 words' for a distance, 'give or take 20ms' for a tolerance")

    def at_depth(self, token, lo, hi=None):
        return ("depth", (int(lo), int(hi if hi is not None else lo)), _pos(token))

    def label(self, string):
        return ("label", ast.Literal(unquote(str(string)), None, _pos(string)), _pos(string))

    def label_matches(self, token, string):
        return ("label", ast.Literal(unquote(str(string)), "regex", _pos(string)), _pos(string))

    def via(self, name):
        return ("via", name.text, name.pos)

    def in_time(self, token):
        return ("in_time", True, _pos(token))

    def list(self, *values):
        return tuple(v for v in values if v is not None)

    def func(self, name, a, b):
        return ast.Func(str(name), str(a), str(b), _pos(name))

    def call(self, name, arg):
        return ast.Call(str(name), arg, _pos(name))

    def path(self, *parts):
        return ast.Path(tuple(str(p) for p in parts), _pos(parts[0]))

    def string(self, token):
        return ast.Literal(unquote(str(token)), None, _pos(token))

    def quantity(self, number, unit=None):
        return ast.Literal(_number(str(number)), _unit(str(unit)) if unit is not None else None, _pos(number))

    def true(self, token):
        return ast.Literal(True, None, _pos(token))

    def false(self, token):
        return ast.Literal(False, None, _pos(token))


def _expr_pos(expr: object) -> ast.Pos:
    return getattr(expr, "pos", ast.NOWHERE)


def _label(expr: object) -> str:
    """The column name an expression gets in the result table (its written form)."""
    if isinstance(expr, ast.Path):
        return expr.text
    if isinstance(expr, (ast.Func, ast.Call, ast.AggCall)):
        return ast._expr_label(expr)
    if isinstance(expr, ast.Literal):
        return str(expr.value) + (expr.unit or "")
    return str(expr)


def _expected(names: set[str] | frozenset[str]) -> str:
    shown: list[str] = []
    for name in sorted(names):
        if name in TERMINAL_NAMES:
            shown.append(TERMINAL_NAMES[name])
            continue
        if name.startswith("_") and name[1:].isalpha():      # keywords: _FIND -> "find"
            shown.append(f'"{name[1:].lower()}"')
            continue
        term = next((t for t in _lark().terminals if t.name == name), None)
        if term is not None and term.pattern.type == "str":
            shown.append(f'"{term.pattern.value}"')
        else:
            shown.append(name.lower())
    return ", ".join(dict.fromkeys(shown))


def parse(text: str) -> ast.Query:
    """Parse query text; raise StrataError with line/column on any syntax error."""
    if not text.strip():
        raise StrataError("empty query: write e.g. find w = word(form = \"ferry\")", query=text or " ", line=1, column=1)
    _check_nesting(text)
    try:
        tree = _lark().parse(text)
    except (UnexpectedToken, UnexpectedCharacters) as err:
        expected = set(getattr(err, "expected", None) or getattr(err, "allowed", None) or ())
        offset = err.pos_in_stream if not (isinstance(err, UnexpectedToken) and err.token.type == "$END") else -1
        helped = syntax_help.explain(text, offset if offset is not None else -1, expected)
        if helped is not None:
            line, column = _place(text, helped.offset)
            raise StrataError(helped.message, query=text, line=line, column=column, hint=helped.hint) from None
        _raise_plain(text, err)
    except UnexpectedEOF as err:
        raise StrataError(
            f"the query ends too early; expected one of: {_expected(set(err.expected))}",
            query=text, line=_last_line(text), column=_last_column(text),
        ) from None
    except UnexpectedInput as err:  # any other lark input error
        raise StrataError(f"syntax error: {err}", query=text, line=getattr(err, "line", 1),
                          column=getattr(err, "column", 1)) from None
    try:
        return ToAst().transform(tree)
    except VisitError as err:
        if isinstance(err.orig_exc, PlacedError):
            e = err.orig_exc
            raise StrataError(e.message, query=text, line=e.pos.line, column=e.pos.column, hint=e.hint) from None
        raise StrataError(f"cannot read the query: {err.orig_exc}", query=text, line=1, column=1) from None


#: parentheses a query may nest (chains of and, or, not have no limit: they are lists)
MAX_NESTING = 100


def _check_nesting(text: str) -> None:
    """Refuse parentheses nested deeper than :data:`MAX_NESTING`, with the caret at the first
    one too deep (outside quoted strings): the passes walk conditions recursively."""
    depth, in_string, i = 0, False, 0
    while i < len(text):
        ch = text[i]
        if in_string:
            if ch == "\\":
                i += 1
            elif ch == '"':
                in_string = False
        elif ch == '"':
            in_string = True
        elif ch == "(":
            depth += 1
            if depth > MAX_NESTING:
                line, column = _place(text, i)
                raise StrataError(f"parentheses nest deeper than {MAX_NESTING} levels here", query=text,
                                  line=line, column=column,
                                  hint="chains of and, or and not need no parentheses: a or b or c ...")
        elif ch == ")":
            depth = max(depth - 1, 0)
        i += 1


def _place(text: str, offset: int) -> tuple[int, int]:
    """1-based line and column of a 0-based offset."""
    line = text.count("\n", 0, offset) + 1
    return line, offset - (text.rfind("\n", 0, offset) + 1) + 1


def _raise_plain(text: str, err: UnexpectedInput) -> None:
    """The parser's own account: what came, and what could have come instead."""
    if isinstance(err, UnexpectedToken):
        found = "the end of the query" if err.token.type == "$END" else repr(str(err.token))
        raise StrataError(
            f"unexpected {found}; expected one of: {_expected(err.expected)}",
            query=text,
            line=_last_line(text) if err.token.type == "$END" or not err.line or err.line < 1 else err.line,
            column=_last_column(text) if err.token.type == "$END" or not err.column or err.column < 1 else err.column,
            hint=_hint(text, err.pos_in_stream if err.token.type != "$END" else None),
        ) from None
    if isinstance(err, UnexpectedCharacters):
        allowed = _expected(err.allowed) if err.allowed else "something else"
        raise StrataError(
            f"unexpected character {text[err.pos_in_stream]!r}; expected one of: {allowed}",
            query=text, line=err.line, column=err.column, hint=_hint(text, err.pos_in_stream),
        ) from None


# Habits from other languages, and what to write here instead.
HINTS = [("==", "compare with a single ="), ("&&", "write `and`"), ("||", "write `or`"),
         ("!", "write `not`, or != for unequal"), ("'", 'quote text with double quotes: "..."'),
         (";", "a query is one statement; no ; is needed")]


def _hint(text: str, offset: int | None) -> str | None:
    """A suggestion for a common slip at the error position, if there is one."""
    if offset is None:
        return None
    at = text[max(offset - 1, 0):offset + 2]
    for written, hint in HINTS:
        if written in at:
            return hint
    return None


def _last_line(text: str) -> int:
    return max(len(text.splitlines()), 1)


def _last_column(text: str) -> int:
    lines = text.splitlines() or [""]
    return len(lines[-1]) + 1
