"""Importers: one module per input format, each with ``FORMAT`` and ``import_files``."""
from engine.importers import brackets, conllu, ctm, documents, rttm, spans, textgrid, tiers, transcript

IMPORTERS = {m.FORMAT: m for m in (conllu, brackets, tiers, textgrid, ctm, rttm, spans, transcript, documents)}

#: File endings that name a format when --format is not given.
SUFFIXES = {".conllu": conllu.FORMAT, ".conll": conllu.FORMAT,
            ".trees": brackets.FORMAT, ".tiers.tsv": tiers.FORMAT, ".tiers.csv": tiers.FORMAT,
            ".spans.tsv": spans.FORMAT, ".spans.csv": spans.FORMAT, ".txt": transcript.FORMAT,
            ".textgrid": textgrid.FORMAT, ".ctm": ctm.FORMAT, ".rttm": rttm.FORMAT,
            ".documents.tsv": documents.FORMAT, ".documents.csv": documents.FORMAT}
#: Whole file names that name a format.
NAMES = {"documents.tsv": documents.FORMAT, "documents.csv": documents.FORMAT}
