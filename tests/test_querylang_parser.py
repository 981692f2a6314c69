"""Parser: the query text becomes the AST, and syntax errors point at the place."""
from __future__ import annotations

import pytest

from engine.errors import StrataError
from querylang import ast
from querylang.parser import parse, unquote


def test_bindings_conditions_and_show():
    q = parse('find np = phrase(label = "NP"),\n     um = token(form in ["um", "uh"])\n'
              'where um inside np\nshow np.text, um.form')
    assert [b.var for b in q.bindings] == ["np", "um"]
    assert q.bindings[0].layer == "phrase"
    assert q.bindings[0].cond == ast.Compare("=", ast.Path(("label",)), ast.Literal("NP"))
    assert q.bindings[1].cond == ast.InList(ast.Path(("form",)), (ast.Literal("um"), ast.Literal("uh")))
    assert q.where == ast.Relation("inside", ast.Path(("um",)), ast.Path(("np",)))
    assert isinstance(q.output, ast.Show)
    assert [i.label for i in q.output.items] == ["np.text", "um.form"]


def test_comma_inside_binding_means_and():
    q = parse('find s = word(deprel = "nsubj", upos = "PRON"), v = word where s depends on v count per v.lemma')
    assert isinstance(q.bindings[0].cond, ast.And) and len(q.bindings[0].cond.items) == 2
    assert q.output == ast.Aggregate((ast.AggItem(ast.AggCall("count"), "count"),),
                                     (ast.ShowItem(ast.Path(("v", "lemma")), "v.lemma"),))


def test_without_clause_and_count():
    q = parse('find v = word(upos = "VERB")\nwithout s = word(deprel = "nsubj") where s depends on v\ncount')
    assert len(q.withouts) == 1
    w = q.withouts[0]
    assert w.bindings[0].var == "s" and w.cond.name == "depends on"
    assert q.output == ast.Aggregate((ast.AggItem(ast.AggCall("count"), "count"),))


def test_units_functions_and_modifiers():
    q = parse('find a = mention, b = mention(type = "person") '
              'where a antecedent of b and distance(a, b) > 40 tokens '
              'show a.text, b.text, distance(a, b)')
    rel, cmp = q.where.items
    assert rel.name == "antecedent of"
    assert cmp.left == ast.Func("distance", "a", "b") and cmp.right == ast.Literal(40, "tokens")
    q = parse("find a = token, b = token where a meets b give or take 20ms and gap(a, b) >= 0.25 s")
    assert q.where.items[0].tolerance == ast.Literal(20, "ms")
    assert q.where.items[1].right == ast.Literal(0.25, "s")


def test_distance_bounds_tolerance_and_same_sentence():
    q = parse("find a = word, b = word where a precedes b by at most 1 word")
    assert (q.where.at_least, q.where.at_most) == (None, ast.Literal(1, "words"))
    q = parse("find a = word, b = word where a follows b by at least 2 tokens")
    assert (q.where.at_least, q.where.at_most) == (ast.Literal(2, "tokens"), None)
    # both bounds: one unit after the second number, or a unit after each, or two modifiers
    for text in ("by at least 2 and at most 5 chars", "by at least 2 chars and at most 5 chars",
                 "by at most 5 chars by at least 2 chars"):
        q = parse(f"find a = word, b = word where a precedes b {text} and a.form = \"x\"")
        rel = q.where.items[0]
        assert (rel.at_least, rel.at_most) == (ast.Literal(2, "chars"), ast.Literal(5, "chars")), text
    q = parse("find e = events, w = spoken where e after w in time by at most 0.1s in the same sentence")
    assert q.where.at_most == ast.Literal(0.1, "s") and q.where.same_sentence and q.where.in_time
    # `in the same sentence` on a relation, `in the same reading` on the query
    q = parse("find a = word, b = word where a precedes b in the same sentence in the same reading")
    assert q.where.same_sentence and q.qualifiers == {"same reading"}
    # `and` after a bound is the boolean `and` unless `at most` follows
    q = parse("find a = word, b = word where a precedes b by at least 1 word and at_most = 3")
    assert isinstance(q.where, ast.And) and q.where.items[0].at_least == ast.Literal(1, "words")


def test_within_is_refused_with_the_replacements():
    text = "find a = word, b = word where a precedes b within 3 words"
    with pytest.raises(StrataError) as e:
        parse(text)
    assert (e.value.line, e.value.column) == (1, text.index("within") + 1)
    assert "by at most 3 words" in e.value.hint and "give or take 20ms" in e.value.hint


def test_a_modifier_given_twice_is_refused_at_the_second():
    text = "find a = word, b = word where a precedes b by at most 3 words by at most 2 words"
    with pytest.raises(StrataError) as e:
        parse(text)
    assert e.value.column == text.rindex("by at most") + 1 and "given twice" in str(e.value)


def test_multiword_relations_and_qualifiers():
    q = parse('find a = phrase, b = phrase where a under b at depth 1..3 and a same  span\nas b '
              'and a overlaps b in time in the same reading allow cross product limit 7')
    under, same, over = q.where.items
    assert under.depth == (1, 3) and same.name == "same span as" and over.in_time
    assert q.qualifiers == {"same reading", "cross product"} and q.limit == 7


def test_dependency_label_and_edge_set():
    q = parse('find a = word, b = word where a depends on b as "nsubj" via parser.dep')
    assert q.where.label == ast.Literal("nsubj") and q.where.via == "parser.dep"


def test_feature_names_with_brackets_and_tests():
    q = parse('find t = word(feats.Number[psor] is not missing, not lemma matches "^a", misc.X is missing, '
              'first mention, lemma not in ["a"])')
    items = q.bindings[0].cond.items
    assert items[0] == ast.Missing(ast.Path(("feats", "Number[psor]")), negated=True)
    assert isinstance(items[1], ast.Not) and isinstance(items[1].item, ast.Matches)
    assert items[2] == ast.Missing(ast.Path(("misc", "X")))
    assert items[3] == ast.FirstMention(None)
    assert items[4].negated


def test_boolean_precedence_and_parentheses():
    q = parse('find a = token(form = "x" or form = "y" and not form = "z")')
    cond = q.bindings[0].cond
    assert isinstance(cond, ast.Or) and isinstance(cond.items[1], ast.And)
    q = parse('find a = token((form = "x" or form = "y") and form = "z")')
    assert isinstance(q.bindings[0].cond, ast.And)


def test_a_variable_may_be_named_like_a_unit_or_keyword_part():
    q = parse('find s = token, ms = token where s precedes ms')
    assert [b.var for b in q.bindings] == ["s", "ms"]


def test_string_escapes():
    assert unquote(r'"a\"b\\c\nd"') == 'a"b\\c\nd'
    q = parse(r'find w = token(form = "it\"s")')
    assert q.bindings[0].cond.right.value == 'it"s'


def test_aggregates_and_comments():
    q = parse("find w = token # every token\nmean(w.duration) per w.form")
    call = ast.AggCall("mean", ast.Path(("w", "duration")))
    assert q.output == ast.Aggregate((ast.AggItem(call, "mean(w.duration)"),),
                                     (ast.ShowItem(ast.Path(("w", "form")), "w.form"),))


@pytest.mark.parametrize("text, line, column, tokens", [
    ("find x token", 1, 8, '"="'),
    ("find x = token\nwhere x insde y", 2, 9, "relation"),
    ('find x = token(form = "a)', 1, 23, "quoted string"),
    ("find x = token where", 1, 21, "end of the query"),
    ('find x = token(form = "a"; drop table x)', 1, 26, "';'"),
    ("show x.form", 1, 1, '"find"'),
])
def test_syntax_errors_carry_line_column_and_expectations(text, line, column, tokens):
    with pytest.raises(StrataError) as info:
        parse(text)
    err = info.value
    assert (err.line, err.column) == (line, column)
    assert err.query == text
    assert tokens in str(err)


def test_caret_is_under_the_error():
    with pytest.raises(StrataError) as info:
        parse("find x = token\nwhere x insde y")
    shown = str(info.value).splitlines()
    assert shown[1] == "  where x insde y"
    assert shown[2] == "  " + " " * 8 + "^"


def test_empty_query():
    with pytest.raises(StrataError, match="empty query"):
        parse("   ")


@pytest.mark.parametrize("text, hint", [
    ('find w = token(form == "a")', "single ="),
    ("find w = token(form = 'a')", "double quotes"),
    ('find w = token(form = "a" && lemma = "b")', "and"),
])
def test_common_slips_get_a_hint(text, hint):
    with pytest.raises(StrataError) as info:
        parse(text)
    assert hint in (info.value.hint or "")
