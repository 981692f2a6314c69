"""The hit table of a listing -> SQL: where each node is, the shown values, and the keyword in
context, in the order the query asks for.

Definitions the SQL implements:

* The context: ``left`` holds up to N units of text before the hit's first character, ``hit``
  the text from its first to its last character, ``right`` up to N units after.  The units
  are surface tokens where the corpus has them (a contraction is one unit, as written), else
  the words of the first variable's layer.  By default the context stays inside the sentence
  that holds the hit's first character (``left``) and the one that holds its last character
  (``right``); ``cross_sentences`` lets it run on inside the document.
* ``order by left`` sorts by the left context's words (the text split at white space,
  case-blind), the word nearest the hit first; ``order by right`` by the right context's
  words, nearest first.  A list sorts before the lists it begins (no context comes first).
* After the keys of ``order by``, hits come in the order of the text: by first character,
  last character, then the node numbers.
* The hit's place on the recording: ``recording`` is the document attribute of that name
  (when the corpus has one: a manifest or ``--recording`` gave it), ``start`` and ``end`` the
  earliest start and latest end of the hit's variables that have times (empty when none has),
  so a player can be sent there.
"""
from __future__ import annotations

from querylang import ast
from querylang.catalog import LayerInfo
from querylang.outputs import CONTEXT_SIDES
from querylang.sqltext import DOC_VIEW, SENTENCE_VIEW, ident, one_line, to_seconds, with_


WHITE_SPACE = r"\s+"


def kwic_layer(checked) -> LayerInfo | None:
    """The layer whose units make up the keyword-in-context columns: surface tokens first
    (a contraction is one unit of context, as it is written)."""
    layers = checked.catalog.layers()
    first = next(iter(checked.layers.values()))
    for name in (first.token_layer, first.word_layer, first.name if first.kind == "sequence" else None, "token"):
        if name and name in layers and layers[name].kind == "sequence":
            return layers[name]
    return None


def place_columns(layer: LayerInfo) -> list[str]:
    """Stored columns that say where a node is, beyond its document, sentence and characters:
    its CoNLL-U ID (``cid``) where the layer has one, its time span where it has times."""
    return (["cid"] if "cid" in layer.attrs else []) + (["t_start", "t_end"] if layer.time else [])


def default_order(variables: list[str]) -> list[str]:
    """The order of the text: first character, last character, node numbers."""
    return ["_hs", "_he"] + [f"_id{i}" for i in range(len(variables))]


def value_order(order: tuple[ast.OrderItem, ...]) -> list[str]:
    """The user's keys that are values computed with the matches (``_o{k}``)."""
    return [f"_o{k} {'DESC' if o.descending else 'ASC'} NULLS LAST"
            for k, o in enumerate(order) if o.expr not in CONTEXT_SIDES]


def listing_statement(sb, checked, ctes: list[str], last: str, items: list[ast.ShowItem],
                      limit_sql: str, context: int, cross_sentences: bool,
                      window: tuple[str, str] | None, ranges: bool) -> tuple[str, list[str]]:
    """The SQL of the hit table after the matches (CTE ``last``) and its column names.

    ``window``: the parameters of ``lo <= doc < hi`` of a windowed statement; ``ranges``:
    whether the matches are joined by range relations (see the note at ``kw``).
    """
    q = checked.query
    variables = [b.var for b in q.bindings]
    by_context = any(o.expr in CONTEXT_SIDES for o in q.order)
    matches_order = ", ".join(value_order(q.order) + default_order(variables))
    if by_context:    # the context decides the order: every hit gets its context first
        ctes.append(f"l AS (SELECT * FROM {last})")
    else:
        ctes.append(f"l AS (SELECT * FROM {last} ORDER BY {matches_order}{limit_sql})")
    cols: list[str] = []
    names: list[str] = []
    joins: list[str] = []
    d = ident("documents")
    sentence = checked.catalog.layers().get(SENTENCE_VIEW)
    sentence_ids = sentence is not None and "sent_id" in sentence.attrs
    for i in range(len(variables)):
        joins.append(f"LEFT JOIN {d} AS t{i} ON t{i}.{ident('doc')} = l._doc{i}")
        if sentence_ids:
            joins.append(f"LEFT JOIN {ident(SENTENCE_VIEW)} AS st{i} ON st{i}.{ident('id')} = l._sent{i}")
    # the hit's place: the document and sentence of its first variable
    cols += [f"t0.{ident('name')}", f"st0.{ident('sent_id')}" if sentence_ids else "CAST(NULL AS VARCHAR)"]
    names += ["doc", "sentence"]
    if "recording" in checked.catalog.doc_attrs():
        joins.append(f"LEFT JOIN {ident(DOC_VIEW)} AS dr ON dr.{ident('doc')} = l._doc0")
        cols.append(f"dr.{ident('recording')}")
        names.append("recording")
    timed = [i for i, v in enumerate(variables) if "t_start" in place_columns(checked.layers[v])]
    if timed:           # least/greatest skip NULLs: the span of the variables that have times
        cols += [to_seconds(f"least({', '.join(f'l._t_start{i}' for i in timed)})"),
                 to_seconds(f"greatest({', '.join(f'l._t_end{i}' for i in timed)})")]
        names += ["start", "end"]
    for i, v in enumerate(variables):
        t, layer = f"t{i}", checked.layers[v]
        base = f"{t}.{ident('base')}"
        cols += [f"{t}.{ident('name')}", f"st{i}.{ident('sent_id')}" if sentence_ids else "CAST(NULL AS VARCHAR)"]
        names += [f"{v}.doc", f"{v}.sentence"]
        if "cid" in place_columns(layer):
            cols.append(f"l._cid{i}")
            names.append(f"{v}.conllu_id")
        cols += [f"substr({t}.{ident('text')}, CAST(l._start{i} - {base} + 1 AS BIGINT), "
                 f"CAST(l._end{i} - l._start{i} AS BIGINT))",
                 f"l._start{i} - {base}", f"l._end{i} - {base}"]
        names += [f"{v}.text", f"{v}.char_start", f"{v}.char_end"]
        if "t_start" in place_columns(layer):
            cols += [to_seconds(f"l._t_start{i}"), to_seconds(f"l._t_end{i}")]
            names += [f"{v}.start", f"{v}.end"]
        if layer.readings:
            cols.append(f"l._read{i}")
            names.append(f"{v}.reading")
        cols.append(f"l._id{i}")
        names.append(f"{v}.node")
    for k, item in enumerate(items):
        if item.label in names:          # e.g. "show a.text": already a column of the hit table
            continue
        cols.append(f"l._x{k}")
        names.append(item.label)
    ctes.append(_context_cte(sb, checked, context, cross_sentences or sentence is None,
                             window, bool(limit_sql) and not by_context, ranges))
    # the context columns are for reading: a line break in them (CRLF, LF or CR) is one space,
    # so a hit is one line in every format; `v.text` keeps the text as it is
    text0, base0 = f"t0.{ident('text')}", f"t0.{ident('base')}"
    context_cols = [
        one_line(sb, f"substr({text0}, CAST(l._ls - {base0} + 1 AS BIGINT), CAST(l._hs - l._ls AS BIGINT))"),
        one_line(sb, f"substr({text0}, CAST(l._hs - {base0} + 1 AS BIGINT), CAST(l._he - l._hs AS BIGINT))"),
        one_line(sb, f"substr({text0}, CAST(l._he - {base0} + 1 AS BIGINT), CAST(l._re - l._he AS BIGINT))")]
    cols += context_cols
    names += ["left", "hit", "right"]
    select_out = ", ".join(f"{c} AS c{k}" for k, c in enumerate(cols))
    head = with_(ctes, bool(sb.walk_ctes))
    if not by_context:
        order_out = ", ".join("l." + x for x in matches_order.split(", "))
        return f"{head} SELECT {select_out} FROM x AS l {' '.join(joins)} ORDER BY {order_out}", names
    # order by the context: the keys are computed beside the columns, the limit comes last
    keys, order_out = [], []
    for k, o in enumerate(q.order):
        direction = "DESC" if o.descending else "ASC"
        if o.expr in CONTEXT_SIDES:
            words = _words(sb, context_cols[0 if o.expr == "left" else 2])
            keys.append(f"{'list_reverse(' + words + ')' if o.expr == 'left' else words} AS _k{k}")
        else:
            keys.append(f"l._o{k} AS _k{k}")
        order_out.append(f"_k{k} {direction} NULLS LAST")
    keys += [f"l.{c} AS _t{n}" for n, c in enumerate(default_order(variables))]
    order_out += [f"_t{n}" for n in range(len(default_order(variables)))]
    outer = ", ".join(f"c{k}" for k in range(len(cols)))
    return (f"{head} SELECT {outer} FROM (SELECT {select_out}, {', '.join(keys)} FROM x AS l {' '.join(joins)}) "
            f"ORDER BY {', '.join(order_out)}{limit_sql}"), names


def _words(sb, text_sql: str) -> str:
    """The context's words, case-blind: the text split at white space (no words: an empty list)."""
    t = f"trim(lower({text_sql}))"
    empty, spaces = sb.param(""), sb.param(WHITE_SPACE)
    return f"(CASE WHEN {t} = {empty} THEN []::VARCHAR[] ELSE string_split_regex({t}, {spaces}) END)"


def _context_cte(sb, checked, context: int, unbounded: bool, window: tuple[str, str] | None,
                 few_hits: bool, ranges: bool) -> str:
    """CTE ``x``: the hits of ``l`` with the first (``_ls``) and last (``_re``) character of their
    context: N units before the hit's first and after its last character, cut at the sentence.

    The unit boundaries are found here, before any document text is joined: carrying whole
    texts through the ASOF joins' sorts made listings ~5x slower.
    """
    words = kwic_layer(checked)
    if words is None or context <= 0:
        return "x AS (SELECT l.*, l._hs AS _ls, l._he AS _re FROM l)"
    d = ident("documents")
    w = ident(words.name)
    n = sb.param(int(context) - 1)
    dcol, ocol, scol, ecol, icol = (ident(x) for x in ("doc", "ord", "start", "end", "id"))
    extra = ""
    if window is not None:
        # context words only from the window's documents; a subquery, not a CTE: see below
        lo, hi = window
        w = f"(SELECT {dcol}, {ocol}, {scol}, {ecol}, {icol} FROM {w} WHERE {dcol} >= {lo} AND {dcol} < {hi})"
    elif few_hits and (not ranges or sb.walk_ctes):
        # a few hits: look for context only among the words of their documents (every context
        # join tests the document), so the ASOF joins sort those words, not the whole layer;
        # `find t = token(upos = "VERB")` with limit 20 at 1e6 tokens: 116 -> 55 ms.
        # Not with range joins: DuckDB 2.0 plans no IEJoin in a statement that holds a
        # materialized CTE (this one, and `l` read twice), but a piecewise merge join:
        # benchmarks/queries/04 as a limit-20 listing at 1e6 tokens took 17 s that way, 0.3 s without
        extra = (f"kw AS MATERIALIZED (SELECT {dcol}, {ocol}, {scol}, {ecol}, {icol} FROM {w} "
                 f"WHERE {dcol} IN (SELECT DISTINCT _doc0 FROM l)), ")
        w = "kw"
    joins = [
        f"LEFT JOIN (SELECT {dcol}, {ident('base')}, {ident('length')} FROM {d}) AS b0 ON b0.{dcol} = l._doc0",
        f"ASOF LEFT JOIN {w} AS wl ON wl.{dcol} = l._doc0 AND l._hs >= wl.{ecol}",
        f"LEFT JOIN {w} AS wl2 ON wl2.{dcol} = l._doc0 AND wl2.{ocol} = wl.{ocol} - {n}",
        f"ASOF LEFT JOIN {w} AS wr ON wr.{dcol} = l._doc0 AND l._he <= wr.{scol}",
        f"LEFT JOIN {w} AS wr2 ON wr2.{dcol} = l._doc0 AND wr2.{ocol} = wr.{ocol} + {n}",
    ]
    left_start = f"(CASE WHEN wl.{icol} IS NULL THEN l._hs ELSE coalesce(wl2.{scol}, b0.{ident('base')}) END)"
    right_end = (f"(CASE WHEN wr.{icol} IS NULL THEN l._he "
                 f"ELSE coalesce(wr2.{ecol}, b0.{ident('base')} + b0.{ident('length')}) END)")
    if not unbounded:
        # the sentence holding the hit's first character (the last one starting at or before
        # it) and the one holding its last (the last one starting before the hit's end)
        s = ident(SENTENCE_VIEW)
        joins += [f"ASOF LEFT JOIN {s} AS sl ON sl.{dcol} = l._doc0 AND l._hs >= sl.{scol}",
                  f"ASOF LEFT JOIN {s} AS sr ON sr.{dcol} = l._doc0 AND l._he > sr.{scol}"]
        left_start = (f"(CASE WHEN sl.{icol} IS NOT NULL AND l._hs <= sl.{ecol} "
                      f"THEN least(greatest({left_start}, sl.{scol}), l._hs) ELSE {left_start} END)")
        right_end = (f"(CASE WHEN sr.{icol} IS NOT NULL AND l._he <= sr.{ecol} "
                     f"THEN greatest(least({right_end}, sr.{ecol}), l._he) ELSE {right_end} END)")
    return f"{extra}x AS (SELECT l.*, {left_start} AS _ls, {right_end} AS _re FROM l {' '.join(joins)})"
