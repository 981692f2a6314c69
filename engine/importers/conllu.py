"""CoNLL-U in: all ten columns, multiword tokens, empty nodes, comments, entities.

CoNLL-U is the open file standard of Universal Dependencies
(https://universaldependencies.org/format.html). One document at a time is held in
memory (a document starts at ``# newdoc id = ...``); its rows are flushed to the
store in chunks, so memory stays bounded by the largest document.

Layers written (see DEVELOPERS.md): ``token`` (syntactic words, with the dependency
tree as tree columns), ``word`` (surface tokens: a multiword token once),
``empty`` (empty nodes), ``sentence``, ``mention``; edge sets ``dep`` and ``enhanced``.
The primary text of a document is rebuilt from the surface tokens and
``SpaceAfter=No``; sentences are joined by a newline.
"""
from __future__ import annotations

import re
from dataclasses import dataclass, field
from pathlib import Path
from typing import NoReturn

import pyarrow as pa

from engine.errors import LenientSkip, StrataError
from engine.importers.base import ImportOptions, ImportReport, read_lines, sha256_of
from engine.progress import byte_progress
from engine.store import Batch, DocInfo

FORMAT = "conllu"
DEFAULT_ENTITY_FIELDS = ["eid", "etype", "head", "other"]
#: Flush rows to Parquet after this many tokens: bounds memory on big files.
CHUNK_TOKENS = 250_000
_ENTITY_ITEM = re.compile(r"\(([^()]+)\)|\(([^()]+)|([^()]+)\)")
#: Comment keys that describe the document rather than the sentence.
_DOC_KEYS = ("newdoc", "global.", "meta::")


@dataclass
class _Sentence:
    first_line: int
    comments: list[str]
    rows: list[tuple[int, list[str]]]        # (line number, ten fields)


@dataclass
class _Doc:
    name: str
    line: int
    attrs: dict[str, str] = field(default_factory=dict)
    sentences: list[_Sentence] = field(default_factory=list)


class _Columns:
    """Column lists of one layer, turned into an Arrow table at flush time."""

    def __init__(self, names: list[str]) -> None:
        self.cols: dict[str, list] = {n: [] for n in names}

    def table(self) -> pa.Table:
        return pa.table(self.cols)

    def __len__(self) -> int:
        return len(next(iter(self.cols.values())))


_TOKEN_COLS = ["id", "doc", "start", "end", "sent", "ord", "tok_first", "tok_last", "word_first",
               "word_last", "cid", "form", "lemma", "upos", "xpos", "feats", "head_num", "deprel",
               "deps", "misc", "parent", "depth", "pre", "post"]
_WORD_COLS = ["id", "doc", "start", "end", "sent", "ord", "tok_first", "tok_last", "word_first",
              "word_last", "cid", "form", "mwt", "mwt_fields", "misc"]
_EMPTY_COLS = ["id", "doc", "start", "end", "sent", "cid", "form", "lemma", "upos", "xpos", "feats",
               "deps", "misc"]
_EDGE_COLS = ["src", "dst", "label", "doc"]


def _nul(v: str) -> str | None:
    return None if v == "_" else v


class ConlluImporter:
    """Streams CoNLL-U files into a batch. One instance per import call."""

    def __init__(self, batch: Batch, options: ImportOptions) -> None:
        self.batch = batch
        self.opt = options
        self.report = ImportReport()
        L = options.layer
        self.names = {k: L(k) for k in ("token", "word", "empty", "sentence", "mention", "dep", "enhanced")}
        self.tok_ord = self._next_ord(self.names["token"])
        self.word_ord = self._next_ord(self.names["word"])
        self.order = int(batch.store.meta("next_order") or 0)
        self.seen_sent_ids: set[str] = set(self._existing_sent_ids())
        self._new_buffers()
        self._declare()

    # -- set-up ------------------------------------------------------------------
    def _next_ord(self, layer: str) -> int:
        paths = self.batch.store.part_paths(layer)
        if not paths:
            return 0
        import duckdb
        files = [str(p) for p in paths]
        with duckdb.connect() as con:
            return int(con.execute("SELECT coalesce(max(ord) + 1, 0) FROM read_parquet(?)", [files]).fetchone()[0])

    def _existing_sent_ids(self) -> list[str]:
        paths = self.batch.store.part_paths(self.names["sentence"])
        if not paths:
            return []
        import duckdb
        with duckdb.connect() as con:
            return [r[0] for r in con.execute("SELECT sent_id FROM read_parquet(?) WHERE sent_id IS NOT NULL",
                                              [[str(p) for p in paths]]).fetchall()]

    def _declare(self) -> None:
        n = self.names
        tok, word = n["token"], n["word"]
        common = {"token_layer": tok, "word_layer": word}
        self.batch.declare_layer(tok, "token", {**common, "tree": True, "edge_sets": [n["dep"], n["enhanced"]],
                                                "format": FORMAT})
        self.batch.declare_layer(word, "token", {**common, "format": FORMAT})
        self.batch.declare_layer(n["empty"], "token", {**common, "format": FORMAT})
        self.batch.declare_layer(n["sentence"], "span", {**common, "format": FORMAT})
        self.batch.declare_layer(n["mention"], "span", {**common, "format": FORMAT, "coreference": True})
        self.batch.declare_layer(n["dep"], "edges", {"nodes": tok})
        self.batch.declare_layer(n["enhanced"], "edges", {"nodes": tok})
        self.batch.on_commit(self._finalise)

    def _new_buffers(self) -> None:
        self.tokens = _Columns(_TOKEN_COLS)
        self.words = _Columns(_WORD_COLS)
        self.empties = _Columns(_EMPTY_COLS)
        self.dep = _Columns(_EDGE_COLS)
        self.enh = _Columns(_EDGE_COLS)
        self.sents: list[dict] = []
        self.mentions: list[dict] = []

    # -- reading -------------------------------------------------------------------
    def import_file(self, path: Path) -> None:
        self.path = path
        self.report.files.append(str(path))
        self.batch.add_source(str(path), sha256_of(path))
        size = path.stat().st_size if path.exists() else 0
        with byte_progress(size, f"import {path.name}", self.opt.progress) as advance:
            doc: _Doc | None = None
            comments: list[str] = []
            rows: list[tuple[int, list[str]]] = []
            first = 0
            for number, line in read_lines(path, advance):
                if line:
                    if line[0] == "#":
                        if rows:
                            self._fail("a comment line inside a sentence (comments go before the token lines)", number)
                        if not comments:
                            first = number
                        if line.startswith("# newdoc"):
                            if doc is not None and doc.sentences:
                                self._finish_doc(doc)
                            doc = self._start_doc(self._newdoc_name(line, number), number)
                        comments.append(line)
                    else:
                        if not comments and not rows:
                            first = number
                        fields = line.split("\t")
                        if len(fields) != 10:
                            self._fail(f"a token line needs 10 tab-separated columns, this one has {len(fields)}", number)
                        rows.append((number, fields))
                elif comments or rows:
                    doc = self._add_sentence(doc, _Sentence(first, comments, rows), number)
                    comments, rows = [], []
            if comments or rows:
                if not rows:
                    self._fail("comment lines at the end of the file with no sentence after them", first)
                doc = self._add_sentence(doc, _Sentence(first, comments, rows), first)
            if doc is not None and doc.sentences:
                self._finish_doc(doc)

    def _start_doc(self, name: str, line: int) -> _Doc:
        existing = self.batch.existing_document(name)
        if existing is not None and self.batch.store.layer_rows(self.names["token"]) and self._doc_has_tokens(existing):
            raise StrataError(f"document {name!r} already has a {self.names['token']!r} layer; "
                              "import a second annotation of it with --prefix NAME", file=str(self.path), line=line)
        return _Doc(name, line)

    def _newdoc_name(self, line: str, number: int) -> str:
        head, sep, value = line.partition("=")
        if not sep or head.strip() != "# newdoc id" or not value.strip():
            if line.strip() == "# newdoc":
                return f"{self.path.stem}-{number}"
            self._fail("a '# newdoc' line should read '# newdoc id = NAME'", number)
        return value.strip()

    def _add_sentence(self, doc: _Doc | None, sent: _Sentence, number: int) -> _Doc:
        if not sent.rows:
            self._fail("comment lines with no token lines after them", sent.first_line)
        if doc is None:
            doc = self._start_doc(self.path.stem, sent.first_line)
        doc.sentences.append(sent)
        if not doc.attrs and len(doc.sentences) == 1:
            doc.attrs = self._doc_attrs(sent.comments)
        return doc

    @staticmethod
    def _doc_attrs(comments: list[str]) -> dict[str, str]:
        """Comments from ``newdoc`` up to the first ``newpar``/``sent_id`` describe the document."""
        attrs: dict[str, str] = {}
        in_doc = False
        for c in comments:
            key, _, value = c[1:].strip().partition(" = ")
            key = key.strip()
            if key.startswith("newdoc"):
                in_doc = True
                continue
            if not in_doc or key.startswith("newpar") or key == "sent_id":
                break
            if key.startswith("meta::"):
                key = key[len("meta::"):]
            attrs[key] = value.strip()
        return attrs

    def _fail(self, message: str, line: int) -> NoReturn:
        raise StrataError(message, file=str(self.path), line=line)

    # -- one document --------------------------------------------------------------
    def _finish_doc(self, doc: _Doc) -> None:
        parsed = []
        for sent in doc.sentences:
            try:
                parsed.append(self._parse_sentence(sent))
            except LenientSkip as skip:
                self.report.skipped.append(f"{self.path}:{sent.first_line}: {skip}")
        if not parsed:
            return
        text = "\n".join(p.text for p in parsed)
        info = self._document(doc, text)
        fields = (doc.attrs.get("global.Entity", "").split("-") or DEFAULT_ENTITY_FIELDS)
        if fields == [""]:
            fields = DEFAULT_ENTITY_FIELDS
        offset = info.base
        open_mentions: dict[str, list[dict]] = {}
        doc_mentions: list[dict] = []
        tok_in_doc: list[int] = []   # token node ids in document order (for mentions)
        for p in parsed:
            self._emit_sentence(info, p, offset, fields, open_mentions, doc_mentions)
            offset += len(p.text) + 1
        for eid, stack in open_mentions.items():
            if stack:
                m = stack[-1]
                self._fail_or_skip(f"entity bracket '({eid}' opened here is never closed", m["line"])
        self._chains(doc_mentions)
        self.mentions.extend(doc_mentions)
        self.report.add("documents")
        if len(self.tokens) >= CHUNK_TOKENS:
            self._flush()

    def _fail_or_skip(self, message: str, line: int) -> None:
        if self.opt.lenient:
            self.report.warnings.append(f"{self.path}:{line}: {message}")
        else:
            self._fail(message, line)

    def _document(self, doc: _Doc, text: str) -> DocInfo:
        existing = self.batch.existing_document(doc.name)
        if existing is None:
            return self.batch.add_document(doc.name, text, doc.attrs)
        if existing.text != text:
            at = next((i for i, (a, b) in enumerate(zip(existing.text, text)) if a != b),
                      min(len(existing.text), len(text)))
            raise StrataError(
                f"document {doc.name!r} is already in the corpus with a different text "
                f"(first difference at character {at}: {existing.text[at:at + 20]!r} vs {text[at:at + 20]!r}); "
                "layers of the same document must share its primary text", file=str(self.path), line=doc.line)
        return existing

    def _doc_has_tokens(self, info: DocInfo) -> bool:
        import duckdb
        files = [str(p) for p in self.batch.store.part_paths(self.names["token"])]
        with duckdb.connect() as con:
            return con.execute("SELECT count(*) FROM read_parquet(?) WHERE doc = ?", [files, info.doc]).fetchone()[0] > 0

    # -- one sentence: validation and local structure --------------------------------
    def _parse_sentence(self, sent: _Sentence) -> "_Parsed":
        try:
            return _parse(sent, self.seen_sent_ids)
        except _SentenceError as e:
            if self.opt.lenient:
                raise LenientSkip(e.message) from None
            self._fail(e.message, e.line)

    def _emit_sentence(self, info: DocInfo, p: "_Parsed", offset: int, fields: list[str],
                       open_mentions: dict[str, list[dict]], doc_mentions: list[dict]) -> None:
        n_tok, n_word, n_empty = len(p.tokens), len(p.words), len(p.empties)
        first_id = self.batch.alloc_ids(1 + n_tok + n_word + n_empty)
        sent_id = first_id
        tok_id0 = first_id + 1
        word_id0 = tok_id0 + n_tok
        empty_id0 = word_id0 + n_word
        tok_ord0, word_ord0 = self.tok_ord, self.word_ord
        self.tok_ord += n_tok
        self.word_ord += n_word
        doc = info.doc
        T = self.tokens.cols
        # dependency tree: entry/exit times from one counter, so pre..post is an interval
        pre, post = [None] * n_tok, [None] * n_tok
        if p.tree_order is not None:
            base = self.order
            for i, (a, b) in enumerate(p.tree_order):
                pre[i], post[i] = base + a, base + b
            self.order += 2 * n_tok
        word_of_tok = p.word_of_token
        for i, (line, f) in enumerate(p.tokens):
            s, e = p.tok_spans[i]
            h = p.heads[i]
            T["id"].append(tok_id0 + i)
            T["doc"].append(doc)
            T["start"].append(offset + s)
            T["end"].append(offset + e)
            T["sent"].append(sent_id)
            T["ord"].append(tok_ord0 + i)
            T["tok_first"].append(tok_ord0 + i)
            T["tok_last"].append(tok_ord0 + i)
            w = word_ord0 + word_of_tok[i]
            T["word_first"].append(w)
            T["word_last"].append(w)
            T["cid"].append(f[0])
            T["form"].append(f[1])
            T["lemma"].append(f[2])
            T["upos"].append(_nul(f[3]))
            T["xpos"].append(_nul(f[4]))
            T["feats"].append(_nul(f[5]))
            T["head_num"].append(h)
            T["deprel"].append(_nul(f[7]))
            T["deps"].append(_nul(f[8]))
            T["misc"].append(_nul(f[9]))
            T["parent"].append(tok_id0 + h - 1 if h else None)
            T["depth"].append(p.depths[i] if p.depths is not None else None)
            T["pre"].append(pre[i])
            T["post"].append(post[i])
            if h:
                D = self.dep.cols
                D["src"].append(tok_id0 + i)
                D["dst"].append(tok_id0 + h - 1)
                D["label"].append(_nul(f[7]))
                D["doc"].append(doc)
        W = self.words.cols
        for j, (cid, form, s, e, t0, t1, mwt_fields, misc) in enumerate(p.words):
            W["id"].append(word_id0 + j)
            W["doc"].append(doc)
            W["start"].append(offset + s)
            W["end"].append(offset + e)
            W["sent"].append(sent_id)
            W["ord"].append(word_ord0 + j)
            W["tok_first"].append(tok_ord0 + t0)
            W["tok_last"].append(tok_ord0 + t1)
            W["word_first"].append(word_ord0 + j)
            W["word_last"].append(word_ord0 + j)
            W["cid"].append(cid)
            W["form"].append(form)
            W["mwt"].append(mwt_fields is not None)
            W["mwt_fields"].append(mwt_fields)
            W["misc"].append(misc)
        E = self.empties.cols
        empty_ids: dict[str, int] = {}
        for k, (line, f, at) in enumerate(p.empties):
            E["id"].append(empty_id0 + k)
            E["doc"].append(doc)
            E["start"].append(offset + at)
            E["end"].append(offset + at)
            E["sent"].append(sent_id)
            E["cid"].append(f[0])
            E["form"].append(f[1])
            E["lemma"].append(f[2])
            E["upos"].append(_nul(f[3]))
            E["xpos"].append(_nul(f[4]))
            E["feats"].append(_nul(f[5]))
            E["deps"].append(_nul(f[8]))
            E["misc"].append(_nul(f[9]))
            empty_ids[f[0]] = empty_id0 + k
        # enhanced graph (DEPS), over tokens and empty nodes
        X = self.enh.cols
        for src, head, rel in p.enhanced:
            if src.isdigit():
                s_id = tok_id0 + int(src) - 1
            else:
                s_id = empty_ids[src]
            if head == "0":
                d_id = None
            elif head.isdigit():
                d_id = tok_id0 + int(head) - 1
            else:
                d_id = empty_ids[head]
            X["src"].append(s_id)
            X["dst"].append(d_id)
            X["label"].append(rel)
            X["doc"].append(doc)
        # sentence row
        row = {"id": sent_id, "doc": doc, "start": offset, "end": offset + len(p.text), "sent": sent_id,
               "tok_first": tok_ord0, "tok_last": tok_ord0 + n_tok - 1,
               "word_first": word_ord0, "word_last": word_ord0 + n_word - 1,
               "sent_id": p.sent_id, "text": p.text_comment, "comments": "\n".join(p.comments)}
        for k, v in p.attrs.items():
            row.setdefault(k if k not in row else f"comment.{k}", v)
        self.sents.append(row)
        # mentions from MISC Entity brackets
        for i, (line, f) in enumerate(p.tokens):
            ent = p.entity_values[i]
            if ent is None:
                continue
            self._entity_brackets(ent, line, i, p, info, offset, tok_id0, tok_ord0, word_ord0,
                                  sent_id, fields, open_mentions, doc_mentions)
        self.report.add("sentences")
        self.report.add("tokens", n_tok)
        self.report.add("words", n_word)
        self.report.add("multiword tokens", sum(1 for w in p.words if w[6] is not None))
        self.report.add("empty nodes", n_empty)

    def _entity_brackets(self, value: str, line: int, i: int, p: "_Parsed", info: DocInfo, offset: int,
                         tok_id0: int, tok_ord0: int, word_ord0: int, sent_id: int, fields: list[str],
                         open_mentions: dict[str, list[dict]], doc_mentions: list[dict]) -> None:
        pos = 0
        for m in _ENTITY_ITEM.finditer(value):
            if m.start() != pos:
                break
            pos = m.end()
            single, opening, closing = m.groups()
            spec = single or opening
            if spec is not None:
                parts = spec.split("-", len(fields) - 1)
                key = parts[0]
                mention = {"line": line, "key": key, "doc": info.doc, "sent": sent_id,
                           "t0": i, "tok_id0": tok_id0, "tok_ord0": tok_ord0, "word_ord0": word_ord0,
                           "offset": offset, "p": p, "fields": parts}
                if single is not None:
                    self._close_mention(mention, i, doc_mentions, fields)
                else:
                    open_mentions.setdefault(key, []).append(mention)
            else:
                key = closing
                stack = open_mentions.get(key)
                if not stack:
                    self._fail_or_skip(f"entity bracket '{key})' closes a mention that was never opened", line)
                    continue
                mention = stack.pop()
                if mention["sent"] != sent_id:
                    self._fail_or_skip(f"entity mention '{key}' opened at line {mention['line']} "
                                       "closes in another sentence", line)
                self._close_mention(mention, i, doc_mentions, fields)
        if pos != len(value):
            self._fail_or_skip(f"cannot read the Entity value {value!r} from character {pos} "
                               "(expected '(id-...', 'id)' or '(id-...)')", line)

    def _close_mention(self, m: dict, last: int, out: list[dict], fields: list[str]) -> None:
        p: _Parsed = m.pop("p")
        first = m["t0"]
        s = p.tok_spans[first][0]
        e = p.tok_spans[last][1]
        row = {"doc": m["doc"], "start": m["offset"] + s, "end": m["offset"] + e, "sent": m["sent"],
               "tok_first": m["tok_ord0"] + first, "tok_last": m["tok_ord0"] + last,
               "word_first": m["word_ord0"] + p.word_of_token[first],
               "word_last": m["word_ord0"] + p.word_of_token[last], "line": m["line"]}
        key = m["key"]
        bare = key.split("[", 1)[0]          # discontinuous parts: "3[1/2]" belongs to entity 3
        row["entity"] = bare
        names = ["entity"] + [("type" if f == "etype" else f) for f in fields[1:]]
        for name, value in zip(names[1:], m["fields"][1:]):
            row[name] = value
        out.append(row)

    def _chains(self, mentions: list[dict]) -> None:
        """Coreference chains of one document: the mentions of one entity id.

        The identity relation "same entity id" makes every chain a clique, so its graph
        components are the groups by entity id; computing them by grouping is the same
        result as a component search and linear in the number of mentions.
        """
        groups: dict[str, list[dict]] = {}
        for m in mentions:
            groups.setdefault(m["entity"], []).append(m)
        first_chain = self.batch.alloc_chains(len(groups))
        for c, (_, ms) in enumerate(groups.items()):
            ms.sort(key=lambda r: (r["start"], -r["end"]))
            for pos, m in enumerate(ms):
                m["chain"] = first_chain + c
                m["chain_pos"] = pos
                m["first_mention"] = pos == 0
        mentions.sort(key=lambda r: (r["start"], -r["end"]))
        ids = self.batch.alloc_ids(len(mentions))
        for k, m in enumerate(mentions):
            m["id"] = ids + k
            m.pop("line", None)
        self.report.add("mentions", len(mentions))
        self.report.add("chains", len(groups))

    # -- writing -------------------------------------------------------------------
    def _flush(self) -> None:
        n = self.names
        if len(self.tokens):
            self.batch.write_nodes(n["token"], "token", self.tokens.table())
            self.batch.write_nodes(n["word"], "token", self.words.table())
        if len(self.empties):
            self.batch.write_nodes(n["empty"], "token", self.empties.table())
        if len(self.dep):
            self.batch.write_edges(n["dep"], self.dep.table())
        if len(self.enh):
            self.batch.write_edges(n["enhanced"], self.enh.table())
        if self.sents:
            self.batch.write_nodes(n["sentence"], "span", _rows_table(self.sents))
        if self.mentions:
            self.batch.write_nodes(n["mention"], "span", _rows_table(self.mentions))
        self._new_buffers()

    def close(self) -> None:
        self._flush()
        self.batch.set_meta("next_order", self.order)

    def _finalise(self, batch: Batch) -> None:
        """Flatten FEATS and MISC into ``feats.<Key>``/``misc.<Key>`` columns, one part per layer.

        Done by DuckDB over the staged parts: it is parallel, and it sees every key of the
        import before choosing the columns.
        """
        import duckdb
        n = self.names
        with duckdb.connect() as con:
            for layer, flat in ((n["token"], ("feats", "misc")), (n["word"], ("misc",)),
                                (n["empty"], ("feats", "misc")), (n["sentence"], ()), (n["mention"], ())):
                paths = [str(p) for p in batch.staged_paths(layer)]
                if not paths:
                    continue
                rel = f"read_parquet({_list_literal(paths)}, union_by_name = true)"
                extra = []
                for col in flat:
                    keys = [k for (k,) in con.execute(
                        f"SELECT DISTINCT split_part(unnest(string_split({col}, '|')), '=', 1) AS k "
                        f"FROM {rel} ORDER BY k").fetchall() if k]
                    for k in keys:
                        pattern = "\\|" + re.escape(k) + "=([^|]*)"
                        extra.append(f"nullif(regexp_extract('|' || {col}, {_sql_str(pattern)}, 1), '') "
                                     f"AS {_ident(col + '.' + k)}")
                out = batch.stage / f"{layer}--final.parquet"
                select = ", ".join(["*"] + extra)
                con.execute(f"COPY (SELECT {select} FROM {rel}) TO {_sql_str(str(out))} "
                            f"(FORMAT parquet, COMPRESSION zstd, ROW_GROUP_SIZE 122880)")
                rows = con.execute(f"SELECT count(*) FROM read_parquet({_sql_str(str(out))})").fetchone()[0]
                batch.replace_staged(layer, out, rows)


# -- sentence parsing (pure; shared by nothing else) ------------------------------------
class _SentenceError(Exception):
    def __init__(self, message: str, line: int) -> None:
        super().__init__(message)
        self.message = message
        self.line = line


@dataclass
class _Parsed:
    sent_id: str | None
    text_comment: str | None
    comments: list[str]
    attrs: dict[str, str]
    text: str
    tokens: list[tuple[int, list[str]]]
    tok_spans: list[tuple[int, int]]
    heads: list[int | None]
    depths: list[int] | None
    tree_order: list[tuple[int, int]] | None
    word_of_token: list[int]
    words: list[tuple]                  # (cid, form, start, end, tok0, tok1, mwt_fields|None, misc)
    empties: list[tuple[int, list[str], int]]
    enhanced: list[tuple[str, str, str]]
    entity_values: list[str | None]


def _misc_value(misc: str, key: str) -> str | None:
    if misc == "_" or key not in misc:
        return None
    for item in misc.split("|"):
        k, _, v = item.partition("=")
        if k == key:
            return v
    return None


def _parse(sent: _Sentence, seen_ids: set[str]) -> _Parsed:
    sent_id = text_comment = None
    attrs: dict[str, str] = {}
    in_doc = False
    for c in sent.comments:
        body = c[1:].strip()
        key, sep, value = body.partition(" = ")
        if not sep:
            key, sep, value = body.partition("=")
        key, value = key.strip(), value.strip()
        if key.startswith("newdoc"):
            in_doc = True
            continue
        if key == "sent_id":
            in_doc = False
            sent_id = value
        elif key == "text":
            text_comment = value
        elif key.startswith("newpar"):
            in_doc = False
            attrs[key] = value
        elif in_doc and key.startswith(_DOC_KEYS):
            continue
        elif key:
            attrs[key] = value
    first_line = sent.rows[0][0]
    if sent_id is not None:
        if sent_id in seen_ids:
            raise _SentenceError(f"sentence id {sent_id!r} is used twice", sent.first_line)
        seen_ids.add(sent_id)

    tokens: list[tuple[int, list[str]]] = []
    mwts: dict[int, tuple[int, int, list[str]]] = {}  # first word -> (first, last, fields)
    empties_raw: list[tuple[int, list[str], int]] = []  # (line, fields, after word index)
    expect = 1
    mwt_until = 0
    for line, f in sent.rows:
        cid = f[0]
        if cid.isdigit():
            if int(cid) != expect:
                raise _SentenceError(f"word ID {cid} out of order: expected {expect}", line)
            tokens.append((line, f))
            expect += 1
        elif "-" in cid:
            a, _, b = cid.partition("-")
            if not (a.isdigit() and b.isdigit()):
                raise _SentenceError(f"bad multiword token ID {cid!r}: expected a range like 3-4", line)
            a_i, b_i = int(a), int(b)
            if a_i != expect or b_i <= a_i:
                raise _SentenceError(f"multiword token range {cid} must start at the next word ({expect}) "
                                     "and span at least two words", line)
            if a_i <= mwt_until:
                raise _SentenceError(f"multiword token range {cid} overlaps the previous one", line)
            mwts[a_i] = (a_i, b_i, f)
            mwt_until = b_i
        elif "." in cid:
            a, _, b = cid.partition(".")
            if not (a.isdigit() and b.isdigit()) or int(a) != expect - 1:
                raise _SentenceError(f"bad empty node ID {cid!r}: expected {expect - 1}.N", line)
            empties_raw.append((line, f, int(a)))
        else:
            raise _SentenceError(f"bad ID {cid!r}: expected a number, a range like 3-4 or an empty node like 3.1",
                                 line)
    n = len(tokens)
    if n == 0:
        raise _SentenceError("a sentence with no words", first_line)
    if mwt_until > n:
        raise _SentenceError(f"multiword token range ends at word {mwt_until}, but the sentence has {n} words",
                             first_line)

    # heads and the dependency tree
    heads: list[int | None] = []
    for line, f in tokens:
        h = f[6]
        if h == "_":
            heads.append(None)
            continue
        if not h.isdigit():
            raise _SentenceError(f"HEAD {h!r} is not a number", line)
        hv = int(h)
        if hv > n:
            raise _SentenceError(f"HEAD {hv} is out of range: the sentence has {n} words", line)
        if hv == int(f[0]):
            raise _SentenceError(f"word {f[0]} is its own head", line)
        heads.append(hv)
    depths = order = None
    if all(h is not None for h in heads):
        depths, order = _tree(heads, tokens)
    elif any(h is not None for h in heads):
        line = next(l for (l, _), h in zip(tokens, heads) if h is None)
        raise _SentenceError("HEAD is '_' here but given for other words of the sentence", line)

    # surface words, offsets, text
    pieces: list[str] = []
    tok_spans: list[tuple[int, int]] = [(0, 0)] * n
    word_of_token = [0] * n
    words: list[tuple] = []
    pos = 0
    i = 1
    while i <= n:
        if i in mwts:
            a, b, f = mwts[i]
            form = f[1]
            start = pos
            _split_mwt(form, [tokens[k - 1][1][1] for k in range(a, b + 1)], start, tok_spans, a - 1)
            for k in range(a, b + 1):
                word_of_token[k - 1] = len(words)
            misc = f[9]
            words.append((f[0], form, start, start + len(form), a - 1, b - 1, "\t".join(f[2:9]), _nul(misc)))
            i = b + 1
        else:
            f = tokens[i - 1][1]
            form = f[1]
            start = pos
            tok_spans[i - 1] = (start, start + len(form))
            word_of_token[i - 1] = len(words)
            misc = f[9]
            words.append((f[0], form, start, start + len(form), i - 1, i - 1, None, None))
            i += 1
        pieces.append(form)
        pos += len(form)
        if _misc_value(misc, "SpaceAfter") != "No":
            pieces.append(" ")
            pos += 1
    text = "".join(pieces)
    if text.endswith(" "):
        text = text[:-1]
    # empty nodes: zero width at the end of the word they follow
    empties = [(line, f, tok_spans[after - 1][1] if after else 0) for line, f, after in empties_raw]
    # enhanced dependencies
    enhanced: list[tuple[str, str, str]] = []
    valid_ids = {f[0] for _, f in tokens} | {f[0] for _, f, _ in empties_raw} | {"0"}
    for line, f in tokens + [(l, f) for l, f, _ in empties_raw]:
        if f[8] == "_":
            continue
        for item in f[8].split("|"):
            head, sep, rel = item.partition(":")
            if not sep or head not in valid_ids:
                raise _SentenceError(f"DEPS item {item!r}: the head must be a word or empty node of this "
                                     "sentence, followed by ':' and a relation", line)
            enhanced.append((f[0], head, rel))
    entity_values = [_misc_value(f[9], "Entity") for _, f in tokens]
    return _Parsed(sent_id, text_comment, sent.comments, attrs, text, tokens, tok_spans, heads, depths, order,
                   word_of_token, words, empties, enhanced, entity_values)


def _split_mwt(form: str, parts: list[str], start: int, spans: list[tuple[int, int]], first: int) -> None:
    """Character spans of the syntactic words of one multiword token ("don't" -> "do" + "n't").

    Each part takes its own length where the written form continues with it (case
    ignored); otherwise it takes what it can while leaving the following parts one
    character each; the last part takes the rest. So "don't" splits exactly, and
    "gonna" -> "gon" + "na", "du" -> "d" + "u" (for "de" + "le") stay inside the word.
    """
    low = form.lower()
    pos = 0
    k = len(parts)
    for j, part in enumerate(parts):
        if j == k - 1:
            width = len(form) - pos
        elif low.startswith(part.lower(), pos):
            width = len(part)
        else:
            width = max(0, min(len(part), len(form) - pos - (k - 1 - j)))
        width = max(0, min(width, len(form) - pos))
        spans[first + j] = (start + pos, start + pos + width)
        pos += width


def _tree(heads: list[int], tokens: list[tuple[int, list[str]]]) -> tuple[list[int], list[tuple[int, int]]]:
    """Depth and (entry, exit) times of a depth-first walk from the root; a cycle is an error."""
    n = len(heads)
    children: list[list[int]] = [[] for _ in range(n + 1)]
    for i, h in enumerate(heads, 1):
        children[h].append(i)
    roots = children[0]
    if len(roots) != 1:
        if not roots:
            raise _SentenceError("the dependency tree has no root (no word with HEAD 0): there is a cycle",
                                 tokens[0][0])
        raise _SentenceError(f"the dependency tree has {len(roots)} roots (words {', '.join(map(str, roots))} "
                             "have HEAD 0); a sentence has exactly one", tokens[roots[1] - 1][0])
    depths = [0] * n
    order = [(0, 0)] * n
    clock = 0
    seen = 0
    stack: list[tuple[int, int]] = [(roots[0], 0)]
    entry = [0] * (n + 1)
    while stack:
        node, state = stack.pop()
        if state == 0:
            entry[node] = clock
            clock += 1
            seen += 1
            stack.append((node, 1))
            d = depths[node - 1] + 1
            for c in reversed(children[node]):
                depths[c - 1] = d
                stack.append((c, 0))
        else:
            order[node - 1] = (entry[node], clock)
            clock += 1
    if seen != n:
        bad = next(i for i in range(1, n + 1) if order[i - 1] == (0, 0) and i != roots[0])
        raise _SentenceError(f"word {bad} is on a dependency cycle (it cannot be reached from the root)",
                             tokens[bad - 1][0])
    return depths, order


def _rows_table(rows: list[dict]) -> pa.Table:
    names: dict[str, None] = {}
    for r in rows:
        for k in r:
            names.setdefault(k, None)
    return pa.table({k: [r.get(k) for r in rows] for k in names})


def _list_literal(paths: list[str]) -> str:
    return "[" + ", ".join(_sql_str(p) for p in paths) + "]"


def _sql_str(v: str) -> str:
    return "'" + v.replace("'", "''") + "'"


def _ident(v: str) -> str:
    return '"' + v.replace('"', '""') + '"'


def import_files(batch: Batch, paths: list[Path], options: ImportOptions) -> ImportReport:
    """Import CoNLL-U files into ``batch``; raises StrataError on the first bad place."""
    imp = ConlluImporter(batch, options)
    for path in paths:
        imp.import_file(Path(path))
    imp.close()
    return imp.report
