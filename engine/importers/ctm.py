"""Word times in the NIST CTM layout (format ``ctm``, ending ``.ctm``): one word a line,
``recording channel start duration word [confidence]``, times in seconds, comment lines
beginning with ``;;`` (the layout of the NIST scoring toolkit's documentation, from memory).

The words become the words layer (``words``, or ``--layer NAME``) of the document the
recording names (``--doc`` for a file of one recording), aligned to its text like any words
tier; channel and confidence are attributes.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.compute as pc

from engine.errors import StrataError
from engine.importers.base import ImportOptions, ImportReport, sha256_of
from engine.importers.fields import read_fields, times
from engine.importers.tiers import _Rows, import_rows
from engine.store import Batch

FORMAT = "ctm"
LAYOUT = "a CTM line (recording, channel, start, duration, word, optional confidence)"


def recordings_as_documents(cols: list[pa.Array], lines: np.ndarray, path: Path, doc: str | None) -> pa.Array:
    """The document of each line: the recording's name, or ``--doc`` for a file of one recording."""
    if doc is None:
        return cols
    names = pc.unique(cols).to_pylist()
    if len(names) > 1:
        raise StrataError(f"--doc names one document, but the file holds recordings {', '.join(names[:5])}",
                          file=str(path), line=int(lines[0]))
    return pa.array(np.full(len(cols), doc, dtype=object), pa.string())


def import_files(batch: Batch, paths: list[Path], options: ImportOptions) -> ImportReport:
    report = ImportReport()
    paths = [Path(p) for p in paths]
    layer = options.extra.get("layer") or "words"
    parts = []
    for i, path in enumerate(paths):
        report.files.append(str(path))
        batch.add_source(str(path), sha256_of(path))
        cols, lines = read_fields(path, 5, 6, LAYOUT)
        start = times(cols[2], lines, path, "start")
        duration = times(cols[3], lines, path, "duration")
        doc = recordings_as_documents(cols[0], lines, path, options.extra.get("doc"))
        parts.append((i, lines, doc, start, start + duration, cols[4], {"channel": cols[1], "confidence": cols[5]}))
    rows = rows_of(paths, parts, layer)
    inner = ImportOptions(options.prefix, options.lenient, options.progress, {**options.extra, "words_tier": layer})
    return import_rows(batch, rows, inner, report)


def rows_of(paths: list[Path], parts: list[tuple], tier: str) -> _Rows:
    """:class:`tiers._Rows` of the parts' (file, lines, doc, start, end, label, attributes)."""
    n = sum(len(p[1]) for p in parts)
    names = sorted({k for p in parts for k in p[6]})
    attrs = {k: pa.concat_arrays([p[6][k] if k in p[6] else pa.nulls(len(p[1]), pa.string()) for p in parts])
             for k in names}
    return _Rows(paths, np.concatenate([np.full(len(p[1]), p[0], np.int32) for p in parts]),
                 np.concatenate([p[1] for p in parts]).astype(np.int64),
                 pa.concat_arrays([p[2] for p in parts]), pa.array(np.full(n, tier, dtype=object), pa.string()),
                 np.concatenate([p[3] for p in parts]), np.concatenate([p[4] for p in parts]),
                 pa.concat_arrays([p[5] for p in parts]), attrs)
