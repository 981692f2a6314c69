"""Time-aligned tiers in (format ``tiers``): one layer per tier, with times in seconds.

A table with a header row (TSV, or CSV by the ``.csv`` ending): required columns
``doc, tier, start, end, label``, optional ``speaker`` and any attribute columns (numbers
kept as numbers: :func:`engine.importers.tabular.typed_column`).
Every tier becomes a layer named after it (``--prefix P``: ``P.tier``). The ``words``
tier is aligned by characters to the document's primary text (:mod:`engine.align`)
and becomes the bridge between text and time; the other tiers (phones, pauses,
events) take their characters from the words they fall in or between, and the text
layers already stored take their time spans from the words they cover.

Rows are read and checked column-wise (pyarrow, numpy); only when a check fails are
the rows concerned gone through one by one, so the message is the row reader's,
with the first bad row's file:line.
"""
from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from engine.align.anchor import (SENTENCE_LAYER, TIME_WORDS, fill_new_rows, finalise_new_layer,
                                 times_onto_stored_layers)
from engine.align.report import check_alignment
from engine.align.sequence import align_forms
from engine.errors import StrataError
from engine.importers.base import ImportOptions, ImportReport, sha256_of
from engine.importers.stored import docs_with_rows, next_ord
from engine.importers.tabular import (Columns, parse_time, read_columns, read_table, seconds_text, times_fast,
                                      time_unit, typed_column)
from engine.importers.word_tiers import SpeakerPattern, choose, layer_name, speaker_tiers
from engine.store import Batch, DocInfo

FORMAT = "tiers"
REQUIRED = ["doc", "tier", "start", "end", "label"]
ALLOWED_RESERVED = {"start", "end", "doc"}


@dataclass
class _Rows:
    """All rows of all files of one import, column-wise, in file order."""
    paths: list[Path]
    file: np.ndarray        # index into paths
    line: np.ndarray
    doc: pa.Array           # names, stripped
    tier: pa.Array
    start: np.ndarray       # seconds
    end: np.ndarray
    label: pa.Array
    attrs: dict[str, pa.Array]   # "" read as null

    def place(self, i: int) -> dict:
        return {"file": str(self.paths[self.file[i]]), "line": int(self.line[i])}


def _check_rows_one_by_one(path: Path, unit: str) -> None:
    """The row reader's checks in file order: raises at the first bad row."""
    _, rows = read_table(path, REQUIRED, allowed_reserved=ALLOWED_RESERVED)
    for line, r in rows:
        start = parse_time(r["start"], unit, path, line, "start")
        end = parse_time(r["end"], unit, path, line, "end")
        if end < start:
            raise StrataError(f"end {r['end']} is before start {r['start']}", file=str(path), line=line)
        if not r["doc"].strip() or not r["tier"].strip():
            raise StrataError("doc and tier must not be empty", file=str(path), line=line)


def _times(cols: Columns, path: Path, unit: str) -> tuple[np.ndarray, np.ndarray, pa.Array, pa.Array]:
    """Start, end, doc and tier of every row, checked; a failure is reported by the row reader."""
    start = times_fast(cols.table.column("start"), unit)
    end = times_fast(cols.table.column("end"), unit)
    doc = pc.utf8_trim_whitespace(cols.table.column("doc").combine_chunks())
    tier = pc.utf8_trim_whitespace(cols.table.column("tier").combine_chunks())
    ok = start is not None and end is not None
    if ok:
        empty = pc.or_(pc.equal(doc, ""), pc.equal(tier, ""))
        ok = not np.any(end < start) and not pc.any(empty).as_py()
    if ok:
        return start, end, doc, tier
    _check_rows_one_by_one(path, unit)
    # the row reader accepts what the column reader refused (e.g. spaces around a number)
    lines = cols.lines
    start = np.array([parse_time(v, unit, path, int(n), "start")
                      for v, n in zip(cols.table.column("start").to_pylist(), lines)], dtype=np.int64)
    end = np.array([parse_time(v, unit, path, int(n), "end")
                    for v, n in zip(cols.table.column("end").to_pylist(), lines)], dtype=np.int64)
    return start, end, doc, tier


def _read(paths: list[Path], unit: str) -> _Rows:
    files, lines, docs, tiers, starts, ends, labels = [], [], [], [], [], [], []
    attr_parts: list[dict[str, pa.Array]] = []
    attr_cols: list[str] = []
    for i, path in enumerate(paths):
        cols = read_columns(path, REQUIRED, ALLOWED_RESERVED)
        start, end, doc, tier = _times(cols, path, unit)
        files.append(np.full(cols.num_rows, i, dtype=np.int32))
        lines.append(cols.lines)
        docs.append(doc)
        tiers.append(tier)
        starts.append(start)
        ends.append(end)
        labels.append(cols.table.column("label").combine_chunks())
        part = {}
        for c in cols.header:
            if c not in REQUIRED:
                col = cols.table.column(c).combine_chunks()
                part[c] = pc.if_else(pc.equal(col, ""), pa.scalar(None, pa.string()), col)
                if c not in attr_cols:
                    attr_cols.append(c)
        attr_parts.append(part)
    n_of = [len(x) for x in lines]
    attrs = {c: pa.concat_arrays([p.get(c, pa.nulls(n, pa.string())) for p, n in zip(attr_parts, n_of)])
             for c in attr_cols}
    # numbers stay numbers (syllable counts, confidences); a speaker is a name, "1" or not
    attrs = {c: a if c == "speaker" else typed_column(a) for c, a in attrs.items()}
    return _Rows(paths, np.concatenate(files), np.concatenate(lines), pa.concat_arrays(docs),
                 pa.concat_arrays(tiers), np.concatenate(starts), np.concatenate(ends),
                 pa.concat_arrays(labels), attrs)


def _codes(values: pa.Array) -> tuple[np.ndarray, list]:
    """Codes numbered by first appearance (null is a value of its own) and the values in that order."""
    enc = pc.dictionary_encode(values, null_encoding="encode")
    return enc.indices.to_numpy(zero_copy_only=False).astype(np.int64), enc.dictionary.to_pylist()


def _overlap_message(rows: _Rows, doc: str, tier: str, a: int, b: int) -> StrataError:
    return StrataError(f"{tier!r} rows overlap in document {doc!r}: {seconds_text(rows.start[b])}-"
                       f"{seconds_text(rows.end[b])} s starts before {seconds_text(rows.start[a])}-"
                       f"{seconds_text(rows.end[a])} s (line {rows.line[a]}) ends; a tier may not "
                       "overlap itself", **rows.place(b))


def _first_overlap(rows: _Rows, idx: np.ndarray, doc: str, tier_names: list, tier: np.ndarray,
                   speaker: np.ndarray) -> StrataError:
    """The overlap the row-by-row check meets first in one document (``idx``: its rows in file order):
    tiers, then speakers, in order of first appearance; rows by (start, end)."""
    tiers_here = _codes(pa.array(tier[idx]))[0]
    for t in range(int(tiers_here.max()) + 1):
        rows_t = idx[tiers_here == t]
        speakers_here = _codes(pa.array(speaker[rows_t]))[0]
        for s in range(int(speakers_here.max()) + 1):
            grp = rows_t[speakers_here == s]
            grp = grp[np.lexsort((rows.end[grp], rows.start[grp]))]
            bad = np.flatnonzero(rows.start[grp[1:]] < rows.end[grp[:-1]])
            if bad.size:
                k = int(bad[0])
                return _overlap_message(rows, doc, tier_names[tier[grp[k]]], int(grp[k]), int(grp[k + 1]))
    raise AssertionError("no overlap found where the column check saw one")


def import_files(batch: Batch, paths: list[Path], options: ImportOptions) -> ImportReport:
    """Import tier tables; raises StrataError (file:line) on the first bad row."""
    report = ImportReport()
    unit = time_unit(options.extra)
    paths = [Path(p) for p in paths]
    for path in paths:
        report.files.append(str(path))
        batch.add_source(str(path), sha256_of(path))
    rows = _read(paths, unit)
    return import_rows(batch, rows, options, report)


def import_rows(batch: Batch, rows: _Rows, options: ImportOptions, report: ImportReport) -> ImportReport:
    """Import time-aligned rows read from any tier format: the words tier chosen and aligned to
    the text, every tier a layer, the stored text layers given times."""
    rows, word_tiers = _speakers(rows, options)
    n = len(rows.line)
    doc_code, doc_names = _codes(rows.doc)
    tier_code, tier_names = _codes(rows.tier)
    speaker_code = _codes(rows.attrs["speaker"])[0] if "speaker" in rows.attrs else np.zeros(n, np.int64)

    # rows by document (in order of first appearance), tier, then (start, end, file order)
    group = doc_code * len(tier_names) + tier_code
    order = _sort_by_time(group, rows.start, rows.end)
    d_sorted = doc_code[order]
    t_sorted = tier_code[order]
    doc_bounds = np.searchsorted(d_sorted, np.arange(len(doc_names) + 1))
    # overlaps per (document, tier, speaker): sort by speaker as well, then compare neighbours
    n_speakers = int(speaker_code.max()) + 1 if n else 1
    by_speaker = _sort_by_time(group * n_speakers + speaker_code, rows.start, rows.end)
    key = (group * n_speakers + speaker_code)[by_speaker]
    s_start, s_end = rows.start[by_speaker], rows.end[by_speaker]
    overlap = (key[1:] == key[:-1]) & (s_start[1:] < s_end[:-1])
    docs_overlapping = set((key[1:][overlap] // (n_speakers * len(tier_names))).tolist())
    last_end = np.maximum.reduceat(rows.end[order], doc_bounds[:-1]) if n else np.zeros(0, np.int64)

    durations = _known_durations(batch)
    layer_of = {t: options.layer(layer_name(t)) for t in tier_names}
    stored = {layer: docs_with_rows(batch.store, layer) for layer in layer_of.values()}
    infos: list[DocInfo] = []
    for d, name in enumerate(doc_names):
        info = batch.existing_document(name)
        if info is None:
            first = int(np.flatnonzero(doc_code == d)[0])
            raise StrataError(f"unknown document {name!r}: import its text first (CoNLL-U or a transcript)",
                              **rows.place(first))
        idx = order[doc_bounds[d]:doc_bounds[d + 1]]
        if d in docs_overlapping:
            raise _first_overlap(rows, np.sort(idx), name, tier_names, tier_code, speaker_code)
        known = durations.get(info.doc)
        if known is not None and last_end[d] > known:
            raise _past_the_end(rows, np.sort(idx), name, known, tier_code)
        batch.set_duration(info.doc, max(int(last_end[d]), known or 0))
        here = np.unique(t_sorted[doc_bounds[d]:doc_bounds[d + 1]])
        for t in sorted(here.tolist()):             # tiers in the order the rows name them first
            if info.doc in stored[layer_of[tier_names[t]]]:
                first = idx[int(np.searchsorted(t_sorted[doc_bounds[d]:doc_bounds[d + 1]], t))]
                raise StrataError(f"document {name!r} already has a {layer_of[tier_names[t]]!r} layer; import a "
                                  "second set of tiers with --prefix NAME", **rows.place(int(first)))
        infos.append(info)
        report.add("documents")
    if word_tiers is None:
        word_tiers = _choose_words(batch, rows, tier_code, tier_names, infos, options, report)

    ords: dict[str, int] = {}
    alignments: dict[str, list] = {}
    unfinished: list[str] = []
    for t in sorted(range(len(tier_names)), key=lambda t: (tier_names[t] not in word_tiers, tier_names[t])):
        tier, layer = tier_names[t], layer_of[tier_names[t]]
        words = tier in word_tiers
        ords[layer] = next_ord(batch.store, layer)
        batch.declare_layer(layer, "sequence" if words else "span",
                            {"format": FORMAT, "time": True, "time_axis": True, TIME_WORDS: words, "tier": tier,
                             "sentence_layer": SENTENCE_LAYER, "separate": False})
        sel = order[t_sorted == t]          # still by document, then (start, end)
        table, parts = _tier_table(batch, rows, sel, doc_code[sel], infos, words, ords[layer])
        ords[layer] += table.num_rows
        # characters and references filled before the one write (the words tier is written
        # first, so the other tiers find it staged as their bridge)
        filled = fill_new_rows(batch, table, exclude={layer} if words else set())
        if filled is None:
            unfinished.append(layer)
        batch.write_nodes(layer, "sequence" if words else "span", table if filled is None else filled)
        if parts:
            alignments[layer] = parts
        report.add(f"{tier} rows", table.num_rows)
    accept = bool(options.extra.get("accept_poor_alignment"))
    for layer, parts in alignments.items():
        warning = check_alignment(layer, parts, accept)
        if warning:
            report.warnings.append(warning)
    touched = {info.doc for info in infos}

    def finalise(b: Batch) -> None:
        for layer in unfinished:
            finalise_new_layer(b, layer, time_axis=True)
        times_onto_stored_layers(b, touched, skip=set(ords))
    batch.on_commit(finalise)
    return report


def _speakers(rows: _Rows, options: ImportOptions) -> tuple[_Rows, set[str] | None]:
    """With a speaker pattern (``--words-tier '* - words'``): the rows with each speaker's
    tiers renamed to their kind and ``speaker`` set, and the words tiers' name; else the rows
    as they are and None (:func:`_choose_words` decides)."""
    choice = options.extra.get("words_tier")
    if choice is None or "*" not in choice:
        return rows, None
    codes, names = _codes(rows.tier)
    chosen, _ = choose(choice, names, {}, [], False)
    mapping = speaker_tiers(names, SpeakerPattern.parse(choice))
    take = pa.array(codes)
    tier = pa.array([mapping.get(t, (None, t))[1] for t in names], pa.string()).take(take)
    who = pa.array([mapping.get(t, (None, None))[0] for t in names], pa.string()).take(take)
    given = rows.attrs.get("speaker")
    attrs = {**rows.attrs, "speaker": who if given is None else pc.coalesce(given, who)}
    return (_Rows(rows.paths, rows.file, rows.line, rows.doc, tier, rows.start, rows.end, rows.label, attrs),
            {mapping[t][1] for t in chosen})


def _choose_words(batch: Batch, rows: _Rows, tier_code: np.ndarray, tier_names: list[str], infos: list[DocInfo],
                  options: ImportOptions, report: ImportReport) -> set[str]:
    """The words tier as ``--words-tier`` names it, or the one whose labels are found best in
    the documents' text (:func:`engine.importers.word_tiers.choose`), said in a note."""
    bridge = any(batch.store.layer_props(layer).get(TIME_WORDS) for layer in batch.store.layers())
    if options.extra.get("time_only"):          # speaker turns: never words, placed through stored ones
        if not bridge:
            raise StrataError(f"{', '.join(tier_names)} take their place in the text from words with times: "
                              "import those first (a CTM, TextGrid or tier table of the words)")
        return set()
    labels = {name: rows.label.filter(pa.array(tier_code == k)) for k, name in enumerate(tier_names)}
    chosen, note = choose(options.extra.get("words_tier"), tier_names, labels, [info.text for info in infos],
                          bridge)
    if note:
        report.notes.append(note)
    return chosen


def _sort_by_time(group: np.ndarray, start: np.ndarray, end: np.ndarray) -> np.ndarray:
    """Row order by ``(group, start, end)``, ties in file order: ``np.lexsort`` of those keys.

    Tier files list each tier's rows in time order as a rule, so a stable sort by the
    integer group alone usually gives that order already (checked; else the full lexsort).
    """
    order = np.argsort(group, kind="stable")
    g, s, e = group[order], start[order], end[order]
    same = g[1:] == g[:-1]
    if not (same & ((s[1:] < s[:-1]) | ((s[1:] == s[:-1]) & (e[1:] < e[:-1])))).any():
        return order
    return np.lexsort((end, start, group))


def _past_the_end(rows: _Rows, idx: np.ndarray, name: str, known: float, tier_code: np.ndarray) -> StrataError:
    """The row with the latest end, as the row-by-row check picks it (first tier met, then by time)."""
    tiers_here, _ = _codes(pa.array(tier_code[idx]))
    pick = idx[np.lexsort((rows.line[idx], rows.end[idx], rows.start[idx], tiers_here))]
    latest = pick[rows.end[pick] == rows.end[pick].max()][0]
    return StrataError(f"time {seconds_text(rows.end[latest])} s is past the end of the recording of {name!r} "
                       f"({seconds_text(known)} s, known from an earlier import)", **rows.place(int(latest)))


def _known_durations(batch: Batch) -> dict[int, int]:
    """Recording lengths (µs) known from earlier imports, read once (a catalog query per document costs ~30 ms)."""
    return batch.store.durations()


def _tier_table(batch: Batch, rows: _Rows, sel: np.ndarray, docs: np.ndarray, infos: list[DocInfo],
                words: bool, ord0: int) -> tuple[pa.Table, list[tuple]]:
    """One tier's rows of all documents (``sel``, grouped by document) as a node table; for the
    words tier also the per-document parts the alignment check reads."""
    n = len(sel)
    id0 = batch.alloc_ids(n)
    take = pa.array(sel)
    doc_ids = np.array([info.doc for info in infos], dtype=np.int64)[docs]
    label = rows.label.take(take)
    cols: dict[str, object] = {
        "id": np.arange(id0, id0 + n, dtype=np.int64), "doc": doc_ids,
        "t_start": rows.start[sel], "t_end": rows.end[sel],
        "ord": np.arange(ord0, ord0 + n, dtype=np.int64), "label": label}
    for c, values in rows.attrs.items():
        cols[c] = values.take(take)
    spans: list[tuple[int, int, list[str]]] = []
    if words:
        bounds = np.flatnonzero(np.diff(docs)) + 1
        cuts = np.concatenate([[0], bounds, [n]]).astype(np.int64)
        start = np.empty(n, dtype=np.int64)
        end = np.empty(n, dtype=np.int64)
        score = np.empty(n, dtype=np.float64)
        cls: list[str] = []
        for a, b in zip(cuts[:-1], cuts[1:]):
            info = infos[docs[a]]
            al = align_forms(info.text, label.slice(a, b - a).to_pylist())
            start[a:b] = al.start + info.base
            end[a:b] = al.end + info.base
            score[a:b] = al.score
            cls += al.cls
            spans.append((int(a), int(b), al.cls))
        cols["start"], cols["end"] = start, end
        cols["align"] = pa.array(cls, pa.string())
        cols["align_score"] = score
        cols["line"] = rows.line[sel]
    else:
        cols["start"] = pa.nulls(n, pa.int64())
        cols["end"] = pa.nulls(n, pa.int64())
    table = pa.table(cols)
    parts = [(infos[docs[a]], table.slice(a, b - a), c) for a, b, c in spans]
    return table, parts
