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

REPR_ROWS = 10
TSV_ESCAPES = str.maketrans({"\\": "\\\\", "\t": "\\t", "\n": "\\n", "\r": "\\r"})


MISSING = "(missing)"


def file_cell(value: Any) -> str:
    """A value as CSV and TSV write it: nothing for a missing value, a float as the shortest
    decimal that reads back as the same double (Python's repr), everything else as str()."""
    if value is None:
        return ""
    if isinstance(value, float):
        return repr(value)
    return str(value)


def screen_cell(value: Any) -> str:
    """A value on screen: like a file cell, but a missing value says so."""
    return MISSING if value is None else file_cell(value)


@dataclass
class Hits:
    """Matches of one query; ``kind`` is "hits" (one row per match) or "aggregate"."""

    table: pa.Table
    kind: str = "hits"
    query: str = ""
    sql: str = field(default="", repr=False)
    #: document windows a limited listing ran on, as (first doc, end doc, rows); () = one statement
    windows: tuple[tuple[int, int, int], ...] = field(default=(), repr=False)

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
        """A plain-text table that fits ``width`` characters; long cells end in "…".

        For hits the keyword-in-context columns come first (left context right-aligned),
        then the other columns, as far as they fit.
        """
        rows = self.table.to_pylist()
        shown = rows if max_rows is None else rows[:max_rows]
        cols = self.columns
        if self.kind == "hits" and {"left", "match", "right"} <= set(cols):
            cols = ["left", "match", "right"] + [c for c in cols if c not in ("left", "match", "right")
                                                  and not c.endswith((".char_start", ".char_end"))]
        cells = [[screen_cell(r[c]).replace("\n", " ").replace("\t", " ") for c in cols] for r in shown]
        widths = [max([len(c)] + [len(row[i]) for row in cells]) for i, c in enumerate(cols)]
        # shrink the widest column down to a legible minimum, then drop columns from the end
        sep, legible = 2, 8

        def total() -> int:
            return sum(widths) + sep * (len(widths) - 1)
        while total() > width:
            i = widths.index(max(widths))
            if widths[i] > legible:
                widths[i] -= 1
            elif len(widths) > 1:
                cols, widths = cols[:-1], widths[:-1]
            else:
                widths[0] = max(width, 1)
                break

        def fit(text: str, w: int, right: bool = False) -> str:
            if len(text) > w:
                text = ("…" + text[-(w - 1):]) if right else (text[: w - 1] + "…")
            return text.rjust(w) if right else text.ljust(w)

        types = dict(zip(self.table.column_names, self.table.schema.types))
        right_aligned = {"left"} | {c for c in cols if pa.types.is_integer(types[c]) or pa.types.is_floating(types[c])}
        lines = ["  ".join(fit(c, w, c in right_aligned) for c, w in zip(cols, widths))]
        lines.append("  ".join("-" * w for w in widths))
        for row in cells:
            lines.append("  ".join(fit(row[i], widths[i], cols[i] in right_aligned) for i in range(len(cols))))
        lines = [line[:width] for line in lines]
        if len(rows) > len(shown):
            lines.append(f"... {len(rows) - len(shown)} more rows")
        lines.append(f"({len(rows)} {'row' if len(rows) == 1 else 'rows'})")
        return "\n".join(line.rstrip() for line in lines)

    def __repr__(self) -> str:
        return self.render_table(width=100, max_rows=REPR_ROWS)
