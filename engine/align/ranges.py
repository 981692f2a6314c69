"""Range lookups on sorted anchors in numpy: the fills of :mod:`engine.align.anchor` without a join.

A reference layer (sentences, tokens, aligned time words) whose rows, sorted by start
within each document, also have non-decreasing ends, answers "which rows overlap
[lo, hi)" as one contiguous index range found by two binary searches per node. Times
start at 0 in every document, so the searches run on exact integer keys
``(doc, rank of the value among the reference's values)``, never on times shifted by
a document offset (that would lose the sub-nanosecond tolerance). That turns the range joins of the
SQL fills (quadratic within a document) into O((n + m) log m) arrays. A reference that
is not monotone (two word layers mixed, overlapping speakers) returns ``None`` from
:func:`sorted_reference`, and the caller keeps the SQL join.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass
class Reference:
    """Rows of a reference layer sorted by ``(doc, lo, hi)``, ``lo`` and ``hi`` non-decreasing per doc.

    ``lo``/``hi`` are integer keys (see :meth:`key`); ``values`` are float64, NaN where NULL.
    """
    doc: np.ndarray
    lo: np.ndarray
    hi: np.ndarray
    values: dict[str, np.ndarray]
    points: np.ndarray                # sorted distinct values of lo and hi

    def key(self, doc: np.ndarray, x: np.ndarray) -> np.ndarray:
        """Order-preserving integer key of ``(doc, x)``: a value equal to a reference value gets its
        even rank, one between two gets the odd number between them."""
        i = np.searchsorted(self.points, x, side="left")
        equal = np.zeros(len(x), dtype=bool)
        inside = i < len(self.points)
        equal[inside] = self.points[i[inside]] == x[inside]
        rank = np.where(equal, 2 * i, 2 * i - 1) + 1
        return doc.astype(np.int64) * (2 * len(self.points) + 2) + rank


def sorted_reference(doc: np.ndarray, lo: np.ndarray, hi: np.ndarray, values: dict[str, np.ndarray],
                     tie: str | None = None) -> Reference | None:
    """Sort by ``(doc, lo, hi[, tie])``; ``None`` when the ends are then not non-decreasing per doc."""
    keys = (values[tie], hi, lo, doc) if tie else (hi, lo, doc)
    points = np.unique(np.concatenate([lo, hi]))
    if _in_order(keys):                  # stored layers mostly are: lexsort would return the identity
        ref = Reference(doc, lo, hi, dict(values), points)
    else:
        order = np.lexsort(keys)
        ref = Reference(doc[order], lo[order], hi[order], {k: v[order] for k, v in values.items()}, points)
    ref.lo, ref.hi = ref.key(ref.doc, ref.lo), ref.key(ref.doc, ref.hi)
    if ref.hi.size > 1 and (np.diff(ref.hi) < 0).any():
        return None
    return ref


def _in_order(keys: tuple[np.ndarray, ...]) -> bool:
    """Are the rows already sorted by ``keys`` (last key primary, as for ``np.lexsort``)?"""
    if len(keys[0]) < 2:
        return True
    tied = np.ones(len(keys[0]) - 1, dtype=bool)        # rows equal on every key so far
    for k in reversed(keys):
        a, b = k[:-1], k[1:]
        if (tied & (b < a)).any():
            return False
        tied &= b == a
    return True


def overlap_range(ref: Reference, doc: np.ndarray, lo: np.ndarray, hi: np.ndarray
                  ) -> tuple[np.ndarray, np.ndarray]:
    """``[j, k)``: the reference rows of ``doc`` with ``ref.lo < hi`` and ``ref.hi > lo`` (empty when j >= k)."""
    return overlap_range_keys(ref, ref.key(doc, lo), ref.key(doc, hi))


def overlap_range_keys(ref: Reference, lo_key: np.ndarray, hi_key: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """:func:`overlap_range` on keys already made by :meth:`Reference.key` (a caller with several lookups)."""
    k = np.searchsorted(ref.lo, hi_key, side="left")
    j = np.searchsorted(ref.hi, lo_key, side="right")
    return j, k


def within_range(ref: Reference, doc: np.ndarray, lo: np.ndarray, hi: np.ndarray
                 ) -> tuple[np.ndarray, np.ndarray]:
    """``[j, k)``: the reference rows of ``doc`` with ``ref.lo <= lo`` and ``hi <= ref.hi`` (containing the node)."""
    k = np.searchsorted(ref.lo, ref.key(doc, lo), side="right")
    j = np.searchsorted(ref.hi, ref.key(doc, hi), side="left")
    return j, k


def last_ending_by(ref: Reference, doc: np.ndarray, x: np.ndarray, x_key: np.ndarray | None = None
                   ) -> np.ndarray:
    """Index of the last reference row of ``doc`` with ``hi <= x``; -1 if none (``x_key``: ``ref.key(doc, x)``)."""
    i = np.searchsorted(ref.hi, ref.key(doc, x) if x_key is None else x_key, side="right") - 1
    ok = (i >= 0) & (ref.doc[np.maximum(i, 0)] == doc) if len(ref.hi) else np.zeros(len(x), dtype=bool)
    return np.where(ok, i, -1)


def first_starting_from(ref: Reference, doc: np.ndarray, x: np.ndarray, x_key: np.ndarray | None = None
                        ) -> np.ndarray:
    """Index of the first reference row of ``doc`` with ``lo >= x``; -1 if none (or ``x`` is NaN)."""
    m = len(ref.lo)
    i = np.searchsorted(ref.lo, ref.key(doc, x) if x_key is None else x_key, side="left")
    ok = (i < m) & ~np.isnan(x)
    if m:
        ok &= ref.doc[np.minimum(i, m - 1)] == doc
    return np.where(ok, i, -1)


def same_doc(ref: Reference, j: np.ndarray, k: np.ndarray, doc: np.ndarray) -> np.ndarray | None:
    """Per node, is its non-empty range inside its own document? ``None`` if a range spans documents.

    Documents are disjoint on the global line, so a range always is; the check keeps
    the join's ``doc =`` condition honest instead of assuming it.
    """
    has = j < k
    if not has.any():
        return has
    jj, kk = j[has], k[has] - 1
    if (ref.doc[jj] != ref.doc[kk]).any():
        return None
    out = np.zeros(len(j), dtype=bool)
    out[has] = ref.doc[jj] == doc[has]
    return out


def range_reduce(values: np.ndarray, j: np.ndarray, k: np.ndarray, op: np.ufunc) -> np.ndarray:
    """``op`` (``np.fmin``/``np.fmax``: NaN = NULL is skipped) over ``values[j:k]``; NaN where empty."""
    n = len(j)
    out = np.full(n, np.nan)
    has = j < k
    if not has.any():
        return out
    jj, kk = j[has], k[has]
    order = np.argsort(jj, kind="stable")           # sorted starts: the in-between segments sum to <= m
    idx = np.empty(2 * len(order), dtype=np.int64)
    idx[0::2], idx[1::2] = jj[order], kk[order]
    padded = np.append(values.astype(np.float64, copy=False), np.nan)
    red = op.reduceat(padded, idx)[0::2]
    res = np.empty(len(order))
    res[order] = red
    out[has] = res
    return out


def pick(values: np.ndarray, index: np.ndarray, valid: np.ndarray) -> np.ndarray:
    """``values[index]`` where ``valid``, NaN elsewhere."""
    out = np.full(len(index), np.nan)
    if valid.any():
        out[valid] = values[index[valid]]
    return out
