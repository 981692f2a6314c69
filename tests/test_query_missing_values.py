"""The one rule for missing values, pinned on the open treebank (UD English GUM, dev split):
a test on a missing value is false, and `not` turns a false test true.  So for a word without
a Number feature, `feats.Number != "Sing"` and `feats.Number not in [...]` are false, while
`not feats.Number = "Sing"` and `not feats.Number in [...]` are true.  Expected counts are
made here from the CoNLL-U file with the `conllu` library (PyPI)."""
from __future__ import annotations

import conllu
import pytest


@pytest.fixture(scope="module")
def gum(gum_corpora):
    corpus, _, path = gum_corpora["dev"]
    numbers = [(t["feats"] or {}).get("Number") for s in conllu.parse(path.read_text(encoding="utf-8"))
               for t in s if isinstance(t["id"], int)]
    return corpus, numbers


def count(corpus, condition: str) -> int:
    return corpus.query(f"find t = word where {condition} count").rows()[0]["count"]


def test_the_corpus_has_words_with_and_without_the_feature(gum):
    _, numbers = gum
    assert numbers.count(None) > 1000 and numbers.count("Sing") > 1000 and numbers.count("Plur") > 100


@pytest.mark.parametrize("condition, keeps", [
    ('t.feats.Number = "Sing"', lambda n: n == "Sing"),
    ('t.feats.Number != "Sing"', lambda n: n is not None and n != "Sing"),
    ('t.feats.Number not in ["Sing"]', lambda n: n is not None and n != "Sing"),
    ('not t.feats.Number = "Sing"', lambda n: n != "Sing"),
    ('not t.feats.Number in ["Sing"]', lambda n: n != "Sing"),
    ('not t.feats.Number != "Sing"', lambda n: n is None or n == "Sing"),
    ('t.feats.Number ~ "^P"', lambda n: n is not None and n.startswith("P")),
    ('not t.feats.Number ~ "^P"', lambda n: n is None or not n.startswith("P")),
    ("t.feats.Number is missing", lambda n: n is None),
    ("t.feats.Number is not missing", lambda n: n is not None),
    ('not (t.feats.Number = "Sing" or t.feats.Number = "Plur")', lambda n: n not in ("Sing", "Plur")),
])
def test_a_test_on_a_missing_value_is_false_and_not_makes_it_true(gum, condition, keeps):
    corpus, numbers = gum
    assert count(corpus, condition) == sum(1 for n in numbers if keeps(n))
