"""What an importer asks of the layers already stored before it adds to them."""
from __future__ import annotations

import duckdb

from engine.store import Store


def doc_has_rows(store: Store, layer: str, doc: int) -> bool:
    """Has ``layer`` nodes of document ``doc`` already? (A second import of it needs a new name.)"""
    paths = store.part_paths(layer)
    if not paths:
        return False
    with duckdb.connect() as con:
        return con.execute("SELECT count(*) FROM read_parquet(?, union_by_name = true) WHERE doc = ?",
                           [[str(p) for p in paths], doc]).fetchone()[0] > 0


def docs_with_rows(store: Store, layer: str) -> set[int]:
    """The documents ``layer`` has nodes of already: one scan of the layer, not one per document."""
    paths = store.part_paths(layer)
    if not paths:
        return set()
    with duckdb.connect() as con:
        return {d for (d,) in con.execute("SELECT DISTINCT doc FROM read_parquet(?, union_by_name = true)",
                                          [[str(p) for p in paths]]).fetchall()}


def next_ord(store: Store, layer: str) -> int:
    """The next free corpus-wide ordinal of a layer (0 for a new one)."""
    paths = store.part_paths(layer)
    if not paths:
        return 0
    with duckdb.connect() as con:
        return int(con.execute("SELECT coalesce(max(ord) + 1, 0) FROM read_parquet(?, union_by_name = true)",
                               [[str(p) for p in paths]]).fetchone()[0])
