"""Range lookups on sorted anchors in numpy: the fills of :mod:`engine.align.anchor` without a join.

A reference layer (sentences, tokens, aligned time words) whose rows, sorted by start,
also have non-decreasing ends, answers "which rows overlap [lo, hi)" as one contiguous
index range found by two binary searches per node. That turns the range joins of the
SQL fills (quadratic within a document) into O((n + m) log m) arrays. A reference that
is not monotone (two word layers mixed, overlapping speakers) returns ``None`` from
:func:`sorted_reference`, and the caller keeps the SQL join.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass
class Reference:
    """Rows of a reference layer sorted by ``(lo, hi)``; ``lo`` and ``hi`` both non-decreasing."""
    doc: np.ndarray
    lo: np.ndarray
    hi: np.ndarray
    values: dict[str, np.ndarray]     # float64, NaN where NULL


def sorted_reference(doc: np.ndarray, lo: np.ndarray, hi: np.ndarray, values: dict[str, np.ndarray],
                     tie: str | None = None) -> Reference | None:
    """Sort by ``(lo, hi[, tie])``; ``None`` when the ends are then not non-decreasing."""
    keys = (values[tie], hi, lo) if tie else (hi, lo)
    order = np.lexsort(keys)
    hi_s = hi[order]
    if hi_s.size > 1 and (np.diff(hi_s) < 0).any():
        return None
    return Reference(doc[order], lo[order], hi_s, {k: v[order] for k, v in values.items()})


def overlap_range(ref: Reference, lo: np.ndarray, hi: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``[j, k)``: the reference rows with ``ref.lo < hi`` and ``ref.hi > lo`` (empty when j >= k)."""
    k = np.searchsorted(ref.lo, hi, side="left")
    j = np.searchsorted(ref.hi, lo, side="right")
    return j, k


def within_range(ref: Reference, lo: np.ndarray, hi: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``[j, k)``: the reference rows with ``ref.lo <= lo`` and ``hi <= ref.hi`` (containing the node)."""
    k = np.searchsorted(ref.lo, lo, side="right")
    j = np.searchsorted(ref.hi, hi, side="left")
    return j, k


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
