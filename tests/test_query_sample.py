"""`sample N seed S` on the open treebank (UD English GUM, dev split): the size, that the hits
are hits of the query, repeatability (the same seed on one or two threads), and uniformity
over many seeds, by Pearson's chi-square test of goodness of fit.

The chi-square threshold is the 0.999 quantile of the distribution with k - 1 degrees of
freedom, by the Wilson-Hilferty approximation (Wilson and Hilferty 1931: (X/k)^(1/3) is close
to normal with mean 1 - 2/(9k) and variance 2/(9k)); z(0.999) = 3.0902 is the standard
normal quantile (from memory, to four decimals).  A uniform sampler fails it one run in 1000.
"""
from __future__ import annotations

from collections import Counter

import pytest

Z_999 = 3.0902


def chi_square_limit(df: int, z: float = Z_999) -> float:
    """Wilson-Hilferty: the upper quantile of chi-square with ``df`` degrees of freedom."""
    return df * (1 - 2 / (9 * df) + z * (2 / (9 * df)) ** 0.5) ** 3


def test_the_limit_matches_a_known_table_value():
    # chi-square 0.999 quantile with 10 degrees of freedom is 29.588 (printed statistical tables)
    assert chi_square_limit(10) == pytest.approx(29.588, rel=0.01)


@pytest.fixture(scope="module")
def corpus(gum_corpora):
    return gum_corpora["dev"][0]


DETS = 'find t = word(upos = "DET") show t.form'


def nodes(hits) -> list[int]:
    return [r["t.node"] for r in hits.rows()]


def test_a_sample_has_its_size_and_only_hits_of_the_query(corpus):
    every = nodes(corpus.query(DETS))
    drawn = nodes(corpus.query(DETS + " sample 50 seed 7"))
    assert len(drawn) == 50 == len(set(drawn)) and set(drawn) <= set(every)
    # listed in the query's own order (the order of the text)
    assert drawn == [n for n in every if n in set(drawn)]


def test_the_same_seed_gives_the_same_hits_on_any_number_of_threads(corpus):
    first = nodes(corpus.query(DETS + " sample 40 seed 11"))
    con = corpus._query_connection()
    threads = con.execute("SELECT current_setting('threads')").fetchone()[0]
    try:
        con.execute("SET threads = 1")
        again = nodes(corpus.query(DETS + " sample 40 seed 11"))
    finally:
        con.execute(f"SET threads = {int(threads)}")
    assert first == again
    assert nodes(corpus.query(DETS + " sample 40 seed 12")) != first


def test_a_sample_larger_than_the_result_lists_every_hit_with_a_note(corpus):
    every = corpus.query('find t = word(lemma = "government") show t.form')
    hits = corpus.query(f'find t = word(lemma = "government") show t.form sample {len(every) + 5} seed 1')
    assert nodes(hits) == nodes(every)
    assert hits.notes and f"{len(every)} hits" in hits.notes[0]
    assert not corpus.query(DETS + " sample 5").notes


def test_an_aggregate_counts_the_sampled_hits(corpus):
    [row] = corpus.query('find t = word(upos = "DET") count sample 60 seed 3').rows()
    assert row["count"] == 60


def test_samples_are_uniform_over_seeds(corpus):
    query = 'find t = word(lemma = "government") show t.form'
    every = nodes(corpus.query(query))
    k, size, seeds = len(every), 4, 400
    assert 10 <= k <= 60, k
    seen = Counter()
    for seed in range(seeds):
        drawn = nodes(corpus.query(f"{query} sample {size} seed {seed}"))
        assert len(drawn) == size
        seen.update(drawn)
    expected = seeds * size / k
    chi2 = sum((seen[n] - expected) ** 2 / expected for n in every)
    assert chi2 < chi_square_limit(k - 1), (chi2, k)
