"""``strata demo``: build the invented demo corpus from corpora_demo/data and show it off.

Each file in ``data/`` is imported with the importer its tool's format needs, in the
order a project would take them: the text-defining CoNLL-U first, then the layers
that align onto it. Then the showcase queries run, each with a one-line explanation.
"""
from __future__ import annotations

import tempfile
from pathlib import Path

from rich.console import Console

DATA = Path(__file__).resolve().parent / "data"

#: (file, format, options) in import order; files that are absent are skipped.
IMPORTS: list[tuple[str, str, dict]] = [
    ("calls.conllu", "conllu", {}),
    ("calls.trees", "brackets", {"layer": "tree"}),
    ("calls.tiers.tsv", "tiers", {}),
    ("calls.spans.tsv", "spans", {"anchor": "chars", "layer": "disfluency"}),
]

#: (explanation, query) pairs shown by the demo.
SHOWCASE: list[tuple[str, str]] = [
    ("Pronoun subjects and the verbs they depend on, counted by verb lemma.",
     'find s = token(upos = "PRON", deprel = "nsubj"), v = token(upos = "VERB")\n'
     "where s depends on v\ncount by v.lemma"),
]


def build(corpus: Path | None, console: Console) -> "Corpus":
    from engine import Corpus
    from engine.importers import IMPORTERS
    if corpus is None:
        corpus = Path(tempfile.mkdtemp(prefix="strata-demo-")) / "calls"
    c = Corpus.create(corpus)
    for name, fmt, options in IMPORTS:
        path = DATA / name
        if not path.exists() or fmt not in IMPORTERS:
            continue
        report = c.import_files([path], format=fmt, progress=False, **options)
        counts = ", ".join(f"{v} {k}" for k, v in report.counts.items())
        console.print(f"imported {name} ({fmt}): {counts}")
    return c


def run_demo(corpus: Path | None, console: Console) -> None:
    from engine.cli import print_info
    c = build(corpus, console)
    print_info(c.info())
    try:
        import engine.execute  # noqa: F401
    except ImportError:
        return
    for explanation, text in SHOWCASE:
        console.print()
        console.rule(explanation)
        console.print(text, highlight=False)
        hits = c.query(text, limit=20)
        console.print(hits.render_table(width=console.width).replace("[", "\\["), soft_wrap=True)
