"""strata's corpus engine: the store, importers, exporters, alignment, execution, CLI."""
from engine.corpus import Corpus
from engine.errors import StrataError

__all__ = ["Corpus", "StrataError"]
