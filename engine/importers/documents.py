"""A manifest of documents (format ``documents``: ``documents.tsv``, ``*.documents.tsv`` or
``.csv``): one row per document already in the corpus, with its recording and whatever else
a project keeps about it.

Columns: ``doc`` (required: a document of the corpus), ``recording`` (the audio or video file:
a path relative to the manifest's folder is made absolute, so the hit table's ``recording``
opens from anywhere), ``speakers``, and any other column. Every column but ``doc`` becomes a
document attribute, asked for in queries as ``doc.recording``, ``doc.speakers``, ... A value
given again replaces the one stored; an empty cell leaves it as it is.

The manifest names documents that other files brought (CoNLL-U, transcripts, tiers): a name
the corpus does not have is refused at its line, with the nearest names it does have.
"""
from __future__ import annotations

import difflib
import re
from pathlib import Path

from engine.errors import StrataError
from engine.importers.base import ImportOptions, ImportReport, sha256_of
from engine.importers.tabular import read_table
from engine.store import Batch

FORMAT = "documents"
REQUIRED = ["doc"]
#: Columns of the ``doc`` view that a manifest may not set.
TAKEN = {"name"}
_NAME = re.compile(r"[A-Za-z_][A-Za-z0-9_]*")


def recording_path(value: str, folder: Path) -> str:
    """``value`` as an absolute path: relative to ``folder``, ``~`` expanded; a URL as it is.

    >>> recording_path("audio/a.wav", Path("/data/project"))
    '/data/project/audio/a.wav'
    >>> recording_path("https://example.org/a.wav", Path("/x"))
    'https://example.org/a.wav'
    """
    if re.match(r"[A-Za-z][A-Za-z0-9+.-]*://", value):
        return value
    path = Path(value).expanduser()
    return str(path if path.is_absolute() else (folder / path).absolute())


def import_files(batch: Batch, paths: list[Path], options: ImportOptions) -> ImportReport:
    report = ImportReport()
    seen: dict[str, tuple[Path, int]] = {}
    missing: list[str] = []
    for path in map(Path, paths):
        report.files.append(str(path))
        batch.add_source(str(path), sha256_of(path))
        header, rows = read_table(path, REQUIRED, allowed_reserved={"doc"})
        for column in header:
            if column != "doc" and (not _NAME.fullmatch(column) or column in TAKEN):
                raise StrataError(f"column {column!r} cannot be a document attribute: use letters, digits "
                                  "and _ (not starting with a digit)" + (", and not 'name', which is the "
                                                                         "document's own" if column in TAKEN else ""),
                                  file=str(path), line=1)
        folder = path.parent.absolute()
        for line, row in rows:
            name = row["doc"].strip()
            if not name:
                raise StrataError("doc must not be empty", file=str(path), line=line)
            if name in seen:
                first = seen[name]
                raise StrataError(f"document {name!r} has a row already ({first[0].name}:{first[1]})",
                                  file=str(path), line=line)
            seen[name] = (path, line)
            info = batch.existing_document(name)
            if info is None:
                known = [d.name for d in batch.store.documents()]
                near = difflib.get_close_matches(name, known, n=3)
                raise StrataError(f"unknown document {name!r}: a manifest describes documents other files "
                                  "brought" + (f"; did you mean {', '.join(map(repr, near))}?" if near else ""),
                                  file=str(path), line=line)
            for key, value in row.items():
                value = value.strip()
                if key == "doc" or not value:
                    continue
                if key == "recording":
                    value = recording_path(value, folder)
                    if "://" not in value and not Path(value).exists():
                        missing.append(value)
                batch.set_doc_attr(info.doc, key, value)
            report.add("documents")
    if missing:
        report.notes.append(f"{len(missing)} recording(s) not found (stored as given, for when they are there): "
                            + ", ".join(missing[:3]) + (" ..." if len(missing) > 3 else ""))
    return report
