"""Fuzzy matches stay in their place: a words tier unlike the text aligns on the right tokens.

The tier is built from the open treebank's own tokens (UD English GUM, both splits read in
place; characters computed by the `conllu` reference library in benchmarks/align_messy.py,
not by strata): words dropped, fillers inserted, words misheard, numbers spelled out or
changed. So the right characters of every tier word are known by construction, and the
figures are counted against that key.

The small cases are worked examples of the rules in engine/align/settle.py.
"""
from __future__ import annotations

import doctest

import pytest

import engine.align.settle as settle
from engine.align.sequence import GOOD, align_forms
from tests.conftest import gum_file


def placed(text: str, forms: list[str]) -> list[tuple[str, str | None, str]]:
    al = align_forms(text, forms)
    return [(f, text[a:b] if c in GOOD else None, c) for f, a, b, c in zip(forms, al.start, al.end, al.cls)]


def test_the_settle_docstring_examples_hold():
    failed, tried = doctest.testmod(settle)
    assert tried >= 6 and failed == 0


@pytest.mark.parametrize("text, forms, want", [
    # a spelled-out number is never put on the digits, nor on the letters of a neighbour
    ("we saw 22 of them", ["we", "saw", "twenty", "two", "of", "them"],
     [None, None]),
    # a different number is not the number
    ("we saw 22 of them", ["we", "saw", "23", "of", "them"], [None]),
    # one leaf for two words of the text takes both, whole
    ("it is all right now", ["it", "is", "alright", "now"], ["all right"]),
    # a misheard word takes its whole word, not its neighbour's article
    ("the establishments closed", ["establishmints", "closed"], ["establishments"]),
    # exactly half its letters is not enough: "four" does not take "Or"
    ("Stop. Or go on.", ["stop", "four", "go", "on"], [None]),
    # a leaf whose word the tier ran together with the next one keeps to one sentence
    ("the dog ran. Then it sat.", ["the", "dog", "ranthen", "it", "sat"], ["Then"]),
])
def test_fuzzy_leaves_take_whole_words_of_one_sentence(text, forms, want):
    got = [span for form, span, cls in placed(text, forms) if cls not in ("exact", "normalised")]
    assert got == want


def test_a_hyphen_parts_two_words_a_tier_says_apart():
    """"chlorine-containing" with "chlorine" not in the tier: "containing" alone, exact."""
    assert placed("a chlorine-containing gas", ["a", "containing", "gas"])[1] == ("containing", "containing", "exact")


def test_a_leaf_cut_into_a_word_is_placed_again():
    """"a" dropped "as" and matched its first letter: the cut is found and "a" goes to its own word."""
    got = placed("never proposed as a source", ["never", "propused", "a", "source"])
    assert got[2] == ("a", "a", "exact") and got[1] == ("propused", "proposed", "fuzzy")


@pytest.mark.parametrize("split", ["dev", "test"])
def test_a_messy_tier_aligns_on_its_tokens(split, tmp_path):
    from benchmarks.align_messy import run
    tier, s = run(gum_file(split), tmp_path)
    # the construction made every kind of difference, in numbers worth counting
    assert all(tier.kinds[k] > 100 for k in ("dropped", "filler", "misheard", "misheard number", "spelled number"))
    assert s.rows == len(tier.rows) and s.keyed > 20_000
    # never: a word across a sentence end, or a number on another number
    assert s.across_sentences == 0 and s.wrong_number == 0
    # measured 2026-12: dev precision 0.9996, recall 0.9963, 9 on a neighbour; test 1.0000,
    # 0.9969, 1. The few left are choices the text allows (a misheard "17" said as "18" taken
    # by the "18" beside it whose own word the tier dropped; a word repeated close by taken
    # in the other copy; GUM writing "ofAmerican" as one word), so a bound, not zero
    assert s.precision >= 0.999 and s.recall >= 0.99
    assert s.on_a_neighbour <= 12
