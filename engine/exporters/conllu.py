"""CoNLL-U out: the stored layers written back as CoNLL-U lines.

Lines are built and ordered by DuckDB (one query, streamed in record batches), so a
large corpus exports with bounded memory. Within a sentence: its verbatim comment
block, then for each word position its multiword line, its word line and its empty
nodes, then a blank line. A file imported and exported unchanged comes back
byte for byte.
"""
from __future__ import annotations

from typing import TextIO

from engine.errors import StrataError
from engine.store import Store

FORMAT = "conllu"


def _q(name: str) -> str:
    return '"' + name.replace('"', '""') + '"'


def export(store: Store, out: TextIO, layer_prefix: str = "") -> int:
    """Write every sentence of the layers under ``layer_prefix``; returns the sentence count."""
    L = (lambda n: f"{layer_prefix}.{n}") if layer_prefix else (lambda n: n)
    layers = store.layers()
    if L("word") not in layers or L("sentence") not in layers:
        known = sorted({n.rsplit(".", 1)[0] for n in layers if n.endswith(".word")})
        hint = f" (prefixes with CoNLL-U layers: {', '.join(known)})" if known else ""
        raise StrataError(f"no CoNLL-U layers {L('word')!r} and {L('sentence')!r} in this corpus{hint}")
    con = store.connect()
    # syntactic words (layer ``word``) give the word lines, surface tokens (``token``) the ranges
    tok, sent, word, empty = (_q(L(n)) for n in ("word", "sentence", "token", "empty"))
    f = "coalesce({}, '_')"
    token_line = ("cid || chr(9) || form || chr(9) || lemma || chr(9) || " + f.format("upos") + " || chr(9) || "
                  + f.format("xpos") + " || chr(9) || " + f.format("feats") + " || chr(9) || "
                  + f.format("CAST(head_num AS VARCHAR)") + " || chr(9) || " + f.format("deprel") + " || chr(9) || "
                  + f.format("deps") + " || chr(9) || " + f.format("misc"))
    parts = [
        f"SELECT sent AS s, -1 AS a, 0 AS b, 0 AS c, comments AS line FROM {sent} WHERE comments <> ''",
        f"SELECT sent, CAST(cid AS INTEGER), 1, 0, {token_line} FROM {tok}",
        f"SELECT sent, CAST(split_part(cid, '-', 1) AS INTEGER), 0, 0, cid || chr(9) || form || chr(9) || "
        f"mwt_fields || chr(9) || coalesce(misc, '_') FROM {word} WHERE mwt",
        f"SELECT sent, 2147483647, 0, 0, '' FROM {sent}",
    ]
    if L("empty") in layers and layers[L("empty")].rows:
        empty_line = token_line.replace(f.format("CAST(head_num AS VARCHAR)"), "'_'").replace(
            f.format("deprel"), "'_'")
        parts.append(f"SELECT sent, CAST(split_part(cid, '.', 1) AS INTEGER), 2, "
                     f"CAST(split_part(cid, '.', 2) AS INTEGER), {empty_line} FROM {empty}")
    sql = " UNION ALL ".join(parts) + " ORDER BY s, a, b, c"
    reader = con.sql(sql).to_arrow_reader(100_000)
    n = 0
    for batch in reader:
        lines = batch.column(4).to_pylist()
        out.write("\n".join(lines))
        out.write("\n")
        n += sum(1 for x in lines if x == "")
    con.close()
    return n
