"""How well a layer aligned: counts per class, the worst leaves in context, the refusal rule.

The per-leaf class lives in the layer's ``align`` column (and ``align_score``), so the
report of a stored corpus is a query; at import time the same report is made from
the staged rows, and a layer below :data:`MIN_ALIGNED` is refused with it.
"""
from __future__ import annotations

from dataclasses import dataclass, field

from engine.align.sequence import CLASSES, GOOD
from engine.errors import StrataError

#: Share of leaves (events not counted) that must align for a layer to be accepted.
MIN_ALIGNED = 0.90
#: How many of the worst leaves a report shows.
EXAMPLES = 8
#: Characters of context each side of an example.
CONTEXT = 30
#: Order of badness for examples: unaligned first, then fuzzy by score.
_RANK = {"unaligned": 0, "fuzzy": 1}


@dataclass
class LayerAlignment:
    layer: str
    counts: dict[str, int] = field(default_factory=dict)
    examples: list[dict] = field(default_factory=list)
    #: for a layer of timed words: per text layer, (nodes, nodes without a time)
    untimed: dict[str, tuple[int, int]] = field(default_factory=dict)

    @property
    def words(self) -> int:
        return sum(v for k, v in self.counts.items() if k != "event")

    @property
    def aligned(self) -> int:
        return sum(self.counts.get(k, 0) for k in GOOD)

    @property
    def share(self) -> float:
        return self.aligned / self.words if self.words else 1.0

    def text(self) -> str:
        parts = ", ".join(f"{self.counts.get(c, 0)} {c}" for c in CLASSES if self.counts.get(c))
        lines = [f"layer {self.layer}: {self.aligned} of {self.words} leaves aligned ({100 * self.share:.1f} %): "
                 f"{parts or 'no leaves'}"]
        for ex in self.examples:
            where = f" (line {ex['line']})" if ex.get("line") is not None else ""
            lines.append(f"  {ex['align']:<9} {ex['form']!r} in {ex['doc']!r}{where}: ...{ex['context']}...")
        if self.untimed:
            counts = ", ".join(f"{name} {missing} of {rows}" for name, (rows, missing) in self.untimed.items())
            lines.append(f"  without a time (no aligned timed word covers them: punctuation, or words the timed "
                         f"words did not align to): {counts}")
        return "\n".join(lines)


def _context(text: str, local: int) -> str:
    a, b = max(0, local - CONTEXT), min(len(text), local + CONTEXT)
    return (text[a:local] + "\u2038" + text[local:b]).replace("\n", " \u21b5 ")


def from_staged(layer: str, parts: list[tuple]) -> LayerAlignment:
    """Report of rows about to be written: ``parts`` = [(DocInfo, Arrow table, classes)]."""
    rep = LayerAlignment(layer)
    bad: list[tuple] = []
    for info, table, classes in parts:
        forms = table.column("form" if "form" in table.column_names else "label").to_pylist()
        starts = table.column("start").to_pylist()
        scores = table.column("align_score").to_pylist()
        lines = table.column("line").to_pylist() if "line" in table.column_names else [None] * len(forms)
        for i, c in enumerate(classes):
            if c is None:
                continue
            rep.counts[c] = rep.counts.get(c, 0) + 1
            if c in _RANK:
                bad.append((_RANK[c], scores[i] or 0.0, info, forms[i], starts[i], lines[i], c))
    bad.sort(key=lambda b: (b[0], b[1]))
    for _, score, info, form, start, line, c in bad[:EXAMPLES]:
        rep.examples.append({"align": c, "form": form, "doc": info.name, "line": line, "score": score,
                             "context": _context(info.text, (start or info.base) - info.base)})
    return rep


def check_alignment(layer: str, parts: list[tuple], accept: bool) -> str | None:
    """Refuse a layer aligned below :data:`MIN_ALIGNED` (a warning instead when ``accept``)."""
    rep = from_staged(layer, parts)
    if rep.share >= MIN_ALIGNED:
        return None
    message = (f"layer {layer!r} aligns only {100 * rep.share:.1f} % of its leaves to the text "
               f"(at least {100 * MIN_ALIGNED:.0f} % needed)")
    if accept:
        return f"{message}; kept because of --accept-poor-alignment\n{rep.text()}"
    raise StrataError(f"{message}; nothing was imported.\n{rep.text()}",
                      hint="check that the file belongs to these documents, or keep it anyway with "
                           "--accept-poor-alignment")


def align_report(store, layer: str | None = None) -> list[LayerAlignment]:
    """Per aligned layer of a stored corpus: counts per class and the worst leaves in context."""
    names = [n for n, info in store.layers().items() if "align" in info.attrs and info.kind != "edges"]
    if layer is not None:
        if layer not in store.layers():
            raise StrataError(f"no layer {layer!r} in the corpus")
        if layer not in names:
            raise StrataError(f"layer {layer!r} was not aligned to the text (it has no align column)")
        names = [layer]
    out = []
    con = store.connect()
    try:
        for name in names:
            rel = '"' + name.replace('"', '""') + '"'
            cols = {r[0] for r in con.execute(f"DESCRIBE {rel}").fetchall()}
            form = "form" if "form" in cols else "label"
            line = "n.line" if "line" in cols else "NULL"
            rep = LayerAlignment(name)
            for c, k in con.execute(f"SELECT align, count(*) FROM {rel} WHERE align IS NOT NULL GROUP BY align"
                                    ).fetchall():
                rep.counts[c] = int(k)
            rows = con.execute(f"""
                SELECT n.align, n.{form}, d.name, {line}, n.align_score, n.start - d.base, d.text
                FROM {rel} n JOIN documents d ON d.doc = n.doc
                WHERE n.align IN ('unaligned', 'fuzzy')
                ORDER BY n.align = 'fuzzy', n.align_score, n.id LIMIT {EXAMPLES}""").fetchall()
            for c, f, doc, ln, score, local, text in rows:
                rep.examples.append({"align": c, "form": f, "doc": doc, "line": ln, "score": score,
                                     "context": _context(text, int(local or 0))})
            if store.layer_props(name).get("time_words"):
                docs = f"SELECT DISTINCT doc FROM {rel}"
                for other, info in store.layers().items():
                    props = store.layer_props(other)
                    if info.kind != "sequence" or props.get("time_words") or props.get("time_axis"):
                        continue
                    orel = '"' + other.replace('"', '""') + '"'
                    rows_, missing = con.execute(f"SELECT count(*), count(*) FILTER (WHERE t_start IS NULL) "
                                                 f"FROM {orel} WHERE doc IN ({docs})").fetchone()
                    rep.untimed[other] = (int(rows_), int(missing))
            out.append(rep)
    finally:
        con.close()
    return out

