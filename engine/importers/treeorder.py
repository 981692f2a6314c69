"""Depth and entry/exit numbers of many dependency trees at once, with numpy.

Every tree gets one block of a single counter: a node's *entry* is counted when a
depth-first walk (children in word order) reaches it and its *exit* when the walk
leaves it, so ``b`` is an ancestor of ``a`` exactly when
``entry(b) < entry(a) and exit(a) < exit(b)``: ancestry becomes interval containment,
a range predicate. Computed without a Python loop over nodes: depth by pointer
jumping, subtree sizes level by level, preorder ranks from sibling offsets, and then
``entry = 2 * preorder - depth`` and ``exit = entry + 2 * size - 1``.

>>> o = tree_order(np.array([2, 0, 2]), np.array([0]))   # "a <- b -> c", b the root
>>> o.depth.tolist(), o.entry.tolist(), o.exit.tolist()
([1, 0, 1], [1, 0, 3], [2, 5, 4])
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np


class TreeError(ValueError):
    """Rows on (or hanging from) a cycle: they cannot be reached from their root."""

    def __init__(self, nodes: np.ndarray) -> None:
        super().__init__(f"{len(nodes)} nodes are not reachable from a root")
        self.nodes = nodes


@dataclass
class TreeOrder:
    parent: np.ndarray   # row index of the parent, -1 at a root
    depth: np.ndarray
    entry: np.ndarray
    exit: np.ndarray


def tree_order(heads: np.ndarray, starts: np.ndarray) -> TreeOrder:
    """Number the trees given by local 1-based ``heads`` (0 = root) of sentences at ``starts``.

    Rows of one sentence are consecutive and in word order; ``starts`` holds the
    first row of each sentence. Raises :class:`TreeError` if some rows lie on a cycle.
    """
    heads = np.asarray(heads, dtype=np.int64)
    n = len(heads)
    lengths = np.diff(np.r_[starts, n])
    first = np.repeat(np.asarray(starts, dtype=np.int64), lengths)
    parent = np.where(heads > 0, first + heads - 1, -1)

    # depth by pointer jumping: log2(longest sentence) rounds
    depth = (parent >= 0).astype(np.int64)
    anc = parent.copy()
    rounds = int(np.ceil(np.log2(max(int(lengths.max()) if n else 1, 2)))) + 1
    for _ in range(rounds):
        live = anc >= 0
        if not live.any():
            break
        depth = depth + np.where(live, depth[np.maximum(anc, 0)], 0)
        anc = np.where(live, anc[np.maximum(anc, 0)], -1)
    if (anc >= 0).any():
        raise TreeError(np.flatnonzero(anc >= 0))

    # subtree sizes, deepest level first
    size = np.ones(n, dtype=np.int64)
    by_depth = np.argsort(depth, kind="stable")
    bounds = np.searchsorted(depth[by_depth], np.arange(depth.max() + 2 if n else 1))
    for d in range(len(bounds) - 2, 0, -1):
        rows = by_depth[bounds[d]:bounds[d + 1]]
        size += np.bincount(parent[rows], weights=size[rows], minlength=n).astype(np.int64)

    # offset of each node among its siblings: sizes of the earlier siblings
    order = np.argsort(parent, kind="stable")
    sizes = size[order]
    csum = np.cumsum(sizes)
    group_start = np.r_[True, parent[order][1:] != parent[order][:-1]]
    base = np.maximum.accumulate(np.where(group_start, csum - sizes, 0))
    before = np.empty(n, dtype=np.int64)
    before[order] = csum - sizes - base

    # preorder ranks, top-down; a root's rank is its sentence's first row
    pre = np.where(parent < 0, first, 0)
    for d in range(1, len(bounds) - 1):
        rows = by_depth[bounds[d]:bounds[d + 1]]
        pre[rows] = pre[parent[rows]] + 1 + before[rows]
    entry = 2 * pre - depth
    return TreeOrder(parent=parent, depth=depth, entry=entry, exit=entry + 2 * size - 1)
