"""Carry anchors across the two axes: time onto text nodes, characters onto time nodes.

Both directions are the same range join on global anchors (DuckDB, over Parquet):
a node takes the span of the aligned time words it overlaps on its own axis; a node
that overlaps none (a pause between words, a comma between tokens) becomes a point at
the end of the word before it (or the start of the word after it, at the very
beginning). Aligned time words are the bridge: they have both a character span (from
:mod:`engine.align.sequence`) and a time span (from their tier).

Only missing values are filled (``coalesce``), so what a layer brought itself wins.
"""
from __future__ import annotations

from concurrent.futures import Future, ThreadPoolExecutor
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import duckdb
import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq

from engine.align import ranges
from engine.align.sequence import GOOD
from engine.store import ANCHOR_COLUMNS, ROW_GROUP_SIZE, Batch, part_write_options

#: Layer props marking a layer whose nodes are the bridge between text and time.
TIME_WORDS = "time_words"
#: Reference layers whose ids/ordinals fill ``sent``, ``tok_*`` and ``word_*``.
SENTENCE_LAYER, TOKEN_LAYER, WORD_LAYER = "sentence", "token", "word"
_GOOD_SQL = "(" + ", ".join(f"'{c}'" for c in GOOD) + ")"


def sql_str(value: str) -> str:
    return "'" + value.replace("'", "''") + "'"


def ident(name: str) -> str:
    return '"' + name.replace('"', '""') + '"'


def parquet(paths: list[Path] | list[str], extra: str = "") -> str:
    files = "[" + ", ".join(sql_str(str(p)) for p in paths) + "]"
    return f"read_parquet({files}, union_by_name = true{extra})"


def layer_paths(batch: Batch, layer: str) -> list[Path]:
    """Parts of a layer as this batch will commit them: staged if written here, else stored."""
    staged = batch.staged_paths(layer)
    return staged if staged else batch.store.part_paths(layer)


def _time_word_layers(batch: Batch) -> list[str]:
    """Names of the layers that bridge text and time (stored, and declared in this batch)."""
    names = {n for n, (kind, props) in batch._layer_props.items() if props.get(TIME_WORDS)}
    for name, info in batch.store.layers().items():
        if batch.store.layer_props(name).get(TIME_WORDS):
            names.add(name)
    return sorted(names)


def time_word_paths(batch: Batch) -> list[Path]:
    """Parts of every layer that bridges text and time (stored, and staged in this batch)."""
    out: list[Path] = []
    for n in _time_word_layers(batch):
        out += layer_paths(batch, n)
    return out


def _bridge(words: list[Path]) -> str:
    return f"(SELECT * FROM {parquet(words)} WHERE align IN {_GOOD_SQL} AND t_start IS NOT NULL)"


def _transfer_sql(nodes: str, source: str, lo: str, hi: str, a: str, b: str, eps: str, between: bool = True) -> str:
    """Per node id needing ``a``/``b``: values taken from the source rows it overlaps on ``lo``/``hi``;
    ``between``: a node overlapping none takes the point where the one before ends (else the one
    after starts)."""
    return f"""
    WITH n AS (SELECT id, doc, {lo} AS lo, {hi} AS hi0,
                      CASE WHEN {hi} > {lo} THEN {hi} ELSE {lo} + {eps} END AS hi
               FROM {nodes} WHERE {a} IS NULL AND {lo} IS NOT NULL),
         w AS (SELECT doc, {lo} AS lo, {hi} AS hi, {a} AS a, {b} AS b FROM {source}),
         cover AS (SELECT n.id, min(w.a) AS a, max(w.b) AS b FROM n JOIN w
                   ON n.doc = w.doc AND w.lo < n.hi AND w.hi > n.lo GROUP BY n.id),
         before AS (SELECT n.id, w.b AS p FROM n ASOF JOIN w ON n.doc = w.doc AND n.lo >= w.hi),
         after AS (SELECT n.id, w.a AS p FROM n ASOF JOIN w ON n.doc = w.doc AND n.hi0 <= w.lo)
    SELECT n.id, {"coalesce(cover.a, before.p, after.p)" if between else "cover.a"} AS new_a,
           {"coalesce(cover.b, before.p, after.p)" if between else "cover.b"} AS new_b
    FROM n LEFT JOIN cover USING (id) LEFT JOIN before USING (id) LEFT JOIN after USING (id)"""


#: Per batch of node rows (columns as float64, NaN = NULL): {column: fill value, NaN = none}.
ArrayFill = Callable[[dict[str, np.ndarray]], dict[str, np.ndarray]]


@dataclass
class Fill:
    """One fill, as a DuckDB join (always) and as numpy range lookups (when the reference allows)."""
    sql: str
    cols: dict[str, str]
    arrays: ArrayFill | None = None
    needs: tuple[str, ...] = field(default=())

    def __iter__(self):          # unpacks like the (sql, cols) pair it replaced
        return iter((self.sql, self.cols))


def rewrite(con: duckdb.DuckDBPyConnection, paths: list[Path], out: Path, stages: list[list[Fill]]) -> int:
    """Write ``paths`` to ``out`` with each stage's columns filled by ``coalesce``, rows in order.

    A later stage sees the columns an earlier one filled. Streams row groups through the
    numpy fills when every fill has one (bounded memory, no join); otherwise one SQL
    rewrite per stage, as before.
    """
    stages = [s for s in stages if s]
    if all(f.arrays is not None for s in stages for f in s):
        try:
            rows = _rewrite_arrays(paths, out, stages)
        except _Fallback:
            out.unlink(missing_ok=True)
            rows = None
        if rows is not None:
            return rows
    rows = 0
    current = paths
    for k, stage in enumerate(stages):
        target = out if k == len(stages) - 1 else out.with_name(out.stem + f"--stage{k}.parquet")
        rows = _rewrite(con, current, target, [(f.sql, f.cols) for f in stage])
        if current is not paths:
            for p in current:
                p.unlink()
        current = [target]
    return rows


def _as_float(col: pa.ChunkedArray | pa.Array) -> np.ndarray:
    if pa.types.is_null(col.type):
        return np.full(len(col), np.nan)
    return col.cast(pa.float64()).to_numpy(zero_copy_only=False)


def _from_float(values: np.ndarray, typ: pa.DataType) -> pa.Array:
    missing = np.isnan(values)
    if pa.types.is_floating(typ):
        return pa.array(values, mask=missing).cast(typ)
    return pa.array(np.where(missing, 0, values).astype(np.int64), mask=missing).cast(typ)


def _rewrite_arrays(paths: list[Path], out: Path, stages: list[list[Fill]]) -> int | None:
    """The streaming rewrite; ``None`` when the parts' schemas do not unify (the SQL path decides)."""
    try:
        schema = pa.unify_schemas([pq.read_schema(p).remove_metadata() for p in paths])
    except (pa.ArrowInvalid, pa.ArrowTypeError):
        return None
    rows = 0
    # pyarrow writes without the GIL: the next row group is filled while one is written
    pending: list[Future] = []
    with pq.ParquetWriter(out, schema, **part_write_options(schema)) as writer, \
            ThreadPoolExecutor(max_workers=1) as pool:
        for path in paths:
            for rb in pq.ParquetFile(path).iter_batches(batch_size=ROW_GROUP_SIZE):
                table = pa.Table.from_batches([rb])
                cols = _fill_columns(table, schema, stages)
                if len(pending) >= 2:              # bounded memory: at most two row groups in flight
                    pending.pop(0).result()
                pending.append(pool.submit(writer.write_table, pa.table([cols[f.name] for f in schema], schema=schema),
                                           row_group_size=ROW_GROUP_SIZE))
                rows += table.num_rows
        for f in pending:
            f.result()
    return rows


def _fill_columns(table: pa.Table, schema: pa.Schema, stages: list[list[Fill]]) -> dict[str, pa.Array]:
    """The columns of ``schema`` for one slice of rows, with every stage's numpy fills applied."""
    cols = {f.name: (table.column(f.name).cast(f.type) if f.name in table.column_names
                     else pa.nulls(table.num_rows, f.type)) for f in schema}
    for stage in stages:
        numeric = {c: _as_float(cols[c]) for c in _NUMERIC if c in cols}
        updates: dict[str, pa.Array] = {}
        for fill in stage:
            for col, values in fill.arrays(numeric).items():
                if col not in cols:
                    continue
                old = numeric[col]
                updates[col] = _from_float(np.where(np.isnan(old), values, old), schema.field(col).type)
        cols.update(updates)
    return cols


#: The columns the numpy fills read.
_NUMERIC = ("doc", "start", "end", "t_start", "t_end", "sent", "tok_first", "tok_last", "word_first", "word_last")


def _rewrite(con: duckdb.DuckDBPyConnection, paths: list[Path], out: Path, fills: list[tuple[str, dict[str, str]]]
             ) -> int:
    """Write ``paths`` to ``out`` with columns replaced by ``coalesce(col, fill)``, rows in order.

    ``fills``: (SQL giving ``id`` and value columns, {column: value column}).
    """
    src = parquet(paths, ", filename = true, file_row_number = true")
    con.execute(f"CREATE OR REPLACE TEMP TABLE __n AS SELECT * FROM {src}")
    joins, repl = [], {}
    for k, (sql, cols) in enumerate(fills):
        con.execute(f"CREATE OR REPLACE TEMP TABLE __f{k} AS {sql}")
        joins.append(f"LEFT JOIN __f{k} USING (id)")
        for col, value in cols.items():
            repl[col] = f"coalesce(__n.{ident(col)}, __f{k}.{ident(value)})"
    have = {r[0] for r in con.execute("DESCRIBE __n").fetchall()}
    replace = ", ".join(f"CAST({v} AS {_type(con, c)}) AS {ident(c)}" for c, v in repl.items() if c in have)
    star = "__n.* EXCLUDE (filename, file_row_number)" + (f" REPLACE ({replace})" if replace else "")
    con.execute(f"COPY (SELECT {star} FROM __n {' '.join(joins)} ORDER BY __n.filename, __n.file_row_number) "
                f"TO {sql_str(str(out))} (FORMAT parquet, COMPRESSION zstd, ROW_GROUP_SIZE 122880)")
    rows = con.execute("SELECT count(*) FROM __n").fetchone()[0]
    con.execute("DROP TABLE __n")
    for k in range(len(fills)):
        con.execute(f"DROP TABLE __f{k}")
    return int(rows)


def _type(con: duckdb.DuckDBPyConnection, col: str) -> str:
    return next(t for c, t, *_ in con.execute("DESCRIBE __n").fetchall() if c == col)


class _Fallback(Exception):
    """A reference turned out unfit for range lookups mid-way: the SQL join decides."""


_REFERENCES: dict[tuple, ranges.Reference | None] = {}


def _reference(sql: str, paths: list[Path], lo: str, hi: str, values: tuple[str, ...], tie: str | None
               ) -> ranges.Reference | None:
    """Rows of ``sql`` (columns doc, lo, hi, values...) sorted for range lookups; ``None`` if unfit.

    Remembered per set of files (path, size, modification time): several layers of one
    import ask for the same reference.
    """
    key = (sql, lo, hi, values, tie, tuple((str(p), p.stat().st_size, p.stat().st_mtime_ns) for p in paths))
    if key in _REFERENCES:
        return _REFERENCES[key]
    with duckdb.connect() as con:
        cols = con.execute(sql).fetchnumpy()
    arrays = {k: np.ma.filled(np.ma.asarray(v).astype(np.float64), np.nan) for k, v in cols.items()}
    if np.isnan(arrays["lo"]).any() or np.isnan(arrays["hi"]).any():
        ref = None                                   # a one-sided key: only the join knows what it matches
    else:
        ref = ranges.sorted_reference(arrays["doc"], arrays["lo"], arrays["hi"],
                                      {v: arrays[v] for v in values}, tie)
    if len(_REFERENCES) > 16:
        _REFERENCES.clear()
    _REFERENCES[key] = ref
    return ref


def _node_ranges(c: dict[str, np.ndarray], ref: ranges.Reference, lo: np.ndarray, hi: np.ndarray,
                 doc: np.ndarray, within: bool, keys: tuple[np.ndarray, np.ndarray] | None = None
                 ) -> tuple[np.ndarray, np.ndarray]:
    """Reference index range per node, empty where the node has no span or the range is in another document.

    ``keys``: ``ref.key`` of ``lo`` and ``hi`` made by the caller (overlap only; NaN bounds give empty ranges).
    """
    valid = ~np.isnan(lo) & ~np.isnan(hi)
    if keys is not None and not within:
        j, k = ranges.overlap_range_keys(ref, *keys)
    else:
        lo, hi = np.where(valid, lo, 0), np.where(valid, hi, 0)
        j, k = (ranges.within_range if within else ranges.overlap_range)(ref, doc, lo, hi)
    j, k = np.where(valid, j, 0), np.where(valid, k, 0)
    ok = ranges.same_doc(ref, j, k, doc)
    if ok is None:
        raise _Fallback
    return np.where(ok, j, 0), np.where(ok, k, 0)


def _transfer_arrays(ref: ranges.Reference, lo: str, hi: str, a: str, b: str, eps: float,
                     between: bool = True) -> ArrayFill:
    """:func:`_transfer_sql` as range lookups: cover, else (``between``) the word before, else the word after."""
    def fill(c: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
        n = len(c["doc"])
        out_a, out_b = np.full(n, np.nan), np.full(n, np.nan)
        need = np.isnan(c[a]) & ~np.isnan(c[lo])
        m = len(ref.lo)
        if not need.any() or m == 0:
            return {a: out_a, b: out_b}
        doc, nlo, nhi0 = c["doc"][need], c[lo][need], c[hi][need]
        wide = nhi0 > nlo
        nhi = np.where(wide, nhi0, nlo + eps)
        # each bound's key once: the cover, before and after lookups share them
        lo_key, hi0_key = ref.key(doc, nlo), ref.key(doc, nhi0)
        hi_key = hi0_key.copy()
        if not wide.all():
            hi_key[~wide] = ref.key(doc[~wide], nhi[~wide])
        j, k = _node_ranges(c, ref, nlo, nhi, doc, within=False, keys=(lo_key, hi_key))
        cover_a = ranges.range_reduce(ref.values["a"], j, k, np.fmin)
        cover_b = ranges.range_reduce(ref.values["b"], j, k, np.fmax)
        if not between:
            out_a[need], out_b[need] = cover_a, cover_b
            return {a: out_a, b: out_b}
        ib = ranges.last_ending_by(ref, doc, nlo, lo_key)
        before = ranges.pick(ref.values["b"], np.maximum(ib, 0), ib >= 0)
        ia = ranges.first_starting_from(ref, doc, nhi0, hi0_key)
        after = ranges.pick(ref.values["a"], np.maximum(ia, 0), ia >= 0)
        new_a = np.where(np.isnan(cover_a), np.where(np.isnan(before), after, before), cover_a)
        new_b = np.where(np.isnan(cover_b), np.where(np.isnan(before), after, before), cover_b)
        out_a[need], out_b[need] = new_a, new_b
        return {a: out_a, b: out_b}
    return fill


def _bridge_reference(words: list[Path], lo: str, hi: str, a: str, b: str) -> ranges.Reference | None:
    sql = (f"SELECT doc, {lo} AS lo, {hi} AS hi, {a} AS a, {b} AS b FROM {_bridge(words)} "
           f"WHERE {lo} IS NOT NULL OR {hi} IS NOT NULL")
    return _reference(sql, words, "lo", "hi", ("a", "b"), None)


def chars_from_times(words: list[Path]) -> Fill:
    """Fill for time-only nodes: the characters of the aligned words they fall in or between."""
    ref = _bridge_reference(words, "t_start", "t_end", "start", '"end"')
    return Fill(_transfer_sql("__n", _bridge(words), "t_start", "t_end", "start", '"end"', "1e-9"),
                {"start": "new_a", "end": "new_b"},
                _rename(_transfer_arrays(ref, "t_start", "t_end", "a", "b", 1e-9), {"a": "start", "b": "end"},
                        {"start": "a", "end": "b"}) if ref else None)


def times_from_chars(words: list[Path]) -> Fill:
    """Fill for text-only nodes: the time span of the aligned words they cover.  A node that
    covers none (punctuation, or a word the timed words did not align to) has no time: a point
    at its neighbour's edge would count as a duration of 0 in every mean."""
    ref = _bridge_reference(words, "start", '"end"', "t_start", "t_end")
    return Fill(_transfer_sql("__n", _bridge(words), "start", '"end"', "t_start", "t_end", "1", between=False),
                {"t_start": "new_a", "t_end": "new_b"},
                _rename(_transfer_arrays(ref, "start", "end", "a", "b", 1.0, between=False),
                        {"a": "t_start", "b": "t_end"},
                        {"t_start": "a", "t_end": "b"}) if ref else None)


def _rename(fn: ArrayFill, out: dict[str, str], inp: dict[str, str]) -> ArrayFill:
    """Run ``fn`` with node columns also visible under other names (``a``/``b``), results renamed back."""
    def fill(c: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
        res = fn({**c, **{alias: c[col] for col, alias in inp.items()}})
        return {out[k]: v for k, v in res.items()}
    return fill


def _sentence_arrays(ref: ranges.Reference) -> ArrayFill:
    def fill(c: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
        j, k = _node_ranges(c, ref, c["start"], c["end"], c["doc"], within=True)
        return {"sent": ranges.range_reduce(ref.values["id"], j, k, np.fmin)}
    return fill


def _token_arrays(ref: ranges.Reference, first: str, last: str) -> ArrayFill:
    def fill(c: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
        j, k = _node_ranges(c, ref, c["start"], c["end"], c["doc"], within=False)
        return {first: ranges.range_reduce(ref.values["ord"], j, k, np.fmin),
                last: ranges.range_reduce(ref.values["ord"], j, k, np.fmax)}
    return fill


def structure_fills(batch: Batch) -> list[Fill]:
    """Fills for ``sent``, ``tok_first/last`` and ``word_first/last`` from the reference layers."""
    fills = []
    sent = batch.store.part_paths(SENTENCE_LAYER)
    if sent:
        ref = _reference(f'SELECT doc, start AS lo, "end" AS hi, id FROM {parquet(sent)} '
                         'WHERE start IS NOT NULL AND "end" IS NOT NULL AND id IS NOT NULL', sent, "lo", "hi",
                         ("id",), "id")
        fills.append(Fill(f"""SELECT __n.id, min(s.id) AS v FROM __n JOIN {parquet(sent)} s ON s.doc = __n.doc
                          AND s.start <= __n.start AND __n."end" <= s."end" GROUP BY __n.id""", {"sent": "v"},
                          _sentence_arrays(ref) if ref else None))
    for layer, first, last in ((TOKEN_LAYER, "tok_first", "tok_last"), (WORD_LAYER, "word_first", "word_last")):
        paths = batch.store.part_paths(layer)
        if paths:
            ref = _reference(f'SELECT doc, start AS lo, "end" AS hi, ord FROM {parquet(paths)} '
                             'WHERE start IS NOT NULL AND "end" IS NOT NULL AND ord IS NOT NULL', paths, "lo", "hi",
                             ("ord",), "ord")
            fills.append(Fill(f"""SELECT __n.id, min(t.ord) AS a, max(t.ord) AS b FROM __n JOIN {parquet(paths)} t
                              ON t.doc = __n.doc AND t.start < __n."end" AND t."end" > __n.start
                              GROUP BY __n.id""", {first: "a", last: "b"},
                              _token_arrays(ref, first, last) if ref else None))
    return fills


def new_row_filler(batch: Batch, *, time_axis: bool, exclude: set[str] = frozenset()):
    """A function completing rows of a new layer before they are written (what
    :func:`finalise_new_layer` would do at commit, without writing and reading them back).

    ``time_axis``: the rows came with times and take characters from the time words (those of
    the layers in ``exclude`` left out), then sentence and token references; otherwise they
    came with characters and take sentence and token references and times. The references
    are read once, here, for every call of the function. ``None`` when a reference is unfit
    for range lookups (finalise at commit: the SQL joins decide); the function itself returns
    ``None`` when a slice of rows turns out so.
    """
    words = [p for n in _time_word_layers(batch) if n not in exclude for p in layer_paths(batch, n)]
    if time_axis:
        stages = [s for s in ([chars_from_times(words)] if words else [], structure_fills(batch)) if s]
    else:
        stages = [s for s in (structure_fills(batch) + ([times_from_chars(words)] if words else []),) if s]
    if not all(f.arrays is not None for st in stages for f in st):
        return None

    def fill(table: pa.Table) -> pa.Table | None:
        if not stages or table.num_rows == 0:
            return table
        schema = pa.schema([pa.field(n, t) for n, t in ANCHOR_COLUMNS.items()]
                           + [f for f in table.schema if f.name not in ANCHOR_COLUMNS])
        pieces = []
        try:
            for k in range(0, table.num_rows, ROW_GROUP_SIZE):
                cols = _fill_columns(table.slice(k, ROW_GROUP_SIZE), schema, stages)
                pieces.append(pa.table([cols[f.name] for f in schema], schema=schema))
        except _Fallback:
            return None
        return pa.concat_tables(pieces)
    fill.gives_times = bool(words) and not time_axis
    return fill


def fill_new_rows(batch: Batch, table: pa.Table, *, exclude: set[str] = frozenset()) -> pa.Table | None:
    """Rows of a time-axis layer completed before they are written (see :func:`new_row_filler`)."""
    fill = new_row_filler(batch, time_axis=True, exclude=exclude)
    return None if fill is None else fill(table)


def finalise_new_layer(batch: Batch, layer: str, *, time_axis: bool) -> None:
    """Complete a layer staged in this batch: the missing axis, then sentence and token references.

    ``time_axis``: the layer's nodes came with times (tiers, time spans) and need characters;
    otherwise they came with characters and take times from the aligned time words.
    """
    paths = batch.staged_paths(layer)
    if not paths:
        return
    words = [p for p in time_word_paths(batch) if p not in paths]
    stages: list[list[Fill]] = []
    if time_axis and words:
        stages.append([chars_from_times(words)])
    fills = structure_fills(batch)
    if not time_axis and words:
        fills.append(times_from_chars(words))
    stages.append(fills)
    if any(stages):
        out = batch.stage / f"{layer}--final.parquet"
        with duckdb.connect() as con:
            rows = rewrite(con, paths, out, stages)
        batch.replace_staged(layer, out, rows)
    if not time_axis and words:
        kind, props = batch._layer_props[layer]
        props["time"] = True


def times_onto_stored_layers(batch: Batch, docs: set[int], skip: set[str]) -> list[str]:
    """Give the stored text layers of ``docs`` time spans from the time words of this batch.

    Returns the names of the layers rewritten (via :meth:`Batch.replace_layer`).
    """
    words = time_word_paths(batch)
    if not words or not docs:
        return []
    done = []
    doc_list = ", ".join(str(int(d)) for d in sorted(docs))
    with duckdb.connect() as con:
        for name, info in batch.store.layers().items():
            props = batch.store.layer_props(name)
            if info.kind == "edges" or name in skip or props.get(TIME_WORDS) or props.get("time_axis"):
                continue
            paths = batch.store.part_paths(name)
            if not paths:
                continue
            todo = con.execute(f"SELECT count(*) FROM {parquet(paths)} WHERE t_start IS NULL "
                               f"AND doc IN ({doc_list})").fetchone()[0]
            if not todo:
                continue
            out = batch.stage / f"replace-{name}.parquet"
            rewrite(con, paths, out, [[times_from_chars(words)]])
            batch.declare_layer(name, info.kind, {"time": True})
            batch.replace_layer(name, out)
            done.append(name)
    return done


def times_onto_new_layers(batch: Batch) -> list[str]:
    """Give the text layers staged in this batch their time spans from the time words already
    stored, so that a text layer imported after the time tiers gets the times it would have got
    before them (a finaliser every import runs last; layers that have their times are left).

    Returns the names of the layers rewritten."""
    staged_words = {n for n, (kind, props) in batch._layer_props.items() if props.get(TIME_WORDS)}
    words = [p for n in _time_word_layers(batch) if n not in staged_words for p in batch.store.part_paths(n)]
    if not words:
        return []
    done = []
    with duckdb.connect() as con:
        for layer, (kind, props) in list(batch._layer_props.items()):
            if kind == "edges" or props.get(TIME_WORDS) or props.get("time_axis"):
                continue
            paths = batch.staged_paths(layer)
            if not paths:
                continue
            names = {c.lower() for (c,) in con.execute(f"SELECT name FROM parquet_schema({sql_str(str(paths[0]))})")
                     .fetchall()}
            if not {"start", "end", "t_start"} <= names:
                continue
            todo = con.execute(f"SELECT count(*) FROM {parquet(paths)} WHERE t_start IS NULL AND start IS NOT NULL"
                               ).fetchone()[0]
            if not todo:
                continue
            out = batch.stage / f"{layer}--timed.parquet"
            rows = rewrite(con, paths, out, [[times_from_chars(words)]])
            batch.replace_staged(layer, out, rows)
            props["time"] = True
            done.append(layer)
    return done
