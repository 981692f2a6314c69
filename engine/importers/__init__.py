"""Importers: one module per input format, each with ``FORMAT`` and ``import_files``."""
from engine.importers import conllu

IMPORTERS = {conllu.FORMAT: conllu}

#: File endings that name a format when --format is not given.
SUFFIXES = {".conllu": conllu.FORMAT, ".conll": conllu.FORMAT}
