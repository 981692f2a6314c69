"""Deterministic synthetic corpus with every layer kind at once, for benchmarks at 10^5..10^8 tokens.

Why: no open treebank is large enough to measure scaling, and benchmark corpora must exercise
every importer together: CoNLL-U (tokens, multiword tokens, projective dependency trees,
coreference in MISC ``Entity``), bracketed constituency trees (function tags, traces,
alternative readings, escaped brackets), time-aligned tiers (words, phones, pauses, events) and
standoff disfluency spans, all describing the same invented text.

The corpus is cut into fixed-size shards, each seeded on its own from ``(seed, shard)``, so
the output is byte-identical for a seed whatever the number of worker processes. Each shard
is written streaming, one document at a time (memory bounded by one document).

    python -m benchmarks.synth --tokens 1e6 --out /tmp/synth [--seed 7] [--workers 2]

``manifest.json`` in the output lists the files in import order with their format options.
"""
from __future__ import annotations

import argparse
import bisect
import functools
import json
import math
import os
import random
import sys
import time
from collections import deque
from multiprocessing import get_context
from pathlib import Path

SHARD_TOKENS = 250_000
"""Syntactic words per shard: the unit of parallel work and of seeding."""

SENT_LEN_MEDIAN = 15.2
"""Log-normal sentence length; with sigma 0.5 the mean is ~17 tokens (median * e^(s^2/2))."""
SENT_LEN_SIGMA = 0.5
DOC_LEN_MEDIAN = 1300
DOC_LEN_SIGMA = 0.6

# --- lexicon -----------------------------------------------------------------------------------

# Invented words are built from ARPAbet syllables so that every form has a pronunciation.
_ONSETS = [("P", "p"), ("B", "b"), ("T", "t"), ("D", "d"), ("K", "k"), ("G", "g"), ("M", "m"),
           ("N", "n"), ("F", "f"), ("V", "v"), ("S", "s"), ("Z", "z"), ("SH", "sh"), ("HH", "h"),
           ("L", "l"), ("R", "r"), ("W", "w"), ("Y", "y"), ("CH", "ch"), ("JH", "j"), ("TH", "th"),
           ("", ""), ("S T", "st"), ("P L", "pl"), ("K R", "cr"), ("B R", "br"), ("T R", "tr"),
           ("F L", "fl"), ("G R", "gr")]
_VOWELS = [("AE", "a"), ("EH", "e"), ("IH", "i"), ("AA", "o"), ("AH", "u"), ("IY", "ee"),
           ("UW", "oo"), ("OW", "oa"), ("EY", "ai"), ("AY", "igh"), ("ER", "er"), ("AO", "au")]
_CODAS = [("", ""), ("", ""), ("N", "n"), ("T", "t"), ("K", "ck"), ("L", "l"), ("R", "r"),
          ("M", "m"), ("N D", "nd"), ("S T", "st"), ("NG", "ng"), ("D", "d"), ("P", "p"), ("S", "ss")]

N_NOUNS, N_VERBS, N_ADJS, N_ADVS, N_NAMES = 3000, 1100, 700, 250, 450
"""A few thousand invented open-class types (about 5500 lemmas, ~13000 inflected forms)."""

NOUN_TYPES = [("person", 20), ("place", 15), ("object", 30), ("event", 10), ("time", 6),
              ("abstract", 14), ("organization", 5)]
NAME_TYPES = [("person", 55), ("place", 35), ("organization", 10)]

ZIPF_EXPONENT = 1.0
ZIPF_OFFSET = 2.7
"""Zipf-Mandelbrot weights 1/(rank + 2.7)^1.0: common practice for word frequency models."""

TABLE_BITS = 16  # sampling tables of 2^16 entries: one getrandbits call per draw

# Closed classes: (form, lemma, upos, xpos, feats, pronunciation as in the CMU dictionary).
_DETS = {
    "the": ("the", "DET", "DT", "Definite=Def|PronType=Art", "DH AH0"),
    "a": ("a", "DET", "DT", "Definite=Ind|PronType=Art", "AH0"),
    "this": ("this", "DET", "DT", "Number=Sing|PronType=Dem", "DH IH1 S"),
    "these": ("this", "DET", "DT", "Number=Plur|PronType=Dem", "DH IY1 Z"),
    "every": ("every", "DET", "DT", "PronType=Tot", "EH1 V R IY0"),
    "some": ("some", "DET", "DT", "PronType=Ind", "S AH1 M"),
}
# Pronouns: coreference class spk (the speaker), addr (the other speaker), we, p3 (a person), t3.
_PRONS_NOM = [
    ("I", "I", "Case=Nom|Number=Sing|Person=1|PronType=Prs", "AY1", "spk", False),
    ("you", "you", "Case=Nom|Person=2|PronType=Prs", "Y UW1", "addr", False),
    ("we", "we", "Case=Nom|Number=Plur|Person=1|PronType=Prs", "W IY1", "we", False),
    ("they", "they", "Case=Nom|Number=Plur|Person=3|PronType=Prs", "DH EY1", "p3", False),
    ("she", "she", "Case=Nom|Gender=Fem|Number=Sing|Person=3|PronType=Prs", "SH IY1", "p3", True),
    ("he", "he", "Case=Nom|Gender=Masc|Number=Sing|Person=3|PronType=Prs", "HH IY1", "p3", True),
    ("it", "it", "Case=Nom|Gender=Neut|Number=Sing|Person=3|PronType=Prs", "IH1 T", "t3", True),
]
_PRONS_ACC = [
    ("me", "I", "Case=Acc|Number=Sing|Person=1|PronType=Prs", "M IY1", "spk", False),
    ("you", "you", "Case=Acc|Person=2|PronType=Prs", "Y UW1", "addr", False),
    ("us", "we", "Case=Acc|Number=Plur|Person=1|PronType=Prs", "AH1 S", "we", False),
    ("them", "they", "Case=Acc|Number=Plur|Person=3|PronType=Prs", "DH EH1 M", "p3", False),
    ("her", "she", "Case=Acc|Gender=Fem|Number=Sing|Person=3|PronType=Prs", "HH ER1", "p3", False),
    ("him", "he", "Case=Acc|Gender=Masc|Number=Sing|Person=3|PronType=Prs", "HH IH1 M", "p3", False),
    ("it", "it", "Case=Acc|Gender=Neut|Number=Sing|Person=3|PronType=Prs", "IH1 T", "t3", False),
]
_ADPS = [("of", "AH1 V"), ("to", "T UW1"), ("in", "IH1 N"), ("on", "AA1 N"), ("at", "AE1 T"),
         ("from", "F R AH1 M"), ("with", "W IH1 DH"), ("for", "F AO1 R"), ("by", "B AY1"),
         ("after", "AE1 F T ER0"), ("before", "B IH0 F AO1 R"), ("near", "N IH1 R")]
_ADP_WEIGHTS = [30, 18, 20, 10, 8, 8, 9, 12, 4, 3, 3, 2]
_MODALS = [("will", "W IH1 L"), ("can", "K AE1 N"), ("would", "W UH1 D"), ("could", "K UH1 D")]
_FIN_PRES = "Mood=Ind|Tense=Pres|VerbForm=Fin"
_FIN_PRES3 = "Mood=Ind|Number=Sing|Person=3|Tense=Pres|VerbForm=Fin"
_FIN_PAST = "Mood=Ind|Tense=Past|VerbForm=Fin"
_AUX = {  # form: (lemma, xpos, feats, pronunciation)
    "do": ("do", "VBP", _FIN_PRES, "D UW1"), "does": ("do", "VBZ", _FIN_PRES3, "D AH1 Z"),
    "did": ("do", "VBD", _FIN_PAST, "D IH1 D"),
    "have": ("have", "VBP", _FIN_PRES, "HH AE1 V"), "has": ("have", "VBZ", _FIN_PRES3, "HH AE1 Z"),
    "had": ("have", "VBD", _FIN_PAST, "HH AE1 D"),
    "am": ("be", "VBP", "Mood=Ind|Number=Sing|Person=1|Tense=Pres|VerbForm=Fin", "AE1 M"),
    "are": ("be", "VBP", _FIN_PRES, "AA1 R"), "is": ("be", "VBZ", _FIN_PRES3, "IH1 Z"),
    "was": ("be", "VBD", "Mood=Ind|Number=Sing|Tense=Past|VerbForm=Fin", "W AA1 Z"),
    "were": ("be", "VBD", "Mood=Ind|Number=Plur|Tense=Past|VerbForm=Fin", "W ER1"),
}
# Negated do-support, written as one multiword token "don't" = "do" + "n't".
_NEG_MWT = {"do": ("don't", "D OW1 N T"), "does": ("doesn't", "D AH1 Z AH0 N T"),
            "did": ("didn't", "D IH1 D AH0 N T")}
_CCONJS = [("and", "AH0 N D"), ("but", "B AH1 T"), ("or", "AO1 R")]
_SCONJS = [("because", "B IH0 K AH1 Z"), ("when", "W EH1 N"), ("if", "IH1 F"), ("while", "W AY1 L")]
_FILLERS = [("um", "AH1 M"), ("uh", "AH1")]
#: the layout of the generated files and the layer names they make; cached inputs and corpora
#: of another layout are not reused (2: the aligned words' tier is `spoken`, events `click`)
LAYOUT = 2
SILENT_EVENTS = ["breath", "click"]
"""Events inside silent pauses (events tier only)."""
VOICED_EVENTS = [("laughter", "{laugh}"), ("cough", "{cough}")]
"""Events between turns that an aligner also writes into the words tier, in braces."""
GENRES = ["booking", "timetable", "complaint", "lost_property"]


def _entry(form: str, lemma: str, upos: str, xpos: str, feats: str, phones: str,
           etype: str | None = None) -> tuple:
    """One inflected form, precomputed: (conllu columns 2-6, tree leaf, phones, form, lemma, etype)."""
    leaf_form = {"(": "-LRB-", ")": "-RRB-"}.get(form, form)
    return (f"{form}\t{lemma}\t{upos}\t{xpos}\t{feats or '_'}", f"({xpos} {leaf_form})",
            tuple(phones.split()), form, lemma, etype)


def _weighted_table(items: list, weights: list[float]) -> list:
    """2^16 items laid out by their weights: table[getrandbits(16)] is a weighted draw."""
    size = 1 << TABLE_BITS
    total = float(sum(weights))
    cum, acc = [], 0.0
    for w in weights:
        acc += w
        cum.append(acc / total)
    return [items[min(bisect.bisect_left(cum, (i + 0.5) / size), len(items) - 1)] for i in range(size)]


def _zipf_table(n: int) -> list[int]:
    """Ranks 0..n-1 drawn by Zipf-Mandelbrot mass."""
    return _weighted_table(list(range(n)), [1.0 / (r + ZIPF_OFFSET) ** ZIPF_EXPONENT for r in range(n)])


class Lexicon:
    """Invented open-class vocabulary plus English function words, every form pre-rendered."""

    def __init__(self, seed: int) -> None:
        r = random.Random(f"lexicon:{seed}")
        taken = {w for w in ["n't"] + list(_DETS) + list(_AUX)} | {
            p[0].lower() for p in _PRONS_NOM + _PRONS_ACC} | {
            w for w, _ in _ADPS + _MODALS + _CCONJS + _SCONJS + _FILLERS}
        invent = lambda n, lo, hi: self._invent(r, n, lo, hi, taken)  # noqa: E731
        self.nouns = []
        ntype = _weighted_table([t for t, _ in NOUN_TYPES], [w for _, w in NOUN_TYPES])
        for form, ph in invent(N_NOUNS, 1, 3):
            et = ntype[r.getrandbits(TABLE_BITS)]
            self.nouns.append((_entry(form, form, "NOUN", "NN", "Number=Sing", ph, et),
                               _entry(form + "s", form, "NOUN", "NNS", "Number=Plur", ph + " Z", et)))
        self.verbs = []
        for form, ph in invent(N_VERBS, 1, 2):
            ed, s, ing = form + "ed", form + "s", form + "ing"
            self.verbs.append({
                "VB": _entry(form, form, "VERB", "VB", "VerbForm=Inf", ph),
                "VBP": _entry(form, form, "VERB", "VBP", _FIN_PRES, ph),
                "VBZ": _entry(s, form, "VERB", "VBZ", _FIN_PRES3, ph + " Z"),
                "VBD": _entry(ed, form, "VERB", "VBD", _FIN_PAST, ph + " D"),
                "VBG": _entry(ing, form, "VERB", "VBG", "Tense=Pres|VerbForm=Part", ph + " IH0 NG"),
                "VBN": _entry(ed, form, "VERB", "VBN", "Tense=Past|VerbForm=Part", ph + " D"),
            })
        self.adjs = [_entry(f, f, "ADJ", "JJ", "Degree=Pos", ph) for f, ph in invent(N_ADJS, 1, 3)]
        self.advs = [_entry(f + "ly", f + "ly", "ADV", "RB", "", ph + " L IY0")
                     for f, ph in invent(N_ADVS, 1, 2)]
        ttab = _weighted_table([t for t, _ in NAME_TYPES], [w for _, w in NAME_TYPES])
        self.names = [_entry(f.capitalize(), f.capitalize(), "PROPN", "NNP", "Number=Sing", ph,
                             ttab[r.getrandbits(TABLE_BITS)]) for f, ph in invent(N_NAMES, 2, 3)]
        self.noun_tab = _zipf_table(N_NOUNS)
        self.verb_tab = _zipf_table(N_VERBS)
        self.adj_tab = _zipf_table(N_ADJS)
        self.adv_tab = _zipf_table(N_ADVS)
        self.name_tab = _zipf_table(N_NAMES)
        self.dets = {f: _entry(f, *v) for f, v in _DETS.items()}
        self.prons_nom = [(_entry(f, l, "PRON", "PRP", ft, ph), c, sg3)
                          for f, l, ft, ph, c, sg3 in _PRONS_NOM]
        self.prons_acc = [(_entry(f, l, "PRON", "PRP", ft, ph), c, sg3)
                          for f, l, ft, ph, c, sg3 in _PRONS_ACC]
        self.adp_tab = _weighted_table([_entry(f, f, "ADP", "IN", "", ph) for f, ph in _ADPS],
                                       _ADP_WEIGHTS)
        self.modals = [_entry(f, f, "AUX", "MD", "VerbForm=Fin", ph) for f, ph in _MODALS]
        self.aux = {f: _entry(f, l, "AUX", x, ft, ph) for f, (l, x, ft, ph) in _AUX.items()}
        self.neg = _entry("n't", "not", "PART", "RB", "Polarity=Neg", "N T")
        self.neg_mwt = _NEG_MWT
        self.cconjs = [_entry(f, f, "CCONJ", "CC", "", ph) for f, ph in _CCONJS]
        self.sconjs = [_entry(f, f, "SCONJ", "IN", "", ph) for f, ph in _SCONJS]
        self.fillers = [_entry(f, f, "INTJ", "UH", "", ph) for f, ph in _FILLERS]
        self.rel_that = _entry("that", "that", "PRON", "WDT", "PronType=Rel", "DH AE1 T")
        self.period = _entry(".", ".", "PUNCT", ".", "", "")
        self.qmark = _entry("?", "?", "PUNCT", ".", "", "")
        self.comma = _entry(",", ",", "PUNCT", ",", "", "")
        self.lrb = _entry("(", "(", "PUNCT", "-LRB-", "", "")
        self.rrb = _entry(")", ")", "PUNCT", "-RRB-", "", "")

    @staticmethod
    def _invent(r: random.Random, n: int, lo: int, hi: int, taken: set[str]) -> list[tuple[str, str]]:
        """n new (form, ARPAbet pronunciation) pairs of lo..hi syllables, stress on the first."""
        out = []
        while len(out) < n:
            k = r.randint(lo, hi)
            form, phones = [], []
            for i in range(k):
                (op, os_), (vp, vs), (cp, cs) = r.choice(_ONSETS), r.choice(_VOWELS), r.choice(_CODAS)
                form += [os_, vs, cs]
                phones += [op, f"{vp}{1 if i == 0 else 0}", cp]
            word = "".join(form)
            if len(word) < 3 or word in taken:
                continue
            taken.add(word)
            out.append((word, " ".join(p for p in phones if p)))
        return out

    def function_word_pronunciations(self) -> dict[str, tuple[str, ...]]:
        """Every closed-class form with its pronunciation (checked against a dictionary in tests)."""
        entries = (list(self.dets.values()) + [p[0] for p in self.prons_nom + self.prons_acc]
                   + self.modals + list(self.aux.values()) + self.cconjs + self.sconjs
                   + self.fillers + [self.rel_that])
        out = {e[3].lower(): e[2] for e in entries}
        for f, ph in _ADPS:
            out[f] = tuple(ph.split())
        for f, ph in _NEG_MWT.values():
            out[f] = tuple(ph.split())
        return out


# --- one shard ---------------------------------------------------------------------------------

def _ms(t: int) -> str:
    """Milliseconds as seconds with three decimals, without float formatting."""
    return f"{t // 1000}.{t % 1000:03d}"


class ShardWriter:
    """Generates the documents of one shard and writes all five files streaming."""

    def __init__(self, lex: Lexicon, seed: int, shard: int, out: Path) -> None:
        self.L = lex
        self.r = random.Random(f"shard:{seed}:{shard}")
        self.rnd = self.r.random
        self.bits = self.r.getrandbits
        self.shard = shard
        stem = f"{shard:04d}"
        self.f_conllu = open(out / f"synth.{stem}.conllu", "w", encoding="utf-8", newline="\n")
        self.f_trees = open(out / f"synth.{stem}.trees", "w", encoding="utf-8", newline="\n")
        self.f_tiers = open(out / f"synth.{stem}.tiers.tsv", "w", encoding="utf-8", newline="\n")
        self.f_spans = open(out / f"disfluency.{stem}.spans.tsv", "w", encoding="utf-8", newline="\n")
        self.f_tiers.write("doc\ttier\tstart\tend\tlabel\tspeaker\n")
        self.f_spans.write("doc\tstart\tend\tlabel\ttype\tgroup\n")
        g = random.Random(f"durations:{seed}")
        n = 1 << 12
        # Log-normal durations in ms, as tables: phones median 70 ms; pauses median 320 ms.
        self.phone_ms = [max(25, min(400, round(g.lognormvariate(math.log(70), 0.45)))) for _ in range(n)]
        self.pause_ms = [max(120, min(2500, round(g.lognormvariate(math.log(320), 0.6)))) for _ in range(n)]
        self.stats = dict(tokens=0, words=0, sentences=0, documents=0, mentions=0, trees=0,
                          tier_rows=0, spans=0)

    # ---- documents ----

    def run(self, quota: int) -> dict:
        while self.stats["tokens"] < quota:
            left = quota - self.stats["tokens"]
            n = round(self.r.lognormvariate(math.log(DOC_LEN_MEDIAN), DOC_LEN_SIGMA))
            n = max(150, min(8000, n))
            if left - n < 150:
                n = left
            self.document(f"syn{self.shard:04d}_{self.stats['documents']:05d}", n)
        for f in (self.f_conllu, self.f_trees, self.f_tiers, self.f_spans):
            f.close()
        return self.stats

    def document(self, name: str, n_tokens: int) -> None:
        self.doc = name
        self.conllu_out = [f"# newdoc id = {name}\n# global.Entity = eid-etype-head\n"
                           f"# meta::genre = {GENRES[self.bits(2)]}\n"]
        self.trees_out = [f"# doc = {name}\n"]
        self.tier_words, self.tier_phones, self.tier_pauses, self.tier_events = [], [], [], []
        self.spans_out = []
        self.n_ent = 0
        self.recent: deque = deque(maxlen=8)
        self.by_key: dict[str, str] = {}
        self.speaker_eid = {}
        self.speaker = "A"
        self.t = 400 + self.bits(9)  # ms: the recording starts with a little silence
        self.word_ord = 0
        self.group = 0
        self.n_sent = 0
        done = 0
        while done < n_tokens:
            length = round(self.r.lognormvariate(math.log(SENT_LEN_MEDIAN), SENT_LEN_SIGMA))
            length = max(2, min(90, length, n_tokens - done if n_tokens - done >= 2 else 2))
            done += self.sentence(length)
        self.f_conllu.write("".join(self.conllu_out))
        self.f_trees.write("".join(self.trees_out))
        self.f_tiers.write("".join(self.tier_words + self.tier_phones + self.tier_pauses + self.tier_events))
        self.f_spans.write("".join(self.spans_out))
        self.stats["tokens"] += done
        self.stats["documents"] += 1
        self.stats["tier_rows"] += (len(self.tier_words) + len(self.tier_phones)
                                    + len(self.tier_pauses) + len(self.tier_events))
        self.stats["spans"] += len(self.spans_out)

    # ---- token bookkeeping ----

    def add(self, entry: tuple, rel: str) -> int:
        self.ents.append(entry)
        self.heads.append(-1)
        self.rels.append(rel)
        return len(self.ents) - 1

    def entity(self, kind: str, key: str, etype: str) -> tuple[str, str]:
        """Choose the entity of a mention: pronouns and names corefer, definites sometimes."""
        eid = None
        if kind == "pron":
            if key == "spk" or key == "addr":
                who = self.speaker if key == "spk" else ("B" if self.speaker == "A" else "A")
                eid = self.speaker_eid.get(who)
                if eid is None:
                    eid = self.speaker_eid[who] = self.new_eid()
            elif key == "we":
                eid = self.by_key.get("\0we")
                if eid is None:
                    eid = self.by_key["\0we"] = self.new_eid()
            else:
                want_person = key == "p3"
                for e, t in reversed(self.recent):
                    if (t == "person") == want_person and self.rnd() < 0.8:
                        eid, etype = e, t
                        break
        elif kind == "name":
            eid = self.by_key.get(key)
        elif kind == "def" and self.rnd() < 0.5:
            eid = self.by_key.get(key)
        if eid is None:
            eid = self.new_eid()
        if kind in ("name", "def", "indef"):
            self.by_key[key] = eid
        self.recent.append((eid, etype))
        return eid, etype

    def new_eid(self) -> str:
        self.n_ent += 1
        return f"e{self.n_ent}"

    def mention(self, start: int, end: int, head: int, kind: str, key: str, etype: str) -> None:
        eid, etype = self.entity(kind, key, etype)
        self.mentions.append((start, end, head, eid, etype))

    def disfluency(self, label: str, tok: int, group: int, kind: str) -> None:
        """A standoff span on one token: label, kind of disfluency (the `type` column), group."""
        self.disfl.append((label, tok, group, kind))

    # ---- grammar: each builder appends its tokens in order and returns head and bracket ----

    def noun(self, plural: bool) -> tuple:
        pair = self.L.nouns[self.L.noun_tab[self.bits(TABLE_BITS)]]
        return pair[1] if plural else pair[0]

    def name(self, as_mention: bool = True) -> int:
        entry = self.L.names[self.L.name_tab[self.bits(TABLE_BITS)]]
        h = self.add(entry, "")
        if as_mention:
            self.mention(h, h, h, "name", entry[3], entry[5])
        return h

    def np(self, b: int, case: str, tag: str, as_mention: bool = True) -> tuple[int, str, bool]:
        """Noun phrase of b tokens (plus any disfluency); returns (head, bracket, 3rd-sg)."""
        L, rnd, bits = self.L, self.rnd, self.bits
        s = len(self.ents)
        if b >= 4:
            return self.modified_np(b, case, tag)
        x = rnd()
        if b == 1 and x < 0.45:
            entry, cls, sg3 = (L.prons_nom if case == "nom" else L.prons_acc)[bits(16) % 7]
            h = self.add(entry, "")
            self.mention(s, s, h, "pron", cls, "person" if cls != "t3" else "object")
            return h, f"({tag} {entry[1]})", sg3
        if b == 1 and x < 0.65:
            h = self.name()
            return h, f"({tag} {self.ents[h][1]})", True
        parts: list[str] = []
        det = None
        plural = True
        modifiers = 0 if b == 1 or (b == 2 and x < 0.75) else 1
        if b == 3 or (b == 2 and x < 0.75):
            plural = rnd() < 0.3
            det = self.det(plural)
            parts.append(self.det_with_disfluency(det))
        if modifiers:
            if rnd() < 0.6:
                a = self.add(L.adjs[L.adj_tab[bits(TABLE_BITS)]], "amod")
            else:
                a = self.add(self.noun(False), "compound")
            parts.append(self.ents[a][1])
        n_entry = self.noun(plural)
        if rnd() < 0.01:  # a partial word before the noun: "fe- ferry"
            p = self.add(_partial(n_entry), "reparandum")
            parts.append(f"(EDITED {self.ents[p][1]})")
            self.group += 1
            self.disfluency("partial_word", p, self.group, "partial")
            self.disfluency("reparandum", p, self.group, "partial")
            h = self.add(n_entry, "")
            self.disfluency("repair", h, self.group, "partial")
        else:
            h = self.add(n_entry, "")
        parts.append(n_entry[1])
        for i in range(s, h):
            if self.heads[i] == -1:
                self.heads[i] = h
        if as_mention:
            definite = det is not None and det[3] in ("the", "this", "these")
            self.mention(s, h, h, "def" if definite else "indef", n_entry[4], n_entry[5])
        return h, f"({tag} {' '.join(parts)})", not plural

    def modified_np(self, b: int, case: str, tag: str) -> tuple[int, str, bool]:
        """A core noun phrase with a modifier: prepositional phrase, relative clause, parenthesis."""
        L, rnd = self.L, self.rnd
        s = len(self.ents)
        core = 2 if b < 6 or rnd() < 0.5 else 3
        rest = b - core
        h, core_br, sg3 = self.np(core, case, "NP", as_mention=False)
        x = rnd()
        if rest == 3 and x < 0.25:
            lp = self.add(L.lrb, "punct")
            hn = self.name()
            rp = self.add(L.rrb, "punct")
            self.heads[hn], self.rels[hn] = h, "appos"
            self.heads[lp] = self.heads[rp] = hn
            self.nospace.update((lp, hn))
            mod = f"(-LRB- -LRB-) (NP {self.ents[hn][1]}) (-RRB- -RRB-)"
        elif rest >= 3 and x < 0.45:
            mod = self.relative_clause(rest, h)
        else:
            ph, mod, _ = self.pp(rest, "PP")
            self.heads[ph], self.rels[ph] = h, "nmod"
        e = self.ents[h]
        definite = self.ents[s][3] in ("the", "this", "these")
        self.mention(s, len(self.ents) - 1, h, "def" if definite else "indef", e[4], e[5])
        return h, f"({tag} {core_br} {mod})", sg3

    def det(self, plural: bool) -> tuple:
        d = self.L.dets
        x = self.rnd()
        if plural:
            return d["the"] if x < 0.7 else (d["these"] if x < 0.85 else d["some"])
        return d["the"] if x < 0.55 else (d["a"] if x < 0.88 else (d["this"] if x < 0.96 else d["every"]))

    def det_with_disfluency(self, det: tuple) -> str:
        """A determiner, sometimes repeated ("the the", "the uh the"): reparandum and repair."""
        if self.rnd() >= 0.03:
            self.add(det, "det")
            return det[1]
        self.group += 1
        rep = self.add(det, "reparandum")
        br = f"(EDITED {det[1]})"
        inter = None
        if self.rnd() < 0.4:
            filler = self.L.fillers[self.bits(1)]
            inter = self.add(filler, "discourse")
            br += f" (INTJ {filler[1]})"
        fix = self.add(det, "det")
        self.heads[rep] = fix
        self.disfluency("reparandum", rep, self.group, "repetition")
        if inter is not None:
            self.heads[inter] = fix
            self.disfluency("interregnum", inter, self.group, "repetition")
            self.disfluency("filled_pause", inter, 0, "filler")
        self.disfluency("repair", fix, self.group, "repetition")
        return f"{br} {det[1]}"

    def pp(self, b: int, tag: str) -> tuple[int, str, str]:
        """Prepositional phrase of b >= 2 tokens; the head is the noun (UD), the case marker hangs on it."""
        adp = self.L.adp_tab[self.bits(TABLE_BITS)]
        a = self.add(adp, "case")
        h, br, _ = self.np(b - 1, "acc", "NP")
        self.heads[a] = h
        etype = self.ents[h][5]
        if tag == "PP" and etype in ("place", "time"):
            tag = "PP-LOC" if etype == "place" else "PP-TMP"
        return h, f"({tag} {adp[1]} {br})", etype

    def relative_clause(self, b: int, noun: int) -> str:
        """'that' + verb + object: (SBAR (WHNP-k that) (S (NP-SBJ (-NONE- *T*-k)) (VP ...)))."""
        self.trace += 1
        k = self.trace
        t = self.add(self.L.rel_that, "nsubj")
        v_entry = self.L.verbs[self.L.verb_tab[self.bits(TABLE_BITS)]]["VBD"]
        v = self.add(v_entry, "acl:relcl")
        self.heads[t] = v
        self.heads[v] = noun
        oh, obr, _ = self.np(min(b - 2, 6), "acc", "NP")
        self.heads[oh], self.rels[oh] = v, "obj"
        vp = [v_entry[1], obr]
        for _ in range(b - 2 - min(b - 2, 6)):
            a = self.add(self.L.advs[self.L.adv_tab[self.bits(TABLE_BITS)]], "advmod")
            self.heads[a] = v
            vp.append(f"(ADVP {self.ents[a][1]})")
        return (f"(SBAR (WHNP-{k} {self.L.rel_that[1]}) (S (NP-SBJ (-NONE- *T*-{k})) "
                f"(VP {' '.join(vp)})))")

    def verb_group(self, size: int, sg3: bool, subj_form: str) -> tuple[int, list[str], str]:
        """Auxiliaries and the main verb: returns (verb id, auxiliary leaves, verb leaf)."""
        L, rnd = self.L, self.rnd
        verbs = L.verbs[L.verb_tab[self.bits(TABLE_BITS)]]
        past = rnd() < 0.5
        if size == 1:
            entry = verbs["VBD" if past else ("VBZ" if sg3 else "VBP")]
            return self.add(entry, ""), [], entry[1]
        if size >= 3:  # negated do-support, one multiword token
            do = "did" if past else ("does" if sg3 else "do")
            a = self.add(L.aux[do], "aux")
            n = self.add(L.neg, "advmod")
            self.mwts.append((a, n) + L.neg_mwt[do])
            v = self.add(verbs["VB"], "")
            self.heads[a] = self.heads[n] = v
            return v, [L.aux[do][1], L.neg[1]], verbs["VB"][1]
        x = rnd()
        if x < 0.4:
            aux, form = L.modals[self.bits(2)], "VB"
        elif x < 0.7:
            be = ("was" if sg3 or subj_form == "I" else "were") if past else (
                "am" if subj_form == "I" else ("is" if sg3 else "are"))
            aux, form = L.aux[be], "VBG"
        else:
            aux, form = L.aux["had" if past else ("has" if sg3 else "have")], "VBN"
        a = self.add(aux, "aux")
        v = self.add(verbs[form], "")
        self.heads[a] = v
        return v, [aux[1]], verbs[form][1]

    def clause(self, b: int, depth: int) -> tuple[int, str, str | None]:
        """A clause of b tokens (plus disfluencies): (verb, bracket, alternative bracket or None)."""
        rnd = self.rnd
        if b == 1:
            e = self.L.verbs[self.L.verb_tab[self.bits(TABLE_BITS)]]["VB"]
            return self.add(e, ""), f"(S (VP {e[1]}))", None
        vg = 1
        if b >= 3:
            x = rnd()
            vg = 3 if x < 0.06 and b >= 4 else (2 if x < 0.4 else 1)
        x = rnd()
        subj = 1 if x < 0.5 else (2 if x < 0.78 else (3 if x < 0.92 else 4 + self.bits(2)))
        subj = min(subj, b - vg)
        sh, sbr, sg3 = self.np(subj, "nom", "NP-SBJ")
        v, aux_leaves, verb_leaf = self.verb_group(vg, sg3, self.ents[sh][3])
        self.heads[sh], self.rels[sh] = v, "nsubj"
        r = b - subj - vg
        children: list[str] = []
        obj_at = -1
        if r > 0 and rnd() < 0.8:
            x = rnd()
            o = 1 if x < 0.25 else (2 if x < 0.6 else (3 if x < 0.8 else 4 + self.bits(2)))
            o = min(o, r)
            oh, obr, _ = self.np(o, "acc", "NP")
            self.heads[oh], self.rels[oh] = v, "obj"
            obj_at = len(children)
            children.append(obr)
            r -= o
        while r > 0:
            if r >= 6 and depth < 2 and rnd() < 0.3:
                size = r - 1 if r <= 14 else 4 + self.bits(3)
                m_entry = self.L.sconjs[self.bits(2)]
                m = self.add(m_entry, "mark")
                ch, cbr, _ = self.clause(size, depth + 1)
                self.heads[m] = ch
                self.heads[ch], self.rels[ch] = v, "advcl"
                children.append(f"(SBAR {m_entry[1]} {cbr})")
                r -= size + 1
            elif r >= 2:
                size = min(r, 2 + self.bits(2))
                if r - size == 1 and rnd() < 0.5:
                    size += 1
                ph, pbr, _ = self.pp(size, "PP")
                self.heads[ph], self.rels[ph] = v, "obl"
                children.append(pbr)
                r -= size
            else:
                a = self.add(self.L.advs[self.L.adv_tab[self.bits(TABLE_BITS)]], "advmod")
                self.heads[a] = v
                children.append(f"(ADVP {self.ents[a][1]})")
                r -= 1

        def render(kids: list[str]) -> str:
            inner = " ".join([verb_leaf] + kids)
            if aux_leaves:
                return f"(S {sbr} (VP {' '.join(aux_leaves)} (VP {inner})))"
            return f"(S {sbr} (VP {inner}))"

        alt = None
        if (depth == 0 and 0 <= obj_at < len(children) - 1
                and children[obj_at + 1].startswith("(PP") and rnd() < 0.3):
            # A second reading: the prepositional phrase attaches to the object, not the verb.
            pp_br = "(PP " + children[obj_at + 1].split(" ", 1)[1]
            alt = render(children[:obj_at] + [f"(NP {children[obj_at]} {pp_br})"] + children[obj_at + 2:])
        return v, render(children), alt

    def sentence(self, length: int) -> int:
        """Builds one sentence of about `length` syntactic words, renders it to all outputs."""
        L, rnd = self.L, self.rnd
        self.ents, self.heads, self.rels = [], [], []
        self.mentions, self.mwts, self.nospace, self.disfl = [], [], set(), []
        self.trace = 0
        if rnd() < 0.35:
            self.speaker = "B" if self.speaker == "A" else "A"
        pre = []
        filler = -1
        if rnd() < 0.05:
            fe = L.fillers[self.bits(1)]
            filler = self.add(fe, "discourse")
            self.disfluency("filled_pause", filler, 0, "filler")
            pre.append(f"(INTJ {fe[1]})")
        body = length - 1 - len(pre)
        alt = None
        if body >= 13 and rnd() < 0.25:
            first = (body - 2) // 2
            v, br1, _ = self.clause(first, 0)
            c = self.add(L.comma, "punct")
            self.nospace.add(c - 1)
            cc_e = L.cconjs[self.bits(16) % 3]
            cc = self.add(cc_e, "cc")
            v2, br2, _ = self.clause(body - 2 - first, 1)
            self.heads[c] = self.heads[cc] = v2
            self.heads[v2], self.rels[v2] = v, "conj"
            parts = [br1, "(, ,)", cc_e[1], br2]
        else:
            v, br, alt = self.clause(max(body, 1), 0)
            parts = [br[3:-1]]
            alt = alt[3:-1] if alt else None
        if filler >= 0:
            self.heads[filler] = v
        end = L.qmark if rnd() < 0.15 else L.period
        p = self.add(end, "punct")
        self.heads[p] = v
        self.nospace.add(p - 1)
        self.rels[v] = "root"
        self.render(pre, parts, alt, p)
        return len(self.ents)

    # ---- rendering ----

    def render(self, pre: list[str], parts: list[str], alt: str | None, last: int) -> None:
        self.n_sent += 1
        sid = f"{self.doc}-{self.n_sent}"
        ents, heads, rels = self.ents, self.heads, self.rels
        n = len(ents)
        misc = [""] * n
        for s, e, h, eid, et in sorted(self.mentions, key=lambda m: (m[0], -m[1])):
            if s == e:
                misc[s] += f"({eid}-{et}-1)"
            else:
                misc[s] += f"({eid}-{et}-{h - s + 1}"
        # Closings inner first: of two mentions ending on a token, the one that starts later.
        for s, e, h, eid, et in sorted(self.mentions, key=lambda m: (m[1], m[0]), reverse=True):
            if s != e:
                misc[e] += f"{eid})"
        self.stats["mentions"] += len(self.mentions)
        mwt_at = {m[0]: m for m in self.mwts}
        nospace = self.nospace
        lines = []
        text = []
        # surface tokens: (label, phones, first token, last token, is punctuation)
        surface = []
        i = 0
        while i < n:
            m = mwt_at.get(i)
            if m is not None:
                a, b, form, ph = m
                sa = "_" if b not in nospace else "SpaceAfter=No"
                lines.append(f"{a + 1}-{b + 1}\t{form}\t_\t_\t_\t_\t_\t_\t_\t{sa}\n")
                text.append(form if b in nospace else form + " ")
                surface.append((form, ph.split(), a, b, False))
                for j in range(a, b + 1):
                    hd = heads[j] + 1
                    lines.append(f"{j + 1}\t{ents[j][0]}\t{hd}\t{rels[j]}\t{hd}:{rels[j]}\t"
                                 f"{'Entity=' + misc[j] if misc[j] else '_'}\n")
                i = b + 1
                continue
            e = ents[i]
            hd = heads[i] + 1
            mi = "Entity=" + misc[i] if misc[i] else ""
            if i in nospace and i != last:
                mi = mi + "|SpaceAfter=No" if mi else "SpaceAfter=No"
            lines.append(f"{i + 1}\t{e[0]}\t{hd}\t{rels[i]}\t{hd}:{rels[i]}\t{mi or '_'}\n")
            text.append(e[3] if i in nospace or i == last else e[3] + " ")
            surface.append((e[3], e[2], i, i, not e[2]))
            i += 1
        self.conllu_out.append(f"# sent_id = {sid}\n# speaker = {self.speaker}\n"
                               f"# text = {''.join(text)}\n{''.join(lines)}\n")
        tree = " ".join(pre + parts)
        self.trees_out.append(f"# sent = {sid}\n( (S {tree} {ents[last][1]}) )\n")
        self.stats["trees"] += 1
        if alt is not None:
            self.trees_out.append(f"( (S {' '.join(pre + [alt])} {ents[last][1]}) )\n")
            self.stats["trees"] += 1
        self.timeline(surface)
        self.stats["sentences"] += 1
        self.stats["words"] += len(surface)

    def timeline(self, surface: list) -> None:
        """Words, phones and pauses with log-normal durations; an event in some pauses."""
        doc, spk, bits = self.doc, self.speaker, self.bits
        phone_ms, pause_ms = self.phone_ms, self.pause_ms
        words, phones, pauses = self.tier_words, self.tier_phones, self.tier_pauses
        t = self.t
        tok_word = {}
        base = self.word_ord
        for k, (label, ph, a, b, punct) in enumerate(surface):
            tok_word[a] = base + k
            if punct:
                if label == "," and bits(1):
                    d = pause_ms[bits(12)] // 2
                    pauses.append(f"{doc}\tpauses\t{_ms(t)}\t{_ms(t + d)}\tsil\t{spk}\n")
                    t += d
                continue
            if bits(5) == 0:
                d = pause_ms[bits(12)] // 2
                pauses.append(f"{doc}\tpauses\t{_ms(t)}\t{_ms(t + d)}\tsil\t{spk}\n")
                t += d
            w0 = prev = _ms(t)
            for p in ph:  # each boundary is formatted once: the end of one phone starts the next
                t += phone_ms[bits(12)]
                now = _ms(t)
                phones.append(f"{doc}\tphones\t{prev}\t{now}\t{p}\t{spk}\n")
                prev = now
            words.append(f"{doc}\tspoken\t{w0}\t{prev}\t{label}\t{spk}\n")
        self.word_ord = base + len(surface)
        d = pause_ms[bits(12)] + 100
        pauses.append(f"{doc}\tpauses\t{_ms(t)}\t{_ms(t + d)}\tsil\t\n")
        if bits(3) == 0 and d > 300:
            e0 = t + 50 + bits(6)
            self.tier_events.append(f"{doc}\tevents\t{_ms(e0)}\t{_ms(e0 + d // 2)}\t"
                                    f"{SILENT_EVENTS[bits(1)]}\t{spk}\n")
        t += d
        if bits(5) == 0:  # a laugh or cough after the pause, before the next sentence
            label, word = VOICED_EVENTS[bits(1)]
            e = t + 250 + bits(9)
            self.tier_events.append(f"{doc}\tevents\t{_ms(t)}\t{_ms(e)}\t{label}\t{spk}\n")
            words.append(f"{doc}\tspoken\t{_ms(t)}\t{_ms(e)}\t{word}\t{spk}\n")
            t = e
        self.t = t
        for label, tok, group, kind in self.disfl:
            w = tok_word[tok]
            g = f"g{group}" if group else ""
            self.spans_out.append(f"{doc}\t{w}\t{w}\t{label}\t{kind}\t{g}\n")


def _partial(noun_entry: tuple) -> tuple:
    """A cut-off start of a noun ("fe-" before "ferry"): a partial word."""
    form = noun_entry[3]
    cut = max(1, min(3, len(form) - 1))
    phones = " ".join(noun_entry[2][:2])
    return _entry(form[:cut] + "-", form[:cut] + "-", "X", "XX", "", phones)


# --- driver ------------------------------------------------------------------------------------

@functools.lru_cache(maxsize=2)
def _lexicon(seed: int) -> Lexicon:
    """One lexicon per worker process and seed (building it takes a few tenths of a second)."""
    return Lexicon(seed)


def _shard_job(args: tuple) -> dict:
    seed, shard, quota, out = args
    return ShardWriter(_lexicon(seed), seed, shard, Path(out)).run(quota)


def manifest_files(n_shards: int) -> list[dict]:
    """Files in import order (CoNLL-U first: it defines the primary text) with their options."""
    files = []
    for kind, fmt, opts in [("synth.{}.conllu", "conllu", {}),
                            ("synth.{}.trees", "brackets", {}),
                            ("synth.{}.tiers.tsv", "tiers", {}),
                            ("disfluency.{}.spans.tsv", "spans",
                             {"anchor": "tokens:token", "layer": "disfluency"})]:
        for s in range(n_shards):
            files.append({"path": kind.format(f"{s:04d}"), "format": fmt, "options": opts})
    return files


def generate(tokens: int, out: Path, seed: int = 1, workers: int | None = None) -> dict:
    """Writes a corpus of about `tokens` syntactic words to `out`; returns totals and timing."""
    out.mkdir(parents=True, exist_ok=True)
    n_shards = max(1, math.ceil(tokens / SHARD_TOKENS))
    jobs = [(seed, s, min(SHARD_TOKENS, tokens - s * SHARD_TOKENS), str(out)) for s in range(n_shards)]
    workers = workers or min(n_shards, os.cpu_count() or 1)
    t0 = time.perf_counter()
    if workers <= 1 or n_shards == 1:
        results = [_shard_job(j) for j in jobs]
    else:
        with get_context("fork" if sys.platform != "win32" else "spawn").Pool(workers) as pool:
            results = pool.map(_shard_job, jobs, chunksize=1)
    seconds = time.perf_counter() - t0
    totals = {k: sum(r[k] for r in results) for k in results[0]}
    summary = {"seed": seed, "requested_tokens": tokens, "shards": n_shards, "workers": workers,
               "seconds": round(seconds, 3), "tokens_per_second": round(totals["tokens"] / seconds),
               "bytes": sum(f.stat().st_size for f in out.iterdir() if f.name != "manifest.json"),
               **totals, "files": manifest_files(n_shards)}
    (out / "manifest.json").write_text(json.dumps(summary, indent=1) + "\n", encoding="utf-8")
    return summary


def token_count_arg(text: str) -> int:
    """argparse type for a token count: a whole number, written out or as 1e6."""
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"not a number of tokens: {text!r}") from None
    if not (1 <= value <= 1e9) or value != int(value):
        raise argparse.ArgumentTypeError(f"tokens must be a whole number from 1 to 1e9: {text!r}")
    return int(value)


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(prog="python -m benchmarks.synth", description=__doc__.split("\n\n")[0])
    ap.add_argument("--tokens", type=token_count_arg, required=True, help="syntactic words, e.g. 1e6")
    ap.add_argument("--out", type=Path, required=True, help="output directory")
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--workers", type=int, default=None, help="processes (default: CPU count)")
    a = ap.parse_args(argv)
    s = generate(a.tokens, a.out, a.seed, a.workers)
    print(f"{s['tokens']:,} tokens, {s['words']:,} words, {s['sentences']:,} sentences, "
          f"{s['documents']:,} documents, {s['mentions']:,} mentions, {s['trees']:,} trees, "
          f"{s['tier_rows']:,} tier rows, {s['spans']:,} spans; {s['bytes'] / 1e6:,.1f} MB "
          f"in {s['seconds']:.1f} s ({s['tokens_per_second']:,} tokens/s, {s['workers']} workers)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
