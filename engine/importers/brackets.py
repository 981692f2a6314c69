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

from engine.align.anchor import finalise_new_layer, parquet
from engine.align.normalise import unescape
from engine.align.report import check_alignment
from engine.align.sequence import GOOD, align_forms
from engine.errors import StrataError
from engine.importers.base import ImportOptions, ImportReport, read_lines, sha256_of
from engine.importers.stored import doc_has_rows
from engine.store import Batch, DocInfo

FORMAT = "brackets"
DEFAULT_LAYER = "tree"
EMPTY_LABEL = "-NONE-"
_TOKEN = re.compile(r"\(|\)|[^\s()]+")
_INDEX = re.compile(r"(.+?)([-=])(\d+)")
_TRACE = re.compile(r"(\*.*|0)-(\d+)")
_COMMENT = re.compile(r"#\s*(\w+)\s*=\s*(.*?)\s*")


@dataclass
class Node:
    label: str | None          # None for a leaf
    form: str | None           # the leaf as written in the file (None for a constituent)
    line: int
    children: list[int] = field(default_factory=list)


@dataclass
class Tree:
    """One parsed tree: nodes in pre-order, the root first."""
    nodes: list[Node]
    line: int
    doc: str | None
    sent: str | None
    sent_line: int | None
    _empty: dict[int, bool] | None = None

    def leaves(self) -> list[int]:
        return [i for i, n in enumerate(self.nodes) if n.label is None]

    def empty_leaves(self) -> dict[int, bool]:
        """Per leaf: is it an empty element (under ``-NONE-``)? Computed once."""
        if self._empty is None:
            self._empty = {c: nd.label == EMPTY_LABEL for nd in self.nodes for c in nd.children
                           if self.nodes[c].label is None}
        return self._empty


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
    doc = sent = None
    sent_line = None
    stack: list[int] = []
    nodes: list[Node] = []
    expect_label = False
    tree_line = 0

    def fail(message: str, line: int) -> NoReturn:
        raise StrataError(message, file=str(path), line=line)

    for number, text in read_lines(path):
        if not stack and text.startswith("#"):
            m = _COMMENT.fullmatch(text)
            if m and m.group(1) == "doc":
                doc, sent, sent_line = m.group(2), None, None
            elif m and m.group(1) == "sent":
                sent, sent_line = m.group(2), number
            continue
        if stack and re.match(r"#\s*(doc|sent)\s*=", text):
            fail(f"the tree opened at line {nodes[0].line} is not closed before this comment "
                 f"({len(stack)} ')' missing)", number)
        for m in _TOKEN.finditer(text):
            tok = m.group()
            if tok == "(":
                if expect_label:
                    nodes[stack[-1]].label = ""
                if not stack:
                    nodes, tree_line = [], number
                nodes.append(Node("", None, number))
                if stack:
                    nodes[stack[-1]].children.append(len(nodes) - 1)
                stack.append(len(nodes) - 1)
                expect_label = True
            elif tok == ")":
                if not stack:
                    fail("a ')' with no '(' to close", number)
                if expect_label:
                    fail("empty brackets '()'", number)
                top = nodes[stack.pop()]
                if not top.children:
                    fail(f"({top.label}) has neither words nor constituents under it", top.line)
                if not stack:
                    yield Tree(_unwrap(nodes), tree_line, doc, sent, sent_line)
            elif expect_label:
                nodes[stack[-1]].label = tok
                expect_label = False
            else:
                if not stack:
                    fail(f"the word {tok!r} is outside any brackets", number)
                nodes.append(Node(None, tok, number))
                nodes[stack[-1]].children.append(len(nodes) - 1)
    if stack:
        fail(f"unbalanced brackets: the tree opened here is not closed ({len(stack)} ')' missing "
             "at the end of the file)", nodes[0].line)


def _unwrap(nodes: list[Node]) -> list[Node]:
    """Drop an unlabeled root wrapper ``( (S ...) )`` around a single tree."""
    root = nodes[0]
    if root.label == "" and len(root.children) == 1 and nodes[root.children[0]].label is not None:
        shift = root.children[0]
        out = nodes[shift:]
        for n in out:
            n.children = [c - shift for c in n.children]
        return out
    return nodes


def walk(tree: Tree) -> tuple[list[int | None], list[int], list[int], list[int], list[tuple[int, int]]]:
    """Parent, depth, entry and exit times (one counter), and leaf range of every node."""
    nodes = tree.nodes
    n = len(nodes)
    parent: list[int | None] = [None] * n
    depth, pre, post = [0] * n, [0] * n, [0] * n
    span = [(0, 0)] * n
    clock = leaf = 0
    stack = [(0, False)]
    first_leaf = [0] * n
    while stack:
        i, done = stack.pop()
        if not done:
            pre[i] = clock
            clock += 1
            first_leaf[i] = leaf
            if nodes[i].label is None:
                leaf += 1
            stack.append((i, True))
            for c in reversed(nodes[i].children):
                parent[c] = i
                depth[c] = depth[i] + 1
                stack.append((c, False))
        else:
            post[i] = clock
            clock += 1
            span[i] = (first_leaf[i], leaf - 1)
    return parent, depth, pre, post, span


# -- import ----------------------------------------------------------------------------
@dataclass
class _Group:
    """The trees of one sentence (several: alternative readings)."""
    doc: DocInfo
    trees: list[Tree]
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


class BracketsImporter:
    def __init__(self, batch: Batch, options: ImportOptions) -> None:
        self.batch = batch
        self.opt = options
        self.report = ImportReport()
        self.layer = options.layer(options.extra.get("layer") or DEFAULT_LAYER)
        self.order = int(batch.store.meta("next_order") or 0)
        self.sentences = _sentences(batch)
        self.readings = False
        self.aligned: list[tuple] = []
        batch.declare_layer(self.layer, "tree", {"tree": True, "format": FORMAT, "readings": False})

    def import_file(self, path: Path) -> None:
        self.path = path
        self.report.files.append(str(path))
        self.batch.add_source(str(path), sha256_of(path))
        groups: dict[str, list[_Group]] = {}
        seen_sent: dict[str, int] = {}
        last: _Group | None = None
        for tree in parse_trees(path):
            info, sent_node = self._place(tree)
            if tree.sent is not None and last is not None and last.trees[-1].sent_line == tree.sent_line:
                last.trees.append(tree)             # another reading of the same sentence
                self.readings = True
                continue
            if tree.sent is not None:
                if tree.sent in seen_sent:
                    self._fail(f"sentence {tree.sent!r} already has trees (line {seen_sent[tree.sent]}); "
                               "readings of one sentence must follow each other", tree.sent_line)
                seen_sent[tree.sent] = tree.sent_line
            last = _Group(info, [tree], sent_node[0] if sent_node else None,
                          (sent_node[2], sent_node[3]) if sent_node else None)
            groups.setdefault(info.name, []).append(last)
        if not groups:
            self._fail("no trees in the file", 1)
        for name, gs in groups.items():
            self._import_doc(gs)

    def _fail(self, message: str, line: int | None) -> NoReturn:
        raise StrataError(message, file=str(self.path), line=line)

    def _place(self, tree: Tree) -> tuple[DocInfo, tuple | None]:
        sent = None
        if tree.sent is not None:
            sent = self.sentences.get(tree.sent)
            if sent is None:
                self._fail(f"unknown sentence {tree.sent!r}: no sentence of the corpus has this sent_id",
                           tree.sent_line)
        name = tree.doc or self.opt.extra.get("doc")
        if name is None and sent is not None:
            docs = {d.doc: d for d in self.batch.store.documents()}
            info = docs[sent[1]]
        else:
            name = name or self.path.stem
            info = self.batch.existing_document(name)
            if info is None:
                self._fail(f"unknown document {name!r}: import its text first (CoNLL-U or a transcript), "
                           "or name it with '# doc = NAME'", tree.line)
        if sent is not None and sent[1] != info.doc:
            self._fail(f"sentence {tree.sent!r} belongs to another document than {info.name!r}", tree.sent_line)
        return info, sent

    def _import_doc(self, groups: list[_Group]) -> None:
        info = groups[0].doc
        if doc_has_rows(self.batch.store, self.layer, info.doc):
            self._fail(f"document {info.name!r} already has a {self.layer!r} layer; import another "
                       "parse with --layer NAME or --prefix NAME", groups[0].trees[0].line)
        if all(g.sent_span is not None for g in groups):
            groups.sort(key=lambda g: g.sent_span[0])
        firsts = [g.trees[0] for g in groups]
        leaf_lists = [self._word_leaves(t) for t in firsts]
        by_sentence = all(g.sent_span is not None for g in groups)
        if not by_sentence:
            # one alignment per document over the first reading of every tree, in order
            forms = [unescape(t.nodes[i].form) for t, ls in zip(firsts, leaf_lists) for i in ls]
            al = align_forms(info.text, forms)
        cols: dict[str, list] = {k: [] for k in (
            "id", "doc", "start", "end", "sent", "parent", "depth", "pre", "post", "reading", "label", "cat",
            "func", "index", "gap", "trace_of", "is_leaf", "empty", "form", "pos", "align", "align_score",
            "line")}
        k = 0
        for g, t0, ls in zip(groups, firsts, leaf_lists):
            n = len(ls)
            if by_sentence:
                # the sentences are known: each tree aligns to its own (edit distance does
                # not reward keeping a word together, so a long stretch of text without
                # trees would let a word's letters scatter over it)
                base = self._align_alone(info, g, t0, ls)
            else:
                base = (al.start[k:k + n], al.end[k:k + n], al.cls[k:k + n], al.score[k:k + n])
            k += n
            for reading, tree in enumerate(g.trees):
                mine = self._word_leaves(tree)
                if reading == 0:
                    spans = base
                elif [tree.nodes[i].form for i in mine] == [t0.nodes[i].form for i in ls]:
                    spans = base
                else:
                    spans = self._align_alone(info, g, tree, mine)
                self._emit(info, g, tree, reading, mine, spans, cols)
        table = pa.table(cols)
        self.batch.write_nodes(self.layer, "tree", table)
        leaf_cls = [c for c in cols["align"]]
        self.aligned.append((info, table, leaf_cls))
        self.report.add("trees", sum(len(g.trees) for g in groups))
        self.report.add("sentences", len(groups))
        self.report.add("nodes", table.num_rows)

    @staticmethod
    def _word_leaves(tree: Tree) -> list[int]:
        """Leaves that are written words (empty elements are not in the text)."""
        return [i for i, nd in enumerate(tree.nodes)
                if nd.label is None and not _is_empty_leaf(tree, i)]

    def _align_alone(self, info: DocInfo, g: _Group, tree: Tree, leaves: list[int]) -> tuple:
        lo, hi = (g.sent_span[0] - info.base, g.sent_span[1] - info.base) if g.sent_span else (0, len(info.text))
        al = align_forms(info.text, [unescape(tree.nodes[i].form) for i in leaves], lo, hi)
        return al.start, al.end, al.cls, al.score

    def _emit(self, info: DocInfo, g: _Group, tree: Tree, reading: int, words: list[int], spans: tuple,
              cols: dict[str, list]) -> None:
        nodes = tree.nodes
        n = len(nodes)
        parent, depth, pre, post, leaf_span = walk(tree)
        id0 = self.batch.alloc_ids(n)
        order0 = self.order
        self.order += 2 * n
        leaves = tree.leaves()
        word_pos = {node: j for j, node in enumerate(words)}
        s_arr, e_arr, cls, score = spans
        # per leaf (in order): local start/end and whether it counts for constituent spans
        m = len(leaves)
        ls, le = np.zeros(m, dtype=np.int64), np.zeros(m, dtype=np.int64)
        good = np.zeros(m, dtype=bool)
        for j, node in enumerate(leaves):
            if node in word_pos:
                w = word_pos[node]
                ls[j], le[j] = s_arr[w], e_arr[w]
                good[j] = cls[w] in GOOD
        fallback = (g.sent_span[0] - info.base) if g.sent_span else 0
        self._place_points(leaves, word_pos, good, ls, le, fallback)
        index_of = {}
        for i, nd in enumerate(nodes):
            if nd.label is not None:
                idx = split_label(nd.label)[2]
                if idx is not None:
                    index_of.setdefault(idx, id0 + i)
        for i, nd in enumerate(nodes):
            a, b = leaf_span[i]
            if nd.label is None:
                start, end = ls[a], le[a]
            else:
                sel = good[a:b + 1]
                if sel.any():
                    start, end = ls[a:b + 1][sel].min(), le[a:b + 1][sel].max()
                else:
                    start = end = ls[a]
            cols["id"].append(id0 + i)
            cols["doc"].append(info.doc)
            cols["start"].append(info.base + int(start))
            cols["end"].append(info.base + int(end))
            cols["sent"].append(g.sent_node)
            cols["parent"].append(id0 + parent[i] if parent[i] is not None else None)
            cols["depth"].append(depth[i])
            cols["pre"].append(order0 + pre[i])
            cols["post"].append(order0 + post[i])
            cols["reading"].append(reading)
            cols["line"].append(nd.line)
            if nd.label is not None:
                cat, func, index, gap = split_label(nd.label)
                cols["label"].append(nd.label)
                cols["cat"].append(cat)
                cols["func"].append(func)
                cols["index"].append(index)
                cols["gap"].append(gap)
                cols["trace_of"].append(None)
                cols["is_leaf"].append(False)
                cols["empty"].append(None)
                cols["form"].append(None)
                cols["pos"].append(None)
                cols["align"].append(None)
                cols["align_score"].append(None)
                continue
            empty = _is_empty_leaf(tree, i)
            index = trace = None
            if empty:
                mt = _TRACE.fullmatch(nd.form)
                if mt:
                    index = mt.group(2)
                    trace = index_of.get(index)
                    if trace is None:
                        msg = f"the empty element {nd.form} refers to index {index}, which no constituent " \
                              "of this tree has"
                        if not self.opt.lenient:
                            self._fail(msg, nd.line)
                        self.report.warnings.append(f"{self.path}:{nd.line}: {msg}")
            cols["label"].append(None)
            cols["cat"].append(None)
            cols["func"].append(None)
            cols["index"].append(index)
            cols["gap"].append(None)
            cols["trace_of"].append(trace)
            cols["is_leaf"].append(True)
            cols["empty"].append(empty)
            cols["form"].append(nd.form if empty else unescape(nd.form))
            cols["pos"].append(nodes[parent[i]].label)
            if i in word_pos:
                w = word_pos[i]
                cols["align"].append(cls[w])
                cols["align_score"].append(float(score[w]))
            else:
                cols["align"].append(None)
                cols["align_score"].append(None)

    @staticmethod
    def _place_points(leaves: list[int], word_pos: dict[int, int], good: np.ndarray, ls: np.ndarray,
                      le: np.ndarray, fallback: int) -> None:
        """Empty elements: a point at the start of the next aligned word (else after the last one)."""
        nxt = None
        for j in range(len(leaves) - 1, -1, -1):
            if good[j]:
                nxt = ls[j]
            elif leaves[j] not in word_pos:
                if nxt is None:
                    break
                ls[j] = le[j] = nxt
        prev = fallback
        for j in range(len(leaves)):
            if good[j]:
                prev = le[j]
        # the empty elements after the last aligned word (the backward pass stopped there)
        for j in range(len(leaves) - 1, -1, -1):
            if good[j]:
                break
            if leaves[j] not in word_pos:
                ls[j] = le[j] = prev

    def close(self) -> None:
        self.batch.set_meta("next_order", self.order)
        kind, props = self.batch._layer_props[self.layer]
        props["readings"] = bool(props.get("readings")) or self.readings
        accept = bool(self.opt.extra.get("accept_poor_alignment"))
        warning = check_alignment(self.layer, self.aligned, accept)
        if warning:
            self.report.warnings.append(warning)
        layer = self.layer
        self.batch.on_commit(lambda b: finalise_new_layer(b, layer, time_axis=False))


def _is_empty_leaf(tree: Tree, i: int) -> bool:
    """A leaf under ``-NONE-``: an empty element (trace, null complementiser, ...)."""
    return tree.empty_leaves().get(i, False)


def import_files(batch: Batch, paths: list[Path], options: ImportOptions) -> ImportReport:
    """Import bracketed tree files; raises StrataError (file:line) on the first bad place."""
    imp = BracketsImporter(batch, options)
    for path in paths:
        imp.import_file(Path(path))
    imp.close()
    return imp.report
