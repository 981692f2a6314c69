"""Grammar-aware query fuzzing: queries built from the grammar's pieces and the corpus's own
names, and the same queries broken by random edits.  Every outcome must be a result or a
StrataError that shows its place (the query with a caret); anything else is a defect.

The test suite runs a short campaign (tests/test_query_fuzz.py); the long one is
``python -m benchmarks.reliability --fuzz 100000``.  The corpus is the first document of the
open treebank's dev split (UD English GUM, read in place) with a time tier, a span table and
flat trees written from its own tokens, so that every kind of layer is there to be named.
"""
from __future__ import annotations

import traceback
from dataclasses import dataclass, field
from pathlib import Path

from hypothesis import strategies as st

#: the relation words of the grammar (querylang/grammar.lark, RELATION)
RELATIONS = ["shares time with", "same span as", "same entity as", "directly precedes", "directly follows",
             "child of", "parent of", "sibling of", "depends on", "antecedent of", "previous mention of",
             "met by", "overlapped by", "started by", "finished by", "inside", "contains", "overlaps",
             "precedes", "follows", "under", "above", "governs", "before", "after", "meets", "starts",
             "during", "finishes", "equals"]
#: relations of position that join any two layers with characters
LINKS = ["inside", "contains", "overlaps", "precedes", "follows", "same span as", "precedes", "inside"]
MODIFIERS = ["by at most 3 words", "by at least 1 tokens and at most 40 chars", "give or take 20 ms",
             "in the same sentence", "at depth 1", "at depth 1..3", 'as "nsubj"', 'as ~ "^obl"', "via enhanced",
             "in time", "by at most 2 s", "within 3"]
STRINGS = ['"NOUN"', '"VERB"', '"the"', '"nsubj"', '""', '"a \\"quoted\\" b"', '"é"', '"x y"', '"\\\\"',
           '"spoken"', '"sil"', '"person"']
REGEXES = ['"^N"', '"(a|b)"', '"["', '"("', '"a{2,"', '"*"', '"\\\\d+"', '"^$"', '"(?i)the"', '"\\\\"']
NUMBERS = ["0", "1", "2", "-1", "3.5", "100", "99999999999999999999999", "1e3", "0.000001"]
EXTRAS = ["text", "doc", "sentence", "start", "end", "duration", "words", "phrase", "node", "reading",
          "sentence.words", "doc.words", "sentence.sent_id", "conllu_id"]
FUNCTIONS = ["lower", "fold", "length"]
AGGREGATES = ["mean", "min", "max", "sum", "median", "stdev"]
NOISE = list("()[],.=<>!~\"'\\#-_ \t\n") + ["\x00", "é", "find", "where", "show", "count", "and", "or", "not",
                                              "per", "having", "order by", "limit", "sample", "in", "as", "is"]


@dataclass
class Vocabulary:
    """The names a query may use: layers (not edge sets) with their attributes and the
    attributes' types, and the edge sets."""
    layers: dict[str, dict[str, str]]
    edge_sets: list[str] = field(default_factory=list)

    @classmethod
    def of(cls, catalog) -> "Vocabulary":
        layers, edges = {}, []
        for name, info in catalog.layers().items():
            if info.kind == "edges":
                edges.append(name)
            else:
                layers[name] = {a: info.attrs[a].type for a in sorted(info.attrs)}
        return cls(layers, edges)


def queries(vocab: Vocabulary) -> st.SearchStrategy[str]:
    """Queries as the grammar builds them (mostly valid, some mistakes of names and kinds)."""
    layer_names = sorted(vocab.layers)

    @st.composite
    def build(draw) -> str:
        n = draw(st.integers(1, 3))
        names = draw(st.lists(st.sampled_from(["a", "b", "c", "w", "s", "x1"]), min_size=n, max_size=n,
                              unique=True))
        layers = [draw(st.sampled_from(layer_names + ["wrod", "enhanced"] if draw(st.integers(0, 9)) == 0
                                       else layer_names)) for _ in names]

        def attr_of(layer: str) -> str:
            own = sorted(vocab.layers.get(layer, {}))
            return draw(st.sampled_from(own if own and draw(st.integers(0, 4)) else own + EXTRAS))

        def literal(kind: str | None = None) -> str:
            if kind is not None and draw(st.integers(0, 5)):        # mostly of the attribute's own type
                return draw(st.sampled_from({"str": STRINGS, "int": NUMBERS[:6], "float": NUMBERS[:6],
                                             "bool": ["true", "false"]}.get(kind, STRINGS)))
            return draw(st.sampled_from(STRINGS + NUMBERS + ["true", "false", "20 ms", "2 words"]))

        def typed_condition(v: str) -> str:
            layer = layers[names.index(v)]
            own = vocab.layers.get(layer, {})
            if not own:
                return f"{v}.text != {literal('str')}"
            attr = draw(st.sampled_from(sorted(own)))
            op = draw(st.sampled_from(["=", "!=", "<", ">="] if own[attr] != "str" else ["=", "!=", "~"]))
            if op == "~":
                return f"{v}.{attr} ~ {draw(st.sampled_from(REGEXES))}"
            return f"{v}.{attr} {op} {literal(own[attr])}"

        def expr() -> str:
            k = draw(st.integers(0, 9))
            v = draw(st.sampled_from(names))
            path = f"{v}.{attr_of(layers[names.index(v)])}"
            if k < 6:
                return path
            if k < 8:
                return f"{draw(st.sampled_from(FUNCTIONS))}({path})"
            other = draw(st.sampled_from(names))
            return f"{draw(st.sampled_from(['distance', 'gap', 'label']))}({v}, {other})"

        def cond(depth: int) -> str:
            k = draw(st.integers(0, 11 if depth < 3 else 7))
            if k <= 2:
                right = literal() if draw(st.booleans()) else expr()
                return f"{expr()} {draw(st.sampled_from(['=', '!=', '<', '<=', '>', '>=']))} {right}"
            if k == 3:
                items = ", ".join(literal() for _ in range(draw(st.integers(0, 3))))
                return f"{expr()} {draw(st.sampled_from(['in', 'not in']))} [{items}]"
            if k == 4:
                return f"{expr()} ~ {draw(st.sampled_from(REGEXES))}"
            if k == 5:
                return f"{expr()} {draw(st.sampled_from(['is missing', 'is not missing']))}"
            if k in (6, 7):
                a, b = draw(st.sampled_from(names)), draw(st.sampled_from(names))
                mods = " ".join(draw(st.sampled_from(MODIFIERS)) for _ in range(draw(st.integers(0, 2))))
                return f"{a} {draw(st.sampled_from(RELATIONS))} {b} {mods}".rstrip()
            if k == 8:
                return f"{draw(st.sampled_from(names))} {draw(st.sampled_from(['is root', 'is first mention']))}"
            if k == 9:
                return f"not {cond(depth + 1)}"
            if k == 10:
                return f"({cond(depth + 1)})"
            join = draw(st.sampled_from([" and ", " or "]))
            return join.join(cond(depth + 1) for _ in range(draw(st.integers(2, 3))))

        bindings = []
        for v, layer in zip(names, layers):
            inner = ""
            if draw(st.integers(0, 3)) == 0:
                own = vocab.layers.get(layer) or {"form": "str"}
                attrs = [draw(st.sampled_from(sorted(own))) for _ in range(draw(st.integers(0, 2)))]
                inner = "(" + ", ".join(f"{a} = {literal(own.get(a))}" for a in attrs) + ")"
            bindings.append(f"{v} = {layer}{inner}")
        text = "find " + ", ".join(bindings)
        # each variable after the first tied to the one before by a relation of positions (most
        # of the time), so that most queries are not refused as a cross product
        terms = [f"{b} {draw(st.sampled_from(LINKS))} {a}" for a, b in zip(names, names[1:])
                 if draw(st.integers(0, 7))]
        if draw(st.integers(0, 2)):
            terms.append(typed_condition(draw(st.sampled_from(names))))
        if draw(st.integers(0, 2)) == 0:
            terms.append(cond(0))
        if terms:
            text += " where " + " and ".join(terms)
        if draw(st.integers(0, 9)) == 0:
            text += f" without z = {draw(st.sampled_from(layer_names))} where z {draw(st.sampled_from(RELATIONS))} {names[0]}"
        if draw(st.integers(0, 30)) == 0:
            text += " " + draw(st.sampled_from(["in the same reading", "in every reading", "allow cross product"]))
        k = draw(st.integers(0, 4))
        columns: list[str] = []
        if k == 1:
            shown = [expr() for _ in range(draw(st.integers(1, 3)))]
            named = [draw(st.booleans()) for _ in shown]
            text += " show " + ", ".join(f"{e} as c{i}" if n else e for i, (e, n) in enumerate(zip(shown, named)))
            columns = [f"c{i}" if n else e for i, (e, n) in enumerate(zip(shown, named))]
        elif k >= 2:
            aggs = []
            for i in range(draw(st.integers(1, 2))):
                a = draw(st.integers(0, 4))
                call = ["count", f"count distinct {expr()}", f"{draw(st.sampled_from(AGGREGATES))}({expr()})",
                        f"quantile({expr()}, 0.9)", "rate"][a]
                aggs.append(call)
                columns.append(call)
            text += " " + ", ".join(aggs)
            if draw(st.booleans()):
                text += " per " + ", ".join(expr() for _ in range(draw(st.integers(1, 2))))
            if draw(st.integers(0, 3)) == 0:
                text += f" having {draw(st.sampled_from(columns))} > {draw(st.sampled_from(NUMBERS))}"
        if columns and draw(st.integers(0, 2)) == 0:
            text += f" order by {draw(st.sampled_from(columns))} {draw(st.sampled_from(['asc', 'desc', '']))}".rstrip()
        elif k == 0 and draw(st.integers(0, 4)) == 0:
            text += f" order by {draw(st.sampled_from(['left', 'right']))}"
        if draw(st.integers(0, 6)) == 0:
            text += f" sample {draw(st.integers(0, 20))} seed {draw(st.integers(0, 9))}"
        if draw(st.integers(0, 3)) == 0:
            text += f" limit {draw(st.sampled_from(['0', '5', '99999999999999999999999']))}"
        return text

    return build()


def broken(vocab: Vocabulary) -> st.SearchStrategy[str]:
    """A grammar-built query after 1 to 4 random edits: a piece cut, a piece put in, a piece doubled."""
    @st.composite
    def edit(draw) -> str:
        text = draw(queries(vocab))
        for _ in range(draw(st.integers(1, 4))):
            i = draw(st.integers(0, len(text)))
            j = draw(st.integers(i, min(len(text), i + 8)))
            kind = draw(st.integers(0, 2))
            if kind == 0:
                text = text[:i] + text[j:]
            elif kind == 1:
                text = text[:i] + draw(st.sampled_from(NOISE)) + text[i:]
            else:
                text = text[:j] + text[i:j] + text[j:]
        return text
    return edit()


def any_query(vocab: Vocabulary) -> st.SearchStrategy[str]:
    """Built and broken queries, half and half, and now and then plain random text."""
    return st.one_of(queries(vocab), broken(vocab), st.text(max_size=40))


@dataclass
class Outcome:
    kind: str          # "result", "clean error" or "defect"
    detail: str = ""


#: messages of a limit met, which are about the run, not a place in the query
LIMIT_WORDS = ("time limit", "more memory than its limit")


def outcome(corpus, text: str, timeout: float = 5.0) -> Outcome:
    """Run ``text``; a result, a StrataError with its place, or a defect (anything else)."""
    from engine.errors import StrataError
    try:
        corpus.query(text, limit=20, timeout=timeout)
        return Outcome("result")
    except StrataError as e:
        if any(w in e.message for w in LIMIT_WORDS):
            return Outcome("clean error", "limit")
        if e.query is None or e.column is None:
            return Outcome("defect", f"no place: {e}")
        if "could not run on this corpus" in e.message and e.column == 1 and not text.startswith(" "):
            return Outcome("defect", f"a database error without its place: {e}")
        return Outcome("clean error", e.message.split(":")[0][:60])
    except Exception:          # noqa: BLE001 - the fuzzer's very purpose
        return Outcome("defect", traceback.format_exc(limit=6))


def fuzz_corpus(work: Path, gum_dev: Path):
    """The fuzzing corpus in ``work``: the first treebank document with tiers, spans and trees."""
    from engine import Corpus
    src = work / "one.conllu"           # the first document: the text up to the second "# newdoc"
    src.write_text("# newdoc" + gum_dev.read_text(encoding="utf-8").split("# newdoc")[1], encoding="utf-8")
    corpus = Corpus.create(work / "corpus")
    corpus.import_files([src], progress=False)
    doc = corpus.store.documents()[0].name
    rows = corpus.connect().execute("SELECT sent, form FROM token ORDER BY ord").fetchall()
    tiers, t = ["doc\ttier\tstart\tend\tlabel\n"], 0.5
    for k, (_, form) in enumerate(rows):
        tiers.append(f"{doc}\tspoken\t{t:.3f}\t{t + 0.2:.3f}\t{form.lower()}\n")
        for p, ch in enumerate(form[:3]):
            tiers.append(f"{doc}\tphones\t{t + 0.06 * p:.3f}\t{t + 0.06 * (p + 1):.3f}\t{ch}\n")
        t += 0.25
        if k % 7 == 6:
            tiers.append(f"{doc}\tpauses\t{t:.3f}\t{t + 0.3:.3f}\tsil\n")
            t += 0.35
    (work / "one.tiers.tsv").write_text("".join(tiers), encoding="utf-8")
    corpus.import_files([work / "one.tiers.tsv"], progress=False)
    spans = ["doc\tstart\tend\tlabel\n"] + [f"{doc}\t{10 * k}\t{10 * k + 6}\tperson\n" for k in range(30)]
    (work / "marks.spans.tsv").write_text("".join(spans), encoding="utf-8")
    corpus.import_files([work / "marks.spans.tsv"], anchor="chars", layer="marks", progress=False)
    sentences: dict[int, list[str]] = {}
    for sent, form in rows:
        sentences.setdefault(sent, []).append(form)
    trees = [f"# doc = {doc}\n"] + ["(S " + " ".join(
        f"(X {f.replace('(', '-LRB-').replace(')', '-RRB-')})" for f in forms) + ")\n" for forms in sentences.values()]
    (work / "flat.trees").write_text("".join(trees), encoding="utf-8")
    corpus.import_files([work / "flat.trees"], progress=False)
    return corpus
