"""Aggregates per group on the open treebank (UD English GUM, dev split) against values counted
here from the CoNLL-U file with the `conllu` reference library (PyPI) and Python's
`statistics` module (whose `quantiles(method="inclusive")` is the linear interpolation of
Hyndman and Fan's type 7, the one `quantile` promises).

None of the expected values is typed in: each is computed in the test from the file.
"""
from __future__ import annotations

import statistics
import unicodedata
from collections import Counter, defaultdict

import conllu
import pytest



@pytest.fixture(scope="module")
def gum(gum_corpora):
    corpus, _, path = gum_corpora["dev"]
    return corpus, conllu.parse(path.read_text(encoding="utf-8"))


def words(sentence):
    """Syntactic words: integer CoNLL-U IDs (no multiword ranges, no empty nodes)."""
    return [t for t in sentence if isinstance(t["id"], int)]


def documents(sentences):
    """(doc id, genre, [sentences]) in file order (# newdoc id, # meta::genre)."""
    docs: dict[str, list] = {}
    genre: dict[str, str] = {}
    doc = None
    for s in sentences:
        doc = s.metadata.get("newdoc id", doc)
        genre.setdefault(doc, s.metadata.get("meta::genre"))
        docs.setdefault(doc, []).append(s)
    return [(d, genre[d], ss) for d, ss in docs.items()]


def test_frequent_verb_lemmas_with_having_in_the_default_order(gum):
    corpus, sentences = gum
    lemmas = Counter(t["lemma"] for s in sentences for t in words(s) if t["upos"] == "VERB")
    want = sorted(((l, n) for l, n in lemmas.items() if n >= 20), key=lambda x: (-x[1], x[0]))
    hits = corpus.query('find v = word(upos = "VERB") count per v.lemma having count >= 20')
    assert [(r["v.lemma"], r["count"]) for r in hits.rows()] == want
    assert len(want) > 10


def test_order_by_overrides_the_default_and_ties_fall_back_to_it(gum):
    corpus, sentences = gum
    lemmas = Counter(t["lemma"] for s in sentences for t in words(s) if t["upos"] == "VERB")
    hits = corpus.query('find v = word(upos = "VERB") count per v.lemma having count >= 20 order by v.lemma desc')
    assert [r["v.lemma"] for r in hits.rows()] == sorted((l for l, n in lemmas.items() if n >= 20), reverse=True)
    # ties in the user's key (count) fall back to the default order: count desc, then the key
    hits = corpus.query('find v = word(upos = "VERB") count per v.lemma having count >= 5 order by count')
    assert [(r["v.lemma"], r["count"]) for r in hits.rows()] == sorted(
        ((l, n) for l, n in lemmas.items() if n >= 5), key=lambda x: (x[1], x[0]))


def test_count_distinct_lemmas(gum):
    corpus, sentences = gum
    want = {t["lemma"] for s in sentences for t in words(s) if t["upos"] == "VERB"}
    [row] = corpus.query('find v = word(upos = "VERB") count, count distinct v.lemma').rows()
    assert row["count distinct v.lemma"] == len(want)
    assert row["count"] == sum(1 for s in sentences for t in words(s) if t["upos"] == "VERB")


def test_verbs_with_an_oblique_count_verbs_not_matches(gum):
    corpus, sentences = gum
    pairs, verbs = 0, set()
    for k, s in enumerate(sentences):
        upos = {t["id"]: t["upos"] for t in words(s)}
        for t in words(s):
            if t["deprel"] == "obl" and upos.get(t["head"]) == "VERB":
                pairs += 1
                verbs.add((k, t["head"]))
    [row] = corpus.query('find v = word(upos = "VERB"), o = word(deprel = "obl") '
                         'where o depends on v count, count distinct v').rows()
    assert (row["count"], row["count distinct v"]) == (pairs, len(verbs))
    assert pairs > len(verbs)          # a verb with two obliques is one verb


def test_rate_per_thousand_words_per_document_lists_every_document(gum):
    corpus, sentences = gum
    want = {}
    for doc, _, ss in documents(sentences):
        n = sum(1 for s in ss for t in words(s) if t["upos"] == "NOUN")
        total = sum(len(words(s)) for s in ss)
        want[doc] = (n, total, 1000 * n / total)
    hits = corpus.query('find t = word(upos = "NOUN") rate per t.doc')
    assert hits.columns == ["t.doc", "count", "words", "rate"]
    got = {r["t.doc"]: (r["count"], r["words"], r["rate"]) for r in hits.rows()}
    assert got.keys() == want.keys()
    for doc, (n, total, rate) in want.items():
        assert got[doc][:2] == (n, total) and got[doc][2] == pytest.approx(rate)
    rates = [r["rate"] for r in hits.rows()]
    assert rates == sorted(rates, reverse=True)                # the default order: the rate, descending


def test_rate_lists_groups_without_hits_as_zero(gum):
    corpus, sentences = gum
    docs = documents(sentences)
    lemma = "government"
    per_genre: dict[str, list[int]] = defaultdict(lambda: [0, 0])
    for _, genre, ss in docs:
        for s in ss:
            per_genre[genre][0] += sum(1 for t in words(s) if t["lemma"] == lemma)
            per_genre[genre][1] += len(words(s))
    assert any(n == 0 for n, _ in per_genre.values()) and any(n > 0 for n, _ in per_genre.values())
    hits = corpus.query(f'find t = word(lemma = "{lemma}") rate per t.doc.genre')
    got = {r["t.doc.genre"]: (r["count"], r["words"], r["rate"]) for r in hits.rows()}
    assert got == {g: (n, w, pytest.approx(1000 * n / w)) for g, (n, w) in per_genre.items()}


def test_median_stdev_and_quantile_of_form_lengths(gum):
    corpus, sentences = gum
    lengths: dict[str, list[int]] = defaultdict(list)
    for s in sentences:
        for t in words(s):
            lengths[t["upos"]].append(len(t["form"]))
    hits = corpus.query("find t = word median(length(t.form)), stdev(length(t.form)), "
                        "quantile(length(t.form), 0.9) as q90, min(length(t.form)) per t.upos")
    got = {r["t.upos"]: r for r in hits.rows()}
    assert got.keys() == lengths.keys()
    for upos, v in lengths.items():
        r = got[upos]
        assert r["median(length(t.form))"] == pytest.approx(statistics.median(v))
        assert r["min(length(t.form))"] == min(v) and r["count"] == len(v)
        if len(v) > 1:
            assert r["stdev(length(t.form))"] == pytest.approx(statistics.stdev(v))
            assert r["q90"] == pytest.approx(statistics.quantiles(v, n=10, method="inclusive")[8])
    medians = [r["median(length(t.form))"] for r in hits.rows()]
    assert medians == sorted(medians, reverse=True)


def test_fold_makes_typographic_and_plain_apostrophes_one_value(gum):
    corpus, sentences = gum
    table = str.maketrans({"\u2019": "'", "\u2018": "'", "\u201b": "'", "\u02bc": "'",
                           "\u201c": '"', "\u201d": '"', "\u201e": '"'})

    def fold(s: str) -> str:
        return unicodedata.normalize("NFC", s).translate(table).lower()
    want = Counter(fold(t["form"]) for s in sentences for t in words(s) if "'" in t["form"] or "\u2019" in t["form"])
    hits = corpus.query('find t = word(form ~ "[\'\u2019]") count per fold(t.form)')
    got = {r["fold(t.form)"]: r["count"] for r in hits.rows()}
    assert got == dict(want)
    assert got["n't"] == sum(1 for s in sentences for t in words(s) if t["form"].lower() in ("n't", "n\u2019t"))
    lower = corpus.query('find t = word(form ~ "[\'\u2019]") count per lower(t.form)').rows()
    kept_apart = {r["lower(t.form)"] for r in lower}           # lower() alone keeps them apart
    assert {"n't", "n\u2019t"} <= kept_apart and len(kept_apart) > len(got)


def test_a_listing_in_the_users_order_then_in_text_order(gum):
    corpus, sentences = gum
    adjectives = [(len(t["form"]), t["form"], s.metadata["sent_id"], k, t["id"])
                  for k, s in enumerate(sentences) for t in words(s) if t["upos"] == "ADJ"]
    want = sorted(adjectives, key=lambda a: (-a[0], a[1], a[3], a[4]))[:60]
    hits = corpus.query('find t = word(upos = "ADJ") show t.form, length(t.form) '
                        'order by length(t.form) desc, t.form limit 60')
    assert [(r["length(t.form)"], r["t.form"], r["sentence"]) for r in hits.rows()] == [a[:3] for a in want]


@pytest.mark.parametrize("side, descending", [("left", False), ("left", True), ("right", False), ("right", True)])
def test_a_concordance_sorted_by_its_context_nearest_word_first(gum, side, descending):
    """Checked against a sort done here on the listing itself: the context split at white space,
    lower-cased, the word nearest the hit first; ties keep the order of the text (a stable sort)."""
    corpus, _ = gum
    query = 'find t = word(lemma = "time") show t.form'
    listing = corpus.query(query).rows()
    assert len(listing) > 30

    def key(row):
        words = row[side].lower().split()
        return words[::-1] if side == "left" else words
    want = sorted(listing, key=key, reverse=descending)
    got = corpus.query(f"{query} order by {side}{' desc' if descending else ''}").rows()
    assert [r["t.node"] for r in got] == [r["t.node"] for r in want]
    first = corpus.query(f"{query} order by {side}{' desc' if descending else ''} limit 7").rows()
    assert [r["t.node"] for r in first] == [r["t.node"] for r in want[:7]]


def test_mean_sentence_length_per_genre_and_document_lengths(gum):
    """Sentences and documents carry their length in syntactic words (integer IDs)."""
    corpus, sentences = gum
    lengths: dict[str, list[int]] = defaultdict(list)
    doc_words = {}
    for doc, genre, ss in documents(sentences):
        lengths[genre] += [len(words(s)) for s in ss]
        doc_words[doc] = sum(len(words(s)) for s in ss)
    hits = corpus.query("find s = sentence mean(s.words), max(s.words) per s.doc.genre")
    got = {r["s.doc.genre"]: (r["mean(s.words)"], r["max(s.words)"], r["count"]) for r in hits.rows()}
    assert got == {g: (pytest.approx(statistics.mean(v)), max(v), len(v)) for g, v in lengths.items()}
    # every sentence has one root word: per document, the longest sentence and the whole length
    docs = corpus.query('find t = word(deprel = "root") max(t.sentence.words), max(t.doc.words) per t.doc').rows()
    longest = {d: max(len(words(s)) for s in ss) for d, _, ss in documents(sentences)}
    assert {r["t.doc"]: (r["max(t.sentence.words)"], r["max(t.doc.words)"]) for r in docs} == {
        d: (longest[d], doc_words[d]) for d in doc_words}
