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

    def add(self, key: str, n: int = 1) -> None:
        self.counts[key] = self.counts.get(key, 0) + n

    def merge(self, other: "ImportReport") -> None:
        self.files += other.files
        for k, v in other.counts.items():
            self.add(k, v)
        self.warnings += other.warnings
        self.skipped += other.skipped


def sha256_of(path: Path) -> str:
    h = hashlib.sha256()
    with open(path, "rb") as f:
        for chunk in iter(lambda: f.read(1 << 20), b""):
            h.update(chunk)
    return h.hexdigest()


def read_lines(path: Path, on_bytes=None) -> Iterator[tuple[int, str]]:
    """``(line_number, text)`` pairs without the line end; invalid UTF-8 is a StrataError.

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
            try:
                text = raw.decode("utf-8")
            except UnicodeDecodeError as e:
                raise StrataError(f"invalid UTF-8 at byte {e.start} of the line", file=str(path),
                                  line=number) from None
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
