"""What every importer shares: options, the report, file reading with places."""
from __future__ import annotations

import hashlib
import os
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path
from typing import Iterator

import pyarrow as pa

from engine.errors import StrataError


@dataclass
class ImportOptions:
    prefix: str = ""              # namespaces the layers: "parser" -> "parser.token"
    lenient: bool = False         # skip bad sentences/rows and list them instead of failing
    progress: bool = True         # progress bar on stderr for big inputs
    extra: dict = field(default_factory=dict)   # format-specific options

    def layer(self, name: str) -> str:
        return f"{self.prefix}.{name}" if self.prefix else name


@dataclass
class ImportReport:
    files: list[str] = field(default_factory=list)
    counts: dict[str, int] = field(default_factory=dict)
    warnings: list[str] = field(default_factory=list)
    skipped: list[str] = field(default_factory=list)
    notes: list[str] = field(default_factory=list)     # what the import chose, for the user to know

    def add(self, key: str, n: int = 1) -> None:
        self.counts[key] = self.counts.get(key, 0) + n

    def merge(self, other: "ImportReport") -> None:
        self.files += other.files
        for k, v in other.counts.items():
            self.add(k, v)
        self.warnings += other.warnings
        self.skipped += other.skipped
        self.notes += other.notes


def sha256_of(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as f:
        for chunk in iter(lambda: f.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


#: the UTF-8 byte-order mark some editors put at the start of a file
BOM = b"\xef\xbb\xbf"


def without_bom(raw: bytes) -> bytes:
    """``raw`` without a UTF-8 byte-order mark at its start.

    Every reader takes the files it reads through this (or :func:`read_lines`): a mark at the
    start is skipped, as Python's "utf-8-sig" codec does; one anywhere else is a character of
    the text (U+FEFF), kept as written."""
    return raw[len(BOM):] if raw.startswith(BOM) else raw


def refuse_nul(text: str | bytes, path: Path, line: int) -> None:
    """A NUL character is not text (POSIX defines a text file as one without it) and would be
    cut short by tools that read the corpus later: refused with its line and byte."""
    at = text.find("\x00" if isinstance(text, str) else b"\x00")
    if at >= 0:
        unit = "character" if isinstance(text, str) else "byte"
        raise StrataError(f"a NUL character (U+0000) at {unit} {at + 1} of the line; annotation files are text",
                          file=str(path), line=line)


def refuse_nul_in(raw: bytes, path: Path, first_line: int = 1) -> None:
    """:func:`refuse_nul` for a whole block of bytes whose first line is ``first_line``."""
    at = raw.find(b"\x00")
    if at >= 0:
        refuse_nul(raw[raw.rfind(b"\n", 0, at) + 1:at + 1], path, first_line + raw.count(b"\n", 0, at))


def line_array(data: bytes, path: Path) -> pa.Array:
    """Every line of ``data`` (without its LF) as one Arrow string array, read by pyarrow in a
    block that holds the longest line; invalid UTF-8 is a StrataError naming its line."""
    import pyarrow.csv as pa_csv
    try:
        table = pa_csv.read_csv(
            pa.BufferReader(data),
            read_options=pa_csv.ReadOptions(column_names=["line"],
                                            block_size=max(1 << 20, min(len(data) + 1, (1 << 31) - 1))),
            parse_options=pa_csv.ParseOptions(delimiter="\x01", quote_char=False, escape_char=False,
                                              ignore_empty_lines=False, newlines_in_values=False),
            convert_options=pa_csv.ConvertOptions(column_types={"line": pa.string()}, strings_can_be_null=False))
    except pa.ArrowInvalid as e:
        if "utf" in str(e).lower():
            for number, raw in enumerate(data.split(b"\n"), 1):
                try:
                    raw.decode("utf-8")
                except UnicodeDecodeError as bad:
                    raise StrataError(f"invalid UTF-8 at byte {bad.start} of the line", file=str(path),
                                      line=number) from None
        raise StrataError(f"cannot read: {e}", file=str(path)) from None
    return table.column("line").combine_chunks()


def read_lines(path: Path, on_bytes=None, keep_ends: bool = False) -> Iterator[tuple[int, str]]:
    """``(line_number, text)`` pairs without the line end (with it: ``keep_ends``); invalid UTF-8 and NUL characters
    are a StrataError naming the line; a byte-order mark at the start is skipped.

    Reads in binary and decodes line by line so the error names the line, and memory
    stays bounded whatever the file size.
    """
    try:
        f = open(path, "rb")
    except OSError as e:
        raise StrataError(f"cannot read: {e.strerror}", file=str(path)) from None
    with f:
        for number, raw in enumerate(f, 1):
            if on_bytes is not None:
                on_bytes(len(raw))
            if number == 1:
                raw = without_bom(raw)
            try:
                text = raw.decode("utf-8")
            except UnicodeDecodeError as e:
                raise StrataError(f"invalid UTF-8 at byte {e.start} of the line", file=str(path),
                                  line=number) from None
            refuse_nul(text, path, number)
            if keep_ends:
                yield number, text
                continue
            if text.endswith("\n"):
                text = text[:-1]
            if text.endswith("\r"):
                text = text[:-1]
            yield number, text


@contextmanager
def import_memory_pool() -> Iterator[None]:
    """pyarrow allocates from jemalloc while an import runs (the previous pool afterwards).

    Why: with pyarrow's default (mimalloc here) the CoNLL-U import of 1M tokens spent 2.6 s of
    system time returning and re-faulting pages, with jemalloc 0.9 s: 8.0 -> 6.1 s in all.
    ``ARROW_DEFAULT_MEMORY_POOL`` set by the user wins; a pyarrow without jemalloc keeps its pool.
    """
    if os.environ.get("ARROW_DEFAULT_MEMORY_POOL"):
        yield
        return
    try:
        pool = pa.jemalloc_memory_pool()
    except (NotImplementedError, AttributeError, pa.ArrowException):
        yield
        return
    old = pa.default_memory_pool()
    pa.set_memory_pool(pool)
    try:
        yield
    finally:
        pa.set_memory_pool(old)
