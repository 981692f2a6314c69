"""CoNLL-U import on two processes: the main process from the front, a child from the back.

Why: the import is CPU-bound and every step of it (numpy, pyarrow, DuckDB, Parquet
writing) works on a block of whole documents at a time, so two processes on the two
cores of a small machine nearly halve the time. Threads would not: much of the glue
between the vectorised steps holds Python's lock.

How:

1. The blocks of all files (cut just before a ``# newdoc`` line, see
   :func:`~engine.importers.conllu.block_plan`) are numbered in file order.
2. Each block owns a range of every counter (node ids, chains, ordinals, tree order
   numbers, anchors, document numbers) that starts past an upper bound of what the blocks
   before it can use: a block of B bytes and L lines has fewer than B nodes, chains and
   text characters, fewer than L ordinals and 2L order numbers (:func:`bounds`).
3. The main process imports blocks 0, 1, 2, ... into the batch; the child imports the
   last block, then the one before it, and so on; each block from its own counter range,
   whoever imports it, so the same input always gives the same ids and anchors. The child
   writes its Parquet parts into the batch's staging folder under a tag of its own. A block
   goes to whoever claims it first (:class:`Claims`: creating a file is atomic), so the two
   meet wherever their speeds make them meet: a busy core or a slow start of the child
   costs no idle time on the other.
4. The main process then adopts the child's documents, parts and counters.

The gaps between blocks are harmless: ids need only be unique and increasing in file
order, the anchors of documents only disjoint, ordinals only consecutive within a document.

Anything the child cannot decide alone makes the main process import the child's
blocks itself, so results and error messages are exactly those of the sequential import:
a document or sentence id that the main process's blocks also have, or any error in the
child (a bad line is then reported by the main process, at its file and line).
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
#: Block size: the unit of the work shared between the processes.
SPLIT_BLOCK_BYTES = 8 << 20
#: At most this share of the bytes for the main process (None: no limit). The tests set it,
#: so that the child takes part even when the main process alone would be done first.
MAIN_MAX_SHARE: float | None = None
#: ``STRATA_IMPORT_PROCESSES=1`` turns the split off.
ENV = "STRATA_IMPORT_PROCESSES"
COUNTERS = ("next_id", "next_chain", "next_base", "next_doc", "tok_ord", "word_ord", "order")


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

    ``--lenient`` stays sequential: which sentences it skips can depend on the other blocks.
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


def _room(size: int, lines: int, docs: int) -> dict[str, int]:
    """Upper bounds of each counter for blocks of ``size`` bytes, ``lines`` lines, ``docs`` documents."""
    return {"next_id": size + 1, "next_chain": size + 1, "next_base": size + docs * (DOC_GAP + 1) + 1,
            "next_doc": docs + 1, "tok_ord": lines + 1, "word_ord": lines + 1, "order": 2 * lines + 2}


def bounds(blocks: list[Block]) -> dict[str, int]:
    """Upper bounds of what importing ``blocks`` can use of each counter (see the module docstring)."""
    return _room(sum(b.length for b in blocks), sum(b.lines for b in blocks), sum(b.newdocs + 1 for b in blocks))


def block_starts(blocks: list[Block], start: dict[str, int]) -> list[dict[str, int]]:
    """Where each block's counters start: past the bounds of all blocks before it
    (``start`` plus :func:`bounds` of the blocks before, block by block)."""
    out = []
    size = lines = docs = 0
    for b in blocks:
        room = _room(size, lines, docs)
        out.append({k: start[k] + room[k] for k in COUNTERS})
        size, lines, docs = size + b.length, lines + b.lines, docs + b.newdocs + 1
    return out


class Claims:
    """Who imports which block: the first process to create ``claim-N`` in the folder.

    ``os.open`` with ``O_CREAT | O_EXCL`` either creates the file or fails, atomically, so
    each block is claimed exactly once. The main process claims upwards and the child
    downwards, so each side's blocks stay one contiguous run.
    """

    def __init__(self, folder: Path) -> None:
        self.folder = folder

    def claim(self, block: int) -> bool:
        try:
            os.close(os.open(self.folder / f"claim-{block:05d}", os.O_CREAT | os.O_EXCL | os.O_WRONLY))
            return True
        except FileExistsError:
            return False


def import_files(batch: Batch, paths: list[Path], options: ImportOptions) -> ImportReport:
    blocks = plan(paths)
    if len(blocks) < 2:
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
        claims_dir = batch.stage / "claims"
        claims_dir.mkdir()
        claims = Claims(claims_dir)
        total = sum(b.length for b in blocks)
        limit = total if MAIN_MAX_SHARE is None else MAIN_MAX_SHARE * total
        try:
            pickle.dump((str(batch.store.root), str(batch.stage), blocks, options, start), child.stdin)
            child.stdin.close()
        except OSError:                        # the child is gone already: every block is ours
            limit = total
        with byte_progress(total, f"import {len(paths)} files", options.progress) as advance:
            mine, done = 0, 0
            starts = block_starts(blocks, start)
            while mine < len(blocks) and done + blocks[mine].length <= limit and claims.claim(mine):
                _run_own(imp, batch, blocks, starts, mine, advance)
                done += blocks[mine].length
                mine += 1
            theirs = blocks[mine:]
            if not theirs:                      # all blocks were imported here: the child has none
                child.kill()
                child.wait()
                imp.close()
                return imp.report
            # the last parts are written, and the statistics of this process's parts computed,
            # while the child finishes
            imp.flush()
            imp.finish_parts()
            try:
                result = pickle.load(child.stdout)
            except (EOFError, pickle.UnpicklingError):   # the child died without a word (killed, out of memory)
                result = {"error": "the second import process ended early"}
            child.wait()
            if not _adoptable(result, imp, batch, starts[mine], mine):
                _discard(batch, "q")
                for k in range(mine, len(blocks)):
                    _run_own(imp, batch, blocks, starts, k, advance)
            else:
                advance(sum(b.length for b in theirs))
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


def _enter_block(imp: ConlluImporter, k: int, start: dict[str, int]) -> None:
    """The importer's own counters at block ``k``'s start (the batch's are set by the caller)."""
    imp.tok_ord, imp.word_ord, imp.order = start["tok_ord"], start["word_ord"], start["order"]
    imp.block_no = k


def _run_own(imp: ConlluImporter, batch: Batch, blocks: list[Block], starts: list[dict[str, int]], k: int,
             advance) -> None:
    """Block ``k`` in the main process, from its own counters, as the child would import it:
    the same input always gives the same ids, anchors and ordinals."""
    batch.advance_counters(starts[k])
    _enter_block(imp, k, starts[k])
    _run(imp, [blocks[k]], advance)


def _adoptable(result: dict, imp: ConlluImporter, batch: Batch, child_start: dict, first_block: int) -> bool:
    """The child's work stands if it finished, imported exactly the blocks the main process
    left, and shares no names with them."""
    if "error" in result:
        return False
    end = {**batch.counters(), "tok_ord": imp.tok_ord, "word_ord": imp.word_ord, "order": imp.order}
    if any(end[k] > child_start[k] for k in child_start):     # a bound was wrong: never seen
        raise RuntimeError(f"the main process's blocks overran their counters: {end} > {child_start}")
    if result["first_block"] != first_block:                 # never seen: claims are exclusive
        raise RuntimeError(f"the child imported from block {result['first_block']}, not {first_block}")
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
    batch.add_part_stats(result["part_stats"])
    batch.advance_counters(result["counters"])
    imp.order = max(imp.order, result["counters"]["order"])
    imp.report.merge(result["report"])


def _discard(batch: Batch, tag: str) -> None:
    for p in batch.stage.glob(f"*--{tag}*.parquet"):
        p.unlink()


# -- the child process ------------------------------------------------------------------
class _ChildBatch:
    """What :class:`ConlluImporter` needs of a batch, recorded for the main process to adopt.

    Blocks come in descending order, each with counters of its own (:meth:`start_block`);
    what is recorded is put back in file order by :func:`_child_import`.
    """

    def __init__(self, store: Store, stage: Path) -> None:
        self.store = store
        self.stage = stage
        self.next: dict[str, int] = {}
        self.block = -1
        self.kinds: dict[str, str] = {}
        self.documents: list[tuple] = []
        self.sources: list[tuple[int, str, str]] = []
        self.parts: list[tuple[str, str, int]] = []
        self.part_stats: dict = {}
        self.ends: dict[str, int] = {}

    def start_block(self, block: int, start: dict[str, int], imp: ConlluImporter) -> None:
        self.block = block
        self.next = {k: start[k] for k in ("next_id", "next_chain", "next_base", "next_doc")}
        _enter_block(imp, block, start)

    def end_block(self, imp: ConlluImporter) -> None:
        used = {**self.next, "tok_ord": imp.tok_ord, "word_ord": imp.word_ord, "order": imp.order}
        for k, v in used.items():
            self.ends[k] = max(self.ends.get(k, v), v)

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
        self.sources.append((self.block, path, sha256))

    def add_staged(self, layer: str, path: Path, rows: int) -> None:
        self.parts.append((layer, str(path), rows))

    def add_part_stats(self, stats: dict) -> None:
        self.part_stats.update(stats)

    def set_meta(self, key: str, value: int) -> None:
        pass                                   # next_order: the ends of the blocks say it


def _in_file_order(report: ImportReport, spans: list[tuple[int, dict[str, int]]]) -> ImportReport:
    """The child's report with its per-block files, warnings and skipped lines in block order."""
    out = ImportReport(counts=dict(report.counts))
    for _, at in sorted(spans, key=lambda s: s[0]):
        for key in ("files", "warnings", "skipped"):
            lo, hi = at[key]
            getattr(out, key).extend(getattr(report, key)[lo:hi])
    return out


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
    """Claim and import blocks from the last one down, until the main process has the next."""
    try:
        store = Store(Path(root))
        store.keep_reader = True                 # read-only answers for the whole import
        batch = _ChildBatch(store, Path(stage))
        claims = Claims(Path(stage) / "claims")
        starts = block_starts(blocks, start)
        imp = ConlluImporter(batch, options, part_tag="q")
        imp.descending = True
        spans: list[tuple[int, dict[str, int]]] = []
        first = len(blocks)
        try:
            while first > 0 and claims.claim(first - 1):
                first -= 1
                before = {k: len(getattr(imp.report, k)) for k in ("files", "warnings", "skipped")}
                batch.start_block(first, starts[first], imp)
                _run(imp, [blocks[first]])
                batch.end_block(imp)
                spans.append((first, {k: (before[k], len(getattr(imp.report, k))) for k in before}))
        finally:
            imp.close()
        return {"first_block": first, "documents": sorted(batch.documents),
                "sources": [(p, sha) for _, p, sha in sorted(batch.sources)], "parts": batch.parts,
                "part_stats": batch.part_stats,
                "counters": batch.ends, "report": _in_file_order(imp.report, spans),
                "sent_ids": [sid for sid, where in imp.seen_ids.items() if where == "this import"]}
    except StrataError as e:
        return {"error": str(e)}
    except Exception:
        return {"error": traceback.format_exc()}


if __name__ == "__main__":
    # pyarrow imports pandas (~0.4 s) on its first array conversion; this process never needs it
    sys.meta_path.insert(0, _NoPandas())
    _child_main()
    sys.stderr.flush()
    # every file is closed and the result sent: skip the interpreter's teardown (~0.1 s of
    # freeing DuckDB and Arrow memory that the main process would wait for)
    os._exit(0)
