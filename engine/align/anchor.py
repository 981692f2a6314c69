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

from pathlib import Path

import duckdb

from engine.align.sequence import GOOD
from engine.store import Batch

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


def time_word_paths(batch: Batch) -> list[Path]:
    """Parts of every layer that bridges text and time (stored, and staged in this batch)."""
    names = {n for n, (kind, props) in batch._layer_props.items() if props.get(TIME_WORDS)}
    for name, info in batch.store.layers().items():
        if batch.store.layer_props(name).get(TIME_WORDS):
            names.add(name)
    out: list[Path] = []
    for n in sorted(names):
        out += layer_paths(batch, n)
    return out


def _bridge(words: list[Path]) -> str:
    return f"(SELECT * FROM {parquet(words)} WHERE align IN {_GOOD_SQL} AND t_start IS NOT NULL)"


def _transfer_sql(nodes: str, source: str, lo: str, hi: str, a: str, b: str, eps: str) -> str:
    """Per node id needing ``a``/``b``: values taken from the source rows it overlaps on ``lo``/``hi``."""
    return f"""
    WITH n AS (SELECT id, doc, {lo} AS lo, {hi} AS hi0,
                      CASE WHEN {hi} > {lo} THEN {hi} ELSE {lo} + {eps} END AS hi
               FROM {nodes} WHERE {a} IS NULL AND {lo} IS NOT NULL),
         w AS (SELECT doc, {lo} AS lo, {hi} AS hi, {a} AS a, {b} AS b FROM {source}),
         cover AS (SELECT n.id, min(w.a) AS a, max(w.b) AS b FROM n JOIN w
                   ON n.doc = w.doc AND w.lo < n.hi AND w.hi > n.lo GROUP BY n.id),
         before AS (SELECT n.id, w.b AS p FROM n ASOF JOIN w ON n.doc = w.doc AND n.lo >= w.hi),
         after AS (SELECT n.id, w.a AS p FROM n ASOF JOIN w ON n.doc = w.doc AND n.hi0 <= w.lo)
    SELECT n.id, coalesce(cover.a, before.p, after.p) AS new_a, coalesce(cover.b, before.p, after.p) AS new_b
    FROM n LEFT JOIN cover USING (id) LEFT JOIN before USING (id) LEFT JOIN after USING (id)"""


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
    star = f"__n.* EXCLUDE (filename, file_row_number)" + (f" REPLACE ({replace})" if replace else "")
    con.execute(f"COPY (SELECT {star} FROM __n {' '.join(joins)} ORDER BY __n.filename, __n.file_row_number) "
                f"TO {sql_str(str(out))} (FORMAT parquet, COMPRESSION zstd, ROW_GROUP_SIZE 122880)")
    rows = con.execute("SELECT count(*) FROM __n").fetchone()[0]
    con.execute("DROP TABLE __n")
    for k in range(len(fills)):
        con.execute(f"DROP TABLE __f{k}")
    return int(rows)


def _type(con: duckdb.DuckDBPyConnection, col: str) -> str:
    return next(t for c, t, *_ in con.execute("DESCRIBE __n").fetchall() if c == col)


def chars_from_times(words: list[Path]) -> tuple[str, dict[str, str]]:
    """Fill for time-only nodes: the characters of the aligned words they fall in or between."""
    return (_transfer_sql("__n", _bridge(words), "t_start", "t_end", "start", '"end"', "1e-9"),
            {"start": "new_a", "end": "new_b"})


def times_from_chars(words: list[Path]) -> tuple[str, dict[str, str]]:
    """Fill for text-only nodes: the time span of the aligned words they cover."""
    return (_transfer_sql("__n", _bridge(words), "start", '"end"', "t_start", "t_end", "1"),
            {"t_start": "new_a", "t_end": "new_b"})


def structure_fills(batch: Batch) -> list[tuple[str, dict[str, str]]]:
    """Fills for ``sent``, ``tok_first/last`` and ``word_first/last`` from the reference layers."""
    fills = []
    sent = batch.store.part_paths(SENTENCE_LAYER)
    if sent:
        fills.append((f"""SELECT __n.id, min(s.id) AS v FROM __n JOIN {parquet(sent)} s ON s.doc = __n.doc
                          AND s.start <= __n.start AND __n."end" <= s."end" GROUP BY __n.id""", {"sent": "v"}))
    for layer, first, last in ((TOKEN_LAYER, "tok_first", "tok_last"), (WORD_LAYER, "word_first", "word_last")):
        paths = batch.store.part_paths(layer)
        if paths:
            fills.append((f"""SELECT __n.id, min(t.ord) AS a, max(t.ord) AS b FROM __n JOIN {parquet(paths)} t
                              ON t.doc = __n.doc AND t.start < __n."end" AND t."end" > __n.start
                              GROUP BY __n.id""", {first: "a", last: "b"}))
    return fills


def finalise_new_layer(batch: Batch, layer: str, *, time_axis: bool) -> None:
    """Complete a layer staged in this batch: the missing axis, then sentence and token references.

    ``time_axis``: the layer's nodes came with times (tiers, time spans) and need characters;
    otherwise they came with characters and take times from the aligned time words.
    """
    paths = batch.staged_paths(layer)
    if not paths:
        return
    words = [p for p in time_word_paths(batch) if p not in paths]
    with duckdb.connect() as con:
        if time_axis and words:
            out = batch.stage / f"{layer}--chars.parquet"
            rows = _rewrite(con, paths, out, [chars_from_times(words)])
            batch.replace_staged(layer, out, rows)
            paths = batch.staged_paths(layer)
        fills = structure_fills(batch)
        if not time_axis and words:
            fills.append(times_from_chars(words))
        if fills:
            out = batch.stage / f"{layer}--final.parquet"
            rows = _rewrite(con, paths, out, fills)
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
            _rewrite(con, paths, out, [times_from_chars(words)])
            batch.declare_layer(name, info.kind, {"time": True})
            batch.replace_layer(name, out)
            done.append(name)
    return done
