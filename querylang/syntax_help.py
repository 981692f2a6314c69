"""Help for syntax errors: say what the user wrote when the language has no such thing.

The parser's own message ("unexpected X; expected one of ...") is right but not helpful when
the query holds an unclosed string, arithmetic, a call of a function we do not have, a word
of SQL, or a misspelt relation.  :func:`explain` recognises these at the error's offset and
returns a plain message, the offset its caret belongs under, and a hint; None otherwise.
"""
from __future__ import annotations

import difflib
import re
from dataclasses import dataclass
from functools import lru_cache
from pathlib import Path

GRAMMAR_FILE = Path(__file__).with_name("grammar.lark")

VALUE_FUNCTIONS = ("lower", "fold", "length")
PAIR_FUNCTIONS = ("distance", "gap")
AGGREGATES = ("count", "mean", "min", "max", "sum", "median", "stdev", "quantile")
FUNCTIONS_HINT = ("functions: lower(x), fold(x), length(x) on a value; distance(a, b), gap(a, b) between two "
                  "variables; count, mean(x), min, max, sum, median, stdev, quantile(x, q) as aggregates")

#: words of SQL (an open standard), and what this language says instead
SQL_WORDS = {
    "select": "start with `find v = layer(...)` and name the values with `show v.lemma`",
    "from": "a variable's layer is named in `find v = layer(...)`",
    "join": "relate variables in `where`, e.g. `where a inside b`",
    "group": "name groups with `per`: `count per v.lemma`",
    "like": 'match text with a regular expression: `v.form ~ "^walk"`',
    "union": "combine conditions with `or` inside one query",
    "insert": "a query only reads the corpus",
    "update": "a query only reads the corpus",
    "delete": "a query only reads the corpus",
    "distinct": "count distinct values with `count distinct v.lemma`",
}
ARITHMETIC = "+-*/%"
WORD = re.compile(r"[A-Za-z_][A-Za-z0-9_]*")


@dataclass(frozen=True)
class Help:
    message: str
    offset: int             # where the caret goes (0-based, in the query text)
    hint: str | None = None


@lru_cache(maxsize=1)
def relation_words() -> tuple[str, ...]:
    """The relation names as written (from the RELATION terminal of the grammar)."""
    text = GRAMMAR_FILE.read_text(encoding="utf-8")
    body = re.search(r"^RELATION\.\d+: /\((.*)\)\\b/$", text, flags=re.M).group(1)
    return tuple(alt.replace(r"\s+", " ") for alt in body.split("|"))


def explain(text: str, offset: int, expected: set[str]) -> Help | None:
    """What went wrong at ``offset`` in words the user knows, or None."""
    if offset < 0 or offset >= len(text):
        return None
    ch = text[offset]
    if ch == '"' and _unclosed(text, offset):
        return Help("this quoted string is not closed: its closing \" is missing", offset,
                    'end it with a double quote: "..."; a " inside it is written \\"')
    if ch in ARITHMETIC and not (ch == "-" and offset + 1 < len(text) and text[offset + 1].isdigit()):
        return Help(f"arithmetic ({', '.join(ARITHMETIC[:4])}) is not part of the language", offset,
                    "compare values as they are, e.g. `length(t.form) > 3`; gap(a, b) and distance(a, b) "
                    "measure between two nodes")
    word_at = WORD.match(text, offset)
    if ch == "(":      # a call: the word before the parenthesis names a function we lack
        before = re.search(r"([A-Za-z_][A-Za-z0-9_]*)\s*$", text[:offset])
        if before is not None:
            return _no_function(before.group(1), before.start(1))
        return None
    if word_at is None:
        return None
    word = word_at.group(0)
    after = text[word_at.end():]
    if after.lstrip().startswith("(") and word.lower() not in VALUE_FUNCTIONS + PAIR_FUNCTIONS + AGGREGATES:
        return _no_function(word, offset)
    if word.lower() in SQL_WORDS:
        return Help(f"`{word}` is a word of SQL, not of this query language", offset, SQL_WORDS[word.lower()])
    if "RELATION" in expected:
        return _relation(word, after, offset)
    return None


def _unclosed(text: str, start: int) -> bool:
    i = start + 1
    while i < len(text):
        if text[i] == "\\":
            i += 2
            continue
        if text[i] == '"':
            return False
        i += 1
    return True


#: names other languages give our functions
ALIASES = {"avg": "mean", "average": "mean", "std": "stdev", "stddev": "stdev", "len": "length",
           "strlen": "length", "char_length": "length", "lcase": "lower", "casefold": "fold"}


def _no_function(name: str, offset: int) -> Help:
    close = ([ALIASES[name.lower()]] if name.lower() in ALIASES else
             difflib.get_close_matches(name.lower(), VALUE_FUNCTIONS + PAIR_FUNCTIONS + AGGREGATES, n=1, cutoff=0.7))
    hint = (f"did you mean {close[0]}()? " if close else "") + FUNCTIONS_HINT
    return Help(f"there is no function `{name}()` in this language", offset, hint)


def _relation(word: str, after: str, offset: int) -> Help:
    """An unknown relation word: compare it, alone and with the next one or two words, with
    every relation name."""
    following = WORD.findall(after)[:2]
    tries = [" ".join([word] + following[:n]) for n in range(len(following) + 1)]
    best, score, shown = None, 0.0, word
    for candidate in relation_words():
        for written in tries:
            ratio = difflib.SequenceMatcher(None, written.lower(), candidate).ratio()
            if ratio > score:
                best, score, shown = candidate, ratio, written
    if best is None or score < 0.75:
        return Help(f"unknown relation `{word}`", offset, "relations: " + ", ".join(relation_words()))
    return Help(f"unknown relation `{shown}`", offset, f"did you mean: {best}?")
