"""Standoff span tables in (format ``spans``): labelled stretches of a document.

A table with a header row (TSV, or CSV by the ``.csv`` ending): required columns
``doc, start, end, label``, any further columns are attributes (``type``,
``speaker``, ``group`` to tie a reparandum to its repair, ...). ``--anchor`` says
what ``start``/``end`` are:

* ``chars`` (default): character offsets into the primary text, end exclusive;
* ``tokens:LAYER``: ordinals of the nodes of LAYER within the document, from 0, end
  inclusive;
* ``time``: seconds (``--time-unit ms``: milliseconds) on the recording; the
  characters come from the aligned time words, as for tiers.

The layer is named by ``--layer`` (default: the file name up to its first dot).
"""
from __future__ import annotations

from pathlib import Path

import pyarrow as pa

from engine.align.anchor import SENTENCE_LAYER, finalise_new_layer, parquet
from engine.errors import StrataError
from engine.importers.base import ImportOptions, ImportReport, sha256_of
from engine.importers.tabular import parse_int, parse_time, read_table, seconds_text, time_unit, typed_column
from engine.store import Batch, DocInfo

FORMAT = "spans"
REQUIRED = ["doc", "start", "end", "label"]


def _anchor(options: ImportOptions, batch: Batch) -> tuple[str, str | None]:
    value = options.extra.get("anchor") or "chars"
    if value in ("chars", "time"):
        return value, None
    kind, sep, layer = value.partition(":")
    if kind == "tokens" and sep and layer:
        if layer not in batch.store.layers():
            known = ", ".join(n for n, i in batch.store.layers().items() if i.kind == "sequence") or "none"
            raise StrataError(f"--anchor tokens:{layer}: no layer {layer!r} in the corpus (token layers: {known})")
        return "tokens", layer
    raise StrataError(f"--anchor {value!r}: use chars, tokens:LAYER or time")


class _TokenIndex:
    """Per document, the nodes of the anchoring layer in order: their spans and ordinals."""

    def __init__(self, batch: Batch, layer: str) -> None:
        import duckdb
        self.layer = layer
        paths = batch.store.part_paths(layer)
        self.by_doc: dict[int, tuple[list[int], list[int]]] = {}
        self.ref: str | None = {"token": "tok", "word": "word"}.get(layer)
        with duckdb.connect() as con:
            cols = {r[0] for r in con.execute(f"DESCRIBE SELECT * FROM {parquet(paths)}").fetchall()}
            order = "ord" if "ord" in cols else "start, id"
            ords = "ord" if "ord" in cols else "NULL"
            rows = con.execute(f'SELECT doc, list(start ORDER BY {order}), list("end" ORDER BY {order}), '
                               f'list({ords} ORDER BY {order}) FROM {parquet(paths)} GROUP BY doc').fetchall()
        self.ords: dict[int, list] = {}
        for doc, starts, ends, ords_ in rows:
            self.by_doc[doc] = (starts, ends)
            self.ords[doc] = ords_


def import_files(batch: Batch, paths: list[Path], options: ImportOptions) -> ImportReport:
    """Import span tables; raises StrataError (file:line) on the first bad row."""
    report = ImportReport()
    anchor, token_layer = _anchor(options, batch)
    unit = time_unit(options.extra)
    tokens = _TokenIndex(batch, token_layer) if token_layer else None
    layer = options.layer(options.extra.get("layer") or Path(paths[0]).name.split(".")[0])
    # ``sent`` is filled with the sentence each span lies inside (engine.align.anchor.structure_fills)
    batch.declare_layer(layer, "span", {"format": FORMAT, "anchor": options.extra.get("anchor") or "chars",
                                        "sentence_layer": SENTENCE_LAYER, "separate": False,
                                        **({"time": True, "time_axis": True} if anchor == "time" else {})})
    durations = batch.store.durations()
    durations.update(batch._durations)
    docs_done: set[int] = set()
    for path in map(Path, paths):
        report.files.append(str(path))
        batch.add_source(str(path), sha256_of(path))
        header, rows = read_table(path, REQUIRED, allowed_reserved={"doc", "start", "end"})
        attrs = [h for h in header if h not in REQUIRED]
        cols: dict[str, list] = {k: [] for k in ("id", "doc", "start", "end", "t_start", "t_end", "tok_first",
                                                  "tok_last", "word_first", "word_last", "label", "line")}
        for a in attrs:
            cols[a] = []
        infos: dict[str, DocInfo] = {}
        for line, r in rows:
            name = r["doc"].strip()
            info = infos.get(name) or batch.existing_document(name)
            if info is None:
                raise StrataError(f"unknown document {name!r}: import its text first (CoNLL-U or a transcript)",
                                  file=str(path), line=line)
            infos[name] = info
            start = end = t0 = t1 = None
            first = last = None
            if anchor == "chars":
                a, b = parse_int(r["start"], path, line, "start"), parse_int(r["end"], path, line, "end")
                if not 0 <= a <= b <= info.length:
                    raise StrataError(f"span {a}-{b} is outside document {name!r} (characters 0-{info.length}, "
                                      "end exclusive)" if a <= b else f"end {b} is before start {a}",
                                      file=str(path), line=line)
                start, end = info.base + a, info.base + b
            elif anchor == "tokens":
                a, b = parse_int(r["start"], path, line, "start"), parse_int(r["end"], path, line, "end")
                starts, ends = tokens.by_doc.get(info.doc, ([], []))
                if b < a:
                    raise StrataError(f"end {b} is before start {a}", file=str(path), line=line)
                if not 0 <= a <= b < len(starts):
                    raise StrataError(f"span {a}-{b} is outside document {name!r}: it has {len(starts)} "
                                      f"{tokens.layer!r} nodes (0-{len(starts) - 1}, end inclusive)",
                                      file=str(path), line=line)
                start, end = min(starts[a:b + 1]), max(ends[a:b + 1])
                ords = tokens.ords[info.doc]
                first, last = ords[a], ords[b]
            else:
                t0 = parse_time(r["start"], unit, path, line, "start")
                t1 = parse_time(r["end"], unit, path, line, "end")
                if t1 < t0:
                    raise StrataError(f"end {r['end']} is before start {r['start']}", file=str(path), line=line)
                known = durations.get(info.doc)
                if known is not None and t1 > known:
                    raise StrataError(f"time {seconds_text(t1)} s is past the end of the recording of {name!r} "
                                      f"({seconds_text(known)} s)", file=str(path), line=line)
            cols["id"].append(None)
            cols["doc"].append(info.doc)
            cols["start"].append(start)
            cols["end"].append(end)
            cols["t_start"].append(t0)
            cols["t_end"].append(t1)
            ref = tokens.ref if tokens else None
            cols["tok_first"].append(first if ref == "tok" else None)
            cols["tok_last"].append(last if ref == "tok" else None)
            cols["word_first"].append(first if ref == "word" else None)
            cols["word_last"].append(last if ref == "word" else None)
            cols["label"].append(r["label"])
            cols["line"].append(line)
            for a_ in attrs:
                cols[a_].append(r[a_] if r[a_] != "" else None)
            docs_done.add(info.doc)
        n = len(cols["id"])
        if n:
            id0 = batch.alloc_ids(n)
            cols["id"] = list(range(id0, id0 + n))
            table = pa.table({k: (pa.array(v, pa.int64()) if k in ("start", "end", "t_start", "t_end", "tok_first",
                                                                    "tok_last", "word_first", "word_last") else
                                  typed_column(pa.array(v, pa.string())) if k in attrs and k != "speaker" else
                                  pa.array(v, pa.string()) if k in attrs or k == "label" else v)
                              for k, v in cols.items()})
            batch.write_nodes(layer, "span", table)
        report.add("spans", n)
    report.add("documents", len(docs_done))
    batch.on_commit(lambda b: finalise_new_layer(b, layer, time_axis=(anchor == "time")))
    return report
