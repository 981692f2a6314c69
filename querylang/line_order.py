"""``directly precedes`` with CoNLL-U empty nodes: the order of the file's lines.

An empty node ``8.1`` stands on the line after word 8 and before word 9 (and ``8.2`` after
``8.1``); it covers no character, so the order of characters cannot tell it from its
neighbours.  With an empty node on either side, ``a directly precedes b`` means that b's line
comes right after a's among the sentence's word and empty-node lines (multiword token ranges
are not nodes):

* word k, then empty node k.1;
* empty node k.i, then k.(i+1);
* empty node k.i, then word k+1 when there is no k.(i+1).

Between two words ``directly precedes`` keeps counting words: an empty node between them does
not part them, as empty nodes are not words (README).
"""
from __future__ import annotations

from querylang.catalog import LayerInfo
from querylang.sqltext import ident


def is_empty_layer(layer: LayerInfo) -> bool:
    """Whether the layer holds CoNLL-U empty nodes: a sequence with CoNLL-U IDs that is neither
    the words nor the surface tokens it is counted in."""
    return (layer.kind == "sequence" and "cid" in layer.attrs and layer.word_layer is not None
            and layer.name not in (layer.word_layer, layer.token_layer))


def is_word_layer(layer: LayerInfo) -> bool:
    return layer.name == layer.word_layer


def next_line(a: str, b: str, la: LayerInfo, lb: LayerInfo, dot: str) -> str:
    """SQL: b's line comes right after a's (one side, or both, empty nodes); ``dot`` is the
    parameter holding "." (the SQL text holds no literal)."""
    def _major(alias: str, empty: bool) -> str:
        cid = f"{alias}.{ident('cid')}"
        return f"TRY_CAST(split_part({cid}, {dot}, 1) AS BIGINT)" if empty else f"TRY_CAST({cid} AS BIGINT)"

    def _minor(alias: str) -> str:
        return f"TRY_CAST(split_part({alias}.{ident('cid')}, {dot}, 2) AS BIGINT)"

    same = f"{a}.{ident('sent')} = {b}.{ident('sent')}"
    ea, eb = is_empty_layer(la), is_empty_layer(lb)
    if not ea:          # word k, then k.1
        return f"({same} AND {_major(b, True)} = {_major(a, False)} AND {_minor(b)} = 1)"
    if eb:              # k.i, then k.(i+1)
        return f"({same} AND {_major(b, True)} = {_major(a, True)} AND {_minor(b)} = {_minor(a)} + 1)"
    # k.i, then word k+1, when k.i is the last empty node after word k
    e = "e_next"
    later = (f"SELECT 1 FROM {ident(la.name)} AS {e} WHERE {e}.{ident('sent')} = {a}.{ident('sent')} AND "
             f"{_major(e, True)} = {_major(a, True)} AND {_minor(e)} = {_minor(a)} + 1")
    return f"({same} AND {_major(b, False)} = {_major(a, True)} + 1 AND NOT EXISTS ({later}))"
