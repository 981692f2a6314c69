"""CoNLL-U import on two processes: the second half of the input in a child process.

Why: the import is CPU-bound and every step of it (numpy, pyarrow, DuckDB, Parquet
writing) works on a block of whole documents at a time, so two processes on the two
cores of a small machine nearly halve the time. Threads would not: much of the glue
between the vectorised steps holds Python's lock.

How:

1. The blocks of all files (cut just before a ``# newdoc`` line, see
   :func:`~engine.importers.conllu.block_plan`) are split into two contiguous halves by size.
2. The child process imports the second half with its counters (node ids, chains,
   ordinals, tree order numbers, anchors, document numbers) started past an upper bound
   of what the first half can use: a block of B bytes and L lines has fewer than B nodes,
   chains and text characters, fewer than L ordinals and 2L order numbers. It writes its
   Parquet parts into the batch's staging folder under a tag of its own.
3. Meanwhile the main process imports the first half into the batch as usual; then it
   adopts the child's documents, parts and counters.

The gap between the halves is harmless: ids need only be unique and increasing, the
anchors of documents only disjoint, ordinals only consecutive within a document.

Anything the child cannot decide alone makes the main process import the second half
itself, so results and error messages are exactly those of the sequential import: a
document or sentence id that the first half also has, or any error in the child
(a bad line is then reported by the main process, at its file and line).
"""
from __future__ import annotations

import os
import pickle
import subprocess
import sys
import traceback
from dataclasses import dataclass
from pathlib import Path

from engine.errors import StrataError
from engine.importers.base import ImportOptions, ImportReport, import_memory_pool
from engine.importers.conllu import ConlluImporter, block_plan, read_block
from engine.progress import byte_progress
from engine.store import DOC_GAP, Batch, DocInfo, Store

#: Smaller inputs are imported in one process: starting the child costs ~0.4 s.
MIN_BYTES = 24 << 20
#: Block size for the split: small enough that one file of 100 MB still splits evenly.
SPLIT_BLOCK_BYTES = 16 << 20
#: The child's share of the bytes: a little under half, for its start-up.
CHILD_SHARE = 0.40
#: ``STRATA_IMPORT_PROCESSES=1`` turns the split off.
ENV = "STRATA_IMPORT_PROCESSES"


@dataclass(frozen=True)
class Block:
    path: str
    offset: int
    length: int
    first_line: int
    lines: int
    newdocs: int


def worthwhile(paths: list[Path], options: ImportOptions) -> bool:
    """Two processes pay off for big inputs on a machine with two cores or more.

    ``--lenient`` stays sequential: which sentences it skips can depend on the first half.
    ``STRATA_IMPORT_PROCESSES=2`` splits whatever the size (the tests use it).
    """
    if options.lenient or os.environ.get(ENV, "") == "1" or (os.cpu_count() or 1) < 2:
        return False
    try:
        return sum(Path(p).stat().st_size for p in paths) >= MIN_BYTES or os.environ.get(ENV, "") == "2"
    except OSError:
        return False


def plan(paths: list[Path]) -> list[Block]:
    return [Block(str(p), *b) for p in paths for b in block_plan(p, SPLIT_BLOCK_BYTES)]


def split(blocks: list[Block]) -> tuple[list[Block], list[Block]]:
    """Two contiguous halves; the second (the child's) gets about CHILD_SHARE of the bytes."""
    total = sum(b.length for b in blocks)
    seen = 0
    for k, b in enumerate(blocks):
        if seen + b.length / 2 > total * (1 - CHILD_SHARE):
            return blocks[:k], blocks[k:]
        seen += b.length
    return blocks, []


def bounds(blocks: list[Block]) -> dict[str, int]:
    """Upper bounds of what importing ``blocks`` can use of each counter (see the module docstring)."""
    size = sum(b.length for b in blocks)
    lines = sum(b.lines for b in blocks)
    docs = sum(b.newdocs + 1 for b in blocks)
    return {"next_id": size + 1, "next_chain": size + 1, "next_base": size + docs * (DOC_GAP + 1) + 1,
            "next_doc": docs + 1, "tok_ord": lines + 1, "word_ord": lines + 1, "order": 2 * lines + 2}


def import_files(batch: Batch, paths: list[Path], options: ImportOptions) -> ImportReport:
    blocks = plan(paths)
    first, second = split(blocks)
    if not second or not first:
        return _sequential(ConlluImporter(batch, options), blocks, options)
    # a fresh interpreter running this module, not multiprocessing: its "spawn" start would run
    # the caller's main script again in the child, and "fork" is unsafe with DuckDB's threads.
    # It starts first: its interpreter loads while this process sets up.
    child = subprocess.Popen([sys.executable, "-m", __name__], stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                             env=_child_env())
    imp = None
    try:
        imp = ConlluImporter(batch, options)
        start = {**batch.counters(), "tok_ord": imp.tok_ord, "word_ord": imp.word_ord, "order": imp.order}
        room = bounds(first)
        child_start = {k: v + room[k] for k, v in start.items()}
        pickle.dump((str(batch.store.root), str(batch.stage), second, options, child_start), child.stdin)
        child.stdin.close()
        total = sum(b.length for b in blocks)
        with byte_progress(total, f"import {len(paths)} files", options.progress) as advance:
            _run(imp, first, advance)
            imp.flush()                        # the last parts are written while the child finishes
            try:
                result = pickle.load(child.stdout)
            except (EOFError, pickle.UnpicklingError):   # the child died without a word (killed, out of memory)
                result = {"error": "the second import process ended early"}
            child.wait()
            if not _adoptable(result, imp, batch, child_start):
                _discard(batch, "q")
                _run(imp, second, advance)
            else:
                advance(sum(b.length for b in second))
                _adopt(result, imp, batch)
        imp.close()
    except BaseException:
        if child.poll() is None:
            child.kill()
        child.wait()
        try:
            if imp is not None:
                imp.close()
        except Exception:
            pass
        raise
    finally:
        child.stdout.close()
    return imp.report


def _child_env() -> dict[str, str]:
    """The caller's environment, with the folder holding ``engine`` first on the module path
    (strata may run from a source tree that is not installed)."""
    root = str(Path(__file__).resolve().parents[2])
    env = dict(os.environ)
    env["PYTHONPATH"] = os.pathsep.join([root] + ([env["PYTHONPATH"]] if env.get("PYTHONPATH") else []))
    return env


def _sequential(imp: ConlluImporter, blocks: list[Block], options: ImportOptions) -> ImportReport:
    try:
        with byte_progress(sum(b.length for b in blocks), "import", options.progress) as advance:
            _run(imp, blocks, advance)
    finally:
        imp.close()
    return imp.report


def _run(imp: ConlluImporter, blocks: list[Block], advance=lambda n: None) -> None:
    for b in blocks:
        path = Path(b.path)
        if b.offset == 0:
            imp.start_file(path)
        imp.import_block(path, read_block(path, b.offset, b.length), b.first_line)
        advance(b.length)


def _adoptable(result: dict, imp: ConlluImporter, batch: Batch, child_start: dict) -> bool:
    """The child's work stands if it finished and shares no names with the first half."""
    if "error" in result:
        return False
    end = {**batch.counters(), "tok_ord": imp.tok_ord, "word_ord": imp.word_ord, "order": imp.order}
    if any(end[k] > child_start[k] for k in child_start):     # a bound was wrong: never seen
        raise RuntimeError(f"the first half of the import overran its counters: {end} > {child_start}")
    names = {name for _, name, *_ in result["documents"]}
    if names & batch.document_names():
        return False
    mine = {sid for sid, where in imp.seen_ids.items() if where == "this import"}
    return not (mine & set(result["sent_ids"]))


def _adopt(result: dict, imp: ConlluImporter, batch: Batch) -> None:
    for doc, name, base, length, text, attrs in result["documents"]:
        batch.adopt_document(DocInfo(doc, name, base, length, text), attrs)
    for path, sha in result["sources"]:
        batch.add_source(path, sha)
    for layer, path, rows in result["parts"]:
        batch.add_staged(layer, Path(path), rows)
    batch.advance_counters(result["counters"])
    imp.order = max(imp.order, result["order"])
    imp.report.merge(result["report"])


def _discard(batch: Batch, tag: str) -> None:
    for p in batch.stage.glob(f"*--{tag}*.parquet"):
        p.unlink()


# -- the child process ------------------------------------------------------------------
class _ChildBatch:
    """What :class:`ConlluImporter` needs of a batch, recorded for the main process to adopt."""

    def __init__(self, store: Store, stage: Path, start: dict[str, int]) -> None:
        self.store = store
        self.stage = stage
        self.next = dict(start)
        self.kinds: dict[str, str] = {}
        self.documents: list[tuple] = []
        self.sources: list[tuple[str, str]] = []
        self.parts: list[tuple[str, str, int]] = []
        self.order = start["order"]

    def declare_layer(self, name: str, kind: str, props: dict | None = None) -> None:
        self.kinds[name] = kind

    def layer_kind(self, layer: str) -> str | None:
        return self.kinds.get(layer)

    def alloc_ids(self, n: int) -> int:
        first = self.next["next_id"]
        self.next["next_id"] += n
        return first

    def alloc_chains(self, n: int) -> int:
        first = self.next["next_chain"]
        self.next["next_chain"] += n
        return first

    def add_document(self, name: str, text: str, attrs: dict[str, str] | None = None) -> DocInfo:
        info = DocInfo(self.next["next_doc"], name, self.next["next_base"], len(text), text)
        self.next["next_doc"] += 1
        self.next["next_base"] += len(text) + DOC_GAP
        self.documents.append((info.doc, name, info.base, info.length, text, dict(attrs or {})))
        return info

    def add_source(self, path: str, sha256: str) -> None:
        self.sources.append((path, sha256))

    def add_staged(self, layer: str, path: Path, rows: int) -> None:
        self.parts.append((layer, str(path), rows))

    def set_meta(self, key: str, value: int) -> None:
        if key == "next_order":
            self.order = value


class _NoPandas:
    """An import finder that declines pandas (pyarrow then works without it)."""

    def find_spec(self, name, path=None, target=None):
        if name == "pandas" or name.startswith("pandas."):
            raise ImportError("pandas is not needed in the import process")
        return None


def _child_main() -> None:
    """Read the task from stdin (pickled), import, write the result to stdout (pickled)."""
    out = sys.stdout.buffer
    sys.stdout = sys.stderr              # nothing else may write to the result stream
    try:
        root, stage, blocks, options, start = pickle.load(sys.stdin.buffer)
        with import_memory_pool():
            result = _child_import(root, stage, blocks, options, start)
        pickle.dump(result, out)
    finally:
        out.flush()


def _child_import(root: str, stage: str, blocks: list[Block], options: ImportOptions,
                  start: dict[str, int]) -> dict:
    try:
        batch = _ChildBatch(Store(Path(root)), Path(stage), start)
        imp = ConlluImporter(batch, options, part_tag="q")
        imp.tok_ord, imp.word_ord, imp.order = start["tok_ord"], start["word_ord"], start["order"]
        try:
            _run(imp, blocks)
        finally:
            imp.close()
        counters = {k: batch.next[k] for k in ("next_id", "next_chain", "next_base", "next_doc")}
        return {"documents": batch.documents, "sources": batch.sources, "parts": batch.parts,
                "counters": counters, "order": batch.order, "report": imp.report,
                "sent_ids": [sid for sid, where in imp.seen_ids.items() if where == "this import"]}
    except StrataError as e:
        return {"error": str(e)}
    except Exception:
        return {"error": traceback.format_exc()}


if __name__ == "__main__":
    # pyarrow imports pandas (~0.4 s) on its first array conversion; this process never needs it
    sys.meta_path.insert(0, _NoPandas())
    _child_main()
