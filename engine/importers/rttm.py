"""Speaker turns in the NIST RTTM layout (format ``rttm``, ending ``.rttm``): ten fields a line,
``type file channel start duration ortho subtype speaker confidence lookahead``, times in
seconds, ``<NA>`` where a field does not apply (the layout of the NIST Rich Transcription
evaluation plan, from memory; the tenth field is missing in older files, so nine are taken too).

The ``SPEAKER`` lines become the layer ``turns`` (or ``--layer NAME``) with the attribute
``speaker``; the other types are left out.  Turns take their characters from the words with
times already stored, so the sentences and words inside a turn can be asked for by speaker.
"""
from __future__ import annotations

from pathlib import Path

import pyarrow as pa
import pyarrow.compute as pc

from engine.errors import StrataError
from engine.importers.base import ImportOptions, ImportReport, sha256_of
from engine.importers.ctm import recordings_as_documents, rows_of
from engine.importers.fields import read_fields, times
from engine.importers.tiers import import_rows
from engine.store import Batch

FORMAT = "rttm"
LAYOUT = "an RTTM line (type, file, channel, start, duration, ortho, subtype, speaker, confidence, lookahead)"


def import_files(batch: Batch, paths: list[Path], options: ImportOptions) -> ImportReport:
    report = ImportReport()
    paths = [Path(p) for p in paths]
    layer = options.extra.get("layer") or "turns"
    parts = []
    for i, path in enumerate(paths):
        report.files.append(str(path))
        batch.add_source(str(path), sha256_of(path))
        cols, lines = read_fields(path, 9, 10, LAYOUT)
        turn = pc.equal(cols[0], "SPEAKER")
        if not pc.any(turn).as_py():
            raise StrataError("no SPEAKER lines: an RTTM file of speaker turns was expected", file=str(path),
                              line=int(lines[0]))
        mask = turn.to_numpy(zero_copy_only=False)
        cols = [c.filter(turn) for c in cols]
        lines = lines[mask]
        start = times(cols[3], lines, path, "start")
        duration = times(cols[4], lines, path, "duration")
        doc = recordings_as_documents(cols[1], lines, path, options.extra.get("doc"))
        speaker = cols[7]
        parts.append((i, lines, doc, start, start + duration, speaker,
                      {"speaker": speaker, "channel": cols[2],
                       "confidence": pc.if_else(pc.equal(cols[8], "<NA>"), pa.scalar(None, pa.string()), cols[8])}))
    rows = rows_of(paths, parts, layer)
    inner = ImportOptions(options.prefix, options.lenient, options.progress, {**options.extra, "time_only": True})
    return import_rows(batch, rows, inner, report)
