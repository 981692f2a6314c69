"""Precision and recall of the words-tier alignment on a messy tier with a key made by construction.

A forced aligner's words are not the text's tokens: numbers are spelled out, fillers
are inserted, words are dropped or misheard. This builds such a tier from the open
treebank's own tokens (UD English GUM, read in place from ../shared), so the right
place of every tier word is known: the characters of the token it came from, or none
(a filler, a spelled-out or misheard number). Then it imports text and tier and counts:

* precision: aligned tier words on exactly their token's characters, over aligned words;
* recall: the same, over tier words that have a token;
* and three kinds of defect that must not occur at all: a span across a sentence
  boundary, a span on characters of a token that is not the word's own, a number
  aligned to a different number (or to a spelled-out one).

``python -m benchmarks.align_messy`` prints the figures for both splits;
tests/test_align_messy.py asserts them.
"""
from __future__ import annotations

import bisect
import random
import re
import sys
from dataclasses import dataclass, field
from pathlib import Path

import conllu

#: English number words (from memory; the usual spelling of the cardinals).
_ONES = ("zero one two three four five six seven eight nine ten eleven twelve thirteen fourteen fifteen "
         "sixteen seventeen eighteen nineteen").split()
_TENS = "_ _ twenty thirty forty fifty sixty seventy eighty ninety".split()
FILLERS = ("uh", "um", "er", "mm")
GOOD = ("exact", "normalised", "fuzzy")


def spelled(number: str) -> list[str]:
    """Spoken words for a number written in digits: "22" -> ["twenty", "two"]; longer ones digit by digit.

    >>> spelled("22"), spelled("7"), spelled("1990")
    (['twenty', 'two'], ['seven'], ['one', 'nine', 'nine', 'zero'])
    """
    n = int(number)
    if len(number) > 2 or number.startswith("0") and n:
        return [_ONES[int(d)] for d in number]
    if n < 20:
        return [_ONES[n]]
    return [_TENS[n // 10]] + ([_ONES[n % 10]] if n % 10 else [])


@dataclass
class Token:
    form: str
    upos: str
    start: int          # document-local characters, end exclusive
    end: int
    sentence: int


def surface_tokens(path: Path) -> dict[str, list[Token]]:
    """Document name -> surface tokens (multiword tokens whole) with their characters, from ``conllu``.

    The characters follow the text convention of DEVELOPERS.md (forms joined per SpaceAfter,
    sentences joined by a newline), computed here from the reference library's parse.
    """
    docs: dict[str, list[Token]] = {}
    offsets: dict[str, int] = {}
    name = None
    with open(path, encoding="utf-8") as f:
        for k, sent in enumerate(conllu.parse_incr(f)):
            if "newdoc id" in sent.metadata:
                name = sent.metadata["newdoc id"]
            base = offsets.get(name, 0)
            pos, skip_until, toks = 0, 0, []
            for tok in sent:
                tid = tok["id"]
                if isinstance(tid, tuple) and tid[1] == "-":          # multiword token a-b
                    skip_until, upos = tid[2], "X"
                elif isinstance(tid, tuple) or tid <= skip_until:     # empty node, or inside a multiword
                    continue
                else:
                    upos = tok["upos"]
                toks.append(Token(tok["form"], upos, base + pos, base + pos + len(tok["form"]), k))
                pos += len(tok["form"])
                if (tok["misc"] or {}).get("SpaceAfter") != "No":
                    pos += 1
            docs.setdefault(name, []).extend(toks)
            offsets[name] = base + max((t.end - base for t in toks), default=0) + 1
    return docs


def _misheard(form: str, rng: random.Random) -> str:
    """One inner letter replaced by another (a misrecognition an aligner's transcript has)."""
    i = rng.randrange(1, len(form) - 1)
    letters = [c for c in "aeioustnr" if c != form[i].lower()]
    return form[:i] + rng.choice(letters) + form[i + 1:]


@dataclass
class MessyTier:
    """Rows written and, per row, the key: the document-local characters of its token, or None."""
    rows: list[tuple[str, str, str, str]] = field(default_factory=list)   # doc, start, end, label
    key: list[tuple[str, tuple[int, int] | None]] = field(default_factory=list)
    kinds: dict[str, int] = field(default_factory=dict)

    def add(self, doc: str, t: float, label: str, key: tuple[int, int] | None, kind: str) -> float:
        self.rows.append((doc, f"{t:.3f}", f"{t + 0.25:.3f}", label))
        self.key.append((doc, key))
        self.kinds[kind] = self.kinds.get(kind, 0) + 1
        return t + 0.25


def messy_tier(docs: dict[str, list[Token]], seed: int = 29, drop: float = 0.03, filler: float = 0.03,
               mishear: float = 0.06) -> MessyTier:
    """The spoken words of every document: punctuation left out, words lower-cased, and with the
    given shares of dropped words, inserted fillers and misheard words; numbers spelled out
    (half of them) or misheard as the next number (the other half)."""
    rng = random.Random(seed)
    tier = MessyTier()
    for doc, tokens in docs.items():
        t = 0.0
        for tok in tokens:
            if tok.upos == "PUNCT":
                continue
            if rng.random() < drop:
                tier.kinds["dropped"] = tier.kinds.get("dropped", 0) + 1
                continue
            if rng.random() < filler:
                t = tier.add(doc, t, rng.choice(FILLERS), None, "filler")
            if tok.form.isdigit() and tok.form.isascii():
                if rng.random() < 0.5:
                    for w in spelled(tok.form):
                        t = tier.add(doc, t, w, None, "spelled number")
                else:
                    t = tier.add(doc, t, str(int(tok.form) + 1), None, "misheard number")
            elif len(tok.form) >= 4 and tok.form.isalpha() and rng.random() < mishear:
                t = tier.add(doc, t, _misheard(tok.form, rng).lower(), (tok.start, tok.end), "misheard")
            else:
                t = tier.add(doc, t, tok.form.lower(), (tok.start, tok.end), "as written")
    return tier


def write_tier(tier: MessyTier, path: Path) -> None:
    """A tier table (tab-separated, no quoting: the labels hold no tab or line end)."""
    with open(path, "w", encoding="utf-8", newline="\n") as f:
        f.write("doc\ttier\tstart\tend\tlabel\n")
        f.writelines(f"{doc}\tspoken\t{a}\t{b}\t{label}\n" for doc, a, b, label in tier.rows)


@dataclass
class Scores:
    rows: int = 0
    keyed: int = 0
    aligned: int = 0
    correct: int = 0
    across_sentences: int = 0
    on_a_neighbour: int = 0
    wrong_number: int = 0
    examples: list[str] = field(default_factory=list)

    @property
    def precision(self) -> float:
        return self.correct / self.aligned if self.aligned else 1.0

    @property
    def recall(self) -> float:
        return self.correct / self.keyed if self.keyed else 1.0


_DIGITS = re.compile(r"\d+")


def score(tier: MessyTier, docs: dict[str, list[Token]], stored: list[tuple[str, int, int, str, str]]
          ) -> Scores:
    """Compare the stored words layer (doc, local start, local end, align class, label, in tier order)
    with the key, counted here from the tokens, independently of strata."""
    out = Scores(rows=len(stored))
    assert len(stored) == len(tier.key), "every tier row is stored once"
    starts = {d: [t.start for t in toks] for d, toks in docs.items()}
    for (doc, key), (sdoc, s, e, cls, label) in zip(tier.key, stored):
        assert doc == sdoc
        out.keyed += key is not None
        if cls not in GOOD:
            continue
        out.aligned += 1
        if key == (s, e):
            out.correct += 1
            continue
        toks = docs[doc]
        i = bisect.bisect_right(starts[doc], s) - 1
        covered = [t for t in toks[max(i, 0):] if t.start < e and t.end > s][:50]
        if len({t.sentence for t in covered}) > 1:
            out.across_sentences += 1
        if any((t.start, t.end) != key for t in covered):
            out.on_a_neighbour += 1
        text_numbers = [n for t in covered for n in _DIGITS.findall(t.form)]
        if (_DIGITS.findall(label) or text_numbers) and _DIGITS.findall(label) != text_numbers:
            out.wrong_number += 1
        if len(out.examples) < 8:
            out.examples.append(f"{doc}: {label!r} on {[t.form for t in covered]} ({cls}), key {key}")
    return out


def run(path: Path, work: Path, **kw) -> tuple[MessyTier, Scores]:
    """Import ``path`` (CoNLL-U) and its messy tier into a new corpus under ``work``; score it."""
    from engine import Corpus
    docs = surface_tokens(path)
    tier = messy_tier(docs, **kw)
    corpus = Corpus.create(work / "corpus")
    corpus.import_files([path], progress=False)
    tiers = work / "messy.tiers.tsv"
    write_tier(tier, tiers)
    corpus.import_files([tiers], progress=False)
    stored = corpus.connect().execute(
        """SELECT d.name, w.start - d.base, w."end" - d.base, w.align, w.label
           FROM spoken w JOIN documents d USING (doc) ORDER BY w.ord""").fetchall()
    return tier, score(tier, docs, stored)


def main(argv: list[str]) -> int:
    import tempfile
    shared = Path(__file__).resolve().parents[2] / "shared" / "data" / "ud-english-gum"
    for split in ("dev", "test"):
        path = shared / f"en_gum-ud-{split}.conllu"
        if not path.exists():
            print(f"{path} is absent", file=sys.stderr)
            return 2
        with tempfile.TemporaryDirectory() as tmp:
            tier, s = run(path, Path(tmp))
        print(f"{split}: {s.rows} tier words ({', '.join(f'{k} {v}' for k, v in sorted(tier.kinds.items()))}); "
              f"aligned {s.aligned}, on their token {s.correct}: precision {s.precision:.4f}, recall "
              f"{s.recall:.4f}; across sentences {s.across_sentences}, on a neighbour {s.on_a_neighbour}, "
              f"wrong number {s.wrong_number}")
        for ex in s.examples:
            print("   ", ex)
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
