"""Reading the header-row tables of the tiers and span formats (TSV, or CSV by ending).

Two readers agree on every file: :func:`read_columns` splits the whole table with
pyarrow's CSV reader (no Python object per row), and :func:`read_table` reads row by
row with :mod:`csv`. The fast one hands over to the row reader whenever the file is
one it does not read the same way (quotes, a lone carriage return) or pyarrow
refuses it, so a bad row is always reported by the row reader with its file:line.
"""
from __future__ import annotations

import csv
from dataclasses import dataclass
from decimal import ROUND_HALF_EVEN, Decimal, InvalidOperation
from pathlib import Path
from typing import Iterator

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.csv as pacsv

from engine.errors import StrataError
from engine.importers.base import read_lines
from engine.store import ANCHOR_COLUMNS, TREE_COLUMNS

#: Columns a table may not bring as attributes: they are the store's own.
RESERVED = set(ANCHOR_COLUMNS) | set(TREE_COLUMNS) | {"ord", "align", "align_score"}


#: the longest field read: the reader's limit of 2 GiB lines (csv's own default is 128 KiB)
MAX_FIELD_CHARS = (1 << 31) - 1


def delimiter_for(path: Path) -> str:
    return "," if path.name.lower().endswith(".csv") else "\t"


def records(path: Path) -> Iterator[tuple[int, list[str]]]:
    """Each record that is not blank, as ``(first line, fields)``.

    Tab-separated files have no quoting: a line is split at its tabs and every byte of a
    field arrives as written (a quote is a character like any other).  Comma-separated files
    follow RFC 4180: a field in double quotes may hold commas, line breaks and doubled quotes
    ("" for one); a quote inside a field that does not start with one is taken as written, as
    the common readers do.  A quoted field that is never closed is refused at the line it
    opened on.
    """
    if delimiter_for(path) == "\t":
        for number, text in read_lines(path):
            if text.strip():
                yield number, text.split("\t")
        return
    csv.field_size_limit(MAX_FIELD_CHARS)       # the module's default refuses fields over 128 KiB
    reader = csv.reader((text for _, text in read_lines(path, keep_ends=True)), strict=True)
    first = 1
    while True:
        try:
            fields = next(reader)
        except StopIteration:
            return
        except csv.Error as e:
            if "end of data" in str(e) or reader.line_num > first:
                raise StrataError("a quoted field opened on this line is never closed (RFC 4180: a field in "
                                  "double quotes ends with a quote; a quote inside it is written twice)",
                                  file=str(path), line=first) from None
            raise StrataError(f"not CSV as RFC 4180 writes it: {e} (a field in double quotes ends with a "
                              "quote followed by a comma or the end of the line)", file=str(path), line=first) from None
        if len(fields) > 1 or (fields and fields[0].strip()):
            yield first, fields
        first = reader.line_num + 1


def _header(path: Path, required: list[str], allowed_reserved: set[str],
            numbered: Iterator[tuple[int, list[str]]]) -> tuple[list[str], int]:
    """The checked header row and its line number (the first record that is not blank)."""
    first = next(numbered, None)
    if first is None:
        raise StrataError("the file is empty: expected a header row with " + ", ".join(required), file=str(path),
                          line=1)
    header = [h.strip() for h in first[1]]
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
    return header, first[0]


def read_table(path: Path, required: list[str], allowed_reserved: set[str]
               ) -> tuple[list[str], Iterator[tuple[int, dict[str, str]]]]:
    """Header and ``(line, row)`` pairs; a missing or reserved column is a StrataError at line 1."""
    numbered = records(path)
    header, _ = _header(path, required, allowed_reserved, numbered)

    def rows() -> Iterator[tuple[int, dict[str, str]]]:
        for number, values in numbered:
            if len(values) != len(header):
                raise StrataError(f"this row has {len(values)} fields, the header has {len(header)}",
                                  file=str(path), line=number)
            yield number, dict(zip(header, values))
    return header, rows()


@dataclass
class Columns:
    """A whole table: one Arrow string column per header name, and each row's line number."""
    header: list[str]
    table: pa.Table
    lines: np.ndarray

    @property
    def num_rows(self) -> int:
        return self.table.num_rows


def read_columns(path: Path, required: list[str], allowed_reserved: set[str]) -> Columns:
    """The table column-wise; any row the fast reader cannot vouch for goes through :func:`read_table`."""
    numbered = records(path)
    header, header_line = _header(path, required, allowed_reserved, numbered)
    numbered.close()
    fast = _read_fast(path, header, header_line)
    if fast is not None:
        return fast
    return _read_rows(path, required, allowed_reserved)


def _read_rows(path: Path, required: list[str], allowed_reserved: set[str]) -> Columns:
    header, rows = read_table(path, required, allowed_reserved)
    lines: list[int] = []
    values: dict[str, list[str]] = {h: [] for h in header}
    for line, r in rows:
        lines.append(line)
        for h in header:
            values[h].append(r[h])
    table = pa.table({h: pa.array(v, pa.string()) for h, v in values.items()})
    return Columns(header, table, np.asarray(lines, dtype=np.int64))


def _read_fast(path: Path, header: list[str], header_line: int) -> Columns | None:
    """pyarrow's CSV reader over the rows after the header; None where it might read them otherwise."""
    try:
        data = path.read_bytes()
    except OSError:
        return None
    # the row reader ends lines at "\n" only, reads quotes in CSV and refuses NUL: leave those
    # files to it
    if (b'"' in data and delimiter_for(path) == ",") or data.count(b"\r") != data.count(b"\r\n") or b"\x00" in data:
        return None
    buf = np.frombuffer(data, dtype=np.uint8)
    ends = np.flatnonzero(buf == 10)
    if len(data) and data[-1:] != b"\n":
        ends = np.append(ends, len(data))
    starts = np.concatenate([[0], ends[:-1] + 1]) if len(ends) else np.zeros(0, dtype=np.int64)
    length = ends - starts
    crlf = length > 0
    crlf[crlf] = buf[ends[crlf] - 1] == 13
    length = length - crlf
    if header_line > len(ends):
        return None
    body = data[int(ends[header_line - 1]) + 1:]
    line_no = np.flatnonzero(length[header_line:] > 0) + header_line + 1
    names = [f"c{i}" for i in range(len(header))]
    if not line_no.size:
        return Columns(header, pa.table({h: pa.array([], pa.string()) for h in header}), line_no.astype(np.int64))
    try:
        table = pacsv.read_csv(
            pa.py_buffer(body),
            read_options=pacsv.ReadOptions(column_names=names, use_threads=True,    # a block holds the longest line
                                           block_size=int(min(max(1 << 20, int(length.max()) + 2), MAX_FIELD_CHARS))),
            parse_options=pacsv.ParseOptions(delimiter=delimiter_for(path), quote_char=False,
                                             newlines_in_values=False, ignore_empty_lines=True),
            convert_options=pacsv.ConvertOptions(column_types={n: pa.string() for n in names},
                                                 strings_can_be_null=False))
    except (pa.ArrowInvalid, pa.ArrowException):
        return None
    if table.num_rows != line_no.size:
        return None
    table = table.rename_columns(header).combine_chunks()
    if delimiter_for(path) == "\t":
        # a line of tabs and spaces is a row to pyarrow but blank to the row reader
        blank = None
        for col in table.columns:
            empty = pc.equal(pc.utf8_trim_whitespace(col), "")
            blank = empty if blank is None else pc.and_(blank, empty)
        if pc.any(blank).as_py():
            return None
    return Columns(header, table, line_no.astype(np.int64))


#: Times are stored as whole microseconds (int64), read exactly from the decimal text of a
#: file: 1.186 s is 1186000 µs, so durations, gaps and comparisons are integer arithmetic and
#: "a pause of 84 ms" is exactly 84000 µs.  A text finer than a microsecond is rounded to the
#: nearest (half to even).  Every importer of times reads them through parse_time/times_fast.
_SCALE = {"s": 6, "ms": 3}            # decimal places that make the unit's text whole microseconds


def parse_time(value: str, unit: str, path: Path, line: int, column: str) -> int:
    """Whole microseconds from a table cell in ``unit`` (s or ms), exact for up to 6 (3) decimals.

    >>> parse_time("1.186", "s", Path("x"), 1, "start"), parse_time("84", "ms", Path("x"), 1, "end")
    (1186000, 84000)
    """
    try:
        t = Decimal(value.strip())
    except (InvalidOperation, ValueError):
        raise StrataError(f"{column} {value!r} is not a number", file=str(path), line=line) from None
    if not t.is_finite() or t < 0:
        raise StrataError(f"{column} {value!r} is not a time (a number of {unit} from 0)", file=str(path),
                          line=line)
    return int(t.scaleb(_SCALE[unit]).to_integral_value(rounding=ROUND_HALF_EVEN))


def times_fast(values: pa.ChunkedArray | pa.Array, unit: str) -> np.ndarray | None:
    """Microseconds from a whole column (int64), or None when a cell is not a plain decimal of at
    most 6 (3 for ms) places from 0: :func:`parse_time` then reads it, or names the line."""
    scale = _SCALE[unit]
    try:
        dec = pc.cast(values, pa.decimal128(18, scale))
    except (pa.ArrowInvalid, pa.ArrowException, NotImplementedError):
        return None
    if isinstance(dec, pa.ChunkedArray):
        dec = dec.combine_chunks()
    if dec.null_count:
        return None
    # a decimal128's unscaled value is value x 10^scale: whole microseconds; the low 64 bits
    # hold it (18 digits fit), little-endian as Arrow lays it out
    us = np.frombuffer(dec.buffers()[1], dtype=np.int64)[2 * dec.offset:2 * (dec.offset + len(dec))][::2].copy()
    if len(us) and us.min() < 0:
        return None
    return us


def seconds_text(us: int) -> str:
    """Whole microseconds as the exact decimal number of seconds (for messages and files).

    >>> seconds_text(1186000), seconds_text(84000), seconds_text(0), seconds_text(123456789000)
    ('1.186', '0.084', '0', '123456.789')
    """
    return format(Decimal(int(us)).scaleb(-6).normalize(), "f")


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


#: Text a number column holds: integers without a leading zero ("007" is a code, kept as text),
#: and decimals ("0.25", "-1.5e-3"); "nan", "inf" and thousands separators are text.
_INT_TEXT = r"^[+-]?(0|[1-9][0-9]*)$"
_FLOAT_TEXT = r"^[+-]?(0|[1-9][0-9]*)?(\.[0-9]+)?([eE][+-]?[0-9]+)?$"


def typed_column(values: pa.Array) -> pa.Array:
    """An attribute column of text as the numbers it holds, so it can be compared, summed and
    averaged: all of its values integers -> int64, all numbers -> float64, else text as read.
    Empty cells are null and do not decide.

    >>> typed_column(pa.array(["3", None, "12"])).type, typed_column(pa.array(["3", "0.5"])).type
    (DataType(int64), DataType(double))
    >>> typed_column(pa.array(["007", "12"])).type, typed_column(pa.array(["3", "three"])).type
    (DataType(string), DataType(string))
    """
    if not (pa.types.is_string(values.type) or pa.types.is_large_string(values.type)):
        return values
    present = pc.drop_null(pc.utf8_trim_whitespace(values))
    if len(present) == 0:
        return values
    trimmed = pc.utf8_trim_whitespace(values)
    if pc.all(pc.match_substring_regex(present, _INT_TEXT)).as_py():
        try:
            return pc.cast(trimmed, pa.int64())
        except pa.ArrowInvalid:           # past int64: decimals would round it, keep the text
            return values
    is_float = pc.and_(pc.match_substring_regex(present, _FLOAT_TEXT),
                       pc.match_substring_regex(present, r"[0-9]"))
    if pc.all(is_float).as_py():
        return pc.cast(trimmed, pa.float64())
    return values
