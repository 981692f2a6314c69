"""The corpus directory: Parquet node and edge tables, a DuckDB catalog.

A corpus is a folder (see DEVELOPERS.md for the schema). Writes go through a
:class:`Batch`, which stages every Parquet part under ``staging/`` and commits
them together with their catalog rows in one DuckDB transaction, so an import
is all-or-nothing. Reads go through :meth:`Store.connect`, which opens an
in-memory DuckDB connection with one view per layer.

>>> import tempfile, pyarrow as pa
>>> s = Store.create(tempfile.mkdtemp() + "/c")
>>> with s.batch("example") as b:
...     d = b.add_document("d1", "hi there")
...     ids = b.alloc_ids(2)
...     b.write_nodes("token", "sequence", pa.table({"id": [ids, ids + 1], "doc": [d.doc] * 2,
...         "start": [d.base, d.base + 3], "end": [d.base + 2, d.base + 8], "ord": [0, 1]}))
>>> s.layer_rows("token")
2
"""
from __future__ import annotations

import json
import os
import re
import shutil
import signal
import sys
import threading
import time
import uuid
from contextlib import contextmanager
from dataclasses import dataclass
from datetime import datetime, timezone
from pathlib import Path
from typing import Iterator

import duckdb
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.parquet as pq

from engine import stats as part_statistics
from engine.errors import StrataError
from engine.lock import writer_lock
from querylang.catalog import AttrInfo, LayerInfo

#: 2: the CoNLL-U layers carry the standard's names (``word`` the syntactic words, ``token`` the
#: surface tokens; in 1 they were the other way round), and so do the ordinal columns.
#: 3: times are whole microseconds (int64), no longer binary floating-point seconds.
SCHEMA_VERSION = "4"
CATALOG_FILE = "catalog.duckdb"
ROW_GROUP_SIZE = 122_880


def part_write_options(schema: pa.Schema) -> dict:
    """Options of every Parquet part: zstd, dictionaries for string columns only.

    Why not dictionaries everywhere (pyarrow's default): for unique int64 columns (ids,
    anchors, pre/post) the dictionary overflows and falls back page by page. A 309k-row
    token part wrote in 0.33 s and 13.4 MB that way, in 0.21 s and 7.3 MB this way.
    """
    strings = [f.name for f in schema if pa.types.is_string(f.type) or pa.types.is_large_string(f.type)]
    return {"compression": "zstd", "use_dictionary": strings}

#: Columns every node table has; see DEVELOPERS.md "Node tables".
ANCHOR_COLUMNS: dict[str, pa.DataType] = {
    "id": pa.int64(),
    "doc": pa.int32(),
    "start": pa.int64(),
    "end": pa.int64(),
    "t_start": pa.int64(),        # whole microseconds on the recording (importers.tabular.parse_time)
    "t_end": pa.int64(),
    "sent": pa.int64(),
    "tok_first": pa.int64(),
    "tok_last": pa.int64(),
    "word_first": pa.int64(),
    "word_last": pa.int64(),
}
TREE_COLUMNS = ("parent", "depth", "pre", "post", "reading")
EDGE_COLUMNS: dict[str, pa.DataType] = {
    "src": pa.int64(), "dst": pa.int64(), "label": pa.string(), "doc": pa.int32()}
#: Columns that are structure, not attributes a query tests.
STRUCTURAL = set(ANCHOR_COLUMNS) | {"ord", "parent", "pre", "post", "src", "dst", "comments",
                                     "head", "line"}
DOC_GAP = 1
_LAYER_NAME = re.compile(r"[A-Za-z][A-Za-z0-9_-]*(\.[A-Za-z][A-Za-z0-9_-]*)*")

#: Statistics of each part (engine/stats.py), merged per layer into layer_attrs; added to
#: catalogs made before them at their next commit.
#: seconds to keep trying to open a catalog that another process holds
CATALOG_WAIT = 30.0
#: where a query spills what does not fit in its memory limit (DuckDB's temp_directory)
SPILL_DIR = ".spill"
#: the share of the machine's memory a query may use unless told (--memory)
MEMORY_SHARE = 0.5


def default_memory_limit() -> str:
    """Half the machine's physical memory, in MB (DuckDB's own default is 80 %)."""
    try:
        total = os.sysconf("SC_PAGE_SIZE") * os.sysconf("SC_PHYS_PAGES")
    except (ValueError, OSError):
        return "4GB"
    return f"{max(int(total * MEMORY_SHARE / 2 ** 20), 256)}MB"

_STATS_DDL = """
CREATE TABLE IF NOT EXISTS part_stats (path VARCHAR PRIMARY KEY, rows BIGINT, sent_null BIGINT);
ALTER TABLE part_stats ADD COLUMN IF NOT EXISTS sent_null BIGINT;
CREATE TABLE IF NOT EXISTS part_attrs (path VARCHAR, attr VARCHAR, type VARCHAR, n_null BIGINT, registers BLOB);
CREATE TABLE IF NOT EXISTS part_keys (path VARCHAR, col VARCHAR, key VARCHAR, n BIGINT, registers BLOB);
CREATE TABLE IF NOT EXISTS retired (path VARCHAR, retired_at VARCHAR);
"""
_CATALOG_DDL = """
CREATE TABLE IF NOT EXISTS meta (key VARCHAR PRIMARY KEY, value VARCHAR);
CREATE TABLE IF NOT EXISTS documents (doc INTEGER PRIMARY KEY, name VARCHAR UNIQUE,
    base BIGINT, length BIGINT, text VARCHAR, duration DOUBLE);
CREATE TABLE IF NOT EXISTS doc_attrs (doc INTEGER, key VARCHAR, value VARCHAR);
CREATE TABLE IF NOT EXISTS layers (name VARCHAR PRIMARY KEY, kind VARCHAR, props VARCHAR);
CREATE TABLE IF NOT EXISTS layer_attrs (layer VARCHAR, attr VARCHAR, type VARCHAR,
    n_distinct BIGINT, n_null BIGINT);
CREATE TABLE IF NOT EXISTS parts (layer VARCHAR, path VARCHAR, rows BIGINT, import_id VARCHAR);
CREATE TABLE IF NOT EXISTS imports (import_id VARCHAR, source VARCHAR, sha256 VARCHAR,
    importer VARCHAR, options VARCHAR, imported_at VARCHAR);
""" + _STATS_DDL

_ARROW_TYPE_NAMES = {
    pa.string(): "str", pa.large_string(): "str", pa.int64(): "int", pa.int32(): "int",
    pa.float64(): "float", pa.bool_(): "bool",
}


@dataclass(frozen=True)
class DocInfo:
    doc: int
    name: str
    base: int
    length: int
    text: str


class Store:
    """One corpus directory. Implements :class:`querylang.catalog.Catalog`."""

    def __init__(self, root: Path) -> None:
        self.root = Path(root)
        self._catalog_cache: dict[str, LayerInfo] | None = None
        self._memo: dict[tuple, list[tuple]] = {}
        self._reader: duckdb.DuckDBPyConnection | None = None
        self.keep_reader = False          # during a batch: one reading connection, not one per question

    # -- opening -----------------------------------------------------------------
    @classmethod
    def create(cls, path: str | os.PathLike) -> "Store":
        root = corpus_path(path)
        if (root / CATALOG_FILE).exists():
            raise StrataError(f"a corpus already exists at {root}")
        if root.exists() and any(root.iterdir()):
            raise StrataError(f"{root} exists and is not empty; choose a new folder for the corpus")
        root.mkdir(parents=True, exist_ok=True)
        with duckdb.connect(str(root / CATALOG_FILE)) as con:
            con.execute(_CATALOG_DDL)
            con.executemany("INSERT INTO meta VALUES (?, ?)", [
                ("schema_version", SCHEMA_VERSION), ("next_id", "0"), ("next_base", "0"),
                ("next_chain", "0"), ("created", _now())])
        return cls(root)

    @classmethod
    def open(cls, path: str | os.PathLike) -> "Store":
        root = corpus_path(path)
        if not (root / CATALOG_FILE).exists():
            raise StrataError(f"no corpus at {root} (make one with: strata init {root})")
        store = cls(root)
        store._check_schema()
        # opening removes nothing: a live writer may own the staging folder (the next writer
        # removes what a dead one left, see batch)
        return store

    def _check_schema(self) -> None:
        """Refuse a corpus of another schema instead of misreading it (never changed here)."""
        version = self.meta("schema_version")
        if version == SCHEMA_VERSION:
            return
        if version in ("1", "2", "3"):
            raise StrataError(
                f"{self.root} was made by an older strata (schema {version}), which "
                + ("named the CoNLL-U syntactic words 'token' and the surface tokens 'word', the reverse of "
                   "the standard, " if version == "1" else "")
                + ("kept times as binary floating-point seconds, " if version in ("1", "2") else "")
                + "gave a text node no timed word covers a zero-width time at its neighbour's edge; strata now "
                "leaves such a node without a time" + (" and uses the standard's names and whole microseconds" if version != "3" else "")
                + f". Migrate it with: strata migrate {self.root} (all or nothing), "
                "or import the same files into a new corpus; until then it is left as it is")
        raise StrataError(f"{self.root} has corpus schema {version!r}, which this strata does not know "
                          f"(it reads schema {SCHEMA_VERSION}); use the strata that made it")

    def catalog_connection(self, read_only: bool = True) -> duckdb.DuckDBPyConnection:
        """A connection to the catalog file.  DuckDB lets one process write it or several read
        it, and refuses the others at once ("Conflicting lock"); readers hold it for a few
        milliseconds and the writer for its commit, so a refused open is tried again for up to
        :data:`CATALOG_WAIT` seconds."""
        if not read_only:
            self._forget_answers()        # DuckDB opens a file one way at a time in a process
        deadline = time.monotonic() + CATALOG_WAIT
        while True:
            try:
                return duckdb.connect(str(self.root / CATALOG_FILE), read_only=read_only)
            except duckdb.IOException as err:
                if "lock" not in str(err).lower() or time.monotonic() >= deadline:
                    raise StrataError(f"the corpus catalog {self.root / CATALOG_FILE} is busy: "
                                      f"{str(err).splitlines()[0]}", hint="try again in a moment") from None
                time.sleep(0.02)

    def catalog_state(self) -> tuple:
        """Size and modification time of the catalog file and its write-ahead log: they change
        with every commit (a cheap test, no catalog connection)."""
        out = []
        for name in (CATALOG_FILE, CATALOG_FILE + ".wal"):
            try:
                st = (self.root / name).stat()
                out.append((st.st_size, st.st_mtime_ns))
            except FileNotFoundError:
                out.append(None)
        return tuple(out)

    def _forget_answers(self) -> None:
        """Drop the remembered catalog answers and close the reading connection."""
        self._catalog_cache = None
        self._memo.clear()
        if self._reader is not None:
            self._reader.close()
            self._reader = None

    # -- reading the catalog -----------------------------------------------------------
    def _rows(self, sql: str, params: list | None = None) -> list[tuple]:
        """Catalog rows, remembered until this Store commits a batch.

        Opening the catalog costs ~15 ms, and an import asks it many small questions: during
        a batch one read-only connection answers them all (outside one, none stays open, so
        another process may write). The catalog changes only through :meth:`batch`, which
        forgets the answers and closes that connection.
        """
        key = (sql, tuple(params or ()))
        rows = self._memo.get(key)
        if rows is None:
            if not self.keep_reader:      # outside imports: no connection left open to block writers
                with self.catalog_connection() as con:
                    rows = con.execute(sql, params or []).fetchall()
            else:
                if self._reader is None:
                    self._reader = self.catalog_connection()
                rows = self._reader.execute(sql, params or []).fetchall()
            self._memo[key] = rows
        return rows

    def documents(self) -> list[DocInfo]:
        return [DocInfo(*r) for r in self._rows(
            "SELECT doc, name, base, length, text FROM documents ORDER BY doc")]

    def layer_rows(self, layer: str) -> int:
        return sum(int(n or 0) for name, _, n in self._parts() if name == layer)

    def part_paths(self, layer: str) -> list[Path]:
        return [self.root / p for name, p, _ in self._parts() if name == layer]

    def _parts(self) -> list[tuple]:
        """Every part (layer, path, rows) by path: one catalog query for all layers."""
        return self._rows("SELECT layer, path, rows FROM parts ORDER BY path")

    def _layer_row(self, name: str) -> tuple | None:
        """(kind, props) of a layer, from one catalog query for all layers."""
        for n, kind, props in self._rows("SELECT name, kind, props FROM layers ORDER BY name"):
            if n == name:
                return kind, props
        return None

    def layers(self) -> dict[str, LayerInfo]:
        """The catalog view of every layer and edge set (cached per Store)."""
        if self._catalog_cache is None:
            attrs: dict[str, dict[str, AttrInfo]] = {}
            sent_missing: dict[str, int] = {}
            for layer, attr, typ, nd, nn in self._rows(
                    "SELECT layer, attr, type, n_distinct, n_null FROM layer_attrs ORDER BY layer, attr"):
                if attr == "sent":                # structural: only its null count is kept
                    sent_missing[layer] = nn
                if attr in STRUCTURAL:
                    continue
                attrs.setdefault(layer, {})[attr] = AttrInfo(attr, typ, nd, nn)
            rows = dict(self._rows("SELECT layer, sum(rows) FROM parts GROUP BY layer"))
            out = {}
            declared = {name: (kind, json.loads(p)) for name, kind, p in
                        self._rows("SELECT name, kind, props FROM layers ORDER BY name")}
            for name, (kind, props) in declared.items():
                props = {**props, "edge_sets": _edge_sets(name, props, declared)}
                out[name] = LayerInfo(
                    name=name, kind=kind, attrs=attrs.get(name, {}), rows=int(rows.get(name, 0) or 0),
                    tree=bool(props.get("tree")), time=bool(props.get("time")),
                    readings=bool(props.get("readings")), token_layer=props.get("token_layer"),
                    word_layer=props.get("word_layer"), edge_sets=tuple(props.get("edge_sets", ())),
                    sentence_layer=props.get("sentence_layer"), sent_missing=sent_missing.get(name),
                    separate=bool(props.get("separate")))
            self._catalog_cache = out
        return self._catalog_cache

    def layer_props(self, name: str) -> dict:
        row = self._layer_row(name)
        return json.loads(row[1]) if row else {}

    def sentence_attrs(self) -> dict[str, AttrInfo]:
        layer = self.layers().get("sentence")
        return dict(layer.attrs) if layer else {}

    def doc_attrs(self) -> dict[str, AttrInfo]:
        keys = self._rows("SELECT key, count(DISTINCT value) FROM doc_attrs GROUP BY key ORDER BY key")
        out = {"name": AttrInfo("name", "str")}
        out.update({k: AttrInfo(k, "str", n) for k, n in keys})
        return out

    def durations(self) -> dict[int, int]:
        """Recording lengths known from earlier imports, in whole µs (the catalog keeps seconds)."""
        return {doc: round(seconds * 1_000_000) for doc, seconds in
                self._rows("SELECT doc, duration FROM documents WHERE duration IS NOT NULL")}

    def meta(self, key: str) -> str | None:
        rows = self._rows("SELECT value FROM meta WHERE key = ?", [key])
        return rows[0][0] if rows else None

    # -- query connection --------------------------------------------------------------
    def connect(self) -> duckdb.DuckDBPyConnection:
        """An in-memory DuckDB connection with the views of DEVELOPERS.md, under a memory limit
        (:func:`default_memory_limit`) and spilling what does not fit to ``.spill/`` inside the
        corpus."""
        con = duckdb.connect(config={"memory_limit": default_memory_limit(),
                                     "temp_directory": str(self.root / SPILL_DIR)})
        # a missing view must be an error, never a Python variable of the same name
        con.execute("SET python_enable_replacements = false")
        self.create_views(con)
        return con

    def create_views(self, con: duckdb.DuckDBPyConnection) -> None:
        """The documents in memory and one view per layer over its listed Parquet parts.

        The catalog is attached only while they are made and detached at once: an attached
        catalog would hold DuckDB's file lock for as long as the connection lives and refuse
        every writer of the corpus.  The connection then answers from this one committed
        state (a generation) whatever a writer commits meanwhile; ``Corpus`` makes a new one
        when the catalog has changed.
        """
        cat = str(self.root / CATALOG_FILE).replace("'", "''")
        deadline = time.monotonic() + CATALOG_WAIT
        while True:
            try:
                con.execute(f"ATTACH '{cat}' AS cat (READ_ONLY)")
                break
            except duckdb.IOException as err:
                if "lock" not in str(err).lower() or time.monotonic() >= deadline:
                    raise StrataError(f"the corpus catalog is busy: {str(err).splitlines()[0]}") from None
                time.sleep(0.02)
        try:
            con.execute("CREATE OR REPLACE TABLE documents AS SELECT * FROM cat.documents")
            keys = [k for (k,) in con.execute("SELECT DISTINCT key FROM cat.doc_attrs ORDER BY key").fetchall()]
            cols = "".join(f", max(a.value) FILTER (WHERE a.key = {_sql_str(k)}) AS {_ident(k)}" for k in keys)
            con.execute(f"""CREATE OR REPLACE TABLE doc AS SELECT d.doc, d.name{cols}
                FROM cat.documents d LEFT JOIN cat.doc_attrs a ON a.doc = d.doc GROUP BY d.doc, d.name""")
            layers = con.execute("SELECT name, kind, props FROM cat.layers").fetchall()
            parts: dict[str, list[str]] = {}
            for layer, path in con.execute("SELECT layer, path FROM cat.parts ORDER BY layer, path").fetchall():
                parts.setdefault(layer, []).append(str(self.root / path))
        finally:
            con.execute("DETACH cat")
        for name, kind, props in layers:
            paths = parts.get(name)
            if not paths:
                continue
            files = "[" + ", ".join(_sql_str(p) for p in paths) + "]"
            derived = "".join(f", {key_value_expr(column, key)} AS {_ident(column + '.' + key)}"
                              for column, keys in json.loads(props or "{}").get("derived_keys", {}).items()
                              for key in keys)
            con.execute(f"CREATE OR REPLACE VIEW {_ident(name)} AS "
                        f"SELECT *{derived} FROM read_parquet({files}, union_by_name = true)")

    # -- writing ---------------------------------------------------------------------
    @contextmanager
    def batch(self, importer: str, options: dict | None = None, *, wait: float = 0.0) -> Iterator["Batch"]:
        """Stage writes; commit them all on success, none on any exception.

        Holds the writer lock (engine/lock.py) throughout: a second writer is refused naming
        this one, or waits up to ``wait`` seconds.  Holding it, the batch removes a dead
        writer's staging folder, and its commit what else earlier writers left (see
        :meth:`_remove_leftovers`).
        """
        with writer_lock(self.root, wait):
            self._forget_answers()            # the corpus may have changed while we waited
            shutil.rmtree(self.root / "staging", ignore_errors=True)     # a dead writer's
            self.keep_reader = True
            batch = Batch(self, importer, options or {})
            try:
                yield batch
                batch._commit()
            except BaseException:
                batch._abort()
                raise
            finally:
                self.keep_reader = False
                self._forget_answers()

    def _remove_leftovers(self) -> None:
        """At a commit, before its own catalog write: the Parquet files a dead writer moved into
        place without listing them, and the parts that earlier commits replaced (kept until now
        for readers of the older state).  A writer that fails changes nothing on disk."""
        listed = {p for (p,) in self._rows("SELECT path FROM parts")}
        on_disk = [f for sub in ("layers", "edges") for f in (self.root / sub).glob("*/*.parquet")]
        unlisted = [f for f in on_disk if str(f.relative_to(self.root)) not in listed]
        retired = self._rows("SELECT count(*) FROM information_schema.tables WHERE table_name = 'retired'")[0][0]
        for f in unlisted:
            f.unlink(missing_ok=True)
        if retired:
            with self.catalog_connection(read_only=False) as con:
                con.execute("DELETE FROM retired")
        for d in [d for sub in ("layers", "edges") for d in (self.root / sub).glob("*") if d.is_dir()]:
            _rmdir_if_empty(d)


class Batch:
    """Staged writes of one import. Use through :meth:`Store.batch`."""

    def __init__(self, store: Store, importer: str, options: dict) -> None:
        self.store = store
        self.import_id = datetime.now(timezone.utc).strftime("%Y%m%dT%H%M%S") + "-" + uuid.uuid4().hex[:8]
        self.importer = importer
        self.options = options
        self.stage = store.root / "staging" / self.import_id
        self.stage.mkdir(parents=True)
        self._meta = {k: int(v) for k, v in store._rows(
            "SELECT key, value FROM meta WHERE key IN ('next_id', 'next_base', 'next_chain')")}
        self._docs: list[DocInfo] = []
        self._doc_names: dict[str, DocInfo] = {}
        self._stored_docs: dict[str, DocInfo] | None = None
        self._doc_attrs: list[tuple[int, str, str]] = []
        self._writers: dict[str, tuple[str, str, pq.ParquetWriter, Path]] = {}
        self._rows: dict[str, int] = {}
        self._layer_props: dict[str, tuple[str, dict]] = {}
        self._sources: list[tuple[str, str]] = []
        self._next_doc = int(store._rows("SELECT coalesce(max(doc) + 1, 0) FROM documents")[0][0])
        self._finalisers: list = []
        self._replaced: set[str] = set()
        self._durations: dict[int, int] = {}          # doc -> recording length, whole µs
        self._part_stats: dict[str, part_statistics.PartStats] = {}

    # ids and anchors
    def alloc_ids(self, n: int) -> int:
        """Reserve ``n`` consecutive node ids; returns the first."""
        first = self._meta["next_id"]
        self._meta["next_id"] += n
        return first

    def set_meta(self, key: str, value: int) -> None:
        """Set a corpus-wide counter, written at commit (e.g. ``next_order``)."""
        self._meta[key] = value

    def alloc_chains(self, n: int) -> int:
        first = self._meta["next_chain"]
        self._meta["next_chain"] += n
        return first

    def existing_document(self, name: str) -> DocInfo | None:
        """A document of this batch or of the corpus (the corpus's are read once per batch)."""
        staged = self._doc_names.get(name)
        if staged is not None:
            return staged
        if self._stored_docs is None:
            self._stored_docs = {d.name: d for d in self.store.documents()}
        return self._stored_docs.get(name)

    def add_document(self, name: str, text: str, attrs: dict[str, str] | None = None) -> DocInfo:
        """A new document at the end of the global coordinate line."""
        if name in self._doc_names:
            raise StrataError(f"document {name!r} occurs twice in this import")
        if self.existing_document(name) is not None:
            raise StrataError(f"document {name!r} is already in the corpus")
        base = self._meta["next_base"]
        info = DocInfo(self._next_doc, name, base, len(text), text)
        self._next_doc += 1
        self._meta["next_base"] = base + len(text) + DOC_GAP
        self._docs.append(info)
        self._doc_names[name] = info
        for k, v in (attrs or {}).items():
            self._doc_attrs.append((info.doc, k, v))
        return info

    def counters(self) -> dict[str, int]:
        """Where the next node id, chain, anchor base and document number would start."""
        return {"next_id": self._meta["next_id"], "next_chain": self._meta["next_chain"],
                "next_base": self._meta["next_base"], "next_doc": self._next_doc}

    def advance_counters(self, counters: dict[str, int]) -> None:
        """Move the counters past values used elsewhere (a second import process); never back."""
        for key in ("next_id", "next_chain", "next_base"):
            self._meta[key] = max(self._meta[key], counters[key])
        self._next_doc = max(self._next_doc, counters["next_doc"])

    def document_names(self) -> set[str]:
        """Names of the documents added in this batch."""
        return set(self._doc_names)

    def adopt_document(self, info: DocInfo, attrs: dict[str, str]) -> None:
        """A document numbered and placed elsewhere (past this batch's counters; see advance_counters)."""
        if info.name in self._doc_names or self.existing_document(info.name) is not None:
            raise StrataError(f"document {info.name!r} occurs twice in this import")
        self._docs.append(info)
        self._doc_names[info.name] = info
        for k, v in attrs.items():
            self._doc_attrs.append((info.doc, k, v))

    def set_doc_attr(self, doc: int, key: str, value: str) -> None:
        """Set a document attribute; it replaces the stored value of ``key`` at commit."""
        self._doc_attrs.append((doc, key, value))

    def touched_documents(self) -> set[int]:
        """The documents of the nodes staged so far (every layer's ``doc`` column)."""
        docs: set[int] = set()
        for layer in list(self._layer_props):
            for path in self.staged_paths(layer):
                names = pq.ParquetFile(path).schema_arrow.names
                if "doc" in names:
                    col = pq.read_table(path, columns=["doc"]).column("doc")
                    docs.update(v for v in pc.unique(col).to_pylist() if v is not None)
        return docs

    def set_duration(self, doc: int, us: int) -> None:
        """Record the length of a document's recording in whole µs (from its time-aligned tiers)."""
        self._durations[doc] = int(us)

    def add_source(self, path: str, sha256: str) -> None:
        self._sources.append((path, sha256))

    # tables
    def declare_layer(self, name: str, kind: str, props: dict | None = None) -> None:
        if not _LAYER_NAME.fullmatch(name):
            raise StrataError(f"layer name {name!r} is not allowed: use letters, digits, '_', '-' "
                              "and '.' (for a prefix), starting with a letter")
        existing = self.store._layer_row(name)
        if existing and existing[0] != kind:
            raise StrataError(f"layer {name!r} exists already as a {existing[0]} layer, not {kind}")
        if name in self._layer_props:
            before, had = self._layer_props[name][1], True
        else:
            before, had = (json.loads(existing[1]), True) if existing else ({}, False)
        merged = {**before, **(props or {})}
        # what an importer says of the nodes it writes holds for the layer only if it held before:
        # ``separate`` (no two nodes share or touch a character), ``sentence_layer`` (what ``sent`` names)
        if had and "separate" in (props or {}):
            merged["separate"] = bool(before.get("separate")) and bool(props["separate"])
        if had and "sentence_layer" in (props or {}) and before.get("sentence_layer") != props["sentence_layer"]:
            merged["sentence_layer"] = None
        self._layer_props[name] = (kind, merged)

    def write_nodes(self, layer: str, kind: str, table: pa.Table, props: dict | None = None) -> None:
        """Append node rows; the anchor columns missing from ``table`` are added as NULL."""
        if layer not in self._layer_props:
            self.declare_layer(layer, kind, props)
        self._write(layer, _with_columns(table, ANCHOR_COLUMNS))

    def write_edges(self, edge_set: str, table: pa.Table, props: dict | None = None) -> None:
        if edge_set not in self._layer_props:
            self.declare_layer(edge_set, "edges", props)
        self._write(edge_set, _with_columns(table, EDGE_COLUMNS))

    def replace_layer(self, layer: str, table_or_path) -> None:
        """Stage a full new content for an existing layer (e.g. with time spans added).

        At commit its old parts leave the catalog and the new part takes their place, in
        the same transaction as everything else; the old files are deleted afterwards.
        ``table_or_path`` is an Arrow table, or a Parquet file written under ``self.stage``.
        """
        if layer not in self._layer_props:
            row = self.store._layer_row(layer)
            if row is None:
                raise StrataError(f"no layer {layer!r} to replace")
            self._layer_props[layer] = (row[0], json.loads(row[1]))
        for p in self.staged_paths(layer):
            self._rows.pop(str(p), None)
            p.unlink()
        if isinstance(table_or_path, pa.Table):
            self._write(layer, table_or_path)
            self.staged_paths(layer)
        else:
            path = Path(table_or_path)
            final = self.stage / f"{layer}--00000.parquet"
            path.rename(final)
            self._rows[str(final)] = pq.ParquetFile(final).metadata.num_rows
        self._replaced.add(layer)

    def on_commit(self, fn) -> None:
        """Run ``fn(batch)`` just before committing (e.g. to finalise staged tables)."""
        self._finalisers.append(fn)

    def _write(self, layer: str, table: pa.Table) -> None:
        if table.num_rows == 0:
            return
        entry = self._writers.get(layer)
        if entry is not None and not entry[2].schema.equals(table.schema):
            entry[2].close()
            entry = None
        if entry is None:
            n = len(list(self.stage.glob(f"{layer}--*.parquet")))
            path = self.stage / f"{layer}--{n:05d}.parquet"
            writer = pq.ParquetWriter(path, table.schema, **part_write_options(table.schema))
            entry = (layer, str(path), writer, path)
            self._writers[layer] = entry
        entry[2].write_table(table, row_group_size=ROW_GROUP_SIZE)
        self._rows[entry[1]] = self._rows.get(entry[1], 0) + table.num_rows

    def layer_kind(self, layer: str) -> str | None:
        entry = self._layer_props.get(layer)
        return entry[0] if entry else None

    def add_staged(self, layer: str, path: Path, rows: int) -> None:
        """Adopt a Parquet part that was written straight into the staging folder.

        ``path`` must be ``self.stage / f"{layer}--<anything>.parquet"`` and the layer declared.
        """
        if layer not in self._layer_props:
            raise StrataError(f"layer {layer!r} was not declared before its part was staged")
        if path.parent != self.stage or not path.name.startswith(layer + "--"):
            raise ValueError(f"{path} is not a staged part of {layer}")
        self._rows[str(path)] = rows

    def add_part_stats(self, stats: dict[str, "part_statistics.PartStats"]) -> None:
        """Statistics of staged parts, computed by whoever wrote them (see engine/stats.py);
        parts without them get theirs at commit."""
        self._part_stats.update({str(p): v for p, v in stats.items()})

    def compute_part_stats(self, con: duckdb.DuckDBPyConnection, layer: str, paths: list[Path]) -> dict:
        """Statistics of some staged parts of ``layer`` (with its attribute and key columns)."""
        props = self._layer_props.get(layer, (None, {}))[1]
        return part_statistics.part_stats(con, [str(p) for p in paths], STRUCTURAL, props.get("key_value", ()))

    def staged_paths(self, layer: str) -> list[Path]:
        """Staged part files of a layer (closes its open writer)."""
        entry = self._writers.pop(layer, None)
        if entry is not None:
            entry[2].close()
        return sorted(self.stage.glob(f"{layer}--*.parquet"))

    def replace_staged(self, layer: str, new_path: Path, rows: int) -> None:
        """Swap the staged parts of ``layer`` for one rewritten file (see finalisers)."""
        for p in self.staged_paths(layer):
            if p != new_path:
                self._rows.pop(str(p), None)
                p.unlink()
        final = self.stage / f"{layer}--00000.parquet"
        if new_path != final:
            new_path.rename(final)
        self._rows[str(final)] = rows

    # commit / abort
    def _commit(self) -> None:
        for fn in self._finalisers:
            fn(self)
        self.store._remove_leftovers()
        for layer in list(self._writers):
            self.staged_paths(layer)
        moved: list[Path] = []
        parts: list[tuple[str, str, int, str]] = []
        for staged in sorted(self.stage.glob("*.parquet")):
            layer = staged.name.split("--")[0]
            kind = self._layer_props[layer][0]
            sub = "edges" if kind == "edges" else "layers"
            dest_dir = self.store.root / sub / layer
            dest_dir.mkdir(parents=True, exist_ok=True)
            dest = dest_dir / f"{self.import_id}-{staged.name.split('--')[1]}"
            parts.append((layer, str(dest.relative_to(self.store.root)), self._rows.get(str(staged), 0),
                          self.import_id))
            if str(staged) in self._part_stats:
                self._part_stats[parts[-1][1]] = self._part_stats.pop(str(staged))
        _crash_point("staged")            # the last moment at which Ctrl-C abandons the import
        with _ctrl_c_deferred():
            try:
                _crash_point("before-move")
                for (layer, rel, _, _), staged in zip(parts, sorted(self.stage.glob("*.parquet"))):
                    os.replace(staged, self.store.root / rel)
                    moved.append(self.store.root / rel)
                    _crash_point("mid-move")
                _crash_point("before-catalog")
                self._write_catalog(parts)
                _crash_point("after-catalog")
            except BaseException:
                for p in moved:
                    p.unlink(missing_ok=True)
                raise
        # the replaced parts stay on disk, listed as retired, for readers of the older state;
        # the next writer removes them (Store._remove_leftovers)
        shutil.rmtree(self.stage, ignore_errors=True)
        _rmdir_if_empty(self.stage.parent)

    def _write_catalog(self, parts: list[tuple[str, str, int, str]]) -> list[str]:
        """Record everything in one transaction; returns the replaced parts' paths."""
        with self.store.catalog_connection(read_only=False) as con:
            con.execute("BEGIN TRANSACTION")
            try:
                con.execute(_STATS_DDL)
                old: list[str] = []
                for layer in sorted(self._replaced):
                    gone = [p for (p,) in con.execute("SELECT path FROM parts WHERE layer = ?", [layer]).fetchall()]
                    old += gone
                    _insert(con, "INSERT INTO retired", ("path", "retired_at"), [(g, _now()) for g in gone])
                    con.execute("DELETE FROM parts WHERE layer = ?", [layer])
                    for table in ("part_stats", "part_attrs", "part_keys"):
                        con.execute(f"DELETE FROM {table} WHERE path IN (SELECT unnest(?::VARCHAR[]))", [gone])
                if self._docs:   # as one Arrow table: row-by-row inserts cost seconds for thousands of documents
                    docs = pa.table({"doc": pa.array([d.doc for d in self._docs], pa.int32()),
                                     "name": [d.name for d in self._docs], "base": [d.base for d in self._docs],
                                     "length": [d.length for d in self._docs], "text": [d.text for d in self._docs]})
                    con.register("new_documents", docs)
                    con.execute("INSERT INTO documents SELECT doc, name, base, length, text, NULL FROM new_documents")
                    con.unregister("new_documents")
                for doc, us in self._durations.items():   # the catalog column is in seconds, for reading
                    con.execute("UPDATE documents SET duration = ? WHERE doc = ?", [us / 1_000_000, doc])
                if self._doc_attrs:
                    last = {(d, k): v for d, k, v in self._doc_attrs}       # set twice: the later value
                    attrs = pa.table({"doc": pa.array([d for d, _ in last], pa.int32()),
                                      "key": [k for _, k in last], "value": list(last.values())})
                    con.register("new_doc_attrs", attrs)
                    con.execute("DELETE FROM doc_attrs WHERE (doc, key) IN (SELECT (doc, key) FROM new_doc_attrs)")
                    con.execute("INSERT INTO doc_attrs SELECT * FROM new_doc_attrs")
                    con.unregister("new_doc_attrs")
                # one statement per table (each costs a few ms here, whatever its rows)
                with_parts = {p[0] for p in parts}
                listed = {n for (n,) in con.execute("SELECT name FROM layers").fetchall()}
                # a layer declared but left empty (no empty nodes in the file, say) is not listed
                _insert(con, "INSERT OR REPLACE INTO layers", ("name", "kind", "props"),
                        [(name, kind, json.dumps(props)) for name, (kind, props) in self._layer_props.items()
                         if name in with_parts or name in listed])
                _insert(con, "INSERT INTO parts", ("layer", "path", "rows", "import_id"), parts)
                now, options = _now(), json.dumps(self.options)
                _insert(con, "INSERT INTO imports", ("import_id", "source", "sha256", "importer", "options", "imported_at"),
                        [(self.import_id, src, sha, self.importer, options, now) for src, sha in self._sources])
                _insert(con, "INSERT OR REPLACE INTO meta", ("key", "value"),
                        [(k, str(v)) for k, v in self._meta.items()])
                self._refresh_stats(con, {p[0] for p in parts})
                con.execute("COMMIT")
            except BaseException:
                con.execute("ROLLBACK")
                raise
        return old

    def _refresh_stats(self, con: duckdb.DuckDBPyConnection, layers: set[str]) -> None:
        """Per-attribute distinct and null counts (the compiler's selectivity estimates) of the
        layers this batch touched, merged from the statistics of their parts: stored ones,
        those the importer handed in, and, for parts with none, computed now (engine/stats.py).
        A few statements for all layers together: each costs a few ms in the catalog."""
        if not layers:
            return
        names = sorted(layers)
        paths: dict[str, list[str]] = {name: [] for name in names}
        for layer, path in con.execute("SELECT layer, path FROM parts WHERE layer IN (SELECT unnest(?::VARCHAR[])) "
                                       "ORDER BY path", [names]).fetchall():
            paths[layer].append(path)
        every = [p for name in names for p in paths[name]]
        known = {p for (p,) in con.execute(
            "SELECT path FROM part_stats WHERE path IN (SELECT unnest(?::VARCHAR[]))", [every]).fetchall()}
        new = {p: self._part_stats[p] for p in every if p not in known and p in self._part_stats}
        for layer in names:
            missing = [p for p in paths[layer] if p not in known and p not in new]
            if missing:
                computed = self.compute_part_stats(con, layer, [self.store.root / p for p in missing])
                new.update({p: computed[str(self.store.root / p)] for p in missing})
        self._store_part_stats(con, new)
        stored = self._load_part_stats(con, every)
        rows = []
        for layer in names:
            merged = part_statistics.merge([stored[p] for p in paths[layer] if p in stored])
            rows += [(layer, a, _duck_type_name(t), nd, nn) for a, (t, nd, nn) in merged.attrs.items()]
            rows += self._key_value_stats(con, layer, set(merged.attrs), merged.keys, merged.rows)
            if merged.sent_null is not None:      # a structural column: its null count only (Store.layers)
                rows.append((layer, "sent", "int", None, merged.sent_null))
        con.execute("DELETE FROM layer_attrs WHERE layer IN (SELECT unnest(?::VARCHAR[]))", [names])
        _insert(con, "INSERT INTO layer_attrs", ("layer", "attr", "type", "n_distinct", "n_null"), rows)

    @staticmethod
    def _store_part_stats(con: duckdb.DuckDBPyConnection, stats: dict[str, "part_statistics.PartStats"]) -> None:
        """Insert as Arrow tables: row-by-row inserts took ~0.1 s for the parts of 1M tokens."""
        if not stats:
            return
        attrs = [(p, a, v.type, v.n_null, v.registers) for p, s in stats.items() for a, v in s.attrs.items()]
        keys = [(p, c, k, v.rows, v.registers) for p, s in stats.items() for c, ks in s.keys.items()
                for k, v in ks.items()]
        tables = {"part_stats": (("path", "rows", "sent_null"), [(p, s.rows, s.sent_null) for p, s in stats.items()]),
                  "part_attrs": (("path", "attr", "type", "n_null", "registers"), attrs),
                  "part_keys": (("path", "col", "key", "n", "registers"), keys)}
        for name, (columns, rows) in tables.items():
            _insert(con, f"INSERT INTO {name}", columns, rows)

    @staticmethod
    def _load_part_stats(con: duckdb.DuckDBPyConnection, paths: list[str]) -> dict[str, "part_statistics.PartStats"]:
        ps = part_statistics
        out = {p: ps.PartStats(int(n), None if sn is None else int(sn)) for p, n, sn in con.execute(
            "SELECT path, rows, sent_null FROM part_stats WHERE path IN (SELECT unnest(?::VARCHAR[]))",
            [paths]).fetchall()}
        for p, a, t, nn, reg in con.execute("SELECT path, attr, type, n_null, registers FROM part_attrs "
                                            "WHERE path IN (SELECT unnest(?::VARCHAR[]))", [paths]).fetchall():
            out[p].attrs[a] = ps.AttrStats(t, int(nn), bytes(reg))
        for p, c, k, n, reg in con.execute("SELECT path, col, key, n, registers FROM part_keys "
                                           "WHERE path IN (SELECT unnest(?::VARCHAR[]))", [paths]).fetchall():
            out[p].keys.setdefault(c, {})[k] = ps.KeyStats(int(n), bytes(reg))
        return out

    def _key_value_stats(self, con: duckdb.DuckDBPyConnection, layer: str, physical: set[str],
                         keys: dict[str, dict[str, tuple[int, int]]], total: int) -> list[tuple]:
        """Keys of the ``Key=Value|...`` columns (FEATS, MISC) as derived attributes with statistics.

        Why derived: one Parquet column per key cost the CoNLL-U import ~2 s of CPU per million
        tokens (splitting, ~40 sparse columns to write); a view column extracts the value instead
        (about 14 ms more per million rows for a query that tests one). The key list lives in
        the layer's props (``derived_keys``), which :meth:`Store.create_views` reads.
        """
        props = (self._layer_props.get(layer) or (None, None))[1]
        if props is None:
            row = con.execute("SELECT props FROM layers WHERE name = ?", [layer]).fetchall()
            if not row:
                return []
            props = json.loads(row[0][0])
        columns = [c for c in props.get("key_value", ()) if c in physical]
        if not columns:
            return []
        derived: dict[str, list[str]] = {}
        rows = []
        for column in columns:
            stats = [(k, nd, n) for k, (nd, n) in keys.get(column, {}).items() if f"{column}.{k}" not in physical]
            derived[column] = [k for k, _, _ in stats]
            rows += [(layer, f"{column}.{k}", "str", nd, max(0, total - n)) for k, nd, n in stats]
        props = {**props, "derived_keys": derived}
        con.execute("UPDATE layers SET props = ? WHERE name = ?", [json.dumps(props), layer])
        return rows

    def _abort(self) -> None:
        for _, _, writer, _ in self._writers.values():
            try:
                writer.close()
            except Exception:
                pass
        self._writers.clear()
        shutil.rmtree(self.stage, ignore_errors=True)
        _rmdir_if_empty(self.stage.parent)


# -- helpers ----------------------------------------------------------------------------
#: characters DuckDB does not take literally in a file path: it reads "?" as the start of
#: connection options (the catalog's log went to "c.wal?x"), turns "\\" into "/" (the
#: catalog landed outside the named folder), and reads "*", "?", "[" and "]" in a Parquet
#: path as a pattern (a folder "c[ab]x" would read "cax" and "cbx" instead of itself)
PATH_CHARACTERS_REFUSED = {"?": "the start of connection options", "\\": "a folder separator, like /",
                           "*": "a file pattern", "[": "a file pattern", "]": "a file pattern"}


def corpus_path(path: str | os.PathLike) -> Path:
    """The corpus folder as an absolute path, refused where DuckDB would read it otherwise.

    Absolute, because DuckDB expands a leading "~" to the home folder and would take a
    folder named "~" (or "s3:") for something else; refused, rather than escaped, because
    DuckDB has no escape for these characters in a path."""
    root = Path(os.path.abspath(os.fspath(path)))
    for char, meaning in PATH_CHARACTERS_REFUSED.items():
        if char in str(root):
            raise StrataError(f"the corpus path {root} contains {char!r}, which the database engine "
                              f"reads as {meaning}, not as part of a folder name",
                              hint="choose a folder whose path has none of " + " ".join(PATH_CHARACTERS_REFUSED))
    return root


#: the named steps of a commit at which tests may kill the writer (STRATA_KILL_AT=step) or
#: hold it for a while (STRATA_PAUSE_AT=step, STRATA_PAUSE_SECONDS, default 5)
COMMIT_STEPS = ("staged", "before-move", "mid-move", "before-catalog", "after-catalog")


def _crash_point(step: str) -> None:
    """Fault injection for the crash and interrupt tests: with ``STRATA_KILL_AT`` naming this
    step, the process kills itself with SIGKILL here, as ``kill -9`` would (nothing is cleaned
    up); with ``STRATA_PAUSE_AT`` naming it, it says so on stderr and sleeps, so that a test can
    send a signal at a known step instead of guessing a delay."""
    if os.environ.get("STRATA_KILL_AT") == step:
        os.kill(os.getpid(), 9)
    if os.environ.get("STRATA_PAUSE_AT") == step:
        print(f"paused at {step}", file=sys.stderr, flush=True)
        time.sleep(float(os.environ.get("STRATA_PAUSE_SECONDS", "5")))


@contextmanager
def _ctrl_c_deferred() -> Iterator[None]:
    """Hold Ctrl-C (SIGINT) while the parts move and the catalog is written.

    Why: an interrupt between the catalog's COMMIT and the return from it would have the
    clean-up delete parts the catalog already lists.  The section takes milliseconds, so the
    import finishes and the late Ctrl-C is dropped: the corpus then holds the whole import,
    which the command reports as usual.  Off the main thread signals cannot be handled, and
    they never reach such a thread anyway."""
    if threading.current_thread() is not threading.main_thread():
        yield
        return
    previous = signal.signal(signal.SIGINT, lambda signum, frame: None)
    try:
        yield
    finally:
        signal.signal(signal.SIGINT, previous)


def _edge_sets(name: str, props: dict, declared: dict[str, tuple[str, dict]]) -> list[str]:
    """The edge sets a layer's nodes take part in: as declared, and for the empty nodes of a
    CoNLL-U import also its enhanced graph (DEPS may name an empty node: "8.1:nsubj"), which
    corpora imported before that was declared lack."""
    sets = list(props.get("edge_sets", ()))
    prefix, _, last = name.rpartition(".")
    enhanced = f"{prefix}.enhanced" if prefix else "enhanced"
    if (last == "empty" and props.get("format") == "conllu" and enhanced not in sets
            and declared.get(enhanced, ("", {}))[0] == "edges"):
        sets.append(enhanced)
    return sets


def _insert(con: duckdb.DuckDBPyConnection, statement: str, columns: tuple[str, ...], rows: list[tuple]) -> None:
    """``statement`` (an INSERT up to its table) with ``rows`` as one Arrow table, by column name."""
    if not rows:
        return
    con.register("new_rows", pa.table({c: list(v) for c, v in zip(columns, zip(*rows))}))
    try:
        con.execute(f"{statement} ({', '.join(_ident(c) for c in columns)}) SELECT * FROM new_rows")
    finally:
        con.unregister("new_rows")


def _now() -> str:
    return datetime.now(timezone.utc).isoformat(timespec="seconds")


def _ident(name: str) -> str:
    return '"' + name.replace('"', '""') + '"'


def _sql_str(value: str) -> str:
    return "'" + value.replace("'", "''") + "'"


def _rmdir_if_empty(path: Path) -> None:
    try:
        path.rmdir()
    except OSError:
        pass


def _duck_type_name(t: str) -> str:
    t = t.upper()
    if t in ("BIGINT", "INTEGER", "SMALLINT", "TINYINT", "HUGEINT", "UBIGINT", "UINTEGER"):
        return "int"
    if t in ("DOUBLE", "FLOAT", "REAL") or t.startswith("DECIMAL"):
        return "float"
    if t == "BOOLEAN":
        return "bool"
    return "str"


def key_value_expr(column: str, key: str) -> str:
    """SQL for the value of ``key`` in a ``Key=Value|...`` column; NULL where absent or empty."""
    pattern = _sql_str(r"(?:^|\|)" + re.escape(key) + r"=([^|]*)")
    found = f"regexp_extract({_ident(column)}, {pattern}, 1)"
    return f"nullif({found}, '')"


def _with_columns(table: pa.Table, required: dict[str, pa.DataType]) -> pa.Table:
    """Add missing required columns as NULL and cast present ones to their type."""
    n = table.num_rows
    cols, names = [], []
    for name, typ in required.items():
        if name in table.column_names:
            col = table.column(name)
            cols.append(col.cast(typ) if col.type != typ else col)
        else:
            cols.append(pa.nulls(n, typ))
        names.append(name)
    for name in table.column_names:
        if name not in required:
            cols.append(table.column(name))
            names.append(name)
    return pa.Table.from_arrays(cols, names=names)
