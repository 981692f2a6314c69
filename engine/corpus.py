"""The Python face of strata.

>>> from engine import Corpus                                  # doctest: +SKIP
>>> c = Corpus.create("calls.corpus")                           # doctest: +SKIP
>>> c.import_files(["calls.conllu"])                            # doctest: +SKIP
>>> hits = c.query('find t = token(upos = "VERB") count per t.lemma')   # doctest: +SKIP
>>> hits.to_pandas()                                            # doctest: +SKIP
"""
from __future__ import annotations

import io
import os
from pathlib import Path
from typing import Iterable

from engine.align.anchor import times_onto_new_layers
from engine.errors import StrataError
from engine.exporters import EXPORTERS
from engine.importers import IMPORTERS, NAMES, SUFFIXES
from engine.importers.base import ImportOptions, ImportReport, import_memory_pool
from engine.store import Store


class Corpus:
    """A corpus directory with its layers; open it, import into it, query it."""

    def __init__(self, store: Store) -> None:
        self.store = store
        self._con = None      # the query connection, with its views; made again after an import
        self._seen = None     # the catalog's state when that connection was made (see _query_connection)

    @classmethod
    def create(cls, path: str | os.PathLike) -> "Corpus":
        return cls(Store.create(path))

    @classmethod
    def open(cls, path: str | os.PathLike) -> "Corpus":
        return cls(Store.open(path))

    @property
    def path(self) -> Path:
        return self.store.root

    # -- import / export -------------------------------------------------------------
    def import_files(self, paths: Iterable[str | os.PathLike], format: str | None = None,
                     prefix: str = "", lenient: bool = False, progress: bool = True, wait: float = 0.0,
                     **extra) -> ImportReport:
        """Import files of one format, all or nothing; ``wait``: seconds to wait for another
        writer of the corpus to finish (none: refused at once)."""
        paths = [Path(p) for p in paths]
        if not paths:
            raise StrataError("no files to import")
        for p in paths:
            if not p.is_file():
                raise StrataError("no such file", file=str(p))
        fmt = format or _guess_format(paths)
        module = IMPORTERS.get(fmt)
        if module is None:
            raise StrataError(f"unknown format {fmt!r}; known: {', '.join(sorted(IMPORTERS))}")
        options = ImportOptions(prefix=prefix, lenient=lenient, progress=progress, extra=extra)
        self._forget_connection()
        with import_memory_pool(), self.store.batch(fmt, {"prefix": prefix, "lenient": lenient, **extra},
                                                     wait=wait) as batch:
            report = module.import_files(batch, paths, options)
            if extra.get("recording"):
                _name_the_recording(batch, str(extra["recording"]))
            # last of the finalisers: new text layers take times from time words already stored
            batch.on_commit(times_onto_new_layers)
            return report

    def export(self, format: str = "conllu", out: str | os.PathLike | None = None, prefix: str = "") -> str | None:
        """Write the corpus in ``format`` to ``out`` (a path), or return it as a string."""
        module = EXPORTERS.get(format)
        if module is None:
            raise StrataError(f"unknown export format {format!r}; known: {', '.join(sorted(EXPORTERS))}")
        if out is None:
            buf = io.StringIO()
            module.export(self.store, buf, prefix)
            return buf.getvalue()
        from engine.output_files import replaced_when_done
        with replaced_when_done(out, "export") as tmp, open(tmp, "w", encoding="utf-8", newline="") as f:
            module.export(self.store, f, prefix)
        return None

    # -- looking -----------------------------------------------------------------------
    def info(self) -> dict:
        """Documents, layers with node/edge counts and anchor coverage."""
        con = self.store.connect()
        layers = []
        for name, layer in self.store.layers().items():
            row = {"layer": name, "kind": layer.kind, "rows": layer.rows}
            if layer.kind != "edges" and layer.rows:
                chars, timed = con.execute(
                    f'SELECT count(*) FILTER (WHERE start IS NOT NULL), count(*) FILTER (WHERE t_start IS NOT NULL) '
                    f'FROM "{name}"').fetchone()
                row["char_anchored"] = chars / layer.rows
                row["time_anchored"] = timed / layer.rows
            row["attrs"] = len(layer.attrs)
            layers.append(row)
        docs = con.execute("SELECT count(*), coalesce(sum(length), 0) FROM documents").fetchone()
        con.close()
        return {"path": str(self.path), "documents": docs[0], "characters": docs[1], "layers": layers}

    def connect(self):
        """A DuckDB connection with one view per layer (for your own SQL)."""
        return self.store.connect()

    def _query_connection(self):
        """One connection for all queries (making the views costs tens of milliseconds), made
        again when the catalog has changed since: a long-lived Corpus answers from the newest
        committed state on its next query, never from Parquet parts a writer has retired."""
        seen = self.store.catalog_state()
        if self._con is not None and seen != self._seen:
            self._forget_connection()
            self.store._forget_answers()
        if self._con is None:
            self._seen = seen
            self._con = self.store.connect()
        return self._con

    def _forget_connection(self) -> None:
        if self._con is not None:
            self._con.close()
            self._con = None

    def query(self, text: str, *, limit: int | None = None, context: int = 5, cross_sentences: bool = False,
              timeout: float | None = None, memory: str | None = None):
        """Run a query; returns a hit table (:class:`engine.results.Hits`).  ``timeout`` in
        seconds, ``memory`` a size (``"2GB"``; default half the machine's memory)."""
        from engine.execute import run_query
        return run_query(self._query_connection(), self.store, text, limit=limit, context=context,
                         cross_sentences=cross_sentences, timeout=timeout, memory=memory)

    def explain(self, text: str) -> str:
        from engine.execute import compile_query
        compiled = compile_query(text, self.store)
        return compiled.explain_text(self._query_connection())


def _name_the_recording(batch, value: str) -> None:
    """``--recording``: the recording of the one document the imported files are about."""
    from engine.importers.documents import recording_path
    docs = sorted(batch.touched_documents())
    if len(docs) != 1:
        names = {d.doc: d.name for d in batch.store.documents()} | {d.doc: d.name for d in batch._docs}
        about = ", ".join(repr(names.get(d, d)) for d in docs[:5]) + (" ..." if len(docs) > 5 else "")
        raise StrataError(f"--recording names the recording of one document, and these files are about "
                          f"{len(docs)}" + (f" ({about})" if docs else "") + ": give each document its "
                          "recording in a documents.tsv manifest (columns doc, recording)")
    batch.set_doc_attr(docs[0], "recording", recording_path(value, Path.cwd()))


def _guess_format(paths: list[Path]) -> str:
    fmts = set()
    for p in paths:
        name = p.name.lower()
        fmt = NAMES.get(name) or next((f for suf, f in sorted(SUFFIXES.items(), key=lambda kv: -len(kv[0]))
                                       if name.endswith(suf)), None)
        if fmt is None:
            raise StrataError("cannot tell the format from the file name; give --format", file=str(p))
        fmts.add(fmt)
    if len(fmts) > 1:
        raise StrataError(f"the files are of several formats ({', '.join(sorted(fmts))}); import them one format at a time")
    return fmts.pop()
