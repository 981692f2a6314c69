"""Time-aligned tiers in (format ``tiers``): one layer per tier, with times in seconds.

A table with a header row (TSV, or CSV by the ``.csv`` ending): required columns
``doc, tier, start, end, label``, optional ``speaker`` and any attribute columns.
Every tier becomes a layer named after it (``--prefix P``: ``P.tier``). The ``words``
tier is aligned by characters to the document's primary text (:mod:`engine.align`)
and becomes the bridge between text and time; the other tiers (phones, pauses,
events) take their characters from the words they fall in or between, and the text
layers already stored take their time spans from the words they cover.
"""
from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

import pyarrow as pa

from engine.align.anchor import TIME_WORDS, finalise_new_layer, times_onto_stored_layers
from engine.align.report import check_alignment
from engine.align.sequence import align_forms
from engine.errors import StrataError
from engine.importers.base import ImportOptions, ImportReport, sha256_of
from engine.importers.stored import doc_has_rows, next_ord
from engine.importers.tabular import parse_time, read_table, time_unit
from engine.store import Batch, DocInfo

FORMAT = "tiers"
REQUIRED = ["doc", "tier", "start", "end", "label"]
#: Tiers holding the words a forced aligner wrote: aligned to the text.
WORD_TIERS = ("words",)
#: Tolerance for comparing times read from decimal text (well below a millisecond).
EPS = 1e-9


@dataclass
class _Row:
    line: int
    start: float
    end: float
    label: str
    attrs: dict[str, str]


@dataclass
class _Tier:
    rows: list[_Row] = field(default_factory=list)


def _read(path: Path, unit: str, docs: dict[str, dict[str, _Tier]], first_line: dict[str, int]) -> list[str]:
    header, rows = read_table(path, REQUIRED, allowed_reserved={"start", "end", "doc"})
    attr_cols = [h for h in header if h not in REQUIRED]
    for line, r in rows:
        start = parse_time(r["start"], unit, path, line, "start")
        end = parse_time(r["end"], unit, path, line, "end")
        if end < start:
            raise StrataError(f"end {r['end']} is before start {r['start']}", file=str(path), line=line)
        doc, tier = r["doc"].strip(), r["tier"].strip()
        if not doc or not tier:
            raise StrataError("doc and tier must not be empty", file=str(path), line=line)
        first_line.setdefault(doc, line)
        attrs = {c: (r[c] if r[c] != "" else None) for c in attr_cols}
        docs.setdefault(doc, {}).setdefault(tier, _Tier()).rows.append(_Row(line, start, end, r["label"], attrs))
    return attr_cols


def _check_overlaps(path: Path, doc: str, tier: str, t: _Tier) -> None:
    """Rows of one tier (per speaker) must not overlap: a tier is a segmentation of the time line."""
    by_speaker: dict[str | None, list[_Row]] = {}
    for r in t.rows:
        by_speaker.setdefault(r.attrs.get("speaker"), []).append(r)
    for rows in by_speaker.values():
        rows.sort(key=lambda r: (r.start, r.end))
        for a, b in zip(rows, rows[1:]):
            if b.start < a.end - EPS:
                raise StrataError(f"{tier!r} rows overlap in document {doc!r}: {b.start:g}-{b.end:g} s starts "
                                  f"before {a.start:g}-{a.end:g} s (line {a.line}) ends; a tier may not overlap "
                                  "itself", file=str(path), line=b.line)
    t.rows.sort(key=lambda r: (r.start, r.end, r.line))


def _known_durations(batch: Batch) -> dict[int, float]:
    """Recording lengths known from earlier imports, read once (a catalog query per document costs ~30 ms)."""
    return dict(batch.store._rows("SELECT doc, duration FROM documents WHERE duration IS NOT NULL"))


def import_files(batch: Batch, paths: list[Path], options: ImportOptions) -> ImportReport:
    """Import tier tables; raises StrataError (file:line) on the first bad row."""
    report = ImportReport()
    unit = time_unit(options.extra)
    docs: dict[str, dict[str, _Tier]] = {}
    first_line: dict[str, int] = {}
    source_of: dict[str, Path] = {}
    attr_cols: list[str] = []
    for path in paths:
        path = Path(path)
        report.files.append(str(path))
        batch.add_source(str(path), sha256_of(path))
        before = set(docs)
        for c in _read(path, unit, docs, first_line):
            if c not in attr_cols:
                attr_cols.append(c)
        for d in set(docs) - before:
            source_of[d] = path
    ords: dict[str, int] = {}
    touched: set[int] = set()
    alignments: dict[str, list] = {}
    durations = _known_durations(batch)
    for name, tiers in docs.items():
        path = source_of[name]
        info = batch.existing_document(name)
        if info is None:
            raise StrataError(f"unknown document {name!r}: import its text first (CoNLL-U or a transcript)",
                              file=str(path), line=first_line[name])
        touched.add(info.doc)
        last = 0.0
        for tier, t in tiers.items():
            _check_overlaps(path, name, tier, t)
            last = max(last, max(r.end for r in t.rows))
        known = durations.get(info.doc)
        if known is not None and last > known + EPS:
            row = max((r for t in tiers.values() for r in t.rows), key=lambda r: r.end)
            raise StrataError(f"time {row.end:g} s is past the end of the recording of {name!r} "
                              f"({known:g} s, known from an earlier import)", file=str(path), line=row.line)
        batch.set_duration(info.doc, max(last, known or 0.0))
        for tier, t in sorted(tiers.items(), key=lambda kv: (kv[0] not in WORD_TIERS, kv[0])):
            layer = options.layer(tier)
            if doc_has_rows(batch.store, layer, info.doc):
                raise StrataError(f"document {name!r} already has a {layer!r} layer; import a second set of "
                                  "tiers with --prefix NAME", file=str(path), line=t.rows[0].line)
            if layer not in ords:
                ords[layer] = next_ord(batch.store, layer)
                words = tier in WORD_TIERS
                batch.declare_layer(layer, "token" if words else "span",
                                    {"format": FORMAT, "time": True, "time_axis": True, TIME_WORDS: words,
                                     "tier": tier})
            table, classes = _tier_table(batch, info, tier, t, ords[layer], attr_cols)
            ords[layer] += table.num_rows
            batch.write_nodes(layer, "token" if tier in WORD_TIERS else "span", table)
            if classes is not None:
                alignments.setdefault(layer, []).append((info, table, classes))
            report.add(f"{tier} rows", table.num_rows)
        report.add("documents")
    accept = bool(options.extra.get("accept_poor_alignment"))
    for layer, parts in alignments.items():
        warning = check_alignment(layer, parts, accept)
        if warning:
            report.warnings.append(warning)

    def finalise(b: Batch) -> None:
        for layer in ords:
            finalise_new_layer(b, layer, time_axis=True)
        times_onto_stored_layers(b, touched, skip=set(ords))
    batch.on_commit(finalise)
    return report


def _tier_table(batch: Batch, info: DocInfo, tier: str, t: _Tier, ord0: int, attr_cols: list[str]
                ) -> tuple[pa.Table, list[str] | None]:
    n = len(t.rows)
    id0 = batch.alloc_ids(n)
    cols: dict[str, list] = {
        "id": list(range(id0, id0 + n)), "doc": [info.doc] * n,
        "t_start": [r.start for r in t.rows], "t_end": [r.end for r in t.rows],
        "ord": list(range(ord0, ord0 + n)), "label": [r.label for r in t.rows]}
    for c in attr_cols:
        cols[c] = [r.attrs.get(c) for r in t.rows]
    classes = None
    if tier in WORD_TIERS:
        al = align_forms(info.text, [r.label for r in t.rows])
        cols["start"] = (al.start + info.base).tolist()
        cols["end"] = (al.end + info.base).tolist()
        cols["align"] = al.cls
        cols["align_score"] = al.score.tolist()
        cols["line"] = [r.line for r in t.rows]
        classes = al.cls
    else:
        cols["start"] = pa.nulls(n, pa.int64())
        cols["end"] = pa.nulls(n, pa.int64())
    return pa.table(cols), classes
