"""strata's corpus engine: the store, importers, exporters, alignment, execution, CLI.

``Corpus`` and ``StrataError`` are loaded on first use (PEP 562), so that ``strata`` can take
over Ctrl-C before the heavy imports (DuckDB, pyarrow) begin: an interrupt during start-up
then ends with one line and exit 130 instead of a traceback from deep inside an import.
"""
from __future__ import annotations

__all__ = ["Corpus", "StrataError"]


def __getattr__(name: str):
    if name == "Corpus":
        from engine.corpus import Corpus
        return Corpus
    if name == "StrataError":
        from engine.errors import StrataError
        return StrataError
    raise AttributeError(f"module 'engine' has no attribute {name!r}")
