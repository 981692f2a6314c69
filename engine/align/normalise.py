"""Normal forms for comparing a leaf with the primary text, character by character.

Tools write the same words differently: case, typographic quotes and dashes,
escaped brackets (``-LRB-``), ellipses. Both sides are mapped to one normal form
before the character alignment; whitespace is dropped so that a contraction
written whole ("don't") and split ("do" + "n't") become the same characters.
"""
from __future__ import annotations

import re
import unicodedata
from functools import lru_cache

import numpy as np

#: Treebank escapes for characters that would clash with the bracket syntax
#: (the Penn Treebank convention: -LRB- for "(", -RRB- for ")", and so on).
BRACKET_ESCAPES = {"-LRB-": "(", "-RRB-": ")", "-LCB-": "{", "-RCB-": "}", "-LSB-": "[", "-RSB-": "]"}
#: Characters that mean the same for alignment, beyond the Unicode classes below.
_CHAR_MAP = {"`": "'", "\u00b4": "'", "\u2032": "'", "\u2033": '"', "\u2212": "-"}
#: Treebank quote tokens: ``word'' for opening and closing double quotes.
_FORM_MAP = {"``": '"', "''": '"'}
_EVENT = re.compile(r"\{[^{}\s]+\}")


def unescape(form: str) -> str:
    """The written word behind a treebank leaf (``-LRB-`` -> ``(``)."""
    return BRACKET_ESCAPES.get(form, form)


def is_event(form: str) -> bool:
    """A non-speech event written in braces, e.g. ``{laugh}``."""
    return bool(_EVENT.fullmatch(form))


@lru_cache(maxsize=65536)
def _char(c: str) -> str:
    """Normal form of one character (may be empty for whitespace, or several characters)."""
    if c.isspace():
        return ""
    out = unicodedata.normalize("NFKC", c)
    return "".join((_CHAR_MAP.get(x) or _unify_punct(x)).casefold() for x in out if not x.isspace())


def _unify_punct(c: str) -> str:
    """Dashes (Unicode class Pd) to ``-``; quotation marks to ``"`` (double) or ``'`` (single).

    Quotation marks are told by their Unicode names (initial/final punctuation, Pi/Pf,
    and the other characters named QUOTATION MARK), so the rule follows the standard.
    """
    if c.isascii():
        return c
    cat = unicodedata.category(c)
    if cat == "Pd":
        return "-"
    if cat in ("Pi", "Pf", "Po", "Ps", "Pe"):
        name = unicodedata.name(c, "")
        if "QUOTATION MARK" in name:
            return '"' if "DOUBLE" in name or "ANGLE QUOTATION" in name and "SINGLE" not in name else "'"
    return c


@lru_cache(maxsize=65536)
def normalise_form(form: str) -> str:
    """Normal form of a whole leaf: unescaped, quotes and dashes unified, case folded, no spaces."""
    form = _FORM_MAP.get(form, unescape(form))
    return "".join(_char(c) for c in form)


def _text_char(c: str) -> str:
    """Normal form of one character of a text (ASCII without the Unicode machinery)."""
    if c.isascii():
        return "" if c.isspace() else ("'" if c == "`" else c.lower())
    return _char(c)


#: ASCII: the normal form of every character and its length (0 for whitespace).
_ASCII_TABLE = {i: _text_char(chr(i)) for i in range(128)}
_ASCII_LEN = np.array([len(_ASCII_TABLE[i]) for i in range(128)], dtype=np.int64)
#: Texts shorter than this find their distinct characters by sorting, longer ones by counting.
_SORT_BELOW = 1 << 14


def normalise_text(text: str) -> tuple[str, np.ndarray]:
    """Normal form of a text and, per normal character, the index of the original character.

    One ``str.translate`` over the text with a table of the characters it has, and the
    offsets from the normal-form length of each character (0 for whitespace, 2 for
    ``\u00df`` -> ``ss``, ...), so no Python loop runs per character.
    """
    if text.isascii():
        lens = _ASCII_LEN[np.frombuffer(text.encode("ascii"), dtype=np.uint8)]
        norm = text.translate(_ASCII_TABLE)
    else:
        codes = np.frombuffer(text.encode("utf-32-le"), dtype=np.uint32)
        if len(codes) < _SORT_BELOW:
            present, inverse = np.unique(codes, return_inverse=True)
        else:                                   # counting beats sorting on long texts
            present, inverse = np.flatnonzero(np.bincount(codes)), None
        table = {c: _text_char(chr(c)) for c in present.tolist()}
        norm = text.translate(table)
        per_code = np.fromiter((len(v) for v in table.values()), dtype=np.int64, count=len(table))
        if inverse is None:
            lookup = np.zeros(int(present[-1]) + 1, dtype=np.int64)
            lookup[present] = per_code
            lens = lookup[codes]
        else:
            lens = per_code[inverse]
    origin = np.repeat(np.arange(len(text), dtype=np.int64), lens)
    return norm, origin
