"""Exporters: one module per output format, each with ``FORMAT`` and ``export``."""
from engine.exporters import conllu

EXPORTERS = {conllu.FORMAT: conllu}
