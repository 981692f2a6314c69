"""Reading the header-row tables of the tiers and span formats (TSV, or CSV by ending)."""
from __future__ import annotations

import csv
from pathlib import Path
from typing import Iterator

from engine.errors import StrataError
from engine.importers.base import read_lines
from engine.store import ANCHOR_COLUMNS, TREE_COLUMNS

#: Columns a table may not bring as attributes: they are the store's own.
RESERVED = set(ANCHOR_COLUMNS) | set(TREE_COLUMNS) | {"ord", "align", "align_score"}


def delimiter_for(path: Path) -> str:
    return "," if path.name.lower().endswith(".csv") else "\t"


def read_table(path: Path, required: list[str], allowed_reserved: set[str]
               ) -> tuple[list[str], Iterator[tuple[int, dict[str, str]]]]:
    """Header and ``(line, row)`` pairs; a missing or reserved column is a StrataError at line 1."""
    lines = read_lines(path)
    numbered = ((n, t) for n, t in lines if t.strip())
    first = next(numbered, None)
    if first is None:
        raise StrataError("the file is empty: expected a header row with " + ", ".join(required), file=str(path),
                          line=1)
    delim = delimiter_for(path)
    header = [h.strip() for h in next(csv.reader([first[1]], delimiter=delim))]
    missing = [c for c in required if c not in header]
    if missing:
        raise StrataError(f"the header lacks the column(s) {', '.join(missing)} "
                          f"(required: {', '.join(required)}; found: {', '.join(header)})", file=str(path),
                          line=first[0])
    dup = sorted({h for h in header if header.count(h) > 1})
    if dup:
        raise StrataError(f"column(s) {', '.join(dup)} appear twice in the header", file=str(path), line=first[0])
    bad = [h for h in header if h in RESERVED and h not in allowed_reserved]
    if bad:
        raise StrataError(f"column(s) {', '.join(bad)} are names the store uses itself; rename them",
                          file=str(path), line=first[0])

    def rows() -> Iterator[tuple[int, dict[str, str]]]:
        for number, text in numbered:
            values = next(csv.reader([text], delimiter=delim))
            if len(values) != len(header):
                raise StrataError(f"this row has {len(values)} fields, the header has {len(header)}",
                                  file=str(path), line=number)
            yield number, dict(zip(header, values))
    return header, rows()


def parse_time(value: str, unit: str, path: Path, line: int, column: str) -> float:
    """Seconds from a table cell in ``unit`` (s or ms)."""
    try:
        t = float(value)
    except ValueError:
        raise StrataError(f"{column} {value!r} is not a number", file=str(path), line=line) from None
    if t != t or t in (float("inf"), float("-inf")) or t < 0:
        raise StrataError(f"{column} {value!r} is not a time (a number of {unit} from 0)", file=str(path),
                          line=line)
    return t / 1000.0 if unit == "ms" else t


def parse_int(value: str, path: Path, line: int, column: str) -> int:
    try:
        return int(value.strip())
    except ValueError:
        raise StrataError(f"{column} {value!r} is not a whole number", file=str(path), line=line) from None


def time_unit(extra: dict) -> str:
    unit = extra.get("time_unit", "s") or "s"
    if unit not in ("s", "ms"):
        raise StrataError(f"--time-unit {unit!r}: use s (seconds) or ms (milliseconds)")
    return unit
