"""Tree attributes spelled out (label, category, function) and the part of speech on the
preterminal, checked on the demo's bracketed trees against `nltk.Tree` (PyPI) as the reference
reader; category and function are split from a label as the Penn Treebank bracketing
guidelines do (`NP-SBJ-1` -> `NP`, `SBJ`; `=2` gap indices dropped)."""
from __future__ import annotations

import io

import pytest
from rich.console import Console

from corpora_demo.run import DATA, build
from engine.errors import StrataError
from tests.test_demo_run import category, read_trees


@pytest.fixture(scope="module")
def corpus(tmp_path_factory):
    return build(tmp_path_factory.mktemp("trees") / "calls", Console(file=io.StringIO()))


@pytest.fixture(scope="module")
def trees():
    return [t for ts in read_trees(DATA / "calls.trees").values() for t in ts]


def preterminals(tree):
    """(position, label) of every node whose one child is a word."""
    for pos in tree.treepositions():
        node = tree[pos]
        if hasattr(node, "label") and len(node) == 1 and isinstance(node[0], str):
            yield pos, node.label()


def function(label: str) -> str | None:
    parts = label.split("=")[0].split("-")
    return parts[1] if len(parts) > 1 and parts[0] and not parts[1].isdigit() else None


def test_a_part_of_speech_reaches_the_preterminal_under_a_noun_phrase(corpus, trees):
    want = sum(1 for t in trees for pos, label in preterminals(t)
               if label == "NNP" and pos and category(t[pos[:-1]].label()) == "NP")
    [row] = corpus.query('find n = tree(pos = "NNP"), np = tree(category = "NP") where n child of np count').rows()
    assert row["count"] == want > 0


def test_category_and_function_split_the_label(corpus, trees):
    labels = [t[p].label() for t in trees for p in t.treepositions() if hasattr(t[p], "label")
              and not (len(t[p]) == 1 and isinstance(t[p][0], str))]
    subjects = sum(1 for l in labels if category(l) == "NP" and function(l) == "SBJ")
    [row] = corpus.query('find s = tree(category = "NP", function = "SBJ") count').rows()
    assert row["count"] == subjects > 0
    [row] = corpus.query('find s = tree(label = "NP-SBJ") count').rows()
    assert row["count"] == labels.count("NP-SBJ")


@pytest.mark.parametrize("old, new", [("cat", "category"), ("func", "function")])
def test_the_old_short_names_get_a_did_you_mean(corpus, old, new):
    with pytest.raises(StrataError) as info:
        corpus.query(f'find s = tree({old} = "NP")')
    assert f"did you mean: {new}?" in info.value.hint
