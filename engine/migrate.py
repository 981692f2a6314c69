"""``strata migrate``: bring a corpus of an older schema to the current one, all or nothing.

Schema 1 named the CoNLL-U syntactic words ``token`` and the surface tokens ``word``, the
reverse of the CoNLL-U standard, and its ordinal columns followed (``tok_first`` counted
syntactic words).  Schema 2 swaps both, and calls the layer kind of a segmentation
``sequence``.  Since node ids, ordinals and anchors are the same under either name, the
migration renames and rewrites:

* every CoNLL-U layer pair ``P.token``/``P.word`` swaps names (folders, catalog rows, the
  ``nodes`` of edge sets, ``anchor = tokens:LAYER`` of span layers);
* every node part is rewritten with ``tok_first/tok_last`` and ``word_first/word_last``
  swapped, and props ``token_layer``/``word_layer`` swap keys after the names are mapped
  (so both again name the layer their columns count);
* kind ``token`` becomes ``sequence``.

Schema 2 kept times as binary floating-point seconds; schema 3 keeps whole microseconds.  The
float of a time read from a decimal text with at most 6 places is the double nearest to it,
so ``round(t * 10^6)`` gives back that text's microseconds exactly.

Schema 3 gave a text node that no aligned timed word covers (punctuation, an empty node, a word
the aligner missed) a zero-width point at its neighbour's edge; schema 4 leaves its time NULL.
Every text layer that took its times from the timed words gets them again from the stored
timed words (``align.anchor.times_from_chars``), the one step that computes.  An older corpus
gets every later step; ``meta.schema_version`` becomes 4.

The new corpus is built in a hidden folder beside the old one; only when it is complete are
the folders exchanged (two renames), so a failure or an interrupt leaves the old corpus as it
was.  A migrated corpus holds the same rows as a fresh import of the same files (tested).
"""
from __future__ import annotations

import json
import os
import shutil
from pathlib import Path

import duckdb
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.parquet as pq

from engine.align.anchor import TIME_WORDS, rewrite, times_from_chars
from engine.errors import StrataError
from engine.lock import writer_lock
from engine.store import CATALOG_FILE, ROW_GROUP_SIZE, SCHEMA_VERSION, Store, part_write_options

COLUMN_SWAP = {"tok_first": "word_first", "tok_last": "word_last",
               "word_first": "tok_first", "word_last": "tok_last"}


def _times_in_microseconds(table: pa.Table) -> pa.Table:
    """Float seconds -> whole microseconds in ``t_start``/``t_end`` (already integers: kept)."""
    for name in ("t_start", "t_end"):
        i = table.schema.get_field_index(name)
        if i >= 0 and pa.types.is_floating(table.schema.field(i).type):
            us = pc.cast(pc.round(pc.multiply(table.column(i), 1_000_000.0)), pa.int64())
            table = table.set_column(i, pa.field(name, pa.int64()), us)
    return table


def layer_renames(layers: dict[str, tuple[str, dict]]) -> dict[str, str]:
    """Old -> new name of every CoNLL-U layer pair (any prefix).

    >>> layer_renames({"token": ("token", {"format": "conllu"}), "word": ("token", {"format": "conllu"}),
    ...                "p.token": ("token", {"format": "conllu"}), "p.word": ("token", {"format": "conllu"})})
    {'token': 'word', 'word': 'token', 'p.token': 'p.word', 'p.word': 'p.token'}
    """
    out: dict[str, str] = {}
    for name, (_, props) in layers.items():
        prefix, _, last = name.rpartition(".")
        twin = f"{prefix}.word" if prefix else "word"
        if last == "token" and props.get("format") == "conllu" and layers.get(twin, ("", {}))[1].get("format") == "conllu":
            out[name], out[twin] = twin, name
    return out


def new_props(props: dict, renames: dict[str, str]) -> dict:
    """Names mapped, then ``token_layer``/``word_layer`` swapped (see the module docstring)."""
    def name(v):
        return renames.get(v, v) if isinstance(v, str) else v
    out = {k: ([name(x) for x in v] if k == "edge_sets" else name(v)) if k in
           ("nodes", "token_layer", "word_layer", "sentence_layer", "edge_sets") else v for k, v in props.items()}
    if "token_layer" in out or "word_layer" in out:
        tok, word = out.pop("token_layer", None), out.pop("word_layer", None)
        if word is not None:
            out["token_layer"] = word
        if tok is not None:
            out["word_layer"] = tok
    anchor = out.get("anchor")
    if isinstance(anchor, str) and anchor.startswith("tokens:"):
        out["anchor"] = "tokens:" + name(anchor[len("tokens:"):])
    return out


def migrate(root: str | os.PathLike, *, progress=None) -> dict:
    """Migrate the corpus at ``root`` to the current schema; returns what was done."""
    root = Path(root)
    if not (root / CATALOG_FILE).exists():
        raise StrataError(f"no corpus at {root}")
    version = Store(root).meta("schema_version")
    if version == SCHEMA_VERSION:
        raise StrataError(f"{root} already has the current schema ({SCHEMA_VERSION}); nothing to do")
    if version not in ("1", "2", "3"):
        raise StrataError(f"{root} has corpus schema {version!r}, which this strata cannot migrate")
    work = root.with_name(f".{root.name}.migrating-{os.getpid()}")
    old = root.with_name(f".{root.name}.schema{version}-{os.getpid()}")
    with writer_lock(root):       # no import may change the corpus while it is rebuilt
        shutil.rmtree(work, ignore_errors=True)
        try:
            summary = _build(root, work, progress, rename=version == "1")
        except BaseException:
            shutil.rmtree(work, ignore_errors=True)
            raise
        os.rename(root, old)          # from here the new corpus is complete: exchange the folders
        os.rename(work, root)
    shutil.rmtree(old, ignore_errors=True)
    return summary


def _build(root: Path, work: Path, progress, rename: bool) -> dict:
    work.mkdir()
    shutil.copy2(root / CATALOG_FILE, work / CATALOG_FILE)
    con = duckdb.connect(str(work / CATALOG_FILE))
    try:
        layers = {n: (k, json.loads(p or "{}")) for n, k, p in con.execute("SELECT name, kind, props FROM layers").fetchall()}
        renames = layer_renames(layers) if rename else {}
        parts = con.execute("SELECT layer, path FROM parts ORDER BY path").fetchall()
        moved: dict[str, str] = {}
        for i, (layer, path) in enumerate(parts):
            kind = layers.get(layer, ("", {}))[0]
            new_layer = renames.get(layer, layer)
            head, _, file = path.rpartition("/")
            new_path = f"{head.rpartition('/')[0]}/{new_layer}/{file}" if kind != "edges" else path
            dest = work / new_path
            dest.parent.mkdir(parents=True, exist_ok=True)
            if kind == "edges":
                shutil.copy2(root / path, dest)
            else:
                table = pq.read_table(root / path)
                if rename:
                    table = table.rename_columns([COLUMN_SWAP.get(c, c) for c in table.column_names])
                table = _times_in_microseconds(table)
                pq.write_table(table, dest, row_group_size=ROW_GROUP_SIZE, **part_write_options(table.schema))
            moved[path] = new_path
            if progress:
                progress(i + 1, len(parts))
        retimed = _retime(work, layers, parts, moved)
        con.execute("BEGIN")
        # paths of two swapped layers trade places: first every moved path to a unique
        # placeholder, then to its new value, so no step meets a path still in use
        con.execute("CREATE TEMP TABLE moves (old VARCHAR, new VARCHAR)")
        changed = [(a, b) for a, b in moved.items() if a != b]
        if changed:
            con.executemany("INSERT INTO moves VALUES (?, ?)", changed)
        for table in ("parts", "part_stats", "part_attrs", "part_keys"):
            con.execute(f"UPDATE {table} SET path = chr(0) || path WHERE path IN (SELECT old FROM moves)")
            con.execute(f"UPDATE {table} SET path = moves.new FROM moves WHERE {table}.path = chr(0) || moves.old")
        # one statement per table, so a swap of two names cannot collide with itself
        con.execute("CREATE TEMP TABLE renames (old VARCHAR, new VARCHAR)")
        if renames:
            con.executemany("INSERT INTO renames VALUES (?, ?)", list(renames.items()))
        for table in ("parts", "layer_attrs"):
            con.execute(f"UPDATE {table} SET layer = renames.new FROM renames WHERE {table}.layer = renames.old")
        con.execute("DELETE FROM layers")
        for name, (kind, props) in layers.items():
            con.execute("INSERT INTO layers (name, kind, props) VALUES (?, ?, ?)",
                        [renames.get(name, name), "sequence" if kind == "token" else kind,
                         json.dumps(new_props(props, renames) if rename else props)])
        con.execute("UPDATE meta SET value = ? WHERE key = 'schema_version'", [SCHEMA_VERSION])
        con.execute("COMMIT")
        con.execute("CHECKPOINT")
    finally:
        con.close()
    return {"layers renamed": len(renames), "parts rewritten": len(parts), "layers re-timed": retimed}


def _retime(work: Path, layers: dict[str, tuple[str, dict]], parts: list[tuple[str, str]],
            moved: dict[str, str]) -> int:
    """Times of the text layers from the timed words again, as an import does now (schema 4):
    a node no aligned timed word covers has none.  Rows, their order and every other column stay."""
    words = [work / moved[p] for layer, p in parts if layers.get(layer, ("", {}))[1].get(TIME_WORDS)]
    if not words:
        return 0
    done = set()
    with duckdb.connect() as con:
        for layer, path in parts:
            kind, props = layers.get(layer, ("", {}))
            if kind == "edges" or not props.get("time") or props.get(TIME_WORDS) or props.get("time_axis"):
                continue
            dest = work / moved[path]
            table = pq.read_table(dest)
            if "t_start" not in table.column_names:
                continue
            for name in ("t_start", "t_end"):
                i = table.schema.get_field_index(name)
                table = table.set_column(i, table.schema.field(i), pa.nulls(table.num_rows, table.schema.field(i).type))
            untimed = dest.with_name(dest.stem + "--untimed.parquet")
            pq.write_table(table, untimed, row_group_size=ROW_GROUP_SIZE, **part_write_options(table.schema))
            rewrite(con, [untimed], dest, [[times_from_chars(words)]])
            untimed.unlink()
            done.add(layer)
    return len(done)
