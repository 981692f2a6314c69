"""Range lookups in numpy against DuckDB's own join over the same rows (the reference semantics).

The SQL fills of ``engine.align.anchor`` are range joins; the numpy path must give the same
values for every node, including nodes without a span, zero-width nodes, nodes between
tokens and nodes at a document's edge. DuckDB (a general-purpose library) evaluates the join.
"""
from __future__ import annotations

import duckdb
import numpy as np
import pyarrow as pa
import pytest

from engine.align import ranges
from engine.align.anchor import _token_arrays, _sentence_arrays, _transfer_arrays, _transfer_sql


def _segmentation(rng: np.random.Generator, docs: int, bounds: list | None = None) -> pa.Table:
    """Tokens in document order: non-overlapping spans with gaps; documents one apart as in a store.

    ``bounds`` gets each document's ``[base, base + length]``.
    """
    rows = {"doc": [], "start": [], "end": [], "ord": [], "t_start": [], "t_end": []}
    pos, t, o = 0, 0.0, 0
    for d in range(docs):
        base, t = pos, 0.0          # every recording starts at 0 s
        for _ in range(int(rng.integers(0, 12))):
            pos += int(rng.integers(0, 3))
            width = int(rng.integers(1, 5))
            rows["doc"].append(d), rows["start"].append(pos), rows["end"].append(pos + width)
            rows["ord"].append(o)
            t += float(rng.integers(0, 3)) / 4
            dur = float(rng.integers(1, 4)) / 4
            rows["t_start"].append(t), rows["t_end"].append(t + dur)
            pos, t, o = pos + width, t + dur, o + 1
        pos += int(rng.integers(0, 4))
        if bounds is not None:
            bounds.append((base, pos))
        pos += 1
    return pa.table({"doc": pa.array(rows["doc"], pa.int32()), **{k: v for k, v in rows.items() if k != "doc"}})


def _nodes(rng: np.random.Generator, n: int, bounds: list) -> pa.Table:
    """Nodes inside their documents: any width from zero, some without a span."""
    doc = rng.integers(0, len(bounds), n)
    lo = np.array([bounds[d][0] for d in doc])
    hi = np.array([bounds[d][1] for d in doc])
    start = (lo + rng.integers(0, 1 << 30, n) % (hi - lo + 1)).astype(float)
    end = np.minimum(start + rng.integers(0, 6, n), hi)
    start[rng.random(n) < 0.1] = np.nan
    return pa.table({"id": np.arange(n), "doc": doc.astype(np.int32),
                     "start": pa.array(start, from_pandas=True), "end": pa.array(end, from_pandas=True),
                     "t_start": pa.array(np.where(rng.random(n) < 0.2, start / 2, np.nan), from_pandas=True),
                     "t_end": pa.array(np.full(n, np.nan), from_pandas=True)})


def _columns(t: pa.Table) -> dict[str, np.ndarray]:
    return {c: t.column(c).cast(pa.float64()).to_numpy(zero_copy_only=False) for c in t.column_names}


def _ref(t: pa.Table, lo: str, hi: str, values: dict[str, str], tie: str | None = None) -> ranges.Reference:
    c = _columns(t)
    ref = ranges.sorted_reference(c["doc"], c[lo], c[hi], {k: c[v] for k, v in values.items()}, tie)
    assert ref is not None
    return ref


def _value(x: float):
    return None if np.isnan(x) else x


def _sql(con, sql: str) -> dict[int, tuple]:
    return {int(r[0]): r[1:] for r in con.execute(sql).fetchall()}


@pytest.mark.parametrize("seed", range(6))
def test_token_and_sentence_ranges_equal_the_join(seed: int) -> None:
    rng = np.random.default_rng(seed)
    bounds: list = []
    tok = _segmentation(rng, 5, bounds)
    nodes = _nodes(rng, 400, bounds)
    con = duckdb.connect()
    con.register("tok", tok)
    con.register("nodes", nodes)
    con.register("sents", tok)   # a segmentation doubles as sentences for the containment test
    got = _token_arrays(_ref(tok, "start", "end", {"ord": "ord"}, "ord"), "a", "b")(_columns(nodes))
    want = _sql(con, """SELECT n.id, min(t.ord), max(t.ord) FROM nodes n LEFT JOIN tok t ON t.doc = n.doc
                        AND t.start < n."end" AND t."end" > n.start GROUP BY n.id""")
    sent = _sentence_arrays(_ref(tok, "start", "end", {"id": "ord"}, "id"))(_columns(nodes))
    want_s = _sql(con, """SELECT n.id, min(s.ord) FROM nodes n LEFT JOIN sents s ON s.doc = n.doc
                          AND s.start <= n.start AND n."end" <= s."end" GROUP BY n.id""")
    assert 0 < sum(v[0] is not None for v in want.values()) < nodes.num_rows   # both cases occur
    for i in range(nodes.num_rows):
        a, b = want[i]
        assert (_value(got["a"][i]), _value(got["b"][i]), _value(sent["sent"][i])) == (a, b, want_s[i][0])


@pytest.mark.parametrize("seed", range(6))
def test_time_transfer_equals_the_asof_join(seed: int) -> None:
    rng = np.random.default_rng(100 + seed)
    bounds: list = []
    tokens = _segmentation(rng, 4, bounds)
    nodes = _nodes(rng, 400, bounds)
    con = duckdb.connect()
    con.register("w0", tokens)
    con.register("__n", nodes)
    want = _sql(con, _transfer_sql("__n", "w0", "start", '"end"', "t_start", "t_end", "1"))
    ref = _ref(tokens, "start", "end", {"a": "t_start", "b": "t_end"})
    c = _columns(nodes)
    got = _transfer_arrays(ref, "start", "end", "a", "b", 1.0)({**c, "a": c["t_start"], "b": c["t_end"]})
    need = np.isnan(c["t_start"]) & ~np.isnan(c["start"])
    assert set(want) == {i for i in range(nodes.num_rows) if need[i]}
    assert any(v[0] is not None for v in want.values())
    for i, (a, b) in want.items():
        assert (_value(got["a"][i]), _value(got["b"][i])) == (a, b)


def test_overlapping_reference_is_refused() -> None:
    """Two token layers mixed (ends not non-decreasing by start): no range lookup, the join decides."""
    doc = np.zeros(3)
    assert ranges.sorted_reference(doc, np.array([0.0, 1.0, 2.0]), np.array([5.0, 2.0, 3.0]), {}) is None


def test_rows_already_in_order_skip_the_sort_and_match_lexsort():
    """``_in_order`` says yes exactly when numpy's lexsort would return the identity."""
    from engine.align.ranges import _in_order
    rng = np.random.default_rng(7)
    for _ in range(200):
        keys = tuple(rng.integers(0, 3, 8).astype(np.float64) for _ in range(3))
        if rng.random() < .5:                          # half of them sorted first
            order = np.lexsort(keys)
            keys = tuple(k[order] for k in keys)
        assert _in_order(keys) == np.array_equal(np.lexsort(keys), np.arange(8))
