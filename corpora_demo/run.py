"""``strata demo``: build the invented demo corpus from corpora_demo/data and show it off.

Each file in ``data/`` is imported with the importer its tool's format needs, in the
order a project would take them: the text-defining CoNLL-U first, then the layers
that align onto it. Then the showcase queries run, each with a one-line explanation.
"""
from __future__ import annotations

import tempfile
from pathlib import Path
from typing import TYPE_CHECKING

from rich.console import Console

if TYPE_CHECKING:
    from engine import Corpus

DATA = Path(__file__).resolve().parent / "data"
#: hit tables are shown this wide at least, so the values a query asks for are not dropped
TABLE_WIDTH = 120
#: rows of each hit table shown by the demo
SHOWN_ROWS = 20

#: (file, format, options) in import order.
IMPORTS: list[tuple[str, str, dict]] = [
    ("calls.conllu", "conllu", {}),
    ("calls.trees", "brackets", {"layer": "tree"}),
    ("calls.tiers.tsv", "tiers", {}),
    # one recording as a phonetic editor keeps it: tiers named after the speakers
    ("call04.TextGrid", "textgrid", {"words_tier": "* - spoken", "pauses_from": "sil"}),
    ("calls.spans.tsv", "spans", {"anchor": "chars", "layer": "disfluency"}),
]

#: (explanation, query) pairs shown by the demo.  Each one joins layers that came from
#: different files: that is what the demo is for.
SHOWCASE: list[tuple[str, str]] = [
    ("Silent pauses inside a turn (time tier) that end just as a subject phrase "
     "(constituency tree) begins, give or take 20 ms of aligner rounding, with the pause's "
     "start and length in seconds.",
     'find p = pauses(speaker is not missing), np = tree(label = "NP-SBJ", reading = 0)\n'
     "where p meets np give or take 20ms\n"
     "show p.start, p.duration"),
    ("Filled pauses (disfluency spans) by the speaker of their sentence (CoNLL-U comment) "
     "and the smallest constituent (tree) around them.",
     'find f = disfluency(label = "filled_pause"), c = tree(reading = 0)\n'
     "where f inside c and not c same span as f\n"
     "without d = tree where d under c and f inside d and not d same span as f\n"
     "count per f.sentence.speaker, c.category"),
    ("Restarts and their repairs: a reparandum and the repair of the same group, and the "
     "time from the end of one to the start of the other (from the spoken words' timings).",
     'find r = disfluency(label = "reparandum"), p = disfluency(label = "repair")\n'
     "where r.group = p.group and r precedes p\n"
     "show r.group, gap(r, p)"),
    ("Ambiguous sentences: the same prepositional phrase attached to the verb phrase in one "
     "tree reading and to the noun phrase in the other, with both reading numbers.",
     'find pp_v = tree(category = "PP"), vp = tree(category = "VP"),\n'
     '     pp_n = tree(category = "PP"), np = tree(category = "NP")\n'
     "where pp_v child of vp and pp_n child of np and pp_v same span as pp_n\n"
     "count per pp_v.sentence.sent_id, pp_v.text, pp_v.reading, pp_n.reading"),
    ("Third-person pronouns (words) and the previous mention of their entity (coreference), "
     "with the seconds between the two on the recording.",
     'find a = mention, p = mention, t = word(upos = "PRON", feats.Person = "3")\n'
     "where a previous mention of p and t same span as p\n"
     "show gap(a, p)"),
    ("Phones (aligner tier) of spoken words wholly inside subject phrases (tree): mean phone "
     "duration in seconds by the speaker of the sentence.",
     'find ph = phones, w = spoken, np = tree(label = "NP-SBJ", reading = 0)\n'
     "where ph inside w and w inside np\n"
     "mean(ph.duration) per np.sentence.speaker"),
    ("Silent pauses (time tier) that end at most one second before a restart begins "
     "(reparandum spans, anchored on characters and timed through their spoken words), with "
     "the pause's length and the gap in seconds.",
     'find p = pauses, r = disfluency(label = "reparandum")\n'
     "where p before r by at most 1s\n"
     "show p.duration, gap(p, r)"),
    ("Interjections (words) at most one word before a pronoun in the same sentence, as in "
     "'oh, I' or 'yes it', by the two lemmas.",
     'find i = word(upos = "INTJ"), p = word(upos = "PRON")\n'
     "where i precedes p by at most 1 word in the same sentence\n"
     "count per i.lemma, p.lemma"),
]


def build(corpus: Path | None, console: Console) -> "Corpus":
    from engine import Corpus
    if corpus is None:
        corpus = Path(tempfile.mkdtemp(prefix="strata-demo-")) / "calls"
    c = Corpus.create(corpus)
    for name, fmt, options in IMPORTS:
        path = DATA / name
        report = c.import_files([path], format=fmt, progress=False, **options)
        counts = ", ".join(f"{v} {k}" for k, v in report.counts.items())
        console.print(f"imported {name} ({fmt}): {counts}")
    return c


def run_demo(corpus: Path | None, console: Console) -> None:
    from engine.cli import print_info
    c = build(corpus, console)
    print_info(c.info())
    for number, (explanation, text) in enumerate(SHOWCASE, 1):
        console.print()
        console.rule(f"showcase {number}")
        # one unwrapped line each, so the explanation reads (and greps) as written
        console.print(explanation, markup=False, highlight=False, soft_wrap=True)
        console.print(text, markup=False, highlight=False, soft_wrap=True)
        hits = c.query(text, limit=SHOWN_ROWS)
        console.print(hits.render_table(width=max(console.width, TABLE_WIDTH)), markup=False,
                      highlight=False, soft_wrap=True)
