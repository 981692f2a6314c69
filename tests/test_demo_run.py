"""The demo's showcase queries: each finds something, and seven agree with values computed
here straight from the demo data files.

Reference sources for the expected values: the `conllu` package (CoNLL-U reader: sentences,
multiword token ranges, MISC SpaceAfter=No as in the CoNLL-U definition at
universaldependencies.org), `nltk.Tree.fromstring` (bracketed trees), the `csv` module (the
tier and span tables).  The document text is rebuilt from the CoNLL-U by the rule that
corpora_demo/README.md gives for the span offsets (surface tokens joined by a space unless
SpaceAfter=No, sentences joined by a line break).  The demo data are invented; these checks
test the engine's joins across layers, not anything about speech.
"""
from __future__ import annotations

import csv
import io
import subprocess
import sys
from collections import Counter, defaultdict
from dataclasses import dataclass, field
from pathlib import Path

import conllu
import nltk
import pytest
from rich.console import Console

from corpora_demo.run import DATA, SHOWCASE, build
from tests.conftest import demo_tier_rows

REPO = Path(__file__).resolve().parents[1]
TIME_DIGITS = 3          # the tiers give times in whole milliseconds, written as seconds


# ---- the demo corpus, built once ------------------------------------------------------------

@pytest.fixture(scope="module")
def corpus(tmp_path_factory):
    quiet = Console(file=io.StringIO(), width=120)
    return build(tmp_path_factory.mktemp("demo") / "calls", quiet)


@pytest.fixture(scope="module")
def results(corpus) -> dict[str, object]:
    """Every showcase's full hit table (no row limit), by its query text."""
    return {query: corpus.query(query) for _, query in SHOWCASE}


def showcase(results: dict[str, object], tokens: str):
    """The hit table of the one showcase whose query contains ``tokens``."""
    found = [hits for query, hits in results.items() if tokens in query]
    assert len(found) == 1, f"expected one showcase query containing {tokens!r}"
    return found[0]


# ---- the data files, read with reference libraries ---------------------------------------

@dataclass
class Sentence:
    doc: str
    sent_id: str
    speaker: str
    tokens: list[str]                       # syntactic words (CoNLL-U integer ids), in order
    upos: list[str]                         # their UPOS
    lemmas: list[str]                       # their lemmas
    spans: list[tuple[int, int]]           # each token's characters (see _part_spans)
    surface: list[int]                     # each token's index among the doc's non-punctuation surface tokens, or -1
    start: int = 0
    end: int = 0


@dataclass
class Demo:
    sentences: list[Sentence] = field(default_factory=list)
    trees: dict[str, list[nltk.Tree]] = field(default_factory=dict)
    tiers: list[dict[str, str]] = field(default_factory=list)
    spans: list[dict[str, str]] = field(default_factory=list)
    texts: dict[str, str] = field(default_factory=dict)
    surface_forms: dict[str, list[str]] = field(default_factory=dict)   # non-punctuation surface tokens

    def sentence_at(self, doc: str, start: int, end: int) -> Sentence:
        found = [s for s in self.sentences if s.doc == doc and s.start <= start and end <= s.end]
        assert len(found) == 1, (doc, start, end)
        return found[0]

    def filled_pauses(self):
        """(span row, its sentence, the index of the token it covers) for each filled_pause row."""
        for row in self.spans:
            if row["label"] == "filled_pause":
                start, end = int(row["start"]), int(row["end"])
                s = self.sentence_at(row["doc"], start, end)
                yield row, s, s.spans.index((start, end))

    def tier(self, doc: str, name: str) -> list[dict[str, str]]:
        return [r for r in self.tiers if r["doc"] == doc and r["tier"] == name]

    def timed_words(self, doc: str) -> list[dict[str, str]]:
        """The aligner's words of one call without events like {laugh}, in time order."""
        return sorted((r for r in self.tier(doc, "spoken") if not r["label"].startswith("{")),
                      key=lambda r: float(r["start"]))


def read_sentences(path: Path) -> tuple[list[Sentence], dict[str, str], dict[str, list[str]]]:
    """Sentences with character spans in the rebuilt document text, the texts, and each
    document's non-punctuation surface tokens."""
    sentences: list[Sentence] = []
    texts: dict[str, list[str]] = defaultdict(list)
    offsets: dict[str, int] = defaultdict(int)
    surface_forms: dict[str, list[str]] = defaultdict(list)
    doc = None
    for sent in conllu.parse(path.read_text(encoding="utf-8")):
        doc = sent.metadata.get("newdoc id", doc)
        if texts[doc]:
            texts[doc].append("\n")
            offsets[doc] += 1
        s = Sentence(doc, sent.metadata["sent_id"], sent.metadata.get("speaker", ""), [], [], [], [], [],
                     start=offsets[doc])
        parts_of: dict[int, tuple[int, int, int]] = {}       # token id -> (start, end, surface index)
        pieces: list[str] = []
        pos = offsets[doc]
        last = None
        for tok in sent:
            tid = tok["id"]
            if isinstance(tid, tuple) and tid[1] == "-":
                covered = range(tid[0], tid[2] + 1)
            elif isinstance(tid, int) and tid not in parts_of:
                covered = range(tid, tid + 1)
            else:
                continue
            if last is not None and (last["misc"] or {}).get("SpaceAfter") != "No":
                pieces.append(" ")
                pos += 1
            punct = isinstance(tid, int) and tok["upos"] == "PUNCT"
            index = -1 if punct else len(surface_forms[doc])
            if not punct:
                surface_forms[doc].append(tok["form"])
            for w, (start, end) in zip(covered, _part_spans(sent, covered, tok["form"], pos)):
                parts_of[w] = (start, end, index)
            pieces.append(tok["form"])
            pos += len(tok["form"])
            last = tok
        for tok in sent:
            if isinstance(tok["id"], int):
                start, end, index = parts_of[tok["id"]]
                s.tokens.append(tok["form"])
                s.upos.append(tok["upos"])
                s.lemmas.append(tok["lemma"])
                s.spans.append((start, end))
                s.surface.append(index)
        s.end = pos
        offsets[doc] = pos
        texts[doc].append("".join(pieces))
        sentences.append(s)
    return sentences, {d: "".join(t) for d, t in texts.items()}, dict(surface_forms)


def _part_spans(sent: conllu.TokenList, ids: range, form: str, pos: int) -> list[tuple[int, int]]:
    """Characters of each token of a surface token: "I'd" = "I" + "'d" when the tokens spell the
    word (as in English contractions); otherwise every token gets the whole word."""
    forms = [t["form"] for t in sent if t["id"] in ids]
    if len(ids) == 1 or "".join(forms) != form:
        return [(pos, pos + len(form))] * len(ids)
    out = []
    for f in forms:
        out.append((pos, pos + len(f)))
        pos += len(f)
    return out


def read_trees(path: Path) -> dict[str, list[nltk.Tree]]:
    """Trees by `# sent` id; several trees in a row under one id are its readings 0, 1, ..."""
    trees: dict[str, list[nltk.Tree]] = defaultdict(list)
    sent, buf, depth = None, [], 0
    for line in path.read_text(encoding="utf-8").splitlines():
        if depth == 0 and line.startswith("#"):
            key, _, value = line[1:].partition("=")
            if key.strip() == "sent":
                sent = value.strip()
            continue
        if not line.strip():
            continue
        buf.append(line)
        depth += line.count("(") - line.count(")")
        if depth == 0:
            tree = nltk.Tree.fromstring("\n".join(buf))
            if tree.label() == "" and len(tree) == 1:     # optional root wrapper ( (S ...) )
                tree = tree[0]
            trees[sent].append(tree)
            buf = []
    return dict(trees)


def read_table(path: Path) -> list[dict[str, str]]:
    with open(path, encoding="utf-8", newline="") as f:
        return list(csv.DictReader(f, delimiter="\t"))


@pytest.fixture(scope="module")
def demo() -> Demo:
    sentences, texts, surface = read_sentences(DATA / "calls.conllu")
    d = Demo(sentences, read_trees(DATA / "calls.trees"), demo_tier_rows(DATA),
             read_table(DATA / "calls.spans.tsv"), texts, surface)
    # the rebuilt text is the one the span offsets index (its own `text` column says so)
    for row in d.spans:
        assert d.texts[row["doc"]][int(row["start"]):int(row["end"])] == row["text"]
    # the aligner's words are the non-punctuation surface tokens, lower-cased (README), so
    # the n-th of them is the n-th timed token
    for doc in d.texts:
        assert [w["label"] for w in d.timed_words(doc)] == [f.lower() for f in d.surface_forms[doc]]
    return d


def word_leaves(tree: nltk.Tree) -> list[tuple[int, ...]]:
    """Tree positions of the leaves that are tokens (not empty elements under -NONE-)."""
    return [p for p in tree.treepositions("leaves") if tree[p[:-1]].label() != "-NONE-"]


def constituents(tree: nltk.Tree, sentence: Sentence):
    """(label, parent label, first token, last token) of every constituent that covers a token."""
    leaves = word_leaves(tree)
    assert [tree[p] for p in leaves] == sentence.tokens, sentence.sent_id
    for pos in tree.treepositions():
        node = tree[pos]
        if not isinstance(node, nltk.Tree) or node.label() == "-NONE-":
            continue
        covered = [k for k, leaf in enumerate(leaves) if leaf[:len(pos)] == pos]
        if covered:
            parent = tree[pos[:-1]].label() if pos else None
            yield pos, node.label(), parent, covered[0], covered[-1]


def category(label: str) -> str:
    """`NP-SBJ-1` -> `NP`, `NP=2` -> `NP` (function tags and indices dropped, treebank convention)."""
    return label.split("=")[0].split("-")[0] if not label.startswith("-") else label


def rounded(t: float | str) -> float:
    return round(float(t), TIME_DIGITS)


def ms(t: float | str) -> int:
    """A time of the tier table (seconds with three decimals) as whole milliseconds."""
    return round(float(t) * 1000)


# ---- every showcase finds something -------------------------------------------------------

def test_there_are_six_to_eight_showcases_each_explained():
    assert 6 <= len(SHOWCASE) <= 8
    assert all(explanation.strip() and query.startswith("find ") for explanation, query in SHOWCASE)
    assert len({q for _, q in SHOWCASE}) == len(SHOWCASE)


@pytest.mark.parametrize("query", [q for _, q in SHOWCASE], ids=[f"showcase{i}" for i in range(1, len(SHOWCASE) + 1)])
def test_showcase_has_rows(results, query):
    assert len(results[query]) > 0


# ---- showcases checked against the data files ------------------------------------------------

def test_filled_pauses_by_speaker_and_smallest_constituent(results, demo):
    """Each filled_pause row of the span table, with its sentence's speaker from the CoNLL-U
    and the category of the lowest constituent of reading 0 that is larger than the pause."""
    want = Counter()
    for row, s, k in demo.filled_pauses():
        start, end = int(row["start"]), int(row["end"])
        best = None
        for pos, label, _, first, last in constituents(demo.trees[s.sent_id][0], s):
            span = (s.spans[first][0], s.spans[last][1])
            if first <= k <= last and span != (start, end) and (best is None or len(pos) > len(best[0])):
                best = (pos, label)
        want[(s.speaker, category(best[1]))] += 1
    hits = showcase(results, 'label = "filled_pause"), c = tree')
    got = {(r["f.sentence.speaker"], r["c.category"]): r["count"] for r in hits.rows()}
    assert got == dict(want)
    # every filled pause is counted once: per speaker, the totals are the span table's rows
    by_speaker = Counter()
    for (speaker, _), n in got.items():
        by_speaker[speaker] += n
    table = Counter(r["speaker"] for r in demo.spans if r["label"] == "filled_pause")
    assert by_speaker == table


def test_ambiguous_sentences_and_their_readings(results, demo):
    """Sentences with two trees in calls.trees, and the PP whose parent is a VP in one reading
    and an NP in the other."""
    two = {sid: ts for sid, ts in demo.trees.items() if len(ts) == 2}
    assert len(two) == sum(1 for ts in demo.trees.values() if len(ts) > 1)
    want = set()
    by_id = {s.sent_id: s for s in demo.sentences}
    for sid, trees in two.items():
        s = by_id[sid]
        attached = []
        for reading, tree in enumerate(trees):
            for _, label, parent, first, last in constituents(tree, s):
                if category(label) == "PP":
                    attached.append((reading, category(parent), first, last))
        for rv, pv, fv, lv in attached:
            for rn, pn, fn, ln in attached:
                if pv == "VP" and pn == "NP" and (fv, lv) == (fn, ln):
                    text = demo.texts[s.doc][s.spans[fv][0]:s.spans[lv][1]]
                    want.add((sid, text, rv, rn))
    hits = showcase(results, "pp_v child of vp")
    got = {(r["pp_v.sentence.sent_id"], r["pp_v.text"], r["pp_v.reading"], r["pp_n.reading"])
           for r in hits.rows()}
    assert got == want
    assert {sid for sid, *_ in got} == set(two)
    assert all(rv != rn for _, _, rv, rn in got)


def test_restarts_and_repairs(results, demo):
    """Reparandum and repair rows of calls.spans.tsv that share a group."""
    groups: dict[tuple[str, str], dict[str, str]] = defaultdict(dict)
    for row in demo.spans:
        if row["label"] in ("reparandum", "repair") and row["group"]:
            groups[(row["doc"], row["group"])][row["label"]] = row["text"]
    want = {(g, d["reparandum"], d["repair"]) for (_, g), d in groups.items() if len(d) == 2}
    hits = showcase(results, "where r.group = p.group")
    got = [(r["r.group"], r["r.text"], r["p.text"]) for r in hits.rows()]
    assert sorted(got) == sorted(want) and len(got) == len(set(got))
    assert all(r["gap(r, p)"] >= 0 for r in hits.rows())


def _subject_word_starts(demo: Demo, doc: str) -> list[tuple[Sentence, int, int]]:
    """(sentence, first token, last token) of every NP-SBJ in reading 0 of the call's trees."""
    out = []
    for s in demo.sentences:
        if s.doc != doc:
            continue
        for _, label, _, first, last in constituents(demo.trees[s.sent_id][0], s):
            if label == "NP-SBJ":
                out.append((s, first, last))
    return out


def test_pauses_before_subject_phrases(results, demo):
    """A pause row with a speaker whose end is within 20 ms of the start time of the aligner's
    token that begins an NP-SBJ (`give or take 20ms`: two end points at most 20 ms apart count
    as equal); the pause's start and length come from the tier table."""
    want = Counter()
    for doc in demo.texts:
        tokens = demo.timed_words(doc)
        pauses = [p for p in demo.tier(doc, "pauses") if p["speaker"]]
        for s, first, _ in _subject_word_starts(demo, doc):
            assert s.surface[first] >= 0, "a subject never begins with punctuation"
            begins = ms(tokens[s.surface[first]]["start"])
            for p in pauses:
                if abs(ms(p["end"]) - begins) <= 20:
                    want[(doc, rounded(p["start"]), rounded(float(p["end"]) - float(p["start"])))] += 1
    hits = showcase(results, "where p meets np give or take 20ms")
    got = Counter((r["doc"], rounded(r["p.start"]), rounded(r["p.duration"])) for r in hits.rows())
    assert got == want
    assert sum(want.values()) > 0


def test_phones_in_words_inside_subject_phrases(results, demo):
    """Phone rows inside the time of an aligner word whose surface token lies wholly inside an
    NP-SBJ of reading 0: their count and mean duration by the sentence's speaker."""
    durations: dict[str, list[float]] = defaultdict(list)
    for doc in demo.texts:
        tokens = demo.timed_words(doc)
        phones = demo.tier(doc, "phones")
        for s, first, last in _subject_word_starts(demo, doc):
            np_chars = (s.spans[first][0], s.spans[last][1])
            words_of: dict[int, list[tuple[int, int]]] = defaultdict(list)   # surface token -> its tokens
            for k, index in enumerate(s.surface):
                if index >= 0:
                    words_of[index].append(s.spans[k])
            inside = {i for i, spans in words_of.items()
                      if all(np_chars[0] <= a and b <= np_chars[1] for a, b in spans)}
            for w in inside:
                ws, we = float(tokens[w]["start"]), float(tokens[w]["end"])
                durations[s.speaker] += [float(p["end"]) - float(p["start"]) for p in phones
                                         if ws <= float(p["start"]) and float(p["end"]) <= we]
    hits = showcase(results, "where ph inside w and w inside np")
    got = {r["np.sentence.speaker"]: (r["count"], r["mean(ph.duration)"]) for r in hits.rows()}
    assert got == {k: (len(v), pytest.approx(sum(v) / len(v))) for k, v in durations.items()}


def test_pauses_shortly_before_restarts(results, demo):
    """A pause row that ends before a reparandum span's first spoken word starts (Allen's
    `before`: strictly earlier), by at most 1000 ms; a gap of exactly 1000 ms is inside."""
    want = Counter()
    for row in demo.spans:
        if row["label"] != "reparandum":
            continue
        start, end = int(row["start"]), int(row["end"])
        s = demo.sentence_at(row["doc"], start, end)
        first = next(s.surface[k] for k, (a, b) in enumerate(s.spans)
                     if start <= a and b <= end and s.surface[k] >= 0)
        begins = ms(demo.timed_words(row["doc"])[first]["start"])
        for p in demo.tier(row["doc"], "pauses"):
            if 0 < begins - ms(p["end"]) <= 1000:
                want[(row["doc"], row["text"], ms(p["end"]) - ms(p["start"]), begins - ms(p["end"]))] += 1
    hits = showcase(results, "where p before r by at most 1s")
    got = Counter((r["doc"], r["r.text"], ms(r["p.duration"]), ms(r["gap(p, r)"])) for r in hits.rows())
    assert got == want
    assert sum(want.values()) > 0


def test_interjections_before_pronouns_in_one_sentence(results, demo):
    """An INTJ and a PRON of one CoNLL-U sentence with at most one syntactic word (integer
    ids, punctuation included) strictly between them, counted by their lemmas."""
    want = Counter()
    for s in demo.sentences:
        for i, ui in enumerate(s.upos):
            for j, uj in enumerate(s.upos):
                if ui == "INTJ" and uj == "PRON" and 0 <= j - i - 1 <= 1:
                    want[(s.lemmas[i], s.lemmas[j])] += 1
    hits = showcase(results, "where i precedes p by at most 1 word in the same sentence")
    got = {(r["i.lemma"], r["p.lemma"]): r["count"] for r in hits.rows()}
    assert got == dict(want)
    assert sum(want.values()) > 0


# ---- the command ---------------------------------------------------------------------------

def test_demo_command_prints_every_explanation(tmp_path):
    done = subprocess.run([sys.executable, "-m", "engine.cli", "demo", "--corpus", str(tmp_path / "calls")],
                          cwd=REPO, capture_output=True, text=True, timeout=300)
    assert done.returncode == 0, done.stderr
    for explanation, query in SHOWCASE:
        assert explanation in done.stdout
        assert query.splitlines()[0] in done.stdout
    assert "Traceback" not in done.stdout + done.stderr
