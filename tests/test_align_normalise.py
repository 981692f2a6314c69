"""Normal forms against the Unicode Character Database (Python's ``unicodedata``).

Every dash (general category Pd) becomes ``-``; every punctuation character (category P*)
named ... QUOTATION MARK becomes ``"`` when its name says DOUBLE, otherwise ``'`` (the angle marks
without SINGLE in their name are the double ones); the treebank escapes are those of the Penn Treebank (-LRB- for "(",
from memory of the bracketing guidelines).
"""
from __future__ import annotations

import sys
import unicodedata

import pytest

from engine.align.normalise import normalise_form, normalise_text
from engine.align.sequence import align_forms

ALL = [chr(i) for i in range(sys.maxunicode + 1) if not 0xD800 <= i <= 0xDFFF]


def test_dashes_and_quotes_follow_the_unicode_names():
    dashes = [c for c in ALL if unicodedata.category(c) == "Pd" and unicodedata.normalize("NFKC", c) == c]
    assert len(dashes) > 15
    assert {normalise_form(c) for c in dashes} == {"-"}
    quotes = [c for c in ALL if "QUOTATION MARK" in unicodedata.name(c, "") and not c.isascii()
              and unicodedata.category(c).startswith("P")
              and unicodedata.normalize("NFKC", c) == c]
    for c in quotes:
        name = unicodedata.name(c)
        double = "DOUBLE" in name or ("ANGLE QUOTATION" in name and "SINGLE" not in name)
        assert normalise_form(c) == ('"' if double else "'"), name


@pytest.mark.parametrize("escaped, written", [("-LRB-", "("), ("-RRB-", ")"), ("-LSB-", "["), ("-RSB-", "]"),
                                              ("-LCB-", "{"), ("-RCB-", "}"), ("``", '"'), ("''", '"')])
def test_treebank_escapes(escaped, written):
    assert normalise_form(escaped) == written


def test_text_offsets_point_back_to_original_characters():
    text = "Ein \u201eStra\u00dfe\u201c \u2026 done"
    norm, origin = normalise_text(text)
    assert norm == 'ein"strasse"...done'            # casefold: sharp s -> ss (Unicode case folding)
    assert [text[i] for i in origin[3:12]] == ["\u201e", "S", "t", "r", "a", "\u00df", "\u00df", "e", "\u201c"]


def test_classes_of_leaves():
    text = "\u201cWe\u2019re late,\u201d she said (twice)."
    forms = ["``", "We", "'re", "late", "''", "she", "sayd", "-LRB-", "twice", "-RRB-", "{cough}", "zzzzzz"]
    al = align_forms(text, forms)
    got = {f: (c, text[s:e]) for f, c, s, e in zip(forms, al.cls, al.start, al.end)}
    assert got["We"] == ("exact", "We")
    assert got["'re"] == ("normalised", "\u2019re")
    assert got["``"] == ("normalised", "\u201c") and got["''"] == ("normalised", "\u201d")
    assert got["sayd"] == ("fuzzy", "said")
    assert got["-LRB-"] == ("normalised", "(")
    assert got["{cough}"][0] == "event" and got["{cough}"][1] == ""
    assert got["zzzzzz"][0] == "unaligned" and got["zzzzzz"][1] == ""
