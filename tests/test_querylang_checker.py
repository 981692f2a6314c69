"""Checker: names resolve against the catalog, mistakes are explained with suggestions."""
from __future__ import annotations

import pytest

from engine.errors import StrataError
from querylang import ast
from querylang.catalog import AttrInfo, LayerInfo, StaticCatalog
from querylang.checker import check
from querylang.parser import parse


def catalog() -> StaticCatalog:
    word = LayerInfo("word", "sequence", {n: AttrInfo(n) for n in ("form", "lemma", "upos", "deprel", "feats.Number")},
                      rows=100, tree=True, time=True, word_layer="word", token_layer="token", edge_sets=("dep",))
    token = LayerInfo("token", "sequence", {"form": AttrInfo("form")}, rows=90, time=True, token_layer="token",
                     word_layer="word")
    mention = LayerInfo("mention", "span", {"type": AttrInfo("type"), "chain": AttrInfo("chain", "int"),
                                            "chain_pos": AttrInfo("chain_pos", "int"),
                                            "first_mention": AttrInfo("first_mention", "bool")}, rows=10,
                        word_layer="word", token_layer="token")
    phrase = LayerInfo("phrase", "tree", {"label": AttrInfo("label")}, rows=20, tree=True, readings=True)
    sentence = LayerInfo("sentence", "span", {"speaker": AttrInfo("speaker"), "sent_id": AttrInfo("sent_id")})
    dep = LayerInfo("dep", "edges", {"label": AttrInfo("label")})
    return StaticCatalog({l.name: l for l in (word, token, mention, phrase, sentence, dep)},
                         dict(sentence.attrs), {"genre": AttrInfo("genre")})


def run(text: str):
    return check(parse(text), catalog(), text)


def error(text: str) -> StrataError:
    with pytest.raises(StrataError) as info:
        run(text)
    assert info.value.query == text
    return info.value


def test_names_resolve_to_refs():
    c = run('find t = word(feats.Number = "Plur", sentence.speaker = "agent", doc.genre = "call") '
            'where t.lemma = "be" show t.text, t.duration')
    conds = c.query.bindings[0].cond.items
    assert conds[0].left == ast.Ref("t", "column", "feats.Number", "str")
    assert conds[1].left == ast.Ref("t", "sentence", "speaker", "str")
    assert conds[2].left == ast.Ref("t", "doc", "genre", "str")
    assert c.query.where.left == ast.Ref("t", "column", "lemma", "str")
    assert [i.expr.kind for i in c.query.output.items] == ["text", "time"]
    assert c.layers["t"].name == "word"


def test_unknown_layer_suggests():
    err = error("find t = tokn(form = \"a\")")
    assert "unknown layer 'tokn'" in err.message and "did you mean: token" in err.hint
    assert (err.line, err.column) == (1, 10)                       # under the layer name


def test_unknown_attribute_suggests():
    err = error('find t = word(lemmma = "a")')
    assert "no attribute 'lemmma'" in err.message and "lemma" in err.hint
    err = error('find t = word where t.feats.Numbr = "Plur"')
    assert "feats.Number" in err.hint
    err = error('find t = word(sentence.speakr = "a")')
    assert "speaker" in err.hint


def test_unknown_variable_suggests():
    err = error('find verb = word where verbb.lemma = "go"')
    assert "unknown variable 'verbb'" in err.message and "verb" in err.hint


@pytest.mark.parametrize("text, tokens", [
    ('find t = word(form matches "^a") where t.node matches "1"', "regular expression needs a text value"),
    ('find t = word(form = 3)', "is text but 3 is a number"),
    ('find t = word(form = "a") where t.duration > 2 tokens', "does not apply"),
    ('find t = word where t.form = 20ms', "does not apply"),
    ('find a = word, b = word where a precedes b and distance(a, b) > 2 s', "does not apply"),
    ('find m = mention(first_mention = "yes")', "true or false"),
    ('find t = word(form matches "(")', "bad regular expression"),
])
def test_type_mistakes_are_explained(text, tokens):
    assert tokens in str(error(text))


@pytest.mark.parametrize("text, op, message, hint", [
    ("find t = word(form > 3)", ">", "text has no numeric order", "length(x)"),
    ("find t = word where t.form <= 3", "<=", "text has no numeric order", "length(x)"),
    ("find t = word where t.form = 3", "=", "is text but 3 is a number", 'write "3"'),
    ("find t = word where t.form != 3", "!=", "is text but 3 is a number", 'write "3"'),
    ("find t = word(form = true)", "=", "not true or false", None),
    ("find t = word where t.ord = \"3\"", "=", "is a number but '3' is text", "without quotes"),
    ("find m = mention where m.first_mention = 1", "=", "true or false", None),
])
def test_a_comparison_of_unlike_kinds_is_refused_at_the_comparison(text, op, message, hint):
    err = error(text)
    assert message in err.message, err.message
    assert (err.line, err.column) == (1, text.rindex(f" {op} ") + 2)
    if hint:
        assert hint in err.hint
    if op in ("<", "<=", ">", ">="):      # quoting the number would compare text by code point: never offered
        assert '"3"' not in str(err)


def test_an_unknown_attribute_is_suggested_from_the_layers_own():
    err = error("find m = mention where m.chain_lenght > 2")
    assert err.hint == "did you mean: chain_length?"
    err = error('find m = mention where m.typ = "person"')
    assert err.hint.startswith("did you mean: type")


def test_label_of_a_pair_needs_their_dependency_and_is_root_needs_edges():
    text = "find a = word, b = word where a precedes b show label(a, b)"
    err = error(text)
    assert "relates them by none" in err.message and err.column == text.index("label(") + 1
    assert "layer 'mention' has none" in error("find m = mention where m is root").message
    assert "bad regular expression" in error('find a = word, b = word where a depends on b as ~ "("').message
    c = run('find a = word, b = word where b governs a as ~ "^obl" show label(a, b)')
    assert c.query.output.items[0].expr.edges.name == "governs"


@pytest.mark.parametrize("where, related", [
    ("a precedes b", True),
    ("not a precedes b", False),
    ("a precedes b or a.lemma = \"x\"", False),
    ("a precedes b or b precedes a", True),
    ("(a precedes b or a.lemma = \"x\") and b inside a", True),
    ("not (a precedes b and b.lemma = \"y\")", False),
    ("a precedes b and not b.lemma = a.lemma", True),
])
def test_the_cross_product_guard_reads_not_and_or(where, related):
    text = f"find a = word, b = word where {where}"
    if related:
        run(text)
    else:
        err = error(text)
        assert "cross product" in err.message and "under `not`" in err.hint
        run(text + " allow cross product")


def test_relations_checked_against_layers():
    assert "same tree" in error("find a = word, b = phrase where a child of b allow cross product").message
    assert "needs a tree" in error("find a = mention, b = mention where a under b").message
    assert "no coreference" in error("find a = word, b = word where a same entity as b").message
    assert "no time stamps" in error("find a = mention, b = word where a during b").message
    assert "at depth" in error("find a = word, b = word where a child of b at depth 2").message
    assert "in time" in error("find a = word, b = word where a precedes b in time").message
    assert "unknown edge set" in error("find a = word, b = word where a depends on b via depp").message
    # a dependency relation needs both layers among the edge set's nodes, as `child of` needs a tree
    err = error("find a = word, b = mention where a depends on b")
    assert "layer 'mention' has none" in err.message and err.column == len("find a = word, b = mention where a ") + 1
    assert "has none" in error("find a = mention, b = word where a governs b").message


def test_cross_product_refused_unless_allowed():
    err = error('find a = word(upos = "VERB"), b = token(form = "um")')
    assert "cross product" in err.message and "allow cross product" in err.hint
    run('find a = word(upos = "VERB"), b = token(form = "um") allow cross product')
    run('find a = word, b = token where a.form = b.form')          # a join on values relates them


def test_without_variables_are_scoped():
    c = run('find v = word without s = word where s depends on v count')
    assert set(c.inner_layers[0]) == {"s"}
    assert "defined twice" in error("find v = word without v = word where v depends on v").message
    assert "unknown variable 's'" in error("find v = word without s = word where s depends on v show s.form").message


def test_readings_qualifier_needs_a_readings_layer():
    assert "alternative readings" in error("find a = word, b = word where a child of b in every reading").message
    run('find a = phrase, b = phrase where a under b in every reading')


def test_first_mention_forms():
    c = run("find m = mention(first mention)")
    assert isinstance(c.query.bindings[0].cond, ast.FirstMention)
    run("find m = mention where m is first mention")
    assert "coreference" in error("find t = word(first mention)").message


def test_edge_set_default_is_dep():
    c = run("find a = word, b = word where a depends on b")
    assert c.query.where.via == "dep"


def test_comparing_text_with_a_number_column_is_explained():
    assert "not comparable" in error("find a = word, b = word where a.form = b.node").message
