"""Primary transcripts in (format ``transcript``): a plain-text file is a document's text.

For recordings that have no CoNLL-U: the file's text, taken as it is (non-speech
events in braces such as ``{laugh}`` stay in it), becomes the primary text that
the other layers align to. The document is named by ``--doc`` or the file stem.
Only the line ends are made uniform (``\\r\\n`` -> ``\\n``) and one final line end
is dropped, as editors add it.
"""
from __future__ import annotations

from pathlib import Path

from engine.errors import StrataError
from engine.importers.base import ImportOptions, ImportReport, refuse_nul_in, sha256_of, without_bom
from engine.store import Batch

FORMAT = "transcript"


def read_text(path: Path) -> str:
    try:
        raw = path.read_bytes()
    except OSError as e:
        raise StrataError(f"cannot read: {e.strerror}", file=str(path)) from None
    raw = without_bom(raw)
    refuse_nul_in(raw, path)
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as e:
        line = raw[:e.start].count(b"\n") + 1
        raise StrataError("invalid UTF-8", file=str(path), line=line) from None
    text = text.replace("\r\n", "\n")
    if text.endswith("\n"):
        text = text[:-1]
    return text


def import_files(batch: Batch, paths: list[Path], options: ImportOptions) -> ImportReport:
    """Add one document per file (or check that an existing one has the same text)."""
    report = ImportReport()
    name_opt = options.extra.get("doc")
    if name_opt and len(paths) > 1:
        raise StrataError("--doc names one document: import one transcript at a time with it")
    for path in map(Path, paths):
        report.files.append(str(path))
        batch.add_source(str(path), sha256_of(path))
        name = name_opt or path.stem
        text = read_text(path)
        if not text.strip():
            raise StrataError("the transcript is empty", file=str(path), line=1)
        existing = batch.existing_document(name)
        if existing is None:
            batch.add_document(name, text, {"source": "transcript"})
            report.add("documents")
        elif existing.text != text:
            at = next((i for i, (a, b) in enumerate(zip(existing.text, text)) if a != b),
                      min(len(existing.text), len(text)))
            raise StrataError(f"document {name!r} is already in the corpus with a different text (first "
                              f"difference at character {at}); name this one with --doc NAME",
                              file=str(path), line=text[:at].count("\n") + 1)
        else:
            report.add("documents already present")
    return report
