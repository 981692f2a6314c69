"""Character-level alignment of a layer's leaves to a document's primary text.

The leaves of a whole document are normalised and concatenated, the text is
normalised, and one global edit-distance alignment (edlib, mode NW) maps every leaf
character to a text character or to a gap. Global, not infix: with free text ends a
last word behind dropped punctuation ("time\". [5]") would rather be left out than
matched. A caller whose leaves cover only part of a text passes that part.
Offset arrays map the alignment back to leaves and original characters, so the cost
is one alignment per document, not one per leaf.

Each leaf gets a class:

* ``exact``: the text under its span is the leaf as written;
* ``normalised``: equal after :mod:`engine.align.normalise` (case, quotes, escapes);
* ``fuzzy``: at least :data:`FUZZY_MIN` of its characters match the text it spans;
* ``event``: a ``{laugh}``-style event that the text does not have (a point);
* ``unaligned``: none of that; kept as a point after the previous aligned leaf.
"""
from __future__ import annotations

import re
from dataclasses import dataclass
from typing import Sequence

import edlib
import numpy as np

from engine.align.normalise import is_event, normalise_form, normalise_text

#: Share of a leaf's characters that must match for a ``fuzzy`` alignment.
#: A rule of thumb (common practice: "at least half the characters agree").
FUZZY_MIN = 0.5
#: edlib maps symbols to bytes: at most this many distinct characters per alignment.
_EDLIB_ALPHABET = 256
CLASSES = ("exact", "normalised", "fuzzy", "event", "unaligned")
GOOD = ("exact", "normalised", "fuzzy")
_CIGAR = re.compile(r"(\d+)([=XID])")


@dataclass
class Alignment:
    """Per leaf: local character span ``[start, end)``, class and share of matching characters."""
    start: np.ndarray
    end: np.ndarray
    cls: list[str]
    score: np.ndarray

    def good(self) -> int:
        return sum(1 for c in self.cls if c in GOOD)


def align_forms(text: str, forms: Sequence[str], lo: int = 0, hi: int | None = None) -> Alignment:
    """Align ``forms`` (in order) to ``text[lo:hi]``; spans are character offsets into ``text``.

    Unaligned leaves before the first aligned one are put at ``lo``.
    """
    hi = len(text) if hi is None else hi
    n = len(forms)
    start = np.full(n, -1, dtype=np.int64)
    end = np.full(n, -1, dtype=np.int64)
    score = np.zeros(n, dtype=np.float64)
    target, origin = normalise_text(text[lo:hi])
    origin = origin + lo
    text_has_events = "{" in target
    # events the text does not have are not aligned: they would only be gaps
    use = [not (is_event(f) and not text_has_events) for f in forms]
    parts = [normalise_form(f) if u else "" for f, u in zip(forms, use)]
    lens = np.fromiter((len(p) for p in parts), dtype=np.int64, count=n)
    query = "".join(parts)
    if query and target:
        q_leaf = np.repeat(np.arange(n, dtype=np.int64), lens)
        cols_q, cols_t, cols_eq = _columns(query, target)
        leaf = q_leaf[cols_q]
        n_eq = np.bincount(leaf[cols_eq], minlength=n)
        big = np.iinfo(np.int64).max
        tmin = np.full(n, big, dtype=np.int64)
        tmax = np.full(n, -1, dtype=np.int64)
        np.minimum.at(tmin, leaf, cols_t)
        np.maximum.at(tmax, leaf, cols_t)
        has = n_eq > 0
        width = np.where(has, tmax - tmin + 1, 0)
        score = np.where(has, n_eq / np.maximum(np.maximum(lens, width), 1), 0.0)
        # back to original characters: first char of the first, past the last
        start = np.where(has, origin[np.where(has, tmin, 0)], -1)
        end = np.where(has, origin[np.where(has, tmax, 0)] + 1, -1)
    cls: list[str] = []
    prev_end = lo
    for i, form in enumerate(forms):
        s, e = int(start[i]), int(end[i])
        if not use[i]:
            c = "event"
        elif s < 0 and is_event(form):
            c = "event"
        elif s < 0:
            c = "unaligned"
        elif text[s:e] == form:
            c = "exact"
        elif normalise_form(text[s:e]) == parts[i]:
            c = "normalised"
        elif score[i] >= FUZZY_MIN:
            c = "fuzzy"
        else:
            c = "unaligned"
        if c in ("event", "unaligned"):
            start[i] = end[i] = prev_end
            if c == "unaligned":
                score[i] = 0.0
        else:
            prev_end = int(end[i])
        cls.append(c)
    return Alignment(start, end, cls, score)


def _columns(query: str, target: str) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Matched columns of the alignment: query index, target index, equal or not."""
    q, t = _alphabet_safe(query, target)
    res = edlib.align(q, t, mode="NW", task="path")
    t0 = 0
    pairs = _CIGAR.findall(res["cigar"] or "")
    counts = np.fromiter((int(k) for k, _ in pairs), dtype=np.int64, count=len(pairs))
    ops = np.array([op for _, op in pairs], dtype="<U1")
    per_col = np.repeat(ops, counts)
    q_adv = per_col != "D"
    t_adv = per_col != "I"
    qpos = np.cumsum(q_adv) - 1
    tpos = np.cumsum(t_adv) - 1 + t0
    matched = q_adv & t_adv
    return qpos[matched], tpos[matched], (per_col[matched] == "=")


def _alphabet_safe(query: str, target: str) -> tuple[str, str]:
    """Map rare characters to one shared stand-in when there are too many distinct ones.

    edlib handles at most 256 symbols; a stand-in only lets rare characters pair up
    with each other, and the classes are decided on the original strings afterwards.
    """
    chars = set(query) | set(target)
    if len(chars) <= _EDLIB_ALPHABET:
        return query, target
    from collections import Counter
    freq = Counter(target) + Counter(query)
    keep = {c for c, _ in freq.most_common(_EDLIB_ALPHABET - 1)}
    stand_in = "\x00"
    table = {ord(c): stand_in for c in chars if c not in keep}
    return query.translate(table), target.translate(table)
