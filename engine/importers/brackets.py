"""Bracketed constituency trees in (format ``brackets``): S-expressions as treebanks write them.

``(S (NP-SBJ (PRP We)) (VP (VBD sailed)))``, possibly over several lines, with an
optional unlabeled root wrapper ``( (S ...) )``. Labels carry function tags and
indices (``NP-SBJ-1``: category ``NP``, function ``SBJ``, index ``1``; ``=2`` is a
gapping index); ``(-NONE- *T*-1)`` is an empty element (zero width) co-indexed with
the constituent of index 1; ``-LRB-``/``-RRB-`` (and ``-LSB-``, ``-LCB-``, ...) are
escaped brackets. Comment lines start with ``#``: ``# doc = NAME`` sets the document,
``# sent = ID`` the sentence (a ``sent_id`` of the ``sentence`` layer). Several trees
in a row under one ``# sent`` are alternative readings (``reading`` 0, 1, ...).

Every constituent and every leaf is a node of one tree layer (tree columns as in
DEVELOPERS.md); leaves are aligned to the primary text by :mod:`engine.align`, and a
constituent spans the characters of its aligned leaves.
"""
from __future__ import annotations

import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import Iterator, NoReturn

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from engine.align.anchor import finalise_new_layer, new_row_filler, parquet
from engine.align.normalise import BRACKET_ESCAPES
from engine.align.report import check_alignment
from engine.align.sequence import GOOD, align_forms, align_segments
from engine.errors import StrataError
from engine.importers.base import ImportOptions, ImportReport, refuse_nul_in, sha256_of, without_bom
from engine.importers.stored import doc_has_rows
from engine.store import Batch, DocInfo

FORMAT = "brackets"
DEFAULT_LAYER = "tree"
#: Rows buffered before a write: row groups of the store's size, not one per document.
PART_ROWS = 300_000
EMPTY_LABEL = "-NONE-"
_INDEX = re.compile(r"(.+?)([-=])(\d+)")
_TRACE = re.compile(r"(\*.*|0)-(\d+)")
_COMMENT = re.compile(r"#\s*(\w+)\s*=\s*(.*?)\s*")
_TREE_COMMENT = re.compile(r"#\s*(doc|sent)\s*=")
_OPEN, _CLOSE, _ATOM = 0, 1, 2
#: ``str.isspace`` (what the regex class ``\s`` matches) for every code point up to U+3000,
#: the last whitespace character of Unicode; nothing above it is whitespace.
_SPACE = np.array([chr(i).isspace() for i in range(0x3001)], dtype=bool)


@dataclass
class Node:
    label: str | None          # None for a leaf
    form: str | None           # the leaf as written in the file (None for a constituent)
    line: int
    children: list[int] = field(default_factory=list)


@dataclass
class Forest:
    """All trees of one file as flat arrays, one entry per node, trees one after another in pre-order.

    ``parent`` is a forest index (-1 at a root); ``depth``, ``pre``/``post`` (one counter
    for entry and exit) and the leaf range ``leaf_first``..``leaf_last`` count from the
    start of each tree. Per tree: ``tree_start`` (first node; ``tree_start[-1]`` = number
    of nodes), the line of its first bracket and the ``# doc``/``# sent`` in force.
    """
    label: pa.Array            # string, null at leaves ("" for an unlabeled bracket)
    form: pa.Array             # string, null at constituents
    line: np.ndarray
    parent: np.ndarray
    depth: np.ndarray
    pre: np.ndarray
    post: np.ndarray
    leaf_first: np.ndarray
    leaf_last: np.ndarray
    is_leaf: np.ndarray
    tree_start: np.ndarray
    tree_line: np.ndarray
    tree_doc: list[str | None]
    tree_sent: list[str | None]
    tree_sent_line: list[int | None]

    @property
    def n_trees(self) -> int:
        return len(self.tree_line)

    def tree_of_node(self) -> np.ndarray:
        return np.repeat(np.arange(self.n_trees), np.diff(self.tree_start))

    def empty(self) -> np.ndarray:
        """Per node: a leaf under ``-NONE-`` (an empty element: trace, null complementiser, ...)."""
        parent_label = pc.take(self.label, pa.array(np.maximum(self.parent, 0)))
        under = pc.fill_null(pc.equal(parent_label, EMPTY_LABEL), False).to_numpy(zero_copy_only=False)
        return self.is_leaf & under & (self.parent >= 0)

    def trees(self) -> Iterator["Tree"]:
        for k in range(self.n_trees):
            yield Tree(self, k)


@dataclass
class Tree:
    """One tree of a :class:`Forest` (``nodes`` built on demand, for inspection and tests)."""
    forest: Forest
    k: int

    @property
    def line(self) -> int:
        return int(self.forest.tree_line[self.k])

    @property
    def doc(self) -> str | None:
        return self.forest.tree_doc[self.k]

    @property
    def sent(self) -> str | None:
        return self.forest.tree_sent[self.k]

    @property
    def sent_line(self) -> int | None:
        return self.forest.tree_sent_line[self.k]

    @property
    def span(self) -> tuple[int, int]:
        return int(self.forest.tree_start[self.k]), int(self.forest.tree_start[self.k + 1])

    @property
    def nodes(self) -> list[Node]:
        f, (a, b) = self.forest, self.span
        labels, forms = f.label[a:b].to_pylist(), f.form[a:b].to_pylist()
        nodes = [Node(lab, form, int(ln)) for lab, form, ln in zip(labels, forms, f.line[a:b])]
        for i, p in enumerate(f.parent[a:b]):
            if p >= 0:
                nodes[p - a].children.append(i)
        return nodes


def split_label(label: str) -> tuple[str | None, str | None, str | None, str | None]:
    """``(cat, func, index, gap)`` of a label: ``NP-SBJ-1`` -> ``("NP", "SBJ", "1", None)``."""
    if not label:
        return None, None, None, None
    if len(label) > 2 and label[0] == "-" and label[-1] == "-":
        return label, None, None, None                 # -NONE-, -LRB-, ...
    index = gap = None
    m = _INDEX.fullmatch(label)
    if m and m.group(1) not in ("-",):
        label = m.group(1)
        if m.group(2) == "-":
            index = m.group(3)
        else:
            gap = m.group(3)
        m2 = _INDEX.fullmatch(label)            # NP-SBJ-1=2
        if m2 and m2.group(2) == "-" and index is None:
            label, index = m2.group(1), m2.group(3)
    cat, sep, func = label.partition("-")
    if not cat:
        return label, None, index, gap
    return cat, (func or None), index, gap


def parse_trees(path: Path) -> Iterator[Tree]:
    """The trees of a file in order, with the ``# doc``/``# sent`` in force for each."""
    yield from read_forest(path).trees()


def walk(tree: Tree) -> tuple[list[int | None], list[int], list[int], list[int], list[tuple[int, int]]]:
    """Parent, depth, entry and exit times (one counter), and leaf range of every node of one tree."""
    f, (a, b) = tree.forest, tree.span
    parent = [None if p < 0 else int(p) - a for p in f.parent[a:b]]
    span = list(zip(f.leaf_first[a:b].tolist(), f.leaf_last[a:b].tolist()))
    return parent, f.depth[a:b].tolist(), f.pre[a:b].tolist(), f.post[a:b].tolist(), span


def _read_text(path: Path) -> tuple[bytes, str]:
    try:
        raw = path.read_bytes()
    except OSError as e:
        raise StrataError(f"cannot read: {e.strerror}", file=str(path)) from None
    raw = without_bom(raw)
    refuse_nul_in(raw, path)
    try:
        return raw, raw.decode("utf-8")
    except UnicodeDecodeError as e:
        line_start = raw.rfind(b"\n", 0, e.start) + 1
        raise StrataError(f"invalid UTF-8 at byte {e.start - line_start} of the line", file=str(path),
                          line=raw.count(b"\n", 0, e.start) + 1) from None


def _strings(raw: np.ndarray, start: np.ndarray, end: np.ndarray) -> pa.Array:
    """An Arrow string array of the byte ranges ``raw[start:end]``, gathered by numpy."""
    lens = end - start
    offsets = np.concatenate([[0], np.cumsum(lens)])
    idx = np.arange(offsets[-1], dtype=np.int64) - np.repeat(offsets[:-1] - start, lens)
    data = pa.py_buffer(raw[idx].tobytes())
    if offsets[-1] < 2 ** 31:
        return pa.StringArray.from_buffers(len(lens), pa.py_buffer(offsets.astype(np.int32)), data)
    arr = pa.LargeStringArray.from_buffers(len(lens), pa.py_buffer(offsets.astype(np.int64)), data)
    return arr.cast(pa.string())


def _before(starts: np.ndarray, positions: np.ndarray) -> np.ndarray:
    """Per position: index of the last of ``starts`` (sorted) at or before it, -1 if none."""
    return np.searchsorted(starts, positions, side="right") - 1


def read_forest(path: Path) -> Forest:
    """Parse a whole file with array arithmetic (no Python loop per token or node).

    Tokens come from character classes; nesting depth is the running sum of +1 per ``(``
    and -1 per ``)``; a node's parent is the nearest earlier ``(`` one level up (a sorted
    search within depth levels); entry/exit times and leaf numbers are running counts.
    Any bad place is found as an array of candidates and the earliest is the error.
    """
    raw_bytes, text = _read_text(path)

    def fail(message: str, line: int) -> NoReturn:
        raise StrataError(message, file=str(path), line=line)

    codes = np.frombuffer(text.encode("utf-32-le"), dtype=np.uint32)
    n = len(codes)
    raw = np.frombuffer(raw_bytes, dtype=np.uint8)
    # byte offset of every code point (and of the end), for the Arrow strings
    if len(raw) == n:
        byte_at = np.arange(n + 1, dtype=np.int64)
    else:
        width = 1 + (codes >= 0x80).astype(np.int64) + (codes >= 0x800) + (codes >= 0x10000)
        byte_at = np.concatenate([[0], np.cumsum(width)])
    line_start = np.concatenate([[0], np.flatnonzero(codes == 10) + 1])
    line_start = line_start[line_start < n] if n else line_start[:0]
    space = np.zeros(n, dtype=bool)
    low = codes < len(_SPACE)
    space[low] = _SPACE[codes[low]]
    is_open, is_close = codes == 40, codes == 41
    atom = ~(space | is_open | is_close)
    atom_start = atom & ~np.concatenate([[False], atom[:-1]])
    atom_end = np.flatnonzero(atom & ~np.concatenate([atom[1:], [False]])) + 1
    pos = np.flatnonzero(is_open | is_close | atom_start)
    kind = np.where(is_open[pos], _OPEN, np.where(is_close[pos], _CLOSE, _ATOM)).astype(np.int8)
    end = pos + 1
    end[kind == _ATOM] = atom_end
    line = _before(line_start, pos) + 1

    # '#' at the start of a line is a comment where no tree is open, else part of the tree
    cand = line_start[codes[line_start] == 35] if n else line_start
    cand_line = _before(line_start, cand) + 1
    in_cand = np.zeros(len(line_start) + 2, dtype=bool)
    in_cand[cand_line] = True
    tok_in_cand = in_cand[line]
    net = (kind == _OPEN).astype(np.int64) - (kind == _CLOSE)
    cum_outside = np.concatenate([[0], np.cumsum(np.where(tok_in_cand, 0, net))])
    depth_at = cum_outside[np.searchsorted(pos, cand)]
    line_net = np.bincount(line, weights=net, minlength=len(line_start) + 2).astype(np.int64)
    comment = depth_at == 0
    if not comment.all():
        first = int(np.argmin(comment))
        delta = 0
        for j in range(first, len(cand)):
            if depth_at[j] + delta != 0:
                comment[j] = False
                delta += int(line_net[cand_line[j]])
    keep = ~tok_in_cand
    if not comment.all():
        demoted = np.zeros(len(line_start) + 2, dtype=bool)
        demoted[cand_line[~comment]] = True
        keep |= demoted[line]
    pos, kind, end, line, net = pos[keep], kind[keep], end[keep], line[keep], net[keep]
    newlines = np.append(np.flatnonzero(codes == 10), n)
    comment_end = newlines[np.searchsorted(newlines, cand[comment])]
    comment_text = [text[a:b].rstrip("\r") for a, b in zip(cand[comment].tolist(), comment_end.tolist())]
    comment_pos, comment_line = cand[comment], cand_line[comment]

    t = len(pos)
    after = np.cumsum(net)
    before = after - net
    prev_kind = np.concatenate([[-1], kind[:-1]]).astype(np.int8)
    next_kind = np.concatenate([kind[1:], [-1]]).astype(np.int8)
    label_tok = (kind == _ATOM) & (prev_kind == _OPEN)
    leaf_tok = (kind == _ATOM) & ~label_tok
    opens = np.flatnonzero(kind == _OPEN)
    root_open = (kind == _OPEN) & (before == 0)
    roots = np.flatnonzero(root_open)

    # the earliest bad place (a character position) is the error
    errors: list[tuple[int, int, str]] = []
    closes = np.flatnonzero(kind == _CLOSE)
    stray = closes[before[closes] == 0]
    if len(stray):
        errors.append((int(pos[stray[0]]), int(line[stray[0]]), "a ')' with no '(' to close"))
    empty_br = closes[prev_kind[closes] == _OPEN]
    if len(empty_br):
        errors.append((int(pos[empty_br[0]]), int(line[empty_br[0]]), "empty brackets '()'"))
    bare = closes[(closes >= 2) & label_tok[np.maximum(closes - 1, 0)]]
    if len(bare):
        c = int(bare[0])
        errors.append((int(pos[c]), int(line[c - 2]),
                       f"({text[pos[c - 1]:end[c - 1]]}) has neither words nor constituents under it"))
    outside = np.flatnonzero(leaf_tok & (before == 0))
    if len(outside):
        w = int(outside[0])
        errors.append((int(pos[w]), int(line[w]), f"the word {text[pos[w]:end[w]]!r} is outside any brackets"))
    for j in np.flatnonzero(~comment).tolist():
        a = int(cand[j])
        if _TREE_COMMENT.match(text, a):
            k = int(np.searchsorted(pos, a))
            depth = int(after[k - 1]) if k else 0
            r = roots[_before(pos[roots], np.array([a]))[0]] if len(roots) else 0
            errors.append((a, int(cand_line[j]), f"the tree opened at line {int(line[r])} is not closed before "
                                                 f"this comment ({depth} ')' missing)"))
            break
    if errors:
        _, ln, msg = min(errors)
        fail(msg, ln)
    if t and after[-1] > 0:
        fail(f"unbalanced brackets: the tree opened here is not closed ({int(after[-1])} ')' missing "
             "at the end of the file)", int(line[roots[-1]]))

    # nodes: every '(' and every atom that is not a label, in token order (pre-order)
    node_tok = np.flatnonzero((kind == _OPEN) | leaf_tok)
    level = before[node_tok]
    stride = t + 1
    by_level = opens[np.argsort(before[opens], kind="stable")]
    keys = before[by_level] * stride + by_level
    parent_tok = np.where(level > 0, by_level[np.maximum(np.searchsorted(keys, (level - 1) * stride + node_tok) - 1, 0)],
                          -1)
    close_open = by_level[np.searchsorted(keys, after[closes] * stride + closes) - 1]
    events = (kind == _OPEN).astype(np.int64) + (kind == _CLOSE) + 2 * leaf_tok
    ev_before = np.cumsum(events) - events
    leaves_before = np.cumsum(leaf_tok) - leaf_tok
    exit_ev = np.empty(t, dtype=np.int64)
    exit_ev[node_tok] = ev_before[node_tok] + 1                   # leaves
    exit_ev[close_open] = ev_before[closes]
    last_leaf = np.empty(t, dtype=np.int64)
    last_leaf[node_tok] = leaves_before[node_tok]
    last_leaf[close_open] = leaves_before[closes] - 1
    node_of_tok = np.full(t, -1, dtype=np.int64)
    node_of_tok[node_tok] = np.arange(len(node_tok))
    parent = np.where(parent_tok >= 0, node_of_tok[np.maximum(parent_tok, 0)], -1)
    tree = np.cumsum(root_open[node_tok]) - 1
    root_node = node_of_tok[roots]

    # drop an unlabeled root wrapper ( (S ...) ) around a single constituent
    n_children = np.bincount(parent[parent >= 0], minlength=len(node_tok))
    only_child = root_node + 1
    wrapper = ((next_kind[roots] == _OPEN) & (n_children[root_node] == 1)
               & (only_child < len(node_tok)))
    if wrapper.any():
        wrapper &= kind[node_tok[np.minimum(only_child, len(node_tok) - 1)]] == _OPEN
    wrapped = wrapper[tree]
    drop = np.zeros(len(node_tok), dtype=bool)
    drop[root_node[wrapper]] = True
    tree_ev0 = ev_before[roots] + wrapper
    tree_leaf0 = leaves_before[roots]

    keep_node = ~drop
    remap = np.cumsum(keep_node) - 1
    nt = node_tok[keep_node]
    tr = tree[keep_node]
    par = parent[keep_node]
    par = np.where((par >= 0) & ~drop[np.maximum(par, 0)], remap[np.maximum(par, 0)], -1)
    is_leaf = leaf_tok[nt]
    label_start = np.where(is_leaf, pos[nt], np.where(label_tok[np.minimum(nt + 1, t - 1)] & (nt + 1 < t),
                                                      pos[np.minimum(nt + 1, t - 1)], 0))
    label_end = np.where(is_leaf, end[nt], np.where(label_tok[np.minimum(nt + 1, t - 1)] & (nt + 1 < t),
                                                    end[np.minimum(nt + 1, t - 1)], 0))
    words = _strings(raw, byte_at[label_start], byte_at[label_end])
    mask_leaf = pa.array(is_leaf)
    null = pa.nulls(len(nt), pa.string())
    tree_start = np.concatenate([np.searchsorted(tr, np.arange(len(roots))), [len(nt)]])

    docs, sents, sent_lines = _comments_in_force(comment_text, comment_pos, comment_line, pos[roots])
    return Forest(
        label=pc.if_else(mask_leaf, null, words), form=pc.if_else(mask_leaf, words, null),
        line=line[nt], parent=par, depth=level[keep_node] - wrapped[keep_node],
        pre=ev_before[nt] - tree_ev0[tr], post=exit_ev[nt] - tree_ev0[tr],
        leaf_first=leaves_before[nt] - tree_leaf0[tr], leaf_last=last_leaf[nt] - tree_leaf0[tr],
        is_leaf=is_leaf, tree_start=tree_start, tree_line=line[roots],
        tree_doc=docs, tree_sent=sents, tree_sent_line=sent_lines)


def _comments_in_force(texts: list[str], at: np.ndarray, lines: np.ndarray, tree_at: np.ndarray
                       ) -> tuple[list, list, list]:
    """Per tree: the last ``# doc`` before it, and the last ``# sent`` after that ``# doc``."""
    doc_at, doc_name, sent_at, sent_id, sent_line = [], [], [], [], []
    for text, a, ln in zip(texts, at.tolist(), lines.tolist()):
        m = _COMMENT.fullmatch(text)
        if m and m.group(1) == "doc":
            doc_at.append(a), doc_name.append(m.group(2))
        elif m and m.group(1) == "sent":
            sent_at.append(a), sent_id.append(m.group(2)), sent_line.append(ln)
    doc_pos, sent_pos = np.array(doc_at, dtype=np.int64), np.array(sent_at, dtype=np.int64)
    d, s = _before(doc_pos, tree_at), _before(sent_pos, tree_at)
    valid = s >= 0
    if len(sent_at) and len(doc_at):
        valid &= (d < 0) | (sent_pos[np.maximum(s, 0)] > doc_pos[np.maximum(d, 0)])
    docs = [doc_name[i] if i >= 0 else None for i in d.tolist()]
    sents = [sent_id[i] if v else None for i, v in zip(s.tolist(), valid.tolist())]
    sent_lines = [sent_line[i] if v else None for i, v in zip(s.tolist(), valid.tolist())]
    return docs, sents, sent_lines


# -- import ----------------------------------------------------------------------------
@dataclass
class _Group:
    """The trees of one sentence (several: alternative readings), as tree numbers of the forest."""
    doc: DocInfo
    trees: list[int]
    sent_node: int | None = None
    sent_span: tuple[int, int] | None = None   # global characters of the sentence


def _sentences(batch: Batch) -> dict[str, tuple[int, int, int, int]]:
    """sent_id -> (node id, doc, start, end) of the stored ``sentence`` layer."""
    paths = batch.store.part_paths("sentence")
    if not paths:
        return {}
    import duckdb
    with duckdb.connect() as con:
        rows = con.execute(f"SELECT sent_id, id, doc, start, \"end\" FROM {parquet(paths)} "
                           "WHERE sent_id IS NOT NULL").fetchall()
    return {r[0]: tuple(int(v) for v in r[1:]) for r in rows}


def _ranges(starts: np.ndarray, ends: np.ndarray) -> np.ndarray:
    """The concatenation of ``arange(s, e)`` for every pair, without a Python loop."""
    lens = ends - starts
    offsets = np.cumsum(lens) - lens
    return np.arange(lens.sum(), dtype=np.int64) - np.repeat(offsets - starts, lens)


def _unescape(forms: pa.Array) -> pa.Array:
    """``-LRB-`` -> ``(`` and the other treebank escapes, on a whole column."""
    for escaped, written in BRACKET_ESCAPES.items():
        forms = pc.if_else(pc.equal(forms, escaped), written, forms)
    return forms


@dataclass
class _FileTrees:
    """A parsed file with the per-node columns every document of it needs."""
    forest: Forest
    empty: np.ndarray
    cat: pa.Array
    func: pa.Array
    index: pa.Array
    gap: pa.Array
    pos: pa.Array
    written: pa.Array           # leaves: the word as written (escapes undone); empty elements as in the file
    word_first: np.ndarray      # per tree: range of its written words in ``words``
    word_end: np.ndarray
    words: list[str]            # written words of the file, in order

    @classmethod
    def of(cls, forest: Forest) -> "_FileTrees":
        empty = forest.empty()
        labels = forest.label.dictionary_encode()
        parts = [split_label(v) for v in labels.dictionary.to_pylist()]
        cols = [pa.DictionaryArray.from_arrays(labels.indices, pa.array([p[k] for p in parts], pa.string())
                                               ).cast(pa.string()) for k in range(4)]
        # a part of speech is the preterminal's label: on the leaf, and on the preterminal itself,
        # so `tree(pos = "NNP") child of tree(category = "NP")` reaches the node under the NP
        preterminal = np.zeros(len(forest.is_leaf), dtype=bool)
        preterminal[forest.parent[forest.is_leaf & (forest.parent >= 0)]] = True
        pos = pc.if_else(pa.array(forest.is_leaf), pc.take(forest.label, pa.array(np.maximum(forest.parent, 0))),
                         pc.if_else(pa.array(preterminal), forest.label, pa.nulls(len(forest.is_leaf), pa.string())))
        unescaped = _unescape(forest.form)
        written = pc.if_else(pa.array(empty), forest.form, unescaped)
        is_word = forest.is_leaf & ~empty
        cum = np.concatenate([[0], np.cumsum(is_word)])
        words = unescaped.filter(pa.array(is_word)).to_pylist()
        return cls(forest, empty, *cols, pos, written, cum[forest.tree_start[:-1]], cum[forest.tree_start[1:]], words)

    def tree_words(self, k: int) -> list[str]:
        return self.words[self.word_first[k]:self.word_end[k]]


class BracketsImporter:
    def __init__(self, batch: Batch, options: ImportOptions) -> None:
        self.batch = batch
        self.opt = options
        self.report = ImportReport()
        self.layer = options.layer(options.extra.get("layer") or DEFAULT_LAYER)
        self.order = int(batch.store.meta("next_order") or 0)
        self.sentences = _sentences(batch)
        self._docs_by_number: dict[int, DocInfo] | None = None
        self.readings = False
        self.aligned: list[tuple] = []
        self._pending: list[pa.Table] = []
        self._pending_rows = 0
        self._filler = False                      # made at the first write (see _flush)
        self._finalise_at_commit = False
        self._gave_times = False
        # no "sentence_layer": a tree's ``sent`` is the sentence its ``# sent`` line names, which
        # its characters need not lie inside (a leaf aligned past the sentence's end)
        batch.declare_layer(self.layer, "tree", {"tree": True, "format": FORMAT, "readings": False,
                                                 "separate": False})

    def import_file(self, path: Path) -> None:
        self.path = path
        self.report.files.append(str(path))
        self.batch.add_source(str(path), sha256_of(path))
        forest = read_forest(path)
        groups: dict[str, list[_Group]] = {}
        seen_sent: dict[str, int] = {}
        last: _Group | None = None
        last_sent_line = None
        for k, (doc, sent, sent_line, line) in enumerate(zip(forest.tree_doc, forest.tree_sent,
                                                             forest.tree_sent_line, forest.tree_line.tolist())):
            info, sent_node = self._place(doc, sent, sent_line, line)
            if sent is not None and last is not None and last_sent_line == sent_line:
                last.trees.append(k)                # another reading of the same sentence
                self.readings = True
                continue
            if sent is not None:
                if sent in seen_sent:
                    self._fail(f"sentence {sent!r} already has trees (line {seen_sent[sent]}); "
                               "readings of one sentence must follow each other", sent_line)
                seen_sent[sent] = sent_line
            last = _Group(info, [k], sent_node[0] if sent_node else None,
                          (sent_node[2], sent_node[3]) if sent_node else None)
            last_sent_line = sent_line
            groups.setdefault(info.name, []).append(last)
        if not groups:
            self._fail("no trees in the file", 1)
        trees = _FileTrees.of(forest)
        for gs in groups.values():
            self._import_doc(trees, gs)

    def _fail(self, message: str, line: int | None) -> NoReturn:
        raise StrataError(message, file=str(self.path), line=line)

    def _place(self, doc: str | None, sent_id: str | None, sent_line: int | None, line: int
               ) -> tuple[DocInfo, tuple | None]:
        sent = None
        if sent_id is not None:
            sent = self.sentences.get(sent_id)
            if sent is None:
                self._fail(f"unknown sentence {sent_id!r}: no sentence of the corpus has this sent_id", sent_line)
        name = doc or self.opt.extra.get("doc")
        if name is None and sent is not None:
            if self._docs_by_number is None:
                self._docs_by_number = {d.doc: d for d in self.batch.store.documents()}
            info = self._docs_by_number[sent[1]]
        else:
            name = name or self.path.stem
            info = self.batch.existing_document(name)
            if info is None:
                self._fail(f"unknown document {name!r}: import its text first (CoNLL-U or a transcript), "
                           "or name it with '# doc = NAME'", line)
        if sent is not None and sent[1] != info.doc:
            self._fail(f"sentence {sent_id!r} belongs to another document than {info.name!r}", sent_line)
        return info, sent

    def _import_doc(self, ft: _FileTrees, groups: list[_Group]) -> None:
        info = groups[0].doc
        f = ft.forest
        if doc_has_rows(self.batch.store, self.layer, info.doc):
            self._fail(f"document {info.name!r} already has a {self.layer!r} layer; import another "
                       "parse with --layer NAME or --prefix NAME", int(f.tree_line[groups[0].trees[0]]))
        by_sentence = all(g.sent_span is not None for g in groups)
        if by_sentence:
            groups.sort(key=lambda g: g.sent_span[0])
        firsts = [ft.tree_words(g.trees[0]) for g in groups]
        forms = [w for ws in firsts for w in ws]
        if by_sentence:
            # the sentences are known: each tree aligns to its own (edit distance does
            # not reward keeping a word together, so a long stretch of text without
            # trees would let a word's letters scatter over it); all in one call
            cuts = np.concatenate([[0], np.cumsum([len(ws) for ws in firsts])])
            al = align_segments(info.text, forms, cuts,
                                np.array([g.sent_span[0] - info.base for g in groups], dtype=np.int64),
                                np.array([g.sent_span[1] - info.base for g in groups], dtype=np.int64))
        else:
            # one alignment per document over the first reading of every tree, in order
            al = align_forms(info.text, forms)
        # per emitted tree: its number, reading, group; per written word: span, class, score
        emit, reading, group_of = [], [], []
        w_start, w_end, w_score, w_cls = [], [], [], []
        k = 0
        for gi, g in enumerate(groups):
            first = firsts[gi]
            n = len(first)
            base = (al.start[k:k + n], al.end[k:k + n], al.cls[k:k + n], al.score[k:k + n])
            k += n
            for r, tree in enumerate(g.trees):
                mine = ft.tree_words(tree)
                spans = base if r == 0 or mine == first else self._align_alone(info, g, mine)
                emit.append(tree), reading.append(r), group_of.append(gi)
                w_start.append(spans[0]), w_end.append(spans[1]), w_cls.extend(spans[2])
                w_score.append(spans[3])
        emit_a = np.array(emit, dtype=np.int64)
        t_first, t_end = f.tree_start[emit_a], f.tree_start[emit_a + 1]
        sizes = t_end - t_first
        nodes = _ranges(t_first, t_end)                   # forest index of every row, in row order
        total = len(nodes)
        row_tree = np.repeat(np.arange(len(emit)), sizes)     # emitted tree of every row
        row0 = np.cumsum(sizes) - sizes                       # first row of every emitted tree
        id0 = self.batch.alloc_ids(total)
        order0 = self.order + 2 * row0
        self.order += 2 * total
        is_leaf = f.is_leaf[nodes]
        empty = ft.empty[nodes]
        word = is_leaf & ~empty
        # leaves in row order: local character span; written words from the alignment
        leaf_rows = np.flatnonzero(is_leaf)
        leaf_tree = row_tree[leaf_rows]
        word_of_leaf = word[leaf_rows]
        m = len(leaf_rows)
        ls, le = np.zeros(m, dtype=np.int64), np.zeros(m, dtype=np.int64)
        ls[word_of_leaf] = np.concatenate(w_start) if w_start else []
        le[word_of_leaf] = np.concatenate(w_end) if w_end else []
        cls = np.array(w_cls, dtype=object)
        good = np.zeros(m, dtype=bool)
        good[word_of_leaf] = np.isin(cls.astype(str), GOOD) if len(cls) else False
        fallback = np.array([(groups[gi].sent_span[0] - info.base) if groups[gi].sent_span else 0
                             for gi in group_of], dtype=np.int64)
        _place_points(ls, le, good, ~word_of_leaf, leaf_tree, fallback)
        # constituents: the characters of their aligned leaves (a point at the first leaf if none)
        leaf0 = np.cumsum(np.bincount(leaf_tree, minlength=len(emit))) - np.bincount(leaf_tree, minlength=len(emit))
        a = f.leaf_first[nodes] + leaf0[row_tree]
        b = f.leaf_last[nodes] + leaf0[row_tree] + 1
        big = np.iinfo(np.int64).max
        bounds = np.empty(2 * total, dtype=np.int64)
        bounds[0::2], bounds[1::2] = a, b
        lo = np.minimum.reduceat(np.append(np.where(good, ls, big), big), bounds)[0::2]
        hi = np.maximum.reduceat(np.append(np.where(good, le, -1), -1), bounds)[0::2]
        none = lo == big
        start = np.where(none, ls[a], lo)
        end = np.where(none, ls[a], hi)
        # empty elements: the constituent of the same tree with the index they carry
        index = ft.index.take(pa.array(nodes))
        trace_index, trace_of = self._traces(ft, nodes, row_tree, empty, index, id0)
        index = pc.if_else(pa.array(empty), trace_index, pc.if_else(pa.array(is_leaf), None, index))
        align = np.full(total, None, dtype=object)
        align_score = np.full(total, np.nan)
        word_rows = leaf_rows[word_of_leaf]
        align[word_rows] = cls
        align_score[word_rows] = np.concatenate(w_score) if w_score else []
        take = pa.array(nodes)
        leaf_mask = pa.array(is_leaf)
        parent = f.parent[nodes]
        parent_row = parent - t_first[row_tree] + row0[row_tree]
        sent = np.array([g.sent_node if g.sent_node is not None else -1 for g in groups], dtype=np.int64)[
            np.array(group_of, dtype=np.int64)][row_tree]
        no_str = pa.nulls(total, pa.string())
        table = pa.table({
            "id": pa.array(id0 + np.arange(total, dtype=np.int64)),
            "doc": pa.array(np.full(total, info.doc, dtype=np.int64)),
            "start": pa.array(info.base + start), "end": pa.array(info.base + end),
            "sent": pa.array(sent, mask=sent < 0),
            "parent": pa.array(id0 + parent_row, mask=parent < 0),
            "depth": pa.array(f.depth[nodes]),
            "pre": pa.array(order0[row_tree] + f.pre[nodes]), "post": pa.array(order0[row_tree] + f.post[nodes]),
            "reading": pa.array(np.array(reading, dtype=np.int64)[row_tree]),
            "label": f.label.take(take), "cat": ft.cat.take(take), "func": ft.func.take(take),
            "index": index, "gap": ft.gap.take(take),
            "trace_of": trace_of,
            "is_leaf": leaf_mask,
            "empty": pa.array(empty, mask=~is_leaf),
            "form": pc.if_else(leaf_mask, ft.written.take(take), no_str),
            "pos": ft.pos.take(take),
            "align": pa.array(align, pa.string()),
            "align_score": pa.array(align_score, mask=~word),
            "line": pa.array(f.line[nodes].astype(np.int64)),
        })
        self._stage(table)
        # the alignment report looks only at the written words
        self.aligned.append((info, table.select(["form", "start", "align_score", "line"]).take(pa.array(word_rows)),
                             list(cls)))
        self.report.add("trees", len(emit))
        self.report.add("sentences", len(groups))
        self.report.add("nodes", total)

    def _stage(self, table: pa.Table) -> None:
        """Buffer a document's rows; a write per ~PART_ROWS rows, not per document (small row groups)."""
        self._pending.append(table)
        self._pending_rows += table.num_rows
        if self._pending_rows >= PART_ROWS:
            self._flush()

    def _flush(self) -> None:
        """Write the buffered rows, with sentence and token references and times filled in
        before the write (the reference layers are read once per import); rows that cannot be
        filled so are finalised at commit instead, by rewriting the layer."""
        if self._pending:
            table = pa.concat_tables(self._pending, promote_options="default")
            if self._filler is False:
                self._filler = new_row_filler(self.batch, time_axis=False)
            filled = self._filler(table) if self._filler is not None else None
            if filled is None:
                self._finalise_at_commit = True
            elif self._filler.gives_times:
                self._gave_times = True
            self.batch.write_nodes(self.layer, "tree", table if filled is None else filled)
        self._pending, self._pending_rows = [], 0

    def _traces(self, ft: _FileTrees, nodes: np.ndarray, row_tree: np.ndarray, empty: np.ndarray,
                index: pa.Array, id0: int) -> tuple[pa.Array, pa.Array]:
        """Per row: the index an empty element refers to and the id of the constituent that has it."""
        total = len(nodes)
        trace_index: list[str | None] = [None] * total
        trace_of: list[int | None] = [None] * total
        empty_rows = np.flatnonzero(empty)
        if not len(empty_rows):
            return pa.array(trace_index, pa.string()), pa.array(trace_of, pa.int64())
        has_index = np.flatnonzero(pc.is_valid(index).to_numpy(zero_copy_only=False) & ~ft.forest.is_leaf[nodes])
        first: dict[tuple[int, str], int] = {}
        for row, idx in zip(has_index.tolist(), index.take(pa.array(has_index)).to_pylist()):
            first.setdefault((int(row_tree[row]), idx), id0 + row)
        forms = ft.forest.form.take(pa.array(nodes[empty_rows])).to_pylist()
        lines = ft.forest.line[nodes[empty_rows]].tolist()
        for row, form, line in zip(empty_rows.tolist(), forms, lines):
            mt = _TRACE.fullmatch(form)
            if not mt:
                continue
            idx = trace_index[row] = mt.group(2)
            trace_of[row] = first.get((int(row_tree[row]), idx))
            if trace_of[row] is None:
                msg = f"the empty element {form} refers to index {idx}, which no constituent of this tree has"
                if not self.opt.lenient:
                    self._fail(msg, line)
                self.report.warnings.append(f"{self.path}:{line}: {msg}")
        return pa.array(trace_index, pa.string()), pa.array(trace_of, pa.int64())

    def _align_alone(self, info: DocInfo, g: _Group, forms: list[str]) -> tuple:
        lo, hi = (g.sent_span[0] - info.base, g.sent_span[1] - info.base) if g.sent_span else (0, len(info.text))
        al = align_forms(info.text, forms, lo, hi)
        return al.start, al.end, al.cls, al.score

    def close(self) -> None:
        self._flush()
        self.batch.set_meta("next_order", self.order)
        kind, props = self.batch._layer_props[self.layer]
        props["readings"] = bool(props.get("readings")) or self.readings
        accept = bool(self.opt.extra.get("accept_poor_alignment"))
        warning = check_alignment(self.layer, self.aligned, accept)
        if warning:
            self.report.warnings.append(warning)
        layer = self.layer
        if self._finalise_at_commit:
            self.batch.on_commit(lambda b: finalise_new_layer(b, layer, time_axis=False))
        elif self._gave_times:
            props["time"] = True


def _place_points(ls: np.ndarray, le: np.ndarray, good: np.ndarray, empty: np.ndarray, tree: np.ndarray,
                  fallback: np.ndarray) -> None:
    """Empty elements: a point at the start of the next aligned word of their tree, else at the
    end of the tree's last aligned word, else at ``fallback[tree]`` (leaves in order, in place)."""
    m = len(ls)
    if not empty.any():
        return
    j = np.arange(m)
    nxt = np.minimum.accumulate(np.where(good, j, m)[::-1])[::-1]
    prv = np.maximum.accumulate(np.where(good, j, -1))
    has_next = (nxt < m) & (tree[np.minimum(nxt, m - 1)] == tree)
    tree_last = np.zeros(tree[-1] + 1, dtype=np.int64)
    tree_last[tree] = j                                   # last leaf of every tree
    last_good = prv[tree_last[tree]]
    has_last = (last_good >= 0) & (tree[np.maximum(last_good, 0)] == tree)
    point = np.where(has_next, ls[np.minimum(nxt, m - 1)],
                     np.where(has_last, le[np.maximum(last_good, 0)], fallback[tree]))
    ls[empty] = le[empty] = point[empty]


def import_files(batch: Batch, paths: list[Path], options: ImportOptions) -> ImportReport:
    """Import bracketed tree files; raises StrataError (file:line) on the first bad place."""
    imp = BracketsImporter(batch, options)
    for path in paths:
        imp.import_file(Path(path))
    imp.close()
    return imp.report
