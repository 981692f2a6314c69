"""The hit table: one row per match (or per group of an aggregate), held as Arrow.

Exports keep every column: CSV follows RFC 4180 (comma, CRLF, fields with comma, quote or
line break quoted, quotes doubled); TSV has no quoting, so tab, newline, carriage return
and backslash inside a field are written as the escapes ``\\t \\n \\r \\\\``; JSON Lines
writes one object per row; Parquet keeps the Arrow types.
"""
from __future__ import annotations

import csv
import json
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import pyarrow as pa

from engine.output_files import replaced_when_done
from engine.screen import file_cell, render

REPR_ROWS = 10
TSV_ESCAPES = str.maketrans({"\\": "\\\\", "\t": "\\t", "\n": "\\n", "\r": "\\r"})


@dataclass
class Hits:
    """Matches of one query; ``kind`` is "hits" (one row per match) or "aggregate"."""

    table: pa.Table
    kind: str = "hits"
    query: str = ""
    sql: str = field(default="", repr=False)
    #: document windows a limited listing ran on, as (first doc, end doc, rows); () = one statement
    windows: tuple[tuple[int, int, int], ...] = field(default=(), repr=False)
    #: the query's own ``show`` columns, which the screen never leaves out; None: show every column
    shown: tuple[str, ...] | None = None
    #: what the user should know beside the rows (e.g. a sample larger than the result)
    notes: tuple[str, ...] = ()

    def __len__(self) -> int:
        return self.table.num_rows

    @property
    def columns(self) -> list[str]:
        return list(self.table.column_names)

    def rows(self) -> list[dict[str, Any]]:
        return self.table.to_pylist()

    def to_arrow(self) -> pa.Table:
        return self.table

    def to_pandas(self):
        return self.table.to_pandas()

    def to_csv(self, path: str | Path) -> Path:
        with replaced_when_done(path, "hit table") as tmp, tmp.open("w", encoding="utf-8", newline="") as out:
            writer = csv.writer(out, lineterminator="\r\n", quoting=csv.QUOTE_MINIMAL)
            writer.writerow(self.columns)
            for row in self.table.to_pylist():
                writer.writerow([file_cell(row[c]) for c in self.columns])
        return Path(path)

    def to_tsv(self, path: str | Path) -> Path:
        with replaced_when_done(path, "hit table") as tmp, tmp.open("w", encoding="utf-8", newline="") as out:
            out.write("\t".join(c.translate(TSV_ESCAPES) for c in self.columns) + "\n")
            for row in self.table.to_pylist():
                cells = [file_cell(row[c]) for c in self.columns]
                out.write("\t".join(x.translate(TSV_ESCAPES) for x in cells) + "\n")
        return Path(path)

    def to_jsonl(self, path: str | Path) -> Path:
        with replaced_when_done(path, "hit table") as tmp, tmp.open("w", encoding="utf-8", newline="") as out:
            for row in self.table.to_pylist():
                out.write(json.dumps(row, ensure_ascii=False, default=str) + "\n")
        return Path(path)

    def to_parquet(self, path: str | Path) -> Path:
        import pyarrow.parquet as pq
        with replaced_when_done(path, "hit table") as tmp:
            pq.write_table(self.table, tmp)
        return Path(path)

    # ---- terminal ---------------------------------------------------------------------
    def render_table(self, width: int = 100, max_rows: int | None = 50) -> str:
        """The hit table for a terminal ``width`` columns wide (see :mod:`engine.screen`)."""
        return render(self.table, self.kind, width, max_rows, self.shown)

    def __repr__(self) -> str:
        return self.render_table(width=100, max_rows=REPR_ROWS)
