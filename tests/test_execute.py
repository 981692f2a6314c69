"""run_query end to end: the mechanics on a small invented corpus, and real-data counts on the
open treebank (UD English GUM, dev split) checked against the `conllu` reference library."""
from __future__ import annotations

from collections import Counter
from fractions import Fraction

import conllu
import pytest

from engine.errors import StrataError
from engine.execute import compile_query, run_query
from tests.conftest import gum_file
from tests.querylang_corpus import ferry_corpus


@pytest.fixture(scope="module")
def ferry():
    return ferry_corpus()


def rows(con, sql):
    cur = con.execute(sql)
    names = [d[0] for d in cur.description]
    return [dict(zip(names, r)) for r in cur.fetchall()]


# ---- mechanics on the invented corpus ------------------------------------------------------

def test_hit_table_columns_and_text(ferry):
    con, cat = ferry
    hits = run_query(con, cat, 'find w = token(form = "ferry") show w.sentence.speaker')
    assert hits.columns == ["doc", "sentence", "start", "end", "w.doc", "w.sentence", "w.text", "w.char_start",
                            "w.char_end", "w.start", "w.end", "w.node", "w.sentence.speaker", "left", "hit", "right"]
    assert all(r["w.doc"] == r["doc"] and r["w.sentence"] == r["sentence"] for r in hits.rows())
    # one variable: the hit's times are its own
    assert all((r["start"], r["end"]) == (r["w.start"], r["w.end"]) for r in hits.rows())
    docs = {d["name"]: d["text"] for d in rows(con, "SELECT name, text FROM documents")}
    for r in hits.rows():
        assert docs[r["doc"]][r["w.char_start"]:r["w.char_end"]] == r["w.text"] == "ferry"
    speakers = {r["sent_id"]: r["speaker"] for r in rows(con, 'SELECT sent_id, speaker FROM "sentence"')}
    assert [r["w.sentence.speaker"] for r in hits.rows()] == [speakers[r["sentence"]] for r in hits.rows()]


@pytest.mark.parametrize("context", [0, 1, 2, 5, 50])
@pytest.mark.parametrize("cross", [False, True])
def test_keyword_in_context_counts_words_and_joins_back_to_the_text(ferry, context, cross):
    """N words each side (white-space words of this corpus's text), inside the hit's sentence
    unless the context crosses sentences; sentences are the stored sentence spans."""
    con, cat = ferry
    docs = {d["name"]: d["text"] for d in rows(con, "SELECT name, text FROM documents")}
    sentences = rows(con, 'SELECT s.sent_id, s.start - d.base AS a, s."end" - d.base AS b '
                          'FROM "sentence" s JOIN documents d USING (doc)')
    span = {r["sent_id"]: (r["a"], r["b"]) for r in sentences}
    hits = run_query(con, cat, "find w = token", context=context, cross_sentences=cross)
    for r in hits.rows():
        text = docs[r["doc"]]
        start, end = r["w.char_start"], r["w.char_end"]
        assert text[start - len(r["left"]):start] == r["left"]
        assert text[end:end + len(r["right"])] == r["right"]
        lo, hi = (0, len(text)) if cross else span[r["sentence"]]
        words_before = len(text[lo:start].split())
        words_after = len(text[end:hi].split())
        assert len(r["left"].split()) == min(context, words_before)
        assert len(r["right"].split()) == min(context, words_after)


def test_document_order(ferry):
    con, cat = ferry
    hits = run_query(con, cat, "find w = token")
    ids = [r["id"] for r in rows(con, 'SELECT id FROM "token" ORDER BY start')]
    assert hits.to_arrow().column("w.node").to_pylist() == ids


def test_limit_argument_and_clause_take_the_smaller(ferry):
    con, cat = ferry
    assert len(run_query(con, cat, "find w = token limit 4")) == 4
    assert len(run_query(con, cat, "find w = token limit 4", limit=2)) == 2
    assert len(run_query(con, cat, "find w = token limit 2", limit=9)) == 2
    assert len(run_query(con, cat, "find w = token limit 0")) == 0


def test_count_by_sorted_by_frequency_then_key(ferry):
    con, cat = ferry
    hits = run_query(con, cat, "find t = word count per t.upos")
    got = [(r["t.upos"], r["count"]) for r in hits.rows()]
    counts = Counter(r["upos"] for r in rows(con, 'SELECT upos FROM "word"'))
    assert got == sorted(counts.items(), key=lambda kv: (-kv[1], kv[0]))
    total = run_query(con, cat, "find t = word count").rows()
    assert total == [{"count": sum(counts.values())}]


def test_numeric_aggregates(ferry):
    con, cat = ferry
    data = rows(con, 'SELECT form, t_end - t_start AS d FROM "token"')     # whole microseconds
    for func, ref in (("mean", lambda v: sum(v) / len(v)), ("min", min), ("max", max), ("sum", sum)):
        hits = run_query(con, cat, f"find w = token {func}(w.duration) per w.form")
        by_form: dict[str, list[float]] = {}
        for r in data:
            by_form.setdefault(r["form"], []).append(r["d"])
        got = {r["w.form"]: r[f"{func}(w.duration)"] for r in hits.rows()}
        assert got == pytest.approx({k: ref(v) / 1_000_000 for k, v in by_form.items()})   # in seconds
        # the default order: the aggregate's value descending, then the key (exact fractions here)
        want = sorted(by_form, key=lambda k: (-Fraction(sum(by_form[k]), len(by_form[k])) if func == "mean"
                                              else -ref(by_form[k]), k))
        assert [r["w.form"] for r in hits.rows()] == want


def test_without_finds_heads_lacking_a_dependent(ferry):
    con, cat = ferry
    hits = run_query(con, cat, 'find v = word(upos = "VERB") '
                               'without o = word(deprel = "obj") where o depends on v show v.form')
    words = rows(con, 'SELECT id, upos, deprel FROM "word"')
    edges = rows(con, 'SELECT src, dst FROM "dep"')
    objects = {t["id"] for t in words if t["deprel"] == "obj"}
    has_obj = {e["dst"] for e in edges if e["src"] in objects}
    want = [t["id"] for t in words if t["upos"] == "VERB" and t["id"] not in has_obj]
    assert sorted(hits.to_arrow().column("v.node").to_pylist()) == sorted(want)
    assert want   # the corpus has such verbs


def test_readings(ferry):
    con, cat = ferry
    phrases = rows(con, 'SELECT id, sent, reading, label, start, "end", pre, post FROM "phrase"')
    tokens = rows(con, 'SELECT id, start, "end" FROM "token"')
    nps = [p for p in phrases if p["label"] == "NP"]
    # any reading: every (token, NP) pair by span
    anyr = run_query(con, cat, 'find w = token, np = phrase(label = "NP") where w inside np')
    want = {(w["id"], p["id"]) for w in tokens for p in nps if p["start"] <= w["start"] and w["end"] <= p["end"]}
    assert {(r["w.node"], r["np.node"]) for r in anyr.rows()} == want
    assert "np.reading" in anyr.columns
    # NP under VP holds in one reading only, so never "in every reading"
    under = run_query(con, cat, 'find np = phrase(label = "NP"), vp = phrase(label = "VP") where np under vp')
    assert len({r["np.reading"] for r in under.rows()}) == 1 and len(under) >= 1
    every = run_query(con, cat, 'find np = phrase(label = "NP"), vp = phrase(label = "VP") '
                                'where np under vp in every reading')
    assert len(every) == 0
    # a token inside an NP in every reading of its sentence
    readings = Counter()
    for sent in {p["sent"] for p in phrases}:
        readings[sent] = len({p["reading"] for p in phrases if p["sent"] == sent})
    every = run_query(con, cat, 'find w = token, np = phrase(label = "NP") where w inside np in every reading')
    want_words = {w["id"] for w in tokens
                  if any(readings[s] == len({p["reading"] for p in nps if p["sent"] == s and
                                             p["start"] <= w["start"] and w["end"] <= p["end"]}) for s in readings)}
    assert {r["w.node"] for r in every.rows()} == want_words
    # same reading: NP and S of one reading only
    same = run_query(con, cat, 'find np = phrase(label = "NP"), s = phrase(label = "S") '
                               'where np inside s in the same reading')
    assert all(r["np.reading"] == r["s.reading"] for r in same.rows())
    mixed = run_query(con, cat, 'find np = phrase(label = "NP"), s = phrase(label = "S") where np inside s')
    assert len(mixed) > len(same) > 0


def test_doc_and_sentence_attributes(ferry):
    con, cat = ferry
    hits = run_query(con, cat, 'find t = word(doc.genre = "timetable", sentence.speaker = "agent") show t.doc.genre')
    assert {r["doc"] for r in hits.rows()} == {"call-02"}
    assert {r["t.doc.genre"] for r in hits.rows()} == {"timetable"}


def test_regex_the_engine_refuses_is_a_user_error(ferry):
    con, cat = ferry
    # Python's re accepts look-ahead; DuckDB's RE2 does not: still a StrataError, not a traceback
    with pytest.raises(StrataError) as info:
        run_query(con, cat, 'find w = token(form matches "f(?=e)")')
    assert info.value.query is not None


def test_compile_query_api(ferry):
    _, cat = ferry
    compiled = compile_query('find w = token(form = "ferry")', cat)
    assert compiled.ast.bindings[0].var == "w"
    assert "$1" in compiled.sql and compiled.params[0] == "ferry"
    assert compiled.params[1] == 4             # context 5 tokens: 4 beyond the nearest one
    # then, for each of left, hit and right: line breaks (CRLF, CR, LF) become one space
    assert compiled.params[2:] == ["\r\n|\r|\n", " ", "g"] * 3
    assert compiled.kind == "hits"


# ---- real data: GUM dev against the conllu library -----------------------------------------

@pytest.fixture(scope="module")
def gum(tmp_path_factory):
    from engine import Corpus
    path = gum_file("dev")
    corpus = Corpus.create(tmp_path_factory.mktemp("gum-query") / "corpus")
    corpus.import_files([path], progress=False)
    sentences = conllu.parse(path.read_text(encoding="utf-8"))
    return corpus, sentences


def syntactic_words(sentence):
    return [t for t in sentence if isinstance(t["id"], int)]


def test_gum_pronoun_subjects_of_verbs_by_lemma(gum):
    corpus, sentences = gum
    want = Counter()
    for s in sentences:
        by_id = {t["id"]: t for t in syntactic_words(s)}
        for t in by_id.values():
            head = by_id.get(t["head"])
            if t["deprel"] == "nsubj" and t["upos"] == "PRON" and head and head["upos"] == "VERB":
                want[head["lemma"]] += 1
    hits = corpus.query('find s = word(deprel = "nsubj", upos = "PRON"), v = word(upos = "VERB") '
                        'where s depends on v count per v.lemma')
    got = [(r["v.lemma"], r["count"]) for r in hits.rows()]
    assert got == sorted(want.items(), key=lambda kv: (-kv[1], kv[0]))


def test_gum_verbs_without_subject(gum):
    corpus, sentences = gum
    want = 0
    for s in sentences:
        tokens = syntactic_words(s)
        with_subj = {t["head"] for t in tokens if t["deprel"] == "nsubj"}
        want += sum(1 for t in tokens if t["upos"] == "VERB" and t["id"] not in with_subj)
    hits = corpus.query('find v = word(upos = "VERB") without s = word(deprel = "nsubj") '
                        'where s depends on v count')
    assert hits.rows() == [{"count": want}]


def test_gum_determiner_directly_before_noun(gum):
    corpus, sentences = gum
    want = 0
    for s in sentences:
        tokens = syntactic_words(s)
        want += sum(1 for a, b in zip(tokens, tokens[1:]) if a["upos"] == "DET" and b["upos"] == "NOUN")
    hits = corpus.query('find a = word(upos = "DET"), b = word(upos = "NOUN") '
                        'where a directly precedes b and a.sent = b.sent count')
    assert hits.rows() == [{"count": want}]


def test_gum_ancestry_and_depth(gum):
    corpus, sentences = gum
    pairs_any = pairs_two = 0
    for s in sentences:
        by_id = {t["id"]: t for t in syntactic_words(s)}
        for t in by_id.values():
            chain, cur = [], t["head"]
            while cur:
                chain.append(cur)
                cur = by_id[cur]["head"]
            pairs_any += len(chain)
            pairs_two += 1 if len(chain) >= 2 else 0
    assert corpus.query("find a = word, b = word where a under b count").rows() == [{"count": pairs_any}]
    assert corpus.query("find a = word, b = word where a under b at depth 2 count").rows() == [{"count": pairs_two}]


def test_gum_plural_nouns_by_genre(gum):
    corpus, sentences = gum
    want, genre = Counter(), None
    for s in sentences:
        genre = s.metadata.get("meta::genre", genre)
        want[genre] += sum(1 for t in syntactic_words(s)
                           if t["upos"] == "NOUN" and (t["feats"] or {}).get("Number") == "Plur")
    hits = corpus.query('find t = word(upos = "NOUN", feats.Number = "Plur") count per t.doc.genre')
    assert {r["t.doc.genre"]: r["count"] for r in hits.rows()} == {k: v for k, v in want.items() if v}


def test_gum_surface_forms_with_context(gum):
    corpus, sentences = gum
    want = 0
    for s in sentences:
        covered: set[int] = set()
        for t in s:
            if isinstance(t["id"], tuple) and t["id"][1] == "-":
                covered |= set(range(t["id"][0], t["id"][2] + 1))
                want += t["form"].lower() == "uh"
            elif isinstance(t["id"], int) and t["id"] not in covered:
                want += t["form"].lower() == "uh"
    hits = corpus.query('find w = token(form matches "(?i)^uh$")', context=3)
    assert len(hits) == want > 0
    assert all(r["hit"].lower() == "uh" for r in hits.rows())


def test_limited_listing_is_the_head_of_the_full_listing(gum_corpora):
    """With a limit, context tokens are looked up among the hits' documents only; same rows."""
    corpus, _, _ = gum_corpora["dev"]
    for query in ('find t = word(upos = "VERB")',
                  'find m = mention(type = "person"), s = sentence where m inside s'):
        full = corpus.query(query, context=3).rows()
        head = corpus.query(query, limit=20, context=3).rows()
        assert len(head) == 20 and head == full[:20]
