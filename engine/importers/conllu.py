"""CoNLL-U in: all ten columns, multiword tokens, empty nodes, comments, entities.

CoNLL-U is the open file standard of Universal Dependencies
(https://universaldependencies.org/format.html).

The import is vectorised, never a Python loop over tokens: pyarrow splits lines and
columns and checks UTF-8, numpy does the sequence arithmetic (word positions,
multiword ranges, offsets, the checks of IDs and heads), :mod:`treeorder` numbers
the dependency trees, and DuckDB pairs entity brackets and pivots comments. A file
is read in blocks that end at a ``# newdoc`` line, so memory stays bounded by the
block size (or the largest document).

Layers written (see DEVELOPERS.md), named as CoNLL-U names them: ``word`` (syntactic words,
with the dependency tree as tree columns), ``token`` (surface tokens: a multiword token once), ``empty``
(empty nodes), ``sentence``, ``mention``; edge sets ``dep`` and ``enhanced``. The
primary text of a document is its surface tokens, each followed by a space unless
``SpaceAfter=No``, with sentences joined by a newline.
"""
from __future__ import annotations

from concurrent.futures import ThreadPoolExecutor
from pathlib import Path
from typing import Iterator

import duckdb
import numpy as np
import pyarrow as pa
import pyarrow.compute as pc
import pyarrow.csv as pa_csv
import pyarrow.parquet as pq

from engine.errors import StrataError
from engine.importers.base import ImportOptions, ImportReport, refuse_nul_in, sha256_of, without_bom
from engine.importers.treeorder import TreeError, tree_order
from engine.progress import byte_progress
from engine.stats import part_stats
from engine.store import ANCHOR_COLUMNS, EDGE_COLUMNS, ROW_GROUP_SIZE, STRUCTURAL, Batch, part_write_options

FORMAT = "conllu"
DEFAULT_ENTITY_FIELDS = "eid-etype-head-other"
BLOCK_BYTES = 64 << 20
PART_ROWS = 300_000
COLUMNS = ["cid", "form", "lemma", "upos", "xpos", "feats", "head", "deprel", "deps", "misc"]
_SHARED_COLUMNS = ("cid", "form", "head", "deps", "misc")
_FIELD_NAMES = ["ID", "FORM", "LEMMA", "UPOS", "XPOS", "FEATS", "HEAD", "DEPREL", "DEPS", "MISC"]
_RESERVED = set(ANCHOR_COLUMNS) | {"ord", "sent_id", "text", "comments"}


def _string_offsets(a: pa.StringArray) -> np.ndarray:
    """The offsets of a string array into its data buffer (length + 1 values, zero-copy)."""
    return np.frombuffer(a.buffers()[1], dtype=np.int32)[a.offset:a.offset + len(a) + 1]


def _np(a) -> np.ndarray:
    return a.to_numpy(zero_copy_only=False)


#: the longest number read in an ID, a HEAD or a DEPS head: any 18 digits fit in int64
MAX_DIGITS = 18


def _is_number(a: pa.Array) -> np.ndarray:
    """Which strings are a whole number strata reads: ASCII digits only (Unicode digits such
    as "٣" pass ``utf8_is_digit`` but no integer cast) and at most :data:`MAX_DIGITS` of them."""
    return _np(pc.and_(pc.and_(pc.utf8_is_digit(a), pc.string_is_ascii(a)),
                       pc.less_equal(pc.utf8_length(a), MAX_DIGITS)))


def _too_long_id(text: str | None) -> str | None:
    """The message for an ID holding a number too long to read (alone, in a range, or in an
    empty node's ID), or None."""
    for piece in (text or "").replace(".", "-").split("-"):
        if piece.isascii() and piece.isdigit() and len(piece) > MAX_DIGITS:
            shown = text if len(text) <= 48 else text[:48] + "..."
            return f"ID {shown!r} holds a number of {len(piece)} digits; strata reads at most {MAX_DIGITS}"
    return None


def _number_problem(text: str | None, what: str) -> str | None:
    """The message for a number too long to read, or None when ``text`` is not one."""
    if text and text.isascii() and text.isdigit() and len(text) > MAX_DIGITS:
        return f"{what} {text[:24]}{'...' if len(text) > 24 else ''} has {len(text)} digits; strata reads at most {MAX_DIGITS}"
    return None


def _seg_cumsum(values: np.ndarray, starts: np.ndarray, lengths: np.ndarray) -> np.ndarray:
    """Inclusive cumulative sum restarted at each segment start."""
    cs = np.cumsum(values)
    base = cs[starts] - values[starts]
    return cs - np.repeat(base, lengths)


def _seg_running_max(values: np.ndarray, seg_id: np.ndarray) -> np.ndarray:
    """Running maximum restarted per segment (values >= 0; -1 means none yet)."""
    big = np.int64(values.max() + 2 if len(values) else 2)
    shifted = seg_id * big + (values + 1)
    run = np.maximum.accumulate(shifted)
    return run - seg_id * big - 1


class _Problems:
    """Bad places found by the vectorised checks: (line, sentence, message)."""

    def __init__(self) -> None:
        self.items: list[tuple[int, int, str]] = []

    def add(self, mask: np.ndarray, lines: np.ndarray, sents: np.ndarray, message) -> None:
        rows = np.flatnonzero(mask)
        for r in rows:
            self.items.append((int(lines[r]), int(sents[r]), message(r) if callable(message) else message))


class _Comments:
    """The comment lines of a block in line order: line numbers, sentence and document
    counters, the verbatim line, key (as codes) and value, and whether the line describes
    the document. Lookups are numpy over the key codes: these few questions cost ~15 ms
    per block as DuckDB queries over a registered Arrow table."""

    def __init__(self, n: np.ndarray, s: np.ndarray, d: np.ndarray, line: pa.Array, key: pa.Array,
                 value: pa.Array, doc_level: np.ndarray) -> None:
        self.n, self.s, self.d, self.line, self.value, self.doc_level = n, s, d, line, value, doc_level
        encoded = key.dictionary_encode()
        self.keys: list[str] = encoded.dictionary.to_pylist()
        self.code = _np(encoded.indices).astype(np.int64)
        self._code_of = {k: i for i, k in enumerate(self.keys)}

    def __len__(self) -> int:
        return len(self.n)

    def rows(self, key: str) -> np.ndarray:
        """Rows with this key, in line order."""
        c = self._code_of.get(key)
        return np.flatnonzero(self.code == c) if c is not None else np.zeros(0, np.int64)

    def filter(self, keep: np.ndarray) -> "_Comments":
        out = object.__new__(_Comments)
        km = pa.array(keep)
        out.n, out.s, out.d, out.doc_level, out.code = self.n[keep], self.s[keep], self.d[keep], \
            self.doc_level[keep], self.code[keep]
        out.line, out.value = self.line.filter(km), self.value.filter(km)
        out.keys, out._code_of = self.keys, self._code_of
        return out


def _last_per_group(rows: np.ndarray, groups: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``(group, row)`` of the last of ``rows`` (ascending) in each group (nondecreasing along rows)."""
    g = groups[rows]
    keep = np.r_[g[1:] != g[:-1], True] if len(rows) else np.zeros(0, bool)
    return g[keep], rows[keep]


def _first_per_group(rows: np.ndarray, groups: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    g = groups[rows]
    keep = np.r_[True, g[1:] != g[:-1]] if len(rows) else np.zeros(0, bool)
    return g[keep], rows[keep]


class ConlluImporter:
    """Imports CoNLL-U files into one batch; ids, ordinals and bases continue across files."""

    def __init__(self, batch: Batch, options: ImportOptions, part_tag: str = "p") -> None:
        self.batch = batch
        self.part_tag = part_tag          # staged part names: another process uses another tag
        self.opt = options
        self.report = ImportReport()
        L = options.layer
        self.names = {k: L(k) for k in ("token", "word", "empty", "sentence", "mention", "dep", "enhanced")}
        self.con = duckdb.connect()
        self.con.execute("SET python_enable_replacements = false")
        self.con.execute("SET enable_progress_bar = false")
        # Inside this module ``tok``/``W`` are the syntactic words (layer ``word``, columns
        # ``word_first/last``) and ``word``/``U`` the surface tokens (layer ``token``, columns
        # ``tok_first/last``): the names of the arrays predate the layers' CoNLL-U names.
        self.tok_ord = self._from_layer(self.names["word"], "coalesce(max(ord) + 1, 0)", 0)
        self.word_ord = self._from_layer(self.names["token"], "coalesce(max(ord) + 1, 0)", 0)
        self.order = int(batch.store.meta("next_order") or 0)
        files = self._files(self.names["sentence"])
        self.seen_ids: dict[str, str] = {}
        if files:
            for (sid,) in self.con.execute("SELECT sent_id FROM read_parquet(?, union_by_name = true) "
                                           "WHERE sent_id IS NOT NULL", [files]).fetchall():
                self.seen_ids[sid] = "the corpus"
        self.docs_with_tokens = {r[0] for r in self._rows(self.names["word"], "SELECT DISTINCT doc FROM {}")}
        self.known_docs = {d.name: d for d in batch.store.documents()}
        self.n_part = 0
        # the number of the block being imported, and whether blocks come in descending order
        # (the second process of a parallel import works from the end): buffered rows are
        # written in block order and such parts are named by their first block
        self.block_no = 0
        self.descending = False
        self._writer = ThreadPoolExecutor(max_workers=1)
        self._writes: list = []
        self._staged: list[tuple[str, Path]] = []      # parts whose statistics are still to compute
        self._buffers: dict[str, list[tuple[int, pa.Table]]] = {}
        self._declare()

    # -- set-up ------------------------------------------------------------------------
    def _files(self, layer: str) -> list[str]:
        return [str(p) for p in self.batch.store.part_paths(layer)]

    def _from_layer(self, layer: str, expr: str, default):
        files = self._files(layer)
        if not files:
            return default
        return self.con.execute(f"SELECT {expr} FROM read_parquet(?, union_by_name = true)", [files]).fetchall()[0][0]

    def _rows(self, layer: str, sql: str) -> list[tuple]:
        files = self._files(layer)
        if not files:
            return []
        return self.con.execute(sql.format("read_parquet(?, union_by_name = true)"), [files]).fetchall()

    def _declare(self) -> None:
        n = self.names
        # every node lies inside the sentence its ``sent`` names; sentences share no character
        common = {"token_layer": n["token"], "word_layer": n["word"], "format": FORMAT,
                  "sentence_layer": n["sentence"], "separate": False}
        # FEATS and MISC stay one column each; the store derives feats.KEY and misc.KEY from them
        kv = {"key_value": ["feats", "misc"]}
        self.key_value = {n["word"]: kv["key_value"], n["empty"]: kv["key_value"], n["token"]: ["misc"]}
        self.batch.declare_layer(n["word"], "sequence", {**common, **kv, "tree": True,
                                                       "edge_sets": [n["dep"], n["enhanced"]]})
        self.batch.declare_layer(n["token"], "sequence", {**common, "key_value": ["misc"]})
        # the enhanced graph also joins empty nodes (CoNLL-U DEPS: "8.1:nsubj")
        self.batch.declare_layer(n["empty"], "sequence", {**common, **kv, "edge_sets": [n["enhanced"]]})
        self.batch.declare_layer(n["sentence"], "span", {**common, "separate": True})
        self.batch.declare_layer(n["mention"], "span", {**common, "coreference": True})
        self.batch.declare_layer(n["dep"], "edges", {"nodes": n["word"]})
        self.batch.declare_layer(n["enhanced"], "edges", {"nodes": n["word"]})

    # -- files and blocks ----------------------------------------------------------------
    def import_file(self, path: Path) -> None:
        self.path = path
        self.start_file(path)
        try:
            size = path.stat().st_size
        except OSError as e:
            raise StrataError(f"cannot read: {e.strerror}", file=str(path)) from None
        with byte_progress(size, f"import {path.name}", self.opt.progress) as advance:
            for block, first_line in _blocks(path):
                self._block(block, first_line)
                advance(len(block))

    def start_file(self, path: Path) -> None:
        """Record a source file (once, before its first block)."""
        self.report.files.append(str(path))
        self.batch.add_source(str(path), sha256_of(path))

    def import_block(self, path: Path, data: bytes, first_line: int) -> None:
        """Import one block of whole documents of ``path`` (see :func:`block_plan`)."""
        self.path = path
        self._block(data, first_line)

    def _block(self, data: bytes, first_line: int) -> None:
        """Import one block of whole documents."""
        self.first_line = first_line
        line = self._lines(data, first_line)
        blank = _np(pc.equal(line, ""))
        comment = _np(pc.starts_with(line, "#"))
        newdoc = _np(pc.starts_with(line, "# newdoc"))
        n = np.arange(first_line, first_line + len(line), dtype=np.int64)
        s = np.cumsum(blank, dtype=np.int64)
        d = np.cumsum(newdoc, dtype=np.int64)
        tok_idx = np.flatnonzero(~blank & ~comment)
        com_idx = np.flatnonzero(comment)
        problems = _Problems()
        self._tokens(line.take(pa.array(tok_idx)), n[tok_idx], s[tok_idx], d[tok_idx], problems)
        self._comments(line.take(pa.array(com_idx)), n[com_idx], s[com_idx], d[com_idx], problems)
        self._check_new_documents()
        self._validate(problems)
        keep = self._drop_bad(problems)
        if not keep:
            return
        self._documents()
        self._offsets()
        self._tree()
        self._mentions()
        self._write()

    def _lines(self, data: bytes, first_line: int) -> pa.Array:
        """The block's lines as one string array.  The reader's block (16 MiB) must hold the
        longest line: a longer one makes it read again with a block of the whole data, up to
        the reader's own limit of 2 GiB (a line beyond it is refused with its number)."""
        if first_line == 1:
            data = without_bom(data)
        refuse_nul_in(data, self.path, first_line)
        block_size = 1 << 24
        while True:
            try:
                table = pa_csv.read_csv(
                    pa.BufferReader(data), read_options=pa_csv.ReadOptions(column_names=["line"], block_size=block_size),
                    parse_options=pa_csv.ParseOptions(delimiter="\x01", quote_char=False, escape_char=False,
                                                      ignore_empty_lines=False, newlines_in_values=False),
                    convert_options=pa_csv.ConvertOptions(column_types={"line": pa.string()}, strings_can_be_null=False,
                                                          quoted_strings_can_be_null=False))
                break
            except pa.ArrowInvalid as e:
                if "utf" in str(e).lower():
                    _raise_bad_utf8(data, first_line, self.path)
                if "straddl" in str(e).lower() and block_size < MAX_LINE_BYTES and len(data) >= block_size:
                    block_size = min(len(data) + 1, MAX_LINE_BYTES)
                    continue
                if "straddl" in str(e).lower():
                    _raise_long_line(data, first_line, self.path)
                raise StrataError(f"cannot read: {e}", file=str(self.path)) from None
        line = table.column("line").combine_chunks()
        if len(line) and pc.any(pc.ends_with(line, "\r")).as_py():
            line = pc.utf8_rtrim(line, characters="\r")
        return line

    # -- token rows --------------------------------------------------------------------
    def _tokens(self, lines: pa.Array, n: np.ndarray, s: np.ndarray, d: np.ndarray, problems: _Problems) -> None:
        parts = pc.split_pattern(lines, "\t")
        nf = _np(pc.list_value_length(parts))
        bad = nf != 10
        if bad.any():
            problems.add(bad, n, s, lambda r: f"a token line needs 10 tab-separated columns, this one has {nf[r]}")
            good = ~bad
            parts, n, s, d = parts.filter(pa.array(good)), n[good], s[good], d[good]
        flat = parts.flatten()
        m = len(n)
        empty = np.flatnonzero(_np(pc.equal(flat, "")))
        if len(empty):            # the standard: "Fields must not be empty" (underscore for none)
            row_bad = np.zeros(m, bool)
            row_bad[empty // 10] = True
            first_empty = {}
            for k in empty[::-1]:
                first_empty[int(k) // 10] = int(k) % 10
            problems.add(row_bad, n, s, lambda r: f"the {_FIELD_NAMES[first_empty[int(r)]]} field is empty; CoNLL-U "
                                                  "writes _ where a value is missing (fields must not be empty)")
        # the columns every stage needs, for all rows; the others are taken once, for the rows written
        cols = {name: flat.take(pa.array(np.arange(COLUMNS.index(name), 10 * m, 10, dtype=np.int64)))
                for name in _SHARED_COLUMNS}
        self._flat, self._rowmap = flat, np.arange(m, dtype=np.int64)
        self.cols, self.n, self.s, self.d = cols, n, s, d
        cid = cols["cid"]
        is_w = _is_number(cid)
        dash = _np(pc.match_substring(cid, "-"))
        dot = _np(pc.match_substring(cid, "."))
        is_m = dash & ~dot & ~is_w
        is_e = dot & ~dash & ~is_w
        kind_bad = ~(is_w | is_m | is_e)
        # the numbers inside IDs
        cid_i = np.zeros(m, np.int64)
        a = np.zeros(m, np.int64)
        b = np.zeros(m, np.int64)
        if is_w.any():
            cid_i[is_w] = _np(pc.cast(cid.filter(pa.array(is_w)), pa.int64()))
        for mask, sep in ((is_m, "-"), (is_e, ".")):
            if mask.any():
                pieces = pc.split_pattern(cid.filter(pa.array(mask)), sep, max_splits=1)
                left, right = pc.list_element(pieces, 0), pc.list_element(pieces, 1)
                ok = _is_number(left) & _is_number(right)
                rows = np.flatnonzero(mask)
                kind_bad[rows[~ok]] = True
                mask[rows[~ok]] = False
                a[rows[ok]] = _np(pc.cast(left.filter(pa.array(ok)), pa.int64()))
                b[rows[ok]] = _np(pc.cast(right.filter(pa.array(ok)), pa.int64()))
        problems.add(kind_bad, n, s, lambda r: _too_long_id(cid[r].as_py()) or
                     f"bad ID {cid[r].as_py()!r}: expected a number, a range like 3-4 or an empty node like 3.1")
        self.is_w, self.is_m, self.is_e, self.cid_i, self.a, self.b = is_w, is_m, is_e, cid_i, a, b
        # sentence segments of token rows
        start_flag = np.r_[True, s[1:] != s[:-1]] if m else np.zeros(0, bool)
        self.seg_starts = np.flatnonzero(start_flag)
        self.seg_len = np.diff(np.r_[self.seg_starts, m])
        self.seg_id = np.cumsum(start_flag) - 1
        self.wpos = _seg_cumsum(is_w.astype(np.int64), self.seg_starts, self.seg_len) if m else np.zeros(0, np.int64)
        nwords_seg = np.add.reduceat(is_w.astype(np.int64), self.seg_starts) if m else np.zeros(0, np.int64)
        self.nwords_seg = nwords_seg
        self.nwords = np.repeat(nwords_seg, self.seg_len)
        # heads
        head = cols["head"]
        self.head_blank = _np(pc.equal(head, "_"))
        head_digit = _is_number(head)
        self.head_i = np.full(m, -1, np.int64)
        if head_digit.any():
            self.head_i[head_digit] = _np(pc.cast(head.filter(pa.array(head_digit)), pa.int64()))
        self.head_digit = head_digit

    def _comments(self, lines: pa.Array, n: np.ndarray, s: np.ndarray, d: np.ndarray, problems: _Problems) -> None:
        """Comment lines as :class:`_Comments` with key, value and whether they describe the
        document (pyarrow and numpy: DuckDB window functions over them took ~1 s per million
        tokens)."""
        # ``# key = value`` (or ``# key=value``); a comment is about the document when it follows
        # a ``newdoc`` line of its sentence's comment group and no ``newpar`` or ``sent_id`` yet
        body = pc.utf8_slice_codeunits(lines, 1)
        key, value = _split_comment(body, " = ")
        key_eq, value_eq = _split_comment(body, "=")
        spaced = pc.match_substring(body, " = ")
        has_eq = pc.match_substring(body, "=")
        key = pc.utf8_trim(pc.if_else(spaced, key, key_eq), " ")
        value = pc.utf8_trim(pc.if_else(spaced, value, pc.if_else(has_eq, value_eq, pa.scalar(""))), " ")
        is_newdoc = _np(pc.starts_with(key, "newdoc"))
        ends = _np(pc.or_(pc.starts_with(key, "newpar"), pc.equal(key, "sent_id")))
        first = np.flatnonzero(np.r_[True, s[1:] != s[:-1]]) if len(s) else np.zeros(0, np.int64)
        lens = np.diff(np.r_[first, len(s)])
        seen_doc = _seg_cumsum(is_newdoc.astype(np.int64), first, lens) > 0 if len(s) else is_newdoc
        ended = _seg_cumsum(ends.astype(np.int64), first, lens) > 0 if len(s) else ends
        self.com = _Comments(n, s, d, lines, key, value, seen_doc & ~ended & ~is_newdoc)
        for name, advice in (("newdoc id", "name the document, or write '# newdoc' alone to have a name made from the file's "
                                            "name"), ("sent_id", "give the sentence an id, or leave the line out")):
            problems.add(_np(pc.and_(pc.equal(key, name), pc.equal(value, ""))), n, s,
                         f"'# {name} =' has no value: {advice}")
        # comments after the first token line of their sentence, and comments with no sentence
        tok_s, tok_first_n = self.s[self.seg_starts], self.n[self.seg_starts]
        at = np.searchsorted(tok_s, s)
        found = (at < len(tok_s)) & (tok_s[np.minimum(at, max(len(tok_s) - 1, 0))] == s) if len(tok_s) else \
            np.zeros(len(s), bool)
        first = np.where(found, tok_first_n[np.minimum(at, max(len(tok_s) - 1, 0))] if len(tok_s) else 0, 0)
        problems.add(~found, n, s, "comment lines with no token lines after them")
        problems.add(found & (n > first), n, s, "a comment line inside a sentence (comments go before the token lines)")

    def _check_new_documents(self) -> None:
        """A document that already has these layers needs --prefix: say so before anything else."""
        if not self.docs_with_tokens:
            return
        rows = self.com.rows("newdoc id")
        names = list(zip(self.com.value.take(pa.array(rows)).to_pylist(), self.com.n[rows].tolist()))
        for name, line in names or [(self.path.stem, self.first_line)]:
            existing = self.known_docs.get(name)
            if existing is not None and existing.doc in self.docs_with_tokens:
                raise StrataError(f"document {name!r} already has a {self.names['word']!r} layer; import a second "
                                  "annotation of it with --prefix NAME", file=str(self.path), line=line)

    # -- checks ----------------------------------------------------------------------------
    def _validate(self, problems: _Problems) -> None:
        n, s, cid = self.n, self.s, self.cols["cid"]
        w, mw, e = self.is_w, self.is_m, self.is_e
        wpos, nwords, a, b = self.wpos, self.nwords, self.a, self.b
        problems.add(w & (self.cid_i != wpos), n, s,
                     lambda r: f"word ID {self.cid_i[r]} out of order: expected {wpos[r]}")
        problems.add(mw & ((a != wpos + 1) | (b <= a)), n, s,
                     lambda r: f"multiword token range {cid[r].as_py()} must start at the next word ({wpos[r] + 1}) "
                               "and span at least two words")
        problems.add(mw & (b > nwords), n, s,
                     lambda r: f"multiword token range {cid[r].as_py()} ends after the last word of the sentence "
                               f"({nwords[r]})")
        prev_last = _seg_running_max(np.where(mw, b, -1), self.seg_id)
        prev_last = np.r_[-1, prev_last[:-1]]
        same_seg = np.r_[False, self.seg_id[1:] == self.seg_id[:-1]]
        problems.add(mw & same_seg & (a <= prev_last) & (a == wpos + 1), n, s,
                     lambda r: f"multiword token range {cid[r].as_py()} overlaps the previous one")
        problems.add(e & (a != wpos), n, s, lambda r: f"bad empty node ID {cid[r].as_py()}: expected {wpos[r]}.N")
        head = self.cols["head"]
        hd = self.head_i
        problems.add(w & ~self.head_blank & ~self.head_digit, n, s,
                     lambda r: _number_problem(head[r].as_py(), "HEAD") or f"HEAD {head[r].as_py()!r} is not a number")
        problems.add(w & (hd > nwords), n, s,
                     lambda r: f"HEAD {hd[r]} is out of range: the sentence has {nwords[r]} words")
        problems.add(w & (hd == self.cid_i), n, s, lambda r: f"word {self.cid_i[r]} is its own head")
        starts, lens = self.seg_starts, self.seg_len
        if len(starts):
            blanks = np.add.reduceat((w & self.head_blank).astype(np.int64), starts)
            mixed = (blanks > 0) & (blanks < self.nwords_seg)
            first_blank = w & self.head_blank & np.repeat(mixed, lens)
            fb_rows = np.flatnonzero(first_blank)
            if len(fb_rows):
                firsts = fb_rows[np.r_[True, self.seg_id[fb_rows][1:] != self.seg_id[fb_rows][:-1]]]
                m = np.zeros(len(n), bool)
                m[firsts] = True
                problems.add(m, n, s, "HEAD is '_' here but given for other words of the sentence")
            roots = np.add.reduceat((w & (hd == 0)).astype(np.int64), starts)
            full = blanks == 0
            no_root = full & (roots == 0) & (self.nwords_seg > 0)
            m = np.zeros(len(n), bool)
            m[starts[no_root]] = True
            problems.add(m, n, s, "the dependency tree has no root (no word with HEAD 0): there is a cycle")
            many = full & (roots > 1)
            if many.any():
                root_rows = np.flatnonzero(w & (hd == 0) & np.repeat(many, lens))
                second = root_rows[np.r_[False, self.seg_id[root_rows][1:] == self.seg_id[root_rows][:-1]]]
                m = np.zeros(len(n), bool)
                m[second] = True
                problems.add(m, n, s, lambda r: f"the dependency tree has {roots[self.seg_id[r]]} roots (words with "
                                                "HEAD 0); a sentence has exactly one")
            self.tree_seg = full & (self.nwords_seg > 0)
        else:
            self.tree_seg = np.zeros(0, bool)
        self._validate_deps(problems)
        self._validate_sentence_ids(problems)
        self._validate_cycles(problems)

    def _validate_deps(self, problems: _Problems) -> None:
        deps = self.cols["deps"]
        has = _np(pc.not_equal(deps, "_")) & (self.is_w | self.is_e)
        self.deps_rows = np.flatnonzero(has)
        if not len(self.deps_rows):
            self.deps_items = None
            return
        items = pc.split_pattern(deps.take(pa.array(self.deps_rows)), "|")
        parent = self.deps_rows[_np(pc.list_parent_indices(items))]
        flat = items.flatten()
        ok_colon = _np(pc.match_substring(flat, ":"))
        padded = pc.if_else(pa.array(ok_colon), flat, pc.binary_join_element_wise(flat, pa.scalar(":"), ""))
        hr = pc.split_pattern(padded, ":", max_splits=1)
        h = pc.list_element(hr, 0)
        rel = pc.list_element(hr, 1)
        h_digit = _is_number(h)
        h_int = np.full(len(flat), -1, np.int64)
        if h_digit.any():
            h_int[h_digit] = _np(pc.cast(h.filter(pa.array(h_digit)), pa.int64()))
        ok_word = h_digit & (h_int <= self.nwords[parent])
        empties = {(int(self.s[r]), self.cols["cid"][int(r)].as_py()) for r in np.flatnonzero(self.is_e)}
        ok = ok_colon & ok_word
        for k in np.flatnonzero(ok_colon & ~h_digit):
            if (int(self.s[parent[k]]), h[int(k)].as_py()) in empties:
                ok[k] = True
        bad = ~ok
        if bad.any():
            lines, sents = self.n[parent], self.s[parent]
            problems.add(bad, lines, sents, lambda k: f"DEPS item {flat[int(k)].as_py()!r}: the head must be a word or "
                                                      "empty node of this sentence, followed by ':' and a relation")
        self.deps_items = (parent, h, h_digit, h_int, rel)

    def _validate_sentence_ids(self, problems: _Problems) -> None:
        com = self.com
        rows = com.rows("sent_id")
        sents, first = _first_per_group(rows, com.s)
        _, last = _last_per_group(rows, com.s)
        self.sent_ids = {}
        for s, line, sid in zip(sents.tolist(), com.n[first].tolist(), com.value.take(pa.array(last)).to_pylist()):
            where = self.seen_ids.get(sid)
            if where is not None:
                problems.items.append((line, s, f"sentence id {sid!r} is used twice" if where == "this import"
                                       else f"sentence id {sid!r} is already in {where}"))
            else:
                self.seen_ids[sid] = "this import"
            self.sent_ids[s] = sid

    def _validate_cycles(self, problems: _Problems) -> None:
        """Trees of sentences that passed the other checks must reach every word from the root."""
        flagged = {p[1] for p in problems.items}
        seg_ok = self.tree_seg & ~np.isin(self.s[self.seg_starts], list(flagged))
        rows = np.flatnonzero(np.repeat(seg_ok, self.seg_len) & self.is_w)
        self.tree_rows = rows
        if not len(rows):
            return
        sub_s = self.s[rows]
        sub_starts = np.flatnonzero(np.r_[True, sub_s[1:] != sub_s[:-1]])
        try:
            self.tree_result = tree_order(self.head_i[rows], sub_starts)
        except TreeError as err:
            bad_rows = rows[err.nodes]
            seen = set()
            for r in bad_rows:
                sent = int(self.s[r])
                if sent not in seen:
                    seen.add(sent)
                    problems.items.append((int(self.n[r]), sent, f"word {self.cid_i[r]} is on a dependency cycle "
                                                                 "(it cannot be reached from the root)"))
            self.tree_result = None

    def _drop_bad(self, problems: _Problems) -> bool:
        """Without --lenient the first problem is an error; with it, bad sentences are skipped."""
        if problems.items:
            problems.items.sort(key=lambda p: p[:2])     # by place; at one place the first check found
            if not self.opt.lenient:
                line, _, message = problems.items[0]
                raise StrataError(message, file=str(self.path), line=line)
            bad: dict[int, tuple[int, str]] = {}
            for line, s, message in problems.items:
                bad.setdefault(s, (line, message))
            for line, message in sorted(bad.values()):
                self.report.skipped.append(f"{self.path}:{line}: {message}")
            keep = ~np.isin(self.s, list(bad))
            self._filter_rows(keep)
            self.com = self.com.filter(~np.isin(self.com.s, list(bad)))
            self._validate_cycles(_Problems())
        return len(self.n) > 0

    def _col(self, name: str, rows: np.ndarray) -> pa.Array:
        """Column ``name`` of the given token rows, straight from the split fields."""
        return self._flat.take(pa.array(10 * self._rowmap[rows] + COLUMNS.index(name)))

    def _filter_rows(self, keep: np.ndarray) -> None:
        km = pa.array(keep)
        self.cols = {k: v.filter(km) for k, v in self.cols.items()}
        self._rowmap = self._rowmap[keep]
        for name in ("n", "s", "d", "is_w", "is_m", "is_e", "cid_i", "a", "b", "head_i", "head_blank", "head_digit"):
            setattr(self, name, getattr(self, name)[keep])
        m = len(self.n)
        start_flag = np.r_[True, self.s[1:] != self.s[:-1]] if m else np.zeros(0, bool)
        self.seg_starts = np.flatnonzero(start_flag)
        self.seg_len = np.diff(np.r_[self.seg_starts, m])
        self.seg_id = np.cumsum(start_flag) - 1
        self.wpos = _seg_cumsum(self.is_w.astype(np.int64), self.seg_starts, self.seg_len) if m else self.cid_i
        self.nwords_seg = np.add.reduceat(self.is_w.astype(np.int64), self.seg_starts) if m else self.cid_i
        self.nwords = np.repeat(self.nwords_seg, self.seg_len)
        self.tree_seg = (np.add.reduceat((self.is_w & self.head_blank).astype(np.int64), self.seg_starts) == 0
                         ) if m else np.zeros(0, bool)
        if self.deps_items is not None:
            self._validate_deps(_Problems())

    # -- documents and offsets -----------------------------------------------------------
    def _documents(self) -> None:
        com = self.com
        docs, last = _last_per_group(com.rows("newdoc id"), com.d)
        names = dict(zip(docs.tolist(), com.value.take(pa.array(last)).to_pylist()))
        attrs: dict[int, dict[str, str]] = {}
        rows = np.flatnonzero(com.doc_level)
        for d, code, value in zip(com.d[rows].tolist(), com.code[rows].tolist(),
                                  com.value.take(pa.array(rows)).to_pylist()):
            key = com.keys[code]
            attrs.setdefault(d, {})[key[len("meta::"):] if key.startswith("meta::") else key] = value
        self.doc_list = []
        doc_starts = np.flatnonzero(np.r_[True, self.d[1:] != self.d[:-1]])
        for r in doc_starts:
            d = int(self.d[r])
            name = names.get(d)
            if name is None:
                name = self.path.stem if d == 0 else f"{self.path.stem}-{int(self.n[r])}"
            self.doc_list.append((d, name, int(self.n[r]), attrs.get(d, {})))

    def _offsets(self) -> None:
        w, mw = self.is_w, self.is_m
        m = len(self.n)
        cur_last = _seg_running_max(np.where(mw, self.b, -1), self.seg_id)
        in_mwt = w & (cur_last >= 0) & (self.cid_i <= cur_last)
        unit = mw | (w & ~in_mwt)
        u_rows = np.flatnonzero(unit)
        self.u_rows = u_rows
        form = self.cols["form"]
        flen = _np(pc.utf8_length(form)).astype(np.int64)
        self.flen = flen
        misc = self.cols["misc"]
        u_misc = misc.take(pa.array(u_rows))
        no_space = _np(pc.match_substring_regex(u_misc, r"(^|\|)SpaceAfter=No(\||$)"))
        u_seg = self.seg_id[u_rows]
        last = np.r_[u_seg[1:] != u_seg[:-1], True] if len(u_rows) else np.zeros(0, bool)
        ulen = flen[u_rows]
        width = ulen + 1 - (no_space & ~last)
        u_doc = self.d[u_rows]
        doc_first = np.flatnonzero(np.r_[True, u_doc[1:] != u_doc[:-1]])
        doc_len = np.diff(np.r_[doc_first, len(u_rows)])
        lstart = _seg_cumsum(width, doc_first, doc_len) - width
        # document texts from one joined Arrow array
        sep = np.where(last, "\n", np.where(no_space, "", " "))
        joined = pc.binary_join_element_wise(form.take(pa.array(u_rows)), pa.array(sep), "")
        offsets = _string_offsets(joined)
        data = joined.buffers()[2]
        texts = []
        for k, f0 in enumerate(doc_first):
            f1 = f0 + doc_len[k]
            text = data[int(offsets[f0]):int(offsets[f1])].to_pybytes().decode("utf-8")
            texts.append(text[:-1] if text.endswith("\n") else text)
        self._register_documents(texts)
        base_u = self.doc_base[np.searchsorted(self.doc_d, u_doc)]
        doc_u = self.doc_num[np.searchsorted(self.doc_d, u_doc)]
        # unit index of every row: its own for units, its multiword token's for the words inside
        uidx = np.full(m, -1, np.int64)
        uidx[u_rows] = np.arange(len(u_rows))
        m_uidx = np.maximum.accumulate(np.where(mw, uidx, -1)) if m else uidx
        row_u = np.where(in_mwt, m_uidx, uidx)
        # syntactic words
        w_rows = np.flatnonzero(w)
        wu = row_u[w_rows]
        w_in = in_mwt[w_rows]
        wlen = flen[w_rows]
        # parts of one multiword token tile it: each takes its length, the last the rest
        grp_start = np.flatnonzero(np.r_[True, wu[1:] != wu[:-1]]) if len(w_rows) else np.zeros(0, np.int64)
        grp_len = np.diff(np.r_[grp_start, len(w_rows)])
        part_end = _seg_cumsum(wlen, grp_start, grp_len) if len(w_rows) else wlen
        last_part = np.zeros(len(w_rows), bool)
        last_part[grp_start + grp_len - 1] = True
        us, ul = lstart[wu], ulen[wu]
        w_start = np.where(w_in, us + np.minimum(part_end - wlen, ul), us)
        w_end = np.where(w_in & ~last_part, us + np.minimum(part_end, ul), us + ul)
        n_tok, n_unit = len(w_rows), len(u_rows)
        tok_ord = self.tok_ord + np.arange(n_tok, dtype=np.int64)
        word_ord = self.word_ord + np.arange(n_unit, dtype=np.int64)
        n_sent = len(self.seg_starts)
        n_empty = int(self.is_e.sum())
        self.id_sent = self.batch.alloc_ids(n_sent)
        self.id_tok = self.batch.alloc_ids(n_tok)
        self.id_word = self.batch.alloc_ids(n_unit)
        self.id_empty = self.batch.alloc_ids(n_empty)
        self.tok_ord += n_tok
        self.word_ord += n_unit
        base_w = base_u[wu]
        self.W = dict(rows=w_rows, start=base_w + w_start, end=base_w + w_end, doc=doc_u[wu], ord=tok_ord,
                      word=word_ord[wu], sent=self.id_sent + self.seg_id[w_rows], seg=self.seg_id[w_rows])
        # surface words: their syntactic words' ordinal range
        tok_first = np.zeros(n_unit, np.int64)
        tok_last = np.zeros(n_unit, np.int64)
        tok_first[wu[grp_start]] = tok_ord[grp_start]
        tok_last[wu[grp_start + grp_len - 1]] = tok_ord[grp_start + grp_len - 1]
        self.U = dict(rows=u_rows, start=base_u + lstart, end=base_u + lstart + ulen, doc=doc_u, ord=word_ord,
                      tok_first=tok_first, tok_last=tok_last, sent=self.id_sent + u_seg, is_mwt=mw[u_rows])
        # empty nodes: zero width after the word they follow (the sentence start after word 0)
        e_rows = np.flatnonzero(self.is_e)
        widx_row = np.full(m, -1, np.int64)
        widx_row[w_rows] = np.arange(n_tok)
        last_w = np.maximum.accumulate(np.where(w, widx_row, -1)) if m else widx_row
        e_seg = self.seg_id[e_rows]
        seg_first_w = np.searchsorted(self.W["seg"], e_seg)        # first word of the sentence
        after = last_w[e_rows]
        follows = (self.a[e_rows] > 0) & (after >= 0)
        point = np.where(follows, self.W["end"][np.maximum(after, 0)], self.W["start"][np.minimum(seg_first_w, n_tok - 1)])
        self.E = dict(rows=e_rows, start=point, end=point, doc=self.doc_num[np.searchsorted(self.doc_d, self.d[e_rows])],
                      sent=self.id_sent + e_seg)
        # sentences
        seg_w_first = np.searchsorted(self.W["seg"], np.arange(n_sent))
        seg_w_last = np.searchsorted(self.W["seg"], np.arange(n_sent), side="right") - 1
        seg_u_first = np.searchsorted(u_seg, np.arange(n_sent))
        seg_u_last = np.searchsorted(u_seg, np.arange(n_sent), side="right") - 1
        self.S = dict(id=self.id_sent + np.arange(n_sent), doc=doc_u[seg_u_first], start=self.U["start"][seg_u_first],
                      end=self.U["end"][seg_u_last], word_first=tok_ord[seg_w_first], word_last=tok_ord[seg_w_last],
                      tok_first=word_ord[seg_u_first], tok_last=word_ord[seg_u_last],
                      s=self.s[self.seg_starts], line=self.n[self.seg_starts])
        # each sentence rebuilt from its units (the bytes of ``joined``, less the final newline),
        # to check "# text" against in one comparison
        sent_off = np.r_[offsets[seg_u_first], offsets[len(u_rows)]].astype(np.int32) if n_sent else np.zeros(1, np.int32)
        rebuilt = pa.StringArray.from_buffers(n_sent, pa.py_buffer(sent_off), data)
        self.S["rebuilt"] = pc.utf8_slice_codeunits(rebuilt, 0, -1)
        self.widx_row = widx_row

    def _register_documents(self, texts: list[str]) -> None:
        nums, bases, ds = [], [], []
        for (d, name, first_line, attrs), text in zip(self.doc_list, texts):
            existing = self.known_docs.get(name)
            if existing is None:
                info = self.batch.add_document(name, text, attrs)
                self.known_docs[name] = info
            else:
                if existing.text != text:
                    at = next((i for i, (x, y) in enumerate(zip(existing.text, text)) if x != y),
                              min(len(existing.text), len(text)))
                    raise StrataError(
                        f"document {name!r} is already in the corpus with a different text (first difference at "
                        f"character {at}: {existing.text[at:at + 20]!r} vs {text[at:at + 20]!r}); layers of the same "
                        "document must share its primary text", file=str(self.path), line=first_line)
                info = existing
            nums.append(info.doc)
            bases.append(info.base)
            ds.append(d)
        self.doc_d = np.array(ds, np.int64)
        self.doc_num = np.array(nums, np.int64)
        self.doc_base = np.array(bases, np.int64)
        self.report.add("documents", len(ds))

    # -- trees -----------------------------------------------------------------------------
    def _tree(self) -> None:
        n_tok = len(self.W["rows"])
        pre = np.full(n_tok, -1, np.int64)
        post = pre.copy()
        depth = pre.copy()
        parent = pre.copy()
        rows = self.tree_rows
        if len(rows) and self.tree_result is not None:
            res = self.tree_result
            widx = self.widx_row[rows]
            pre[widx] = res.entry + self.order
            post[widx] = res.exit + self.order
            depth[widx] = res.depth
            parent[widx] = np.where(res.parent >= 0, self.id_tok + widx[np.maximum(res.parent, 0)], -1)
            self.order += 2 * len(rows)
        self.T = dict(pre=pre, post=post, depth=depth, parent=parent)

    # -- mentions --------------------------------------------------------------------------
    def _mentions(self) -> None:
        """Pair the MISC ``Entity`` brackets: ``(id-...`` opens, ``id)`` closes, ``(id-...)`` is one word.

        Vectorised: every ``(`` starts an item and every ``)`` ends one, so marking both and
        splitting gives the items in order. The brackets of one id in one document pair by
        nesting level: the k-th opening at level L closes with the k-th closing at level L.
        """
        self.M = None
        w_rows = self.W["rows"]
        misc = self.cols["misc"].take(pa.array(w_rows))
        has = _np(pc.match_substring(misc, "Entity="))
        tok_of_value = np.flatnonzero(has)
        if not len(tok_of_value):
            return
        value = pc.struct_field(pc.extract_regex(misc.filter(pa.array(has)), r"(?:^|\|)Entity=(?P<v>[^|]*)"), [0])
        marked = pc.replace_substring(pc.replace_substring(pc.fill_null(value, ""), "(", "|("), ")", ")|")
        items = pc.split_pattern(marked, "|")
        parent = _np(pc.list_parent_indices(items))
        flat = items.flatten()
        keep = _np(pc.not_equal(flat, ""))
        flat, parent = flat.filter(pa.array(keep)), parent[keep]
        tk = tok_of_value[parent]                                  # word index (in the block) of each item
        line = self.n[w_rows[tk]]
        opens = _np(pc.starts_with(flat, "("))
        closes = _np(pc.ends_with(flat, ")"))
        inner = pc.utf8_trim(flat, "()")
        stray = (~opens & ~closes) | _np(pc.equal(inner, ""))
        if stray.any():
            r = int(np.flatnonzero(stray)[0])
            self._mention_problem(int(line[r]), f"cannot read the Entity value {value[int(parent[r])].as_py()!r} "
                                                "(expected '(id-...', 'id)' or '(id-...)')")
            ok = ~stray
            flat, parent, tk, line, opens, closes = (x.filter(pa.array(ok)) if isinstance(x, pa.Array) else x[ok]
                                                     for x in (flat, parent, tk, line, opens, closes))
            inner = pc.utf8_trim(flat, "()")
        single = opens & closes
        key = pc.if_else(pa.array(opens), pc.list_element(pc.split_pattern(inner, "-", max_splits=1), 0), inner)
        d = self.d[w_rows[tk]]
        code = _np(pc.binary_join_element_wise(pa.array(d).cast(pa.string()), key, "\x1f").dictionary_encode().indices)
        # nesting level per (document, id), in text order
        ev = np.flatnonzero(~single)
        order = ev[np.argsort(code[ev], kind="stable")]
        c = code[order]
        delta = np.where(opens[order], 1, -1)
        g0 = np.flatnonzero(np.r_[True, c[1:] != c[:-1]]) if len(c) else np.zeros(0, np.int64)
        r = _seg_cumsum(delta, g0, np.diff(np.r_[g0, len(c)])) if len(c) else delta
        lvl = np.where(delta == 1, r, r + 1)
        bad = lvl <= 0
        if bad.any():
            first = order[bad][np.argmin(line[order[bad]])]
            self._mention_problem(int(line[first]), f"entity bracket '{key[int(first)].as_py()})' closes a mention "
                                                    "that was never opened")
        o_idx, c_idx = order[(delta == 1)], order[(delta == -1) & ~bad]
        scale = (int(lvl.max()) + 2 if len(lvl) else 2, len(lvl) + 1)
        o_key = _pair_keys(code[o_idx], lvl[delta == 1], scale)
        c_key = _pair_keys(code[c_idx], lvl[(delta == -1) & ~bad], scale)
        c_sort = np.argsort(c_key, kind="stable")
        at = np.searchsorted(c_key[c_sort], o_key)
        matched = (at < len(c_key)) & (c_key[c_sort][np.minimum(at, max(len(c_key) - 1, 0))] == o_key) \
            if len(c_key) else np.zeros(len(o_key), bool)
        if (~matched).any():
            first = o_idx[~matched][np.argmin(line[o_idx[~matched]])]
            self._mention_problem(int(line[first]), f"entity bracket '({key[int(first)].as_py()}' opened here is "
                                                    "never closed")
        o_idx = o_idx[matched]
        closing = c_idx[c_sort][at[matched]]
        s_idx = np.flatnonzero(single)
        first_item = np.r_[o_idx, s_idx]
        last_item = np.r_[closing, s_idx]
        w0, w1 = tk[first_item], tk[last_item]
        cross = self.W["seg"][w0] != self.W["seg"][w1]
        if cross.any():
            k = int(np.flatnonzero(cross)[np.argmin(line[last_item[cross]])])
            self._mention_problem(int(line[last_item[k]]), f"entity mention '{key[int(first_item[k])].as_py()}' "
                                                           "closes in another sentence than it opened")
            ok = ~cross
            first_item, w0, w1 = first_item[ok], w0[ok], w1[ok]
        self.M = dict(item=first_item, w0=w0, w1=w1, d=d[first_item], spec=inner.take(pa.array(first_item)),
                      key=key.take(pa.array(first_item)))

    def _mention_problem(self, line: int, message: str) -> None:
        if not self.opt.lenient:
            raise StrataError(message, file=str(self.path), line=line)
        self.report.warnings.append(f"{self.path}:{line}: {message} (mention dropped)")

    # -- writing ---------------------------------------------------------------------------
    def _stage(self, layer: str, table: pa.Table) -> int:
        """Buffer rows of ``layer``; a part is written per ~PART_ROWS rows, not per block or file."""
        if table.num_rows == 0:
            return 0
        buf = self._buffers.setdefault(layer, [])
        buf.append((self.block_no, table))
        if sum(t.num_rows for _, t in buf) >= PART_ROWS:
            self._flush(layer)
        return table.num_rows

    def _flush(self, layer: str) -> None:
        buf = self._buffers.pop(layer, [])
        if not buf:
            return
        buf.sort(key=lambda item: item[0])       # stable: the blocks in file order
        tables = [t for _, t in buf]
        # blocks may carry different comment keys (sentence attributes): missing columns become NULL
        table = pa.concat_tables(tables, promote_options="default") if len(tables) > 1 else tables[0]
        self.n_part += 1
        number = buf[0][0] if self.descending else self.n_part
        kind = self.batch.layer_kind(layer)
        required = EDGE_COLUMNS if kind == "edges" else ANCHOR_COLUMNS
        cols, names = [], []
        for name, typ in required.items():
            col = table.column(name) if name in table.column_names else pa.nulls(table.num_rows, typ)
            cols.append(col.cast(typ) if col.type != typ else col)
            names.append(name)
        for name in table.column_names:
            if name not in required:
                cols.append(table.column(name))
                names.append(name)
        path = self.batch.stage / f"{layer}--{self.part_tag}{number:05d}.parquet"
        # pyarrow writes without the GIL: the next block is computed meanwhile
        table = pa.Table.from_arrays(cols, names=names)
        self._writes.append(self._writer.submit(pq.write_table, table, path, row_group_size=ROW_GROUP_SIZE,
                                                **part_write_options(table.schema)))
        self.batch.add_staged(layer, path, table.num_rows)
        self._staged.append((layer, path))

    def _write(self) -> None:
        N, W, U, E, T = self.names, self.W, self.U, self.E, self.T
        c = self.cols
        nul = lambda a: pc.if_else(pc.equal(a, "_"), pa.scalar(None, pa.string()), a)
        masked = lambda v: pa.array(v, mask=v < 0)
        wr = pa.array(W["rows"])
        n_tok = len(W["rows"])
        tok = {"id": self.id_tok + np.arange(n_tok), "doc": W["doc"], "start": W["start"], "end": W["end"],
               "sent": W["sent"], "word_first": W["ord"], "word_last": W["ord"], "tok_first": W["word"],
               "tok_last": W["word"], "ord": W["ord"]}
        for name in ("cid", "form"):
            tok[name] = c[name].take(wr)
        tok["lemma"] = self._col("lemma", W["rows"])
        for name in ("upos", "xpos", "feats"):
            tok[name] = nul(self._col(name, W["rows"]))
        tok["head_num"] = masked(self.head_i[W["rows"]])
        tok["deprel"] = nul(self._col("deprel", W["rows"]))
        for name in ("deps", "misc"):
            tok[name] = nul(c[name].take(wr))
        tok["parent"] = masked(T["parent"])
        tok["depth"] = pa.array(T["depth"], mask=T["depth"] < 0).cast(pa.int32())
        tok["pre"], tok["post"] = masked(T["pre"]), masked(T["post"])
        self.report.add("words", self._stage(N["word"], pa.table(tok)))
        # surface words
        ur = pa.array(U["rows"])
        is_mwt = U["is_mwt"]
        # the raw LEMMA..DEPS of multiword lines, joined by tabs, on those rows only
        mwt_rows = U["rows"][is_mwt]
        at = np.full(len(is_mwt), -1, np.int64)
        at[is_mwt] = np.arange(len(mwt_rows))
        mwt_fields = pc.binary_join_element_wise(*[self._col(k, mwt_rows) for k in COLUMNS[2:9]], "\t").take(
            pa.array(at, mask=~is_mwt))
        null_str = pa.scalar(None, pa.string())
        word = {"id": self.id_word + np.arange(len(U["rows"])), "doc": U["doc"], "start": U["start"], "end": U["end"],
                "sent": U["sent"], "word_first": U["tok_first"], "word_last": U["tok_last"], "tok_first": U["ord"],
                "tok_last": U["ord"], "ord": U["ord"], "cid": c["cid"].take(ur), "form": c["form"].take(ur),
                "mwt": pa.array(is_mwt), "mwt_fields": mwt_fields,
                "misc": pc.if_else(pa.array(is_mwt), nul(c["misc"].take(ur)), null_str)}
        self.report.add("tokens", self._stage(N["token"], pa.table(word)))
        self.report.add("multiword tokens", int(is_mwt.sum()))
        # empty nodes
        er = pa.array(E["rows"])
        empty = {"id": self.id_empty + np.arange(len(E["rows"])), "doc": E["doc"], "start": E["start"],
                 "end": E["end"], "sent": E["sent"], "cid": c["cid"].take(er), "form": c["form"].take(er),
                 "lemma": self._col("lemma", E["rows"])}
        for name in ("upos", "xpos", "feats", "deps", "misc"):
            empty[name] = nul(self._col(name, E["rows"]))
        self.report.add("empty nodes", self._stage(N["empty"], pa.table(empty)))
        self._write_sentences()
        self._write_edges(tok)
        self._write_mentions(tok)

    def _write_sentences(self) -> None:
        """Sentence rows: anchors, ``sent_id``, ``text``, every other comment key (the last
        value of the sentence's comments; document-level ones excluded) and the comment lines
        verbatim. numpy over the comment rows, which come in line order, sentence by sentence."""
        S, com = self.S, self.com
        n_sent = len(S["id"])
        pos = np.searchsorted(S["s"], com.s)
        at = np.minimum(pos, max(n_sent - 1, 0))
        ours = (pos < n_sent) & (S["s"][at] == com.s) if n_sent else np.zeros(len(com), bool)

        def last_value(rows: np.ndarray) -> tuple[pa.Array, np.ndarray]:
            """The value of the last of ``rows`` in each sentence (null where none), and that row."""
            rows = rows[ours[rows]]
            sents, last = _last_per_group(rows, pos)
            index = np.full(n_sent, -1, np.int64)
            index[sents] = last
            return com.value.take(pa.array(index, mask=index < 0)), index

        table = {k: S[k] for k in ("id", "doc", "start", "end", "tok_first", "tok_last", "word_first", "word_last")}
        table["sent"] = S["id"]
        table["sent_id"], _ = last_value(com.rows("sent_id"))
        table["text"], text_rows = last_value(com.rows("text"))
        present = np.unique(com.code[~com.doc_level]).tolist()
        keys = sorted(k for k in (com.keys[c] for c in present)
                      if not k.startswith("newdoc") and k not in ("sent_id", "text", ""))
        for k in keys:
            rows = com.rows(k)
            table[k if k not in _RESERVED else "comment." + k], _ = last_value(rows[~com.doc_level[rows]])
        # every comment line of a sentence, joined by newlines: one joined array, sliced per sentence
        rows = np.flatnonzero(ours)
        lines = com.line.take(pa.array(rows))
        g = pos[rows]
        last = np.r_[g[1:] != g[:-1], True] if len(rows) else np.zeros(0, bool)
        if len(rows):
            joined = pc.binary_join_element_wise(lines, pa.array(np.where(last, "", "\n")), "")
            offsets = _string_offsets(joined)
            first_row = np.searchsorted(g, np.arange(n_sent + 1))
            table["comments"] = pa.StringArray.from_buffers(
                n_sent, pa.py_buffer(offsets[first_row].astype(np.int32)), joined.buffers()[2])
        else:
            table["comments"] = pa.array([""] * n_sent, pa.string())
        table = pa.table(table)
        text_lines = np.where(text_rows >= 0, com.n[np.maximum(text_rows, 0)] if len(com) else 0, -1)
        self.report.add("sentences", self._stage(self.names["sentence"], table))
        # the "# text" comment must equal the rebuilt sentence
        differs = pc.fill_null(pc.and_kleene(pc.is_valid(table.column("text")),
                                             pc.not_equal(table.column("text"), S["rebuilt"])), False)
        for k in np.flatnonzero(_np(differs)):
            self.report.warnings.append(f"{self.path}:{text_lines[int(k)]}: the '# text' of sentence "
                                        f"{self.sent_ids.get(int(S['s'][k]))} differs from its tokens joined by "
                                        "SpaceAfter")

    def _write_edges(self, tok: dict) -> None:
        W = self.W
        n_tok = len(W["rows"])
        head = self.head_i[W["rows"]]
        has = head > 0
        seg_first = np.searchsorted(W["seg"], W["seg"])          # first word of each word's sentence
        src = self.id_tok + np.flatnonzero(has)
        dst = self.id_tok + seg_first[has] + head[has] - 1
        dep = pa.table({"src": src, "dst": dst, "label": tok["deprel"].filter(pa.array(has)), "doc": W["doc"][has]})
        self._stage(self.names["dep"], dep)
        if self.deps_items is None:
            return
        parent, h, h_digit, h_int, rel = self.deps_items
        # node ids of the rows that carry DEPS (words or empty nodes), and of the heads
        row_id = np.full(len(self.n), -1, np.int64)
        row_id[W["rows"]] = self.id_tok + np.arange(n_tok)
        row_id[self.E["rows"]] = self.id_empty + np.arange(len(self.E["rows"]))
        src = row_id[parent]
        seg = self.seg_id[parent]
        first_w = np.searchsorted(W["seg"], seg)
        dst = np.where(h_digit & (h_int > 0), self.id_tok + first_w + h_int - 1, -1)
        empty_ids = {(int(self.seg_id[r]), self.cols["cid"][int(r)].as_py()): int(self.id_empty + k)
                     for k, r in enumerate(self.E["rows"])}
        for k in np.flatnonzero(~h_digit):
            dst[k] = empty_ids.get((int(seg[k]), h[int(k)].as_py()), -1)
        doc = self.doc_num[np.searchsorted(self.doc_d, self.d[parent])]
        enh = pa.table({"src": src, "dst": pa.array(dst, mask=dst < 0), "label": rel, "doc": doc})
        self._stage(self.names["enhanced"], enh)

    def _write_mentions(self, tok: dict) -> None:
        """Mentions with chain ids: the mentions of one entity id in one document.

        The identity relation "same entity id" makes every chain a clique, so its graph
        components are the groups by (document, entity id): a grouping gives the same
        components as a graph search, in one vectorised pass.
        """
        M = self.M
        if M is None or not len(M["item"]):
            return
        n = len(M["item"])
        w0, w1 = M["w0"], M["w1"]
        start, end = tok["start"][w0], tok["end"][w1]
        # ids in document order; chains numbered by first appearance
        by_pos = np.lexsort((M["item"], -end, start))
        ids = np.empty(n, np.int64)
        ids[by_pos] = self.batch.alloc_ids(n) + np.arange(n)
        entity = pc.list_element(pc.split_pattern(M["key"], "[", max_splits=1), 0)
        chain_code = _np(pc.binary_join_element_wise(pa.array(M["d"]).cast(pa.string()), entity, "\x1f")
                         .dictionary_encode().indices).astype(np.int64)
        n_chains = int(chain_code.max()) + 1
        chain = self.batch.alloc_chains(n_chains) + chain_code
        in_chain = np.lexsort((M["item"], -end, start, chain_code))
        first_flag = np.r_[True, chain_code[in_chain][1:] != chain_code[in_chain][:-1]]
        starts = np.flatnonzero(first_flag)
        pos_sorted = np.arange(n) - np.repeat(starts, np.diff(np.r_[starts, n]))
        chain_pos = np.empty(n, np.int64)
        chain_pos[in_chain] = pos_sorted
        cols = {"id": ids, "doc": tok["doc"][w0], "start": start, "end": end, "sent": tok["sent"][w0],
                "word_first": tok["ord"][w0], "word_last": tok["ord"][w1], "tok_first": tok["tok_first"][w0],
                "tok_last": tok["tok_first"][w1], "entity": entity, "chain": chain, "chain_pos": chain_pos,
                "first_mention": pa.array(chain_pos == 0)}
        cols.update(self._entity_fields(M))
        table = pa.table(cols).take(pa.array(by_pos))
        self.report.add("mentions", self._stage(self.names["mention"], table))
        self.report.add("chains", n_chains)

    def _entity_fields(self, M: dict) -> dict[str, pa.Array]:
        """The hyphen-separated fields named by each document's ``global.Entity`` comment."""
        docs, last = _last_per_group(self.com.rows("global.Entity"), self.com.d)
        specs = dict(zip(docs.tolist(), self.com.value.take(pa.array(last)).to_pylist()))
        n = len(M["d"])
        names = sorted(set(specs.values()) | {DEFAULT_ENTITY_FIELDS})
        code_of = {spec: k for k, spec in enumerate(names)}
        keys = np.array(sorted(specs), dtype=np.int64)
        codes = np.array([code_of[specs[k]] for k in keys.tolist()], dtype=np.int64)
        at = np.minimum(np.searchsorted(keys, M["d"]), max(len(keys) - 1, 0))
        found = (keys[at] == M["d"]) if len(keys) else np.zeros(n, bool)
        doc_code = np.where(found, codes[at] if len(keys) else 0, code_of[DEFAULT_ENTITY_FIELDS])
        # the fields of all mentions as one flat array; per output column, one index into it
        flats: list[pa.Array] = []
        index: dict[str, np.ndarray] = {}
        shift = 0
        for spec in sorted({names[c] for c in np.unique(doc_code).tolist()}):
            fields = spec.split("-")
            rows = np.flatnonzero(doc_code == code_of[spec])
            parts = pc.split_pattern(M["spec"].take(pa.array(rows)), "-", max_splits=len(fields) - 1)
            offsets = _np(parts.offsets).astype(np.int64)
            length = np.diff(offsets)
            flat = parts.values.slice(int(offsets[0]), int(offsets[-1] - offsets[0]))
            for k, name in enumerate(fields[1:], start=1):
                col = "type" if name == "etype" else name
                if col in _RESERVED | {"entity", "chain", "chain_pos", "first_mention"}:
                    col = "entity." + col
                idx = index.setdefault(col, np.full(n, -1, np.int64))
                has = length > k
                idx[rows[has]] = shift + offsets[:-1][has] - offsets[0] + k
            flats.append(flat)
            shift += len(flat)
        values = pa.concat_arrays(flats) if len(flats) > 1 else flats[0]
        empty = _np(pc.equal(values, ""))
        out: dict[str, pa.Array] = {}
        for col, idx in index.items():
            missing = (idx < 0) | empty[np.maximum(idx, 0)]
            out[col] = values.take(pa.array(idx, mask=missing))
        return out

    def flush(self) -> None:
        """Start writing what is buffered (the writes run on the background thread)."""
        for layer in list(self._buffers):
            self._flush(layer)

    def finish_parts(self) -> None:
        """Wait for the parts written so far (re-raising a write error) and hand their
        statistics to the batch (engine/stats.py), so that the commit only merges them."""
        for f in self._writes:
            f.result()
        self._writes = []
        by_layer: dict[str, list[str]] = {}
        for layer, path in self._staged:
            by_layer.setdefault(layer, []).append(str(path))
        self._staged = []
        for layer, paths in by_layer.items():
            self.batch.add_part_stats(part_stats(self.con, paths, STRUCTURAL, self.key_value.get(layer, ())))

    def close(self) -> None:
        """Write what is buffered, wait for the staged parts and compute their statistics."""
        try:
            self.flush()
            self.finish_parts()
        finally:
            self._writer.shutdown(wait=True)
            self.con.close()
        self.batch.set_meta("next_order", self.order)


def _split_comment(body: pa.Array, sep: str) -> tuple[pa.Array, pa.Array]:
    """Text before and after the first ``sep`` (after: empty when there is none)."""
    parts = pc.split_pattern(pc.binary_join_element_wise(body, sep, ""), sep, max_splits=1)
    after = pc.list_element(parts, 1)
    return pc.list_element(parts, 0), pc.utf8_slice_codeunits(after, 0, -len(sep))


def _pair_keys(code: np.ndarray, level: np.ndarray, scale: tuple[int, int]) -> np.ndarray:
    """One int64 per bracket: (document-and-id code, nesting level, rank among its kind there).

    ``scale`` (levels, ranks) must be the same for openings and closings so that equal
    triples give equal keys.
    """
    if not len(code):
        return np.zeros(0, np.int64)
    base = code.astype(np.int64) * scale[0] + level
    order = np.argsort(base, kind="stable")
    b = base[order]
    g = np.flatnonzero(np.r_[True, b[1:] != b[:-1]])
    rank_sorted = np.arange(len(b)) - np.repeat(g, np.diff(np.r_[g, len(b)]))
    rank = np.empty(len(b), np.int64)
    rank[order] = rank_sorted
    return base * scale[1] + rank


def block_plan(path: Path, block_bytes: int = BLOCK_BYTES) -> list[tuple[int, int, int, int, int]]:
    """``(offset, length, first_line, lines, newdocs)`` of the blocks :func:`_blocks` would read.

    The cut points are the same (just before a ``# newdoc`` line) for a given block size.
    ``lines`` and ``newdocs`` are upper bounds (of the lines, and of the documents less one):
    a file that fits in one block is not read, its size bounds both.
    """
    try:
        size = path.stat().st_size
    except OSError as e:
        raise StrataError(f"cannot read: {e.strerror}", file=str(path)) from None
    if size < block_bytes:
        return [(0, size, 1, size + 1, size // len(b"# newdoc") + 1)] if size else []
    plan = []
    offset = 0
    for block, first_line in _blocks(path, block_bytes):
        n = block.count(b"\n") + (0 if block.endswith(b"\n") else 1)
        plan.append((offset, len(block), first_line, n, block.count(b"# newdoc")))
        offset += len(block)
    return plan


def read_block(path: Path, offset: int, length: int) -> bytes:
    with open(path, "rb") as f:
        f.seek(offset)
        return f.read(length)


def _blocks(path: Path, block_bytes: int = BLOCK_BYTES) -> Iterator[tuple[bytes, int]]:
    """The file in blocks of about BLOCK_BYTES that end just before a ``# newdoc`` line."""
    with open(path, "rb") as f:
        carry = b""
        line = 1
        while True:
            chunk = f.read(block_bytes)
            data = carry + chunk
            if len(chunk) < block_bytes:          # the end of the file: the rest is one block
                if data:
                    yield data, line
                return
            cut = data.rfind(b"\n# newdoc", 1)
            if cut < 0:
                carry = data
                continue
            block, carry = data[:cut + 1], data[cut + 1:]
            yield block, line
            line += block.count(b"\n")


#: the longest line the reader takes (its block size is a signed 32-bit number)
MAX_LINE_BYTES = (1 << 31) - 1


def _raise_long_line(data: bytes, first_line: int, path: Path) -> None:
    start, number = 0, first_line
    while start < len(data):
        end = data.find(b"\n", start)
        end = len(data) if end < 0 else end
        if end - start >= MAX_LINE_BYTES:
            raise StrataError(f"this line is {end - start:,} bytes long; strata reads lines of up to "
                              f"{MAX_LINE_BYTES:,} bytes (2 GiB)", file=str(path), line=number)
        start, number = end + 1, number + 1
    raise StrataError("a line is longer than the reader can take", file=str(path))


def _refuse_empty(path: Path) -> None:
    """A file with nothing but blank lines (or nothing at all) is refused: importing it would
    record an import that added nothing, which is more often a wrong file than an intent."""
    try:
        f = open(path, "rb")
    except OSError:
        return                       # the import itself says why it cannot be read
    with f:
        for line in f:
            if line.strip(b" \t\r\n\xef\xbb\xbf"):
                return
    raise StrataError("the file is empty: a CoNLL-U file holds at least one sentence", file=str(path), line=1)


def _raise_bad_utf8(data: bytes, first_line: int, path: Path) -> None:
    for number, raw in enumerate(data.split(b"\n"), first_line):
        try:
            raw.decode("utf-8")
        except UnicodeDecodeError as e:
            raise StrataError(f"invalid UTF-8 at byte {e.start} of the line", file=str(path), line=number) from None
    raise StrataError("invalid UTF-8", file=str(path))


def import_files(batch: Batch, paths: list[Path], options: ImportOptions) -> ImportReport:
    """Import CoNLL-U files into ``batch``; raises StrataError at the first bad place.

    Big inputs are shared with a second process (:mod:`engine.importers.conllu_parallel`);
    the result is the same as this sequential loop's.
    """
    from engine.importers import conllu_parallel
    for path in paths:
        _refuse_empty(Path(path))
    if conllu_parallel.worthwhile(paths, options):
        return conllu_parallel.import_files(batch, [Path(p) for p in paths], options)
    imp = ConlluImporter(batch, options)
    try:
        for path in paths:
            imp.import_file(Path(path))
    finally:
        imp.close()
    return imp.report
